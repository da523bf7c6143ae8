"""Benchmark: the whole pipeline, stage by stage, beside its anchors, at several mesh sizes (issue 16).

For each size (millions of faces) this makes an unaligned photogrammetric scan with the forward model
(``bandgeo.synth``, seed 5, sway 7 deg, record length chosen for the face count; cached), then, for
each repeat, in fresh processes so that memory figures belong to one size and one job:

1. ``bandgeo.pipeline.analyze`` (load, orient, features, segment, review, measure, series,
   periodicity, report; the stage seconds are the pipeline's own ``stage_seconds``), with wall and
   CPU seconds, peak RSS (``ru_maxrss``) and the peak RSS sampled within each stage; the wall time
   outside every stage (imports of the first modules, set-up, result.json, the swap) is its own row;
2. a review save as the review page makes it (``bandgeo.review.app.ReviewApp``: inputs read and warmed
   first, as the page does while the browser opens; then one boundary rejected, ``save()``, timed to
   the new figures and to the rewritten report);
3. the anchors on the same file: open3d ``read_triangle_mesh`` and one libigl
   ``principal_curvature(v, f, 2)`` call.

It prints medians over the repeats, the ratios total / libigl call and total / open3d read, peak
memory, CPU seconds, BLAS threads and the load average, with the issue-16 targets and met / missed
beside each figure. Absolute seconds on this shared 2-core machine vary between runs: compare the
ratios measured in one run.

Usage:
  python benchmarks/bench_pipeline.py                         # sizes 0.5 and 2 M faces, one repeat
  python benchmarks/bench_pipeline.py --sizes 0.5,2,10 --repeat 3   # the full table (10 M: ~minutes, GBs)
  options: --repeat N (medians), --no-review, --no-anchors, --cache DIR (meshes), --json PATH,
           --markdown (also print the table as Markdown), --threads N (BLAS/OpenMP threads, default 2)

``python benchmarks/bench_analyze.py`` is a thin alias of this script.
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from _children import emit, run_child  # noqa: E402
STAGES = ("load", "orient", "features", "segment", "review", "measure", "series", "periodicity", "report")

#: Issue 16 targets (benchmark figures, not timed tests), by requested size in millions of faces.
#: ``stage``: every stage but segmentation; ``ratio_igl``: total / one libigl principal_curvature call.
TARGETS = {
    2.0: {"stage": 5.0, "segment": 10.0, "total": 20.0, "ratio_igl": 3.0, "peak_gb": 2.0, "review": 5.0},
    10.0: {"total": 90.0, "peak_gb": 8.0},
    40.0: {"total": 600.0, "peak_gb": 16.0},
}
SYNTH_SEED = 5
SWAY_DEG = 7.0


# ----------------------------------------------------------------------------------------------------
# children (each runs in its own process and prints one JSON line)


_emit = emit


def _peak_rss_gb() -> float:
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20  # kB on Linux


def _cpu_seconds() -> float:
    import resource

    own = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def _threads() -> str:
    from threadpoolctl import threadpool_info

    pools = threadpool_info()
    return ", ".join(f"{p['internal_api']} {p['num_threads']}" for p in pools) or "no BLAS pools"


def _truth(scan: Path) -> dict:
    return json.loads(scan.with_name(scan.stem + ".truth.json").read_text())


def child_make(faces: float, folder: Path) -> None:
    """The forward model's photogrammetric column with about ``faces`` faces (the record length sets
    the size: two probes give faces per year)."""
    from bandgeo.synth import SynthParams, simulate, write_specimen

    base = dict(sway_amplitude_deg=SWAY_DEG, seed=SYNTH_SEED)
    n1 = simulate(SynthParams(years=0.05, **base)).faces.shape[0]
    n2 = simulate(SynthParams(years=0.1, **base)).faces.shape[0]
    years = max(0.02, 0.05 + 0.05 * (faces - n1) / max(n2 - n1, 1))
    start = time.perf_counter()
    spec = simulate(SynthParams(years=years, **base))
    for _ in range(3):  # laminae thicken and thin through the year: faces are not linear in years
        if abs(len(spec.faces) / faces - 1.0) <= 0.05:
            break
        years *= faces / len(spec.faces)
        del spec
        spec = simulate(SynthParams(years=years, **base))
    folder.mkdir(parents=True, exist_ok=True)
    write_specimen(spec, folder / "scan.ply")
    _emit({"faces": int(len(spec.faces)), "years": years, "seconds": time.perf_counter() - start,
           "peak_gb": _peak_rss_gb()})


class _StagePeaks:
    """Progress callback that notes the current stage and its CPU seconds (this process, all threads:
    a steadier figure than wall seconds on a loaded machine), and a thread that samples this process's
    RSS every 0.1 s into the stage's peak (psutil)."""

    def __init__(self):
        import psutil

        self.proc = psutil.Process()
        self.stage = "start"
        self.peaks: dict[str, float] = {}
        self.cpu: dict[str, float] = {}
        self._cpu0 = None
        self.stop = threading.Event()
        self.thread = threading.Thread(target=self._sample, daemon=True)

    def __call__(self, description, done, total):
        text = str(description)
        name = text.split(":")[0].split()[0]
        if name not in STAGES:
            return
        self.stage = name
        if text == name:  # the stage timer's start report
            self._cpu0 = _cpu_seconds()
        elif text == f"{name} done" and self._cpu0 is not None:
            self.cpu[name] = self.cpu.get(name, 0.0) + _cpu_seconds() - self._cpu0
            self._cpu0 = None

    def _sample(self):
        while not self.stop.wait(0.1):
            rss = self.proc.memory_info().rss / 2**30
            self.peaks[self.stage] = max(self.peaks.get(self.stage, 0.0), rss)

    def __enter__(self):
        self.thread.start()
        return self

    def __exit__(self, *exc):
        self.stop.set()
        self.thread.join()


def child_pipeline(scan: Path, out: Path) -> None:
    load0 = os.getloadavg()[0]
    start = time.perf_counter()
    from bandgeo import pipeline

    import_s = time.perf_counter() - start
    truth = _truth(scan)
    up = truth["frames"]["paleo_up_file"]
    cpu0, wall0 = _cpu_seconds(), time.perf_counter()
    with _StagePeaks() as peaks:
        analysis = pipeline.analyze(scan, out, units=truth.get("units"), up=up, progress=peaks)
    wall = time.perf_counter() - wall0
    cpu = _cpu_seconds() - cpu0
    result = analysis.result
    dpy = result.get("days_per_year") or {}
    _emit({"wall": wall, "cpu": cpu, "import_s": import_s, "stages": dict(analysis.stage_seconds),
           "peak_gb": _peak_rss_gb(), "stage_peak_gb": peaks.peaks, "stage_cpu": peaks.cpu, "threads": _threads(),
           "faces_kept": int(len(analysis.specimen.faces)), "bands": len(analysis.segmentation.boundaries),
           "days_per_year": dpy.get("estimate"), "load_before": load0, "load_after": os.getloadavg()[0]})


def child_review(folder: Path) -> None:
    """One review save as the page makes it: ReviewApp (the page's session object) with its re-run
    warmed and ready (the page does this while the browser opens; with a re-run worker process, its
    ``wait_ready``), one boundary rejected, then save(); timed to the new figures and to the report."""
    import psutil

    start = time.perf_counter()
    from bandgeo.review.app import ReviewApp

    app = ReviewApp(folder, token="bench")
    open_s = time.perf_counter() - start
    start = time.perf_counter()
    rerun = app.rerun
    if hasattr(rerun, "warm"):
        rerun.warm(folder)
    if hasattr(rerun, "wait_ready"):
        rerun.wait_ready(timeout=1800)
    warm_s = time.perf_counter() - start
    worker = psutil.Process(rerun.pid) if getattr(rerun, "pid", None) else None

    def cpu_now():
        own = psutil.Process().cpu_times()
        total = own.user + own.system
        if worker is not None and worker.is_running():
            w = worker.cpu_times()
            total += w.user + w.system
        return total

    boundaries = app.data.segmentation.boundaries
    target = boundaries[len(boundaries) // 2].id
    app.session.push({"op": "reject", "id": int(target)})
    cpu0 = cpu_now()
    start = time.perf_counter()
    app.save()
    figures_s = None
    while True:
        status = app.rerun_status()
        if figures_s is None and status.get("result_utc"):
            figures_s = time.perf_counter() - start
        if status.get("state") != "running":
            break
        time.sleep(0.02)
    app.wait()
    total_s = time.perf_counter() - start
    cpu = cpu_now() - cpu0
    worker_peak = 0.0
    if worker is not None and worker.is_running():
        try:  # the worker's own high-water mark (Linux)
            worker_peak = max(worker_peak, worker.memory_full_info().uss / 2**30)
            for line in Path(f"/proc/{worker.pid}/status").read_text().splitlines():
                if line.startswith("VmHWM:"):
                    worker_peak = max(worker_peak, int(line.split()[1]) / 2**20)
        except (OSError, psutil.Error):
            pass
    status = app.rerun_status()
    if hasattr(rerun, "close"):
        rerun.close()
    _emit({"open_s": open_s, "warm_s": warm_s, "figures_s": figures_s if figures_s is not None else total_s,
           "total_s": total_s, "cpu": cpu, "state": status.get("state"), "error": status.get("error"),
           "peak_gb": max(_peak_rss_gb(), worker_peak), "worker": type(rerun).__name__})


def child_anchors(scan: Path) -> None:
    import numpy as np
    import open3d as o3d

    start, cpu0 = time.perf_counter(), _cpu_seconds()
    mesh = o3d.io.read_triangle_mesh(str(scan))
    o3d_s, o3d_cpu = time.perf_counter() - start, _cpu_seconds() - cpu0
    v = np.ascontiguousarray(np.asarray(mesh.vertices, dtype=np.float64))
    f = np.ascontiguousarray(np.asarray(mesh.triangles, dtype=np.int64))
    del mesh
    import igl

    start, cpu0 = time.perf_counter(), _cpu_seconds()
    igl.principal_curvature(v, f, 2)
    igl_s, igl_cpu = time.perf_counter() - start, _cpu_seconds() - cpu0
    _emit({"open3d_read": o3d_s, "igl_curvature": igl_s, "open3d_cpu": o3d_cpu, "igl_cpu": igl_cpu,
           "load": os.getloadavg()[0], "faces": int(len(f)), "peak_gb": _peak_rss_gb(),
           "threads": _threads()})


# ----------------------------------------------------------------------------------------------------
# parent: runs the children and prints the table


def _child(args: list[str], env: dict, timeout: float) -> dict:
    return run_child(__file__, args, env, timeout)


def _mesh(size_m: float, cache: Path, env: dict) -> tuple[Path, dict]:
    folder = cache / f"photogrammetric-{size_m:g}M-seed{SYNTH_SEED}-sway{SWAY_DEG:g}"
    scan = folder / "scan.ply"
    info_path = folder / "made.json"
    if scan.exists() and info_path.exists():
        return scan, json.loads(info_path.read_text())
    print(f"  making a {size_m:g} M-face scan with bandgeo.synth in {folder} ...", flush=True)
    info = _child(["make", str(size_m * 1e6), str(folder)], env, timeout=3600)
    if "failed" in info:
        raise SystemExit(f"could not make the {size_m:g} M-face scan: {info['failed']}")
    info_path.write_text(json.dumps(info))
    return scan, info


def _median(values):
    values = [v for v in values if v is not None]
    return statistics.median(values) if values else None


def _check(value, limit):
    if value is None or limit is None:
        return ""
    return f"[<= {limit:g} {'met' if value <= limit else 'MISSED'}]"


def _cell(value, fmt="{:.2f}", limit=None):
    if value is None:
        return "n/a"
    text = fmt.format(value)
    check = _check(value, limit)
    return f"{text} {check}" if check else text


def summarise(size_m: float, runs: list[dict]) -> dict:
    """Medians over the repeats of one size."""
    pipe = [r["pipeline"] for r in runs if "failed" not in r.get("pipeline", {"failed": 1})]
    anchors = [r["anchors"] for r in runs if "anchors" in r and "failed" not in r["anchors"]]
    review = [r["review"] for r in runs if "review" in r and "failed" not in r["review"]]
    out = {"size_m": size_m, "n_runs": len(pipe), "failures": [
        f"{k}: {r[k]['failed']}" for r in runs for k in ("pipeline", "review", "anchors")
        if k in r and "failed" in r[k]]}
    if not pipe:
        return out
    out["stages"] = {s: _median([p["stages"].get(s) for p in pipe]) for s in STAGES}
    out["total"] = _median([p["wall"] for p in pipe])
    out["other"] = _median([p["wall"] - sum(v for k, v in p["stages"].items() if k in STAGES) for p in pipe])
    out["cpu"] = _median([p["cpu"] for p in pipe])
    out["peak_gb"] = max(p["peak_gb"] for p in pipe)
    out["stage_cpu"] = {s: _median([p.get("stage_cpu", {}).get(s) for p in pipe]) for s in STAGES}
    out["stage_peak_gb"] = {s: max((p["stage_peak_gb"].get(s, 0.0) for p in pipe), default=0.0) for s in STAGES}
    out["threads"] = pipe[-1]["threads"]
    out["faces_kept"] = pipe[-1]["faces_kept"]
    out["bands"] = pipe[-1]["bands"]
    out["load"] = [round(p["load_before"], 2) for p in pipe]
    out["import_s"] = _median([p["import_s"] for p in pipe])
    if anchors:
        out["open3d_read"] = _median([a["open3d_read"] for a in anchors])
        out["igl_curvature"] = _median([a["igl_curvature"] for a in anchors])
        out["anchors_peak_gb"] = max(a["peak_gb"] for a in anchors)
        out["ratio_igl"] = out["total"] / out["igl_curvature"]
        out["ratio_open3d"] = out["total"] / out["open3d_read"]
        if all("igl_cpu" in a for a in anchors):
            out["igl_cpu"] = _median([a["igl_cpu"] for a in anchors])
            out["ratio_igl_cpu"] = out["cpu"] / out["igl_cpu"]
            # each run's analyze against the anchor call right after it (the machine's load drifts)
            out["ratio_igl_paired"] = _median([r["pipeline"]["wall"] / r["anchors"]["igl_curvature"] for r in runs
                                               if "failed" not in r["pipeline"] and "failed" not in r.get("anchors", {"failed": 1})])
    if review:
        for key in ("open_s", "warm_s", "figures_s", "total_s", "cpu"):
            out[f"review_{key}"] = _median([r[key] for r in review])
        out["review_peak_gb"] = max(r["peak_gb"] for r in review)
        out["review_state"] = sorted({str(r["state"]) + (f" ({r['error']})" if r.get("error") else "")
                                      + f" via {r.get('worker', '?')}" for r in review})
    return out


def table(results: list[dict], markdown: bool = False) -> str:
    """Rows = figures, columns = sizes; each cell with its target and met/missed where one applies."""
    heads = [f"{r['size_m']:g} M ({r.get('n_runs', 0)} run{'s' if r.get('n_runs', 0) != 1 else ''})"
             for r in results]
    rows: list[tuple[str, list[str]]] = []

    def add(label, key_fn, fmt="{:.2f}", target_key=None):
        cells = []
        for r in results:
            tg = TARGETS.get(float(r["size_m"]), {})
            limit = tg.get(target_key(r) if callable(target_key) else target_key) if target_key else None
            cells.append(_cell(key_fn(r), fmt, limit))
        rows.append((label, cells))

    add("faces kept (M)", lambda r: r.get("faces_kept", 0) / 1e6 if r.get("faces_kept") else None, "{:.2f}")
    for stage in STAGES:
        add(f"{stage} (s)", lambda r, s=stage: (r.get("stages") or {}).get(s), "{:.2f}",
            "segment" if stage == "segment" else "stage")
    add("not in a stage: imports, saving, swap (s)", lambda r: r.get("other"))
    add("TOTAL analyze wall (s)", lambda r: r.get("total"), "{:.1f}", "total")
    add("CPU user+sys (s)", lambda r: r.get("cpu"), "{:.1f}")
    for stage in STAGES:
        add(f"  {stage} CPU (s)", lambda r, s=stage: (r.get("stage_cpu") or {}).get(s), "{:.2f}")
    add("peak RSS analyze (GB)", lambda r: r.get("peak_gb"), "{:.2f}", "peak_gb")
    add("  largest stage peak (GB)", lambda r: max((r.get("stage_peak_gb") or {"": None}).values(), default=None)
        if r.get("stage_peak_gb") else None, "{:.2f}")
    add("open3d read_triangle_mesh (s)", lambda r: r.get("open3d_read"), "{:.3f}")
    add("libigl principal_curvature (s)", lambda r: r.get("igl_curvature"))
    add("libigl principal_curvature CPU (s)", lambda r: r.get("igl_cpu"))
    add("total / libigl call", lambda r: r.get("ratio_igl"), "{:.2f}", "ratio_igl")
    add("  same, run by run (median)", lambda r: r.get("ratio_igl_paired"), "{:.2f}", "ratio_igl")
    add("  CPU: analyze / libigl call", lambda r: r.get("ratio_igl_cpu"), "{:.2f}", "ratio_igl")
    add("total / open3d read", lambda r: r.get("ratio_open3d"), "{:.0f}")
    add("review save -> new figures (s)", lambda r: r.get("review_figures_s"), "{:.2f}", "review")
    add("review save -> report rewritten (s)", lambda r: r.get("review_total_s"), "{:.2f}", "review")
    add("  review page open + warm-up (s)", lambda r: (r["review_open_s"] + r["review_warm_s"])
        if r.get("review_open_s") is not None else None)
    add("  review save CPU, page + worker (s)", lambda r: r.get("review_cpu"))
    add("  review page + worker peak RSS (GB)", lambda r: r.get("review_peak_gb"))
    width = max(len(label) for label, _ in rows)
    colw = [max(len(h), *(len(c[i]) for _, c in rows)) for i, h in enumerate(heads)]
    if markdown:
        lines = ["| figure | " + " | ".join(heads) + " |", "|---|" + "---|" * len(heads)]
        lines += [f"| {label.strip()} | " + " | ".join(cells) + " |" for label, cells in rows]
        return "\n".join(lines)
    lines = [" " * width + "  " + "  ".join(h.ljust(w) for h, w in zip(heads, colw))]
    lines += [label.ljust(width) + "  " + "  ".join(c.ljust(w) for c, w in zip(cells, colw)) for label, cells in rows]
    return "\n".join(lines)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="0.5,2", help="millions of faces, comma-separated (default 0.5,2)")
    ap.add_argument("--repeat", type=int, default=1, help="runs per size; figures are medians")
    ap.add_argument("--no-review", action="store_true", help="skip the review-save figure")
    ap.add_argument("--no-anchors", action="store_true", help="skip the open3d and libigl anchors")
    ap.add_argument("--cache", type=Path, default=Path(tempfile.gettempdir()) / "bandgeo-bench-meshes",
                    help="folder for the synthetic scans (kept between runs)")
    ap.add_argument("--threads", type=int, default=int(os.environ.get("OMP_NUM_THREADS", "2") or 2),
                    help="BLAS/OpenMP threads of the children (default: OMP_NUM_THREADS or 2)")
    ap.add_argument("--json", type=Path, default=None, help="also write the figures as JSON")
    ap.add_argument("--markdown", action="store_true", help="also print the table as Markdown")
    ap.add_argument("--child", nargs="+", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        kind, *rest = args.child
        if kind == "make":
            child_make(float(rest[0]), Path(rest[1]))
        elif kind == "pipeline":
            child_pipeline(Path(rest[0]), Path(rest[1]))
        elif kind == "review":
            child_review(Path(rest[0]))
        elif kind == "anchors":
            child_anchors(Path(rest[0]))
        return 0
    try:
        sizes = [float(s) for s in args.sizes.split(",") if s.strip()]
    except ValueError:
        print(f"expected --sizes like 0.5,2,10 (millions of faces) but got {args.sizes!r}", file=sys.stderr)
        return 2
    if not sizes or args.repeat < 1:
        print("expected at least one size and --repeat 1 or more", file=sys.stderr)
        return 2
    env = dict(os.environ)
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        env[var] = str(args.threads)
    env.setdefault("PYTHONHASHSEED", "0")
    try:
        head = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=HERE.parent, capture_output=True,
                              text=True).stdout.strip()
        dirty = subprocess.run(["git", "status", "--porcelain", "--untracked-files=no", "bandgeo"], cwd=HERE.parent,
                               capture_output=True, text=True).stdout.strip()
        code = f"code {head or '?'}" + (" + uncommitted changes in bandgeo/" if dirty else "")
    except OSError:
        code = "code version unknown"
    print(f"{time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}; {code}")
    print(f"bench_pipeline: sizes {', '.join(f'{s:g} M' for s in sizes)} faces, {args.repeat} repeat(s), "
          f"{os.cpu_count()} cores, BLAS/OpenMP threads {args.threads}; load average "
          f"{', '.join(f'{x:.2f}' for x in os.getloadavg())} (1, 5, 15 min) at the start", flush=True)
    results = []
    for size in sizes:
        scan, info = _mesh(size, args.cache, env)
        truth = _truth(scan)
        print(f"{size:g} M: {scan} ({info['faces']:,} faces, {scan.stat().st_size / 1e6:.0f} MB, "
              f"{truth['laminae'].get('n_recorded', '?')} laminae, {info['years']:.2f} years of record)", flush=True)
        runs = []
        timeout = 600 + 120 * size
        for rep in range(args.repeat):
            run: dict = {}
            with tempfile.TemporaryDirectory(prefix="bench-pipeline-") as tmp:
                out = Path(tmp) / "result"
                run["pipeline"] = _child(["pipeline", str(scan), str(out)], env, timeout)
                p = run["pipeline"]
                if "failed" in p:
                    print(f"  run {rep + 1}: analyze failed: {p['failed']}", flush=True)
                else:
                    print(f"  run {rep + 1}: analyze {p['wall']:.1f} s wall, {p['cpu']:.1f} s CPU, peak "
                          f"{p['peak_gb']:.2f} GB, {p['bands']} bands; load {p['load_before']:.2f}", flush=True)
                    if not args.no_review:
                        run["review"] = _child(["review", str(out)], env, timeout)
                        rv = run["review"]
                        print("  run %d: review save %s" % (rep + 1, rv.get("failed") or
                              f"{rv['figures_s']:.2f} s to figures, {rv['total_s']:.2f} s to report ({rv['state']})"),
                              flush=True)
            if not args.no_anchors:
                run["anchors"] = _child(["anchors", str(scan)], env, timeout)
                a = run["anchors"]
                print("  run %d: anchors %s" % (rep + 1, a.get("failed") or
                      f"open3d read {a['open3d_read']:.3f} s, libigl principal_curvature {a['igl_curvature']:.2f} s, "
                      f"peak {a['peak_gb']:.2f} GB"), flush=True)
            runs.append(run)
        results.append(summarise(size, runs))
    print()
    print("medians over the runs; targets from issue 16 beside the figures they apply to")
    print(table(results))
    for r in results:
        extra = f"{r['size_m']:g} M: threads {r.get('threads')}; load average at each run's start {r.get('load')}; " \
                f"{r.get('bands')} bands; import of bandgeo.pipeline {r.get('import_s', 0):.2f} s"
        if r.get("stage_peak_gb"):
            extra += "; peak RSS by stage (GB) " + ", ".join(f"{k} {v:.2f}" for k, v in r["stage_peak_gb"].items() if v)
        if r.get("review_state"):
            extra += f"; review re-run {r['review_state']}"
        print(extra)
        for failure in r.get("failures", []):
            print(f"{r['size_m']:g} M FAILED {failure}")
    print("notes: 'not in a stage' is the analyze wall time outside the stage timers: the first import of the "
          "scan and feature modules, the run's set-up, result.json and the swap (the later stages' modules - "
          "scipy.signal, scikit-learn, astropy, matplotlib - are imported in a background thread during load, "
          "orient and features, so their CPU counts there; the re-run inputs are written in a thread during "
          "the report; the PDF helper loads WeasyPrint from the measurement on)")
    print(f"load average at the end: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")
    if args.markdown:
        print()
        print(table(results, markdown=True))
    if args.json:
        args.json.write_text(json.dumps({"sizes": results, "repeat": args.repeat, "threads": args.threads}, indent=1))
    return 1 if any(r.get("failures") for r in results) else 0


if __name__ == "__main__":
    sys.exit(main())
