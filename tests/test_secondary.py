"""Secondary crystallization: the data choose between plain and two-stage Avrami.

Runs here are invented: generated from the plain Avrami model (kinetics.synthetic) or
from the two-stage parallel Avrami model of Velisaris & Seferis (1986; from memory),
with white noise of 1 % of the peak heat flow.
"""

from __future__ import annotations

import numpy as np
import pytest

from kinetics.analyses.secondary import compare_secondary, secondary_table
from kinetics.dataset import RunInfo, Trace
from kinetics.errors import CrystkinInputError
from kinetics.models.avrami import avrami_k_from_half_time
from kinetics.models.growth import two_stage_cell_rate
from kinetics.synthetic import synthetic_isotherm

TRUE = {"w2": 0.25, "n1": 2.5, "t_half1": 120.0, "n2": 1.0, "t_half2": 600.0, "t0": 30.0}


def two_stage_trace(seed=5, run_id="two-stage"):
    """Invented isothermal run whose conversion is two parallel Avrami stages."""
    dt = 0.5
    t = np.arange(0, 2400, dt)
    edges = np.concatenate(([t[0] - dt / 2], t[:-1] + dt / 2, [t[-1] + dt / 2]))
    p = TRUE
    rate = two_stage_cell_rate(edges, p["w2"], p["n1"], avrami_k_from_half_time(p["n1"],
                               p["t_half1"]), p["n2"], avrami_k_from_half_time(p["n2"],
                               p["t_half2"]), p["t0"])
    mass, dh = 5e-6, 90e3
    rng = np.random.default_rng(seed)
    q = mass * dh * rate
    q = q + rng.normal(0, 0.01 * q.max(), len(q))
    T = 400.0 + rng.normal(0, 0.005, len(t))
    info = RunInfo(run_id, "isothermal", temperature=400.0, mass=mass, exotherm="up",
                   group="invented", source=f"invented:{run_id}")
    return Trace(info, t, T, q)


def test_two_stage_data_are_classified_two_stage():
    res = compare_secondary(two_stage_trace(), sample=False, seed=1)
    assert res.chosen == "two stages", res.criterion
    row = res.row()
    assert row["w2_lo95"] <= TRUE["w2"] <= row["w2_hi95"]
    # every parameter within its 95 % interval widened by half its width (about 3 SD)
    for name, value in (("n1", TRUE["n1"]), ("t_half1_s", TRUE["t_half1"]),
                        ("n2", TRUE["n2"]), ("t_half2_s", TRUE["t_half2"])):
        lo, hi = row[f"{name}_lo95"], row[f"{name}_hi95"]
        assert lo - 0.5 * (hi - lo) <= value <= hi + 0.5 * (hi - lo), name
    assert row["delta_bic_one_minus_two"] > 10
    assert res.fitted().shape[1] == 4


@pytest.mark.parametrize("seed", [3, 4])
def test_plain_avrami_data_are_classified_one_stage(seed):
    tr, _ = synthetic_isotherm(n=2.5, t_half=120.0, t0=30.0, temperature=400.0, noise=0.01,
                               seed=seed)
    res = compare_secondary(tr, sample=False, seed=1)
    assert res.chosen == "one stage", res.criterion
    assert res.row()["t_half_plain_s"] == pytest.approx(120.0, rel=0.03)


def test_posterior_row_and_table():
    res = compare_secondary(two_stage_trace(seed=6, run_id="b"), seed=2,
                            sampler_options={"max_steps": 1000, "min_steps": 500})
    assert res.posterior is not None
    row = res.row()
    assert row["method"] == "posterior"
    assert row["w2_lo95"] <= TRUE["w2"] <= row["w2_hi95"]
    tab = secondary_table([res])
    assert {"model_chosen", "w2", "w2_lo95", "w2_hi95", "t_half_total_s"} <= set(tab.columns)


def test_not_an_isotherm():
    tr = two_stage_trace()
    heating = Trace(RunInfo("h", "heating", rate=0.1), tr.time, tr.temperature, tr.heat_flow)
    with pytest.raises(CrystkinInputError, match="isothermal"):
        compare_secondary(heating)
