"""Figures of a formulation comparison (:class:`kinetics.analyses.compare.ComparisonResult`).

Each function reads the result's tables, returns a matplotlib ``Figure`` and
recomputes nothing.  Series are told apart by colour, marker and line style
(see :mod:`kinetics.report.style`), so the figures also read in grey-scale.
"""

from __future__ import annotations

import numpy as np

from ..errors import CrystkinInputError
from .style import BAND_ALPHA, cycle, new_figure

__all__ = ["half_time_ratio_figure", "cooling_shift_figure", "rate_curve_ratio_figure",
           "nucleation_efficiency_figure", "comparison_figures"]


def _table(result, name, what):
    tables = result.tables()
    if name not in tables:
        raise CrystkinInputError(f"this comparison has no {what} (table '{name}' missing); "
                                 f"it has {', '.join(sorted(tables)) or 'no tables'}")
    return tables[name]


def _errorbars(ax, x, sub, col, prefix, **style):
    y = sub[prefix].to_numpy(dtype=float)
    err = np.vstack([y - sub[f"{prefix}_lo95"].to_numpy(dtype=float),
                     sub[f"{prefix}_hi95"].to_numpy(dtype=float) - y])
    return ax.errorbar(x, y, yerr=err, color=col, capsize=3, **style)


def _plain_log_axis(axis, values):
    """Log axis labelled with plain numbers at a few round values inside the data range."""
    from matplotlib.ticker import FixedLocator, NullFormatter, NullLocator, StrMethodFormatter

    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return
    lo, hi = float(v.min()), float(v.max())
    cands = np.array([m * 10.0 ** e for e in range(-4, 5) for m in (1, 2, 3, 5)])
    ticks = cands[(cands >= lo / 1.5) & (cands <= hi * 1.5)]
    if ticks.size < 2:
        ticks = np.unique(np.round(np.geomspace(lo, hi, 3), 3))
    axis.set_major_locator(FixedLocator(ticks))
    axis.set_major_formatter(StrMethodFormatter("{x:g}"))
    axis.set_minor_locator(NullLocator())
    axis.set_minor_formatter(NullFormatter())


def _dodge(n_series, i, span):
    """Small horizontal offsets so that overlapping intervals stay readable."""
    if n_series <= 1:
        return 0.0
    return (i - (n_series - 1) / 2) * span / max(n_series - 1, 1)


def half_time_ratio_figure(result):
    """Half-time ratio formulation/reference against hold temperature, 95 % intervals.

    One series per formulation; the line at 1 is "same as the reference",
    below it the formulation is faster.  Log scale.
    """
    df = _table(result, "compare_half_time", "isothermal comparison")
    fig, ax = new_figure(6.0, 4.0)
    ax = ax[0, 0]
    groups = list(dict.fromkeys(df["group"]))
    span = 0.15 * max(float(np.ptp(df["T_c_degC"])), 2.0) / max(len(groups), 1)
    for i, (g, (col, mk, ls)) in enumerate(zip(groups, cycle(), strict=False)):
        sub = df[df["group"] == g].sort_values("T_c_K")
        x = sub["T_c_degC"].to_numpy(dtype=float) + _dodge(len(groups), i, span)
        _errorbars(ax, x, sub, col, "t_half_ratio", fmt=mk, ls=ls, mfc="none", label=str(g))
    ax.axhline(1.0, color="#555555", lw=1, ls="--")
    ax.set_yscale("log")
    _plain_log_axis(ax.yaxis, np.r_[df["t_half_ratio_lo95"], df["t_half_ratio_hi95"], 1.0])
    ax.set_xlabel("hold temperature / °C")
    ax.set_ylabel(f"half-time ratio to {result.reference}")
    ax.set_title(f"Half-time relative to {result.reference}\n"
                 "(median, 95 % interval; below 1 = faster)")
    ax.legend(loc="best")
    return fig


def cooling_shift_figure(result):
    """Shift of the cooling peak (filled) and onset (open) temperature against cooling rate.

    Positive shifts: the formulation crystallizes at a higher temperature than
    the reference, i.e. earlier on cooling.
    """
    df = _table(result, "compare_cooling", "cooling comparison")
    fig, ax = new_figure(6.0, 4.0)
    ax = ax[0, 0]
    groups = list(dict.fromkeys(df["group"]))
    for i, (g, (col, mk, ls)) in enumerate(zip(groups, cycle(), strict=False)):
        sub = df[df["group"] == g].sort_values("rate_K_per_s")
        x = sub["rate_K_per_min"].to_numpy(dtype=float) * 1.03 ** (i - (len(groups) - 1) / 2)
        _errorbars(ax, x, sub, col, "T_peak_shift_K", fmt=mk, ls=ls, label=f"{g}: peak")
        if sub["T_onset_shift_K"].notna().any():
            on = sub[sub["T_onset_shift_K"].notna()]
            xo = on["rate_K_per_min"].to_numpy(dtype=float) * 1.03 ** (
                i - (len(groups) - 1) / 2 + 0.5)
            _errorbars(ax, xo, on, col, "T_onset_shift_K", fmt=mk, ls="none", mfc="none",
                       label=f"{g}: onset")
    ax.axhline(0.0, color="#555555", lw=1, ls="--")
    ax.set_xscale("log")
    from matplotlib.ticker import FixedLocator, NullLocator, StrMethodFormatter

    ax.xaxis.set_major_locator(FixedLocator(sorted(set(df["rate_K_per_min"].round(6)))))
    ax.xaxis.set_major_formatter(StrMethodFormatter("{x:.3g}"))
    ax.xaxis.set_minor_locator(NullLocator())
    ax.set_xlabel("cooling rate / (K/min)")
    ax.set_ylabel(f"temperature shift from {result.reference} / K")
    ax.set_title(f"Cooling: crystallization temperature shift from {result.reference}\n"
                 "(filled: peak, open: onset; 95 % intervals; above 0 = earlier)")
    ax.legend(loc="best")
    return fig


def rate_curve_ratio_figure(result):
    """Rate-model ratio K_f(T)/K_ref(T) with 95 % bands; above 1 = faster."""
    df = _table(result, "compare_rate_curve", "rate-model comparison")
    fig, ax = new_figure(6.0, 4.0)
    ax = ax[0, 0]
    for g, (col, _mk, ls) in zip(dict.fromkeys(df["group"]), cycle(), strict=False):
        sub = df[df["group"] == g].sort_values("T_K")
        x = sub["T_degC"].to_numpy(dtype=float)
        ax.plot(x, sub["K_ratio"], color=col, ls=ls, lw=1.5, label=str(g))
        ax.fill_between(x, sub["K_ratio_lo95"], sub["K_ratio_hi95"], color=col,
                        alpha=BAND_ALPHA, lw=0)
    ax.axhline(1.0, color="#555555", lw=1, ls="--")
    ax.set_yscale("log")
    _plain_log_axis(ax.yaxis, np.r_[df["K_ratio_lo95"], df["K_ratio_hi95"], 1.0])
    ax.set_xlabel("temperature / °C")
    ax.set_ylabel(f"K(T) ratio to {result.reference}")
    ax.set_title(f"Rate model: K(T) relative to {result.reference}\n"
                 "(median, 95 % band; above 1 = faster)")
    ax.legend(loc="best")
    return fig


def nucleation_efficiency_figure(result):
    """Nucleation efficiency of each formulation with its 95 % interval (0-100 % scale)."""
    df = _table(result, "nucleation_efficiency", "nucleation efficiency")
    fig, ax = new_figure(5.5, max(2.4, 1.2 + 0.45 * len(df)))
    ax = ax[0, 0]
    y = np.arange(len(df))
    for j, ((_, row), (col, mk, _ls)) in enumerate(zip(df.iterrows(), cycle(), strict=False)):
        ax.errorbar([row["NE_percent"]], [y[j]],
                    xerr=[[row["NE_percent"] - row["NE_percent_lo95"]],
                          [row["NE_percent_hi95"] - row["NE_percent"]]],
                    fmt=mk, color=col, capsize=3)
    ax.set_yticks(y, [f"{g} ({r:.3g} K/min)" for g, r in zip(df["group"], df["rate_K_per_min"],
                                                             strict=True)])
    for v in (0.0, 100.0):
        ax.axvline(v, color="#555555", lw=1, ls="--")
    ax.set_xlabel("nucleation efficiency / %")
    ax.set_ylim(-0.7, len(df) - 0.3)
    ax.set_title("Nucleation efficiency (scale of Fillon et al. 1993)\n"
                 "0 % = neat, 100 % = self-nucleated; 95 % intervals")
    return fig


def comparison_figures(result) -> dict:
    """Every figure the result has data for, keyed by a short file-friendly name."""
    makers = {"compare_half_time": ("half_time_ratio", half_time_ratio_figure),
              "compare_cooling": ("cooling_shift", cooling_shift_figure),
              "compare_rate_curve": ("rate_curve_ratio", rate_curve_ratio_figure),
              "nucleation_efficiency": ("nucleation_efficiency", nucleation_efficiency_figure)}
    have = result.tables()
    return {name: make(result) for table, (name, make) in makers.items() if table in have}
