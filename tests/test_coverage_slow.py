"""Calibration of the full posterior: 95 % intervals should contain the truth ~95 % of the time.

Seeded replicate studies on invented runs (kinetics.synthetic; DESIGN.md
section 5 scenario with linear drift and a start-up transient), each fitted
with :func:`kinetics.analyses.isothermal.fit_isotherm` (emcee posterior). The
slow study runs with ``pytest -m slow tests/test_coverage_slow.py -s``; a small
version with short chains runs in CI. The runs are invented; this checks
calibration (DESIGN.md section 9 target), not an outside reference.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from kinetics.analyses.isothermal import fit_isotherm
from kinetics.errors import DataQualityWarning

DRIFT = (2e-4, 1e-7)       # W, W/s
TRANSIENT = (1e-3, 10.0)   # W, s
QUANTITIES = {"n": "n", "t_half_s": "t_half", "induction_time_s": "t0"}


def _study(synthetic_run, hand_conversion, replicates, *, sampler_options=None,
           prepared=False, transient="auto", base_seed=9000):
    """Per quantity: array of (lo95, hi95, truth) rows, one per replicate."""
    out = {q: [] for q in QUANTITIES}
    for i in range(replicates):
        trace, truth = synthetic_run(seed=base_seed + i, drift=DRIFT, transient=TRANSIENT)
        conv = None if prepared else hand_conversion(trace, truth)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DataQualityWarning)
            fit = fit_isotherm(trace, conversion=conv, seed=i, transient=transient,
                               sampler_options=sampler_options)
        row = fit.row()
        for q, key in QUANTITIES.items():
            out[q].append((row[f"{q}_lo95"], row[f"{q}_hi95"], truth[key]))
    return {q: np.array(v) for q, v in out.items()}


def _coverage(res):
    return {q: float(np.mean((a[:, 0] <= a[:, 2]) & (a[:, 2] <= a[:, 1]))) for q, a in res.items()}


def test_coverage_smoke_short_chains(synthetic_run, hand_conversion):
    """CI version: 4 replicates, short chains; intervals finite, most contain the truth."""
    res = _study(synthetic_run, hand_conversion, 4,
                 sampler_options={"max_steps": 300, "check_every": 150, "min_steps": 150})
    hits = 0
    for q, a in res.items():
        assert np.all(np.isfinite(a[:, :2])), q
        assert np.all(a[:, 0] < a[:, 1]), q
        hits += int(np.sum((a[:, 0] <= a[:, 2]) & (a[:, 2] <= a[:, 1])))
    assert hits >= 9, f"{hits} of 12 intervals contain the truth; coverage {_coverage(res)}"


@pytest.mark.slow
def test_posterior_coverage_40_replicates(synthetic_run, hand_conversion):
    """40 seeded replicates, full posterior: coverage of n, t_half, t0 in [0.8, 1.0]
    (binomial SD of a true 95 % coverage over 40 replicates: 3.4 %)."""
    cov = _coverage(_study(synthetic_run, hand_conversion, 40))
    print(f"\n95 % interval coverage over 40 replicates (hand-prepared): {cov}")
    for q, c in cov.items():
        assert 0.8 <= c <= 1.0, f"coverage of {q}: {c:.3f} ({cov})"


@pytest.mark.slow
def test_posterior_coverage_end_to_end_prepared(synthetic_run, hand_conversion):
    """20 replicates end to end: prepare_isothermal, then fit_isotherm with its
    default options."""
    prep = pytest.importorskip("kinetics.prep")
    if not hasattr(prep, "prepare_isothermal"):
        pytest.skip("kinetics.prep.prepare_isothermal not available yet")
    cov = _coverage(_study(synthetic_run, hand_conversion, 20, prepared=True))
    print(f"\n95 % interval coverage over 20 replicates (prepare_isothermal, defaults): {cov}")
    for q, c in cov.items():
        assert 0.8 <= c <= 1.0, f"coverage of {q}: {c:.3f} ({cov})"
