"""Benchmark: the scan and feature stages (load, clean + orient, curvature features) at 2, 10 and 40 M faces.

Usage:
    python benchmarks/bench_scale.py                       # 2 M and 10 M faces
    python benchmarks/bench_scale.py --faces 2e6,10e6,40e6 # add 40 M (needs ~16 GB; see below)
    python benchmarks/bench_scale.py --scan PATH           # an existing scan instead
    python benchmarks/bench_scale.py --analyze             # also the whole `bandgeo analyze`

Scans come from the forward model (``bandgeo.synth``: a photogrammetric, unaligned mesh of a column
swaying 7 deg, seed 5, the defaults otherwise), as long a record as gives the face count asked for, and
are kept in ``--mesh-dir`` for the next run. A 40 M-face scan is made by splitting every triangle of a
10 M-face one into four (edge midpoints; the new vertices lie on the old flat triangles, so the shape
and relief are the 10 M scan's at half the edge length): the forward model itself needs ~13 GB and
~6 minutes for 40 M faces.

Every size runs in its own child process (``--repeat`` times), which reports per stage the wall time,
the CPU time (user + system, all threads) and the peak resident memory during the stage (sampled every
10 ms from /proc; the child's lifetime peak comes from getrusage). Prints one table and, with
``--json``, writes the figures. Threads: OMP_NUM_THREADS / OPENBLAS_NUM_THREADS default to 2 here and
the table says what the child saw (threadpoolctl). Figures on a shared machine are upper bounds:
compare CPU seconds when other jobs run.
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np



# ---------------------------------------------------------------------------- meshes
def _synth_scan(faces: float, out: Path) -> Path:
    """A forward-model scan of about ``faces`` faces in ``out`` (years scaled to the face count)."""
    from bandgeo.synth import SynthParams, simulate, write_specimen

    base = dict(sway_amplitude_deg=7.0, seed=5)
    n1 = simulate(SynthParams(years=0.05, **base)).faces.shape[0]
    n2 = simulate(SynthParams(years=0.1, **base)).faces.shape[0]
    per_year = (n2 - n1) / 0.05
    years = max(0.02, 0.05 + (faces - n1) / max(per_year, 1.0))
    spec = simulate(SynthParams(years=years, **base))
    out.mkdir(parents=True, exist_ok=True)
    write_specimen(spec, out / "scan.ply")
    return out / "scan.ply"


def _read_ply(path: Path):
    """(vertex records, faces (m, 3) int32, header lines) of a binary little-endian PLY of triangles with
    float xyz and uchar rgb (the forward model's files)."""
    with open(path, "rb") as fh:
        header = []
        while True:
            line = fh.readline().decode("ascii").strip()
            header.append(line)
            if line == "end_header":
                break
        nv = int(next(h for h in header if h.startswith("element vertex")).split()[-1])
        nf = int(next(h for h in header if h.startswith("element face")).split()[-1])
        vdt = np.dtype([("x", "<f4"), ("y", "<f4"), ("z", "<f4"), ("red", "u1"), ("green", "u1"), ("blue", "u1")])
        verts = np.fromfile(fh, dtype=vdt, count=nv)
        fdt = np.dtype([("n", "u1"), ("i", "<i4", (3,))])
        faces = np.fromfile(fh, dtype=fdt, count=nf)["i"]
    return verts, faces, header


def subdivide_ply(src: Path, dst: Path) -> Path:
    """Split every triangle of ``src`` into four at its edge midpoints (colours averaged) into ``dst``."""
    verts, faces, header = _read_ply(src)
    nv, nf = len(verts), len(faces)
    e = np.concatenate([faces[:, [0, 1]], faces[:, [1, 2]], faces[:, [2, 0]]]).astype(np.int64)
    e.sort(axis=1)
    key = e[:, 0] * nv + e[:, 1]
    del e
    uniq, inv = np.unique(key, return_inverse=True)
    del key
    a, b = uniq // nv, uniq % nv
    del uniq
    mid = np.empty(len(a), dtype=verts.dtype)
    for c in ("x", "y", "z"):
        mid[c] = 0.5 * (verts[c][a] + verts[c][b])
    for c in ("red", "green", "blue"):
        mid[c] = ((verts[c][a].astype(np.uint16) + verts[c][b]) // 2).astype(np.uint8)
    del a, b
    m = (nv + inv.reshape(3, nf).T).astype(np.int32)  # midpoints of edges (0,1), (1,2), (2,0)
    del inv
    f0, f1, f2 = faces[:, 0], faces[:, 1], faces[:, 2]
    m01, m12, m20 = m[:, 0], m[:, 1], m[:, 2]
    fdt = np.dtype([("n", "u1"), ("i", "<i4", (3,))])
    out = np.empty(4 * nf, dtype=fdt)
    out["n"] = 3
    out["i"][0::4] = np.stack([f0, m01, m20], 1)
    out["i"][1::4] = np.stack([m01, f1, m12], 1)
    out["i"][2::4] = np.stack([m20, m12, f2], 1)
    out["i"][3::4] = np.stack([m01, m12, m20], 1)
    del m, faces
    new_header = []
    for h in header:
        if h.startswith("element vertex"):
            h = f"element vertex {nv + len(mid)}"
        elif h.startswith("element face"):
            h = f"element face {4 * nf}"
        elif h.startswith("comment") and "units" in h:
            h = h + f"; each triangle of {src.name} split in four"
        new_header.append(h)
    dst.parent.mkdir(parents=True, exist_ok=True)
    tmp = dst.with_suffix(".tmp")
    with open(tmp, "wb") as fh:
        fh.write(("\n".join(new_header) + "\n").encode("ascii"))
        verts.tofile(fh)
        mid.tofile(fh)
        out.tofile(fh)
    os.replace(tmp, dst)
    truth = src.with_suffix(".truth.json")
    if truth.exists():
        data = json.loads(truth.read_text())
        data["note"] = f"truth of {src.name}; this mesh splits each of its triangles into four"
        dst.with_suffix(".truth.json").write_text(json.dumps(data))
    return dst


def mesh_for(faces: float, mesh_dir: Path) -> Path:
    """The scan of about ``faces`` faces, made once and kept (40 M and more: a 10 M scan split in four)."""
    label = f"{faces / 1e6:g}M"
    path = mesh_dir / label / "scan.ply"
    if path.exists():
        return path
    if faces >= 30e6:
        return subdivide_ply(mesh_for(faces / 4, mesh_dir), path)
    return _synth_scan(faces, path.parent)


def _up_of(scan: Path):
    """The paleo-up in the file frame from the truth file (the specimen z axis), or None."""
    truth = scan.with_suffix(".truth.json")
    if truth.exists():
        m = (json.loads(truth.read_text()).get("frames") or {}).get("file_from_specimen")
        if m is not None:
            up = np.asarray(m, dtype=float)[:3, 2]
            return (up / np.linalg.norm(up)).tolist()
    return None


# ---------------------------------------------------------------------------- the child
def _rss_bytes() -> int:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


class _Sampler:
    """Peak RSS during a stage, sampled every 10 ms on a thread."""

    def __init__(self):
        self.peak = 0
        self._stop = threading.Event()
        self._t = threading.Thread(target=self._run, daemon=True)

    def _run(self):
        while not self._stop.is_set():
            self.peak = max(self.peak, _rss_bytes())
            time.sleep(0.01)

    def __enter__(self):
        self.peak = _rss_bytes()
        self._t.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._t.join()
        self.peak = max(self.peak, _rss_bytes())


def _stage(name, fn, out):
    t0, c0 = time.perf_counter(), os.times()
    with _Sampler() as s:
        value = fn()
    c1 = os.times()
    out[name] = {"wall_s": time.perf_counter() - t0,
                 "cpu_s": (c1.user - c0.user) + (c1.system - c0.system),
                 "peak_rss_gb": s.peak / 1e9}
    return value


def child(scan: str, up, chunk_faces=None) -> dict:
    import resource

    from bandgeo.features import compute_features
    from bandgeo.scan import load_scan, prepare

    stages: dict = {}
    box = [_stage("load", lambda: load_scan(scan), stages)]
    spec = _stage("orient", lambda: prepare(box.pop(), units="mm", up=up), stages)  # the scan is dropped after
    feats = _stage("features", lambda: compute_features(spec, chunk_faces=chunk_faces), stages)
    try:
        from threadpoolctl import threadpool_info
        threads = sorted({f"{i['internal_api']}={i['num_threads']}" for i in threadpool_info()})
    except ImportError:  # pragma: no cover
        threads = []
    return {"faces": int(len(spec.faces)), "vertices": int(len(spec.vertices_mm)), "stages": stages,
            "peak_rss_gb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e6,
            "processing": feats.info.get("processing"), "diffusion_steps": feats.info.get("diffusion_steps"),
            "band_spacing_mm": feats.band_spacing_mm, "sampling_along_mm": feats.sampling_along_mm,
            "threads": threads, "cleaning": spec.cleaning}


def _run_child(scan: Path, up, chunk_faces=None) -> dict:
    env = dict(os.environ)
    env.setdefault("OMP_NUM_THREADS", "2")
    env.setdefault("OPENBLAS_NUM_THREADS", "2")
    cmd = [sys.executable, __file__, "--child", str(scan), "--up", json.dumps(up)]
    if chunk_faces:
        cmd += ["--chunk-faces", str(int(chunk_faces))]
    res = subprocess.run(cmd, capture_output=True, text=True, env=env)
    if res.returncode != 0:
        raise RuntimeError(f"child failed on {scan}: {res.stderr.strip().splitlines()[-1:]}")
    return json.loads(res.stdout.strip().splitlines()[-1])


def _tree_rss(proc) -> int:
    """Resident bytes of a process and its children (a PDF renderer may run beside it)."""
    import psutil

    total = 0
    try:
        for p in [proc] + proc.children(recursive=True):
            try:
                total += p.memory_info().rss
            except psutil.Error:
                pass
    except psutil.Error:
        pass
    return total


def _run_analyze(scan: Path, up, rss_limit_gb: float = 15.5, time_limit_s: float = 1500.0) -> dict:
    """Whole `bandgeo analyze` in a child: wall, CPU, peak RSS (getrusage: the largest process), the
    process tree's RSS sampled every 0.2 s, and the sampled peak within each stage (stage boundaries from
    result.json's stage seconds counted back from the end of the run, so approximate to the ~10-20 s of
    start-up and saving that no stage counts)."""
    import resource
    import tempfile

    import psutil

    env = dict(os.environ)
    env.setdefault("OMP_NUM_THREADS", "2")
    with tempfile.TemporaryDirectory(prefix="bench-scale-") as tmp:
        cmd = [sys.executable, "-m", "bandgeo", "analyze", str(scan), "--out", str(Path(tmp) / "out"),
               "--units", "mm"]
        if up is not None:
            cmd += ["--up", ",".join(f"{x:.17g}" for x in up)]
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t0 = time.perf_counter()
        proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
        ps = psutil.Process(proc.pid)
        timeline, killed = [], None
        while proc.poll() is None:
            now, rss = time.perf_counter() - t0, _tree_rss(ps)
            timeline.append((now, rss))
            if rss > rss_limit_gb * 1e9 or now > time_limit_s:  # a shared machine: stop, and say so
                killed = f"stopped at {now:.0f} s with {rss / 1e9:.1f} GB resident (limits {rss_limit_gb:g} GB, " \
                         f"{time_limit_s:g} s)"
                for p in ps.children(recursive=True) + [ps]:
                    try:
                        p.kill()
                    except psutil.Error:
                        pass
                break
            time.sleep(0.2)
        out, err = proc.communicate()
        wall = time.perf_counter() - t0
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        result, stage_peaks = {}, {}
        rj = Path(tmp) / "out" / "result.json"
        if rj.exists():
            doc = json.loads(rj.read_text())
            prov = doc.get("provenance") or {}
            seconds = prov.get("stage_seconds") or {}
            result = {"bands": (doc.get("bands") or {}).get("count"), "stage_seconds": seconds,
                      "features": (prov.get("parameters") or {}).get("features"),
                      "warnings": doc.get("warnings")}
            # stages ran back to back and ended at most a moment before the process did
            end = timeline[-1][0] if timeline else wall
            spans, t_end = {}, end
            for name in reversed(list(seconds)):
                spans[name] = (t_end - seconds[name], t_end)
                t_end -= seconds[name]
            for name, (a, b) in spans.items():
                inside = [r for t, r in timeline if a - 0.2 <= t <= b + 0.2]
                stage_peaks[name] = max(inside) / 1e9 if inside else None
    return {"exit": proc.returncode, "killed": killed, "wall_s": wall,
            "rss_timeline": [(round(t, 1), round(r / 1e9, 3)) for t, r in timeline[::5]],
            "cpu_s": (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime),
            # getrusage: the largest single process (exact); the sampled tree sum counts the pages a
            # forked report helper shares with its parent twice, so it is shown apart
            "peak_rss_gb": after.ru_maxrss / 1e6,
            "tree_peak_sampled_gb": max([r / 1e9 for _, r in timeline] or [0.0]),
            "stage_peak_rss_gb": stage_peaks, "result": result, "stdout_tail": out.strip().splitlines()[-3:],
            "stderr_tail": err.strip().splitlines()[-2:]}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--faces", default="2e6,10e6", help="comma-separated face counts (default 2e6,10e6)")
    ap.add_argument("--scan", action="append", help="an existing scan (repeatable) instead of made ones")
    ap.add_argument("--mesh-dir", default="/tmp/bandgeo-scale-meshes", help="where made scans are kept")
    ap.add_argument("--repeat", type=int, default=1)
    ap.add_argument("--analyze", action="store_true", help="also time the whole `bandgeo analyze` once")
    ap.add_argument("--analyze-only", action="store_true",
                    help="only the whole `bandgeo analyze` (its stage seconds and per-stage memory peaks)")
    ap.add_argument("--rss-limit-gb", type=float, default=15.5, help="stop an analyze above this (default 15.5)")
    ap.add_argument("--json", help="write the figures here")
    ap.add_argument("--chunk-faces", type=float, help="features slab size (default: bandgeo's CHUNK_FACES)")
    ap.add_argument("--child", help=argparse.SUPPRESS)
    ap.add_argument("--up", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        print(json.dumps(child(args.child, json.loads(args.up), int(args.chunk_faces) if args.chunk_faces else None)))
        return 0
    scans = [Path(s) for s in args.scan] if args.scan else \
        [mesh_for(float(x), Path(args.mesh_dir)) for x in args.faces.split(",")]
    rows = []
    if args.analyze_only:
        for scan in scans:
            a = _run_analyze(scan, _up_of(scan), args.rss_limit_gb)
            rows.append({"scan": str(scan), "analyze": a})
            print(f"{scan}: whole analyze exit {a['exit']}{' (' + a['killed'] + ')' if a['killed'] else ''}, "
                  f"{a['wall_s']:.1f} s wall, {a['cpu_s']:.1f} s CPU, peak {a['peak_rss_gb']:.2f} GB; "
                  f"bands {a['result'].get('bands')}")
            peaks = a.get("stage_peak_rss_gb") or {}
            for name, sec in (a["result"].get("stage_seconds") or {}).items():
                pk = peaks.get(name)
                print(f"    {name:<12} {sec:7.2f} s  peak {pk if pk is None else round(pk, 2)} GB")
            feats = a["result"].get("features") or {}
            if feats.get("processing"):
                print(f"    features: {feats['processing']}")
            for w in a["result"].get("warnings") or []:
                print(f"    warning: {w}")
        if args.json:
            Path(args.json).write_text(json.dumps(rows, indent=1))
        return 0
    for scan in scans:
        up = _up_of(scan)
        runs = [_run_child(scan, up, args.chunk_faces) for _ in range(max(1, args.repeat))]
        row = {"scan": str(scan), "faces": runs[0]["faces"], "runs": runs}
        for st in ("load", "orient", "features"):
            row[st] = {k: statistics.median(r["stages"][st][k] for r in runs)
                       for k in ("wall_s", "cpu_s", "peak_rss_gb")}
        row["peak_rss_gb"] = max(r["peak_rss_gb"] for r in runs)
        if args.analyze:
            row["analyze"] = _run_analyze(scan, up, args.rss_limit_gb)
        rows.append(row)
    print(f"bench_scale: medians of {max(1, args.repeat)} run(s) per size; OMP_NUM_THREADS="
          f"{os.environ.get('OMP_NUM_THREADS', '2 (set here)')}; threads seen: {rows[0]['runs'][0]['threads']}")
    print(f"{'faces':>10} | {'load s (cpu)':>14} | {'orient s (cpu)':>15} | {'features s (cpu)':>17} | "
          f"{'peak GB load/orient/feat':>25} | {'child peak GB':>13} | features processing")
    for row in rows:
        ld, orn, ft = row["load"], row["orient"], row["features"]
        proc = row["runs"][0]["processing"] or {}
        print(f"{row['faces'] / 1e6:9.2f}M | {ld['wall_s']:6.2f} ({ld['cpu_s']:5.2f}) | "
              f"{orn['wall_s']:6.2f} ({orn['cpu_s']:6.2f}) | {ft['wall_s']:7.2f} ({ft['cpu_s']:6.2f}) | "
              f"{ld['peak_rss_gb']:7.2f} /{orn['peak_rss_gb']:6.2f} /{ft['peak_rss_gb']:6.2f} | "
              f"{row['peak_rss_gb']:13.2f} | {proc.get('mode')} ({proc.get('slabs')} slab(s))")
        if "analyze" in row:
            a = row["analyze"]
            print(f"{'':>10}   whole analyze: exit {a['exit']}, {a['wall_s']:.1f} s wall, {a['cpu_s']:.1f} s CPU, "
                  f"peak {a['peak_rss_gb']:.2f} GB; bands {a['result'].get('bands')}")
            peaks = a.get("stage_peak_rss_gb") or {}
            for name, sec in (a["result"].get("stage_seconds") or {}).items():
                pk = peaks.get(name)
                print(f"{'':>12} {name:<12} {sec:7.2f} s  peak {pk if pk is None else round(pk, 2)} GB")
            if (a["result"].get("features") or {}).get("processing"):
                print(f"{'':>12} features: {a['result']['features']['processing']}")
    if args.json:
        Path(args.json).write_text(json.dumps(rows, indent=1))
    return 0


if __name__ == "__main__":
    sys.exit(main())
