"""Where things happen in an isothermal hold: hold start, start-up transient, event window.

All functions take arrays in SI (time in s, temperature in K) and an
exotherm-positive heat-flow signal (see :func:`kinetics.prep.sign.orient`);
the signal unit does not matter (W or W/kg), thresholds scale with its noise.

Noise is estimated from the end of the run, which is the quietest and most
reliable part of a hold: sigma = 1.4826 MAD(diff(y)) / sqrt(2). First
differences remove any smooth signal, the median absolute deviation ignores
spikes, 1.4826 turns a MAD into a Gaussian standard deviation, and sqrt(2)
undoes the variance doubling of differencing.

Detection works on a Savitzky–Golay smoothed copy (quadratic, an odd window of
about 1 % of the hold, 5 to 101 points); its noise is known exactly from the
filter coefficients, so every threshold is a multiple of a computed standard
deviation. The integration itself (kinetics.prep.isothermal) uses the raw signal.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
from scipy.ndimage import median_filter
from scipy.signal import savgol_coeffs

from ..errors import CrystkinInputError, check_range

__all__ = [
    "HoldStart", "TransientEnd", "EventWindow", "IsothermalEvents",
    "robust_noise", "isolated_spikes", "smoothing_points", "smooth", "noise_factor",
    "reference_level",
    "find_hold_start", "find_transient_end", "find_event_window", "locate_isothermal_events",
]

_MAD_TO_SD = 1.482602218505602
_MIN_FIT_POINTS = 10


@dataclass(frozen=True)
class HoldStart:
    """Start of the isothermal hold.

    Attributes
    ----------
    time : float, s
    index : int
        First sample of the hold.
    reference_temperature : float, K
        Temperature the hold was judged against (normally the set temperature).
    tolerance : float, K
    method : str
    warnings : tuple of str
    """

    time: float
    index: int
    reference_temperature: float
    tolerance: float
    method: str
    warnings: tuple[str, ...] = ()


@dataclass(frozen=True)
class TransientEnd:
    """End of the instrument start-up transient.

    Attributes
    ----------
    time : float, s
    index : int
    amplitude : float
        Fitted transient height at the hold start, signal units (0 if none).
    decay_time : float, s
        Fitted exponential decay time (nan if none was fitted).
    method : str
    overlaps_event : bool
        True when the transient had not died out (fitted value above 2 noise
        SD) when the event began; ``time`` is then the event start.
    """

    time: float
    index: int
    amplitude: float
    decay_time: float
    method: str
    overlaps_event: bool


@dataclass(frozen=True)
class EventWindow:
    """Start, peak and end of the crystallization exotherm.

    Attributes
    ----------
    start, end, peak_time : float, s
    start_index, end_index, peak_index : int
        ``end_index`` is inclusive.
    peak_height : float
        Smoothed, baseline-referenced peak, signal units.
    threshold : float
        k times the noise SD of the smoothed signal, signal units.
    found : bool
        False when the peak does not clear the detection limit.
    start_method, end_method : str
    above_threshold_at_start : bool
        The signal never fell below the threshold between the search start and
        the peak (the onset was not recorded).
    cut_off : bool
    cut_off_reason : str
    onset_power : float
        Exponent p of the power law fitted to the foot of the peak (nan if none;
        for Avrami kinetics close to n - 1).
    """

    start: float
    end: float
    peak_time: float
    start_index: int
    end_index: int
    peak_index: int
    peak_height: float
    threshold: float
    found: bool
    start_method: str
    end_method: str
    above_threshold_at_start: bool
    cut_off: bool
    cut_off_reason: str = ""
    onset_power: float = float("nan")


@dataclass(frozen=True)
class IsothermalEvents:
    """Everything found in one isothermal hold, with how it was found.

    Attributes
    ----------
    hold_start, transient_end, event_start, event_end, peak_time : float, s
    noise : float
        Noise SD of one raw sample, signal units.
    hold : HoldStart
    transient : TransientEnd
    window : EventWindow
    provenance : dict
        Methods and settings (JSON-friendly).
    warnings : tuple of str
    """

    hold_start: float
    transient_end: float
    event_start: float
    event_end: float
    peak_time: float
    noise: float
    hold: HoldStart
    transient: TransientEnd
    window: EventWindow
    provenance: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()


def robust_noise(y, *, tail_fraction=0.2, min_points=20) -> float:
    """Noise standard deviation of one sample, from the end of the record.

    Parameters
    ----------
    y : array of shape (n,)
        Signal, any unit.
    tail_fraction : float
        Fraction of the record, counted from its end, that is used.
    min_points : int

    Returns
    -------
    float
        sigma, in the unit of ``y``.

    Notes
    -----
    sigma = 1.4826 median(|d - median(d)|) / sqrt(2), d = first differences of
    the tail. 1.4826 = 1/Phi^-1(3/4) makes the MAD a consistent Gaussian SD
    (Rousseeuw & Croux, J. Am. Stat. Assoc. 88 (1993) 1273).
    """
    y = np.asarray(y, dtype=float)
    m = min(len(y), max(int(min_points), int(len(y) * tail_fraction)))
    d = np.diff(y[-m:])
    if d.size == 0:
        return 0.0
    sigma = _MAD_TO_SD * np.median(np.abs(d - np.median(d))) / np.sqrt(2.0)
    if not sigma > 0:  # quantised or constant data
        sigma = float(np.std(d)) / np.sqrt(2.0)
    if not sigma > 0:  # relative floor: the same in any unit
        sigma = 1e-12 * float(np.max(np.abs(y)))
    if not sigma > 0:
        sigma = float(np.finfo(float).tiny)
    return float(sigma)


def isolated_spikes(time, signal, *, noise, factor=20.0, min_points=20):
    """Single samples far from their neighbours (instrument glitches), for a warning.

    Parameters
    ----------
    time : array of shape (n,), s
    signal : array of shape (n,)
        Baseline-corrected signal over the event window, any unit.
    noise : float
        Noise SD of one sample, unit of ``signal``.
    factor : float
        A spike departs from the 5-point running median by more than ``factor`` noise
        SDs and by more than half the range of that median (our choice).
    min_points : int
        Shorter windows are not checked (a few-sample event is not resolved).

    Returns
    -------
    indices : array of int
        Indices of the spike samples.
    area : float
        What they add to the trapezoidal area of ``signal``, unit of ``signal`` times s.
    """
    y = np.asarray(signal, dtype=float)
    t = np.asarray(time, dtype=float)
    if y.size < max(int(min_points), 5):
        return np.zeros(0, dtype=int), 0.0
    m = median_filter(y, size=5, mode="nearest")
    d = y - m
    limit = max(factor * float(noise), 0.5 * float(np.ptp(m)))
    idx = np.flatnonzero(np.abs(d) > limit)
    if idx.size == 0:
        return idx, 0.0
    w = np.gradient(t) if t.size > 1 else np.ones(1)
    w[0] *= 0.5
    w[-1] *= 0.5
    return idx, float(np.sum(d[idx] * w[idx]))


def smoothing_points(n_points: int) -> int:
    """Default Savitzky–Golay window: about 1 % of the points, odd, 5 to 101."""
    w = int(np.clip(n_points // 100, 5, 101))
    w = w if w % 2 else w + 1
    return min(w, _largest_odd(n_points))


def _largest_odd(n):
    return n if n % 2 else n - 1


def smooth(y, window: int, *, deriv: int = 0, delta: float = 1.0) -> np.ndarray:
    """Quadratic Savitzky–Golay smoothing (or its derivative, per unit of ``delta``).

    Interior samples use the filter coefficients; the first and last half-windows
    are evaluated on a quadratic fitted to the first and last ``window`` samples
    (like ``scipy.signal.savgol_filter(mode="interp")``, whose result it matches).
    """
    y = np.asarray(y, dtype=float)
    window = min(int(window), _largest_odd(len(y)))
    if window < 3:
        return np.zeros_like(y) if deriv else y.copy()
    order = min(2, window - 1)
    c = _coeffs(window, order, deriv, float(delta))
    out = np.empty_like(y)
    h = window // 2
    out[h:len(y) - h] = np.convolve(y, c, mode="valid")
    head, tail = _edge_operators(window, order, deriv, float(delta))
    out[:h] = head @ y[:window]
    out[len(y) - h:] = tail @ y[len(y) - window:]
    return out


@lru_cache(maxsize=64)
def _edge_operators(window, order, deriv, delta):
    """Matrices mapping the first/last ``window`` samples to the fitted edge values."""
    u = np.arange(window, dtype=float)
    V = np.vander(u, order + 1, increasing=True)
    P = np.linalg.pinv(V)
    powers = np.arange(order + 1)
    if deriv:
        fact = np.where(powers >= deriv,
                        np.array([np.prod(np.arange(p - deriv + 1, p + 1)) for p in powers]),
                        0.0)
        E = fact * np.where(powers >= deriv, u[:, None] ** np.clip(powers - deriv, 0, None),
                            0.0) / delta ** deriv
    else:
        E = u[:, None] ** powers
    M = E @ P
    h = window // 2
    return M[:h], M[window - h:]


@lru_cache(maxsize=64)
def _coeffs(window, order, deriv, delta):
    return savgol_coeffs(window, order, deriv=deriv, delta=delta)


def noise_factor(window: int, *, deriv: int = 0, delta: float = 1.0) -> float:
    """SD of the filtered value per unit SD of white input noise."""
    if window < 3:
        return 1.0
    c = _coeffs(int(window), min(2, int(window) - 1), int(deriv), float(delta))
    return float(np.sqrt(np.sum(c ** 2)))


def _trend_z(t, y):
    tc = t - t.mean()
    sxx = float(np.sum(tc ** 2))
    if not sxx > 0:
        return 0.0
    slope = float(np.sum(tc * (y - y.mean())) / sxx)
    resid = y - y.mean() - slope * tc
    se = float(np.sqrt(np.sum(resid ** 2) / max(len(t) - 2, 1) / sxx))
    return abs(slope) / se if se > 0 else np.inf


def reference_level(time, signal, *, first=0) -> tuple[float, str]:
    """Robust level of a hold's quiet end (or, if the end is still moving, of its start).

    Parameters
    ----------
    time : array of shape (n,), s
    signal : array of shape (n,)
    first : int
        Index of the hold start.

    Returns
    -------
    level : float
        Median of the last 20 % (or first 10 %) of the hold, signal units.
    where : {"end", "start"}

    Notes
    -----
    The end of a complete hold is the most reliable level. When a straight line
    through the last 20 % has a slope of more than 5 standard errors, and more
    so than one through the first 10 %, the event is probably cut off by the end
    of the record and the start is used instead.
    """
    t = np.asarray(time, dtype=float)[first:]
    y = np.asarray(signal, dtype=float)[first:]
    m = max(_MIN_FIT_POINTS, len(y) // 10)
    z_end = _trend_z(t[-2 * m:], y[-2 * m:])
    z_start = _trend_z(t[:m], y[:m])
    if z_end <= 5.0 or z_end <= z_start:
        return float(np.median(y[-2 * m:])), "end"
    return float(np.median(y[:m])), "start"


def find_hold_start(time, temperature, *, set_temperature, tolerance=0.5, source="") -> HoldStart:
    """First time the temperature is within ``tolerance`` of the set value and stays there.

    Parameters
    ----------
    time : array of shape (n,), s
    temperature : array of shape (n,), K
    set_temperature : float, K
    tolerance : float, K
    source : str
        File name for messages.

    Returns
    -------
    HoldStart
        When the recorded temperature never comes within tolerance of the set
        value but settles at another level, the hold is found on that level and
        a warning says so.

    Raises
    ------
    CrystkinInputError
        The temperature never settles (the run is not an isothermal hold).
    """
    check_range("tolerance", float(tolerance), "find_hold_start", lower=0.0, inclusive=False)
    t = np.asarray(time, dtype=float)
    T = np.asarray(temperature, dtype=float)
    n = len(t)
    idx = _settled_index(T, set_temperature, tolerance)
    if idx is not None and n - idx >= max(_MIN_FIT_POINTS, n // 4):
        return HoldStart(float(t[idx]), idx, float(set_temperature), float(tolerance),
                         "set temperature")
    level = float(np.median(T[-max(_MIN_FIT_POINTS, n // 10):]))
    idx = _settled_index(T, level, tolerance)
    if idx is None or n - idx < max(_MIN_FIT_POINTS, n // 4):
        raise CrystkinInputError(
            f"the temperature does not settle within {tolerance:g} K of the set temperature "
            f"{set_temperature:.2f} K (or of any level) for at least a quarter of the record; "
            "check that the run is an isothermal hold (kind), its set temperature, "
            "or raise hold_tolerance", source=source or None)
    msg = (f"the recorded temperature settles at {level:.2f} K, {level - set_temperature:+.2f} K "
           f"from the set temperature {set_temperature:.2f} K; the hold start was found on "
           "the recorded level (check the set temperature or the calibration)")
    return HoldStart(float(t[idx]), idx, level, float(tolerance), "recorded end-of-run level",
                     (msg,))


def _settled_index(T, reference, tolerance):
    outside = np.flatnonzero(np.abs(T - reference) > tolerance)
    if outside.size == 0:
        return 0
    i = int(outside[-1]) + 1
    return i if i < len(T) else None


def _decay_stall(d, start, threshold, window):
    """First index at which a decay that is under way at ``start`` has slowed to noise."""
    head = d[start:start + window]
    s0 = np.sign(np.mean(head)) if head.size else 0.0
    if s0 == 0 or abs(np.mean(head)) <= threshold:
        return start, 0.0
    slow = np.flatnonzero(s0 * d[start:] <= threshold)
    return (start + int(slow[0]) if slow.size else len(d) - 1), s0


def _fit_decay(t, y, t_ref, tau_max, dt):
    """Least-squares c + b exp(-(t - t_ref)/tau) over a log grid of tau; returns (c, b, tau)."""
    taus = np.geomspace(dt, max(tau_max, 2 * dt), 48)[:, None]
    e = np.exp(-(t[None, :] - t_ref) / taus)
    m = t.size
    se, see = e.sum(1), (e * e).sum(1)
    sy, sey = y.sum(), (e * y[None, :]).sum(1)
    det = m * see - se ** 2
    ok = det > 1e-12 * m * see
    with np.errstate(divide="ignore", invalid="ignore"):
        b = np.where(ok, (m * sey - se * sy) / det, 0.0)
        c = np.where(ok, (sy - b * se) / m, sy / m)
    sse = ((y[None, :] - c[:, None] - b[:, None] * e) ** 2).sum(1)
    j = int(np.argmin(np.where(ok, sse, np.inf)))
    return float(c[j]), float(b[j]), float(taus[j, 0])


def find_transient_end(time, signal, *, start, stop, noise, smooth_points=None) -> TransientEnd:
    """End of the start-up transient between the hold start and the event start.

    Parameters
    ----------
    time : array of shape (n,), s
    signal : array of shape (n,)
        Exotherm-positive signal (any offset).
    start : int
        Index of the hold start.
    stop : int
        Index of the event start (the transient is looked for before it).
    noise : float
        Noise SD of one sample, signal units.
    smooth_points : int, optional

    Returns
    -------
    TransientEnd

    Notes
    -----
    With at least 10 samples before the event, c + b exp(-(t - t_h)/tau) is fitted
    (tau on a logarithmic grid from one sampling interval to half the pre-event
    time, c and b by linear least squares) and the transient ends where the
    fitted exponential falls to 2 noise SD: t_end = t_h + tau ln(|b| / 2 sigma).
    If that lies beyond the event start, the transient overlaps the event. With
    fewer samples the transient end is where the smoothed derivative of a decay
    under way at the hold start has fallen to its noise level (3 SD).
    """
    t = np.asarray(time, dtype=float)
    y = np.asarray(signal, dtype=float)
    dt = float(np.median(np.diff(t[start:]))) if len(t) - start > 1 else 1.0
    stop = int(np.clip(stop, start, len(t) - 1))
    if stop - start >= _MIN_FIT_POINTS:
        seg = slice(start, stop)
        c, b, tau = _fit_decay(t[seg], y[seg], t[start], 0.5 * (t[stop] - t[start]), dt)
        if abs(b) <= 2.0 * noise:
            return TransientEnd(float(t[start]), start, 0.0, float("nan"),
                                "exponential fit: no transient above 2 noise SD", False)
        t_end = t[start] + tau * np.log(abs(b) / (2.0 * noise))
        if t_end >= t[stop]:
            return TransientEnd(float(t[stop]), stop, b, tau,
                                "exponential fit: still above 2 noise SD at the event start",
                                True)
        i = int(np.searchsorted(t, t_end))
        return TransientEnd(float(t_end), i, b, tau,
                            "exponential fit: falls below 2 noise SD", False)
    w = smooth_points or smoothing_points(len(t) - start)
    d = smooth(y[start:], w, deriv=1, delta=dt)
    thr = 3.0 * noise * noise_factor(w, deriv=1, delta=dt)
    i_rel, s0 = _decay_stall(d, 0, thr, w)
    if s0 == 0:
        return TransientEnd(float(t[start]), start, 0.0, float("nan"),
                            "derivative: no decay above noise at the hold start", False)
    i = start + i_rel
    overlaps = i > stop
    i = min(i, stop)
    return TransientEnd(float(t[i]), i, float(y[start] - y[i]), float("nan"),
                        "derivative: decay slowed to noise (too few points before the event"
                        " for a fit)", bool(overlaps))


def find_event_window(time, signal, *, noise, first=0, search_from=None, k=3.0,
                      smooth_points=None, tail_fraction=0.2) -> EventWindow:
    """Start and end of the exotherm in a baseline-referenced, exotherm-positive signal.

    Parameters
    ----------
    time : array of shape (n,), s
    signal : array of shape (n,)
        Exotherm-positive signal minus its baseline.
    noise : float
        Noise SD of one raw sample.
    first : int
        First index that may belong to the event (the hold start).
    search_from : int, optional
        First index searched for the peak (past a start-up transient); default ``first``.
    k : float
        Threshold in noise SDs of the smoothed signal.
    smooth_points : int, optional
    tail_fraction : float
        End-of-run fraction checked for a still-decaying event.

    Returns
    -------
    EventWindow

    Notes
    -----
    The peak is the maximum of the smoothed signal after ``search_from``. From it
    the search runs backwards to the last sample at or below k sigma_s
    (sigma_s = sigma sqrt(sum c_j^2) for filter coefficients c_j), then on to the
    last sample at or below zero; forwards likewise for the end. The event
    start is then refined by fitting a (t - t_on)_+^p (a by linear least
    squares, t_on and p on a grid) to the raw signal from well before the
    threshold crossing up to 20 % of the peak: the onset t_on of the foot, not
    the later time at which it clears the noise. Without a usable fit the
    baseline crossing is kept. If the signal never falls to the threshold
    before the peak (it sits off the reference level, or the event was under
    way from the start), the start is the foot of the rising flank: the last
    sample before the steepest rise whose smoothed slope is at most k noise SDs
    of the slope, provided at least 10 samples lie between it and
    ``search_from``; otherwise the start is ``first`` and
    ``above_threshold_at_start`` is True. The event counts as found when the
    peak exceeds max(2k, 6) sigma_s. It counts as cut off when the signal never returns below the
    threshold, or when a line fitted to the end-of-run fraction falls by more
    than 5 standard errors and more than 2 % of the peak.
    """
    t = np.asarray(time, dtype=float)
    r = np.asarray(signal, dtype=float)
    n = len(t)
    first = int(first)
    search_from = first if search_from is None else int(np.clip(search_from, first, n - 1))
    w = smooth_points or smoothing_points(n - first)
    rs = np.empty_like(r)
    rs[:first] = r[:first]
    rs[first:] = smooth(r[first:], w)
    sigma_s = noise * noise_factor(w)
    thr = k * sigma_s
    ip = search_from + int(np.argmax(rs[search_from:]))
    height = float(rs[ip])
    found = height > max(2.0 * k, 6.0) * sigma_s

    below = np.flatnonzero(rs[first:ip + 1] <= thr)
    t_start, power = None, float("nan")
    if below.size:
        i_thr = first + int(below[-1])
        zero = np.flatnonzero(rs[first:i_thr + 1] <= 0.0)
        if zero.size:
            i0, start_method = first + int(zero[-1]), "last baseline crossing before the peak"
        else:
            i0, start_method = i_thr, "last threshold crossing before the peak"
        above_at_start = False
        fitted = _power_onset(t, r, rs, first, i_thr, ip, height, thr, w)
        if fitted is not None:
            t_start, power = fitted
            i0 = max(first, int(np.searchsorted(t, t_start, side="right")) - 1)
            start_method = "onset of a power law a (t - t_on)^p fitted to the foot of the peak"
    else:
        i0, start_method, above_at_start = _rising_foot(t, r, first, search_from, ip, w, noise,
                                                        k)

    after = np.flatnonzero(rs[ip:] <= thr)
    cut, reason = False, ""
    if after.size:
        i_thr = ip + int(after[0])
        zero = np.flatnonzero(rs[i_thr:] <= 0.0)
        if zero.size:
            i1, end_method = i_thr + int(zero[0]), "first baseline crossing after the peak"
        else:
            i1, end_method = i_thr, "first threshold crossing after the peak"
    else:
        i1, end_method = n - 1, "end of record (above threshold to the end)"
        cut, reason = True, "the signal stays above the threshold to the end of the record"

    if not cut and found:
        m = min(n - first, max(_MIN_FIT_POINTS, int((n - first) * tail_fraction)))
        tt, yy = t[-m:], r[-m:]
        tc = tt - tt.mean()
        slope = float(np.sum(tc * (yy - yy.mean())) / np.sum(tc ** 2))
        span = float(tt[-1] - tt[0])
        drop = -slope * span
        if drop > 0 and _trend_z(tt, yy) > 5.0 and drop > 0.02 * height:
            cut = True
            reason = (f"the signal is still falling over the last {span:.0f} s "
                      f"(by {drop / height:.1%} of the peak)")
    return EventWindow(float(t[i0]) if t_start is None else float(t_start), float(t[i1]),
                       float(t[ip]), i0, i1, ip, height, float(thr), bool(found), start_method,
                       end_method, above_at_start, cut, reason, power)


def _power_onset(t, r, rs, first, i_thr, ip, height, thr, w, max_points=250):
    """Onset t_on (and power p) of a (t - t_on)_+^p fitted to the foot of the peak, or None."""
    rise = np.flatnonzero(rs[i_thr:ip + 1] >= max(0.2 * height, 2.0 * thr))
    i_top = i_thr + (int(rise[0]) if rise.size else ip - i_thr)
    span = max(i_top - i_thr, w)
    i_lo = max(first, i_thr - 2 * span)
    if i_top - i_lo < _MIN_FIT_POINTS or i_thr - i_lo < 2:
        return None
    tt, yy = t[i_lo:i_top + 1], r[i_lo:i_top + 1]
    if tt.size > max_points:
        edges = np.linspace(0, tt.size, max_points + 1).astype(int)
        counts = np.diff(edges)
        tt = np.add.reduceat(tt, edges[:-1]) / counts
        yy = np.add.reduceat(yy, edges[:-1]) / counts
    lo, hi = float(t[i_lo]), float(t[i_thr])
    step_t = (hi - lo) / 20
    log_p = np.log(np.geomspace(0.25, 6.0, 13))
    step_p = log_p[1] - log_p[0]
    best = None
    for _ in range(3):  # grid, then two finer grids around the best point
        t_on = np.linspace(lo, hi, 21)
        p = np.exp(log_p)
        sse = _power_sse(tt, yy, t_on, p)
        j, m = np.unravel_index(int(np.argmin(sse)), sse.shape)
        if not np.isfinite(sse[j, m]):
            return None
        best = (float(t_on[j]), float(p[m]))
        if best[0] <= float(t[i_lo]):
            return None
        lo, hi = best[0] - step_t, min(best[0] + step_t, float(t[i_thr]))
        log_p = np.linspace(np.log(best[1]) - step_p, np.log(best[1]) + step_p, 13)
        step_t, step_p = (hi - lo) / 20, log_p[1] - log_p[0]
    return best


def _power_sse(tt, yy, t_on, p):
    """Residual sum of squares of a (t - t_on)_+^p, a by least squares, on a (t_on, p) grid."""
    tau = tt[None, :] - t_on[:, None]
    pos = tau > 0
    log_tau = np.log(np.where(pos, tau, 1.0))
    f = np.where(pos[:, None, :], np.exp(p[None, :, None] * log_tau[:, None, :]), 0.0)
    sff = np.sum(f * f, axis=2)
    sfy = f @ yy
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where((sff > 0) & (sfy > 0), np.sum(yy ** 2) - sfy ** 2 / sff, np.inf)


def _rising_foot(t, r, first, search_from, ip, w, noise, k):
    """Where the rise to the peak begins, for a signal that is off its reference level."""
    dt = float(np.median(np.diff(t[first:])))
    ds = smooth(r[first:], w, deriv=1, delta=dt)
    thr_d = k * noise * noise_factor(w, deriv=1, delta=dt)
    a, b = search_from - first, ip - first
    if b - a >= _MIN_FIT_POINTS:
        steep = a + int(np.argmax(ds[a:b + 1]))
        flat = np.flatnonzero(ds[a:steep + 1] <= thr_d)
        if flat.size and flat[-1] >= _MIN_FIT_POINTS:
            return (first + a + int(flat[-1]),
                    "foot of the rising flank (the signal before the event is off the "
                    "reference level)", False)
    return first, "hold start (above threshold throughout)", True


def locate_isothermal_events(time, temperature, signal, *, set_temperature, baseline=None,
                             hold_tolerance=0.5, k=3.0, window=None, smooth_points=None,
                             source="") -> IsothermalEvents:
    """Hold start, start-up transient and event window of one isothermal hold.

    Parameters
    ----------
    time : array of shape (n,), s
    temperature : array of shape (n,), K
    signal : array of shape (n,)
        Exotherm-positive heat flow (W or W/kg).
    set_temperature : float, K
    baseline : array of shape (n,), optional
        Baseline to reference the signal to; default :func:`reference_level`.
    hold_tolerance : float, K
    k : float
        Event threshold in noise SDs of the smoothed signal.
    window : (float, float), s, optional
        Event window given by the user; detection of the window is then skipped.
    smooth_points : int, optional
    source : str
        File name for messages.

    Returns
    -------
    IsothermalEvents
    """
    t = np.asarray(time, dtype=float)
    y = np.asarray(signal, dtype=float)
    hold = find_hold_start(t, temperature, set_temperature=set_temperature,
                           tolerance=hold_tolerance, source=source)
    ih = hold.index
    n = len(t)
    if n - ih < 2 * _MIN_FIT_POINTS:
        raise CrystkinInputError(
            f"only {n - ih} samples after the hold start at {hold.time:g} s; the record is too "
            "short to analyse", source=source or None)
    noise = robust_noise(y[ih:])
    w = smooth_points or smoothing_points(n - ih)
    if baseline is None:
        level, at = reference_level(t, y, first=ih)
        ref = np.full(n, level)
        ref_method = ("end-of-run level (median of the last 20 % of the hold)" if at == "end"
                      else "start-of-hold level (median of the first 10 %; the end is not flat)")
    else:
        ref = np.asarray(baseline, dtype=float)
        ref_method = "given baseline"
    r = y - ref
    dt = float(np.median(np.diff(t[ih:])))
    d = smooth(y[ih:], w, deriv=1, delta=dt)
    thr_d = 3.0 * noise * noise_factor(w, deriv=1, delta=dt)
    stall = ih + _decay_stall(d, 0, thr_d, w)[0]

    warnings = list(hold.warnings)
    if window is None:
        win = find_event_window(t, r, noise=noise, first=ih, search_from=stall, k=k,
                                smooth_points=w)
    else:
        win = _given_window(t, r, window, noise, ih, w, k, source)
    transient = find_transient_end(t, y, start=ih, stop=win.start_index, noise=noise,
                                   smooth_points=w)
    if transient.overlaps_event:
        warnings.append(
            f"the start-up transient overlaps the event: a decay under way at the hold start "
            f"has not died out ({transient.method}) when the event starts at {win.start:.1f} s; "
            "the transient end is set to the event start and the early conversion may include "
            "transient heat")
    prov = {
        "hold_method": hold.method, "hold_reference_temperature_K": hold.reference_temperature,
        "hold_tolerance_K": hold.tolerance,
        "noise_method": "1.4826 MAD of first differences / sqrt(2), last 20 % of the hold",
        "noise_sd": noise, "smoothing": f"Savitzky-Golay, quadratic, {w} points",
        "smoothing_points": w, "reference": ref_method, "threshold_k": float(k),
        "threshold": win.threshold, "decay_stall_time_s": float(t[stall]),
        "transient_method": transient.method, "transient_amplitude": transient.amplitude,
        "transient_decay_time_s": transient.decay_time,
        "window_start_method": win.start_method, "window_end_method": win.end_method,
        "peak_height": win.peak_height, "cut_off_reason": win.cut_off_reason,
        "event_start_s": win.start, "onset_power": win.onset_power,
    }
    return IsothermalEvents(hold.time, transient.time, win.start, win.end, win.peak_time,
                            noise, hold, transient, win, prov, tuple(warnings))


def _given_window(t, r, window, noise, ih, w, k, source):
    try:
        a, b = (float(v) for v in window)
    except (TypeError, ValueError):
        raise CrystkinInputError(
            f"The 'window' parameter must be (start s, end s). Got {window!r} instead.",
            source=source or None) from None
    if not (np.isfinite(a) and np.isfinite(b) and a < b):
        raise CrystkinInputError(
            f"The 'window' parameter must be (start, end) in s with start < end. Got {window!r}"
            " instead.", source=source or None)
    i0 = int(np.searchsorted(t, a))
    i1 = int(np.searchsorted(t, b, side="right")) - 1
    if i0 < ih or i1 >= len(t) or i1 - i0 < 3:
        raise CrystkinInputError(
            f"the window {a:g}-{b:g} s must lie inside the hold ({t[ih]:g}-{t[-1]:g} s) and "
            "hold at least 4 samples; give window=(start, end) in seconds of record time",
            source=source or None)
    rs = smooth(r[ih:], w)
    ip = i0 + int(np.argmax(rs[i0 - ih:i1 - ih + 1]))
    sigma_s = noise * noise_factor(w)
    return EventWindow(float(t[i0]), float(t[i1]), float(t[ip]), i0, i1, ip,
                       float(rs[ip - ih]), float(k * sigma_s), True, "given", "given", False,
                       False, "")
