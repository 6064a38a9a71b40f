"""The resolution search of one ground level, kept and renewed across steps.

A new zone in conflict is searched at once, in full (:func:`.resolutions.run_search`);
afterwards the search is renewed every ``refresh_s``, :data:`TRIALS_PER_STEP` trials per
predicting step (so no step carries a whole search), and the act-by time of the last
finished search counts down in between. Steps that reuse the last prediction
(:mod:`.reuse`) fly no trial.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

from collections.abc import Callable

from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.resolutions import Resolution, Search, TrialBase, run_search, search
from advisory.pipeline.results import Conflict

__all__ = ["Renewal", "TRIALS_PER_STEP"]

#: Trials a renewal of the resolution search may fly per step (a new conflict is searched
#: in full at once); about 0.1 ms each (project choice for the step budget).
TRIALS_PER_STEP = 4


class Renewal:
    """The last finished resolution search and the renewal in progress.

    Attributes
    ----------
    searches : int
        Searches started (for the benchmark).
    """

    def __init__(self, config: AdvisorConfig) -> None:
        self.config = config
        self.searches = 0
        self._result: Resolution | None = None
        self._result_t0 = 0.0
        self._result_zone: str | None = None
        self._search: Search | None = None
        self._search_t0 = 0.0

    def update(self, base: Callable[[], TrialBase], cut_now: float, first: Conflict | None,
               now: float) -> tuple[Resolution | None, float | None]:
        """The resolutions and the act-by time (s, counted down since their search) for
        the first avoidable conflict ``first`` (None: none, the search is dropped).

        Parameters
        ----------
        base : callable
            Makes the trials' common part (:class:`.resolutions.TrialBase`) of this step.
        cut_now : float
            The present cutoff Mach.
        first : Conflict or None
            The soonest avoidable conflict.
        now : float
            The loop's monotonic clock, s.
        """
        if first is None:
            self._search = None
            self._result = None
            return None, None
        if self._result is None or self._result_zone != first.zone_id:
            self.searches += 1
            gen = search(base(), cut_now, first.time_to_contact_s)
            self._result, self._result_t0 = run_search(gen), now
            self._result_zone, self._search = first.zone_id, None
        else:
            if self._search is None and not 0.0 <= now - self._result_t0 < self.config.refresh_s:
                self.searches += 1
                self._search = search(base(), cut_now, first.time_to_contact_s)
                self._search_t0 = now
            if self._search is not None:
                done = run_search(self._search, TRIALS_PER_STEP)
                if done is not None:
                    self._result, self._result_t0, self._search = done, self._search_t0, None
        r = self._result
        if r is None or r.act_by_s is None:
            return r, None
        return r, max(0.0, r.act_by_s - (now - self._result_t0))
