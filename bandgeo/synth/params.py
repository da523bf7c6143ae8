"""Parameters of the forward model of a growing laminated column, validated on construction."""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Optional

from .. import constants
from ..errors import ParameterError

#: Allowed values of the string parameters.
CHOICES = {
    "base": ("cut", "open"),
    "top": ("domed", "flat", "open"),
    "pose": ("identity", "random"),
    "units": tuple(constants.UNIT_TO_MM),
    "sampling": ("isotropic", "anisotropic"),
}

#: Upper limit on the number of nominal laminae (keeps a typo from exhausting memory).
MAX_LAMINAE = 5_000_000


@dataclass
class SynthParams:
    """Every parameter of a synthetic specimen; bad values raise :class:`ParameterError` at once.

    Lengths are millimetres, angles degrees (phases radians), rates per year or per day as named.
    The thickness model is documented in :func:`bandgeo.synth.laminae.simulate_laminae`, the geometry
    in :mod:`bandgeo.synth.geometry`.

    Attributes
    ----------
    days_per_year : float, default=400
        Solar days per year recorded (the quantity the pipeline estimates).
    years : float, default=3
        Length of the record in years.
    laminae_per_day : float, default=1
        Growth rate in laminae per day (1 = one lamina a day, 0.5 = one every two days).
    mean_thickness_mm : float, default=0.25
        Expected lamina thickness, mm.
    annual_amplitude : float, default=0.3
        Fractional annual modulation of thickness, 0 <= A < 1 (0 is the null case).
    annual_phase_rad : float, default=0
        Phase of the annual thickness cycle at day 0, rad.
    noise_cv : float, default=0.15
        Coefficient of variation of the multiplicative log-normal AR(1) noise.
    ar1_phi : float, default=0.5
        Lag-1 autocorrelation of the log-noise, -1 < phi < 1.
    days_per_synodic_month : float or None, default=None
        Days per synodic month for the tidal modulation (None = no tides).
    tidal_amplitude : float, default=0
        Fractional tidal modulation, 0 <= a < 1 (fortnightly spring-neap plus a monthly term).
    hiatus_rate_per_year, hiatus_mean_days : float, default=0, 3
        Poisson rate of missing-day episodes per year and their mean length in days (>= 1).
    sway_amplitude_deg, sway_azimuth_deg, sway_phase_rad : float, default=3, 30, 0
        Heliotropic annual sway of the growth direction: amplitude, azimuth of the sway plane
        (clockwise from north) and phase at day 0.
    mean_tilt_deg, mean_tilt_azimuth_deg : float, default=2, 120
        Mean lean of the growth direction from the paleo-vertical, and its azimuth.
    radius_mm, radius_variation : float, default=8, 0.08
        Column radius and its slow fractional variation along the column.
    dome_height_mm : float, default=1.5
        Rise of each lamina from the side wall to the axis (convex dome).
    groove_depth_mm, groove_width_fraction : float, default=0.04, 0.35
        Weathering groove at each boundary on the side wall: depth, and width as a fraction of the
        local lamina thickness.
    color_banding : bool, default=True
        Colour each vertex by its position within the lamina (dark boundaries).
    base : {'cut', 'open'}, default='cut'
        Closed flat saw-cut base, or an open tube end.
    top : {'domed', 'flat', 'open'}, default='domed'
        Cap of the column: the last lamina's dome, a flat cut, or open.
    scanner_noise_mm : float, default=0.004
        Standard deviation of Gaussian vertex jitter, mm.
    holes : int, default=0
        Number of small holes punched in the side wall.
    pose : {'identity', 'random'}, default='random'
        File frame equal to the specimen frame, or a random rotation and translation.
    units : {'mm', 'cm', 'm', 'in', 'um'}, default='mm'
        Units of the written file.
    sampling : {'isotropic', 'anisotropic'}, default='isotropic'
        Near-equilateral triangles, or many rings of few vertices.
    rings_per_lamina : float, default=4
        Vertex rings per mean lamina thickness along the axis.
    ring_vertices : int or None, default=None
        Vertices per ring; None chooses it from the sampling (isotropic: edge length equal to the
        ring spacing; anisotropic: 24).
    seed : int
        Random seed; the same parameters and seed give the same bytes.
    """

    days_per_year: float = 400.0
    years: float = 3.0
    laminae_per_day: float = 1.0
    mean_thickness_mm: float = 0.25
    annual_amplitude: float = 0.3
    annual_phase_rad: float = 0.0
    noise_cv: float = 0.15
    ar1_phi: float = 0.5
    days_per_synodic_month: Optional[float] = None
    tidal_amplitude: float = 0.0
    hiatus_rate_per_year: float = 0.0
    hiatus_mean_days: float = 3.0
    sway_amplitude_deg: float = 3.0
    sway_azimuth_deg: float = 30.0
    mean_tilt_deg: float = 2.0
    mean_tilt_azimuth_deg: float = 120.0
    sway_phase_rad: float = 0.0
    radius_mm: float = 8.0
    radius_variation: float = 0.08
    dome_height_mm: float = 1.5
    groove_depth_mm: float = 0.04
    groove_width_fraction: float = 0.35
    color_banding: bool = True
    base: str = "cut"
    top: str = "domed"
    scanner_noise_mm: float = 0.004
    holes: int = 0
    pose: str = "random"
    units: str = "mm"
    sampling: str = "isotropic"
    rings_per_lamina: float = 4.0
    ring_vertices: Optional[int] = None
    seed: int = constants.DEFAULT_SEED

    def __post_init__(self):
        self.validate()

    # ------------------------------------------------------------------ validation
    def validate(self) -> "SynthParams":
        """Check every value; raise :class:`ParameterError` naming the first bad one. Returns self."""
        for name in ("base", "top", "pose", "units", "sampling"):
            value = getattr(self, name)
            if not isinstance(value, str) or value.lower() not in CHOICES[name]:
                raise ParameterError(f"{name} must be one of {', '.join(CHOICES[name])} but got {value!r}")
            setattr(self, name, value.lower())
        self.color_banding = _as_bool("color_banding", self.color_banding)
        self.holes = _as_int("holes", self.holes, 0, 1000)
        self.seed = _as_int("seed", self.seed, 0, 2**63 - 1)
        if self.ring_vertices is not None:
            self.ring_vertices = _as_int("ring_vertices", self.ring_vertices, 3, 1_000_000)
        _range(self, "days_per_year", 10.0, 5000.0)
        _range(self, "years", 0.0, 1000.0, low_open=True)
        _range(self, "laminae_per_day", 0.0, 50.0, low_open=True)
        _range(self, "mean_thickness_mm", 0.0, 1e4, low_open=True)
        _range(self, "annual_amplitude", 0.0, 1.0, high_open=True)
        _range(self, "annual_phase_rad", -1e6, 1e6)
        _range(self, "noise_cv", 0.0, 5.0)
        _range(self, "ar1_phi", -1.0, 1.0, low_open=True, high_open=True)
        if self.days_per_synodic_month is not None:
            _range(self, "days_per_synodic_month", 2.0, 1e5, low_open=True)
        _range(self, "tidal_amplitude", 0.0, 1.0, high_open=True)
        if self.tidal_amplitude > 0 and self.days_per_synodic_month is None:
            raise ParameterError("tidal_amplitude > 0 needs days_per_synodic_month; give both or neither")
        _range(self, "hiatus_rate_per_year", 0.0, 1e4)
        _range(self, "hiatus_mean_days", 1.0, 1e5)
        _range(self, "sway_amplitude_deg", 0.0, 45.0)
        _range(self, "sway_azimuth_deg", -360.0, 360.0)
        _range(self, "mean_tilt_deg", 0.0, 60.0)
        _range(self, "mean_tilt_azimuth_deg", -360.0, 360.0)
        _range(self, "sway_phase_rad", -1e6, 1e6)
        if self.sway_amplitude_deg + self.mean_tilt_deg > 75.0:
            raise ParameterError(f"sway_amplitude_deg + mean_tilt_deg must be at most 75 but got "
                                 f"{self.sway_amplitude_deg + self.mean_tilt_deg:g}; lower the tilt or sway")
        _range(self, "radius_mm", 0.0, 1e5, low_open=True)
        _range(self, "radius_variation", 0.0, 0.5, high_open=True)
        _range(self, "dome_height_mm", 0.0, 4.0 * self.radius_mm)
        _range(self, "groove_depth_mm", 0.0, 0.25 * self.radius_mm)
        _range(self, "groove_width_fraction", 0.0, 1.0, low_open=True)
        _range(self, "scanner_noise_mm", 0.0, 0.1 * self.radius_mm)
        _range(self, "rings_per_lamina", 0.5, 100.0)
        if self.n_nominal < 2:
            raise ParameterError(f"the record holds {self.n_nominal} laminae; expected at least 2 "
                                 f"(raise years, days_per_year or laminae_per_day)")
        if self.n_nominal > MAX_LAMINAE:
            raise ParameterError(f"the record would hold {self.n_nominal} laminae, more than {MAX_LAMINAE}; "
                                 f"lower years, days_per_year or laminae_per_day")
        return self

    # ------------------------------------------------------------------ derived values
    @property
    def n_days(self) -> int:
        """Number of days spanned by the record."""
        return int(math.ceil(self.days_per_year * self.years - 1e-9))

    @property
    def n_nominal(self) -> int:
        """Number of laminae the column would hold with no missing days."""
        return int(round(self.days_per_year * self.years * self.laminae_per_day))

    @property
    def laminae_per_year_nominal(self) -> float:
        """Laminae a year laid down before any loss: days_per_year * laminae_per_day."""
        return float(self.days_per_year * self.laminae_per_day)

    @property
    def estimated_faces(self) -> int:
        """Approximate number of mesh faces (side wall; caps add a few per cent)."""
        n_rings = self.n_nominal * self.rings_per_lamina
        if self.ring_vertices is not None:
            around = self.ring_vertices
        elif self.sampling == "anisotropic":
            around = 24
        else:
            edge = self.mean_thickness_mm / self.rings_per_lamina * 2.0 / math.sqrt(3.0)
            around = max(8.0, 2.0 * math.pi * self.radius_mm / edge)
        return int(2 * n_rings * around)

    def to_dict(self) -> dict:
        """All parameters as a plain dict (JSON-ready)."""
        return dataclasses.asdict(self)

    @classmethod
    def from_dict(cls, data: dict) -> "SynthParams":
        """Build from a dict, refusing unknown keys with a one-line error."""
        names = {f.name for f in dataclasses.fields(cls)}
        unknown = sorted(set(data) - names)
        if unknown:
            raise ParameterError(f"unknown synth parameter(s) {', '.join(unknown)}; "
                                 f"expected names from {', '.join(sorted(names))}")
        return cls(**data)

    def replace(self, **changes) -> "SynthParams":
        """A validated copy with some fields changed."""
        return dataclasses.replace(self, **changes)


def _range(obj, name, low, high, low_open=False, high_open=False):
    value = getattr(obj, name)
    try:
        value = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{name} must be a number but got {value!r}") from None
    bad = (not math.isfinite(value) or value < low or value > high
           or (low_open and value == low) or (high_open and value == high))
    if bad:
        lo = "(" if low_open else "["
        hi = ")" if high_open else "]"
        raise ParameterError(f"{name} must be in {lo}{low:g}, {high:g}{hi} but got {value!r}")
    setattr(obj, name, value)


def _as_int(name, value, low, high):
    if isinstance(value, bool) or not (isinstance(value, int) or (hasattr(value, "__index__"))):
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        else:
            raise ParameterError(f"{name} must be a whole number but got {value!r}")
    value = int(value)
    if value < low or value > high:
        raise ParameterError(f"{name} must be between {low} and {high} but got {value}")
    return value


def _as_bool(name, value):
    if isinstance(value, bool):
        return value
    if hasattr(value, "dtype") and value.dtype == bool:
        return bool(value)
    if isinstance(value, str) and value.lower() in ("true", "false", "yes", "no", "1", "0"):
        return value.lower() in ("true", "yes", "1")
    if isinstance(value, int) and value in (0, 1):
        return bool(value)
    raise ParameterError(f"{name} must be true or false but got {value!r}")
