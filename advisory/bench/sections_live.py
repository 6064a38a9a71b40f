"""Benchmark sections about the live path: the advisor step, decoding air-data frames,
and ``replay --speed max``.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import subprocess
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path
from typing import Any

from advisory.bench.budgets import NotMeasured
from advisory.bench.coldstart import CHILD_CODE
from advisory.bench.context import (
    Context,
    ensure_table,
    exc_text,
    load_zones,
    median,
    package_parent,
    percentile,
    zones_file,
)
from advisory.bench.machine import one_core
from advisory.bench.section_zones import reprojection_figures
from advisory.bench.workload import (
    CRUISE_ALT_FT,
    CRUISE_MACH,
    FRAME_RATE_HZ,
    cruise_fields,
    cruise_ground_speed_kt,
    make_advisor,
)
from advisory.io.framing import StreamDeframer, frame_stream
from advisory.io.messages import FrameDecoder, encode_air
from advisory.io.records import Recorder
from advisory.pipeline.state import AirDataState, Rejection, StateValidator
from advisory.pipeline.zones import ZoneSet
from advisory.schema import CONFLICT_STATUSES
from advisory.tables.table import BoomTable


def _status_text(adv: Any) -> str:
    st = getattr(adv, "status", None)
    if st is None and isinstance(adv, dict):
        st = adv.get("status")
    st = getattr(st, "value", st)
    return str(st)


def section_advisor(ctx: Context) -> None:
    """``Advisor.step``: median < 2 ms, p99 < 5 ms (300 s look-ahead, 20 zones)."""
    r = ctx.report
    s = ctx.sizes
    table = ensure_table(ctx)
    zones = load_zones(ctx)
    try:
        advisor = make_advisor(table, zones)
    except Exception as exc:
        raise NotMeasured(f"Advisor(table, zones) failed: {exc_text(exc)}") from exc
    n = s.advisor_warmup + s.advisor_steps
    times, statuses, reasons, resolved = _timed_steps(advisor, n, s.advisor_warmup,
                                                      s.advisor_time_cap_s)
    cfg = getattr(advisor, "config", None)
    la = getattr(cfg, "look_ahead_s", getattr(cfg, "lookahead_s", None))
    la_text = f"{la:g} s" if isinstance(la, (int, float)) else "the default"
    nverts = sum(z.vertex_count for z in zones)
    note = (f"{len(times)} steps after {s.advisor_warmup} warm-up, 20 Hz states in level "
            f"flight at Mach {CRUISE_MACH}, {CRUISE_ALT_FT:,.0f} ft toward {len(zones)} "
            f"zones / {nverts:,} vertices; look-ahead "
            f"{la_text}; statuses seen: "
            + ", ".join(f"{k} {v}" for k, v in statuses.most_common())
            + f"; a turn resolution was found on {resolved} steps"
            + (" (no turn clears these zones, so the search runs to its limit every step: "
               "the costliest case)" if resolved == 0 and len(statuses) else ""))
    searches = getattr(advisor, "resolution_searches", None)
    if searches is not None:
        note += f"; the turn-resolution search ran on {searches} of {n} steps"
    r.measured("step_median_ms", median(times) * 1e3, note)
    r.measured("step_p99_ms", percentile(times, 99.0) * 1e3,
               f"max {max(times) * 1e3:.2f} ms")
    if reasons:
        r.note("advisor", f"some steps were 'unavailable': {reasons['unavailable'][:160]}")
    if not any(k in CONFLICT_STATUSES for k in statuses):
        r.note("advisor", "no conflict was seen, so the resolution search may not have run: "
                          "the step figures may be optimistic")
    default_cadence_note(ctx, table, zones)
    reprojection_figures(ctx, table)
    two_level_figures(ctx, table)


def default_cadence_note(ctx: Context, table: BoomTable, zones: ZoneSet) -> None:
    """The same steps with the default configuration: most steps reuse the last
    prediction (:mod:`advisory.pipeline.reuse`); a note, not a budget row (the budget is
    the predicting step's)."""
    s = ctx.sizes
    advisor = make_advisor(table, zones, reuse=True)
    n = s.advisor_warmup + s.advisor_steps
    times, statuses, _, _ = _timed_steps(advisor, n, s.advisor_warmup, s.advisor_time_cap_s)
    reused = getattr(advisor, "reused_steps", 0)
    ctx.report.note("advisor", (
        f"with the default configuration (a step reuses the last prediction while the "
        f"flight goes as predicted, for up to 1 s): {reused} of {n} steps reused it; step "
        f"median {median(times) * 1e3:.3f} ms, mean {sum(times) / len(times) * 1e3:.3f} ms, "
        f"p99 {percentile(times, 99.0) * 1e3:.2f} ms over {len(times)} steps; statuses "
        + ", ".join(f"{k} {v}" for k, v in statuses.most_common())))


def _timed_steps(advisor, n: int, warmup: int, cap_s: float
                 ) -> tuple[list[float], Counter[str], dict[str, str], int]:
    """Step ``advisor`` on ``n`` cruise states; (step times after ``warmup``, statuses,
    the first unavailable reason, steps with a turn resolution). The time cap ``cap_s``
    counts from the first timed step: the warm-up compiles whatever the numba cache lacks
    (before, the first run after a change of a kernel spent the cap compiling and timed
    3 steps)."""
    gs = cruise_ground_speed_kt()
    fields = [cruise_fields(i / FRAME_RATE_HZ, gs) for i in range(n)]
    from_fields = AirDataState.from_fields
    statuses: Counter[str] = Counter()
    reasons: dict[str, str] = {}
    resolved = 0
    times: list[float] = []
    deadline = math.inf
    clock = time.perf_counter
    utc0 = time.time()
    for i, f in enumerate(fields):
        # stamped with the flight's own time (the advisor keeps a flown history on it)
        st = from_fields(f, utc_s=utc0 + i / FRAME_RATE_HZ, rx_monotonic=time.monotonic())
        t0 = clock()
        try:
            adv = advisor.step(st)
        except Exception as exc:
            raise NotMeasured(f"Advisor.step failed: {exc_text(exc)}") from exc
        dt = clock() - t0
        if i >= warmup:
            if not times:
                deadline = clock() + cap_s
            times.append(dt)
            status = _status_text(adv)
            statuses[status] += 1
            if (getattr(adv, "turn_left_deg", None) is not None
                    or getattr(adv, "turn_right_deg", None) is not None):
                resolved += 1
            if status == "unavailable" and "unavailable" not in reasons:
                reasons["unavailable"] = str(getattr(adv, "reason", ""))
        if clock() > deadline and len(times) >= 3:
            break
    return times, statuses, reasons, resolved


#: Ground elevation given to every other bench zone for the two-level figure, ft.
SECOND_LEVEL_FT = 3000.0


def two_level_figures(ctx: Context, table: BoomTable) -> None:
    """The step with every other zone on 3,000-ft ground: two ground levels, each with its
    table (the second built once into the table cache; a note, not a budget row)."""
    s = ctx.sizes
    doc = json.loads(Path(zones_file(ctx)).read_text())
    for k, feat in enumerate(doc["features"]):
        if k % 2:
            feat["properties"]["ground_elevation_ft"] = SECOND_LEVEL_FT
    try:
        ctx.progress("building or loading the table for the bench's 3,000-ft zones")
        advisor = make_advisor(table, ZoneSet.from_geojson(doc, "bench zones, two levels"))
    except Exception as exc:  # noqa: BLE001 - a note of its own, the budget rows stand
        ctx.report.note("advisor", f"two ground levels not measured: {exc_text(exc)}")
        return
    n = s.advisor_warmup + s.advisor_steps
    times, statuses, _, _ = _timed_steps(advisor, n, s.advisor_warmup, s.advisor_time_cap_s)
    ctx.report.note("advisor", (
        f"with every other zone on {SECOND_LEVEL_FT:,.0f}-ft ground (two ground levels, "
        f"two tables): step median {median(times) * 1e3:.2f} ms, p99 "
        f"{percentile(times, 99.0) * 1e3:.2f} ms over {len(times)} steps; statuses "
        + ", ".join(f"{k} {v}" for k, v in statuses.most_common())))


# ------------------------------------------------------------------------ decode


def section_decode(ctx: Context) -> None:
    """Deframe (COBS + CRC) + decode + validate, one core (>= 100,000 frames/s)."""
    r = ctx.report
    s = ctx.sizes
    gs = cruise_ground_speed_kt()
    utc0 = 1.9e9
    stream = b"".join(
        frame_stream(encode_air(
            cruise_fields(i / FRAME_RATE_HZ, gs), i, utc0 + i / FRAME_RATE_HZ))
        for i in range(s.decode_frames)
    )
    chunk = 1024  # bytes per read, as a serial or file source hands them over
    chunks = [stream[i:i + chunk] for i in range(0, len(stream), chunk)]
    dt_frame = 1.0 / FRAME_RATE_HZ

    def one_pass() -> tuple[float, float, int, dict[str, int]]:
        deframer = StreamDeframer()
        decoder = FrameDecoder()
        validator = StateValidator()
        accepted = 0
        rx0 = 1000.0
        c0 = time.process_time()
        t0 = time.perf_counter()
        for data in chunks:
            for payload in deframer.feed(data):
                frame = decoder.decode(payload)
                if frame is None:
                    continue
                rx = rx0 + frame.seq * dt_frame  # replayed receive clock
                st = validator.validate_frame(frame, rx, rx)
                if type(st) is not Rejection:
                    accepted += 1
        wall = time.perf_counter() - t0
        cpu_s = time.process_time() - c0
        return wall, cpu_s, accepted, dict(validator.rejections)

    with one_core() as pin:
        one_pass()  # warm-up
        runs = [one_pass() for _ in range(s.decode_passes)]
    secs = [t for t, _, _, _ in runs]
    cpu_rate = s.decode_frames / median([c for _, c, _, _ in runs])
    _, _, accepted, rejections = runs[0]
    rate = s.decode_frames / median(secs)
    r.measured("decode_fps", rate,
               f"{s.decode_frames} air-data frames ({len(stream) / s.decode_frames:.0f} bytes "
               f"each on the stream) fed in {chunk}-byte reads through StreamDeframer + "
               f"FrameDecoder + StateValidator; median wall time of {s.decode_passes} passes, "
               f"{pin} "
               f"(by CPU time {cpu_rate:,.0f} frames/s); "
               f"accepted {accepted}" + (f", rejected {rejections}" if rejections else ""))


# ------------------------------------------------------------------------ replay


def write_replay_log(path: Path, duration_s: float, rate_hz: float = FRAME_RATE_HZ) -> int:
    """A recorded 20 Hz cruise (record file of input frames); returns the frame count."""
    gs = cruise_ground_speed_kt()
    n = int(round(duration_s * rate_hz))
    utc0 = 1.9e9
    mono0 = 5000.0
    if path.exists():
        path.unlink()
    with Recorder(path, fsync_interval_s=3600.0) as rec:
        for i in range(n):
            t = i / rate_hz
            rec.record_input(encode_air(cruise_fields(t, gs), i, utc0 + t),
                             rx_monotonic=mono0 + t, rx_utc=utc0 + t)
    return n


def section_replay(ctx: Context) -> None:
    """``replay --speed max`` of a 20 Hz log on one core (>= 200x real time)."""
    r = ctx.report
    s = ctx.sizes
    if ctx.replay_command is None:
        raise NotMeasured("no replay command handed in")
    command = ctx.replay_command
    ensure_table(ctx)
    log = ctx.work_dir / "bench-cruise-20hz.rec"
    n = write_replay_log(log, s.replay_log_s)
    args = [str(log), "--speed", "max", "--zones", str(zones_file(ctx)),
            "--table", str(ctx.table_path), "--json"]
    how = "boom-advisory replay (in process)"

    def run() -> int:
        return command(args)

    times = []
    with one_core() as pin:
        for _ in range(s.replay_runs):
            sink = io.StringIO()
            t0 = time.perf_counter()
            try:
                with contextlib.redirect_stdout(sink), contextlib.redirect_stderr(sink):
                    code = run()
            except SystemExit as exc:
                code = exc.code if isinstance(exc.code, int) else 2
            except Exception as exc:
                raise NotMeasured(f"replay failed: {exc_text(exc)}") from exc
            times.append(time.perf_counter() - t0)
            if code not in (0, None):
                tail = sink.getvalue().strip().splitlines()[-1:] or [""]
                raise NotMeasured(f"replay exited {code}: {tail[0][:120]}")
            if sum(times) > s.replay_time_cap_s:
                break
    wall = median(times)
    r.measured("replay_speed", s.replay_log_s / wall,
               f"{s.replay_log_s:g} s log, {n} frames at {FRAME_RATE_HZ:g} Hz, {how} "
               f"{' '.join(a if not a.startswith('/') else Path(a).name for a in args)}; "
               f"median wall time {wall:.2f} s over {len(times)} runs (whole command: loading "
               f"table and zones included), {pin}")


# ------------------------------------------------------------------------ startup


def _run_child(ctx: Context, cache_dir: str | None) -> dict[str, Any]:
    env = dict(os.environ)
    root = str(package_parent())
    env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    if cache_dir is not None:
        env["NUMBA_CACHE_DIR"] = cache_dir
    t_spawn = time.monotonic()
    proc = subprocess.run([sys.executable, "-c", CHILD_CODE, str(ctx.table_path),
                           str(ctx.zones_path)], env=env, capture_output=True, text=True,
                          timeout=600, cwd=str(ctx.work_dir))
    lines = [ln for ln in proc.stdout.splitlines() if ln.startswith("{")]
    if not lines:
        err = (proc.stderr.strip().splitlines() or ["no output"])[-1]
        raise NotMeasured(f"cold-start process exited {proc.returncode}: {err[:120]}")
    res = json.loads(lines[-1])
    if "error" in res:
        raise NotMeasured(f"cold-start process: {res['error']}")
    res["start_s"] = res["t_first"] - t_spawn
    return res


def section_startup(ctx: Context) -> None:
    """Cold start to first advisory with a warm numba cache (< 3 s); peak RSS (< 250 MB)."""
    r = ctx.report
    s = ctx.sizes
    ensure_table(ctx)
    zones_file(ctx)
    first = None
    if s.startup_first_ever:
        ctx.progress("cold start with an empty numba cache (compiles every kernel) ...")
        with tempfile.TemporaryDirectory(prefix="bench-numba-") as empty:
            try:
                first = _run_child(ctx, empty)
            except NotMeasured as exc:
                r.add_info("first_start_s", "first-ever start (empty numba cache)", None, "s",
                           why=str(exc))
    _run_child(ctx, None)  # make sure the normal cache is warm
    warm = [_run_child(ctx, None) for _ in range(s.startup_warm_runs)]
    what = warm[0]["what"]
    target = "first advisory" if what == "advisory" else "first footprint lookup"
    start = median([w["start_s"] for w in warm])
    rss_mb = max(w.get("vmhwm_kb", w["rss_peak_kb"]) for w in warm) / 1024.0
    because = ""
    if what != "advisory":
        because = f" (advisor not usable: {warm[0].get('advisor_error')})"
    r.measured("cold_start_s", start,
               f"to {target}{because}: fresh Python process importing boom-advisory, loading "
               f"the table, building the Advisor, one step; median of {len(warm)} runs")
    if what != "advisory":
        r.rows["cold_start_s"].name = "cold start to first footprint (no advisor)"
    r.measured("rss_mb", rss_mb, f"peak resident set (VmHWM) after {target} and 20 more "
               "steps" if what == "advisory" else f"peak resident set (VmHWM) after {target}")
    if first is not None:
        r.add_info("first_start_s", "first-ever start (empty numba cache)", first["start_s"],
                   "s", note=f"to {target}, every numba kernel compiled from scratch "
                             "(NUMBA_CACHE_DIR pointed at an empty directory)")
    elif not s.startup_first_ever:
        r.add_info("first_start_s", "first-ever start (empty numba cache)", None, "s",
                   why="skipped by --quick")
