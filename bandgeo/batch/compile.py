"""Compile many analysed specimens: a table, figures against age, and flags for horizon outliers."""
from __future__ import annotations

import csv
import io
import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional

import numpy as np

from ..atomic import write_text
from ..errors import InputError
from . import _result

#: z of a two-sided 95% normal interval (ci95 half-width = Z95 * sigma).
Z95 = 1.959963984540054

#: Significance level of the horizon-outlier test.
OUTLIER_ALPHA = 0.01

OUTLIER_RULE = (
    "Within each horizon, every significant specimen is compared with the others: x is its days per "
    "year, s its standard error (the half-width of its 95% interval on the side facing m, divided by "
    "1.96), m the inverse-variance weighted mean of the other specimens still in the horizon (weights "
    "1/s_j^2) and se = 1/sqrt(sum of weights) the standard error of m; z = (x - m) / sqrt(s^2 + se^2) "
    "with a two-sided normal p. The specimen with the largest |z| is flagged as disagreeing with its "
    f"horizon when p < {OUTLIER_ALPHA:g} and m lies outside its 95% interval; it is then left out of "
    "the others' mean and the test is repeated on the rest (so that one outlier cannot make its "
    "neighbours look discordant), while at least three specimens remain. Pairs are not flagged "
    "individually; every horizon with two or more significant specimens gets Cochran's Q homogeneity "
    "test (chi-square with n-1 degrees of freedom). Specimens with no significant annual cycle take no "
    "part and are listed as 'no annual cycle'.")

COLUMNS = ["specimen_id", "horizon", "locality", "age_ma", "age_err_ma", "status", "significant",
           "days_per_year", "days_per_year_ci95_low", "days_per_year_ci95_high", "p_value", "method",
           "length_of_day_h", "length_of_day_ci95_low_h", "length_of_day_ci95_high_h",
           "horizon_outlier_z", "horizon_outlier_p", "flags", "folder"]


@dataclass
class Compilation:
    """All specimens of a batch folder side by side.

    Attributes
    ----------
    rows : list of dict
        One per specimen, keys :data:`COLUMNS` (``days_per_year`` None where no annual cycle).
    horizons : dict
        Per horizon: ``n``, ``n_significant``, ``weighted_mean_days_per_year``, its ``se``,
        ``cochran_q``, ``dof``, ``p_value``.
    files : dict
        Paths written: ``csv``, ``html``, ``svg``, ``pdf``.
    references_source : str
        Where the published points came from.
    """

    out_dir: Path
    rows: list = field(default_factory=list)
    horizons: dict = field(default_factory=dict)
    files: dict = field(default_factory=dict)
    references_source: str = ""
    rule: str = OUTLIER_RULE

    @property
    def flagged(self) -> list[str]:
        """Ids of the specimens flagged as disagreeing with their horizon."""
        return [r["specimen_id"] for r in self.rows if "horizon_outlier" in (r["flags"] or "")]

    def to_csv(self) -> str:
        buf = io.StringIO()
        writer = csv.writer(buf, lineterminator="\n")
        writer.writerow(COLUMNS)
        for row in self.rows:
            writer.writerow(["" if row.get(c) is None else
                             (f"{row[c]:.6g}" if isinstance(row[c], float) else row[c]) for c in COLUMNS])
        return buf.getvalue()


def weighted_mean(x: np.ndarray, sigma: np.ndarray) -> tuple[float, float]:
    """Inverse-variance weighted mean and its standard error (common practice; e.g. Bevington &
    Robinson, *Data Reduction and Error Analysis*, ch. 4 - from memory)."""
    w = 1.0 / np.asarray(sigma, float) ** 2
    return float(np.sum(w * x) / np.sum(w)), float(1.0 / math.sqrt(np.sum(w)))


def horizon_tests(values: list[tuple[float, float, float]]) -> tuple[list[dict], dict]:
    """Leave-one-out outlier tests and Cochran's Q for one horizon.

    Parameters
    ----------
    values : list of (estimate, ci95_low, ci95_high)
        The significant specimens of one horizon, days per year.

    Returns
    -------
    per_specimen : list of dict
        ``z``, ``p``, ``others_mean``, ``outlier`` (bool) for each input, in order (None where n < 2).
    horizon : dict
        ``weighted_mean_days_per_year``, ``se``, ``cochran_q``, ``dof``, ``p_value``.
    """
    from scipy import stats

    x = np.array([v[0] for v in values], float)
    low = np.array([v[1] for v in values], float)
    high = np.array([v[2] for v in values], float)
    sym = np.maximum((high - low) / (2.0 * Z95), 1e-12)
    n = len(x)
    summary: dict = {"n_significant": n}
    if n == 0:
        return [], summary
    mean, se = weighted_mean(x, sym)
    summary.update(weighted_mean_days_per_year=mean, se=se)
    out: list = [{"z": None, "p": None, "others_mean": None, "outlier": False} for _ in range(n)]
    if n < 2:
        return out, summary
    q = float(np.sum((x - mean) ** 2 / sym ** 2))
    summary.update(cochran_q=q, dof=n - 1, p_value=float(stats.chi2.sf(q, n - 1)))
    active = np.ones(n, bool)
    while True:
        tests = {}
        for i in np.flatnonzero(active):
            others = active.copy()
            others[i] = False
            m, se_m = weighted_mean(x[others], sym[others])
            side = (x[i] - low[i]) if m < x[i] else (high[i] - x[i])  # the half facing the others' mean
            z = (x[i] - m) / math.sqrt(max(side / Z95, 1e-12) ** 2 + se_m ** 2)
            tests[i] = {"z": float(z), "p": float(2.0 * stats.norm.sf(abs(z))), "others_mean": m,
                        "outlier": False, "outside": not (low[i] <= m <= high[i])}
        for i, t in tests.items():
            out[i] = {k: v for k, v in t.items() if k != "outside"}
        if active.sum() < 3:
            break
        worst = max(tests, key=lambda i: abs(tests[i]["z"]))
        if not (tests[worst]["p"] < OUTLIER_ALPHA and tests[worst]["outside"]):
            break
        out[worst]["outlier"] = True
        active[worst] = False
    return out, summary


def _specimen_rows(out_dir: Path) -> list[dict]:
    summary = _result.read_json(out_dir / "batch_summary.json") or {}
    failed = {s["specimen_id"]: s for s in summary.get("specimens", []) if s.get("status") == "failed"}
    rows = []
    for folder in sorted(p for p in out_dir.iterdir() if p.is_dir()):
        result = _result.read_json(folder / _result.RESULT_FILE)
        if result is None:
            continue
        marker = _result.read_json(folder / _result.JOB_FILE) or {}
        sheet = dict(_result.sheet_block(result))
        for key, value in (marker.get("sheet") or {}).items():  # manifest fields take precedence
            if value is not None and key in ("age_ma", "age_err_ma", "horizon", "locality"):
                sheet[key] = value
        d = _result.digest(result)
        specimen_id = marker.get("specimen_id") or folder.name
        failed.pop(specimen_id, None)
        flags = [] if d["significant"] else ["no annual cycle"]
        rows.append({
            "specimen_id": specimen_id, "horizon": sheet.get("horizon"), "locality": sheet.get("locality"),
            "age_ma": sheet.get("age_ma"), "age_err_ma": sheet.get("age_err_ma"), "status": "analysed",
            "significant": d["significant"], "days_per_year": d["days_per_year"],
            "days_per_year_ci95_low": d["dpy_low"], "days_per_year_ci95_high": d["dpy_high"],
            "p_value": d["p_value"], "method": d["method"], "length_of_day_h": d["length_of_day_h"],
            "length_of_day_ci95_low_h": d["lod_low"], "length_of_day_ci95_high_h": d["lod_high"],
            "horizon_outlier_z": None, "horizon_outlier_p": None, "flags": flags, "folder": folder.name})
    for specimen_id, info in failed.items():
        sheet = info.get("sheet") or {}
        rows.append({c: None for c in COLUMNS} | {
            key: sheet.get(key) for key in ("horizon", "locality", "age_ma", "age_err_ma")} | {
            "specimen_id": specimen_id, "status": "failed", "significant": False,
            "flags": [f"failed: {info.get('error')}"], "folder": Path(info.get("folder") or "").name})
    return rows


def _flag_outliers(rows: list[dict]) -> dict:
    horizons: dict = {}
    groups: dict = {}
    for row in rows:
        if row["status"] != "analysed":
            continue
        key = row["horizon"] or "(no horizon)"
        horizons.setdefault(key, {"n": 0})["n"] += 1
        usable = (row["days_per_year"] is not None and row["days_per_year_ci95_low"] is not None
                  and row["days_per_year_ci95_high"] is not None)
        if usable and row["horizon"]:
            groups.setdefault(key, []).append(row)
    for key, members in groups.items():
        tests, summary = horizon_tests([(r["days_per_year"], r["days_per_year_ci95_low"],
                                         r["days_per_year_ci95_high"]) for r in members])
        horizons[key].update(summary)
        for row, test in zip(members, tests):
            row["horizon_outlier_z"], row["horizon_outlier_p"] = test["z"], test["p"]
            if test["outlier"]:
                row["flags"].append(f"horizon_outlier: disagrees with the rest of {key} "
                                    f"(others' mean {test['others_mean']:.1f} days/yr, z = {test['z']:.2f}, "
                                    f"p = {test['p']:.2g})")
    return horizons


def compile_results(out_dir, *, formats=("svg", "pdf")) -> Compilation:
    """Read every ``out_dir/<specimen>/result.json`` and write the compilation.

    Writes ``compilation.csv`` (units in the headers), ``compilation.html`` (self-contained, figures
    embedded) and ``compilation_vs_age.svg``/``.pdf`` (days per year and length of day against age,
    with x and y error bars, beside cited published points). Specimens with no significant annual
    cycle appear as "no annual cycle" and are never plotted as an estimate. The outlier rule is
    :data:`OUTLIER_RULE`.

    Raises
    ------
    InputError
        ``out_dir`` is missing or holds no analysed specimen.
    """
    out_dir = Path(os.path.expanduser(os.fspath(out_dir)))
    if not out_dir.is_dir():
        raise InputError(f"{os.fspath(out_dir)!r} is not a folder; give the --out folder of a batch")
    rows = _specimen_rows(out_dir)
    if not any(r["status"] == "analysed" for r in rows):
        raise InputError(f"{os.fspath(out_dir)!r} holds no analysed specimen (no <specimen>/result.json); "
                         "run 'bandgeo batch' first")
    comp = Compilation(out_dir=out_dir, rows=rows)
    comp.horizons = _flag_outliers(rows)
    for row in rows:
        row["flags"] = "; ".join(row["flags"])
    from ._compile_fig import figure_vs_age
    from ._compile_html import write_html
    from .references import reference_points

    refs, comp.references_source = reference_points()
    comp.files["csv"] = write_text(out_dir / "compilation.csv", comp.to_csv())
    svg_text = None
    for fmt in formats:
        path, text = figure_vs_age(rows, refs, out_dir / f"compilation_vs_age.{fmt}")
        comp.files[fmt] = path
        svg_text = text if fmt == "svg" else svg_text
    if svg_text is None:
        _, svg_text = figure_vs_age(rows, refs, None)
    comp.files["html"] = write_html(comp, refs, svg_text, out_dir / "compilation.html")
    return comp
