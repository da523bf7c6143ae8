"""Segmentation accuracy on forward-model specimens with known truth (bandgeo.synth).

Targets (issue 4): boundary recall and precision >= 97 %, median thickness error <= 5 % of the mean
thickness, growth direction within 1 deg, and no invented bands where the relief is below the noise.
A detected boundary matches a true one within +-30 % of the local thickness (the thinner neighbouring
lamina). The two end rims of the column (the cut base and the top cap) are not grooves on the side wall,
so they are left out of the recall; a detection matching them still counts as correct.
"""
import numpy as np
import pytest

from bandgeo.features import compute_features
from bandgeo.measure import mean_growth_direction, measure_bands
from bandgeo.scan import Scan, prepare
from bandgeo.segment import BandSegmenter
from bandgeo.synth import SynthParams, simulate

# ring-aligned meshes (rings_per_lamina selects them) with the scanner noise and groove depth these
# cases were written for; the unaligned kinds and realistic noise are in tests/test_segment_atlas.py
BASE = dict(years=0.1, radius_mm=3.0, rings_per_lamina=4.0, scanner_noise_mm=0.004, groove_depth_mm=0.04)

CASES = {
    "tilted-swaying-random-pose": dict(mean_tilt_deg=10.0, sway_amplitude_deg=5.0, pose="random", seed=11),
    "noisy-holed": dict(scanner_noise_mm=0.008, holes=2, seed=12),
    "anisotropic-cm-open": dict(sampling="anisotropic", units="cm", base="open", top="open", seed=13),
    # half a year of strong annual modulation: the thinnest laminae are two to three samples thick
    "flat-top-half-year-annual": dict(years=0.5, radius_mm=2.0, top="flat", dome_height_mm=0.8,
                                      annual_amplitude=0.4, annual_phase_rad=3.1, seed=14),
}


def run_case(params):
    """Simulate, prepare through bandgeo.scan with the truth's up and north, segment and measure."""
    p = SynthParams(**{**BASE, **params})
    sp = simulate(p)
    scan = Scan(vertices=sp.vertices, faces=sp.faces, colors=sp.colors, path="synth.ply", sha256="0",
                file_format="ply-binary-le")
    fr = sp.truth["frames"]
    spec = prepare(scan, units=p.units, up=np.asarray(fr["paleo_up_file"]), north=np.asarray(fr["north_file"]))
    feat = compute_features(spec)
    seg = BandSegmenter(random_state=p.seed).fit(spec, feat).segmentation_
    table = measure_bands(spec, seg)
    # the true ring centres lie on the true centreline (construction); map them into the specimen frame
    c_file = np.asarray(sp.truth["boundaries"]["centres_file"], float)
    m = np.asarray(spec.scan_to_specimen, float)
    seg.truth_centres_mm = c_file @ m[:3, :3].T + m[:3, 3]
    return sp.truth, seg, table


def score(truth, seg, table):
    """Recall, precision, median |thickness error| / mean thickness, growth-direction error (deg)."""
    h = np.asarray(truth["boundaries"]["heights_mm"], float)
    th = np.diff(h)
    tol = 0.3 * np.r_[th[0], np.minimum(th[:-1], th[1:]), th[-1]]
    det = seg.heights_mm()
    match = np.full(len(det), -1)
    used = set()
    for i, d in enumerate(det):
        j = int(np.argmin(np.abs(h - d)))
        if abs(h[j] - d) <= tol[j] and j not in used:
            match[i] = j
            used.add(j)
    inner = set(range(1, len(h) - 1))
    recall = len(used & inner) / len(inner)
    precision = float(np.mean(match >= 0)) if len(det) else float("nan")
    terr = [table.thickness_axis_mm[k] - th[match[k]] for k in range(len(det) - 1)
            if match[k] >= 0 and match[k + 1] == match[k] + 1]
    thick_err = float(np.median(np.abs(terr)) / np.mean(th)) if terr else float("nan")
    g = mean_growth_direction(table)
    gt = np.asarray(truth["frames"]["growth_direction_specimen"], float)
    ang = float(np.degrees(np.arccos(np.clip(np.dot(g, gt), -1.0, 1.0))))
    # per-band inclination against the truth laminae (same index as the matched base boundary)
    inc_true = np.asarray(truth["laminae"]["inclination_deg"], float)
    inc_err = [abs(table.inclination_deg[k] - inc_true[match[k]]) for k in range(len(det) - 1)
               if match[k] >= 0 and match[k + 1] == match[k] + 1]
    centres = getattr(seg, "truth_centres_mm", None)
    axis_err = float("nan")
    if centres is not None:
        _, off = seg.axis.project(centres[1:-1])
        axis_err = float(np.median(np.linalg.norm(off, axis=1)))
    return {"recall": recall, "precision": precision, "thickness_error": thick_err, "growth_deg": ang,
            "axis_error_mm": axis_err,
            "inclination_err_deg": float(np.median(inc_err)) if inc_err else float("nan"),
            "n_detected": len(det), "n_true": len(h)}


@pytest.fixture(scope="module")
def results():
    return {name: score(*run_case(params)) for name, params in CASES.items()}


@pytest.mark.parametrize("name", list(CASES))
def test_accuracy_targets(results, name):
    r = results[name]
    print(f"\n{name}: recall {100 * r['recall']:.1f}%, precision {100 * r['precision']:.1f}%, "
          f"median thickness error {100 * r['thickness_error']:.2f}% of mean, growth direction error "
          f"{r['growth_deg']:.3f} deg, median band inclination error {r['inclination_err_deg']:.3f} deg "
          f"({r['n_detected']} found / {r['n_true']} true incl. 2 end rims); centreline "
          f"{1000 * r['axis_error_mm']:.1f} um from the true ring centres")
    # targets of issue 4 (acceptance criteria of the project)
    assert r["recall"] >= 0.97
    assert r["precision"] >= 0.97
    assert r["thickness_error"] <= 0.05
    assert r["growth_deg"] <= 1.0
    # the centreline follows the leaning, swaying column: within 2 % of the radius of the true axis
    assert r["axis_error_mm"] <= 0.02 * BASE["radius_mm"]


def test_pooled_figures(results):
    rec = np.mean([r["recall"] for r in results.values()])
    pre = np.mean([r["precision"] for r in results.values()])
    print(f"\npooled over {len(results)} specimens: recall {100 * rec:.1f}%, precision {100 * pre:.1f}%, "
          f"worst thickness error {100 * max(r['thickness_error'] for r in results.values()):.2f}%, "
          f"worst growth error {max(r['growth_deg'] for r in results.values()):.3f} deg")
    assert rec >= 0.97 and pre >= 0.97


def test_faint_relief_says_so_and_invents_nothing():
    # groove depth 0.002 mm under scanner noise 0.004 mm (rms): the relief is below the noise
    truth, seg, table = run_case(dict(groove_depth_mm=0.002, seed=15))
    assert seg.warnings and seg.warnings[0].startswith("bands not resolved")
    assert len(seg.boundaries) == 0 and len(table) == 0
    assert any("not resolved" in str(f[2]) or "below scanner noise" in str(f[2]) for f in seg.resolution["flagged"])
    assert np.all(seg.vertex_band == -1)


def test_same_seed_same_result():
    p = dict(seed=16, years=0.06)
    _, a, _ = run_case(p)
    _, b, _ = run_case(p)
    assert np.array_equal(a.heights_mm(), b.heights_mm())
    assert np.array_equal(a.vertex_band, b.vertex_band)


def test_coarse_sampling_is_flagged():
    # two vertex rings per lamina: bands at 2 samples each, below the ~3 samples a band needs
    # (resolution honesty rule of issue 4): a warning and flagged stretches, whatever is traced
    truth, seg, table = run_case(dict(years=0.05, radius_mm=2.0, rings_per_lamina=2.0, seed=17))
    res = seg.resolution
    assert res["spacing_to_sampling"] < 3.0
    assert any("sampling interval" in w for w in seg.warnings)
    assert any("sampling interval" in str(f[2]) or "not resolved" in str(f[2]) for f in res["flagged"])


def test_fixed_class_count_progress_and_untouched_options():
    # scikit-learn convention (common practice): fit sets trailing-underscore results and leaves the
    # options as given; progress reports go through the callback
    p = SynthParams(**{**BASE, "years": 0.04, "seed": 18})
    sp = simulate(p)
    scan = Scan(vertices=sp.vertices, faces=sp.faces, colors=sp.colors, path="s.ply", sha256="0",
                file_format="ply-binary-le")
    spec = prepare(scan, units=p.units, up=np.asarray(sp.truth["frames"]["paleo_up_file"]))
    feat = compute_features(spec)
    calls = []
    est = BandSegmenter(n_classes=3, random_state=5)
    before = est.get_params()
    est.fit(spec, feat, progress=lambda d, done, total: calls.append((d, done, total)))
    assert est.get_params() == before and est.n_classes_ == 3 and est.bic_ == {}
    assert est.segmentation_.class_names == ["groove", "flank", "ridge"]
    assert calls and calls[-1][1] == calls[-1][2]
    assert len(est.segmentation_.boundaries) >= 5
