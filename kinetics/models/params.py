"""Parameter descriptions and priors, in physical units.

A model is a pure function plus a tuple of :class:`Parameter` objects; the
estimation engine (:mod:`kinetics.estimate`) needs nothing else. Priors are
weakly informative, written in the units of the parameter, vectorised
(``logpdf`` takes any array) and describe themselves for reports.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import CrystkinInputError

__all__ = ["Uniform", "LogUniform", "Normal", "Parameter", "Prior"]


def _check_bounds(lower, upper, what):
    if not (np.isfinite(lower) or lower == -np.inf) or not (np.isfinite(upper) or upper == np.inf):
        raise CrystkinInputError(f"{what}: bounds must be numbers, got ({lower}, {upper})")
    if not lower < upper:
        raise CrystkinInputError(
            f"{what}: lower bound must be below upper bound, got ({lower}, {upper})")


@dataclass(frozen=True)
class Uniform:
    """Flat prior on [lower, upper]."""

    lower: float
    upper: float

    def __post_init__(self):
        _check_bounds(self.lower, self.upper, "Uniform prior")

    @property
    def support(self):
        return float(self.lower), float(self.upper)

    def logpdf(self, x):
        x = np.asarray(x, dtype=float)
        inside = (x >= self.lower) & (x <= self.upper)
        width = self.upper - self.lower
        return np.where(inside, -np.log(width) if np.isfinite(width) else 0.0, -np.inf)

    def sample(self, rng, size):
        return rng.uniform(self.lower, self.upper, size)

    def describe(self) -> str:
        return f"uniform({self.lower:.4g}, {self.upper:.4g})"


@dataclass(frozen=True)
class LogUniform:
    """Scale-invariant prior p(x) ∝ 1/x on [lower, upper], lower > 0."""

    lower: float
    upper: float

    def __post_init__(self):
        _check_bounds(self.lower, self.upper, "LogUniform prior")
        if not self.lower > 0:
            raise CrystkinInputError(f"LogUniform prior needs lower > 0, got {self.lower}")

    @property
    def support(self):
        return float(self.lower), float(self.upper)

    def logpdf(self, x):
        x = np.asarray(x, dtype=float)
        inside = (x >= self.lower) & (x <= self.upper)
        norm = np.log(np.log(self.upper / self.lower))
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(inside, -np.log(np.where(inside, x, 1.0)) - norm, -np.inf)

    def sample(self, rng, size):
        return np.exp(rng.uniform(np.log(self.lower), np.log(self.upper), size))

    def describe(self) -> str:
        return f"log-uniform({self.lower:.4g}, {self.upper:.4g})"


@dataclass(frozen=True)
class Normal:
    """Gaussian prior N(mu, sd), optionally truncated to [lower, upper]."""

    mu: float
    sd: float
    lower: float = -np.inf
    upper: float = np.inf

    def __post_init__(self):
        if not self.sd > 0:
            raise CrystkinInputError(f"Normal prior needs sd > 0, got {self.sd}")
        _check_bounds(self.lower, self.upper, "Normal prior")

    @property
    def support(self):
        return float(self.lower), float(self.upper)

    def logpdf(self, x):
        x = np.asarray(x, dtype=float)
        inside = (x >= self.lower) & (x <= self.upper)
        z = (x - self.mu) / self.sd
        return np.where(inside, -0.5 * z * z - np.log(self.sd * np.sqrt(2 * np.pi)), -np.inf)

    def sample(self, rng, size):
        out = rng.normal(self.mu, self.sd, size)
        return np.clip(out, self.lower, self.upper)

    def describe(self) -> str:
        s = f"normal({self.mu:.4g}, sd {self.sd:.4g})"
        if np.isfinite(self.lower) or np.isfinite(self.upper):
            s += f" on [{self.lower:.4g}, {self.upper:.4g}]"
        return s


Prior = Uniform | LogUniform | Normal


@dataclass(frozen=True)
class Parameter:
    """One model parameter: name, unit, prior and an optional start value.

    Parameters
    ----------
    name : str
        Identifier used in tables (``n``, ``t_half``, ``Kg``).
    unit : str
        SI unit of the value, for reports (``"s"``, ``"K^2"``, ``"1"``).
    prior : Uniform, LogUniform or Normal
    start : float, optional
        Starting value for least squares; must lie inside the prior's support.
    description : str
    nuisance : bool
        True for baseline, transient and noise terms (kept out of headline tables).
    """

    name: str
    unit: str
    prior: Prior
    start: float | None = None
    description: str = ""
    nuisance: bool = False

    def __post_init__(self):
        if self.start is not None:
            lo, hi = self.prior.support
            if not (lo <= self.start <= hi):
                raise CrystkinInputError(
                    f"start value {self.start:g} of parameter '{self.name}' lies outside its "
                    f"prior {self.prior.describe()}; widen the prior or change the start")

    def with_start(self, value: float) -> Parameter:
        lo, hi = self.prior.support
        span = hi - lo
        eps = 1e-9 * (span if np.isfinite(span) else max(abs(value), 1.0))
        return Parameter(self.name, self.unit, self.prior,
                         float(np.clip(value, lo + eps, hi - eps)), self.description, self.nuisance)
