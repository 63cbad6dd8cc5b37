"""Invented isothermal DSC traces for tests and the demo.

Everything this module produces is **invented data**, generated from the
package's own Avrami model plus noise, baseline drift, an optional heat-capacity
step and an instrument start-up transient. It is meant to exercise the signal
preparation and the estimation code on runs whose true parameters are known;
it never stands in for an outside reference.

The recorded heat flow (W) is

    q(t) = a + b t + A exp(-(t - t_h)/tau) + s m dH <dX/dt>_cell + S X(t) + e(t)

with drift offset a and slope b, a start-up transient of amplitude A and decay
time tau starting at the hold start t_h (held at A before it), the event sign
s = +1 for ``exotherm="up"`` and -1 for ``"down"``, sample mass m, specific
enthalpy dH, the Avrami conversion rate averaged over each sampling interval,
an optional heat-capacity step S following the conversion, and white Gaussian
noise e of standard deviation ``noise`` times the peak event heat flow.
"""

from __future__ import annotations

import numpy as np

from .dataset import RunInfo, Trace
from .errors import CrystkinInputError, check_option, check_range
from .models.avrami import (
    avrami_cell_rate,
    avrami_conversion,
    avrami_k_from_half_time,
    avrami_peak_time,
    avrami_rate,
)

__all__ = ["synthetic_isotherm", "synthetic_isotherm_arrays"]

_WHERE = "synthetic_isotherm"
_TEMPERATURE_NOISE = 0.005  # K


def synthetic_isotherm_arrays(*, n, t_half, t0, enthalpy=90e3, mass=5e-6, temperature,
                              duration=None, dt=0.5, noise=0.01, drift=(0.0, 0.0),
                              transient=None, exotherm="up", seed=0, hold_start=0.0,
                              baseline_step=0.0, cooling_rate=1.0):
    """Arrays of an invented isothermal run and its true parameters.

    Parameters are those of :func:`synthetic_isotherm` (without run naming).

    Returns
    -------
    time : ndarray, s
    temperature : ndarray, K
    heat_flow : ndarray, W
    truth : dict
        The true values used (see :func:`synthetic_isotherm`).
    """
    check_range("n", float(n), _WHERE, lower=0.0, inclusive=False)
    check_range("t_half", float(t_half), _WHERE, lower=0.0, inclusive=False)
    check_range("dt", float(dt), _WHERE, lower=0.0, inclusive=False)
    check_range("noise", float(noise), _WHERE, lower=0.0)
    check_range("mass", float(mass), _WHERE, lower=0.0, inclusive=False)
    check_option("exotherm", exotherm, ("up", "down"), _WHERE)
    if duration is None:
        duration = hold_start + max(t0, 0.0) + 6.0 * t_half
    check_range("duration", float(duration), _WHERE, lower=10 * dt)
    if transient is not None and (len(transient) != 2 or not transient[1] > 0):
        raise CrystkinInputError(
            f"The 'transient' parameter of {_WHERE} must be (amplitude in W, decay time in s > 0)"
            f" or None. Got {transient!r} instead.")

    rng = np.random.default_rng(seed)
    n_points = int(round(duration / dt)) + 1
    t = np.arange(n_points) * dt
    k = float(avrami_k_from_half_time(n, t_half))
    onset = hold_start + t0
    edges = np.concatenate(([t[0] - dt / 2], t[:-1] + dt / 2, [t[-1] + dt / 2]))
    cell_rate = avrami_cell_rate(edges, n, k, onset)
    scale = mass * enthalpy
    if n > 1:
        peak_rate = float(avrami_rate(avrami_peak_time(n, k, 0.0), n, k, 0.0))
    else:
        peak_rate = float(cell_rate.max())
    peak = scale * peak_rate
    sign = 1.0 if exotherm == "up" else -1.0

    q = drift[0] + drift[1] * t + sign * scale * cell_rate
    if baseline_step:
        q = q + baseline_step * avrami_conversion(t, n, k, onset)
    if transient is not None:
        amp, tau = float(transient[0]), float(transient[1])
        q = q + amp * np.exp(-np.clip(t - hold_start, 0.0, None) / tau)
    noise_sd = noise * peak
    q = q + rng.normal(0.0, noise_sd, n_points)

    T = temperature + cooling_rate * np.clip(hold_start - t, 0.0, None)
    T = T + rng.normal(0.0, _TEMPERATURE_NOISE, n_points)

    X_edges = avrami_conversion(edges[[0, -1]], n, k, onset)
    truth = {
        "note": "invented synthetic data (crystkin.synthetic)",
        "n": float(n), "k": k, "t_half": float(t_half), "t0": float(t0),
        "event_start": float(onset), "hold_start": float(hold_start),
        "enthalpy": float(enthalpy), "mass": float(mass),
        "area": float(scale * (X_edges[1] - X_edges[0])),
        "conversion_at_hold_start": float(avrami_conversion(hold_start, n, k, onset)),
        "conversion_at_end": float(X_edges[1]),
        "peak_heat_flow": peak, "noise_sd": noise_sd,
        "drift": (float(drift[0]), float(drift[1])),
        "transient": None if transient is None else (float(transient[0]), float(transient[1])),
        "baseline_step": float(baseline_step), "exotherm": exotherm,
        "temperature": float(temperature), "dt": float(dt), "seed": seed,
    }
    return t, T, q, truth


def synthetic_isotherm(*, n, t_half, t0, enthalpy=90e3, mass=5e-6, temperature, duration=None,
                       dt=0.5, noise=0.01, drift=(0.0, 0.0), transient=None, exotherm="up",
                       seed=0, run_id="synthetic", group="default", hold_start=0.0,
                       baseline_step=0.0, cooling_rate=1.0):
    """An invented isothermal DSC run with known Avrami parameters.

    Parameters
    ----------
    n : float
        Avrami exponent, dimensionless.
    t_half : float, s
        Crystallization half-time, counted from the induction time.
    t0 : float, s
        Induction time, counted from the hold start (negative: conversion began
        before the hold).
    enthalpy : float, J/kg
        Specific crystallization enthalpy of the full event.
    mass : float, kg
    temperature : float, K
        Hold (set) temperature.
    duration : float, s, optional
        Record length; default ``hold_start + max(t0, 0) + 6 t_half``.
    dt : float, s
        Sampling interval.
    noise : float
        Standard deviation of the white Gaussian noise as a fraction of the
        peak event heat flow.
    drift : (float, float), (W, W/s)
        Baseline offset and slope.
    transient : (float, float) or None, (W, s)
        Start-up transient amplitude and decay time.
    exotherm : {"up", "down"}
        Direction in which the crystallization exotherm points in the record.
    seed : int
        Seed of ``numpy.random.default_rng``.
    run_id, group : str
        Names put into the RunInfo.
    hold_start : float, s
        Time at which the set temperature is reached; before it the
        temperature falls at ``cooling_rate`` (K/s) towards the set value.
    baseline_step : float, W
        Heat-capacity step across the event, added as ``baseline_step * X(t)``.

    Returns
    -------
    trace : Trace
        ``info.exotherm`` is left unset, so the sign has to be found from the data.
    truth : dict
        The true values: ``n``, ``k`` (s^-n), ``t_half``, ``t0`` (s, from the hold
        start), ``event_start`` (s, record time), ``enthalpy`` (J/kg), ``mass``,
        ``area`` (J of event heat inside the record), ``conversion_at_hold_start``,
        ``conversion_at_end``, ``peak_heat_flow`` and ``noise_sd`` (W), and the
        drift, transient, step, sign and seed used.

    Notes
    -----
    The event term is m dH [X(e_{i+1}) - X(e_i)]/(e_{i+1} - e_i) over the cell
    edges e_i between samples, with X = 1 - exp(-k (t - t_h - t0)^n) and
    k = ln 2 / t_half^n (Avrami 1939). The data are invented.

    References
    ----------
    Avrami, M. J. Chem. Phys. 7, 1103 (1939).

    Examples
    --------
    >>> trace, truth = synthetic_isotherm(n=2.5, t_half=60.0, t0=20.0, temperature=400.0)
    >>> round(truth["k"] * 60.0 ** 2.5, 6)
    0.693147
    """
    t, T, q, truth = synthetic_isotherm_arrays(
        n=n, t_half=t_half, t0=t0, enthalpy=enthalpy, mass=mass, temperature=temperature,
        duration=duration, dt=dt, noise=noise, drift=drift, transient=transient,
        exotherm=exotherm, seed=seed, hold_start=hold_start, baseline_step=baseline_step,
        cooling_rate=cooling_rate)
    info = RunInfo(run_id=run_id, kind="isothermal", temperature=float(temperature),
                   mass=float(mass), group=group, source=f"synthetic:{run_id} (invented)",
                   rows=(1, len(t)))
    return Trace(info=info, time=t, temperature=T, heat_flow=q), truth
