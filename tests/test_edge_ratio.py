"""Issue 16, items 2 and 3: the carpet's edge at a confidence and each conflict's
probability of reaching its zone, against direct tracing of atmospheres drawn from the
spread.

Sources: the spread is the default one of :mod:`advisory.physics.spread` (its own sources
and engineering choices named there); the truth is the readable ray tracer
(:func:`advisory.physics.carpet.compute_carpet`, itself checked against Snell's law and
``ambiance`` in ``tests/test_carpet.py``), never the builder's compiled column that
samples the table's ratio; the atmospheres are drawn independently (plain Monte Carlo,
another seed) of the table's Latin-hypercube draws. Tolerances: binomial (``scipy``).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import binom
from shapely.geometry import LineString, Point

from advisory import units
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.carpet import compute_carpet, cutoff_mach
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.physics.spread import default_spread, perturbed
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.confidence import boom_probability
from advisory.pipeline.config import AdvisorConfig, ConfigError
from advisory.pipeline.edge_spread import (
    PresentSpread,
    present_edge,
    reach_given_ground,
    section_nearest_kernel,
)
from advisory.tables import lookup as lk
from advisory.tables.edge_ratio import EDGE_ARRAYS
from advisory.tables.store import TableFileError, read_table_file, write_table_file
from advisory.tables.table import BoomTable
from tests.test_advisor import ALT_FT, GEOD, point_along, square, state, zoneset
from tests.test_pressure_altitude import standard_day_height_m
from tests.test_zones import pack, random_zone, to_shapely
from tests.twins.edge_spread import section_nearest_twin
from tests.twins.lookup import stretch_row_twin

DRAWS = 2000


def _height_m() -> float:
    return standard_day_height_m(units.ft_to_m(ALT_FT))


def _rows(tb: BoomTable, mach: float) -> tuple[np.ndarray, float]:
    out = np.zeros((tb.eta.size, lk.N_QUANTITIES))
    code, cut = lk.lookup_kernel(_height_m(), mach, 0.0, 0.0, tb.ax_alt, tb.ax_mex, tb.ax_fpa,
                                 tb.ax_hdg, tb.cutoff, tb.cells, out)
    assert code != lk.NO_BOOM
    return out, cut


def test_stretch_row_parity_with_the_twin(small_table) -> None:
    tb = small_table
    rng = np.random.default_rng(4)
    stretch = np.array([[0.005, 0.02, 0.1, 0.4], [3.0, 1.9, 1.7, 1.6], [2.5, 1.8, 0.9, 1.5]])
    for _ in range(20):
        base, cut = _rows(tb, 1.2 + rng.uniform(0.0, 0.6))
        mex = float(rng.uniform(-0.01, 0.5))
        fast, slow = base.copy(), base.copy()
        lk.stretch_row(fast, mex, stretch, 2, 12)
        stretch_row_twin(slow, mex, stretch, 2, 12)
        assert np.allclose(fast, slow, rtol=1e-12, atol=1e-9)
    base, _ = _rows(tb, 1.6)
    same = base.copy()
    lk.stretch_row(same, 0.1, np.zeros((3, 0)), 2, 12)
    assert np.array_equal(same, base)


def test_the_cross_section_nearest_a_zone_against_the_twin_and_shapely() -> None:
    """The point of an emission's cross-section nearest a zone (the probability's ``y``):
    the compiled walk against its readable twin, and the distance against ``shapely``'s
    distance from the walked polyline (GEOS, an independent geometry library)."""
    rng = np.random.default_rng(21)
    zones = [random_zone(rng, rng.uniform(-40, 40), rng.uniform(-40, 40), rng.uniform(2, 12),
                         multipart=bool(k % 3 == 0)) for k in range(6)]
    x, y, rs, ps, zs, bbox, _ = pack(zones)
    geoms = [to_shapely(z) for z in zones]
    n_eta = 31
    strips = np.array([0, 4, 8, 12, 15, 18, 22, 26, 30], dtype=np.int64)
    checked = 0
    for _ in range(40):
        # a cross-section: rays fanned across a heading, some edge rays without a boom
        hdg = rng.uniform(0.0, 2.0 * math.pi)
        right = np.linspace(-60.0, 60.0, n_eta) * rng.uniform(0.3, 1.0)
        ahead = rng.uniform(-5.0, 5.0) + 0.002 * right ** 2
        e0, n0 = rng.uniform(-30.0, 30.0, 2)
        east = e0 + ahead * math.sin(hdg) + right * math.cos(hdg)
        north = n0 + ahead * math.cos(hdg) - right * math.sin(hdg)
        cut = int(rng.integers(0, 3))
        if cut:
            east[:cut] = np.nan
            east[n_eta - cut:] = np.nan
        for k, geom in enumerate(geoms):
            got = section_nearest_kernel(east, north, right, strips, x, y, rs, ps, zs, bbox,
                                         k)
            twin = section_nearest_twin(east, north, right, strips, x, y, rs, ps, zs, k)
            assert got[0] == pytest.approx(twin[0], abs=1e-9)
            walked = [int(j) for j in strips if np.isfinite(east[j])]
            ref = geom.distance(LineString(list(zip(east[walked], north[walked]))))
            assert got[0] == pytest.approx(ref, abs=1e-9)
            if got[0] > 0.0:
                assert got[2] == twin[2]
                seg = abs(right[1] - right[0]) * 4.0  # one strip's width
                assert got[1] == pytest.approx(twin[1], abs=seg * 1e-6)
                checked += 1
    assert checked > 100


def test_the_widened_edge_holds_the_tables_outer_strip(small_table) -> None:
    # the table's edge point lies on the widened outer strip (shapely), every other ray
    # is where the table has it, and the widened edge lies the ratio farther across
    tb = small_table
    base, cut = _rows(tb, 1.6)
    wide = base.copy()
    lk.stretch_row(wide, 1.6 - cut, np.array([[0.1], [1.7], [2.2]]), 2, 12)
    assert np.array_equal(wide[1:-1], base[1:-1])
    for edge, inner, r in ((0, 2, 1.7), (-1, 12, 2.2)):
        strip = LineString([(wide[inner, lk.Q_RIGHT], wide[inner, lk.Q_FWD]),
                            (wide[edge, lk.Q_RIGHT], wide[edge, lk.Q_FWD])])
        assert strip.distance(Point(base[edge, lk.Q_RIGHT], base[edge, lk.Q_FWD])) < 1e-6
        assert wide[edge, lk.Q_RIGHT] == pytest.approx(r * base[edge, lk.Q_RIGHT], rel=1e-12)


@pytest.fixture(scope="module")
def traced():
    """Half-widths (left, right) of DRAWS atmospheres drawn from the default spread and
    traced directly at 45,000 ft, eastbound, Mach 0.02 and 0.1 above the standard day's
    cutoff (NaN where the boom does not reach the ground)."""
    std = standard_atmosphere()
    z = _height_m()
    hdg = math.radians(90.0)
    cut = cutoff_mach(RayTracer(std), FlightCondition(1.2, z, hdg))
    fields = default_spread().sample(np.random.default_rng(2026), z, DRAWS)
    out = {}
    for dm in (0.02, 0.1):
        hw = np.full((DRAWS, 2), math.nan)
        for i, d in enumerate(fields):
            c = compute_carpet(RayTracer(perturbed(std, d)), FlightCondition(cut + dm, z, hdg))
            if c.reaches_ground:
                hw[i] = c.half_width_left_m, c.half_width_right_m
        nominal = compute_carpet(RayTracer(std), FlightCondition(cut + dm, z, hdg))
        out[dm] = (cut + dm, hw, (nominal.half_width_left_m, nominal.half_width_right_m))
    return out


@pytest.mark.slow
def test_the_edge_at_95_percent_and_the_probabilities_hold_against_traced_atmospheres(
        small_table, traced) -> None:
    # Issue 16, done when: the 95 % edge covers 93-97 % of the sampled profiles. The live
    # carpet's edge at edge_confidence 0.95 (the table's ratio at the present condition,
    # the lookup's rows widened as the advisor widens them) against the half-widths of
    # 2,000 atmospheres traced directly, among those in which the boom reaches the ground
    # (the ratio is conditional on it; the others are covered by any edge). The ratio's
    # upper tail is long: the 95 % quantile of 4,000 plain draws moved by 0.08 between
    # seeds (diagnosed in stop 29), hence 2,000 draws here. Before: the live edge was the
    # table's, about the median (asserted: it holds under 80 %). One test for both
    # checks, so that the traced draws are made once.
    tb = small_table
    for dm, (mach, hw, nominal) in traced.items():
        edge = present_edge(tb, 0.95, _height_m(), math.radians(90.0))
        assert edge is not None and edge.stretch is not None
        rows, cut = _rows(tb, mach)
        reach = np.isfinite(hw[:, 0])
        assert reach.sum() > 0.9 * DRAWS
        table_edge = np.abs(rows[[0, -1], lk.Q_RIGHT])  # before: the table's own edge
        assert float(np.mean(hw[reach] <= table_edge[None, :])) < 0.8
        lk.stretch_row(rows, mach - cut, edge.stretch, 2, 12)
        live = np.abs(rows[[0, -1], lk.Q_RIGHT])  # left, right
        covered = np.mean(hw[reach] <= live[None, :], axis=0)
        # still air: the sides are mirror images, so each side's share and their mean
        assert np.all((covered >= 0.92) & (covered <= 0.98)), (dm, covered, live)
        assert 0.93 <= float(covered.mean()) <= 0.97, (dm, covered, live)
        _joint_edge_holds(tb, mach, hw)
        _probabilities_hold(tb, dm, mach, hw, nominal)


def _joint_edge_holds(tb: BoomTable, mach: float, hw: np.ndarray) -> None:
    """The advisor's edge at 0.95 (with its present sigma: the ratio's level raised where
    the boom may not reach the ground at all) against all the traced atmospheres: a
    draw is covered when its boom stays off the ground or inside the edge; 93-97 %."""
    sigma, edge = PresentSpread(tb, AdvisorConfig(edge_confidence=0.95)).at(
        _height_m(), 0.0, math.radians(90.0))
    assert sigma is not None and edge is not None and edge.stretch is not None
    rows, cut = _rows(tb, mach)
    lk.stretch_row(rows, mach - cut, edge.stretch, 2, 12)
    live = np.abs(rows[[0, -1], lk.Q_RIGHT])
    reach = np.isfinite(hw[:, 0])
    inside = np.zeros(hw.shape, dtype=bool)
    inside[reach] = hw[reach] <= live[None, :]
    covered = np.mean(~reach[:, None] | inside, axis=0)
    print(f"joint: Mach {mach:.3f}, sigma {sigma:.4f}, reaching {reach.mean():.3f}, "
          f"covered {covered}")
    assert 0.93 <= float(covered.mean()) <= 0.97, (mach, covered, live)


def _probabilities_hold(tb: BoomTable, dm: float, mach: float, hw: np.ndarray,
                        nominal: tuple[float, float]) -> None:
    """A zone the table's half-width times 0.9, 1.2 and 1.5 from the track: the chance the
    ratio's levels give against the share of the traced atmospheres whose edge reaches
    that far (within the binomial 99.9 % band of the traced draws, plus 0.03 for the
    table's own draws and its interpolation in Mach excess)."""
    edge = present_edge(tb, 0.0, _height_m(), math.radians(90.0))
    assert edge is not None and edge.stretch is None
    reach = np.isfinite(hw[:, 0])
    n = int(reach.sum())
    _, cut = _rows(tb, mach)
    for side in (0, 1):
        for f in (0.9, 1.2, 1.5):
            share = float(np.mean(hw[reach, side] >= f * nominal[side]))
            p = reach_given_ground(edge, mach - cut, side, f)
            lo, hi = binom.interval(0.999, n, p)
            assert lo / n - 0.03 <= share <= hi / n + 0.03, (dm, side, f, share, p)


def test_a_zone_on_the_widened_edge_is_stated_at_one_less_the_edge_confidence(
        small_table) -> None:
    # Definition (the module notes): at edge_confidence c the edge is laid where the boom
    # reaches beyond it in 1 - c of the atmospheres, those in which it stays off the
    # ground counted; so the probability the advisor states for a zone on that edge,
    # P_ground * P(R >= ratio), is 1 - c. Before stop 30 the edge was the conditional
    # quantile c, and near the cutoff such a zone was stated at P_ground (1 - c), about
    # 0.03 (the near-cutoff campaign's encounter 29 said "unavoidable" at 0.04).
    tb = small_table
    sigma, edge = PresentSpread(tb, AdvisorConfig(edge_confidence=0.95)).at(
        _height_m(), 0.0, math.radians(90.0))
    assert sigma is not None and edge is not None and edge.stretch is not None
    checked = 0
    for m, mex in enumerate(edge.mex):
        p_ground = boom_probability(float(mex), 0.0, sigma)
        for side in (0, 1):
            ratio = float(edge.stretch[1 + side, m])
            if ratio <= 1.0 or p_ground < 0.1:
                continue  # the table's own edge, or a boom that hardly reaches
            stated = p_ground * reach_given_ground(edge, float(mex), side, ratio)
            assert stated == pytest.approx(0.05, abs=0.005), (mex, side, p_ground, ratio)
            checked += 1
    assert checked >= 4


def test_the_advisor_says_how_likely_a_zone_near_the_edge_is(small_table) -> None:
    # A zone just beyond the table's right edge (southward of an eastbound track, Mach 1.6
    # at 45,000 ft): with the table's edge it is no conflict; with the edge laid at 95 %
    # it is, and not likely (below a half); a zone on the track is as likely as the boom
    # reaching the ground at all. Carpet: the readable ray tracer in the standard day.
    z = _height_m()
    c = compute_carpet(RayTracer(standard_atmosphere()),
                       FlightCondition(1.6, z, math.radians(90.0)))
    g = GEOD.Direct(*point_along(100e3), 180.0, 1.15 * c.half_width_right_m + 2000.0)
    zones = zoneset(square("reed-marsh", g["lat2"], g["lon2"], half_km=1.0))
    table_edge = Advisor(small_table, zones).step(state(mach=1.6), 0.0)
    assert table_edge.zone_id is None
    wide = Advisor(small_table, zones, AdvisorConfig(edge_confidence=0.95)).step(
        state(mach=1.6), 0.0)
    assert wide.zone_id == "reed-marsh"
    assert 0.01 <= wide.boom_probability < 0.5, wide.boom_probability
    on_track = Advisor(small_table, zoneset(square("mill", *point_along(100e3)))).step(
        state(mach=1.6), 0.0)
    assert on_track.zone_id == "mill" and on_track.boom_probability > 0.99


def test_edge_confidence_is_checked() -> None:
    for bad in (0.3, 1.0, -0.1):
        with pytest.raises(ConfigError, match="edge_confidence"):
            AdvisorConfig(edge_confidence=bad).validate()
    AdvisorConfig(edge_confidence=0.95).validate()


def test_tables_with_a_broken_edge_ratio_are_refused(small_table_path, tmp_path) -> None:
    header, arrays = read_table_file(small_table_path)
    head = {k: v for k, v in header.items() if k not in (
        "arrays", "payload_sha256", "payload_nbytes", "format_version")}
    assert all(k in arrays for k in EDGE_ARRAYS)
    part = {k: np.array(v) for k, v in arrays.items() if k != "edge_ratio_levels"}
    write_table_file(tmp_path / "a.boomtable", head, part)
    with pytest.raises(TableFileError, match="edge_ratio_levels"):
        BoomTable.load(tmp_path / "a.boomtable")
    falling = {k: np.array(v) for k, v in arrays.items()}
    falling["edge_ratio"] = falling["edge_ratio"][..., ::-1].copy()
    write_table_file(tmp_path / "b.boomtable", head, falling)
    with pytest.raises(TableFileError, match="decrease"):
        BoomTable.load(tmp_path / "b.boomtable")
    old = {k: np.array(v) for k, v in arrays.items() if k not in EDGE_ARRAYS}
    write_table_file(tmp_path / "c.boomtable", head, old)
    tb = BoomTable.load(tmp_path / "c.boomtable")
    assert tb.edge_ratio is None
    assert any("edge ratio: none" in line for line in tb.info_lines())


@pytest.mark.slow
def test_near_cutoff_encounter_82_is_alerted_with_the_edge_at_95_percent(tmp_path) -> None:
    # The one miss of the near-cutoff campaign (seed 16, encounter 82; README, issue 16):
    # a zone on 3,772-ft ground off the track, Mach 1.144 just above that ground's cutoff,
    # the truth's carpet 9.5 km wide a side where the table's is 5 km. Truth: the harness
    # tracing every emission through the truth's air (advisory.bench.truth), never the
    # tables. With the table's edge the advisor said "clear" while the booms flew into
    # the zone (a missed span from the start to 114.7 s, stop 27's campaign and stop 29's
    # replay of it); with the edge laid at 95 % it names the zone from the start.
    from advisory.bench.campaign import sample_campaign
    from advisory.bench.closed_loop import simulate
    from advisory.bench.sim_scenario import scenario_from_dict

    cfg = tmp_path / "edge95.toml"
    cfg.write_text("[confidence]\nedge_confidence = 0.95\n")
    e = sample_campaign(83, 16, near_cutoff=True, config=str(cfg))[82]
    exposures = simulate(scenario_from_dict(e.doc)).as_json()["exposures"]
    assert [x["zone_id"] for x in exposures] == ["zone"]
    assert not exposures[0]["missed"], exposures[0]
    assert exposures[0]["first_unavoidable_s"] is not None
