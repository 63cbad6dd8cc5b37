"""Isoconversional effective activation energy of cooling runs: Friedman and Vyazovkin.

Both methods compare the runs at equal conversion X and give E_X against X
and against the mean temperature at which X is reached, for any temperature
programme (cooling included). They need three or more runs at different
rates (ICTAC recommendations, Vyazovkin et al., Thermochim. Acta 520 (2011) 1).

For a Nakamura process, dX/dt = K(T) f(X) with f(X) = n (1 - X)[-ln(1 - X)]^((n-1)/n),
so at fixed X the rate is proportional to K(T), the n-th root of the Avrami
rate constant, and the isoconversional E is -R d ln K / d(1/T); for a K(T) of
Hoffman–Lauritzen form this is the E(T) of Vyazovkin and Sbirrazzuoli
(:func:`kinetics.models.hoffman_lauritzen.hl_activation_energy`).

Kissinger's method is available only on request (:func:`kissinger`) and its
result always carries the published warning that it is unsound on cooling.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.constants import R
from scipy.optimize import minimize_scalar
from scipy.special import ndtri

from ..errors import CrystkinInputError, check_range
from ..estimate import interval_columns
from ..models.ozawa import kissinger_linearised
from ..prep.cooling import conversion_noise_map, cooling_rate, local_rate
from ..units import celsius
from .nonisothermal import LineDraws, RowsResult, estimate_columns, line_draws, require_rates
from .seeds import run_seed

__all__ = [
    "ISO_CONVERSIONS", "KISSINGER_WARNING", "FriedmanRow", "FriedmanResult", "friedman",
    "friedman_points", "VyazovkinRow", "VyazovkinResult", "vyazovkin", "vyazovkin_energy",
    "vyazovkin_phi", "KissingerResult", "kissinger",
]

#: Default conversions: 5-95 % in steps of 5 % (ICTAC 2011 advises steps of at
#: most 0.05; from memory).
ISO_CONVERSIONS = tuple(np.round(np.arange(0.05, 0.951, 0.05), 2))

KISSINGER_WARNING = (
    "Kissinger's method is unsound for processes on cooling: the assumption of heating is "
    "embedded in its final equation, so E from cooling runs is not a valid activation energy "
    "(Vyazovkin, Macromol. Rapid Commun. 23 (2002) 771; Vyazovkin, Molecules 25 (2020) 2813). "
    "Shown only because it was requested; use the isoconversional E instead.")


def _levels(conversions, delta):
    X = np.asarray(ISO_CONVERSIONS if conversions is None else conversions, dtype=float)
    X = np.atleast_1d(X)
    if np.any(X - delta / 2 <= 0) or np.any(X + delta / 2 >= 1):
        raise CrystkinInputError(
            f"isoconversional conversions must lie in ({delta / 2:g}, {1 - delta / 2:g}) for an "
            f"interval of {delta:g}; got {X.tolist()}")
    return X


def _times(conv, levels):
    return np.array([conv.time_at(float(x)) for x in levels])


# --- Friedman ------------------------------------------------------------------------------

@dataclass(frozen=True)
class FriedmanRow:
    """Friedman's line at one conversion.

    Attributes
    ----------
    X : float
    estimable : bool
    note : str
    T_K : tuple of float
        Temperature of each run at X.
    draws : dict or None
        ``E_kJ_per_mol`` and ``ln_Af`` (ln of A f(X), rate in 1/s).
    fit : LineDraws or None
    group : str
    """

    X: float
    estimable: bool
    note: str
    T_K: tuple[float, ...]
    draws: dict | None = None
    fit: LineDraws | None = None
    group: str = "default"

    def row(self) -> dict:
        T = np.asarray(self.T_K) if self.T_K else np.array([np.nan])
        r = {"group": self.group, "X": self.X, "T_mean_K": float(np.mean(T)),
             "T_mean_degC": celsius(float(np.mean(T))), "T_min_degC": celsius(float(T.min())),
             "T_max_degC": celsius(float(T.max())), "estimable": self.estimable,
             "n_runs": len(self.T_K)}
        r.update(estimate_columns(self.draws, ("E_kJ_per_mol", "ln_Af")))
        r["scatter_factor"] = self.fit.scatter_factor if self.fit is not None else np.nan
        r["r2_linear"] = self.fit.line.r2 if self.fit is not None else np.nan
        r["note"] = self.note
        return r


@dataclass(frozen=True)
class FriedmanResult(RowsResult):
    """Friedman's E against conversion and mean temperature. One row per point:
    see :meth:`FriedmanRow.row` for the columns."""


def friedman_points(T_K, ln_rate, *, sigma=None, seed=0, X=float("nan"),
                    group="default") -> FriedmanRow:
    """Friedman's line at one conversion from tabulated (T, ln dX/dt) points.

    Parameters
    ----------
    T_K : array_like, K
    ln_rate : array_like
        ln(dX/dt) with dX/dt in 1/s.
    sigma : array_like, optional
        Errors of ln_rate (default 0.01 each, used only for weighting).

    Notes
    -----
    ln(dX/dt)_X,i = ln[A_X f(X)] - E_X / (R T_X,i) (Friedman, J. Polym. Sci. C 6,
    183; the year 1964 from memory); E = -R slope.
    """
    T = np.asarray(T_K, dtype=float)
    y = np.asarray(ln_rate, dtype=float)
    s = np.broadcast_to(0.01 if sigma is None else np.asarray(sigma, dtype=float), y.shape)
    fit = line_draws(1.0 / T, y, sigma=s, seed=seed, name=f"Friedman X={X:.3f}",
                     slope_name="minus_E_over_R", intercept_name="ln_Af")
    return FriedmanRow(float(X), True, "", tuple(map(float, T)),
                       {"E_kJ_per_mol": -fit.slope * R / 1e3, "ln_Af": fit.intercept}, fit, group)


def friedman(runs, *, conversions=None, delta=0.02, min_rates=3, seed=0,
             group="default") -> FriedmanResult:
    """Friedman's differential isoconversional method.

    Parameters
    ----------
    runs : sequence of Conversion
        Cooling runs (from :func:`kinetics.prep.cooling.prepare_cooling`) at three
        or more rates.
    conversions : array_like, optional
        X levels; default 0.05, 0.10, ..., 0.95.
    delta : float
        The rate at X is Delta X / Delta t over [X - delta/2, X + delta/2].
    min_rates : int
    seed : int

    Returns
    -------
    FriedmanResult

    Raises
    ------
    CrystkinInputError
        Fewer than three rates.

    Notes
    -----
    ln(dX/dt)_X,i = ln[A_X f(X)] - E_X/(R T_X,i) across runs i (Friedman;
    ICTAC 2011). The error of each point comes from the run's conversion noise
    model: delta ln r = (delta X(t2) - delta X(t1))/delta at the interval ends,
    and the temperature at X moves by beta delta X/r; both enter the effective
    error sd(ln r - b/T) with b the unweighted slope (first-order errors in
    both coordinates). The line is then a posterior from the engine, with the
    Birge factor when the points scatter more than these errors.
    """
    runs = list(runs)
    require_rates(runs, "Friedman's isoconversional analysis", need=min_rates)
    check_range("delta", float(delta), "friedman", lower=0.0, upper=0.2, inclusive=False)
    levels = _levels(conversions, delta)
    K = len(levels)
    per_run = []
    for conv in runs:
        t1 = _times(conv, levels - delta / 2)
        t2 = _times(conv, levels + delta / 2)
        tX = _times(conv, levels)
        ok = np.isfinite(t1) & np.isfinite(t2) & np.isfinite(tX) & (t2 > t1)
        tt = np.where(ok, np.concatenate([t1, t2, tX]).reshape(3, K), conv.time[0])
        _, G = conversion_noise_map(conv, tt.ravel())
        G1, G2, GX = G[:K], G[K:2 * K], G[2 * K:]
        r = delta / np.where(ok, tt[1] - tt[0], 1.0)
        T = np.interp(tt[2], conv.time, conv.temperature)
        g_lnr = (G2 - G1) / delta
        g_invT = -cooling_rate(conv) * GX / (r * T ** 2)[:, None]
        per_run.append((ok, np.log(r), T, g_lnr, g_invT))
    rows = []
    for j, X in enumerate(levels):
        use = [(lr[j], T[j], gl[j], gi[j]) for ok, lr, T, gl, gi in per_run if ok[j]]
        Ts = tuple(float(u[1]) for u in use)
        if len(use) < min_rates:
            rows.append(FriedmanRow(float(X), False, f"not estimable: {len(use)} run(s) reach "
                                    f"{X - delta / 2:.3f}-{X + delta / 2:.3f} conversion (need "
                                    f"{min_rates})", Ts, group=group))
            continue
        x = 1.0 / np.array(Ts)
        y = np.array([u[0] for u in use])
        b0 = np.polyfit(x, y, 1)[0]
        sig = np.array([np.sqrt(np.sum((u[2] - b0 * u[3]) ** 2)) for u in use])
        rows.append(friedman_points(Ts, y, sigma=sig, seed=run_seed(seed, f"friedman:{group}:"
                                                                      f"{X:.4f}"),
                                    X=float(X), group=group))
    return FriedmanResult(tuple(rows), (),
                          {"delta": float(delta), "rate": "Delta X / Delta t over the interval",
                           "errors": "conversion noise model, both coordinates, first order"})


# --- Vyazovkin -----------------------------------------------------------------------------

def _ln_J(E, t, T, T_ref):
    """ln of integral exp(-E/(R T)) dt, up to the common factor exp(-E/(R T_ref)); (m,)."""
    E = np.atleast_1d(np.asarray(E, dtype=float))
    a = -E[:, None] / R * (1.0 / T[None, :] - 1.0 / T_ref)
    amax = a.max(axis=1, keepdims=True)
    f = np.exp(a - amax)
    J = np.sum(0.5 * (f[:, 1:] + f[:, :-1]) * np.diff(t)[None, :], axis=1)
    return amax[:, 0] + np.log(J)


def _phi_from_lnJ(L):
    """Phi = sum_i sum_{j != i} J_i/J_j from ln J of shape (..., n_runs)."""
    Lc = L - L.mean(axis=-1, keepdims=True)
    return np.sum(np.exp(Lc), axis=-1) * np.sum(np.exp(-Lc), axis=-1) - L.shape[-1]


def vyazovkin_phi(E, segments):
    """Vyazovkin's criterion Phi(E) for one conversion interval.

    Parameters
    ----------
    E : array_like of shape (m,), J/mol
    segments : sequence of (t, T)
        For each run, times (s) and temperatures (K) over its interval
        [t(X - dX), t(X)], ends included.

    Returns
    -------
    ndarray of shape (m,)
        Phi(E) = sum_i sum_{j != i} J[E, T_i] / J[E, T_j], at least n(n - 1).

    Notes
    -----
    J[E, T_i] = integral over the interval of exp(-E/(R T_i(t))) dt on the
    measured temperature (trapezoidal rule), computed relative to a common
    reference temperature so that no exponential overflows (the factor cancels
    in every ratio). Vyazovkin, J. Comput. Chem. 18 (1997) 393; 22 (2001) 178
    (from memory).
    """
    T_ref = float(np.mean([np.mean(T) for _, T in segments]))
    L = np.stack([_ln_J(E, np.asarray(t, float), np.asarray(T, float), T_ref)
                  for t, T in segments], axis=-1)
    return _phi_from_lnJ(L)


def vyazovkin_energy(segments, *, bracket=(-2000e3, 2000e3), grid_points=401):
    """E minimising Phi over a bracket: grid search, then scipy's bounded Brent method.

    Parameters
    ----------
    segments : sequence of (t, T)
        See :func:`vyazovkin_phi`.
    bracket : (float, float), J/mol
    grid_points : int

    Returns
    -------
    E : float, J/mol
    phi_min : float
    at_edge : bool
        The minimum lies at the bracket edge (E is not estimable there).
    """
    lo, hi = (float(v) for v in bracket)
    grid = np.linspace(lo, hi, int(grid_points))
    phi = vyazovkin_phi(grid, segments)
    k = int(np.nanargmin(phi))
    if k in (0, len(grid) - 1):
        return float(grid[k]), float(phi[k]), True
    res = minimize_scalar(lambda e: float(vyazovkin_phi([e], segments)[0]), method="bounded",
                          bounds=(grid[k - 1], grid[k + 1]), options={"xatol": 1e-3})
    return float(res.x), float(res.fun), False


def _segment(conv, ta, tb):
    t = conv.time
    inside = (t > ta) & (t < tb)
    tt = np.concatenate([[ta], t[inside], [tb]])
    return tt, np.interp(tt, t, conv.temperature)


@dataclass(frozen=True)
class VyazovkinRow:
    """Vyazovkin's E at one conversion.

    Attributes
    ----------
    X : float
        Centre of the conversion interval [X - delta/2, X + delta/2].
    estimable : bool
    note : str
    E_point : float, J/mol
        Minimiser of Phi on the measured conversion curves.
    draws : ndarray or None, J/mol
        E of the resampled conversion curves.
    T_mean_K : float
        Mean temperature of the runs over the interval.
    phi_min : float
    n_runs : int
    group : str
    jackknife_sd : float, J/mol
        Leave-one-run-out SD of E, added to the resampled draws.
    """

    X: float
    delta: float
    estimable: bool
    note: str
    E_point: float
    draws: np.ndarray | None
    T_mean_K: float
    phi_min: float
    n_runs: int
    group: str = "default"
    jackknife_sd: float = float("nan")

    def row(self) -> dict:
        n = self.n_runs
        r = {"group": self.group, "X": self.X, "X_from": self.X - self.delta / 2,
             "X_to": self.X + self.delta / 2, "T_mean_K": self.T_mean_K,
             "T_mean_degC": celsius(self.T_mean_K), "estimable": self.estimable, "n_runs": n}
        if self.draws is not None:
            r.update(interval_columns("E_kJ_per_mol", self.draws / 1e3))
        else:
            r.update({"E_kJ_per_mol": np.nan, "E_kJ_per_mol_lo95": np.nan,
                      "E_kJ_per_mol_hi95": np.nan})
        r["E_point_kJ_per_mol"] = self.E_point / 1e3
        r["E_jackknife_sd_kJ_per_mol"] = self.jackknife_sd / 1e3
        r["phi_min_ratio"] = self.phi_min / (n * (n - 1)) if n > 1 else np.nan
        r["n_draws"] = 0 if self.draws is None else int(len(self.draws))
        r["note"] = self.note
        return r


@dataclass(frozen=True)
class VyazovkinResult(RowsResult):
    """Vyazovkin's E against conversion and mean temperature. One row per point:
    see :meth:`VyazovkinRow.row` for the columns."""


def _resampled_E(runs_t, runs_T, t_lo, t_hi, E0, T_ref, width0):
    """E minimising Phi for each resampled interval set; vectorised over draws."""
    S = t_lo.shape[1]
    w = width0
    for _ in range(6):
        grid = E0 + w * np.linspace(-1.0, 1.0, 41)
        L = np.empty((len(grid), S, len(runs_t)))
        for i, (t, T) in enumerate(zip(runs_t, runs_T, strict=True)):
            a_i = max(int(np.searchsorted(t, t_lo[i].min())) - 1, 0)
            b_i = min(int(np.searchsorted(t, t_hi[i].max())) + 1, len(t) - 1)
            tt, TT = t[a_i:b_i + 1], T[a_i:b_i + 1]
            ex = -grid[:, None] / R * (1.0 / TT[None, :] - 1.0 / T_ref)
            emax = ex.max(axis=1, keepdims=True)
            f = np.exp(ex - emax)
            F = np.zeros_like(f)
            np.cumsum(0.5 * (f[:, 1:] + f[:, :-1]) * np.diff(tt)[None, :], axis=1, out=F[:, 1:])

            def at(tq, tt=tt, F=F):
                k = np.clip(np.searchsorted(tt, tq) - 1, 0, len(tt) - 2)
                frac = (tq - tt[k]) / (tt[k + 1] - tt[k])
                return F[:, k] + frac[None, :] * (F[:, k + 1] - F[:, k])

            J = np.maximum(at(t_hi[i]) - at(t_lo[i]), 1e-300)
            L[:, :, i] = emax + np.log(J)
        phi = _phi_from_lnJ(L)
        k = np.argmin(phi, axis=0)
        if np.any((k == 0) | (k == len(grid) - 1)):
            w *= 3.0
            continue
        p0, p1, p2 = (phi[k - 1, np.arange(S)], phi[k, np.arange(S)], phi[k + 1, np.arange(S)])
        den = p0 - 2 * p1 + p2
        shift = np.where(den > 0, 0.5 * (p0 - p2) / np.where(den > 0, den, 1.0), 0.0)
        step = grid[1] - grid[0]
        E = grid[k] + np.clip(shift, -1, 1) * step
        sd = float(np.std(E))
        if sd < 2 * step and w > 1.0:
            w = max(6 * sd, 1.0)
            continue
        return E
    return None


def _jackknife_sd(segs, bracket):
    """Leave-one-run-out standard deviation of E (Efron & Tibshirani 1993, ch. 11)."""
    n = len(segs)
    E = np.array([vyazovkin_energy(segs[:i] + segs[i + 1:], bracket=bracket)[0]
                  for i in range(n)])
    return float(np.sqrt((n - 1) / n * np.sum((E - E.mean()) ** 2)))


def vyazovkin(runs, *, conversions=None, delta=0.02, bracket=(-2000e3, 2000e3), n_draws=200,
              min_rates=3, seed=0, group="default") -> VyazovkinResult:
    """Vyazovkin's advanced integral isoconversional method, for any temperature programme.

    Parameters
    ----------
    runs : sequence of Conversion
        Cooling runs at three or more rates (their measured T(t) is used).
    conversions : array_like, optional
        Interval centres X; default 0.05, 0.10, ..., 0.95.
    delta : float
        Width of each conversion interval [X - delta/2, X + delta/2].
    bracket : (float, float), J/mol
        Search range of E (negative values occur on cooling below Tm0).
    n_draws : int
        Resampled conversion curves per run for the interval (0: none).
    min_rates : int
    seed : int

    Returns
    -------
    VyazovkinResult
        ``E_kJ_per_mol`` columns: median and 95 % interval of the resampled
        estimates; ``E_point_kJ_per_mol``: the estimate on the measured curves.

    Raises
    ------
    CrystkinInputError
        Fewer than three rates.

    Notes
    -----
    For each X, E minimises Phi(E) = sum_i sum_{j != i} J[E, T_i(t)] / J[E, T_j(t)]
    with J[E, T_i(t)] = integral from t_i(X - delta/2) to t_i(X + delta/2) of
    exp(-E/(R T_i(t))) dt on each run's measured temperature (Vyazovkin, J.
    Comput. Chem. 18 (1997) 393 and 22 (2001) 178, from memory; Vyazovkin
    integrates over [X - delta, X], we centre the interval on X so that E_X is
    comparable with Friedman's). Minimisation: a grid over ``bracket``, then
    scipy's bounded Brent method (``minimize_scalar``) between the grid
    neighbours of the best point.

    Uncertainty. Phi is a consistency criterion, not a likelihood, so it gives
    no posterior by itself. We resample instead: each draw perturbs every run's
    conversion curve by a joint draw from its noise model
    (:func:`kinetics.prep.cooling.conversion_noise_map`: the same errors that
    weight the Friedman, Ozawa and Mo lines), moves the interval ends by
    delta t = -delta X / (dX/dt), and minimises Phi again. The spread of these
    estimates reflects the noise of the measured curves only. Systematic
    differences between runs (baseline choices, an E that changes over the
    temperatures the runs span at one X) are taken in by a leave-one-run-out
    jackknife (Efron & Tibshirani, An Introduction to the Bootstrap, 1993,
    ch. 11): each resampled estimate gets a normal term with the jackknife SD
    (evenly spaced normal quantiles in random order, to keep Monte Carlo noise
    low), so the interval is noise and between-run disagreement
    combined (``E_jackknife_sd_kJ_per_mol``; ``phi_min_ratio`` = Phi_min /
    (n (n - 1)), 1 for perfectly consistent runs). An F-ratio interval on Phi
    (Vyazovkin & Wight, Anal. Chem. 72 (2000) 3171, from memory) is an
    alternative we did not use, because its premise (Phi as a ratio of
    variances) is not met.
    """
    runs = list(runs)
    require_rates(runs, "Vyazovkin's isoconversional analysis", need=min_rates)
    check_range("delta", float(delta), "vyazovkin", lower=0.0, upper=0.2, inclusive=False)
    check_range("n_draws", int(n_draws), "vyazovkin", lower=0)
    lo_b, hi_b = (float(v) for v in bracket)
    if not hi_b > lo_b:
        raise CrystkinInputError(f"The 'bracket' parameter of vyazovkin must be (low, high) in "
                                 f"J/mol with low < high. Got {bracket!r} instead.")
    levels = _levels(conversions, delta)
    K = len(levels)
    rng = np.random.default_rng(run_seed(seed, f"vyazovkin:{group}"))
    per_run = []
    for conv in runs:
        t_lo = _times(conv, levels - delta / 2)
        t_hi = _times(conv, levels + delta / 2)
        ok = np.isfinite(t_lo) & np.isfinite(t_hi) & (t_hi > t_lo)
        t_lo = np.where(ok, t_lo, conv.time[0])
        t_hi = np.where(ok, t_hi, conv.time[-1])
        draws_lo = draws_hi = None
        if n_draws:
            tt = np.concatenate([t_lo, t_hi])
            _, G = conversion_noise_map(conv, tt)
            dX = G @ rng.standard_normal((G.shape[1], int(n_draws)))
            dt = -dX / local_rate(conv, tt)[:, None]
            shifted = np.clip(tt[:, None] + dt, conv.time[0], conv.time[-1])
            draws_lo, draws_hi = shifted[:K], shifted[K:]
            draws_hi = np.maximum(draws_hi, draws_lo + 1e-9)
        per_run.append((conv, ok, t_lo, t_hi, draws_lo, draws_hi))
    rows = []
    for j, X in enumerate(levels):
        use = [p for p in per_run if p[1][j]]
        if len(use) < min_rates:
            rows.append(VyazovkinRow(float(X), float(delta), False,
                                     f"not estimable: {len(use)} run(s) cover "
                                     f"{X - delta / 2:.3f}-{X + delta / 2:.3f} conversion (need "
                                     f"{min_rates})", np.nan, None, np.nan, np.nan, len(use),
                                     group))
            continue
        segs = [_segment(c, lo[j], hi[j]) for c, _, lo, hi, _, _ in use]
        T_mean = float(np.mean([np.mean(T) for _, T in segs]))
        E0, phi0, edge = vyazovkin_energy(segs, bracket=(lo_b, hi_b))
        if edge:
            rows.append(VyazovkinRow(float(X), float(delta), False,
                                     f"not estimable: the minimum of Phi lies at the bracket edge "
                                     f"({E0 / 1e3:.0f} kJ/mol); widen 'bracket'", E0, None,
                                     T_mean, phi0, len(use), group))
            continue
        E_draws = None
        note = ""
        sd_jk = float("nan")
        if n_draws:
            E_draws = _resampled_E([c.time for c, *_ in use], [c.temperature for c, *_ in use],
                                   np.stack([p[4][j] for p in use]),
                                   np.stack([p[5][j] for p in use]), E0, T_mean,
                                   max(0.1 * abs(E0), 10e3))
            if E_draws is None:
                note = "resampling did not settle on a minimum; no interval"
            else:
                sd_jk = _jackknife_sd(segs, (lo_b, hi_b))
                S = len(E_draws)
                strata = ndtri((np.arange(S) + 0.5) / S)  # evenly spread normal quantiles
                E_draws = E_draws + sd_jk * rng.permutation(strata)
        rows.append(VyazovkinRow(float(X), float(delta), True, note, E0, E_draws, T_mean, phi0,
                                 len(use), group, sd_jk))
    return VyazovkinResult(tuple(rows), (),
                           {"delta": float(delta), "interval": "[X - delta/2, X + delta/2]",
                            "bracket_J_per_mol": (lo_b, hi_b), "n_draws": int(n_draws),
                            "uncertainty": "resampling of the conversion curves from their "
                                           "noise model"})


# --- Kissinger -----------------------------------------------------------------------------

@dataclass(frozen=True)
class KissingerResult:
    """Kissinger's E from peak temperatures, always with its warning.

    Attributes
    ----------
    beta_K_per_min, T_peak_K : tuple of float
    draws : dict
        ``E_kJ_per_mol`` and ``intercept`` of ln(beta/Tp^2) = intercept - E/(R Tp).
    fit : LineDraws
    warning : str
        :data:`KISSINGER_WARNING`.
    warnings : tuple of str
        Contains the warning.
    group : str
    """

    beta_K_per_min: tuple[float, ...]
    T_peak_K: tuple[float, ...]
    draws: dict
    fit: LineDraws
    warning: str = KISSINGER_WARNING
    warnings: tuple[str, ...] = (KISSINGER_WARNING,)
    group: str = "default"

    def table(self) -> pd.DataFrame:
        r = {"group": self.group, "n_rates": len(self.beta_K_per_min)}
        r.update(interval_columns("E_kJ_per_mol", self.draws["E_kJ_per_mol"]))
        r.update(interval_columns("intercept", self.draws["intercept"]))
        r["r2_linear"] = self.fit.line.r2
        r["rates_K_per_min"] = ", ".join(f"{b:.3g}" for b in self.beta_K_per_min)
        r["T_peak_degC"] = ", ".join(f"{celsius(T):.2f}" for T in self.T_peak_K)
        r["warning"] = self.warning
        return pd.DataFrame([r])


def kissinger(runs, *, seed=0, min_rates=3, group="default") -> KissingerResult:
    """Kissinger's plot of cooling peak temperatures (on explicit request only).

    Parameters
    ----------
    runs : sequence of Conversion
        At three or more rates.
    seed : int

    Returns
    -------
    KissingerResult
        Always carries :data:`KISSINGER_WARNING`.

    Notes
    -----
    ln(beta/Tp^2) = const - E/(R Tp), beta in K/min (Kissinger, Anal. Chem. 29
    (1957) 1702, volume and pages from memory). Unsound on cooling (Vyazovkin,
    Macromol. Rapid Commun. 23 (2002) 771; Molecules 25 (2020) 2813). The
    scatter of the points about the line is the only error estimate (one
    unknown noise SD, integrated out by the engine).
    """
    runs = list(runs)
    require_rates(runs, "Kissinger's method", need=min_rates)
    beta = np.array([cooling_rate(c) * 60.0 for c in runs])
    Tp = np.array([c.baseline["T_peak_K"] for c in runs])
    x, y = kissinger_linearised(beta, Tp)
    fit = line_draws(x, y, seed=run_seed(seed, f"kissinger:{group}"), name="Kissinger",
                     slope_name="minus_E_over_R", intercept_name="intercept")
    draws = {"E_kJ_per_mol": -fit.slope * R / 1e3, "intercept": fit.intercept}
    return KissingerResult(tuple(map(float, beta)), tuple(map(float, Tp)), draws, fit,
                           group=group)
