"""Resolutions, each flown as a trial before it is offered, and the time left to act.

Every candidate is a trial flight (:mod:`advisory.pipeline.trial`, its emission times
:mod:`advisory.pipeline.trial_base`): the trajectory ahead
re-flown from the present state with the crew's action starting after the configured
reaction time, its carpet laid from the table with the focus of its own trajectory, and
the zones searched for the emissions the action can still change (those from the
reaction time on, the reaction time and the onset themselves included; booms emitted
earlier are the advisor's "unavoidable" ones). A zone with an overpressure limit is held
to ``limit_fraction`` of it in the trials (the prediction's error; the alerts use the
limit itself), so an offered resolution does not sit on the limit. When nothing clears
so, the whole search is flown again holding the booms to the limit itself, and what
clears then is offered marked ``at_limit`` (a crew told of a resolution with less room
keeps more booms off the ground than one told of none: campaign --known, seed 1, where
the truth's best action kept 94-98 % of the limit and the advisor offered nothing). Not
while the present Mach is within :data:`AT_LIMIT_MIN_EXCESS` of the cutoff, where the
prediction is least sure: two offered so there, within 0.01 of the cutoff, failed in
truth.

* **Mach** (``resolve_mach``): decelerate at ``decel_mach_per_s`` (wings rolled level at
  ``roll_rate_deg_s``) to a target Mach. A slower aircraft covers less ground in the
  look-ahead, so these trials are flown ``M0 / M`` times longer (the same ground as the
  prediction): a target above cutoff that only delays a contact beyond the look-ahead is
  not offered. Booms emitted just above cutoff travel far ahead (and focus), so these
  trials also emit where the deceleration passes cutoff plus small excesses
  (:data:`NEAR_CUTOFF_EXCESS`), not only every ``step_s``. The lowest candidate is the
  present cutoff Mach less the margin (none when the table's cutoff is read at the
  configured confidence, :mod:`advisory.pipeline.confidence`; else the fixed
  ``cutoff_margin_mach``), rounded down to 0.01 (every boom after it stays off the
  ground), the lowest cutoff over every ground level with zones (higher ground is
  reached at a lower Mach; every trial is judged on every level's zones,
  :class:`OtherGround`); when it clears, the largest clearing target between it and the
  present Mach is found by bisection on a 0.01 grid (assuming that a lower target clears
  when a higher one does, true but near odd geometry). Below a target that failed, the
  value offered is that target less ``mach_hold_margin``, not below the lowest
  candidate, tried once more (a crew holds a Mach to about 0.01, and near cutoff the
  carpet's edge moves 1-1.5 km per 0.01; the measured case: ``hold-margin-s2-79`` in
  ``tests/test_checked_resolutions.py``); when that try fails (odd geometry) the target
  itself is: every value offered is a trial that cleared. When the lowest candidate does
  not clear, no Mach alone clears.
* **Turns** (``turn_left_deg`` / ``turn_right_deg``): roll at ``roll_rate_deg_s`` to
  ``turn_bank_deg``, hold, roll out at the heading change; heading changes are tried on
  a coarse list (10, 20, 30, 45, 60, 90, 135, 180 deg up to ``max_turn_deg``) and refined
  in ``turn_step_deg`` steps between the last failing and the first clearing one.
* **Combined**: when neither alone clears, the lowest Mach candidate together with the
  smallest turn each way that clears with it (``combined`` True).
* **Act-by** (``act_by_s``): for the action the crew is offered first (the Mach when it
  clears alone, else the smaller turn, left on a tie, else the combination), the latest
  onset that still clears, by bisection to :data:`ACT_BY_TOLERANCE_S` between the
  reaction time (clears) and the first contact (the action must begin before the
  emission that reaches the zone); assumes a later onset never clears when an earlier one
  does not (common practice, no source). The value offered is the latest onset that
  cleared less one emission spacing (``step_s``) and the bisection tolerance: booms are
  laid every ``step_s`` in a trial, so one between two of them can reach the zone sooner.

The search is a generator (:func:`search`) that yields after every trial, so the advisor
can spread a refresh over several steps with a bounded number of trials each; the number
of trials is fixed by the inputs (no clock), so replays stay deterministic. The lists,
tolerances and the crew's preference are project choices (common practice, no source).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Generator
from dataclasses import dataclass

from advisory.pipeline.airdata import AirDataState
from advisory.pipeline.trial_base import NEAR_CUTOFF_EXCESS, OtherGround, TrialBase

__all__ = ["max_mach_off_ground", "OtherGround", "TrialBase", "Resolution", "search",
           "run_search", "roll_out", "COARSE_TURNS_DEG", "ACT_BY_TOLERANCE_S"]

#: Heading changes tried first, deg (then refined between the last fail and first clear).
COARSE_TURNS_DEG = (10.0, 20.0, 30.0, 45.0, 60.0, 90.0, 135.0, 180.0)
#: Precision of the act-by bisection, s.
ACT_BY_TOLERANCE_S = 1.0
MACH_GRID = 0.01  #: resolution of the offered Mach
#: No search at the limit itself while the present Mach is less than this above the
#: cutoff Mach: the table's near-cutoff rows (the largest of
#: :data:`advisory.pipeline.trial_base.NEAR_CUTOFF_EXCESS`), where the booms graze and
#: focus and the prediction is least sure (campaign --known, seed 1: the two resolutions
#: offered at the limit that failed in truth were 0.01 or less above the cutoff).
AT_LIMIT_MIN_EXCESS = float(NEAR_CUTOFF_EXCESS[-1])


def max_mach_off_ground(cutoff_mach: float, margin_mach: float) -> float:
    """Highest Mach (rounded down to 0.01) whose boom stays off the ground: the cutoff
    Mach less the configured margin."""
    return math.floor(100.0 * (cutoff_mach - margin_mach) + 1e-9) / 100.0




@dataclass(frozen=True)
class Resolution:
    """What a search found (times from the state the search started on).

    ``kind`` is the action offered first: ``mach``, ``left``, ``right``, ``combined_left``,
    ``combined_right`` or None (nothing clears); ``act_by_s`` the latest onset of that
    action that still clears (None when nothing clears); ``trials`` the trials flown;
    ``near``: the present Mach was less than :data:`AT_LIMIT_MIN_EXCESS` above the lowest
    cutoff Mach (:mod:`advisory.pipeline.renewal` confirms a first offer there).
    """

    resolve_mach: float | None = None
    turn_left_deg: float | None = None
    turn_right_deg: float | None = None
    combined: bool = False
    kind: str | None = None
    act_by_s: float | None = None
    trials: int = 0
    at_limit: bool = False
    near: bool = False


Search = Generator[None, None, Resolution]


def search(base: TrialBase, cutoff_now: float, contact_s: float) -> Search:
    """The resolution search (module notes); yields after every trial.

    Parameters
    ----------
    base : TrialBase
    cutoff_now : float
        Cutoff Mach at the present state.
    contact_s : float
        Time to the first avoidable contact, s (the act-by search's upper end).
    """
    found = yield from _search_once(base, cutoff_now, contact_s)
    near = base.mach0 - base.lowest_cutoff(cutoff_now) < AT_LIMIT_MIN_EXCESS
    if found.kind is None and not near and base.hold_to(1.0):
        at_limit = yield from _search_once(base, cutoff_now, contact_s)
        if at_limit.kind is not None:
            return dataclasses.replace(at_limit, at_limit=True)
        return dataclasses.replace(found, trials=at_limit.trials)
    return dataclasses.replace(found, near=near)


def _search_once(base: TrialBase, cutoff_now: float, contact_s: float) -> Search:
    """One pass of :func:`search` at the trials' present hold (:meth:`TrialBase.hold_to`)."""
    cfg = base.cfg
    onset = cfg.reaction_s
    found: list[bool] = []

    def trial(**kw: float) -> Generator[None, None, bool]:
        ok = base.clears(onset, **kw)
        found.append(ok)
        yield
        return ok

    lo = max_mach_off_ground(base.lowest_cutoff(cutoff_now), base.margin_mach)
    hi = math.floor(base.mach0 / MACH_GRID + 1e-9) * MACH_GRID
    lo = min(lo, hi)
    base.stretch(lo)
    base.cutoff_now = cutoff_now
    mach: float | None = None
    if (yield from trial(target_mach=lo)):
        good, bad = lo, hi + MACH_GRID
        while bad - good > MACH_GRID * 1.5:
            mid = round(math.floor(0.5 * (good + bad) / MACH_GRID + 1e-9) * MACH_GRID, 2)
            if mid <= good:
                break
            if (yield from trial(target_mach=mid)):
                good = mid
            else:
                bad = mid
        mach = round(good, 2)
        held = round(max(max_mach_off_ground(good, cfg.mach_hold_margin), lo), 2)
        # only below a target that failed (at the present Mach, what clears is the
        # roll-out or holding the speed: :func:`roll_out`)
        if bad <= hi + 1e-9 and held < mach and (yield from trial(target_mach=held)):
            mach = held
    bank = math.radians(cfg.turn_bank_deg)
    coarse = [a for a in COARSE_TURNS_DEG if a <= cfg.max_turn_deg]
    if not coarse or coarse[-1] < cfg.max_turn_deg:
        coarse.append(cfg.max_turn_deg)

    def turn_trial(target_mach: float) -> Callable[[float, int], Generator[None, None, bool]]:
        def f(delta_deg: float, side: int) -> Generator[None, None, bool]:
            return trial(target_mach=target_mach, bank=side * bank,
                         turn=side * math.radians(delta_deg))
        return f

    turns = turn_trial(math.nan)
    left = yield from _smallest_clearing(turns, -1, coarse, cfg.turn_step_deg)
    right = yield from _smallest_clearing(turns, 1, coarse, cfg.turn_step_deg)
    combined = False
    if mach is None and left is None and right is None:
        with_mach = turn_trial(lo)
        left = yield from _smallest_clearing(with_mach, -1, coarse, cfg.turn_step_deg)
        right = yield from _smallest_clearing(with_mach, 1, coarse, cfg.turn_step_deg)
        if left is not None or right is not None:
            combined, mach = True, lo
    kind, action = _first_action(mach, left, right, combined, bank)
    act_by = None
    if action is not None:
        latest = yield from _latest_onset(base, action, onset, contact_s)
        # Offered with a margin of one emission spacing and the bisection tolerance: the
        # trial's booms are laid every ``step_s``, so a boom between two of them can reach
        # the zone that much sooner. Measured in the bundled turn flight with the truth
        # harness: the trial's latest roll-out was 49 s, the truth's 44-48 s (issue 13).
        act_by = max(0.0, latest - cfg.step_s - ACT_BY_TOLERANCE_S)
    return Resolution(mach, left, right, combined, kind, act_by, base.trials)


def _first_action(mach: float | None, left: float | None, right: float | None,
                  combined: bool, bank: float) -> tuple[str | None, dict | None]:
    """The action the crew is offered first, as trial keywords (module notes)."""
    turns = [(v, side, name) for v, side, name in ((left, -1, "left"), (right, 1, "right"))
             if v is not None]
    if mach is not None and not combined:
        return "mach", {"target_mach": mach}
    if not turns:
        return None, None
    change, side, name = min(turns, key=lambda x: (x[0], x[1]))
    kw = {"bank": side * bank, "turn": side * math.radians(change)}
    if combined:
        kw["target_mach"] = mach if mach is not None else math.nan
        name = f"combined_{name}"
    return name, kw


def _latest_onset(base: TrialBase, action: dict, onset: float, contact_s: float
                  ) -> Generator[None, None, float]:
    """The latest onset (s) of ``action`` that still clears, by bisection (module notes)."""
    good = onset
    bad = min(max(contact_s, onset), base.horizon_s)  # the contact is within the look-ahead
    if bad - good <= ACT_BY_TOLERANCE_S:
        return good
    ok = base.clears(bad, **action)
    yield
    if ok:
        return bad
    while bad - good > ACT_BY_TOLERANCE_S:
        mid = 0.5 * (good + bad)
        ok = base.clears(mid, **action)
        yield
        if ok:
            good = mid
        else:
            bad = mid
    return good


def _smallest_clearing(clears: Callable[[float, int], Generator[None, None, bool]], side: int,
                       coarse: list[float], step: float
                       ) -> Generator[None, None, float | None]:
    """The first clearing heading change of the coarse list on one side, refined in
    ``step`` between the last failing one and it (deg); None when none clears."""
    lo, found = 0.0, None
    for a in coarse:
        if (yield from clears(a, side)):
            found = a
            break
        lo = a
    if found is not None:
        a = lo + step
        while a < found - 1e-9:  # refine between the last fail and first clear
            if (yield from clears(a, side)):
                found = a
                break
            a += step
    return found


def run_search(gen: Search, budget: int | None = None) -> Resolution | None:
    """Advance ``gen`` by at most ``budget`` trials (None: to the end); its result when it
    has finished, else None."""
    n = 0
    try:
        while budget is None or n < budget:
            next(gen)
            n += 1
    except StopIteration as stop:
        return stop.value  # type: ignore[no-any-return]
    return None


#: A Mach trial at the present Mach (to this much) clears only by its roll-out, Mach.
SAME_MACH = 0.005
#: Bank from which a roll-out is a turn resolution, rad (common practice, no source).
ROLL_OUT_BANK_RAD = math.radians(5.0)


def roll_out(r: Resolution, s: AirDataState) -> Resolution:
    """A Mach resolution at the present Mach while banked, said as what it is: the trial
    rolls the wings level after the reaction time and holds the speed, so what clears is
    the roll-out, on the heading reached then (a turn of 0 deg from the onset heading, in
    the direction of the bank). "M1.50" at Mach 1.50 would tell the crew nothing; the
    crew model would hold the bank and fly on into the zone."""
    if (r.resolve_mach is None or r.combined or r.resolve_mach < s.mach - SAME_MACH
            or abs(s.bank_rad) < ROLL_OUT_BANK_RAD):
        return r
    if s.bank_rad > 0.0:
        return dataclasses.replace(r, resolve_mach=None, turn_right_deg=0.0)
    return dataclasses.replace(r, resolve_mach=None, turn_left_deg=0.0)
