"""Properties every equilibrium must have, over many random networks (hypothesis).

* Flow conservation at every node and non-negative flows (definition of a feasible
  assignment; Sheffi 1985, "Urban Transportation Networks", ch. 3, from memory).
* Relative gap ``(TSTT - SPTT)/TSTT >= 0``: shortest paths are never dearer than the
  paths in use (common practice).
* SO total cost <= UE total cost (the SO minimises it; Beckmann, McGuire & Winsten 1956),
  up to the SO's own duality gap.
* Wardrop's first principle through link reduced costs: with ``pi_o`` the shortest-path
  distances from origin ``o``, ``r_a^o = pi_o(tail) + c_a - pi_o(head) >= 0`` and
  ``sum_o sum_a x_a^o r_a^o = TSTT - SPTT = G``; so ``sum_a x_a min_o r_a^o <= G`` for the
  link flows alone, with equality for a single origin.
* On a tree every OD pair has one route, so the equilibrium is the all-or-nothing
  loading whatever the costs.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from random_networks import random_network

import congest
from congest.equilibrium import Problem
from congest.network import Network
from congest.paths import ShortestPaths

SETTINGS = settings(max_examples=30, deadline=None, derandomize=True)
TOL = 1e-7

network_options = st.fixed_dictionaries({
    "seed": st.integers(0, 2**31 - 1),
    "through_centroids": st.booleans(),
    "fixed_cost": st.booleans(),
    "load": st.sampled_from([0.5, 1.0, 2.0, 3.0]),
    "zero_alpha": st.sampled_from([0.0, 0.2, 0.5]),
    # BPR (1964), conical (Spiess 1990) and polynomial costs
    "kinds": st.sampled_from([(0,), (0, 1, 2)]),
})


def make(options, **overrides):
    opts = dict(options, **overrides)
    rng = np.random.default_rng(opts.pop("seed"))
    return random_network(rng, **opts)


#: The default method and the bi-conjugate Frank-Wolfe (the fastest link-based one).
METHODS = ["auto", "bfw"]


def solve(net, objective, method="auto"):
    return congest.solve(net, objective=objective, method=method, tol=TOL, max_iter=20_000)


def reduced_cost_excess(net, res):
    """``sum_a x_a min_o r_a^o`` and ``G``, in the objective's link cost."""
    problem = Problem(net, res.objective)
    cost = problem.gradient(res.flow)
    sp = ShortestPaths(net)
    zone_nodes = np.asarray(net.zone_nodes)
    r_min = np.full(net.n_links, np.inf)
    for o in sp.origins:
        dist, _ = sp.tree(zone_nodes[o], cost)
        with np.errstate(invalid="ignore"):
            r = dist[net.tail] + cost - dist[net.head]
        r[~np.isfinite(dist[net.tail])] = np.inf
        if not net.through_centroids:  # origin o may not leave another zone
            others = np.setdiff1d(zone_nodes, [zone_nodes[o]])
            r[np.isin(net.tail, others)] = np.inf
        r_min = np.minimum(r_min, r)
    used = res.flow > 0
    excess = float(np.sum(res.flow[used] * r_min[used]))
    big_g = res.relative_gap * float(res.flow @ cost)
    return excess, big_g, r_min


@pytest.mark.parametrize("method", METHODS)
@SETTINGS
@given(options=network_options)
def test_feasible_and_gap_nonnegative(options, method):
    net = make(options)
    for objective in ("ue", "so"):
        res = solve(net, objective, method)
        assert res.converged
        assert np.all(res.flow >= 0)
        assert res.conservation_error <= 1e-9 * net.total_demand
        assert res.relative_gap >= -1e-12
        # SPTT from the reported OD costs is TSTT (1 - gap)
        mask = net.demand > 0
        sptt = float(np.sum(net.demand[mask] * res.od_cost[mask]))
        tstt = float(res.flow @ Problem(net, objective).gradient(res.flow))
        assert_allclose(sptt, tstt * (1 - res.relative_gap), rtol=1e-9)


@pytest.mark.parametrize("method", METHODS)
@SETTINGS
@given(options=network_options)
def test_system_optimum_costs_no_more_than_user_equilibrium(options, method):
    net = make(options)
    ue, so = solve(net, "ue", method), solve(net, "so", method)
    so_gap = so.relative_gap * float(so.flow @ Problem(net, "so").gradient(so.flow))
    assert so.total_cost <= ue.total_cost + so_gap + 1e-9 * ue.total_cost


@pytest.mark.parametrize("method", METHODS)
@SETTINGS
@given(options=network_options)
def test_used_links_lie_on_shortest_paths(options, method):
    net = make(options)
    res = solve(net, "ue", method)
    excess, big_g, r_min = reduced_cost_excess(net, res)
    assert np.all(r_min >= -1e-9 * np.abs(res.cost).max())
    # the reported gap is not understated ...
    assert excess <= big_g * (1 + 1e-9) + 1e-9
    # ... and used links are (flow-weighted) on shortest paths to the gap target
    assert excess <= TOL * res.total_cost * (1 + 1e-9) + 1e-9


@pytest.mark.parametrize("method", METHODS)
@SETTINGS
@given(options=network_options)
def test_single_origin_reduced_cost_identity(options, method):
    # With one origin the link flows are the origin's flows: sum_a x_a r_a = G exactly.
    net = make(options)
    demand = np.zeros_like(net.demand)
    demand[0] = net.demand[0]
    demand[0, 1:] += 10.0
    net = net.replace(demand=demand)
    res = solve(net, "ue", method)
    excess, big_g, _ = reduced_cost_excess(net, res)
    assert_allclose(excess, big_g, rtol=1e-6, atol=1e-9 * res.total_cost)


@pytest.mark.parametrize("method", METHODS)
@SETTINGS
@given(seed=st.integers(0, 2**31 - 1), objective=st.sampled_from(["ue", "so"]))
def test_equilibrium_on_a_tree_is_all_or_nothing(seed, objective, method):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 12))
    parent = [int(rng.integers(0, i)) for i in range(1, n)]
    tail = np.array(parent + list(range(1, n)))
    head = np.array(list(range(1, n)) + parent)
    zones = rng.choice(n, int(rng.integers(2, min(n, 5) + 1)), replace=False)
    demand = rng.uniform(1, 50, (zones.size, zones.size))
    net = Network(node_ids=np.arange(n), tail=tail, head=head,
                  capacity=rng.uniform(5, 30, tail.size),
                  free_flow_time=rng.uniform(1, 5, tail.size), zone_ids=np.arange(zones.size),
                  zone_nodes=zones, demand=demand, through_centroids=True)
    aon, _ = ShortestPaths(net).all_or_nothing(net.free_flow_time)
    res = solve(net, objective, method)
    assert_allclose(res.flow, aon, rtol=1e-12, atol=1e-9)
    assert res.relative_gap <= 1e-12
