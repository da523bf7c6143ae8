"""Write a synthetic specimen: mesh (binary PLY, OBJ or STL by extension) and its truth JSON beside it."""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from ..atomic import atomic_path, write_json
from ..errors import ParameterError
from ..progress import report
from .specimen import SynthSpecimen

#: Mesh formats by lower-case extension.
FORMATS = {".ply": "ply", ".obj": "obj", ".stl": "stl"}

_CHUNK = 1 << 20


def truth_path(mesh_path: str | os.PathLike) -> Path:
    """The truth file that belongs to a mesh: ``<stem>.truth.json`` in the same folder."""
    mesh_path = Path(mesh_path)
    return mesh_path.with_name(mesh_path.stem + ".truth.json")


def write_specimen(spec: SynthSpecimen, path: str | os.PathLike, progress=None) -> dict:
    """Write the mesh to ``path`` (format from its extension, any case) and the truth file beside it.

    Parameters
    ----------
    spec : SynthSpecimen
    path : path-like
        ``.ply`` (binary little-endian, with vertex colours), ``.obj`` (text, ``v x y z r g b``) or
        ``.stl`` (binary, no colours).
    progress : callable or None

    Returns
    -------
    dict
        ``{"mesh": Path, "truth": Path, "format": str, "mesh_bytes": int, "truth_bytes": int}``.
    """
    path = Path(os.path.expanduser(os.fspath(path)))
    fmt = FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise ParameterError(f"expected a mesh path ending in .ply, .obj or .stl but got {str(path)!r}")
    if path.exists() and path.is_dir():
        raise ParameterError(f"{str(path)!r} is a folder; give a file name such as specimen.ply")
    writer = {"ply": _write_ply, "obj": _write_obj, "stl": _write_stl}[fmt]
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            writer(fh, spec, progress)
    truth = dict(spec.truth)
    truth["files"] = {"mesh": path.name, "format": fmt}
    tpath = write_json(truth_path(path), truth)
    return {"mesh": path, "truth": tpath, "format": fmt, "mesh_bytes": path.stat().st_size,
            "truth_bytes": tpath.stat().st_size}


def _chunks(n: int):
    for start in range(0, n, _CHUNK):
        yield start, min(n, start + _CHUNK)


def _write_ply(fh, spec: SynthSpecimen, progress) -> None:
    n, m = spec.n_vertices, spec.n_faces
    header = (
        "ply\nformat binary_little_endian 1.0\n"
        f"comment bandgeo synthetic specimen; units {spec.truth['units']}\n"
        f"element vertex {n}\n"
        "property float x\nproperty float y\nproperty float z\n"
        "property uchar red\nproperty uchar green\nproperty uchar blue\n"
        f"element face {m}\n"
        "property list uchar int vertex_indices\nend_header\n"
    )
    fh.write(header.encode("ascii"))
    vdt = np.dtype([("xyz", "<f4", 3), ("rgb", "u1", 3)])
    for a, b in _chunks(n):
        report(progress, "writing PLY vertices", a, n + m)
        block = np.empty(b - a, dtype=vdt)
        block["xyz"] = spec.vertices[a:b]
        block["rgb"] = spec.colors[a:b]
        fh.write(block.tobytes())
    fdt = np.dtype([("count", "u1"), ("idx", "<i4", 3)])
    for a, b in _chunks(m):
        report(progress, "writing PLY faces", n + a, n + m)
        block = np.empty(b - a, dtype=fdt)
        block["count"] = 3
        block["idx"] = spec.faces[a:b]
        fh.write(block.tobytes())


def _write_obj(fh, spec: SynthSpecimen, progress) -> None:
    fh.write(f"# bandgeo synthetic specimen; units {spec.truth['units']}\n".encode("ascii"))
    verts = spec.vertices.astype(np.float32).astype(np.float64)
    rgb = spec.colors.astype(np.float64) / 255.0
    total = spec.n_vertices + spec.n_faces
    for a, b in _chunks(spec.n_vertices):
        report(progress, "writing OBJ vertices", a, total)
        rows = np.column_stack([verts[a:b], rgb[a:b]])
        fh.write((("v %.9g %.9g %.9g %.4f %.4f %.4f\n" * (b - a)) % tuple(rows.ravel())).encode("ascii"))
    for a, b in _chunks(spec.n_faces):
        report(progress, "writing OBJ faces", spec.n_vertices + a, total)
        rows = spec.faces[a:b] + 1
        fh.write((("f %d %d %d\n" * (b - a)) % tuple(rows.ravel().tolist())).encode("ascii"))


def _write_stl(fh, spec: SynthSpecimen, progress) -> None:
    head = f"bandgeo synthetic specimen; units {spec.truth['units']}".encode("ascii")[:80]
    fh.write(head.ljust(80, b" "))
    fh.write(np.uint32(spec.n_faces).tobytes())
    sdt = np.dtype([("normal", "<f4", 3), ("tri", "<f4", (3, 3)), ("attr", "<u2")])
    verts = spec.vertices.astype(np.float32)
    for a, b in _chunks(spec.n_faces):
        report(progress, "writing STL", a, spec.n_faces)
        tri = verts[spec.faces[a:b]]
        normal = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
        length = np.linalg.norm(normal, axis=1, keepdims=True)
        normal = np.divide(normal, length, out=np.zeros_like(normal), where=length > 0)
        block = np.zeros(b - a, dtype=sdt)
        block["normal"] = normal
        block["tri"] = tri
        fh.write(block.tobytes())
