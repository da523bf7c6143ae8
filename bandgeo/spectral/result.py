"""The periodicity result: JSON-safe blocks for result.json and the arrays behind the figures."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..atomic import to_jsonable, write_text


@dataclass
class PeriodicityResult:
    """Outcome of :func:`bandgeo.spectral.test_periodicity`.

    Attributes
    ----------
    daily_test, days_per_year, tidal, hiatus : dict
        The blocks of ``result.json`` (see :meth:`to_dict`).
    warnings : list of str
    parameters : dict
        Every parameter of the run (searched band, n_sim, seed, methods).
    spectra : dict of str -> ndarray
        ``frequency_cycles_per_band`` and, per series, periodogram (astropy Lomb-Scargle and the FFT
        engine), AR(1) background, family-wise 95%/99% levels, pointwise 95% level, multitaper spectrum and
        harmonic F-test; ``evolutive_*`` (2-D grid: windows x frequencies); ``cycle_*`` (phase).
    """

    daily_test: dict
    days_per_year: dict
    tidal: dict
    hiatus: dict
    warnings: list = field(default_factory=list)
    parameters: dict = field(default_factory=dict)
    spectra: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        """JSON-safe blocks: ``daily_test``, ``days_per_year``, ``tidal``, ``hiatus``, ``warnings``,
        ``parameters`` (NaN written as null)."""
        return to_jsonable({"daily_test": self.daily_test, "days_per_year": self.days_per_year,
                            "tidal": self.tidal, "hiatus": self.hiatus, "warnings": list(self.warnings),
                            "parameters": self.parameters})

    def to_spectra_table(self) -> dict:
        """Columns of ``spectra.csv``: every 1-D array on the frequency grid, units in the names."""
        f = self.spectra["frequency_cycles_per_band"]
        return {k: np.asarray(v) for k, v in self.spectra.items()
                if np.ndim(v) == 1 and np.shape(v)[0] == f.shape[0]}

    def write_spectra_csv(self, path) -> None:
        """Write :meth:`to_spectra_table` as CSV, atomically."""
        table = self.to_spectra_table()
        names = list(table)
        data = np.column_stack([table[k].astype(float) for k in names])
        lines = [",".join(names)]
        lines += [",".join("" if not np.isfinite(v) else f"{v:.9g}" for v in row) for row in data]
        write_text(path, "\n".join(lines) + "\n")
