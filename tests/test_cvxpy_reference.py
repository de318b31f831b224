"""UE and SO link flows against a general-purpose convex solver (cvxpy with Clarabel).

The reference is the textbook convex program, written here independently of congest:

* UE (Beckmann, McGuire & Winsten 1956, "Studies in the Economics of Transportation";
  Sheffi 1985, "Urban Transportation Networks", ch. 3, from memory): minimise
  ``sum_a integral_0^{x_a} c_a(u) du``;
* SO: minimise total cost ``sum_a x_a c_a(x_a)``;

over link-node multicommodity flows by origin (one non-negative flow vector per origin,
node balance at every node). The centroid rule (a path may start or end at a zone but not
pass through one) is the constraint that commodity ``o`` uses no link leaving a zone
other than ``o``.

BPR cost ``c_a(x) = t0 (1 + alpha (x/cap)**beta) + fixed`` makes both objectives sums of
``x`` and ``(x/cap)**(beta + 1)`` terms, which cvxpy models with power cones.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from random_networks import random_network

import congest
from congest.equilibrium import DEFAULT_METHOD
from congest.network import Network

cp = pytest.importorskip("cvxpy")

SOLVER_TOL = 1e-8


def cvxpy_flows(net: Network, objective: str, *, centroid_rule=None):
    """Link flows of the UE or SO program solved by cvxpy (Clarabel)."""
    if centroid_rule is None:
        centroid_rule = not net.through_centroids
    n, m = net.n_nodes, net.n_links
    incidence = np.zeros((n, m))
    incidence[net.head, np.arange(m)] += 1.0
    incidence[net.tail, np.arange(m)] -= 1.0
    zone_nodes = np.asarray(net.zone_nodes)
    origins = np.flatnonzero(net.demand.sum(axis=1) > 0)
    flows = []
    constraints = []
    for o in origins:
        f = cp.Variable(m, nonneg=True)
        b = np.zeros(n)
        b[zone_nodes] += net.demand[o]
        b[zone_nodes[o]] -= net.demand[o].sum()
        constraints.append(incidence @ f == b)
        if centroid_rule:
            others = np.setdiff1d(zone_nodes, [zone_nodes[o]])
            leaving = np.flatnonzero(np.isin(net.tail, others))
            if leaving.size:
                constraints.append(f[leaving] == 0)
        flows.append(f)
    x = sum(flows)
    t0 = np.asarray(net.free_flow_time)
    cap = np.asarray(net.period_capacity)
    alpha, beta = np.asarray(net.alpha), np.asarray(net.beta)
    # UE integral of t0 alpha (x/c)**beta is t0 alpha c/(beta+1) (x/c)**(beta+1);
    # SO term x t0 alpha (x/c)**beta is t0 alpha c (x/c)**(beta+1).
    terms = [(t0 + net.constant_cost) @ x]
    for b in np.unique(beta):
        idx = np.flatnonzero((beta == b) & (alpha > 0))
        if idx.size == 0:
            continue
        weight = t0[idx] * alpha[idx] * cap[idx]
        if objective == "ue":
            weight = weight / (b + 1.0)
        terms.append(weight @ cp.power(cp.multiply(x[idx], 1.0 / cap[idx]), b + 1.0))
    problem = cp.Problem(cp.Minimize(sum(terms)), constraints)
    problem.solve(solver=cp.CLARABEL, tol_gap_abs=SOLVER_TOL, tol_gap_rel=SOLVER_TOL,
                  tol_feas=SOLVER_TOL, max_iter=500)
    assert problem.status == cp.OPTIMAL, problem.status
    return np.asarray(x.value), float(problem.value)


FRANK_WOLFE_FAMILY = {"msa", "fw", "cfw", "bfw"}


def tight_method():
    """``"auto"`` once it means a precise method; else a registered precise method; else bfw."""
    if DEFAULT_METHOD not in FRANK_WOLFE_FAMILY:
        return "auto"
    precise = sorted(set(congest.METHODS) - FRANK_WOLFE_FAMILY)
    return precise[0] if precise else "bfw"


def tight(net, objective):
    res = congest.solve(net, objective=objective, method=tight_method(), tol=1e-9,
                        max_iter=20_000)
    assert res.converged
    return res


def _compare(net, objective):
    ref, value = cvxpy_flows(net, objective)
    res = tight(net, objective)
    # Objective values: congest's gap 1e-9 bounds its objective error by 1e-9 x total
    # cost (convexity); Clarabel's relative tolerance is 1e-8 on the objective plus
    # residual terms (observed differences up to 2.5e-8).
    assert_allclose(res.objective_value, value, rtol=1e-7)
    # Flows: an objective error eps moves flows by about sqrt(eps / curvature), i.e. up
    # to ~1e-4 of the flow scale for eps = 1e-8 relative; observed <= 1.1e-5 x total
    # demand. A wrong cost, centroid rule or conservation would be off by whole vehicles.
    scale = net.demand.sum()
    assert_allclose(res.flow, ref, atol=5e-5 * scale, rtol=0)
    return res, ref


@pytest.mark.parametrize("seed", range(12))
def test_ue_matches_cvxpy(seed):
    rng = np.random.default_rng(1000 + seed)
    net = random_network(rng, fixed_cost=seed % 3 == 0, through_centroids=seed % 4 == 1,
                         load=2.0)
    _compare(net, "ue")


@pytest.mark.parametrize("seed", range(12))
def test_so_matches_cvxpy(seed):
    rng = np.random.default_rng(2000 + seed)
    net = random_network(rng, fixed_cost=seed % 3 == 1, through_centroids=seed % 4 == 2,
                         load=2.0)
    _compare(net, "so")


def test_centroid_rule_matters_and_is_respected():
    # A zone in the middle offers a free shortcut: 1 -> 3 -> 2 through zone 3 costs 2
    # minutes, the core route 1 -> 4 -> 2 costs 20 plus congestion. With the centroid
    # rule the shortcut is forbidden, without it most traffic takes it; both cvxpy
    # programs agree with congest, and the two answers differ.
    base = dict(node_ids=[1, 2, 3, 4], tail=[0, 2, 0, 3, 2, 3, 3, 1],
                head=[2, 1, 3, 1, 3, 2, 0, 3], capacity=50.0,
                free_flow_time=[1.0, 1.0, 10.0, 10.0, 5.0, 5.0, 10.0, 10.0],
                alpha=0.5, beta=2.0, zone_ids=[1, 2, 3], zone_nodes=[0, 1, 2],
                demand=[[0, 80, 10], [0, 0, 0], [0, 10, 0]])
    closed = Network(**base, through_centroids=False)
    opened = Network(**base, through_centroids=True)
    for objective in ("ue", "so"):
        ref_closed, _ = cvxpy_flows(closed, objective)
        ref_open, _ = cvxpy_flows(opened, objective)
        assert np.max(np.abs(ref_closed - ref_open)) > 10.0
        # zone 3 is entered only by trips ending there (10 from zone 1) and left only
        # by trips starting there (10 to zone 2)
        assert_allclose(ref_closed[0], 10.0, atol=1e-5)
        assert_allclose(ref_closed[1], 10.0, atol=1e-5)
        assert_allclose(tight(closed, objective).flow, ref_closed, atol=1e-4)
        assert_allclose(tight(opened, objective).flow, ref_open, atol=1e-4)
