"""Accuracy atlas of the band segmentation: where does bandgeo count laminae right, and where does it say no?

Every cell simulates a short column stretch with the forward model (``bandgeo.synth``; truth known),
prepares it as a scan, computes the curvature features, segments it and scores the boundaries against
the truth planes. Grid axes (issue 11):

- lamina thickness / edge length (1.5-8): photogrammetric edge length, CT voxel size, or ring spacing;
- lamina thickness / column radius (0.002-0.05): short stretches keep wide columns small;
- sway 0-15 deg (annual; the "year" is as short as the column allows without laminae crossing) with
  meander on top (1.5 deg at lamina/radius >= 0.02, less on wider columns so laminae never fold);
- scanner noise / groove relief (0.1-1);
- mesh kind: ``rings`` (ring-aligned), ``photogrammetric`` (unaligned, smoothed), ``ct`` (marching cubes).

Per cell: recall and precision of the inner boundaries (matched to the true plane heights within a
third of the local lamina), band-count error, mean-thickness error, runtime (features + segmentation),
and the verdict: ``counted``, ``counted+warned`` or ``refused``. A cell *meets the target* when
- it is a target cell (lamina >= 3 edge lengths and relief >= 2 x noise): recall and precision >= 97 %,
  count within 2 %, mean thickness within 3 %, no refusal;
- otherwise: a refusal, a warning, or a count within 10 %.

Usage::

    python benchmarks/accuracy_atlas.py --quick          # a handful of cells, a few minutes
    python benchmarks/accuracy_atlas.py                  # the whole grid (about an hour on 2 cores)
    python benchmarks/accuracy_atlas.py --json out.json --png docs/img/segmentation-atlas.png
"""
from __future__ import annotations

import argparse
import itertools
import json
import sys
import time
from pathlib import Path

import numpy as np

#: Mean lamina thickness of every cell, mm (the atlas is scale-free: only the ratios matter).
LAMINA_MM = 0.1
#: Groove relief as a fraction of the lamina.
RELIEF_FRACTION = 0.25
#: Laminae per cell, and the shortest "year" in laminae.
N_LAMINAE = 24
YEAR_LAMINAE = 48

LAMINA_EDGE = (1.5, 2.0, 3.0, 5.0, 8.0)
LAMINA_RADIUS = (0.002, 0.005, 0.01, 0.02, 0.05)
SWAY = (0.0, 7.0, 15.0)
NOISE_RELIEF = (0.1, 0.4, 1.0)
KINDS = ("rings", "photogrammetric", "ct")

#: Base of the one-factor sweeps.
BASE = {"lamina_edge": 4.0, "lamina_radius": 0.02, "sway_deg": 7.0, "noise_relief": 0.4}


def is_target_cell(lamina_edge, noise_relief):
    """The target region of issue 11: a lamina spans >= 3 edge lengths and the relief is >= 2 x the noise."""
    return lamina_edge >= 3.0 and noise_relief <= 0.5


def cell_params(kind, lamina_edge, lamina_radius, sway_deg, noise_relief, seed=1, n_laminae=N_LAMINAE):
    """SynthParams keyword arguments of one cell."""
    L = LAMINA_MM
    radius = L / lamina_radius
    # the sway turns slowly enough that the laminae never cross inside the column (curvature of the
    # growth path times the radius <= 0.3; real columns: a year is hundreds of laminae)
    year = float(np.clip(np.radians(sway_deg) * 2 * np.pi / (0.3 * lamina_radius), YEAR_LAMINAE, 5000.0))
    kw = dict(mean_thickness_mm=L, days_per_year=year, years=n_laminae / year,
              radius_mm=radius, dome_height_mm=min(0.1 * radius, 20 * L), groove_depth_mm=RELIEF_FRACTION * L,
              scanner_noise_mm=noise_relief * RELIEF_FRACTION * L, sway_amplitude_deg=float(sway_deg),
              meander_amplitude_deg=(1.5 * min(1.0, lamina_radius / 0.02)) if sway_deg > 0 else 0.0, mean_tilt_deg=2.0, radius_variation=0.02,
              annual_amplitude=0.1, pose="random", seed=int(seed), mesh_kind=kind, base="open", top="open")
    if kind == "photogrammetric":
        kw["edge_length_mm"] = L / lamina_edge
    elif kind == "ct":
        kw["voxel_size_mm"] = L / lamina_edge
    else:
        kw["rings_per_lamina"] = float(lamina_edge)
    return kw


def make_cell(kind, lamina_edge, lamina_radius, sway_deg, noise_relief, seed=1, n_laminae=N_LAMINAE):
    """Simulate one cell: (truth dict, prepared Specimen)."""
    from bandgeo.scan import Scan, prepare
    from bandgeo.synth import SynthParams, simulate

    p = SynthParams(**cell_params(kind, lamina_edge, lamina_radius, sway_deg, noise_relief, seed, n_laminae))
    sp = simulate(p)
    scan = Scan(vertices=sp.vertices, faces=sp.faces, colors=sp.colors, path="atlas.ply", sha256="0",
                file_format="ply-binary-le")
    fr = sp.truth["frames"]
    spec = prepare(scan, units=p.units, up=np.asarray(fr["paleo_up_file"]), north=np.asarray(fr["north_file"]))
    return sp.truth, spec


def score(truth, seg):
    """Recall, precision, band-count error and mean-thickness error against the truth planes.

    The two end rims of the stretch (cut base, top cap) are not grooves and are left out of the recall;
    a detection matching them is neither right nor wrong (it is not counted).
    """
    h = np.asarray(truth["boundaries"]["heights_mm"], float)
    th = np.diff(h)
    tol = np.r_[th[0], np.minimum(th[:-1], th[1:]), th[-1]] / 3.0
    det = np.sort(seg.heights_mm())
    match = np.full(len(det), -1)
    used = set()
    for i, d in enumerate(det):
        j = int(np.argmin(np.abs(h - d)))
        if abs(h[j] - d) <= tol[j] and j not in used:
            match[i] = j
            used.add(j)
    inner = set(range(1, len(h) - 1))
    rim = np.isin(match, [0, len(h) - 1])
    det_inner = det[~rim]
    tp = len(used & inner)
    recall = tp / max(len(inner), 1)
    precision = tp / len(det_inner) if len(det_inner) else float("nan")
    n_true = len(inner)
    count_err = (len(det_inner) - n_true) / n_true if n_true else float("nan")
    true_mean = float(np.mean(np.diff(h[1:-1]))) if len(h) > 3 else float("nan")
    det_mean = float(np.mean(np.diff(det_inner))) if len(det_inner) > 1 else float("nan")
    thick_err = (det_mean - true_mean) / true_mean if np.isfinite(det_mean) else float("nan")
    return {"recall": recall, "precision": precision, "count_error": count_err, "thickness_error": thick_err,
            "n_true": n_true, "n_found": int(len(det_inner))}


def score_planes(truth, seg, specimen, min_edges=3.0):
    """As :func:`score`, but a detection is matched by geometry rather than by arc length.

    Each detected boundary's centre (specimen frame) is put against every true boundary plane (the
    truth's ``centres_file`` / ``normals_file`` carried into the specimen frame by
    ``specimen.scan_to_specimen``); it matches the nearest plane when its distance along that plane's
    normal is within a third of the local lamina, one detection per plane. Arc lengths along two
    different centrelines (the generator's and bandgeo's) drift apart on a bent column by more than
    a third of a lamina over a few centimetres, so the height-based score would call right boundaries
    wrong there.
    """
    b = truth["boundaries"]
    M = np.asarray(specimen.scan_to_specimen, float)
    C = np.asarray(b["centres_file"], float) @ M[:3, :3].T + M[:3, 3]
    N = np.asarray(b["normals_file"], float) @ M[:3, :3].T
    N /= np.linalg.norm(N, axis=1, keepdims=True)
    h = np.asarray(b["heights_mm"], float)
    th = np.diff(h)
    tol = np.r_[th[0], np.minimum(th[:-1], th[1:]), th[-1]] / 3.0
    bounds = sorted(seg.boundaries, key=lambda x: x.height_mm)
    det = np.array([x.center_mm for x in bounds], float).reshape(-1, 3)
    match = np.full(len(det), -1)
    if len(det):
        dist = det @ N.T - np.einsum("ij,ij->i", C, N)[None, :]  # (detections, planes)
        near = np.argmin(np.abs(dist), axis=1)
        d = np.abs(dist[np.arange(len(det)), near])
        used = set()
        for i in np.argsort(d):
            j = int(near[i])
            if d[i] <= tol[j] and j not in used:
                match[i] = j
                used.add(j)
    inner = set(range(1, len(h) - 1))
    rim = np.isin(match, [0, len(h) - 1])
    tp = len(set(match[(match > 0) & (match < len(h) - 1)].tolist()))
    n_det = int((~rim).sum())
    n_true = len(inner)
    heights = np.array([x.height_mm for x in bounds])[~rim] if len(det) else np.zeros(0)
    true_mean = float(np.mean(np.diff(h[1:-1]))) if len(h) > 3 else float("nan")
    det_mean = float(np.mean(np.diff(heights))) if len(heights) > 1 else float("nan")
    # recall over the boundaries both of whose laminae span at least `min_edges` edge lengths (the
    # ones a scan of this sampling can show: an irregular record holds laminae far thinner than its mean)
    edge = float(truth.get("mesh", {}).get("edge_mm") or truth.get("mesh", {}).get("edge_length_mm") or 0.0)
    ok_j = np.array([j for j in range(1, len(h) - 1) if min(th[j - 1], th[j]) >= min_edges * edge]) if edge > 0 else np.zeros(0, int)
    hit = set(match[match >= 0].tolist())
    recall_res = float(np.mean([j in hit for j in ok_j])) if len(ok_j) else float("nan")
    return {"recall": tp / max(n_true, 1), "precision": tp / n_det if n_det else float("nan"),
            "recall_resolvable": recall_res, "n_resolvable": int(len(ok_j)),
            "count_error": (n_det - n_true) / n_true if n_true else float("nan"),
            "thickness_error": (det_mean - true_mean) / true_mean if np.isfinite(det_mean) else float("nan"),
            "n_true": n_true, "n_found": n_det, "matched_by": "plane"}


def run_cell(kind, lamina_edge, lamina_radius, sway_deg, noise_relief, seed=1, n_laminae=N_LAMINAE):
    """Simulate, segment and score one cell; returns a flat dict (JSON-ready)."""
    from bandgeo.features import compute_features
    from bandgeo.segment import BandSegmenter

    truth, spec = make_cell(kind, lamina_edge, lamina_radius, sway_deg, noise_relief, seed, n_laminae)
    t0 = time.perf_counter()
    feats = compute_features(spec)
    seg = BandSegmenter(random_state=seed).fit(spec, feats).segmentation_
    dt = time.perf_counter() - t0
    sc = score(truth, seg)
    refused = bool(seg.warnings) and seg.warnings[0].startswith("bands not resolved")
    verdict = "refused" if refused else ("counted+warned" if seg.warnings else "counted")
    target = is_target_cell(lamina_edge, noise_relief)
    if target:
        ok = (not refused and sc["recall"] >= 0.97 and sc["precision"] >= 0.97
              and abs(sc["count_error"]) <= 0.02 and abs(sc["thickness_error"]) <= 0.03)
    else:
        ok = refused or bool(seg.warnings) or (np.isfinite(sc["count_error"]) and abs(sc["count_error"]) <= 0.10)
    return {"kind": kind, "lamina_edge": lamina_edge, "lamina_radius": lamina_radius, "sway_deg": sway_deg,
            "noise_relief": noise_relief, "seed": seed, "faces": int(len(spec.faces)), **sc, "seconds": dt,
            "verdict": verdict, "target_cell": target, "meets_target": bool(ok),
            "reason": seg.warnings[0] if seg.warnings else ""}


def grid(quick=False):
    """Cells: lamina/edge x noise/relief x kind at the base, plus lamina/radius and sway sweeps."""
    if quick:
        return [("rings", 3.0, 0.02, 7.0, 0.4), ("photogrammetric", 3.0, 0.02, 15.0, 0.4),
                ("ct", 3.0, 0.02, 7.0, 0.4), ("photogrammetric", 1.5, 0.02, 7.0, 0.4),
                ("photogrammetric", 3.0, 0.005, 7.0, 1.0), ("photogrammetric", 3.0, 0.02, 7.0, 0.1)]
    cells = []
    for kind, le, nr in itertools.product(KINDS, LAMINA_EDGE, NOISE_RELIEF):
        cells.append((kind, le, BASE["lamina_radius"], BASE["sway_deg"], nr))
    for kind, lr, sw in itertools.product(KINDS, LAMINA_RADIUS, SWAY):
        c = (kind, BASE["lamina_edge"], lr, sw, BASE["noise_relief"])
        if c not in cells:
            cells.append(c)
    return cells


def summary(rows):
    lines = []
    by = {}
    for r in rows:
        by.setdefault(r["kind"], []).append(r)
    for kind, rs in by.items():
        t = [r for r in rs if r["target_cell"]]
        lines.append(f"{kind:16s} cells meeting target {sum(r['meets_target'] for r in rs)}/{len(rs)}; "
                     f"target cells (>=3 edges, relief >= 2x noise) {sum(r['meets_target'] for r in t)}/{len(t)}")
    lines.append(f"{'all':16s} cells meeting target {sum(r['meets_target'] for r in rows)}/{len(rows)}")
    return lines


def table(rows):
    head = (f"{'kind':15s} {'L/e':>4s} {'L/R':>6s} {'sway':>4s} {'n/r':>4s} {'faces':>8s} {'recall':>6s} "
            f"{'prec':>6s} {'count':>6s} {'thick':>6s} {'sec':>5s} {'verdict':15s} ok")
    out = [head]
    for r in rows:
        out.append(f"{r['kind']:15s} {r['lamina_edge']:4.1f} {r['lamina_radius']:6.3f} {r['sway_deg']:4.0f} "
                   f"{r['noise_relief']:4.1f} {r['faces']:8d} {100 * r['recall']:6.1f} "
                   f"{100 * r['precision'] if np.isfinite(r['precision']) else float('nan'):6.1f} "
                   f"{100 * r['count_error']:+6.1f} {100 * r['thickness_error'] if np.isfinite(r['thickness_error']) else float('nan'):+6.1f} "
                   f"{r['seconds']:5.1f} {r['verdict']:15s} {'yes' if r['meets_target'] else 'NO'}")
    return out


def draw_map(rows, path):
    """The resolvable region: lamina/edge (x) against noise/relief (y), one panel per mesh kind."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    kinds = [k for k in KINDS if any(r["kind"] == k for r in rows)]
    fig, axes = plt.subplots(1, len(kinds), figsize=(4.2 * len(kinds), 3.8), squeeze=False, sharey=True)
    colours = {"counted": "#2e7d32", "counted+warned": "#f9a825", "refused": "#9e9e9e", "wrong": "#c62828"}
    for ax, kind in zip(axes[0], kinds):
        rs = [r for r in rows if r["kind"] == kind and r["lamina_radius"] == BASE["lamina_radius"]
              and r["sway_deg"] == BASE["sway_deg"]]
        for r in rs:
            good = r["recall"] >= 0.97 and r["precision"] >= 0.97 and abs(r["count_error"]) <= 0.02
            if r["verdict"] == "refused":
                c = colours["refused"]
            elif not r["meets_target"]:
                c = colours["wrong"]
            elif good and r["verdict"] == "counted":
                c = colours["counted"]
            elif good:
                c = colours["counted"]
            else:
                c = colours["counted+warned"]
            ax.scatter(r["lamina_edge"], r["noise_relief"], s=260, c=c, marker="s", edgecolors="k")
            ax.annotate(f"{100 * r['recall']:.0f}", (r["lamina_edge"], r["noise_relief"]), ha="center",
                        va="center", fontsize=7, color="white")
        ax.axvline(3.0, color="k", ls="--", lw=0.8)
        ax.axhline(0.5, color="k", ls="--", lw=0.8)
        ax.set_xscale("log")
        ax.set_xticks(LAMINA_EDGE)
        ax.set_xticklabels([f"{x:g}" for x in LAMINA_EDGE])
        ax.xaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
        ax.set_xlabel("lamina thickness / edge length")
        ax.set_title(kind)
    axes[0][0].set_ylabel("scanner noise / groove relief")
    handles = [plt.Line2D([], [], marker="s", ls="", color=c, markeredgecolor="k", markersize=10, label=l)
               for l, c in (("counted right (recall & precision >= 97 %)", colours["counted"]),
                            ("counted with a warning", colours["counted+warned"]),
                            ("refused with a reason", colours["refused"]),
                            ("missed the target (see the table)", colours["wrong"]))]
    fig.legend(handles=handles, loc="lower center", ncol=4, fontsize=8, frameon=False)
    fig.suptitle(f"Resolvable region (lamina/radius {BASE['lamina_radius']}, sway {BASE['sway_deg']:g} deg "
                 f"+ meander; numbers: recall %); dashed: target region")
    fig.tight_layout(rect=(0, 0.08, 1, 0.95))
    Path(path).parent.mkdir(parents=True, exist_ok=True)
    from bandgeo.atomic import write_bytes
    import io

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    plt.close(fig)
    write_bytes(Path(path), buf.getvalue())


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="a handful of cells (a few minutes)")
    ap.add_argument("--json", default=None, help="write the rows as JSON")
    ap.add_argument("--png", default=None, help="draw the resolvable-region map here")
    ap.add_argument("--kinds", default=",".join(KINDS))
    ap.add_argument("--max-faces", type=int, default=4_000_000, help="skip cells with larger meshes")
    ap.add_argument("--merge", nargs="+", default=None, help="only merge these JSON row files, print and draw")
    ap.add_argument("--sweeps", action="store_true", help="only the lamina/radius x sway sweeps")
    args = ap.parse_args(argv)
    if args.merge:
        # later files win for the same cell (re-runs after a fix)
        merged = {}
        for path in args.merge:
            for r in json.loads(Path(path).read_text()):
                merged[(r["kind"], r["lamina_edge"], r["lamina_radius"], r["sway_deg"], r["noise_relief"])] = r
        rows = list(merged.values())
        print("\n".join(table(rows)))
        print()
        print("\n".join(summary(rows)))
        if args.png:
            draw_map(rows, args.png)
            print(f"wrote {args.png}")
        return 0
    kinds = args.kinds.split(",")
    rows = []
    from bandgeo.synth import SynthParams

    cells = [c for c in grid(args.quick) if c[0] in kinds]
    if args.sweeps:
        cells = [c for c in cells if c[1] == BASE["lamina_edge"] and c[4] == BASE["noise_relief"]]
    big = [c for c in cells if SynthParams(**cell_params(*c)).estimated_faces > args.max_faces]
    for c in big:
        print(f"skipped (estimated mesh over {args.max_faces:,} faces): {c}")
    cells = [c for c in cells if c not in big]
    for i, c in enumerate(cells):
        try:
            r = run_cell(*c)
        except Exception as exc:  # a cell that cannot be built or run is reported, not hidden
            r = {"kind": c[0], "lamina_edge": c[1], "lamina_radius": c[2], "sway_deg": c[3], "noise_relief": c[4],
                 "seed": 1, "faces": 0, "recall": float("nan"), "precision": float("nan"),
                 "count_error": float("nan"), "thickness_error": float("nan"), "n_true": 0, "n_found": 0,
                 "seconds": 0.0, "verdict": f"error: {type(exc).__name__}: {exc}", "target_cell": False,
                 "meets_target": False, "reason": str(exc)}
        rows.append(r)
        print(table([r])[1], flush=True)
        if args.json:
            Path(args.json).write_text(json.dumps(rows, indent=1))
    print()
    print("\n".join(table(rows)))
    print()
    print("\n".join(summary(rows)))
    if args.png:
        draw_map(rows, args.png)
        print(f"wrote {args.png}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
