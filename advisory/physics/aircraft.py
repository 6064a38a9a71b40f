"""Aircraft description for the ground-signature physics: size, weight, area distribution.

An aircraft file is TOML. Two keys are required, everything else refines the picture::

    name = "Tarnwick SX-9 demonstrator"     # free text
    class = "small_supersonic_jet"         # preset for the defaults below (optional)
    length_m = 36.0                        # required, reference length, m
    mass_kg = 38000.0                      # required, m

    [volume]                               # parametric volume (optional)
    max_area_m2 = 6.0                      # largest equivalent cross-section, m^2
    max_area_station = 0.55                # where it sits, fraction of length from the nose

    [equivalent_area]                      # or a table of the volume's equivalent area
    station_m = [0.0, 4.0, ...]            # from the nose, ascending, first row 0
    area_m2   = [0.0, 0.9, ...]            # first row 0 (pointed nose)

    [lift]                                 # where the lift acts (optional)
    start_station = 0.40                   # fraction of length
    end_station = 0.95

    [reference]                            # reference flight condition (optional)
    mach = 1.6
    altitude_m = 15000.0

    carlson_shape_factor = 0.09            # optional override of Carlson's K_S

Model
-----
The *equivalent area* ``Ae(x)`` seen along the Mach planes is the volume part plus the
lift part (Whitham [1]_ for the volume of a body of revolution; the lift part after
Walkden [2]_, as used by Carlson [3]_)::

    Ae(x) = S(x) + B(x),   B(x) = beta cos(phi) / (2 q) * integral_0^x l(xi) dxi

with ``q = gamma/2 p M^2`` the dynamic pressure at the aircraft, ``beta = sqrt(M^2-1)``,
``phi`` the ray azimuth around the Mach cone (0 straight down) and ``l`` the lift per
unit length, whose integral is the lift ``n m g cos(fpa)`` (``n`` the load factor
relative to steady flight). The parametric volume is the smooth one-hump family
``S(u) = S_max (u/u_m)^p ((1-u)/(1-u_m))^k`` (``u = x/L``) with ``p = 2``,
``k = 2 (1-u_m)/u_m`` for ``u_m <= 0.5`` and ``k = 2``, ``p = 2 u_m/(1-u_m)`` above, so
the maximum ``S_max`` sits at ``u = u_m`` and ``S''`` stays finite at both ends;
``u_m = 0.5`` is Whitham's parabolic body of revolution (radius ``∝ u (1-u)``).
The lift is spread over ``[start, end]`` with the smooth weight ``l ∝ s (1 - s)``
(``s`` the fraction of the lifting stretch), so ``B`` rises as the smoothstep
``3 s^2 - 2 s^3``. A table is interpolated by a C2 cubic spline [4]_ (zero slope at
the nose, natural at the last station, clipped at zero), because the F-function
depends on ``Ae''``; after the last station the area stays at its last value.

Class presets (invented defaults, chosen to give plausible numbers; no source):

================================  ===========  ========  ===========  =========================
class                             fineness     max at    lift         reference (Mach, alt)
================================  ===========  ========  ===========  =========================
``slender_supersonic_transport``  L/d_e = 18   0.55 L    0.35-0.95 L  2.0, 18 000 m
``small_supersonic_jet``          L/d_e = 13   0.55 L    0.40-0.95 L  1.6, 15 000 m
================================  ===========  ========  ===========  =========================

``d_e`` is the diameter of the circle of the largest equivalent area, so
``max_area_m2 = pi/4 (L / fineness)^2`` unless the file gives it.

References
----------
.. [1] G. B. Whitham, "The flow pattern of a supersonic projectile", Comm. Pure Appl.
   Math. 5, 1952, pp. 301-348.
.. [2] F. Walkden, "The shock pattern of a wing-body combination, far from the flight
   path", Aeronautical Quarterly 9, 1958, pp. 164-194.
.. [3] H. W. Carlson, "Simplified sonic-boom prediction", NASA TP-1122, 1978.
.. [4] C. de Boor, *A Practical Guide to Splines*, Springer, 1978, ch. IV (cubic
   spline interpolation, end conditions).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

import numpy as np

from advisory import units
from advisory.physics.atmosphere import GAMMA
from advisory.tomlfile import read_toml


class AircraftError(ValueError):
    """An aircraft description that cannot be used; the message names the field and value."""


@dataclass(frozen=True)
class ClassPreset:
    """Defaults of an aircraft class (invented, documented in the module notes)."""

    fineness: float
    max_area_station: float
    lift_start_station: float
    lift_end_station: float
    reference_mach: float
    reference_altitude_m: float


#: Presets selectable with the ``class`` key (invented defaults; no source).
CLASS_PRESETS: dict[str, ClassPreset] = {
    "slender_supersonic_transport": ClassPreset(18.0, 0.55, 0.35, 0.95, 2.0, 18000.0),
    "small_supersonic_jet": ClassPreset(13.0, 0.55, 0.40, 0.95, 1.6, 15000.0),
}
DEFAULT_CLASS = "small_supersonic_jet"

# Accepted ranges (plausibility limits of this module, not of any standard).
LENGTH_RANGE_M = (5.0, 120.0)
MASS_RANGE_KG = (500.0, 500000.0)
MAX_AREA_STATION_RANGE = (0.3, 2.0 / 3.0)
#: Largest max_area / length^2 accepted (a fineness ratio of about 5).
MAX_AREA_RATIO = 0.03
LIFT_MIN_SPAN = 0.05
REFERENCE_MACH_RANGE = (1.0, 5.0)
REFERENCE_ALTITUDE_RANGE_M = (0.0, 30000.0)
SHAPE_FACTOR_RANGE = (0.0, 0.5)

_TOP_KEYS = {"name", "class", "length_m", "mass_kg", "volume", "equivalent_area", "lift",
             "reference", "carlson_shape_factor"}
_TABLE_KEYS = {
    "volume": {"max_area_m2", "max_area_station"},
    "equivalent_area": {"station_m", "area_m2"},
    "lift": {"start_station", "end_station"},
    "reference": {"mach", "altitude_m"},
}


@dataclass(frozen=True, eq=False)
class Aircraft:
    """An aircraft as the signature physics sees it (SI).

    Attributes
    ----------
    name : str
        Free text.
    aircraft_class : str
        Key of :data:`CLASS_PRESETS` that supplied the defaults.
    length_m, mass_kg : float
        Reference length (m) and mass (kg).
    max_area_m2 : float
        Largest equivalent cross-section of the volume, m^2 (from the table when given).
    max_area_station : float
        Where the parametric maximum sits, fraction of length.
    lift_start_station, lift_end_station : float
        Stretch over which the lift acts, fractions of length.
    table_station_m, table_area_m2 : ndarray or None
        Volume equivalent-area table (m, m^2); ``None`` for the parametric volume.
    reference_mach, reference_altitude_m : float
        Reference flight condition.
    carlson_shape_factor : float or None
        Override of Carlson's shape factor K_S; ``None`` computes it.
    source : str
        Where the description came from.
    """

    name: str
    aircraft_class: str
    length_m: float
    mass_kg: float
    max_area_m2: float
    max_area_station: float
    lift_start_station: float
    lift_end_station: float
    table_station_m: np.ndarray | None = None
    table_area_m2: np.ndarray | None = None
    reference_mach: float = 1.6
    reference_altitude_m: float = 15000.0
    carlson_shape_factor: float | None = None
    source: str = ""
    _cache: dict = field(default_factory=dict, repr=False, compare=False)

    # ---- weight and lift -----------------------------------------------------------
    @property
    def weight_n(self) -> float:
        """Weight ``m g0``, N (g0 from U.S. Standard Atmosphere 1976)."""
        return self.mass_kg * units.G0

    def lift_n(self, load_factor: float = 1.0, fpa_rad: float = 0.0) -> float:
        """Lift ``n m g0 cos(fpa)``, N; ``load_factor`` is relative to steady flight."""
        return load_factor * self.weight_n * math.cos(fpa_rad)

    def lift_area_total(self, mach: float, pressure_pa: float, load_factor: float = 1.0,
                        fpa_rad: float = 0.0, phi_rad: float = 0.0) -> float:
        """Lift-equivalent area behind the lifting stretch, ``B(L)``, m^2.

        ``B = beta cos(phi) L_lift / (2 q)``, ``q = gamma/2 p M^2`` (Walkden [2]_,
        Carlson [3]_); ``pressure_pa`` is the ambient pressure at the aircraft.
        """
        beta = math.sqrt(max(mach * mach - 1.0, 0.0))
        two_q = GAMMA * pressure_pa * mach * mach
        return beta * math.cos(phi_rad) * self.lift_n(load_factor, fpa_rad) / two_q

    # ---- area distributions --------------------------------------------------------
    def volume_area(self, x_m: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Volume equivalent area ``S(x)`` (m^2) and its slope ``S'(x)`` (m) at ``x_m``."""
        x = np.asarray(x_m, dtype=float)
        st, ar = self.table_station_m, self.table_area_m2
        if st is not None and ar is not None:  # both or neither (aircraft_from_dict)
            return _spline_eval(st, ar, self._table_curvatures(st, ar), x)
        u = np.clip(x / self.length_m, 0.0, 1.0)
        um = self.max_area_station
        p = max(2.0, 2.0 * um / (1.0 - um))
        k = max(2.0, 2.0 * (1.0 - um) / um)
        inside = (x > 0.0) & (x < self.length_m)
        with np.errstate(divide="ignore", invalid="ignore"):
            s = self.max_area_m2 * (u / um) ** p * ((1.0 - u) / (1.0 - um)) ** k
            ds = s * (p / u - k / (1.0 - u)) / self.length_m
        return np.where(inside, s, 0.0), np.where(inside, ds, 0.0)

    def lift_area_unit(self, x_m: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Lift-equivalent area per unit ``B(L)``: the smoothstep rise and its slope (1/m)."""
        x = np.asarray(x_m, dtype=float)
        x1 = self.lift_start_station * self.length_m
        x2 = self.lift_end_station * self.length_m
        s = np.clip((x - x1) / (x2 - x1), 0.0, 1.0)
        return 3.0 * s**2 - 2.0 * s**3, 6.0 * s * (1.0 - s) / (x2 - x1)

    def equivalent_area(self, x_m: np.ndarray, mach: float, pressure_pa: float,
                        load_factor: float = 1.0, fpa_rad: float = 0.0,
                        phi_rad: float = 0.0) -> np.ndarray:
        """Total equivalent area ``Ae = S + B`` at ``x_m`` (m^2); see the module notes."""
        s, _ = self.volume_area(x_m)
        b, _ = self.lift_area_unit(x_m)
        return s + self.lift_area_total(mach, pressure_pa, load_factor, fpa_rad, phi_rad) * b

    def _table_curvatures(self, station_m: np.ndarray, area_m2: np.ndarray) -> np.ndarray:
        """Spline curvatures of the area table (computed once, then cached)."""
        if "curvatures" not in self._cache:
            self._cache["curvatures"] = _spline_second_derivatives(station_m, area_m2)
        curvatures: np.ndarray = self._cache["curvatures"]
        return curvatures


# --------------------------------------------------------------------------------------
# Cubic spline for area tables (de Boor [4]_)
# --------------------------------------------------------------------------------------


def _spline_second_derivatives(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Node second derivatives of the C2 cubic spline through ``(x, y)`` [4]_ ch. IV.

    End conditions: zero slope at the first node (a pointed nose, area ~ x^2) and zero
    second derivative at the last (natural end). The tridiagonal system is solved by
    the Thomas algorithm.
    """
    n = x.size
    h = np.diff(x)
    sec = np.diff(y) / h
    lower = np.zeros(n)
    diag = np.zeros(n)
    upper = np.zeros(n)
    rhs = np.zeros(n)
    diag[0], upper[0], rhs[0] = 2.0 * h[0], h[0], 6.0 * (sec[0] - 0.0)
    for i in range(1, n - 1):
        lower[i], diag[i], upper[i] = h[i - 1], 2.0 * (h[i - 1] + h[i]), h[i]
        rhs[i] = 6.0 * (sec[i] - sec[i - 1])
    diag[-1], rhs[-1] = 1.0, 0.0
    for i in range(1, n):
        w = lower[i] / diag[i - 1]
        diag[i] -= w * upper[i - 1]
        rhs[i] -= w * rhs[i - 1]
    m = np.zeros(n)
    m[-1] = rhs[-1] / diag[-1]
    for i in range(n - 2, -1, -1):
        m[i] = (rhs[i] - upper[i] * m[i + 1]) / diag[i]
    return m


def _spline_eval(x: np.ndarray, y: np.ndarray, m: np.ndarray,
                 xq: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Value (clipped at 0) and slope of the spline; 0 before ``x[0]``, last value after."""
    xq = np.asarray(xq, dtype=float)
    i = np.clip(np.searchsorted(x, xq, side="right") - 1, 0, x.size - 2)
    h = x[i + 1] - x[i]
    a = np.clip((x[i + 1] - xq) / h, 0.0, 1.0)
    b = 1.0 - a
    val = a * y[i] + b * y[i + 1] + ((a**3 - a) * m[i] + (b**3 - b) * m[i + 1]) * h**2 / 6.0
    der = (y[i + 1] - y[i]) / h + ((1.0 - 3.0 * a**2) * m[i] + (3.0 * b**2 - 1.0) * m[i + 1]) \
        * h / 6.0
    before = xq < x[0]
    after = xq > x[-1]
    negative = val < 0.0
    val = np.where(before, 0.0, np.where(after, y[-1], np.maximum(val, 0.0)))
    der = np.where(before | after | negative, 0.0, der)
    return val, der


# --------------------------------------------------------------------------------------
# Loading and validation
# --------------------------------------------------------------------------------------


def _number(doc: dict, key: str, where: str, lo: float, hi: float, *, lo_open: bool = True,
            default: float | None = None) -> float:
    """Read a number, checking it lies in ``(lo, hi]`` (or ``[lo, hi]``); a missing key
    gives ``default``, or an error when there is none (a required field)."""
    v = _optional_number(doc, key, where, lo, hi, lo_open=lo_open)
    if v is not None:
        return v
    if default is None:
        raise AircraftError(f"{where}{key}: missing (required)")
    return default


def _optional_number(doc: dict, key: str, where: str, lo: float, hi: float, *,
                     lo_open: bool = True) -> float | None:
    """Like :func:`_number`; ``None`` when the key is missing."""
    name = f"{where}{key}"
    if key not in doc:
        return None
    v = doc[key]
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise AircraftError(f"{name}: {v!r} is not a number")
    v = float(v)
    bad_lo = v <= lo if lo_open else v < lo
    if not math.isfinite(v) or bad_lo or v > hi:
        bracket = "(" if lo_open else "["
        raise AircraftError(f"{name}: {v!r} is outside {bracket}{lo:g}, {hi:g}]")
    return v


def _check_keys(doc: dict, allowed: set[str], where: str) -> None:
    for key in doc:
        if key not in allowed:
            names = ", ".join(sorted(allowed))
            raise AircraftError(f"{where}{key}: unknown field (allowed: {names})")


def _table(doc: dict, length: float) -> tuple[np.ndarray, np.ndarray]:
    for key in ("station_m", "area_m2"):
        if key not in doc:
            raise AircraftError(f"equivalent_area.{key}: missing (required with a table)")
        v = doc[key]
        if not isinstance(v, list) or not all(
            isinstance(e, (int, float)) and not isinstance(e, bool) for e in v
        ):
            raise AircraftError(f"equivalent_area.{key}: {v!r} is not a list of numbers")
    st = np.array(doc["station_m"], dtype=float)
    ar = np.array(doc["area_m2"], dtype=float)
    if st.size != ar.size:
        raise AircraftError(
            f"equivalent_area.area_m2: has {ar.size} values but station_m has {st.size}"
        )
    if st.size < 3:
        raise AircraftError(f"equivalent_area.station_m: needs at least 3 rows, got {st.size}")
    for i in range(st.size):
        if not math.isfinite(st[i]) or not (0.0 <= st[i] <= length):
            raise AircraftError(
                f"equivalent_area.station_m[{i}]: {st[i]!r} is outside [0, length_m={length:g}]"
            )
        if not math.isfinite(ar[i]) or ar[i] < 0.0 or ar[i] > MAX_AREA_RATIO * length**2:
            raise AircraftError(
                f"equivalent_area.area_m2[{i}]: {ar[i]!r} is outside "
                f"[0, {MAX_AREA_RATIO * length**2:.4g}] m^2"
            )
        if i > 0 and st[i] <= st[i - 1]:
            raise AircraftError(
                f"equivalent_area.station_m[{i}]: {st[i]!r} is not above the previous "
                f"station ({st[i - 1]!r}); stations must ascend"
            )
    if st[0] != 0.0 or ar[0] != 0.0:
        raise AircraftError(
            f"equivalent_area: first row must be station 0 with area 0 (pointed nose), "
            f"got station {st[0]!r}, area {ar[0]!r}"
        )
    if float(ar.max()) <= 0.0:
        raise AircraftError("equivalent_area.area_m2: all areas are zero")
    return st, ar


def aircraft_from_dict(doc: dict, source: str = "dict") -> Aircraft:
    """Build and validate an :class:`Aircraft` from a parsed TOML document.

    Raises
    ------
    AircraftError
        For a missing required field, a value of the wrong type or out of range, or an
        unknown field; the message names the field and the value.
    """
    if not isinstance(doc, dict):
        raise AircraftError(f"aircraft: expected a table of fields, got {type(doc).__name__}")
    _check_keys(doc, _TOP_KEYS, "")
    for key, allowed in _TABLE_KEYS.items():
        if key in doc:
            if not isinstance(doc[key], dict):
                raise AircraftError(f"{key}: {doc[key]!r} is not a table")
            _check_keys(doc[key], allowed, f"{key}.")
    cls = doc.get("class", DEFAULT_CLASS)
    if not isinstance(cls, str) or cls not in CLASS_PRESETS:
        raise AircraftError(f"class: {cls!r} is not one of {', '.join(sorted(CLASS_PRESETS))}")
    preset = CLASS_PRESETS[cls]
    name = doc.get("name", "unnamed aircraft")
    if not isinstance(name, str):
        raise AircraftError(f"name: {name!r} is not text")
    length = _number(doc, "length_m", "", *LENGTH_RANGE_M)
    mass = _number(doc, "mass_kg", "", *MASS_RANGE_KG)
    vol = doc.get("volume", {})
    if "volume" in doc and "equivalent_area" in doc:
        raise AircraftError("equivalent_area: give either [volume] or [equivalent_area], not both")
    station = _number(vol, "max_area_station", "volume.", *MAX_AREA_STATION_RANGE,
                      lo_open=False, default=preset.max_area_station)
    max_area = _number(vol, "max_area_m2", "volume.", 0.0, MAX_AREA_RATIO * length**2,
                       default=math.pi / 4.0 * (length / preset.fineness) ** 2)
    st = ar = None
    if "equivalent_area" in doc:
        st, ar = _table(doc["equivalent_area"], length)
        max_area = float(ar.max())
    lift = doc.get("lift", {})
    lift_start = _number(lift, "start_station", "lift.", 0.0, 1.0, lo_open=False,
                         default=preset.lift_start_station)
    lift_end = _number(lift, "end_station", "lift.", 0.0, 1.0, lo_open=False,
                       default=preset.lift_end_station)
    if lift_end - lift_start < LIFT_MIN_SPAN:
        raise AircraftError(
            f"lift.end_station: {lift_end!r} must be at least {LIFT_MIN_SPAN} above "
            f"lift.start_station ({lift_start!r})"
        )
    ref = doc.get("reference", {})
    ref_mach = _number(ref, "mach", "reference.", *REFERENCE_MACH_RANGE,
                       default=preset.reference_mach)
    ref_alt = _number(ref, "altitude_m", "reference.", *REFERENCE_ALTITUDE_RANGE_M,
                      default=preset.reference_altitude_m)
    ks = _optional_number(doc, "carlson_shape_factor", "", *SHAPE_FACTOR_RANGE)
    return Aircraft(
        name=name, aircraft_class=cls, length_m=length, mass_kg=mass, max_area_m2=max_area,
        max_area_station=station, lift_start_station=lift_start, lift_end_station=lift_end,
        table_station_m=st, table_area_m2=ar, reference_mach=ref_mach,
        reference_altitude_m=ref_alt, carlson_shape_factor=ks, source=source,
    )


def aircraft_document(aircraft: Aircraft) -> dict:
    """The aircraft in full as a document :func:`aircraft_from_dict` reads back (stored in
    table headers and cache keys)."""
    doc: dict = {
        "name": aircraft.name, "class": aircraft.aircraft_class,
        "length_m": aircraft.length_m, "mass_kg": aircraft.mass_kg,
        "lift": {"start_station": aircraft.lift_start_station,
                 "end_station": aircraft.lift_end_station},
        "reference": {"mach": aircraft.reference_mach,
                      "altitude_m": aircraft.reference_altitude_m},
    }
    st, ar = aircraft.table_station_m, aircraft.table_area_m2
    if st is not None and ar is not None:
        doc["equivalent_area"] = {"station_m": [float(v) for v in st],
                                  "area_m2": [float(v) for v in ar]}
    else:
        doc["volume"] = {"max_area_m2": aircraft.max_area_m2,
                         "max_area_station": aircraft.max_area_station}
    if aircraft.carlson_shape_factor is not None:
        doc["carlson_shape_factor"] = aircraft.carlson_shape_factor
    return doc


def load_aircraft(path: str | Path) -> Aircraft:
    """Read and validate an aircraft description file (TOML; see the module notes).

    Raises
    ------
    AircraftError
        Unreadable file, invalid TOML, or a field :func:`aircraft_from_dict` refuses;
        the message names the file, the field and the value.
    """
    path = Path(path)
    doc = read_toml(path, f"aircraft file {path}", AircraftError)
    try:
        return aircraft_from_dict(doc, source=str(path))
    except AircraftError as exc:
        raise AircraftError(f"aircraft file {path}: {exc}") from exc


#: File name of the bundled demo aircraft inside ``advisory/data``.
DEMO_AIRCRAFT_FILE = "demo_aircraft.toml"


def default_aircraft() -> Aircraft:
    """The bundled invented demo aircraft (``advisory/data/demo_aircraft.toml``)."""
    ref = resources.files("advisory").joinpath("data").joinpath(DEMO_AIRCRAFT_FILE)
    with resources.as_file(ref) as path:
        return load_aircraft(path)
