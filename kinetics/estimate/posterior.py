"""Posterior sampling for any :class:`FitProblem` with emcee.

One loop for every model: vectorised log-probability over walkers,
differential-evolution moves, walkers started in a small ball around the
least-squares optimum, run length set by the integrated autocorrelation time.

References
----------
Foreman-Mackey, Hogg, Lang & Goodman, "emcee: The MCMC Hammer", PASP 125, 306 (2013).
Goodman & Weare, Comm. App. Math. Comp. Sci. 5(1) (2010).
ter Braak, "A Markov chain Monte Carlo version of the genetic algorithm
differential evolution", Stat. Comput. 16, 239 (2006) (the DE move).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import CrystkinInputError
from ..models.params import LogUniform, Parameter
from .least_squares import LeastSquaresResult, fit_least_squares
from .problem import FitProblem
from .summary import QUANTILES, summarise

__all__ = ["Diagnostics", "Posterior", "sample_posterior", "log_probability", "conditional_draws"]


@dataclass(frozen=True)
class Diagnostics:
    """Convergence record of one sampler run.

    Attributes
    ----------
    converged : bool
        Chain length >= ``tau_factor`` x max integrated autocorrelation time,
        tau estimated on the chain after its first fifth.
    reason : str
        Plain statement of the outcome.
    n_steps, burn_in, thin, n_walkers, n_draws : int
    tau : dict
        Integrated autocorrelation time per parameter, steps.
    acceptance : float
        Mean acceptance fraction; ``acceptance_min`` the worst walker.
    ess : float
        Effective sample size, n_walkers * (n_steps - burn_in) / max tau.
    seconds : float
        Wall time of the sampling.
    warmup_steps : int
        Steps of the warm-up before the kept chain (discarded).
    walkers_moved : int
        Walkers that the warm-up moved from a low-probability region onto the
        bulk of the ensemble.
    lagging_walkers : int
        Walkers whose mean log posterior over the kept chain stays far below the
        rest (stuck in a poor region); they are left out of the draws, and
        ``reason`` says so.
    """

    converged: bool
    reason: str
    n_steps: int
    burn_in: int
    thin: int
    n_walkers: int
    n_draws: int
    tau: dict
    acceptance: float
    acceptance_min: float
    ess: float
    seconds: float
    tau_factor: float
    warmup_steps: int = 0
    walkers_moved: int = 0
    lagging_walkers: int = 0

    def as_dict(self) -> dict:
        d = dict(self.__dict__)
        d["tau_max"] = max(self.tau.values()) if self.tau else float("nan")
        return d


@dataclass(frozen=True)
class Posterior:
    """Posterior draws of one problem, with diagnostics and provenance.

    Attributes
    ----------
    name : str
    parameters : tuple of Parameter
        Model parameters followed by estimated noise levels.
    draws : ndarray of shape (S, p)
    log_prob : ndarray of shape (S,)
    diagnostics : Diagnostics
    least_squares : LeastSquaresResult
    seed : int
    provenance : dict
    """

    name: str
    parameters: tuple[Parameter, ...]
    draws: np.ndarray
    log_prob: np.ndarray
    diagnostics: Diagnostics
    least_squares: LeastSquaresResult
    seed: int
    provenance: dict = field(default_factory=dict)

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(p.name for p in self.parameters)

    def __getitem__(self, name: str) -> np.ndarray:
        try:
            return self.draws[:, self.names.index(name)]
        except ValueError:
            raise KeyError(f"no parameter '{name}' in posterior of {self.name}; "
                           f"have {self.names}") from None

    def to_frame(self) -> pd.DataFrame:
        """The draws as a DataFrame (one column per parameter, plus log_prob)."""
        df = pd.DataFrame(self.draws, columns=list(self.names))
        df["log_prob"] = self.log_prob
        return df

    def summary(self) -> pd.DataFrame:
        """Tidy table: one row per parameter, median and 68 %/95 % intervals."""
        rows = []
        for p, col in zip(self.parameters, self.draws.T, strict=True):
            s = summarise(col)
            rows.append({"parameter": p.name, "unit": p.unit, "prior": self.priors()[p.name],
                         "nuisance": p.nuisance, **{k: s[k] for k in (*QUANTILES, "mean", "sd")}})
        return pd.DataFrame(rows)

    def priors(self) -> dict[str, str]:
        """Prior of every parameter, as written in reports."""
        out = {}
        for p in self.parameters:
            if p.name in self.provenance.get("integrated_out", ()):
                out[p.name] = ("1/sigma, integrated out analytically"
                               if p.name.startswith("noise_sd")
                               else "flat, integrated out analytically")
            else:
                out[p.name] = p.prior.describe()
        return out


def _group_terms(problem: FitProblem, theta: np.ndarray):
    """Per noise group: (SSR, log det M, beta_hat, M) at nonlinear parameters theta (m, p).

    With linear coefficients, SSR is the residual sum of squares after the
    best linear fit and M = B W B^T its normal matrix (whitened by known noise).
    """
    y = problem.data
    sd = None if problem.estimates_noise else problem.noise_sd
    out = []
    if problem.basis is None:
        r = y[None, :] - problem.predict(theta)
        for sl in problem.group_slices:
            rg = r[:, sl] if sd is None else r[:, sl] / sd[sl]
            out.append((np.sum(rg * rg, axis=1), None, None, None))
        return out
    blocks = problem.basis(theta)
    m = theta.shape[0]
    out = [None] * len(blocks)
    buckets: dict[int, list[int]] = {}
    for g, B in enumerate(blocks):
        buckets.setdefault(B.shape[1], []).append(g)
    slices = problem.group_slices
    for L, gs in buckets.items():
        # groups with the same number of coefficients solved together, zero-padded in N
        n_max = max(slices[g].stop - slices[g].start for g in gs)
        Bs = np.zeros((m, len(gs), L, n_max))
        Ys = np.zeros((len(gs), n_max))
        for i, g in enumerate(gs):
            sl = slices[g]
            n_g = sl.stop - sl.start
            if sd is None:
                Bs[:, i, :, :n_g] = blocks[g]
                Ys[i, :n_g] = y[sl]
            else:
                Bs[:, i, :, :n_g] = blocks[g] / sd[sl]
                Ys[i, :n_g] = y[sl] / sd[sl]
        M = np.einsum("mgln,mgkn->mglk", Bs, Bs)
        b = np.einsum("mgln,gn->mgl", Bs, Ys)
        s = np.sqrt(np.maximum(np.einsum("mgll->mgl", M), 1e-300))
        Ms = M / (s[..., :, None] * s[..., None, :]) + 1e-12 * np.eye(L)
        bs = b / s
        sign, logdet = np.linalg.slogdet(Ms)
        cs = np.linalg.solve(Ms, bs[..., None])[..., 0]
        ssr = np.maximum(np.sum(Ys * Ys, axis=1) - np.sum(bs * cs, axis=-1), 1e-300)
        logdet = np.where(sign > 0, logdet + 2 * np.sum(np.log(s), axis=-1), np.inf)
        beta = cs / s
        for i, g in enumerate(gs):
            out[g] = (ssr[:, i], logdet[:, i], beta[:, i], M[:, i])
    return out


def log_probability(problem: FitProblem):
    """The vectorised marginal log posterior of the nonlinear parameters.

    Returns ``f(theta (m, p)) -> (m,)``.

    Notes
    -----
    For each noise group g with N_g data and L_g linear coefficients
    (flat prior) and unknown noise SD (prior 1/sigma), integrating both out
    gives  -1/2 log|B_g B_g^T| - (N_g - L_g)/2 log SSR_g ; with known noise,
    -1/2 log|B_g W B_g^T| - SSR_g/2 (Gelman et al., Bayesian Data Analysis,
    3rd ed., section 14.2, the normal linear model with noninformative prior).
    """
    params = problem.parameters
    counts = np.array([sl.stop - sl.start for sl in problem.group_slices], dtype=float)
    Ls = np.array(problem.linear_groups or (0,) * problem.n_groups, dtype=float)

    def logp(theta):
        theta = np.atleast_2d(theta)
        lp = np.zeros(theta.shape[0])
        for j, par in enumerate(params):
            lp = lp + par.prior.logpdf(theta[:, j])
        if problem.log_prior is not None:
            ok = np.isfinite(lp)
            with np.errstate(all="ignore"):
                lp[ok] = lp[ok] + problem.log_prior(theta[ok])
        ok = np.isfinite(lp)
        out = np.full(theta.shape[0], -np.inf)
        if not ok.any():
            return out
        with np.errstate(all="ignore"):
            terms = _group_terms(problem, theta[ok])
            ll = np.zeros(int(ok.sum()))
            for (ssr, logdet, _, _), n, L in zip(terms, counts, Ls, strict=True):
                if logdet is not None:
                    ll = ll - 0.5 * logdet
                if problem.estimates_noise:
                    ll = ll - 0.5 * (n - L) * np.log(ssr)
                else:
                    ll = ll - 0.5 * ssr
        out[ok] = np.where(np.isfinite(ll), lp[ok] + ll, -np.inf)
        return out

    return logp


def conditional_draws(problem: FitProblem, theta: np.ndarray, rng, *, chunk: int = 256):
    """Linear coefficients and noise SDs drawn from their exact conditionals.

    Parameters
    ----------
    theta : ndarray of shape (S, p)
        Posterior draws of the nonlinear parameters.

    Returns
    -------
    beta : ndarray of shape (S, L)
    sigma : ndarray of shape (S, n_groups)

    Notes
    -----
    sigma_g^2 | theta ~ SSR_g / chi^2_(N_g - L_g);  beta_g | theta, sigma ~
    N(beta_hat_g, sigma_g^2 (B_g B_g^T)^-1)  (Gelman et al., BDA3, 14.2).
    With known noise, sigma is the given SD and the factor is 1.
    """
    S = theta.shape[0]
    L = len(problem.linear)
    beta = np.zeros((S, L))
    sigma = np.zeros((S, problem.n_groups))
    counts = [sl.stop - sl.start for sl in problem.group_slices]
    Ls = problem.linear_groups or (0,) * problem.n_groups
    for a in range(0, S, chunk):
        th = theta[a:a + chunk]
        terms = _group_terms(problem, th)
        j = 0
        for g, ((ssr, _, bh, M), n, Lg) in enumerate(zip(terms, counts, Ls, strict=True)):
            if problem.estimates_noise:
                s2 = ssr / rng.chisquare(max(n - Lg, 1), size=len(th))
                sigma[a:a + chunk, g] = np.sqrt(s2)
            else:
                s2 = np.ones(len(th))
                sigma[a:a + chunk, g] = float(np.mean(problem.noise_sd[problem.group_slices[g]]))
            if Lg:
                cov = np.linalg.inv(M) * s2[:, None, None]
                cov = 0.5 * (cov + np.transpose(cov, (0, 2, 1)))
                w, V = np.linalg.eigh(cov)
                z = rng.standard_normal((len(th), Lg)) * np.sqrt(np.clip(w, 0, None))
                beta[a:a + chunk, j:j + Lg] = bh + np.einsum("mij,mj->mi", V, z)
            j += Lg
    return beta, sigma


def sample_posterior(problem: FitProblem, *, seed: int = 0, start: LeastSquaresResult | None = None,
                     n_walkers: int | None = None, max_steps: int = 20_000,
                     check_every: int = 100, tau_factor: float = 50.0, min_steps: int = 300,
                     init_scale: float = 0.1, progress: bool | str = False,
                     warmup_every: int = 50, max_warmup: int = 2000) -> Posterior:
    """Sample the posterior of a problem with emcee.

    Parameters
    ----------
    problem : FitProblem
    seed : int
        Seeds both the walkers' start positions and the sampler's random state.
    start : LeastSquaresResult, optional
        Least-squares optimum to start from; computed when not given.
    n_walkers : int, optional
        Default ``max(24, 4 * ndim)``, rounded up to even.
    max_steps : int
        Hard limit; a run that reaches it without converging says so.
    check_every : int
        Steps between convergence checks.
    tau_factor : float
        Required chain length in autocorrelation times (the emcee authors
        advise about 50).
    min_steps : int
    init_scale : float
        Initial ball radius, in least-squares standard errors.
    progress : bool or str
        Show a tqdm bar (its label when a string).
    warmup_every, max_warmup : int
        Warm-up rounds (steps) and their total limit; see Notes.

    Returns
    -------
    Posterior

    Notes
    -----
    Likelihood: independent Gaussian errors, known SD or one unknown SD per
    noise group with the scale-invariant prior 1/sigma.  Linear coefficients
    and unknown noise SDs are integrated out analytically (see
    :func:`log_probability`); the sampler explores the nonlinear parameters
    and the rest is drawn from exact conditionals (:func:`conditional_draws`).  Moves: emcee's
    ``DEMove`` (90 %) mixed with ``DEMove(gamma0=1.0)`` (10 %) to let walkers
    jump between modes.  A warm-up (:func:`_warm_up`, discarded) first brings
    every walker into the bulk of the posterior.  Burn-in of the kept chain:
    2 x max tau; thinning: max(1, min tau / 2) (emcee documentation, "Saving &
    monitoring progress").  Walkers still far below the rest at the end are
    left out of the draws and counted in the diagnostics.
    """
    import time

    import emcee

    t_start = time.perf_counter()
    lsq = start if start is not None else fit_least_squares(problem)
    logp = log_probability(problem)
    params = problem.parameters
    ndim = len(params)
    if ndim == 0:
        return _exact_linear(problem, lsq, seed, time.perf_counter() - t_start)
    nw = n_walkers or max(24, 4 * ndim)
    nw += nw % 2
    if nw < 2 * ndim:
        raise CrystkinInputError(f"{problem.name}: need at least {2 * ndim} walkers, got {nw}")

    rng = np.random.default_rng(seed)
    centre = lsq.x[:ndim]
    scale = lsq.stderr[:ndim]
    fallback = 1e-4 * np.maximum(np.abs(centre), 1e-8)
    scale = np.where(np.isfinite(scale) & (scale > 0), scale, fallback) * init_scale
    lo = np.array([p.prior.support[0] for p in params])
    hi = np.array([p.prior.support[1] for p in params])
    p0 = centre + scale * rng.standard_normal((nw, ndim))
    p0 = np.clip(p0, lo + 1e-12 * np.abs(np.nan_to_num(lo)), hi - 1e-12 * np.abs(np.nan_to_num(hi)))
    lp0 = logp(p0)
    for _ in range(50):
        bad = ~np.isfinite(lp0)
        if not bad.any():
            break
        p0[bad] = centre + 0.1 * scale * rng.standard_normal((int(bad.sum()), ndim))
        p0[bad] = np.clip(p0[bad], lo, hi)
        lp0 = logp(p0)
    if not np.all(np.isfinite(lp0)):
        raise CrystkinInputError(
            f"{problem.name}: the posterior is zero around the least-squares optimum; "
            "check the priors against the data")

    moves = [(emcee.moves.DEMove(), 0.9), (emcee.moves.DEMove(gamma0=1.0), 0.1)]
    sampler = emcee.EnsembleSampler(nw, ndim, logp, vectorize=True, moves=moves)
    sampler.random_state = np.random.RandomState(seed % (2**32)).get_state()

    bar = None
    if progress:
        from tqdm.auto import tqdm
        bar = tqdm(total=max_steps, desc=progress if isinstance(progress, str) else problem.name,
                   leave=False, disable=None)
    state = emcee.State(p0, log_prob=lp0)
    state, warm, moved = _warm_up(sampler, state, logp, lo, hi, rng, every=warmup_every,
                                  limit=max_warmup, bar=bar)
    sampler.reset()
    converged = False
    reason = ""
    tau = np.full(ndim, np.nan)
    steps = 0
    while steps < max_steps:
        n = min(check_every, max_steps - steps)
        state = sampler.run_mcmc(state, n, progress=False, skip_initial_state_check=True)
        steps += n
        if bar is not None:
            bar.update(n)
        if steps < min_steps:
            continue
        chain = sampler.get_chain()
        tau = _autocorr_time(chain[steps // 5:], tau)
        tmax = float(np.nanmax(tau)) if np.all(np.isfinite(tau)) else np.inf
        if steps >= tau_factor * tmax:
            converged = True
            reason = (f"converged: {steps} steps = {steps / tmax:.0f} x max autocorrelation "
                      f"time ({tmax:.1f} steps)")
            break
    if bar is not None:
        bar.close()
    chain = sampler.get_chain()
    if not np.all(np.isfinite(tau)):
        tau = emcee.autocorr.integrated_time(chain[steps // 5:], c=5, tol=0, quiet=True)
    tmax = float(np.nanmax(tau)) if np.all(np.isfinite(tau)) else float(steps)
    if not converged:
        reason = (f"NOT converged: {steps} steps is {steps / tmax:.0f} x the max autocorrelation "
                  f"time ({tmax:.1f} steps), below the required {tau_factor:.0f}; "
                  "treat intervals as provisional")
    burn = int(min(max(2 * tmax, 1), steps // 2))
    thin = max(1, int(0.5 * float(np.nanmin(tau))))
    kept_lp = sampler.get_log_prob(discard=burn, thin=thin)
    walker_mean = kept_lp.mean(axis=0)
    lagging = walker_mean < np.median(walker_mean) - _lag_threshold(ndim)
    if lagging.any():
        reason += (f"; {int(lagging.sum())} of {nw} walkers stayed in a low-probability region "
                   "and were left out of the draws")
    keep = ~lagging
    flat = sampler.get_chain(discard=burn, thin=thin)[:, keep].reshape(-1, ndim)
    flat_lp = kept_lp[:, keep].reshape(-1)
    beta, sigma = conditional_draws(problem, flat, np.random.default_rng([seed, 1]))
    noise_params = tuple(Parameter(nm, "data unit", LogUniform(1e-300, 1e300),
                                   description="noise SD (prior 1/sigma, integrated out)",
                                   nuisance=True) for nm in problem.noise_names)
    all_params = (*params, *problem.linear, *noise_params)
    draws = np.column_stack([flat, beta, sigma])
    acc = sampler.acceptance_fraction
    diag = Diagnostics(
        converged=converged, reason=reason, n_steps=steps, burn_in=burn, thin=thin,
        n_walkers=nw, n_draws=len(flat),
        tau=dict(zip([p.name for p in params], map(float, tau), strict=True)),
        acceptance=float(np.mean(acc)), acceptance_min=float(np.min(acc)),
        ess=float(int(keep.sum()) * (steps - burn) / tmax), seconds=time.perf_counter() - t_start,
        tau_factor=tau_factor, warmup_steps=warm, walkers_moved=moved,
        lagging_walkers=int(lagging.sum()))
    prov = dict(problem.provenance)
    prov.update({"sampler": f"emcee {emcee.__version__} EnsembleSampler, DEMove 0.9 + "
                            "DEMove(gamma0=1) 0.1, vectorised", "seed": seed})
    prov["integrated_out"] = [p.name for p in problem.linear] + list(problem.noise_names)
    return Posterior(name=problem.name, parameters=all_params, draws=draws, log_prob=flat_lp,
                     diagnostics=diag, least_squares=lsq, seed=seed, provenance=prov)


def _autocorr_time(chain: np.ndarray, previous: np.ndarray) -> np.ndarray:
    """emcee's integrated autocorrelation time, on a chain thinned to ~10 points per
    previous tau (the check runs every few hundred steps; a full-length transform of a
    long chain in many dimensions would cost a fifth of the sampling)."""
    import emcee

    prev = float(np.nanmin(previous)) if np.all(np.isfinite(previous)) else 0.0
    k = max(1, int(prev / 10.0))
    return k * emcee.autocorr.integrated_time(chain[::k], c=5, tol=0, quiet=True)


def _lag_threshold(ndim: int) -> float:
    """How far (log posterior units) below the bulk a walker may sit before it counts as lost.

    In the typical set of a d-dimensional Gaussian posterior, log p lies about
    chi2_d / 2 below the mode; 0.5 chi2_d(0.999) + 2 is exceeded by few legitimate
    walkers (our choice of level).
    """
    from scipy.stats import chi2
    return float(0.5 * chi2.ppf(0.999, ndim) + 2.0)


def _warm_up(sampler, state, logp, lo, hi, rng, *, every: int, limit: int, bar=None):
    """Run until every walker has joined the bulk and the bulk has stopped climbing.

    Walkers started near a least-squares optimum that is not the posterior mode
    (other noise weights, another local optimum) can stay behind for thousands
    of steps and widen the tails of every interval.  After each round of
    ``every`` steps, walkers more than :func:`_lag_threshold` below the median
    walker are moved onto randomly chosen walkers of the upper half (with a
    small jitter) -
    allowed during warm-up, whose steps are discarded.  Stops when no walker lags
    and the median log posterior rose less than sqrt(d/2) (its spread in the
    typical set) over the round, or after ``limit`` steps.

    Returns (state, warm-up steps, walkers moved).
    """
    import emcee

    ndim = state.coords.shape[1]
    thr = _lag_threshold(ndim)
    steps = moved = 0
    prev_median = np.median(state.log_prob)
    while steps < limit:
        state = sampler.run_mcmc(state, every, progress=False, skip_initial_state_check=True)
        steps += every
        if bar is not None:
            bar.update(every)
        lp = state.log_prob
        med = np.median(lp)
        lag = lp < med - thr
        if not lag.any() and med - prev_median < np.sqrt(ndim / 2.0):
            break
        prev_median = med
        if lag.any():
            good = np.flatnonzero(~lag)
            coords = state.coords.copy()
            spread = np.std(coords[good], axis=0)
            pick = rng.choice(good, size=int(lag.sum()))
            new = coords[pick] + 0.01 * spread * rng.standard_normal((len(pick), ndim))
            new = np.clip(new, lo, hi)
            lp_new = logp(new)
            bad = ~np.isfinite(lp_new)
            new[bad], lp_new[bad] = coords[pick[bad]], lp[pick[bad]]
            coords[lag] = new
            lp = lp.copy()
            lp[lag] = lp_new
            moved += int(lag.sum())
            state = emcee.State(coords, log_prob=lp, random_state=state.random_state)
    return state, steps, moved


def _exact_linear(problem: FitProblem, lsq: LeastSquaresResult, seed: int, t0: float,
                  n_draws: int = 4000) -> Posterior:
    """A purely linear problem: independent draws from the exact posterior, no sampler."""
    import time

    t_start = time.perf_counter()
    rng = np.random.default_rng([seed, 1])
    empty = np.zeros((n_draws, 0))
    beta, sigma = conditional_draws(problem, empty, rng)
    noise_params = tuple(Parameter(nm, "data unit", LogUniform(1e-300, 1e300),
                                   description="noise SD (prior 1/sigma, integrated out)",
                                   nuisance=True) for nm in problem.noise_names)
    diag = Diagnostics(converged=True, reason="exact: linear-Gaussian posterior drawn directly",
                       n_steps=0, burn_in=0, thin=1, n_walkers=0, n_draws=n_draws, tau={},
                       acceptance=float("nan"), acceptance_min=float("nan"), ess=float(n_draws),
                       seconds=t0 + time.perf_counter() - t_start, tau_factor=0.0)
    prov = dict(problem.provenance)
    prov.update({"sampler": "exact conditional draws (linear model)", "seed": seed,
                 "integrated_out": [p.name for p in problem.linear] + list(problem.noise_names)})
    return Posterior(name=problem.name, parameters=(*problem.linear, *noise_params),
                     draws=np.column_stack([beta, sigma]), log_prob=np.zeros(n_draws),
                     diagnostics=diag, least_squares=lsq, seed=seed, provenance=prov)
