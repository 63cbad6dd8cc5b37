"""Readers for growth-theory inputs: rate tables and microscopy radius-against-time tables.

Two small table layouts, CSV/TSV/text (delimiter detected) or XLSX, header in the
first row, units in the header (``Tc (degC)``, ``t_half [min]``, ``G / um/min``) or
given with ``units=``:

* a **rate table**: crystallization temperature and either half-time t_half or
  spherulite growth rate G, optionally an SD column and a group column
  (for example values taken from a paper);
* a **radius table**: temperature, time and spherulite radius (or diameter), in long
  format, one row per measurement; several temperatures may share one file.

Everything is converted to SI (K, s, m, m/s) once, here. Every problem is a
:class:`~kinetics.errors.CrystkinInputError` naming the file, the row (as a text
editor counts lines: the header is row 1) and the column, and the fix.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import CrystkinInputError, check_option
from ..units import Unit, parse_unit

__all__ = ["RateTable", "RadiusTable", "read_rate_table", "read_radius_table"]

_EXCEL = (".xlsx", ".xlsm")
_HEADER_UNIT = (re.compile(r"^(?P<name>.*?)\s*[(\[{]\s*(?P<unit>[^()\[\]{}]*?)\s*[)\]}]\s*$"),
                re.compile(r"^(?P<name>[^/]*?[A-Za-z_½][^/]*?)\s+/\s*(?P<unit>.+?)\s*$"))

_WORDS = {
    "temperature": ("tc", "t c", "temperature", "crystallization temperature",
                    "crystallisation temperature", "temp", "tiso", "t iso", "hold temperature",
                    "isothermal temperature"),
    "t_half": ("t half", "thalf", "t1/2", "t 1/2", "t½", "half time", "halftime",
               "half crystallization time", "half crystallisation time", "t0.5", "t 0.5",
               "t50"),
    "G": ("g", "growth rate", "growth", "spherulite growth rate", "rate"),
    "time": ("time", "elapsed time", "time elapsed"),
    "radius": ("radius", "r", "spherulite radius"),
    "diameter": ("diameter", "d", "spherulite diameter"),
    "sd": ("sd", "std", "stdev", "error", "err", "uncertainty", "s.d.", "sigma"),
    "group": ("group", "sample", "formulation", "grade"),
}
_DIMENSION = {"temperature": "temperature", "t_half": "time", "G": "velocity", "time": "time",
              "radius": "length", "diameter": "length"}
_EXAMPLE = {"temperature": "degC", "t_half": "min", "G": "um/min", "time": "s",
            "radius": "um", "diameter": "um"}


@dataclass(frozen=True)
class RateTable:
    """Rates at several crystallization temperatures.

    Attributes
    ----------
    T_c : ndarray, K
    values : ndarray
        t_half in s, or G in m/s.
    sd : ndarray or None
        SD of each value, same unit.
    quantity : {"t_half", "G"}
    groups : tuple of str or None
    source : str
    rows : tuple of int
        File row of each value (header = row 1).
    """

    T_c: np.ndarray
    values: np.ndarray
    sd: np.ndarray | None
    quantity: str
    groups: tuple[str, ...] | None
    source: str
    rows: tuple[int, ...]

    def select(self, group: str) -> RateTable:
        """The rows of one group."""
        if self.groups is None:
            raise CrystkinInputError(f"{self.source}: the table has no group column")
        keep = np.array([g == str(group) for g in self.groups])
        if not keep.any():
            raise CrystkinInputError(
                f"{self.source}: no rows of group '{group}'; groups are "
                f"{sorted(set(self.groups))}")
        return RateTable(self.T_c[keep], self.values[keep],
                         None if self.sd is None else self.sd[keep], self.quantity,
                         tuple(g for g, k in zip(self.groups, keep, strict=True) if k),
                         self.source, tuple(r for r, k in zip(self.rows, keep, strict=True) if k))


@dataclass(frozen=True)
class RadiusTable:
    """Spherulite radius against time, at one or more temperatures.

    Attributes
    ----------
    T_c : ndarray, K
        Temperature of each measurement.
    time : ndarray, s
    radius : ndarray, m
    source : str
    rows : tuple of int
    from_diameter : bool
        True when the file gave diameters (halved here).
    """

    T_c: np.ndarray
    time: np.ndarray
    radius: np.ndarray
    source: str
    rows: tuple[int, ...]
    from_diameter: bool = False

    def series(self):
        """(T_c, time, radius) per distinct temperature, by rising temperature and time."""
        out = []
        for T in np.unique(self.T_c):
            sel = self.T_c == T
            order = np.argsort(self.time[sel], kind="stable")
            out.append((float(T), self.time[sel][order], self.radius[sel][order]))
        return out


def _norm(text: str) -> str:
    return re.sub(r"\s+", " ", re.sub(r"[_\-]", " ", str(text).strip().lower()))


def _split_header(cell: str) -> tuple[str, str | None]:
    cell = str(cell).strip()
    for rx in _HEADER_UNIT:
        m = rx.match(cell)
        if m and m.group("unit"):
            return m.group("name").strip(), m.group("unit").strip()
    return cell, None


def _read_workbook(path: Path, where: str, sheet) -> pd.DataFrame:
    # a damaged workbook raises many types (zip, XML, KeyError, ...); all mean the same
    try:
        return pd.read_excel(path, sheet_name=0 if sheet is None else sheet, dtype=str,
                             header=None, engine="openpyxl")
    except ImportError:
        raise
    except Exception as exc:
        raise CrystkinInputError(
            f"cannot read the workbook ({type(exc).__name__}: {' '.join(str(exc).split())}); "
            "open it in a spreadsheet program and save it again as .xlsx, or export the sheet "
            "as CSV",
            source=where) from None


#: Largest growth-rate or radius table read, bytes (our choice: such tables have at most
#: thousands of rows).
MAX_TABLE_BYTES = 32 * 2**20


def _load(path: Path, where: str, decimal: str | None, sheet) -> pd.DataFrame:
    if not path.exists():
        raise CrystkinInputError("file not found; check the path", source=where)
    if path.is_dir():
        raise CrystkinInputError("is a folder, not a table file", source=where)
    size = path.stat().st_size
    if size > MAX_TABLE_BYTES:
        raise CrystkinInputError(
            f"the file is {size / 2**20:.0f} MB, more than the limit of "
            f"{MAX_TABLE_BYTES // 2**20} MB for a table of rates or radii (one row per "
            "temperature or time); check that this is the right file", source=where)
    try:
        if path.suffix.lower() in _EXCEL:
            df = _read_workbook(path, where, sheet)
        else:
            text, encoding = None, "latin-1"
            for enc in ("utf-8-sig", "latin-1"):
                try:
                    text = path.read_text(encoding=enc)
                    encoding = enc
                    break
                except UnicodeDecodeError:
                    continue
            lines = text.splitlines()
            if not any(line.strip() for line in lines):
                raise CrystkinInputError("the file is empty", source=where)
            sample = [line for line in lines if line.strip()][:20]
            sep = next((d for d in ("\t", ";", ",", "|") if all(d in s for s in sample)),
                       r"\s+")
            if decimal is None:
                decimal = "," if (sep != "," and any(re.search(r"\d,\d", s) for s in sample[1:]))\
                    else "."
            df = pd.read_csv(path, sep=sep, engine="python", header=None, dtype=str,
                             encoding=encoding,
                             skip_blank_lines=False, keep_default_na=False)
            if decimal == ",":
                df = df.apply(lambda col: col.str.replace(",", ".", regex=False))
    except CrystkinInputError:
        raise
    except (ValueError, OSError, ImportError, KeyError) as exc:
        raise CrystkinInputError(f"cannot read the table ({exc}); save it as CSV or XLSX",
                                 source=where) from None
    if df.shape[0] < 2:
        raise CrystkinInputError("the table needs a header row and at least one data row",
                                 source=where)
    return df


def _match(role, names, raw, taken):
    words = _WORDS[role]
    hits = [j for j, nm in enumerate(names) if j not in taken and nm in words]
    if role == "temperature":
        hits += [j for j, r in enumerate(raw) if j not in taken and j not in hits
                 and _split_header(r)[0] == "T"]
    if role == "time":
        hits = [j for j in hits if _split_header(raw[j])[0] != "T"]
        hits += [j for j, r in enumerate(raw) if j not in taken and j not in hits
                 and _split_header(r)[0] == "t"]
    return hits


def _columns(df, roles, optional, columns, where):
    raw = [str(c).strip() for c in df.iloc[0].tolist()]
    names = [_norm(_split_header(c)[0]) for c in raw]
    found: dict[str, int] = {}
    columns = dict(columns or {})
    for role, want in columns.items():
        if isinstance(want, int) and not isinstance(want, bool):
            if not 1 <= want <= len(raw):
                raise CrystkinInputError(f"column number {want} for '{role}' is outside 1.."
                                         f"{len(raw)}", source=where)
            found[role] = want - 1
            continue
        cand = [j for j, c in enumerate(raw) if c == str(want) or _split_header(c)[0] == str(want)
                or names[j] == _norm(want)]
        if not cand:
            raise CrystkinInputError(
                f"no column named '{want}' for the {role}; the header has: {', '.join(raw)}",
                source=where)
        found[role] = cand[0]
    for role in (*roles, *optional):
        alts = role if isinstance(role, tuple) else (role,)
        if any(a in found for a in alts):
            continue
        for alt in alts:
            hits = _match(alt, names, raw, set(found.values()))
            if hits:
                found[alt] = hits[0]
                break
        else:
            if role in roles:
                label = " or ".join(alts)
                raise CrystkinInputError(
                    f"cannot find the {label} column; the header has: {', '.join(raw)}. Name it "
                    f"(for example '{_example_header(alts[0])}') or pass columns={{'{alts[0]}': "
                    "'<header>'}", source=where)
    return found, raw


def _example_header(role):
    return {"temperature": "Tc (degC)", "t_half": "t_half (min)", "G": "G (um/min)",
            "time": "time (s)", "radius": "radius (um)", "diameter": "diameter (um)"}.get(
                role, role)


def _unit(role, header, units, where, column) -> Unit:
    text = (units or {}).get(role) or _split_header(header)[1]
    if text is None:
        raise CrystkinInputError(
            f"the header gives no unit for the {role}; write it as '{_example_header(role)}' or "
            f"pass units={{'{role}': '{_EXAMPLE[role]}'}}", source=where, column=column)
    try:
        return parse_unit(text, dimension=_DIMENSION[role], where=where)
    except CrystkinInputError as exc:
        raise CrystkinInputError(f"{exc}; for example units={{'{role}': '{_EXAMPLE[role]}'}}",
                                 column=column) from None


def _numbers(df, j, header, where) -> np.ndarray:
    cells = df.iloc[1:, j].astype(str).str.strip().tolist()
    vals = pd.to_numeric(pd.Series(cells), errors="coerce").to_numpy(dtype=float)
    bad = np.flatnonzero(~np.isfinite(vals))
    if bad.size:
        i = int(bad[0])
        cell = cells[i]
        row = df.iloc[1 + i].tolist()
        if all(str(c).strip() in ("", "nan", "None") for c in row):
            raise CrystkinInputError("blank row inside the data; delete it (the data must be "
                                     "one unbroken block)", source=where, row=i + 2)
        what = ("blank cell (a gap); fill it or delete the row" if cell in ("", "nan", "None")
                else f"'{cell}' is not a number; correct the cell or delete the row")
        raise CrystkinInputError(what, source=where, row=i + 2, column=header)
    return vals


def _drop_blank_rows(df):
    blank = df.iloc[1:].apply(lambda r: all(str(v).strip() in ("", "nan") for v in r), axis=1)
    tail = blank[::-1].cummin()[::-1]
    keep = ~tail.reindex(df.index, fill_value=False)
    return df[keep]


def read_rate_table(path, *, quantity: str = "auto", columns: dict | None = None,
                    units: dict | None = None, decimal: str | None = None,
                    sheet=None) -> RateTable:
    """Read crystallization temperatures with half-times or growth rates.

    Parameters
    ----------
    path : str or Path
        CSV/TSV/text or XLSX; header in the first row.
    quantity : {"auto", "t_half", "G"}
        Which rate the table holds; "auto" finds it from the header.
    columns : dict, optional
        Role (``temperature``, ``t_half``, ``G``, ``sd``, ``group``) to header text or
        1-based column number.
    units : dict, optional
        Role to unit (``{"temperature": "degC", "t_half": "min"}``); overrides the header.
        The SD takes the unit of the rate.
    decimal : {".", ","}, optional
    sheet : str or int, optional

    Returns
    -------
    RateTable
        T_c in K, t_half in s or G in m/s.

    Raises
    ------
    CrystkinInputError
        Missing file or column, missing or wrong unit, a cell that is not a number,
        a non-positive half-time or growth rate, a negative SD.
    """
    where = str(path)
    check_option("quantity", quantity, ("auto", "t_half", "G"), "read_rate_table")
    if decimal not in (None, ".", ","):
        raise CrystkinInputError(f"The 'decimal' parameter of read_rate_table must be '.' or "
                                 f"','. Got {decimal!r} instead.")
    df = _drop_blank_rows(_load(Path(path), where, decimal, sheet))
    rate_role = ("t_half", "G") if quantity == "auto" else (quantity,)
    found, raw = _columns(df, ("temperature", rate_role), ("sd", "group"), columns, where)
    q = "t_half" if "t_half" in found else "G"
    jt, jq = found["temperature"], found[q]
    T = _unit("temperature", raw[jt], units, where, raw[jt]).to_si(_numbers(df, jt, raw[jt],
                                                                            where))
    uq = _unit(q, raw[jq], units, where, raw[jq])
    v = uq.to_si(_numbers(df, jq, raw[jq], where))
    rows = tuple(range(2, len(v) + 2))
    for i, x in enumerate(v):
        if not x > 0:
            word = "half-time" if q == "t_half" else "growth rate"
            raise CrystkinInputError(
                f"{word} {df.iloc[1 + i, jq]} is not positive (a negative or zero {word} cannot "
                "enter a Hoffman-Lauritzen analysis); correct or delete the row",
                source=where, row=rows[i], column=raw[jq])
    sd = None
    if "sd" in found:
        js = found["sd"]
        sunit = (units or {}).get("sd") or _split_header(raw[js])[1]
        su = parse_unit(sunit, dimension=_DIMENSION[q], where=where) if sunit else uq
        sd = su.factor * _numbers(df, js, raw[js], where)
        for i, x in enumerate(sd):
            if not x > 0:
                raise CrystkinInputError("an SD must be positive; correct or delete the row",
                                         source=where, row=rows[i], column=raw[js])
    groups = None
    if "group" in found:
        groups = tuple(df.iloc[1:, found["group"]].astype(str).str.strip().tolist())
    if len(v) < 1:
        raise CrystkinInputError("no data rows", source=where)
    return RateTable(np.asarray(T, float), np.asarray(v, float), sd, q, groups, where, rows)


def read_radius_table(path, *, columns: dict | None = None, units: dict | None = None,
                      temperature: float | None = None, decimal: str | None = None,
                      sheet=None) -> RadiusTable:
    """Read spherulite radius (or diameter) against time from optical microscopy.

    Parameters
    ----------
    path : str or Path
    columns : dict, optional
        Role (``temperature``, ``time``, ``radius`` or ``diameter``) to header or number.
    units : dict, optional
        Role to unit, overriding the header.
    temperature : float, K, optional
        The temperature of every row, for a file without a temperature column.
    decimal, sheet
        As in :func:`read_rate_table`.

    Returns
    -------
    RadiusTable
        Temperatures in K, times in s, radii in m (diameters halved).

    Raises
    ------
    CrystkinInputError
        Missing file, column or unit; a cell that is not a number; a negative radius;
        repeated times at one temperature.
    """
    where = str(path)
    if decimal not in (None, ".", ","):
        raise CrystkinInputError(f"The 'decimal' parameter of read_radius_table must be '.' "
                                 f"or ','. Got {decimal!r} instead.")
    df = _drop_blank_rows(_load(Path(path), where, decimal, sheet))
    required = ("time", ("radius", "diameter"))
    optional = () if temperature is not None else ("temperature",)
    found, raw = _columns(df, required, optional, columns, where)
    if temperature is None and "temperature" not in found:
        raise CrystkinInputError(
            "cannot find the temperature column; add one (for example 'Tc (degC)') or pass "
            "temperature= (K) for a file measured at one temperature", source=where)
    jt, jr = found["time"], found.get("radius", found.get("diameter"))
    role_r = "radius" if "radius" in found else "diameter"
    t = _unit("time", raw[jt], units, where, raw[jt]).to_si(_numbers(df, jt, raw[jt], where))
    r = _unit(role_r, raw[jr], units, where, raw[jr]).to_si(_numbers(df, jr, raw[jr], where))
    if role_r == "diameter":
        r = 0.5 * r
    if temperature is not None:
        T = np.full(len(t), float(temperature))
    else:
        jT = found["temperature"]
        T = _unit("temperature", raw[jT], units, where, raw[jT]).to_si(
            _numbers(df, jT, raw[jT], where))
    rows = tuple(range(2, len(t) + 2))
    for i, x in enumerate(r):
        if x < 0:
            raise CrystkinInputError(f"{role_r} is negative; correct or delete the row",
                                     source=where, row=rows[i], column=raw[jr])
    for TT in np.unique(T):
        sel = np.flatnonzero(T == TT)
        tt = t[sel]
        order = np.argsort(tt, kind="stable")
        dup = np.flatnonzero(np.diff(tt[order]) == 0)
        if dup.size:
            i = sel[order[dup[0] + 1]]
            raise CrystkinInputError(
                f"time {t[i]:g} s appears twice at {TT - 273.15:.2f} degC; average the "
                "measurements or delete one row", source=where, row=rows[i], column=raw[jt])
    return RadiusTable(np.asarray(T, float), np.asarray(t, float), np.asarray(r, float), where,
                       rows, role_r == "diameter")
