"""Avrami (Johnson–Mehl–Avrami–Kolmogorov) kinetics of isothermal crystallization.

    X(t) = 1 - exp(-k (t - t0)^n),      t > t0,  X = 0 otherwise
    t_half = (ln 2 / k)^(1/n)

k has units time^-n, so it is only comparable between runs of equal n; the
half-time, or K = k^(1/n) in 1/time, is the comparable rate.

References
----------
Avrami, M. J. Chem. Phys. 7, 1103 (1939); 8, 212 (1940); 9, 177 (1941).
Kolmogorov, A. N. Izv. Akad. Nauk SSSR 3, 355 (1937).
IUPAC Gold Book, "Avrami equation" (A00545).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "avrami_conversion", "avrami_rate", "avrami_half_time", "avrami_k_from_half_time",
    "avrami_cell_rate", "avrami_peak_time", "avrami_linearised", "AVRAMI_EXPONENTS",
]

LN2 = np.log(2.0)

#: Theoretical Avrami exponents for interface-controlled growth, by growth
#: geometry and nucleation type (diffusion-controlled growth in the second
#: entry).  Sphere row: Kennedy & Zheng, Flow Analysis of Injection Molds, p. 143
#: (n = 3 instantaneous, n = 4 constant-rate nucleation).  Disc and rod rows
#: from memory (Wunderlich, Macromolecular Physics vol. 2, 1976).
AVRAMI_EXPONENTS = {
    ("sphere", "athermal"): (3.0, 1.5), ("sphere", "thermal"): (4.0, 2.5),
    ("disc", "athermal"): (2.0, 1.0), ("disc", "thermal"): (3.0, 2.0),
    ("rod", "athermal"): (1.0, 0.5), ("rod", "thermal"): (2.0, 1.5),
}


def _elapsed(t, t0):
    return np.clip(np.asarray(t, dtype=float) - t0, 0.0, None)


def avrami_conversion(t, n, k, t0=0.0):
    """Relative crystallinity X(t) of the Avrami model.

    Parameters
    ----------
    t : array_like, s
        Time (any consistent unit; k must be in that unit^-n).
    n : array_like
        Avrami exponent, dimensionless.
    k : array_like, s^-n
        Overall rate constant.
    t0 : array_like, s
        Induction time; X = 0 for t <= t0.

    Returns
    -------
    ndarray
        X in [0, 1], broadcast shape of the inputs.

    Notes
    -----
    X = 1 - exp(-k (t - t0)^n)  (Avrami, J. Chem. Phys. 1939).
    """
    with np.errstate(over="ignore", invalid="ignore"):
        return -np.expm1(-k * _elapsed(t, t0) ** n)


def avrami_rate(t, n, k, t0=0.0):
    """Conversion rate dX/dt of the Avrami model, 1/s.

    Notes
    -----
    dX/dt = n k (t - t0)^(n-1) exp(-k (t - t0)^n); zero for t <= t0.
    Diverges at t0 for n < 1; use :func:`avrami_cell_rate` on sampled data.
    """
    tau = _elapsed(t, t0)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = n * k * np.where(tau > 0, tau, np.inf) ** (n - 1.0) * np.exp(-k * tau ** n)
    return np.where(tau > 0, np.nan_to_num(r, nan=0.0, posinf=0.0), 0.0)


def avrami_cell_rate(edges, n, k, t0=0.0):
    """Mean conversion rate over each sampling interval, 1/s.

    Parameters
    ----------
    edges : array of shape (N + 1,), s
        Interval edges (for samples at t_i, the midpoints between samples).

    Returns
    -------
    ndarray of shape (..., N)
        [X(edge_{i+1}) - X(edge_i)] / (edge_{i+1} - edge_i).

    Notes
    -----
    The cell average is what a sampled, low-pass filtered calorimeter signal
    measures, and unlike the instantaneous rate it stays finite for n < 1.
    """
    edges = np.asarray(edges, dtype=float)
    X = avrami_conversion(edges, n, k, t0)
    return np.diff(X, axis=-1) / np.diff(edges)


def avrami_half_time(n, k):
    """Half-time t_half = (ln 2 / k)^(1/n), in the time unit of k.

    Notes
    -----
    From X(t_half) = 1/2 in X = 1 - exp(-k t^n) (Avrami 1939).
    """
    return (LN2 / np.asarray(k, dtype=float)) ** (1.0 / np.asarray(n, dtype=float))


def avrami_k_from_half_time(n, t_half):
    """Rate constant from exponent and half-time: k = ln 2 / t_half^n (time^-n)."""
    with np.errstate(over="ignore", divide="ignore"):
        return LN2 / np.asarray(t_half, dtype=float) ** np.asarray(n, dtype=float)


def avrami_peak_time(n, k, t0=0.0):
    """Time of maximum conversion rate: t0 + ((n - 1)/(n k))^(1/n) for n > 1, else t0.

    Notes
    -----
    From d2X/dt2 = 0 for X = 1 - exp(-k t^n).
    """
    n = np.asarray(n, dtype=float)
    k = np.asarray(k, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        tp = np.where(n > 1, ((n - 1.0) / (n * k)) ** (1.0 / n), 0.0)
    return t0 + tp


def avrami_linearised(t, X, t0=0.0):
    """Coordinates of the double-logarithmic Avrami plot.

    Returns
    -------
    x, y : ndarray
        x = ln(t - t0), y = ln(-ln(1 - X)); slope n, intercept ln k.
    """
    tau = np.asarray(t, dtype=float) - t0
    X = np.asarray(X, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log(tau), np.log(-np.log1p(-X))
