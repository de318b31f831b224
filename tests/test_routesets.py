"""Route sets: Yen's k shortest loopless paths against networkx, and the UE used routes."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from congest import solve
from congest.network import Network
from congest.routesets import SOURCE_FLAGS, RouteSet, build_route_set, k_shortest_paths


def braess():
    # Braess (1968); English translation Braess, Nagurney & Wakolbinger (2005),
    # Transportation Science 39(4): links 10x, 50+x, 50+x, 10x and the added 10+x.
    return Network(node_ids=[1, 2, 3, 4], tail=[0, 0, 1, 2, 1], head=[1, 2, 3, 3, 2],
                   capacity=1.0, free_flow_time=[0, 50, 50, 0, 10],
                   alpha=[10, 1, 1, 10, 1], beta=1.0, cost_kind=2,
                   zone_ids=[1, 4], zone_nodes=[0, 3], demand=[[0, 6], [0, 0]])


def random_network(seed, n_nodes=12, n_zones=4, through=False):
    rng = np.random.default_rng(seed)
    pairs = set()
    # a ring both ways keeps every pair connected, plus random chords
    for i in range(n_nodes):
        pairs.add((i, (i + 1) % n_nodes))
        pairs.add(((i + 1) % n_nodes, i))
    while len(pairs) < 4 * n_nodes:
        a, b = rng.integers(0, n_nodes, 2)
        if a != b:
            pairs.add((int(a), int(b)))
    tail, head = map(np.array, zip(*sorted(pairs), strict=True))
    demand = rng.uniform(1, 10, (n_zones, n_zones))
    return Network(node_ids=np.arange(1, n_nodes + 1), tail=tail, head=head,
                   capacity=rng.uniform(5, 20, tail.size),
                   free_flow_time=rng.integers(1, 6, tail.size).astype(float),
                   zone_ids=np.arange(1, n_zones + 1),
                   zone_nodes=np.arange(n_zones) * (n_nodes // n_zones), demand=demand,
                   through_centroids=through)


def networkx_k_costs(net, cost, o, d, k):
    """k shortest simple path costs with networkx; the centroid rule by removing the
    links that leave every centroid other than the origin."""
    graph = nx.DiGraph()
    centroids = set(net.zone_nodes.tolist())
    origin = int(net.zone_nodes[o])
    for link in range(net.n_links):
        u, v = int(net.tail[link]), int(net.head[link])
        if not net.through_centroids and u in centroids and u != origin:
            continue
        graph.add_edge(u, v, weight=float(cost[link]))
    gen = nx.shortest_simple_paths(graph, origin, int(net.zone_nodes[d]), weight="weight")
    out = []
    for path in gen:
        out.append(sum(graph[a][b]["weight"] for a, b in zip(path, path[1:], strict=False)))
        if len(out) == k:
            break
    return out


@pytest.mark.parametrize("through", [False, True])
@pytest.mark.parametrize("seed", range(8))
def test_yen_matches_networkx(seed, through):
    # Yen (1971): the k shortest loopless paths; networkx.shortest_simple_paths (also
    # Yen's method) as the independent reference. Costs are integers, so ties are
    # common and only the cost sequence is compared.
    net = random_network(seed, through=through)
    cost = net.free_flow_time + np.random.default_rng(seed).integers(0, 3, net.n_links)
    k = 5
    found = k_shortest_paths(net, cost, k)
    o, d, _ = net.od_pairs()
    centroids = set(net.zone_nodes.tolist())
    for i in range(o.size):
        ref = networkx_k_costs(net, cost, o[i], d[i], k)
        mine = [float(cost[p].sum()) for p in found[i]]
        np.testing.assert_allclose(mine, ref, rtol=0, atol=1e-9)
        seen = set()
        for p in found[i]:
            nodes = [int(net.tail[p[0]])] + net.head[p].tolist()
            assert len(set(nodes)) == len(nodes), "path has a loop"
            assert tuple(p) not in seen
            seen.add(tuple(p))
            if not through:
                assert not centroids & set(nodes[1:-1]), "path passes through a centroid"


def test_braess_route_set_holds_the_three_routes():
    # Braess network: exactly three routes from 1 to 4; at UE (demand 6) each carries 2
    # and costs 92 (Braess 1968; Braess, Nagurney & Wakolbinger 2005).
    net = braess()
    eq = solve(net, tol=1e-10, method="bfw", max_iter=10_000)
    rs = build_route_set(net, k=5, equilibrium=eq)
    assert rs.n_routes == 3
    costs = rs.route_costs(eq.cost)
    np.testing.assert_allclose(costs, 92.0, rtol=1e-6)
    assert np.all(rs.source & SOURCE_FLAGS["ue_cost"])


def test_route_set_covers_ue_and_cap():
    net = random_network(3)
    eq = solve(net, tol=1e-8, method="bfw", max_iter=20_000)
    rs = build_route_set(net, k=4, equilibrium=eq)
    # every OD pair's cheapest route in the set is a shortest path at UE costs
    cost = rs.route_costs(eq.cost)
    best = np.minimum.reduceat(cost, rs.od_indptr[:-1])
    np.testing.assert_allclose(best, eq.od_cost[rs.od_origin, rs.od_destination], rtol=1e-12)
    capped = build_route_set(net, k=4, equilibrium=eq, max_routes=2)
    assert capped.routes_per_od.max() <= 2
    # incidence and CSR agree
    flows = np.random.default_rng(0).uniform(0, 1, rs.n_routes)
    by_loop = np.zeros(net.n_links)
    for r in range(rs.n_routes):
        by_loop[rs.route_links(r)] += flows[r]
    np.testing.assert_allclose(rs.link_flows(flows), by_loop)
    frame = rs.to_frame()
    assert len(frame) == rs.n_routes and set(frame["origin"]) <= set(net.zone_ids)


def test_from_routes_rejects_broken_route():
    net = braess()
    with pytest.raises(ValueError, match="does not lead"):
        RouteSet.from_routes(net, {(0, 1): [[0, 3]]})
    with pytest.raises(ValueError, match="no routes given"):
        RouteSet.from_routes(net, {})


def test_route_based_solution_gives_used_routes_first():
    # the route-based solver's used routes carry the UE route flows (they reproduce the
    # UE link flows); a cap keeps the used routes before the other alternatives
    net = random_network(5)
    eq = solve(net, tol=1e-10)
    rs = build_route_set(net, k=3, equilibrium=eq, max_routes=None)
    used = (rs.source & SOURCE_FLAGS["ue_used"]) > 0
    np.testing.assert_allclose(rs.link_flows(rs.ue_route_flow), eq.flow, rtol=1e-6,
                               atol=1e-6)
    np.testing.assert_allclose(np.add.reduceat(rs.ue_route_flow, rs.od_indptr[:-1]),
                               rs.od_demand, rtol=1e-6)
    n_used = np.add.reduceat(used.astype(int), rs.od_indptr[:-1])
    capped = build_route_set(net, k=3, equilibrium=eq, max_routes=1)
    first = capped.od_indptr[:-1]
    assert np.all(capped.source[first] & SOURCE_FLAGS["ue_used"])
    assert n_used.max() >= 1
    # without shortest paths a link-based solution leaves OD pairs without routes
    fw = solve(net, tol=1e-6, method="bfw", max_iter=20_000)
    with pytest.raises(ValueError, match="has no route"):
        build_route_set(net, k=0, equilibrium=fw)
    with pytest.raises(ValueError, match="Unknown alternatives"):
        build_route_set(net, equilibrium=fw, alternatives=("random",))
