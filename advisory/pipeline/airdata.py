"""The air-data state: one sample in SI units, and the one table of accepted ranges.

:class:`AirDataState` is built from a field dict with the wire names of
``docs/interface.md`` (``lat_deg``, ``alt_ft``, ``gs_kt``, ...; the names are facts of
:mod:`advisory.schema`), converting to SI at this edge: radians, metres, metres per
second, kelvin. :data:`AIR_RANGES` are the accepted ranges of those fields; the
validator (:mod:`advisory.pipeline.state`) refuses frames outside them and the advisor
refuses a state outside them (:func:`state_problem`), so both use the same limits.

The numeric limits are engineering choices (common practice, no source); they are
listed in the ICD, ``docs/interface.md``, section "Accepted ranges".
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from advisory.schema import AIR_FIELDS, AIR_REQUIRED
from advisory.units import DEG, FT, KELVIN_OFFSET, KT, wind_from_to_components

__all__ = ["AIR_RANGES", "AirDataState", "state_problem"]

#: Accepted range of every air-data field, wire units, closed intervals (engineering
#: choices: common practice, no source; the ICD, section "Accepted ranges").
AIR_RANGES: dict[str, tuple[float, float]] = {
    "lat_deg": (-90.0, 90.0),
    "lon_deg": (-180.0, 180.0),
    "alt_ft": (-1500.0, 98000.0),
    "mach": (0.0, 4.0),
    "heading_deg": (0.0, 360.0),
    "gs_kt": (0.0, 2500.0),
    "bank_deg": (-80.0, 80.0),
    "fpa_deg": (-30.0, 30.0),
    "track_deg": (0.0, 360.0),
    "mach_rate_per_s": (-1.0, 1.0),
    "sat_c": (-100.0, 60.0),
    "wind_from_deg": (0.0, 360.0),
    "wind_kt": (0.0, 400.0),
    # body pitch rate: well beyond what a transport or business aircraft flies (a few
    # deg/s) and inside a fighter's; load factor: -3 .. 9 g, the envelope of aerobatic
    # and military aircraft, outside any airliner's -1 .. 2.5 g (common practice, no
    # source; these only refuse nonsense, the trajectory bounds what it predicts)
    "pitch_rate_dps": (-30.0, 30.0),
    "load_factor": (-3.0, 9.0),
    # the flight-guidance targets: an altitude a little beyond the field's own range
    # (a selected altitude may lie below the field's floor or above the present one),
    # a heading, a Mach from slow flight to the tables' top (ICD section 4)
    "selected_alt_ft": (-2000.0, 100000.0),
    "selected_heading_deg": (0.0, 360.0),
    "selected_mach": (0.1, 5.0),
}

#: The state attribute of each required wire field and the factor from wire units to SI.
_SI_OF_REQUIRED = {
    "lat_deg": ("lat_rad", DEG), "lon_deg": ("lon_rad", DEG), "alt_ft": ("alt_m", FT),
    "mach": ("mach", 1.0), "heading_deg": ("heading_rad", DEG), "gs_kt": ("gs_mps", KT),
    "bank_deg": ("bank_rad", DEG), "fpa_deg": ("fpa_rad", DEG),
}


@dataclass(frozen=True)
class AirDataState:
    """One validated air-data sample, SI units.

    Attributes
    ----------
    lat_rad, lon_rad : float
        WGS 84 geodetic latitude and longitude, rad.
    alt_m : float
        Pressure altitude (standard setting 1013.25 hPa), m.
    mach : float
        Flight Mach number.
    heading_rad : float
        True heading, clockwise from true north, rad, in [0, 2 pi).
    gs_mps : float
        Ground speed, m/s.
    bank_rad : float
        Bank angle, rad, positive right wing down.
    fpa_rad : float
        Flight-path angle, rad, positive climbing.
    track_rad : float or None
        True track over the ground, rad, in [0, 2 pi); None when not sent.
    mach_rate_per_s : float or None
        Rate of change of Mach number, 1/s.
    sat_k : float or None
        Static air temperature, K.
    wind_east_mps, wind_north_mps : float or None
        Wind at the aircraft: velocity of the air toward east and north, m/s.
    utc_s : float or None
        Sender's UTC time of the sample, s since 1970.
    rx_monotonic : float or None
        ``time.monotonic()`` when the frame was received, s.
    pitch_rate_rad_s : float or None
        Body-axis pitch rate, rad/s, positive nose up; None when not sent.
    load_factor : float or None
        Normal load factor (lift over weight), g units: 1 in level unaccelerated flight;
        None when not sent.
    selected_alt_m : float or None
        Selected altitude (the climb or descent levels off there), m, the reference of
        ``alt_m``; None when not sent.
    selected_heading_rad : float or None
        Selected true heading (the turn rolls out on it), rad, in [0, 2 pi).
    selected_mach : float or None
        Selected Mach (the Mach change ends there).
    """

    lat_rad: float
    lon_rad: float
    alt_m: float
    mach: float
    heading_rad: float
    gs_mps: float
    bank_rad: float
    fpa_rad: float
    track_rad: float | None = None
    mach_rate_per_s: float | None = None
    sat_k: float | None = None
    wind_east_mps: float | None = None
    wind_north_mps: float | None = None
    utc_s: float | None = None
    rx_monotonic: float | None = None
    pitch_rate_rad_s: float | None = None
    load_factor: float | None = None
    selected_alt_m: float | None = None
    selected_heading_rad: float | None = None
    selected_mach: float | None = None

    @classmethod
    def from_fields(cls, fields: Mapping[str, Any], *, utc_s: float | None = None,
                    rx_monotonic: float | None = None) -> AirDataState:
        """Build a state from wire-named fields, converting units (no range checks).

        Parameters
        ----------
        fields : mapping
            Wire names to numbers (see the module docstring); optional ones may be
            missing or None. ``wind_from_deg`` and ``wind_kt`` come together or not at
            all.
        utc_s, rx_monotonic : float, optional
            Time tags carried into the state.

        Raises
        ------
        ValueError
            A required field is missing, a value is not a number, or wind is half given;
            the message names the field and the value.
        """
        req: dict[str, float] = {}
        opt: dict[str, float | None] = {}
        for name in AIR_FIELDS:
            x = fields.get(name)
            if x is None:
                if name in AIR_REQUIRED:
                    raise ValueError(f"air-data field {name!r} is missing")
                opt[name] = None
                continue
            if isinstance(x, bool) or not isinstance(x, (int, float)):
                raise ValueError(f"air-data field {name!r} must be a number, got {x!r}")
            if name in AIR_REQUIRED:
                req[name] = float(x)
            else:
                opt[name] = float(x)
        if (opt["wind_from_deg"] is None) != (opt["wind_kt"] is None):
            raise ValueError("air-data fields 'wind_from_deg' and 'wind_kt' must come "
                             f"together, got wind_from_deg={opt['wind_from_deg']!r}, "
                             f"wind_kt={opt['wind_kt']!r}")
        return _build(req, opt, utc_s, rx_monotonic)

    def to_fields(self) -> dict[str, float | None]:
        """The wire-named field dict of this state (inverse of :meth:`from_fields`)."""
        wind_from = wind_kt = None
        if self.wind_east_mps is not None and self.wind_north_mps is not None:
            speed = math.hypot(self.wind_east_mps, self.wind_north_mps)
            wind_kt = speed / KT
            # direction the wind blows FROM is opposite to the air's velocity
            wind_from = math.degrees(math.atan2(-self.wind_east_mps,
                                                -self.wind_north_mps)) % 360.0
        return {
            "lat_deg": self.lat_rad / DEG,
            "lon_deg": self.lon_rad / DEG,
            "alt_ft": self.alt_m / FT,
            "mach": self.mach,
            "heading_deg": self.heading_rad / DEG,
            "gs_kt": self.gs_mps / KT,
            "bank_deg": self.bank_rad / DEG,
            "fpa_deg": self.fpa_rad / DEG,
            "track_deg": None if self.track_rad is None else self.track_rad / DEG,
            "mach_rate_per_s": self.mach_rate_per_s,
            "sat_c": None if self.sat_k is None else self.sat_k - KELVIN_OFFSET,
            "wind_from_deg": wind_from,
            "wind_kt": wind_kt,
            "pitch_rate_dps": (None if self.pitch_rate_rad_s is None
                               else self.pitch_rate_rad_s / DEG),
            "load_factor": self.load_factor,
            "selected_alt_ft": None if self.selected_alt_m is None else self.selected_alt_m / FT,
            "selected_heading_deg": (None if self.selected_heading_rad is None
                                     else self.selected_heading_rad / DEG),
            "selected_mach": self.selected_mach,
        }


_STATE_NAMES = tuple(AirDataState.__dataclass_fields__)
_object_new = object.__new__


def new_state(values: tuple) -> AirDataState:
    """An :class:`AirDataState` from its 20 values in field order, without the generated
    ``__init__`` (half the cost on the hot path; same object, still frozen)."""
    st = _object_new(AirDataState)
    st.__dict__.update(zip(_STATE_NAMES, values))
    return st


def _build(v: Mapping[str, float], o: Mapping[str, float | None], utc_s: float | None,
           rx_monotonic: float | None) -> AirDataState:
    """The state of required wire values ``v`` and optional ones ``o`` (None: not sent)."""
    track = o["track_deg"]
    sat = o["sat_c"]
    pitch = o["pitch_rate_dps"]
    sel_alt = o["selected_alt_ft"]
    sel_hdg = o["selected_heading_deg"]
    wind_from = o["wind_from_deg"]
    wind_kt = o["wind_kt"]
    east = north = None
    if wind_kt is not None and wind_from is not None:
        east, north = wind_from_to_components(wind_from, wind_kt * KT)
    return AirDataState(
        v["lat_deg"] * DEG, v["lon_deg"] * DEG, v["alt_ft"] * FT, v["mach"],
        (v["heading_deg"] % 360.0) * DEG, v["gs_kt"] * KT, v["bank_deg"] * DEG,
        v["fpa_deg"] * DEG,
        None if track is None else (track % 360.0) * DEG,
        o["mach_rate_per_s"],
        None if sat is None else sat + KELVIN_OFFSET,
        east, north, utc_s, rx_monotonic,
        None if pitch is None else pitch * DEG, o["load_factor"],
        None if sel_alt is None else sel_alt * FT,
        None if sel_hdg is None else (sel_hdg % 360.0) * DEG, o["selected_mach"],
    )


def state_problem(s: AirDataState,
                  ranges: Mapping[str, tuple[float, float]] = AIR_RANGES) -> str:
    """A reason the state cannot be advised on ('' when it can).

    Every required value must be finite and within ``ranges`` (default
    :data:`AIR_RANGES`), compared in SI with the bounds converted exactly as
    :meth:`AirDataState.from_fields` converts the values, so a state the validator
    accepted always passes.
    """
    for name in AIR_REQUIRED:
        attr, k = _SI_OF_REQUIRED[name]
        v = getattr(s, attr)
        lo, hi = ranges[name]
        if v is None or not math.isfinite(v) or not (lo * k <= v <= hi * k):
            shown = v if v is None or k == 1.0 else v / k
            return f"invalid air data: {name} = {shown!r} (accepted [{lo:g}, {hi:g}])"
    return ""
