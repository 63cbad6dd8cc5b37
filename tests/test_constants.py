"""The polymer constants table: every value sourced and labelled, lookups and errors."""

from __future__ import annotations

import pytest

from kinetics.constants import (
    CONSTANT_NAMES,
    POLYMER_CONSTANTS,
    T_INF_OFFSET,
    U_STAR_DEFAULT,
    UNIT_CELLS,
    canonical_polymer,
    default_T_inf,
    polymer_constant,
    polymer_constants,
    unit_cell,
)
from kinetics.errors import CrystkinInputError


def test_every_value_has_source_unit_and_status():
    for polymer, table in POLYMER_CONSTANTS.items():
        for name, entries in table.items():
            assert name in CONSTANT_NAMES
            for c in entries:
                assert c.source and c.status in ("confirmed", "derived", "from memory"), \
                    (polymer, name)
                assert c.unit == CONSTANT_NAMES[name]
    for cell in UNIT_CELLS.values():
        assert cell.source and cell.status in ("confirmed", "derived", "from memory")


def test_u_star_is_1500_cal_per_mol():
    # 1 thermochemical calorie = 4.184 J (NIST SP 811): 1500 cal/mol = 6276 J/mol;
    # "6270" is a rounding.
    assert U_STAR_DEFAULT.value == pytest.approx(6276.0)
    assert default_T_inf(254.0) == pytest.approx(224.0)
    assert T_INF_OFFSET.value == 30.0


def test_values_match_the_science_sheet():
    # SCIENCE.md sections 5, 6 and 10 (statuses carried over).
    assert polymer_constant("PE", "Tm0").value == pytest.approx(418.7)
    assert polymer_constant("PE", "Tm0").status == "from memory"
    assert polymer_constant("PE", "Tm0", source="Flory").value == pytest.approx(414.75)
    assert polymer_constant("polypropylene", "Tm0").value == pytest.approx(459.25)
    assert polymer_constant("iPP", "Tm0").status == "confirmed"
    assert polymer_constant("PE", "sigma_e").value == pytest.approx(0.090)
    assert polymer_constant("PE", "rho_a").value == pytest.approx(855.0)
    assert polymer_constant("PET", "delta_hf").value == pytest.approx(2.1e8)


def test_aliases_and_defaults():
    assert canonical_polymer(" HDPE ") == "PE"
    assert canonical_polymer("pp") == "iPP"
    d = polymer_constants("PE")
    assert d["Tm0"].value == pytest.approx(418.7)
    assert unit_cell("polyethylene").z == 4


@pytest.mark.parametrize("call", [
    lambda: canonical_polymer("unobtainium"),
    lambda: polymer_constant("PE", "colour"),
    lambda: polymer_constant("PCL", "delta_hf"),
    lambda: polymer_constant("PE", "Tm0", source="nobody"),
    lambda: unit_cell("PCL"),
])
def test_clear_errors(call):
    with pytest.raises(CrystkinInputError):
        call()
