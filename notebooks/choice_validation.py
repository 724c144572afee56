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
# # What ignoring customer choice costs, on a small network
#
# Customers who choose among the products on offer (multinomial logit segments, Talluri & van
# Ryzin 2004, ch. 7) buy down when a cheap fare is open and may buy up when it is closed. A
# method built for independent demand cannot see this. Here both kinds of method run on the
# same choice scenario and are measured against the exact optimum of the choice DP:
#
# * **choice methods**: the choice-based deterministic LP (`cdlp`: its leg duals as static bid
#   prices, and `cdlp-sets`: its offer sets in proportion to its primal; Gallego et al. 2004,
#   Liu & van Ryzin 2008) and the choice DP decomposition (`cdpd`, Liu & van Ryzin 2008, sec. 4);
# * **independent-demand methods through the view** (`dlp:independent`,
#   `emsrb:independent`, `dpd:independent`): each product's demand is taken to be its sales
#   when every product is offered (the view's `all_offered` approximation), the method solves
#   that independent model, and its control is simulated against the real, choosing customers.
#   Their rows are labelled "assumes independent demand".
#
# Every policy meets the same customers (common random numbers), so the paired differences are
# sharper than the separate confidence intervals. The last section re-estimates the
# independent-demand forecast from the sales each policy observes, round after round: the
# spiral-down effect (Cooper, Homem-de-Mello & Kleywegt 2006).
#
# > **Caution.** Every figure here is a model estimate under the stated demand model (MNL segments
# > with known arrival rates and weights) and a finite simulation sample. Validate the demand
# > model and the methods on your own data before using them in production.

# %%
import os

import numpy as np
import pandas as pd

import rmkit
from rmkit.cli.demo import example_path
from rmkit.methods.independent_view import independent_demand
from rmkit.model.families import generate
from rmkit.model.independent import IndependentDemand
from rmkit.model.scenario import load_scenario
from rmkit.workflows.compare import compare
from rmkit.workflows.ranking import ranked

# %% tags=["parameters"]
# Size of the run: "full" for the study (the invented example examples/tallowmere-choice.toml),
# "small" for the automated check of this notebook (set RMKIT_NOTEBOOK_SIZE=small: a generated
# 2-spoke choice network over 60 periods).
SIZE = os.environ.get("RMKIT_NOTEBOOK_SIZE", "full")
PATHS = 2000 if SIZE == "full" else 200
ROUNDS = 6 if SIZE == "full" else 3  # re-estimations of the spiral-down section
SEED = 20261201
CHOICE = ["exact", "cdlp", "cdlp-sets", "cdpd"]
VIEWS = ["dlp:independent", "emsrb:independent", "dpd:independent"]

# %%
if SIZE == "full":
    scenario = load_scenario(example_path().with_name("tallowmere-choice.toml"))
else:
    scenario = generate("hub-spoke-choice", spokes=2, alpha=1.2, periods=60, seed=1)
net, dem = scenario.network, scenario.demand
print(f"{scenario.name}: {net.n_legs} legs, {net.n_products} products, {dem.n_segments} "
      f"segments, {dem.n_periods} periods, {net.state_space_size:,} states of the exact DP")

# %% [markdown]
# ## Every method on the same customers

# %%
ds = compare(net, dem, methods=CHOICE + VIEWS, paths=PATHS, seed=SEED, scenario=scenario.name)
rows = {r["method"]: r for r in ranked(ds)}
optimum = ds.attrs["reference_value"]
table = pd.DataFrame([
    {"method": r["method"], "kind": r["kind"], "label": r["label"],
     "value (DP or bound)": r["value"] if r["kind"] != "heuristic" else None,
     "revenue": r["revenue_mean"], "std. error": r["revenue_stderr"],
     "gap to optimum %": r["gap_percent"]}
    for r in ranked(ds)]).set_index("method")
print(f"optimum (exact choice DP): {optimum:,.1f}")
table.round(2)

# %% [markdown]
# ## Sanity checks of the comparison itself
#
# CDLP is an upper bound on the optimum; the exact policy's simulated mean must agree with the
# DP value within sampling noise, and no policy may beat the optimum beyond it.

# %%
assert ds.attrs["reference_kind"] == "optimum"
assert rows["cdlp"]["value"] >= optimum * (1 - 1e-9)
exact = rows["exact"]
assert abs(exact["revenue_mean"] - optimum) <= 3 * exact["revenue_stderr"]
for r in rows.values():
    assert r["status"] == "ran" and r["check"] == "ok", r["method"]
    assert r["revenue_mean"] <= optimum + 3 * r["revenue_stderr"], r["method"]
print("checks passed: CDLP >= exact >= every simulated mean - 3 SE; exact policy ~ V(c)")

# %% [markdown]
# ## What ignoring choice costs: paired differences
#
# Each independent-demand policy against the choice methods and the optimal policy, on the same
# customers (mean difference per departure with its 95% interval; negative means the view's
# policy earns less).

# %%
revenue = {m: ds["revenue"].sel({"method": m}).values for m in ds.method.values.tolist()}


def paired(a, b):
    d = revenue[a] - revenue[b]
    half = 1.96 * d.std(ddof=1) / np.sqrt(d.size)
    return {"policy": a, "versus": b, "difference": d.mean(), "95% half-width": half,
            "% of optimum": 100 * d.mean() / optimum}


pairs = pd.DataFrame([paired(v, c) for v in VIEWS for c in ("exact", "cdpd", "cdlp-sets")])
pairs.round(2)

# %% [markdown]
# ## Where the revenue goes: sales by fare class
#
# Buy-down shows in the sales mix: a policy that keeps the cheap fares open sells them to
# customers who would have paid more.

# %%
sims = rmkit.compare_policies(net, dem, CHOICE + VIEWS, paths=PATHS, seed=SEED)
classes = sorted({p.fare_class or "-" for p in net.products})
mix = pd.DataFrame(
    {c: sims["accepted"].values[:, :, [j for j, p in enumerate(net.products)
                                       if (p.fare_class or "-") == c]].sum(axis=2).mean(axis=1)
     for c in classes},
    index=sims.policy.values.tolist())
mix["revenue"] = sims["revenue_mean"].values
mix.round(2)

# %% [markdown]
# ## The spiral-down effect
#
# An independent-demand forecaster sees sales, not preferences. When the cheap product is open,
# customers who would pay more buy it, so the sales of the expensive product understate its
# demand; re-estimated from those sales, the forecast protects fewer seats for it, more cheap
# fares stay open, and the next round's sales understate it again (Cooper, Homem-de-Mello &
# Kleywegt 2006). Below, round 0 solves EMSR-b and DLP on the view's approximation (each
# product's sales with everything offered); each later round re-estimates every product's
# demand as its mean sales per departure under the previous round's policy (spread over the
# periods like the first forecast), solves again, and simulates the new policy on the same
# customers. Whether revenue spirals down, and how far, depends on the network and the
# segments; the table states what happened here.

# %%
base = independent_demand(dem).probabilities
rounds = []
for method in ("emsrb", "dlp"):
    forecast = base.copy()
    for k in range(ROUNDS):
        result = rmkit.get_solver(method).solve(net, IndependentDemand(forecast))
        sim = rmkit.simulate(net, dem, result, paths=PATHS, seed=SEED)
        sales = sim["accepted"].values.mean(axis=0)
        rounds.append({"method": method, "round": k, "forecast demand": forecast.sum(),
                       "revenue": float(sim["revenue_mean"]),
                       "std. error": float(sim["revenue_stderr"]),
                       "% of optimum": 100 * float(sim["revenue_mean"]) / optimum})
        # the naive re-estimate: observed sales taken as demand, same booking curve
        forecast = base * (sales / base.sum(axis=0))[None, :]
        assert forecast.sum(axis=1).max() <= 1.0 + 1e-12
spiral = pd.DataFrame(rounds).set_index(["method", "round"])
spiral.round(2)

# %%
for method in ("emsrb", "dlp"):
    first, last = spiral.loc[(method, 0)], spiral.loc[(method, ROUNDS - 1)]
    change = last["revenue"] - first["revenue"]
    se = np.hypot(first["std. error"], last["std. error"])
    print(f"{method}: revenue {first['revenue']:,.1f} in round 0, {last['revenue']:,.1f} after "
          f"{ROUNDS - 1} re-estimations ({change:+,.1f}, {change / se:+.1f} unpaired SE); "
          f"forecast demand {first['forecast demand']:.1f} -> {last['forecast demand']:.1f}; "
          f"the choice decomposition earns {rows['cdpd']['revenue_mean']:,.1f}, the optimum "
          f"{optimum:,.1f}")

# %% [markdown]
# ## Reading the results
#
# * The views' values are not bounds: a bound on the independent approximation says nothing
#   about the choice problem, which is why their `kind` is heuristic and their rows are
#   labelled "assumes independent demand".
# * The all-offered approximation already counts buy-down as demand for the cheap products, so
#   independent-demand methods protect too few seats for the expensive ones; the paired
#   differences above measure what that costs against the choice methods on the same customers.
# * Re-estimating from sales can make it worse (the spiral down) or, on networks where the
#   first forecast over-states total demand, move the other way: the re-estimate drops the
#   customers who left without buying. Either way the forecast learns sales under its own
#   policy, never the preferences, and stays away from what the choice methods earn.
