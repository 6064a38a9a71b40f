"""Benchmarks against the budgets of the issues: one run, every figure beside its budget.

``boom-advisory bench`` (and ``python benchmarks/run.py``, which calls it) ends in
:func:`run_benchmark`. The run measures, on the machine it runs on:

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
``campaign``       closed-loop campaign on one Dask worker, in ten-minute      >= 4 per
                   scenarios of flight per core-minute                         core-min
``campaign``       the same campaign on 2 Dask workers vs 1, side by side      >= 1.7x
=================  ==========================================================  =========

plus, for information, the first-ever start (empty numba cache) and the speed-up over
the builder's compiled direct trace. Figures are medians over repeated runs (the table
build is repeated up to three times while the builds fit in 80 s); the lookup/direct
ratio is measured side by side on the same conditions in the same run. A section that
cannot measure prints "not measured (why)" and the run goes on. When other sections ran
before them in the same run, the advisor and replay sections run in a fresh Python process
of their own (:data:`FRESH_PROCESS_SECTIONS`) on the same table: the process that had
built the table and run the sections before timed the step at 3.2 ms where it took 2.1 ms
alone (stop 30).

The sections live in :mod:`advisory.bench.sections_table` (build, lookup, verify),
:mod:`advisory.bench.sections_live` (advisor, decode, replay, startup) and
:mod:`advisory.bench.sections_campaign` (campaign); the budgets and the printed table in
:mod:`advisory.bench.budgets`, the machine in :mod:`advisory.bench.machine`, the
invented workload in :mod:`advisory.bench.workload`.

Budgets are engineering targets set in the project's issues (common practice, no
source). Speed is measured here, never asserted in tests.
"""


from __future__ import annotations

import json
import subprocess
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from advisory.bench.budgets import (
    BUDGETS,
    EXIT_OK,
    EXIT_SHORT,
    SECTIONS,
    ModuleMissing,
    NotMeasured,
    Report,
)
from advisory.bench.context import QUICK, Context, ReplayCommand, Sizes, ensure_table, exc_text
from advisory.bench.machine import machine_info
from advisory.bench.sections_campaign import section_campaign
from advisory.bench.sections_live import (
    section_advisor,
    section_decode,
    section_replay,
    section_startup,
)
from advisory.bench.sections_table import section_build, section_lookup, section_verify
from advisory.bench.sections_truth import section_truth

SECTION_FUNCS: dict[str, Callable[[Context], None]] = {
    "build": section_build,
    "lookup": section_lookup,
    "verify": section_verify,
    "advisor": section_advisor,
    "decode": section_decode,
    "replay": section_replay,
    "startup": section_startup,
    "truth": section_truth,
    "campaign": section_campaign,
}


@dataclass(frozen=True)
class BenchOptions:
    """The options of one run (checked by the command line before it gets here).

    Attributes
    ----------
    quick : bool
        Tiny sizes and a tiny table grid (smoke test; figures not meaningful).
    skip_build : bool
        Do not time the table build; reuse the cached table.
    table : Path or None
        A table file for the sections after the build.
    work_dir : Path
        Where the cached table, zones and replay log go (created by the caller).
    only : tuple of str
        The sections to run (of :data:`SECTIONS`).
    json : bool
        Print one JSON object instead of the table.
    strict : bool
        Exit :data:`EXIT_SHORT` when a budget is short or not measured.
    """

    quick: bool = False
    skip_build: bool = False
    table: Path | None = None
    work_dir: Path = Path("boom-advisory-bench")
    only: tuple[str, ...] = SECTIONS
    json: bool = False
    strict: bool = False


def _progress(text: str) -> None:
    print(f"bench: {text}", file=sys.stderr, flush=True)


#: Sections timed in a fresh process of their own when the run holds others (why: the
#: module notes).
FRESH_PROCESS_SECTIONS = ("advisor", "replay")
#: Longest a fresh-process section may take, s.
FRESH_PROCESS_TIMEOUT_S = 1800.0


def _run_fresh(name: str, ctx: Context, report: Report) -> None:
    """Run section ``name`` as ``boom-advisory bench --only NAME --json`` in a new Python
    process on the same table and work directory, and take its rows and notes."""
    ensure_table(ctx)
    cmd = [sys.executable, "-m", "advisory.cli", "bench", "--only", name, "--json",
           "--work-dir", str(ctx.work_dir)]
    if ctx.table_path is not None:
        cmd += ["--table", str(ctx.table_path)]
    if ctx.quick:
        cmd.append("--quick")
    done = subprocess.run(cmd, capture_output=True, text=True,  # noqa: S603 - our own CLI
                          timeout=FRESH_PROCESS_TIMEOUT_S, check=False)
    if done.returncode != 0:
        tail = (done.stderr.strip().splitlines() or ["no output"])[-1]
        raise NotMeasured(f"fresh process exited {done.returncode}: {tail}")
    out = json.loads(done.stdout)
    mine = {b.key for b in BUDGETS if b.section == name}
    for row in out["results"]:
        why = str(row["status"]).removeprefix("not measured (").removesuffix(")")
        if row["key"] in mine:
            if row["value"] is None:
                report.not_measured(row["key"], why)
            else:
                report.measured(row["key"], row["value"], row["note"])
        elif not row["budget"]:  # an informational row: only this section ran there
            report.add_info(row["key"], row["name"], row["value"], row["unit"], row["note"],
                            why)
    for n in out["notes"]:
        if n["section"] == name:
            report.note(name, n["text"])
    report.note(name, "measured in a fresh process (" + " ".join(cmd[1:6]) + " ...)")


def _run_section(name: str, ctx: Context, report: Report, fresh: bool = False) -> None:
    """Run one section; a failure marks its budgets "not measured" and the run goes on."""
    keys = [b.key for b in BUDGETS if b.section == name]
    try:
        if fresh:
            _run_fresh(name, ctx, report)
        else:
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
                report.not_measured(k, exc_text(exc))


def run_benchmark(opts: BenchOptions, replay_command: ReplayCommand | None = None) -> int:
    """Run the benchmark and print the result; returns the exit code.

    Parameters
    ----------
    opts : BenchOptions
    replay_command : callable, optional
        Runs ``boom-advisory replay ARGS`` in this process and returns its exit code (the
        command line hands it in; without it the replay section is not measured).

    Returns
    -------
    int
        :data:`EXIT_OK`, or :data:`EXIT_SHORT` with ``strict`` when a budget is short or
        not measured.
    """
    report = Report()
    ctx = Context(quick=opts.quick, sizes=QUICK if opts.quick else Sizes(),
                  work_dir=opts.work_dir, table_file=opts.table, skip_build=opts.skip_build,
                  report=report, progress=_progress, replay_command=replay_command)
    machine = machine_info()
    t_all = time.perf_counter()
    ran_other = False  # a section before ran in this process: time the live ones afresh
    for name in SECTIONS:
        if name not in opts.only and not (name == "build" and opts.skip_build):
            for b in BUDGETS:
                if b.section == name:
                    report.not_measured(b.key, "not selected")
            continue
        _progress(f"{name} ...")
        t0 = time.perf_counter()
        _run_section(name, ctx, report, fresh=name in FRESH_PROCESS_SECTIONS and ran_other)
        ran_other = True
        _progress(f"{name} done in {time.perf_counter() - t0:.1f} s")
    if ctx.table_path is not None:
        report.note("table", f"sections after the build used {ctx.table_path}")
    report.note("run", f"whole run {time.perf_counter() - t_all:.0f} s"
                       + (" (--quick: tiny sizes, figures not meaningful)" if opts.quick else ""))
    options = {"quick": opts.quick, "skip_build": opts.skip_build,
               "table": None if opts.table is None else str(opts.table),
               "work_dir": str(opts.work_dir), "only": list(opts.only)}
    if opts.json:
        print(report.to_json(machine, options))
    else:
        print("\n".join(report.text_lines(machine)))
    sys.stdout.flush()
    if opts.strict and any(r.status != "pass" for r in report.all_rows() if r.is_budget):
        return EXIT_SHORT
    return EXIT_OK
