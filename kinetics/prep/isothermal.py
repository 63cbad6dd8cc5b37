"""From one raw isothermal hold to a :class:`~kinetics.dataset.Conversion`.

Steps: orient the signal (exotherm positive), find the hold start, the event
window and the end of the start-up transient, fit the baseline, integrate the
corrected signal over the window and normalise it to the relative
crystallinity X(t). Event finding and baseline are done twice: the second pass
references the signal to the baseline of the first, so a sloping baseline does
not shift the event limits. Every choice and diagnostic goes into
``Conversion.baseline``; every data-quality finding into ``Conversion.warnings``
and a :class:`~kinetics.errors.DataQualityWarning`.

For holds the end-of-run level is the default baseline anchor: crystallization
often begins inside the start-up transient, so a clean region before the event
frequently does not exist, while the end of a complete run is flat.
"""

from __future__ import annotations

import warnings as _warnings

import numpy as np

from ..dataset import Conversion, Trace
from ..errors import CrystkinInputError, DataQualityWarning, check_option, check_range
from .baseline import cumulative_trapezoid, polynomial_baseline, sigmoidal_baseline
from .events import IsothermalEvents, isolated_spikes, locate_isothermal_events, smooth
from .sign import choose_exotherm, orient

__all__ = ["prepare_isothermal", "BASELINE_METHODS", "EARLY_START_FRACTION"]

BASELINE_METHODS = ("end", "linear", "poly2", "sigmoidal")
#: Corrected signal at the end of the start-up transient, as a fraction of the
#: peak, above which conversion counts as already under way (our choice).
EARLY_START_FRACTION = 0.1
_MIN_REGION = 10
_MONOTONE_NOTE = 1e-3


def prepare_isothermal(trace, *, window=None, baseline="end", exotherm=None, hold_tolerance=0.5,
                       min_snr=10.0, threshold=3.0) -> Conversion:
    """Relative crystallinity X(t) and enthalpy of one isothermal hold.

    Parameters
    ----------
    trace : Trace
        An isothermal run (``info.kind == "isothermal"`` with its set temperature).
    window : (float, float), s, optional
        Event window in record time, overriding the detected one.
    baseline : {"end", "linear", "poly2", "sigmoidal"}
        ``"end"``: constant at the end-of-run level (mean of the last 20 % of
        the hold after the event). ``"linear"``: straight line through the
        event-free region between the transient and the event and the end-of-run
        region. ``"poly2"``: quadratic through the region before the event and
        everything after it. ``"sigmoidal"``: conversion-weighted mixture of the
        lines before and after the event (for a heat-capacity change across it).
        Without a region of at least 10 samples before the event the last three
        fall back to ``"end"`` with a warning.
    exotherm : {"up", "down"}, optional
        Sign convention of the file; overrides ``trace.info.exotherm``, which
        overrides detection from the data.
    hold_tolerance : float, K
        Temperature band around the set temperature that defines the hold.
    min_snr : float
        Peak over noise SD below which a low signal-to-noise warning is given.
    threshold : float
        Event limits are where the smoothed signal crosses this many noise SDs
        of the smoothed signal (then followed to the baseline crossing).

    Returns
    -------
    Conversion
        Over the event window: ``conversion`` X in [0, 1], non-decreasing, from 0
        to 1; ``rate`` dX/dt in 1/s; ``enthalpy`` in J/kg (``specific_enthalpy``
        True) when the mass is known or the heat flow is specific, else in J;
        ``induction_time`` = event start - hold start (s); all choices and
        diagnostics (``first_recorded_rate_fraction``, ``snr``,
        ``monotone_adjustment``, regions, coefficients, iterations) in
        ``baseline``.

    Raises
    ------
    CrystkinInputError
        Not an isothermal run, bad options, or no event found.

    Notes
    -----
    With q the exotherm-positive heat flow and B the baseline over the window
    [t_a, t_b]: A = integral (q - B) dt (trapezoidal rule),
    X(t) = integral_{t_a}^{t} (q - B) dt' / A, dX/dt = (q - B) / A and
    Delta H = A / m. Negative excursions of the corrected signal (noise at the
    window edges) are removed from X by a running maximum; the largest change
    it made is recorded as ``monotone_adjustment``.

    Examples
    --------
    >>> from kinetics.synthetic import synthetic_isotherm
    >>> trace, truth = synthetic_isotherm(n=2.5, t_half=60.0, t0=30.0, temperature=400.0,
    ...                                   seed=1)
    >>> conv = prepare_isothermal(trace)
    >>> abs(conv.enthalpy / truth["enthalpy"] - 1) < 0.02
    True
    """
    where = "prepare_isothermal"
    if not isinstance(trace, Trace):
        raise CrystkinInputError(
            f"The 'trace' parameter of {where} must be a Trace. Got {type(trace).__name__} "
            "instead.")
    src = trace.info.source or trace.run_id
    if trace.info.kind != "isothermal":
        raise CrystkinInputError(
            f"{where} needs an isothermal run, this one is '{trace.info.kind}'; use the "
            "preparation for scans, or correct the run kind in the study file", source=src)
    check_option("baseline", baseline, BASELINE_METHODS, where)
    check_range("hold_tolerance", float(hold_tolerance), where, lower=0.0, inclusive=False)
    check_range("min_snr", float(min_snr), where, lower=0.0)
    check_range("threshold", float(threshold), where, lower=0.0, inclusive=False)

    choice = choose_exotherm(trace, exotherm=exotherm)
    t = trace.time
    y = orient(trace.heat_flow, choice.direction)
    locate = dict(set_temperature=trace.info.temperature, hold_tolerance=hold_tolerance,
                  k=threshold, window=window, source=src)

    ev = locate_isothermal_events(t, trace.temperature, y, **locate)
    _require_event(ev, window, choice, src)
    B, fit, regions, fit_warn = _baseline(t, y, ev, baseline)
    ev = locate_isothermal_events(t, trace.temperature, y, baseline=B, **locate)
    _require_event(ev, window, choice, src)
    B, fit, regions, fit_warn = _baseline(t, y, ev, baseline)

    i0, i1 = ev.window.start_index, ev.window.end_index
    sl = slice(i0, i1 + 1)
    ts, c = t[sl], y[sl] - B[sl]
    cum = cumulative_trapezoid(c, ts)
    area = float(cum[-1])
    if not area > 0:
        raise CrystkinInputError(
            f"no crystallization event found: the baseline-corrected signal has no positive area"
            f" between {ts[0]:g} and {ts[-1]:g} s; check the exotherm sign (now "
            f"'{choice.direction}', {choice.source}), the temperature programme, or give "
            "window=(start, end) in seconds", source=src)
    X_raw = cum / area
    X = np.clip(np.maximum.accumulate(X_raw), 0.0, 1.0)
    adjustment = float(np.max(np.abs(X - X_raw)))

    if trace.specific:
        enthalpy, specific, unit = area, True, "J/kg"
    elif trace.info.mass is not None:
        enthalpy, specific, unit = area / trace.info.mass, True, "J/kg"
    else:
        enthalpy, specific, unit = area, False, "J"

    ih, ite = ev.hold.index, ev.transient.index
    rs = smooth(y[ih:] - B[ih:], ev.provenance["smoothing_points"])
    height = ev.window.peak_height
    fraction = float(rs[min(ite, len(t) - 1) - ih] / height) if height > 0 else float("nan")
    snr = height / ev.noise
    under_way = (ev.window.above_threshold_at_start or ev.transient.overlaps_event
                 or fraction > EARLY_START_FRACTION)

    found = list(choice.warnings) + list(ev.warnings) + fit_warn
    if under_way:
        why = []
        if ev.window.above_threshold_at_start:
            why.append("the signal is above the event threshold from the hold start on")
        if ev.transient.overlaps_event:
            why.append("the event starts before the start-up transient has died out")
        why.append(f"the corrected signal at the transient end ({ev.transient_end:.1f} s) is "
                   f"{max(fraction, 0.0):.0%} of the peak")
        found.append("conversion already under way when the hold started: " + "; ".join(why)
                     + "; the early conversion is missing or mixed with transient heat, so "
                     "enthalpy, induction time and early X are uncertain")
    if ev.window.cut_off:
        found.append(f"event cut off by the end of the record: {ev.window.cut_off_reason}; the"
                     " enthalpy is underestimated and X is normalised to the recorded part")
    if snr < min_snr:
        found.append(f"signal-to-noise too low: peak/noise = {snr:.1f} < {min_snr:g}; limits, "
                     "baseline and enthalpy are uncertain")
    spikes, _ = isolated_spikes(t, y - B, noise=ev.noise)
    _, spike_area = isolated_spikes(ts, c, noise=ev.noise)
    if spikes.size:
        inside = (f"; those inside the event window add {spike_area / area:+.1%} to the area"
                  if spike_area else "")
        found.append(f"{spikes.size} isolated spike(s) (single samples far from their "
                     f"neighbours, first at {t[spikes[0]]:.1f} s) can distort the baseline, "
                     f"the event limits and the enthalpy{inside}: remove them from the raw file")
    for msg in found:
        _warnings.warn(f"{trace.run_id}: {msg}", DataQualityWarning, stacklevel=2)

    provenance = {
        "method": baseline, "fit": fit, "regions": regions, "passes": 2,
        "window_given": window is not None,
        "exotherm": choice.direction, "exotherm_source": choice.source,
        "exotherm_confidence": choice.confidence, "exotherm_detected": choice.detected,
        "exotherm_detected_confidence": choice.detected_confidence,
        "events": ev.provenance, "noise_sd": ev.noise, "peak_height": height, "snr": float(snr),
        "first_recorded_rate_fraction": fraction,
        "early_start_fraction_limit": EARLY_START_FRACTION,
        "conversion_under_way_at_hold_start": bool(under_way),
        "transient_overlaps_event": bool(ev.transient.overlaps_event),
        "cut_off": bool(ev.window.cut_off),
        "monotone_adjustment": adjustment, "monotone_enforced": adjustment > _MONOTONE_NOTE,
        "area": area, "area_unit": "J/kg" if trace.specific else "J", "enthalpy_unit": unit,
        "spikes": int(spikes.size), "spike_area": spike_area,
    }
    return Conversion(
        run_id=trace.run_id, kind="isothermal", time=ts, temperature=trace.temperature[sl],
        conversion=X, rate=c / area, enthalpy=float(enthalpy), specific_enthalpy=specific,
        window=(float(ts[0]), float(ts[-1])), baseline=provenance, hold_start=ev.hold_start,
        transient_end=ev.transient_end, induction_time=float(ev.event_start - ev.hold_start),
        signal=y[sl], baseline_values=B[sl], exotherm=choice.direction, warnings=tuple(found))


def _require_event(ev: IsothermalEvents, window, choice, src):
    if window is not None or ev.window.found:
        return
    raise CrystkinInputError(
        f"no crystallization event found: the largest smoothed deviation after the hold start "
        f"is {ev.window.peak_height / ev.noise:.1f} noise SD; check the exotherm sign (now "
        f"'{choice.direction}', {choice.source}), the temperature programme (kind, set "
        "temperature), or give window=(start, end) in seconds", source=src)


def _transient_tail(t, ev: IsothermalEvents):
    """The fitted start-up transient (zero when none was fitted or it overlaps the event)."""
    tr = ev.transient
    tail = np.zeros_like(t)
    if np.isfinite(tr.decay_time) and tr.amplitude != 0 and not tr.overlaps_event:
        ih = ev.hold.index
        tail[ih:] = tr.amplitude * np.exp(-(t[ih:] - ev.hold_start) / tr.decay_time)
    return tail


def _baseline(t, y, ev: IsothermalEvents, method):
    n = len(t)
    ih, ite = ev.hold.index, ev.transient.index
    i0, i1 = ev.window.start_index, ev.window.end_index
    late0 = max(i1 + 1, n - max(_MIN_REGION, int(0.2 * (n - ih))))
    late0 = min(late0, n - _MIN_REGION)
    post0 = min(i1 + 1, n - _MIN_REGION)
    late = (float(t[late0]), float(t[-1]))
    post = (float(t[post0]), float(t[-1]))
    pre = (float(t[ite]), float(t[i0 - 1])) if i0 - ite >= _MIN_REGION else None
    regions = {"pre": pre, "late": late, "post": post}
    tail = _transient_tail(t, ev)
    z = y - tail
    notes = []
    requested = method
    if ev.window.cut_off and pre is not None:
        notes.append(f"the end of the record lies inside the event, so the baseline is the "
                     f"level before the event ({pre[0]:.1f}-{pre[1]:.1f} s) instead of "
                     f"'{method}'")
        B, fit = polynomial_baseline(t, z, order=0, anchors=pre)
        method = fit["method"] = "pre-event level"
    elif method != "end" and pre is None:
        notes.append(f"baseline '{method}' needs an event-free region of at least "
                     f"{_MIN_REGION} samples between the transient end ({t[ite]:.1f} s) and "
                     f"the event start ({t[i0]:.1f} s); the end-of-run level was used instead")
        method = "end"
    if method == "end":
        B, fit = polynomial_baseline(t, z, order=0, anchors=late)
        fit["method"] = "end-of-run level"
        if pre is not None and requested == "end":
            notes.extend(_level_mismatch(t, z, pre, late, B[-1], ev))
    elif method == "linear":
        B, fit = polynomial_baseline(t, z, order=1, anchors=[pre, late])
        fit["method"] = "linear"
    elif method == "poly2":
        B, fit = polynomial_baseline(t, z, order=2, anchors=[pre, post])
    elif method == "sigmoidal":
        width = t[i1] - t[i0]
        pre_order = 1 if pre[1] - pre[0] >= 0.25 * width else 0
        post_order = 1 if post[1] - post[0] >= 0.25 * width else 0
        B, fit = sigmoidal_baseline(t, z, window=(t[i0], t[i1]), pre=pre, post=post,
                                    pre_order=pre_order, post_order=post_order)
    fit["used"] = method
    fit["transient_tail_included"] = bool(np.any(tail != 0))
    return B + tail, fit, regions, notes


def _level_mismatch(t, z, pre, late, level, ev):
    m = (t >= pre[0]) & (t <= pre[1])
    k = (t >= late[0]) & (t <= late[1])
    offset = float(np.mean(z[m]) - level)
    se = ev.noise * np.sqrt(1.0 / m.sum() + 1.0 / k.sum())
    height = ev.window.peak_height
    if abs(offset) > 5.0 * se and abs(offset) > 0.02 * height:
        return [f"the level before the event differs from the end-of-run level by "
                f"{offset / height:+.1%} of the peak ({abs(offset) / se:.0f} standard errors): "
                "drift or a heat-capacity change across the event; baseline='linear' or "
                "'sigmoidal' may suit this run better"]
    return []
