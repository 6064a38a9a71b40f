"""The validator that guards the live loop: which air-data frames may reach the advisor.

:class:`StateValidator` decides whether one frame's fields may reach the advisor: it
checks presence and type, ranges (:data:`advisory.pipeline.airdata.AIR_RANGES`),
NaN/inf, staleness by monotonic receive time, sender clock steps, implausible jumps
between consecutive frames, frozen data (a repeated or old ``seq``, a frozen sender
clock, a position that does not move with the ground speed; helpers in
:mod:`advisory.pipeline.freshness`) and a ground speed that Mach and wind cannot
explain. It returns the state (:class:`AirDataState`, SI) or a
:class:`Rejection` (a ``str`` reason code with a human ``detail`` naming the field and
the value), counts every rejection by reason, and never raises on any input.

The limits and the refusal are defined in :mod:`advisory.pipeline.acceptance`. The numeric
limits are engineering choices (common practice, no source); they are
listed in the ICD, ``docs/interface.md``, section "Accepted ranges".
"""

from __future__ import annotations

import math
import time
from collections.abc import Mapping
from typing import Any

from advisory.pipeline.acceptance import Rejection, ValidatorLimits
from advisory.pipeline.airdata import AirDataState, new_state
from advisory.pipeline.freshness import SeqTracker, motion_shortfall, speed_text
from advisory.schema import (
    AIR_OPTIONAL,
    AIR_REQUIRED,
    EARTH_MEAN_RADIUS_M,
)
from advisory.units import DEG, FT, KELVIN_OFFSET, KT, wind_from_to_components

__all__ = ["AirDataState", "Rejection", "ValidatorLimits", "StateValidator"]


#: gamma R of dry air, J/(kg K): 1.4 x 287.05287 (U.S. Standard Atmosphere 1976).
_GAMMA_R = 1.4 * 287.05287


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
    not_fresh : Rejection or None
        The latest freshness rejection (repeated or old ``seq``, frozen clock, frozen
        position) since the last accepted frame, else None: why the data went stale.
    """

    def __init__(self, limits: ValidatorLimits | None = None) -> None:
        self.limits = lim = limits or ValidatorLimits()
        self.accepted = 0
        self.rejections: dict[str, int] = {}
        self.rebaselines = 0
        self.last_rejection: Rejection | None = None
        r = lim.ranges
        self._req = tuple((n, float(r[n][0]), float(r[n][1])) for n in AIR_REQUIRED)
        self._opt = tuple((n, float(r[n][0]), float(r[n][1])) for n in AIR_OPTIONAL)
        self._req_flat = tuple(x for _, lo, hi in self._req for x in (lo, hi))
        self._opt_flat = tuple(x for _, lo, hi in self._opt for x in (lo, hi))
        # jump limits in wire units (deg, ft, kt); position compared in degrees of arc
        arc = 1.0 / (DEG * EARTH_MEAN_RADIUS_M)  # degrees of arc per metre
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
        self._run_start = 0.0  # rx of the first frame of the candidate run
        self.not_fresh: Rejection | None = None
        self._seqs = SeqTracker(lim.seq_restart_after, lim.seq_restart_step)
        self._anchor: tuple[float, float, float, float] | None = None  # lat, lon, gs, rx

    # -- public -------------------------------------------------------------------

    def validate(self, fields: Any, rx_monotonic: float, utc_s: float | None = None,
                 now_monotonic: float | None = None,
                 seq: int | None = None) -> AirDataState | Rejection:
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
        seq : int, optional
            The frame's sequence number (header ``seq``, 0..2**32-1, wraps); enables the
            repeat and step-back checks.

        Returns
        -------
        AirDataState or Rejection
            The state when accepted (it becomes the reference for the jump checks), else
            the reason (counted in :attr:`rejections`).
        """
        try:
            return self._validate(fields, rx_monotonic, utc_s, now_monotonic, seq)
        except Exception as exc:  # the live loop must never die on bad input
            return self._reject("internal", f"validator error on input {fields!r:.80}: {exc!r}")

    def validate_frame(self, frame: Any, rx_monotonic: float,
                       now_monotonic: float | None = None) -> AirDataState | Rejection:
        """:meth:`validate` for a decoded :class:`advisory.io.messages.Frame` of type air."""
        if getattr(frame, "type", None) != "air":
            return self._reject("not_a_mapping", f"frame type {getattr(frame, 'type', None)!r}"
                                                 " is not 'air'")
        return self.validate(frame.fields, rx_monotonic, frame.utc_s, now_monotonic,
                             frame.seq)

    def current(self, now_monotonic: float | None = None) -> AirDataState | None:
        """The last accepted state if it is still fresh at ``now_monotonic``, else None."""
        st = self._last_state
        if st is None:
            return None
        now = time.monotonic() if now_monotonic is None else now_monotonic
        rx = st.rx_monotonic  # always set on an accepted state
        if rx is None or now - rx > self.limits.max_age_s:
            return None
        return st

    def is_stale(self, now_monotonic: float | None = None) -> bool:
        """True when no fresh state is available (no frame yet, or the feed stopped)."""
        return self.current(now_monotonic) is None

    @property
    def seq_restarts(self) -> int:
        """Times a step back of ``seq`` was taken as a sender restart."""
        return self._seqs.restarts

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
                  now: float | None, seq: int | None) -> AirDataState | Rejection:
        # One long function on purpose: it runs once per frame on the decode path (budget
        # 100,000 frames/s), and method calls per check cost a measurable share of that.
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
            prate = get("pitch_rate_dps")
            nload = get("load_factor")
            salt = get("selected_alt_ft")
            shdg = get("selected_heading_deg")
            smach = get("selected_mach")
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
                float(fields[n]) for n in AIR_REQUIRED)
        # optional fields
        (p0, p1, q0, q1, r0, r1, s0, s1, t0, t1, u0, u1, v0, v1, w0, w1, x0, x1, y0,
         y1) = self._opt_flat
        if not ((track is None or (type(track) is float and p0 <= track <= p1))
                and (mrate is None or (type(mrate) is float and q0 <= mrate <= q1))
                and (sat is None or (type(sat) is float and r0 <= sat <= r1))
                and (wfrom is None or (type(wfrom) is float and s0 <= wfrom <= s1))
                and (wkt is None or (type(wkt) is float and t0 <= wkt <= t1))
                and (prate is None or (type(prate) is float and u0 <= prate <= u1))
                and (nload is None or (type(nload) is float and v0 <= nload <= v1))
                and (salt is None or (type(salt) is float and w0 <= salt <= w1))
                and (shdg is None or (type(shdg) is float and x0 <= shdg <= x1))
                and (smach is None or (type(smach) is float and y0 <= smach <= y1))):
            opt = []
            for (name, lo, hi), x in zip(self._opt, (track, mrate, sat, wfrom, wkt, prate,
                                                     nload, salt, shdg, smach)):
                rej = self._check_value(name, x, lo, hi, required=False)
                if rej is not None:
                    return rej
                opt.append(None if x is None else float(x))
            track, mrate, sat, wfrom, wkt, prate, nload, salt, shdg, smach = opt
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
        seqs = self._seqs
        if seq is not None and seqs.last is not None and seq != seqs.last + 1:
            restarts = seqs.restarts
            bad = seqs.problem(seq)
            if bad is not None:
                return self._stale_data(*bad)
            if seqs.restarts != restarts:
                self._clock_ref = None  # a restarted sender may restart its clock as well
        if utc_s is not None:
            ref = self._clock_ref
            if ref is not None and utc_s == ref[0]:
                return self._stale_data("utc_frozen", f"utc_s = {utc_s!r} has not advanced "
                                        f"in {rx - ref[1]:.3f} s: the sender's clock is frozen")
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
                    self._run_start = rx
                self._candidate = cur
                if (self._run < lim.rebaseline_after
                        or rx - self._run_start < lim.rebaseline_min_s):
                    return self._reject(f"jump:{bad[0]}", bad[1])
                self.rebaselines += 1
                self._candidate = None
                self._run = 0
                self._anchor = None
            elif self._candidate is not None:
                self._candidate = None
                self._run = 0
        if wkt is None or wfrom is None:  # both or neither (checked above)
            east = north = None
        else:
            east, north = wind_from_to_components(wfrom, wkt * KT)
        # ground speed against Mach and wind (inline: hot path; see _speed_rejection)
        if sat is None:
            h = alt * FT
            t_k = (288.15 - 0.0065 * h if h < 11000.0
                   else 216.65 if h < 20000.0 else 216.65 + 0.001 * (h - 20000.0))
            tol = lim.tas_fraction
        else:
            t_k = sat + KELVIN_OFFSET
            tol = lim.tas_fraction_sat
        tas = mach * math.sqrt(_GAMMA_R * t_k)
        tol = tol * tas + lim.speed_slack_mps
        if east is None or north is None:
            err = abs(gs * KT - tas) - lim.max_wind_mps
        else:
            a = hdg * DEG
            err = abs(gs * KT - math.hypot(tas * math.sin(a) + east, tas * math.cos(a) + north))
        if err > tol:
            return self._speed_rejection(mach, gs, tas, east is not None)
        anchor = self._anchor
        if anchor is None or (last_rx is not None and rx - last_rx > lim.max_age_s):
            self._anchor = (lat, lon, gs, rx)  # first frame, or after a gap in the feed
        elif rx - anchor[3] >= lim.motion_window_s:
            short = motion_shortfall(anchor, lat, lon, gs, rx, lim.motion_fraction,
                                     lim.position_noise_m)
            if short is not None:
                self._last_state = None  # what came since the anchor is suspect: stale now
                return self._stale_data("position_frozen", f"position moved {short[0]:.0f} "
                                        f"m in {short[1]:.3f} s at ground speed {gs:.0f} kt: "
                                        "frozen data")
            self._anchor = (lat, lon, gs, rx)
        self._last = cur
        if seq is not None:
            seqs.accept(seq)
        self.not_fresh = None
        st = new_state((
            lat * DEG, lon * DEG, alt * FT, mach, (hdg % 360.0) * DEG, gs * KT, bank * DEG,
            fpa * DEG, None if track is None else (track % 360.0) * DEG, mrate,
            None if sat is None else sat + KELVIN_OFFSET, east, north, utc_s, rx,
            None if prate is None else prate * DEG, nload,
            None if salt is None else salt * FT,
            None if shdg is None else (shdg % 360.0) * DEG, smach,
        ))
        self._last_state = st
        self.accepted += 1
        return st

    def _stale_data(self, code: str, detail: str) -> Rejection:
        """Refuse a frame that carries no new data (:data:`advisory.schema.FRESHNESS_REASONS`)."""
        rej = self._reject(code, detail)
        self.not_fresh = rej
        return rej

    def _speed_rejection(self, mach: float, gs_kt: float, tas: float,
                         wind: bool) -> Rejection:
        """Refuse a ground speed that Mach and wind cannot explain (the check, inline in
        :meth:`_validate`, and its source: :func:`advisory.pipeline.freshness.speed_text`)."""
        return self._reject("inconsistent:gs_kt", speed_text(
            mach, gs_kt, tas, wind, self.limits.max_wind_mps))

    def _jump(self, a: tuple, b: tuple) -> tuple[str, str] | None:
        """First implausible change from sample ``a`` to ``b``, as (field, message).

        Samples are (lat, lon, alt, mach, hdg, gs, bank, fpa, rx) in wire units.
        """
        lim = self.limits
        dt = b[8] - a[8]
        if dt < 0.0:
            dt = 0.0
        # position: equirectangular distance, adequate for the short hops checked here
        dn = (b[0] - a[0]) * DEG * EARTH_MEAN_RADIUS_M
        de = _wrap180(b[1] - a[1]) * DEG * EARTH_MEAN_RADIUS_M * math.cos(b[0] * DEG)
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
