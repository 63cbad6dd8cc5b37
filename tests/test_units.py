"""Unit table and parsing.

Expected factors are written out by hand from the unit definitions, not taken from
kinetics.units:

* SI Brochure, 9th edition (BIPM 2019), Table 8 (non-SI units accepted for use with the
  SI): 1 min = 60 s, 1 h = 3600 s, 1° = (pi/180) rad; section 2.3.1: t/°C = T/K - 273.15,
  and a temperature difference of 1 °C equals 1 K.
* NIST SP 811 (2008), Appendix B.8: 1 Å = 1e-10 m; thermochemical calorie = 4.184 J.
* SI prefixes (SI Brochure Table 7): m = 1e-3, µ = 1e-6, n = 1e-9, k = 1e3, c = 1e-2.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetics.errors import CrystkinInputError
from kinetics.units import (
    _TABLE,
    celsius,
    from_si,
    kelvin,
    parse_quantity,
    parse_unit,
    to_si,
)

DEG = math.pi / 180

# symbol -> (dimension, factor to SI, offset to SI), from the definitions in the docstring
EXPECTED = {
    "s": ("time", 1, 0), "sec": ("time", 1, 0), "second": ("time", 1, 0),
    "seconds": ("time", 1, 0), "ms": ("time", 1e-3, 0),
    "min": ("time", 60, 0), "minute": ("time", 60, 0), "minutes": ("time", 60, 0),
    "h": ("time", 3600, 0), "hr": ("time", 3600, 0), "hour": ("time", 3600, 0),
    "hours": ("time", 3600, 0),
    "k": ("temperature", 1, 0), "kelvin": ("temperature", 1, 0),
    "degc": ("temperature", 1, 273.15), "°c": ("temperature", 1, 273.15),
    "c": ("temperature", 1, 273.15), "celsius": ("temperature", 1, 273.15),
    "ºc": ("temperature", 1, 273.15),
    "w": ("heat_flow", 1, 0), "mw": ("heat_flow", 1e-3, 0), "uw": ("heat_flow", 1e-6, 0),
    "µw": ("heat_flow", 1e-6, 0), "μw": ("heat_flow", 1e-6, 0),
    # 1 W/g = 1 W / 1e-3 kg = 1000 W/kg; 1 mW/mg = 1e-3 W / 1e-6 kg = 1000 W/kg
    "w/g": ("specific_heat_flow", 1e3, 0), "mw/mg": ("specific_heat_flow", 1e3, 0),
    "mw/g": ("specific_heat_flow", 1, 0), "w/kg": ("specific_heat_flow", 1, 0),
    "kg": ("mass", 1, 0), "g": ("mass", 1e-3, 0), "mg": ("mass", 1e-6, 0),
    "ug": ("mass", 1e-9, 0), "µg": ("mass", 1e-9, 0), "μg": ("mass", 1e-9, 0),
    # rates are temperature differences: no offset; 1 K/min = 1/60 K/s
    "k/s": ("rate", 1, 0), "k/min": ("rate", 1 / 60, 0), "degc/min": ("rate", 1 / 60, 0),
    "°c/min": ("rate", 1 / 60, 0), "c/min": ("rate", 1 / 60, 0), "k/h": ("rate", 1 / 3600, 0),
    "degc/s": ("rate", 1, 0), "°c/s": ("rate", 1, 0),
    "j": ("energy", 1, 0), "mj": ("energy", 1e-3, 0), "kj": ("energy", 1e3, 0),
    "j/g": ("specific_energy", 1e3, 0), "j/kg": ("specific_energy", 1, 0),
    "kj/kg": ("specific_energy", 1e3, 0), "mj/mg": ("specific_energy", 1e3, 0),
    "m": ("length", 1, 0), "nm": ("length", 1e-9, 0), "å": ("length", 1e-10, 0),
    "angstrom": ("length", 1e-10, 0), "a": ("length", 1e-10, 0), "um": ("length", 1e-6, 0),
    "µm": ("length", 1e-6, 0), "μm": ("length", 1e-6, 0), "cm": ("length", 1e-2, 0),
    "1/nm": ("inverse_length", 1e9, 0), "nm^-1": ("inverse_length", 1e9, 0),
    "1/å": ("inverse_length", 1e10, 0), "1/m": ("inverse_length", 1, 0),
    "rad": ("angle", 1, 0), "deg": ("angle", DEG, 0), "°": ("angle", DEG, 0),
    # 1 g/cm3 = 1e-3 kg / 1e-6 m3 = 1000 kg/m3
    "g/cm3": ("density", 1e3, 0), "g/cm^3": ("density", 1e3, 0), "kg/m3": ("density", 1, 0),
    "kg/m^3": ("density", 1, 0),
    "um/s": ("velocity", 1e-6, 0), "µm/s": ("velocity", 1e-6, 0), "μm/s": ("velocity", 1e-6, 0),
    "um/min": ("velocity", 1e-6 / 60, 0), "µm/min": ("velocity", 1e-6 / 60, 0),
    "μm/min": ("velocity", 1e-6 / 60, 0), "m/s": ("velocity", 1, 0),
    "j/mol": ("molar_energy", 1, 0), "kj/mol": ("molar_energy", 1e3, 0),
    "cal/mol": ("molar_energy", 4.184, 0),
    "%": ("dimensionless", 0.01, 0), "1": ("dimensionless", 1, 0), "-": ("dimensionless", 1, 0),
}


def test_expected_table_covers_every_entry():
    assert set(_TABLE) == set(EXPECTED)


@pytest.mark.parametrize("symbol", sorted(_TABLE))
def test_every_table_entry(symbol):
    dim, factor, offset = EXPECTED[symbol]
    unit = parse_unit(symbol)
    assert unit.dimension == dim
    assert unit.factor == pytest.approx(factor, rel=1e-15)
    assert unit.offset == pytest.approx(offset, abs=1e-12)
    # the same entry must also be found with the dimension check on
    assert parse_unit(symbol, dimension=dim).dimension == dim


@pytest.mark.parametrize("spelling", ["degC", "°C", "deg C", "DEGC", "Celsius", "C", "ºC", "℃"])
def test_celsius_spellings(spelling):
    assert to_si(25.0, spelling) == pytest.approx(298.15, abs=1e-12)  # 25 + 273.15


def test_celsius_kelvin_round_trip():
    assert kelvin(-273.15) == pytest.approx(0.0, abs=1e-12)
    assert celsius(373.15) == pytest.approx(100.0, abs=1e-12)
    assert from_si(298.15, "degC") == pytest.approx(25.0, abs=1e-12)
    assert parse_quantity("125 degC", dimension="temperature") == pytest.approx(398.15)
    assert parse_quantity("-10 °C", dimension="temperature") == pytest.approx(263.15)
    assert parse_quantity("300 K", dimension="temperature") == 300.0


@pytest.mark.parametrize("text", ["10 K/min", "10 °C/min", "10 degC/min", "10 K min-1",
                                  "10 K min^-1", "10K/min", "10 K per min"])
def test_rate_ten_per_minute(text):
    # 10 K per 60 s = 1/6 K/s (hand arithmetic); °C/min is a difference, no 273.15 offset
    assert parse_quantity(text, dimension="rate") == pytest.approx(1 / 6, rel=1e-15)


@pytest.mark.parametrize(("text", "dimension", "si"), [
    ("W g-1", "specific_heat_flow", 1e3),
    ("W g^-1", "specific_heat_flow", 1e3),
    ("W·g⁻¹", "specific_heat_flow", 1e3),
    ("mW mg-1", "specific_heat_flow", 1e3),
    ("mW / mg", "specific_heat_flow", 1e3),
    ("J g-1", "specific_energy", 1e3),
    ("J per g", "specific_energy", 1e3),
    ("kJ mol-1", "molar_energy", 1e3),
    ("g cm-3", "density", 1e3),
    ("nm-1", "inverse_length", 1e9),
    ("µm s-1", "velocity", 1e-6),
    ("K s-1", "rate", 1.0),
])
def test_compound_spellings(text, dimension, si):
    unit = parse_unit(text, dimension=dimension)
    assert unit.factor == pytest.approx(si, rel=1e-15)


def test_mass_and_enthalpy_quantities():
    assert parse_quantity("5.2 mg", dimension="mass") == pytest.approx(5.2e-6, rel=1e-15)
    assert parse_quantity("5,2 mg", dimension="mass") == pytest.approx(5.2e-6, rel=1e-15)
    assert parse_quantity("207 J/g", dimension="specific_energy") == pytest.approx(207e3)
    assert parse_quantity(".5 g", dimension="mass") == pytest.approx(5e-4)
    assert parse_quantity("1e3 mg", dimension="mass") == pytest.approx(1e-3)


def test_unknown_unit_message():
    with pytest.raises(CrystkinInputError) as err:
        parse_unit("fortnight", dimension="time", where="run.csv, column 'Time'")
    msg = str(err.value)
    assert "run.csv" in msg and "fortnight" in msg and "unknown unit" in msg
    assert "min" in msg and "mg" not in msg  # only time units are offered


def test_wrong_dimension_message():
    with pytest.raises(CrystkinInputError, match="is a mass unit, expected time"):
        parse_unit("mg", dimension="time")
    with pytest.raises(CrystkinInputError, match="is an angle unit, expected temperature"):
        parse_unit("deg", dimension="temperature")


@pytest.mark.parametrize("value", [125, 125.0, "125", " 125 "])
def test_bare_number_needs_unit(value):
    with pytest.raises(CrystkinInputError, match="has no unit") as err:
        parse_quantity(value, dimension="temperature", where="study.toml, key 'temperature'")
    assert "study.toml" in str(err.value) and "degC" in str(err.value)


def test_bare_number_with_default_unit():
    assert parse_quantity(2, dimension="time", default_unit="min") == 120.0
    assert parse_quantity("2", dimension="time", default_unit="min") == 120.0


@pytest.mark.parametrize("text", ["", "abc", "10 K/min extra words", "1.2.3 mg", True, "nan mg"])
def test_unreadable_quantity(text):
    with pytest.raises(CrystkinInputError):
        parse_quantity(text, dimension="mass")


@settings(max_examples=50, deadline=None)
@given(symbol=st.sampled_from(sorted(_TABLE)),
       x=st.floats(min_value=-1e6, max_value=1e6, allow_nan=False))
def test_to_and_from_si_round_trip(symbol, x):
    back = from_si(to_si(x, symbol), symbol)
    assert back == pytest.approx(x, rel=1e-12, abs=1e-9)
