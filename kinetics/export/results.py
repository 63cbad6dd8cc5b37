"""Result tables and posterior draws written to an output folder.

Layout (all names ours)::

    tables/<name>.csv and .md      tidy tables, units in column names
    draws/<analysis>.npz           posterior draws, one array per run and quantity
    provenance.json                version, seed, options and every processing choice
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from ..io.writers import check_safe_name, safe_child, write_table
from ..units import celsius

__all__ = ["write_tables", "write_draws", "preparation_table", "posterior_table"]


def write_tables(out: Path, tables: dict[str, pd.DataFrame]) -> list[Path]:
    """Write each non-empty table as CSV and Markdown under ``out/tables``."""
    folder = Path(out) / "tables"
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for name, df in tables.items():
        if df is None or len(df) == 0:
            continue
        written += list(write_table(df, folder / check_safe_name(name)))
    return written


def write_draws(out: Path, name: str, draws: dict[str, dict[str, np.ndarray]]) -> Path:
    """Save per-run draws as ``draws/<name>.npz`` with keys ``<run_id>/<quantity>``."""
    folder = Path(out) / "draws"
    folder.mkdir(parents=True, exist_ok=True)
    flat = {f"{run}/{q}": np.asarray(v) for run, d in draws.items() for q, v in d.items()}
    path = safe_child(folder, f"{name}.npz")
    with open(path, "wb") as fh:
        np.savez_compressed(fh, **flat)
    return path


def preparation_table(conversions, traces) -> pd.DataFrame:
    """One row per run: how its signal was prepared (window, baseline, warnings)."""
    info = {t.run_id: t.info for t in traces}
    rows = []
    for c in conversions:
        ri = info.get(c.run_id)
        rows.append({
            "run_id": c.run_id, "group": ri.group if ri else "", "kind": c.kind,
            "T_set_degC": celsius(ri.temperature) if ri and ri.temperature else np.nan,
            "rate_K_per_min": ri.rate * 60 if ri and ri.rate else np.nan,
            "exotherm": c.exotherm, "hold_start_s": c.hold_start,
            "transient_end_s": c.transient_end, "window_start_s": c.window[0],
            "window_end_s": c.window[1], "induction_time_s": c.induction_time,
            "baseline": c.baseline.get("method", ""),
            "enthalpy_J_per_g": c.enthalpy / 1e3 if c.specific_enthalpy else np.nan,
            "enthalpy_J": np.nan if c.specific_enthalpy else c.enthalpy,
            "source": ri.source if ri else "", "warnings": "; ".join(c.warnings)})
    return pd.DataFrame(rows)


def posterior_table(fits) -> pd.DataFrame:
    """Every parameter of every run's posterior (nuisance terms included), with diagnostics."""
    frames = []
    for f in fits:
        if f.posterior is None:
            continue
        s = f.posterior.summary()
        d = f.posterior.diagnostics
        s.insert(0, "run_id", f.run_id)
        s["tau_steps"] = s["parameter"].map(d.tau)
        s["converged"] = d.converged
        frames.append(s)
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
