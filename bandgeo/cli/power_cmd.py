"""``bandgeo power``: how many years of record a specimen needs for its annual cycle to be detected."""
from __future__ import annotations

import click

from ._common import echo, out_dir_option, seed_option


def _years(ctx, param, value):
    try:
        years = [float(v) for v in str(value).replace(";", ",").split(",") if v.strip()]
    except ValueError:
        raise click.BadParameter(f"expected comma-separated years like 1,2,3,5,8 but got {value!r}")
    if not years or any(y <= 0 for y in years):
        raise click.BadParameter(f"expected positive years like 1,2,3,5,8 but got {value!r}")
    return years


@click.command("power")
@click.option("--noise-cv", type=click.FloatRange(min=0), default=0.15, show_default=True,
              help="Coefficient of variation of the lamina-thickness noise.")
@click.option("--amplitude", type=click.FloatRange(0, 1, max_open=True), default=0.3, show_default=True,
              help="Fractional annual modulation of lamina thickness (0 = no annual cycle).")
@click.option("--years", callback=_years, default="1,2,3,5,8", show_default=True,
              help="Years of record to evaluate, comma-separated.")
@click.option("--days-per-year", type=click.FloatRange(min=10), default=400.0, show_default=True,
              help="True solar days per year of the simulated column.")
@click.option("--ar1-phi", type=click.FloatRange(-1, 1, min_open=True, max_open=True), default=0.5,
              show_default=True, help="Lag-1 autocorrelation of the lamina noise.")
@click.option("--trials", type=click.IntRange(min=1), default=200, show_default=True,
              help="Simulated records per years value.")
@click.option("--simulations", "n_sim", type=click.IntRange(min=99), default=200, show_default=True,
              help="Monte Carlo replicates inside each periodicity test.")
@click.option("--n-sim", "n_sim_alias", type=click.IntRange(min=99), default=None, hidden=True)
@click.option("--workers", type=click.IntRange(min=1), default=1, show_default=True,
              help="Local processes to spread the trials over.")
@click.option("--use-tilt", is_flag=True, help="Also test the sway of the growth direction.")
@seed_option()
@out_dir_option()
@click.pass_context
def power(ctx, noise_cv, amplitude, years, days_per_year, ar1_phi, trials, n_sim, n_sim_alias, workers,
          use_tilt, seed, out):
    """Probability of detecting the annual cycle, and the expected interval width, against years of
    record, simulated with the forward model and tested as 'bandgeo analyze' does."""
    from ..batch import power_analysis
    from ..progress import bar

    if n_sim_alias is not None:
        n_sim = n_sim_alias
    with bar("power analysis") as cb:
        table = power_analysis(noise_cv=noise_cv, annual_amplitude=amplitude, years=years,
                               days_per_year=days_per_year, n_trials=trials, seed=seed, ar1_phi=ar1_phi,
                               workers=workers, n_sim=n_sim, use_tilt=use_tilt, progress=cb)
    files = table.write(out)
    click.echo(table.format_table())
    echo(ctx, "wrote " + ", ".join(str(files[k]) for k in ("csv", "json", "svg", "pdf", "png") if k in files))
