"""Missing system libraries are found before any work starts, with one line naming the package (issue 15).

A missing library is simulated by adding a soname that no system has to the table checked; the real
table must load on this machine, where setup.sh installed the packages (common practice: a check that
cannot be triggered on a healthy machine is tested by injecting the fault).
"""
import sys

import pytest

from bandgeo import syscheck
from bandgeo.errors import BandgeoError

FAKE = ("libbandgeo-absent-test.so.7", "libbandgeo-absent7", "libabsent-7", "mesh")

linux_only = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="sonames are checked on Linux only")


@linux_only
def test_every_listed_library_loads_here():
    # setup.sh SYSTEM_PACKAGES installs them all on the CI machine
    assert syscheck.missing_libraries() == []
    syscheck.check_system_libraries("analyze")


@linux_only
def test_missing_library_names_the_package(monkeypatch):
    monkeypatch.setattr(syscheck, "LIBRARIES", syscheck.LIBRARIES + (FAKE,))
    with pytest.raises(syscheck.MissingSystemLibrary) as err:
        syscheck.check_system_libraries("analyze")
    text = str(err.value)
    assert isinstance(err.value, BandgeoError) and err.value.exit_status == 2
    assert text.startswith("libabsent-7 is missing: install the system package libbandgeo-absent7")
    assert "apt-get install libbandgeo-absent7" in text and "\n" not in text


@linux_only
def test_commands_that_need_no_library_are_not_stopped(monkeypatch):
    monkeypatch.setattr(syscheck, "LIBRARIES", syscheck.LIBRARIES + (FAKE,))
    for command in ("inspect", "synth", "periodicity", "power", "segment"):
        syscheck.check_system_libraries(command)  # no open3d or PDF needed: nothing raised


@linux_only
def test_several_missing_libraries_in_one_line(monkeypatch):
    other = ("libbandgeo-absent-test.so.8", "libbandgeo-absent8", "libabsent-8", "pdf")
    monkeypatch.setattr(syscheck, "LIBRARIES", (FAKE, other))
    with pytest.raises(syscheck.MissingSystemLibrary) as err:
        syscheck.check_system_libraries(None)
    assert "libabsent-7, libabsent-8 are missing" in str(err.value)
    assert "libbandgeo-absent7 libbandgeo-absent8" in str(err.value)


def test_deep_check_imports_open3d():
    syscheck.check_system_libraries("review", deep=True)  # open3d imports on this machine


@linux_only
def test_cli_stops_before_any_work(monkeypatch, tmp_path, capsys):
    from bandgeo.cli import main

    monkeypatch.setattr(syscheck, "LIBRARIES", syscheck.LIBRARIES + (FAKE,))
    scan = tmp_path / "KRB-07.ply"
    scan.write_bytes(b"not even read")
    out = tmp_path / "out"
    status = main(["analyze", str(scan), "--out", str(out)])
    err = capsys.readouterr().err
    assert status == 2 and err.count("\n") == 1
    assert "libabsent-7 is missing: install the system package libbandgeo-absent7" in err
    assert not out.exists()  # stopped before the scan was read or anything written
    assert main(["inspect", str(scan)]) == 2  # inspect needs no such library: it goes on to the bad scan
    assert "does not start with 'ply'" in capsys.readouterr().err
