"""Writers that never leave half-written output and never touch inputs.

* :func:`atomic_output_dir`: build a result folder under a hidden temporary name next
  to its destination and move it into place only when everything succeeded.
* :func:`check_output_destination`: the same refusals, up front, before long work.
* :func:`safe_child`: the path of one output file inside a result folder, refusing
  names that could escape it.
* :func:`write_json`, :func:`write_table`: byte-stable JSON, CSV and Markdown.

Each result folder holds a small marker file (``MARKER_NAME``); ``overwrite=True``
replaces only folders that carry it (or empty ones), so a mistyped ``--out`` cannot
delete a folder that crystkin did not write.
"""

from __future__ import annotations

import contextlib
import dataclasses
import json
import math
import os
import re
import secrets
import shutil
from collections.abc import Iterable, Iterator, Mapping
from pathlib import Path

import numpy as np

from ..errors import CrystkinInputError

__all__ = ["atomic_output_dir", "check_output_destination", "safe_child", "write_json",
           "json_text", "write_table", "markdown_table", "check_safe_name", "SAFE_NAME",
           "MARKER_NAME"]

MARKER_NAME = ".crystkin-output"
SAFE_NAME = re.compile(r"[A-Za-z0-9_][A-Za-z0-9._-]{0,127}")
_TABLE_FORMATS = ("csv", "md")


def check_safe_name(name, *, what: str = "name", where: str | None = None) -> str:
    """Return ``name`` if it is safe as a file name, else raise CrystkinInputError.

    Safe: 1 to 128 characters among letters, digits, ``-``, ``_`` and ``.``, not starting
    with ``.`` or ``-``, and not ``..``-like. No separators, so it cannot leave a folder.
    """
    if not isinstance(name, str) or not SAFE_NAME.fullmatch(name) or ".." in name:
        raise CrystkinInputError(
            f"{what} {name!r} cannot be used as a file name; use only letters, digits, "
            "'-', '_' and '.', not starting with '.' or '-' (at most 128 characters), "
            'for example "iso-125"', source=where)
    return name


def safe_child(root, name: str) -> Path:
    """Path of the output file ``name`` directly inside ``root``.

    Parameters
    ----------
    root : str or Path
        Output folder.
    name : str
        File name, such as ``"avrami_fits.csv"``.

    Raises
    ------
    CrystkinInputError
        When ``name`` is absolute, contains a path separator or ``..``, starts with a dot,
        or uses characters outside letters, digits, ``-``, ``_`` and ``.``.
    """
    return Path(root) / check_safe_name(name, what="output file name")


@contextlib.contextmanager
def atomic_output_dir(out, *, overwrite: bool = False, protect: Iterable = ()) -> Iterator[Path]:
    """Context manager: write into a temporary folder, then move it to ``out``.

    Parameters
    ----------
    out : str or Path
        Destination folder. Its parent is created if needed.
    overwrite : bool
        Replace an existing ``out`` (only a folder written by crystkin, or an empty one).
        An existing empty folder is used also without it.
        The old folder is removed only after the new one is in place.
    protect : iterable of path
        Input files and folders. ``out`` may not be one of them or contain one.

    Yields
    ------
    Path
        The temporary folder (hidden, in the same parent as ``out``); write every output
        file into it.

    Raises
    ------
    CrystkinInputError
        ``out`` exists and ``overwrite`` is False; ``out`` is not a folder crystkin wrote;
        ``out`` is or contains a protected input; ``out`` contains the current folder.

    Notes
    -----
    On an exception inside the ``with`` block the temporary folder is deleted and ``out``
    is left exactly as it was. The final moves are renames within one parent folder.
    """
    out = Path(out).expanduser()
    target = Path(os.path.abspath(out))
    _check_destination(target, out, overwrite, protect)
    parent = target.parent
    parent.mkdir(parents=True, exist_ok=True)
    tmp = _make_hidden_dir(parent, target.name, "tmp")
    try:
        (tmp / MARKER_NAME).write_text("written by crystkin; safe to replace with --overwrite\n",
                                       encoding="utf-8")
        yield tmp
        _check_destination(target, out, overwrite, protect)
        _move_into_place(tmp, target)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


def check_output_destination(out, *, overwrite: bool = False, protect: Iterable = ()) -> Path:
    """Refuse now a destination that :func:`atomic_output_dir` would refuse at the end.

    Call it before long work (fitting), with the same arguments, so a refused ``--out``
    costs nothing and leaves nothing behind.

    Returns
    -------
    Path
        ``out``.

    Raises
    ------
    CrystkinInputError
        As :func:`atomic_output_dir`.
    """
    out = Path(out).expanduser()
    _check_destination(Path(os.path.abspath(out)), out, overwrite, protect)
    return out


def _make_hidden_dir(parent: Path, name: str, tag: str) -> Path:
    for _ in range(100):
        candidate = parent / f".{name}.{tag}-{secrets.token_hex(4)}"
        try:
            candidate.mkdir()
        except FileExistsError:
            continue
        return candidate
    raise OSError(f"cannot create a temporary folder in {parent}")  # pragma: no cover


def _candidate_path(target: Path) -> Path:
    return Path(os.path.realpath(target))


def _check_destination(target: Path, out: Path, overwrite: bool, protect) -> None:
    real = _candidate_path(target)
    for p in protect:
        rp = Path(os.path.realpath(Path(p).expanduser()))
        if rp == real or real in rp.parents:
            raise CrystkinInputError(
                f"output folder {out} is or contains the input {p}; inputs are never "
                "overwritten: choose another with --out")
    if not os.path.lexists(target):
        return
    if target.is_symlink():
        raise CrystkinInputError(
            f"{out} is a symbolic link; outputs are not written through links: give the real "
            "folder (or a new one) with --out")
    if not target.is_dir():
        raise CrystkinInputError(
            f"{out} exists and is not a folder; choose another with --out")
    cwd = Path(os.path.realpath(Path.cwd()))
    empty = not any(real.iterdir())
    if not overwrite and not empty:
        raise CrystkinInputError(
            f"output folder {out} exists; choose another with --out or pass --overwrite")
    if real == cwd or real in cwd.parents:
        raise CrystkinInputError(
            f"output folder {out} is or contains the current folder; choose another with --out")
    if not (real / MARKER_NAME).is_file() and any(real.iterdir()):
        raise CrystkinInputError(
            f"{out} exists and was not written by crystkin (no {MARKER_NAME} file in it); "
            "refusing to replace it: choose another with --out")


def _move_into_place(tmp: Path, target: Path) -> None:
    if not os.path.lexists(target):
        os.rename(tmp, target)
        return
    old = _make_hidden_dir(target.parent, target.name, "old")
    old.rmdir()
    os.rename(target, old)
    try:
        os.rename(tmp, target)
    except BaseException:
        os.rename(old, target)
        raise
    shutil.rmtree(old, ignore_errors=True)


# -- JSON -------------------------------------------------------------------------------------

def _plain(obj):
    """A JSON-ready copy of ``obj``: numpy to Python, NaN and infinities to None."""
    if obj is None or isinstance(obj, (bool, str)):
        return obj
    if isinstance(obj, np.bool_):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        x = float(obj)
        return x if math.isfinite(x) else None
    if isinstance(obj, np.ndarray):
        return [_plain(v) for v in obj.tolist()] if obj.ndim else _plain(obj.item())
    if isinstance(obj, Mapping):
        return {_key(k): _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, (set, frozenset)):
        return sorted((_plain(v) for v in obj), key=lambda v: json.dumps(v, sort_keys=True))
    if isinstance(obj, Path):
        return str(obj)
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {f.name: _plain(getattr(obj, f.name)) for f in dataclasses.fields(obj)}
    if isinstance(obj, complex):
        raise TypeError("complex numbers cannot be written to JSON")
    raise TypeError(f"cannot write an object of type {type(obj).__name__} to JSON")


def _key(k) -> str:
    if isinstance(k, str):
        return k
    if isinstance(k, (np.generic, int, float, bool, Path)) or k is None:
        return str(k.item() if isinstance(k, np.generic) else k)
    raise TypeError(f"cannot use a key of type {type(k).__name__} in JSON")


def json_text(obj) -> str:
    """The exact text :func:`write_json` writes (sorted keys, indent 2, final newline)."""
    return json.dumps(_plain(obj), sort_keys=True, indent=2, allow_nan=False,
                      ensure_ascii=False) + "\n"


def write_json(path, obj) -> Path:
    """Write ``obj`` as byte-stable JSON (UTF-8, sorted keys, indent 2, final newline).

    numpy scalars and arrays become plain numbers and lists, tuples lists, dataclasses
    objects, and NaN or infinite values ``null`` (JSON has no NaN). The file is written
    to a temporary name and renamed, so it is never seen half-written.

    Returns
    -------
    Path
        ``path``.
    """
    path = Path(path)
    _atomic_write_bytes(path, json_text(obj).encode("utf-8"))
    return path


def _atomic_write_bytes(path: Path, data: bytes) -> None:
    tmp = path.with_name(f".{path.name}.tmp-{secrets.token_hex(4)}")
    try:
        with open(tmp, "wb") as fh:
            fh.write(data)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise


# -- tables -----------------------------------------------------------------------------------

def write_table(df, path_without_suffix, *, formats=("csv", "md")) -> tuple[Path, ...]:
    """Write a DataFrame as CSV and/or a Markdown table.

    Parameters
    ----------
    df : pandas.DataFrame
        A tidy table; a non-default index is written as leading column(s).
    path_without_suffix : str or Path
        ``.csv`` and ``.md`` are appended.
    formats : sequence of {"csv", "md"}

    Returns
    -------
    tuple of Path
        The files written, in the order of ``formats``.

    Notes
    -----
    Floats are written with ``%.6g`` (six significant digits), missing values as empty
    cells, lines end with ``\\n``: the same table always gives the same bytes. Tables are
    for reading; full-precision numbers belong in the JSON or draw files.
    """
    if isinstance(formats, str):
        formats = (formats,)
    bad = [f for f in formats if f not in _TABLE_FORMATS]
    if bad or not formats:
        raise CrystkinInputError(
            f"The 'formats' parameter of write_table must be a subset of "
            f"{list(_TABLE_FORMATS)}. Got {list(formats)!r} instead.")
    table = _tidy_frame(df)
    base = str(path_without_suffix)
    written = []
    for fmt in formats:
        path = Path(f"{base}.{fmt}")
        if fmt == "csv":
            text = table.to_csv(index=False, float_format="%.6g", lineterminator="\n",
                                na_rep="")
        else:
            text = markdown_table(table)
        _atomic_write_bytes(path, text.encode("utf-8"))
        written.append(path)
    return tuple(written)


def _tidy_frame(df):
    import pandas as pd

    if not isinstance(df, pd.DataFrame):
        raise TypeError(f"write_table needs a pandas DataFrame, got {type(df).__name__}")
    if isinstance(df.index, pd.RangeIndex) and df.index.name is None:
        return df
    return df.reset_index()


def _md_cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, (float, np.floating)):
        return "" if math.isnan(float(v)) else f"{float(v):.6g}"
    if isinstance(v, (bool, np.bool_)):
        return str(bool(v))
    try:
        import pandas as pd

        if pd.isna(v):
            return ""
    except (TypeError, ValueError):
        pass
    text = " ".join(str(v).split())
    return text.replace("\\", "\\\\").replace("|", "\\|")


def markdown_table(df) -> str:
    """A DataFrame as a GitHub-style Markdown table; numeric columns right-aligned."""
    from pandas.api.types import is_bool_dtype, is_numeric_dtype

    headers = [_md_cell(c) for c in df.columns]
    cols = [df.iloc[:, i] for i in range(df.shape[1])]
    right = [is_numeric_dtype(c) and not is_bool_dtype(c) for c in cols]
    lines = ["| " + " | ".join(headers) + " |",
             "| " + " | ".join("---:" if r else "---" for r in right) + " |"]
    for row in df.itertuples(index=False, name=None):
        lines.append("| " + " | ".join(_md_cell(v) for v in row) + " |")
    return "\n".join(lines) + "\n"
