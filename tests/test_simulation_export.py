"""Simulation export: crystkin-rate-model JSON and the K(T) CSV table."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from scipy.constants import R

from kinetics.analyses.predict import PARAMETER_NAMES, SimulationModel, predict_profile
from kinetics.cautions import PROCESS_CAUTION
from kinetics.errors import CrystkinInputError
from kinetics.export.simulation import (
    SCHEMA_NAME,
    read_simulation_model,
    write_simulation_model,
)
from kinetics.io.profile import constant_rate_profile

# invented parameters of a polypropylene-like melt (not measured values)
TRUE = {"n": 2.5, "ln_rate0": 20.15, "Kg": 6.0e5, "U_star": 6276.0, "T_inf": 233.0,
        "Tm0": 481.0}


def _model(n_draws=200, seed=0):
    rng = np.random.default_rng(seed)
    d = np.column_stack([np.full(n_draws, TRUE[k]) for k in PARAMETER_NAMES])
    d[:, 0] += 0.01 * rng.standard_normal(n_draws)
    d[:, 1] += 0.02 * rng.standard_normal(n_draws)
    d[:, 2] += 500.0 * rng.standard_normal(n_draws)
    params = {k: {"median": float(np.median(d[:, i])), "lo95": float(np.quantile(d[:, i], .025)),
                  "hi95": float(np.quantile(d[:, i], .975)),
                  "status": "estimated" if i < 3 else "fixed"}
              for i, k in enumerate(PARAMETER_NAMES)}
    return SimulationModel(draws=d, parameters=params,
                           validity={"temperature_K": (380.0, 405.0),
                                     "cooling_rate_K_per_s": (0.0, 40 / 60),
                                     "isothermal_temperatures_K": (393.15, 398.15),
                                     "cooling_rates_K_per_s": (5 / 60, 40 / 60)},
                           glass_transition_K=263.0, study_name="invented", seed=7,
                           crystkin_version="0.1.0")


@pytest.fixture
def exported(tmp_path):
    pj, pc = write_simulation_model(_model(), tmp_path / "model.json", tmp_path / "rate.csv",
                                    study_name="invented PX study")
    return pj, pc


def test_round_trip_gives_the_same_prediction(exported):
    pj, _ = exported
    back = read_simulation_model(pj)
    m = _model()
    assert np.array_equal(back.draws, m.draws)
    assert back.glass_transition_K == m.glass_transition_K
    assert back.validity["temperature_K"] == m.validity["temperature_K"]
    assert back.study_name == "invented PX study"
    prof = constant_rate_profile(start="200 degC", end="40 degC", rate="10 K/min")
    a = predict_profile(m, prof.time, prof.temperature, warn=False)
    b = predict_profile(back, prof.time, prof.temperature, warn=False)
    assert np.array_equal(a.X_median, b.X_median)
    pd.testing.assert_frame_equal(a.table(), b.table())
    assert a.warnings == b.warnings


def test_json_content(exported):
    pj, _ = exported
    doc = json.loads(pj.read_text(encoding="utf-8"))
    assert doc["schema"] == SCHEMA_NAME and doc["schema_version"] == 1
    assert doc["caution"] == PROCESS_CAUTION
    assert doc["software"]["name"] == "crystkin"
    assert doc["seed"] == 7
    assert set(doc["parameters"]) == set(PARAMETER_NAMES)
    assert doc["parameters"]["Kg"]["unit"] == "K^2"
    assert doc["parameters"]["U_star"]["status"] == "fixed"
    assert len(doc["posterior_draws"]["values"]) == 200
    assert doc["posterior_draws"]["columns"] == list(PARAMETER_NAMES)
    assert doc["validity"]["cooling_rate_K_per_min"] == pytest.approx([0.0, 40.0])
    assert doc["validity"]["temperature_degC"][0] == pytest.approx(380.0 - 273.15)
    assert "Nakamura" in doc["model"]["name"] and "exp" in doc["model"]["equations"]["half_time"]
    assert doc["rate_table"]["file"] == "rate.csv"


def test_csv_table_against_hand_formula(exported):
    _, pc = exported
    text = pc.read_text(encoding="utf-8")
    assert PROCESS_CAUTION in text.splitlines()[4]
    df = pd.read_csv(pc, comment="#")
    assert df["T_K"].iloc[0] == 263.0 and df["T_K"].iloc[-1] == 480.0
    assert np.allclose(df["T_degC"], df["T_K"] - 273.15)
    row = df[df["T_K"] == 390.0].iloc[0]
    # hand arithmetic at T = 390 K with the central values (the band is narrow):
    # f = 2*390/871, 1/t_half = exp(20.15 - 6276/(R*157) - 6e5/(390*91*f)), K = ln2^(1/2.5)/t_half
    f = 2 * 390.0 / (481.0 + 390.0)
    K = np.log(2) ** (1 / 2.5) * np.exp(20.15 - 6276.0 / (R * 157.0) - 6e5 / (390.0 * 91.0 * f))
    assert row["K_per_s"] == pytest.approx(K, rel=0.02)
    assert row["K_per_s_lo95"] < row["K_per_s"] < row["K_per_s_hi95"]
    assert row["t_half_s"] == pytest.approx(np.log(2) ** (1 / 2.5) / K, rel=0.03)
    assert bool(row["within_fitted_range"]) is True
    assert not df[df["T_K"] == 300.0]["within_fitted_range"].iloc[0]


def test_custom_grid(tmp_path):
    grid = np.array([380.0, 390.0, 400.0])
    _, pc = write_simulation_model(_model(), tmp_path / "m.json", tmp_path / "k.csv",
                                   temperature_grid=grid)
    assert list(pd.read_csv(pc, comment="#")["T_K"]) == [380.0, 390.0, 400.0]


def _rewrite(pj, change):
    doc = json.loads(pj.read_text(encoding="utf-8"))
    change(doc)
    pj.write_text(json.dumps(doc), encoding="utf-8")
    return pj


def test_malformed_json(exported):
    pj, _ = exported
    pj.write_text('{"schema": "crystkin-rate-model",\n "schema_version": 1,,}', encoding="utf-8")
    with pytest.raises(CrystkinInputError, match=r"model.json: not valid JSON at line 2"):
        read_simulation_model(pj)


def test_wrong_schema_and_version(exported):
    pj, _ = exported
    _rewrite(pj, lambda d: d.update(schema_version=2))
    with pytest.raises(CrystkinInputError,
                       match=r"schema version 2 cannot be read by this crystkin .*reads "
                             r"crystkin-rate-model version 1"):
        read_simulation_model(pj)
    _rewrite(pj, lambda d: d.update(schema="some-material-card"))
    with pytest.raises(CrystkinInputError, match="not a crystkin rate-model file"):
        read_simulation_model(pj)


def test_missing_parameter(exported):
    pj, _ = exported
    _rewrite(pj, lambda d: d["parameters"].pop("Kg"))
    with pytest.raises(CrystkinInputError, match=r"missing parameter 'Kg'.*K\^2"):
        read_simulation_model(pj)


def test_missing_draw_column_and_bad_rows(exported):
    pj, _ = exported

    def drop_col(d):
        d["posterior_draws"]["columns"] = d["posterior_draws"]["columns"][:-1]
        d["posterior_draws"]["values"] = [r[:-1] for r in d["posterior_draws"]["values"]]

    _rewrite(pj, drop_col)
    with pytest.raises(CrystkinInputError, match="lacks the column.*Tm0"):
        read_simulation_model(pj)


def test_non_finite_draw(exported):
    pj, _ = exported
    _rewrite(pj, lambda d: d["posterior_draws"]["values"][3].__setitem__(1, "x"))
    with pytest.raises(CrystkinInputError, match="values row 4 must be a finite number"):
        read_simulation_model(pj)


def test_unit_mismatch(exported):
    pj, _ = exported
    _rewrite(pj, lambda d: d["parameters"]["U_star"].update(unit="cal/mol"))
    with pytest.raises(CrystkinInputError, match="'U_star' has unit 'cal/mol'"):
        read_simulation_model(pj)


def test_missing_file_and_bad_outputs(tmp_path):
    with pytest.raises(CrystkinInputError, match="model file not found"):
        read_simulation_model(tmp_path / "none.json")
    with pytest.raises(CrystkinInputError, match="must end with .csv"):
        write_simulation_model(_model(), tmp_path / "m.json", tmp_path / "k.txt")
    with pytest.raises(CrystkinInputError, match="does not exist"):
        write_simulation_model(_model(), tmp_path / "no" / "m.json", tmp_path / "k.csv")
    assert not list(tmp_path.iterdir())
