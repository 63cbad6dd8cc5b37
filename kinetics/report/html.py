"""The report as one self-contained HTML file.

Figures are embedded as base64 data, the style sheet is inline and the page
holds no scripts and no reference to anything on a network: it opens offline
in any browser and can be mailed as one file.
"""

from __future__ import annotations

import base64
import re
from pathlib import Path

from .document import BulletList, Document, FigureBlock, MethodBlock, Paragraph, TableBlock

__all__ = ["render_html", "environment"]

_TEMPLATES = Path(__file__).with_name("templates")
_MIME = {".png": "image/png", ".svg": "image/svg+xml", ".jpg": "image/jpeg",
         ".jpeg": "image/jpeg", ".gif": "image/gif", ".webp": "image/webp"}


def environment():
    """The jinja2 environment of the report templates (HTML autoescaped, strict)."""
    from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape

    return Environment(loader=FileSystemLoader(str(_TEMPLATES)),
                       autoescape=select_autoescape(["html", "j2"]), undefined=StrictUndefined,
                       trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True)


def _slug(key: str) -> str:
    return "sec-" + re.sub(r"[^a-z0-9-]+", "-", key.lower()).strip("-")


def _cell_class(text: str, align: str) -> str:
    if align != "left":
        return align
    return align + (" short" if len(text) <= 24 else " long")


def _figure(block: FigureBlock, number: int, folder: Path | None) -> dict:
    data, mime = "", _MIME.get(Path(block.filename).suffix.lower(), "image/png")
    if folder is not None:
        path = folder / block.filename
        if path.is_file():
            data = base64.b64encode(path.read_bytes()).decode("ascii")
    return {"type": "figure", "number": number, "filename": block.filename,
            "caption": block.caption, "data": data, "mime": mime}


def _blocks(section, counters, folder) -> list[dict]:
    out = []
    for b in section.blocks:
        if isinstance(b, Paragraph):
            out.append({"type": "paragraph", "kind": b.kind, "text": b.text})
        elif isinstance(b, BulletList):
            out.append({"type": "list", "title": b.title, "entries": list(b.items)})
        elif isinstance(b, TableBlock):
            counters["table"] += 1
            frame = b.frame
            out.append({"type": "table", "number": counters["table"], "title": b.title,
                        "source": b.source, "headers": [str(c) for c in frame.columns],
                        "align": list(b.table.align),
                        "rows": [[(str(v), _cell_class(str(v), a))
                                  for v, a in zip(row, b.table.align, strict=True)]
                                 for row in frame.itertuples(index=False, name=None)],
                        "notes": list(b.notes)})
        elif isinstance(b, FigureBlock):
            counters["figure"] += 1
            out.append(_figure(b, counters["figure"], folder))
        elif isinstance(b, MethodBlock):
            out.append({"type": "method", "name": b.name, "equation": b.equation,
                        "description": b.description, "references": list(b.references)})
    return out


def render_html(doc: Document, figures_dir=None) -> str:
    """The report as one HTML page.

    Parameters
    ----------
    doc : Document
    figures_dir : path, optional
        Folder holding the figure files named in the document; each is
        embedded as base64 data. A missing file is stated in the page.

    Returns
    -------
    str
        HTML5 text: inline style, embedded images, no scripts, no network references.
    """
    folder = Path(figures_dir) if figures_dir is not None else None
    counters = {"table": 0, "figure": 0}
    sections = [{"id": _slug(s.key), "key": s.key, "title": s.title,
                 "blocks": _blocks(s, counters, folder)} for s in doc.sections]
    env = environment()
    css = (_TEMPLATES / "report.css").read_text(encoding="utf-8")
    return env.get_template("report.html.j2").render(
        title=doc.title, lead=list(doc.lead), sections=sections, css=css,
        version=doc.meta.get("crystkin", "") or "")
