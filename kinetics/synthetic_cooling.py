"""Invented constant-rate cooling DSC runs for tests and the demo.

Everything this module produces is **invented data**, generated from the
package's own Nakamura model (with a Hoffman–Lauritzen-type K(T) by default)
plus white noise, a baseline that drifts with temperature, a heat-capacity
step across the event and an optional thermal lag. It exercises the cooling
preparation and the nonisothermal analyses on runs whose true kinetics are
known; it never stands in for an outside reference.

Programme: an optional isothermal hold at ``T_start`` for ``hold`` seconds,
then cooling at ``rate`` (K/s) to ``T_end``. The sample is warmer than the
recorded temperature by ``lag`` kelvin during the ramp:

    T_program(t) = T_start - rate (t - hold)      (t > hold)
    T_sample(t)  = T_program(t) + lag ramp(t)     (lag ramps in over ``lag_time`` s)
    T_recorded   = T_program + white noise of ``temperature_noise`` K

The recorded heat flow (W) is

    q(t) = s m dH <dX/dt>_cell + a + b (T_program - T_start) + S X(t) + e(t)

with s = +1 for ``exotherm="up"`` and -1 for ``"down"``, <dX/dt>_cell the
Nakamura conversion rate averaged over each sampling cell, X driven by
T_sample, drift offset a and slope b (W, W/K), a heat-capacity step S (W)
following the conversion, and noise e of SD ``noise`` times the peak event heat
flow.
"""

from __future__ import annotations

import numpy as np

from .dataset import RunInfo, Trace
from .errors import CrystkinInputError, check_option, check_range
from .models.hoffman_lauritzen import hl_rate
from .models.nakamura import nakamura_integral

__all__ = ["DEMO_HL", "demo_rate_function", "synthetic_cooling_arrays", "synthetic_cooling",
           "synthetic_cooling_series"]

_WHERE = "synthetic_cooling"

#: Invented Hoffman–Lauritzen parameters of the Nakamura K(T) (1/s) of a
#: polypropylene-like melt: they put the exotherm peak near 391 K (118 °C) at
#: 10 K/min. U* = 6276 J/mol is the common 1500 cal/mol; the rest is invented.
DEMO_HL = {"ln_prefactor": 20.0, "Kg": 6.0e5, "U_star": 6276.0, "T_inf": 233.0, "Tm0": 481.0}


def demo_rate_function(**overrides):
    """K(T) = hl_rate(T, **DEMO_HL) in 1/s, with any parameter overridden (invented values)."""
    p = {**DEMO_HL, **overrides}
    unknown = set(p) - set(DEMO_HL)
    if unknown:
        raise CrystkinInputError(f"demo_rate_function: unknown parameters {sorted(unknown)}; "
                                 f"use {sorted(DEMO_HL)}")

    def K_of_T(T):
        return hl_rate(T, **p)

    return K_of_T


def synthetic_cooling_arrays(*, rate, n=2.5, K_of_T=None, T_start=453.15, T_end=353.15,
                             n_points=2000, hold=0.0, enthalpy=95e3, mass=5e-6, noise=0.005,
                             drift=(0.0, 0.0), baseline_step=0.0, lag=0.0, lag_time=0.0,
                             exotherm="up", temperature_noise=0.005, seed=0, substeps=8):
    """Arrays of an invented cooling run and its true values.

    Parameters are those of :func:`synthetic_cooling` (without run naming).

    Returns
    -------
    time : ndarray, s
    temperature : ndarray, K
        Recorded (program) temperature with its noise.
    heat_flow : ndarray, W
    truth : dict
        See :func:`synthetic_cooling`.
    """
    check_range("rate", float(rate), _WHERE, lower=0.0, inclusive=False)
    check_range("n", float(n), _WHERE, lower=0.0, inclusive=False)
    check_range("noise", float(noise), _WHERE, lower=0.0)
    check_range("mass", float(mass), _WHERE, lower=0.0, inclusive=False)
    check_range("hold", float(hold), _WHERE, lower=0.0)
    check_range("lag_time", float(lag_time), _WHERE, lower=0.0)
    check_range("n_points", int(n_points), _WHERE, lower=50)
    check_range("substeps", int(substeps), _WHERE, lower=1)
    check_option("exotherm", exotherm, ("up", "down"), _WHERE)
    if not T_start > T_end:
        raise CrystkinInputError(f"{_WHERE}: T_start ({T_start} K) must be above T_end "
                                 f"({T_end} K) for a cooling run")
    K_of_T = K_of_T or demo_rate_function()
    rng = np.random.default_rng(seed)
    duration = hold + (T_start - T_end) / rate
    dt = duration / (int(n_points) - 1)
    t = np.arange(int(n_points)) * dt

    def program(tt):
        return T_start - rate * np.clip(tt - hold, 0.0, None)

    def sample(tt):
        ramp = np.clip(tt - hold, 0.0, None)
        if lag_time > 0:
            ramp = np.minimum(ramp / lag_time, 1.0)
        else:
            ramp = (tt > hold).astype(float) if hold > 0 else np.ones_like(tt)
        return program(tt) + lag * ramp

    edges = np.concatenate(([t[0] - dt / 2], t[:-1] + dt / 2, [t[-1] + dt / 2]))
    s = int(substeps)
    fine = np.linspace(edges[0], edges[-1], s * (len(edges) - 1) + 1)
    theta_fine = nakamura_integral(fine, np.asarray(K_of_T(sample(fine)), dtype=float))
    X_fine = -np.expm1(-theta_fine ** n)
    X_edges = X_fine[::s]
    cell_rate = np.diff(X_edges) / dt
    X = np.interp(t, fine, X_fine)
    theta = np.interp(t, fine, theta_fine)

    scale = mass * enthalpy
    peak = scale * float(cell_rate.max())
    sign = 1.0 if exotherm == "up" else -1.0
    T_prog = program(t)
    q = sign * scale * cell_rate + drift[0] + drift[1] * (T_prog - T_start)
    if baseline_step:
        q = q + baseline_step * X
    noise_sd = noise * peak
    q = q + rng.normal(0.0, noise_sd, len(t))
    T_rec = T_prog + rng.normal(0.0, temperature_noise, len(t))

    T_s = sample(t)
    ip = int(np.argmax(cell_rate))
    truth = {
        "note": "invented synthetic data (kinetics.synthetic_cooling)",
        "rate": float(rate), "rate_K_per_min": float(rate * 60.0), "n": float(n),
        "T_start": float(T_start), "T_end": float(T_end), "hold": float(hold),
        "lag": float(lag), "lag_time": float(lag_time),
        "sample_temperature": T_s, "program_temperature": T_prog,
        "conversion": X, "theta": theta,
        "T_peak_sample": float(T_s[ip]), "t_peak": float(t[ip]),
        "enthalpy": float(enthalpy), "mass": float(mass),
        "area": float(scale * (X_edges[-1] - X_edges[0])),
        "conversion_at_end": float(X_edges[-1]), "conversion_at_start": float(X_edges[0]),
        "peak_heat_flow": peak, "noise_sd": noise_sd, "dt": float(dt),
        "drift": (float(drift[0]), float(drift[1])), "baseline_step": float(baseline_step),
        "exotherm": exotherm, "seed": seed,
    }
    return t, T_rec, q, truth


def synthetic_cooling(*, rate, n=2.5, K_of_T=None, T_start=453.15, T_end=353.15,
                      n_points=2000, hold=0.0, enthalpy=95e3, mass=5e-6, noise=0.005,
                      drift=(0.0, 0.0), baseline_step=0.0, lag=0.0, lag_time=0.0,
                      exotherm="up", temperature_noise=0.005, seed=0, run_id=None,
                      group="default", stated_rate=None, substeps=8):
    """An invented constant-rate cooling run with known Nakamura kinetics.

    Parameters
    ----------
    rate : float, K/s
        Cooling rate (positive).
    n : float
        Nakamura (Avrami) exponent.
    K_of_T : callable, optional
        Vectorised K(T) in 1/s; default :func:`demo_rate_function` (invented HL form).
    T_start, T_end : float, K
        Start and end of the ramp.
    n_points : int
        Samples in the record (hold included).
    hold : float, s
        Isothermal hold at T_start before the ramp.
    enthalpy : float, J/kg
        Specific enthalpy of the full event.
    mass : float, kg
    noise : float
        White-noise SD as a fraction of the peak event heat flow.
    drift : (float, float), (W, W/K)
        Baseline offset and slope against the programme temperature.
    baseline_step : float, W
        Heat-capacity step across the event, added as ``baseline_step * X``.
    lag : float, K
        True sample temperature minus programme temperature during the ramp.
    lag_time : float, s
        Time over which the lag builds up after the ramp starts (0: at once).
    exotherm : {"up", "down"}
    temperature_noise : float, K
    seed : int
    run_id, group : str
    stated_rate : float, K/s, optional
        Rate written into the RunInfo (default ``rate``; set it to simulate a typo).
    substeps : int
        Sub-steps per sample for the integral of K.

    Returns
    -------
    trace : Trace
        ``info.kind == "cooling"``, ``info.exotherm`` unset.
    truth : dict
        ``note`` (invented), ``rate``, ``n``, ``lag``, ``sample_temperature``
        and ``program_temperature`` (K, per sample), ``conversion`` and
        ``theta`` (per sample), ``T_peak_sample`` (K), ``enthalpy`` (J/kg),
        ``area`` (J), ``peak_heat_flow`` and ``noise_sd`` (W), ``dt`` (s) and the
        settings used.

    Notes
    -----
    X = 1 - exp(-theta^n), theta = integral K(T_sample(t)) dt (Nakamura et al.,
    J. Appl. Polym. Sci. 16 (1972) 1077), integrated by the trapezoidal rule on
    ``substeps`` sub-intervals per sample. The data are invented.

    Examples
    --------
    >>> trace, truth = synthetic_cooling(rate=10 / 60, seed=1)
    >>> trace.info.kind, round(truth["rate_K_per_min"], 6)
    ('cooling', 10.0)
    """
    t, T, q, truth = synthetic_cooling_arrays(
        rate=rate, n=n, K_of_T=K_of_T, T_start=T_start, T_end=T_end, n_points=n_points,
        hold=hold, enthalpy=enthalpy, mass=mass, noise=noise, drift=drift,
        baseline_step=baseline_step, lag=lag, lag_time=lag_time, exotherm=exotherm,
        temperature_noise=temperature_noise, seed=seed, substeps=substeps)
    rid = run_id or f"cool_{rate * 60:g}K_per_min"
    info = RunInfo(run_id=rid, kind="cooling", rate=float(stated_rate or rate),
                   mass=float(mass), group=group, source=f"synthetic:{rid} (invented)",
                   rows=(1, len(t)))
    return Trace(info=info, time=t, temperature=T, heat_flow=q), truth


def synthetic_cooling_series(rates, *, seed=0, **options):
    """Invented cooling runs at several rates (K/s), seeds ``seed``, ``seed + 1``, ...

    Returns
    -------
    list of (Trace, dict)
    """
    return [synthetic_cooling(rate=r, seed=seed + i, **options) for i, r in enumerate(rates)]
