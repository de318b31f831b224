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


# ------------------------------------------------------- the precise method ("gp")
def _cvxpy_multiclass(net, classes):
    """Objective and total link flows of the multi-class program by cvxpy (Clarabel).

    The program of Dafermos (1972): one link-node flow per class and origin, node
    balance, no path through a third zone; ``sum_a integral t_a(X_a) + sum_k c_k . x_k``
    with ``c_k = fixed + 60 toll / VOT_k``. Written here independently of congest.
    """
    cp = pytest.importorskip("cvxpy")
    n, m = net.n_nodes, net.n_links
    inc = np.zeros((n, m))
    inc[net.head, np.arange(m)] += 1.0
    inc[net.tail, np.arange(m)] -= 1.0
    zn = np.asarray(net.zone_nodes)
    cons, total, linear = [], 0, 0
    for c in classes:
        charge = net.fixed_cost + net.toll * 60.0 / c.value_of_time
        for o in np.flatnonzero(net.demand.sum(axis=1) > 0):
            f = cp.Variable(m, nonneg=True)
            b = np.zeros(n)
            b[zn] += c.share * net.demand[o]
            b[zn[o]] -= c.share * net.demand[o].sum()
            cons.append(inc @ f == b)
            leaving = np.flatnonzero(np.isin(net.tail, np.setdiff1d(zn, [zn[o]])))
            if leaving.size:
                cons.append(f[leaving] == 0)
            total = total + f
            linear = linear + charge @ f
    t0, cap = np.asarray(net.free_flow_time), np.asarray(net.period_capacity)
    alpha, beta = np.asarray(net.alpha), np.asarray(net.beta)
    terms = [t0 @ total, linear]
    for bb in np.unique(beta):
        idx = np.flatnonzero((beta == bb) & (alpha > 0))
        if idx.size:
            w = t0[idx] * alpha[idx] * cap[idx] / (bb + 1.0)
            terms.append(w @ cp.power(cp.multiply(total[idx], 1.0 / cap[idx]), bb + 1.0))
    prob = cp.Problem(cp.Minimize(sum(terms)), cons)
    prob.solve(solver=cp.CLARABEL, tol_gap_abs=1e-9, tol_gap_rel=1e-9, tol_feas=1e-9)
    assert prob.status == cp.OPTIMAL
    return float(prob.value), np.asarray(total.value)


def _tolled_random(seed):
    rng = np.random.default_rng(seed)
    net = random_network(rng, zero_alpha=0.2, fixed_cost=True, load=1.2)
    toll = np.where(rng.random(net.n_links) < 0.4, rng.uniform(0.5, 6.0, net.n_links), 0.0)
    return net.replace(toll=toll)


CLASSES = [UserClass("hurried", 0.3, 45.0), UserClass("steady", 0.5, 15.0),
           UserClass("thrifty", 0.2, 4.0)]


@pytest.mark.parametrize("seed", range(4))
def test_gp_against_cvxpy_on_random_tolled_networks(seed):
    # reference: the convex program of Dafermos (1972) by a general-purpose conic solver.
    # Its optimum value is unique, and so are the total volumes on links whose time
    # strictly increases with volume (strict convexity in those totals)
    net = _tolled_random(seed)
    eq = solve_multiclass(net, CLASSES, tol=1e-12)
    assert eq.converged and eq.relative_gap <= 1e-12 and eq.method == "gp"
    value, ref_total = _cvxpy_multiclass(net, CLASSES)
    mine = float(eq.history["objective"][-1])
    assert mine == pytest.approx(value, rel=1e-7)
    rising = np.asarray(net.alpha) > 0
    scale = max(net.total_demand, 1.0)
    assert_allclose(eq.flow[rising], ref_total[rising], atol=1e-4 * scale)


@pytest.mark.parametrize("seed", range(6))
def test_gp_wardrop_conditions_per_class(seed):
    # Wardrop's first principle per class (Dafermos 1972): every used route of a class
    # and OD pair costs that class's least generalized cost, to within the gap
    net = _tolled_random(100 + seed)
    eq = solve_multiclass(net, CLASSES, tol=1e-12)
    st = eq.state
    assert st.od_class is not None
    cost = eq.class_cost
    shares = np.array([c.share for c in CLASSES])
    for i in range(st.origin.size):
        k, o, d = int(st.od_class[i]), int(st.origin[i]), int(st.destination[i])
        assert st.demand[i] == pytest.approx(shares[k] * net.demand[o, d], rel=1e-12)
        routes = range(st.od_ptr[i], st.od_ptr[i + 1])
        flows = st.path_flow[list(routes)]
        assert flows.min() >= 0.0 and flows.sum() == pytest.approx(st.demand[i], rel=1e-12)
        for r in routes:
            c = cost[k, st.path_links[st.path_ptr[r]:st.path_ptr[r + 1]]].sum()
            assert c == pytest.approx(eq.od_cost[k, o, d], rel=1e-9)
    # class link flows are the sums of their route flows, and add up to the totals
    rebuilt = np.zeros_like(eq.class_flow)
    for i in range(st.origin.size):
        for r in range(st.od_ptr[i], st.od_ptr[i + 1]):
            np.add.at(rebuilt[st.od_class[i]], st.path_links[st.path_ptr[r]:st.path_ptr[r + 1]],
                      st.path_flow[r])
    assert_allclose(rebuilt, eq.class_flow, rtol=1e-12, atol=1e-9)
    assert_allclose(eq.class_flow.sum(axis=0), eq.flow, rtol=1e-12, atol=1e-9)
    assert eq.conservation_error < 1e-8


def test_gp_agrees_with_frank_wolfe_and_warm_start():
    # two independent methods of the project on one program, and a warm start from
    # the untolled routes, reach one equilibrium (unique optimum value)
    net = _tolled_random(7)
    gp = solve_multiclass(net, CLASSES, tol=1e-12)
    fw = solve_multiclass(net, CLASSES, method="bfw", tol=1e-7, max_iter=50_000)
    assert float(fw.history["objective"][-1]) == pytest.approx(
        float(gp.history["objective"][-1]), rel=1e-6)
    untolled = solve_multiclass(net.replace(toll=np.zeros(net.n_links)), CLASSES, tol=1e-12)
    warm = solve_multiclass(net, CLASSES, tol=1e-12, warm_start=untolled)
    assert warm.converged and warm.relative_gap <= 1e-12
    rising = np.asarray(net.alpha) > 0
    assert_allclose(warm.flow[rising], gp.flow[rising], atol=1e-6 * net.total_demand)
    with pytest.raises(SolverError, match="classes"):
        solve_multiclass(net, [UserClass("all", 1.0, 10.0)], warm_start=untolled)
    with pytest.raises(SolverError, match="gp"):
        solve_multiclass(net, CLASSES, method="bfw", warm_start=untolled)


def test_negative_class_cost_is_refused():
    # a rebate larger than a link's free-flow time makes a negative cost for the class
    # that values money most: shortest paths would be wrong, so it is an input error
    net = pigou().replace(toll=[0.0, -1.0])
    with pytest.raises(NetworkError, match="negative generalized cost.*'poor'"):
        solve_multiclass(net, [UserClass("rich", 0.5, 600.0), UserClass("poor", 0.5, 6.0)])


def test_sioux_falls_classes_without_tolls_reproduce_published_flows():
    # with no money tolls every class sees the same costs, so the totals are the
    # single-class UE: the published best-known Sioux Falls flows (LeBlanc, Morlok &
    # Pierskalla 1975 network; best-known solution of the Transportation Networks for
    # Research collection, H. Bar-Gera et al.)
    from conftest import load_reference, reference_ue_flows

    net = load_reference("siouxfalls")
    ref = reference_ue_flows("siouxfalls")
    eq = solve_multiclass(net, CLASSES, tol=1e-12)
    assert eq.relative_gap <= 1e-12
    big = ref > 1
    assert_allclose(eq.flow[big], ref[big], rtol=1e-6)


def test_route_queries_refuse_multiclass_results_clearly():
    from congest.routes import route_flows, select_link

    eq = solve_multiclass(pigou(), [UserClass("a", 0.5, 60.0), UserClass("b", 0.5, 6.0)])
    for query in (lambda: route_flows(eq), lambda: select_link(eq, [1])):
        with pytest.raises(SolverError, match="single-class result"):
            query()


def test_multiclass_entry_points_accept_auto_and_refuse_single_class_starts():
    net = _tolled_random(3)
    auto = solve_multiclass(net, CLASSES, method="auto")
    assert auto.method == "gp" and auto.relative_gap <= 1e-10
    with pytest.raises(SolverError, match="earlier multi-class result"):
        solve_multiclass(net, CLASSES, warm_start=solve(net))
