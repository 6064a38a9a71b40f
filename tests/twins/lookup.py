"""Numpy twin of the table lookup kernel in :mod:`advisory.tables.lookup`."""

from __future__ import annotations

import math

import numpy as np

from advisory.tables import lookup as lk


def _weights(axis: np.ndarray, x: float) -> tuple[list[int], list[float], bool]:
    """Readable twin of ``_locate``: corner indices and weights."""
    if axis.size == 1:
        return [0], [1.0], False
    clamped = bool(x < axis[0] or x > axis[-1])
    xc = min(max(x, axis[0]), axis[-1])
    i = int(np.clip(np.searchsorted(axis, xc, side="right") - 1, 0, axis.size - 2))
    w = (xc - axis[i]) / (axis[i + 1] - axis[i])
    return [i, i + 1], [1.0 - w, w], clamped


def _weights_periodic(axis: np.ndarray, x: float) -> tuple[list[int], list[float]]:
    """Readable twin of ``_locate_periodic``."""
    if axis.size == 1:
        return [0], [1.0]
    two_pi = 2.0 * math.pi
    ext = np.concatenate([axis, [axis[0] + two_pi]])
    x = x % two_pi
    if x < axis[0]:
        x += two_pi
    i = int(np.clip(np.searchsorted(ext, x, side="right") - 1, 0, axis.size - 1))
    w = (x - ext[i]) / (ext[i + 1] - ext[i])
    n = axis.size
    uniform = n >= 4 and np.allclose(axis - axis[0], np.arange(n) * two_pi / n, atol=1e-9,
                                     rtol=0.0)
    if not uniform:
        return [i, (i + 1) % n], [1.0 - w, w]
    # Lagrange through the periodic nodes around x: six (-2 .. 3) from six nodes on, else
    # four (-1 .. 2)
    nodes = np.arange(-2.0, 4.0) if n >= 6 else np.arange(-1.0, 3.0)
    weights = [float(np.prod([(w - b) / (a - b) for b in nodes if b != a])) for a in nodes]
    return [int(i + a) % n for a in nodes], weights


def lookup_twin(alt, mach, fpa, heading, ax_alt, ax_mex, ax_fpa, ax_hdg, cutoff, cells,
                out, band=lk.NEAR_CUTOFF_BAND) -> tuple[int, float]:
    """Twin of ``lookup_kernel`` (same arguments and results)."""
    ia, wa, ca = _weights(ax_alt, alt)
    jf, wf, cf = _weights(ax_fpa, fpa)
    hh, wh = _weights_periodic(ax_hdg, heading)
    mcut = sum(
        wa_ * wf_ * wh_ * cutoff[a, f, h]
        for a, wa_ in zip(ia, wa) for f, wf_ in zip(jf, wf) for h, wh_ in zip(hh, wh)
    )
    if mach <= mcut - band or mach <= 1.0:  # within the band: a boom
        return lk.NO_BOOM, float(mcut)
    im, wm, cm = _weights(ax_mex, mach - mcut)
    if mach - mcut < ax_mex[0]:
        cm = False
    acc = np.zeros(cells.shape[4:])
    for a, wa_ in zip(ia, wa):
        for m, wm_ in zip(im, wm):
            for f, wf_ in zip(jf, wf):
                for h, wh_ in zip(hh, wh):
                    acc += wa_ * wm_ * wf_ * wh_ * cells[a, m, f, h]
    out[...] = acc
    return (lk.CLAMPED if (ca or cm or cf) else lk.OK), float(mcut)


def stretch_row_twin(out: np.ndarray, mex: float, stretch: np.ndarray, inner_left: int,
                     inner_right: int) -> None:
    """Twin of ``stretch_row``: each side's ratio interpolated in the Mach excess (clamped),
    the edge ray carried out across the heading by it and along the line from the inner
    ray through the table's edge ray."""
    if stretch.shape[1] == 0:
        return
    ratios = [float(np.interp(mex, stretch[0], stretch[1 + side])) for side in (0, 1)]
    for side, edge, inner in ((0, 0, inner_left), (1, out.shape[0] - 1, inner_right)):
        r = ratios[side]
        if r <= 1.0 or edge == inner:
            continue
        inner_pt = np.array([out[inner, lk.Q_RIGHT], out[inner, lk.Q_FWD]])
        edge_pt = np.array([out[edge, lk.Q_RIGHT], out[edge, lk.Q_FWD]])
        new_right = edge_pt[0] * r
        if edge_pt[0] != inner_pt[0]:
            slope = (edge_pt[1] - inner_pt[1]) / (edge_pt[0] - inner_pt[0])
            out[edge, lk.Q_FWD] = inner_pt[1] + slope * (new_right - inner_pt[0])
        out[edge, lk.Q_RIGHT] = new_right
