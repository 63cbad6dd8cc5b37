"""crystkin benchmarks: times and memory as ratios to baselines measured in the same run.

Usage: python benchmarks/run.py [--quick] [--out benchmarks/results]
The data are invented (kinetics.synthetic / kinetics.demo).
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd


def _best(fn, repeat=3):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times), statistics.median(times)


def unit_workload():
    x = np.linspace(0.1, 10.0, 1_000_000)
    for _ in range(20):
        np.exp(-np.log(x) * 1.3)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--quick", action="store_true", help="fewer repeats, smaller batch")
    ap.add_argument("--out", default=str(Path(__file__).parent / "results"))
    args = ap.parse_args(argv)
    warnings.simplefilter("ignore")

    from kinetics.analyses.isothermal import (
        analyse_isotherms,
        avrami_heat_flow_problem,
    )
    from kinetics.estimate import fit_least_squares, sample_posterior
    from kinetics.prep import prepare_isothermal
    from kinetics.synthetic import synthetic_isotherm

    rows = []
    unit, _ = _best(unit_workload)
    rows.append(("unit numpy workload", unit, "s", "baseline"))

    tr, _ = synthetic_isotherm(n=2.6, t_half=120.0, t0=30.0, temperature=403.15, duration=1000,
                               dt=0.5, seed=1, drift=(2e-5, 1e-8), transient=(3e-4, 8.0))
    conv = prepare_isothermal(tr)
    prob = avrami_heat_flow_problem(tr, conv)
    lsq_t, _ = _best(lambda: fit_least_squares(prob), repeat=5)
    rows.append(("least squares, one isotherm (2,000 points)", lsq_t, "s", "target <= 0.05 s"))
    prep_t, _ = _best(lambda: prepare_isothermal(tr), repeat=5)
    rows.append(("preparation, one isotherm", prep_t, "s", ""))
    lsq = fit_least_squares(prob)
    sample_posterior(prob, seed=0, start=lsq)  # warm imports
    post_times, ess = [], []
    for s in range(2 if args.quick else 5):
        t = time.perf_counter()
        p = sample_posterior(prob, seed=s, start=lsq)
        post_times.append(time.perf_counter() - t)
        ess.append(p.diagnostics.ess / post_times[-1])
    post_t = statistics.median(post_times)
    rows.append(("posterior, one isotherm (converged)", post_t, "s", "target <= 3 s"))
    rows.append(("effective samples per second", statistics.median(ess), "1/s", ""))

    n_batch = 40 if args.quick else 200
    traces = [synthetic_isotherm(n=2.5, t_half=60.0 + i, t0=20.0, temperature=403.15,
                                 duration=600, seed=100 + i, run_id=f"b{i:03d}")[0]
              for i in range(n_batch)]
    t = time.perf_counter()
    analyse_isotherms(traces, seed=0, sample=False)
    batch_t = time.perf_counter() - t
    rows.append((f"batch of {n_batch} runs, least squares", batch_t, "s", ""))

    from kinetics.analyses.global_rate import fit_global_rate
    from kinetics.analyses.predict import predict_from_profile
    from kinetics.demo import write_demo_study
    from kinetics.io import read_study
    from kinetics.io.profile import constant_rate_profile
    from kinetics.prep.cooling import prepare_cooling
    from kinetics.workflow import analyse_study, write_study

    with tempfile.TemporaryDirectory() as tmp:
        study = read_study(write_demo_study(Path(tmp) / "in", quick=args.quick))
        group = study.groups[0]
        iso = [(t, prepare_isothermal(t)) for t in study.runs(kind="isothermal")
               if t.info.group == group]
        cool = [(t, prepare_cooling(t)) for t in study.runs(kind="cooling")
                if t.info.group == group]
        tg = study.settings["tg"]
        t = time.perf_counter()
        joint = fit_global_rate(iso, cool, Tm0=study.settings["tm0"], T_inf=tg - 30.0, Tg=tg,
                                seed=0, max_points_per_run=150)
        joint_t = time.perf_counter() - t
        rows.append((f"joint rate model, {len(iso)} isothermal + {len(cool)} cooling runs, "
                     "one core", joint_t, "s", ""))
        model = joint.simulation_model()
        profile = constant_rate_profile(start=503.15, end=303.15, rate=10 / 60, n_points=4000)
        predict_t, _ = _best(lambda: predict_from_profile(model, profile), repeat=3)
        rows.append(("predict X(t) on a 4,000-point profile", predict_t, "s", "target < 1 s"))
        import multiprocessing as mp
        from concurrent.futures import ProcessPoolExecutor
        t = time.perf_counter()
        with ProcessPoolExecutor(2, mp_context=mp.get_context("spawn"),
                                 initializer=warnings.simplefilter, initargs=("ignore",)) as ex:
            write_study(analyse_study(study, executor=ex), Path(tmp) / "out", executor=ex)
        demo_t = time.perf_counter() - t
    rows.append((f"demo study end to end, 2 processes ({len(study.traces)} runs)", demo_t, "s",
                 "target < 60 s"))
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    rows.append(("peak memory of this process", peak, "MB", ""))

    df = pd.DataFrame(rows, columns=["benchmark", "value", "unit", "note"])
    secs = df["unit"] == "s"
    df["ratio_to_unit"] = np.where(secs, df["value"] / unit, np.nan)
    df["ratio_to_lsq"] = np.where(secs, df["value"] / lsq_t, np.nan)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    df.to_csv(out / "latest.csv", index=False, float_format="%.4g")
    import platform
    head = (f"crystkin benchmarks, {time.strftime('%Y-%m-%d')}, "
            f"Python {platform.python_version()}, "
            f"{os.cpu_count()} cores{' (quick)' if args.quick else ''}\n\n")
    from kinetics.io.writers import markdown_table
    (out / "latest.md").write_text(head + markdown_table(df) + "\n", encoding="utf-8")
    print(head + df.to_string(index=False, float_format=lambda v: f"{v:.4g}"))
    return 0


if __name__ == "__main__":
    sys.exit(main())
