"""The command line on hostile input: every case ends with a clear message, never a traceback.

Files here are invented. The contract (exit codes of cli/main.py): 0 success; 1 finished
but some runs failed (each listed); 2 a user mistake, with one line on stderr that names
the file (and the row and column where the problem sits). In-process runs use
click's CliRunner, where an unexpected exception shows up as ``result.exception``
rather than as a printed traceback, so that is checked too; a few cases also run the
installed console script in a subprocess to see the real stderr.

The one numeric check: the invented run is a Gaussian exotherm of height h = 1 mW and
width s = 20 s on 5 mg, whose area is h s sqrt(2 pi) = 50.13 mJ (the Gaussian
integral), so every encoding of the same table must report 50.13 mJ / 5 mg = 10.03 J/g.
"""

from __future__ import annotations

import functools
import math
import os
import re
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from crystkin_cli.main import main
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import kinetics.io
import kinetics.io.study

ENTHALPY_J_PER_G = 1e-3 * 20.0 * math.sqrt(2 * math.pi) / 5e-6 / 1e3  # 10.03 J/g, by hand


def _rows(n=600, dt=0.5, seed=0):
    t = np.arange(n) * dt
    q = np.exp(-0.5 * ((t - 150.0) / 20.0) ** 2) + 1e-3 * np.random.default_rng(seed).normal(
        size=n)
    return [f"{float(a) / 60!r},125.0,{float(b)!r}" for a, b in zip(t, q, strict=True)]


HEADER = "Time (min),Temperature (°C),Heat flow (mW)"
GOOD_LINES = ["Sample mass: 5 mg", HEADER, *_rows()]
GOOD_TEXT = "\n".join(GOOD_LINES) + "\n"
FIRST_DATA_ROW = 3  # file row of the first data line (1-based, as an editor counts)


def _invoke(args):
    r = CliRunner().invoke(main, [str(a) for a in args])
    # an exception other than the deliberate exit is what a user would see as a traceback
    assert r.exception is None or isinstance(r.exception, SystemExit), (
        f"unexpected {type(r.exception).__name__}: {r.exception}")
    assert "Traceback" not in r.output
    return r


def _one_line_error(r, *names):
    assert r.exit_code == 2, r.output
    msg = r.stderr.strip()
    assert len(msg.splitlines()) == 1, msg
    assert msg.startswith("crystkin: error: "), msg
    for name in names:
        assert name in msg, (name, msg)
    return msg


def _enthalpy(output: str) -> float:
    m = re.search(r"enthalpy:\s+([0-9.]+) J/g", output)
    assert m, output
    return float(m.group(1))


def _write(path: Path, data) -> Path:
    if isinstance(data, str):
        path.write_text(data, encoding="utf-8")
    else:
        path.write_bytes(data)
    return path


# -- encodings -----------------------------------------------------------------------------

@pytest.mark.parametrize("encoding", ["utf-8", "utf-8-sig", "utf-16", "utf-16-le", "utf-16-be",
                                      "latin-1", "cp1252"])
def test_encodings_give_the_same_run(tmp_path, encoding):
    """UTF-16 with or without BOM, Latin-1 and Windows-1252 with '°' read as the UTF-8 text."""
    f = _write(tmp_path / f"run-{encoding}.csv", GOOD_TEXT.encode(encoding))
    r = _invoke(["peek", f])
    assert r.exit_code == 0, r.output
    assert _enthalpy(r.output) == pytest.approx(ENTHALPY_J_PER_G, rel=0.01)


@pytest.mark.parametrize("encoding", ["utf-16-le", "utf-16-be"])
def test_truncated_utf16_is_read_or_refused_cleanly(tmp_path, encoding):
    data = GOOD_TEXT.encode(encoding)
    f = _write(tmp_path / "cut.csv", data[:len(data) // 2 + 1])
    r = _invoke(["peek", f])
    if r.exit_code != 0:
        _one_line_error(r, "cut.csv")


def test_study_file_in_utf16_is_refused(tmp_path):
    _write(tmp_path / "run.csv", GOOD_TEXT)
    study = _write(tmp_path / "study.toml", _study_text().encode("utf-16"))
    _one_line_error(_invoke(["analyze", study, "--out", tmp_path / "o", "--fast"]),
                    "study.toml", "UTF-8")
    assert not (tmp_path / "o").exists()


# -- empty, binary, folders -----------------------------------------------------------------

BINARY = {
    "zero-bytes": b"",
    "random": np.random.default_rng(1).bytes(4000),
    "png": b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR" + bytes(range(256)) * 8,
    "gzip": b"\x1f\x8b\x08\x00" + bytes(range(256)) * 4,
    "fake-zip": b"PK\x03\x04" + b"\x00" * 200,
    "only-blank-lines": b"\n\n  \r\n\t\n",
    "nul-inside-text": GOOD_TEXT.encode()[:400] + b"\x00\x00" + GOOD_TEXT.encode()[400:],
}


@pytest.mark.parametrize("name", sorted(BINARY))
def test_empty_and_binary_files(tmp_path, name):
    f = _write(tmp_path / f"{name}.csv", BINARY[name])
    _one_line_error(_invoke(["peek", f]), f"{name}.csv")


def test_binary_file_in_a_subprocess(tmp_path):
    """The installed script: exit 2, one stderr line, nothing else."""
    f = _write(tmp_path / "blob.csv", BINARY["random"])
    proc = subprocess.run([*_crystkin(), "peek", str(f)], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 2
    assert proc.stderr.strip().count("\n") == 0 and "blob.csv" in proc.stderr
    assert "Traceback" not in proc.stderr + proc.stdout


def test_folder_named_as_a_run_file(tmp_path):
    (tmp_path / "raw").mkdir()
    study = _write(tmp_path / "study.toml", _study_text(file="raw"))
    msg = _one_line_error(_invoke(["analyze", study, "--out", tmp_path / "o", "--fast"]),
                          "study.toml", "raw")
    assert "folder" in msg


@pytest.mark.parametrize("command", ["peek", "analyze"])
def test_folder_passed_as_file_gives_one_line(tmp_path, command):
    folder = tmp_path / "adir"
    folder.mkdir()
    args = [command, folder] + (["--out", tmp_path / "o"] if command == "analyze" else [])
    _one_line_error(_invoke(args), "adir")


@pytest.mark.parametrize("command", ["peek", "analyze"])
def test_folder_passed_as_file_is_refused(tmp_path, command):
    """What already holds: exit 2, the folder named, no traceback, nothing written."""
    folder = tmp_path / "adir"
    folder.mkdir()
    args = [command, folder] + (["--out", tmp_path / "o"] if command == "analyze" else [])
    r = _invoke(args)
    assert r.exit_code == 2 and "adir" in r.stderr
    assert not (tmp_path / "o").exists()


# -- mixed units, duplicated time stamps ----------------------------------------------------

def _data_lines():
    return list(GOOD_LINES[2:])


def _with_data(lines, header=HEADER):
    return "\n".join(["Sample mass: 5 mg", header, *lines]) + "\n"


def _kelvin_part_way():
    lines = _data_lines()
    return _with_data(lines[:100] + [ln.replace(",125.0,", ",398.15,") for ln in lines[100:]]), \
        FIRST_DATA_ROW + 100


def _seconds_part_way():
    lines = _data_lines()
    later = []
    for ln in lines[300:]:
        t, rest = ln.split(",", 1)
        later.append(f"{float(t) * 60!r},{rest}")
    return _with_data(lines[:300] + later), FIRST_DATA_ROW + 300


def _units_in_cells():
    lines = _data_lines()
    later = [ln.replace(",", " min,", 1) for ln in lines[100:]]
    return _with_data(lines[:100] + later), FIRST_DATA_ROW + 100


def _second_header():
    lines = _data_lines()
    return _with_data(lines[:250] + ["Time (s),Temperature (K),Heat flow (W)"] + lines[250:]), \
        FIRST_DATA_ROW + 250


def _duplicated_row():
    lines = _data_lines()
    return _with_data(lines[:40] + [lines[39]] + lines[40:]), FIRST_DATA_ROW + 40


def _repeated_time():
    lines = _data_lines()
    t = lines[40].split(",")[0]
    return _with_data(lines[:41] + [f"{t},125.0,0.25"] + lines[41:]), FIRST_DATA_ROW + 41


def _time_goes_back():
    lines = _data_lines()
    lines[60], lines[61] = lines[61], lines[60]
    return _with_data(lines), FIRST_DATA_ROW + 61


@pytest.mark.parametrize("make, column, words", [
    (_kelvin_part_way, "Temperature", ("kelvin",)),
    (_seconds_part_way, "Time", ("unit",)),
    (_units_in_cells, "Time", ("not a number",)),
    (_second_header, "Time", ("not a number",)),
    (_duplicated_row, "Time", ("repeats",)),
    (_repeated_time, "Time", ("repeats",)),
    (_time_goes_back, "Time", ("goes back",)),
])
def test_mixed_units_and_bad_time_name_row_and_column(tmp_path, make, column, words):
    text, row = make()
    f = _write(tmp_path / "mixed.csv", text)
    msg = _one_line_error(_invoke(["peek", f]), "mixed.csv", f"row {row}", column)
    for w in words:
        assert w in msg, msg


@pytest.mark.parametrize("header, cols", [
    ("Time (min),Temperature (°C),Heat flow (mW),Heat flow (W/g)", ("Heat flow (mW)",
                                                                    "Heat flow (W/g)")),
    ("Time (min),Temperature (°C),Temperature (K),Heat flow (mW)", ("Temperature (°C)",
                                                                    "Temperature (K)")),
])
def test_two_columns_for_one_role_in_different_units(tmp_path, header, cols):
    lines = [ln + ",0.1" for ln in _data_lines()]
    f = _write(tmp_path / "two.csv", _with_data(lines, header=header))
    msg = _one_line_error(_invoke(["peek", f]), "two.csv", *cols)
    assert "several columns" in msg


def test_unit_of_the_wrong_kind_in_the_header(tmp_path):
    f = _write(tmp_path / "swap.csv",
               _with_data(_data_lines(), header="Time (min),Temperature (mW),Heat flow (°C)"))
    _one_line_error(_invoke(["peek", f]), "swap.csv", "Temperature (mW)")


def test_units_row_under_the_names(tmp_path):
    """Units given in a second header row are used (W/g times the 5 mg of the file)."""
    text = "\n".join(["Sample mass: 5 mg", "Time,Temperature,Heat flow", "min,°C,mW",
                      *_data_lines()]) + "\n"
    f = _write(tmp_path / "unitrow.csv", text)
    r = _invoke(["peek", f])
    assert r.exit_code == 0, r.output
    assert _enthalpy(r.output) == pytest.approx(ENTHALPY_J_PER_G, rel=0.01)


# -- size limits ----------------------------------------------------------------------------

def _small_limit(monkeypatch, limit):
    from kinetics.io.tables import read_trace
    small = functools.partial(read_trace, max_rows=limit)
    monkeypatch.setattr(kinetics.io, "read_trace", small)
    monkeypatch.setattr(kinetics.io.study, "read_trace", small)


def test_file_over_the_row_limit(tmp_path, monkeypatch):
    """The row limit (2,000,000 by default) lowered to 200 so no huge file is needed."""
    _small_limit(monkeypatch, 200)
    f = _write(tmp_path / "long.csv", GOOD_TEXT)
    _one_line_error(_invoke(["peek", f]), "long.csv", "600 data rows", "limit of 200")
    study = _write(tmp_path / "study.toml", _study_text(file="long.csv"))
    _one_line_error(_invoke(["analyze", study, "--out", tmp_path / "o", "--fast"]),
                    "study.toml", "long.csv", "limit of 200")
    assert not (tmp_path / "o").exists()


def test_file_over_the_size_limit_is_refused_before_reading(tmp_path, monkeypatch):
    """Bytes are checked first (512 per allowed row): a 1.2 MB file against 200 rows."""
    _small_limit(monkeypatch, 200)
    f = _write(tmp_path / "big.csv", GOOD_TEXT + "\n".join(_rows(n=24000, seed=2)) + "\n")
    assert f.stat().st_size > 1000 * 512
    msg = _one_line_error(_invoke(["peek", f]), "big.csv", "too large")
    assert "MB" in msg


def test_text_file_with_far_more_lines_than_rows_allowed(tmp_path, monkeypatch):
    """Refused from the line count, before any row is parsed (limit + 10,000 free lines)."""
    _small_limit(monkeypatch, 200)
    f = _write(tmp_path / "lines.csv", HEADER + "\n" + "1,2,3\n" * 10_300)
    _one_line_error(_invoke(["peek", f]), "lines.csv", "10301 lines", "limit of 200")


def test_one_enormous_line_is_refused_quickly(tmp_path):
    f = _write(tmp_path / "oneline.csv", b"1,2," * 1_000_000)
    start = time.perf_counter()
    msg = _one_line_error(_invoke(["peek", f]), "oneline.csv", "row 1")
    assert "characters" in msg
    assert time.perf_counter() - start < 5.0


def test_many_rows_without_a_header_are_refused_quickly(tmp_path):
    f = _write(tmp_path / "nohead.csv", b"1.5,125.0,0.25\n" * 300_000)
    start = time.perf_counter()
    _one_line_error(_invoke(["peek", f]), "nohead.csv", "no header", "row 1")
    assert time.perf_counter() - start < 5.0


def test_study_file_over_the_size_limit(tmp_path, monkeypatch):
    monkeypatch.setattr(kinetics.io.study, "MAX_STUDY_BYTES", 2048)
    _write(tmp_path / "run.csv", GOOD_TEXT)
    study = _write(tmp_path / "study.toml", _study_text() + "# padding\n" * 400)
    _one_line_error(_invoke(["analyze", study, "--out", tmp_path / "o"]), "study.toml",
                    "limit")


def test_study_size_limit_default_allows_the_largest_run_count():
    """10,000 run blocks of the usual size fit well inside the byte limit."""
    block = ('[[run]]\nname = "PX-40_iso125-r12"\nfile = "raw/2024-05-17/PX-40_iso125-r12.csv"\n'
             'kind = "isothermal"\ntemperature = "125 degC"\nmass = "5.12 mg"\n'
             'group = "PX-40"\n')
    assert len(block.encode()) * kinetics.io.study.MAX_RUNS < kinetics.io.study.MAX_STUDY_BYTES


# -- many runs ------------------------------------------------------------------------------

def _study_text(*, file="run.csv", name=None, extra="", runs=""):
    head = extra + "\n" if extra else ""
    n = f'name = "{name}"\n' if name else ""
    return (head + f'[[run]]\n{n}file = "{file}"\nkind = "isothermal"\n'
            'temperature = "125 degC"\nmass = "5 mg"\n' + runs)


def _missing_runs(k, start=0):
    return "".join(f'\n[[run]]\nname = "gone-{i}"\nfile = "missing/gone-{i}.csv"\n'
                   'kind = "isothermal"\ntemperature = "125 degC"\n'
                   for i in range(start, start + k))


def test_hundreds_of_missing_files_beside_one_good_run(tmp_path):
    _write(tmp_path / "run.csv", GOOD_TEXT)
    study = _write(tmp_path / "study.toml", _study_text(runs=_missing_runs(300)))
    out = tmp_path / "o"
    r = _invoke(["analyze", study, "--out", out, "--fast"])
    assert r.exit_code == 1, r.output
    listed = [ln for ln in r.stderr.splitlines() if ln.startswith("  - gone-")]
    assert len(listed) == 300
    assert len({ln.split(":")[0] for ln in listed}) == 300
    assert all("gone-" in ln and ".csv" in ln and "not found" in ln for ln in listed)
    assert "300 run(s) could not be analysed" in r.stderr
    assert (out / "tables" / "isothermal_runs.csv").is_file()
    failures = (out / "tables" / "failures.csv").read_text().splitlines()
    assert len(failures) == 301  # header + one line per missing run


def test_hundreds_of_runs_all_missing(tmp_path):
    study = _write(tmp_path / "study.toml", _missing_runs(400))
    msg = _one_line_error(_invoke(["analyze", study, "--out", tmp_path / "o", "--fast"]),
                          "study.toml", "none of the 400 runs", "gone-0")
    assert "not found" in msg
    assert not (tmp_path / "o").exists()


def test_five_thousand_runs_are_accepted(tmp_path):
    """5,000 runs are under the limit: read (here all missing, so a clear refusal)."""
    study = _write(tmp_path / "study.toml", _missing_runs(5000))
    _one_line_error(_invoke(["analyze", study, "--out", tmp_path / "o", "--fast"]),
                    "study.toml", "none of the 5000 runs")


def test_more_runs_than_the_limit(tmp_path):
    limit = kinetics.io.study.MAX_RUNS
    assert limit == 10_000
    study = _write(tmp_path / "study.toml", _missing_runs(limit + 1))
    msg = _one_line_error(_invoke(["analyze", study, "--out", tmp_path / "o", "--fast"]),
                          "study.toml", f"{limit + 1} runs", f"limit of {limit}")
    assert "split" in msg


# -- study files with unknown keys and typos ------------------------------------------------

STUDY_MISTAKES = {
    "typo in a run key": (_study_text().replace("temperature =", "temprature ="),
                          ("temprature", "did you mean 'temperature'")),
    "typo in a table name": ('[studdy]\nname = "x"\n' + _study_text(),
                             ("studdy", "did you mean 'study'")),
    "unknown [study] key": ('[study]\nnmae = "x"\n' + _study_text(), ("nmae", "name")),
    "unknown [defaults] key": ('[defaults]\nmas = "5 mg"\n' + _study_text(), ("mas",)),
    "unknown column role": (_study_text().replace(
        'mass = "5 mg"', 'mass = "5 mg"\ncolumns = { heatflow = "HF" }'), ("heatflow",)),
    "unknown unit role": (_study_text().replace(
        'mass = "5 mg"', 'mass = "5 mg"\nunits = { temp = "K" }'), ("temp",)),
    "kind typo": (_study_text().replace('"isothermal"', '"isotermal"'), ("isotermal",)),
    "bare number": (_study_text().replace('"125 degC"', "125"), ("unit",)),
    "unit of the wrong kind": (_study_text().replace('"125 degC"', '"125 mg"'),
                               ("temperature",)),
    "single brackets": (_study_text().replace("[[run]]", "[run]"), ("[[run]]",)),
    "no runs": ('[study]\nname = "x"\n', ("no runs",)),
    "syntax error": (_study_text().replace('"run.csv"', '"run.csv'), ("line 2",)),
    "duplicate run names": (_study_text(name="a") + _study_text(name="a"), ("'a'", "unique")),
    "name with a slash": (_study_text(name="../escape"), ("../escape",)),
    "group with a slash": (_study_text().replace('mass = "5 mg"', 'group = "a/b"'), ("a/b",)),
    "output folder in [analysis]": ('[analysis]\nout = "/tmp/elsewhere"\n' + _study_text(),
                                    ("out", "--out")),
    "output_dir in [analysis]": ('[analysis]\noutput_dir = "../x"\n' + _study_text(),
                                 ("output_dir", "--out")),
    "out key in [study]": ('[study]\nout = "/tmp/elsewhere"\n' + _study_text(), ("out",)),
    "text for a fraction": ('[analysis]\nrun_to_run_cv = "8 %"\n' + _study_text(),
                            ("run_to_run_cv", "fraction")),
    "fraction above one": ('[analysis]\nrun_to_run_cv = 8\n' + _study_text(),
                           ("run_to_run_cv",)),
    "quantity for tm0_sd_K": ('[analysis]\ntm0_sd_K = "2 K"\n' + _study_text(),
                              ("tm0_sd_K",)),
    "text for a switch": ('[analysis]\nkissinger = "yes"\n' + _study_text(),
                          ("kissinger", "true or false")),
    "number for a group": ('[analysis]\nreference = 1\n' + _study_text(), ("reference",)),
    "analysis not a table": ('analysis = 3\n' + _study_text(), ("[analysis]",)),
}


@pytest.mark.parametrize("case", sorted(STUDY_MISTAKES))
def test_study_file_mistakes(tmp_path, case):
    text, words = STUDY_MISTAKES[case]
    _write(tmp_path / "run.csv", GOOD_TEXT)
    study = _write(tmp_path / "study.toml", text)
    out = tmp_path / "o"
    _one_line_error(_invoke(["analyze", study, "--out", out, "--fast"]), "study.toml", *words)
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run.csv", "study.toml"]


def test_typo_in_an_analysis_option_is_refused(tmp_path):
    _write(tmp_path / "run.csv", GOOD_TEXT)
    study = _write(tmp_path / "study.toml", '[analysis]\nrefrence = "neat"\n' + _study_text())
    _one_line_error(_invoke(["analyze", study, "--out", tmp_path / "o", "--fast"]),
                    "study.toml", "refrence")


def test_study_mistake_in_a_subprocess(tmp_path):
    _write(tmp_path / "run.csv", GOOD_TEXT)
    study = _write(tmp_path / "study.toml", STUDY_MISTAKES["typo in a run key"][0])
    proc = subprocess.run([*_crystkin(), "analyze", str(study), "--out", str(tmp_path / "o")],
                          capture_output=True, text=True, timeout=120, cwd=tmp_path)
    assert proc.returncode == 2
    assert proc.stderr.strip().count("\n") == 0, proc.stderr
    assert "study.toml" in proc.stderr and "temprature" in proc.stderr
    assert "Traceback" not in proc.stderr + proc.stdout


def _crystkin():
    exe = Path(sys.executable).with_name("crystkin")
    if exe.exists() and os.access(exe, os.X_OK):
        return [str(exe)]
    return [sys.executable, "-m", "crystkin_cli.main"]


# -- random tables through the whole of `peek` (read, guess the kind, prepare, print) --------

@st.composite
def _hostile_tables(draw):
    n = draw(st.integers(10, 400))
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    t = np.cumsum(rng.uniform(0.1, 2.0, n)) if draw(st.booleans()) else np.arange(n) * 0.5
    u = t / t[-1]
    T = draw(st.sampled_from([
        np.full(n, 125.0), 180.0 - 100.0 * u, 50.0 + 150.0 * u, 125.0 + rng.normal(0, 3, n),
        np.where(u < 0.5, 125.0, 160.0), np.full(n, 1e30), np.full(n, -300.0)]))
    shape = draw(st.sampled_from(["peak", "dip", "noise", "flat", "step", "spike", "two"]))
    g = np.exp(-0.5 * ((u - draw(st.floats(0.1, 0.9))) / draw(st.floats(0.01, 0.3))) ** 2)
    q = {"peak": g, "dip": -g, "noise": rng.normal(size=n), "flat": np.zeros(n),
         "step": (u > 0.5).astype(float), "spike": np.eye(1, n, n // 2)[0],
         "two": g - np.exp(-0.5 * ((u - 0.8) / 0.05) ** 2)}[shape]
    q = q * draw(st.sampled_from([1e-30, 1.0, 1e30])) + 1e-3 * rng.normal(size=n)
    return t, T, q


@settings(max_examples=int(os.environ.get("CRYSTKIN_HOSTILE_EXAMPLES", "40")), deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(data=_hostile_tables(), mass=st.sampled_from([None, "5 mg"]))
def test_peek_on_hostile_tables(tmp_path, data, mass):
    t, T, q = data
    lines = [HEADER, *(f"{float(a) / 60!r},{float(b)!r},{float(c)!r}"
                       for a, b, c in zip(t, T, q, strict=True))]
    f = _write(tmp_path / "table.csv", "\n".join(lines) + "\n")
    r = _invoke(["peek", f] + (["--mass", mass] if mass else []))
    if r.exit_code != 0:
        _one_line_error(r, "table.csv")
    else:
        assert "kind:" in r.output


# -- downstream of a valid preparation: a small but real signal ----------------------------

def test_avrami_fit_does_not_depend_on_the_signal_unit():
    """The same invented run with its heat flow multiplied by 1e-4 (1 mW -> 0.1 uW peak).

    X(t), n and t_half are ratios of heat-flow integrals, so a change of unit cannot change
    them (definition of relative crystallinity); only the enthalpy scales."""
    import warnings

    from kinetics.analyses.isothermal import fit_isotherm
    from kinetics.dataset import RunInfo, Trace

    t = np.arange(600) * 0.5
    q = 1e-3 * (np.exp(-0.5 * ((t - 150.0) / 20.0) ** 2)
                + 1e-3 * np.random.default_rng(0).normal(size=t.size))
    rows = {}
    for scale in (1.0, 1e-4):
        tr = Trace(RunInfo("r", "isothermal", temperature=398.15, mass=5e-6, source="r.csv"),
                   t, np.full(t.size, 398.15), q * scale)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            rows[scale] = fit_isotherm(tr, sample=False).row()
    assert rows[1e-4]["n"] == pytest.approx(rows[1.0]["n"], rel=1e-3)
    assert rows[1e-4]["t_half_s"] == pytest.approx(rows[1.0]["t_half_s"], rel=1e-3)


# -- the other readers: growth-rate and radius tables, cooling profiles --------------------

_NEAR_TABLE = "0123456789.,;\t -+eE\n:ab°C()[]/mWTtimeTemperatureratehalfRradius µmsKdegC"
_HEADS = ["", "T (degC),t_half (s)\n", "Temperature (°C),G (um/min)\n",
          "Time (s),Temperature (°C)\n", "t (min),R (um)\n", "Tc (degC),time (s),radius (um)\n"]


@settings(max_examples=int(os.environ.get("CRYSTKIN_HOSTILE_EXAMPLES", "40")), deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(head=st.sampled_from(_HEADS), text=st.text(alphabet=_NEAR_TABLE, max_size=600),
       blob=st.one_of(st.none(), st.binary(max_size=300)),
       reader=st.sampled_from(["rate", "radius", "profile"]),
       suffix=st.sampled_from([".csv", ".txt", ".xlsx"]))
def test_other_readers_on_garbage(tmp_path, head, text, blob, reader, suffix):
    from kinetics.errors import CrystkinInputError
    from kinetics.io.growth import read_radius_table, read_rate_table
    from kinetics.io.profile import read_profile

    f = _write(tmp_path / f"table{suffix}", blob if blob is not None else head + text)
    fn = {"rate": read_rate_table, "radius": read_radius_table, "profile": read_profile}[reader]
    try:
        fn(f)
    except CrystkinInputError as exc:
        assert "\n" not in str(exc) and f.name in str(exc), str(exc)


def test_damaged_workbook_for_the_growth_readers(tmp_path):
    from kinetics.errors import CrystkinInputError
    from kinetics.io.growth import read_radius_table, read_rate_table

    f = _write(tmp_path / "rates.xlsx", b"PK\x03\x04" + b"\x00" * 100)
    for fn in (read_rate_table, read_radius_table):
        with pytest.raises(CrystkinInputError, match="rates.xlsx.*workbook"):
            fn(f)


def test_interval_width_does_not_depend_on_the_signal_unit():
    """Same run, heat flow times 1e-10: the noise scales with the signal, so the relative
    uncertainty of n and t_half must stay the same (the likelihood is scale-free)."""
    import warnings

    from kinetics.analyses.isothermal import fit_isotherm
    from kinetics.dataset import RunInfo, Trace

    t = np.arange(600) * 0.5
    q = 1e-3 * (np.exp(-0.5 * ((t - 150.0) / 20.0) ** 2)
                + 1e-3 * np.random.default_rng(0).normal(size=t.size))
    widths = {}
    for scale in (1.0, 1e-10):
        tr = Trace(RunInfo("r", "isothermal", temperature=398.15, mass=5e-6, source="r.csv"),
                   t, np.full(t.size, 398.15), q * scale)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            row = fit_isotherm(tr, sample=False).row()
        widths[scale] = row["n_hi95"] - row["n_lo95"]
    assert widths[1.0] > 0
    assert widths[1e-10] == pytest.approx(widths[1.0], rel=0.05)
