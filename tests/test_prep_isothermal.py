"""From an invented isothermal hold to a Conversion (kinetics.prep.isothermal).

The traces are invented (kinetics.synthetic) with known Avrami parameters, so
the expected enthalpy, induction time and half-time are known by construction;
the tolerances are derived by hand below from the noise and the Avrami rate
dX/dt = n k t^(n-1) exp(-k t^n) (Avrami, J. Chem. Phys. 7, 1103 (1939)).
"""

from __future__ import annotations

import math
import time
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetics.dataset import RunInfo, Trace
from kinetics.errors import CrystkinInputError, DataQualityWarning
from kinetics.prep import prepare_isothermal
from kinetics.synthetic import synthetic_isotherm

RUN = {"n": 2.6, "t_half": 120.0, "t0": 60.0, "temperature": 400.0, "noise": 0.01}
DRIFT = (2e-4, 5e-8)          # W, W/s: 40 uW over the run, about 1 noise SD
TRANSIENT = (1.5e-3, 8.0)     # W, s: about half the 3.4 mW peak


def prepare_quietly(trace, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        return prepare_isothermal(trace, **kw)


def flipped(trace):
    return Trace(info=trace.info, time=trace.time, temperature=trace.temperature,
                 heat_flow=-trace.heat_flow)


def noise_onset_time(truth):
    """Time after t0 at which the true event heat flow equals one noise SD (hand formula).

    Early on q = m dH n k tau^(n-1), so tau = (sigma / (m dH n k))^(1/(n-1)).
    """
    n, k = truth["n"], truth["k"]
    return (truth["noise_sd"] / (truth["mass"] * truth["enthalpy"] * n * k)) ** (1 / (n - 1))


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
@pytest.mark.parametrize("baseline,drift", [("end", (2e-4, 0.0)), ("linear", DRIFT),
                                            ("poly2", DRIFT), ("sigmoidal", DRIFT)])
def test_enthalpy_induction_and_half_time_recovered(seed, baseline, drift):
    trace, truth = synthetic_isotherm(**RUN, drift=drift, transient=TRANSIENT, seed=seed)
    with warnings.catch_warnings():
        warnings.simplefilter("error", DataQualityWarning)  # a clean run raises no flag
        conv = prepare_isothermal(trace, baseline=baseline)
    assert conv.warnings == ()
    assert conv.enthalpy == pytest.approx(90e3, rel=0.02)
    assert conv.specific_enthalpy and conv.enthalpy_J_per_g == pytest.approx(90.0, rel=0.02)
    # onset: about 4.4 s after t0 the true signal reaches one noise SD; allow twice that
    assert abs(conv.induction_time - 60.0) <= 2 * noise_onset_time(truth) + 2 * 0.5
    # X = 0.5 at t0 + t_half of the true kinetics
    t_half = conv.time_at(0.5) - conv.hold_start - truth["t0"]
    assert t_half == pytest.approx(120.0, abs=1.0)
    assert conv.baseline["method"] == baseline and conv.baseline["fit"]["used"] == baseline


def test_hold_reached_after_a_cooling_ramp():
    # 1 K/s ramp reaching 400 K at 30 s: within 0.5 K from 29.5 s on (hand arithmetic)
    trace, truth = synthetic_isotherm(**RUN, hold_start=30.0, drift=DRIFT, transient=TRANSIENT,
                                      seed=5)
    conv = prepare_quietly(trace, baseline="linear")
    assert conv.hold_start == pytest.approx(29.5, abs=0.5)
    assert conv.time[0] > conv.hold_start
    assert abs(conv.hold_start + conv.induction_time - 90.0) <= 2 * noise_onset_time(truth) + 1
    assert conv.enthalpy == pytest.approx(90e3, rel=0.02)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_fast_linear_foot_induction_time_within_a_few_samples(seed):
    # n = 2: the foot rises linearly and the onset is sharp; within 3 sampling intervals
    trace, truth = synthetic_isotherm(n=2.0, t_half=60.0, t0=40.0, temperature=400.0,
                                      drift=DRIFT, transient=(1e-3, 5.0), seed=seed)
    conv = prepare_quietly(trace, baseline="linear")
    assert abs(conv.induction_time - 40.0) <= 3 * 0.5
    assert conv.baseline["events"]["onset_power"] == pytest.approx(1.0, abs=0.3)


def test_conversion_is_monotone_and_rate_integrates_to_one():
    trace, _ = synthetic_isotherm(**RUN, drift=DRIFT, transient=TRANSIENT, seed=11)
    conv = prepare_quietly(trace)
    X = conv.conversion
    assert X[0] == 0.0 and X[-1] == 1.0
    assert np.all(np.diff(X) >= 0) and X.min() >= 0 and X.max() <= 1
    assert np.trapezoid(conv.rate, conv.time) == pytest.approx(1.0, rel=1e-12)
    np.testing.assert_allclose(conv.signal - conv.baseline_values,
                               conv.rate * conv.enthalpy * trace.info.mass, rtol=1e-12)
    assert conv.window == (conv.time[0], conv.time[-1])
    assert conv.temperature == pytest.approx(np.full(X.size, 400.0), abs=0.05)


def test_sign_flipped_file_gives_the_same_result_and_override_wins():
    trace, _ = synthetic_isotherm(**RUN, seed=12)
    up = prepare_quietly(trace)
    down = prepare_quietly(flipped(trace))
    assert (up.exotherm, down.exotherm) == ("up", "down")
    assert down.baseline["exotherm_source"] == "detected"
    assert down.enthalpy == pytest.approx(up.enthalpy, rel=1e-12)
    labelled = flipped(trace).with_info(exotherm="down")
    assert prepare_quietly(labelled).baseline["exotherm_source"] == "run info"
    # a wrong sign given as argument wins over the data, so no event is found
    with pytest.raises(CrystkinInputError, match="exotherm sign.*argument"):
        prepare_quietly(flipped(trace), exotherm="up")


def test_specific_heat_flow_and_missing_mass():
    trace, _ = synthetic_isotherm(**RUN, seed=13)
    specific = Trace(info=trace.info.__class__(**{**trace.info.__dict__, "mass": None}),
                     time=trace.time, temperature=trace.temperature,
                     heat_flow=trace.heat_flow / 5e-6, specific=True)
    conv = prepare_quietly(specific)
    assert conv.specific_enthalpy and conv.enthalpy == pytest.approx(90e3, rel=0.02)
    no_mass = trace.with_info(mass=None)
    conv = prepare_quietly(no_mass)
    assert not conv.specific_enthalpy and conv.enthalpy_J_per_g is None
    assert conv.enthalpy == pytest.approx(90e3 * 5e-6, rel=0.02)  # J


def test_given_window_is_used():
    trace, _ = synthetic_isotherm(**RUN, seed=14)
    conv = prepare_quietly(trace, window=(55.0, 500.0))
    assert conv.window == (55.0, 500.0)
    assert conv.induction_time == 55.0
    assert conv.baseline["window_given"]


@pytest.mark.parametrize("t0,transient", [(10.0, (2e-3, 15.0)), (-40.0, None)])
def test_conversion_under_way_at_the_hold_start_is_flagged(t0, transient):
    # t0 inside a 15 s transient; or conversion begun 40 s before the hold
    trace, _ = synthetic_isotherm(**{**RUN, "t0": t0}, transient=transient, seed=15)
    with pytest.warns(DataQualityWarning) as caught:
        conv = prepare_isothermal(trace)
    assert any("already under way" in str(w.message) for w in caught)
    assert any(w.startswith("conversion already under way when the hold started")
               for w in conv.warnings)
    assert conv.baseline["conversion_under_way_at_hold_start"]


def test_event_cut_off_by_the_end_of_the_record_is_flagged():
    trace, truth = synthetic_isotherm(**RUN, duration=60.0 + 1.2 * 120.0, seed=16)
    with pytest.warns(DataQualityWarning) as caught:
        conv = prepare_isothermal(trace)
    assert any("cut off" in str(w.message) for w in caught)
    assert any(w.startswith("event cut off by the end of the record") for w in conv.warnings)
    # only the recorded part is integrated: X(1.2 t_half) = 1 - 2^(-1.2^n) of the event
    assert conv.enthalpy / 90e3 == pytest.approx(1 - 2 ** (-(1.2 ** 2.6)), abs=0.03)


def test_low_signal_to_noise_is_flagged():
    trace, _ = synthetic_isotherm(**{**RUN, "noise": 0.2}, seed=17)
    with pytest.warns(DataQualityWarning, match="signal-to-noise too low"):
        conv = prepare_isothermal(trace)
    assert conv.baseline["snr"] < 10


def test_flat_noise_is_no_event():
    rng = np.random.default_rng(18)
    t = np.arange(2000) * 0.5
    info = RunInfo(run_id="flat", kind="isothermal", temperature=400.0, mass=5e-6,
                   source="flat_run.csv")
    trace = Trace(info=info, time=t, temperature=np.full(t.size, 400.0),
                  heat_flow=rng.normal(0, 1e-5, t.size))
    with pytest.raises(CrystkinInputError, match=r"flat_run\.csv.*no crystallization event.*"
                                                 r"exotherm sign.*temperature programme.*window="):
        prepare_quietly(trace)


def test_heat_capacity_step_needs_the_sigmoidal_baseline():
    # invented step of 0.3 mW (9 % of the peak) across the event, clean region before it
    kw = dict(**{**RUN, "t0": 150.0}, drift=DRIFT, transient=TRANSIENT, baseline_step=3e-4)
    errors = {}
    for seed in (0, 1, 2):
        trace, _ = synthetic_isotherm(**kw, seed=seed)
        for method in ("sigmoidal", "linear"):
            conv = prepare_quietly(trace, baseline=method)
            errors.setdefault(method, []).append(conv.enthalpy / 90e3 - 1)
            if method == "sigmoidal":
                assert conv.baseline["fit"]["converged"]
    assert np.max(np.abs(errors["sigmoidal"])) < 0.005
    assert np.min(np.abs(errors["linear"])) > 0.03
    # with the end-of-run level the mismatch of the two levels is reported
    with pytest.warns(DataQualityWarning, match="differs from the end-of-run level"):
        prepare_isothermal(trace, baseline="end")


def test_provenance_is_recorded():
    trace, _ = synthetic_isotherm(**{**RUN, "t0": 150.0}, drift=DRIFT, transient=TRANSIENT,
                                  seed=19)
    conv = prepare_quietly(trace, baseline="sigmoidal")
    b = conv.baseline
    for key in ("method", "fit", "regions", "exotherm_source", "exotherm_confidence",
                "first_recorded_rate_fraction", "monotone_adjustment", "monotone_enforced",
                "noise_sd", "snr", "events", "area"):
        assert key in b
    assert b["fit"]["iterations"] >= 1 and "pre" in b["fit"] and "post" in b["fit"]
    assert b["regions"]["pre"][0] == pytest.approx(conv.transient_end, abs=0.5)
    assert conv.transient_end == pytest.approx(8.0 * math.log(1.5e-3 / (2 * b["noise_sd"])),
                                               abs=4.0)
    assert b["first_recorded_rate_fraction"] < 0.05


def test_bad_calls():
    trace, _ = synthetic_isotherm(**RUN, seed=20)
    with pytest.raises(CrystkinInputError, match="'baseline' parameter of prepare_isothermal"):
        prepare_isothermal(trace, baseline="spline")
    cooling = Trace(info=RunInfo(run_id="c", kind="cooling", rate=0.1), time=trace.time,
                    temperature=trace.temperature, heat_flow=trace.heat_flow)
    with pytest.raises(CrystkinInputError, match="isothermal"):
        prepare_isothermal(cooling)
    with pytest.raises(CrystkinInputError, match="Trace"):
        prepare_isothermal(trace.heat_flow)


def test_inputs_not_modified():
    trace, _ = synthetic_isotherm(**RUN, drift=DRIFT, transient=TRANSIENT, seed=21)
    copies = [a.copy() for a in (trace.time, trace.temperature, trace.heat_flow)]
    prepare_quietly(trace, baseline="sigmoidal")
    prepare_quietly(trace)
    for a, b in zip((trace.time, trace.temperature, trace.heat_flow), copies, strict=True):
        np.testing.assert_array_equal(a, b)
        assert not a.flags.writeable


def test_twenty_thousand_points_well_under_50_ms():
    trace, _ = synthetic_isotherm(**{**RUN, "t_half": 1200.0}, dt=0.4, drift=DRIFT,
                                  transient=TRANSIENT, seed=22)
    assert 18000 <= trace.n_points <= 20000
    prepare_quietly(trace)
    best = min(_timed(trace) for _ in range(5))
    assert best < 0.05


def _timed(trace):
    t0 = time.perf_counter()
    prepare_quietly(trace, baseline="linear")
    return time.perf_counter() - t0


@st.composite
def peak_traces(draw):
    """Invented holds: random positive peak (skewed Gaussian or gamma shape) plus noise."""
    n = draw(st.integers(600, 3000))
    dt = draw(st.sampled_from([0.2, 0.5, 1.0]))
    t = np.arange(n) * dt
    span = t[-1]
    centre = draw(st.floats(0.25, 0.5)) * span
    width = draw(st.floats(0.02, 0.08)) * span
    height = draw(st.floats(1e-4, 1e-2))
    shape = draw(st.sampled_from(["gauss", "gamma"]))
    if shape == "gauss":
        peak = np.exp(-0.5 * ((t - centre) / width) ** 2)
    else:
        a = draw(st.floats(2.0, 6.0))
        s = np.clip(t - (centre - 2 * width), 0, None) / width
        peak = s ** (a - 1) * np.exp(-(s - (a - 1))) / (a - 1) ** (a - 1)
    rng = np.random.default_rng(draw(st.integers(0, 2 ** 16)))
    noise = draw(st.floats(0.001, 0.03)) * height
    level = draw(st.floats(-1e-3, 1e-3))
    q = level + height * peak + rng.normal(0, noise, n)
    sign = draw(st.sampled_from([1.0, -1.0]))
    info = RunInfo(run_id="h", kind="isothermal", temperature=400.0, mass=5e-6)
    return Trace(info=info, time=t, temperature=np.full(n, 400.0), heat_flow=sign * q)


@settings(max_examples=40, deadline=None)
@given(peak_traces())
def test_property_conversion_non_decreasing_from_zero_to_one(trace):
    before = trace.heat_flow.copy()
    conv = prepare_quietly(trace)
    X = conv.conversion
    assert X[0] == 0.0 and X[-1] == 1.0
    assert np.all(np.diff(X) >= 0)
    assert np.all((X >= 0) & (X <= 1))
    assert conv.enthalpy > 0
    np.testing.assert_array_equal(trace.heat_flow, before)
