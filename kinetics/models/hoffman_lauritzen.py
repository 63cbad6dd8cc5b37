"""Hoffman–Lauritzen rate functions (pure, vectorised).

    G(T) = G0 exp[-U* / (R (T - T_inf))] exp[-Kg / (T dT f)],
    dT = Tm0 - T,  f = 2 T / (Tm0 + T)

The same form serves the spherulite growth rate G (m/s) and the overall rate
1/t_half or the Nakamura K (1/s): only the unit of the prefactor changes. The
prefactor is passed as its natural logarithm, ``ln_prefactor = ln G0``.

The effective activation energy of a rate of this form is

    E(T) = -R d ln G / d(1/T)
         = U* T^2 / (T - T_inf)^2 + Kg R (Tm0^2 - T^2 - Tm0 T) / ((Tm0 - T)^2 T)

(Vyazovkin & Sbirrazzuoli 2004), negative close to Tm0 and tending to -inf there.

References
----------
Hoffman & Miller, Polymer 38 (1997) 3151 (from memory).
Vyazovkin & Sbirrazzuoli, Macromol. Rapid Commun. 25 (2004) 733 (from memory).
"""

from __future__ import annotations

import numpy as np
from scipy.constants import R

__all__ = ["hl_ln_rate", "hl_rate", "hl_half_time", "hl_activation_energy"]


def _domain(T, T_inf, Tm0):
    return (T > T_inf) & (T < Tm0)


def hl_ln_rate(T, *, ln_prefactor, Kg, U_star, T_inf, Tm0):
    """Natural logarithm of the Hoffman–Lauritzen rate.

    Parameters
    ----------
    T : array_like, K
        Crystallization temperature.
    ln_prefactor : array_like
        ln G0 (G0 in the unit of the rate: m/s for G, 1/s for 1/t_half or K).
    Kg : array_like, K^2
        Nucleation constant.
    U_star : array_like, J/mol
        Activation energy of segmental transport (commonly 6276 J/mol).
    T_inf : array_like, K
        Temperature at which transport stops (commonly Tg - 30 K).
    Tm0 : array_like, K
        Equilibrium melting temperature.

    Returns
    -------
    ndarray
        ln G; -inf outside T_inf < T < Tm0 (no crystallization there).

    Notes
    -----
    ln G = ln G0 - U*/(R (T - T_inf)) - Kg (Tm0 + T) / (2 T^2 (Tm0 - T)).
    """
    T = np.asarray(T, dtype=float)
    ok = _domain(T, T_inf, Tm0)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        dT = Tm0 - T
        f = 2.0 * T / (Tm0 + T)
        val = ln_prefactor - U_star / (R * (T - T_inf)) - Kg / (T * dT * f)
    return np.where(ok, val, -np.inf)


def hl_rate(T, *, ln_prefactor, Kg, U_star, T_inf, Tm0):
    """Hoffman–Lauritzen rate G(T) in the unit of exp(ln_prefactor); 0 outside its domain.

    See :func:`hl_ln_rate` for parameters and the equation.
    """
    return np.exp(hl_ln_rate(T, ln_prefactor=ln_prefactor, Kg=Kg, U_star=U_star, T_inf=T_inf,
                             Tm0=Tm0))


def hl_half_time(T, *, ln_prefactor, Kg, U_star, T_inf, Tm0):
    """Half-time form: t_half(T) = 1 / G(T) with ``ln_prefactor = ln (1/t_half)_0``, s.

    Notes
    -----
    1/t_half = (1/t_half)_0 exp[-U*/(R (T - T_inf))] exp[-Kg/(T dT f)]; infinite
    outside T_inf < T < Tm0.
    """
    return np.exp(-hl_ln_rate(T, ln_prefactor=ln_prefactor, Kg=Kg, U_star=U_star, T_inf=T_inf,
                              Tm0=Tm0))


def hl_activation_energy(T, *, U_star, T_inf, Kg, Tm0):
    """Effective activation energy E(T) of a Hoffman–Lauritzen rate, J/mol.

    Parameters
    ----------
    T : array_like, K
    U_star : array_like, J/mol
    T_inf : array_like, K
    Kg : array_like, K^2
    Tm0 : array_like, K

    Returns
    -------
    ndarray
        E(T) in J/mol; NaN outside T_inf < T < Tm0.

    Notes
    -----
    E(T) = -R d ln G / d(1/T)
         = U* T^2 / (T - T_inf)^2 + Kg R (Tm0^2 - T^2 - Tm0 T) / ((Tm0 - T)^2 T)
    (Vyazovkin & Sbirrazzuoli, Macromol. Rapid Commun. 25 (2004) 733). It is
    the isoconversional activation energy of any process whose rate at fixed
    conversion is proportional to G(T), for example a Nakamura K(T) of HL form.

    References
    ----------
    Vyazovkin, S.; Sbirrazzuoli, N. Macromol. Rapid Commun. 25 (2004) 733–738.
    """
    T = np.asarray(T, dtype=float)
    ok = _domain(T, T_inf, Tm0)
    with np.errstate(divide="ignore", invalid="ignore"):
        e = (U_star * T ** 2 / (T - T_inf) ** 2
             + Kg * R * (Tm0 ** 2 - T ** 2 - Tm0 * T) / ((Tm0 - T) ** 2 * T))
    return np.where(ok, e, np.nan)
