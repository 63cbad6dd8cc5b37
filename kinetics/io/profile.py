"""Temperature–time profiles to which a rate model is applied.

A profile is the temperature history of a part (or of one point in it): a
measured mold cooling curve, the output of a thermal simulation, or a plain
constant-rate cooling. Two ways to get one:

* :func:`read_profile` reads a delimited text file (CSV, TSV, ``;``-separated)
  with a header row naming a time and a temperature column, each with its unit
  in the header: ``time (s)``, ``Time [min]``, ``temperature/°C``,
  ``T_degC``. Lines starting with ``#`` and free text above the header are
  skipped; other columns are ignored.
* :func:`constant_rate_profile` builds a ramp from a start and end temperature
  and a cooling rate, optionally after a hold.

Everything is converted to SI (s, K) here; the profile keeps the file row of
every point so later checks (a profile that heats, for example) can name it.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import CrystkinInputError
from ..units import Unit, parse_quantity, parse_unit

__all__ = ["TemperatureProfile", "read_profile", "constant_rate_profile", "profile_from_arrays"]

_ROLE_WORDS = {
    "time": ("time", "t", "zeit", "tiempo", "elapsed time", "time elapsed", "process time"),
    "temperature": ("temperature", "temp", "T", "part temperature", "sample temperature",
                    "mold temperature", "mould temperature", "temperatur", "temperatura",
                    "température"),
}
_EXAMPLE = {"time": "time (s)", "temperature": "temperature (degC)"}
_DIMENSION = {"time": "time", "temperature": "temperature"}
_BRACKETED = re.compile(r"^(?P<name>.*?)\s*[(\[{]\s*(?P<unit>[^()\[\]{}]*?)\s*[)\]}]\s*$")
_SLASHED = re.compile(r"^(?P<name>[^/]*?[A-Za-z])\s*/\s*(?P<unit>[^/]+?)\s*$")
_IN_UNIT = re.compile(r"^(?P<name>.*?)\s+in\s+(?P<unit>\S+)\s*$", re.IGNORECASE)
_NUMBER = re.compile(r"^[-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?$")
_MAX_ROWS = 2_000_000
_MAX_BYTES = 256 * 2**20


@dataclass(frozen=True)
class TemperatureProfile:
    """A temperature history T(t).

    Attributes
    ----------
    time : ndarray of shape (N,), s
        Strictly increasing.
    temperature : ndarray of shape (N,), K
    source : str
        File it was read from, or a description ("constant rate ...").
    row_numbers : ndarray of shape (N,) of int, optional
        1-based file line of every point (None for built profiles).
    provenance : dict
        Columns and units read, or the settings of a built profile.
    """

    time: np.ndarray
    temperature: np.ndarray
    source: str = ""
    row_numbers: np.ndarray | None = None
    provenance: dict = field(default_factory=dict)

    def __post_init__(self):
        t = np.array(self.time, dtype=float, copy=True)
        T = np.array(self.temperature, dtype=float, copy=True)
        where = self.source or None
        if t.ndim != 1 or T.shape != t.shape:
            raise CrystkinInputError(
                f"time and temperature must be 1-D arrays of equal length, got shapes "
                f"{t.shape} and {T.shape}", source=where)
        if len(t) < 3:
            raise CrystkinInputError(
                f"a profile needs at least 3 points, got {len(t)}", source=where)
        for name, a in (("time", t), ("temperature", T)):
            bad = np.flatnonzero(~np.isfinite(a))
            if bad.size:
                raise CrystkinInputError(f"{name} is not a finite number",
                                         source=where, row=self._row(int(bad[0])))
        dt = np.diff(t)
        if np.any(dt <= 0):
            i = int(np.flatnonzero(dt <= 0)[0])
            raise CrystkinInputError(
                f"time does not increase ({t[i]:g} s then {t[i + 1]:g} s); sort the profile or "
                "remove repeated rows", source=where, row=self._row(i + 1))
        if np.any(T <= 0):
            i = int(np.flatnonzero(T <= 0)[0])
            raise CrystkinInputError(
                f"temperature {T[i]:g} K is not above absolute zero; check the temperature "
                "unit in the header", source=where, row=self._row(i))
        rows = None
        if self.row_numbers is not None:
            rows = np.array(self.row_numbers, dtype=int, copy=True)
            if rows.shape != t.shape:
                raise CrystkinInputError("row_numbers must have one entry per point",
                                         source=where)
            rows.setflags(write=False)
        t.setflags(write=False)
        T.setflags(write=False)
        object.__setattr__(self, "time", t)
        object.__setattr__(self, "temperature", T)
        object.__setattr__(self, "row_numbers", rows)

    def _row(self, i: int) -> int | None:
        if self.row_numbers is None:
            return None
        return int(np.asarray(self.row_numbers)[i])

    def row_of(self, i: int) -> int | None:
        """File line (1-based) of point ``i``, or None for a built profile."""
        return self._row(i)

    @property
    def n_points(self) -> int:
        return len(self.time)

    @property
    def duration(self) -> float:
        """Length of the profile, s."""
        return float(self.time[-1] - self.time[0])


def profile_from_arrays(time, temperature, *, source: str = "arrays") -> TemperatureProfile:
    """A profile from arrays already in SI units (time in s, temperature in K)."""
    return TemperatureProfile(time=time, temperature=temperature, source=source,
                              provenance={"built_from": "arrays (s, K)"})


def _quantity(value, dimension: str, name: str, where: str) -> float:
    if isinstance(value, str):
        return parse_quantity(value, dimension=dimension, where=where)
    try:
        return float(value)
    except (TypeError, ValueError):
        raise CrystkinInputError(
            f"The '{name}' parameter of {where} must be a number in SI units or a string with "
            f"a unit. Got {value!r} instead.") from None


def constant_rate_profile(*, start, end, rate, hold=0.0, n_points: int = 2001,
                          end_hold=0.0) -> TemperatureProfile:
    """A constant-rate cooling profile.

    Parameters
    ----------
    start, end : float (K) or str
        Start and end temperatures; strings carry their unit (``"230 degC"``).
    rate : float (K/s) or str
        Cooling rate, positive (``"10 K/min"``).
    hold : float (s) or str
        Time held at ``start`` before the ramp.
    n_points : int
        Points of the ramp (holds add a few more).
    end_hold : float (s) or str
        Time held at ``end`` after the ramp.

    Returns
    -------
    TemperatureProfile
        Time from 0 s.

    Notes
    -----
    T(t) = start - rate (t - hold) for hold <= t <= hold + (start - end)/rate.
    """
    where = "constant_rate_profile"
    T0 = _quantity(start, "temperature", "start", where)
    T1 = _quantity(end, "temperature", "end", where)
    beta = _quantity(rate, "rate", "rate", where)
    th = _quantity(hold, "time", "hold", where)
    te = _quantity(end_hold, "time", "end_hold", where)
    if not beta > 0:
        raise CrystkinInputError(
            f"The 'rate' parameter of {where} must be a positive cooling rate. "
            f"Got {beta:g} K/s instead.")
    if not T0 > T1:
        raise CrystkinInputError(
            f"The 'start' temperature of {where} ({T0:g} K) must be above the 'end' "
            f"temperature ({T1:g} K); this builds cooling profiles")
    if th < 0 or te < 0:
        raise CrystkinInputError(f"{where}: holds must not be negative")
    if int(n_points) < 3:
        raise CrystkinInputError(f"The 'n_points' parameter of {where} must be at least 3. "
                                 f"Got {n_points!r} instead.")
    ramp = (T0 - T1) / beta
    t_ramp = th + np.linspace(0.0, ramp, int(n_points))
    T_ramp = T0 - beta * (t_ramp - th)
    t_parts, T_parts = [], []
    if th > 0:
        t_parts.append(np.linspace(0.0, th, 11)[:-1])
        T_parts.append(np.full(10, T0))
    t_parts.append(t_ramp)
    T_parts.append(T_ramp)
    if te > 0:
        t_parts.append(th + ramp + np.linspace(0.0, te, 11)[1:])
        T_parts.append(np.full(10, T1))
    desc = f"constant rate {beta * 60:g} K/min from {T0:g} K to {T1:g} K"
    return TemperatureProfile(
        time=np.concatenate(t_parts), temperature=np.concatenate(T_parts), source=desc,
        provenance={"built_from": "constant rate", "start_K": T0, "end_K": T1,
                    "rate_K_per_s": beta, "rate_K_per_min": beta * 60.0, "hold_s": th,
                    "end_hold_s": te})


# -- reading a file ---------------------------------------------------------------------------

def _read_text(path: Path, where: str) -> str:
    if not path.exists():
        raise CrystkinInputError("file not found; check the path", source=where)
    if path.is_dir():
        raise CrystkinInputError("is a folder, not a profile file", source=where)
    if path.suffix.lower() in (".xlsx", ".xlsm", ".xls", ".ods"):
        raise CrystkinInputError(
            "profiles are read from delimited text; save the sheet as CSV (columns time and "
            "temperature with units in the header)", source=where)
    size = path.stat().st_size
    if size > _MAX_BYTES:
        raise CrystkinInputError(
            f"the file is {size / 2**20:.0f} MB, more than the limit of {_MAX_BYTES // 2**20} MB "
            f"for a profile (at most {_MAX_ROWS} rows); thin the profile", source=where)
    data = path.read_bytes()
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        return data.decode("utf-16")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        return data.decode("latin-1")


def _split(line: str, delimiter: str | None) -> list[str]:
    if delimiter is None:
        return line.split()
    return [c.strip() for c in line.split(delimiter)]


def _is_number(cell: str, decimal: str) -> bool:
    c = cell.strip()
    if decimal == ",":
        c = c.replace(",", ".")
    return bool(_NUMBER.match(c))


def _detect_layout(line: str, decimal: str | None):
    """Delimiter and decimal mark that make ``line`` a row of at least two numbers."""
    for delim in ("\t", ";", ",", "|", None):
        cells = _split(line, delim)
        if len(cells) < 2 or any(not c for c in cells):
            continue
        for dec in ((decimal,) if decimal else (".", ",")):
            if dec == "," and delim == ",":
                continue
            if all(_is_number(c, dec) for c in cells):
                return delim, dec
    return None


def _split_header(cell: str) -> tuple[str, str | None]:
    text = cell.strip().strip('"').strip()
    for pattern in (_BRACKETED, _IN_UNIT, _SLASHED):
        m = pattern.match(text)
        if m and m.group("unit").strip():
            return m.group("name").strip(), m.group("unit").strip()
    if "_" in text:
        name, _, unit = text.rpartition("_")
        try:
            parse_unit(unit)
            return name.strip(), unit
        except CrystkinInputError:
            pass
    return text, None


def _role_of(name: str) -> str | None:
    if name in ("t",):
        return "time"
    if name in ("T",):
        return "temperature"
    key = re.sub(r"[_\-.]+", " ", name).strip().lower()
    for role, words in _ROLE_WORDS.items():
        if key in {w.lower() for w in words if w not in ("t", "T")}:
            return role
    return None


def read_profile(path, *, columns: dict | None = None, units: dict | None = None,
                 decimal: str | None = None) -> TemperatureProfile:
    """Read a temperature–time profile from a delimited text file.

    Parameters
    ----------
    path : str or Path
    columns : dict, optional
        ``{"time": ..., "temperature": ...}``: column names as written in the header
        (with or without their unit) or 1-based column numbers, when the header words
        are not recognised or several columns could be meant.
    units : dict, optional
        ``{"time": "min", "temperature": "degC"}``: units that override or supply
        the header's.
    decimal : {".", ","}, optional
        Decimal mark; detected from the first data row when None.

    Returns
    -------
    TemperatureProfile
        Time in s and temperature in K; ``row_numbers`` are file lines (1-based).

    Raises
    ------
    CrystkinInputError
        Missing file, no header, a column that cannot be found or has no unit, a
        cell that is not a number (named by row and column), time that does not
        increase.

    Examples
    --------
    A file such as::

        # mold cooling curve, thermocouple 2
        time (s),temperature (degC)
        0,230
        0.5,221.4
        ...

    >>> profile = read_profile("mold_curve.csv")  # doctest: +SKIP
    """
    path = Path(path)
    where = str(path)
    if decimal not in (None, ".", ","):
        raise CrystkinInputError(
            f"The 'decimal' parameter of read_profile must be one of ['.', ',']. "
            f"Got {decimal!r} instead.")
    for name, d in (("columns", columns), ("units", units)):
        if d is not None:
            bad = sorted(set(d) - {"time", "temperature"})
            if bad:
                raise CrystkinInputError(
                    f"The '{name}' parameter of read_profile takes the keys 'time' and "
                    f"'temperature'. Got {bad} instead.")
    lines = _read_text(path, where).splitlines()
    first = None
    layout = None
    for i, line in enumerate(lines):
        s = line.strip()
        if not s or s.startswith("#"):
            continue
        layout = _detect_layout(s, decimal)
        if layout is not None:
            first = i
            break
    if first is None:
        raise CrystkinInputError(
            "no rows of numbers found; the file needs a header such as "
            "'time (s),temperature (degC)' followed by one row per point", source=where)
    delim, dec = layout
    header_i = None
    for i in range(first - 1, -1, -1):
        s = lines[i].strip()
        if s and not s.startswith("#"):
            header_i = i
            break
    if header_i is None:
        raise CrystkinInputError(
            f"no header above the first data row (row {first + 1}); add one such as "
            "'time (s),temperature (degC)'", source=where)
    names = _split(lines[header_i].strip(), delim)
    labels = [_split_header(c) for c in names]
    picked = _pick_columns(names, labels, columns or {}, where, header_i + 1)
    unit_of: dict[str, Unit] = {}
    for role, j in picked.items():
        symbol = (units or {}).get(role) or labels[j][1]
        if not symbol:
            raise CrystkinInputError(
                f"column '{names[j]}' has no unit; write it in the header, for example "
                f"'{_EXAMPLE[role]}', or pass units={{'{role}': ...}}", source=where,
                row=header_i + 1)
        unit_of[role] = parse_unit(symbol, dimension=_DIMENSION[role],
                                   where=f"{where}, column '{names[j]}'")

    values = {role: [] for role in picked}
    rows = []
    for i in range(first, len(lines)):
        s = lines[i].strip()
        if not s or s.startswith("#"):
            continue
        cells = _split(s, delim)
        for role, j in picked.items():
            cell = cells[j].strip() if j < len(cells) else ""
            if not _is_number(cell, dec):
                raise CrystkinInputError(
                    f"'{cell}' is not a number" if cell else "empty cell",
                    source=where, row=i + 1, column=names[j])
            values[role].append(float(cell.replace(",", ".") if dec == "," else cell))
        rows.append(i + 1)
        if len(rows) > _MAX_ROWS:
            raise CrystkinInputError(f"more than {_MAX_ROWS} rows; thin the profile",
                                     source=where)
    time = unit_of["time"].to_si(np.asarray(values["time"]))
    temperature = unit_of["temperature"].to_si(np.asarray(values["temperature"]))
    return TemperatureProfile(
        time=time, temperature=temperature, source=where, row_numbers=np.asarray(rows),
        provenance={"file": where, "columns": {r: names[j] for r, j in picked.items()},
                    "units": {r: u.symbol for r, u in unit_of.items()},
                    "rows": (rows[0], rows[-1]), "delimiter": delim or "blanks",
                    "decimal": dec})


def _pick_columns(names, labels, columns, where, header_row) -> dict[str, int]:
    picked = {}
    for role in ("time", "temperature"):
        wanted = columns.get(role)
        if wanted is not None:
            if isinstance(wanted, int) and not isinstance(wanted, bool):
                if not 1 <= wanted <= len(names):
                    raise CrystkinInputError(
                        f"column number {wanted} for {role} is outside 1-{len(names)}",
                        source=where)
                picked[role] = wanted - 1
                continue
            hits = [j for j, (c, (n, _)) in enumerate(zip(names, labels, strict=True))
                    if str(wanted).strip().lower() in (c.strip().lower(), n.strip().lower())]
            if not hits:
                raise CrystkinInputError(
                    f"no column named '{wanted}' for {role}; the header has: "
                    + ", ".join(f"'{c}'" for c in names), source=where, row=header_row)
            picked[role] = hits[0]
            continue
        hits = [j for j, (n, _) in enumerate(labels) if _role_of(n) == role]
        if len(hits) != 1:
            what = "no" if not hits else "more than one"
            raise CrystkinInputError(
                f"{what} {role} column found in the header ("
                + ", ".join(f"'{c}'" for c in names)
                + f"); name it, for example columns={{'{role}': '{names[0]}'}}, or write "
                  f"the header as '{_EXAMPLE['time']},{_EXAMPLE['temperature']}'",
                source=where, row=header_row)
        picked[role] = hits[0]
    if picked["time"] == picked["temperature"]:
        raise CrystkinInputError("time and temperature point to the same column",
                                 source=where, row=header_row)
    return picked
