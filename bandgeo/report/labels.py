"""Plain-language labels and units for the result.json keys the report shows (raw keys stay in the
JSON), and the small helpers that turn a value into text with its unit."""
from __future__ import annotations

from typing import Any, Mapping

#: Plain labels (and units) of result.json keys shown in the detail tables.
LABELS = {
    # resolution
    "sampling_along_mm": ("vertex spacing along the axis", "mm"),
    "band_spacing_mm": ("band spacing seen in the curvature", "mm"),
    "spacing_to_sampling": ("band spacing over vertex spacing", "×"),
    "noise_mm": ("scanner noise", "mm"),
    "noise_method": ("how the noise was measured", ""),
    "relief_mm": ("groove relief between bands", "mm"),
    "relief_to_noise": ("relief over noise", "×"),
    "min_samples_per_band": ("fewest vertex rings in a band", ""),
    "axis_ring_offset_mm": ("offset of the vertex rings from the axis", "mm"),
    # daily test
    "verdict": ("verdict", ""),
    "spacing_cv": ("spread of band spacing (coefficient of variation)", ""),
    "spacing_cv_null_median": ("the same for randomly spaced boundaries (median)", ""),
    "peak_sharpness": ("sharpness of the spacing peak", ""),
    "peak_sharpness_null_95": ("the same, reached by random spacing 5 % of the time", ""),
    "n_bands": ("bands tested", ""),
    "mean_spacing_mm": ("mean band spacing", "mm"),
    "note": ("note", ""),
    "method": ("method", ""),
    # depth profile
    "peak_frequency_per_mm": ("relief profile: strongest frequency", "cycles per mm"),
    "peak_period_mm": ("relief profile: its period", "mm"),
    "quality_factor": ("relief profile: sharpness of that peak (frequency over width)", ""),
    "peak_over_mean_spacing": ("relief profile: its period over the mean band spacing", "×"),
    # hiatus
    "evidence": ("evidence of missing days", ""),
    "counts_are_minima": ("counts are minima", ""),
}

SPECIMEN_LABELS = (("id", "specimen", ""), ("formation", "formation", ""), ("locality", "locality", ""),
                   ("horizon", "horizon", ""), ("n_vertices", "vertices kept", ""), ("n_faces", "faces kept", ""))

CLEANING_LABELS = {"nonfinite_vertices_removed": "vertices with missing coordinates removed",
                   "duplicate_vertices_merged": "duplicate vertices merged",
                   "degenerate_faces_removed": "degenerate faces removed",
                   "duplicate_faces_removed": "duplicate faces removed",
                   "unreferenced_vertices_removed": "unused vertices removed",
                   "pieces_removed": "loose pieces removed",
                   "faces_in_removed_pieces": "faces in the removed pieces",
                   "vertices_in_removed_pieces": "vertices in the removed pieces",
                   "faces_flipped": "faces turned to face outward"}

STAGE_LABELS = {"load": "reading the scan", "orient": "orienting and cleaning", "features": "surface curvature",
                "segment": "finding the boundaries", "review": "applying review edits",
                "measure": "measuring bands", "series": "building the series",
                "periodicity": "periodicity tests", "astronomy": "length of day and Moon",
                "report": "this report"}

_UNIT_SUFFIX = (("_per_mm", "per mm"), ("_mm", "mm"), ("_um", "µm"), ("_deg", "degrees"), ("_hours", "h"),
                ("_ma", "Ma"), ("_km", "km"), ("_seconds", "s"), ("_bands", "bands"))


def humanise(key: str) -> tuple[str, str]:
    """A label and unit for a key not in :data:`LABELS` (``max_period_bands`` -> ``max period``, ``bands``)."""
    if key in LABELS:
        return LABELS[key]
    k, unit = str(key), ""
    for suffix, u in _UNIT_SUFFIX:
        if k.lower().endswith(suffix):
            k, unit = k[: -len(suffix)], u
            break
    return k.replace("_", " ").replace(".", ": ").strip(), unit


def value_text(value: Any, unit: str = "") -> str:
    if value is None:
        return "not given"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (int,)) and not isinstance(value, bool):
        return f"{value}" + (f" {unit}" if unit else "")
    if isinstance(value, float):
        if value != value or value in (float("inf"), float("-inf")):
            return "—"
        text = f"{value:,.0f}" if abs(value) >= 1000 else (f"{value:.3g}" if abs(value) >= 1e-4 or value == 0
                                                          else f"{value:.2e}")
        return text + (f" {unit}" if unit and unit != "×" else ("×" if unit == "×" else ""))
    if isinstance(value, (list, tuple)):
        if len(value) > 6:
            return f"{len(value)} values (listed in result.json)"
        return ", ".join(value_text(v) for v in value) + (f" {unit}" if unit else "") if value else "none"
    return str(value)


def rows_of(block: Mapping | None, skip=()) -> list[tuple[str, str]]:
    """(label, value with unit) for the scalar entries of ``block`` (nested blocks become their own rows)."""
    rows = []
    for key, value in (block or {}).items():
        if key in skip or key == "flagged":
            continue
        if isinstance(value, Mapping):
            for k2, v2 in value.items():
                if isinstance(v2, Mapping):
                    continue
                label, unit = humanise(k2)
                rows.append((label, value_text(v2, unit)))
            continue
        if str(key).startswith("ci95") or str(key).endswith("_ci95"):
            continue
        label, unit = humanise(str(key))
        rows.append((label, value_text(value, unit)))
    return rows


PARAM_LABELS = {
    "features": "curvature", "segmenter": "boundary finding", "spectral": "periodicity",
    "scales_mm": ("scales", "mm"), "band_spacing_mm": ("band spacing found first", "mm"),
    "band_spacing_method": ("how that spacing was found", ""), "n_classes": ("surface classes", ""),
    "max_classes": ("most surface classes tried", ""), "subsample": ("vertices used to fit the classes", ""),
    "random_state": ("random seed", ""), "covariance_type": ("shape of each class (covariance)", ""),
    "bic_subsample": ("vertices used to choose the number of classes", ""),
    "use_luminance": ("surface brightness used", ""), "min_relief_to_noise": ("least relief over noise", ""),
    "n_bootstrap": ("bootstrap resamples", ""),
}
