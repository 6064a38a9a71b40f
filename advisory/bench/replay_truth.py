"""The ground truth of a recorded flight (``replay --truth``), scored against its replay.

From the record file alone: the air-data frames the service received (raw stream or
datagram records, or CRC-checked frame records, read as the replay reads them) are
decoded again; every decodable air frame with finite values in the tracer's ranges is a
sample of the flown path (:class:`advisory.bench.truth_path.FlownPath`):

* time: the frame's own sample time (``utc_s``) put on the replay's clock (seconds
  after the first input record) by the median difference between the two; a frame more
  than :data:`CLOCK_TOLERANCE_S` off that line (a clock step) is left out;
* position: latitude and longitude (over the ground), in a local frame about the first;
* altitude: the reported altitude taken as geometric height above mean sea level (issue
  14 adds the hypsometric conversion from pressure altitude);
* Mach, heading (air-relative, no sideslip) and flight-path angle from their fields; the
  Mach rate needs no field (successive emissions carry it);
* turn rate from bank and true airspeed, coordinated: ``g tan(bank) / V`` (common
  practice, no source), with ``V`` = Mach times the true atmosphere's speed of sound;
  the pitch rate from differences of the flight-path angle.

The true atmosphere is the profile file the ``scenario.toml`` beside the log names
(``atmosphere``), else the U.S. Standard Atmosphere 1976; the aircraft the scenario's
(``aircraft``), else the bundled demo aircraft; the zones those of the replay's zone
file, each at its ``ground_elevation_ft`` (sea level when the file gives none). Gaps in
the feed are bridged by the path's linear interpolation. Then
:func:`advisory.bench.truth.trace_truth` and :func:`advisory.bench.scoring.score_flight`.

This module is the bench's; the core never imports it. ADVISORY AID ONLY: not certified
flight software.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from advisory import units
from advisory.bench.result import ReplayResult
from advisory.bench.scenario import ReplayError, load_scenario
from advisory.bench.scoring import FlightScore, score_flight
from advisory.bench.truth import Truth, TruthSettings, trace_truth
from advisory.bench.truth_path import (
    DEFAULT_EMISSION_INTERVAL_S,
    FPA_MAX_RAD,
    MACH_MAX,
    FlownPath,
    TruthInputError,
)
from advisory.bench.truth_zones import TruthZone
from advisory.geo.frame import LocalFrame
from advisory.io.framing import DatagramReader, StreamDeframer
from advisory.io.messages import FrameError, decode_frame
from advisory.io.records import KIND_EVENT, KIND_INPUT, KIND_RAW_INPUT, decode_event, read_records
from advisory.physics.aircraft import Aircraft, default_aircraft, load_aircraft
from advisory.physics.atmosphere import Atmosphere, standard_atmosphere
from advisory.physics.pressure_altitude import HeightConverter
from advisory.physics.profile_file import load_profile
from advisory.pipeline.zones import ZoneSet

#: A frame whose sample time is further than this from the receive clock's line is left out, s.
CLOCK_TOLERANCE_S = 1.0
#: Longest zone edge kept straight when projecting, deg (edges are straight in lon/lat).
ZONE_EDGE_DEG = 0.01
#: Side of the map cells that summarise the ground events for the report, m (at least).
MIN_CELL_M = 500.0
#: Most map cells across the larger side of the area the booms cover.
CELLS_ACROSS = 90
#: Bin of the per-zone arrival series kept for the timeline, s.
ARRIVAL_BIN_S = 0.1


class TruthUnavailableError(ReplayError):
    """The truth cannot be made for this log (no usable air data, ARINC 429 input)."""


@dataclass(frozen=True)
class FlightTruth:
    """The truth of one recorded flight and its score.

    Attributes
    ----------
    path : FlownPath
        The path flown, on the replay's clock, resampled to the emission interval.
    truth : Truth
    zones : list of TruthZone
    names : dict of str to str
        Zone names by id.
    score : FlightScore
    atmosphere : str
        Where the true atmosphere came from.
    samples : int
        Air-data frames used.
    wall_s : float
        Wall time to decode, trace and score, s.
    """

    path: FlownPath
    truth: Truth
    zones: list[TruthZone]
    names: dict[str, str]
    score: FlightScore
    atmosphere: str
    samples: int
    wall_s: float


def air_samples(log: str | Path, input_format: str, t0_monotonic: float
                ) -> dict[str, np.ndarray]:
    """Air-data samples of a record file: ``t_s`` (s after ``t0_monotonic``, the first
    input record) and the wire fields (deg, ft, Mach), in time order (module notes).

    Raises
    ------
    TruthUnavailableError
        ARINC 429 input, or fewer than two usable frames.
    """
    if input_format == "arinc429":
        raise TruthUnavailableError("--truth: ARINC 429 input is not decoded for the truth yet; "
                               "record the air-data frames (stream or datagram)")
    records, report = read_records(log)
    starts = [i for i, r in enumerate(records) if r.kind == KIND_EVENT
              and decode_event(r.data, report.version).code == "start"]
    records = records[starts[-1]:] if starts else records  # the run the replay plays
    raw = [r for r in records if r.kind == KIND_RAW_INPUT]
    rows: list[tuple[float, float, dict[str, Any]]] = []
    split = StreamDeframer() if input_format == "stream" else DatagramReader()
    for r in raw or [r for r in records if r.kind == KIND_INPUT]:
        payloads = split.feed(bytes(r.data)) if raw else [bytes(r.data)]
        for p in payloads:
            try:
                f = decode_frame(p)
            except (FrameError, ValueError):
                continue
            if f.type == "air":
                rows.append((r.mono_s - t0_monotonic, float(f.utc_s), f.fields))
    return _usable(rows, log)


_FIELDS = ("lat_deg", "lon_deg", "alt_ft", "mach", "heading_deg", "bank_deg", "fpa_deg")


def _usable(rows: list[tuple[float, float, dict[str, Any]]], log: str | Path
            ) -> dict[str, np.ndarray]:
    """The rows with finite values in range, on the receive clock, strictly increasing."""
    good = []
    for rx, utc, f in rows:
        raw = [f.get(k) for k in _FIELDS]
        if not all(isinstance(v, (int, float)) and math.isfinite(v) for v in raw):
            continue
        vals = [float(v) for v in raw if v is not None]  # all numbers (checked above)
        lat, lon, _alt, mach, _hdg, bank, fpa = vals
        if (abs(lat) <= 90.0 and abs(lon) <= 180.0 and 0.0 < mach <= MACH_MAX
                and abs(math.radians(fpa)) <= FPA_MAX_RAD and abs(bank) < 89.0
                and math.isfinite(utc)):
            good.append((rx, utc, *vals))
    if len(good) < 2:
        raise TruthUnavailableError(f"--truth: {log}: fewer than two usable air-data frames")
    a = np.array(good, dtype=np.float64)
    rel = a[:, 1] - a[0, 1]
    offset = float(np.median(a[:, 0] - rel))  # receive clock minus sample clock
    t = rel + offset
    keep = np.abs(a[:, 0] - t) <= CLOCK_TOLERANCE_S
    a, t = a[keep], t[keep]
    order = np.argsort(t, kind="stable")
    a, t = a[order], t[order]
    inc = np.concatenate([[True], np.diff(t) > 1e-6])
    a, t = a[inc], t[inc]
    if t.size < 2:
        raise TruthUnavailableError(f"--truth: {log}: fewer than two usable air-data frames")
    out = {"t_s": t}
    for i, k in enumerate(_FIELDS):
        out[k] = a[:, 2 + i]
    return out


def flown_path(samples: dict[str, np.ndarray], atmosphere: Atmosphere,
               interval_s: float = DEFAULT_EMISSION_INTERVAL_S) -> FlownPath:
    """The flown path of the samples (module notes), resampled to ``interval_s``."""
    # the records carry pressure altitude: the geometric height in the truth's atmosphere
    alt_m = HeightConverter(atmosphere).heights(samples["alt_ft"] * units.FT)
    c = np.interp(alt_m, atmosphere.z_m, atmosphere.sound_speed_mps)
    tas = samples["mach"] * c
    bank = np.radians(samples["bank_deg"])
    path = FlownPath.from_latlon(
        samples["t_s"], samples["lat_deg"], samples["lon_deg"],
        altitude_m=alt_m, mach=samples["mach"], heading_rad=np.radians(samples["heading_deg"]),
        fpa_rad=np.radians(samples["fpa_deg"]), turn_rate_rps=units.G0 * np.tan(bank) / tas,
        bank_rad=bank)
    return path.resampled(interval_s)


def truth_zones(zones_file: str | Path, frame: LocalFrame) -> tuple[list[TruthZone],
                                                                  dict[str, str]]:
    """The zones of a zone file in ``frame`` (edges densified to :data:`ZONE_EDGE_DEG`),
    and their names by id."""
    out, names = [], {}
    for z in ZoneSet.from_file(zones_file):
        rings = []
        for part in z.polygons:  # parts are disjoint: even-odd over all rings holds
            for ring in part:
                lonlat = _densify(np.asarray(ring, dtype=np.float64),
                                  math.radians(ZONE_EDGE_DEG))
                e, n = frame.to_enu(lonlat[:, 1], lonlat[:, 0])
                rings.append(np.column_stack([e, n]))
        out.append(TruthZone(z.id, tuple(rings), units.pa_to_psf(z.limit_pa), z.margin_m,
                             z.ground_elevation_m or 0.0))
        names[z.id] = z.name or z.id
    return out, names


def _densify(ring: np.ndarray, step: float) -> np.ndarray:
    """A closed ring (rad) with points added so no edge is longer than ``step``."""
    pts = [ring[0]]
    for a, b in zip(ring[:-1], ring[1:], strict=True):
        n = max(1, math.ceil(float(np.max(np.abs(b - a))) / step))
        pts += [a + (b - a) * (i / n) for i in range(1, n + 1)]
    return np.array(pts)


def _true_air(log: Path, aircraft_file: str | None) -> tuple[Atmosphere, str, Aircraft]:
    """The true atmosphere (and where it came from) and the aircraft of a log."""
    doc, spath = load_scenario(log)
    base = spath.parent if spath is not None else log.parent
    atm_name = doc.get("atmosphere")
    if isinstance(atm_name, str):
        atm = load_profile(base / atm_name)
        where = str(base / atm_name)
    else:
        atm, where = standard_atmosphere(), "U.S. Standard Atmosphere 1976"
    air_name = aircraft_file or doc.get("aircraft")
    if isinstance(air_name, str):
        p = Path(air_name) if aircraft_file else base / air_name
        aircraft = load_aircraft(p)
    else:
        aircraft = default_aircraft()
    return atm, where, aircraft


def flight_truth(res: ReplayResult, aircraft_file: str | None = None,
                 settings: TruthSettings | None = None, reaction_s: float = 0.0
                 ) -> FlightTruth:
    """The truth of a replayed log and its score against the replay's segments.

    ``reaction_s`` only decides ``late`` against ``alerted`` (a recorded flight has no crew
    model: 0 by default).
    """
    wall0 = time.perf_counter()
    log = Path(res.setup.log)
    samples = air_samples(log, res.setup.input_format, res.t0_monotonic)
    atm, where, aircraft = _true_air(log, aircraft_file)
    try:
        path = flown_path(samples, atm)
    except TruthInputError as exc:
        raise TruthUnavailableError(f"--truth: {log}: {exc}") from None
    assert path.frame is not None  # from_latlon always sets it
    zones, names = truth_zones(res.setup.zones, path.frame)
    truth = trace_truth(path, atm, aircraft, zones, settings=settings)
    score = score_flight(truth, res.segments, reaction_s, zones=zones)
    return FlightTruth(path, truth, zones, names, score, where, int(samples["t_s"].size),
                       time.perf_counter() - wall0)


def truth_json(ft: FlightTruth) -> dict[str, Any]:
    """``replay --json``'s per-log ``truth`` object: the score plus provenance."""
    doc = ft.score.as_json()
    doc.update({"atmosphere": ft.atmosphere, "air_samples": ft.samples,
                "emissions": ft.path.size, "wall_s": round(ft.wall_s, 3)})
    return doc


def truth_lines(truth: dict[str, Any]) -> list[str]:
    """One line per exposure (MISSED in capitals where a boom came while the status said
    clear or no boom), for people."""
    if not truth["exposures"]:
        return ["truth: no boom reached a zone"]
    out = []
    for e in truth["exposures"]:
        line = (f"truth: {e['zone_id']} (with its margin): booms arrive "
                f"T+{e['first_arrival_s']:.1f} to T+{e['last_arrival_s']:.1f} s, "
                f"peak {e['peak_psf']:.2f} psf"
                + (" (over the limit)" if e["exceeds_limit"] else "")
                + f", first emitted T+{e['unavoidable_from_s']:.1f} s")
        if e.get("first_arrival_inside_s") is not None:
            line += (f"; inside the zone from T+{e['first_arrival_inside_s']:.1f} s, peak "
                     f"{e['peak_psf_inside']:.2f} psf")
        if e["missed"]:
            line += "; MISSED " + ", ".join(f"T+{a:.1f}-{b:.1f} s" for a, b in e["missed"])
        out.append(line)
    return out


def figure_data(ft: FlightTruth) -> dict[str, Any]:
    """What the report draws of the truth (plain lists): ``cells`` ([lat, lon, psf,
    first arrival s] of the map cells where booms landed, peak per cell), ``cell_m``,
    ``arrivals`` (per zone id: [t_s, peak psf, booms] per :data:`ARRIVAL_BIN_S` bin), ``names``,
    ``margins_km``, and the score's exposures."""
    ev = ft.truth.events
    cells: list[list[float]] = []
    cell_m = MIN_CELL_M
    frame = ft.path.frame
    all_e = np.concatenate([e.east_m for e in ev.values()]) if ev else np.zeros(0)
    all_n = np.concatenate([e.north_m for e in ev.values()]) if ev else np.zeros(0)
    all_p = np.concatenate([e.overpressure_psf for e in ev.values()]) if ev else np.zeros(0)
    all_t = np.concatenate([e.arrival_s for e in ev.values()]) if ev else np.zeros(0)
    if all_e.size and frame is not None:
        span = max(float(np.ptp(all_e)), float(np.ptp(all_n)))
        cell_m = max(MIN_CELL_M, span / CELLS_ACROSS)
        ix = np.floor(all_e / cell_m).astype(np.int64)
        iy = np.floor(all_n / cell_m).astype(np.int64)
        key = ix * 1_000_003 + iy
        order = np.lexsort((-all_p, key))  # per cell, the loudest first
        first = np.concatenate([[True], np.diff(key[order]) != 0])
        pick = order[first]
        t_first = {int(k): float(v) for k, v in zip(*_min_by(key, all_t), strict=True)}
        la, lo = frame.from_enu((ix[pick] + 0.5) * cell_m, (iy[pick] + 0.5) * cell_m)
        cells = [[round(float(a), 5), round(float(b), 5), round(float(p), 3),
                  round(t_first[int(k)], 1)]
                 for a, b, p, k in zip(np.degrees(la), np.degrees(lo), all_p[pick], key[pick],
                                       strict=True)]
    arrivals: dict[str, list[list[float]]] = {}
    for z in ft.zones:
        e = ev.get(float(z.ground_elevation_m))
        if e is None or len(e) == 0:
            continue
        hit = z.covers(e.east_m, e.north_m)
        if not np.any(hit):
            continue
        bins = np.floor(e.arrival_s[hit] / ARRIVAL_BIN_S).astype(np.int64)
        b, peak = _max_by(bins, e.overpressure_psf[hit])
        count = np.unique(bins, return_counts=True)[1]
        arrivals[z.zone_id] = [[round(float(k) * ARRIVAL_BIN_S, 2), round(float(p), 3), int(c)]
                               for k, p, c in zip(b, peak, count, strict=True)]
    return {"cells": cells, "cell_m": cell_m, "arrivals": arrivals, "names": ft.names,
            "margins_km": {z.zone_id: z.margin_m / 1e3 for z in ft.zones},
            "exposures": ft.score.exposures}


def _max_by(key: np.ndarray, val: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    uk, inv = np.unique(key, return_inverse=True)
    out = np.full(uk.size, -np.inf)
    np.maximum.at(out, inv, val)
    return uk, out


def _min_by(key: np.ndarray, val: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    uk, inv = np.unique(key, return_inverse=True)
    out = np.full(uk.size, np.inf)
    np.minimum.at(out, inv, val)
    return uk, out


def add_truth(res: ReplayResult, aircraft: str | None, figure: bool) -> None:
    """Trace the truth of a replayed log and keep its score (and, with ``figure``, what the
    report draws of it) on ``res``; a note instead when the log holds no input."""
    if not res.inputs_fed:
        res.notes.append("--truth: the log holds no input")
        return
    ft = flight_truth(res, aircraft)
    res.truth = truth_json(ft)
    if figure:
        res.truth_figure = figure_data(ft)
