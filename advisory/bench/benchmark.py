"""Benchmarks against the budgets of the issues: one run, every figure beside its budget.

``python benchmarks/run.py`` and ``boom-advisory bench`` both end in :func:`main`. The
run measures, on the machine it runs on:

=================  ==========================================================  =========
section            budget                                                      limit
=================  ==========================================================  =========
``build``          default table grid builds (all cores)                       < 60 s
``lookup``         one footprint lookup (one emission point, 31 azimuths)      < 20 us
``lookup``         table path vs direct tracing of the same footprint          >= 50x
``verify``         interpolation error vs direct trace: carpet half-width      < 0.5 %
``verify``         ... centerline overpressure                                  < 1 %
``verify``         ... cutoff Mach (absolute)                                   < 0.002
``advisor``        ``Advisor.step``, 300 s look-ahead, 20 zones / 2,000        median < 2 ms,
                   vertices, resolution search included                        p99 < 5 ms
``decode``         deframe + decode + validate air-data frames, one core       >= 100,000/s
``replay``         ``replay --speed max`` of a 20 Hz log, one core             >= 200x
``startup``        cold start to first advisory, numba cache warm              < 3 s
``startup``        resident memory (peak RSS of that process)                  < 250 MB
=================  ==========================================================  =========

plus, for information, the first-ever start (empty numba cache) and the speed-up over
the builder's compiled direct trace. Figures are medians over repeated runs (the table
build is repeated up to three times while the builds fit in 80 s); the lookup/direct
ratio is measured side by side on the same conditions in the same run. A section whose
module is not there yet prints "not measured (module missing)" and the run goes on.

Budgets are engineering targets set in the project's issues (common practice, no
source). Speed is measured here, never asserted in tests.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import json
import math
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from advisory import SAFETY_CAUTION, __version__

EXIT_OK = 0
EXIT_SHORT = 1  #: with ``--strict``: a budget is short or not measured
EXIT_USAGE = 2

SECTIONS = ("build", "lookup", "verify", "advisor", "decode", "replay", "startup")


@dataclass(frozen=True)
class Budget:
    """One budget of the issues.

    Attributes
    ----------
    key : str
        Short identifier (JSON key).
    section : str
        Section of :data:`SECTIONS` that measures it.
    name : str
        What is measured, as printed.
    limit : float
        The budget, in ``unit``.
    unit : str
        Unit of the figure and the limit.
    upper : bool
        True when the figure must stay below ``limit``, False when it must reach it.
    """

    key: str
    section: str
    name: str
    limit: float
    unit: str
    upper: bool = True

    def passes(self, value: float) -> bool:
        """True when ``value`` meets the budget."""
        return value < self.limit if self.upper else value >= self.limit

    @property
    def limit_text(self) -> str:
        """The limit as printed, e.g. ``< 60 s`` or ``>= 50 x``."""
        if self.unit == "Mach":
            return f"{'<' if self.upper else '>='} {self.limit:g}"
        return f"{'<' if self.upper else '>='} {self.limit:,g} {self.unit}"


#: Every budget named in the issues (tables, advisor, live loop, replay), in print order.
BUDGETS = (
    Budget("table_build_s", "build", "table build, default grid", 60.0, "s"),
    Budget("lookup_us", "lookup", "footprint lookup (31 azimuths)", 20.0, "us"),
    Budget("lookup_speedup", "lookup", "table vs direct tracing", 50.0, "x", upper=False),
    Budget("half_width_err", "verify", "interp. error: carpet half-width", 0.5, "%"),
    Budget("overpressure_err", "verify", "interp. error: centerline dp", 1.0, "%"),
    Budget("cutoff_err", "verify", "interp. error: cutoff Mach", 0.002, "Mach"),
    Budget("step_median_ms", "advisor", "advisor step, median", 2.0, "ms"),
    Budget("step_p99_ms", "advisor", "advisor step, 99th percentile", 5.0, "ms"),
    Budget("decode_fps", "decode", "decode + validate, one core", 100000.0, "frames/s",
           upper=False),
    Budget("replay_speed", "replay", "replay --speed max, 20 Hz log", 200.0, "x real time",
           upper=False),
    Budget("cold_start_s", "startup", "cold start to first advisory", 3.0, "s"),
    Budget("rss_mb", "startup", "resident memory (peak RSS)", 250.0, "MB"),
)
BUDGET_BY_KEY = {b.key: b for b in BUDGETS}


def _fmt(value: float, unit: str) -> str:
    """A figure with its unit, at a sensible precision."""
    if not math.isfinite(value):
        return f"{value} {unit}"
    if unit == "Mach":
        return f"{value:.4f}"
    if unit == "frames/s":
        return f"{value:,.0f} {unit}"
    if unit == "%":
        return f"{value:.3f} %"
    a = abs(value)
    if a >= 100:
        text = f"{value:,.0f}"
    elif a >= 10:
        text = f"{value:.1f}"
    elif a >= 1:
        text = f"{value:.2f}"
    else:
        text = f"{value:.3f}"
    return f"{text} {unit}"


@dataclass
class Row:
    """One printed line: a budget with its figure, or an informational figure.

    Attributes
    ----------
    key, name, unit : str
        As in :class:`Budget` (informational rows have their own).
    value : float or None
        The figure; None when not measured.
    status : str
        ``pass``, ``short``, ``info`` or ``not measured (<why>)``.
    limit : float or None
        The budget; None for informational rows.
    note : str
        How it was measured (sample sizes, conditions, anything odd).
    """

    key: str
    name: str
    unit: str
    value: float | None = None
    status: str = "not measured"
    limit: float | None = None
    limit_text: str = "-"
    note: str = ""

    @property
    def is_budget(self) -> bool:
        """True for a row that carries one of :data:`BUDGETS`."""
        return self.key in BUDGET_BY_KEY

    @property
    def figure_text(self) -> str:
        """The figure as printed (``-`` when not measured)."""
        return "-" if self.value is None else _fmt(self.value, self.unit)


class NotMeasured(Exception):  # noqa: N818 - it is an outcome, not an error
    """A section could not measure; the message says why (printed in the row)."""


class ModuleMissing(NotMeasured):
    """A module a section needs is not in the package yet."""


# ------------------------------------------------------------------------ the report


class Report:
    """Rows in budget order, plus informational rows and notes."""

    def __init__(self) -> None:
        self.rows: dict[str, Row] = {}
        for b in BUDGETS:
            self.rows[b.key] = Row(b.key, b.name, b.unit, limit=b.limit,
                                   limit_text=b.limit_text,
                                   status="not measured (not run)")
        self.info: list[Row] = []
        self.notes: list[tuple[str, str]] = []

    def measured(self, key: str, value: float, note: str = "") -> None:
        """Record the figure of budget ``key``; pass/short follows from the budget."""
        b = BUDGET_BY_KEY[key]
        row = self.rows[key]
        row.value = float(value)
        row.status = "pass" if b.passes(float(value)) else "short"
        row.note = note

    def not_measured(self, key: str, why: str) -> None:
        """Mark budget ``key`` as not measured, saying why."""
        row = self.rows[key]
        row.value = None
        row.status = f"not measured ({why})"

    def add_info(self, key: str, name: str, value: float | None, unit: str,
                 note: str = "", why: str = "") -> None:
        """An informational figure without a budget (e.g. the first-ever start)."""
        status = "info" if value is not None else f"not measured ({why})"
        self.info.append(Row(key, name, unit, value=value, status=status, note=note))

    def note(self, section: str, text: str) -> None:
        """A line printed under the table."""
        self.notes.append((section, text))

    def all_rows(self) -> list[Row]:
        """Budget rows in :data:`BUDGETS` order, then informational rows."""
        return [self.rows[b.key] for b in BUDGETS] + self.info

    # ---- output ------------------------------------------------------------------
    def to_json(self, machine: dict, options: dict) -> str:
        """One JSON object: machine, options, rows, notes, caution."""
        return json.dumps({
            "package_version": __version__,
            "machine": machine,
            "options": options,
            "results": [dict(asdict(r), budget=r.is_budget) for r in self.all_rows()],
            "notes": [{"section": s, "text": t} for s, t in self.notes],
            "caution": SAFETY_CAUTION,
        }, indent=2)

    def text_lines(self, machine: dict) -> list[str]:
        """The human-readable report: machine, the table, notes, caution."""
        lines = [f"boom-advisory {__version__} benchmark", SAFETY_CAUTION, ""]
        lines += [f"machine: {line}" for line in machine_lines(machine)]
        lines.append("")
        rows = self.all_rows()
        head = ("budget", "figure", "limit", "pass/short")
        w0 = max(len(head[0]), *(len(r.name) for r in rows))
        w1 = max(len(head[1]), *(len(r.figure_text) for r in rows))
        w2 = max(len(head[2]), *(len(r.limit_text) for r in rows))

        def line(a: str, b: str, c: str, d: str) -> str:
            return f"{a:<{w0}} | {b:>{w1}} | {c:<{w2}} | {d}"

        lines.append(line(*head))
        lines.append(f"{'-' * w0}-+-{'-' * w1}-+-{'-' * w2}-+-{'-' * 10}")
        for r in rows:
            lines.append(line(r.name, r.figure_text, r.limit_text, r.status))
        n_pass = sum(r.status == "pass" for r in rows if r.is_budget)
        n_short = sum(r.status == "short" for r in rows if r.is_budget)
        n_not = sum(r.status.startswith("not measured") for r in rows if r.is_budget)
        lines.append("")
        lines.append(f"{n_pass} pass, {n_short} short, {n_not} not measured "
                     f"(of {len(BUDGETS)} budgets)")
        notes = [(r.name, r.note) for r in rows if r.note] + [(s, t) for s, t in self.notes]
        if notes:
            lines.append("")
            lines.append("notes:")
            lines += [f"  [{s}] {t}" for s, t in notes]
        return lines


# ------------------------------------------------------------------------ machine


def machine_info() -> dict:
    """What the run ran on: CPU model, cores, RAM, Python, numpy, numba, OS, load."""
    info: dict[str, Any] = {"cpu": "unknown"}
    with contextlib.suppress(OSError):
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.lower().startswith(("model name", "hardware", "processor\t: ")):
                value = line.split(":", 1)[1].strip()
                if value and not value.isdigit():
                    info["cpu"] = value
                    break
    info["cores"] = os.cpu_count() or 1
    if hasattr(os, "sched_getaffinity"):
        info["cores_usable"] = len(os.sched_getaffinity(0))
    with contextlib.suppress(OSError, ValueError, IndexError):
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemTotal:"):
                info["ram_gib"] = round(int(line.split()[1]) / 1024**2, 1)
    info["python"] = platform.python_version()
    try:
        import numpy

        info["numpy"] = numpy.__version__
    except ImportError:  # pragma: no cover - a dependency
        info["numpy"] = "missing"
    try:
        import numba

        info["numba"] = numba.__version__
    except ImportError:  # pragma: no cover - a dependency
        info["numba"] = "missing"
    os_name = platform.platform()
    with contextlib.suppress(OSError):
        for line in Path("/etc/os-release").read_text().splitlines():
            if line.startswith("PRETTY_NAME="):
                os_name = f"{line.split('=', 1)[1].strip(chr(34))}, {platform.platform()}"
    info["os"] = os_name
    if hasattr(os, "getloadavg"):
        info["load_average_at_start"] = [round(x, 2) for x in os.getloadavg()]
    return info


def machine_lines(m: dict) -> list[str]:
    """:func:`machine_info` as a few readable lines."""
    cores = f"{m.get('cores')} cores"
    if m.get("cores_usable", m.get("cores")) != m.get("cores"):
        cores += f" ({m['cores_usable']} usable)"
    lines = [f"{m.get('cpu')}, {cores}, {m.get('ram_gib', '?')} GiB RAM",
             f"Python {m.get('python')}, numpy {m.get('numpy')}, numba {m.get('numba')}",
             f"{m.get('os')}"]
    if "load_average_at_start" in m:
        la = m["load_average_at_start"]
        lines.append(f"load average at start {la[0]} {la[1]} {la[2]} (shared machine: "
                     "other work inflates the figures)")
    return lines


# ------------------------------------------------------------------------ settings


@dataclass
class Sizes:
    """Sample sizes of one run (``--quick`` shrinks every one)."""

    build_runs: int = 3
    build_time_cap_s: float = 80.0  #: no further build once the builds would pass this
    lookup_conditions: int = 2000
    lookup_passes: int = 9
    direct_footprints: int = 7
    ratio_passes: int = 400
    verify_samples: int = 100
    advisor_warmup: int = 20
    advisor_steps: int = 2000
    advisor_time_cap_s: float = 10.0
    decode_frames: int = 20000
    decode_passes: int = 5
    replay_log_s: float = 300.0
    replay_runs: int = 3
    replay_time_cap_s: float = 30.0
    startup_warm_runs: int = 3
    startup_first_ever: bool = True


QUICK = Sizes(
    build_runs=1, lookup_conditions=100, lookup_passes=3, direct_footprints=1, ratio_passes=20,
    verify_samples=2, advisor_warmup=1, advisor_steps=3, advisor_time_cap_s=2.0,
    decode_frames=300, decode_passes=2, replay_log_s=5.0, replay_runs=1,
    replay_time_cap_s=10.0, startup_warm_runs=1, startup_first_ever=False,
)


def quick_grid():
    """A tiny grid for ``--quick``: three altitudes, five Mach excesses, level flight."""
    from advisory import units
    from advisory.tables.grid import DEFAULT_N_ETA, TableGrid

    return TableGrid(
        altitudes_m=tuple(units.ft_to_m(a) for a in (45000.0, 50000.0, 55000.0)),
        mach_excess=(0.05, 0.2, 0.6, 1.2, 2.0),
        fpa_rad=(0.0,),
        n_eta=DEFAULT_N_ETA,
    )


@dataclass
class Context:
    """What the sections share: options, sizes, the table and the scenario files."""

    quick: bool
    sizes: Sizes
    work_dir: Path
    table_file: Path | None
    skip_build: bool
    report: Report
    progress: Callable[[str], None]
    table: Any = None
    table_path: Path | None = None
    zones_path: Path | None = None
    extras: dict = field(default_factory=dict)

    @property
    def cache_path(self) -> Path:
        """Where the built table is kept for later sections and ``--skip-build``."""
        return self.work_dir / ("quick-grid.boomtable" if self.quick else
                                "default-grid.boomtable")


# ------------------------------------------------------------------------ helpers


def _exc_text(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    text = f"{type(exc).__name__}: {text}" if text else type(exc).__name__
    return text if len(text) <= 160 else text[:157] + "..."


def _import(module: str):
    """Import ``module``; :class:`ModuleMissing` when it (not a dependency) is absent."""
    import importlib

    try:
        return importlib.import_module(module)
    except ModuleNotFoundError as exc:
        if exc.name and (exc.name == module or module.startswith(exc.name + ".")):
            raise ModuleMissing(f"module missing: {module}") from exc
        raise NotMeasured(f"import of {module} failed: {_exc_text(exc)}") from exc
    except Exception as exc:
        raise NotMeasured(f"import of {module} failed: {_exc_text(exc)}") from exc


def _idlest_cpu(cpus: set[int], window_s: float = 0.25) -> int:
    """The CPU of ``cpus`` with the most idle time over ``window_s`` (from /proc/stat)."""
    def idle() -> dict[int, int]:
        out = {}
        with contextlib.suppress(OSError, ValueError, IndexError):
            for line in Path("/proc/stat").read_text().splitlines():
                name = line.split(" ", 1)[0]
                if name.startswith("cpu") and name[3:].isdigit():
                    f = line.split()
                    out[int(name[3:])] = int(f[4]) + int(f[5])  # idle + iowait
        return out

    a = idle()
    time.sleep(window_s)
    b = idle()
    scored = [(b[c] - a[c], c) for c in cpus if c in a and c in b]
    return max(scored)[1] if scored else max(cpus)


@contextlib.contextmanager
def one_core() -> Iterator[str]:
    """Pin this process to its idlest CPU for the block (Linux); yields what was done.

    The sections that must run "on one core" use it, so that nothing they start can
    spread to a second core, and so that they do not share a core with other work.
    """
    if not hasattr(os, "sched_setaffinity"):
        yield "not pinned (no sched_setaffinity)"
        return
    before = os.sched_getaffinity(0)
    cpu = _idlest_cpu(before)
    try:
        os.sched_setaffinity(0, {cpu})
    except OSError:
        yield "not pinned"
        return
    try:
        yield f"pinned to CPU {cpu} (the idlest)"
    finally:
        os.sched_setaffinity(0, before)


def _median(xs: Sequence[float]) -> float:
    return float(statistics.median(xs))


def _percentile(xs: Sequence[float], q: float) -> float:
    import numpy as np

    return float(np.percentile(np.asarray(xs, dtype=float), q))


def _repo_root() -> Path:
    import advisory

    return Path(advisory.__file__).resolve().parent.parent


# ------------------------------------------------------------------------ scenario

#: The bench scenario: level flight east at Mach 1.6, 50,000 ft, over open sea at an
#: invented spot; the zones are invented too.
START_LAT_DEG = 30.0
START_LON_DEG = -40.0
CRUISE_ALT_FT = 50000.0
CRUISE_MACH = 1.6
CRUISE_HEADING_DEG = 90.0
FRAME_RATE_HZ = 20.0
N_ZONES = 20
VERTICES_PER_ZONE = 100


def cruise_ground_speed_kt() -> float:
    """Ground speed of the bench cruise in still standard air, kt."""
    from advisory import units
    from advisory.physics.atmosphere import standard_atmosphere

    c = standard_atmosphere().at(units.ft_to_m(CRUISE_ALT_FT)).sound_speed_mps
    return units.mps_to_kt(CRUISE_MACH * c)


def cruise_fields(t_s: float, gs_kt: float) -> dict:
    """Wire-named air-data fields of the bench cruise ``t_s`` seconds after the start."""
    from advisory import units
    from advisory.geo.geodesy import direct_deg

    p = direct_deg(START_LAT_DEG, START_LON_DEG, CRUISE_HEADING_DEG,
                   units.kt_to_mps(gs_kt) * t_s)
    return {
        "lat_deg": float(p.lat_deg), "lon_deg": float(p.lon_deg), "alt_ft": CRUISE_ALT_FT,
        "mach": CRUISE_MACH, "heading_deg": CRUISE_HEADING_DEG, "gs_kt": gs_kt,
        "bank_deg": 0.0, "fpa_deg": 0.0, "track_deg": CRUISE_HEADING_DEG,
        "mach_rate_per_s": 0.0, "sat_c": -56.5,
    }


def bench_zones(seed: int = 8) -> dict:
    """Twenty invented no-boom zones (GeoJSON), 100 vertices each, 2,000 in all.

    Six lie on or beside the track 90-190 km ahead (inside the look-ahead, so the advisor
    finds a conflict and searches for a resolution); fourteen are scattered within
    250 km. Each is a star-shaped (hence simple) polygon of radius 3-9 km.
    """
    import numpy as np

    from advisory.geo.geodesy import direct_deg

    rng = np.random.default_rng(seed)
    features = []
    for k in range(N_ZONES):
        if k < 6:
            ahead_m = 90e3 + 20e3 * k  # far enough that no boom already in the air
            # reaches them during the measured steps: the turn search runs every step
            cross_m = rng.uniform(-15e3, 15e3)
        else:
            ahead_m = rng.uniform(-100e3, 250e3)
            cross_m = rng.uniform(-150e3, 150e3)
        dist = math.hypot(ahead_m, cross_m)
        bearing = (CRUISE_HEADING_DEG + math.degrees(math.atan2(cross_m, ahead_m))) % 360.0
        c = direct_deg(START_LAT_DEG, START_LON_DEG, bearing, dist)
        radius = rng.uniform(3e3, 9e3)
        ang = np.sort(rng.uniform(0.0, 360.0, VERTICES_PER_ZONE))
        ang += np.arange(VERTICES_PER_ZONE) * 1e-6  # strictly increasing
        lobes = 1.0 + 0.25 * np.sin(np.radians(3.0 * ang + rng.uniform(0, 360)))
        r = radius * lobes * rng.uniform(0.9, 1.1, VERTICES_PER_ZONE)
        pts = direct_deg(np.full(VERTICES_PER_ZONE, float(c.lat_deg)),
                         np.full(VERTICES_PER_ZONE, float(c.lon_deg)), ang, r)
        ring = [[float(lo), float(la)] for lo, la in zip(pts.lon_deg, pts.lat_deg)]
        ring.append(ring[0])
        features.append({
            "type": "Feature",
            "properties": {"id": f"bench-zone-{k:02d}", "name": f"Bench zone {k:02d}",
                           "limit_psf": 0.0 if k % 2 == 0 else 1.0, "margin_km": 2.0},
            "geometry": {"type": "Polygon", "coordinates": [ring]},
        })
    return {"type": "FeatureCollection", "features": features}


def _zones_file(ctx: Context) -> Path:
    if ctx.zones_path is None:
        path = ctx.work_dir / "bench-zones.geojson"
        path.write_text(json.dumps(bench_zones()), encoding="utf-8")
        ctx.zones_path = path
    return ctx.zones_path


def _load_zones(ctx: Context):
    zones_mod = _import("advisory.pipeline.zones")
    return zones_mod.ZoneSet.from_file(_zones_file(ctx))


# ------------------------------------------------------------------------ table


def _wanted_grid(ctx: Context):
    """The grid this run builds: the default grid, or the tiny one with ``--quick``."""
    from advisory.tables.grid import default_grid

    return quick_grid() if ctx.quick else default_grid()


def _build_table(ctx: Context) -> float:
    """Build the (default or quick) grid with all cores, save it to the cache; seconds."""
    from advisory.physics.aircraft import default_aircraft
    from advisory.physics.atmosphere import standard_atmosphere
    from advisory.tables.build import BuildInputs, build_table_arrays, provenance
    from advisory.tables.store import write_table_file
    from advisory.tables.table import BoomTable

    grid = _wanted_grid(ctx)
    inputs = BuildInputs(default_aircraft(), standard_atmosphere(), grid)
    ctx.extras["grid_shape"] = f"{' x '.join(map(str, grid.shape))} x {grid.n_eta} azimuths"
    ctx.progress(f"building the {'quick' if ctx.quick else 'default'} table grid "
                 f"{grid.shape} x {grid.n_eta} azimuths on all cores ...")
    t0 = time.perf_counter()
    arrays = build_table_arrays(inputs, workers=None, progress_stream=io.StringIO())
    seconds = time.perf_counter() - t0
    write_table_file(ctx.cache_path, provenance(inputs, seconds), arrays)
    if ctx.table_file is None:
        ctx.table = BoomTable.load(ctx.cache_path)
        ctx.table_path = ctx.cache_path
    return seconds


def ensure_table(ctx: Context):
    """The table the later sections use: ``--table``, else the cache, else a new build."""
    if ctx.table is not None:
        return ctx.table
    from advisory.tables.table import BoomTable

    if ctx.table_file is not None:
        ctx.table = BoomTable.load(ctx.table_file)
        ctx.table_path = ctx.table_file
        return ctx.table
    if ctx.cache_path.exists():
        try:
            cached = BoomTable.load(ctx.cache_path)
            if cached.grid.to_dict() == _wanted_grid(ctx).to_dict():
                ctx.table, ctx.table_path = cached, ctx.cache_path
                return ctx.table
            ctx.report.note("build", f"cached table {ctx.cache_path} has another grid than "
                                     "the current one; rebuilt")
        except Exception as exc:
            ctx.report.note("build", f"cached table {ctx.cache_path} refused "
                                     f"({_exc_text(exc)}); rebuilt")
    seconds = _build_table(ctx)
    ctx.report.note("build", f"no usable cached table: built one for the later sections in "
                             f"{seconds:.1f} s (not counted as the build figure)")
    return ctx.table


def section_build(ctx: Context) -> None:
    """Table build time of the default grid, all cores (budget < 60 s)."""
    r = ctx.report
    if ctx.quick:
        r.rows["table_build_s"].name = "table build, quick grid"
    if ctx.skip_build:
        why = "--skip-build"
        from advisory.tables.table import BoomTable

        if ctx.cache_path.exists():
            with contextlib.suppress(Exception):
                h = BoomTable.load(ctx.cache_path).header
                why += f"; cached table's header says {h.get('build_seconds')} s"
        r.not_measured("table_build_s", why)
        return
    times = [_build_table(ctx)]
    while (len(times) < ctx.sizes.build_runs
           and sum(times) + times[-1] <= ctx.sizes.build_time_cap_s):
        times.append(_build_table(ctx))
    cores = os.cpu_count() or 1
    runs = (f"median of {len(times)} builds ({', '.join(f'{t:.1f}' for t in times)} s)"
            if len(times) > 1 else "one build")
    r.measured("table_build_s", _median(times),
               f"{'quick' if ctx.quick else 'default'} grid {ctx.extras.get('grid_shape')}, "
               f"{cores} worker processes, {runs}; written to {ctx.cache_path}")


# ------------------------------------------------------------------------ lookup


def random_conditions(table, n: int, seed: int = 2) -> list[tuple[float, float, float, float]]:
    """``n`` random in-grid (altitude m, Mach, fpa rad, heading rad) above cutoff Mach."""
    import numpy as np

    g = table.grid
    rng = np.random.default_rng(seed)
    out = []
    while len(out) < n:
        alt = float(rng.uniform(g.altitudes_m[0], g.altitudes_m[-1]))
        fpa = float(rng.uniform(g.fpa_rad[0], g.fpa_rad[-1]))
        hdg = float(rng.uniform(0.0, 2.0 * math.pi))
        mcut = table.cutoff_mach(alt, fpa, hdg)
        top = min(g.mach_max, mcut + g.mach_excess[-1])
        lo = mcut + min(0.02, 0.5 * (top - mcut))
        if not (math.isfinite(mcut) and top > lo):
            continue
        out.append((alt, float(rng.uniform(lo, top)), fpa, hdg))
    return out


def time_lookups(table, conds, passes: int) -> float:
    """Median over ``passes`` of the mean time of one ``footprint_into`` call, s."""
    import numpy as np

    from advisory.tables import lookup as lk

    out = np.zeros((table.eta.size, lk.N_QUANTITIES))
    f = table.footprint_into
    for alt, mach, fpa, hdg in conds[:50]:  # warm-up (JIT load, caches)
        f(out, alt, mach, fpa, hdg)
    per = []
    clock = time.perf_counter
    for _ in range(passes):
        t0 = clock()
        for alt, mach, fpa, hdg in conds:
            f(out, alt, mach, fpa, hdg)
        per.append((clock() - t0) / len(conds))
    return _median(per)


def direct_footprint(inputs, tracer, eta, alt: float, mach: float, fpa: float,
                     hdg: float) -> int:
    """Trace one footprint directly, as the table builder does for one Mach.

    Best reaching azimuth, both lateral cutoffs (bisection), then the rays at the table's
    normalised azimuths, each traced with :meth:`RayTracer.trace` and its ground
    signature computed. Returns the number of rays that reached the ground.
    """
    from advisory.physics.carpet import best_reaching_azimuth, lateral_cutoff
    from advisory.physics.rays import FlightCondition
    from advisory.tables.build import eta_to_phi, ray_signature

    fc = FlightCondition(mach, alt, hdg, fpa, inputs.grid.ground_elevation_m)
    phi_ref, margin = best_reaching_azimuth(tracer, fc)
    if margin <= 0.0:
        return 0
    left = lateral_cutoff(tracer, fc, phi_ref, -1)
    right = lateral_cutoff(tracer, fc, phi_ref, +1)
    n = 0
    for phi in eta_to_phi(eta, phi_ref, left, right):
        ray = tracer.trace(fc, float(phi))
        if ray.reaches_ground:
            ray_signature(inputs, tracer, fc, ray)
            n += 1
    return n


def section_lookup(ctx: Context) -> None:
    """One footprint lookup (< 20 us) and its speed-up over direct tracing (>= 50x)."""
    r = ctx.report
    s = ctx.sizes
    table = ensure_table(ctx)
    from advisory.physics.rays import RayTracer
    from advisory.tables import lookup as lk
    from advisory.tables.verify import inputs_from_table

    conds = random_conditions(table, s.lookup_conditions)
    import numpy as np

    out = np.zeros((table.eta.size, lk.N_QUANTITIES))
    codes = Counter(int(table.footprint_into(out, *c)[0]) for c in conds)
    per_call = time_lookups(table, conds, s.lookup_passes)
    names = {lk.NO_BOOM: "no boom", lk.OK: "ok", lk.CLAMPED: "clamped"}
    r.measured("lookup_us", per_call * 1e6,
               f"{len(conds)} random in-grid conditions above cutoff Mach, {table.eta.size} "
               f"azimuths, median of {s.lookup_passes} passes of BoomTable.footprint_into "
               f"(codes: {', '.join(f'{names.get(k, k)} {v}' for k, v in codes.items())})")

    # side by side on the same conditions: direct tracing, then the table again
    inputs = inputs_from_table(table)
    tracer = RayTracer(inputs.atmosphere)
    eta = table.eta
    direct_footprint(inputs, tracer, eta, *conds[-1])  # warm-up
    same = conds[: s.direct_footprints]
    direct_t, rays = [], []
    for c in same:
        t0 = time.perf_counter()
        rays.append(direct_footprint(inputs, tracer, eta, *c))
        direct_t.append(time.perf_counter() - t0)
    table_t = time_lookups(table, same, s.ratio_passes)
    d = _median(direct_t)
    r.measured("lookup_speedup", d / table_t,
               f"direct: median {d * 1e3:.1f} ms per footprint over {len(same)} of the same "
               f"conditions (best reaching azimuth, two lateral-cutoff bisections, "
               f"{eta.size} rays traced + ground signatures; reached ground: {rays}); "
               f"table on those conditions {table_t * 1e6:.2f} us. The direct path leaves "
               "out the cutoff-Mach search, so the ratio is a lower bound")
    _compiled_direct(ctx, inputs, tracer, same, table_t)


def _compiled_direct(ctx: Context, inputs, tracer, conds, table_t: float) -> None:
    """For information: the same footprints through the builder's compiled fast path.

    ``advisory.physics.fastpath.trace_column`` with one Mach excess: cutoff-Mach search,
    lateral cutoffs and every ray with its signature, all compiled.
    """
    name = "table vs compiled direct trace"
    try:
        import numpy as np

        fp = _import("advisory.physics.fastpath")
        eta = ctx.table.eta
        g = inputs.grid

        def one(alt: float, mach: float, fpa: float, hdg: float) -> None:
            excess = max(mach - ctx.table.cutoff_mach(alt, fpa, hdg), 1e-3)
            fp.trace_column(tracer, inputs.aircraft, alt, hdg, fpa, g.ground_elevation_m,
                            np.array([excess]), eta, inputs.reflection_factor)

        one(*conds[-1])  # warm-up (JIT load)
        times = []
        for c in conds:
            t0 = time.perf_counter()
            one(*c)
            times.append(time.perf_counter() - t0)
        d = _median(times)
        ctx.report.add_info("compiled_direct_speedup", name, d / table_t, "x",
                            note=f"fastpath.trace_column with one Mach excess (cutoff-Mach "
                                 f"search included): median {d * 1e3:.2f} ms per footprint "
                                 f"over {len(conds)} conditions vs table {table_t * 1e6:.2f} us")
    except Exception as exc:
        ctx.report.add_info("compiled_direct_speedup", name, None, "x",
                            why=str(exc) if isinstance(exc, NotMeasured) else _exc_text(exc))


# ------------------------------------------------------------------------ verify


def section_verify(ctx: Context) -> None:
    """Interpolation error vs direct trace (half-width, centerline dp, cutoff Mach)."""
    r = ctx.report
    table = ensure_table(ctx)
    verify = _import("advisory.tables.verify")
    n = ctx.sizes.verify_samples
    t0 = time.perf_counter()
    rep = verify.verify_table(table, samples=n)
    sec = time.perf_counter() - t0
    grid = "quick" if ctx.quick else "default"
    r.measured("half_width_err", 100 * rep.half_width_rel_max,
               f"max over {n} random off-grid points ({grid} grid); median "
               f"{100 * rep.half_width_rel_median:.3f} % (verify_table, {sec:.1f} s)")
    r.measured("overpressure_err", 100 * rep.overpressure_rel_max,
               f"max; median {100 * rep.overpressure_rel_median:.3f} %")
    r.measured("cutoff_err", rep.cutoff_abs_max, f"max; median {rep.cutoff_abs_median:.5f}")


# ------------------------------------------------------------------------ advisor


def advisor_class():
    """``advisory.pipeline.advisor.Advisor`` (or ``advisory.Advisor``); :class:`ModuleMissing`."""
    try:
        mod = _import("advisory.pipeline.advisor")
    except ModuleMissing:
        import advisory

        cls = getattr(advisory, "Advisor", None)
        if cls is None:
            raise
        return cls
    cls = getattr(mod, "Advisor", None)
    if cls is None:
        raise NotMeasured("advisory.pipeline.advisor has no Advisor")
    return cls


def make_advisor(table, zones):
    """``Advisor(table, zones)``, searching resolutions on every step (the budget's case).

    The default configuration searches again only after ``refresh_s`` (1 s) unless the
    conflict changes; the budget is for a step *including* the search, so it is measured
    with the search on every step.
    """
    from advisory.pipeline.config import AdvisorConfig

    cls = advisor_class()
    return cls(table, zones, config=AdvisorConfig(refresh_s=0.0))


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
    zones = _load_zones(ctx)
    state_mod = _import("advisory.pipeline.state")
    try:
        advisor = make_advisor(table, zones)
    except NotMeasured:
        raise
    except Exception as exc:
        raise NotMeasured(f"Advisor(table, zones) failed: {_exc_text(exc)}") from exc
    gs = cruise_ground_speed_kt()
    n = s.advisor_warmup + s.advisor_steps
    fields = [cruise_fields(i / FRAME_RATE_HZ, gs) for i in range(n)]
    from_fields = state_mod.AirDataState.from_fields
    statuses: Counter = Counter()
    reasons: dict[str, str] = {}
    resolved = 0
    times = []
    deadline = time.perf_counter() + s.advisor_time_cap_s
    clock = time.perf_counter
    for i, f in enumerate(fields):
        st = from_fields(f, utc_s=time.time(), rx_monotonic=time.monotonic())
        t0 = clock()
        try:
            adv = advisor.step(st)
        except Exception as exc:
            raise NotMeasured(f"Advisor.step failed: {_exc_text(exc)}") from exc
        dt = clock() - t0
        if i >= s.advisor_warmup:
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
    r.measured("step_median_ms", _median(times) * 1e3, note)
    r.measured("step_p99_ms", _percentile(times, 99.0) * 1e3,
               f"max {max(times) * 1e3:.2f} ms")
    if reasons:
        r.note("advisor", f"some steps were 'unavailable': {reasons['unavailable'][:160]}")
    if not any(k in ("advisory", "caution", "warning") for k in statuses):
        r.note("advisor", "no conflict was seen, so the resolution search may not have run: "
                          "the step figures may be optimistic")


# ------------------------------------------------------------------------ decode


def section_decode(ctx: Context) -> None:
    """Deframe (COBS + CRC) + decode + validate, one core (>= 100,000 frames/s)."""
    r = ctx.report
    s = ctx.sizes
    frames_mod = _import("advisory.io.messages")
    framing_mod = _import("advisory.io.framing")
    state_mod = _import("advisory.pipeline.state")
    gs = cruise_ground_speed_kt()
    utc0 = 1.9e9
    stream = b"".join(
        framing_mod.frame_stream(frames_mod.encode_air(
            cruise_fields(i / FRAME_RATE_HZ, gs), i, utc0 + i / FRAME_RATE_HZ))
        for i in range(s.decode_frames)
    )
    chunk = 1024  # bytes per read, as a serial or file source hands them over
    chunks = [stream[i:i + chunk] for i in range(0, len(stream), chunk)]
    dt_frame = 1.0 / FRAME_RATE_HZ

    def one_pass() -> tuple[float, float, int, dict]:
        deframer = framing_mod.StreamDeframer()
        decoder = frames_mod.FrameDecoder()
        validator = state_mod.StateValidator()
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
                if type(st) is not state_mod.Rejection:
                    accepted += 1
        wall = time.perf_counter() - t0
        cpu_s = time.process_time() - c0
        return wall, cpu_s, accepted, dict(validator.rejections)

    with one_core() as pin:
        one_pass()  # warm-up
        runs = [one_pass() for _ in range(s.decode_passes)]
    secs = [t for t, _, _, _ in runs]
    cpu_rate = s.decode_frames / _median([c for _, c, _, _ in runs])
    _, _, accepted, rejections = runs[0]
    rate = s.decode_frames / _median(secs)
    r.measured("decode_fps", rate,
               f"{s.decode_frames} air-data frames ({len(stream) / s.decode_frames:.0f} bytes "
               f"each on the stream) fed in {chunk}-byte reads through StreamDeframer + "
               f"FrameDecoder + StateValidator; median wall time of {s.decode_passes} passes, "
               f"{pin} "
               f"(by CPU time {cpu_rate:,.0f} frames/s); "
               f"accepted {accepted}" + (f", rejected {rejections}" if rejections else ""))


# ------------------------------------------------------------------------ replay


def _subcommand_options(name: str) -> set[str] | None:
    """Option strings of ``boom-advisory <name>``, or None when it is not wired."""
    try:
        from advisory.cli import build_parser

        parser = build_parser()
    except Exception:
        return None
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction) and name in action.choices:
            return set(action.choices[name]._option_string_actions)
    return None


def write_replay_log(path: Path, duration_s: float, rate_hz: float = FRAME_RATE_HZ) -> int:
    """A recorded 20 Hz cruise (record file of input frames); returns the frame count."""
    from advisory.io.messages import encode_air
    from advisory.io.records import Recorder

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
    replay_mod = _import("advisory.bench.replay")
    table = ensure_table(ctx)
    del table
    zones_path = _zones_file(ctx)
    log = ctx.work_dir / "bench-cruise-20hz.rec"
    n = write_replay_log(log, s.replay_log_s)
    opts = _subcommand_options("replay")
    args = [str(log), "--speed", "max"]
    if opts is not None:
        if "--zones" in opts:
            args += ["--zones", str(zones_path)]
        for flag in ("--tables", "--table"):
            if flag in opts:
                args += [flag, str(ctx.table_path)]
                break
        if "--json" in opts:
            args.append("--json")
        from advisory.cli import main as cli_main

        def run() -> int:
            return cli_main(["replay", *args])
        how = "boom-advisory replay (in process)"
    elif callable(getattr(replay_mod, "main", None)):
        args += ["--zones", str(zones_path), "--tables", str(ctx.table_path)]

        def run() -> int:
            return replay_mod.main(args)
        how = "advisory.bench.replay.main (in process)"
    else:
        raise NotMeasured("no replay command in the CLI and no advisory.bench.replay.main")

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
                raise NotMeasured(f"replay failed: {_exc_text(exc)}") from exc
            times.append(time.perf_counter() - t0)
            if code not in (0, None):
                tail = sink.getvalue().strip().splitlines()[-1:] or [""]
                raise NotMeasured(f"replay exited {code}: {tail[0][:120]}")
            if sum(times) > s.replay_time_cap_s:
                break
    wall = _median(times)
    r.measured("replay_speed", s.replay_log_s / wall,
               f"{s.replay_log_s:g} s log, {n} frames at {FRAME_RATE_HZ:g} Hz, {how} "
               f"{' '.join(a if not a.startswith('/') else Path(a).name for a in args)}; "
               f"median wall time {wall:.2f} s over {len(times)} runs (whole command: loading "
               f"table and zones included), {pin}")


# ------------------------------------------------------------------------ startup


def coldstart_child(argv: Sequence[str] | None = None) -> int:
    """Body of the cold-start subprocess (``python -c``): prints one JSON line.

    Imports the package, loads the table, builds an :class:`Advisor` and steps once
    (or, when the advisor is missing, makes one footprint lookup and says so), then
    reports ``time.monotonic()`` at that first answer and the peak resident memory
    after a few more steps.
    """
    argv = list(sys.argv[1:] if argv is None else argv)
    table_path, zones_path = argv[0], argv[1]
    out: dict[str, Any] = {"what": None}
    try:
        import advisory  # noqa: F401
        from advisory.tables.table import BoomTable

        table = BoomTable.load(table_path)
        adv = None
        try:
            from advisory.pipeline.state import AirDataState
            from advisory.pipeline.zones import ZoneSet

            adv = make_advisor(table, ZoneSet.from_file(zones_path))
            gs = cruise_ground_speed_kt()
            st = AirDataState.from_fields(cruise_fields(0.0, gs), utc_s=time.time(),
                                          rx_monotonic=time.monotonic())
            adv.step(st)
            out["t_first"] = time.monotonic()
            out["what"] = "advisory"
            for i in range(1, 21):
                adv.step(AirDataState.from_fields(cruise_fields(i / FRAME_RATE_HZ, gs),
                                                  utc_s=time.time(),
                                                  rx_monotonic=time.monotonic()))
        except Exception as exc:
            if out["what"] is not None:
                raise
            out["advisor_error"] = _exc_text(exc)
            import numpy as np

            from advisory.tables import lookup as lk

            buf = np.zeros((table.eta.size, lk.N_QUANTITIES))
            table.footprint_into(buf, 15240.0, CRUISE_MACH, 0.0, 0.0)
            out["t_first"] = time.monotonic()
            out["what"] = "footprint"
    except Exception as exc:
        out["error"] = _exc_text(exc)
    import resource

    out["rss_peak_kb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    with contextlib.suppress(OSError):
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                out["vmhwm_kb"] = int(line.split()[1])
    print(json.dumps(out), flush=True)
    return 0


def _run_child(ctx: Context, cache_dir: str | None) -> dict:
    env = dict(os.environ)
    root = str(_repo_root())
    env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    if cache_dir is not None:
        env["NUMBA_CACHE_DIR"] = cache_dir
    code = ("import sys; from advisory.bench.benchmark import coldstart_child; "
            "sys.exit(coldstart_child())")
    t_spawn = time.monotonic()
    proc = subprocess.run([sys.executable, "-c", code, str(ctx.table_path),
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
    _zones_file(ctx)
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
    start = _median([w["start_s"] for w in warm])
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


# ------------------------------------------------------------------------ driver


SECTION_FUNCS: dict[str, Callable[[Context], None]] = {
    "build": section_build,
    "lookup": section_lookup,
    "verify": section_verify,
    "advisor": section_advisor,
    "decode": section_decode,
    "replay": section_replay,
    "startup": section_startup,
}


DESCRIPTION = ("Measure every budget of the issues and print each figure beside its budget, "
               "with the machine it ran on. " + SAFETY_CAUTION)


def add_arguments(p: argparse.ArgumentParser) -> None:
    """Add the benchmark's options to ``p`` (for a ``bench`` sub-command parser)."""
    p.add_argument("--quick", action="store_true",
                   help="tiny sizes and a tiny table grid (smoke test; figures not meaningful)")
    p.add_argument("--skip-build", action="store_true",
                   help="do not time the table build; reuse the cached table")
    p.add_argument("--table", metavar="FILE",
                   help="use this table file for the sections after the build")
    p.add_argument("--work-dir", metavar="DIR",
                   default=str(Path(tempfile.gettempdir()) / "boom-advisory-bench"),
                   help="where the cached table, zones and replay log go "
                        "(default: %(default)s)")
    p.add_argument("--only", metavar="SECTIONS",
                   help=f"comma-separated subset of {','.join(SECTIONS)}")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--strict", action="store_true",
                   help="exit 1 when a budget is short or not measured")


def build_parser() -> argparse.ArgumentParser:
    """Options of ``benchmarks/run.py`` / ``boom-advisory bench``."""
    p = argparse.ArgumentParser(prog="boom-advisory bench", description=DESCRIPTION)
    add_arguments(p)
    return p


def main(argv: Sequence[str] | None = None) -> int:
    """Run the benchmark; returns the exit code (0; 1 with ``--strict`` when short)."""
    args = build_parser().parse_args(list(argv) if argv is not None else None)
    return run(args)


def run(args: argparse.Namespace) -> int:
    """Run the benchmark for parsed options (see :func:`add_arguments`); the exit code."""
    selected = list(SECTIONS)
    if args.only:
        selected = [x.strip() for x in args.only.split(",") if x.strip()]
        bad = [x for x in selected if x not in SECTIONS]
        if bad:
            print(f"boom-advisory bench: error: --only: {','.join(bad)} is not one of "
                  f"{','.join(SECTIONS)}", file=sys.stderr)
            return EXIT_USAGE
    table_file = Path(args.table) if args.table else None
    if table_file is not None and not table_file.is_file():
        print(f"boom-advisory bench: error: --table: {args.table} is not a file",
              file=sys.stderr)
        return EXIT_USAGE
    work_dir = Path(args.work_dir)
    try:
        work_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        print(f"boom-advisory bench: error: --work-dir: {args.work_dir}: {exc.strerror}",
              file=sys.stderr)
        return EXIT_USAGE

    def progress(text: str) -> None:
        print(f"bench: {text}", file=sys.stderr, flush=True)

    report = Report()
    ctx = Context(quick=args.quick, sizes=QUICK if args.quick else Sizes(), work_dir=work_dir,
                  table_file=table_file, skip_build=args.skip_build, report=report,
                  progress=progress)
    machine = machine_info()
    t_all = time.perf_counter()
    for name in SECTIONS:
        keys = [b.key for b in BUDGETS if b.section == name]
        if name not in selected and not (name == "build" and args.skip_build):
            for k in keys:
                report.not_measured(k, "not selected")
            continue
        progress(f"{name} ...")
        t0 = time.perf_counter()
        try:
            SECTION_FUNCS[name](ctx)
        except ModuleMissing as exc:
            for k in keys:
                report.not_measured(k, "module missing")
            report.note(name, str(exc))
        except NotMeasured as exc:
            for k in keys:
                if report.rows[k].value is None:
                    report.not_measured(k, str(exc))
        except Exception as exc:  # a broken part must not stop the other sections
            for k in keys:
                if report.rows[k].value is None:
                    report.not_measured(k, _exc_text(exc))
        progress(f"{name} done in {time.perf_counter() - t0:.1f} s")
    if ctx.table_path is not None:
        report.note("table", f"sections after the build used {ctx.table_path}")
    report.note("run", f"whole run {time.perf_counter() - t_all:.0f} s"
                       + (" (--quick: tiny sizes, figures not meaningful)" if args.quick else ""))
    options = {"quick": args.quick, "skip_build": args.skip_build, "table": args.table,
               "work_dir": str(work_dir), "only": selected}
    if args.json:
        print(report.to_json(machine, options))
    else:
        print("\n".join(report.text_lines(machine)))
    sys.stdout.flush()
    if args.strict and any(r.status != "pass" for r in report.all_rows() if r.is_budget):
        return EXIT_SHORT
    return EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
