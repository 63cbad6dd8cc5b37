"""crystkin command line: parse, call the library, print.

Exit codes: 0 success; 1 finished, but some runs could not be analysed (listed);
2 a user mistake (bad file, bad option): one line on stderr says what and how to fix.
"""

from __future__ import annotations

import sys
from pathlib import Path

import click

EXIT_PARTIAL = 1
EXIT_USER_ERROR = 2


def _version() -> str:
    from importlib.metadata import PackageNotFoundError, version
    try:
        return version("crystkin")
    except PackageNotFoundError:
        return "unknown"


def _fail(message: str) -> None:
    click.echo(f"crystkin: error: {message}", err=True)
    sys.exit(EXIT_USER_ERROR)


def _progress(message: str) -> None:
    click.echo(f"  {message}", err=True)


def _quiet() -> None:
    """Data-quality findings go to the tables and the report, not to the terminal.

    Also the initializer of worker processes, which do not inherit warning filters.
    """
    import warnings

    from kinetics.errors import DataQualityWarning
    warnings.simplefilter("ignore", DataQualityWarning)
    warnings.simplefilter("ignore", RuntimeWarning)


class _Guard:
    """Turn user-input errors into one-line messages (never a traceback)."""

    def __enter__(self):
        _quiet()
        return self

    def __exit__(self, exc_type, exc, tb):
        from kinetics.errors import CrystkinInputError
        if exc_type is not None and issubclass(exc_type, CrystkinInputError):
            _fail(str(exc))
        if exc_type is not None and issubclass(exc_type, (FileNotFoundError, PermissionError,
                                                          IsADirectoryError)):
            _fail(f"{exc.strerror}: {exc.filename}")
        return False


def _executor(jobs: int, cluster: str | None = None):
    """(executor or None, cleanup): local processes, or a Dask cluster's executor."""
    if cluster is None:
        if jobs <= 1:
            return None, lambda: None
        import multiprocessing as mp
        from concurrent.futures import ProcessPoolExecutor
        ex = ProcessPoolExecutor(max_workers=jobs, mp_context=mp.get_context("spawn"),
                                 initializer=_quiet)
        return ex, ex.shutdown
    try:
        from dask.distributed import Client, LocalCluster
    except ImportError:
        _fail("--cluster needs the optional Dask extra: pip install 'crystkin[cluster]'")
    local = None
    try:
        if cluster == "local":
            local = LocalCluster(n_workers=jobs, threads_per_worker=1, processes=True,
                                 dashboard_address=None)
            client = Client(local)
        else:
            client = Client(cluster, timeout="10s")
    except (OSError, TimeoutError, ValueError) as exc:
        if local is not None:
            local.close()
        _fail(f"cannot reach the Dask scheduler at {cluster} ({exc}); check the address "
              "(tcp://host:8786) or use --cluster local")
    client.run(_quiet)
    click.echo(f"crystkin: fitting on the Dask cluster {client.scheduler.address} "
               f"({len(client.scheduler_info()['workers'])} workers)", err=True)

    def cleanup():
        client.close()
        if local is not None:
            local.close()

    return client.get_executor(pure=False), cleanup


def _local(executor):
    """The executor when it is this machine's processes (figures are rendered there); None
    for a cluster, whose workers may lack the fonts that make figures byte-identical."""
    from concurrent.futures import ProcessPoolExecutor
    return executor if isinstance(executor, ProcessPoolExecutor) else None


def _check_file(path: Path, what: str) -> None:
    if not path.exists():
        _fail(f"{path}: {what} not found; check the path")
    if path.is_dir():
        _fail(f"{path}: is a folder; give the {what} inside it")


def _check_out(out: Path, overwrite: bool, protect=()) -> None:
    """Refuse early (before any fitting) an output folder that would be refused at the end."""
    from kinetics.io.writers import check_output_destination
    check_output_destination(out, overwrite=overwrite, protect=protect)


def _finish(analysis, out: Path) -> None:
    import pandas as pd

    summary = analysis.summary
    if not summary.empty:
        with pd.option_context("display.width", 160, "display.max_columns", 20,
                               "display.float_format", "{:.4g}".format):
            click.echo(summary.to_string(index=False))
    cool = analysis.tables.get("cooling_runs")
    if cool is not None and not cool.empty:
        cols = [c for c in ("run_id", "group", "beta_K_per_min", "T_onset_degC", "T_peak_degC",
                            "enthalpy_J_per_g") if c in cool.columns]
        click.echo("\n" + cool[cols].to_string(index=False, float_format="{:.4g}".format))
    verdicts = [n[len("verdict: "):] for n in analysis.notes if n.startswith("verdict: ")]
    if verdicts:
        click.echo("\nComparison of formulations:")
        for v in verdicts:
            click.echo("  - " + v)
    click.echo(f"\nResults written to {out} (report.html, report.md, tables/, figures/, "
               f"draws/) in {analysis.seconds:.1f} s.")
    if analysis.failures:
        click.echo(f"\n{len(analysis.failures)} run(s) could not be analysed:", err=True)
        for run, msg in analysis.failures:
            click.echo(f"  - {run}: {msg}", err=True)
        sys.exit(EXIT_PARTIAL)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(_version(), prog_name="crystkin")
def main():
    """crystkin: polymer crystallization kinetics from raw DSC runs, with honest uncertainty."""


def _common(f):
    f = click.option("--seed", default=0, show_default=True, type=int,
                     help="Seed of every random choice (same seed, same numbers).")(f)
    f = click.option("--jobs", default=1, show_default=True, type=click.IntRange(1, 64),
                     help="Runs fitted in parallel processes.")(f)
    f = click.option("--cluster", default=None, metavar="ADDRESS",
                     help="Fit on a Dask cluster: its scheduler address (tcp://host:8786), or "
                          "'local' for a local one with --jobs workers. Needs the optional "
                          "extra crystkin[cluster]; results are identical to local runs.")(f)
    f = click.option("--overwrite", is_flag=True,
                     help="Replace an existing output folder written by crystkin.")(f)
    f = click.option("--fast", is_flag=True,
                     help="Least squares only (no posterior sampling): a quick first look.")(f)
    f = click.option("--skip-rate-model", is_flag=True,
                     help="Leave out the joint rate model K(T) (its posterior is the slowest "
                          "step).")(f)
    return f


@main.command()
@click.option("--out", type=click.Path(path_type=Path), default=Path("crystkin-demo"),
              show_default=True, help="Output folder (created; must not exist unless --overwrite).")
@click.option("--quick", is_flag=True, help="A smaller demo study (fewer runs).")
@_common
def demo(out, quick, seed, jobs, cluster, overwrite, fast, skip_rate_model):
    """Generate the built-in INVENTED demo study and analyse it end to end."""
    with _Guard():
        import tempfile

        from kinetics.demo import relabel_sources, write_demo_study
        from kinetics.io import read_study
        from kinetics.workflow import analyse_study, write_study

        click.echo("crystkin demo: invented PX-40 nucleating-agent screening (no real data).",
                   err=True)
        _check_out(out, overwrite)
        with tempfile.TemporaryDirectory(prefix="crystkin-demo-") as tmp:
            study_file = write_demo_study(Path(tmp) / "input", seed=seed, quick=quick)
            study = relabel_sources(read_study(study_file), Path(tmp) / "input")
            click.echo(f"  {len(study.traces)} runs generated; fitting...", err=True)
            def copy_inputs(dest):
                import shutil
                shutil.copytree(Path(tmp) / "input", dest)

            ex, cleanup = _executor(jobs, cluster)
            try:
                analysis = analyse_study(study, seed=seed, executor=ex, sample=not fast,
                                         progress=_progress, rate_model=not skip_rate_model)
                _progress("writing tables, figures and the report")
                write_study(analysis, out, overwrite=overwrite,
                            extra_files={"demo_input": copy_inputs}, executor=_local(ex))
            finally:
                cleanup()
        _finish(analysis, out)


@main.command()
@click.argument("study_file", type=click.Path(path_type=Path))
@click.option("--out", type=click.Path(path_type=Path), required=True,
              help="Output folder (created; must not exist unless --overwrite).")
@_common
def analyze(study_file, out, seed, jobs, cluster, overwrite, fast, skip_rate_model):
    """Analyse every run of a study file (TOML) and write tables, figures and a report."""
    with _Guard():
        from kinetics.io import read_study
        from kinetics.workflow import analyse_study, resume_folder, write_study

        _check_file(study_file, "study file")
        study = read_study(study_file)
        click.echo(f"crystkin: {len(study.traces)} runs read from {study_file}", err=True)
        _check_out(out, overwrite, protect=[study_file] + [t.info.source for t in study.traces
                                                          if t.info.source])
        cache = resume_folder(out)
        if cache.exists():
            click.echo(f"crystkin: resuming an interrupted analysis ({cache})", err=True)
        ex, cleanup = _executor(jobs, cluster)
        try:
            analysis = analyse_study(study, seed=seed, executor=ex, sample=not fast,
                                     progress=_progress, cache_dir=cache,
                                     rate_model=not skip_rate_model)
            _progress("writing tables, figures and the report")
            write_study(analysis, out, overwrite=overwrite, executor=_local(ex))
        finally:
            cleanup()
        import shutil
        shutil.rmtree(cache, ignore_errors=True)
        _finish(analysis, out)


@main.command()
@click.argument("file", type=click.Path(path_type=Path))
@click.option("--kind", type=click.Choice(["isothermal", "cooling", "heating"]), default=None,
              help="Temperature programme (default: guessed from the temperature column).")
@click.option("--temperature", default=None, help='Hold temperature, e.g. "125 degC".')
@click.option("--rate", default=None, help='Cooling or heating rate, e.g. "10 K/min".')
@click.option("--mass", default=None, help='Sample mass, e.g. "5.2 mg".')
@click.option("--exotherm", type=click.Choice(["up", "down"]), default=None,
              help="Sign convention of the file (default: detected).")
def peek(file, kind, temperature, rate, mass, exotherm):
    """Show what crystkin detects in one raw file: columns, units, sign, windows, enthalpy."""
    with _Guard():
        from kinetics.dataset import RunInfo
        from kinetics.io import read_trace
        from kinetics.units import celsius, parse_quantity

        _check_file(file, "file")
        trace = read_trace(file)
        info = trace.info
        changes = {}
        if kind:
            changes["kind"] = kind
        if temperature:
            changes["temperature"] = parse_quantity(temperature, dimension="temperature")
        if rate:
            changes["rate"] = parse_quantity(rate, dimension="rate")
        if mass:
            changes["mass"] = parse_quantity(mass, dimension="mass")
        if exotherm:
            changes["exotherm"] = exotherm
        if changes:
            fields = {**info.__dict__, **changes}
            fields.pop("extra", None)
            trace = read_trace(file, info=RunInfo(**fields))
            info = trace.info
        click.echo(f"file:        {file}")
        click.echo(f"rows:        {info.rows[0]}-{info.rows[1]} ({trace.n_points} points)")
        cols = info.extra.get("columns") if info.extra else None
        if cols:
            click.echo("columns:     " + ", ".join(f"{k} = {v}" for k, v in cols.items()))
        units = info.extra.get("units") if info.extra else None
        if units:
            click.echo("units:       " + ", ".join(f"{k} [{v}]" for k, v in units.items()))
        click.echo(f"time:        {trace.time[0]:.1f} to {trace.time[-1]:.1f} s")
        click.echo(f"temperature: {celsius(trace.temperature.min()):.2f} to "
                   f"{celsius(trace.temperature.max()):.2f} °C")
        click.echo(f"kind:        {info.kind}"
                   + (f" at {celsius(info.temperature):.2f} °C" if info.temperature else "")
                   + (f", {info.rate * 60:.3g} K/min" if info.rate else ""))
        click.echo(f"mass:        {info.mass * 1e6:.3f} mg" if info.mass else
                   "mass:        unknown (enthalpy in J; give --mass for J/g)")
        if info.kind == "isothermal":
            from kinetics.prep import prepare_isothermal
            conv = prepare_isothermal(trace)
        elif info.kind == "cooling":
            try:
                from kinetics.prep.cooling import prepare_cooling
            except ImportError:
                _fail("cooling-run preparation is not available in this version")
            conv = prepare_cooling(trace)
        else:
            from kinetics.prep.melting import melting_peak
            pk = melting_peak(trace)
            click.echo(f"melting peak: {celsius(pk.temperature):.2f} °C (endotherm)")
            for w in pk.warnings:
                click.echo(f"warning:     {w}")
            return
        click.echo(f"exotherm:    {conv.exotherm}"
                   + (" (given)" if info.exotherm else " (detected from the data)"))
        click.echo(f"hold start:  {conv.hold_start:.1f} s; start-up transient ends "
                   f"{conv.transient_end:.1f} s")
        click.echo(f"event:       {conv.window[0]:.1f} to {conv.window[1]:.1f} s; induction "
                   f"time {conv.induction_time:.1f} s")
        click.echo(f"baseline:    {conv.baseline.get('method')}")
        if conv.specific_enthalpy:
            click.echo(f"enthalpy:    {conv.enthalpy / 1e3:.2f} J/g")
        else:
            click.echo(f"enthalpy:    {conv.enthalpy * 1e3:.4g} mJ (no mass given)")
        click.echo(f"half-time:   {conv.time_at(0.5) - conv.window[0]:.1f} s after the event "
                   "start (measured from the curve)")
        for w in conv.warnings:
            click.echo(f"warning:     {w}")


@main.command()
@click.argument("results_dir", type=click.Path(path_type=Path, file_okay=False))
@click.option("--out", type=click.Path(path_type=Path), default=None,
              help="Folder for the simulation input (default: RESULTS_DIR-simulation).")
@click.option("--group", default=None, help="Only this formulation (default: every one).")
@click.option("--t-min", default=None, help='Lowest temperature of the K(T) table, e.g. "40 degC".')
@click.option("--t-max", default=None, help='Highest temperature of the K(T) table.')
@click.option("--step", default="1 K", show_default=True, help="Temperature step of the table.")
@click.option("--overwrite", is_flag=True, help="Replace an existing export folder.")
def export(results_dir, out, group, t_min, t_max, step, overwrite):
    """Write the fitted rate model(s) K(T) of an analysis as simulation input (JSON + CSV)."""
    with _Guard():
        import numpy as np

        from kinetics.cautions import PROCESS_CAUTION
        from kinetics.errors import CrystkinInputError
        from kinetics.export.simulation import read_simulation_model, write_simulation_model
        from kinetics.io.writers import atomic_output_dir
        from kinetics.units import parse_quantity

        models = sorted((results_dir / "export").glob("*_rate_model.json"))
        if not results_dir.is_dir():
            _fail(f"{results_dir}: results folder not found; give the --out folder of "
                  "'crystkin analyze' or 'crystkin demo'")
        if not models:
            _fail(f"{results_dir}: no fitted rate model (export/*_rate_model.json); run "
                  "'crystkin analyze' without --skip-rate-model, with tm0 and tg in the study")
        out = out or results_dir.with_name(results_dir.name + "-simulation")
        import re
        m = re.fullmatch(r"\s*([0-9]*\.?[0-9]+)\s*K\s*", step)
        dT = float(m.group(1)) if m else None
        if dT is None or not dT > 0:
            raise CrystkinInputError(f"--step must be a positive number of kelvin, e.g. '1 K'; "
                                     f"got {step!r}")
        with atomic_output_dir(out, overwrite=overwrite, protect=[results_dir]) as tmp:
            for path in models:
                model = read_simulation_model(path)
                name = path.name[: -len("_rate_model.json")]
                if group is not None and name != group:
                    continue
                lo = (parse_quantity(t_min, dimension="temperature") if t_min
                      else model.glass_transition_K)
                hi = (parse_quantity(t_max, dimension="temperature") if t_max
                      else float(model.parameters["Tm0"]["median"]) - 1.0)
                if not hi > lo:
                    raise CrystkinInputError(f"--t-max must be above --t-min ({lo:.2f} K, "
                                             f"{hi:.2f} K)")
                grid = np.arange(lo, hi + 0.5 * dT, dT)
                write_simulation_model(model, tmp / f"{name}_rate_model.json",
                                       tmp / f"{name}_K_of_T.csv", temperature_grid=grid)
                click.echo(f"{name}: rate model and K(T) table on {len(grid)} temperatures")
                click.echo(model.summary().to_string(index=False,
                                                     float_format="{:.5g}".format))
        click.echo(f"\nSimulation input written to {out}.\n{PROCESS_CAUTION}")


@main.command()
@click.argument("model_file", type=click.Path(path_type=Path, dir_okay=False))
@click.argument("profile_file", type=click.Path(path_type=Path, dir_okay=False), required=False)
@click.option("--start", default=None, help='Constant-rate profile instead of a file: start '
              'temperature, e.g. "230 degC".')
@click.option("--end", default=None, help='End temperature of the constant-rate profile.')
@click.option("--rate", default=None, help='Cooling rate of the constant-rate profile, '
              'e.g. "20 K/min".')
@click.option("--out", type=click.Path(path_type=Path), default=None,
              help="Also write the prediction tables and a figure into this folder.")
@click.option("--overwrite", is_flag=True, help="Replace an existing --out folder.")
def predict(model_file, profile_file, start, end, rate, out, overwrite):
    """Apply a rate model to a temperature-time profile: X(t) and times to 50/90/99 %."""
    with _Guard():
        from kinetics.analyses.predict import predict_from_profile
        from kinetics.export.simulation import read_simulation_model
        from kinetics.io.profile import constant_rate_profile, read_profile

        if not model_file.exists():
            _fail(f"{model_file}: model file not found; check the path")
        model = read_simulation_model(model_file)
        if profile_file is not None:
            if any((start, end, rate)):
                _fail("give either PROFILE_FILE or --start/--end/--rate, not both")
            if not profile_file.exists():
                _fail(f"{profile_file}: profile file not found; check the path")
            profile = read_profile(profile_file)
        elif start and end and rate:
            profile = constant_rate_profile(start=start, end=end, rate=rate)
        else:
            _fail("give a PROFILE_FILE (time and temperature columns) or all of "
                  "--start, --end and --rate")
        import warnings
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            pred = predict_from_profile(model, profile)
        click.echo(pred.text())
        if out is not None:
            from kinetics.io.writers import atomic_output_dir, write_table
            from kinetics.report.figures_growth import prediction_figure
            from kinetics.report.style import save
            with atomic_output_dir(out, overwrite=overwrite,
                                   protect=[model_file] + ([profile_file] if profile_file else [])
                                   ) as tmp:
                write_table(pred.table(), tmp / "prediction_targets")
                write_table(pred.curve(), tmp / "prediction_curve", formats=("csv",))
                save(prediction_figure(pred), tmp / "prediction.png")
                (tmp / "CAUTION.txt").write_text(pred.caution + "\n", encoding="utf-8")
            click.echo(f"Prediction written to {out}.")


if __name__ == "__main__":
    main()
