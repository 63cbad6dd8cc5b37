"""Least squares for any :class:`FitProblem`: the fast estimate and the sampler's start."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import least_squares

from ..errors import CrystkinInputError
from .problem import FitProblem

__all__ = ["LeastSquaresResult", "fit_least_squares"]


@dataclass(frozen=True)
class LeastSquaresResult:
    """Least-squares estimate with its asymptotic covariance.

    Attributes
    ----------
    names : tuple of str
    x : ndarray of shape (p,)
        Estimates, in the units of the parameters.
    cov : ndarray of shape (p, p)
        s^2 (J^T J)^-1, with s^2 the residual variance when the noise is
        estimated (the usual nonlinear-regression covariance, as NIST StRD
        certifies it) and 1 for known noise.
    stderr : ndarray of shape (p,)
    noise_sd : ndarray of shape (n_groups,)
        Residual standard deviation per noise group (known values if given).
    ssr : float
        Sum of squared (unweighted) residuals.
    dof : int
        N - p.
    success : bool
    message : str
    nfev : int
    at_bound : tuple of str
        Parameters that ended within 1e-6 of a bound of their support.
    """

    names: tuple[str, ...]
    x: np.ndarray
    cov: np.ndarray
    stderr: np.ndarray
    noise_sd: np.ndarray
    ssr: float
    dof: int
    success: bool
    message: str
    nfev: int
    at_bound: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)

    def __getitem__(self, name: str) -> float:
        return float(self.x[self.names.index(name)])

    def as_dict(self) -> dict[str, float]:
        return dict(zip(self.names, map(float, self.x), strict=True))

    @property
    def residual_sd(self) -> float:
        return float(np.sqrt(self.ssr / self.dof)) if self.dof > 0 else float("nan")


def _start_and_bounds(problem: FitProblem, x0):
    lo = np.array([p.prior.support[0] for p in problem.all_parameters])
    hi = np.array([p.prior.support[1] for p in problem.all_parameters])
    if x0 is None:
        x0 = []
        for p, a, b in zip(problem.parameters, lo, hi, strict=False):
            if p.start is not None:
                x0.append(p.start)
            elif np.isfinite(a) and np.isfinite(b):
                x0.append(0.5 * (a + b))
            else:
                raise CrystkinInputError(
                    f"{problem.name}: parameter '{p.name}' needs a start value (unbounded prior)")
        if problem.linear:
            beta = _linear_start(problem, np.asarray(x0, dtype=float))
            for p, v in zip(problem.linear, beta, strict=True):
                x0.append(p.start if p.start is not None else
                          float(np.clip(v, *p.prior.support)))
    x0 = np.asarray(x0, dtype=float)
    if x0.shape != lo.shape:
        raise CrystkinInputError(f"{problem.name}: start vector has {x0.size} values, "
                                 f"the model has {lo.size} parameters")
    outside = [(p.name, v) for p, v, a, b in zip(problem.all_parameters, x0, lo, hi, strict=True)
               if not (a <= v <= b)]
    if outside:
        name, v = outside[0]
        raise CrystkinInputError(f"{problem.name}: start value {v:g} of '{name}' is outside "
                                 "its bounds")
    span = np.where(np.isfinite(hi - lo), hi - lo, np.maximum(np.abs(x0), 1.0))
    eps = 1e-10 * span
    x0 = np.clip(x0, lo + eps, hi - eps)
    return x0, lo, hi


def _linear_start(problem: FitProblem, theta: np.ndarray) -> np.ndarray:
    """Best linear coefficients at fixed nonlinear parameters (one linear solve)."""
    blocks = problem.basis(theta[None, :])
    out = []
    for B, sl in zip(blocks, problem.group_slices, strict=True):
        coef, *_ = np.linalg.lstsq(B[0].T, problem.data[sl], rcond=None)
        out.extend(coef)
    return np.asarray(out)


def fit_least_squares(problem: FitProblem, *, x0=None, max_nfev: int | None = None,
                      loss: str = "linear") -> LeastSquaresResult:
    """Minimise the (weighted) sum of squared residuals of a problem.

    Parameters
    ----------
    problem : FitProblem
    x0 : array of shape (p,), optional
        Start; default the parameters' ``start`` values.
    max_nfev : int, optional
    loss : str
        scipy ``least_squares`` loss; "linear" for ordinary least squares.

    Returns
    -------
    LeastSquaresResult

    Notes
    -----
    With noise to be estimated in several groups, the fit is repeated with each
    group weighted by its residual SD (two reweighting passes).  The covariance
    is s^2 (J^T J)^-1 with J the Jacobian of the weighted residuals at the
    optimum (forward differences, all p steps in one vectorised model call),
    computed through the pseudo-inverse (Bates & Watts, Nonlinear
    Regression Analysis and Its Applications, 1988, ch. 2).
    """
    x0, lo, hi = _start_and_bounds(problem, x0)
    span_step = np.where(np.isfinite(hi - lo), hi - lo, 0.0)
    y = problem.data
    groups = problem.noise_groups
    ng = problem.n_groups
    if problem.estimates_noise:
        w = np.ones_like(y)
    else:
        w = np.broadcast_to(np.asarray(problem.noise, dtype=float), y.shape)

    p_nl = len(problem.parameters)
    pen = problem.prior_residuals

    def fun(x):
        r = (y - problem.predict_full(x[None, :])[0]) / w
        if pen is not None:
            r = np.concatenate([r, pen(x[None, :p_nl])[0]])
        return np.where(np.isfinite(r), r, 1e150)

    def jac(x):
        h = np.sqrt(np.finfo(float).eps) * np.maximum(np.abs(x), 1e-8 + 1e-3 * span_step)
        h = np.where(x + h > hi, -h, h)
        X = np.vstack([x, x + np.diag(h)])
        mu = problem.predict_full(X)
        J = -(mu[1:] - mu[0]) / h[:, None] / w[None, :]
        if pen is not None:
            pr = pen(X[:, :p_nl])
            J = np.concatenate([J, (pr[1:] - pr[0]) / h[:, None]], axis=1)
        return np.where(np.isfinite(J), J, 0.0).T

    passes = 3 if (problem.estimates_noise and ng > 1) else 1
    res = None
    for _ in range(passes):
        res = least_squares(fun, x0, jac=jac, bounds=(lo, hi), x_scale="jac", method="trf",
                            max_nfev=max_nfev, loss=loss, xtol=1e-12, ftol=1e-12, gtol=None)
        x0 = res.x
        if problem.estimates_noise and ng > 1:
            r = y - problem.predict_full(res.x[None, :])[0]
            counts = np.maximum(np.bincount(groups, None, ng), 1)
            sd = np.sqrt(np.bincount(groups, r * r, ng) / counts)
            w = np.maximum(sd, 1e-300)[groups]
    r = y - problem.predict_full(res.x[None, :])[0]
    ssr = float(np.sum(r * r))
    p = len(res.x)
    dof = len(y) - p
    J = res.jac
    scale = np.linalg.norm(J, axis=0)
    scale = np.where(np.isfinite(scale) & (scale > 0), scale, 1.0)
    _, s, VT = np.linalg.svd(J / scale, full_matrices=False)
    keep = s > s.max() * np.finfo(float).eps * max(J.shape) if s.size else s
    inv = ((VT[keep].T / s[keep] ** 2) @ VT[keep]) / scale[:, None] / scale[None, :]
    if problem.estimates_noise:
        s2 = float(np.sum(res.fun ** 2) / dof) if dof > 0 else float("nan")
        counts = np.maximum(np.bincount(groups, None, ng), 1)
        noise_sd = np.sqrt(np.bincount(groups, r * r, ng) / counts)
    else:
        s2 = 1.0
        noise_sd = np.array([float(np.mean(w[groups == g])) for g in range(ng)])
    cov = inv * s2
    stderr = np.sqrt(np.clip(np.diag(cov), 0, None))
    span = np.where(np.isfinite(hi - lo), hi - lo, 1.0)
    at_bound = tuple(n for n, v, a, b, sp in zip(problem.names, res.x, lo, hi, span, strict=True)
                     if (np.isfinite(a) and v - a < 1e-6 * sp)
                     or (np.isfinite(b) and b - v < 1e-6 * sp))
    return LeastSquaresResult(
        names=problem.names, x=res.x.copy(), cov=cov, stderr=stderr, noise_sd=noise_sd,
        ssr=ssr, dof=dof, success=bool(res.success), message=str(res.message),
        nfev=int(res.nfev), at_bound=at_bound, provenance=dict(problem.provenance))
