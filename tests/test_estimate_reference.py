"""The estimation engine against outside references.

* NIST StRD nonlinear regression (Misra1a, BoxBOD): certified estimates,
  standard errors and residual SD (reference_sets/nist_strd_exponential).
* The conjugate normal linear model (Gelman, Carlin, Stern, Dunson, Vehtari &
  Rubin, Bayesian Data Analysis, 3rd ed., 2013, section 14): analytic posterior
  mean and covariance for known noise and Normal priors; multivariate Student-t
  posterior of the coefficients and scaled inverse-chi^2 posterior of the noise
  variance for flat priors and unknown noise.
* scipy.stats.linregress for the straight-line fit.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from kinetics.analyses.isothermal import linearised_avrami
from kinetics.dataset import Conversion
from kinetics.estimate import (
    FitProblem,
    fit_least_squares,
    fit_line,
    line_problem,
    sample_posterior,
)
from kinetics.models.avrami import avrami_conversion
from kinetics.models.params import Normal, Parameter, Uniform

# ---------------------------------------------------------------- NIST StRD


def _nist_problem(ds, start):
    x = np.asarray(ds["x"], dtype=float)
    pars = (Parameter("b1", "1", Uniform(-1e6, 1e6), start[0]),
            Parameter("b2", "1", Uniform(-1e3, 1e3), start[1]))
    return FitProblem("nist", pars, np.asarray(ds["y"], dtype=float),
                      predict=lambda th: th[:, 0:1] * (1.0 - np.exp(-th[:, 1:2] * x[None, :])))


@pytest.mark.parametrize("start", ["start_1", "start_2"])
@pytest.mark.parametrize("dataset", ["Misra1a", "BoxBOD"])
def test_nist_strd_certified_values(reference_set, dataset, start):
    """NIST StRD, Nonlinear Regression, Misra1a (lower difficulty) and BoxBOD
    (higher difficulty), certified values; y = b1 (1 - exp(-b2 x))."""
    ds = reference_set("nist_strd_exponential")["datasets"][dataset]
    res = fit_least_squares(_nist_problem(ds, ds[start]))
    assert res.success
    np.testing.assert_allclose(res.x, ds["certified_b"], rtol=1e-6)
    np.testing.assert_allclose(res.stderr, ds["certified_sd"], rtol=1e-3)
    assert res.residual_sd == pytest.approx(ds["residual_sd"], rel=1e-6)
    assert res.dof == ds["degrees_of_freedom"]
    if "residual_sum_of_squares" in ds:
        assert res.ssr == pytest.approx(ds["residual_sum_of_squares"], rel=1e-6)
    assert res.at_bound == ()


# ------------------------------------------------- conjugate linear-Gaussian

SIGMA = 0.4
MU0 = np.array([0.0, 0.0])
SD0 = np.array([0.3, 0.05])


def _line_data(n=10, seed=11):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0.0, 10.0, n))
    y = 0.8 + 0.3 * x + rng.normal(0.0, SIGMA, n)
    return x, y


def test_conjugate_normal_posterior_known_sigma():
    """Gelman et al., BDA3, section 14 (normal linear model, conjugate prior):
    cov = (X'X/s^2 + P^-1)^-1, mean = cov (X'y/s^2 + P^-1 mu0)."""
    x, y = _line_data()
    A = np.column_stack([np.ones_like(x), x])
    P_inv = np.diag(1.0 / SD0**2)
    cov = np.linalg.inv(A.T @ A / SIGMA**2 + P_inv)
    mean = cov @ (A.T @ y / SIGMA**2 + P_inv @ MU0)
    # The priors pull the estimate visibly away from OLS, so they matter.
    ols = np.linalg.lstsq(A, y, rcond=None)[0]
    assert np.max(np.abs(mean - ols) / np.sqrt(np.diag(cov))) > 2

    pars = (Parameter("a", "1", Normal(MU0[0], SD0[0]), 0.0),
            Parameter("b", "1", Normal(MU0[1], SD0[1]), 0.0))
    prob = FitProblem("conjugate", pars, y, predict=lambda th: th @ A.T, noise=SIGMA)
    post = sample_posterior(prob, seed=5)
    d = post.diagnostics
    assert d.converged, d.reason
    ess = d.ess
    draws = np.column_stack([post["a"], post["b"]])
    sd = np.sqrt(np.diag(cov))
    # Monte Carlo error of a mean: sd / sqrt(ESS); of an SD: sd / sqrt(2 ESS);
    # of a correlation: (1 - rho^2) / sqrt(ESS). Five standard errors.
    np.testing.assert_array_less(np.abs(draws.mean(axis=0) - mean), 5 * sd / np.sqrt(ess))
    np.testing.assert_array_less(np.abs(draws.std(axis=0, ddof=1) / sd - 1),
                                 5 / np.sqrt(2 * ess))
    rho = cov[0, 1] / (sd[0] * sd[1])
    rho_mc = np.corrcoef(draws.T)[0, 1]
    assert abs(rho_mc - rho) < 5 * (1 - rho**2) / np.sqrt(ess)
    np.testing.assert_array_equal(post["noise_sd"], SIGMA)


def test_flat_prior_unknown_sigma_student_t():
    """Gelman et al., BDA3, section 14.2 (noninformative prior p(beta, sigma^2)
    ∝ 1/sigma^2): beta | y is multivariate t with n - 2 dof, location the OLS
    estimate and scale s^2 (X'X)^-1, so the marginal SD of the slope is
    se sqrt((n - 2)/(n - 4)); (n - 2) s^2 / sigma^2 | y ~ chi^2_(n-2)."""
    x, y = _line_data()
    n = len(x)
    ref = stats.linregress(x, y)
    post = sample_posterior(line_problem(x, y), seed=3)
    slope = post["slope"]
    S = len(slope)
    assert post.diagnostics.converged
    t_sd = ref.stderr * np.sqrt((n - 2) / (n - 4))
    # Independent draws: MC error of the mean t_sd / sqrt(S); of the SD, for a
    # t with nu dof (excess kurtosis 6 / (nu - 4)), t_sd sqrt((2 + 6/(nu-4)) / (4 S)).
    assert abs(slope.mean() - ref.slope) < 5 * t_sd / np.sqrt(S)
    assert abs(post["intercept"].mean() - ref.intercept) < (
        5 * ref.intercept_stderr * np.sqrt((n - 2) / (n - 4)) / np.sqrt(S))
    sd_err = t_sd * np.sqrt((2 + 6 / (n - 2 - 4)) / (4 * S))
    assert abs(slope.std(ddof=1) - t_sd) < 5 * sd_err
    # The t-factor matters here: the plain se is far outside that tolerance.
    assert abs(ref.stderr - t_sd) > 5 * sd_err
    # Whole distributions (the draws are independent, so a KS test applies).
    z = (slope - ref.slope) / ref.stderr
    assert stats.kstest(z, stats.t(df=n - 2).cdf).pvalue > 1e-3
    s2 = np.sum((y - ref.intercept - ref.slope * x) ** 2) / (n - 2)
    chi = (n - 2) * s2 / post["noise_sd"] ** 2
    assert stats.kstest(chi, stats.chi2(df=n - 2).cdf).pvalue > 1e-3


# ------------------------------------------------------------ straight lines


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_fit_line_matches_scipy_linregress(seed):
    """scipy.stats.linregress: slope, intercept, stderr, intercept_stderr, r^2."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(5, 60))
    x = rng.uniform(-3.0, 7.0, n)
    y = rng.normal(1.5, 2.0) + rng.normal(0.0, 3.0) * x + rng.normal(0.0, 0.5 + seed, n)
    ours = fit_line(x, y)
    ref = stats.linregress(x, y)
    assert ours.slope == pytest.approx(ref.slope, rel=1e-10)
    assert ours.intercept == pytest.approx(ref.intercept, rel=1e-10, abs=1e-12)
    assert ours.slope_se == pytest.approx(ref.stderr, rel=1e-9)
    assert ours.intercept_se == pytest.approx(ref.intercept_stderr, rel=1e-9)
    assert ours.r2 == pytest.approx(ref.rvalue**2, rel=1e-10)
    assert ours.n == n


def _exact_conversion(n, k, t0, *, dt=0.5, duration=900.0):
    t = np.arange(0.0, duration, dt)
    X = avrami_conversion(t, n, k, t0)
    sel = t >= t0
    ts = t[sel]
    return Conversion(
        run_id="exact", kind="isothermal", time=ts, temperature=np.full(ts.shape, 400.0),
        conversion=X[sel], rate=np.gradient(X[sel], ts), enthalpy=9.0e4, specific_enthalpy=True,
        window=(float(t0), float(ts[-1])), baseline={"method": "none (exact curve)"},
        hold_start=0.0, transient_end=0.0, induction_time=float(t0), signal=np.zeros(ts.shape),
        baseline_values=np.zeros(ts.shape), exotherm="up")


@pytest.mark.parametrize("n,k", [(2.6, 2.6e-6), (1.7, 3.0e-4), (3.8, 1.0e-9)])
def test_linearised_avrami_exact_curve(n, k):
    """ln(-ln(1 - X)) = ln k + n ln(t - t0) (Avrami 1939) is exact on an exact curve."""
    t0 = 30.0
    conv = _exact_conversion(n, k, t0)
    out = linearised_avrami(conv)
    assert out["n"] == pytest.approx(n, rel=1e-9)
    assert out["ln_k"] == pytest.approx(np.log(k), rel=1e-9, abs=1e-9)
    assert out["r2"] == pytest.approx(1.0, abs=1e-12)
    X = conv.conversion
    expected_points = int(np.sum((X >= 0.03) & (X <= 0.20) & (conv.time > t0)))
    assert out["n_points"] == expected_points >= 3
