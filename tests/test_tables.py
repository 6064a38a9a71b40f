"""Tables: build on a reduced grid, round trip, and answers against direct tracing."""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory import units
from advisory.physics.aircraft import default_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.tables import lookup as lk
from advisory.tables.build import BuildInputs, build_table_arrays, provenance
from advisory.tables.grid import DEFAULT_MACH_EXCESS, GridError, TableGrid, load_grid
from advisory.tables.store import TableFileError, write_table_file
from advisory.tables.table import BoomTable
from advisory.tables.verify import (
    BUDGET_CUTOFF_MACH,
    BUDGET_HALF_WIDTH_REL,
    BUDGET_OVERPRESSURE_REL,
    verify_table,
)

# A reduced grid (the default grid's spacing over a smaller span) keeps CI fast.
REDUCED = TableGrid(
    altitudes_m=tuple(units.ft_to_m(a) for a in range(44000, 48001, 500)),
    mach_excess=DEFAULT_MACH_EXCESS,
    fpa_rad=tuple(math.radians(f) for f in (-2.5, 0.0, 2.5)),
)


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    inputs = BuildInputs(default_aircraft(), standard_atmosphere(), REDUCED)
    arrays = build_table_arrays(inputs, workers=2)
    path = tmp_path_factory.mktemp("tables") / "reduced.boomtable"
    write_table_file(path, provenance(inputs, 0.0), arrays)
    return path, arrays


def test_round_trip_same_arrays(built) -> None:
    path, arrays = built
    table = BoomTable.load(path)
    for name, arr in arrays.items():
        np.testing.assert_array_equal(table.arrays[name], arr)
    assert table.header["aircraft"]["length_m"] == default_aircraft().length_m
    assert table.header["atmosphere"]["kind"] == "ussa1976"
    assert len(table.header["payload_sha256"]) == 64
    assert any("payload SHA-256" in line for line in table.info_lines())


def test_table_refuses_corruption(built, tmp_path) -> None:
    path, _ = built
    bad = tmp_path / "bad.boomtable"
    data = bytearray(path.read_bytes())
    data[len(data) // 2] ^= 0xFF
    bad.write_bytes(bytes(data))
    with pytest.raises(TableFileError, match="SHA-256 mismatch"):
        BoomTable.load(bad)


def test_table_vs_direct_tracing_within_budget(built) -> None:
    # Budgets from the tables issue (half-width 0.5 %, centerline overpressure 1 %,
    # cutoff Mach 0.002), checked against direct tracing at random off-grid points.
    path, _ = built
    report = verify_table(BoomTable.load(path), samples=12, seed=5)
    assert report.half_width_rel_max < BUDGET_HALF_WIDTH_REL, report.lines()
    assert report.overpressure_rel_max < BUDGET_OVERPRESSURE_REL, report.lines()
    assert report.cutoff_abs_max < BUDGET_CUTOFF_MACH, report.lines()


def test_below_cutoff_and_edges(built) -> None:
    path, _ = built
    table = BoomTable.load(path)
    alt = units.ft_to_m(45000.0)
    cut = table.cutoff_mach(alt)
    assert cut == pytest.approx(1.1533, abs=2e-3)  # c(ground)/c(45,000 ft), Snell's law
    assert not table.footprint(alt, cut - 0.01).reaches_ground
    fp = table.footprint(alt, 1.6)
    assert fp.code == lk.OK
    assert np.all(np.isfinite(fp.rows))
    assert fp.rows[0, lk.Q_RIGHT] < 0.0 < fp.rows[-1, lk.Q_RIGHT]
    assert np.all(fp.rows[:, lk.Q_DP] >= 0.0)
    # outside the grid: clamped, said so
    assert table.footprint(units.ft_to_m(60000.0), 2.0).code == lk.CLAMPED


def test_grid_file(tmp_path) -> None:
    f = tmp_path / "grid.toml"
    f.write_text("altitudes_ft = [30000, 40000, 50000]\nfpa_deg = [0]\nn_eta = 11\n")
    g = load_grid(f)
    assert len(g.altitudes_m) == 3 and g.n_eta == 11 and g.fpa_rad == (0.0,)
    f.write_text("altitudes_ft = [40000, 30000]\n")
    with pytest.raises(GridError, match="altitudes"):
        load_grid(f)
    f.write_text("bogus = 1\n")
    with pytest.raises(GridError, match="unknown key"):
        load_grid(f)


def test_table_edge_never_puts_boom_where_direct_trace_has_none(built) -> None:
    # Tables issue: the interpolated cutoff must not put a boom on the ground where the
    # direct trace says there is none, beyond the stated tolerance (0.002 in Mach); since
    # issue 14 (item 4) the lookup errs toward a boom within the near-cutoff band below
    # the table's cutoff, so "no boom" holds from the band's lower end, and the table's
    # cutoff itself stays within the tolerance of the direct trace.
    from advisory.physics.carpet import cutoff_mach
    from advisory.physics.rays import FlightCondition, RayTracer

    path, _ = built
    table = BoomTable.load(path)
    tracer = RayTracer(standard_atmosphere())
    rng = np.random.default_rng(9)
    for _ in range(10):
        alt = rng.uniform(REDUCED.altitudes_m[0], REDUCED.altitudes_m[-1])
        fpa = rng.uniform(REDUCED.fpa_rad[0], REDUCED.fpa_rad[-1])
        direct = cutoff_mach(tracer, FlightCondition(1.5, alt, 0.0, fpa))
        assert abs(table.cutoff_mach(alt, fpa) - direct) < BUDGET_CUTOFF_MACH
        assert not table.footprint(alt, direct - lk.NEAR_CUTOFF_BAND - BUDGET_CUTOFF_MACH,
                                   fpa).reaches_ground
        assert table.footprint(alt, direct + BUDGET_CUTOFF_MACH, fpa).reaches_ground
