"""Campaigns: sampling, statistics, engines (process pool and a real Dask LocalCluster on
127.0.0.1), the report files and the command line.

The engine and report tests fly a small stand-in of the closed loop (``toy_encounter``
below: a pure function of the scenario, flat geometry and the scenario's seed), so they
test the campaign machinery and not the advisor; the end-to-end campaign at the bottom
flies the real closed loop (:func:`advisory.bench.closed_loop.run_encounter`).
"""

from __future__ import annotations

import csv
import json
import math
import socket
import subprocess
import sys
from collections import Counter

import numpy as np
import pytest
from ambiance import Atmosphere as RefAtmosphere
from geographiclib.geodesic import Geodesic
from scipy.stats import binomtest

from advisory.bench.budgets import Report
from advisory.bench.campaign import run_campaign, sample_campaign
from advisory.bench.campaign_engine import (
    DaskEngine,
    EngineError,
    PoolEngine,
    dask_available,
    run_pair,
)
from advisory.bench.campaign_journal import JOURNAL_NAME, Journal, JournalError, campaign_header
from advisory.bench.campaign_report import (
    CSV_NAME,
    HTML_NAME,
    JSON_NAME,
    RUN_FIELDS,
    run_row,
    summary,
    write_outputs,
)
from advisory.bench.campaign_sample import (
    ADVISOR_AIR,
    GEOMETRIES,
    GEOMETRY_P,
    MANOEUVRES,
    TRUE_AIR,
    sample_encounter,
)
from advisory.bench.campaign_stats import (
    bootstrap_quantile,
    campaign_metrics,
    classify,
    wilson_interval,
)
from advisory.bench.closed_loop import run_encounter
from advisory.bench.context import QUICK, Context
from advisory.bench.sections_campaign import measure_campaign
from advisory.bench.sim_scenario import scenario_from_dict
from advisory.bench.sim_world import zone_feature
from advisory.cli import EXIT_USAGE, main
from advisory.pipeline.zones import ZoneSet
from advisory.schema import SAFETY_CAUTION

FT = 0.3048  # m per international foot (exact by definition)
WGS84 = Geodesic.WGS84

# ------------------------------------------------------------------ a stand-in runner


def toy_encounter(doc: dict, crew_follows: bool) -> dict:
    """A small stand-in of the closed loop: straight flight over a flat earth.

    The carpet is a strip two flight altitudes wide each side (the sampler's own rule of
    thumb); a zone whose edge lies inside it is exposed. The alert's lead time is drawn
    from the scenario's seed; the crew who follows avoids the boom when the lead time is
    longer than its reaction time. Deterministic in the scenario alone.
    """
    start, zone = doc["start"], doc["zones"][0]
    if "circle" in zone:
        lat, lon, radius_km = zone["circle"]
    else:
        ring = np.array(zone["polygon"])
        lat, lon = ring.mean(axis=0)
        radius_km = 3.0
    inv = WGS84.Inverse(start["lat_deg"], start["lon_deg"], lat, lon)
    rel = math.radians(inv["azi1"] - start["heading_deg"])
    cross_km = abs(inv["s12"] * math.sin(rel)) / 1000.0
    h_km = start["alt_ft"] * FT / 1000.0
    rng = np.random.default_rng(doc["seed"])
    lead = float(rng.normal(20.0, 30.0))
    reached = cross_km - radius_km < 2.0 * h_km
    exposures, nuisance = [], []
    avoided = crew_follows and lead > doc["crew"]["reaction_s"]
    if reached and not avoided:
        arrival = 0.8 * doc["duration_s"]
        outcome = "missed" if lead < -30.0 else ("late" if lead < 5.0 else "alerted")
        alert = None if outcome == "missed" else arrival - 60.0 - lead
        exposures.append({"zone_id": zone["id"], "first_arrival_s": arrival,
                          "last_arrival_s": arrival + 5.0, "peak_psf": 1.0,
                          "exceeds_limit": zone["limit_psf"] < 1.0,
                          "unavoidable_from_s": arrival - 60.0, "first_advisory_s": alert,
                          "first_caution_s": None, "first_warning_s": None,
                          "lead_time_s": None if alert is None else lead,
                          "missed": [], "outcome": outcome})
    elif not reached and rng.random() < 0.2:
        nuisance.append({"zone_id": zone["id"], "t0_s": 10.0, "t1_s": 20.0})
    return {"scenario": doc["name"], "caution": SAFETY_CAUTION,
            "duration_s": doc["duration_s"], "exposures": exposures,
            "nuisance_alerts": nuisance,
            "resolution": {"followed": crew_follows and reached, "kind": "mach",
                           "avoided": avoided},
            "unavailable_s": 2.0 if doc["source"]["faults"] else 0.0}


def failing_encounter(doc: dict, crew_follows: bool) -> dict:
    """Fails on every third encounter (a broken scenario must not stop a campaign)."""
    if int(doc["name"].rsplit("-", 1)[1]) % 3 == 0:
        raise RuntimeError("invented failure\nsecond line")
    return toy_encounter(doc, crew_follows)


# ------------------------------------------------------------------------- sampling


def test_sampling_is_seeded_and_independent_of_order_and_count():
    # common practice, no source: encounter i depends on (seed, i) only
    ten = sample_campaign(10, 7)
    twenty = sample_campaign(20, 7)
    assert [e.doc for e in ten] == [e.doc for e in twenty[:10]]
    assert sample_encounter(7, 5).doc == ten[5].doc
    assert sample_encounter(7, 5).doc == sample_encounter(7, 5).doc
    assert sample_encounter(8, 5).doc != ten[5].doc
    assert len({e.doc["name"] for e in twenty}) == 20


def test_known_encounters_are_the_same_flights_with_what_the_advisor_assumes():
    # issue 13's campaign: "atmosphere as the advisor knows it, crew following the cues";
    # the crew's numbers are the documented defaults of AdvisorConfig (pipeline/config.py)
    for i in range(12):
        plain, known = sample_encounter(3, i).doc, sample_encounter(3, i, known=True).doc
        assert "atmosphere" not in known["advisor"]  # given the truth's air
        assert known.get("atmosphere") == plain.get("atmosphere")
        assert (known["crew"]["reaction_s"], known["crew"]["decel_mach_per_s"],
                known["crew"]["bank_deg"], known["crew"]["roll_rate_deg_s"]) == (
                    5.0, 0.01, 25.0, 5.0)
        for key in ("start", "schedule", "source", "duration_s", "seed"):
            assert known[key] == plain[key], key
        assert known["truth"]["act_by"] is True and not plain.get("truth", {}).get("act_by")
        assert known["zones"] == plain["zones"]  # terrain included (the zone file's)


def test_sampled_values_stay_in_their_ranges():
    # ranges from issue 12 and the sampler's documented distributions
    encs = sample_campaign(400, 3)
    for e in encs:
        d, s, z = e.doc, e.doc["start"], e.doc["zones"][0]
        assert 1.05 <= s["mach"] <= 2.4
        assert 30000.0 <= s["alt_ft"] <= 65000.0
        assert 90.0 <= d["duration_s"] <= 150.0
        assert z["limit_psf"] == 0.0 or 0.3 <= z["limit_psf"] <= 1.5
        assert 0.0 <= z["ground_elevation_ft"] <= 6000.0
        assert 0.0 <= z["margin_km"] <= 3.0
        assert set(d) <= {"name", "title", "duration_s", "seed", "start", "schedule",
                          "atmosphere", "advisor", "zones", "source", "crew"}  # docs/scenarios.md
        for seg in d["schedule"]:
            assert seg["kind"] in MANOEUVRES
            if seg["kind"] == "mach":
                assert 1.02 <= seg["target_mach"] <= 2.4
            if seg["kind"] == "climb":
                assert 28000.0 <= seg["target_alt_ft"] <= 67000.0
        for f in d["source"]["faults"]:
            assert 0.0 < f["t0_s"] < f["t1_s"] <= d["duration_s"]
        if "circle" in z:
            assert 3.0 <= z["circle"][2] <= 15.0
            inv = WGS84.Inverse(s["lat_deg"], s["lon_deg"], z["circle"][0], z["circle"][1])
            if e.info["geometry"] == "ahead":  # on the initial track (geographiclib)
                dh = (inv["azi1"] - s["heading_deg"] + 180.0) % 360.0 - 180.0
                assert abs(dh) < 0.01
                # the near edge: where the boom emitted at U(40, T - 30) s lands, flying at
                # M a(h) (ambiance) plus the straight ray's run h / sqrt(M^2 - 1)
                h = s["alt_ft"] * FT
                v = s["mach"] * float(RefAtmosphere(h).speed_of_sound[0])
                edge = inv["s12"] - 1000.0 * (z["circle"][2] + z["margin_km"])
                run = h / math.sqrt(s["mach"] ** 2 - 1.0)
                assert v * 40.0 + run - 50.0 <= edge <= v * (d["duration_s"] - 30.0) + run + 50.0
        else:
            assert len(z["polygon"]) == 4
            assert 20.0 <= abs(e.info["crossing_angle_deg"]) <= 90.0
    info = Counter(e.info["geometry"] for e in encs)
    assert set(info) == set(GEOMETRIES)
    for g, p in zip(GEOMETRIES, GEOMETRY_P):  # 4.5 standard deviations of a binomial count
        assert abs(info[g] - 400 * p) < 4.5 * math.sqrt(400 * p * (1 - p))
    assert {e.info["true_air"] for e in encs} == set(TRUE_AIR)
    assert {e.info["advisor_air"] for e in encs} == set(ADVISOR_AIR)
    assert {e.info["manoeuvre"] for e in encs} == set(MANOEUVRES)


def test_sampled_profiles_follow_the_standard_atmosphere():
    # temperatures of the inline levels: ISA + offset, checked against ambiance (ISA 1993)
    for e in sample_campaign(60, 11):
        air = e.doc.get("atmosphere", {})
        if "levels" not in air:
            continue
        levels = np.array(air["levels"])
        ref = RefAtmosphere(levels[:, 0] * FT).temperature - 273.15
        offset = levels[:, 1] - ref
        assert np.ptp(offset) < 0.1 and abs(offset[0]) <= 15.01
        assert np.all(levels[:, 3] >= 0.0) and np.all(levels[:, 3] <= 120.0)


# ----------------------------------------------------------------------- statistics


@pytest.mark.parametrize(("k", "n"), [(0, 10), (1, 10), (5, 10), (10, 10), (3, 40),
                                      (17, 250), (999, 1000)])
def test_wilson_interval_matches_scipy(k, n):
    # scipy.stats.binomtest(...).proportion_ci(method="wilson"), 95 %
    ref = binomtest(k, n).proportion_ci(confidence_level=0.95, method="wilson")
    low, high = wilson_interval(k, n)
    assert low == pytest.approx(ref.low, abs=1e-12)
    assert high == pytest.approx(ref.high, abs=1e-12)


def test_wilson_worked_example():
    # worked example (value from memory: Newcombe, Stat. Med. 17 (1998) 857, Table II,
    # 81 of 263): 0.2553 to 0.3662
    low, high = wilson_interval(81, 263)
    assert (round(low, 4), round(high, 4)) == (0.2553, 0.3662)


def test_bootstrap_median_interval_against_normal_theory():
    # the median of n normal values has standard error sqrt(pi/2) sigma / sqrt(n)
    # (value from memory: the asymptotic variance of the sample median)
    x = np.random.default_rng(5).normal(0.0, 1.0, 2000)
    a = bootstrap_quantile(x, 0.5, np.random.default_rng(1))
    b = bootstrap_quantile(x, 0.5, np.random.default_rng(1))
    assert a == b  # seeded
    assert a["value"] == pytest.approx(np.median(x))
    half = 0.5 * (a["high"] - a["low"])
    assert half == pytest.approx(1.96 * math.sqrt(math.pi / 2) / math.sqrt(2000), rel=0.3)
    assert bootstrap_quantile(np.array([]), 0.5, np.random.default_rng(1))["value"] is None


def _run(exposures=(), nuisance=0, unavailable=0.0, duration=100.0, followed=False,
         after=False):
    return {"exposures": list(exposures), "nuisance_alerts": [{}] * nuisance,
            "unavailable_s": unavailable, "duration_s": duration,
            "resolution": {"followed": followed, "exceeds_after_action": after}}


def _exp(outcome, lead=None, exceeds=True, zone="z"):
    return {"zone_id": zone, "exceeds_limit": exceeds, "outcome": outcome, "lead_time_s": lead}


def test_metrics_of_hand_made_records():
    # counts worked out by hand from the definitions of docs/scenarios.md
    recs = [
        {"ignore": _run([_exp("alerted", 40.0)]), "follow": _run(followed=True)},  # resolved
        {"ignore": _run([_exp("late", 2.0)]),   # booms on their way only: held
         "follow": _run([_exp("late", 2.0)], followed=True)},
        {"ignore": _run([_exp("missed"), _exp("alerted", 30.0, zone="y")]),
         "follow": _run([_exp("alerted", 9.0, exceeds=False)])},               # resolved
        {"ignore": _run([_exp("alerted", 10.0, exceeds=False)]), "follow": _run()},
        {"ignore": _run(nuisance=2, unavailable=10.0), "follow": _run()},
        {"ignore": _run(), "follow": _run(unavailable=30.0)},
        {"error": "RuntimeError: x", "ignore": None, "follow": None},
    ]
    m = campaign_metrics(recs, seed=3)
    assert (m["missed_alert_rate"]["count"], m["missed_alert_rate"]["of"]) == (1, 3)
    assert (m["late_alert_rate"]["count"], m["late_alert_rate"]["of"]) == (1, 3)
    assert (m["resolution_success_rate"]["count"], m["resolution_success_rate"]["of"]) == (2, 3)
    # the two exposed encounters whose crew flew an offered resolution both held: in the
    # second only booms emitted before the action exceeded (on their way already)
    f = m["followed_resolution_success_rate"]
    assert (f["count"], f["of"]) == (2, 2)
    later = {"ignore": _run([_exp("alerted", 50.0)]),  # a boom emitted after the action
             "follow": _run([_exp("alerted", 50.0)], followed=True, after=True)}
    f = campaign_metrics([*recs, later], seed=3)["followed_resolution_success_rate"]
    assert (f["count"], f["of"]) == (2, 3)
    assert (m["nuisance_alert_rate"]["count"], m["nuisance_alert_rate"]["of"]) == (1, 2)
    assert m["lead_time_s"]["of"] == 3  # 40, 2 and 30 s
    assert m["lead_time_s"]["median"]["value"] == 30.0
    assert m["unavailable_fraction"]["value"] == pytest.approx(40.0 / 1200.0)
    assert m["scenarios"]["value"] == 6 and m["failed"] == 1
    assert m["missed_alert_rate"]["low"] <= 1 / 3 <= m["missed_alert_rate"]["high"]
    assert classify(recs[3])["class"] == "below_limit"
    assert campaign_metrics(recs, seed=3) == m  # seeded bootstrap
    empty = campaign_metrics([], seed=0)
    assert empty["missed_alert_rate"]["value"] is None and empty["scenarios"]["value"] == 0
    assert m["alerted_before_act_by_rate"]["of"] == 0  # no truth act-by in these records


def _act(avoidable, in_time=None):
    return {"avoidable": avoidable, "alerted_in_time": in_time}


def test_act_by_metrics_of_hand_made_records():
    # counts worked out by hand from the definitions of docs/scenarios.md: over the
    # exposed encounters the truth's act-by calls avoidable
    def exp(act):
        return {**_exp("alerted", 30.0), "truth_act_by": act}
    recs = [
        {"ignore": _run([exp(_act(True, True))]), "follow": _run(followed=True)},
        {"ignore": _run([exp(_act(True, False))]), "follow": _run()},  # late, no offer
        {"ignore": _run([exp(_act(True, True))]),                      # offer failed
         "follow": _run([_exp("alerted", 30.0)], followed=True, after=True)},
        {"ignore": _run([exp(_act(False))]), "follow": _run([_exp("alerted", 30.0)])},
        {"ignore": _run([exp(_act(True, True)), {**_exp("late", 1.0, zone="y"),
                                                 "truth_act_by": _act(True, False)}]),
         "follow": _run(followed=True)},  # one of its two avoidable exposures was late
    ]
    m = campaign_metrics(recs, seed=1)
    a = m["alerted_before_act_by_rate"]
    assert (a["count"], a["of"]) == (2, 4)
    r = m["avoidable_resolution_success_rate"]
    assert (r["count"], r["of"]) == (2, 4)
    assert classify(recs[3])["avoidable"] is False
    assert classify(recs[3])["alerted_in_time"] is None


# -------------------------------------------------------------------------- engines


def _strip(records):
    return [json.dumps(r, sort_keys=True) for r in records]


def test_run_pair_turns_a_failure_into_one_line():
    doc = sample_encounter(1, 0).doc
    rec = run_pair(0, doc, failing_encounter)
    assert rec["ignore"] is None and rec["error"] == "RuntimeError: invented failure second line"
    assert doc["crew"]["mode"] == "ignore"  # the caller's scenario is untouched


def test_process_pool_and_dask_localcluster_give_the_same_results():
    # same seed, same results, whatever the engine (common practice, no source)
    one = run_campaign(8, 21, PoolEngine(1), toy_encounter)
    two = run_campaign(8, 21, PoolEngine(2), toy_encounter)
    assert _strip(one.records) == _strip(two.records)
    assert one.metrics == two.metrics
    if not dask_available():
        pytest.skip("dask[distributed] not installed")
    dask = run_campaign(8, 21, DaskEngine(workers=2), toy_encounter)
    assert _strip(dask.records) == _strip(one.records)
    assert dask.metrics == one.metrics


def test_failures_are_counted_and_named(tmp_path):
    done = []
    res = run_campaign(9, 4, PoolEngine(2), failing_encounter,
                       progress=lambda d, t, f: done.append((d, t, f)))
    assert res.metrics["failed"] == 3 and res.metrics["scenarios"]["value"] == 6
    assert done[-1] == (9, 9, 3) and len(done) == 9
    s = summary(res)
    assert [f["index"] for f in s["failures"]] == [0, 3, 6]
    write_outputs(res, tmp_path)
    rows = list(csv.DictReader((tmp_path / CSV_NAME).open()))
    assert sum(bool(r["error"]) for r in rows) == 6  # both runs of 3 encounters


def test_report_files(tmp_path):
    res = run_campaign(30, 2, PoolEngine(2), toy_encounter)
    paths = write_outputs(res, tmp_path / "out")
    assert [p.name for p in paths] == [CSV_NAME, JSON_NAME, HTML_NAME]
    rows = list(csv.DictReader(paths[0].open()))
    assert len(rows) == 60 and {r["run"] for r in rows} == {"ignore", "follow"}
    assert [int(r["index"]) for r in rows[:4]] == [0, 0, 1, 1]
    data = json.loads(paths[1].read_text())
    assert data["caution"] == SAFETY_CAUTION
    for key in ("missed_alert_rate", "late_alert_rate", "nuisance_alert_rate",
                "resolution_success_rate", "unavailable_fraction", "scenarios"):
        assert {"value", "low", "high"} <= set(data["metrics"][key])
    assert {"median", "p5"} <= set(data["metrics"]["lead_time_s"])
    page = paths[2].read_text()
    assert SAFETY_CAUTION in page and page.count("<svg") == 2
    assert "<script" not in page


@pytest.mark.skipif(not dask_available(), reason="dask[distributed] not installed")
def test_existing_scheduler_and_an_unreachable_one():
    from dask.distributed import LocalCluster  # test-only: the optional extra

    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=None) as cluster:
        res = run_campaign(3, 5, DaskEngine(address=cluster.scheduler_address), toy_encounter)
    assert res.engine.startswith("Dask cluster at tcp://127.0.0.1:")
    assert _strip(res.records) == _strip(run_campaign(3, 5, PoolEngine(1), toy_encounter).records)
    with socket.socket() as s:  # a loopback port that nothing listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    engine = DaskEngine(address=f"tcp://127.0.0.1:{port}", connect_timeout_s=2.0)
    with pytest.raises(EngineError, match=f"--scheduler: cannot reach tcp://127.0.0.1:{port}"):
        list(engine.run(sample_campaign(1, 0), toy_encounter))


def test_dask_missing_says_how_to_install():
    # a fresh interpreter in which `import dask` fails, as on a machine without the extra
    code = ("import sys; sys.modules['dask'] = None\n"
            "from advisory.bench.campaign_engine import DaskEngine, PoolEngine, EngineError\n"
            "try:\n    DaskEngine(workers=2).check()\n"
            "except EngineError as exc:\n    print(exc)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         timeout=120, check=True).stdout
    assert out.strip() == "Dask is not installed: pip install 'boom-advisory[campaign]'"


# ---------------------------------------------------------------------- the journal


def test_a_resumed_campaign_flies_only_what_its_journal_lacks(tmp_path):
    # Bookkeeping, no source needed: a campaign stopped after 6 encounters (the machine
    # stopping mid-write of a 7th line) and resumed to 9 holds the records of one flown
    # at once. The resumed run flies with a runner that fails encounters 0, 3 and 6: the
    # first two come from the journal and do not fail, the third is flown and does.
    path = tmp_path / JOURNAL_NAME
    header = campaign_header(21, False, False, False, None)
    journal = Journal(path, header, resume=False)
    first = run_campaign(6, 21, PoolEngine(1), toy_encounter, on_record=journal.append)
    journal.close()
    with path.open("a") as f:
        f.write('{"index": 6, "ignore": {"scen')  # torn
    journal = Journal(path, header, resume=True)
    assert sorted(journal.done) == list(range(6))
    resumed = run_campaign(9, 21, PoolEngine(1), failing_encounter, done=journal.done,
                           on_record=journal.append)
    journal.close()
    assert resumed.resumed == 6 and first.resumed == 0
    at_once = run_campaign(9, 21, PoolEngine(1), toy_encounter)
    failed = [r["index"] for r in resumed.records if r.get("error")]
    assert failed == [6]
    assert [r for r in resumed.records if r["index"] != 6] == \
        [r for r in at_once.records if r["index"] != 6]
    lines = path.read_text().splitlines()
    assert all(json.loads(line) for line in lines)  # the torn line is gone
    again = Journal(path, header, resume=True)
    again.close()
    assert sorted(again.done) == [0, 1, 2, 3, 4, 5, 7, 8]
    # started afresh (no --resume) on it, the journal is kept, not thrown away
    kept = path.read_text()
    Journal(path, header, resume=False).close()
    assert (tmp_path / (JOURNAL_NAME + ".prev")).read_text() == kept
    assert len(path.read_text().splitlines()) == 1  # the header alone


def test_a_journal_of_another_campaign_is_refused(tmp_path, capsys):
    path = tmp_path / JOURNAL_NAME
    Journal(path, campaign_header(5, True, False, False, None), resume=False).close()
    other = campaign_header(6, True, False, False, None)
    with pytest.raises(JournalError, match="seed 5, this run 6"):
        Journal(path, other, resume=True)
    changed = dict(campaign_header(5, True, False, False, None), code_sha256="0" * 64)
    with pytest.raises(JournalError, match="code_sha256"):
        Journal(path, changed, resume=True)  # advice from other code is never mixed in
    # the command refuses it before flying anything: one line, exit 2
    assert main(["campaign", "--count", "1", "--seed", "6", "--known", "--out",
                 str(tmp_path), "--resume"]) == EXIT_USAGE
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "another campaign: seed 5, this run 6" in err[0], err
    path.write_text("not a journal\n")
    with pytest.raises(JournalError, match="not a campaign journal"):
        Journal(path, other, resume=True)


# ------------------------------------------------------------------- command line


def test_command_line_checks_its_options(capsys):
    for argv, needle in ((["--count", "0"], "--count: 0"), (["--count", "2", "--seed", "-1"],
                                                              "--seed: -1"),
                         (["--count", "2", "--workers", "0"], "--workers: 0"),
                         (["--count", "2", "--processes", "0"], "--processes: 0"),
                         (["--count", "2", "--scheduler", " "], "--scheduler: empty"),
                         (["--count", "2", "--resume"], "--resume: needs --out")):
        assert main(["campaign", *argv]) == EXIT_USAGE
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and needle in err[0], err


def test_command_line_without_dask_says_how_to_install():
    # a fresh interpreter in which `import dask` fails, as on a machine without the extra
    code = ("import sys; sys.modules['dask'] = None\n"
            "from advisory.cli import main\n"
            "sys.exit(main(['campaign', '--count', '1', '--workers', '2']))\n")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == EXIT_USAGE
    assert proc.stderr.strip() == ("boom-advisory campaign: error: Dask is not installed: "
                                   "pip install 'boom-advisory[campaign]'")


@pytest.mark.slow  # about 15 s: the 3-minute budget of the fast suite
def test_command_line_flies_a_real_encounter(tmp_path, capsys):
    # the real closed loop, one encounter in this process (the engine tests cover the rest)
    assert main(["campaign", "--count", "1", "--seed", "4", "--processes", "1", "--json",
                 "--out", str(tmp_path)]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["caution"] == SAFETY_CAUTION and doc["count"] == 1 and not doc["failures"]
    assert doc["metrics"]["scenarios"]["value"] == 1
    assert json.loads((tmp_path / JSON_NAME).read_text())["metrics"] == doc["metrics"]
    rows = list(csv.DictReader((tmp_path / CSV_NAME).open()))
    assert [r["run"] for r in rows] == ["ignore", "follow"] and rows[0]["error"] == ""
    header, record = map(json.loads, (tmp_path / JOURNAL_NAME).read_text().splitlines())
    assert header["seed"] == 4 and record["index"] == 0 and record["error"] is None


@pytest.mark.slow
@pytest.mark.skipif(not dask_available(), reason="dask[distributed] not installed")
def test_campaign_of_40_on_a_local_dask_cluster(tmp_path, capsys):
    # issue 12: >= 40 short encounters on a LocalCluster (2 workers, loopback), every
    # metric printed; then the first two again on a process pool: the same records
    out = tmp_path / "campaign"
    code = main(["campaign", "--count", "40", "--seed", "12", "--workers", "2",
                 "--out", str(out)])
    text = capsys.readouterr().out
    assert code == 0, text
    assert SAFETY_CAUTION in text
    for name in ("missed_alert_rate", "late_alert_rate", "nuisance_alert_rate",
                 "lead_time_s (median)", "lead_time_s (5th percentile)",
                 "resolution_success_rate", "unavailable_fraction", "scenarios"):
        assert name in text, name
    print(text)
    summary_doc = json.loads((out / JSON_NAME).read_text())
    assert summary_doc["metrics"]["scenarios"]["value"] == 40
    assert summary_doc["engine"] == "Dask LocalCluster, 2 workers x 1 thread"
    rows = list(csv.DictReader((out / CSV_NAME).open()))
    assert len(rows) == 80
    again = run_campaign(2, 12, PoolEngine(2), run_encounter)
    for rec in again.records:
        for mode in ("ignore", "follow"):
            fields = {k: str(v) for k, v in run_row(rec[mode], None).items()}
            assert fields == run_row_from_csv(rows, rec["index"], mode)


def run_row_from_csv(rows, index, mode):
    """The CSV row's run fields of one encounter and run."""
    row = next(r for r in rows if int(r["index"]) == index and r["run"] == mode)
    return {k: row[k] for k in RUN_FIELDS}


@pytest.mark.slow
@pytest.mark.skipif(not dask_available(), reason="dask[distributed] not installed")
def test_benchmark_section_measures_both_figures(tmp_path):
    # the bench's campaign section on one encounter (the figures are not judged here)
    report = Report()
    ctx = Context(quick=False, sizes=QUICK, work_dir=tmp_path, table_file=None,
                  skip_build=True, report=report, progress=lambda text: None)
    measure_campaign(ctx, 1)
    for key in ("campaign_rate", "dask_speedup"):
        assert report.rows[key].value is not None and report.rows[key].value > 0.0
        assert report.rows[key].status in ("pass", "short")
    assert not list(tmp_path.glob("campaign-tables-*"))  # the fresh caches are removed


def test_an_encounter_near_longitude_180_gets_a_zone_that_loads() -> None:
    # The 1,000-encounter baseline (seed 1) lost encounter 970: its zone, drawn west of
    # Fiji, straddled longitude 180 and the zone loader rightly refused the ring (RFC 7946
    # section 3.1.9: cut it there). The sampler moves such an encounter 20 deg of
    # longitude away; its geodesic distances (geographiclib, WGS84) do not change.
    doc = sample_encounter(1, 970).doc
    sc = scenario_from_dict(doc)
    geo = {"type": "FeatureCollection", "features": [zone_feature(z) for z in sc.zones]}
    assert len(ZoneSet.from_geojson(geo, source="encounter 970").zones) == 1
    ring = doc["zones"][0]["polygon"]
    assert max(lo for _, lo in ring) - min(lo for _, lo in ring) < 10.0
    start = doc["start"]
    g = Geodesic.WGS84.Inverse(start["lat_deg"], start["lon_deg"], ring[0][0], ring[0][1])
    assert 50e3 < g["s12"] < 300e3  # still ahead of the flight, as sampled
