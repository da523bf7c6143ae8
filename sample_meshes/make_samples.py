"""Regenerate the bundled sample specimens, their truth files and specimen sheets.

Usage:  python sample_meshes/make_samples.py [--out FOLDER] [--legacy]

The default set (SAMPLES) is realistic: six years of record on columns 9-11 mm across, swaying and
meandering, scanned as unaligned photogrammetry-like meshes with noise of about 10 % and groove relief
of 25 % of a lamina. To keep each PLY under about 15 MB the triangles are short along the column (a
sixth of a mean lamina, 0.035-0.0385 mm, so the thinnest laminae of the annual cycle still span three
to four steps) and stretched around it (34-38 times longer, about 1.2-1.5 mm, some 24 vertices around),
with one smoothing pass (see README.md). ``--legacy`` writes the earlier three-year, ring-mesh set (LEGACY_SAMPLES) instead.
The same seed gives the same specimen; floats may differ in the last bits between machines.

The scenario (Karrabin Formation, Tallow Creek, Mirrin Ranges) is invented; see README.md here.
Each sheet's ``up`` and ``north`` are the field vertical and geographic north at collection, in the
mesh's frame. Where a sheet gives bedding (strike/dip, right-hand rule), rotating the bed back to
horizontal about its strike turns the field vertical into the paleo-vertical recorded in the truth file
(``frames.paleo_up_file``).
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
from scipy.spatial.transform import Rotation

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from bandgeo.atomic import write_text  # noqa: E402
from bandgeo.synth import SynthParams, simulate, write_specimen  # noqa: E402

COMMON = dict(formation="Karrabin Formation", locality="Tallow Creek, Mirrin Ranges",
              collector="A. Okonkwo-Reyes", age_ma=1105.0, age_err_ma=12.0)

#: The realistic set (the default). Six years at 400 days a year: 2400 laminae of about 0.2 mm.
SAMPLES = [
    {
        "file": "KRB-07_annual.ply", "sheet": "KRB-07.sheet.toml", "specimen_id": "KRB-07",
        "horizon": "lower Karrabin, columnar biostrome bed 14", "bedding": (35.0, 14.0), "north": True,
        "notes": "clear annual banding, sway and meander; a few short missing-day gaps",
        "params": dict(days_per_year=400, years=6.0, mean_thickness_mm=0.2, annual_amplitude=0.35,
                       noise_cv=0.12, ar1_phi=0.4, hiatus_rate_per_year=0.7, hiatus_mean_days=2.0,
                       sway_amplitude_deg=4.5, sway_azimuth_deg=25.0, meander_amplitude_deg=1.2,
                       meander_correlation_laminae=100.0, mean_tilt_deg=1.5, mean_tilt_azimuth_deg=110.0,
                       radius_mm=5.0, radius_variation=0.06, dome_height_mm=1.2, groove_depth_mm=0.05,
                       groove_width_fraction=0.4, scanner_noise_mm=0.02, mesh_kind="photogrammetric",
                       edge_length_mm=0.035, edge_aspect=38.0, smoothing_iterations=1, holes=1,
                       pose="random", units="mm", seed=707),
    },
    {
        "file": "KRB-12_null.ply", "sheet": "KRB-12.sheet.toml", "specimen_id": "KRB-12",
        "horizon": "lower Karrabin, columnar biostrome bed 16", "bedding": None, "north": False,
        "notes": "null case: red-noise thickness and meander, no annual cycle, no sway; way-up from the sheet",
        "params": dict(days_per_year=400, years=6.0, mean_thickness_mm=0.2, annual_amplitude=0.0,
                       noise_cv=0.25, ar1_phi=0.7, sway_amplitude_deg=0.0, meander_amplitude_deg=1.2,
                       meander_correlation_laminae=100.0, mean_tilt_deg=1.5, mean_tilt_azimuth_deg=200.0,
                       radius_mm=4.5, radius_variation=0.06, dome_height_mm=1.0, groove_depth_mm=0.05,
                       groove_width_fraction=0.4, scanner_noise_mm=0.02, mesh_kind="photogrammetric",
                       edge_length_mm=0.035, edge_aspect=34.0, smoothing_iterations=1, pose="random",
                       units="mm", seed=1212),
    },
    {
        "file": "KRB-31_anisotropic.ply", "sheet": "KRB-31.sheet.toml", "specimen_id": "KRB-31",
        "horizon": "upper Karrabin, tidal-flat stromatolite bed 3", "bedding": (212.0, 9.0), "north": True,
        "notes": "strongly anisotropic triangles, file in centimetres; fortnightly and monthly tidal "
                 "modulation",
        "params": dict(days_per_year=400, years=6.0, mean_thickness_mm=0.22, annual_amplitude=0.25,
                       noise_cv=0.12, ar1_phi=0.4, days_per_synodic_month=30.5, tidal_amplitude=0.25,
                       sway_amplitude_deg=5.0, sway_azimuth_deg=160.0, meander_amplitude_deg=1.0,
                       meander_correlation_laminae=100.0, mean_tilt_deg=2.0, mean_tilt_azimuth_deg=300.0,
                       radius_mm=5.5, radius_variation=0.08, radius_taper=-0.15, dome_height_mm=1.0,
                       groove_depth_mm=0.055, groove_width_fraction=0.35, scanner_noise_mm=0.022,
                       mesh_kind="photogrammetric", edge_length_mm=0.0385, edge_aspect=38.0,
                       smoothing_iterations=1, base="cut", top="domed", pose="random", units="cm", seed=3131),
    },
]

#: The earlier set (three years, ring meshes, old defaults): ``--legacy``.
LEGACY_SAMPLES = [
    {
        "file": "KRB-07_annual.ply", "sheet": "KRB-07.sheet.toml", "specimen_id": "KRB-07",
        "horizon": "lower Karrabin, columnar biostrome bed 14", "bedding": (35.0, 14.0), "north": True,
        "notes": "clear annual banding and sway; a few short missing-day gaps",
        "params": dict(days_per_year=400, years=3.0, mean_thickness_mm=0.25, annual_amplitude=0.35,
                       noise_cv=0.12, ar1_phi=0.4, hiatus_rate_per_year=0.7, hiatus_mean_days=2.0,
                       sway_amplitude_deg=2.5, sway_azimuth_deg=25.0, mean_tilt_deg=1.5,
                       mean_tilt_azimuth_deg=110.0, radius_mm=5.0, radius_variation=0.06,
                       dome_height_mm=1.5, groove_depth_mm=0.04, groove_width_fraction=0.4,
                       scanner_noise_mm=0.005, rings_per_lamina=4.5, ring_vertices=42, holes=1,
                       pose="random", units="mm", sampling="isotropic", seed=707),
    },
    {
        "file": "KRB-12_null.ply", "sheet": "KRB-12.sheet.toml", "specimen_id": "KRB-12",
        "horizon": "lower Karrabin, columnar biostrome bed 16", "bedding": None, "north": False,
        "notes": "null case: red-noise thickness, no annual cycle, no sway; way-up from the sheet",
        "params": dict(days_per_year=400, years=3.0, mean_thickness_mm=0.25, annual_amplitude=0.0,
                       noise_cv=0.25, ar1_phi=0.7, sway_amplitude_deg=0.0, mean_tilt_deg=1.5,
                       mean_tilt_azimuth_deg=200.0, radius_mm=4.5, radius_variation=0.06,
                       dome_height_mm=1.3, groove_depth_mm=0.04, groove_width_fraction=0.4,
                       scanner_noise_mm=0.005, rings_per_lamina=4.5, ring_vertices=36, pose="random",
                       units="mm", sampling="isotropic", seed=1212),
    },
    {
        "file": "KRB-31_anisotropic.ply", "sheet": "KRB-31.sheet.toml", "specimen_id": "KRB-31",
        "horizon": "upper Karrabin, tidal-flat stromatolite bed 3", "bedding": (212.0, 9.0), "north": True,
        "notes": "CT-style ring sampling, file in centimetres; fortnightly and monthly tidal modulation",
        "params": dict(days_per_year=400, years=3.0, mean_thickness_mm=0.4, annual_amplitude=0.25,
                       noise_cv=0.12, ar1_phi=0.4, days_per_synodic_month=30.5, tidal_amplitude=0.25,
                       sway_amplitude_deg=3.0, sway_azimuth_deg=160.0, mean_tilt_deg=2.0,
                       mean_tilt_azimuth_deg=300.0, radius_mm=6.0, radius_variation=0.08,
                       dome_height_mm=1.2, groove_depth_mm=0.05, groove_width_fraction=0.35,
                       scanner_noise_mm=0.004, rings_per_lamina=5.0, ring_vertices=24, base="cut",
                       top="domed", pose="random", units="cm", sampling="anisotropic", seed=3131),
    },
]


def bedding_rotation(strike_deg: float, dip_deg: float) -> np.ndarray:
    """Rotation taking present-day geographic coordinates (x east, y north, z up) to paleo coordinates:
    about the strike line (azimuth ``strike_deg``) by the dip, right-hand rule (bed dips to the right
    of the strike direction), so the bed's upward pole goes to +z."""
    s = np.radians(strike_deg)
    strike = np.array([np.sin(s), np.cos(s), 0.0])
    return Rotation.from_rotvec(-np.radians(dip_deg) * strike).as_matrix()


def _vec(v) -> str:
    return "[" + ", ".join(f"{x:.9f}" for x in v) + "]"


def sheet_text(sample: dict, truth: dict) -> str:
    """The TOML specimen sheet of a sample, with its field vectors derived from the truth file."""
    rot = np.array(truth["frames"]["file_from_specimen"])[:3, :3] * truth["mm_per_unit"]
    geo_to_spec = bedding_rotation(*sample["bedding"]) if sample["bedding"] else np.eye(3)
    file_from_geo = rot @ geo_to_spec
    up = file_from_geo @ [0.0, 0.0, 1.0]
    north = file_from_geo @ [0.0, 1.0, 0.0]
    lines = [
        f"# Specimen sheet of {sample['specimen_id']} (invented demonstration scenario; see README.md).",
        "# up and north: field vertical and geographic north at collection, in the mesh's frame.",
        f'specimen_id = "{sample["specimen_id"]}"',
        f'units = "{truth["units"]}"',
        f"up = {_vec(up)}",
    ]
    if sample["north"]:
        lines.append(f"north = {_vec(north)}")
    if sample["bedding"]:
        lines += [f"strike_deg = {sample['bedding'][0]:.1f}", f"dip_deg = {sample['bedding'][1]:.1f}"]
    lines += [
        f"age_ma = {COMMON['age_ma']:.1f}",
        f"age_err_ma = {COMMON['age_err_ma']:.1f}",
        f'locality = "{COMMON["locality"]}"',
        f'horizon = "{sample["horizon"]}"',
        f'formation = "{COMMON["formation"]}"',
        f'collector = "{COMMON["collector"]}"',
        f'notes = "{sample["notes"]}"',
    ]
    return "\n".join(lines) + "\n"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", type=Path, default=HERE, help="folder to write into (default: this one)")
    ap.add_argument("--legacy", action="store_true", help="write the earlier three-year ring-mesh set")
    ap.add_argument("--only", default=None, help="write only the sample whose file name starts with this")
    args = ap.parse_args(argv)
    total = 0
    for sample in (LEGACY_SAMPLES if args.legacy else SAMPLES):
        if args.only and not sample["file"].startswith(args.only):
            continue
        spec = simulate(SynthParams(**sample["params"]))
        written = write_specimen(spec, args.out / sample["file"])
        write_text(args.out / sample["sheet"], sheet_text(sample, spec.truth))
        lam = spec.truth["laminae"]
        size = written["mesh_bytes"] + written["truth_bytes"]
        total += size
        print(f"{sample['file']}: {written['mesh_bytes'] / 2**20:.1f} MB mesh + "
              f"{written['truth_bytes'] / 2**10:.0f} kB truth, {spec.n_faces:,} faces, "
              f"{spec.n_vertices:,} vertices, {lam['n_recorded']} laminae, "
              f"{lam['recorded_laminae_per_year']:.1f} recorded laminae/yr "
              f"(nominal {lam['laminae_per_year_nominal']:.0f}), units {spec.truth['units']}")
    print(f"total {total / 2**20:.1f} MB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
