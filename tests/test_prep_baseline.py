"""Baselines (kinetics.prep.baseline): exactness on known drifts, the conversion-weighted
baseline across a heat-capacity step, axis independence, inputs untouched.

The test traces are invented; the expected areas and coefficients are known by
construction (hand arithmetic), and numpy.polyfit serves as the outside
reference for the masked polynomial fit.
"""

from __future__ import annotations

import numpy as np
import pytest

from kinetics.errors import CrystkinInputError
from kinetics.models.avrami import avrami_cell_rate, avrami_conversion, avrami_k_from_half_time
from kinetics.prep import (
    cumulative_trapezoid,
    linear_baseline,
    polynomial_baseline,
    region_mask,
    sigmoidal_baseline,
)


def _bump(x, centre=50.0, width=5.0, height=3.0):
    return height * np.exp(-0.5 * ((x - centre) / width) ** 2)


@pytest.mark.parametrize("order,coef", [(0, [0.7]), (1, [0.7, -0.02]), (2, [0.7, -0.02, 3e-4])])
def test_polynomial_exact_on_drift_with_the_event_excluded(order, coef):
    x = np.linspace(0.0, 100.0, 1001)
    drift = np.polynomial.polynomial.polyval(x, coef)
    bump = _bump(x, width=3.0)  # below 1e-20 outside 20-80
    base, params = polynomial_baseline(x, drift + bump, order=order, exclude=(20.0, 80.0))
    np.testing.assert_allclose(base, drift, atol=1e-10)
    np.testing.assert_allclose(params["coefficients"], coef, rtol=1e-8, atol=1e-12)
    assert params["exclude"] == [[20.0, 80.0]] and params["order"] == order


def test_masked_fit_equals_numpy_polyfit_on_the_anchor_points():
    rng = np.random.default_rng(0)
    x = np.linspace(0.0, 600.0, 1201)
    y = 1e-3 + 2e-7 * x + rng.normal(0, 1e-5, x.size) + _bump(x, 300.0, 40.0, 1e-3)
    anchors = [(0.0, 150.0), (450.0, 600.0)]
    _, params = linear_baseline(x, y, anchors=anchors)
    m = region_mask(x, anchors)
    ref = np.polyfit(x[m], y[m], 1)[::-1]
    np.testing.assert_allclose(params["coefficients"], ref, rtol=1e-9)
    assert params["method"] == "linear" and params["n_points"] == int(m.sum())


def test_reversed_axis_gives_the_same_baseline():
    # a cooling run on its temperature axis: x decreasing
    x = np.linspace(0.0, 100.0, 501)
    y = 0.5 + 0.01 * x + _bump(x)
    b1, _ = polynomial_baseline(x, y, order=1, exclude=(30, 70))
    b2, _ = polynomial_baseline(x[::-1], y[::-1], order=1, exclude=(70, 30))
    np.testing.assert_allclose(b2[::-1], b1, atol=1e-12)


def test_bad_options():
    x = np.linspace(0, 10, 50)
    with pytest.raises(CrystkinInputError, match="'order'"):
        polynomial_baseline(x, x, order=3)
    with pytest.raises(CrystkinInputError, match="only 2 samples"):
        polynomial_baseline(x, x, order=1, anchors=(0.0, 0.3))
    with pytest.raises(CrystkinInputError, match="anchors"):
        polynomial_baseline(x, x, anchors=[(1, 2, 3)])
    with pytest.raises(CrystkinInputError, match="equal length"):
        linear_baseline(x, x[:-1])


def _step_trace(noise, seed=0, step=1e-4):
    """Invented scan-like trace: sloped baseline, heat-capacity step S X(t), 300 mJ exotherm."""
    t = np.arange(2400) * 1.0
    n, t_half, t0 = 2.6, 250.0, 300.0
    k = avrami_k_from_half_time(n, t_half)
    edges = np.concatenate(([t[0] - 0.5], t[:-1] + 0.5, [t[-1] + 0.5]))
    X = avrami_conversion(t, n, k, t0)
    q = 1e-3 + 2e-8 * t + step * X + 0.3 * avrami_cell_rate(edges, n, k, t0)
    q = q + np.random.default_rng(seed).normal(0, noise, t.size)
    return t, q


@pytest.mark.parametrize("noise,seed", [(0.0, 0), (2e-6, 1), (2e-6, 2)])
def test_sigmoidal_recovers_the_area_across_a_heat_capacity_step(noise, seed):
    # 0.1 mW step (7 % of the 1.4 mW peak), event 300-1000 s, area 0.300 J by construction
    t, q = _step_trace(noise, seed)
    window, pre, post = (290.0, 1100.0), (0.0, 290.0), (1100.0, 2399.0)
    m = region_mask(t, window)
    base, params = sigmoidal_baseline(t, q, window=window, pre=pre, post=post)
    area = np.trapezoid(q[m] - base[m], t[m])
    assert area == pytest.approx(0.3, rel=0.005)
    assert params["converged"] and params["iterations"] < 20
    # a straight line fitted to the same event-free regions is several % off
    line, _ = linear_baseline(t, q, anchors=[pre, post])
    line_area = np.trapezoid(q[m] - line[m], t[m])
    assert abs(line_area / 0.3 - 1) > 0.03


def test_sigmoidal_baseline_follows_the_conversion():
    t, q = _step_trace(0.0)
    base, params = sigmoidal_baseline(t, q, window=(290.0, 1100.0), pre=(0.0, 290.0),
                                      post=(1100.0, 2399.0))
    k = avrami_k_from_half_time(2.6, 250.0)
    true_base = 1e-3 + 2e-8 * t + 1e-4 * avrami_conversion(t, 2.6, k, 300.0)
    np.testing.assert_allclose(base, true_base, atol=2e-3 * 1e-4)
    assert params["pre"]["order"] == 1 and params["post"]["order"] == 1


def test_sigmoidal_on_a_decreasing_temperature_axis():
    # the same trace against T = 450 K - beta t, beta = 0.1 K/s: same baseline values
    t, q = _step_trace(0.0)
    T = 450.0 - 0.1 * t
    b_t, _ = sigmoidal_baseline(t, q, window=(290.0, 1100.0), pre=(0.0, 290.0),
                                post=(1100.0, 2399.0))
    b_T, _ = sigmoidal_baseline(T, q, window=(450.0 - 29.0, 450.0 - 110.0),
                                pre=(450.0, 450.0 - 29.0), post=(450.0 - 110.0, 450.0 - 239.9))
    np.testing.assert_allclose(b_T, b_t, rtol=1e-9, atol=1e-12)


def test_sigmoidal_needs_area():
    t = np.linspace(0, 100, 200)
    with pytest.raises(CrystkinInputError, match="no positive area"):
        sigmoidal_baseline(t, np.ones_like(t), window=(40, 60), pre=(0, 40), post=(60, 100))


def test_inputs_are_not_modified():
    t, q = _step_trace(2e-6)
    t0, q0 = t.copy(), q.copy()
    t.setflags(write=False)
    q.setflags(write=False)
    sigmoidal_baseline(t, q, window=(290.0, 1100.0), pre=(0.0, 290.0), post=(1100.0, 2399.0))
    polynomial_baseline(t, q, order=2, exclude=(290.0, 1100.0))
    cumulative_trapezoid(q, t)
    np.testing.assert_array_equal(t, t0)
    np.testing.assert_array_equal(q, q0)


def test_cumulative_trapezoid_against_numpy():
    x = np.sort(np.random.default_rng(4).uniform(0, 10, 300))
    y = np.sin(x)
    c = cumulative_trapezoid(y, x)
    assert c[0] == 0.0
    assert c[-1] == pytest.approx(np.trapezoid(y, x), rel=1e-12)
    assert c[150] == pytest.approx(np.trapezoid(y[:151], x[:151]), rel=1e-12)
