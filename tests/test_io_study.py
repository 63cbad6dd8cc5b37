"""read_study on small study files and invented data files written in tmp_path.

SI values expected below are hand arithmetic from the unit definitions (SI Brochure,
9th ed.): 125 °C = 398.15 K, 10 K/min = 1/6 K/s, 5.2 mg = 5.2e-6 kg, 207 J/g = 207e3 J/kg.
"""

from __future__ import annotations

import re
import textwrap

import numpy as np
import pytest

from kinetics.dataset import Study
from kinetics.errors import CrystkinInputError
from kinetics.io.study import RUN_KEYS, read_study

N = 15


def data_file(path, header="Time (min),Temperature (°C),Heat Flow (mW)", cooling=False):
    path.parent.mkdir(parents=True, exist_ok=True)
    lines = [header]
    for i in range(N):
        T = 150.0 - 2.5 * i if cooling else 125.0
        lines.append(f"{0.25 * i!r},{T!r},{0.01 * i!r}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def study_file(tmp_path, body, name="study.toml"):
    f = tmp_path / name
    f.write_text(textwrap.dedent(body), encoding="utf-8")
    return f


def raises(parts, fn, *args):
    with pytest.raises(CrystkinInputError) as err:
        fn(*args)
    msg = str(err.value)
    for part in parts:
        assert re.search(part, msg), f"{part!r} not in {msg!r}"
    return msg


@pytest.fixture
def project(tmp_path):
    data_file(tmp_path / "raw" / "iso_125.csv")
    data_file(tmp_path / "raw" / "cool_10.csv", cooling=True)
    data_file(tmp_path / "raw" / "plain.csv", header="Time,Ts,Value")
    return tmp_path


FULL = """
    [study]
    name = "PX-40 screening (invented)"
    polymer = "iPP"
    delta_h100 = "207 J/g"
    tm0 = "186 degC"
    tg = "-10 degC"

    [defaults]
    mass = "5.0 mg"
    group = "neat"

    [[run]]
    name = "iso-125"
    file = "raw/iso_125.csv"
    kind = "isothermal"
    temperature = "125 degC"
    mass = "5.2 mg"
    exotherm = "up"

    [[run]]
    file = "raw/cool_10.csv"
    kind = "cooling"
    rate = "10 K/min"
    group = "N-A"

    [[run]]
    name = "melt-125"
    file = "raw/iso_125.csv"
    kind = "heating"
    rate = "10 K/min"
    hold_temperature = "125 degC"

    [analysis]
    reference = "neat"
    run_to_run_cv = 0.05
"""


def test_full_study(project, monkeypatch):
    f = study_file(project, FULL)
    elsewhere = project / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)  # paths resolve against the study file, not the cwd
    study = read_study(f)
    assert isinstance(study, Study)
    assert study.name == "PX-40 screening (invented)"
    assert study.source == str(f)
    assert study.failures == ()
    assert [t.run_id for t in study.traces] == ["iso-125", "cool_10", "melt-125"]
    iso, cool, melt = study.traces
    assert iso.info.kind == "isothermal"
    assert iso.info.temperature == pytest.approx(398.15)
    assert iso.info.mass == pytest.approx(5.2e-6)     # run value beats [defaults]
    assert iso.info.group == "neat"                   # from [defaults]
    assert iso.info.exotherm == "up"
    assert iso.info.source == str(project / "raw" / "iso_125.csv")
    assert iso.info.rows == (2, N + 1)
    assert iso.info.polymer == "iPP"
    assert iso.info.delta_h100 == pytest.approx(207e3)
    assert cool.info.kind == "cooling" and cool.info.group == "N-A"
    assert cool.info.rate == pytest.approx(1 / 6)
    assert cool.info.mass == pytest.approx(5.0e-6)
    assert melt.info.hold_temperature == pytest.approx(398.15)
    np.testing.assert_allclose(iso.time, 15.0 * np.arange(N))  # 0.25 min steps = 15 s
    s = study.settings
    assert s["delta_h100"] == pytest.approx(207e3)
    assert s["tm0"] == pytest.approx(459.15)
    assert s["tg"] == pytest.approx(263.15)
    assert s["polymer"] == "iPP"
    assert s["analysis"] == {"reference": "neat", "run_to_run_cv": 0.05}
    assert study.groups == ("neat", "N-A")


def test_defaults_merged_per_role(project):
    f = study_file(project, """
        [defaults]
        columns = { time = "Time", temperature = "Ts", heat_flow = "Value" }
        units = { time = "min", temperature = "degC", heat_flow = "W" }

        [[run]]
        file = "raw/plain.csv"
        kind = "isothermal"
        temperature = "125 degC"
        units = { heat_flow = "mW" }
    """)
    (tr,) = read_study(f).traces
    np.testing.assert_allclose(tr.time, 15.0 * np.arange(N))     # min from [defaults]
    np.testing.assert_allclose(tr.temperature, np.full(N, 398.15))  # degC from [defaults]
    np.testing.assert_allclose(tr.heat_flow, 0.01 * np.arange(N) * 1e-3)  # mW from the run
    assert study_name_default(f) == "study"


def study_name_default(f):
    return read_study(f).name


def test_missing_file_recorded_others_read(project):
    f = study_file(project, """
        [[run]]
        file = "raw/iso_125.csv"
        kind = "isothermal"
        temperature = "125 degC"
        [[run]]
        name = "lost"
        file = "raw/not_there.csv"
        kind = "isothermal"
        temperature = "130 degC"
    """)
    study = read_study(f)
    assert [t.run_id for t in study.traces] == ["iso_125"]
    assert len(study.failures) == 1
    name, message = study.failures[0]
    assert name == "lost"
    assert "not_there.csv" in message and "not found" in message and "\n" not in message


def test_unreadable_file_recorded(project):
    (project / "raw" / "broken.csv").write_text("nothing useful\n")
    f = study_file(project, """
        [[run]]
        file = "raw/broken.csv"
        kind = "isothermal"
        temperature = "125 degC"
        [[run]]
        file = "raw/iso_125.csv"
        kind = "isothermal"
        temperature = "125 degC"
    """)
    study = read_study(f)
    assert study.failures[0][0] == "broken"
    assert "broken.csv" in study.failures[0][1]


def test_every_run_failed(project):
    f = study_file(project, """
        [[run]]
        file = "raw/a.csv"
        kind = "isothermal"
        temperature = "125 degC"
        [[run]]
        file = "raw/b.csv"
        kind = "isothermal"
        temperature = "125 degC"
    """)
    raises(["study.toml", "none of the 2 runs", "a.csv"], read_study, f)


def test_unknown_run_key_lists_allowed(project):
    f = study_file(project, """
        [[run]]
        file = "raw/iso_125.csv"
        kind = "isothermal"
        temprature = "125 degC"
    """)
    msg = raises(["study.toml", "unknown key 'temprature'", "did you mean 'temperature'"],
                 read_study, f)
    for key in RUN_KEYS:
        assert key in msg


@pytest.mark.parametrize(("body", "parts"), [
    ("[studdy]\nname='x'\n", ["unknown key 'studdy'", "did you mean 'study'"]),
    ("[study]\nowner='x'\n[[run]]\nfile='a.csv'\nkind='cooling'\nrate='1 K/min'\n",
     ["unknown key 'owner' in \\[study\\]"]),
    ("[defaults]\nfile='x.csv'\n", ["unknown key 'file' in \\[defaults\\]"]),
    ("[[run]]\nfile='a.csv'\nkind='cooling'\nrate='1 K/min'\noutput='/tmp/x'\n",
     ["unknown key 'output'"]),
])
def test_unknown_keys_elsewhere(tmp_path, body, parts):
    raises(["study.toml"] + parts, read_study, study_file(tmp_path, body))


@pytest.mark.parametrize(("line", "key"), [("temperature = 125", "temperature"),
                                           ('temperature = "125"', "temperature"),
                                           ("mass = 5.2", "mass")])
def test_bare_number_needs_a_unit(project, line, key):
    f = study_file(project, f"""
        [[run]]
        file = "raw/iso_125.csv"
        kind = "isothermal"
        {'temperature = "125 degC"' if key != 'temperature' else ''}
        {line}
    """)
    raises(["study.toml", "run 'iso_125'", f"key '{key}'", "has no unit"], read_study, f)


def test_bare_number_in_study_table(tmp_path):
    f = study_file(tmp_path, '[study]\ndelta_h100 = 207\n[[run]]\nfile="a.csv"\n'
                             'kind="cooling"\nrate="1 K/min"\n')
    raises(["study.toml", "delta_h100", "has no unit", "J/g"], read_study, f)


@pytest.mark.parametrize("name", ["../evil", "a/b", "a\\\\b", ".hidden", "x y", "", "-x",
                                  "a..b", "C:x"])
def test_unsafe_run_name(project, name):
    f = study_file(project, f"""
        [[run]]
        name = "{name}"
        file = "raw/iso_125.csv"
        kind = "isothermal"
        temperature = "125 degC"
    """)
    raises(["study.toml", "cannot be used as a file name", "letters, digits"], read_study, f)


def test_unsafe_file_stem_needs_a_name(project):
    data_file(project / "raw" / "iso 125 °C.csv")
    f = study_file(project, """
        [[run]]
        file = "raw/iso 125 °C.csv"
        kind = "isothermal"
        temperature = "125 degC"
    """)
    raises(["study.toml", "run #1", "iso 125 °C", 'add name = "..."'], read_study, f)


def test_unsafe_group(project):
    f = study_file(project, """
        [[run]]
        file = "raw/iso_125.csv"
        kind = "isothermal"
        temperature = "125 degC"
        group = "../up"
    """)
    raises(["study.toml", "group name"], read_study, f)


def test_duplicate_names(project):
    f = study_file(project, """
        [[run]]
        file = "raw/iso_125.csv"
        kind = "isothermal"
        temperature = "125 degC"
        [[run]]
        file = "other/iso_125.csv"
        kind = "isothermal"
        temperature = "125 degC"
    """)
    raises(["study.toml", "'iso_125'", "run #1 and run #2", "unique"], read_study, f)


def test_toml_syntax_error_names_line(tmp_path):
    f = study_file(tmp_path, '[study]\nname = "x"\n\n[[run]]\nfile = raw/a.csv\n')
    raises(["study.toml", r"line 5\b", "TOML syntax error"], read_study, f)


@pytest.mark.parametrize(("body", "part"), [
    ("[study]\nname = 'x'\n", "no runs"),
    ("[run]\nfile = 'a.csv'\n", r"\[\[run\]\]"),
    ("run = [1, 2]\n", "list of"),
    ("[[run]]\nkind = 'cooling'\nrate = '1 K/min'\n", "no 'file'"),
    ("[[run]]\nfile = 'a.csv'\n", "no 'kind'"),
    ("[[run]]\nfile = 'a.csv'\nkind = 'melting'\n", "kind must be one of"),
    ("[[run]]\nfile = 'a.csv'\nkind = 'isothermal'\n", "needs its hold temperature"),
    ("[[run]]\nfile = 'a.csv'\nkind = 'cooling'\n", "needs its rate"),
    ("[[run]]\nfile = 'a.csv'\nkind = 'cooling'\nrate = '-10 K/min'\n", "must be positive"),
    ("[[run]]\nfile = 'a.csv'\nkind = 'cooling'\nrate = '10 mg'\n", "mass unit"),
    ("[[run]]\nfile = 'a.csv'\nkind = 'cooling'\nrate = '1 K/min'\nexotherm = 'left'\n",
     "exotherm"),
    ("[[run]]\nfile = 'a.csv'\nkind = 'cooling'\nrate = '1 K/min'\ngroup = 3\n", "text"),
    ("[[run]]\nfile = 'a.csv'\nkind = 'cooling'\nrate = '1 K/min'\n"
     "columns = { speed = 'x' }\n", "unknown role 'speed'"),
    ("[[run]]\nfile = 'a.csv'\nkind = 'cooling'\nrate = '1 K/min'\n"
     "units = { time = 'degC' }\n", "not a time unit"),
    ("[[run]]\nfile = 'a.csv'\nkind = 'cooling'\nrate = '1 K/min'\ndecimal = ';'\n",
     "decimal"),
    ("[[run]]\nfile = 'a.csv'\nkind = 'cooling'\nrate = '1 K/min'\nsheet = 1.5\n", "sheet"),
    ("[study]\nname = '../x'\n[[run]]\nfile = 'a.csv'\nkind = 'cooling'\nrate = '1 K/min'\n",
     "study name"),
])
def test_schema_errors(tmp_path, body, part):
    raises(["study.toml", part], read_study, study_file(tmp_path, body))


def test_study_file_missing_or_not_utf8(tmp_path):
    raises(["nope.toml", "not found"], read_study, tmp_path / "nope.toml")
    f = tmp_path / "latin.toml"
    f.write_bytes('[study]\nname = "Schmelze 125 °C"\n'.encode("latin-1"))
    raises(["latin.toml", "UTF-8"], read_study, f)


def test_absolute_path_and_xlsx_sheet(project):
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    wb.active.title = "Info"
    ws = wb.create_sheet("Data")
    ws.append(["Time (min)", "Temperature (°C)", "Heat Flow (mW)"])
    for i in range(N):
        ws.append([0.25 * i, 125.0, 0.01 * i])
    xlsx = project / "raw" / "book.xlsx"
    wb.save(xlsx)
    f = study_file(project, f"""
        [[run]]
        file = '{xlsx}'
        kind = "isothermal"
        temperature = "125 degC"
        sheet = "Data"
    """)
    (tr,) = read_study(f).traces
    assert tr.run_id == "book" and tr.n_points == N


def test_study_inputs_unchanged(project):
    f = study_file(project, FULL)
    files = [f, *sorted((project / "raw").iterdir())]
    before = [p.read_bytes() for p in files]
    read_study(f)
    assert [p.read_bytes() for p in files] == before


@pytest.mark.parametrize("line, parts", [
    ('hold_out = ["iso-12"]', [r"hold_out names run 'iso-12'", r"did you mean 'iso-125'"]),
    ('reference = "nat"', [r"reference 'nat' is not a group", r"did you mean 'neat'",
                           r"groups: N-A, neat"]),
])
def test_analysis_names_must_exist(project, line, parts):
    """A misspelt run or group name in [analysis] is refused, not silently ignored."""
    body = FULL.replace('    reference = "neat"\n', f"    {line}\n")
    raises([*parts, "study.toml"], read_study, study_file(project, body))
