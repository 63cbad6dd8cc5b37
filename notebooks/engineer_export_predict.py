# ---
# jupyter:
#   jupytext:
#     text_representation:
#       extension: .py
#       format_name: percent
#   kernelspec:
#     display_name: Python 3
#     language: python
#     name: python3
# ---

# %% [markdown]
# # The engineer's export and prediction
#
# **All data in this notebook are invented.** crystkin's demo (`kinetics.demo`) generates the
# runs of an invented grade "PX-40" from the package's own models plus noise; nothing here
# describes a real material or a real process.
#
# The job: one rate function K(T) fitted to isothermal holds and cooling scans together,
# exported for a simulation, read back, and applied to a cooling profile to estimate when the
# part reaches a target crystallinity.

# %%
# %matplotlib inline
import tempfile
import warnings
from pathlib import Path

from kinetics.analyses.global_rate import fit_global_rate
from kinetics.analyses.predict import predict_from_profile
from kinetics.demo import write_demo_study
from kinetics.errors import DataQualityWarning
from kinetics.export.simulation import read_simulation_model, write_simulation_model
from kinetics.io import read_study
from kinetics.io.profile import constant_rate_profile
from kinetics.prep import prepare_isothermal
from kinetics.prep.cooling import prepare_cooling
from kinetics.report.figures_growth import (
    global_fit_figure,
    half_time_law_figure,
    prediction_figure,
)
from kinetics.report.format import format_table

# %% [markdown]
# ## 1. The (invented) runs of one grade

# %%
folder = Path(tempfile.mkdtemp(prefix="crystkin-engineer-"))
study = read_study(write_demo_study(folder, seed=0, quick=True))
with warnings.catch_warnings():
    warnings.simplefilter("ignore", DataQualityWarning)
    holds = [(t, prepare_isothermal(t)) for t in study.runs(kind="isothermal", group="PX-40")]
    scans = [(t, prepare_cooling(t)) for t in study.runs(kind="cooling", group="PX-40")]
print([t.run_id for t, _ in holds + scans])

# %% [markdown]
# ## 2. One K(T) for all runs
#
# Nakamura's model with a Hoffman-Lauritzen half-time law, fitted to the heat-flow signals of
# all runs at once. Tm0 and Tg come from the study file (invented values), T_inf = Tg - 30 K.
# One cooling scan is held back and scored against the prediction. Short chains keep the
# notebook fast.

# %%
held_back = scans[-1][0].run_id
fit = fit_global_rate(holds, scans, Tm0=study.settings["tm0"],
                      T_inf=study.settings["tg"] - 30.0, hold_out=[held_back], seed=0,
                      max_points_per_run=150,
                      sampler_options={"max_steps": 400, "min_steps": 200, "check_every": 100})
format_table(fit.table())

# %%
for s in fit.statements:
    print(s)
format_table(fit.checks)

# %%
half_time_law_figure(fit)

# %%
global_fit_figure(fit)

# %% [markdown]
# ## 3. Export for a simulation, and read it back
#
# A JSON model file (equation, parameters with units and intervals, posterior draws, validity
# range, caution) and a K(T) table on a temperature grid.

# %%
model_json, table_csv = write_simulation_model(fit, folder / "px40_rate_model.json",
                                               folder / "px40_rate_model.csv",
                                               study_name=study.name)
model = read_simulation_model(model_json)
format_table(model.summary())

# %% [markdown]
# ## 4. Prediction on a cooling profile
#
# A part cooled from 200 °C to 40 °C at 30 K/min (an invented profile). The times to 50 %
# and 90 % relative crystallinity come with their 95 % intervals. 30 K/min is faster than any
# fitted run, so the prediction says that it extrapolates; and it repeats the caution that
# these are estimates to validate on the real process.

# %%
profile = constant_rate_profile(start="200 degC", end="40 degC", rate="30 K/min")
prediction = predict_from_profile(model, profile, targets=(0.5, 0.9))
print(prediction.text())

# %%
prediction_figure(prediction)
