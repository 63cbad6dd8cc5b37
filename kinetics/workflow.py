"""The whole job for one study: analyse every run, then write tables, draws,
figures and the report into one output folder, whole or not at all.

This is the top of the library: the CLI and the notebooks call these functions.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from . import __version__
from .analyses.isothermal import BatchResult, analyse_isotherms
from .cautions import PROCESS_CAUTION
from .dataset import Study
from .export.results import posterior_table, preparation_table, write_draws, write_tables
from .io.writers import atomic_output_dir, write_json

__all__ = ["StudyAnalysis", "analyse_study", "write_study", "run_study", "resume_folder",
           "PROCESS_CAUTION"]



@dataclass
class StudyAnalysis:
    """Everything computed for a study, before anything is written."""

    study: Study
    seed: int
    options: dict
    isothermal: BatchResult | None = None
    cooling: object | None = None
    melting: dict = field(default_factory=dict)
    growth: dict = field(default_factory=dict)
    comparison: object | None = None
    rate_models: dict = field(default_factory=dict)
    rate_bands: dict = field(default_factory=dict)
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
                  cache_dir=None, rate_model: bool = True) -> StudyAnalysis:
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
    rate_model : bool
        Fit the joint Nakamura–Hoffman–Lauritzen K(T) per formulation (also
        switched off by ``rate_model = false`` in the study's [analysis] table).
    """
    t_start = time.perf_counter()
    options = {"sample": sample, **(fit_options or {})}
    res = StudyAnalysis(study=study, seed=seed, options=options)
    res.failures.extend(study.failures)
    opts = dict(study.settings.get("analysis") or {})
    rate_on = bool(rate_model and opts.get("rate_model", True))
    jobs = _JobCache(cache_dir)
    early = None
    if rate_on and executor is not None:
        # the longest jobs first, so both cores stay busy while the isotherms are fitted
        early = _submit_global_early(res, opts, executor, sample, fit_options, jobs)
        if early and progress:
            progress(f"one rate model K(T) per formulation ({len(early)}), started in the "
                     "background (the slowest step)")
    cooling_job = None
    cool_runs = study.runs(kind="cooling")
    if cool_runs:
        if progress:
            progress(f"cooling runs ({len(cool_runs)}): Jeziorny, Ozawa, Mo, Friedman, Vyazovkin")
        args = (cool_runs, seed, bool(opts.get("kissinger", False)))
        cooling_job = jobs.run("cooling", _cooling_job, args, executor)
    iso = study.runs(kind="isothermal")
    if iso:
        def tick(run_id, done, total):
            if progress:
                progress(f"[{done}/{total}] isothermal {run_id}")
        batch = analyse_isotherms(iso, seed=seed, executor=executor, progress=tick,
                                  cache_dir=(None if cache_dir is None
                                             else Path(cache_dir) / "isothermal"),
                                  sample=sample, **(fit_options or {}))
        res.isothermal = batch
        res.failures.extend(batch.failures)
        res.tables["isothermal_runs"] = batch.table()
        res.tables["isothermal_posterior"] = posterior_table(batch.fits)
    if cooling_job is not None:
        _cooling_collect(res, cooling_job.result())
    if study.runs(kind="heating"):
        _melting(res)
    if res.isothermal and res.isothermal.fits:
        if progress:
            progress("growth theory, secondary crystallization, crystallinity")
        _growth(res, opts)
        _secondary(res, executor)
        _crystallinity(res)
    if rate_on:
        if progress:
            progress("one rate model K(T) per formulation (Nakamura-Hoffman-Lauritzen)"
                     + (": collecting" if early else ""))
        _global(res, opts, executor, sample, fit_options, early, jobs)
    if len(study.groups) > 1:
        _compare(res, opts)
    convs = [f.conversion for f in (res.isothermal.fits if res.isothermal else ())]
    if res.cooling is not None:
        convs += list(res.cooling.conversions)
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


def _attempt(res: StudyAnalysis, what: str, fn):
    """Run one analysis; a user-level problem becomes a note, not a failure of the study."""
    from .errors import CrystkinInputError

    try:
        return fn()
    except CrystkinInputError as exc:
        res.notes.append(f"{what} not possible: {exc}")
        return None


def _add_tables(res: StudyAnalysis, tables: dict, prefix: str = "") -> None:
    for name, df in tables.items():
        if df is not None and len(df):
            res.tables[prefix + name] = df


def _cooling_job(traces, seed, kissinger):
    """Cooling analysis as one job (module level, so it can run in another process)."""
    import warnings as _w

    from .analyses.nonisothermal import analyse_cooling
    from .errors import CrystkinInputError, DataQualityWarning

    with _w.catch_warnings():
        _w.simplefilter("ignore", DataQualityWarning)
        try:
            return analyse_cooling(traces, seed=seed, kissinger=kissinger), None
        except CrystkinInputError as exc:
            return None, f"cooling analysis not possible: {exc}"


def _cooling_collect(res: StudyAnalysis, outcome) -> None:
    cool, note = outcome
    if cool is None:
        res.notes.append(note)
        return
    res.cooling = cool
    res.failures.extend(cool.failures)
    res.notes.extend(cool.warnings)
    res.notes.extend(f"caution: {c}" for c in cool.cautions)
    _add_tables(res, cool.tables())


def _melting(res: StudyAnalysis) -> None:
    from .analyses.melting import hoffman_weeks, marand_xu_srinivas, melting_points

    pts = melting_points(res.study.traces)
    if pts.empty:
        return
    res.tables["melting_points"] = pts
    for _, r in pts[pts["error"].astype(str) != ""].iterrows():
        res.failures.append((r["run_id"], r["error"]))
    ok = pts.dropna(subset=["T_m_K"])
    hw, msw = [], []
    for group, sub in ok.groupby("group", sort=False):
        seed = _seed(res.seed, f"melting:{group}")
        fit = _attempt(res, f"Hoffman-Weeks ({group})", lambda sub=sub, group=group, seed=seed:
                       hoffman_weeks(sub["T_c_K"], sub["T_m_K"], seed=seed, group=str(group)))
        if fit is not None:
            res.melting[("hoffman_weeks", group)] = fit
            hw.append(fit.table())
            res.notes.extend(f"caution: {c}" for c in getattr(fit, "cautions", ()) or ())
        if len(sub) < 5:
            res.notes.append(f"Marand-Xu-Srinivas ({group}) not computed: the nonlinear "
                             f"form needs 5 or more melting points, got {len(sub)}")
            continue
        fit2 = _attempt(res, f"Marand-Xu-Srinivas ({group})",
                        lambda sub=sub, group=group, seed=seed: marand_xu_srinivas(
                            sub["T_c_K"], sub["T_m_K"], seed=seed, group=str(group)))
        if fit2 is not None:
            res.melting[("marand_xu_srinivas", group)] = fit2
            msw.append(fit2.table())
    if hw:
        res.tables["hoffman_weeks"] = pd.concat(hw + msw, ignore_index=True)


def _seed(base: int, label: str) -> int:
    from .analyses.seeds import run_seed

    return run_seed(base, label)


def _equilibrium_melting(res: StudyAnalysis, group: str, opts: dict):
    """Tm0 (K) and its SD: the study file's value, else this group's (or any) Hoffman-Weeks."""
    tm0 = res.study.settings.get("tm0")
    if tm0 is not None:
        return float(tm0), float(opts.get("tm0_sd_K", 0.0)), "study file"
    for key in (("hoffman_weeks", group), *[k for k in res.melting if k[0] == "hoffman_weeks"]):
        fit = res.melting.get(key)
        if fit is not None and "Tm0" in fit.draws:
            d = np.asarray(fit.draws["Tm0"], dtype=float)
            return float(np.median(d)), float(np.std(d)), f"Hoffman-Weeks ({key[1]})"
    return None


def _growth(res: StudyAnalysis, opts: dict) -> None:
    from .analyses.growth import hoffman_lauritzen_from_isotherms

    tg = res.study.settings.get("tg")
    fits = res.isothermal.fits
    parts = []
    for group in dict.fromkeys(f.trace.info.group for f in fits):
        members = [f for f in fits if f.trace.info.group == group]
        if len(members) < 3:
            res.notes.append(f"Hoffman-Lauritzen ({group}) not possible: needs isotherms at 3 "
                             f"or more temperatures, got {len(members)}")
            continue
        tm = _equilibrium_melting(res, group, opts)
        if tm is None or tg is None:
            res.notes.append(f"Hoffman-Lauritzen ({group}) not possible: give tm0 and tg in "
                             "the [study] table of the study file (or melting runs for "
                             "Hoffman-Weeks)")
            continue
        Tm0, Tm0_sd, src = tm
        fit = _attempt(res, f"Hoffman-Lauritzen ({group})", lambda m=members, g=group, a=Tm0,
                       b=Tm0_sd: hoffman_lauritzen_from_isotherms(
                           m, group=g, Tm0=a, Tm0_sd=b, Tg=float(tg),
                           polymer=res.study.settings.get("polymer"),
                           seed=_seed(res.seed, f"hl:{g}")))
        if fit is not None:
            res.growth[group] = fit
            t = fit.table()
            t.insert(1, "Tm0_source", src)
            parts.append(t)
    if parts:
        res.tables["hoffman_lauritzen"] = pd.concat(parts, ignore_index=True)
    _growth_from_cooling(res, opts)


def _growth_from_cooling(res: StudyAnalysis, opts: dict) -> None:
    """Kg from the isoconversional E(T) of the cooling runs (Vyazovkin & Sbirrazzuoli,
    Macromol. Rapid Commun. 25 (2004) 733), compared with the isothermal Kg."""
    from .analyses.growth import compare_kg, hl_from_activation_energy

    tg = res.study.settings.get("tg")
    if res.cooling is None or tg is None:
        return
    fits, comparisons = [], []
    for group, fr in res.cooling.friedman.items():
        tm = _equilibrium_melting(res, group, opts)
        if tm is None:
            continue
        t = fr.table()
        t = t[t["estimable"].astype(bool)].dropna(subset=["E_kJ_per_mol"])
        t = t[(t["T_mean_K"] < tm[0] - 1.0) & (t["T_mean_K"] > float(tg) - 29.0)]
        if len(t) < 3:
            continue
        E = t["E_kJ_per_mol"].to_numpy() * 1e3
        E_sd = (t["E_kJ_per_mol_hi95"] - t["E_kJ_per_mol_lo95"]).to_numpy() * 1e3 / 3.92
        fit = _attempt(res, f"Hoffman-Lauritzen from E(T) ({group})", lambda t=t, E=E, s=E_sd,
                       g=group, tm=tm: hl_from_activation_energy(
                           t["T_mean_K"].to_numpy(), E, E_sd=s, Tm0=tm[0], Tm0_sd=tm[1],
                           Tg=float(tg), seed=_seed(res.seed, f"hlE:{g}"), group=g))
        if fit is None:
            continue
        tab = fit.table()
        if "group" not in tab.columns:
            tab.insert(0, "group", group)
        fits.append(tab)
        if group in res.growth:
            cmp_ = _attempt(res, f"Kg comparison ({group})", lambda f=fit, g=group: compare_kg(
                res.growth[g], f, seed=_seed(res.seed, f"kg:{g}")))
            if cmp_ is not None:
                c = cmp_.table()
                if "group" not in c.columns:
                    c.insert(0, "group", group)
                comparisons.append(c)
    if fits:
        res.tables["hoffman_lauritzen_from_E"] = pd.concat(fits, ignore_index=True)
    if comparisons:
        res.tables["hoffman_lauritzen_kg_comparison"] = pd.concat(comparisons, ignore_index=True)


def _secondary_one(args):
    from .analyses.secondary import compare_secondary
    from .errors import CrystkinInputError

    trace, conversion, seed = args
    try:
        return compare_secondary(trace, conversion, seed=seed, sample=False).row(), None
    except CrystkinInputError as exc:
        return None, f"two-stage Avrami ({trace.run_id}) not possible: {exc}"


def _secondary(res: StudyAnalysis, executor=None) -> None:
    jobs = [(f.trace, f.conversion, _seed(res.seed, f"secondary:{f.run_id}"))
            for f in res.isothermal.fits]
    it = map(_secondary_one, jobs) if executor is None else executor.map(_secondary_one, jobs)
    out = []
    for r, note in it:
        if r is not None:
            out.append(r)
        else:
            res.notes.append(note)
    if out:
        res.tables["secondary"] = (pd.DataFrame(out).sort_values(["group", "T_c_K", "run_id"],
                                                                 kind="stable")
                                   .reset_index(drop=True))


def _crystallinity(res: StudyAnalysis) -> None:
    from .analyses.crystallinity import crystallinity_from_enthalpy, crystallinity_table

    st = res.study.settings
    polymer, dh = st.get("polymer"), st.get("delta_h100")
    if polymer is None and dh is None:
        return
    out = []
    for f in res.isothermal.fits:
        d = f.derived.get("enthalpy_J_per_g")
        if d is None:
            continue
        r = _attempt(res, f"crystallinity ({f.run_id})", lambda d=d: crystallinity_from_enthalpy(
            float(np.median(d)) * 1e3, enthalpy_sd=float(np.std(d)) * 1e3, polymer=polymer,
            delta_h100=dh))
        if r is not None:
            out.append((f.run_id, r))
    if out:
        t = crystallinity_table([r for _, r in out])
        t.insert(0, "run_id", [rid for rid, _ in out])
        res.tables["crystallinity"] = t


def _global_job(group, iso, cool, Tm0, T_inf, Tg, seed, study_name, sample, hold_out=()):
    """One formulation's joint rate model (module level: runs in worker processes).

    Returns only picklable pieces: tables, the exported model and the run bands.
    """
    from .analyses.global_rate import fit_global_rate
    from .errors import CrystkinInputError

    try:
        ids = {t.run_id for t, _ in (*iso, *cool)}
        r = fit_global_rate(iso, cool, Tm0=Tm0, T_inf=T_inf, Tg=Tg, seed=seed, sample=sample,
                            max_points_per_run=150,
                            hold_out=tuple(h for h in hold_out if h in ids))
    except CrystkinInputError as exc:
        return group, None, f"rate model K(T) ({group}) not possible: {exc}"
    out = {"table": r.table(), "summary": r.summary(), "checks": r.checks,
           "statements": tuple(r.statements), "bands": r.bands,
           "model": r.simulation_model(study_name=study_name)}
    return group, out, None


def _global_job_from_traces(group, iso_traces, cool_traces, iso_prep, *args):
    """:func:`_global_job` on raw traces, prepared here exactly as the analyses prepare them.

    Lets the joint fits start before the per-run analyses have finished; runs
    whose preparation fails (reported by those analyses) are left out, as are
    cooling runs whose event is cut off.
    """
    import warnings as _w

    from .errors import CrystkinInputError, DataQualityWarning
    from .prep import prepare_isothermal
    from .prep.cooling import prepare_cooling

    iso, cool = [], []
    with _w.catch_warnings():
        _w.simplefilter("ignore", DataQualityWarning)
        for tr in iso_traces:
            try:
                iso.append((tr, prepare_isothermal(tr, **iso_prep)))
            except CrystkinInputError:
                continue
        for tr in cool_traces:
            try:
                conv = prepare_cooling(tr)
            except CrystkinInputError:
                continue
            if not conv.baseline["cut_off"]:
                cool.append((tr, conv))
        return _global_job(group, iso, cool, *args)


def _global_jobs(res: StudyAnalysis, opts: dict, sample: bool, fit_options) -> list:
    """Arguments of :func:`_global_job_from_traces`, one tuple per formulation.

    Formulations that cannot have the model (no Tm0 or Tg) get a note instead.
    """
    tg = res.study.settings.get("tg")
    iso_prep = dict((fit_options or {}).get("prep_options") or {})
    jobs = []
    for group in res.study.groups:
        iso = [t for t in res.study.runs(kind="isothermal") if t.info.group == group]
        cool = [t for t in res.study.runs(kind="cooling") if t.info.group == group]
        if not iso and not cool:
            continue
        tm = _equilibrium_melting(res, group, opts)
        if tm is None or tg is None:
            res.notes.append(f"rate model K(T) ({group}) not possible: give tm0 and tg in the "
                             "[study] table of the study file")
            continue
        jobs.append((group, iso, cool, iso_prep, tm[0], float(tg) - 30.0, float(tg),
                     _seed(res.seed, f"global:{group}"), res.study.name, sample,
                     tuple(opts.get("hold_out", ()))))
    return jobs


def _submit_global_early(res: StudyAnalysis, opts: dict, executor, sample: bool,
                         fit_options, cache) -> list | None:
    """Submit the joint fits before the per-run work when Tm0 needs no melting analysis."""
    if res.study.settings.get("tm0") is None or res.study.settings.get("tg") is None:
        return None
    return _submit_global(res, opts, executor, sample, fit_options, cache)


def _submit_global(res, opts, executor, sample, fit_options, cache) -> list:
    return [cache.run(f"rate_model_{j[0]}", _global_job_from_traces, j, executor)
            for j in _global_jobs(res, opts, sample, fit_options)]


def _global(res: StudyAnalysis, opts: dict, executor, sample: bool, fit_options=None,
            early=None, cache=None) -> None:
    if early is None:
        early = _submit_global(res, opts, executor, sample, fit_options,
                               cache or _JobCache(None))
    _global_collect(res, [f.result() for f in early])


class _JobCache:
    """Study-level jobs (cooling analysis, joint rate models) kept for a resume, like the
    per-run fits: an interrupted analysis restarted with the same inputs and options
    does not redo the ones that finished."""

    def __init__(self, folder):
        from .analyses.cache import ResultCache
        self.cache = ResultCache(None if folder is None else Path(folder) / "jobs")

    def run(self, label: str, fn, args: tuple, executor):
        """An object with ``result()``: the kept outcome, or ``fn(*args)`` run now or
        submitted to ``executor`` (kept when it finishes)."""
        key = _job_key(args)
        hit = self.cache.get(label, key)
        if hit is not None:
            return _Done(hit)
        if executor is None:
            value = fn(*args)
            self.cache.put(label, key, value)
            return _Done(value)
        future = executor.submit(fn, *args)

        def keep(f):
            # as soon as the job is done, so a kill before its result is used loses nothing
            if not f.cancelled() and f.exception() is None:
                self.cache.put(label, key, f.result())

        future.add_done_callback(keep)
        return future


class _Done:
    def __init__(self, value):
        self.value = value

    def result(self):
        return self.value


def _job_key(args) -> str:
    """Digest of a job's arguments: traces by their data (see run_key), the rest by repr."""
    import hashlib

    from .analyses.cache import run_key
    from .dataset import Trace

    h = hashlib.sha256(__version__.encode())

    def feed(a):
        if isinstance(a, Trace):
            h.update(run_key(a, 0, {}).encode())
        elif isinstance(a, (list, tuple)):
            h.update(b"(")
            for b in a:
                feed(b)
            h.update(b")")
        elif isinstance(a, dict):
            feed(sorted(a.items(), key=lambda kv: str(kv[0])))
        else:
            h.update(repr(a).encode())

    feed(args)
    return h.hexdigest()[:20]


def _global_collect(res: StudyAnalysis, outcomes) -> None:
    tables, summaries, checks = [], [], []
    for group, out, note in outcomes:
        if out is None:
            res.notes.append(note)
            continue
        res.rate_models[group] = out["model"]
        res.rate_bands[group] = out["bands"]
        for df, bucket in ((out["table"], tables), (out["summary"], summaries),
                           (out["checks"], checks)):
            df = df.copy()
            df.insert(0, "group", group)
            bucket.append(df)
        res.notes.extend(f"rate model ({group}): {t}" for t in out["statements"])
    for name, parts in (("global_rate", tables), ("global_parameters", summaries),
                        ("global_checks", checks)):
        if parts:
            res.tables[name] = pd.concat(parts, ignore_index=True)


def _compare(res: StudyAnalysis, opts: dict) -> None:
    from .analyses.compare import compare_formulations

    groups = res.study.groups
    reference = opts.get("reference", groups[0])
    peaks = None
    if res.cooling is not None and res.cooling.conversions:
        by_id = {t.run_id: t for t in res.study.traces}
        peaks = [(by_id[c.run_id], c) for c in res.cooling.conversions if c.run_id in by_id]
    iso = res.isothermal.fits if res.isothermal and res.isothermal.fits else None
    curves = None
    if len(res.rate_models) > 1 and reference in res.rate_models:
        lo = max(m.validity.get("temperature_K", (np.nan, np.nan))[0]
                 for m in res.rate_models.values())
        hi = min(m.validity.get("temperature_K", (np.nan, np.nan))[1]
                 for m in res.rate_models.values())
        if np.isfinite(lo) and np.isfinite(hi) and hi > lo:
            grid = np.linspace(lo, hi, 9)
            curves = {"temperature": grid,
                      "draws": {g: m.rate_constant(grid) for g, m in res.rate_models.items()}}
    cmp_ = _attempt(res, "formulation comparison", lambda: compare_formulations(
        isothermal_fits=iso, cooling_peaks=peaks, reference=reference, rate_curves=curves,
        run_to_run_cv=opts.get("run_to_run_cv"), seed=_seed(res.seed, "compare")))
    if cmp_ is None:
        return
    res.comparison = cmp_
    _add_tables(res, cmp_.tables())
    res.notes.extend(f"verdict: {v}" for v in cmp_.verdicts)
    res.notes.extend(cmp_.warnings)


def _write_figures(analysis: StudyAnalysis, out: Path, executor=None) -> list[FigureFile]:
    import pickle

    from .io.writers import safe_child
    from .report import figures
    from .report.style import render, render_pickled

    folder = out / "figures"
    folder.mkdir(exist_ok=True)
    written: list[FigureFile] = []
    pending = []

    def put(section, fig, name, caption):
        written.append(FigureFile(section, name, caption))
        if executor is not None:
            try:
                data = pickle.dumps(fig)
            except (pickle.PicklingError, TypeError, AttributeError):
                data = None
            if data is not None:
                pending.append((name, executor.submit(render_pickled, data)))
                return
        pending.append((name, _Done(render(fig))))

    _draw_figures(analysis, put, figures)
    for name, job in pending:
        safe_child(folder, name).write_bytes(job.result())
    return written


def _draw_figures(analysis: StudyAnalysis, put, figures) -> None:
    """Build every figure of the analysis and hand it to ``put(section, fig, name, caption)``."""

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
    from .report.figures_cooling import cooling_figures, figure_stem
    from .report.figures_growth import growth_figures, rate_model_figures

    if analysis.cooling is not None:
        for name, fig, cap in _safely(analysis, "cooling figures",
                                      lambda: cooling_figures(analysis.cooling)):
            put("cooling", fig, name, cap)
    if analysis.growth or analysis.melting:
        for name, fig, cap in _safely(analysis, "growth figures", lambda: growth_figures(
                analysis.growth, analysis.melting)):
            put("growth", fig, name, cap)
    chk = analysis.tables.get("global_checks")
    iso = analysis.tables.get("isothermal_runs")
    for g, model in analysis.rate_models.items():
        for name, fig, cap in _safely(analysis, f"rate-model figures ({g})",
                                      lambda g=g, model=model: rate_model_figures(
                model, bands=analysis.rate_bands.get(g),
                checks=None if chk is None else chk[chk["group"] == g],
                isothermal_table=None if iso is None else iso[iso["group"] == g],
                name=f"rate_model_{figure_stem(g)}")):
            put("global", fig, name, cap)
    if analysis.comparison is not None:
        from .report.compare_figures import comparison_figures

        ref = analysis.comparison.reference
        texts = {
            "half_time_ratio": f"Half-time of each formulation divided by that of {ref}, "
                               "against hold temperature (median, 95 % interval; "
                               "below 1 = faster).",
            "cooling_shift": f"Shift of the cooling peak (filled) and onset (open) temperature "
                             f"against {ref}, by cooling rate (95 % intervals).",
            "rate_curve_ratio": f"Rate-model ratio K(T) of each formulation over {ref} "
                                "(95 % band).",
            "nucleation_efficiency": "Nucleation efficiency on the self-nucleation scale "
                                     "(95 % intervals).",
        }
        for name, fig in comparison_figures(analysis.comparison).items():
            put("compare", fig, f"compare_{name}.png", texts.get(name, name.replace("_", " ")))


def _safely(analysis: StudyAnalysis, what: str, make):
    """Figures of one analysis; a figure that cannot be drawn becomes a note."""
    from .errors import CrystkinInputError

    try:
        return make()
    except CrystkinInputError as exc:
        analysis.notes.append(f"{what} not drawn: {exc}")
        return []


def _safe_stem(text: str) -> str:
    import re

    s = re.sub(r"[^A-Za-z0-9_-]+", "-", str(text)).strip("-")
    return s or "group"


def write_study(analysis: StudyAnalysis, out, *, overwrite: bool = False,
                protect=(), extra_files: dict | None = None, executor=None) -> Path:
    """Write tables, draws, figures, report and provenance into ``out`` atomically.

    ``executor`` (optional) renders the figures in parallel; the files are the same.
    """
    out = Path(out)
    protect = list(protect) + [t.info.source for t in analysis.study.traces if t.info.source]
    if analysis.study.source:
        protect.append(analysis.study.source)
    with atomic_output_dir(out, overwrite=overwrite, protect=protect) as tmp:
        for rel, writer in (extra_files or {}).items():
            writer(tmp / rel)
        write_tables(tmp, analysis.tables)
        if analysis.rate_models:
            from .export.simulation import write_simulation_model
            (tmp / "export").mkdir()
            for group, model in analysis.rate_models.items():
                stem = _safe_stem(group)
                write_simulation_model(model, tmp / "export" / f"{stem}_rate_model.json",
                                       tmp / "export" / f"{stem}_K_of_T.csv",
                                       study_name=analysis.study.name)
        if analysis.isothermal and analysis.isothermal.fits:
            write_draws(tmp, "isothermal", {f.run_id: f.derived for f in analysis.isothermal.fits})
        analysis.figures = _write_figures(analysis, tmp, executor)
        stamp = {"crystkin": __version__, "seed": analysis.seed, "options": analysis.options,
                 "study": analysis.study.name,
                 "details": "../provenance.json (per-run priors, windows, diagnostics)"}
        for sub in ("tables", "draws", "figures", "export"):
            if (tmp / sub).is_dir():
                write_json(tmp / sub / "made_by.json", stamp)
        from .report.markdown import write_reports
        prov = _provenance(analysis)
        write_reports(analysis, tmp, provenance=prov)
        write_json(tmp / "provenance.json", prov)
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
