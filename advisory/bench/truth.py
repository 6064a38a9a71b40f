"""Ground truth of a flown path: where every boom lands, traced directly (no tables).

The truth is the instrument the advice is measured against, so it shares nothing with
the advisor (:mod:`advisory.tables`, :mod:`advisory.pipeline`); it uses only the
verified physics of :mod:`advisory.physics` and the WGS 84 frame of
:mod:`advisory.geo.geodesy`.

Method
------
1. **Emissions.** Every sample of the flown path is an emission (resample the path to
   the emission interval first, :meth:`FlownPath.resampled`; 0.1 s by default). At each,
   wave normals leave on the Mach cone of the instantaneous air-relative velocity
   (heading and flight-path angle, so a climb tilts the cone), every
   ``azimuth_step_deg`` around it, and are traced through the stratified moving
   atmosphere to the ground elevation (:mod:`advisory.bench.truth_kernels`, which runs
   the project's ray and signature kernels). Per ray: ground point, arrival time
   (emission time plus the ray's travel time; the bow shock is ahead of it by a part of
   the duration), steady overpressure and duration, and whether it reaches the ground.
2. **Ray tube from neighbouring emissions.** The ground map (emission time ``t``,
   azimuth ``phi``) -> ground point ``G`` has the Jacobian
   ``J = dG/dt x dG/dphi`` (2-D cross product): ``dG/dphi`` from the ray kernel (exact
   derivative of its scheme), ``dG/dt`` by differences between neighbouring emissions
   (central where both neighbours reach, one-sided otherwise). ``J`` is the ray-tube
   area per unit emission time and azimuth; the steady value ``J_s`` uses the steady
   translation of the pattern (ground velocity plus ray slope times climb rate, as the
   ray module's amplitude does). Linear acoustics scales the amplitude as
   ``sqrt(J_s / J)`` (Pierce, *Acoustics*, ASA 1989, ch. 8); that factor multiplies the
   steady ground overpressure (the ageing along the ray is kept from the steady tube:
   an approximation that issue 14 refines).
3. **Focus.** Where ``J / J_s`` changes sign between neighbouring emissions or
   neighbouring azimuths, the map folds: a caustic ("focus") lies between the two rays,
   and both are flagged. Near it the linear factor diverges; it is bounded by
   :data:`advisory.physics.signature.FOCUS_AMPLIFICATION_CAP` (5, the upper end of the
   2-5x focus-boom levels commonly quoted; value from memory), as
   :func:`advisory.physics.signature.focus_amplification` bounds it.
4. **Zones.** A boom is in a zone when it lands inside the polygon (even-odd rule, so
   holes are outside) or within the zone's margin (m) of its boundary; the exposure is
   the first arrival, the peak overpressure and whether it exceeds the zone's limit.

The flown path (samples, checks, lift and bank) is :mod:`advisory.bench.truth_path`;
the zones are :mod:`advisory.bench.truth_zones`.

This module is the bench's; the core never imports it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from advisory import units
from advisory.bench.truth_kernels import (
    N_TRUTH_COLUMNS,
    T_TRANS_X,
    T_TRANS_Y,
    trace_edge_band_kernel,
    trace_emissions_kernel,
)
from advisory.bench.truth_path import (
    FlownPath,
    TruthInputError,
    check_range,
    lift_and_bank,
)
from advisory.bench.truth_zones import TruthZone, ZoneExposure, zone_exposure
from advisory.geo.frame import LocalFrame
from advisory.physics.aircraft import Aircraft
from advisory.physics.atmosphere import Atmosphere
from advisory.physics.fastpath import (
    R_DP,
    R_DURATION,
    R_DX_DPHI,
    R_DY_DPHI,
    R_EDGE,
    R_PHI,
    R_REACHED,
    R_TIME,
    R_X,
    R_Y,
)
from advisory.physics.ffunction import f_function_parts
from advisory.physics.signature import DEFAULT_REFLECTION_FACTOR, FOCUS_AMPLIFICATION_CAP

#: Default azimuth step around the Mach cone, deg (issue 12).
DEFAULT_AZIMUTH_STEP_DEG = 1.0
#: Default number of edge-band rays each side (:attr:`TruthSettings.edge_band`): their
#: landing points about evenly spaced between the outermost grid ray and the cutoff,
#: at most about 0.6 km apart where the grid ray falls 9 km short (project choice).
DEFAULT_EDGE_BAND = 16


@dataclass(frozen=True)
class TruthSettings:
    """How finely the truth is traced.

    Attributes
    ----------
    azimuth_step_deg : float
        Spacing of the rays around the Mach cone, deg; every azimuth whose wave normal
        points down at some emission is traced (:func:`downward_azimuth_limit`).
    reflection_factor : float
        Ground reflection factor (1.9: common practice, no source).
    amplification_cap : float
        Bound of the focus amplification (value from memory, see the module notes).
    level_stride : int
        Integrate over every ``level_stride``-th node of the atmosphere grid (1: every
        node, the same numbers as ``predict``; 2, the default, on the 20 m default grid
        moves ground points by under a metre and overpressures by under 0.1 %, measured on
        the first six campaign encounters of seed 1 with the edge band, and pays for the
        band: ``bench --only truth`` gives 19.0 s with both where the band alone gave
        30.8 s, README).
    edge_band : int
        Rays traced on each side between the outermost grid ray and the lateral cutoff
        (:func:`advisory.bench.truth_kernels.trace_edge_band_kernel`; 0: none). With
        rays every 1 deg alone the outermost boom fell 3.7-5.2 km short of the carpet's
        edge in the standard atmosphere (Mach 1.2-2.0), 0.5-9.2 km on campaign
        encounters, where the edge booms carry 0.4-1.1 psf.
    """

    azimuth_step_deg: float = DEFAULT_AZIMUTH_STEP_DEG
    reflection_factor: float = DEFAULT_REFLECTION_FACTOR
    amplification_cap: float = FOCUS_AMPLIFICATION_CAP
    level_stride: int = 2
    edge_band: int = DEFAULT_EDGE_BAND

    def band_fractions(self) -> np.ndarray:
        """Positions of the edge band's rays between the grid ray (0) and the cutoff (1):
        ``1 - (1 - k / K)^2``, k = 1..K, the last a hair inside the cutoff."""
        k = int(self.edge_band)
        if k != self.edge_band or not 0 <= k <= 256:
            raise TruthInputError(f"edge_band: {self.edge_band} must be a whole number 0..256")
        u = np.arange(1, k + 1, dtype=np.float64) / max(k, 1)
        return np.minimum(1.0 - (1.0 - u) ** 2, 1.0 - 1e-6)

    def azimuths_rad(self, limit_rad: float = math.pi) -> np.ndarray:
        """Ray azimuths, rad: multiples of the step (0 included) with ``|phi| < limit_rad``."""
        step = self.azimuth_step_deg
        if not (math.isfinite(step) and 0.0 < step <= 90.0):
            raise TruthInputError(f"azimuth_step_deg: {step} must be in (0, 90]")
        k = int(math.floor(180.0 / step + 1e-9))
        phi = np.radians(np.arange(-k, k + 1) * step)
        return phi[np.abs(phi) < min(limit_rad, math.pi) - 1e-12]


def downward_azimuth_limit(path: FlownPath) -> float:
    """Largest ray azimuth (rad) whose wave normal points down at some supersonic emission.

    On the Mach cone the normal's vertical component is
    ``sin(gamma)/M - sqrt(1 - 1/M^2) cos(gamma) cos(phi)`` (see
    :func:`advisory.physics.rays.emission_slowness`); it is negative for
    ``cos(phi) > tan(gamma) / (M sqrt(1 - 1/M^2))``: 90 deg in level flight, more in a dive.
    """
    sup = path.mach > 1.0
    if not np.any(sup):
        return 0.0
    m = path.mach[sup]
    cone = np.sqrt(1.0 - 1.0 / m**2)
    bound = np.tan(path.fpa_rad[sup]) / (m * np.maximum(cone, 1e-12))
    return float(np.max(np.arccos(np.clip(bound, -1.0, 1.0))))


@dataclass(frozen=True)
class GroundMap:
    """Every ray of every emission at one ground elevation; arrays are (E, P).

    Attributes
    ----------
    ground_elevation_m : float
        Elevation the rays were traced to, m.
    emission_time_s : ndarray (E,)
    azimuth_rad : ndarray (P,)
    reached : ndarray of bool
        The ray reaches the ground.
    east_m, north_m : ndarray
        Ground point in the path's frame, m (NaN where not reached).
    arrival_s : ndarray
        Emission time plus the ray's travel time, s.
    overpressure_pa : ndarray
        Ground overpressure with the ray-tube amplification, Pa.
    steady_overpressure_pa : ndarray
        The same without it (the steady tube), Pa.
    duration_s : ndarray
        Time between bow and tail shocks, s.
    tube_ratio : ndarray
        ``J / J_s``: actual over steady ray-tube area (NaN where no neighbour reaches;
        negative past a fold).
    amplification : ndarray
        Bounded factor applied to the steady overpressure.
    focus : ndarray of bool
        A fold of the ground map lies between this ray and a neighbour (in emission
        time or in azimuth).
    edge : ndarray of bool
        Grazing ray near the lateral cutoff (signature flag).
    band : GroundMap or None
        The edge band (:attr:`TruthSettings.edge_band`): the same fields over (E, 2K)
        rays, ``azimuth_rad`` (E, 2K) per emission (side 0's K rays, then side 1's);
        each ray's amplification, focus and tube ratio those of the outermost grid ray
        of its emission on its side (:func:`_band_side` says why); None without one.
    """

    ground_elevation_m: float
    emission_time_s: np.ndarray
    azimuth_rad: np.ndarray
    reached: np.ndarray
    east_m: np.ndarray
    north_m: np.ndarray
    arrival_s: np.ndarray
    overpressure_pa: np.ndarray
    steady_overpressure_pa: np.ndarray
    duration_s: np.ndarray
    tube_ratio: np.ndarray
    amplification: np.ndarray
    focus: np.ndarray
    edge: np.ndarray
    band: GroundMap | None = None

    def events(self, frame: LocalFrame | None = None) -> BoomEvents:
        """The rays that reach the ground (the edge band's too) as boom events, in order
        of arrival."""
        if self.band is not None:
            return _merged_events(self._events(frame), self.band._events(frame))
        return self._events(frame)

    def _events(self, frame: LocalFrame | None) -> BoomEvents:
        ie, ip = np.nonzero(self.reached)
        order = np.argsort(self.arrival_s[ie, ip], kind="stable")
        ie, ip = ie[order], ip[order]
        az = self.azimuth_rad[ie, ip] if self.azimuth_rad.ndim == 2 else self.azimuth_rad[ip]
        east, north = self.east_m[ie, ip], self.north_m[ie, ip]
        lat = lon = np.full(ie.size, math.nan)
        if frame is not None and ie.size:
            la, lo = frame.from_enu(east, north)
            lat, lon = np.degrees(la), np.degrees(lo)
        return BoomEvents(
            ground_elevation_m=self.ground_elevation_m,
            emission_time_s=self.emission_time_s[ie], azimuth_rad=az,
            arrival_s=self.arrival_s[ie, ip], east_m=east, north_m=north,
            lat_deg=np.asarray(lat), lon_deg=np.asarray(lon),
            overpressure_psf=self.overpressure_pa[ie, ip] / units.PSF,
            duration_ms=self.duration_s[ie, ip] * 1000.0,
            focus=self.focus[ie, ip], amplification=self.amplification[ie, ip],
            edge=self.edge[ie, ip],
        )


@dataclass(frozen=True)
class BoomEvents:
    """Ground boom events (one per ray that reaches the ground), sorted by arrival.

    Arrays of equal length: ``emission_time_s``, ``azimuth_rad``, ``arrival_s`` (s),
    ``east_m``, ``north_m`` (m, local frame), ``lat_deg``, ``lon_deg`` (WGS 84; NaN
    without a frame), ``overpressure_psf``, ``duration_ms``, ``focus``,
    ``amplification``, ``edge``.
    """

    ground_elevation_m: float
    emission_time_s: np.ndarray
    azimuth_rad: np.ndarray
    arrival_s: np.ndarray
    east_m: np.ndarray
    north_m: np.ndarray
    lat_deg: np.ndarray
    lon_deg: np.ndarray
    overpressure_psf: np.ndarray
    duration_ms: np.ndarray
    focus: np.ndarray
    amplification: np.ndarray
    edge: np.ndarray

    def __len__(self) -> int:
        return int(self.arrival_s.size)


def _grid_axes(path: FlownPath) -> tuple[np.ndarray, np.ndarray]:
    """Frame directions of true east and true north at each emission (unit vectors, (E, 2)).

    Without a frame they are the axes themselves; with one, the meridian convergence turns
    them (the frame's scale differs from 1 by < 0.1 % within 500 km and is ignored).
    """
    e = np.tile([1.0, 0.0], (path.size, 1))
    n = np.tile([0.0, 1.0], (path.size, 1))
    if path.frame is not None:
        for axis, az in ((e, 0.5 * math.pi), (n, 0.0)):
            b = np.asarray(path.frame.azimuth_to_grid(path.east_m, path.north_m,
                                                      np.full(path.size, az)))
            axis[:, 0], axis[:, 1] = np.sin(b), np.cos(b)
    return e, n


def _to_frame(ax_e: np.ndarray, ax_n: np.ndarray, x: np.ndarray, y: np.ndarray
              ) -> tuple[np.ndarray, np.ndarray]:
    """Rotate per-emission east/north vectors (E, P) into the path's frame."""
    if np.all(ax_e[:, 0] == 1.0) and np.all(ax_n[:, 1] == 1.0):
        return x, y  # no frame: the axes are east and north already
    return (x * ax_e[:, :1] + y * ax_n[:, :1], x * ax_e[:, 1:] + y * ax_n[:, 1:])


def emission_derivative(t: np.ndarray, values: np.ndarray, ok: np.ndarray) -> np.ndarray:
    """d(values)/dt along axis 0 from neighbours that are ``ok``: central where both are,
    one-sided where one is, NaN where none is (common practice, no source)."""
    d = np.full(values.shape, math.nan)
    if t.size < 2:
        return d
    dt = np.diff(t)[:, None]
    fwd = (values[1:] - values[:-1]) / dt
    both = ok[1:] & ok[:-1]
    fwd = np.where(both, fwd, math.nan)
    central = (values[2:] - values[:-2]) / (t[2:] - t[:-2])[:, None]
    c_ok = ok[2:] & ok[:-2] & ok[1:-1]
    d[1:-1] = np.where(c_ok, central, d[1:-1])
    back_ok = np.isnan(d[1:]) & both
    d[1:] = np.where(back_ok, fwd, d[1:])
    fwd_ok = np.isnan(d[:-1]) & both
    d[:-1] = np.where(fwd_ok, fwd, d[:-1])
    return np.where(ok, d, math.nan)


def fold_flags(ratio: np.ndarray) -> np.ndarray:
    """True at both rays of every pair of neighbours, in emission time or in azimuth,
    whose ``J / J_s`` differ in sign: the ground map folds between them (a caustic).

    Accelerations fold it between emissions; a steady turn folds it between azimuths
    (the pattern turns rigidly about the turn centre and envelops a circle).
    """
    s = np.sign(ratio)
    out = np.zeros(ratio.shape, dtype=bool)
    for axis in (0, 1):
        a = np.moveaxis(s, axis, 0)
        o = np.moveaxis(out, axis, 0)
        flip = (a[1:] * a[:-1]) < 0.0
        o[1:] |= flip
        o[:-1] |= flip
    return out


def amplification_of(ratio: np.ndarray, cap: float = FOCUS_AMPLIFICATION_CAP) -> np.ndarray:
    """Bounded amplitude factor ``min(sqrt(1 / |J / J_s|), cap)`` for each tube ratio.

    The array form of :func:`advisory.physics.signature.focus_amplification` with a unit
    steady area (the test suite holds the two together); 1 where the ratio is NaN.
    """
    r = np.abs(np.asarray(ratio, dtype=np.float64))
    amp = np.ones(r.shape)
    known = np.isfinite(r)
    with np.errstate(divide="ignore"):
        amp[known] = np.minimum(1.0 / np.sqrt(r[known]), cap)
    return amp


def trace_ground_map(path: FlownPath, atmosphere: Atmosphere, aircraft: Aircraft,
                     ground_elevation_m: float = 0.0,
                     settings: TruthSettings | None = None) -> GroundMap:
    """Trace every emission of ``path`` to ``ground_elevation_m`` (see the module notes).

    Raises
    ------
    TruthInputError
        A path value or setting outside what the physics accepts (names field and index).
    """
    settings = settings or TruthSettings()
    phis = settings.azimuths_rad(downward_azimuth_limit(path))
    stride = int(settings.level_stride)
    if stride < 1 or stride != settings.level_stride:
        raise TruthInputError(f"level_stride: {settings.level_stride} must be a whole number >= 1")
    z = atmosphere.z_m[::stride]
    check_range("altitude_m", path.altitude_m, float(z[0]), float(z[-1]))
    if not (z[0] <= ground_elevation_m <= z[-1]):
        raise TruthInputError(f"ground_elevation_m: {ground_elevation_m} is outside "
                              f"[{z[0]:.0f}, {z[-1]:.0f}] m")
    load, bank = lift_and_bank(path, atmosphere)
    check_range("load_factor", load, 0.0, 9.0)
    lift = aircraft.weight_n * load * np.cos(path.fpa_rad)
    zz, c, wx, wy, rho, p = (a[::stride].copy() for a in atmosphere.arrays())
    parts = f_function_parts(aircraft)
    out = np.empty((path.size, phis.size, N_TRUTH_COLUMNS))
    trace_emissions_kernel(path.altitude_m, path.mach, path.heading_rad, path.fpa_rad, lift,
                           np.ascontiguousarray(bank, dtype=np.float64),
                           float(ground_elevation_m), phis, zz, c, wx, wy, np.log(rho),
                           np.log(p), parts.y_m, parts.f_volume, parts.area_volume,
                           parts.f_lift_unit, parts.area_lift_unit,
                           float(settings.reflection_factor), out)
    grid = _assemble(path, phis, float(ground_elevation_m), out, settings)
    fractions = settings.band_fractions()
    if fractions.size == 0:
        return grid
    band = np.empty((path.size, 2, fractions.size, N_TRUTH_COLUMNS))
    trace_edge_band_kernel(path.altitude_m, path.mach, path.heading_rad, path.fpa_rad, lift,
                           np.ascontiguousarray(bank, dtype=np.float64),
                           float(ground_elevation_m), phis, out, zz, c, wx, wy, np.log(rho),
                           np.log(p), parts.y_m, parts.f_volume, parts.area_volume,
                           parts.f_lift_unit, parts.area_lift_unit,
                           float(settings.reflection_factor), fractions, band)
    sides = [_band_side(path, band[:, k], grid, k, float(ground_elevation_m), settings)
             for k in range(2)]
    j = {f: np.concatenate([getattr(sides[0], f), getattr(sides[1], f)], axis=1)
         for f in _MAP_ARRAYS}
    band_map = GroundMap(
        ground_elevation_m=float(ground_elevation_m), emission_time_s=path.time_s.copy(),
        azimuth_rad=j["azimuth_rad"], reached=j["reached"], east_m=j["east_m"],
        north_m=j["north_m"], arrival_s=j["arrival_s"], overpressure_pa=j["overpressure_pa"],
        steady_overpressure_pa=j["steady_overpressure_pa"], duration_s=j["duration_s"],
        tube_ratio=j["tube_ratio"], amplification=j["amplification"], focus=j["focus"],
        edge=j["edge"])
    return replace(grid, band=band_map)


def _band_side(path: FlownPath, out: np.ndarray, grid: GroundMap, side: int, zg: float,
               settings: TruthSettings) -> GroundMap:
    """One side of the edge band as a map: its rays placed as the grid's, each with the
    amplification and focus of the outermost grid ray of its emission on that side (a
    time difference at a fixed band ray is not a ray tube: the band's rays move with the
    cutoff, and near grazing the landing point's second derivative in azimuth is large,
    so differences across a moving band read folds that are not there)."""
    m = _assemble(path, out[..., R_PHI], zg, out, settings)
    reached = grid.reached
    cols = np.arange(reached.shape[1])
    has = reached.any(axis=1)
    j = np.where(reached, cols[None, :], -1).max(axis=1) if side == 1 else \
        np.where(reached, cols[None, :], reached.shape[1]).min(axis=1)
    j = np.where(has, j, 0)
    rows = np.arange(reached.shape[0])
    amp = np.where(has, grid.amplification[rows, j], 1.0)[:, None]
    focus = (has & grid.focus[rows, j])[:, None]
    ratio = np.where(has, grid.tube_ratio[rows, j], math.nan)[:, None]
    steady = m.steady_overpressure_pa
    return replace(m, overpressure_pa=steady * amp,
                   amplification=np.broadcast_to(amp, steady.shape).copy(),
                   tube_ratio=np.broadcast_to(ratio, steady.shape).copy(),
                   focus=np.broadcast_to(focus, steady.shape) & m.reached)


#: The (E, P) arrays of a :class:`GroundMap`.
_MAP_ARRAYS = ("azimuth_rad", "reached", "east_m", "north_m", "arrival_s", "overpressure_pa",
               "steady_overpressure_pa", "duration_s", "tube_ratio", "amplification",
               "focus", "edge")


def _merged_events(a: BoomEvents, b: BoomEvents) -> BoomEvents:
    """Two sets of events of one ground elevation as one, in order of arrival."""
    if len(b) == 0:
        return a
    order = np.argsort(np.concatenate([a.arrival_s, b.arrival_s]), kind="stable")
    return BoomEvents(ground_elevation_m=a.ground_elevation_m, **{
        f: np.concatenate([getattr(a, f), getattr(b, f)])[order] for f in _EVENT_ARRAYS})


#: The arrays of :class:`BoomEvents`.
_EVENT_ARRAYS = ("emission_time_s", "azimuth_rad", "arrival_s", "east_m", "north_m",
                 "lat_deg", "lon_deg", "overpressure_psf", "duration_ms", "focus",
                 "amplification", "edge")


def _assemble(path: FlownPath, phis: np.ndarray, zg: float, out: np.ndarray,
              settings: TruthSettings) -> GroundMap:
    """Ground points in the frame, the ray tube from neighbours, focus and amplitude."""
    reached = out[..., R_REACHED] > 0.5
    ax_e, ax_n = _grid_axes(path)
    ox, oy = _to_frame(ax_e, ax_n, out[..., R_X], out[..., R_Y])
    east = np.where(reached, path.east_m[:, None] + ox, math.nan)
    north = np.where(reached, path.north_m[:, None] + oy, math.nan)
    gx, gy = _to_frame(ax_e, ax_n, out[..., R_DX_DPHI], out[..., R_DY_DPHI])
    sx, sy = _to_frame(ax_e, ax_n, out[..., T_TRANS_X], out[..., T_TRANS_Y])
    tx = emission_derivative(path.time_s, np.nan_to_num(east), reached)
    ty = emission_derivative(path.time_s, np.nan_to_num(north), reached)
    j_actual = tx * gy - ty * gx
    j_steady = sx * gy - sy * gx
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(reached & (j_steady != 0.0), j_actual / j_steady, math.nan)
    amp = amplification_of(ratio, settings.amplification_cap)
    steady = np.where(reached, out[..., R_DP], 0.0)
    return GroundMap(
        ground_elevation_m=zg, emission_time_s=path.time_s.copy(), azimuth_rad=phis,
        reached=reached, east_m=east, north_m=north,
        arrival_s=np.where(reached, path.time_s[:, None] + out[..., R_TIME], math.nan),
        overpressure_pa=steady * amp, steady_overpressure_pa=steady,
        duration_s=np.where(reached, out[..., R_DURATION], 0.0), tube_ratio=ratio,
        amplification=amp, focus=fold_flags(ratio) & reached,
        edge=reached & (out[..., R_EDGE] > 0.5),
    )


@dataclass(frozen=True)
class Truth:
    """Result of :func:`trace_truth`: events per ground elevation and zone exposures."""

    maps: dict[float, GroundMap]
    events: dict[float, BoomEvents]
    exposures: list[ZoneExposure]


def trace_truth(path: FlownPath, atmosphere: Atmosphere, aircraft: Aircraft,
                zones: list[TruthZone] | tuple[TruthZone, ...] = (),
                ground_elevations_m: list[float] | tuple[float, ...] = (),
                settings: TruthSettings | None = None) -> Truth:
    """Ground truth of ``path``: every emission traced to every zone's ground elevation
    (and to each of ``ground_elevations_m``); boom events and zone exposures.

    With neither zones nor elevations the path is traced to sea level.
    """
    levels = sorted({float(z.ground_elevation_m) for z in zones} | set(ground_elevations_m))
    levels = levels or [0.0]
    maps = {zg: trace_ground_map(path, atmosphere, aircraft, zg, settings) for zg in levels}
    events = {zg: m.events(path.frame) for zg, m in maps.items()}
    exposures = []
    for z in zones:
        ev = events[float(z.ground_elevation_m)]
        exposures.append(zone_exposure(z, ev.east_m, ev.north_m, ev.arrival_s,
                                       ev.overpressure_psf, ev.focus))
    return Truth(maps, events, exposures)
