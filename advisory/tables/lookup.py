"""Fast multilinear lookup in a boom table (numba kernel).

The table stores, per (altitude, Mach excess, flight-path angle, heading) cell and per
normalised azimuth ``eta``, a row of :data:`N_QUANTITIES` numbers (indices ``Q_*``).
A lookup interpolates the cutoff Mach over (altitude, flight-path angle, heading),
returns "no boom" below it less :data:`NEAR_CUTOFF_BAND`, and otherwise interpolates every
row multilinearly in (altitude, Mach excess, flight-path angle, heading), heading
periodic. Within the band below cutoff it errs toward "the boom reaches": the rows of the
first Mach-excess node (the narrowest, farthest-travelling carpet) stand for it. Outside the
altitude, Mach-excess and flight-path-angle ranges the nearest edge value is used and
the returned code says so.
"""

from __future__ import annotations

import math

from advisory.jit import njit

# Per-ray quantities stored in the table (last axis of ``cells``).
Q_FWD = 0  #: ground offset along the true heading from the emission point's nadir, m
Q_RIGHT = 1  #: ground offset to the right of the true heading, m
Q_TIME = 2  #: travel time from emission to the ground, s
Q_DP = 3  #: ground overpressure (reflection included), Pa
Q_DURATION = 4  #: time between bow and tail shocks on the ground, s
Q_DFWD_DPHI = 5  #: d(fwd)/d(phi), m/rad
Q_DRIGHT_DPHI = 6  #: d(right)/d(phi), m/rad
Q_PHI = 7  #: ray azimuth of this eta node, rad
Q_EDGE = 8  #: 1 where the signature was flagged (caustic at the carpet edge), else 0
N_QUANTITIES = 9

#: Mach number band on either side of the cutoff Mach where the prediction is uncertain:
#: ray theory breaks down as the rays graze the ground (the cutoff caustic), the table
#: holds its half-width budget only from a Mach excess of 0.005 (issue 14's budget floor),
#: and its cutoff Mach is interpolated (within 0.0007 of direct tracing on the default
#: grid). Below cutoff by less than this the lookup still puts a boom on the ground; the
#: advisor flags a state within it as near cutoff. Engineering choice (no source).
NEAR_CUTOFF_BAND = 0.005

#: Lookup result codes.
NO_BOOM = 0
OK = 1
CLAMPED = 2  #: inside the carpet but the condition lies outside the grid; edge values used


@njit(cache=True)
def _locate(axis, x):
    """Index ``i`` and weight ``w`` with x ~ axis[i] (1-w) + axis[i+1] w; clamped flag."""
    n = axis.size
    if n == 1:
        return 0, 0.0, False
    if x <= axis[0]:
        return 0, 0.0, x < axis[0]
    if x >= axis[n - 1]:
        return n - 2, 1.0, x > axis[n - 1]
    lo = 0
    hi = n - 1
    while hi - lo > 1:
        mid = (lo + hi) >> 1
        if axis[mid] <= x:
            lo = mid
        else:
            hi = mid
    return lo, (x - axis[lo]) / (axis[lo + 1] - axis[lo]), False


@njit(cache=True)
def _locate_periodic(axis, x):
    """Like :func:`_locate` for a heading axis on [0, 2 pi); returns (i, j, w)."""
    n = axis.size
    if n == 1:
        return 0, 0, 0.0
    two_pi = 2.0 * math.pi
    x = x % two_pi
    for i in range(n):
        j = (i + 1) % n
        a = axis[i]
        b = axis[j] if j > 0 else axis[0] + two_pi
        if a <= x < b:
            return i, j, (x - a) / (b - a)
        if i == n - 1 and x < axis[0]:
            return n - 1, 0, (x + two_pi - a) / (axis[0] + two_pi - a)
    return n - 1, 0, 0.0


@njit(cache=True)
def _heading_weights(axis, x):
    """Nodes and weights of the heading interpolation at ``x`` (rad): (how many are used,
    6 node indices, 6 weights).

    Equally spaced headings (the builder's, every 15 deg when the air has wind): Lagrange
    interpolation on the periodic nodes around ``x``, six of them (quintic, error of order
    h^6) from six nodes on, four (cubic, h^4) with four or five. The carpet varies
    smoothly with the heading relative to the wind, but with more than a sinusoid's detail
    under a jet: on an invented jet-stream day the wide downwind half-width peaks within
    some 60 deg of heading. Linear interpolation on a 30-deg axis left half-widths 4 % and
    the cutoff Mach 0.0025 off, cubic 1.5-2.4 %; cubic on 15 deg 0.6 %, quintic on 15 deg
    within the 0.5 % budget (``tests/test_wind_tables.py``). Otherwise linear.
    """
    n = axis.size
    i, j, w = _locate_periodic(axis, x)
    linear = (2, (i, j, j, j, j, j), (1.0 - w, w, 0.0, 0.0, 0.0, 0.0))
    if n < 4:
        return linear
    step = 2.0 * math.pi / n
    for k in range(n):
        if abs(axis[k] - axis[0] - k * step) > 1e-9:
            return linear
    t = w
    if n < 6:
        return (4, ((i - 1) % n, i, j, (i + 2) % n, j, j),
                (-t * (t - 1.0) * (t - 2.0) / 6.0, (t + 1.0) * (t - 1.0) * (t - 2.0) / 2.0,
                 -(t + 1.0) * t * (t - 2.0) / 2.0, (t + 1.0) * t * (t - 1.0) / 6.0, 0.0, 0.0))
    # nodes at -2, -1, 0, 1, 2, 3 (in steps) around t in [0, 1)
    a = t + 2.0
    b = t + 1.0
    c = t - 1.0
    d = t - 2.0
    e = t - 3.0
    return (6, ((i - 2) % n, (i - 1) % n, i, j, (i + 2) % n, (i + 3) % n),
            (-b * t * c * d * e / 120.0, a * t * c * d * e / 24.0, -a * b * c * d * e / 12.0,
             a * b * t * d * e / 12.0, -a * b * t * c * e / 24.0, a * b * t * c * d / 120.0))


@njit(cache=True)
def lookup_kernel(alt, mach, fpa, heading, ax_alt, ax_mex, ax_fpa, ax_hdg, cutoff, cells, out,
                  band=NEAR_CUTOFF_BAND):
    """Interpolate one footprint.

    Parameters
    ----------
    alt, mach, fpa, heading : float
        Aircraft altitude (m), Mach, flight-path angle (rad), true heading (rad).
    ax_alt, ax_mex, ax_fpa, ax_hdg : ndarray
        Table axes.
    cutoff : ndarray, shape (n_alt, n_fpa, n_hdg)
        Cutoff Mach per cell.
    cells : ndarray, shape (n_alt, n_mex, n_fpa, n_hdg, n_eta, N_QUANTITIES)
        Tabulated rays.
    out : ndarray, shape (n_eta, N_QUANTITIES)
        Receives the interpolated rows (untouched when there is no boom).
    band : float
        Below the cutoff by less than this a boom still counts (the first Mach-excess
        node's carpet): :data:`NEAR_CUTOFF_BAND`, or wider where the advisor reads the
        cutoff at a confidence (:mod:`advisory.pipeline.confidence`).

    Returns
    -------
    code, cutoff_mach : (int, float)
        :data:`NO_BOOM` (Mach at or below the cutoff less ``band``),
        :data:`OK` or :data:`CLAMPED`, and the interpolated cutoff Mach.
    """
    ia, wa, ca = _locate(ax_alt, alt)
    jf, wf, cf = _locate(ax_fpa, fpa)
    nh, hidx, hw = _heading_weights(ax_hdg, heading)
    na = ax_alt.size
    nf = ax_fpa.size
    mcut = 0.0
    for da in range(2):
        a = min(ia + da, na - 1)
        wa_ = wa if da == 1 else 1.0 - wa
        for df in range(2):
            f = min(jf + df, nf - 1)
            wf_ = wf if df == 1 else 1.0 - wf
            for dh in range(nh):
                w = wa_ * wf_ * hw[dh]
                if w != 0.0:
                    mcut += w * cutoff[a, f, hidx[dh]]
    if mach <= mcut - band or mach <= 1.0:  # subsonic: no shock at all
        return NO_BOOM, mcut
    im, wm, cm = _locate(ax_mex, mach - mcut)
    if mach - mcut < ax_mex[0]:
        cm = False  # just above cutoff: the first node stands for it
    nm = ax_mex.size
    neta = cells.shape[4]
    nq = cells.shape[5]
    for e in range(neta):
        for q in range(nq):
            out[e, q] = 0.0
    for da in range(2):
        a = min(ia + da, na - 1)
        wa_ = wa if da == 1 else 1.0 - wa
        for dm in range(2):
            m = min(im + dm, nm - 1)
            wm_ = wm if dm == 1 else 1.0 - wm
            for df in range(2):
                f = min(jf + df, nf - 1)
                wf_ = wf if df == 1 else 1.0 - wf
                for dh in range(nh):
                    h = hidx[dh]
                    w = wa_ * wm_ * wf_ * hw[dh]
                    if w == 0.0:
                        continue
                    for e in range(neta):
                        for q in range(nq):
                            out[e, q] += w * cells[a, m, f, h, e, q]
    code = CLAMPED if (ca or cm or cf) else OK
    return code, mcut


@njit(cache=True)
def stretch_row(out, mex, stretch, inner_left, inner_right):
    """Carry one looked-up footprint's edges out to the edge ratio
    (:mod:`advisory.tables.edge_ratio`), keeping every other ray where the table has it.

    On each side the edge ray's offset across the heading is multiplied by the side's
    ratio (when above 1), and its offset along the heading taken on the straight line
    from the ``inner`` ray (the carpet's strip node next to the edge) through the table's
    edge ray: the widened carpet's outer strip then holds the table's (no zone the table's
    carpet touches is lost, and a zone ahead near the edge is touched no later), and
    reaches as far across the track as the ratio says. The edge ray keeps its travel
    time, overpressure and derivatives. Engineering choice (no source); the notes of
    :mod:`advisory.pipeline.edge_spread` say what it leaves out.

    Parameters
    ----------
    out : ndarray, shape (n_eta, N_QUANTITIES)
        Rows of :func:`lookup_kernel`; the two edge rows are changed in place.
    mex : float
        The lookup's Mach excess (Mach less cutoff Mach; below the first node the first
        node's ratio).
    stretch : ndarray, shape (3, n)
        Mach excess nodes (ascending), left ratios, right ratios; ``n == 0``: unchanged.
    inner_left, inner_right : int
        The inner ray of each side's outer strip.
    """
    n = stretch.shape[1]
    if n == 0:
        return
    if n == 1 or mex <= stretch[0, 0]:
        left = stretch[1, 0]
        right = stretch[2, 0]
    elif mex >= stretch[0, n - 1]:
        left = stretch[1, n - 1]
        right = stretch[2, n - 1]
    else:
        i = 0
        while stretch[0, i + 1] < mex:
            i += 1
        w = (mex - stretch[0, i]) / (stretch[0, i + 1] - stretch[0, i])
        left = stretch[1, i] * (1.0 - w) + stretch[1, i + 1] * w
        right = stretch[2, i] * (1.0 - w) + stretch[2, i + 1] * w
    last = out.shape[0] - 1
    for side in range(2):
        e = 0 if side == 0 else last
        s = inner_left if side == 0 else inner_right
        r = left if side == 0 else right
        if r <= 1.0 or s == e:
            continue
        y_e = out[e, Q_RIGHT]
        y_s = out[s, Q_RIGHT]
        y_new = y_e * r
        if y_e != y_s:
            out[e, Q_FWD] = out[s, Q_FWD] + (out[e, Q_FWD] - out[s, Q_FWD]) * (
                (y_new - y_s) / (y_e - y_s))
        out[e, Q_RIGHT] = y_new
