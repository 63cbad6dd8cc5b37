"""Invented isothermal traces (kinetics.synthetic): they are what they claim to be.

The expected values come from hand arithmetic on the Avrami equation
X = 1 - exp(-k t^n), t_half = (ln 2 / k)^(1/n) (Avrami, J. Chem. Phys. 7, 1103
(1939)), not from the generator itself.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import kinetics.synthetic as synthetic
from kinetics.dataset import Trace
from kinetics.errors import CrystkinInputError
from kinetics.synthetic import synthetic_isotherm, synthetic_isotherm_arrays

BASE = {"n": 2.0, "t_half": 60.0, "t0": 20.0, "temperature": 400.0}


def test_module_says_the_data_are_invented():
    assert "invented" in synthetic.__doc__.lower()
    trace, truth = synthetic_isotherm(**BASE)
    assert "invented" in trace.info.source
    assert "invented" in truth["note"]


def test_rate_constant_from_half_time_by_hand():
    # SCIENCE.md section 1 (D): k = 0.01, n = 2.5 gives t_half = 5.449.
    _, truth = synthetic_isotherm(n=2.5, t_half=5.449, t0=0.0, temperature=400.0, dt=0.01)
    assert truth["k"] == pytest.approx(0.01, rel=2e-4)
    _, truth = synthetic_isotherm(**BASE)
    assert truth["k"] == pytest.approx(math.log(2) / 60.0 ** 2)


def test_peak_heat_flow_by_hand():
    # n = 2: dX/dt = 2 k t exp(-k t^2), largest at t = 1/sqrt(2k), value sqrt(2k) e^(-1/2).
    _, truth = synthetic_isotherm(**BASE)
    k = math.log(2) / 60.0 ** 2
    expected = 5e-6 * 90e3 * math.sqrt(2 * k) * math.exp(-0.5)
    assert truth["peak_heat_flow"] == pytest.approx(expected, rel=1e-12)


def test_event_area_equals_converted_fraction_times_mass_enthalpy():
    t, _, q, truth = synthetic_isotherm_arrays(**BASE, noise=0.0)
    dt = 0.5
    # Cell averages times the cell width telescope to X(last edge) - X(first edge).
    area = float(np.sum(q) * dt)
    x_end = 1 - math.exp(-truth["k"] * (t[-1] + dt / 2 - 20.0) ** 2)
    assert area == pytest.approx(5e-6 * 90e3 * x_end, rel=1e-9)
    assert truth["area"] == pytest.approx(area, rel=1e-9)


def test_noise_level_is_the_requested_fraction_of_the_peak():
    kw = {**BASE, "duration": 20000.0}
    _, _, clean, truth = synthetic_isotherm_arrays(**kw, noise=0.0)
    _, _, noisy, _ = synthetic_isotherm_arrays(**kw, noise=0.02, seed=5)
    sd = float(np.std(noisy - clean))
    assert sd == pytest.approx(0.02 * truth["peak_heat_flow"], rel=0.03)


def test_drift_transient_and_step_terms():
    kw = {**BASE, "noise": 0.0, "hold_start": 10.0}
    t, _, plain, _ = synthetic_isotherm_arrays(**kw)
    _, _, q, _ = synthetic_isotherm_arrays(**kw, drift=(1e-4, 2e-7), transient=(5e-4, 8.0),
                                           baseline_step=3e-5)
    X = 1 - np.exp(-math.log(2) / 60.0 ** 2 * np.clip(t - 30.0, 0, None) ** 2)
    extra = 1e-4 + 2e-7 * t + 5e-4 * np.exp(-np.clip(t - 10.0, 0, None) / 8.0) + 3e-5 * X
    np.testing.assert_allclose(q - plain, extra, rtol=0, atol=1e-15)


def test_exotherm_down_flips_only_the_event():
    kw = {**BASE, "noise": 0.0, "drift": (1e-4, 0.0)}
    _, _, up, _ = synthetic_isotherm_arrays(**kw, exotherm="up")
    _, _, down, _ = synthetic_isotherm_arrays(**kw, exotherm="down")
    np.testing.assert_allclose(up - 1e-4, -(down - 1e-4), atol=1e-15)


def test_temperature_ramps_to_the_hold_then_stays():
    t, T, _, _ = synthetic_isotherm_arrays(**BASE, hold_start=30.0, cooling_rate=0.5)
    hold = t >= 30.0
    assert np.max(np.abs(T[hold] - 400.0)) < 0.05
    assert T[0] == pytest.approx(400.0 + 0.5 * 30.0, abs=0.05)


def test_same_seed_same_trace_other_seed_other_noise():
    a, _ = synthetic_isotherm(**BASE, seed=7)
    b, _ = synthetic_isotherm(**BASE, seed=7)
    c, _ = synthetic_isotherm(**BASE, seed=8)
    np.testing.assert_array_equal(a.heat_flow, b.heat_flow)
    assert not np.array_equal(a.heat_flow, c.heat_flow)


def test_trace_metadata():
    trace, truth = synthetic_isotherm(**BASE, run_id="r1", group="g", mass=4e-6)
    assert isinstance(trace, Trace)
    assert trace.info.kind == "isothermal"
    assert trace.info.exotherm is None
    assert (trace.info.run_id, trace.info.group, trace.info.mass) == ("r1", "g", 4e-6)
    assert trace.time[0] == 0.0
    assert trace.time[-1] == pytest.approx(20.0 + 6 * 60.0)
    assert truth["event_start"] == 20.0


def test_negative_induction_time_means_conversion_before_the_hold():
    _, truth = synthetic_isotherm(**{**BASE, "t0": -30.0}, hold_start=5.0)
    assert truth["conversion_at_hold_start"] == pytest.approx(
        1 - math.exp(-math.log(2) / 3600 * 30.0 ** 2))


@pytest.mark.parametrize("bad", [{"n": 0.0}, {"t_half": -1.0}, {"transient": (1e-3, 0.0)},
                                 {"exotherm": "sideways"}, {"dt": 0.0}])
def test_bad_options_raise_input_errors(bad):
    with pytest.raises(CrystkinInputError):
        synthetic_isotherm(**{**BASE, **bad})
