"""Atomic file output: write to a temporary file beside the target, fsync, then rename.

A reader (or a crash) never sees a half-written file: either the old content or the new one.
"""
from __future__ import annotations

import contextlib
import json
import os
import tempfile
import threading
from pathlib import Path
from typing import Any, Iterator


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike, suffix: str | None = None) -> Iterator[Path]:
    """Yield a temporary path in the target's folder; on success rename it over ``path``.

    Use it for writers that insist on a file name (open3d, matplotlib, trimesh). The temporary file
    keeps the target's extension so that such writers pick the right format.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    suffix = path.suffix if suffix is None else suffix
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=suffix,
                               dir=path.parent)
    os.close(fd)
    tmp_path = Path(tmp)
    # mkstemp makes the file private (0600); give it the permissions an ordinary file would get.
    with contextlib.suppress(OSError):
        os.chmod(tmp_path, 0o666 & ~_umask())
    try:
        yield tmp_path
        with open(tmp_path, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp_path, path)
        _fsync_dir(path.parent)
    except BaseException:
        with contextlib.suppress(OSError):
            tmp_path.unlink()
        raise


_UMASK_LOCK = threading.Lock()


def _umask() -> int:
    """The process's umask. Read from /proc on Linux, without setting it: the umask is shared by all
    threads, and setting it to 0 for a moment (the portable way to read it) could make another thread's
    files world-writable or, with two readers at once, leave it 0 for good. Elsewhere it is set and
    restored under a lock (which guards against this module's own threads only)."""
    try:
        with open("/proc/self/status", "rb") as fh:
            for line in fh:
                if line.startswith(b"Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    with _UMASK_LOCK:
        mask = os.umask(0)
        os.umask(mask)
    return mask


def _fsync_dir(folder: Path) -> None:
    with contextlib.suppress(OSError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically and return the path."""
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(data)
    return Path(path)


def write_text(path: str | os.PathLike, text: str) -> Path:
    """Write UTF-8 ``text`` to ``path`` atomically and return the path."""
    return write_bytes(path, text.encode("utf-8"))


def to_jsonable(obj: Any) -> Any:
    """Convert numpy scalars/arrays, dataclasses, paths and NaN to JSON-safe values (NaN -> None)."""
    import dataclasses
    import math

    import numpy as np

    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {f.name: to_jsonable(getattr(obj, f.name)) for f in dataclasses.fields(obj)}
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        value = float(obj)
        return value if math.isfinite(value) else None
    if isinstance(obj, os.PathLike):
        return os.fspath(obj)
    return obj


def write_json(path: str | os.PathLike, obj: Any, indent: int = 2) -> Path:
    """Write ``obj`` as JSON atomically (numpy values converted, NaN written as null)."""
    text = json.dumps(to_jsonable(obj), indent=indent, sort_keys=False, allow_nan=False)
    return write_text(path, text + "\n")
