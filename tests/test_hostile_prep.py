"""Hostile but well-formed runs through signal preparation (hypothesis; invented data).

Every Trace here is valid for the data model (finite, time increasing, at least 10
points) but hostile to preparation: pure noise, constant or stepped signals, huge
(1e30) and tiny (1e-30) scales, spikes, flat plateaus, absurd temperature
programmes, very short records, isothermal runs whose temperature ramps, cooling
runs that heat, events of both signs. The contract checked, for
``prepare_isothermal``, ``prepare_cooling`` and ``melting_peak`` alike:

* either a valid result: a Conversion whose X is finite, non-decreasing and inside
  [0, 1] with a finite enthalpy (a MeltingPeak with a finite temperature),
* or a CrystkinInputError with a one-line message,
* never another exception type, and never longer than 5 s per call.

The expected properties come from the definition of relative crystallinity
(X = partial area / total area, so 0 <= X <= 1 and non-decreasing), not from the code.
"""

from __future__ import annotations

import math
import os
import signal
import sys
import threading
import time
import warnings
from contextlib import contextmanager

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from kinetics.dataset import Conversion, RunInfo, Trace
from kinetics.errors import CrystkinInputError, DataQualityWarning
from kinetics.prep import prepare_isothermal
from kinetics.prep.cooling import prepare_cooling
from kinetics.prep.melting import MeltingPeak, melting_peak

CALL_LIMIT_S = 5.0
# bounded for CI; a longer local hunt: CRYSTKIN_HOSTILE_EXAMPLES=2000 pytest ...
EXAMPLES = int(os.environ.get("CRYSTKIN_HOSTILE_EXAMPLES", "40"))
PROPS = settings(max_examples=EXAMPLES, deadline=None,
                 suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


class _Hang(Exception):
    """Raised by the alarm: preparation ran longer than CALL_LIMIT_S."""


@contextmanager
def time_guard(limit=CALL_LIMIT_S):
    """Fail (not hang) when the block runs longer than ``limit`` seconds."""
    use_alarm = (sys.platform != "win32" and hasattr(signal, "setitimer")
                 and threading.current_thread() is threading.main_thread())
    if use_alarm:
        def _ring(signum, frame):
            raise _Hang(f"preparation took longer than {limit} s")
        old = signal.signal(signal.SIGALRM, _ring)
        signal.setitimer(signal.ITIMER_REAL, limit + 1.0)
    start = time.perf_counter()
    try:
        yield
    finally:
        if use_alarm:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, old)
    elapsed = time.perf_counter() - start
    assert elapsed < limit, f"preparation took {elapsed:.1f} s (limit {limit} s)"


# -- building blocks (all invented) ---------------------------------------------------------

SCALES = [1e-30, 1e-12, 1e-3, 1.0, 1e12, 1e30]
LENGTHS = st.one_of(st.integers(10, 30), st.integers(31, 300), st.sampled_from([600, 1500]))


@st.composite
def time_axis(draw, n):
    kind = draw(st.sampled_from(["regular", "irregular", "tiny_steps", "huge_steps"]))
    if kind == "regular":
        dt = draw(st.sampled_from([1e-3, 0.1, 0.5, 1.0, 10.0]))
        t = np.arange(n) * dt
    elif kind == "irregular":
        rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
        t = np.cumsum(rng.uniform(0.01, 5.0, n))
    elif kind == "tiny_steps":
        t = 1e9 + np.arange(n) * 1e-3
    else:
        t = np.arange(n) * 1e20
    t0 = draw(st.sampled_from([0.0, 0.0, -500.0, 1e5]))
    return t0 + t


@st.composite
def temperature_programme(draw, t, T_set):
    n = len(t)
    kind = draw(st.sampled_from([
        "constant", "cool_then_hold", "ramp_up", "ramp_down", "step", "random_walk",
        "sawtooth", "absurd_high", "absurd_negative", "near_zero", "plateaus"]))
    u = (t - t[0]) / max(t[-1] - t[0], 1e-300)
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    if kind == "constant":
        T = np.full(n, T_set)
    elif kind == "cool_then_hold":
        k = max(1, n // 10)
        T = np.concatenate([np.linspace(T_set + 60, T_set, k), np.full(n - k, T_set)])
    elif kind == "ramp_up":
        T = T_set + 100.0 * u
    elif kind == "ramp_down":
        T = T_set + 50.0 - 100.0 * u
    elif kind == "step":
        T = np.where(u < 0.5, T_set, T_set + 30.0)
    elif kind == "random_walk":
        T = T_set + np.cumsum(rng.normal(0.0, 2.0, n))
    elif kind == "sawtooth":
        T = T_set + 20.0 * ((8 * u) % 1.0)
    elif kind == "absurd_high":
        T = np.full(n, 1e30) + 1e28 * u
    elif kind == "absurd_negative":
        T = -1e6 - 10.0 * u
    elif kind == "near_zero":
        T = 1e-30 * (1 + u)
    else:
        T = T_set + np.repeat(np.arange(5) * 5.0, -(-n // 5))[:n]
    return T.astype(float)


@st.composite
def matching_programme(draw, t, kind, T_set, rate):
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    jitter = draw(st.sampled_from([0.0, 0.01, 0.3])) * rng.normal(size=len(t))
    if kind == "isothermal":
        n = len(t)
        k = draw(st.sampled_from([0, 1, max(1, n // 20), n // 3]))
        T = np.concatenate([np.linspace(T_set + 30, T_set, k), np.full(n - k, T_set)])
        return T + 0.1 * jitter
    span = t - t[0]
    if draw(st.booleans()):
        rate = 100.0 / max(float(span[-1]), 1e-300)
    sign = -1.0 if kind == "cooling" else 1.0
    return T_set + sign * rate * span + jitter


@st.composite
def heat_flow_signal(draw, t):
    n = len(t)
    u = (t - t[0]) / max(t[-1] - t[0], 1e-300)
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    scale = draw(st.sampled_from(SCALES))
    kind = draw(st.sampled_from([
        "noise", "constant", "zero", "step", "spike", "plateaus", "peak_up", "peak_down",
        "mixed_sign", "peak_on_step", "square", "alternating", "ramp", "peak_noise"]))
    noise = rng.normal(0.0, 1.0, n)
    gauss = np.exp(-0.5 * ((u - draw(st.floats(0.05, 0.95))) / draw(
        st.floats(0.005, 0.3))) ** 2)
    if kind == "noise":
        y = noise
    elif kind == "constant":
        y = np.full(n, draw(st.sampled_from([1.0, -1.0, 3.5])))
    elif kind == "zero":
        y = np.zeros(n)
    elif kind == "step":
        y = np.where(u < draw(st.floats(0.1, 0.9)), 0.0, 1.0) + 0.01 * noise
    elif kind == "spike":
        y = 0.01 * noise
        y[draw(st.integers(0, n - 1))] = draw(st.sampled_from([1.0, -1.0, 100.0]))
    elif kind == "plateaus":
        y = np.repeat(rng.normal(0.0, 1.0, 6), -(-n // 6))[:n]
    elif kind == "peak_up":
        y = gauss + 0.01 * noise
    elif kind == "peak_down":
        y = -gauss + 0.01 * noise
    elif kind == "mixed_sign":
        other = np.exp(-0.5 * ((u - 0.7) / 0.05) ** 2)
        y = gauss - draw(st.floats(0.3, 1.5)) * other + 0.01 * noise
    elif kind == "peak_on_step":
        y = gauss + np.where(u < 0.5, 0.0, 0.5) + 0.01 * noise
    elif kind == "square":
        y = np.where((u > 0.3) & (u < 0.6), 1.0, 0.0)
    elif kind == "alternating":
        y = np.where(np.arange(n) % 2 == 0, 1.0, -1.0)
    elif kind == "ramp":
        y = u + 0.001 * noise
    else:
        y = gauss + draw(st.sampled_from([0.1, 1.0, 10.0])) * noise
    if draw(st.booleans()):
        y = y + draw(st.sampled_from([0.0, 5.0, -5.0]))
    return y * scale


@st.composite
def hostile_traces(draw):
    n = draw(LENGTHS)
    t = draw(time_axis(n))
    T_set = draw(st.sampled_from([398.15, 300.0, 1.0, 5000.0]))
    kind = draw(st.sampled_from(["isothermal", "cooling", "heating"]))
    rate = draw(st.sampled_from([1e-6, 10 / 60, 1.0, 1e6]))
    if draw(st.integers(0, 2)):
        # programme that matches the label, so preparation gets past its first checks
        T = draw(matching_programme(t, kind, T_set, rate))
    else:
        T = draw(temperature_programme(t, T_set))
    q = draw(heat_flow_signal(t))
    mass = draw(st.sampled_from([None, 5e-6, 1e-30, 1e3]))
    exotherm = draw(st.sampled_from([None, None, "up", "down"]))
    info = RunInfo(run_id="hostile", kind=kind, source="hostile.csv",
                   temperature=T_set if kind == "isothermal" else None,
                   rate=None if kind == "isothermal" else rate, mass=mass, exotherm=exotherm,
                   hold_temperature=T_set if kind == "heating" else None)
    specific = mass is None and draw(st.booleans())
    return Trace(info, t, T, q, specific=specific)


# -- the contract --------------------------------------------------------------------------

def _check_conversion(conv):
    assert isinstance(conv, Conversion)
    X = conv.conversion
    assert X.size >= 1 and X.size == conv.time.size == conv.temperature.size
    assert np.all(np.isfinite(X)), "X has NaN or infinite values"
    assert np.all((X >= 0.0) & (X <= 1.0)), (X.min(), X.max())
    assert np.all(np.diff(X) >= 0.0), "X decreases"
    assert math.isfinite(conv.enthalpy), conv.enthalpy
    assert np.all(np.isfinite(conv.time)) and np.all(np.isfinite(conv.temperature))
    assert all(isinstance(w, str) for w in conv.warnings)
    assert conv.window[0] <= conv.window[1]


def _check_peak_in(trace):
    lo, hi = float(trace.temperature.min()), float(trace.temperature.max())

    def check(pk):
        _check_peak(pk)
        assert lo <= pk.temperature <= hi, (pk.temperature, lo, hi)
    return check


def _check_peak(pk):
    assert isinstance(pk, MeltingPeak)
    assert math.isfinite(pk.temperature) and math.isfinite(pk.height)


def _check_message(exc):
    msg = str(exc)
    assert msg.strip(), "empty error message"
    assert "\n" not in msg, msg


def _run(fn, trace, check, **kwargs):
    if check is _check_peak:
        check = _check_peak_in(trace)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        warnings.simplefilter("ignore", RuntimeWarning)
        try:
            with time_guard():
                out = fn(trace, **kwargs)
        except CrystkinInputError as exc:
            _check_message(exc)
            return None
    check(out)
    return out


def _as_kind(trace, kind):
    """The same arrays relabelled (for example an isothermal label on a ramp)."""
    T_med = float(np.median(trace.temperature))
    return trace.with_info(
        kind=kind, temperature=(T_med if kind == "isothermal" else None),
        rate=(trace.info.rate or 10 / 60) if kind != "isothermal" else None)


def _relabel(trace, kind):
    """``_as_kind``, or None when the data model refuses the label (hold below 0 K)."""
    try:
        return _as_kind(trace, kind)
    except CrystkinInputError as exc:
        _check_message(exc)
        return None


PREPARERS = {
    "isothermal": (prepare_isothermal, _check_conversion),
    "cooling": (prepare_cooling, _check_conversion),
    "heating": (melting_peak, _check_peak),
}


@PROPS
@given(trace=hostile_traces())
def test_preparation_of_hostile_runs(trace):
    fn, check = PREPARERS[trace.info.kind]
    _run(fn, trace, check)


@PROPS
@given(trace=hostile_traces(), kind=st.sampled_from(["isothermal", "cooling", "heating"]))
def test_mislabelled_runs(trace, kind):
    """Arrays of any programme under any label (isothermal that ramps, cooling that heats)."""
    relabelled = _relabel(trace, kind)
    if relabelled is None:
        return
    fn, check = PREPARERS[kind]
    _run(fn, relabelled, check)


@settings(max_examples=max(EXAMPLES // 2, 1), deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(trace=hostile_traces(), data=st.data())
def test_hostile_options(trace, data):
    """User-given windows (inside, outside, reversed, degenerate) and baselines."""
    kind = data.draw(st.sampled_from(["isothermal", "cooling"]))
    tr = _relabel(trace, kind)
    if tr is None:
        return
    if kind == "isothermal":
        t0, t1 = float(tr.time[0]), float(tr.time[-1])
        window = data.draw(st.sampled_from([
            None, (t0, t1), (t1, t0), (t0, t0), (t1 + 10, t1 + 20), (-1e30, 1e30),
            (t0 + 0.25 * (t1 - t0), t0 + 0.75 * (t1 - t0))]))
        baseline = data.draw(st.sampled_from(["end", "linear", "poly2", "sigmoidal"]))
        _run(prepare_isothermal, tr, _check_conversion, window=window, baseline=baseline)
    else:
        lo, hi = float(tr.temperature.min()), float(tr.temperature.max())
        window = data.draw(st.sampled_from([
            None, (lo, hi), (hi, lo), (lo, lo), (hi + 10, hi + 20),
            (lo + 0.25 * (hi - lo), lo + 0.75 * (hi - lo))]))
        baseline = data.draw(st.sampled_from(["sigmoidal", "linear"]))
        lag = data.draw(st.sampled_from([None, 0.0, 1.5, -1e6]))
        _run(prepare_cooling, tr, _check_conversion, window=window, baseline=baseline, lag=lag)


# -- a few hostile cases written out, so they run even when hypothesis draws others ------

def _trace(kind, t, T, q, **info):
    base = dict(run_id="case", kind=kind, source="case.csv")
    if kind == "isothermal":
        base["temperature"] = float(np.median(T))
    else:
        base["rate"] = 10 / 60
    base.update(info)
    return Trace(RunInfo(**base), t, T, q)


def _event(n=600, scale=1.0, sign=1.0):
    t = np.arange(n) * 0.5
    q = sign * scale * np.exp(-0.5 * ((t - 150.0) / 20.0) ** 2)
    q = q + scale * 1e-3 * np.random.default_rng(0).normal(size=n)
    return t, q


@pytest.mark.parametrize("scale", [1e-30, 1e30])
@pytest.mark.parametrize("kind", ["isothermal", "cooling"])
def test_extreme_scales_of_a_clear_event(kind, scale):
    """A clean invented exotherm scaled to 1e-30 or 1e30: found, or a clear message."""
    t, q = _event(scale=scale)
    T = np.full_like(t, 398.15) if kind == "isothermal" else 453.15 - (10 / 60) * t
    conv = _run(prepare_isothermal if kind == "isothermal" else prepare_cooling,
                _trace(kind, t, T, q, mass=5e-6), _check_conversion)
    if conv is not None and kind == "isothermal":
        # the area scales with the signal: total area of a Gaussian = h * s * sqrt(2 pi)
        expected = scale * 20.0 * math.sqrt(2 * math.pi) / 5e-6
        assert conv.enthalpy == pytest.approx(expected, rel=0.05)


@pytest.mark.parametrize("kind", ["isothermal", "cooling", "heating"])
@pytest.mark.parametrize("n", [10, 11, 17, 30])
def test_very_short_records(kind, n):
    t = np.arange(n, dtype=float)
    T = np.full(n, 398.15) if kind == "isothermal" else (
        453.15 - t if kind == "cooling" else 353.15 + t)
    q = np.exp(-0.5 * ((t - n / 2) / 2.0) ** 2)
    fn, check = PREPARERS[kind]
    _run(fn, _trace(kind, t, T, q), check)


def test_isothermal_label_on_a_ramp():
    t, q = _event()
    T = 453.15 - (10 / 60) * t
    _run(prepare_isothermal, _trace("isothermal", t, T, q, temperature=398.15),
         _check_conversion)


def test_cooling_label_on_a_heating_scan_is_refused():
    t, q = _event()
    T = 353.15 + (10 / 60) * t
    with pytest.raises(CrystkinInputError) as err:
        with time_guard():
            prepare_cooling(_trace("cooling", t, T, q))
    _check_message(err.value)


@pytest.mark.parametrize("kind", ["isothermal", "cooling", "heating"])
@pytest.mark.parametrize("value", [0.0, 1.0, -1e30])
def test_constant_signal_has_no_event(kind, value):
    """A constant heat flow holds no event: preparation must say so, not invent one."""
    n = 400
    t = np.arange(n, dtype=float)
    T = np.full(n, 398.15) if kind == "isothermal" else (
        453.15 - 0.2 * t if kind == "cooling" else 353.15 + 0.2 * t)
    fn, _ = PREPARERS[kind]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        with pytest.raises(CrystkinInputError) as err:
            with time_guard():
                fn(_trace(kind, t, T, np.full(n, value)))
    _check_message(err.value)


# -- realistic invented runs, then damaged --------------------------------------------------

def _realistic(kind, seed):
    if kind == "isothermal":
        from kinetics.synthetic import synthetic_isotherm
        trace, _ = synthetic_isotherm(n=2.5, t_half=60.0, t0=20.0, temperature=398.15,
                                      seed=seed, transient=(2e-4, 5.0))
    else:
        from kinetics.synthetic_cooling import synthetic_cooling
        trace, _ = synthetic_cooling(rate=10 / 60, seed=seed, n_points=800,
                                     baseline_step=2e-5)
    return trace


def _damage(trace, how, rng):
    t, T, q = trace.time.copy(), trace.temperature.copy(), trace.heat_flow.copy()
    n = len(t)
    peak = float(np.max(np.abs(q - np.median(q))))
    if how == "quantised_heat_flow":
        step = peak * rng.choice([0.01, 0.1, 0.5])
        q = np.round(q / step) * step
    elif how == "quantised_temperature":
        T = np.round(T / rng.choice([0.1, 1.0])) * rng.choice([0.1, 1.0])
    elif how == "spikes":
        idx = rng.choice(n, size=rng.integers(1, 6), replace=False)
        q[idx] += rng.choice([-100.0, 100.0], size=idx.size) * peak
    elif how == "repeated_values":
        q = np.repeat(q[::5], 5)[:n]
    elif how == "truncated_start":
        k = rng.integers(n // 4, 3 * n // 4)
        t, T, q = t[k:], T[k:], q[k:]
    elif how == "truncated_end":
        k = rng.integers(n // 4, 3 * n // 4)
        t, T, q = t[:k], T[:k], q[:k]
    elif how == "decimated":
        k = max(1, n // int(rng.integers(10, 31)))
        t, T, q = t[::k], T[::k], q[::k]
    elif how == "sign_flip_part_way":
        k = rng.integers(n // 4, 3 * n // 4)
        q[k:] = -q[k:]
    elif how == "step":
        q[n // 2:] += rng.choice([-1.0, 1.0]) * peak
    elif how == "reversed_sign":
        q = -q
    elif how == "heating_prefix":
        k = n // 5
        T[:k] = T[k] - np.linspace(30.0, 0.0, k)
    return Trace(trace.info, t, T, q, specific=trace.specific)


DAMAGE = ["quantised_heat_flow", "quantised_temperature", "spikes", "repeated_values",
          "truncated_start", "truncated_end", "decimated", "sign_flip_part_way", "step",
          "reversed_sign", "heating_prefix"]


@settings(max_examples=max(EXAMPLES // 2, 1), deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(kind=st.sampled_from(["isothermal", "cooling"]), how=st.sampled_from(DAMAGE),
       seed=st.integers(0, 2**16))
def test_damaged_realistic_runs(kind, how, seed):
    trace = _damage(_realistic(kind, seed % 7), how, np.random.default_rng(seed))
    fn, check = PREPARERS[kind]
    out = _run(fn, trace, check)
    if how == "spikes" and out is not None:
        assert any("spike" in w for w in out.warnings), out.warnings


@pytest.mark.parametrize("kind", ["isothermal", "cooling"])
@pytest.mark.parametrize("scale", [1e-30, 1e-12, 1e-6, 1e12, 1e30])
@pytest.mark.parametrize("quantised", [False, True])
def test_preparation_does_not_depend_on_the_signal_unit(kind, scale, quantised):
    """X is a ratio of integrals of the heat flow, so multiplying the heat flow by any
    factor (a change of unit) leaves X unchanged and multiplies the enthalpy by that
    factor (linearity of the integral); no threshold may be absolute. ``quantised``: a
    noise-free record rounded to 1e-4 of its peak (flat, repeated values at the end)."""
    trace = _realistic(kind, 3)
    if quantised:
        if kind == "isothermal":
            from kinetics.synthetic import synthetic_isotherm
            trace, _ = synthetic_isotherm(n=2.5, t_half=60.0, t0=20.0, temperature=398.15,
                                          seed=1, noise=0.0)
        step = 1e-4 * float(np.max(np.abs(trace.heat_flow)))
        trace = Trace(trace.info, trace.time, trace.temperature,
                      np.round(trace.heat_flow / step) * step)
    scaled = Trace(trace.info, trace.time, trace.temperature, trace.heat_flow * scale)
    fn = PREPARERS[kind][0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        ref, out = fn(trace), fn(scaled)
    assert out.window == ref.window
    np.testing.assert_allclose(out.conversion, ref.conversion, rtol=0, atol=1e-9)
    assert out.enthalpy / scale == pytest.approx(ref.enthalpy, rel=1e-9)


def test_isolated_spike_area_by_hand():
    """One sample of height 10 on a zero signal sampled every 0.5 s: the trapezoidal rule
    gives it the area 10 x 0.5 = 5 (each interior sample carries half of both intervals)."""
    from kinetics.prep.events import isolated_spikes

    t = np.arange(100) * 0.5
    y = np.zeros(100)
    y[50] = 10.0
    idx, area = isolated_spikes(t, y, noise=0.01)
    assert idx.tolist() == [50]
    assert area == pytest.approx(5.0)
    idx, area = isolated_spikes(t, np.exp(-0.5 * ((t - 25.0) / 3.0) ** 2), noise=0.01)
    assert idx.size == 0 and area == 0.0


@pytest.mark.parametrize("key", ["temperature", "rate", "mass", "hold_temperature"])
@pytest.mark.parametrize("value", [float("inf"), float("-inf"), float("nan")])
def test_run_information_must_be_finite(key, value):
    """An overflowing quantity ('1e400 degC' parses to inf) is refused by the data model."""
    base = {"temperature": 398.15} if key != "rate" else {}
    kind = "heating" if key in ("rate", "hold_temperature") else "isothermal"
    fields = {"run_id": "r", "kind": kind, **({"rate": 0.1} if kind == "heating" else base),
              key: value}
    with pytest.raises(CrystkinInputError, match="finite|positive"):
        RunInfo(**fields)
