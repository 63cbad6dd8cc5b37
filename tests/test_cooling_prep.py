"""Preparation of cooling scans: segment, window, baseline, X(t) and X(T), warnings.

The runs are invented (kinetics.synthetic_cooling, Nakamura model with an
invented Hoffman–Lauritzen K(T)); their known truth checks the preparation
code, never the science. Bad-input cases: a heating run labelled as cooling,
a flat temperature, an event cut off at either end, windows outside the run.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from kinetics.dataset import Trace
from kinetics.errors import CrystkinInputError, DataQualityWarning
from kinetics.prep.cooling import (
    conversion_at_temperature,
    conversion_noise_map,
    cooling_rate,
    find_cooling_segment,
    prepare_cooling,
    time_at_temperature,
    time_since_onset,
)
from kinetics.synthetic_cooling import synthetic_cooling

PER_MIN = 1 / 60
DOCUMENTED_KEYS = (
    "T_onset_K", "T_peak_K", "T_end_K", "T_window_K", "T_window_recorded_K", "t_onset_s",
    "t_peak_s", "t_end_s", "t_half_s", "beta_K_per_s", "beta_nominal_K_per_s", "segment_s",
    "segment_K", "segment_rate_K_per_s", "lag_K", "lag", "method", "fit", "regions_s",
    "regions_K", "noise_sd", "dt_s", "baseline_terms", "area", "snr", "peak_height", "cut_off",
    "cut_off_start", "cut_off_end", "cut_off_reason")


def quiet_prepare(trace, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        return prepare_cooling(trace, **kw)


@pytest.fixture(scope="module")
def runs():
    out = {}
    for r in (2.5, 10.0, 40.0):
        out[r] = synthetic_cooling(rate=r * PER_MIN, baseline_step=2e-5, drift=(1e-4, 2e-6),
                                   seed=int(r * 10), n_points=2500)
    return out


@pytest.mark.parametrize("rate", [2.5, 10.0, 40.0])
def test_recovers_enthalpy_peak_and_rate(runs, rate):
    trace, truth = runs[rate]
    with warnings.catch_warnings():
        warnings.simplefilter("error", DataQualityWarning)
        conv = prepare_cooling(trace)
    b = conv.baseline
    assert conv.kind == "cooling"
    assert conv.enthalpy == pytest.approx(truth["enthalpy"], rel=0.02)
    assert b["T_peak_K"] == pytest.approx(truth["T_peak_sample"], abs=0.3)
    assert b["beta_K_per_s"] == pytest.approx(truth["rate"], rel=0.005)
    assert not b["cut_off"] and conv.warnings == ()
    assert set(DOCUMENTED_KEYS) <= set(b)
    assert b["T_onset_K"] > b["T_peak_K"] > b["T_end_K"]
    X = conv.conversion
    assert X[0] == 0 and X[-1] == pytest.approx(1.0) and np.all(np.diff(X) >= 0)
    assert np.all(np.diff(conv.temperature) <= 0)


def test_conversion_within_its_noise_model(runs):
    trace, truth = runs[10.0]
    conv = quiet_prepare(trace)
    tq = np.interp([0.05, 0.2, 0.5, 0.8, 0.95], conv.conversion, conv.time)
    X, G = conversion_noise_map(conv, tq)
    sd = np.sqrt((G ** 2).sum(axis=1))
    X_true = np.interp(tq, trace.time, truth["conversion"])
    assert np.all(np.abs(X - X_true) < 4 * sd)


def test_noise_model_is_calibrated():
    # over invented replicates, (X - X_true)/sd should have unit RMS (our noise model;
    # a loose band, 20 replicates)
    z = []
    for seed in range(20):
        trace, truth = synthetic_cooling(rate=10 * PER_MIN, baseline_step=2e-5,
                                         drift=(1e-4, 2e-6), noise=0.01, seed=100 + seed,
                                         n_points=1500)
        conv = quiet_prepare(trace)
        tq = np.interp([0.1, 0.5, 0.9], conv.conversion, conv.time)
        X, G = conversion_noise_map(conv, tq)
        z.append((X - np.interp(tq, trace.time, truth["conversion"]))
                 / np.sqrt((G ** 2).sum(axis=1)))
    rms = float(np.sqrt(np.mean(np.square(z))))
    assert 0.6 < rms < 1.6


def test_noise_map_shapes_and_order(runs):
    conv = quiet_prepare(runs[10.0][0])
    tq = np.interp([0.7, 0.2, 0.5], conv.conversion, conv.time)
    X, G = conversion_noise_map(conv, tq)
    assert X == pytest.approx([0.7, 0.2, 0.5], abs=1e-9)
    assert G.shape[0] == 3
    _, G_sorted = conversion_noise_map(conv, np.sort(tq))
    np.testing.assert_allclose(np.sqrt((G ** 2).sum(1))[[1, 2, 0]],
                               np.sqrt((G_sorted ** 2).sum(1)))


def test_x_of_temperature_helpers(runs):
    conv = quiet_prepare(runs[10.0][0])
    T50 = conv.temperature_at(0.5)
    assert conversion_at_temperature(conv, [T50])[0] == pytest.approx(0.5, abs=1e-3)
    assert np.isnan(conversion_at_temperature(conv, [conv.temperature[0] + 5])[0])
    assert time_at_temperature(conv, [T50])[0] == pytest.approx(conv.time_at(0.5), abs=0.5)
    t = time_since_onset(conv)
    b = conv.baseline
    # Jeziorny's time: t = (T_onset - T)/beta
    np.testing.assert_allclose(t, (b["T_onset_K"] - conv.temperature) / b["beta_K_per_s"])
    assert t[0] == pytest.approx(0.0, abs=1e-9)
    assert cooling_rate(conv) == b["beta_K_per_s"]


def test_exotherm_down_gives_same_conversion():
    up, _ = synthetic_cooling(rate=10 * PER_MIN, seed=5, n_points=2000)
    down, _ = synthetic_cooling(rate=10 * PER_MIN, seed=5, n_points=2000, exotherm="down")
    cu, cd = quiet_prepare(up), quiet_prepare(down)
    assert cu.exotherm == "up" and cd.exotherm == "down"
    assert cd.enthalpy == pytest.approx(cu.enthalpy, rel=0.01)


def test_hold_before_ramp_is_skipped():
    trace, truth = synthetic_cooling(rate=10 * PER_MIN, hold=120.0, seed=3, n_points=3000)
    seg = find_cooling_segment(trace.time, trace.temperature, rate=10 * PER_MIN)
    assert trace.time[seg.start] == pytest.approx(120.0, abs=5.0)
    assert seg.rate == pytest.approx(10 * PER_MIN, rel=0.005)
    conv = quiet_prepare(trace)
    assert conv.hold_start == pytest.approx(120.0, abs=5.0)
    assert conv.enthalpy == pytest.approx(truth["enthalpy"], rel=0.02)


def test_given_window_and_linear_baseline(runs):
    trace, truth = synthetic_cooling(rate=10 * PER_MIN, drift=(1e-4, 2e-6), seed=9,
                                     n_points=2000)
    conv = quiet_prepare(trace, window=(423.15, 373.15), baseline="linear")
    hi, lo = conv.baseline["T_window_recorded_K"]
    assert 423.15 >= hi > 422.0 and 373.15 <= lo < 374.5
    assert conv.baseline["window_given"] and conv.baseline["method"] == "linear"
    assert conv.enthalpy == pytest.approx(truth["enthalpy"], rel=0.02)


def test_stated_rate_mismatch_warns():
    trace, _ = synthetic_cooling(rate=10 * PER_MIN, stated_rate=12 * PER_MIN, seed=2,
                                 n_points=1500)
    with pytest.warns(DataQualityWarning, match="differs from the stated"):
        conv = prepare_cooling(trace)
    assert conv.baseline["beta_K_per_s"] == pytest.approx(10 * PER_MIN, rel=0.005)


def test_low_snr_warns():
    trace, _ = synthetic_cooling(rate=10 * PER_MIN, noise=0.2, seed=2, n_points=1500)
    with pytest.warns(DataQualityWarning, match="signal-to-noise"):
        prepare_cooling(trace)


def test_event_cut_off_at_end():
    # the record stops at 115 degC while the 10 K/min exotherm runs to about 110 degC
    trace, truth = synthetic_cooling(rate=10 * PER_MIN, T_end=388.15, seed=1, n_points=2000)
    assert truth["conversion_at_end"] < 0.95
    with pytest.warns(DataQualityWarning, match="cut off"):
        conv = prepare_cooling(trace)
    assert conv.baseline["cut_off_end"] and not conv.baseline["cut_off_start"]
    assert any("has not ended" in w for w in conv.warnings)


def test_event_cut_off_at_start():
    # the ramp starts at 122 degC, after the 10 K/min exotherm has begun
    trace, _ = synthetic_cooling(rate=10 * PER_MIN, T_start=395.15, seed=1, n_points=2000)
    with pytest.warns(DataQualityWarning, match="cut off"):
        conv = prepare_cooling(trace)
    assert conv.baseline["cut_off_start"]
    assert any("already under way" in w for w in conv.warnings)


def test_heating_run_given_as_cooling_is_refused(runs):
    trace, _ = runs[10.0]
    heating = Trace(info=trace.info, time=trace.time, temperature=trace.temperature[::-1].copy(),
                    heat_flow=trace.heat_flow)
    with pytest.raises(CrystkinInputError, match="looks like a heating run"):
        prepare_cooling(heating)


def test_wrong_kind_and_flat_temperature_refused(runs):
    trace, _ = runs[10.0]
    with pytest.raises(CrystkinInputError, match="needs a cooling run"):
        prepare_cooling(trace.with_info(kind="heating"))
    flat = Trace(info=trace.info, time=trace.time, temperature=np.full(trace.n_points, 400.0),
                 heat_flow=trace.heat_flow)
    with pytest.raises(CrystkinInputError, match="not a cooling scan"):
        prepare_cooling(flat)


def test_bad_options_refused(runs):
    trace, _ = runs[10.0]
    with pytest.raises(CrystkinInputError, match="must lie inside"):
        prepare_cooling(trace, window=(500.0, 380.0))
    with pytest.raises(CrystkinInputError, match="'baseline' parameter"):
        prepare_cooling(trace, baseline="spline")
    with pytest.raises(CrystkinInputError, match="must be a Trace"):
        prepare_cooling(np.zeros(10))


def test_inputs_untouched(runs):
    trace, _ = runs[2.5]
    before = trace.heat_flow.copy(), trace.temperature.copy()
    quiet_prepare(trace)
    np.testing.assert_array_equal(trace.heat_flow, before[0])
    np.testing.assert_array_equal(trace.temperature, before[1])
