"""bandgeo.unroll.nearest_sample: the window search with its distance bound gives the k-d tree's
answer (scipy.spatial.cKDTree, the general-purpose reference), on gently and sharply bent curves, with
vertices beyond the ends and far off the axis; and the unrolled coordinates do not depend on which
of the two found the samples."""
import numpy as np
import pytest
from scipy.spatial import cKDTree

from bandgeo import unroll as U


def _curve(k, bend):
    """k samples of a planar arc (``bend`` radians in all) with unit tangents, length 100 mm."""
    u = np.linspace(0.0, 1.0, k)
    if bend == 0:
        p = np.stack([np.zeros(k), np.zeros(k), 100.0 * u], axis=1)
        t = np.tile([0.0, 0.0, 1.0], (k, 1))
    else:
        radius = 100.0 / bend
        ang = bend * u
        p = np.stack([radius * (1 - np.cos(ang)), np.zeros(k), radius * np.sin(ang)], axis=1)
        t = np.stack([np.sin(ang), np.zeros(k), np.cos(ang)], axis=1)
    return p, t


def _points(n, seed, radius=10.0, beyond=15.0, p=None):
    rng = np.random.default_rng(seed)
    z = rng.uniform(-beyond, 100.0 + beyond, n)
    th = rng.uniform(0, 2 * np.pi, n)
    rr = radius * np.sqrt(rng.uniform(0.0, 1.0, n))
    pts = np.stack([rr * np.cos(th), rr * np.sin(th), z], axis=1)
    if p is not None:  # follow a bent curve: offset from the nearest height's sample
        j = np.clip(np.rint(z / 100.0 * (len(p) - 1)).astype(int), 0, len(p) - 1)
        pts[:, 2] -= np.clip(z, 0, 100.0)
        pts += p[j]
    return pts


@pytest.mark.parametrize("bend, radius", [(0.0, 10.0), (0.3, 10.0), (1.0, 20.0), (3.0, 40.0)])
def test_nearest_sample_is_the_tree_answer(bend, radius, monkeypatch):
    k = 120
    monkeypatch.setattr(U, "_MIN_VERTICES_PER_SAMPLE", 1)  # the window search even on a small set
    monkeypatch.setattr(U, "_BLOCK", 4096)                 # in blocks shared by two threads
    p, t = _curve(k, bend)
    v = _points(60_000, seed=int(10 * bend), radius=radius, p=p)
    expected = cKDTree(p).query(v, k=1)[1]
    got = U.nearest_sample(p, t, v)
    assert np.array_equal(got, expected)


def test_the_bound_sends_a_u_turn_to_the_tree(monkeypatch):
    """A curve that turns back within a vertex's distance (bend radius 100/3.0 ~ 33 mm < 40 mm off the
    axis): a window's local nearest is not the nearest; the per-vertex bound must catch every such
    vertex (the tree's answer is returned for it)."""
    monkeypatch.setattr(U, "_MIN_VERTICES_PER_SAMPLE", 1)
    p, t = _curve(120, 3.0)
    v = _points(20_000, seed=7, radius=60.0, p=p)
    got = U.nearest_sample(p, t, v)
    assert np.array_equal(got, cKDTree(p).query(v, k=1)[1])


def test_unrolled_coordinates_do_not_depend_on_the_search(monkeypatch):
    class Axis:
        pass

    p, t = _curve(400, 0.4)
    axis = Axis()
    axis.heights_mm = np.linspace(0.0, 100.0, 400)
    axis.points_mm, axis.tangents = p, t
    v = _points(50_000, seed=3, radius=8.0, p=p)
    monkeypatch.setattr(U, "_MIN_VERTICES_PER_SAMPLE", 1)
    monkeypatch.setattr(U, "_BLOCK", 2048)  # many blocks: the two threads take part
    fast = U._compute(v, axis)
    monkeypatch.setattr(U, "_MAX_PAIRS_SAMPLES", 0)  # the k-d tree alone
    slow = U._compute(v, axis)
    for a, b in zip(fast, slow):
        assert np.array_equal(a, b)
    # and the heights are arc lengths: a point on the axis sits at its own height (analytic)
    on_axis = U._compute(p[50:51] + 0.0, axis)
    assert on_axis.s_mm[0] == pytest.approx(axis.heights_mm[50], abs=1e-6)
    # the fine samples lie on chords between the axis samples: off the arc by at most the sagitta
    # R (1 - cos(theta / 2)) ~ R theta^2 / 8 = 250 * (0.4 / 399)^2 / 8 ~ 3e-5 mm (analytic)
    assert on_axis.radius_mm[0] == pytest.approx(0.0, abs=5e-5)
