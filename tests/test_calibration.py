"""The campaign reports the calibration of the advisor's confidence (issue 16, item 5).

What the advisor says about the cutoff Mach at the start of each flight is judged against
the truth's air (:mod:`advisory.bench.calibration`); the campaign sums it
(:func:`advisory.bench.campaign_stats.calibration_metrics`). Checked here against closed
forms: Snell's law in still air (the cutoff Mach is the ratio of the sound speeds at the
ground and at the aircraft, sound speeds from ``ambiance``, U.S. Standard Atmosphere
1976), the coverage of a normal interval and the expected Brier score of a calibrated
probability (``E[p (1 - p)]``: Brier, Monthly Weather Review 78, 1950; Murphy's
decomposition, J. Appl. Meteor. 12, 1973, with zero reliability term), with ``scipy``.
``campaign --near-cutoff`` starts every flight within -0.04/+0.03 of the cutoff: checked
against the same closed form.

Before this issue the campaign reported no calibration and could not sample the flights
where the margin under the cutoff decides.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from ambiance import Atmosphere as RefAtmosphere
from scipy.stats import binomtest, norm

from advisory.bench.calibration import judge
from advisory.bench.campaign_sample import NEAR_CUTOFF_OFFSET, sample_encounter
from advisory.bench.campaign_stats import calibration_metrics
from advisory.cli import main
from advisory.physics.atmosphere import standard_atmosphere
from advisory.schema import SAFETY_CAUTION


def said(alt_m=15000.0, mach=1.2, cutoff=1.15, sigma=0.01, confidence=0.95, margin=None):
    z1 = norm.ppf(confidence)
    return {"t_s": 0.1, "alt_m": alt_m, "mach": mach, "heading_rad": 0.0, "fpa_rad": 0.0,
            "ground_m": 0.0, "cutoff_mach": cutoff, "cutoff_sigma": sigma,
            "confidence": confidence if sigma else None,
            "margin_mach": margin if margin is not None else z1 * sigma,
            "boom_probability": None if not sigma else float(norm.cdf((mach - cutoff) / sigma))}


def test_judge_takes_the_truths_cutoff_by_snells_law():
    ref = RefAtmosphere([0.0, 15000.0])
    c0, ca = (float(v) for v in ref.speed_of_sound)
    out = judge(said(mach=1.2), standard_atmosphere())
    assert out["truth_cutoff_mach"] == pytest.approx(c0 / ca, abs=5e-4)  # 1.1533
    assert out["truth_reaches"] is True
    assert judge(said(mach=1.14), standard_atmosphere())["truth_reaches"] is False
    # a day 10 K colder everywhere: c ~ sqrt(T) (ideal gas)
    t0, ta = (float(v) for v in ref.temperature)
    cold = judge(said(), standard_atmosphere(-10.0))["truth_cutoff_mach"]
    assert cold == pytest.approx(math.sqrt((t0 - 10.0) / (ta - 10.0)), abs=5e-4)
    assert judge(None, standard_atmosphere()) is None


def synthetic(n, stated_sigma, true_sigma, seed=11):
    """Points whose truth cutoff is drawn N(cutoff, true_sigma) about what was said."""
    rng = np.random.default_rng(seed)
    pts = []
    for _ in range(n):
        cut = rng.uniform(1.1, 1.2)
        mach = cut + rng.uniform(-0.04, 0.04)
        p = said(mach=mach, cutoff=cut, sigma=stated_sigma)
        truth = cut + rng.normal(0.0, true_sigma)
        p.update(truth_cutoff_mach=truth, truth_reaches=bool(mach > truth))
        pts.append(p)
    return pts


def test_calibration_of_a_calibrated_spread_matches_closed_forms():
    pts = synthetic(4000, 0.01, 0.01)
    m = calibration_metrics(pts)
    assert m["of"] == 4000 and m["confidence"] == 0.95
    cov, exc = m["interval_coverage"], m["margin_exceedance"]
    # the counts are binomial about 95 % and 5 %: a two-sided test does not reject (scipy)
    assert binomtest(cov["count"], cov["of"], 0.95).pvalue > 0.001
    assert binomtest(exc["count"], exc["of"], 0.05).pvalue > 0.001
    probs = np.array([p["boom_probability"] for p in pts])
    expected = float(np.mean(probs * (1.0 - probs)))  # E[p(1-p)], calibrated forecast
    se = float(np.std(probs * (1 - probs))) / math.sqrt(len(pts)) + 0.25 / math.sqrt(len(pts))
    assert m["brier_score"] == pytest.approx(expected, abs=4 * se)
    for b in m["reliability"]:  # each bin's observed fraction covers its stated mean
        if b["count"] >= 30:
            assert b["observed"]["low"] - 0.02 <= b["stated"] <= b["observed"]["high"] + 0.02


def test_calibration_shows_an_overconfident_spread():
    # stated sigma half the true one: a 95 % interval covers 2 Phi(0.98) - 1 = 67 %
    m = calibration_metrics(synthetic(4000, 0.005, 0.01))
    want = 2.0 * norm.cdf(1.96 * 0.5) - 1.0
    assert m["interval_coverage"]["value"] == pytest.approx(want, abs=0.03)
    assert m["margin_exceedance"]["value"] == pytest.approx(norm.sf(1.645 * 0.5), abs=0.03)


def test_fixed_margin_reports_only_its_exceedance():
    pts = synthetic(500, 0.01, 0.01)
    for p in pts:
        p.update(cutoff_sigma=None, confidence=None, boom_probability=None, margin_mach=0.02)
    m = calibration_metrics(pts)
    assert m["interval_coverage"]["of"] == 0 and m["brier_score"] is None
    # truth N(cutoff, 0.01) below cutoff - 0.02: Phi(-2) = 2.3 %
    assert binomtest(m["margin_exceedance"]["count"], 500, norm.cdf(-2.0)).pvalue > 0.001
    assert calibration_metrics([])["margin_exceedance"]["of"] == 0


def test_near_cutoff_encounters_start_near_the_cutoff():
    ref = RefAtmosphere([0.0, 15000.0])
    t0, t_trop = (float(v) for v in ref.temperature)  # 288.15 K, 216.65 K
    checked = 0
    for i in range(60):
        e = sample_encounter(3, i, near_cutoff=True)
        assert e.doc == sample_encounter(3, i, near_cutoff=True).doc  # seeded
        assert all(m["kind"] == "turn" for m in e.doc["schedule"])
        assert e.info["advisor_air"] == "spread" and e.doc["truth"]["act_by"]
        plan = e.doc["advisor"]["atmosphere"]
        if "levels" in plan or e.doc["start"]["alt_ft"] < 42000.0:
            continue
        # still air, T = standard + offset; from 42,000 ft pressure altitude up the aircraft
        # is in the isothermal layer whatever the offset (+-15 K moves it under 1 km)
        off = float(plan.get("isa_offset_c", 0.0))
        cut = math.sqrt((t0 + off) / (t_trop + off))
        d = e.doc["start"]["mach"] - cut
        assert NEAR_CUTOFF_OFFSET[0] - 2e-3 <= d <= NEAR_CUTOFF_OFFSET[1] + 2e-3, (i, d)
        checked += 1
    assert checked >= 5


@pytest.mark.slow
def test_near_cutoff_campaign_reports_calibration(tmp_path, capsys):
    assert main(["campaign", "--near-cutoff", "--count", "1", "--seed", "3", "--processes",
                 "1", "--json", "--out", str(tmp_path)]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["caution"] == SAFETY_CAUTION and doc["near_cutoff"] and doc["spread"]
    cal = doc["metrics"]["calibration"]
    assert cal["of"] == 1 and cal["interval_coverage"]["of"] == 1
    assert cal["confidence"] == 0.95 and 0.005 < cal["sigma_median"] < 0.03
    html = (tmp_path / "summary.html").read_text(encoding="utf-8")
    assert "interval_coverage" in html and "margin_exceedance" in html
    assert "near the cutoff Mach" in html
