"""Equilibrium melting temperature: Hoffman-Weeks (linear and nonlinear) and Gibbs-Thomson.

* Hoffman-Weeks, linear: Tm = Tm0 (1 - 1/gamma) + Tc/gamma, extrapolated to Tm = Tc
  (Hoffman & Weeks, J. Res. NBS 66A (1962) 13);
* the nonlinear form of Marand, Xu & Srinivas (Macromolecules 31 (1998) 8219):
  Tm0/(Tm0 - Tm) = gamma [Tm0/(Tm0 - Tc) + a];
* Gibbs-Thomson: Tm = Tm0 [1 - 2 sigma_e/(dh_f l)] against the lamellar thickness l,
  with l from a SAXS long period times the crystallinity.

Every result carries the published caution that the linear extrapolation can
mislead: the Hoffman-Weeks plot is invalid for isotactic polypropylene, whose
Gibbs-Thomson Tm0 is 186.1 degC (Yamada et al., Macromolecules 36 (2003) 4802), and the
polyethylene plot curves at high Tc.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..constants import CU_KALPHA1
from ..errors import CrystkinInputError
from ..estimate import fit_least_squares, fit_line, interval_columns, line_problem, sample_posterior
from ..estimate.problem import FitProblem
from ..models.growth import (
    bragg_spacing,
    gibbs_thomson_tm,
    lamellar_thickness,
    long_period,
    marand_tm,
)
from ..models.params import Parameter, Uniform
from ..units import celsius

__all__ = ["EquilibriumMeltingFit", "hoffman_weeks", "marand_xu_srinivas", "gibbs_thomson",
           "lamellar_thickness_from_saxs", "melting_points", "HW_CAUTION"]

HW_CAUTION = ("The linear Hoffman-Weeks extrapolation can mislead: it is invalid for isotactic "
              "polypropylene (Yamada et al., Macromolecules 36 (2003) 4802, where Gibbs-Thomson "
              "gives Tm0 = 186.1 degC), and for polyethylene the plot curves at high Tc "
              "(Macromolecules 28 (1995) 3205). Prefer Gibbs-Thomson or the nonlinear form "
              "where lamellar thicknesses are available.")
MXS_CAUTION = ("The nonlinear form needs the thickening ratio gamma or the constant a from "
               "independent data (for example SAXS); with both free, Tm0 is often poorly "
               "determined and the interval says so.")


@dataclass(frozen=True)
class EquilibriumMeltingFit:
    """An equilibrium melting temperature with its posterior.

    Attributes
    ----------
    method : str
        "Hoffman-Weeks linear", "Hoffman-Weeks nonlinear (Marand-Xu-Srinivas)" or
        "Gibbs-Thomson".
    x : ndarray
        T_c (K) for Hoffman-Weeks, lamellar thickness l (m) for Gibbs-Thomson.
    T_m : ndarray, K
    draws : dict of str -> ndarray
        ``Tm0`` (K) and the method's other quantities (``gamma``, ``a``, ``sigma_e``).
    line : LineFit or None
        The classic least-squares line (linear methods).
    flags, cautions : tuple of str
    settings : dict
    group : str
    provenance : dict
    """

    method: str
    x: np.ndarray
    T_m: np.ndarray
    draws: dict
    line: object | None
    flags: tuple[str, ...] = ()
    cautions: tuple[str, ...] = ()
    settings: dict = field(default_factory=dict)
    group: str = "default"
    provenance: dict = field(default_factory=dict)

    @property
    def Tm0(self) -> np.ndarray:
        return self.draws["Tm0"]

    def table(self) -> pd.DataFrame:
        """One row: Tm0 (K and degC) and the method's parameters, median and 95 % interval."""
        r = {"group": self.group, "method": self.method, "n_points": len(self.T_m)}
        r.update(interval_columns("Tm0_K", self.draws["Tm0"]))
        r.update(interval_columns("Tm0_degC", celsius(self.draws["Tm0"])))
        for name, col in (("gamma", "gamma"), ("a", "a"), ("sigma_e", "sigma_e_J_per_m2")):
            r.update(interval_columns(col, self.draws.get(name, [np.nan])))
        r["fraction_valid"] = float(np.mean(np.isfinite(self.draws["Tm0"])))
        if self.line is not None:
            r["r2_linear"] = self.line.r2
        r["flags"] = "; ".join(self.flags)
        r["caution"] = " ".join(self.cautions)
        return pd.DataFrame([r])

    def band(self, x=None) -> pd.DataFrame:
        """Median and 95 % band of the fitted Tm against T_c (K) or thickness (m)."""
        if x is None:
            if self.method == "Gibbs-Thomson":
                x = np.linspace(self.x.min() * 0.8, self.x.max() * 1.5, 100)
            else:
                hi = float(np.nanmedian(self.draws["Tm0"]))
                hi = hi if np.isfinite(hi) else self.x.max()
                x = np.linspace(self.x.min() - 5, max(hi, self.x.max()), 100)
        x = np.asarray(x, dtype=float)
        d = self.draws
        tm0 = d["Tm0"][:, None]
        if self.method == "Gibbs-Thomson":
            y = gibbs_thomson_tm(x[None, :], tm0, d["sigma_e"][:, None], self.settings["delta_hf"])
        elif self.method.startswith("Hoffman-Weeks linear"):
            y = d["intercept"][:, None] + d["slope"][:, None] * x[None, :]
        else:
            y = marand_tm(x[None, :], tm0, d["gamma"][:, None], d["a"][:, None])
        q = np.nanquantile(y, [0.025, 0.5, 0.975], axis=0)
        col = "thickness_m" if self.method == "Gibbs-Thomson" else "T_c_K"
        return pd.DataFrame({col: x, "T_m_K": q[1], "T_m_K_lo95": q[0], "T_m_K_hi95": q[2]})


def _pairs(x, T_m, sd, where, x_name):
    x = np.asarray(x, dtype=float).ravel()
    y = np.asarray(T_m, dtype=float).ravel()
    if x.shape != y.shape:
        raise CrystkinInputError(f"{where}: {len(x)} {x_name} values for {len(y)} melting "
                                 "temperatures; give one of each per point")
    for i in range(len(x)):
        if not (np.isfinite(x[i]) and np.isfinite(y[i])):
            raise CrystkinInputError(f"{where}: point {i + 1} is not a pair of finite numbers")
    if sd is not None:
        sd = np.broadcast_to(np.asarray(sd, dtype=float), y.shape)
        if not np.all(np.isfinite(sd) & (sd > 0)):
            raise CrystkinInputError(f"{where}: every T_m SD must be a positive number (K)")
    return x, y, sd


def _check_hw(T_c, T_m, where, k):
    if len(T_c) < k + 1:
        raise CrystkinInputError(
            f"{where}: {len(T_c)} points, fewer than the {k + 1} needed for {k} parameters and "
            "a check on the scatter; add holds at more temperatures")
    if len(np.unique(T_c)) < 2:
        raise CrystkinInputError(f"{where}: all holds are at the same T_c; a line needs at "
                                 "least two temperatures")
    for i, (tc, tm) in enumerate(zip(T_c, T_m, strict=True)):
        if not tm > tc:
            raise CrystkinInputError(
                f"{where}: point {i + 1} melts at {celsius(tm):.2f} degC, not above its "
                f"crystallization temperature {celsius(tc):.2f} degC; check the pairing of "
                "runs (hold_temperature) and the temperature units")


def hoffman_weeks(T_c, T_m, *, T_m_sd=None, seed: int = 0,
                  group: str = "default") -> EquilibriumMeltingFit:
    """Equilibrium melting temperature by the linear Hoffman-Weeks extrapolation.

    Parameters
    ----------
    T_c : array_like of shape (n,), K
        Crystallization (hold) temperatures.
    T_m : array_like of shape (n,), K
        Melting (peak) temperatures of the same samples on heating.
    T_m_sd : float or array_like, K, optional
        Known SD of each T_m; estimated from the scatter when None.
    seed : int
    group : str

    Returns
    -------
    EquilibriumMeltingFit
        draws ``Tm0`` (K), ``gamma``, ``slope`` = 1/gamma, ``intercept`` (K).

    Raises
    ------
    CrystkinInputError
        Fewer than 3 points, one temperature only, or a T_m not above its T_c.

    Notes
    -----
    Tm = Tm0 (1 - 1/gamma) + Tc/gamma (Hoffman & Weeks, J. Res. NBS 66A (1962) 13);
    a line Tm = A + B Tc meets Tm = Tc at Tm0 = A/(1 - B), gamma = 1/B. The line's
    coefficients are drawn from their exact posterior (flat priors, scatter with prior
    1/sigma, or the known SDs); draws with B outside (0, 1) have no intersection above
    the data and give Tm0 = NaN (their share is reported as ``fraction_valid``).
    """
    where = "hoffman_weeks"
    T_c, T_m, sd = _pairs(T_c, T_m, T_m_sd, where, "T_c")
    _check_hw(T_c, T_m, where, 2)
    line = fit_line(T_c, T_m, weights=None if sd is None else 1 / sd ** 2, where=where)
    post = sample_posterior(line_problem(T_c, T_m, name="Hoffman-Weeks", sigma=sd,
                                         slope_unit="1", intercept_unit="K"), seed=seed)
    A, B = post["intercept"], post["slope"]
    ok = (B > 0) & (B < 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        Tm0 = np.where(ok, A / (1 - B), np.nan)
        gamma = np.where(B > 0, 1 / B, np.nan)
    flags = []
    frac = float(np.mean(ok))
    if frac < 0.975:
        flags.append(f"in {100 * (1 - frac):.1f} % of the draws the line does not meet Tm = Tc "
                     "(slope not between 0 and 1); Tm0 is undefined there")
    if not 0 < line.slope < 1:
        flags.append(f"least-squares slope {line.slope:.3f} is not between 0 and 1; no "
                     "Hoffman-Weeks intersection")
    return EquilibriumMeltingFit(
        "Hoffman-Weeks linear", T_c, T_m,
        {"Tm0": Tm0, "gamma": gamma, "slope": B, "intercept": A}, line, tuple(flags),
        (HW_CAUTION,), {"T_m_sd": None if sd is None else sd.tolist()}, group,
        {"posterior": "exact linear-Gaussian draws", "seed": seed})


def marand_xu_srinivas(T_c, T_m, *, T_m_sd=None, gamma: float | None = 1.0,
                       a: float | None = None, Tm0_range=None, gamma_range=(0.5, 20.0),
                       a_range=(-5.0, 50.0), seed: int = 0, sampler_options: dict | None = None,
                       group: str = "default") -> EquilibriumMeltingFit:
    """Equilibrium melting temperature by the nonlinear Hoffman-Weeks form.

    Parameters
    ----------
    T_c, T_m : array_like of shape (n,), K
    T_m_sd : float or array_like, K, optional
        Known SD of each T_m; estimated when None.
    gamma : float or None
        Thickening ratio, fixed at 1 by default (lamellae melted as formed, the usual
        assumption of the nonlinear analysis; from memory); None estimates it with a
        uniform prior on ``gamma_range``, which with ``a`` also free is rarely determined
        by a handful of points.
    a : float, optional
        a = dh_f C2/(2 sigma_e), fixed when given (uniform prior on ``a_range`` otherwise).
    Tm0_range : (float, float), K, optional
        Uniform prior of Tm0; default from 0.01 K above the highest T_m to 100 K above it.
    seed : int
    sampler_options : dict, optional
        Passed to :func:`kinetics.estimate.sample_posterior`.

    Returns
    -------
    EquilibriumMeltingFit
        draws ``Tm0`` (K), ``gamma``, ``a``.

    Notes
    -----
    Tm0/(Tm0 - Tm) = gamma [Tm0/(Tm0 - Tc) + a] (Marand, Xu & Srinivas, Macromolecules 31
    (1998) 8219), from l* = C1/dT + C2 with Gibbs-Thomson; a = 0 is the linear form.
    The likelihood is on T_m (Gaussian); the posterior is sampled with the shared
    emcee engine.
    """
    where = "marand_xu_srinivas"
    T_c, T_m, sd = _pairs(T_c, T_m, T_m_sd, where, "T_c")
    k = 1 + (gamma is None) + (a is None)
    _check_hw(T_c, T_m, where, k)
    if Tm0_range is None:
        Tm0_range = (float(T_m.max()) + 0.01, float(T_m.max()) + 100.0)
    lo, hi = (float(v) for v in Tm0_range)
    if not lo > T_m.max():
        raise CrystkinInputError(
            f"The 'Tm0_range' parameter of {where} must start above the highest melting "
            f"point ({T_m.max():.2f} K). Got {Tm0_range!r} instead.")
    hw = fit_line(T_c, T_m, where=where)
    tm0_start = hw.intercept / (1 - hw.slope) if 0 < hw.slope < 1 else 0.5 * (lo + hi)
    tm0_start = float(np.clip(tm0_start, lo + 1e-3 * (hi - lo), hi - 1e-3 * (hi - lo)))
    params = [Parameter("Tm0", "K", Uniform(lo, hi), tm0_start, "equilibrium melting point")]
    if gamma is None:
        g0 = 1 / hw.slope if hw.slope > 0 else 2.0
        params.append(Parameter("gamma", "1", Uniform(*gamma_range),
                                float(np.clip(g0, gamma_range[0] * 1.01, gamma_range[1] * 0.99)),
                                "thickening ratio"))
    if a is None:
        params.append(Parameter("a", "1", Uniform(*a_range),
                                float(np.clip(0.0, a_range[0] + 1e-6, a_range[1] - 1e-6)),
                                "dh_f C2 / (2 sigma_e)"))
    names = [p.name for p in params]

    def predict(theta):
        tm0 = theta[:, 0:1]
        g = theta[:, names.index("gamma"):names.index("gamma") + 1] if gamma is None else gamma
        aa = theta[:, names.index("a"):names.index("a") + 1] if a is None else a
        return marand_tm(T_c[None, :], tm0, g, aa)

    prob = FitProblem("Hoffman-Weeks nonlinear", tuple(params), T_m, predict=predict,
                      noise="estimate" if sd is None else sd,
                      provenance={"model": "Tm0/(Tm0 - Tm) = gamma [Tm0/(Tm0 - Tc) + a]"})
    ls = fit_least_squares(prob)
    opts = {"max_steps": 10_000 if k == 3 else 20_000, **(sampler_options or {})}
    post = sample_posterior(prob, seed=seed, start=ls, **opts)
    draws = {"Tm0": post["Tm0"],
             "gamma": post["gamma"] if gamma is None else np.full(len(post.draws), gamma),
             "a": post["a"] if a is None else np.full(len(post.draws), a)}
    flags = []
    if not post.diagnostics.converged:
        flags.append("posterior not converged: " + post.diagnostics.reason)
    for p in params:
        lo_p, hi_p = p.prior.support
        d = post[p.name]
        if np.mean((d - lo_p) < 0.02 * (hi_p - lo_p)) > 0.05 or \
                np.mean((hi_p - d) < 0.02 * (hi_p - lo_p)) > 0.05:
            flags.append(f"the posterior of {p.name} piles up at a bound of its prior "
                         f"[{lo_p:g}, {hi_p:g}]; the data do not determine it")
    return EquilibriumMeltingFit(
        "Hoffman-Weeks nonlinear (Marand-Xu-Srinivas)", T_c, T_m, draws, None, tuple(flags),
        (HW_CAUTION, MXS_CAUTION),
        {"gamma_fixed": gamma, "a_fixed": a, "Tm0_prior": (lo, hi), "gamma_prior": gamma_range,
         "a_prior": a_range, "priors": post.priors(),
         "diagnostics": post.diagnostics.as_dict()}, group,
        {"sampler": post.provenance.get("sampler"), "seed": seed})


def gibbs_thomson(thickness, T_m, *, delta_hf: float, T_m_sd=None, seed: int = 0,
                  group: str = "default") -> EquilibriumMeltingFit:
    """Equilibrium melting temperature and fold surface energy from lamellar thickness.

    Parameters
    ----------
    thickness : array_like of shape (n,), m
        Lamellar (crystal) thickness l of each sample.
    T_m : array_like of shape (n,), K
    delta_hf : float, J/m^3
        Heat of fusion per crystal volume (taken as exact).
    T_m_sd : float or array_like, K, optional
    seed : int

    Returns
    -------
    EquilibriumMeltingFit
        draws ``Tm0`` (K) and ``sigma_e`` (J/m^2).

    Notes
    -----
    Tm = Tm0 [1 - 2 sigma_e/(dh_f l)] is a line in 1/l with intercept Tm0 and slope
    -2 sigma_e Tm0/dh_f, so sigma_e = -slope dh_f/(2 Tm0) per draw (Gibbs-Thomson,
    standard form).
    """
    where = "gibbs_thomson"
    thick, T_m, sd = _pairs(thickness, T_m, T_m_sd, where, "thickness")
    if not (np.isfinite(delta_hf) and delta_hf > 0):
        raise CrystkinInputError(f"The 'delta_hf' parameter of {where} must be positive "
                                 f"(J/m^3). Got {delta_hf!r} instead.")
    if np.any(thick <= 0):
        i = int(np.flatnonzero(thick <= 0)[0])
        raise CrystkinInputError(f"{where}: thickness of point {i + 1} is not positive; give "
                                 "lamellar thicknesses in m")
    if np.any(thick > 1e-5):
        raise CrystkinInputError(f"{where}: thicknesses above 10 um; give them in m (1 nm = "
                                 "1e-9 m)")
    if len(thick) < 3 or len(np.unique(thick)) < 2:
        raise CrystkinInputError(f"{where}: need at least 3 points at 2 or more thicknesses")
    x = 1.0 / thick
    line = fit_line(x, T_m, weights=None if sd is None else 1 / sd ** 2, where=where)
    post = sample_posterior(line_problem(x, T_m, name="Gibbs-Thomson", sigma=sd,
                                         slope_unit="K m", intercept_unit="K"), seed=seed)
    Tm0 = post["intercept"]
    se = -post["slope"] * delta_hf / (2 * Tm0)
    flags = []
    if np.mean(se <= 0) > 0.025:
        flags.append("sigma_e is not clearly positive: T_m does not fall with 1/l")
    return EquilibriumMeltingFit(
        "Gibbs-Thomson", thick, T_m, {"Tm0": Tm0, "sigma_e": se, "slope": post["slope"]}, line,
        tuple(flags), (), {"delta_hf": float(delta_hf)}, group,
        {"posterior": "exact linear-Gaussian draws", "seed": seed})


def lamellar_thickness_from_saxs(volume_crystallinity, *, q_peak=None, two_theta=None,
                                 wavelength: float = CU_KALPHA1.value, order: int = 1):
    """Lamellar thickness from a SAXS long period and the crystallinity.

    Parameters
    ----------
    volume_crystallinity : array_like
        Volume fraction crystallinity of the lamellar stacks, 0 to 1.
    q_peak : array_like, 1/m, optional
        Peak of the Lorentz-corrected scattering curve; L = 2 pi/q*.
    two_theta : array_like, rad, optional
        Scattering angle of the peak instead; L from Bragg's law
        n lambda = 2 L sin(theta), theta = two_theta/2.
    wavelength : float, m
        Default Cu K-alpha1, 0.15406 nm (from memory).
    order : int

    Returns
    -------
    thickness : ndarray, m
        l = L phi_c.
    long_period : ndarray, m
    """
    if (q_peak is None) == (two_theta is None):
        raise CrystkinInputError("lamellar_thickness_from_saxs needs exactly one of q_peak "
                                 "(1/m) and two_theta (rad)")
    phi = np.asarray(volume_crystallinity, dtype=float)
    if np.any(~np.isfinite(phi)) or np.any((phi <= 0) | (phi > 1)):
        raise CrystkinInputError("lamellar_thickness_from_saxs: volume crystallinity must be "
                                 "between 0 and 1 (a fraction, not a percentage)")
    if q_peak is not None:
        q = np.asarray(q_peak, dtype=float)
        if np.any(~(q > 0)):
            raise CrystkinInputError("lamellar_thickness_from_saxs: q_peak must be positive "
                                     "(1/m)")
        L = long_period(q)
    else:
        tt = np.asarray(two_theta, dtype=float)
        if np.any(~((tt > 0) & (tt < np.pi))):
            raise CrystkinInputError("lamellar_thickness_from_saxs: two_theta must be between "
                                     "0 and pi rad")
        L = bragg_spacing(tt / 2, wavelength, order=order)
    return lamellar_thickness(L, phi), L


def melting_points(traces, *, window=None) -> pd.DataFrame:
    """Melting peak of every heating run that names its hold temperature.

    Parameters
    ----------
    traces : iterable of Trace
        Heating runs without ``hold_temperature`` are skipped.
    window : (float, float), K, optional
        Passed to :func:`kinetics.prep.melting.melting_peak`.

    Returns
    -------
    DataFrame
        run_id, group, T_c_K, T_c_degC, T_m_K, T_m_degC, flags, error (runs whose peak
        could not be found have an error message and NaN temperatures).
    """
    from ..prep.melting import melting_peak

    rows = []
    for tr in traces:
        if tr.info.kind != "heating" or tr.info.hold_temperature is None:
            continue
        tc = tr.info.hold_temperature
        r = {"run_id": tr.run_id, "group": tr.info.group, "T_c_K": tc,
             "T_c_degC": celsius(tc)}
        try:
            pk = melting_peak(tr, window=window)
            r.update({"T_m_K": pk.temperature, "T_m_degC": celsius(pk.temperature),
                      "flags": "; ".join(pk.warnings), "error": ""})
        except CrystkinInputError as exc:
            r.update({"T_m_K": np.nan, "T_m_degC": np.nan, "flags": "", "error": str(exc)})
        rows.append(r)
    cols = ["run_id", "group", "T_c_K", "T_c_degC", "T_m_K", "T_m_degC", "flags", "error"]
    return pd.DataFrame(rows, columns=cols)

