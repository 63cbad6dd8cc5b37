"""Nakamura and Hoffman–Lauritzen model functions against outside references.

References used below: the Avrami equation (Avrami, J. Chem. Phys. 7 (1939) 1103),
Nakamura's integral form (Nakamura et al., J. Appl. Polym. Sci. 16 (1972) 1077,
from memory), Ozawa's form of a constant-rate run (Ozawa, Polymer 12 (1971) 150,
from memory), scipy.integrate.quad for the temperature integral, and a
central finite difference for E = -R d ln G / d(1/T) (Vyazovkin & Sbirrazzuoli,
Macromol. Rapid Commun. 25 (2004) 733, from memory).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.constants import R
from scipy.integrate import quad

from kinetics.models.hoffman_lauritzen import (
    hl_activation_energy,
    hl_half_time,
    hl_ln_rate,
    hl_rate,
)
from kinetics.models.nakamura import (
    nakamura_constant_rate,
    nakamura_conversion,
    nakamura_from_profile,
    nakamura_half_time,
    nakamura_integral,
    nakamura_K_from_half_time,
    nakamura_rate,
    ozawa_K_from_nakamura,
)

#: Invented HL parameters of a Nakamura K(T) in 1/s (same as the demo data).
HL = {"ln_prefactor": 20.0, "Kg": 6.0e5, "U_star": 6276.0, "T_inf": 233.0, "Tm0": 481.0}


def K_hl(T):
    return hl_rate(T, **HL)


def test_constant_K_is_avrami():
    # Avrami 1939: X = 1 - exp(-k t^n) with k = K^n (Nakamura 1972 at constant T).
    t = np.linspace(0.0, 200.0, 401)
    K, n = 0.01, 2.7
    X = nakamura_conversion(t, np.full_like(t, K), n)
    np.testing.assert_allclose(X, 1 - np.exp(-(K ** n) * t ** n), rtol=1e-12, atol=1e-14)


def test_half_time_definition():
    # X(t_half) = 1/2 at constant T: 1 - exp(-(K t_half)^n) = 1/2.
    n, t_half = 2.2, 75.0
    K = nakamura_K_from_half_time(n, t_half)
    assert 1 - np.exp(-(K * t_half) ** n) == pytest.approx(0.5, abs=1e-12)
    assert nakamura_half_time(n, K) == pytest.approx(t_half, rel=1e-12)


def test_constant_rate_against_quad():
    T0, beta, n = 453.15, 10 / 60, 2.5
    T = np.array([400.0, 395.0, 390.0, 385.0])
    X = nakamura_constant_rate(T, T0=T0, beta=beta, n=n, K_of_T=K_hl)
    for Ti, Xi in zip(T, X, strict=True):
        integral, _ = quad(K_hl, Ti, T0, epsabs=0, epsrel=1e-11, limit=200)
        assert Xi == pytest.approx(1 - np.exp(-(integral / beta) ** n), abs=1e-6)


def test_profile_integral_matches_constant_rate():
    T0, beta, n = 453.15, 20 / 60, 2.0
    t = np.linspace(0, (T0 - 370.0) / beta, 20001)
    T = T0 - beta * t
    X_t = nakamura_from_profile(t, T, n, K_hl)
    X_T = nakamura_constant_rate(T, T0=T0, beta=beta, n=n, K_of_T=K_hl)
    np.testing.assert_allclose(X_t, X_T, atol=2e-6)


def test_constant_rate_run_has_ozawa_form():
    # Ozawa 1971: ln[-ln(1 - X(T))] = ln K_oz(T) - m ln beta with m = n and
    # K_oz(T) = (integral_T^T0 K dT')^n (beta in K/s here); the integral by quad.
    T0, n, T = 453.15, 2.5, 392.0
    betas = np.array([5.0, 10.0, 20.0, 40.0]) / 60
    X = np.array([nakamura_constant_rate([T], T0=T0, beta=b, n=n, K_of_T=K_hl)[0]
                  for b in betas])
    slope, intercept = np.polyfit(np.log(betas), np.log(-np.log1p(-X)), 1)
    integral, _ = quad(K_hl, T, T0, epsabs=0, epsrel=1e-11, limit=200)
    assert -slope == pytest.approx(n, abs=1e-5)
    assert intercept == pytest.approx(n * np.log(integral), abs=1e-5)
    K_oz = ozawa_K_from_nakamura([T], T0=T0, n=n, K_of_T=K_hl)[0]
    assert K_oz == pytest.approx(integral ** n, rel=1e-5)


def test_vectorised_over_walkers_equals_loop():
    t = np.linspace(0, 100, 301)
    rng = np.random.default_rng(4)
    K = rng.uniform(0.005, 0.03, (6, len(t)))
    n = rng.uniform(1.5, 3.5, (6, 1))
    X = nakamura_conversion(t, K, n)
    r = nakamura_rate(t, K, n)
    for i in range(6):
        np.testing.assert_allclose(X[i], nakamura_conversion(t, K[i], n[i, 0]), rtol=1e-13)
        np.testing.assert_allclose(r[i], nakamura_rate(t, K[i], n[i, 0]), rtol=1e-13)


def test_rate_is_derivative_of_conversion():
    # dX/dt = n K theta^(n-1) exp(-theta^n): compare with a finite difference.
    t = np.linspace(0, 150, 30001)
    K = 0.01 + 0.01 * np.sin(t / 40.0) ** 2
    X = nakamura_conversion(t, K, 2.4)
    dX = np.gradient(X, t)
    r = nakamura_rate(t, K, 2.4)
    np.testing.assert_allclose(r[10:-10], dX[10:-10], atol=2e-6)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(0.0, 0.05), min_size=5, max_size=60),
       st.floats(0.5, 4.0))
def test_conversion_monotone_in_unit_interval(K_values, n):
    K = np.asarray(K_values)
    t = np.arange(len(K), dtype=float)
    X = nakamura_conversion(t, K, n)
    assert np.all((X >= 0) & (X <= 1))
    assert np.all(np.diff(X) >= -1e-15)
    assert nakamura_integral(t, K)[0] == 0.0


def test_hl_activation_energy_is_derivative_of_ln_rate():
    # SCIENCE.md section 4 (D): the closed form equals -R d ln G / d(1/T) to
    # <1 J/mol over 300-405 K for U* = 6276, T_inf = 201 K, Tm0 = 418.7 K, Kg = 2e5 K^2.
    p = {"U_star": 6276.0, "T_inf": 201.0, "Kg": 2.0e5, "Tm0": 418.7}
    T = np.linspace(300.0, 405.0, 106)
    h = 1e-6
    x = 1.0 / T
    lnG_plus = hl_ln_rate(1.0 / (x + h * x), ln_prefactor=0.0, **p)
    lnG_minus = hl_ln_rate(1.0 / (x - h * x), ln_prefactor=0.0, **p)
    numeric = -R * (lnG_plus - lnG_minus) / (2 * h * x)
    np.testing.assert_allclose(hl_activation_energy(T, **p), numeric, atol=1.0)


def test_hl_activation_energy_hand_value():
    # E(T) = U* T^2/(T - T_inf)^2 + Kg R (Tm0^2 - T^2 - Tm0 T)/((Tm0 - T)^2 T), by hand at
    # T = 390 K, U* = 6276 J/mol, T_inf = 233 K, Kg = 6e5 K^2, Tm0 = 481 K:
    #   first term  6276 * 152100 / 157^2 = 6276 * 152100 / 24649 = 38726.9 J/mol
    #   second term 6e5 * 8.314462618 * (231361 - 152100 - 187590) / (91^2 * 390)
    #             = 4988677.57 * (-108329) / 3229590 = -167333.5 J/mol
    first = 6276 * 152100 / 24649
    second = 6e5 * R * (231361 - 152100 - 187590) / (91 ** 2 * 390)
    assert first == pytest.approx(38726.9, abs=0.1)
    assert second == pytest.approx(-167333.5, abs=0.1)
    E = hl_activation_energy(390.0, U_star=6276.0, T_inf=233.0, Kg=6e5, Tm0=481.0)
    assert E == pytest.approx(first + second, rel=1e-12)


def test_hl_domain_and_half_time():
    T = np.array([230.0, 233.0, 300.0, 420.0, 481.0, 500.0])
    G = hl_rate(T, **HL)
    assert G[0] == 0 and G[1] == 0 and G[4] == 0 and G[5] == 0
    assert G[2] > 0 and G[3] > 0
    E = hl_activation_energy(T, U_star=HL["U_star"], T_inf=HL["T_inf"], Kg=HL["Kg"],
                             Tm0=HL["Tm0"])
    assert np.isnan(E[[0, 1, 4, 5]]).all() and np.isfinite(E[2])
    np.testing.assert_allclose(hl_half_time(T[2:4], **HL), 1.0 / G[2:4], rtol=1e-12)
    assert hl_activation_energy(480.0, U_star=6276.0, T_inf=233.0, Kg=6e5, Tm0=481.0) < -1e6
