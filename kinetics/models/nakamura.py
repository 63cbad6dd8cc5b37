"""Nakamura kinetics: the Avrami model extended to a changing temperature.

    theta(t) = integral_0^t K(T(s)) ds
    X(t)     = 1 - exp(-theta(t)^n)
    dX/dt    = n K(T) (1 - X) [-ln(1 - X)]^((n - 1)/n)

K(T) = k(T)^(1/n) = (ln 2)^(1/n) / t_half(T) is the isokinetic rate constant, 1/s,
with k the Avrami rate constant of an isothermal hold at T. The integral is
evaluated as a cumulative trapezoidal sum on the run's own time grid, so any
temperature programme (cooling, holds, measured profiles) is handled alike.

At a constant cooling rate beta from T0, theta(T) = (1/beta) integral_T^T0 K(T') dT',
so 1 - X(T) = exp(-K_oz(T) / beta^n) with K_oz(T) = (integral_T^T0 K dT')^n: a
constant-rate Nakamura run is exactly of Ozawa form with m = n.

References
----------
Nakamura, Watanabe, Katayama, Amano, J. Appl. Polym. Sci. 16 (1972) 1077 (from memory).
Nakamura, Katayama, Amano, J. Appl. Polym. Sci. 17 (1973) 1031 (from memory).
Ozawa, Polymer 12 (1971) 150 (from memory).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "nakamura_integral", "nakamura_conversion", "nakamura_rate", "nakamura_from_profile",
    "nakamura_K_from_half_time", "nakamura_half_time", "nakamura_constant_rate",
    "ozawa_K_from_nakamura",
]

LN2 = np.log(2.0)


def _cumtrapz(y, x):
    y = np.asarray(y, dtype=float)
    x = np.asarray(x, dtype=float)
    inc = 0.5 * (y[..., 1:] + y[..., :-1]) * np.diff(x)
    out = np.zeros(np.broadcast_shapes(y.shape, x.shape))
    np.cumsum(inc, axis=-1, out=out[..., 1:])
    return out


def nakamura_integral(t, K):
    """Running integral theta(t) = integral_{t_0}^t K ds on a sampled grid.

    Parameters
    ----------
    t : array of shape (N,), s
        Increasing time grid.
    K : array of shape (..., N), 1/s
        K(T(t_i)) on the grid; leading axes (walkers) broadcast.

    Returns
    -------
    ndarray of shape (..., N)
        theta, dimensionless, 0 at t_0 (trapezoidal rule).
    """
    return _cumtrapz(K, t)


def nakamura_conversion(t, K, n, *, theta0=0.0):
    """Relative crystallinity of the Nakamura model on a sampled grid.

    Parameters
    ----------
    t : array of shape (N,), s
    K : array of shape (..., N), 1/s
        Isokinetic rate constant K(T(t_i)) at every sample.
    n : array_like, broadcasting as (..., 1)
        Avrami exponent, dimensionless.
    theta0 : array_like
        theta already accumulated at t_0 (0 for a run that starts in the melt).

    Returns
    -------
    ndarray of shape (..., N)
        X in [0, 1].

    Notes
    -----
    X = 1 - exp(-theta^n), theta = theta0 + integral K dt (Nakamura et al. 1972).
    """
    theta = theta0 + nakamura_integral(t, K)
    return -np.expm1(-np.power(theta, n))


def nakamura_rate(t, K, n, *, theta0=0.0):
    """Conversion rate dX/dt of the Nakamura model, 1/s.

    Notes
    -----
    dX/dt = n K theta^(n-1) exp(-theta^n); zero where theta = 0 for n > 1.
    """
    K = np.asarray(K, dtype=float)
    theta = theta0 + nakamura_integral(t, K)
    n = np.asarray(n, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = n * K * np.where(theta > 0, theta, np.inf) ** (n - 1.0) * np.exp(-theta ** n)
    return np.where(theta > 0, np.nan_to_num(r, nan=0.0, posinf=0.0), 0.0)


def nakamura_from_profile(t, T, n, K_of_T, *, theta0=0.0):
    """X(t) for a temperature profile T(t) and a rate function K(T).

    Parameters
    ----------
    t : array of shape (N,), s
    T : array of shape (N,), K
    n : array_like
    K_of_T : callable
        Vectorised K(T) in 1/s.

    Returns
    -------
    ndarray
        X on the grid (see :func:`nakamura_conversion`).
    """
    return nakamura_conversion(t, K_of_T(np.asarray(T, dtype=float)), n, theta0=theta0)


def nakamura_K_from_half_time(n, t_half):
    """K = (ln 2)^(1/n) / t_half, 1/s (from X(t_half) = 1/2 at constant T)."""
    n = np.asarray(n, dtype=float)
    return LN2 ** (1.0 / n) / np.asarray(t_half, dtype=float)


def nakamura_half_time(n, K):
    """Isothermal half-time t_half = (ln 2)^(1/n) / K, s."""
    n = np.asarray(n, dtype=float)
    return LN2 ** (1.0 / n) / np.asarray(K, dtype=float)


def _temperature_integral(T, *, T0, K_of_T, n_grid):
    """I(T) = integral_T^T0 K(T') dT' (K x 1/s) on a fine grid, interpolated at T."""
    T = np.asarray(T, dtype=float)
    lo = float(np.min(T))
    grid = np.linspace(lo, float(T0), int(n_grid))
    Kg = np.asarray(K_of_T(grid), dtype=float)
    cum = _cumtrapz(Kg, grid)
    I_grid = cum[-1] - cum
    return np.interp(T, grid, I_grid)


def nakamura_constant_rate(T, *, T0, beta, n, K_of_T, n_grid=20001):
    """X(T) of a run cooled at a constant rate from T0 (in the melt, X = 0).

    Parameters
    ----------
    T : array_like, K
        Temperatures at or below T0.
    T0 : float, K
        Start of the cooling ramp.
    beta : float, K/s
        Cooling rate (positive).
    n : float
    K_of_T : callable
        Vectorised K(T), 1/s.
    n_grid : int
        Points of the temperature grid for the integral.

    Returns
    -------
    ndarray
        X at ``T``.

    Notes
    -----
    X = 1 - exp(-[(1/beta) integral_T^T0 K(T') dT']^n) (Nakamura et al. 1972;
    at constant rate this is Ozawa's 1 - exp(-K_oz(T)/beta^n), Ozawa 1971).
    """
    integral = _temperature_integral(T, T0=T0, K_of_T=K_of_T, n_grid=n_grid)
    return -np.expm1(-np.power(integral / float(beta), n))


def ozawa_K_from_nakamura(T, *, T0, n, K_of_T, n_grid=20001):
    """Ozawa's cooling function K_oz(T) = (integral_T^T0 K(T') dT')^n, (K/s)^n.

    Notes
    -----
    With beta in K/min instead of K/s, multiply by 60^n.
    """
    integral = _temperature_integral(T, T0=T0, K_of_T=K_of_T, n_grid=n_grid)
    return np.power(integral, n)
