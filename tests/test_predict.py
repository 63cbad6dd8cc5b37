"""Applying a rate model K(T) to temperature profiles (kinetics.analyses.predict).

The model values are the invented polypropylene-like "PX-40" demo constants of
kinetics.demo (Tm0 = 186 degC, Tg = -10 degC, T_inf = Tg - 30 K, U* = 6276 J/mol,
Kg = 3e5 K^2, t_half(130 degC) = 150 s, n = 2.7): invented, not measured.
"""

from __future__ import annotations

import dataclasses
import time

import numpy as np
import pytest
from scipy.constants import R
from scipy.integrate import solve_ivp

from kinetics import demo
from kinetics.analyses.predict import (
    SimulationModel,
    predict_from_profile,
    predict_profile,
    rate_constant,
)
from kinetics.cautions import PROCESS_CAUTION
from kinetics.errors import CrystkinInputError, DataQualityWarning
from kinetics.io.profile import constant_rate_profile, read_profile
from kinetics.models.avrami import avrami_conversion

N = 2.7


def _lnA():
    """ln (1/t_half)_0 giving t_half(130 degC) = 150 s, by hand from the HL form."""
    T = demo.T_REF
    return (-np.log(150.0) + demo.U_STAR / (R * (T - demo.T_INF))
            + demo.KG / (T * (demo.TM0 - T) * 2 * T / (demo.TM0 + T)))


def _K_by_hand(T, n=N, lnA=None, Kg=demo.KG):
    """K = (ln 2)^(1/n) / t_half with the Hoffman-Lauritzen 1/t_half, written out;
    0 in the melt (T >= Tm0)."""
    lnA = _lnA() if lnA is None else lnA
    T = np.asarray(T, dtype=float)
    Tc = np.minimum(T, demo.TM0 - 1.0)
    f = 2 * Tc / (demo.TM0 + Tc)
    inv_th = np.exp(lnA - demo.U_STAR / (R * (Tc - demo.T_INF))
                    - Kg / (Tc * (demo.TM0 - Tc) * f))
    return np.where(T < demo.TM0, np.log(2.0) ** (1 / n) * inv_th, 0.0)


def _model(n_draws=1, spread=0.0, validity=((380.0, 410.0), (0.0, 20 / 60)), seed=0):
    rng = np.random.default_rng(seed)
    d = np.column_stack([
        N + spread * 0.02 * rng.standard_normal(n_draws),
        _lnA() + spread * 0.05 * rng.standard_normal(n_draws),
        np.full(n_draws, demo.KG), np.full(n_draws, demo.U_STAR),
        np.full(n_draws, demo.T_INF), np.full(n_draws, demo.TM0)])
    return SimulationModel(draws=d, parameters={},
                           validity={"temperature_K": validity[0],
                                     "cooling_rate_K_per_s": validity[1]},
                           glass_transition_K=demo.TG, study_name="invented PX-40")


def test_rate_constant_matches_hand_formula():
    T = np.array([360.0, 390.0, 403.15, 420.0])
    K = rate_constant(T, _model().draws)[0]
    assert np.allclose(K, _K_by_hand(T), rtol=1e-12)
    # t_half(130 degC) = 150 s by construction: K = (ln 2)^(1/n) / 150
    K130 = rate_constant(np.array([demo.T_REF]), _model().draws)[0, 0]
    assert K130 == pytest.approx(np.log(2.0) ** (1 / N) / 150.0, rel=1e-12)
    # no crystallization in the melt or at or below T_inf
    assert np.all(rate_constant(np.array([demo.TM0, demo.TM0 + 5, demo.T_INF]),
                                _model().draws) == 0)


def test_constant_temperature_is_avrami_with_k_equal_K_to_the_n():
    """Nakamura et al., J. Appl. Polym. Sci. 16 (1972) 1077: at constant T the
    model is Avrami's X = 1 - exp(-k t^n) with k = K^n."""
    T = 398.15
    t = np.linspace(0.0, 600.0, 301)
    X = _model().conversion(t, np.full_like(t, T))[0]
    k = _K_by_hand(T) ** N
    assert np.allclose(X, avrami_conversion(t, N, k), atol=1e-12)


def test_integral_form_agrees_with_differential_form_on_newtonian_cooling():
    """Patel & Spruiell, Polym. Eng. Sci. 31 (1991) 730: dX/dt = n K (1 - X)
    (-ln(1 - X))^((n-1)/n), integrated with scipy's solve_ivp from a seed
    X0 = 1e-12 (dX/dt = 0 at X = 0); the integral form starts from X = 0, so the
    two differ by the seed's theta0 = (1e-12)^(1/n) ~ 4e-5 at most."""
    t_end, tau = 200.0, 15.0

    def T_of(t):
        return 313.15 + 190.0 * np.exp(-t / tau)

    def rhs(t, y):
        X = min(max(y[0], 1e-300), 1 - 1e-15)
        return [N * _K_by_hand(T_of(t)) * (1 - X) * (-np.log1p(-X)) ** ((N - 1) / N)]

    sol = solve_ivp(rhs, (0.0, t_end), [1e-12], method="RK45", rtol=1e-9, atol=1e-13,
                    dense_output=True)
    t = np.linspace(0.0, t_end, 4001)
    p = predict_profile(_model(), t, T_of(t), targets=(0.5,), warn=False)
    X_ode = sol.sol(p.time_s)[0]
    assert p.X_median[-1] > 0.99
    assert np.max(np.abs(p.X_median - X_ode)) < 2e-4


def test_rule_of_thumb_mold_cooling():
    """Common practice, no source: a polypropylene-like grade cooled in a mold at
    typical rates crystallizes within seconds to a minute or two, and faster
    cooling shifts crystallization to lower temperature. Newtonian cooling from a
    230 degC melt to a 40 degC mold, time constants 5-20 s (thin to thicker walls)."""
    t = np.linspace(0.0, 300.0, 6001)
    T50 = []
    for tau in (20.0, 10.0, 5.0):
        T = 313.15 + 190.0 * np.exp(-t / tau)
        p = predict_profile(_model(), t, T, warn=False)
        t99 = p.targets[2].time_s
        assert 1.0 < t99 < 120.0
        T50.append(p.targets[0].temperature_K)
    assert T50[0] > T50[1] > T50[2]
    slow = constant_rate_profile(start="230 degC", end="20 degC", rate="10 K/min")
    fast = constant_rate_profile(start="230 degC", end="20 degC", rate="100 K/min")
    T_slow = predict_from_profile(_model(), slow, warn=False).targets[0].temperature_K
    T_fast = predict_from_profile(_model(), fast, warn=False).targets[0].temperature_K
    assert T_fast < T_slow - 5.0


def test_targets_band_and_caution():
    prof = constant_rate_profile(start="230 degC", end="20 degC", rate="10 K/min")
    p = predict_from_profile(_model(n_draws=200, spread=1.0), prof, warn=False)
    for r in p.targets:
        assert r.fraction_reached == 1.0
        assert r.time_lo95_s < r.time_s < r.time_hi95_s
        assert r.temperature_lo95_K < r.temperature_K < r.temperature_hi95_K
    assert p.targets[0].time_s < p.targets[1].time_s < p.targets[2].time_s
    assert np.all(p.X_lo95 <= p.X_median) and np.all(p.X_median <= p.X_hi95)
    tab = p.table()
    assert list(tab["target_conversion"]) == [0.5, 0.9, 0.99]
    assert (tab["caution"] == PROCESS_CAUTION).all()
    assert tab.attrs["caution"] == PROCESS_CAUTION
    assert p.curve().attrs["caution"] == PROCESS_CAUTION
    assert p.text().endswith(PROCESS_CAUTION)
    # the median time of 50 % agrees with the median X curve crossing 0.5
    i = int(np.argmax(p.X_median >= 0.5))
    assert p.time_s[i - 1] <= p.targets[0].time_s <= p.time_s[i] + 1.0


def test_not_reached_before_glass_transition():
    # Tg moved to 110 degC for this check (the demo grade's is -10 degC)
    m = dataclasses.replace(_model(), glass_transition_K=383.15)
    prof = constant_rate_profile(start="230 degC", end="20 degC", rate="50 K/min")
    p = predict_from_profile(m, prof, warn=False)
    assert all(not r.reached for r in p.targets)
    assert "not reached before the glass transition (Tg = 110.0 degC" in p.targets[0].statement
    assert np.isnan(p.targets[0].time_s)
    # once glassy, conversion no longer changes
    glassy = p.temperature_K < 383.15
    assert np.ptp(p.X_median[glassy]) == 0.0


def test_not_reached_by_end_of_profile():
    prof = constant_rate_profile(start="230 degC", end="150 degC", rate="10 K/min")
    p = predict_from_profile(_model(), prof, warn=False)
    assert "not reached by the end of the profile" in p.targets[0].statement


def test_profile_that_heats_is_rejected_with_its_row(tmp_path):
    f = tmp_path / "reheat.csv"
    f.write_text("time (s),temperature (degC)\n0,230\n10,150\n20,120\n30,126\n40,100\n",
                 encoding="utf-8")
    with pytest.raises(CrystkinInputError, match=r"reheat.csv: the profile heats: at row 5 "
                                                 r"\(t = 30 s\).*6.00 K above"):
        predict_from_profile(_model(), read_profile(f), warn=False)
    # noise below the tolerance, or heating in the melt, is accepted
    t = np.array([0.0, 10.0, 20.0, 30.0, 40.0])
    predict_profile(_model(), t, np.array([503.15, 470.0, 470.3, 420.0, 390.0]), warn=False)
    predict_profile(_model(), t, np.array([480.0, 470.0, 475.0, 420.0, 390.0]), warn=False)


def test_profile_outside_validity_warns_by_how_much():
    m = _model(validity=((385.0, 400.0), (0.0, 20 / 60)))
    prof = constant_rate_profile(start="230 degC", end="20 degC", rate="100 K/min")
    with pytest.warns(DataQualityWarning) as rec:
        p = predict_from_profile(m, prof)
    msgs = [str(w.message) for w in rec]
    # the fastest fitted run was 20 K/min; the profile cools at 100 K/min: 80 K/min faster
    assert any("80 K/min faster than the fastest fitted run (20 K/min)" in s for s in msgs)
    X, T = p.X_median, p.temperature_K
    i0, i1 = int(np.argmax(X >= 0.01)), int(np.argmax(X >= 0.99))
    below = 385.0 - T[i0:i1 + 1].min()
    assert below > 1.0
    assert any(f"{below:.1f} K below the lowest temperature" in s for s in msgs)
    assert p.warnings == tuple(s.split(": ", 1)[1] for s in msgs)


def test_bad_targets():
    prof = constant_rate_profile(start="230 degC", end="20 degC", rate="10 K/min")
    with pytest.raises(CrystkinInputError, match="'targets' parameter"):
        predict_from_profile(_model(), prof, targets=(0.5, 1.0))


def test_predict_is_fast():
    m = _model(n_draws=200, spread=1.0)
    t = np.linspace(0.0, 120.0, 4000)
    T = 313.15 + 190.0 * np.exp(-t / 10.0)
    best = min(_timed(m, t, T) for _ in range(3))
    assert best < 1.0, f"predict took {best:.2f} s"


def _timed(m, t, T):
    t0 = time.perf_counter()
    predict_profile(m, t, T, warn=False)
    return time.perf_counter() - t0
