"""How well the air below the aircraft is known: a spread model for temperature and wind.

The aircraft measures the air at its own level; the air between it and the ground comes
from a planning atmosphere (a loaded forecast, else the U.S. Standard Atmosphere 1976) and
is never known exactly. Whether and where the boom reaches the ground depends on that air
(the cutoff Mach is the largest effective sound speed below the aircraft over the one at
the aircraft), so the tool carries how wrong it may be.

The model
    The error of the known atmosphere, ``delta = truth - known`` in temperature (K) and
    wind toward east and north (m/s), is a Gaussian field given at fixed height nodes
    :data:`NODES_M` (above mean sea level) and linear between them (finer structure is not
    modelled). Two parts:

    * the planning atmosphere's error ``d_b`` at the nodes: from an ensemble file (the
      members' sample covariance about their mean), else the default spread below;
    * the live measurement at flight level. The advisor merges what it measures into the
      planning atmosphere (:mod:`advisory.physics.atmosphere_merge`): the known profile is
      ``base(z) + (measured - base(z_a)) f(z)``, ``f`` the merge's fade weight (1 at the
      aircraft's height ``z_a``, 0 from :data:`~advisory.physics.atmosphere_merge.BLEND_M`
      away). Its error against the truth is therefore, for each variable,
      ``delta(z) = d_b(z) - f(z) d_b(z_a) - f(z) e_m``, with ``e_m`` the measurement error;
      covariance ``C = A C_b A^T + sigma_m^2 f f^T``, ``A = I - f a^T`` (``a`` interpolates
      the node values at ``z_a``). At the aircraft the error is the measurement's alone.

The default spread (every number an engineering choice; the magnitudes are values from
memory of short-range forecast verification against radiosondes, not from a cited table)
    Temperature: 1.0-1.5 K in the free atmosphere (largest near the tropopause), plus a
    surface layer: ``sigma_T(z) = sigma_free(z) + (sigma_sfc - sigma_free(0)) exp(-h/H)``,
    ``h`` the height above the ground, ``H`` = :data:`SURFACE_LAYER_M`, ``sigma_sfc`` =
    :data:`DEFAULT_SURFACE_TEMP_SIGMA_K` (``--surface-temp-sigma-c`` sets it). Wind, per
    component: 2 m/s near the ground rising to 4.2 m/s at jet level (``--wind-sigma-kt``
    sets one value at every height). Vertical correlation ``exp(-|dz| / L)``, ``L`` =
    :data:`TEMP_CORRELATION_M` and :data:`WIND_CORRELATION_M`; east and north independent
    and alike (so the wind error has no preferred direction). Measurement at flight level:
    :data:`MEASURED_TEMP_SIGMA_K`, :data:`MEASURED_WIND_SIGMA_MPS` per component.

Sensitivities of the carpet to each node's value live in the table
(:mod:`advisory.tables.spread_table`); this module only says how large and how correlated
the node errors are, and draws samples of them for Monte Carlo.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass, field
from pathlib import Path
from statistics import NormalDist

import numpy as np

from advisory.physics.atmosphere import (
    GAMMA,
    R_AIR,
    Atmosphere,
    AtmosphereError,
    _hydrostatic_pressure,
    atmosphere_from_levels,
)
from advisory.physics.atmosphere_merge import BLEND_M, _fade
from advisory.physics.profile_file import level_from_row

__all__ = ["NODES_M", "N_VARIABLES", "SpreadModel", "SpreadError", "default_spread",
           "load_ensemble", "perturbed", "wind_along_cross_to_east_north"]

#: Height nodes of the error field, m above mean sea level: closer near the ground,
#: where the surface layer's error lives and the cutoff is decided.
NODES_M = np.array([0.0, 500.0, 1000.0, 2000.0, 3000.0, 4500.0, 6000.0, 8000.0, 10000.0,
                    12000.0, 14000.0, 16000.0, 18000.0, 20000.0, 22500.0, 25000.0])
#: Variables of the field, in this order: temperature, wind east, wind north.
N_VARIABLES = 3
_NORMAL = NormalDist()
#: Free-atmosphere temperature error at the nodes, K (engineering choice).
FREE_TEMP_SIGMA_K = np.array([1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.1, 1.3, 1.5, 1.4, 1.2,
                              1.2, 1.2, 1.2, 1.2])
#: Wind error per component at the nodes, m/s (engineering choice).
WIND_SIGMA_MPS = np.array([2.0, 2.2, 2.4, 2.6, 2.8, 3.0, 3.2, 3.6, 4.0, 4.2, 3.8, 3.2, 2.8,
                           2.6, 2.6, 2.6])
#: Surface temperature error, K (engineering choice).
DEFAULT_SURFACE_TEMP_SIGMA_K = 2.0
#: E-folding depth of the surface layer's extra temperature error, m (engineering choice).
SURFACE_LAYER_M = 800.0
#: Vertical correlation lengths, m (engineering choices).
TEMP_CORRELATION_M = 1500.0
WIND_CORRELATION_M = 2000.0
#: Error of the air data at flight level: static temperature, K, and wind per component,
#: m/s (values from memory for corrected probe temperature and air-data/inertial wind).
MEASURED_TEMP_SIGMA_K = 1.0
MEASURED_WIND_SIGMA_MPS = 1.5
#: Fewest members an ensemble file must hold.
MIN_MEMBERS = 3


class SpreadError(ValueError):
    """A spread setting or ensemble file that cannot be used; names the field and value."""


@dataclass(frozen=True, eq=False)
class SpreadModel:
    """The planning atmosphere's error covariance at the nodes, and the measurement error.

    Attributes
    ----------
    background : ndarray, shape (3 n, 3 n)
        Covariance of ``d_b`` at :data:`NODES_M`, variables in blocks (temperature K, wind
        east m/s, wind north m/s).
    measured_temp_sigma_k, measured_wind_sigma_mps : float
        Error of the live measurement at flight level.
    source : str
        What the spread came from (printed by the commands and stored in records).
    """

    background: np.ndarray
    measured_temp_sigma_k: float = MEASURED_TEMP_SIGMA_K
    measured_wind_sigma_mps: float = MEASURED_WIND_SIGMA_MPS
    source: str = "default spread"
    _cache: dict = field(default_factory=dict, repr=False)

    @property
    def n_nodes(self) -> int:
        """Nodes per variable."""
        return NODES_M.size

    def covariance(self, altitude_m: float) -> np.ndarray:
        """Covariance of ``delta`` at the nodes for an aircraft at ``altitude_m`` (see the
        module notes), shape (3 n, 3 n); cached by altitude to the metre."""
        key = round(float(altitude_m))
        hit = self._cache.get(key)
        if hit is not None:
            return hit
        n = self.n_nodes
        f = _fade(np.abs(NODES_M - key), BLEND_M)
        a = _interp_row(float(key))
        blk = np.eye(n) - np.outer(f, a)
        big = np.zeros((3 * n, 3 * n))
        for v in range(N_VARIABLES):
            big[v * n:(v + 1) * n, v * n:(v + 1) * n] = blk
        cov = big @ self.background @ big.T
        sig_m = (self.measured_temp_sigma_k, self.measured_wind_sigma_mps,
                 self.measured_wind_sigma_mps)
        for v in range(N_VARIABLES):
            cov[v * n:(v + 1) * n, v * n:(v + 1) * n] += sig_m[v] ** 2 * np.outer(f, f)
        cov = 0.5 * (cov + cov.T)
        if len(self._cache) > 4096:
            self._cache.clear()
        self._cache[key] = cov
        return cov

    def sample(self, rng: np.random.Generator, altitude_m: float, count: int) -> np.ndarray:
        """``count`` draws of ``delta`` at the nodes, shape (count, 3, n)."""
        cov = self.covariance(altitude_m)
        w, v = np.linalg.eigh(cov)
        root = v * np.sqrt(np.clip(w, 0.0, None))
        z = rng.standard_normal((count, cov.shape[0]))
        return (z @ root.T).reshape(count, N_VARIABLES, self.n_nodes)

    def sample_lhs(self, altitude_m: float, count: int, seed: int) -> np.ndarray:
        """``count`` Latin-hypercube draws of ``delta`` at the nodes, shape (count, 3, n):
        each principal axis of the covariance's normal quantiles stratified (common
        practice for variance reduction, McKay, Beckman and Conover, Technometrics 21,
        1979)."""
        cov = self.covariance(altitude_m)
        w, v = np.linalg.eigh(cov)
        root = v * np.sqrt(np.clip(w, 0.0, None))
        rng = np.random.default_rng(seed)
        dim = cov.shape[0]
        u = (np.argsort(rng.random((dim, count)), axis=1) + rng.random((dim, count))) / count
        inv = np.vectorize(_NORMAL.inv_cdf)
        z = inv(np.clip(u, 1e-12, 1.0 - 1e-12)).T
        return (z @ root.T).reshape(count, N_VARIABLES, self.n_nodes)

    def sigma_at(self, altitude_m: float, z_m: float) -> tuple[float, float]:
        """Standard deviation of the temperature (K) and of one wind component (m/s) at
        height ``z_m`` (the east component; alike north in the default spread)."""
        cov = self.covariance(altitude_m)
        n = self.n_nodes
        a = _interp_row(z_m)
        t = float(a @ cov[:n, :n] @ a)
        e = float(a @ cov[n:2 * n, n:2 * n] @ a)
        return math.sqrt(max(t, 0.0)), math.sqrt(max(e, 0.0))


def _interp_row(z_m: float) -> np.ndarray:
    """Weights that interpolate node values linearly at ``z_m`` (held beyond the ends)."""
    w = np.zeros(NODES_M.size)
    z = min(max(z_m, float(NODES_M[0])), float(NODES_M[-1]))
    j = int(np.searchsorted(NODES_M, z, side="right")) - 1
    j = min(max(j, 0), NODES_M.size - 2)
    u = (z - NODES_M[j]) / (NODES_M[j + 1] - NODES_M[j])
    w[j], w[j + 1] = 1.0 - u, u
    return w


def _correlated(sigma: np.ndarray, length_m: float) -> np.ndarray:
    """``sigma_i sigma_j exp(-|z_i - z_j| / L)`` (positive definite for L > 0)."""
    rho = np.exp(-np.abs(NODES_M[:, None] - NODES_M[None, :]) / length_m)
    return sigma[:, None] * sigma[None, :] * rho


def _positive(name: str, value: float, hi: float) -> float:
    if not (isinstance(value, (int, float)) and math.isfinite(value) and 0.0 <= value <= hi):
        raise SpreadError(f"{name}: {value!r} must be a number from 0 to {hi:g}")
    return float(value)


def default_spread(surface_temp_sigma_k: float | None = None,
                   wind_sigma_mps: float | None = None,
                   ground_elevation_m: float = 0.0) -> SpreadModel:
    """The default spread (module notes), with the two overrides of the commands.

    Parameters
    ----------
    surface_temp_sigma_k : float, optional
        Temperature error at the ground, K (0-20); default
        :data:`DEFAULT_SURFACE_TEMP_SIGMA_K`.
    wind_sigma_mps : float, optional
        Wind error per component at every height, m/s (0-50); default the profile
        :data:`WIND_SIGMA_MPS`.
    ground_elevation_m : float
        Ground elevation, m: the surface layer sits on it.
    """
    sfc = DEFAULT_SURFACE_TEMP_SIGMA_K if surface_temp_sigma_k is None else _positive(
        "surface temperature sigma (K)", surface_temp_sigma_k, 20.0)
    h = np.clip(NODES_M - ground_elevation_m, 0.0, None)
    sig_t = FREE_TEMP_SIGMA_K + (sfc - FREE_TEMP_SIGMA_K[0]) * np.exp(-h / SURFACE_LAYER_M)
    sig_t = np.clip(sig_t, 0.0, None)
    sig_w = WIND_SIGMA_MPS if wind_sigma_mps is None else np.full(
        NODES_M.size, _positive("wind sigma (m/s)", wind_sigma_mps, 50.0))
    n = NODES_M.size
    bg = np.zeros((3 * n, 3 * n))
    bg[:n, :n] = _correlated(sig_t, TEMP_CORRELATION_M)
    bg[n:2 * n, n:2 * n] = _correlated(sig_w, WIND_CORRELATION_M)
    bg[2 * n:, 2 * n:] = _correlated(sig_w, WIND_CORRELATION_M)
    parts = [f"surface temperature {sfc:.2f} K"]
    parts.append("wind by height" if wind_sigma_mps is None
                 else f"wind {float(wind_sigma_mps):.2f} m/s per component")
    return SpreadModel(bg, source="default spread (" + ", ".join(parts) + ")")


def load_ensemble(path: str | Path) -> SpreadModel:
    """A spread from an ensemble file: a CSV of member profiles.

    Columns as a profile file (:func:`advisory.physics.profile_file.load_profile`: ``alt_ft``
    or ``alt_m``; ``temp_c`` or ``temp_k``; optional wind) plus ``member`` (any label);
    each member's rows ascend in altitude. The background covariance is the members'
    sample covariance (``N - 1`` in the denominator) at the nodes about their mean.

    Raises
    ------
    SpreadError
        Unreadable file, a bad number, fewer than :data:`MIN_MEMBERS` members, or a member
        profile that the profile builder refuses; the message names the file, row or member.
    """
    path = Path(path)
    where = f"ensemble file {path}"
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise SpreadError(f"{where}: cannot read ({exc})") from exc
    members: dict[str, list[dict[str, float]]] = {}
    reader = csv.DictReader(line for line in text.splitlines() if not line.startswith("#"))
    if reader.fieldnames is None or "member" not in [f.strip() for f in reader.fieldnames]:
        raise SpreadError(f"{where}: needs a member column beside the profile columns")
    for i, raw in enumerate(reader):
        row: dict[str, float] = {}
        label = ""
        for k, v in raw.items():
            if k is None or v is None or not k.strip():
                continue
            if k.strip() == "member":
                label = v.strip()
                continue
            try:
                row[k.strip()] = float(v)
            except ValueError as exc:
                raise SpreadError(f"{where}: row {i + 1}: {k.strip()} = {v!r} is not a "
                                  "number") from exc
            if not math.isfinite(row[k.strip()]):
                raise SpreadError(f"{where}: row {i + 1}: {k.strip()} = {v!r} is not finite")
        members.setdefault(label, []).append(row)
    if len(members) < MIN_MEMBERS:
        raise SpreadError(f"{where}: {len(members)} member(s); needs at least {MIN_MEMBERS}")
    values = []
    for label, rows in members.items():
        try:
            levels = [level_from_row(r, f"{where}: member {label!r}") for r in rows]
            atm = atmosphere_from_levels(levels, source=f"{where} member {label}")
        except AtmosphereError as exc:
            raise SpreadError(f"{where}: member {label!r}: {exc}") from exc
        values.append(np.concatenate([np.interp(NODES_M, atm.z_m, x) for x in
                                      (atm.temperature_k, atm.wind_east_mps,
                                       atm.wind_north_mps)]))
    cov = np.cov(np.array(values), rowvar=False, ddof=1)
    return SpreadModel(np.atleast_2d(cov), source=f"{where} ({len(members)} members)")


def wind_along_cross_to_east_north(along: float, cross: float, heading_rad: float
                                   ) -> tuple[float, float]:
    """East and north of a wind given along the heading and across it (to the right)."""
    sh, ch = math.sin(heading_rad), math.cos(heading_rad)
    return along * sh + cross * ch, along * ch - cross * sh


def perturbed(atm: Atmosphere, delta: np.ndarray, source: str = "perturbed") -> Atmosphere:
    """``atm`` plus a node error field ``delta`` (shape (3, n): K, m/s east, m/s north),
    linear between nodes; pressure from the hydrostatic equation from ``atm``'s lowest
    node (U.S. Standard Atmosphere 1976, eq. 33a), density from the ideal-gas law."""
    z = atm.z_m
    d = np.asarray(delta, dtype=np.float64).reshape(N_VARIABLES, NODES_M.size)
    t = atm.temperature_k + np.interp(z, NODES_M, d[0])
    if not np.all(t > 100.0):
        raise SpreadError(f"perturbed temperature: {float(t.min()):.1f} K is below 100 K")
    east = atm.wind_east_mps + np.interp(z, NODES_M, d[1])
    north = atm.wind_north_mps + np.interp(z, NODES_M, d[2])
    p = _hydrostatic_pressure(z, t, float(z[0]), float(atm.pressure_pa[0]))
    return Atmosphere(z_m=z, temperature_k=t, pressure_pa=p, density_kgm3=p / (R_AIR * t),
                      sound_speed_mps=np.sqrt(GAMMA * R_AIR * t), wind_east_mps=east,
                      wind_north_mps=north,
                      description={"kind": "perturbed", "source": source,
                                   "base": atm.description})

