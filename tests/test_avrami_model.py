"""Avrami model functions against published equations and hand arithmetic.

References
----------
Avrami, J. Chem. Phys. 7, 1103 (1939); 8, 212 (1940); 9, 177 (1941):
    X = 1 - exp(-k t^n), t_half = (ln 2 / k)^(1/n).
Kennedy & Zheng, Flow Analysis of Injection Molds, p. 143 (sphere row of the
    exponent table, with the two nucleation formulas used below).
Wunderlich, Macromolecular Physics vol. 2 (1976): other rows, from memory.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import linregress

from kinetics.estimate import FitProblem, fit_least_squares
from kinetics.models.avrami import (
    AVRAMI_EXPONENTS,
    avrami_cell_rate,
    avrami_conversion,
    avrami_half_time,
    avrami_k_from_half_time,
    avrami_linearised,
    avrami_peak_time,
    avrami_rate,
)
from kinetics.models.params import LogUniform, Parameter, Uniform

CASES = [(1.0, 0.02), (2.0, 1e-4), (2.5, 0.01), (2.6, 3.0e-6), (3.0, 4.2e-6), (4.0, 1.0e-9)]


def test_half_time_hand_value():
    # SCIENCE.md section 1 (status D): k = 0.01, n = 2.5 gives t_half = 5.449 and
    # X(t_half) = 0.5000. Hand arithmetic: (ln 2 / 0.01)^(1/2.5) = 69.3147^0.4 = 5.4494.
    assert avrami_half_time(2.5, 0.01) == pytest.approx(5.449, abs=5e-4)
    assert avrami_half_time(2.5, 0.01) == pytest.approx(69.31471805599453 ** 0.4, rel=1e-12)
    assert avrami_conversion(5.449, 2.5, 0.01) == pytest.approx(0.5000, abs=1e-4)


@pytest.mark.parametrize("n,k", CASES)
def test_half_time_identity(n, k):
    # Avrami 1939: X(t_half) = 1/2 with t_half = (ln 2 / k)^(1/n).
    th = avrami_half_time(n, k)
    assert th == pytest.approx((np.log(2.0) / k) ** (1.0 / n), rel=1e-12)
    assert avrami_conversion(th, n, k) == pytest.approx(0.5, abs=1e-12)
    assert avrami_conversion(th + 7.0, n, k, 7.0) == pytest.approx(0.5, abs=1e-12)
    assert avrami_k_from_half_time(n, th) == pytest.approx(k, rel=1e-10)


def test_conversion_is_zero_before_induction_time():
    t = np.linspace(0.0, 50.0, 11)
    X = avrami_conversion(t, 2.5, 1e-3, 25.0)
    assert np.all(X[t <= 25.0] == 0.0)
    assert np.all(X[t > 25.0] > 0.0)
    assert np.all(avrami_rate(t, 2.5, 1e-3, 25.0)[t <= 25.0] == 0.0)


def test_exponent_table_values():
    # (interface-controlled, diffusion-controlled). Sphere row: Kennedy & Zheng,
    # Flow Analysis of Injection Molds, p. 143. Disc and rod rows and the
    # diffusion-controlled values: from memory (Wunderlich, Macromolecular
    # Physics vol. 2, 1976; SCIENCE.md status M).
    expected = {
        ("sphere", "athermal"): (3.0, 1.5), ("sphere", "thermal"): (4.0, 2.5),
        ("disc", "athermal"): (2.0, 1.0), ("disc", "thermal"): (3.0, 2.0),
        ("rod", "athermal"): (1.0, 0.5), ("rod", "thermal"): (2.0, 1.5),
    }
    assert AVRAMI_EXPONENTS == expected


def _fit_n_k(t, X, n_start, th_start):
    """Nonlinear least squares of X = 1 - exp(-k t^n) with the engine (t0 = 0).

    Returns (n, k) at the optimum; parametrised by (n, t_half) for conditioning.
    """
    pars = (Parameter("n", "1", Uniform(0.5, 6.0), n_start),
            Parameter("t_half", "s", LogUniform(1e-3, 1e6), th_start))

    def predict(th):
        n = th[:, 0:1]
        return avrami_conversion(t[None, :], n, avrami_k_from_half_time(n, th[:, 1:2]))

    res = fit_least_squares(FitProblem("sphere", pars, X, predict=predict, noise=1.0))
    return res["n"], float(avrami_k_from_half_time(res["n"], res["t_half"]))


def test_sphere_instantaneous_nucleation_gives_n3():
    # Kennedy & Zheng p. 143: instantaneous (athermal) nuclei, number density N0,
    # spherical growth at rate G: X = 1 - exp(-4/3 pi N0 G^3 t^3).
    N0, G = 1.0e15, 1.0e-7  # m^-3, m/s (illustrative values)
    t = np.linspace(1.0, 200.0, 300)
    X = 1.0 - np.exp(-4.0 / 3.0 * np.pi * N0 * G**3 * t**3)
    k_true = 4.0 / 3.0 * np.pi * N0 * G**3
    n_fit, k_fit = _fit_n_k(t, X, 2.2, 30.0)
    assert n_fit == pytest.approx(AVRAMI_EXPONENTS[("sphere", "athermal")][0], abs=1e-6)
    assert k_fit == pytest.approx(k_true, rel=1e-5)
    early = X < 0.99
    x, y = avrami_linearised(t[early], X[early])
    assert linregress(x, y).slope == pytest.approx(3.0, abs=1e-9)
    np.testing.assert_allclose(avrami_conversion(t, 3.0, k_true), X, rtol=1e-12, atol=1e-15)


def test_sphere_constant_rate_nucleation_gives_n4():
    # Kennedy & Zheng p. 143: constant nucleation rate I, spherical growth at G:
    # X = 1 - exp(-pi I G^3 t^4 / 3).
    nuc, G = 1.0e12, 1.0e-7  # m^-3 s^-1, m/s (illustrative values)
    t = np.linspace(1.0, 400.0, 300)
    X = 1.0 - np.exp(-np.pi * nuc * G**3 * t**4 / 3.0)
    k_true = np.pi * nuc * G**3 / 3.0
    n_fit, k_fit = _fit_n_k(t, X, 3.0, 100.0)
    assert n_fit == pytest.approx(AVRAMI_EXPONENTS[("sphere", "thermal")][0], abs=1e-6)
    assert k_fit == pytest.approx(k_true, rel=1e-5)
    np.testing.assert_allclose(avrami_conversion(t, 4.0, k_true), X, rtol=1e-12, atol=1e-15)


@pytest.mark.parametrize("n,k", CASES)
def test_cell_rate_integrates_to_conversion_change(n, k):
    # Telescoping sum: sum_i <dX/dt>_i (e_{i+1} - e_i) = X(e_N) - X(e_0).
    rng = np.random.default_rng(7)
    th = avrami_half_time(n, k)
    edges = np.sort(rng.uniform(0.0, 4.0 * th, 400))
    rate = avrami_cell_rate(edges, n, k, 0.1 * th)
    total = np.sum(rate * np.diff(edges))
    expected = avrami_conversion(edges[-1], n, k, 0.1 * th) - avrami_conversion(edges[0], n, k,
                                                                                 0.1 * th)
    assert total == pytest.approx(expected, abs=1e-12)


@pytest.mark.parametrize("n,k", CASES)
def test_rate_equals_numerical_derivative(n, k):
    # Central difference (X(t + h) - X(t - h)) / 2h, error O(h^2).
    th = avrami_half_time(n, k)
    t = np.linspace(0.05, 3.0, 60) * th + 5.0
    h = 1e-5 * th
    numeric = (avrami_conversion(t + h, n, k, 5.0) - avrami_conversion(t - h, n, k, 5.0)) / (2 * h)
    # atol: round-off of X near 1 over 2h, about 1e-16 / h.
    np.testing.assert_allclose(avrami_rate(t, n, k, 5.0), numeric, rtol=1e-6, atol=1e-10 / th)


@pytest.mark.parametrize("n,k", [c for c in CASES if c[0] > 1.0])
def test_peak_time_matches_numeric_argmax(n, k):
    th = avrami_half_time(n, k)
    t = np.linspace(0.0, 3.0 * th, 300_001) + 12.0
    t_num = t[np.argmax(avrami_rate(t, n, k, 12.0))]
    assert avrami_peak_time(n, k, 12.0) == pytest.approx(t_num, abs=2 * (t[1] - t[0]))
    # Hand formula: d2X/dt2 = 0 at t^n = (n - 1)/(n k).
    assert avrami_peak_time(n, k) == pytest.approx(((n - 1) / (n * k)) ** (1 / n), rel=1e-12)


def test_peak_time_for_n_at_most_one_is_induction_time():
    assert avrami_peak_time(1.0, 0.02, 3.0) == 3.0
    assert avrami_peak_time(0.8, 0.02, 3.0) == 3.0


def test_broadcasting_equals_loop():
    rng = np.random.default_rng(3)
    m, N = 7, 50
    n = rng.uniform(1.2, 4.0, (m, 1))
    th = rng.uniform(20.0, 200.0, (m, 1))
    k = avrami_k_from_half_time(n, th)
    t0 = rng.uniform(0.0, 30.0, (m, 1))
    t = np.linspace(0.0, 600.0, N)[None, :]
    edges = np.linspace(-0.25, 600.25, N + 1)[None, :]
    X = avrami_conversion(t, n, k, t0)
    R = avrami_rate(t, n, k, t0)
    C = avrami_cell_rate(edges, n, k, t0)
    P = avrami_peak_time(n, k, t0)
    H = avrami_half_time(n, k)
    assert X.shape == R.shape == (m, N) and C.shape == (m, N)
    for i in range(m):
        a, b, c = float(n[i, 0]), float(k[i, 0]), float(t0[i, 0])
        np.testing.assert_array_equal(X[i], avrami_conversion(t[0], a, b, c))
        np.testing.assert_array_equal(R[i], avrami_rate(t[0], a, b, c))
        np.testing.assert_array_equal(C[i], avrami_cell_rate(edges[0], a, b, c))
        assert P[i, 0] == avrami_peak_time(a, b, c)
        assert H[i, 0] == avrami_half_time(a, b)
