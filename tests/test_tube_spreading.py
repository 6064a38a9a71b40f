"""The ray-tube factor where the tubes spread: a deceleration, against the truth.

Linear acoustics scales the amplitude as ``sqrt(J_steady / J_actual)`` (Pierce,
*Acoustics*, 1989, ch. 8, ray-tube area) both ways: where successive emissions' rays
spread (slowing down) the boom is weaker than steady flight's. The advisor kept the
factor at 1 there, and its overpressure in a deceleration stood well above the truth's
direct tracing (:mod:`advisory.bench.truth`, independent code: rays traced per emission
through the atmosphere, tube areas from the traced ground map): slowing from Mach 1.92
at 0.01 per s (campaign --known, seed 1, encounter 40) it put 0.64 psf on a zone's edge
where the truth has 0.48, and offered no Mach resolution.
"""

from __future__ import annotations

import numpy as np
import pytest

from advisory.bench.campaign_sample import sample_encounter
from advisory.bench.closed_loop import simulate
from advisory.bench.sim_scenario import scenario_from_dict
from advisory.pipeline.footprint import ATTENUATION_FLOOR
from tests.test_flown_history import fly_and_advise, truth_map


def overpressure_pairs(t_now, adv, path, gm, ahead: bool):
    """(advisor, truth) overpressure pairs, Pa, for the emissions of the advisor's last
    prediction (at flight time ``t_now``) ahead of it (``ahead``) or in the air: each
    advisor ground point against the truth's ray of the nearest traced emission (within
    0.5 s) nearest on the ground (within 1.5 km)."""
    pred, traj = adv.last_prediction, adv.last_trajectory
    eff = pred.effective_overpressure_pa
    pairs = []
    which = pred.t_emit_s > 1e-9 if ahead else pred.t_emit_s < -1e-9
    for k in np.flatnonzero(which & pred.on_ground):
        t_abs = t_now + float(pred.t_emit_s[k])
        i = int(np.argmin(np.abs(gm.emission_time_s - t_abs)))
        if abs(gm.emission_time_s[i] - t_abs) > 0.5:
            continue
        ok = gm.reached[i]
        la, lo = traj.frame.from_enu(pred.east_m[k], pred.north_m[k])
        east, north = path.frame.to_enu(np.asarray(la), np.asarray(lo))
        for e, n, p in zip(east, north, eff[k], strict=True):
            if not np.isfinite(e):
                continue
            d = np.where(ok, np.hypot(gm.east_m[i] - e, gm.north_m[i] - n), np.inf)
            m = int(np.argmin(d))
            if d[m] <= 1500.0:
                pairs.append((float(p), float(gm.overpressure_pa[i, m])))
    return np.array(pairs)


def assert_near_truth(pairs: np.ndarray) -> None:
    """At least 200 (advisor, truth) pairs, their ratio's median within 3 % of 1 and its
    5th-95th percentiles within 10 %. Tolerances: the steady overpressure agrees to
    0.15 % (test_carpet); the rest is the finite difference over 3-s emissions against
    the truth's 0.5-s ones (project choice)."""
    assert len(pairs) >= 200
    ratio = pairs[:, 0] / pairs[:, 1]
    p5, med, p95 = np.percentile(ratio, [5, 50, 95])
    assert abs(med - 1.0) < 0.03 and p95 < 1.10 and p5 > 0.90, (
        f"advisor / truth overpressure: 5th {p5:.3f}, median {med:.3f}, 95th {p95:.3f}")


def test_a_deceleration_predicts_the_truths_weaker_boom(small_table) -> None:
    # Mach 1.9 at 45,000 ft, slowing at 0.01 per s from T+20 s; the advisor's prediction
    # at T+40 s (mid-deceleration, the Mach rate in its state) against the truth of the
    # same flight. Before: median 1.28 times the truth, 95th percentile 2.0 (the factor
    # held at 1 where the tubes spread, the cap where the map looked inverted); after:
    # median 1.00, 5th-95th percentiles 0.98-1.02.
    cmd = ((20.0, 1.2, 0.01),)
    samples, _ = fly_and_advise(small_table, 140.0, mach=1.9, mach_commands=cmd,
                                advise_every=1000)
    _, adv = fly_and_advise(small_table, 40.0, mach=1.9, mach_commands=cmd)
    path, gm = truth_map(samples, since_s=0.0)
    pairs = overpressure_pairs(40.0, adv, path, gm, ahead=True)
    assert_near_truth(pairs)
    assert float(np.min(adv.last_prediction.focus_factor)) >= ATTENUATION_FLOOR


def test_the_in_air_booms_of_a_deceleration_keep_the_truths_overpressure(small_table) -> None:
    # The in-air booms of the same deceleration, placed from the flown history at T+150 s
    # (the advisor stepped all along), against the truth: within the same tolerances.
    samples, adv = fly_and_advise(small_table, 150.0, mach=1.9,
                                  mach_commands=((30.0, 1.3, 0.01),))
    path, gm = truth_map(samples, since_s=0.0)
    pairs = overpressure_pairs(150.0, adv, path, gm, ahead=False)
    assert_near_truth(pairs)


def _follow(index: int) -> dict:
    doc = sample_encounter(1, index, known=True).doc
    doc["crew"]["mode"] = "follow"
    doc["truth"]["act_by"] = False
    return simulate(scenario_from_dict(doc)).resolution()


@pytest.mark.slow
def test_slowing_down_is_offered_where_the_truth_says_it_keeps_the_zone_under_its_limit():
    # campaign --known, seed 1, encounter 15: Mach 1.89 at 33,200 ft toward a zone with a
    # 1.36 psf limit. Before: nothing offered (the deceleration's weaker booms were
    # predicted at steady strength); the truth, slowing from the reaction time on, keeps
    # every later boom under the limit. After: a Mach resolution, and it holds.
    res = _follow(15)
    assert res["followed"] and res["kind"] == "mach", res
    assert not res["exceeds_after_action"], res


@pytest.mark.slow
@pytest.mark.parametrize("index", [19, 56])
def test_a_mach_resolution_is_judged_at_full_strength_once_the_deceleration_ends(index):
    # Encounters 19 and 56 (campaign --known, seed 1): with the central difference alone
    # the factor at the emission after the deceleration's end blended the spreading
    # before it with the steady flight after it (0.77 where the truth has 1.0), and an
    # offered Mach (1.23 in encounter 56) put 0.78 psf on a 0.71 psf zone in truth. Now
    # the larger one-sided factor counts: what is offered holds against the truth.
    res = _follow(index)
    assert not res["followed"] or not res["exceeds_after_action"], res


@pytest.mark.slow
def test_the_first_judged_boom_of_a_deceleration_is_judged_by_its_own_spreading():
    # campaign --known, seed 1, encounter 20: crossing a zone (0.89 psf limit) at Mach
    # 1.40, booms already on their way from the start. The truth has slowing from the
    # reaction time on keep every later boom at 0.54 psf or less (its emissions 0.1 s
    # apart spread from the first one on). The trials judged the boom emitted at the
    # onset itself with the backward difference too, i.e. at steady strength (1.05 psf):
    # nothing was offered. Now its forward factor counts: a Mach resolution, and it holds.
    res = _follow(20)
    assert res["followed"] and res["kind"] == "mach", res
    assert not res["exceeds_after_action"], res
