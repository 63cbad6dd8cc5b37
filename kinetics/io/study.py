"""The study file: which raw file is which run, in TOML (our own schema).

A study file describes one set of DSC runs, as a lab notebook would::

    [study]
    name = "PX-40 screening"      # optional; defaults to the file name without suffix
    polymer = "iPP"               # optional
    delta_h100 = "207 J/g"        # optional: enthalpy of fusion of the 100 % crystalline polymer
    tm0 = "186 degC"              # optional: equilibrium melting temperature
    tg = "-10 degC"               # optional: glass transition temperature
    description = "..."           # optional, free text

    [defaults]                    # optional: any run key except name and file,
    mass = "5.0 mg"               # applied to every run that does not set it itself
    columns = { time = "Time", temperature = "Ts", heat_flow = "Value" }
    units = { time = "min", temperature = "degC", heat_flow = "mW" }
    decimal = ","

    [[run]]                       # one block per run
    name = "iso-125"              # optional; defaults to the file name without suffix; unique
    file = "raw/iso_125.csv"      # required; relative to the study file
    kind = "isothermal"           # required: isothermal | cooling | heating
    temperature = "125 degC"      # isothermal: the hold temperature
    rate = "10 K/min"             # cooling / heating: rate magnitude (positive)
    hold_temperature = "125 degC" # heating after an isothermal hold (melting, Hoffman-Weeks)
    mass = "5.2 mg"
    group = "neat"                # formulation; defaults to "default"
    exotherm = "up"               # optional: up | down; detected from the data when absent
    sheet = "Sheet1"              # optional, XLSX: sheet name or 0-based number
    columns = { heat_flow = "HF" }  # role -> column name (or 1-based number); merged with defaults
    units = { time = "s" }        # role -> unit, when the header has none; merged with defaults
    decimal = ","                 # optional: "." or ","; detected when absent
    notes = "..."                 # optional, free text

    [analysis]                    # optional: options for the analyses, kept as a plain table
    reference = "neat"            # checked here when present: a group name in quotes,
    kissinger = false             #   true/false, a fraction in [0, 1] and a number
    run_to_run_cv = 0.08          #   in kelvin (the key names the unit)
    tm0_sd_K = 2.0

Rules:

* Quantities are strings with a unit (``"125 degC"``, ``"10 K/min"``, ``"5.2 mg"``); a bare
  number is an error, because a number without its unit is the commonest silent mistake.
  They are converted to SI (K, K/s, kg, J/kg) once, here.
* Unknown keys are errors that list the allowed keys, so a typo cannot be ignored.
* ``name`` and ``group`` become parts of output file names, so they may contain only
  letters, digits, ``-``, ``_`` and ``.``, and may not start with ``.`` or ``-``.
* The study file never says where outputs go; that is the command line's job. An
  ``[analysis]`` key such as ``out`` or ``output_dir`` is an error that says so.
* Limits: at most ``MAX_RUNS`` runs and ``MAX_STUDY_BYTES`` bytes per study file.
* A run whose data file is missing or unreadable does not stop the study: it is listed in
  :attr:`Study.failures` with its message, and the other runs are read. A mistake in the
  study file itself (syntax, unknown key, bare number, bad name) stops reading at once.
"""

from __future__ import annotations

import difflib
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from ..dataset import RUN_KINDS, RunInfo, Study, Trace
from ..errors import CrystkinInputError
from ..units import parse_quantity, parse_unit
from .tables import ROLES, read_trace
from .writers import check_safe_name

__all__ = ["read_study", "STUDY_KEYS", "RUN_KEYS", "DEFAULT_KEYS", "TOP_LEVEL_KEYS",
           "MAX_RUNS", "MAX_STUDY_BYTES"]

#: Largest number of [[run]] blocks in one study file (our choice: a year of autosampler runs).
MAX_RUNS = 10_000
#: Largest study file accepted, bytes (10,000 run blocks take about 2 MB).
MAX_STUDY_BYTES = 16 * 2**20
_OUTPUT_WORDS = ("out", "output", "outdir", "out_dir", "output_dir", "output_folder",
                 "out_folder", "folder", "dir", "directory", "destination", "dest", "results",
                 "results_dir", "report_dir", "path", "prefix")

TOP_LEVEL_KEYS = ("study", "defaults", "run", "analysis")
STUDY_KEYS = ("name", "polymer", "delta_h100", "tm0", "tg", "description")
RUN_KEYS = ("name", "file", "kind", "temperature", "rate", "hold_temperature", "mass", "group",
            "exotherm", "sheet", "columns", "units", "decimal", "notes")
DEFAULT_KEYS = tuple(k for k in RUN_KEYS if k not in ("name", "file"))

_RUN_QUANTITIES = {"temperature": "temperature", "hold_temperature": "temperature",
                   "rate": "rate", "mass": "mass"}
_STUDY_QUANTITIES = {"delta_h100": "specific_energy", "tm0": "temperature",
                     "tg": "temperature"}
_UNIT_DIMENSIONS = {"time": ("time",), "temperature": ("temperature",),
                    "heat_flow": ("heat_flow", "specific_heat_flow")}
_TOML_POSITION = re.compile(r"\s*\(at line (\d+), column (\d+)\)\s*$")


@dataclass(frozen=True)
class _RunPlan:
    info: RunInfo
    file: Path
    options: dict = field(default_factory=dict)


def read_study(path) -> Study:
    """Read a study file and every run it names.

    Parameters
    ----------
    path : str or Path
        The TOML study file (schema in the module docstring).

    Returns
    -------
    Study
        ``traces`` in file order (runs that could be read); ``failures`` as
        (run name, one-line message) for runs whose data file was missing or unreadable;
        ``settings`` with ``name``, the ``[study]`` values (``delta_h100`` in J/kg,
        ``tm0`` and ``tg`` in K) and ``analysis`` (the ``[analysis]`` table, or ``{}``).

    Raises
    ------
    CrystkinInputError
        The study file is missing, not valid TOML (the message gives the line), breaks the
        schema, has no runs, or none of its runs could be read.
    """
    path = Path(path)
    where = str(path)
    doc = _load_toml(path, where)
    _check_keys(doc, TOP_LEVEL_KEYS, "the study file", where)
    settings = _study_settings(doc.get("study", {}), path, where)
    analysis = doc.get("analysis", {})
    if not isinstance(analysis, dict):
        raise CrystkinInputError("[analysis] must be a table of options", source=where)
    _check_analysis(analysis, where)
    settings["analysis"] = analysis
    defaults = doc.get("defaults", {})
    if not isinstance(defaults, dict):
        raise CrystkinInputError("[defaults] must be a table of run keys", source=where)
    _check_keys(defaults, DEFAULT_KEYS, "[defaults]", where)
    runs = doc.get("run")
    if runs is None or runs == []:
        raise CrystkinInputError(
            "no runs; add one [[run]] block per data file, with at least file and kind",
            source=where)
    if isinstance(runs, dict):
        raise CrystkinInputError(
            "write each run as a [[run]] block (double brackets), one per data file",
            source=where)
    if not isinstance(runs, list) or not all(isinstance(r, dict) for r in runs):
        raise CrystkinInputError("'run' must be a list of [[run]] blocks", source=where)
    if len(runs) > MAX_RUNS:
        raise CrystkinInputError(
            f"{len(runs)} runs, more than the limit of {MAX_RUNS} per study file; split the "
            "study into several files (for example one per formulation or per week)",
            source=where)

    plans = [_plan_run(k + 1, raw, defaults, settings, path, where)
             for k, raw in enumerate(runs)]
    seen: dict[str, int] = {}
    for k, plan in enumerate(plans, start=1):
        name = plan.info.run_id
        if name in seen:
            raise CrystkinInputError(
                f"run name '{name}' is used by run #{seen[name]} and run #{k}; names must be "
                "unique: set name = \"...\" in one of them", source=where)
        seen[name] = k
    unknown = [h for h in analysis.get("hold_out", ()) if h not in seen]
    if unknown:
        near = difflib.get_close_matches(unknown[0], list(seen), n=1)
        hint = f" (did you mean '{near[0]}'?)" if near else ""
        raise CrystkinInputError(
            f"[analysis] hold_out names run '{unknown[0]}', which is not in the study{hint}; "
            "use the run names of the [[run]] blocks", source=where)
    ref = analysis.get("reference")
    groups = {plan.info.group for plan in plans}
    if ref is not None and ref not in groups:
        near = difflib.get_close_matches(str(ref), sorted(groups), n=1)
        hint = f" (did you mean '{near[0]}'?)" if near else ""
        raise CrystkinInputError(
            f"[analysis] reference '{ref}' is not a group of this study{hint}; groups: "
            f"{', '.join(sorted(groups))}", source=where)

    traces: list[Trace] = []
    failures: list[tuple[str, str]] = []
    for plan in plans:
        try:
            traces.append(read_trace(plan.file, info=plan.info, **plan.options))
        except CrystkinInputError as exc:
            failures.append((plan.info.run_id, str(exc)))
    if not traces:
        first = failures[0]
        raise CrystkinInputError(
            f"none of the {len(plans)} runs could be read; first problem (run '{first[0]}'): "
            f"{first[1]}", source=where)
    return Study(name=settings["name"], traces=tuple(traces), source=where, settings=settings,
                 failures=tuple(failures))


def _load_toml(path: Path, where: str) -> dict:
    if not path.is_file():
        raise CrystkinInputError(
            "study file not found" if not path.exists() else "is not a file",
            source=where)
    try:
        size = path.stat().st_size
        if size > MAX_STUDY_BYTES:
            raise CrystkinInputError(
                f"the study file is {size / 2**20:.0f} MB, more than the limit of "
                f"{MAX_STUDY_BYTES // 2**20} MB; a study file lists runs and names their data "
                "files, it does not hold the data: split it or check that this is the study "
                "file", source=where)
        data = path.read_bytes()
    except OSError as exc:
        raise CrystkinInputError(f"cannot read the study file ({exc.strerror or exc})",
                                 source=where) from exc
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise CrystkinInputError(
            "the study file is not UTF-8 text; save it as UTF-8", source=where) from exc
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = _TOML_POSITION.search(msg)
        if m:
            msg = _TOML_POSITION.sub("", msg)
            raise CrystkinInputError(
                f"line {m.group(1)}, column {m.group(2)}: TOML syntax error: {msg}; fix that "
                "line (quantities are quoted strings such as \"125 degC\")",
                source=where) from exc
        raise CrystkinInputError(f"TOML syntax error: {msg}", source=where) from exc


ANALYSIS_KEYS = ("reference", "run_to_run_cv", "tm0_sd_K", "kissinger", "rate_model",
                 "hold_out")


def _check_analysis(analysis: dict, where: str) -> None:
    for key, value in analysis.items():
        if key not in ANALYSIS_KEYS and str(key).lower() not in _OUTPUT_WORDS:
            near = difflib.get_close_matches(str(key), ANALYSIS_KEYS, n=1)
            hint = f" (did you mean '{near[0]}'?)" if near else ""
            raise CrystkinInputError(
                f"[analysis] key '{key}' is unknown{hint}; allowed: {', '.join(ANALYSIS_KEYS)}",
                source=where)
        if key == "hold_out" and not (isinstance(value, list)
                                      and all(isinstance(v, str) for v in value)):
            raise CrystkinInputError(
                f"[analysis] key 'hold_out' must be a list of run names, such as "
                f'["PX-40_cool20"], got {value!r}', source=where)
        if key == "rate_model" and not isinstance(value, bool):
            raise CrystkinInputError(
                f"[analysis] key 'rate_model' must be true or false, got {value!r}", source=where)
        if str(key).lower() in _OUTPUT_WORDS:
            raise CrystkinInputError(
                f"[analysis] key '{key}': the study file never says where outputs go; remove "
                "it and give the output folder on the command line (--out)", source=where)
        bad = None
        if key == "reference" and not isinstance(value, str):
            bad = "a group name in quotes"
        elif key == "kissinger" and not isinstance(value, bool):
            bad = "true or false"
        elif key in ("run_to_run_cv", "tm0_sd_K"):
            ok = (isinstance(value, (int, float)) and not isinstance(value, bool)
                  and math.isfinite(value) and value >= 0)
            if key == "run_to_run_cv" and ok and value > 1:
                ok = False
            if not ok:
                bad = ("a fraction from 0 to 1, such as 0.08 for 8 %" if key == "run_to_run_cv"
                       else "a number of kelvin, 0 or more, without quotes (the key names the "
                            "unit)")
        if bad:
            raise CrystkinInputError(
                f"[analysis] key '{key}' must be {bad}, got {value!r}", source=where)


def _check_keys(table: dict, allowed, what: str, where: str) -> None:
    unknown = [k for k in table if k not in allowed]
    if not unknown:
        return
    k = unknown[0]
    close = difflib.get_close_matches(str(k), allowed, n=1)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    raise CrystkinInputError(
        f"unknown key '{k}' in {what}{hint}; allowed keys: {', '.join(allowed)}",
        source=where)


def _study_settings(study, path: Path, where: str) -> dict:
    if not isinstance(study, dict):
        raise CrystkinInputError("[study] must be a table", source=where)
    _check_keys(study, STUDY_KEYS, "[study]", where)
    settings: dict = {}
    name = study.get("name", path.stem)
    if (not isinstance(name, str) or not name.strip() or len(name) > 200
            or name.startswith(".") or re.search(r"[/\\\x00-\x1f\x7f]", name)):
        raise CrystkinInputError(
            f"study name {name!r} must be text of 1 to 200 characters without '/', '\\' or "
            "control characters, not starting with '.'", source=where)
    settings["name"] = name
    for key in ("polymer", "description"):
        if key in study:
            settings[key] = _text(study[key], key, "[study]", where)
    for key, dim in _STUDY_QUANTITIES.items():
        if key in study:
            value = parse_quantity(study[key], dimension=dim,
                                   where=f"{where}, [study] key '{key}'")
            _positive(value, key, f"{where}, [study]")
            settings[key] = value
    return settings


def _text(value, key: str, what: str, where: str) -> str:
    if not isinstance(value, str):
        raise CrystkinInputError(
            f"key '{key}' in {what} must be text in quotes, got {value!r}", source=where)
    return value


def _positive(value: float, key: str, where: str) -> None:
    if not (value > 0 and math.isfinite(value)):
        raise CrystkinInputError(
            f"key '{key}' must be positive and finite, got {value:g} in SI units (K, K/s, kg, "
            "J/kg)",
            source=where)


def _plan_run(k: int, raw: dict, defaults: dict, settings: dict, study_path: Path,
              where: str) -> _RunPlan:
    label = f"run #{k}" + (f" ('{raw['name']}')" if isinstance(raw.get("name"), str) else "")
    _check_keys(raw, RUN_KEYS, label, where)
    entry = {**defaults, **raw}
    for key in ("columns", "units"):
        if key in defaults or key in raw:
            merged = {}
            for source in (defaults.get(key, {}), raw.get(key, {})):
                if not isinstance(source, dict):
                    raise CrystkinInputError(
                        f"{label}: '{key}' must be an inline table such as "
                        f'{key} = {{ time = "..." }}', source=where)
                merged.update(source)
            entry[key] = merged

    if "file" not in entry:
        raise CrystkinInputError(f"{label} has no 'file'; add file = \"raw/....csv\"",
                                 source=where)
    file_text = _text(entry["file"], "file", label, where)
    if not file_text.strip():
        raise CrystkinInputError(f"{label}: 'file' is empty", source=where)
    file = Path(file_text)
    if not file.is_absolute():
        file = study_path.parent / file

    if "name" in entry:
        name = check_safe_name(_text(entry["name"], "name", label, where), what="run name",
                               where=f"{where}, {label}")
    else:
        stem = Path(file_text).stem
        try:
            name = check_safe_name(stem, what="run name", where=f"{where}, {label}")
        except CrystkinInputError as exc:
            raise CrystkinInputError(
                f"{label}: the file name '{stem}' cannot serve as the run name; add "
                'name = "..." (letters, digits, -, _ and . only)', source=where) from exc
    here = f"{where}, run '{name}'"

    if "kind" not in entry:
        raise CrystkinInputError(
            "no 'kind'; add kind = \"isothermal\", \"cooling\" or \"heating\"", source=here)
    kind = entry["kind"]
    if kind not in RUN_KINDS:
        raise CrystkinInputError(
            f"kind must be one of {', '.join(RUN_KINDS)}, got {kind!r}", source=here)
    values: dict = {}
    for key, dim in _RUN_QUANTITIES.items():
        if key in entry:
            value = parse_quantity(entry[key], dimension=dim, where=f"{here}, key '{key}'")
            _positive(value, key, here)
            values[key] = value
    if kind == "isothermal" and "temperature" not in values:
        raise CrystkinInputError(
            'an isothermal run needs its hold temperature: add temperature = "125 degC"',
            source=here)
    if kind in ("cooling", "heating") and "rate" not in values:
        raise CrystkinInputError(
            f'a {kind} run needs its rate: add rate = "10 K/min" (a positive magnitude)',
            source=here)

    group = check_safe_name(_text(entry.get("group", "default"), "group", label, where),
                            what="group name", where=here)
    exotherm = entry.get("exotherm")
    if exotherm not in (None, "up", "down"):
        raise CrystkinInputError(f"exotherm must be \"up\" or \"down\", got {exotherm!r}",
                                 source=here)
    options: dict = {}
    if "sheet" in entry:
        sheet = entry["sheet"]
        if isinstance(sheet, bool) or not isinstance(sheet, (str, int)):
            raise CrystkinInputError(
                f"sheet must be a sheet name or a 0-based number, got {sheet!r}", source=here)
        options["sheet"] = sheet
    if "decimal" in entry:
        if entry["decimal"] not in (".", ","):
            raise CrystkinInputError(
                f"decimal must be \".\" or \",\", got {entry['decimal']!r}", source=here)
        options["decimal"] = entry["decimal"]
    if "columns" in entry:
        options["columns"] = _check_columns(entry["columns"], here)
    if "units" in entry:
        options["units"] = _check_units(entry["units"], here)
    extra = {"study": where}
    if "notes" in entry:
        extra["notes"] = _text(entry["notes"], "notes", label, where)

    info = RunInfo(
        run_id=name, kind=kind, temperature=values.get("temperature"),
        rate=values.get("rate"), mass=values.get("mass"), group=group, exotherm=exotherm,
        source=str(file), hold_temperature=values.get("hold_temperature"),
        delta_h100=settings.get("delta_h100"), polymer=settings.get("polymer"), extra=extra)
    return _RunPlan(info=info, file=file, options=options)


def _check_columns(columns: dict, here: str) -> dict:
    for role, value in columns.items():
        if role not in ROLES:
            raise CrystkinInputError(
                f"unknown role '{role}' in columns; allowed: {', '.join(ROLES)}", source=here)
        if isinstance(value, bool) or not isinstance(value, (str, int)):
            raise CrystkinInputError(
                f"columns.{role} must be a column name in quotes or a 1-based column number, "
                f"got {value!r}", source=here)
    return dict(columns)


def _check_units(units: dict, here: str) -> dict:
    for role, value in units.items():
        if role not in ROLES:
            raise CrystkinInputError(
                f"unknown role '{role}' in units; allowed: {', '.join(ROLES)}", source=here)
        if not isinstance(value, str):
            raise CrystkinInputError(
                f"units.{role} must be a unit in quotes, such as \"min\", got {value!r}",
                source=here)
        unit = parse_unit(value, where=f"{here}, units.{role}") if value else None
        if unit is None or unit.dimension not in _UNIT_DIMENSIONS[role]:
            raise CrystkinInputError(
                f"units.{role} = \"{value}\" is not a {role.replace('_', ' ')} unit",
                source=here)
    return dict(units)
