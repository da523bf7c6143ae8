"""Published days-per-year / length-of-day reference points, with their citations: the one table.

The report's comparison figure (``bandgeo.report.references``), the batch compilation
(``bandgeo.batch.references``) and ``bandgeo.astro.reference_points`` all read :data:`REFERENCES`.
Where a source gives only one of days per year N and length of day LOD, the other is derived with
LOD = Y / N (Y = 365.24219 d of 86400 s, docs/astronomy.md) and listed in ``derived``.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Optional

from .constants import YEAR_SECONDS

YEAR_HOURS = YEAR_SECONDS / 3600.0


@dataclass(frozen=True)
class Reference:
    """One published constraint.

    ``dpy_err`` / ``lod_err_h`` are the published half-widths ("±"), None when the source gives none;
    ``dpy_ci`` / ``lod_ci`` are the intervals (a derived one is mapped exactly through LOD = Y / N).
    """

    label: str
    citation: str
    age_ma: float
    age_err_ma: Optional[float]
    days_per_year: float
    dpy_err: Optional[float]
    length_of_day_h: float
    lod_err_h: Optional[float]
    derived: tuple = ()
    note: str = ""

    @property
    def dpy_ci(self) -> Optional[tuple[float, float]]:
        if self.dpy_err is not None and "days_per_year" not in self.derived:
            return (self.days_per_year - self.dpy_err, self.days_per_year + self.dpy_err)
        if self.lod_err_h is not None:
            return (YEAR_HOURS / (self.length_of_day_h + self.lod_err_h),
                    YEAR_HOURS / (self.length_of_day_h - self.lod_err_h))
        return None

    @property
    def lod_ci(self) -> Optional[tuple[float, float]]:
        if self.lod_err_h is not None and "length_of_day_h" not in self.derived:
            return (self.length_of_day_h - self.lod_err_h, self.length_of_day_h + self.lod_err_h)
        if self.dpy_err is not None:
            return (YEAR_HOURS / (self.days_per_year + self.dpy_err),
                    YEAR_HOURS / (self.days_per_year - self.dpy_err))
        return None

    @property
    def dpy_half_width(self) -> Optional[float]:
        """The published ± on N, or the linearised one from a published ± on LOD (dN = N dLOD / LOD)."""
        if self.dpy_err is not None:
            return self.dpy_err
        if self.lod_err_h is not None:
            return self.days_per_year * self.lod_err_h / self.length_of_day_h
        return None


def _from_dpy(label, citation, age, age_err, n, err, note="") -> Reference:
    return Reference(label, citation, age, age_err, n, err, YEAR_HOURS / n, None, ("length_of_day_h",), note)


def _from_lod(label, citation, age, age_err, lod, err, note="") -> Reference:
    return Reference(label, citation, age, age_err, YEAR_HOURS / lod, None, lod, err, ("days_per_year",), note)


#: Middle Devonian age used for the coral points: the stage spans roughly 393-383 Ma (from memory).
_DEVONIAN_MA, _DEVONIAN_ERR_MA = 388.0, 5.0

REFERENCES: tuple[Reference, ...] = (
    Reference("present day", "standard almanac values (tropical year 365.24219 d)", 0.0, None,
              365.24219, None, 24.0, None, note="reference value"),
    _from_dpy("Middle Devonian corals", "Wells (1963) Nature 197:948-950", _DEVONIAN_MA, _DEVONIAN_ERR_MA,
              400.0, None, note="about 400 growth lines per year, no interval given; age span of the Middle "
                                "Devonian from memory"),
    _from_dpy("Middle Devonian corals, months x days", "Scrutton (1965) Palaeontology 7:552-558",
              _DEVONIAN_MA, _DEVONIAN_ERR_MA, 13.0 * 30.5, None,
              note="13 months of 30.5 days, no interval given; age span of the Middle Devonian from memory"),
    Reference("~620 Ma tidal rhythmites", "Williams (2000) Rev. Geophys. 38:37-59", 620.0, None,
              400.0, 7.0, 21.9, 0.4, note="400 ± 7 solar days/yr; LOD 21.9 ± 0.4 h (both published)"),
    _from_dpy("~650 Ma tidal rhythmites", "Williams (1989) J. Geol. Soc. London 146:97-111", 650.0, None,
              400.0, 20.0, note="400 ± 20 days/yr (pages from memory)"),
    _from_dpy("~850 Ma heliotropic stromatolite", "Vanyo & Awramik (1985) Precambrian Res. 29:121-142", 850.0,
              None, 435.0, None,
              note="435 laminae per annual sway wave, no uncertainty given; method and age disputed by "
                   "Williams, Jenkins & Walter (2007) Palaeogeogr. Palaeoclimatol. Palaeoecol. 249:80-89"),
    _from_lod("1.4 Ga cyclostratigraphy", "Meyers & Malinverno (2018) PNAS 115:6363-6368", 1400.0, None,
              18.68, 0.25, note="LOD 18.68 ± 0.25 h (2 sigma); days per year derived as Y / LOD"),
)


def references() -> list[Reference]:
    """The table, youngest first."""
    return sorted(REFERENCES, key=lambda r: r.age_ma)
