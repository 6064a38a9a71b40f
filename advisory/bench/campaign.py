"""Campaigns: many randomized encounters flown closed-loop, measured against the truth.

``boom-advisory campaign --count N --seed S`` samples ``N`` encounters
(:mod:`advisory.bench.campaign_sample`), flies each twice through the closed loop (crew
ignores the cues / crew follows them) on an engine
(:mod:`advisory.bench.campaign_engine`: a process pool, or a Dask cluster), and reports
the alerting metrics of docs/scenarios.md with 95 % intervals
(:mod:`advisory.bench.campaign_stats`) as text, JSON, a per-scenario CSV and an HTML
summary (:mod:`advisory.bench.campaign_report`).

Same seed, same results, whatever the engine: each encounter has its own child seed,
and the records are put back in encounter order before anything is computed from them.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from advisory.bench.campaign_engine import Engine, Runner
from advisory.bench.campaign_sample import Encounter, sample_encounter
from advisory.bench.campaign_stats import campaign_metrics

#: Most encounters one campaign takes (a guard against a typing slip).
MAX_COUNT = 1_000_000

Progress = Callable[[int, int, int], None]  #: (done, total, failed)


@dataclass
class CampaignResult:
    """A finished campaign.

    Attributes
    ----------
    seed, count : int
        As asked.
    engine : str
        The engine's description.
    encounters : list of Encounter
        In index order.
    records : list of dict
        One per encounter, in index order (:func:`advisory.bench.campaign_engine.run_pair`).
    metrics : dict
        :func:`advisory.bench.campaign_stats.campaign_metrics` of the records.
    elapsed_s : float
        Wall time of the runs, s.
    known : bool
        The advisor knew the air and the crew (``campaign --known``).
    spread : bool
        The advisor knew the air only to within the default spread (``campaign --spread``).
    config : str or None
        The advisor config every encounter ran with (None: the defaults).
    near_cutoff : bool
        The flights started near the cutoff Mach (``campaign --near-cutoff``).
    resumed : int
        Records read back from the campaign's journal, not flown in this run
        (:mod:`advisory.bench.campaign_journal`); ``elapsed_s`` is this run's.
    """

    seed: int
    count: int
    engine: str
    encounters: list[Encounter]
    records: list[dict[str, Any]]
    metrics: dict[str, Any] = field(default_factory=dict)
    elapsed_s: float = 0.0
    known: bool = False
    spread: bool = False
    config: str | None = None
    near_cutoff: bool = False
    resumed: int = 0


def sample_campaign(count: int, seed: int, known: bool = False, spread: bool = False,
                    config: str | None = None, near_cutoff: bool = False) -> list[Encounter]:
    """The ``count`` encounters of the campaign seeded ``seed`` (``known``: as
    :func:`advisory.bench.campaign_sample.as_known`; ``spread``: as
    :func:`~advisory.bench.campaign_sample.as_spread`; ``config``: the advisor config file
    every encounter runs with; ``near_cutoff``: ``spread`` with the start Mach near the
    cutoff, :mod:`advisory.bench.campaign_sample`)."""
    if not 1 <= count <= MAX_COUNT:
        raise ValueError(f"--count: {count} is not in 1..{MAX_COUNT}")
    if seed < 0:
        raise ValueError(f"--seed: {seed} is not >= 0")
    out = [sample_encounter(seed, i, known, spread, near_cutoff) for i in range(count)]
    if config is not None:
        for e in out:
            e.doc["advisor"]["config"] = str(config)
    return out


def run_campaign(count: int, seed: int, engine: Engine, runner: Runner,
                 progress: Progress | None = None, known: bool = False, spread: bool = False,
                 config: str | None = None, near_cutoff: bool = False,
                 done: dict[int, dict[str, Any]] | None = None,
                 on_record: Callable[[dict[str, Any]], None] | None = None) -> CampaignResult:
    """Sample, fly and measure a campaign.

    Parameters
    ----------
    count, seed : int
        Encounters and the campaign seed.
    engine : PoolEngine or DaskEngine
        Where the encounters run.
    runner : callable
        ``runner(doc, crew_follows) -> simulate --json object`` (picklable: a module's
        function), normally :func:`advisory.bench.closed_loop.run_encounter`.
    progress : callable, optional
        Called as ``progress(done, total, failed)`` after each encounter completes.
    known : bool
        Encounters whose inputs the advisor knows (``campaign --known``).
    spread, config, near_cutoff : bool, str or None, bool
        As :func:`sample_campaign`.
    done : dict, optional
        Records already finished, by encounter index (a resumed campaign's journal): those
        encounters are not flown again and their records count as flown.
    on_record : callable, optional
        Called with each record flown in this run as it comes back (the journal's
        :meth:`~advisory.bench.campaign_journal.Journal.append`).

    Returns
    -------
    CampaignResult
    """
    encounters = sample_campaign(count, seed, known, spread, config, near_cutoff)
    done = done or {}
    by_index = {e.index: done[e.index] for e in encounters if e.index in done}
    resumed = len(by_index)
    todo = [e for e in encounters if e.index not in by_index]
    failed = 0
    t0 = time.perf_counter()
    for record in engine.run(todo, runner) if todo else ():
        by_index[int(record["index"])] = record
        failed += bool(record.get("error"))
        if on_record is not None:
            on_record(record)
        if progress is not None:
            progress(len(by_index), count, failed)
    elapsed = time.perf_counter() - t0
    records = [by_index.get(e.index) or {"index": e.index, "ignore": None, "follow": None,
                                         "error": "no result came back"}
               for e in encounters]
    return CampaignResult(seed=seed, count=count, engine=engine.description,
                          encounters=encounters, records=records,
                          metrics=campaign_metrics(records, seed), elapsed_s=elapsed,
                          known=known, spread=spread or near_cutoff, config=config,
                          near_cutoff=near_cutoff, resumed=resumed)
