"""Simulation export: a fitted rate model K(T) as a JSON file and a K(T) table.

The format is crystkin's own, documented field by field in
``docs/simulation_export.md``:

* JSON, schema ``"crystkin-rate-model"``, version 1: the model equation in
  words and symbols, every parameter with its unit, median and 95 % interval,
  a thinned set of posterior draws (so that any prediction can carry its
  uncertainty), the temperature and cooling-rate range of the data it was
  fitted to, the glass transition below which conversion is frozen, the study,
  the crystkin version and seed, and the process caution.
* CSV: K(T) and the isothermal half-time, median and 95 % band, on a
  temperature grid (T in K and degC, K in 1/s), with a flag for temperatures
  inside the fitted range; ``#`` lines at the top carry the schema, study and
  caution.

:func:`read_simulation_model` reads the JSON back into the
:class:`~kinetics.analyses.predict.SimulationModel` that
:func:`~kinetics.analyses.predict.predict_profile` uses, so a prediction from
the file gives the same numbers as one from the fit.
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import secrets
from pathlib import Path

import numpy as np
from scipy.constants import R

from ..analyses.predict import (
    PARAMETER_DESCRIPTIONS,
    PARAMETER_NAMES,
    PARAMETER_UNITS,
    SimulationModel,
)
from ..cautions import PROCESS_CAUTION
from ..errors import CrystkinInputError
from ..io.writers import json_text
from ..units import celsius

__all__ = ["SCHEMA_NAME", "SCHEMA_VERSION", "SUPPORTED_VERSIONS", "model_document",
           "rate_table", "default_temperature_grid", "write_simulation_model",
           "read_simulation_model"]

SCHEMA_NAME = "crystkin-rate-model"
SCHEMA_VERSION = 1
SUPPORTED_VERSIONS = (1,)

_EQUATIONS = {
    "conversion": "X(t) = 1 - exp(-theta(t)^n)",
    "time_integral": "theta(t) = integral from t_start to t of K(T(s)) ds",
    "rate_constant": "K(T) = (ln 2)^(1/n) / t_half(T)",
    "half_time": "1/t_half(T) = exp(ln_rate0) * exp(-U_star / (R * (T - T_inf))) "
                 "* exp(-Kg / (T * (Tm0 - T) * f))",
    "f": "f = 2 * T / (Tm0 + T)",
    "differential_form": "dX/dt = n * K(T) * (1 - X) * (-ln(1 - X))^((n - 1)/n)",
    "isothermal_limit": "at constant T: X = 1 - exp(-k t^n) with k = K^n (Avrami)",
}
_IN_WORDS = (
    "Relative crystallinity X (0 to 1) grows as one minus the exponential of minus the n-th "
    "power of the time integral of the rate constant K along the temperature history "
    "(Nakamura). K at each temperature is (ln 2)^(1/n) divided by the isothermal "
    "crystallization half-time there, and the inverse half-time follows the Hoffman-Lauritzen "
    "form: a prefactor, times a transport term that vanishes as T approaches T_inf, times a "
    "nucleation term that vanishes as T approaches the equilibrium melting temperature Tm0.")
_SYMBOLS = {
    "X": "relative crystallinity, 0-1", "t": "time, s", "T": "temperature, K",
    "theta": "time integral of K, dimensionless", "K": "Nakamura rate constant, 1/s",
    "t_half": "isothermal crystallization half-time, s", "n": "Nakamura (Avrami) exponent, 1",
    "ln_rate0": "ln of (1/t_half)_0 with (1/t_half)_0 in 1/s",
    "U_star": "activation energy of segmental transport, J/mol",
    "T_inf": "temperature at which segmental transport stops, K",
    "Kg": "nucleation constant, K^2", "Tm0": "equilibrium melting temperature, K",
    "R": "molar gas constant, J/(mol K)", "f": "correction factor, 1",
}
_CONDITIONS = (
    "K = 0 for T >= Tm0 (melt) and for T <= T_inf",
    "K = 0 below the glass transition temperature Tg (glass_transition.Tg_K): conversion is "
    "frozen there",
    "X = 0 at the first point of a temperature history (the part starts molten and amorphous)",
    "use the posterior draws, not the medians, to carry the uncertainty into a prediction",
)


def _number_pair(v):
    return [float(v[0]), float(v[1])]


def model_document(model: SimulationModel) -> dict:
    """The JSON document of a model (schema ``crystkin-rate-model`` version 1)."""
    v = model.validity
    T_lo, T_hi = _number_pair(v["temperature_K"])
    r_lo, r_hi = _number_pair(v["cooling_rate_K_per_s"])
    params = {}
    for name in PARAMETER_NAMES:
        p = dict(model.parameters.get(name, {}))
        col = model[name]
        params[name] = {
            "unit": PARAMETER_UNITS[name], "description": PARAMETER_DESCRIPTIONS[name],
            "status": p.get("status", "estimated"), "prior": p.get("prior", ""),
            "median": p.get("median", float(np.median(col))),
            "lo95": p.get("lo95", float(np.quantile(col, 0.025))),
            "hi95": p.get("hi95", float(np.quantile(col, 0.975))),
        }
        for k in ("source",):
            if k in p:
                params[name][k] = p[k]
    return {
        "schema": SCHEMA_NAME, "schema_version": SCHEMA_VERSION,
        "documentation": "docs/simulation_export.md in the crystkin source",
        "study": model.study_name,
        "software": {"name": "crystkin", "version": model.crystkin_version},
        "seed": model.seed,
        "caution": PROCESS_CAUTION,
        "model": {"name": "Nakamura kinetics with a Hoffman-Lauritzen half-time law",
                  "in_words": _IN_WORDS, "equations": dict(_EQUATIONS),
                  "symbols": dict(_SYMBOLS), "gas_constant_J_per_mol_K": float(R),
                  "conditions": list(_CONDITIONS),
                  "references": [
                      "Nakamura, Watanabe, Katayama, Amano, J. Appl. Polym. Sci. 16 (1972) 1077",
                      "Patel & Spruiell, Polym. Eng. Sci. 31 (1991) 730",
                      "Hoffman & Miller, Polymer 38 (1997) 3151"]},
        "parameters": params,
        "glass_transition": {"Tg_K": float(model.glass_transition_K),
                             "Tg_degC": float(celsius(model.glass_transition_K)),
                             "source": model.provenance.get("glass_transition_source", "")},
        "posterior_draws": {"columns": list(PARAMETER_NAMES),
                            "units": [PARAMETER_UNITS[n] for n in PARAMETER_NAMES],
                            "n_draws": model.n_draws,
                            "note": "equally weighted draws of the joint posterior, thinned "
                                    "evenly; fixed constants repeat their value",
                            "values": model.draws.tolist()},
        "validity": {
            "temperature_K": [T_lo, T_hi],
            "temperature_degC": [float(celsius(T_lo)), float(celsius(T_hi))],
            "cooling_rate_K_per_s": [r_lo, r_hi],
            "cooling_rate_K_per_min": [60.0 * r_lo, 60.0 * r_hi],
            "isothermal_temperatures_K": [float(x) for x in
                                          v.get("isothermal_temperatures_K", ())],
            "cooling_rates_K_per_s": [float(x) for x in v.get("cooling_rates_K_per_s", ())],
            "cooling_rates_K_per_min": [60.0 * float(x) for x in
                                        v.get("cooling_rates_K_per_s", ())],
            "note": "temperatures at which the fitted runs crystallized (isothermal hold "
                    "temperatures; 1-99 % conversion of the cooling runs) and the range of "
                    "cooling rates fitted (0 for isothermal holds); outside it the model "
                    "extrapolates",
        },
        "fit": model.provenance.get("fit", {}),
    }


def default_temperature_grid(model: SimulationModel, *, step: float = 1.0) -> np.ndarray:
    """Whole kelvins from the glass transition up to 1 K below the median Tm0."""
    lo = math.ceil(float(model.glass_transition_K))
    hi = math.floor(float(np.median(model["Tm0"])) - 1.0)
    if hi <= lo:
        raise CrystkinInputError("the model's Tg is not below its Tm0; no temperature grid")
    return np.arange(lo, hi + 0.5 * step, step, dtype=float)


def rate_table(model: SimulationModel, temperature_grid=None):
    """K(T) table (see :meth:`SimulationModel.rate_constant_table`) on a grid, K."""
    grid = default_temperature_grid(model) if temperature_grid is None else \
        np.asarray(temperature_grid, dtype=float)
    if grid.ndim != 1 or len(grid) < 1 or not np.all(np.isfinite(grid)) or np.any(grid <= 0):
        raise CrystkinInputError(
            "The 'temperature_grid' parameter of write_simulation_model must be a 1-D array "
            "of temperatures in K.")
    return model.rate_constant_table(grid)


def _csv_text(model: SimulationModel, table) -> str:
    head = [f"# {SCHEMA_NAME} K(T) table, schema version {SCHEMA_VERSION}",
            f"# study: {model.study_name}",
            f"# crystkin {model.crystkin_version}; K in 1/s, t_half in s (isothermal "
            "half-time), median and 95 % band over the posterior draws",
            "# within_fitted_range: temperature inside the range where the fitted data "
            "crystallized",
            f"# {PROCESS_CAUTION}"]
    body = table.to_csv(index=False, float_format="%.8g", lineterminator="\n", na_rep="")
    return "\n".join(head) + "\n" + body


def _write_pair(items):
    """Write (path, text) pairs through temporary names, renaming only when all are written."""
    tmps = []
    try:
        for path, text in items:
            tmp = path.with_name(f".{path.name}.tmp-{secrets.token_hex(4)}")
            tmps.append(tmp)
            with open(tmp, "wb") as fh:
                fh.write(text.encode("utf-8"))
        for (path, _), tmp in zip(items, tmps, strict=True):
            os.replace(tmp, path)
    finally:
        for tmp in tmps:
            with contextlib.suppress(FileNotFoundError):
                tmp.unlink()


def write_simulation_model(result, path_json, path_csv, *, study_name: str | None = None,
                           temperature_grid=None) -> tuple[Path, Path]:
    """Write a fitted rate model as a JSON model file and a K(T) CSV table.

    Parameters
    ----------
    result : GlobalRateResult or SimulationModel
        A joint fit (its :meth:`simulation_model` is used) or a model.
    path_json, path_csv : str or Path
        Output files (``.json`` and ``.csv``); their folder must exist.
    study_name : str, optional
        Written into both files (default: the model's own).
    temperature_grid : array, K, optional
        Temperatures of the table; default every kelvin from Tg to Tm0 - 1 K.

    Returns
    -------
    (Path, Path)
        The JSON and CSV files, both written whole or not at all.
    """
    if hasattr(result, "simulation_model"):
        model = result.simulation_model(study_name=study_name or "")
    elif isinstance(result, SimulationModel):
        model = result
        if study_name is not None:
            from dataclasses import replace
            model = replace(model, study_name=study_name)
    else:
        raise CrystkinInputError(
            "write_simulation_model needs the result of fit_global_rate or a SimulationModel; "
            f"got {type(result).__name__}")
    pj, pc = Path(path_json), Path(path_csv)
    for p, suffix in ((pj, ".json"), (pc, ".csv")):
        if p.suffix.lower() != suffix:
            raise CrystkinInputError(f"output file {p} must end with {suffix}")
        if not p.parent.is_dir():
            raise CrystkinInputError(f"folder {p.parent} does not exist; create it first")
    if pj.resolve() == pc.resolve():
        raise CrystkinInputError("the JSON and CSV outputs must be different files")
    table = rate_table(model, temperature_grid)
    doc = model_document(model)
    doc["rate_table"] = {"file": pc.name, "rows": int(len(table)),
                         "temperature_K": [float(table["T_K"].min()),
                                           float(table["T_K"].max())]}
    _write_pair([(pj, json_text(doc)), (pc, _csv_text(model, table))])
    return pj, pc


# -- reading ----------------------------------------------------------------------------------

def _fail(msg: str, where: str):
    raise CrystkinInputError(msg, source=where)


def _finite(value, what: str, where: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or \
            not math.isfinite(float(value)):
        _fail(f"{what} must be a finite number, got {value!r}", where)
    return float(value)


def _pair(value, what: str, where: str) -> tuple[float, float]:
    if not isinstance(value, list) or len(value) != 2:
        _fail(f"{what} must be a list of two numbers [low, high], got {value!r}", where)
    lo, hi = (_finite(x, what, where) for x in value)
    if lo > hi:
        _fail(f"{what} has low {lo:g} above high {hi:g}", where)
    return lo, hi


def read_simulation_model(path) -> SimulationModel:
    """Read a rate-model JSON file written by :func:`write_simulation_model`.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    SimulationModel
        ``source`` is the file path.

    Raises
    ------
    CrystkinInputError
        File missing or not JSON (with line and column), another schema, a schema
        version this crystkin does not read, a missing parameter, or malformed draws
        or validity range.
    """
    path = Path(path)
    where = str(path)
    if not path.is_file():
        _fail("model file not found; give the .json file written by crystkin export", where)
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        _fail("not a text (UTF-8) file; give the .json model file written by crystkin export",
              where)
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise CrystkinInputError(
            f"not valid JSON at line {exc.lineno}, column {exc.colno} ({exc.msg}); the file is "
            "damaged or not a crystkin model file: export it again", source=where) from None
    if not isinstance(doc, dict):
        _fail("the JSON document must be an object with a 'schema' field", where)
    schema = doc.get("schema")
    if schema != SCHEMA_NAME:
        _fail(f"not a crystkin rate-model file: 'schema' is {schema!r}, expected "
              f"'{SCHEMA_NAME}'", where)
    version = doc.get("schema_version")
    if isinstance(version, bool) or not isinstance(version, int) or \
            version not in SUPPORTED_VERSIONS:
        from importlib.metadata import PackageNotFoundError
        from importlib.metadata import version as pkg_version
        try:
            mine = pkg_version("crystkin")
        except PackageNotFoundError:  # pragma: no cover
            mine = "unknown"
        _fail(f"schema version {version!r} cannot be read by this crystkin ({mine}), which reads "
              f"{SCHEMA_NAME} version {', '.join(map(str, SUPPORTED_VERSIONS))}; export the model "
              "again with this crystkin, or use the crystkin version that wrote it "
              f"({(doc.get('software') or {}).get('version', 'unknown')})", where)

    params = doc.get("parameters")
    if not isinstance(params, dict):
        _fail("missing 'parameters' object", where)
    summary = {}
    for name in PARAMETER_NAMES:
        p = params.get(name)
        if not isinstance(p, dict):
            _fail(f"missing parameter '{name}' ({PARAMETER_DESCRIPTIONS[name]}, "
                  f"{PARAMETER_UNITS[name]}) in 'parameters'; every one of "
                  f"{', '.join(PARAMETER_NAMES)} is needed", where)
        unit = p.get("unit")
        if unit != PARAMETER_UNITS[name]:
            _fail(f"parameter '{name}' has unit {unit!r}; this schema version uses "
                  f"'{PARAMETER_UNITS[name]}'", where)
        entry = {k: _finite(p.get(k), f"parameters.{name}.{k}", where)
                 for k in ("median", "lo95", "hi95")}
        entry.update({"unit": unit, "status": str(p.get("status", "")),
                      "prior": str(p.get("prior", "")),
                      "description": str(p.get("description", ""))})
        summary[name] = entry

    pd_ = doc.get("posterior_draws")
    if not isinstance(pd_, dict):
        _fail("missing 'posterior_draws' object (the draws carry the model's uncertainty)",
              where)
    cols = pd_.get("columns")
    if not isinstance(cols, list) or any(not isinstance(c, str) for c in cols):
        _fail("posterior_draws.columns must be a list of parameter names", where)
    missing = [n for n in PARAMETER_NAMES if n not in cols]
    if missing:
        _fail(f"posterior_draws lacks the column(s) {', '.join(missing)}", where)
    values = pd_.get("values")
    if not isinstance(values, list) or not values:
        _fail("posterior_draws.values must be a non-empty list of rows", where)
    for i, row in enumerate(values):
        if not isinstance(row, list) or len(row) != len(cols):
            _fail(f"posterior_draws.values row {i + 1} must be a list of {len(cols)} numbers",
                  where)
        for x in row:
            _finite(x, f"posterior_draws.values row {i + 1}", where)
    arr = np.asarray(values, dtype=float)
    draws = arr[:, [cols.index(n) for n in PARAMETER_NAMES]]

    gt = doc.get("glass_transition")
    if not isinstance(gt, dict):
        _fail("missing 'glass_transition' object with Tg_K", where)
    Tg = _finite(gt.get("Tg_K"), "glass_transition.Tg_K", where)

    val = doc.get("validity")
    if not isinstance(val, dict):
        _fail("missing 'validity' object", where)
    validity = {
        "temperature_K": _pair(val.get("temperature_K"), "validity.temperature_K", where),
        "cooling_rate_K_per_s": _pair(val.get("cooling_rate_K_per_s"),
                                      "validity.cooling_rate_K_per_s", where),
        "isothermal_temperatures_K": tuple(
            _finite(x, "validity.isothermal_temperatures_K", where)
            for x in val.get("isothermal_temperatures_K", [])),
        "cooling_rates_K_per_s": tuple(
            _finite(x, "validity.cooling_rates_K_per_s", where)
            for x in val.get("cooling_rates_K_per_s", [])),
    }
    seed = doc.get("seed")
    return SimulationModel(
        draws=draws, parameters=summary, validity=validity, glass_transition_K=Tg,
        study_name=str(doc.get("study", "")),
        crystkin_version=str((doc.get("software") or {}).get("version", "")),
        seed=seed if isinstance(seed, int) and not isinstance(seed, bool) else None,
        caution=PROCESS_CAUTION,
        provenance={"fit": doc.get("fit", {}),
                    "glass_transition_source": str(gt.get("source", "")),
                    "schema_version": version},
        source=where)
