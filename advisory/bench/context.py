"""What the benchmark's sections share: sample sizes, options, the table (built, cached or
given) and the zone file, plus small helpers.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import io
import json
import statistics
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from advisory.bench.budgets import Report
from advisory.bench.workload import bench_zones, quick_grid
from advisory.physics.aircraft import default_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.pipeline.zones import ZoneSet
from advisory.tables.build import BuildInputs, build_table_arrays, provenance
from advisory.tables.grid import TableGrid, default_grid
from advisory.tables.store import write_table_file
from advisory.tables.table import BoomTable

PACKAGE_DIR = Path(__file__).resolve().parents[1]  #: the ``advisory`` package

#: Runs ``boom-advisory replay`` with these arguments and returns its exit code (the
#: command line hands it in, so that this package does not import the command line).
ReplayCommand = Callable[[list[str]], int]

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


@dataclass
class Context:
    """What the sections share: options, sizes, the table and the scenario files.

    ``replay_command`` runs ``boom-advisory replay`` for the replay section (None: that
    section is not measured).
    """

    quick: bool
    sizes: Sizes
    work_dir: Path
    table_file: Path | None
    skip_build: bool
    report: Report
    progress: Callable[[str], None]
    replay_command: ReplayCommand | None = None
    table: BoomTable | None = None
    table_path: Path | None = None
    zones_path: Path | None = None
    extras: dict[str, Any] = field(default_factory=dict)

    @property
    def cache_path(self) -> Path:
        """Where the built table is kept for later sections and ``--skip-build``."""
        return self.work_dir / ("quick-grid.boomtable" if self.quick else
                                "default-grid.boomtable")


def exc_text(exc: BaseException) -> str:
    """An exception as one short line (its type and the first line of its message)."""
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    text = f"{type(exc).__name__}: {text}" if text else type(exc).__name__
    return text if len(text) <= 160 else text[:157] + "..."


def median(xs: Sequence[float]) -> float:
    """The median of ``xs``."""
    return float(statistics.median(xs))


def percentile(xs: Sequence[float], q: float) -> float:
    """The ``q``-th percentile of ``xs`` (numpy's linear interpolation)."""
    return float(np.percentile(np.asarray(xs, dtype=float), q))


def package_parent() -> Path:
    """The directory holding the ``advisory`` package (the checkout, or site-packages)."""
    return PACKAGE_DIR.parent


def zones_file(ctx: Context) -> Path:
    """The bench zones' GeoJSON file in the work directory (written on first use)."""
    if ctx.zones_path is None:
        path = ctx.work_dir / "bench-zones.geojson"
        path.write_text(json.dumps(bench_zones()), encoding="utf-8")
        ctx.zones_path = path
    return ctx.zones_path


def load_zones(ctx: Context) -> ZoneSet:
    """The bench zones (written once into the work directory)."""
    return ZoneSet.from_file(zones_file(ctx))


def wanted_grid(ctx: Context) -> TableGrid:
    """The grid this run builds: the default grid, or the tiny one with ``--quick``."""
    return quick_grid() if ctx.quick else default_grid()


def build_table(ctx: Context) -> float:
    """Build the (default or quick) grid with all cores, save it to the cache; seconds."""
    grid = wanted_grid(ctx)
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


def ensure_table(ctx: Context) -> BoomTable:
    """The table the later sections use: ``--table``, else the cache, else a new build."""
    if ctx.table is not None:
        return ctx.table
    if ctx.table_file is not None:
        table = ctx.table = BoomTable.load(ctx.table_file)
        ctx.table_path = ctx.table_file
        return table
    if ctx.cache_path.exists():
        try:
            cached = BoomTable.load(ctx.cache_path)
            if cached.grid.to_dict() == wanted_grid(ctx).to_dict():
                ctx.table, ctx.table_path = cached, ctx.cache_path
                return cached
            ctx.report.note("build", f"cached table {ctx.cache_path} has another grid than "
                                     "the current one; rebuilt")
        except Exception as exc:
            ctx.report.note("build", f"cached table {ctx.cache_path} refused "
                                     f"({exc_text(exc)}); rebuilt")
    seconds = build_table(ctx)
    ctx.report.note("build", f"no usable cached table: built one for the later sections in "
                             f"{seconds:.1f} s (not counted as the build figure)")
    if ctx.table is None:  # pragma: no cover - build_table sets it when no --table
        raise RuntimeError("the table build left no table")
    return ctx.table
