"""Closed loop: fly a scenario with the advisor in the loop and the crew following it.

:func:`simulate` flies a scenario (:mod:`advisory.bench.sim_scenario`):

1. the point-mass simulator (:mod:`advisory.bench.flight`) at a fine internal step (the
   source's frame period split into steps of at most :data:`MAX_STEP_S`);
2. at the source's rate, the true state goes through the source model
   (:mod:`advisory.bench.feed`: latency, jitter, noise, faults) into an
   :class:`~advisory.service.loop.AdvisoryLoop`, the very loop ``run`` drives, with an
   advisor built as ``replay`` builds it (:func:`advisory.bench.scenario.make_loop`:
   table, zones, thresholds, a default validator), fed at the receive times and polled
   on the loop's own schedule (a frame received at the instant of a poll is fed first,
   as in a replay);
3. the crew (:mod:`advisory.bench.crew`) reads every advisory frame and, after its
   reaction time, takes over the flight with the resolution;
4. afterwards, the truth (:func:`advisory.bench.truth.trace_truth`) along the path
   actually flown (the true state, not the feed), through the TRUE atmosphere, to every
   zone's ground elevation, and the score (:func:`advisory.bench.scoring.score_flight`)
   of the advisory frames against it: the report of ``docs/scenarios.md``.

Nothing reads a clock: the monotonic and UTC times the loop sees are the flight's own
(:data:`MONO_START_S`, :data:`START_UTC_S` plus flight time), and every random draw comes
from the scenario's seed, so the same scenario gives the same bytes and the same report.

:func:`run_encounter` is the campaigns' unit of work (a plain dict in, a plain dict out).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import json
import math
from collections import deque
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from advisory.bench import calibration
from advisory.bench.crew import Crew, CrewAction
from advisory.bench.expect import Segment as StatusSegment
from advisory.bench.expect import segments_of
from advisory.bench.feed import Chunk, FeedEncoder, stamp_header
from advisory.bench.flight import FlightState, FlightTrack, Pilot
from advisory.bench.replay import replay_log
from advisory.bench.replay_truth import FlightTruth, figure_data
from advisory.bench.report import write_report
from advisory.bench.result import ReplayResult
from advisory.bench.scenario import prepare
from advisory.bench.scoring import FlightScore, score_flight, zone_hits
from advisory.bench.sim_scenario import Scenario, scenario_from_dict
from advisory.bench.sim_world import World, build_world
from advisory.bench.truth import FlownPath, Truth, TruthSettings, trace_truth
from advisory.bench.truth_act_by import truth_act_by
from advisory.bench.truth_zones import TruthZone
from advisory.io.messages import decode_frame
from advisory.io.records import Recorder
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import load_config
from advisory.pipeline.state import StateValidator
from advisory.schema import SAFETY_CAUTION
from advisory.service.loop import AdvisoryLoop
from advisory.tables.levels import level_table
from advisory.tables.table import BoomTable

MAX_STEP_S = 0.025  #: longest internal simulator step, s
MONO_START_S = 1000.0  #: the loop's monotonic clock at flight time 0, s
#: UTC at flight time 0 (an arbitrary invented date, as the demo flights').
START_UTC_S = 1939215600.0
HEARTBEAT_S = 1.0  #: status heartbeat, s (``run``'s default)


@dataclass
class SimulationResult:
    """What :func:`simulate` gives.

    Attributes
    ----------
    scenario : Scenario
    outputs : list of (monotonic s, UTC s, payload)
        Every frame the loop published.
    segments : list of advisory.bench.expect.Segment
        Status segments of the advisory frames (s after the start of the flight).
    truth : Truth
        The ground truth of the path flown.
    path : FlownPath
        The path flown (true state), as traced.
    score : FlightScore
        Exposures, nuisance alerts, unavailable time.
    actions : list of CrewAction
        What the crew did.
    feed_counts : dict
        What the source sent (frames, dropped, faults).
    counters : dict
        The loop's counters at the end.
    truth_zones : list of TruthZone
        The zones the truth was traced for.
    calibration : dict or None
        What the advisor first said about the cutoff Mach, and the truth's cutoff there
        (:mod:`advisory.bench.calibration`).
    """

    scenario: Scenario
    outputs: list[Chunk] = field(default_factory=list)
    segments: list[StatusSegment] = field(default_factory=list)
    truth: Truth | None = None
    path: FlownPath | None = None
    score: FlightScore = field(default_factory=FlightScore)
    actions: list[CrewAction] = field(default_factory=list)
    feed_counts: dict[str, int] = field(default_factory=dict)
    counters: dict[str, int] = field(default_factory=dict)
    truth_zones: list[TruthZone] = field(default_factory=list)
    calibration: dict[str, Any] | None = None

    def resolution(self) -> dict[str, Any]:
        """``followed`` (the crew acted on a cue), ``kind`` (``mach``/``turn``/None),
        ``avoided`` (the crew acted and no boom reached the zone the cue named),
        ``peak_psf_after_action`` and ``exceeds_after_action``: the peak of the booms in
        that zone emitted from the action's start on (None when none lands) and whether it
        is over the zone's limit. A resolution answers for those booms only: the ones
        emitted before the crew acted were on their way already (the trials judge the
        emissions after the reaction time the same way)."""
        if not self.actions:
            return {"followed": False, "kind": None, "avoided": None}
        a = self.actions[0]
        reached = {e["zone_id"] for e in self.score.exposures}
        out = {"followed": True, "kind": a.kind, "avoided": a.zone_id not in reached,
               "zone_id": a.zone_id, "cue_s": a.cue_t_s, "acted_s": a.t_s,
               "peak_psf_after_action": None, "exceeds_after_action": False}
        zone = next((z for z in self.truth_zones if z.zone_id == a.zone_id), None)
        if zone is not None and self.truth is not None:
            emitted, _, psf, _ = zone_hits(self.truth, zone)
            after = psf[emitted >= a.t_s]
            if after.size:
                peak = float(after.max())
                out.update(peak_psf_after_action=peak,
                           exceeds_after_action=bool(peak > zone.limit_psf))
        return out

    def as_json(self) -> dict[str, Any]:
        """The ``simulate --json`` object of ``docs/scenarios.md`` (no wall-clock values)."""
        sc = self.scenario
        return {
            "scenario": sc.name, "caution": SAFETY_CAUTION, "duration_s": sc.duration_s,
            "crew_mode": sc.crew.mode,
            "exposures": self.score.exposures,
            "nuisance_alerts": self.score.nuisance_alerts,
            "resolution": self.resolution(),
            "unavailable_s": self.score.unavailable_s,
            "feed": dict(self.feed_counts),
            "calibration": self.calibration,
        }


def make_sim_loop(sc: Scenario, world: World, recorder: Recorder | None = None
                  ) -> AdvisoryLoop:
    """The advisor and loop as :func:`advisory.bench.scenario.make_loop` builds them for a
    replay (same classes and arguments; the table and zones are already in memory)."""
    def levels(table: BoomTable, ground_m: float) -> BoomTable:  # zones on higher ground
        return level_table(table, ground_m, quiet=True, workers=world.build_workers)

    advisor = Advisor(world.table, world.zones, load_config(sc.advisor.config),
                      level_tables=levels)
    return AdvisoryLoop(advisor, input_format=sc.source.format, rate_hz=sc.advisor.rate_hz,
                        heartbeat_s=HEARTBEAT_S, recorder=recorder,
                        validator=StateValidator())


class _Flight:
    """One closed-loop flight in progress (see the module notes)."""

    def __init__(self, sc: Scenario, world: World, loop: AdvisoryLoop) -> None:
        st = sc.start
        self.sc, self.loop = sc, loop
        self.state = FlightState(world.true_atmosphere, st.lat_deg, st.lon_deg, st.alt_ft,
                                 st.mach, st.heading_deg, st.fpa_deg, st.bank_deg,
                                 targets=sc.source.targets)
        self.pilot = Pilot(sc.schedule)
        self.crew = Crew(sc.crew)
        self.track = FlightTrack()
        self.feed = FeedEncoder(sc.source, sc.seed, MONO_START_S, START_UTC_S)
        self.pending: deque[Chunk] = deque()
        self.outputs: list[Chunk] = []
        #: What the advisor first said about the cutoff (:func:`calibration.take`).
        self.said: dict[str, Any] | None = None

    def run(self) -> None:
        sc = self.sc
        k = max(1, math.ceil((1.0 / sc.source.rate_hz) / MAX_STEP_S - 1e-9))
        dt = 1.0 / (sc.source.rate_hz * k)
        n = int(round(sc.duration_s * sc.source.rate_hz)) * k
        seq = 0
        for i in range(n + 1):
            t = i * dt
            action = self.crew.due(t)
            if action is not None:
                for segment in action.segments():  # a combined one: slow down and turn
                    self.pilot.take_over(segment, self.state)
            self.pilot.update(self.state, dt)
            self.track.add(self.state)
            sample = self.state.step(dt, t)
            if i % k == 0:
                self.pending.extend(self.feed.encode(sample, seq))
                seq += 1
            self.drain(MONO_START_S + t)
        self.drain(MONO_START_S + sc.duration_s + 1.0 / sc.advisor.rate_hz)

    def drain(self, until: float) -> None:
        """Feed and poll, in time order, everything due by monotonic time ``until``."""
        loop, offset = self.loop, START_UTC_S - MONO_START_S
        while True:
            t_feed = self.pending[0][0] if self.pending else math.inf
            t_poll = loop.next_wake()
            if min(t_feed, t_poll) > until:
                return
            if t_feed <= t_poll:
                mono, utc, data = self.pending.popleft()
                loop.feed(data, mono, utc)
                continue
            for payload in loop.poll(t_poll, t_poll + offset):
                self.outputs.append((t_poll, t_poll + offset, payload))
                f = decode_frame(payload)
                if f.type == "adv":
                    self.crew.see(t_poll - MONO_START_S, f.fields)
                    if self.said is None:
                        self.said = calibration.take(loop, t_poll - MONO_START_S)


def simulate(scenario: Scenario, record: str | Path | None = None, quiet: bool = True,
             world: World | None = None) -> SimulationResult:
    """Fly ``scenario`` in the closed loop and score it against the truth (module notes).

    Parameters
    ----------
    scenario : Scenario
    record : path, optional
        Write the loop's record file there (raw input and outputs, as ``run`` records;
        ``replay`` plays it).
    quiet : bool
        No message on stderr while a table is built.
    world : World, optional
        The scenario's world when already built (:func:`advisory.bench.sim_world.build_world`).

    Raises
    ------
    ValueError
        A scenario that cannot be flown (the message names the key and the value).
    """
    world = world or build_world(scenario, quiet)
    rec = None
    if record is not None:
        Path(record).unlink(missing_ok=True)
        rec = Recorder(record, fsync_interval_s=3600.0)
    try:
        loop = make_sim_loop(scenario, world, rec)
        flight = _Flight(scenario, world, loop)
        flight.run()
    finally:
        if rec is not None:
            rec.close()
            stamp_header(record or "", START_UTC_S)
    res = SimulationResult(scenario, outputs=flight.outputs,
                           actions=list(flight.crew.actions),
                           feed_counts=dict(flight.feed.counts), counters=loop.counters)
    res.segments = segments_of(res.outputs, MONO_START_S)
    ts = scenario.truth
    res.path = path = flight.track.flown_path(world.origin_deg, ts.emission_interval_s)
    res.truth = trace_truth(path, world.true_atmosphere, world.aircraft, world.truth_zones,
                            settings=TruthSettings(azimuth_step_deg=ts.azimuth_step_deg))
    res.score = score_flight(res.truth, res.segments, scenario.crew.reaction_s,
                             zones=world.truth_zones)
    res.truth_zones = list(world.truth_zones)
    res.calibration = calibration.judge(flight.said, world.true_atmosphere)
    if ts.act_by and scenario.crew.mode != "follow":
        _add_truth_act_by(res, world)
    return res


def _add_truth_act_by(res: SimulationResult, world: World) -> None:
    """Each exposure over its limit gains ``truth_act_by``
    (:func:`advisory.bench.truth_act_by.truth_act_by`)."""
    assert res.truth is not None
    for e in res.score.exposures:
        if not e["exceeds_limit"]:
            continue
        zone = next(z for z in world.truth_zones if z.zone_id == e["zone_id"])
        emitted, _, psf, _ = zone_hits(res.truth, zone)
        over = emitted[psf > zone.limit_psf]
        e["truth_act_by"] = truth_act_by(res.scenario, world, e, float(over.min()))


def run_encounter(doc: dict[str, Any], crew_follows: bool) -> dict[str, Any]:
    """Fly one encounter (a scenario as a plain dict, ``docs/scenarios.md`` schema, inline
    zones) with the crew following the cues or ignoring them; the ``simulate --json``
    object.

    Pure and picklable: the same dict and flag give the same result in any process
    (seeded; the table is built once per machine and cached). A campaign's engine runs
    one encounter per core, so a missing table is built in this process (a pool of
    builder processes inside every campaign worker would only fight for the same cores).
    """
    sc = scenario_from_dict(doc)
    sc = replace(sc, crew=replace(sc.crew, mode="follow" if crew_follows else "ignore"))
    return simulate(sc, world=build_world(sc, quiet=True, build_workers=1)).as_json()


RECORD_NAME = "flight.rec"  #: the run's record file in a ``--report`` directory


def simulate_with_report(scenario: Scenario, out_dir: str | Path, quiet: bool = True
                         ) -> tuple[SimulationResult, Path]:
    """:func:`simulate` writing the run's record file into ``out_dir`` (``flight.rec``,
    its zones as ``zones.geojson`` when inline) and the replay report of that record
    (:func:`advisory.bench.report.write_report`, with the caution); returns the result
    and the report's HTML file."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    world = build_world(scenario, quiet)
    res = simulate(scenario, record=out / RECORD_NAME, quiet=quiet, world=world)
    if scenario.zones_file is not None:
        zones = scenario.zones_file
    else:
        zones = str(out / "zones.geojson")
        Path(zones).write_text(json.dumps(world.zones_geojson, indent=1) + "\n",
                               encoding="utf-8")
    if world.table.path is None:  # cached_table and BoomTable.load always set it
        raise ValueError(f"scenario {scenario.name}: the advisor's table has no file")
    setup = prepare(out / RECORD_NAME, zones=zones, table=world.table.path,
                    config=scenario.advisor.config, collect=True,
                    input_format=scenario.source.format, rate_hz=scenario.advisor.rate_hz,
                    quiet=quiet)
    setup = replace(setup, name=scenario.name, title=scenario.title or scenario.name,
                    description=scenario.description)
    replayed = replay_log(setup)
    _attach_truth(replayed, res, world)
    html = write_report([replayed], out, title=f"boom-advisory simulate: {scenario.name}")
    (out / "simulate.json").write_text(json.dumps(res.as_json(), indent=1) + "\n",
                                       encoding="utf-8")
    return res, html


def _attach_truth(replayed: ReplayResult, res: SimulationResult, world: World) -> None:
    """Put the simulator's truth (the path actually flown, not one rebuilt from the frames)
    on the replay for the report, scored on the replay's clock (which starts at the first
    input, a few ms after the flight)."""
    assert res.truth is not None and res.path is not None
    t0 = replayed.t0_monotonic - MONO_START_S
    score = score_flight(res.truth, replayed.segments, res.scenario.crew.reaction_s, t0,
                         zones=world.truth_zones)
    names = {z.id: z.name for z in world.zones}
    ft = FlightTruth(res.path, res.truth, list(world.truth_zones), names, score,
                     "scenario [atmosphere] (the simulator's true air)",
                     len(res.path.time_s), 0.0)
    replayed.truth = score.as_json()
    replayed.truth_figure = figure_data(ft)
