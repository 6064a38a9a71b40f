"""`tables build|info|verify` and `predict --table` as a user runs them."""

from __future__ import annotations

import contextlib
import io
import json

import pytest

from advisory.cli import main
from advisory.schema import SAFETY_CAUTION


@pytest.fixture(scope="module")
def tiny_build(tmp_path_factory):
    """A tiny table built by the command; returns its path and what the command printed."""
    d = tmp_path_factory.mktemp("cli")
    grid = d / "grid.toml"
    grid.write_text("altitudes_ft = [44000, 44500, 45000, 45500, 46000]\nfpa_deg = [0]\n")
    out = d / "tiny.boomtable"
    printed = io.StringIO()
    with contextlib.redirect_stdout(printed):
        code = main(["tables", "build", "--grid", str(grid), "--workers", "2", "-o", str(out)])
    assert code == 0
    return out, printed.getvalue()


@pytest.fixture(scope="module")
def tiny_table(tiny_build):
    return tiny_build[0]


def test_build_names_the_file_and_carries_the_caution(tiny_build) -> None:
    path, text = tiny_build
    assert f"wrote {path}" in text
    assert text.rstrip().endswith(SAFETY_CAUTION)


def test_build_info(tiny_table, capsys) -> None:
    assert main(["tables", "info", str(tiny_table)]) == 0
    text = capsys.readouterr().out
    assert "payload SHA-256" in text and "Tarnwick" in text and "ussa1976" in text
    assert "advisory aid" in text


def test_verify_prints_every_budget(tiny_table, capsys) -> None:
    code = main(["tables", "verify", str(tiny_table), "--samples", "4"])
    text = capsys.readouterr().out
    assert code in (0, 1)
    for name in ("carpet half-width", "centerline overpressure", "cutoff Mach"):
        assert name in text


def test_predict_from_table_agrees_with_direct_tracing(tiny_table, capsys) -> None:
    # The table answers for the same condition as direct tracing (tables issue budgets:
    # half-width 0.5 %, centerline overpressure 1 %, cutoff 0.002).
    args = ["predict", "--mach", "1.7", "--altitude-ft", "45250", "--json"]
    assert main(args) == 0
    direct = json.loads(capsys.readouterr().out)
    assert main([*args, "--table", str(tiny_table)]) == 0
    table = json.loads(capsys.readouterr().out)
    assert table["source"].startswith("table")
    assert table["cutoff_mach"] == pytest.approx(direct["cutoff_mach"], abs=0.002)
    assert table["carpet_width_km"] == pytest.approx(direct["carpet_width_km"], rel=0.005)
    assert table["centerline_overpressure_psf"] == pytest.approx(
        direct["centerline_overpressure_psf"], rel=0.01)
    assert len(table["lateral_profile"]) == 31


def test_table_refusals_are_clear(tiny_table, tmp_path, capsys) -> None:
    bad = tmp_path / "bad.boomtable"
    data = bytearray(tiny_table.read_bytes())
    data[-7] ^= 0x10
    bad.write_bytes(bytes(data))
    assert main(["tables", "info", str(bad)]) == 2
    assert "SHA-256 mismatch" in capsys.readouterr().err
    assert main(["predict", "--mach", "2", "--altitude-ft", "45000", "--table",
                 str(tiny_table), "--temp-offset-c", "5"]) == 2
    assert "--temp-offset-c" in capsys.readouterr().err
    assert main(["predict", "--mach", "2", "--altitude-ft", "45000", "--bank-deg", "85"]) == 2
    assert "--bank-deg" in capsys.readouterr().err


@pytest.mark.parametrize("extra", [["--bank-deg", "30"], ["--bank-deg", "-45"],
                                   ["--load-factor", "2"]])
def test_predict_banked_or_loaded_from_table_agrees_with_direct_tracing(tiny_table, capsys,
                                                                        extra) -> None:
    # Bank tilts the lift, load factor scales it (issue 14, item 7): the table's lift map
    # against direct tracing with the lift ``n W cos(phi + bank)`` on every ray (issue 14's
    # done-when: within 2 % across the carpet). Before: refused with --table, and direct
    # tracing scaled the lift without tilting it.
    args = ["predict", "--mach", "1.6", "--altitude-ft", "45250", "--json", *extra]
    assert main(args) == 0
    direct = json.loads(capsys.readouterr().out)
    assert main([*args, "--table", str(tiny_table)]) == 0
    table = json.loads(capsys.readouterr().out)
    assert main(["predict", "--mach", "1.6", "--altitude-ft", "45250", "--json"]) == 0
    level = json.loads(capsys.readouterr().out)
    got = [p["overpressure_psf"] for p in table["lateral_profile"] if not p["edge"]]
    want = [p["overpressure_psf"] for p in direct["lateral_profile"] if not p["edge"]]
    steady = [p["overpressure_psf"] for p in level["lateral_profile"] if not p["edge"]]
    assert len(got) == len(want) >= 20
    assert max(abs(g / w - 1.0) for g, w in zip(got, want, strict=True)) > 0.0
    for g, w in zip(got, want, strict=True):
        assert g == pytest.approx(w, rel=0.02)
    assert max(abs(w / s - 1.0) for w, s in zip(want, steady, strict=True)) > 0.05


def test_hidden_tables_alias_is_the_table_option(tiny_table, capsys) -> None:
    # One spelling per option: `--table`; the old `--tables` still works but is not shown.
    args = ["predict", "--mach", "1.7", "--altitude-ft", "45250", "--json"]
    assert main([*args, "--table", str(tiny_table)]) == 0
    spelled = json.loads(capsys.readouterr().out)
    assert main([*args, "--tables", str(tiny_table)]) == 0
    assert json.loads(capsys.readouterr().out) == spelled
    with pytest.raises(SystemExit) as exit_info:
        main(["predict", "--help"])
    assert exit_info.value.code == 0
    help_text = capsys.readouterr().out
    assert "--table " in help_text and "--tables" not in help_text


@pytest.mark.parametrize("extra, needle", [
    (["--aircraft", "any.toml"], "--aircraft"),
    (["--temp-offset-c", "5"], "--temp-offset-c"),
    (["--atmosphere", "any.csv"], "--atmosphere"),
])
def test_table_fixes_aircraft_and_atmosphere(tiny_table, capsys, extra, needle) -> None:
    argv = ["predict", "--mach", "2", "--altitude-ft", "45000", "--table", str(tiny_table)]
    assert main([*argv, *extra]) == 2
    err = capsys.readouterr().err.strip()
    assert needle in err and len(err.splitlines()) == 1
