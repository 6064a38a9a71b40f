"""Zones on high ground are judged on their own ground (issue 14, item 6).

Before: every zone was judged with the table traced to sea level. For a zone at 5,000 ft
the cutoff Mach falls from 1.153 to 1.133 (50,000 ft, standard atmosphere); at Mach
1.14-1.15 the tool said "no boom" while the plateau got 1.8-2.1 psf, and its advised Mach
1.13 boomed ground above ~6,000 ft. Now each zone's ``ground_elevation_ft`` picks a table
traced to that ground (rounded up to 500 ft), every level judges its own zones in one
projection, and an offered resolution keeps the booms off every level's zones.

References (outside the code under test):
* cutoff Mach in still air, ``M_cut = max c(z) over [ground, aircraft] / c(aircraft)``
  (Snell's law for a stratified medium; Pierce, *Acoustics*, 1989, sec. 8-4), sound
  speeds of the U.S. Standard Atmosphere 1976 from the reference library ``ambiance``;
* the centerline ray's ground offset and travel time, Snell's law integrated with
  ``scipy.integrate.quad``: with the trace speed ``V = M c_a`` and ``cos a = c(z) / V``,
  ``dx/dz = c / sqrt(V^2 - c^2)`` and ``dt/dz = V / (c sqrt(V^2 - c^2))``;
* distances from geographiclib (through the test helpers of ``tests/test_advisor.py``).
"""

from __future__ import annotations

import dataclasses
import json
import math
import socket

import numpy as np
import pytest
from ambiance import Atmosphere as ReferenceAtmosphere
from scipy.integrate import quad

from advisory import units
from advisory.cli import main
from advisory.io.framing import datagram
from advisory.physics.aircraft import default_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.ground_advisor import GroundAdvisor
from advisory.pipeline.ground_levels import LEVEL_STEP_FT, ground_level_m, zone_levels
from advisory.tables import lookup as lk
from advisory.tables.build import BuildInputs, build_table_arrays, provenance
from advisory.tables.grid import DEFAULT_MACH_EXCESS, TableGrid
from advisory.tables.levels import CLEARANCE_M, level_inputs
from advisory.tables.store import write_table_file
from advisory.tables.table import BoomTable
from advisory.tables.verify import inputs_from_table
from tests.test_advisor import point_along, square, state, zoneset

MESA_FT = 6000.0  # the invented plateau's ground elevation
ALT_FT = 50000.0  # pressure altitude flown (FL500)


#: The fixed near-cutoff band and margin only: these tests pin what each ground level sees
#: at Mach numbers 0.01-0.02 under a cutoff; read at the default 95 % confidence the sea
#: level's cutoff lies lower by 1.645 sigma (about 0.017) and its boom may reach too
#: (tests/test_confidence.py).
FIXED = AdvisorConfig(confidence=0.0)


def sound_speed(z_m: float) -> float:
    """U.S. Standard Atmosphere 1976 speed of sound at geometric height ``z_m`` (ambiance)."""
    return float(ReferenceAtmosphere(z_m).speed_of_sound[0])


def closed_form_cutoff(ground_m: float, alt_m: float) -> float:
    """Still-air cutoff Mach (Pierce 1989, sec. 8-4): the largest sound speed between the
    ground and the aircraft over the sound speed at the aircraft."""
    zs = np.linspace(ground_m, alt_m, 400)
    return max(sound_speed(float(z)) for z in zs) / sound_speed(alt_m)


def flown_height_m() -> float:
    """Geometric height of FL500 on a standard day (ambiance: geopotential to geometric,
    the U.S. Standard Atmosphere 1976 relation with its Earth radius 6,356,766 m)."""
    h = units.ft_to_m(ALT_FT)
    r0 = 6356766.0
    return r0 * h / (r0 - h)


def small_inputs() -> BuildInputs:
    return BuildInputs(default_aircraft(), standard_atmosphere(), TableGrid(
        altitudes_m=tuple(units.ft_to_m(a) for a in range(46000, 54001, 500)),
        mach_excess=DEFAULT_MACH_EXCESS, fpa_rad=(0.0,)))


def built(inputs: BuildInputs) -> BoomTable:
    return BoomTable(provenance(inputs, 0.0), build_table_arrays(inputs, workers=2))


@pytest.fixture(scope="module")
def sea_table() -> BoomTable:
    return built(small_inputs())


@pytest.fixture(scope="module")
def mesa_table(sea_table) -> BoomTable:
    return built(level_inputs(inputs_from_table(sea_table), units.ft_to_m(MESA_FT)))


def level_maker(sea_table, mesa_table):
    def make(table, ground_m):
        assert table is sea_table and math.isclose(ground_m, units.ft_to_m(MESA_FT))
        return mesa_table
    return make


def fl500(mach: float):
    c = sound_speed(flown_height_m())
    return state(mach=mach, alt_ft=ALT_FT, gs_kt=mach * c / units.KT)


def settled(adv, st, seconds: float = 3.0):
    """The advisory after stepping ``adv`` on state ``st`` at 10 Hz for ``seconds`` (its
    receive time kept fresh): near the cutoff a first offer waits for the next full search
    to find one too (advisory.pipeline.renewal), so a resolution is read once a renewal
    has come."""
    a = None
    for i in range(int(round(seconds * 10)) + 1):
        now = i / 10.0
        a = adv.step(dataclasses.replace(st, rx_monotonic=now), now)
    return a


def mesa(zone_id: str, distance_km: float, half_km: float = 10.0, elevation_ft=MESA_FT,
         azimuth_deg: float = 90.0, limit_psf: float = 0.0) -> dict:
    f = square(zone_id, *point_along(distance_km * 1e3, azimuth_deg), half_km=half_km,
               limit_psf=limit_psf)
    if elevation_ft is not None:
        f["properties"]["ground_elevation_ft"] = elevation_ft
    return f


def test_ground_levels_round_up_and_unknown_is_the_tables_ground() -> None:
    # engineering choice (ground_levels module notes): up to the next 500 ft, toward a boom
    step = units.ft_to_m(LEVEL_STEP_FT)
    assert ground_level_m(None, 0.0) == 0.0
    assert ground_level_m(units.ft_to_m(-200.0), 0.0) == 0.0
    assert math.isclose(ground_level_m(units.ft_to_m(6000.0), 0.0), 12 * step)
    assert math.isclose(ground_level_m(units.ft_to_m(6001.0), 0.0), 13 * step)
    zs = zoneset(mesa("a", 100), mesa("b", 100, elevation_ft=None), mesa("c", 100, 5,
                                                                         elevation_ft=5800))
    levels = zone_levels(zs, 0.0)
    assert list(levels) == [0.0, pytest.approx(units.ft_to_m(6000.0))]
    assert levels[0.0].tolist() == [False, True, False]
    assert list(levels.values())[1].tolist() == [True, False, True]


def test_level_table_cutoff_and_centerline_match_snell(sea_table, mesa_table) -> None:
    alt = flown_height_m()
    ground = units.ft_to_m(MESA_FT)
    assert min(mesa_table.grid.altitudes_m) >= ground + CLEARANCE_M
    # cutoff Mach within the table budget (0.002): the sea-level table's and the mesa's
    assert abs(sea_table.cutoff_mach(alt) - closed_form_cutoff(0.0, alt)) < 0.002
    assert abs(mesa_table.cutoff_mach(alt) - closed_form_cutoff(ground, alt)) < 0.002
    assert closed_form_cutoff(ground, alt) < 1.14 < closed_form_cutoff(0.0, alt)
    c_a = sound_speed(alt)
    for mach in (1.14, 1.20, 1.40):
        v = mach * c_a
        x, _ = quad(lambda z, v=v: sound_speed(z) / math.sqrt(v * v - sound_speed(z) ** 2),
                    ground, alt, limit=200)
        t, _ = quad(lambda z, v=v: v / (sound_speed(z) * math.sqrt(v * v - sound_speed(z) ** 2)),
                    ground, alt, limit=200)
        fp = mesa_table.footprint(alt, mach)
        centre = fp.rows[fp.rows.shape[0] // 2]
        assert fp.reaches_ground
        assert centre[lk.Q_FWD] == pytest.approx(x, rel=0.01), mach
        assert centre[lk.Q_TIME] == pytest.approx(t, abs=1.0), mach
    # the sea-level table has no boom on the ground at Mach 1.14 (below its cutoff)
    assert not sea_table.footprint(alt, 1.14).reaches_ground


def test_a_zone_on_a_plateau_is_in_conflict_where_sea_level_has_no_boom(
        sea_table, mesa_table) -> None:
    # Mach 1.14 at FL500: above the mesa's cutoff (1.129), below sea level's (1.153)
    zs = zoneset(mesa("highmesa", 90))
    before = GroundAdvisor(sea_table, zs, FIXED).step(fl500(1.14), 0.0)
    assert before.status == "no_boom"  # what every zone got before
    adv = Advisor(sea_table, zs, FIXED, level_tables=level_maker(sea_table, mesa_table))
    a = settled(adv, fl500(1.14))  # 0.011 above the mesa's cutoff: a renewal confirms
    assert a.status not in ("clear", "no_boom", "unavailable"), a
    assert a.zone_id == "highmesa"
    cut = closed_form_cutoff(units.ft_to_m(MESA_FT), flown_height_m())
    assert a.cutoff_mach == pytest.approx(cut, abs=0.002)
    assert a.max_mach_off_ground is not None and a.max_mach_off_ground < cut
    assert a.resolve_mach is not None and a.resolve_mach < cut - lk.NEAR_CUTOFF_BAND
    # below the mesa's cutoff (less the near-cutoff band) nothing reaches it
    a = Advisor(sea_table, zs, FIXED, level_tables=level_maker(sea_table, mesa_table)).step(
        fl500(round(cut - 0.01, 3)), 0.0)
    assert a.status == "no_boom", a


def test_a_sea_level_zone_under_the_plateau_boom_is_not_touched(sea_table,
                                                                mesa_table) -> None:
    # The same place twice: the mesa zone at 6,000 ft, a coastal zone at sea level beside
    # it. At Mach 1.14 the boom reaches the mesa's ground only; the coastal zone sees the
    # mesa's projection through the level mask and is never named.
    zs = zoneset(mesa("highmesa", 90), mesa("lowshore", 90, half_km=9.0, elevation_ft=0.0))
    adv = Advisor(sea_table, zs, FIXED, level_tables=level_maker(sea_table, mesa_table))
    a = adv.step(fl500(1.14), 0.0)
    assert {c.zone_id for c in a.conflicts} == {"highmesa"}
    assert adv.ground_levels_m == (0.0, pytest.approx(units.ft_to_m(MESA_FT)))


def test_a_resolution_for_a_sea_level_zone_keeps_the_plateau_clear(sea_table,
                                                                   mesa_table) -> None:
    # Mach 1.20: a coastal town ahead at sea level, a mesa town further on. A Mach that
    # keeps the boom off sea level (cutoff 1.153) but not off the mesa (1.129) must not
    # be offered: in steady flight above the mesa's cutoff the boom reaches its ground,
    # and the mesa lies ahead within the look-ahead.
    zs = zoneset(mesa("coast", 70, half_km=5.0, elevation_ft=None), mesa("highmesa", 120))
    cut_mesa = closed_form_cutoff(units.ft_to_m(MESA_FT), flown_height_m())
    alone = settled(GroundAdvisor(sea_table, zoneset(mesa("coast", 70, half_km=5.0,
                                                          elevation_ft=None))), fl500(1.2))
    assert alone.zone_id == "coast" and alone.resolve_mach is not None
    assert alone.resolve_mach > cut_mesa  # what was offered before: it booms the mesa
    a = settled(Advisor(sea_table, zs, level_tables=level_maker(sea_table, mesa_table)),
                fl500(1.2))
    assert a.zone_id == "coast"
    assert a.resolve_mach is None or a.resolve_mach < cut_mesa - lk.NEAR_CUTOFF_BAND, a


def plateau_files(tmp_path) -> tuple[str, str]:
    """A zone file with the mesa town 90 km ahead and a state file: level Mach 1.14 at
    FL500 toward it (the files a crew or planner hands ``check``)."""
    zfile = tmp_path / "zones.geojson"
    zfile.write_text(json.dumps({"type": "FeatureCollection",
                                 "features": [mesa("highmesa", 90)]}))
    sfile = tmp_path / "state.json"
    lat, lon = point_along(0.0)
    c = sound_speed(flown_height_m())
    sfile.write_text(json.dumps({"lat_deg": lat, "lon_deg": lon, "alt_ft": ALT_FT,
                                 "mach": 1.14, "heading_deg": 90.0,
                                 "gs_kt": 1.14 * c / units.KT, "bank_deg": 0.0,
                                 "fpa_deg": 0.0}))
    return str(zfile), str(sfile)


def test_check_reports_a_plateau_zone(tmp_path, monkeypatch, capsys, sea_table) -> None:
    # the command as a crew or planner runs it: a table file, a zone file with the
    # zone's ground elevation; the mesa's table is built once into the table cache
    monkeypatch.setenv("BOOM_ADVISORY_CACHE", str(tmp_path / "cache"))
    table = tmp_path / "fl500.boomtable"
    write_table_file(table, sea_table.header, sea_table.arrays)
    zfile, sfile = plateau_files(tmp_path)
    assert main(["check", "--state", sfile, "--zones", zfile, "--table",
                 str(table), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["status"] not in ("clear", "no_boom", "unavailable"), out
    assert out["zone_id"] == "highmesa"
    assert out["conflicts"][0]["ground_ft"] == MESA_FT  # the ground it was judged on
    assert main(["check", "--state", sfile, "--zones", zfile, "--table",
                 str(table)]) == 0
    assert "zone highmesa (Highmesa, ground 6,000 ft)" in capsys.readouterr().out


@pytest.mark.slow
def test_check_with_the_default_table_reports_a_zone_at_6000_ft(tmp_path, capsys) -> None:
    # issue 14's "done when": zone at 6,000 ft, level Mach 1.14 at 50,000 ft (the default
    # table and its 6,000-ft level, built once and cached)
    zfile, sfile = plateau_files(tmp_path)
    assert main(["check", "--state", sfile, "--zones", zfile, "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["status"] not in ("clear", "no_boom", "unavailable"), out
    assert out["zone_id"] == "highmesa"
    assert out["conflicts"][0]["ground_ft"] == MESA_FT  # the ground it was judged on


@pytest.mark.slow
def test_run_service_with_a_zone_on_high_ground_and_a_profile(tmp_path,
                                                             small_table_path) -> None:
    # The live service end to end (real process, UDP on 127.0.0.1): a ridge town at
    # 2,000 ft ahead of the flight and a coastal town at sea level off to the north. The
    # ridge's table is built at start (into the run's table cache), the profile makes
    # every level's table rebuilt off the hot path (tables_stale until each is swapped
    # in), and a stop signal closes the levels' rebuild managers: exit code 0.
    from tests.test_run_e2e import (
        LAT0,
        LON0,
        M_PER_DEG_LON,
        READY_TIMEOUT_S,
        Listener,
        Sender,
        end_run,
        free_udp_port,
        start_run,
        stop,
    )
    from tests.test_run_e2e import square as run_square

    ridge = run_square("ridge", LAT0, LON0 + 130e3 / M_PER_DEG_LON)
    ridge["properties"]["ground_elevation_ft"] = 2000.0
    coast = run_square("coast", LAT0 + 1.5, LON0)
    zfile = tmp_path / "zones.geojson"
    zfile.write_text(json.dumps({"type": "FeatureCollection", "features": [ridge, coast]}))
    profile = tmp_path / "warm_day.csv"  # an invented, warmer-than-standard day, no wind
    profile.write_text("alt_ft,temp_c\n0,25\n36000,-50\n60000,-52\n")
    listener = Listener()
    port = free_udp_port()
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{port}", "--output",
                     listener.url, "--zones", str(zfile), "--table", str(small_table_path),
                     "--profile", str(profile), "--duration-s", "120")
    tx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    sender = Sender(lambda d: tx.sendto(d, ("127.0.0.1", port)), datagram)
    try:
        _, first = listener.wait_for(
            lambda f: f.type == "adv" and f.fields["status"] == "advisory", READY_TIMEOUT_S,
            "an advisory", after=0.0)
        assert first.fields["zone_id"] == "ridge"
        listener.wait_for(lambda f: f.type == "adv" and f.fields["status"] == "advisory"
                          and not f.fields["tables_stale"], 100.0,
                          "advisories on the rebuilt tables")
        code = stop(proc)
    finally:
        end_run(proc, sender, listener)
    assert code == 0, (tmp_path / "run.err").read_text()[-2000:]
    assert "Traceback" not in (tmp_path / "run.err").read_text()


def test_merging_the_levels_advice_errs_toward_the_boom() -> None:
    # the merge rules (advisor module notes; project choices): unavailable wins, then the
    # most severe status names the zone; the lowest cutoff Mach and Mach off the ground;
    # clear over no_boom; every conflict, soonest first
    from advisory.pipeline.advisor import merge_advisories
    from advisory.pipeline.results import Advisory, Conflict

    def conflict(zid: str, t: float) -> Conflict:
        return Conflict(zone_index=0, zone_id=zid, zone_name=zid, time_to_contact_s=t,
                        overpressure_pa=50.0, focus=False)

    sea = Advisory("no_boom", cutoff_mach=1.153, max_mach_off_ground=1.13)
    high = Advisory("caution", zone_id="highmesa", time_to_contact_s=90.0, cutoff_mach=1.129,
                    max_mach_off_ground=1.10, reaches_ground=True, act_by_s=40.0,
                    conflicts=(conflict("highmesa", 90.0),))
    m = merge_advisories([sea, high])
    assert (m.status, m.zone_id, m.cutoff_mach, m.max_mach_off_ground, m.reaches_ground) == (
        "caution", "highmesa", 1.129, 1.10, True)
    quiet = merge_advisories([sea, Advisory("clear", cutoff_mach=1.129, reaches_ground=True)])
    assert quiet.status == "clear" and quiet.cutoff_mach == 1.129
    lost = Advisory("unavailable", reason="zones on 6,000-ft ground: outside the table")
    assert merge_advisories([high, lost]).status == "unavailable"
    early = Advisory("caution", zone_id="coast", time_to_contact_s=60.0, act_by_s=41.0,
                     conflicts=(conflict("coast", 60.0),))
    m = merge_advisories([early, high])
    assert m.zone_id == "coast"  # the same level: the zone met first
    assert [c.zone_id for c in m.conflicts] == ["coast", "highmesa"]


def test_a_level_table_rebuilt_short_of_its_budgets_is_said(sea_table, mesa_table) -> None:
    # A higher ground level's table, rebuilt in flight and verified short of the budgets,
    # is named in the advisor's notes with its ground, as the base table's is (the service
    # puts it in the status reason, ICD 17.2). Before: only the base table's note was read.
    from advisory.tables.manager import TableManager

    mgr = TableManager(mesa_table, level_inputs(inputs_from_table(sea_table),
                                                units.ft_to_m(MESA_FT)))
    try:
        adv = Advisor(sea_table, zoneset(mesa("highmesa", 90)),
                      level_tables=lambda table, ground_m: mgr)
        assert adv.level_table_notes == ""
        mgr.verify_note = "rebuilt table short of its budgets against direct tracing: x"
        assert adv.level_table_notes == ("zones on 6,000-ft ground: rebuilt table short of "
                                         "its budgets against direct tracing: x")
    finally:
        mgr.close()
