"""End-to-end checks of the command line: demo, analyze, peek and bad input.

The demo data are invented (kinetics.demo); these tests check that the
pipeline runs and fails cleanly, not scientific values.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from crystkin_cli.main import main

from kinetics.demo import write_demo_study


def _crystkin():
    exe = Path(sys.executable).with_name("crystkin")
    return [str(exe)] if exe.exists() else [sys.executable, "-m", "crystkin_cli.main"]


@pytest.fixture(scope="module")
def demo_study(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo-in")
    return write_demo_study(folder, quick=True)


def test_demo_console_script_end_to_end(tmp_path):
    """The installed console script runs the quick demo on two processes and writes every
    output; data-quality findings from the workers go to the report, not the terminal."""
    out = tmp_path / "demo-out"
    proc = subprocess.run([*_crystkin(), "demo", "--out", str(out), "--quick", "--jobs", "2"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    assert "Warning" not in proc.stderr, proc.stderr
    table = pd.read_csv(out / "tables" / "isothermal_runs.csv")
    assert len(table) == 12
    for col in ("n", "n_lo95", "n_hi95", "t_half_s", "t_half_s_lo95", "t_half_s_hi95",
                "k_per_min_n", "k_per_s_n", "induction_time_s", "enthalpy_J_per_g",
                "t_peak_s", "t_half_measured_s", "n_linear", "r2_linear", "converged"):
        assert col in table.columns, col
    assert (table["n_lo95"] <= table["n"]).all() and (table["n"] <= table["n_hi95"]).all()
    assert (out / "report.md").exists() and (out / "provenance.json").exists()
    assert any((out / "figures").glob("*.png"))
    draws = np.load(out / "draws" / "isothermal.npz")
    assert any(k.endswith("/t_half_s") for k in draws.files)
    assert (out / "demo_input" / "study.toml").exists()


def test_analyze_writes_and_refuses_to_overwrite(tmp_path, demo_study):
    runner = CliRunner()
    out = tmp_path / "res"
    r = runner.invoke(main, ["analyze", str(demo_study), "--out", str(out), "--fast",
                             "--skip-rate-model"])
    assert r.exit_code == 0, r.output
    first = (out / "tables" / "isothermal_runs.csv").read_bytes()
    r2 = runner.invoke(main, ["analyze", str(demo_study), "--out", str(out), "--fast",
                              "--skip-rate-model"])
    assert r2.exit_code == 2
    assert "exists" in r2.stderr and "Traceback" not in r2.output
    r3 = runner.invoke(main, ["analyze", str(demo_study), "--out", str(out), "--fast",
                              "--overwrite", "--skip-rate-model"])
    assert r3.exit_code == 0, r3.output
    assert (out / "tables" / "isothermal_runs.csv").read_bytes() == first


def _two_run_study(demo_study, tmp_path):
    blocks = demo_study.read_text().split("[[run]]")
    raw = demo_study.parent / "raw"
    text = "[[run]]".join(blocks[:3]).replace('file = "raw/', f'file = "{raw.as_posix()}/')
    path = tmp_path / "two.toml"
    path.write_text(text)
    return path


def test_same_seed_gives_byte_identical_tables(tmp_path, demo_study):
    runner = CliRunner()
    study = _two_run_study(demo_study, tmp_path)
    outs = []
    for i in range(2):
        out = tmp_path / f"r{i}"
        r = runner.invoke(main, ["analyze", str(study), "--out", str(out), "--seed", "7",
                                 "--skip-rate-model"])
        assert r.exit_code == 0, r.output
        outs.append({p.relative_to(out).as_posix(): p.read_bytes()
                     for p in sorted((out / "tables").iterdir())})
    assert outs[0] == outs[1]
    import json
    stamp = json.loads(outs[0]["tables/made_by.json"])
    assert stamp["seed"] == 7 and stamp["crystkin"] and "sample" in stamp["options"]


def test_one_bad_run_is_listed_and_others_are_analysed(tmp_path, demo_study):
    text = demo_study.read_text()
    bad = tmp_path / "study.toml"
    raw = demo_study.parent / "raw"
    text = text.replace('file = "raw/', f'file = "{raw.as_posix()}/')
    text += ('\n[[run]]\nname = "missing-run"\nfile = "nowhere.csv"\nkind = "isothermal"\n'
             'temperature = "130 degC"\nmass = "5 mg"\n')
    bad.write_text(text)
    r = CliRunner().invoke(main, ["analyze", str(bad), "--out", str(tmp_path / "o"), "--fast",
                                  "--skip-rate-model"])
    assert r.exit_code == 1, r.output
    assert "missing-run" in r.stderr and "nowhere.csv" in r.stderr
    t = pd.read_csv(tmp_path / "o" / "tables" / "isothermal_runs.csv")
    assert len(t) == 12
    f = pd.read_csv(tmp_path / "o" / "tables" / "failures.csv")
    assert f["run"].tolist() == ["missing-run"]


@pytest.mark.parametrize("content, expect", [
    ("", "empty"),
    ("time (s),temperature (C)\n1,2\n3,4\n", "heat"),
    ("time (s),temperature (C),heat flow (mW)\n" + "".join(
        f"{i},125,{'abc' if i == 5 else 0.1}\n" for i in range(20)), "row"),
    ("time (s),temperature (C),heat flow (mW)\n" + "".join(
        f"{20 - i},125,0.1\n" for i in range(20)), "time"),
    ("time (s),temperature (C),heat flow (mW)\n" + "".join(
        f"{i},125,{'' if i == 7 else 0.1}\n" for i in range(20)), "row"),
    ("time (parsec),temperature (C),heat flow (mW)\n" + "".join(
        f"{i},125,0.1\n" for i in range(20)), "unit"),
])
def test_peek_bad_files_give_one_line_and_exit_2(tmp_path, content, expect):
    f = tmp_path / "bad.csv"
    f.write_text(content)
    r = CliRunner().invoke(main, ["peek", str(f)])
    assert r.exit_code == 2, r.output
    assert "Traceback" not in r.output
    msg = r.stderr.strip()
    assert len(msg.splitlines()) == 1, msg
    assert "bad.csv" in msg and expect in msg.lower(), msg


def test_peek_reports_detection(demo_study):
    f = next((demo_study.parent / "raw").glob("PX-40_iso132.csv"))
    r = CliRunner().invoke(main, ["peek", str(f), "--mass", "5 mg"])
    assert r.exit_code == 0, r.output
    for word in ("exotherm", "transient", "event", "enthalpy", "J/g", "isothermal"):
        assert word in r.output


def test_analyze_missing_study_file(tmp_path):
    r = CliRunner().invoke(main, ["analyze", str(tmp_path / "nope.toml"), "--out",
                                  str(tmp_path / "o")])
    assert r.exit_code == 2
    assert "nope.toml" in r.stderr and "Traceback" not in r.output
    assert not (tmp_path / "o").exists()


def test_run_with_no_event_fails_cleanly(tmp_path):
    rng = np.random.default_rng(0)
    f = tmp_path / "flat.csv"
    t = np.arange(0, 600, 0.5)
    f.write_text("time (s),temperature (degC),heat flow (mW)\n" + "".join(
        f"{a},130,{b:.6f}\n" for a, b in zip(t, rng.normal(0, 0.001, t.size), strict=True)))
    r = CliRunner().invoke(main, ["peek", str(f)])
    assert r.exit_code == 2
    assert "flat.csv" in r.stderr and "event" in r.stderr.lower()


def test_export_and_predict_from_an_analysis(tmp_path, demo_study):
    """analyze (least squares) -> export -> predict, each printing the process caution."""
    from kinetics.cautions import PROCESS_CAUTION

    runner = CliRunner()
    res = tmp_path / "res"
    r = runner.invoke(main, ["analyze", str(demo_study), "--out", str(res), "--fast"])
    assert r.exit_code == 0, r.output
    models = sorted((res / "export").glob("*_rate_model.json"))
    assert len(models) == 3
    sim = tmp_path / "sim"
    r = runner.invoke(main, ["export", str(res), "--out", str(sim), "--group", "PX-40",
                             "--t-min", "60 degC", "--t-max", "170 degC", "--step", "2 K"])
    assert r.exit_code == 0, r.output
    assert PROCESS_CAUTION in r.output
    table = pd.read_csv(sim / "PX-40_K_of_T.csv", comment="#")
    assert len(table) == 56 and {"T_K", "K_per_s", "K_per_s_lo95", "K_per_s_hi95"} <= set(table)
    profile = tmp_path / "mold.csv"
    t = np.linspace(0, 60, 301)
    T = 40 + 190 * np.exp(-t / 12.0)
    profile.write_text("time [s],temperature [degC]\n" + "".join(
        f"{a:.3f},{b:.4f}\n" for a, b in zip(t, T, strict=True)))
    r = runner.invoke(main, ["predict", str(sim / "PX-40_rate_model.json"), str(profile),
                             "--out", str(tmp_path / "pred")])
    assert r.exit_code == 0, r.output
    assert "90 %" in r.output and PROCESS_CAUTION in r.output
    targets = pd.read_csv(tmp_path / "pred" / "prediction_targets.csv")
    assert len(targets) == 3
    bad = runner.invoke(main, ["predict", str(profile), "--rate", "10 K/min", "--start",
                               "200 degC", "--end", "50 degC"])
    assert bad.exit_code == 2 and "Traceback" not in bad.output
