"""numpy twins of the footprint kernels (``advisory/pipeline/footprint.py``)."""

from __future__ import annotations

import numpy as np

from advisory.pipeline.footprint import ATTENUATION_FLOOR, EDGE_MACH_STEP
from advisory.tables import lookup as lk
from tests.twins.lookup import lookup_twin


def lookup_rows_kernel_twin(alt, mach, fpa, heading_true, ax_alt, ax_mex, ax_fpa, ax_hdg,
                            cutoff, cells, rows, codes, cutoffs) -> None:
    """Twin of :func:`advisory.pipeline.footprint.lookup_rows_kernel`: every point looked
    up on its own (no reuse of the point before)."""
    for k in range(alt.size):
        codes[k], cutoffs[k] = lookup_twin(alt[k], mach[k], fpa[k], heading_true[k], ax_alt,
                                           ax_mex, ax_fpa, ax_hdg, cutoff, cells, rows[k])


def place_kernel_twin(t, east, north, heading_grid, rows, codes):
    """Numpy twin of :func:`advisory.pipeline.footprint.place_kernel`; returns
    (e, n, t, de, dn)."""
    s = np.sin(heading_grid)[:, None]
    c = np.cos(heading_grid)[:, None]
    f, r = rows[:, :, lk.Q_FWD], rows[:, :, lk.Q_RIGHT]
    df, dr = rows[:, :, lk.Q_DFWD_DPHI], rows[:, :, lk.Q_DRIGHT_DPHI]
    e = east[:, None] + f * s + r * c
    n = north[:, None] + f * c - r * s
    tt = t[:, None] + rows[:, :, lk.Q_TIME]
    de = df * s + dr * c
    dn = df * c - dr * s
    dead = (codes == lk.NO_BOOM)[:, None]
    return tuple(np.where(dead, np.nan, a) for a in (e, n, tt, de, dn))


def steady_translation_twin(vg_e, vg_n, tas, mach, heading_grid, fpa, rows, codes):
    """Twin of :func:`advisory.pipeline.footprint.steady_translation_kernel` in the
    group-velocity form: the unit wave normal ``n`` on the Mach cone (``sin(mu)`` along
    the air velocity, ``cos(mu)`` around it at the ray azimuth, mu the Mach angle), the
    ray's group velocity ``c0 n + w0``, its horizontal over its vertical part times the
    climb rate added to the ground velocity; returns (te, tn), (K, J)."""
    nk, nj = rows.shape[:2]
    te = np.repeat(np.asarray(vg_e, dtype=float)[:, None], nj, axis=1)
    tn = np.repeat(np.asarray(vg_n, dtype=float)[:, None], nj, axis=1)
    for k in range(nk):
        vz = tas[k] * np.sin(fpa[k])
        if vz == 0.0 or codes[k] == lk.NO_BOOM or not mach[k] > 1.0:
            continue
        c0 = tas[k] / mach[k]
        psi, gam = heading_grid[k], fpa[k]
        along = np.array([np.cos(gam) * np.sin(psi), np.cos(gam) * np.cos(psi), np.sin(gam)])
        down = np.array([np.sin(gam) * np.sin(psi), np.sin(gam) * np.cos(psi), -np.cos(gam)])
        right = np.array([np.cos(psi), -np.sin(psi), 0.0])
        wind = np.array([vg_e[k], vg_n[k], 0.0]) - tas[k] * np.array(
            [along[0], along[1], 0.0])
        sin_mu = 1.0 / mach[k]
        cos_mu = np.sqrt(1.0 - sin_mu ** 2)
        for j in range(nj):
            phi = rows[k, j, lk.Q_PHI]
            normal = sin_mu * along + cos_mu * (np.cos(phi) * down + np.sin(phi) * right)
            group = c0 * normal + wind
            if normal[2] >= 0.0 or group[2] >= 0.0:
                continue
            te[k, j] = vg_e[k] + group[0] / -group[2] * vz
            tn[k, j] = vg_n[k] + group[1] / -group[2] * vz
    return te, tn


def focus_kernel_twin(t, ground_e, ground_n, dphi_e, dphi_n, trans_e, trans_n, codes, mach,
                      cap, first: int = -1, join: int = -1) -> np.ndarray:
    """Readable twin of :func:`advisory.pipeline.footprint.focus_kernel`; returns the
    amplification array (``trans_e``, ``trans_n``: the steady translation, (K, J))."""
    nk, nj = ground_e.shape
    out = np.ones((nk, nj))
    if nk < 2:
        return out
    boom = codes != lk.NO_BOOM
    prev_sign = np.zeros(nj)
    for k in range(nk):
        if not boom[k] or k == join:  # no difference across the history/ahead join
            prev_sign[:] = 0.0
            if not boom[k]:
                continue
        k0 = k - 1 if k > 0 and boom[k - 1] and k != join else k
        k1 = k + 1 if k < nk - 1 and boom[k + 1] and k + 1 != join else k
        if k1 == k0:
            continue
        dt = t[k1] - t[k0]
        te = (ground_e[k1] - ground_e[k0]) / dt
        tn = (ground_n[k1] - ground_n[k0]) / dt
        with np.errstate(divide="ignore", invalid="ignore"):
            j_act = te * dphi_n[k] - tn * dphi_e[k]
            j_std = trans_e[k] * dphi_n[k] - trans_n[k] * dphi_e[k]
            ratio = np.where(j_act != 0.0, j_std / j_act, np.inf)
        usable = np.isfinite(dphi_e[k]) & np.isfinite(dphi_n[k]) & (j_std != 0.0)
        sign = np.where(ratio > 0.0, 1.0, -1.0)
        fold = ((prev_sign != 0.0) & (sign != prev_sign)) | ~np.isfinite(ratio)
        # one-sided ratios (backward k0 -> k, forward k -> k1); the larger factor counts,
        # an inverted tube has its ray-theory factor, one-sided tubes that disagree in
        # sign (or vanish) are a fold
        sides = []
        for ka, kb in ((k0, k), (k, k1)):
            if k == first and kb == k and k1 > k:
                continue  # the first judged emission: its forward factor only
            if ka == kb:
                sides.append(ratio)
                continue
            with np.errstate(divide="ignore", invalid="ignore"):
                ja = ((ground_e[kb] - ground_e[ka]) * dphi_n[k]
                      - (ground_n[kb] - ground_n[ka]) * dphi_e[k]) / (t[kb] - t[ka])
                sides.append(np.where(ja != 0.0, j_std / ja, np.inf))
        with np.errstate(invalid="ignore"):
            tube = np.zeros(nj)
            for r in sides:
                fold |= ~np.isfinite(r)
                tube = np.maximum(tube, np.sqrt(np.abs(r)))
            if len(sides) == 2:
                fold |= (sides[0] > 0.0) != (sides[1] > 0.0)
            tube = np.clip(tube, ATTENUATION_FLOOR, cap)
        amp = np.where(fold, cap, tube)
        out[k] = np.where(usable, amp, 1.0)
        prev_sign = np.where(usable, sign, prev_sign)
        if nj >= 3 and abs(mach[k1] - mach[k0]) > EDGE_MACH_STEP:
            # the lateral cutoffs while the Mach changes: the inner neighbours' factors
            out[k, [0, -1]] = out[k, [1, -2]]
            prev_sign[[0, -1]] = 0.0
    return out
