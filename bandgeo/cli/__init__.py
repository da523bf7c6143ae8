"""The ``bandgeo`` command: a thin layer over the Python API.

Each subcommand lives in its own module in this package and is imported only when used, so that
``bandgeo --help`` stays fast. Every subcommand follows one style: positional inputs, ``--out DIR``
for outputs, one-line errors with exit status 2 for bad input, and no traceback unless ``--debug``.
"""
from __future__ import annotations

import importlib
import sys

import click

from .. import __version__
from ..errors import BandgeoError

#: name -> (module, function, one-line help). Modules are imported lazily.
COMMANDS = {
    "synth": ("bandgeo.cli.synth_cmd", "synth", "Write a forward-model specimen (mesh + truth file)."),
    "inspect": ("bandgeo.cli.inspect_cmd", "inspect", "Load a scan and print its size, units, up vector and problems."),
    "segment": ("bandgeo.cli.segment_cmd", "segment", "Find the growth bands of a scan and write the segmentation."),
    "periodicity": ("bandgeo.cli.periodicity_cmd", "periodicity", "Test a band-thickness series (CSV) for daily and annual cycles."),
    "analyze": ("bandgeo.cli.analyze_cmd", "analyze", "Run the whole job on a scan: load, segment, measure, test, report."),
    "report": ("bandgeo.cli.report_cmd", "report", "Rebuild the report of an analysed specimen folder."),
    "review": ("bandgeo.cli.review_cmd", "review", "Review and correct a segmentation in a local web page."),
    "batch": ("bandgeo.cli.batch_cmd", "batch", "Analyse many specimens, locally or on a Dask cluster, and compile them."),
    "power": ("bandgeo.cli.power_cmd", "power", "How many years of record are needed to detect the annual cycle."),
}


class LazyGroup(click.Group):
    """A click group whose subcommands are imported on first use."""

    def list_commands(self, ctx):
        return [name for name in COMMANDS if self._available(name)]

    @staticmethod
    def _available(name):
        module = COMMANDS[name][0]
        return importlib.util.find_spec(module) is not None

    def get_command(self, ctx, name):
        if name not in COMMANDS or not self._available(name):
            return None
        module, attr, _ = COMMANDS[name]
        return getattr(importlib.import_module(module), attr)

    def format_commands(self, ctx, formatter):
        rows = [(name, COMMANDS[name][2]) for name in self.list_commands(ctx)]
        if rows:
            with formatter.section("Commands"):
                formatter.write_dl(rows)


@click.group(cls=LazyGroup, context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100})
@click.version_option(__version__, "--version", prog_name="bandgeo", message="%(prog)s %(version)s")
@click.option("--debug", is_flag=True, help="Show full tracebacks on errors.")
@click.option("--quiet", "-q", is_flag=True, help="No progress bars and no informational output.")
@click.pass_context
def cli(ctx, debug, quiet):
    """bandgeo: days per year and length of day from 3-D scans of laminated stromatolites.

    Typical use:  bandgeo analyze SCAN.ply --out RESULTS/  then  bandgeo review RESULTS/
    """
    from .. import progress

    ctx.ensure_object(dict)
    ctx.obj["debug"] = debug
    ctx.obj["quiet"] = quiet
    progress.set_quiet(quiet)


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def _check_system(argv: list) -> None:
    """Stop before any work when a system library a command needs is missing (one line naming the
    package to install; ``bandgeo.syscheck``, when present)."""
    if any(a in ("-h", "--help", "--version") for a in argv):
        return
    command = next((a for a in argv if a in COMMANDS), None)
    if command is None:
        return
    try:
        from ..syscheck import check_system_libraries
    except ImportError:  # pragma: no cover - the check is optional
        return
    check_system_libraries(command)


def main(argv=None) -> int:
    """Entry point of the console script. Returns the exit status."""
    argv = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in argv
    try:
        _check_system(argv)
        status = cli.main(args=argv, prog_name="bandgeo", standalone_mode=False)
        if isinstance(status, int) and not isinstance(status, bool):  # a command's click Exit(code)
            return status
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except click.exceptions.Abort:
        click.echo("bandgeo: interrupted; nothing partial was left behind.", err=True)
        return 130
    except click.UsageError as exc:
        if debug:
            raise
        where = f" (see 'bandgeo {exc.ctx.info_name} --help')" if exc.ctx is not None and exc.ctx.parent else \
            " (see 'bandgeo --help')"
        click.echo(f"bandgeo: error: {_one_line(exc.format_message())}{where}", err=True)
        return 2
    except click.ClickException as exc:
        if debug:
            raise
        click.echo(f"bandgeo: error: {_one_line(exc.format_message())}", err=True)
        return exc.exit_code or 2
    except BandgeoError as exc:
        if debug:
            raise
        click.echo(f"bandgeo: error: {_one_line(exc)}", err=True)
        return exc.exit_status
    except KeyboardInterrupt:
        click.echo("bandgeo: interrupted; nothing partial was left behind.", err=True)
        return 130
    except MemoryError:
        if debug:
            raise
        click.echo("bandgeo: error: out of memory; decimate the scan or run on a larger machine.", err=True)
        return 1
    except Exception as exc:  # an internal error: still one line, with a pointer to --debug
        if debug:
            raise
        click.echo(f"bandgeo: internal error: {type(exc).__name__}: {_one_line(exc)} "
                   f"(rerun with --debug for a traceback and please report it)", err=True)
        return 1
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
