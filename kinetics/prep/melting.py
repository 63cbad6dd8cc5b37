"""Melting peak of a heating run (for Hoffman-Weeks plots).

The endotherm is oriented positive (the exotherm direction is found from the data
or taken from the run information, see :mod:`kinetics.prep.sign`), a straight
baseline in temperature is drawn through the median levels of the first and last
5 % of the window, the signal is Savitzky-Golay smoothed, and the peak temperature
is the vertex of a parabola fitted to the smoothed signal around its largest
maximum. Runs that show several melting endotherms (common after isothermal holds:
melting-recrystallization) say so in their warnings; the largest peak is used.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.signal import find_peaks

from ..dataset import Trace
from ..errors import CrystkinInputError
from .events import noise_factor, robust_noise, smooth, smoothing_points
from .sign import choose_exotherm, orient

__all__ = ["MeltingPeak", "melting_peak"]


@dataclass(frozen=True)
class MeltingPeak:
    """The main melting endotherm of one heating run.

    Attributes
    ----------
    run_id : str
    temperature : float, K
        Peak temperature of the endotherm.
    height : float
        Peak height above the baseline (endotherm positive), in the signal's unit.
    hold_temperature : float or None, K
        Crystallization temperature of the preceding hold (from the run information).
    exotherm : {"up", "down"}
        Sign convention used.
    window : (float, float), K
        Temperature range searched.
    other_peaks : tuple of float, K
        Further endotherms at least 30 % as high as the main one.
    warnings : tuple of str
    """

    run_id: str
    temperature: float
    height: float
    hold_temperature: float | None
    exotherm: str
    window: tuple[float, float]
    other_peaks: tuple[float, ...] = ()
    warnings: tuple[str, ...] = ()

    def __float__(self) -> float:
        return float(self.temperature)


def melting_peak(trace: Trace, *, window=None, exotherm=None,
                 min_height: float = 5.0) -> MeltingPeak:
    """Temperature of the melting endotherm of a heating run.

    Parameters
    ----------
    trace : Trace
        A heating run (``info.kind == "heating"``).
    window : (float, float), K, optional
        Temperature range to search; default the whole run.
    exotherm : {"up", "down"}, optional
        Sign convention; overrides the run information and the detection.
    min_height : float
        Smallest accepted peak height, in noise SDs of the smoothed signal.

    Returns
    -------
    MeltingPeak

    Raises
    ------
    CrystkinInputError
        Not a heating run, a window with too few points, or no endotherm above the noise.

    Notes
    -----
    Peak temperature: vertex of the least-squares parabola through the smoothed,
    baseline-corrected signal over one smoothing window around its maximum.
    """
    where = trace.info.source or trace.run_id
    if trace.info.kind != "heating":
        raise CrystkinInputError(
            f"run {trace.run_id} is a {trace.info.kind} run; melting_peak needs a heating run "
            "(kind = \"heating\" in the study file)", source=where)
    choice = choose_exotherm(trace, exotherm=exotherm)
    warnings = list(choice.warnings)
    T_all = trace.temperature
    e_all = -orient(trace.heat_flow, choice.direction)
    if window is None:
        lo, hi = float(T_all.min()), float(T_all.max())
    else:
        try:
            lo, hi = (float(v) for v in window)
        except (TypeError, ValueError):
            raise CrystkinInputError(
                f"The 'window' parameter of melting_peak must be (low, high) in K. Got "
                f"{window!r} instead.") from None
        if not lo < hi:
            raise CrystkinInputError(
                f"The 'window' parameter of melting_peak must have low < high (K). Got "
                f"{window!r} instead.")
    sel = (T_all >= lo) & (T_all <= hi)
    if sel.sum() < 20:
        raise CrystkinInputError(
            f"run {trace.run_id}: only {int(sel.sum())} points between {lo - 273.15:.1f} and "
            f"{hi - 273.15:.1f} degC; widen the window", source=where)
    T = T_all[sel]
    e = e_all[sel]
    if not np.ptp(T) >= 1.0:
        raise CrystkinInputError(
            f"run {trace.run_id}: the temperature changes by only {np.ptp(T):.2g} K in the "
            "window, so no melting peak can be placed; check that this is a heating run and "
            "that the temperature column is the sample temperature", source=where)
    if np.any(np.diff(T) < 0):
        warnings.append("temperature does not rise steadily in the window; check the segment")
    k = max(5, len(T) // 20)
    Ta, Tb = np.median(T[:k]), np.median(T[-k:])
    ya, yb = np.median(e[:k]), np.median(e[-k:])
    base = ya + (yb - ya) * (T - Ta) / (Tb - Ta) if Tb != Ta else np.full_like(T, ya)
    u = e - base
    w = smoothing_points(len(u))
    us = smooth(u, w)
    sigma = robust_noise(u, tail_fraction=0.2) * noise_factor(w)
    peaks, props = find_peaks(us, prominence=3 * sigma)
    if peaks.size == 0 or us[peaks].max() < min_height * sigma:
        raise CrystkinInputError(
            f"run {trace.run_id}: no melting endotherm stands out of the noise (largest "
            f"{us.max() / sigma:.1f} noise SDs, need {min_height:g}); check the window and the "
            "sign convention (exotherm = \"up\" or \"down\")", source=where)
    main = int(peaks[np.argmax(us[peaks])])
    height = float(us[main])
    h = max(2, w // 2)
    a, b = max(0, main - h), min(len(T), main + h + 1)
    Tp = float(T[main])
    if b - a >= 5 and np.ptp(T[a:b]) > 0:
        Tc = T[a:b] - T[main]
        c2, c1, _ = np.polyfit(Tc, us[a:b], 2)
        if c2 < 0:
            v = -c1 / (2 * c2)
            if (abs(v) <= abs(T[b - 1] - T[a]) / 2
                    and T[a:b].min() <= T[main] + v <= T[a:b].max()):
                Tp = float(T[main] + v)
    others = tuple(float(T[p]) for p in peaks if p != main and us[p] >= 0.3 * height)
    if others:
        warnings.append("more than one melting endotherm (at "
                        + ", ".join(f"{t - 273.15:.1f}" for t in others)
                        + f" degC besides {Tp - 273.15:.1f} degC); the largest is used")
    span = T[-1] - T[0]
    if min(Tp - T[0], T[-1] - Tp) < 0.03 * abs(span):
        warnings.append("the peak lies at the edge of the window; widen it")
    return MeltingPeak(trace.run_id, Tp, height, trace.info.hold_temperature, choice.direction,
                       (lo, hi), others, tuple(warnings))
