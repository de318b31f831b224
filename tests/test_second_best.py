"""Second-best tolls on a chosen set of links, against hand-solved parallel-route cases."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from congest import METHODS, solve
from congest.exceptions import ConvergenceWarning, NetworkError, SolverError
from congest.network import Network
from congest.pricing import first_best, second_best, system_cost, toll_sensitivity

TOL = 1e-10


def parallel(const, slope, demand):
    """Parallel links 1 -> 2 with affine costs ``const + slope * x`` (capacity 1)."""
    n = len(const)
    return Network(node_ids=[1, 2], tail=[0] * n, head=[1] * n, capacity=1.0,
                   free_flow_time=const, alpha=slope, beta=1.0, cost_kind=2,
                   zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, demand], [0, 0]])


def parallel_ue(const, slope, demand):
    """UE of parallel affine links by hand: the common cost level L with
    sum_i max(0, (L - a_i) / b_i) = demand (Wardrop 1952), found by bisection.
    ``const`` may be a 2-d array (one row per toll level)."""
    a = np.atleast_2d(np.asarray(const, float))
    b = np.asarray(slope, float)[None, :]
    lo = np.full(a.shape[0], a.min()) - 1.0
    hi = np.full(a.shape[0], a.max() + demand * b.max() + 1.0)
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        load = np.maximum(0.0, (mid[:, None] - a) / b).sum(axis=1)
        lo, hi = np.where(load < demand, mid, lo), np.where(load < demand, hi, mid)
    level = 0.5 * (lo + hi)
    return np.maximum(0.0, (level[:, None] - a) / b)


def test_one_toll_reaches_so_on_two_routes():
    # two routes t1 = 8 + x1, t2 = 1 + 2 x2, demand 4: UE (1/3, 11/3), SO (1.5, 2.5)
    # (textbook exercise, from memory; by hand: 8 + 2 x1 = 1 + 4 x2 at SO). A toll of
    # 3.5 minutes on route 2 makes the SO a UE: 8 + 1.5 = 1 + 2 * 2.5 + 3.5.
    net = parallel([8.0, 1.0], [1.0, 2.0], 4.0)
    sb = second_best(net, [2], tol=TOL)
    assert_allclose(sb.first_best.so.flow, [1.5, 2.5], atol=1e-6)
    assert_allclose(sb.first_best.ue.flow, [1.0 / 3.0, 11.0 / 3.0], atol=1e-6)
    assert sb.tolls_minutes[0] == pytest.approx(3.5, abs=1e-3)
    assert sb.share_of_first_best == pytest.approx(1.0, abs=1e-6)
    assert_allclose(sb.tolled_ue.flow, [1.5, 2.5], atol=1e-3)
    assert sb.system_cost_tolled == pytest.approx(sb.system_cost_so, rel=1e-8)
    # revenue: 2.5 trips pay 3.5 minutes at 20 money/hour (the default value of time)
    assert sb.revenue_money == pytest.approx(2.5 * 3.5 / 3.0, rel=1e-3)
    assert sb.converged
    assert sb.method == "bounded"


def test_one_toll_cannot_reach_so_on_three_routes():
    # three routes t1 = x1, t2 = 1 + 2 x2, t3 = 2 + x3, demand 3, toll on route 1 only.
    # By hand: UE (2.2, 0.6, 0.2) at cost 2.2; SO (1.7, 0.6, 0.7). The toll can move
    # trips off route 1 but not choose where they go, so it recovers only part of the
    # first-best gain.
    const, slope, demand = np.array([0.0, 1.0, 2.0]), np.array([1.0, 2.0, 1.0]), 3.0
    net = parallel(const, slope, demand)
    fb = first_best(net, tol=TOL)
    assert_allclose(fb.ue.flow, [2.2, 0.6, 0.2], atol=1e-6)
    assert_allclose(fb.so.flow, [1.7, 0.6, 0.7], atol=1e-6)

    sb = second_best(net, [1], tol=TOL, first_best_result=fb)
    assert 0.0 < sb.share_of_first_best < 1.0
    # every solve from scratch: the same answer
    cold = second_best(net, [1], tol=TOL, first_best_result=fb, warm=False)
    assert cold.tolls_minutes[0] == pytest.approx(sb.tolls_minutes[0], abs=1e-3)

    # fine grid over the toll with the hand-solved UE
    grid = np.linspace(0.0, 4.0, 40_001)
    tolled_const = np.tile(const, (grid.size, 1))
    tolled_const[:, 0] += grid
    x = parallel_ue(tolled_const, slope, demand)
    cost = np.sum(x * (const + slope * x), axis=1)
    ue_cost, so_cost = cost[0], float(np.sum(fb.so.flow * (const + slope * fb.so.flow)))
    grid_share = (ue_cost - cost.min()) / (ue_cost - so_cost)
    # the search is no better than the grid's optimum (up to the solver gap) ...
    assert sb.share_of_first_best <= grid_share + 1e-7
    # ... and finds it
    assert sb.share_of_first_best == pytest.approx(grid_share, abs=1e-6)
    assert sb.tolls_minutes[0] == pytest.approx(grid[np.argmin(cost)], abs=1e-3)


def test_two_tolls_reach_so_on_three_routes():
    # tolls on routes 1 and 2 with route 3 free: only toll differences matter, and the
    # marginal-cost tolls (1.7, 1.2, 0.7) minus route 3's give (1.0, 0.5) (by hand)
    net = parallel([0.0, 1.0, 2.0], [1.0, 2.0, 1.0], 3.0)
    sb = second_best(net, [1, 2], tol=TOL, xtol=1e-6)
    assert sb.method == "powell"
    assert sb.share_of_first_best == pytest.approx(1.0, abs=1e-5)
    assert_allclose(sb.tolls_minutes, [1.0, 0.5], atol=5e-3)
    nm = second_best(net, [1, 2], tol=TOL, search="nelder-mead", xtol=1e-6,
                     first_best_result=sb.first_best)
    assert nm.share_of_first_best == pytest.approx(1.0, abs=1e-4)
    # quasi-Newton on finite-difference gradients (the objective is smooth here)
    qn = second_best(net, [1, 2], tol=TOL, search="l-bfgs-b", xtol=1e-6,
                     first_best_result=sb.first_best)
    assert qn.share_of_first_best == pytest.approx(1.0, abs=1e-4)
    assert_allclose(qn.tolls_minutes, [1.0, 0.5], atol=2e-2)


def test_group_shares_one_toll():
    # route 2 is two links in series (a bridge and its approach); a group charges both
    # the same amount, so the optimum splits the 3.5 minutes of the two-route case
    net = Network(node_ids=[1, 2, 3], tail=[0, 0, 2], head=[1, 2, 1], capacity=1.0,
                  free_flow_time=[8.0, 0.5, 0.5], alpha=[1.0, 1.0, 1.0], beta=1.0,
                  cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
                  demand=[[0, 4.0], [0, 0]], link_ids=[10, 20, 21])
    sb = second_best(net, [[20, 21]], tol=TOL)
    assert sb.group_link_ids[0].tolist() == [20, 21]
    assert sb.tolls_minutes[0] == pytest.approx(1.75, abs=1e-3)
    assert_allclose(sb.link_tolls_minutes, [0.0, 1.75, 1.75], atol=1e-3)
    assert sb.share_of_first_best == pytest.approx(1.0, abs=1e-6)


def test_bounds_in_money():
    net = parallel([8.0, 1.0], [1.0, 2.0], 4.0)
    # at most 0.5 money = 1.5 minutes at 20 money/hour: the bound binds
    sb = second_best(net, [2], bounds=(0.0, 0.5), tol=TOL)
    assert sb.tolls_money[0] == pytest.approx(0.5, abs=1e-3)
    assert sb.bounds_minutes.tolist() == [[0.0, 1.5]]
    assert 0.0 < sb.share_of_first_best < 1.0


def test_bad_requests():
    net = parallel([8.0, 1.0], [1.0, 2.0], 4.0)
    fb = first_best(net, tol=TOL)
    with pytest.raises(SolverError, match="at least one"):
        second_best(net, [], first_best_result=fb)
    with pytest.raises(SolverError, match="more than one"):
        second_best(net, [1, [1, 2]], first_best_result=fb)
    with pytest.raises(NetworkError, match="unknown link id 9"):
        second_best(net, [9], first_best_result=fb)
    with pytest.raises(SolverError, match="low <= high"):
        second_best(net, [2], bounds=(3.0, 1.0), first_best_result=fb)
    with pytest.raises(SolverError, match="Unknown method 'grid'"):
        second_best(net, [2], search="grid", first_best_result=fb)
    with pytest.raises(SolverError, match="one toll group"):
        second_best(net, [1, 2], search="bounded", first_best_result=fb)


needs_routes = pytest.mark.skipif("gp" not in METHODS,
                                  reason="needs a route-based equilibrium method")


@needs_routes
def test_toll_sensitivity_two_routes_by_hand():
    # t1 = 8 + x1, t2 = 1 + 2 x2, demand 4, toll s on route 2: UE x1 = (1 + s) / 3, so
    # dZ/ds = (8 + 2 x1 - 1 - 4 x2) / 3 = -7/3 at s = 0 (by hand)
    net = parallel([8.0, 1.0], [1.0, 2.0], 4.0)
    ue = solve(net, tol=1e-12, method="gp")
    grad, dflow = toll_sensitivity(ue, net, [np.array([1])])
    assert grad[0] == pytest.approx(-7.0 / 3.0, rel=1e-8)
    assert_allclose(dflow[:, 0], [1.0 / 3.0, -1.0 / 3.0], rtol=1e-8)


@needs_routes
def test_toll_sensitivity_matches_finite_differences():
    # central differences of the hand-checked three-route case at tolls (0.7, 0.2)
    net = parallel([0.0, 1.0, 2.0], [1.0, 2.0, 1.0], 3.0)
    groups = [np.array([0]), np.array([1])]

    def cost(tolls):
        eq = solve(net.with_tolls([tolls[0], tolls[1], 0.0]), tol=1e-13, method="gp")
        return system_cost(eq, net), eq

    at = np.array([0.7, 0.2])
    _, eq = cost(at)
    grad, _ = toll_sensitivity(eq, net, groups)
    h = 1e-5
    fd = [(cost(at + h * e)[0] - cost(at - h * e)[0]) / (2 * h) for e in np.eye(2)]
    assert_allclose(grad, fd, rtol=1e-6)


@needs_routes
def test_gradient_search_reaches_so():
    net = parallel([0.0, 1.0, 2.0], [1.0, 2.0, 1.0], 3.0)
    sb = second_best(net, [1, 2], tol=1e-12, method="gp", search="gradient", scan=False)
    assert sb.share_of_first_best == pytest.approx(1.0, abs=1e-8)
    assert_allclose(sb.tolls_minutes, [1.0, 0.5], atol=1e-4)
    # the derivative saves solves: far fewer than the derivative-free search (without
    # the coarse scan, which alone costs up to 18 solves here)
    assert sb.evaluations < 20


def test_sensitivity_needs_routes():
    net = parallel([8.0, 1.0], [1.0, 2.0], 4.0)
    ue = solve(net, tol=1e-8, method="bfw")
    with pytest.raises(SolverError, match="route flows"):
        toll_sensitivity(ue, net, [np.array([1])])


def test_wide_bounds_do_not_strand_the_search_on_the_plateau():
    # t1 = 10 + 0.2 x1 (tolled), t2 = 20 (constant), demand 100. By hand: UE puts 50 on
    # each (cost 20); SO equates marginal costs, 10 + 0.4 x1 = 20, so x1 = 25, and the
    # toll 20 - (10 + 0.2 * 25) = 5 minutes reaches it. Any toll of 10 minutes or more
    # empties link 1 and the system cost is flat (2,000 vehicle-minutes, the UE value)
    # over nearly all of a wide range, where a search's first points fall.
    net = parallel([10.0, 20.0], [0.2, 0.0], 100.0)
    wide = (0.0, 500.0 / 3.0)  # money at 20 per hour: 0 to 500 minutes
    sb = second_best(net, [1], bounds=wide, tol=TOL)
    assert sb.tolls_minutes[0] == pytest.approx(5.0, abs=1e-3)
    assert sb.share_of_first_best == pytest.approx(1.0, abs=1e-6)
    assert sb.evaluations <= 60
    # the same with the multi-group search (two groups, the second a dead end)
    net3 = parallel([10.0, 20.0, 40.0], [0.2, 0.0, 0.0], 100.0)
    sb3 = second_best(net3, [1, 3], bounds=wide, tol=TOL)
    assert sb3.tolls_minutes[0] == pytest.approx(5.0, abs=1e-2)
    assert sb3.share_of_first_best == pytest.approx(1.0, abs=1e-5)


def test_search_stopping_messages_are_plain_words():
    from congest.pricing import _search_message

    assert "line search found no decrease" in _search_message("ABNORMAL: ")
    assert "powell" in _search_message("ABNORMAL_TERMINATION_IN_LNSRCH")
    assert _search_message("Optimization terminated successfully.") == (
        "Optimization terminated successfully.")


def test_evaluation_cap_counts_solves_and_is_reported():
    # max_evals caps the equilibrium solves exactly; a search cut short says so and is
    # not marked converged (its last points were not evaluated)
    net = parallel([8.0, 1.0], [1.0, 2.0], 4.0)
    with pytest.warns(ConvergenceWarning, match="evaluation cap 5 reached"):
        sb = second_best(net, [2], tol=TOL, max_evals=5)
    assert sb.evaluations == 5
    assert not sb.converged and "evaluation cap 5 reached" in sb.message
    full = second_best(net, [2], tol=TOL)
    assert full.converged and full.evaluations > 5
