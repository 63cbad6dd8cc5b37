"""Exotherm direction: found from the data, overridable, recorded (kinetics.prep.sign).

The traces are invented (kinetics.synthetic or hand-made shapes); the expected
direction is known by construction.
"""

from __future__ import annotations

import numpy as np
import pytest

from kinetics.dataset import Trace
from kinetics.errors import CrystkinInputError
from kinetics.prep import choose_exotherm, detect_exotherm, orient
from kinetics.synthetic import synthetic_isotherm

RUN = {"n": 2.6, "t_half": 120.0, "t0": 60.0, "temperature": 400.0}


def flipped(trace: Trace) -> Trace:
    return Trace(info=trace.info, time=trace.time, temperature=trace.temperature,
                 heat_flow=-trace.heat_flow, specific=trace.specific)


@pytest.mark.parametrize("exotherm", ["up", "down"])
@pytest.mark.parametrize("transient", [None, (3e-3, 10.0), (-3e-3, 10.0)])
def test_isothermal_direction_found(exotherm, transient):
    # transient of about one peak height, either sign: a monotone decay is not an event
    trace, _ = synthetic_isotherm(**RUN, exotherm=exotherm, transient=transient, seed=2)
    direction, confidence = detect_exotherm(trace)
    assert direction == exotherm
    assert confidence > 0.8


def test_flipping_the_file_flips_the_answer():
    trace, _ = synthetic_isotherm(**RUN, seed=4, drift=(1e-4, 1e-8))
    assert detect_exotherm(trace)[0] == "up"
    assert detect_exotherm(flipped(trace))[0] == "down"


def test_cut_off_hold_still_detected():
    trace, _ = synthetic_isotherm(**RUN, duration=60.0 + 1.2 * 120.0, seed=1)
    assert detect_exotherm(trace)[0] == "up"


def _scan(kind, peak_sign, n=3000):
    rng = np.random.default_rng(0)
    t = np.linspace(0.0, 1200.0, n)
    rate = 10.0 / 60.0
    T = 480.0 - rate * t if kind == "cooling" else 300.0 + rate * t
    slope = -2e-4 + 1e-7 * t  # heat-capacity baseline with a slope
    bump = 3e-3 * np.exp(-0.5 * ((t - 600.0) / 40.0) ** 2)
    q = slope + peak_sign * bump + rng.normal(0, 3e-5, n)
    return t, T, q


def test_cooling_run_exotherm():
    t, T, q = _scan("cooling", +1)
    assert detect_exotherm((t, T, q), kind="cooling")[0] == "up"
    assert detect_exotherm((t, -q), kind="cooling")[0] == "down"


def test_heating_run_label_describes_exotherms_not_the_melting_peak():
    # melting endotherm pointing down means exotherms point up in this file
    t, T, q = _scan("heating", -1)
    assert detect_exotherm((t, T, q), kind="heating")[0] == "up"
    assert detect_exotherm((t, T, -q), kind="heating")[0] == "down"


def test_flat_noise_has_no_confidence():
    rng = np.random.default_rng(3)
    t = np.arange(2000) * 0.5
    _, confidence = detect_exotherm((t, rng.normal(0, 1e-5, t.size)), kind="isothermal")
    assert confidence < 0.5


def test_run_info_overrides_detection_and_argument_overrides_run_info():
    trace, _ = synthetic_isotherm(**RUN, seed=5)
    choice = choose_exotherm(trace)
    assert (choice.direction, choice.source) == ("up", "detected")
    labelled = trace.with_info(exotherm="down")
    choice = choose_exotherm(labelled)
    assert (choice.direction, choice.source, choice.detected) == ("down", "run info", "up")
    assert choice.warnings and "down" in choice.warnings[0]  # contradicts the data: said
    choice = choose_exotherm(labelled, exotherm="up")
    assert (choice.direction, choice.source, choice.warnings) == ("up", "argument", ())


def test_orient_returns_a_new_exotherm_positive_array():
    q = np.array([1.0, -2.0, 3.0])
    q.setflags(write=False)
    up, down = orient(q, "up"), orient(q, "down")
    np.testing.assert_array_equal(up, q)
    np.testing.assert_array_equal(down, -q)
    assert up is not q
    np.testing.assert_array_equal(q, [1.0, -2.0, 3.0])
    with pytest.raises(CrystkinInputError, match="exotherm"):
        orient(q, "left")


def test_arrays_need_a_kind():
    with pytest.raises(CrystkinInputError, match="kind"):
        detect_exotherm((np.arange(20.0), np.zeros(20)))
