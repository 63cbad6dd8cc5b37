"""Pure growth-theory, melting, X-ray and crystallinity functions against outside references.

Each check names its source; values marked "from memory" are those of
/work/shared/SCIENCE.md with status M (the original paper was not seen).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetics.constants import CU_KALPHA1, N_A, polymer_constant, unit_cell
from kinetics.errors import CrystkinInputError
from kinetics.models.growth import (
    bragg_angle,
    bragg_spacing,
    cell_volume,
    crystal_density,
    density_crystallinity,
    density_volume_crystallinity,
    fold_work,
    gibbs_thomson_thickness,
    gibbs_thomson_tm,
    hl_coordinates,
    hl_energy_terms,
    hl_transport,
    hl_x,
    hoffman_weeks_tm,
    kg_from_constants,
    long_period,
    marand_tm,
    mass_to_volume_fraction,
    regime_n,
    scattering_vector,
    sigma_sigma_e_from_kg,
    thomas_staveley_sigma,
    two_stage_conversion,
    volume_to_mass_fraction,
    waxd_crystallinity,
)
from kinetics.models.hoffman_lauritzen import hl_activation_energy, hl_ln_rate

# Polyethylene constants of Hoffman & Miller, Polymer 38 (1997) 3151 (from memory):
PE = {"Tm0": 418.7, "b0": 4.15e-10, "a0": 4.55e-10, "delta_hf": 2.80e8,
      "sigma": 11.8e-3, "sigma_e": 90e-3}
K_B = 1.380649e-23  # J/K, SI defining constant


def test_kg_of_polyethylene_regimes():
    # Kg = n b0 sigma sigma_e Tm0 / (dh_f k_B), Hoffman & Miller 1997 (from memory).
    # By hand: 4 x 4.15e-10 x 0.0118 x 0.090 x 418.7 = 7.3813e-10;
    # 2.80e8 x 1.380649e-23 = 3.8658e-15; ratio 1.909e5 K^2 (SCIENCE.md derives 1.91e5).
    kg1 = kg_from_constants(PE["b0"], PE["sigma"], PE["sigma_e"], PE["Tm0"], PE["delta_hf"],
                            regime="I")
    assert kg1 == pytest.approx(1.909e5, rel=2e-3)
    kg2 = kg_from_constants(PE["b0"], PE["sigma"], PE["sigma_e"], PE["Tm0"], PE["delta_hf"],
                            regime="II")
    kg3 = kg_from_constants(PE["b0"], PE["sigma"], PE["sigma_e"], PE["Tm0"], PE["delta_hf"],
                            regime="III")
    assert kg2 == pytest.approx(kg1 / 2, rel=1e-12)
    assert kg3 == pytest.approx(kg1, rel=1e-12)
    # and back
    ss = sigma_sigma_e_from_kg(kg2, PE["b0"], PE["Tm0"], PE["delta_hf"], regime="II")
    assert ss == pytest.approx(PE["sigma"] * PE["sigma_e"], rel=1e-12)


def test_regime_n_rejects_unknown_regime():
    assert regime_n("II") == 2 and regime_n("III") == 4
    with pytest.raises(CrystkinInputError):
        regime_n("IV")


def test_thomas_staveley_polyethylene():
    # sigma = alpha dh_f (a0 b0)^(1/2), alpha = 0.1 (Thomas & Staveley 1952, from memory).
    # By hand: 0.1 x 2.80e8 x sqrt(4.55e-10 x 4.15e-10) = 2.8e7 x 4.3454e-10
    # = 1.2167e-2 J/m^2 = 12.2 erg/cm^2 (SCIENCE.md, derived).
    s = thomas_staveley_sigma(PE["delta_hf"], PE["a0"], PE["b0"], alpha=0.1)
    assert s / 1e-3 == pytest.approx(12.17, abs=0.01)


def test_fold_work_by_hand():
    # q = 2 a0 b0 sigma_e = 2 x 4.55e-10 x 4.15e-10 x 0.090 = 3.399e-20 J per fold
    q = fold_work(PE["sigma_e"], PE["a0"], PE["b0"])
    assert q == pytest.approx(3.3989e-20, rel=1e-4)
    assert q * N_A / 1e3 == pytest.approx(20.47, abs=0.01)  # kJ per mole of folds


def test_hl_coordinates_match_the_shared_rate():
    # x = (Tm0 + T)/(2 T^2 (Tm0 - T)); the line y = ln G0 - Kg x reproduces ln G of
    # Hoffman & Miller 1997 as coded in kinetics.models.hoffman_lauritzen.
    T = np.linspace(390, 420, 7)
    Tm0, U, Ti, Kg, lnG0 = 459.25, 6276.0, 224.0, 5e5, 12.0
    lnG = hl_ln_rate(T, ln_prefactor=lnG0, Kg=Kg, U_star=U, T_inf=Ti, Tm0=Tm0)
    x, y = hl_coordinates(T, lnG, Tm0=Tm0, U_star=U, T_inf=Ti)
    np.testing.assert_allclose(y, lnG0 - Kg * x, rtol=1e-12)
    # by hand at T = 400 K: x = 859.25 / (2 x 160000 x 59.25)
    assert hl_x(400.0, Tm0) == pytest.approx(859.25 / (2 * 160000 * 59.25), rel=1e-12)
    assert hl_transport(400.0, U, Ti) == pytest.approx(6276 / (8.314462618 * 176), rel=1e-9)


def test_energy_terms_equal_the_numeric_derivative():
    # E(T) = -R d ln G / d(1/T) (Vyazovkin & Sbirrazzuoli 2004, from memory); SCIENCE.md
    # (derived): the formula matches a numeric derivative to < 1 J/mol over 300-405 K with
    # U* = 6276, T_inf = 201 K, Tm0 = 418.7 K, Kg = 2e5 K^2.
    p = {"U_star": 6276.0, "T_inf": 201.0, "Tm0": 418.7, "Kg": 2e5}
    T = np.linspace(300, 405, 30)
    u, g = hl_energy_terms(T, Tm0=p["Tm0"], T_inf=p["T_inf"])
    E = p["U_star"] * u + p["Kg"] * g
    h = 1e-7
    inv = 1 / T

    def lnG(invT):
        return hl_ln_rate(1 / invT, ln_prefactor=0.0, **p)

    num = -8.314462618 * (lnG(inv + h * inv) - lnG(inv - h * inv)) / (2 * h * inv)
    assert np.max(np.abs(E - num)) < 1.0
    np.testing.assert_allclose(E, hl_activation_energy(T, **p), rtol=1e-12)
    assert hl_energy_terms(418.0, Tm0=418.7, T_inf=201.0)[1] < 0  # E < 0 near Tm0


def test_hoffman_weeks_line_meets_tm_equals_tc_at_tm0():
    # Tm = Tm0 (1 - 1/gamma) + Tc/gamma (Hoffman & Weeks 1962): Tm = Tc at Tc = Tm0;
    # by hand for Tm0 = 460, gamma = 2, Tc = 400: 230 + 200 = 430 K.
    assert hoffman_weeks_tm(400.0, 460.0, 2.0) == pytest.approx(430.0)
    assert hoffman_weeks_tm(460.0, 460.0, 2.0) == pytest.approx(460.0)


def test_marand_form_reduces_to_linear_at_a_zero():
    # Marand, Xu & Srinivas 1998: with a = 0, Tm0/(Tm0 - Tm) = gamma Tm0/(Tm0 - Tc),
    # i.e. Tm0 - Tm = (Tm0 - Tc)/gamma, the linear Hoffman-Weeks line.
    Tc = np.array([380.0, 400.0, 420.0])
    np.testing.assert_allclose(marand_tm(Tc, 470.0, 1.7, 0.0), hoffman_weeks_tm(Tc, 470.0, 1.7))
    Tm = marand_tm(Tc, 470.0, 1.2, 3.0)
    np.testing.assert_allclose(470 / (470 - Tm), 1.2 * (470 / (470 - Tc) + 3.0), rtol=1e-12)


@settings(max_examples=50, deadline=None)
@given(st.floats(1e-9, 1e-7), st.floats(350, 600), st.floats(0.01, 0.2), st.floats(5e7, 5e8))
def test_gibbs_thomson_inverts_exactly(l_m, Tm0, sigma_e, dh):
    # Tm = Tm0 [1 - 2 sigma_e/(dh_f l)]; l = 2 sigma_e Tm0 / (dh_f (Tm0 - Tm)).
    Tm = gibbs_thomson_tm(l_m, Tm0, sigma_e, dh)
    assert gibbs_thomson_thickness(Tm, Tm0, sigma_e, dh) == pytest.approx(l_m, rel=1e-9)


def test_gibbs_thomson_by_hand():
    # Tm0 = 460 K, sigma_e = 0.06 J/m^2, dh_f = 1.9e8 J/m^3, l = 10 nm:
    # 2 x 0.06 / (1.9e8 x 1e-8) = 0.063158; 460 x (1 - 0.063158) = 430.947 K.
    assert gibbs_thomson_tm(10e-9, 460.0, 0.06, 1.9e8) == pytest.approx(430.947, abs=1e-3)


def test_bragg_cu_kalpha1_textbook_spacing():
    # n lambda = 2 d sin(theta) (NIST glossary); Cu K-alpha1 = 0.15406 nm (from memory).
    # 2 theta = 21.4 deg (the polyethylene (110) reflection): by hand
    # sin(10.7 deg) = 0.185667, d = 0.15406 / (2 x 0.185667) = 0.41488 nm.
    lam = CU_KALPHA1.value
    assert lam == pytest.approx(0.15406e-9)
    d = bragg_spacing(math.radians(10.7), lam)
    assert d / 1e-9 == pytest.approx(0.41488, abs=2e-5)
    assert bragg_angle(d, lam) == pytest.approx(math.radians(10.7), rel=1e-12)
    assert bragg_spacing(math.radians(10.7), lam, order=2) == pytest.approx(2 * d)


def test_long_period_is_the_bragg_spacing_at_the_peak():
    # q = 4 pi sin(theta)/lambda, so 2 pi / q = lambda / (2 sin theta) (Bragg, n = 1).
    theta = math.radians(0.5)
    q = scattering_vector(theta, CU_KALPHA1.value)
    assert long_period(q) == pytest.approx(bragg_spacing(theta, CU_KALPHA1.value), rel=1e-12)
    assert long_period(0.5e9) == pytest.approx(2 * math.pi / 0.5e9)  # q* = 0.5 nm^-1 -> 12.57 nm


def test_polyethylene_unit_cell_density():
    # Bunn, Trans. Faraday Soc. 35 (1939) 482 (from memory): orthorhombic, a = 7.40,
    # b = 4.93, c = 2.534 Angstrom, 4 CH2 per cell. By hand: V = 92.445 A^3 = 9.2445e-29 m^3;
    # m = 4 x 14.027e-3 / 6.02214076e23 = 9.3170e-26 kg; rho = 1007.8 kg/m^3
    # (SCIENCE.md: 1.008 g/cm^3; commonly quoted about 1.00 g/cm^3).
    cell = unit_cell("PE")
    rho = crystal_density(cell.a, cell.b, cell.c, z=cell.z, molar_mass=cell.molar_mass)
    assert rho == pytest.approx(1007.8, abs=0.2)
    assert cell_volume(7.40e-10, 4.93e-10, 2.534e-10) == pytest.approx(9.2445e-29, rel=1e-4)


def test_triclinic_volume_reduces_to_monoclinic_and_cube():
    # V = abc sqrt(1 - cos^2 a - cos^2 b - cos^2 g + 2 cos a cos b cos g):
    # monoclinic (alpha = gamma = 90 deg) gives abc sin(beta); a rhombohedral cell with
    # 60 deg angles is the primitive fcc cell, volume a^3/sqrt(2).
    beta = math.radians(99.3)
    assert cell_volume(6.65, 20.96, 6.50, beta=beta) == pytest.approx(
        6.65 * 20.96 * 6.50 * math.sin(beta), rel=1e-12)
    r = math.radians(60)
    assert cell_volume(1.0, 1.0, 1.0, r, r, r) == pytest.approx(1 / math.sqrt(2), rel=1e-12)


def test_density_crystallinity_by_hand():
    # X_c = rho_c (rho - rho_a) / (rho (rho_c - rho_a)); rho = 950, rho_c = 1000,
    # rho_a = 855 kg/m^3: 1000 x 95 / (950 x 145) = 0.689655; volume fraction 95/145.
    assert density_crystallinity(950.0, 1000.0, 855.0) == pytest.approx(0.689655, abs=1e-6)
    assert density_volume_crystallinity(950.0, 1000.0, 855.0) == pytest.approx(95 / 145)


def test_mass_volume_fractions_by_hand_and_round_trip():
    # V_c = W_c / [W_c + (rho_c/rho_a)(1 - W_c)] (Lorenzo et al. 2007, from memory):
    # W_c = 0.5, rho_c/rho_a = 1000/855 = 1.169591: 0.5 / (0.5 + 0.584795) = 0.460916.
    v = mass_to_volume_fraction(0.5, 1000.0, 855.0)
    assert v == pytest.approx(0.460916, abs=1e-6)
    assert volume_to_mass_fraction(v, 1000.0, 855.0) == pytest.approx(0.5, rel=1e-12)
    # consistent with the two-phase density formulas
    rho = 920.0
    assert mass_to_volume_fraction(density_crystallinity(rho, 1000, 855), 1000, 855) == \
        pytest.approx(density_volume_crystallinity(rho, 1000, 855), rel=1e-12)


def test_waxd_area_ratio():
    assert waxd_crystallinity(60.0, 40.0) == pytest.approx(0.6)


def test_two_stage_conversion_limits():
    # Velisaris & Seferis 1986 (from memory): X = w1 X1 + w2 X2, w1 + w2 = 1.
    t = np.linspace(0, 5000, 11)
    X = two_stage_conversion(t, 0.3, 2.5, 1e-5, 1.0, 1e-3)
    X1 = 1 - np.exp(-1e-5 * t ** 2.5)
    X2 = 1 - np.exp(-1e-3 * t)
    np.testing.assert_allclose(X, 0.7 * X1 + 0.3 * X2, rtol=1e-12)
    np.testing.assert_allclose(two_stage_conversion(t, 0.0, 2.5, 1e-5, 1.0, 1e-3), X1)


def test_functions_broadcast_over_walkers():
    T = np.linspace(390, 420, 5)[None, :]
    Tm0 = np.array([[455.0], [460.0], [465.0]])
    assert hl_x(T, Tm0).shape == (3, 5)
    assert hl_energy_terms(T, Tm0=Tm0, T_inf=np.array([[220.0], [225.0], [230.0]]))[1].shape \
        == (3, 5)


def test_table_constants_reproduce_the_checks():
    c = {k: polymer_constant("PE", k).value for k in ("b0", "sigma", "sigma_e", "Tm0",
                                                      "delta_hf")}
    assert kg_from_constants(c["b0"], c["sigma"], c["sigma_e"], c["Tm0"], c["delta_hf"],
                             regime="I") == pytest.approx(1.909e5, rel=2e-3)
    assert K_B == pytest.approx(1.380649e-23)
