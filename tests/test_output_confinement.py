"""A study file never decides where outputs go (invented runs; CLI with --fast).

Run names and groups become parts of output file names; a study file that tries to
reach outside the output folder (absolute paths, ``../``, path separators, leading
dots, an ``[analysis]`` key naming a folder) must write nothing outside the folder the
user names with ``--out``. The check is a snapshot of the whole parent folder (every
path, file size and SHA-256) and of a sibling folder, taken before and after: the only
difference allowed is the output folder itself. Existing outputs are replaced only with
``--overwrite``, and never a folder crystkin did not write, never an input, never
through a symbolic link.
"""

from __future__ import annotations

import hashlib
import math
import os
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from crystkin_cli.main import main

import kinetics.workflow


def _run_text(seed=0, t_half_shift=0.0):
    t = np.arange(600) * 0.5
    q = np.exp(-0.5 * ((t - 150.0 - t_half_shift) / 20.0) ** 2)
    q = q + 1e-3 * np.random.default_rng(seed).normal(size=t.size)
    rows = [f"{float(a) / 60!r},125.0,{float(b)!r}" for a, b in zip(t, q, strict=True)]
    return "\n".join(["Sample mass: 5 mg", "Time (min),Temperature (°C),Heat flow (mW)",
                      *rows]) + "\n"


def _run_block(name=None, file="raw/run.csv", group=None, temperature="125 degC"):
    lines = ["[[run]]"]
    if name is not None:
        lines.append(f"name = {_toml_str(name)}")
    lines += [f"file = {_toml_str(file)}", 'kind = "isothermal"',
              f'temperature = "{temperature}"', 'mass = "5 mg"']
    if group is not None:
        lines.append(f"group = {_toml_str(group)}")
    return "\n".join(lines) + "\n"


def _toml_str(s: str) -> str:
    return '"' + s.replace("\\", "\\\\").replace('"', '\\"').replace("\x00", "\\u0000") + '"'


def snapshot(root: Path) -> dict:
    """Every path under ``root``: kind, size and content hash (links by their target)."""
    out = {}
    for dirpath, dirnames, filenames in os.walk(root, followlinks=False):
        for name in dirnames + filenames:
            p = Path(dirpath) / name
            rel = p.relative_to(root).as_posix()
            if p.is_symlink():
                out[rel] = ("link", os.readlink(p))
            elif p.is_dir():
                out[rel] = ("dir",)
            else:
                data = p.read_bytes()
                out[rel] = ("file", len(data), hashlib.sha256(data).hexdigest())
    return out


@pytest.fixture
def lab(tmp_path, monkeypatch):
    """tmp_path/{study/(raw/run.csv), sibling/notes.txt}; the current folder is study/."""
    study = tmp_path / "study"
    (study / "raw").mkdir(parents=True)
    (study / "raw" / "run.csv").write_text(_run_text(), encoding="utf-8")
    (study / "raw" / ".hidden.csv").write_text(_run_text(seed=1), encoding="utf-8")
    sibling = tmp_path / "sibling"
    sibling.mkdir()
    (sibling / "notes.txt").write_text("not to be touched\n")
    monkeypatch.chdir(study)
    return tmp_path


def _analyze(lab, text, out, *extra):
    f = lab / "study" / "study.toml"
    f.write_text(text, encoding="utf-8")
    before = snapshot(lab)
    r = CliRunner().invoke(main, ["analyze", str(f), "--out", str(out), "--fast", *extra])
    assert r.exception is None or isinstance(r.exception, SystemExit), repr(r.exception)
    return r, before


def _outside(snap: dict, out_rel: str) -> dict:
    return {k: v for k, v in snap.items() if k != out_rel and not k.startswith(out_rel + "/")}


# -- hostile names: refused, nothing written ------------------------------------------------

def _hostile_names(lab):
    sib = (lab / "sibling").as_posix()
    return [
        f"{sib}/evil",          # absolute, into the sibling folder
        "/evil",                # absolute, at the root
        "../evil", "../../evil", "../sibling/evil", "ok/../../evil",
        "a/b", "a\\b", "..\\evil", "C:\\evil", "~/evil",
        ".hidden", ".", "..", "...", "-rf", "x..y", "evil\x00.csv", "tab\tname", "new\nline",
        "a" * 129, "",
    ]


@pytest.mark.parametrize("where", ["name", "group"])
def test_hostile_run_names_and_groups_write_nothing(lab, where):
    out = lab / "out"
    for bad in _hostile_names(lab):
        block = _run_block(name=bad) if where == "name" else _run_block(name="r1", group=bad)
        r, before = _analyze(lab, block, out)
        assert r.exit_code == 2, (bad, r.output)
        msg = r.stderr.strip()
        assert len(msg.splitlines()) == 1 and "study.toml" in msg, (bad, msg)
        assert snapshot(lab) == before, bad
        assert not out.exists()


@pytest.mark.parametrize("name", ["../evil", "/evil", "a/b", "a\\b", ".hidden", ""])
def test_hostile_study_names_write_nothing(lab, name):
    out = lab / "out"
    r, before = _analyze(lab, f"[study]\nname = {_toml_str(name)}\n" + _run_block(name="r1"),
                         out)
    assert r.exit_code == 2, r.output
    assert "study name" in r.stderr
    assert snapshot(lab) == before


def test_file_name_used_as_run_name_may_not_start_with_a_dot(lab):
    out = lab / "out"
    r, before = _analyze(lab, _run_block(file="raw/.hidden.csv"), out)
    assert r.exit_code == 2
    assert ".hidden" in r.stderr and 'name = "..."' in r.stderr
    assert snapshot(lab) == before


@pytest.mark.parametrize("key", ["out", "output", "output_dir", "OUT", "folder"])
def test_analysis_table_cannot_name_an_output_folder(lab, key):
    target = (lab / "sibling" / "elsewhere").as_posix()
    out = lab / "out"
    r, before = _analyze(lab, f'[analysis]\n{key} = "{target}"\n' + _run_block(name="r1"), out)
    assert r.exit_code == 2
    assert "--out" in r.stderr and key in r.stderr
    assert snapshot(lab) == before
    assert not out.exists()


# -- safe but unusual names: everything lands under --out ----------------------------------

def test_unusual_safe_names_stay_inside_the_output_folder(lab):
    long_name = "r" + "x" * 127  # 128 characters, the longest allowed
    # [study] name is free text for the report and never becomes a path
    text = ('[study]\nname = "x..y ~ C: evil"\n'
            + _run_block(name="iso.125_A-1", group="grp.N-A")
            + _run_block(name=long_name, group="grp.N-A"))
    (lab / "study" / "raw" / "run2.csv").write_text(_run_text(seed=2, t_half_shift=5.0))
    text = text.replace('file = "raw/run.csv"', 'file = "raw/run2.csv"', 1)
    out = lab / "results" / "first"
    r, before = _analyze(lab, text, out)
    assert r.exit_code == 0, r.output
    after = snapshot(lab)
    added = set(after) - set(before)
    assert added and all(k == "results" or k.startswith("results/first") for k in added), added
    assert _outside(after, "results/first") == {**before, "results": ("dir",)}
    table = (out / "tables" / "isothermal_runs.csv").read_text()
    assert "iso.125_A-1" in table and long_name in table
    assert all(len(p.name) <= 255 for p in out.rglob("*"))
    for p in out.rglob("*"):
        real = Path(os.path.realpath(p))
        assert Path(os.path.realpath(out)) in real.parents, p


# -- existing outputs: replaced only when asked --------------------------------------------

def test_existing_output_replaced_only_with_overwrite(lab):
    out = lab / "out"
    text = _run_block(name="r1")
    r, _ = _analyze(lab, text, out)
    assert r.exit_code == 0, r.output
    # the fixture run is analysed, not refused early: its enthalpy is the Gaussian area
    # h s sqrt(2 pi) with h = 1 mW, s = 20 s, on 5 mg = 10.03 J/g (by hand)
    table = pd.read_csv(out / "tables" / "isothermal_runs.csv")
    expected = 1e-3 * 20.0 * math.sqrt(2 * math.pi) / 5e-6 / 1e3
    assert table["enthalpy_J_per_g"].iloc[0] == pytest.approx(expected, rel=0.02)
    (out / "my-note.txt").write_text("added by the user\n")
    first = snapshot(out)

    r, before = _analyze(lab, text, out)
    assert r.exit_code == 2 and "--overwrite" in r.stderr
    assert snapshot(lab) == before and snapshot(out) == first

    r, before = _analyze(lab, text, out, "--overwrite")
    assert r.exit_code == 0, r.output
    after = snapshot(lab)
    assert _outside(after, "out") == _outside(before, "out")
    assert not (out / "my-note.txt").exists()  # the old folder was replaced as a whole
    same = {k: v for k, v in snapshot(out).items() if k.startswith("tables/")}
    assert same == {k: v for k, v in first.items() if k.startswith("tables/")}


def test_existing_empty_folder_is_used(lab):
    out = lab / "empty"
    out.mkdir()
    r, before = _analyze(lab, _run_block(name="r1"), out)
    assert r.exit_code == 0, r.output
    assert (out / "tables" / "isothermal_runs.csv").is_file()
    assert _outside(snapshot(lab), "empty") == _outside(before, "empty")


def _error_line(r):
    lines = [ln for ln in r.stderr.splitlines() if ln.startswith("crystkin: error:")]
    assert len(lines) == 1, r.stderr
    return lines[0]


def _stray(after: dict, before: dict) -> set:
    """Paths added or changed, ignoring the resume cache beside --out (which
    test_refused_destination_leaves_nothing_behind covers)."""
    return {k for k in set(after) | set(before)
            if after.get(k) != before.get(k) and ".crystkin-resume" not in k}


def test_foreign_folder_is_never_replaced(lab):
    out = lab / "thesis"
    out.mkdir()
    (out / "chapter1.tex").write_text("precious\n")
    for extra in ((), ("--overwrite",)):
        r, before = _analyze(lab, _run_block(name="r1"), out, *extra)
        assert r.exit_code == 2, r.output
        assert "thesis" in _error_line(r)
        assert _stray(snapshot(lab), before) == set()
    assert sorted(p.name for p in out.iterdir()) == ["chapter1.tex"]
    assert (out / "chapter1.tex").read_text() == "precious\n"


def test_output_folder_holding_the_inputs_is_refused(lab):
    for out, extra in ((lab / "study", ("--overwrite",)), (lab / "study" / "raw", ()),
                       (lab, ("--overwrite",)), (Path("."), ("--overwrite",))):
        r, before = _analyze(lab, _run_block(name="r1"), out, *extra)
        assert r.exit_code == 2, (out, r.output)
        _error_line(r)
        assert _stray(snapshot(lab), before) == set(), out


def test_output_path_that_is_a_file(lab):
    out = lab / "sibling" / "notes.txt"
    for extra in ((), ("--overwrite",)):
        r, before = _analyze(lab, _run_block(name="r1"), out, *extra)
        assert r.exit_code == 2
        assert "notes.txt" in _error_line(r)
        assert _stray(snapshot(lab), before) == set()
    assert out.read_text() == "not to be touched\n"


@pytest.mark.skipif(not hasattr(os, "symlink"), reason="needs symbolic links")
def test_output_through_a_symbolic_link_is_refused(lab):
    target = lab / "sibling"
    link = lab / "link-out"
    link.symlink_to(target, target_is_directory=True)
    for extra in ((), ("--overwrite",)):
        r, before = _analyze(lab, _run_block(name="r1"), link, *extra)
        assert r.exit_code == 2, r.output
        assert "link-out" in _error_line(r)
        assert _stray(snapshot(lab), before) == set()
    assert sorted(p.name for p in target.iterdir()) == ["notes.txt"]


def _refused_destination(lab, kind):
    if kind == "foreign folder":
        out = lab / "thesis"
        out.mkdir()
        (out / "chapter1.tex").write_text("precious\n")
    elif kind == "inputs folder":
        out = lab / "study"
    elif kind == "file":
        out = lab / "sibling" / "notes.txt"
    else:
        out = lab / "link-out"
        out.symlink_to(lab / "sibling", target_is_directory=True)
    return out


@pytest.mark.parametrize("kind", ["foreign folder", "inputs folder", "file", "link"])
def test_refused_destination_leaves_nothing_behind(lab, monkeypatch, kind):
    out = _refused_destination(lab, kind)
    called = []
    real = kinetics.workflow.analyse_study
    monkeypatch.setattr(kinetics.workflow, "analyse_study",
                        lambda *a, **k: called.append(1) or real(*a, **k))
    r, before = _analyze(lab, _run_block(name="r1"), out, "--overwrite")
    assert r.exit_code == 2
    assert snapshot(lab) == before
    assert called == []


def test_early_destination_check_gives_the_final_answer(lab):
    """What the CLI needs: the writer's refusals, available before any work."""
    from kinetics.errors import CrystkinInputError
    from kinetics.io.writers import check_output_destination

    inputs = [lab / "study" / "raw" / "run.csv", lab / "study" / "study.toml"]
    for kind in ("foreign folder", "inputs folder", "file", "link"):
        out = _refused_destination(lab, kind)
        before = snapshot(lab)
        with pytest.raises(CrystkinInputError):
            check_output_destination(out, overwrite=True, protect=inputs)
        assert snapshot(lab) == before
    assert check_output_destination(lab / "new", protect=inputs) == lab / "new"
    (lab / "empty").mkdir()
    check_output_destination(lab / "empty", protect=inputs)
