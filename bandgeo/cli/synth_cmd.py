"""``bandgeo synth``: write a forward-model specimen (mesh and truth file) with known days per year."""
from __future__ import annotations

import dataclasses
import typing

import click

from ._common import UNITS, echo, out_dir_option, seed_option

#: One-line help for every model parameter (the option is the field name with dashes).
HELP = {
    "days_per_year": "Solar days per year recorded (one lamina per day at the default rate).",
    "years": "Length of the record, years.",
    "laminae_per_day": "Growth rate: laminae per day (1 = daily).",
    "mean_thickness_mm": "Expected lamina thickness, mm.",
    "annual_amplitude": "Fractional annual modulation of thickness, 0 <= A < 1 (0 = no annual cycle).",
    "annual_phase_rad": "Phase of the annual thickness cycle at day 0, rad.",
    "noise_cv": "Coefficient of variation of the AR(1) multiplicative thickness noise.",
    "ar1_phi": "Lag-1 autocorrelation of the thickness noise, -1 < phi < 1.",
    "days_per_synodic_month": "Days per synodic month for tidal modulation (omit for none).",
    "tidal_amplitude": "Fractional fortnightly/monthly tidal modulation of thickness, 0 <= a < 1.",
    "hiatus_rate_per_year": "Missing-day episodes per year (Poisson).",
    "hiatus_mean_days": "Mean length of a missing-day episode, days (>= 1).",
    "sway_amplitude_deg": "Amplitude of the annual heliotropic sway of the growth axis, degrees.",
    "meander_amplitude_deg": "Growth meander: standard deviation of each horizontal tilt component of a "
                             "red-noise (AR(1)) wander of the growth direction, degrees (0 = none).",
    "meander_correlation_laminae": "Correlation length of the meander, laminae (lag-1 correlation "
                                   "exp(-1/length)).",
    "radius_taper": "Fractional change of the radius from base to top (-0.3 narrows by 30%, 0.3 widens).",
    "sway_azimuth_deg": "Azimuth of the sway plane, degrees clockwise from north.",
    "mean_tilt_deg": "Mean lean of the growth axis from the paleo-vertical, degrees.",
    "mean_tilt_azimuth_deg": "Azimuth of the mean lean, degrees clockwise from north.",
    "sway_phase_rad": "Phase of the sway at day 0, rad.",
    "radius_mm": "Column radius, mm.",
    "radius_variation": "Slow fractional variation of the radius along the column.",
    "dome_height_mm": "Rise of each convex lamina from the wall to the axis, mm.",
    "groove_depth_mm": "Depth of the weathering groove at each boundary, mm.",
    "groove_width_fraction": "Groove width as a fraction of the local lamina thickness.",
    "color_banding": "Colour the vertices by lamina (dark film below each boundary).",
    "base": "Base of the column: a closed saw cut or open.",
    "top": "Top of the column: the last lamina's dome, a flat cut, or open.",
    "scanner_noise_mm": "Scanner noise (standard deviation), mm: along the normal before smoothing "
                        "(photogrammetric), of the density as a distance (ct), isotropic (rings).",
    "holes": "Number of small holes punched in the side wall.",
    "pose": "File frame: identity, or a random rotation and translation.",
    "units": "Units of the written mesh.",
    "sampling": "Rings mesh only: isotropic (near-equilateral) or anisotropic (rings of few vertices).",
    "rings_per_lamina": "Rings mesh only: vertex rings per mean lamina thickness.",
    "ring_vertices": "Rings mesh only: vertices per ring (default: chosen from the sampling).",
    "mesh_kind": "How the surface is meshed: photogrammetric (near-isotropic triangles not aligned with "
                 "the laminae, normal noise, Taubin smoothing), ct (voxels + marching cubes, with "
                 "staircase) or rings (a vertex ring on every boundary; chosen when a rings-only "
                 "option is given).",
    "edge_length_mm": "Target triangle edge length of the photogrammetric mesh, mm.",
    "voxel_size_mm": "Voxel size of the ct mesh, mm.",
    "smoothing_iterations": "Taubin smoothing passes of the photogrammetric mesh (0 = none).",
    "edge_aspect": "Photogrammetric mesh: stretch the triangles around the column by this factor "
                   "(1 = near-equilateral; larger makes small files of long records).",
}

#: Shown instead of ``None`` for defaults that depend on other parameters.
DEFAULT_TEXT = {
    "groove_depth_mm": "25% of --mean-thickness-mm; 0.04 with a rings-only option",
    "scanner_noise_mm": "10% of --mean-thickness-mm; 0.004 with a rings-only option",
    "sway_amplitude_deg": "5.0; 3.0 with a rings-only option",
    "meander_amplitude_deg": "1.0; 0 with a rings-only option",
    "edge_length_mm": "a third of --mean-thickness-mm",
    "voxel_size_mm": "a third of --mean-thickness-mm",
    "mesh_kind": "photogrammetric",
    "sampling": "isotropic",
    "rings_per_lamina": "4",
    "ring_vertices": "from the sampling",
    "days_per_synodic_month": "none",
}


def _param_options(func):
    """Attach one click option per SynthParams field (except seed, which has the shared option)."""
    from ..synth.params import CHOICES, SynthParams

    hints = typing.get_type_hints(SynthParams)
    for f in reversed(dataclasses.fields(SynthParams)):
        if f.name == "seed":
            continue
        flag = "--" + f.name.replace("_", "-")
        hint = hints[f.name]
        shown = DEFAULT_TEXT.get(f.name, f.default)
        kwargs = {"default": None, "help": HELP.get(f.name, f.name) + f"  [default: {shown}]"}
        if f.name == "units":
            kwargs["type"] = UNITS
        elif f.name in CHOICES:
            kwargs["type"] = click.Choice(CHOICES[f.name], case_sensitive=False)
        elif hint is bool:
            func = click.option(f"{flag}/--no-{flag[2:]}", f.name, default=None,
                                help=kwargs["help"])(func)
            continue
        elif hint is int or hint == typing.Optional[int]:
            kwargs["type"] = int
        else:
            kwargs["type"] = float
        func = click.option(flag, f.name, **kwargs)(func)
    return func


@click.command("synth", context_settings={"max_content_width": 100})
@out_dir_option()
@click.option("--name", default="synth", show_default=True, help="File name stem of the outputs.")
@click.option("--format", "fmt", type=click.Choice(["ply", "obj", "stl"], case_sensitive=False),
              default="ply", show_default=True, help="Mesh format (PLY is binary with vertex colours).")
@seed_option()
@_param_options
@click.pass_context
def synth(ctx, out, name, fmt, seed, **params):
    """Write a forward-model specimen: OUT/NAME.ply and OUT/NAME.truth.json.

    The default is a realistic scan: a photogrammetry-like mesh whose triangles ignore the laminae,
    a column 16 mm across that sways 5 degrees a year and meanders, scanner noise of 10% and grooves of
    25% of a lamina. --mesh-kind ct voxelises the column and runs marching cubes; --mesh-kind rings
    (or any rings-only option) gives the older mesh with a vertex ring on every boundary.

    Example:  bandgeo synth --days-per-year 400 --years 3 --out specimens/
    """
    from .. import progress
    from ..errors import ParameterError
    from ..synth import SynthParams, simulate, write_specimen

    if not name or "/" in name or "\\" in name or name in (".", ".."):
        raise ParameterError(f"--name must be a plain file name stem but got {name!r}")
    given = {k: v for k, v in params.items() if v is not None}
    sp = SynthParams(seed=seed, **given)
    with progress.bar("synthesising specimen") as cb:
        spec = simulate(sp, progress=cb)
        written = write_specimen(spec, out / f"{name}.{fmt.lower()}", progress=cb)
    lam = spec.truth["laminae"]
    echo(ctx, f"wrote {written['mesh']} ({_size(written['mesh_bytes'])}, {written['format'].upper()}, "
              f"{spec.n_vertices:,} vertices, {spec.n_faces:,} faces, units {sp.units})")
    echo(ctx, f"wrote {written['truth']} ({_size(written['truth_bytes'])}): {lam['n_recorded']:,} laminae, "
              f"{lam['recorded_laminae_per_year']:.1f} recorded laminae per year "
              f"(nominal {lam['laminae_per_year_nominal']:.1f}), column "
              f"{spec.truth['mesh']['column_length_mm']:.1f} mm long, {sp.mesh_kind} mesh, seed {sp.seed}")


def _size(n: int) -> str:
    for unit, scale in (("GB", 1 << 30), ("MB", 1 << 20), ("kB", 1 << 10)):
        if n >= scale:
            return f"{n / scale:.1f} {unit}"
    return f"{n} B"
