"""The table builders' worker processes: one column function mapped over the grid's keys,
in this process or in a pool, with the workers' signal handling."""

from __future__ import annotations

import multiprocessing as mp
import signal
from collections.abc import Callable, Iterator, Sequence
from typing import Any

__all__ = ["map_columns", "reset_signals"]


def reset_signals() -> None:
    """Default signal handling in a forked worker.

    A forked worker inherits its parent's signal handlers: the service's start-up handler
    raised its stop exception in every worker the pool terminated (a traceback per worker
    on stderr). A worker ends on the signal, as a process does by default; an interrupt is
    for the parent, which ends the pool.
    """
    for sig in (signal.SIGTERM, signal.SIGHUP, signal.SIGQUIT, signal.SIGUSR1,
                signal.SIGUSR2):
        signal.signal(sig, signal.SIG_DFL)
    signal.signal(signal.SIGINT, signal.SIG_IGN)


_STATE: dict = {}


def _init(work: Callable, setup: Callable | None, args: Any) -> None:
    reset_signals()
    _STATE["work"] = work
    _STATE["state"] = setup(args) if setup is not None else args


def _call(key):
    return key, _STATE["work"](_STATE["state"], key)


def map_columns(work: Callable[[Any, Any], Any], args: Any, keys: Sequence,
                workers: int, setup: Callable[[Any], Any] | None = None,
                chunksize: int = 1) -> Iterator[tuple[Any, Any]]:
    """``(key, work(state, key))`` for every key, in the order they finish.

    ``state`` is ``setup(args)`` (made once in each worker, e.g. a ray tracer), or ``args``
    itself without ``setup``. One worker (or one key) runs in this process; more run in a
    pool (fork where the platform has it, else spawn: ``work`` and ``setup`` are then
    module-level functions and ``args`` picklable), each worker with
    :func:`reset_signals`.
    """
    workers = min(workers, len(keys))
    if workers <= 1:
        state = setup(args) if setup is not None else args
        for key in keys:
            yield key, work(state, key)
        return
    method = "fork" if "fork" in mp.get_all_start_methods() else "spawn"
    with mp.get_context(method).Pool(workers, initializer=_init,
                                     initargs=(work, setup, args)) as pool:
        yield from pool.imap_unordered(_call, keys, chunksize=chunksize)
