"""Read and save ``review.json``: atomic writes, one writer at a time, and a history of every save."""
from __future__ import annotations

import contextlib
import json
import os
import threading
import time
from pathlib import Path

from .. import atomic
from ..constants import REVIEW_SCHEMA
from ..errors import ReviewError
from .edits import utc_now, validate_edit

REVIEW_FILE = "review.json"
_locks: dict = {}
_locks_guard = threading.Lock()


def inside(folder, name: str) -> Path:
    """``folder/name``, refusing a name or a symlink that leads outside ``folder``.

    Raises
    ------
    ReviewError
        When the resolved path is not inside the folder.
    """
    base = Path(os.path.realpath(folder))
    if os.path.isabs(name) or any(part in ("..", "") for part in Path(name).parts) or "\\" in name:
        raise ReviewError(f"refused the path {name!r}: only files inside the specimen folder are used")
    path = base / name
    real = Path(os.path.realpath(path))
    if real.parent != base:
        raise ReviewError(f"{name} in {folder} is a link to {real}, outside the specimen folder; "
                          f"replace the link with the file itself")
    return path


def clean_temp_files(folder, min_age_s: float = 0.0) -> list:
    """Remove ``.review.*.json`` files left in ``folder`` by a save that was killed half way (the
    atomic writer's temporary files; the real ``review.json`` is never among them). Returns their names.

    Runs under the folder's write lock, so it never removes the temporary file of a save in progress.
    """
    folder = Path(folder)
    removed = []
    if not folder.is_dir():
        return removed
    with _folder_lock(folder):
        for path in folder.glob(".review.*.json"):
            try:
                if path.is_file() and not path.is_symlink():
                    if min_age_s and (time.time() - path.stat().st_mtime) < min_age_s:
                        continue
                    path.unlink()
                    removed.append(path.name)
            except OSError:
                pass
    return removed


def empty_review(specimen_id=None) -> dict:
    """A review with no edits yet."""
    return {"schema": REVIEW_SCHEMA, "specimen_id": specimen_id, "created_utc": utc_now(),
            "updated_utc": None, "edits": [], "history": []}


def _check(review, source: str) -> dict:
    if not isinstance(review, dict):
        raise ReviewError(f"{source}: expected a JSON object but got {type(review).__name__}; "
                          f"move the file aside and review again")
    schema = review.get("schema", REVIEW_SCHEMA)
    if schema != REVIEW_SCHEMA:
        raise ReviewError(f"{source}: expected schema {REVIEW_SCHEMA!r} but got {schema!r}; "
                          f"this file was not written by this version of bandgeo")
    edits = review.get("edits", [])
    if not isinstance(edits, list):
        raise ReviewError(f"{source}: expected 'edits' to be a list but got {type(edits).__name__}")
    history = review.get("history", [])
    if not isinstance(history, list):
        raise ReviewError(f"{source}: expected 'history' to be a list but got {type(history).__name__}")
    checked = []
    for number, edit in enumerate(edits):
        try:
            checked.append(validate_edit(edit))
        except ReviewError as exc:
            raise ReviewError(f"{source}: edit {number + 1}: {exc}; fix or remove that edit") from None
    out = dict(review)
    out.update(schema=REVIEW_SCHEMA, edits=checked, history=list(history))
    return out


def read_review(folder) -> dict | None:
    """Read ``folder/review.json``.

    Returns
    -------
    dict or None
        The review (``schema``, ``edits``, ``history``, times), or None when there is no review yet.

    Raises
    ------
    ReviewError
        When the file is malformed, with what is wrong and what to do.
    """
    path = inside(folder, REVIEW_FILE)
    if not path.exists():
        return None
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ReviewError(f"cannot read {path}: {exc}; check its permissions and encoding (UTF-8)") from None
    try:
        review = json.loads(text)
    except json.JSONDecodeError as exc:
        raise ReviewError(f"{path} is not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg}); "
                          f"fix it or move it aside and review again") from None
    except (ValueError, RecursionError) as exc:  # e.g. an integer of more than 4300 digits
        raise ReviewError(f"{path} holds a value JSON cannot read ({str(exc).splitlines()[0][:120]}); "
                          f"fix it or move it aside and review again") from None
    return _check(review, str(path))


@contextlib.contextmanager
def _folder_lock(folder: Path):
    """Serialise writers of one folder: a thread lock, plus an advisory lock across processes."""
    key = os.path.realpath(folder)
    with _locks_guard:
        lock = _locks.setdefault(key, threading.Lock())
    with lock:
        fd = None
        try:
            import fcntl
            fd = os.open(key, os.O_RDONLY)
            fcntl.flock(fd, fcntl.LOCK_EX)
        except (ImportError, OSError):  # no fcntl (Windows): the thread lock still holds in-process
            pass
        try:
            yield
        finally:
            if fd is not None:
                os.close(fd)  # closing releases the flock


def _key(edit: dict) -> str:
    return json.dumps(edit, sort_keys=True)


def save_review(folder, review: dict) -> dict:
    """Write ``review`` to ``folder/review.json`` atomically and add one entry to its history.

    The previous file stays intact until the new one is complete (temporary file, fsync, rename), and
    saves to the same folder run one at a time. The history entry records the UTC time, the number of
    edits before and after, and the edits added and removed since the previous save.

    Returns
    -------
    dict
        The review as written.
    """
    folder = Path(folder)
    if not folder.is_dir():
        raise ReviewError(f"{folder} is not a folder; give the analysed specimen folder")
    review = _check(review, "review")
    path = inside(folder, REVIEW_FILE)
    with _folder_lock(folder):
        for stale in folder.glob(".review.*.json"):  # left by a save that was killed (we hold the lock)
            try:
                if stale.is_file() and not stale.is_symlink():
                    stale.unlink()
            except OSError:
                pass
        old = read_review(folder) or empty_review(review.get("specimen_id"))
        before = {_key(e) for e in old["edits"]}
        after = {_key(e) for e in review["edits"]}
        now = utc_now()
        entry = {"time_utc": now, "action": "save", "edits_before": len(old["edits"]),
                 "edits_after": len(review["edits"]),
                 "added": [e for e in review["edits"] if _key(e) not in before],
                 "removed": [e for e in old["edits"] if _key(e) not in after]}
        out = {"schema": REVIEW_SCHEMA, "specimen_id": review.get("specimen_id", old.get("specimen_id")),
               "created_utc": old.get("created_utc") or now, "updated_utc": now, "saved": now}
        out.update({k: v for k, v in review.items() if k not in (*out, "history", "edits")})
        out.update(edits=review["edits"], history=old["history"] + [entry])
        atomic.write_json(path, out)
    return out
