"""One suite every registered equilibrium method must pass (``sorted(congest.METHODS)``).

Closed forms: Pigou (1920) as in Roughgarden & Tardos (2002); Braess (1968) as in Braess,
Nagurney & Wakolbinger (2005), Transportation Science 39(4); the two-route exercise
t1 = 8 + x1, t2 = 1 + 2 x2 (from memory; solved by hand in test_closed_forms.py).

Flow tolerances follow from the gap a method reports. With linear link costs the
objective's Bregman divergence is exact, ``D_a = k_a (x_a - x*_a)**2 / 2`` with
``k_a = t_a'`` (UE) or ``2 t_a'`` (SO), and convexity gives ``sum_a D_a <= G =
TSTT - SPTT`` (see test_reference_networks.py), hence
``|x_a - x*_a| <= sqrt(2 G / k_a)`` on every congestible link.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from numpy.testing import assert_allclose
from random_networks import random_network
from test_closed_forms import braess, pigou, two_link

import congest
from congest.equilibrium import Problem, conservation_error
from congest.exceptions import ConvergenceWarning, NetworkError, SolverError
from congest.network import Network

METHOD_NAMES = sorted(congest.METHODS)

#: Gap each method is asked for: MSA's 1/k steps converge slowly, plain FW sublinearly,
#: and conjugate FW has a slow tail below ~1e-5 on small networks.
TARGET = {"msa": 1e-3, "fw": 1e-3, "cfw": 1e-4}
DEFAULT_TARGET = 1e-8


def target(method):
    return TARGET.get(method, DEFAULT_TARGET)


@pytest.fixture(params=METHOD_NAMES)
def method(request):
    return request.param


def duality_gap(res):
    """``TSTT - SPTT`` of a result in its objective's cost."""
    grad = Problem(res.network, res.objective).gradient(res.flow)
    return max(res.relative_gap * float(res.flow @ grad), 0.0)


def assert_linear_flows(res, expected):
    """Flows within ``sqrt(2 G / k_a)`` of ``expected`` (linear costs, module docstring)."""
    net = res.network
    k = np.asarray(net.alpha) / np.asarray(net.period_capacity)
    k = k * (2.0 if res.objective == "so" else 1.0)
    congestible = k > 0
    bound = np.sqrt(2.0 * duality_gap(res) / k[congestible]) + 1e-9
    err = np.abs(res.flow - np.asarray(expected, float))[congestible]
    assert np.all(err <= bound), (err, bound)


def run(net, method, objective="ue", **kw):
    tol = kw.pop("tol", target(method))
    res = congest.solve(net, objective=objective, method=method, tol=tol, **kw)
    assert res.converged and res.relative_gap <= tol, res.message
    return res


# ------------------------------------------------------------------ closed forms
CASES = {
    # name: (network builder, objective, link flows, total cost)
    "pigou-ue": (pigou, "ue", [0.0, 1.0], 1.0),
    "pigou-so": (pigou, "so", [0.5, 0.5], 0.75),
    "braess-ue": (lambda: braess(True), "ue", [4.0, 2.0, 2.0, 4.0, 2.0], 552.0),
    "braess-so": (lambda: braess(True), "so", [3.0, 3.0, 3.0, 3.0, 0.0], 498.0),
    "braess-before-ue": (lambda: braess(False), "ue", [3.0, 3.0, 3.0, 3.0], 498.0),
    "two-route-ue": (lambda: two_link([8.0, 1.0], [1.0, 2.0], [1.0, 1.0], 4.0), "ue",
                     [1 / 3, 11 / 3], 100 / 3),
    "two-route-so": (lambda: two_link([8.0, 1.0], [1.0, 2.0], [1.0, 1.0], 4.0), "so",
                     [1.5, 2.5], 29.25),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_closed_form(method, case):
    build, objective, flows, total = CASES[case]
    res = run(build(), method, objective)
    assert_linear_flows(res, flows)
    # Total cost: every link's flow error is at most e = max_a sqrt(2 G / k_a) (in these
    # networks the one constant-cost link, Pigou's, mirrors the other link), and
    # |d(x c(x))| <= marginal cost x |dx|, with marginal costs increasing.
    net = res.network
    k = np.asarray(net.alpha) * (2.0 if objective == "so" else 1.0)
    e = np.sqrt(2.0 * duality_gap(res) / k[k > 0]).max() + 1e-12
    marginal = Problem(net, "so").gradient(np.asarray(flows, float) + e)
    assert abs(res.total_cost - total) <= marginal.sum() * e + 1e-9


# --------------------------------------------------- random network vs reference
@pytest.mark.parametrize("objective", ["ue", "so"])
def test_random_network_against_cvxpy(method, objective):
    # Reference: the convex program solved by cvxpy/Clarabel (test_cvxpy_reference.py,
    # which skips when cvxpy is not installed).
    from test_cvxpy_reference import cvxpy_flows

    net = random_network(np.random.default_rng(2002), load=2.0, fixed_cost=True)
    ref, ref_value = cvxpy_flows(net, objective)
    res = run(net, method, objective)
    big_g = duality_gap(res)
    slack = 1e-7 * abs(ref_value)  # Clarabel's own accuracy
    assert -slack <= res.objective_value - ref_value <= big_g + slack
    problem = Problem(net, objective)
    # Bregman divergence of the objective's integrand (UE: t; SO: marginal cost)
    if objective == "ue":
        m = problem.model
        d = m.integral(res.flow) - m.integral(ref) - m.time(ref) * (res.flow - ref)
    else:
        d = (problem.objective_value(res.flow) - problem.objective_value(ref)
             - problem.gradient(ref) @ (res.flow - ref))
    assert np.sum(d) <= big_g + slack


# -------------------------------------------------------------- errors and caps
def test_unknown_method_names_it():
    with pytest.raises(SolverError, match="no-such-method"):
        congest.solve(pigou(), method="no-such-method")


def _hard_network():
    # needs several iterations of every method to reach 1e-14
    return random_network(np.random.default_rng(2002), load=2.0)


def test_iteration_cap_warns_and_returns_best(method):
    net = _hard_network()
    with pytest.warns(ConvergenceWarning):
        res = congest.solve(net, objective="so", method=method, tol=1e-14, max_iter=2)
    assert not res.converged
    assert res.iterations <= 2
    assert res.relative_gap > 1e-14
    gaps = np.asarray(res.history["relative_gap"])
    assert gaps.size >= 1
    # "best": not worse than any iterate the method reported
    assert res.relative_gap <= gaps.min() * (1 + 1e-9) + 1e-15
    assert res.conservation_error < 1e-9 * net.total_demand
    assert np.all(res.flow >= 0)


def test_callback_can_stop(method):
    net = _hard_network()
    calls = []

    def stop_at_two(iteration, flow, gap):
        calls.append((iteration, np.array(flow), gap))
        return iteration >= 2

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        res = congest.solve(net, method=method, tol=1e-14, max_iter=500, callback=stop_at_two)
    assert not res.converged
    assert [c[0] for c in calls][-1] == 2
    assert res.iterations <= 3
    for _, flow, gap in calls:
        assert flow.shape == (net.n_links,) and np.isfinite(gap)
    assert "callback" in res.message


def test_unreachable_pair_names_it(method):
    # zone 3 has no incoming link
    net = Network(node_ids=[1, 2, 3], tail=[0, 2], head=[1, 1], capacity=10.0,
                  free_flow_time=1.0, zone_ids=[1, 2, 3], zone_nodes=[0, 1, 2],
                  demand=[[0, 5, 2], [0, 0, 0], [0, 1, 0]])
    with pytest.raises(NetworkError, match="1->3"):
        congest.solve(net, method=method)


# ------------------------------------------------------------------ result record
def test_result_fields_consistent(method):
    net = random_network(np.random.default_rng(7), load=2.0)
    res = run(net, method, "ue", tol=max(target(method), 1e-6))
    assert res.method == method and res.objective == "ue"
    m = net.n_links
    for arr in (res.flow, res.time, res.cost):
        assert arr.shape == (m,) and np.isfinite(arr).all()
    assert np.all(res.flow >= 0)
    assert res.od_cost.shape == (net.n_zones, net.n_zones)
    problem = Problem(net, "ue")
    assert_allclose(res.time, problem.model.time(res.flow), rtol=1e-12)
    assert_allclose(res.cost, res.time + net.constant_cost, rtol=1e-12)
    assert_allclose(res.objective_value, problem.objective_value(res.flow), rtol=1e-12)
    assert_allclose(res.average_excess_cost,
                    res.relative_gap * res.total_cost / net.total_demand, rtol=1e-9,
                    atol=1e-12)
    assert res.conservation_error == pytest.approx(conservation_error(net, res.flow))
    assert res.conservation_error < 1e-9 * net.total_demand
    lengths = {k: len(v) for k, v in res.history.items()}
    assert set(lengths) >= {"iteration", "relative_gap", "objective", "wall_time"}
    assert len(set(lengths.values())) == 1
    assert lengths["iteration"] == res.iterations
    assert np.all(np.diff(res.history["wall_time"]) >= 0)
    assert 0 < res.history["wall_time"][-1] <= res.wall_time
    assert res.relative_gap >= -1e-12
    assert isinstance(res.message, str) and res.message


# --------------------------------------------------------------------- preload
@pytest.mark.parametrize("objective,combined", [("ue", [1 / 3, 11 / 3]), ("so", [1.5, 2.5])])
@pytest.mark.parametrize("preload", [[0.0, 1.0], [0.2, 0.5]])
def test_preload_is_the_rest_of_the_combined_equilibrium(method, objective, combined,
                                                         preload):
    # Two-route exercise with demand 4 (UE (1/3, 11/3), SO (1.5, 2.5)). If part of the
    # demand is fixed on the routes (preload, no more than the combined solution puts
    # there), the remaining demand settles on the rest: x = combined - preload.
    preload = np.asarray(preload)
    rest = 4.0 - preload.sum()
    net = two_link([8.0, 1.0], [1.0, 2.0], [1.0, 1.0], demand=rest)
    res = run(net, method, objective, preload=preload)
    expected = np.asarray(combined) - preload
    assert_linear_flows(res, expected)
    # time and cost are at the total volume
    assert_allclose(res.time, [8.0, 1.0] + np.array([1.0, 2.0]) * (res.flow + preload),
                    rtol=1e-12)


# ------------------------------------------------------------------- warm start
def test_warm_start_from_a_solution_stops_at_once(method):
    # Started from flows that already meet the target, a method has nothing to do.
    net = random_network(np.random.default_rng(7), load=2.0)
    first = run(net, method, "ue")
    again = congest.solve(net, method=method, tol=target(method) * 1.01, warm_start=first)
    assert again.converged
    assert again.iterations <= 2
    assert_allclose(again.flow, first.flow, atol=1e-6 * net.total_demand)
