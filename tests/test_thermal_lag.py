"""Thermal-lag calibration and correction of cooling runs.

The correction is T_sample = T_recorded + lag(beta). The checks: hand
arithmetic of the calibration models, numpy.polyfit for the least-squares
line, and an invented run generated with a known lag (the truth of invented
data, never an outside reference for the kinetics).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from kinetics.errors import CrystkinInputError, DataQualityWarning
from kinetics.prep.cooling import prepare_cooling
from kinetics.prep.thermal_lag import ThermalLag, resolve_lag, thermal_lag
from kinetics.synthetic_cooling import synthetic_cooling

PER_MIN = 1 / 60


def test_proportional_from_one_rate_hand():
    # lag = tau beta with tau = 1.5 K / (10 K/min) = 1.5 / (1/6 K/s) = 9 s;
    # at 20 K/min: 9 s * (1/3 K/s) = 3 K.
    lag = thermal_lag({10 * PER_MIN: 1.5})
    assert lag.model == "proportional"
    assert lag.slope == pytest.approx(9.0, rel=1e-12)
    assert lag.lag_at(20 * PER_MIN) == pytest.approx(3.0, rel=1e-12)
    assert lag.intercept == 0.0


def test_proportional_several_rates_least_squares_through_origin():
    # tau = sum(l b) / sum(b^2): rates 0.1, 0.2 K/s, lags 1.0, 1.9 K ->
    # tau = (0.1 + 0.38) / (0.01 + 0.04) = 0.48 / 0.05 = 9.6 s.
    lag = thermal_lag([(0.1, 1.0), (0.2, 1.9)], model="proportional")
    assert lag.slope == pytest.approx(9.6, rel=1e-12)


def test_linear_fit_matches_polyfit():
    cal = {5 * PER_MIN: 0.8, 10 * PER_MIN: 1.5, 20 * PER_MIN: 3.1, 40 * PER_MIN: 5.9}
    lag = thermal_lag(cal)
    assert lag.model == "linear"
    b, a = np.polyfit(list(cal), list(cal.values()), 1)
    assert lag.slope == pytest.approx(b, rel=1e-10)
    assert lag.intercept == pytest.approx(a, rel=1e-10)
    assert lag.lag_at(15 * PER_MIN) == pytest.approx(a + b * 15 * PER_MIN, rel=1e-10)


def test_interpolation_hand():
    # between (0.1 K/s, 1 K) and (0.3 K/s, 2 K): at 0.2 K/s, 1.5 K. Outside, the end
    # segment continues with slope (2 - 1)/(0.3 - 0.1) = 5 s:
    # at 0.5 K/s, 2 + 5 * 0.2 = 3 K; at 0.05 K/s, 1 - 5 * 0.05 = 0.75 K.
    lag = thermal_lag({0.1: 1.0, 0.3: 2.0}, model="interpolate")
    assert lag.lag_at(0.2) == pytest.approx(1.5)
    assert lag.lag_at(0.5) == pytest.approx(3.0)
    assert lag.lag_at(0.05) == pytest.approx(0.75)


@pytest.mark.parametrize("bad, match", [
    ({}, "empty"),
    ({-0.1: 1.0}, "positive"),
    ({0.1: 80.0}, "implausible"),
    ("ten", "map rates"),
])
def test_bad_calibrations(bad, match):
    with pytest.raises(CrystkinInputError, match=match):
        thermal_lag(bad)


def test_model_needs_two_rates():
    with pytest.raises(CrystkinInputError, match="two or more"):
        thermal_lag({0.1: 1.0}, model="linear")
    with pytest.raises(CrystkinInputError, match="must be one of"):
        thermal_lag({0.1: 1.0}, model="cubic")


def test_repeated_rate_rejected():
    with pytest.raises(CrystkinInputError, match="only once"):
        thermal_lag([(0.1, 1.0), (0.1, 1.2)])


@pytest.fixture(scope="module")
def lagged_run():
    # invented run: the sample is 1.2 K warmer than the recorded temperature at 10 K/min
    return synthetic_cooling(rate=10 * PER_MIN, lag=1.2, baseline_step=2e-5,
                             drift=(1e-4, 2e-6), seed=11, n_points=3000)


def test_run_with_known_lag_is_corrected_to_sample_temperature(lagged_run):
    trace, truth = lagged_run
    conv = prepare_cooling(trace, lag={10 * PER_MIN: 1.2})
    true_T = np.interp(conv.time, trace.time, truth["sample_temperature"])
    assert np.max(np.abs(conv.temperature - true_T)) < 0.05
    assert conv.baseline["T_peak_K"] == pytest.approx(truth["T_peak_sample"], abs=0.3)
    assert conv.baseline["lag_K"] == pytest.approx(1.2)
    assert conv.baseline["lag"]["model"] == "proportional"
    assert conv.baseline["lag"]["calibration_K_per_min"] == [pytest.approx(10.0)]
    plain = prepare_cooling(trace)
    assert plain.baseline["lag_K"] == 0.0 and plain.baseline["lag"] is None
    offset = np.median(true_T - np.interp(conv.time, plain.time, plain.temperature))
    assert offset == pytest.approx(1.2, abs=0.05)


def test_lag_from_several_rates_and_as_number(lagged_run):
    trace, truth = lagged_run
    cal = ThermalLag(rates=(5 * PER_MIN, 20 * PER_MIN), lags=(0.6, 2.4), model="linear",
                     intercept=0.0, slope=7.2)
    conv = prepare_cooling(trace, lag=cal)
    assert conv.baseline["lag_K"] == pytest.approx(1.2)
    conv2 = prepare_cooling(trace, lag=1.2)
    np.testing.assert_allclose(conv2.temperature, conv.temperature)
    assert conv2.baseline["lag"]["model"] == "given for this run"


def test_extrapolated_lag_warns(lagged_run):
    trace, _ = lagged_run
    value, record, notes = resolve_lag({40 * PER_MIN: 4.8}, trace)
    assert value == pytest.approx(1.2) and record["extrapolated"]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        conv = prepare_cooling(trace, lag={40 * PER_MIN: 4.8})
    assert any("extrapolated" in w for w in conv.warnings)
    assert any(issubclass(c.category, DataQualityWarning) for c in caught)


def test_bad_lag_number(lagged_run):
    trace, _ = lagged_run
    with pytest.raises(CrystkinInputError, match="not usable"):
        prepare_cooling(trace, lag=500.0)
