"""The ray scheme's numba kernels: emission slowness, integration levels, the layer step.

Model
-----
The atmosphere varies with altitude only and is steady, so the horizontal slowness
``s_h = (s_x, s_y)`` of every ray is conserved (Snell's law for a moving medium). A ray
leaves the aircraft along a wave normal ``n`` on the Mach cone of the air-relative
velocity (``n . e_a = 1/M``) and has ``s = n / (c0 + W0 . n)``. At altitude ``z`` the
vertical slowness follows from the dispersion relation ``(1 - W . s)^2 = c^2 |s|^2``::

    Omega(z) = 1 - W_x s_x - W_y s_y
    q(z)^2   = Omega^2 / c^2 - s_x^2 - s_y^2        (q = -s_z for a down-going ray)

and going down by ``dz' = -dz`` the ray advances::

    dx/dz' = (c^2 s_x + W_x Omega) / (c^2 q),   dy/dz' = (c^2 s_y + W_y Omega) / (c^2 q),
    dt/dz' = Omega / (c^2 q).

A ray turns (and does not reach the ground) where ``q^2`` reaches zero above the
ground. Each grid layer is integrated with ``q^2`` taken linear in altitude across the
layer, so ``int dz / q = 2 h / (q_top + q_bottom)`` exactly; this keeps the integral
finite and accurate for grazing rays (``q -> 0`` at the ground at lateral cutoff).
The Jacobian ``d(x, y)/d(s_x, s_y)`` is the exact derivative of that discrete scheme.

One layer of that scheme is :func:`layer_step` (with :func:`layer_jacobian` for the
Jacobian); every kernel that integrates a ray, here and in
:mod:`advisory.physics.fastpath`, goes through it.

References
----------
.. [1] A. D. Pierce, *Acoustics: An Introduction to Its Physical Principles and
   Applications*, Acoustical Society of America, 1989, ch. 8 (rays in moving media,
   eqs. 8-1.7, 8-1.10; Blokhintsev invariant, sec. 8-6).
.. [2] G. B. Whitham, "The flow pattern of a supersonic projectile", Comm. Pure Appl.
   Math. 5, 1952, pp. 301-348 (near-field amplitude).
"""

from __future__ import annotations

import math

from advisory.jit import njit

#: Columns of the per-level output of :func:`trace_levels_kernel`.
L_X, L_Y, L_T, L_Q = 0, 1, 2, 3  #: east, north offset (m), travel time (s), q (s/m)
L_JXX, L_JXY, L_JYX, L_JYY = 4, 5, 6, 7  #: d(x, y)/d(sx, sy), m^2/s
L_OMEGA = 8  #: Doppler factor 1 - W . s
N_LEVEL_COLUMNS = 9


# --------------------------------------------------------------------------------------
# Emission geometry
# --------------------------------------------------------------------------------------


@njit(cache=True)
def emission_slowness(mach, heading, fpa, phi, c0, w0x, w0y):
    """Horizontal slowness and its azimuth derivative for one ray leaving the aircraft.

    Parameters
    ----------
    mach : float
        Mach number relative to the air at the aircraft (> 1).
    heading : float
        Direction of the air-relative velocity, rad clockwise from north.
    fpa : float
        Flight-path angle of the air-relative velocity, rad, positive climbing.
    phi : float
        Ray azimuth around the Mach cone, rad: 0 straight down in the vertical plane of
        the flight path, positive toward the right wing.
    c0 : float
        Sound speed at the aircraft, m/s.
    w0x, w0y : float
        Wind toward east and north at the aircraft, m/s.

    Returns
    -------
    sx, sy, nz, dsx_dphi, dsy_dphi : float
        Horizontal slowness (s/m), the vertical component of the unit wave normal
        (negative for a down-going ray), and d(sx, sy)/dphi (s/m/rad).
    """
    sh, ch = math.sin(heading), math.cos(heading)
    sg, cg = math.sin(fpa), math.cos(fpa)
    inv_m = 1.0 / mach
    cone = math.sqrt(max(1.0 - inv_m * inv_m, 0.0))
    # Unit vectors: along air velocity, "down" perpendicular to it, and right wing.
    ax, ay, az = cg * sh, cg * ch, sg
    dx, dy, dz = sg * sh, sg * ch, -cg
    rx, ry = ch, -sh
    cp, sp = math.cos(phi), math.sin(phi)
    nx = inv_m * ax + cone * (cp * dx + sp * rx)
    ny = inv_m * ay + cone * (cp * dy + sp * ry)
    nz = inv_m * az + cone * (cp * dz)
    dnx = cone * (-sp * dx + cp * rx)
    dny = cone * (-sp * dy + cp * ry)
    denom = c0 + w0x * nx + w0y * ny
    ddenom = w0x * dnx + w0y * dny
    sx = nx / denom
    sy = ny / denom
    dsx = dnx / denom - nx * ddenom / (denom * denom)
    dsy = dny / denom - ny * ddenom / (denom * denom)
    return sx, sy, nz, dsx, dsy


# --------------------------------------------------------------------------------------
# Integration levels
# --------------------------------------------------------------------------------------


@njit(cache=True)
def _interp_uniform(z, z_grid, values):
    """Linear interpolation on a uniform ascending grid (clamped at the ends)."""
    dz = z_grid[1] - z_grid[0]
    f = (z - z_grid[0]) / dz
    i = int(math.floor(f))
    if i < 0:
        return values[0]
    if i >= z_grid.size - 1:
        return values[z_grid.size - 1]
    w = f - i
    return values[i] * (1.0 - w) + values[i + 1] * w


@njit(cache=True)
def ray_levels_kernel(z_grid, c, wx, wy, z0, zg, out_z, out_c, out_wx, out_wy):
    """Fill the altitudes of the integration levels: ``z0``, grid nodes between, ``zg``.

    Parameters
    ----------
    z_grid, c, wx, wy : ndarray
        Atmosphere nodes: uniform ascending altitude (m), sound speed and wind east/north
        (m/s).
    z0, zg : float
        Aircraft and ground altitude, m.
    out_z, out_c, out_wx, out_wy : ndarray, shape (>= z_grid.size + 2,)
        Output: level altitudes (descending, m), sound speed and wind there (m/s).

    Returns
    -------
    int
        The number of levels written (at most ``z_grid.size + 2``).
    """
    dz = z_grid[1] - z_grid[0]
    m = 0
    out_z[m] = z0
    m += 1
    i = int(math.ceil((z0 - z_grid[0]) / dz - 1e-9)) - 1
    while i >= 0 and z_grid[i] > zg:
        if z_grid[i] < z0:
            out_z[m] = z_grid[i]
            m += 1
        i -= 1
    out_z[m] = zg
    m += 1
    for k in range(m):
        out_c[k] = _interp_uniform(out_z[k], z_grid, c)
        out_wx[k] = _interp_uniform(out_z[k], z_grid, wx)
        out_wy[k] = _interp_uniform(out_z[k], z_grid, wy)
    return m


# --------------------------------------------------------------------------------------
# One level, one layer
# --------------------------------------------------------------------------------------


@njit(cache=True)
def vertical_slowness_sq(c, wx, wy, sx, sy):
    """``Omega``, ``q^2`` (s^2/m^2) and ``d(q^2)/d(sx, sy)`` at one level (module notes).

    Parameters
    ----------
    c, wx, wy : float
        Sound speed and wind east/north at the level, m/s.
    sx, sy : float
        Horizontal slowness, s/m.

    Returns
    -------
    omega, qq, dqq_sx, dqq_sy : float
    """
    c2 = c * c
    om = 1.0 - wx * sx - wy * sy
    qq = om * om / c2 - sx * sx - sy * sy
    dqq_sx = -2.0 * om * wx / c2 - 2.0 * sx
    dqq_sy = -2.0 * om * wy / c2 - 2.0 * sy
    return om, qq, dqq_sx, dqq_sy


@njit(cache=True)
def layer_step(h, ca, cb, wxa, wxb, wya, wyb, sx, sy, qa, qb):
    """One layer of the ray integration (the scheme of the module notes).

    Parameters
    ----------
    h : float
        Layer thickness, m (top altitude minus bottom altitude).
    ca, cb, wxa, wxb, wya, wyb : float
        Sound speed and wind east/north at the top (``a``) and bottom (``b``), m/s.
    sx, sy : float
        Horizontal slowness, s/m.
    qa, qb : float
        Vertical slowness at the top and bottom, s/m (> 0).

    Returns
    -------
    integral, gx, gy, gt, wxm, wym, c2m : float
        ``int dz / q`` over the layer (s), the layer-mean ray slopes ``gx, gy`` (the
        advance east/north is ``gx * integral``, m) and ``gt`` (the travel time is
        ``gt * integral``, s), and the mean winds (m/s) and squared sound speed
        (m^2/s^2) that :func:`layer_jacobian` needs.
    """
    cm = 0.5 * (ca + cb)
    c2m = cm * cm
    wxm = 0.5 * (wxa + wxb)
    wym = 0.5 * (wya + wyb)
    omm = 1.0 - wxm * sx - wym * sy
    gx = sx + wxm * omm / c2m
    gy = sy + wym * omm / c2m
    gt = omm / c2m
    integral = 2.0 * h / (qa + qb)
    return integral, gx, gy, gt, wxm, wym, c2m


@njit(cache=True)
def layer_jacobian(h, qa, qb, dqq_a_sx, dqq_a_sy, dqq_b_sx, dqq_b_sy, integral, gx, gy,
                   wxm, wym, c2m):
    """The layer's share of ``d(x, y)/d(sx, sy)`` (m^2/s): the exact derivative of
    :func:`layer_step` (``dq/ds = d(q^2)/ds / (2 q)``).

    Returns
    -------
    djxx, djxy, djyx, djyy : float
    """
    s = qa + qb
    f = -2.0 * h / (s * s)
    di_sx = f * (0.5 * dqq_a_sx / qa + 0.5 * dqq_b_sx / qb)
    di_sy = f * (0.5 * dqq_a_sy / qa + 0.5 * dqq_b_sy / qb)
    dgx_sx = 1.0 - wxm * wxm / c2m
    dgx_sy = -wxm * wym / c2m
    dgy_sy = 1.0 - wym * wym / c2m
    return (dgx_sx * integral + gx * di_sx, dgx_sy * integral + gx * di_sy,
            dgx_sy * integral + gy * di_sx, dgy_sy * integral + gy * di_sy)


# --------------------------------------------------------------------------------------
# Whole rays
# --------------------------------------------------------------------------------------


@njit(cache=True)
def trace_levels_kernel(lz, lc, lwx, lwy, m, sx, sy, out):
    """Integrate one ray over precomputed levels, writing per-level results.

    Parameters
    ----------
    lz, lc, lwx, lwy : ndarray
        Level altitudes (descending, m), sound speed (m/s) and wind east/north (m/s);
        only the first ``m`` entries are used.
    m : int
        Number of levels.
    sx, sy : float
        Horizontal slowness, s/m.
    out : ndarray, shape (>= m, N_LEVEL_COLUMNS)
        Per level, by the ``L_*`` columns: x, y (m, east/north from the emission point),
        t (s), q (s/m), dx/dsx, dx/dsy, dy/dsx, dy/dsy (m^2/s), Omega.

    Returns
    -------
    int
        Number of levels the ray reached (``m`` when it reaches the ground; fewer
        when it turns, in which case the last row written is the last level with
        ``q^2 > 0``).
    """
    x = 0.0
    y = 0.0
    t = 0.0
    jxx = 0.0
    jxy = 0.0
    jyx = 0.0
    jyy = 0.0
    om, qq_a, dqq_a_sx, dqq_a_sy = vertical_slowness_sq(lc[0], lwx[0], lwy[0], sx, sy)
    if qq_a <= 0.0:
        return 0
    qa = math.sqrt(qq_a)
    for j in range(N_LEVEL_COLUMNS):
        out[0, j] = 0.0
    out[0, L_Q] = qa
    out[0, L_OMEGA] = om
    for k in range(m - 1):
        omb, qq_b, dqq_b_sx, dqq_b_sy = vertical_slowness_sq(lc[k + 1], lwx[k + 1],
                                                             lwy[k + 1], sx, sy)
        if qq_b <= 0.0:
            return k + 1
        qb = math.sqrt(qq_b)
        h = lz[k] - lz[k + 1]
        integral, gx, gy, gt, wxm, wym, c2m = layer_step(
            h, lc[k], lc[k + 1], lwx[k], lwx[k + 1], lwy[k], lwy[k + 1], sx, sy, qa, qb)
        djxx, djxy, djyx, djyy = layer_jacobian(h, qa, qb, dqq_a_sx, dqq_a_sy, dqq_b_sx,
                                                dqq_b_sy, integral, gx, gy, wxm, wym, c2m)
        x += gx * integral
        y += gy * integral
        t += gt * integral
        jxx += djxx
        jxy += djxy
        jyx += djyx
        jyy += djyy
        out[k + 1, L_X] = x
        out[k + 1, L_Y] = y
        out[k + 1, L_T] = t
        out[k + 1, L_Q] = qb
        out[k + 1, L_JXX] = jxx
        out[k + 1, L_JXY] = jxy
        out[k + 1, L_JYX] = jyx
        out[k + 1, L_JYY] = jyy
        out[k + 1, L_OMEGA] = omb
        qa = qb
        dqq_a_sx = dqq_b_sx
        dqq_a_sy = dqq_b_sy
    return m


@njit(cache=True)
def reaches_ground_kernel(lc, lwx, lwy, m, sx, sy):
    """Smallest ``q^2`` (s^2/m^2) over the levels: positive when the ray reaches the ground."""
    worst = 1e300
    ss = sx * sx + sy * sy
    for k in range(m):
        om = 1.0 - lwx[k] * sx - lwy[k] * sy
        qq = om * om / (lc[k] * lc[k]) - ss
        if qq < worst:
            worst = qq
    return worst


@njit(cache=True)
def trace_ground_kernel(lz, lc, lwx, lwy, m, sx, sy):
    """Ground point of one ray without per-level output (the :func:`layer_step` scheme).

    ``q^2`` is evaluated as in :func:`reaches_ground_kernel` (``|s|^2`` summed first),
    so this kernel and that one agree on which rays reach.

    Returns
    -------
    reached, x, y, t : (bool, float, float, float)
        Whether the ray reaches the ground, and its ground offset east/north (m) from
        the emission point and travel time (s); zeros when it does not reach.
    """
    c2 = lc[0] * lc[0]
    ss = sx * sx + sy * sy
    om = 1.0 - lwx[0] * sx - lwy[0] * sy
    qq = om * om / c2 - ss
    if qq <= 0.0:
        return False, 0.0, 0.0, 0.0
    qa = math.sqrt(qq)
    x = 0.0
    y = 0.0
    t = 0.0
    for k in range(m - 1):
        cb = lc[k + 1]
        omb = 1.0 - lwx[k + 1] * sx - lwy[k + 1] * sy
        qq_b = omb * omb / (cb * cb) - ss
        if qq_b <= 0.0:
            return False, 0.0, 0.0, 0.0
        qb = math.sqrt(qq_b)
        integral, gx, gy, gt, _, _, _ = layer_step(
            lz[k] - lz[k + 1], lc[k], cb, lwx[k], lwx[k + 1], lwy[k], lwy[k + 1], sx, sy,
            qa, qb)
        x += gx * integral
        y += gy * integral
        t += gt * integral
        qa = qb
    return True, x, y, t


# --------------------------------------------------------------------------------------
# Near-field amplitude
# --------------------------------------------------------------------------------------


@njit(cache=True)
def near_field_constant(c0, mach, beta, lc0, lwx0, lwy0, rho0, alt, sx, sy, dsx, dsy,
                        trans_x, trans_y):
    """``K0 = lim B / r`` near the aircraft, m/(kg/m^3) per unit emission time and azimuth.

    ``B = q A_h / (rho Omega^2)`` is the wave-action flux per unit ``p^2`` (Blokhintsev
    invariant, Pierce [1]_ sec. 8-6) and ``r = c0 t beta / M`` the distance from the
    flight axis. Near the aircraft the atmosphere is locally uniform and ``B / r`` tends
    to a constant; it is taken from one :func:`layer_step` of one metre through a
    uniform layer with the aircraft-level state ``lc0, lwx0, lwy0, rho0`` (exact: in a
    uniform medium every quantity is linear in the drop). ``A_h`` is the horizontal
    ray-tube area, ``|trans x d(x, y)/dphi|`` with ``trans`` the translation of the ray
    pattern per unit emission time (m/s). Matching Whitham's near field
    ``p = p0 gamma M^2 F / sqrt(2 beta r)`` [2]_ then gives the amplitude factor
    ``G = p0 gamma M^2 / sqrt(2 beta) * sqrt(K0 / B)`` along the ray.
    """
    h = alt - (alt - 1.0)
    om, qq, dqq_sx, dqq_sy = vertical_slowness_sq(lc0, lwx0, lwy0, sx, sy)
    q = math.sqrt(qq)
    integral, gx, gy, gt, wxm, wym, c2m = layer_step(h, lc0, lc0, lwx0, lwx0, lwy0, lwy0,
                                                     sx, sy, q, q)
    jxx, jxy, jyx, jyy = layer_jacobian(h, q, q, dqq_sx, dqq_sy, dqq_sx, dqq_sy, integral,
                                        gx, gy, wxm, wym, c2m)
    t = gt * integral
    dx = jxx * dsx + jxy * dsy
    dy = jyx * dsx + jyy * dsy
    area = abs(trans_x * dy - trans_y * dx)
    b_near = q * area / (rho0 * (om * om))
    r_near = c0 * t * beta / mach
    return b_near / r_near
