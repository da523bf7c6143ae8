"""Read the spectra of a periodicity result into one plain layout for the figures and spectra.csv.

``PeriodicityResult.spectra`` holds, per series (thickness, sway, ...), the frequency grid in cycles
per band, the power, the red-noise background and its 95 % and 99 % levels, and an evolutive
(sliding-window) spectrum. This module accepts either one flat spectrum or a mapping of named ones,
and a few spellings of each key, so that the report does not break when a key is renamed.
"""
from __future__ import annotations

from typing import Any, Mapping

import numpy as np

_ALIASES = {
    "frequency": ("frequency", "frequency_cycles_per_band", "freq", "f"),
    "power": ("power", "psd", "spectrum"),
    "background": ("background", "red_noise", "red_noise_background", "ar1", "ar1_background"),
    "level95": ("level95", "level_95", "conf95", "red_noise_95", "significance_95", "p95", "level_95pct"),
    "level99": ("level99", "level_99", "conf99", "red_noise_99", "significance_99", "p99", "level_99pct"),
}
_EVOLUTIVE_KEYS = ("evolutive", "evolutive_spectrum", "sliding")


def _get(d: Mapping, name: str):
    for key in _ALIASES[name]:
        if key in d and d[key] is not None:
            return np.asarray(d[key], dtype=float)
    return None


def _one(d: Mapping) -> dict | None:
    freq, power = _get(d, "frequency"), _get(d, "power")
    if freq is None or power is None or freq.ndim != 1 or power.shape != freq.shape:
        return None
    out = {"frequency": freq, "power": power}
    for key in ("background", "level95", "level99"):
        arr = _get(d, key)
        out[key] = arr if arr is not None and arr.shape == freq.shape else None
    out["power_unit"] = str(d.get("power_unit", "normalised"))
    out["method"] = str(d.get("method", ""))
    out["series_unit"] = str(d.get("series_unit", d.get("unit", "")))
    return out


_UNIT_NAMES = {"mm2_band": "mm²·band", "deg2_band": "degrees²·band", "mm2": "mm²", "deg2": "degrees²"}


def _prefixed(spectra: Mapping) -> dict[str, dict]:
    """The layout of ``bandgeo.spectral``: ``frequency_cycles_per_band`` plus, per series ``NAME``,
    ``NAME_periodogram_UNIT``, ``NAME_ar1_background_UNIT``, ``NAME_level95_UNIT``, ``NAME_level99_UNIT``
    (family-wise levels) and optionally ``NAME_multitaper_UNIT``."""
    import re

    f = spectra.get("frequency_cycles_per_band")
    if f is None:
        return {}
    f = np.asarray(f, dtype=float)
    out = {}
    for key in spectra:
        m = re.fullmatch(r"(?P<name>[a-z0-9]+)_periodogram_(?P<unit>\w+)", str(key))
        if not m:
            continue
        name, unit = m.group("name"), m.group("unit")

        def arr(kind):
            v = spectra.get(f"{name}_{kind}_{unit}")
            v = None if v is None else np.asarray(v, dtype=float)
            return v if v is not None and v.shape == f.shape else None

        power = arr("periodogram")
        if power is None:
            continue
        out[name] = {"frequency": f, "power": power, "background": arr("ar1_background"),
                     "level95": arr("level95"), "level99": arr("level99"), "multitaper": arr("multitaper"),
                     "power_unit": _UNIT_NAMES.get(unit, unit.replace("_", " ")),
                     "method": "periodogram; AR(1) background; family-wise levels",
                     "series_unit": ""}
    return out


def normalise_spectra(spectra: Any) -> dict[str, dict]:
    """Return ``{series name: {frequency, power, background, level95, level99, power_unit, method}}``.

    Arrays are (k,) float; ``frequency`` is in cycles per band. Missing levels are ``None``.
    """
    if not isinstance(spectra, Mapping):
        return {}
    prefixed = _prefixed(spectra)
    if prefixed:
        return prefixed
    flat = _one(spectra)
    if flat is not None:
        return {"thickness": flat}
    out = {}
    for name, value in spectra.items():
        if name in _EVOLUTIVE_KEYS or not isinstance(value, Mapping):
            continue
        spec = _one(value)
        if spec is not None:
            out[str(name)] = spec
    return out


def normalise_evolutive(spectra: Any) -> list[dict]:
    """Return the evolutive spectra as ``[{name, centre (w,), frequency (k,), power (w, k)}]``.

    ``centre`` is the band number at the middle of each window.
    """
    if not isinstance(spectra, Mapping):
        return []
    found = []

    def take(name, d):
        if not isinstance(d, Mapping):
            return
        freq = _get(d, "frequency")
        power = d.get("power")
        centre = None
        for key in ("centre", "center", "centre_band", "center_band", "band", "window_centre",
                    "window_center", "position"):
            if d.get(key) is not None:
                centre = np.asarray(d[key], dtype=float)
                break
        if freq is None or power is None or centre is None:
            return
        power = np.asarray(power, dtype=float)
        if power.shape == (len(freq), len(centre)):
            power = power.T
        if power.shape != (len(centre), len(freq)):
            return
        found.append({"name": name, "centre": centre, "frequency": freq, "power": power,
                      "label": str(d.get("label", "power, normalised"))})

    if spectra.get("evolutive_ratio") is not None:           # bandgeo.spectral's flat layout
        take("thickness", {"centre": spectra.get("evolutive_centre_band"),
                           "frequency": spectra.get("evolutive_frequency_cycles_per_band"),
                           "power": spectra["evolutive_ratio"], "label": "power / red-noise background"})
    for key in _EVOLUTIVE_KEYS:
        if key in spectra:
            take("thickness", spectra[key])
    for name, value in spectra.items():
        if isinstance(value, Mapping):
            for key in _EVOLUTIVE_KEYS:
                if key in value:
                    take(str(name), value[key])
    return found
