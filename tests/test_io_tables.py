"""read_trace on small files written in tmp_path (invented numbers, made up for these tests).

Expected SI values are computed by hand from the unit definitions (1 min = 60 s,
T/K = t/°C + 273.15, 1 mW = 1e-3 W, 1 W/g = 1000 W/kg; SI Brochure, 9th ed.), and
expected row numbers are counted by hand from the lines each test writes.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from kinetics.dataset import RunInfo, Trace
from kinetics.errors import CrystkinInputError, DataQualityWarning
from kinetics.io.tables import read_trace

N = 20
T_MIN = np.round(np.arange(N) * 0.25, 2)           # min
T_C = np.full(N, 125.0) + np.round(np.linspace(0, 0.3, N), 4)  # degC, nearly constant
Q_MW = np.round(np.sin(np.arange(N) / 3.0), 6)     # mW


def write(path, text, encoding="utf-8"):
    path.write_bytes(text.encode(encoding))
    return path


def table(header, rows, sep=",", fmt=repr):
    lines = [header] + [sep.join(fmt(float(v)) for v in row) for row in rows]
    return "\n".join(lines) + "\n"


def data_rows(t=T_MIN, T=T_C, q=Q_MW):
    return list(zip(t, T, q, strict=True))


def assert_si(tr, t=T_MIN, T=T_C, q=Q_MW, t_factor=60.0, q_factor=1e-3):
    np.testing.assert_allclose(tr.time, t * t_factor, rtol=1e-15)
    np.testing.assert_allclose(tr.temperature, T + 273.15, rtol=1e-15)
    np.testing.assert_allclose(tr.heat_flow, q * q_factor, rtol=1e-15, atol=1e-300)


def raises(match_parts, fn, *args, **kwargs):
    with pytest.raises(CrystkinInputError) as err:
        fn(*args, **kwargs)
    msg = str(err.value)
    for part in match_parts:
        assert re.search(part, msg), f"{part!r} not in {msg!r}"
    assert "\n" not in msg
    return msg


# -- formats ------------------------------------------------------------------------------

def test_csv_with_metadata_lines(tmp_path):
    text = ("Sample: PX-40 (invented test sample)\n"
            "Sample mass: 5.2 mg\n"
            "Operator: A, B\n"
            "\n"
            + table("Time (min),Temperature (°C),Heat Flow (mW)", data_rows()))
    f = write(tmp_path / "iso_125.csv", text)
    tr = read_trace(f)
    assert isinstance(tr, Trace)
    assert_si(tr)
    assert not tr.specific
    # header on line 5, data on lines 6..25
    assert tr.info.rows == (6, 25)
    assert tr.info.source == str(f)
    assert tr.info.mass == pytest.approx(5.2e-6, rel=1e-15)
    assert tr.info.extra["file_metadata"]["Operator"] == "A, B"
    # no info: guessed from the data (span 0.3 K < 2 K -> isothermal at the median)
    assert tr.info.kind == "isothermal"
    assert tr.info.temperature == pytest.approx(np.median(T_C) + 273.15)
    assert tr.info.run_id == "iso_125"


def test_tsv_cooling_run_guessed(tmp_path):
    t_s = np.arange(N) * 6.0
    T_K = 450.0 - t_s / 6.0  # 10 K/min = 1/6 K/s, hand arithmetic
    f = write(tmp_path / "cool_10.tsv", table("Time [s]\tTs [K]\tHF [mW]",
                                              data_rows(t_s, T_K, Q_MW), sep="\t"))
    tr = read_trace(f)
    np.testing.assert_array_equal(tr.time, t_s)
    np.testing.assert_array_equal(tr.temperature, T_K)
    assert tr.info.kind == "cooling"
    assert tr.info.rate == pytest.approx(1 / 6, rel=1e-9)
    assert tr.info.rows == (2, 21)


def test_heating_run_guessed(tmp_path):
    T_C_up = 100.0 + np.arange(N) * 2.5  # 2.5 K per 0.25 min = 10 K/min
    tr = read_trace(write(tmp_path / "melt.csv",
                          table("Time (min),Temperature (°C),Heat Flow (mW)",
                                data_rows(T=T_C_up))))
    assert tr.info.kind == "heating"
    assert tr.info.rate == pytest.approx(1 / 6, rel=1e-9)


@pytest.mark.parametrize("decimal", [None, ","])
def test_semicolon_decimal_comma_units_row(tmp_path, decimal):
    text = ("Einwaage;5,0;mg\n"
            "Zeit;Temperatur;Wärmestrom\n"
            "min;°C;mW\n"
            + table("", data_rows(), sep=";", fmt=lambda v: repr(v).replace(".", ","))[1:])
    f = write(tmp_path / "run.txt", text)
    tr = read_trace(f, decimal=decimal)
    assert_si(tr)
    assert tr.info.rows == (4, 23)
    assert tr.info.mass == pytest.approx(5e-6)


def test_latin1_degree_sign(tmp_path):
    text = table("Time (min);Temperature (°C);Heat flow (mW)", data_rows(), sep=";")
    f = write(tmp_path / "latin.csv", text, encoding="latin-1")
    assert b"\xb0" in f.read_bytes()  # the degree sign as one Latin-1 byte
    tr = read_trace(f)
    assert_si(tr)


def test_utf8_bom_and_crlf(tmp_path):
    text = table("Time (min),Temperature (°C),Heat Flow (mW)", data_rows()).replace("\n", "\r\n")
    f = tmp_path / "bom.csv"
    f.write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    tr = read_trace(f)
    assert_si(tr)
    assert tr.info.rows == (2, 21)


def test_utf16_with_bom(tmp_path):
    text = table("Time (min)\tTemperature (°C)\tHeat Flow (mW)", data_rows(), sep="\t")
    f = tmp_path / "wide.txt"
    f.write_bytes(text.encode("utf-16"))  # Python writes a BOM for "utf-16"
    assert_si(read_trace(f))


def test_whitespace_aligned_text(tmp_path):
    lines = ["Time (min)    Temperature (°C)    Heat Flow (mW)"]
    lines += [f"{a:10.2f}  {b:12.4f}  {c:12.6f}" for a, b, c in data_rows()]
    tr = read_trace(write(tmp_path / "run.txt", "\n".join(lines) + "\n"))
    assert_si(tr)


def test_xlsx(tmp_path):
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    wb.active.title = "Notes"
    wb.active["A1"] = "nothing here"
    ws = wb.create_sheet("Data")
    ws["A1"] = "Sample mass: 4 mg"
    ws.append([])
    ws.append(["Time (min)", "Temperature (°C)", "HF [W/g]"])
    for row in data_rows():
        ws.append([float(v) for v in row])
    f = tmp_path / "run.xlsx"
    wb.save(f)
    tr = read_trace(f, sheet="Data")
    np.testing.assert_allclose(tr.time, T_MIN * 60, rtol=1e-15)
    # W/g times the metadata mass: value * 1000 W/kg * 4e-6 kg
    np.testing.assert_allclose(tr.heat_flow, Q_MW * 1e3 * 4e-6, rtol=1e-14, atol=1e-300)
    assert not tr.specific
    assert tr.info.rows == (4, 23)
    assert read_trace(f, sheet=1).n_points == N
    raises(["run.xlsx", "no sheet named 'Other'", "Data"], read_trace, f, sheet="Other")
    raises(["run.xlsx", "sheet number 5"], read_trace, f, sheet=5)


def test_xlsx_text_cells_with_decimal_comma(tmp_path):
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["Time (min)", "Temperature (°C)", "Heat Flow (mW)"])
    for row in data_rows():
        ws.append([repr(float(v)).replace(".", ",") for v in row])
    f = tmp_path / "comma.xlsx"
    wb.save(f)
    assert_si(read_trace(f))


# -- units and mass -------------------------------------------------------------------------

@pytest.mark.parametrize(("time_h", "temp_h", "hf_h", "t_factor", "q_factor"), [
    ("Time (min)", "Temperature (°C)", "Heat Flow (mW)", 60.0, 1e-3),
    ("Time [s]", "Temperature/°C", "Heat flow/W", 1.0, 1.0),
    ("Time/min", "Temp [degC]", "Heat flow mW", 60.0, 1e-3),
    ("t (h)", "T (°C)", "Q (uW)", 3600.0, 1e-6),
    ("Zeit in min", "Ts, °C", "DSC (mW)", 60.0, 1e-3),
    ("Time (min)", "Sample temperature (°C)", "Heat Flow Endo Down (mW)", 60.0, 1e-3),
])
def test_header_unit_styles(tmp_path, time_h, temp_h, hf_h, t_factor, q_factor):
    f = write(tmp_path / "h.txt", table(f"{time_h}\t{temp_h}\t{hf_h}", data_rows(), sep="\t"))
    assert_si(read_trace(f), t_factor=t_factor, q_factor=q_factor)


@pytest.mark.parametrize("unit", ["W/g", "mW/mg", "W g-1"])
def test_specific_heat_flow_with_and_without_mass(tmp_path, unit):
    f = write(tmp_path / "spec.csv",
              table(f"Time (min),Temperature (°C),Heat flow ({unit})", data_rows()))
    no_mass = read_trace(f)
    assert no_mass.specific
    assert no_mass.info.mass is None
    np.testing.assert_allclose(no_mass.heat_flow, Q_MW * 1e3, rtol=1e-15)  # W/kg
    info = RunInfo("iso", "isothermal", temperature=398.15, mass=5e-6)
    with_mass = read_trace(f, info=info)
    assert not with_mass.specific
    np.testing.assert_allclose(with_mass.heat_flow, Q_MW * 1e3 * 5e-6, rtol=1e-14,
                               atol=1e-300)  # W


@pytest.mark.parametrize("header", ["HF [W/g]", "Heat flow mW/mg", "Heat flow/W g-1",
                                    "Heat flow (mW mg-1)", "Normalized heat flow (W/g)"])
def test_specific_header_spellings(tmp_path, header):
    f = write(tmp_path / "s.csv", table(f"Time (min),Temperature (°C),{header}", data_rows()))
    tr = read_trace(f)
    assert tr.specific
    np.testing.assert_allclose(tr.heat_flow, Q_MW * 1e3, rtol=1e-15)  # 1 W/g = 1000 W/kg


def test_study_mass_wins_over_file_metadata(tmp_path):
    text = "Sample mass: 9 mg\n" + table("Time (min),T (°C),HF (W/g)", data_rows())
    f = write(tmp_path / "m.csv", text)
    info = RunInfo("iso", "isothermal", temperature=398.15, mass=5e-6, group="neat")
    with pytest.warns(DataQualityWarning, match="9 mg"):
        tr = read_trace(f, info=info)
    assert "study file's value is used" in tr.info.extra["warnings"][0]
    assert tr.info.mass == 5e-6
    assert tr.info.extra["file_mass"] == pytest.approx(9e-6)
    assert tr.info.group == "neat" and tr.info.run_id == "iso"
    np.testing.assert_allclose(tr.heat_flow, Q_MW * 1e3 * 5e-6, rtol=1e-14, atol=1e-300)


def test_header_with_hash_and_slash_bracket_units(tmp_path):
    f = write(tmp_path / "h.txt", table("##Time/min;Temp./°C;DSC/(mW/mg)", data_rows(), sep=";"))
    tr = read_trace(f)
    assert tr.specific
    assert_si(tr, q_factor=1e3)


def test_columns_and_units_overrides(tmp_path):
    f = write(tmp_path / "odd.csv", table("Zeitpunkt,Fuehler,Signal (mW)", data_rows()))
    tr = read_trace(f, columns={"time": "Zeitpunkt", "temperature": "Fuehler",
                                "heat_flow": "Signal"},
                    units={"time": "min", "temperature": "degC"})
    assert_si(tr)
    # column numbers (1-based) work too; a unit override beats the header's unit
    tr = read_trace(f, columns={"time": 1, "temperature": 2, "heat_flow": 3},
                    units={"time": "s", "temperature": "K", "heat_flow": "W"})
    np.testing.assert_allclose(tr.time, T_MIN, rtol=1e-15)
    np.testing.assert_allclose(tr.heat_flow, Q_MW, rtol=1e-15)


def test_temperature_column_filled_for_isothermal(tmp_path):
    f = write(tmp_path / "notemp.csv", table("Time (min),Heat Flow (mW)",
                                             [(a, c) for a, _, c in data_rows()]))
    info = RunInfo("iso", "isothermal", temperature=398.15)
    tr = read_trace(f, info=info)
    np.testing.assert_array_equal(tr.temperature, np.full(N, 398.15))
    assert tr.info.extra["temperature_filled"]
    raises(["notemp.csv", "no temperature column"], read_trace, f)
    cooling = RunInfo("c", "cooling", rate=1 / 6)
    raises(["notemp.csv", "no temperature column"], read_trace, f, info=cooling)


def test_trailing_blank_rows_dropped(tmp_path):
    text = table("Time (min),Temperature (°C),Heat Flow (mW)", data_rows()) + ",,\n\n  \n;\n"
    tr = read_trace(write(tmp_path / "tail.csv", text))
    assert tr.n_points == N and tr.info.rows == (2, 21)


def test_quoted_header_and_trailing_delimiter(tmp_path):
    lines = ['"Time (min)","Temperature (°C)","Heat Flow (mW)",']
    lines += [",".join(repr(float(v)) for v in row) + "," for row in data_rows()]
    assert_si(read_trace(write(tmp_path / "q.csv", "\n".join(lines) + "\n")))


# -- bad inputs: each names the file and the row or column -----------------------------------

HEADER = "Time (min),Temperature (°C),Heat Flow (mW)"


def lines_with(replace_line: dict[int, str], drop: tuple = ()):
    """Data file lines (1-based, header = line 1) with some lines replaced."""
    lines = table(HEADER, data_rows()).splitlines()
    for k, v in replace_line.items():
        lines[k - 1] = v
    lines = [ln for k, ln in enumerate(lines, start=1) if k not in drop]
    return "\n".join(lines) + "\n"


def test_file_not_found(tmp_path):
    raises(["missing.csv", "file not found"], read_trace, tmp_path / "missing.csv")


def test_folder_instead_of_file(tmp_path):
    raises([re.escape(str(tmp_path)), "folder"], read_trace, tmp_path)


@pytest.mark.parametrize("content", [b"", b"\n\n   \n"])
def test_empty_file(tmp_path, content):
    f = tmp_path / "empty.csv"
    f.write_bytes(content)
    raises(["empty.csv", "empty"], read_trace, f)


def test_no_numbers(tmp_path):
    f = write(tmp_path / "words.csv", "Sample: x\nTime,Temperature,Heat flow\nnone,yet,here\n")
    raises(["words.csv", "no rows of numbers"], read_trace, f)


def test_no_header(tmp_path):
    f = write(tmp_path / "bare.csv", table(HEADER, data_rows()).split("\n", 1)[1])
    raises(["bare.csv", r"row 1\b", "header"], read_trace, f)


def test_missing_column(tmp_path):
    f = write(tmp_path / "two.csv", table("Time (min),Temperature (°C),Pressure (bar)",
                                          data_rows()))
    raises(["two.csv", "no heat flow column", "'Pressure \\(bar\\)'", "columns = "],
           read_trace, f)


def test_named_column_not_in_header(tmp_path):
    f = write(tmp_path / "c.csv", table(HEADER, data_rows()))
    raises(["c.csv", "'Signal'", "not in the header"], read_trace, f,
           columns={"heat_flow": "Signal"})
    raises(["c.csv", "unknown role"], read_trace, f, columns={"heatflow": "Signal"})


def test_ambiguous_columns(tmp_path):
    f = write(tmp_path / "amb.csv",
              table("Time (min),Temp (°C),Temperature (°C),Heat Flow (mW)",
                    [(a, b, b, c) for a, b, c in data_rows()]))
    raises(["amb.csv", "several columns", "columns = "], read_trace, f)
    assert_si(read_trace(f, columns={"temperature": "Temperature"}))


def test_non_numeric_cell(tmp_path):
    f = write(tmp_path / "bad.csv", lines_with({8: "1.75,125.1,oops"}))
    raises(["bad.csv", r"row 8\b", r"column 'Heat Flow \(mW\)'", "'oops' is not a number"],
           read_trace, f)


def test_nan_text_cell(tmp_path):
    f = write(tmp_path / "nan.csv", lines_with({5: "1.0,NaN,0.5"}))
    raises(["nan.csv", r"row 5\b", "Temperature", "not a number"], read_trace, f)


def test_blank_cell_gap(tmp_path):
    f = write(tmp_path / "gap.csv", lines_with({10: "2.25,,0.5"}))
    raises(["gap.csv", r"row 10\b", "Temperature", "blank cell"], read_trace, f)


def test_blank_line_inside_data(tmp_path):
    f = write(tmp_path / "hole.csv", lines_with({12: ""}))
    raises(["hole.csv", r"row 12\b", "blank row"], read_trace, f)


def test_time_goes_back(tmp_path):
    f = write(tmp_path / "back.csv", lines_with({7: "0.5,125.1,0.1"}))  # line 6 has 1.0
    raises(["back.csv", r"row 7\b", "Time", "goes back", "sort"], read_trace, f)


def test_time_repeats(tmp_path):
    f = write(tmp_path / "dup.csv", lines_with({7: "1.0,125.1,0.1"}))  # line 6 has 1.0
    raises(["dup.csv", r"row 7\b", "repeats"], read_trace, f)


def test_unknown_unit(tmp_path):
    f = write(tmp_path / "u.csv", table("Time (fortnights),Temperature (°C),Heat Flow (mW)",
                                        data_rows()))
    raises(["u.csv", r"column 'Time \(fortnights\)'", "fortnights", "not a time unit"],
           read_trace, f)


def test_wrong_kind_of_unit(tmp_path):
    f = write(tmp_path / "w.csv", table("Time (min),Temperature (°C),Heat Flow (mg)",
                                        data_rows()))
    raises(["w.csv", "Heat Flow", "mass", "not a heat flow unit"], read_trace, f)


def test_missing_unit_asks_for_units_table(tmp_path):
    f = write(tmp_path / "nounit.csv", table("Time,Temperature (°C),Heat Flow (mW)",
                                             data_rows()))
    raises(["nounit.csv", "column 'Time'", re.escape('units = { time = "min" }')],
           read_trace, f)
    assert_si(read_trace(f, units={"time": "min"}))


def test_too_many_rows(tmp_path):
    f = write(tmp_path / "big.csv", table(HEADER, data_rows()))
    raises(["big.csv", "20 data rows", "15"], read_trace, f, max_rows=15)


def test_too_few_rows(tmp_path):
    f = write(tmp_path / "few.csv", table(HEADER, data_rows()[:5]))
    raises(["few.csv", "only 5 data rows", "rows 2-6"], read_trace, f)


def test_unreadable_xlsx(tmp_path):
    f = tmp_path / "broken.xlsx"
    f.write_bytes(b"PK\x03\x04 this is not really a workbook")
    raises(["broken.xlsx", "cannot read the workbook"], read_trace, f)
    g = tmp_path / "text.xlsx"
    g.write_text("Time,Temp\n1,2\n")
    raises(["text.xlsx", "cannot read the workbook"], read_trace, g)


def test_old_excel_format(tmp_path):
    f = tmp_path / "old.xls"
    f.write_bytes(b"\xd0\xcf\x11\xe0")
    raises(["old.xls", "xlsx"], read_trace, f)


def test_binary_file(tmp_path):
    f = tmp_path / "raw.csv"
    f.write_bytes(b"\x00\x01\x02DSC\x00" * 50)
    raises(["raw.csv", "binary"], read_trace, f)


def test_bad_options(tmp_path):
    f = write(tmp_path / "ok.csv", table(HEADER, data_rows()))
    raises(["ok.csv", "decimal"], read_trace, f, decimal=";")
    raises(["ok.csv", "max_rows"], read_trace, f, max_rows=0)
    raises(["ok.csv", "unknown role"], read_trace, f, units={"speed": "m/s"})
    raises(["ok.csv", "not a time unit"], read_trace, f, units={"time": "K"})


def test_input_file_unchanged(tmp_path):
    f = write(tmp_path / "keep.csv", table(HEADER, data_rows()))
    before = f.read_bytes()
    tr = read_trace(f)
    assert f.read_bytes() == before
    with pytest.raises(ValueError):
        tr.time[0] = 1.0  # read-only arrays
