"""Atomic output: the target holds either the old or the new content, never a partial file."""
import json
import os
import stat
import sys

import numpy as np
import pytest

from bandgeo import atomic


def test_write_json_converts_numpy_and_nan(tmp_path):
    path = atomic.write_json(tmp_path / "r.json", {"a": np.float32(1.5), "b": np.arange(3), "c": float("nan")})
    assert json.loads(path.read_text()) == {"a": 1.5, "b": [0, 1, 2], "c": None}


def test_failed_write_keeps_old_content_and_leaves_no_temp(tmp_path):
    target = tmp_path / "keep.txt"
    atomic.write_text(target, "old")
    with pytest.raises(RuntimeError):
        with atomic.atomic_path(target) as tmp:
            tmp.write_text("half")
            raise RuntimeError("crash mid-write")
    assert target.read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.txt"]


def test_output_gets_umask_permissions_not_private(tmp_path):
    old = os.umask(0o022)
    try:
        path = atomic.write_text(tmp_path / "x.txt", "x")
    finally:
        os.umask(old)
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o644


@pytest.mark.skipif(not sys.platform.startswith("linux"),
                    reason="the umask is read from /proc/self/status on Linux only; elsewhere it is set and "
                           "restored under a lock, which this test would see")
def test_reading_the_umask_never_sets_it(tmp_path, monkeypatch):
    """The umask is shared by every thread; reading it by setting 0 and back (the portable way) lets a
    file another thread creates meanwhile be world-writable, and two such readers at once can leave it
    0 for good. On Linux it is read from /proc instead (proc(5), 'Umask' in /proc/[pid]/status)."""
    import threading

    old = os.umask(0o027)
    try:
        def no_setting(mask):
            raise AssertionError(f"os.umask({mask:o}) called while writing")

        monkeypatch.setattr(os, "umask", no_setting)
        paths, errors = [], []

        def writer(k):
            try:
                for i in range(20):
                    paths.append(atomic.write_text(tmp_path / f"t{k}-{i}.txt", "x"))
            except Exception as exc:  # pragma: no cover - reported below
                errors.append(exc)

        threads = [threading.Thread(target=writer, args=(k,)) for k in range(4)]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
    finally:
        monkeypatch.undo()
        os.umask(old)
    assert not errors, errors[:3]
    assert len(paths) == 80 and {stat.S_IMODE(os.stat(p).st_mode) for p in paths} == {0o640}
