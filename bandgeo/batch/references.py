"""Published days-per-year and length-of-day points, cited, to plot beside a compilation.

A thin view of the one table, :data:`bandgeo.references.REFERENCES`. Where a source gives only one of
the two quantities, the other is derived with LOD = Y / N (Y = 365.24219 d of 86400 s) and marked
``derived``.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Optional

from ..references import Reference, references


@dataclass
class ReferencePoint:
    """One published constraint: age, days per year and length of day, each with its interval."""

    label: str
    citation: str
    age_ma: float
    age_err_ma: Optional[float]
    days_per_year: float
    dpy_ci: Optional[tuple[float, float]]
    length_of_day_h: float
    lod_ci: Optional[tuple[float, float]]
    note: str = ""
    derived: list = field(default_factory=list)

    @classmethod
    def from_reference(cls, ref: Reference) -> "ReferencePoint":
        return cls(ref.label, ref.citation, ref.age_ma, ref.age_err_ma, ref.days_per_year, ref.dpy_ci,
                   ref.length_of_day_h, ref.lod_ci, note=ref.note, derived=list(ref.derived))


def reference_points() -> tuple[list[ReferencePoint], str]:
    """The reference points and where they came from."""
    return [ReferencePoint.from_reference(r) for r in references()], "bandgeo.references (cited table)"
