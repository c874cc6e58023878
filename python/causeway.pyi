"""Type stubs of the causeway module (built from python/src by maturin).

Lengths are in Einstein radii of the total lens mass, times in days, alpha in degrees.
Array arguments take any array-like of floats of any shape; x and y must share their shape,
and results have it.
"""
from os import PathLike
from typing import Any, Callable, Optional, Sequence, Union

import numpy as np
import numpy.typing as npt

__version__: str
MAP_METHODS: list[str]
CONTOUR_METHODS: list[str]
DEFAULT_ZERO_POINT: float
EXAMPLE_PLAN: str
LENS_CLASSES: list[str]
LENS_NAMES: list[str]
NATURE_WEIGHT_FLOOR: float

ArrayLike = npt.ArrayLike
Floats = npt.NDArray[np.float64]
Path = Union[str, PathLike[str]]
# RA or Dec: degrees, or a sexagesimal string ("17:55:00", "-29:30:00").
Angle = Union[float, str]
# An observatory's ephemeris: a CSV path, an (n, 4) array t, x, y, z (au, heliocentric
# equatorial J2000) or an (n, 3) array t, north, east (au, offsets from the Earth's centre
# projected on the sky).
Ephemeris = Union[Path, ArrayLike]

class Lens:
    """Point lenses; masses normalised to sum 1."""

    def __init__(self, x: ArrayLike, y: ArrayLike, mass: ArrayLike) -> None: ...
    @staticmethod
    def binary(s: float, q: float) -> Lens: ...
    @staticmethod
    def single() -> Lens: ...
    @staticmethod
    def read_csv(path: Path) -> Lens: ...
    @property
    def x(self) -> Floats: ...
    @property
    def y(self) -> Floats: ...
    @property
    def mass(self) -> Floats: ...
    @property
    def binary_parameters(self) -> Optional[tuple[float, float]]: ...
    def __len__(self) -> int: ...
    def source_position(self, x: ArrayLike, y: ArrayLike) -> tuple[Floats, Floats]: ...

def magnification(
    lens: Lens, x: ArrayLike, y: ArrayLike, threads: Optional[int] = None
) -> Floats: ...
def images(
    lens: Lens, x: ArrayLike, y: ArrayLike, threads: Optional[int] = None
) -> dict[str, npt.NDArray[Any]]: ...
def caustics(lens: Lens, critical: bool = False) -> list[Floats]: ...
def topology(lens: Lens) -> str: ...

class Map:
    """A magnification map; `data[iy, ix]` float32, row 0 at the smallest y."""

    @staticmethod
    def load(path: Path) -> Map: ...
    def save(self, path: Path) -> None: ...
    @property
    def data(self) -> npt.NDArray[np.float32]: ...
    @property
    def center(self) -> tuple[float, float]: ...
    @property
    def width(self) -> float: ...
    @property
    def pixels(self) -> int: ...
    @property
    def pixel_size(self) -> float: ...
    @property
    def extent(self) -> tuple[float, float, float, float]: ...
    @property
    def lens(self) -> Lens: ...
    @property
    def provenance(self) -> dict[str, Any]: ...
    def mean(self) -> float: ...

def build_map(
    lens: Lens,
    center: tuple[float, float],
    width: float,
    pixels: int,
    rays: Optional[float] = None,
    engine: Optional[str] = None,
    accuracy: Optional[float] = None,
    threads: Optional[int] = None,
    max_memory: Optional[int] = None,
) -> Map: ...
def trajectory(
    t0: float,
    u0: float,
    te: float,
    alpha: float,
    times: ArrayLike,
    ra: Optional[Angle] = None,
    dec: Optional[Angle] = None,
    pi_e_n: Optional[float] = None,
    pi_e_e: Optional[float] = None,
    t0_par: Optional[float] = None,
    ds_dt: Optional[float] = None,
    dalpha_dt: Optional[float] = None,
    t0_kep: Optional[float] = None,
    ephemeris: Optional[Ephemeris] = None,
) -> tuple[Floats, Floats]: ...
def map_magnification(
    map: Map,
    x: ArrayLike,
    y: ArrayLike,
    rho: float,
    ld: Optional[float] = None,
    ld_sqrt: Optional[tuple[float, float]] = None,
    tol: float = 1e-3,
    evaluation: str = "auto",
    fallback: bool = True,
    threads: Optional[int] = None,
) -> tuple[Floats, Floats, npt.NDArray[np.uint8]]: ...
def contour_magnification(
    lens: Lens,
    x: ArrayLike,
    y: ArrayLike,
    rho: float,
    ld: Optional[float] = None,
    ld_sqrt: Optional[tuple[float, float]] = None,
    tol: float = 1e-4,
    threads: Optional[int] = None,
) -> tuple[Floats, Floats, npt.NDArray[np.uint8]]: ...
def model_magnification(
    s: float,
    q: float,
    t0: float,
    u0: float,
    te: float,
    alpha: float,
    rho: float,
    times: ArrayLike,
    ld: Optional[float] = None,
    ld_sqrt: Optional[tuple[float, float]] = None,
    tol: float = 1e-4,
    threads: Optional[int] = None,
    ra: Optional[Angle] = None,
    dec: Optional[Angle] = None,
    pi_e_n: Optional[float] = None,
    pi_e_e: Optional[float] = None,
    t0_par: Optional[float] = None,
    ds_dt: Optional[float] = None,
    dalpha_dt: Optional[float] = None,
    t0_kep: Optional[float] = None,
    ephemeris: Optional[Ephemeris] = None,
) -> Floats: ...

class Store:
    """A folder of maps with an index by (s, q)."""

    @staticmethod
    def open(path: Path) -> Store: ...
    @staticmethod
    def create(path: Path) -> Store: ...
    @property
    def root(self) -> str: ...
    def entries(self) -> list[dict[str, Any]]: ...
    def find(self, s: float, q: float) -> list[dict[str, Any]]: ...
    def nearest(self, s: float, q: float, count: int = 1) -> list[dict[str, Any]]: ...
    def load(self, file: str) -> Map: ...
    def put(self, map: Map) -> str: ...
    @staticmethod
    def key_file(map: Map) -> str: ...

def build_library(
    spec: str,
    store: Union[Store, Path],
    progress: Optional[Callable[[int, int, float, float, bool], Any]] = None,
    threads: Optional[int] = None,
) -> tuple[int, int]: ...

class DataSet:
    """One data set: times (days), fluxes and errors, sorted by time."""

    def __init__(
        self,
        t: ArrayLike,
        mag: Optional[ArrayLike] = None,
        mag_err: Optional[ArrayLike] = None,
        flux: Optional[ArrayLike] = None,
        flux_err: Optional[ArrayLike] = None,
        name: str = "data",
        zero_point: float = 22.0,
        ld: Optional[float] = None,
    ) -> None: ...
    @staticmethod
    def read(path: Path, zero_point: float = 22.0, ld: Optional[float] = None) -> DataSet: ...
    @property
    def t(self) -> Floats: ...
    @property
    def flux(self) -> Floats: ...
    @property
    def flux_err(self) -> Floats: ...
    @property
    def measured(self) -> str: ...
    @property
    def name(self) -> str: ...
    def __len__(self) -> int: ...

def fit_single_lens(data: Sequence[DataSet]) -> dict[str, Any]: ...
def fit_event(
    data: Sequence[DataSet],
    maps: Union[Store, Sequence[Map]],
    rhos: Optional[Sequence[float]] = None,
    exclude: Sequence[tuple[float, float]] = (),
    baseline: Optional[tuple[float, float, float]] = None,
    zoom_levels: int = 2,
    zoom_points: int = 2,
    refine: int = 4,
    tol: float = 1e-4,
    budget: float = 600.0,
    clip: float = 5.0,
    rescale_errors: bool = True,
    adaptive_timing: bool = True,
    hops: int = 8,
    progress: Optional[Callable[[str, str], Any]] = None,
    threads: Optional[int] = None,
    ra: Optional[Angle] = None,
    dec: Optional[Angle] = None,
    t0_par: Optional[float] = None,
    orbit: bool = True,
    ephemerides: Optional[Sequence[Optional[Ephemeris]]] = None,
    parallax_minima: int = 2,
    time_limit: float = 780.0,
    search_points: int = 1500,
) -> dict[str, Any]: ...
def simulate(
    s: float,
    q: float,
    t0: float,
    u0: float,
    te: float,
    alpha: float,
    rho: float,
    times: ArrayLike,
    ld: Optional[float] = None,
    fs: float = 1.0,
    fb: float = 0.0,
    sigma_mag: float = 0.01,
    sigma_flux: Optional[float] = None,
    seed: int = 1,
    zero_point: float = 22.0,
    tol: float = 1e-5,
    ra: Optional[Angle] = None,
    dec: Optional[Angle] = None,
    pi_e_n: Optional[float] = None,
    pi_e_e: Optional[float] = None,
    t0_par: Optional[float] = None,
    ds_dt: Optional[float] = None,
    dalpha_dt: Optional[float] = None,
    t0_kep: Optional[float] = None,
    ephemeris: Optional[Ephemeris] = None,
) -> dict[str, Any]: ...
def simulate_plan(
    plan: str,
    s: float,
    q: float,
    t0: float,
    u0: float,
    te: float,
    alpha: float,
    rho: float,
    ld: Optional[float] = None,
    seed: int = 1,
    tol: float = 1e-5,
) -> dict[str, dict[str, Any]]: ...

# Parallax and lens orbital motion (times: JD - 2450000 below 2,400,000, else full JD).
def sky_position(ra: Angle, dec: Angle) -> tuple[float, float]: ...
def sky_basis(ra: Angle, dec: Angle) -> dict[str, Floats]: ...
def earth_position(jd: ArrayLike) -> Floats: ...
def earth_velocity(ra: Angle, dec: Angle, t0_par: float) -> tuple[float, float]: ...
def parallax_offsets(
    ra: Angle,
    dec: Angle,
    times: ArrayLike,
    t0_par: float,
    ephemeris: Optional[Ephemeris] = None,
) -> Floats: ...
def lens_from_parallax(
    theta_e: float,
    te: float,
    pi_e_n: float,
    pi_e_e: float,
    s: float = 1.0,
    q: float = 0.0,
    ds: Optional[float] = None,
    earth_velocity: tuple[float, float] = (0.0, 0.0),
    ds_dt: Optional[float] = None,
    dalpha_dt: Optional[float] = None,
    covariance: Optional[ArrayLike] = None,
) -> dict[str, float]: ...
def refine_with_motion(
    data: Sequence[DataSet],
    minima: Sequence[dict[str, Any]],
    ra: Angle,
    dec: Angle,
    t0_par: Optional[float] = None,
    orbit: bool = True,
    ephemerides: Optional[Sequence[Optional[Ephemeris]]] = None,
    parallax_minima: int = 2,
    tol: float = 1e-4,
    max_iters: int = 40,
    theta_star: Optional[float] = None,
    ds: Optional[float] = None,
    progress: Optional[Callable[[str, str], None]] = None,
    threads: Optional[int] = None,
) -> list[dict[str, Any]]: ...

# Who is the lens. Measurements are (value, error) pairs.
def lens_nature(
    l: Optional[float] = None,
    b: Optional[float] = None,
    ra: Optional[float] = None,
    dec: Optional[float] = None,
    minimum: Optional[dict[str, Any]] = None,
    te: Optional[tuple[float, float]] = None,
    theta_e: Optional[tuple[float, float]] = None,
    theta_star: Optional[tuple[float, float]] = None,
    rho: Optional[tuple[float, float]] = None,
    pi_e: Optional[tuple[float, float]] = None,
    pi_en: Optional[tuple[float, float]] = None,
    pi_ee: Optional[tuple[float, float]] = None,
    earth_velocity: Optional[tuple[float, float]] = None,
    s: Optional[float] = None,
    q: Optional[float] = None,
    posterior: Optional[Union[dict[str, ArrayLike], Path]] = None,
    ds: Optional[tuple[float, float]] = None,
    band: str = "K",
    extinction: float = 0.0,
    excess: Optional[tuple[float, float]] = None,
    fainter_than: Optional[float] = None,
    samples: int = 200000,
    seed: int = 1,
    source_beta: float = 1.0,
    progress: Optional[Callable[[str, str], None]] = None,
    threads: Optional[int] = None,
) -> dict[str, Any]: ...

def _time_magnification(
    lens: Lens, x: ArrayLike, y: ArrayLike, threads: Optional[int] = None
) -> float: ...
def _time_map_magnification(
    map: Map,
    x: ArrayLike,
    y: ArrayLike,
    rho: float,
    ld: Optional[float] = None,
    evaluation: str = "auto",
    threads: Optional[int] = None,
) -> float: ...
