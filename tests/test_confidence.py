"""The advisor's margins from a confidence, not a fixed 0.02 (issue 16).

Why (from the issue): the cutoff Mach moves about 0.002 per K of surface-temperature error
and a realistic tailwind shear moves it by 0.05 or more, yet the advisor's margin was a
fixed 0.02 Mach with no basis and its carpet edge a line with no width.

Independent references:

* Snell's law for level flight in still air (Pierce, *Acoustics*, 1989, sec. 8-4): the
  boom reaches the ground from ``M = c_g / c_a``; with a wind ``u`` along the track the
  effective sound speeds count, ``M = (c_g + u_g - u_a) / c_a``. So ``dM/dT_g = M / (2
  T_g)`` (``c ~ sqrt(T)``, U.S. Standard Atmosphere 1976, eq. 50) and ``dM/du_g = 1 /
  c_a``, the speeds here from the reference library ``ambiance``;
* Monte Carlo: the cutoff Mach of atmospheres drawn from the spread, found by the readable
  bisection (:func:`advisory.physics.carpet.cutoff_mach`), not by the table;
* the normal distribution of ``scipy.stats``.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from ambiance import Atmosphere as Reference
from scipy.stats import norm

from advisory import units
from advisory.cli import main
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.carpet import cutoff_mach
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.physics.spread import NODES_M, SpreadError, default_spread, load_ensemble, perturbed
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig
from advisory.tables.spread_table import SPREAD_ARRAYS
from advisory.tables.store import TableFileError
from advisory.tables.table import BoomTable
from tests.test_advisor import ALT_FT, point_along, square, state, zoneset
from tests.test_pressure_altitude import standard_day_height_m


def _height_m() -> float:
    return standard_day_height_m(units.ft_to_m(ALT_FT))


@pytest.fixture(scope="module")
def direct():
    """(direct cutoff Mach, Monte Carlo sigma of it) at the test's height, default spread."""
    z = _height_m()
    atm = standard_atmosphere()
    fc = FlightCondition(1.5, z)
    cut = cutoff_mach(RayTracer(atm), fc)
    fields = default_spread().sample(np.random.default_rng(7), z, 300)
    cuts = np.array([cutoff_mach(RayTracer(perturbed(atm, d)), fc) for d in fields])
    return cut, float(cuts.std(ddof=1))


def test_table_derivatives_match_snells_law(small_table):
    z = _height_m()
    n = NODES_M.size
    j = small_table.spread.jacobian(z, 0.0, 0.0)  # heading north: wind north is along
    c_g = float(Reference(0.0).speed_of_sound[0])
    c_a = float(Reference(z).speed_of_sound[0])
    t_g = float(Reference(0.0).temperature[0])
    m_c = c_g / c_a
    # a hat at the ground node: the ground's own value moves by the whole step
    assert j[0] == pytest.approx(m_c / (2.0 * t_g), rel=0.01)  # ~0.002 per K (the issue)
    assert j[2 * n] == pytest.approx(1.0 / c_a, rel=0.01)  # per m/s of tailwind at ground
    assert 15.0 * j[2 * n] > 0.05  # a 15 m/s tailwind shear: the 0.05 and more


def test_cutoff_sigma_agrees_with_monte_carlo(small_table, direct):
    cut, sd = direct
    z = _height_m()
    sigma = small_table.spread.cutoff_sigma(default_spread().covariance(z), z, 0.0, 0.0)
    assert sigma == pytest.approx(sd, rel=0.12)  # 300 draws: the sample sd +-4 %


def test_advisor_reads_the_cutoff_at_its_confidence(small_table, direct):
    cut, sd = direct
    lat, lon = point_along(400e3)  # a zone far ahead: the carpet itself is the question
    zones = zoneset(square("far", lat, lon))
    mach = cut - 0.010  # below cutoff: before, "no boom"
    on = Advisor(small_table, zones).step(state(mach=mach), now_monotonic=0.0)
    off = Advisor(small_table, zones, AdvisorConfig(confidence=0.0)).step(
        state(mach=mach), now_monotonic=0.0)
    assert off.status == "no_boom" and not off.reaches_ground
    assert on.status == "clear" and on.reaches_ground  # 0.010 < 1.645 sigma: may reach
    assert on.near_cutoff and "BOOM MAY REACH" in on.cue and not off.near_cutoff
    assert on.cutoff_sigma == pytest.approx(sd, rel=0.12)
    assert on.boom_probability == pytest.approx(norm.cdf(-0.010 / sd), abs=0.04)
    # the Mach kept off the ground: cutoff less z sigma, rounded down to 0.01
    want = cut - norm.ppf(0.95) * sd
    assert want - 0.012 <= on.max_mach_off_ground <= want + 0.002
    assert off.max_mach_off_ground == math.floor(100 * (off.cutoff_mach - 0.02) + 1e-9) / 100


def test_higher_confidence_keeps_a_lower_mach(small_table, direct):
    cut, _ = direct
    zones = zoneset(square("far", *point_along(400e3)))
    got = [Advisor(small_table, zones, AdvisorConfig(confidence=c)).step(
        state(mach=cut + 0.1), now_monotonic=0.0).max_mach_off_ground for c in (0.6, 0.95, 0.999)]
    assert got[0] >= got[1] >= got[2] and got[0] > got[2]


def test_a_table_without_sensitivities_keeps_the_fixed_margin(small_table_path, tmp_path):
    from advisory.tables.store import read_table_file, write_table_file
    header, arrays = read_table_file(small_table_path)
    arrays = {k: np.array(v) for k, v in arrays.items() if k not in SPREAD_ARRAYS}
    old = tmp_path / "old.boomtable"
    write_table_file(old, {k: v for k, v in header.items() if k not in (
        "arrays", "payload_sha256", "payload_nbytes", "format_version")}, arrays)
    tb = BoomTable.load(old)
    assert tb.spread is None
    assert any("cutoff sensitivities: none" in line for line in tb.info_lines())
    a = Advisor(tb, zoneset(square("far", *point_along(400e3)))).step(
        state(mach=1.6), now_monotonic=0.0)
    assert a.cutoff_sigma is None and a.boom_probability is None
    assert a.max_mach_off_ground == math.floor(100 * (a.cutoff_mach - 0.02) + 1e-9) / 100


def test_tables_with_broken_sensitivities_are_refused(small_table_path, tmp_path):
    from advisory.tables.store import read_table_file, write_table_file
    header, arrays = read_table_file(small_table_path)
    head = {k: v for k, v in header.items() if k not in (
        "arrays", "payload_sha256", "payload_nbytes", "format_version")}
    part = {k: np.array(v) for k, v in arrays.items() if k != "cutoff_sens_nodes_m"}
    write_table_file(tmp_path / "a.boomtable", head, part)
    with pytest.raises(TableFileError, match="cutoff_sens_nodes_m"):
        BoomTable.load(tmp_path / "a.boomtable")
    moved = {k: np.array(v) for k, v in arrays.items()}
    moved["cutoff_sens_nodes_m"] = moved["cutoff_sens_nodes_m"] + 1.0
    write_table_file(tmp_path / "b.boomtable", head, moved)
    with pytest.raises(TableFileError, match="nodes"):
        BoomTable.load(tmp_path / "b.boomtable")


def test_ensemble_file_gives_its_members_covariance(tmp_path):
    # three members 1 K apart at every level, no wind: sample variance 1 K^2 (N - 1)
    rows = ["member,alt_ft,temp_c"]
    for k, off in (("a", -1.0), ("b", 0.0), ("c", 1.0)):
        rows += [f"{k},{a},{t + off}" for a, t in ((0, 15.0), (36000, -56.5), (80000, -56.5))]
    path = tmp_path / "ens.csv"
    path.write_text("\n".join(rows) + "\n")
    m = load_ensemble(path)
    n = NODES_M.size
    assert np.allclose(m.background[:n, :n], 1.0, atol=1e-6)
    assert np.allclose(m.background[n:, n:], 0.0, atol=1e-9)
    (tmp_path / "two.csv").write_text("member,alt_ft,temp_c\na,0,15\na,80000,-60\n"
                                      "b,0,16\nb,80000,-59\n")
    with pytest.raises(SpreadError, match="needs at least 3"):
        load_ensemble(tmp_path / "two.csv")


def test_spread_at_flight_level_is_the_measurement(small_table):
    m = default_spread()
    z = 16000.0  # a node: between nodes the field (and its spread) is interpolated
    t_a, w_a = m.sigma_at(z, z)
    t_g, w_g = m.sigma_at(z, 0.0)
    assert t_a == pytest.approx(1.0) and w_a == pytest.approx(1.5)  # the air data's error
    assert t_g == pytest.approx(2.0) and w_g == pytest.approx(2.0)  # the default spread


def test_predict_json_carries_the_intervals(capsys):
    code = main(["predict", "--mach", "1.6", "--altitude-ft", "50000", "--json",
                 "--spread-samples", "60"])
    assert code == 0
    f = json.loads(capsys.readouterr().out)
    lo, hi = f["cutoff_mach_interval"]
    assert lo < f["cutoff_mach"] < hi
    assert f["boom_probability"] == pytest.approx(1.0, abs=1e-6)
    left = f["carpet_half_width_interval_km"]["left"]
    assert left[0] < f["carpet_half_width_left_km"] < left[1]
    assert "advisory aid" in f["caution"]


@pytest.mark.parametrize("argv, word", [
    (["--confidence", "1.5"], "--confidence"),
    (["--spread-samples", "5"], "--spread-samples"),
    (["--wind-sigma-kt", "-3"], "--wind-sigma-kt"),
    (["--ensemble", "x.csv", "--wind-sigma-kt", "5"], "--wind-sigma-kt"),
])
def test_bad_spread_options_get_one_line_and_exit_2(capsys, argv, word):
    code = main(["predict", "--mach", "1.6", "--altitude-ft", "50000"] + argv)
    assert code == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and word in err[0]


def test_the_advisory_frame_carries_the_probability_only_when_known(small_table):
    # ICD section 5 key 17 (issue 16), a compatible optional key under section 7
    from advisory.io.messages import decode_frame, encode_adv
    base = {"status": "clear", "cue": "BOOM ON GROUND, ZONES CLEAR"}
    assert encode_adv(dict(base, boom_probability=None), 1, 0.0) == encode_adv(base, 1, 0.0)
    f = decode_frame(encode_adv(dict(base, boom_probability=0.37), 1, 0.0))
    assert f.fields["boom_probability"] == 0.37
    assert decode_frame(encode_adv(base, 1, 0.0)).fields["boom_probability"] is None
    a = Advisor(small_table, zoneset(square("far", *point_along(400e3)))).step(
        state(mach=1.6), now_monotonic=0.0)
    assert a.to_fields()["boom_probability"] == 1.0  # far above cutoff


def test_spread_campaign_draws_truths_of_the_assumed_size():
    # campaign --spread: the advisor is given the planning air; the truth is that air plus
    # an error drawn from the default spread (surface temperature sigma 2.0 K, wind 2.0 m/s
    # per component at the ground: the module's stated defaults). Over 300 encounters the
    # sample standard deviation must be within its own sampling error (+-8 % at 300).
    from advisory.bench.campaign_sample import sample_encounter
    from advisory.bench.sim_scenario import AirSpec
    from advisory.bench.sim_world import atmosphere_of
    dt, de = [], []
    for i in range(300):
        doc = sample_encounter(5, i, spread=True).doc
        assert doc["advisor"]["atmosphere"]  # the planning air is given explicitly
        truth = atmosphere_of(AirSpec(levels=tuple(tuple(r) for r in doc["atmosphere"]["levels"])),
                              "truth").at(0.0)
        plan = doc["advisor"]["atmosphere"]
        base = (atmosphere_of(AirSpec(levels=tuple(tuple(r) for r in plan["levels"])), "plan")
                if "levels" in plan else standard_atmosphere(plan.get("isa_offset_c", 0.0)))
        dt.append(truth.temperature_k - base.at(0.0).temperature_k)
        de.append(truth.wind_east_mps - base.at(0.0).wind_east_mps)
    assert np.std(dt, ddof=1) == pytest.approx(2.0, rel=0.12)
    assert np.std(de, ddof=1) == pytest.approx(2.0, rel=0.12)
    assert abs(np.mean(dt)) < 3 * 2.0 / math.sqrt(300)
    again = sample_encounter(5, 7, spread=True).doc
    assert again == sample_encounter(5, 7, spread=True).doc  # deterministic by seed


def test_lookup_band_parity_with_the_twin(small_table):
    # the lookups' band below the cutoff (issue 16): kernel and readable twin agree, and a
    # boom counts down to the band and not below it
    from advisory.tables import lookup as lk
    from tests.twins.lookup import lookup_twin
    tb = small_table
    z = _height_m()
    args = (tb.ax_alt, tb.ax_mex, tb.ax_fpa, tb.ax_hdg, tb.cutoff, tb.cells)
    out = np.zeros((tb.eta.size, lk.N_QUANTITIES))
    twin = np.zeros_like(out)
    _, cut = lk.lookup_kernel(z, 0.0, 0.0, 0.0, *args, out)
    for dm, reaches in ((-0.019, False), (-0.017, True), (-0.005, True), (0.01, True)):
        code, _ = lk.lookup_kernel(z, cut + dm, 0.0, 0.0, *args, out, 0.018)
        tcode, _ = lookup_twin(z, cut + dm, 0.0, 0.0, *args, twin, 0.018)
        assert code == tcode and (code != lk.NO_BOOM) is reaches, dm
        if reaches:
            assert np.allclose(out, twin, rtol=1e-12, atol=1e-9)


def test_check_keeps_the_configs_confidence_unless_told(tmp_path, small_table_path, capsys):
    # a config with confidence 0 (the fixed margin) is not overridden by check's default
    cfg = tmp_path / "fixed.toml"
    cfg.write_text("[confidence]\nconfidence = 0\n")
    sfile = tmp_path / "state.json"
    st = state(mach=1.6)
    sfile.write_text(json.dumps({"lat_deg": math.degrees(st.lat_rad),
                                 "lon_deg": math.degrees(st.lon_rad), "alt_ft": ALT_FT,
                                 "mach": 1.6, "heading_deg": 90.0,
                                 "gs_kt": units.mps_to_kt(st.gs_mps), "bank_deg": 0.0,
                                 "fpa_deg": 0.0}))
    zfile = tmp_path / "zones.geojson"
    zfile.write_text(json.dumps({"type": "FeatureCollection",
                                 "features": [square("far", *point_along(400e3))]}))
    base = ["check", "--state", str(sfile), "--zones", str(zfile), "--table",
            str(small_table_path), "--json", "--spread-samples", "0"]
    assert main(base + ["--config", str(cfg)]) == 0
    fixed = json.loads(capsys.readouterr().out)
    cut = fixed["cutoff_mach"]
    assert fixed["max_mach_off_ground"] == math.floor(100 * (cut - 0.02) + 1e-9) / 100
    assert fixed["cutoff_mach_interval"][0] is not None  # the command's intervals still are
    assert main(base + ["--config", str(cfg), "--confidence", "0.95"]) == 0
    told = json.loads(capsys.readouterr().out)
    want = math.floor(100 * (cut - norm.ppf(0.95) * told["cutoff_mach_sigma"]) + 1e-9) / 100
    assert told["max_mach_off_ground"] == want
