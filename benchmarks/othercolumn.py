"""A second, deliberately different generator of laminated-column meshes, for checks.

It shares no code with ``bandgeo.synth`` (the forward model the pipeline was built beside), so that a
segmenter tuned on one generator's quirks is caught out by the other. What differs on purpose:

================  =========================================  ===========================================
                  bandgeo.synth                              othercolumn (this file)
================  =========================================  ===========================================
thickness         log-normal AR(1) noise x annual cosine     gamma renewal: deposition intervals
                                                             Gamma(k, 1/k) days times a skewed seasonal
                                                             growth rate
boundaries        domes on planes perpendicular to the       flat tilted planes; the axis is the polyline
                  centreline, rings about a curved axis      through the plane centres
cross-section     circle (slowly varying radius)             horizontal ellipse whose axes and
                                                             orientation drift along the height
growth direction  mean lean + annual sine sway + AR(1)       a bend (lean changing linearly with height)
                  meander                                    + a skewed annual sway + a random walk
groove            symmetric raised cosine at the boundary    asymmetric: sharp drop just below a boundary,
                                                             slow exponential recovery above it
mesh              Delaunay in (arc, height) / marching       rows of vertices at constant world height
                  cubes / rings perpendicular to the axis    with random phases and height jitter,
                                                             stitched row to row by a zipper walk;
                                                             caps by concentric rings
noise             along the normal, then Taubin smoothing    isotropic 3-D Gaussian, no smoothing
================  =========================================  ===========================================

API (importable: ``sys.path.insert(0, "benchmarks"); import othercolumn``)::

    vertices, faces, truth = othercolumn.make_column(seed=3, years=2.0, mean_thickness_mm=0.2)
    othercolumn.write_column("col.ply", vertices, faces, truth)   # PLY + col.truth.json

The truth dict follows the schema of ``bandgeo.synth`` truth files (``bandgeo.synth-truth/1``): the
fields a checker needs are ``boundaries.heights_mm`` (arc length along the true axis), ``centres_mm`` /
``normals`` (specimen frame) and ``centres_file`` / ``normals_file`` (file frame),
``laminae.thickness_mm`` (along the axis), ``laminae.n_recorded``, ``laminae.recorded_laminae_per_year``,
``frames.specimen_from_file`` / ``file_from_specimen`` / ``paleo_up_file`` and ``mesh.*``.
The specimen frame is millimetres, z = paleo-up, origin on the axis at the base.

Run as a script to write one column:  ``python benchmarks/othercolumn.py OUT.ply [--seed N] [--years Y]``.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import sys
from pathlib import Path

import numpy as np

TRUTH_SCHEMA = "bandgeo.synth-truth/1"

#: Default parameters of make_column (lengths mm, angles degrees).
DEFAULTS = dict(
    days_per_year=380.0,       # mean deposition interval is one day
    years=2.0,
    mean_thickness_mm=0.2,     # expected lamina thickness along the axis
    gamma_shape=6.0,           # shape k of the Gamma(k, 1/k) deposition intervals (CV = 1/sqrt(k))
    seasonal_amplitude=0.3,    # fractional amplitude of the skewed seasonal growth rate
    seasonal_skew=0.6,         # 0 = sine; towards 1 = fast spring rise, slow autumn decline
    semi_axes_mm=(7.0, 5.0),   # horizontal ellipse at the base (a, b)
    semi_axis_drift=0.15,      # fractional slow drift of the semi-axes along the height
    ellipse_turn_deg=40.0,     # the ellipse's orientation turns by this much from base to top
    lean_deg=4.0,              # lean of the axis at the base ...
    bend_deg=6.0,              # ... changing linearly by this much from base to top (a curved column)
    lean_azimuth_deg=60.0,
    sway_deg=4.0,              # annual sway amplitude (skewed waveform)
    sway_azimuth_deg=150.0,
    walk_deg=0.08,             # random-walk step of the growth direction per lamina (each component)
    groove_depth_mm=None,      # None: 0.25 * mean_thickness_mm
    groove_rise=0.05,          # e-folding width of the sharp side (fraction of a lamina, below a boundary)
    groove_recovery=0.25,      # e-folding width of the slow side (fraction of a lamina, above a boundary)
    edge_mm=None,              # None: mean_thickness_mm / 3.5
    noise_mm=None,             # None: 0.08 * mean_thickness_mm (isotropic 3-D std)
    pose="identity",           # or "random" (rotation + translation of the file frame)
    caps=True,                 # flat caps at both ends (concentric-ring zipper)
    seed=0,
)


# ----------------------------------------------------------------------------- lamina record
def _record(p: dict, gen: np.random.Generator):
    """Deposition times (days) and thicknesses (mm) of the laminae, by a gamma renewal process."""
    total_days = p["days_per_year"] * p["years"]
    k = p["gamma_shape"]
    n_guess = int(total_days * 1.2 + 50)
    intervals = gen.gamma(k, 1.0 / k, n_guess)
    t = np.cumsum(intervals)
    while t[-1] < total_days:  # pragma: no cover - 20% margin nearly always suffices
        more = gen.gamma(k, 1.0 / k, n_guess)
        intervals = np.concatenate([intervals, more])
        t = np.cumsum(intervals)
    keep = t <= total_days
    t, intervals = t[keep], intervals[keep]
    phase = 2.0 * np.pi * t / p["days_per_year"]
    rate = 1.0 + p["seasonal_amplitude"] * _skewed(phase, p["seasonal_skew"])
    thickness = p["mean_thickness_mm"] * rate * intervals
    return t, thickness


def _skewed(phase, skew):
    """A zero-mean periodic waveform of unit amplitude, skewed: a clipped-Fourier sawtooth blend."""
    w = (1.0 - skew) * np.sin(phase) + skew * (np.sin(phase) - 0.5 * np.sin(2 * phase) + np.sin(3 * phase) / 3)
    return w / (1.0 - skew + skew * 1.3)


# ----------------------------------------------------------------------------- boundary planes
def _boundaries(p: dict, t: np.ndarray, thickness: np.ndarray, gen: np.random.Generator):
    """Plane centres (n+1, 3), unit normals (n+1, 3) and axial heights (n+1,) of every boundary."""
    n = thickness.size
    h = np.concatenate([[0.0], np.cumsum(thickness)])
    frac = h / max(h[-1], 1e-9)
    tb = np.concatenate([[0.0], t])  # boundary i sits on top of lamina i-1
    lean = np.radians(p["lean_deg"] + p["bend_deg"] * frac)
    az_l = np.radians(p["lean_azimuth_deg"])
    sway = np.radians(p["sway_deg"]) * _skewed(2.0 * np.pi * tb / p["days_per_year"], 0.3)
    az_s = np.radians(p["sway_azimuth_deg"])
    walk = np.cumsum(gen.standard_normal((n + 1, 2)) * np.radians(p["walk_deg"]), axis=0)
    walk -= walk.mean(axis=0)
    te = lean * np.sin(az_l) + sway * np.sin(az_s) + walk[:, 0]
    tn = lean * np.cos(az_l) + sway * np.cos(az_s) + walk[:, 1]
    tilt = np.hypot(te, tn)
    sc = np.where(tilt > 0, np.sin(tilt) / np.where(tilt > 0, tilt, 1.0), 1.0)
    normals = np.column_stack([te * sc, tn * sc, np.cos(tilt)])
    # The axis is the polyline through the plane centres; lamina i spans thickness[i] along the mean
    # of its two boundary normals.
    mid = normals[:-1] + normals[1:]
    mid /= np.linalg.norm(mid, axis=1, keepdims=True)
    centres = np.zeros((n + 1, 3))
    centres[1:] = np.cumsum(thickness[:, None] * mid, axis=0)
    return centres, normals, h


# ----------------------------------------------------------------------------- wall geometry
def _axis_at_z(centres, z):
    return np.column_stack([np.interp(z, centres[:, 2], centres[:, j]) for j in range(2)])


def _ellipse(p, zfrac, phi):
    """Radius of the horizontal ellipse at height fraction ``zfrac`` in direction ``phi`` (rad)."""
    a0, b0 = p["semi_axes_mm"]
    drift = 1.0 + p["semi_axis_drift"] * np.sin(2.0 * np.pi * (0.7 * zfrac + 0.1))
    a = a0 * drift
    b = b0 * (1.0 + p["semi_axis_drift"] * np.sin(2.0 * np.pi * (1.1 * zfrac + 0.6)))
    psi = np.radians(p["ellipse_turn_deg"]) * zfrac
    c, s = np.cos(phi - psi), np.sin(phi - psi)
    return a * b / np.sqrt((b * c) ** 2 + (a * s) ** 2)


def _ellipse_perimeter(p, zfrac):
    a0, b0 = p["semi_axes_mm"]
    a = a0 * (1.0 + p["semi_axis_drift"] * np.sin(2.0 * np.pi * (0.7 * zfrac + 0.1)))
    b = b0 * (1.0 + p["semi_axis_drift"] * np.sin(2.0 * np.pi * (1.1 * zfrac + 0.6)))
    hh = ((a - b) / (a + b)) ** 2  # Ramanujan's second approximation
    return np.pi * (a + b) * (1.0 + 3.0 * hh / (10.0 + np.sqrt(4.0 - 3.0 * hh)))


def lamina_position(points, centres, normals):
    """Fractional lamina coordinate of points: i + f for a point between boundary planes i and i+1.

    Vectorised bisection on the signed distances to the planes (which decrease with i inside the
    column as long as the planes do not cross there). Returns (index i, fraction f in [0, 1))."""
    n = centres.shape[0]
    lo = np.zeros(points.shape[0], dtype=np.int64)
    hi = np.full(points.shape[0], n - 1, dtype=np.int64)

    def d(i):
        return np.einsum("ij,ij->i", points - centres[i], normals[i])

    for _ in range(int(math.ceil(math.log2(max(n, 2)))) + 1):
        mid = (lo + hi + 1) // 2
        above = d(mid) >= 0
        lo = np.where(above, mid, lo)
        hi = np.where(above, hi, mid - 1)
    i = np.clip(lo, 0, n - 2)
    d0, d1 = d(i), d(i + 1)
    f = np.clip(d0 / np.where(d0 - d1 > 0, d0 - d1, 1.0), 0.0, 1.0 - 1e-12)
    return i, f


def _groove(p, f, depth):
    """Asymmetric groove relief (<= 0) at lamina fraction f: slow recovery above the boundary (f -> 0+),
    sharp drop just below the next one (f -> 1-)."""
    g = np.maximum(np.exp(-f / p["groove_recovery"]), np.exp(-(1.0 - f) / p["groove_rise"]))
    return -depth * g


# ----------------------------------------------------------------------------- meshing
def _zipper(lower: np.ndarray, upper: np.ndarray, ang_lo: np.ndarray, ang_up: np.ndarray) -> np.ndarray:
    """Triangles between two closed rows (vertex ids sorted by angle in [0, 2 pi)), outward-facing for a
    lower row ``lower`` and an upper row ``upper`` seen from outside (angle increasing to the right)."""
    na, nb = lower.size, upper.size
    nxt_a = np.append(ang_lo[1:], ang_lo[0] + 2 * np.pi)
    nxt_b = np.append(ang_up[1:], ang_up[0] + 2 * np.pi)
    keys = np.concatenate([nxt_a, nxt_b])
    is_a = np.concatenate([np.ones(na, bool), np.zeros(nb, bool)])
    order = np.argsort(keys, kind="stable")
    step_a = is_a[order]
    i = np.concatenate([[0], np.cumsum(step_a)[:-1]])      # A index before each step
    j = np.concatenate([[0], np.cumsum(~step_a)[:-1]])     # B index before each step
    a0, a1 = lower[i % na], lower[(i + 1) % na]
    b0, b1 = upper[j % nb], upper[(j + 1) % nb]
    return np.where(step_a[:, None], np.column_stack([a0, a1, b0]), np.column_stack([a0, b1, b0]))


def _rows(p, centres, gen, z0, z1, edge):
    """Vertex rows at constant world height with random phases; returns list of (angles, heights)."""
    h_row = edge * math.sqrt(3.0) / 2.0
    n_rows = max(2, int(math.ceil((z1 - z0) / h_row)) + 1)
    zs = np.linspace(z0, z1, n_rows)
    rows = []
    for k, z in enumerate(zs):
        zf = (z - z0) / max(z1 - z0, 1e-9)
        n = max(8, int(round(_ellipse_perimeter(p, zf) / edge)))
        phi = (np.arange(n) + gen.uniform()) * (2 * np.pi / n)
        phi = (phi + gen.uniform(-0.2, 0.2, n) * (2 * np.pi / n)) % (2 * np.pi)
        phi.sort()
        dz = np.zeros(n) if k in (0, n_rows - 1) else gen.uniform(-0.2, 0.2, n) * h_row
        rows.append((phi, z + dz, zf))
    return rows


def make_column(**overrides):
    """Make a column mesh and its truth.

    Parameters
    ----------
    **overrides
        Any key of :data:`DEFAULTS` (lengths mm, angles degrees). Unknown keys raise ``TypeError``.

    Returns
    -------
    vertices : (n, 3) float64
        File frame (identity pose: the specimen frame, mm).
    faces : (m, 3) int64
        Outward-facing triangles.
    truth : dict
        Same schema as ``bandgeo.synth`` truth files (see the module docstring).
    """
    unknown = set(overrides) - set(DEFAULTS)
    if unknown:
        raise TypeError(f"unknown othercolumn parameter(s) {sorted(unknown)}; expected keys of DEFAULTS")
    p = dict(DEFAULTS, **overrides)
    T = float(p["mean_thickness_mm"])
    edge = float(p["edge_mm"] or T / 3.5)
    depth = float(T * 0.25 if p["groove_depth_mm"] is None else p["groove_depth_mm"])
    noise = float(T * 0.08 if p["noise_mm"] is None else p["noise_mm"])
    gen = np.random.default_rng(p["seed"])

    t, thickness = _record(p, gen)
    centres, normals, heights = _boundaries(p, t, thickness, gen)
    z0 = 0.0
    z1 = float(centres[-1, 2])

    rows = _rows(p, centres, gen, z0, z1, edge)
    verts, faces, counts = [], [], 0
    row_ids = []
    for phi, z, zf in rows:
        c = _axis_at_z(centres, z)
        r = _ellipse(p, zf, phi)
        pts = np.column_stack([c[:, 0] + r * np.cos(phi), c[:, 1] + r * np.sin(phi), z])
        verts.append(pts)
        row_ids.append(np.arange(counts, counts + phi.size))
        counts += phi.size
    wall = np.concatenate(verts)
    for k in range(len(rows) - 1):
        faces.append(_zipper(row_ids[k], row_ids[k + 1], rows[k][0], rows[k + 1][0]))

    # Groove relief, radial in the horizontal plane, from each wall vertex's lamina position.
    li, lf = lamina_position(wall, centres, normals)
    local_t = thickness[np.clip(li, 0, thickness.size - 1)]
    relief = _groove(p, lf, depth)
    # Below the first boundary or above the last one (the flat cuts cross tilted planes): no groove.
    first = np.einsum("ij,j->i", wall - centres[0], normals[0]) < 0
    last = np.einsum("ij,j->i", wall - centres[-1], normals[-1]) >= 0
    relief[first | last] = 0.0
    zc = _axis_at_z(centres, wall[:, 2])
    radial = wall[:, :2] - zc
    radial /= np.linalg.norm(radial, axis=1, keepdims=True)
    wall[:, :2] += relief[:, None] * radial

    parts = [wall]
    n_total = wall.shape[0]
    cap_faces = []
    if p["caps"]:
        for end, (phi, z, zf), ids in ((0, rows[0], row_ids[0]), (1, rows[-1], row_ids[-1])):
            c = _axis_at_z(centres, np.array([z[0]]))[0]
            r_edge = _ellipse(p, zf, phi)
            n_rings = max(1, int(r_edge.mean() / edge))
            prev_ids, prev_phi = ids, phi
            for q in range(1, n_rings):
                frac = 1.0 - q / n_rings
                m = max(6, int(round(frac * phi.size)))
                ph = np.sort((np.arange(m) + gen.uniform()) * (2 * np.pi / m) % (2 * np.pi))
                rr = _ellipse(p, zf, ph) * frac
                pts = np.column_stack([c[0] + rr * np.cos(ph), c[1] + rr * np.sin(ph), np.full(m, z[0])])
                new_ids = np.arange(n_total, n_total + m)
                parts.append(pts)
                n_total += m
                f = _zipper(prev_ids, new_ids, prev_phi, ph)
                cap_faces.append(f if end == 1 else f[:, ::-1])
                prev_ids, prev_phi = new_ids, ph
            parts.append(np.array([[c[0], c[1], z[0]]]))
            centre_id = n_total
            n_total += 1
            fan = np.column_stack([prev_ids, np.roll(prev_ids, -1), np.full(prev_ids.size, centre_id)])
            cap_faces.append(fan if end == 1 else fan[:, ::-1])
    vertices = np.concatenate(parts)
    faces = np.concatenate(faces + cap_faces).astype(np.int64)
    if noise > 0:
        vertices = vertices + gen.normal(0.0, noise, vertices.shape)

    rot, shift = np.eye(3), np.zeros(3)
    if p["pose"] == "random":
        q = gen.standard_normal(4)
        q /= np.linalg.norm(q)
        w, x, y, z = q
        rot = np.array([[1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)],
                        [2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)],
                        [2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)]])
        shift = gen.uniform(-50.0, 50.0, 3)
    file_vertices = vertices @ rot.T + shift
    # What the mesh shows of the groove: the profile of a mean lamina averaged over one row spacing and
    # blurred by the noise along the axis (the sharp side is finer than the sampling).
    ds = T / 400.0
    x = np.arange(-3.0 * T, 3.0 * T, ds)
    prof = _groove(p, np.mod(x / T, 1.0), depth)
    kern_x = np.arange(-4.0 * noise - edge, 4.0 * noise + edge + ds, ds)
    box = (np.abs(kern_x) <= 0.5 * edge * math.sqrt(3.0) / 2.0).astype(float)
    gauss = np.exp(-0.5 * (kern_x / max(noise, ds)) ** 2)
    kern = np.convolve(box, gauss, mode="same")
    seen = np.convolve(prof, kern / kern.sum(), mode="same")
    inner = np.abs(x) < 2.0 * T
    depth_seen = float(seen[inner].max() - seen[inner].min())
    truth = _truth(p, t, thickness, centres, normals, heights, rot, shift, file_vertices, faces,
                   edge, depth, noise, z1)
    truth["mesh"]["groove_depth_mm"] = depth
    truth["mesh"]["groove_depth_effective_mm"] = depth_seen
    return file_vertices, faces, truth


def _truth(p, t, thickness, centres, normals, heights, rot, shift, verts, faces, edge, depth, noise, z1):
    m = np.eye(4)
    m[:3, :3], m[:3, 3] = rot, shift
    inc = np.degrees(np.arccos(np.clip(normals[:, 2], -1, 1)))
    az = np.degrees(np.arctan2(normals[:, 0], normals[:, 1])) % 360.0
    lam_dir = normals[:-1] + normals[1:]
    lam_dir /= np.linalg.norm(lam_dir, axis=1, keepdims=True)
    lam_inc = np.degrees(np.arccos(np.clip(lam_dir[:, 2], -1, 1)))
    lam_az = np.degrees(np.arctan2(lam_dir[:, 0], lam_dir[:, 1])) % 360.0
    az_s = np.radians(p["sway_azimuth_deg"])
    sway_dir = np.array([np.sin(az_s), np.cos(az_s), 0.0])
    mean_dir = (lam_dir * thickness[:, None]).sum(axis=0)
    mean_dir /= np.linalg.norm(mean_dir)
    thick_above = np.append(thickness, np.nan)
    years = float(p["years"])
    params = {k: (list(v) if isinstance(v, tuple) else v) for k, v in p.items()}
    return {
        "schema": TRUTH_SCHEMA,
        "generator": "benchmarks/othercolumn.py (independent of bandgeo.synth)",
        "seed": int(p["seed"]),
        "params": params,
        "units": "mm",
        "mm_per_unit": 1.0,
        "frames": {
            "note": "specimen frame: mm, x east, y north, z paleo-up, origin on the axis at the base",
            "file_from_specimen": m.tolist(),
            "specimen_from_file": np.linalg.inv(m).tolist(),
            "paleo_up_file": (rot @ [0.0, 0.0, 1.0]).tolist(),
            "north_file": (rot @ [0.0, 1.0, 0.0]).tolist(),
            "east_file": (rot @ [1.0, 0.0, 0.0]).tolist(),
            "growth_direction_file": (rot @ mean_dir).tolist(),
            "growth_direction_specimen": mean_dir.tolist(),
            "sway_plane_direction_file": (rot @ sway_dir).tolist(),
            "sway_plane_azimuth_deg": float(p["sway_azimuth_deg"] % 360.0),
            "base_centre_file": shift.tolist(),
        },
        "laminae": {
            "n_recorded": int(thickness.size),
            "n_nominal": int(thickness.size),
            "n_missing": 0,
            "years": years,
            "days_per_year": float(p["days_per_year"]),
            "laminae_per_year_nominal": float(p["days_per_year"]),
            "recorded_laminae_per_year": thickness.size / years,
            "mean_thickness_mm_expected": float(p["mean_thickness_mm"]),
            "mean_thickness_mm_recorded": float(thickness.mean()),
            "thickness_mm": thickness.tolist(),
            "day_index": np.floor(t).astype(int).tolist(),
            "deposition_time_days": t.tolist(),
            "inclination_deg": lam_inc.tolist(),
            "azimuth_deg": lam_az.tolist(),
            "sway_deg": (np.degrees(lam_dir[:, :2] @ sway_dir[:2])).tolist(),
            "hiatus_after": [],
            "hiatuses": [],
        },
        "boundaries": {
            "note": "boundary i: a flat plane through centres_mm[i] with unit normal normals[i] (specimen "
                    "frame, pointing up the column); heights_mm: arc length along the axis polyline "
                    "through the centres; thickness_above_mm: the lamina above, along the axis (null "
                    "for the last)",
            "heights_mm": heights.tolist(),
            "centres_mm": centres.tolist(),
            "normals": normals.tolist(),
            "inclination_deg": inc.tolist(),
            "azimuth_deg": az.tolist(),
            "thickness_above_mm": [None if not np.isfinite(x) else float(x) for x in thick_above],
            "centres_file": (centres @ rot.T + shift).tolist(),
            "normals_file": (normals @ rot.T).tolist(),
        },
        "mesh": {
            "kind": "othercolumn-rows",
            "n_vertices": int(verts.shape[0]),
            "n_faces": int(faces.shape[0]),
            "edge_length_mm": edge,
            "ring_spacing_mm": edge * math.sqrt(3.0) / 2.0,
            "column_length_mm": float(heights[-1]),
            "column_height_z_mm": z1,
            "groove_depth_effective_mm": depth,
            "groove_profile": "asymmetric exponential",
            "noise_mm": noise,
            "closed": bool(p["caps"]),
            "cross_section": "ellipse",
        },
    }


def write_column(path, vertices, faces, truth) -> tuple[Path, Path]:
    """Write a binary little-endian PLY (no colours) and ``<stem>.truth.json`` beside it."""
    path = Path(path)
    header = (f"ply\nformat binary_little_endian 1.0\ncomment othercolumn check specimen; units mm\n"
              f"element vertex {vertices.shape[0]}\nproperty float x\nproperty float y\nproperty float z\n"
              f"element face {faces.shape[0]}\nproperty list uchar int vertex_indices\nend_header\n")
    fdt = np.dtype([("n", "u1"), ("i", "<i4", 3)])
    fb = np.empty(faces.shape[0], dtype=fdt)
    fb["n"], fb["i"] = 3, faces
    tmp = path.with_name(path.name + ".tmp")
    with open(tmp, "wb") as fh:
        fh.write(header.encode("ascii"))
        fh.write(np.asarray(vertices, "<f4").tobytes())
        fh.write(fb.tobytes())
    os.replace(tmp, path)
    tpath = path.with_name(path.stem + ".truth.json")
    ttmp = tpath.with_name(tpath.name + ".tmp")
    ttmp.write_text(json.dumps(truth, indent=1, allow_nan=False) + "\n")
    os.replace(ttmp, tpath)
    return path, tpath


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("out", type=Path)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--years", type=float, default=DEFAULTS["years"])
    ap.add_argument("--mean-thickness-mm", type=float, default=DEFAULTS["mean_thickness_mm"])
    ap.add_argument("--edge-mm", type=float, default=None)
    args = ap.parse_args(argv)
    v, f, truth = make_column(seed=args.seed, years=args.years, mean_thickness_mm=args.mean_thickness_mm,
                              edge_mm=args.edge_mm)
    mesh, tp = write_column(args.out, v, f, truth)
    print(f"wrote {mesh} ({v.shape[0]:,} vertices, {f.shape[0]:,} faces, {truth['laminae']['n_recorded']} "
          f"laminae) and {tp}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
