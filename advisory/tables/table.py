"""A loaded boom table: provenance, arrays and the fast footprint lookup."""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from advisory import units
from advisory.physics.aircraft import AircraftError, aircraft_from_dict
from advisory.physics.atmosphere import Atmosphere
from advisory.physics.atmosphere_merge import rebuild_atmosphere
from advisory.physics.spread import N_VARIABLES, NODES_M
from advisory.tables import lookup as lk
from advisory.tables.edge_ratio import EDGE_ARRAYS, LEVELS, EdgeRatioTable
from advisory.tables.grid import GridError, TableGrid
from advisory.tables.lift import N_MAP_PARAMS, lift_correction_kernel, lift_scale_kernel
from advisory.tables.spread_table import SPREAD_ARRAYS, SpreadTable
from advisory.tables.store import (
    ATMOSPHERE_FIELDS,
    TableFileError,
    atmosphere_from_arrays,
    read_table_file,
    release_pages,
    write_table_file,
)

_REQUIRED = ("axis_altitude_m", "axis_mach_excess", "axis_fpa_rad", "axis_heading_rad",
             "axis_eta", "cutoff_mach", "phi_left", "phi_right", "cells")
#: Header keys a table needs besides ``kind``, with their JSON types.
_HEADER_KEYS: dict[str, type | tuple[type, ...]] = {
    "grid": dict, "aircraft": dict, "atmosphere": dict, "reflection_factor": (int, float)}
#: Accepted cutoff Mach values: a cutoff Mach is above 1 by definition (a boom needs a
#: supersonic ground speed of the wave front); 5 is the grid's largest Mach (grid.py).
CUTOFF_MACH_RANGE = (1.0, 5.0)
#: Accepted ground reflection factors: 1 (no reflection gain) to 2 (rigid ground; 1.9-2.0
#: is common practice, see advisory/physics/signature.py).
REFLECTION_FACTOR_RANGE = (1.0, 2.0)


#: :meth:`BoomTable.lift_args` of a table without a lift map.
_NO_LIFT = (np.zeros((1, 1, 1, 1, 1, 1)), np.zeros((0, 0)), np.zeros(6), np.zeros(2),
            np.zeros(2))


@dataclass
class Footprint:
    """One interpolated footprint (one emission point, every tabulated azimuth).

    Attributes
    ----------
    code : int
        :data:`advisory.tables.lookup.NO_BOOM`, ``OK`` or ``CLAMPED``.
    cutoff_mach : float
        Interpolated cutoff Mach for the condition.
    rows : ndarray, shape (n_eta, N_QUANTITIES)
        Per azimuth: the ``Q_*`` quantities of :mod:`advisory.tables.lookup`.
    """

    code: int
    cutoff_mach: float
    rows: np.ndarray

    @property
    def reaches_ground(self) -> bool:
        """True when the boom reaches the ground."""
        return self.code != lk.NO_BOOM


class BoomTable:
    """A boom table in memory.

    Use :meth:`load` for a file, or the constructor with a header and arrays after a
    build (:attr:`path` is then None).
    """

    def __init__(self, header: dict, arrays: dict[str, np.ndarray]) -> None:
        try:
            grid = check_contents(header, arrays)
        except TableFileError as exc:
            raise TableFileError(f"table: {exc}") from None
        self.header = header
        self.arrays = arrays
        self.grid = grid
        self.ax_alt = np.ascontiguousarray(arrays["axis_altitude_m"], dtype=np.float64)
        self.ax_mex = np.ascontiguousarray(arrays["axis_mach_excess"], dtype=np.float64)
        self.ax_fpa = np.ascontiguousarray(arrays["axis_fpa_rad"], dtype=np.float64)
        self.ax_hdg = np.ascontiguousarray(arrays["axis_heading_rad"], dtype=np.float64)
        self.eta = np.ascontiguousarray(arrays["axis_eta"], dtype=np.float64)
        self.cutoff = np.ascontiguousarray(arrays["cutoff_mach"], dtype=np.float64)
        self.cells = np.ascontiguousarray(arrays["cells"], dtype=np.float64)
        q = self.cells[..., lk.Q_TIME]  # checked finite and >= 0 (check_contents)
        #: The longest travel time of any tabulated ray, s (0 for an empty table).
        self.max_travel_time_s = float(q.max()) if q.size else 0.0
        self._lift_arrays(arrays)
        #: Cutoff-Mach sensitivities to the air below (:mod:`advisory.tables.spread_table`);
        #: None for a table built before them.
        self.spread: SpreadTable | None = (SpreadTable(arrays) if "cutoff_sens" in arrays
                                           else None)
        #: The carpet edge's ratio quantiles (:mod:`advisory.tables.edge_ratio`); None for
        #: a table built before them.
        self.edge_ratio: EdgeRatioTable | None = (EdgeRatioTable(arrays) if "edge_ratio" in
                                                  arrays else None)
        self.loaded_monotonic = time.monotonic()
        #: The file the table was loaded from (None for a table built in memory).
        self.path: str | None = None

    def _lift_arrays(self, arrays: dict[str, np.ndarray]) -> None:
        #: Each ray's age, (n_alt, n_mex, n_fpa, n_hdg, n_eta, 1) for the lookup kernel,
        #: and the lift map with its parameters (:mod:`advisory.tables.lift`); None for
        #: a table built without them (steady-flight lift only).
        self.ray_age: np.ndarray | None = None
        self.lift_map: np.ndarray | None = None
        self.lift_params: np.ndarray | None = None
        if "lift_map" not in arrays:
            return
        age = np.ascontiguousarray(arrays["ray_age"], dtype=np.float64)
        self.ray_age = age.reshape(age.shape + (1,))
        self.lift_map = np.ascontiguousarray(arrays["lift_map"], dtype=np.float64)
        self.lift_params = np.ascontiguousarray(arrays["lift_map_params"], dtype=np.float64)
        atm = self.atmosphere()
        #: Levels (m) and ln pressure for the lift area's ambient pressure.
        self.lift_z = np.ascontiguousarray(atm.z_m, dtype=np.float64)
        self.lift_ln_p = np.log(np.ascontiguousarray(atm.pressure_pa, dtype=np.float64))

    def lift_args(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(ray_age, lift_map, lift_params, lift_z, lift_ln_p) for the compiled kernels;
        placeholders of the same kinds (an empty map) without a lift map."""
        if self.ray_age is None or self.lift_map is None or self.lift_params is None:
            return _NO_LIFT
        return self.ray_age, self.lift_map, self.lift_params, self.lift_z, self.lift_ln_p

    @property
    def has_lift_map(self) -> bool:
        """True when the table carries the lift map (bank and load factor applied)."""
        return self.lift_map is not None

    # ---- I/O ---------------------------------------------------------------------------
    @classmethod
    def load(cls, path: str | Path) -> BoomTable:
        """Load and check a table file (see :mod:`advisory.tables.store`)."""
        header, arrays = read_table_file(path)
        if header.get("kind") != "boom-advisory table":
            raise TableFileError(f"table file {path}: header kind is not a boom table")
        try:
            table = cls(header, arrays)
        except TableFileError as exc:
            raise TableFileError(f"table file {path}: {str(exc).removeprefix('table: ')}") \
                from None
        table.path = str(path)
        release_pages(arrays)  # checked: only what the lookups touch stays resident
        return table

    def save(self, path: str | Path) -> str:
        """Write the table atomically; returns the payload SHA-256."""
        header = {k: v for k, v in self.header.items()
                  if k not in ("arrays", "payload_sha256", "payload_nbytes", "format_version")}
        digest = write_table_file(path, header, self.arrays)
        self.header["payload_sha256"] = digest
        return digest

    def atmosphere(self) -> Atmosphere:
        """The atmosphere the table was built from (from the payload, in full; from the
        header's description for a table without the atmosphere arrays)."""
        if "atm_z_m" in self.arrays:
            return atmosphere_from_arrays(self.arrays, self.header.get("atmosphere", {}))
        return rebuild_atmosphere(self.header["atmosphere"])

    @property
    def digest(self) -> str:
        """Payload SHA-256 (hex), or '' for a table not yet saved."""
        return str(self.header.get("payload_sha256", ""))

    @property
    def has_wind(self) -> bool:
        """True when the table was built with a heading axis (windy atmosphere)."""
        return self.ax_hdg.size > 1

    # ---- lookup ------------------------------------------------------------------------
    def footprint_into(self, out: np.ndarray, altitude_m: float, mach: float, fpa_rad: float,
                       heading_rad: float) -> tuple[int, float]:
        """Fill ``out`` (n_eta, N_QUANTITIES) for one emission point; returns (code, cutoff).

        The hot-path call: no allocation.
        """
        return lk.lookup_kernel(altitude_m, mach, fpa_rad, heading_rad, self.ax_alt, self.ax_mex,
                                self.ax_fpa, self.ax_hdg, self.cutoff, self.cells, out)

    def footprint(self, altitude_m: float, mach: float, fpa_rad: float = 0.0,
                  heading_rad: float = 0.0) -> Footprint:
        """Interpolated footprint for one emission point (allocates its result)."""
        out = np.zeros((self.eta.size, lk.N_QUANTITIES))
        if not (math.isfinite(altitude_m) and math.isfinite(mach) and math.isfinite(fpa_rad)
                and math.isfinite(heading_rad)):
            return Footprint(lk.NO_BOOM, math.nan, out)
        code, mcut = self.footprint_into(out, altitude_m, mach, fpa_rad, heading_rad)
        return Footprint(int(code), float(mcut), out)

    def apply_lift(self, rows: np.ndarray, altitude_m: float, mach: float, fpa_rad: float,
                   heading_rad: float, lift: float, bank_rad: float) -> bool:
        """Scale the overpressure of one footprint's ``rows`` (from :meth:`footprint`, in
        place) to the lift ``lift`` (over the weight) tilted by ``bank_rad``
        (:mod:`advisory.tables.lift`); False when the table has no lift map."""
        if self.ray_age is None or self.lift_map is None or self.lift_params is None:
            return False
        ages = np.zeros((1, self.eta.size, 1))
        lk.lookup_kernel(altitude_m, mach, fpa_rad, heading_rad, self.ax_alt, self.ax_mex,
                         self.ax_fpa, self.ax_hdg, self.cutoff, self.ray_age, ages[0])
        scale = np.zeros(1)
        lift_scale_kernel(np.array([altitude_m]), np.array([mach]), self.lift_z,
                          self.lift_ln_p, float(self.lift_params[5]), scale)
        lift_correction_kernel(rows[None], ages, np.array([lk.OK], dtype=np.int64),
                               np.array([lift]), np.array([bank_rad]), np.array([fpa_rad]),
                               scale, self.lift_map, self.lift_params)
        return True

    def cutoff_mach(self, altitude_m: float, fpa_rad: float = 0.0,
                    heading_rad: float = 0.0) -> float:
        """Interpolated cutoff Mach."""
        out = np.zeros((self.eta.size, lk.N_QUANTITIES))
        _, mcut = self.footprint_into(out, altitude_m, 0.0, fpa_rad, heading_rad)
        return float(mcut)

    def info_lines(self) -> list[str]:
        """Human-readable provenance."""
        h = self.header
        g = self.grid
        alts_ft = [units.m_to_ft(a) for a in g.altitudes_m]
        atm = h.get("atmosphere", {})
        ac = h.get("aircraft", {})
        lines = [
            f"table format version {h.get('format_version')}, built by boom-advisory "
            f"{h.get('package_version')} at {h.get('build_utc')} "
            f"in {h.get('build_seconds')} s",
            f"payload SHA-256 {h.get('payload_sha256')} ({h.get('payload_nbytes')} bytes)",
            f"aircraft: {ac.get('name', '?')} (length {ac.get('length_m')} m, "
            f"mass {ac.get('mass_kg')} kg)",
            f"atmosphere: {atm.get('kind')} offset {atm.get('temp_offset_k', 0.0):+.1f} K"
            + (f", {len(atm.get('levels', []))} levels from {atm.get('source')}"
               if atm.get("kind") == "profile" else ""),
            f"reflection factor {h.get('reflection_factor')}",
            f"grid: altitude {alts_ft[0]:,.0f}-{alts_ft[-1]:,.0f} ft ({len(alts_ft)} nodes), "
            f"Mach excess {g.mach_excess[0]}-{g.mach_excess[-1]} ({len(g.mach_excess)}), "
            f"Mach max {g.mach_max}, flight-path angle "
            f"{math.degrees(g.fpa_rad[0]):.1f}..{math.degrees(g.fpa_rad[-1]):.1f} deg "
            f"({len(g.fpa_rad)}), headings {len(g.headings_rad)}, azimuths {g.n_eta}, "
            f"ground {units.m_to_ft(g.ground_elevation_m):,.0f} ft",
            "lift map: bank and load factor applied to the overpressure"
            if self.has_lift_map else
            "lift map: none (a table from an earlier builder): the overpressure keeps the "
            "lift of steady, wings-level flight",
            f"cutoff sensitivities: {self.spread.sens.shape[0]} altitudes x "
            f"{self.spread.sens.shape[1]} flight-path angles x {self.spread.sens.shape[2]} "
            "headings (confidence on the cutoff Mach)" if self.spread is not None else
            "cutoff sensitivities: none (a table from an earlier builder): the Mach "
            "resolution keeps the fixed margin",
            f"edge ratio: {self.edge_ratio.ratio.shape[0]} altitudes x "
            f"{self.edge_ratio.ratio.shape[1]} headings x {self.edge_ratio.ratio.shape[2]} "
            "Mach excesses (confidence on the carpet edge)" if self.edge_ratio is not None
            else "edge ratio: none (a table from an earlier builder): the carpet edge is the "
            "table's own line",
        ]
        return lines


# ---- contents check ----------------------------------------------------------------------
def check_contents(header: dict, arrays: dict[str, np.ndarray]) -> TableGrid:
    """Check a table's header and arrays against each other; returns its grid.

    A table whose digests are valid can still be wrong inside (written by a faulty tool,
    or crafted). The lookup kernel indexes ``cells`` and ``cutoff_mach`` with indices
    formed from the axes' lengths and trusts every value, so everything it reads is
    checked here once, at load:

    * header: ``grid`` (every key, the grid's own rules), ``aircraft`` (what
      :func:`~advisory.physics.aircraft.aircraft_from_dict` accepts), ``atmosphere``
      (with its ``kind``), ``reflection_factor`` in :data:`REFLECTION_FACTOR_RANGE`;
    * every array float64; axes one-dimensional, finite, strictly ascending, equal to
      the header's grid; altitude and Mach excess at least 2 nodes (interpolated axes),
      flight-path angle and heading at least 1, heading in [0, 2 pi), ``axis_eta`` the
      grid's odd number of nodes;
    * ``cutoff_mach`` shaped (altitude, fpa, heading) with values in
      :data:`CUTOFF_MACH_RANGE`; ``phi_left`` / ``phi_right`` shaped (altitude, Mach
      excess, fpa, heading) within [-pi, pi]; ``cells`` shaped (altitude, Mach excess,
      fpa, heading, eta, N_QUANTITIES) with travel time and overpressure >= 0 and the
      edge flag in [0, 1];
    * no NaN or infinity anywhere: no cell may legitimately be NaN, a ray that does not
      reach the ground is stored as zeros with its edge flag (advisory/tables/build.py);
    * the atmosphere arrays (``atm_*``), when present: all of them, one length >= 2,
      finite, altitude ascending, temperature, pressure, density and sound speed > 0;
      when absent, the header's atmosphere description must rebuild an atmosphere;
    * the lift map (:data:`LIFT_ARRAYS`), when present: all three, ``ray_age`` shaped like
      the rays and >= 0, ``lift_map`` two-dimensional and >= 0, its parameters with
      ascending ranges and a positive area scale and weight;
    * the cutoff sensitivities (:data:`SPREAD_ARRAYS`), when present: see
      :func:`_check_spread`.
    * the edge ratio (:data:`EDGE_ARRAYS`), when present: see :func:`_check_edge_ratio`.

    Raises
    ------
    TableFileError
        One line naming the array or header key and the problem.
    """
    for key, kind in _HEADER_KEYS.items():
        v = header.get(key)
        if not isinstance(v, kind) or isinstance(v, bool):
            raise TableFileError(f"header key {key!r} is missing or not a "
                                 f"{'number' if key == 'reflection_factor' else 'JSON object'}")
    try:
        aircraft_from_dict(header["aircraft"], "table header")
    except AircraftError as exc:
        raise TableFileError(f"header aircraft: {exc}") from None
    if not isinstance(header["atmosphere"].get("kind"), str):
        raise TableFileError("header atmosphere: key 'kind' is missing or not text")
    rf = float(header["reflection_factor"])
    if not REFLECTION_FACTOR_RANGE[0] <= rf <= REFLECTION_FACTOR_RANGE[1]:
        raise TableFileError(f"header reflection_factor {rf!r} is outside "
                             f"[{REFLECTION_FACTOR_RANGE[0]:g}, {REFLECTION_FACTOR_RANGE[1]:g}]")
    missing = [k for k in _REQUIRED if k not in arrays]
    if missing:
        raise TableFileError(f"missing arrays {missing}")
    for name, a in arrays.items():
        if np.asarray(a).dtype != np.float64:
            raise TableFileError(f"array {name}: dtype {np.asarray(a).dtype} is not float64")
    n_alt = _axis(arrays, "axis_altitude_m", 2)
    n_mex = _axis(arrays, "axis_mach_excess", 2)
    n_fpa = _axis(arrays, "axis_fpa_rad", 1)
    n_hdg = _axis(arrays, "axis_heading_rad", 1)
    n_eta = _axis(arrays, "axis_eta", 3)
    _heading_axis(arrays, "axis_heading_rad")
    grid = _header_grid(header, arrays)
    _values(arrays, "cutoff_mach", (n_alt, n_fpa, n_hdg), *CUTOFF_MACH_RANGE)
    for name in ("phi_left", "phi_right"):
        _values(arrays, name, (n_alt, n_mex, n_fpa, n_hdg), -math.pi, math.pi)
    _values(arrays, "cells", (n_alt, n_mex, n_fpa, n_hdg, n_eta, lk.N_QUANTITIES),
            -math.inf, math.inf)
    cells = arrays["cells"]
    for q, what, lo, hi in ((lk.Q_TIME, "travel time", 0.0, math.inf),
                            (lk.Q_DP, "overpressure", 0.0, math.inf),
                            (lk.Q_EDGE, "edge flag", 0.0, 1.0)):
        v = cells[..., q]
        if v.min() < lo or v.max() > hi:
            raise TableFileError(f"array cells: {what} (quantity {q}) outside [{lo:g}, {hi:g}]")
    _check_atmosphere(arrays, header["atmosphere"])
    _check_lift_map(arrays, (n_alt, n_mex, n_fpa, n_hdg, n_eta))
    _check_spread(arrays)
    _check_edge_ratio(arrays)
    return grid


def _check_edge_ratio(arrays: dict[str, np.ndarray]) -> None:
    """The edge ratio (:data:`EDGE_ARRAYS`): all or none; axes ascending and finite,
    headings in [0, 2 pi), the levels this version's, every ratio in [0, 100] and
    non-decreasing over the levels."""
    if not _all_or_none(arrays, EDGE_ARRAYS, "edge ratio"):
        return
    n = [_axis(arrays, f"edge_ratio_axis_{k}", 1) for k in ("altitude_m", "heading_rad",
                                                            "mach_excess")]
    _heading_axis(arrays, "edge_ratio_axis_heading_rad")
    levels = arrays["edge_ratio_levels"]
    if levels.shape != (len(LEVELS),) or not np.allclose(levels, LEVELS):
        raise TableFileError("array edge_ratio_levels: not this version's levels "
                             "(build the table again)")
    _values(arrays, "edge_ratio", (*n, 2, len(LEVELS)), 0.0, 100.0)
    if np.any(np.diff(arrays["edge_ratio"], axis=-1) < 0.0):
        raise TableFileError("array edge_ratio: quantiles decrease over the levels")


def _check_spread(arrays: dict[str, np.ndarray]) -> None:
    """The cutoff sensitivities (:data:`SPREAD_ARRAYS`): all or none; axes ascending and
    finite, headings in [0, 2 pi), the error field's nodes this version's, derivatives
    finite and within +-1 per K or m/s."""
    if not _all_or_none(arrays, SPREAD_ARRAYS, "cutoff sensitivities"):
        return
    n = [_axis(arrays, f"cutoff_sens_axis_{k}", 1) for k in ("altitude_m", "fpa_rad",
                                                             "heading_rad")]
    _heading_axis(arrays, "cutoff_sens_axis_heading_rad")
    nodes = arrays["cutoff_sens_nodes_m"]
    if nodes.shape != NODES_M.shape or not np.array_equal(nodes, NODES_M):
        raise TableFileError("array cutoff_sens_nodes_m: not this version's error-field "
                             "nodes (build the table again)")
    _values(arrays, "cutoff_sens", (*n, N_VARIABLES * NODES_M.size), -1.0, 1.0)


#: The arrays of the lift map (:mod:`advisory.tables.lift`): all or none (a table built
#: before it has none; its overpressure then keeps the lift of steady flight).
LIFT_ARRAYS = ("ray_age", "lift_map", "lift_map_params")


def _check_lift_map(arrays: dict[str, np.ndarray], ray_shape: tuple[int, ...]) -> None:
    if not _all_or_none(arrays, LIFT_ARRAYS, "lift map"):
        return
    _values(arrays, "ray_age", ray_shape, 0.0, math.inf)
    m = arrays["lift_map"]
    if m.ndim != 2 or min(m.shape) < 2:
        raise TableFileError(f"array lift_map: shape {m.shape} is not (ages >= 2, areas >= 2)")
    _values(arrays, "lift_map", m.shape, 0.0, math.inf)
    p = arrays["lift_map_params"]
    _values(arrays, "lift_map_params", (N_MAP_PARAMS,), -math.inf, math.inf)
    if not (p[0] < p[1] and p[2] < p[3] and p[4] > 0.0 and p[5] > 0.0):
        raise TableFileError("array lift_map_params: needs ln-age and area ranges that "
                             "ascend, a positive area scale and a positive weight")


def _all_or_none(arrays: dict[str, np.ndarray], names: tuple[str, ...], what: str) -> bool:
    """Whether the optional arrays ``names`` are present: all (True) or none (False); a
    part of them is refused with one line naming what is missing."""
    present = [k for k in names if k in arrays]
    if present and len(present) != len(names):
        absent = sorted(set(names) - set(present))
        raise TableFileError(f"{what} arrays incomplete: {absent} missing beside {present}")
    return bool(present)


def _heading_axis(arrays: dict[str, np.ndarray], name: str) -> None:
    """A heading axis's nodes lie in [0, 2 pi) rad (ascending is :func:`_axis`'s check)."""
    hdg = arrays[name]
    if hdg[0] < 0.0 or hdg[-1] >= 2.0 * math.pi:
        raise TableFileError(f"array {name}: nodes must lie in [0, 2 pi) rad")


def _axis(arrays: dict[str, np.ndarray], name: str, min_nodes: int) -> int:
    a = arrays[name]
    if a.ndim != 1:
        raise TableFileError(f"array {name}: shape {a.shape} is not one-dimensional")
    if a.size < min_nodes:
        raise TableFileError(f"array {name}: {a.size} node(s); this axis needs at least "
                             f"{min_nodes}" + (" (an interpolated axis)" if min_nodes == 2
                                               else ""))
    if not np.all(np.isfinite(a)):
        raise TableFileError(f"array {name}: nodes are not finite")
    if np.any(np.diff(a) <= 0.0):
        raise TableFileError(f"array {name}: nodes must ascend strictly")
    return int(a.size)


def _header_grid(header: dict, arrays: dict[str, np.ndarray]) -> TableGrid:
    """The header's grid, checked and equal to the axis arrays."""
    d = header["grid"]
    for key in ("altitudes_m", "mach_excess", "fpa_rad", "headings_rad", "n_eta", "mach_max",
                "ground_elevation_m"):
        if key not in d:
            raise TableFileError(f"header grid: key {key!r} is missing")
    try:
        grid = TableGrid.from_dict(d)
        grid.validate()
    except GridError as exc:
        raise TableFileError(f"header {exc}") from None
    except (TypeError, ValueError) as exc:
        raise TableFileError(f"header grid: bad value ({exc})") from None
    for name, axis in grid.axes().items():
        if not np.array_equal(arrays[name], axis):
            raise TableFileError(f"array {name}: nodes differ from the header's grid")
    return grid


def _values(arrays: dict[str, np.ndarray], name: str, shape: tuple[int, ...], lo: float,
            hi: float) -> None:
    """``arrays[name]`` has ``shape`` and finite values in [lo, hi]."""
    a = arrays[name]
    if a.shape != shape:
        raise TableFileError(f"array {name}: shape {a.shape} does not match the axes "
                             f"{shape}")
    for plane in a:  # one altitude plane at a time: no temporary as big as the table
        if not np.all(np.isfinite(plane)):
            raise TableFileError(f"array {name}: values are not finite (NaN or infinity)")
        if plane.size and (plane.min() < lo or plane.max() > hi):
            raise TableFileError(f"array {name}: values outside [{lo:g}, {hi:g}]")


def _check_atmosphere(arrays: dict[str, np.ndarray], description: dict) -> None:
    names = [f"atm_{f}" for f in ATMOSPHERE_FIELDS]
    present = [n for n in names if n in arrays]
    if not present:  # the table's atmosphere comes from the header's description
        try:
            rebuild_atmosphere(description)
        except (ValueError, TypeError, KeyError, IndexError) as exc:
            raise TableFileError(f"header atmosphere: cannot be rebuilt ({exc!r})") from None
        return
    if len(present) != len(names):
        raise TableFileError(f"atmosphere arrays incomplete: missing "
                             f"{sorted(set(names) - set(present))}")
    n = arrays["atm_z_m"].shape
    for name in names:
        a = arrays[name]
        if a.ndim != 1 or a.shape != n or a.size < 2:
            raise TableFileError(f"array {name}: shape {a.shape}; the atmosphere arrays "
                                 f"share one length >= 2 ({n})")
        if not np.all(np.isfinite(a)):
            raise TableFileError(f"array {name}: values are not finite (NaN or infinity)")
        if name in ("atm_temperature_k", "atm_pressure_pa", "atm_density_kgm3",
                    "atm_sound_speed_mps") and a.min() <= 0.0:
            raise TableFileError(f"array {name}: values must be > 0")
    if np.any(np.diff(arrays["atm_z_m"]) <= 0.0):
        raise TableFileError("array atm_z_m: altitudes must ascend strictly")
