"""One function per figure, shared by the report and the notebooks.

Every function takes result objects, returns a matplotlib ``Figure`` and never
recomputes an analysis.
"""

from __future__ import annotations

import numpy as np

from ..models.avrami import avrami_conversion, avrami_k_from_half_time
from ..units import celsius
from .style import BAND_ALPHA, cycle, new_figure

__all__ = ["raw_signal_figure", "isotherm_conversion_figure", "avrami_plot_figure",
           "half_time_figure", "posterior_pairs_figure"]


def raw_signal_figure(fit):
    """Raw (exotherm-positive) heat flow of one run with its baseline and event window."""
    trace, conv = fit.trace, fit.conversion
    sign = 1.0 if conv.exotherm == "up" else -1.0
    fig, ax = new_figure(6, 3.2)
    ax = ax[0, 0]
    scale, unit = (1e3, "mW") if not trace.specific else (1e-3, "W/g")
    ax.plot(trace.time / 60, sign * trace.heat_flow * scale, color="#555555", lw=0.8,
            label="signal (exotherm up)")
    ax.plot(conv.time / 60, conv.baseline_values * scale, color="#D55E00", ls="--", lw=1.2,
            label=f"baseline ({conv.baseline.get('method', '?')})")
    for x in conv.window:
        ax.axvline(x / 60, color="#0072B2", ls=":", lw=1)
    ax.axvline(conv.transient_end / 60, color="#009E73", ls="-.", lw=1, label="transient end")
    ax.set_xlabel("time / min")
    ax.set_ylabel(f"heat flow / {unit}")
    ax.set_title(f"{trace.run_id}: signal, baseline and event window (dotted)")
    ax.legend(loc="best")
    return fig


def _band(fit, t_grid, n_curves=300, seed=0):
    n = fit.derived["n"]
    th = fit.derived["t_half_s"]
    t0 = fit.derived["induction_time_s"] + fit.conversion.hold_start
    rng = np.random.default_rng(seed)
    idx = rng.choice(len(n), size=min(n_curves, len(n)), replace=False)
    k = avrami_k_from_half_time(n[idx, None], th[idx, None])
    X = avrami_conversion(t_grid[None, :], n[idx, None], k, t0[idx, None])
    return np.quantile(X, [0.025, 0.5, 0.975], axis=0)


def isotherm_conversion_figure(fits, *, title="Relative crystallinity of isothermal holds"):
    """X(t) of each run (points) with the posterior median curve and 95 % band."""
    fig, ax = new_figure(6.5, 4)
    ax = ax[0, 0]
    for fit, (col, mk, ls) in zip(fits, cycle(), strict=False):
        conv = fit.conversion
        t = conv.time - conv.hold_start
        step = max(1, len(t) // 60)
        ax.plot(t[::step] / 60, conv.conversion[::step], mk, ms=3, color=col, mfc="none",
                label=f"{fit.run_id} ({celsius(fit.trace.info.temperature):.0f} °C)")
        grid = np.linspace(conv.time[0], conv.time[-1], 300)
        lo, mid, hi = _band(fit, grid)
        ax.plot((grid - conv.hold_start) / 60, mid, ls=ls, color=col, lw=1.2)
        ax.fill_between((grid - conv.hold_start) / 60, lo, hi, color=col, alpha=BAND_ALPHA, lw=0)
    ax.set_xlabel("time since hold start / min")
    ax.set_ylabel("relative crystallinity X")
    ax.set_ylim(-0.02, 1.02)
    ax.set_title(title + " (lines: posterior median, bands: 95 %)")
    ax.legend(loc="lower right", ncols=2)
    return fig


def avrami_plot_figure(fits):
    """Double-logarithmic Avrami plot with the linearised-fit window marked."""
    fig, ax = new_figure(6.5, 4)
    ax = ax[0, 0]
    for fit, (col, mk, ls) in zip(fits, cycle(), strict=False):
        conv = fit.conversion
        lin = fit.linearised
        t0 = lin["t0"] if lin else conv.window[0]
        X = conv.conversion
        ok = (X > 0.005) & (X < 0.995) & (conv.time > t0)
        x = np.log10(conv.time[ok] - t0)
        y = np.log10(-np.log(1 - X[ok]))
        step = max(1, len(x) // 80)
        ax.plot(x[::step], y[::step], mk, ms=3, mfc="none", color=col, label=fit.run_id)
        if lin:
            lo, hi = lin["x_range"]
            sel = ok & (X >= lo) & (X <= hi)
            if sel.any():
                xs = np.log(conv.time[sel] - t0)
                ax.plot(xs / np.log(10), (lin["ln_k"] + lin["n"] * xs) / np.log(10), ls=ls,
                        color=col, lw=2)
    ax.set_xlabel("log10[(t - t0) / s]")
    ax.set_ylabel("log10[-ln(1 - X)]")
    ax.set_title("Avrami plot; thick lines: linearised fit over its conversion window")
    ax.legend(loc="best", ncols=2)
    return fig


def half_time_figure(table):
    """Half-time against crystallization temperature per group, with 95 % intervals."""
    fig, ax = new_figure(5.5, 3.8)
    ax = ax[0, 0]
    for (group, sub), (col, mk, ls) in zip(table.groupby("group", sort=False), cycle(),
                                           strict=False):
        sub = sub.sort_values("T_c_K")
        y = sub["t_half_s"].to_numpy()
        err = np.vstack([y - sub["t_half_s_lo95"].to_numpy(), sub["t_half_s_hi95"].to_numpy() - y])
        ax.errorbar(sub["T_c_degC"], y, yerr=err, fmt=mk, ls=ls, color=col, capsize=3,
                    label=str(group), mfc="none")
    ax.set_yscale("log")
    ax.set_xlabel("crystallization temperature / °C")
    ax.set_ylabel("half-time / s")
    ax.set_title("Avrami half-time (median, 95 % interval)")
    ax.legend(loc="best")
    return fig


def posterior_pairs_figure(fit, names=("n", "t_half", "t0")):
    """Pair plot of a run's posterior draws (our own few-line corner plot)."""
    post = fit.posterior
    names = [n for n in names if n in post.names]
    k = len(names)
    fig, axes = new_figure(1.9 * k + 1, 1.9 * k + 0.6, ncols=k, nrows=k)
    for i, a in enumerate(names):
        for j, b in enumerate(names):
            ax = axes[i, j]
            if j > i:
                ax.set_visible(False)
                continue
            if i == j:
                ax.hist(post[a], bins=40, color="#0072B2", alpha=0.8)
            else:
                ax.plot(post[b], post[a], ",", color="#0072B2", alpha=0.3)
            if i == k - 1:
                ax.set_xlabel(b)
            if j == 0 and i > 0:
                ax.set_ylabel(a)
    fig.suptitle(f"{fit.run_id}: posterior draws")
    return fig
