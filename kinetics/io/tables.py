"""Read one DSC run from a table file (CSV, TSV, delimited text, XLSX) into a Trace.

The reader is deliberately forgiving about layout and strict about numbers:

* Layout. Any number of free-text lines may precede the header (instrument
  exports often start with sample name, mass, method). The header is the first
  row of names directly followed by numeric rows; an optional row of units just
  below the names is understood too. The delimiter (tab, ``;``, ``,``, ``|`` or
  runs of blanks) and the decimal mark (``.`` or ``,``) are detected from the
  data rows, not from the free-text lines, which is why no general-purpose
  sniffer is used.
* Columns. The roles ``time``, ``temperature`` and ``heat_flow`` are found from
  header words (a lower-case ``t`` is time, an upper-case ``T`` temperature);
  ``columns`` names them when the words are unusual.
* Units. Read from the header ("Time (min)", "HF [W/g]", "Temperature/°C",
  "Heat flow mW/mg", or a units row); ``units`` overrides or supplies them.
  Everything is converted to SI: s, K, W (or W/kg when the file is specific
  and no mass is known).
* Numbers. Every cell of the three role columns must be a finite number; the
  first bad cell is reported by its file row (1-based, counted as a text editor
  counts lines, header and free-text lines included; spreadsheet row numbers
  for XLSX) and column. Blank rows at the end are dropped.
"""

from __future__ import annotations

import csv
import re
import warnings
from dataclasses import replace
from pathlib import Path

import numpy as np

from ..dataset import RunInfo, Trace
from ..errors import CrystkinInputError, DataQualityWarning
from ..units import Unit, parse_quantity, parse_unit

__all__ = ["read_trace", "ROLES", "EXCEL_SUFFIXES"]

ROLES = ("time", "temperature", "heat_flow")
EXCEL_SUFFIXES = (".xlsx", ".xlsm")
_OLD_SPREADSHEETS = (".xls", ".ods", ".xlsb")
_ROLE_LABEL = {"time": "time", "temperature": "temperature", "heat_flow": "heat flow"}
_EXAMPLE_UNIT = {"time": "min", "temperature": "degC", "heat_flow": "mW"}
_DIMENSIONS = {"time": ("time",), "temperature": ("temperature",),
               "heat_flow": ("heat_flow", "specific_heat_flow")}

# Header words for each role, compared after lower-casing and turning punctuation into spaces.
_ROLE_WORDS = {
    "time": ("time", "zeit", "tiempo", "elapsed time", "time elapsed", "run time", "runtime"),
    "temperature": ("temperature", "temp", "ts", "tsample", "t sample", "sample temperature",
                    "sample temp", "temperatur", "temperatura", "température"),
    "heat_flow": ("heat flow", "heatflow", "hf", "dsc", "q", "value", "heat flow rate",
                  "dsc signal", "heat flux", "normalized heat flow", "normalised heat flow",
                  "specific heat flow", "wärmestrom", "warmestrom", "flujo de calor",
                  "flux de chaleur", "flusso termico"),
}
# Used only when no exact match exists: a header that starts with one of these words.
_ROLE_PREFIXES = {
    "time": ("time",),
    "temperature": ("temperature", "sample temperature"),
    "heat_flow": ("heat flow", "heatflow", "normalized heat flow", "normalised heat flow"),
}
_MASS_WORDS = ("mass", "weight", "einwaage", "masse", "peso", "sample size")
_NOT_MASS_WORDS = ("molar", "molecular", "crucible", "pan", "reference")

_LINE_BREAK = re.compile(r"\r\n|\r|\n")
_NUMBER = re.compile(r"[-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?")
_BRACKETED = re.compile(r"^(?P<name>.*?)\s*[(\[{]\s*(?P<unit>[^()\[\]{}]*?)\s*[)\]}]\s*$")
_DELIMITERS = ("\t", ";", ",", "|", None)  # None: runs of blanks
_SAMPLE_LINES = 100
_EXTRA_LINES = 10_000   # header and free-text lines allowed beyond max_rows
_MAX_LINE = 20_000      # characters in one line of a text table
_HEADER_SEARCH = 10_000  # rows after the first numeric row within which the header must lie


def read_trace(path, *, info: RunInfo | None = None, columns: dict | None = None,
               units: dict | None = None, decimal: str | None = None,
               sheet: str | int | None = None, max_rows: int = 2_000_000) -> Trace:
    """Read one run from a CSV, TSV, text or XLSX file.

    Parameters
    ----------
    path : str or Path
        The table file. ``.xlsx``/``.xlsm`` are read as workbooks, anything else as text
        (UTF-8 with or without BOM, UTF-16 with BOM or recognised without one, else
        Latin-1).
    info : RunInfo, optional
        What the study file says about the run. When None, a minimal RunInfo is guessed
        from the data (see Notes); this is what a quick look at one file uses.
    columns : dict, optional
        Role (``time``, ``temperature``, ``heat_flow``) to column name as written in the
        header (with or without its unit), or to a 1-based column number.
    units : dict, optional
        Role to unit string (``{"time": "min"}``); overrides the header's unit.
    decimal : {".", ","}, optional
        Decimal mark; detected when None.
    sheet : str or int, optional
        Worksheet name or 0-based index for XLSX files (first sheet when None); ignored
        for text files.
    max_rows : int
        Largest number of data rows accepted. A text file may hold at most 10,000 further
        lines (header, free text), lines of at most 20,000 characters, and its header
        must lie within 10,000 rows of the first row of numbers.

    Returns
    -------
    Trace
        Time in s, temperature in K, heat flow in W; in W/kg with ``specific=True``
        when the file gives a specific heat flow (W/g, mW/mg) and no mass is known.
        ``info.source`` is ``str(path)`` and ``info.rows`` the first and last file
        row used. ``info.extra`` holds ``file_metadata`` (the ``key: value`` lines found
        above the header), ``columns`` and ``units`` (what was used for each role),
        ``file_mass`` (kg, when the file states one), ``temperature_filled``, ``guessed``
        (kind guessed from the data) and ``warnings``, when they apply.

    Raises
    ------
    CrystkinInputError
        For every problem with the file; the message names the file, the row and/or
        column, and what to do.

    Warns
    -----
    DataQualityWarning
        The mass stated in the file differs by more than 2 % from ``info.mass``.

    Notes
    -----
    The sample mass comes from ``info.mass`` when given, else from a metadata line such
    as ``Sample mass: 5.2 mg`` above the header. Without ``info``, the kind is guessed
    from the temperature: a spread of less than 2 K between its 1st and 99th
    percentiles is an isothermal run at the median temperature; otherwise the sign of a
    straight-line fit of temperature on time says cooling or heating, and its slope
    gives the rate. A temperature column may be missing only for an isothermal run
    whose temperature ``info`` gives; it is then filled with that temperature.

    Examples
    --------
    >>> trace = read_trace("iso_125.csv", units={"time": "min"})  # doctest: +SKIP
    >>> trace.time[:3]  # seconds                                   # doctest: +SKIP
    """
    path = Path(path)
    where = str(path)
    _check_options(where, columns, units, decimal, max_rows)
    table = _load(path, where, decimal=decimal, sheet=sheet, max_rows=max_rows)
    header = _locate_header(table, where)
    names = [c or f"column {j + 1}"
             for j, c in enumerate(_header_cells(table, header.names_row, header.first_data))]
    labels = [_split_header(c) for c in names]
    if header.units_row is not None:
        unit_cells = table.cells(header.units_row)
        labels = [(name, _strip_brackets(unit_cells[j]) if j < len(unit_cells)
                   and unit_cells[j].strip() else unit)
                  for j, (name, unit) in enumerate(labels)]
    roles = _assign_roles(names, labels, columns or {}, where)

    unit_of = {role: _role_unit(role, names[j], labels[j][1], (units or {}).get(role), where)
               for role, j in roles.items() if j is not None}
    for role in (units or {}):
        if role not in unit_of:
            unit_of[role] = _role_unit(role, role, None, units[role], where)

    first = header.first_data
    last = table.n_rows - 1
    role_cols = [j for j in roles.values() if j is not None]
    while last >= first and (table.is_blank(last)
                             or all(not table.cell(last, j) for j in role_cols)):
        last -= 1
    n = last - first + 1
    if n <= 0:
        raise CrystkinInputError(
            f"no data rows below the header (row {table.row_number(header.names_row)}); "
            "check that the file holds the measured data, not only its description",
            source=where)
    if n > max_rows:
        raise CrystkinInputError(
            f"{n} data rows, more than the limit of {max_rows}; thin the export (fewer points"
            " per second), or from Python pass a larger max_rows to read_trace", source=where)
    if n < 10:
        raise CrystkinInputError(
            f"only {n} data rows (rows {table.row_number(first)}-{table.row_number(last)});"
            " a run needs at least 10", source=where)
    row_numbers = table.row_numbers(first, last)

    present = {role: j for role, j in roles.items() if j is not None}
    cells = table.columns(list(present.values()), first, last)
    raw = {role: _numeric_column(table, col, j, first, names[j], where)
           for (role, j), col in zip(present.items(), cells, strict=True)}

    t_raw = raw["time"]
    time = unit_of["time"].to_si(t_raw)
    _check_monotonic(time, t_raw, row_numbers, names[roles["time"]], where)
    _check_time_unit_switch(t_raw, row_numbers, names[roles["time"]], where)

    metadata = _metadata(table, header.names_row)
    file_mass = _mass_from_metadata(metadata)
    mass = info.mass if info is not None and info.mass is not None else file_mass

    hf_unit = unit_of["heat_flow"]
    heat_flow = hf_unit.to_si(raw["heat_flow"])
    specific = hf_unit.dimension == "specific_heat_flow"
    if specific and mass is not None:
        heat_flow = heat_flow * mass
        specific = False

    extra = {"file_metadata": metadata,
             "columns": {role: names[j] for role, j in roles.items() if j is not None},
             "units": {role: u.symbol for role, u in unit_of.items()}}
    if file_mass is not None:
        extra["file_mass"] = file_mass
        if mass is not None and abs(file_mass - mass) > 0.02 * mass:
            note = (f"{where}: the file says the sample mass is {file_mass * 1e6:g} mg, the "
                    f"study file {mass * 1e6:g} mg; the study file's value is used")
            warnings.warn(note, DataQualityWarning, stacklevel=2)
            extra["warnings"] = (note,)
    if roles["temperature"] is not None:
        temperature = unit_of["temperature"].to_si(raw["temperature"])
        _check_kelvin_celsius_jump(temperature, row_numbers, names[roles["temperature"]], where)
        _check_above_absolute_zero(temperature, row_numbers, names[roles["temperature"]], where,
                                   unit_of["temperature"].symbol)
    elif info is not None and info.kind == "isothermal" and info.temperature is not None:
        temperature = np.full(n, float(info.temperature))
        extra["temperature_filled"] = True
    else:
        raise CrystkinInputError(
            f"no temperature column found among {_column_list(names)}; name it with "
            'columns = { temperature = "..." } in the study file, or, for an isothermal run, '
            "give its temperature so the column can be filled", source=where)

    rows = (int(row_numbers[0]), int(row_numbers[-1]))
    if info is None:
        info = _guess_info(path, time, temperature, mass, where)
        extra["guessed"] = True
    run_info = replace(info, source=where, rows=rows, mass=mass,
                       extra={**info.extra, **extra})
    return Trace(run_info, time, temperature, heat_flow, specific=specific)


# -- options -------------------------------------------------------------------------------

def _check_options(where, columns, units, decimal, max_rows):
    for label, mapping in (("columns", columns), ("units", units)):
        if mapping is None:
            continue
        if not isinstance(mapping, dict):
            raise CrystkinInputError(
                f"'{label}' must be a table such as {label} = {{ time = \"...\" }}, "
                f"got {mapping!r}", source=where)
        unknown = sorted(str(k) for k in mapping if k not in ROLES)
        if unknown:
            raise CrystkinInputError(
                f"unknown role(s) {', '.join(unknown)} in '{label}'; allowed: "
                f"{', '.join(ROLES)}", source=where)
    if units:
        for role, value in units.items():
            if not isinstance(value, str):
                raise CrystkinInputError(
                    f"units.{role} must be a unit string such as \"{_EXAMPLE_UNIT[role]}\", "
                    f"got {value!r}", source=where)
    if decimal not in (None, ".", ","):
        raise CrystkinInputError(
            f"decimal must be \".\" or \",\", got {decimal!r}", source=where)
    if isinstance(max_rows, bool) or not isinstance(max_rows, int) or max_rows < 1:
        raise CrystkinInputError(
            f"max_rows must be a positive whole number, got {max_rows!r}", source=where)


# -- loading: every format becomes a grid of text cells with file row numbers ---------------

class _Table:
    """Rows of text cells, split lazily, with the file row number of each."""

    def __init__(self, lines=None, delimiter=None, grid=None, numbers=None, decimal="."):
        self._lines = lines
        self.delimiter = delimiter
        self._grid = grid
        self._numbers = numbers
        self._cache: dict[int, list[str]] = {}
        self.decimal = decimal
        self.n_rows = len(lines) if lines is not None else len(grid)

    def cells(self, i: int) -> list[str]:
        if self._grid is not None:
            return self._grid[i]
        row = self._cache.get(i)
        if row is None:
            row = [c.strip() for c in _split(self._lines[i], self.delimiter)]
            if len(self._cache) < 10_000:
                self._cache[i] = row
        return row

    def raw(self, i: int) -> str:
        if self._lines is not None:
            return self._lines[i]
        return "\t".join(self._grid[i])

    def cell(self, i: int, j: int) -> str:
        row = self.cells(i)
        return row[j] if j < len(row) else ""

    def columns(self, js: list[int], first: int, last: int) -> list[list[str]]:
        if self._lines is not None and self.delimiter is not None:
            block = self._lines[first:last + 1]
            d = self.delimiter
            if not any('"' in line for line in block):
                rows = [line.split(d) for line in block]
                return [[r[j] if len(r) > j else "" for r in rows] for j in js]
        out: list[list[str]] = [[] for _ in js]
        for i in range(first, last + 1):
            row = self.cells(i)
            n = len(row)
            for col, j in zip(out, js, strict=True):
                col.append(row[j] if j < n else "")
        return out

    def row_numbers(self, first: int, last: int) -> np.ndarray:
        if self._numbers is None:
            return np.arange(first + 1, last + 2)
        return np.asarray(self._numbers[first:last + 1])

    def row_number(self, i: int) -> int:
        return self._numbers[i] if self._numbers is not None else i + 1

    def is_blank(self, i: int) -> bool:
        if self._lines is not None:
            return not self._lines[i].strip(" \t,;|")
        return not any(self._grid[i])


def _load(path: Path, where: str, *, decimal, sheet, max_rows) -> _Table:
    if not path.exists():
        raise CrystkinInputError(
            "file not found; check the 'file' entry of the run (paths are relative to the "
            "study file)", source=where)
    if path.is_dir():
        raise CrystkinInputError("is a folder, not a data file; name the file itself",
                                 source=where)
    suffix = path.suffix.lower()
    if suffix in _OLD_SPREADSHEETS:
        raise CrystkinInputError(
            f"'{suffix}' workbooks are not read; save the sheet as .xlsx or export it as CSV",
            source=where)
    try:
        size = path.stat().st_size
        with path.open("rb") as fh:
            head = fh.read(4)
    except OSError as exc:
        raise CrystkinInputError(f"cannot open the file ({exc.strerror or exc}); check its "
                                 "permissions", source=where) from exc
    if size == 0:
        raise CrystkinInputError("the file is empty; export the run again", source=where)
    if size > max(max_rows, 1000) * 512:
        raise CrystkinInputError(
            f"the file is {size / 1e6:.0f} MB, too large for {max_rows} rows; thin the export"
            ", or from Python pass a larger max_rows to read_trace", source=where)
    if suffix in EXCEL_SUFFIXES or head == b"PK\x03\x04":
        return _load_xlsx(path, where, decimal=decimal, sheet=sheet, max_rows=max_rows)
    return _load_text(path, where, decimal=decimal, max_rows=max_rows)


def _load_text(path: Path, where: str, *, decimal, max_rows) -> _Table:
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise CrystkinInputError(f"cannot read the file ({exc.strerror or exc})",
                                 source=where) from exc
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        try:
            text = data.decode("utf-16")
        except UnicodeDecodeError as exc:
            raise CrystkinInputError(
                "starts like UTF-16 text but cannot be decoded; export it again as UTF-8 CSV",
                source=where) from exc
    elif (utf16 := _utf16_without_bom(data)) is not None:
        text = data[:len(data) - len(data) % 2].decode(utf16, errors="replace")
    else:
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError:
            text = data.decode("latin-1")
    if "\x00" in text:
        raise CrystkinInputError(
            "contains binary data, not a text table; export the run from the instrument "
            "software as CSV, text or XLSX", source=where)
    lines = _LINE_BREAK.split(text)
    if lines and lines[-1] == "":
        lines.pop()
    if len(lines) > max_rows + _EXTRA_LINES:
        raise CrystkinInputError(
            f"{len(lines)} lines, more than the limit of {max_rows} data rows; thin the export"
            " (fewer points per second), or from Python pass a larger max_rows to read_trace",
            source=where)
    longest = max(range(len(lines)), key=lambda i: len(lines[i]), default=None)
    if longest is not None and len(lines[longest]) > _MAX_LINE:
        raise CrystkinInputError(
            f"this line has {len(lines[longest])} characters, more than a table row can have "
            f"({_MAX_LINE}); check that this is a data file with one row per line",
            source=where, row=longest + 1)
    if not any(line.strip() for line in lines):
        raise CrystkinInputError("the file is empty (only blank lines); export the run again",
                                 source=where)
    delimiter, dec = _detect_format(lines, decimal, where)
    return _Table(lines=lines, delimiter=delimiter, decimal=dec)


def _utf16_without_bom(data: bytes) -> str | None:
    """'utf-16-le' or 'utf-16-be' when the bytes look like mostly-ASCII UTF-16 text."""
    data = data[:len(data) - len(data) % 2]
    half = len(data) // 2
    if half < 2:
        return None
    even, odd = data[0::2].count(0), data[1::2].count(0)
    if odd > 0.9 * half and even < 0.1 * half:
        return "utf-16-le"
    if even > 0.9 * half and odd < 0.1 * half:
        return "utf-16-be"
    return None


def _load_xlsx(path: Path, where: str, *, decimal, sheet, max_rows) -> _Table:
    try:
        import openpyxl
    except ImportError as exc:  # pragma: no cover - openpyxl is a core dependency
        raise CrystkinInputError("reading XLSX needs openpyxl: pip install openpyxl",
                                 source=where) from exc
    grid: list[list[str]] = []
    limit = max_rows + 10_000
    wb = fh = None
    # openpyxl raises many exception types on damaged files (zip, XML, KeyError, ...);
    # any of them means the same thing to the user, so they are caught together here.
    try:
        fh = path.open("rb")
        wb = openpyxl.load_workbook(fh, read_only=True, data_only=True)
        ws = _pick_sheet(wb, sheet, where)
        ws.reset_dimensions()
        for row in ws.iter_rows(min_row=1, values_only=True):
            grid.append([_cell_text(v) for v in row])
            if len(grid) > limit:
                break
    except CrystkinInputError:
        raise
    except Exception as exc:
        raise CrystkinInputError(
            f"cannot read the workbook ({type(exc).__name__}: {exc}); open it in a "
            "spreadsheet program and save it again as .xlsx, or export the sheet as CSV",
            source=where) from exc
    finally:
        if wb is not None:
            wb.close()
        if fh is not None:
            fh.close()
    if len(grid) > limit:
        raise CrystkinInputError(
            f"more than {max_rows} data rows; thin the export, or from Python pass a larger "
            "max_rows to read_trace", source=where)
    while grid and not any(grid[-1]):
        grid.pop()
    if not grid:
        raise CrystkinInputError("the worksheet is empty", source=where)
    numbers = list(range(1, len(grid) + 1))
    dec = decimal or _detect_decimal_cells(grid)
    return _Table(grid=grid, numbers=numbers, decimal=dec)


def _pick_sheet(wb, sheet, where):
    names = wb.sheetnames
    if sheet is None:
        return wb.worksheets[0]
    if isinstance(sheet, bool) or not isinstance(sheet, (str, int)):
        raise CrystkinInputError(f"sheet must be a name or a 0-based number, got {sheet!r}",
                                 source=where)
    if isinstance(sheet, int):
        if not 0 <= sheet < len(names):
            raise CrystkinInputError(
                f"sheet number {sheet} does not exist (0 to {len(names) - 1}); sheets: "
                f"{', '.join(names)}", source=where)
        return wb.worksheets[sheet]
    if sheet not in names:
        raise CrystkinInputError(f"no sheet named '{sheet}'; sheets: {', '.join(names)}",
                                 source=where)
    return wb[sheet]


def _cell_text(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return str(v)
    if isinstance(v, float):
        return repr(v)
    return str(v).strip()


def _split(line: str, delimiter):
    if delimiter is None:
        return line.split()
    if '"' in line:
        try:
            return next(csv.reader([line], delimiter=delimiter), [])
        except csv.Error:
            return line.split(delimiter)
    return line.split(delimiter)


def _is_number(cell: str, decimal: str) -> bool:
    c = cell.strip()
    if decimal == ",":
        c = c.replace(",", ".")
    return _NUMBER.fullmatch(c) is not None


def _numeric_count(cells, decimal) -> tuple[int, int]:
    nonempty = [c for c in cells if c.strip()]
    return sum(_is_number(c, decimal) for c in nonempty), len(nonempty)


def _data_like(cells, decimal) -> bool:
    n_num, n_nonempty = _numeric_count(cells, decimal)
    return n_num >= 2 and 2 * n_num >= n_nonempty


def _detect_format(lines, decimal, where):
    sample = [ln for ln in lines[-4 * _SAMPLE_LINES:] if ln.strip()][-_SAMPLE_LINES:]
    decimals = (decimal,) if decimal else (".", ",")
    best, best_score = None, (0, 0)
    for delimiter in _DELIMITERS:
        for dec in decimals:
            if dec == delimiter:
                continue
            good = cells_total = 0
            for line in sample:
                cells = _split(line, delimiter)
                n_num, n_nonempty = _numeric_count(cells, dec)
                if n_num >= 2 and 2 * n_num >= n_nonempty:
                    good += 1
                    cells_total += n_num
            if (good, cells_total) > best_score:
                best, best_score = (delimiter, dec), (good, cells_total)
    if best is None:
        raise CrystkinInputError(
            "no rows of numbers found (expected columns of time, temperature and heat flow "
            "separated by tab, ';', ',' or blanks); check that this is the exported data file",
            source=where)
    return best


def _detect_decimal_cells(grid) -> str:
    sample = [r for r in grid[-_SAMPLE_LINES:] if any(r)]
    dot = sum(_data_like(r, ".") for r in sample)
    comma = sum(_data_like(r, ",") for r in sample)
    return "," if comma > dot else "."


# -- header ---------------------------------------------------------------------------------

class _Header:
    def __init__(self, names_row, units_row, first_data):
        self.names_row = names_row
        self.units_row = units_row
        self.first_data = first_data


def _locate_header(table: _Table, where: str) -> _Header:
    dec = table.decimal
    prev_nonblank = None
    first_data_like = None
    for i in range(table.n_rows):
        if table.is_blank(i):
            continue
        if first_data_like is not None and i - first_data_like > _HEADER_SEARCH:
            break
        cells = table.cells(i)
        if _data_like(cells, dec):
            if first_data_like is None:
                first_data_like = i
            if prev_nonblank is not None and _header_like(table.cells(prev_nonblank), dec):
                names_row, units_row = prev_nonblank, None
                if _units_like(table.cells(prev_nonblank)):
                    above = _previous_nonblank(table, prev_nonblank)
                    if above is not None and _header_like(table.cells(above), dec):
                        names_row, units_row = above, prev_nonblank
                return _Header(names_row, units_row, i)
        prev_nonblank = i
    if first_data_like is None:
        raise CrystkinInputError(
            "no rows of numbers found (expected columns of time, temperature and heat flow); "
            "check that this is the exported data file", source=where)
    raise CrystkinInputError(
        "no header row naming the columns above the data; add one line such as "
        "'Time (min),Temperature (degC),Heat flow (mW)' above the first data row",
        source=where, row=table.row_number(first_data_like))


def _header_cells(table: _Table, row: int, first_data: int) -> list[str]:
    cells = table.cells(row)
    if table.delimiter is None:
        # blank-separated files: names may contain single blanks ("Heat flow (mW)")
        wide = [c.strip() for c in re.split(r"\t| {2,}", table.raw(row).strip())]
        if len(wide) == len(table.cells(first_data)) or len(cells) != len(
                table.cells(first_data)):
            return wide
    return cells


def _previous_nonblank(table, i):
    for k in range(i - 1, -1, -1):
        if not table.is_blank(k):
            return k
    return None


def _header_like(cells, decimal) -> bool:
    n_num, n_nonempty = _numeric_count(cells, decimal)
    return n_num == 0 and n_nonempty >= 2


def _units_like(cells) -> bool:
    nonempty = [c for c in cells if c.strip()]
    return bool(nonempty) and all(_is_unit(_strip_brackets(c)) for c in nonempty)


def _strip_brackets(text: str) -> str:
    t = text.strip()
    if len(t) >= 2 and t[0] in "([{" and t[-1] in ")]}":
        t = t[1:-1].strip()
    return t


def _is_unit(text: str) -> bool:
    if not text or len(text) > 20:
        return False
    try:
        parse_unit(text)
    except CrystkinInputError:
        return False
    return True


def _split_header(cell: str) -> tuple[str, str | None]:
    """Split a header cell into (name, unit text or None)."""
    text = cell.strip()
    m = _BRACKETED.match(text)
    if m and m.group("name"):
        return m.group("name").strip(), (m.group("unit").strip() or None)
    parts = text.rsplit(None, 1)
    if len(parts) == 2 and _is_unit(parts[1]):
        name = re.sub(r"(\s+in|\s*[/,])$", "", parts[0], flags=re.IGNORECASE).strip()
        if name:
            return name, parts[1]
    for sep in ("/", ","):
        if sep in text:
            left, right = text.split(sep, 1) if sep == "/" else text.rsplit(sep, 1)
            unit = _strip_brackets(right)
            if left.strip() and _is_unit(unit):
                return left.strip(), unit
    return text, None


def _normal_name(name: str) -> str:
    return " ".join(re.sub(r"[^\w°]+|_", " ", name).lower().split())


def _assign_roles(names, labels, columns, where) -> dict[str, int | None]:
    roles: dict[str, int | None] = {}
    taken: set[int] = set()
    for role, wanted in columns.items():
        j = _find_named_column(role, wanted, names, labels, where)
        roles[role] = j
        taken.add(j)
    for role in ROLES:
        if role in roles:
            continue
        found = _detect_role(role, labels, taken)
        if len(found) > 1:
            cols = ", ".join(f"'{names[j]}'" for j in found)
            raise CrystkinInputError(
                f"several columns could be the {_ROLE_LABEL[role]} ({cols}); choose one with "
                f'columns = {{ {role} = "{names[found[0]]}" }} in the study file', source=where)
        if found:
            roles[role] = found[0]
            taken.add(found[0])
        elif role == "temperature":
            roles[role] = None
        else:
            raise CrystkinInputError(
                f"no {_ROLE_LABEL[role]} column found among {_column_list(names)}; name it "
                f'with columns = {{ {role} = "..." }} in the study file', source=where)
    return {role: roles[role] for role in ROLES}


def _find_named_column(role, wanted, names, labels, where) -> int:
    if isinstance(wanted, int) and not isinstance(wanted, bool):
        if 1 <= wanted <= len(names):
            return wanted - 1
        raise CrystkinInputError(
            f"columns.{role} = {wanted} is outside 1..{len(names)}", source=where)
    if not isinstance(wanted, str):
        raise CrystkinInputError(
            f"columns.{role} must be a column name or a 1-based column number, got {wanted!r}",
            source=where)
    for test in (lambda j: names[j] == wanted,
                 lambda j: labels[j][0] == wanted,
                 lambda j: names[j].strip().lower() == wanted.strip().lower(),
                 lambda j: _normal_name(labels[j][0]) == _normal_name(wanted)):
        hits = [j for j in range(len(names)) if test(j)]
        if len(hits) == 1:
            return hits[0]
        if len(hits) > 1:
            raise CrystkinInputError(
                f"columns.{role} = \"{wanted}\" matches {len(hits)} columns; the header has "
                "repeated names, so give the column number instead", source=where)
    raise CrystkinInputError(
        f"column '{wanted}' (given for {_ROLE_LABEL[role]}) is not in the header; the file "
        f"has {_column_list(names)}", source=where)


def _detect_role(role, labels, taken) -> list[int]:
    free = [j for j in range(len(labels)) if j not in taken]
    single = {"time": "t", "temperature": "T"}.get(role)
    exact = [j for j in free
             if (single is not None and labels[j][0].strip() == single)
             or _normal_name(labels[j][0]) in _ROLE_WORDS[role]]
    if exact:
        return exact
    return [j for j in free
            if any(_normal_name(labels[j][0]).startswith(p + " ")
                   for p in _ROLE_PREFIXES[role])]


def _column_list(names) -> str:
    shown = [f"'{n}'" for n in names[:12]]
    more = f" and {len(names) - 12} more" if len(names) > 12 else ""
    return "columns " + ", ".join(shown) + more


# -- numbers --------------------------------------------------------------------------------

def _numeric_column(table: _Table, cells: list[str], j: int, first: int, name: str,
                    where: str) -> np.ndarray:
    if table.decimal == ",":
        cells = [c.replace(",", ".") for c in cells]
    try:
        values = np.fromiter(map(float, cells), dtype=np.float64, count=len(cells))
    except ValueError:
        values = None
    if values is not None and np.all(np.isfinite(values)):
        return values
    for k, c in enumerate(cells):
        c = c.strip()
        ok = _NUMBER.fullmatch(c) is not None
        if ok and values is not None and not np.isfinite(values[k]):
            ok = False
        if ok:
            continue
        i = first + k
        row = table.row_number(i)
        if table.is_blank(i):
            raise CrystkinInputError(
                "blank row inside the data; delete it (the data must be one unbroken block)",
                source=where, row=row)
        if not c:
            raise CrystkinInputError(
                "blank cell inside the data (a gap); fill it or delete the row",
                source=where, row=row, column=name)
        raise CrystkinInputError(
            f"'{table.cell(i, j)}' is not a number; correct the cell or delete the row",
            source=where, row=row, column=name)
    # every cell matched the number pattern yet numpy refused it (should not happen)
    raise CrystkinInputError("cannot read the column as numbers", source=where, column=name)


def _role_unit(role, column, header_unit, override, where) -> Unit:
    text = override if override is not None else header_unit
    if text is None:
        raise CrystkinInputError(
            f"the header gives no unit for the {_ROLE_LABEL[role]}; add "
            f'units = {{ {role} = "{_EXAMPLE_UNIT[role]}" }} to the run (or to [defaults]) '
            "in the study file", source=where, column=column)
    dims = _DIMENSIONS[role]
    try:
        unit = parse_unit(text)
    except CrystkinInputError:
        unit = None
    if unit is None or unit.dimension not in dims:
        kind = "unknown" if unit is None else f"{unit.dimension.replace('_', ' ')}"
        allowed = {"time": "s, min, h", "temperature": "degC, K",
                   "heat_flow": "mW, W, uW, W/g, mW/mg"}[role]
        raise CrystkinInputError(
            f"unit '{text}' ({kind}) is not a {_ROLE_LABEL[role]} unit; use one of {allowed}, "
            f'for example units = {{ {role} = "{_EXAMPLE_UNIT[role]}" }} in the study file',
            source=where, column=column)
    return unit


def _check_monotonic(time, raw, row_numbers, name, where):
    dt = np.diff(time)
    bad = np.flatnonzero(~(dt > 0))
    if bad.size == 0:
        return
    k = int(bad[0])
    what = "repeats" if dt[k] == 0 else "goes back"
    raise CrystkinInputError(
        f"time {what} ({raw[k]:g} then {raw[k + 1]:g}); time must increase row by row: sort "
        "the file or delete repeated rows", source=where, row=int(row_numbers[k + 1]),
        column=name)


def _check_time_unit_switch(raw, row_numbers, name, where, *, edge=5):
    """Refuse a time column whose unit changes part way (min then s, h then s or min)."""
    n = len(raw)
    if n < 2 * edge + 2:
        return
    dt = np.diff(raw)
    ratio = raw[1:] / np.where(raw[:-1] > 0, raw[:-1], np.nan)
    for factor in (60.0, 3600.0):
        for k in np.flatnonzero(np.abs(ratio / factor - 1.0) < 0.02):
            if k < edge or k > n - edge - 2:
                continue
            step = np.median(dt[k + 1:k + 1 + edge]) / np.median(dt[k - edge:k])
            if abs(step / factor - 1.0) < 0.05:
                raise CrystkinInputError(
                    f"time jumps from {raw[k]:g} to {raw[k + 1]:g} and its step grows "
                    f"{factor:g}-fold here: part of the column seems to be in another unit; "
                    "export the run again with one time unit", source=where,
                    row=int(row_numbers[k + 1]), column=name)


def _check_above_absolute_zero(temperature, row_numbers, name, where, unit):
    """Refuse temperatures at or below 0 K (a wrong unit, or a corrupt value)."""
    bad = np.flatnonzero(~(temperature > 0.0))
    if bad.size:
        k = int(bad[0])
        raise CrystkinInputError(
            f"temperature {temperature[k] - (273.15 if 'C' in unit else 0.0):g} {unit} is at or "
            "below absolute zero; check the column's unit (degrees Celsius labelled as kelvin?)",
            source=where, row=int(row_numbers[k]), column=name)


def _check_kelvin_celsius_jump(temperature, row_numbers, name, where):
    """Refuse a temperature column that switches between kelvin and degrees Celsius."""
    d = np.diff(temperature)
    if d.size < 3:
        return
    typical = float(np.median(np.abs(d)))
    jumps = np.flatnonzero((np.abs(np.abs(d) - 273.15) < 0.6) & (typical < 5.0))
    if jumps.size:
        k = int(jumps[0])
        raise CrystkinInputError(
            f"temperature jumps by {d[k]:+.2f} K from one row to the next: part of the column "
            "seems to be in kelvin and part in degrees Celsius; export the run again with one "
            "temperature unit", source=where, row=int(row_numbers[k + 1]), column=name)


# -- metadata and guessing ------------------------------------------------------------------

def _metadata(table: _Table, header_row: int) -> dict[str, str]:
    meta: dict[str, str] = {}
    for i in range(header_row):
        if table.is_blank(i):
            continue
        line = table.raw(i).strip()
        m = re.match(r"^([^:=]{1,80}?)\s*[:=]\s*(.*)$", line)
        if m:
            key, value = m.group(1), m.group(2)
            key = key.strip(" \t;,|\"")
            value = value.strip(" \t;,|\"")
        else:
            cells = [c for c in table.cells(i) if c.strip()]
            if len(cells) < 2:
                continue
            key, value = cells[0].rstrip(":"), " ".join(cells[1:])
        if key and key not in meta:
            meta[key] = _tidy_value(value)
    return meta


def _tidy_value(value: str) -> str:
    return " ".join(value.replace("\t", " ").replace(";", " ").split())


def _mass_from_metadata(meta: dict[str, str]) -> float | None:
    for key, value in meta.items():
        name, key_unit = _split_header(key)
        low = name.lower()
        if not any(w in low for w in _MASS_WORDS) or any(w in low for w in _NOT_MASS_WORDS):
            continue
        try:
            mass = parse_quantity(value, dimension="mass", default_unit=key_unit)
        except CrystkinInputError:
            continue
        if np.isfinite(mass) and mass > 0:
            return mass
    return None


def _guess_info(path: Path, time, temperature, mass, where) -> RunInfo:
    lo, hi = np.percentile(temperature, [1, 99])
    if hi - lo < 2.0:
        return RunInfo(run_id=path.stem, kind="isothermal",
                       temperature=float(np.median(temperature)), mass=mass, source=where)
    slope = float(np.polyfit(time - time[0], temperature, 1)[0])
    if not slope:
        return RunInfo(run_id=path.stem, kind="isothermal",
                       temperature=float(np.median(temperature)), mass=mass, source=where)
    kind = "cooling" if slope < 0 else "heating"
    return RunInfo(run_id=path.stem, kind=kind, rate=abs(slope), mass=mass, source=where)
