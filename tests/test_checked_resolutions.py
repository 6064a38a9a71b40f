"""Issue 13, Why 4 and Build 3-4: resolutions flown as trials before they are offered, and
booms no action can stop named as unavoidable.

Expectations come from closed forms (the coordinated turn, a constant deceleration), the
truth harness (direct tracing along the path flown, :mod:`advisory.bench.truth`, through
:mod:`advisory.bench.closed_loop`) and the readable twins of the kernels; none is taken
from the code under test.
"""

from __future__ import annotations

import dataclasses
import itertools
import math

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic

from advisory import units
from advisory.bench.campaign_sample import sample_encounter
from advisory.bench.closed_loop import simulate
from advisory.bench.crew import Crew
from advisory.bench.sim_scenario import CrewSpec, scenario_from_dict
from advisory.bench.sim_world import build_world
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.carpet import compute_carpet
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.resolutions import TrialBase
from advisory.pipeline.state import AirDataState
from advisory.pipeline.trial import (
    TRIAL_PARAMS,
    fly_trial_kernel,
    trial_clears_kernel,
    trial_nodes,
)
from advisory.schema import ADV_STATUSES, CONFLICT_STATUSES, STATUS_RANK
from tests.test_act_by import DECEL, encounter, town_exposure
from tests.test_advisor import ALT_FT, C_45K, point_along, square, state, zoneset
from tests.twins.trial import fly_trial_kernel_twin, trial_clears_twin

G0 = 9.80665  #: standard gravity, m/s^2 (U.S. Standard Atmosphere 1976)


def trial_params(**over) -> np.ndarray:
    """A trial of level flight at Mach 1.6, 45,000 ft, heading north, from the origin."""
    p = dict(h0=units.ft_to_m(ALT_FT), sin_fpa=0.0, cos_fpa=1.0, bank0=0.0, mach0=1.6,
             mach_rate0=0.0, a=C_45K, psi0=0.0, wind_e=0.0, wind_n=0.0, e0=0.0, n0=0.0,
             radius=6.371e6, g=G0, onset=5.0, target_mach=math.nan, decel=0.01,
             target_bank=math.nan, turn_limit=math.nan, roll_rate=math.radians(5.0),
             fpa0=0.0, fpa_rate=0.0, fpa_start=0.0, fpa_end=0.0, level_rate=0.0,
             mach_hold=math.nan)
    p.update(over)
    return np.array([p[k] for k in TRIAL_PARAMS], dtype=np.float64)


@pytest.mark.parametrize("over", [
    {},
    {"target_mach": 1.12},
    {"onset": 4.2, "target_bank": math.radians(25.0), "turn_limit": math.radians(30.0)},
    {"onset": 7.0, "target_bank": -math.radians(25.0), "turn_limit": -math.radians(90.0),
     "target_mach": 1.3, "bank0": math.radians(10.0)},
    {"bank0": math.radians(-20.0), "mach_rate0": 0.002, "wind_e": 20.0, "e0": 3e4},
    # a climb the crew levels at 1 deg/s from the onset; a level-off ahead (a capture
    # from 12 s to 15 s) before the onset at 20 s; a descent held (level rate 0)
    {"fpa0": math.radians(3.0), "sin_fpa": math.sin(math.radians(3.0)),
     "cos_fpa": math.cos(math.radians(3.0)), "level_rate": math.radians(1.0),
     "target_mach": 1.3},
    {"fpa0": math.radians(3.0), "sin_fpa": math.sin(math.radians(3.0)),
     "cos_fpa": math.cos(math.radians(3.0)), "fpa_rate": -math.radians(1.0),
     "fpa_start": 12.0, "fpa_end": 15.0, "onset": 20.0, "level_rate": math.radians(1.0),
     "target_bank": math.radians(25.0), "turn_limit": math.radians(40.0)},
    {"fpa0": -math.radians(2.0), "sin_fpa": math.sin(-math.radians(2.0)),
     "cos_fpa": math.cos(math.radians(2.0))},
    # an acceleration that stops at the selected Mach before and after the onset
    {"mach_rate0": 0.01, "mach_hold": 1.64, "target_bank": math.radians(25.0),
     "turn_limit": math.radians(30.0), "onset": 10.0},
    {"mach_rate0": -0.01, "mach_hold": 1.55, "target_mach": 1.3, "onset": 8.0},
])
def test_trial_flight_matches_its_twin(over) -> None:
    # Parity: compiled trial flight vs its readable twin (tests/twins/trial.py).
    t = np.arange(0.0, 301.0, 3.0)
    p = trial_params(**over)
    np.testing.assert_allclose(fly_trial_kernel(t, p), fly_trial_kernel_twin(t, p),
                               rtol=1e-9, atol=1e-6)


def test_trial_turn_and_deceleration_against_closed_forms() -> None:
    # Coordinated turn held at bank phi: radius V^2 / (g tan phi) (point-mass relation,
    # any flight-mechanics text); heading rate g tan(phi) / V.
    v = 1.6 * C_45K
    phi = math.radians(25.0)
    t = np.arange(0.0, 121.0, 1.0)
    out = fly_trial_kernel(t, trial_params(bank0=phi, onset=1e6, radius=1e12))
    radius = v * v / (G0 * math.tan(phi))
    # centre of the circle to the right of a northbound start: (radius, 0)
    dist = np.hypot(out[0] - radius, out[1])
    assert np.max(np.abs(dist - radius)) < 1e-4 * radius
    assert out[9][0] == pytest.approx(G0 * math.tan(phi) / v, rel=1e-12)
    # Constant deceleration: the target is reached (M0 - Mt) / rate after the onset.
    out = fly_trial_kernel(t, trial_params(target_mach=1.2))
    reached = t[np.argmax(out[3] <= 1.2 + 1e-12)]
    assert reached == pytest.approx(5.0 + (1.6 - 1.2) / 0.01, abs=1.0)
    # A turn rolls in at the roll rate: 25 deg of bank 5 s after the onset, and rolls
    # out near the asked heading change (30 deg, within a few degrees).
    out = fly_trial_kernel(t, trial_params(target_bank=phi, turn_limit=math.radians(30.0)))
    assert out[6][t == 10.0][0] == pytest.approx(phi, abs=1e-9)
    assert math.degrees(out[5][-1]) == pytest.approx(30.0, abs=3.0)


def test_trial_clears_kernel_matches_the_twin_composition(small_table) -> None:
    # Parity: the compiled trial (on the azimuths it is given: every node, the strip
    # nodes alone, and the resolutions' own choice) equals the composition of the
    # readable twins of lookup, placement, focus and conflict search on every azimuth,
    # read at those azimuths.
    feats = [square(f"z{i}", *point_along(90e3 + 25e3 * i, 90.0 + 3.0 * (i - 1)),
                    half_km=2.0, margin_km=1.0) for i in range(3)]
    zones = zoneset(*feats)
    adv = Advisor(small_table, zones)
    adv.step(state(), 0.0)
    base = TrialBase(adv.config, adv._predictor, adv._strips, adv._projected, adv._ahead)
    tb, pz = small_table, adv._projected
    outcomes = set()
    every = np.arange(tb.eta.size, dtype=np.int64)
    trials = [(5.0, math.nan, math.nan, math.nan), (5.0, 1.13, math.nan, math.nan),
              (60.0, 1.13, math.nan, math.nan), (5.0, math.nan, 0.44, 0.5),
              (5.0, math.nan, -0.44, -1.5), (12.0, 1.4, 0.44, 0.3)]
    for (onset, mach, bank, turn), nodes in itertools.product(
            trials, [every, base.strips, trial_nodes(base.strips)]):
        p = base.params.copy()
        p[14], p[15], p[17], p[18] = onset, mach, bank, turn
        fast = trial_clears_kernel(base.t_judged, base.k0, p, 0.0, False, tb.ax_alt, tb.ax_mex,
                                   tb.ax_fpa, tb.ax_hdg, tb.cutoff, tb.cells, tb.lift_args(),
                                   nodes, pz.x, pz.y, pz.ring_start, pz.part_start, pz.zone_start,
                                   pz.zone_bbox, pz.ring_chunk, pz.chunk_edges, pz.chunk_bbox,
                                   pz.margin_m, pz.limit_pa, base.focus_cap, 1.25)
        slow = trial_clears_twin(base.t_judged, base.k0, p, 0.0, False, tb, nodes, pz,
                                 zones, base.focus_cap, 1.25)
        assert bool(fast) == slow, (onset, mach, bank, turn, nodes.size)
        outcomes.add(slow)
    assert outcomes == {True, False}  # both kinds of trial were exercised


def test_trials_hold_limit_zones_to_the_configured_fraction(small_table) -> None:
    # A resolution is checked with a margin on a zone's overpressure limit (config
    # limit_fraction, engineering choice): booms at 95 % of the limit pass a trial held to
    # the limit itself and fail one held to 90 % of it. The limit is set from the
    # advisor's own predicted overpressure: this checks the rule, not the physics.
    lat, lon = point_along(90e3)
    adv = Advisor(small_table, zoneset(square("town", lat, lon, half_km=3.0)))
    first = adv.step(state(), 0.0)
    assert first.zone_id == "town" and first.overpressure_pa is not None
    limit_psf = units.pa_to_psf(first.overpressure_pa) / 0.95
    for fraction, clears in ((1.0, True), (0.9, False)):
        cfg = dataclasses.replace(AdvisorConfig(), limit_fraction=fraction)
        a = Advisor(small_table, zoneset(square("town", lat, lon, half_km=3.0,
                                                limit_psf=limit_psf)), cfg)
        a.step(state(), 0.0)
        base = TrialBase(a.config, a._predictor, a._strips, a._projected, a._ahead)
        assert base.clears(cfg.reaction_s) is clears, fraction  # flying on as now


def test_statuses_follow_the_contract() -> None:
    # The shared contract of issue 13 (the interface change every helper builds to).
    assert ADV_STATUSES == ("no_boom", "clear", "advisory", "caution", "warning",
                            "unavoidable", "unavailable")
    assert "unavoidable" in CONFLICT_STATUSES and STATUS_RANK["unavoidable"] == 4


def test_a_boom_already_emitted_into_a_zone_is_unavoidable(small_table) -> None:
    # A zone under the centreline landing point of the boom emitted now: its boom
    # arrives after the centreline travel time (direct tracing, no tables), and no action
    # can stop it. The status names it; never clear while the boom is on its way.
    carpet = compute_carpet(RayTracer(standard_atmosphere()),
                            FlightCondition(1.6, units.ft_to_m(ALT_FT), math.radians(90.0)))
    lat, lon = point_along(carpet.centerline_along_m)
    adv = Advisor(small_table, zoneset(square("harbour", lat, lon, half_km=1.0)))
    a = adv.step(state(), 0.0)
    assert a.status == "unavoidable" and a.zone_id == "harbour"
    assert a.time_to_contact_s == pytest.approx(carpet.centerline_travel_time_s, abs=4.0)
    # a boom of the usual strength (typically 0.5-3 psf: value from memory)
    assert a.overpressure_psf is not None and 0.3 < a.overpressure_psf < 5.0


def test_a_boom_on_its_way_stays_unavoidable_until_it_lands() -> None:
    # Issue 13, Build 4: never "clear" while a boom is on its way into a zone. A pull-up
    # toward a zone with a 1.26 psf limit (campaign --known, seed 1, encounter 34): the
    # truth (direct ray tracing) has booms over the limit on their way from the emission
    # at 31.6 s; the advisor sees them once the pull-up has begun (38 s) and must not say
    # clear again while they are in the air. Before, its status flickered clear /
    # unavoidable 39 times (the booms near the limit were found in one step, not the next).
    res = simulate(scenario_from_dict(sample_encounter(1, 34, known=True).doc))
    exp = {e["zone_id"]: e for e in res.score.exposures}["zone"]
    assert exp["exceeds_limit"] and exp["unavoidable_from_s"] < 38.0
    first_seen = min(s.t_start_s for s in res.segments if s.status == "unavoidable")
    assert first_seen < exp["first_arrival_s"]
    late_misses = [span for span in exp["missed"] if span[1] > first_seen + 0.5]
    assert not late_misses, f"clear while booms were on their way: {late_misses[:5]}"


def test_crew_flies_the_checked_mach_and_reads_old_frames() -> None:
    # docs/scenarios.md: the crew flies resolve_mach; a frame of an old log (no such key)
    # offers max_mach_off_ground; a combined resolution is flown as both at once.
    crew = Crew(CrewSpec(mode="follow", reaction_s=4.0, bank_deg=25.0))
    frame = {"status": "caution", "zone_id": "z", "max_mach_off_ground": 1.13,
             "resolve_mach": None, "turn_left_deg": 20.0, "turn_right_deg": None,
             "combined": False}
    kind, seg = crew.choose(frame)
    assert kind == "turn" and seg.heading_change_deg == -20.0
    kind, seg = crew.choose({**frame, "resolve_mach": 1.15})
    assert kind == "mach" and seg.target_mach == 1.15
    old = {k: v for k, v in frame.items() if k not in ("resolve_mach", "combined")}
    assert crew.choose(old)[0] == "mach"
    kind, turn, slow = crew.choose({**frame, "resolve_mach": 1.12, "combined": True})
    assert kind == "combined" and turn.kind == "turn" and slow.target_mach == 1.12
    crew.see(1.0, {**frame, "resolve_mach": 1.12, "combined": True})
    action = crew.due(5.0)
    assert action is not None and [s.kind for s in action.segments()] == ["mach", "turn"]


LATE_S = 70.0  #: the moment of Why 4: 70 s into the encounter of tests/test_act_by.py


@pytest.fixture(scope="module")
def late_advice():
    """The advice 70 s into the encounter (straight and level, 48 km short of the town)."""
    sc = scenario_from_dict(encounter())
    world = build_world(sc)
    st = sc.start
    c = world.advisor_atmosphere.at(units.ft_to_m(st.alt_ft)).sound_speed_mps
    gs = st.mach * c
    g = Geodesic.WGS84.Direct(st.lat_deg, st.lon_deg, st.heading_deg, gs * LATE_S)
    s = AirDataState.from_fields(
        {"lat_deg": g["lat2"], "lon_deg": g["lon2"], "alt_ft": st.alt_ft, "mach": st.mach,
         "heading_deg": g["azi2"] % 360.0, "gs_kt": units.mps_to_kt(gs), "bank_deg": 0.0,
         "fpa_deg": 0.0}, rx_monotonic=0.0)
    return Advisor(world.table, world.zones).step(s, 0.0)


def slowed_exposure(mach: float) -> dict | None:
    """Truth: the encounter flown straight, slowing to ``mach`` at the configured rate
    from 5 s (the reaction time) after :data:`LATE_S`; the town's exposure or None."""
    sc = scenario_from_dict(encounter(schedule=[
        {"kind": "mach", "at_s": LATE_S + 5.0, "target_mach": mach,
         "mach_rate_per_s": DECEL}]))
    return town_exposure(simulate(sc))


@pytest.mark.slow
def test_the_mach_offered_keeps_the_boom_off_the_town(late_advice) -> None:
    # Why 4: the Mach offered was cutoff minus 0.02, never tried. 70 s into the encounter
    # a crew slowing to it after 5 s still puts near-cutoff booms on the town (truth). The
    # Mach offered now is one the truth confirms; when none is offered, the truth confirms
    # that slowing down no longer clears.
    a = late_advice
    offered = a.resolve_mach if hasattr(a, "resolve_mach") else a.max_mach_off_ground
    if offered is None:
        assert a.status in ("warning", "unavoidable")  # the crew is told to act now
        assert slowed_exposure(a.max_mach_off_ground) is not None
        return
    exposure = slowed_exposure(offered)
    assert exposure is None, (
        f"slowing to the offered M{offered:.2f} from T+{LATE_S + 5.0:.0f} s: the truth has "
        f"booms in the town (peak {exposure['peak_psf']:.2f} psf at "
        f"T+{exposure['first_arrival_s']:.0f} s)")


# Issue 13, done-when (resolution success): campaign --known. The truth harness (direct
# ray tracing along the path flown, advisory.bench.truth; its act-by flights,
# advisory.bench.truth_act_by) has the zone's booms over its limit when the crew does
# nothing, and an action begun a reaction time after the start that keeps them under it.
# Before, the crew following the cues let booms reach the zone over its limit:
# - at the carpet's edge (seed 1: 43, 70, 83; 1.08, 0.94 and 0.98 psf): with the carpet
#   searched in 6 strips across its width, the zone was read at the loudest node of a
#   wide strip, no trial cleared and nothing was offered (10 strips since);
# - at the quiet end of a strip (seed 1: 8, 40, 47; 1.55, 0.70 and 1.00 psf): the trials
#   read the zone at the louder node of the strip it touched (encounter 8: 0.82 psf
#   between nodes of 0.44 and 0.81, the trials holding to 0.69; the truth's slow-down
#   with a turn keeps 0.66 psf, limit 0.77), nothing was offered; they now read it where
#   the strip meets the zone;
# - a Mach offered at the edge of what clears (seed 2: 79, out of the sample the others
#   were built on): Mach 1.21, the largest target that cleared, its trial laying the
#   carpet's edge 2.94 km from a zone with a 2.32 km margin; flown, the truth put the
#   steady Mach 1.21 edge inside the margin at 1.43 psf (limit 0.85). Near cutoff the
#   edge moves 1.3-1.4 km per 0.01 Mach; the Mach offered now keeps mach_hold_margin
#   (0.01) below the largest target that clears.
# - nothing clears with the trials' room (seed 1: 63 and 170, where the truth's best
#   action at the reaction time, a slow-down with a turn, keeps 96 % and 98 % of the
#   limit): no trial kept the booms under limit_fraction (0.9) of the limit and nothing
#   was offered; the search is now flown again at the limit itself and what clears is
#   offered marked at_limit (a turn with a slow-down in both);
# - a fold read at the carpet's edge (seed 1: 130, where the truth's slow-down with a
#   right turn keeps 83 % of the limit): every trial with a slow-down read the cap at the
#   edge node alone (the grazing ray's landing point moving tens of kilometres per 0.03
#   Mach), nothing was offered; while the Mach changes the edge nodes take their inner
#   neighbours' factor since (advisory.pipeline.footprint, as the truth's edge band).
# - level-off-3 and level-off-245 (climbs to 46,061 and 47,544 ft at Mach 2.28 and 2.24;
#   the level-off's push-over focus, 1.49 psf on limits of 1.39 and 1.46): nothing was
#   offered before the selected altitude was sent, the level-off predicted and the trials
#   flown with the crew levelling the path as it acts (tests/test_targets_flown.py); now
#   a Mach each, and the truth keeps the zone under the limit.
# Now a resolution is offered and flown, and the truth keeps every boom in the zone under
# the limit.
@pytest.mark.parametrize("seed, index, limit_psf", [
    pytest.param(1, 43, 0.79, id="edge-43"), pytest.param(1, 70, 0.77, id="edge-70"),
    pytest.param(1, 83, 0.55, id="edge-83"), pytest.param(1, 8, 0.77, id="strip-end-8"),
    pytest.param(1, 40, 0.51, id="strip-end-40"), pytest.param(1, 47, 0.61, id="strip-end-47"),
    pytest.param(2, 79, 0.85, id="hold-margin-s2-79"),
    pytest.param(1, 63, 0.85, id="at-limit-63"), pytest.param(1, 170, 0.56, id="at-limit-170"),
    pytest.param(1, 130, 0.51, id="edge-fold-130"),
    pytest.param(1, 3, 1.39, id="level-off-3"), pytest.param(1, 245, 1.46, id="level-off-245")])
def test_an_avoidable_exposure_gets_a_resolution_that_holds(seed, index, limit_psf) -> None:
    doc = sample_encounter(seed, index, known=True).doc
    sc = scenario_from_dict(doc)
    assert sc.zones[0].limit_psf == pytest.approx(limit_psf)  # the encounter meant
    res = simulate(dataclasses.replace(sc, crew=dataclasses.replace(sc.crew, mode="follow")))
    assert res.resolution()["followed"], "no resolution was offered and flown"
    over = [e for e in res.score.exposures if e["exceeds_limit"]]
    assert not over, f"the truth has booms over the limit: {over[0]['peak_psf']:.2f} psf"
    # The crew flown levels the path as it acts (docs/scenarios.md, the crew model), as
    # the trials do: a line offered in a climb says so ("LVL"), one in level flight not.
    cue_s = res.resolution()["cue_s"]
    cue = next(s.cue for s in res.segments if s.t_start_s <= cue_s < s.t_end_s)
    assert ("LVL" in cue.split()) == (index in (3, 245)), cue


# Offered at the limit within the table's near-cutoff rows (campaign --known, seed 1;
# the truth of advisory.bench.truth, the crew following the cues): in 208 (present Mach
# 0.002 under the lowest cutoff the trials see) the search at the limit offered the present
# Mach held, in 279 (0.010 above) a 5-deg turn; flown, the truth put booms emitted after the
# action over the zone's limit in both. Near the cutoff the booms graze and focus and the
# trials' margin is what keeps them honest: there is no search at the limit there since, and
# what is offered (as before that search came) keeps every boom emitted from the action on
# under the limit.
@pytest.mark.parametrize("index, limit_psf", [
    pytest.param(208, 0.69, id="near-cutoff-208"), pytest.param(279, 1.01, id="near-cutoff-279")])
def test_no_resolution_at_the_limit_near_the_cutoff(index, limit_psf) -> None:
    sc = scenario_from_dict(sample_encounter(1, index, known=True).doc)
    assert sc.zones[0].limit_psf == pytest.approx(limit_psf)  # the encounter meant
    res = simulate(dataclasses.replace(sc, crew=dataclasses.replace(sc.crew, mode="follow")))
    r = res.resolution()
    assert r["followed"], "no resolution was offered and flown"
    assert not r["exceeds_after_action"], \
        f"booms emitted after the action reach {r['peak_psf_after_action']:.2f} psf"


def test_trials_read_every_node_of_the_outer_strips() -> None:
    # The trials' azimuth nodes (advisory.pipeline.trial.trial_nodes): on the
    # default table's 31 nodes in 10 strips (nodes 0, 3, ..., 30), every node of the two
    # outer strips and the strip nodes between (listed by hand); on the campaign's 15
    # nodes, whose outer strips are one node interval wide, the strip nodes alone.
    assert trial_nodes(np.arange(0, 31, 3)).tolist() == [
        0, 1, 2, 3, 6, 9, 12, 15, 18, 21, 24, 27, 28, 29, 30]
    strips15 = np.array([0, 1, 3, 4, 6, 7, 8, 10, 11, 13, 14])
    assert trial_nodes(strips15).tolist() == strips15.tolist()
