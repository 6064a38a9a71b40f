"""Numpy twins of the ray kernels in :mod:`advisory.physics.ray_kernels` (same scheme,
written level-vectorised for a reader)."""

from __future__ import annotations

import numpy as np


def ray_levels_twin(z_grid, c, wx, wy, z0, zg, out_z, out_c, out_wx, out_wy) -> int:
    """Twin of ``ray_levels_kernel``: the aircraft, the grid nodes strictly between, the
    ground; sound speed and wind there by linear interpolation."""
    nodes = z_grid[(z_grid < z0) & (z_grid > zg)][::-1]
    lz = np.concatenate([[z0], nodes, [zg]])
    m = lz.size
    out_z[:m] = lz
    out_c[:m] = np.interp(lz, z_grid, c)
    out_wx[:m] = np.interp(lz, z_grid, wx)
    out_wy[:m] = np.interp(lz, z_grid, wy)
    return m


def trace_levels_twin(lz, lc, lwx, lwy, m, sx, sy, out) -> int:
    """Twin of ``trace_levels_kernel``: every layer at once, running sums by ``cumsum``.

    Fills ``out[:count]`` (x, y, t, q, dx/dsx, dx/dsy, dy/dsx, dy/dsy, Omega per level)
    and returns ``count``, the levels the ray reached.
    """
    lz, lc, lwx, lwy = (np.asarray(a[:m], dtype=float) for a in (lz, lc, lwx, lwy))
    omega = 1.0 - lwx * sx - lwy * sy
    qq = omega**2 / lc**2 - sx**2 - sy**2
    bad = np.nonzero(qq <= 0.0)[0]
    count = m if bad.size == 0 else int(bad[0])
    if count == 0:
        return 0
    out[:count] = 0.0
    q = np.sqrt(qq[:count])
    dqq_sx = -2.0 * omega[:count] * lwx[:count] / lc[:count] ** 2 - 2.0 * sx
    dqq_sy = -2.0 * omega[:count] * lwy[:count] / lc[:count] ** 2 - 2.0 * sy
    h = lz[: count - 1] - lz[1:count]
    cm = 0.5 * (lc[: count - 1] + lc[1:count])
    wxm = 0.5 * (lwx[: count - 1] + lwx[1:count])
    wym = 0.5 * (lwy[: count - 1] + lwy[1:count])
    omm = 1.0 - wxm * sx - wym * sy
    gx = sx + wxm * omm / cm**2
    gy = sy + wym * omm / cm**2
    gt = omm / cm**2
    ssum = q[:-1] + q[1:]
    integral = 2.0 * h / ssum
    f = -2.0 * h / ssum**2
    di_sx = f * (0.5 * dqq_sx[:-1] / q[:-1] + 0.5 * dqq_sx[1:] / q[1:])
    di_sy = f * (0.5 * dqq_sy[:-1] / q[:-1] + 0.5 * dqq_sy[1:] / q[1:])
    cols = {
        0: gx * integral,
        1: gy * integral,
        2: gt * integral,
        4: (1.0 - wxm**2 / cm**2) * integral + gx * di_sx,
        5: (-wxm * wym / cm**2) * integral + gx * di_sy,
        6: (-wxm * wym / cm**2) * integral + gy * di_sx,
        7: (1.0 - wym**2 / cm**2) * integral + gy * di_sy,
    }
    for j, col in cols.items():
        out[1:count, j] = np.cumsum(col)
    out[:count, 3] = q
    out[:count, 8] = omega[:count]
    return count


def reaches_ground_twin(lc, lwx, lwy, m, sx, sy) -> float:
    """Twin of ``reaches_ground_kernel``: the smallest ``q^2`` over the levels."""
    omega = 1.0 - lwx[:m] * sx - lwy[:m] * sy
    return float(np.min(omega**2 / lc[:m] ** 2 - (sx**2 + sy**2)))


def trace_ground_twin(lz, lc, lwx, lwy, m, sx, sy) -> tuple[bool, float, float, float]:
    """Twin of ``trace_ground_kernel``: the last level of :func:`trace_levels_twin`."""
    out = np.zeros((m, 9))
    if trace_levels_twin(lz, lc, lwx, lwy, m, sx, sy, out) < m:
        return False, 0.0, 0.0, 0.0
    return True, float(out[-1, 0]), float(out[-1, 1]), float(out[-1, 2])


def near_field_constant_twin(c0, mach, beta, lc0, lwx0, lwy0, rho0, alt, sx, sy, dsx, dsy,
                             trans_x, trans_y) -> float:
    """Twin of ``near_field_constant``: ``B / r`` after a one-metre drop through a uniform
    layer with the aircraft-level state, traced by :func:`trace_levels_twin`."""
    out = np.zeros((2, 9))
    trace_levels_twin(np.array([alt, alt - 1.0]), np.array([lc0, lc0]),
                      np.array([lwx0, lwx0]), np.array([lwy0, lwy0]), 2, sx, sy, out)
    dxy = out[1, 4:8].reshape(2, 2) @ np.array([dsx, dsy])
    area = abs(trans_x * dxy[1] - trans_y * dxy[0])
    b_near = out[1, 3] * area / (rho0 * out[1, 8] ** 2)
    r_near = c0 * out[1, 2] * beta / mach
    return float(b_near / r_near)
