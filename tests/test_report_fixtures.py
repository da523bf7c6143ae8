"""Small analysis states for the report tests, built from the documented fields (no pipeline needed).

A cylinder with fake bands stands in for a specimen, and a synthetic periodicity result stands in for
the spectral stage. The builders are plain functions so that every report test file can share them.
"""
from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace

import numpy as np

RESULT_SCHEMA = "bandgeo.result/1"
SHA = "3f1e0c2a9b7d4e5f60718293a4b5c6d7e8f90123456789abcdef0123456789ab"


def cylinder(radius=15.0, height=60.0, n_rows=240, n_cols=120, band_mm=0.05, sway_period=400, seed=1):
    """Grid cylinder (closed in azimuth), vertices in mm with z up, plus fake band labels.

    Faces ~ 2 * n_rows * n_cols. The band of a vertex is floor(z / band_mm). Radius carries a small
    relief that repeats every ``sway_period`` bands so the unrolled image shows structure.
    """
    rng = np.random.default_rng(seed)
    z = np.linspace(0.0, height, n_rows)
    phi = np.linspace(0.0, 2 * np.pi, n_cols, endpoint=False)
    zz, pp = np.meshgrid(z, phi, indexing="ij")
    band = np.floor(zz / band_mm).astype(np.int32)
    r = radius + 0.3 * np.sin(2 * np.pi * band / sway_period) + 0.02 * rng.standard_normal(zz.shape)
    verts = np.column_stack([(r * np.sin(pp)).ravel(), (r * np.cos(pp)).ravel(), zz.ravel()])
    i, j = np.meshgrid(np.arange(n_rows - 1), np.arange(n_cols), indexing="ij")
    a = (i * n_cols + j).ravel()
    b = (i * n_cols + (j + 1) % n_cols).ravel()
    c = ((i + 1) * n_cols + j).ravel()
    d = ((i + 1) * n_cols + (j + 1) % n_cols).ravel()
    faces = np.concatenate([np.column_stack([a, b, d]), np.column_stack([a, d, c])]).astype(np.int64)
    vb = band.ravel().astype(np.int32)
    vb[verts[:, 2] > height - 2.0] = -1          # an unbanded cap stretch
    return verts, faces, vb


def periodicity(n_bands, period, significant=True, seed=2):
    """Synthetic periodicity result: spectra with a red-noise background and, if asked, a peak."""
    rng = np.random.default_rng(seed)
    f = np.linspace(1.0 / n_bands, 0.5, 600)
    rho = 0.5
    background = (1 - rho ** 2) / (1 - 2 * rho * np.cos(2 * np.pi * f) + rho ** 2)
    power = background * rng.exponential(1.0, len(f))
    if significant:
        power += 60.0 * np.exp(-0.5 * ((f - 1.0 / period) / (0.3 / n_bands)) ** 2)
    # The flat layout of bandgeo.spectral.PeriodicityResult.spectra.
    spectra = {"frequency_cycles_per_band": f, "period_bands": 1.0 / f,
               "thickness_periodogram_mm2_band": power, "thickness_ar1_background_mm2_band": background,
               "thickness_level95_mm2_band": background * 3.0, "thickness_level99_mm2_band": background * 4.6,
               "thickness_multitaper_mm2_band": background * (1 + 0.2 * rng.standard_normal(len(f))) ** 2,
               "evolutive_centre_band": np.linspace(100, n_bands - 100, 30),
               "evolutive_frequency_cycles_per_band": f[:120],
               "evolutive_ratio": rng.exponential(1.0, (30, 120))}
    table = {k: v for k, v in spectra.items() if np.ndim(v) == 1 and len(v) == len(f)}
    return SimpleNamespace(spectra=spectra, to_spectra_table=lambda: table,
                           to_dict=lambda: {})


def result_dict(n_bands, period, significant=True, age_ma=1100.0):
    """A result.json content with the documented top-level fields."""
    dpy = {"estimate": float(period) if significant else None,
           "ci95": [period - 9.0, period + 11.0] if significant else None,
           "significant": significant, "p_value": 0.002 if significant else 0.41,
           "method": "combined (inverse-variance)", "searched_band_bands_per_cycle": [5.0, n_bands / 3.0],
           "is_minimum": True,
           "methods": {"thickness_spectrum": {"estimate": period + 2.0 if significant else None,
                                              "ci95": [period - 12, period + 14] if significant else None,
                                              "method": "multitaper peak"},
                       "cycle_count": {"estimate": period - 3.0 if significant else None,
                                       "ci95": [period - 15, period + 9] if significant else None,
                                       "method": "band-pass analytic-signal phase",
                                       "per_cycle_counts": [period - 10, period + 4, period - 6]
                                       if significant else []},
                       "sway": {"estimate": period + 1.0 if significant else None,
                                "ci95": [period - 20, period + 22] if significant else None,
                                "method": "sway-plane tilt spectrum"}},
           "consistency": {"chi2": 0.4, "p_value": 0.82, "agree": True},
           "combined_from": ["thickness_spectrum", "cycle_count", "sway"] if significant else [],
           "significance_note": "family-wise over the searched band and Bonferroni over 2 series"}
    year_h = 365.24219 * 24.0
    lod = {"estimate": year_h / period, "ci95": [year_h / (period + 11), year_h / (period - 9)],
           "method": "LOD = year / N"} if significant else {"estimate": None, "ci95": None, "method": "LOD = year / N"}
    warnings = ["up direction estimated from the shape (confidence 0.71)"]
    if not significant:
        warnings.append("no significant annual cycle above red noise in the searched band (p = 0.41)")
    return {
        "schema": RESULT_SCHEMA, "bandgeo_version": "0.1.0",
        "specimen": {"id": "KRB-07", "scan": {"path": "/data/scans/KRB-07 annual.PLY", "sha256": SHA,
                                              "format": "ply", "units": "mm", "mm_per_unit": 1.0},
                     "sheet": {"collector": "A. Okonkwo-Reyes"},
                     "up": {"vector_scan": [0, 0, 1], "source": "estimated", "confidence": 0.71},
                     "north_known": False, "cleaning": {"duplicate_vertices": 0}, "transforms": [],
                     "age_ma": age_ma, "age_err_ma": 50.0, "locality": "Tallow Creek, Mirrin Ranges",
                     "horizon": "K3", "formation": "Karrabin Formation"},
        "bands": {"count": n_bands, "mean_thickness_mm": 0.05, "median_thickness_mm": 0.049,
                  "mean_thickness_mm_ci95": [0.048, 0.052], "mean_thickness_method": "t-interval"},
        "daily_test": {"verdict": "consistent with daily increments", "spacing_cv": 0.21, "p_value": 0.01,
                       "method": "depth-domain peak sharpness vs random-spacing null"},
        "days_per_year": dpy, "tidal": {"detected": False},
        "hiatus": {"n_flagged": 2, "bands": [310, 811]},
        "length_of_day_hours": lod,
        "sidereal_day_hours": {"estimate": year_h / (period + 1) if significant else None,
                               "ci95": [year_h / (period + 12), year_h / (period - 8)] if significant else None,
                               "method": "year / (N + 1)"},
        "earth_moon_distance": None,
        "review": {"edited": False, "n_edits": 0},
        "warnings": warnings,
        "assumptions": ["bands are daily increments", "the annual sway records heliotropism"],
        "provenance": {"input_sha256": SHA, "versions": {"bandgeo": "0.1.0", "numpy": np.__version__},
                       "parameters": {"segment": {"n_classes": 4, "scales_mm": [0.05, 0.1]},
                                      "spectral": {"n_bootstrap": 1000}},
                       "seed": 20261202, "stage_seconds": {"load": 0.4, "segment": 7.9, "spectral": 1.2},
                       "created": "2026-12-02T01:00:00Z"},
    }


def make_state(folder: Path, significant=True, n_rows=240, n_cols=120, period=400, band_mm=0.05,
               height=60.0):
    """An AnalysisState-like namespace with every documented field, for a cylinder specimen."""
    verts, faces, vb = cylinder(n_rows=n_rows, n_cols=n_cols, band_mm=band_mm, height=height,
                                sway_period=period)
    n_bands = int(vb.max()) + 1
    specimen = SimpleNamespace(vertices_mm=verts, faces=faces, colors=None, specimen_id="KRB-07",
                               units="mm", warnings=["scan had 12 duplicate vertices (merged)"],
                               north_known=False)
    heights = np.linspace(0, height, 50)
    axis = SimpleNamespace(heights_mm=heights, points_mm=np.column_stack([0 * heights, 0 * heights, heights]),
                           tangents=np.tile([0.0, 0.0, 1.0], (50, 1)))
    k = np.arange(1, n_bands)
    tilt = np.radians(3.0) * np.sin(2 * np.pi * k / period)
    boundaries = [SimpleNamespace(id=int(i), height_mm=float(i * band_mm), center_mm=np.array([0, 0, i * band_mm]),
                                  normal=np.array([np.sin(t), 0.0, np.cos(t)]), rms_mm=0.005, coverage=0.95,
                                  confidence=0.9, origin="auto") for i, t in zip(k, tilt)]
    seg = SimpleNamespace(boundaries=boundaries, axis=axis, vertex_band=vb,
                          vertex_class=np.zeros(len(vb), np.int8), class_names=["groove", "ridge"],
                          resolution={"sampling_mm": 0.25, "flagged": [[30.0, 33.0, "fracture"]]},
                          warnings=["2 boundaries traced over less than half the circumference"])
    idx = np.arange(n_bands)
    rng = np.random.default_rng(3)
    thick = band_mm * (1 + 0.3 * np.sin(2 * np.pi * idx / period) + 0.1 * rng.standard_normal(n_bands))
    table = SimpleNamespace(index=idx, base_mm=idx * band_mm, top_mm=(idx + 1) * band_mm,
                            thickness_axis_mm=thick, thickness_median_mm=thick, thickness_iqr_mm=0.1 * thick,
                            inclination_deg=3.0 * np.abs(np.sin(2 * np.pi * idx / period)),
                            azimuth_deg=np.full(n_bands, 90.0), flags=[""] * n_bands)
    hiatus = np.zeros(n_bands, bool)
    hiatus[[min(310, n_bands - 1), min(811, n_bands - 1)]] = True
    series = SimpleNamespace(band_number=idx, thickness_mm=thick, inclination_deg=table.inclination_deg,
                             sway_deg=3.0 * np.sin(2 * np.pi * idx / period) + 0.3 * rng.standard_normal(n_bands),
                             depth_height_mm=None, depth_relief=None, hiatus_flags=hiatus, source="fixture")
    return SimpleNamespace(folder=Path(folder), result=result_dict(n_bands, period, significant),
                           specimen=specimen, segmentation=seg, band_table=table, series=series,
                           periodicity=periodicity(n_bands, period, significant))


def with_spectral_stage(state, n_sim=99, seed=5):
    """Replace the synthetic periodicity of ``state`` by the real spectral stage run on its series.

    Uses ``bandgeo.series.BandSeries`` and ``bandgeo.spectral.test_periodicity``; the result.json blocks
    (daily_test, days_per_year, tidal, hiatus) then come from the engine, as in a real analysis.
    """
    from bandgeo.series import BandSeries
    from bandgeo.spectral import test_periodicity

    s = state.series
    series = BandSeries(band_number=np.asarray(s.band_number), thickness_mm=np.asarray(s.thickness_mm),
                        inclination_deg=s.inclination_deg, sway_deg=s.sway_deg,
                        hiatus_flags=np.asarray(s.hiatus_flags), source="report fixture")
    per = test_periodicity(series, n_sim=n_sim, seed=seed)
    blocks = per.to_dict()
    for key in ("daily_test", "days_per_year", "tidal", "hiatus"):
        state.result[key] = blocks[key]
    state.result["warnings"] = list(state.result["warnings"]) + list(blocks["warnings"])
    if not blocks["days_per_year"]["significant"]:
        state.result["length_of_day_hours"] = None
        state.result["sidereal_day_hours"] = None
    else:
        est, (lo, hi) = blocks["days_per_year"]["estimate"], blocks["days_per_year"]["ci95"]
        year_h = 365.24219 * 24.0                      # LOD = Y / N (reference-values.md)
        state.result["length_of_day_hours"] = {"estimate": year_h / est, "ci95": [year_h / hi, year_h / lo],
                                               "method": "LOD = year / N"}
    state.series, state.periodicity = series, per
    return state
