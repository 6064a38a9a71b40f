"""The report draws the carpet edge's confidence band (issue 16, item 5).

A replayed invented flight (eastbound, Mach 1.4, 45,000 ft, the standard atmosphere) is
collected for the report; the band drawn beside its carpet rows is measured on the
ellipsoid with ``geographiclib`` (independent geodesy: the cross-track distance of each
band point from the aircraft's position, across the track the aircraft actually flew) and
compared with 400 atmospheres drawn independently from the same spread and traced by the
readable ray tracer (:func:`advisory.physics.carpet.compute_carpet`), as
``tests/test_spread_coverage.py`` does for ``check``'s intervals. The spread: the default
of :mod:`advisory.physics.spread` (engineering choices, magnitudes values from memory of
short-range forecast verification).

Before this issue the map had no band: the edge was a line.
"""

from __future__ import annotations

import dataclasses
import math
import re

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic

from advisory import units
from advisory.bench.replay import replay_log
from advisory.bench.report import write_report
from advisory.bench.scenario import prepare
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.carpet import compute_carpet
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.physics.spread import default_spread, perturbed
from advisory.tables.table import BoomTable
from tests.test_replay import short_flight, table_cache  # noqa: F401

pytestmark = pytest.mark.slow
N_TRUTH = 400
GEOD = Geodesic.WGS84


@pytest.fixture(scope="module")
def flight(tmp_path_factory):
    root = tmp_path_factory.mktemp("band")
    d = short_flight(root, "banded", duration_s=6.0, faults=())
    setup = prepare(d, collect=True, quiet=True)
    return setup, replay_log(setup)


def cross_track_km(row_track, prev_track, point):
    """Signed distance (km, right positive) of ``point`` from the aircraft at ``row_track``
    across the track flown from ``prev_track`` (both [t, lat, lon, ...]), on WGS84."""
    course = GEOD.Inverse(prev_track[1], prev_track[2], row_track[1], row_track[2])["azi2"]
    g = GEOD.Inverse(row_track[1], row_track[2], point[0], point[1])
    return g["s12"] * math.sin(math.radians(g["azi1"] - course)) / 1000.0


def test_band_drawn_beside_the_rows_covers_directly_traced_edges(flight):
    setup, res = flight
    band = res.flight["edge_band"]
    rows = band["rows"]
    assert band["confidence"] == 0.95 and band["samples"] == 1000
    assert len(rows) >= 4  # one a carpet row (1 s), a 6 s flight
    # the flight's air is the standard atmosphere (no profile given: 288.15 K at sea level,
    # U.S. Standard Atmosphere 1976)
    table = BoomTable.load(setup.table)
    std = standard_atmosphere()
    atm = table.atmosphere()
    for z, t_k in ((0.0, 288.15), (5000.0, 255.68), (15000.0, 216.65)):
        assert np.interp(z, atm.z_m, atm.temperature_k) == pytest.approx(t_k, abs=0.05)
    row = rows[len(rows) // 2]
    alt_ft, mach, hdg_deg, fpa_deg = row["condition"]
    # geometric height of 45,000 ft pressure altitude on the standard day: geopotential to
    # geometric, z = r0 h / (r0 - h), r0 = 6,356,766 m (U.S. Standard Atmosphere 1976)
    h = units.ft_to_m(45000.0)
    z_ft = units.m_to_ft(6356766.0 * h / (6356766.0 - h))
    assert alt_ft == pytest.approx(z_ft, abs=60.0) and mach == pytest.approx(1.4, abs=0.01)
    assert hdg_deg == pytest.approx(90.0, abs=1.0) and abs(fpa_deg) < 0.2
    track = res.flight["track"]
    i = min(range(len(track)), key=lambda k: abs(track[k][0] - row["t_s"]))
    here, before = track[i], track[max(i - 10, 0)]  # 1 s of flight back
    # geometry: the band's points lie at the interval's half-widths across the track
    inner_l, outer_l = (-cross_track_km(here, before, p) for p in row["left"])
    inner_r, outer_r = (cross_track_km(here, before, p) for p in row["right"])
    for got, want in ((inner_l, row["half_width_km"]["left"][0]),
                      (outer_l, row["half_width_km"]["left"][1]),
                      (inner_r, row["half_width_km"]["right"][0]),
                      (outer_r, row["half_width_km"]["right"][1])):
        assert got == pytest.approx(want, rel=0.01, abs=0.3)
    # coverage: independently drawn atmospheres, traced directly, at the row's condition
    model = default_spread()
    alt = units.ft_to_m(alt_ft)
    fields = model.sample(np.random.default_rng(2027), alt, N_TRUTH)
    hw = np.zeros((N_TRUTH, 2))
    for k, d in enumerate(fields):
        c = compute_carpet(RayTracer(perturbed(std, d)),
                           FlightCondition(mach, alt, math.radians(hdg_deg)))
        hw[k] = ((c.half_width_left_m, c.half_width_right_m) if c.reaches_ground
                 else (0.0, 0.0))
    hw /= 1000.0
    cover_l = np.mean((hw[:, 0] >= inner_l) & (hw[:, 0] <= outer_l))
    cover_r = np.mean((hw[:, 1] >= inner_r) & (hw[:, 1] <= outer_r))
    print(f"band left {inner_l:.2f}-{outer_l:.2f} km covers {cover_l:.3f}, right "
          f"{inner_r:.2f}-{outer_r:.2f} km covers {cover_r:.3f}")
    # 95 % intended; 400 outcomes: +-1.1 % (binomial), the band's own 1,000 draws +-0.7 %
    assert 0.91 <= cover_l <= 0.99 and 0.91 <= cover_r <= 0.99


def test_report_map_draws_the_band_and_says_what_it_is(flight, tmp_path):
    _setup, res = flight
    html = write_report([res], tmp_path, pngs=False).read_text(encoding="utf-8")
    band = re.search(r'<g class="edge-band"[^>]*><title>([^<]*)</title>(.*?)</g>', html, re.S)
    assert band is not None
    assert "95 % band from 1000 sampled atmospheres" in band.group(1)
    assert band.group(2).count("<polygon") == 2  # one ribbon a side
    assert "carpet edge band (confidence)" in html  # in the legend


def test_no_band_with_the_fixed_margin_or_when_not_asked(flight, tmp_path):
    setup, _res = flight
    cfg = tmp_path / "fixed.toml"
    cfg.write_text("[confidence]\nconfidence = 0\n", encoding="utf-8")
    fixed = replay_log(dataclasses.replace(setup, config=str(cfg)))
    off = replay_log(dataclasses.replace(setup, edge_conditions=0))
    for r in (fixed, off):
        assert r.flight["edge_band"]["rows"] == []
        html = write_report([r], tmp_path / r.name, pngs=False).read_text(encoding="utf-8")
        assert 'class="edge-band"' not in html
