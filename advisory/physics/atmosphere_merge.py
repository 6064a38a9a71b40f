"""Measured levels merged into a planning atmosphere: the air below is not the air aloft.

The aircraft measures temperature and wind only where it flies. Whether and where a boom
reaches the ground depends mostly on the air below (the cutoff Mach is the largest
effective sound speed between the aircraft and the ground over the one at the aircraft), so
the measured levels replace the planning atmosphere (a loaded forecast or planning profile,
else the U.S. Standard Atmosphere 1976) only where they were measured. Beyond the measured
band the planning atmosphere takes over: the difference measured at the band's edge
(temperature and both wind components) fades out over :data:`BLEND_M` with a smoothstep
``1 - 3x^2 + 2x^3`` (``x`` the distance from the edge over the blend depth), so the profile
stays continuous. Pressure follows from the hydrostatic equation from the planning
atmosphere's pressure at its lowest node
(:func:`advisory.physics.atmosphere._hydrostatic_pressure`), density from the ideal-gas
law.

Before, the learned profile continued the standard atmosphere shifted by the measured
anomaly down to the ground: a cruise-level anomaly of +10 K became a +10 K surface, the
cutoff Mach about 0.002 per K too high (the boom reaching where the tool said it would not).
"""

from __future__ import annotations

import numpy as np

from advisory.physics.atmosphere import (
    GAMMA,
    R_AIR,
    Atmosphere,
    ProfileLevel,
    _hydrostatic_pressure,
    atmosphere_from_description,
    check_levels,
)

__all__ = ["BLEND_M", "merge_levels", "rebuild_atmosphere"]

#: Depth over which a measured difference fades into the planning atmosphere, m.
#: Engineering choice (no source): about the depth of one layer of the learned profile's
#: bins times five, short against the 10-20 km between cruise and ground.
BLEND_M = 1500.0


def _fade(distance_m: np.ndarray, blend_m: float) -> np.ndarray:
    """Smoothstep weight: 1 at the measured band's edge, 0 from ``blend_m`` away."""
    x = np.clip(distance_m / blend_m, 0.0, 1.0)
    return 1.0 - x * x * (3.0 - 2.0 * x)


def merge_levels(base: Atmosphere, levels: list[ProfileLevel], blend_m: float = BLEND_M,
                 source: str = "measured levels") -> Atmosphere:
    """The planning atmosphere ``base`` with ``levels`` in force where they were measured.

    Parameters
    ----------
    base : Atmosphere
        The planning atmosphere (a loaded profile, or the standard atmosphere).
    levels : list of ProfileLevel
        At least two measured levels, ascending (checked as
        :func:`advisory.physics.atmosphere.check_levels`).
    blend_m : float
        Fade depth beyond the measured band, m (> 0).
    source : str
        Provenance text.

    Returns
    -------
    Atmosphere
        On ``base``'s grid; ``description`` kind ``"merged"`` with the base's description,
        the levels and the blend depth (rebuilt by :func:`rebuild_atmosphere`).

    Raises
    ------
    AtmosphereError
        For levels the profile builder refuses.
    """
    check_levels(levels)
    if not blend_m > 0.0:
        raise ValueError(f"blend_m: {blend_m} must be > 0")
    z = base.z_m
    zl = np.array([lv.altitude_m for lv in levels])
    measured = [np.array([lv.temperature_k for lv in levels]),
                np.array([lv.wind_east_mps for lv in levels]),
                np.array([lv.wind_north_mps for lv in levels])]
    planned = [base.temperature_k, base.wind_east_mps, base.wind_north_mps]
    below, above = z < zl[0], z > zl[-1]
    w_below = _fade(zl[0] - z, blend_m)
    w_above = _fade(z - zl[-1], blend_m)
    merged = []
    for m, b in zip(measured, planned):
        inside = np.interp(z, zl, m)
        d_lo = m[0] - float(np.interp(zl[0], z, b))
        d_hi = m[-1] - float(np.interp(zl[-1], z, b))
        out = np.where(below, b + d_lo * w_below, inside)
        merged.append(np.where(above, b + d_hi * w_above, out))
    t, east, north = merged
    p = _hydrostatic_pressure(z, t, float(z[0]), float(base.pressure_pa[0]))
    return Atmosphere(
        z_m=z.copy(), temperature_k=t, pressure_pa=p, density_kgm3=p / (R_AIR * t),
        sound_speed_mps=np.sqrt(GAMMA * R_AIR * t), wind_east_mps=east,
        wind_north_mps=north,
        description={
            "kind": "merged", "source": source, "blend_m": float(blend_m),
            "base": base.description,
            "levels": [[lv.altitude_m, lv.temperature_k, lv.wind_east_mps,
                        lv.wind_north_mps] for lv in levels],
        },
    )


def rebuild_atmosphere(desc: dict) -> Atmosphere:
    """An :class:`Atmosphere` from its ``description`` (a table header's), merged ones
    included (:func:`advisory.physics.atmosphere.atmosphere_from_description` for the
    others).

    Raises
    ------
    AtmosphereError
        For a description of unknown kind.
    """
    if desc.get("kind") == "merged":
        levels = [ProfileLevel(*map(float, lv)) for lv in desc["levels"]]
        return merge_levels(rebuild_atmosphere(desc["base"]), levels, float(desc["blend_m"]),
                            str(desc.get("source", "levels")))
    return atmosphere_from_description(desc)
