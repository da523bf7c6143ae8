"""The review page's save re-runs only what an edit changes, and gives what a full run gives.

Reference for every check here: the full computation itself (common practice: an incremental update
is tested against recomputing from scratch), and ``numpy.median`` (a reference library) for the
per-slice medians of the relief profile.
"""
import json

import numpy as np
import pytest

from bandgeo import pipeline
from bandgeo.results import ResultFolder
from bandgeo.review.app import ReviewApp
from bandgeo.segment import Boundary, Centreline
from bandgeo.segment.model import assign_bands, vertex_projection
from bandgeo.series import _slice_medians

from test_review_support import make_long_folder


def swaying_column(n=60000, length=30.0, radius=3.0, seed=0):
    """A column whose axis sways (so the centreline is a curve) with points on its wall."""
    rng = np.random.default_rng(seed)
    h = np.linspace(0.0, length, 300)
    pts = np.stack([0.4 * np.sin(h / 4.0), 0.3 * np.cos(h / 5.0), h], axis=1)
    tan = np.gradient(pts, h, axis=0)
    tan /= np.linalg.norm(tan, axis=1, keepdims=True)
    axis = Centreline(h, pts, tan)
    s = rng.uniform(-0.5, length + 0.5, n)
    th = rng.uniform(0, 2 * np.pi, n)
    p, t = axis.at(s)
    e1 = np.cross(t, [1.0, 0.0, 0.0])
    e1 /= np.linalg.norm(e1, axis=1, keepdims=True)
    e2 = np.cross(t, e1)
    r = radius * (1 + 0.02 * rng.standard_normal(n))
    v = p + r[:, None] * (np.cos(th)[:, None] * e1 + np.sin(th)[:, None] * e2)
    return axis, v


def tilted(axis, h, id, rng, tilt_deg=12.0):
    """A boundary at height ``h`` whose plane is tilted up to ``tilt_deg`` from the axis normal plane."""
    b = Boundary.from_height(h, axis, id=id, origin="auto")
    kick = rng.normal(size=3) * np.radians(tilt_deg) / 2
    return Boundary(id, h, b.center_mm, b.normal + kick - (kick @ b.normal) * b.normal, origin="auto")


def full(v, bs, axis):
    """The full assignment: every vertex projected and examined afresh."""
    s, _ = axis.project(np.asarray(v, float))
    return assign_bands(v, bs, axis, s=s)


def test_incremental_band_assignment_equals_a_full_one():
    axis, v = swaying_column()
    rng = np.random.default_rng(3)
    heights = np.cumsum(rng.uniform(0.15, 0.45, 90)) + 0.2
    bs = [tilted(axis, h, i, rng) for i, h in enumerate(heights[heights < 29.5])]
    first = assign_bands(v, bs, axis)
    assert np.array_equal(first, full(v, bs, axis))
    proj = vertex_projection(v, axis)
    assert proj.last_examined == len(v)
    next_id = 1000

    def edit(kind, cur):
        nonlocal next_id
        cur = sorted(cur, key=lambda b: b.height_mm)
        i = int(rng.integers(3, len(cur) - 4))
        if kind == "move":
            b = cur[i]
            return cur[:i] + [tilted(axis, b.height_mm + 0.4 * (cur[i + 1].height_mm - b.height_mm), b.id, rng)] \
                + cur[i + 1:]
        next_id += 1
        if kind == "add":
            return cur + [tilted(axis, 0.5 * (cur[i].height_mm + cur[i + 1].height_mm), next_id, rng)]
        if kind == "remove":
            return cur[:i] + cur[i + 1:]
        if kind == "remove base":
            return cur[1:]
        if kind == "remove top":
            return cur[:-1]
        if kind == "add below":
            return [tilted(axis, cur[0].height_mm - 0.3, next_id, rng)] + cur
        if kind == "add above":
            return cur + [tilted(axis, cur[-1].height_mm + 0.3, next_id, rng)]
        if kind == "many":  # a stretch of five boundaries moved at once
            return cur[:i] + [tilted(axis, b.height_mm + 0.05, b.id, rng) for b in cur[i:i + 5]] + cur[i + 5:]
        raise AssertionError(kind)

    cur = bs
    kinds = ["move", "add", "remove", "remove base", "add below", "remove top", "add above", "many"] * 2
    for kind in kinds:
        cur = edit(kind, cur)
        got = assign_bands(v, cur, axis)
        assert np.array_equal(got, full(v, cur, axis)), kind
        if kind in ("move", "add", "remove"):
            # one edit re-examines the vertices near it only
            assert 0 < proj.last_examined < len(v) // 4, (kind, proj.last_examined)
    # the kept assignment is a copy: changing a returned array does not change the next answer
    got[:] = 7
    again = assign_bands(v, cur, axis)
    assert np.array_equal(again, full(v, cur, axis))


def test_projection_is_made_again_when_the_vertices_change_in_place():
    axis, v = swaying_column(n=5000)
    bs = [Boundary.from_height(h, axis, id=i) for i, h in enumerate(np.arange(1.0, 29.0, 0.5))]
    assign_bands(v, bs, axis)
    v[:, 2] += 0.25  # the same array, moved
    assert np.array_equal(assign_bands(v, bs, axis), full(v, bs, axis))


def test_slice_medians_equal_numpy_median():
    rng = np.random.default_rng(5)
    values = rng.normal(size=20000)
    # slices of ordinary, empty, single and very long lengths (a column's flat end)
    cuts = np.concatenate([[0], np.cumsum(rng.integers(0, 60, 200)), [20000]])
    cuts = np.sort(np.concatenate([cuts, cuts[5:8]]))
    expected = np.array([np.median(values[a:b]) if b > a else np.nan for a, b in zip(cuts[:-1], cuts[1:])])
    assert np.array_equal(_slice_medians(values, cuts), expected, equal_nan=True)


@pytest.fixture(scope="module")
def long_folder(tmp_path_factory):
    return make_long_folder(tmp_path_factory.mktemp("rerun") / "KRB-41", n_bands=260, days_per_year=52.0)


def _same(a, b, path=""):
    """Equal JSON-like documents, numbers within 1e-9 relative."""
    if isinstance(a, dict):
        assert isinstance(b, dict) and set(a) == set(b), path
        for k in a:
            _same(a[k], b[k], f"{path}.{k}")
    elif isinstance(a, list):
        assert isinstance(b, list) and len(a) == len(b), path
        for i, (x, y) in enumerate(zip(a, b)):
            _same(x, y, f"{path}[{i}]")
    elif isinstance(a, float) and isinstance(b, (int, float)):
        assert b == pytest.approx(a, rel=1e-9, abs=1e-12), path
    else:
        assert a == b, path


def test_rerunner_saves_what_a_fresh_run_gives(long_folder, tmp_path):
    folder = long_folder
    app = ReviewApp(folder, "token")  # the page's own session builds the review as a save does
    runner = pipeline.Rerunner(folder)
    runner.warm()
    rows = sorted(app.data.segmentation.boundaries, key=lambda b: b.height_mm)
    h = [b.height_mm for b in rows]
    edits = [{"op": "move", "id": rows[100].id, "height_mm": h[100] + 0.3 * (h[101] - h[100])},
             {"op": "add", "height_mm": 0.5 * (h[150] + h[151])},
             {"op": "reject", "id": rows[60].id},
             {"op": "accept_stretch", "s0_mm": h[20] - 1e-3, "s1_mm": h[45] + 1e-3},
             {"op": "hiatus", "s0_mm": h[200], "s1_mm": h[203]},
             {"op": "merge", "id": rows[230].id},
             {"op": "reject", "id": rows[0].id}]
    n = len(runner.specimen.vertices_mm)
    for number, e in enumerate(edits, start=1):
        app.session.push(e)
        review = {"specimen_id": app.data.specimen_id, "scan_sha256": app.data.scan_sha256,
                  "basis": app.data.basis, "edits": app.session.edits}
        saved = runner(review=review, report=False)
        examined = vertex_projection(runner.specimen.vertices_mm, runner.segmentation.axis).last_examined
        if e["op"] in ("move", "add", "reject"):
            assert examined < n // 4, (e, examined)  # re-assigned near the edit only
        inputs = ResultFolder(folder).load_inputs(review=False)  # fresh arrays: nothing kept is re-used
        fresh = pipeline.downstream(inputs.specimen, inputs.segmentation, review, inputs.params)
        assert saved.result["review"]["n_edits"] == number
        assert np.array_equal(saved.segmentation.vertex_band, fresh.segmentation.vertex_band)
        for col in ("base_mm", "top_mm", "thickness_axis_mm", "thickness_median_mm", "thickness_iqr_mm",
                    "inclination_deg", "azimuth_deg", "confidence"):
            np.testing.assert_allclose(getattr(saved.band_table, col), getattr(fresh.band_table, col),
                                       rtol=1e-12, atol=1e-12, err_msg=col)
        assert saved.band_table.flags == fresh.band_table.flags
        np.testing.assert_allclose(saved.series.depth_relief, fresh.series.depth_relief, rtol=0, atol=1e-12)
        written = json.loads((folder / "result.json").read_text())
        for block in ("bands", "daily_test", "days_per_year", "length_of_day_hours", "review", "warnings"):
            _same(fresh.result.get(block), written.get(block), block)
        fresh.band_table.to_csv(tmp_path / "fresh.csv")
        assert (folder / "bands.csv").read_text() == (tmp_path / "fresh.csv").read_text()
