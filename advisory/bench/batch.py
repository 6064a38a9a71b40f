"""Several replays at once: in worker processes (``replay LOG LOG ...``, ``demo``) or on a
campaign engine (a local or remote Dask cluster, :mod:`advisory.bench.campaign_engine`).

With ``truth`` set, each worker also traces the flight's ground truth
(:func:`advisory.bench.replay_truth.add_truth`), so the truth, the costly part, runs in
parallel too.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from dataclasses import dataclass

from advisory.bench.campaign_engine import Engine, PoolEngine
from advisory.bench.replay import replay_log
from advisory.bench.replay_truth import add_truth
from advisory.bench.result import ReplayResult
from advisory.bench.scenario import ReplaySetup


@dataclass(frozen=True)
class TruthRequest:
    """Trace each replayed flight's truth (``replay --truth``).

    Attributes
    ----------
    aircraft : str or None
        The aircraft file (None: the scenario's, else the bundled demo aircraft).
    figure : bool
        Also keep what the report draws of the truth.
    """

    aircraft: str | None = None
    figure: bool = False


def _replay_job(job: tuple[ReplaySetup, TruthRequest | None]) -> ReplayResult:
    setup, truth = job
    res = replay_log(setup)
    if truth is not None:
        add_truth(res, truth.aircraft, truth.figure)
    return res


def replay_many(setups: list[ReplaySetup], jobs: int | None = None,
                truth: TruthRequest | None = None,
                engine: Engine | None = None) -> Iterator[ReplayResult]:
    """Replay several logs in parallel; yields results in input order.

    The longest logs are handed out first, so the cores stay busy to the end.

    Parameters
    ----------
    setups : list of ReplaySetup
    jobs : int, optional
        Worker processes (default: one per core, at most one per log). 1 replays in this
        process. Not used with ``engine``. (A local process pool is the campaigns'
        :class:`~advisory.bench.campaign_engine.PoolEngine`.)
    truth : TruthRequest, optional
        Also trace each flight's ground truth, in the same worker.
    engine : PoolEngine or DaskEngine, optional
        Run the replays there (``replay --workers`` / ``--scheduler``).
    """
    order = sorted(range(len(setups)), key=lambda i: -os.path.getsize(setups[i].log))
    work = [(setups[i], truth) for i in order]
    done: dict[int, ReplayResult] = {}
    nxt = 0
    for k, res in (engine or PoolEngine(jobs)).map(_replay_job, work):
        done[order[k]] = res
        while nxt in done:
            yield done.pop(nxt)
            nxt += 1
