"""Apply a fitted rate model K(T) to a temperature–time profile.

The model (:class:`SimulationModel`) is a set of posterior draws of the
Nakamura–Hoffman–Lauritzen parameters, as fitted by
:func:`kinetics.analyses.global_rate.fit_global_rate` or read back from an
exported file (:func:`kinetics.export.simulation.read_simulation_model`).
:func:`predict_profile` evaluates X(t) for every draw on the profile and
summarises it: the median and 95 % band of X(t), and for each target
conversion the time and temperature at which it is reached, with intervals, or
a plain statement that it is not reached before the glass transition or the end
of the profile. Every result carries the process caution.

Model, per draw::

    X(t)      = 1 - exp(-theta(t)^n),  theta(t) = integral_{t_first}^t K(T(s)) ds
    K(T)      = (ln 2)^(1/n) / t_half(T)
    1/t_half  = (1/t_half)_0 exp[-U*/(R (T - T_inf))] exp[-Kg/(T (Tm0 - T) f)],
    f         = 2 T / (Tm0 + T)

with K = 0 above Tm0 and below the glass transition Tg (the melt does not
crystallize, the glass is frozen), and X = 0 at the first point of the profile
(the part starts molten and amorphous).

References
----------
Nakamura, Watanabe, Katayama, Amano, J. Appl. Polym. Sci. 16 (1972) 1077 (from memory).
Patel & Spruiell, Polym. Eng. Sci. 31 (1991) 730 (from memory).
Hoffman & Miller, Polymer 38 (1997) 3151 (from memory).
"""

from __future__ import annotations

import time as _time
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..cautions import PROCESS_CAUTION
from ..errors import CrystkinInputError, DataQualityWarning
from ..io.profile import TemperatureProfile
from ..models.hoffman_lauritzen import hl_ln_rate
from ..models.nakamura import LN2, nakamura_conversion
from ..units import celsius

__all__ = ["PARAMETER_NAMES", "PARAMETER_UNITS", "SimulationModel", "Prediction",
           "TargetResult", "predict_profile", "predict_from_profile", "rate_constant"]

#: Columns of a model's draws, in this order.
PARAMETER_NAMES = ("n", "ln_rate0", "Kg", "U_star", "T_inf", "Tm0")
#: SI unit of each parameter.
PARAMETER_UNITS = {"n": "1", "ln_rate0": "ln(1/s)", "Kg": "K^2", "U_star": "J/mol",
                   "T_inf": "K", "Tm0": "K"}
PARAMETER_DESCRIPTIONS = {
    "n": "Nakamura (Avrami) exponent",
    "ln_rate0": "natural logarithm of the prefactor (1/t_half)_0 of the half-time law, "
                "(1/t_half)_0 in 1/s",
    "Kg": "Hoffman-Lauritzen nucleation constant",
    "U_star": "activation energy of segmental transport",
    "T_inf": "temperature at which segmental transport stops",
    "Tm0": "equilibrium melting temperature",
}
_MAX_GRID = 4001


def rate_constant(T, draws) -> np.ndarray:
    """Nakamura K(T) for every draw, 1/s.

    Parameters
    ----------
    T : array of shape (N,), K
    draws : array of shape (S, 6)
        Columns :data:`PARAMETER_NAMES`.

    Returns
    -------
    ndarray of shape (S, N)
        K = (ln 2)^(1/n) / t_half(T); 0 outside T_inf < T < Tm0.

    Notes
    -----
    1/t_half = (1/t_half)_0 exp[-U*/(R (T - T_inf))] exp[-Kg/(T dT f)],
    dT = Tm0 - T, f = 2T/(Tm0 + T) (Hoffman–Lauritzen form); K from X(t_half) = 1/2
    in X = 1 - exp(-(K t)^n) (Nakamura et al. 1972).
    """
    d = np.atleast_2d(np.asarray(draws, dtype=float))
    T = np.asarray(T, dtype=float)[None, :]
    col = {name: d[:, i:i + 1] for i, name in enumerate(PARAMETER_NAMES)}
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        # ln K = ln (1/t_half) + ln(ln 2)/n, i.e. nakamura_K_from_half_time in one exp
        lnK = hl_ln_rate(T, ln_prefactor=col["ln_rate0"] + np.log(LN2) / col["n"], Kg=col["Kg"],
                         U_star=col["U_star"], T_inf=col["T_inf"], Tm0=col["Tm0"])
        K = np.exp(lnK)
    return np.where(np.isfinite(K), K, 0.0)


@dataclass(frozen=True)
class SimulationModel:
    """A fitted K(T): posterior draws plus what is needed to use them responsibly.

    Attributes
    ----------
    draws : ndarray of shape (S, 6)
        Posterior draws, columns :data:`PARAMETER_NAMES` (fixed constants repeat).
    parameters : dict
        Per parameter: ``unit``, ``median``, ``lo95``, ``hi95``, ``status``
        ("estimated", "fixed" or "normal prior"), ``prior``, ``description``.
    validity : dict
        ``temperature_K`` (lowest, highest temperature at which the fitted data
        crystallized), ``cooling_rate_K_per_s`` (slowest, fastest; 0 for isothermal
        holds), ``isothermal_temperatures_K``, ``cooling_rates_K_per_s``.
    glass_transition_K : float
        Tg below which conversion is frozen.
    study_name : str
    crystkin_version : str
    seed : int or None
    caution : str
    provenance : dict
        Fit diagnostics, checks and data used.
    source : str
        File read, or "in memory".
    """

    draws: np.ndarray
    parameters: dict
    validity: dict
    glass_transition_K: float
    study_name: str = ""
    crystkin_version: str = ""
    seed: int | None = None
    caution: str = PROCESS_CAUTION
    provenance: dict = field(default_factory=dict)
    source: str = "in memory"

    def __post_init__(self):
        d = np.array(self.draws, dtype=float, copy=True)
        if d.ndim != 2 or d.shape[1] != len(PARAMETER_NAMES) or d.shape[0] < 1:
            raise CrystkinInputError(
                f"model draws must be an array of shape (S, {len(PARAMETER_NAMES)}) with "
                f"columns {list(PARAMETER_NAMES)}; got shape {d.shape}", source=self.source)
        if not np.all(np.isfinite(d)):
            raise CrystkinInputError("model draws contain non-finite numbers",
                                     source=self.source)
        d.setflags(write=False)
        object.__setattr__(self, "draws", d)

    def __getitem__(self, name: str) -> np.ndarray:
        try:
            return self.draws[:, PARAMETER_NAMES.index(name)]
        except ValueError:
            raise KeyError(f"no parameter '{name}'; have {PARAMETER_NAMES}") from None

    @property
    def n_draws(self) -> int:
        return int(self.draws.shape[0])

    def rate_constant(self, T) -> np.ndarray:
        """K(T) per draw, 1/s, shape (S, N); zero below the glass transition."""
        T = np.asarray(T, dtype=float)
        K = rate_constant(T, self.draws)
        return np.where(T[None, :] < self.glass_transition_K, 0.0, K)

    def conversion(self, time_s, temperature_K) -> np.ndarray:
        """X on the given grid for every draw, shape (S, N), X = 0 at the first point."""
        t = np.asarray(time_s, dtype=float)
        K = self.rate_constant(temperature_K)
        return nakamura_conversion(t, K, self["n"][:, None])

    def rate_constant_table(self, temperature_K) -> pd.DataFrame:
        """K(T) and t_half(T) median and 95 % band on a temperature grid.

        Columns: ``T_K``, ``T_degC``, ``K_per_s`` (median), ``K_per_s_lo95``,
        ``K_per_s_hi95``, ``t_half_s`` (+ band), ``within_fitted_range``.
        """
        T = np.asarray(temperature_K, dtype=float)
        K = rate_constant(T, self.draws)
        big = 1e300
        with np.errstate(divide="ignore", over="ignore"):
            th = np.where(K > 0, np.log(2.0) ** (1.0 / self["n"][:, None]) / K, big)
        qK = np.quantile(K, [0.5, 0.025, 0.975], axis=0)
        qt = np.quantile(np.minimum(th, big), [0.5, 0.025, 0.975], axis=0)
        qt = np.where(qt >= 0.5 * big, np.inf, qt)
        lo, hi = self.validity.get("temperature_K", (np.nan, np.nan))
        return pd.DataFrame({
            "T_K": T, "T_degC": celsius(T),
            "K_per_s": qK[0], "K_per_s_lo95": qK[1], "K_per_s_hi95": qK[2],
            "t_half_s": qt[0], "t_half_s_lo95": qt[1], "t_half_s_hi95": qt[2],
            "within_fitted_range": (T >= lo) & (T <= hi),
        })

    def summary(self) -> pd.DataFrame:
        """One row per parameter: unit, status, median and 95 % interval."""
        rows = []
        for name in PARAMETER_NAMES:
            p = self.parameters.get(name, {})
            rows.append({"parameter": name, "unit": PARAMETER_UNITS[name],
                         "status": p.get("status", ""), "median": p.get("median"),
                         "lo95": p.get("lo95"), "hi95": p.get("hi95"),
                         "prior": p.get("prior", "")})
        return pd.DataFrame(rows)


@dataclass(frozen=True)
class TargetResult:
    """When one target conversion is reached on a profile.

    Attributes
    ----------
    conversion : float
        Target X (0-1).
    fraction_reached : float
        Share of posterior draws that reach it within the profile.
    time_s, time_lo95_s, time_hi95_s : float
        Median and 95 % interval of the time (profile's own time axis); NaN where
        that quantile is not reached.
    temperature_K, temperature_lo95_K, temperature_hi95_K : float
        Temperature at which it is reached: median and 95 % interval (on cooling,
        the colder end belongs to the later time); NaN where not reached.
    statement : str
        Plain sentence for tables and reports.
    """

    conversion: float
    fraction_reached: float
    time_s: float
    time_lo95_s: float
    time_hi95_s: float
    temperature_K: float
    temperature_lo95_K: float
    temperature_hi95_K: float
    statement: str

    @property
    def reached(self) -> bool:
        return self.fraction_reached >= 0.5


@dataclass(frozen=True)
class Prediction:
    """X(t) of a rate model on one profile, with targets, warnings and the caution.

    Attributes
    ----------
    time_s, temperature_K : ndarray
        The evaluation grid (the profile's points plus interpolated ones).
    X_median, X_lo95, X_hi95 : ndarray
        Posterior median and 95 % band of X on the grid.
    targets : tuple of TargetResult
    warnings : tuple of str
    caution : str
    glass_transition_time_s : float or None
        First time the profile is below the model's Tg.
    source : str
    provenance : dict
    """

    time_s: np.ndarray
    temperature_K: np.ndarray
    X_median: np.ndarray
    X_lo95: np.ndarray
    X_hi95: np.ndarray
    targets: tuple[TargetResult, ...]
    warnings: tuple[str, ...]
    caution: str
    glass_transition_time_s: float | None = None
    source: str = ""
    provenance: dict = field(default_factory=dict)

    def table(self) -> pd.DataFrame:
        """One row per target: times and temperatures with 95 % intervals, a statement,
        and the caution (also in ``attrs["caution"]``)."""
        rows = []
        for r in self.targets:
            rows.append({
                "target_conversion": r.conversion, "fraction_of_draws_reaching": r.fraction_reached,
                "t_s": r.time_s, "t_s_lo95": r.time_lo95_s, "t_s_hi95": r.time_hi95_s,
                "T_degC": celsius(r.temperature_K),
                "T_degC_lo95": celsius(r.temperature_lo95_K),
                "T_degC_hi95": celsius(r.temperature_hi95_K),
                "statement": r.statement, "caution": self.caution})
        df = pd.DataFrame(rows)
        df.attrs["caution"] = self.caution
        df.attrs["warnings"] = list(self.warnings)
        return df

    def curve(self) -> pd.DataFrame:
        """X(t) median and 95 % band on the grid (``attrs["caution"]`` carries the caution)."""
        df = pd.DataFrame({"t_s": self.time_s, "T_K": self.temperature_K,
                           "T_degC": celsius(self.temperature_K), "X_median": self.X_median,
                           "X_lo95": self.X_lo95, "X_hi95": self.X_hi95})
        df.attrs["caution"] = self.caution
        return df

    def text(self) -> str:
        """Plain-text summary: one line per target, the warnings, then the caution."""
        lines = [f"Prediction for {self.source or 'profile'}:"]
        lines += [f"  {r.statement}" for r in self.targets]
        if self.warnings:
            lines.append("Warnings:")
            lines += [f"  - {w}" for w in self.warnings]
        lines.append(self.caution)
        return "\n".join(lines)


def _fmt_time(t: float, spread: float = float("nan")) -> str:
    """Time in s (min above 10 min), with enough digits to show ``spread``."""
    digits = 3
    if np.isfinite(spread) and spread > 0 and t != 0:
        digits = int(np.clip(np.ceil(np.log10(abs(t) / spread)) + 1, 3, 6))
    return f"{t:.{digits}g} s" if abs(t) < 600 else f"{t / 60:.{digits}g} min"


def _evaluation_grid(t, T, max_grid: int):
    """The profile's points plus a uniform grid (piecewise linear T between points)."""
    uniform = np.linspace(t[0], t[-1], max_grid)
    grid = np.union1d(t, uniform) if len(t) <= max_grid else uniform
    return grid, np.interp(grid, t, T)


def _heating_check(t, T, Tm0: float, tolerance: float, rows, source: str):
    running_min = np.minimum.accumulate(T)
    rise = T - running_min
    bad = np.flatnonzero((rise > tolerance) & (running_min < Tm0))
    if bad.size:
        i = int(bad[0])
        j = int(np.argmin(T[: i + 1]))
        where = (f"row {int(rows[i])}" if rows is not None else f"point {i + 1}")
        raise CrystkinInputError(
            f"the profile heats: at {where} (t = {t[i]:g} s) the temperature is "
            f"{celsius(T[i]):.2f} degC, {rise[i]:.2f} K above the {celsius(T[j]):.2f} degC it had "
            f"already reached below the equilibrium melting temperature ({celsius(Tm0):.1f} degC)."
            f" The rate model describes crystallization on cooling only; cut the profile before "
            f"the reheating, or raise heating_tolerance (now {tolerance:g} K) if this is "
            "measurement noise", source=source or None)


def _time_at(X, t, T, x):
    """Per draw: first time X reaches x (linear interpolation), NaN when never."""
    reached = X[:, -1] >= x
    i = np.argmax(X >= x, axis=1)
    i = np.clip(i, 1, len(t) - 1)
    rows = np.arange(X.shape[0])
    x0, x1 = X[rows, i - 1], X[rows, i]
    with np.errstate(invalid="ignore", divide="ignore"):
        f = np.where(x1 > x0, (x - x0) / (x1 - x0), 0.0)
    f = np.clip(f, 0.0, 1.0)
    ts = t[i - 1] + f * (t[i] - t[i - 1])
    Ts = T[i - 1] + f * (T[i] - T[i - 1])
    return np.where(reached, ts, np.nan), np.where(reached, Ts, np.nan), reached


def _target(X, t, T, x, Xmed, t_glass, Tg):
    ts, Ts, reached = _time_at(X, t, T, x)
    p = float(np.mean(reached))
    # draws that never reach x count as later (and colder) than any point of the profile
    big = 1e300
    tq = np.quantile(np.where(reached, ts, big), [0.5, 0.025, 0.975])
    Tq = np.quantile(np.where(reached, Ts, -big), [0.5, 0.025, 0.975])
    tq = [float(v) if v <= t[-1] else float("nan") for v in tq]
    Tq = [float(v) if v >= T.min() else float("nan") for v in Tq]
    pct = f"{100 * x:g} %"
    if p >= 0.5:
        w = tq[2] - tq[1] if np.isfinite(tq[2]) else float("nan")
        s = (f"{pct} conversion at t = {_fmt_time(tq[0], w)} (95 % interval "
             f"{_fmt_time(tq[1], w)} to ")
        s += (f"{_fmt_time(tq[2], w)})" if np.isfinite(tq[2]) else "not reached)")
        s += f", at {celsius(Tq[0]):.1f} degC"
        if np.isfinite(Tq[1]) and np.isfinite(Tq[2]):
            s += f" ({celsius(Tq[1]):.1f} to {celsius(Tq[2]):.1f} degC)"
        if p < 0.975:
            s += f"; reached in only {100 * p:.0f} % of posterior draws"
    else:
        frozen = float(Xmed[-1])
        if t_glass is not None:
            s = (f"{pct} conversion is not reached before the glass transition "
                 f"(Tg = {celsius(Tg):.1f} degC, passed at t = {_fmt_time(t_glass)}); "
                 f"X is frozen at about {100 * frozen:.1f} %")
        else:
            s = (f"{pct} conversion is not reached by the end of the profile "
                 f"(t = {_fmt_time(float(t[-1]))}, {celsius(float(T[-1])):.1f} degC); "
                 f"X there is about {100 * frozen:.1f} %")
        if p > 0:
            s += f" (reached in {100 * p:.0f} % of posterior draws)"
    return TargetResult(conversion=float(x), fraction_reached=p, time_s=tq[0],
                        time_lo95_s=tq[1], time_hi95_s=tq[2], temperature_K=Tq[0],
                        temperature_lo95_K=Tq[1], temperature_hi95_K=Tq[2], statement=s)


def _validity_warnings(model: SimulationModel, t, T, Xmed, tolerance_K: float,
                       rate_tolerance: float) -> list[str]:
    out = []
    v = model.validity
    T_lo, T_hi = v.get("temperature_K", (np.nan, np.nan))
    r_lo, r_hi = v.get("cooling_rate_K_per_s", (np.nan, np.nan))
    active = (Xmed >= 0.01) & (Xmed <= 0.99)
    if Xmed[-1] >= 0.01:
        i0 = int(np.argmax(Xmed >= 0.01))
        i1 = int(np.argmax(Xmed >= 0.99)) if Xmed[-1] >= 0.99 else len(t) - 1
        active = np.zeros(len(t), dtype=bool)
        active[i0:i1 + 1] = True
    else:
        out.append("the median prediction does not reach 1 % conversion on this profile; "
                   "the validity checks below use the whole profile")
        active = np.ones(len(t), dtype=bool)
    Ta = T[active]
    if np.isfinite(T_lo) and Ta.min() < T_lo - tolerance_K:
        out.append(f"crystallization is predicted down to {celsius(Ta.min()):.1f} degC, "
                   f"{T_lo - Ta.min():.1f} K below the lowest temperature of the fitted data "
                   f"({celsius(T_lo):.1f} degC): an extrapolation")
    if np.isfinite(T_hi) and Ta.max() > T_hi + tolerance_K:
        out.append(f"crystallization is predicted from {celsius(Ta.max()):.1f} degC, "
                   f"{Ta.max() - T_hi:.1f} K above the highest temperature of the fitted data "
                   f"({celsius(T_hi):.1f} degC): an extrapolation")
    ta = t[active]
    if len(ta) >= 2 and ta[-1] > ta[0]:
        # rate over segments of at least 1/20 of the crystallization window, against noise
        edges = np.linspace(ta[0], ta[-1], min(21, len(ta)))
        Te = np.interp(edges, t, T)
        rate = float(np.max(-np.diff(Te) / np.diff(edges)))
        if np.isfinite(r_hi) and rate > r_hi * (1 + rate_tolerance) + 1e-12:
            out.append(f"the profile cools at up to {60 * rate:.3g} K/min while it crystallizes, "
                       f"{60 * (rate - r_hi):.3g} K/min faster than the fastest fitted run "
                       f"({60 * r_hi:.3g} K/min): an extrapolation")
        slow = float(np.min(-np.diff(Te) / np.diff(edges)))
        if np.isfinite(r_lo) and r_lo > 0 and slow < r_lo * (1 - rate_tolerance):
            out.append(f"the profile cools at only {60 * max(slow, 0.0):.3g} K/min in part of "
                       f"the crystallization, {60 * (r_lo - max(slow, 0.0)):.3g} K/min slower "
                       f"than the slowest fitted run ({60 * r_lo:.3g} K/min) and no isothermal "
                       "holds were fitted: an extrapolation")
    if np.isfinite(T_hi) and T[0] < T_hi:
        out.append(f"the profile starts at {celsius(T[0]):.1f} degC, inside the temperature "
                   "range where the fitted data crystallized; conversion is counted from 0 at "
                   "the first point (the part is assumed molten and amorphous there)")
    return out


def predict_profile(model: SimulationModel, time_s, temperature_K, *,
                    targets=(0.5, 0.9, 0.99), heating_tolerance: float = 0.5,
                    tolerance_K: float = 1.0, rate_tolerance: float = 0.05,
                    row_numbers=None, source: str = "", max_grid: int = _MAX_GRID,
                    warn: bool = True) -> Prediction:
    """X(t) of a rate model on a temperature–time profile, with its band and targets.

    Parameters
    ----------
    model : SimulationModel
    time_s : array of shape (N,), s
        Increasing times of the profile.
    temperature_K : array of shape (N,), K
    targets : sequence of float
        Conversions (0-1, exclusive) whose times are reported.
    heating_tolerance : float, K
        A rise of the temperature above the lowest value already reached (once
        below Tm0) larger than this is rejected.
    tolerance_K : float, K
        Extrapolation in temperature smaller than this is not warned about.
    rate_tolerance : float
        Relative excess over the fitted cooling-rate range not warned about.
    row_numbers : array of int, optional
        File rows of the profile points, for messages.
    source : str
        Name of the profile, for messages.
    max_grid : int
        Size of the uniform grid added to the profile's points for the time
        integral (profiles with more points are resampled onto it).
    warn : bool
        Also issue each warning as a :class:`DataQualityWarning`.

    Returns
    -------
    Prediction

    Raises
    ------
    CrystkinInputError
        Malformed profile, a profile that heats below Tm0, targets outside (0, 1).

    Notes
    -----
    theta(t) = integral K(T(s)) ds by the trapezoidal rule on the grid, with T
    interpolated linearly between the profile's points; X = 1 - exp(-theta^n)
    per posterior draw (Nakamura et al. 1972). K = 0 below Tg, so conversion is
    frozen once the part is glassy. Validity is judged on the median
    prediction's crystallization window (X from 1 % to 99 %): its temperatures
    against those at which the fitted data crystallized, its cooling rate against
    the fitted rates.
    """
    t_start = _time.perf_counter()
    t = np.asarray(time_s, dtype=float)
    T = np.asarray(temperature_K, dtype=float)
    where = source or "profile"
    TemperatureProfile(time=t, temperature=T, source=where, row_numbers=row_numbers)
    tg = [float(x) for x in np.atleast_1d(np.asarray(targets, dtype=float))]
    if not tg or any(not 0 < x < 1 for x in tg):
        raise CrystkinInputError(
            f"The 'targets' parameter of predict_profile must be conversions between 0 and 1 "
            f"(exclusive). Got {list(targets)!r} instead.")
    Tm0 = float(np.median(model["Tm0"]))
    _heating_check(t, T, Tm0, float(heating_tolerance), row_numbers, where)

    grid, Tgrid = _evaluation_grid(t, T, int(max_grid))
    X = model.conversion(grid, Tgrid)
    q = np.quantile(X, [0.5, 0.025, 0.975], axis=0)
    Tg = float(model.glass_transition_K)
    below = np.flatnonzero(Tgrid < Tg)
    t_glass = float(grid[below[0]]) if below.size else None
    results = tuple(_target(X, grid, Tgrid, x, q[0], t_glass, Tg) for x in tg)
    notes = _validity_warnings(model, grid, Tgrid, q[0], float(tolerance_K),
                               float(rate_tolerance))
    if len(t) > max_grid:
        notes.append(f"the profile's {len(t)} points were resampled onto {max_grid} equally "
                     "spaced times for the integral")
    if warn:
        for w in notes:
            warnings.warn(f"{where}: {w}", DataQualityWarning, stacklevel=2)
    prov = {"model_source": model.source, "study": model.study_name,
            "crystkin_version_of_model": model.crystkin_version, "n_draws": model.n_draws,
            "grid_points": int(len(grid)), "profile_points": int(len(t)),
            "glass_transition_K": Tg, "heating_tolerance_K": float(heating_tolerance),
            "seconds": _time.perf_counter() - t_start}
    return Prediction(time_s=grid, temperature_K=Tgrid, X_median=q[0], X_lo95=q[1],
                      X_hi95=q[2], targets=results, warnings=tuple(notes),
                      caution=PROCESS_CAUTION, glass_transition_time_s=t_glass,
                      source=where, provenance=prov)


def predict_from_profile(model: SimulationModel, profile, **options) -> Prediction:
    """:func:`predict_profile` on a :class:`kinetics.io.profile.TemperatureProfile`."""
    return predict_profile(model, profile.time, profile.temperature,
                           row_numbers=profile.row_numbers, source=profile.source, **options)
