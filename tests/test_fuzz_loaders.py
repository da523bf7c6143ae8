"""Seeded fuzz test of the loaders (issue 15, item 8): byte-level mutations of small valid files.

Each mutated file goes through its public loader (for meshes ``load_scan`` then ``prepare``). Accepted
outcomes: it loads, or it is refused with a ``bandgeo.errors.BandgeoError`` of one line. Anything else
(another exception, a numeric warning that would reach the terminal) fails the test and names the seed
and mutation, so the case can be replayed. A hang is stopped by the per-test timeout and memory growth
is bounded (the process's peak resident size). Mutation-based fuzzing of parsers is common practice.
"""
import json
import logging
import resource
import sys
import warnings

import numpy as np
import pytest
import trimesh  # a hard dependency (pyproject.toml): imported, never skipped

from bandgeo.errors import BandgeoError
from bandgeo.scan import load_scan, prepare, read_sheet

#: The fixed seed of every mutation below (change it to explore; failures print it).
SEED = 20261202
#: Mutations per mesh format (six formats) and per other loader.
N_MESH = 100
N_OTHER = 60
#: Peak resident memory may grow by at most this much over a whole fuzz run (the files are < 40 kB).
MAX_GROWTH_MB = 400

_NUMBERS = [b"1e308", b"-1e308", b"nan", b"inf", b"-inf", b"1e-320", b"0", b"-1", b"99999999999", b"1e20",
            b"4294967295", b"x"]


def _mutate(data: bytes, rng: np.random.Generator):
    """(mutated bytes, description) by one of eight byte-level operators."""
    n = len(data)
    op = int(rng.integers(8))
    a = int(rng.integers(0, max(n, 1)))
    b = min(n, a + int(rng.integers(1, 200)))
    if op == 0:  # flip a few bytes to random values
        arr = bytearray(data)
        for pos in rng.integers(0, n, int(rng.integers(1, 9))):
            arr[int(pos)] = int(rng.integers(256))
        return bytes(arr), "flip bytes"
    if op == 1:
        return data[:a], f"truncate at {a}"
    if op == 2:
        return data[:a] + data[b:], f"delete {a}:{b}"
    if op == 3:
        return data[:b] + data[a:b] + data[b:], f"duplicate {a}:{b}"
    if op == 4:
        return data[:a] + rng.integers(0, 256, int(rng.integers(1, 64)), dtype=np.uint8).tobytes() + data[a:], \
            f"insert random at {a}"
    if op == 5:  # replace a number in text with an extreme one
        import re
        spans = [m.span() for m in re.finditer(rb"-?\d+(\.\d+)?(e-?\d+)?", data[:20000])]
        if spans:
            s0, s1 = spans[int(rng.integers(len(spans)))]
            new = _NUMBERS[int(rng.integers(len(_NUMBERS)))]
            return data[:s0] + new + data[s1:], f"number at {s0} -> {new.decode()}"
        return data[::-1], "reverse"
    if op == 6:  # overwrite 4 or 8 bytes with an extreme binary value
        width = 8 if rng.random() < 0.5 else 4
        value = [np.inf, np.nan, 1e308, -1e308, 2.0 ** 31, -1.0][int(rng.integers(6))]
        with np.errstate(over="ignore"):  # 1e308 as float32 is inf: intended
            raw = np.array([value], "<f8" if width == 8 else "<f4").tobytes() if rng.random() < 0.5 else \
                np.array([int(rng.integers(-2 ** 31, 2 ** 31 - 1))], "<i8" if width == 8 else "<i4").tobytes()
        return data[:a] + raw + data[a + width:], f"overwrite {width} bytes at {a}"
    lines = data.split(b"\n")  # swap two lines
    if len(lines) > 2:
        i, j = (int(x) for x in rng.integers(0, len(lines), 2))
        lines[i], lines[j] = lines[j], lines[i]
        return b"\n".join(lines), f"swap lines {i},{j}"
    return data + data, "double"


def _column():
    mesh = trimesh.creation.icosphere(subdivisions=2, radius=20.0)
    return trimesh.Trimesh(np.asarray(mesh.vertices) * [1.0, 1.0, 3.0], mesh.faces, process=False)


def _mesh_seeds():
    m = _column()
    colored = m.copy()
    colored.visual.vertex_colors = np.tile([120, 90, 60, 255], (len(m.vertices), 1)).astype(np.uint8)
    return {
        "ply-ascii": (".ply", trimesh.exchange.ply.export_ply(colored, encoding="ascii")),
        "ply-binary": (".ply", trimesh.exchange.ply.export_ply(colored, encoding="binary")),
        "obj": (".obj", m.export(file_type="obj").encode()),
        "stl-binary": (".stl", m.export(file_type="stl")),
        "stl-ascii": (".stl", m.export(file_type="stl_ascii").encode()),
        "off": (".off", m.export(file_type="off").encode()),
    }


def _peak_mb() -> float:
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return peak / (1 << 20) if sys.platform == "darwin" else peak / 1024.0


def _run(loader, seed_bytes: bytes, name: str, tmp_path, label: str, n: int, salt: int, numeric_ok=False):
    """Run ``loader(tmp_path / name)`` on ``n`` mutations; return (loaded, refused, failures)."""
    rng = np.random.default_rng([SEED, salt])
    loaded = refused = 0
    failures = []
    path = tmp_path / name
    for k in range(n):
        data, how = _mutate(seed_bytes, rng)
        path.write_bytes(data)
        try:
            with warnings.catch_warnings():
                if not numeric_ok:
                    warnings.simplefilter("error", RuntimeWarning)
                loader(path)
            loaded += 1
        except BandgeoError as exc:
            if "\n" in str(exc):
                failures.append(f"{label} #{k} ({how}): message has several lines")
            refused += 1
        except Exception as exc:  # noqa: BLE001 - the point of the test
            failures.append(f"{label} #{k} ({how}, seed {SEED}/{salt}): {type(exc).__name__}: "
                            f"{' '.join(str(exc).split())[:160]}")
    return loaded, refused, failures


def _load_and_prepare(path):
    prepare(load_scan(path))


@pytest.mark.timeout(600)
def test_fuzz_mesh_loaders(tmp_path, caplog, capfd):
    caplog.set_level(logging.DEBUG)
    before = _peak_mb()
    total = {"loaded": 0, "refused": 0}
    failures = []
    for salt, (label, (suffix, data)) in enumerate(sorted(_mesh_seeds().items())):
        _load_and_prepare(_write(tmp_path / f"seed{suffix}", data))  # the fuzz starts from valid files
        loaded, refused, fails = _run(_load_and_prepare, data, f"fuzz{suffix}", tmp_path, label, N_MESH, salt)
        total["loaded"] += loaded
        total["refused"] += refused
        failures += fails
    assert not failures, "\n".join(failures[:20])
    assert total["loaded"] + total["refused"] == 6 * N_MESH
    assert total["refused"] > N_MESH  # the mutations do break files: the test exercises the refusals
    assert _peak_mb() - before < MAX_GROWTH_MB
    # nothing logged or printed on the way: a parser's log with a traceback would reach the terminal
    assert not [r for r in caplog.records if r.levelno >= logging.WARNING], caplog.text[:2000]
    assert "Traceback" not in capfd.readouterr().err


_SHEET = b"""specimen_id = "KRB-07"
formation = "Karrabin Formation"
units = "mm"
up = [0.0, 0.0, 1.0]
north = [0.0, 1.0, 0.0]
strike_deg = 40.0
dip_deg = 25.0
age_ma = 410.0
age_err_ma = 5.0
scale = { points = [[0.0, 0.0, 0.0], [0.0, 0.0, 50.0]], length = 50.0 }
"""


@pytest.mark.timeout(300)
def test_fuzz_sheet_loader(tmp_path):
    read_sheet(_write(tmp_path / "seed.toml", _SHEET))
    loaded, refused, failures = _run(read_sheet, _SHEET, "fuzz.toml", tmp_path, "sheet", N_OTHER, 101)
    assert not failures, "\n".join(failures[:20])
    assert refused > 0


def _write(path, data):
    path.write_bytes(data)
    return path


_CSV = ("# KRB-12 band thicknesses, Karrabin Formation (invented demo data)\nthickness_mm,inclination_deg\n"
        + "".join(f"{0.2 + 0.05 * np.sin(2 * np.pi * k / 30):.4f},{3 * np.cos(k / 7):.2f}\n"
                  for k in range(80))).encode()


@pytest.mark.timeout(300)
def test_fuzz_series_loader(tmp_path):
    from bandgeo.series import read_series_csv

    read_series_csv(_write(tmp_path / "seed.csv", _CSV))
    loaded, refused, failures = _run(read_series_csv, _CSV, "fuzz.csv", tmp_path, "series csv", N_OTHER, 102)
    assert not failures, "\n".join(failures[:20])
    assert refused > 0


_REVIEW = json.dumps({"schema": "bandgeo.review/1", "specimen_id": "KRB-31", "created_utc": "2026-12-01T10:00:00Z",
                      "updated_utc": None, "edits": [{"op": "reject", "id": 3}, {"op": "add", "height_mm": 12.5},
                                                     {"op": "move", "id": 5, "height_mm": 20.25},
                                                     {"op": "hiatus", "s0_mm": 30.0, "s1_mm": 31.5}],
                      "history": []}, indent=1).encode()


@pytest.mark.timeout(300)
def test_fuzz_review_loader(tmp_path):
    from bandgeo.review.store import read_review

    def load(path):
        return read_review(path.parent)

    folder = tmp_path / "folder"
    folder.mkdir()
    _write(folder / "review.json", _REVIEW)
    read_review(folder)
    loaded, refused, failures = _run(load, _REVIEW, "review.json", folder, "review", N_OTHER, 103)
    assert not failures, "\n".join(failures[:20])
    assert refused > 0


@pytest.mark.timeout(600)
def test_fuzz_inspect_command(tmp_path, capfd):
    """The same kind of mutations through ``bandgeo inspect``: exit 0, or exit 2 with one line; never an
    internal error (exit 1), a traceback or a printed warning."""
    from bandgeo.cli import main

    seeds = _mesh_seeds()
    rng = np.random.default_rng([SEED, 200])
    problems = []
    for k in range(60):
        label = sorted(seeds)[k % len(seeds)]
        suffix, data = seeds[label]
        mutated, how = _mutate(data, rng)
        path = tmp_path / f"fuzz{suffix}"
        path.write_bytes(mutated)
        capfd.readouterr()
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            status = main(["inspect", str(path)])
        err = capfd.readouterr().err
        caught = [w for w in caught if not issubclass(w.category, DeprecationWarning)]
        if status not in (0, 2) or (status == 2 and err.count("\n") != 1) or "Traceback" in err or caught:
            problems.append(f"{label} #{k} ({how}): exit {status}: {err.strip()[:200]} "
                            f"{[str(w.message) for w in caught][:2]}")
    assert not problems, "\n".join(problems[:20])
