"""Hoffman-Lauritzen analysis: regimes recovered from invented data, bad input, E(T) route.

All rate data here are invented (generated from the Hoffman-Lauritzen form with known
parameters plus noise); the constants are the iPP-like and PE values of SCIENCE.md.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from kinetics.analyses.growth import (
    compare_kg,
    fit_growth_rates,
    fit_hoffman_lauritzen,
    hl_from_activation_energy,
    hoffman_lauritzen_from_growth,
    hoffman_lauritzen_from_half_times,
    hoffman_lauritzen_from_isotherms,
    hoffman_lauritzen_from_table,
)
from kinetics.errors import CrystkinInputError
from kinetics.io.growth import RadiusTable, read_rate_table
from kinetics.models.growth import hl_transport, hl_x
from kinetics.models.hoffman_lauritzen import hl_activation_energy, hl_ln_rate

TM0, T_INF, U = 459.25, 224.0, 6276.0
T_GRID = np.arange(390.0, 422.0, 2.0)


def hinge_ln_rate(T, *, Kg_low, Kg_high, T_break, c=20.0, Tm0=TM0):
    """ln(rate) of two HL lines meeting at T_break (invented data)."""
    x, xb = hl_x(T, Tm0), hl_x(T_break, Tm0)
    y = c - Kg_low * np.minimum(x - xb, 0) - Kg_high * np.maximum(x - xb, 0)
    return y - hl_transport(T, U, T_INF)


def inside(row, name, value):
    return row[f"{name}_lo95"] <= value <= row[f"{name}_hi95"]


@pytest.mark.parametrize("known_sd", [True, False])
def test_regime_break_and_both_kg_recovered(known_sd):
    rng = np.random.default_rng(11)
    truth = {"Kg_low": 6e5, "Kg_high": 3e5, "T_break": 407.0}
    sd = 0.05
    lnr = hinge_ln_rate(T_GRID, **truth) + rng.normal(0, sd, len(T_GRID))
    rate = np.exp(lnr)
    res = fit_hoffman_lauritzen(T_GRID, rate, rate_sd=sd * rate if known_sd else None,
                                Tm0=TM0, T_inf=T_INF, seed=2, n_draws=1000)
    assert res.chosen == "two lines"
    assert res.noise == ("known" if known_sd else "estimate")
    tab = res.table()
    hi = tab[(tab.model == "two lines") & (tab.segment == "high T")].iloc[0]
    lo = tab[(tab.model == "two lines") & (tab.segment == "low T")].iloc[0]
    assert inside(hi, "Kg_K2", truth["Kg_high"])
    assert inside(lo, "Kg_K2", truth["Kg_low"])
    assert inside(hi, "T_break_K", truth["T_break"])
    assert inside(hi, "Kg_ratio_low_over_high", 2.0)
    assert (hi.regime, lo.regime) == ("II", "III")
    assert bool(hi.chosen) and not bool(tab[tab.model == "one line"].iloc[0].chosen)
    assert res.band().shape[0] == 100
    assert set(res.points().columns) >= {"x_hl_per_K2", "y_hl", "side"}


def test_straight_line_data_give_one_line_and_kg():
    rng = np.random.default_rng(5)
    Kg = 4.5e5
    lnr = hl_ln_rate(T_GRID, ln_prefactor=18.0, Kg=Kg, U_star=U, T_inf=T_INF, Tm0=TM0)
    lnr = lnr + rng.normal(0, 0.05, len(T_GRID))
    res = fit_hoffman_lauritzen(T_GRID, np.exp(lnr), Tm0=TM0, T_inf=T_INF, seed=1,
                                n_draws=1000)
    assert res.chosen == "one line"
    row = res.table().iloc[0]
    assert row.model == "one line" and inside(row, "Kg_K2", Kg)
    assert inside(row, "ln_prefactor", 18.0)


def test_uncertainty_of_tm0_u_star_and_t_inf_widens_the_interval():
    rng = np.random.default_rng(5)
    lnr = hl_ln_rate(T_GRID, ln_prefactor=18.0, Kg=4.5e5, U_star=U, T_inf=T_INF, Tm0=TM0)
    rate = np.exp(lnr + rng.normal(0, 0.05, len(T_GRID)))
    base = fit_hoffman_lauritzen(T_GRID, rate, Tm0=TM0, T_inf=T_INF, segments="one",
                                 n_draws=800)
    wide = fit_hoffman_lauritzen(T_GRID, rate, Tm0=TM0, Tm0_sd=3.0, T_inf=T_INF, T_inf_sd=5.0,
                                 U_star_sd=300.0, segments="one", n_draws=800, n_nuisance=100)
    w0 = np.subtract(*np.quantile(base.Kg(), [0.975, 0.025]))
    w1 = np.subtract(*np.quantile(wide.Kg(), [0.975, 0.025]))
    assert w1 > 3 * w0
    assert np.std(wide.draws["Tm0"]) == pytest.approx(3.0, rel=0.25)
    assert wide.draws["Tm0"].min() > T_GRID.max()


def test_point_sds_too_small_are_scaled_and_flagged():
    rng = np.random.default_rng(3)
    lnr = hl_ln_rate(T_GRID, ln_prefactor=18.0, Kg=4.5e5, U_star=U, T_inf=T_INF, Tm0=TM0)
    rate = np.exp(lnr + rng.normal(0, 0.1, len(T_GRID)))
    res = fit_hoffman_lauritzen(T_GRID, rate, rate_sd=0.005 * rate, Tm0=TM0, T_inf=T_INF,
                                n_draws=500)
    assert res.noise == "scaled"
    assert any("scatter more" in f for f in res.flags)


def test_surface_energies_from_polyethylene_constants():
    # Hoffman & Miller 1997 PE constants (from memory): regime II Kg = 9.55e4 K^2;
    # data generated with it give sigma sigma_e = 11.8e-3 x 0.090 J^2/m^4 back, and
    # sigma_e = that / sigma_TS (Thomas-Staveley, alpha = 0.1).
    Tm0, Ti = 418.7, 207.0
    T = np.arange(392.0, 402.0, 1.0)
    kg = 4.15e-10 * 11.8e-3 * 90e-3 * 418.7 * 2 / (2.80e8 * 1.380649e-23)
    rng = np.random.default_rng(0)
    lnr = hl_ln_rate(T, ln_prefactor=5.0, Kg=kg, U_star=U, T_inf=Ti, Tm0=Tm0)
    res = fit_hoffman_lauritzen(T, np.exp(lnr + rng.normal(0, 0.02, len(T))), rate_kind="G",
                                Tm0=Tm0, T_inf=Ti, segments="one", regime="II",
                                polymer="PE", n_draws=1000)
    row = res.table().iloc[0]
    assert row.prefactor_unit == "m/s"
    assert inside(row, "sigma_sigma_e_J2_per_m4", 11.8e-3 * 90e-3)
    sigma_ts = 0.1 * 2.80e8 * np.sqrt(4.55e-10 * 4.15e-10)
    assert row.sigma_J_per_m2 == pytest.approx(sigma_ts)
    assert inside(row, "sigma_e_J_per_m2", 11.8e-3 * 90e-3 / sigma_ts)
    assert row.q_fold_J == pytest.approx(2 * 4.55e-10 * 4.15e-10 * row.sigma_e_J_per_m2)


def test_half_time_draws_and_isotherm_table_inputs():
    rng = np.random.default_rng(7)
    T = np.arange(396.0, 412.0, 2.0)
    lnr = hl_ln_rate(T, ln_prefactor=22.0, Kg=5e5, U_star=U, T_inf=T_INF, Tm0=TM0)
    th = np.exp(-lnr)
    draws = [t * np.exp(rng.normal(0, 0.03, 400)) for t in th]
    res = hoffman_lauritzen_from_half_times(T, draws, Tm0=TM0, T_inf=T_INF, n_draws=500)
    assert res.ln_rate_sd is not None and np.all(res.ln_rate_sd > 0.02)
    assert res.table().iloc[0].rate_kind == "1/t_half"
    table = pd.DataFrame({"run_id": [f"r{i}" for i in range(len(T))], "group": "neat",
                          "T_c_K": T, "t_half_s": th})
    res2 = hoffman_lauritzen_from_isotherms(table, {f"r{i}": d for i, d in enumerate(draws)},
                                            Tm0=TM0, T_inf=T_INF, n_draws=500)
    assert res2.group == "neat"
    np.testing.assert_allclose(res2.ln_rate, res.ln_rate)
    two = pd.concat([table, table.assign(group="other")])
    with pytest.raises(CrystkinInputError, match="group"):
        hoffman_lauritzen_from_isotherms(two, Tm0=TM0, T_inf=T_INF)


def test_rate_table_file(tmp_path):
    T = np.arange(120.0, 136.0, 3.0)
    lnr = hl_ln_rate(T + 273.15, ln_prefactor=22.0, Kg=5e5, U_star=U, T_inf=T_INF, Tm0=TM0)
    th_min = np.exp(-lnr) / 60
    p = tmp_path / "paper.csv"
    lines = [f"{a},{b:.6g}" for a, b in zip(T, th_min, strict=True)]
    p.write_text("Tc (degC),t1/2 (min)\n" + "\n".join(lines))
    res = hoffman_lauritzen_from_table(read_rate_table(p), Tm0=TM0, T_inf=T_INF, n_draws=300)
    assert res.table().iloc[0].Kg_K2 == pytest.approx(5e5, rel=0.01)


def test_microscopy_radius_to_growth_rate_to_hl():
    # invented radius-time data growing at the HL rate G(T)
    rng = np.random.default_rng(4)
    T = np.arange(400.0, 416.0, 3.0)
    G = np.exp(hl_ln_rate(T, ln_prefactor=4.0, Kg=4e5, U_star=U, T_inf=T_INF,
                          Tm0=TM0))
    t = np.linspace(60, 600, 8)
    TT = np.repeat(T, len(t))
    tt = np.tile(t, len(T))
    r = 2e-6 + np.repeat(G, len(t)) * tt
    r = r * (1 + rng.normal(0, 0.005, len(r)))
    rates = fit_growth_rates(RadiusTable(TT, tt, r, "invented", tuple(range(len(r)))))
    tab = rates.table()
    assert np.all((tab.G_m_per_s_lo95 <= G) & (G <= tab.G_m_per_s_hi95))
    res = hoffman_lauritzen_from_growth(rates, Tm0=TM0, T_inf=T_INF, n_draws=500)
    assert inside(res.table().iloc[0], "Kg_K2", 4e5)


@pytest.mark.parametrize("kwargs, match", [
    ({"T_c": [400.0, 405.0, 470.0], "rate": [1.0, 0.5, 0.1]}, "above Tm0"),
    ({"T_c": [400.0, 405.0], "rate": [1.0, 0.5]}, "fewer than the 3"),
    ({"T_c": [400.0, 405.0, 410.0], "rate": [1.0, -0.5, 0.1]}, "negative"),
    ({"T_c": T_GRID, "rate": np.ones(len(T_GRID)), "T_break": 391.0}, "1 point"),
    ({"T_c": [400.0, 402, 404, 406], "rate": [1.0, 0.8, 0.6, 0.4], "segments": "two"},
     "two lines"),
    ({"T_c": [400.0, 402, 404], "rate": [1.0, 0.8, 0.6], "T_inf": 401.0}, "T_inf"),
])
def test_bad_input_is_a_clear_error(kwargs, match):
    kw = {"Tm0": TM0, "T_inf": T_INF, **kwargs}
    with pytest.raises(CrystkinInputError, match=match):
        fit_hoffman_lauritzen(kw.pop("T_c"), kw.pop("rate"), **kw)


def test_needs_t_inf_or_tg_and_negative_half_time():
    with pytest.raises(CrystkinInputError, match="Tg"):
        fit_hoffman_lauritzen([400, 402, 404], [1, 0.8, 0.6], Tm0=TM0)
    res = fit_hoffman_lauritzen([400, 402, 404], [1, 0.8, 0.6], Tm0=TM0, Tg=254.0, n_draws=100)
    assert res.settings["T_inf"] == pytest.approx(224.0)
    with pytest.raises(CrystkinInputError, match="positive"):
        hoffman_lauritzen_from_half_times([400, 402, 404], [10.0, -3.0, 30.0], Tm0=TM0,
                                          T_inf=T_INF)


def test_kg_from_activation_energy_and_comparison():
    # E(T) generated from known Kg with the Vyazovkin-Sbirrazzuoli expression (invented data)
    rng = np.random.default_rng(9)
    T = np.linspace(380, 415, 12)
    Kg = 4.5e5
    E = hl_activation_energy(T, U_star=U, T_inf=T_INF, Kg=Kg, Tm0=TM0)
    E_obs = E + rng.normal(0, 3000, len(T))
    fit = hl_from_activation_energy(T, E_obs, E_sd=3000.0, Tm0=TM0, T_inf=T_INF, n_draws=1000)
    row = fit.table().iloc[0]
    assert inside(row, "Kg_K2", Kg)
    free = hl_from_activation_energy(T, E_obs, E_sd=3000.0, Tm0=TM0, T_inf=T_INF,
                                     free_U_star=True, n_draws=1000)
    assert inside(free.table().iloc[0], "Kg_K2", Kg)
    assert inside(free.table().iloc[0], "U_star_J_per_mol", U)
    wide = hl_from_activation_energy(T, E_obs, E_sd=3000.0, Tm0=TM0, Tm0_sd=3.0, T_inf=T_INF,
                                     T_inf_sd=5.0, U_star_sd=300.0, n_draws=600, n_nuisance=60)
    assert np.std(wide.Kg()) > 3 * np.std(fit.Kg())
    draws = E_obs[None, :] + rng.normal(0, 3000, (500, len(T)))
    assert inside(hl_from_activation_energy(T, draws, Tm0=TM0, T_inf=T_INF,
                                            n_draws=500).table().iloc[0], "Kg_K2", Kg)
    lnr = hl_ln_rate(T_GRID, ln_prefactor=18.0, Kg=Kg, U_star=U, T_inf=T_INF, Tm0=TM0)
    iso = fit_hoffman_lauritzen(T_GRID, np.exp(lnr + rng.normal(0, 0.05, len(T_GRID))),
                                Tm0=TM0, T_inf=T_INF, segments="one", n_draws=1000)
    cmp = compare_kg(iso, fit).table().iloc[0]
    assert inside(cmp, "Kg_ratio_iso_over_isoconv", 1.0)
    with pytest.raises(CrystkinInputError):
        compare_kg(iso, fit, segment="two.low_T")
    with pytest.raises(CrystkinInputError, match="above Tm0"):
        hl_from_activation_energy([400, 420, 470], [1e4, 0, -1e4], Tm0=TM0, T_inf=T_INF)
