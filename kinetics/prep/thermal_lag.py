"""Thermal-lag correction of scanning runs from a user's calibration.

On cooling the sample is warmer than the temperature the instrument records,
by an amount that grows with the rate. The user measures this lag at one or
more rates, typically from the onset of a temperature standard at each rate:

    lag(beta) = T_reference - T_onset,observed     (K, positive on cooling)

and the sample temperature of a run at rate beta is

    T_sample = T_recorded + lag(beta).

Models of lag(beta):

* ``"proportional"``: lag = tau beta, tau by least squares through the origin
  (with one calibration rate, tau = lag / beta). A thermal resistance between
  sensor and sample gives a lag proportional to the rate with tau the time
  constant (the peak shift is about beta tau; Vyazovkin & Sbirrazzuoli,
  Processes 11 (2023) 1438).
* ``"linear"``: lag = a + b beta by least squares (two or more rates; a
  calibration offset is allowed).
* ``"interpolate"``: piecewise linear between the calibration points, extended
  by the end segments (two or more rates).

``"auto"`` uses "proportional" with one rate and "linear" with more.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from ..dataset import Trace
from ..errors import CrystkinInputError, check_option

__all__ = ["ThermalLag", "thermal_lag", "resolve_lag", "LAG_MODELS", "MAX_LAG_K"]

LAG_MODELS = ("auto", "proportional", "linear", "interpolate")
#: Largest lag accepted, K (a larger value is almost surely a unit mistake; our choice).
MAX_LAG_K = 50.0
_WHERE = "thermal_lag"


@dataclass(frozen=True)
class ThermalLag:
    """A thermal-lag calibration: lag (K) as a function of the rate (K/s).

    Attributes
    ----------
    rates : tuple of float, K/s
        Calibration rates (positive magnitudes).
    lags : tuple of float, K
        Lag at each rate: T_sample - T_recorded (positive on cooling).
    model : {"proportional", "linear", "interpolate"}
    intercept : float, K
        a of lag = a + b beta (0 for "proportional"; unused by "interpolate").
    slope : float, s
        b of lag = a + b beta (the time constant tau for "proportional").
    source : str
        What the calibration came from (for the report).
    """

    rates: tuple[float, ...]
    lags: tuple[float, ...]
    model: str
    intercept: float
    slope: float
    source: str = ""

    def lag_at(self, rate) -> np.ndarray | float:
        """Lag at ``rate`` (K/s, positive), K."""
        b = np.asarray(rate, dtype=float)
        if self.model == "interpolate":
            r = np.asarray(self.rates)
            lg = np.asarray(self.lags)
            inside = np.interp(b, r, lg)
            lo = lg[0] + (lg[1] - lg[0]) / (r[1] - r[0]) * (b - r[0])
            hi = lg[-1] + (lg[-1] - lg[-2]) / (r[-1] - r[-2]) * (b - r[-1])
            out = np.where(b < r[0], lo, np.where(b > r[-1], hi, inside))
        else:
            out = self.intercept + self.slope * b
        return float(out) if np.ndim(out) == 0 else out

    def extrapolated(self, rate: float) -> bool:
        """True when ``rate`` lies more than 10 % outside the calibrated range."""
        return bool(rate < 0.9 * min(self.rates) or rate > 1.1 * max(self.rates))

    def describe(self, rate: float | None = None) -> dict:
        """JSON-friendly record of the calibration (and the lag used at ``rate``)."""
        d = {"model": self.model,
             "calibration_K_per_min": [float(r * 60.0) for r in self.rates],
             "calibration_lag_K": [float(v) for v in self.lags],
             "intercept_K": float(self.intercept), "slope_s": float(self.slope),
             "source": self.source,
             "equation": {"proportional": "lag = tau * beta",
                          "linear": "lag = a + b * beta",
                          "interpolate": "piecewise linear in beta between calibration points"}
             [self.model]}
        if rate is not None:
            d["rate_K_per_min"] = float(rate * 60.0)
            d["lag_K"] = float(self.lag_at(rate))
            d["extrapolated"] = self.extrapolated(rate)
        return d


def thermal_lag(calibration, *, model="auto", source="") -> ThermalLag:
    """Build a :class:`ThermalLag` from calibration points.

    Parameters
    ----------
    calibration : mapping of float to float, or sequence of (float, float)
        Rate (K/s, positive) to lag (K, T_sample - T_recorded; positive on cooling).
    model : {"auto", "proportional", "linear", "interpolate"}
    source : str
        Free text recorded with the correction (for example "indium onset, 2024-05-02").

    Returns
    -------
    ThermalLag

    Raises
    ------
    CrystkinInputError
        Empty calibration, non-positive or repeated rates, non-finite or implausible
        (above 50 K) lags, or too few rates for the model.

    Notes
    -----
    "proportional": tau = sum(lag_i beta_i) / sum(beta_i^2). "linear": ordinary
    least squares of lag on beta. With two rates both "linear" and
    "interpolate" pass exactly through the points.

    Examples
    --------
    >>> lag = thermal_lag({10 / 60: 1.5})
    >>> round(lag.lag_at(20 / 60), 6)
    3.0
    """
    check_option("model", model, LAG_MODELS, _WHERE)
    if isinstance(calibration, ThermalLag):
        return calibration
    try:
        items = list(calibration.items()) if isinstance(calibration, Mapping) else \
            [tuple(p) for p in calibration]
        pairs = np.array([(float(r), float(v)) for r, v in items], dtype=float)
    except (TypeError, ValueError):
        raise CrystkinInputError(
            f"The 'calibration' parameter of {_WHERE} must map rates (K/s) to lags (K), for "
            f"example {{0.1667: 1.2}}. Got {calibration!r} instead.") from None
    if pairs.size == 0:
        raise CrystkinInputError(f"{_WHERE}: the calibration is empty; give the lag (K) at one "
                                 "or more rates (K/s)")
    rates, lags = pairs[:, 0], pairs[:, 1]
    if not np.all(np.isfinite(pairs)) or np.any(rates <= 0):
        raise CrystkinInputError(
            f"{_WHERE}: calibration rates must be positive numbers (K/s) and lags finite (K); "
            f"got {items!r}")
    if np.any(np.abs(lags) > MAX_LAG_K):
        raise CrystkinInputError(
            f"{_WHERE}: a lag of {float(np.max(np.abs(lags))):g} K is implausible (limit "
            f"{MAX_LAG_K:g} K); lags are in kelvin and rates in K/s — check the units")
    order = np.argsort(rates)
    rates, lags = rates[order], lags[order]
    if np.any(np.diff(rates) <= 0):
        raise CrystkinInputError(f"{_WHERE}: each calibration rate may appear only once; got "
                                 f"rates {[float(r) for r in rates]} K/s")
    if model == "auto":
        model = "proportional" if len(rates) == 1 else "linear"
    if model in ("linear", "interpolate") and len(rates) < 2:
        raise CrystkinInputError(
            f"{_WHERE}: model '{model}' needs lags at two or more rates; with one rate use "
            "model='proportional' (lag proportional to the rate)")
    if model == "proportional":
        a, b = 0.0, float(np.sum(lags * rates) / np.sum(rates ** 2))
    elif model == "linear":
        b, a = (float(c) for c in np.polyfit(rates, lags, 1))
    else:
        a, b = float("nan"), float("nan")
    return ThermalLag(tuple(map(float, rates)), tuple(map(float, lags)), model, a, b,
                      str(source))


def resolve_lag(lag, trace: Trace):
    """The lag (K) to add to a run's recorded temperature, and its record.

    Parameters
    ----------
    lag : None, float, ThermalLag, mapping or sequence of pairs
        None: no correction. A number: the lag of this run in K. Otherwise a
        calibration passed to :func:`thermal_lag`.
    trace : Trace
        The run (its ``info.rate`` selects the lag from a calibration).

    Returns
    -------
    value : float, K
    record : dict or None
        Provenance of the correction (None when no correction was made).
    warnings : list of str
    """
    if lag is None:
        return 0.0, None, []
    where = trace.info.source or trace.run_id
    if isinstance(lag, (int, float, np.floating)) and not isinstance(lag, bool):
        value = float(lag)
        if not np.isfinite(value) or abs(value) > MAX_LAG_K:
            raise CrystkinInputError(
                f"thermal lag {value!r} K is not usable (limit {MAX_LAG_K:g} K); give the lag "
                "in kelvin", source=where)
        return value, {"model": "given for this run", "lag_K": value}, []
    cal = thermal_lag(lag)
    rate = trace.info.rate
    value = float(cal.lag_at(rate))
    record = cal.describe(rate)
    notes = []
    if cal.extrapolated(rate):
        notes.append(f"thermal lag extrapolated: the run's rate {rate * 60:.3g} K/min lies outside"
                     f" the calibrated {min(cal.rates) * 60:.3g}-{max(cal.rates) * 60:.3g} K/min")
    return value, record, notes
