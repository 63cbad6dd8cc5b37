"""Shared fixtures: outside reference sets and invented (synthetic) runs.

``reference_set(name)`` reads ``reference_sets/<name>/data.json`` from the
repository root (outside data with its SOURCE.md). ``synthetic_run(**kw)``
makes an invented isothermal run with known parameters; it is never an outside
reference. ``hand_conversion(trace, truth)`` prepares such a run by hand with
the true baseline (known only because the data are invented), so estimation
tests do not depend on the signal-preparation code.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from kinetics.dataset import Conversion

REPO_ROOT = Path(__file__).resolve().parent.parent

#: The scenario of DESIGN.md section 5 (invented): Avrami n = 2.6,
#: t_half = 120 s, 0.5 s sampling, white noise of 1 % of the peak heat flow.
DESIGN_RUN = {"n": 2.6, "t_half": 120.0, "t0": 30.0, "dt": 0.5, "noise": 0.01,
              "temperature": 400.0}


@pytest.fixture(scope="session")
def reference_set():
    """Loader: ``reference_set("nist_strd_exponential")`` -> the parsed data.json."""

    def load(name: str) -> dict:
        path = REPO_ROOT / "reference_sets" / name / "data.json"
        if not path.is_file():
            pytest.fail(f"reference set '{name}' missing: {path}")
        with path.open(encoding="utf-8") as fh:
            return json.load(fh)

    return load


@pytest.fixture(scope="session")
def synthetic_run():
    """Factory of invented isothermal runs: ``trace, truth = synthetic_run(seed=3, ...)``.

    Defaults are the DESIGN.md section 5 scenario; keywords go to
    :func:`kinetics.synthetic.synthetic_isotherm`.
    """
    synthetic = pytest.importorskip("kinetics.synthetic")

    def make(**kw):
        opts = {**DESIGN_RUN, **kw}
        return synthetic.synthetic_isotherm(**opts)

    return make


def _conversion_by_hand(trace, truth, *, transient_end=None) -> Conversion:
    t = trace.time
    dt = float(np.median(np.diff(t)))
    a, b = truth["drift"]
    base = a + b * t
    if truth["transient"] is not None:
        amp, tau = truth["transient"]
        base = base + amp * np.exp(-np.clip(t - truth["hold_start"], 0.0, None) / tau)
        te = truth["hold_start"] + 5.0 * tau
    else:
        te = truth["hold_start"]
    if transient_end is not None:
        te = transient_end
    sign = 1.0 if truth["exotherm"] == "up" else -1.0
    q = sign * (trace.heat_flow - base)
    sl = t >= truth["event_start"]
    ts, c = t[sl], q[sl]
    cum = np.concatenate([[0.0], np.cumsum(0.5 * (c[1:] + c[:-1]) * np.diff(ts))])
    area = float(cum[-1])
    X = np.clip(np.maximum.accumulate(cum / area), 0.0, 1.0)
    mass = trace.info.mass
    return Conversion(
        run_id=trace.run_id, kind="isothermal", time=ts, temperature=trace.temperature[sl],
        conversion=X, rate=c / area, enthalpy=area / mass, specific_enthalpy=True,
        window=(float(ts[0]), float(ts[-1])),
        baseline={"method": "true baseline of the invented run (test fixture)"},
        hold_start=float(truth["hold_start"]), transient_end=float(max(te, t[0] + dt)),
        induction_time=float(ts[0] - truth["hold_start"]), signal=sign * trace.heat_flow[sl],
        baseline_values=sign * base[sl], exotherm=truth["exotherm"])


@pytest.fixture(scope="session")
def hand_conversion():
    """``hand_conversion(trace, truth)`` -> Conversion from the true baseline and event start."""
    return _conversion_by_hand
