"""How the report prints numbers: rounded to their uncertainty, p-values with their Monte Carlo floor,
ranges with their unit. Pure functions of plain values; nothing here computes an estimate.
"""
from __future__ import annotations

import math
from typing import Any, Sequence


def _finite(x: Any) -> bool:
    try:
        return x is not None and not isinstance(x, bool) and math.isfinite(float(x))
    except (TypeError, ValueError):
        return False


def decimals_for_uncertainty(sigma: float) -> int:
    """Decimal places that keep one or two significant digits of an uncertainty.

    The rule of the Particle Data Group (Review of Particle Physics, introduction, "rounding"; from
    memory): take the three leading digits of the uncertainty; 100-354 keep two significant digits,
    355-949 keep one, 950-999 round up to 1000 and keep two. Returned as the number of decimals
    (negative for tens, hundreds ...).
    """
    sigma = abs(float(sigma))
    if not math.isfinite(sigma) or sigma == 0:
        return 3
    e = math.floor(math.log10(sigma))
    lead = int(round(sigma / 10 ** (e - 2)))          # three leading digits, 100..1000
    if lead >= 1000:
        e, lead = e + 1, lead // 10
    if lead < 355:
        return -(e - 1)
    if lead < 950:
        return -e
    return -(e + 1) + 1                                # 950-999 -> 1000 with two digits


def _round(x: float, decimals: int) -> str:
    if decimals > 0:
        return f"{x:.{decimals}f}"
    value = round(x, decimals)
    return f"{value:,.0f}" if abs(value) >= 10000 else f"{value:.0f}"


def fmt_sig(x: Any, digits: int = 3) -> str:
    """A number with ``digits`` significant figures (no exponent below a million); a dash if missing."""
    if isinstance(x, bool):
        return "yes" if x else "no"
    if not _finite(x):
        return "—"
    x = float(x)
    if x == 0:
        return "0"
    if abs(x) >= 1e6 or abs(x) < 1e-4:
        return f"{x:.{digits - 1}e}"
    e = math.floor(math.log10(abs(x)))
    decimals = max(digits - 1 - e, 0)
    return f"{round(x, decimals):.{decimals}f}" if decimals else _round(x, digits - 1 - e)


def fmt_estimate(estimate: Any, ci95: Any = None, unit: str = "", sep: str = "–") -> tuple[str, str]:
    """``(value, interval)`` strings rounded to the uncertainty, each with its unit.

    The uncertainty is half the width of the 95 % interval (the interval need not be symmetric). Without
    an interval the value keeps three significant figures.
    """
    suffix = "" if not unit else (unit if unit == "°" else f" {unit}")
    if not _finite(estimate):
        return "no estimate", "—"
    est = float(estimate)
    if isinstance(ci95, (list, tuple)) and len(ci95) == 2 and all(_finite(c) for c in ci95):
        lo, hi = float(ci95[0]), float(ci95[1])
        d = decimals_for_uncertainty(max(abs(hi - lo) / 2.0, 1e-300))
        return _round(est, d) + suffix, f"{_round(lo, d)}{sep}{_round(hi, d)}{suffix}"
    return fmt_sig(est) + suffix, "—"


def fmt_range(pair: Any, unit: str = "", digits: int = 3) -> str:
    """``[low, high]`` as ``low to high unit`` with sensible figures; a dash when missing."""
    if not isinstance(pair, (list, tuple)) or len(pair) != 2 or not all(_finite(c) for c in pair):
        return "—"
    def one(v: float) -> str:
        return f"{v:.0f}" if abs(v) >= 10 ** (digits - 1) else f"{v:.{digits}g}"

    lo, hi = (float(c) for c in pair)
    return f"{one(lo)} to {one(hi)}" + (f" {unit}" if unit else "")


def _ceil_1sig(x: float) -> str:
    e = math.floor(math.log10(x))
    m = math.ceil(x / 10 ** e - 1e-9)
    if m >= 10:
        m, e = 1, e + 1
    value = m * 10 ** e
    return f"{value:.{max(-e, 0)}f}"


def fmt_p(p: Any, n_sim: Any = None, multiplicity: int = 1) -> str:
    """A p-value as a reader wants it.

    At the Monte Carlo floor (``multiplicity / (n_sim + 1)``, the smallest value ``n_sim`` simulations
    can give after a Bonferroni factor) it prints as an upper bound, ``< 0.001 (1000 simulations)``;
    otherwise with two significant figures.
    """
    if not _finite(p):
        return "—"
    p = float(p)
    if _finite(n_sim) and int(n_sim) > 0:
        n = int(n_sim)
        m = max(int(multiplicity or 1), 1)
        floor = m / (n + 1.0)
        if p <= floor * (1 + 1e-9):
            extra = f"; Bonferroni over {m} series" if m > 1 else ""
            return f"< {_ceil_1sig(floor)} ({n} simulations{extra})"
    if p >= 0.995:
        return "1.0"
    if p < 1e-4:
        return f"{p:.1e}"
    return fmt_sig(p, 2)


def weights_from_intervals(names: Sequence[str], blocks: dict) -> dict[str, float]:
    """Inverse-variance weights of the routes, from each route's spectral 95 % interval.

    ``bandgeo.spectral`` combines the routes with weights ``1 / sd_i**2`` normalised to sum to one
    (the covariance enters only the combined interval); each route's ``sd`` is the half-width of its
    ``ci95_spectral`` over 1.96. Routes without an interval are left out. Returns ``{name: weight}``.
    """
    var = {}
    for name in names:
        block = blocks.get(name) or {}
        ci = block.get("ci95_spectral") or block.get("ci95")
        if isinstance(ci, (list, tuple)) and len(ci) == 2 and all(_finite(c) for c in ci):
            sd = abs(float(ci[1]) - float(ci[0])) / (2 * 1.959964)
            if sd > 0:
                var[name] = sd * sd
    if not var:
        return {}
    inv = {k: 1.0 / v for k, v in var.items()}
    total = sum(inv.values())
    return {k: v / total for k, v in inv.items()}
