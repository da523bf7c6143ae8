"""``bandgeo batch``: analyse many specimens (local processes or a Dask cluster) and compile them."""
from __future__ import annotations

import click

from ._common import analysis_options, echo, existing_path, out_dir_option, seed_option


def interrupted_line(out, command: str = "bandgeo batch") -> str:
    """What an interrupted batch left, read from its summary: finished, stopped and not started."""
    from ..batch.summary import SUMMARY_JSON
    from ..results import read_json_or_none

    summary = read_json_or_none(out / SUMMARY_JSON) or {}
    counts = summary.get("counts") or {}
    pending = int(counts.get("pending") or 0)
    finished = int(counts.get("done") or 0) + int(counts.get("skipped") or 0) + int(counts.get("failed") or 0)
    return (f"bandgeo: interrupted: {finished} of {counts.get('total', '?')} specimens finished, {pending} left "
            f"to do (the ones in progress were stopped and their folders left as before this run; "
            f"{out / SUMMARY_JSON} lists them); run the same command again to complete the batch")


@click.command("batch")
@click.argument("specimens", callback=existing_path, metavar="SPECIMENS")
@out_dir_option()
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Specimens analysed at once (default: one per CPU core locally; no limit on a cluster).")
@click.option("--scheduler", metavar="ADDRESS", default=None,
              help="Dask scheduler address (e.g. tcp://10.0.0.5:8786); the cluster runs the specimens. "
                   "The --out folder must be on a file system every worker sees.")
@seed_option()
@analysis_options
@click.option("--no-report", is_flag=True, help="Skip each specimen's HTML/PDF report (faster).")
@click.option("--no-compile", is_flag=True, help="Do not write the compilation across specimens.")
@click.pass_context
def batch(ctx, specimens, out, workers, scheduler, seed, min_period, max_period, n_sim, discard_review,
          no_report, no_compile):
    """Analyse every specimen in SPECIMENS and compile the results.

    SPECIMENS is a folder of scans (.ply .obj .stl .off .glb, any case; a <name>.sheet.toml beside a scan
    is its sheet) or a CSV with a 'scan' column and optional sheet columns (specimen_id, units, up,
    north, strike_deg, dip_deg, age_ma, age_err_ma, horizon, locality).

    Re-running with the same inputs, parameters and seed skips the specimens already analysed; a
    failed specimen is listed with its error and the rest go on.
    """
    from ..batch import compile_results, read_manifest, run_batch
    from ..progress import bar

    jobs = read_manifest(specimens)
    # Only settings that differ from analyze's defaults enter the job key, so that spelling out a
    # default does not re-run a finished batch.
    params = {key: value for key, value, default in (
        ("report", not no_report, True), ("keep_review", not discard_review, True), ("n_sim", n_sim, 1000),
        ("min_period_bands", min_period, None), ("max_period_bands", max_period, None)) if value != default}
    echo(ctx, f"{len(jobs)} specimens from {specimens} -> {out}")
    try:
        with bar("batch") as cb:
            summary = run_batch(jobs, out, workers=workers, scheduler=scheduler, params=params, seed=seed,
                                progress=cb)
    except KeyboardInterrupt:
        click.echo(interrupted_line(out, ctx.command_path), err=True)
        raise click.exceptions.Exit(130) from None
    echo(ctx, summary.table())
    echo(ctx, f"summary: {out / 'batch_summary.json'} and {out / 'batch_summary.csv'}")
    if not no_compile and (summary.n_done + summary.n_skipped) > 0:
        comp = compile_results(out)
        if comp.flagged:
            echo(ctx, f"disagree with their horizon (p < 0.01): {', '.join(comp.flagged)}")
        echo(ctx, f"compilation: {comp.files['csv']}, {comp.files['html']}, {comp.files.get('svg')}, "
                  f"{comp.files.get('pdf')}")
    if summary.n_failed:
        echo(ctx, f"{summary.n_failed} specimen(s) failed; see the errors above (the others are complete)")
