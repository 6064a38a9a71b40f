"""The resolution search of one ground level, kept and renewed across steps.

A new zone in conflict is searched at once, in full (:func:`.resolutions.search`).
Afterwards the resolution is renewed every ``refresh_s``, :data:`TRIALS_PER_STEP` trials
per step (so no step carries a whole search), and the act-by time of the last search
counts down in between. While the flight goes as the prediction that the last full search
flew from said (no step since found a departure, :mod:`.reuse`) and less than
:data:`FULL_SEARCH_S` has passed since that search, a renewal only flies again the actions
on offer, each from the onset due now (:func:`verify`): while each still clears, they
stand, the act-by still counting down from their search; the first that fails starts a
full search. With nothing on offer such a renewal flies nothing: a later onset never
clears when an earlier one does not (the act-by's assumption, common practice, no source).
Otherwise a renewal is a full search: after a departure, every :data:`FULL_SEARCH_S`, and
on every renewal when every step predicts (``predict_every_s = 0``, as before). A full
search flies about 50 trials (11,407 for 224 searches in the bench's replay log, the
search at the limit included), a verification 1-3 (about 0.1 ms each); it does not
look for better actions (a higher Mach, a smaller turn) until the next full search.

Near the cutoff (the present Mach less than
:data:`.resolutions.AT_LIMIT_MIN_EXCESS` above the lowest cutoff, where the booms graze
and focus and the trials are least sure) an action is first offered only when two full
searches in a row, from states at least ``refresh_s`` apart, find one: the first that
finds one after a search that found none is held back, and the next renewal is a full
search. Seed 1's encounter 279 (0.010 above the cutoff, noisy air data): full searches a
second apart found nothing, a 5-deg left turn, nothing, a 10-deg left turn, nothing; the
left turn offered from one of them and flown put 4.49 psf on a zone limited to 1.01
(``tests/test_checked_resolutions.py``). A step
that reuses the last prediction flies the renewal's trials too (:meth:`Renewal.advance`)
and predicts when a renewal brings a new result, so it is offered at once.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Generator

from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.resolutions import (
    MACH_GRID,
    Resolution,
    Search,
    TrialBase,
    max_mach_off_ground,
    run_search,
    search,
)
from advisory.pipeline.results import Conflict

__all__ = ["Renewal", "TRIALS_PER_STEP", "FULL_SEARCH_S", "verify"]

#: Trials a renewal of the resolution search may fly per step (a new conflict is searched
#: in full at once); about 0.1 ms each (project choice for the step budget).
TRIALS_PER_STEP = 4
#: A renewal this long after the last full search is a full search again, s (project
#: choice: a better action found within seconds, at a tenth of the trials).
FULL_SEARCH_S = 10.0

Bases = Callable[[], TrialBase]


def verify(bases: Bases, cutoff_now: float, contact_s: float, last: Resolution
           ) -> Generator[None, None, Resolution]:
    """Fly again the actions ``last`` offers, from the onset due now (a fresh trial base
    from ``bases``); ``last`` itself when each still clears, else the result of a full
    search (:func:`.resolutions.search`) from another fresh base. Yields after every
    trial. ``last.kind`` must not be None (something on offer)."""
    base = bases()
    cfg = base.cfg
    if last.at_limit:
        base.hold_to(1.0)
    lo = max_mach_off_ground(base.lowest_cutoff(cutoff_now), base.margin_mach)
    base.stretch(min(lo, math.floor(base.mach0 / MACH_GRID + 1e-9) * MACH_GRID))
    base.cutoff_now = cutoff_now
    bank = math.radians(cfg.turn_bank_deg)
    with_mach = last.resolve_mach if last.combined and last.resolve_mach is not None \
        else math.nan
    tries: list[dict[str, float]] = []
    if last.resolve_mach is not None and not last.combined:
        tries.append({"target_mach": last.resolve_mach})
    for change, side in ((last.turn_left_deg, -1.0), (last.turn_right_deg, 1.0)):
        if change is not None:
            tries.append({"target_mach": with_mach, "bank": side * bank,
                          "turn": side * math.radians(change)})
    for kw in tries:
        ok = base.clears(cfg.reaction_s, **kw)
        yield
        if not ok:
            return (yield from search(bases(), cutoff_now, contact_s))
    return last


class Renewal:
    """The last resolution search's result and the renewal in progress.

    Attributes
    ----------
    searches : int
        Full searches started (for the benchmark).
    verifications : int
        Renewals that began by flying again the actions on offer.
    """

    def __init__(self, config: AdvisorConfig) -> None:
        self.config = config
        self.searches = 0
        self.verifications = 0
        self._result: Resolution | None = None
        self._result_t0 = 0.0  # the monotonic time its search started
        self._result_zone: str | None = None
        self._full_t0 = 0.0  # the last full search's start
        self._search: Search | None = None
        self._search_t0 = 0.0  # the renewal in progress's start (and the last one's)
        self._as_predicted = False  # no departure since the last full search began
        self._held_back = False  # a near-cutoff first offer waits for the next search

    def departed(self) -> None:
        """The flight left the prediction (or none was made): the next renewal searches in
        full."""
        self._as_predicted = False

    def update(self, bases: Bases, cut_now: float, first: Conflict | None,
               now: float) -> tuple[Resolution | None, float | None]:
        """The resolutions and the act-by time (s, counted down since their search) for
        the first avoidable conflict ``first`` (None: none, the search is dropped).

        Parameters
        ----------
        bases : callable
            Makes a fresh trials' common part (:class:`.resolutions.TrialBase`) of this
            step.
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
            gen = search(bases(), cut_now, first.time_to_contact_s)
            self._result, self._held_back = None, False
            self._take(run_search(gen), now)
            self._result_zone, self._search = first.zone_id, None
            self._full_t0 = self._search_t0 = now
            self._as_predicted = not self._held_back
        else:
            if self._search is None and not 0.0 <= now - self._search_t0 < self.config.refresh_s:
                last = self._result
                if self._as_predicted and 0.0 <= now - self._full_t0 < FULL_SEARCH_S:
                    if last is not None and last.kind is not None:
                        self.verifications += 1
                        self._search = verify(bases, cut_now, first.time_to_contact_s, last)
                else:
                    self.searches += 1
                    self._search = search(bases(), cut_now, first.time_to_contact_s)
                    self._full_t0, self._as_predicted = now, True
                self._search_t0 = now
            self.advance()
        r = self._result
        if r is None or r.act_by_s is None:
            return r, None
        return r, max(0.0, r.act_by_s - (now - self._result_t0))

    def advance(self) -> bool:
        """Fly up to :data:`TRIALS_PER_STEP` trials of the renewal in progress; True when
        it finished now with a new result (which replaces the last; a verification that
        found the actions on offer still clearing keeps it)."""
        if self._search is None:
            return False
        done = run_search(self._search, TRIALS_PER_STEP)
        if done is None:
            return False
        self._search = None
        if done is self._result:
            return False
        # a full search's (a verification that failed went on to one)
        self._take(done, self._search_t0)
        self._full_t0 = self._search_t0
        return True

    def _take(self, done: Resolution | None, t0: float) -> None:
        """A full search's result ``done`` (started at ``t0``) replaces the last, except
        a near-cutoff first offer, held back until the next full search finds one too
        (module notes): nothing is offered meanwhile."""
        if done is None:
            return
        offers = done.kind is not None
        had = self._result is not None and self._result.kind is not None
        if offers and done.near and not had and not self._held_back:
            self._held_back, self._as_predicted = True, False  # the next renewal: in full
            done = Resolution(trials=done.trials, near=True)
        else:
            self._held_back = False
        self._result, self._result_t0 = done, t0
