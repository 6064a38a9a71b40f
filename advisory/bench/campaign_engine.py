"""Where a campaign's encounters run: a local process pool, or a Dask distributed cluster.

Every engine runs the same task, :func:`run_pair` (one encounter flown twice: the crew
ignores the cues, then follows them), on the same scenario dicts, and yields the
records as they complete; the caller orders them by index. An encounter's result
depends only on its scenario (its own seed), so the engine changes the time taken, not
the results. ``map`` runs any picklable task the same way (``replay`` of many logs uses
it: :func:`advisory.bench.batch.replay_many`).

Engines
-------
* :class:`PoolEngine` (the default): ``K`` worker processes on this machine
  (``concurrent.futures``; ``fork`` where the platform has it, as
  :mod:`advisory.bench.batch` does).
* :class:`DaskEngine`: an existing Dask distributed scheduler at an address
  (``tcp://host:port``), or a ``LocalCluster`` it starts on 127.0.0.1 with ``K``
  worker processes of one thread each and no dashboard, closed at the end. An
  encounter builds a missing table in its own process (one task, one core), so plain
  (daemonic) Dask workers do. Dask is an
  optional extra (``pip install 'boom-advisory[campaign]'``); without it a Dask engine
  raises :class:`EngineError` saying so.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import copy
import logging
import multiprocessing as mp
import os
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass
from typing import Any

from advisory.bench.campaign_sample import Encounter

#: ``run_encounter(doc, crew_follows) -> simulate --json object`` (a picklable function).
Runner = Callable[[dict[str, Any], bool], dict[str, Any]]
#: Any picklable task of one argument, for :meth:`PoolEngine.map` / :meth:`DaskEngine.map`.
Task = Callable[[Any], Any]

INSTALL_HINT = "Dask is not installed: pip install 'boom-advisory[campaign]'"
#: Seconds to wait for an existing scheduler to answer.
CONNECT_TIMEOUT_S = 20.0


class EngineError(ValueError):
    """An engine that cannot start (Dask missing, scheduler unreachable); says why."""


def run_pair(index: int, doc: dict[str, Any], runner: Runner) -> dict[str, Any]:
    """Fly one encounter twice; a failure becomes an ``error`` record, never an exception.

    Returns
    -------
    dict
        ``index``, ``ignore`` and ``follow`` (the runner's objects) and ``error``
        (None, or one line: the exception's type and message).
    """
    runs: dict[str, Any] = {"index": index, "ignore": None, "follow": None, "error": None}
    try:
        for key, follows in (("ignore", False), ("follow", True)):
            scenario = copy.deepcopy(doc)
            scenario.setdefault("crew", {})["mode"] = "follow" if follows else "ignore"
            runs[key] = runner(scenario, follows)
    except Exception as exc:  # one broken encounter must not stop the campaign
        text = " ".join(str(exc).split())
        runs.update(ignore=None, follow=None, error=f"{type(exc).__name__}: {text}")
    return runs


@dataclass(frozen=True)
class PoolEngine:
    """``processes`` local worker processes (default: one per core)."""

    processes: int | None = None

    @property
    def description(self) -> str:
        """How the engine is named in reports."""
        return f"process pool, {self.size} processes"

    @property
    def size(self) -> int:
        """Worker processes."""
        return max(1, self.processes or os.cpu_count() or 1)

    def run(self, encounters: Sequence[Encounter], runner: Runner) -> Iterator[dict[str, Any]]:
        """Yield each encounter's record as it completes (any order)."""
        jobs = min(self.size, len(encounters))
        if jobs <= 1:  # no pool for one process: the same task in this process
            for e in encounters:
                yield run_pair(e.index, e.doc, runner)
            return
        method = "fork" if "fork" in mp.get_all_start_methods() else "spawn"
        with ProcessPoolExecutor(max_workers=jobs, mp_context=mp.get_context(method)) as ex:
            futures = [ex.submit(run_pair, e.index, e.doc, runner) for e in encounters]
            for fut in as_completed(futures):
                yield fut.result()

    def map(self, task: Task, items: Sequence[Any]) -> Iterator[tuple[int, Any]]:
        """``(i, task(items[i]))`` as each completes (any order); a task's exception is
        raised here."""
        jobs = min(self.size, len(items))
        if jobs <= 1:
            for i, item in enumerate(items):
                yield i, task(item)
            return
        method = "fork" if "fork" in mp.get_all_start_methods() else "spawn"
        with ProcessPoolExecutor(max_workers=jobs, mp_context=mp.get_context(method)) as ex:
            futures = {ex.submit(task, item): i for i, item in enumerate(items)}
            for fut in as_completed(futures):
                yield futures[fut], fut.result()


def _dask() -> Any:
    """The ``dask.distributed`` module, or :class:`EngineError` with the install hint."""
    try:
        # Optional dependency (the `campaign` extra): imported only when a Dask engine
        # runs, so the package and the process pool work without it.
        from dask import distributed
    except ImportError:
        raise EngineError(INSTALL_HINT) from None
    return distributed


def dask_available() -> bool:
    """True when ``dask.distributed`` can be imported."""
    try:
        _dask()
    except EngineError:
        return False
    return True


@dataclass(frozen=True)
class DaskEngine:
    """A Dask distributed cluster: ``address`` of a running scheduler, or a local one.

    Attributes
    ----------
    address : str or None
        ``tcp://host:port`` of an existing scheduler; None starts a ``LocalCluster``.
    workers : int
        Worker processes of the local cluster (one thread each).
    connect_timeout_s : float
        How long to wait for an existing scheduler to answer, s.
    """

    address: str | None = None
    workers: int = 2
    connect_timeout_s: float = CONNECT_TIMEOUT_S

    @property
    def description(self) -> str:
        """How the engine is named in reports."""
        if self.address:
            return f"Dask cluster at {self.address}"
        return f"Dask LocalCluster, {self.workers} workers x 1 thread"

    def check(self) -> None:
        """:class:`EngineError` now when Dask is missing (before any work is done)."""
        _dask()

    def _client(self) -> tuple[Any, Any]:
        dd = _dask()
        if self.address:
            try:
                return dd.Client(self.address, timeout=self.connect_timeout_s), None
            except (OSError, TimeoutError, ValueError) as exc:
                raise EngineError(f"--scheduler: cannot reach {self.address}: "
                                  f"{' '.join(str(exc).split())}") from None
        cluster = dd.LocalCluster(n_workers=self.workers, threads_per_worker=1,
                                  processes=True, host="127.0.0.1",
                                  dashboard_address=None, silence_logs=logging.ERROR)
        return dd.Client(cluster), cluster

    def run(self, encounters: Sequence[Encounter], runner: Runner) -> Iterator[dict[str, Any]]:
        """Submit every encounter; yield each record as it completes (any order)."""
        dd = _dask()
        client, cluster = self._client()
        try:
            futures = {client.submit(run_pair, e.index, e.doc, runner, pure=False): e.index
                       for e in encounters}
            for fut in dd.as_completed(list(futures)):
                try:
                    yield fut.result()
                except Exception as exc:  # a lost worker: that encounter fails, not all
                    yield {"index": futures[fut], "ignore": None, "follow": None,
                           "error": f"{type(exc).__name__}: {' '.join(str(exc).split())}"}
        finally:
            client.close()
            if cluster is not None:
                cluster.close()

    def map(self, task: Task, items: Sequence[Any]) -> Iterator[tuple[int, Any]]:
        """``(i, task(items[i]))`` as each completes on the cluster (any order); a task's
        exception is raised here."""
        dd = _dask()
        client, cluster = self._client()
        try:
            futures = {client.submit(task, item, pure=False): i for i, item in enumerate(items)}
            for fut in dd.as_completed(list(futures)):
                yield futures[fut], fut.result()
        finally:
            client.close()
            if cluster is not None:
                cluster.close()


Engine = PoolEngine | DaskEngine
