"""Smoke test of the benchmark (``boom-advisory bench``, ``benchmarks/run.py``).

``--quick`` runs every section with tiny sizes on a tiny table grid; the tests check the
shape of the output (one line per budget, the machine, the caution), never a timing:
speed is measured by the benchmark, not asserted in tests (project rule). The budgets
themselves are the issues' engineering targets (common practice, no source).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from advisory.bench.budgets import BUDGETS
from advisory.cli import EXIT_USAGE, main
from advisory.schema import SAFETY_CAUTION

ROOT = Path(__file__).resolve().parent.parent
STATUS_PREFIXES = ("pass", "short", "not measured (")


@pytest.fixture(scope="module")
def work_dir(tmp_path_factory) -> Path:
    """One work directory for the module, so later runs reuse the quick table."""
    return tmp_path_factory.mktemp("bench")


def _table_rows(out: str) -> list[list[str]]:
    """The cells of the printed table's rows (between the rule line and the blank)."""
    lines = out.splitlines()
    start = next(i for i, ln in enumerate(lines) if ln.startswith("budget ") and "|" in ln)
    assert set(lines[start + 1]) <= {"-", "+"}, lines[start + 1]
    rows = []
    for ln in lines[start + 2:]:
        if not ln.strip():
            break
        rows.append([c.strip() for c in ln.split("|")])
    return rows


def test_quick_run_prints_one_line_per_budget(work_dir: Path, capsys) -> None:
    code = main(["bench", "--quick", "--work-dir", str(work_dir)])
    out = capsys.readouterr().out
    assert code == 0
    rows = _table_rows(out)
    assert all(len(r) == 4 for r in rows), rows
    budget_rows = [r for r in rows if r[2] != "-"]
    assert len(budget_rows) == len(BUDGETS)
    # each budget's limit is printed on its own line, in order
    assert [r[2] for r in budget_rows] == [b.limit_text for b in BUDGETS]
    for r in rows:
        assert r[3].startswith(STATUS_PREFIXES + ("info",)), r
        assert (r[1] == "-") == r[3].startswith("not measured"), r
    by_name = {r[0]: r for r in budget_rows}
    # sections whose modules are in place measure a figure (the bench's own code runs)
    for name in ("table build, quick grid", "footprint lookup (31 azimuths)",
                 "table vs direct tracing", "decode + validate, one core"):
        assert by_name[name][3] in ("pass", "short"), by_name[name]
    assert out.count("machine: ") >= 3
    assert "numpy" in out and "numba" in out and "Python" in out and "cores" in out
    assert SAFETY_CAUTION in out
    assert (work_dir / "quick-grid.boomtable").is_file()


def test_json_with_skip_build_reuses_the_cache(work_dir: Path, capsys) -> None:
    code = main(["bench", "--quick", "--work-dir", str(work_dir), "--skip-build", "--json",
                       "--only", "lookup,decode"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0
    budgets = [r for r in doc["results"] if r["budget"]]
    assert [r["key"] for r in budgets] == [b.key for b in BUDGETS]
    status = {r["key"]: r["status"] for r in budgets}
    assert status["table_build_s"].startswith("not measured (--skip-build")
    assert status["step_median_ms"] == "not measured (not selected)"
    assert status["lookup_us"] in ("pass", "short")
    assert status["decode_fps"] in ("pass", "short")
    for key in ("cpu", "cores", "ram_gib", "python", "numpy", "numba", "os"):
        assert key in doc["machine"], key
    assert doc["caution"] == SAFETY_CAUTION


def test_bad_section_name_is_a_usage_error(capsys) -> None:
    assert main(["bench", "--only", "lookup,warp"]) == EXIT_USAGE
    err = capsys.readouterr().err
    assert "--only" in err and "warp" in err


def test_script_runs_from_the_repository(work_dir: Path) -> None:
    proc = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "run.py"), "--quick", "--skip-build",
         "--work-dir", str(work_dir), "--only", "decode", "--json"],
        capture_output=True, text=True, timeout=120, cwd=str(ROOT),
    )
    assert proc.returncode == 0, proc.stderr
    doc = json.loads(proc.stdout)
    assert len([r for r in doc["results"] if r["budget"]]) == len(BUDGETS)
