"""Published days-per-year reference points shown beside a specimen's estimate, with citations.

A thin view of the one table, :data:`bandgeo.references.REFERENCES`.
"""
from __future__ import annotations

from ..references import Reference, references


def as_dict(ref: Reference) -> dict:
    """``{label, age_ma, age_err_ma, days_per_year, err, citation, note}`` (``err`` the ± on days per
    year, linearised from a published ± on the length of day where that is what was published)."""
    return {"label": ref.label, "age_ma": ref.age_ma, "age_err_ma": ref.age_err_ma,
            "days_per_year": ref.days_per_year, "err": ref.dpy_half_width, "citation": ref.citation,
            "note": ref.note}


#: The table as plain dicts (kept for callers of the older name).
FALLBACK = [as_dict(r) for r in references()]


def reference_points() -> list[dict]:
    """Days-per-year reference points: ``[{label, age_ma, age_err_ma, days_per_year, err, citation, note}]``."""
    return [as_dict(r) for r in references()]
