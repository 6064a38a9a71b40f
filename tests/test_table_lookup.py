"""Lookup kernel: numba/numpy parity and interpolation properties."""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisory.tables import lookup as lk
from tests.twins.lookup import lookup_twin


def random_table(nh: int, seed: int = 3):
    rng = np.random.default_rng(seed)
    ax_alt = np.array([6000.0, 9000.0, 12000.0, 15000.0])
    ax_mex = np.array([0.01, 0.05, 0.2, 0.6, 1.5])
    ax_fpa = np.array([-0.1, 0.0, 0.1])
    ax_hdg = np.linspace(0.0, 2 * math.pi, nh, endpoint=False) if nh > 1 else np.zeros(1)
    cutoff = 1.05 + 0.1 * rng.random((4, 3, nh))
    cells = rng.normal(size=(4, 5, 3, nh, 7, lk.N_QUANTITIES))
    return ax_alt, ax_mex, ax_fpa, ax_hdg, cutoff, cells


@pytest.mark.parametrize("nh", [1, 3, 4, 6, 12, 24])
def test_numba_numpy_parity(nh: int) -> None:
    # Parity: the numba kernel and its numpy twin implement the same interpolation.
    args = random_table(nh)
    rng = np.random.default_rng(11)
    for _ in range(200):
        alt = rng.uniform(5000.0, 16000.0)
        mach = rng.uniform(1.0, 3.0)
        fpa = rng.uniform(-0.15, 0.15)
        hdg = rng.uniform(-1.0, 8.0)
        a = np.zeros((7, lk.N_QUANTITIES))
        b = np.zeros((7, lk.N_QUANTITIES))
        ca, ma = lk.lookup_kernel(alt, mach, fpa, hdg, *args, a)
        cb, mb = lookup_twin(alt, mach, fpa, hdg, *args, b)
        assert ca == cb
        assert ma == pytest.approx(mb, rel=1e-12)
        np.testing.assert_allclose(a, b, rtol=1e-10, atol=1e-12)


def test_nodes_are_reproduced_and_below_cutoff_is_no_boom() -> None:
    ax_alt, ax_mex, ax_fpa, ax_hdg, cutoff, cells = random_table(1)
    out = np.zeros((7, lk.N_QUANTITIES))
    mach = cutoff[2, 1, 0] + ax_mex[3]
    code, mcut = lk.lookup_kernel(ax_alt[2], mach, ax_fpa[1], 0.0, ax_alt, ax_mex, ax_fpa,
                                  ax_hdg, cutoff, cells, out)
    assert code == lk.OK
    assert mcut == pytest.approx(cutoff[2, 1, 0])
    np.testing.assert_allclose(out, cells[2, 3, 1, 0], rtol=1e-12)
    # below cutoff by more than the near-cutoff band (issue 14): no boom
    code, _ = lk.lookup_kernel(ax_alt[2], cutoff[2, 1, 0] - lk.NEAR_CUTOFF_BAND - 1e-3,
                               ax_fpa[1], 0.0, ax_alt,
                               ax_mex, ax_fpa, ax_hdg, cutoff, cells, out)
    assert code == lk.NO_BOOM
    code, _ = lk.lookup_kernel(20000.0, 2.0, 0.0, 0.0, ax_alt, ax_mex, ax_fpa, ax_hdg, cutoff,
                               cells, out)
    assert code == lk.CLAMPED


def test_heading_is_periodic() -> None:
    args = random_table(6)
    a = np.zeros((7, lk.N_QUANTITIES))
    b = np.zeros((7, lk.N_QUANTITIES))
    lk.lookup_kernel(9500.0, 2.0, 0.02, 0.3, *args, a)
    lk.lookup_kernel(9500.0, 2.0, 0.02, 0.3 + 2 * math.pi, *args, b)
    np.testing.assert_allclose(a, b, rtol=1e-12)
    lk.lookup_kernel(9500.0, 2.0, 0.02, 2 * math.pi - 1e-9, *args, a)
    lk.lookup_kernel(9500.0, 2.0, 0.02, 0.0, *args, b)
    np.testing.assert_allclose(a, b, rtol=1e-6, atol=1e-6)


@pytest.mark.parametrize("nh, degree", [(24, 5), (5, 3)])
def test_heading_interpolation_is_exact_for_polynomials(nh: int, degree: int) -> None:
    # Lagrange interpolation through k + 1 equally spaced nodes reproduces polynomials of
    # degree k exactly (Abramowitz and Stegun, 1964, 25.2.13 and 25.2.15): six nodes
    # (quintic) from six headings on, four (cubic) with four or five.
    ax_alt, ax_mex, ax_fpa, ax_hdg, cutoff, cells = random_table(nh)
    poly = np.polynomial.Polynomial(np.arange(1.0, degree + 2.0) / 10.0)
    step = 2 * math.pi / nh
    for h in range(nh):  # values a polynomial of the node index (no wrap near x below)
        cells[:, :, :, h] = poly(h)
    cutoff[...] = 1.1
    out = np.zeros((7, lk.N_QUANTITIES))
    x = 2.37 if nh < 6 else 9.61
    lk.lookup_kernel(9000.0, 2.0, 0.0, x * step, ax_alt, ax_mex, ax_fpa, ax_hdg, cutoff,
                     cells, out)
    np.testing.assert_allclose(out, poly(x), rtol=1e-10)
