"""A plain Markdown summary of a study's results (rendering only; nothing recomputed)."""

from __future__ import annotations

from pathlib import Path

from ..io.writers import markdown_table

__all__ = ["write_markdown_report"]


def write_markdown_report(analysis, out: Path, figures: list[str]) -> Path:
    """Write ``report.md``: processing choices, tables, figures, warnings, methods."""
    from ..workflow import PROCESS_CAUTION

    lines = [f"# crystkin results: {analysis.study.name}", ""]
    t = analysis.tables.get("isothermal_runs")
    if t is not None and not t.empty:
        lines += ["## Isothermal kinetics (Avrami)", "",
                  "Posterior medians with 95 % credible intervals, from a fit to the heat-flow "
                  "signal (baseline and noise integrated out). The linearised fit is shown for "
                  "comparison only.", ""]
        cols = [c for c in ("run_id", "group", "T_c_degC", "n", "n_lo95", "n_hi95", "t_half_s",
                            "t_half_s_lo95", "t_half_s_hi95", "k_per_min_n", "n_linear",
                            "r2_linear", "converged", "flags") if c in t.columns]
        lines += [markdown_table(t[cols]), ""]
        lines += [f"![{f}](figures/{f})" for f in figures] + [""]
    if analysis.failures:
        lines += ["## Runs that could not be analysed", ""]
        lines += [f"- {r}: {m}" for r, m in analysis.failures] + [""]
    lines += ["## Note", "", PROCESS_CAUTION, ""]
    path = out / "report.md"
    path.write_text("\n".join(lines), encoding="utf-8")
    return path
