"""Alert levels with hysteresis: from the time left to act to a crew level.

Levels (the three standard crew-alerting levels) are set on the act-by time, the
seconds left before the latest moment the offered action can start and still clear
(:mod:`advisory.pipeline.resolutions`), not on the time until the boom arrives (a boom
takes a minute or two to reach the ground, so the arrival time says little about how
long the crew has): 1 advisory (an avoidable contact within the look-ahead), 2 caution
(act-by ``caution_act_s`` or less), 3 warning (``warning_act_s`` or less, or no action
found that clears); 0 when there is no avoidable contact. A level is raised at once; it
is left only when the act-by time is ``band_s`` later than the lead that raised it, and
the lower level has then held for ``release_s`` (``warning_hold_s`` from a warning), so
a cue does not flicker at a threshold. The leads and hold times are project choices
(common practice, no source), documented in :mod:`advisory.pipeline.config`.
"""

from __future__ import annotations

from advisory.pipeline.config import AdvisorConfig
from advisory.schema import CONFLICT_STATUSES

__all__ = ["AlertLevels", "level_status"]


def level_status(level: int) -> str:
    """The advisory status of a crew level 1-3 (``advisory``, ``caution``, ``warning``)."""
    return CONFLICT_STATUSES[level - 1]


class AlertLevels:
    """Alert level with hysteresis: up at once, down only after a band and a hold time.

    Parameters
    ----------
    cfg : AdvisorConfig
        Act-by leads, band and hold times, s.

    Attributes
    ----------
    level : int
        The level now, 0-3.
    lower_since : float or None
        Monotonic time since which a lower level has been due, s (None when not).
    """

    def __init__(self, cfg: AdvisorConfig) -> None:
        self.cfg = cfg
        self.level = 0
        self.lower_since: float | None = None

    def raw(self, act_by: float | None, current: int) -> int:
        """The level an act-by time ``act_by`` (s; None for no avoidable contact; 0 when
        nothing clears) calls for, with the band added to the leads of the levels at or
        below ``current``."""
        c = self.cfg
        if act_by is None:
            return 0

        def lead(level: int) -> float:
            base = {3: c.warning_act_s, 2: c.caution_act_s}[level]
            return base + (c.band_s if current >= level else 0.0)

        for level in (3, 2):
            if act_by <= lead(level):
                return level
        return 1  # any avoidable contact is at least an advisory

    def update(self, act_by: float | None, now: float) -> int:
        """The level after one step with act-by time ``act_by`` (s) at monotonic ``now`` (s)."""
        target = self.raw(act_by, self.level)
        if target >= self.level:
            self.level = target
            self.lower_since = None
            return self.level
        if self.lower_since is None:
            self.lower_since = now
        hold = self.cfg.warning_hold_s if self.level == 3 else self.cfg.release_s
        if now - self.lower_since >= hold:
            self.level = target
            self.lower_since = None
        return self.level
