"""Numbers and column headers for reading: estimates rounded to their uncertainty,
units in headers.

The CSV tables keep full precision; these functions only decide how a table is
shown in the report and the notebooks.

* An estimate with its 95 % interval, columns ``Q``, ``Q_lo95``, ``Q_hi95``,
  becomes one cell ``"2.61 [2.55, 2.68]"``.  The number of decimals follows
  from the narrower half of the interval: two significant digits of it when
  its three leading digits are 100-354, one otherwise, and 950-999 rounds up
  to two digits of the next power of ten (the rounding rule of the Particle
  Data Group, Review of Particle Physics, "Introduction"; from memory).
* A column name carries its unit as a suffix (``t_half_s``, ``k_per_min_n``,
  ``enthalpy_J_per_g``); the header shows it in brackets, ``t½ (s)``.
* Very large or very small columns are shown in a power of ten stated in the
  header, ``Kg (10⁵ K²)``: the cells then hold Kg / 10⁵ K².
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = ["decimals_for", "format_number", "format_interval", "split_unit", "column_label",
           "column_header", "interval_groups", "FormattedTable", "format_table",
           "SUPERSCRIPT", "MEDIAN_HEADER", "MISSING", "NOTE_COLUMNS"]

#: Unit suffixes of column names, longest first (our naming convention).
_UNIT_SUFFIXES = (
    ("_J2_per_m4", "J²/m⁴"), ("_kJ_per_mol", "kJ/mol"), ("_J_per_mol", "J/mol"),
    ("_J_per_m2", "J/m²"), ("_J_per_g", "J/g"), ("_K_per_min", "K/min"), ("_K_per_s", "K/s"),
    ("_um_per_min", "µm/min"), ("_m_per_s", "m/s"), ("_ln_per_s", "ln(1/s)"),
    ("_per_min_n", "min⁻ⁿ"), ("_per_s_n", "s⁻ⁿ"), ("_per_K2", "K⁻²"), ("_per_min", "1/min"),
    ("_per_s", "1/s"), ("_degC", "°C"), ("_K2", "K²"), ("_percent", "%"), ("_steps", "steps"),
    ("_min", "min"), ("_mg", "mg"), ("_nm", "nm"), ("_s", "s"), ("_K", "K"), ("_J", "J"),
    ("_W", "W"),
)
#: Columns whose whole name is a unit-bearing quantity (no suffix rule applies).
_WHOLE_NAMES = {"thickness_m": ("thickness", "m")}
#: Readable symbols for common quantity names.
_SYMBOLS = {
    "t_half": "t½", "T_c": "Tc", "T_m": "Tm", "beta": "β", "beta_nominal": "β nominal",
    "Tm0": "Tm⁰", "T_inf": "T∞", "U_star": "U*", "sigma": "σ", "sigma_e": "σe",
    "sigma_sigma_e": "σσe", "lnK_T": "ln K(T)", "log10_F_T": "log₁₀ F(T)",
    "log10_Zt": "log₁₀ Zt", "log10_Zc": "log₁₀ Zc", "ln_Af": "ln(A f(X))", "tau_max": "τ max",
    "gamma": "γ", "r2_linear": "R² (linear)", "n_linear": "n (linear)", "ess": "ESS",
    "q_fold": "q fold", "X_c_mass": "Xc (mass)", "X_c_volume": "Xc (volume)",
    "E_point": "E (point)", "T_mean": "T mean", "NE": "NE", "Kg": "Kg",
}
SUPERSCRIPT = str.maketrans("0123456789-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻")
MISSING = "–"
#: Header of the estimate column of a posterior summary (units in its own column).
MEDIAN_HEADER = "median [95 % interval]"


def decimals_for(value: float, lo: float, hi: float) -> int | None:
    """Decimal places that round ``value [lo, hi]`` to its uncertainty.

    Returns
    -------
    int or None
        Negative for rounding to tens, hundreds, ...; None when the interval
        has no usable width (then show significant digits instead).

    Examples
    --------
    >>> decimals_for(2.613, 2.552, 2.681)
    2
    >>> decimals_for(300235.2, 299989.9, 300486.1)
    -1
    """
    u = min(abs(hi - value), abs(value - lo))
    if not (np.isfinite(u) and u > 0):
        u = max(abs(hi - value), abs(value - lo))
    if not (np.isfinite(u) and u > 0):
        return None
    e = math.floor(math.log10(u))
    lead = round(u / 10 ** (e - 2))
    if lead >= 1000:
        e, lead = e + 1, 100
    if lead < 355:
        return -(e - 1)
    if lead < 950:
        return -e
    return -e


def _fixed(x: float, d: int) -> str:
    if d <= 0:
        s = f"{round(x, d):.0f}"
    else:
        s = f"{x:.{d}f}"
    if s.startswith("-") and float(s) == 0:
        s = s[1:]
    return s


def format_number(x, *, sig: int = 4) -> str:
    """A plain number with ``sig`` significant digits (no exponent for ordinary sizes)."""
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return MISSING
    if isinstance(x, (bool, np.bool_)):
        return "yes" if x else "no"
    if isinstance(x, (int, np.integer)):
        return str(int(x))
    x = float(x)
    if not np.isfinite(x):
        return MISSING if np.isnan(x) else ("∞" if x > 0 else "−∞")
    if x == 0:
        return "0"
    e = math.floor(math.log10(abs(x)))
    if e >= 7 or e <= -5:
        return f"{x:.{sig - 1}e}"
    if float(x).is_integer() and abs(x) < 1e7:
        return f"{int(x)}"
    s = _fixed(x, max(0, sig - 1 - e))
    if "." in s:
        short = s.rstrip("0").rstrip(".")
        if float(short) == x:
            return short
    return s


def format_interval(value, lo, hi, *, scale: int | None = 0) -> str:
    """``"value [lo, hi]"`` rounded to the uncertainty, all divided by 10**scale.

    A missing interval shows the value alone (four significant digits); a
    zero-width interval (a fixed constant) shows the value alone.  With
    ``scale=None`` very large or small numbers get their own power of ten at
    the end of the cell, ``"2.22 [2.05, 2.39] ×10⁻⁵"`` (for tables whose rows
    are different quantities).

    Examples
    --------
    >>> format_interval(2.6131, 2.5521, 2.6812)
    '2.61 [2.55, 2.68]'
    >>> format_interval(300235.2, 299989.9, 300486.1, scale=5)
    '3.0024 [2.9999, 3.0049]'
    """
    try:
        v, a, b = float(value), float(lo), float(hi)
    except (TypeError, ValueError):
        return MISSING
    if not np.isfinite(v):
        return MISSING
    tail = ""
    if scale is None:
        big = max(abs(x) for x in (v, a, b) if np.isfinite(x))
        e = math.floor(math.log10(big)) if big > 0 else 0
        scale = e if (e >= 6 or e <= -4) else 0
        tail = f" ×10{str(scale).translate(SUPERSCRIPT)}" if scale else ""
    f = 10.0 ** scale
    v, a, b = v / f, a / f, b / f
    if not (np.isfinite(a) and np.isfinite(b)) or a == b:
        return format_number(v) + tail
    d = decimals_for(v, a, b)
    if d is None:
        return format_number(v) + tail
    return f"{_fixed(v, d)} [{_fixed(a, d)}, {_fixed(b, d)}]{tail}"


def split_unit(column: str) -> tuple[str, str]:
    """(quantity name, unit) of a column name; unit "" when it has none.

    Examples
    --------
    >>> split_unit("t_half_s")
    ('t_half', 's')
    >>> split_unit("k_per_min_n")
    ('k', 'min⁻ⁿ')
    """
    if column in _WHOLE_NAMES:
        return _WHOLE_NAMES[column]
    for suffix, unit in _UNIT_SUFFIXES:
        if column.endswith(suffix) and len(column) > len(suffix):
            return column[: -len(suffix)], unit
    return column, ""


def column_label(name: str) -> str:
    """Readable quantity name: known symbols, else underscores as spaces."""
    if name in _SYMBOLS:
        return _SYMBOLS[name]
    for key in sorted(_SYMBOLS, key=len, reverse=True):
        if name.startswith(key + "_"):
            return _SYMBOLS[key] + " " + name[len(key) + 1:].replace("_", " ")
    return name.replace("_", " ")


def column_header(column: str, *, scale: int = 0) -> str:
    """Header of a column: readable name with its unit (and power of ten) in brackets.

    Examples
    --------
    >>> column_header("t_half_s")
    't½ (s)'
    >>> column_header("Kg_K2", scale=5)
    'Kg (10⁵ K²)'
    """
    name, unit = split_unit(column)
    label = column_label(name)
    power = f"10{str(scale).translate(SUPERSCRIPT)}" if scale else ""
    inside = " ".join(p for p in (power, unit) if p)
    return f"{label} ({inside})" if inside else label


def interval_groups(columns) -> dict[str, tuple[str, str]]:
    """Columns with a 95 % interval: ``{"Q": ("Q_lo95", "Q_hi95")}``, and
    ``{"median": ("lo95", "hi95")}`` for posterior summary tables."""
    cols = list(columns)
    have = set(cols)
    out = {}
    for c in cols:
        if f"{c}_lo95" in have and f"{c}_hi95" in have:
            out[c] = (f"{c}_lo95", f"{c}_hi95")
    if {"median", "lo95", "hi95"} <= have:
        out["median"] = ("lo95", "hi95")
    return out


def _scale_of(values) -> int:
    v = np.abs(np.asarray(pd.to_numeric(pd.Series(values), errors="coerce"), dtype=float))
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return 0
    e = math.floor(math.log10(float(np.median(v))))
    return e if (e >= 5 or e <= -4) else 0


def _is_numeric(s: pd.Series) -> bool:
    from pandas.api.types import is_bool_dtype, is_numeric_dtype

    return is_numeric_dtype(s) and not is_bool_dtype(s)


def _text(v) -> str:
    if v is None:
        return MISSING
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else "no"
    if isinstance(v, (float, np.floating, int, np.integer)):
        return format_number(v)
    try:
        if pd.isna(v):
            return MISSING
    except (TypeError, ValueError):
        pass
    return " ".join(str(v).split()) or MISSING


@dataclass(frozen=True, eq=False)
class FormattedTable:
    """A table ready for reading.

    Attributes
    ----------
    frame : DataFrame
        Every cell a string; headers with units.
    columns : tuple of str
        The source column behind each shown column (the estimate's own column
        for a combined "Q [lo, hi]" cell).
    align : tuple of str
        "right" for numeric columns, "left" for text.
    notes : tuple of str
        Long texts that were the same in every row, shown once under the table.
    """

    frame: pd.DataFrame
    columns: tuple[str, ...]
    align: tuple[str, ...]
    notes: tuple[str, ...] = ()

    def to_string(self) -> str:
        """Plain text: the table, then its notes."""
        text = self.frame.to_string(index=False) if self.frame.shape[1] else ""
        return "\n".join([text, *self.notes]).strip("\n")

    def __str__(self) -> str:
        return self.to_string()

    def _repr_html_(self) -> str:
        """Shown by Jupyter: the table and its notes (escaped)."""
        import html

        body = self.frame.to_html(index=False, escape=True, border=0)
        notes = "".join(f"<p><em>{html.escape(n)}</em></p>" for n in self.notes)
        return body + notes


#: Text columns shown as notes under a table (their distinct values), not as columns.
NOTE_COLUMNS = ("caution", "warning", "statements")


def format_table(df: pd.DataFrame, *, columns=None, drop_kelvin_twins: bool = True,
                 drop_empty: bool = True, note_length: int = 60,
                 note_columns=NOTE_COLUMNS, max_cell: int = 80) -> FormattedTable:
    """A tidy result table formatted for reading (nothing is recomputed).

    Parameters
    ----------
    df : DataFrame
        Units in column names; estimates as ``Q``, ``Q_lo95``, ``Q_hi95``.
    columns : sequence of str, optional
        Columns to show, in this order (missing ones are skipped); default all.
        Interval columns are always folded into their estimate.
    drop_kelvin_twins : bool
        Leave out ``X_K`` when ``X_degC`` is shown too.
    drop_empty : bool
        Leave out columns with no value in any row.
    note_length : int
        A text column longer than this with the same value in every row is
        shown once as a note instead.
    note_columns : sequence of str
        Text columns always shown as notes (each distinct value once).
    max_cell : int
        Longer texts are replaced by a marker "[k]" and given in full as note k.

    Returns
    -------
    FormattedTable
    """
    groups = interval_groups(df.columns)
    hidden = {c for pair in groups.values() for c in pair}
    wanted = [c for c in (df.columns if columns is None else columns)
              if c in df.columns and c not in hidden]
    if drop_kelvin_twins:
        names = set(wanted)
        wanted = [c for c in wanted
                  if not (c.endswith("_K") and c[:-2] + "_degC" in names)
                  and not (c.endswith("_K_lo95") or c.endswith("_K_hi95"))]
    notes: list[str] = []
    long_texts: dict[str, int] = {}
    out: dict[str, list[str]] = {}
    shown, align = [], []
    for c in wanted:
        s = df[c]
        if drop_empty and s.isna().all():
            continue
        if not _is_numeric(s):
            vals = [_text(v) for v in s]
            if c in note_columns:
                notes.extend(v for v in dict.fromkeys(vals) if v != MISSING and v not in notes)
                continue
            if len(df) > 1 and len(set(vals)) == 1 and len(vals[0]) > note_length:
                notes.append(vals[0])
                continue
            if drop_empty and all(v == MISSING for v in vals):
                continue
            header = column_header(c)
            cells = []
            for v in vals:
                if len(v) > max_cell:
                    if v not in long_texts:
                        long_texts[v] = len(long_texts) + 1
                    v = f"[{long_texts[v]}]"
                cells.append(v)
            right = False
        elif c in groups:
            lo, hi = groups[c]
            scale = _scale_of(s) if c != "median" else None
            header = column_header(c, scale=scale or 0) if c != "median" else MEDIAN_HEADER
            cells = [format_interval(v, a, b, scale=scale)
                     for v, a, b in zip(s, df[lo], df[hi], strict=True)]
            right = True
        else:
            scale = _scale_of(s) if s.dtype.kind == "f" else 0
            header = column_header(c, scale=scale)
            f = 10.0 ** scale
            cells = [format_number(v / f if isinstance(v, (float, np.floating)) else v)
                     for v in s]
            right = True
        if header in out:
            header = c
        out[header] = cells
        shown.append(c)
        align.append("right" if right else "left")
    notes += [f"[{k}] {text}" for text, k in long_texts.items()]
    frame = pd.DataFrame(out, index=range(len(df)), dtype=object) if out else pd.DataFrame()
    return FormattedTable(frame, tuple(shown), tuple(align), tuple(notes))

