"""Which way exotherms point in a file, found from the data or taken as given.

Instruments and laboratories disagree on the sign of heat flow ("exo up" or
"exo down"); a wrong sign silently ruins every baseline and integral. The
direction is therefore found from the data, can be set in the run information
or as an argument (which then wins), and the choice is recorded with its source.

The returned label always describes which way *exotherms* point in the file,
also for heating runs, where the dominant event is the endothermic melting peak.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..dataset import RUN_KINDS, Trace
from ..errors import CrystkinInputError, check_option
from .events import (
    find_hold_start,
    noise_factor,
    reference_level,
    robust_noise,
    smooth,
    smoothing_points,
)

__all__ = ["ExothermChoice", "detect_exotherm", "orient", "choose_exotherm"]


@dataclass(frozen=True)
class ExothermChoice:
    """The sign convention used for one run.

    Attributes
    ----------
    direction : {"up", "down"}
        Which way exotherms point in the file.
    source : {"argument", "run info", "detected"}
    confidence : float
        Confidence of the detection, 0 to 1 (1.0 when given).
    detected : {"up", "down"}
        What the data say, also when the direction was given.
    detected_confidence : float
    warnings : tuple of str
    """

    direction: str
    source: str
    confidence: float
    detected: str
    detected_confidence: float
    warnings: tuple[str, ...] = ()


def orient(heat_flow, exotherm) -> np.ndarray:
    """Heat flow with exotherms positive (a new array; the input is not touched).

    Parameters
    ----------
    heat_flow : array_like, W (or W/kg)
    exotherm : {"up", "down"}
        Which way exotherms point in ``heat_flow``.
    """
    check_option("exotherm", exotherm, ("up", "down"), "orient")
    q = np.array(heat_flow, dtype=float, copy=True)
    return q if exotherm == "up" else -q


def _prominence_score(u):
    """Largest height of an interior bump of ``u`` above zero and above both flanks."""
    pre = np.minimum.accumulate(u)
    post = np.minimum.accumulate(u[::-1])[::-1]
    return float(np.max(np.minimum(np.minimum(u - pre, u - post), u)))


def _as_arrays(trace_or_arrays, kind):
    if isinstance(trace_or_arrays, Trace):
        tr = trace_or_arrays
        return tr.time, tr.temperature, tr.heat_flow, kind or tr.info.kind, tr.info
    arrays = tuple(np.asarray(a, dtype=float) for a in trace_or_arrays)
    if len(arrays) == 2:
        t, q = arrays
        T = None
    elif len(arrays) == 3:
        t, T, q = arrays
    else:
        raise CrystkinInputError(
            "detect_exotherm needs a Trace or (time, heat_flow) or (time, temperature, "
            f"heat_flow) arrays; got {len(arrays)} arrays")
    if kind is None:
        raise CrystkinInputError(
            "detect_exotherm needs kind='isothermal', 'cooling' or 'heating' when given arrays")
    return t, T, q, kind, None


def detect_exotherm(trace_or_arrays, *, kind=None) -> tuple[str, float]:
    """Find from the data which way exotherms point.

    Parameters
    ----------
    trace_or_arrays : Trace or tuple of arrays
        A Trace, or ``(time, heat_flow)`` or ``(time, temperature, heat_flow)``
        (s, K, W or W/kg).
    kind : {"isothermal", "cooling", "heating"}, optional
        Required with arrays; defaults to the trace's kind.

    Returns
    -------
    direction : {"up", "down"}
        Which way exotherms point in the data.
    confidence : float
        0 (no evidence) to 1 (unambiguous).

    Notes
    -----
    The signal is smoothed and referenced to a robust level: for an isothermal
    hold (after the hold start, when the temperature shows one) the median of
    its last 20 %, or of its first 10 % when the end is still moving
    (:func:`~kinetics.prep.events.reference_level`); for a scan a line through
    the medians of its first and last 10 %. For each direction the score is
    the largest value u_i that rises above the lowest value before it and the
    one after it by at least u_i itself (a bump, not a monotone start-up
    transient). The larger score gives
    the direction of the dominant event: the crystallization exotherm for
    holds and cooling runs, the melting endotherm for heating runs (so the
    exotherm direction is the opposite one). With s_1 >= s_2 the scores,
    confidence = (1 - s_2/s_1) min(1, s_1/(10 sigma_s)), sigma_s the noise SD
    of the smoothed signal. When neither direction shows a bump above 3 sigma_s,
    the sign of the largest deviation is returned with confidence 0.
    """
    t, T, q, kind, info = _as_arrays(trace_or_arrays, kind)
    check_option("kind", kind, RUN_KINDS, "detect_exotherm")
    start = 0
    if kind == "isothermal" and T is not None and info is not None \
            and info.temperature is not None:
        try:
            start = find_hold_start(t, T, set_temperature=info.temperature).index
        except CrystkinInputError:
            start = 0
    q = np.asarray(q, dtype=float)[start:]
    t = np.asarray(t, dtype=float)[start:]
    if len(q) < 10:
        raise CrystkinInputError("detect_exotherm needs at least 10 samples")
    w = smoothing_points(len(q))
    qs = smooth(q, w)
    sigma_s = robust_noise(q, tail_fraction=1.0) * noise_factor(w)
    m = max(5, len(q) // 10)
    if kind == "isothermal":
        ref = np.full_like(qs, reference_level(t, qs)[0])
    else:
        t_a, t_b = np.median(t[:m]), np.median(t[-m:])
        y_a, y_b = np.median(qs[:m]), np.median(qs[-m:])
        ref = y_a + (y_b - y_a) * (t - t_a) / (t_b - t_a)
    u = qs - ref
    s_up, s_down = _prominence_score(u), _prominence_score(-u)
    hi, lo = max(s_up, s_down), max(min(s_up, s_down), 0.0)
    if hi <= 3.0 * sigma_s:
        event = "up" if u[np.argmax(np.abs(u))] > 0 else "down"
        confidence = 0.0
    else:
        event = "up" if s_up >= s_down else "down"
        confidence = (1.0 - lo / hi) * min(1.0, hi / (10.0 * sigma_s))
    if kind == "heating":
        event = "down" if event == "up" else "up"
    return event, float(confidence)


def choose_exotherm(trace: Trace, *, exotherm=None, min_confidence=0.5) -> ExothermChoice:
    """The exotherm direction to use: argument, then run information, then the data.

    Parameters
    ----------
    trace : Trace
    exotherm : {"up", "down"}, optional
        Overrides everything.
    min_confidence : float
        Below this a detected direction carries a warning.

    Returns
    -------
    ExothermChoice
        Detection is always run, so a given direction that the data clearly
        contradict (confidence at least ``min_confidence``) carries a warning.
    """
    if exotherm is not None:
        check_option("exotherm", exotherm, ("up", "down"), "choose_exotherm")
    detected, conf = detect_exotherm(trace)
    given, source = ((exotherm, "argument") if exotherm is not None
                     else (trace.info.exotherm, "run info"))
    if given is not None:
        warns = ()
        if given != detected and conf >= min_confidence:
            warns = (f"exotherm given as '{given}' ({source}) but the data look like exotherm "
                     f"'{detected}' (confidence {conf:.2f}); check the sign convention",)
        return ExothermChoice(given, source, 1.0, detected, conf, warns)
    warns = ()
    if conf < min_confidence:
        warns = (f"exotherm direction detected as '{detected}' with low confidence "
                 f"({conf:.2f}); set exotherm='up' or 'down' for this run",)
    return ExothermChoice(detected, "detected", conf, detected, conf, warns)
