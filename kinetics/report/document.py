"""The report of a study as data: sections of paragraphs, tables and figures.

:func:`build_document` reads what an analysis already holds (its tables,
figures, notes and provenance) and arranges it; it recomputes nothing.  The
same :class:`Document` is rendered as Markdown (:mod:`kinetics.report.markdown`)
and as one self-contained HTML file (:mod:`kinetics.report.html`).

Sections follow the study and appear only when they have something to show:
data and processing choices, isothermal kinetics, cooling kinetics, growth
theory and melting, formulation comparison, global rate model and export,
methods with their published sources, priors, convergence diagnostics,
software versions and, always, the caution for process use.  Tables that
belong to no section go to an appendix.
"""

from __future__ import annotations

import fnmatch
from dataclasses import dataclass, field

import pandas as pd

from ..cautions import PROCESS_CAUTION
from .format import FormattedTable, format_table

__all__ = ["Paragraph", "BulletList", "TableBlock", "FigureBlock", "MethodBlock", "Section",
           "Document", "build_document", "SECTION_TITLES", "SECTION_TABLES", "TABLE_VIEWS",
           "METHODS"]


# ----------------------------------------------------------------------------- the model

@dataclass(frozen=True)
class Paragraph:
    """A paragraph; ``kind`` is "text", "note", "verdict" or "caution"."""

    text: str
    kind: str = "text"


@dataclass(frozen=True)
class BulletList:
    """A list of short items with an optional lead-in line."""

    items: tuple[str, ...]
    title: str = ""


@dataclass(frozen=True, eq=False)
class TableBlock:
    """A table formatted for reading.

    Attributes
    ----------
    title : str
    table : FormattedTable
        Cells as strings, headers with units.
    source : str
        Name of the full-precision CSV table (``tables/<source>.csv``), or ""
        for tables made for the report only.
    notes : tuple of str
    """

    title: str
    table: FormattedTable
    source: str = ""
    notes: tuple[str, ...] = ()

    @property
    def frame(self) -> pd.DataFrame:
        return self.table.frame


@dataclass(frozen=True)
class FigureBlock:
    """A figure file (under ``figures/``) with its caption."""

    filename: str
    caption: str


@dataclass(frozen=True)
class MethodBlock:
    """A method: its equation (plain text) and published sources."""

    name: str
    equation: str
    description: str
    references: tuple[str, ...]


@dataclass(frozen=True)
class Section:
    key: str
    title: str
    blocks: tuple


@dataclass(frozen=True)
class Document:
    """The report: title, opening lines and sections in reading order."""

    title: str
    lead: tuple[str, ...]
    sections: tuple[Section, ...]
    meta: dict = field(default_factory=dict)

    def section(self, key: str) -> Section | None:
        return next((s for s in self.sections if s.key == key), None)

    @property
    def keys(self) -> tuple[str, ...]:
        return tuple(s.key for s in self.sections)


# ----------------------------------------------------------------------------- layout

SECTION_TITLES = {
    "data": "Data and processing choices",
    "isothermal": "Isothermal kinetics",
    "cooling": "Cooling kinetics",
    "growth": "Growth theory and melting",
    "compare": "Formulation comparison",
    "global": "Global rate model and export",
    "methods": "Methods and published sources",
    "priors": "Priors",
    "diagnostics": "Convergence diagnostics",
    "software": "Software and dependency versions",
    "caution": "Caution for process use",
    "appendix": "Appendix: further tables",
}

#: Which result tables each section shows (shell-style patterns, in display order).
SECTION_TABLES = {
    "data": ("preparation", "failures"),
    "isothermal": ("isothermal_runs", "isothermal_posterior", "isothermal_*"),
    "cooling": ("cooling_*", "jeziorny*", "ozawa*", "mo", "mo_*", "friedman*", "vyazovkin*",
                "kissinger*"),
    "growth": ("hoffman_lauritzen*", "regime*", "hl_*", "kg_*", "growth_rates*", "melting*",
               "hoffman_weeks*", "gibbs_thomson*", "secondary*", "crystallinity*"),
    "compare": ("compare_*", "ranking", "nucleation_efficiency", "run_to_run_scatter"),
    "global": ("global_*", "prediction*", "simulation*"),
}

_INTROS = {
    "data": "How each run's signal was turned into a conversion curve: the event window, the "
            "baseline, the induction time and every data-quality warning. These choices are "
            "also recorded in provenance.json.",
    "isothermal": "Avrami parameters of each isothermal hold: posterior medians with 95 % "
                  "credible intervals from a fit to the heat-flow signal (baseline and noise "
                  "integrated out). The classic linearised fit is shown for comparison only.",
    "cooling": "Cooling scans at several rates: Jeziorny, Ozawa and Mo descriptors and the "
               "isoconversional activation energy, each with 95 % intervals that carry the "
               "conversion noise of the runs.",
    "growth": "Hoffman-Lauritzen analysis of the crystallization rates, equilibrium melting "
              "temperature and, where fitted, secondary crystallization and absolute "
              "crystallinity.",
    "compare": "Each formulation against the reference, condition by condition, with the "
               "probability of each direction and the run-to-run scatter taken into account.",
    "global": "One Nakamura-Hoffman-Lauritzen rate function K(T) fitted to the runs together, "
              "its checks against the runs, the exported model and predictions.",
    "methods": "The methods used in this report, with their equations and published sources. "
               "Sources marked 'from memory' were not re-checked against the original paper.",
    "priors": "Prior distributions of the fitted parameters, in physical units.",
    "diagnostics": "Convergence of the posterior sampling: a chain counts as converged when "
                   "it is at least 50 integrated autocorrelation times long.",
    "appendix": "Tables written by the analysis that belong to no section above.",
}

#: Report views of known tables: title and the columns shown (all rows are shown;
#: every column stays in the CSV file).
TABLE_VIEWS = {
    "preparation": ("Signal preparation of each run",
                    ("run_id", "group", "kind", "T_set_degC", "rate_K_per_min", "exotherm",
                     "baseline", "window_start_s", "window_end_s", "transient_end_s",
                     "induction_time_s", "enthalpy_J_per_g", "enthalpy_J", "warnings")),
    "failures": ("Runs that could not be analysed", None),
    "isothermal_runs": ("Half-time and rate constant of each hold (Avrami)",
                        ("run_id", "group", "T_c_degC", "n", "k_per_min_n", "K_per_min",
                         "t_half_s", "induction_time_s", "enthalpy_J_per_g", "n_linear",
                         "t_half_linear_s", "r2_linear", "converged", "flags")),
    "isothermal_posterior": ("Posterior summary of every fitted parameter",
                             ("run_id", "parameter", "unit", "median", "sd", "nuisance")),
    "cooling_runs": ("Cooling runs: rate, characteristic temperatures and enthalpy",
                     ("group", "run_id", "beta_K_per_min", "T_onset_degC", "T_peak_degC",
                      "T_end_degC", "t_half_s", "enthalpy_J_per_g", "lag_K", "baseline",
                      "cut_off", "used", "flags")),
    "jeziorny": ("Jeziorny descriptors of each cooling run",
                 ("group", "run_id", "beta_K_per_min", "n", "log10_Zt", "log10_Zc", "n_linear",
                  "r2_linear", "scatter_factor", "x_range")),
    "ozawa": ("Ozawa exponent m and ln K(T) at each temperature",
              ("group", "T_degC", "estimable", "n_rates", "m", "lnK_T", "scatter_factor",
               "rates_K_per_min", "note")),
    "mo": ("Mo parameters a and F(T) at each conversion",
           ("group", "X", "T_mean_degC", "estimable", "n_rates", "a", "log10_F_T",
            "scatter_factor", "rates_K_per_min", "note")),
    "friedman": ("Friedman activation energy against conversion",
                 ("group", "X", "T_mean_degC", "estimable", "n_runs", "E_kJ_per_mol", "ln_Af",
                  "scatter_factor", "note")),
    "vyazovkin": ("Vyazovkin activation energy against conversion",
                  ("group", "X", "T_mean_degC", "estimable", "n_runs", "E_kJ_per_mol",
                   "E_point_kJ_per_mol", "phi_min_ratio", "note")),
    "kissinger": ("Kissinger energy (requested; unsound on cooling)", None),
    "hoffman_lauritzen": ("Hoffman-Lauritzen nucleation constant and regimes",
                          ("group", "Tm0_source", "model", "segment", "chosen", "regime",
                           "n_points", "T_min_degC", "T_max_degC", "Kg_K2", "ln_prefactor",
                           "prefactor_unit", "sigma_sigma_e_J2_per_m4", "sigma_e_J_per_m2",
                           "q_fold_kJ_per_mol", "T_break_degC", "Kg_ratio_low_over_high",
                           "p_two_lines", "Tm0_K", "U_star_J_per_mol", "T_inf_K",
                           "noise_model", "flags")),
    "melting_points": ("Melting peaks after isothermal holds", None),
    "hoffman_weeks": ("Equilibrium melting temperature (Hoffman-Weeks)",
                      ("group", "method", "n_points", "Tm0_degC", "gamma", "a",
                       "fraction_valid", "r2_linear", "flags", "caution")),
    "gibbs_thomson": ("Equilibrium melting temperature (Gibbs-Thomson)", None),
    "secondary": ("Secondary crystallization: two-stage against one-stage Avrami",
                  ("run_id", "group", "T_c_degC", "model_chosen", "delta_bic_one_minus_two",
                   "w2", "n1", "t_half1_s", "n2", "t_half2_s", "t_half_total_s", "converged",
                   "flags")),
    "crystallinity": ("Absolute crystallinity from the enthalpy", None),
    "compare_half_time": ("Half-time ratios against the reference (isothermal)", None),
    "compare_cooling": ("Shifts of the cooling peak and onset against the reference", None),
    "compare_rate_curve": ("Rate-model ratio K(T) against the reference", None),
    "nucleation_efficiency": ("Nucleation efficiency", None),
    "ranking": ("Ranking of the formulations", None),
    "run_to_run_scatter": ("Run-to-run scatter used in the comparison", None),
    "global_rate": ("Global rate model: parameters", None),
    "global_checks": ("Global rate model checked against each run", None),
    "prediction": ("Prediction on a temperature profile", None),
    "predictions": ("Predictions on temperature profiles", None),
}

_NOTE_ROUTES = (
    ("cooling", ("jeziorny", "ozawa", "mo (", "friedman", "vyazovkin", "kissinger",
                 "cooling")),
    ("growth", ("hoffman-lauritzen", "hoffman-weeks", "marand", "gibbs", "two-stage",
                "secondary", "crystallinity", "regime", "melting")),
    ("global", ("global", "rate model", "prediction", "simulation")),
    ("compare", ("comparison", "formulation", "run-to-run", "nucleation efficiency",
                 "ranking")),
    ("isothermal", ("isothermal", "avrami", "isotherm", "half-time")),
)

_CONTENT_SECTIONS = ("data", "isothermal", "cooling", "growth", "compare", "global")
_FIGURE_SECTIONS = {"data": "data", "isothermal": "isothermal", "diagnostics": "diagnostics",
                    "cooling": "cooling", "growth": "growth", "compare": "compare",
                    "global": "global"}


# ----------------------------------------------------------------------------- methods

#: (key, table patterns that mean the method was used, name, equation, description, sources)
METHODS = (
    ("preparation", ("preparation",), "Signal preparation",
     "X(t) = ∫[ts, t] (q − b) dτ / ∫[ts, te] (q − b) dτ",
     "The exotherm sign is found from the data. The baseline b is a line between flat "
     "regions (for isothermal holds anchored on the end-of-run level) or, for cooling "
     "scans with a heat-capacity step, a conversion-weighted (sigmoidal) baseline. The "
     "window [ts, te], baseline and induction time of each run are recorded.",
     ("crystkin's own procedure (the conversion-weighted baseline is common practice; no "
      "single source)",)),
    ("avrami", ("isothermal_runs",), "Avrami (JMAK) model, fitted to the heat-flow signal",
     "X(t) = 1 − exp[−k (t − t0)^n];   t½ = (ln 2 / k)^(1/n);   "
     "q(t) = A dX/dt + baseline + transient",
     "The likelihood is on the measured heat flow, whose noise is close to independent, not "
     "on the cumulative conversion. Area, baseline terms and the noise level are integrated "
     "out analytically. Half-time, k and the time of the peak are computed per posterior "
     "draw. The linearised fit ln[−ln(1 − X)] = ln k + n ln(t − t0) over 3-20 % conversion "
     "is shown beside it for comparison.",
     ("Avrami, J. Chem. Phys. 7 (1939) 1103; 8 (1940) 212 (second paper from memory)",
      "Kolmogorov, Izv. Akad. Nauk SSSR 1937, 3, 355",
      "Johnson & Mehl, Trans. AIME 135 (1939) 416 (from memory)",
      "Lorenzo, Arnal, Albuerne & Müller, Polym. Test. 26 (2007) 222 (3-20 % range; from "
      "memory)")),
    ("sampling", ("isothermal_posterior", "global_*"), "Posterior sampling",
     "p(θ | data) ∝ p(data | θ) p(θ);   converged when steps ≥ 50 τ",
     "Affine-invariant ensemble sampler (emcee) with differential-evolution moves, walkers "
     "started in a small ball around the least-squares optimum, seeded; burn-in discarded; "
     "τ is the integrated autocorrelation time. Intervals are central 68 % and 95 % "
     "quantiles of the draws.",
     ("Foreman-Mackey, Hogg, Lang & Goodman, PASP 125 (2013) 306, doi:10.1086/670067",
      "Goodman & Weare, Comm. App. Math. Comp. Sci. 5 (2010) 65 (pages from memory)",
      "ter Braak, Statistics and Computing 16 (2006) 239 (differential-evolution moves; "
      "from memory)")),
    ("jeziorny", ("jeziorny",), "Jeziorny",
     "log[−ln(1 − X)] = log Zt + n log t,   t = (T_onset − T)/β;   log Zc = log Zt / β",
     "β in K/min, t in min. Zc is an empirical descriptor only: the slope is not the "
     "isothermal Avrami exponent and the division by β has no kinetic meaning.",
     ("Jeziorny, Polymer 19 (1978) 1142 (from memory)",
      "Vyazovkin, Polymers 15 (2023) 197 (why the correction should be avoided)")),
    ("ozawa", ("ozawa",), "Ozawa",
     "1 − X(T) = exp[−K(T)/β^m],   i.e.   ln[−ln(1 − X)] = ln K(T) − m ln β at fixed T",
     "At each temperature, across cooling rates (β in K/min); a temperature with fewer than "
     "three usable rates is reported as not estimable.",
     ("Ozawa, Polymer 12 (1971) 150 (from memory)",)),
    ("mo", ("mo",), "Mo",
     "log β = log F(T) − a log t at fixed X,   F(T) = [K(T)/Zt]^(1/m),   a = n/m",
     "Fitted as log t against log β (t is the measured quantity).",
     ("Liu, Mo, Wang & Zhang, Polym. Eng. Sci. 37 (1997) 568 (from memory)",)),
    ("friedman", ("friedman",), "Friedman (differential isoconversional)",
     "ln(dX/dt)_X,i = ln[A_X f(X)] − E_X / (R T_X,i)",
     "At each conversion X across the runs; R = 8.314462618 J/(mol K).",
     ("Friedman, J. Polym. Sci. C 6, 183 (year 1964 from memory)",
      "Vyazovkin et al., ICTAC Kinetics Committee recommendations, Thermochim. Acta 520 "
      "(2011) 1")),
    ("vyazovkin", ("vyazovkin",), "Vyazovkin (advanced isoconversional)",
     "E_X minimises Φ(E) = Σ_i Σ_j≠i J[E, T_i(t)] / J[E, T_j(t)],   "
     "J = ∫[t(X−ΔX), t(X)] exp[−E/(R T(t))] dt",
     "Valid for any temperature programme, cooling included; the interval comes from "
     "resampling the conversion curves from their noise model.",
     ("Vyazovkin, J. Comput. Chem. 18 (1997) 393; 22 (2001) 178 (from memory)",)),
    ("kissinger", ("kissinger",), "Kissinger (on request only)",
     "ln(β / Tp²) = const − E / (R Tp)",
     "Unsound for processes on cooling: the assumption of heating is built into the final "
     "equation. Shown only because it was requested.",
     ("Kissinger, Anal. Chem. 29 (1957) 1702 (volume and pages from memory)",
      "Vyazovkin, Molecules 25 (2020) 2813")),
    ("lines", ("jeziorny", "ozawa", "mo", "friedman", "kissinger"),
     "Straight lines with carried-in point errors",
     "χ² = rᵀ C⁻¹ r,   S = √(χ² / (N − 2)),   C → max(1, S)² C",
     "Each point's error comes from its run's conversion noise model (delta method). When the "
     "points scatter more than these errors allow, the errors are scaled by the Birge ratio S "
     "(the 'scatter factor' in the tables).",
     ("Birge, Phys. Rev. 40 (1932) 207 (from memory)",)),
    ("hoffman_lauritzen", ("hoffman_lauritzen*", "regime*"), "Hoffman-Lauritzen",
     "ln(rate) + U* / [R (Tc − T∞)] = ln G0 − Kg / (Tc ΔT f),   ΔT = Tm⁰ − Tc,   "
     "f = 2 Tc / (Tm⁰ + Tc)",
     "Rate 1/t½ (or the growth rate G). One line, or two lines meeting at a regime break, "
     "chosen by the Bayesian information criterion. Tm⁰, U* and T∞ are drawn from their "
     "stated uncertainty for every draw; by default U* = 1500 cal/mol = 6276 J/mol and "
     "T∞ = Tg − 30 K. Kg = n b0 σ σe Tm⁰ / (Δhf k_B) with n = 4 in regimes I and III, 2 in "
     "regime II.",
     ("Hoffman & Miller, Polymer 38 (1997) 3151 (from memory)",
      "Clark & Hoffman, Macromolecules 17 (1984) 878 (regime III in polypropylene; from "
      "memory)")),
    ("hl_energy", ("hl_*", "kg_*"), "Hoffman-Lauritzen parameters from E(T)",
     "E(T) = U* T² / (T − T∞)² + Kg R (Tm⁰² − T² − Tm⁰ T) / [(Tm⁰ − T)² T]",
     "Kg (and optionally U*) from the isoconversional activation energy against temperature.",
     ("Vyazovkin & Sbirrazzuoli, Macromol. Rapid Commun. 25 (2004) 733 (from memory)",)),
    ("hoffman_weeks", ("hoffman_weeks*",), "Hoffman-Weeks (linear and nonlinear)",
     "Tm = Tm⁰ (1 − 1/γ) + Tc / γ;   nonlinear: Tm⁰ / (Tm⁰ − Tm) = γ [Tm⁰ / (Tm⁰ − Tc) + a]",
     "Melting temperature against crystallization temperature, extrapolated to Tm = Tc. The "
     "linear extrapolation can mislead (it is invalid for isotactic polypropylene).",
     ("Hoffman & Weeks, J. Res. NBS 66A (1962) 13, doi:10.6028/jres.066A.003",
      "Marand, Xu & Srinivas, Macromolecules 31 (1998) 8219 (pages from memory)",
      "Yamada et al., Macromolecules 36 (2003) 4802")),
    ("gibbs_thomson", ("gibbs_thomson*",), "Gibbs-Thomson",
     "Tm = Tm⁰ [1 − 2 σe / (Δhf l)],   l = φ L,   L = 2π / q*",
     "Lamellar thickness l from the SAXS long period L and the volume crystallinity φ.",
     ("Standard form (from memory); long period: IUPAC Gold Book 14251",)),
    ("secondary", ("secondary*",), "Two-stage (parallel) Avrami",
     "X = w1 [1 − exp(−k1 t^n1)] + w2 [1 − exp(−k2 t^n2)],   w1 + w2 = 1",
     "Chosen over one stage only when the Bayesian information criterion favours it.",
     ("Velisaris & Seferis, Polym. Eng. Sci. 26 (1986) 1574 (from memory)",)),
    ("crystallinity", ("crystallinity*",), "Absolute crystallinity",
     "Xc = ΔH / ΔH⁰m;   Vc = Wc / [Wc + (ρc / ρa)(1 − Wc)]",
     "ΔH⁰m of the 100 % crystalline polymer from the cited table in kinetics.constants.",
     ("Wunderlich, Thermal Analysis (Academic Press, 1990) (ΔH⁰m values, as cited)",)),
    ("compare", ("compare_*", "ranking", "run_to_run_scatter"), "Formulation comparison",
     "y_i ~ N(μ_gc, s_i² + τ²);   ratio = exp(μ_f − μ_ref) per draw;   "
     "P(faster) = share of draws with ratio < 1",
     "Random-effects model with one pooled run-to-run SD τ per quantity (half-normal prior); "
     "a difference is called when its direction has probability ≥ 0.975.",
     ("Gelman, Carlin, Stern, Dunson, Vehtari & Rubin, Bayesian Data Analysis, 3rd ed. "
      "(2013), section 5.4 (from memory)",
      "Gelman, Bayesian Analysis 1 (2006) 515 (from memory)")),
    ("nucleation_efficiency", ("nucleation_efficiency",), "Nucleation efficiency",
     "NE = 100 (Tc,additive − Tc,neat) / (Tc,max − Tc,neat)",
     "On the self-nucleation scale, with reference temperatures given by the user.",
     ("Fillon, Lotz, Thierry & Wittmann, J. Polym. Sci. B 31 (1993) 1395 (from memory)",)),
    ("global", ("global_*",), "Global Nakamura-Hoffman-Lauritzen rate model",
     "X(t) = 1 − exp[−(∫ K(T(s)) ds)^n];   K(T) = (ln 2)^(1/n) / t½(T);   "
     "1/t½ = (1/t½)0 exp[−U* / (R (T − T∞))] exp[−Kg / (T ΔT f)]",
     "Fitted to the heat-flow signals of isothermal and cooling runs together; each run's "
     "area, baseline and noise level are integrated out. Each run's rate may differ from the "
     "common K(T) by a factor exp(u), u ~ N(0, s²), with the run-to-run SD s estimated "
     "(3 or more runs), so that the intervals carry the scatter between repeated runs. On "
     "invented replicate studies with 4 % scatter the 95 % intervals of n and Kg covered the "
     "true values in 18 of 20.",
     ("Nakamura, Watanabe, Katayama & Amano, J. Appl. Polym. Sci. 16 (1972) 1077 (from "
      "memory)",
      "Patel & Spruiell, Polym. Eng. Sci. 31 (1991) 730 (from memory)",
      "Hoffman & Miller, Polymer 38 (1997) 3151 (from memory)",
      "Gelman et al., Bayesian Data Analysis, 3rd ed. (2013), section 5.4, the hierarchical "
      "normal model (from memory)")),
    ("prediction", ("prediction*",), "Prediction on a temperature profile",
     "X(t) from the rate model for every posterior draw;   t(X*) = first time X ≥ X*",
     "Median and 95 % band of X(t); a target not reached before the glass transition or the "
     "end of the profile is stated as such.",
     ("Nakamura et al. (1972), as above",)),
    ("rounding", ("*",), "Numbers in the tables",
     "value [lo, hi]: median and central 95 % interval",
     "Rounded to the narrower half of the interval: two significant digits of it when its "
     "leading digits are 100-354, one otherwise. The CSV tables keep full precision.",
     ("Particle Data Group, Review of Particle Physics, Introduction (rounding rule; from "
      "memory)",)),
)


# ----------------------------------------------------------------------------- building

def _matches(name: str, patterns) -> bool:
    return any(fnmatch.fnmatchcase(name, p) for p in patterns)


def _section_of_table(name: str) -> str:
    for key in _CONTENT_SECTIONS:
        if _matches(name, SECTION_TABLES[key]):
            return key
    return "appendix"


def _table_block(name: str, df: pd.DataFrame) -> TableBlock:
    title, cols = TABLE_VIEWS.get(name, (name.replace("_", " ").capitalize(), None))
    ft = format_table(df, columns=cols)
    notes = list(ft.notes)
    if cols is not None and len(ft.columns) < len(df.columns):
        notes.append(f"Further columns in tables/{name}.csv.")
    return TableBlock(title=title, table=ft, source=name, notes=tuple(notes))


def _route_note(text: str) -> str:
    low = text.lower()
    for key, words in _NOTE_ROUTES:
        if any(w in low for w in words):
            return key
    return "data"


def _study_lead(analysis, provenance: dict) -> list[str]:
    study = analysis.study
    traces = list(getattr(study, "traces", ()))
    kinds: dict[str, int] = {}
    for t in traces:
        kinds[t.info.kind] = kinds.get(t.info.kind, 0) + 1
    named = {"isothermal": "isothermal holds", "cooling": "cooling scans",
             "heating": "heating scans"}
    parts = [f"{n} {named.get(k, k + ' runs')}" for k, n in kinds.items()]
    groups = list(getattr(study, "groups", ()))
    lines = []
    if traces:
        lines.append(f"{len(traces)} runs ({', '.join(parts)}) in {len(groups)} "
                     f"formulation{'s' if len(groups) != 1 else ''}: {', '.join(groups)}.")
    src = getattr(study, "source", "") or provenance.get("study", {}).get("source", "")
    bits = []
    if src:
        bits.append(f"Study file: {src}.")
    bits.append(f"Seed: {analysis.seed}.")
    seconds = getattr(analysis, "seconds", None)
    if seconds:
        bits.append(f"Analysis time: {seconds:.1f} s.")
    lines.append(" ".join(bits))
    return lines


def _invented(analysis) -> bool:
    name = str(getattr(analysis.study, "name", "")).lower()
    return "invented" in name


def _priors_blocks(provenance: dict) -> list:
    blocks = []
    runs = provenance.get("runs") or {}
    per_run = {rid: r.get("priors") for rid, r in runs.items()
               if isinstance(r, dict) and isinstance(r.get("priors"), dict)}
    if per_run:
        params = list(dict.fromkeys(p for pri in per_run.values() for p in pri))
        common, varying = {}, []
        for p in params:
            vals = {str(pri[p]) for pri in per_run.values() if p in pri}
            if len(vals) == 1:
                where = "" if all(p in pri for pri in per_run.values()) else \
                    " (in the runs where this term is fitted)"
                common[p] = vals.pop() + where
            else:
                varying.append(p)
        if common:
            blocks.append(BulletList(tuple(f"{p}: {d}" for p, d in common.items()),
                                     title="Priors common to every run:"))
        if varying:
            rows = [{"run_id": rid, **{p: pri.get(p, "") for p in varying}}
                    for rid, pri in per_run.items()]
            df = pd.DataFrame(rows)
            blocks.append(TableBlock(
                "Priors that depend on the run (ranges set from each run's data)",
                format_table(df, drop_empty=False)))
    for label, val in _provenance_entries(provenance, "priors"):
        blocks.append(BulletList(tuple(f"{p}: {d}" for p, d in val["priors"].items()),
                                 title=f"Priors of {label}:"))
    return blocks


def _provenance_entries(provenance: dict, key: str):
    """(label, entry) of provenance entries other than the runs that hold ``key``,
    also one level down (for example one entry per formulation)."""
    out = []
    for name, val in provenance.items():
        if name in ("runs", "software") or not isinstance(val, dict):
            continue
        if isinstance(val.get(key), dict):
            out.append((name.replace("_", " "), val))
            continue
        for sub, inner in val.items():
            if isinstance(inner, dict) and isinstance(inner.get(key), dict):
                out.append((f"{name.replace('_', ' ')} ({sub})", inner))
    return out


_DIAG_COLUMNS = ("converged", "n_steps", "n_walkers", "n_draws", "tau_max", "ess", "acceptance",
                 "seconds")


def _diagnostics_blocks(analysis, provenance: dict) -> list:
    blocks = []
    rows, reasons = [], []
    sources = [(rid, r.get("diagnostics")) for rid, r in (provenance.get("runs") or {}).items()
               if isinstance(r, dict)]
    sources += [(label, val["diagnostics"])
                for label, val in _provenance_entries(provenance, "diagnostics")]
    for name, d in sources:
        if not isinstance(d, dict):
            continue
        row = {"run_id": name}
        for c in _DIAG_COLUMNS:
            v = d.get(c)
            if c == "tau_max" and v is None and isinstance(d.get("tau"), dict) and d["tau"]:
                v = max(d["tau"].values())
            row[c] = v
        rows.append(row)
        if d.get("converged") is False:
            reasons.append(f"{name}: {d.get('reason', 'not converged')}")
    if not rows:
        t = analysis.tables.get("isothermal_runs")
        if t is not None and "converged" in t.columns and t["converged"].notna().any():
            cols = [c for c in ("run_id", "converged", "ess", "tau_max_steps", "acceptance",
                                "method") if c in t.columns]
            blocks.append(TableBlock("Sampler diagnostics of each run", format_table(t[cols]),
                                     source="isothermal_runs"))
        return blocks
    df = pd.DataFrame(rows).rename(columns={"tau_max": "tau_max_steps", "seconds": "time_s",
                                            "n_steps": "steps", "n_walkers": "walkers",
                                            "n_draws": "draws"})
    blocks.append(TableBlock("Sampler diagnostics of each fit", format_table(df)))
    n_bad = len(reasons)
    blocks.append(Paragraph(f"{len(rows) - n_bad} of {len(rows)} fits converged." if n_bad
                            else f"All {len(rows)} fits converged.",
                            kind="note" if n_bad else "text"))
    if reasons:
        blocks.append(BulletList(tuple(reasons), title="Fits that did not converge (their "
                                                        "intervals are provisional):"))
    return blocks


def _software_blocks(analysis, provenance: dict) -> list:
    from importlib.metadata import PackageNotFoundError, version

    soft = dict(provenance.get("software") or {})
    for pkg in ("crystkin", "numpy", "scipy", "pandas", "emcee", "matplotlib", "jinja2"):
        if pkg not in soft:
            try:
                soft[pkg] = version(pkg)
            except PackageNotFoundError:
                continue
    df = pd.DataFrame({"package": list(soft), "version": [str(v) for v in soft.values()]})
    blocks = [TableBlock("Versions used", format_table(df))]
    opts = provenance.get("options", getattr(analysis, "options", None))
    if opts:
        blocks.append(Paragraph("Options: " + ", ".join(f"{k} = {v}" for k, v in opts.items())
                                + "."))
    return blocks


def _methods_blocks(table_names) -> list:
    out = []
    for key, patterns, name, eq, desc, refs in METHODS:
        if key == "rounding":
            continue
        if any(_matches(t, patterns) for t in table_names):
            out.append(MethodBlock(name, eq, desc, refs))
    if out:
        key, patterns, name, eq, desc, refs = METHODS[-1]
        out.append(MethodBlock(name, eq, desc, refs))
    return out


def _figure_blocks(figures, section: str) -> list:
    out = []
    for f in figures:
        sec = _FIGURE_SECTIONS.get(getattr(f, "section", ""), "appendix")
        if sec == section:
            out.append(FigureBlock(f.filename, f.caption))
    return out


def build_document(analysis, *, provenance: dict | None = None) -> Document:
    """Arrange a study's results into a report.

    Parameters
    ----------
    analysis : StudyAnalysis
        Or any object with ``study`` (``name``, ``traces``, ``groups``), ``seed``,
        ``tables`` (name -> DataFrame), ``figures`` (objects with ``section``,
        ``filename``, ``caption``), ``failures`` and ``notes``; ``options`` and
        ``seconds`` are used when present.  Notes starting with "verdict: " go to
        the comparison, "caution: " ones to the section they concern.
    provenance : dict, optional
        As written to provenance.json: ``software``, ``runs`` (per run ``priors``
        and ``diagnostics``), ``options``; further entries holding ``priors`` or
        ``diagnostics`` are reported too.

    Returns
    -------
    Document
        Only sections with content; the caution for process use always.
    """
    provenance = dict(provenance or {})
    tables = {k: v for k, v in (analysis.tables or {}).items()
              if v is not None and len(v) > 0}
    figures = list(getattr(analysis, "figures", None) or [])
    content: dict[str, list] = {k: [] for k in (*_CONTENT_SECTIONS, "appendix")}

    placed: dict[str, list[str]] = {k: [] for k in content}
    for key in _CONTENT_SECTIONS:
        for pattern in SECTION_TABLES[key]:
            for name in tables:
                if fnmatch.fnmatchcase(name, pattern) and _section_of_table(name) == key \
                        and name not in placed[key]:
                    placed[key].append(name)
    placed["appendix"] = [n for n in tables if _section_of_table(n) == "appendix"]

    failures = list(getattr(analysis, "failures", None) or [])
    fig_sections = {_FIGURE_SECTIONS.get(getattr(f, "section", ""), "appendix") for f in figures}
    notes: dict[str, list[Paragraph]] = {k: [] for k in content}
    for note in getattr(analysis, "notes", None) or []:
        text = str(note)
        if text.startswith("verdict: "):
            notes["compare"].append(Paragraph(text[len("verdict: "):], kind="verdict"))
        elif text.startswith("caution: "):
            body = text[len("caution: "):]
            notes[_route_note(body)].append(Paragraph(body, kind="caution"))
        else:
            notes[_route_note(text)].append(Paragraph(text, kind="note"))
    present = {k for k in _CONTENT_SECTIONS
               if placed[k] or k in fig_sections
               or any(p.kind == "verdict" for p in notes[k])}
    present.add("data")
    for k in _CONTENT_SECTIONS:
        if k not in present:
            notes["data"] += notes[k]
            notes[k] = []

    for key in _CONTENT_SECTIONS:
        if key not in present:
            continue
        blocks: list = []
        if key == "data" and _invented(analysis):
            blocks.append(Paragraph("The data of this study are invented (generated by "
                                    "crystkin's built-in demo from its own models plus noise); "
                                    "no real material was measured.", kind="caution"))
        verdicts = [p for p in notes[key] if p.kind == "verdict"]
        cautions = [p for p in notes[key] if p.kind == "caution"]
        others = [p for p in notes[key] if p.kind != "verdict" and p not in cautions]
        blocks += verdicts
        for name in placed[key]:
            if key == "data" and name == "failures" and failures:
                continue
            blocks.append(_table_block(name, tables[name]))
        if key == "data" and failures:
            blocks.append(BulletList(tuple(f"{r}: {m}" for r, m in failures),
                                     title="Runs that could not be analysed:"))
        blocks += _figure_blocks(figures, key)
        shown = " ".join(n for b in blocks if isinstance(b, TableBlock) for n in b.notes)
        blocks += [c for c in dict.fromkeys(cautions) if c.text not in shown]
        if others:
            blocks.append(BulletList(tuple(dict.fromkeys(p.text for p in others)),
                                     title="Findings:"))
        content[key] = blocks

    sections = []
    for key in _CONTENT_SECTIONS:
        if key in present and (key != "data" or content[key]):
            sections.append(Section(key, SECTION_TITLES[key],
                                    (Paragraph(_INTROS[key]), *content[key])))
    methods = _methods_blocks(tables)
    if methods:
        sections.append(Section("methods", SECTION_TITLES["methods"],
                                (Paragraph(_INTROS["methods"]), *methods)))
    priors = _priors_blocks(provenance)
    if priors:
        sections.append(Section("priors", SECTION_TITLES["priors"],
                                (Paragraph(_INTROS["priors"]), *priors)))
    diag = _diagnostics_blocks(analysis, provenance) + _figure_blocks(figures, "diagnostics")
    if diag:
        sections.append(Section("diagnostics", SECTION_TITLES["diagnostics"],
                                (Paragraph(_INTROS["diagnostics"]), *diag)))
    sections.append(Section("software", SECTION_TITLES["software"],
                            tuple(_software_blocks(analysis, provenance))))
    sections.append(Section("caution", SECTION_TITLES["caution"],
                            (Paragraph(PROCESS_CAUTION, kind="caution"),)))
    appendix = [_table_block(n, tables[n]) for n in placed["appendix"]]
    appendix += _figure_blocks(figures, "appendix")
    if appendix:
        sections.append(Section("appendix", SECTION_TITLES["appendix"],
                                (Paragraph(_INTROS["appendix"]), *appendix)))
    name = getattr(analysis.study, "name", "") or "study"
    lead = _study_lead(analysis, provenance)
    meta = {"study": name, "seed": analysis.seed,
            "crystkin": (provenance.get("software") or {}).get("crystkin", "")}
    return Document(title=f"Crystallization kinetics: {name}", lead=tuple(lead),
                    sections=tuple(sections), meta=meta)

