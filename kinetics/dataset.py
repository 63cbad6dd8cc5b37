"""The dataset model shared by every analysis.

* :class:`RunInfo`: what the lab notebook says about one run.
* :class:`Trace`: one raw run as read from a file (time, temperature, heat flow).
* :class:`Conversion`: relative crystallinity X against time and temperature,
  with the enthalpy and every processing choice that produced it.
* :class:`Study`: runs grouped by formulation.

All arrays are SI: time in s, temperature in K, heat flow in W (or W/kg when the
file gave a specific heat flow and no mass was known), mass in kg, rates in K/s,
enthalpy in J/kg (or J without a mass). Objects are frozen; arrays are made
read-only on construction so nothing downstream can modify a reader's data.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Literal

import numpy as np

from .errors import CrystkinInputError

__all__ = ["RunInfo", "Trace", "Conversion", "Study", "RUN_KINDS"]

RUN_KINDS = ("isothermal", "cooling", "heating")
RunKind = Literal["isothermal", "cooling", "heating"]


def _frozen_array(a, name: str) -> np.ndarray:
    arr = np.array(a, dtype=float, copy=True)
    if arr.ndim != 1:
        raise CrystkinInputError(f"'{name}' must be one-dimensional, got shape {arr.shape}")
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True)
class RunInfo:
    """Metadata of one run.

    Parameters
    ----------
    run_id : str
        Short unique name of the run inside its study.
    kind : {"isothermal", "cooling", "heating"}
        Temperature programme of the analysed segment.
    temperature : float, optional
        Set (hold) temperature of an isothermal run, K.
    rate : float, optional
        Magnitude of the heating or cooling rate, K/s (always positive).
    mass : float, optional
        Sample mass, kg.
    group : str
        Formulation or sample group (for comparisons).
    exotherm : {"up", "down"}, optional
        Sign convention of the file; ``None`` means detect it from the data.
    source : str
        File the run was read from.
    rows : tuple of int
        First and last data row used (1-based, as a spreadsheet shows them).
    hold_temperature : float, optional
        For heating (melting) runs after an isothermal hold: the crystallization
        temperature of that hold, K (used by Hoffman–Weeks).
    delta_h100 : float, optional
        Enthalpy of fusion of the 100 % crystalline polymer, J/kg.
    polymer : str, optional
        Polymer name (for handbook constants).
    """

    run_id: str
    kind: RunKind
    temperature: float | None = None
    rate: float | None = None
    mass: float | None = None
    group: str = "default"
    exotherm: Literal["up", "down"] | None = None
    source: str = ""
    rows: tuple[int, int] | None = None
    hold_temperature: float | None = None
    delta_h100: float | None = None
    polymer: str | None = None
    extra: dict = field(default_factory=dict, compare=False)

    def __post_init__(self):
        where = self.source or self.run_id
        if self.kind not in RUN_KINDS:
            raise CrystkinInputError(
                f"run kind must be one of {list(RUN_KINDS)}, got {self.kind!r}", source=where)
        if self.kind == "isothermal" and self.temperature is None:
            raise CrystkinInputError(
                "an isothermal run needs its hold temperature (key 'temperature')", source=where)
        if self.kind in ("cooling", "heating") and self.rate is None:
            raise CrystkinInputError(
                f"a {self.kind} run needs its rate (key 'rate', for example '10 K/min')",
                source=where)
        for key in ("temperature", "rate", "mass", "hold_temperature", "delta_h100"):
            value = getattr(self, key)
            if value is not None and not np.isfinite(value):
                raise CrystkinInputError(f"{key} must be a finite number, got {value!r}",
                                         source=where)
        if self.rate is not None and not self.rate > 0:
            raise CrystkinInputError(
                f"rate must be positive (the kind says the direction), got {self.rate} K/s",
                source=where)
        if self.mass is not None and not self.mass > 0:
            raise CrystkinInputError(f"mass must be positive, got {self.mass} kg", source=where)
        if self.exotherm not in (None, "up", "down"):
            raise CrystkinInputError(
                f"exotherm must be 'up' or 'down', got {self.exotherm!r}", source=where)


@dataclass(frozen=True)
class Trace:
    """One raw run: arrays of equal length, time strictly increasing.

    Parameters
    ----------
    info : RunInfo
    time : array of shape (n,), s
    temperature : array of shape (n,), K
    heat_flow : array of shape (n,), W, or W/kg when ``specific`` is True
    specific : bool
        True when ``heat_flow`` is per unit mass (W/kg).
    """

    info: RunInfo
    time: np.ndarray
    temperature: np.ndarray
    heat_flow: np.ndarray
    specific: bool = False

    def __post_init__(self):
        t = _frozen_array(self.time, "time")
        T = _frozen_array(self.temperature, "temperature")
        q = _frozen_array(self.heat_flow, "heat_flow")
        where = self.info.source or self.info.run_id
        if not (len(t) == len(T) == len(q)):
            raise CrystkinInputError(
                f"time, temperature and heat flow have different lengths "
                f"({len(t)}, {len(T)}, {len(q)})", source=where)
        if len(t) < 10:
            raise CrystkinInputError(
                f"only {len(t)} data points; a run needs at least 10", source=where)
        for name, a in (("time", t), ("temperature", T), ("heat flow", q)):
            if not np.all(np.isfinite(a)):
                i = int(np.flatnonzero(~np.isfinite(a))[0])
                raise CrystkinInputError(
                    f"{name} is not a finite number at data point {i + 1}", source=where)
        dt = np.diff(t)
        if np.any(dt <= 0):
            i = int(np.flatnonzero(dt <= 0)[0])
            raise CrystkinInputError(
                f"time does not increase at data point {i + 2} ({t[i]:g} s then {t[i + 1]:g} s);"
                " sort the file or remove repeated rows", source=where)
        object.__setattr__(self, "time", t)
        object.__setattr__(self, "temperature", T)
        object.__setattr__(self, "heat_flow", q)

    @property
    def run_id(self) -> str:
        return self.info.run_id

    @property
    def n_points(self) -> int:
        return len(self.time)

    def specific_heat_flow(self) -> np.ndarray | None:
        """Heat flow per unit mass, W/kg, or None when no mass is known."""
        if self.specific:
            return self.heat_flow
        if self.info.mass is None:
            return None
        return self.heat_flow / self.info.mass

    def with_info(self, **changes) -> Trace:
        """A copy with some RunInfo fields replaced (the arrays are shared, read-only)."""
        return replace(self, info=replace(self.info, **changes))


@dataclass(frozen=True)
class Conversion:
    """Relative crystallinity of one run and the choices that produced it.

    Parameters
    ----------
    run_id : str
    kind : str
    time : array of shape (m,), s
        Time since the start of the record, over the event window.
    temperature : array of shape (m,), K
    conversion : array of shape (m,)
        Relative crystallinity X, from 0 to 1, non-decreasing.
    rate : array of shape (m,), 1/s
        dX/dt from the baseline-corrected signal divided by the total area.
    enthalpy : float
        Crystallization enthalpy, J/kg (positive), or J when ``specific_enthalpy`` is False.
    specific_enthalpy : bool
    window : tuple of float
        Start and end of the integrated event, s.
    baseline : dict
        Method and its parameters (provenance).
    hold_start : float
        Time at which the isothermal hold (or the analysed segment) begins, s.
    transient_end : float
        End of the instrument start-up transient, s.
    induction_time : float
        Event start minus hold start, s.
    signal : array of shape (m,)
        Exotherm-positive heat flow on the window (as recorded units, sign corrected).
    baseline_values : array of shape (m,)
    exotherm : {"up", "down"}
        Sign convention found or given.
    warnings : tuple of str
    """

    run_id: str
    kind: str
    time: np.ndarray
    temperature: np.ndarray
    conversion: np.ndarray
    rate: np.ndarray
    enthalpy: float
    specific_enthalpy: bool
    window: tuple[float, float]
    baseline: dict
    hold_start: float
    transient_end: float
    induction_time: float
    signal: np.ndarray
    baseline_values: np.ndarray
    exotherm: str
    warnings: tuple[str, ...] = ()

    def __post_init__(self):
        for name in ("time", "temperature", "conversion", "rate", "signal", "baseline_values"):
            object.__setattr__(self, name, _frozen_array(getattr(self, name), name))

    @property
    def enthalpy_J_per_g(self) -> float | None:
        return self.enthalpy / 1e3 if self.specific_enthalpy else None

    def time_at(self, x: float) -> float:
        """Time at which conversion first reaches ``x`` (linear interpolation), s."""
        X = self.conversion
        if not (X[0] <= x <= X[-1]):
            return float("nan")
        i = int(np.searchsorted(X, x))
        if i == 0:
            return float(self.time[0])
        x0, x1 = X[i - 1], X[i]
        f = 0.0 if x1 == x0 else (x - x0) / (x1 - x0)
        return float(self.time[i - 1] + f * (self.time[i] - self.time[i - 1]))

    def temperature_at(self, x: float) -> float:
        """Temperature at which conversion first reaches ``x``, K."""
        t = self.time_at(x)
        return float(np.interp(t, self.time, self.temperature)) if np.isfinite(t) else float("nan")


@dataclass(frozen=True)
class Study:
    """Runs of one study, grouped by formulation.

    Parameters
    ----------
    name : str
    traces : tuple of Trace
    source : str
        Study file path.
    settings : dict
        Study-wide settings (polymer constants, analysis options).
    failures : tuple of (str, str)
        Runs that could not be read: (run_id or file, message).
    """

    name: str
    traces: tuple[Trace, ...]
    source: str = ""
    settings: dict = field(default_factory=dict, compare=False)
    failures: tuple[tuple[str, str], ...] = ()

    def __post_init__(self):
        ids = [t.run_id for t in self.traces]
        dup = sorted({i for i in ids if ids.count(i) > 1})
        if dup:
            raise CrystkinInputError(f"run names must be unique; repeated: {', '.join(dup)}",
                                     source=self.source or None)

    @property
    def groups(self) -> tuple[str, ...]:
        seen: dict[str, None] = {}
        for t in self.traces:
            seen.setdefault(t.info.group, None)
        return tuple(seen)

    def runs(self, *, kind: str | None = None, group: str | None = None) -> tuple[Trace, ...]:
        """Traces filtered by kind and group, in study order."""
        return tuple(t for t in self.traces
                     if (kind is None or t.info.kind == kind)
                     and (group is None or t.info.group == group))
