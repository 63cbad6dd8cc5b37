"""Classic nonisothermal descriptors: Ozawa, Mo, Jeziorny (and the Kissinger plot).

Pure, vectorised functions; the regressions that use them, with posteriors,
live in :mod:`kinetics.analyses.nonisothermal`. By convention of the published
methods the cooling rate beta is in K/min and times in min here, and Mo's and
Jeziorny's logarithms are decimal; Ozawa's plot uses natural logarithms.

    Ozawa     1 - X(T) = exp(-K(T) / beta^m)
              ln[-ln(1 - X)] = ln K(T) - m ln beta            (fixed T, across rates)
    Mo        log beta = log F(T) - a log t                    (fixed X, across rates)
              F(T) = [K(T)/Zt]^(1/m), a = n/m
    Jeziorny  ln[-ln(1 - X)] = ln Zt + n ln t,  t = (T_onset - T)/beta   (one run)
              log Zc = log Zt / beta
    Kissinger ln(beta / Tp^2) = const - E / (R Tp)

References
----------
Ozawa, T. Polymer 12 (1971) 150–158 (from memory).
Liu, Mo, Wang, Zhang, Polym. Eng. Sci. 37 (1997) 568–575 (from memory).
Jeziorny, A. Polymer 19 (1978) 1142–1144 (from memory).
Vyazovkin, S. Polymers 15 (2023) 197: the Jeziorny correction has no kinetic
meaning and its slope is not the isothermal n.
Kissinger, H. E. Anal. Chem. 29 (1957) 1702 (volume and pages from memory);
unsound for processes on cooling: Vyazovkin, Macromol. Rapid Commun. 23 (2002)
771 (from memory); Molecules 25 (2020) 2813.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "ozawa_conversion", "ozawa_linearised", "double_log", "mo_log_beta", "mo_linearised",
    "jeziorny_time", "jeziorny_log_Zc", "kissinger_linearised",
]


def double_log(X):
    """y = ln[-ln(1 - X)], the Avrami/Ozawa ordinate (NaN outside 0 < X < 1)."""
    X = np.asarray(X, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        y = np.log(-np.log1p(-X))
    return np.where((X > 0) & (X < 1), y, np.nan)


def ozawa_conversion(K_T, beta, m):
    """X(T) = 1 - exp(-K(T) / beta^m).

    Parameters
    ----------
    K_T : array_like, (K/min)^m
        Ozawa cooling function at the temperature of interest.
    beta : array_like, K/min
        Cooling rate (positive).
    m : array_like
        Ozawa exponent, dimensionless.

    Notes
    -----
    Ozawa, Polymer 12 (1971) 150.
    """
    return -np.expm1(-np.asarray(K_T, dtype=float) / np.power(beta, m))


def ozawa_linearised(X, beta):
    """Ozawa plot coordinates at one temperature.

    Returns
    -------
    x, y : ndarray
        x = ln beta (beta in K/min), y = ln[-ln(1 - X)]; slope -m, intercept ln K(T).
    """
    return np.log(np.asarray(beta, dtype=float)), double_log(X)


def mo_log_beta(t, *, log_F, a):
    """log10 beta = log10 F(T) - a log10 t (beta in K/min, t in min).

    Notes
    -----
    Liu, Mo, Wang, Zhang, Polym. Eng. Sci. 37 (1997) 568; obtained by equating
    the Avrami and Ozawa forms at one conversion, with F = (K/Zt)^(1/m), a = n/m.
    """
    return log_F - a * np.log10(np.asarray(t, dtype=float))


def mo_linearised(beta, t):
    """Mo plot coordinates at one conversion.

    Returns
    -------
    x, y : ndarray
        x = log10 t (t in min, time from the onset to the conversion),
        y = log10 beta (K/min); slope -a, intercept log10 F(T).
    """
    return np.log10(np.asarray(t, dtype=float)), np.log10(np.asarray(beta, dtype=float))


def jeziorny_time(T, *, T_onset, beta):
    """Time since onset of a constant-rate cooling run: t = (T_onset - T)/beta.

    Parameters
    ----------
    T, T_onset : array_like, K
    beta : array_like, K/s or K/min
        The time unit of the result is that of ``beta``.
    """
    return (np.asarray(T_onset, dtype=float) - np.asarray(T, dtype=float)) / beta


def jeziorny_log_Zc(log_Zt, beta_K_per_min):
    """Jeziorny's rate correction log Zc = log Zt / beta (beta in K/min).

    The relation holds in any logarithm base (both sides scale alike), i.e.
    Zc = Zt^(1/beta). It is an empirical descriptor only: Vyazovkin, Polymers
    15 (2023) 197 shows that dividing by beta has no kinetic meaning.

    References
    ----------
    Jeziorny, A. Polymer 19 (1978) 1142 (from memory).
    """
    return np.asarray(log_Zt, dtype=float) / np.asarray(beta_K_per_min, dtype=float)


def kissinger_linearised(beta, T_peak):
    """Kissinger plot coordinates: x = 1/Tp (1/K), y = ln(beta/Tp^2) (beta in K/min).

    Slope -E/R. Unsound for processes on cooling (Vyazovkin, Molecules 25 (2020)
    2813: "the assumption of heating is embedded in the final equation").
    """
    Tp = np.asarray(T_peak, dtype=float)
    return 1.0 / Tp, np.log(np.asarray(beta, dtype=float) / Tp ** 2)
