"""The saved state of a result folder: the oriented-mesh cache (``specimen.npz``) and ``result.json``.

``bandgeo analyze`` writes them; the report, the review page and ``bandgeo report`` read them back, so
that none of them needs the original scan.
"""
from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import numpy as np

from .atomic import atomic_path, to_jsonable
from .errors import InputError


def save_specimen(folder: Path, specimen, segmentation=None) -> Path:
    """Write ``specimen.npz``: the oriented mesh (float32 mm, int32 faces), colours, band labels and the
    specimen's metadata as JSON, so report and review work without the original scan."""
    meta = {f.name: getattr(specimen, f.name) for f in dataclasses.fields(specimen)
            if f.name not in ("vertices_mm", "faces", "colors", "scan_vertex_index")}
    if specimen.sheet is not None and hasattr(specimen.sheet, "to_dict"):
        meta["sheet"] = specimen.sheet.to_dict()
    arrays = {
        "vertices_mm": np.asarray(specimen.vertices_mm, dtype=np.float32),
        "faces": np.asarray(specimen.faces, dtype=np.int32),
        "scan_vertex_index": np.asarray(specimen.scan_vertex_index, dtype=np.int64),
        "meta_json": np.frombuffer(json.dumps(to_jsonable(meta)).encode("utf-8"), dtype=np.uint8),
    }
    if specimen.colors is not None:
        arrays["colors"] = np.asarray(specimen.colors, dtype=np.uint8)
    if segmentation is not None:
        arrays["vertex_band"] = np.asarray(segmentation.vertex_band, dtype=np.int32)
    path = Path(folder) / "specimen.npz"
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            np.savez(fh, **arrays)
    return path


def load_specimen(folder: Path):
    """Read ``specimen.npz`` back into a :class:`bandgeo.scan.Specimen` (vertices in float64 mm)."""
    from .scan import Specimen, SpecimenSheet
    from .scan.types import ScaleReference

    path = Path(folder) / "specimen.npz"
    if not path.is_file():
        raise InputError(f"{str(folder)!r} holds no specimen.npz; run 'bandgeo analyze SCAN --out {folder}' first")
    try:
        with np.load(path, allow_pickle=False) as data:
            arrays = {k: data[k] for k in data.files}
    except Exception as exc:
        raise InputError(f"{path} is unreadable ({type(exc).__name__}); re-run 'bandgeo analyze' on the scan")
    meta = json.loads(arrays.pop("meta_json").tobytes().decode("utf-8"))
    names = {f.name for f in dataclasses.fields(Specimen)}
    kwargs = {k: v for k, v in meta.items() if k in names}
    if isinstance(kwargs.get("sheet"), dict):
        sheet_names = {f.name for f in dataclasses.fields(SpecimenSheet)}
        sheet = {k: v for k, v in kwargs["sheet"].items() if k in sheet_names}
        for key in ("up", "north"):
            if sheet.get(key) is not None:
                sheet[key] = np.asarray(sheet[key], dtype=float)
        if isinstance(sheet.get("scale"), dict):
            (p1, p2), length = sheet["scale"]["points"], sheet["scale"]["length"]
            sheet["scale"] = ScaleReference(np.asarray(p1, float), np.asarray(p2, float), float(length))
        kwargs["sheet"] = SpecimenSheet(**sheet)
    kwargs["scan_to_specimen"] = np.asarray(kwargs.get("scan_to_specimen"), dtype=float)
    kwargs["vertices_mm"] = arrays["vertices_mm"].astype(np.float64)
    kwargs["faces"] = arrays["faces"].astype(np.int64)
    kwargs["colors"] = arrays.get("colors")
    kwargs["scan_vertex_index"] = arrays["scan_vertex_index"]
    return Specimen(**kwargs)


def read_result(folder: Path) -> dict:
    """Read ``result.json`` of a result folder (one-line InputError when missing or corrupt)."""
    path = Path(folder) / "result.json"
    if not path.is_file():
        raise InputError(f"{str(folder)!r} holds no result.json; run 'bandgeo analyze SCAN --out {folder}' first")
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"{path} is not valid JSON ({exc.msg if hasattr(exc, 'msg') else exc}); "
                         f"re-run 'bandgeo analyze' to rebuild it")


