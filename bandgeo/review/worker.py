"""The review page's re-run worker process (``python -m bandgeo.review.worker FD FOLDER report|figures``).

Started by :class:`bandgeo.review.app.ProcessRerun` with one end of a socket pair as ``FD``. It loads
the folder's inputs once (``bandgeo.pipeline.Rerunner``), warms them, says ``ready``, then answers each
``("run", figures_first)`` request: progress lines, the new figures (``partial``) as soon as
result.json and bands.csv are swapped in, the report, then ``done`` (or one ``error`` line). It stops
on ``("stop", None)`` or when the pipe closes (the page's process ended).
"""
from __future__ import annotations

import signal
import sys
import traceback


class _Gone(Exception):
    """The page's end of the pipe is closed."""


def serve_requests(conn, folder, report: bool) -> None:
    """Answer re-run requests on ``conn`` (a ``multiprocessing.connection.Connection``) until told to
    stop or the other end goes away."""
    from .. import pipeline
    from ..errors import BandgeoError

    def send(kind, payload):
        try:
            conn.send((kind, payload))
        except (OSError, ValueError) as exc:
            raise _Gone() from exc

    def progress(description, done, total):
        send("progress", (str(description), float(done or 0), float(total or 0)))

    def warming(description, done, total):  # before "ready": the page's process may show a bar
        progress(f"warm-up: {description}", done, total)

    runner = None
    try:
        warming("loading the specimen", 0, 5)
        runner = pipeline.Rerunner(folder)
        runner.warm(progress=lambda what, done, total: warming(what, done + 1, total + 1))
    except _Gone:
        return
    except Exception:  # the first save makes it again and reports the problem in one line
        pass
    try:
        send("ready", None)
    except _Gone:
        return
    while True:
        try:
            kind, figures_first = conn.recv()
        except (EOFError, OSError, KeyboardInterrupt):
            return
        if kind != "run":
            return
        try:
            if runner is None:
                runner = pipeline.Rerunner(folder)
            later = bool(report and figures_first)  # figures first, then the report
            analysis = runner(report=report and not later, progress=progress)
            payload = {"result": analysis.result, "band_table": analysis.band_table}
            if later:
                send("partial", payload)
                pipeline.write_analysis_report(analysis, folder, progress=progress, rewrite_result=False)
            payload["stage_seconds"] = dict(analysis.stage_seconds)
            send("done", payload)
        except _Gone:
            return
        except BandgeoError as exc:
            failure = (str(exc), True)
        except Exception as exc:  # a bug, or the system (disk full...): one line to the page
            traceback.print_exc(file=sys.stderr)
            failure = (f"{type(exc).__name__}: {exc}", False)
        else:
            continue
        try:
            send("error", failure)
        except _Gone:
            return


def main(argv=None) -> int:
    from multiprocessing.connection import Connection

    argv = sys.argv[1:] if argv is None else argv
    if len(argv) != 3 or argv[2] not in ("report", "figures"):
        print("usage: python -m bandgeo.review.worker FD FOLDER report|figures (started by the review page)",
              file=sys.stderr)
        return 2
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C reaches the whole group; the server stops us
    conn = Connection(int(argv[0]))
    try:
        serve_requests(conn, argv[1], argv[2] == "report")
    finally:
        conn.close()
    return 0


if __name__ == "__main__":
    sys.exit(main())
