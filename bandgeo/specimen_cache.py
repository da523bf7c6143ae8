"""The specimen cache ``specimen.npz``: the oriented mesh as the analysis measured it (float64 mm), so
that report, review and re-runs work without the original scan. Part of :mod:`bandgeo.results`, which
re-exports it."""
from __future__ import annotations

import dataclasses
import json
from pathlib import Path
from typing import TYPE_CHECKING, Optional  # noqa: F401  (in string annotations)

import numpy as np

from .atomic import atomic_path, to_jsonable
from .errors import InputError

if TYPE_CHECKING:  # pragma: no cover - types only
    from .scan import Specimen
    from .segment import Segmentation

SPECIMEN_FILE = "specimen.npz"


def specimen_arrays(specimen: "Specimen", segmentation: "Optional[Segmentation]" = None) -> dict:
    """The arrays of ``specimen.npz``: vertices in float64 mm (the dtype the analysis measured with),
    int64 faces, colours, the scan vertex index, band labels and the metadata as JSON bytes."""
    skip = ("vertices_mm", "faces", "colors", "scan_vertex_index")
    meta = {f.name: getattr(specimen, f.name) for f in dataclasses.fields(specimen) if f.name not in skip}
    if specimen.sheet is not None:
        meta["sheet"] = specimen.sheet.to_dict()
    arrays = {
        "vertices_mm": np.asarray(specimen.vertices_mm, dtype=np.float64),
        "faces": np.asarray(specimen.faces, dtype=np.int64),
        "scan_vertex_index": np.asarray(specimen.scan_vertex_index, dtype=np.int64),
        "meta_json": np.frombuffer(json.dumps(to_jsonable(meta)).encode("utf-8"), dtype=np.uint8),
    }
    if specimen.colors is not None:
        arrays["colors"] = np.asarray(specimen.colors, dtype=np.uint8)
    if segmentation is not None:
        arrays["vertex_band"] = np.asarray(segmentation.vertex_band, dtype=np.int32)
    return arrays


def save_specimen(folder, specimen: "Specimen", segmentation: "Optional[Segmentation]" = None) -> Path:
    """Write ``specimen.npz`` atomically (see :func:`specimen_arrays`)."""
    path = Path(folder) / SPECIMEN_FILE
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            np.savez(fh, **specimen_arrays(specimen, segmentation))
    return path


def _sheet_from_json(data: dict):
    from .scan import SpecimenSheet
    from .scan.types import ScaleReference

    names = {f.name for f in dataclasses.fields(SpecimenSheet)}
    sheet = {k: v for k, v in data.items() if k in names}
    for key in ("up", "north"):
        if sheet.get(key) is not None:
            sheet[key] = np.asarray(sheet[key], dtype=float)
    if isinstance(sheet.get("scale"), dict):
        (p1, p2), length = sheet["scale"]["points"], sheet["scale"]["length"]
        sheet["scale"] = ScaleReference(np.asarray(p1, float), np.asarray(p2, float), float(length))
    return SpecimenSheet(**sheet)


def load_specimen(folder) -> "Specimen":
    """Read ``specimen.npz`` back into a :class:`bandgeo.scan.Specimen` (vertices in float64 mm; an
    older float32 cache is widened)."""
    from .scan import Specimen

    path = Path(folder) / SPECIMEN_FILE
    if not path.is_file():
        raise InputError(f"{str(folder)!r} holds no {SPECIMEN_FILE}; run 'bandgeo analyze SCAN --out {folder}' "
                         f"first")
    try:
        with np.load(path, allow_pickle=False) as data:
            arrays = {k: data[k] for k in data.files}
        meta = json.loads(arrays.pop("meta_json").tobytes().decode("utf-8"))
    except Exception as exc:
        raise InputError(f"{path} is unreadable ({type(exc).__name__}); re-run 'bandgeo analyze' on the scan"
                         ) from None
    names = {f.name for f in dataclasses.fields(Specimen)}
    kwargs = {k: v for k, v in meta.items() if k in names}
    if isinstance(kwargs.get("sheet"), dict):
        kwargs["sheet"] = _sheet_from_json(kwargs["sheet"])
    kwargs["scan_to_specimen"] = np.asarray(kwargs.get("scan_to_specimen"), dtype=float)
    kwargs["vertices_mm"] = arrays["vertices_mm"].astype(np.float64, copy=False)
    kwargs["faces"] = arrays["faces"].astype(np.int64, copy=False)
    kwargs["colors"] = arrays.get("colors")
    kwargs["scan_vertex_index"] = arrays["scan_vertex_index"]
    return Specimen(**kwargs)


