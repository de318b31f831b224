"""The precise route-based solver (``method="gp"``): published reference equilibria,
optimality conditions on random networks, warm starts and robustness."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from conftest import load_reference, reference_ue_flows

from congest import ConvergenceWarning, NetworkError, SolverError, solve
from congest.costs import (
    CostModel,
    derivative_scalar,
    second_derivative_scalar,
    time_derivatives_scalar,
    time_scalar,
)
from congest.network import Network
from congest.routes import route_flows

# ----------------------------------------------------------------- random networks


def random_network(seed, k=4, n_zones=5, through_centroids=False, conical=True):
    """A k x k two-way grid with centroid connectors of constant cost (alpha = 0)."""
    rng = np.random.default_rng(seed)
    n_grid = k * k
    tail, head = [], []
    for r in range(k):
        for c in range(k):
            u = r * k + c
            for v in ((u + 1) if c + 1 < k else None, (u + k) if r + 1 < k else None):
                if v is not None:
                    tail += [u, v]
                    head += [v, u]
    m_grid = len(tail)
    attach = rng.choice(n_grid, size=n_zones, replace=False)
    zone_nodes = np.arange(n_grid, n_grid + n_zones)
    for z, g in zip(zone_nodes, attach, strict=True):
        tail += [z, g]
        head += [g, z]
    m = len(tail)
    kind = np.zeros(m, dtype=int)
    alpha = np.zeros(m)
    beta = np.zeros(m)
    alpha[:m_grid] = rng.uniform(0.1, 1.0, m_grid)
    beta[:m_grid] = rng.uniform(1.0, 6.0, m_grid)
    if conical:
        con = rng.random(m_grid) < 0.2
        kind[:m_grid][con] = 1
        alpha[:m_grid][con] = rng.uniform(2.0, 8.0, con.sum())
    fft = np.concatenate([rng.uniform(1.0, 5.0, m_grid), np.full(m - m_grid, 0.5)])
    cap = np.concatenate([rng.uniform(50.0, 200.0, m_grid), np.full(m - m_grid, 1.0)])
    demand = rng.uniform(0.0, 120.0, (n_zones, n_zones)) * (rng.random((n_zones,) * 2) < 0.8)
    return Network(node_ids=np.arange(1, n_grid + n_zones + 1), tail=tail, head=head,
                   capacity=cap, free_flow_time=fft, alpha=alpha, beta=beta, cost_kind=kind,
                   zone_ids=np.arange(1, n_zones + 1), zone_nodes=zone_nodes, demand=demand,
                   through_centroids=through_centroids)


def route_costs(eq, link_cost):
    rf = route_flows(eq)
    entry_cost = link_cost[rf.route_links]
    return rf, np.add.reduceat(entry_cost, rf.route_ptr[:-1])


# ------------------------------------------------------------------ cost kernels


@pytest.mark.parametrize("kind,t0,a,b,c", [
    (0, 3.0, 0.15, 4.0, 100.0), (0, 1.5, 1e-3, 16.83, 1.0), (0, 2.0, 0.5, 2.0, 50.0),
    (0, 2.0, 0.5, 1.5, 50.0), (1, 2.0, 4.0, 0.0, 80.0), (2, 1.0, 2.0, 3.0, 1.0),
])
def test_fused_kernel_matches_scalar_kernels_and_finite_differences(kind, t0, a, b, c):
    # derivatives checked against central differences (common practice)
    for v in (0.3 * c, 0.9 * c, 1.7 * c):
        t, d, d2 = time_derivatives_scalar(kind, t0, a, b, c, v)
        assert math.isclose(t, time_scalar(kind, t0, a, b, c, v), rel_tol=1e-13)
        assert math.isclose(d, derivative_scalar(kind, t0, a, b, c, v), rel_tol=1e-12)
        assert math.isclose(d2, second_derivative_scalar(kind, t0, a, b, c, v), rel_tol=1e-12)
        h = 1e-4 * v
        fd = (derivative_scalar(kind, t0, a, b, c, v + h)
              - derivative_scalar(kind, t0, a, b, c, v - h)) / (2 * h)
        assert math.isclose(d2, fd, rel_tol=1e-6)


def test_fused_kernel_at_zero_volume():
    # limits of b x**(b-1) and b (b-1) x**(b-2) at x = 0 (calculus, common practice)
    assert time_derivatives_scalar(0, 2.0, 0.5, 4.0, 10.0, 0.0) == (2.0, 0.0, 0.0)
    assert time_derivatives_scalar(0, 2.0, 0.5, 1.0, 10.0, 0.0) == (2.0, 0.1, 0.0)
    assert time_derivatives_scalar(0, 2.0, 0.5, 2.0, 10.0, 0.0) == (2.0, 0.0, 0.02)
    assert time_derivatives_scalar(0, 2.0, 0.0, 0.0, 1.0, 0.0) == (2.0, 0.0, 0.0)


# ------------------------------------------------------ published reference equilibria

# Beckmann objectives (generalized cost, minutes x trips) of the best-known UE solutions,
# as stated in the sources listed in the shared reference-networks README:
# Sioux Falls 42.31335287107440 x 1e5 (LeBlanc, Morlok & Pierskalla 1975 network,
# Bar-Gera's collection); Winnipeg 827,911.494629963; Chicago Sketch 17,313,018.7387477
# (Eash, Chon, Lee & Boyce 1983, prepared by Bar-Gera). Anaheim's stated 1,205,590.69
# cannot be reproduced from its own published flows (README caveat); we use the value
# recomputed from those flows, 1,286,032.171. Barcelona states none; its recomputed value
# is 1,265,654.922.
BECKMANN = {
    "siouxfalls": (42.31335287107440e5, 1e-12),
    "anaheim": (1_286_032.171, 1e-9),
    "barcelona": (1_265_654.922, 1e-9),
    "winnipeg": (827_911.494629963, 1e-12),
    "chicagosketch": (17_313_018.7387477, 1e-12),
}


def _check_reference(name):
    net = load_reference(name)
    # a flow error is about the cost error over t'(v): on nearly free-flowing links t'
    # is tiny, so 1e-6 relative on every link needs a gap below 1e-12 (Anaheim leaves
    # 2e-6 on two such links at a gap of 6e-13)
    eq = solve(net, method="gp", tol=1e-13)
    assert eq.converged and eq.relative_gap <= 1e-13
    assert np.isfinite(eq.flow).all() and (eq.flow >= 0).all()
    ref = reference_ue_flows(name)
    # UE link flows are unique only where the link cost is strictly increasing
    # (strict convexity of the Beckmann objective in those flows; Beckmann, McGuire &
    # Winsten 1956); constant-cost connectors (alpha = 0) and zero free-flow-time links
    # may split their flow in many equally good ways.
    strict = (net.alpha > 0) & (net.free_flow_time > 0) & (ref > 1.0)
    assert strict.sum() > 0.5 * (ref > 1.0).sum()
    np.testing.assert_allclose(eq.flow[strict], ref[strict], rtol=1e-6)
    value, rtol = BECKMANN[name]
    assert eq.objective_value == pytest.approx(value, rel=rtol)
    rf = route_flows(eq)
    np.testing.assert_allclose(rf.link_flows(), eq.flow, rtol=1e-12, atol=1e-9)


@pytest.mark.parametrize("name", ["siouxfalls", "anaheim", "barcelona", "winnipeg",
                                  "chicagosketch"])
def test_reference_ue_matches_published_flows_and_objective(name):
    _check_reference(name)


@pytest.mark.slow
@pytest.mark.parametrize("name", ["siouxfalls", "anaheim", "barcelona", "winnipeg",
                                  "chicagosketch"])
def test_reference_so_reaches_marginal_gap_and_is_below_ue(name):
    net = load_reference(name)
    so = solve(net, objective="so", method="gp", tol=1e-10)
    ue = solve(net, objective="ue", method="gp", tol=1e-10)
    # the relative gap of an SO result is measured in marginal cost (recomputed by solve)
    assert so.converged and so.relative_gap <= 1e-10
    # the system optimum minimises total generalized cost (Beckmann et al. 1956)
    assert so.total_cost <= ue.total_cost * (1 + 1e-12)
    assert np.isfinite(so.flow).all() and (so.flow >= 0).all()


# ------------------------------------------------- optimality conditions, random cases


@pytest.mark.parametrize("seed", range(12))
def test_ue_routes_are_equal_and_cheapest_on_random_networks(seed):
    # Wardrop's first principle (Wardrop 1952): used routes cost the same, no unused
    # route is cheaper
    net = random_network(seed, through_centroids=bool(seed % 2))
    eq = solve(net, method="gp", tol=1e-12)
    rf, cost = route_costs(eq, eq.cost)
    best = eq.od_cost[rf.origin, rf.destination][rf.route_od]
    used = rf.flow > 1e-9 * rf.demand[rf.route_od]
    np.testing.assert_allclose(cost[used], best[used], rtol=1e-9)


@pytest.mark.parametrize("seed", range(12))
def test_so_used_routes_are_cheapest_in_marginal_cost_on_random_networks(seed):
    # SO optimality (Beckmann, McGuire & Winsten 1956): every used route has the least
    # marginal cost t(v) + v t'(v) of its OD pair
    net = random_network(100 + seed, through_centroids=bool(seed % 2))
    eq = solve(net, objective="so", method="gp", tol=1e-12)
    model = CostModel.from_network(net)
    marginal = model.marginal(eq.flow)
    rf, cost = route_costs(eq, marginal)
    best = eq.od_cost[rf.origin, rf.destination][rf.route_od]
    used = rf.flow > 1e-9 * rf.demand[rf.route_od]
    np.testing.assert_allclose(cost[used], best[used], rtol=1e-9)
    assert (cost >= best * (1 - 1e-9)).all()
    ue = solve(net, objective="ue", method="gp", tol=1e-12)
    assert eq.total_cost <= ue.total_cost * (1 + 1e-12)


def test_agrees_with_biconjugate_frank_wolfe():
    # an independent method (Mitradjieva & Lindberg 2013) at a looser gap: objectives
    # agree to what its gap allows, flows on congested links to a few percent
    net = random_network(200, conical=False)
    gp = solve(net, method="gp", tol=1e-12)
    fw = solve(net, method="bfw", tol=1e-5, max_iter=20_000)
    assert gp.objective_value <= fw.objective_value * (1 + 1e-12)
    assert fw.objective_value == pytest.approx(gp.objective_value, rel=1e-4)
    strict = (net.alpha > 0) & (gp.flow > 1)
    np.testing.assert_allclose(gp.flow[strict], fw.flow[strict], rtol=0.05)


# ------------------------------------------------------------------ textbook cases


def test_preload_shifts_the_equilibrium():
    # t1 = 1 + (x1 + 1), t2 = 2 + x2, demand 3 with 1 trip preloaded on road 1:
    # equal costs give 2 + x1 = 2 + x2, so x1 = x2 = 1.5 (worked by hand)
    net = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                  free_flow_time=[1.0, 2.0], alpha=[1.0, 1.0], beta=[1.0, 1.0],
                  cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, 3], [0, 0]])
    eq = solve(net, method="gp", tol=1e-12, preload=np.array([1.0, 0.0]))
    np.testing.assert_allclose(eq.flow, [1.5, 1.5], rtol=1e-12)
    np.testing.assert_allclose(eq.cost, [3.5, 3.5], rtol=1e-12)


def test_tolls_enter_as_constant_cost():
    # t1 = 8 + x1, t2 = 1 + 2 x2, demand 4 (textbook two-route exercise, from memory;
    # recomputed by hand): UE x1 = 1/3. A toll of 3 minutes on road 2 gives
    # 8 + x1 = 4 + 2 (4 - x1), x1 = 4/3.
    net = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                  free_flow_time=[8.0, 1.0], alpha=[1.0, 2.0], beta=[1.0, 1.0],
                  cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, 4], [0, 0]])
    assert solve(net, method="gp", tol=1e-12).flow[0] == pytest.approx(1 / 3, rel=1e-12)
    tolled = net.with_tolls([0.0, 3.0])
    assert solve(tolled, method="gp", tol=1e-12).flow[0] == pytest.approx(4 / 3, rel=1e-12)


# ------------------------------------------------------------------ warm starts


@pytest.mark.parametrize("change", ["demand", "toll", "capacity"])
def test_warm_start_reaches_the_cold_solution(change):
    net = load_reference("siouxfalls")
    base = solve(net, method="gp", tol=1e-12)
    if change == "demand":
        new = net.scale_demand(1.05)
    elif change == "toll":
        new = net.with_tolls(np.where(np.arange(net.n_links) % 7 == 0, 2.0, 0.0))
    else:
        new = net.replace(capacity=net.capacity * np.where(np.arange(net.n_links) < 10,
                                                           0.8, 1.0))
    cold = solve(new, method="gp", tol=1e-12)
    warm = solve(new, method="gp", tol=1e-12, warm_start=base)
    assert warm.converged
    np.testing.assert_allclose(warm.flow, cold.flow, rtol=1e-7)
    assert warm.iterations < cold.iterations


def test_warm_start_with_new_and_dropped_od_pairs():
    net = random_network(7)
    base = solve(net, method="gp", tol=1e-12)
    demand = net.demand.copy()
    o, d = np.nonzero(demand)
    demand[o[0], d[0]] = 0.0
    empty = np.argwhere((demand == 0) & ~np.eye(net.n_zones, dtype=bool))
    demand[tuple(empty[-1])] = 50.0
    new = net.replace(demand=demand)
    warm = solve(new, method="gp", tol=1e-12, warm_start=base)
    cold = solve(new, method="gp", tol=1e-12)
    np.testing.assert_allclose(warm.flow, cold.flow, rtol=1e-7, atol=1e-7)
    rf = route_flows(warm)
    np.testing.assert_allclose(np.bincount(rf.route_od, rf.flow, rf.n_od), rf.demand,
                               rtol=1e-12)


def test_idle_routes_are_nearly_cheapest_paths_and_carried_into_warm_starts():
    # the routes a result keeps without flow (option keep, default 1 %) must be real
    # paths of their OD pair, no cheaper than its shortest path (Wardrop 1952: at UE no
    # route beats the used ones) and within the keep band of it; route_flows lists only
    # used routes
    net = load_reference("siouxfalls")
    eq = solve(net, method="gp", tol=1e-12)
    st = eq.state
    assert st.idle_path_ptr.size > 1  # Sioux Falls keeps some (measured: 61)
    zn = net.zone_nodes
    cost = np.zeros(st.idle_path_ptr.size - 1)
    for i in range(st.origin.size):
        for r in range(st.idle_od_ptr[i], st.idle_od_ptr[i + 1]):
            links = st.idle_path_links[st.idle_path_ptr[r]:st.idle_path_ptr[r + 1]]
            assert net.tail[links[0]] == zn[st.origin[i]]
            assert net.head[links[-1]] == zn[st.destination[i]]
            np.testing.assert_array_equal(net.head[links[:-1]], net.tail[links[1:]])
            best = eq.od_cost[st.origin[i], st.destination[i]]
            cost[r] = eq.cost[links].sum()
            assert best * (1 - 1e-9) <= cost[r] <= best * 1.01 + 1e-9
    assert (route_flows(eq).flow > 0).all()
    # a warm start loads them: its first gap is below that of a start from the used
    # routes alone (measured 8.6e-5 against 4.8e-4), and it reaches the cold solution
    new = net.scale_demand(1.05)
    warm = solve(new, method="gp", tol=1e-12, warm_start=eq)
    bare = dataclasses.replace(st, idle_od_ptr=None, idle_path_ptr=None,
                               idle_path_links=None)
    used_only = solve(new, method="gp", tol=1e-12,
                      warm_start=dataclasses.replace(eq, state=bare))
    assert warm.history["relative_gap"][0] < 0.5 * used_only.history["relative_gap"][0]
    cold = solve(new, method="gp", tol=1e-12)
    np.testing.assert_allclose(warm.flow, cold.flow, rtol=1e-7)
    np.testing.assert_allclose(used_only.flow, cold.flow, rtol=1e-7)


def test_warm_start_needs_routes_of_the_same_network():
    net = random_network(3)
    fw = solve(net, method="bfw", tol=1e-3)
    with pytest.raises(SolverError, match="method 'gp'"):
        solve(net, method="gp", warm_start=fw)
    other = random_network(3, k=5)
    with pytest.raises(SolverError, match="same network"):
        solve(other, method="gp", warm_start=solve(net, method="gp"))


# ------------------------------------------------------------------ edge cases


def test_unreachable_pair_raises_network_error():
    net = Network(node_ids=[1, 2, 3], tail=[0], head=[1], capacity=1.0,
                  free_flow_time=[1.0], zone_ids=[1, 2, 3], zone_nodes=[0, 1, 2],
                  demand=[[0, 1, 1], [0, 0, 0], [0, 0, 0]])
    with pytest.raises(NetworkError, match="1->3"):
        solve(net, method="gp")


def test_iteration_cap_warns_and_returns_best():
    net = load_reference("siouxfalls")
    with pytest.warns(ConvergenceWarning):
        eq = solve(net, method="gp", tol=1e-14, max_iter=3)
    assert not eq.converged and eq.iterations == 3
    assert eq.conservation_error < 1e-8


def test_zero_demand():
    net = random_network(1).replace(demand=np.zeros((5, 5)))
    eq = solve(net, method="gp")
    assert eq.converged and not eq.flow.any()


def test_history_and_callback():
    net = random_network(11)
    seen = []
    eq = solve(net, method="gp", tol=1e-12,
               callback=lambda k, x, gap: seen.append(gap) or False)
    gaps = eq.history["relative_gap"]
    assert len(seen) == eq.iterations - 1  # not called once the target is met
    assert gaps[-1] <= 1e-12 and eq.relative_gap <= 1e-12
    with pytest.warns(ConvergenceWarning):
        stopped = solve(net, method="gp", tol=1e-14, callback=lambda k, x, gap: k >= 2)
    assert stopped.iterations == 2 and "callback" in stopped.message


def test_unreachable_target_stops_at_rounding_limit():
    # a gap far below float64 resolution: the solver must stop by itself, not run to
    # its iteration cap
    import warnings

    net = random_network(5)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        eq = solve(net, method="gp", tol=1e-300)
    assert eq.iterations < 100
    assert eq.relative_gap < 1e-13


def test_warm_start_from_ue_to_so():
    net = random_network(9)
    ue = solve(net, method="gp", tol=1e-12)
    cold = solve(net, objective="so", method="gp", tol=1e-12)
    warm = solve(net, objective="so", method="gp", tol=1e-12, warm_start=ue)
    np.testing.assert_allclose(warm.flow, cold.flow, rtol=1e-7, atol=1e-8)


def test_bad_options():
    net = random_network(2)
    with pytest.raises(SolverError):
        solve(net, method="gp", inner_ratio=-1.0)
    with pytest.raises(SolverError):
        solve(net, method="gp", max_iter=0)


def test_parallel_and_serial_twins_compile_apart():
    """The parallel and serial versions of a kernel must not share compiled code.

    numba names a cache file after the Python function and keys its entries by argument
    types, so two dispatchers of one function shared a file and the one compiled first
    was loaded for both (the "parallel" trees then ran on one thread). Each twin is
    compiled from its own renamed copy; both must still give the same trees.
    """
    import congest._gradient_projection as gpm
    from congest.equilibrium import Problem

    pairs = [(gpm._trees_parallel, gpm._trees_serial),
             (gpm._find_routes_parallel, gpm._find_routes_serial),
             (gpm._write_routes_parallel, gpm._write_routes_serial)]
    for par, ser in pairs:
        assert par.py_func.__qualname__ != ser.py_func.__qualname__
        assert par.targetoptions.get("parallel") and not ser.targetoptions.get("parallel")
    net = load_reference("siouxfalls")
    sp = Problem(net, "ue").paths
    cost = np.asarray(net.free_flow_time, dtype=np.float64) + 0.5
    out = []
    for trees in (gpm._trees_parallel, gpm._trees_serial):
        pred = np.empty((sp.zone_nodes.size, net.n_nodes), dtype=np.int32)
        zdist = np.empty((sp.zone_nodes.size, net.n_zones))
        trees(sp.zone_nodes, sp.zone_nodes, sp.indptr, sp.adj_link, sp.adj_head, cost,
              sp.blocked, pred, zdist, 2)
        out.append((pred, zdist))
    np.testing.assert_array_equal(out[0][0], out[1][0])
    np.testing.assert_array_equal(out[0][1], out[1][1])


def test_library_defaults_share_one_gap_rule(monkeypatch):
    # solve, compare and first_best without tol hand the solvers the command line's
    # default gap (1e-10 for the precise default method, 1e-5 for Frank-Wolfe), so
    # Python and CLI numbers agree. The targets reaching the solvers are recorded:
    # on a small network the gap reached says nothing about the target asked for.
    import congest._frank_wolfe as fw
    import congest._gradient_projection as gp
    from congest.equilibrium import default_tol
    from congest.pricing import first_best
    from congest.scenarios import compare

    seen = []
    for module, name in ((gp, "solve_gp"), (fw, "solve_bfw")):
        real = getattr(module, name)

        def spy(problem, *, tol, _real=real, _name=name, **kw):
            seen.append((_name, tol))
            return _real(problem, tol=tol, **kw)

        monkeypatch.setattr(module, name, spy)
    net = Network(node_ids=[1, 2], tail=[0, 0, 0], head=[1, 1, 1], capacity=[30, 40, 60],
                  free_flow_time=[10.0, 14.0, 18.0], alpha=0.15, beta=4.0,
                  zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, 150.0], [0, 0]])
    assert default_tol() == 1e-10 and default_tol("bfw") == 1e-5
    for call in (lambda: solve(net), lambda: first_best(net), lambda: compare(net)):
        seen.clear()
        call()
        assert seen and {t for _, t in seen} == {1e-10}, seen
    seen.clear()
    solve(net, method="bfw")
    first_best(net, method="bfw")
    assert seen and {t for _, t in seen} == {1e-5}, seen
