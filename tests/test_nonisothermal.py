"""Jeziorny, Ozawa and Mo across cooling rates; the analyse_cooling entry point.

Outside references: Ozawa's equation (Ozawa, Polymer 12 (1971) 150, from
memory) with the Nakamura model (Nakamura et al., J. Appl. Polym. Sci. 16
(1972) 1077, from memory): a constant-rate Nakamura run is exactly of Ozawa
form with m = n and K(T) = (integral_T^T0 K(T') dT')^n, the integral by
scipy.integrate.quad. Jeziorny (Polymer 19 (1978) 1142, from memory) and Mo
(Liu, Mo et al., Polym. Eng. Sci. 37 (1997) 568, from memory) against
least-squares arithmetic done by hand on small tables. The runs are invented
(kinetics.synthetic_cooling).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.integrate import quad

from kinetics.analyses.nonisothermal import (
    JEZIORNY_CAUTION,
    analyse_cooling,
    jeziorny,
    jeziorny_points,
    mo,
    mo_points,
    ozawa,
    ozawa_points,
)
from kinetics.dataset import Trace
from kinetics.errors import CrystkinInputError, DataQualityWarning
from kinetics.models.hoffman_lauritzen import hl_rate
from kinetics.prep.cooling import prepare_cooling
from kinetics.synthetic_cooling import DEMO_HL, synthetic_cooling, synthetic_cooling_series

PER_MIN = 1 / 60
N_TRUE = 2.5
T_START = 453.15


def quiet_prepare(trace, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        return prepare_cooling(trace, **kw)


@pytest.fixture(scope="module")
def ozawa_runs():
    rates = np.array([5.0, 7.0, 10.0, 14.0, 20.0]) * PER_MIN
    runs = synthetic_cooling_series(rates, n=N_TRUE, T_start=T_START, noise=0.003,
                                    baseline_step=2e-5, drift=(1e-4, 2e-6), n_points=2500,
                                    seed=21)
    return [quiet_prepare(t) for t, _ in runs]


def test_ozawa_exact_on_constant_rate_nakamura_runs(ozawa_runs):
    res = ozawa(ozawa_runs, seed=1)
    rows = [r for r in res.rows if r.estimable]
    assert len(rows) >= 5
    for r in rows:
        integral, _ = quad(lambda T: hl_rate(T, **DEMO_HL), r.T_K, T_START, epsrel=1e-10,
                           limit=200)
        lnK_true = N_TRUE * np.log(60.0 * integral)  # beta in K/min: K(T) in (K/min)^m
        m = np.median(r.draws["m"])
        lnK = np.median(r.draws["lnK_T"])
        # the posterior (conversion-noise errors) holds the exact values ...
        for name, truth in (("m", N_TRUE), ("lnK_T", lnK_true)):
            lo, hi = np.quantile(r.draws[name], [0.001, 0.999])
            assert lo < truth < hi, (r.T_K, name)
        # ... and the medians are close to them (tightly where all five rates count)
        tol_m, tol_k = (0.01, 0.02) if len(r.rates_K_per_min) == 5 else (0.05, 0.08)
        assert m == pytest.approx(N_TRUE, abs=tol_m), r.T_K
        assert lnK == pytest.approx(lnK_true, abs=tol_k), r.T_K
    table = res.table()
    for col in ("T_K", "T_degC", "estimable", "n_rates", "m", "m_lo95", "m_hi95", "lnK_T",
                "lnK_T_lo95", "lnK_T_hi95", "scatter_factor", "rates_K_per_min", "note"):
        assert col in table.columns
    est = table[table.estimable]
    assert (est.m_lo95 < est.m).all() and (est.m < est.m_hi95).all()


def test_ozawa_rows_not_estimable_are_reported(ozawa_runs):
    T = np.array([380.0, 392.15, 420.0])
    res = ozawa(ozawa_runs, temperatures=T, seed=1)
    table = res.table()
    assert list(table.estimable) == [False, True, False]
    assert table.m.isna().tolist() == [True, False, True]
    assert "not estimable" in table.note[0] and "need 3" in table.note[0]
    assert any("not estimable" in w for w in res.warnings)


def test_jeziorny_hand_computed_table():
    # Small table, beta = 10 K/min, t = 1, e, e^2 min (x = ln t = 0, 1, 2) and
    # y = ln(-ln(1 - X)) = -2.0, -0.1, 1.9 (X = 1 - exp(-exp(y))). By hand:
    #   xbar = 1, ybar = (-2.0 - 0.1 + 1.9)/3 = -0.066667
    #   Sxx = 1 + 0 + 1 = 2
    #   Sxy = (-1)(-2.0 + 0.066667) + 0 + (1)(1.9 + 0.066667) = 1.933333 + 1.966667 = 3.9
    #   n = Sxy/Sxx = 1.95;  ln Zt = ybar - n xbar = -0.066667 - 1.95 = -2.016667
    #   log10 Zt = -2.016667 / 2.302585 = -0.875827
    #   log10 Zc = log10 Zt / beta = -0.0875827;  Zc = 10^-0.0875827 = 0.817367
    t = np.exp([0.0, 1.0, 2.0])
    y = np.array([-2.0, -0.1, 1.9])
    X = 1 - np.exp(-np.exp(y))
    sigma_X = 1e-3 * (1 - X) * -np.log1p(-X)  # equal errors of y, so equal weights
    fit = jeziorny_points(t, X, 10.0, sigma=sigma_X, seed=3)
    assert fit.fit.line.slope == pytest.approx(1.95, abs=1e-9)
    assert fit.fit.line.intercept == pytest.approx(-2.016667, abs=1e-6)
    for name, hand in (("n", 1.95), ("log10_Zt", -0.875827), ("log10_Zc", -0.0875827),
                       ("Zc", 0.817367)):
        assert np.median(fit.draws[name]) == pytest.approx(hand, abs=0.01), name
    row = fit.row()
    assert row["n_lo95"] < row["n"] < row["n_hi95"]
    assert row["scatter_factor"] > 1  # the points scatter far more than sigma


def test_jeziorny_on_runs_carries_caution(ozawa_runs):
    res = jeziorny(ozawa_runs, seed=2)
    assert res.caution == JEZIORNY_CAUTION
    assert "Vyazovkin, Polymers 15 (2023) 197" in res.caution
    assert "no kinetic meaning" in res.caution
    table = res.table()
    assert len(table) == 5
    for col in ("run_id", "beta_K_per_min", "n", "n_lo95", "n_hi95", "log10_Zt", "log10_Zc",
                "Zc", "Zc_lo95", "Zc_hi95", "n_linear", "r2_linear"):
        assert col in table.columns
    # log Zc = log Zt / beta, draw by draw (Jeziorny 1978)
    for f in res.fits:
        np.testing.assert_allclose(f.draws["log10_Zc"], f.draws["log10_Zt"] / f.beta_K_per_min)


def test_mo_hand_computed_table():
    # beta = 5, 10, 20 K/min; t = 2.0, 1.2, 0.7 min at one X. The measured quantity is t,
    # so the line is log10 t = c0 + c1 log10 beta (a = -1/c1, log10 F = -c0/c1). By hand:
    #   x = log10 beta = 0.698970, 1.000000, 1.301030;  xbar = 1 (log 5 + log 20 = 2)
    #   y = log10 t    = 0.301030, 0.079181, -0.154902; ybar = 0.075103
    #   Sxx = 2 (0.301030)^2 = 0.181238
    #   Sxy = -0.301030 (0.301030 - 0.075103) + 0.301030 (-0.154902 - 0.075103)
    #       = -0.301030 (0.225927 + 0.230005) = -0.137249
    #   c1 = Sxy/Sxx = -0.757287, c0 = ybar - c1 xbar = 0.832390
    #   a = 1/0.757287 = 1.320504, log10 F = 0.832390/0.757287 = 1.099174
    row = mo_points([5.0, 10.0, 20.0], [2.0, 1.2, 0.7], seed=4, X=0.5)
    assert row.fit.line.slope == pytest.approx(-0.757287, abs=2e-6)
    assert row.fit.line.intercept == pytest.approx(0.832390, abs=2e-6)
    assert np.median(row.draws["a"]) == pytest.approx(1.320504, abs=0.01)
    assert np.median(row.draws["log10_F_T"]) == pytest.approx(1.099174, abs=0.01)
    # points exactly on log beta = log F - a log t give F and a exactly (Mo's equation)
    a, logF = 1.4, 1.2
    t = np.array([3.0, 1.5, 0.8, 0.4])
    beta = 10 ** (logF - a * np.log10(t))
    exact = mo_points(beta, t, sigma_log_t=1e-8, seed=4)
    assert np.median(exact.draws["a"]) == pytest.approx(a, abs=1e-6)
    assert np.median(exact.draws["log10_F_T"]) == pytest.approx(logF, abs=1e-6)


def test_mo_on_runs(ozawa_runs):
    res = mo(ozawa_runs, conversions=[0.2, 0.5, 0.8], seed=5)
    table = res.table()
    assert list(table.X) == [0.2, 0.5, 0.8]
    for col in ("a", "a_lo95", "a_hi95", "log10_F_T", "log10_F_T_lo95", "log10_F_T_hi95",
                "T_mean_degC", "n_rates"):
        assert col in table.columns
    assert table.estimable.all() and (table.n_rates == 5).all()
    # F(T) = [K(T)/Zt]^(1/m) grows with X (a slower rate is needed to reach more)
    assert np.all(np.diff(table.log10_F_T) > 0)


def test_ozawa_point_table_exact():
    # X at one T from 1 - exp(-K/beta^m) with K = 300, m = 2.2 (Ozawa 1971)
    beta = np.array([5.0, 10.0, 20.0])
    X = 1 - np.exp(-300.0 / beta ** 2.2)
    row = ozawa_points(beta, X, sigma=1e-6, seed=6, T_K=400.0)
    assert -row.fit.line.slope == pytest.approx(2.2, abs=1e-9)
    assert row.fit.line.intercept == pytest.approx(np.log(300.0), abs=1e-9)
    assert np.median(row.draws["m"]) == pytest.approx(2.2, abs=1e-4)
    assert np.median(row.draws["lnK_T"]) == pytest.approx(np.log(300.0), abs=1e-4)


def test_single_rate_is_refused(ozawa_runs):
    with pytest.raises(CrystkinInputError, match="three|3 or more"):
        ozawa(ozawa_runs[:1])
    with pytest.raises(CrystkinInputError, match="3 or more different rates; got 2"):
        mo(ozawa_runs[:2])
    same = [ozawa_runs[0]] * 3
    with pytest.raises(CrystkinInputError, match="got 1"):
        ozawa(same)


def test_rates_that_do_not_overlap_in_temperature():
    runs = synthetic_cooling_series(np.array([1.0, 8.0, 64.0]) * PER_MIN, n_points=2000,
                                    seed=31)
    convs = [quiet_prepare(t) for t, _ in runs]
    with pytest.raises(CrystkinInputError, match="do not overlap in temperature"):
        ozawa(convs)


@pytest.fixture(scope="module")
def study_traces():
    traces = []
    for i, r in enumerate((5.0, 10.0, 20.0)):
        tr, _ = synthetic_cooling(rate=r * PER_MIN, group="A", run_id=f"A{r:g}", seed=40 + i,
                                  baseline_step=2e-5, n_points=1500)
        traces.append(tr)
    cut, _ = synthetic_cooling(rate=10 * PER_MIN, group="A", run_id="A10cut", T_end=388.15,
                               seed=44, n_points=1500)
    traces.append(cut)
    for i, r in enumerate((5.0, 20.0)):
        tr, _ = synthetic_cooling(rate=r * PER_MIN, group="B", run_id=f"B{r:g}", seed=50 + i,
                                  n_points=1500)
        traces.append(tr)
    bad, _ = synthetic_cooling(rate=10 * PER_MIN, group="A", run_id="Aheat", seed=60,
                               n_points=1500)
    traces.append(Trace(info=bad.info, time=bad.time, temperature=bad.temperature[::-1].copy(),
                        heat_flow=bad.heat_flow))
    return traces


def test_analyse_cooling_end_to_end(study_traces):
    res = analyse_cooling(study_traces, seed=7, vyazovkin_draws=50)
    assert [f[0] for f in res.failures] == ["Aheat"]
    assert "heating" in res.failures[0][1]
    assert res.used["A10cut"] is False
    assert any("A10cut" in w and "left out" in w for w in res.warnings)
    tables = res.tables()
    assert set(tables) == {"cooling_runs", "jeziorny", "ozawa", "mo", "friedman", "vyazovkin"}
    runs = tables["cooling_runs"]
    assert set(runs.run_id) == {"A5", "A10", "A20", "A10cut", "B5", "B20"}
    for col in ("group", "beta_K_per_min", "T_onset_degC", "T_peak_degC", "T_end_degC",
                "enthalpy_J_per_g", "lag_K", "cut_off", "used", "flags"):
        assert col in runs.columns
    assert set(res.ozawa) == {"A"} and set(res.friedman) == {"A"}
    assert set(res.jeziorny) == {"A", "B"}
    assert any("ozawa (group B): not possible" in w for w in res.warnings)
    assert set(tables["jeziorny"].run_id) == {"A5", "A10", "A20", "A10cut", "B5", "B20"}
    assert (tables["ozawa"].group == "A").all()
    assert JEZIORNY_CAUTION in res.cautions
    assert "kissinger" not in tables and res.kissinger == {}
    # the same seed gives the same numbers
    again = analyse_cooling(study_traces, seed=7, vyazovkin_draws=50).tables()
    np.testing.assert_array_equal(again["ozawa"].m.to_numpy(), tables["ozawa"].m.to_numpy())


def test_analyse_cooling_kissinger_on_request(study_traces):
    res = analyse_cooling(study_traces[:3], seed=1, kissinger=True, vyazovkin_draws=0)
    table = res.tables()["kissinger"]
    assert "unsound" in table.warning[0] and "cooling" in table.warning[0]
    assert any("Kissinger" in w and "unsound" in w for w in res.warnings)
    assert any("unsound" in c for c in res.cautions)
