"""Conformance of the estimation engine: reproducible, side-effect free, strict at the boundary.

These are contract checks (same seed, same answer; vectorised equals looped;
inputs unchanged; bad bounds refused; non-convergence reported), not outside
references; those are in test_estimate_reference.py. Data here are invented.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from kinetics.errors import CrystkinInputError
from kinetics.estimate import FitProblem, fit_least_squares, sample_posterior
from kinetics.estimate.posterior import log_probability
from kinetics.models.avrami import avrami_conversion, avrami_k_from_half_time
from kinetics.models.params import LogUniform, Normal, Parameter, Uniform

SHORT = {"max_steps": 500, "check_every": 250, "min_steps": 250}


def _avrami_x_problem(seed=0, *, y=None, t=None):
    """Invented X(t) data: Avrami n = 2.5, t_half = 60 s, t0 = 10 s, noise 0.01."""
    t = np.linspace(0.0, 300.0, 120) if t is None else t
    if y is None:
        rng = np.random.default_rng(seed)
        y = avrami_conversion(t, 2.5, avrami_k_from_half_time(2.5, 60.0), 10.0)
        y = y + rng.normal(0.0, 0.01, t.shape)
    pars = (Parameter("n", "1", Uniform(0.5, 6.0), 2.0),
            Parameter("t_half", "s", LogUniform(1.0, 1e4), 50.0),
            Parameter("t0", "s", Uniform(-50.0, 50.0), 5.0))

    def predict(th):
        n = th[:, 0:1]
        return avrami_conversion(t[None, :], n, avrami_k_from_half_time(n, th[:, 1:2]),
                                 th[:, 2:3])

    return FitProblem("x_of_t", pars, y, predict=predict)


def _basis_problem(seed=0):
    """Invented heat-flow-like data with linear terms: area * cell rate + b0 + b1 t."""
    t = np.linspace(0.0, 300.0, 150)
    edges = np.concatenate([[t[0] - 1.0], 0.5 * (t[1:] + t[:-1]), [t[-1] + 1.0]])
    rng = np.random.default_rng(seed)

    def cells(n, th, t0):
        return np.diff(avrami_conversion(edges, n, avrami_k_from_half_time(n, th), t0),
                       axis=-1) / np.diff(edges)

    y = 2.0 * cells(2.5, 60.0, 10.0) + 0.01 + 1e-5 * t + rng.normal(0.0, 5e-4, t.shape)
    pars = (Parameter("n", "1", Uniform(0.5, 6.0), 2.4),
            Parameter("t_half", "s", LogUniform(1.0, 1e4), 55.0),
            Parameter("t0", "s", Uniform(-50.0, 50.0), 8.0))
    linear = (Parameter("area", "J", Uniform(0.0, 100.0), 1.0),
              Parameter("b0", "W", Uniform(-1.0, 1.0), 0.0),
              Parameter("b1", "W/s", Uniform(-1.0, 1.0), 0.0))

    def basis(th):
        m = th.shape[0]
        c = cells(th[:, 0:1], th[:, 1:2], th[:, 2:3])
        return [np.stack([c, np.ones((m, t.size)), np.broadcast_to(t, (m, t.size))], axis=1)]

    return FitProblem("heat_flow_like", pars, y, basis=basis, linear=linear)


# ------------------------------------------------------------ reproducibility


def test_same_seed_identical_draws():
    prob = _avrami_x_problem()
    a = sample_posterior(prob, seed=42, **SHORT)
    b = sample_posterior(prob, seed=42, **SHORT)
    np.testing.assert_array_equal(a.draws, b.draws)
    np.testing.assert_array_equal(a.log_prob, b.log_prob)
    assert a.diagnostics.n_steps == b.diagnostics.n_steps


def test_different_seed_different_draws():
    prob = _avrami_x_problem()
    a = sample_posterior(prob, seed=1, **SHORT)
    b = sample_posterior(prob, seed=2, **SHORT)
    assert a.draws.shape[1] == b.draws.shape[1]
    assert not np.array_equal(a.draws[: min(len(a.draws), len(b.draws))],
                              b.draws[: min(len(a.draws), len(b.draws))])


def test_same_seed_identical_with_linear_terms():
    prob = _basis_problem()
    a = sample_posterior(prob, seed=7, **SHORT)
    b = sample_posterior(prob, seed=7, **SHORT)
    np.testing.assert_array_equal(a.draws, b.draws)
    assert a.names == ("n", "t_half", "t0", "area", "b0", "b1", "noise_sd")


# ------------------------------------------------------------ side effects


def test_inputs_unchanged():
    t = np.linspace(0.0, 300.0, 120)
    y = avrami_conversion(t, 2.5, avrami_k_from_half_time(2.5, 60.0), 10.0)
    y = y + np.random.default_rng(0).normal(0.0, 0.01, t.shape)
    t_copy, y_copy = t.copy(), y.copy()
    prob = _avrami_x_problem(y=y, t=t)
    x0 = np.array([2.0, 50.0, 5.0])
    x0_copy = x0.copy()
    lsq = fit_least_squares(prob, x0=x0)
    lsq_x, lsq_cov = lsq.x.copy(), lsq.cov.copy()
    sample_posterior(prob, seed=0, start=lsq, **SHORT)
    np.testing.assert_array_equal(t, t_copy)
    np.testing.assert_array_equal(y, y_copy)
    np.testing.assert_array_equal(prob.data, y_copy)
    np.testing.assert_array_equal(x0, x0_copy)
    np.testing.assert_array_equal(lsq.x, lsq_x)
    np.testing.assert_array_equal(lsq.cov, lsq_cov)


# ------------------------------------------------------------ vectorisation


@pytest.mark.parametrize("make", [_avrami_x_problem, _basis_problem])
def test_vectorised_log_probability_equals_loop(make):
    prob = make()
    logp = log_probability(prob)
    rng = np.random.default_rng(5)
    theta = np.column_stack([rng.uniform(1.5, 3.5, 40), rng.uniform(30.0, 90.0, 40),
                             rng.uniform(0.0, 20.0, 40)])
    theta[3] = [7.0, 60.0, 10.0]   # outside the prior of n
    theta[8] = [2.5, 60.0, 80.0]   # outside the prior of t0
    vec = logp(theta)
    loop = np.array([logp(row[None, :])[0] for row in theta])
    np.testing.assert_allclose(vec, loop, rtol=1e-12, atol=1e-9)
    assert np.isneginf(vec[3]) and np.isneginf(vec[8])
    assert np.all(np.isfinite(np.delete(vec, [3, 8])))
    assert vec.shape == (40,)


def test_vectorised_predict_equals_loop():
    prob = _basis_problem()
    rng = np.random.default_rng(2)
    full = np.column_stack([rng.uniform(2, 3, 6), rng.uniform(40, 80, 6), rng.uniform(0, 20, 6),
                            rng.uniform(1, 3, 6), rng.uniform(0, .1, 6), rng.uniform(0, 1e-4, 6)])
    vec = prob.predict_full(full)
    loop = np.vstack([prob.predict_full(row[None, :])[0] for row in full])
    np.testing.assert_allclose(vec, loop, rtol=1e-13, atol=0)


# ------------------------------------------------------------ boundary strictness


def test_parameter_start_outside_prior_raises():
    with pytest.raises(CrystkinInputError, match="outside"):
        Parameter("n", "1", Uniform(0.5, 6.0), 7.0)


def test_least_squares_start_outside_bounds_raises():
    prob = _avrami_x_problem()
    with pytest.raises(CrystkinInputError, match="outside its bounds"):
        fit_least_squares(prob, x0=[2.0, 50.0, 99.0])
    with pytest.raises(CrystkinInputError, match="3 parameters"):
        fit_least_squares(prob, x0=[2.0, 50.0])


@pytest.mark.parametrize("make", [lambda: Uniform(2.0, 1.0), lambda: Uniform(1.0, 1.0),
                                  lambda: LogUniform(10.0, 1.0), lambda: LogUniform(-1.0, 1.0),
                                  lambda: Normal(0.0, 1.0, lower=1.0, upper=-1.0),
                                  lambda: Normal(0.0, -1.0)])
def test_reversed_or_invalid_prior_bounds_raise(make):
    with pytest.raises(CrystkinInputError):
        make()


def test_unbounded_priors_sample_without_warnings():
    # Normal priors without truncation have infinite support; starting the
    # walkers must not produce NaN bounds (RuntimeWarning) on the way.
    rng = np.random.default_rng(4)
    x = np.linspace(0.0, 1.0, 20)
    y = 1.0 + 2.0 * x + rng.normal(0.0, 0.1, x.shape)
    A = np.column_stack([np.ones_like(x), x])
    pars = (Parameter("a", "1", Normal(0.0, 10.0), 0.0),
            Parameter("b", "1", Normal(0.0, 10.0), 0.0))
    prob = FitProblem("normal_priors", pars, y, predict=lambda th: th @ A.T, noise=0.1)
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        post = sample_posterior(prob, seed=0, **SHORT)
    assert np.all(np.isfinite(post.draws))


# ------------------------------------------------------------ diagnostics and summaries


def test_non_converged_run_says_so():
    prob = _avrami_x_problem()
    post = sample_posterior(prob, seed=0, max_steps=60, check_every=30, min_steps=30)
    d = post.diagnostics
    assert d.converged is False
    assert "NOT converged" in d.reason
    assert d.n_steps == 60
    assert np.all(np.isfinite(post.draws))


def test_summary_columns_and_values():
    prob = _avrami_x_problem()
    post = sample_posterior(prob, seed=0, **SHORT)
    df = post.summary()
    assert list(df.columns) == ["parameter", "unit", "prior", "nuisance", "lo95", "lo68",
                                "median", "hi68", "hi95", "mean", "sd"]
    assert list(df["parameter"]) == list(post.names) == ["n", "t_half", "t0", "noise_sd"]
    row = df.set_index("parameter").loc["n"]
    assert row["median"] == pytest.approx(np.median(post["n"]))
    assert row["lo95"] == pytest.approx(np.quantile(post["n"], 0.025))
    assert row["hi95"] == pytest.approx(np.quantile(post["n"], 0.975))
    assert row["unit"] == "1" and row["prior"] == "uniform(0.5, 6)"
    assert df.set_index("parameter").loc["noise_sd", "nuisance"]
    assert df.set_index("parameter").loc["noise_sd", "prior"].startswith("1/sigma")
    frame = post.to_frame()
    assert list(frame.columns) == [*post.names, "log_prob"] and len(frame) == len(post.draws)
    with pytest.raises(KeyError):
        post["no_such_parameter"]


# ------------------------------------------------------------ warm-up and batching


def test_warm_up_brings_walkers_started_far_away_into_the_bulk():
    """Walkers started in a tiny ball 12 standard errors from the mode all join the bulk."""
    import dataclasses

    from kinetics.estimate.posterior import _lag_threshold

    prob = _avrami_x_problem(seed=3)
    lsq = fit_least_squares(prob)
    far = lsq.x + 12.0 * lsq.stderr * np.array([1.0, 1.0, -1.0])
    start = dataclasses.replace(lsq, x=far, stderr=1e-3 * lsq.stderr)
    post = sample_posterior(prob, seed=5, start=start, max_steps=3000)
    d = post.diagnostics
    assert d.warmup_steps > 0
    assert d.lagging_walkers == 0
    # every kept draw lies in the bulk: no walker left behind on the climb
    assert post.log_prob.max() - post.log_prob.min() < 2 * _lag_threshold(3)
    for j, name in enumerate(prob.names):
        assert abs(np.median(post[name]) - lsq.x[j]) < 3 * lsq.stderr[j]


def test_groups_solved_together_equal_groups_solved_apart():
    """Two noise groups of different lengths (same coefficient count): the joint log
    posterior is the sum of the two single-group ones (minus the shared prior)."""
    t1, t2 = np.linspace(0, 300, 150), np.linspace(0, 250, 97)
    rng = np.random.default_rng(0)
    y1 = 2.0 * np.exp(-t1 / 80.0) + 0.1 + rng.normal(0, 1e-3, t1.size)
    y2 = 1.5 * np.exp(-t2 / 80.0) - 0.2 + rng.normal(0, 3e-3, t2.size)
    par = (Parameter("tau", "s", Uniform(1.0, 1e3), 70.0),)

    def lin(tag):
        return (Parameter(f"a{tag}", "W", Uniform(-10, 10), None),
                Parameter(f"c{tag}", "W", Uniform(-10, 10), None))

    def blocks(th, t):
        m = th.shape[0]
        return np.stack([np.exp(-t[None, :] / th[:, 0:1]), np.ones((m, t.size))], axis=1)

    joint = FitProblem("two groups", par, np.concatenate([y1, y2]),
                       basis=lambda th: [blocks(th, t1), blocks(th, t2)],
                       linear=lin(1) + lin(2), linear_groups=(2, 2),
                       noise_groups=np.r_[np.zeros(t1.size, int), np.ones(t2.size, int)])
    one = FitProblem("g1", par, y1, basis=lambda th: [blocks(th, t1)], linear=lin(1))
    two = FitProblem("g2", par, y2, basis=lambda th: [blocks(th, t2)], linear=lin(2))
    th = np.array([[60.0], [80.0], [95.0]])
    prior = par[0].prior.logpdf(th[:, 0])
    np.testing.assert_allclose(log_probability(joint)(th),
                               log_probability(one)(th) + log_probability(two)(th) - prior,
                               rtol=1e-12)
