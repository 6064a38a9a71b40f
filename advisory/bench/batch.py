"""Several replays at once, in worker processes (``replay LOG LOG ...``, ``demo``).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import multiprocessing as mp
import os
from collections.abc import Iterator

from advisory.bench.replay import replay_log
from advisory.bench.result import ReplayResult
from advisory.bench.scenario import ReplaySetup


def _replay_job(setup: ReplaySetup) -> ReplayResult:
    return replay_log(setup)


def replay_many(setups: list[ReplaySetup], jobs: int | None = None) -> Iterator[ReplayResult]:
    """Replay several logs in parallel worker processes; yields results in input order.

    The longest logs are handed out first, so the cores stay busy to the end.

    Parameters
    ----------
    setups : list of ReplaySetup
    jobs : int, optional
        Worker processes (default: one per core, at most one per log). 1 replays in this
        process.
    """
    jobs = min(jobs or os.cpu_count() or 1, len(setups))
    if jobs <= 1:
        for s in setups:
            yield replay_log(s)
        return
    method = "fork" if "fork" in mp.get_all_start_methods() else "spawn"
    order = sorted(range(len(setups)), key=lambda i: -os.path.getsize(setups[i].log))
    with mp.get_context(method).Pool(jobs) as pool:
        pending = {i: pool.apply_async(_replay_job, (setups[i],)) for i in order}
        for i in range(len(setups)):
            yield pending[i].get()
