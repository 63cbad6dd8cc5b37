"""Units at the edges: parse unit strings and quantities, convert to SI once.

crystkin works in SI inside (s, K, W, kg, J, K/s, m). This module is the only
place where other units are understood. It is a small table of unit spellings
mapped to (dimension, factor, offset) so that ``value_SI = value * factor + offset``.
It deliberately covers what DSC files and lab notebooks use, nothing more.

Dimensions used here: ``time``, ``temperature``, ``heat_flow`` (W),
``specific_heat_flow`` (W/kg), ``mass``, ``rate`` (K/s), ``energy`` (J),
``specific_energy`` (J/kg), ``length`` (m), ``inverse_length`` (1/m),
``angle`` (rad), ``density`` (kg/m^3), ``dimensionless``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from .errors import CrystkinInputError

__all__ = ["Unit", "parse_unit", "parse_quantity", "to_si", "from_si", "celsius", "kelvin"]

ZERO_CELSIUS = 273.15


@dataclass(frozen=True)
class Unit:
    """A unit: its dimension and the affine map to SI (``si = x * factor + offset``)."""

    symbol: str
    dimension: str
    factor: float
    offset: float = 0.0

    def to_si(self, value):
        return value * self.factor + self.offset

    def from_si(self, value):
        return (value - self.offset) / self.factor


def _u(dimension, factor, offset=0.0):
    return dimension, factor, offset


_TABLE: dict[str, tuple[str, float, float]] = {
    # time
    "s": _u("time", 1.0), "sec": _u("time", 1.0), "second": _u("time", 1.0),
    "seconds": _u("time", 1.0), "ms": _u("time", 1e-3),
    "min": _u("time", 60.0), "minute": _u("time", 60.0), "minutes": _u("time", 60.0),
    "h": _u("time", 3600.0), "hr": _u("time", 3600.0), "hour": _u("time", 3600.0),
    "hours": _u("time", 3600.0),
    # temperature
    "k": _u("temperature", 1.0), "kelvin": _u("temperature", 1.0),
    "degc": _u("temperature", 1.0, ZERO_CELSIUS), "°c": _u("temperature", 1.0, ZERO_CELSIUS),
    "c": _u("temperature", 1.0, ZERO_CELSIUS), "celsius": _u("temperature", 1.0, ZERO_CELSIUS),
    "ºc": _u("temperature", 1.0, ZERO_CELSIUS),
    # heat flow
    "w": _u("heat_flow", 1.0), "mw": _u("heat_flow", 1e-3), "uw": _u("heat_flow", 1e-6),
    "µw": _u("heat_flow", 1e-6), "μw": _u("heat_flow", 1e-6),
    # specific heat flow, SI W/kg
    "w/g": _u("specific_heat_flow", 1e3), "mw/mg": _u("specific_heat_flow", 1e3),
    "mw/g": _u("specific_heat_flow", 1.0), "w/kg": _u("specific_heat_flow", 1.0),
    # mass
    "kg": _u("mass", 1.0), "g": _u("mass", 1e-3), "mg": _u("mass", 1e-6),
    "ug": _u("mass", 1e-9), "µg": _u("mass", 1e-9), "μg": _u("mass", 1e-9),
    # rate of temperature change (a difference, so no offset)
    "k/s": _u("rate", 1.0), "k/min": _u("rate", 1 / 60), "degc/min": _u("rate", 1 / 60),
    "°c/min": _u("rate", 1 / 60), "c/min": _u("rate", 1 / 60), "k/h": _u("rate", 1 / 3600),
    "degc/s": _u("rate", 1.0), "°c/s": _u("rate", 1.0),
    # energy
    "j": _u("energy", 1.0), "mj": _u("energy", 1e-3), "kj": _u("energy", 1e3),
    "j/g": _u("specific_energy", 1e3), "j/kg": _u("specific_energy", 1.0),
    "kj/kg": _u("specific_energy", 1e3), "mj/mg": _u("specific_energy", 1e3),
    # length, inverse length, angle, density
    "m": _u("length", 1.0), "nm": _u("length", 1e-9), "å": _u("length", 1e-10),
    "angstrom": _u("length", 1e-10), "a": _u("length", 1e-10), "um": _u("length", 1e-6),
    "µm": _u("length", 1e-6), "μm": _u("length", 1e-6), "cm": _u("length", 1e-2),
    "1/nm": _u("inverse_length", 1e9), "nm^-1": _u("inverse_length", 1e9),
    "1/å": _u("inverse_length", 1e10), "1/m": _u("inverse_length", 1.0),
    "rad": _u("angle", 1.0), "deg": _u("angle", math.pi / 180), "°": _u("angle", math.pi / 180),
    "g/cm3": _u("density", 1e3), "g/cm^3": _u("density", 1e3), "kg/m3": _u("density", 1.0),
    "kg/m^3": _u("density", 1.0),
    # growth rate
    "um/s": _u("velocity", 1e-6), "µm/s": _u("velocity", 1e-6), "μm/s": _u("velocity", 1e-6),
    "um/min": _u("velocity", 1e-6 / 60), "µm/min": _u("velocity", 1e-6 / 60),
    "μm/min": _u("velocity", 1e-6 / 60),
    "m/s": _u("velocity", 1.0),
    # energy per mole
    "j/mol": _u("molar_energy", 1.0), "kj/mol": _u("molar_energy", 1e3),
    "cal/mol": _u("molar_energy", 4.184),
    "%": _u("dimensionless", 0.01), "1": _u("dimensionless", 1.0), "-": _u("dimensionless", 1.0),
}

def _normalise(symbol: str) -> str:
    s = str(symbol).strip().lower()
    s = s.replace("℃", "°c").replace("deg.c", "degc").replace("·", " ").replace("⋅", " ")
    s = s.replace("⁻¹", "^-1").replace("⁻³", "^-3").replace("³", "3")
    s = re.sub(r"\s+per\s+", "/", s)
    tokens = s.split()
    # "W g-1" -> "w/g", "K min-1" -> "k/min", "g cm-3" -> "g/cm3", "nm-1" -> "1/nm"
    num, den = [], []
    for tok in tokens:
        m = re.fullmatch(r"(.+?)\^?-([13])", tok)
        if m and not re.fullmatch(r"[-+]?\d*", m.group(1)):
            den.append(m.group(1) + ("3" if m.group(2) == "3" else ""))
        else:
            num.append(tok)
    if den:
        return ("".join(num) or "1") + "/" + "/".join(den)
    return "".join(tokens)


def parse_unit(symbol: str, *, dimension: str | None = None, where: str = "") -> Unit:
    """Look up a unit symbol such as ``"degC"``, ``"mW/mg"`` or ``"K min-1"``.

    Parameters
    ----------
    symbol : str
        Unit as written in a header or study file (case and spaces ignored).
    dimension : str, optional
        Expected dimension; a unit of another dimension is an error.
    where : str
        Location for the error message (file, column).

    Raises
    ------
    CrystkinInputError
        Unknown unit, or a unit of the wrong dimension.
    """
    key = _normalise(symbol)
    if key not in _TABLE:
        known = ", ".join(sorted({k for k, v in _TABLE.items()
                                  if dimension is None or v[0] == dimension}))
        raise CrystkinInputError(
            f"unknown unit '{symbol}'" + (f" for {dimension}" if dimension else "")
            + f"; use one of: {known}", source=where or None)
    dim, factor, offset = _TABLE[key]
    if dimension is not None and dim != dimension:
        raise CrystkinInputError(
            f"unit '{symbol}' is {_article(dim)} {dim.replace('_', ' ')} unit, expected "
            f"{dimension.replace('_', ' ')}",
            source=where or None)
    return Unit(str(symbol), dim, factor, offset)


_QUANTITY = re.compile(r"^\s*([-+]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


def parse_quantity(text, *, dimension: str, default_unit: str | None = None,
                   where: str = "") -> float:
    """Parse ``"120 degC"``, ``"10 K/min"`` or ``"5.2 mg"`` into an SI float.

    A bare number takes ``default_unit``; without one it is an error, since a
    number without a unit is the commonest source of silent mistakes.
    """
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        if default_unit is None:
            raise CrystkinInputError(
                f"'{text}' has no unit; write it with one, for example '{text} "
                f"{_example(dimension)}'", source=where or None)
        return float(parse_unit(default_unit, dimension=dimension, where=where).to_si(text))
    m = _QUANTITY.match(str(text))
    if not m:
        raise CrystkinInputError(
            f"cannot read '{text}' as a {dimension.replace('_', ' ')}; write a number and a unit,"
            f" for example '10 {_example(dimension)}'", source=where or None)
    number = float(m.group(1).replace(",", "."))
    symbol = m.group(2) or default_unit
    if not symbol:
        raise CrystkinInputError(
            f"'{text}' has no unit; write it with one, for example '{number:g} "
            f"{_example(dimension)}'", source=where or None)
    return float(parse_unit(symbol, dimension=dimension, where=where).to_si(number))


def _article(word: str) -> str:
    return "an" if word[:1] in "aeiou" else "a"


def _example(dimension: str) -> str:
    return {"time": "min", "temperature": "degC", "rate": "K/min", "mass": "mg",
            "heat_flow": "mW", "specific_energy": "J/g", "length": "nm",
            "molar_energy": "J/mol", "density": "g/cm3"}.get(dimension, "SI")


def to_si(value, symbol: str, *, dimension: str | None = None):
    """Convert ``value`` given in ``symbol`` to SI."""
    return parse_unit(symbol, dimension=dimension).to_si(value)


def from_si(value, symbol: str, *, dimension: str | None = None):
    """Convert an SI ``value`` to the unit ``symbol``."""
    return parse_unit(symbol, dimension=dimension).from_si(value)


def celsius(kelvin_value):
    """Kelvin to degrees Celsius."""
    return kelvin_value - ZERO_CELSIUS


def kelvin(celsius_value):
    """Degrees Celsius to kelvin."""
    return celsius_value + ZERO_CELSIUS
