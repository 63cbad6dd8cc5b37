"""Temperature-profile reader and the constant-rate profile builder."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetics.errors import CrystkinInputError
from kinetics.io.profile import (
    TemperatureProfile,
    constant_rate_profile,
    profile_from_arrays,
    read_profile,
)


def _write(tmp_path, name, text, encoding="utf-8"):
    p = tmp_path / name
    p.write_bytes(text.encode(encoding))
    return p


@pytest.mark.parametrize("text, name", [
    ("# mold curve\ntime (s),temperature (degC)\n0,230\n1,200\n2,180\n", "a.csv"),
    ("Zeit [min];Temp [°C]\n0;230,0\n0,01666667;200\n0,03333333;180\n", "b.csv"),
    ("t_s\tT_degC\n0\t230\n1\t200\n2\t180\n", "c.tsv"),
    ("free text line\nTime/s  Temperature/K\n0  503.15\n1  473.15\n2  453.15\n", "d.txt"),
])
def test_layouts_read_to_si(tmp_path, text, name):
    p = read_profile(_write(tmp_path, name, text))
    # hand conversion: 230 degC = 503.15 K, 1/60 min = 1 s
    assert np.allclose(p.time, [0.0, 1.0, 2.0], atol=1e-6)
    assert np.allclose(p.temperature, [503.15, 473.15, 453.15], atol=1e-6)
    assert p.row_numbers[0] == text.splitlines().index(
        next(li for li in text.splitlines() if li[:1].isdigit())) + 1


def test_units_override_and_columns(tmp_path):
    f = _write(tmp_path, "p.csv", "elapsed,probe 1,probe 2\n0,230,231\n1,220,221\n2,210,211\n")
    p = read_profile(f, columns={"time": "elapsed", "temperature": 3},
                     units={"time": "min", "temperature": "degC"})
    assert np.allclose(p.time, [0, 60, 120])
    assert np.allclose(p.temperature, [504.15, 494.15, 484.15])


def test_missing_unit_names_column_and_fix(tmp_path):
    f = _write(tmp_path, "p.csv", "time,temperature (degC)\n0,230\n1,220\n2,210\n")
    with pytest.raises(CrystkinInputError, match=r"column 'time' has no unit.*time \(s\)"):
        read_profile(f)


def test_bad_cell_names_row_and_column(tmp_path):
    f = _write(tmp_path, "p.csv", "time (s),temperature (degC)\n0,230\n1,abc\n2,210\n")
    with pytest.raises(CrystkinInputError, match=r"p.csv, row 3, column 'temperature \(degC\)'"):
        read_profile(f)


def test_time_not_increasing_names_row(tmp_path):
    f = _write(tmp_path, "p.csv", "time (s),temperature (degC)\n0,230\n1,220\n1,210\n")
    with pytest.raises(CrystkinInputError, match="row 4.*time does not increase"):
        read_profile(f)


def test_no_temperature_column(tmp_path):
    f = _write(tmp_path, "p.csv", "time (s),pressure (bar)\n0,1\n1,2\n2,3\n")
    with pytest.raises(CrystkinInputError, match="no temperature column"):
        read_profile(f)


def test_missing_file_and_spreadsheet(tmp_path):
    with pytest.raises(CrystkinInputError, match="not found"):
        read_profile(tmp_path / "none.csv")
    f = _write(tmp_path, "p.xlsx", "x")
    with pytest.raises(CrystkinInputError, match="save the sheet as CSV"):
        read_profile(f)


def test_kelvin_check_catches_wrong_unit(tmp_path):
    f = _write(tmp_path, "p.csv", "time (s),temperature (K)\n0,230\n1,-5\n2,-10\n")
    with pytest.raises(CrystkinInputError, match="row 3.*above absolute zero"):
        read_profile(f)


def test_constant_rate_profile_hand_arithmetic():
    # 230 degC to 30 degC at 10 K/min: 200 K / (1/6 K/s) = 1200 s, after a 60 s hold
    p = constant_rate_profile(start="230 degC", end="30 degC", rate="10 K/min", hold="1 min",
                              n_points=201)
    assert p.time[0] == 0.0
    assert p.time[-1] == pytest.approx(60.0 + 1200.0)
    assert p.temperature[-1] == pytest.approx(303.15)
    i = int(np.argmin(np.abs(p.time - 660.0)))
    assert p.temperature[i] == pytest.approx(503.15 - (660.0 - 60.0) / 6.0)
    assert p.provenance["rate_K_per_min"] == pytest.approx(10.0)


def test_constant_rate_profile_rejects_heating_and_bad_rate():
    with pytest.raises(CrystkinInputError, match="must be above the 'end'"):
        constant_rate_profile(start=300.0, end=400.0, rate=0.1)
    with pytest.raises(CrystkinInputError, match="positive cooling rate"):
        constant_rate_profile(start=400.0, end=300.0, rate=-0.1)


def test_arrays_are_frozen_copies():
    t = np.array([0.0, 1.0, 2.0])
    T = np.array([500.0, 490.0, 480.0])
    p = profile_from_arrays(t, T)
    t[0] = 99.0
    assert p.time[0] == 0.0
    with pytest.raises(ValueError):
        p.temperature[0] = 1.0
    with pytest.raises(CrystkinInputError, match="at least 3 points"):
        TemperatureProfile(time=[0.0, 1.0], temperature=[500.0, 490.0])


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(0.001, 100.0), min_size=3, max_size=30),
       st.floats(100.0, 300.0), st.sampled_from([("s", 1.0), ("min", 60.0), ("h", 3600.0)]))
def test_written_then_read_gives_si_values(tmp_path_factory, steps, T0, unit):
    name, factor = unit
    t = np.cumsum(steps)
    T = T0 - np.arange(len(t)) * 0.5
    lines = [f"time ({name}),temperature (degC)"]
    lines += [f"{a:.17g},{b:.17g}" for a, b in zip(t, T, strict=True)]
    f = tmp_path_factory.mktemp("prof") / "p.csv"
    f.write_text("\n".join(lines) + "\n", encoding="utf-8")
    p = read_profile(f)
    assert np.allclose(p.time, t * factor, rtol=1e-12)
    assert np.allclose(p.temperature, T + 273.15, rtol=1e-12)
    assert list(p.row_numbers) == list(range(2, len(t) + 2))


def test_oversized_profile_refused_before_reading(tmp_path, monkeypatch):
    """Size limit (lowered here so the test file stays small): one line, file named."""
    import kinetics.io.profile as profile_io
    monkeypatch.setattr(profile_io, "_MAX_BYTES", 2**20)
    p = _write(tmp_path, "huge.csv", "time (s),temperature (degC)\n" + "0,230\n" * 200_000)
    with pytest.raises(CrystkinInputError, match=r"huge\.csv.*more than the limit of 1 MB"):
        read_profile(p)
