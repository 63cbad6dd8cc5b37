"""Figures of cooling runs (:class:`kinetics.analyses.nonisothermal.CoolingResult`).

One function per figure: relative crystallinity against temperature, the
Jeziorny, Ozawa and Mo plots, and the isoconversional activation energy
against conversion and against temperature.  Each takes result objects,
returns a matplotlib ``Figure`` and recomputes nothing: lines and bands are
drawn from the posterior draws the analysis kept.  Series differ in colour,
marker and line style (:mod:`kinetics.report.style`), so the figures also read
in grey-scale.
"""

from __future__ import annotations

import re

import numpy as np

from ..errors import CrystkinInputError
from ..units import celsius
from .style import BAND_ALPHA, cycle, new_figure

__all__ = ["cooling_conversion_figure", "jeziorny_figure", "ozawa_figure", "mo_figure",
           "energy_conversion_figure", "energy_temperature_figure", "cooling_figures",
           "figure_stem"]

_Q = (0.025, 0.5, 0.975)


def figure_stem(text) -> str:
    """A file-name-safe version of a group name."""
    s = re.sub(r"[^A-Za-z0-9_-]+", "-", str(text)).strip("-")
    return s or "group"


def _thin_rows(rows, max_lines):
    rows = list(rows)
    if len(rows) <= max_lines:
        return rows
    idx = np.unique(np.linspace(0, len(rows) - 1, max_lines).round().astype(int))
    return [rows[i] for i in idx]


def _line_band(intercept, slope, x):
    """Median and 95 % band of intercept + slope x over draws, shape (3, len(x))."""
    y = np.asarray(intercept)[:, None] + np.asarray(slope)[:, None] * np.asarray(x)[None, :]
    return np.quantile(y, _Q, axis=0)


def _log_ticks(axis, values):
    from matplotlib.ticker import FixedLocator, NullFormatter, NullLocator, StrMethodFormatter

    v = np.unique(np.round(np.asarray(values, dtype=float), 6))
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return
    axis.set_major_locator(FixedLocator(v))
    axis.set_major_formatter(StrMethodFormatter("{x:.3g}"))
    axis.set_minor_locator(NullLocator())
    axis.set_minor_formatter(NullFormatter())


def _rate_K_per_min(conv) -> float:
    return float(conv.baseline["beta_K_per_s"]) * 60.0


def cooling_conversion_figure(conversions, *, title="Relative crystallinity of cooling runs"):
    """Relative crystallinity X against sample temperature, one curve per cooling rate.

    Parameters
    ----------
    conversions : sequence of Conversion
        Prepared cooling runs (:func:`kinetics.prep.cooling.prepare_cooling`).

    Returns
    -------
    matplotlib.figure.Figure
        Temperature axis reversed, so that time runs from left to right.
    """
    convs = sorted(conversions, key=_rate_K_per_min)
    if not convs:
        raise CrystkinInputError("cooling_conversion_figure needs at least one cooling run")
    fig, ax = new_figure(6.0, 4.0)
    ax = ax[0, 0]
    for conv, (col, mk, ls) in zip(convs, cycle(), strict=False):
        T = celsius(np.asarray(conv.temperature))
        X = np.asarray(conv.conversion)
        step = max(1, len(T) // 25)
        ax.plot(T, X, color=col, ls=ls, lw=1.3)
        ax.plot(T[::step], X[::step], mk, color=col, ms=3.5, mfc="none",
                label=f"{_rate_K_per_min(conv):.3g} K/min")
    ax.invert_xaxis()
    ax.set_xlabel("sample temperature / °C")
    ax.set_ylabel("relative crystallinity X")
    ax.set_ylim(-0.02, 1.02)
    ax.set_title(title)
    ax.legend(loc="lower right", title="cooling rate")
    return fig


def jeziorny_figure(result, *, title="Jeziorny plot"):
    """Jeziorny's Avrami plot of each cooling run with the fitted line and its 95 % band.

    Parameters
    ----------
    result : JeziornyResult
        From :func:`kinetics.analyses.nonisothermal.jeziorny`.

    Notes
    -----
    log10[-ln(1 - X)] = log10 Zt + n log10 t with t = (T_onset - T)/beta in min,
    over the fitted conversion range (points). Zc is an empirical descriptor only
    (Vyazovkin, Polymers 15 (2023) 197).
    """
    fits = sorted(result.fits, key=lambda f: f.beta_K_per_min)
    if not fits:
        raise CrystkinInputError("jeziorny_figure: the result holds no fitted run")
    fig, ax = new_figure(6.0, 4.0)
    ax = ax[0, 0]
    for fit, (col, mk, ls) in zip(fits, cycle(), strict=False):
        x = np.log10(fit.t_min)
        y = np.log10(-np.log1p(-np.asarray(fit.X)))
        ax.plot(x, y, mk, color=col, ms=3.5, mfc="none",
                label=f"{fit.beta_K_per_min:.3g} K/min, n = {np.median(fit.draws['n']):.2f}")
        grid = np.linspace(x.min(), x.max(), 50)
        lo, mid, hi = _line_band(fit.draws["log10_Zt"], fit.draws["n"], grid)
        ax.plot(grid, mid, color=col, ls=ls, lw=1.2)
        ax.fill_between(grid, lo, hi, color=col, alpha=BAND_ALPHA, lw=0)
    lo_x, hi_x = fits[0].x_range
    ax.set_xlabel("log10(t / min),  t = (T_onset − T)/β")
    ax.set_ylabel("log10[−ln(1 − X)]")
    ax.set_title(f"{title}, {lo_x:.0%}-{hi_x:.0%} conversion\n"
                 "(posterior median lines, 95 % bands)")
    ax.legend(loc="best")
    return fig


def ozawa_figure(result, *, max_lines: int = 8, title="Ozawa plot"):
    """Ozawa's plot: ln[-ln(1 - X(T))] against cooling rate at fixed temperatures.

    Parameters
    ----------
    result : OzawaResult
        From :func:`kinetics.analyses.nonisothermal.ozawa`.
    max_lines : int
        At most this many temperatures, evenly spread over the estimable ones.

    Notes
    -----
    ln[-ln(1 - X)] = ln K(T) - m ln beta (Ozawa, Polymer 12 (1971) 150, from
    memory); lines are the posterior median with 95 % bands.
    """
    rows = [r for r in result.rows if r.estimable]
    if not rows:
        raise CrystkinInputError("ozawa_figure: no estimable temperature in the result")
    rows = _thin_rows(sorted(rows, key=lambda r: r.T_K), max_lines)
    fig, ax = new_figure(6.0, 4.2)
    ax = ax[0, 0]
    all_b = []
    for row, (col, mk, ls) in zip(rows, cycle(), strict=False):
        b = np.asarray(row.rates_K_per_min)
        X = np.asarray(row.X)
        all_b.extend(b)
        ax.plot(b, np.log(-np.log1p(-X)), mk, color=col, ms=4, mfc="none",
                label=f"{celsius(row.T_K):.0f} °C, m = {np.median(row.draws['m']):.2f}")
        grid = np.geomspace(b.min(), b.max(), 40)
        lo, mid, hi = _line_band(row.draws["lnK_T"], -np.asarray(row.draws["m"]),
                                 np.log(grid))
        ax.plot(grid, mid, color=col, ls=ls, lw=1.2)
        ax.fill_between(grid, lo, hi, color=col, alpha=BAND_ALPHA, lw=0)
    ax.set_xscale("log")
    _log_ticks(ax.xaxis, all_b)
    ax.set_xlabel("cooling rate β / (K/min)")
    ax.set_ylabel("ln[−ln(1 − X(T))]")
    ax.set_title(f"{title}: one line per temperature\n(posterior median, 95 % bands)")
    ax.legend(loc="best", fontsize=7)
    return fig


def mo_figure(result, *, max_lines: int = 5, title="Mo plot"):
    """Mo's plot: log cooling rate against log time at fixed conversions.

    Parameters
    ----------
    result : MoResult
        From :func:`kinetics.analyses.nonisothermal.mo`.
    max_lines : int
        At most this many conversions, evenly spread over the estimable ones.

    Notes
    -----
    log10 beta = log10 F(T) - a log10 t (Liu, Mo et al., Polym. Eng. Sci. 37
    (1997) 568, from memory); lines per posterior draw of (a, log10 F).
    """
    rows = [r for r in result.rows if r.estimable]
    if not rows:
        raise CrystkinInputError("mo_figure: no estimable conversion in the result")
    rows = _thin_rows(sorted(rows, key=lambda r: r.X), max_lines)
    fig, ax = new_figure(6.0, 4.2)
    ax = ax[0, 0]
    for row, (col, mk, ls) in zip(rows, cycle(), strict=False):
        b = np.log10(np.asarray(row.rates_K_per_min))
        t = np.log10(np.asarray(row.t_min))
        ax.plot(t, b, mk, color=col, ms=4, mfc="none",
                label=f"X = {row.X:.2f}, a = {np.median(row.draws['a']):.2f}")
        grid = np.linspace(t.min(), t.max(), 40)
        with np.errstate(invalid="ignore"):
            lo, mid, hi = _line_band(row.draws["log10_F_T"], -np.asarray(row.draws["a"]), grid)
        ax.plot(grid, mid, color=col, ls=ls, lw=1.2)
        ax.fill_between(grid, lo, hi, color=col, alpha=BAND_ALPHA, lw=0)
    ax.set_xlabel("log10(t / min)")
    ax.set_ylabel("log10(β / (K/min))")
    ax.set_title(f"{title}: one line per relative crystallinity\n(posterior median, 95 % bands)")
    ax.legend(loc="best", fontsize=7)
    return fig


def _energy_tables(friedman, vyazovkin):
    out = []
    for label, res, (col, mk, ls) in (("Friedman", friedman, ("#0072B2", "o", "-")),
                                      ("Vyazovkin", vyazovkin, ("#D55E00", "s", "--"))):
        if res is None:
            continue
        df = res.table()
        df = df[df["estimable"].astype(bool)] if "estimable" in df else df
        if len(df):
            out.append((label, df, col, mk, ls))
    if not out:
        raise CrystkinInputError("no estimable isoconversional energy to plot; give a Friedman "
                                 "or Vyazovkin result with estimable conversions")
    return out


def _energy_errorbars(ax, x, df, col, mk, ls, label, dodge=0.0):
    y = df["E_kJ_per_mol"].to_numpy(dtype=float)
    err = np.vstack([y - df["E_kJ_per_mol_lo95"].to_numpy(dtype=float),
                     df["E_kJ_per_mol_hi95"].to_numpy(dtype=float) - y])
    ax.errorbar(np.asarray(x, dtype=float) + dodge, y, yerr=err, fmt=mk, ls=ls, color=col,
                mfc="none", ms=4, capsize=2, lw=1, label=label)


def energy_conversion_figure(friedman=None, vyazovkin=None, *,
                             title="Isoconversional activation energy"):
    """Effective activation energy E against relative crystallinity X, 95 % intervals.

    Parameters
    ----------
    friedman : FriedmanResult, optional
    vyazovkin : VyazovkinResult, optional
        At least one of them (:mod:`kinetics.analyses.isoconversional`).
    """
    series = _energy_tables(friedman, vyazovkin)
    fig, ax = new_figure(6.0, 4.0)
    ax = ax[0, 0]
    for i, (label, df, col, mk, ls) in enumerate(series):
        _energy_errorbars(ax, df["X"], df, col, mk, ls, label,
                          dodge=0.006 * (i - (len(series) - 1) / 2))
    ax.axhline(0.0, color="#555555", lw=0.8, ls=":")
    ax.set_xlabel("relative crystallinity X")
    ax.set_ylabel("E / (kJ/mol)")
    ax.set_title(f"{title} against conversion\n(median, 95 % interval)")
    ax.legend(loc="best")
    return fig


def energy_temperature_figure(friedman=None, vyazovkin=None, *, hl_energy=None,
                              title="Isoconversional activation energy"):
    """Effective activation energy E against the mean temperature at each conversion.

    Parameters
    ----------
    friedman, vyazovkin : optional
        As in :func:`energy_conversion_figure`.
    hl_energy : HLEnergyFit, optional
        Hoffman-Lauritzen E(T) fitted to these energies
        (:func:`kinetics.analyses.growth.hl_from_activation_energy`), drawn as a
        median line with its 95 % band.
    """
    series = _energy_tables(friedman, vyazovkin)
    fig, ax = new_figure(6.0, 4.0)
    ax = ax[0, 0]
    for label, df, col, mk, ls in series:
        _energy_errorbars(ax, df["T_mean_degC"], df, col, mk, ls, label)
    if hl_energy is not None:
        band = hl_energy.band()
        x = band["T_degC"].to_numpy(dtype=float)
        ax.plot(x, band["E_J_per_mol"] / 1e3, color="#009E73", ls="-.", lw=1.4,
                label="Hoffman-Lauritzen E(T)")
        ax.fill_between(x, band["E_J_per_mol_lo95"] / 1e3, band["E_J_per_mol_hi95"] / 1e3,
                        color="#009E73", alpha=BAND_ALPHA, lw=0)
    ax.axhline(0.0, color="#555555", lw=0.8, ls=":")
    ax.set_xlabel("mean temperature at the conversion / °C")
    ax.set_ylabel("E / (kJ/mol)")
    ax.set_title(f"{title} against temperature\n(median, 95 % interval)")
    ax.legend(loc="best")
    return fig


def cooling_figures(cooling_result, *, hl_energy=None) -> list:
    """Every figure the cooling analysis has data for, per formulation.

    Parameters
    ----------
    cooling_result : CoolingResult
        From :func:`kinetics.analyses.nonisothermal.analyse_cooling`.
    hl_energy : dict of group -> HLEnergyFit, optional
        Drawn on the E(T) figure of that group.

    Returns
    -------
    list of (str, Figure, str)
        File name, figure and caption, in report order.
    """
    res = cooling_result
    out = []
    groups = list(dict.fromkeys(res.groups.get(c.run_id, "default") for c in res.conversions))
    for g in groups:
        stem = figure_stem(g)
        members = [c for c in res.conversions if res.groups.get(c.run_id, "default") == g]
        if members:
            out.append((f"cooling_conversion_{stem}.png",
                        cooling_conversion_figure(members, title=f"{g}: relative crystallinity"),
                        f"{g}: relative crystallinity X against sample temperature for each "
                        "cooling rate (temperature axis reversed: time runs to the right)."))
        if g in res.jeziorny and res.jeziorny[g].fits:
            out.append((f"jeziorny_{stem}.png", jeziorny_figure(res.jeziorny[g],
                                                               title=f"{g}: Jeziorny plot"),
                        f"{g}: Jeziorny plot of each cooling run with the posterior median line "
                        "and 95 % band over the fitted conversion range. Zc is an empirical "
                        "descriptor only (Vyazovkin, Polymers 15 (2023) 197)."))
        if g in res.ozawa and any(r.estimable for r in res.ozawa[g].rows):
            out.append((f"ozawa_{stem}.png", ozawa_figure(res.ozawa[g],
                                                         title=f"{g}: Ozawa plot"),
                        f"{g}: Ozawa plot, ln[−ln(1 − X)] against cooling rate at fixed "
                        "temperatures (at most eight shown), with posterior median lines and "
                        "95 % bands; the slope is −m."))
        if g in res.mo and any(r.estimable for r in res.mo[g].rows):
            out.append((f"mo_{stem}.png", mo_figure(res.mo[g], title=f"{g}: Mo plot"),
                        f"{g}: Mo plot, log β against log t at fixed relative crystallinity "
                        "(at most five shown), with posterior median lines and 95 % bands; the "
                        "slope is −a."))
        fr, vy = res.friedman.get(g), res.vyazovkin.get(g)
        if fr is not None or vy is not None:
            try:
                fx = energy_conversion_figure(fr, vy, title=f"{g}: activation energy")
                ft = energy_temperature_figure(fr, vy, hl_energy=(hl_energy or {}).get(g),
                                               title=f"{g}: activation energy")
            except CrystkinInputError:
                continue
            out.append((f"energy_conversion_{stem}.png", fx,
                        f"{g}: isoconversional effective activation energy against relative "
                        "crystallinity (Friedman and Vyazovkin; medians with 95 % intervals)."))
            out.append((f"energy_temperature_{stem}.png", ft,
                        f"{g}: the same activation energies against the mean temperature at "
                        "which each conversion is reached"
                        + (", with the Hoffman-Lauritzen E(T) and its 95 % band." if
                           (hl_energy or {}).get(g) is not None else ".")))
    return out
