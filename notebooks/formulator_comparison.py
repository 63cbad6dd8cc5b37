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
# # The formulator's comparison
#
# **All data in this notebook are invented.** The grade "PX-40" and the nucleating additives
# "N-A" and "N-B" do not exist; crystkin's demo (`kinetics.demo`) generates their runs from the
# package's own models plus noise. Nothing here describes a real material.
#
# The question: does an additive make the grade crystallize faster, by how much, and how sure
# are we? Every formulation is compared with the neat grade, condition by condition, with the
# run-to-run scatter of repeated runs taken into account.

# %%
# %matplotlib inline
import tempfile
import warnings
from pathlib import Path

from kinetics.analyses.compare import compare_formulations
from kinetics.analyses.isothermal import analyse_isotherms
from kinetics.demo import write_demo_study
from kinetics.errors import DataQualityWarning
from kinetics.io import read_study
from kinetics.prep.cooling import prepare_cooling
from kinetics.report.compare_figures import comparison_figures
from kinetics.report.format import format_table

# %% [markdown]
# ## 1. The (invented) screening study

# %%
folder = Path(tempfile.mkdtemp(prefix="crystkin-formulator-"))
study = read_study(write_demo_study(folder, seed=0, quick=True))
print(study.name)
print("formulations:", study.groups)

# %% [markdown]
# ## 2. Half-times of the isothermal holds
#
# For speed this notebook takes each run's least-squares fit of the heat-flow signal with
# draws from its covariance (`sample=False`); leave that option out for the full posterior
# (a few seconds per run). Either way the half-time draws of each run carry its uncertainty
# into the comparison.

# %%
with warnings.catch_warnings():
    warnings.simplefilter("ignore", DataQualityWarning)
    batch = analyse_isotherms(study.runs(kind="isothermal"), seed=0, sample=False)
    cooling = [(t, prepare_cooling(t)) for t in study.runs(kind="cooling")]
format_table(batch.table(), columns=["run_id", "group", "T_c_degC", "n", "t_half_s",
                                     "method"])

# %% [markdown]
# ## 3. The comparison
#
# Half-time ratios per hold temperature and shifts of the cooling peak per rate, each with its
# probability of direction. The neat grade is the reference.

# %%
result = compare_formulations(isothermal_fits=batch, cooling_peaks=cooling,
                              reference="PX-40", seed=0)
for verdict in result.verdicts:
    print(verdict, end="\n\n")

# %%
tables = result.tables()
format_table(tables["compare_half_time"],
             columns=["group", "T_c_degC", "t_half_ratio", "p_faster", "finding"])

# %%
format_table(tables["compare_cooling"])

# %%
format_table(tables["run_to_run_scatter"])

# %% [markdown]
# ## 4. Figures

# %%
figs = comparison_figures(result)
figs["half_time_ratio"]

# %%
figs["cooling_shift"]

# %% [markdown]
# Any warnings that limit the comparison (for example conditions measured only once):

# %%
for w in result.warnings:
    print("-", w)
