"""Avrami analysis of isothermal holds: one posterior per run, a table across runs.

The likelihood is on the measured heat-flow signal, not on the cumulative
conversion: the noise of the signal is close to independent, while the errors
of X(t), an integral of it, are strongly correlated, and treating them as
independent gives intervals several times too narrow.  The heat-flow model is

    q(t) = b0 + b1 (t - t_ref) + A * <dX/dt>_cell(t; n, k, t0) [+ c exp(-(t - t_hold)/tau)]

with X the Avrami conversion (Avrami, J. Chem. Phys. 1939–1941), A the event
area (J), a linear baseline and an optional decaying start-up transient as
nuisance terms, and the noise SD estimated.  The classic linearised fit
(ln(-ln(1-X)) against ln(t - t0) over 3–20 % conversion, as advised by Lorenzo
et al., Polym. Test. 26 (2007) 222 — from memory) is kept beside it.
"""

from __future__ import annotations

from concurrent.futures import Executor
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..dataset import Conversion, Trace
from ..errors import CrystkinInputError
from ..estimate import (
    LeastSquaresResult,
    Posterior,
    fit_least_squares,
    fit_line,
    interval_columns,
    sample_posterior,
)
from ..estimate.problem import FitProblem
from ..models.avrami import (
    LN2,
    avrami_cell_rate,
    avrami_k_from_half_time,
    avrami_linearised,
)
from ..models.params import LogUniform, Parameter, Uniform
from ..prep.cells import block_average as _block_average
from ..units import celsius
from .seeds import run_seed

__all__ = ["IsothermFit", "fit_isotherm", "linearised_avrami", "avrami_heat_flow_problem",
           "isotherm_table", "analyse_isotherms", "BatchResult"]


def linearised_avrami(conversion: Conversion, *, x_range=(0.03, 0.20), t0=None) -> dict:
    """Classic double-logarithmic Avrami fit over a conversion range.

    Parameters
    ----------
    conversion : Conversion
    x_range : tuple of float
        Conversion range used (default 3–20 %, primary crystallization).
    t0 : float, optional
        Time origin, s; default the event start found by preparation.

    Returns
    -------
    dict
        n, ln_k (k in s^-n), r2, n_points, x_range, and the LineFit.

    Notes
    -----
    ln[-ln(1 - X)] = ln k + n ln(t - t0)  (Avrami 1939); a straight-line fit.
    """
    lo, hi = x_range
    if not (0 < lo < hi < 1):
        raise CrystkinInputError(
            f"The 'x_range' parameter of linearised_avrami must satisfy 0 < low < high < 1. "
            f"Got {x_range!r} instead.")
    origin = conversion.window[0] if t0 is None else t0
    X = conversion.conversion
    sel = (X >= lo) & (X <= hi) & (conversion.time > origin)
    if sel.sum() < 3:
        raise CrystkinInputError(
            f"run {conversion.run_id}: fewer than 3 points between {lo:.0%} and {hi:.0%} "
            "conversion; widen x_range or sample faster")
    x, y = avrami_linearised(conversion.time[sel], X[sel], origin)
    line = fit_line(x, y, where=f"run {conversion.run_id} linearised Avrami")
    return {"n": line.slope, "ln_k": line.intercept, "r2": line.r2, "n_points": line.n,
            "x_range": (lo, hi), "t0": origin, "line": line}


@dataclass(frozen=True)
class AvramiHeatFlowBasis:
    """Basis of the isothermal heat-flow model (picklable, so fits can run in other processes).

    Columns: cell-averaged Avrami rate (coefficient: area), 1 (b0), t - t_ref (b1),
    and exp(-(t - t_hold)/tau) (c) when the transient is modelled.
    Nonlinear parameters theta = (n, t_half, t0[, tau]).
    """

    edges: np.ndarray
    t_ref: float
    hold: float
    transient: bool

    def __call__(self, theta):
        m = theta.shape[0]
        er = self.edges[None, :]
        centres = 0.5 * (self.edges[1:] + self.edges[:-1])
        N = len(centres)
        n = theta[:, 0:1]
        k = avrami_k_from_half_time(n, theta[:, 1:2])
        cols = [avrami_cell_rate(er, n, k, theta[:, 2:3]), np.ones((m, N)),
                np.broadcast_to(centres - self.t_ref, (m, N))]
        if self.transient:
            cols.append(np.exp(-(centres[None, :] - self.hold) / theta[:, 3:4]))
        return [np.stack(cols, axis=1)]


def avrami_heat_flow_problem(trace: Trace, conversion: Conversion, *, transient: str = "auto",
                             max_points: int = 250, start: dict | None = None) -> FitProblem:
    """Bind the Avrami heat-flow model to one isothermal run.

    Parameters
    ----------
    trace : Trace
        The raw run.
    conversion : Conversion
        Its preparation (sign, hold start, transient end, window, baseline).
    transient : {"auto", "model", "cut"}
        "cut" fits from the end of the start-up transient; "model" fits from
        the hold start with a decaying-exponential transient as a nuisance term;
        "auto" models it whenever preparation found a transient (cutting at its
        detected end leaves an unmodelled tail that biases n upwards).
    max_points : int
        Signal is block-averaged to at most this many cells (exact for the
        cell-averaged model; white noise shrinks by sqrt(block size)).
    start : dict, optional
        Starting values (n, t_half, t0, area); default from the linearised fit.

    Returns
    -------
    FitProblem
        Parameters n (1), t_half (s), t0 (s), area (J or J/kg), b0, b1,
        and for a modelled transient c (signal unit), tau (s).
    """
    if transient not in ("auto", "model", "cut"):
        raise CrystkinInputError(
            "The 'transient' parameter of avrami_heat_flow_problem must be one of "
            f"['auto', 'cut', 'model']. Got {transient!r} instead.")
    sign = 1.0 if conversion.exotherm == "up" else -1.0
    t_all = trace.time
    q_all = sign * trace.heat_flow
    hold = conversion.hold_start
    ev_start, ev_end = conversion.window
    dt = float(np.median(np.diff(t_all)))
    has_transient = conversion.transient_end > hold + 3 * dt
    use_transient = transient == "model" or (transient == "auto" and has_transient)
    t_fit0 = hold + 2 * dt if use_transient else conversion.transient_end
    sel = t_all >= t_fit0
    if sel.sum() < 20:
        raise CrystkinInputError(f"run {trace.run_id}: fewer than 20 points after the start-up "
                                 "transient; the record is too short to fit")
    edges, y, block = _block_average(t_all[sel], q_all[sel], max_points)
    duration = float(edges[-1] - edges[0])
    t_ref = float(edges[-1])

    if start is None:
        try:
            lin = linearised_avrami(conversion)
            n0 = float(np.clip(lin["n"], 0.6, 5.9))
            th0 = float((LN2 / np.exp(lin["ln_k"])) ** (1 / lin["n"]))
        except CrystkinInputError:
            n0, th0 = 2.5, float(conversion.time_at(0.5) - ev_start)
        start = {"n": n0, "t_half": th0, "t0": ev_start}
    area_scale = abs(conversion.enthalpy * (trace.info.mass if (conversion.specific_enthalpy
                                                                and not trace.specific) else 1.0))
    area0 = start.get("area", area_scale if area_scale > 0 else float(np.ptp(y) * duration))
    level = float(np.median(y[-max(3, len(y) // 10):]))
    amp = float(np.ptp(y)) or 1.0
    th_lo = max(dt / 10, 1e-3)
    th_hi = 20 * float(t_all[-1] - hold) + 10
    th_start = float(np.clip(start["t_half"] if np.isfinite(start["t_half"]) else 0.2 * duration,
                             th_lo * 1.01, th_hi * 0.99))
    t0_lo = hold - 0.5 * (ev_end - hold) - 10 * dt
    t0_hi = max(ev_start + th_start, hold + dt)
    area_unit = "J/kg" if trace.specific else "J"
    params = [
        Parameter("n", "1", Uniform(0.5, 6.0), float(np.clip(start["n"], 0.51, 5.99)),
                  "Avrami exponent"),
        Parameter("t_half", "s", LogUniform(th_lo, th_hi), th_start,
                  "half-time after the induction time"),
        Parameter("t0", "s", Uniform(t0_lo, t0_hi), float(np.clip(start["t0"], t0_lo, t0_hi)),
                  "start of crystallization (time since start of record)"),
    ]
    linear = [
        Parameter("area", area_unit, LogUniform(area0 / 50, area0 * 50), area0, "event area"),
        Parameter("b0", "signal unit", Uniform(level - 20 * amp, level + 20 * amp), level,
                  "baseline level at the end of the record", nuisance=True),
        Parameter("b1", "signal unit/s", Uniform(-20 * amp / duration, 20 * amp / duration), 0.0,
                  "baseline slope", nuisance=True),
    ]
    if use_transient:
        tau_hi = max(duration / 2, dt)
        params.append(Parameter("tau", "s", LogUniform(dt / 2, tau_hi),
                                float(np.clip(10 * dt, dt / 2 * 1.01, tau_hi * 0.99)),
                                "start-up transient decay time", nuisance=True))
        linear.append(Parameter("c", "signal unit", Uniform(-50 * amp, 50 * amp), None,
                                "start-up transient amplitude at the hold start", nuisance=True))
    basis = AvramiHeatFlowBasis(edges=edges, t_ref=t_ref, hold=hold,
                                transient=use_transient)

    prov = {"model": "Avrami heat flow, cell-averaged, linear baseline"
                     + (" + decaying transient" if use_transient else ""),
            "fit_from_s": float(edges[0]), "fit_to_s": float(edges[-1]),
            "block_size": int(block), "n_cells": int(len(y)),
            "transient": "modelled" if use_transient else "cut at transient end",
            "signal_sign": "as recorded" if sign > 0 else "inverted (exotherm down in file)"}
    return FitProblem(name=trace.run_id, parameters=tuple(params), basis=basis,
                      linear=tuple(linear), data=y, provenance=prov)


@dataclass(frozen=True)
class IsothermFit:
    """Avrami analysis of one isothermal run.

    Attributes
    ----------
    trace : Trace
    conversion : Conversion
    problem : FitProblem
    least_squares : LeastSquaresResult
    posterior : Posterior or None
        None when sampling was switched off (least squares only).
    linearised : dict
        Classic double-log fit (see :func:`linearised_avrami`).
    derived : dict of str -> ndarray
        Per-draw derived quantities, SI (k_per_s_n, t_half_s, ...).
    flags : tuple of str
        Data-quality and consistency findings for the table.
    """

    trace: Trace
    conversion: Conversion
    problem: FitProblem
    least_squares: LeastSquaresResult
    posterior: Posterior | None
    linearised: dict
    derived: dict
    flags: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)

    @property
    def run_id(self) -> str:
        return self.trace.run_id

    def row(self) -> dict:
        """One tidy table row (units in column names, median and 95 % interval)."""
        info = self.trace.info
        r = {"run_id": self.run_id, "group": info.group,
             "T_c_degC": celsius(info.temperature), "T_c_K": info.temperature}
        for name in ("n", "k_per_min_n", "k_per_s_n", "K_per_min", "t_half_s", "t_half_min",
                     "t_peak_s", "induction_time_s", "enthalpy_J_per_g"):
            if name in self.derived:
                r.update(interval_columns(name, self.derived[name]))
        conv = self.conversion
        r["t_half_measured_s"] = conv.time_at(0.5) - conv.window[0]
        r["t50_from_hold_measured_s"] = conv.time_at(0.5) - conv.hold_start
        r["t50_from_hold_model_s"] = float(np.median(self.derived["t50_from_hold_s"]))
        lin = self.linearised
        if lin:
            r["n_linear"] = lin["n"]
            r["k_linear_per_min_n"] = float(np.exp(lin["ln_k"]) * 60.0 ** lin["n"])
            r["t_half_linear_s"] = float((LN2 / np.exp(lin["ln_k"])) ** (1 / lin["n"]))
            r["r2_linear"] = lin["r2"]
            r["linear_range"] = f"{lin['x_range'][0]:.0%}-{lin['x_range'][1]:.0%}"
        if self.posterior is not None:
            d = self.posterior.diagnostics
            r.update({"converged": d.converged, "ess": d.ess,
                      "tau_max_steps": max(d.tau.values()), "acceptance": d.acceptance})
        else:
            r.update({"converged": None, "ess": None, "tau_max_steps": None, "acceptance": None})
        r["method"] = "posterior" if self.posterior is not None else "least squares"
        r["flags"] = "; ".join(self.flags)
        return r


def _derive(draws: dict, trace: Trace, conversion: Conversion) -> dict:
    n = draws["n"]
    t_half = draws["t_half"]
    k = avrami_k_from_half_time(n, t_half)
    out = {"n": n, "k_per_s_n": k, "k_per_min_n": k * 60.0 ** n, "K_per_min": k ** (1 / n) * 60,
           "t_half_s": t_half, "t_half_min": t_half / 60.0,
           "induction_time_s": draws["t0"] - conversion.hold_start,
           "t50_from_hold_s": draws["t0"] + t_half - conversion.hold_start}
    with np.errstate(invalid="ignore", divide="ignore"):
        tp = np.where(n > 1, ((n - 1) / (n * k)) ** (1 / n), 0.0)
    out["t_peak_s"] = draws["t0"] + tp - conversion.hold_start
    area = draws["area"]
    if trace.specific:
        out["enthalpy_J_per_g"] = area / 1e3
    elif trace.info.mass is not None:
        out["enthalpy_J_per_g"] = area / trace.info.mass / 1e3
    return out


def fit_isotherm(trace: Trace, *, conversion: Conversion | None = None, seed: int = 0,
                 sample: bool = True, transient: str = "auto", max_points: int = 250,
                 x_range=(0.03, 0.20), prep_options: dict | None = None,
                 sampler_options: dict | None = None, progress: bool | str = False) -> IsothermFit:
    """Avrami parameters of one isothermal run, with a posterior.

    Parameters
    ----------
    trace : Trace
        An isothermal run.
    conversion : Conversion, optional
        Its preparation; computed with :func:`kinetics.prep.prepare_isothermal`
        and ``prep_options`` when not given.
    seed : int
        Sampler seed (start ball and moves).
    sample : bool
        False gives least squares only (fast; intervals from draws of the
        least-squares normal approximation, kept inside the priors' support).
    transient, max_points
        See :func:`avrami_heat_flow_problem`.
    x_range : tuple
        Conversion range of the linearised comparison fit.
    sampler_options : dict
        Passed to :func:`kinetics.estimate.sample_posterior`.

    Returns
    -------
    IsothermFit
    """
    if trace.info.kind != "isothermal":
        raise CrystkinInputError(f"run {trace.run_id} is a {trace.info.kind} run; fit_isotherm "
                                 "needs an isothermal hold", source=trace.info.source or None)
    if conversion is None:
        from ..prep import prepare_isothermal
        conversion = prepare_isothermal(trace, **(prep_options or {}))
    flags = list(conversion.warnings)
    try:
        lin = linearised_avrami(conversion, x_range=x_range)
    except CrystkinInputError as exc:
        lin = {}
        flags.append(f"linearised fit not possible: {exc}")
    start = None
    if lin:
        start = {"n": float(np.clip(lin["n"], 0.6, 5.9)),
                 "t_half": float((LN2 / np.exp(lin["ln_k"])) ** (1 / lin["n"])),
                 "t0": lin["t0"]}
    problem = avrami_heat_flow_problem(trace, conversion, transient=transient,
                                       max_points=max_points, start=start)
    lsq = fit_least_squares(problem)
    if lsq.at_bound:
        flags.append("least squares ended at a bound: " + ", ".join(lsq.at_bound))
    post = None
    if sample:
        post = sample_posterior(problem, seed=seed, start=lsq, progress=progress,
                                **(sampler_options or {}))
        draws = {name: post[name] for name in post.names}
        if not post.diagnostics.converged:
            flags.append("posterior not converged")
    else:
        rng = np.random.default_rng(seed)
        sim = rng.multivariate_normal(lsq.x, lsq.cov, size=4000, method="svd")
        lo = np.array([p.prior.support[0] for p in problem.all_parameters])
        hi = np.array([p.prior.support[1] for p in problem.all_parameters])
        sim = sim[np.all((sim >= lo) & (sim <= hi), axis=1)]  # the priors' support
        if len(sim) < 100:
            sim = np.clip(rng.multivariate_normal(lsq.x, lsq.cov, size=4000, method="svd"),
                          lo, hi)
        draws = {name: sim[:, i] for i, name in enumerate(problem.names)}
    derived = _derive(draws, trace, conversion)
    if lin:
        n_lo, n_hi = np.quantile(derived["n"], [0.025, 0.975])
        if not (n_lo <= lin["n"] <= n_hi):
            flags.append(f"linearised n = {lin['n']:.2f} lies outside the 95 % interval "
                         f"[{n_lo:.2f}, {n_hi:.2f}]")
    meas = conversion.time_at(0.5) - conversion.hold_start
    model = float(np.median(derived["t50_from_hold_s"]))
    if np.isfinite(meas) and model > 0 and abs(meas - model) > 0.05 * model:
        diff = 100 * (meas - model) / model
        flags.append(f"measured and model time to 50 % differ by {diff:+.0f} %")
    prov = {"window_s": conversion.window, "baseline": conversion.baseline,
            "hold_start_s": conversion.hold_start, "transient_end_s": conversion.transient_end,
            "exotherm": conversion.exotherm, "fit": problem.provenance,
            "priors": (post.priors() if post is not None else
                       {p.name: p.prior.describe() for p in problem.all_parameters}),
            "seed": seed, "x_range_linear": x_range,
            "sampler": None if post is None else post.provenance.get("sampler")}
    return IsothermFit(trace=trace, conversion=conversion, problem=problem, least_squares=lsq,
                       posterior=post, linearised=lin, derived=derived, flags=tuple(flags),
                       provenance=prov)


def isotherm_table(fits) -> pd.DataFrame:
    """Half-time and rate-constant table: one row per run, sorted by group and T_c."""
    rows = [f.row() for f in fits]
    if not rows:
        return pd.DataFrame()
    df = pd.DataFrame(rows)
    return df.sort_values(["group", "T_c_K", "run_id"], kind="stable").reset_index(drop=True)


@dataclass(frozen=True)
class BatchResult:
    """Fits of many runs, with the runs that failed and why."""

    fits: tuple
    failures: tuple[tuple[str, str], ...] = ()

    def table(self) -> pd.DataFrame:
        return isotherm_table(self.fits)


def _fit_one(args):
    trace, seed, kwargs = args
    try:
        return trace.run_id, fit_isotherm(trace, seed=seed, **kwargs), None
    except CrystkinInputError as exc:
        return trace.run_id, None, str(exc)


def analyse_isotherms(traces, *, seed: int = 0, executor: Executor | None = None,
                      progress=None, cache_dir=None, **fit_options) -> BatchResult:
    """Fit every isothermal run; failures are collected, not raised.

    Parameters
    ----------
    traces : iterable of Trace
    seed : int
        Study seed; each run's seed is derived from it and the run name, so
        results do not depend on the order or the executor.
    executor : concurrent.futures.Executor, optional
        For example ``ProcessPoolExecutor`` or a Dask client's executor
        (``client.get_executor(pure=False)``); default runs in this process.
    progress : callable, optional
        Called as ``progress(run_id, done, total)`` after each run.
    cache_dir : path, optional
        Finished fits are kept there (see :mod:`kinetics.analyses.cache`), so a
        batch that was interrupted resumes without redoing them.
    **fit_options
        Passed to :func:`fit_isotherm`.
    """
    from .cache import ResultCache, run_key

    cache = ResultCache(cache_dir)
    traces = [t for t in traces if t.info.kind == "isothermal"]
    jobs, keys, done = [], {}, {}
    for t in traces:
        s = run_seed(seed, t.run_id)
        key = run_key(t, s, fit_options)
        keys[t.run_id] = key
        hit = cache.get(t.run_id, key)
        if hit is not None:
            done[t.run_id] = hit
        else:
            jobs.append((t, s, fit_options))
    it = map(_fit_one, jobs) if executor is None else executor.map(_fit_one, jobs)
    total = len(traces)
    count = len(done)
    for res in it:
        done[res[0]] = res
        if res[1] is not None:
            cache.put(res[0], keys[res[0]], res)
        count += 1
        if progress is not None:
            progress(res[0], count, total)
    results = [done[t.run_id] for t in traces]
    fits = tuple(f for _, f, _ in results if f is not None)
    failures = tuple((rid, msg) for rid, f, msg in results if f is None)
    return BatchResult(fits=fits, failures=failures)
