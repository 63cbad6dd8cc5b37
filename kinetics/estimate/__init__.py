"""Estimation engine shared by every model.

Two loops, written once:

* :func:`fit_least_squares` — scipy's trust-region least squares, with the
  covariance from the Jacobian; the fast answer and the sampler's start.
* :func:`sample_posterior` — an emcee ensemble (differential-evolution moves,
  vectorised over walkers), run until the chain is long compared with its
  integrated autocorrelation time.

A model plugs in through a :class:`FitProblem`: parameters with priors, a
vectorised ``predict`` and the data.  Derived quantities are computed per
posterior draw and summarised with :func:`summarise`.
"""

from .least_squares import LeastSquaresResult, fit_least_squares
from .linear import LineFit, fit_line, line_problem
from .posterior import Diagnostics, Posterior, sample_posterior
from .problem import FitProblem
from .summary import interval_columns, summarise

__all__ = [
    "FitProblem", "LeastSquaresResult", "fit_least_squares", "Posterior", "Diagnostics",
    "sample_posterior", "summarise", "interval_columns", "LineFit", "fit_line", "line_problem",
]
