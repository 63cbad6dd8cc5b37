"""Absolute crystallinity and the 100 %-crystalline enthalpy table (kinetics.prep.crystallinity).

Reference values: /work/shared/SCIENCE.md section 10. iPP 207 J/g, Wunderlich,
Thermal Analysis (Academic Press, 1990) 417-431 (seen cited, status C); PET
166 J/g Illers (C) against 140 J/g (from memory).
"""

from __future__ import annotations

import pytest

from kinetics.errors import CrystkinInputError
from kinetics.prep import DELTA_H100, absolute_crystallinity, reference_enthalpy


def test_ipp_by_hand_with_the_wunderlich_value():
    # 95 J/g measured, Delta H_100 = 207 J/g (Wunderlich 1990): 95 / 207 = 0.458937
    res = absolute_crystallinity(95e3, polymer="iPP")
    assert res.value == pytest.approx(95.0 / 207.0, rel=1e-12)
    assert res.value == pytest.approx(0.458937, abs=1e-6)
    assert res.delta_h100 == 207e3 and "Wunderlich" in res.reference
    assert res.status == "confirmed"
    assert float(res) == res.value


def test_filler_fraction_refers_the_heat_to_the_polymer_part():
    # 20 wt % talc: 95 / (0.8 * 207) = 0.573671
    res = absolute_crystallinity(95e3, polymer="PP", filler_fraction=0.2)
    assert res.value == pytest.approx(0.573671, abs=1e-6)
    assert res.filler_fraction == 0.2


def test_given_reference_wins_over_the_table():
    res = absolute_crystallinity(70e3, polymer="iPP", delta_h100=140e3)
    assert res.value == pytest.approx(0.5)
    assert (res.reference, res.status) == ("given", "given")


def test_table_units_sources_and_status():
    for polymer, entries in DELTA_H100.items():
        assert entries, polymer
        for e in entries:
            assert e.status in ("confirmed", "from memory")
            assert e.source
            assert 50e3 < e.value < 400e3  # J/kg, not J/g
    assert reference_enthalpy("polyethylene").value_J_per_g == 293.0
    assert reference_enthalpy("POM").value == 326e3
    assert reference_enthalpy("pa6").value == 230e3
    assert reference_enthalpy("PBT").source == "Illers"
    pet = reference_enthalpy("PET")
    assert (pet.value_J_per_g, pet.status) == (140.0, "from memory")
    assert reference_enthalpy("PET", source="Illers").value_J_per_g == 166.0
    assert reference_enthalpy("PEEK", source="Mehmet-Alkan").value_J_per_g == 122.5
    assert reference_enthalpy("PLA").value_J_per_g == 93.0
    assert reference_enthalpy("PCL").value_J_per_g == 139.5
    assert reference_enthalpy("PVDF").value_J_per_g == 104.7


def test_bad_inputs():
    with pytest.raises(CrystkinInputError, match="no tabulated"):
        reference_enthalpy("unobtainium")
    with pytest.raises(CrystkinInputError, match="available"):
        reference_enthalpy("PET", source="Nobody")
    with pytest.raises(CrystkinInputError, match="delta_h100"):
        absolute_crystallinity(90e3)
    with pytest.raises(CrystkinInputError, match="filler_fraction"):
        absolute_crystallinity(90e3, polymer="iPP", filler_fraction=1.0)
    with pytest.raises(CrystkinInputError, match="enthalpy_J_per_kg"):
        absolute_crystallinity(-1.0, polymer="iPP")
    with pytest.raises(CrystkinInputError, match="delta_h100"):
        absolute_crystallinity(90e3, delta_h100=0.0)
