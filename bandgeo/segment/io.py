"""Reading and writing a segmentation: ``segmentation.json`` (schema ``bandgeo.segmentation/1``) and
``segmentation_labels.npz`` (per-vertex class and band labels).

Plain files only: this module knows no data class (the data objects in :mod:`.model` call it), so the
two import in one direction. ``load_segmentation`` takes the class to build as an argument.
"""
from __future__ import annotations

import io
import json
from pathlib import Path

import numpy as np

from ..atomic import write_bytes, write_json
from ..constants import SEGMENTATION_SCHEMA
from ..errors import BandgeoError, InputError

JSON_NAME = "segmentation.json"
LABELS_NAME = "segmentation_labels.npz"


def save_segmentation(seg, folder) -> Path:
    """Write the two files of ``seg`` into ``folder`` (created if missing). Returns the JSON path."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    buf = io.BytesIO()
    np.savez_compressed(buf, vertex_class=np.asarray(seg.vertex_class, dtype=np.int8),
                        vertex_band=np.asarray(seg.vertex_band, dtype=np.int32))
    write_bytes(folder / LABELS_NAME, buf.getvalue())
    doc = {
        "schema": SEGMENTATION_SCHEMA,
        "n_vertices": int(len(seg.vertex_band)),
        "n_boundaries": len(seg.boundaries),
        "n_bands": seg.n_bands,
        "units": {"length": "mm", "angle": "rad"},
        "height_definition": "arc length along the centreline (from the lowest point of the mesh) where "
                             "the boundary's ring plane crosses it",
        "class_names": list(seg.class_names),
        "boundaries": [b.to_dict() for b in seg.boundaries],
        "axis": seg.axis.to_dict(),
        "resolution": seg.resolution,
        "warnings": list(seg.warnings),
        "params": seg.params,
        "labels_file": LABELS_NAME,
    }
    return write_json(folder / JSON_NAME, doc)


def load_segmentation(folder, cls):
    """Read a segmentation folder into ``cls`` (:class:`bandgeo.segment.Segmentation`).

    Raises InputError with one line if anything is missing or malformed.
    """
    from .axis import Centreline

    Boundary, Segmentation = cls.boundary_class(), cls
    folder = Path(folder)
    jpath, lpath = folder / JSON_NAME, folder / LABELS_NAME
    for p in (jpath, lpath):
        if not p.is_file():
            raise InputError(f"{str(p)!r} is missing; run 'bandgeo segment SCAN --out {folder}' to write it")
    try:
        doc = json.loads(jpath.read_text(encoding="utf-8"))
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"{jpath} is not valid JSON ({exc}); re-run 'bandgeo segment' to rebuild it") from None
    if not isinstance(doc, dict) or doc.get("schema") != SEGMENTATION_SCHEMA:
        got = doc.get("schema") if isinstance(doc, dict) else type(doc).__name__
        raise InputError(f"{jpath} has schema {got!r} but expected {SEGMENTATION_SCHEMA!r}; "
                         f"re-run 'bandgeo segment' to rebuild it")
    try:
        with np.load(lpath, allow_pickle=False) as z:
            vclass = np.asarray(z["vertex_class"], dtype=np.int8)
            vband = np.asarray(z["vertex_band"], dtype=np.int32)
    except Exception as exc:  # zip, key or format errors all mean the same to the user
        raise InputError(f"{lpath} is unreadable ({type(exc).__name__}); re-run 'bandgeo segment'") from None
    try:
        axis = Centreline.from_dict(doc["axis"])
        boundaries = [Boundary.from_dict(b) for b in doc["boundaries"]]
        class_names = [str(c) for c in doc["class_names"]]
        resolution = dict(doc.get("resolution") or {})
        warnings = [str(w) for w in doc.get("warnings") or []]
        params = dict(doc.get("params") or {})
    except (KeyError, TypeError, ValueError, BandgeoError) as exc:
        raise InputError(f"{jpath} is malformed ({type(exc).__name__}: {exc}); re-run 'bandgeo segment'") from None
    if len(vclass) != len(vband) or ("n_vertices" in doc and int(doc["n_vertices"]) != len(vband)):
        raise InputError(f"{lpath} labels {len(vband)} vertices but {jpath.name} says {doc.get('n_vertices')}; "
                         f"re-run 'bandgeo segment'")
    return Segmentation(boundaries=sorted(boundaries, key=lambda b: b.height_mm), axis=axis,
                        vertex_class=vclass, class_names=class_names, vertex_band=vband,
                        resolution=resolution, warnings=warnings, params=params)
