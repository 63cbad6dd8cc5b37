"""Writers: atomic output folders, safe file names, byte-stable JSON and tables.

Expected file contents are written out by hand below (RFC 8259 JSON has no NaN, so NaN
and infinities must become null; '%.6g' is C printf formatting with six significant
digits, C11 7.21.6.1).
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from kinetics.errors import CrystkinInputError
from kinetics.io.writers import (
    MARKER_NAME,
    atomic_output_dir,
    safe_child,
    write_json,
    write_table,
)


def listing(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


# -- atomic_output_dir ------------------------------------------------------------------------

def test_success_moves_folder_into_place(tmp_path):
    out = tmp_path / "results"
    with atomic_output_dir(out) as tmp:
        assert tmp.parent == tmp_path and tmp.name.startswith(".")
        assert not out.exists()
        (tmp / "a.txt").write_text("a")
    assert (out / "a.txt").read_text() == "a"
    assert (out / MARKER_NAME).is_file()
    assert listing(tmp_path) == ["results"]


def test_exception_leaves_nothing(tmp_path):
    out = tmp_path / "results"
    with pytest.raises(RuntimeError, match="boom"):
        with atomic_output_dir(out) as tmp:
            (tmp / "half.txt").write_text("half")
            raise RuntimeError("boom")
    assert listing(tmp_path) == []


def test_keyboard_interrupt_leaves_nothing(tmp_path):
    out = tmp_path / "results"
    with pytest.raises(KeyboardInterrupt):
        with atomic_output_dir(out) as tmp:
            (tmp / "half.txt").write_text("half")
            raise KeyboardInterrupt
    assert listing(tmp_path) == []


def test_existing_folder_without_overwrite(tmp_path):
    out = tmp_path / "results"
    out.mkdir()
    (out / "old.txt").write_text("old")
    ran = []
    with pytest.raises(CrystkinInputError,
                       match="output folder .* exists; choose another with --out or pass "
                             "--overwrite"):
        with atomic_output_dir(out):
            ran.append(True)
    assert ran == []  # refused before any work was done
    assert listing(out) == ["old.txt"]


def test_overwrite_replaces_only_on_success(tmp_path):
    out = tmp_path / "results"
    with atomic_output_dir(out) as tmp:
        (tmp / "first.txt").write_text("1")
    with pytest.raises(ValueError):
        with atomic_output_dir(out, overwrite=True) as tmp:
            (tmp / "second.txt").write_text("2")
            raise ValueError("failed half way")
    assert listing(out) == sorted([MARKER_NAME, "first.txt"])  # untouched
    with atomic_output_dir(out, overwrite=True) as tmp:
        (tmp / "second.txt").write_text("2")
    assert listing(out) == sorted([MARKER_NAME, "second.txt"])
    assert listing(tmp_path) == ["results"]  # no temporary or old folders left


def test_overwrite_refuses_foreign_folder(tmp_path):
    out = tmp_path / "my_thesis"
    out.mkdir()
    (out / "chapter1.tex").write_text("precious")
    with pytest.raises(CrystkinInputError, match="not written by crystkin"):
        with atomic_output_dir(out, overwrite=True):
            pass
    assert (out / "chapter1.tex").read_text() == "precious"


def test_overwrite_accepts_empty_folder(tmp_path):
    out = tmp_path / "empty"
    out.mkdir()
    with atomic_output_dir(out, overwrite=True) as tmp:
        (tmp / "x.txt").write_text("x")
    assert (out / "x.txt").exists()


def test_output_path_is_a_file(tmp_path):
    out = tmp_path / "results"
    out.write_text("a file")
    with pytest.raises(CrystkinInputError, match="not a folder"):
        with atomic_output_dir(out, overwrite=True):
            pass
    assert out.read_text() == "a file"


def test_protect_inputs(tmp_path):
    data = tmp_path / "data"
    data.mkdir()
    raw = data / "run.csv"
    raw.write_text("t,T,q\n")
    for out in (data, tmp_path, raw):  # is the input folder, contains the input, is the file
        with pytest.raises(CrystkinInputError, match="inputs are never overwritten"):
            with atomic_output_dir(out, overwrite=True, protect=[raw, data]):
                pass
    assert raw.read_text() == "t,T,q\n"
    # a result folder inside the data folder is fine
    with atomic_output_dir(data / "results", protect=[raw, data]) as tmp:
        (tmp / "ok.txt").write_text("ok")
    assert (data / "results" / "ok.txt").exists()


def test_refuses_to_replace_current_folder(tmp_path, monkeypatch):
    out = tmp_path / "results"
    with atomic_output_dir(out):
        pass
    monkeypatch.chdir(out)
    with pytest.raises(CrystkinInputError, match="current folder"):
        with atomic_output_dir(Path("."), overwrite=True):
            pass


def test_creates_missing_parents(tmp_path):
    out = tmp_path / "a" / "b" / "results"
    with atomic_output_dir(out) as tmp:
        (tmp / "x").write_text("x")
    assert (out / "x").exists()


# -- safe_child -------------------------------------------------------------------------------

@pytest.mark.parametrize("name", ["fits.csv", "iso-125_avrami.json", "K_T.csv", "a.b.c"])
def test_safe_child_accepts(tmp_path, name):
    assert safe_child(tmp_path, name) == tmp_path / name


@pytest.mark.parametrize("name", ["/etc/passwd", "../up.csv", "a/b.csv", "a\\b.csv", "..",
                                  ".", "", ".hidden", "C:evil", "a\x00b", "x" * 200, "a..b",
                                  None, 3])
def test_safe_child_rejects(tmp_path, name):
    with pytest.raises(CrystkinInputError, match="cannot be used as a file name"):
        safe_child(tmp_path, name)


# -- write_json -------------------------------------------------------------------------------

@dataclass(frozen=True)
class _Result:
    name: str
    values: np.ndarray


def test_write_json_numpy_and_nan(tmp_path):
    obj = {
        "b": np.float32(0.5),
        "a": np.int64(3),
        "nan": float("nan"),
        "inf": np.float64(np.inf),
        "arr": np.array([1.0, np.nan, -np.inf, 2.5]),
        "flag": np.bool_(True),
        "tuple": (1, "x"),
        "nested": {"z": [np.int32(1)], 2: "int key", "path": Path("a/b")},
        "result": _Result("r", np.array([[1, 2], [3, 4]])),
    }
    f = write_json(tmp_path / "out.json", obj)
    text = f.read_text(encoding="utf-8")
    expected = """{
  "a": 3,
  "arr": [
    1.0,
    null,
    null,
    2.5
  ],
  "b": 0.5,
  "flag": true,
  "inf": null,
  "nan": null,
  "nested": {
    "2": "int key",
    "path": "a/b",
    "z": [
      1
    ]
  },
  "result": {
    "name": "r",
    "values": [
      [
        1,
        2
      ],
      [
        3,
        4
      ]
    ]
  },
  "tuple": [
    1,
    "x"
  ]
}
"""
    assert text == expected
    json.loads(text, parse_constant=lambda c: pytest.fail(f"non-JSON constant {c}"))


def test_write_json_byte_stable(tmp_path):
    obj = {"y": [0.1, 1e-300, -0.0], "x": "°C"}
    a = write_json(tmp_path / "a.json", obj).read_bytes()
    b = write_json(tmp_path / "b.json", dict(reversed(list(obj.items())))).read_bytes()
    assert a == b
    assert a.endswith(b"}\n")
    assert "°C".encode() in a
    assert listing(tmp_path) == ["a.json", "b.json"]  # no temporary files left


def test_write_json_refuses_unknown_types(tmp_path):
    with pytest.raises(TypeError):
        write_json(tmp_path / "x.json", {"f": object()})
    assert not (tmp_path / "x.json").exists()


# -- write_table ------------------------------------------------------------------------------

def test_write_table_csv_and_markdown(tmp_path):
    df = pd.DataFrame({
        "run": ["iso-125", "iso|130"],
        "t_half_s": [123.456789, np.nan],
        "n": [2, 3],
        "k_per_min_n": [1.23456789e-5, 2.0],
    })
    csv_path, md_path = write_table(df, tmp_path / "fits")
    assert csv_path == tmp_path / "fits.csv" and md_path == tmp_path / "fits.md"
    assert csv_path.read_text(encoding="utf-8") == (
        "run,t_half_s,n,k_per_min_n\n"
        "iso-125,123.457,2,1.23457e-05\n"
        "iso|130,,3,2\n")
    assert md_path.read_text(encoding="utf-8") == (
        "| run | t_half_s | n | k_per_min_n |\n"
        "| --- | ---: | ---: | ---: |\n"
        "| iso-125 | 123.457 | 2 | 1.23457e-05 |\n"
        "| iso\\|130 |  | 3 | 2 |\n")


def test_write_table_named_index_and_formats(tmp_path):
    df = pd.DataFrame({"x": [1.5]}, index=pd.Index(["a"], name="run"))
    (path,) = write_table(df, tmp_path / "t", formats=("csv",))
    assert path.read_text() == "run,x\na,1.5\n"
    assert not (tmp_path / "t.md").exists()
    (md,) = write_table(df, tmp_path / "t", formats="md")
    assert md.read_text() == "| run | x |\n| --- | ---: |\n| a | 1.5 |\n"
    with pytest.raises(CrystkinInputError, match="formats"):
        write_table(df, tmp_path / "t", formats=("xlsx",))


def test_write_table_byte_stable(tmp_path):
    rng = np.random.default_rng(0)
    df = pd.DataFrame(rng.normal(size=(5, 3)), columns=["a", "b", "c"])
    first = [p.read_bytes() for p in write_table(df, tmp_path / "one")]
    second = [p.read_bytes() for p in write_table(df.copy(), tmp_path / "two")]
    assert first == second
    assert all(b"\r" not in b for b in first)


def test_writers_do_not_leave_temp_files_on_error(tmp_path):
    missing = tmp_path / "no_such_folder" / "x.json"
    with pytest.raises(OSError):
        write_json(missing, {"a": 1})
    assert listing(tmp_path) == []
    assert not any(name.startswith(".") for name in os.listdir(tmp_path))
