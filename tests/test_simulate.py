"""Scenario files, the crew model, the closed loop and ``boom-advisory simulate``.

The closed loop is judged by the truth (the direct tracer along the path actually flown),
never by the advisor's own output; each check names its source beside it.
"""

from __future__ import annotations

import contextlib
import copy
import io
import json
import pickle
from pathlib import Path

import pytest

from advisory.bench.closed_loop import run_encounter, simulate
from advisory.bench.crew import Crew
from advisory.bench.replay import replay_log
from advisory.bench.scenario import prepare
from advisory.bench.sim_scenario import (
    CrewSpec,
    ScenarioError,
    load_scenario_file,
    scenario_from_dict,
)
from advisory.bench.sim_world import build_world
from advisory.cli import main
from advisory.schema import SAFETY_CAUTION


def encounter(**over) -> dict:
    """Straight and level at Mach 1.4 toward a town 80 km ahead (invented), coarse truth.

    80 km, not closer: since issue 13 the advisor offers only a resolution it has
    trial-flown, and from 35 km nothing clears (the truth agrees: the booms of the next
    seconds land in the town whatever the crew does)."""
    doc = {
        "name": "toward_testford", "duration_s": 300.0, "seed": 5,
        "start": {"lat_deg": 30.1, "lon_deg": -141.2, "alt_ft": 45000.0, "mach": 1.40,
                  "heading_deg": 90.0},
        "zones": [{"id": "testford", "circle": [30.1, -140.37, 3.0], "margin_km": 1.0}],
        "crew": {"mode": "ignore", "reaction_s": 3.0, "decel_mach_per_s": 0.03},
        "truth": {"emission_interval_s": 0.5, "azimuth_step_deg": 3.0},
    }
    doc.update(over)
    return doc


def run_cli(argv: list[str]) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(argv)
    return code, out.getvalue(), err.getvalue()


def write_toml(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


GOOD = """
name = "bad_case"
duration_s = 60.0
[start]
lat_deg = 30.0
lon_deg = -140.0
alt_ft = 45000.0
mach = 1.4
heading_deg = 90.0
"""


@pytest.mark.parametrize("extra, named", [
    ("[crew]\nmode = \"sleep\"\n", "crew.mode = 'sleep'"),
    ("[source]\nrate_hz = 500.0\n", "source.rate_hz = 500.0"),
    ("[start2]\nx = 1\n", "start2"),
    ("[[schedule]]\nkind = \"loop\"\n", "schedule[0].kind = 'loop'"),
    ("[[schedule]]\nkind = \"turn\"\nbank_deg = 30.0\n", "schedule[0]: give exactly one"),
    ("[[zones]]\nid = \"a\"\ncircle = [30.0, -139.0, -1.0]\n", "zones[0].circle"),
    ("[atmosphere]\nisa_offset_c = 5.0\nlevels = [[0.0, 15.0, 0.0, 0.0], [1.0, 1.0, 0.0, 0.0]]\n",
     "atmosphere: give at most one"),
])
def test_bad_scenario_is_refused_in_one_line_naming_the_key(tmp_path, extra, named) -> None:
    # Common practice, no source: one line naming the key and the value, exit code 2.
    p = write_toml(tmp_path / "s.toml", GOOD + extra)
    code, out, err = run_cli(["simulate", str(p)])
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and named in err, err


def test_missing_required_key_and_out_of_range_value() -> None:
    # Common practice, no source: the message names the key (and the value).
    doc = encounter()
    del doc["start"]["mach"]
    with pytest.raises(ScenarioError, match=r"start\.mach: missing"):
        scenario_from_dict(doc)
    with pytest.raises(ScenarioError, match=r"duration_s = 9000.0: must be in"):
        scenario_from_dict(encounter(duration_s=9000.0))
    sc = scenario_from_dict(encounter())
    assert sc.zones[0].margin_km == 1.0 and sc.source.rate_hz == 20.0


def test_crew_prefers_the_mach_resolution_then_the_smaller_turn() -> None:
    # docs/scenarios.md: Mach resolution when offered, else the smaller turn; acts after
    # its reaction time, from the first frame at or above act_on.
    crew = Crew(CrewSpec(mode="follow", reaction_s=4.0, bank_deg=25.0))
    both = {"status": "caution", "zone_id": "z", "max_mach_off_ground": 1.12,
            "turn_left_deg": 10.0, "turn_right_deg": 30.0}
    kind, seg = crew.choose(both)
    assert kind == "mach" and seg.target_mach == 1.12
    kind, seg = crew.choose({**both, "max_mach_off_ground": None})
    assert kind == "turn" and seg.heading_change_deg == -10.0 and seg.bank_deg == -25.0
    crew.see(1.0, {**both, "status": "advisory"})  # below act_on = caution
    assert crew.pending is None
    crew.see(2.0, both)
    assert crew.due(5.9) is None
    action = crew.due(6.0)
    assert action is not None and action.kind == "mach" and action.cue_t_s == 2.0
    idle = Crew(CrewSpec(mode="ignore"))
    idle.see(0.0, both)
    assert idle.pending is None and idle.due(100.0) is None


@pytest.fixture(scope="module")
def both_runs() -> tuple[dict, dict]:
    return run_encounter(encounter(), False), run_encounter(encounter(), True)


def test_following_the_mach_cue_reduces_the_exposure_the_truth_shows(both_runs) -> None:
    # The truth (direct tracing along the path flown, not the advisor) says the ignore run
    # exposes the town over its limit; the crew that follows the Mach cue avoids or
    # reduces it (docs/scenarios.md; common practice, no source).
    ignore, follow = both_runs
    exp_i = {e["zone_id"]: e for e in ignore["exposures"]}
    assert exp_i["testford"]["exceeds_limit"] and exp_i["testford"]["outcome"] != "missed"
    assert not ignore["resolution"]["followed"]
    r = follow["resolution"]
    assert r["followed"] and r["kind"] == "mach" and r["zone_id"] == "testford"
    exp_f = {e["zone_id"]: e for e in follow["exposures"]}
    if "testford" in exp_f:
        assert exp_f["testford"]["peak_psf"] < 0.5 * exp_i["testford"]["peak_psf"]
        assert exp_f["testford"]["last_arrival_s"] - exp_f["testford"]["first_arrival_s"] < \
            exp_i["testford"]["last_arrival_s"] - exp_i["testford"]["first_arrival_s"]
    else:
        assert r["avoided"] is True
    # the booms emitted from the crew's action on: the checked Mach answers for them, so
    # none of them is over the town's limit (the truth; docs/scenarios.md)
    assert r["acted_s"] == pytest.approx(r["cue_s"] + encounter()["crew"]["reaction_s"])
    assert r["exceeds_after_action"] is False
    if r["peak_psf_after_action"] is not None and "testford" in exp_f:
        assert r["peak_psf_after_action"] <= exp_f["testford"]["peak_psf"]
    for doc in both_runs:
        assert doc["caution"] == SAFETY_CAUTION and doc["unavailable_s"] == 0.0


def test_run_encounter_is_deterministic_and_picklable(both_runs) -> None:
    # Same inputs, same outputs (seeded), in this process or another (campaigns).
    doc = encounter(duration_s=20.0, source={"noise": {"mach": 0.002}, "jitter_s": 0.01})
    a = run_encounter(copy.deepcopy(doc), True)
    b = pickle.loads(pickle.dumps(run_encounter))(copy.deepcopy(doc), True)
    assert json.dumps(a, sort_keys=True) == json.dumps(b, sort_keys=True)
    json.dumps(both_runs[0])  # plain JSON


def test_simulate_json_and_report(tmp_path) -> None:
    # The record file of the run replays byte for byte through the loop (docs of replay:
    # a log with recorded outputs is polled at their times), and the report is written.
    p = tmp_path / "enc.toml"
    doc = encounter(duration_s=30.0)
    lines = [f'name = "{doc["name"]}"', f"duration_s = {doc['duration_s']}",
             "[start]"] + [f"{k} = {v}" for k, v in doc["start"].items()]
    lines += ["[[zones]]", 'id = "testford"', "circle = [30.1, -140.83, 3.0]",
              "[truth]", "emission_interval_s = 1.0", "azimuth_step_deg = 5.0"]
    write_toml(p, "\n".join(lines) + "\n")
    code, out, _ = run_cli(["simulate", str(p), "--json", "--report", str(tmp_path / "r")])
    assert code == 0
    res = json.loads(out)
    assert res["scenario"] == "toward_testford" and res["caution"] == SAFETY_CAUTION
    assert (tmp_path / "r" / "report.html").is_file()
    assert SAFETY_CAUTION.split(".")[0] in (tmp_path / "r" / "report.html").read_text()
    table = build_world(load_scenario_file(p)).table.path
    assert table is not None
    setup = prepare(tmp_path / "r" / "flight.rec", zones=str(tmp_path / "r" / "zones.geojson"),
                    table=table)
    assert replay_log(setup).recorded_match
    code, out, _ = run_cli(["simulate", str(p)])
    assert code == 0 and out.startswith(SAFETY_CAUTION) and "testford" in out


def test_simulate_result_keeps_the_frames_and_counts(tmp_path) -> None:
    # A dropout in the feed shows as unavailable time (docs/scenarios.md: the status said
    # unavailable), judged from the loop's own frames.
    sc = scenario_from_dict(encounter(duration_s=20.0, source={
        "faults": [{"kind": "dropout", "t0_s": 5.0, "t1_s": 10.0}]}))
    res = simulate(sc)
    assert res.feed_counts["dropped"] == 100
    assert 3.5 < res.score.unavailable_s < 6.0
    assert any(s.status == "unavailable" for s in res.segments)
