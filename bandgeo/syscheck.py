"""Find missing system libraries before any work starts, and name the package that provides each.

Two Python dependencies load shared libraries of the operating system when first used, long after a
command started: open3d (mesh reduction for the report's figures and the review page) needs libusb,
libudev, OpenGL/EGL and X11 client libraries even without a display, and weasyprint (the PDF report)
needs Pango and HarfBuzz. Without them a run would fail a minute in with an ImportError. Here each
library is opened by its Linux soname with ``ctypes`` (a few milliseconds, no import of open3d), and a
missing one stops the command at once with one line naming the package to install.

Use ``check_system_libraries(command)`` at the start of a command; ``deep=True`` also imports open3d
and translates a failing import into the same kind of line.
"""
from __future__ import annotations

import ctypes
import ctypes.util
import functools
import re
import sys

from .errors import BandgeoError

#: (soname on Linux, Debian/Ubuntu package, short name for messages, group) of every library checked.
#: Sonames from ``ldd`` on open3d 0.20's pybind module and on weasyprint's documented dependencies.
LIBRARIES = (
    ("libusb-1.0.so.0", "libusb-1.0-0", "libusb-1.0", "mesh"),
    ("libudev.so.1", "libudev1", "libudev", "mesh"),
    ("libGL.so.1", "libgl1", "libGL (OpenGL)", "mesh"),
    ("libEGL.so.1", "libegl1", "libEGL", "mesh"),
    ("libX11.so.6", "libx11-6", "libX11", "mesh"),
    ("libpango-1.0.so.0", "libpango-1.0-0", "Pango", "pdf"),
    ("libpangoft2-1.0.so.0", "libpangoft2-1.0-0", "PangoFT2", "pdf"),
    ("libharfbuzz-subset.so.0", "libharfbuzz-subset0", "HarfBuzz subset", "pdf"),
)

#: Library groups each subcommand needs; commands not listed need none (synth, inspect, segment,
#: periodicity, power work without them).
COMMAND_NEEDS = {
    "analyze": ("mesh", "pdf"),
    "report": ("mesh", "pdf"),
    "batch": ("mesh", "pdf"),
    "review": ("mesh",),
}


class MissingSystemLibrary(BandgeoError):
    """A system library a dependency needs is not installed (exit status 2, one line)."""


def _loadable(soname: str) -> bool:
    try:
        ctypes.CDLL(soname)
        return True
    except OSError:
        return False


@functools.lru_cache(maxsize=None)
def _missing(table: tuple, groups: tuple) -> tuple:
    return tuple(row for row in table if row[3] in groups and not _loadable(row[0]))


def missing_libraries(command: str | None = None) -> list:
    """The ``(soname, package, name, group)`` rows of :data:`LIBRARIES` that cannot be loaded.

    ``command`` limits the check to what that subcommand needs (:data:`COMMAND_NEEDS`); None checks all.
    Only Linux is checked (other systems ship these libraries differently; their failures stay late).
    """
    if not sys.platform.startswith("linux"):
        return []
    groups = tuple(sorted({row[3] for row in LIBRARIES})) if command is None else COMMAND_NEEDS.get(command, ())
    if not groups:
        return []
    return list(_missing(tuple(LIBRARIES), groups))


def message(rows) -> str:
    """One line naming the missing libraries and the packages to install."""
    names = ", ".join(row[2] for row in rows)
    packages = " ".join(dict.fromkeys(row[1] for row in rows))
    verb = "is" if len(rows) == 1 else "are"
    what = "the system package" if len(packages.split()) == 1 else "the system packages"
    return (f"{names} {verb} missing: install {what} {packages} (Debian/Ubuntu: sudo apt-get install {packages}; "
            "or run 'sudo bash setup.sh'; other systems: the same libraries from their package manager)")


def check_system_libraries(command: str | None = None, *, deep: bool = False) -> None:
    """Raise :class:`MissingSystemLibrary` (one line, exit 2) when a needed system library is missing.

    Parameters
    ----------
    command : str or None
        The subcommand about to run (``'analyze'``, ``'report'``, ...); None checks every library.
    deep : bool
        Also import open3d and turn an ImportError/OSError about a shared library into the same line
        (slower: about a second).
    """
    rows = missing_libraries(command)
    if rows:
        raise MissingSystemLibrary(message(rows))
    if deep and (command is None or "mesh" in COMMAND_NEEDS.get(command, ())):
        try:
            import open3d  # noqa: F401
        except (ImportError, OSError) as exc:
            text = str(exc)
            found = re.search(r"(lib[\w.+-]+\.so[\w.]*)", text)
            soname = found.group(1) if found else None
            known = [row for row in LIBRARIES if soname and row[0] == soname]
            if known:
                raise MissingSystemLibrary(message(known)) from None
            raise MissingSystemLibrary(f"open3d cannot be loaded ({' '.join(text.split())[:160]}); install the "
                                       "system library it names, or reinstall open3d with pip") from None
