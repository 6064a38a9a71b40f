"""The validator's terms: the limits an air-data frame must meet, and the refusal.

:class:`ValidatorLimits` holds the accepted ranges and plausibility limits that
:class:`advisory.pipeline.state.StateValidator` applies; :class:`Rejection` is what it
returns for a frame it refuses (a short reason code with one sentence naming the field
and the value). The numeric limits are engineering choices (common practice, no
source); the ICD, ``docs/interface.md``, lists them under "Accepted ranges".
"""

from __future__ import annotations

from dataclasses import dataclass, field

from advisory.pipeline.airdata import AIR_RANGES
from advisory.schema import STALE_AFTER_S

__all__ = ["Rejection", "ValidatorLimits"]


class Rejection(str):
    """Why a frame was refused: the ``str`` value is a short reason code.

    Codes: ``not_a_mapping``, ``missing:<field>``, ``type:<field>``,
    ``nonfinite:<field>``, ``range:<field>``, ``wind_incomplete``, ``stale``,
    ``rx_backwards``, ``utc_backwards``, ``clock_step``, ``jump:<field>``
    (``jump:position`` for latitude/longitude), ``internal``; freshness
    (:data:`advisory.schema.FRESHNESS_REASONS`): ``seq_repeat``, ``seq_back``,
    ``utc_frozen``, ``position_frozen``; and ``inconsistent:gs_kt`` (ground speed that
    Mach and wind cannot explain).

    Attributes
    ----------
    detail : str
        One clear sentence naming the field and the value.
    """

    detail: str

    def __new__(cls, code: str, detail: str) -> Rejection:
        obj = super().__new__(cls, code)
        obj.detail = detail
        return obj


@dataclass(frozen=True)
class ValidatorLimits:
    """Accepted ranges and plausibility limits (engineering choices: common practice,
    no source). Ranges are closed intervals in wire units; rates are per second of
    monotonic receive time, each with a slack added for sensor noise and timing jitter.
    """

    ranges: dict[str, tuple[float, float]] = field(default_factory=lambda: dict(AIR_RANGES))
    max_age_s: float = STALE_AFTER_S  #: a frame older than this (monotonic) is stale
    clock_step_tolerance_s: float = 1.0  #: |d utc - d monotonic| allowed between frames
    utc_range_s: tuple[float, float] = (946684800.0, 4102444800.0)  #: 2000 to 2100
    speed_margin_mps: float = 100.0  #: added to the larger ground speed for position
    position_slack_m: float = 300.0
    climb_mps: float = 250.0
    alt_slack_m: float = 60.0
    mach_per_s: float = 0.5
    mach_slack: float = 0.05
    heading_deg_per_s: float = 45.0
    heading_slack_deg: float = 10.0
    gs_mps_per_s: float = 50.0
    gs_slack_mps: float = 10.0
    bank_deg_per_s: float = 120.0
    bank_slack_deg: float = 10.0
    fpa_deg_per_s: float = 30.0
    fpa_slack_deg: float = 5.0
    rebaseline_after: int = 3  #: mutually consistent jumped frames that start a new track
    rebaseline_min_s: float = 1.0  #: ... and the time they must span (a glitch is shorter)
    seq_restart_after: int = 3  #: frames numbered on from a step back: a sender restart
    seq_restart_step: int = 16  #: largest seq advance between those frames
    motion_window_s: float = 0.4  #: position compared with ground speed over this time
    motion_fraction: float = 0.5  #: ... it must cover this share of ground speed x time
    position_noise_m: float = 50.0  #: ... less this noise (GNSS, ARINC 429 resolution)
    max_wind_mps: float = 125.0  #: strongest wind assumed when the frame carries none
    tas_fraction: float = 0.10  #: Mach -> true airspeed uncertainty without sat_c
    tas_fraction_sat: float = 0.05  #: ... with sat_c
    speed_slack_mps: float = 25.0  #: added to the ground-speed consistency tolerance
