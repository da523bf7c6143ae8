"""Progress display: a bar on a terminal, silence otherwise (pipes, CI, ``--quiet``).

Stage functions accept an optional ``progress`` callable; the CLI passes one made here, a notebook
user passes nothing. The API stays free of any display code.
"""
from __future__ import annotations

import contextlib
import sys
from typing import Callable, Iterator, Optional

#: Signature of the callback stages call: ``progress(description, done, total)``.
ProgressCallback = Callable[[str, float, float], None]

_state = {"quiet": False}


def set_quiet(quiet: bool) -> None:
    """Silence every progress display in this process (the CLI's ``--quiet``)."""
    _state["quiet"] = bool(quiet)


def enabled() -> bool:
    """True when progress should be drawn: stderr is a terminal and the user did not ask for quiet."""
    return (not _state["quiet"]) and sys.stderr.isatty()


def report(progress: Optional[ProgressCallback], description: str, done: float, total: float) -> None:
    """Call ``progress`` if given; stages use this so that ``None`` means no display."""
    if progress is not None:
        progress(description, done, total)


@contextlib.contextmanager
def bar(description: str = "working") -> Iterator[Optional[ProgressCallback]]:
    """Context manager yielding a progress callback drawn with rich, or ``None`` when disabled."""
    if not enabled():
        yield None
        return
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    with Progress(TextColumn("{task.description}"), BarColumn(), TextColumn("{task.percentage:>3.0f}%"),
                  TimeElapsedColumn(), transient=True, console=None) as prog:
        task = prog.add_task(description, total=1.0)

        def callback(desc: str, done: float, total: float) -> None:
            prog.update(task, description=desc, completed=done, total=max(total, 1e-12))

        yield callback
