"""The certified gap: a policy's gap to the tightest bound with a 95% interval that carries a
sampled bound's error too (rmkit.workflows.stats.gap_estimate, compare's gap columns)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from rmkit.workflows.stats import gap_estimate, t_quantile
from tests.instances import random_problem, small_problem


def _row(ds, name):
    return ds.isel(method=ds.method.values.tolist().index(name))


def test_deterministic_bound_interval_is_the_revenue_interval():
    rng = np.random.default_rng(0)
    r = rng.normal(100.0, 10.0, 400)
    g = gap_estimate(r, 120.0)
    se = r.std(ddof=1) / math.sqrt(r.size)
    assert g.pairing == "deterministic bound"
    assert g.gap == pytest.approx(120.0 - r.mean())
    assert g.stderr == pytest.approx(se)
    assert g.ci_high - g.gap == pytest.approx(t_quantile(r.size) * se)
    assert g.percent == pytest.approx(100 * (120.0 - r.mean()) / 120.0)
    assert g.percent_ci_low == pytest.approx(100 * (120.0 - (r.mean() + t_quantile(400) * se)) / 120)


def test_independent_sampled_bound_adds_variances():
    r = np.random.default_rng(1).normal(100.0, 10.0, 300)
    g = gap_estimate(r, 120.0, bound_stderr=2.0)
    assert g.pairing == "independent"
    assert g.stderr == pytest.approx(math.sqrt(r.var(ddof=1) / r.size + 4.0))


def test_paired_bound_on_the_same_streams_equals_the_paired_difference():
    rng = np.random.default_rng(2)
    demand = rng.normal(0.0, 10.0, 500)
    r = 100.0 + demand + rng.normal(0.0, 1.0, 500)
    b = 110.0 + demand + rng.normal(0.0, 1.0, 500)
    g = gap_estimate(r, float(b.mean()), bound_stderr=b.std(ddof=1) / math.sqrt(500),
                     bound_paths=b)
    d = b - r
    assert g.pairing == "paired" and g.common_paths == 500
    assert g.gap == pytest.approx(d.mean())
    assert g.stderr == pytest.approx(d.std(ddof=1) / math.sqrt(500))
    # far tighter than treating them as independent
    assert g.stderr < 0.2 * gap_estimate(r, float(b.mean()), b.std(ddof=1) / math.sqrt(500)).stderr


def test_partly_shared_paths_give_the_variance_of_a_difference_of_means():
    """K bound paths, N policy paths, the first min(K, N) shared: checked by simulation."""
    rng = np.random.default_rng(3)
    k, n, reps = 60, 40, 4000
    gaps, ses = [], []
    for _ in range(reps):
        z = rng.normal(0.0, 5.0, max(k, n))
        b = 50.0 + z[:k] + rng.normal(0.0, 1.0, k)
        r = 40.0 + z[:n] + rng.normal(0.0, 1.0, n)
        g = gap_estimate(r, float(b.mean()), bound_paths=b)
        gaps.append(g.gap)
        ses.append(g.stderr)
    assert np.std(gaps) == pytest.approx(np.sqrt(np.mean(np.square(ses))), rel=0.05)


def test_compare_with_a_deterministic_bound_as_yardstick():
    from rmkit.workflows.compare import compare
    from rmkit.workflows.ranking import ranked

    net, dem = small_problem()
    ds = compare(net, dem, methods="dlp,lr", paths=200, seed=3, with_exact=False)
    assert ds.attrs["reference_kind"] == "best bound"
    assert ds.attrs["reference_method"] == "lr"  # lr <= dlp
    assert ds.attrs["gap_pairing"] == "deterministic bound"
    row = _row(ds, "dlp")
    ref = ds.attrs["reference_value"]
    se = float(row["revenue_stderr"])
    assert float(row["gap_percent"]) == pytest.approx(100 * (ref - float(row["revenue_mean"])) / ref)
    assert float(row["gap_percent_stderr"]) == pytest.approx(100 * se / ref)
    assert float(row["gap_percent_ci_high"]) == pytest.approx(
        100 * (ref - float(row["revenue_ci_low"])) / ref)
    by_name = {r["method"]: r for r in ranked(ds)}
    assert by_name["lr"]["gap_percent_ci_low"] < by_name["lr"]["gap_percent"]


def test_compare_with_a_sampled_bound_pairs_it_on_the_common_streams():
    """ir is sampled on the simulator's streams of the same seed: its gap interval is paired,
    and tighter than the unpaired combination would be, yet wider than the policy's alone."""
    from rmkit.workflows.compare import compare
    from rmkit.workflows.stats import gap_estimate

    net, dem = random_problem(11, n_legs=2, max_capacity=4, n_products=5, n_periods=20,
                              total_probability=0.9)
    ds = compare(net, dem, methods="dlp,lr,ir", paths=300, seed=5, with_exact=False,
                 settings={"ir": {"samples": 400}})
    assert ds.attrs["reference_method"] == "ir"  # the penalised bound is the tightest here
    assert ds.attrs["gap_pairing"] == "paired on 300 common request streams"
    assert ds.attrs["reference_stderr"] > 0
    row = _row(ds, "lr")
    revenue = row["revenue"].values
    ref, ref_se = ds.attrs["reference_value"], ds.attrs["reference_stderr"]
    unpaired = gap_estimate(revenue, ref, ref_se)
    alone = gap_estimate(revenue, ref)
    width = float(row["gap_percent_ci_high"] - row["gap_percent_ci_low"])
    assert width < unpaired.percent_ci_high - unpaired.percent_ci_low
    assert float(row["gap_percent"]) == pytest.approx(unpaired.percent)
    assert float(row["gap_percent_stderr"]) > 0
    assert math.isfinite(width) and alone.percent_stderr > 0


def test_cli_prints_and_writes_the_gap_interval(tmp_path):
    import subprocess
    import sys

    out = subprocess.run(
        [sys.executable, "-m", "rmkit", "compare", "examples/tallowmere.toml", "--methods",
         "dlp,lr", "--paths", "50", "--resolve", "0", "--csv", str(tmp_path)],
        capture_output=True, text=True, cwd=str(__import__("pathlib").Path(__file__).parents[1]))
    assert out.returncode == 0, out.stderr
    text = (tmp_path / "ranking.csv").read_text()
    assert "gap % std. error" in text and "gap % 95% high" in text
