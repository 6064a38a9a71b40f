"""The `predict` command as a user runs it."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from advisory.cli import main
from advisory.schema import SAFETY_CAUTION

REQUIRED = (
    "cutoff_mach", "reaches_ground", "lateral_cutoff_deg", "carpet_half_width_left_km",
    "carpet_half_width_right_km", "carpet_width_km", "centerline_ground_offset_km",
    "centerline_travel_time_s",
)


def run_json(capsys, *argv: str) -> dict:
    assert main(["predict", *argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_issue_example_prints_required_fields(capsys) -> None:
    out = run_json(capsys, "--mach", "2.0", "--altitude-ft", "60000")
    for key in REQUIRED:
        assert key in out
    assert out["reaches_ground"] is True
    assert out["carpet_width_km"] == pytest.approx(
        out["carpet_half_width_left_km"] + out["carpet_half_width_right_km"], abs=0.01)
    assert out["caution"] == SAFETY_CAUTION


def test_below_cutoff_is_not_an_error(capsys) -> None:
    out = run_json(capsys, "--mach", "1.05", "--altitude-ft", "40000")
    assert out["reaches_ground"] is False
    assert out["carpet_width_km"] == 0.0
    sub = run_json(capsys, "--mach", "0.9", "--altitude-ft", "30000")
    assert sub["reaches_ground"] is False


def test_readable_summary_carries_the_caution(capsys) -> None:
    assert main(["predict", "--mach", "1.6", "--altitude-ft", "45000"]) == 0
    text = capsys.readouterr().out
    assert "Carpet width" in text and SAFETY_CAUTION in text


@pytest.mark.parametrize(
    "argv, needle",
    [
        (["--mach", "0", "--altitude-ft", "40000"], "--mach"),
        (["--mach", "-1", "--altitude-ft", "40000"], "--mach"),
        (["--mach", "nan", "--altitude-ft", "40000"], "--mach"),
        (["--mach", "2", "--altitude-ft", "1000", "--ground-elevation-ft", "2000"],
         "--altitude-ft"),
        (["--mach", "2", "--altitude-ft", "inf"], "--altitude-ft"),
        (["--mach", "2", "--altitude-ft", "40000", "--atmosphere", "missing.csv"],
         "missing.csv"),
    ],
)
def test_bad_arguments_exit_2_naming_the_argument(capsys, argv, needle) -> None:
    assert main(["predict", *argv]) == 2
    err = capsys.readouterr().err.strip()
    assert needle in err
    assert len(err.splitlines()) == 1


def test_console_command_runs() -> None:
    # The installed entry point, as a newcomer runs it.
    proc = subprocess.run(
        [sys.executable, "-m", "advisory.cli", "predict", "--mach", "2.0", "--altitude-ft",
         "60000", "--json"], capture_output=True, text=True, timeout=120, check=False)
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["reaches_ground"] is True


def squeezed(text: str) -> str:
    """``text`` without white space (argparse wraps help lines, also at hyphens)."""
    return "".join(text.split())


def test_help_lists_every_command_with_the_caution(capsys) -> None:
    with pytest.raises(SystemExit) as exit_info:
        main(["--help"])
    assert exit_info.value.code == 0
    text = capsys.readouterr().out
    for command in ("predict", "tables", "check", "run", "bench", "replay", "demo"):
        assert command in text
    assert squeezed(SAFETY_CAUTION) in squeezed(text)
    with pytest.raises(SystemExit):
        main(["predict", "--help"])
    assert squeezed(SAFETY_CAUTION) in squeezed(capsys.readouterr().out)


def test_unknown_option_exits_2(capsys) -> None:
    # argparse's own refusals keep exit code 2 (the argparse convention, no source).
    with pytest.raises(SystemExit) as exit_info:
        main(["predict", "--mach", "2", "--altitude-ft", "60000", "--speed", "3"])
    assert exit_info.value.code == 2
    assert "--speed" in capsys.readouterr().err


def test_computation_is_importable_without_the_cli() -> None:
    # The computation behind `predict` is a plain function of a plain dataclass. The
    # standard atmosphere's cutoff Mach at 60,000 ft lies well below 2 (about 1.15-1.2,
    # value from memory), so the boom reaches the ground.
    from advisory.bench.steady_carpet import PredictInputs, predict_direct

    res = predict_direct(PredictInputs(mach=2.0, altitude_ft=60000.0))
    assert res.carpet.reaches_ground
    assert 1.0 < res.carpet.cutoff_mach < 2.0
    assert res.source == "direct tracing"
