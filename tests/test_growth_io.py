"""Readers of rate tables and microscopy radius tables: units, layouts, clear errors."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetics.errors import CrystkinInputError
from kinetics.io.growth import read_radius_table, read_rate_table


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_half_time_table_in_degc_and_min(tmp_path):
    p = write(tmp_path, "a.csv", "Tc (degC),t_half (min),sd (min)\n120,1.5,0.1\n125,3.0,0.2\n")
    t = read_rate_table(p)
    assert t.quantity == "t_half"
    np.testing.assert_allclose(t.T_c, [393.15, 398.15])
    np.testing.assert_allclose(t.values, [90.0, 180.0])
    np.testing.assert_allclose(t.sd, [6.0, 12.0])
    assert t.rows == (2, 3)


def test_growth_rate_table_semicolon_decimal_comma_and_groups(tmp_path):
    p = write(tmp_path, "b.txt", "T [°C];G [µm/min];group\n130;2,5;neat\n135;0,9;neat\n"
                                 "130;6,0;N-A\n")
    t = read_rate_table(p)
    assert t.quantity == "G"
    np.testing.assert_allclose(t.values[:2], [2.5e-6 / 60, 0.9e-6 / 60])
    sel = t.select("neat")
    assert len(sel.values) == 2 and sel.groups == ("neat", "neat")
    with pytest.raises(CrystkinInputError, match="no rows of group"):
        t.select("N-B")


def test_units_argument_and_column_mapping(tmp_path):
    p = write(tmp_path, "c.csv", "temp,halftime\n400,60\n405,120\n")
    t = read_rate_table(p, units={"temperature": "K", "t_half": "s"})
    np.testing.assert_allclose(t.T_c, [400, 405])
    p2 = write(tmp_path, "d.csv", "A,B\n400,60\n405,120\n")
    t2 = read_rate_table(p2, quantity="t_half", columns={"temperature": 1, "t_half": "B"},
                         units={"temperature": "K", "t_half": "s"})
    np.testing.assert_allclose(t2.values, [60, 120])


@pytest.mark.parametrize("text, match", [
    ("Tc,t_half (min)\n120,1.5\n", "no unit for the temperature"),
    ("Tc (degC),t_half (min)\n120,1.5\n125,abc\n", "row 3, column 't_half \\(min\\)'.*not a "
                                                  "number"),
    ("Tc (degC),t_half (min)\n120,1.5\n\n125,2\n", "row 3.*blank row"),
    ("Tc (degC),G (um/min)\n120,1.5\n125,-2\n", "row 3.*not positive"),
    ("Tc (degC),foo (min)\n120,1.5\n", "cannot find the t_half or G column"),
    ("Tc (degC),t_half (kg)\n120,1.5\n", "unit"),
])
def test_rate_table_errors_name_row_and_column(tmp_path, text, match):
    p = write(tmp_path, "bad.csv", text)
    with pytest.raises(CrystkinInputError, match=match):
        read_rate_table(p)


def test_missing_file(tmp_path):
    with pytest.raises(CrystkinInputError, match="not found"):
        read_rate_table(tmp_path / "nope.csv")


def test_radius_table_diameter_and_series(tmp_path):
    p = write(tmp_path, "r.csv", "Tc (degC),time (min),diameter (um)\n130,1,10\n130,2,20\n"
                                 "135,2,9\n135,1,5\n")
    r = read_radius_table(p)
    assert r.from_diameter
    s = r.series()
    assert [T for T, _, _ in s] == pytest.approx([403.15, 408.15])
    np.testing.assert_allclose(s[1][1], [60, 120])  # sorted by time
    np.testing.assert_allclose(s[1][2], [2.5e-6, 4.5e-6])


def test_radius_table_single_temperature_and_errors(tmp_path):
    p = write(tmp_path, "r.csv", "t (s),R (um)\n10,1\n20,2\n30,3\n")
    r = read_radius_table(p, temperature=400.0)
    np.testing.assert_allclose(r.T_c, 400.0)
    with pytest.raises(CrystkinInputError, match="temperature"):
        read_radius_table(p)
    p2 = write(tmp_path, "r2.csv", "Tc (degC),time (s),radius (um)\n130,10,1\n130,10,2\n")
    with pytest.raises(CrystkinInputError, match="appears twice"):
        read_radius_table(p2)
    p3 = write(tmp_path, "r3.csv", "Tc (degC),time (s),radius (um)\n130,10,-1\n")
    with pytest.raises(CrystkinInputError, match="negative"):
        read_radius_table(p3)


@settings(max_examples=30, deadline=None)
@given(st.lists(st.tuples(st.floats(50, 250), st.floats(0.01, 1e3)), min_size=1, max_size=8))
def test_rate_table_round_trip_to_si(tmp_path_factory, rows):
    # degC -> K adds 273.15 and min -> s multiplies by 60 (SI Brochure definitions)
    p = tmp_path_factory.mktemp("h") / "t.csv"
    p.write_text("Tc (degC),t_half (min)\n" + "\n".join(f"{a!r},{b!r}" for a, b in rows))
    t = read_rate_table(p)
    np.testing.assert_allclose(t.T_c, [a + 273.15 for a, _ in rows], rtol=1e-12)
    np.testing.assert_allclose(t.values, [60 * b for _, b in rows], rtol=1e-12)


def test_oversized_table_refused_before_reading(tmp_path, monkeypatch):
    """Size limit (lowered here so the test file stays small): one line, file named."""
    import kinetics.io.growth as growth_io
    monkeypatch.setattr(growth_io, "MAX_TABLE_BYTES", 2**20)
    p = write(tmp_path, "huge.csv", "Tc (degC),t_half (min)\n" + "120,1.5\n" * 200_000)
    with pytest.raises(CrystkinInputError, match=r"huge\.csv.*more than the limit of 1 MB"):
        read_rate_table(p)
