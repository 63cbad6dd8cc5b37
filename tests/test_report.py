"""The study report: numbers rounded to their uncertainty, sections that follow the
data, Markdown tables that read back into the CSV numbers, a self-contained HTML file,
and the figure functions of the cooling, growth and rate-model analyses.

Outside references: the rounding rule of the Particle Data Group (Review of
Particle Physics, "Introduction", from memory: keep two significant digits of
the uncertainty when its three leading digits are 100-354, one digit for
355-949, and round 950-999 up to two digits of the next power of ten), applied
by hand in ``test_rounding_to_the_uncertainty_by_hand``; the PNG file signature
and IHDR layout of the PNG specification (W3C, Portable Network Graphics,
2nd ed., section 5). The study data are invented (kinetics.demo).
"""

from __future__ import annotations

import base64
import functools
import json
import re
import struct
import warnings
from dataclasses import dataclass, field
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from kinetics.errors import DataQualityWarning
from kinetics.report.document import (
    SECTION_TITLES,
    BulletList,
    FigureBlock,
    MethodBlock,
    Paragraph,
    TableBlock,
    build_document,
)
from kinetics.report.format import (
    MEDIAN_HEADER,
    column_header,
    decimals_for,
    format_interval,
    format_number,
    format_table,
    interval_groups,
    split_unit,
)
from kinetics.report.html import render_html
from kinetics.report.markdown import render_markdown, write_markdown_report, write_reports

# --------------------------------------------------------------------------- fixtures

CONTENT = ("data", "isothermal", "cooling", "growth", "compare", "global")
FAST_SAMPLER = {"max_steps": 400, "min_steps": 200, "check_every": 100}


@functools.cache
def _demo(quick: bool):
    import tempfile

    from kinetics.demo import write_demo_study
    from kinetics.io import read_study

    folder = Path(tempfile.mkdtemp(prefix="crystkin-report-test-"))
    return read_study(write_demo_study(folder / "input", seed=0, quick=quick)), folder


def _subset(study, keep):
    from kinetics.dataset import Study

    return Study(name=study.name, traces=tuple(t for t in study.traces if keep(t)),
                 source=study.source, settings=study.settings)


def _write(analysis, out: Path) -> dict:
    """Tables, figures and provenance through the workflow, then both reports."""
    from kinetics.workflow import write_study

    write_study(analysis, out)
    provenance = json.loads((out / "provenance.json").read_text(encoding="utf-8"))
    return provenance


@dataclass
class _Rich:
    analysis: object
    out: Path
    provenance: dict
    html: Path
    md: Path
    extra_figures: list = field(default_factory=list)
    rate_model: object = None


@functools.cache
def rich_report() -> _Rich:
    """An invented study with every kind of section: isotherms of two formulations,
    cooling scans at five rates, melting after holds, Hoffman-Lauritzen, a global rate
    model (least squares, for speed) and a prediction; reports written with every
    figure. Built once per test session."""
    from kinetics.analyses.global_rate import fit_global_rate
    from kinetics.analyses.growth import hoffman_lauritzen_from_isotherms
    from kinetics.analyses.melting import hoffman_weeks, melting_points
    from kinetics.analyses.predict import predict_profile
    from kinetics.io.profile import constant_rate_profile
    from kinetics.report.figures_cooling import cooling_figures
    from kinetics.report.figures_growth import growth_figures, rate_model_figures
    from kinetics.report.style import save
    from kinetics.workflow import FigureFile, analyse_study

    study, folder = _demo(False)

    def keep(t):
        c = round(t.info.temperature - 273.15) if t.info.kind == "isothermal" else None
        return ((t.info.kind == "isothermal" and t.info.group == "PX-40"
                 and c in (128, 132, 136) and not t.run_id.endswith("b"))
                or (t.info.kind == "isothermal" and t.info.group == "PX-40_N-A" and c == 132
                    and not t.run_id.endswith("b"))
                or (t.info.kind == "cooling" and t.info.group == "PX-40"
                    and not t.run_id.endswith("b")))

    sub = _subset(study, keep)
    heating = [t for t in study.traces if t.info.kind == "heating"]
    tg = sub.settings["tg"]
    # without Tg (and melting runs) the workflow leaves out the slow sampled rate model
    # (and Marand-Xu-Srinivas fit); the rate model and Hoffman-Weeks are fitted here
    sub = type(sub)(name=sub.name, traces=sub.traces, source=sub.source,
                    settings={k: v for k, v in sub.settings.items() if k != "tg"})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        analysis = analyse_study(sub, seed=0, fit_options={"sampler_options": FAST_SAMPLER})
        px = [f for f in analysis.isothermal.fits if f.trace.info.group == "PX-40"]
        hl = hoffman_lauritzen_from_isotherms(px, Tm0=sub.settings["tm0"], Tg=tg, seed=0)
        melt = melting_points(heating)
        hw = hoffman_weeks(melt["T_c_K"], melt["T_m_K"], seed=0, group="PX-40")
        by_id = {t.run_id: t for t in sub.traces}
        cool = [(by_id[c.run_id], c) for c in analysis.cooling.conversions]
        glob = fit_global_rate([(f.trace, f.conversion) for f in px], cool,
                               Tm0=sub.settings["tm0"], T_inf=tg - 30.0, seed=0, sample=False,
                               max_points_per_run=120, hold_out=[cool[-1][0].run_id])
        profile = constant_rate_profile(start="200 degC", end="40 degC", rate="10 K/min")
        pred = predict_profile(glob.simulation_model(), profile.time, profile.temperature)
    analysis.growth = {"PX-40": hl}
    analysis.melting = {("hoffman_weeks", "PX-40"): hw}
    analysis.tables["hoffman_lauritzen"] = hl.table()
    analysis.tables["melting_points"] = melt
    analysis.tables["hoffman_weeks"] = hw.table()
    analysis.tables["global_rate"] = glob.table()
    analysis.tables["global_checks"] = glob.checks
    analysis.tables["prediction"] = pred.table()
    analysis.tables["zz_unplaced"] = pd.DataFrame({"item": ["a", "b"], "value_s": [1.5, 2.5]})
    out = folder / "results"
    provenance = _write(analysis, out)
    iso_table = analysis.tables["isothermal_runs"]
    items = (cooling_figures(analysis.cooling)
             + growth_figures(analysis.growth, analysis.melting)
             + rate_model_figures(glob, [pred],
                                  isothermal_table=iso_table[iso_table["group"] == "PX-40"]))
    prefixes = (("cooling_", "cooling"), ("jeziorny_", "cooling"), ("ozawa_", "cooling"),
                ("mo_", "cooling"), ("energy_", "cooling"), ("hoffman_", "growth"),
                ("gibbs_", "growth"), ("rate_model", "global"))
    known = {f.filename for f in analysis.figures}
    extra = []
    for name, fig, caption in items:
        save(fig, out / "figures" / name)
        if name not in known:
            extra.append(FigureFile(next(sec for p, sec in prefixes if name.startswith(p)),
                                    name, caption))
    analysis.figures = list(analysis.figures) + extra
    html, md = write_reports(analysis, out, provenance=provenance)
    return _Rich(analysis, out, provenance, html, md, [n for n, _, _ in items], glob)


@functools.cache
def reduced_report(kind: str):
    """The workflow on a quick demo study holding one formulation's runs of one kind."""
    from kinetics.workflow import analyse_study

    study, folder = _demo(True)
    sub = _subset(study, lambda t: t.info.kind == kind and t.info.group == "PX-40")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        analysis = analyse_study(sub, seed=0, sample=False)
    out = folder / f"only_{kind}"
    provenance = _write(analysis, out)
    html, md = write_reports(analysis, out, provenance=provenance)
    return analysis, build_document(analysis, provenance=provenance), html, md


# --------------------------------------------------------------------------- formatting

def test_rounding_to_the_uncertainty_by_hand():
    # narrower half-width 0.0610: leading digits 610 -> one significant digit, 0.06 -> 2 dp
    assert format_interval(2.6131, 2.5521, 2.6812) == "2.61 [2.55, 2.68]"
    # 0.00340: leading digits 340 -> two digits, 0.0034 -> 4 dp
    assert format_interval(0.48231, 0.47891, 0.48650) == "0.4823 [0.4789, 0.4865]"
    # 0.0975: leading digits 975 -> rounds up to 0.10, two digits -> 2 dp
    assert format_interval(1.2345, 1.1370, 1.3400) == "1.23 [1.14, 1.34]"
    # 245.3: leading digits 245 -> two digits, 250 -> tens
    assert format_interval(300235.2, 299989.9, 300486.1) == "300240 [299990, 300490]"
    # the same in units of 10^5
    assert format_interval(300235.2, 299989.9, 300486.1, scale=5) == "3.0024 [2.9999, 3.0049]"
    assert decimals_for(2.6131, 2.5521, 2.6812) == 2
    assert decimals_for(300235.2, 299989.9, 300486.1) == -1
    # a fixed constant (zero width) and a missing interval show the value only
    assert format_interval(6276.0, 6276.0, 6276.0) == "6276"
    assert format_interval(2.5, np.nan, np.nan) == "2.5"
    assert format_interval(np.nan, 1.0, 2.0) == "–"
    # per-cell powers of ten for rows of different quantities
    assert format_interval(2.218e-5, 2.054e-5, 2.394e-5, scale=None) == "2.22 [2.05, 2.39] ×10⁻⁵"
    # asymmetric: the narrower side (0.00010, leading digits 100 -> two digits) decides
    assert format_interval(-0.004, -0.0052, -0.0041) == "-0.00400 [-0.00520, -0.00410]"


def test_plain_numbers_and_units_in_headers():
    assert format_number(0.1) == "0.1"
    assert format_number(16.9998) == "17.00"
    assert format_number(2.0) == "2"
    assert format_number(True) == "yes"
    assert format_number(np.nan) == "–"
    assert format_number(1.234e-6) == "1.234e-06"
    assert split_unit("t_half_s") == ("t_half", "s")
    assert split_unit("k_per_min_n") == ("k", "min⁻ⁿ")
    assert split_unit("enthalpy_J_per_g") == ("enthalpy", "J/g")
    assert split_unit("T_c_degC") == ("T_c", "°C")
    assert split_unit("flags") == ("flags", "")
    assert column_header("t_half_s") == "t½ (s)"
    assert column_header("beta_K_per_min") == "β (K/min)"
    assert column_header("Kg_K2", scale=5) == "Kg (10⁵ K²)"
    assert column_header("sigma_e_J_per_m2") == "σe (J/m²)"
    assert interval_groups(["n", "n_lo95", "n_hi95", "x"]) == {"n": ("n_lo95", "n_hi95")}


def test_format_table_folds_intervals_and_moves_long_texts():
    df = pd.DataFrame({
        "run_id": ["a", "b"], "T_c_K": [400.0, 405.0], "T_c_degC": [126.85, 131.85],
        "t_half_s": [110.3, 222.0], "t_half_s_lo95": [109.6, 220.9],
        "t_half_s_hi95": [111.0, 223.0], "Kg_K2": [3.0e5, 2.9e5],
        "Kg_K2_lo95": [2.5e5, 2.4e5], "Kg_K2_hi95": [3.5e5, 3.3e5],
        "empty": [np.nan, np.nan], "caution": ["a caution that is the same in every row"] * 2,
        "flags": ["", "x" * 120]})
    ft = format_table(df)
    assert list(ft.frame.columns) == ["run id", "Tc (°C)", "t½ (s)", "Kg (10⁵ K²)", "flags"]
    assert ft.columns == ("run_id", "T_c_degC", "t_half_s", "Kg_K2", "flags")
    assert ft.frame["t½ (s)"].tolist() == ["110.3 [109.6, 111.0]", "222.0 [220.9, 223.0]"]
    assert ft.frame["Kg (10⁵ K²)"].tolist() == ["3.0 [2.5, 3.5]", "2.9 [2.4, 3.3]"]
    assert ft.frame["flags"].tolist() == ["–", "[1]"]
    assert ft.notes == ("a caution that is the same in every row", "[1] " + "x" * 120)
    assert ft.align == ("left", "right", "right", "right", "left")
    summary = pd.DataFrame({"parameter": ["n", "noise"], "median": [2.7, 2.2e-5],
                            "lo95": [2.68, 2.05e-5], "hi95": [2.72, 2.39e-5]})
    # half-widths 0.020 and 0.15e-5: leading digits 200 and 150 -> two digits each
    assert format_table(summary).frame[MEDIAN_HEADER].tolist() == [
        "2.700 [2.680, 2.720]", "2.20 [2.05, 2.39] ×10⁻⁵"]


# --------------------------------------------------------------------------- the document

@dataclass
class _Study:
    name: str = "a small invented study"
    traces: tuple = ()
    groups: tuple = ()
    source: str = ""


@dataclass
class _Analysis:
    tables: dict
    notes: list = field(default_factory=list)
    figures: list = field(default_factory=list)
    failures: list = field(default_factory=list)
    study: _Study = field(default_factory=_Study)
    seed: int = 3
    options: dict = field(default_factory=dict)


def _iso_table():
    return pd.DataFrame({"run_id": ["r1"], "group": ["A"], "T_c_degC": [130.0], "n": [2.5],
                         "n_lo95": [2.4], "n_hi95": [2.6]})


def test_sections_only_for_data_present_and_the_caution_always():
    doc = build_document(_Analysis({"isothermal_runs": _iso_table(), "ozawa": pd.DataFrame(),
                                    "jeziorny": None}), provenance={})
    assert doc.keys == ("data", "isothermal", "methods", "software", "caution")
    assert doc.section("caution").blocks[0].kind == "caution"
    bare = build_document(_Analysis({}), provenance={})
    assert "caution" in bare.keys and "isothermal" not in bare.keys
    assert "methods" not in bare.keys


def test_notes_figures_and_unknown_tables_are_placed():
    from kinetics.workflow import FigureFile

    analysis = _Analysis(
        {"isothermal_runs": _iso_table(), "compare_half_time": _iso_table(),
         "mystery": pd.DataFrame({"a": [1]})},
        notes=["verdict: A is faster than B at 130 °C with probability 0.99.",
               "caution: Jeziorny's Zc is an empirical descriptor only.",
               "ozawa (group A): not possible: too few rates"],
        figures=[FigureFile("isothermal", "x.png", "X of run r1"),
                 FigureFile("global", "k.png", "K(T)"), FigureFile("odd", "o.png", "odd")])
    doc = build_document(analysis, provenance={})
    assert doc.keys == ("data", "isothermal", "compare", "global", "methods", "software",
                        "caution", "appendix")
    compare = doc.section("compare").blocks
    assert any(isinstance(b, Paragraph) and b.kind == "verdict" and b.text.startswith("A is")
               for b in compare)
    assert [b.filename for b in doc.section("isothermal").blocks
            if isinstance(b, FigureBlock)] == ["x.png"]
    appendix = doc.section("appendix").blocks
    assert any(isinstance(b, TableBlock) and b.source == "mystery" for b in appendix)
    assert any(isinstance(b, FigureBlock) and b.filename == "o.png" for b in appendix)
    # a note about an analysis without a section of its own is kept under the data
    assert "cooling" not in doc.keys
    data = doc.section("data").blocks
    assert any(isinstance(b, BulletList) and any("ozawa (group A)" in i for i in b.items)
               for b in data)
    assert any(isinstance(b, Paragraph) and b.kind == "caution" and "Jeziorny" in b.text
               for b in data)


def test_html_escapes_text_and_has_no_scripts():
    t = _iso_table()
    t["flags"] = ["<script>alert(1)</script> & <b>bold</b>"]
    doc = build_document(_Analysis({"isothermal_runs": t}, study=_Study(name="<i>x</i>")),
                         provenance={})
    page = render_html(doc)
    assert "<script" not in page.lower()
    assert "&lt;script&gt;" in page and "&lt;i&gt;x&lt;/i&gt;" in page


# --------------------------------------------------------------------------- reading back

_SUP = str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹⁻", "0123456789-")
_NUM = r"-?\d+(?:\.\d+)?(?:e[-+]\d+)?"
_INTERVAL = re.compile(rf"^({_NUM}) \[({_NUM}), ({_NUM})\](?: ×10([⁰¹²³⁴⁵⁶⁷⁸⁹⁻]+))?$")
_NUMBER = re.compile(rf"^({_NUM})(?: ×10([⁰¹²³⁴⁵⁶⁷⁸⁹⁻]+))?$")
_HEADER = re.compile(r"^(?P<label>.*?) \((?:10(?P<power>[⁰¹²³⁴⁵⁶⁷⁸⁹⁻]+))? ?(?P<unit>[^()]*)\)$")


def _split_row(line: str) -> list[str]:
    cells = re.split(r"(?<!\\)\|", line.strip())[1:-1]
    return [c.strip().replace("\\|", "|").replace("\\\\", "\\") for c in cells]


def markdown_tables(text: str):
    """(source csv name, headers, rows) of every table that names its CSV file."""
    lines = text.splitlines()
    out = []
    for i, line in enumerate(lines):
        m = re.match(r"^Full precision: `tables/(.+)\.csv`$", line)
        if not m:
            continue
        j = i + 1
        while not lines[j].startswith("|"):
            j += 1
        headers = _split_row(lines[j])
        rows = []
        k = j + 2
        while k < len(lines) and lines[k].startswith("|"):
            rows.append(_split_row(lines[k]))
            k += 1
        out.append((m.group(1), headers, rows))
    return out


def _tolerance(text: str, power: int) -> float:
    """Half a unit of the last digit shown (trailing zeros of an integer count as
    rounding), in the units of the CSV."""
    mant, _, exp = text.partition("e")
    exp = int(exp) if exp else 0
    if "." in mant:
        d = len(mant.split(".")[1])
    else:
        digits = mant.lstrip("-")
        d = -(len(digits) - len(digits.rstrip("0"))) if digits.strip("0") else 0
    return 0.5001 * 10.0 ** (exp - d + power)


def _numbers(cell: str, power: int):
    m = _INTERVAL.match(cell)
    if m:
        # the three numbers share one rounding; "0" or "12000" alone does not show it
        p = power + (int(m.group(4).translate(_SUP)) if m.group(4) else 0)
        tol = max(_tolerance(g, p) for g in m.groups()[:3])
        return [(float(g) * 10.0 ** p, tol) for g in m.groups()[:3]]
    m = _NUMBER.match(cell)
    if m:
        p = power + (int(m.group(2).translate(_SUP)) if m.group(2) else 0)
        return [(float(m.group(1)) * 10.0 ** p, _tolerance(m.group(1), p))]
    return None


def _column_map(csv: pd.DataFrame) -> dict[str, str]:
    mapping = {}
    for c in csv.columns:
        mapping.setdefault(column_header(c), c)
        mapping.setdefault(c, c)
    mapping[MEDIAN_HEADER] = "median"
    return mapping


def _cell_matches(cell: str, column: str, power: int, row: pd.Series) -> bool:
    value = row[column]
    if cell == "–":
        return pd.isna(value) or str(value).strip() == ""
    if re.fullmatch(r"\[\d+\]", cell):  # a long text given in full as a note
        return isinstance(value, str) and len(value) > 0
    if cell in ("yes", "no") and (isinstance(value, (bool, np.bool_)) or
                                  str(value) in ("True", "False")):
        return (cell == "yes") == (str(value) == "True")
    nums = _numbers(cell, power)
    if nums is not None and not isinstance(value, str):
        cols = [column] if len(nums) == 1 else [
            column, *(("lo95", "hi95") if column == "median" else
                      (f"{column}_lo95", f"{column}_hi95"))]
        for (shown, tol), col in zip(nums, cols, strict=True):
            v = float(row[col])
            if not abs(shown - v) <= tol + 5e-6 * abs(v):
                return False
        return True
    return " ".join(str(value).split()) == cell


def test_markdown_tables_read_back_into_the_csv_numbers():
    rich = rich_report()
    text = rich.md.read_text(encoding="utf-8")
    tables = markdown_tables(text)
    names = {t[0] for t in tables}
    for name in ("preparation", "isothermal_runs", "isothermal_posterior", "cooling_runs",
                 "jeziorny", "ozawa", "mo", "friedman", "vyazovkin", "hoffman_lauritzen",
                 "hoffman_weeks", "compare_half_time", "global_rate", "global_checks",
                 "prediction", "zz_unplaced"):
        assert name in names, name
    n_cells = 0
    for name, headers, rows in tables:
        csv = pd.read_csv(rich.out / "tables" / f"{name}.csv", keep_default_na=True)
        mapping = _column_map(csv)
        spec = []
        for h in headers:
            if h in mapping:
                spec.append((mapping[h], 0))
                continue
            m = _HEADER.match(h)
            assert m, (name, h)
            base = f"{m['label']} ({m['unit']})" if m["unit"] else m["label"]
            power = int(m["power"].translate(_SUP)) if m["power"] else 0
            assert base in mapping, (name, h)
            spec.append((mapping[base], power))
        pool = list(range(len(csv)))
        for cells in rows:
            assert len(cells) == len(spec), (name, cells)
            hit = next((i for i in pool if all(
                _cell_matches(c, col, p, csv.iloc[i]) for c, (col, p) in zip(cells, spec,
                                                                           strict=True))),
                       None)
            assert hit is not None, (name, cells)
            pool.remove(hit)
            n_cells += len(cells)
        assert len(rows) == len(csv), name
    assert n_cells > 1000


def test_markdown_report_references_figures_beside_it():
    rich = rich_report()
    text = rich.md.read_text(encoding="utf-8")
    refs = re.findall(r"!\[[^\]]*\]\((figures/[^)]+)\)", text)
    assert len(refs) >= 15
    for ref in refs:
        assert (rich.out / ref).is_file(), ref
    for name in rich.extra_figures:
        assert f"figures/{name}" in refs


def test_rich_report_has_every_section_in_study_order():
    rich = rich_report()
    doc = build_document(rich.analysis, provenance=rich.provenance)
    assert doc.keys == ("data", "isothermal", "cooling", "growth", "compare", "global",
                        "methods", "priors", "diagnostics", "software", "caution", "appendix")
    text = rich.md.read_text(encoding="utf-8")
    positions = [text.index(f"\n## {SECTION_TITLES[k]}\n") for k in doc.keys]
    assert positions == sorted(positions)
    assert "The data of this study are invented" in text
    methods = [b.name for b in doc.section("methods").blocks if isinstance(b, MethodBlock)]
    for name in ("Avrami (JMAK) model, fitted to the heat-flow signal", "Ozawa", "Mo",
                 "Jeziorny", "Hoffman-Lauritzen", "Hoffman-Weeks (linear and nonlinear)",
                 "Global Nakamura-Hoffman-Lauritzen rate model"):
        assert name in methods
    assert "Kissinger (on request only)" not in methods
    assert all(b.references for b in doc.section("methods").blocks
               if isinstance(b, MethodBlock))
    software = doc.section("software").blocks[0].frame
    assert {"crystkin", "numpy", "scipy", "emcee"} <= set(software["package"])
    # the priors and diagnostics come from provenance.json
    prior_text = render_markdown(doc).split("## Priors")[1].split("## Convergence")[0]
    assert "uniform(0.5, 6)" in prior_text
    diag = doc.section("diagnostics").blocks
    assert any(isinstance(b, TableBlock) and len(b.frame) == 4 for b in diag)


def test_compatibility_writer_gives_the_same_markdown(tmp_path):
    rich = rich_report()
    (tmp_path / "figures").symlink_to(rich.out / "figures")
    (tmp_path / "provenance.json").write_text(json.dumps(rich.provenance), encoding="utf-8")
    path = write_markdown_report(rich.analysis, tmp_path,
                                 [f.filename for f in rich.analysis.figures])
    assert path.read_text(encoding="utf-8") == rich.md.read_text(encoding="utf-8")


# --------------------------------------------------------------------------- the HTML file

class _Elements(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.attrs, self.h2, self._in_h2, self.style = [], [], [], False, []
        self._in_style = False

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs += [(tag, k, v or "") for k, v in attrs]
        self._in_h2 = tag == "h2"
        self._in_style = tag == "style"
        if tag == "h2":
            self.h2.append("")

    def handle_endtag(self, tag):
        self._in_h2 = self._in_h2 and tag != "h2"
        self._in_style = self._in_style and tag != "style"

    def handle_data(self, data):
        if self._in_h2:
            self.h2[-1] += data
        if self._in_style:
            self.style.append(data)


def _png_size(data: bytes) -> tuple[int, int]:
    # PNG signature, then the IHDR chunk: length, "IHDR", width, height (big-endian)
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    assert data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


def test_html_report_is_self_contained():
    rich = rich_report()
    page = rich.html.read_text(encoding="utf-8")
    p = _Elements()
    p.feed(page)
    assert not {"script", "link", "iframe", "object", "embed", "base"} & set(p.tags)
    assert "http://" not in page and "https://" not in page
    srcs = [v for tag, k, v in p.attrs if k == "src"]
    assert len(srcs) == page.count("<img ") >= 15
    for src in srcs:
        assert src.startswith("data:image/png;base64,")
        w, h = _png_size(base64.b64decode(src.split(",", 1)[1]))
        assert w > 100 and h > 100
    for _tag, k, v in p.attrs:
        if k == "href":
            assert v.startswith("#"), v
        assert not re.search(r"url\(", v)
    assert "url(" not in "".join(p.style)
    assert [h.strip() for h in p.h2] == [SECTION_TITLES[k] for k in
                                         build_document(rich.analysis,
                                                        provenance=rich.provenance).keys]


# --------------------------------------------------------------------------- figures

def test_rate_model_figures_from_the_workflow_pieces():
    """The workflow keeps the exported model and the run bands, not the fit itself."""
    from matplotlib.figure import Figure

    from kinetics.report.figures_growth import global_fit_figure, rate_model_figures

    fit = rich_report().rate_model
    items = rate_model_figures(fit.simulation_model(), bands=fit.bands, checks=fit.checks,
                               name="rate_model_PX-40")
    assert [n for n, _, _ in items] == ["rate_model_PX-40_half_time.png",
                                        "rate_model_PX-40_check.png"]
    fig = global_fit_figure(fit.bands, checks=fit.checks)
    assert isinstance(fig, Figure) and len(fig.axes) == 2
    labels = [t.get_text() for ax in fig.axes for t in ax.get_legend().get_texts()]
    assert sum("held out" in t for t in labels) == 1
    same = [t.get_text() for ax in global_fit_figure(fit).axes
            for t in ax.get_legend().get_texts()]
    assert sum("held out" in t for t in same) == 1


def test_series_differ_in_marker_and_line_style_for_grey_scale():
    from kinetics.report.figures_cooling import cooling_conversion_figure
    from kinetics.report.style import COLOURS

    convs = rich_report().analysis.cooling.conversions
    ax = cooling_conversion_figure(convs).axes[0]
    curves = [ln for ln in ax.get_lines() if ln.get_linestyle() not in ("None", "")]
    points = [ln for ln in ax.get_lines() if ln.get_marker() not in ("None", "", None)]
    assert len(curves) == len(points) == len(convs)
    assert len({str(ln.get_linestyle()) for ln in curves}) >= min(4, len(convs))
    assert len({ln.get_marker() for ln in points}) == len(convs)
    assert {ln.get_color() for ln in curves} <= set(COLOURS)


def test_figures_refuse_results_without_data():
    from kinetics.analyses.nonisothermal import MoResult, MoRow, OzawaResult, OzawaRow
    from kinetics.errors import CrystkinInputError
    from kinetics.report.figures_cooling import (
        energy_conversion_figure,
        mo_figure,
        ozawa_figure,
    )

    with pytest.raises(CrystkinInputError, match="no estimable temperature"):
        ozawa_figure(OzawaResult((OzawaRow(400.0, False, "not estimable", (5.0,), (0.5,)),)))
    with pytest.raises(CrystkinInputError, match="no estimable conversion"):
        mo_figure(MoResult((MoRow(0.5, False, "not estimable", (5.0,), (1.0,), 400.0),)))
    with pytest.raises(CrystkinInputError, match="isoconversional"):
        energy_conversion_figure()


def test_gibbs_thomson_figure_extrapolates_to_zero_inverse_thickness():
    from kinetics.analyses.melting import gibbs_thomson
    from kinetics.report.figures_growth import gibbs_thomson_figure

    # invented points on Tm = Tm0 (1 - 2 sigma_e / (dh l)), Tm0 = 460 K, sigma_e = 0.06 J/m^2
    thick = np.array([8e-9, 10e-9, 12e-9, 15e-9, 20e-9])
    dh = 1.4e8
    Tm = 460.0 * (1 - 2 * 0.06 / (dh * thick)) + np.array([0.2, -0.1, 0.1, -0.2, 0.05])
    fit = gibbs_thomson(thick, Tm, delta_hf=dh, T_m_sd=0.3, seed=1)
    ax = gibbs_thomson_figure(fit).axes[0]
    assert ax.get_xlim()[0] == 0.0
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any(lab.startswith("Tm⁰ = 18") for lab in labels)  # 460 K = 186.85 °C


# --------------------------------------------------------------------------- reduced studies

def test_only_cooling_runs_give_only_cooling_sections():
    analysis, doc, html, md = reduced_report("cooling")
    assert analysis.isothermal is None and analysis.cooling is not None
    assert "cooling" in doc.keys
    # a rate model K(T) may be fitted to cooling runs alone; nothing isothermal appears
    assert not {"isothermal", "growth", "compare"} & set(doc.keys)
    text = md.read_text(encoding="utf-8")
    assert f"## {SECTION_TITLES['cooling']}" in text
    assert f"## {SECTION_TITLES['isothermal']}" not in text
    assert f"## {SECTION_TITLES['caution']}" in text
    assert "Isothermal kinetics" not in html.read_text(encoding="utf-8")
    assert not any(k.startswith("isothermal") for k in analysis.tables)


def test_only_isothermal_runs_give_no_cooling_sections():
    analysis, doc, html, md = reduced_report("isothermal")
    assert analysis.cooling is None
    assert {"data", "isothermal", "methods", "priors", "software", "caution"} <= set(doc.keys)
    assert not {"cooling", "compare"} & set(doc.keys)
    text = md.read_text(encoding="utf-8")
    assert f"## {SECTION_TITLES['cooling']}" not in text
    for word in ("Jeziorny", "Ozawa", "Friedman", "Vyazovkin", "cooling_runs"):
        assert word not in text
