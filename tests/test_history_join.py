"""No focus out of air-data noise where the flown history meets the trajectory ahead.

Measured in the closed-loop campaign (``campaign --known``, seed 1, encounter 316: a steady
2.2-deg climb at Mach 1.6 near 64,000 ft): the newest flown entry could be 0.05 s before
the present state while the emission points are 3 s apart elsewhere; the air data's
noise (a few feet, 0.002 Mach, 0.1 deg of heading) over that short gap reads as a
manoeuvre, the near-grazing edge rays fold and the ray-tube factor hit its cap of 5 (3.9
psf predicted where the truth's direct tracing has 0.9 psf), an ``unavoidable`` alert held
for 20 s. The same happens with gaps of a second or two.
Now no ray-tube difference is taken across the join (each side keeps its own one-sided
difference, :func:`advisory.pipeline.footprint.focus_kernel`).

Reference (closed form): steady flight has no focus; the ray-tube factor of every
emission is 1 (the same check as ``tests/test_dives.py``), with the campaign's noise on
the air data (one sigma: altitude 10 ft, Mach 0.002, heading 0.1 deg).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory import units
from advisory.bench.flight import FlightState, fly_timed
from advisory.physics.atmosphere import standard_atmosphere
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.airdata import AirDataState
from advisory.pipeline.config import AdvisorConfig
from advisory.tables.grid import DEFAULT_MACH_EXCESS, TableGrid
from tests.test_flown_history import LAT0, LON0, _build, far_zone


@pytest.fixture(scope="module")
def climb_table(tmp_path_factory):
    """Standard atmosphere, 60,000-66,000 ft, flight-path angles 0 and 2.5 deg (a node at
    the angle flown)."""
    grid = TableGrid(altitudes_m=tuple(units.ft_to_m(a) for a in range(60000, 66001, 1000)),
                     mach_excess=DEFAULT_MACH_EXCESS,
                     fpa_rad=(0.0, math.radians(2.5)), headings_rad=(0.0,))
    return _build(tmp_path_factory.mktemp("join") / "join.boomtable", standard_atmosphere(),
                  grid)


def test_air_data_noise_makes_no_focus_at_the_join(climb_table):
    st = FlightState(standard_atmosphere(), lat_deg=LAT0, lon_deg=LON0, alt_ft=61000.0,
                     mach=1.6, heading_deg=90.0, fpa_deg=2.5)
    samples = fly_timed(st, 40.0, 20.0)
    rng = np.random.default_rng(316)
    adv = Advisor(climb_table, far_zone(), AdvisorConfig())
    worst_now, worst_flown = 1.0, 1.0
    for s in samples:
        noisy = dict(s, alt_ft=s["alt_ft"] + float(rng.normal(0.0, 10.0)),
                     mach=s["mach"] + float(rng.normal(0.0, 0.002)),
                     heading_deg=(s["heading_deg"] + float(rng.normal(0.0, 0.1))) % 360.0)
        state = AirDataState.from_fields(noisy, utc_s=1.7e9 + s["t_s"], rx_monotonic=s["t_s"])
        assert adv.step(state, now_monotonic=s["t_s"]).status != "unavailable"
        if s["t_s"] < 10.0:
            continue  # the history first fills
        p = adv.last_prediction
        k0 = int(np.searchsorted(p.t_emit_s, -1e-9))
        assert p.on_ground[k0] and p.on_ground[k0 - 1]
        worst_now = max(worst_now, float(p.focus_factor[k0].max()))
        worst_flown = max(worst_flown, float(p.focus_factor[k0 - 1].max()))
    # the present emission's factor is the prediction's own (one state, no noise between
    # its points): 1 within 2 %; the newest flown entry's is its difference with the
    # entry before it (3 s apart: the noise moves the edge rays by up to about a quarter
    # of the translation, factors up to ~1.3 measured), never the cap of a fold (before:
    # 5.0 at both)
    assert worst_now < 1.02, f"present emission's ray-tube factor up to {worst_now:.2f}"
    assert worst_flown < 1.5, f"newest flown entry's ray-tube factor up to {worst_flown:.2f}"
