"""Growth theory, melting and crystallinity: pure, vectorised functions in SI units.

* Hoffman-Lauritzen in linearised form, regime constants, Thomas-Staveley sigma,
  work of chain folding, the isoconversional E(T) of the HL rate split into its terms
  (the rate itself and the full E(T) are in :mod:`kinetics.models.hoffman_lauritzen`);
* Hoffman-Weeks (linear and the Marand-Xu-Srinivas nonlinear form), Gibbs-Thomson;
* Bragg's law, scattering vector, long period, lamellar thickness;
* unit-cell volume and crystal density, two-phase density crystallinity, WAXD area
  crystallinity, mass <-> volume fraction;
* the two-stage (parallel Avrami) conversion of Velisaris and Seferis.

Every function broadcasts its arguments (parameters of shape (m, 1) against data of
shape (1, N)). Temperatures in K, energies in J/mol (molar) or J/m^2 / J/m^3
(surface / volumetric), lengths in m, angles in rad, densities in kg/m^3.
"""

from __future__ import annotations

import numpy as np

from ..constants import K_B, N_A, R
from .avrami import avrami_cell_rate, avrami_conversion

__all__ = [
    "REGIME_N", "regime_n", "hl_x", "hl_transport", "hl_coordinates",
    "kg_from_constants", "sigma_sigma_e_from_kg", "thomas_staveley_sigma", "fold_work",
    "hl_energy_terms", "hoffman_weeks_tm", "marand_tm", "gibbs_thomson_tm",
    "gibbs_thomson_thickness", "bragg_spacing", "bragg_angle", "scattering_vector",
    "long_period", "lamellar_thickness", "cell_volume", "crystal_density",
    "density_crystallinity", "density_volume_crystallinity", "waxd_crystallinity",
    "mass_to_volume_fraction", "volume_to_mass_fraction", "volumetric_heat_of_fusion",
    "two_stage_conversion", "two_stage_cell_rate",
]

#: Nucleation-constant factor n of Kg in each growth regime (4 in I and III, 2 in II).
REGIME_N = {"I": 4.0, "II": 2.0, "III": 4.0}


def _f(x):
    return np.asarray(x, dtype=float)


def regime_n(regime: str) -> float:
    """n of Kg = n b0 sigma sigma_e Tm0 / (dh_f k_B) for regime "I", "II" or "III"."""
    from ..errors import check_option
    check_option("regime", regime, tuple(REGIME_N), "regime_n")
    return REGIME_N[regime]


def hl_x(T_c, Tm0):
    """Abscissa of the Hoffman-Lauritzen plot, x = 1/(T_c dT f), 1/K^2.

    Parameters
    ----------
    T_c : array_like, K
        Crystallization temperature.
    Tm0 : array_like, K
        Equilibrium melting temperature.

    Returns
    -------
    ndarray, 1/K^2

    Notes
    -----
    dT = Tm0 - T_c, f = 2 T_c / (Tm0 + T_c), so x = (Tm0 + T_c) / (2 T_c^2 (Tm0 - T_c)).
    x increases with T_c for T_c > 0.618 Tm0 (every practical case).

    References
    ----------
    Hoffman & Miller, Polymer 38 (1997) 3151; the plot of ln G + U*/R(T - T_inf)
    against (T + Tm0)/(2 T^2 dT) as in Zheng, Tanner & Fan, Injection Molding (Springer), p. 50.
    """
    T = _f(T_c)
    Tm = _f(Tm0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (Tm + T) / (2.0 * T * T * (Tm - T))


def hl_transport(T_c, U_star, T_inf):
    """Transport term U*/(R (T_c - T_inf)), dimensionless.

    Parameters
    ----------
    T_c : array_like, K
    U_star : array_like, J/mol
        Activation energy of segmental transport (usually 6276 J/mol = 1500 cal/mol).
    T_inf : array_like, K
        Temperature where transport stops (usually Tg - 30 K).
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return _f(U_star) / (R * (_f(T_c) - _f(T_inf)))


def hl_coordinates(T_c, ln_rate, *, Tm0, U_star, T_inf):
    """Coordinates of the linearised Hoffman-Lauritzen plot.

    Returns
    -------
    x : ndarray, 1/K^2
        1/(T_c dT f).
    y : ndarray
        ln(rate) + U*/(R (T_c - T_inf)); the line has slope -Kg and intercept ln G0.

    Notes
    -----
    From ln G = ln G0 - U*/(R(T_c - T_inf)) - Kg/(T_c dT f)
    (:func:`kinetics.models.hoffman_lauritzen.hl_ln_rate`; Hoffman & Miller 1997).
    """
    return hl_x(T_c, Tm0), _f(ln_rate) + hl_transport(T_c, U_star, T_inf)


def kg_from_constants(b0, sigma, sigma_e, Tm0, delta_hf, *, regime="II"):
    """Nucleation constant from molecular constants, K^2.

    Parameters
    ----------
    b0 : array_like, m
        Thickness of a crystal layer (stem layer).
    sigma, sigma_e : array_like, J/m^2
        Lateral and fold surface free energies.
    Tm0 : array_like, K
    delta_hf : array_like, J/m^3
        Heat of fusion per unit volume of crystal.
    regime : {"I", "II", "III"}

    Returns
    -------
    ndarray, K^2

    Notes
    -----
    Kg = n b0 sigma sigma_e Tm0 / (dh_f k_B), n = 4 in regimes I and III, 2 in II
    (Hoffman & Miller, Polymer 38 (1997) 3151; from memory).
    """
    return regime_n(regime) * _f(b0) * _f(sigma) * _f(sigma_e) * _f(Tm0) / (_f(delta_hf) * K_B)


def sigma_sigma_e_from_kg(Kg, b0, Tm0, delta_hf, *, regime="II"):
    """Product of the surface free energies from Kg, J^2/m^4.

    Notes
    -----
    sigma sigma_e = Kg dh_f k_B / (n b0 Tm0), the inverse of :func:`kg_from_constants`.
    """
    return _f(Kg) * _f(delta_hf) * K_B / (regime_n(regime) * _f(b0) * _f(Tm0))


def thomas_staveley_sigma(delta_hf, a0, b0, *, alpha=0.1):
    """Lateral surface free energy by the Thomas-Staveley relation, J/m^2.

    Parameters
    ----------
    delta_hf : array_like, J/m^3
    a0, b0 : array_like, m
        Stem width and layer thickness.
    alpha : float
        Empirical constant, 0.1 by default (from memory); Chen & Chung argue 0.25 for PEEK.

    Notes
    -----
    sigma = alpha dh_f (a0 b0)^(1/2).

    References
    ----------
    Thomas & Staveley, J. Chem. Soc. 1952, 4569 (from memory).
    """
    return _f(alpha) * _f(delta_hf) * np.sqrt(_f(a0) * _f(b0))


def fold_work(sigma_e, a0, b0):
    """Work of chain folding, J per fold.

    Notes
    -----
    q = 2 a0 b0 sigma_e (Hoffman & Miller 1997); multiply by N_A for J per mole of folds.
    """
    return 2.0 * _f(a0) * _f(b0) * _f(sigma_e)


def hl_energy_terms(T, *, Tm0, T_inf):
    """The two terms of the effective activation energy of a Hoffman-Lauritzen rate.

    Parameters
    ----------
    T : array_like, K
    Tm0, T_inf : array_like, K

    Returns
    -------
    u : ndarray, dimensionless
        T^2/(T - T_inf)^2, the factor of U*.
    g : ndarray, J/(mol K^2)
        R (Tm0^2 - T^2 - Tm0 T) / ((Tm0 - T)^2 T), the factor of Kg.

    Notes
    -----
    E(T) = -R d ln G / d(1/T) = U* u + Kg g
    (Vyazovkin & Sbirrazzuoli, Macromol. Rapid Commun. 25 (2004) 733; from memory,
    derivative checked numerically). E is negative near Tm0. The split into the two
    factors is what the linear fit of Kg (and U*) needs; the full E(T) is
    :func:`kinetics.models.hoffman_lauritzen.hl_activation_energy`.
    """
    T = _f(T)
    Tm = _f(Tm0)
    with np.errstate(divide="ignore", invalid="ignore"):
        u = T * T / (T - _f(T_inf)) ** 2
        g = R * (Tm * Tm - T * T - Tm * T) / ((Tm - T) ** 2 * T)
    return u, g


def hoffman_weeks_tm(T_c, Tm0, gamma):
    """Observed melting temperature of the linear Hoffman-Weeks relation, K.

    Notes
    -----
    Tm = Tm0 (1 - 1/gamma) + T_c/gamma, gamma = l/l* the thickening ratio
    (Hoffman & Weeks, J. Res. NBS 66A (1962) 13; from memory). Tm = Tc at Tm0.
    """
    g = _f(gamma)
    return _f(Tm0) * (1.0 - 1.0 / g) + _f(T_c) / g


def marand_tm(T_c, Tm0, gamma, a):
    """Observed melting temperature of the nonlinear Hoffman-Weeks form, K.

    Notes
    -----
    Tm0/(Tm0 - Tm) = gamma [Tm0/(Tm0 - T_c) + a], with a = dh_f C2 / (2 sigma_e) from
    l* = C1/dT + C2 (Marand, Xu & Srinivas, Macromolecules 31 (1998) 8219), so
    Tm = Tm0 - Tm0 / (gamma [Tm0/(Tm0 - T_c) + a]).
    """
    Tm = _f(Tm0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return Tm - Tm / (_f(gamma) * (Tm / (Tm - _f(T_c)) + _f(a)))


def gibbs_thomson_tm(thickness, Tm0, sigma_e, delta_hf):
    """Melting temperature of lamellae of a given thickness, K.

    Parameters
    ----------
    thickness : array_like, m
        Lamellar (crystal) thickness l.
    Tm0 : array_like, K
    sigma_e : array_like, J/m^2
    delta_hf : array_like, J/m^3

    Notes
    -----
    Tm = Tm0 [1 - 2 sigma_e / (dh_f l)] (Gibbs-Thomson; standard form).
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return _f(Tm0) * (1.0 - 2.0 * _f(sigma_e) / (_f(delta_hf) * _f(thickness)))


def gibbs_thomson_thickness(Tm, Tm0, sigma_e, delta_hf):
    """Lamellar thickness that melts at Tm, m (inverse of :func:`gibbs_thomson_tm`).

    Notes
    -----
    l = 2 sigma_e Tm0 / (dh_f (Tm0 - Tm)).
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return 2.0 * _f(sigma_e) * _f(Tm0) / (_f(delta_hf) * (_f(Tm0) - _f(Tm)))


def bragg_spacing(theta, wavelength, *, order=1):
    """Lattice spacing from Bragg's law, m.

    Parameters
    ----------
    theta : array_like, rad
        Bragg angle, half the scattering angle 2 theta.
    wavelength : array_like, m
    order : int
        Diffraction order n.

    Notes
    -----
    n lambda = 2 d sin(theta)  (NIST glossary), so d = n lambda / (2 sin theta).
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return _f(order) * _f(wavelength) / (2.0 * np.sin(_f(theta)))


def bragg_angle(spacing, wavelength, *, order=1):
    """Bragg angle theta of a spacing d, rad (NaN when n lambda > 2 d)."""
    with np.errstate(invalid="ignore"):
        return np.arcsin(_f(order) * _f(wavelength) / (2.0 * _f(spacing)))


def scattering_vector(theta, wavelength):
    """Magnitude of the scattering vector q = 4 pi sin(theta) / lambda, 1/m."""
    return 4.0 * np.pi * np.sin(_f(theta)) / _f(wavelength)


def long_period(q_peak):
    """Long period from the SAXS peak position, L = 2 pi / q*, m.

    Parameters
    ----------
    q_peak : array_like, 1/m
        Peak of the (Lorentz-corrected, I q^2) scattering curve.

    Notes
    -----
    L = 2 pi / q* is the Bragg spacing at the peak (q = 4 pi sin(theta)/lambda).
    The long period is the average repeat of stacked lamellae: crystal plus
    amorphous layer (IUPAC Gold Book).
    """
    with np.errstate(divide="ignore"):
        return 2.0 * np.pi / _f(q_peak)


def lamellar_thickness(long_period_m, volume_crystallinity):
    """Crystal (lamellar) thickness l = L phi_c, m, from the long period and the
    volume fraction crystallinity of the stacks (two-phase lamellar model)."""
    return _f(long_period_m) * _f(volume_crystallinity)


def cell_volume(a, b, c, alpha=np.pi / 2, beta=np.pi / 2, gamma=np.pi / 2):
    """Volume of a general (triclinic) unit cell, m^3.

    Parameters
    ----------
    a, b, c : array_like, m
    alpha, beta, gamma : array_like, rad
        Angles between b and c, a and c, a and b (90 degrees by default).

    Notes
    -----
    V = a b c (1 - cos^2 alpha - cos^2 beta - cos^2 gamma + 2 cos alpha cos beta cos gamma)^(1/2);
    orthorhombic V = a b c, monoclinic V = a b c sin(beta).
    """
    ca, cb, cg = np.cos(_f(alpha)), np.cos(_f(beta)), np.cos(_f(gamma))
    root = 1.0 - ca * ca - cb * cb - cg * cg + 2.0 * ca * cb * cg
    with np.errstate(invalid="ignore"):
        return _f(a) * _f(b) * _f(c) * np.sqrt(root)


def crystal_density(a, b, c, *, z, molar_mass, alpha=np.pi / 2, beta=np.pi / 2,
                    gamma=np.pi / 2):
    """Crystal density from the lattice parameters, kg/m^3.

    Parameters
    ----------
    a, b, c : array_like, m
    z : array_like
        Repeat units per cell.
    molar_mass : array_like, kg/mol
        Molar mass of one repeat unit.
    alpha, beta, gamma : array_like, rad

    Notes
    -----
    rho_c = z M / (N_A V), V from :func:`cell_volume`.
    """
    return _f(z) * _f(molar_mass) / (N_A * cell_volume(a, b, c, alpha, beta, gamma))


def density_crystallinity(rho, rho_c, rho_a):
    """Mass-fraction crystallinity from the sample density (two-phase model).

    Parameters
    ----------
    rho, rho_c, rho_a : array_like, kg/m^3
        Sample, crystal and amorphous densities.

    Notes
    -----
    X_c = rho_c (rho - rho_a) / (rho (rho_c - rho_a)).
    """
    r = _f(rho)
    rc = _f(rho_c)
    ra = _f(rho_a)
    return rc * (r - ra) / (r * (rc - ra))


def density_volume_crystallinity(rho, rho_c, rho_a):
    """Volume-fraction crystallinity from the sample density: (rho - rho_a)/(rho_c - rho_a)."""
    return (_f(rho) - _f(rho_a)) / (_f(rho_c) - _f(rho_a))


def waxd_crystallinity(area_crystalline, area_amorphous):
    """Crystallinity from WAXD peak areas, X_c = A_c / (A_c + A_a).

    Parameters
    ----------
    area_crystalline, area_amorphous : array_like
        Integrated intensities of the crystalline reflections and the amorphous halo
        (same unit).
    """
    ac = _f(area_crystalline)
    return ac / (ac + _f(area_amorphous))


def mass_to_volume_fraction(w_c, rho_c, rho_a):
    """Volume fraction crystallinity from the mass fraction.

    Notes
    -----
    V_c = W_c / [W_c + (rho_c/rho_a)(1 - W_c)]  (as used by Lorenzo et al.,
    Polym. Test. 26 (2007) 222; from memory).
    """
    w = _f(w_c)
    return w / (w + (_f(rho_c) / _f(rho_a)) * (1.0 - w))


def volume_to_mass_fraction(v_c, rho_c, rho_a):
    """Mass fraction from the volume fraction: W_c = rho_c V_c / (rho_c V_c + rho_a (1 - V_c))."""
    v = _f(v_c)
    return _f(rho_c) * v / (_f(rho_c) * v + _f(rho_a) * (1.0 - v))


def volumetric_heat_of_fusion(delta_h100, rho_c):
    """Heat of fusion per crystal volume, J/m^3, from the specific value (J/kg) and rho_c."""
    return _f(delta_h100) * _f(rho_c)


def two_stage_conversion(t, w2, n1, k1, n2, k2, t0=0.0):
    """Relative crystallinity of the two-stage (parallel Avrami) model.

    Parameters
    ----------
    t : array_like, s
    w2 : array_like
        Weight of the second (secondary) stage, 0 to 1; w1 = 1 - w2.
    n1, n2 : array_like
        Avrami exponents of the stages.
    k1, k2 : array_like, s^-n
        Rate constants of the stages.
    t0 : array_like, s
        Common induction time.

    Notes
    -----
    X = w1 [1 - exp(-k1 t^n1)] + w2 [1 - exp(-k2 t^n2)], w1 + w2 = 1
    (Velisaris & Seferis, Polym. Eng. Sci. 26 (1986) 1574; from memory).
    """
    w2 = _f(w2)
    return (1.0 - w2) * avrami_conversion(t, n1, k1, t0) + w2 * avrami_conversion(t, n2, k2, t0)


def two_stage_cell_rate(edges, w2, n1, k1, n2, k2, t0=0.0):
    """Mean conversion rate of the two-stage model over sampling intervals, 1/s
    (see :func:`kinetics.models.avrami.avrami_cell_rate`)."""
    w2 = _f(w2)
    return ((1.0 - w2) * avrami_cell_rate(edges, n1, k1, t0)
            + w2 * avrami_cell_rate(edges, n2, k2, t0))
