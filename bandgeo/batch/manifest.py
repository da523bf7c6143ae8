"""Which specimens a batch holds: a folder of scans, or a CSV of scan paths with sheet fields."""
from __future__ import annotations

import csv
import hashlib
import os
import re
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Optional

import numpy as np

from ..errors import InputError

#: Scan file extensions a batch folder is searched for (any case).
SCAN_EXTENSIONS = (".ply", ".obj", ".stl", ".off", ".glb")

#: Columns a manifest CSV may have; only ``scan`` is required.
CSV_COLUMNS = ("scan", "specimen_id", "units", "up", "north", "strike_deg", "dip_deg", "age_ma",
               "age_err_ma", "horizon", "locality")

_ID_OK = re.compile(r"^[A-Za-z0-9][A-Za-z0-9 ._+\-()]*$")


@dataclass
class SpecimenJob:
    """One specimen of a batch: the scan, its sheet, and the sheet fields given in a manifest.

    Attributes
    ----------
    specimen_id : str
        Name of the specimen's result folder ``out_dir/<specimen_id>/``.
    scan_path : Path
        The scan file (never modified).
    sheet_path : Path or None
        A ``<stem>.sheet.toml`` or ``<id>.sheet.toml`` found beside the scan.
    units : str or None
        Length unit of the scan file (``um, mm, cm, m, in``).
    up, north : (3,) float or None
        Way up and north in the scan frame.
    strike_deg, dip_deg : float or None
        Bedding attitude, degrees.
    age_ma, age_err_ma : float or None
        Age and its 1-sigma uncertainty, millions of years.
    horizon, locality : str or None
        Stratigraphic horizon and locality, used to group specimens in the compilation.
    source : str
        Where the job came from (``folder`` or ``<csv path>:<row>``).
    """

    specimen_id: str
    scan_path: Path
    sheet_path: Optional[Path] = None
    units: Optional[str] = None
    up: Optional[np.ndarray] = None
    north: Optional[np.ndarray] = None
    strike_deg: Optional[float] = None
    dip_deg: Optional[float] = None
    age_ma: Optional[float] = None
    age_err_ma: Optional[float] = None
    horizon: Optional[str] = None
    locality: Optional[str] = None
    source: str = "folder"
    extra: dict = field(default_factory=dict)

    @property
    def strike_dip(self) -> Optional[tuple[float, float]]:
        """``(strike_deg, dip_deg)`` when both are known, else None."""
        if self.strike_deg is None or self.dip_deg is None:
            return None
        return (float(self.strike_deg), float(self.dip_deg))

    def sheet_fields(self) -> dict:
        """The manifest's sheet fields as plain JSON values (None where not given)."""
        out = {}
        for key in ("units", "up", "north", "strike_deg", "dip_deg", "age_ma", "age_err_ma",
                    "horizon", "locality"):
            value = getattr(self, key)
            out[key] = None if value is None else (np.asarray(value, float).tolist()
                                                    if key in ("up", "north") else value)
        return out

    def to_dict(self) -> dict:
        """JSON-safe description of the job (paths as strings)."""
        out = asdict(self)
        out["scan_path"] = os.fspath(self.scan_path)
        out["sheet_path"] = None if self.sheet_path is None else os.fspath(self.sheet_path)
        out.update(self.sheet_fields())
        return out


def file_sha256(path: str | os.PathLike, chunk: int = 1 << 22) -> str:
    """SHA-256 of a file, read in 4 MB chunks (hex digest)."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        while True:
            block = fh.read(chunk)
            if not block:
                break
            digest.update(block)
    return digest.hexdigest()


def read_manifest(path: str | os.PathLike) -> list[SpecimenJob]:
    """Read the specimens of a batch from a folder of scans or a CSV manifest.

    Parameters
    ----------
    path : path
        A folder: every ``*.ply, *.obj, *.stl, *.off, *.glb`` in it (any case, not recursive) is a
        specimen named by its file stem; a ``<stem>.sheet.toml`` or ``<id>.sheet.toml`` beside it is
        its sheet. Or a CSV with a header row and the columns of :data:`CSV_COLUMNS` (only ``scan``
        required; relative scan paths are resolved against the CSV's folder; ``up``/``north`` as
        ``x,y,z`` in one quoted cell or separated by spaces or semicolons).

    Returns
    -------
    list of SpecimenJob
        In folder order (sorted by name) or CSV row order.

    Raises
    ------
    InputError
        The path is missing, holds no scans, a row is malformed, or two specimens share an id.
    """
    path = Path(os.path.expanduser(os.fspath(path)))
    if not path.exists():
        raise InputError(f"the batch input {os.fspath(path)!r} does not exist; give a folder of scans "
                         "or a CSV manifest")
    if path.is_dir():
        jobs = _read_folder(path)
    elif path.suffix.lower() == ".csv":
        jobs = _read_csv(path)
    else:
        raise InputError(f"expected a folder of scans or a .csv manifest but got {path.name!r}; "
                         "give one of those")
    if not jobs:
        raise InputError(f"no specimens found in {os.fspath(path)!r}; expected scans with extensions "
                         f"{', '.join(SCAN_EXTENSIONS)} (any case) or CSV rows")
    _check_unique(jobs)
    return jobs


def _find_sheet(scan: Path, specimen_id: str) -> Optional[Path]:
    for name in (f"{scan.stem}.sheet.toml", f"{specimen_id}.sheet.toml"):
        candidate = scan.parent / name
        if candidate.is_file():
            return candidate
    return None


def _read_folder(folder: Path) -> list[SpecimenJob]:
    scans = sorted(p for p in folder.iterdir()
                   if p.is_file() and p.suffix.lower() in SCAN_EXTENSIONS and not p.name.startswith("."))
    jobs = []
    for scan in scans:
        specimen_id = scan.stem
        _check_id(specimen_id, f"the scan {scan.name!r}")
        job = SpecimenJob(specimen_id=specimen_id, scan_path=scan.resolve(), source="folder")
        job.sheet_path = _find_sheet(scan, specimen_id)
        _fill_from_sheet(job)
        jobs.append(job)
    return jobs


def _fill_from_sheet(job: SpecimenJob) -> None:
    """Copy age, horizon and locality from the sheet (for grouping in the compilation only).

    The sheet itself is handed to the analysis, which applies the rest of it; these few fields are
    read here so that a batch folder needs no CSV.
    """
    if job.sheet_path is None:
        return
    from ..scan import read_sheet

    try:
        sheet = read_sheet(job.sheet_path)
    except InputError:
        # The analysis reads the sheet again and fails this one specimen with the same message,
        # while the rest of the batch goes on.
        return
    for key in ("age_ma", "age_err_ma", "horizon", "locality"):
        value = getattr(sheet, key, None)
        if value is not None and value != "":
            setattr(job, key, float(value) if key.startswith("age") else str(value))


def _read_csv(path: Path) -> list[SpecimenJob]:
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.reader(fh))
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the manifest {path.name!r} ({exc}); save it as UTF-8 CSV")
    rows = [r for r in rows if any(cell.strip() for cell in r) and not r[0].lstrip().startswith("#")]
    if not rows:
        return []
    header = [h.strip().lower() for h in rows[0]]
    unknown = [h for h in header if h not in CSV_COLUMNS]
    if "scan" not in header:
        raise InputError(f"the manifest {path.name!r} has no 'scan' column; expected a header row with "
                         f"columns among {', '.join(CSV_COLUMNS)}")
    if unknown:
        raise InputError(f"the manifest {path.name!r} has unknown column(s) {', '.join(unknown)}; "
                         f"expected columns among {', '.join(CSV_COLUMNS)}")
    jobs = []
    for number, row in enumerate(rows[1:], start=2):
        where = f"{path.name} row {number}"
        if len(row) > len(header):
            raise InputError(f"{where}: expected {len(header)} cells but got {len(row)}; quote cells "
                             "that contain commas (e.g. \"0,0,1\")")
        cells = {h: (row[i].strip() if i < len(row) else "") for i, h in enumerate(header)}
        jobs.append(_job_from_row(cells, path.parent, where))
    return jobs


def _job_from_row(cells: dict, base: Path, where: str) -> SpecimenJob:
    if not cells.get("scan"):
        raise InputError(f"{where}: the 'scan' cell is empty; give the scan's path")
    scan = Path(os.path.expanduser(cells["scan"]))
    if not scan.is_absolute():
        scan = base / scan
    if not scan.is_file():
        raise InputError(f"{where}: the scan {cells['scan']!r} does not exist; paths are relative to "
                         "the CSV's folder")
    specimen_id = cells.get("specimen_id") or scan.stem
    _check_id(specimen_id, where)
    job = SpecimenJob(specimen_id=specimen_id, scan_path=scan.resolve(), source=where)
    job.sheet_path = _find_sheet(scan, specimen_id)
    _fill_from_sheet(job)  # the CSV's cells, read next, take precedence over the sheet's
    units = cells.get("units", "").lower()
    if units:
        from ..constants import UNIT_TO_MM

        if units not in UNIT_TO_MM:
            raise InputError(f"{where}: expected units among {', '.join(UNIT_TO_MM)} but got {units!r}")
        job.units = units
    for key in ("up", "north"):
        if cells.get(key):
            setattr(job, key, _vector(cells[key], key, where))
    for key in ("strike_deg", "dip_deg", "age_ma", "age_err_ma"):
        if cells.get(key):
            setattr(job, key, _number(cells[key], key, where))
    if (job.strike_deg is None) != (job.dip_deg is None):
        raise InputError(f"{where}: give both strike_deg and dip_deg, or neither")
    if job.dip_deg is not None and not 0 <= job.dip_deg <= 90:
        raise InputError(f"{where}: expected dip_deg between 0 and 90 but got {job.dip_deg:g}")
    if job.age_err_ma is not None and job.age_err_ma < 0:
        raise InputError(f"{where}: expected age_err_ma >= 0 but got {job.age_err_ma:g}")
    for key in ("horizon", "locality"):
        if cells.get(key):
            setattr(job, key, cells[key])
    return job


def _number(text: str, key: str, where: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise InputError(f"{where}: expected a number for {key} but got {text!r}") from None
    if not np.isfinite(value):
        raise InputError(f"{where}: expected a finite number for {key} but got {text!r}")
    return value


def _vector(text: str, key: str, where: str) -> np.ndarray:
    parts = [p for p in re.split(r"[,; ]+", text.strip().strip("()[]")) if p]
    try:
        vec = np.array([float(p) for p in parts], dtype=float)
    except ValueError:
        vec = np.zeros(0)
    if vec.shape != (3,) or not np.all(np.isfinite(vec)) or np.linalg.norm(vec) == 0:
        raise InputError(f"{where}: expected {key} as three numbers like \"0,0,1\" but got {text!r}")
    return vec


def _check_id(specimen_id: str, where: str) -> None:
    if not _ID_OK.match(specimen_id) or specimen_id in (".", ".."):
        raise InputError(f"{where}: the specimen id {specimen_id!r} cannot name a folder; use letters, "
                         "digits, spaces and . _ - + ( )")


def _check_unique(jobs: list[SpecimenJob]) -> None:
    seen: dict[str, SpecimenJob] = {}
    for job in jobs:
        key = job.specimen_id.lower()  # folders on case-insensitive file systems would collide
        if key in seen:
            raise InputError(f"two specimens share the id {job.specimen_id!r} ({seen[key].source}, "
                             f"{job.source}); give each a distinct specimen_id")
        seen[key] = job
