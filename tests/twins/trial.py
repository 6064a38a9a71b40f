"""Readable twins of the trial kernels (``advisory/pipeline/trial.py``).

:func:`fly_trial_kernel_twin` flies the crew's action with plain Python: a control law
(:func:`_controls`) says the Mach and the bank the crew flies at each moment, and the
point-mass coordinated turn is integrated in the same sub-steps. :func:`trial_clears_twin`
is the composition of the readable twins of the table lookup, the footprint placement,
the focus factor and the conflict search, on every azimuth (the kernel keeps only the
azimuths it is given; the conflict twin is run on those, each stretch between two of them
read where it is louder than the limit, as the kernel does).
"""

from __future__ import annotations

import math

import numpy as np

from advisory.pipeline.footprint import CarpetPrediction
from advisory.pipeline.trial import SUBSTEP_S, TRIAL_PARAMS
from advisory.tables import lookup as lk
from tests.twins.conflicts import find_conflicts_twin
from tests.twins.footprint import (
    focus_kernel_twin,
    place_kernel_twin,
    steady_translation_twin,
)
from tests.twins.lift import lift_correction_twin, lift_scale_twin
from tests.twins.lookup import lookup_twin


def _mach(tau: float, p: dict) -> float:
    """Mach at ``tau``: the present schedule, then toward the target at the set rate."""
    def without_action(x: float) -> float:  # the present rate, up to the selected Mach
        m = max(p["mach0"] + p["mach_rate0"] * x, 0.1)
        if math.isnan(p["mach_hold"]):
            return m
        return min(m, p["mach_hold"]) if p["mach_rate0"] > 0 else max(m, p["mach_hold"])
    free = without_action(tau)
    if tau <= p["onset"] or math.isnan(p["target_mach"]):
        return free
    start = without_action(p["onset"])
    change = p["target_mach"] - start
    reach = p["decel"] * (tau - p["onset"])
    return max(p["target_mach"] if abs(change) <= reach else start + math.copysign(reach, change),
               0.1)


def _fpa(tau: float, p: dict) -> float:
    """Flight-path angle at ``tau``: the predicted profile (held, or a ramp from ``start``
    to ``end``) until the onset, then toward level at the crew's rate (0: the profile)."""
    def profile(x: float) -> float:
        if p["fpa_rate"] == 0.0 or p["fpa_end"] <= p["fpa_start"]:
            return p["fpa0"]
        return p["fpa0"] + p["fpa_rate"] * (min(max(x, p["fpa_start"]), p["fpa_end"])
                                            - p["fpa_start"])
    if p["level_rate"] <= 0.0 or tau <= p["onset"]:
        return profile(tau)
    at_onset = profile(p["onset"])
    reach = p["level_rate"] * (tau - p["onset"])
    return 0.0 if abs(at_onset) <= reach else at_onset - math.copysign(reach, at_onset)


def _roll(bank: float, target: float, step: float) -> float:
    return target if abs(target - bank) <= step else bank + math.copysign(step, target - bank)


def fly_trial_kernel_twin(t: np.ndarray, params: np.ndarray) -> np.ndarray:
    """Twin of :func:`advisory.pipeline.trial.fly_trial_kernel` (same arguments, result)."""
    p = dict(zip(TRIAL_PARAMS, (float(v) for v in params)))
    a, g, rad = p["a"], p["g"], p["radius"]
    pos = [p["e0"], p["n0"]]
    alt, psi, bank, turned, tau = p["h0"], p["psi0"], p["bank0"], 0.0, 0.0
    phase = "before"
    out = np.empty((11, t.size))
    for i, t_i in enumerate(t):
        while tau < t_i - 1e-12:
            if phase == "before" and tau >= p["onset"] - 1e-12:
                phase = "level" if math.isnan(p["target_bank"]) else "turn"
            rolling = phase == "turn" or (phase == "level" and bank != 0.0)
            pitching = _fpa(tau, p) != _fpa(float(t_i), p)
            h = min(SUBSTEP_S, t_i - tau) if rolling or pitching else t_i - tau
            if phase == "before" and tau + h > p["onset"] + 1e-12:
                h = p["onset"] - tau
            v0, v1 = _mach(tau, p) * a, _mach(tau + h, p) * a
            target = {"before": bank, "turn": p["target_bank"], "level": 0.0}[phase]
            new_bank = _roll(bank, target, p["roll_rate"] * h)
            dpsi = 0.5 * (g * math.tan(bank) / v0 + g * math.tan(new_bank) / v1) * h
            mean_fpa = 0.5 * (_fpa(tau, p) + _fpa(tau + h, p))
            if phase != "before":
                turned += dpsi
            chord = 0.5 * (v0 + v1) * math.cos(mean_fpa) * h * (
                np.sinc(dpsi / (2.0 * math.pi)) if abs(dpsi) >= 2e-4 else 1.0 - dpsi ** 2 / 24.0)
            de = chord * math.sin(psi + 0.5 * dpsi) + p["wind_e"] * h
            dn = chord * math.cos(psi + 0.5 * dpsi) + p["wind_n"] * h
            mid = np.array([pos[0] + 0.5 * de, pos[1] + 0.5 * dn])
            rho = float(np.hypot(*mid))
            if rho > 0.0:  # radial lengths shrink by h, transverse grow by 1/h
                hs = math.sqrt(max(1.0 - (0.5 * rho / rad) ** 2, 1e-300))
                u = mid / rho
                d = np.array([de, dn])
                radial = float(d @ u)
                d = hs * radial * u + (d - radial * u) / hs
                de, dn = float(d[0]), float(d[1])
            pos = [pos[0] + de, pos[1] + dn]
            alt += 0.5 * (v0 + v1) * math.sin(mean_fpa) * h
            psi += dpsi
            bank = new_bank
            tau += h
            if phase == "turn" and not math.isnan(p["turn_limit"]):
                lead = 0.5 * abs(g * math.tan(bank) / v1) * abs(bank) / max(p["roll_rate"], 1e-9)
                if abs(p["turn_limit"]) - abs(turned) <= lead:
                    phase = "level"
        v = _mach(float(t_i), p) * a
        gam = _fpa(float(t_i), p)
        ge = v * math.cos(gam) * math.sin(psi) + p["wind_e"]
        gn = v * math.cos(gam) * math.cos(psi) + p["wind_n"]
        out[:, i] = (pos[0], pos[1], alt, v / a, v, psi % (2 * math.pi), bank,
                     math.atan2(ge, gn) % (2 * math.pi), math.hypot(ge, gn),
                     g * math.tan(bank) / v, gam)
    return out


def trial_clears_twin(t, k0, params, hdg_offset, has_wind, table, strips, pz, zones,
                      focus_cap, focus_threshold) -> bool:
    """Twin of :func:`advisory.pipeline.trial.trial_clears_kernel`: the trial flown by
    its twin, every emission from ``k0 - 1`` looked up on every azimuth, placed, its focus
    factor computed, and the conflict twin run on the emissions from ``k0``."""
    fl = fly_trial_kernel_twin(t, params)
    lo = max(k0 - 1, 0)
    ks = range(lo, t.size)
    rows = np.zeros((len(ks), table.eta.size, lk.N_QUANTITIES))
    codes = np.zeros(len(ks), dtype=np.int64)
    cut = np.zeros(len(ks))
    for i, k in enumerate(ks):
        hdg = (fl[5, k] + hdg_offset) % (2 * math.pi) if has_wind else 0.0
        codes[i], cut[i] = lookup_twin(fl[2, k], fl[3, k], fl[10, k], hdg, table.ax_alt,
                                       table.ax_mex, table.ax_fpa, table.ax_hdg, table.cutoff,
                                       table.cells, rows[i])
    if table.has_lift_map:  # level coordinated flight at the trial's bank
        tas, rate, fpa = fl[4, lo:], fl[9, lo:], fl[10, lo:]
        across = tas * rate * np.cos(fpa)
        up = params[13] * np.cos(fpa)
        lift, bank = np.hypot(across, up) / params[13], np.arctan2(across, up)
        ages = np.zeros((len(ks), table.eta.size, 1))
        for i, k in enumerate(ks):
            hdg = (fl[5, k] + hdg_offset) % (2 * math.pi) if has_wind else 0.0
            lookup_twin(fl[2, k], fl[3, k], fl[10, k], hdg, table.ax_alt, table.ax_mex,
                        table.ax_fpa, table.ax_hdg, table.cutoff, table.ray_age, ages[i])
        scale = lift_scale_twin(fl[2, lo:], fl[3, lo:], table.lift_z, table.lift_ln_p,
                                table.lift_params[5])
        rows = lift_correction_twin(rows, ages, codes, lift, bank, fpa.copy(),
                                    scale, table.lift_map, table.lift_params)
    tk = t[lo:]
    e, n, ta, de, dn = place_kernel_twin(tk, fl[0, lo:], fl[1, lo:], fl[5, lo:], rows, codes)
    s = k0 - lo
    te, tn = steady_translation_twin(fl[8, lo:] * np.sin(fl[7, lo:]),
                                     fl[8, lo:] * np.cos(fl[7, lo:]), fl[3, lo:] * params[6],
                                     fl[3, lo:], fl[5, lo:], fl[10, lo:], rows, codes)
    amp = focus_kernel_twin(tk, e, n, de, dn, te, tn, codes, fl[3, lo:], focus_cap, s)
    pred = CarpetPrediction(
        t_emit_s=tk[s:], codes=codes[s:], cutoff_mach=cut[s:], east_m=e[s:], north_m=n[s:],
        arrival_s=ta[s:], overpressure_pa=rows[s:, :, lk.Q_DP],
        duration_s=rows[s:, :, lk.Q_DURATION],
        focus_factor=amp[s:], edge_flag=rows[s:, :, lk.Q_EDGE] > 0.5)
    at = np.asarray(strips)  # the kernel keeps the strip azimuths only: the same columns
    strip_pred = CarpetPrediction(
        t_emit_s=pred.t_emit_s, codes=pred.codes, cutoff_mach=pred.cutoff_mach,
        east_m=pred.east_m[:, at], north_m=pred.north_m[:, at],
        arrival_s=pred.arrival_s[:, at], overpressure_pa=pred.overpressure_pa[:, at],
        duration_s=pred.duration_s[:, at], focus_factor=pred.focus_factor[:, at],
        edge_flag=pred.edge_flag[:, at])
    return not find_conflicts_twin(strip_pred, pz, zones, np.arange(at.size), focus_threshold,
                                   first_only=True, loud_part=True)
