"""The review edit model: validate one edit, replay a list of edits onto boundaries, undo and redo.

An edit is a small JSON object with an ``op`` and the fields that op needs. Boundaries are named by
their ``id`` (never by list position); added boundaries get fresh ids above every id in use. The format
is documented in ``docs/review-file.md``.
"""
from __future__ import annotations

import copy
import math
import threading
from dataclasses import dataclass, field
from datetime import datetime, timezone
from typing import Iterable

from ..errors import ReviewError

#: op -> (required fields, optional fields) besides the common ones.
OPS = {
    "accept": (("id",), ()),
    "accept_stretch": (("s0_mm", "s1_mm"), ()),
    "reject": (("id",), ()),
    "merge": (("id",), ()),
    "move": (("id", "height_mm"), ("coalesce",)),
    "add": (("height_mm",), ("id",)),
    "split": (("height_mm",), ("id",)),
    "hiatus": (("s0_mm", "s1_mm"), ("mark",)),
    "uncertain": (("s0_mm", "s1_mm"), ("mark",)),
    "unmark": (("mark",), ()),
    "note": (("text",), ("id", "height_mm")),
}
COMMON = ("time_utc", "seq", "note")
MAX_TEXT = 2000
#: Ids and counters above this are refused (a boundary id is a small whole number).
MAX_ID = 2 ** 31 - 1
#: Two boundaries closer than this along the axis are taken as one (mm).
MIN_GAP_MM = 1e-3


def utc_now() -> str:
    """The current UTC time as ISO 8601 with a trailing ``Z`` (second resolution)."""
    return datetime.now(timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z")


def _fail(edit, message):
    op = edit.get("op") if isinstance(edit, dict) else None
    where = f"edit {op!r}" if isinstance(op, str) else "edit"
    raise ReviewError(f"{where}: {message}")


def _int(edit, key):
    value = edit[key]
    if isinstance(value, bool) or not isinstance(value, int) or value < 0:
        _fail(edit, f"expected {key!r} to be a non-negative whole number but got {_short(value)}")
    if value > MAX_ID:
        _fail(edit, f"expected {key!r} to be at most {MAX_ID} but got a number with {len(str(value))} digits")
    return int(value)


def _short(value, limit=40) -> str:
    """``repr(value)`` cut to ``limit`` characters, for one-line messages about bad input."""
    try:
        text = repr(value)
    except ValueError:  # an int too long to print
        return f"a number with more than {limit} digits"
    return text if len(text) <= limit else text[:limit - 1] + "…"


def _num(edit, key):
    value = edit[key]
    ok = not isinstance(value, bool) and isinstance(value, (int, float))
    try:
        ok = ok and math.isfinite(float(value))
    except OverflowError:  # an int too large for a float
        ok = False
    if not ok:
        _fail(edit, f"expected {key!r} to be a finite number of millimetres but got {_short(value)}")
    return float(value)


def _text(edit, key, allow_empty=True):
    value = edit[key]
    if not isinstance(value, str):
        _fail(edit, f"expected {key!r} to be text but got {type(value).__name__}")
    value = value.strip()
    if len(value) > MAX_TEXT:
        _fail(edit, f"{key!r} is {len(value)} characters long; keep it under {MAX_TEXT}")
    if not allow_empty and not value:
        _fail(edit, f"{key!r} is empty; write something or leave the edit out")
    return value


def validate_edit(edit) -> dict:
    """Check one edit's form and return a normalised copy.

    Parameters
    ----------
    edit : dict
        ``{"op": ..., ...}``; see ``OPS`` for the fields of each op. Common optional fields:
        ``time_utc`` (ISO 8601 text), ``seq`` (whole number), ``note`` (text).

    Returns
    -------
    dict
        The edit with numbers as float/int, text stripped, and unknown keys refused.

    Raises
    ------
    ReviewError
        One line saying which field is wrong and what was expected.
    """
    if not isinstance(edit, dict):
        raise ReviewError(f"expected an edit to be a JSON object like {{\"op\": \"reject\", \"id\": 3}} "
                          f"but got {type(edit).__name__}")
    op = edit.get("op")
    if not isinstance(op, str) or op not in OPS:
        raise ReviewError(f"unknown edit op {_short(op)}; expected one of {', '.join(sorted(OPS))}")
    required, optional = OPS[op]
    allowed = {"op", *required, *optional, *COMMON}
    unknown = sorted(_short(k, 30) for k in set(edit) - allowed)
    if unknown:
        _fail(edit, f"unexpected field(s) {', '.join(unknown[:5])}; allowed: {', '.join(sorted(allowed))}")
    missing = [k for k in required if k not in edit]
    if missing:
        _fail(edit, f"missing field(s) {', '.join(missing)}")
    out = {"op": op}
    for key in (*required, *optional, *COMMON):
        if key not in edit or (edit[key] is None and key not in required):
            continue
        if key in ("id", "mark", "seq"):
            out[key] = _int(edit, key)
        elif key in ("height_mm", "s0_mm", "s1_mm"):
            out[key] = _num(edit, key)
        elif key == "coalesce":
            if not isinstance(edit[key], bool):
                _fail(edit, f"expected 'coalesce' to be true or false but got {edit[key]!r}")
            out[key] = edit[key]
        elif key == "text":
            out[key] = _text(edit, key, allow_empty=False)
        elif key == "note":
            out[key] = _text(edit, key)
        elif key == "time_utc":
            value = _text(edit, key)
            try:
                datetime.fromisoformat(value.replace("Z", "+00:00"))
            except ValueError:
                _fail(edit, f"expected 'time_utc' like 2026-12-02T01:30:00Z but got {value!r}")
            out[key] = value
    if op in ("hiatus", "uncertain", "accept_stretch") and not out["s0_mm"] < out["s1_mm"]:
        _fail(edit, f"expected s0_mm < s1_mm but got {out['s0_mm']} and {out['s1_mm']}")
    return out


@dataclass
class BoundaryState:
    """One boundary as the review sees it: its id, height along the axis (mm) and what was done."""

    id: int
    height_mm: float
    auto: bool = True
    accepted: bool = False
    rejected: bool = False
    moved: bool = False
    merged: bool = False

    @property
    def status(self) -> str:
        if self.rejected:
            return "merged" if self.merged else "rejected"
        if not self.auto:
            return "added"
        if self.accepted:
            return "accepted"
        return "moved" if self.moved else "auto"


@dataclass
class ReplayState:
    """The outcome of replaying edits: every boundary ever seen, stretches marked, and notes."""

    boundaries: dict = field(default_factory=dict)   # id -> BoundaryState
    marks: dict = field(default_factory=dict)        # mark -> {"kind", "s0_mm", "s1_mm", "note"}
    notes: list = field(default_factory=list)        # {"text", "id"?, "height_mm"?, "time_utc"?}
    edits: list = field(default_factory=list)        # the normalised edits, with ids assigned

    def active(self) -> list:
        """Boundaries still in place, base to top."""
        return sorted((b for b in self.boundaries.values() if not b.rejected), key=lambda b: b.height_mm)

    def copy(self) -> "ReplayState":
        """An independent copy (much faster than ``copy.deepcopy`` on a thousand boundaries)."""
        return ReplayState(
            boundaries={k: BoundaryState(b.id, b.height_mm, b.auto, b.accepted, b.rejected, b.moved, b.merged)
                        for k, b in self.boundaries.items()},
            marks={k: dict(m) for k, m in self.marks.items()},
            notes=[dict(n) for n in self.notes],
            edits=[dict(e) for e in self.edits])

    def next_id(self) -> int:
        return max(self.boundaries, default=-1) + 1

    def next_mark(self) -> int:
        return max(self.marks, default=-1) + 1


def _check_height(edit, h, span, active, skip=None):
    lo, hi = span
    if not lo <= h <= hi:
        _fail(edit, f"height {h:.4g} mm is outside the growth axis ({lo:.4g} to {hi:.4g} mm); "
                    f"pick a height on the specimen")
    for b in active:
        if b.id != skip and abs(b.height_mm - h) < MIN_GAP_MM:
            _fail(edit, f"height {h:.4g} mm is on boundary {b.id}; pick another height")


def replay(base: Iterable, edits: Iterable, span: tuple) -> ReplayState:
    """Replay ``edits`` in order onto the automatic boundaries.

    Parameters
    ----------
    base : iterable of (id, height_mm)
        The automatic boundaries.
    edits : iterable of dict
        Edits in the order they were made (validated here).
    span : (float, float)
        The growth axis range in mm; added or moved boundaries must lie in it.

    Raises
    ------
    ReviewError
        When an edit does not fit the boundaries (unknown id, height off the axis, ...).
    """
    state = ReplayState()
    for bid, h in base:
        state.boundaries[int(bid)] = BoundaryState(int(bid), float(h))
    for number, raw in enumerate(edits):
        try:
            apply_one(state, validate_edit(raw), span)
        except ReviewError as exc:
            raise ReviewError(f"edit {number + 1}: {exc}") from None
    return state


def apply_one(state: ReplayState, edit: dict, span: tuple) -> dict:
    """Apply one validated edit to ``state`` in place; return it with any new id filled in."""
    op = edit["op"]
    if op in ("accept", "reject", "merge", "move"):
        b = state.boundaries.get(edit["id"])
        if b is None:
            _fail(edit, f"there is no boundary {edit['id']}; refresh the page or check the review file")
        if op == "accept":
            b.rejected = b.merged = False
            b.accepted = True
        elif b.rejected:
            _fail(edit, f"boundary {b.id} is already removed; accept it first to restore it")
        elif op in ("reject", "merge"):
            b.rejected, b.merged, b.accepted = True, op == "merge", False
        else:
            _check_height(edit, edit["height_mm"], span, state.active(), skip=b.id)
            b.height_mm, b.moved = edit["height_mm"], True
    elif op == "accept_stretch":
        picked = [b for b in state.active() if b.auto and edit["s0_mm"] <= b.height_mm <= edit["s1_mm"]]
        if not picked:
            _fail(edit, f"no boundary in place lies in {edit['s0_mm']:.4g}-{edit['s1_mm']:.4g} mm; "
                        f"pick a stretch with boundaries in it")
        for b in picked:
            b.accepted = True
    elif op in ("add", "split"):
        _check_height(edit, edit["height_mm"], span, state.active())
        if "id" not in edit:
            edit = {**edit, "id": state.next_id()}
        elif edit["id"] in state.boundaries:
            _fail(edit, f"boundary id {edit['id']} is already used; leave 'id' out to get a new one")
        state.boundaries[edit["id"]] = BoundaryState(edit["id"], edit["height_mm"], auto=False)
    elif op in ("hiatus", "uncertain"):
        lo, hi = span
        if edit["s1_mm"] < lo or edit["s0_mm"] > hi:
            _fail(edit, f"the stretch {edit['s0_mm']:.4g}-{edit['s1_mm']:.4g} mm misses the growth axis "
                        f"({lo:.4g} to {hi:.4g} mm)")
        if "mark" not in edit:
            edit = {**edit, "mark": state.next_mark()}
        elif edit["mark"] in state.marks:
            _fail(edit, f"mark {edit['mark']} is already used; leave 'mark' out to get a new one")
        state.marks[edit["mark"]] = {"mark": edit["mark"], "kind": op, "s0_mm": edit["s0_mm"],
                                     "s1_mm": edit["s1_mm"], "note": edit.get("note", "")}
    elif op == "unmark":
        if state.marks.pop(edit["mark"], None) is None:
            _fail(edit, f"there is no mark {edit['mark']}")
    elif op == "note":
        if "id" in edit and edit["id"] not in state.boundaries:
            _fail(edit, f"there is no boundary {edit['id']} to attach the note to")
        state.notes.append({k: edit[k] for k in ("text", "id", "height_mm", "time_utc") if k in edit})
    state.edits.append(edit)
    return edit


class ReviewSession:
    """The edits of one review in progress, with undo and redo; safe to share between threads.

    Parameters
    ----------
    base : list of (id, height_mm)
        The automatic boundaries.
    span : (float, float)
        Growth axis range in mm.
    edits : list of dict, optional
        Edits already saved (from ``review.json``); undoing one removes it at the next save, and the
        file's history keeps a record of it.
    """

    def __init__(self, base, span, edits=()):
        self.base = [(int(i), float(h)) for i, h in base]
        self.span = (float(span[0]), float(span[1]))
        self._lock = threading.RLock()
        self._state = replay(self.base, list(edits), self.span)
        self._redo: list = []
        self._saved = copy.deepcopy(self._state.edits)
        self._seq = max((e.get("seq", -1) for e in self._state.edits), default=-1) + 1

    @property
    def edits(self) -> list:
        with self._lock:
            return [dict(e) for e in self._state.edits]  # edits are flat: a shallow copy each is enough

    @property
    def state(self) -> ReplayState:
        with self._lock:
            return self._state.copy()

    @property
    def dirty(self) -> bool:
        with self._lock:
            return self._state.edits != self._saved

    def push(self, edit) -> dict:
        """Validate ``edit`` against the current boundaries and apply it; nothing changes on error.

        A ``move`` with ``"coalesce": true`` on the same boundary as the previous move replaces that
        move, so that a run of key presses is one step to undo.
        """
        edit = validate_edit(edit)
        with self._lock:
            edits = self._state.edits
            coalesce = edit.pop("coalesce", False)
            if (coalesce and edits and edits[-1]["op"] == "move" and edits[-1]["id"] == edit.get("id")
                    and edits[-1] not in self._saved):
                trial_edits = edits[:-1]
            else:
                trial_edits = edits
            edit.setdefault("time_utc", utc_now())
            edit["seq"] = self._seq
            trial = replay(self.base, trial_edits, self.span)
            done = apply_one(trial, edit, self.span)
            self._state, self._redo, self._seq = trial, [], self._seq + 1
            return done

    def undo(self) -> bool:
        """Take back the last edit made in this session; False when there is nothing to undo."""
        with self._lock:
            if not self._state.edits:
                return False
            edits = self._state.edits
            self._redo.append(edits[-1])
            self._state = replay(self.base, edits[:-1], self.span)
            return True

    def redo(self) -> bool:
        """Re-apply the last undone edit; False when there is nothing to redo."""
        with self._lock:
            if not self._redo:
                return False
            edit = self._redo.pop()
            trial = replay(self.base, self._state.edits, self.span)
            apply_one(trial, edit, self.span)
            self._state = trial
            return True

    def can_undo(self) -> bool:
        with self._lock:
            return bool(self._state.edits)

    def can_redo(self) -> bool:
        with self._lock:
            return bool(self._redo)

    def mark_saved(self, edits=None) -> None:
        with self._lock:
            self._saved = copy.deepcopy(self._state.edits if edits is None else edits)
