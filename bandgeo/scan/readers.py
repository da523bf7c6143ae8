"""Read a mesh file (PLY, OBJ, STL, OFF, glTF/GLB) into a ``Scan``, refusing broken files with one clear line.

The bytes are read once (hashed with SHA-256) and parsed by trimesh without processing, the fastest
general loader measured here (benchmarks/bench_load.py); plain binary triangle PLY files (the
usual scan export) are read straight from their blocks with numpy instead, giving the same arrays
several times faster. All cleanup happens later, vectorized, in :mod:`bandgeo.scan.clean`. The headers
and lines are checked first (:mod:`bandgeo.scan.formats`), because the parsers do not always notice a
truncated file, wrong counts or ragged lines.
"""
from __future__ import annotations

import contextlib
import gc
import hashlib
import io
import logging
import os
import re
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np

from .formats import (_check_obj, _check_off, _check_ply, _check_stl, _fail, _fast_binary_ply, _obj_bad_face,
                      _obj_bad_number)
from .types import Scan

#: Extensions read, lower case, with the trimesh file type used for each.
EXTENSIONS = {".ply": "ply", ".obj": "obj", ".stl": "stl", ".off": "off", ".glb": "glb", ".gltf": "gltf"}


def _check_path(path) -> Path:
    path = Path(os.path.expanduser(os.fspath(path)))
    name = str(path)
    if not path.exists():
        raise _fail(name, "no such file; check the path (quote it if it contains spaces)")
    if path.is_dir():
        raise _fail(name, "is a folder, not a mesh file; give the scan file itself (.ply, .obj, .stl, .off, .glb)")
    ext = path.suffix.lower()
    if ext not in EXTENSIONS:
        known = ", ".join(sorted(EXTENSIONS))
        raise _fail(name, f"unknown extension {path.suffix!r}; export the scan as one of {known}")
    return path


# --------------------------------------------------------------------------------------------- public
def load_scan(path) -> Scan:
    """Read a scan file into a :class:`Scan` (file coordinates and units, colours kept).

    Parameters
    ----------
    path : str or os.PathLike
        A ``.ply`` (ASCII or binary, either byte order), ``.obj``, ``.stl`` (ASCII or binary), ``.off``,
        ``.glb`` or ``.gltf`` file; the extension may be upper case.

    Returns
    -------
    Scan
        ``vertices (n, 3) float64``, ``faces (m, 3) int64``, ``colors (n, 3) uint8 | None``, the path,
        the SHA-256 of the bytes and the format read.

    Raises
    ------
    bandgeo.errors.InputError
        Missing, empty, truncated or malformed files; point clouds; face indices out of range.
    """
    with np.errstate(all="ignore"):  # overflow in a parser's casts is found below, never printed
        return _load_scan(path)


def _load_scan(path) -> Scan:
    path = _check_path(path)
    name = str(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise _fail(name, f"cannot be read ({exc.strerror}); check its permissions")
    if len(data) == 0:
        raise _fail(name, "is empty (0 bytes); copy or export the scan again")
    # hashing releases the GIL: it runs on a second thread while the file is parsed
    with ThreadPoolExecutor(max_workers=1) as pool:
        hashed = pool.submit(_sha256, data)
        ext = path.suffix.lower()
        file_type = EXTENSIONS[ext]
        if file_type == "ply":
            fmt = _check_ply(data, name)
        elif file_type == "stl":
            fmt = _check_stl(data, name)
        elif file_type == "off":
            fmt = _check_off(data, name)
        elif file_type == "obj":
            fmt = _check_obj(data, name)
        else:
            fmt = file_type
        fast = _fast_binary_ply(data) if fmt in ("ply-binary-le", "ply-binary-be") else None
        if fast is not None:
            vertices, faces, colors = fast
            mesh = None
        else:
            mesh = _parse(data, path, file_type, name)
            vertices, faces = _mesh_arrays(mesh, name)
        if len(vertices) == 0:
            raise _fail(name, "holds no vertices; is it really a mesh? Re-export the scan")
        if len(faces) == 0:
            raise _fail(name, f"holds points only ({len(vertices)} vertices, no faces); mesh the point cloud "
                              "first and export the faces")
        if faces.min() < 0 or faces.max() >= len(vertices):
            bad = int(np.count_nonzero((faces < 0) | (faces >= len(vertices))))
            raise _fail(name, f"{bad} face indices point outside the {len(vertices)} vertices (valid 0.."
                              f"{len(vertices) - 1}); the file is corrupt or its counts are wrong, re-export it")
        if mesh is not None:
            colors = _colors(mesh, len(vertices))
        hint = units_hint(data, fmt)
        if mesh is not None:
            del mesh
            gc.collect(1)  # trimesh objects hold reference cycles: free their arrays now (young gens: ms)
        del data
        digest = hashed.result()
    return Scan(vertices=vertices, faces=faces, colors=colors, path=str(path), sha256=digest, file_format=fmt,
                units_hint=hint)


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


_UNITS_RE = re.compile(r"\bunits?\s*(?:[:=]|in)?\s*(um|mm|cm|m|in)\b", re.IGNORECASE)


def units_hint(data: bytes, fmt: str):
    """A length unit named in the file's comments (``comment units mm``, ``# units: cm``), or None."""
    if fmt.startswith("ply"):
        end = data.find(b"end_header")
        lines = data[:end].decode("latin-1").splitlines()
        text = "\n".join(line for line in lines if line.startswith(("comment", "obj_info")))
    elif fmt in ("obj", "off", "stl-ascii"):
        lines = data[:8192].decode("latin-1").splitlines()
        text = "\n".join(line for line in lines if line.lstrip().startswith(("#", "solid")))
    elif fmt == "stl-binary":
        text = data[:80].decode("latin-1")
    else:
        return None
    match = _UNITS_RE.search(text)
    return match.group(1).lower() if match else None


def _mesh_arrays(mesh, name: str):
    """(n, 3) float64 vertices and (m, 3) int64 faces of a parsed mesh, refusing any other shape."""
    vertices = np.asarray(mesh.vertices)
    faces = np.asarray(mesh.faces)
    if vertices.ndim != 2 or (len(vertices) and vertices.shape[1] != 3):
        raise _fail(name, f"the parser found vertices of shape {vertices.shape} instead of (n, 3); the file is "
                          "corrupt, re-export the scan")
    if faces.size and (faces.ndim != 2 or faces.shape[1] != 3):
        raise _fail(name, f"the parser found faces of shape {faces.shape} instead of triangles; re-export the "
                          "scan with triangular faces")
    return (np.ascontiguousarray(vertices, dtype=np.float64).reshape(-1, 3),
            np.ascontiguousarray(faces, dtype=np.int64).reshape(-1, 3))


@contextlib.contextmanager
def _quiet_logger(name: str):
    """Silence a library's log for a while: trimesh logs parse failures with tracebacks (``failed to
    extract face_normals``), which Python prints to the terminal when no handler is set; the failure
    itself reaches the user as one line."""
    log = logging.getLogger(name)  # its child loggers (trimesh.exchange.stl, ...) inherit the level
    level = log.level
    log.setLevel(logging.CRITICAL + 1)
    try:
        yield
    finally:
        log.setLevel(level)


def _parse(data: bytes, path: Path, file_type: str, name: str):
    with _quiet_logger("trimesh"):
        return _parse_trimesh(data, path, file_type, name)


def _parse_trimesh(data: bytes, path: Path, file_type: str, name: str):
    import trimesh

    try:
        if file_type in ("obj", "gltf"):  # may refer to side files (materials, buffers) by relative path
            loaded = trimesh.load(str(path), file_type=file_type, process=False)
        else:
            loaded = trimesh.load(io.BytesIO(data), file_type=file_type, process=False)
        if isinstance(loaded, trimesh.Scene):  # glTF/GLB and multi-object OBJ: one mesh, transforms applied
            meshes = [g for g in loaded.dump() if hasattr(g, "faces")]
            loaded = meshes[0] if len(meshes) == 1 else (trimesh.util.concatenate(meshes) if meshes else
                                                         trimesh.PointCloud(np.zeros((0, 3))))
    except Exception as exc:  # the parsers raise many kinds; give the user one line
        bad = _obj_bad_number(data) if file_type == "obj" else None
        if bad is not None:
            raise _fail(name, f"OBJ line {bad[0]} is a vertex line holding something that is not a number "
                              f"({bad[1]!r}); the file is corrupt, re-export the scan")
        face = _obj_bad_face(data) if file_type == "obj" else None
        if face is not None:
            raise _fail(name, f"OBJ line {face[0]} is a face naming vertex {face[1]}, outside the {face[2]} "
                              "vertices (valid 1..n); the file is corrupt or truncated, re-export the scan")
        detail = " ".join(str(exc).split())[:160] or type(exc).__name__
        raise _fail(name, f"could not be read as {file_type.upper()} ({detail}); the file is corrupt or not "
                          f"a valid {file_type.upper()} file, export the scan again")
    if not hasattr(loaded, "faces"):
        n = len(getattr(loaded, "vertices", []))
        if n == 0:
            raise _fail(name, f"holds no vertices and no faces; is it really a {file_type.upper()} mesh? "
                              "Export the scan again")
        raise _fail(name, f"holds points only ({n} vertices, no faces); mesh the point cloud first and export "
                          "the faces")
    return loaded


def _colors(mesh, n: int):
    """Per-vertex RGB uint8 when the file had vertex colours (or a texture that can be sampled)."""
    visual = getattr(mesh, "visual", None)
    kind = getattr(visual, "kind", None)
    try:
        if kind == "vertex":
            colors = np.asarray(visual.vertex_colors)
        elif kind == "texture" and getattr(visual, "uv", None) is not None \
                and getattr(getattr(visual, "material", None), "image", None) is not None:
            colors = np.asarray(visual.to_color().vertex_colors)
        else:
            return None
    except Exception:  # a texture that cannot be sampled: no colours rather than no scan
        return None
    if colors.ndim != 2 or len(colors) != n or colors.shape[1] < 3:
        return None
    return np.ascontiguousarray(colors[:, :3], dtype=np.uint8)
