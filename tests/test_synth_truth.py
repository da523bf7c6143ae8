"""The truth file agrees with the mesh: grooves counted on the re-read mesh match the lamina record.

The mesh is read back with trimesh (a general-purpose reference reader, not the generator's code). Each
vertex is placed along the column by the lamina plane of the nearest boundary (centre and normal from
the truth file), because a swaying column tilts its rings; the relief is then the distance from the
axis. Grooves are counted as minima of the relief, not read from an FFT peak: with strongly modulated
thickness the spectral peak of the relief moves to lower frequency than 1 / mean thickness (common
practice; the mean of 1/h exceeds 1/mean(h) by Jensen's inequality and the spectrum spreads).
"""
import copy
import json

import numpy as np
import pytest
import trimesh
from scipy.ndimage import median_filter
from scipy.signal import find_peaks

from bandgeo.synth import SynthParams, simulate, write_specimen


def _to_specimen(points, matrix):
    return points @ matrix[:3, :3].T + matrix[:3, 3]


def lamina_coordinates(v_mm, centres, normals, heights):
    """Arc length of each vertex measured from the nearest boundary plane, and its distance from the axis."""
    axis = normals.mean(axis=0)
    axis /= np.linalg.norm(axis)
    along_c = (centres - centres[0]) @ axis
    along_v = (v_mm - centres[0]) @ axis
    j0 = np.clip(np.searchsorted(along_c, along_v), 0, heights.size - 1)
    best_d = best_j = None
    for off in (-2, -1, 0, 1, 2):
        j = np.clip(j0 + off, 0, heights.size - 1)
        d = np.einsum("ij,ij->i", v_mm - centres[j], normals[j])
        if best_d is None:
            best_d, best_j = d, j
        else:
            better = np.abs(d) < np.abs(best_d)
            best_d, best_j = np.where(better, d, best_d), np.where(better, j, best_j)
    s = heights[best_j] + best_d
    foot = centres[best_j] + best_d[:, None] * normals[best_j]
    return s, np.linalg.norm(v_mm - foot, axis=1)


def count_grooves(mesh_path, truth):
    """Return (grooves found, length searched mm, groove positions mm, (start, end) mm, relief rms mm)."""
    mesh = trimesh.load(mesh_path, process=False)
    spec_from_file = np.array(truth["frames"]["specimen_from_file"])
    b = truth["boundaries"]
    v = _to_specimen(np.asarray(mesh.vertices, dtype=float), spec_from_file)
    c = _to_specimen(np.array(b["centres_file"]), spec_from_file)
    n = np.array(b["normals_file"]) @ spec_from_file[:3, :3].T
    n /= np.linalg.norm(n, axis=1, keepdims=True)
    h = np.array(b["heights_mm"])
    s, r = lamina_coordinates(v, c, n, h)
    wall = (s > h[0] + 0.3) & (s < h[-1] - 0.3) & (r > 0.7 * np.percentile(r, 99))
    step = truth["mesh"]["ring_spacing_mm"] / 2.0
    edges = np.arange(s[wall].min(), s[wall].max(), step)
    idx = np.digitize(s[wall], edges)
    cnt = np.bincount(idx, minlength=edges.size + 1)[1:-1]
    tot = np.bincount(idx, weights=r[wall], minlength=edges.size + 1)[1:-1]
    x = np.arange(cnt.size)
    ok = cnt > 0
    prof = np.interp(x, x[ok], tot[ok] / cnt[ok])
    mean_t = truth["params"]["mean_thickness_mm"]
    relief = prof - median_filter(prof, size=int(3 * mean_t / step) | 1)
    peaks, _ = find_peaks(-relief, prominence=0.5 * truth["mesh"]["groove_depth_effective_mm"])
    return (peaks.size, float(edges[-1] - edges[0]), edges[peaks] + 0.5 * step, (edges[0], edges[-1]),
            float(relief.std()))


#: The ring-aligned mesh with little noise: these tests check the truth file against the mesh
#: geometry, not a segmenter, so the noise stays well below the groove relief.
QUIET = dict(scanner_noise_mm=0.004, groove_depth_mm=0.04)

CASES = {
    # Strong annual modulation, swaying, meandering and leaning column, random pose, centimetres.
    "isotropic_sway_cm": dict(days_per_year=100, years=3, radius_mm=1.5, annual_amplitude=0.3,
                              sway_amplitude_deg=6.0, mean_tilt_deg=4.0, meander_amplitude_deg=1.0,
                              rings_per_lamina=6, units="cm", seed=5, **QUIET),
    # Ring-structured sampling (CT-like), inches, with hiatuses.
    "anisotropic_in": dict(days_per_year=120, years=3, radius_mm=4.0, annual_amplitude=0.3,
                           sampling="anisotropic", rings_per_lamina=6, hiatus_rate_per_year=4,
                           units="in", seed=11, **QUIET),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_grooves_per_length_match_mean_thickness(tmp_path, name):
    spec = simulate(SynthParams(**CASES[name]))
    written = write_specimen(spec, tmp_path / f"{name}.ply")
    truth = json.loads(written["truth"].read_text())
    found, length, positions, (s0, s1), _ = count_grooves(written["mesh"], truth)
    density = found / length
    thickness = np.array(truth["laminae"]["thickness_mm"])
    # Within 5% of 1 / mean recorded lamina thickness (the acceptance figure of the task; analytic:
    # N boundaries over a length N * mean thickness).
    assert density == pytest.approx(1.0 / thickness.mean(), rel=0.05)
    # ... and of 1 / the expected thickness parameter (the model's expectation, sampling error ~2%).
    assert density == pytest.approx(1.0 / truth["params"]["mean_thickness_mm"], rel=0.05)
    # The grooves sit on the boundaries the truth file lists (half the grooves within 0.1 of a lamina).
    h = np.array(truth["boundaries"]["heights_mm"])
    h = h[(h > s0) & (h < s1)]
    offset = np.abs(positions[:, None] - h[None, :]).min(axis=1)
    assert np.median(offset) < 0.1 * thickness.mean()


def test_fixed_height_sections_blur_the_grooves_of_a_swaying_column(tmp_path):
    """Why the relief is taken along lamina planes: at fixed height a tilted ring spans several laminae.

    Geometric fact (common practice): a ring of radius R tilted by theta spans 2 R tan(theta) in height,
    here 2 * 4 mm * tan(8 deg) = 1.1 mm, more than four 0.25 mm laminae.
    """
    p = SynthParams(days_per_year=100, years=2, radius_mm=4.0, sway_amplitude_deg=4.0, mean_tilt_deg=8.0,
                    sampling="anisotropic", ring_vertices=48, rings_per_lamina=6, pose="identity", seed=3,
                    meander_amplitude_deg=0.0, **QUIET)
    written = write_specimen(simulate(p), tmp_path / "tilted.ply")
    truth = json.loads(written["truth"].read_text())
    found, length, _, _, _ = count_grooves(written["mesh"], truth)
    assert found / length == pytest.approx(1.0 / p.mean_thickness_mm, rel=0.05)
    # Same count, but every boundary plane replaced by the horizontal plane through its centre.
    flat = copy.deepcopy(truth)
    up = np.array(truth["frames"]["paleo_up_file"])
    flat["boundaries"]["normals_file"] = np.tile(up, (len(truth["boundaries"]["heights_mm"]), 1)).tolist()
    found_flat, length_flat, _, _, _ = count_grooves(written["mesh"], flat)
    # At fixed height the grooves of a tilted ring smear over several laminae, and the minima no longer
    # count the laminae (off by more than 20%).
    assert abs(found_flat / length_flat * p.mean_thickness_mm - 1.0) > 0.2


def test_colour_bands_match_the_laminae(tmp_path):
    """Per-vertex colour read back by trimesh: one dark film per lamina, just below each boundary."""
    p = SynthParams(days_per_year=100, years=2, radius_mm=3.0, sampling="anisotropic", ring_vertices=32,
                    rings_per_lamina=8, annual_amplitude=0.3, sway_amplitude_deg=5.0, units="mm", seed=8,
                    **QUIET)
    written = write_specimen(simulate(p), tmp_path / "colour.ply")
    truth = json.loads(written["truth"].read_text())
    mesh = trimesh.load(written["mesh"], process=False)
    m = np.array(truth["frames"]["specimen_from_file"])
    b = truth["boundaries"]
    h = np.array(b["heights_mm"])
    n = np.array(b["normals_file"]) @ m[:3, :3].T
    s, _ = lamina_coordinates(_to_specimen(np.asarray(mesh.vertices, float), m),
                              _to_specimen(np.array(b["centres_file"]), m), n / np.linalg.norm(n, axis=1)[:, None], h)
    rgb = np.asarray(mesh.visual.vertex_colors)[:, :3].astype(float)
    # Rec. 601 luma weights (common practice).
    luma = rgb @ [0.299, 0.587, 0.114]
    wall = (s > 0.5) & (s < h[-1] - 0.5)
    step = truth["mesh"]["ring_spacing_mm"]
    edges = np.arange(s[wall].min(), s[wall].max(), step)
    idx = np.digitize(s[wall], edges)
    cnt = np.bincount(idx, minlength=edges.size + 1)[1:-1]
    prof = np.bincount(idx, weights=luma[wall], minlength=edges.size + 1)[1:-1] / np.maximum(cnt, 1)
    x = np.arange(prof.size)
    prof = np.interp(x, x[cnt > 0], prof[cnt > 0])
    dark, _ = find_peaks(-prof, prominence=20.0)
    length = edges[-1] - edges[0]
    thickness = np.array(truth["laminae"]["thickness_mm"])
    assert dark.size / length == pytest.approx(1.0 / thickness.mean(), rel=0.05)
    # The darkest point of each lamina lies in its upper part, within a quarter thickness of its top.
    pos = edges[dark] + 0.5 * step
    above = h[np.searchsorted(h, pos)]
    assert np.median((above - pos) / thickness.mean()) < 0.25
