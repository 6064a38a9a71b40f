"""The budgets of the issues and the printed result: every figure beside its budget.

Budgets are engineering targets set in the project's issues (common practice, no
source). Speed is measured by ``boom-advisory bench``, never asserted in tests.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict, dataclass
from typing import Any

from advisory.bench.machine import machine_lines
from advisory.schema import SAFETY_CAUTION, VERSION

EXIT_OK = 0
EXIT_SHORT = 1  #: with ``--strict``: a budget is short or not measured

SECTIONS = ("build", "lookup", "verify", "advisor", "decode", "replay", "startup", "truth",
            "campaign")


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


#: Every budget named in the issues (tables, advisor, live loop, replay, campaigns), in
#: print order.
BUDGETS = (
    Budget("table_build_s", "build", "table build, default grid", 60.0, "s"),
    Budget("spread_size_ratio", "build", "table size with sensitivity columns vs without",
           2.0, "x"),
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
    Budget("truth_10min_s", "truth", "truth of a 10-minute flight, one core", 20.0, "s"),
    Budget("campaign_rate", "campaign", "closed-loop campaign, one worker", 4.0,
           "10-min scenarios/core-min", upper=False),
    Budget("dask_speedup", "campaign", "Dask 2 workers vs 1, same campaign", 1.7, "x",
           upper=False),
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
    def to_json(self, machine: dict[str, Any], options: dict[str, Any]) -> str:
        """One JSON object: machine, options, rows, notes, caution."""
        return json.dumps({
            "package_version": VERSION,
            "machine": machine,
            "options": options,
            "results": [dict(asdict(r), budget=r.is_budget) for r in self.all_rows()],
            "notes": [{"section": s, "text": t} for s, t in self.notes],
            "caution": SAFETY_CAUTION,
        }, indent=2)

    def text_lines(self, machine: dict[str, Any]) -> list[str]:
        """The human-readable report: machine, the table, notes, caution."""
        lines = [f"boom-advisory {VERSION} benchmark", SAFETY_CAUTION, ""]
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
