"""Batches: executors give identical results, interrupted batches resume.

The runs are invented (kinetics.synthetic); these are consistency checks.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd
import pytest

from kinetics.analyses import isothermal as iso
from kinetics.analyses.isothermal import analyse_isotherms
from kinetics.demo import write_demo_study
from kinetics.synthetic import synthetic_isotherm


def _runs(k=4):
    return [synthetic_isotherm(n=2.5, t_half=40.0 + 10 * i, t0=15.0, temperature=400.0 + i,
                               duration=400, seed=10 + i, run_id=f"b{i}")[0] for i in range(k)]


def test_order_does_not_change_results():
    runs = _runs()
    a = analyse_isotherms(runs, seed=3, sample=False).table()
    b = analyse_isotherms(runs[::-1], seed=3, sample=False).table()
    pd.testing.assert_frame_equal(a, b)


def test_dask_executor_matches_local():
    distributed = pytest.importorskip("distributed")
    runs = _runs(3)
    local = analyse_isotherms(runs, seed=5, sample=True,
                              sampler_options={"max_steps": 500}).table()
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        remote = analyse_isotherms(runs, seed=5, sample=True,
                                   executor=client.get_executor(pure=False),
                                   sampler_options={"max_steps": 500}).table()
    pd.testing.assert_frame_equal(local, remote)


def test_cache_resumes_without_refitting(tmp_path, monkeypatch):
    runs = _runs(3)
    first = analyse_isotherms(runs, seed=1, sample=False, cache_dir=tmp_path / "c").table()

    def boom(*a, **k):
        raise AssertionError("a finished run was fitted again")

    monkeypatch.setattr(iso, "fit_isotherm", boom)
    again = analyse_isotherms(runs, seed=1, sample=False, cache_dir=tmp_path / "c").table()
    pd.testing.assert_frame_equal(first, again)


@pytest.mark.skipif(not hasattr(os, "getuid"), reason="no file owners on this platform")
def test_cache_ignores_entries_others_could_have_written(tmp_path, monkeypatch):
    """A cache entry (a pickle: loading it runs code) that others may write is refitted."""
    runs = _runs(1)
    analyse_isotherms(runs, seed=1, sample=False, cache_dir=tmp_path / "c")
    (entry,) = (tmp_path / "c").glob("*.pkl")
    assert (tmp_path / "c").stat().st_mode & 0o077 == 0
    entry.chmod(0o666)
    calls = []
    real = iso.fit_isotherm
    monkeypatch.setattr(iso, "fit_isotherm", lambda *a, **k: calls.append(1) or real(*a, **k))
    analyse_isotherms(runs, seed=1, sample=False, cache_dir=tmp_path / "c")
    assert calls == [1]


def _cli():
    exe = Path(sys.executable).with_name("crystkin")
    return [str(exe)] if exe.exists() else [sys.executable, "-m", "crystkin_cli.main"]


def test_killed_batch_restarts_with_same_tables(tmp_path):
    study = write_demo_study(tmp_path / "in", quick=True)
    text = study.read_text().split("[[run]]")
    study.write_text("[[run]]".join(text[:4]))
    ref = tmp_path / "ref"
    cmd = [*_cli(), "analyze", str(study), "--seed", "2", "--skip-rate-model"]
    subprocess.run([*cmd, "--out", str(ref)], check=True, capture_output=True, timeout=600)

    out = tmp_path / "out"
    resume = tmp_path / ".out.crystkin-resume" / "isothermal"
    proc = subprocess.Popen([*cmd, "--out", str(out)], stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.time() + 300
    while time.time() < deadline and proc.poll() is None:
        if resume.exists() and len(list(resume.glob("*.pkl"))) >= 1:
            break
        time.sleep(0.05)
    if proc.poll() is None:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
    assert not out.exists(), "a killed run must not leave a half-written output folder"
    done_before = len(list(resume.glob("*.pkl")))
    assert 1 <= done_before < 3
    r = subprocess.run([*cmd, "--out", str(out)], capture_output=True, text=True, timeout=600)
    assert r.returncode == 0, r.stderr
    assert "resuming" in r.stderr
    assert (out / "tables" / "isothermal_runs.csv").read_bytes() == \
        (ref / "tables" / "isothermal_runs.csv").read_bytes()
    assert not resume.parent.exists()


def test_cli_on_a_local_dask_cluster_writes_the_same_tables(tmp_path):
    """`--cluster local` (Dask worker processes) against one local process: every table of
    the whole workflow (isotherms, cooling job, joint rate models, comparisons) is
    byte-identical."""
    pytest.importorskip("distributed")
    study = write_demo_study(tmp_path / "in", quick=True)
    outs = {}
    for name, extra in (("serial", []), ("dask", ["--cluster", "local", "--jobs", "2"])):
        out = tmp_path / name
        r = subprocess.run([*_cli(), "analyze", str(study), "--out", str(out), "--fast",
                            "--seed", "4", *extra], capture_output=True, text=True, timeout=600)
        assert r.returncode == 0, r.stderr
        outs[name] = {p.name: p.read_bytes() for p in sorted((out / "tables").glob("*.csv"))}
    assert "global_rate.csv" in outs["serial"]
    assert outs["serial"].keys() == outs["dask"].keys()
    for name in outs["serial"]:
        assert outs["serial"][name] == outs["dask"][name], name


def test_cli_cluster_address_unreachable_is_one_line(tmp_path):
    pytest.importorskip("distributed")
    study = write_demo_study(tmp_path / "in", quick=True)
    r = subprocess.run([*_cli(), "analyze", str(study), "--out", str(tmp_path / "o"),
                        "--cluster", "tcp://127.0.0.1:9"], capture_output=True, text=True,
                       timeout=120)
    assert r.returncode == 2, r.stderr
    assert "cannot reach the Dask scheduler" in r.stderr and "Traceback" not in r.stderr
    assert not (tmp_path / "o").exists()


def test_resume_keeps_the_cooling_analysis_and_rate_models(tmp_path, monkeypatch):
    """A second analysis with the same resume folder takes the cooling analysis and the
    joint rate models from it (both are boobytrapped) and gives the same tables, whether
    the first ran them on an executor or in this process."""
    import warnings

    from kinetics import workflow
    from kinetics.analyses import global_rate, nonisothermal
    from kinetics.io import read_study

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        study = read_study(write_demo_study(tmp_path / "in", quick=True))
        # first through an executor (jobs kept as they finish), then in this process
        from concurrent.futures import ThreadPoolExecutor
        with ThreadPoolExecutor(2) as ex:
            first = workflow.analyse_study(study, seed=3, sample=False, executor=ex,
                                           cache_dir=tmp_path / "c")
        assert len(list((tmp_path / "c" / "jobs").glob("*.pkl"))) == 1 + len(study.groups)

        def boom(*a, **k):
            raise AssertionError("a finished study-level job was run again")

        monkeypatch.setattr(global_rate, "fit_global_rate", boom)
        monkeypatch.setattr(nonisothermal, "analyse_cooling", boom)
        again = workflow.analyse_study(study, seed=3, sample=False, cache_dir=tmp_path / "c")
    assert "global_rate" in first.tables and "cooling_runs" in first.tables
    for name, df in first.tables.items():
        pd.testing.assert_frame_equal(df, again.tables[name], obj=name)


def test_demo_outputs_identical_on_one_and_two_processes(tmp_path):
    """Tables, figures (rendered in worker processes with --jobs 2), draws and exports are
    byte-identical; only the run time in the report and provenance differs."""
    outs = {}
    for name, extra in (("one", []), ("two", ["--jobs", "2"])):
        out = tmp_path / name
        r = subprocess.run([*_cli(), "demo", "--quick", "--fast", "--out", str(out), *extra],
                           capture_output=True, text=True, timeout=600)
        assert r.returncode == 0, r.stderr
        outs[name] = {p.relative_to(out).as_posix(): p.read_bytes()
                      for p in sorted(out.rglob("*")) if p.is_file()}
    timed = {"provenance.json", "report.html", "report.md"}
    assert outs["one"].keys() == outs["two"].keys()
    assert any(k.startswith("figures/") for k in outs["one"])
    for name in outs["one"].keys() - timed:
        assert outs["one"][name] == outs["two"][name], name
    assert b"crystkin-demo-" not in outs["one"]["tables/preparation.csv"]  # no temp paths
