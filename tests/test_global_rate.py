"""One Nakamura-Hoffman-Lauritzen K(T) fitted to isothermal and cooling runs together.

All runs here are INVENTED synthetic data (kinetics.synthetic, kinetics.synthetic_cooling)
generated from one known K(T): the invented polypropylene-like DEMO_HL parameters
of kinetics.synthetic_cooling (K = hl_rate(T, **DEMO_HL)), n = 2.5.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from kinetics.analyses.global_rate import _X_at, fit_global_rate, global_rate_problem
from kinetics.analyses.predict import PARAMETER_NAMES, predict_profile
from kinetics.errors import CrystkinInputError
from kinetics.export.simulation import read_simulation_model, write_simulation_model
from kinetics.io.profile import constant_rate_profile
from kinetics.models.avrami import avrami_cell_rate, avrami_conversion
from kinetics.models.nakamura import nakamura_conversion, nakamura_half_time
from kinetics.prep import prepare_isothermal
from kinetics.prep.cooling import prepare_cooling
from kinetics.synthetic import synthetic_isotherm
from kinetics.synthetic_cooling import DEMO_HL, demo_rate_function, synthetic_cooling

N_TRUE = 2.5
K_TRUE = demo_rate_function()
# DEMO_HL's prefactor is that of K; (1/t_half)_0 = K_0 / (ln 2)^(1/n)
LN_RATE0_TRUE = DEMO_HL["ln_prefactor"] - np.log(np.log(2.0)) / N_TRUE
CONST = {"Tm0": DEMO_HL["Tm0"], "T_inf": DEMO_HL["T_inf"], "U_star": DEMO_HL["U_star"]}


def _isotherm(Tc, seed, n=N_TRUE, n_points=600, noise=0.01):
    T = Tc + 273.15
    th = float(nakamura_half_time(n, K_TRUE(np.array([T])))[0])
    dur = 15.0 + 6 * th + 60.0
    tr, _ = synthetic_isotherm(n=n, t_half=th, t0=15.0, temperature=T, duration=dur,
                               dt=dur / n_points, noise=noise, drift=(2e-5, 1e-9),
                               transient=(2e-4, 8.0), seed=seed, run_id=f"iso{Tc:g}")
    return tr, prepare_isothermal(tr)


def _cooling(rate_K_min, seed, n=N_TRUE, n_points=600, noise=0.005):
    tr, truth = synthetic_cooling(rate=rate_K_min / 60, n=n, n_points=n_points, noise=noise,
                                  drift=(1e-5, 2e-7), baseline_step=2e-5, seed=seed,
                                  run_id=f"cool{rate_K_min:g}")
    return tr, prepare_cooling(tr), truth


@pytest.fixture(scope="module")
def study():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        iso = [_isotherm(Tc, 10 + i) for i, Tc in enumerate((120.0, 126.0, 132.0))]
        cool = [_cooling(r, 20 + i) for i, r in enumerate((5.0, 10.0, 20.0))]
    return iso, cool


@pytest.fixture(scope="module")
def posterior_fit(study):
    iso, cool = study
    return fit_global_rate(iso, [(t, c) for t, c, _ in cool], hold_out=("cool20",), seed=3,
                           max_points_per_run=150,
                           sampler_options={"check_every": 200, "max_steps": 6000}, **CONST)


def test_constant_temperature_reduces_to_avrami():
    """Nakamura et al., J. Appl. Polym. Sci. 16 (1972) 1077: with K constant,
    X = 1 - exp(-(K t)^n) is Avrami's X = 1 - exp(-k t^n) with k = K^n."""
    t = np.linspace(0.0, 400.0, 201)
    K, n = 0.0123, 2.3
    X = nakamura_conversion(t, np.full_like(t, K), n)
    assert np.allclose(X, avrami_conversion(t, n, K ** n), atol=1e-12)


def test_isotherm_basis_is_the_avrami_cell_rate(study):
    """The heat-flow column of an isotherm in the joint problem equals the Avrami
    cell-averaged rate with k = K(T)^n and the run's t0 (Nakamura et al. 1972)."""
    from kinetics.analyses.global_rate import _isotherm_spec

    tr, conv = study[0][0]
    spec = _isotherm_spec(tr, conv, 15.0, 150, "test")
    prob = global_rate_problem([spec], T_ref=spec.temperature, **CONST)
    lr = np.log(1.0 / nakamura_half_time(N_TRUE, K_TRUE(np.array([spec.temperature]))))[0]
    B = prob.basis(np.array([[N_TRUE, lr, DEMO_HL["Kg"]]]))[0][0]
    k = float(K_TRUE(np.array([spec.temperature]))[0]) ** N_TRUE
    assert np.allclose(B[0], avrami_cell_rate(spec.edges, N_TRUE, k, 15.0), rtol=1e-9,
                       atol=1e-15)
    assert np.allclose(B[1], 1.0)


def test_cooling_integral_agrees_with_differential_form(study):
    """Patel & Spruiell, Polym. Eng. Sci. 31 (1991) 730: dX/dt = n K(T)(1 - X)
    (-ln(1 - X))^((n-1)/n), integrated by solve_ivp (X seeded at 1e-12, since
    dX/dt = 0 at X = 0) along the cooling run's own sample temperature, against the
    cumulative-trapezoid integral form the joint fit uses on that run's grid."""
    from kinetics.analyses.global_rate import _cooling_spec

    tr, conv, _ = study[1][1]
    spec = _cooling_spec(tr, conv, 150, False, 2)
    d = np.array([[N_TRUE, LN_RATE0_TRUE, DEMO_HL["Kg"], DEMO_HL["U_star"], DEMO_HL["T_inf"],
                   DEMO_HL["Tm0"]]])
    t = conv.time
    X_fit = _X_at(spec, d, t)[0]

    def T_of(s):
        return np.interp(s, spec.grid, spec.grid_T)

    def rhs(s, y):
        X = min(max(y[0], 1e-300), 1 - 1e-15)
        K = float(K_TRUE(np.array([T_of(s)]))[0])
        return [N_TRUE * K * (1 - X) * (-np.log1p(-X)) ** ((N_TRUE - 1) / N_TRUE)]

    sol = solve_ivp(rhs, (spec.grid[0], t[-1]), [1e-12], method="RK45", rtol=1e-9,
                    atol=1e-13, dense_output=True, max_step=1.0)
    assert X_fit[-1] > 0.99
    assert np.max(np.abs(X_fit - sol.sol(t)[0])) < 1e-3


def test_recovery_and_held_back_rate(posterior_fit):
    r = posterior_fit
    assert r.converged
    truth = {"n": N_TRUE, "ln_rate0": LN_RATE0_TRUE, "Kg": DEMO_HL["Kg"]}
    for name, value in truth.items():
        lo, hi = np.quantile(r.draws[name], [0.025, 0.975])
        assert lo < value < hi, f"{name}: true {value} outside [{lo}, {hi}]"
    assert {s.run_id for s in r.specs} == {"iso120", "iso126", "iso132", "cool5", "cool10"}
    row = r.checks.set_index("run_id").loc["cool20"]
    assert row["held_out"]
    # the held-back 20 K/min run: measured 50 % temperature inside the predicted band
    # (widened by the 2 K tolerance the checks use) and X(t) close to the band
    assert row["T50_pred_degC_lo95"] - 2.0 <= row["T50_measured_degC"] \
        <= row["T50_pred_degC_hi95"] + 2.0
    assert row["X_rms_error"] < 0.02
    assert any("describes all 6 runs" in s for s in r.statements)
    band = r.bands["cool20"]["conversion"]
    assert {"X_measured", "X_median", "X_lo95", "X_hi95"} <= set(band)
    assert set(r.bands) == {"iso120", "iso126", "iso132", "cool5", "cool10", "cool20"}
    heat = r.bands["cool5"]["heat_flow"]
    inside = (heat["q_measured"] >= heat["q_pred_lo95"]) & (heat["q_measured"]
                                                            <= heat["q_pred_hi95"])
    assert inside.mean() > 0.85


def test_export_of_a_fit_round_trips(posterior_fit, tmp_path):
    pj, pc = write_simulation_model(posterior_fit, tmp_path / "m.json", tmp_path / "k.csv",
                                    study_name="invented recovery study")
    back = read_simulation_model(pj)
    mine = posterior_fit.simulation_model(study_name="invented recovery study")
    assert back.n_draws == mine.n_draws == 200
    prof = constant_rate_profile(start="200 degC", end="60 degC", rate="15 K/min")
    a = predict_profile(mine, prof.time, prof.temperature, warn=False)
    b = predict_profile(back, prof.time, prof.temperature, warn=False)
    assert np.array_equal(a.X_median, b.X_median)
    assert [t.time_s for t in a.targets] == [t.time_s for t in b.targets]
    v = back.validity
    assert v["cooling_rate_K_per_s"] == (0.0, pytest.approx(10 / 60, rel=0.02))
    assert back.parameters["Tm0"]["status"] == "fixed"
    assert list(back.summary()["parameter"]) == list(PARAMETER_NAMES)


def test_inconsistent_runs_are_stated(study):
    """Isotherms with n = 2.5 and cooling runs generated with n = 1.6: one K(T)
    cannot describe both, and the checks say so."""
    iso = study[0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cool = [_cooling(r, 40 + i, n=1.6)[:2] for i, r in enumerate((5.0, 10.0, 20.0))]
    r = fit_global_rate(iso, cool, sample=False, max_points_per_run=150, **CONST)
    text = " ".join(r.statements)
    assert "does not describe" in text or "does not describe all runs" in text
    assert not any("describes all" in s for s in r.statements)


def test_bad_input(study):
    iso, cool = study
    cool2 = [(t, c) for t, c, _ in cool]
    with pytest.raises(CrystkinInputError, match="hold_out names unknown runs"):
        fit_global_rate(iso, cool2, hold_out=("nope",), sample=False, **CONST)
    with pytest.raises(CrystkinInputError, match="keeps every run out"):
        fit_global_rate(iso[:1], [], hold_out=("iso120",), sample=False, **CONST)
    with pytest.raises(CrystkinInputError, match="listed among the cooling runs"):
        fit_global_rate([], iso[:1], sample=False, **CONST)
    with pytest.raises(CrystkinInputError, match="not all between T_inf"):
        fit_global_rate(iso, [], sample=False, Tm0=390.0, T_inf=CONST["T_inf"])
    with pytest.raises(CrystkinInputError, match="at least one"):
        fit_global_rate([], [], sample=False, **CONST)
    with pytest.raises(CrystkinInputError, match="'isotherm_t0' parameter"):
        fit_global_rate(iso, [], sample=False, isotherm_t0="guess", **CONST)


def test_run_to_run_scatter_is_estimated_and_carried():
    """Invented runs whose rates scatter by a known 5 % (ln K offsets drawn once, seed
    fixed): the hierarchical offsets recover that scatter, and the intervals of n and Kg
    cover their true values; the plain model (every run on one curve) is far narrower."""
    u = np.array([0.06, -0.05, 0.02, -0.07, 0.04, 0.0, -0.03, 0.05])  # SD ~0.05, invented
    iso, cool = [], []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for i, Tc in enumerate((120.0, 124.0, 128.0, 132.0)):
            T = Tc + 273.15
            th = float(nakamura_half_time(N_TRUE, K_TRUE(np.array([T])))[0]) * np.exp(-u[i])
            dur = 15.0 + 6 * th + 60.0
            tr, _ = synthetic_isotherm(n=N_TRUE, t_half=th, t0=15.0, temperature=T,
                                       duration=dur, dt=dur / 600, noise=0.01,
                                       drift=(2e-5, 1e-9), transient=(2e-4, 8.0),
                                       seed=60 + i, run_id=f"iso{Tc:g}")
            iso.append((tr, prepare_isothermal(tr)))
        for j, r in enumerate((2.5, 5.0, 10.0, 20.0)):
            uj = u[4 + j]
            tr, _ = synthetic_cooling(rate=r / 60, n=N_TRUE, n_points=600, noise=0.005,
                                      K_of_T=lambda T, uj=uj: K_TRUE(T) * np.exp(uj),
                                      drift=(1e-5, 2e-7), baseline_step=2e-5, seed=70 + j,
                                      run_id=f"cool{r:g}")
            cool.append((tr, prepare_cooling(tr)))
    opts = {"check_every": 200, "max_steps": 8000}
    r = fit_global_rate(iso, cool, seed=1, max_points_per_run=120, sampler_options=opts,
                        **CONST)
    assert r.converged
    sd = np.quantile(r.draws["run_scatter_sd"], [0.025, 0.5, 0.975])
    assert sd[0] < np.std(u) < sd[2] and 0.02 < sd[1] < 0.12
    for name, value in {"n": N_TRUE, "Kg": DEMO_HL["Kg"]}.items():
        lo, hi = np.quantile(r.draws[name], [0.025, 0.975])
        assert lo < value < hi, f"{name}: true {value} outside [{lo}, {hi}]"
    plain = fit_global_rate(iso, cool, seed=1, max_points_per_run=120, sampler_options=opts,
                            run_scatter=False, **CONST)
    width = np.ptp(np.quantile(r.draws["Kg"], [0.025, 0.975]))
    assert np.ptp(np.quantile(plain.draws["Kg"], [0.025, 0.975])) < 0.5 * width
    assert "run_scatter_sd" in set(r.summary()["parameter"])
    assert r.simulation_model().provenance["fit"]["run_to_run_sd_lnK"]["median"] == \
        pytest.approx(sd[1])


def test_constant_under_a_prior_gives_the_same_basis_as_fixed(study):
    """The batched basis has a shortcut for fixed U*, T_inf, Tm0; with Tm0 under a Normal
    prior the general path must give the same heat-flow basis at the same Tm0."""
    from kinetics.models.params import Normal

    iso, cool = study
    r = fit_global_rate(iso, [(t, c) for t, c, _ in cool], sample=False,
                        max_points_per_run=80, **CONST)
    specs = list(r.specs)
    fixed = global_rate_problem(specs, T_ref=r.T_ref, **CONST, run_scatter=True)
    loose = global_rate_problem(specs, T_ref=r.T_ref, U_star=CONST["U_star"],
                                T_inf=CONST["T_inf"], run_scatter=True,
                                Tm0=Normal(CONST["Tm0"], 2.0, lower=CONST["Tm0"] - 20))
    rng = np.random.default_rng(0)
    th = np.array([p.start for p in fixed.parameters])[None, :] \
        * (1 + 1e-3 * rng.standard_normal((4, len(fixed.parameters))))
    th_loose = np.insert(th, 3, CONST["Tm0"], axis=1)
    assert loose.names[3] == "Tm0" and loose.names[4:] == fixed.names[3:]
    for a, b in zip(fixed.basis(th), loose.basis(th_loose), strict=True):
        np.testing.assert_allclose(a, b, rtol=1e-10, atol=1e-300)
