"""Orientation geometry: rotations, bedding correction by strike and dip, and the estimated way-up.

Conventions (see DEVELOPERS.md): the specimen frame is x east, y north, z up, right-handed. Strike and
dip follow the right-hand rule: looking along the strike azimuth, the bed dips to the right, so the
dip direction is strike + 90 degrees.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..constants import DEFAULT_SEED
from ..errors import ParameterError, shown
from ..rowgeom import cross_rows


def unit(vector, name: str = "vector") -> np.ndarray:
    """Return ``vector`` as a unit (3,) float64 array; ParameterError when it is not a usable direction."""
    vec = np.asarray(vector, dtype=float).reshape(-1)
    if vec.shape != (3,) or not np.all(np.isfinite(vec)):
        raise ParameterError(f"{name} must be three finite numbers like 0,0,1 but got {shown(vector)}")
    big = float(np.abs(vec).max())
    if big == 0 or not np.isfinite(big):
        raise ParameterError(f"{name} has zero length; give a direction like 0,0,1")
    vec = vec / big  # scaled first, so that 1e200-long vectors do not overflow the norm
    return vec / np.linalg.norm(vec)


def rotation_between(a, b) -> np.ndarray:
    """(3, 3) rotation taking unit direction ``a`` onto ``b`` by the smallest angle (about ``a x b``)."""
    a = unit(a)
    b = unit(b)
    v = np.cross(a, b)
    c = float(np.dot(a, b))
    s = float(np.linalg.norm(v))
    if s < 1e-12:
        if c > 0:
            return np.eye(3)
        # antiparallel: half turn about any axis perpendicular to a
        perp = np.cross(a, [1.0, 0.0, 0.0] if abs(a[0]) < 0.9 else [0.0, 1.0, 0.0])
        perp /= np.linalg.norm(perp)
        return 2.0 * np.outer(perp, perp) - np.eye(3)
    k = v / s
    kx = np.array([[0, -k[2], k[1]], [k[2], 0, -k[0]], [-k[1], k[0], 0]])
    angle = np.arctan2(s, c)
    return np.eye(3) + np.sin(angle) * kx + (1 - np.cos(angle)) * (kx @ kx)


def bed_pole(strike_deg: float, dip_deg: float) -> np.ndarray:
    """Upward unit normal of a bed (x east, y north, z up), right-hand rule.

    The pole leans from the vertical by the dip toward the dip direction (strike + 90 degrees).
    """
    dip = np.radians(dip_deg)
    dd = np.radians(strike_deg + 90.0)
    return np.array([np.sin(dip) * np.sin(dd), np.sin(dip) * np.cos(dd), np.cos(dip)])


def check_strike_dip(strike_deg, dip_deg, where: str = "") -> None:
    """ParameterError unless strike is 0..360 degrees and dip 0..90 degrees (right-hand rule)."""
    pre = f"{where}: " if where else ""
    try:
        strike, dip = float(strike_deg), float(dip_deg)
    except (TypeError, ValueError):
        raise ParameterError(f"{pre}strike and dip must be numbers but got {shown(strike_deg)}, {shown(dip_deg)}")
    if not (np.isfinite(strike) and np.isfinite(dip)):
        raise ParameterError(f"{pre}strike and dip must be finite numbers but got {shown(strike)}, {shown(dip)}")
    if not 0.0 <= strike <= 360.0:
        hint = f" ({shown(strike % 360.0)} is the same direction)" if abs(strike) < 1e6 else ""
        raise ParameterError(f"{pre}strike must be between 0 and 360 degrees (azimuth clockwise from north) but "
                             f"got {shown(strike)}{hint}; give the strike within 0..360")
    if not 0.0 <= dip <= 90.0:
        raise ParameterError(f"{pre}dip must be between 0 and 90 degrees (right-hand rule) but got {shown(dip)}; "
                             "give the dip within 0..90 and the strike so that the bed dips to its right")


def bedding_rotation(strike_deg: float, dip_deg: float) -> np.ndarray:
    """(3, 3) rotation about the strike line that brings the bed back to horizontal (pole to +z)."""
    check_strike_dip(strike_deg, dip_deg)
    return rotation_between(bed_pole(strike_deg, dip_deg), [0.0, 0.0, 1.0])


def frame_rows(up, north=None) -> tuple[np.ndarray, bool]:
    """Rows (x, y, z) of the specimen axes in the scan frame, and whether y is north.

    ``z`` = ``up``; ``y`` = ``north`` made perpendicular to ``up`` (else the scan axis least aligned
    with ``up``, made perpendicular); ``x = y x z`` (east).
    """
    z = unit(up, "up")
    north_known = north is not None
    if north_known:
        n = unit(north, "north")
        y = n - np.dot(n, z) * z
        if np.linalg.norm(y) < 0.05:
            raise ParameterError("north is (nearly) parallel to up, so it gives no horizontal direction; "
                                 "give a north mark that points across the column")
    else:
        y = np.eye(3)[int(np.argmin(np.abs(z)))]
        y = y - np.dot(y, z) * z
    y /= np.linalg.norm(y)
    x = np.cross(y, z)
    return np.stack([x, y, z]), north_known


@dataclass
class UpEstimate:
    """The way-up estimated from the shape of the column (scan frame)."""

    up: np.ndarray            # (3,) unit vector, scan frame
    confidence: float         # 0..1
    axis_confidence: float    # 0..1, how well the long axis is defined
    end_confidence: float     # 0..1, how clearly one end is the domed top
    method: str = "long axis (slice centroids) + domed-top/flat-base end test"
    cues: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)
    ci95_deg: float = float("nan")  # 95% angular radius of the axis direction (slice-centroid scatter)
    radius: float = float("nan")    # median distance of the middle of the surface from the axis (input units)


def _face_geometry(vertices, faces):
    """Centroids (k, 3), areas (k,) and unit normals (k, 3) of the given faces.

    The cross product and its length are written out component by component: the same operations,
    in the same order, as ``np.cross`` and ``np.linalg.norm(axis=1)``, without their temporaries.
    """
    v0 = vertices[faces[:, 0]]
    v1 = vertices[faces[:, 1]]
    v2 = vertices[faces[:, 2]]
    a = v1 - v0
    b = v2 - v0
    cross = cross_rows(a, b)
    area2 = np.sqrt(cross[:, 0] * cross[:, 0] + cross[:, 1] * cross[:, 1] + cross[:, 2] * cross[:, 2])
    v1 += v2
    v1 -= 2 * v0
    v1 /= 3.0
    v1 += v0
    normal = cross / np.maximum(area2, 1e-300)[:, None]
    return v1, 0.5 * area2, normal


def _weighted_axis(points, weights):
    mean = (points * weights[:, None]).sum(axis=0) / weights.sum()
    d = points - mean
    cov = (d * weights[:, None]).T @ d / weights.sum()
    evals, evecs = np.linalg.eigh(cov)
    return mean, evals[::-1], evecs[:, ::-1]


def estimate_up(vertices: np.ndarray, faces: np.ndarray, boundary_edges=None, max_faces: int = 150_000) -> UpEstimate:
    """Estimate the growth direction of a column from its shape.

    The long axis comes from the area-weighted principal axes of the surface, refined by a line fit
    through the centroids of cross-section slices (insensitive to the shape of the ends). The top is
    the end that tapers (the dome) and has no flat cap and no open rim; the base is the end with a
    flat saw cut (much area at one height) or an open rim (boundary edges).

    Parameters
    ----------
    vertices : (n, 3) float64, any unit
    faces : (m, 3) int64, outward winding
    boundary_edges : (b, 2) int64 or None
    max_faces : int
        Faces sampled (seeded, at random) for the estimate, for speed.

    Returns
    -------
    UpEstimate
    """
    step = max(1.0, len(faces) / max_faces)
    if step > 1.0:  # a seeded random sample (a regular stride could alias with rings of faces)
        pick = np.random.default_rng(DEFAULT_SEED).integers(0, len(faces), int(len(faces) / step))
        faces = faces[np.sort(pick)]
    centroid, area, normal = _face_geometry(vertices, faces)
    ok = area > 0
    surface = (centroid[ok], area[ok], normal[ok])
    mean, evals, evecs = _weighted_axis(surface[0], surface[1])
    axis, axis_conf, ratio_long, est_warn = _principal_axis(evals, evecs)
    axis, mean, ci95 = _refine_axis(surface[0], surface[1], axis, mean)
    cues, r_mid = _end_cues(vertices, surface, axis, mean, boundary_edges, step)
    base_like = {e: min(c["taper"], 1.2) + c["flat_cap"] + c["open_rim"] for e, c in cues.items()}
    score = base_like["bottom"] - base_like["top"]  # > 0: +axis points to the top
    if score < 0:
        axis = -axis
        cues = {"top": cues["bottom"], "bottom": cues["top"]}
    end_conf = float(np.tanh(abs(score) / 0.4))
    confidence = float(axis_conf * end_conf)
    cues["score"] = float(abs(score))
    cues["elongation"] = float(np.sqrt(max(ratio_long, 0.0)))
    if axis_conf < 0.5:
        est_warn.append(f"the long axis is poorly defined (principal variance ratio {ratio_long:.2f}); "
                        "give the way-up with --up X,Y,Z or in the specimen sheet")
    if end_conf < 0.6:
        est_warn.append("cannot tell the domed top from the base with confidence (both ends look alike); "
                        "check the way-up and give it with --up X,Y,Z or in the specimen sheet")
    return UpEstimate(up=axis, confidence=confidence, axis_confidence=axis_conf, end_confidence=end_conf,
                      cues=cues, warnings=est_warn, ci95_deg=ci95, radius=r_mid)


def _principal_axis(evals, evecs):
    """(axis, its confidence 0..1, long/middle variance ratio, warnings) from the principal axes: the
    long axis, or for a squat specimen the one short axis."""
    est_warn = []
    ratio_long = evals[0] / max(evals[1], 1e-300)
    ratio_flat = evals[1] / max(evals[2], 1e-300)
    if ratio_long >= 1.15 or ratio_long >= ratio_flat:
        axis = evecs[:, 0]
        axis_conf = float(np.clip((ratio_long - 1.0) / 1.0, 0.0, 1.0))
    else:  # squat specimen: the axis is the one short principal direction
        axis = evecs[:, 2]
        axis_conf = float(np.clip((ratio_flat - 1.0) / 2.0, 0.0, 0.6))
        est_warn.append("the specimen is wider than it is tall, so its long axis does not mark the growth "
                        "direction; the up vector was taken as its short axis")
    return axis, axis_conf, ratio_long, est_warn


def _refine_axis(centroid, area, axis, mean, nb: int = 16):
    """(axis, point on it, 95% angular radius in degrees): a line fitted through the area-weighted
    centroids of ``nb`` slices over the middle 70% of the column, twice."""
    ci95 = float("nan")
    for _ in range(2):
        t = (centroid - mean) @ axis
        lo, hi = np.quantile(t, [0.15, 0.85])
        inside = (t >= lo) & (t <= hi)
        # linear (cloud-in-cell) binning: a ring of faces on a bin edge splits smoothly between two bins
        u = (t[inside] - lo) / max(hi - lo, 1e-300) * nb - 0.5
        i0 = np.floor(u).astype(np.int64)
        w1 = u - i0
        idx = np.clip(np.concatenate([i0, i0 + 1]), 0, nb - 1)
        # taper to zero at both cuts, so a ring of faces lying exactly on a cut has no weight
        taper = np.sin(np.pi * (t[inside] - lo) / max(hi - lo, 1e-300)) ** 2
        wts = np.concatenate([1.0 - w1, w1]) * np.tile(area[inside] * taper, 2)
        pts = np.tile(centroid[inside], (2, 1))
        wsum = np.bincount(idx, weights=wts, minlength=nb)
        good = wsum > 0
        if good.sum() < 4:
            break
        cen = np.stack([np.bincount(idx, weights=wts * pts[:, k], minlength=nb) for k in range(3)],
                       axis=1)[good] / wsum[good][:, None]
        cmean = cen.mean(axis=0)
        _, sv, vt = np.linalg.svd(cen - cmean)
        new = vt[0] if np.dot(vt[0], axis) >= 0 else -vt[0]
        axis, mean = new, cmean
        # angular standard error of a fitted line: residual rms / (rms spread along it * sqrt(n - 2))
        n_c = len(cen)
        resid = np.sqrt((sv[1] ** 2 + sv[2] ** 2) / max(n_c - 2, 1) / 2.0)
        se = resid / max(sv[0] / np.sqrt(n_c), 1e-300) / np.sqrt(n_c)
        ci95 = float(np.degrees(np.arctan(2.45 * se)))  # 2.45: 95% radius of a 2-D normal (Rayleigh)
    return axis, mean, ci95


def _end_cues(vertices, surface, axis, mean, boundary_edges, step):
    """Per end ('top' = +axis, 'bottom'): taper, flat cap, cap flatness and open rim; and the median
    radius of the middle of the column (input units)."""
    centroid, area, normal = surface
    t = (centroid - mean) @ axis
    radial = centroid - mean - np.outer(t, axis)
    r = np.linalg.norm(radial, axis=1)
    tmin, tmax = float(t.min()), float(t.max())
    length = max(tmax - tmin, 1e-300)
    s = (t - tmin) / length
    mid = (s > 0.3) & (s < 0.7)
    r_mid = float(np.median(r[mid])) if mid.any() else float(np.median(r))
    r_mid = max(r_mid, 1e-12 * length)
    cues = {}
    depth = min(0.2, r_mid / length)
    for end, near, outward in (("top", 1.0 - s, axis), ("bottom", s, -axis)):
        slab = near < min(0.05, 0.5 * r_mid / length)
        taper = float(np.quantile(r[slab], 0.9) / r_mid) if slab.sum() > 3 else 1.0
        cap = (near < depth) & (normal @ outward > np.cos(np.radians(30.0)))
        flat, rel_rms = 0.0, float("nan")
        if cap.sum() >= 10:
            _, cap_evals, _ = _weighted_axis(centroid[cap], area[cap])
            rel_rms = float(np.sqrt(max(cap_evals[2], 0.0)) / r_mid)
            planarity = float(np.clip(np.log10(0.03 / max(rel_rms, 1e-12)), 0.0, 1.0))
            flat = min(float(step * area[cap].sum() / (np.pi * r_mid ** 2)), 1.0) * planarity
        rim = 0.0
        if boundary_edges is not None and len(boundary_edges):
            p = vertices[boundary_edges[:, 0]]
            q = vertices[boundary_edges[:, 1]]
            bs = ((0.5 * (p + q) - mean) @ axis - tmin) / length
            bnear = (1.0 - bs) if end == "top" else bs
            rim = float(np.linalg.norm(q - p, axis=1)[bnear < depth].sum() / (2 * np.pi * r_mid))
        cues[end] = {"taper": taper, "flat_cap": flat, "cap_rms_over_radius": rel_rms,
                     "open_rim": min(rim, 1.0)}
    return cues, r_mid
