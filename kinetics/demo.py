"""The built-in demo study. INVENTED DATA: no real material or measurement.

Scenario: a compounding lab evaluates an invented polypropylene-like grade
"PX-40", neat and with two invented nucleating additives, "N-A" (0.1 wt %) and
"N-B" (0.2 wt %), to shorten the cooling time of thin-walled molded parts.
Per formulation: isothermal holds at five temperatures (one repeated) (Avrami conversion with a
Hoffman–Lauritzen-type temperature dependence of the half-time) and cooling
scans at five rates (Nakamura model with the same rate function), plus, for the
neat grade, melting scans after holds (for Hoffman–Weeks).  All come from the
package's own models plus white noise, baseline drift, heat-capacity steps and
instrument start-up transients, and are written in three different file layouts
(as different instruments and exports would), so the demo also exercises the
readers.  Nothing needs to be downloaded.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .analyses.seeds import run_seed
from .models.avrami import LN2
from .synthetic import synthetic_isotherm_arrays
from .synthetic_cooling import synthetic_cooling_arrays
from .units import kelvin

__all__ = ["DEMO_GROUPS", "DemoTruth", "demo_half_time", "write_demo_study"]

R = 8.314462618

#: Invented "true" parameters of the demo material (not measured values).
TM0 = kelvin(186.0)
TG = kelvin(-10.0)
T_INF = TG - 30.0
U_STAR = 6276.0
KG = 3.0e5
T_REF = kelvin(130.0)


@dataclass(frozen=True)
class DemoTruth:
    """Invented parameters of one demo formulation."""

    group: str
    label: str
    n: float
    t_half_ref: float
    layout: str
    exotherm: str


DEMO_GROUPS = (
    DemoTruth("PX-40", "neat grade (invented)", 2.7, 150.0, "csv_minutes_mW", "up"),
    DemoTruth("PX-40_N-A", "with 0.1 wt % N-A (invented)", 2.4, 75.0, "tsv_seconds_Wg", "up"),
    DemoTruth("PX-40_N-B", "with 0.2 wt % N-B (invented)", 2.2, 45.0, "csv_semicolon_comma",
              "down"),
)
DEMO_TEMPERATURES_C = (128.0, 130.0, 132.0, 134.0, 136.0)
DEMO_RATES_K_PER_MIN = (2.0, 5.0, 10.0, 20.0, 40.0)
DEMO_MELTING_HOLDS_C = (128.0, 130.0, 132.0, 134.0, 136.0)
#: Invented run-to-run scatter of the half-time (coefficient of variation).
RUN_CV = 0.04
#: Invented lamellar-thickening ratio of the demo (Hoffman–Weeks gamma).
GAMMA = 2.0


def demo_half_time(T, t_half_ref):
    """Invented half-time law of the demo, s: Hoffman–Lauritzen form around 130 °C.

    t_half(T) = t_half_ref exp[U*/R (1/(T - T_inf) - 1/(T_ref - T_inf))]
                           exp[Kg (1/(T dT f) - 1/(T_ref dT_ref f_ref))],
    dT = Tm0 - T, f = 2T/(Tm0 + T)  (form of Hoffman & Lauritzen; values invented).
    """
    T = np.asarray(T, dtype=float)

    def g(x):
        return U_STAR / (R * (x - T_INF)) + KG / (x * (TM0 - x) * 2 * x / (TM0 + x))

    return t_half_ref * np.exp(g(T) - g(T_REF))


def demo_rate_function(t_half_ref, n):
    """Invented Nakamura rate K(T) = (ln 2)^(1/n) / t_half(T), 1/s, of one formulation."""
    def K_of_T(T):
        T = np.asarray(T, dtype=float)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            th = demo_half_time(np.clip(T, T_INF + 1.0, TM0 - 0.5), t_half_ref)
            K = LN2 ** (1.0 / n) / th
        return np.where((T > T_INF + 1.0) & (T < TM0 - 0.5), np.nan_to_num(K), 0.0)
    return K_of_T


def _melting_arrays(*, Tc, rate, mass, seed, enthalpy=95e3):
    """Invented heating scan after a hold at Tc: Gaussian endotherm at the
    Hoffman–Weeks melting point Tm = Tm0 (1 - 1/gamma) + Tc/gamma."""
    rng = np.random.default_rng(seed)
    Tm = TM0 * (1 - 1 / GAMMA) + Tc / GAMMA
    T0, T1 = Tc - 5.0, kelvin(195.0)
    n = 2000
    t = np.linspace(0.0, (T1 - T0) / rate, n)
    T = T0 + rate * t
    width = 2.5
    peak = np.exp(-0.5 * ((T - Tm) / width) ** 2) / (width * np.sqrt(2 * np.pi))
    q = -mass * enthalpy * rate * peak + 1e-4 + 2e-7 * (T - T0)
    q = q + rng.normal(0, 0.01 * np.abs(q - 1e-4).max(), n)
    return t, T + rng.normal(0, 0.005, n), q, Tm


def _write(path: Path, layout: str, t, T, q, mass, header_note):
    note = f"# {header_note}\n"
    if layout == "csv_minutes_mW":
        body = np.column_stack([t / 60.0, T - 273.15, q * 1e3])
        text = note + f"# sample mass: {mass * 1e6:.3f} mg\n" + \
            "Time (min),Sample temperature (°C),Heat flow (mW)\n"
        text += "\n".join(f"{a:.5f},{b:.3f},{c:.6f}" for a, b, c in body) + "\n"
    elif layout == "tsv_seconds_Wg":
        body = np.column_stack([t, T, q / mass / 1e3])
        text = note + "t [s]\tTs [K]\tHF [W/g]\n"
        text += "\n".join(f"{a:.2f}\t{b:.3f}\t{c:.7f}" for a, b, c in body) + "\n"
    else:
        body = np.column_stack([t / 60.0, T - 273.15, q * 1e3])
        text = note + "Zeit [min];Temp [°C];DSC [mW]\n"
        text += "\n".join(f"{a:.5f};{b:.3f};{c:.6f}".replace(".", ",") for a, b, c in body) + "\n"
    path.write_text(text, encoding="utf-8")


def write_demo_study(folder, *, seed: int = 0, quick: bool = False) -> Path:
    """Write the invented demo study (raw files and study.toml) into ``folder``.

    Parameters
    ----------
    folder : path
        Created if needed; existing demo files in it are replaced.
    seed : int
        Noise seed; the same seed gives byte-identical files.
    quick : bool
        Two temperatures per formulation only (for fast checks).

    Returns
    -------
    Path
        The study file.
    """
    folder = Path(folder)
    raw = folder / "raw"
    raw.mkdir(parents=True, exist_ok=True)
    temps = DEMO_TEMPERATURES_C[::2] if quick else DEMO_TEMPERATURES_C
    runs = []
    holds = [(Tc, "") for Tc in temps] + [(temps[len(temps) // 2], "b")]
    for g in DEMO_GROUPS:
        for Tc, rep in holds:
            T = kelvin(Tc)
            name = f"{g.group}_iso{Tc:.0f}{rep}"
            rs = run_seed(seed, name)
            rng = np.random.default_rng(rs)
            th = float(demo_half_time(T, g.t_half_ref)) * float(np.exp(rng.normal(0, RUN_CV)))
            mass = float(rng.uniform(4.5, 6.0)) * 1e-6
            t0 = float(rng.uniform(8.0, 20.0))
            duration = t0 + max(5.0 * th, 120.0) + 120.0
            t, Tr, q, _ = synthetic_isotherm_arrays(
                n=g.n, t_half=th, t0=t0, enthalpy=95e3, mass=mass, temperature=T,
                duration=duration, dt=0.5, noise=0.01, seed=rs,
                drift=(float(rng.normal(2e-5, 1e-5)), float(rng.normal(0, 2e-9))),
                transient=(float(rng.uniform(1e-4, 4e-4)), float(rng.uniform(6, 12))),
                exotherm=g.exotherm)
            ext = "tsv" if g.layout == "tsv_seconds_Wg" else "csv"
            fname = f"{name}.{ext}"
            _write(raw / fname, g.layout, t, Tr, q, mass,
                   f"INVENTED demo data (crystkin), {g.label}, hold at {Tc:.0f} degC")
            runs.append((name, f"raw/{fname}", g.group, Tc, mass, g.layout))
    rates = DEMO_RATES_K_PER_MIN[1::2] if quick else DEMO_RATES_K_PER_MIN
    for g in DEMO_GROUPS:
        for r, rep in [(r, "") for r in rates] + [(rates[len(rates) // 2], "b")]:
            name = f"{g.group}_cool{r:g}{rep}"
            rs = run_seed(seed, name)
            rng = np.random.default_rng(rs)
            K_of_T = demo_rate_function(g.t_half_ref * float(np.exp(rng.normal(0, RUN_CV))), g.n)
            mass = float(rng.uniform(4.5, 6.0)) * 1e-6
            beta = r / 60.0
            n_points = int(np.clip((kelvin(175.0) - kelvin(70.0)) / beta / 0.5, 600, 4000))
            t, Tr, q, _ = synthetic_cooling_arrays(
                rate=beta, n=g.n, K_of_T=K_of_T, T_start=kelvin(175.0), T_end=kelvin(70.0),
                n_points=n_points, enthalpy=95e3, mass=mass, noise=0.01,
                drift=(float(rng.normal(-2e-4, 2e-5)) * beta * 6, 1e-7),
                baseline_step=float(rng.uniform(0.5e-5, 2e-5)) * r, exotherm=g.exotherm,
                seed=rs)
            ext = "tsv" if g.layout == "tsv_seconds_Wg" else "csv"
            fname = f"{name}.{ext}"
            _write(raw / fname, g.layout, t, Tr, q, mass,
                   f"INVENTED demo data (crystkin), {g.label}, cooling at {r:g} K/min")
            runs.append((name, f"raw/{fname}", g.group, ("cooling", r), mass, g.layout))
    g = DEMO_GROUPS[0]
    holds = DEMO_MELTING_HOLDS_C[::2] if quick else DEMO_MELTING_HOLDS_C
    for Tc in holds:
        name = f"{g.group}_melt_after{Tc:.0f}"
        rs = run_seed(seed, name)
        mass = float(np.random.default_rng(rs).uniform(4.5, 6.0)) * 1e-6
        t, Tr, q, _ = _melting_arrays(Tc=kelvin(Tc), rate=10 / 60, mass=mass, seed=rs)
        fname = f"{name}.csv"
        _write(raw / fname, g.layout, t, Tr, q, mass,
               f"INVENTED demo data (crystkin), {g.label}, heating at 10 K/min after a hold "
               f"at {Tc:.0f} degC")
        runs.append((name, f"raw/{fname}", g.group, ("heating", Tc), mass, g.layout))

    lines = ['# crystkin demo study. INVENTED DATA generated by kinetics.demo; '
             'not a real material.',
             "[study]", 'name = "PX-40 nucleating-agent screening (invented demo)"',
             'polymer = "iPP"', 'tm0 = "186 degC"', 'tg = "-10 degC"', ""]
    for name, path, group, cond, mass, _layout in runs:
        lines += ["[[run]]", f'name = "{name}"', f'file = "{path}"']
        if isinstance(cond, tuple) and cond[0] == "cooling":
            lines += ['kind = "cooling"', f'rate = "{cond[1]:g} K/min"']
        elif isinstance(cond, tuple):
            lines += ['kind = "heating"', 'rate = "10 K/min"',
                      f'hold_temperature = "{cond[1]:.0f} degC"']
        else:
            lines += ['kind = "isothermal"', f'temperature = "{cond:.0f} degC"']
        lines += [f'group = "{group}"', f'mass = "{mass * 1e6:.3f} mg"', ""]
    study = folder / "study.toml"
    study.write_text("\n".join(lines), encoding="utf-8")
    return study


def demo_truth() -> dict:
    """The invented true values behind the demo, for checks and notebooks."""
    return {"Tm0_K": TM0, "gamma": GAMMA, "run_to_run_cv": RUN_CV, "Tg_K": TG, "T_inf_K": T_INF,
            "U_star_J_per_mol": U_STAR,
            "Kg_K2": KG, "T_ref_K": T_REF,
            "groups": {g.group: {"n": g.n, "t_half_ref_s": g.t_half_ref,
                                 "K_ref_per_s": LN2 ** (1 / g.n) / g.t_half_ref}
                       for g in DEMO_GROUPS}}


def relabel_sources(study, root, label: str = "demo_input"):
    """The study with file paths under ``root`` written as ``label/<path below root>``.

    The demo is generated in a temporary folder and copied into the output as
    ``demo_input/``; tables and provenance then name files where the user finds
    them, and the same seed gives the same bytes.
    """
    from dataclasses import replace
    from pathlib import Path

    root = Path(root)

    def rel(path: str) -> str:
        try:
            return f"{label}/{Path(path).relative_to(root).as_posix()}"
        except ValueError:
            return path

    traces = tuple(replace(t, info=replace(t.info, source=rel(t.info.source)))
                   if t.info.source else t for t in study.traces)
    return replace(study, traces=traces, source=rel(study.source) if study.source else "")
