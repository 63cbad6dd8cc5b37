"""Straight-line fits: the classic linearised plots and their Bayesian version.

:func:`fit_line` is ordinary (optionally weighted) least squares with the usual
standard errors and R^2, kept for comparison with published linearised
analyses (Avrami, Ozawa, Mo, Hoffman–Lauritzen, Hoffman–Weeks plots).
:func:`line_problem` turns the same line into a :class:`FitProblem` for the
shared emcee engine.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import CrystkinInputError
from ..models.params import Normal, Parameter, Uniform
from .problem import FitProblem

__all__ = ["LineFit", "LineBasis", "fit_line", "line_problem"]


@dataclass(frozen=True)
class LineFit:
    """y = intercept + slope x by least squares.

    Attributes
    ----------
    slope, intercept : float
    slope_se, intercept_se : float
        Standard errors from the residual variance (n - 2 degrees of freedom).
    r2 : float
        Coefficient of determination.
    n : int
        Number of points used.
    cov : ndarray of shape (2, 2)
        Covariance of (intercept, slope).
    residual_sd : float
    """

    slope: float
    intercept: float
    slope_se: float
    intercept_se: float
    r2: float
    n: int
    cov: np.ndarray
    residual_sd: float


@dataclass(frozen=True)
class LineBasis:
    """Fixed design matrix (L, N) as a picklable basis for :class:`FitProblem`."""

    design: np.ndarray

    def __call__(self, theta):
        return [np.broadcast_to(self.design[None], (theta.shape[0], *self.design.shape))]


def fit_line(x, y, *, weights=None, where: str = "fit_line") -> LineFit:
    """Ordinary least-squares straight line.

    Parameters
    ----------
    x, y : array_like of shape (n,)
    weights : array_like of shape (n,), optional
        Inverse variances; default equal weights.

    Notes
    -----
    slope = S_xy / S_xx, intercept = ybar - slope xbar; var(slope) = s^2 / S_xx,
    var(intercept) = s^2 (1/n + xbar^2 / S_xx), s^2 = SSR / (n - 2)
    (any regression text; agrees with scipy.stats.linregress).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    ok = np.isfinite(x) & np.isfinite(y)
    x, y = x[ok], y[ok]
    if len(x) < 3:
        raise CrystkinInputError(f"{where}: a line needs at least 3 points, got {len(x)}")
    if np.ptp(x) == 0:
        raise CrystkinInputError(f"{where}: all x values are equal; a slope cannot be estimated")
    w = np.ones_like(x) if weights is None else np.asarray(weights, dtype=float)[ok]
    A = np.column_stack([np.ones_like(x), x])
    Aw = A * np.sqrt(w)[:, None]
    yw = y * np.sqrt(w)
    coef, *_ = np.linalg.lstsq(Aw, yw, rcond=None)
    r = y - A @ coef
    n = len(x)
    s2 = float(np.sum(w * r * r) / (n - 2)) if n > 2 else float("nan")
    cov = s2 * np.linalg.inv(Aw.T @ Aw)
    ybar = np.sum(w * y) / np.sum(w)
    sst = float(np.sum(w * (y - ybar) ** 2))
    r2 = 1.0 - float(np.sum(w * r * r)) / sst if sst > 0 else float("nan")
    return LineFit(slope=float(coef[1]), intercept=float(coef[0]),
                   slope_se=float(np.sqrt(cov[1, 1])), intercept_se=float(np.sqrt(cov[0, 0])),
                   r2=r2, n=n, cov=cov, residual_sd=float(np.sqrt(s2)))


def line_problem(x, y, *, name: str = "line", sigma=None, slope_name: str = "slope",
                 intercept_name: str = "intercept", slope_unit: str = "1",
                 intercept_unit: str = "1", slope_prior=None, intercept_prior=None,
                 provenance: dict | None = None) -> FitProblem:
    """A straight line as a :class:`FitProblem` for the emcee engine.

    Parameters
    ----------
    x, y : array_like of shape (n,)
    sigma : float or array_like, optional
        Known SD of each y (for example carried in from the spread of each
        point's own posterior); estimated when None.
    slope_prior, intercept_prior : prior, optional
        Default: wide uniform priors centred on the least-squares line
        (+-50 standard errors, and at least +-10 x its magnitude).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    ok = np.isfinite(x) & np.isfinite(y)
    x, y = x[ok], y[ok]
    sig = None if sigma is None else np.broadcast_to(np.asarray(sigma, dtype=float), ok.shape)[ok]
    ls = fit_line(x, y, weights=None if sig is None else 1 / sig**2, where=name)

    def wide(centre, se):
        half = max(50 * se if np.isfinite(se) else 0.0, 10 * abs(centre), 1e-6)
        return Uniform(centre - half, centre + half)

    sp = slope_prior or wide(ls.slope, ls.slope_se)
    ip = intercept_prior or wide(ls.intercept, ls.intercept_se)
    if isinstance(sp, Normal) or not (sp.support[0] <= ls.slope <= sp.support[1]):
        s_start = float(np.clip(ls.slope, *sp.support))
    else:
        s_start = ls.slope
    i_start = float(np.clip(ls.intercept, *ip.support))
    linear = (Parameter(intercept_name, intercept_unit, ip, i_start),
              Parameter(slope_name, slope_unit, sp, s_start))
    basis = LineBasis(np.vstack([np.ones_like(x), x]))

    return FitProblem(name=name, parameters=(), basis=basis, linear=linear, data=y,
                      noise="estimate" if sig is None else sig,
                      provenance={"model": f"{intercept_name} + {slope_name} * x",
                                  **(provenance or {})})
