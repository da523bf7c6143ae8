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
    "mesh_kind": ("photogrammetric", "ct", "rings"),
}

#: Parameters that only the ring-aligned mesh uses; giving any of them without ``mesh_kind`` selects it
#: (so that code written before the other mesh kinds existed keeps its meshes).
RING_ONLY = ("sampling", "rings_per_lamina", "ring_vertices")

#: Defaults of the earlier forward model, kept for code that asks for the ring mesh the old way (a
#: ring-only option and no mesh_kind): sway, meander, scanner noise and groove depth.
LEGACY_DEFAULTS = {"sway_amplitude_deg": 3.0, "meander_amplitude_deg": 0.0, "scanner_noise_mm": 0.004,
                   "groove_depth_mm": 0.04}
#: Realistic defaults of the sway and the meander (degrees).
REALISTIC_SWAY_DEG = 5.0
REALISTIC_MEANDER_DEG = 1.0

#: Scanner noise and groove depth, as fractions of the mean lamina thickness, when not given.
DEFAULT_NOISE_FRACTION = 0.10
DEFAULT_GROOVE_FRACTION = 0.25
#: Edge length (photogrammetric) and voxel size (ct) as fractions of the mean lamina thickness.
DEFAULT_EDGE_FRACTION = 1.0 / 3.0
DEFAULT_VOXEL_FRACTION = 1.0 / 3.0

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
    sway_amplitude_deg, sway_azimuth_deg, sway_phase_rad : float, default=None (5), 30, 0
        Heliotropic annual sway of the growth direction: amplitude, azimuth of the sway plane
        (clockwise from north) and phase at day 0.
    meander_amplitude_deg : float or None, default=None (1.0)
        Growth meander: standard deviation, degrees, of each horizontal component (east, north) of a
        red-noise wander of the growth direction added to the sway and the mean lean. Each component
        is a stationary Gaussian AR(1) series in the (nominal) lamina index.
    meander_correlation_laminae : float, default=100
        Correlation length of the meander in laminae: lag-1 correlation exp(-1 / length) (the
        Ornstein-Uhlenbeck process sampled once a lamina). The direction changes from one lamina to the
        next by about amplitude x sqrt(2 / length); times the radius, that must stay well below the
        thinnest lamina or the laminae would pinch out (``simulate`` refuses a column whose laminae
        would fold and reports ``max_curvature_times_radius`` in the truth file).
    mean_tilt_deg, mean_tilt_azimuth_deg : float, default=2, 120
        Mean lean of the growth direction from the paleo-vertical, and its azimuth.
    radius_mm, radius_variation : float, default=8, 0.08
        Column radius and its slow fractional variation along the column (three long sinusoids).
    radius_taper : float, default=0
        Fractional change of the radius from the base to the top (-0.3: the column narrows by 30 %,
        +0.3: it widens), linear in height, on top of ``radius_variation``.
    dome_height_mm : float, default=1.5
        Rise of each lamina from the side wall to the axis (convex dome).
    groove_depth_mm, groove_width_fraction : float or None, default=None, 0.35
        Weathering groove at each boundary on the side wall: depth (None: 25 % of the mean lamina
        thickness), and width as a fraction of the local lamina thickness.
    color_banding : bool, default=True
        Colour each vertex by its position within the lamina (dark boundaries).
    base : {'cut', 'open'}, default='cut'
        Closed flat saw-cut base, or an open tube end.
    top : {'domed', 'flat', 'open'}, default='domed'
        Cap of the column: the last lamina's dome, a flat cut, or open.
    scanner_noise_mm : float or None, default=None
        Scanner noise, mm (None: 10 % of the mean lamina thickness). Photogrammetric: standard deviation
        of the vertex displacement along the normal before smoothing; CT: of the density field (as a
        distance) before marching cubes; rings: of an isotropic Gaussian vertex jitter.
    holes : int, default=0
        Number of small holes punched in the side wall.
    pose : {'identity', 'random'}, default='random'
        File frame equal to the specimen frame, or a random rotation and translation.
    units : {'mm', 'cm', 'm', 'in', 'um'}, default='mm'
        Units of the written file.
    mesh_kind : {'photogrammetric', 'ct', 'rings'} or None, default=None
        How the surface is meshed. ``photogrammetric``: near-isotropic triangles not aligned with the
        laminae (a jittered lattice at a random angle in the unrolled (arc length, height) domain,
        Delaunay-triangulated), noise along the normal, then Taubin smoothing. ``ct``: the solid is
        voxelised and its isosurface extracted by marching cubes (staircase included). ``rings``: the
        ring-aligned mesh of earlier versions (a vertex ring on every boundary). None chooses
        ``rings`` when any of ``sampling``, ``rings_per_lamina`` or ``ring_vertices`` is given, else
        ``photogrammetric``. In that legacy case the earlier defaults also apply to whatever of
        ``sway_amplitude_deg`` (3), ``meander_amplitude_deg`` (0), ``scanner_noise_mm`` (0.004) and
        ``groove_depth_mm`` (0.04) is not given, so code written for the ring mesh keeps its specimens.
        None values are resolved on construction: the instance (and ``to_dict``) holds numbers.
    edge_length_mm : float or None, default=None
        Target edge length of the photogrammetric mesh, mm (None: a third of the mean lamina); with
        ``edge_aspect`` > 1, the edge length along the column.
    edge_aspect : float, default=1
        Photogrammetric mesh: the triangles are stretched around the column by this factor (1:
        near-equilateral). A compromise for small files of long records, not a property of real scans.
    voxel_size_mm : float or None, default=None
        Voxel size of the CT mesh, mm (None: a third of the mean lamina).
    smoothing_iterations : int, default=2
        Taubin smoothing passes (lambda 0.33, mu -0.34) of the photogrammetric mesh (0: none).
    sampling : {'isotropic', 'anisotropic'} or None, default=None
        Rings only: near-equilateral triangles, or many rings of few vertices (None: isotropic).
    rings_per_lamina : float or None, default=None
        Rings only: vertex rings per mean lamina thickness along the axis (None: 4).
    ring_vertices : int or None, default=None
        Rings only: vertices per ring; None chooses it from the sampling (isotropic: edge length equal
        to the ring spacing; anisotropic: 24).
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
    sway_amplitude_deg: Optional[float] = None
    sway_azimuth_deg: float = 30.0
    mean_tilt_deg: float = 2.0
    mean_tilt_azimuth_deg: float = 120.0
    sway_phase_rad: float = 0.0
    radius_mm: float = 8.0
    radius_variation: float = 0.08
    dome_height_mm: float = 1.5
    groove_depth_mm: Optional[float] = None
    groove_width_fraction: float = 0.35
    color_banding: bool = True
    base: str = "cut"
    top: str = "domed"
    scanner_noise_mm: Optional[float] = None
    holes: int = 0
    pose: str = "random"
    units: str = "mm"
    sampling: Optional[str] = None
    rings_per_lamina: Optional[float] = None
    ring_vertices: Optional[int] = None
    seed: int = constants.DEFAULT_SEED
    mesh_kind: Optional[str] = None
    edge_length_mm: Optional[float] = None
    voxel_size_mm: Optional[float] = None
    smoothing_iterations: int = 2
    edge_aspect: float = 1.0
    meander_amplitude_deg: Optional[float] = None
    meander_correlation_laminae: float = 100.0
    radius_taper: float = 0.0

    def __post_init__(self):
        self.validate()

    # ------------------------------------------------------------------ validation
    def validate(self) -> "SynthParams":
        """Check every value; raise :class:`ParameterError` naming the first bad one. Returns self."""
        legacy = False
        if self.mesh_kind is None:
            legacy = any(getattr(self, name) is not None for name in RING_ONLY)
            self.mesh_kind = "rings" if legacy else "photogrammetric"
        if self.sampling is None:
            self.sampling = "isotropic"
        if self.rings_per_lamina is None:
            self.rings_per_lamina = 4.0
        _range(self, "mean_thickness_mm", 0.0, 1e4, low_open=True)
        if legacy:
            for name, value in LEGACY_DEFAULTS.items():
                if getattr(self, name) is None:
                    setattr(self, name, value)
        if self.sway_amplitude_deg is None:
            self.sway_amplitude_deg = REALISTIC_SWAY_DEG
        if self.meander_amplitude_deg is None:
            self.meander_amplitude_deg = REALISTIC_MEANDER_DEG
        if self.scanner_noise_mm is None:
            self.scanner_noise_mm = DEFAULT_NOISE_FRACTION * self.mean_thickness_mm
        if self.groove_depth_mm is None:
            self.groove_depth_mm = DEFAULT_GROOVE_FRACTION * self.mean_thickness_mm
        if self.edge_length_mm is None:
            self.edge_length_mm = DEFAULT_EDGE_FRACTION * self.mean_thickness_mm
        if self.voxel_size_mm is None:
            self.voxel_size_mm = DEFAULT_VOXEL_FRACTION * self.mean_thickness_mm
        for name in ("base", "top", "pose", "units", "sampling", "mesh_kind"):
            value = getattr(self, name)
            if not isinstance(value, str) or value.lower() not in CHOICES[name]:
                raise ParameterError(f"{name} must be one of {', '.join(CHOICES[name])} but got {value!r}")
            setattr(self, name, value.lower())
        self.color_banding = _as_bool("color_banding", self.color_banding)
        self.holes = _as_int("holes", self.holes, 0, 1000)
        self.smoothing_iterations = _as_int("smoothing_iterations", self.smoothing_iterations, 0, 100)
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
        _range(self, "meander_amplitude_deg", 0.0, 30.0)
        _range(self, "meander_correlation_laminae", 1.0, 1e6)
        _range(self, "radius_taper", -0.9, 3.0)
        _range(self, "edge_length_mm", 1e-4, self.radius_mm, low_open=True)
        _range(self, "edge_aspect", 1.0, 50.0)
        _range(self, "voxel_size_mm", 1e-4, self.radius_mm, low_open=True)
        if self.sway_amplitude_deg + self.mean_tilt_deg + 3.0 * self.meander_amplitude_deg > 80.0:
            raise ParameterError(f"sway_amplitude_deg + mean_tilt_deg + 3 x meander_amplitude_deg must be at "
                                 f"most 80 but got {self.sway_amplitude_deg + self.mean_tilt_deg + 3.0 * self.meander_amplitude_deg:g}; "
                                 f"lower the tilt, sway or meander")
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
    def column_length_mm(self) -> float:
        """Expected length of the column along its axis, mm."""
        return self.n_nominal * self.mean_thickness_mm

    @property
    def estimated_faces(self) -> int:
        """Approximate number of mesh faces (side wall; caps add a few per cent)."""
        area = 2.0 * math.pi * self.radius_mm * (1.0 + 0.5 * self.radius_taper) * self.column_length_mm
        if self.mesh_kind == "photogrammetric":
            # Equilateral lattice: 2 / (sqrt(3) e^2) vertices per unit area, two faces per vertex.
            caps = 2.0 * math.pi * self.radius_mm ** 2 if self.base == "cut" else math.pi * self.radius_mm ** 2
            return int(4.0 / math.sqrt(3.0) * (area + caps / self.edge_aspect) / self.edge_length_mm ** 2
                       / self.edge_aspect)
        if self.mesh_kind == "ct":
            # Marching cubes on a cylinder about z: 2 (|nx| + |ny| + |nz|) / v^2 faces per unit area,
            # |nx| + |ny| averaging 4 / pi around the circle (measured: 2.55 / v^2); the grooves' flanks
            # and the caps add about 30 % (measured at the default groove relief).
            return int(1.3 * 8.0 / math.pi * area / self.voxel_size_mm ** 2)
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
        """A validated copy with some fields changed.

        Defaults that depend on other fields (noise and groove depth from the lamina thickness, edge
        length, voxel size) were resolved when this instance was made: changing
        ``mean_thickness_mm`` here keeps them. Build a new ``SynthParams`` to have them follow."""
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
