"""Comparing formulations: which one crystallizes faster, by how much, and how sure we are.

Every formulation (a ``group`` of the study) is compared with one reference
group, condition by condition: hold temperature for isothermal runs, cooling
rate for cooling runs, a temperature grid for a fitted rate function K(T).

* Isothermal: ratio of half-times t_half(formulation) / t_half(reference) and
  the probability that the formulation is faster (ratio < 1).
* Cooling: shift of the crystallization peak and of the onset temperature (K,
  formulation minus reference; positive means it crystallizes earlier on
  cooling), and the half-time ratio where half-times are given.
* Nucleation efficiency on the self-nucleation scale of Fillon, Lotz, Thierry
  and Wittmann (1993), when the reference temperatures are supplied.
* Rate model: ratio K_f(T) / K_ref(T) over the grid of a fitted K(T).
* A ranking per kind of evidence and one plain-language paragraph per comparison.

Every number is computed per posterior draw and then summarised (median and
central 95 % interval); probabilities are fractions of draws.

Run-to-run scatter
------------------
Two runs of the same material at the same condition do not give the same
half-time: sample mass and pan contact, the thermal history of the pellet and
the temperature calibration all vary, typically by more than the within-run
uncertainty of a fitted half-time (often below 1 %).  A comparison that ignores
this calls tiny differences real.  We therefore use a random-effects model,
separately for each quantity (ln t_half of isothermal holds; peak temperature,
onset temperature and ln t_half of cooling runs):

    y_i ~ Normal(mu_gc, s_i^2 + tau^2),  i a run of group g at condition c,

where y_i and s_i are the mean and standard deviation of the run's own
posterior (of ln t_half, or of the temperature in K), mu_gc is the expected
value of a run of that formulation at that condition (flat prior) and tau is
the between-run standard deviation.  On the log scale tau is a coefficient of
variation, CV = sqrt(exp(tau^2) - 1).

*One tau is shared by all groups and conditions of a quantity (pooled).*  With
the two or three repeats a lab usually makes per condition, a tau per group and
condition is determined almost entirely by its prior; the scatter comes mostly
from the procedure, not from the additive; and on the log scale it is
comparable across temperatures.  Pooling also lets conditions measured once
borrow the scatter estimated where runs were repeated.  Prior: half-normal,
scale 0.25 on ln t_half (95 % of its mass below a CV of about 50 %) and 2 K on
temperatures, weakly informative choices of ours (half-t family of priors for
group-level SDs, Gelman 2006).  With tau integrated on a grid and the mu_gc
drawn from their exact conditionals, the draws are exact (no MCMC is needed
for this one-dimensional problem; Gelman et al., BDA3, section 5.4).

When no condition has repeated runs, tau is not estimable.  A user-given
run-to-run CV (``run_to_run_cv``, for half-times) or SD (``run_to_run_sd_K``,
for temperatures) is then used as a fixed tau; without one, tau is taken as
zero, the intervals hold only the within-run uncertainty, and the result says
so in its warnings and verdicts.  A user-given value also overrides an
estimate from repeats (the estimate is still reported in the scatter table).

Calling a difference
--------------------
A formulation is called faster (or slower) at a condition when the probability
of that direction is at least ``call_probability`` (default 0.975, i.e. the
central 95 % interval excludes "no difference"); otherwise the verdict says
the two cannot be told apart.  A called difference smaller than one run-to-run
SD is flagged: single runs may then rank the two the other way.

References
----------
Fillon, Lotz, Thierry & Wittmann, "Self-nucleation and enhanced nucleation of
polymers. Definition of a convenient calorimetric 'efficiency scale' and
evaluation of nucleating additives in isotactic polypropylene", J. Polym.
Sci. B 31 (1993) 1395-1405 (from memory; the paper was not seen).
Gelman, Carlin, Stern, Dunson, Vehtari & Rubin, Bayesian Data Analysis, 3rd
ed. (2013), section 5.4, the hierarchical normal model (from memory).
Gelman, "Prior distributions for variance parameters in hierarchical models",
Bayesian Analysis 1 (2006) 515-534 (from memory).
"""

from __future__ import annotations

import math
import warnings as _warnings
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import CrystkinInputError, DataQualityWarning, check_range
from ..estimate import interval_columns, summarise
from ..units import celsius

__all__ = [
    "HalfTimeRun", "CoolingPeak", "NucleationReference", "RateCurves", "ScatterPosterior",
    "ComparisonResult", "compare_formulations", "nucleation_efficiency", "scatter_posterior",
    "cooling_peak_from_conversion", "cooling_peaks_from", "format_estimate",
    "format_probability", "SCATTER_PRIOR_LN", "SCATTER_PRIOR_K",
]

_WHERE = "compare_formulations"
#: Half-normal prior scale of the run-to-run SD of ln t_half (our choice).
SCATTER_PRIOR_LN = 0.25
#: Half-normal prior scale of the run-to-run SD of peak and onset temperatures, K (our choice).
SCATTER_PRIOR_K = 2.0
_GRID_POINTS = 2001


# ---------------------------------------------------------------------------
# Inputs
# ---------------------------------------------------------------------------

def _as_draws_or_value(x, sd, name, where, *, positive=False):
    """A validated single value (float) or a clean read-only array of draws."""
    arr = np.asarray(x, dtype=float)
    if arr.ndim == 0:
        v = float(arr)
        if not np.isfinite(v) or (positive and v <= 0):
            raise CrystkinInputError(f"{where}: '{name}' must be a finite "
                                     f"{'positive ' if positive else ''}number, got {v!r}")
        if not (np.isfinite(sd) and sd >= 0):
            raise CrystkinInputError(f"{where}: '{name}_sd' must be a number >= 0, got {sd!r}")
        return v
    arr = arr.ravel()
    ok = np.isfinite(arr) & ((arr > 0) if positive else True)
    if ok.sum() < max(10, arr.size // 2):
        raise CrystkinInputError(
            f"{where}: fewer than half of the draws of '{name}' are finite"
            f"{' and positive' if positive else ''} ({int(ok.sum())} of {arr.size}); "
            "check the upstream fit")
    out = arr[ok].copy()
    out.setflags(write=False)
    return out


@dataclass(frozen=True)
class HalfTimeRun:
    """Half-time of one isothermal run, for comparisons.

    Use this when the half-times do not come from
    :func:`kinetics.analyses.isothermal.fit_isotherm` (which is accepted directly).

    Parameters
    ----------
    run_id, group : str
    temperature : float, K
        Hold temperature.
    t_half : float or array of shape (S,), s
        Posterior draws of the half-time, or one value with ``t_half_sd``.
    t_half_sd : float, s
        Standard deviation of a single value (ignored for draws); on the log
        scale it becomes ``t_half_sd / t_half``.
    flags : tuple of str
    """

    run_id: str
    group: str
    temperature: float
    t_half: float | np.ndarray
    t_half_sd: float = 0.0
    flags: tuple[str, ...] = ()

    def __post_init__(self):
        where = f"run {self.run_id}"
        if not (np.isfinite(self.temperature) and self.temperature > 0):
            raise CrystkinInputError(f"{where}: temperature must be a positive number in K, "
                                     f"got {self.temperature!r}")
        object.__setattr__(self, "t_half", _as_draws_or_value(self.t_half, self.t_half_sd,
                                                              "t_half", where, positive=True))


@dataclass(frozen=True)
class CoolingPeak:
    """What a comparison needs from one cooling run.

    Parameters
    ----------
    run_id, group : str
    rate : float, K/s
        Cooling rate (positive).
    T_peak : float or array of shape (S,), K
        Temperature of the crystallization peak: draws, or one value with ``T_peak_sd``.
    T_peak_sd : float, K
        Within-run uncertainty of a single value.
    T_onset : float or array, K, optional
        Onset temperature (start of the exotherm), with ``T_onset_sd``.
    t_half : float or array, s, optional
        Time from onset to 50 % conversion, with ``t_half_sd``.
    flags : tuple of str
    """

    run_id: str
    group: str
    rate: float
    T_peak: float | np.ndarray
    T_peak_sd: float = 0.0
    T_onset: float | np.ndarray | None = None
    T_onset_sd: float = 0.0
    t_half: float | np.ndarray | None = None
    t_half_sd: float = 0.0
    flags: tuple[str, ...] = ()

    def __post_init__(self):
        where = f"cooling run {self.run_id}"
        if not (np.isfinite(self.rate) and self.rate > 0):
            raise CrystkinInputError(f"{where}: rate must be a positive cooling rate in K/s, "
                                     f"got {self.rate!r}")
        object.__setattr__(self, "T_peak", _as_draws_or_value(self.T_peak, self.T_peak_sd,
                                                              "T_peak", where, positive=True))
        if self.T_onset is not None:
            object.__setattr__(self, "T_onset", _as_draws_or_value(
                self.T_onset, self.T_onset_sd, "T_onset", where, positive=True))
        if self.t_half is not None:
            th = self.t_half
            if np.ndim(th) == 0 and not np.isfinite(float(th)):
                object.__setattr__(self, "t_half", None)
            else:
                object.__setattr__(self, "t_half", _as_draws_or_value(
                    th, self.t_half_sd, "t_half", where, positive=True))


def cooling_peak_from_conversion(trace, conversion) -> CoolingPeak:
    """A :class:`CoolingPeak` from a prepared cooling run.

    Parameters
    ----------
    trace : Trace
        The raw run (for its group and rate).
    conversion : Conversion
        From :func:`kinetics.prep.cooling.prepare_cooling`; its ``baseline``
        record holds ``T_peak_K``, ``T_onset_K``, ``t_half_s`` and ``beta_K_per_s``.

    Returns
    -------
    CoolingPeak

    Notes
    -----
    The preparation gives point values only.  Their within-run uncertainty is
    taken as that of locating an event on a grid of samples: a uniform error
    over one sampling step, SD = beta dt / sqrt(12) in temperature and
    dt / sqrt(12) in time (our stated assumption).  It is small; the
    run-to-run scatter, estimated from repeated runs, usually dominates.
    """
    b = conversion.baseline
    if conversion.kind != "cooling" or "T_peak_K" not in b:
        raise CrystkinInputError(f"run {conversion.run_id}: not a prepared cooling run "
                                 "(no 'T_peak_K' in its preparation record)")
    beta = float(b.get("beta_K_per_s") or trace.info.rate)
    dt = float(b.get("dt_s") or np.median(np.diff(trace.time)))
    sd_T = abs(beta) * dt / math.sqrt(12.0)
    th = b.get("t_half_s")
    return CoolingPeak(
        run_id=trace.run_id, group=trace.info.group, rate=float(trace.info.rate),
        T_peak=float(b["T_peak_K"]), T_peak_sd=sd_T,
        T_onset=None if b.get("T_onset_K") is None else float(b["T_onset_K"]), T_onset_sd=sd_T,
        t_half=None if th is None or not np.isfinite(th) else float(th),
        t_half_sd=dt / math.sqrt(12.0), flags=tuple(conversion.warnings))


def cooling_peaks_from(runs) -> list[CoolingPeak]:
    """Cooling peaks from (trace, conversion) pairs or objects with ``.trace``/``.conversion``."""
    out = []
    for r in runs:
        if isinstance(r, CoolingPeak):
            out.append(r)
        elif hasattr(r, "trace") and hasattr(r, "conversion"):
            out.append(cooling_peak_from_conversion(r.trace, r.conversion))
        else:
            trace, conversion = r
            out.append(cooling_peak_from_conversion(trace, conversion))
    return out


@dataclass(frozen=True)
class NucleationReference:
    """Reference temperatures of the self-nucleation efficiency scale.

    Parameters
    ----------
    T_c_max : float, K
        Peak crystallization temperature of the neat polymer self-nucleated at
        its optimum self-nucleation temperature (the top of the scale).
    T_c_neat : float, K, optional
        Peak crystallization temperature of the neat polymer (the bottom of the
        scale).  When None, the reference group's measured peak at ``rate`` is
        used, with its uncertainty.
    T_c_max_sd, T_c_neat_sd : float, K
        Uncertainties of the given values (0: exact).
    rate : float, K/s, optional
        Cooling rate at which the reference temperatures hold.  May be omitted
        when the cooling runs have a single rate.
    source : str
        Where the reference temperatures come from (for the report).
    """

    T_c_max: float
    T_c_neat: float | None = None
    T_c_max_sd: float = 0.0
    T_c_neat_sd: float = 0.0
    rate: float | None = None
    source: str = ""

    def __post_init__(self):
        where = "NucleationReference"
        for name in ("T_c_max", "T_c_neat", "rate"):
            v = getattr(self, name)
            if v is not None and not (np.isfinite(v) and v > 0):
                raise CrystkinInputError(f"{where}: '{name}' must be a positive number in SI "
                                         f"units (K or K/s), got {v!r}")
        for name in ("T_c_max_sd", "T_c_neat_sd"):
            v = getattr(self, name)
            if not (np.isfinite(v) and v >= 0):
                raise CrystkinInputError(f"{where}: '{name}' must be >= 0 K, got {v!r}")
        if self.T_c_neat is not None and not self.T_c_max > self.T_c_neat:
            raise CrystkinInputError(
                f"{where}: the self-nucleated maximum T_c_max ({self.T_c_max:g} K) must lie above "
                f"the neat polymer's peak T_c_neat ({self.T_c_neat:g} K); check the order and "
                "that both are in kelvin")


@dataclass(frozen=True)
class RateCurves:
    """Posterior draws of a rate function K(T) per group on a common temperature grid.

    Parameters
    ----------
    temperature : array of shape (G,), K
    draws : mapping of group -> array of shape (S, G), 1/s
        Draws with equal S are paired by index (as from one joint fit);
        otherwise each group is resampled independently.
    source : str
        The model that produced them (for the report).
    """

    temperature: np.ndarray
    draws: Mapping[str, np.ndarray]
    source: str = ""

    def __post_init__(self):
        T = np.asarray(self.temperature, dtype=float).ravel()
        if T.size < 1 or not np.all(np.isfinite(T) & (T > 0)):
            raise CrystkinInputError("RateCurves: 'temperature' must be positive kelvin values")
        clean = {}
        for g, d in self.draws.items():
            a = np.asarray(d, dtype=float)
            if a.ndim == 1 and T.size == 1:
                a = a[:, None]
            if a.ndim != 2 or a.shape[1] != T.size:
                raise CrystkinInputError(
                    f"RateCurves: draws of group '{g}' must have shape (S, {T.size}), one column "
                    f"per grid temperature; got {a.shape}")
            if not np.all(np.isfinite(a) & (a > 0)):
                raise CrystkinInputError(f"RateCurves: draws of group '{g}' must be positive "
                                         "finite rates (1/s)")
            a = a.copy()
            a.setflags(write=False)
            clean[str(g)] = a
        object.__setattr__(self, "temperature", T)
        object.__setattr__(self, "draws", clean)


# ---------------------------------------------------------------------------
# Formulas
# ---------------------------------------------------------------------------

def nucleation_efficiency(T_c_additive, T_c_neat, T_c_max):
    """Nucleation efficiency on the self-nucleation scale, percent.

    Parameters
    ----------
    T_c_additive : array_like, K
        Peak crystallization temperature with the nucleating additive.
    T_c_neat : array_like, K
        Peak crystallization temperature of the neat polymer (same cooling rate).
    T_c_max : array_like, K
        Peak crystallization temperature of the neat polymer self-nucleated at
        the optimum self-nucleation temperature (same cooling rate).

    Returns
    -------
    ndarray, percent
        0 % for no effect, 100 % for an additive as good as the polymer's own
        optimal self-nuclei; broadcast over the inputs (use it per draw).

    Notes
    -----
    NE = 100 (T_c,NA - T_c,PP) / (T_c,PP,max - T_c,PP)
    (Fillon et al. 1993, from memory).  Only temperature differences enter, so
    K and °C inputs give the same value.

    References
    ----------
    Fillon, Lotz, Thierry & Wittmann, J. Polym. Sci. B 31 (1993) 1395-1405.

    Examples
    --------
    >>> float(nucleation_efficiency(398.15, 383.15, 413.15))
    50.0
    """
    a = np.asarray(T_c_additive, dtype=float)
    n = np.asarray(T_c_neat, dtype=float)
    m = np.asarray(T_c_max, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return 100.0 * (a - n) / (m - n)


@dataclass(frozen=True)
class ScatterPosterior:
    """Posterior of a pooled run-to-run SD tau.

    Attributes
    ----------
    grid, density : ndarray
        tau grid (unit of the data) and normalised posterior density on it.
    draws : ndarray of shape (S,)
    n_cells : int
        Conditions with repeated runs (the ones that inform tau).
    n_runs : int
        Runs in those conditions.
    prior_scale : float
    """

    grid: np.ndarray
    density: np.ndarray
    draws: np.ndarray
    n_cells: int
    n_runs: int
    prior_scale: float


def scatter_posterior(values, sds, cells, *, prior_scale: float, n_draws: int = 4000,
                      seed: int = 0) -> ScatterPosterior | None:
    """Posterior of one run-to-run SD shared by several groups of repeated runs.

    Parameters
    ----------
    values : array of shape (R,)
        Run estimates y_i (same unit as tau).
    sds : array of shape (R,)
        Their within-run standard deviations s_i.
    cells : array of shape (R,)
        Label of the group-and-condition cell of each run.
    prior_scale : float
        Scale of the half-normal prior on tau.
    n_draws : int
    seed : int

    Returns
    -------
    ScatterPosterior, or None when no cell has two or more runs.

    Notes
    -----
    y_i ~ N(mu_c, s_i^2 + tau^2) with a flat prior on each cell mean mu_c.
    Integrating the mu_c out (Gelman et al., BDA3, eq. 5.21, applied per cell),

        p(tau | y) ∝ p(tau) prod_c V_c^(1/2) prod_(i in c) (s_i^2 + tau^2)^(-1/2)
                     exp[-(y_i - mu_hat_c)^2 / (2 (s_i^2 + tau^2))],

    with V_c = 1 / sum_i 1/(s_i^2 + tau^2) and mu_hat_c = V_c sum_i y_i/(s_i^2 + tau^2).
    Cells with one run contribute a constant.  The density is evaluated on a
    grid and tau drawn by inverting its cumulative distribution.
    """
    y = np.asarray(values, dtype=float)
    s = np.asarray(sds, dtype=float)
    labels = np.asarray(cells)
    uniq, inv, counts = np.unique(labels, return_inverse=True, return_counts=True)
    rep = counts[inv] >= 2
    if not rep.any():
        return None
    y, s, inv = y[rep], s[rep], inv[rep]
    _, cell = np.unique(inv, return_inverse=True)
    C = int(cell.max()) + 1
    A = np.zeros((len(y), C))
    A[np.arange(len(y)), cell] = 1.0
    spread = max(float(np.ptp(y)), float(np.max(s)), 1e-12)
    upper = max(8.0 * prior_scale, 10.0 * spread)
    grid = np.linspace(0.0, upper, _GRID_POINTS)
    v = np.maximum(s[None, :] ** 2 + grid[:, None] ** 2, 1e-300)
    w = 1.0 / v
    W = w @ A
    mu = (w * y[None, :]) @ A / W
    resid = y[None, :] - mu[:, cell]
    logp = (-0.5 * np.log(v).sum(axis=1) - 0.5 * np.log(W).sum(axis=1)
            - 0.5 * (w * resid * resid).sum(axis=1) - 0.5 * (grid / prior_scale) ** 2)
    logp = np.where(np.isfinite(logp), logp, -np.inf)
    dens = np.exp(logp - logp.max())
    cdf = np.concatenate([[0.0], np.cumsum(0.5 * (dens[1:] + dens[:-1]) * np.diff(grid))])
    total = cdf[-1]
    dens = dens / total
    cdf = cdf / total
    rng = np.random.default_rng([seed, 7])
    u = rng.uniform(0.0, 1.0, n_draws)
    keep = np.concatenate([[True], np.diff(cdf) > 0])
    draws = np.interp(u, cdf[keep], grid[keep])
    return ScatterPosterior(grid=grid, density=dens, draws=draws, n_cells=C, n_runs=int(len(y)),
                            prior_scale=float(prior_scale))


# ---------------------------------------------------------------------------
# Formatting: numbers rounded to their uncertainty
# ---------------------------------------------------------------------------

def _decimals(lo, mid, hi) -> int:
    """Decimal places for an estimate from the narrower side of its interval.

    Keeps two significant digits of that half-width when its leading digits
    are 100-354 and one otherwise (the rounding convention of the Particle
    Data Group's Review of Particle Physics, from memory).
    """
    u = min(abs(hi - mid), abs(mid - lo))
    if not np.isfinite(u) or u <= 0:
        if not np.isfinite(mid) or mid == 0:
            return 2
        return max(0, 2 - int(math.floor(math.log10(abs(mid)))))
    e = int(math.floor(math.log10(u)))
    lead = u / 10 ** (e - 2)
    sig = 2 if lead < 355 else 1
    return -(e - sig + 1)


def _fmt(x: float, d: int) -> str:
    if d < 0:
        return f"{round(x, d):.0f}"
    s = f"{x:.{d}f}"
    return s[1:] if s.startswith("-") and float(s) == 0 else s


def format_estimate(value: float, lo: float, hi: float, unit: str = "") -> tuple[str, str]:
    """An estimate and its 95 % interval as text, rounded to the uncertainty.

    Returns
    -------
    (str, str)
        The value with its unit, and the interval ("0.41–0.56", or "-0.3 to 1.2 K").

    Examples
    --------
    >>> format_estimate(0.4823, 0.4112, 0.5634)
    ('0.48', '0.41–0.56')
    """
    d = _decimals(lo, value, hi)
    u = f" {unit}" if unit else ""
    a, b, c = _fmt(value, d), _fmt(lo, d), _fmt(hi, d)
    sep = " to " if (lo < 0 or hi < 0) else "–"
    return f"{a}{u}", f"{b}{sep}{c}{u}"


def format_probability(p: float) -> str:
    """A probability from draws, with as many digits as the draws support."""
    if not np.isfinite(p):
        return "not available"
    if p > 0.999:
        return "> 0.999"
    if p < 0.001:
        return "< 0.001"
    if p > 0.99 or p < 0.01:
        return f"{p:.3f}"
    return f"{p:.2f}"


def _fmt_T(T_K: float) -> str:
    c = float(celsius(T_K))
    s = f"{c:.1f}"
    return s[:-2] if s.endswith(".0") else s


def _fmt_rate(rate: float) -> str:
    r = rate * 60.0
    return f"{r:.3g}"


def _cv_from_tau(tau):
    return np.sqrt(np.expm1(np.asarray(tau, dtype=float) ** 2))


def _tau_from_cv(cv: float) -> float:
    return float(np.sqrt(np.log1p(cv * cv)))


# ---------------------------------------------------------------------------
# The random-effects "arm" of one quantity
# ---------------------------------------------------------------------------

@dataclass
class _Run:
    run_id: str
    group: str
    condition: float
    draws: np.ndarray | float
    sd: float = 0.0
    cond: int = -1

    def summary(self):
        if np.ndim(self.draws) == 0:
            return float(self.draws), float(self.sd)
        d = np.asarray(self.draws)
        return float(d.mean()), float(d.std(ddof=1))

    def sample(self, rng, n):
        if np.ndim(self.draws) == 0:
            if self.sd == 0:
                return np.full(n, float(self.draws))
            return float(self.draws) + self.sd * rng.standard_normal(n)
        d = np.asarray(self.draws)
        return d[rng.integers(0, len(d), n)] if len(d) != n else rng.permutation(d)


@dataclass
class _Arm:
    quantity: str
    unit: str
    log: bool
    conditions: list
    cells: dict
    mu: dict
    scatter: dict
    tau: np.ndarray


def _cluster(values, *, tol, relative):
    """Condition index of each value; neighbours closer than tol (or tol x value) share one."""
    v = np.asarray(values, dtype=float)
    order = np.argsort(v, kind="stable")
    labels = np.empty(len(v), dtype=int)
    centres: list[list[float]] = []
    prev = None
    for i in order:
        x = v[i]
        if prev is None or x - prev > (tol * prev if relative else tol):
            centres.append([])
        centres[-1].append(x)
        labels[i] = len(centres) - 1
        prev = x
    return labels, [float(np.mean(c)) for c in centres]


def _build_arm(runs: list[_Run], conditions, *, quantity, unit, log, fixed_tau, prior_scale,
               rng, n_draws, seed, warns) -> _Arm:
    cells: dict[tuple[str, int], list[_Run]] = {}
    for r in runs:
        cells.setdefault((r.group, r.cond), []).append(r)
    stats = {k: np.array([r.summary() for r in v]) for k, v in cells.items()}
    keys = list(cells)
    y = np.concatenate([stats[k][:, 0] for k in keys])
    s = np.concatenate([stats[k][:, 1] for k in keys])
    lab = np.concatenate([[j] * len(cells[k]) for j, k in enumerate(keys)])
    post = scatter_posterior(y, s, lab, prior_scale=prior_scale, n_draws=n_draws, seed=seed)
    prior = f"half-normal, scale {prior_scale:g} {'(ln units)' if log else unit}"
    info = {"quantity": quantity, "unit": "ln units" if log else unit, "prior": prior,
            "n_repeated_conditions": 0 if post is None else post.n_cells,
            "n_runs_in_repeats": 0 if post is None else post.n_runs, "estimate": None}
    if post is not None:
        info["estimate"] = post.draws
    if fixed_tau is not None:
        tau = np.full(n_draws, float(fixed_tau))
        info["source"] = "given by the user"
        if post is not None:
            lo, hi = np.quantile(post.draws, [0.025, 0.975])
            if not lo <= fixed_tau <= hi:
                warns.append(
                    f"{quantity}: the given run-to-run scatter ({_tau_text(fixed_tau, log, unit)})"
                    f" lies outside the 95 % interval estimated from {post.n_cells} repeated "
                    f"conditions ({_tau_text(lo, log, unit)} to {_tau_text(hi, log, unit)}); "
                    "the given value was used")
    elif post is not None:
        tau = post.draws
        info["source"] = "estimated from repeated runs"
    else:
        tau = np.zeros(n_draws)
        info["source"] = "not estimable (no repeated runs); taken as zero"
    zero = (fixed_tau is None and post is None) or (fixed_tau is not None and fixed_tau == 0)
    mu = {}
    for k, members in cells.items():
        if len(members) == 1 and zero:
            mu[k] = members[0].sample(rng, n_draws)
            continue
        st = stats[k]
        v = np.maximum(st[None, :, 1] ** 2 + tau[:, None] ** 2, 1e-300)
        w = 1.0 / v
        W = w.sum(axis=1)
        mean = (w * st[None, :, 0]).sum(axis=1) / W
        mu[k] = mean + rng.standard_normal(n_draws) / np.sqrt(W)
    return _Arm(quantity=quantity, unit=unit, log=log, conditions=conditions, cells=cells, mu=mu,
                scatter=info, tau=tau)


def _tau_text(tau, log, unit):
    if log:
        return f"CV {100 * float(_cv_from_tau(tau)):.3g} %"
    return f"SD {float(tau):.3g} {unit}"


def _scatter_row(arm: _Arm) -> dict:
    info = arm.scatter
    r = {"quantity": info["quantity"],
         "unit": "CV (fraction)" if arm.log else arm.unit, "source": info["source"],
         "n_repeated_conditions": info["n_repeated_conditions"],
         "n_runs_in_repeats": info["n_runs_in_repeats"], "prior": info["prior"]}
    vals = _cv_from_tau(arm.tau) if arm.log else arm.tau
    r.update(interval_columns("run_to_run", vals))
    est = info["estimate"]
    if est is not None:
        est = _cv_from_tau(est) if arm.log else est
        r.update(interval_columns("from_repeats", est))
    else:
        r.update({"from_repeats": np.nan, "from_repeats_lo95": np.nan,
                  "from_repeats_hi95": np.nan})
    return r


def _scatter_sentence(arm: _Arm, what: str) -> str:
    info = arm.scatter
    src = info["source"]
    if src.startswith("not estimable"):
        return (f"No condition has repeated runs, so the run-to-run scatter of the {what} could "
                "not be estimated; the intervals hold only the within-run uncertainty and are "
                "too narrow if runs vary from one to the next (repeat runs, or give the "
                "scatter as an option).")
    vals = _cv_from_tau(arm.tau) if arm.log else arm.tau
    s = summarise(vals)
    if arm.log:
        v, iv = format_estimate(100 * s["median"], 100 * s["lo95"], 100 * s["hi95"], "%")
        label = f"a CV of {v}"
    else:
        v, iv = format_estimate(s["median"], s["lo95"], s["hi95"], arm.unit)
        label = f"an SD of {v}"
    if src == "given by the user":
        return f"Run-to-run scatter of the {what} taken as the given value, {label}."
    return (f"Run-to-run scatter of the {what}, estimated from {info['n_repeated_conditions']} "
            f"repeated condition{'s' if info['n_repeated_conditions'] != 1 else ''} and shared "
            f"by all formulations: {label} (95 % interval {iv}); it is included in every "
            "interval.")


# ---------------------------------------------------------------------------
# Result
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class ComparisonResult:
    """Formulations compared with a reference: tables, verdicts, draws.

    Attributes
    ----------
    reference : str
        The reference group.
    groups : tuple of str
        Every group seen, reference first.
    table_data : dict of str -> DataFrame
        Use :meth:`tables` (copies).
    verdict_texts : tuple of str
        Use :attr:`verdicts`.
    warnings : tuple of str
        Findings that limit the comparison (also issued as DataQualityWarning).
    draws : dict of str -> ndarray of shape (S,)
        Per-draw values behind every table entry, keyed
        ``"<quantity>|<group>|<condition>"`` (for saving beside the tables).
    provenance : dict
        Method, priors, thresholds, tolerances and seed.
    """

    reference: str
    groups: tuple[str, ...]
    table_data: dict
    verdict_texts: tuple[str, ...]
    warnings: tuple[str, ...]
    draws: dict
    provenance: dict = field(default_factory=dict)

    def tables(self) -> dict[str, pd.DataFrame]:
        """The comparison tables (copies); only non-empty ones are present."""
        return {k: v.copy() for k, v in self.table_data.items()}

    @property
    def verdicts(self) -> list[str]:
        """One plain-language paragraph per comparison (and one per ranking)."""
        return list(self.verdict_texts)

    def draws_frame(self) -> pd.DataFrame:
        """All per-draw values as one DataFrame (one column per key of :attr:`draws`)."""
        return pd.DataFrame({k: np.asarray(v) for k, v in self.draws.items()})


# ---------------------------------------------------------------------------
# Input normalisation
# ---------------------------------------------------------------------------

def _isothermal_runs(isothermal_fits, warns) -> list[_Run]:
    if isothermal_fits is None:
        return []
    items = isothermal_fits
    if hasattr(items, "fits"):
        for rid, msg in getattr(items, "failures", ()):
            warns.append(f"isothermal run {rid} failed upstream and is not compared: {msg}")
        items = items.fits
    out = []
    for f in items:
        if isinstance(f, HalfTimeRun):
            out.append(_Run(f.run_id, f.group, float(f.temperature),
                            np.log(f.t_half) if np.ndim(f.t_half) else math.log(f.t_half),
                            0.0 if np.ndim(f.t_half) else f.t_half_sd / f.t_half))
            flags = f.flags
        elif hasattr(f, "trace") and hasattr(f, "derived"):
            info = f.trace.info
            if info.kind != "isothermal" or "t_half_s" not in f.derived:
                raise CrystkinInputError(
                    f"run {info.run_id}: isothermal_fits must hold isothermal fits (fit_isotherm "
                    "or analyse_isotherms); got a run without a half-time")
            d = _as_draws_or_value(f.derived["t_half_s"], 0.0, "t_half_s",
                                   f"run {info.run_id}", positive=True)
            out.append(_Run(info.run_id, info.group, float(info.temperature), np.log(d)))
            flags = tuple(getattr(f, "flags", ()))
        else:
            raise CrystkinInputError(
                f"{_WHERE}: isothermal_fits must be a BatchResult or a list of IsothermFit or "
                f"HalfTimeRun objects; got an item of type {type(f).__name__}")
        for fl in flags:
            if "not converged" in fl:
                warns.append(f"isothermal run {out[-1].run_id}: {fl}; its half-time interval is "
                             "provisional")
    return out


def _coerce_peaks(cooling_peaks) -> list[CoolingPeak]:
    if cooling_peaks is None:
        return []
    if isinstance(cooling_peaks, pd.DataFrame):
        rows = cooling_peaks.to_dict("records")
        out = []
        for i, r in enumerate(rows, 1):
            kw = {k: v for k, v in r.items() if not (isinstance(v, float) and np.isnan(v))}
            try:
                out.append(_peak_from_mapping(kw))
            except (KeyError, TypeError) as exc:
                raise CrystkinInputError(
                    f"cooling_peaks table row {i}: needs columns run_id, group, rate_K_per_s "
                    "(or rate_K_per_min) and T_peak_K; optional T_peak_sd_K, T_onset_K, "
                    f"T_onset_sd_K, t_half_s, t_half_sd_s ({exc})") from None
        return out
    out = []
    for r in cooling_peaks:
        if isinstance(r, CoolingPeak):
            out.append(r)
        elif isinstance(r, Mapping):
            try:
                out.append(_peak_from_mapping(dict(r)))
            except (KeyError, TypeError) as exc:
                raise CrystkinInputError(
                    "cooling_peaks: each mapping needs run_id, group, rate_K_per_s (or "
                    f"rate_K_per_min) and T_peak_K ({exc})") from None
        else:
            out.extend(cooling_peaks_from([r]))
    return out


def _peak_from_mapping(r: dict) -> CoolingPeak:
    if "rate" in r:
        rate = float(r["rate"])
    elif "rate_K_per_s" in r:
        rate = float(r["rate_K_per_s"])
    else:
        rate = float(r["rate_K_per_min"]) / 60.0

    def pick(*names, default=None):
        for n in names:
            if n in r and r[n] is not None:
                return r[n]
        return default

    return CoolingPeak(
        run_id=str(r["run_id"]), group=str(r["group"]), rate=rate,
        T_peak=pick("T_peak", "T_peak_K"), T_peak_sd=float(pick("T_peak_sd", "T_peak_sd_K",
                                                                 default=0.0)),
        T_onset=pick("T_onset", "T_onset_K"),
        T_onset_sd=float(pick("T_onset_sd", "T_onset_sd_K", default=0.0)),
        t_half=pick("t_half", "t_half_s"), t_half_sd=float(pick("t_half_sd", "t_half_sd_s",
                                                                 default=0.0)))


# ---------------------------------------------------------------------------
# Pairwise comparison rows
# ---------------------------------------------------------------------------

def _common(arm: _Arm, group: str, reference: str) -> list[int]:
    return [c for c in range(len(arm.conditions))
            if (group, c) in arm.mu and (reference, c) in arm.mu]


def _finding(p, call_p):
    if p >= call_p:
        return "faster"
    if p <= 1 - call_p:
        return "slower"
    return "no clear difference"


def _prob(x):
    x = np.asarray(x)
    return float(np.mean(x > 0) + 0.5 * np.mean(x == 0))


def _two_sig(x: float) -> str:
    """Two significant figures (for a factor quoted beside the ratio that carries the precision)."""
    d = max(0, 1 - int(math.floor(math.log10(abs(x))))) if x else 0
    return f"{x:.{d}f}"


def _clause_ratio(r_med, r_lo, r_hi, p, finding, what="half-time"):
    v, iv = format_estimate(r_med, r_lo, r_hi)
    tail = f"ratio {v}, 95 % interval {iv}; probability faster {format_probability(p)}"
    if finding == "faster":
        return f"shortens the {what} by a factor of {_two_sig(1 / r_med)} ({tail})"
    if finding == "slower":
        return f"lengthens the {what} by a factor of {_two_sig(r_med)} ({tail})"
    return f"shows no clear difference in {what} ({tail})"


# ---------------------------------------------------------------------------
# Entry point
# ---------------------------------------------------------------------------

def compare_formulations(isothermal_fits=None, cooling_peaks=None, *, reference: str,
                         run_to_run_cv: float | None = None,
                         run_to_run_sd_K: float | None = None,
                         nucleation_reference: NucleationReference | Mapping | None = None,
                         rate_curves: RateCurves | Mapping | None = None,
                         temperature_tolerance: float = 0.3, rate_tolerance: float = 0.02,
                         call_probability: float = 0.975, n_draws: int = 4000,
                         seed: int = 0) -> ComparisonResult:
    """Compare every formulation with a reference group.

    Parameters
    ----------
    isothermal_fits : BatchResult or iterable of IsothermFit or HalfTimeRun, optional
        Isothermal half-times (per-draw ``derived["t_half_s"]``), grouped by
        ``trace.info.group`` and matched by hold temperature.
    cooling_peaks : iterable of CoolingPeak, mapping or (trace, conversion), or DataFrame, optional
        Cooling runs; mappings and DataFrame columns: ``run_id``, ``group``,
        ``rate_K_per_s`` (or ``rate_K_per_min``), ``T_peak_K``, optional
        ``T_peak_sd_K``, ``T_onset_K``, ``T_onset_sd_K``, ``t_half_s``, ``t_half_sd_s``.
    reference : str
        Group every other group is compared with (usually the neat grade).
    run_to_run_cv : float, optional
        Run-to-run coefficient of variation of half-times (fraction, 0.08 for
        8 %); used instead of an estimate from repeated runs.
    run_to_run_sd_K : float, K, optional
        Run-to-run SD of peak and onset temperatures, likewise.
    nucleation_reference : NucleationReference or mapping, optional
        Reference temperatures of the nucleation-efficiency scale.
    rate_curves : RateCurves or mapping, optional
        Per-group K(T) draws on a temperature grid (from a global rate model);
        a mapping needs ``temperature`` (K) and ``draws`` (group -> (S, G), 1/s).
    temperature_tolerance : float, K
        Hold temperatures closer than this count as the same condition.
    rate_tolerance : float
        Relative difference below which cooling rates count as the same.
    call_probability : float
        Probability of a direction needed to call a difference (0.5 < p < 1).
    n_draws : int
        Draws per compared quantity.
    seed : int

    Returns
    -------
    ComparisonResult
        ``tables()`` keys (those with content): ``compare_half_time``,
        ``compare_cooling``, ``nucleation_efficiency``, ``compare_rate_curve``,
        ``ranking``, ``run_to_run_scatter``.

    Raises
    ------
    CrystkinInputError
        Unknown reference group, a single group, or no condition shared by
        the reference and any other group.

    Notes
    -----
    Half-time ratio per draw s: r_s = exp(mu_f,s - mu_ref,s), mu the expected
    ln t_half of a run at that condition (see the module notes for the
    random-effects model); P(faster) = fraction of draws with r_s < 1.
    Temperature shifts: d_s = mu_f,s - mu_ref,s in K.  Nucleation efficiency
    per draw with :func:`nucleation_efficiency`.  K(T) ratio per draw and grid
    temperature: K_f / K_ref.

    Examples
    --------
    >>> runs = [HalfTimeRun(f"{g}{i}", g, 400.0, th * (1 + 0.02 * i), 0.5)
    ...         for g, th in (("neat", 100.0), ("nuc", 50.0)) for i in range(2)]
    >>> res = compare_formulations(runs, reference="neat")
    >>> round(float(res.tables()["compare_half_time"]["t_half_ratio"][0]), 2)
    0.5
    """
    warns: list[str] = []
    if not isinstance(reference, str) or not reference:
        raise CrystkinInputError(f"The 'reference' parameter of {_WHERE} must be a group name. "
                                 f"Got {reference!r} instead.")
    check_range("temperature_tolerance", float(temperature_tolerance), _WHERE, lower=0.0)
    check_range("rate_tolerance", float(rate_tolerance), _WHERE, lower=0.0, upper=0.5)
    check_range("call_probability", float(call_probability), _WHERE, lower=0.5, upper=1.0,
                inclusive=False)
    check_range("n_draws", int(n_draws), _WHERE, lower=200)
    if run_to_run_cv is not None:
        if not (np.isfinite(run_to_run_cv) and 0 <= run_to_run_cv <= 1):
            raise CrystkinInputError(
                f"The 'run_to_run_cv' parameter of {_WHERE} must be a fraction in [0, 1] (0.08 "
                f"for 8 %). Got {run_to_run_cv!r} instead.")
    if run_to_run_sd_K is not None:
        check_range("run_to_run_sd_K", float(run_to_run_sd_K), _WHERE, lower=0.0, upper=50.0)
    if isinstance(nucleation_reference, Mapping):
        nucleation_reference = NucleationReference(**nucleation_reference)
    if isinstance(rate_curves, Mapping):
        try:
            rate_curves = RateCurves(temperature=rate_curves["temperature"],
                                     draws=rate_curves["draws"],
                                     source=str(rate_curves.get("source", "")))
        except KeyError as exc:
            raise CrystkinInputError(
                "rate_curves must have keys 'temperature' (K) and 'draws' (group -> array "
                f"(S, G) of K in 1/s); missing {exc}") from None

    iso = _isothermal_runs(isothermal_fits, warns)
    peaks = _coerce_peaks(cooling_peaks)
    if not iso and not peaks and rate_curves is None:
        raise CrystkinInputError(f"{_WHERE}: nothing to compare; give isothermal fits, cooling "
                                 "peaks or rate curves")
    groups: dict[str, None] = {}
    for r in iso:
        groups.setdefault(r.group, None)
    for p in peaks:
        groups.setdefault(p.group, None)
    if rate_curves is not None:
        for g in rate_curves.draws:
            groups.setdefault(g, None)
    if reference not in groups:
        raise CrystkinInputError(
            f"reference group '{reference}' not found; the groups present are "
            f"{', '.join(repr(g) for g in groups)}. Give one of them as reference (the 'group' "
            "of the runs in the study file)")
    if len(groups) < 2:
        raise CrystkinInputError(f"only the group '{reference}' is present; a comparison needs "
                                 "at least one other group")
    all_groups = (reference, *[g for g in groups if g != reference])

    tables: dict[str, pd.DataFrame] = {}
    verdicts: list[str] = []
    draws: dict[str, np.ndarray] = {}
    scatter_rows: list[dict] = []
    ranking_rows: list[dict] = []
    ranking_text: list[str] = []
    empty_reasons: list[str] = []

    # Isothermal half-times ------------------------------------------------
    if iso:
        labels, temps = _cluster([r.condition for r in iso], tol=temperature_tolerance,
                                 relative=False)
        for r, lab in zip(iso, labels, strict=True):
            r.cond = int(lab)
        arm = _build_arm(iso, temps, quantity="ln t_half (isothermal)", unit="s", log=True,
                         fixed_tau=None if run_to_run_cv is None else _tau_from_cv(run_to_run_cv),
                         prior_scale=SCATTER_PRIOR_LN, rng=np.random.default_rng([seed, 1]),
                         n_draws=n_draws, seed=seed, warns=warns)
        rows, paragraphs, scores = _half_time_rows(arm, reference, all_groups, call_probability,
                                                   draws, warns, "T_c", "isothermal hold")
        if rows:
            tables["compare_half_time"] = pd.DataFrame(rows)
            verdicts.extend(paragraphs)
            scatter_rows.append(_scatter_row(arm))
            if arm.scatter["source"].startswith("not estimable"):
                warns.append("isothermal half-times: no temperature has repeated runs of one "
                             "formulation, so run-to-run scatter is not estimable; intervals "
                             "hold only the within-run uncertainty (give run_to_run_cv or "
                             "repeat runs)")
            rk = _ranking(arm, reference, all_groups, basis="isothermal half-time",
                          lower_is_better=True, warns=warns)
            ranking_rows.extend(rk[0])
            if rk[1]:
                ranking_text.append(rk[1])
        else:
            empty_reasons.append("isothermal holds: " + _conditions_text(arm, all_groups, "T"))

    # Cooling runs --------------------------------------------------------
    cool_arm_peak = None
    if peaks:
        labels, rates = _cluster([p.rate for p in peaks], tol=rate_tolerance, relative=True)
        mk = {"peak": [], "onset": [], "t_half": []}
        for p, lab in zip(peaks, labels, strict=True):
            mk["peak"].append(_Run(p.run_id, p.group, p.rate, p.T_peak, p.T_peak_sd, int(lab)))
            if p.T_onset is not None:
                mk["onset"].append(_Run(p.run_id, p.group, p.rate, p.T_onset, p.T_onset_sd,
                                        int(lab)))
            if p.t_half is not None:
                th = p.t_half
                mk["t_half"].append(_Run(p.run_id, p.group, p.rate,
                                         np.log(th) if np.ndim(th) else math.log(th),
                                         0.0 if np.ndim(th) else p.t_half_sd / th, int(lab)))
            for fl in p.flags:
                warns.append(f"cooling run {p.run_id}: {fl}")
        fixed_K = run_to_run_sd_K
        arms = {}
        arms["peak"] = _build_arm(mk["peak"], rates, quantity="T_peak (cooling)", unit="K",
                                  log=False, fixed_tau=fixed_K, prior_scale=SCATTER_PRIOR_K,
                                  rng=np.random.default_rng([seed, 2]), n_draws=n_draws,
                                  seed=seed + 1, warns=warns)
        if mk["onset"]:
            arms["onset"] = _build_arm(mk["onset"], rates, quantity="T_onset (cooling)",
                                       unit="K", log=False, fixed_tau=fixed_K,
                                       prior_scale=SCATTER_PRIOR_K,
                                       rng=np.random.default_rng([seed, 3]), n_draws=n_draws,
                                       seed=seed + 2, warns=warns)
        if mk["t_half"]:
            arms["t_half"] = _build_arm(
                mk["t_half"], rates, quantity="ln t_half (cooling)", unit="s", log=True,
                fixed_tau=None if run_to_run_cv is None else _tau_from_cv(run_to_run_cv),
                prior_scale=SCATTER_PRIOR_LN, rng=np.random.default_rng([seed, 4]),
                n_draws=n_draws, seed=seed + 3, warns=warns)
        cool_arm_peak = arms["peak"]
        rows, paragraphs = _cooling_rows(arms, reference, all_groups, call_probability, draws)
        if rows:
            tables["compare_cooling"] = pd.DataFrame(rows)
            for a in arms.values():
                scatter_rows.append(_scatter_row(a))
            if arms["peak"].scatter["source"].startswith("not estimable"):
                if not any(np.ndim(r.draws) or r.sd > 0 for r in mk["peak"]):
                    warns.append("cooling peaks: no within-run uncertainty and no repeated runs; "
                                 "the temperature shifts carry no uncertainty at all (give "
                                 "run_to_run_sd_K or repeat runs)")
                else:
                    warns.append("cooling peaks: no rate has repeated runs of one formulation, "
                                 "so run-to-run scatter is not estimable; intervals hold only the "
                                 "within-run uncertainty (give run_to_run_sd_K or repeat runs)")
            rk = _ranking(arms["peak"], reference, all_groups, basis="cooling peak temperature",
                          lower_is_better=False, warns=warns)
            ranking_rows.extend(rk[0])
            if rk[1]:
                ranking_text.append(rk[1])
            ne_rows, ne_text = ([], {})
            if nucleation_reference is not None:
                ne_rows, ne_text = _nucleation_rows(arms["peak"], reference, all_groups,
                                                    nucleation_reference, n_draws, seed, draws,
                                                    warns)
                if ne_rows:
                    tables["nucleation_efficiency"] = pd.DataFrame(ne_rows)
            for g, text in paragraphs:
                extra = ne_text.get(g)
                verdicts.append(text if extra is None else _insert_before_scatter(text, extra))
        else:
            empty_reasons.append("cooling runs: " + _conditions_text(arms["peak"], all_groups,
                                                                      "rate"))
    if nucleation_reference is not None and cool_arm_peak is None:
        raise CrystkinInputError("nucleation_reference needs cooling runs (their peak "
                                 "crystallization temperatures); give cooling_peaks")

    # Rate model K(T) -----------------------------------------------------
    if rate_curves is not None:
        rows, paragraphs, rk = _rate_curve_rows(rate_curves, reference, all_groups, n_draws,
                                                seed, call_probability, draws, warns)
        if rows:
            tables["compare_rate_curve"] = pd.DataFrame(rows)
            verdicts.extend(paragraphs)
            ranking_rows.extend(rk[0])
            if rk[1]:
                ranking_text.append(rk[1])
        else:
            empty_reasons.append(f"rate curves: no group other than '{reference}' has K(T) draws")

    if not any(k in tables for k in ("compare_half_time", "compare_cooling",
                                      "compare_rate_curve")):
        raise CrystkinInputError(
            f"no group shares a condition with the reference '{reference}': "
            + "; ".join(empty_reasons)
            + ". Compare runs made at the same hold temperatures or cooling rates, or widen "
            "temperature_tolerance / rate_tolerance if the set values differ only by rounding")
    if ranking_rows:
        tables["ranking"] = pd.DataFrame(ranking_rows)
    if scatter_rows:
        tables["run_to_run_scatter"] = pd.DataFrame(scatter_rows)
    verdicts.extend(ranking_text)
    for w in warns:
        _warnings.warn(w, DataQualityWarning, stacklevel=2)
    prov = {
        "method": "random-effects model per quantity with one pooled run-to-run SD; exact "
                  "draws (grid over the SD, conditional normal draws of the condition means)",
        "priors": {"run_to_run_sd_ln_t_half": f"half-normal, scale {SCATTER_PRIOR_LN}",
                   "run_to_run_sd_T_K": f"half-normal, scale {SCATTER_PRIOR_K} K",
                   "condition_means": "flat"},
        "call_probability": call_probability, "temperature_tolerance_K": temperature_tolerance,
        "rate_tolerance": rate_tolerance, "run_to_run_cv": run_to_run_cv,
        "run_to_run_sd_K": run_to_run_sd_K, "n_draws": n_draws, "seed": seed,
        "nucleation_reference": None if nucleation_reference is None else
        dict(nucleation_reference.__dict__),
        "rate_curves_source": None if rate_curves is None else rate_curves.source,
        "efficiency_scale": "Fillon, Lotz, Thierry & Wittmann, J. Polym. Sci. B 31 (1993) 1395",
    }
    return ComparisonResult(reference=reference, groups=all_groups, table_data=tables,
                            verdict_texts=tuple(verdicts), warnings=tuple(dict.fromkeys(warns)),
                            draws=draws, provenance=prov)


def _insert_before_scatter(text: str, extra: str) -> str:
    marker = text.find(" Run-to-run scatter")
    if marker < 0:
        marker = text.find(" No condition has repeated runs")
    if marker < 0:
        return text + " " + extra
    return text[:marker] + " " + extra + text[marker:]


def _conditions_text(arm: _Arm, groups, kind) -> str:
    parts = []
    for g in groups:
        cs = sorted({c for (gg, c) in arm.cells if gg == g})
        if not cs:
            continue
        if kind == "T":
            vals = ", ".join(_fmt_T(arm.conditions[c]) for c in cs) + " °C"
        else:
            vals = ", ".join(_fmt_rate(arm.conditions[c]) for c in cs) + " K/min"
        parts.append(f"{g} at {vals}")
    return "; ".join(parts)


def _half_time_rows(arm, reference, groups, call_p, draws, warns, cond_name, what):
    rows, paragraphs, scores = [], [], {}
    tau_med = float(np.median(arm.tau))
    for g in groups[1:]:
        common = _common(arm, g, reference)
        mine = sorted({c for (gg, c) in arm.cells if gg == g})
        if not mine:
            continue
        lonely = [c for c in mine if c not in common]
        if lonely:
            warns.append(f"{g}: no reference ('{reference}') {what} at "
                         + ", ".join(_fmt_T(arm.conditions[c]) for c in lonely)
                         + " °C; not compared there")
        if not common:
            continue
        clauses = []
        for c in common:
            T = arm.conditions[c]
            d = arm.mu[(g, c)] - arm.mu[(reference, c)]
            ratio = np.exp(d)
            p = _prob(-d)
            finding = _finding(p, call_p)
            within = bool(tau_med > 0 and abs(float(np.median(d))) < tau_med)
            key = f"t_half_ratio|{g}|T_c={T:.2f}K"
            draws[key] = ratio
            row = {"group": g, "reference": reference, "T_c_K": T, "T_c_degC": float(celsius(T)),
                   "n_runs": len(arm.cells[(g, c)]),
                   "n_runs_reference": len(arm.cells[(reference, c)])}
            row.update(interval_columns("t_half_s", np.exp(arm.mu[(g, c)])))
            row.update(interval_columns("t_half_reference_s", np.exp(arm.mu[(reference, c)])))
            row.update(interval_columns("t_half_ratio", ratio))
            row.update({"p_faster": p, "finding": finding,
                        "within_run_to_run_scatter": within,
                        "run_to_run_cv": float(_cv_from_tau(tau_med)),
                        "scatter_source": arm.scatter["source"]})
            rows.append(row)
            s = summarise(ratio)
            clause = f"at {_fmt_T(T)} °C it " + _clause_ratio(s["median"], s["lo95"], s["hi95"],
                                                                p, finding)
            if within and finding != "no clear difference":
                clause += (", a difference smaller than the run-to-run scatter of single runs "
                           f"(CV about {100 * float(_cv_from_tau(tau_med)):.2g} %), so single "
                           "runs may rank the two the other way")
            clauses.append(clause)
        body = "; ".join(clauses)
        text = f"Isothermal holds, {g} against {reference}: " + body[0].upper() + body[1:] + "."
        if len(common) > 1:
            dd = np.mean([arm.mu[(g, c)] - arm.mu[(reference, c)] for c in common], axis=0)
            gm = np.exp(dd)
            s = summarise(gm)
            v, iv = format_estimate(s["median"], s["lo95"], s["hi95"])
            n_fast = sum(1 for r in rows if r["group"] == g and r["finding"] == "faster")
            temps = ", ".join(_fmt_T(arm.conditions[c]) for c in common)
            text += (f" Over the {len(common)} common temperatures ({temps} °C) the geometric-mean "
                     f"ratio is {v} (95 % interval {iv}; probability faster "
                     f"{format_probability(_prob(-dd))}); {g} is called faster at {n_fast} of "
                     f"{len(common)}.")
            draws[f"t_half_ratio_gmean|{g}|common"] = gm
        text += " " + _scatter_sentence(arm, "half-time")
        paragraphs.append(text)
    return rows, paragraphs, scores


def _shift_text(s, p, call_p, what, unit="K"):
    v, iv = format_estimate(s["median"], s["lo95"], s["hi95"], unit)
    finding = _finding(p, call_p)
    tail = f"95 % interval {iv}; probability higher {format_probability(p)}"
    if finding == "faster":
        return f"the {what} lies {v} higher ({tail})"
    if finding == "slower":
        vneg, ivneg = format_estimate(-s["median"], -s["hi95"], -s["lo95"], unit)
        return f"the {what} lies {vneg} lower ({tail})"
    return f"the {what} is not clearly shifted ({v}, {tail})"


def _cooling_rows(arms, reference, groups, call_p, draws):
    peak = arms["peak"]
    onset = arms.get("onset")
    th = arms.get("t_half")
    tau_med = float(np.median(peak.tau))
    rows, paragraphs = [], []
    for g in groups[1:]:
        common = _common(peak, g, reference)
        if not common:
            continue
        clauses = []
        for c in common:
            rate = peak.conditions[c]
            d = peak.mu[(g, c)] - peak.mu[(reference, c)]
            p = _prob(d)
            finding = _finding(p, call_p)
            within = bool(tau_med > 0 and abs(float(np.median(d))) < tau_med)
            label = f"rate={rate * 60:.4g}K/min"
            draws[f"T_peak_shift_K|{g}|{label}"] = d
            row = {"group": g, "reference": reference, "rate_K_per_min": rate * 60.0,
                   "rate_K_per_s": rate, "n_runs": len(peak.cells[(g, c)]),
                   "n_runs_reference": len(peak.cells[(reference, c)])}
            row.update(interval_columns("T_peak_K", peak.mu[(g, c)]))
            row.update(interval_columns("T_peak_reference_K", peak.mu[(reference, c)]))
            row.update(interval_columns("T_peak_shift_K", d))
            row["p_faster"] = p
            row["finding"] = finding
            sd_peak = summarise(d)
            clause = f"at {_fmt_rate(rate)} K/min " + _shift_text(sd_peak, p, call_p,
                                                                 "crystallization peak")
            if within and finding != "no clear difference":
                clause += (f", less than the run-to-run scatter of single runs (SD about "
                           f"{tau_med:.2g} K)")
            row.update({"T_onset_shift_K": np.nan, "T_onset_shift_K_lo95": np.nan,
                        "T_onset_shift_K_hi95": np.nan, "p_higher_onset": np.nan})
            if onset is not None and (g, c) in onset.mu and (reference, c) in onset.mu:
                do = onset.mu[(g, c)] - onset.mu[(reference, c)]
                draws[f"T_onset_shift_K|{g}|{label}"] = do
                row.update(interval_columns("T_onset_shift_K", do))
                po = _prob(do)
                row["p_higher_onset"] = po
                clause += " and " + _shift_text(summarise(do), po, call_p, "onset")
            row.update({"t_half_ratio": np.nan, "t_half_ratio_lo95": np.nan,
                        "t_half_ratio_hi95": np.nan, "p_shorter_t_half": np.nan})
            if th is not None and (g, c) in th.mu and (reference, c) in th.mu:
                dt = th.mu[(g, c)] - th.mu[(reference, c)]
                r = np.exp(dt)
                draws[f"t_half_ratio|{g}|{label}"] = r
                row.update(interval_columns("t_half_ratio", r))
                pt = _prob(-dt)
                row["p_shorter_t_half"] = pt
                s = summarise(r)
                clause += ", with a " + _cooling_half_time_clause(s, pt)
            row.update({"within_run_to_run_scatter": within, "run_to_run_sd_K": tau_med,
                        "scatter_source": peak.scatter["source"]})
            rows.append(row)
            clauses.append(clause)
        head = f"Cooling runs, {g} against {reference}: "
        body = "; ".join(clauses)
        text = head + body[0].upper() + body[1:] + "."
        text += " " + _scatter_sentence(peak, "peak temperature")
        paragraphs.append((g, text))
    return rows, paragraphs


def _cooling_half_time_clause(s, p):
    v, iv = format_estimate(s["median"], s["lo95"], s["hi95"])
    return (f"half-time ratio {v} (95 % interval {iv}; probability shorter "
            f"{format_probability(p)})")


def _nucleation_rows(peak: _Arm, reference, groups, ref: NucleationReference, n_draws, seed,
                     draws, warns):
    rates = peak.conditions
    if ref.rate is None:
        if len(rates) != 1:
            raise CrystkinInputError(
                "nucleation_reference: the cooling runs have several rates ("
                + ", ".join(_fmt_rate(r) for r in rates) + " K/min); give the rate at which the "
                "reference temperatures hold (NucleationReference(rate=...), K/s)")
        ci = 0
    else:
        hits = [i for i, r in enumerate(rates) if abs(r - ref.rate) <= 0.02 * ref.rate]
        if not hits:
            raise CrystkinInputError(
                f"nucleation_reference: no cooling runs at its rate "
                f"{_fmt_rate(ref.rate)} K/min (rates present: "
                + ", ".join(_fmt_rate(r) for r in rates) + " K/min)")
        ci = hits[0]
    rng = np.random.default_rng([seed, 5])
    T_max = ref.T_c_max + ref.T_c_max_sd * rng.standard_normal(n_draws)
    if ref.T_c_neat is not None:
        T_neat = ref.T_c_neat + ref.T_c_neat_sd * rng.standard_normal(n_draws)
        neat_source = "given by the user"
    elif (reference, ci) in peak.mu:
        T_neat = peak.mu[(reference, ci)]
        neat_source = f"measured ({reference})"
        if float(np.median(T_neat)) >= ref.T_c_max:
            raise CrystkinInputError(
                f"nucleation_reference: the measured peak of '{reference}' "
                f"({float(np.median(T_neat)):.2f} K) is not below T_c_max ({ref.T_c_max:g} K); "
                "check T_c_max (kelvin) and the reference group")
    else:
        raise CrystkinInputError(
            f"nucleation_reference: T_c_neat not given and the reference '{reference}' has no "
            f"cooling run at {_fmt_rate(rates[ci])} K/min; give T_c_neat (K)")
    rows, texts = [], {}
    rate = rates[ci]
    for g in groups[1:]:
        if (g, ci) not in peak.mu:
            if any(gg == g for (gg, _) in peak.mu):
                warns.append(f"{g}: no cooling run at {_fmt_rate(rate)} K/min; nucleation "
                             "efficiency not computed")
            continue
        Tc = peak.mu[(g, ci)]
        ne = nucleation_efficiency(Tc, T_neat, T_max)
        draws[f"NE_percent|{g}|rate={rate * 60:.4g}K/min"] = ne
        row = {"group": g, "reference": reference, "rate_K_per_min": rate * 60.0}
        row.update(interval_columns("T_c_peak_K", Tc))
        row.update(interval_columns("T_c_neat_K", T_neat))
        row["T_c_neat_source"] = neat_source
        row.update(interval_columns("T_c_max_K", T_max))
        row.update(interval_columns("NE_percent", ne))
        row["scale"] = "self-nucleation efficiency (Fillon et al. 1993)"
        rows.append(row)
        s = summarise(ne)
        v, iv = format_estimate(s["median"], s["lo95"], s["hi95"], "%")
        zero = (f"the given neat peak of {_fmt_T(ref.T_c_neat)} °C" if ref.T_c_neat is not None
                else f"the measured peak of {reference}")
        texts[g] = (f"On the self-nucleation efficiency scale of Fillon et al. (1993), with "
                    f"{zero} as 0 % and the self-nucleated maximum of {_fmt_T(ref.T_c_max)} °C "
                    f"as 100 %, its nucleation efficiency at {_fmt_rate(rate)} K/min is {v} "
                    f"(95 % interval {iv}).")
        if s["hi95"] > 100 or s["lo95"] < 0:
            warns.append(f"{g}: nucleation efficiency interval reaches outside 0-100 % "
                         f"({s['lo95']:.0f} to {s['hi95']:.0f} %); check the reference "
                         "temperatures and that they hold at the same cooling rate")
    return rows, texts


def _paired(rc: RateCurves, g, reference, n_draws, rng):
    a, b = rc.draws[g], rc.draws[reference]
    if a.shape[0] == b.shape[0]:
        idx = rng.integers(0, a.shape[0], n_draws) if a.shape[0] != n_draws else \
            np.arange(n_draws)
        return a[idx], b[idx]
    return (a[rng.integers(0, a.shape[0], n_draws)], b[rng.integers(0, b.shape[0], n_draws)])


def _rate_curve_rows(rc: RateCurves, reference, groups, n_draws, seed, call_p, draws, warns):
    rows, paragraphs = [], []
    if reference not in rc.draws:
        warns.append(f"rate curves: no K(T) draws for the reference '{reference}'; not compared")
        return rows, paragraphs, ([], "")
    rng = np.random.default_rng([seed, 6])
    T = rc.temperature
    scores = {reference: np.zeros(n_draws)}
    for g in groups[1:]:
        if g not in rc.draws:
            continue
        a, b = _paired(rc, g, reference, n_draws, rng)
        ratio = a / b
        for j, Tj in enumerate(T):
            r = ratio[:, j]
            p = _prob(r - 1.0)
            draws[f"K_ratio|{g}|T={Tj:.2f}K"] = r
            row = {"group": g, "reference": reference, "T_K": float(Tj),
                   "T_degC": float(celsius(Tj))}
            row.update(interval_columns("K_ratio", r))
            row.update({"p_faster": p, "finding": _finding(p, call_p)})
            rows.append(row)
        lr = np.log(ratio)
        scores[g] = lr.mean(axis=1)
        p_all = float(np.mean(np.all(ratio > 1, axis=1)))
        p_none = float(np.mean(np.all(ratio < 1, axis=1)))
        s0, s1 = summarise(ratio[:, 0]), summarise(ratio[:, -1])
        v0, i0 = format_estimate(s0["median"], s0["lo95"], s0["hi95"])
        v1, i1 = format_estimate(s1["median"], s1["lo95"], s1["hi95"])
        head = f"Rate model K(T), {g} against {reference}"
        if len(T) > 1:
            text = (f"{head} over {_fmt_T(T[0])} to {_fmt_T(T[-1])} °C: the rate ratio "
                    f"K({g})/K({reference}) is {v0} (95 % interval {i0}) at {_fmt_T(T[0])} °C "
                    f"and {v1} (95 % interval {i1}) at {_fmt_T(T[-1])} °C; the probability that "
                    f"{g} is faster at every grid temperature is {format_probability(p_all)}, "
                    f"slower at every one {format_probability(p_none)}.")
        else:
            text = (f"{head} at {_fmt_T(T[0])} °C: the rate ratio is {v0} (95 % interval {i0}; "
                    f"probability faster {format_probability(_prob(ratio[:, 0] - 1))}).")
        text += (" These intervals come from the rate models' posteriors, which include the "
                 "run-to-run scatter each model estimates from its runs (when it has 3 or more).")
        paragraphs.append(text)
    rank = _rank_from_scores(scores, reference, basis="rate model K(T)", measure=
                             "geometric-mean K ratio over the grid", transform=np.exp,
                             lower_is_better=False, unit="1",
                             conditions=f"{_fmt_T(T[0])} to {_fmt_T(T[-1])} °C, {len(T)} points")
    return rows, paragraphs, rank


# ---------------------------------------------------------------------------
# Ranking
# ---------------------------------------------------------------------------

def _ranking(arm: _Arm, reference, groups, *, basis, lower_is_better, warns):
    members = [reference] + [g for g in groups[1:] if _common(arm, g, reference)]
    if len(members) < 2:
        return [], ""
    shared = [c for c in range(len(arm.conditions))
              if all((g, c) in arm.mu for g in members)]
    scores = {}
    if shared:
        base = np.mean([arm.mu[(reference, c)] for c in shared], axis=0)
        for g in members:
            scores[g] = np.mean([arm.mu[(g, c)] for c in shared], axis=0) - base
        conds = shared
    else:
        warns.append(f"ranking on {basis}: no condition is shared by all formulations; each is "
                     "scored on its own conditions in common with the reference, so the ranking "
                     "compares slightly different things")
        for g in members:
            cs = _common(arm, g, reference) if g != reference else []
            scores[g] = (np.mean([arm.mu[(g, c)] - arm.mu[(reference, c)] for c in cs], axis=0)
                         if cs else np.zeros_like(arm.tau))
        conds = sorted({c for g in members[1:] for c in _common(arm, g, reference)})
    if arm.log:
        label = ", ".join(_fmt_T(arm.conditions[c]) for c in conds) + " °C"
        return _rank_from_scores(scores, reference, basis=basis,
                                 measure="geometric-mean half-time ratio", transform=np.exp,
                                 lower_is_better=lower_is_better, unit="1", conditions=label)
    label = ", ".join(_fmt_rate(arm.conditions[c]) for c in conds) + " K/min"
    return _rank_from_scores(scores, reference, basis=basis, measure="mean peak shift",
                             transform=lambda x: x, lower_is_better=lower_is_better, unit="K",
                             conditions=label)


def _rank_from_scores(scores, reference, *, basis, measure, transform, lower_is_better, unit,
                      conditions):
    names = list(scores)
    S = np.column_stack([np.broadcast_to(scores[g], scores[names[-1]].shape) for g in names])
    key = S if lower_is_better else -S
    ranks = key.argsort(axis=1).argsort(axis=1) + 1
    p_best = (ranks == 1).mean(axis=0)
    med = np.median(key, axis=0)
    order = np.argsort(med, kind="stable")
    rows = []
    for pos, j in enumerate(order, 1):
        g = names[j]
        row = {"basis": basis, "rank": pos, "group": g, "is_reference": g == reference,
               "conditions": conditions, "measure": measure, "unit": unit}
        row.update(interval_columns("value", transform(S[:, j])))
        if g == reference:
            row["p_faster"] = np.nan
        else:
            row["p_faster"] = _prob(-key[:, j])
        row["p_best"] = float(p_best[j])
        row["mean_rank"] = float(ranks[:, j].mean())
        rows.append(row)
    parts = []
    for row in rows:
        tag = " (reference)" if row["is_reference"] else ""
        best = (f", probability of being the fastest {format_probability(row['p_best'])}"
                if row["p_best"] >= 0.01 else "")
        parts.append(f"{row['rank']}. {row['group']}{tag}{best}")
    text = (f"Ranking on {basis} ({conditions}; by {measure}): " + "; ".join(parts) + ".")
    return rows, text
