# ---
# jupyter:
#   jupytext:
#     formats: ipynb,py:percent
#     text_representation:
#       extension: .py
#       format_name: percent
#       format_version: '1.3'
#       jupytext_version: 1.19.6
#   kernelspec:
#     display_name: Python 3
#     language: python
#     name: python3
# ---

# %% [markdown]
# # Heuristics against the optimum on a small network
#
# The bundled example (the invented Lanternfly Air hub at Tallowmere: 4 legs, 12 products,
# 300 periods) is small enough for the exact network dynamic program (Talluri & van Ryzin 2004,
# section 3.1), so every method can be measured against the optimum itself rather than against a
# bound:
#
# 1. the revenue each method's booking policy earns on the same simulated requests (common
#    random numbers), as a gap to the optimal expected revenue V(c);
# 2. how far each method's bid prices are from the exact marginal seat values, weighted by how
#    often the optimal policy visits each (period, seats left) state;
# 3. what tuning a production heuristic (a multiplier on its bid prices, its fare basis) buys,
#    re-measured on fresh requests.
#
# > **Caution.** Every figure here is a model estimate under the stated demand model (independent
# > discrete-time arrivals with known probabilities) and a finite simulation sample. Validate
# > methods and settings on your own data and demand forecasts before using them in production.

# %%
import os

from rmkit.cli.demo import example_path
from rmkit.model.scenario import load_scenario
from rmkit.workflows.calibrate import calibrate, calibration_report
from rmkit.workflows.compare import compare
from rmkit.workflows.ranking import ranked
from rmkit.workflows.plots import comparison_figure

# %% tags=["parameters"]
# Size of the run: "full" for the study, "small" for the automated check of this notebook
# (set the environment variable RMKIT_NOTEBOOK_SIZE=small).
SIZE = os.environ.get("RMKIT_NOTEBOOK_SIZE", "full")
PATHS = 2000 if SIZE == "full" else 150
METHODS = None if SIZE == "full" else ["exact", "dpd", "emsrb-heuristic", "davn", "dlp"]
SEED = 20261201

# %%
scenario = load_scenario(example_path())
net, dem = scenario.network, scenario.demand
print(f"{scenario.name}: {net.n_legs} legs, {net.n_products} products, {dem.n_periods} periods, "
      f"{net.state_space_size:,} states")

# %% [markdown]
# ## Every method on the same requests

# %%
ds = compare(net, dem, methods=METHODS, paths=PATHS, seed=SEED, scenario=scenario.name)
table = ds[["kind", "revenue_mean", "revenue_stderr", "gap_percent", "bid_price_error_mean",
            "bid_price_error_max", "opportunity_cost_error_mean"]].to_dataframe()
table.sort_values("revenue_mean", ascending=False)

# %% [markdown]
# ## Sanity checks of the comparison itself
#
# The exact policy's simulated mean must agree with V(c) within sampling noise, no policy may
# beat V(c) beyond it, and the exact method's own bid-price error is zero by definition.

# %%
rows = {r["method"]: r for r in ranked(ds)}
optimum = ds.attrs["reference_value"]
exact = rows["exact"]
assert abs(exact["revenue_mean"] - optimum) <= 3 * exact["revenue_stderr"]
for r in rows.values():
    if r["revenue_mean"] is not None:
        assert r["revenue_mean"] <= optimum + 3 * r["revenue_stderr"], r["method"]
assert exact["bid_price_error_max"] == 0.0
print(f"optimum V(c) = {optimum:,.1f}; exact policy simulates to {exact['revenue_mean']:,.1f} "
      f"± {exact['revenue_stderr']:.1f}")

# %% [markdown]
# ## Where the bid prices differ
#
# Bid price of the busiest leg over the booking horizon at a few seat counts, each method against
# the exact marginal value (averaged over the states the optimal policy visits with that many
# seats left on the leg; absent where it rarely goes), and the revenue of each policy with its 95%
# confidence interval.

# %%
fig = comparison_figure(ds)
display(fig)  # noqa: F821 (the notebook's display)

# %% [markdown]
# Paired differences against the best policy: with common random numbers their standard errors
# are far smaller than those of the revenues themselves, which is what lets close methods be told
# apart.

# %%
ds[["difference_mean", "difference_stderr", "revenue_stderr"]].to_dataframe().dropna()

# %% [markdown]
# ## What tuning a heuristic buys
#
# The EMSR-b heuristic bid prices with a multiplier and a choice of fare basis, tuned on one set
# of paths and re-measured on a fresh one (another seed): only the fresh figures are an honest
# estimate, since the best of many settings on one sample flatters itself.

# %%
tuned = calibrate(net, dem, "emsrb-heuristic",
                  {"multiplier": "0.6:1.4", "fare_basis": "prorated,network"},
                  paths=PATHS // 2, seed=SEED)
report = calibration_report(tuned)
gain = report["improvement_fresh"]
print("default:", report["default"]["setting"], f"{report['default']['fresh_revenue']:,.1f}")
print("tuned:  ", report["tuned"]["setting"], f"{report['tuned']['fresh_revenue']:,.1f}")
print(f"tuned - default on fresh paths: {gain['mean']:,.1f} "
      f"(95% CI {gain['ci_low']:,.1f} .. {gain['ci_high']:,.1f})")
assert report["tuned"]["fresh_revenue"] <= optimum + 3 * report["tuned"]["fresh_stderr"]
assert gain["ci_high"] >= -3 * gain["stderr"]  # tuning never costs more than noise

# %% [markdown]
# ## Reading the results
#
# On this scenario the capacity- and time-dependent methods (DP decomposition, Lagrangian
# relaxation, the EMSR-b heuristic table) come within a fraction of a percent of the optimum,
# while static bid prices solved once at the start (DLP, RLP, PNLP) lose several percent: their
# single vector cannot follow the marginal value of a seat as it falls towards departure. Re-solving
# them during the horizon (`rmkit compare --resolve K`) narrows that gap. The figures depend on the
# demand model and the sample; rerun with your own scenarios before drawing conclusions.
