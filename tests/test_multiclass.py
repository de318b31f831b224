"""Multi-class user equilibrium: single-class limit, cvxpy reference, Pigou's toll."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from random_networks import random_network

from congest import solve
from congest.exceptions import NetworkError, SolverError
from congest.multiclass import UserClass, class_impacts, solve_multiclass
from congest.network import Network
from congest.pricing import first_best


def test_one_value_of_time_equals_single_class():
    # with every class at the network's value of time the program is the single-class
    # Beckmann program (Beckmann, McGuire & Winsten 1956), whose link flows are unique
    rng = np.random.default_rng(11)
    net = random_network(rng, zero_alpha=0.0, fixed_cost=True, n_core=6, n_zones=3)
    net = net.replace(toll=rng.uniform(0.0, 2.0, net.n_links), value_of_time=15.0)
    single = solve(net, tol=1e-10)
    classes = [UserClass("a", 0.2, 15.0), UserClass("b", 0.5, 15.0), UserClass("c", 0.3, 15.0)]
    multi = solve_multiclass(net, classes, tol=1e-9)
    assert multi.converged and multi.relative_gap <= 1e-9
    assert_allclose(multi.flow, single.flow, rtol=1e-3, atol=1e-2)
    assert multi.vehicle_hours == pytest.approx(single.vehicle_hours, rel=1e-5)
    assert multi.conservation_error < 1e-8
    table = multi.class_table()
    assert_allclose(table["trips"], np.array([0.2, 0.5, 0.3]) * net.total_demand)
    # every class sees the same costs, so each has the same mean generalized cost
    assert_allclose(table["mean_generalized_cost_min"],
                    single.total_cost / net.total_demand, rtol=1e-4)


def _parallel_bpr():
    t0 = np.array([10.0, 14.0, 18.0])
    cap = np.array([30.0, 40.0, 60.0])
    toll = np.array([4.0, 1.0, 0.0])
    net = Network(node_ids=[1, 2], tail=[0, 0, 0], head=[1, 1, 1], capacity=cap,
                  free_flow_time=t0, alpha=0.15, beta=4.0, toll=toll,
                  zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, 150.0], [0, 0]])
    return net, t0, cap, toll


def test_two_classes_against_cvxpy():
    # reference: the convex program of Dafermos (1972) solved by a general-purpose
    # conic solver (cvxpy with Clarabel)
    cp = pytest.importorskip("cvxpy")
    net, t0, cap, toll = _parallel_bpr()
    classes = [UserClass("rush", 0.4, 60.0), UserClass("relaxed", 0.6, 6.0)]
    multi = solve_multiclass(net, classes, tol=1e-10, max_iter=20_000)

    x = cp.Variable((2, 3), nonneg=True)
    total = cp.sum(x, axis=0)
    ratio = cp.multiply(total, 1 / cap)
    integral = cp.sum(cp.multiply(t0, total)
                      + cp.multiply(t0 * 0.15 * cap / 5.0, cp.power(ratio, 5)))
    const = np.stack([toll * 60.0 / c.value_of_time for c in classes])
    problem = cp.Problem(cp.Minimize(integral + cp.sum(cp.multiply(const, x))),
                         [cp.sum(x[0]) == 60.0, cp.sum(x[1]) == 90.0])
    problem.solve(solver=cp.CLARABEL)
    ref_total = x.value.sum(axis=0)
    assert_allclose(multi.flow, ref_total, atol=1e-3 * 150)
    # Wardrop conditions per class: used links cost the class's minimum
    for k in range(2):
        used = multi.class_flow[k] > 1e-3
        cmin = multi.class_cost[k].min()
        assert_allclose(multi.class_cost[k][used], cmin, rtol=1e-5)
    # the class valuing time more pays more toll per trip
    table = multi.class_table()
    assert table.loc["rush", "mean_toll_money"] > table.loc["relaxed", "mean_toll_money"]


def pigou():
    return Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                   free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
                   cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, 1], [0, 0]],
                   value_of_time=60.0)


def test_pigou_toll_gains_go_to_revenue():
    # Pigou (1920): with the marginal-cost toll drivers save a quarter minute of travel
    # time on average but pay as much in toll; their generalized cost stays 1, the
    # whole gain is the revenue
    net = pigou()
    fb = first_best(net, tol=1e-12)
    impacts = class_impacts(net, [UserClass("all", 1.0, 60.0)], fb.tolls_money, tol=1e-10)
    row = impacts.table.loc["all"]
    assert_allclose(impacts.tolled.flow, fb.so.flow, atol=1e-6)
    assert row["time_change_min"] == pytest.approx(-0.25, abs=1e-6)
    assert row["toll_change_money"] == pytest.approx(0.25, abs=1e-6)
    assert row["cost_change_money"] == pytest.approx(0.0, abs=1e-6)
    assert impacts.revenue_money == pytest.approx(0.25, abs=1e-6)


def test_who_pays_and_who_gains():
    # a 10-minute tolled road and a free road 20 + x, 20 trips; toll 5 money.
    # Business (60/h) sees 5 minutes and stays on the tolled road; leisure (12/h) sees
    # 25 minutes: without toll all 20 used the fast road (10 < 20), with it the
    # leisure half moves to the free road at 20 + 10 = 30 minutes (hand computation)
    net = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                  free_flow_time=[10.0, 20.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
                  cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, 20], [0, 0]])
    classes = [UserClass("business", 0.5, 60.0), UserClass("leisure", 0.5, 12.0)]
    impacts = class_impacts(net, classes, [5.0, 0.0], tol=1e-10)
    t = impacts.table
    assert t.loc["business", "time_change_min"] == pytest.approx(0.0, abs=1e-6)
    assert t.loc["business", "toll_change_money"] == pytest.approx(5.0, abs=1e-6)
    assert t.loc["leisure", "time_change_min"] == pytest.approx(20.0, abs=1e-5)
    assert t.loc["leisure", "toll_change_money"] == pytest.approx(0.0, abs=1e-6)
    assert t.loc["leisure", "cost_change_money"] == pytest.approx(20.0 * 12.0 / 60.0, abs=1e-5)
    assert impacts.revenue_money == pytest.approx(50.0, abs=1e-5)


def test_bad_classes():
    net = pigou()
    with pytest.raises(NetworkError, match="sum to 1"):
        solve_multiclass(net, [UserClass("a", 0.5, 10.0)])
    with pytest.raises(NetworkError, match="unique"):
        solve_multiclass(net, [UserClass("a", 0.5, 10.0), UserClass("a", 0.5, 20.0)])
    with pytest.raises(NetworkError, match="value of time"):
        UserClass("a", 1.0, 0.0)
    with pytest.raises(NetworkError, match="share"):
        UserClass("a", 0.0, 10.0)
    with pytest.raises(SolverError, match="Unknown method 'xyz'"):
        solve_multiclass(net, [UserClass("a", 1.0, 10.0)], method="xyz")
    with pytest.raises(NetworkError, match="toll_money"):
        solve_multiclass(net, [UserClass("a", 1.0, 10.0)], toll_money=[1.0])
