"""The air-data state (SI inside) and the validator that guards the live loop.

:class:`AirDataState` is built from a field dict with the wire names of
``docs/interface.md`` (``lat_deg``, ``alt_ft``, ``gs_kt``, ...), converting to SI at this
edge: radians, metres, metres per second, kelvin. :class:`StateValidator` decides
whether one frame's fields may reach the advisor: it checks presence and type, ranges,
NaN/inf, staleness by monotonic receive time, sender clock steps and implausible jumps
between consecutive frames. It returns the state or a :class:`Rejection` (a ``str``
reason code with a human ``detail`` naming the field and the value), counts every
rejection by reason, and never raises on any input.

The numeric limits are engineering choices (common practice, no source); they are
listed in the ICD, ``docs/interface.md``, section "Accepted ranges".
"""

from __future__ import annotations

import math
import time
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from advisory.schema import STALE_AFTER_S
from advisory.units import DEG, FT, KELVIN_OFFSET, KT, wind_from_to_components

EARTH_RADIUS_M = 6371008.8  #: mean Earth radius, m (IUGG mean radius R1 of WGS 84)

REQUIRED_FIELDS = (
    "lat_deg", "lon_deg", "alt_ft", "mach", "heading_deg", "gs_kt", "bank_deg", "fpa_deg",
)
OPTIONAL_FIELDS = ("track_deg", "mach_rate_per_s", "sat_c", "wind_from_deg", "wind_kt")


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
        values = {}
        for name in REQUIRED_FIELDS + OPTIONAL_FIELDS:
            x = fields.get(name)
            if x is None:
                if name in REQUIRED_FIELDS:
                    raise ValueError(f"air-data field {name!r} is missing")
                values[name] = None
                continue
            if isinstance(x, bool) or not isinstance(x, (int, float)):
                raise ValueError(f"air-data field {name!r} must be a number, got {x!r}")
            values[name] = float(x)
        if (values["wind_from_deg"] is None) != (values["wind_kt"] is None):
            raise ValueError("air-data fields 'wind_from_deg' and 'wind_kt' must come "
                             f"together, got wind_from_deg={values['wind_from_deg']!r}, "
                             f"wind_kt={values['wind_kt']!r}")
        return _build(values, utc_s, rx_monotonic)

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
        }


_STATE_NAMES = tuple(AirDataState.__dataclass_fields__)
_object_new = object.__new__


def _new_state(values: tuple) -> AirDataState:
    """An :class:`AirDataState` from its 15 values in field order, without the generated
    ``__init__`` (half the cost on the hot path; same object, still frozen)."""
    st = _object_new(AirDataState)
    st.__dict__.update(zip(_STATE_NAMES, values))
    return st


def _build(v: Mapping[str, float | None], utc_s: float | None,
           rx_monotonic: float | None) -> AirDataState:
    track = v["track_deg"]
    sat = v["sat_c"]
    east = north = None
    if v["wind_kt"] is not None:
        east, north = wind_from_to_components(v["wind_from_deg"], v["wind_kt"] * KT)
    return AirDataState(
        v["lat_deg"] * DEG, v["lon_deg"] * DEG, v["alt_ft"] * FT, v["mach"],
        (v["heading_deg"] % 360.0) * DEG, v["gs_kt"] * KT, v["bank_deg"] * DEG,
        v["fpa_deg"] * DEG,
        None if track is None else (track % 360.0) * DEG,
        v["mach_rate_per_s"],
        None if sat is None else sat + KELVIN_OFFSET,
        east, north, utc_s, rx_monotonic,
    )


class Rejection(str):
    """Why a frame was refused: the ``str`` value is a short reason code.

    Codes: ``not_a_mapping``, ``missing:<field>``, ``type:<field>``,
    ``nonfinite:<field>``, ``range:<field>``, ``wind_incomplete``, ``stale``,
    ``rx_backwards``, ``utc_backwards``, ``clock_step``, ``jump:<field>``
    (``jump:position`` for latitude/longitude), ``internal``.

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

    ranges: dict[str, tuple[float, float]] = field(default_factory=lambda: {
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
    })
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


def _wrap180(d: float) -> float:
    return (d + 180.0) % 360.0 - 180.0


class StateValidator:
    """Check air-data frames before they reach the advisor; never raises.

    Parameters
    ----------
    limits : ValidatorLimits, optional
        Ranges and plausibility limits; defaults as listed in the ICD.

    Attributes
    ----------
    accepted : int
        Frames accepted.
    rejections : dict of str to int
        Rejected frames counted by reason code.
    rebaselines : int
        Times a consistent run of jumped frames was taken as the new track.
    last_rejection : Rejection or None
        The most recent rejection (its ``detail`` is the message for the log).
    """

    def __init__(self, limits: ValidatorLimits | None = None) -> None:
        self.limits = lim = limits or ValidatorLimits()
        self.accepted = 0
        self.rejections: dict[str, int] = {}
        self.rebaselines = 0
        self.last_rejection: Rejection | None = None
        r = lim.ranges
        self._req = tuple((n, float(r[n][0]), float(r[n][1])) for n in REQUIRED_FIELDS)
        self._opt = tuple((n, float(r[n][0]), float(r[n][1])) for n in OPTIONAL_FIELDS)
        self._req_flat = tuple(x for _, lo, hi in self._req for x in (lo, hi))
        self._opt_flat = tuple(x for _, lo, hi in self._opt for x in (lo, hi))
        # jump limits in wire units (deg, ft, kt); position compared in degrees of arc
        arc = 1.0 / (DEG * EARTH_RADIUS_M)  # degrees of arc per metre
        self._jump_k = (
            lim.speed_margin_mps / KT, lim.position_slack_m * arc, KT * arc,
            lim.climb_mps / FT, lim.alt_slack_m / FT, lim.mach_per_s, lim.mach_slack,
            lim.heading_deg_per_s, lim.heading_slack_deg, lim.gs_mps_per_s / KT,
            lim.gs_slack_mps / KT, lim.bank_deg_per_s, lim.bank_slack_deg,
            lim.fpa_deg_per_s, lim.fpa_slack_deg,
        )
        self._last: tuple | None = None  # wire values + rx of the last accepted frame
        self._last_state: AirDataState | None = None
        self._last_rx: float | None = None  # rx of the last frame that passed field checks
        self._clock_ref: tuple[float, float] | None = None  # (utc, rx)
        self._candidate: tuple | None = None
        self._run = 0

    # -- public -------------------------------------------------------------------

    def validate(self, fields: Any, rx_monotonic: float, utc_s: float | None = None,
                 now_monotonic: float | None = None) -> AirDataState | Rejection:
        """Validate one frame's fields.

        Parameters
        ----------
        fields : mapping
            Wire-named fields (``Frame.fields`` of an air frame, a state file, or the
            ARINC 429 assembler's output).
        rx_monotonic : float
            ``time.monotonic()`` when the frame was received, s.
        utc_s : float, optional
            The frame's UTC time (header ``utc_s``); enables the clock-step checks.
        now_monotonic : float, optional
            Current monotonic time for the staleness check; defaults to
            ``time.monotonic()`` (replays pass their own clock).

        Returns
        -------
        AirDataState or Rejection
            The state when accepted (it becomes the reference for the jump checks), else
            the reason (counted in :attr:`rejections`).
        """
        try:
            return self._validate(fields, rx_monotonic, utc_s, now_monotonic)
        except Exception as exc:  # the live loop must never die on bad input
            return self._reject("internal", f"validator error on input {fields!r:.80}: {exc!r}")

    def validate_frame(self, frame: Any, rx_monotonic: float,
                       now_monotonic: float | None = None) -> AirDataState | Rejection:
        """:meth:`validate` for a decoded :class:`advisory.io.messages.Frame` of type air."""
        if getattr(frame, "type", None) != "air":
            return self._reject("not_a_mapping", f"frame type {getattr(frame, 'type', None)!r}"
                                                 " is not 'air'")
        return self.validate(frame.fields, rx_monotonic, frame.utc_s, now_monotonic)

    def current(self, now_monotonic: float | None = None) -> AirDataState | None:
        """The last accepted state if it is still fresh at ``now_monotonic``, else None."""
        st = self._last_state
        if st is None:
            return None
        now = time.monotonic() if now_monotonic is None else now_monotonic
        if now - st.rx_monotonic > self.limits.max_age_s:
            return None
        return st

    def is_stale(self, now_monotonic: float | None = None) -> bool:
        """True when no fresh state is available (no frame yet, or the feed stopped)."""
        return self.current(now_monotonic) is None

    @property
    def rejected(self) -> int:
        """Total rejected frames."""
        return sum(self.rejections.values())

    # -- internals ----------------------------------------------------------------

    def _reject(self, code: str, detail: str) -> Rejection:
        rej = Rejection(code, detail)
        self.rejections[code] = self.rejections.get(code, 0) + 1
        self.last_rejection = rej
        return rej

    def _field_problem(self, fields: Any) -> Rejection | None:
        """The first bad required field (slow path), or None when all are acceptable."""
        if not isinstance(fields, Mapping):
            return self._reject("not_a_mapping", f"air-data fields must be a mapping, "
                                                 f"got {type(fields).__name__}")
        for name, lo, hi in self._req:
            rej = self._check_value(name, fields.get(name), lo, hi, required=True)
            if rej is not None:
                return rej
        return None

    def _check_value(self, name: str, x: Any, lo: float, hi: float,
                     required: bool) -> Rejection | None:
        if x is None:
            if required:
                return self._reject(f"missing:{name}", f"air-data field {name!r} is missing")
            return None
        if isinstance(x, bool) or not isinstance(x, (int, float)):
            return self._reject(f"type:{name}", f"air-data field {name!r} must be a number, "
                                                f"got {x!r:.60}")
        x = float(x)
        if not math.isfinite(x):
            return self._reject(f"nonfinite:{name}", f"air-data field {name!r} = {x!r} "
                                                     "is not finite")
        if not lo <= x <= hi:
            return self._reject(f"range:{name}", f"air-data field {name!r} = {x!r} is "
                                                 f"outside [{lo:g}, {hi:g}]")
        return None

    def _validate(self, fields: Any, rx: float, utc_s: float | None,
                  now: float | None) -> AirDataState | Rejection:
        lim = self.limits
        if type(rx) is not float:
            if isinstance(rx, bool) or not isinstance(rx, (int, float)):
                return self._reject("type:rx_monotonic", f"receive time must be a number, "
                                                         f"got {rx!r:.60}")
            rx = float(rx)
        if not -1e300 < rx < 1e300:
            return self._reject("nonfinite:rx_monotonic", f"receive time {rx!r} is not finite")
        if now is None:
            now = time.monotonic()
        if now - rx > lim.max_age_s:
            return self._reject("stale", f"frame received {now - rx:.3f} s ago, more than "
                                         f"{lim.max_age_s:g} s")
        last_rx = self._last_rx
        if last_rx is not None and rx < last_rx:
            return self._reject("rx_backwards", f"receive time {rx!r} is before the previous "
                                                f"frame's {last_rx!r}")
        # required fields: fast path (all float and in range), else find the culprit
        try:
            g = fields.__getitem__
            lat = g("lat_deg")
            lon = g("lon_deg")
            alt = g("alt_ft")
            mach = g("mach")
            hdg = g("heading_deg")
            gs = g("gs_kt")
            bank = g("bank_deg")
            fpa = g("fpa_deg")
            get = fields.get
            track = get("track_deg")
            mrate = get("mach_rate_per_s")
            sat = get("sat_c")
            wfrom = get("wind_from_deg")
            wkt = get("wind_kt")
        except Exception:
            return self._field_problem(fields) or self._reject(
                "internal", "required fields unreadable")
        (a0, a1, b0, b1, c0, c1, d0, d1, e0, e1, f0, f1, g0, g1, h0, h1) = self._req_flat
        if not (float is type(lat) is type(lon) is type(alt) is type(mach) is type(hdg)
                is type(gs) is type(bank) is type(fpa)
                and a0 <= lat <= a1 and b0 <= lon <= b1 and c0 <= alt <= c1
                and d0 <= mach <= d1 and e0 <= hdg <= e1 and f0 <= gs <= f1
                and g0 <= bank <= g1 and h0 <= fpa <= h1):
            rej = self._field_problem(fields)
            if rej is not None:
                return rej
            # acceptable but not all floats (ints): convert and go on
            lat, lon, alt, mach, hdg, gs, bank, fpa = (
                float(fields[n]) for n in REQUIRED_FIELDS)
        # optional fields
        (p0, p1, q0, q1, r0, r1, s0, s1, t0, t1) = self._opt_flat
        if not ((track is None or (type(track) is float and p0 <= track <= p1))
                and (mrate is None or (type(mrate) is float and q0 <= mrate <= q1))
                and (sat is None or (type(sat) is float and r0 <= sat <= r1))
                and (wfrom is None or (type(wfrom) is float and s0 <= wfrom <= s1))
                and (wkt is None or (type(wkt) is float and t0 <= wkt <= t1))):
            opt = []
            for (name, lo, hi), x in zip(self._opt, (track, mrate, sat, wfrom, wkt)):
                rej = self._check_value(name, x, lo, hi, required=False)
                if rej is not None:
                    return rej
                opt.append(None if x is None else float(x))
            track, mrate, sat, wfrom, wkt = opt
        if (wfrom is None) is not (wkt is None):
            return self._reject("wind_incomplete", "air-data fields 'wind_from_deg' and "
                                "'wind_kt' must come together, got wind_from_deg="
                                f"{wfrom!r}, wind_kt={wkt!r}")
        # sender clock
        if utc_s is not None:
            if type(utc_s) is not float:
                if isinstance(utc_s, bool) or not isinstance(utc_s, (int, float)):
                    return self._reject("type:utc_s", f"utc_s must be a number, got {utc_s!r:.60}")
                utc_s = float(utc_s)
            u0, u1 = lim.utc_range_s
            if not u0 <= utc_s <= u1:
                if not math.isfinite(utc_s):
                    return self._reject("nonfinite:utc_s", f"utc_s = {utc_s!r} is not finite")
                return self._reject("range:utc_s", f"utc_s = {utc_s!r} is outside "
                                                   f"[{u0:.0f}, {u1:.0f}] (years 2000-2100)")
        self._last_rx = rx
        if utc_s is not None:
            ref = self._clock_ref
            self._clock_ref = (utc_s, rx)
            if ref is not None:
                d_utc = utc_s - ref[0]
                if d_utc < 0.0:
                    return self._reject("utc_backwards", f"utc_s = {utc_s!r} is {-d_utc:.3f} s "
                                                         "before the previous frame's")
                d_rx = rx - ref[1]
                if abs(d_utc - d_rx) > lim.clock_step_tolerance_s:
                    return self._reject("clock_step", f"sender clock moved {d_utc:.3f} s while "
                                                      f"{d_rx:.3f} s passed here")
        cur = (lat, lon, alt, mach, hdg, gs, bank, fpa, rx)
        last = self._last
        if last is not None:
            plat, plon, palt, pmach, phdg, pgs, pbank, pfpa, prx = last
            dt = rx - prx
            (margin, slack_rad, pos_scale, alt_rate, alt_slack, mach_rate, mach_slack,
             hdg_rate, hdg_slack, gs_rate, gs_slack, bank_rate, bank_slack, fpa_rate,
             fpa_slack) = self._jump_k
            dlon = lon - plon
            if dlon > 180.0:
                dlon -= 360.0
            elif dlon < -180.0:
                dlon += 360.0
            dlat = lat - plat
            de = dlon * math.cos(lat * DEG)
            allowed = ((gs if gs > pgs else pgs) + margin) * dt * pos_scale + slack_rad
            dh = abs(hdg - phdg)
            if dh > 180.0:
                dh = 360.0 - dh
            if (dlat * dlat + de * de > allowed * allowed
                    or abs(alt - palt) > alt_rate * dt + alt_slack
                    or abs(mach - pmach) > mach_rate * dt + mach_slack
                    or dh > hdg_rate * dt + hdg_slack
                    or abs(gs - pgs) > gs_rate * dt + gs_slack
                    or abs(bank - pbank) > bank_rate * dt + bank_slack
                    or abs(fpa - pfpa) > fpa_rate * dt + fpa_slack):
                bad = self._jump(last, cur)  # authoritative, and names the field
            else:
                bad = None
            if bad is not None:
                # a run of mutually consistent jumped frames becomes the new track
                cand = self._candidate
                if cand is not None and self._jump(cand, cur) is None:
                    self._run += 1
                else:
                    self._run = 1
                self._candidate = cur
                if self._run < lim.rebaseline_after:
                    return self._reject(f"jump:{bad[0]}", bad[1])
                self.rebaselines += 1
                self._candidate = None
                self._run = 0
            elif self._candidate is not None:
                self._candidate = None
                self._run = 0
        self._last = cur
        if wkt is None:
            east = north = None
        else:
            east, north = wind_from_to_components(wfrom, wkt * KT)
        st = _new_state((
            lat * DEG, lon * DEG, alt * FT, mach, (hdg % 360.0) * DEG, gs * KT, bank * DEG,
            fpa * DEG, None if track is None else (track % 360.0) * DEG, mrate,
            None if sat is None else sat + KELVIN_OFFSET, east, north, utc_s, rx,
        ))
        self._last_state = st
        self.accepted += 1
        return st

    def _jump(self, a: tuple, b: tuple) -> tuple[str, str] | None:
        """First implausible change from sample ``a`` to ``b``, as (field, message).

        Samples are (lat, lon, alt, mach, hdg, gs, bank, fpa, rx) in wire units.
        """
        lim = self.limits
        dt = b[8] - a[8]
        if dt < 0.0:
            dt = 0.0
        # position: equirectangular distance, adequate for the short hops checked here
        dn = (b[0] - a[0]) * DEG * EARTH_RADIUS_M
        de = _wrap180(b[1] - a[1]) * DEG * EARTH_RADIUS_M * math.cos(b[0] * DEG)
        dist = math.hypot(dn, de)
        allowed = (max(a[5], b[5]) * KT + lim.speed_margin_mps) * dt + lim.position_slack_m
        if dist > allowed:
            return "position", (f"position moved {dist:.0f} m in {dt:.3f} s "
                                f"(at most {allowed:.0f} m plausible)")
        if abs(b[2] - a[2]) * FT > lim.climb_mps * dt + lim.alt_slack_m:
            return "alt_ft", self._jump_text("alt_ft", a[2], b[2], dt)
        if abs(b[3] - a[3]) > lim.mach_per_s * dt + lim.mach_slack:
            return "mach", self._jump_text("mach", a[3], b[3], dt)
        if abs(_wrap180(b[4] - a[4])) > lim.heading_deg_per_s * dt + lim.heading_slack_deg:
            return "heading_deg", self._jump_text("heading_deg", a[4], b[4], dt)
        if abs(b[5] - a[5]) * KT > lim.gs_mps_per_s * dt + lim.gs_slack_mps:
            return "gs_kt", self._jump_text("gs_kt", a[5], b[5], dt)
        if abs(b[6] - a[6]) > lim.bank_deg_per_s * dt + lim.bank_slack_deg:
            return "bank_deg", self._jump_text("bank_deg", a[6], b[6], dt)
        if abs(b[7] - a[7]) > lim.fpa_deg_per_s * dt + lim.fpa_slack_deg:
            return "fpa_deg", self._jump_text("fpa_deg", a[7], b[7], dt)
        return None

    @staticmethod
    def _jump_text(name: str, before: float, after: float, dt: float) -> str:
        return (f"air-data field {name!r} jumped from {before!r} to {after!r} in {dt:.3f} s, "
                "more than plausible")
