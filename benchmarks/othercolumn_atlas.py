"""Segmentation accuracy on columns bandgeo's forward model did not make (``othercolumn.py``).

The accuracy atlas (``accuracy_atlas.py``) runs on ``bandgeo.synth`` meshes; this runs the same targets
on the independent generator, scored by geometry (``accuracy_atlas.score_planes``: each detected
boundary's centre within a third of the local lamina of a true plane, measured along that plane's
normal; arc lengths along the generator's bent axis and bandgeo's centreline drift apart): gamma-renewal laminae, flat tilted boundary planes, a bent, leaning column
with a drifting elliptical section, asymmetric grooves, zipper-stitched rows and isotropic noise, in a
random pose. Prints one row per cell and a summary.

    python benchmarks/othercolumn_atlas.py [--laminae 120]
    python benchmarks/othercolumn_atlas.py --seeds 1,2,3 --targets-only   # the "12 columns" of the docs

With several seeds, one row per cell and seed, then the means over all rows (recall, recall over the
resolvable boundaries, precision, mean absolute count error): the figures the segmentation rules were
set and checked on (docs/segmentation.md).
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
import othercolumn  # noqa: E402
from accuracy_atlas import is_target_cell, score_planes  # noqa: E402

#: (lamina / edge, noise / groove relief, sway deg): the target region is lamina >= 3 edges, relief >= 2x noise
CELLS = [(3.5, 0.3, 4.0), (3.5, 0.3, 12.0), (5.0, 0.3, 4.0), (3.0, 0.5, 4.0), (3.5, 1.0, 4.0), (2.0, 0.3, 4.0),
         (1.5, 0.3, 4.0)]


def run_cell(lamina_edge, noise_relief, sway_deg, n_laminae, seed=1, semi_axes=(7.0, 5.0)):
    from bandgeo.features import compute_features
    from bandgeo.scan import Scan, prepare
    from bandgeo.segment import BandSegmenter

    T, dpy = 0.2, 380.0
    depth = 0.25 * T
    v, f, truth = othercolumn.make_column(seed=seed, years=n_laminae / dpy, days_per_year=dpy, mean_thickness_mm=T,
                                          edge_mm=T / lamina_edge, groove_depth_mm=depth,
                                          noise_mm=noise_relief * depth, sway_deg=sway_deg,
                                          semi_axes_mm=semi_axes, pose="random")
    scan = Scan(vertices=v, faces=f, colors=None, path="other.ply", sha256="0", file_format="ply-binary-le")
    fr = truth["frames"]
    spec = prepare(scan, units="mm", up=np.asarray(fr["paleo_up_file"]))
    t0 = time.perf_counter()
    seg = BandSegmenter(random_state=seed).fit(spec, compute_features(spec)).segmentation_
    dt = time.perf_counter() - t0
    sc = score_planes(truth, seg, spec)
    refused = bool(seg.warnings) and seg.warnings[0].startswith("bands not resolved")
    target = is_target_cell(lamina_edge, noise_relief)
    if target:
        ok = (not refused and sc["recall"] >= 0.97 and sc["precision"] >= 0.97
              and abs(sc["count_error"]) <= 0.02 and abs(sc["thickness_error"]) <= 0.03)
    else:
        ok = refused or bool(seg.warnings) or abs(sc["count_error"]) <= 0.10
    verdict = "refused" if refused else ("counted+warned" if seg.warnings else "counted")
    return dict(lamina_edge=lamina_edge, noise_relief=noise_relief, sway_deg=sway_deg, faces=len(f), seconds=dt,
                verdict=verdict, target=target, ok=ok, **sc)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--laminae", type=int, default=120, help="laminae per column (default 120)")
    ap.add_argument("--seeds", default="1", help="comma-separated generator seeds (default 1)")
    ap.add_argument("--targets-only", action="store_true", help="only the cells of the target region")
    args = ap.parse_args(argv)
    seeds = [int(x) for x in args.seeds.split(",")]
    cells = [c for c in CELLS if not args.targets_only or is_target_cell(c[0], c[1])]
    print(f"{'seed':>4} {'lam/edge':>8} {'noise/relief':>12} {'sway':>5} {'faces':>8} {'recall':>7} {'rec>=3e':>7} {'precis':>7} "
          f"{'count':>7} {'thick':>7} {'sec':>6}  verdict         target  meets")
    rows = []
    for seed in seeds:
        for le, nr, sw in cells:
            r = run_cell(le, nr, sw, args.laminae, seed=seed)
            rows.append(r)
            print(f"{seed:4d} {le:8.1f} {nr:12.1f} {sw:5.0f} {r['faces']:8d} {r['recall']:7.1%} {r['recall_resolvable']:7.1%} {r['precision']:7.1%} "
                  f"{r['count_error']:+7.1%} {r['thickness_error']:+7.1%} {r['seconds']:6.1f}  {r['verdict']:15s} "
                  f"{'yes' if r['target'] else 'no':6s}  {'yes' if r['ok'] else 'NO'}", flush=True)
    print("recall: inner boundaries matched (centre within a third of the local lamina of a true plane, along its "
          "normal); rec>=3e: the same over boundaries both of whose laminae span >= 3 edge lengths (the gamma-renewal "
          "record has a thickness CV of about 0.4, so many laminae are thinner than the mean lamina / edge ratio "
          "of the cell)")
    t = [r for r in rows if r["target"]]
    print(f"othercolumn: cells meeting target {sum(r['ok'] for r in rows)}/{len(rows)}; "
          f"target cells {sum(r['ok'] for r in t)}/{len(t)}")
    counted = [r for r in rows if r["verdict"] != "refused"]
    if len(seeds) > 1 and counted:
        def mean(key, f=lambda x: x):
            vals = [f(r[key]) for r in counted if np.isfinite(r[key])]
            return 100 * float(np.mean(vals)) if vals else float("nan")
        print(f"means over {len(counted)} counted columns (seeds {args.seeds}): recall {mean('recall'):.1f} %, "
              f"recall over resolvable boundaries {mean('recall_resolvable'):.1f} %, precision {mean('precision'):.1f} %, "
              f"mean |count error| {mean('count_error', abs):.1f} %")


if __name__ == "__main__":
    main()
