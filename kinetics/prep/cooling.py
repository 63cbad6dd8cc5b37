"""From one raw cooling scan to a :class:`~kinetics.dataset.Conversion`.

Steps: check that the run really cools; find its constant-rate cooling
segment; orient the signal (exotherm positive, :mod:`kinetics.prep.sign`);
optionally correct the temperature for thermal lag
(:mod:`kinetics.prep.thermal_lag`); find the crystallization exotherm on the
segment (or take the user's window in kelvin); fit a baseline (conversion-
weighted "sigmoidal", which follows a heat-capacity change across the event,
or "linear"); integrate over time and normalise to X(t), kept together with
X(T). Event finding and baseline are done twice, the second pass referencing
the signal to the first baseline.

The conversion keeps time (record time, s) and temperature (K): the recorded
temperature smoothed (quadratic Savitzky–Golay over about 1 % of the segment),
made non-increasing, plus the lag correction. The time since onset used by
Jeziorny's method is t = (T_onset - T)/beta (:func:`time_since_onset`).

Keys of ``Conversion.baseline`` written here (all SI, JSON-friendly):

``T_onset_K``, ``T_peak_K``, ``T_end_K``
    Sample temperature at the event start (X = 0), at the peak of the
    baseline-corrected signal (vertex of a parabola through its top 10 %) and
    at the event end (X = 1), lag-corrected.
``T_window_K``
    (T_onset_K, T_end_K). ``T_window_recorded_K``: the same in the file's
    temperature, before the lag correction.
``t_onset_s``, ``t_peak_s``, ``t_end_s``, ``t_half_s``
    Record times of onset, peak and end; time from onset to X = 0.5.
``beta_K_per_s``
    Cooling rate measured over the event window (slope of T(t)); used by
    the nonisothermal analyses. ``beta_nominal_K_per_s``: the rate of the run
    information. ``segment_s``, ``segment_K``, ``segment_rate_K_per_s``:
    the constant-rate segment.
``lag_K``, ``lag``
    Lag added to the recorded temperature (0.0 and None without correction);
    ``lag`` records the calibration and model used.
``method``, ``fit``, ``regions_s``, ``regions_K``
    Baseline method, its fitted parameters and the event-free regions.
``noise_sd``, ``dt_s``, ``baseline_terms``, ``area``
    The noise model of the conversion curve (see :func:`conversion_noise_map`).
``snr``, ``peak_height``, ``cut_off``, ``cut_off_start``, ``cut_off_end``, ``cut_off_reason``
    Data-quality findings (also in ``Conversion.warnings``).
"""

from __future__ import annotations

import warnings as _warnings
from dataclasses import dataclass

import numpy as np

from ..dataset import Conversion, Trace
from ..errors import CrystkinInputError, DataQualityWarning, check_option, check_range
from .baseline import cumulative_trapezoid, linear_baseline, polynomial_baseline, sigmoidal_baseline
from .events import find_event_window, isolated_spikes, robust_noise, smooth, smoothing_points
from .sign import choose_exotherm, orient
from .thermal_lag import resolve_lag

__all__ = [
    "prepare_cooling", "find_cooling_segment", "CoolingSegment", "COOLING_BASELINES",
    "cooling_rate", "time_since_onset", "time_at_temperature", "conversion_at_temperature",
    "conversion_noise_map", "local_rate",
]

COOLING_BASELINES = ("sigmoidal", "linear")
#: Relative deviation from the run's cooling rate that still counts as the
#: constant-rate segment (our choice).
RATE_TOLERANCE = 0.2
#: Measured and stated rates differing by more than this fraction give a warning (our choice).
RATE_MISMATCH = 0.05
_MIN_REGION = 10
_MIN_SEGMENT = 50
_MONOTONE_NOTE = 1e-3


@dataclass(frozen=True)
class CoolingSegment:
    """The constant-rate cooling part of a record.

    Attributes
    ----------
    start, end : int
        First and last (inclusive) sample index.
    rate : float, K/s
        Cooling rate from a straight line T(t) over the segment (positive).
    warnings : tuple of str
    """

    start: int
    end: int
    rate: float
    warnings: tuple[str, ...] = ()


def _fmt_T(T):
    return f"{T - 273.15:.1f} °C"


def find_cooling_segment(time, temperature, *, rate=None, tolerance=RATE_TOLERANCE,
                         source="") -> CoolingSegment:
    """Largest contiguous part of a record cooled at a constant rate.

    Parameters
    ----------
    time : array of shape (n,), s
    temperature : array of shape (n,), K
    rate : float, K/s, optional
        Stated cooling rate (only compared with the measured one).
    tolerance : float
        Samples whose smoothed cooling rate is within this fraction of the
        record's typical cooling rate belong to the segment.
    source : str
        File name for messages.

    Returns
    -------
    CoolingSegment

    Raises
    ------
    CrystkinInputError
        The temperature hardly changes, rises (a heating run), or no
        constant-rate part of at least 50 samples exists.

    Notes
    -----
    The cooling rate c = -dT/dt is the derivative of a quadratic
    Savitzky–Golay fit (about 1 % of the record). The typical rate is the median
    of c over samples above half its 95th percentile; segment gaps shorter than
    the smoothing window are closed. The segment's rate is the slope of a
    straight line fitted to T(t) over it.
    """
    t = np.asarray(time, dtype=float)
    T = np.asarray(temperature, dtype=float)
    n = len(t)
    w = smoothing_points(n)
    Ts = smooth(T, w)
    dTdt = np.gradient(Ts, t)
    span = float(np.ptp(Ts))
    if span < 1.0:
        raise CrystkinInputError(
            f"the temperature changes by only {span:.2f} K over the record, so this is not a "
            "cooling scan; set kind = 'isothermal' with its hold temperature, or check the "
            "temperature column", source=source or None)
    typical = float(np.quantile(np.abs(dTdt), 0.9))
    cooling = dTdt < -0.3 * typical
    heating = dTdt > 0.3 * typical
    m = max(5, n // 20)
    first, last = float(np.median(Ts[:m])), float(np.median(Ts[-m:]))
    if heating.sum() > cooling.sum():
        raise CrystkinInputError(
            f"the run is labelled 'cooling' but its temperature rises (from {_fmt_T(first)} to "
            f"{_fmt_T(last)}; {heating.mean():.0%} of the samples heat, {cooling.mean():.0%} "
            "cool): it looks like a heating run; set kind = 'heating' for melting runs, or check "
            "the temperature column", source=source or None)
    c = -dTdt
    top = float(np.quantile(c, 0.95))
    beta = float(np.median(c[c > 0.5 * top]))
    ok = np.abs(c - beta) <= tolerance * beta
    ok = _close_gaps(ok, w)
    start, end = _largest_block(ok)
    if end - start + 1 < _MIN_SEGMENT:
        raise CrystkinInputError(
            f"no constant-rate cooling segment of at least {_MIN_SEGMENT} samples was found "
            f"(longest: {end - start + 1}); check the temperature column and the run kind",
            source=source or None)
    slope = np.polyfit(t[start:end + 1] - t[start], T[start:end + 1], 1)[0]
    measured = float(-slope)
    notes = []
    if rate is not None and abs(measured / rate - 1.0) > RATE_MISMATCH:
        notes.append(f"the measured cooling rate {measured * 60:.3g} K/min differs from the stated "
                     f"{rate * 60:.3g} K/min by {100 * (measured / rate - 1):+.0f} %; the measured "
                     "rate is used")
    return CoolingSegment(int(start), int(end), measured, tuple(notes))


def _close_gaps(mask, width):
    m = mask.copy()
    idx = np.flatnonzero(m)
    if idx.size < 2:
        return m
    gaps = np.flatnonzero(np.diff(idx) > 1)
    for g in gaps:
        a, b = idx[g], idx[g + 1]
        if b - a - 1 < width:
            m[a:b] = True
    return m


def _largest_block(mask):
    if not mask.any():
        return 0, -1
    d = np.diff(np.concatenate(([0], mask.astype(int), [0])))
    starts = np.flatnonzero(d == 1)
    ends = np.flatnonzero(d == -1) - 1
    k = int(np.argmax(ends - starts))
    return int(starts[k]), int(ends[k])


def _monotone_temperature(T, w):
    return np.minimum.accumulate(smooth(T, w))


def prepare_cooling(trace, *, window=None, baseline="sigmoidal", exotherm=None, lag=None,
                    min_snr=10.0, threshold=3.0, rate_tolerance=RATE_TOLERANCE) -> Conversion:
    """Relative crystallinity X(t), X(T) and enthalpy of one cooling scan.

    Parameters
    ----------
    trace : Trace
        A cooling run (``info.kind == "cooling"`` with its rate).
    window : (float, float), K, optional
        Event limits in the file's temperature (before any lag correction), in
        either order; overrides detection.
    baseline : {"sigmoidal", "linear"}
        ``"sigmoidal"``: (1 - X) L_pre + X L_post, iterated with X, for a
        heat-capacity change across the event (:func:`kinetics.prep.baseline.sigmoidal_baseline`).
        ``"linear"``: one straight line through the event-free regions on
        both sides.
    exotherm : {"up", "down"}, optional
        Sign convention; overrides ``trace.info.exotherm``, which overrides detection.
    lag : None, float, ThermalLag, or mapping rate (K/s) -> lag (K)
        Thermal-lag correction: T_sample = T_recorded + lag(beta) (see
        :mod:`kinetics.prep.thermal_lag`); a number is this run's lag in K.
    min_snr : float
        Peak over noise SD below which a low signal-to-noise warning is given.
    threshold : float
        Event limits where the smoothed signal crosses this many noise SDs.
    rate_tolerance : float
        See :func:`find_cooling_segment`.

    Returns
    -------
    Conversion
        ``kind == "cooling"``; ``time`` (s), ``temperature`` (K, sample
        temperature), ``conversion``, ``rate`` (dX/dt, 1/s) over the event
        window; ``window`` in s; ``enthalpy`` J/kg when the mass is known;
        ``hold_start`` and ``transient_end`` are the start of the cooling
        segment, ``induction_time`` the time from it to the onset. The keys
        of ``baseline`` are listed in the module docstring.

    Raises
    ------
    CrystkinInputError
        Not a cooling run (including a heating run labelled as cooling), bad
        options, no constant-rate segment, no event found, or a window outside
        the segment.

    Notes
    -----
    With q the exotherm-positive heat flow and B the baseline over the window
    [t_a, t_b]: A = integral (q - B) dt (trapezoidal rule), X(t) = integral_{t_a}^t
    (q - B) dt' / A, dX/dt = (q - B)/A, Delta H = A/m; X(T) follows through
    T(t). A running maximum removes negative excursions of X (recorded as
    ``monotone_adjustment``).

    Examples
    --------
    >>> from kinetics.synthetic_cooling import synthetic_cooling
    >>> trace, truth = synthetic_cooling(rate=10 / 60, baseline_step=2e-5, seed=1)
    >>> conv = prepare_cooling(trace)
    >>> abs(conv.enthalpy / truth["enthalpy"] - 1) < 0.02
    True
    """
    where = "prepare_cooling"
    if not isinstance(trace, Trace):
        raise CrystkinInputError(
            f"The 'trace' parameter of {where} must be a Trace. Got {type(trace).__name__} "
            "instead.")
    src = trace.info.source or trace.run_id
    if trace.info.kind != "cooling":
        raise CrystkinInputError(
            f"{where} needs a cooling run, this one is '{trace.info.kind}'; use the isothermal "
            "preparation for holds, or correct the run kind in the study file", source=src)
    check_option("baseline", baseline, COOLING_BASELINES, where)
    check_range("min_snr", float(min_snr), where, lower=0.0)
    check_range("threshold", float(threshold), where, lower=0.0, inclusive=False)
    check_range("rate_tolerance", float(rate_tolerance), where, lower=0.0, upper=1.0,
                inclusive=False)

    seg = find_cooling_segment(trace.time, trace.temperature, rate=trace.info.rate,
                               tolerance=rate_tolerance, source=src)
    sl_seg = slice(seg.start, seg.end + 1)
    t = trace.time[sl_seg]
    T_rec = trace.temperature[sl_seg]
    q = trace.heat_flow[sl_seg]
    seg_trace = Trace(info=trace.info, time=t, temperature=T_rec, heat_flow=q,
                      specific=trace.specific)
    choice = choose_exotherm(seg_trace, exotherm=exotherm)
    y = orient(q, choice.direction)
    lag_K, lag_record, lag_notes = resolve_lag(lag, trace)
    n = len(t)
    w = smoothing_points(n)
    T_mono = _monotone_temperature(T_rec, w)
    T_s = T_mono + lag_K
    noise = robust_noise(y, tail_fraction=1.0)

    if window is not None:
        i0, i1 = _given_window(T_mono, window, src)
        B, fit, regions, terms, notes = _baseline(t, y, i0, i1, baseline, noise, src)
        cut_start = cut_end = False
        cut_reason = ""
    else:
        m = max(_MIN_REGION, n // 10)
        ref = np.interp(t, [np.median(t[:m]), np.median(t[-m:])],
                        [np.median(y[:m]), np.median(y[-m:])])
        win = find_event_window(t, y - ref, noise=noise, k=threshold, smooth_points=w)
        _require_event(win, noise, choice, src)
        B, *_ = _baseline(t, y, win.start_index, win.end_index, baseline, noise, src)
        tail = float(np.clip(0.5 * (n - 1 - win.end_index) / n, _MIN_REGION / n, 0.2))
        win2 = find_event_window(t, y - B, noise=noise, k=threshold, smooth_points=w,
                                 tail_fraction=tail)
        if win2.found:
            win = win2
        i0, i1 = win.start_index, win.end_index
        B, fit, regions, terms, notes = _baseline(t, y, i0, i1, baseline, noise, src)
        trend_start, trend_end = _edge_trends(t, y, i0, i1, float(win.peak_height))
        cut_start = bool(win.above_threshold_at_start) or i0 < _MIN_REGION or trend_start
        cut_end = bool(win.cut_off) or n - 1 - i1 < _MIN_REGION or trend_end
        cut_reason = "; ".join(
            ([("the exotherm is already under way at the start of the constant-rate segment "
               f"({_fmt_T(T_mono[0])})")] if cut_start else [])
            + ([("the exotherm has not ended at the end of the constant-rate segment "
                 f"({_fmt_T(T_mono[-1])})")] if cut_end else []))

    sl = slice(i0, i1 + 1)
    ts, c = t[sl], y[sl] - B[sl]
    cum = cumulative_trapezoid(c, ts)
    area = float(cum[-1])
    if not area > 0:
        raise CrystkinInputError(
            f"no crystallization event found: the baseline-corrected signal has no positive area "
            f"between {_fmt_T(T_mono[i0])} and {_fmt_T(T_mono[i1])}; check the exotherm sign (now "
            f"'{choice.direction}', {choice.source}) or give window=(T_high, T_low) in kelvin",
            source=src)
    X_raw = cum / area
    X = np.clip(np.maximum.accumulate(X_raw), 0.0, 1.0)
    adjustment = float(np.max(np.abs(X - X_raw)))

    if trace.specific:
        enthalpy, specific, unit = area, True, "J/kg"
    elif trace.info.mass is not None:
        enthalpy, specific, unit = area / trace.info.mass, True, "J/kg"
    else:
        enthalpy, specific, unit = area, False, "J"

    cs = smooth(c, min(w, _odd_at_most(len(c))))
    t_peak = _peak_time(ts, c, cs)
    height = float(np.max(cs))
    snr = height / noise
    beta = _rate_over(t, T_rec, i0, i1, seg.rate)
    t_half = float(np.interp(0.5, X, ts) - ts[0]) if X[-1] >= 0.5 else float("nan")

    found = list(seg.warnings) + list(choice.warnings) + list(lag_notes) + list(notes)
    if cut_start or cut_end:
        found.append(f"event cut off: {cut_reason}; the enthalpy is underestimated and X is "
                     "normalised to the recorded part")
    if snr < min_snr:
        found.append(f"signal-to-noise too low: peak/noise = {snr:.1f} < {min_snr:g}; limits, "
                     "baseline and enthalpy are uncertain")
    spikes, _ = isolated_spikes(t, y - B, noise=noise)
    _, spike_area = isolated_spikes(ts, c, noise=noise)
    if spikes.size:
        inside = (f"; those inside the event window add {spike_area / area:+.1%} to the area"
                  if spike_area else "")
        found.append(f"{spikes.size} isolated spike(s) (single samples far from their "
                     f"neighbours, first at {t[spikes[0]]:.1f} s) can distort the baseline, "
                     f"the event limits and the enthalpy{inside}: remove them from the raw file")
    for msg in found:
        _warnings.warn(f"{trace.run_id}: {msg}", DataQualityWarning, stacklevel=2)

    dt = float(np.median(np.diff(t)))
    provenance = {
        "method": baseline, "fit": fit, "regions_s": regions,
        "regions_K": {k: None if v is None else [float(np.interp(x, t, T_s)) for x in v]
                      for k, v in regions.items()},
        "passes": 1 if window is not None else 2, "window_given": window is not None,
        "exotherm": choice.direction, "exotherm_source": choice.source,
        "exotherm_confidence": choice.confidence, "exotherm_detected": choice.detected,
        "exotherm_detected_confidence": choice.detected_confidence,
        "T_onset_K": float(T_s[i0]), "T_peak_K": float(np.interp(t_peak, t, T_s)),
        "T_end_K": float(T_s[i1]),
        "T_window_K": (float(T_s[i0]), float(T_s[i1])),
        "T_window_recorded_K": (float(T_mono[i0]), float(T_mono[i1])),
        "t_onset_s": float(t[i0]), "t_peak_s": t_peak, "t_end_s": float(t[i1]),
        "t_half_s": t_half,
        "beta_K_per_s": beta, "beta_nominal_K_per_s": float(trace.info.rate),
        "segment_s": (float(t[0]), float(t[-1])), "segment_K": (float(T_mono[0]),
                                                                 float(T_mono[-1])),
        "segment_rate_K_per_s": seg.rate,
        "lag_K": float(lag_K), "lag": lag_record,
        "temperature_processing": (f"recorded temperature, Savitzky-Golay smoothed ({w} points), "
                                   "made non-increasing" + (", plus the thermal lag"
                                                            if lag_record else "")),
        "noise_sd": noise, "dt_s": dt, "baseline_terms": terms, "smoothing_points": w,
        "peak_height": height, "snr": float(snr), "threshold_k": float(threshold),
        "cut_off": bool(cut_start or cut_end), "cut_off_start": bool(cut_start),
        "cut_off_end": bool(cut_end), "cut_off_reason": cut_reason,
        "monotone_adjustment": adjustment, "monotone_enforced": adjustment > _MONOTONE_NOTE,
        "area": area, "area_unit": "J/kg" if trace.specific else "J", "enthalpy_unit": unit,
        "spikes": int(spikes.size), "spike_area": spike_area,
    }
    return Conversion(
        run_id=trace.run_id, kind="cooling", time=ts, temperature=T_s[sl], conversion=X,
        rate=c / area, enthalpy=float(enthalpy), specific_enthalpy=specific,
        window=(float(ts[0]), float(ts[-1])), baseline=provenance, hold_start=float(t[0]),
        transient_end=float(t[0]), induction_time=float(ts[0] - t[0]), signal=y[sl],
        baseline_values=B[sl], exotherm=choice.direction, warnings=tuple(found))


def _peak_time(ts, c, cs):
    """Vertex of a parabola through the top 10 % of the exotherm (raw signal)."""
    k = int(np.argmax(cs))
    top = cs[k] * 0.9
    a = k
    while a > 0 and cs[a - 1] >= top:
        a -= 1
    b = k
    while b < len(cs) - 1 and cs[b + 1] >= top:
        b += 1
    if b - a < 4:
        return float(ts[k])
    tc = ts[a:b + 1] - ts[k]
    p2, p1, _ = np.polyfit(tc, c[a:b + 1], 2)
    if not p2 < 0:
        return float(ts[k])
    return float(np.clip(ts[k] - p1 / (2 * p2), ts[a], ts[b]))


def _odd_at_most(k):
    return k if k % 2 else k - 1


def _rate_over(t, T, i0, i1, fallback):
    if i1 - i0 < 5:
        return float(fallback)
    slope = np.polyfit(t[i0:i1 + 1] - t[i0], T[i0:i1 + 1], 1)[0]
    return float(-slope) if slope < 0 else float(fallback)


def _require_event(win, noise, choice, src):
    if win.found:
        return
    raise CrystkinInputError(
        f"no crystallization exotherm found in the cooling segment: the largest smoothed "
        f"deviation is {win.peak_height / noise:.1f} noise SD; check the exotherm sign (now "
        f"'{choice.direction}', {choice.source}) or give window=(T_high, T_low) in kelvin",
        source=src)


def _given_window(T_mono, window, src):
    try:
        a, b = (float(v) for v in window)
    except (TypeError, ValueError):
        raise CrystkinInputError(
            f"The 'window' parameter of prepare_cooling must be (T_high, T_low) in K. Got "
            f"{window!r} instead.", source=src) from None
    hi, lo = max(a, b), min(a, b)
    if not (np.isfinite(lo) and np.isfinite(hi) and hi > lo):
        raise CrystkinInputError(
            f"The 'window' parameter of prepare_cooling must be two different temperatures in K."
            f" Got {window!r} instead.", source=src)
    inside = np.flatnonzero((T_mono <= hi) & (T_mono >= lo))
    if inside.size < 4 or hi > T_mono[0] or lo < T_mono[-1]:
        raise CrystkinInputError(
            f"the window {_fmt_T(hi)} to {_fmt_T(lo)} must lie inside the constant-rate cooling "
            f"segment ({_fmt_T(T_mono[0])} to {_fmt_T(T_mono[-1])}) and hold at least 4 samples;"
            " give window=(T_high, T_low) in kelvin of the file's temperature", source=src)
    return int(inside[0]), int(inside[-1])


def _region(t, a, b):
    return (float(t[a]), float(t[b]))


def _regions(n, i0, i1):
    width = max(i1 - i0, _MIN_REGION)
    reach = int(1.5 * width)
    pre = (max(0, i0 - reach), i0 - 1) if i0 >= _MIN_REGION else None
    post = (i1 + 1, min(n - 1, i1 + reach)) if n - 1 - i1 >= _MIN_REGION else None
    return pre, post


def _trend(t, y, r):
    tt, yy = t[r[0]:r[1] + 1], y[r[0]:r[1] + 1]
    tc = tt - tt.mean()
    sxx = float(np.sum(tc ** 2))
    slope = float(np.sum(tc * (yy - yy.mean())) / sxx)
    resid = yy - yy.mean() - slope * tc
    se = float(np.sqrt(np.sum(resid ** 2) / max(len(tt) - 2, 1) / sxx))
    return slope, se, float(tt[-1] - tt[0])


def _edge_trends(t, y, i0, i1, height):
    """Is the signal still changing beside the event (event cut off at start / end)?

    The slope of the signal over each event-free region is compared with the
    slope over the other one (a drifting baseline has about the same slope on
    both sides). When the difference moves the signal by more than 5 standard
    errors and more than 2 % of the peak across a region, the event continues
    into the region whose own slope is the steeper (our criterion).
    """
    pre, post = _regions(len(t), i0, i1)
    if pre is None or post is None:
        return False, False
    bp, sp, wp = _trend(t, y, pre)
    bq, sq, wq = _trend(t, y, post)
    se = np.hypot(sp, sq)
    d = abs(bp - bq)
    start = abs(bp) >= abs(bq) and d * wp > 5.0 * se * wp and d * wp > 0.02 * height
    end = abs(bq) > abs(bp) and d * wq > 5.0 * se * wq and d * wq > 0.02 * height
    return bool(start), bool(end)


def _line_terms(t, region, order, noise, weight):
    """Error terms (level, and slope for order 1) of a line fitted over ``region``."""
    idx = np.arange(region[0], region[1] + 1) if isinstance(region, tuple) else region
    tt = t[idx]
    centre = float(tt.mean())
    terms = [{"weight": weight, "power": 0, "centre_s": centre,
              "sd": float(noise / np.sqrt(len(tt)))}]
    if order >= 1:
        sxx = float(np.sum((tt - centre) ** 2))
        terms.append({"weight": weight, "power": 1, "centre_s": centre,
                      "sd": float(noise / np.sqrt(sxx)) if sxx > 0 else 0.0})
    return terms


def _baseline(t, y, i0, i1, method, noise, src):
    """Baseline over the segment; regions limited to 1.5 window widths next to the event."""
    pre, post = _regions(len(t), i0, i1)
    regions = {"pre": None if pre is None else _region(t, *pre),
               "post": None if post is None else _region(t, *post)}
    notes = []
    if pre is None and post is None:
        raise CrystkinInputError(
            "the event fills the whole constant-rate segment: there is no event-free region for a "
            "baseline; record longer before and after the exotherm or give a narrower window",
            source=src)
    span_t = t[i1] - t[i0]

    def order(r):
        return 1 if t[r[1]] - t[r[0]] >= 0.25 * span_t else 0

    if pre is None or post is None:
        r = post if pre is None else pre
        side = "after" if pre is None else "before"
        o = order(r)
        B, fit = polynomial_baseline(t, y, order=o, anchors=regions["post" if pre is None
                                                                   else "pre"])
        fit["method"] = f"polynomial through the region {side} the event only"
        notes.append(f"baseline '{method}' needs event-free regions on both sides of the event; "
                     f"only the one {side} it exists, so a polynomial of order {o} through it "
                     "was used")
        return B, fit, regions, _line_terms(t, r, o, noise, "1"), notes
    if method == "linear":
        B, fit = linear_baseline(t, y, anchors=[regions["pre"], regions["post"]])
        both = np.concatenate([np.arange(pre[0], pre[1] + 1), np.arange(post[0], post[1] + 1)])
        terms = _line_terms(t, both, 1, noise, "1")
    else:
        po, qo = order(pre), order(post)
        B, fit = sigmoidal_baseline(t, y, window=(t[i0], t[i1]), pre=regions["pre"],
                                    post=regions["post"], pre_order=po, post_order=qo)
        terms = _line_terms(t, pre, po, noise, "1-X") + _line_terms(t, post, qo, noise, "X")
    fit["used"] = method
    return B, fit, regions, terms, notes


# --- helpers on a prepared cooling Conversion -------------------------------------------------

def _require_cooling(conversion, where):
    b = conversion.baseline
    if conversion.kind != "cooling" or "beta_K_per_s" not in b:
        raise CrystkinInputError(
            f"{where} needs a cooling conversion from prepare_cooling; run "
            f"'{conversion.run_id}' is '{conversion.kind}'")
    return b


def cooling_rate(conversion) -> float:
    """Cooling rate measured over the event, K/s."""
    return float(_require_cooling(conversion, "cooling_rate")["beta_K_per_s"])


def time_since_onset(conversion, temperature=None):
    """Jeziorny time t = (T_onset - T)/beta, s (beta the measured rate).

    Parameters
    ----------
    conversion : Conversion
        From :func:`prepare_cooling`.
    temperature : array_like, K, optional
        Default the conversion's temperatures.
    """
    b = _require_cooling(conversion, "time_since_onset")
    T = conversion.temperature if temperature is None else np.asarray(temperature, dtype=float)
    return (b["T_onset_K"] - T) / b["beta_K_per_s"]


def time_at_temperature(conversion, temperature):
    """Record time at which the sample reaches ``temperature`` (K); NaN outside the window."""
    T = conversion.temperature
    Tq = np.asarray(temperature, dtype=float)
    out = np.interp(-Tq, -T, conversion.time)
    return np.where((Tq <= T[0]) & (Tq >= T[-1]), out, np.nan)


def conversion_at_temperature(conversion, temperature):
    """X at ``temperature`` (K) through T(t); NaN outside the event window."""
    t = time_at_temperature(conversion, temperature)
    return np.where(np.isfinite(t), np.interp(np.nan_to_num(t), conversion.time,
                                              conversion.conversion), np.nan)


def local_rate(conversion, times):
    """Smoothed dX/dt (1/s) at ``times`` (s), floored at a small positive value."""
    w = int(conversion.baseline.get("smoothing_points", 5))
    r = smooth(conversion.rate, min(w, _odd_at_most(len(conversion.rate))))
    floor = 1e-6 * float(np.max(r)) if np.max(r) > 0 else 1e-12
    return np.maximum(np.interp(times, conversion.time, r), floor)


def conversion_noise_map(conversion, times):
    """Linear map from independent unit normals to the errors of X at ``times``.

    Parameters
    ----------
    conversion : Conversion
        From :func:`prepare_cooling` (uses ``noise_sd``, ``dt_s``, ``area`` and
        ``baseline_terms`` of its ``baseline``).
    times : array of shape (K,), s
        Record times inside the window.

    Returns
    -------
    X : ndarray of shape (K,)
        Conversion at ``times``.
    G : ndarray of shape (K, K + 1 + number of baseline terms)
        delta X = G z with z ~ N(0, I): covariance G G^T, standard deviations
        ``sqrt((G**2).sum(1))``, joint draws ``G @ z``.

    Notes
    -----
    White noise of SD sigma per sample (sampling interval dt) gives the partial
    area C(t) = integral (q - B) an error of variance sigma^2 dt (t - t_a), with
    independent increments. Each fitted baseline line a + b (t - t_c) has
    independent level and slope errors of SD sigma/sqrt(n) and sigma/sqrt(S_tt)
    over its region; weighted by w(t) (1 - X and X for the two lines of the
    sigmoidal baseline, 1 for a single line) they shift C by
    -integral w (delta_a + delta_b (t - t_c)) dt. To first order
    delta X = (delta C(t) - X delta A)/A with A = C(t_b). Uncertainty of the
    window limits and of the shape of the baseline is not included. This is
    our noise model, not a published one.
    """
    b = _require_cooling(conversion, "conversion_noise_map")
    tq = np.asarray(times, dtype=float)
    tw = conversion.time
    ta, tb = float(tw[0]), float(tw[-1])
    tq_c = np.clip(tq, ta, tb)
    X = np.interp(tq_c, tw, conversion.conversion)
    sigma, dt, A = float(b["noise_sd"]), float(b["dt_s"]), float(b["area"])
    order = np.argsort(tq_c, kind="stable")
    K = len(tq)
    bounds = np.concatenate(([ta], tq_c[order], [tb]))
    seg_sd = sigma * np.sqrt(dt * np.diff(bounds))
    low = np.tril(np.ones((K, K + 1)), k=0)
    dC_white = low * seg_sd[None, :]
    dA_white = seg_sd
    Xs = X[order]
    Xw = conversion.conversion
    terms = b["baseline_terms"]
    Gs = np.zeros((K, K + 1 + len(terms)))
    Gs[:, :K + 1] = (dC_white - Xs[:, None] * dA_white[None, :]) / A
    weights = {"1": np.ones_like(tw), "X": Xw, "1-X": 1.0 - Xw}
    for j, term in enumerate(terms):
        f = weights[term["weight"]] * (tw - term["centre_s"]) ** term["power"]
        u = cumulative_trapezoid(f, tw)
        uq = np.interp(tq_c[order], tw, u)
        Gs[:, K + 1 + j] = -term["sd"] * (uq - Xs * u[-1]) / A
    G = np.empty_like(Gs)
    G[order] = Gs
    return X, G
