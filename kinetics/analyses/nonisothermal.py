"""Cooling runs at several rates: Jeziorny, Ozawa and Mo, with posteriors; the entry point.

Every straight line here is fitted with the shared engine
(:func:`kinetics.estimate.line_problem` and :func:`kinetics.estimate.sample_posterior`,
an exact linear-Gaussian posterior, no MCMC needed) with the spread of each
run's conversion curve carried in, not with a bare R^2:

* the errors of X at any times of a run come from its noise model
  (:func:`kinetics.prep.cooling.conversion_noise_map`: white noise of the heat
  flow integrated along the run, plus the level and slope errors of the
  baseline lines), and are propagated to the plotted ordinate by the delta
  method, for example sd[ln(-ln(1 - X))] = sd(X) / ((1 - X) (-ln(1 - X)));
* points from different runs are independent (Ozawa, Mo, Friedman); points of
  one run (Jeziorny) share its noise and are fitted by generalised least
  squares with their full covariance;
* when the points scatter about the line more than these errors allow
  (chi^2/dof = S^2 > 1), all errors are multiplied by S (the Birge ratio,
  Birge, Phys. Rev. 40 (1932) 207, from memory; the scale-factor practice of
  the Particle Data Group), reported as ``scatter_factor``.

Published conventions are kept for the classic descriptors: beta in K/min and
time in min; Ozawa's plot in natural logarithms, Mo's and Jeziorny's Zt/Zc in
decimal ones.

The entry point :func:`analyse_cooling` prepares each cooling run, groups runs
by formulation and applies every method per group (isoconversional ones from
:mod:`kinetics.analyses.isoconversional`).
"""

from __future__ import annotations

import warnings as _warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..dataset import Conversion, Trace
from ..errors import CrystkinInputError, DataQualityWarning, check_range
from ..estimate import LineFit, Posterior, fit_line, interval_columns, sample_posterior
from ..estimate.linear import line_problem
from ..estimate.problem import FitProblem
from ..models.ozawa import double_log, jeziorny_log_Zc
from ..models.params import Parameter, Uniform
from ..prep.cooling import (
    conversion_at_temperature,
    conversion_noise_map,
    cooling_rate,
    local_rate,
    prepare_cooling,
    time_at_temperature,
)
from ..units import celsius
from .seeds import run_seed

__all__ = [
    "RowsResult", "estimate_columns",
    "LineDraws", "line_draws", "JEZIORNY_CAUTION", "JeziornyFit", "JeziornyResult",
    "jeziorny_points", "jeziorny", "OzawaRow", "OzawaResult", "ozawa_points", "ozawa",
    "MoRow", "MoResult", "mo_points", "mo", "CoolingResult", "analyse_cooling",
    "cooling_runs_table", "default_temperatures", "MO_CONVERSIONS", "OZAWA_LIMITS",
    "require_rates",
]

JEZIORNY_CAUTION = (
    "Jeziorny's Zc is an empirical descriptor only: dividing log Zt by the cooling rate has no "
    "kinetic meaning, and the slope of the Avrami plot of a cooling run is not the isothermal "
    "Avrami exponent (it is likely to exceed it markedly); Vyazovkin, Polymers 15 (2023) 197.")

#: Conversion limits of a usable Ozawa point (as required for this tool; our choice).
OZAWA_LIMITS = (0.03, 0.97)
#: Default conversions of Mo's analysis.
MO_CONVERSIONS = tuple(np.round(np.arange(0.1, 0.91, 0.1), 2))
_MIN_RATES = 3


# --- straight lines through the engine -----------------------------------------------------

@dataclass(frozen=True)
class LineDraws:
    """Posterior draws of a straight line y = intercept + slope x.

    Attributes
    ----------
    intercept, slope : ndarray of shape (S,)
        Posterior draws.
    line : LineFit
        Weighted least squares (weights from the point errors) with its classic
        R^2, kept for comparison.
    scatter_factor : float
        Factor (>= 1) applied to the point errors (Birge ratio); NaN when the
        noise was estimated instead.
    n : int
    posterior : Posterior
    """

    intercept: np.ndarray
    slope: np.ndarray
    line: LineFit
    scatter_factor: float
    n: int
    posterior: Posterior


def _wide(centre, se):
    half = max(50 * se if np.isfinite(se) else 0.0, 10 * abs(centre), 1e-6)
    return Uniform(centre - half, centre + half)


def line_draws(x, y, *, sigma=None, error_map=None, seed=0, name="line",
               slope_name="slope", intercept_name="intercept") -> LineDraws:
    """Posterior of a straight line with known point errors (scaled up if they are too small).

    Parameters
    ----------
    x, y : array_like of shape (N,)
    sigma : array_like of shape (N,), optional
        Independent errors of y.
    error_map : array of shape (N, P), optional
        Correlated errors: delta y = error_map @ z, z ~ N(0, I_P). With neither
        ``sigma`` nor ``error_map`` one unknown noise SD is estimated (integrated
        out by the engine) and ``scatter_factor`` is NaN.
    seed : int
    name, slope_name, intercept_name : str

    Returns
    -------
    LineDraws

    Notes
    -----
    Generalised least squares: with C the covariance of y, chi^2 = r^T C^-1 r
    and S = sqrt(chi^2/(N - 2)); C is replaced by max(1, S)^2 C. The posterior
    (flat priors) is then exactly Gaussian and drawn by the engine.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    N = len(x)
    if N < 3:
        raise CrystkinInputError(f"{name}: a line needs at least 3 points, got {N}")
    if error_map is None and sigma is None:
        ls = fit_line(x, y, where=name)
        factor = float("nan")
        problem = line_problem(x, y, name=name, slope_name=slope_name,
                               intercept_name=intercept_name,
                               provenance={"noise": "estimated (one unknown SD)"})
    elif error_map is None:
        sig = np.maximum(np.asarray(sigma, dtype=float), 1e-300)
        ls = fit_line(x, y, weights=1 / sig ** 2, where=name)
        S = ls.residual_sd if N > 2 else 1.0
        factor = float(max(1.0, S)) if np.isfinite(S) else 1.0
        problem = line_problem(x, y, name=name, sigma=sig * factor, slope_name=slope_name,
                               intercept_name=intercept_name,
                               provenance={"scatter_factor": factor})
    else:
        M = np.asarray(error_map, dtype=float)
        C = M @ M.T
        C = C + 1e-12 * np.trace(C) / N * np.eye(N)
        L = np.linalg.cholesky(C)
        A = np.column_stack([np.ones(N), x])
        Aw = np.linalg.solve(L, A)
        yw = np.linalg.solve(L, y)
        coef, *_ = np.linalg.lstsq(Aw, yw, rcond=None)
        chi2 = float(np.sum((yw - Aw @ coef) ** 2))
        factor = float(max(1.0, np.sqrt(chi2 / (N - 2))))
        sig = np.sqrt(np.diag(C))
        ls = fit_line(x, y, weights=1 / sig ** 2, where=name)
        cov = np.linalg.inv(Aw.T @ Aw) * factor ** 2
        se = np.sqrt(np.diag(cov))
        linear = (Parameter(intercept_name, "1", _wide(coef[0], se[0]), float(coef[0])),
                  Parameter(slope_name, "1", _wide(coef[1], se[1]), float(coef[1])))
        design = (Aw.T / factor)[None, :, :]
        data = yw / factor

        def basis(theta):
            return [np.broadcast_to(design, (theta.shape[0], 2, N))]

        problem = FitProblem(name=name, parameters=(), basis=basis, linear=linear, data=data,
                             noise=1.0,
                             provenance={"model": f"{intercept_name} + {slope_name} * x, "
                                                  "generalised least squares (whitened)",
                                         "scatter_factor": factor})
    post = sample_posterior(problem, seed=seed)
    return LineDraws(intercept=post[intercept_name], slope=post[slope_name], line=ls,
                     scatter_factor=factor, n=N, posterior=post)


def require_rates(conversions, method: str, *, need: int = _MIN_RATES):
    """Raise a clear error unless the runs cover at least ``need`` different cooling rates."""
    rates = sorted(cooling_rate(c) for c in conversions)
    distinct = []
    for r in rates:
        if not distinct or r > distinct[-1] * 1.02:
            distinct.append(r)
    if len(distinct) < need:
        listed = ", ".join(f"'{c.run_id}' at {cooling_rate(c) * 60:.3g} K/min"
                           for c in conversions) or "none"
        raise CrystkinInputError(
            f"{method} needs cooling runs at {need} or more different rates; got "
            f"{len(distinct)} ({listed}). Add runs at other rates (for example 2.5, 5, 10 and "
            "20 K/min)")
    return distinct


def _beta_min(conv):
    return cooling_rate(conv) * 60.0


def _group_of(conv, groups):
    return groups.get(conv.run_id, "default") if groups else "default"


# --- Jeziorny ------------------------------------------------------------------------------

def estimate_columns(draws: dict | None, names) -> dict:
    """``Q``, ``Q_lo95``, ``Q_hi95`` for each name, NaN when there are no draws."""
    r = {}
    for name in names:
        if draws is not None:
            r.update(interval_columns(name, draws[name]))
        else:
            r.update({name: np.nan, f"{name}_lo95": np.nan, f"{name}_hi95": np.nan})
    return r


@dataclass(frozen=True)
class RowsResult:
    """Result of a method evaluated at several temperatures or conversions: one row
    object per point (each with ``row() -> dict``), warnings and provenance."""

    rows: tuple
    warnings: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)

    def table(self) -> pd.DataFrame:
        """One table row per point."""
        return pd.DataFrame([r.row() for r in self.rows])


@dataclass(frozen=True)
class JeziornyFit:
    """Jeziorny's Avrami plot of one cooling run.

    Attributes
    ----------
    run_id : str
    beta_K_per_min : float
    t_min : ndarray
        Time since onset of the plotted points, min.
    X : ndarray
    draws : dict of str -> ndarray
        ``n``, ``log10_Zt`` (Zt in min^-n), ``log10_Zc``, ``Zc``.
    fit : LineDraws
    x_range : tuple of float
    group : str
    """

    run_id: str
    beta_K_per_min: float
    t_min: np.ndarray
    X: np.ndarray
    draws: dict
    fit: LineDraws
    x_range: tuple[float, float]
    group: str = "default"

    def row(self) -> dict:
        r = {"group": self.group, "run_id": self.run_id, "beta_K_per_min": self.beta_K_per_min}
        for name in ("n", "log10_Zt", "log10_Zc", "Zc"):
            r.update(interval_columns(name, self.draws[name]))
        r.update({"n_linear": self.fit.line.slope, "r2_linear": self.fit.line.r2,
                  "n_points": self.fit.n, "scatter_factor": self.fit.scatter_factor,
                  "x_range": f"{self.x_range[0]:.0%}-{self.x_range[1]:.0%}"})
        return r


@dataclass(frozen=True)
class JeziornyResult:
    """Jeziorny descriptors of several cooling runs, always with the published caution."""

    fits: tuple[JeziornyFit, ...]
    caution: str = JEZIORNY_CAUTION
    warnings: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)

    def table(self) -> pd.DataFrame:
        """One row per run: n, log10_Zt, log10_Zc, Zc (median and 95 % interval), ..."""
        return pd.DataFrame([f.row() for f in self.fits])


def jeziorny_points(t_min, X, beta_K_per_min, *, error_map=None, sigma=None, seed=0,
                    run_id="run", x_range=(0.03, 0.20), group="default") -> JeziornyFit:
    """Jeziorny's analysis of one run from tabulated (t, X) points.

    Parameters
    ----------
    t_min : array_like, min
        Time since onset, t = (T_onset - T)/beta.
    X : array_like
        Relative crystallinity at those times, 0 < X < 1.
    beta_K_per_min : float
    error_map : array of shape (N, P), optional
        Errors of X (delta X = error_map @ z); see :func:`line_draws`.
    sigma : array_like, optional
        Independent errors of X; default 1e-3 (used only for weighting a table).

    Returns
    -------
    JeziornyFit

    Notes
    -----
    ln[-ln(1 - X)] = ln Zt + n ln t (Avrami applied to X(t) of a cooling run);
    log10 Zt = ln Zt / ln 10 and log10 Zc = log10 Zt / beta (Jeziorny, Polymer 19
    (1978) 1142, from memory). See :data:`JEZIORNY_CAUTION`.
    """
    t = np.asarray(t_min, dtype=float)
    X = np.asarray(X, dtype=float)
    ok = (t > 0) & (X > 0) & (X < 1)
    if ok.sum() < 3:
        raise CrystkinInputError(
            f"run {run_id}: Jeziorny's plot needs at least 3 points with t > 0 and 0 < X < 1; "
            f"got {int(ok.sum())}")
    x = np.log(t[ok])
    y = double_log(X[ok])
    dydX = 1.0 / ((1.0 - X[ok]) * -np.log1p(-X[ok]))
    if error_map is not None:
        fit = line_draws(x, y, error_map=np.asarray(error_map)[ok] * dydX[:, None], seed=seed,
                         name=f"{run_id} Jeziorny", slope_name="n", intercept_name="ln_Zt")
    else:
        s = np.broadcast_to(1e-3 if sigma is None else np.asarray(sigma, dtype=float),
                            X.shape)[ok]
        fit = line_draws(x, y, sigma=s * dydX, seed=seed, name=f"{run_id} Jeziorny",
                         slope_name="n", intercept_name="ln_Zt")
    log_Zt = fit.intercept / np.log(10.0)
    log_Zc = jeziorny_log_Zc(log_Zt, beta_K_per_min)
    draws = {"n": fit.slope, "log10_Zt": log_Zt, "log10_Zc": log_Zc, "Zc": 10.0 ** log_Zc}
    return JeziornyFit(run_id, float(beta_K_per_min), t[ok], X[ok], draws, fit,
                       tuple(x_range), group)


def jeziorny(runs, *, x_range=(0.03, 0.20), n_points=20, seed=0,
             groups=None) -> JeziornyResult:
    """Jeziorny's Avrami plot for each cooling run.

    Parameters
    ----------
    runs : sequence of Conversion
        From :func:`kinetics.prep.cooling.prepare_cooling`.
    x_range : (float, float)
        Conversion range of the plot (default 3-20 %, the primary range advised
        for isothermal Avrami fits by Lorenzo et al., Polym. Test. 26 (2007) 222,
        from memory; applying it here is our choice).
    n_points : int
        Points evenly spaced in X across ``x_range``.
    seed : int
    groups : dict run_id -> group, optional

    Returns
    -------
    JeziornyResult
        Runs that cannot be analysed are listed in ``warnings``.
    """
    lo, hi = x_range
    if not (0 < lo < hi < 1):
        raise CrystkinInputError(
            f"The 'x_range' parameter of jeziorny must satisfy 0 < low < high < 1. Got "
            f"{x_range!r} instead.")
    check_range("n_points", int(n_points), "jeziorny", lower=3)
    fits, notes = [], []
    for conv in runs:
        try:
            Xq = np.linspace(lo, hi, int(n_points))
            tq = np.interp(Xq, conv.conversion, conv.time)
            X, G = conversion_noise_map(conv, tq)
            T = np.interp(tq, conv.time, conv.temperature)
            t_min = (conv.baseline["T_onset_K"] - T) / cooling_rate(conv) / 60.0
            fits.append(jeziorny_points(t_min, X, _beta_min(conv), error_map=G,
                                        seed=run_seed(seed, f"jeziorny:{conv.run_id}"),
                                        run_id=conv.run_id, x_range=(lo, hi),
                                        group=_group_of(conv, groups)))
        except CrystkinInputError as exc:
            notes.append(f"run {conv.run_id}: Jeziorny not possible: {exc}")
    return JeziornyResult(tuple(fits), warnings=tuple(notes),
                          provenance={"x_range": (lo, hi), "n_points": int(n_points),
                                      "time": "t = (T_onset - T)/beta, min",
                                      "errors": "conversion noise model, GLS"})


# --- Ozawa ---------------------------------------------------------------------------------

@dataclass(frozen=True)
class OzawaRow:
    """Ozawa's plot at one temperature (estimable or not).

    Attributes
    ----------
    T_K : float
    estimable : bool
    note : str
        Why the temperature is not estimable ("" otherwise).
    rates_K_per_min, X : tuple of float
        Rates and conversions of the usable runs.
    draws : dict or None
        ``m`` and ``lnK_T`` (K(T) in (K/min)^m).
    fit : LineDraws or None
    group : str
    """

    T_K: float
    estimable: bool
    note: str
    rates_K_per_min: tuple[float, ...]
    X: tuple[float, ...]
    draws: dict | None = None
    fit: LineDraws | None = None
    group: str = "default"

    def row(self) -> dict:
        r = {"group": self.group, "T_K": self.T_K, "T_degC": celsius(self.T_K),
             "estimable": self.estimable, "n_rates": len(self.rates_K_per_min)}
        r.update(estimate_columns(self.draws, ("m", "lnK_T")))
        r["scatter_factor"] = self.fit.scatter_factor if self.fit is not None else np.nan
        r["r2_linear"] = self.fit.line.r2 if self.fit is not None else np.nan
        r["rates_K_per_min"] = ", ".join(f"{b:.3g}" for b in self.rates_K_per_min)
        r["note"] = self.note
        return r


@dataclass(frozen=True)
class OzawaResult(RowsResult):
    """Ozawa's m(T) and K(T) across rates. One row per point:
    see :meth:`OzawaRow.row` for the columns."""


def ozawa_points(beta_K_per_min, X, *, sigma=None, seed=0, T_K=float("nan"),
                 group="default") -> OzawaRow:
    """Ozawa's plot at one temperature from tabulated (beta, X) points.

    Parameters
    ----------
    beta_K_per_min : array_like
    X : array_like
        Conversion of each run at this temperature.
    sigma : array_like, optional
        Errors of X (default 1e-3 each, used only for weighting).

    Returns
    -------
    OzawaRow

    Notes
    -----
    ln[-ln(1 - X)] = ln K(T) - m ln beta (Ozawa, Polymer 12 (1971) 150);
    draws m = -slope, lnK_T = intercept.
    """
    b = np.asarray(beta_K_per_min, dtype=float)
    X = np.asarray(X, dtype=float)
    s = np.broadcast_to(1e-3 if sigma is None else np.asarray(sigma, dtype=float), X.shape)
    y = double_log(X)
    dydX = 1.0 / ((1.0 - X) * -np.log1p(-X))
    fit = line_draws(np.log(b), y, sigma=s * dydX, seed=seed, name=f"Ozawa {T_K:.2f} K",
                     slope_name="minus_m", intercept_name="lnK_T")
    return OzawaRow(float(T_K), True, "", tuple(map(float, b)), tuple(map(float, X)),
                    {"m": -fit.slope, "lnK_T": fit.intercept}, fit, group)


def default_temperatures(conversions, *, x_limits=OZAWA_LIMITS, max_points=25):
    """Whole-degree Celsius grid (in K) spanning the runs' usable conversion ranges.

    The grid covers [min_i T_i(X_hi), max_i T_i(X_lo)] with a step of 0.5, 1, 2,
    5 or 10 K chosen to give at most ``max_points`` temperatures.
    """
    lo_T = min(c.temperature_at(x_limits[1]) for c in conversions)
    hi_T = max(c.temperature_at(x_limits[0]) for c in conversions)
    if not (np.isfinite(lo_T) and np.isfinite(hi_T)) or hi_T <= lo_T:
        return np.array([])
    for step in (0.5, 1.0, 2.0, 5.0, 10.0, 20.0):
        a = np.ceil(celsius(lo_T) / step) * step
        b = np.floor(celsius(hi_T) / step) * step
        if (b - a) / step + 1 <= max_points:
            break
    return np.arange(a, b + step / 2, step) + 273.15


def ozawa(runs, *, temperatures=None, x_limits=OZAWA_LIMITS, min_rates=_MIN_RATES,
          seed=0, group="default") -> OzawaResult:
    """Ozawa's analysis across cooling rates at each temperature.

    Parameters
    ----------
    runs : sequence of Conversion
        Cooling runs of one formulation, at three or more rates.
    temperatures : array_like, K, optional
        Default :func:`default_temperatures`.
    x_limits : (float, float)
        A run is used at a temperature only where its X lies in these limits.
    min_rates : int
        Fewer usable rates make the temperature "not estimable" (a row saying
        so, not a fit).
    seed : int

    Returns
    -------
    OzawaResult

    Raises
    ------
    CrystkinInputError
        Fewer than three rates, or no temperature at which ``min_rates`` runs
        overlap (the runs do not overlap in temperature).

    Notes
    -----
    1 - X(T) = exp(-K(T)/beta^m), i.e. ln[-ln(1 - X)] = ln K(T) - m ln beta
    (Ozawa, Polymer 12 (1971) 150, from memory), beta in K/min. Point errors
    of X from each run's noise model, propagated by the delta method.
    """
    conversions = list(runs)
    require_rates(conversions, "Ozawa's analysis", need=min_rates)
    T_grid = (default_temperatures(conversions, x_limits=x_limits) if temperatures is None
              else np.atleast_1d(np.asarray(temperatures, dtype=float)))
    per_run = []
    for conv in conversions:
        X = conversion_at_temperature(conv, T_grid)
        tq = time_at_temperature(conv, T_grid)
        sd = np.full(len(T_grid), np.nan)
        good = np.isfinite(tq)
        if good.any():
            _, G = conversion_noise_map(conv, tq[good])
            sd[good] = np.sqrt(np.sum(G ** 2, axis=1))
        per_run.append((conv, X, sd))
    rows, notes = [], []
    for j, T in enumerate(T_grid):
        use = [(c, X[j], s[j]) for c, X, s in per_run
               if np.isfinite(X[j]) and x_limits[0] <= X[j] <= x_limits[1]]
        betas = tuple(_beta_min(c) for c, _, _ in use)
        Xs = tuple(float(x) for _, x, _ in use)
        if len(use) < min_rates:
            rows.append(OzawaRow(float(T), False,
                                 f"not estimable: {len(use)} rate(s) between "
                                 f"{x_limits[0]:.0%} and {x_limits[1]:.0%} conversion at this "
                                 f"temperature (need {min_rates})", betas, Xs, group=group))
            continue
        row = ozawa_points(betas, Xs, sigma=[s for _, _, s in use],
                           seed=run_seed(seed, f"ozawa:{group}:{T:.3f}"), T_K=float(T),
                           group=group)
        rows.append(row)
    if not any(r.estimable for r in rows):
        ranges = "; ".join(
            f"'{c.run_id}' ({_beta_min(c):.3g} K/min): {celsius(c.temperature_at(x_limits[0])):.1f}"
            f" to {celsius(c.temperature_at(x_limits[1])):.1f} °C" for c in conversions)
        raise CrystkinInputError(
            f"Ozawa's analysis: the runs do not overlap in temperature — at no temperature do "
            f"{min_rates} rates lie between {x_limits[0]:.0%} and {x_limits[1]:.0%} conversion "
            f"({ranges}). Use rates closer together (for example a factor of 1.5-2 apart) or "
            "choose temperatures inside the overlap")
    n_not = sum(not r.estimable for r in rows)
    if n_not:
        notes.append(f"Ozawa: {n_not} of {len(rows)} temperatures not estimable (fewer than "
                     f"{min_rates} rates between {x_limits[0]:.0%} and {x_limits[1]:.0%} "
                     "conversion)")
    return OzawaResult(tuple(rows), tuple(notes),
                       {"x_limits": tuple(x_limits), "min_rates": int(min_rates),
                        "beta_unit": "K/min", "K_T_unit": "(K/min)^m",
                        "errors": "conversion noise model, delta method"})


# --- Mo ------------------------------------------------------------------------------------

@dataclass(frozen=True)
class MoRow:
    """Mo's plot at one conversion.

    Attributes
    ----------
    X : float
    estimable : bool
    note : str
    rates_K_per_min, t_min : tuple of float
        Rates and times since onset (min) of the runs used.
    T_mean_K : float
        Mean temperature at which the runs reach X.
    draws : dict or None
        ``a`` and ``log10_F_T`` (F in K min^(a-1)).
    fit : LineDraws or None
        The fitted line log10 t = c0 + c1 log10 beta.
    group : str
    """

    X: float
    estimable: bool
    note: str
    rates_K_per_min: tuple[float, ...]
    t_min: tuple[float, ...]
    T_mean_K: float
    draws: dict | None = None
    fit: LineDraws | None = None
    group: str = "default"

    def row(self) -> dict:
        r = {"group": self.group, "X": self.X, "T_mean_K": self.T_mean_K,
             "T_mean_degC": celsius(self.T_mean_K), "estimable": self.estimable,
             "n_rates": len(self.rates_K_per_min)}
        r.update(estimate_columns(self.draws, ("a", "log10_F_T")))
        r["scatter_factor"] = self.fit.scatter_factor if self.fit is not None else np.nan
        r["rates_K_per_min"] = ", ".join(f"{b:.3g}" for b in self.rates_K_per_min)
        r["note"] = self.note
        return r


@dataclass(frozen=True)
class MoResult(RowsResult):
    """Mo's a and F(T) at chosen conversions. One row per point:
    see :meth:`MoRow.row` for the columns."""


def mo_points(beta_K_per_min, t_min, *, sigma_log_t=None, seed=0, X=float("nan"),
              T_mean_K=float("nan"), group="default") -> MoRow:
    """Mo's plot at one conversion from tabulated (beta, t) points.

    Parameters
    ----------
    beta_K_per_min : array_like
    t_min : array_like, min
        Time from onset to the conversion, for each rate.
    sigma_log_t : array_like, optional
        Errors of log10 t (default 1e-3 each, used only for weighting).

    Returns
    -------
    MoRow

    Notes
    -----
    log10 beta = log10 F(T) - a log10 t (Liu, Mo et al., Polym. Eng. Sci. 37
    (1997) 568, from memory). The measured quantity is t (beta is set), so the
    line is fitted as log10 t = c0 + c1 log10 beta, with a = -1/c1 and
    log10 F = -c0/c1 per draw; for points exactly on a line both give the same
    answer.
    """
    b = np.asarray(beta_K_per_min, dtype=float)
    t = np.asarray(t_min, dtype=float)
    s = np.broadcast_to(1e-3 if sigma_log_t is None else np.asarray(sigma_log_t, dtype=float),
                        t.shape)
    fit = line_draws(np.log10(b), np.log10(t), sigma=s, seed=seed, name=f"Mo X={X:.2f}",
                     slope_name="c1", intercept_name="c0")
    with np.errstate(divide="ignore", invalid="ignore"):
        a = -1.0 / fit.slope
        logF = -fit.intercept / fit.slope
    return MoRow(float(X), True, "", tuple(map(float, b)), tuple(map(float, t)),
                 float(T_mean_K), {"a": a, "log10_F_T": logF}, fit, group)


def mo(runs, *, conversions=None, min_rates=_MIN_RATES, seed=0, group="default") -> MoResult:
    """Mo's analysis across cooling rates at each chosen conversion.

    Parameters
    ----------
    runs : sequence of Conversion
        Cooling runs of one formulation, at three or more rates.
    conversions : array_like, optional
        Relative crystallinities (0-1); default 0.1, 0.2, ..., 0.9.
    min_rates : int
    seed : int

    Returns
    -------
    MoResult

    Notes
    -----
    See :func:`mo_points`. t is the time from the onset, (T_onset - T_X)/beta,
    in min; its error from the noise model: sd(t) = sd(X(t_X)) / (dX/dt).
    """
    runs = list(runs)
    require_rates(runs, "Mo's analysis", need=min_rates)
    levels = np.asarray(MO_CONVERSIONS if conversions is None else conversions, dtype=float)
    if np.any((levels <= 0) | (levels >= 1)):
        raise CrystkinInputError("Mo's analysis: conversions must lie strictly between 0 and 1")
    per_run = []
    for conv in runs:
        tq = np.array([conv.time_at(x) for x in levels])
        _, G = conversion_noise_map(conv, tq)
        r = local_rate(conv, tq)
        T = np.interp(tq, conv.time, conv.temperature)
        t_rel = (conv.baseline["T_onset_K"] - T) / cooling_rate(conv)
        sd_log_t = np.sqrt(np.sum(G ** 2, axis=1)) / (r * np.maximum(t_rel, 1e-9) * np.log(10))
        per_run.append((conv, t_rel / 60.0, sd_log_t, T))
    rows = []
    for j, X in enumerate(levels):
        use = [(c, t[j], s[j], T[j]) for c, t, s, T in per_run if t[j] > 0]
        betas = tuple(_beta_min(c) for c, *_ in use)
        T_mean = float(np.mean([u[3] for u in use])) if use else float("nan")
        if len(use) < min_rates:
            rows.append(MoRow(float(X), False, f"not estimable: {len(use)} rate(s) reach this "
                              f"conversion (need {min_rates})", betas,
                              tuple(float(u[1]) for u in use), T_mean, group=group))
            continue
        rows.append(mo_points(betas, [u[1] for u in use], sigma_log_t=[u[2] for u in use],
                              seed=run_seed(seed, f"mo:{group}:{X:.4f}"), X=float(X),
                              T_mean_K=T_mean, group=group))
    return MoResult(tuple(rows), (),
                    {"beta_unit": "K/min", "t_unit": "min", "F_unit": "K min^(a-1)",
                     "fit": "log10 t on log10 beta (t is the measured quantity)",
                     "errors": "conversion noise model, delta method"})


# --- per-run table and the entry point -----------------------------------------------------

def cooling_runs_table(conversions, *, groups=None, used=None) -> pd.DataFrame:
    """One row per prepared cooling run: rate, onset/peak/end temperatures, enthalpy, flags."""
    rows = []
    for c in conversions:
        b = c.baseline
        rows.append({
            "group": _group_of(c, groups), "run_id": c.run_id,
            "beta_K_per_min": b["beta_K_per_s"] * 60.0,
            "beta_nominal_K_per_min": b["beta_nominal_K_per_s"] * 60.0,
            "T_onset_degC": celsius(b["T_onset_K"]), "T_peak_degC": celsius(b["T_peak_K"]),
            "T_end_degC": celsius(b["T_end_K"]), "T_onset_K": b["T_onset_K"],
            "T_peak_K": b["T_peak_K"], "T_end_K": b["T_end_K"],
            "t_half_s": b["t_half_s"],
            "enthalpy_J_per_g": c.enthalpy_J_per_g,
            "enthalpy_J": None if c.specific_enthalpy else c.enthalpy,
            "lag_K": b["lag_K"],
            "lag_model": None if b["lag"] is None else b["lag"].get("model"),
            "baseline": b["method"], "snr": b["snr"], "cut_off": b["cut_off"],
            "used": True if used is None else bool(used.get(c.run_id, True)),
            "flags": "; ".join(c.warnings),
        })
    return pd.DataFrame(rows)


@dataclass(frozen=True)
class CoolingResult:
    """Everything computed for the cooling runs of a study.

    Attributes
    ----------
    conversions : tuple of Conversion
        Every prepared run (also those not used).
    groups : dict run_id -> group
    used : dict run_id -> bool
        False for runs left out of the cross-rate analyses (cut-off events).
    jeziorny, ozawa, mo, friedman, vyazovkin, kissinger : dict group -> result
        Per formulation; a group is missing from a method's dict when the
        method was not possible (the reason is in ``warnings``). ``kissinger``
        is empty unless requested.
    warnings : tuple of str
        Data-quality findings of the runs and methods not possible.
    failures : tuple of (str, str)
        Runs that could not be prepared: (run_id, message).
    provenance : dict
    """

    conversions: tuple[Conversion, ...]
    groups: dict
    used: dict
    jeziorny: dict
    ozawa: dict
    mo: dict
    friedman: dict
    vyazovkin: dict
    kissinger: dict
    warnings: tuple[str, ...] = ()
    failures: tuple[tuple[str, str], ...] = ()
    provenance: dict = field(default_factory=dict)

    @property
    def cautions(self) -> tuple[str, ...]:
        """Published cautions attached to methods that were computed."""
        out = []
        if self.jeziorny:
            out.append(JEZIORNY_CAUTION)
        if self.kissinger:
            out.append(next(iter(self.kissinger.values())).warning)
        return tuple(out)

    def tables(self) -> dict[str, pd.DataFrame]:
        """Tidy tables: "cooling_runs", "jeziorny", "ozawa", "mo", "friedman",
        "vyazovkin" and, when requested, "kissinger" (a key is missing when no
        group allowed the method)."""
        out = {"cooling_runs": cooling_runs_table(self.conversions, groups=self.groups,
                                                  used=self.used)}
        for key in ("jeziorny", "ozawa", "mo", "friedman", "vyazovkin", "kissinger"):
            parts = [res.table() for res in getattr(self, key).values()]
            parts = [p for p in parts if not p.empty]
            if parts:
                out[key] = pd.concat(parts, ignore_index=True)
        return out


def analyse_cooling(traces, *, seed=0, temperatures=None, conversions=None, kissinger=False,
                    lag=None, prep_options=None, exclude_cut_off=True,
                    jeziorny_range=(0.03, 0.20), vyazovkin_draws=200) -> CoolingResult:
    """Prepare every cooling run and apply all nonisothermal methods per formulation.

    Parameters
    ----------
    traces : iterable of Trace
        Runs of a study; only ``kind == "cooling"`` runs are used.
    seed : int
        Study seed; every regression's seed is derived from it and a label.
    temperatures : array_like, K, optional
        Ozawa temperatures; default from the data (:func:`default_temperatures`).
    conversions : array_like, optional
        Relative crystallinities for Mo and the isoconversional methods;
        defaults 0.1-0.9 (Mo) and 0.05-0.95 (Friedman, Vyazovkin).
    kissinger : bool
        Also compute Kissinger's E (with its warning; unsound on cooling).
    lag : optional
        Thermal-lag calibration passed to :func:`kinetics.prep.cooling.prepare_cooling`.
    prep_options : dict, optional
        Further keywords for :func:`~kinetics.prep.cooling.prepare_cooling`.
    exclude_cut_off : bool
        Leave runs whose event is cut off out of the cross-rate analyses (their
        X is normalised to a partial area).
    jeziorny_range : (float, float)
    vyazovkin_draws : int
        Resampled conversion curves for the Vyazovkin interval.

    Returns
    -------
    CoolingResult
    """
    from .isoconversional import friedman, vyazovkin
    from .isoconversional import kissinger as kissinger_fn

    prep_options = dict(prep_options or {})
    if lag is not None:
        prep_options["lag"] = lag
    convs, failures, notes, groups, used = [], [], [], {}, {}
    for tr in traces:
        if not isinstance(tr, Trace) or tr.info.kind != "cooling":
            continue
        try:
            with _warnings.catch_warnings():
                _warnings.simplefilter("ignore", DataQualityWarning)
                conv = prepare_cooling(tr, **prep_options)
        except CrystkinInputError as exc:
            failures.append((tr.run_id, str(exc)))
            continue
        convs.append(conv)
        groups[conv.run_id] = tr.info.group
        notes.extend(f"{conv.run_id}: {w}" for w in conv.warnings)
        keep = not (exclude_cut_off and conv.baseline["cut_off"])
        used[conv.run_id] = keep
        if not keep:
            notes.append(f"{conv.run_id}: left out of the cross-rate analyses (event cut off)")
    results = {k: {} for k in ("jeziorny", "ozawa", "mo", "friedman", "vyazovkin", "kissinger")}
    order = list(dict.fromkeys(groups[c.run_id] for c in convs))
    for g in order:
        members = [c for c in convs if groups[c.run_id] == g]
        usable = [c for c in members if used[c.run_id]]
        gseed = run_seed(seed, f"group:{g}")
        calls = {
            "jeziorny": lambda m=members, gs=gseed: jeziorny(
                m, x_range=jeziorny_range, seed=gs, groups=groups),
            "ozawa": lambda u=usable, gs=gseed, gg=g: ozawa(
                u, temperatures=temperatures, seed=gs, group=gg),
            "mo": lambda u=usable, gs=gseed, gg=g: mo(
                u, conversions=conversions, seed=gs, group=gg),
            "friedman": lambda u=usable, gs=gseed, gg=g: friedman(
                u, conversions=conversions, seed=gs, group=gg),
            "vyazovkin": lambda u=usable, gs=gseed, gg=g: vyazovkin(
                u, conversions=conversions, seed=gs, group=gg, n_draws=vyazovkin_draws),
        }
        if kissinger:
            calls["kissinger"] = lambda u=usable, gs=gseed, gg=g: kissinger_fn(
                u, seed=gs, group=gg)
        for key, call in calls.items():
            try:
                res = call()
            except CrystkinInputError as exc:
                notes.append(f"{key} (group {g}): not possible: {exc}")
                continue
            results[key][g] = res
            notes.extend(f"{key} (group {g}): {w}" for w in res.warnings)
    prov = {"seed": seed, "prep_options": {k: (v if k != "lag" else repr(v))
                                           for k, v in prep_options.items()},
            "exclude_cut_off": exclude_cut_off, "kissinger_requested": bool(kissinger),
            "jeziorny_range": tuple(jeziorny_range), "vyazovkin_draws": int(vyazovkin_draws)}
    return CoolingResult(conversions=tuple(convs), groups=groups, used=used,
                         warnings=tuple(notes), failures=tuple(failures), provenance=prov,
                         **results)
