"""Within the near-cutoff band the advisory says so and errs toward "the boom reaches"
(issue 14, item 4).

Near cutoff the rays graze the ground (the cutoff caustic, where ray theory fails) and the
table's cutoff Mach is an interpolation. Before, a Mach 0.003 below the table's cutoff was
``no_boom`` ("NO BOOM ON GROUND") with nothing to say how close it was. Now, within 0.005
of cutoff (either side) the advisory carries ``near_cutoff`` and the crew line says the
boom may reach; below cutoff within the band the prediction keeps a carpet on the ground
(the first Mach-excess node's).

Independent reference for where cutoff is: direct ray tracing
(:func:`advisory.physics.carpet.compute_carpet`, no table), and its closed form in the
U.S. Standard Atmosphere 1976 (the reference library ``ambiance``): level flight in still
air reaches the ground from ``M = c_ground / c_aircraft`` (Snell's law; Pierce,
*Acoustics*, 1989, sec. 8-4).
"""

from __future__ import annotations

import numpy as np
import pytest
from ambiance import Atmosphere as Reference

from advisory import units
from advisory.io.messages import decode_frame, encode_adv
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.carpet import compute_carpet
from advisory.physics.rays import FlightCondition, RayTracer
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.results import Advisory
from advisory.tables import lookup as lk
from tests.test_advisor import ALT_FT, point_along, square, state, zoneset
from tests.test_pressure_altitude import standard_day_height_m
from tests.twins.lookup import lookup_twin


def _height_m() -> float:
    """Geometric height of the test's pressure altitude on a standard day (ambiance)."""
    return standard_day_height_m(units.ft_to_m(ALT_FT))


@pytest.fixture(scope="module")
def direct_cutoff() -> float:
    z = _height_m()
    cut = compute_carpet(RayTracer(standard_atmosphere()),
                         FlightCondition(altitude_m=z, mach=1.5)).cutoff_mach
    c_g = float(Reference(0.0).speed_of_sound[0])
    c_h = float(Reference(z).speed_of_sound[0])
    assert cut == pytest.approx(c_g / c_h, abs=2e-4)  # the direct tracing is the closed form
    return cut


@pytest.mark.parametrize("offset, near, reaches", [
    (-0.003, True, True),    # before: no_boom, no word of the band
    (-0.0045, True, True),
    (-0.010, False, False),
    (+0.003, True, True),
    (+0.020, False, True),
])
def test_the_band_is_flagged_and_errs_toward_a_boom(small_table, direct_cutoff, offset, near,
                                                    reaches):
    lat, lon = point_along(400e3)  # a zone far ahead: the carpet itself is the question
    # the fixed band alone: confidence off (with it, tests/test_confidence.py)
    adv = Advisor(small_table, zoneset(square("far", lat, lon)), AdvisorConfig(confidence=0.0))
    a = adv.step(state(mach=direct_cutoff + offset), now_monotonic=0.0)
    assert a.status in ("clear", "no_boom"), a
    assert a.near_cutoff is near
    assert a.reaches_ground is reaches
    assert (a.status == "clear") is reaches
    if near:
        assert a.cue == "NEAR CUTOFF, BOOM MAY REACH, ZONES CLEAR"
        assert len(a.cue) <= 40  # issue 13's crew-line limit
    else:
        assert "NEAR CUTOFF" not in a.cue


def test_below_cutoff_in_the_band_the_first_node_stands_for_the_carpet(small_table):
    # The kernel and its readable twin agree; the rows are the first Mach-excess node's.
    tb = small_table
    z = _height_m()
    args = (tb.ax_alt, tb.ax_mex, tb.ax_fpa, tb.ax_hdg, tb.cutoff, tb.cells)
    probe = np.zeros((tb.eta.size, lk.N_QUANTITIES))
    _, cut = lk.lookup_kernel(z, 0.0, 0.0, 0.0, *args, probe)
    first = np.zeros_like(probe)
    lk.lookup_kernel(z, cut + 0.5 * float(tb.ax_mex[0]), 0.0, 0.0, *args, first)
    for dm in (-0.001, -0.004):
        out, twin = np.zeros_like(probe), np.zeros_like(probe)
        code, _ = lk.lookup_kernel(z, cut + dm, 0.0, 0.0, *args, out)
        tcode, _ = lookup_twin(z, cut + dm, 0.0, 0.0, *args, twin)
        assert code == tcode != lk.NO_BOOM
        assert np.allclose(out, twin) and np.allclose(out, first)
    code, _ = lk.lookup_kernel(z, cut - 0.006, 0.0, 0.0, *args, probe)
    assert code == lk.NO_BOOM


def test_the_flag_goes_on_the_wire_only_when_true():
    # ICD section 5, key 16: a compatible addition, absent means false, so every other
    # frame stays byte for byte as it was.
    plain = Advisory("clear", reaches_ground=True).to_fields()
    near = Advisory("clear", reaches_ground=True, near_cutoff=True).to_fields()
    without = {k: v for k, v in plain.items() if k != "near_cutoff"}
    assert encode_adv(plain, 1, 1.9e9) == encode_adv(without, 1, 1.9e9)
    frame = decode_frame(encode_adv(near, 2, 1.9e9))
    assert frame.fields["near_cutoff"] is True
    assert decode_frame(encode_adv(plain, 3, 1.9e9)).fields["near_cutoff"] is False
