"""Secondary crystallization: two-stage (parallel Avrami) against plain Avrami, per isotherm.

Both models are fitted to the measured heat-flow signal of an isothermal hold, on
the same block-averaged cells, baseline and start-up treatment as the plain Avrami
fit of :mod:`kinetics.analyses.isothermal`:

    plain:      q = b0 + b1 (t - t_ref) + A <dX/dt>_cell
    two-stage:  q = b0 + b1 (t - t_ref) + A1 <dX1/dt>_cell + A2 <dX2/dt>_cell

with X_i = 1 - exp(-k_i (t - t0)^n_i) sharing the induction time t0 and the second
stage the slower one (t_half2 = r t_half1, r >= 1), so that
X = w1 X1 + w2 X2 with w2 = A2/(A1 + A2) (Velisaris & Seferis, Polym. Eng. Sci. 26
(1986) 1574; from memory). The areas, baseline and transient amplitude enter
linearly and are integrated out by the engine.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from ..dataset import Conversion, Trace
from ..errors import CrystkinInputError
from ..estimate import (
    LeastSquaresResult,
    Posterior,
    fit_least_squares,
    interval_columns,
    sample_posterior,
)
from ..estimate.problem import FitProblem
from ..models.avrami import avrami_cell_rate, avrami_k_from_half_time
from ..models.growth import two_stage_conversion
from ..models.params import LogUniform, Parameter, Uniform
from ..units import celsius
from .isothermal import avrami_heat_flow_problem

__all__ = ["SecondaryResult", "two_stage_heat_flow_problem", "compare_secondary",
           "secondary_table"]


def _plain_cells(trace: Trace, conversion: Conversion, plain: FitProblem, max_points: int):
    """Cell edges of the plain Avrami problem (same selection and block averaging)."""
    return plain.basis.edges


def two_stage_heat_flow_problem(trace: Trace, conversion: Conversion, *, transient: str = "auto",
                                max_points: int = 400, plain: FitProblem | None = None,
                                start: dict | None = None) -> FitProblem:
    """Bind the two-stage (parallel Avrami) heat-flow model to one isothermal run.

    Parameters
    ----------
    trace, conversion : Trace, Conversion
    transient, max_points
        As in :func:`kinetics.analyses.isothermal.avrami_heat_flow_problem`, whose
        cells, priors and baseline terms are reused.
    plain : FitProblem, optional
        The plain Avrami problem of the same run (built when not given).
    start : dict, optional
        Starting values of n1, t_half1, t0, n2, ratio (and tau).

    Returns
    -------
    FitProblem
        Nonlinear: n1, t_half1 (s), t0 (s), [tau (s)], n2, ratio = t_half2/t_half1
        (log-uniform on [1, 1000]). Linear: area1, area2, b0, b1, [c].
    """
    plain = plain or avrami_heat_flow_problem(trace, conversion, transient=transient,
                                              max_points=max_points)
    edges = _plain_cells(trace, conversion, plain, max_points)
    centres = 0.5 * (edges[1:] + edges[:-1])
    t_ref = float(edges[-1])
    hold = conversion.hold_start
    names = [p.name for p in plain.parameters]
    has_tau = "tau" in names
    by = {p.name: p for p in plain.parameters}
    lin = {p.name: p for p in plain.linear}
    start = dict(start or {})

    def st(p, key, default):
        return p.with_start(float(start.get(key, default if p.start is None else p.start)))

    n1 = replace(by["n"], name="n1", description="Avrami exponent of the primary stage")
    th1 = replace(by["t_half"], name="t_half1", description="half-time of the primary stage")
    params = [st(n1, "n1", 2.5), st(th1, "t_half1", 60.0), st(by["t0"], "t0", 0.0)]
    if has_tau:
        params.append(st(by["tau"], "tau", 1.0))
    params.append(Parameter("n2", "1", Uniform(0.5, 6.0), float(start.get("n2", 1.0)),
                            "Avrami exponent of the secondary stage"))
    params.append(Parameter("ratio", "1", LogUniform(1.0, 1000.0),
                            float(np.clip(start.get("ratio", 5.0), 1.0 + 1e-6, 999.0)),
                            "t_half2 / t_half1"))
    a = lin["area"]
    area_hi = a.prior.support[1]
    linear = [replace(a, name="area1", description="area of the primary stage"),
              Parameter("area2", a.unit, Uniform(0.0, area_hi), None,
                        "area of the secondary stage"),
              lin["b0"], lin["b1"]]
    if "c" in lin:
        linear.append(lin["c"])
    er = edges[None, :]
    cr = (centres - t_ref)[None, :]
    ch = centres[None, :] - hold
    N = len(centres)
    i_tau = 3 if has_tau else None
    i_n2 = 4 if has_tau else 3

    def basis(theta):
        m = theta.shape[0]
        n_1 = theta[:, 0:1]
        th_1 = theta[:, 1:2]
        t0 = theta[:, 2:3]
        n_2 = theta[:, i_n2:i_n2 + 1]
        th_2 = th_1 * theta[:, i_n2 + 1:i_n2 + 2]
        cols = [avrami_cell_rate(er, n_1, avrami_k_from_half_time(n_1, th_1), t0),
                avrami_cell_rate(er, n_2, avrami_k_from_half_time(n_2, th_2), t0),
                np.ones((m, N)), np.broadcast_to(cr, (m, N))]
        if has_tau:
            cols.append(np.exp(-ch / theta[:, i_tau:i_tau + 1]))
        return [np.stack(cols, axis=1)]

    prov = dict(plain.provenance)
    prov["model"] = ("two-stage (parallel Avrami) heat flow, cell-averaged, linear baseline"
                     + (" + decaying transient" if has_tau else ""))
    return FitProblem(name=trace.run_id, parameters=tuple(params), basis=basis,
                      linear=tuple(linear), data=plain.data, provenance=prov)


#: Starting (n2, t_half2/t_half1) of the two-stage least squares; the best fit is kept.
_STARTS = ((1.0, 4.0), (2.0, 12.0), (1.0, 40.0))


def _bic(ls: LeastSquaresResult, n: int) -> float:
    k = len(ls.x) + 1
    return float(n * np.log(max(ls.ssr, 1e-300) / n) + k * np.log(n))


def _two_stage_half_time(w2, n1, k1, n2, k2, t_hi):
    """Time to X = 1/2 of the two-stage conversion (from t0), by bisection, s."""
    lo = np.zeros_like(n1)
    hi = np.array(t_hi, dtype=float) * np.ones_like(n1)
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        below = two_stage_conversion(mid, w2, n1, k1, n2, k2) < 0.5
        lo = np.where(below, mid, lo)
        hi = np.where(below, hi, mid)
    out = 0.5 * (lo + hi)
    reach = two_stage_conversion(t_hi, w2, n1, k1, n2, k2) >= 0.5
    return np.where(reach, out, np.nan)


@dataclass(frozen=True)
class SecondaryResult:
    """Plain against two-stage Avrami kinetics for one isotherm.

    Attributes
    ----------
    run_id : str
    group : str
    T_c : float, K
    plain, two_stage : LeastSquaresResult
        Least-squares fits of the two heat-flow models.
    plain_problem, two_stage_problem : FitProblem
    bic : dict
        BIC of "one stage" and "two stages".
    chosen : {"one stage", "two stages"}
    criterion : str
        The rule that made the choice, with the numbers.
    posterior : Posterior or None
        Posterior of the two-stage model (when sampled).
    derived : dict of str -> ndarray
        Per-draw two-stage quantities: w2, n1, n2, t_half1_s, t_half2_s, t_half_total_s.
    flags : tuple of str
    provenance : dict
    """

    run_id: str
    group: str
    T_c: float
    plain: LeastSquaresResult
    two_stage: LeastSquaresResult
    plain_problem: FitProblem
    two_stage_problem: FitProblem
    bic: dict
    chosen: str
    criterion: str
    posterior: Posterior | None
    derived: dict
    flags: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)

    @property
    def delta_bic(self) -> float:
        """BIC(one stage) - BIC(two stages); positive favours two stages."""
        return self.bic["one stage"] - self.bic["two stages"]

    def row(self) -> dict:
        """One tidy table row (units in column names, median and 95 % interval)."""
        r = {"run_id": self.run_id, "group": self.group, "T_c_degC": celsius(self.T_c),
             "T_c_K": self.T_c, "model_chosen": self.chosen,
             "delta_bic_one_minus_two": self.delta_bic, "bic_one_stage": self.bic["one stage"],
             "bic_two_stages": self.bic["two stages"]}
        for name in ("w2", "n1", "t_half1_s", "n2", "t_half2_s", "t_half_total_s"):
            r.update(interval_columns(name, self.derived[name]))
        r["n_plain"] = self.plain["n"]
        r["n_plain_se"] = float(self.plain.stderr[self.plain.names.index("n")])
        r["t_half_plain_s"] = self.plain["t_half"]
        r["residual_sd_one_stage"] = self.plain.residual_sd
        r["residual_sd_two_stages"] = self.two_stage.residual_sd
        r["method"] = "posterior" if self.posterior is not None else "least squares"
        r["converged"] = (self.posterior.diagnostics.converged if self.posterior is not None
                          else None)
        r["criterion"] = self.criterion
        r["flags"] = "; ".join(self.flags)
        return r

    def fitted(self) -> pd.DataFrame:
        """Signal and both least-squares fits on the fitted cells (for a figure)."""
        p1 = self.plain_problem.predict_full(self.plain.x[None, :])[0]
        p2 = self.two_stage_problem.predict_full(self.two_stage.x[None, :])[0]
        edges = self.provenance["edges_s"]
        return pd.DataFrame({"time_s": 0.5 * (edges[1:] + edges[:-1]),
                             "signal": self.plain_problem.data, "one_stage_fit": p1,
                             "two_stage_fit": p2})


def compare_secondary(trace: Trace, conversion: Conversion | None = None, *, seed: int = 0,
                      sample: bool = True, transient: str = "auto", max_points: int = 400,
                      bic_margin: float = 10.0, min_weight: float = 0.03,
                      min_ratio: float = 1.5, max_nfev: int = 100,
                      sampler_options: dict | None = None,
                      prep_options: dict | None = None) -> SecondaryResult:
    """Fit plain and two-stage Avrami models to one isotherm and choose between them.

    Parameters
    ----------
    trace : Trace
        An isothermal run.
    conversion : Conversion, optional
        Its preparation (computed with :func:`kinetics.prep.prepare_isothermal` when None).
    seed : int
    sample : bool
        Sample the two-stage posterior (else intervals from the least-squares covariance).
    transient, max_points
        As in :func:`kinetics.analyses.isothermal.avrami_heat_flow_problem`.
    bic_margin : float
        Smallest BIC(one) - BIC(two) that selects two stages (default 10).
    min_weight : float
        The secondary stage must carry a weight w2 in [min_weight, 1 - min_weight].
    min_ratio : float
        ... and be slower than the primary one by at least this factor in half-time.
    max_nfev : int
        Function evaluations allowed to each of the three two-stage least-squares starts.
    sampler_options : dict, optional
        Passed to :func:`kinetics.estimate.sample_posterior`.

    Returns
    -------
    SecondaryResult

    Notes
    -----
    Criterion: BIC = N ln(SSR/N) + k ln N for each least-squares fit to the N
    heat-flow cells, k counting every fitted coefficient and the noise level
    (Schwarz, Ann. Stat. 6 (1978) 461). Two stages are chosen when
    BIC(one) - BIC(two) > ``bic_margin`` (10: "very strong" evidence on the scale of
    Kass & Raftery, J. Am. Stat. Assoc. 90 (1995) 773; from memory; strict because
    small baseline imperfections also favour extra terms), the least-squares weight
    w2 lies in [``min_weight``, 1 - ``min_weight``] and t_half2/t_half1 >= ``min_ratio``.
    """
    if trace.info.kind != "isothermal":
        raise CrystkinInputError(f"run {trace.run_id} is a {trace.info.kind} run; "
                                 "compare_secondary needs an isothermal hold",
                                 source=trace.info.source or None)
    if not 0 <= min_weight < 0.5:
        raise CrystkinInputError(f"The 'min_weight' parameter of compare_secondary must be in "
                                 f"[0, 0.5). Got {min_weight!r} instead.")
    if conversion is None:
        from ..prep import prepare_isothermal
        conversion = prepare_isothermal(trace, **(prep_options or {}))
    plain = avrami_heat_flow_problem(trace, conversion, transient=transient,
                                     max_points=max_points)
    ls1 = fit_least_squares(plain)
    s1 = ls1.as_dict()
    base = {"n1": float(np.clip(s1["n"], 0.55, 5.9)), "t_half1": s1["t_half"], "t0": s1["t0"]}
    if "tau" in s1:
        base["tau"] = s1["tau"]
    best, best_prob = None, None
    for n2, ratio in _STARTS:
        st = dict(base, n2=n2, ratio=ratio, t_half1=s1["t_half"] * 0.9)
        prob = two_stage_heat_flow_problem(trace, conversion, plain=plain, start=st,
                                           max_points=max_points)
        try:
            ls = fit_least_squares(prob, max_nfev=max_nfev)
        except (ValueError, np.linalg.LinAlgError):
            continue
        if best is None or ls.ssr < best.ssr:
            best, best_prob = ls, prob
    if best is None:
        raise CrystkinInputError(f"run {trace.run_id}: the two-stage model could not be fitted")
    N = len(plain.data)
    bic = {"one stage": _bic(ls1, N), "two stages": _bic(best, N)}
    s2 = best.as_dict()
    a1, a2 = s2["area1"], s2["area2"]
    w2_hat = a2 / (a1 + a2) if (a1 + a2) > 0 else float("nan")
    delta = bic["one stage"] - bic["two stages"]
    ok_bic = delta > bic_margin
    ok_w = np.isfinite(w2_hat) and min_weight <= w2_hat <= 1 - min_weight
    ok_r = s2["ratio"] >= min_ratio
    chosen = "two stages" if (ok_bic and ok_w and ok_r) else "one stage"
    criterion = (f"BIC(one) - BIC(two) = {delta:.1f} (needs > {bic_margin:g}); w2 = "
                 f"{w2_hat:.3f} (needs {min_weight:g}-{1 - min_weight:g}); t_half2/t_half1 = "
                 f"{s2['ratio']:.2f} (needs >= {min_ratio:g})")
    flags = list(conversion.warnings)
    if "ratio" in best.at_bound or s2["ratio"] > 900:
        flags.append("the secondary stage is as slow as the prior allows; it may be absorbing "
                     "baseline drift")
    if ok_bic and not chosen == "two stages":
        flags.append("two stages fit better but the secondary stage is negligible or not "
                     "slower than the primary one")
    post = None
    if sample:
        post = sample_posterior(best_prob, seed=seed, start=best, **(sampler_options or {}))
        draws = {nm: post[nm] for nm in post.names}
        if not post.diagnostics.converged:
            flags.append("two-stage posterior not converged")
    else:
        rng = np.random.default_rng(seed)
        sim = rng.multivariate_normal(best.x, best.cov, size=4000, method="svd")
        draws = {nm: sim[:, i] for i, nm in enumerate(best_prob.names)}
    a1d, a2d = draws["area1"], draws["area2"]
    with np.errstate(invalid="ignore", divide="ignore"):
        w2 = a2d / (a1d + a2d)
    th1 = draws["t_half1"]
    th2 = th1 * draws["ratio"]
    n1, n2 = draws["n1"], draws["n2"]
    with np.errstate(invalid="ignore", divide="ignore"):
        k1, k2 = avrami_k_from_half_time(n1, th1), avrami_k_from_half_time(n2, th2)
    ok = np.isfinite(w2) & (w2 >= 0) & (w2 <= 1) & np.isfinite(k1) & np.isfinite(k2)
    t_tot = np.full_like(w2, np.nan)
    t_end = float(trace.time[-1] - np.median(draws["t0"])) * 10
    t_tot[ok] = _two_stage_half_time(w2[ok], n1[ok], k1[ok], n2[ok], k2[ok], t_end)
    derived = {"w2": w2, "n1": n1, "n2": n2, "t_half1_s": th1, "t_half2_s": th2,
               "t_half_total_s": t_tot}
    edges = _plain_cells(trace, conversion, plain, max_points)
    prov = {"criterion": criterion, "bic_margin": bic_margin, "min_weight": min_weight,
            "min_ratio": min_ratio, "seed": seed, "fit": best_prob.provenance,
            "priors": (post.priors() if post is not None else
                       {p.name: p.prior.describe() for p in best_prob.all_parameters}),
            "edges_s": edges}
    return SecondaryResult(
        run_id=trace.run_id, group=trace.info.group, T_c=float(trace.info.temperature),
        plain=ls1, two_stage=best, plain_problem=plain, two_stage_problem=best_prob, bic=bic,
        chosen=chosen, criterion=criterion, posterior=post, derived=derived, flags=tuple(flags),
        provenance=prov)


def secondary_table(results) -> pd.DataFrame:
    """One row per isotherm, sorted by group and T_c."""
    rows = [r.row() for r in results]
    if not rows:
        return pd.DataFrame()
    return (pd.DataFrame(rows).sort_values(["group", "T_c_K", "run_id"], kind="stable")
            .reset_index(drop=True))
