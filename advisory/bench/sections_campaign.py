"""Benchmark section about campaigns: closed-loop throughput and the Dask speed-up.

The same campaign (the same seed, so the same encounters) runs on a Dask
``LocalCluster`` of one worker and then of two workers (one thread each, 127.0.0.1),
side by side in one run, each with an empty table cache (every encounter builds its
advisor's table, as in a real campaign). Wall times include starting the cluster and
loading the compiled kernels in each worker, as a user's campaign pays them. Not run
with ``--quick`` (a campaign takes minutes).

* ``campaign_rate``: closed-loop flight time flown per core-minute on one worker,
  counted in ten-minute scenarios (the issue's unit: each encounter is flown twice,
  both runs count), budget >= 4;
* ``dask_speedup``: one-worker wall time over two-worker wall time, budget >= 1.7x.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import contextlib
import os
import shutil
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from advisory.bench.budgets import NotMeasured
from advisory.bench.campaign import CampaignResult, run_campaign
from advisory.bench.campaign_engine import DaskEngine, dask_available
from advisory.bench.closed_loop import run_encounter
from advisory.bench.context import Context

CAMPAIGN_SEED = 12
CAMPAIGN_COUNT = 10  #: encounters of the measured campaign
CACHE_ENV = "BOOM_ADVISORY_CACHE"  #: the table cache's place (advisory.tables.cache)
SCENARIO_S = 600.0  #: the issue's unit: a ten-minute scenario


def _flown_s(result: CampaignResult) -> float:
    """Simulated flight time of every run of a campaign, s."""
    runs: list[dict[str, Any]] = [r[m] for r in result.records for m in ("ignore", "follow")]
    return sum(float(run.get("duration_s", 0.0)) for run in runs)


@contextlib.contextmanager
def _fresh_table_cache(path: Path) -> Iterator[None]:
    """Run with an empty table cache at ``path`` (so each run builds its own tables)."""
    shutil.rmtree(path, ignore_errors=True)
    path.mkdir(parents=True)
    old = os.environ.get(CACHE_ENV)
    os.environ[CACHE_ENV] = str(path)  # inherited by the cluster's worker processes
    try:
        yield
    finally:
        if old is None:
            os.environ.pop(CACHE_ENV, None)
        else:
            os.environ[CACHE_ENV] = old
        shutil.rmtree(path, ignore_errors=True)


def _campaign(ctx: Context, count: int, workers: int) -> CampaignResult:
    ctx.progress(f"campaign: {count} encounters on {workers} Dask worker(s) ...")
    with _fresh_table_cache(ctx.work_dir / f"campaign-tables-{workers}"):
        result = run_campaign(count, CAMPAIGN_SEED, DaskEngine(workers=workers),
                              run_encounter)
    if result.metrics["failed"]:
        first = next(r["error"] for r in result.records if r.get("error"))
        raise NotMeasured(f"{result.metrics['failed']} encounters failed: {first[:100]}")
    return result


def measure_campaign(ctx: Context, count: int) -> None:
    """Run the campaign of ``count`` encounters on 1 and on 2 workers; record the figures."""
    one = _campaign(ctx, count, 1)
    two = _campaign(ctx, count, 2)
    flown = _flown_s(one)
    rate = (flown / SCENARIO_S) / (one.elapsed_s / 60.0)
    how = (f"{count} encounters x 2 runs, seed {CAMPAIGN_SEED}, {flown:.0f} s of flight, "
           "tables built afresh; Dask LocalCluster start-up included")
    ctx.report.measured("campaign_rate", rate,
                        f"{how}; one worker: {one.elapsed_s:.1f} s wall")
    ctx.report.measured("dask_speedup", one.elapsed_s / two.elapsed_s,
                        f"{how}; 1 worker {one.elapsed_s:.1f} s, 2 workers "
                        f"{two.elapsed_s:.1f} s, side by side")
    ctx.report.add_info("campaign_encounters", "campaign encounters per core-minute",
                        count / (one.elapsed_s / 60.0), "enc/core-min",
                        note="each encounter flown twice (crew ignores / follows)")


def section_campaign(ctx: Context) -> None:
    """Closed-loop throughput per core-minute and the 2-worker Dask speed-up."""
    if ctx.quick:
        raise NotMeasured("--quick: a campaign takes minutes")
    if not dask_available():
        raise NotMeasured("dask[distributed] not installed (boom-advisory[campaign])")
    measure_campaign(ctx, CAMPAIGN_COUNT)
