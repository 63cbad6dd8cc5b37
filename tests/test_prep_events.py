"""Hold start, noise, start-up transient and event window (kinetics.prep.events).

Outside references: scipy.signal.savgol_filter for the smoothing; the Gaussian
consistency constant of the MAD (Rousseeuw & Croux, J. Am. Stat. Assoc. 88
(1993) 1273); hand arithmetic on the invented traces' known terms (for a
transient A exp(-t/tau) the 2-sigma point is tau ln(A / 2 sigma)).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.signal import savgol_filter

from kinetics.errors import CrystkinInputError
from kinetics.prep import (
    find_event_window,
    find_hold_start,
    find_transient_end,
    locate_isothermal_events,
    orient,
    robust_noise,
)
from kinetics.prep.events import noise_factor, smooth
from kinetics.synthetic import synthetic_isotherm_arrays

RUN = {"n": 2.6, "t_half": 120.0, "t0": 60.0, "temperature": 400.0}


@pytest.mark.parametrize("window", [5, 21, 101])
@pytest.mark.parametrize("deriv", [0, 1])
def test_smoothing_matches_scipy_savgol(window, deriv):
    y = np.cumsum(np.random.default_rng(1).normal(size=700))
    ours = smooth(y, window, deriv=deriv, delta=0.5)
    ref = savgol_filter(y, window, 2, deriv=deriv, delta=0.5, mode="interp")
    np.testing.assert_allclose(ours, ref, rtol=1e-9, atol=1e-9 * np.max(np.abs(ref)))


def test_noise_factor_matches_smoothed_white_noise():
    e = np.random.default_rng(2).normal(size=200_000)
    for w in (5, 15, 51):
        assert np.std(smooth(e, w)[w:-w]) == pytest.approx(noise_factor(w), rel=0.02)


def test_robust_noise_on_a_smooth_signal_with_spikes():
    rng = np.random.default_rng(3)
    t = np.linspace(0, 100, 5000)
    y = np.sin(t / 10) + rng.normal(0, 0.03, t.size)
    y[::250] += 5.0  # spikes: the MAD ignores them
    assert robust_noise(y, tail_fraction=1.0) == pytest.approx(0.03, rel=0.05)


def test_noise_estimate_is_calibrated_on_invented_holds():
    # the MAD of 312 differences scatters by about 7 % (one SD); the mean over 20 runs
    # must be within 4 % of the true SD
    ratios = []
    for seed in range(20):
        _, _, q, truth = synthetic_isotherm_arrays(**RUN, seed=seed, drift=(1e-4, 0.0))
        ratios.append(robust_noise(q) / truth["noise_sd"])
    assert np.mean(ratios) == pytest.approx(1.0, abs=0.04)
    assert np.all(np.abs(np.array(ratios) - 1) < 0.25)


def test_hold_start_after_a_cooling_ramp():
    # ramp 1 K/s reaching the set value at 30 s: inside 0.5 K from 29.5 s on (hand arithmetic)
    t, T, _, _ = synthetic_isotherm_arrays(**RUN, hold_start=30.0, cooling_rate=1.0)
    hold = find_hold_start(t, T, set_temperature=400.0, tolerance=0.5)
    assert hold.time == pytest.approx(29.5, abs=0.5)
    assert hold.method == "set temperature" and hold.warnings == ()


def test_hold_on_an_offset_temperature_is_found_and_flagged():
    t, T, _, _ = synthetic_isotherm_arrays(**RUN, hold_start=30.0)
    # never within 0.5 K of 400 K; the recorded level 401.5 K is reached from 29.5 s on
    hold = find_hold_start(t, T + 1.5, set_temperature=400.0, tolerance=0.5)
    assert hold.time == pytest.approx(29.5, abs=0.5)
    assert hold.reference_temperature == pytest.approx(401.5, abs=0.01)
    assert "settles at 401.50 K" in hold.warnings[0]


def test_temperature_that_never_settles_is_an_input_error():
    t = np.arange(1000) * 0.5
    with pytest.raises(CrystkinInputError, match=r"run\.csv.*isothermal hold"):
        find_hold_start(t, 450.0 - 0.1 * t, set_temperature=400.0, source="run.csv")


def test_transient_end_where_the_exponential_reaches_two_noise_sd():
    amp, tau = 2e-3, 10.0
    t, T, q, truth = synthetic_isotherm_arrays(**{**RUN, "t0": 150.0}, transient=(amp, tau),
                                               seed=4)
    sigma = truth["noise_sd"]
    expected = tau * math.log(amp / (2 * sigma))  # about 35 s
    onset = int(np.searchsorted(t, 150.0))
    tr = find_transient_end(t, q, start=0, stop=onset, noise=sigma)
    assert tr.time == pytest.approx(expected, abs=3.0)
    assert tr.decay_time == pytest.approx(tau, rel=0.15)
    assert tr.amplitude == pytest.approx(amp, rel=0.1)
    assert not tr.overlaps_event


def test_transient_overlapping_the_event_is_reported():
    t, T, q, truth = synthetic_isotherm_arrays(**{**RUN, "t0": 30.0}, transient=(2e-3, 20.0),
                                               seed=4)
    ev = locate_isothermal_events(t, T, q, set_temperature=400.0)
    assert ev.transient.overlaps_event
    assert any("overlaps the event" in w for w in ev.warnings)


def test_no_transient_means_transient_end_at_the_hold_start():
    t, T, q, _ = synthetic_isotherm_arrays(**RUN, seed=6)
    ev = locate_isothermal_events(t, T, q, set_temperature=400.0)
    assert ev.transient_end == ev.hold_start == 0.0
    assert not ev.transient.overlaps_event


def test_noise_estimate_and_event_window():
    t, T, q, truth = synthetic_isotherm_arrays(**RUN, seed=7, drift=(1e-4, 0.0),
                                               transient=(1e-3, 8.0))
    ev = locate_isothermal_events(t, T, orient(q, "up"), set_temperature=400.0)
    assert ev.noise == pytest.approx(truth["noise_sd"], rel=0.25)
    # onset within twice the time the true signal needs to reach one noise SD
    k, n = truth["k"], truth["n"]
    tau_noise = (truth["noise_sd"] / (5e-6 * 90e3 * n * k)) ** (1 / (n - 1))
    assert abs(ev.event_start - 60.0) <= 2 * tau_noise + 1.0
    # peak of the Avrami rate: t0 + ((n - 1)/(n k))^(1/n)
    assert ev.peak_time == pytest.approx(60.0 + ((n - 1) / (n * k)) ** (1 / n), abs=5.0)
    # the event is over (X > 0.999) after t0 + t_half (ln 1000 / ln 2)^(1/n)
    assert 60.0 + 120.0 * 1.8 < ev.event_end < 60.0 + 120.0 * (math.log(1e6) / math.log(2)) ** (
        1 / n)
    assert not ev.window.cut_off and ev.window.found


def test_cut_off_event_is_flagged():
    t, T, q, _ = synthetic_isotherm_arrays(**RUN, duration=60.0 + 1.2 * 120.0, seed=8)
    ev = locate_isothermal_events(t, T, q, set_temperature=400.0)
    assert ev.window.cut_off


def test_flat_noise_has_no_event():
    rng = np.random.default_rng(9)
    t = np.arange(3000) * 0.5
    win = find_event_window(t, rng.normal(0, 1e-5, t.size), noise=1e-5)
    assert not win.found


def test_given_window_is_used_as_is():
    t, T, q, _ = synthetic_isotherm_arrays(**RUN, seed=10)
    ev = locate_isothermal_events(t, T, q, set_temperature=400.0, window=(50.0, 500.0))
    assert (ev.event_start, ev.event_end) == (50.0, 500.0)
    assert ev.window.start_method == "given"
    with pytest.raises(CrystkinInputError, match="window"):
        locate_isothermal_events(t, T, q, set_temperature=400.0, window=(500.0, 50.0))
