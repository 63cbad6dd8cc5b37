"""Hoffman-Lauritzen analysis: Kg, regimes and surface free energies, with honest intervals.

The rate (1/t_half from isotherms, or the spherulite growth rate G from optical
microscopy) is linearised as

    y = ln(rate) + U*/(R (T_c - T_inf)) = ln G0 - Kg x,     x = 1/(T_c dT f)

(Hoffman & Miller, Polymer 38 (1997) 3151), and y is fitted against x either by
one line or by two lines meeting at a break (a regime transition), chosen by the
data. Everything is done per draw: Tm0, U* and T_inf are drawn from their stated
uncertainties (Normal, truncated to physical values), the data are transformed with
that draw, and the line coefficients are drawn from their exact linear-Gaussian
posterior (the engine's linear path, no sampler needed). Derived quantities (Kg
ratio, break temperature, sigma sigma_e, sigma_e, work of chain folding) are
computed per draw and then summarised. The uncertainty of each rate point (the
spread of its own posterior) enters as a known SD of ln(rate).

Also here: linear growth rates from microscopy radius-against-time data, and the
same Kg from the isoconversional E(T) of cooling runs (Vyazovkin & Sbirrazzuoli,
Macromol. Rapid Commun. 25 (2004) 733), with a comparison of the two.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import stats

from ..constants import N_A, U_STAR_DEFAULT, canonical_polymer, default_T_inf, polymer_constant
from ..errors import CrystkinInputError, check_option
from ..estimate import fit_least_squares, interval_columns, line_problem, sample_posterior
from ..estimate.posterior import conditional_draws, log_probability
from ..estimate.problem import FitProblem
from ..models.growth import (
    REGIME_N,
    fold_work,
    hl_coordinates,
    hl_energy_terms,
    hl_transport,
    hl_x,
    sigma_sigma_e_from_kg,
    thomas_staveley_sigma,
)
from ..models.hoffman_lauritzen import hl_activation_energy
from ..models.params import Parameter, Uniform
from ..units import celsius

__all__ = [
    "HoffmanLauritzenFit", "fit_hoffman_lauritzen", "hoffman_lauritzen_from_half_times",
    "hoffman_lauritzen_from_isotherms", "hoffman_lauritzen_from_table",
    "hoffman_lauritzen_from_growth", "GrowthRates", "fit_growth_rates", "HLEnergyFit",
    "hl_from_activation_energy", "KgComparison", "compare_kg", "HL_CAUTIONS",
]

_WHERE = "fit_hoffman_lauritzen"
_GRID = 240

HL_CAUTIONS = (
    "Kg depends on the assumed Tm0, U* and T_inf; the intervals include only the "
    "uncertainty stated for them.",
    "Using 1/t_half as the rate mixes nucleation and growth; Kg from overall rates is "
    "not a pure growth-rate Kg.",
)
_TS_CAUTION = ("sigma from the Thomas-Staveley relation with alpha = {alpha:g} (0.1 from memory; "
               "Chen & Chung argue 0.25 for PEEK); sigma_e and the work of chain folding "
               "inherit this assumption.")


# ----------------------------------------------------------------------------- inputs

def _points(T_c, rate, rate_sd, where):
    """Temperatures (K), ln(rate), SD of ln(rate) or None, and flags."""
    T = np.asarray(T_c, dtype=float).ravel()
    n = len(T)
    flags = []
    if n == 0:
        raise CrystkinInputError(f"{where}: no data points")
    bad = np.flatnonzero(~np.isfinite(T))
    if bad.size:
        raise CrystkinInputError(f"{where}: crystallization temperature of point {bad[0] + 1} "
                                 "is not a finite number; remove the point or correct it")
    per_point = None
    if isinstance(rate, (list, tuple)) and any(np.ndim(r) > 0 for r in rate):
        per_point = [np.asarray(r, dtype=float).ravel() for r in rate]
    else:
        arr = np.asarray(rate, dtype=float)
        if arr.ndim == 2:
            if arr.shape[1] != n:
                raise CrystkinInputError(
                    f"{where}: rate draws have {arr.shape[1]} columns for {n} temperatures; "
                    "give draws of shape (n_draws, n_points)")
            per_point = [arr[:, i] for i in range(n)]
        elif arr.ndim <= 1:
            values = np.broadcast_to(arr, (n,)) if arr.ndim == 0 else arr
            if len(values) != n:
                raise CrystkinInputError(
                    f"{where}: {len(values)} rates for {n} temperatures; give one rate per "
                    "temperature")
        else:
            raise CrystkinInputError(f"{where}: rates must be values (n,) or draws (S, n)")
    if per_point is not None:
        if len(per_point) != n:
            raise CrystkinInputError(f"{where}: draws for {len(per_point)} points, "
                                     f"{n} temperatures")
        ln_r = np.empty(n)
        sd = np.empty(n)
        for i, d in enumerate(per_point):
            d = d[np.isfinite(d)]
            if d.size < 2:
                raise CrystkinInputError(f"{where}: point {i + 1} has fewer than 2 finite draws")
            med = float(np.median(d))
            if not med > 0:
                raise CrystkinInputError(
                    f"{where}: point {i + 1} (T_c = {T[i]:.2f} K) has a negative or zero rate "
                    f"(median {med:.3g}); a growth rate must be positive. Check the sign of the "
                    "data or remove the point")
            if np.all(d > 0):
                ln_r[i] = float(np.median(np.log(d)))
                sd[i] = float(np.std(np.log(d), ddof=1))
            else:
                ln_r[i] = np.log(med)
                sd[i] = float(np.std(d, ddof=1)) / med
                flags.append(f"point {i + 1}: some rate draws are not positive; SD of ln(rate) "
                             "from the delta method")
        sd = np.maximum(sd, 1e-6)
        return T, ln_r, sd, flags
    values = np.asarray(values, dtype=float)
    for i, v in enumerate(values):
        if not np.isfinite(v):
            raise CrystkinInputError(f"{where}: rate of point {i + 1} is not a finite number")
        if not v > 0:
            raise CrystkinInputError(
                f"{where}: point {i + 1} (T_c = {T[i]:.2f} K) has a negative or zero rate "
                f"({v:.3g}); a growth rate must be positive. Check the sign of the data or "
                "remove the point")
    ln_r = np.log(values)
    if rate_sd is None:
        return T, ln_r, None, flags
    s = np.broadcast_to(np.asarray(rate_sd, dtype=float), (n,))
    if not np.all(np.isfinite(s) & (s > 0)):
        i = int(np.flatnonzero(~(np.isfinite(s) & (s > 0)))[0])
        raise CrystkinInputError(f"{where}: rate SD of point {i + 1} must be a positive number")
    return T, ln_r, np.maximum(s / values, 1e-6), flags


def _check_temperatures(T, Tm0, T_inf, where):
    for i, t in enumerate(T):
        if t >= Tm0:
            raise CrystkinInputError(
                f"{where}: T_c = {t:.2f} K ({celsius(t):.2f} degC) of point {i + 1} is at or "
                f"above Tm0 = {Tm0:.2f} K ({celsius(Tm0):.2f} degC); there is no undercooling. "
                "Check Tm0 or the temperature unit (K, not degC), or remove the point")
        if t <= T_inf:
            raise CrystkinInputError(
                f"{where}: T_c = {t:.2f} K of point {i + 1} is at or below T_inf = "
                f"{T_inf:.2f} K, where the transport term diverges; check T_inf (Tg - 30 K)")


def _truncated_normal(rng, mu, sd, size, lower=-np.inf, upper=np.inf):
    if sd == 0:
        return np.full(size, float(mu))
    out = rng.normal(mu, sd, size)
    for _ in range(100):
        bad = (out <= lower) | (out >= upper)
        if not bad.any():
            return out
        out[bad] = rng.normal(mu, sd, int(bad.sum()))
    raise CrystkinInputError(
        f"{_WHERE}: the uncertainty given ({mu:g} +/- {sd:g}) leaves almost no physical values "
        f"between {lower:g} and {upper:g}; reduce the SD")


def _nonneg(name, value):
    v = float(value)
    if not (np.isfinite(v) and v >= 0):
        raise CrystkinInputError(f"The '{name}' parameter of {_WHERE} must be a non-negative "
                                 f"number. Got {value!r} instead.")
    return v


# ----------------------------------------------------------------------------- problems

def _design(n, sd, mode):
    """Weights and noise: known SD in the likelihood, SD scaled by an unknown factor, or none."""
    if mode == "scaled":
        return 1.0 / sd, "estimate"
    if mode == "known":
        return np.ones(n), sd
    return np.ones(n), "estimate"


_WIDE = Uniform(-1e12, 1e12)


def _hl_problem(T, y, sd, mode, *, two, Tm0=None, fixed=None, T_range=None, start=None):
    """One or two (hinged) lines in HL coordinates as an engine problem.

    Nonlinear parameters, in order: Tm0 (only when ``Tm0`` is None, so that draws of
    Tm0 are handled vectorised by the engine) and T_break (two lines, break not fixed).
    """
    n = len(T)
    w, noise = _design(n, sd, mode)
    params = []
    if Tm0 is None:
        params.append(Parameter("Tm0", "K", Uniform(float(T.max()) + 1e-3,
                                                    float(T.max()) + 1e4)))
    if two and fixed is None:
        lo, hi = T_range
        s = 0.5 * (lo + hi) if start is None else float(np.clip(start, lo, hi))
        params.append(Parameter("T_break", "K", Uniform(lo, hi), s))
    if two:
        linear = (Parameter("c", "1", _WIDE), Parameter("slope_low_T", "K^2", _WIDE),
                  Parameter("slope_high_T", "K^2", _WIDE))
    else:
        linear = (Parameter("ln_prefactor", "1", _WIDE), Parameter("slope", "K^2", _WIDE))

    def basis(theta):
        m = theta.shape[0]
        tm = theta[:, 0:1] if Tm0 is None else Tm0
        x = np.broadcast_to(hl_x(T[None, :], tm), (m, n))
        ones = np.broadcast_to(w, (m, n))
        if not two:
            return [np.stack([ones, w * x], axis=1)]
        tb = fixed if fixed is not None else theta[:, len(params) - 1:len(params)]
        d = x - hl_x(tb, tm)
        return [np.stack([ones, w * np.minimum(d, 0), w * np.maximum(d, 0)], axis=1)]

    name = "Hoffman-Lauritzen, " + ("two lines" if two else "one line")
    return FitProblem(name, tuple(params), y * w, basis=basis, linear=linear, noise=noise)


def _misfit(problem, x_best, sd, mode):
    r = problem.data - problem.predict_full(x_best[None, :])[0]
    if mode == "known":
        return float(np.sum((r / sd) ** 2))
    return float(np.sum(r * r))


def _bic(misfit, n, k, mode):
    if mode == "known":
        return misfit + k * np.log(n)
    return n * np.log(max(misfit, 1e-300) / n) + (k + 1) * np.log(n)


def _best_one(T, y, sd, mode, Tm0):
    prob = _hl_problem(T, y, sd, mode, two=False, Tm0=Tm0)
    return _misfit(prob, fit_least_squares(prob).x, sd, mode)


def _best_two(T, y, sd, mode, Tm0, T_sorted, m, fixed):
    """Least-squares two-line fit: misfit and break, with a start in every admissible gap."""
    if fixed is not None:
        prob = _hl_problem(T, y, sd, mode, two=True, Tm0=Tm0, fixed=fixed)
        return _misfit(prob, fit_least_squares(prob).x, sd, mode), float(fixed)
    lo, hi = T_sorted[m - 1], T_sorted[-m]
    cuts = np.unique(T_sorted[(T_sorted >= lo) & (T_sorted <= hi)])
    starts = 0.5 * (cuts[1:] + cuts[:-1]) if len(cuts) > 1 else [0.5 * (lo + hi)]
    best = (np.inf, np.nan)
    for s in starts:
        prob = _hl_problem(T, y, sd, mode, two=True, Tm0=Tm0, T_range=(lo, hi), start=s)
        ls = fit_least_squares(prob)
        mis = _misfit(prob, ls.x, sd, mode)
        if mis < best[0]:
            best = (mis, float(ls.x[0]))
    return best


def _draw_block(T, ln_r, sd, mode, Tm0_values, U, Ti, reps, rng, *, fit_two, fixed, T_range,
                grid):
    """Draws at fixed U*, T_inf for each Tm0 value (``reps`` draws each).

    Tm0 enters as the engine problem's nonlinear parameter, so the exact conditional
    draws of the coefficients are vectorised over Tm0. The break is drawn, for each Tm0,
    from its exact posterior on a grid (flat prior), evaluated in one vectorised call.
    """
    y = ln_r + hl_transport(T, U, Ti)
    tm = np.repeat(np.asarray(Tm0_values, dtype=float), reps)
    one, _ = conditional_draws(_hl_problem(T, y, sd, mode, two=False), tm[:, None], rng)
    out = {"Tm0": tm, "one": one}
    if not fit_two:
        return out
    p2 = _hl_problem(T, y, sd, mode, two=True, fixed=fixed, T_range=T_range)
    if fixed is not None:
        tb = np.full(len(tm), float(fixed))
        beta, _ = conditional_draws(p2, tm[:, None], rng)
    else:
        logp = log_probability(p2)
        h = grid[1] - grid[0]
        tb = np.empty(len(tm))
        uniq = np.asarray(Tm0_values, dtype=float)
        per = max(1, 20000 // len(grid))
        for a in range(0, len(uniq), per):
            u = uniq[a:a + per]
            rows = np.column_stack([np.repeat(u, len(grid)), np.tile(grid, len(u))])
            lp = logp(rows).reshape(len(u), len(grid))
            p = np.exp(lp - lp.max(axis=1, keepdims=True))
            p /= p.sum(axis=1, keepdims=True)
            for i in range(len(u)):
                idx = rng.choice(len(grid), size=reps, p=p[i])
                k = (a + i) * reps
                tb[k:k + reps] = grid[idx] + rng.uniform(-0.5 * h, 0.5 * h, reps)
        beta, _ = conditional_draws(p2, np.column_stack([tm, tb]), rng)
    out.update({"T_break": tb, "two": beta})
    return out


# ----------------------------------------------------------------------------- result

@dataclass(frozen=True)
class HoffmanLauritzenFit:
    """Hoffman-Lauritzen analysis of one set of rates (one formulation).

    Attributes
    ----------
    T_c : ndarray, K
    ln_rate : ndarray
        ln of the rate in SI (1/s for 1/t_half, m/s for G).
    ln_rate_sd : ndarray or None
        Known SD of each ln(rate), carried in from the points' own uncertainty.
    rate_kind : {"1/t_half", "G"}
    prefactor_unit : str
        Unit of exp(ln_prefactor): "1/s" or "m/s".
    models : tuple of str
        Models fitted: "one line" and, when feasible, "two lines".
    chosen : str
        The model the data favour (see :func:`fit_hoffman_lauritzen`).
    bic : dict
        Bayesian information criterion of each model (nominal Tm0, U*, T_inf).
    p_two_lines : float
        exp(-BIC/2)-weighted probability of two lines (equal prior odds), NaN if not fitted.
    draws : dict of str -> ndarray
        Per-draw values: ``Tm0``, ``U_star``, ``T_inf``, and per model and segment
        (``one.all.Kg``, ``two.low_T.Kg``, ``two.high_T.Kg``, ``two.T_break``, ...),
        with derived ``sigma_sigma_e``, ``sigma_e``, ``q_fold`` where constants allow.
    regimes : dict
        Regime label per segment key ("one.all", "two.high_T", "two.low_T"), or None.
    settings : dict
        Tm0, U*, T_inf with their SDs, crystal constants and options used.
    noise : {"known", "scaled", "estimate"}
        How the scatter of ln(rate) was modelled.
    flags, cautions : tuple of str
    group : str
    provenance : dict
    """

    T_c: np.ndarray
    ln_rate: np.ndarray
    ln_rate_sd: np.ndarray | None
    rate_kind: str
    prefactor_unit: str
    models: tuple[str, ...]
    chosen: str
    bic: dict
    p_two_lines: float
    draws: dict
    regimes: dict
    settings: dict
    noise: str
    flags: tuple[str, ...] = ()
    cautions: tuple[str, ...] = ()
    group: str = "default"
    provenance: dict = field(default_factory=dict)

    def segments(self, model: str | None = None) -> tuple[str, ...]:
        """Segment keys of a model ("one.all" or "two.high_T", "two.low_T")."""
        model = model or self.chosen
        return ("one.all",) if model == "one line" else ("two.high_T", "two.low_T")

    def Kg(self, segment: str | None = None) -> np.ndarray:
        """Kg draws of a segment (default: the one line), K^2."""
        return self.draws[f"{segment or 'one.all'}.Kg"]

    def table(self) -> pd.DataFrame:
        """One row per model and segment; the chosen model's rows have ``chosen`` True."""
        rows = []
        d = self.draws
        delta = self.bic.get("one line", np.nan) - self.bic.get("two lines", np.nan)
        for model in self.models:
            for seg in self.segments(model):
                key = seg.split(".")[1]
                Tsel = self._segment_T(seg)
                regime = self.regimes.get(seg)
                r = {"group": self.group, "model": model,
                     "segment": {"all": "all", "high_T": "high T", "low_T": "low T"}[key],
                     "chosen": model == self.chosen, "regime": regime or "",
                     "regime_n": REGIME_N.get(regime, np.nan) if regime else np.nan,
                     "n_points": int(np.sum(Tsel)),
                     "T_min_degC": float(celsius(self.T_c[Tsel].min())) if Tsel.any() else np.nan,
                     "T_max_degC": float(celsius(self.T_c[Tsel].max())) if Tsel.any() else np.nan}
                r.update(interval_columns("Kg_K2", d[f"{seg}.Kg"]))
                r.update(interval_columns("ln_prefactor", d[f"{seg}.ln_prefactor"]))
                r["prefactor_unit"] = self.prefactor_unit
                for col, name in (("sigma_sigma_e_J2_per_m4", "sigma_sigma_e"),
                                  ("sigma_J_per_m2", "sigma"),
                                  ("sigma_e_J_per_m2", "sigma_e"),
                                  ("q_fold_J", "q_fold"),
                                  ("q_fold_kJ_per_mol", "q_fold_molar")):
                    v = d.get(f"{seg}.{name}")
                    r.update(interval_columns(col, v if v is not None else [np.nan]))
                if model == "two lines":
                    r.update(interval_columns("T_break_K", d["two.T_break"]))
                    r.update(interval_columns("T_break_degC", celsius(d["two.T_break"])))
                    r.update(interval_columns("Kg_ratio_low_over_high", d["two.Kg_ratio"]))
                else:
                    for col in ("T_break_K", "T_break_degC", "Kg_ratio_low_over_high"):
                        r.update(interval_columns(col, [np.nan]))
                r["bic"] = self.bic.get(model, np.nan)
                r["delta_bic_one_minus_two"] = delta
                r["p_two_lines"] = self.p_two_lines
                r["Tm0_K"] = self.settings["Tm0"]
                r["Tm0_sd_K"] = self.settings["Tm0_sd"]
                r["U_star_J_per_mol"] = self.settings["U_star"]
                r["T_inf_K"] = self.settings["T_inf"]
                r["rate_kind"] = self.rate_kind
                r["noise_model"] = self.noise
                r["flags"] = "; ".join(self.flags)
                rows.append(r)
        return pd.DataFrame(rows)

    def _segment_T(self, seg):
        if seg == "one.all":
            return np.ones(len(self.T_c), dtype=bool)
        tb = float(np.median(self.draws["two.T_break"]))
        return self.T_c > tb if seg == "two.high_T" else self.T_c <= tb

    def points(self) -> pd.DataFrame:
        """The plotted points at the nominal Tm0, U*, T_inf (HL plot coordinates)."""
        s = self.settings
        x, y = hl_coordinates(self.T_c, self.ln_rate, Tm0=s["Tm0"], U_star=s["U_star"],
                              T_inf=s["T_inf"])
        df = pd.DataFrame({"T_c_K": self.T_c, "T_c_degC": celsius(self.T_c),
                           "x_hl_per_K2": x, "y_hl": y, "ln_rate": self.ln_rate,
                           "ln_rate_sd": (self.ln_rate_sd if self.ln_rate_sd is not None
                                          else np.full(len(self.T_c), np.nan))})
        if "two lines" in self.models:
            tb = float(np.median(self.draws["two.T_break"]))
            df["side"] = np.where(self.T_c > tb, "high T", "low T")
        return df

    def band(self, T=None, *, model: str | None = None) -> pd.DataFrame:
        """Median and 95 % band of the fitted rate on a temperature grid.

        Returns ln(rate) and, for the HL plot, y = ln(rate) + U*/(R(T - T_inf)) at the
        nominal U*, T_inf, against x at the nominal Tm0.
        """
        model = model or self.chosen
        T = (np.linspace(self.T_c.min(), self.T_c.max(), 100) if T is None
             else np.asarray(T, dtype=float))
        d = self.draws
        Tm0, U, Ti = d["Tm0"][:, None], d["U_star"][:, None], d["T_inf"][:, None]
        x = hl_x(T[None, :], Tm0)
        if model == "one line":
            y = d["one.all.ln_prefactor"][:, None] - d["one.all.Kg"][:, None] * x
        else:
            xb = hl_x(d["two.T_break"][:, None], Tm0)
            y = (d["two.c"][:, None] - d["two.low_T.Kg"][:, None] * np.minimum(x - xb, 0)
                 - d["two.high_T.Kg"][:, None] * np.maximum(x - xb, 0))
        ln_r = y - hl_transport(T[None, :], U, Ti)
        s = self.settings
        y_nom = ln_r + hl_transport(T[None, :], s["U_star"], s["T_inf"])
        q = [0.025, 0.5, 0.975]
        lr = np.nanquantile(ln_r, q, axis=0)
        yn = np.nanquantile(y_nom, q, axis=0)
        return pd.DataFrame({"T_K": T, "T_degC": celsius(T),
                             "x_hl_per_K2": hl_x(T, s["Tm0"]),
                             "ln_rate": lr[1], "ln_rate_lo95": lr[0], "ln_rate_hi95": lr[2],
                             "y_hl": yn[1], "y_hl_lo95": yn[0], "y_hl_hi95": yn[2],
                             "model": model})


# ----------------------------------------------------------------------------- main fit

def _crystal_constants(polymer, a0, b0, delta_hf):
    out = {"a0": a0, "b0": b0, "delta_hf": delta_hf}
    used = {}
    if polymer is not None:
        canonical_polymer(polymer)
        for name in ("a0", "b0", "delta_hf"):
            if out[name] is None:
                try:
                    c = polymer_constant(polymer, name)
                except CrystkinInputError:
                    continue
                out[name] = c.value
                used[name] = c.describe()
    for name, v in out.items():
        if v is not None and not (np.isfinite(float(v)) and float(v) > 0):
            raise CrystkinInputError(f"The '{name}' parameter of {_WHERE} must be positive "
                                     f"(SI units). Got {v!r} instead.")
    return out, used


def fit_hoffman_lauritzen(T_c, rate, *, rate_sd=None, rate_kind: str = "1/t_half", Tm0,
                          Tm0_sd: float = 0.0, U_star: float = U_STAR_DEFAULT.value,
                          U_star_sd: float = 0.0, T_inf: float | None = None,
                          T_inf_sd: float = 0.0, Tg: float | None = None,
                          segments: str = "auto", T_break: float | None = None,
                          min_points_per_regime: int = 3, bic_margin: float = 2.0,
                          noise: str = "auto", regime: str | None = None,
                          regime_labels: tuple[str, str] | None = None,
                          polymer: str | None = None, a0: float | None = None,
                          b0: float | None = None, delta_hf: float | None = None,
                          alpha: float = 0.1, n_draws: int = 2000, n_nuisance: int = 250,
                          seed: int = 0, group: str = "default") -> HoffmanLauritzenFit:
    """Kg, regimes and surface free energies from rates at several temperatures.

    Parameters
    ----------
    T_c : array_like of shape (n,), K
        Crystallization temperatures.
    rate : array_like of shape (n,), (S, n), or sequence of n 1-D arrays
        Rates in SI (1/s for 1/t_half, m/s for G): values, or posterior draws per point.
        Every rate must be positive.
    rate_sd : array_like of shape (n,), optional
        SD of each rate value (same unit); ignored for draws, whose spread is used.
    rate_kind : {"1/t_half", "G"}
    Tm0 : float, K
        Equilibrium melting temperature; ``Tm0_sd`` its SD (K).
    U_star, U_star_sd : float, J/mol
        Transport activation energy, default 6276 J/mol (1500 cal/mol), and its SD.
    T_inf, T_inf_sd : float, K
        Default ``Tg - 30 K`` (needs ``Tg``).
    Tg : float, K, optional
    segments : {"auto", "one", "two"}
        "auto" lets the data choose between one line and two lines (see Notes).
    T_break : float, K, optional
        Fix the break of the two-line model instead of estimating it (implies "two").
    min_points_per_regime : int
        Fewest points on each side of an estimated break (default 3; at least 2).
    bic_margin : float
        Two lines are chosen when their BIC is lower by more than this (default 2).
    noise : {"auto", "known", "scaled", "estimate"}
        With point SDs: "known" uses them as they are; "scaled" multiplies them by a
        common factor estimated from the data; "auto" uses them as they are unless the
        points scatter more than they allow (chi-square test, p < 0.01), then scales.
        Without SDs the scatter is always estimated ("estimate").
    regime : {"I", "II", "III"}, optional
        Regime of the one-line model, needed for sigma sigma_e (n = 4 in I and III, 2 in II).
    regime_labels : (str, str), optional
        Regimes of the (high-T, low-T) segments of the two-line model; default from the
        Kg ratio: above 1 ("II", "III"), below 1 ("I", "II").
    polymer : str, optional
        Looks up a0, b0 and delta_hf in :mod:`kinetics.constants` when not given.
    a0, b0 : float, m
        Stem width and layer thickness.
    delta_hf : float, J/m^3
        Heat of fusion per crystal volume.
    alpha : float
        Thomas-Staveley constant (default 0.1).
    n_draws : int
        Number of draws of every derived quantity.
    n_nuisance : int
        Number of distinct draws of (Tm0, U*, T_inf) when any is uncertain (default 250);
        each is followed by n_draws/n_nuisance draws of the line coefficients and break.
    seed : int
    group : str

    Returns
    -------
    HoffmanLauritzenFit

    Raises
    ------
    CrystkinInputError
        A T_c at or above Tm0 (or at or below T_inf), a non-positive rate, fewer than
        3 points, a forced two-line fit with too few points, or a fixed break leaving
        fewer than 2 points on a side.

    Notes
    -----
    Model: ln(rate) + U*/(R(T_c - T_inf)) = ln G0 - Kg x, x = 1/(T_c dT f),
    dT = Tm0 - T_c, f = 2 T_c/(Tm0 + T_c) (Hoffman & Miller, Polymer 38 (1997) 3151).
    The two-line model is continuous at the break x_b = x(T_break), since the rate
    does not jump at a regime transition: y = c - Kg_low min(x - x_b, 0)
    - Kg_high max(x - x_b, 0) (low T = small x).

    Choice of model: the Bayesian information criterion
    BIC = chi^2 + k ln n (known SDs) or n ln(SSR/n) + (k + 1) ln n (estimated scatter),
    with k = 2 for one line and 4 for two lines (c, two slopes, the break), each at its
    least-squares optimum (the break profiled over every admissible gap between data
    temperatures). Two lines are chosen when BIC(one) - BIC(two) > ``bic_margin``
    (2: "positive evidence", Kass & Raftery, J. Am. Stat. Assoc. 90 (1995) 773;
    from memory) and each side has at least ``min_points_per_regime`` points.
    ``p_two_lines`` = 1/(1 + exp((BIC_two - BIC_one)/2)).

    Draws: Tm0, U*, T_inf ~ Normal(value, SD) truncated to T_inf < min T_c,
    Tm0 > max T_c, U* > 0 (``n_nuisance`` distinct draws); for each, the break
    temperature is drawn from its exact posterior on a fine grid (flat prior over the
    admissible range), then the line
    coefficients (and the scatter, when estimated) from their exact conditional
    posterior (flat priors). Kg_ratio = Kg_low_T/Kg_high_T; theory predicts 2 for
    II -> III and 1/2 for I -> II. With b0 and delta_hf: sigma sigma_e =
    Kg dh_f k_B/(n b0 Tm0); with a0 too, sigma = alpha dh_f (a0 b0)^(1/2)
    (Thomas & Staveley, J. Chem. Soc. 1952, 4569), sigma_e = (sigma sigma_e)/sigma and
    the work of chain folding q = 2 a0 b0 sigma_e (J per fold; x N_A per mole).
    a0, b0 and delta_hf are taken as exact.
    """
    check_option("rate_kind", rate_kind, ("1/t_half", "G"), _WHERE)
    check_option("segments", segments, ("auto", "one", "two"), _WHERE)
    check_option("noise", noise, ("auto", "known", "scaled", "estimate"), _WHERE)
    if regime is not None:
        check_option("regime", regime, tuple(REGIME_N), _WHERE)
    if regime_labels is not None:
        if len(regime_labels) != 2 or any(r not in REGIME_N for r in regime_labels):
            raise CrystkinInputError(
                f"The 'regime_labels' parameter of {_WHERE} must be two of 'I', 'II', 'III' "
                f"(high-T side, low-T side). Got {regime_labels!r} instead.")
    Tm0 = float(Tm0)
    Tm0_sd, U_star_sd, T_inf_sd = (_nonneg("Tm0_sd", Tm0_sd), _nonneg("U_star_sd", U_star_sd),
                                   _nonneg("T_inf_sd", T_inf_sd))
    U_star = float(U_star)
    if not U_star > 0:
        raise CrystkinInputError(f"The 'U_star' parameter of {_WHERE} must be positive, in "
                                 f"J/mol. Got {U_star!r} instead.")
    if T_inf is None:
        if Tg is None:
            raise CrystkinInputError(
                f"{_WHERE} needs T_inf (K) or Tg (K), since T_inf defaults to Tg - 30 K")
        T_inf = default_T_inf(Tg)
    T_inf = float(T_inf)
    if int(min_points_per_regime) < 2:
        raise CrystkinInputError(f"The 'min_points_per_regime' parameter of {_WHERE} must be "
                                 f"at least 2. Got {min_points_per_regime!r} instead.")
    m = int(min_points_per_regime)
    T, ln_r, sd, flags = _points(T_c, rate, rate_sd, _WHERE)
    _check_temperatures(T, Tm0, T_inf, _WHERE)
    n = len(T)
    if n < 3:
        raise CrystkinInputError(
            f"{_WHERE}: {n} points, fewer than the 3 needed to fit a line (2 parameters) with "
            "a check on its scatter; add temperatures")
    if np.ptp(T) == 0:
        raise CrystkinInputError(f"{_WHERE}: all points are at the same temperature")
    if T.min() < 0.618 * Tm0:
        flags.append("some T_c are below 0.618 Tm0, where x = 1/(T dT f) stops rising with T")
    order = np.argsort(T, kind="stable")
    T_sorted = T[order]
    fixed = None
    if T_break is not None:
        fixed = float(T_break)
        below, above = int(np.sum(T <= fixed)), int(np.sum(T > fixed))
        if min(below, above) < 2:
            raise CrystkinInputError(
                f"{_WHERE}: the regime split at T_break = {fixed:.2f} K leaves {below} point(s) "
                f"below and {above} above; each regime needs at least 2. Move the break or "
                "add temperatures")
        if n < 5:
            raise CrystkinInputError(f"{_WHERE}: two lines need at least 5 points (4 parameters "
                                     f"and a check); got {n}")
        segments = "two"
    two_possible = fixed is not None or (n >= 2 * m and T_sorted[m - 1] < T_sorted[-m]
                                         and n >= 5)
    if segments == "two" and not two_possible:
        raise CrystkinInputError(
            f"{_WHERE}: two lines with an estimated break need at least "
            f"{max(2 * m, 5)} points at distinct temperatures ({m} per regime); got {n}. "
            "Add temperatures, lower min_points_per_regime, or give T_break")
    if segments == "auto" and not two_possible:
        flags.append(f"two lines not tried: fewer than {2 * m} points ({m} per regime)")
    fit_two = segments == "two" or (segments == "auto" and two_possible)

    # noise model, decided at the nominal constants on the most flexible model
    y0 = ln_r + hl_transport(T, U_star, T_inf)
    memo = {}

    def best(mode_, two):
        key = (mode_, two)
        if key not in memo:
            memo[key] = (_best_two(T, y0, sd, mode_, Tm0, T_sorted, m, fixed) if two
                         else (_best_one(T, y0, sd, mode_, Tm0), None))
        return memo[key]

    if sd is None:
        mode = "estimate"
        if noise in ("known", "scaled"):
            flags.append(f"noise='{noise}' needs point SDs; the scatter was estimated")
    elif noise in ("known", "scaled", "estimate"):
        mode = noise
    else:
        chi2 = best("known", fit_two)[0]
        k = (4 if fixed is None else 3) if fit_two else 2
        dof = n - k
        p = float(stats.chi2.sf(chi2, dof)) if dof > 0 else 1.0
        mode = "known" if p >= 0.01 else "scaled"
        if mode == "scaled":
            flags.append(f"the points scatter more than their own uncertainties allow "
                         f"(chi-square {chi2:.1f} on {dof} dof, p = {p:.2g}); their SDs were "
                         "scaled by a common factor estimated from the data")

    # model choice at nominal constants
    bic = {"one line": _bic(best(mode, False)[0], n, 2, mode)}
    models = ("one line",)
    tb_best = None
    if fit_two:
        mis2, tb_best = best(mode, True)
        bic["two lines"] = _bic(mis2, n, 4 if fixed is None else 3, mode)
        models = ("one line", "two lines")
    if segments == "one":
        chosen = "one line"
    elif segments == "two":
        chosen = "two lines"
    else:
        chosen = ("two lines" if fit_two and bic["one line"] - bic["two lines"] > bic_margin
                  else "one line")
    p_two = (float(1.0 / (1.0 + np.exp(np.clip((bic["two lines"] - bic["one line"]) / 2,
                                               -700, 700))))
             if "two lines" in bic else float("nan"))

    # draws: Tm0 vectorised in the engine; distinct (U*, T_inf) draws in a loop
    rng = np.random.default_rng(seed)
    S = int(n_draws)
    T_range = (T_sorted[m - 1], T_sorted[-m]) if (fit_two and fixed is None) else None
    grid = None
    if T_range is not None:
        h = (T_range[1] - T_range[0]) / _GRID
        grid = T_range[0] + h * (np.arange(_GRID) + 0.5)
    opts = {"fit_two": fit_two, "fixed": fixed, "T_range": T_range, "grid": grid}
    n_nu = 1 if (Tm0_sd == 0 and U_star_sd == 0 and T_inf_sd == 0) else min(S, int(n_nuisance))
    reps = int(np.ceil(S / n_nu))
    tm = _truncated_normal(rng, Tm0, Tm0_sd, n_nu, lower=T.max() + 1e-3)
    uu = _truncated_normal(rng, U_star, U_star_sd, n_nu, lower=0.0)
    ti = _truncated_normal(rng, T_inf, T_inf_sd, n_nu, upper=T.min() - 1e-3)
    if U_star_sd == 0 and T_inf_sd == 0:
        parts = [_draw_block(T, ln_r, sd, mode, tm, U_star, T_inf, reps, rng, **opts)]
    else:
        parts = [_draw_block(T, ln_r, sd, mode, [tm[i]], uu[i], ti[i], reps, rng, **opts)
                 for i in range(n_nu)]
    U_d, Ti_d = np.repeat(uu, reps)[:S], np.repeat(ti, reps)[:S]
    one = np.concatenate([p["one"] for p in parts])[:S]
    Tm0_d = np.concatenate([p["Tm0"] for p in parts])[:S]
    draws = {"Tm0": Tm0_d, "U_star": U_d, "T_inf": Ti_d,
             "one.all.ln_prefactor": one[:, 0], "one.all.Kg": -one[:, 1]}
    if fit_two:
        two_b = np.concatenate([p["two"] for p in parts])[:S]
        two_T = np.concatenate([p["T_break"] for p in parts])[:S]
        xb = hl_x(two_T, Tm0_d)
        c, s_lo, s_hi = two_b[:, 0], two_b[:, 1], two_b[:, 2]
        draws.update({"two.T_break": two_T, "two.c": c,
                      "two.low_T.Kg": -s_lo, "two.high_T.Kg": -s_hi,
                      "two.low_T.ln_prefactor": c - s_lo * xb,
                      "two.high_T.ln_prefactor": c - s_hi * xb})
        with np.errstate(divide="ignore", invalid="ignore"):
            draws["two.Kg_ratio"] = s_lo / s_hi

    # regimes and surface energies
    regimes = {"one.all": regime}
    if fit_two:
        if regime_labels is None:
            ratio = float(np.nanmedian(draws["two.Kg_ratio"]))
            regime_labels = ("II", "III") if ratio > 1 else ("I", "II")
            auto_labels = True
        else:
            auto_labels = False
        regimes["two.high_T"], regimes["two.low_T"] = regime_labels
        lo95, hi95 = np.nanquantile(draws["two.Kg_ratio"], [0.025, 0.975])
        expect = REGIME_N[regime_labels[1]] / REGIME_N[regime_labels[0]]
        if not (lo95 <= expect <= hi95):
            flags.append(f"Kg ratio low/high T 95 % interval [{lo95:.2f}, {hi95:.2f}] excludes "
                         f"the {expect:g} expected for regimes {regime_labels[0]} -> "
                         f"{regime_labels[1]}")
        if not (np.sum(draws["two.low_T.Kg"] > 0) > 0.975 * S
                and np.sum(draws["two.high_T.Kg"] > 0) > 0.975 * S):
            flags.append("a segment of the two-line model has a Kg that is not clearly positive")
    consts, used = _crystal_constants(polymer, a0, b0, delta_hf)
    cautions = list(HL_CAUTIONS if rate_kind == "1/t_half" else HL_CAUTIONS[:1])
    if fit_two and auto_labels:
        cautions.append("regimes of the two lines assigned from the Kg ratio (above 1: II -> "
                        "III, below 1: I -> II); give regime_labels to set them")
    if consts["b0"] is not None and consts["delta_hf"] is not None:
        sigma = (thomas_staveley_sigma(consts["delta_hf"], consts["a0"], consts["b0"],
                                       alpha=alpha) if consts["a0"] is not None else None)
        for seg, lab in regimes.items():
            if seg.startswith("two") and not fit_two:
                continue
            if lab is None:
                continue
            ss = sigma_sigma_e_from_kg(draws[f"{seg}.Kg"], consts["b0"], Tm0_d,
                                       consts["delta_hf"], regime=lab)
            draws[f"{seg}.sigma_sigma_e"] = ss
            if sigma is not None:
                draws[f"{seg}.sigma"] = np.full(S, float(sigma))
                se = ss / sigma
                draws[f"{seg}.sigma_e"] = se
                q = fold_work(se, consts["a0"], consts["b0"])
                draws[f"{seg}.q_fold"] = q
                draws[f"{seg}.q_fold_molar"] = q * N_A / 1e3
        if sigma is not None:
            cautions.append(_TS_CAUTION.format(alpha=alpha))
        if regimes["one.all"] is None:
            cautions.append("the one-line model has no regime given (regime='I', 'II' or "
                            "'III'), so its sigma sigma_e is not computed")
    else:
        cautions.append("sigma sigma_e, sigma_e and the work of chain folding need b0 and "
                        "delta_hf (and a0 for sigma); give them or a tabulated polymer")
    settings = {"Tm0": Tm0, "Tm0_sd": Tm0_sd, "U_star": U_star, "U_star_sd": U_star_sd,
                "T_inf": T_inf, "T_inf_sd": T_inf_sd, "Tg": Tg, **consts, "alpha": alpha,
                "segments": segments, "T_break_fixed": fixed,
                "min_points_per_regime": m, "bic_margin": bic_margin, "n_draws": S,
                "constants_from_table": used}
    prov = {"method": "Hoffman-Lauritzen linearised; exact linear posterior per draw of Tm0, "
                      "U*, T_inf; break on a grid posterior", "seed": seed, "noise": mode,
            "criterion": f"BIC(one) - BIC(two) > {bic_margin:g}",
            "bic_best_break_K": (tb_best if fit_two else None)}
    return HoffmanLauritzenFit(
        T_c=T, ln_rate=ln_r, ln_rate_sd=sd, rate_kind=rate_kind,
        prefactor_unit="1/s" if rate_kind == "1/t_half" else "m/s", models=models,
        chosen=chosen, bic=bic, p_two_lines=p_two, draws=draws, regimes=regimes,
        settings=settings, noise=mode, flags=tuple(flags), cautions=tuple(cautions),
        group=group, provenance=prov)


# ----------------------------------------------------------------------------- entry points

def hoffman_lauritzen_from_half_times(T_c, t_half, *, t_half_sd=None, **options):
    """Hoffman-Lauritzen analysis with 1/t_half as the rate.

    Parameters
    ----------
    T_c : array_like of shape (n,), K
    t_half : array_like of shape (n,), (S, n) or sequence of n arrays, s
        Half-times, or posterior draws of each half-time.
    t_half_sd : array_like of shape (n,), s, optional
        SD of each half-time value (delta method: SD of ln(1/t_half) = sd/t_half).
    **options
        Passed to :func:`fit_hoffman_lauritzen` (Tm0 is required).
    """
    where = "hoffman_lauritzen_from_half_times"
    if isinstance(t_half, (list, tuple)) and any(np.ndim(r) > 0 for r in t_half):
        rate = []
        for i, d in enumerate(t_half):
            d = np.asarray(d, dtype=float)
            if np.any(d <= 0):
                raise CrystkinInputError(f"{where}: half-time draws of point {i + 1} are not "
                                         "all positive; a half-time must be positive")
            rate.append(1.0 / d)
        sd = None
    else:
        th = np.asarray(t_half, dtype=float)
        if np.any(~np.isfinite(th)) or np.any(th <= 0):
            i = int(np.flatnonzero(~(np.isfinite(th) & (th > 0)).ravel())[0])
            raise CrystkinInputError(f"{where}: half-time {i + 1} is not a positive number; "
                                     "a half-time must be positive (s)")
        rate = 1.0 / th
        sd = None if t_half_sd is None else np.asarray(t_half_sd, dtype=float) / th ** 2
    return fit_hoffman_lauritzen(T_c, rate, rate_sd=sd, rate_kind="1/t_half", **options)


def hoffman_lauritzen_from_isotherms(fits, draws=None, *, group=None, **options):
    """Hoffman-Lauritzen analysis of a study's isotherms (1/t_half as the rate).

    Parameters
    ----------
    fits : sequence of IsothermFit, or DataFrame
        Avrami fits (their per-draw ``derived["t_half_s"]`` is used), or the isotherm
        table with columns ``T_c_K``, ``t_half_s`` and optionally ``run_id``,
        ``group``, ``t_half_s_lo95``, ``t_half_s_hi95``.
    draws : dict of run_id -> array, s, optional
        With a table: posterior draws of each run's half-time. Without draws the
        SD of ln(t_half) is taken from the 95 % interval, (ln hi - ln lo)/3.92.
    group : str, optional
        Formulation to analyse; required when the input holds several groups.
    **options
        Passed to :func:`fit_hoffman_lauritzen`.
    """
    where = "hoffman_lauritzen_from_isotherms"
    if isinstance(fits, pd.DataFrame):
        df = fits
        missing = [c for c in ("T_c_K", "t_half_s") if c not in df.columns]
        if missing:
            raise CrystkinInputError(f"{where}: the table lacks column(s) {missing}")
        if "group" in df.columns:
            groups = list(dict.fromkeys(df["group"].astype(str)))
            if group is None and len(groups) > 1:
                raise CrystkinInputError(f"{where}: the table holds groups {groups}; pass "
                                         "group= to choose one")
            if group is not None:
                df = df[df["group"].astype(str) == str(group)]
                if df.empty:
                    raise CrystkinInputError(f"{where}: no rows of group '{group}'")
            group = group if group is not None else (groups[0] if groups else "default")
        T = df["T_c_K"].to_numpy(dtype=float)
        if draws is not None:
            if "run_id" not in df.columns:
                raise CrystkinInputError(f"{where}: draws need a 'run_id' column in the table")
            try:
                th = [np.asarray(draws[r], dtype=float) for r in df["run_id"].astype(str)]
            except KeyError as exc:
                raise CrystkinInputError(f"{where}: no draws for run {exc.args[0]}") from None
            return hoffman_lauritzen_from_half_times(T, th, group=group or "default",
                                                     **options)
        th = df["t_half_s"].to_numpy(dtype=float)
        if {"t_half_s_lo95", "t_half_s_hi95"} <= set(df.columns):
            lo = df["t_half_s_lo95"].to_numpy(dtype=float)
            hi = df["t_half_s_hi95"].to_numpy(dtype=float)
            with np.errstate(invalid="ignore", divide="ignore"):
                sdl = (np.log(hi) - np.log(lo)) / 3.92
            if np.all(np.isfinite(sdl) & (sdl > 0)):
                return hoffman_lauritzen_from_half_times(T, th, t_half_sd=sdl * th,
                                                         group=group or "default", **options)
        return hoffman_lauritzen_from_half_times(T, th, group=group or "default", **options)
    fits = list(fits)
    if not fits:
        raise CrystkinInputError(f"{where}: no isotherm fits given")
    groups = list(dict.fromkeys(f.trace.info.group for f in fits))
    if group is None and len(groups) > 1:
        raise CrystkinInputError(f"{where}: the fits hold groups {groups}; pass group= to "
                                 "choose one")
    group = group if group is not None else groups[0]
    fits = [f for f in fits if f.trace.info.group == group]
    if not fits:
        raise CrystkinInputError(f"{where}: no fits of group '{group}'")
    T = [f.trace.info.temperature for f in fits]
    th = [np.asarray(f.derived["t_half_s"], dtype=float) for f in fits]
    return hoffman_lauritzen_from_half_times(T, th, group=group, **options)


def hoffman_lauritzen_from_table(table, **options):
    """Hoffman-Lauritzen analysis of a :class:`kinetics.io.growth.RateTable`
    (T_c with t_half, or T_c with G), with its SD column when present."""
    if table.quantity == "t_half":
        return hoffman_lauritzen_from_half_times(table.T_c, table.values, t_half_sd=table.sd,
                                                 **options)
    return fit_hoffman_lauritzen(table.T_c, table.values, rate_sd=table.sd, rate_kind="G",
                                 **options)


# ----------------------------------------------------------------------------- microscopy

@dataclass(frozen=True)
class GrowthRates:
    """Linear spherulite growth rates, one per temperature.

    Attributes
    ----------
    T_c : ndarray, K
    draws : tuple of ndarray
        Posterior draws of G at each temperature, m/s.
    n_points : tuple of int
    r2 : tuple of float
    source : str
    flags : tuple of str
    """

    T_c: np.ndarray
    draws: tuple
    n_points: tuple
    r2: tuple
    source: str = ""
    flags: tuple[str, ...] = ()

    def table(self) -> pd.DataFrame:
        rows = []
        for T, d, k, r2 in zip(self.T_c, self.draws, self.n_points, self.r2, strict=True):
            r = {"T_c_K": T, "T_c_degC": celsius(T)}
            r.update(interval_columns("G_m_per_s", d))
            r.update(interval_columns("G_um_per_min", d * 1e6 * 60))
            r.update({"n_points": k, "r2_linear": r2})
            rows.append(r)
        return pd.DataFrame(rows)


def fit_growth_rates(radii, *, seed: int = 0, min_points: int = 3,
                     n_draws: int = 4000) -> GrowthRates:
    """Growth rate G at each temperature from spherulite radius against time.

    Parameters
    ----------
    radii : RadiusTable
        From :func:`kinetics.io.growth.read_radius_table` (temperature K, time s, radius m).
    seed : int
    min_points : int
        Fewest (time, radius) points per temperature (at least 3).

    Returns
    -------
    GrowthRates

    Notes
    -----
    R(t) = R0 + G t, a straight line per temperature with unknown scatter; G is drawn
    from its exact posterior (flat priors, scatter with prior 1/sigma). Linear growth
    at constant temperature is the observation HL theory describes (Hoffman & Miller 1997).

    Raises
    ------
    CrystkinInputError
        Too few points at a temperature, or a growth rate that is not clearly positive.
    """
    where = f"fit_growth_rates ({radii.source})" if radii.source else "fit_growth_rates"
    if int(min_points) < 3:
        raise CrystkinInputError(f"The 'min_points' parameter of fit_growth_rates must be at "
                                 f"least 3. Got {min_points!r} instead.")
    temps, draws, npts, r2s, flags = [], [], [], [], []
    for k, (T, t, r) in enumerate(radii.series()):
        if len(t) < min_points:
            raise CrystkinInputError(
                f"{where}: {len(t)} radius points at {celsius(T):.2f} degC, fewer than "
                f"{min_points}; add measurements or remove that temperature")
        prob = line_problem(t, r, name=f"growth {celsius(T):.2f} degC", slope_name="G",
                            intercept_name="R0", slope_unit="m/s", intercept_unit="m")
        post = sample_posterior(prob, seed=seed + k)
        g = post["G"][:n_draws]
        if not np.median(g) > 0:
            raise CrystkinInputError(
                f"{where}: the radius at {celsius(T):.2f} degC does not grow (G = "
                f"{np.median(g):.3g} m/s, a negative growth rate); check the time and radius "
                "columns")
        if np.mean(g <= 0) > 0.025:
            flags.append(f"{celsius(T):.2f} degC: growth rate not clearly positive")
        ls = post.least_squares
        resid = r - (ls["R0"] + ls["G"] * t)
        sst = float(np.sum((r - r.mean()) ** 2))
        temps.append(T)
        draws.append(g)
        npts.append(len(t))
        r2s.append(1 - float(np.sum(resid ** 2)) / sst if sst > 0 else float("nan"))
    return GrowthRates(np.asarray(temps), tuple(draws), tuple(npts), tuple(r2s),
                       radii.source, tuple(flags))


def hoffman_lauritzen_from_growth(rates: GrowthRates, **options) -> HoffmanLauritzenFit:
    """Hoffman-Lauritzen analysis of microscopy growth rates (draws carried in)."""
    return fit_hoffman_lauritzen(rates.T_c, list(rates.draws), rate_kind="G", **options)


# ----------------------------------------------------------------------------- E(T) route

@dataclass(frozen=True)
class HLEnergyFit:
    """Kg (and optionally U*) from an isoconversional E(T).

    Attributes
    ----------
    T : ndarray, K
    E : ndarray, J/mol
    E_sd : ndarray or None, J/mol
    draws : dict
        ``Kg`` (K^2), ``U_star`` (J/mol), ``Tm0``, ``T_inf`` per draw.
    free_U_star : bool
    settings : dict
    noise : str
    flags, cautions : tuple of str
    group : str
    """

    T: np.ndarray
    E: np.ndarray
    E_sd: np.ndarray | None
    draws: dict
    free_U_star: bool
    settings: dict
    noise: str
    flags: tuple[str, ...] = ()
    cautions: tuple[str, ...] = ()
    group: str = "default"

    def Kg(self) -> np.ndarray:
        return self.draws["Kg"]

    def table(self) -> pd.DataFrame:
        r = {"group": self.group, "method": "isoconversional E(T) (Vyazovkin-Sbirrazzuoli)",
             "n_points": len(self.T), "T_min_degC": float(celsius(self.T.min())),
             "T_max_degC": float(celsius(self.T.max()))}
        r.update(interval_columns("Kg_K2", self.draws["Kg"]))
        r.update(interval_columns("U_star_J_per_mol", self.draws["U_star"]))
        r.update({"U_star_free": self.free_U_star, "Tm0_K": self.settings["Tm0"],
                  "T_inf_K": self.settings["T_inf"], "noise_model": self.noise,
                  "flags": "; ".join(self.flags)})
        return pd.DataFrame([r])

    def band(self, T=None) -> pd.DataFrame:
        """Median and 95 % band of the fitted E(T), J/mol."""
        T = (np.linspace(self.T.min(), self.T.max(), 100) if T is None
             else np.asarray(T, dtype=float))
        d = self.draws
        E = hl_activation_energy(T[None, :], U_star=d["U_star"][:, None],
                                 T_inf=d["T_inf"][:, None], Kg=d["Kg"][:, None],
                                 Tm0=d["Tm0"][:, None])
        q = np.nanquantile(E, [0.025, 0.5, 0.975], axis=0)
        return pd.DataFrame({"T_K": T, "T_degC": celsius(T), "E_J_per_mol": q[1],
                             "E_J_per_mol_lo95": q[0], "E_J_per_mol_hi95": q[2]})


def hl_from_activation_energy(T, E, *, E_sd=None, Tm0, Tm0_sd: float = 0.0,
                              U_star: float = U_STAR_DEFAULT.value, U_star_sd: float = 0.0,
                              T_inf: float | None = None, T_inf_sd: float = 0.0,
                              Tg: float | None = None, free_U_star: bool = False,
                              noise: str = "auto", n_draws: int = 2000,
                              n_nuisance: int = 250, seed: int = 0,
                              group: str = "default") -> HLEnergyFit:
    """Hoffman-Lauritzen Kg from the temperature dependence of the isoconversional E.

    Parameters
    ----------
    T : array_like of shape (n,), K
        Temperatures of the isoconversional estimates (mean T at each conversion).
    E : array_like of shape (n,) or (S, n), J/mol
        Effective activation energies, or their draws.
    E_sd : array_like of shape (n,), J/mol, optional
        SD of each E value (ignored for draws).
    Tm0, Tm0_sd : float, K
    U_star, U_star_sd : float, J/mol
        Fixed (default 6276 J/mol) unless ``free_U_star``.
    T_inf, T_inf_sd : float, K
        Default Tg - 30 K.
    free_U_star : bool
        Estimate U* with Kg (both enter E linearly); often poorly determined.
    noise : {"auto", "known", "scaled", "estimate"}
        As in :func:`fit_hoffman_lauritzen`.
    n_draws, n_nuisance, seed : int
        As in :func:`fit_hoffman_lauritzen`.

    Returns
    -------
    HLEnergyFit

    Notes
    -----
    E(T) = U* T^2/(T - T_inf)^2 + Kg R (Tm0^2 - T^2 - Tm0 T)/((Tm0 - T)^2 T)
    (Vyazovkin & Sbirrazzuoli, Macromol. Rapid Commun. 25 (2004) 733; from memory), the
    derivative -R d ln G/d(1/T) of the HL rate. Linear in Kg (and U*), so for every draw
    of Tm0, T_inf (and U*) the coefficients are drawn from their exact posterior.
    """
    where = "hl_from_activation_energy"
    check_option("noise", noise, ("auto", "known", "scaled", "estimate"), where)
    T = np.asarray(T, dtype=float).ravel()
    Earr = np.asarray(E, dtype=float)
    flags = []
    if Earr.ndim == 2:
        if Earr.shape[1] != len(T):
            raise CrystkinInputError(f"{where}: E draws have {Earr.shape[1]} columns for "
                                     f"{len(T)} temperatures")
        Ev = np.nanmedian(Earr, axis=0)
        Esd = np.nanstd(Earr, axis=0, ddof=1)
    else:
        Ev = np.broadcast_to(Earr, T.shape).astype(float)
        Esd = None if E_sd is None else np.broadcast_to(np.asarray(E_sd, float), T.shape)
    if not np.all(np.isfinite(T)) or not np.all(np.isfinite(Ev)):
        raise CrystkinInputError(f"{where}: temperatures and energies must be finite numbers")
    if Esd is not None and not np.all(np.isfinite(Esd) & (Esd > 0)):
        raise CrystkinInputError(f"{where}: every E SD must be a positive number (J/mol)")
    Tm0 = float(Tm0)
    if T_inf is None:
        if Tg is None:
            raise CrystkinInputError(f"{where} needs T_inf (K) or Tg (K)")
        T_inf = default_T_inf(Tg)
    T_inf = float(T_inf)
    _check_temperatures(T, Tm0, T_inf, where)
    k = 2 if free_U_star else 1
    if len(T) < k + 2:
        raise CrystkinInputError(f"{where}: {len(T)} points, fewer than the {k + 2} needed for "
                                 f"{k} parameter(s) and a check on the scatter")

    Tm0_sd, T_inf_sd, U_star_sd = (_nonneg("Tm0_sd", Tm0_sd), _nonneg("T_inf_sd", T_inf_sd),
                                   _nonneg("U_star_sd", U_star_sd))
    U_star = float(U_star)
    n = len(T)

    def problem(u, mode, *, Tm0_fixed=None, T_inf_fixed=None):
        # nonlinear parameters: Tm0 and T_inf, unless fixed (vectorised draws in the engine)
        w, nz = _design(n, Esd, mode)
        params = []
        if Tm0_fixed is None:
            params.append(Parameter("Tm0", "K", Uniform(float(T.max()) + 1e-3,
                                                        float(T.max()) + 1e4)))
        if T_inf_fixed is None:
            params.append(Parameter("T_inf", "K", Uniform(float(T.min()) - 1e4,
                                                          float(T.min()) - 1e-3)))
        if free_U_star:
            lin = (Parameter("U_star", "J/mol", _WIDE), Parameter("Kg", "K^2", _WIDE))
            y = Ev * w
        else:
            lin = (Parameter("Kg", "K^2", _WIDE),)
            y = (Ev - u * hl_energy_terms(T, Tm0=Tm0, T_inf=T_inf_fixed)[0]) * w

        def basis(theta):
            m = theta.shape[0]
            tm = theta[:, 0:1] if Tm0_fixed is None else Tm0_fixed
            ti = theta[:, len(params) - 1:len(params)] if T_inf_fixed is None else T_inf_fixed
            a, g = hl_energy_terms(T[None, :], Tm0=tm, T_inf=ti)
            g = np.broadcast_to(w * g, (m, n))
            if free_U_star:
                return [np.stack([np.broadcast_to(w * a, (m, n)), g], axis=1)]
            return [g[:, None, :]]

        return FitProblem("HL from E(T)", tuple(params), y, basis=basis, linear=lin, noise=nz)

    if Esd is None:
        mode = "estimate"
    elif noise != "auto":
        mode = noise
    else:
        pk = problem(U_star, "known", Tm0_fixed=Tm0, T_inf_fixed=T_inf)
        chi2 = _misfit(pk, fit_least_squares(pk).x, Esd, "known")
        dof = n - k
        p = float(stats.chi2.sf(chi2, dof))
        mode = "known" if p >= 0.01 else "scaled"
        if mode == "scaled":
            flags.append(f"E values scatter more than their SDs allow (chi-square {chi2:.1f} on "
                         f"{dof} dof, p = {p:.2g}); SDs scaled by a factor estimated from the "
                         "data")
    rng = np.random.default_rng(seed)
    S = int(n_draws)
    if free_U_star or (T_inf_sd == 0 and U_star_sd == 0):
        # the data do not move with the draws: one vectorised engine call
        Tm0_d = _truncated_normal(rng, Tm0, Tm0_sd, S, lower=T.max() + 1e-3)
        Ti_d = _truncated_normal(rng, T_inf, T_inf_sd, S, upper=T.min() - 1e-3)
        U_d = np.full(S, U_star)
        if free_U_star:
            out, _ = conditional_draws(problem(U_star, mode), np.column_stack([Tm0_d, Ti_d]),
                                       rng)
        else:
            out, _ = conditional_draws(problem(U_star, mode, T_inf_fixed=T_inf),
                                       Tm0_d[:, None], rng)
    else:
        # U* a(T_inf) shifts the data: distinct (U*, T_inf) draws, Tm0 vectorised within
        n_nu = min(S, int(n_nuisance))
        reps = int(np.ceil(S / n_nu))
        uu = _truncated_normal(rng, U_star, U_star_sd, n_nu, lower=0.0)
        ti = _truncated_normal(rng, T_inf, T_inf_sd, n_nu, upper=T.min() - 1e-3)
        Tm0_d = _truncated_normal(rng, Tm0, Tm0_sd, n_nu * reps, lower=T.max() + 1e-3)
        out = np.concatenate([
            conditional_draws(problem(uu[i], mode, T_inf_fixed=ti[i]),
                              Tm0_d[i * reps:(i + 1) * reps, None], rng)[0]
            for i in range(n_nu)])[:S]
        Tm0_d = Tm0_d[:S]
        U_d, Ti_d = np.repeat(uu, reps)[:S], np.repeat(ti, reps)[:S]
    draws = {"Tm0": Tm0_d, "T_inf": Ti_d}
    if free_U_star:
        draws["U_star"] = out[:, 0]
        draws["Kg"] = out[:, 1]
    else:
        draws["U_star"] = U_d
        draws["Kg"] = out[:, 0]
    if np.mean(draws["Kg"] <= 0) > 0.025:
        flags.append("Kg is not clearly positive")
    cautions = ("E(T) from an isoconversional analysis of cooling runs reflects overall "
                "(nucleation and growth) kinetics; Kg from it is comparable with Kg from "
                "1/t_half, not necessarily with a microscopy Kg.",
                HL_CAUTIONS[0])
    settings = {"Tm0": Tm0, "Tm0_sd": Tm0_sd, "U_star": float(U_star), "U_star_sd": U_star_sd,
                "T_inf": T_inf, "T_inf_sd": T_inf_sd, "Tg": Tg, "n_draws": S, "seed": seed}
    return HLEnergyFit(T=T, E=Ev, E_sd=Esd, draws=draws, free_U_star=free_U_star,
                       settings=settings, noise=mode, flags=tuple(flags), cautions=cautions,
                       group=group)


@dataclass(frozen=True)
class KgComparison:
    """Ratio of Kg from isothermal rates to Kg from the isoconversional E(T).

    Attributes
    ----------
    ratio : ndarray
        Kg_isothermal / Kg_isoconversional per draw (independent posteriors paired at random).
    Kg_isothermal, Kg_isoconversional : ndarray, K^2
    segment : str
    """

    ratio: np.ndarray
    Kg_isothermal: np.ndarray
    Kg_isoconversional: np.ndarray
    segment: str
    group: str = "default"

    @property
    def probability_isothermal_larger(self) -> float:
        return float(np.mean(self.ratio > 1))

    def table(self) -> pd.DataFrame:
        r = {"group": self.group, "isothermal_segment": self.segment}
        r.update(interval_columns("Kg_isothermal_K2", self.Kg_isothermal))
        r.update(interval_columns("Kg_isoconversional_K2", self.Kg_isoconversional))
        r.update(interval_columns("Kg_ratio_iso_over_isoconv", self.ratio))
        r["P_isothermal_larger"] = self.probability_isothermal_larger
        return pd.DataFrame([r])


def compare_kg(isothermal_result: HoffmanLauritzenFit, isoconversional_result: HLEnergyFit,
               *, segment: str = "one.all", seed: int = 0) -> KgComparison:
    """Compare Kg of the isothermal (1/t_half) and isoconversional (E(T)) routes.

    Parameters
    ----------
    isothermal_result : HoffmanLauritzenFit
    isoconversional_result : HLEnergyFit
    segment : {"one.all", "two.high_T", "two.low_T"}
        Which isothermal Kg to compare (default the one-line fit).
    seed : int
        For the random pairing of the two independent sets of draws.

    Notes
    -----
    The two estimates come from different data, so their posteriors are independent;
    the ratio is formed from randomly paired draws.
    """
    key = f"{segment}.Kg"
    if key not in isothermal_result.draws:
        raise CrystkinInputError(
            f"compare_kg: the isothermal result has no segment '{segment}'; use one of "
            f"{[k[:-3] for k in isothermal_result.draws if k.endswith('.Kg')]}")
    a = np.asarray(isothermal_result.draws[key])
    b = np.asarray(isoconversional_result.draws["Kg"])
    rng = np.random.default_rng(seed)
    S = max(len(a), len(b))
    a_s = a if len(a) == S else rng.choice(a, S)
    b_s = rng.permutation(b) if len(b) == S else rng.choice(b, S)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = a_s / b_s
    return KgComparison(ratio, a_s, b_s, segment, isothermal_result.group)
