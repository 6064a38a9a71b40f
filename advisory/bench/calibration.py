"""Calibration of the advisor's confidence against the truth's air (issue 16, item 5).

At the first advisory of a closed-loop flight that carries a cutoff Mach, :func:`take`
keeps what the advisor said about the air below, for its table's own ground (zones on
higher ground are judged on tables of their own, whose cutoff is lower): its present
condition (geometric height, Mach, true heading, flight-path angle), the cutoff Mach, the
standard deviation it gives it (None when it reads at the fixed margin), the Mach margin
it keeps under it (``z sigma``, or the fixed one) and the probability that the boom
reaches the ground.
After the flight :func:`judge` adds the truth: the cutoff Mach at the same condition in
the air the flight was really flown in, by the readable ray tracer
(:func:`advisory.physics.carpet.cutoff_mach`: bisection over Snell's law; never the
tables), and whether the boom reached the ground (the Mach above it). The condition is
the advisor's (its Mach carries the feed's 0.002 noise; the truth's cutoff is taken at
it, so the comparison is of the air, not of the air data).

:func:`advisory.bench.campaign_stats.calibration_metrics` sums a campaign (one flight an
encounter, the crew ignoring the cues: the start is the same in both runs):

* ``interval_coverage``: the truth's cutoff inside ``cutoff +- z sigma`` (two-sided, at
  the advisor's confidence): a calibrated spread covers the confidence (95 %);
* ``margin_exceedance``: the truth's cutoff below the cutoff less the margin the advisor
  keeps (a boom that reaches while the advisor's margin says it does not): at most
  ``1 - confidence`` (one-sided) when calibrated; with the fixed margin, whatever 0.02
  Mach happens to give;
* ``brier_score``: mean squared difference of the stated probability of reaching the
  ground and the outcome (0/1; Brier, Monthly Weather Review 78, 1950), and a
  reliability table: per bin of the stated probability, its mean and the observed
  fraction with a Wilson interval.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from typing import Any, cast

from advisory.physics.atmosphere import Atmosphere
from advisory.physics.carpet import cutoff_mach
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.confidence import boom_probability, z_one_sided
from advisory.service.loop import AdvisoryLoop


def take(loop: AdvisoryLoop, t_s: float) -> dict[str, Any] | None:
    """What the advisor says now about the cutoff (module notes); None until an advisory
    carries a cutoff Mach."""
    advisor = cast(Advisor, loop.advisor)  # the closed loop runs the real advisor
    adv = advisor.base_advisory  # the table's own ground (the levels' merge takes the
    now = advisor.present_condition  # lowest cutoff of any ground)
    if (adv is None or adv.status == "unavailable" or adv.cutoff_mach is None
            or not math.isfinite(adv.cutoff_mach) or now is None):
        return None
    alt, mach, hdg, fpa = now
    cfg = advisor.config
    sigma = adv.cutoff_sigma if adv.cutoff_sigma is not None and adv.cutoff_sigma > 0 \
        else None
    conf = float(cfg.confidence) if sigma is not None else None
    margin = z_one_sided(conf) * sigma if sigma is not None and conf else \
        float(cfg.cutoff_margin_mach)
    return {"t_s": round(t_s, 3), "alt_m": alt, "mach": mach, "heading_rad": hdg,
            "fpa_rad": fpa, "ground_m": float(advisor.table.grid.ground_elevation_m),
            "cutoff_mach": float(adv.cutoff_mach), "cutoff_sigma": sigma,
            "confidence": conf, "margin_mach": margin,
            "boom_probability": None if sigma is None
            else boom_probability(mach, float(adv.cutoff_mach), sigma)}


def judge(said: dict[str, Any] | None, true_air: Atmosphere) -> dict[str, Any] | None:
    """``said`` with the truth added: ``truth_cutoff_mach`` and ``truth_reaches``."""
    if said is None:
        return None
    fc = FlightCondition(said["mach"], said["alt_m"], said["heading_rad"], said["fpa_rad"],
                         said["ground_m"])
    cut = cutoff_mach(RayTracer(true_air), fc)
    out = dict(said)
    out.update(truth_cutoff_mach=cut if math.isfinite(cut) else None,
               truth_reaches=bool(said["mach"] > cut))
    for k in ("alt_m", "mach", "heading_rad", "fpa_rad", "cutoff_mach", "cutoff_sigma",
              "margin_mach", "boom_probability", "truth_cutoff_mach"):
        if out[k] is not None:
            out[k] = round(float(out[k]), 6)
    return out
