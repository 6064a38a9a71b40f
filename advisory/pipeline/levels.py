"""Alert levels with hysteresis: from the time to the first contact to a crew level.

Levels (the three standard crew-alerting levels): 1 advisory (any contact within the
look-ahead), 2 caution (contact sooner than ``caution_lead_s``), 3 warning (sooner than
``warning_lead_s``); 0 when there is no contact. A level is raised at once; it is left
only when the contact is ``band_s`` later than the lead that raised it, and the lower
level has then held for ``release_s`` (``warning_hold_s`` from a warning), so a cue does
not flicker at a threshold. The lead times and hold times are project choices (common
practice, no source), documented in :mod:`advisory.pipeline.config`.
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
        Lead times, band and hold times, s.

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

    def raw(self, ttc: float | None, current: int) -> int:
        """The level a time to contact ``ttc`` (s, None for no contact) calls for, with
        the band added to the leads of the levels at or below ``current``."""
        c = self.cfg
        if ttc is None:
            return 0

        def lead(level: int) -> float:
            base = {3: c.warning_lead_s, 2: c.caution_lead_s}[level]
            return base + (c.band_s if current >= level else 0.0)

        for level in (3, 2):
            if ttc <= lead(level):
                return level
        return 1  # any predicted contact is at least an advisory

    def update(self, ttc: float | None, now: float) -> int:
        """The level after one step with time to contact ``ttc`` (s) at monotonic ``now`` (s)."""
        target = self.raw(ttc, self.level)
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
