"""The report as Markdown (figure files referenced beside it, under ``figures/``),
and the functions that write both report files of a study.

Rendering only: every number comes formatted from :mod:`kinetics.report.document`.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

from .document import (
    BulletList,
    Document,
    FigureBlock,
    MethodBlock,
    Paragraph,
    TableBlock,
    build_document,
)

__all__ = ["render_markdown", "write_markdown_report", "write_reports", "markdown_cell"]


def markdown_cell(text) -> str:
    """One table cell: whitespace collapsed, pipes and backslashes escaped."""
    s = " ".join(str(text).split())
    return s.replace("\\", "\\\\").replace("|", "\\|")


def _table_lines(block: TableBlock, number: int) -> list[str]:
    lines = [f"**Table {number}. {block.title}**", ""]
    if block.source:
        lines += [f"Full precision: `tables/{block.source}.csv`", ""]
    frame = block.frame
    if frame.shape[1]:
        lines.append("| " + " | ".join(markdown_cell(c) for c in frame.columns) + " |")
        lines.append("| " + " | ".join("---:" if a == "right" else "---"
                                       for a in block.table.align) + " |")
        for row in frame.itertuples(index=False, name=None):
            lines.append("| " + " | ".join(markdown_cell(v) for v in row) + " |")
        lines.append("")
    for note in block.notes:
        lines += [f"*{note}*", ""]
    return lines


def _paragraph_lines(p: Paragraph) -> list[str]:
    if p.kind == "caution":
        return [f"> **Caution.** {p.text}", ""]
    if p.kind == "verdict":
        return [f"**Verdict.** {p.text}", ""]
    if p.kind == "note":
        return [f"*{p.text}*", ""]
    return [p.text, ""]


def render_markdown(doc: Document) -> str:
    """The whole report as Markdown text; figures as ``figures/<file>`` references."""
    lines = [f"# {doc.title}", ""]
    for text in doc.lead:
        lines += [text, ""]
    lines += ["Contents: " + " · ".join(s.title for s in doc.sections), ""]
    n_table = n_figure = 0
    for section in doc.sections:
        lines += [f"## {section.title}", ""]
        for b in section.blocks:
            if isinstance(b, Paragraph):
                lines += _paragraph_lines(b)
            elif isinstance(b, BulletList):
                if b.title:
                    lines += [b.title, ""]
                lines += [f"- {' '.join(str(i).split())}" for i in b.items] + [""]
            elif isinstance(b, TableBlock):
                n_table += 1
                lines += _table_lines(b, n_table)
            elif isinstance(b, FigureBlock):
                n_figure += 1
                lines += [f"![Figure {n_figure}](figures/{b.filename})", "",
                          f"*Figure {n_figure}. {b.caption}*", ""]
            elif isinstance(b, MethodBlock):
                lines += [f"### {b.name}", "", f"`{b.equation}`", "", b.description, ""]
                lines += ["Sources:"] + [f"- {r}" for r in b.references] + [""]
    return "\n".join(lines).rstrip("\n") + "\n"


@dataclass(frozen=True)
class _Figure:
    section: str
    filename: str
    caption: str


def _figures_for(analysis, names):
    known = {f.filename: f for f in (getattr(analysis, "figures", None) or [])
             if hasattr(f, "filename")}
    if names is None:
        return list(known.values())
    return [known.get(n, _Figure("appendix", n, n)) for n in names]


class _View:
    """The analysis with its figure list replaced (nothing else changes)."""

    def __init__(self, analysis, figures):
        self._a = analysis
        self.figures = figures

    def __getattr__(self, name):
        return getattr(self._a, name)


def _read_provenance(out: Path) -> dict:
    path = out / "provenance.json"
    if path.is_file():
        try:
            return json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return {}
    return {}


def write_markdown_report(analysis, out, figures=None) -> Path:
    """Write ``report.md`` into ``out`` (kept for callers that pass figure names).

    Parameters
    ----------
    analysis : StudyAnalysis
    out : path
        Output folder; figures are expected under ``out/figures``.
    figures : list of str, optional
        File names of the figures to include (default: all of
        ``analysis.figures``); names without a recorded section go to the appendix.

    Returns
    -------
    Path
        ``out/report.md``. Provenance is read from ``out/provenance.json`` when
        it is already written; :func:`write_reports` takes it directly.
    """
    out = Path(out)
    doc = build_document(_View(analysis, _figures_for(analysis, figures)),
                         provenance=_read_provenance(out))
    path = out / "report.md"
    path.write_text(render_markdown(doc), encoding="utf-8")
    return path


def write_reports(analysis, out, *, provenance: dict) -> tuple[Path, Path]:
    """Write ``report.html`` (self-contained) and ``report.md`` into ``out``.

    Parameters
    ----------
    analysis : StudyAnalysis
        Its ``figures`` must already be written under ``out/figures``.
    out : path
        Output folder.
    provenance : dict
        The content of provenance.json (software versions, per-run priors and
        diagnostics, options).

    Returns
    -------
    (Path, Path)
        The HTML and the Markdown file.
    """
    from .html import render_html

    out = Path(out)
    doc = build_document(analysis, provenance=provenance)
    html_path, md_path = out / "report.html", out / "report.md"
    html_path.write_text(render_html(doc, out / "figures"), encoding="utf-8")
    md_path.write_text(render_markdown(doc), encoding="utf-8")
    return html_path, md_path
