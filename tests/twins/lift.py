"""numpy twins of the lift-map kernels (``advisory/tables/lift.py``)."""

from __future__ import annotations

import numpy as np

from advisory.physics.atmosphere import GAMMA
from advisory.tables import lookup as lk


def map_value_twin(lift_map, params, age, area):
    """Twin of :func:`advisory.tables.lift.map_value`: the map's two axes rebuilt as
    arrays and interpolated with ``np.interp`` along each (bilinear)."""
    ln_a = np.linspace(params[0], params[1], lift_map.shape[0])
    u = np.linspace(params[2], params[3], lift_map.shape[1])
    x = np.clip(np.log(max(age, 1e-300)), ln_a[0], ln_a[-1])
    y = np.clip(np.arcsinh(area / params[4]), u[0], u[-1])
    along_area = np.array([np.interp(y, u, row) for row in lift_map])
    return float(np.interp(x, ln_a, along_area))


def lift_scale_twin(alt, mach, z, ln_p, weight_n):
    """Twin of :func:`advisory.tables.lift.lift_scale_kernel`."""
    p = np.exp(np.interp(alt, z, ln_p))
    m = np.asarray(mach, dtype=float)
    with np.errstate(invalid="ignore"):
        s = np.sqrt(np.maximum(m * m - 1.0, 0.0)) * weight_n / (GAMMA * p * m * m)
    return np.where(m > 1.0, s, 0.0)


def lift_correction_twin(rows, ages, codes, lift, bank, fpa, scale, lift_map, params):
    """Twin of :func:`advisory.tables.lift.lift_correction_kernel` (returns a copy)."""
    out = rows.copy()
    phi = rows[:, :, lk.Q_PHI]
    l0 = np.cos(fpa)[:, None] * np.cos(phi)
    ell = lift[:, None] * np.cos(phi + bank[:, None])
    for k, j in zip(*np.nonzero(np.abs(ell - l0) > 1e-12), strict=True):
        if codes[k] == lk.NO_BOOM:
            continue
        p0 = map_value_twin(lift_map, params, ages[k, j, 0], scale[k] * l0[k, j])
        if p0 > 0.0:
            out[k, j, lk.Q_DP] *= map_value_twin(lift_map, params, ages[k, j, 0],
                                                 scale[k] * ell[k, j]) / p0
    return out
