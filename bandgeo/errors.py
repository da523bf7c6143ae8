"""User-facing errors: each carries one line that says what is wrong and what to do.

Stage functions raise these at their public entry points. The CLI prints the message as a single line
and exits with status 2; it never shows a traceback unless ``--debug`` is given.
"""
import re

_NP_SCALAR = re.compile(r"\bnp\.(?:float\d*|int\d*|uint\d*|complex\d*|str_|bool)\(([^()]*)\)")


class BandgeoError(Exception):
    """Base class for errors caused by the user's input or parameters (exit status 2)."""

    exit_status = 2

    def __init__(self, message: str):
        # Keep the message to one line: the CLI prints it verbatim. NumPy scalars formatted with !r
        # (``np.float64(-0.2)``) are shown as the plain numbers a user typed.
        text = " ".join(str(message).split())
        if "np." in text:
            text = _NP_SCALAR.sub(r"\1", text).replace("np.True_", "True").replace("np.False_", "False")
        super().__init__(text)


class InputError(BandgeoError):
    """An input file (scan, sheet, CSV, review file) is missing, corrupt or unusable."""


class ParameterError(BandgeoError):
    """A parameter value is out of range or of the wrong form."""


class SeriesError(BandgeoError):
    """A series is too short, or otherwise unfit, for a periodicity test."""


class ReviewError(BandgeoError):
    """A review file or review edit is malformed."""


class BandgeoWarning(UserWarning):
    """A soft problem that does not stop the work; recorded in results as a warning."""


def shown(value) -> str:
    """``value`` as a user reads it in a message: plain numbers (never ``np.float64(-0.2)``), plain lists
    (never ``array([...])``), text quoted; long values shortened."""
    import numbers

    import numpy as np

    if isinstance(value, np.ndarray):
        value = value.tolist()
    elif isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, (list, tuple)):
        inner = ", ".join(shown(v) for v in value[:8]) + (", ..." if len(value) > 8 else "")
        text = f"[{inner}]" if isinstance(value, list) else f"({inner})"
    elif isinstance(value, bool) or value is None:
        text = str(value).lower() if isinstance(value, bool) else "nothing"
    elif isinstance(value, numbers.Real):
        text = f"{float(value):.6g}" if isinstance(value, float) else str(value)
    elif isinstance(value, str):
        text = repr(value)
    else:
        text = repr(value)
    return text if len(text) <= 120 else text[:117] + "..."
