"""Property tests for the readers (hypothesis; invented random tables).

* Round trip: a random numeric table written as text and read back gives exactly the
  hand conversion to SI (factors from the SI Brochure, 9th ed.: 1 min = 60 s,
  1 h = 3600 s, T/K = t/°C + 273.15, 1 mW = 1e-3 W). The values are written with
  ``repr`` (shortest round-tripping decimal), so parsing is exact and the converted
  value must equal ``x * factor + offset`` bit for bit.
* Robustness: random bytes, random near-tables and truncated files give a Trace or a
  CrystkinInputError, never another exception type or a hang.
"""

from __future__ import annotations

import io
import signal
import sys

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from kinetics.dataset import Trace
from kinetics.errors import CrystkinInputError
from kinetics.io.study import read_study
from kinetics.io.tables import read_trace

TIME_UNITS = [("min", 60.0), ("s", 1.0), ("h", 3600.0)]
TEMP_UNITS = [("°C", 273.15), ("degC", 273.15), ("K", 0.0)]
HF_UNITS = [("mW", 1e-3), ("W", 1.0), ("uW", 1e-6)]
HEADER_STYLES = ["{name} ({unit})", "{name} [{unit}]", "{name}/{unit}"]
LAYOUTS = [(",", "."), (";", "."), ("\t", "."), (";", ","), ("\t", ",")]

PROPS = settings(max_examples=50, deadline=None,
                 suppress_health_check=[HealthCheck.function_scoped_fixture,
                                        HealthCheck.too_slow])


@pytest.fixture(autouse=True)
def no_hang():
    """Fail instead of hanging: 20 s per test on POSIX."""
    if sys.platform == "win32" or not hasattr(signal, "SIGALRM"):
        yield
        return

    def _timeout(signum, frame):
        raise TimeoutError("reader took too long")

    old = signal.signal(signal.SIGALRM, _timeout)
    signal.alarm(20)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


finite = st.floats(min_value=-1e4, max_value=1e4, allow_nan=False, allow_infinity=False,
                   allow_subnormal=False)


@st.composite
def tables(draw):
    n = draw(st.integers(min_value=10, max_value=40))
    steps = draw(st.lists(st.floats(min_value=1e-3, max_value=100.0, allow_subnormal=False),
                          min_size=n, max_size=n))
    t = np.cumsum(np.array(steps))
    T = np.array(draw(st.lists(st.floats(min_value=-100.0, max_value=400.0), min_size=n,
                               max_size=n)))
    q = np.array(draw(st.lists(finite, min_size=n, max_size=n)))
    return t, T, q


@PROPS
@given(data=tables(), tu=st.sampled_from(TIME_UNITS), Tu=st.sampled_from(TEMP_UNITS),
       qu=st.sampled_from(HF_UNITS), style=st.sampled_from(HEADER_STYLES),
       layout=st.sampled_from(LAYOUTS), meta=st.booleans(), suffix=st.sampled_from(
           [".csv", ".txt", ".tsv", ".dat"]))
def test_round_trip_exact(tmp_path, data, tu, Tu, qu, style, layout, meta, suffix):
    t, T, q = data
    if Tu[1] == 0.0:
        T = T + 273.15  # kelvin: stay above absolute zero (refused, see below)
    sep, dec = layout

    def fmt(x):
        s = repr(float(x))
        return s.replace(".", ",") if dec == "," else s

    header = sep.join(style.format(name=n, unit=u) for n, u in
                      (("Time", tu[0]), ("Temperature", Tu[0]), ("Heat flow", qu[0])))
    lines = (["Instrument: invented test data", "Sample mass: 5 mg", ""] if meta else [])
    first = len(lines) + 2
    lines.append(header)
    lines += [sep.join(fmt(v) for v in row) for row in zip(t, T, q, strict=True)]
    f = tmp_path / f"round{suffix}"
    f.write_text("\n".join(lines) + "\n", encoding="utf-8")

    tr = read_trace(f)
    # exact: same decimal text, same multiplication as the definition
    np.testing.assert_array_equal(tr.time, t * tu[1])
    np.testing.assert_array_equal(tr.temperature, T * 1.0 + Tu[1])
    np.testing.assert_array_equal(tr.heat_flow, q * qu[1])
    assert tr.info.rows == (first, first + len(t) - 1)
    assert tr.info.mass == (pytest.approx(5e-6, rel=1e-15) if meta else None)


def _check_outcome(path, **kwargs):
    try:
        out = read_trace(path, **kwargs)
    except CrystkinInputError as exc:
        msg = str(exc)
        assert path.name in msg
        assert "\n" not in msg
        return None
    assert isinstance(out, Trace)
    return out


@PROPS
@given(blob=st.binary(max_size=3000),
       suffix=st.sampled_from([".csv", ".txt", ".tsv", ".xlsx", ".dat"]))
def test_garbage_bytes(tmp_path, blob, suffix):
    f = tmp_path / f"garbage{suffix}"
    f.write_bytes(blob)
    _check_outcome(f)


near_table_text = st.text(alphabet="0123456789.,;\t -+eE\n:ab°C()[]/mWTtime", max_size=1500)


@PROPS
@given(text=near_table_text, prefix=st.booleans())
def test_near_tables(tmp_path, text, prefix):
    head = "Time (min);Temperature (°C);Heat flow (mW)\n" if prefix else ""
    f = tmp_path / "near.csv"
    f.write_text(head + text, encoding="utf-8")
    _check_outcome(f)


def _valid_csv() -> bytes:
    t = [0.5 * k for k in range(30)]
    lines = ["Sample mass: 5 mg", "Time (min),Temperature (°C),Heat Flow (mW)"]
    lines += [f"{a!r},{125.0 + 0.01 * a!r},{float(np.sin(a))!r}" for a in t]
    return ("\n".join(lines) + "\n").encode()


def _valid_xlsx() -> bytes:
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["Time (min)", "Temperature (°C)", "Heat Flow (mW)"])
    for a in range(30):
        ws.append([a * 0.5, 125.0, float(np.sin(a))])
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


VALID_CSV = _valid_csv()
VALID_XLSX = _valid_xlsx()  # made once: a workbook's bytes carry a time stamp


def test_untruncated_files_are_valid(tmp_path):
    (tmp_path / "whole.csv").write_bytes(VALID_CSV)
    (tmp_path / "whole.xlsx").write_bytes(VALID_XLSX)
    assert read_trace(tmp_path / "whole.csv").n_points == 30
    assert read_trace(tmp_path / "whole.xlsx").n_points == 30


@PROPS
@given(cut=st.integers(min_value=0, max_value=len(VALID_CSV)))
def test_truncated_csv(tmp_path, cut):
    f = tmp_path / "cut.csv"
    f.write_bytes(VALID_CSV[:cut])
    _check_outcome(f)


@settings(max_examples=30, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_truncated_or_damaged_xlsx(tmp_path, data):
    blob = VALID_XLSX
    cut = data.draw(st.integers(min_value=0, max_value=len(blob)))
    flip = data.draw(st.integers(min_value=0, max_value=len(blob) - 1))
    damaged = bytearray(blob[:cut] if cut < len(blob) else blob)
    if cut == len(blob) and damaged:
        damaged[flip % len(damaged)] ^= 0xFF
    f = tmp_path / "cut.xlsx"
    f.write_bytes(bytes(damaged))
    _check_outcome(f)


@PROPS
@given(text=st.text(max_size=800))
def test_garbage_study_file(tmp_path, text):
    f = tmp_path / "study.toml"
    f.write_text(text, encoding="utf-8")
    with pytest.raises(CrystkinInputError) as err:
        read_study(f)
    assert "study.toml" in str(err.value)


@PROPS
@given(T_bad=st.floats(min_value=-1e6, max_value=0.0, allow_nan=False),
       row=st.integers(min_value=0, max_value=19))
def test_temperature_at_or_below_absolute_zero_is_refused_with_its_row(tmp_path, T_bad, row):
    """A kelvin column with a value <= 0 K: one line naming the file, the row and the unit."""
    T = np.full(20, 400.0)
    T[row] = T_bad
    lines = ["Time (s),Temperature (K),Heat flow (mW)"]
    lines += [f"{i:.1f},{float(v)!r},0.5" for i, v in enumerate(T)]
    f = tmp_path / "cold.csv"
    f.write_text("\n".join(lines) + "\n", encoding="utf-8")
    with pytest.raises(CrystkinInputError) as err:
        read_trace(f)
    msg = str(err.value)
    assert "cold.csv" in msg and "absolute zero" in msg and f"row {row + 2}" in msg
