"""The bound ladder on random small networks (hypothesis).

Sources: exact optimum <= Lagrangian minimum <= affine ALP <= DLP (Adelman 2007, Operations Research
55(4):647-661, Proposition 1 [number from memory]: ALP <= DLP; Tong & Topaloglu 2014 and
Kunnumkal & Talluri 2016: LR minimum = piecewise-linear ALP <= affine ALP, since affine functions
are piecewise linear). The exact optimum comes from tests/instances.brute_force_values; the
information-relaxation bound with Lagrangian penalty is at most the penalty's LR bound on every
path (rmkit.methods.ir) and its mean lies above the optimum within 3 standard errors (Brown,
Smith & Sun 2010, weak duality).
"""

from __future__ import annotations

import warnings

import numpy as np
from hypothesis import given, settings

from rmkit import get_solver
from tests.instances import brute_force_values
from tests.properties.test_dp_properties import small_networks

TOL = 1e-7


def _value(method, net, dem, **settings_):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return get_solver(method, **settings_).solve(net, dem, seed=0)


@settings(max_examples=15)
@given(small_networks())
def test_exact_le_lr_lp_le_alp_le_dlp(problem):
    net, dem = problem
    exact = brute_force_values(net, dem)[0][tuple(int(c) for c in net.capacities)]
    lr_lp = _value("lr-lp", net, dem).value
    alp = _value("alp", net, dem).value
    dlp = _value("dlp", net, dem).value
    scale = TOL * max(1.0, abs(dlp))
    assert exact <= lr_lp + scale
    assert lr_lp <= alp + scale
    assert alp <= dlp + scale


@settings(max_examples=10)
@given(small_networks())
def test_information_relaxation_between_exact_and_lr(problem):
    net, dem = problem
    exact = brute_force_values(net, dem)[0][tuple(int(c) for c in net.capacities)]
    res = _value("ir", net, dem, samples=200)
    assert exact <= res.value + 3 * res.stderr + TOL * max(1.0, exact)
    assert np.all(res.payload["path_values"] <= res.payload["lr_value"] + TOL * max(1.0, exact))
