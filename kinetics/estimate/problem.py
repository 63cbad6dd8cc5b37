"""The contract between a model and the estimation engine.

A model enters the engine as a :class:`FitProblem`:

* nonlinear parameters (``parameters``) with priors in physical units;
* optionally, coefficients that enter linearly (``linear``: baselines, event
  areas, intercepts), described by a ``basis`` function;
* the data, and a Gaussian noise model: one unknown noise level per noise
  group (``noise="estimate"``) or known standard deviations.

Linear coefficients (flat priors) and unknown noise levels (scale-invariant
prior 1/sigma) are integrated out analytically in the posterior, so the sampler
only explores the nonlinear parameters; their values are then drawn from their
exact conditional distributions for every posterior draw (see
:mod:`kinetics.estimate.posterior`).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from ..errors import CrystkinInputError
from ..models.params import Parameter

__all__ = ["FitProblem"]


@dataclass(frozen=True)
class FitProblem:
    """A model bound to data.

    Parameters
    ----------
    name : str
        Label for messages and provenance (usually the run id).
    parameters : tuple of Parameter
        Nonlinear parameters, in the order the model functions expect them.
    data : array of shape (N,)
        Data, ordered so that each noise group is one contiguous block.
    predict : callable, optional
        ``predict(theta) -> mu``: theta of shape (m, p), returns (m, N).
        Used when the model has no linear coefficients.
    basis : callable, optional
        ``basis(theta) -> list`` of arrays of shape (m, L_g, N_g), one per
        noise group: mu_g = sum_l beta_gl * basis_g[:, l, :].
    linear : tuple of Parameter
        The linear coefficients beta, group after group (their priors are only
        used for start values and bounds in least squares; the posterior treats
        them as flat).
    linear_groups : tuple of int
        Number of linear coefficients of each noise group (default: all in group 0).
    noise : "estimate", float or array of shape (N,)
    noise_groups : array of int, shape (N,), optional
        Group index of each datum, non-decreasing; default one group.
    log_prior : callable, optional
        ``log_prior(theta (m, p)) -> (m,)``: a joint log prior density added to
        the parameters' own priors (for hierarchical priors, where one parameter
        sets the spread of others).
    prior_residuals : callable, optional
        ``prior_residuals(theta (m, p)) -> (m, k)``: a Gaussian stand-in for
        ``log_prior`` that least squares appends to its residuals (which
        otherwise ignore priors), so that it is not left with a direction the
        data alone do not fix.
    provenance : dict
    """

    name: str
    parameters: tuple[Parameter, ...]
    data: np.ndarray
    predict: Callable[[np.ndarray], np.ndarray] | None = None
    basis: Callable[[np.ndarray], list] | None = None
    linear: tuple[Parameter, ...] = ()
    linear_groups: tuple[int, ...] | None = None
    noise: str | float | np.ndarray = "estimate"
    noise_groups: np.ndarray | None = None
    log_prior: Callable[[np.ndarray], np.ndarray] | None = None
    prior_residuals: Callable[[np.ndarray], np.ndarray] | None = None
    provenance: dict = field(default_factory=dict)

    def __post_init__(self):
        y = np.asarray(self.data, dtype=float)
        if y.ndim != 1 or len(y) == 0 or not np.all(np.isfinite(y)):
            raise CrystkinInputError(f"{self.name}: data must be a finite 1-D array")
        object.__setattr__(self, "data", y)
        names = [p.name for p in (*self.parameters, *self.linear)]
        if len(set(names)) != len(names):
            raise CrystkinInputError(f"{self.name}: repeated parameter names {names}")
        if (self.predict is None) == (self.basis is None):
            raise CrystkinInputError(f"{self.name}: give exactly one of predict and basis")
        if self.basis is not None and not self.linear:
            raise CrystkinInputError(f"{self.name}: a basis needs its linear coefficients")
        if self.noise_groups is None:
            object.__setattr__(self, "noise_groups", np.zeros(len(y), dtype=int))
        g = np.asarray(self.noise_groups, dtype=int)
        if g.shape != y.shape or g.min() != 0 or np.any(np.diff(g) < 0) or np.any(np.diff(g) > 1):
            raise CrystkinInputError(
                f"{self.name}: noise_groups must be contiguous blocks numbered 0, 1, 2, ...")
        object.__setattr__(self, "noise_groups", g)
        if self.linear:
            lg = self.linear_groups or (len(self.linear),)
            if len(lg) != self.n_groups or sum(lg) != len(self.linear):
                raise CrystkinInputError(
                    f"{self.name}: linear_groups must give the number of coefficients of each "
                    "noise group")
            object.__setattr__(self, "linear_groups", tuple(int(v) for v in lg))
        if isinstance(self.noise, str):
            if self.noise != "estimate":
                raise CrystkinInputError(
                    f"The 'noise' parameter of FitProblem must be 'estimate', a number or an "
                    f"array. Got {self.noise!r} instead.")
        else:
            sd = np.broadcast_to(np.asarray(self.noise, dtype=float), y.shape)
            if not np.all(sd > 0):
                raise CrystkinInputError(f"{self.name}: known noise levels must be positive")

    @property
    def n_groups(self) -> int:
        return int(self.noise_groups[-1]) + 1

    @property
    def group_slices(self) -> list[slice]:
        edges = np.searchsorted(self.noise_groups, np.arange(self.n_groups + 1))
        return [slice(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:], strict=True)]

    @property
    def estimates_noise(self) -> bool:
        return isinstance(self.noise, str)

    @property
    def noise_sd(self) -> np.ndarray:
        """Known noise SD per datum (only for known noise)."""
        return np.broadcast_to(np.asarray(self.noise, dtype=float), self.data.shape)

    @property
    def names(self) -> tuple[str, ...]:
        """Nonlinear then linear parameter names (the full parameter vector)."""
        return tuple(p.name for p in (*self.parameters, *self.linear))

    @property
    def all_parameters(self) -> tuple[Parameter, ...]:
        return (*self.parameters, *self.linear)

    @property
    def noise_names(self) -> tuple[str, ...]:
        if self.n_groups == 1:
            return ("noise_sd",)
        return tuple(f"noise_sd_{g}" for g in range(self.n_groups))

    def predict_full(self, theta_full: np.ndarray) -> np.ndarray:
        """Expected data for full parameter vectors (nonlinear then linear), (m, N)."""
        theta_full = np.atleast_2d(theta_full)
        p = len(self.parameters)
        if self.basis is None:
            return self.predict(theta_full[:, :p])
        blocks = self.basis(theta_full[:, :p])
        out, j = [], p
        for B, L in zip(blocks, self.linear_groups, strict=True):
            out.append(np.einsum("mln,ml->mn", B, theta_full[:, j:j + L]))
            j += L
        return np.concatenate(out, axis=1)
