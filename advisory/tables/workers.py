"""Signal handling of the table builders' worker processes."""

from __future__ import annotations

import signal

__all__ = ["reset_signals"]


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
