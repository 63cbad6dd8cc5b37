"""Friedman and Vyazovkin isoconversional E of cooling runs; Kissinger only with its warning.

Outside references: for a Nakamura process dX/dt = K(T) f(X) (Nakamura et al.,
J. Appl. Polym. Sci. 16 (1972) 1077, from memory), so the isoconversional E at
any conversion is -R d ln K / d(1/T), the activation energy of the n-th root
rate K, not of the Avrami k = K^n. What is compared below:

* K(T) of Hoffman–Lauritzen form: Friedman's E_X against the closed form
  E(T) = U* T^2/(T - T_inf)^2 + Kg R (Tm0^2 - T^2 - Tm0 T)/((Tm0 - T)^2 T)
  (Vyazovkin & Sbirrazzuoli, Macromol. Rapid Commun. 25 (2004) 733, from
  memory) at T = 1/mean(1/T_X,i), the centre of the runs in the Friedman plot,
  within 3 % over 10-90 % conversion, and E(T) inside the 95 % interval. The
  tolerance allows for the curvature of ln K across the 5-20 K/min runs
  (about 10 K at each X), which a straight line averages over;
* K(T) of Arrhenius form with constant E: both methods must return that E;
* Vyazovkin's integral method against Friedman on the same runs, within 2 %.

Kissinger: the warning of Vyazovkin, Macromol. Rapid Commun. 23 (2002) 771 and
Molecules 25 (2020) 2813 must always be carried; its arithmetic against
numpy.polyfit. The runs are invented (kinetics.synthetic_cooling).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.constants import R

from kinetics.analyses.isoconversional import (
    KISSINGER_WARNING,
    friedman,
    kissinger,
    vyazovkin,
    vyazovkin_energy,
    vyazovkin_phi,
)
from kinetics.errors import CrystkinInputError, DataQualityWarning
from kinetics.models.hoffman_lauritzen import hl_activation_energy
from kinetics.prep.cooling import prepare_cooling
from kinetics.synthetic_cooling import DEMO_HL, synthetic_cooling_series

PER_MIN = 1 / 60
RATES = np.array([5.0, 7.0, 10.0, 14.0, 20.0]) * PER_MIN
LEVELS = np.round(np.arange(0.1, 0.91, 0.1), 2)


def prepare_all(runs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        return [prepare_cooling(t) for t, _ in runs]


@pytest.fixture(scope="module")
def hl_runs():
    return prepare_all(synthetic_cooling_series(RATES, n=2.5, noise=0.003, baseline_step=2e-5,
                                                drift=(1e-4, 2e-6), n_points=3000, seed=61))


@pytest.fixture(scope="module")
def hl_friedman(hl_runs):
    return friedman(hl_runs, conversions=LEVELS, seed=1)


E_ARRHENIUS = -150e3  # J/mol, invented; negative: the rate grows on cooling
LN_A = np.log(0.02) + E_ARRHENIUS / (R * 390.0)  # K = 0.02 1/s at 390 K


def K_arrhenius(T):
    return np.exp(LN_A - E_ARRHENIUS / (R * np.asarray(T, dtype=float)))


@pytest.fixture(scope="module")
def arrhenius_runs():
    return prepare_all(synthetic_cooling_series(RATES, n=2.0, K_of_T=K_arrhenius, noise=0.003,
                                                n_points=3000, seed=71))


def test_friedman_recovers_hl_activation_energy(hl_friedman):
    p = {k: DEMO_HL[k] for k in ("U_star", "T_inf", "Kg", "Tm0")}
    for row in hl_friedman.rows:
        assert row.estimable and len(row.T_K) == 5
        T_centre = 1.0 / np.mean(1.0 / np.asarray(row.T_K))
        E_true = hl_activation_energy(T_centre, **p) / 1e3
        E = np.median(row.draws["E_kJ_per_mol"])
        assert E == pytest.approx(E_true, rel=0.03), row.X
        lo, hi = np.quantile(row.draws["E_kJ_per_mol"], [0.025, 0.975])
        assert lo < E_true < hi, row.X
    table = hl_friedman.table()
    for col in ("X", "T_mean_K", "T_mean_degC", "E_kJ_per_mol", "E_kJ_per_mol_lo95",
                "E_kJ_per_mol_hi95", "ln_Af", "n_runs", "scatter_factor", "estimable"):
        assert col in table.columns
    # E(T) of HL form is negative below Tm0 and rises towards 0 as T falls here
    assert (table.E_kJ_per_mol < 0).all() and np.all(np.diff(table.E_kJ_per_mol) > 0)


def test_vyazovkin_agrees_with_friedman(hl_runs, hl_friedman):
    res = vyazovkin(hl_runs, conversions=LEVELS, n_draws=60, seed=2)
    vt, ft = res.table(), hl_friedman.table()
    np.testing.assert_allclose(vt.E_point_kJ_per_mol, ft.E_kJ_per_mol, rtol=0.02)
    # the median of the resampled estimates stays near the point estimate
    half = 0.5 * (vt.E_kJ_per_mol_hi95 - vt.E_kJ_per_mol_lo95)
    assert (np.abs(vt.E_kJ_per_mol - vt.E_point_kJ_per_mol) < 0.25 * half).all()
    assert (vt.E_jackknife_sd_kJ_per_mol > 0).all()
    assert (vt.E_kJ_per_mol_lo95 < vt.E_kJ_per_mol).all()
    assert (vt.E_kJ_per_mol < vt.E_kJ_per_mol_hi95).all()
    assert (vt.n_draws == 60).all() and (vt.phi_min_ratio >= 1.0 - 1e-9).all()
    np.testing.assert_allclose(vt.X_to - vt.X_from, 0.02)
    np.testing.assert_allclose(vt.T_mean_K, ft.T_mean_K, atol=0.2)


def test_both_methods_recover_a_constant_activation_energy(arrhenius_runs):
    f = friedman(arrhenius_runs, conversions=LEVELS, seed=3).table()
    v = vyazovkin(arrhenius_runs, conversions=LEVELS, n_draws=0, seed=3).table()
    np.testing.assert_allclose(f.E_kJ_per_mol, E_ARRHENIUS / 1e3, rtol=0.01)
    np.testing.assert_allclose(v.E_point_kJ_per_mol, E_ARRHENIUS / 1e3, rtol=0.01)
    assert v.E_kJ_per_mol.isna().all()  # no resampling asked for
    w = vyazovkin(arrhenius_runs, conversions=[0.3, 0.7], n_draws=80, seed=3).table()
    assert (w.E_kJ_per_mol_lo95 < E_ARRHENIUS / 1e3).all()
    assert (E_ARRHENIUS / 1e3 < w.E_kJ_per_mol_hi95).all()
    assert (w.E_jackknife_sd_kJ_per_mol < 0.01 * abs(E_ARRHENIUS) / 1e3).all()


def test_phi_criterion_properties():
    t = np.linspace(0.0, 10.0, 50)
    T = 400.0 - 0.2 * t
    segs = [(t, T)] * 4
    E = np.array([-3e5, 0.0, 2e5])
    # identical runs: every ratio is 1, Phi = n (n - 1) = 12 for any E
    np.testing.assert_allclose(vyazovkin_phi(E, segs), 12.0, rtol=1e-12)
    # runs of one Arrhenius process: the integrals J_i are equal at the true E0, so
    # Phi reaches its least value n (n - 1) = 6 there (Vyazovkin 1997, from memory)
    E0 = -1.2e5
    segs = []
    for beta in (0.1, 0.2, 0.4):
        t_run = np.linspace(0.0, 200.0, 4001)
        T_run = 400.0 - beta * t_run
        w = np.exp(-E0 / (R * T_run) + E0 / (R * 400.0))
        c = np.concatenate([[0.0], np.cumsum(0.5 * (w[1:] + w[:-1]) * np.diff(t_run))])
        t_end = float(np.interp(30.0, c, t_run))  # same J = 30 s (relative to 400 K)
        inside = t_run < t_end
        tt = np.append(t_run[inside], t_end)
        segs.append((tt, 400.0 - beta * tt))
    E_hat, phi_min, edge = vyazovkin_energy(segs)
    assert not edge
    assert E_hat == pytest.approx(E0, rel=1e-3)
    assert phi_min == pytest.approx(6.0, abs=1e-4)
    assert np.all(vyazovkin_phi(np.array([E_hat - 5e3, E_hat + 5e3]), segs) > phi_min)


def test_fewer_than_three_rates_refused(hl_runs):
    for fn in (friedman, vyazovkin, kissinger):
        with pytest.raises(CrystkinInputError, match="3 or more different rates"):
            fn(hl_runs[:2])


def test_kissinger_always_warns_and_matches_polyfit(hl_runs):
    res = kissinger(hl_runs, seed=4)
    assert res.warning == KISSINGER_WARNING and KISSINGER_WARNING in res.warnings
    for needle in ("unsound", "cooling", "Macromol. Rapid Commun. 23 (2002) 771",
                   "Molecules 25 (2020) 2813"):
        assert needle in res.warning
    beta = np.array([c.baseline["beta_K_per_s"] * 60 for c in hl_runs])
    Tp = np.array([c.baseline["T_peak_K"] for c in hl_runs])
    slope, _ = np.polyfit(1 / Tp, np.log(beta / Tp ** 2), 1)
    assert res.fit.line.slope == pytest.approx(slope, rel=1e-9)
    assert np.median(res.draws["E_kJ_per_mol"]) == pytest.approx(-slope * R / 1e3, rel=0.02)
    table = res.table()
    assert table.warning[0] == KISSINGER_WARNING
    assert {"E_kJ_per_mol", "E_kJ_per_mol_lo95", "E_kJ_per_mol_hi95"} <= set(table.columns)


def test_bad_options(hl_runs):
    with pytest.raises(CrystkinInputError, match="conversions must lie"):
        friedman(hl_runs, conversions=[0.005])
    with pytest.raises(CrystkinInputError, match="'bracket'"):
        vyazovkin(hl_runs, bracket=(1e5, -1e5))
