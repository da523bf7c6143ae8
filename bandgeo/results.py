"""The result folder: the one module that reads and writes it.

A result folder (``bandgeo analyze SCAN --out DIR``) holds

============================  ==========================================================  ==========
file                          what                                                        written by
============================  ==========================================================  ==========
``run.json``                  the run's parameters (:class:`RunParams`)                   analyze, segment
``specimen.npz``              the oriented mesh cache (float64 mm, as measured)           analyze, segment
``segmentation.json`` + npz   the automatic segmentation                                  analyze, segment
``review.json``               the review edits (``bandgeo.review.store``)                 review page
``result.json``               the findings (schema ``bandgeo.result/1``)                  analyze, rerun
``bands.csv`` ...             the report and exports                                      analyze, rerun
============================  ==========================================================  ==========

Every reader goes through this module: :class:`ResultFolder` loads the inputs of the downstream stages
(specimen, segmentation, review, parameters) and :class:`ResultSummary` is the typed view of
``result.json`` that the CLI, the batch compilation and the review page show.

Outputs are written on the side (a hidden staging folder inside the result folder) and swapped in at
the end (:meth:`ResultFolder.swap_in`), so a failed run leaves the folder as it was. A run interrupted
during the swap is finished (or cleaned up) by :meth:`ResultFolder.recover` on the next start.
"""
from __future__ import annotations

import contextlib
import dataclasses
import datetime as _dt
import json
import os
import shutil
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable, Optional

import numpy as np

from .atomic import to_jsonable, write_json
from .constants import DEFAULT_SEED
from .errors import InputError

from .resultview import Estimate, ResultSummary, _block  # noqa: F401  (re-exported: part of this API)
from .specimen_cache import SPECIMEN_FILE, load_specimen, save_specimen, specimen_arrays  # noqa: F401

if TYPE_CHECKING:  # pragma: no cover - types only
    from .scan import Specimen
    from .segment import Segmentation

RESULT_FILE = "result.json"
RUN_FILE = "run.json"
RUN_SCHEMA = "bandgeo.run/1"
SEGMENTATION_FILES = ("segmentation.json", "segmentation_labels.npz")
REVIEW_FILE = "review.json"
#: Outputs derived from result.json: removed when a new result.json lands without them, so that an
#: old report never sits beside a new result.
DERIVED_FILES = ("bands.csv", "spectra.csv", "report.html", "report.pdf", "labelled_mesh.ply",
                 "report.stale.html", "report.stale.pdf")
STALE_SUFFIX = ".stale"
_STAGING_PREFIX = ".staging-"
_SWAP_FILE = ".swap.json"


# ----------------------------------------------------------------------------------------------------
# Run parameters


def _floats(value, n: int) -> Optional[tuple]:
    if value is None:
        return None
    values = tuple(float(v) for v in np.asarray(value, dtype=float).ravel())
    if len(values) != n:
        raise InputError(f"expected {n} numbers but got {len(values)}")
    return values


@dataclass(frozen=True)
class RunParams:
    """Everything a run was asked to do (its own record, ``run.json``; never parsed out of a result).

    ``features`` and ``segmenter`` are filled by the run with what the automatic stages chose.
    """

    scan: Optional[str] = None
    units: Optional[str] = None
    up: Optional[tuple] = None
    north: Optional[tuple] = None
    strike_dip: Optional[tuple] = None
    sheet: Optional[str] = None
    scale: Optional[float] = None
    seed: int = DEFAULT_SEED
    keep_review: bool = True
    min_period_bands: Optional[float] = None
    max_period_bands: Optional[float] = None
    n_sim: int = 1000
    features: dict = field(default_factory=dict)
    segmenter: dict = field(default_factory=dict)

    @classmethod
    def make(cls, *, scan=None, units=None, up=None, north=None, strike_dip=None, sheet=None, scale=None,
             seed=DEFAULT_SEED, keep_review=True, min_period_bands=None, max_period_bands=None,
             n_sim=1000) -> "RunParams":
        """Normalise the keyword arguments of ``analyze`` (arrays to tuples, paths to text)."""
        sheet_path = sheet if isinstance(sheet, (str, os.PathLike)) or sheet is None else \
            getattr(sheet, "path", None)
        return cls(scan=None if scan is None else os.fspath(scan), units=units, up=_floats(up, 3),
                   north=_floats(north, 3), strike_dip=_floats(strike_dip, 2),
                   sheet=None if sheet_path is None else os.fspath(sheet_path),
                   scale=None if scale is None else float(scale), seed=int(seed), keep_review=bool(keep_review),
                   min_period_bands=None if min_period_bands is None else float(min_period_bands),
                   max_period_bands=None if max_period_bands is None else float(max_period_bands),
                   n_sim=int(n_sim))

    def with_stages(self, features: dict, segmenter: dict) -> "RunParams":
        return dataclasses.replace(self, features=dict(features), segmenter=dict(segmenter))

    def to_json(self) -> dict:
        return to_jsonable(dataclasses.asdict(self))

    @classmethod
    def from_json(cls, data: Any) -> "RunParams":
        """Read a ``run.json`` document (or an old result's ``provenance.parameters``); unknown keys are
        ignored and missing ones take their defaults."""
        if not isinstance(data, dict):
            raise InputError("the run parameters are not a JSON object; re-run 'bandgeo analyze'")
        data = data.get("params", data) if data.get("schema") == RUN_SCHEMA else data
        names = {f.name for f in dataclasses.fields(cls)}
        kwargs = {k: v for k, v in data.items() if k in names}
        for key in ("up", "north", "strike_dip"):
            if kwargs.get(key) is not None:
                kwargs[key] = tuple(float(v) for v in kwargs[key])
        try:
            return cls(**kwargs)
        except TypeError as exc:
            raise InputError(f"the run parameters are malformed ({exc}); re-run 'bandgeo analyze'") from None

    def document(self) -> dict:
        return {"schema": RUN_SCHEMA, "params": self.to_json()}


@dataclass(frozen=True)
class ReviewInfo:
    """What the review stage did: whether edits were applied, how many, and why not if not."""

    edited: bool = False
    n_edits: int = 0
    saved: Optional[str] = None
    notes: str = ""
    marked_stretches: list = field(default_factory=list)
    ignored: Optional[str] = None

    def to_json(self) -> dict:
        out = {"edited": self.edited, "n_edits": self.n_edits}
        if self.edited:
            out.update(saved=self.saved, notes=self.notes, marked_stretches=self.marked_stretches)
        if self.ignored:
            out["ignored"] = self.ignored
        return out


def read_json_or_none(path: Path) -> Optional[dict]:
    """The JSON object in ``path``, or None when it is missing or unreadable."""
    try:
        with open(path, encoding="utf-8") as fh:
            data = json.load(fh)
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) else None


# ----------------------------------------------------------------------------------------------------
# The folder


@dataclass
class FolderInputs:
    """What the downstream stages need from a folder: loaded once, then kept in memory."""

    specimen: "Specimen"
    segmentation: "Segmentation"
    review: Optional[dict]
    params: RunParams
    stage_seconds: dict = field(default_factory=dict)


class ResultFolder:
    """One specimen's result folder (see the module docstring for its files)."""

    def __init__(self, path):
        self.path = Path(os.path.expanduser(os.fspath(path)))

    def __repr__(self) -> str:
        return f"ResultFolder({str(self.path)!r})"

    def file(self, name: str) -> Path:
        return self.path / name

    def require(self) -> "ResultFolder":
        if not self.path.is_dir():
            raise InputError(f"{str(self.path)!r} is not a folder; give the folder written by 'bandgeo analyze'")
        return self

    # -- reading -----------------------------------------------------------------------------------
    def read_result(self) -> dict:
        """``result.json`` as a dict (one-line InputError when missing or corrupt)."""
        path = self.file(RESULT_FILE)
        if not path.is_file():
            raise InputError(f"{str(self.path)!r} holds no result.json; run 'bandgeo analyze SCAN --out "
                             f"{self.path}' first")
        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except (json.JSONDecodeError, UnicodeDecodeError) as exc:
            raise InputError(f"{path} is not valid JSON ({getattr(exc, 'msg', exc)}); re-run 'bandgeo analyze' "
                             f"to rebuild it") from None
        if not isinstance(data, dict):
            raise InputError(f"{path} does not hold a JSON object; re-run 'bandgeo analyze' to rebuild it")
        return data

    def summary(self) -> ResultSummary:
        return ResultSummary.from_json(self.read_result())

    def load_params(self) -> RunParams:
        """``run.json``; a folder written before it existed falls back on the result's recorded
        parameters (legacy, read once), then on the defaults."""
        data = read_json_or_none(self.file(RUN_FILE))
        if data is not None:
            return RunParams.from_json(data)
        legacy = read_json_or_none(self.file(RESULT_FILE)) or {}
        return RunParams.from_json(_block(_block(legacy.get("provenance")).get("parameters")))

    def load_specimen(self) -> "Specimen":
        return load_specimen(self.path)

    def load_segmentation(self) -> "Segmentation":
        from .segment import Segmentation

        for name in SEGMENTATION_FILES:
            if not self.file(name).is_file():
                raise InputError(f"{str(self.path)!r} holds no {name}; run 'bandgeo analyze SCAN --out "
                                 f"{self.path}' (or 'bandgeo segment') first")
        return Segmentation.load(self.path)

    def load_review(self) -> Optional[dict]:
        from .review.store import read_review

        return read_review(self.path)

    def load_inputs(self, review: bool = True) -> FolderInputs:
        """Specimen, automatic segmentation, review and parameters: the downstream's inputs. A folder
        with only a segmentation and the specimen cache (``bandgeo segment``) is enough."""
        self.require()
        self.recover()
        params = self.load_params()
        previous = read_json_or_none(self.file(RESULT_FILE)) or {}
        seconds = {k: v for k, v in (_block(_block(previous.get("provenance")).get("stage_seconds"))).items()
                   if k in ("load", "orient", "features", "segment")}
        return FolderInputs(specimen=self.load_specimen(), segmentation=self.load_segmentation(),
                            review=self.load_review() if review else None, params=params,
                            stage_seconds=seconds)

    # -- writing on the side -----------------------------------------------------------------------
    @contextlib.contextmanager
    def staging(self):
        """A hidden folder inside this one to write a run's outputs into; removed on failure."""
        self.path.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=_STAGING_PREFIX, dir=self.path))
        try:
            yield tmp
        except BaseException:
            shutil.rmtree(tmp, ignore_errors=True)
            raise

    def swap_in(self, staged: Path, *, remove: Iterable[str] = (), set_aside: Iterable[str] = ()) -> list[Path]:
        """Move every file of ``staged`` into the folder (``result.json`` last), remove the derived
        outputs named in ``remove`` that the run did not write, rename ``set_aside`` files aside.

        A journal (``.swap.json``) is written first, so that a swap interrupted half-way is finished
        by :meth:`recover` on the next start.
        """
        names = sorted((p.name for p in staged.iterdir() if p.is_file()), key=lambda n: n == RESULT_FILE)
        stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
        aside = {n: f"{Path(n).stem}.set-aside-{stamp}{Path(n).suffix}" for n in set_aside
                 if self.file(n).exists()}
        drop = [n for n in remove if n not in names and self.file(n).exists()]
        write_json(self.file(_SWAP_FILE), {"staged": staged.name, "files": names, "remove": drop,
                                           "aside": aside})
        self._finish_swap(staged, names, drop, aside)
        return [self.file(n) for n in names]

    def _finish_swap(self, staged: Path, names, drop, aside: dict) -> None:
        for old, new in aside.items():
            if self.file(old).exists():
                os.replace(self.file(old), self.file(new))
        for name in drop:
            with contextlib.suppress(FileNotFoundError):
                self.file(name).unlink()
        for name in names:
            if (staged / name).exists():
                os.replace(staged / name, self.file(name))
        now = _dt.datetime.now().timestamp()
        for name in names:  # one time stamp for the set: a report is never older than its result
            with contextlib.suppress(OSError):
                os.utime(self.file(name), (now, now))
        shutil.rmtree(staged, ignore_errors=True)
        with contextlib.suppress(FileNotFoundError):
            self.file(_SWAP_FILE).unlink()

    # -- recovery ----------------------------------------------------------------------------------
    def recover(self) -> list[str]:
        """Clean up after an interrupted run; returns what was done, one line each.

        - a swap that was under way (``.swap.json``) is finished;
        - staging folders and atomic-write temp files left by a killed process are removed;
        - a report older than ``result.json`` is renamed ``report.stale.html`` / ``.pdf``
          (rebuild it with ``bandgeo report DIR``).
        """
        if not self.path.is_dir():
            return []
        done = []
        journal = read_json_or_none(self.file(_SWAP_FILE))
        if journal is not None and isinstance(journal.get("staged"), str):
            staged = self.path / Path(journal["staged"]).name
            self._finish_swap(staged, journal.get("files") or [], journal.get("remove") or [],
                              journal.get("aside") or {})
            done.append("finished moving the outputs of an interrupted run into place")
        elif self.file(_SWAP_FILE).exists():
            self.file(_SWAP_FILE).unlink()
        for entry in self.path.iterdir():
            if entry.name.startswith(_STAGING_PREFIX) and entry.is_dir() and not _in_use(entry):
                shutil.rmtree(entry, ignore_errors=True)
                done.append(f"removed the unfinished outputs of an interrupted run ({entry.name})")
            elif entry.is_file() and _is_temp_file(entry.name) and not _in_use(entry):
                with contextlib.suppress(OSError):
                    entry.unlink()
                    done.append(f"removed the temporary file {entry.name} of an interrupted write")
        done.extend(self._mark_stale_report())
        return done

    def _mark_stale_report(self) -> list[str]:
        result = self.file(RESULT_FILE)
        if not result.is_file():
            return []
        done = []
        for name in ("report.html", "report.pdf"):
            path = self.file(name)
            if path.is_file() and path.stat().st_mtime < result.stat().st_mtime - 1e-3:
                target = path.with_name(f"{path.stem}{STALE_SUFFIX}{path.suffix}")
                os.replace(path, target)
                done.append(f"{name} was older than result.json (an interrupted run): renamed {target.name}; "
                            f"rebuild it with 'bandgeo report {self.path}'")
        return done


#: Temp files the atomic writers make (``.<stem>.<random><suffix>``) beside the targets.
_ATOMIC_STEMS = ("result", "review", "report", "bands", "spectra", "labelled_mesh", "specimen", "segmentation",
                 "segmentation_labels", "run", "batch_job", "swap")


def _is_temp_file(name: str) -> bool:
    if not name.startswith(".") or name == _SWAP_FILE:
        return False
    stem = name[1:].split(".", 1)[0]
    return stem in _ATOMIC_STEMS and name.count(".") >= 2


#: A temp file or staging folder touched in the last minutes may belong to a run still going (another
#: process writing the same folder); only older ones are removed.
_GRACE_SECONDS = 120.0


def _in_use(path: Path) -> bool:
    import time

    try:
        return time.time() - path.stat().st_mtime < _GRACE_SECONDS
    except OSError:
        return False


def write_outputs_on_the_side(folder, writer, *, remove: Iterable[str] = (), set_aside: Iterable[str] = ()):
    """Call ``writer(staging_folder)``, then swap what it wrote into ``folder``. A failure in
    ``writer`` leaves ``folder`` exactly as it was. Returns ``writer``'s value."""
    rf = ResultFolder(folder)
    with rf.staging() as staged:
        value = writer(staged)
        rf.swap_in(staged, remove=remove, set_aside=set_aside)
    return value


def save_segment_folder(folder, specimen: "Specimen", segmentation: "Segmentation", params: RunParams,
                        band_table=None) -> Path:
    """What ``bandgeo segment`` writes: the segmentation, the specimen cache and ``run.json`` (and
    ``bands.csv`` when a band table is given), on the side and swapped in. Such a folder opens in
    ``bandgeo review`` and re-runs with :meth:`ResultFolder.load_inputs`."""
    rf = ResultFolder(folder)

    def write(staged: Path) -> None:
        segmentation.save(staged)
        save_specimen(staged, specimen, segmentation)
        write_json(staged / RUN_FILE, params.document())
        if band_table is not None:
            band_table.to_csv(staged / "bands.csv")

    write_outputs_on_the_side(rf.path, write)
    return rf.path
