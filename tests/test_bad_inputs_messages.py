"""Error messages show values as a user wrote them (issue 15: a message printed ``np.float64(-0.2)``).

Expected forms are plain decimal numbers and lists, as in the rest of the messages (common practice).
"""
import numpy as np
import pytest

from bandgeo.errors import BandgeoError, InputError, ParameterError, ReviewError, SeriesError, shown


@pytest.mark.parametrize("cls", [InputError, ParameterError, SeriesError, ReviewError])
def test_numpy_scalar_reprs_become_plain_numbers(cls):
    err = cls(f"thickness must be positive but got {np.float64(-0.2)!r} at band {np.int64(7)!r}; "
              f"flag {np.True_!r}, unit {np.str_('cm')!r}")
    assert str(err) == "thickness must be positive but got -0.2 at band 7; flag True, unit 'cm'"
    assert isinstance(err, BandgeoError) and err.exit_status == 2


def test_messages_stay_on_one_line():
    assert str(InputError("first line\nsecond   line\t end")) == "first line second line end"


@pytest.mark.parametrize("value, text", [
    (np.float64(-0.2), "-0.2"),
    (np.array([np.nan, 0.0, 1.0]), "[nan, 0, 1]"),
    ((np.float32(1.5), 2, 3.25), "(1.5, 2, 3.25)"),
    ("furlong", "'furlong'"),
    (1e308, "1e+308"),
    (-720.5, "-720.5"),
    (True, "true"),
    (None, "nothing"),
])
def test_shown(value, text):
    assert shown(value) == text


def test_shown_shortens_long_values():
    assert shown(list(range(100))) == "[0, 1, 2, 3, 4, 5, 6, 7, ...]"
    assert len(shown("x" * 500)) <= 120
