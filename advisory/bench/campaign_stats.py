"""The metrics of a campaign and their 95 % intervals (docs/scenarios.md, "Metrics").

Each encounter is flown twice; its record holds both ``simulate --json`` objects
(``ignore``: the crew ignores the cues, ``follow``: the crew follows them). Over the
encounters whose ignore run has an exposure exceeding the zone's limit plus margin
("exposed"):

* ``missed_alert_rate``: the worst such exposure's outcome is ``missed``;
* ``late_alert_rate``: the worst is ``late`` (worst first: missed, late, alerted);
* ``resolution_success_rate``: the follow run has no exposure exceeding the limit in the
  zones the ignore run exceeded (the truth says the advice worked, whatever was cued);
* ``followed_resolution_success_rate``: over the exposed encounters whose follow run's
  crew was offered a resolution and flew it, no boom emitted from the action's start on
  exceeds the named zone's limit (does a checked resolution hold against the truth: it
  answers for the booms emitted after the crew acted, as its trials judge them; those
  already on their way are the advisor's "unavoidable" ones; the encounters where
  nothing was offered are left out);
* with the truth's act-by in the records (``campaign --known``;
  :mod:`advisory.bench.truth_act_by`), over the exposed encounters whose exposure a crew
  action could still avoid once the flight led into the zone (``avoidable``):
  ``alerted_before_act_by_rate`` (every such exposure alerted at least the reaction time
  before the truth's act-by) and ``avoidable_resolution_success_rate`` (the crew
  following the cues flew a resolution and no boom emitted from its action on exceeded
  the limit; no offer counts as a failure);
* ``lead_time_s``: median and 5th percentile over those exposures of the ignore runs
  that were alerted (outcome ``alerted`` or ``late``, lead time given).

Over the encounters whose ignore run has no exposure at all, ``nuisance_alert_rate``
(at least one nuisance alert). ``unavailable_fraction``: unavailable time over flight
time, every run. ``scenarios``: encounters counted (those that ran; failures are
counted apart). ``calibration`` (:func:`calibration_metrics`): what the advisor said
about the cutoff Mach at the start of each ignore run against the truth's air
(:mod:`advisory.bench.calibration`): the coverage of its interval, how often the truth's
cutoff fell below its margin, the Brier score and reliability of its probability.

Intervals: the Wilson score interval for rates (E. B. Wilson, "Probable inference, the
law of succession, and statistical inference", J. Amer. Statist. Assoc. 22 (1927)
209-212); the bootstrap percentile interval for the quantiles and the unavailable
fraction (B. Efron, R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall
1993, ch. 13), resampling encounters with a seeded generator, so the same records give
the same intervals. A rate over no encounter has no value (``None``).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from collections import Counter
from typing import Any

import numpy as np

from advisory.pipeline.confidence import z_two_sided

#: Two-sided 95 % standard normal quantile, Phi^-1(0.975) (any normal table).
Z95 = 1.959963984540054
#: Bootstrap resamples for the quantile intervals.
BOOTSTRAP_RESAMPLES = 2000
#: Worst first: the outcome an exposed encounter is counted under.
OUTCOME_RANK = {"alerted": 0, "late": 1, "missed": 2}

Interval = dict[str, Any]  #: ``{"value": v, "low": lo, "high": hi}`` (+ counts)


def wilson_interval(successes: int, trials: int, z: float = Z95) -> tuple[float, float]:
    """Wilson score interval of a binomial proportion.

    Parameters
    ----------
    successes, trials : int
        ``0 <= successes <= trials``, ``trials > 0``.
    z : float
        Standard normal quantile (1.96 for 95 %).

    Returns
    -------
    (low, high) : tuple of float
        ``(p + z^2/2n -+ z sqrt(p(1-p)/n + z^2/4n^2)) / (1 + z^2/n)`` with ``p = k/n``
        (Wilson 1927, eq. on p. 210; no continuity correction).
    """
    if trials <= 0 or not 0 <= successes <= trials:
        raise ValueError(f"wilson_interval: successes {successes} of trials {trials}")
    n = float(trials)
    p = successes / n
    denom = 1.0 + z * z / n
    centre = (p + z * z / (2.0 * n)) / denom
    half = z * math.sqrt(p * (1.0 - p) / n + z * z / (4.0 * n * n)) / denom
    return max(0.0, centre - half), min(1.0, centre + half)


def rate(successes: int, trials: int) -> Interval:
    """A rate with its Wilson interval; ``None`` values over no trial."""
    if trials == 0:
        return {"value": None, "low": None, "high": None, "count": 0, "of": 0}
    low, high = wilson_interval(successes, trials)
    return {"value": successes / trials, "low": low, "high": high,
            "count": successes, "of": trials}


def bootstrap_quantile(values: np.ndarray, q: float, rng: np.random.Generator,
                       resamples: int = BOOTSTRAP_RESAMPLES) -> Interval:
    """Quantile ``q`` of ``values`` with its 95 % bootstrap percentile interval.

    The quantile is numpy's default (linear interpolation between order statistics);
    the interval is the 2.5th and 97.5th percentiles of the quantile over ``resamples``
    resamples with replacement (Efron & Tibshirani 1993, ch. 13).
    """
    x = np.asarray(values, dtype=float)
    if x.size == 0:
        return {"value": None, "low": None, "high": None}
    idx = rng.integers(0, x.size, size=(resamples, x.size))
    boot = np.quantile(x[idx], q, axis=1)
    low, high = np.quantile(boot, [0.025, 0.975])
    return {"value": float(np.quantile(x, q)), "low": float(low), "high": float(high)}


def bootstrap_ratio(num: np.ndarray, den: np.ndarray, rng: np.random.Generator,
                    resamples: int = BOOTSTRAP_RESAMPLES) -> Interval:
    """``sum(num) / sum(den)`` with its 95 % bootstrap percentile interval (pairs resampled)."""
    a = np.asarray(num, dtype=float)
    b = np.asarray(den, dtype=float)
    if a.size == 0 or b.sum() <= 0.0:
        return {"value": None, "low": None, "high": None}
    idx = rng.integers(0, a.size, size=(resamples, a.size))
    with np.errstate(invalid="ignore", divide="ignore"):
        boot = a[idx].sum(axis=1) / b[idx].sum(axis=1)
    low, high = np.nanquantile(boot, [0.025, 0.975])
    return {"value": float(a.sum() / b.sum()), "low": float(low), "high": float(high)}


def _count(x: Any) -> int:
    """A list's length or a count (``nuisance_alerts`` may be either)."""
    return len(x) if isinstance(x, (list, tuple)) else int(x or 0)


def exceeding(run: dict[str, Any]) -> list[dict[str, Any]]:
    """The exposures of a run that exceed the zone's limit plus margin."""
    return [e for e in run.get("exposures", []) if e.get("exceeds_limit")]


def classify(record: dict[str, Any]) -> dict[str, Any]:
    """What one encounter counts for (see the module docstring).

    Returns
    -------
    dict
        ``class``: ``exposed`` / ``below_limit`` (exposures, none exceeding) / ``clear``
        (no exposure); ``outcome`` (worst outcome when exposed, else None);
        ``resolved`` (exposed: True when the follow run avoided it); ``nuisance``
        (clear: a nuisance alert in the ignore run); ``followed`` (exposed: the follow
        run's crew flew an offered resolution) and ``followed_held`` (no boom emitted from
        its start on exceeded the limit); with the truth's act-by in the record
        (``campaign --known``), ``avoidable`` (a crew action could keep the later booms
        off: :mod:`advisory.bench.truth_act_by`), ``alerted_in_time`` (every avoidable
        exposure alerted at least the reaction time before its act-by) and
        ``avoidable_resolved`` (the crew following the cues flew a resolution that held);
        ``lead_times`` (list, s).
    """
    ignore, follow = record["ignore"], record["follow"]
    over = exceeding(ignore)
    out: dict[str, Any] = {"class": "clear", "outcome": None, "resolved": None,
                           "followed": None, "followed_held": None, "nuisance": None,
                           "avoidable": None, "alerted_in_time": None,
                           "avoidable_resolved": None, "lead_times": []}
    if over:
        out["class"] = "exposed"
        out["outcome"] = max((e.get("outcome", "missed") for e in over),
                             key=lambda o: OUTCOME_RANK.get(o, 2))
        zones = {e.get("zone_id") for e in over}
        out["resolved"] = not any(e.get("zone_id") in zones for e in exceeding(follow))
        res = follow.get("resolution") or {}
        out["followed"] = bool(res.get("followed"))
        out["followed_held"] = out["followed"] and not res.get("exceeds_after_action")
        acts = [e["truth_act_by"] for e in over if e.get("truth_act_by")]
        if acts:
            avoidable = [a for a in acts if a.get("avoidable")]
            out["avoidable"] = bool(avoidable)
            if avoidable:
                out["alerted_in_time"] = all(a.get("alerted_in_time") for a in avoidable)
                out["avoidable_resolved"] = bool(out["followed_held"])
        out["lead_times"] = [float(e["lead_time_s"]) for e in over
                             if e.get("outcome") in ("alerted", "late")
                             and e.get("lead_time_s") is not None]
    elif ignore.get("exposures"):
        out["class"] = "below_limit"
    else:
        out["nuisance"] = _count(ignore.get("nuisance_alerts")) > 0
    return out


def campaign_metrics(records: list[dict[str, Any]], seed: int = 0) -> dict[str, Any]:
    """Every metric of docs/scenarios.md with its 95 % interval.

    Parameters
    ----------
    records : list of dict
        One per encounter: ``ignore`` and ``follow`` (``simulate --json`` objects), or
        ``error`` (a failed encounter, counted in ``failed`` only).
    seed : int
        Seeds the bootstrap (the campaign's seed: same records, same intervals).

    Returns
    -------
    dict
        ``missed_alert_rate``, ``late_alert_rate``, ``nuisance_alert_rate``,
        ``resolution_success_rate``, ``followed_resolution_success_rate``,
        ``alerted_before_act_by_rate`` and ``avoidable_resolution_success_rate`` (over
        the exposures the truth's act-by calls avoidable; 0 of 0 without it) (each
        ``value``, ``low``, ``high``, ``count``,
        ``of``), ``lead_time_s`` (``median`` and ``p5``, each ``value``, ``low``,
        ``high``; ``of``), ``unavailable_fraction`` (``value``, ``low``, ``high``),
        ``scenarios`` (``value`` = ``low`` = ``high``), ``failed`` (int), ``classes``
        (counts per class and outcome, for the plots).
    """
    ok = [r for r in records if not r.get("error")]
    kinds = [classify(r) for r in ok]
    exposed = [k for k in kinds if k["class"] == "exposed"]
    clear = [k for k in kinds if k["class"] == "clear"]
    leads = np.array([t for k in exposed for t in k["lead_times"]], dtype=float)
    unavail = np.array([sum(float(r[m].get("unavailable_s", 0.0)) for m in ("ignore", "follow"))
                        for r in ok], dtype=float)
    flown = np.array([sum(float(r[m].get("duration_s", 0.0)) for m in ("ignore", "follow"))
                      for r in ok], dtype=float)
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(2**31,)))
    classes = Counter(k["class"] for k in kinds)
    classes.update(f"outcome_{k['outcome']}" for k in exposed)
    classes.update("resolved" if k["resolved"] else "not_resolved" for k in exposed)
    classes.update("nuisance" if k["nuisance"] else "quiet" for k in clear)
    n = len(ok)
    return {
        "missed_alert_rate": rate(sum(k["outcome"] == "missed" for k in exposed), len(exposed)),
        "late_alert_rate": rate(sum(k["outcome"] == "late" for k in exposed), len(exposed)),
        "nuisance_alert_rate": rate(sum(bool(k["nuisance"]) for k in clear), len(clear)),
        "lead_time_s": {"median": bootstrap_quantile(leads, 0.5, rng),
                        "p5": bootstrap_quantile(leads, 0.05, rng), "of": int(leads.size)},
        "resolution_success_rate": rate(sum(bool(k["resolved"]) for k in exposed),
                                        len(exposed)),
        "followed_resolution_success_rate": rate(
            sum(bool(k["followed_held"]) for k in exposed),
            sum(bool(k["followed"]) for k in exposed)),
        "alerted_before_act_by_rate": rate(
            sum(bool(k["alerted_in_time"]) for k in exposed),
            sum(bool(k["avoidable"]) for k in exposed)),
        "avoidable_resolution_success_rate": rate(
            sum(bool(k["avoidable_resolved"]) for k in exposed),
            sum(bool(k["avoidable"]) for k in exposed)),
        "unavailable_fraction": bootstrap_ratio(unavail, flown, rng),
        "scenarios": {"value": n, "low": n, "high": n},
        "failed": len(records) - n,
        "classes": dict(sorted(classes.items())),
        "calibration": calibration_metrics([r["ignore"].get("calibration") for r in ok]),
    }


def lead_times(records: list[dict[str, Any]]) -> list[float]:
    """Every alerted lead time of the exposed encounters (s), for the histogram."""
    return [t for r in records if not r.get("error") for t in classify(r)["lead_times"]]


#: Bins of the stated probability for the reliability table (edges).
RELIABILITY_BINS = (0.0, 0.05, 0.5, 0.95, 1.0)


def calibration_metrics(points: list[dict[str, Any]]) -> dict[str, Any]:
    """The campaign's calibration (:mod:`advisory.bench.calibration`) over the judged
    points given (one an encounter); empty counts when none."""
    judged = [p for p in points if p is not None and p.get("truth_cutoff_mach") is not None]
    with_sigma = [p for p in judged if p.get("cutoff_sigma")]
    inside = 0
    for p in with_sigma:
        half = z_two_sided(p["confidence"]) * p["cutoff_sigma"]
        inside += abs(p["truth_cutoff_mach"] - p["cutoff_mach"]) <= half
    below = sum(p["truth_cutoff_mach"] < p["cutoff_mach"] - p["margin_mach"] for p in judged)
    probs = np.array([p["boom_probability"] for p in with_sigma], dtype=float)
    outcome = np.array([p["truth_reaches"] for p in with_sigma], dtype=float)
    reliability = []
    for lo, hi in zip(RELIABILITY_BINS, RELIABILITY_BINS[1:]):
        sel = (probs >= lo) & ((probs < hi) | (hi == 1.0))
        n = int(sel.sum())
        reliability.append({"bin": [lo, hi], "count": n,
                            "stated": round(float(probs[sel].mean()), 4) if n else None,
                            "observed": rate(int(outcome[sel].sum()), n)})
    conf = sorted({p["confidence"] for p in with_sigma})
    return {
        "of": len(judged),
        "confidence": conf[0] if len(conf) == 1 else conf,
        "interval_coverage": rate(int(inside), len(with_sigma)),
        "margin_exceedance": rate(int(below), len(judged)),
        "margin_mach_median": round(float(np.median([p["margin_mach"] for p in judged])), 4)
        if judged else None,
        "sigma_median": round(float(np.median([p["cutoff_sigma"] for p in with_sigma])), 5)
        if with_sigma else None,
        "brier_score": round(float(np.mean((probs - outcome) ** 2)), 4) if probs.size else None,
        "reliability": reliability,
    }
