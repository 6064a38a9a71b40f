"""What a report draws, gathered step by step from a running loop during a replay.

:class:`FlightCollector` is called after every advisor step: it reads the loop's last
advisory, the validator's current state and the advisor's ``last_prediction`` /
``last_trajectory``, and keeps the track, the carpet laid along it, focus points and
where each advisory fired (plain lists, JSON-ready; drawn by :mod:`advisory.bench.report`).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from typing import Any, cast

import numpy as np

from advisory import units
from advisory.bench.edge_band import MAX_CONDITIONS, EdgeBand, band_row
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.footprint import CarpetPrediction, swath_polygon
from advisory.pipeline.trajectory import Trajectory
from advisory.schema import CONFLICT_STATUSES, STATUS_RANK
from advisory.service.loop import AdvisoryLoop

#: Rank of ``unavailable`` when comparing levels (below every other status).
UNAVAILABLE_RANK = -1

class FlightCollector:
    """Gathers what the report draws, step by step, from a running loop.

    Parameters
    ----------
    loop : advisory.service.loop.AdvisoryLoop
        The loop being replayed (its ``advisor``, ``validator``, ``last_advisory``).
    t0_monotonic : float
        Time origin (the first input's receive time), s.
    carpet_every_s : float
        Spacing of the carpet rows kept along the track, s of flight time.
    edge_conditions : int
        Conditions at which the carpet edge's confidence band is sampled at most
        (:mod:`advisory.bench.edge_band`; 0: no band).
    """

    def __init__(self, loop: AdvisoryLoop, t0_monotonic: float,
                 carpet_every_s: float = 1.0, edge_conditions: int = MAX_CONDITIONS) -> None:
        self.loop = loop
        self.t0 = t0_monotonic
        self.every = carpet_every_s
        self.threshold = float(loop.advisor.config.focus_threshold)
        self.track: list[list[Any]] = []
        self.rows: list[dict[str, Any]] = []
        self.focus: list[list[float]] = []
        self.events: list[dict[str, Any]] = []
        #: Predicted first contacts: [t_s, lat, lon, zone_id, status] (at most one a
        #: ``carpet_every_s``): the predicted ray arriving at the time to contact nearest
        #: the named zone.
        self.contacts: list[list[Any]] = []
        self._last_contact_t = -math.inf
        self._last_pred: CarpetPrediction | None = None
        self._last_row_t = -math.inf
        self._key: tuple[str, str | None] | None = None
        self._rank = 0
        # a replay's loop always runs the real advisor (bench.scenario.make_loop)
        self.band = EdgeBand(cast(Advisor, loop.advisor), max_conditions=edge_conditions)
        #: The edge band beside the carpet rows (:func:`advisory.bench.edge_band.band_row`).
        self.edge: list[dict[str, Any]] = []

    def on_step(self, now_monotonic: float) -> None:
        """Take what the step just computed (call after every advisor step)."""
        loop = self.loop
        adv = loop.last_advisory
        if adv is None:
            return
        t = round(now_monotonic - self.t0, 3)
        st = loop.validator.current(now_monotonic)
        lat = lon = alt = mach = None
        if st is not None:
            lat, lon = round(math.degrees(st.lat_rad), 5), round(math.degrees(st.lon_rad), 5)
            alt, mach = round(units.m_to_ft(st.alt_m), 1), round(st.mach, 4)
        cut = None if adv.cutoff_mach is None or not math.isfinite(adv.cutoff_mach) \
            else round(adv.cutoff_mach, 4)
        self.track.append([t, lat, lon, alt, mach, cut, adv.status])
        # a replay's loop always runs the real advisor (bench.scenario.make_loop)
        advisor = cast(Advisor, loop.advisor)
        pred, traj = advisor.last_prediction, advisor.last_trajectory
        fresh = (adv.status != "unavailable" and pred is not None and traj is not None
                 and pred is not self._last_pred)
        if fresh and pred is not None and traj is not None:  # (narrowed for the type checker)
            self._last_pred = pred
            if t - self._last_row_t >= self.every - 1e-9:
                self._row(t, pred, traj)
        if (fresh and pred is not None and traj is not None and adv.zone_id is not None
                and adv.time_to_contact_s is not None and adv.status in CONFLICT_STATUSES
                and t - self._last_contact_t >= self.every - 1e-9):
            self._contact(t, adv.status, adv.zone_id, adv.time_to_contact_s, pred, traj)
        key = (adv.status, adv.zone_id)
        rank = STATUS_RANK.get(adv.status, UNAVAILABLE_RANK)
        if key != self._key:
            ev = {"t_s": t, "status": adv.status, "zone_id": adv.zone_id, "cue": adv.cue,
                  "lat": lat, "lon": lon, "predicted": None, "predicted_focus": []}
            escalated = rank > self._rank or key[1] != (self._key or (None, None))[1]
            if adv.status in CONFLICT_STATUSES and fresh and pred is not None \
                    and traj is not None and escalated:
                ev["predicted"], ev["predicted_focus"] = self._predicted(pred, traj)
            self.events.append(ev)
            self._key = key
        self._rank = rank

    def _row(self, t: float, pred: CarpetPrediction, traj: Trajectory) -> None:
        k0 = int(np.searchsorted(pred.t_emit_s, -1e-9))
        if k0 >= pred.t_emit_s.size or not pred.on_ground[k0]:
            return
        e, n = pred.east_m[k0], pred.north_m[k0]
        ok = np.isfinite(e) & np.isfinite(n)
        if ok.sum() < 2:
            return
        la, lo = (np.asarray(v) for v in traj.frame.from_enu(e[ok], n[ok]))
        psf = units.pa_to_psf(pred.effective_overpressure_pa[k0][ok])
        self.rows.append({"t_s": t, "lat": np.round(np.degrees(la), 5).tolist(),
                          "lon": np.round(np.degrees(lo), 5).tolist(),
                          "psf": np.round(psf, 3).tolist()})
        self._last_row_t = t
        iv = self.band.interval()
        band = band_row(t, iv, pred, traj, k0) if iv is not None else None
        if band is not None:
            self.edge.append(band)
        foc = pred.focus_factor[k0][ok]
        for i in np.flatnonzero(foc >= self.threshold):
            self.focus.append([round(float(np.degrees(la[i])), 5),
                               round(float(np.degrees(lo[i])), 5), round(float(foc[i]), 2)])

    def _contact(self, t: float, status: str, zone_id: str, ttc: float,
                 pred: CarpetPrediction, traj: Trajectory) -> None:
        """Keep the predicted contact point: of the predicted rays that arrive within half
        a second of the time to contact, the one nearest the zone's first vertex."""
        advisor = cast(Advisor, self.loop.advisor)
        try:
            zone = advisor.zones[advisor.zones.index_of(zone_id)]
        except (KeyError, ValueError, IndexError):
            return
        ring = zone.polygons[0][0]
        zx, zy = traj.frame.to_enu(float(ring[:, 1].mean()), float(ring[:, 0].mean()))
        ok = (pred.on_ground[:, None] & np.isfinite(pred.east_m)
              & (np.abs(pred.arrival_s - ttc) <= 0.5))
        if not np.any(ok):
            return
        d2 = np.where(ok, (pred.east_m - zx) ** 2 + (pred.north_m - zy) ** 2, np.inf)
        k, j = np.unravel_index(int(np.argmin(d2)), d2.shape)
        la, lo = traj.frame.from_enu(pred.east_m[k, j], pred.north_m[k, j])
        self.contacts.append([t, round(math.degrees(float(la)), 5),
                              round(math.degrees(float(lo)), 5), zone_id, status])
        self._last_contact_t = t

    def _predicted(self, pred: CarpetPrediction, traj: Trajectory
                   ) -> tuple[list[list[float]] | None, list[list[float]]]:
        ring = swath_polygon(pred, 0.0, math.inf)
        outline = None
        if ring is not None:
            la, lo = traj.frame.from_enu(ring[:, 0], ring[:, 1])
            outline = [np.round(np.degrees(la), 5).tolist(), np.round(np.degrees(lo), 5).tolist()]
        ahead = (pred.t_emit_s >= 0.0)[:, None] & pred.on_ground[:, None]
        mask = ahead & (pred.focus_factor >= self.threshold) & np.isfinite(pred.east_m)
        ks, js = np.nonzero(mask)
        if ks.size > 300:
            pick = np.linspace(0, ks.size - 1, 300).astype(int)
            ks, js = ks[pick], js[pick]
        pts = []
        if ks.size:
            la, lo = traj.frame.from_enu(pred.east_m[ks, js], pred.north_m[ks, js])
            pts = [[round(float(a), 5), round(float(b), 5)]
                   for a, b in zip(np.degrees(la), np.degrees(lo))]
        return outline, pts

    def result(self) -> dict[str, Any]:
        """The collected data (plain lists; JSON-ready)."""
        return {"track": self.track, "rows": self.rows, "focus": self.focus,
                "events": self.events, "focus_threshold": self.threshold,
                "contacts": self.contacts,
                "edge_band": {"confidence": self.band.confidence,
                              "samples": self.band.samples, "rows": self.edge,
                              "errors": self.band.errors}}
