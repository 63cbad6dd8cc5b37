"""Posterior summaries: median and central 68 % and 95 % intervals."""

from __future__ import annotations

import numpy as np

__all__ = ["summarise", "interval_columns", "QUANTILES"]

QUANTILES = {"lo95": 0.025, "lo68": 0.16, "median": 0.5, "hi68": 0.84, "hi95": 0.975}


def summarise(draws) -> dict[str, float]:
    """Median, central 68 % and 95 % intervals, mean and SD of a set of draws.

    Non-finite draws are ignored; an all-NaN input gives NaNs.
    """
    d = np.asarray(draws, dtype=float).ravel()
    d = d[np.isfinite(d)]
    if d.size == 0:
        return {k: float("nan") for k in (*QUANTILES, "mean", "sd")}
    q = np.quantile(d, list(QUANTILES.values()))
    out = dict(zip(QUANTILES, map(float, q), strict=True))
    out["mean"] = float(d.mean())
    out["sd"] = float(d.std(ddof=1)) if d.size > 1 else 0.0
    return out


def interval_columns(name: str, draws) -> dict[str, float]:
    """Columns ``name``, ``name_lo95``, ``name_hi95`` (median and 95 % interval)."""
    s = summarise(draws)
    return {name: s["median"], f"{name}_lo95": s["lo95"], f"{name}_hi95": s["hi95"]}
