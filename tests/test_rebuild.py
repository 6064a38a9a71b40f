"""Runtime rebuild: a new atmosphere is built off the hot path and swapped atomically."""

from __future__ import annotations

import math
import time

import pytest

from advisory import units
from advisory.physics.aircraft import default_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.pipeline.profile import StreamProfile
from advisory.tables.build import BuildInputs, build_table_arrays, provenance
from advisory.tables.grid import TableGrid
from advisory.tables.manager import TableManager
from advisory.tables.store import write_table_file
from advisory.tables.table import BoomTable

TINY = TableGrid(altitudes_m=(units.ft_to_m(44000.0), units.ft_to_m(46000.0)),
                 mach_excess=(0.01, 0.3, 1.0), fpa_rad=(0.0,), n_eta=5)


def tiny_manager(tmp_path) -> TableManager:
    inputs = BuildInputs(default_aircraft(), standard_atmosphere(), TINY)
    path = tmp_path / "tiny.boomtable"
    write_table_file(path, provenance(inputs, 0.0), build_table_arrays(inputs, workers=1))
    return TableManager(BoomTable.load(path), inputs, work_dir=str(tmp_path))


def wait_for_swap(manager: TableManager, timeout_s: float = 120.0) -> bool:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if manager.poll():
            return True
        time.sleep(0.1)
    return False


def test_rebuild_swaps_and_flags_stale_meanwhile(tmp_path) -> None:
    manager = tiny_manager(tmp_path)
    try:
        old = manager.table
        alt = units.ft_to_m(45000.0)
        cut_old = old.cutoff_mach(alt)
        from advisory.pipeline.advisor import Advisor
        from advisory.pipeline.state import AirDataState
        from advisory.pipeline.zones import ZoneSet

        advisor = Advisor(manager, ZoneSet.from_geojson({"type": "FeatureCollection",
                                                         "features": []}))
        manager.submit_atmosphere(standard_atmosphere(temp_offset_k=20.0))
        assert manager.stale and manager.table is old  # still advising on the old table
        s = AirDataState.from_fields(dict(lat_deg=30.0, lon_deg=-140.0, alt_ft=45000.0,
                                          mach=1.6, heading_deg=0.0, gs_kt=900.0,
                                          bank_deg=0.0, fpa_deg=0.0), rx_monotonic=0.0)
        assert advisor.step(s, now_monotonic=0.0).tables_stale
        assert wait_for_swap(manager)
        assert not manager.stale and manager.table is not old
        assert manager.table.header["atmosphere"]["temp_offset_k"] == 20.0
        # Cutoff Mach = c(ground)/c(aircraft) (Snell's law) is unchanged by a uniform
        # offset only to first order; the table must now say what the new atmosphere says.
        hot = standard_atmosphere(temp_offset_k=20.0)
        expect = hot.at(0.0).sound_speed_mps / hot.at(alt).sound_speed_mps
        assert manager.table.cutoff_mach(alt) == pytest.approx(expect, abs=2e-3)
        assert cut_old != manager.table.cutoff_mach(alt)
    finally:
        manager.close()
        manager.close()  # safe twice


def test_watched_profile_file_triggers_rebuild(tmp_path) -> None:
    manager = tiny_manager(tmp_path)
    try:
        profile = tmp_path / "day.csv"
        profile.write_text("alt_ft,temp_c\n0,15\n60000,-56.5\n")
        manager.watch_profile_file(profile)
        assert not manager.poll() and not manager.stale
        time.sleep(0.02)
        profile.write_text("alt_ft,temp_c\n0,30\n60000,-50\n")
        import os
        st = profile.stat()
        os.utime(profile, (st.st_atime, st.st_mtime + 5))
        manager.poll()
        assert manager.stale
        assert wait_for_swap(manager)
        assert manager.table.header["atmosphere"]["kind"] == "profile"
    finally:
        manager.close()


def test_stream_profile_proposes_only_on_disagreement() -> None:
    std = standard_atmosphere()
    same, warm = StreamProfile(enabled=True), StreamProfile(enabled=True)
    for alt_ft in range(30000, 46000, 200):
        z = units.ft_to_m(alt_ft)
        t = std.at(z).temperature_k
        for _ in range(25):
            same.add(z, t, 0.0, 0.0)
            warm.add(z, t + 6.0, 5.0, 0.0)
    assert same.proposal(std, 0.0) is None
    atm = warm.proposal(std, 0.0)
    assert atm is not None and atm.description["source"] == "air-data stream"
    assert atm.at(units.ft_to_m(40000.0)).temperature_k == pytest.approx(
        std.at(units.ft_to_m(40000.0)).temperature_k + 6.0, abs=0.5)
    assert warm.proposal(std, 10.0) is None  # rate-limited
    assert math.isfinite(atm.at(units.ft_to_m(60000.0)).sound_speed_mps)


def test_a_rebuilt_table_is_verified_before_it_is_swapped_in(tmp_path) -> None:
    # Issue 14: "an in-flight rebuild is verified before it is swapped in, else the
    # service says degraded". The tiny grid (5 azimuths, 3 Mach excesses) is far from the
    # budgets of `tables verify` (direct tracing at off-grid conditions): it is swapped in
    # (built for the air now) with the shortfall said.
    from advisory.tables.manager import REBUILD_VERIFY_SAMPLES
    from advisory.tables.verify import BUDGET_HALF_WIDTH_REL

    manager = tiny_manager(tmp_path)
    try:
        assert manager.verify_note == ""  # the table given at start is the user's
        manager.submit_atmosphere(standard_atmosphere(temp_offset_k=10.0))
        assert wait_for_swap(manager)
        report = manager.table.header["verify"]
        assert report["samples"] == REBUILD_VERIFY_SAMPLES
        assert report["within_budget"] is False
        assert report["half_width_rel_max"] > BUDGET_HALF_WIDTH_REL
        assert manager.verify_note.startswith("rebuilt table short of its budgets")
        assert "half-width" in manager.verify_note
    finally:
        manager.close()
