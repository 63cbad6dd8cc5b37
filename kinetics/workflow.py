"""The whole job for one study: analyse every run, then write tables, draws,
figures and the report into one output folder, whole or not at all.

This is the top of the library: the CLI and the notebooks call these functions.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from . import __version__
from .analyses.isothermal import BatchResult, analyse_isotherms
from .dataset import Study
from .export.results import posterior_table, preparation_table, write_draws, write_tables
from .io.writers import atomic_output_dir, write_json

__all__ = ["StudyAnalysis", "analyse_study", "write_study", "run_study", "resume_folder",
           "PROCESS_CAUTION"]

PROCESS_CAUTION = (
    "Caution: these kinetic parameters and predictions are estimates from laboratory DSC "
    "data. Validate them on the real process before using them to set mold temperatures or "
    "cycle times; local codes and qualified engineering practice govern process settings.")


@dataclass
class StudyAnalysis:
    """Everything computed for a study, before anything is written."""

    study: Study
    seed: int
    options: dict
    isothermal: BatchResult | None = None
    tables: dict[str, pd.DataFrame] = field(default_factory=dict)
    failures: list[tuple[str, str]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    figures: list = field(default_factory=list)
    seconds: float = 0.0

    @property
    def summary(self) -> pd.DataFrame:
        """Short terminal summary: one row per isothermal run."""
        t = self.tables.get("isothermal_runs")
        if t is None or t.empty:
            return pd.DataFrame()
        cols = ["run_id", "group", "T_c_degC", "n", "n_lo95", "n_hi95", "t_half_s",
                "t_half_s_lo95", "t_half_s_hi95", "converged"]
        return t[[c for c in cols if c in t.columns]]


def resume_folder(out) -> Path:
    """Hidden folder beside ``out`` where finished per-run fits wait until ``out`` is written."""
    out = Path(out)
    return out.parent / f".{out.name}.crystkin-resume"


def analyse_study(study: Study, *, seed: int = 0, executor=None, sample: bool = True,
                  progress=None, fit_options: dict | None = None,
                  cache_dir=None) -> StudyAnalysis:
    """Run every analysis the study's runs allow.

    Parameters
    ----------
    study : Study
    seed : int
        Study seed; per-run seeds derive from it and the run names.
    executor : concurrent.futures.Executor, optional
        Where per-run fits run (default: this process).
    sample : bool
        False: least squares only (fast, for a first look).
    progress : callable, optional
        ``progress(message)`` for long work.
    cache_dir : path, optional
        Keep finished per-run fits there, so an interrupted analysis resumes
        (see :func:`resume_folder`).
    """
    t_start = time.perf_counter()
    options = {"sample": sample, **(fit_options or {})}
    res = StudyAnalysis(study=study, seed=seed, options=options)
    res.failures.extend(study.failures)
    iso = study.runs(kind="isothermal")
    if iso:
        def tick(run_id, done, total):
            if progress:
                progress(f"[{done}/{total}] isothermal {run_id}")
        batch = analyse_isotherms(iso, seed=seed, executor=executor, progress=tick,
                                  cache_dir=None if cache_dir is None else Path(cache_dir) / "isothermal",
                                  sample=sample, **(fit_options or {}))
        res.isothermal = batch
        res.failures.extend(batch.failures)
        res.tables["isothermal_runs"] = batch.table()
        res.tables["isothermal_posterior"] = posterior_table(batch.fits)
    convs = [f.conversion for f in (res.isothermal.fits if res.isothermal else ())]
    res.tables["preparation"] = preparation_table(convs, study.traces)
    if res.failures:
        res.tables["failures"] = pd.DataFrame(res.failures, columns=["run", "message"])
    res.seconds = time.perf_counter() - t_start
    return res


@dataclass(frozen=True)
class FigureFile:
    """A figure written to ``figures/``: report section, file name and caption."""

    section: str
    filename: str
    caption: str


def _write_figures(analysis: StudyAnalysis, out: Path) -> list[FigureFile]:
    from .report import figures
    from .report.style import save

    folder = out / "figures"
    folder.mkdir(exist_ok=True)
    written: list[FigureFile] = []

    def put(section, fig, name, caption):
        save(fig, folder / name)
        written.append(FigureFile(section, name, caption))

    batch = analysis.isothermal
    if batch and batch.fits:
        by_group: dict[str, list] = {}
        for f in batch.fits:
            by_group.setdefault(f.trace.info.group, []).append(f)
        first = batch.fits[0]
        put("data", figures.raw_signal_figure(first), f"signal_{first.run_id}.png",
            f"Run {first.run_id}: recorded signal (exotherm up), baseline, event window and "
            "end of the start-up transient.")
        for group, fits in by_group.items():
            fits = sorted(fits, key=lambda f: f.trace.info.temperature)
            stem = _safe_stem(group)
            put("isothermal", figures.isotherm_conversion_figure(
                fits, title=f"{group}: relative crystallinity"),
                f"isothermal_conversion_{stem}.png",
                f"{group}: relative crystallinity X(t) of each hold (points) with the posterior "
                "median curve and 95 % band.")
            put("isothermal", figures.avrami_plot_figure(fits), f"avrami_plot_{stem}.png",
                f"{group}: double-logarithmic Avrami plot; thick lines mark the linearised fit "
                "and its conversion window.")
        put("isothermal", figures.half_time_figure(analysis.tables["isothermal_runs"]),
            "half_times.png", "Avrami half-time against crystallization temperature "
            "(posterior median and 95 % interval).")
        if first.posterior is not None:
            put("diagnostics", figures.posterior_pairs_figure(first),
                f"posterior_{first.run_id}.png",
                f"Run {first.run_id}: posterior draws of n, t_half and t0.")
    return written


def _safe_stem(text: str) -> str:
    import re

    s = re.sub(r"[^A-Za-z0-9_-]+", "-", str(text)).strip("-")
    return s or "group"


def write_study(analysis: StudyAnalysis, out, *, overwrite: bool = False,
                protect=(), extra_files: dict | None = None) -> Path:
    """Write tables, draws, figures, report and provenance into ``out`` atomically."""
    out = Path(out)
    protect = list(protect) + [t.info.source for t in analysis.study.traces if t.info.source]
    if analysis.study.source:
        protect.append(analysis.study.source)
    with atomic_output_dir(out, overwrite=overwrite, protect=protect) as tmp:
        for rel, writer in (extra_files or {}).items():
            writer(tmp / rel)
        write_tables(tmp, analysis.tables)
        if analysis.isothermal and analysis.isothermal.fits:
            write_draws(tmp, "isothermal", {f.run_id: f.derived for f in analysis.isothermal.fits})
        analysis.figures = _write_figures(analysis, tmp)
        from .report.markdown import write_markdown_report
        write_markdown_report(analysis, tmp, [f.filename for f in analysis.figures])
        write_json(tmp / "provenance.json", _provenance(analysis))
    return out


def _provenance(analysis: StudyAnalysis) -> dict:
    import platform

    import emcee
    import numpy
    import scipy

    runs = {}
    if analysis.isothermal:
        for f in analysis.isothermal.fits:
            runs[f.run_id] = {"source": f.trace.info.source, "rows": f.trace.info.rows,
                              **f.provenance,
                              "diagnostics": (f.posterior.diagnostics.as_dict()
                                              if f.posterior is not None else None)}
    return {"software": {"crystkin": __version__, "python": platform.python_version(),
                         "numpy": numpy.__version__, "scipy": scipy.__version__,
                         "pandas": pd.__version__, "emcee": emcee.__version__},
            "study": {"name": analysis.study.name, "source": analysis.study.source},
            "seed": analysis.seed, "options": analysis.options, "runs": runs,
            "failures": [{"run": r, "message": m} for r, m in analysis.failures],
            "seconds": round(analysis.seconds, 3)}


def run_study(study: Study, out, *, seed: int = 0, overwrite: bool = False, executor=None,
              sample: bool = True, progress=None, fit_options=None) -> StudyAnalysis:
    """Analyse a study and write everything into ``out``; returns the analysis."""
    import shutil

    cache = resume_folder(out)
    analysis = analyse_study(study, seed=seed, executor=executor, sample=sample,
                             progress=progress, fit_options=fit_options, cache_dir=cache)
    write_study(analysis, out, overwrite=overwrite)
    shutil.rmtree(cache, ignore_errors=True)
    return analysis
