"""Equilibrium melting point: Hoffman-Weeks (linear, nonlinear), Gibbs-Thomson, melting peaks.

Melting data here are invented: generated from the published relations with known
Tm0, gamma, a, sigma_e plus noise.
"""

from __future__ import annotations

import numpy as np
import pytest

from kinetics.analyses.melting import (
    HW_CAUTION,
    gibbs_thomson,
    hoffman_weeks,
    lamellar_thickness_from_saxs,
    marand_xu_srinivas,
    melting_points,
)
from kinetics.dataset import RunInfo, Trace
from kinetics.errors import CrystkinInputError
from kinetics.models.growth import gibbs_thomson_tm, hoffman_weeks_tm, marand_tm
from kinetics.prep.melting import melting_peak

TC = np.array([393.0, 398.0, 403.0, 408.0, 413.0])


def inside(row, name, value):
    return row[f"{name}_lo95"] <= value <= row[f"{name}_hi95"]


def test_hoffman_weeks_recovers_tm0_and_gamma():
    # Tm = Tm0 (1 - 1/gamma) + Tc/gamma (Hoffman & Weeks 1962) with Tm0 = 460 K, gamma = 2
    rng = np.random.default_rng(3)
    Tm = hoffman_weeks_tm(TC, 460.0, 2.0) + rng.normal(0, 0.2, len(TC))
    res = hoffman_weeks(TC, Tm, seed=1)
    row = res.table().iloc[0]
    assert inside(row, "Tm0_K", 460.0) and inside(row, "gamma", 2.0)
    assert row.Tm0_degC == pytest.approx(row.Tm0_K - 273.15)
    assert "Yamada" in row.caution and HW_CAUTION in res.cautions
    exact = hoffman_weeks(TC, hoffman_weeks_tm(TC, 460.0, 2.0), T_m_sd=1e-6)
    assert np.median(exact.Tm0) == pytest.approx(460.0, abs=1e-3)
    assert res.band().shape == (100, 4)


def test_hoffman_weeks_slope_above_one_is_flagged():
    Tm = TC + 20 + 0.2 * (TC - TC[0])  # slope 1.2: no intersection with Tm = Tc
    res = hoffman_weeks(TC, Tm)
    assert res.table().iloc[0].fraction_valid < 0.05
    assert any("does not meet" in f for f in res.flags)


def test_marand_xu_srinivas_recovers_tm0_with_gamma_fixed():
    # Tm0/(Tm0 - Tm) = gamma [Tm0/(Tm0 - Tc) + a] (Marand, Xu & Srinivas 1998),
    # Tm0 = 470 K, gamma = 1, a = 2
    rng = np.random.default_rng(8)
    Tm = marand_tm(TC, 470.0, 1.0, 2.0) + rng.normal(0, 0.1, len(TC))
    res = marand_xu_srinivas(TC, Tm, seed=2)
    row = res.table().iloc[0]
    assert inside(row, "Tm0_K", 470.0) and inside(row, "a", 2.0)
    assert row.method.startswith("Hoffman-Weeks nonlinear")
    assert len(res.cautions) == 2
    # the linear extrapolation of the same data is biased low
    assert hoffman_weeks(TC, Tm).table().iloc[0].Tm0_K_hi95 < 470.0


def test_gibbs_thomson_recovers_tm0_and_sigma_e():
    # Tm = Tm0 [1 - 2 sigma_e/(dh_f l)], Tm0 = 460 K, sigma_e = 0.06 J/m^2, dh_f = 1.9e8 J/m^3
    l_m = np.array([5, 7, 10, 15, 20]) * 1e-9
    rng = np.random.default_rng(1)
    Tm = gibbs_thomson_tm(l_m, 460.0, 0.06, 1.9e8) + rng.normal(0, 0.2, len(l_m))
    res = gibbs_thomson(l_m, Tm, delta_hf=1.9e8)
    row = res.table().iloc[0]
    assert inside(row, "Tm0_K", 460.0) and inside(row, "sigma_e_J_per_m2", 0.06)
    exact = gibbs_thomson(l_m, gibbs_thomson_tm(l_m, 460.0, 0.06, 1.9e8), delta_hf=1.9e8,
                          T_m_sd=1e-6)
    assert np.median(exact.Tm0) == pytest.approx(460.0, abs=1e-4)
    assert np.median(exact.draws["sigma_e"]) == pytest.approx(0.06, rel=1e-6)


def test_lamellar_thickness_from_saxs():
    # L = 2 pi / q*: q* = 0.5 nm^-1 gives 12.566 nm; l = L x 0.5 = 6.283 nm.
    l_m, L = lamellar_thickness_from_saxs(0.5, q_peak=0.5e9)
    assert L == pytest.approx(12.566e-9, rel=1e-4) and l_m == pytest.approx(6.283e-9, rel=1e-4)
    # Bragg with Cu K-alpha1 (0.15406 nm, from memory): 2 theta = 0.7 deg ->
    # L = 0.15406 / (2 sin 0.35 deg) = 0.15406 / 0.0122173 = 12.610 nm.
    _, L2 = lamellar_thickness_from_saxs(0.4, two_theta=np.radians(0.7))
    assert L2 == pytest.approx(12.610e-9, rel=1e-3)
    with pytest.raises(CrystkinInputError, match="fraction"):
        lamellar_thickness_from_saxs(45.0, q_peak=0.5e9)
    with pytest.raises(CrystkinInputError, match="exactly one"):
        lamellar_thickness_from_saxs(0.4)


@pytest.mark.parametrize("call, match", [
    (lambda: hoffman_weeks([400, 405], [430, 432]), "fewer than the 3"),
    (lambda: hoffman_weeks([400, 400, 400], [430, 431, 432]), "same T_c"),
    (lambda: hoffman_weeks([400, 405, 410], [430, 401, 432]), "not above"),
    (lambda: gibbs_thomson([5e-9, 1e-8, -1e-8], [420, 430, 440], delta_hf=1.9e8), "positive"),
    (lambda: gibbs_thomson([5, 10, 20], [420, 430, 440], delta_hf=1.9e8), "in m"),
])
def test_bad_input(call, match):
    with pytest.raises(CrystkinInputError, match=match):
        call()


def _heating_trace(run_id, peak_K, *, hold=None, exotherm="up", seed=0):
    """Invented heating run (10 K/min) with a Gaussian melting endotherm."""
    rng = np.random.default_rng(seed)
    t = np.arange(0, 1500, 0.5)
    T = 320 + t / 6
    q = 0.01 + 1e-6 * t - 2.0 * np.exp(-0.5 * ((T - peak_K) / 2.0) ** 2)
    q = (q + rng.normal(0, 0.005, len(t))) * 1e-3
    if exotherm == "down":
        q = -q
    info = RunInfo(run_id, "heating", rate=10 / 60, hold_temperature=hold, exotherm=exotherm,
                   source=f"invented:{run_id}")
    return Trace(info, t, T, q)


@pytest.mark.parametrize("exotherm", ["up", "down"])
def test_melting_peak_temperature(exotherm):
    pk = melting_peak(_heating_trace("m", 437.3, hold=400.0, exotherm=exotherm))
    assert pk.temperature == pytest.approx(437.3, abs=0.05)
    assert pk.hold_temperature == 400.0 and float(pk) == pk.temperature


def test_melting_peak_errors():
    tr = _heating_trace("m", 437.3)
    with pytest.raises(CrystkinInputError, match="widen"):
        melting_peak(tr, window=(400.0, 401.0))
    flat = Trace(RunInfo("f", "heating", rate=10 / 60, exotherm="up"), tr.time, tr.temperature,
                 np.random.default_rng(0).normal(0, 1e-6, tr.n_points))
    with pytest.raises(CrystkinInputError, match="no melting endotherm"):
        melting_peak(flat)
    iso = Trace(RunInfo("i", "isothermal", temperature=400.0), tr.time, tr.temperature,
                tr.heat_flow)
    with pytest.raises(CrystkinInputError, match="heating run"):
        melting_peak(iso)


def test_melting_points_table_feeds_hoffman_weeks():
    traces = [_heating_trace(f"m{i}", float(hoffman_weeks_tm(tc, 460.0, 2.0)), hold=float(tc),
                             seed=i) for i, tc in enumerate(TC)]
    traces.append(_heating_trace("no-hold", 430.0))
    df = melting_points(traces)
    assert list(df.run_id) == [f"m{i}" for i in range(5)]
    res = hoffman_weeks(df.T_c_K, df.T_m_K)
    assert inside(res.table().iloc[0], "Tm0_K", 460.0)
