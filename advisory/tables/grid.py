"""The table grid: which flight conditions a table covers, and how finely.

Axes
----
altitude
    Geometric altitude of the aircraft above mean sea level, m.
Mach excess
    Mach number above the cutoff Mach of the (altitude, flight-path angle, heading)
    cell, so every tabulated condition puts a boom on the ground and the table resolves
    the rapid change of the carpet just above cutoff. Nodes are denser near zero.
flight-path angle
    rad, positive climbing.
heading
    True heading, rad; only when the atmosphere has wind (the carpet then depends on
    the heading relative to the wind); a single node 0 otherwise. Periodic.
normalised azimuth (eta)
    -1 (left lateral cutoff) .. 0 (the reference ray, normally straight down) .. +1
    (right lateral cutoff). Tabulating in eta rather than in azimuth keeps every table
    ray on the ground and puts the carpet edge exactly on a node.

A grid file (TOML) may override any axis: ``altitudes_ft``, ``mach_excess``,
``fpa_deg``, ``headings_deg``, ``n_eta`` (odd), ``mach_max``, ``ground_elevation_ft``.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np

from advisory import units
from advisory.tomlfile import read_toml


class GridError(ValueError):
    """A grid definition that cannot be used; the message names the field."""


# Every 500 ft: the centerline peak overpressure has derivative kinks in altitude (where the
# peak moves from the bow shock to an interior maximum), so linear interpolation needs
# small steps to stay within 1 % (tables issue budget). From 5,000 ft (issue 14): the
# default table began at 20,000 ft and read a flight at 8,000 ft at its edge (cutoff Mach
# 1.077 for 1.029); supersonic flight lower than 5,000 ft is outside it, and the advisor
# says so (advisory.pipeline.table_range) instead of reading the edge. The axis is geometric
# height: 4,500-69,500 ft holds pressure altitudes 5,000-65,000 ft on days from ISA -15 K
# (FL50 at 4,741 ft) to ISA +15 K (FL650 at 69,131 ft; advisory.physics.pressure_altitude).
DEFAULT_ALTITUDES_FT = tuple(float(a) for a in range(4500, 69501, 500))
DEFAULT_MACH_EXCESS = (
    0.001, 0.003, 0.006, 0.01, 0.015, 0.02, 0.03, 0.04, 0.055, 0.07, 0.09, 0.12, 0.15,
    0.2, 0.25, 0.3, 0.4, 0.5, 0.6, 0.75, 0.9, 1.1, 1.3, 1.55, 1.8, 2.0,
)
DEFAULT_FPA_DEG = (-10.0, -7.5, -5.0, -2.5, 0.0, 2.5, 5.0, 7.5, 10.0)
#: Heading nodes used when the atmosphere has wind, deg: every 15 deg, interpolated by
#: six-point Lagrange (advisory.tables.lookup): under a jet stream the half-width peaks
#: within some 60 deg of heading, and every 30 deg left it 1.3-1.6 % off even so (cubic:
#: 1.5-2.4 %), every 15 deg within the 0.5 % budget (tests/test_wind_tables.py). The cost:
#: twice the size and build time of a 30-deg table.
WIND_HEADINGS_DEG = tuple(float(h) for h in range(0, 360, 15))
DEFAULT_N_ETA = 31


@dataclass(frozen=True)
class TableGrid:
    """Axes of a table (SI inside; see the module notes)."""

    altitudes_m: tuple[float, ...]
    mach_excess: tuple[float, ...]
    fpa_rad: tuple[float, ...]
    headings_rad: tuple[float, ...] = (0.0,)
    n_eta: int = DEFAULT_N_ETA
    mach_max: float = 3.0
    ground_elevation_m: float = 0.0
    extra: dict = field(default_factory=dict)

    @property
    def eta(self) -> np.ndarray:
        """Normalised azimuth nodes, -1 .. 1."""
        return np.linspace(-1.0, 1.0, self.n_eta)

    @property
    def shape(self) -> tuple[int, int, int, int]:
        """(altitudes, Mach excess, flight-path angles, headings)."""
        return (len(self.altitudes_m), len(self.mach_excess), len(self.fpa_rad),
                len(self.headings_rad))

    def axes(self) -> dict[str, np.ndarray]:
        """The axes as float64 arrays, keyed as stored in the table file."""
        return {
            "axis_altitude_m": np.array(self.altitudes_m, dtype=np.float64),
            "axis_mach_excess": np.array(self.mach_excess, dtype=np.float64),
            "axis_fpa_rad": np.array(self.fpa_rad, dtype=np.float64),
            "axis_heading_rad": np.array(self.headings_rad, dtype=np.float64),
            "axis_eta": self.eta,
        }

    def to_dict(self) -> dict:
        """JSON-ready description (stored in the table header)."""
        d = asdict(self)
        d["altitudes_m"] = list(self.altitudes_m)
        d["mach_excess"] = list(self.mach_excess)
        d["fpa_rad"] = list(self.fpa_rad)
        d["headings_rad"] = list(self.headings_rad)
        return d

    @classmethod
    def from_dict(cls, d: dict) -> TableGrid:
        """Inverse of :meth:`to_dict`."""
        return cls(
            altitudes_m=tuple(d["altitudes_m"]), mach_excess=tuple(d["mach_excess"]),
            fpa_rad=tuple(d["fpa_rad"]), headings_rad=tuple(d["headings_rad"]),
            n_eta=int(d["n_eta"]), mach_max=float(d["mach_max"]),
            ground_elevation_m=float(d["ground_elevation_m"]), extra=dict(d.get("extra", {})),
        )

    def validate(self) -> None:
        """Raise :class:`GridError` naming the first bad axis."""
        def ascending(name: str, vals: tuple[float, ...], min_len: int = 2) -> None:
            if len(vals) < min_len:
                raise GridError(f"grid {name}: needs at least {min_len} nodes")
            if any(not math.isfinite(v) for v in vals):
                raise GridError(f"grid {name}: nodes must be finite numbers")
            if any(b <= a for a, b in zip(vals, vals[1:])):
                raise GridError(f"grid {name}: nodes must ascend strictly")

        ascending("altitudes", self.altitudes_m)
        ascending("mach_excess", self.mach_excess)
        ascending("fpa", self.fpa_rad, 1)
        ascending("headings", self.headings_rad, 1)
        if self.mach_excess[0] <= 0.0:
            raise GridError("grid mach_excess: nodes must be > 0")
        if any(abs(f) > math.radians(30.0) for f in self.fpa_rad):
            raise GridError("grid fpa: nodes must be within [-30, 30] deg")
        if self.n_eta < 3 or self.n_eta % 2 == 0:
            raise GridError(f"grid n_eta: {self.n_eta} must be odd and >= 3")
        if self.altitudes_m[0] <= self.ground_elevation_m:
            raise GridError("grid altitudes: lowest node must be above the ground elevation")
        if not (1.0 < self.mach_max <= 5.0):
            raise GridError(f"grid mach_max: {self.mach_max} must be in (1, 5]")


def default_grid(with_wind: bool = False, ground_elevation_m: float = 0.0) -> TableGrid:
    """The default grid: 4,500-69,500 ft (geometric), Mach excess 0.001-2.0 over cutoff
    (Mach at most 3.0), flight-path angle -10..+10 deg."""
    return TableGrid(
        altitudes_m=tuple(units.ft_to_m(a) for a in DEFAULT_ALTITUDES_FT),
        mach_excess=DEFAULT_MACH_EXCESS,
        fpa_rad=tuple(math.radians(f) for f in DEFAULT_FPA_DEG),
        headings_rad=tuple(math.radians(h) for h in WIND_HEADINGS_DEG) if with_wind else (0.0,),
        ground_elevation_m=ground_elevation_m,
    )


def load_grid(path: str | Path, with_wind: bool = False) -> TableGrid:
    """Read a grid file (TOML); keys not given take the default grid's values."""
    path = Path(path)
    doc = read_toml(path, f"grid file {path}", GridError)
    base = default_grid(with_wind)
    known = {"altitudes_ft", "mach_excess", "fpa_deg", "headings_deg", "n_eta", "mach_max",
             "ground_elevation_ft"}
    unknown = set(doc) - known
    if unknown:
        raise GridError(f"grid file {path}: unknown key(s) {sorted(unknown)}")

    def floats(key: str) -> tuple[float, ...] | None:
        if key not in doc:
            return None
        vals = doc[key]
        if not isinstance(vals, list) or not all(
            isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
            for v in vals
        ):
            raise GridError(f"grid file {path}: {key} must be a list of finite numbers")
        return tuple(float(v) for v in vals)

    def number(key: str, default: float, whole: bool = False) -> float:
        v = doc.get(key, default)
        if isinstance(v, bool) or not isinstance(v, int if whole else (int, float)) \
                or not math.isfinite(v):
            kind = "a whole number" if whole else "a finite number"
            raise GridError(f"grid file {path}: {key} = {v!r} must be {kind}")
        return float(v)

    alts = floats("altitudes_ft")
    mex = floats("mach_excess")
    fpa = floats("fpa_deg")
    hdg = floats("headings_deg")
    grid = TableGrid(
        altitudes_m=tuple(units.ft_to_m(a) for a in alts) if alts else base.altitudes_m,
        mach_excess=mex or base.mach_excess,
        fpa_rad=tuple(math.radians(f) for f in fpa) if fpa else base.fpa_rad,
        headings_rad=tuple(math.radians(h) for h in hdg) if hdg else base.headings_rad,
        n_eta=int(number("n_eta", base.n_eta, whole=True)),
        mach_max=number("mach_max", base.mach_max),
        ground_elevation_m=units.ft_to_m(number("ground_elevation_ft", 0.0)),
    )
    try:
        grid.validate()
    except GridError as exc:
        raise GridError(f"grid file {path}: {exc}") from exc
    return grid
