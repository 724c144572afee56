"""Several policies on the same request streams, compared in pairs (common random numbers).

Every policy meets the same customers (:meth:`DemandModel.sample_arrivals` with one seed), so
the difference of two policies' revenues is measured path by path: its standard error is the
paired one, usually far smaller than the unpaired (both are reported). With an upper bound or
the optimum, each policy's gap is reported with an interval that combines the policy's and the
bound's sampling errors. The engine is :func:`rmkit.workflows.simulate.replay`.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from rmkit._version import __version__
from rmkit.errors import InputError
from rmkit.model.demand import DemandModel
from rmkit.model.network import Network
from rmkit.workflows.policies import make_policy
from rmkit.workflows.simulate import DEFAULT_MAX_BYTES, check_run, path_dataset, replay
from rmkit.workflows.stats import CONFIDENCE, paired_differences


def _labelled(policies: Sequence[Any] | Mapping[str, Any]) -> list[tuple[str | None, Any]]:
    if isinstance(policies, Mapping):
        return [(str(k), v) for k, v in policies.items()]
    if isinstance(policies, (str, bytes)):
        raise InputError("policies: give a list of policies (two or more), not one name")
    return [(None, p) for p in policies]


def _bound_value(bound: Any, network: Network, demand: DemandModel, seed: int
                 ) -> tuple[float, float, str]:
    """(value, standard error, source) of the upper bound or optimum to measure gaps against."""
    from rmkit.methods.base import get_solver
    from rmkit.results import SolveResult

    if isinstance(bound, str):
        solver = get_solver(bound)
        if not (solver.tags.exact or solver.tags.upper_bound):
            raise InputError(f"bound: {bound!r} is a heuristic, not an upper bound or optimum")
        bound = solver.solve(network, demand, seed=seed)
    if isinstance(bound, SolveResult):
        se = bound.stderr
        return bound.value, 0.0 if se is None else float(se), bound.method
    try:
        value = float(bound)
    except (TypeError, ValueError):
        value = math.nan
    if not math.isfinite(value):
        raise InputError(f"bound: must be a finite number, a method name or a result, got {bound!r}")
    return value, 0.0, "given"


def compare_policies(
    network: Network,
    demand: DemandModel,
    policies: Sequence[Any] | Mapping[str, Any],
    *,
    paths: int,
    seed: int,
    resolve: int = 0,
    resolve_every_sale: bool = False,
    params: Mapping[str, Mapping[str, Any]] | None = None,
    bound: Any = None,
    max_bytes: int = DEFAULT_MAX_BYTES,
):
    """Simulate two or more policies on the same request streams and compare them in pairs.

    Parameters
    ----------
    policies
        A list of policies (as for :func:`simulate`; labelled by method name) or a mapping
        label -> policy.
    params
        label -> settings, for policies given by name.
    bound
        Optional upper bound or optimum for the gaps: a number, a method name (``"exact"``,
        ``"lr"``, ``"dlp"``, solved from the start) or a result.

    Returns
    -------
    xarray.Dataset
        Dims ``policy``, ``versus`` (the same labels), ``path``, ``product``, ``leg``: per-path
        ``revenue`` and counts by policy, the summary by policy, and for every pair
        ``difference_mean`` (policy minus versus), its paired ``difference_stderr`` and 95%
        interval ``difference_ci_low`` / ``difference_ci_high``, and the unpaired
        ``difference_stderr_unpaired`` for contrast. With a bound: ``bound``, ``gap`` (bound minus
        mean revenue), ``gap_percent`` and the gap's interval.
    """
    import xarray as xr

    from rmkit import schema

    items = _labelled(policies)
    if len(items) < 2:
        raise InputError(f"policies: compare needs two or more policies, got {len(items)}")
    check_run(network, demand, paths, seed, resolve, max_bytes)
    params = dict(params or {})
    sources = []
    for label, spec in items:
        key = label if label is not None else (spec if isinstance(spec, str) else None)
        source = make_policy(spec, dict(params.get(key, {})) if key is not None else None)
        if label is not None:
            source.label = label
        sources.append(source)
    labels = [s.label for s in sources]
    if len(set(labels)) != len(labels):
        raise InputError(f"policies: labels must be unique, got {labels}; pass a mapping")
    unknown = sorted(set(params) - set(labels))
    if unknown:
        raise InputError(f"params: no policy labelled {unknown[0]!r}; labels: {', '.join(labels)}")
    arrivals = demand.sample_arrivals(int(paths), int(seed))
    outcomes = [
        replay(network, demand, s, arrivals, seed=int(seed), resolve=int(resolve),
               resolve_every_sale=resolve_every_sale)
        for s in sources
    ]
    per_policy = [path_dataset(o, network, demand) for o in outcomes]
    ds = xr.concat(per_policy, dim="policy", join="exact")
    ds = ds.assign_coords(policy=np.array(labels, dtype=object))
    lead = ("policy",)
    ds["control"] = schema.variable("control", np.array([o.control for o in outcomes],
                                                        dtype=object), lead)
    ds["parameters"] = schema.variable("parameters", np.array(
        [json.dumps(o.parameters, sort_keys=True, default=str) for o in outcomes], dtype=object),
        lead)
    ds["solves"] = schema.variable("solves", np.array([o.solves for o in outcomes], np.int64), lead)
    ds["seconds"] = schema.variable("seconds", np.array([o.seconds for o in outcomes]), lead)
    _add_differences(ds, np.stack([o.revenue for o in outcomes]), labels)
    if bound is not None:
        _add_gaps(ds, *_bound_value(bound, network, demand, int(seed)))
    ds.attrs.update(
        {
            "policies": json.dumps(labels),
            "seed": int(seed),
            "paths": int(paths),
            "resolves": int(resolve),
            "resolve_every_sale": int(bool(resolve_every_sale)),
            "network": network.name,
            "confidence": CONFIDENCE,
            "rmkit_version": __version__,
        }
    )
    return ds


def _add_differences(ds, revenue: np.ndarray, labels: list[str]) -> None:
    from rmkit import schema

    d = paired_differences(revenue)
    lead = ("policy", "versus")
    ds.coords["versus"] = np.array(labels, dtype=object)
    for name, values in (("difference_mean", d.mean), ("difference_stderr", d.stderr),
                         ("difference_stderr_unpaired", d.stderr_unpaired),
                         ("difference_ci_low", d.ci_low), ("difference_ci_high", d.ci_high)):
        ds[name] = schema.variable(name, values, lead)


def _add_gaps(ds, value: float, stderr: float, source: str) -> None:
    from scipy.stats import norm

    from rmkit import schema

    mean = ds["revenue_mean"].values
    se = np.sqrt(ds["revenue_stderr"].values ** 2 + stderr**2)
    z = float(norm.ppf(0.5 + CONFIDENCE / 2))
    gap = value - mean
    lead = ("policy",)
    ds["bound"] = schema.variable("bound", value, source=source)
    ds["bound_stderr"] = schema.variable("bound_stderr", stderr)
    ds["gap"] = schema.variable("gap", gap, lead)
    ds["gap_percent"] = schema.variable(
        "gap_percent", 100.0 * gap / value if value else np.full_like(gap, np.nan), lead)
    ds["gap_ci_low"] = schema.variable("gap_ci_low", gap - z * se, lead)
    ds["gap_ci_high"] = schema.variable("gap_ci_high", gap + z * se, lead)
