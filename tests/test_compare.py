"""Formulation comparison (kinetics.analyses.compare).

Outside references used here:
* the nucleation-efficiency definition of Fillon, Lotz, Thierry & Wittmann,
  J. Polym. Sci. B 31 (1993) 1395 (formula from memory, SCIENCE.md section 9,
  status M), checked by hand arithmetic written out in the test;
* the hierarchical normal model of Gelman et al., Bayesian Data Analysis,
  3rd ed., section 5.4 (from memory), checked by integrating the full joint
  posterior numerically with scipy.integrate.quad (no use of the closed form);
* scipy.stats for the distribution of a ratio of log-normal draws;
* the rounding convention of the Particle Data Group (from memory), by hand.

All runs are invented (kinetics.synthetic or drawn here); none stands in for
an outside reference.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy import integrate, stats

from kinetics.analyses.compare import (
    CoolingPeak,
    HalfTimeRun,
    NucleationReference,
    RateCurves,
    compare_formulations,
    cooling_peak_from_conversion,
    format_estimate,
    format_probability,
    nucleation_efficiency,
    scatter_posterior,
)
from kinetics.analyses.isothermal import fit_isotherm
from kinetics.errors import CrystkinInputError, DataQualityWarning
from kinetics.synthetic import synthetic_isotherm
from kinetics.units import kelvin

pytestmark = pytest.mark.filterwarnings("ignore::kinetics.errors.DataQualityWarning")


def _summary_runs(rng, design, *, tau, within_sd, n_rep):
    """Invented half-time runs: design = {group: {T: true t_half}}; log-normal run scatter."""
    runs = []
    for g, temps in design.items():
        for T, th in temps.items():
            for i in range(n_rep):
                value = th * math.exp(rng.normal(0.0, tau) + rng.normal(0.0, within_sd))
                runs.append(HalfTimeRun(f"{g}_{T:.0f}_{i}", g, T, value, within_sd * value))
    return runs


# ---------------------------------------------------------------------------
# Nucleation efficiency against the published definition
# ---------------------------------------------------------------------------

def test_nucleation_efficiency_formula_by_hand():
    # Fillon et al. (1993), from memory: NE = 100 (Tc,NA - Tc,PP) / (Tc,PP,max - Tc,PP).
    # iPP-like values from SCIENCE.md section 9 (status M): Tc,PP = 110 °C, Tc,max = 140 °C.
    # Additive peak 125 °C: 100 * (125 - 110) / (140 - 110) = 100 * 15 / 30 = 50 %.
    assert float(nucleation_efficiency(kelvin(125.0), kelvin(110.0), kelvin(140.0))) == \
        pytest.approx(50.0, abs=1e-9)
    # Additive peak 119.3 °C: 100 * 9.3 / 30 = 31 %.
    assert float(nucleation_efficiency(119.3, 110.0, 140.0)) == pytest.approx(31.0, abs=1e-9)
    # No effect and full effect are the ends of the scale.
    assert float(nucleation_efficiency(110.0, 110.0, 140.0)) == 0.0
    assert float(nucleation_efficiency(140.0, 110.0, 140.0)) == 100.0


def test_nucleation_efficiency_through_the_comparison():
    # Exact peak values (no scatter, no within-run error): the interval collapses to the
    # hand value.  Neat 110 °C (given), additive 125 °C and 119.3 °C, maximum 140 °C,
    # all at 10 K/min: NE = 50 % and 31 % (arithmetic in the test above).
    rate = 10.0 / 60.0
    peaks = [CoolingPeak("neat1", "neat", rate, kelvin(110.0)),
             CoolingPeak("a1", "A", rate, kelvin(125.0)),
             CoolingPeak("b1", "B", rate, kelvin(119.3))]
    ref = NucleationReference(T_c_max=kelvin(140.0), T_c_neat=kelvin(110.0), rate=rate)
    res = compare_formulations(cooling_peaks=peaks, reference="neat", nucleation_reference=ref)
    ne = res.tables()["nucleation_efficiency"].set_index("group")
    assert ne.loc["A", "NE_percent"] == pytest.approx(50.0, abs=1e-9)
    assert ne.loc["B", "NE_percent"] == pytest.approx(31.0, abs=1e-9)
    assert ne.loc["A", "NE_percent_lo95"] == pytest.approx(50.0, abs=1e-9)
    assert any("nucleation efficiency at 10 K/min is 50" in v for v in res.verdicts)
    assert any("no within-run uncertainty" in w for w in res.warnings)


def test_nucleation_efficiency_interval_covers_truth():
    # Invented replicated peaks with run-to-run SD 0.6 K; truth NE = 100 * 6 / 30 = 20 %.
    rng = np.random.default_rng(11)
    rate = 10.0 / 60.0
    peaks = []
    for g, T in (("neat", kelvin(110.0)), ("A", kelvin(116.0))):
        for i in range(4):
            peaks.append(CoolingPeak(f"{g}{i}", g, rate, T + rng.normal(0, 0.6), 0.05))
    ref = NucleationReference(T_c_max=kelvin(140.0), rate=rate)  # neat peak: measured
    res = compare_formulations(cooling_peaks=peaks, reference="neat", nucleation_reference=ref)
    row = res.tables()["nucleation_efficiency"].iloc[0]
    assert row["T_c_neat_source"].startswith("measured")
    assert row["NE_percent_lo95"] < 20.0 < row["NE_percent_hi95"]
    assert 2.0 < row["NE_percent_hi95"] - row["NE_percent_lo95"] < 20.0


# ---------------------------------------------------------------------------
# The pooled run-to-run scatter against numerical integration of the joint posterior
# ---------------------------------------------------------------------------

def test_scatter_posterior_matches_numerical_integration():
    # Two cells (3 and 2 runs), within-run SDs s_i, half-normal prior (scale 0.25) on tau.
    # Reference: p(tau | y) from integrating p(tau, mu_1, mu_2 | y) over each mu_c with
    # scipy quad, flat prior on mu (Gelman et al., BDA3, section 5.4).
    y = np.array([4.60, 4.68, 4.52, 3.95, 4.09])
    s = np.array([0.01, 0.02, 0.015, 0.01, 0.03])
    cell = np.array([0, 0, 0, 1, 1])
    scale = 0.25

    def cell_marginal(tau, idx):
        # integral over mu of prod_i N(y_i; mu, s_i^2 + tau^2): Simpson's rule on a dense grid
        v = s[idx] ** 2 + tau ** 2
        centre = float(np.mean(y[idx]))
        mu = np.linspace(centre - 3.0, centre + 3.0, 24_001)
        dens = np.prod(np.exp(-0.5 * (y[idx, None] - mu) ** 2 / v[:, None])
                       / np.sqrt(2 * np.pi * v[:, None]), axis=0)
        return integrate.simpson(dens, x=mu)

    def unnorm(tau):
        return (math.exp(-0.5 * (tau / scale) ** 2)
                * cell_marginal(tau, cell == 0) * cell_marginal(tau, cell == 1))

    opts = {"limit": 100, "epsabs": 0.0, "epsrel": 1e-6}
    Z = integrate.quad(unnorm, 0, 1.5, points=[0.05, 0.1, 0.3], **opts)[0]
    mean_tau = integrate.quad(lambda t: t * unnorm(t), 0, 1.5, points=[0.05, 0.1, 0.3],
                              **opts)[0] / Z
    cdf_01 = integrate.quad(unnorm, 0, 0.1, **opts)[0] / Z

    post = scatter_posterior(y, s, cell, prior_scale=scale, n_draws=40_000, seed=3)
    assert post.n_cells == 2 and post.n_runs == 5
    se = post.draws.std() / math.sqrt(len(post.draws))
    assert post.draws.mean() == pytest.approx(mean_tau, abs=4 * se + 1e-3)
    assert np.mean(post.draws < 0.1) == pytest.approx(cdf_01, abs=0.01)


def test_scatter_not_estimable_without_repeats():
    assert scatter_posterior([1.0, 2.0], [0.1, 0.1], [0, 1], prior_scale=0.25) is None


# ---------------------------------------------------------------------------
# Calibration on many invented data sets (exact summaries, fast)
# ---------------------------------------------------------------------------

def test_identical_groups_not_called_different_over_many_datasets():
    # Two groups generated identically: 2 temperatures x 2 repeats, run-to-run CV about 8 %.
    rng = np.random.default_rng(2024)
    design = {"ref": {400.0: 100.0, 405.0: 180.0}, "twin": {400.0: 100.0, 405.0: 180.0}}
    cover, called, ps = [], [], []
    for k in range(60):
        runs = _summary_runs(rng, design, tau=0.08, within_sd=0.005, n_rep=2)
        res = compare_formulations(runs, reference="ref", n_draws=1000, seed=k)
        df = res.tables()["compare_half_time"]
        cover += list((df["t_half_ratio_lo95"] < 1) & (df["t_half_ratio_hi95"] > 1))
        called += list(df["finding"] != "no clear difference")
        ps += list(df["p_faster"])
    assert np.mean(cover) >= 0.9
    assert np.mean(called) <= 0.08
    assert 0.4 <= np.mean(ps) <= 0.6
    # p_faster should be spread over (0, 1), not piled at the ends
    assert np.mean((np.array(ps) > 0.1) & (np.array(ps) < 0.9)) >= 0.6


def test_known_ratios_covered_over_many_datasets():
    rng = np.random.default_rng(7)
    design = {"ref": {400.0: 100.0, 405.0: 200.0}, "A": {400.0: 50.0, 405.0: 100.0},
              "B": {400.0: 150.0, 405.0: 300.0}}
    truth = {"A": 0.5, "B": 1.5}
    hits = []
    for k in range(40):
        runs = _summary_runs(rng, design, tau=0.06, within_sd=0.005, n_rep=3)
        df = compare_formulations(runs, reference="ref", n_draws=1000, seed=k) \
            .tables()["compare_half_time"]
        for _, r in df.iterrows():
            hits.append(r["t_half_ratio_lo95"] < truth[r["group"]] < r["t_half_ratio_hi95"])
    assert 0.88 <= np.mean(hits) <= 1.0


def test_single_runs_borrow_scatter_from_repeated_conditions():
    # Repeats only at 400 K; at 405 K one run per group.  The pooled scatter must widen the
    # 405 K interval well beyond the 0.5 % within-run uncertainty.
    runs = [HalfTimeRun(f"r{i}", "ref", 400.0, v, 0.5) for i, v in enumerate((95, 105, 100))]
    runs += [HalfTimeRun(f"a{i}", "A", 400.0, v, 0.25) for i, v in enumerate((48, 53))]
    runs += [HalfTimeRun("r405", "ref", 405.0, 200.0, 1.0), HalfTimeRun("a405", "A", 405.0,
                                                                         100.0, 0.5)]
    df = compare_formulations(runs, reference="ref").tables()["compare_half_time"]
    row = df[df["T_c_K"] == 405.0].iloc[0]
    width = math.log(row["t_half_ratio_hi95"] / row["t_half_ratio_lo95"])
    within_only = 2 * 1.96 * math.hypot(0.005, 0.005)
    assert width > 3 * within_only
    assert row["scatter_source"] == "estimated from repeated runs"


def test_user_cv_used_without_repeats_and_no_scatter_warned():
    runs = [HalfTimeRun("r", "ref", 400.0, 100.0, 0.5), HalfTimeRun("a", "A", 400.0, 96.0, 0.5)]
    with pytest.warns(DataQualityWarning, match="not estimable"):
        bare = compare_formulations(runs, reference="ref")
    assert bare.tables()["compare_half_time"]["finding"].iloc[0] == "faster"
    assert any("could not be estimated" in v for v in bare.verdicts)
    given = compare_formulations(runs, reference="ref", run_to_run_cv=0.08)
    row = given.tables()["compare_half_time"].iloc[0]
    assert row["finding"] == "no clear difference"
    assert row["scatter_source"] == "given by the user"
    sc = given.tables()["run_to_run_scatter"].iloc[0]
    assert sc["run_to_run"] == pytest.approx(0.08, rel=1e-9)


def test_called_difference_smaller_than_scatter_is_flagged():
    # Many repeats make a 5 % difference certain, but it is below the ~10 % run-to-run CV.
    rng = np.random.default_rng(5)
    design = {"ref": {400.0: 100.0}, "A": {400.0: 95.0}}
    runs = _summary_runs(rng, design, tau=0.10, within_sd=0.003, n_rep=60)
    res = compare_formulations(runs, reference="ref")
    row = res.tables()["compare_half_time"].iloc[0]
    if row["finding"] != "no clear difference":
        assert bool(row["within_run_to_run_scatter"])
        assert "smaller than the run-to-run scatter" in res.verdicts[0]
    assert bool(row["within_run_to_run_scatter"])


# ---------------------------------------------------------------------------
# End to end with fitted invented isotherms
# ---------------------------------------------------------------------------

def _fit_runs(hand_conversion, spec, *, seed, scatter_cv=0.0, sample=False, **fit_kw):
    """spec: list of (group, n, {T: t_half}, n_rep). Returns a list of IsothermFit."""
    rng = np.random.default_rng(seed)
    fits = []
    for g, n, temps, n_rep in spec:
        for T, th in temps.items():
            for i in range(n_rep):
                run_th = th * math.exp(rng.normal(0.0, scatter_cv)) if scatter_cv else th
                rid = f"{g}_{T:.0f}_{i}_s{seed}"
                trace, truth = synthetic_isotherm(
                    n=n, t_half=run_th, t0=20.0, temperature=T, dt=0.5, noise=0.01,
                    seed=int(rng.integers(1 << 30)), run_id=rid, group=g)
                fits.append(fit_isotherm(trace, conversion=hand_conversion(trace, truth),
                                         sample=sample, seed=int(rng.integers(1 << 30)),
                                         **fit_kw))
    return fits


def test_known_ordering_and_ratios_from_fitted_runs(hand_conversion):
    # Invented: reference t_half 120 s (400 K) and 200 s (405 K); A at 0.55x, B at 0.3x,
    # different Avrami exponents, two runs per condition, run-to-run CV 4 %.
    truth = {"A": 0.55, "B": 0.30}
    spec = [("ref", 2.6, {400.0: 120.0, 405.0: 200.0}, 2),
            ("A", 2.4, {400.0: 66.0, 405.0: 110.0}, 2),
            ("B", 2.2, {400.0: 36.0, 405.0: 60.0}, 2)]
    hits, n = 0, 0
    for seed in (1, 2, 3):
        fits = _fit_runs(hand_conversion, spec, seed=seed, scatter_cv=0.04)
        res = compare_formulations(fits, reference="ref", seed=seed)
        df = res.tables()["compare_half_time"]
        for _, r in df.iterrows():
            n += 1
            hits += r["t_half_ratio_lo95"] < truth[r["group"]] < r["t_half_ratio_hi95"]
            assert r["p_faster"] > 0.99
        rank = res.tables()["ranking"]
        iso = rank[rank["basis"] == "isothermal half-time"].sort_values("rank")
        assert list(iso["group"]) == ["B", "A", "ref"]
    assert n == 12
    assert hits >= 10


def test_identical_groups_from_fitted_runs_over_seeds(hand_conversion):
    spec = [("ref", 2.6, {400.0: 90.0}, 2), ("twin", 2.6, {400.0: 90.0}, 2)]
    cover, ps = [], []
    for seed in range(10, 18):
        fits = _fit_runs(hand_conversion, spec, seed=seed)
        row = compare_formulations(fits, reference="ref", seed=seed) \
            .tables()["compare_half_time"].iloc[0]
        cover.append(row["t_half_ratio_lo95"] < 1.0 < row["t_half_ratio_hi95"])
        ps.append(row["p_faster"])
    assert np.mean(cover) >= 7 / 8
    assert 0.2 <= np.mean(ps) <= 0.8


def test_identical_groups_with_posterior_draws(hand_conversion):
    # One run per group, posterior sampled (small seeded chains); no repeats, so the
    # intervals hold within-run uncertainty only: they should still cover a ratio of 1.
    spec = [("ref", 2.6, {400.0: 60.0}, 1), ("twin", 2.6, {400.0: 60.0}, 1)]
    fits = _fit_runs(hand_conversion, spec, seed=99, sample=True, max_points=150)
    assert all(f.posterior is not None for f in fits)
    res = compare_formulations(fits, reference="ref")
    row = res.tables()["compare_half_time"].iloc[0]
    assert row["t_half_ratio_lo95"] < 1.0 < row["t_half_ratio_hi95"]
    assert 0.025 < row["p_faster"] < 0.975
    assert row["finding"] == "no clear difference"


# ---------------------------------------------------------------------------
# Cooling shifts and K(T) ratios
# ---------------------------------------------------------------------------

def test_cooling_shifts_recovered():
    rng = np.random.default_rng(3)
    true_shift = {"A": 4.0, "B": 9.0}
    peaks = []
    for g, sh in (("ref", 0.0), *true_shift.items()):
        for rate in (5 / 60, 10 / 60, 20 / 60):
            for i in range(3):
                base = kelvin(115.0) - 20 * rate
                peaks.append({"run_id": f"{g}{rate:.3f}{i}", "group": g, "rate_K_per_s": rate,
                              "T_peak_K": base + sh + rng.normal(0, 0.5), "T_peak_sd_K": 0.05,
                              "T_onset_K": base + 6 + sh + rng.normal(0, 0.5),
                              "T_onset_sd_K": 0.1})
    res = compare_formulations(cooling_peaks=peaks, reference="ref")
    df = res.tables()["compare_cooling"]
    assert len(df) == 6
    inside = [(r["T_peak_shift_K_lo95"] < true_shift[r["group"]] < r["T_peak_shift_K_hi95"])
              for _, r in df.iterrows()]
    assert sum(inside) >= 5
    assert (df["p_faster"] > 0.99).all()
    assert df["T_onset_shift_K"].notna().all()
    assert any(v.startswith("Cooling runs, B against ref: At 5 K/min the crystallization peak "
                            "lies") for v in res.verdicts)


def test_rate_curve_ratio_against_lognormal():
    # log K ~ N(log K0, 0.05) independently per group: ratio ~ lognormal(sd 0.05 sqrt 2).
    rng = np.random.default_rng(4)
    T = np.array([390.0, 400.0, 410.0])
    S = 20_000
    draws = {"ref": 0.01 * np.exp(rng.normal(0, 0.05, (S, 3))),
             "A": 0.02 * np.exp(rng.normal(0, 0.05, (S, 3)))}
    res = compare_formulations(rate_curves=RateCurves(T, draws), reference="ref",
                               n_draws=S)
    df = res.tables()["compare_rate_curve"]
    ref = stats.lognorm(s=0.05 * math.sqrt(2), scale=2.0)
    assert df["K_ratio"].to_numpy() == pytest.approx(ref.median(), rel=0.01)
    assert df["K_ratio_lo95"].to_numpy() == pytest.approx(ref.ppf(0.025), rel=0.015)
    assert df["K_ratio_hi95"].to_numpy() == pytest.approx(ref.ppf(0.975), rel=0.015)
    # P(A faster) = P(ratio > 1) = 1 - Phi(-ln 2 / (0.05 sqrt 2)), essentially 1
    assert (df["p_faster"] > 0.999).all()
    assert "compare_rate_curve" in res.tables()


# ---------------------------------------------------------------------------
# Bad input
# ---------------------------------------------------------------------------

def test_reference_group_missing():
    runs = [HalfTimeRun("r", "neat", 400.0, 100.0, 1.0), HalfTimeRun("a", "N-A", 400.0, 50.0,
                                                                     1.0)]
    with pytest.raises(CrystkinInputError, match=r"reference group 'PX-40' not found.*'neat'"):
        compare_formulations(runs, reference="PX-40")


def test_no_common_temperatures():
    runs = [HalfTimeRun("r", "neat", kelvin(128.0), 100.0, 1.0),
            HalfTimeRun("a", "N-A", kelvin(134.0), 50.0, 1.0)]
    with pytest.raises(CrystkinInputError, match=r"no group shares a condition") as info:
        compare_formulations(runs, reference="neat")
    msg = str(info.value)
    assert "neat at 128 °C" in msg and "N-A at 134 °C" in msg and "temperature_tolerance" in msg


def test_no_common_rates():
    peaks = [CoolingPeak("r", "neat", 10 / 60, 390.0, 0.1),
             CoolingPeak("a", "N-A", 20 / 60, 395.0, 0.1)]
    with pytest.raises(CrystkinInputError, match=r"neat at 10 K/min; N-A at 20 K/min"):
        compare_formulations(cooling_peaks=peaks, reference="neat")


def test_other_bad_inputs():
    one = [HalfTimeRun("r", "neat", 400.0, 100.0, 1.0)]
    with pytest.raises(CrystkinInputError, match="at least one other group"):
        compare_formulations(one, reference="neat")
    with pytest.raises(CrystkinInputError, match="nothing to compare"):
        compare_formulations(reference="neat")
    two = one + [HalfTimeRun("a", "A", 400.0, 50.0, 1.0)]
    with pytest.raises(CrystkinInputError, match="run_to_run_cv.*0.08 for 8 %"):
        compare_formulations(two, reference="neat", run_to_run_cv=8)
    with pytest.raises(CrystkinInputError, match="needs cooling runs"):
        compare_formulations(two, reference="neat",
                             nucleation_reference={"T_c_max": 413.0, "T_c_neat": 383.0})
    with pytest.raises(CrystkinInputError, match="must lie above"):
        NucleationReference(T_c_max=383.0, T_c_neat=413.0)
    with pytest.raises(CrystkinInputError, match="positive"):
        HalfTimeRun("x", "A", 400.0, -5.0)


def test_inputs_unchanged_and_reproducible():
    rng = np.random.default_rng(0)
    runs = _summary_runs(rng, {"ref": {400.0: 100.0}, "A": {400.0: 60.0}}, tau=0.05,
                         within_sd=0.01, n_rep=2)
    before = [float(r.t_half) for r in runs]
    a = compare_formulations(runs, reference="ref", seed=5).tables()["compare_half_time"]
    b = compare_formulations(runs, reference="ref", seed=5).tables()["compare_half_time"]
    assert a.equals(b)
    assert [float(r.t_half) for r in runs] == before


# ---------------------------------------------------------------------------
# Wording and rounding
# ---------------------------------------------------------------------------

def test_rounding_to_uncertainty_by_hand():
    # PDG convention (from memory): leading digits of the uncertainty 100-354 keep two
    # significant digits, 355-999 one.  Narrower side of 0.4823 (0.4112-0.5634) is 0.0711
    # -> "711" -> one digit -> 0.07 -> two decimals.
    assert format_estimate(0.4823, 0.4112, 0.5634) == ("0.48", "0.41–0.56")
    # 0.2823 (0.2512-0.3134): narrower side 0.0311 -> "311" -> two digits -> three decimals.
    assert format_estimate(0.2823, 0.2512, 0.3134) == ("0.282", "0.251–0.313")
    # Kelvin shift crossing zero: narrower side 0.72 -> one digit -> one decimal.
    assert format_estimate(-0.36, -1.08, 0.42, "K") == ("-0.4 K", "-1.1 to 0.4 K")
    assert format_probability(0.9996) == "> 0.999"
    assert format_probability(0.0002) == "< 0.001"
    assert format_probability(0.734) == "0.73"
    assert format_probability(0.995) == "0.995"


def test_verdict_sentence_matches_table():
    runs = [HalfTimeRun("r1", "PX-40", kelvin(125.0), 100.0, 2.0),
            HalfTimeRun("b1", "N-B", kelvin(125.0), 48.0, 1.0)]
    res = compare_formulations(runs, reference="PX-40")
    row = res.tables()["compare_half_time"].iloc[0]
    v, iv = format_estimate(row["t_half_ratio"], row["t_half_ratio_lo95"],
                            row["t_half_ratio_hi95"])
    text = res.verdicts[0]
    assert text.startswith("Isothermal holds, N-B against PX-40: At 125 °C it shortens the "
                           "half-time by a factor of 2.1 (ratio ")
    assert f"ratio {v}, 95 % interval {iv}; probability faster > 0.999" in text


# ---------------------------------------------------------------------------
# Figures
# ---------------------------------------------------------------------------

def test_comparison_figures():
    from matplotlib.figure import Figure

    from kinetics.report import compare_figures as cf

    rng = np.random.default_rng(1)
    runs = _summary_runs(rng, {"ref": {400.0: 100.0, 405.0: 150.0},
                               "A": {400.0: 60.0, 405.0: 90.0},
                               "B": {400.0: 30.0, 405.0: 50.0}}, tau=0.05, within_sd=0.01,
                         n_rep=2)
    peaks = [CoolingPeak(f"{g}{i}", g, 10 / 60, 390.0 + sh + 0.3 * i, 0.1)
             for g, sh in (("ref", 0), ("A", 3), ("B", 6)) for i in range(2)]
    res = compare_formulations(runs, peaks, reference="ref",
                               nucleation_reference=NucleationReference(T_c_max=420.0))
    figs = cf.comparison_figures(res)
    assert set(figs) == {"half_time_ratio", "cooling_shift", "nucleation_efficiency"}
    assert all(isinstance(f, Figure) for f in figs.values())
    ax = figs["half_time_ratio"].axes[0]
    assert len(ax.containers) == 2  # one error-bar series per formulation
    assert any(np.allclose(line.get_ydata(), 1.0) for line in ax.get_lines())
    with pytest.raises(CrystkinInputError, match="no rate-model comparison"):
        cf.rate_curve_ratio_figure(res)
    src = open(cf.__file__, encoding="utf-8").read()
    assert "pyplot" not in src


def test_warnings_are_recorded_and_issued():
    runs = [HalfTimeRun("r", "ref", 400.0, 100.0, 1.0), HalfTimeRun("a", "A", 400.0, 50.0, 1.0),
            HalfTimeRun("a2", "A", 410.0, 80.0, 1.0)]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = compare_formulations(runs, reference="ref")
    texts = [str(w.message) for w in caught if issubclass(w.category, DataQualityWarning)]
    assert any("no reference ('ref') isothermal hold at 136.9 °C" in t for t in texts)
    assert set(res.warnings) <= set(texts)


def test_cooling_peaks_from_prepared_runs():
    # Invented Nakamura cooling runs (kinetics.synthetic_cooling) through prepare_cooling;
    # group "fast" has K(T) three times the reference's, so it crystallizes at a higher
    # temperature on cooling.  Peak temperatures are checked against the generator's truth.
    from kinetics.prep.cooling import prepare_cooling
    from kinetics.synthetic_cooling import demo_rate_function, synthetic_cooling

    base = demo_rate_function()

    def fast(T):
        return 3.0 * base(T)

    pairs, truths = [], {}
    for g, K in (("ref", base), ("fast", fast)):
        for i in range(2):
            trace, truth = synthetic_cooling(rate=10 / 60, K_of_T=K, seed=20 * i + len(g),
                                             run_id=f"{g}{i}", group=g)
            pairs.append((trace, prepare_cooling(trace)))
            truths[f"{g}{i}"] = truth["T_peak_sample"]
    peak = cooling_peak_from_conversion(*pairs[0])
    assert peak.group == "ref" and peak.rate == pytest.approx(10 / 60)
    assert peak.T_peak == pytest.approx(truths["ref0"], abs=0.5)
    res = compare_formulations(cooling_peaks=pairs, reference="ref")
    row = res.tables()["compare_cooling"].iloc[0]
    true_shift = np.mean([truths["fast0"], truths["fast1"]]) - np.mean([truths["ref0"],
                                                                         truths["ref1"]])
    assert true_shift > 1.0
    assert row["T_peak_shift_K"] == pytest.approx(true_shift, abs=0.5)
    assert row["p_faster"] > 0.99 and row["finding"] == "faster"
    assert row["t_half_ratio"] < 1.0


def test_batch_result_and_table_inputs(hand_conversion):
    import pandas as pd

    from kinetics.analyses.isothermal import BatchResult

    fits = _fit_runs(hand_conversion, [("ref", 2.6, {400.0: 80.0}, 1),
                                       ("A", 2.6, {400.0: 40.0}, 1)], seed=4)
    batch = BatchResult(fits=tuple(fits), failures=(("ref_bad", "too short"),))
    res = compare_formulations(batch, reference="ref")
    assert res.tables()["compare_half_time"]["t_half_ratio"].iloc[0] == pytest.approx(0.5,
                                                                                     rel=0.03)
    assert any("ref_bad failed upstream" in w for w in res.warnings)
    table = pd.DataFrame([{"run_id": "r", "group": "ref", "rate_K_per_min": 10.0,
                           "T_peak_K": 390.0, "T_peak_sd_K": 0.2},
                          {"run_id": "a", "group": "A", "rate_K_per_min": 10.0,
                           "T_peak_K": 394.0, "T_peak_sd_K": 0.2}])
    row = compare_formulations(cooling_peaks=table, reference="ref") \
        .tables()["compare_cooling"].iloc[0]
    assert row["T_peak_shift_K"] == pytest.approx(4.0, abs=0.05)
    assert math.isnan(row["T_onset_shift_K"])
