"""Issue 13, Why 3: levels are set on the time left to act, not on the boom's arrival.

At Mach 1.4 and 45,000 ft the boom takes about a minute to reach the ground, and slowing
below cutoff at 0.01 Mach per second takes about 25 s more, so the time the crew has is
the time to the first emission that reaches the zone less the deceleration time, not
the arrival time. Every expectation is measured with the truth harness
(:mod:`advisory.bench.truth`, a direct ray tracer with no tables, through the closed loop
of :mod:`advisory.bench.closed_loop`) or from a closed form named beside it; none is
taken from the advisor.
"""

from __future__ import annotations

import copy

import pytest

from advisory import units
from advisory.bench.closed_loop import simulate
from advisory.bench.sim_scenario import scenario_from_dict
from advisory.bench.sim_world import build_world
from advisory.physics.atmosphere import standard_atmosphere
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.state import AirDataState

REACTION_S = 5.0  #: the advisor's and the crew's default reaction time
DECEL = 0.01  #: the advisor's and the crew's default deceleration, Mach/s
MACH0, ALT_FT = 1.4, 45000.0
#: Invented town 0.8 deg of longitude (77 km) east of the start, on the track.
TOWN = {"id": "testford", "circle": [30.1, -140.4, 3.0], "margin_km": 1.0}


def encounter(**over) -> dict:
    """Straight and level at Mach 1.4, 45,000 ft toward an invented town 77 km ahead."""
    doc = {
        "name": "act_by_town", "duration_s": 240.0, "seed": 5,
        "start": {"lat_deg": 30.1, "lon_deg": -141.2, "alt_ft": ALT_FT, "mach": MACH0,
                  "heading_deg": 90.0},
        "zones": [TOWN],
        "crew": {"mode": "ignore", "reaction_s": REACTION_S, "decel_mach_per_s": DECEL},
        "truth": {"emission_interval_s": 0.5, "azimuth_step_deg": 3.0},
    }
    doc.update(copy.deepcopy(over))
    return doc


def cutoff_mach_snell() -> float:
    """Cutoff Mach at 45,000 ft in still standard air: c(ground) / c(altitude) (Snell's
    law for a horizontally stratified atmosphere; U.S. Standard Atmosphere 1976)."""
    atm = standard_atmosphere()
    return atm.at(0.0).sound_speed_mps / atm.at(units.ft_to_m(ALT_FT)).sound_speed_mps


def town_exposure(res) -> dict | None:
    return {e["zone_id"]: e for e in res.score.exposures}.get("testford")


@pytest.fixture(scope="module")
def first_advisory():
    """The advisor's first advisory of the encounter (the scenario's own table and zones)
    and the truth of the flight flown straight on (crew ignoring the cues)."""
    sc = scenario_from_dict(encounter())
    world = build_world(sc)
    st = sc.start
    c = world.advisor_atmosphere.at(units.ft_to_m(st.alt_ft)).sound_speed_mps
    state = AirDataState.from_fields(
        {"lat_deg": st.lat_deg, "lon_deg": st.lon_deg, "alt_ft": st.alt_ft, "mach": st.mach,
         "heading_deg": st.heading_deg, "gs_kt": units.mps_to_kt(st.mach * c),
         "bank_deg": 0.0, "fpa_deg": 0.0}, rx_monotonic=0.0)
    adv = Advisor(world.table, world.zones, AdvisorConfig()).step(state, 0.0)
    straight = simulate(sc, world=world)
    return adv, straight, world


@pytest.mark.slow
def test_level_is_set_by_the_time_left_to_act(first_advisory) -> None:
    adv, straight, _ = first_advisory
    exposure = town_exposure(straight)
    # Truth: flown straight on, the booms reach the town; the first of them is emitted at
    # t_e (direct tracing along the path flown).
    assert exposure is not None and exposure["exceeds_limit"]
    t_e = exposure["unavoidable_from_s"]
    # Closed form (upper bound): the deceleration must have brought the Mach below cutoff
    # before t_e, and it takes (M0 - M_cut) / rate; near-cutoff booms travel further ahead,
    # so the latest moment to start is earlier still.
    bound = t_e - (MACH0 - cutoff_mach_snell()) / DECEL
    assert adv.time_to_contact_s is not None and adv.time_to_contact_s > 150.0
    act_by = getattr(adv, "act_by_s", None)
    # Levels on arrival time call a contact 205 s away an advisory; with about 40 s left
    # to act it is a caution (act-by 60 s or less: docs of advisory.pipeline.config).
    assert adv.status == "caution", (
        f"status {adv.status!r} with the boom arriving in {adv.time_to_contact_s:.0f} s, "
        f"while the closed form leaves at most {bound:.0f} s to start slowing down")
    assert act_by is not None and REACTION_S <= act_by <= bound, (act_by, bound)


@pytest.mark.slow
def test_slowing_by_the_act_by_time_keeps_the_boom_off_the_town(first_advisory) -> None:
    # Flown check (truth): decelerating at the configured rate to the offered Mach, started
    # 2 s before the act-by moment (bisection tolerance 1 s), no boom reaches the town.
    adv, _, world = first_advisory
    act_by = getattr(adv, "act_by_s", None)
    assert act_by is not None and adv.resolve_mach is not None
    onset = max(act_by - 2.0, 0.0)
    sc = scenario_from_dict(encounter(schedule=[
        {"kind": "mach", "at_s": round(onset, 1), "target_mach": adv.resolve_mach,
         "mach_rate_per_s": DECEL}]))
    res = simulate(sc)
    assert town_exposure(res) is None, town_exposure(res)


@pytest.mark.slow
def test_the_crew_that_acts_on_the_caution_avoids_the_town() -> None:
    # Closed loop (truth): a crew acting on the first caution (its default) after 5 s,
    # flying the offered resolution. With levels on arrival time the caution came at
    # T+85 s (contact 120 s away), when no slow-down could help any more.
    res = simulate(scenario_from_dict(encounter(crew={
        "mode": "follow", "reaction_s": REACTION_S, "decel_mach_per_s": DECEL})))
    assert res.actions, "the crew never acted"
    assert town_exposure(res) is None, (
        f"the crew acted at T+{res.actions[0].t_s:.1f} s ({res.actions[0].kind}) and the "
        f"truth still has booms in the town: {town_exposure(res)}")
