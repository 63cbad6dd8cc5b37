"""Figures of growth theory, melting and the global rate model.

One function per figure: the Hoffman-Lauritzen plot with its regime lines and
bands, the Hoffman-Weeks and Gibbs-Thomson plots, the fitted half-time law of
the global rate model, its check against the runs, and the predicted X(t) on a
temperature profile.  Each takes result objects, returns a matplotlib
``Figure`` and recomputes nothing: lines and bands come from the posterior
draws (or the band tables) the analyses kept.
"""

from __future__ import annotations

import numpy as np

from ..errors import CrystkinInputError
from ..units import celsius
from .figures_cooling import figure_stem
from .style import BAND_ALPHA, COLOURS, cycle, new_figure

__all__ = ["hoffman_lauritzen_figure", "hoffman_weeks_figure", "gibbs_thomson_figure",
           "half_time_law_figure", "global_fit_figure", "prediction_figure", "growth_figures",
           "rate_model_figures"]

_GREY = "#555555"
_REGIME_SEGMENT = {"one.all": "all", "two.high_T": "high T", "two.low_T": "low T"}


def hoffman_lauritzen_figure(fit, *, title=None):
    """Hoffman-Lauritzen plot: y = ln(rate) + U*/(R(Tc - T_inf)) against x = 1/(Tc dT f).

    Parameters
    ----------
    fit : HoffmanLauritzenFit
        From :func:`kinetics.analyses.growth.fit_hoffman_lauritzen` (or its
        ``..._from_isotherms`` / ``..._from_growth`` forms).

    Returns
    -------
    matplotlib.figure.Figure
        Points at the nominal Tm0, U*, T_inf with 95 % error bars from their own
        uncertainty; the chosen model's median line and 95 % band (two lines
        meet at the regime break, marked); the other model, when fitted, dashed.

    Notes
    -----
    Hoffman & Miller, Polymer 38 (1997) 3151 (from memory); the slope is -Kg.
    """
    pts = fit.points()
    scale = 1e5
    fig, ax = new_figure(6.2, 4.3)
    ax = ax[0, 0]
    x = pts["x_hl_per_K2"].to_numpy(dtype=float) * scale
    y = pts["y_hl"].to_numpy(dtype=float)
    sd = pts["ln_rate_sd"].to_numpy(dtype=float)
    yerr = None if not np.isfinite(sd).any() else 1.96 * np.nan_to_num(sd)
    ax.errorbar(x, y, yerr=yerr, fmt="o", color=COLOURS[0], mfc="none", ms=5, capsize=2,
                label="data (95 % of each point)", zorder=3)
    for xi, yi, T in zip(x, y, pts["T_c_degC"], strict=True):
        ax.annotate(f"{T:.0f} °C", (xi, yi), textcoords="offset points", xytext=(4, 4),
                    fontsize=7, color=_GREY)
    chosen = fit.chosen
    band = fit.band(model=chosen)
    bx = band["x_hl_per_K2"].to_numpy(dtype=float) * scale
    ax.plot(bx, band["y_hl"], color=COLOURS[1], lw=1.5, ls="-", label=f"{chosen} (chosen)")
    ax.fill_between(bx, band["y_hl_lo95"], band["y_hl_hi95"], color=COLOURS[1],
                    alpha=BAND_ALPHA, lw=0)
    for other in fit.models:
        if other != chosen:
            ob = fit.band(model=other)
            ax.plot(ob["x_hl_per_K2"] * scale, ob["y_hl"], color=COLOURS[2], lw=1.1, ls="--",
                    label=f"{other} (not chosen)")
    if "two lines" in fit.models and "two.T_break" in fit.draws:
        from ..models.growth import hl_x

        tb = float(np.median(fit.draws["two.T_break"]))
        xb = float(hl_x(np.array([tb]), fit.settings["Tm0"])[0]) * scale
        ax.axvline(xb, color=_GREY, ls=":", lw=1)
        ax.annotate(f"break {celsius(tb):.1f} °C", (xb, ax.get_ylim()[1]), fontsize=7,
                    textcoords="offset points", xytext=(3, -12), color=_GREY)
    for seg in fit.segments(chosen):
        regime = fit.regimes.get(seg) if fit.regimes else None
        if not regime:
            continue
        side = _REGIME_SEGMENT[seg]
        sel = (np.ones(len(x), dtype=bool) if side == "all" or "side" not in pts
               else (pts["side"] == side).to_numpy())
        if np.any(sel):
            ax.annotate(f"regime {regime}", (float(np.mean(x[sel])), float(np.mean(y[sel]))),
                        textcoords="offset points", xytext=(0, -16), fontsize=8,
                        color=COLOURS[1], ha="center")
    kg = np.median(fit.Kg(fit.segments(chosen)[0]))
    what = "1/t½ / s⁻¹" if fit.rate_kind == "1/t_half" else "G / (m/s)"
    ax.set_xlabel("1/(Tc ΔT f) / (10⁻⁵ K⁻²)")
    ax.set_ylabel(f"ln({what}) + U*/[R(Tc − T∞)]")
    ax.set_title((title or f"{fit.group}: Hoffman-Lauritzen plot")
                 + f"\n(median line, 95 % band; Kg ≈ {kg:.3g} K²)")
    ax.legend(loc="best")
    return fig


def hoffman_weeks_figure(fits, *, title=None):
    """Hoffman-Weeks plot: melting against crystallization temperature, extrapolated to Tm = Tc.

    Parameters
    ----------
    fits : EquilibriumMeltingFit or sequence of them
        Linear and/or nonlinear Hoffman-Weeks fits of one formulation
        (:mod:`kinetics.analyses.melting`); the points are those of the first.

    Notes
    -----
    Tm = Tm0 (1 - 1/gamma) + Tc/gamma (Hoffman & Weeks, J. Res. NBS 66A (1962) 13);
    the nonlinear form of Marand, Xu & Srinivas (1998). Bands: 95 %; the Tm0
    interval is drawn on the line Tm = Tc.
    """
    fits = [fits] if hasattr(fits, "method") else list(fits)
    fits = [f for f in fits if not f.method.startswith("Gibbs")]
    if not fits:
        raise CrystkinInputError("hoffman_weeks_figure needs a Hoffman-Weeks fit")
    fig, ax = new_figure(6.0, 4.3)
    ax = ax[0, 0]
    first = fits[0]
    ax.plot(celsius(first.x), celsius(first.T_m), "o", color="#000000", mfc="none", ms=5,
            label="melting peaks", zorder=3)
    hi = max(float(np.nanmax(celsius(first.T_m))), float(np.nanmax(celsius(first.x))))
    for fit, (col, mk, ls) in zip(fits, cycle(), strict=False):
        band = fit.band()
        tc = celsius(band["T_c_K"].to_numpy(dtype=float))
        ax.plot(tc, celsius(band["T_m_K"]), color=col, ls=ls, lw=1.3, label=fit.method)
        ax.fill_between(tc, celsius(band["T_m_K_lo95"]), celsius(band["T_m_K_hi95"]),
                        color=col, alpha=BAND_ALPHA, lw=0)
        q = np.nanquantile(celsius(fit.draws["Tm0"]), [0.025, 0.5, 0.975])
        if np.all(np.isfinite(q)):
            ax.errorbar([q[1]], [q[1]], xerr=[[q[1] - q[0]], [q[2] - q[1]]], fmt=mk, color=col,
                        ms=6, capsize=3, zorder=4,
                        label=f"Tm⁰ = {q[1]:.1f} °C [{q[0]:.1f}, {q[2]:.1f}]")
            hi = max(hi, float(q[2]))
    lo = float(np.nanmin(celsius(first.x))) - 5
    ax.plot([lo, hi + 3], [lo, hi + 3], color=_GREY, ls=":", lw=1, label="Tm = Tc")
    ax.set_xlabel("crystallization temperature Tc / °C")
    ax.set_ylabel("melting temperature Tm / °C")
    ax.set_title((title or f"{first.group}: Hoffman-Weeks plot")
                 + "\n(medians, 95 % bands; the linear extrapolation can mislead)")
    ax.legend(loc="best", fontsize=7)
    return fig


def gibbs_thomson_figure(fit, *, title=None):
    """Gibbs-Thomson plot: melting temperature against inverse lamellar thickness.

    Parameters
    ----------
    fit : EquilibriumMeltingFit
        From :func:`kinetics.analyses.melting.gibbs_thomson`.

    Notes
    -----
    Tm = Tm0 [1 - 2 sigma_e/(dh_f l)]; the intercept at 1/l = 0 is Tm0.
    """
    if not fit.method.startswith("Gibbs"):
        raise CrystkinInputError(f"gibbs_thomson_figure needs a Gibbs-Thomson fit, got "
                                 f"{fit.method!r}")
    fig, ax = new_figure(6.0, 4.0)
    ax = ax[0, 0]
    inv = 1e-9 / np.asarray(fit.x, dtype=float)
    ax.plot(inv, celsius(fit.T_m), "o", color="#000000", mfc="none", ms=5, label="data")
    band = fit.band(np.geomspace(float(np.min(fit.x)) * 0.8, float(np.max(fit.x)) * 50, 100))
    bi = 1e-9 / band["thickness_m"].to_numpy(dtype=float)
    ax.plot(bi, celsius(band["T_m_K"]), color=COLOURS[1], lw=1.4, label="fit (median)")
    ax.fill_between(bi, celsius(band["T_m_K_lo95"]), celsius(band["T_m_K_hi95"]),
                    color=COLOURS[1], alpha=BAND_ALPHA, lw=0)
    q = np.nanquantile(celsius(fit.draws["Tm0"]), [0.025, 0.5, 0.975])
    ax.errorbar([0.0], [q[1]], yerr=[[q[1] - q[0]], [q[2] - q[1]]], fmt="D", color=COLOURS[1],
                capsize=3, label=f"Tm⁰ = {q[1]:.1f} °C [{q[0]:.1f}, {q[2]:.1f}]")
    ax.set_xlim(left=0)
    ax.set_xlabel("1/l / nm⁻¹")
    ax.set_ylabel("melting temperature Tm / °C")
    ax.set_title((title or f"{fit.group}: Gibbs-Thomson plot") + "\n(median, 95 % band)")
    ax.legend(loc="best", fontsize=7)
    return fig


def _model_of(result):
    if hasattr(result, "rate_constant_table"):
        return result
    if hasattr(result, "simulation_model"):
        return result.simulation_model()
    raise CrystkinInputError("expected a GlobalRateResult or a SimulationModel, got "
                             f"{type(result).__name__}")


def half_time_law_figure(result, *, isothermal_table=None, title="Rate model: half-time law"):
    """Isothermal half-time t½(T) of the fitted rate model with its 95 % band.

    Parameters
    ----------
    result : GlobalRateResult or SimulationModel
    isothermal_table : DataFrame, optional
        Per-run half-times (``T_c_degC``, ``t_half_s`` with ``_lo95``/``_hi95``)
        drawn as points for comparison.

    Notes
    -----
    t½(T) = (ln 2)^(1/n)/K(T) with K(T) of Nakamura-Hoffman-Lauritzen form; the
    shaded span is the temperature range of the fitted data.
    """
    model = _model_of(result)
    lo_T, hi_T = model.validity.get("temperature_K", (np.nan, np.nan))
    Tm0 = float(np.median(model["Tm0"]))
    start = max(float(model.glass_transition_K) + 5.0, lo_T - 40.0)
    stop = min(Tm0 - 3.0, hi_T + 25.0)
    T = np.linspace(start, stop, 200)
    tab = model.rate_constant_table(T)
    fig, ax = new_figure(6.0, 4.0)
    ax = ax[0, 0]
    x = tab["T_degC"].to_numpy(dtype=float)
    ax.plot(x, tab["t_half_s"], color=COLOURS[0], lw=1.5, label="model (median)")
    ax.fill_between(x, tab["t_half_s_lo95"], tab["t_half_s_hi95"], color=COLOURS[0],
                    alpha=BAND_ALPHA, lw=0, label="95 % band")
    if np.isfinite(lo_T) and np.isfinite(hi_T):
        ax.axvspan(celsius(lo_T), celsius(hi_T), color="#999999", alpha=0.12, lw=0,
                   label="temperatures of the fitted data")
    if isothermal_table is not None and len(isothermal_table):
        t = isothermal_table
        y = t["t_half_s"].to_numpy(dtype=float)
        err = np.vstack([y - t["t_half_s_lo95"].to_numpy(dtype=float),
                         t["t_half_s_hi95"].to_numpy(dtype=float) - y])
        ax.errorbar(t["T_c_degC"], y, yerr=err, fmt="s", color=COLOURS[1], mfc="none", ms=4,
                    capsize=2, ls="none", label="isotherms (own Avrami fit)")
    ax.set_yscale("log")
    ax.set_xlabel("temperature / °C")
    ax.set_ylabel("isothermal half-time t½ / s")
    ax.set_title(f"{title}\n(median, 95 % band)")
    ax.legend(loc="best", fontsize=7)
    return fig


def _run_rows(result, bands, checks):
    """(run_id, kind, label, held_out, time origin) of every run with a band."""
    rows = []
    specs = list(getattr(result, "specs", ())) + list(getattr(result, "held_out", ()))
    if specs:
        held = {s.run_id for s in getattr(result, "held_out", ())}
        for s in specs:
            if s.run_id not in bands:
                continue
            label = (f"{s.run_id} ({celsius(s.temperature):.0f} °C)" if s.kind == "isothermal"
                     else f"{s.run_id} ({60 * s.rate:.3g} K/min)")
            origin = s.conversion.hold_start if s.kind == "isothermal" else 0.0
            rows.append((s.run_id, s.kind, label, s.run_id in held, origin))
        return rows
    info = {}
    if checks is not None and len(checks):
        for r in checks.to_dict("records"):
            info[str(r["run_id"])] = r
    for run_id, band in bands.items():
        c = band["conversion"]
        r = info.get(str(run_id), {})
        T = c["T_K"].to_numpy(dtype=float)
        kind = r.get("kind") or ("isothermal" if np.ptp(T) < 2.0 else "cooling")
        if kind == "isothermal":
            label = f"{run_id} ({celsius(float(np.median(T))):.0f} °C)"
        else:
            rate = r.get("rate_K_per_min")
            label = f"{run_id} ({rate:.3g} K/min)" if rate else str(run_id)
        rows.append((run_id, kind, label, bool(r.get("held_out", False)),
                     float(c["t_s"].iloc[0]) if kind == "isothermal" else 0.0))
    return rows


def global_fit_figure(result, *, checks=None, max_runs: int = 8,
                      title="Rate model against the runs"):
    """Measured relative crystallinity of each run against the rate model's 95 % band.

    Parameters
    ----------
    result : GlobalRateResult, or dict of run_id -> band tables
        From :func:`kinetics.analyses.global_rate.fit_global_rate` (its ``bands``,
        ``specs`` and ``held_out`` are used), or its ``bands`` alone.
    checks : DataFrame, optional
        With a bands dict: the result's ``checks`` table (run kind, hold
        temperature, rate, held-out flag) for the legend; without it the kind is
        read from the temperature record.

    Returns
    -------
    matplotlib.figure.Figure
        Left: isothermal runs against time; right: cooling runs against
        temperature (reversed). Held-out runs are marked in the legend.
    """
    bands = result if isinstance(result, dict) else (getattr(result, "bands", None) or {})
    rows = _run_rows(None if isinstance(result, dict) else result, bands, checks)
    iso = [r for r in rows if r[1] == "isothermal"][:max_runs]
    cool = [r for r in rows if r[1] == "cooling"][:max_runs]
    if not (iso or cool):
        raise CrystkinInputError("global_fit_figure: the result has no run bands to draw")
    ncols = int(bool(iso)) + int(bool(cool))
    fig, axes = new_figure(5.0 * ncols + 0.6, 4.0, ncols=ncols)
    k = 0
    for kind, runs in (("isothermal", iso), ("cooling", cool)):
        if not runs:
            continue
        ax = axes[0, k]
        k += 1
        for (run_id, _kind, label, held, origin), (col, mk, ls) in zip(runs, cycle(),
                                                                        strict=False):
            c = bands[run_id]["conversion"]
            if kind == "isothermal":
                xv = (c["t_s"].to_numpy(dtype=float) - origin) / 60.0
            else:
                xv = celsius(c["T_K"].to_numpy(dtype=float))
            step = max(1, len(xv) // 30)
            ax.plot(xv[::step], c["X_measured"].to_numpy()[::step], mk, color=col, ms=3,
                    mfc="none", label=label + (", held out" if held else ""))
            ax.plot(xv, c["X_median"], color=col, ls=ls, lw=1.1)
            ax.fill_between(xv, c["X_lo95"], c["X_hi95"], color=col, alpha=BAND_ALPHA, lw=0)
        ax.set_ylim(-0.02, 1.02)
        ax.set_ylabel("relative crystallinity X")
        if kind == "isothermal":
            ax.set_xlabel("time / min")
            ax.set_title("isothermal holds")
        else:
            ax.invert_xaxis()
            ax.set_xlabel("sample temperature / °C")
            ax.set_title("cooling scans")
        ax.legend(loc="lower right", fontsize=6.5)
    fig.suptitle(f"{title}: points measured, lines model median, bands 95 %")
    return fig


def prediction_figure(prediction, *, title=None):
    """Predicted relative crystallinity on a temperature profile, with its 95 % band.

    Parameters
    ----------
    prediction : Prediction
        From :func:`kinetics.analyses.predict.predict_profile`.

    Returns
    -------
    matplotlib.figure.Figure
        Top: the temperature profile; bottom: X(t) median and 95 % band, each
        target conversion that is reached marked with its time interval. The
        figure carries the caution that these are estimates.
    """
    p = prediction
    t = np.asarray(p.time_s, dtype=float)
    minutes = (t[-1] - t[0]) > 600
    f = 60.0 if minutes else 1.0
    unit = "min" if minutes else "s"
    fig, axes = new_figure(6.4, 5.2, nrows=2)
    ax_T, ax_X = axes[0, 0], axes[1, 0]
    ax_T.plot(t / f, celsius(np.asarray(p.temperature_K)), color=_GREY, lw=1.3)
    ax_T.set_ylabel("temperature / °C")
    ax_X.plot(t / f, p.X_median, color=COLOURS[0], lw=1.5, label="median")
    ax_X.fill_between(t / f, p.X_lo95, p.X_hi95, color=COLOURS[0], alpha=BAND_ALPHA, lw=0,
                      label="95 % band")
    for r, (col, mk, _ls) in zip(p.targets, cycle(), strict=False):
        if not np.isfinite(r.time_s):
            continue
        lo = r.time_lo95_s if np.isfinite(r.time_lo95_s) else r.time_s
        hi = r.time_hi95_s if np.isfinite(r.time_hi95_s) else t[-1]
        ax_X.errorbar([r.time_s / f], [r.conversion],
                      xerr=[[(r.time_s - lo) / f], [(hi - r.time_s) / f]], fmt=mk, color=col,
                      capsize=3, ms=5, label=f"X = {r.conversion:g} at {r.time_s / f:.3g} {unit}")
    if p.glass_transition_time_s is not None and np.isfinite(p.glass_transition_time_s):
        for ax in (ax_T, ax_X):
            ax.axvline(p.glass_transition_time_s / f, color=_GREY, ls=":", lw=1)
        ax_X.annotate("below Tg", (p.glass_transition_time_s / f, 0.05), fontsize=7,
                      textcoords="offset points", xytext=(3, 0), color=_GREY)
    ax_X.set_ylim(-0.02, 1.02)
    ax_X.set_xlabel(f"time / {unit}")
    ax_X.set_ylabel("relative crystallinity X")
    ax_X.legend(loc="lower right", fontsize=7)
    ax_T.set_title((title or f"Predicted crystallization: {p.source or 'profile'}")
                   + "\nEstimates from laboratory DSC data; validate on the process.")
    return fig


def growth_figures(growth=None, melting=None, *, energy=None) -> list:
    """Every growth-theory and melting figure the results have data for.

    Parameters
    ----------
    growth : mapping of group -> HoffmanLauritzenFit, or sequence of them, optional
    melting : mapping of (method, group) -> EquilibriumMeltingFit, or sequence, optional
        Hoffman-Weeks fits of a group are drawn together; Gibbs-Thomson fits alone.
    energy : mapping of group -> HLEnergyFit, optional
        Not drawn here (see :func:`kinetics.report.figures_cooling.cooling_figures`);
        accepted for symmetry.

    Returns
    -------
    list of (str, Figure, str)
        File name, figure and caption.
    """
    out = []
    hl = list(growth.values()) if isinstance(growth, dict) else list(growth or ())
    for fit in hl:
        stem = figure_stem(fit.group)
        regimes = [r for r in (fit.regimes or {}).values() if r]
        out.append((f"hoffman_lauritzen_{stem}.png", hoffman_lauritzen_figure(fit),
                    f"{fit.group}: Hoffman-Lauritzen plot of the crystallization rates with the "
                    f"chosen model ({fit.chosen}) as median line and 95 % band"
                    + (f"; regimes {', '.join(regimes)}" if regimes else "")
                    + ". Tm⁰, U* and T∞ uncertainty is carried into the band."))
    fits = list(melting.values()) if isinstance(melting, dict) else list(melting or ())
    by_group: dict = {}
    for f in fits:
        by_group.setdefault(f.group, []).append(f)
    for group, members in by_group.items():
        stem = figure_stem(group)
        hw = [f for f in members if not f.method.startswith("Gibbs")]
        if hw:
            out.append((f"hoffman_weeks_{stem}.png", hoffman_weeks_figure(hw),
                        f"{group}: Hoffman-Weeks plot of melting against crystallization "
                        "temperature with the fitted line(s), 95 % bands and the extrapolated "
                        "Tm⁰ on the line Tm = Tc. The linear extrapolation can mislead "
                        "(invalid for isotactic polypropylene; Yamada et al. 2003)."))
        for k, gt in enumerate(f for f in members if f.method.startswith("Gibbs")):
            out.append((f"gibbs_thomson_{stem}{'_' + str(k + 1) if k else ''}.png",
                        gibbs_thomson_figure(gt),
                        f"{group}: Gibbs-Thomson plot, melting temperature against inverse "
                        "lamellar thickness, extrapolated to 1/l = 0 (median, 95 % band)."))
    return out


def rate_model_figures(result=None, predictions=(), *, bands=None, checks=None,
                       isothermal_table=None, name="rate_model") -> list:
    """Figures of a global rate model and of predictions made with it.

    Parameters
    ----------
    result : GlobalRateResult or SimulationModel, optional
    predictions : sequence of Prediction
    bands : dict of run_id -> band tables, optional
        The fit's ``bands`` when ``result`` is a SimulationModel (the check figure
        is drawn only with bands).
    checks : DataFrame, optional
        The fit's ``checks`` table, for the legend of the check figure.
    isothermal_table : DataFrame, optional
        Per-run isothermal half-times of the same formulation, shown on the half-time law.
    name : str
        File-name stem (one model per call; include the group name for several).

    Returns
    -------
    list of (str, Figure, str)
    """
    out = []
    stem = figure_stem(name)
    if result is not None:
        out.append((f"{stem}_half_time.png",
                    half_time_law_figure(result, isothermal_table=isothermal_table),
                    "Isothermal half-time of the fitted Nakamura-Hoffman-Lauritzen rate model "
                    "(median, 95 % band); the grey span is the temperature range of the "
                    "fitted data, outside it the curve is an extrapolation."))
    if getattr(result, "bands", None) or bands:
        source = result if getattr(result, "bands", None) else bands
        out.append((f"{stem}_check.png", global_fit_figure(source, checks=checks),
                    "Measured relative crystallinity of each run (points) against the "
                    "rate model's median and 95 % band; held-out runs were not fitted."))
    for k, p in enumerate(predictions, start=1):
        out.append((f"{stem}_prediction_{k}.png", prediction_figure(p),
                    f"Predicted relative crystallinity on {p.source or 'the profile'} (median, "
                    "95 % band) with the times of the target conversions. " + p.caution))
    return out
