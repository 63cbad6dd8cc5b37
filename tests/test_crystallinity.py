"""Absolute crystallinity from DSC enthalpy, density and WAXD against hand calculations."""

from __future__ import annotations

import math

import numpy as np
import pytest

from kinetics.analyses.crystallinity import (
    crystallinity_from_density,
    crystallinity_from_enthalpy,
    crystallinity_from_waxd,
    crystallinity_table,
    unit_cell_density,
)
from kinetics.constants import UnitCell, unit_cell
from kinetics.errors import CrystkinInputError


def test_dsc_crystallinity_against_the_cited_ipp_enthalpy():
    # dH_100(iPP) = 207 J/g (Wunderlich, Thermal Analysis, 1990, as cited):
    # 98 J/g / 207 J/g = 0.47343; with 10 % filler 98 / (0.9 x 207) = 0.52603.
    r = crystallinity_from_enthalpy(98e3, polymer="iPP")
    assert float(np.median(r.mass_fraction)) == pytest.approx(0.47343, abs=1e-5)
    assert "207 J/g" in r.references["delta_h100"] and "Wunderlich" in r.references["delta_h100"]
    f = crystallinity_from_enthalpy(98e3, polymer="iPP", filler_fraction=0.1)
    assert float(np.median(f.mass_fraction)) == pytest.approx(0.52603, abs=1e-5)


def test_dsc_with_sd_and_volume_fraction():
    # PE: 150/293 = 0.51195; V_c = W/(W + (1000/855)(1 - W)) = 0.47248 (by hand)
    r = crystallinity_from_enthalpy(150e3, enthalpy_sd=3e3, polymer="PE", seed=1)
    row = r.table().iloc[0]
    assert row.X_c_mass == pytest.approx(0.51195, abs=2e-3)
    assert row.X_c_mass_lo95 < 0.50 < 0.52 < row.X_c_mass_hi95
    assert row.X_c_volume == pytest.approx(0.47248, abs=2e-3)


def test_density_crystallinity_against_hand_calculation():
    # X_c = rho_c (rho - rho_a)/(rho (rho_c - rho_a)) = 1000 x 95 / (950 x 145) = 0.689655
    r = crystallinity_from_density(950.0, rho_c=1000.0, rho_a=855.0)
    row = r.table().iloc[0]
    assert row.X_c_mass == pytest.approx(0.689655, abs=1e-6)
    assert row.X_c_volume == pytest.approx(95 / 145, abs=1e-9)
    tab = crystallinity_from_density(950.0, polymer="PE").table()
    assert "commonly used" in tab.iloc[0].references
    out = crystallinity_from_density(1020.0, rho_c=1000.0, rho_a=855.0)
    assert any("outside" in f for f in out.flags)


def test_waxd_areas():
    r = crystallinity_from_waxd(60.0, 40.0, area_crystalline_sd=2.0, seed=3)
    assert float(np.median(r.mass_fraction)) == pytest.approx(0.6, abs=5e-3)
    assert crystallinity_table([r, crystallinity_from_waxd(1.0, 1.0)]).shape[0] == 2


def test_unit_cell_densities():
    # Bunn 1939 PE cell (from memory): 1007.8 kg/m^3 (SCIENCE.md: 1.008 g/cm^3).
    assert unit_cell_density("PE") == pytest.approx(1007.8, abs=0.2)
    # a monoclinic cell by hand: iPP alpha form (Natta & Corradini 1960, from memory),
    # V = 6.65 x 20.96 x 6.50 x sin(99.3 deg) A^3 = 894.1 A^3, 12 C3H6 of 42.081 g/mol:
    # 12 x 42.081e-3 / 6.02214076e23 / 894.1e-30 = 937.9 kg/m^3.
    v = 6.65 * 20.96 * 6.50 * math.sin(math.radians(99.3)) * 1e-30
    assert unit_cell_density("iPP") == pytest.approx(12 * 42.081e-3 / 6.02214076e23 / v,
                                                     rel=1e-9)
    assert unit_cell_density("iPP") == pytest.approx(937.9, abs=0.5)
    c = unit_cell("PE")
    custom = UnitCell("x", "f", "orthorhombic", 2 * c.a, c.b, c.c, c.alpha, c.beta, c.gamma,
                      c.z, c.repeat_unit, c.molar_mass, "invented", "derived")
    assert unit_cell_density(custom) == pytest.approx(unit_cell_density("PE") / 2)


@pytest.mark.parametrize("call, match", [
    (lambda: crystallinity_from_density(0.95, rho_c=1000.0, rho_a=855.0), "g/cm"),
    (lambda: crystallinity_from_density(950.0, rho_c=855.0, rho_a=1000.0), "exceed"),
    (lambda: crystallinity_from_density(950.0, polymer="iPP"), "rho"),
    (lambda: crystallinity_from_enthalpy(-5.0, polymer="iPP"), "positive"),
    (lambda: crystallinity_from_enthalpy(90e3, polymer="unobtainium"), "polymer"),
])
def test_bad_input(call, match):
    with pytest.raises(CrystkinInputError, match=match):
        call()
