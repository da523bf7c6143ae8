"""Benchmark: load and clean a 2 M-face binary PLY, against open3d and trimesh reading the same file.

Usage:  python benchmarks/bench_load.py [--faces 2000000] [--repeats 3]

Builds a grooved, noisy cylinder with numpy (written as binary little-endian PLY with vertex colours),
then measures in the same run: open3d ``read_triangle_mesh`` alone, ``trimesh.load(process=False)``
alone, and ``bandgeo.scan.load_scan`` + ``prepare`` (the whole clean/scale/orient stage). Prints
medians of the repeats, the ratio to open3d's read (target <= 2), peak memory of load+prepare
(tracemalloc, numpy allocations; target <= 6x the mesh's in-memory size), and the threads in use.
bandgeo itself uses one extra Python thread (file hash, edge sort, piece search run beside the main
work; numpy releases the GIL), so its CPU time can exceed its wall time.
"""
from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np


def grooved_cylinder(n_faces: int, seed: int = 1):
    """Vertices (n, 3) float64 mm, faces (m, 3) int64, colours (n, 3) uint8 of a grooved, noisy tube."""
    rng = np.random.default_rng(seed)
    around = int(np.sqrt(n_faces / 2 * 0.25))  # rings four times as many as vertices per ring
    rings = n_faces // (2 * around) + 1
    radius, height = 10.0, 100.0
    theta = np.linspace(0, 2 * np.pi, around, endpoint=False)
    z = np.linspace(0, height, rings)
    r = radius - 0.05 * np.cos(2 * np.pi * z / 0.5) ** 8  # a groove every 0.5 mm
    verts = np.empty((rings, around, 3))
    verts[..., 0] = r[:, None] * np.cos(theta)[None, :]
    verts[..., 1] = r[:, None] * np.sin(theta)[None, :]
    verts[..., 2] = z[:, None]
    verts = verts.reshape(-1, 3) + rng.normal(0, 0.005, (rings * around, 3))
    i = np.arange(rings - 1)[:, None] * around
    j = np.arange(around)[None, :]
    a = (i + j).ravel()
    b = (i + (j + 1) % around).ravel()
    c = a + around
    d = b + around
    faces = np.concatenate([np.stack([a, b, d], 1), np.stack([a, d, c], 1)])
    colors = rng.integers(90, 200, (len(verts), 3)).astype(np.uint8)
    return verts, faces.astype(np.int64), colors


def write_binary_ply(path: Path, verts, faces, colors) -> None:
    vdt = np.dtype([("x", "<f4"), ("y", "<f4"), ("z", "<f4"), ("red", "u1"), ("green", "u1"), ("blue", "u1")])
    vrec = np.empty(len(verts), dtype=vdt)
    vrec["x"], vrec["y"], vrec["z"] = verts.T
    vrec["red"], vrec["green"], vrec["blue"] = colors.T
    fdt = np.dtype([("n", "u1"), ("i", "<i4", (3,))])
    frec = np.empty(len(faces), dtype=fdt)
    frec["n"] = 3
    frec["i"] = faces
    header = (f"ply\nformat binary_little_endian 1.0\ncomment units mm\nelement vertex {len(verts)}\n"
              "property float x\nproperty float y\nproperty float z\nproperty uchar red\n"
              "property uchar green\nproperty uchar blue\n"
              f"element face {len(faces)}\nproperty list uchar int vertex_indices\nend_header\n")
    with open(path, "wb") as fh:
        fh.write(header.encode("ascii"))
        fh.write(vrec.tobytes())
        fh.write(frec.tobytes())


def timed(fn, repeats):
    """Median wall time and median CPU time (this process) of ``repeats`` calls."""
    times, cpu = [], []
    for _ in range(repeats):
        start, start_cpu = time.perf_counter(), time.process_time()
        fn()
        times.append(time.perf_counter() - start)
        cpu.append(time.process_time() - start_cpu)
    return statistics.median(times), times, statistics.median(cpu)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--faces", type=int, default=2_000_000)
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args(argv)

    import open3d as o3d
    import trimesh
    from threadpoolctl import threadpool_info

    from bandgeo.scan import load_scan, prepare

    verts, faces, colors = grooved_cylinder(args.faces)
    mesh_bytes = verts.astype(np.float64).nbytes + faces.astype(np.int64).nbytes
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "grooved cylinder.ply"
        write_binary_ply(path, verts, faces, colors)
        del verts, faces, colors
        print(f"mesh: {args.faces:,} faces requested; file {path.stat().st_size / 1e6:.1f} MB binary PLY; "
              f"in memory (float64 vertices + int64 faces) {mesh_bytes / 1e6:.1f} MB")
        t_o3d, _, c_o3d = timed(lambda: o3d.io.read_triangle_mesh(str(path)), args.repeats)
        t_tri, _, c_tri = timed(lambda: trimesh.load(str(path), process=False), args.repeats)
        t_load, _, c_load = timed(lambda: load_scan(path), args.repeats)
        scan = load_scan(path)
        t_prep, _, c_prep = timed(lambda: prepare(scan), args.repeats)
        t_all, all_times, c_all = timed(lambda: prepare(load_scan(path)), args.repeats)
        spec = prepare(scan)
        del scan
        tracemalloc.start()
        spec2 = prepare(load_scan(path))
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        del spec2
    print(f"kept {len(spec.faces):,} faces, {spec.summary['holes']} holes, up confidence "
          f"{spec.up_confidence:.2f}, cleaning {spec.cleaning}")
    rows = [("open3d read_triangle_mesh", t_o3d, c_o3d), ("trimesh.load(process=False)", t_tri, c_tri),
            ("bandgeo load_scan", t_load, c_load), ("bandgeo prepare (clean + orient)", t_prep, c_prep),
            ("bandgeo load_scan + prepare", t_all, c_all)]
    for name, wall, cpu in rows:
        print(f"{name:34s} median wall {wall:.3f} s, cpu {cpu:.3f} s")
    print(f"  load_scan + prepare runs (wall): {', '.join(f'{t:.3f}' for t in all_times)}")
    ratio, ratio_cpu = t_all / t_o3d, c_all / c_o3d
    print(f"ratio load+prepare / open3d read: {ratio:.2f} wall, {ratio_cpu:.2f} cpu "
          f"(target <= 2.0: {'met' if ratio <= 2 else 'NOT met'})")
    mem_ratio = peak / mesh_bytes
    print(f"peak traced memory of load+prepare: {peak / 1e6:.1f} MB = {mem_ratio:.2f} x the mesh in memory "
          f"(target <= 6: {'met' if mem_ratio <= 6 else 'NOT met'})")
    pools = threadpool_info()
    print("threads: " + (", ".join(f"{p['internal_api']} {p['num_threads']}" for p in pools) or "no BLAS pools")
          + f"; OMP_NUM_THREADS={os.environ.get('OMP_NUM_THREADS', 'unset')}; cores {os.cpu_count()}; "
          "bandgeo load/clean: main + 1 helper thread")
    return 0


if __name__ == "__main__":
    sys.exit(main())
