"""Shortest paths and all-or-nothing loading against networkx and scipy.sparse.csgraph.

References: Dijkstra (1959), as implemented by networkx
(``single_source_dijkstra_path_length``, ``dijkstra_path``) and scipy
(``scipy.sparse.csgraph.dijkstra``). The centroid rule (a path may start or end at a
zone but not pass through one; "first thru node" convention of the Transportation
Networks for Research collection, see ../shared/reference-networks/README.md) is
reproduced in the reference by deleting the out-links of every zone but the origin.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import dijkstra as scipy_dijkstra

from congest.network import Network
from congest.paths import PARALLEL_MIN_WORK, ShortestPaths


def random_graph(seed, *, n=30, m=120, n_zones=6, through_centroids=True, demand=True):
    rng = np.random.default_rng(seed)
    tail = rng.integers(0, n, m)
    head = rng.integers(0, n, m)
    keep = tail != head
    tail, head = tail[keep], head[keep]
    cost = rng.uniform(0.1, 10.0, tail.size)
    zones = rng.choice(n, n_zones, replace=False)
    dem = rng.uniform(1, 10, (n_zones, n_zones)) * (rng.random((n_zones, n_zones)) < 0.6)
    if not demand:
        dem[:] = 0.0
    net = Network(node_ids=np.arange(100, 100 + n), tail=tail, head=head, capacity=1.0,
                  free_flow_time=cost, zone_ids=np.arange(1, n_zones + 1), zone_nodes=zones,
                  demand=dem, through_centroids=through_centroids)
    return net, cost


def reference_graph(net, cost, origin_node=None):
    """networkx DiGraph with the cheapest of parallel links; zone out-links removed
    (except at ``origin_node``) when centroids may not be passed."""
    g = nx.DiGraph()
    g.add_nodes_from(range(net.n_nodes))
    blocked = set() if net.through_centroids else set(map(int, net.zone_nodes)) - {
        origin_node}
    for link, (u, v) in enumerate(zip(net.tail, net.head, strict=True)):
        u, v = int(u), int(v)
        if u in blocked:
            continue
        if not g.has_edge(u, v) or g[u][v]["weight"] > cost[link]:
            g.add_edge(u, v, weight=float(cost[link]), link=link)
    return g


@pytest.mark.parametrize("seed", range(8))
def test_tree_distances_match_scipy(seed):
    # Without the centroid rule the trees are plain Dijkstra: compare with scipy.
    net, cost = random_graph(seed)
    # scipy sums duplicate entries of a sparse matrix, so keep the cheapest parallel link
    best = {}
    for k, (u, v) in enumerate(zip(net.tail, net.head, strict=True)):
        best[(u, v)] = min(best.get((u, v), np.inf), cost[k])
    rows, cols = zip(*best, strict=True)
    mat = csr_matrix((list(best.values()), (rows, cols)), shape=(net.n_nodes,) * 2)
    expected = scipy_dijkstra(mat, directed=True, indices=net.zone_nodes)
    sp = ShortestPaths(net)
    for i, z in enumerate(net.zone_nodes):
        dist, pred = sp.tree(z, cost)
        assert_allclose(dist, expected[i], rtol=1e-13)
        # predecessor links are tight: dist[head] = dist[tail] + cost
        on = pred >= 0
        assert_allclose(dist[net.head[pred[on]]], dist[net.tail[pred[on]]] + cost[pred[on]],
                        rtol=1e-13)
        assert pred[z] == -1 and np.all(pred[~np.isfinite(dist)] == -1)


@pytest.mark.parametrize("seed", range(6))
def test_trees_with_ties_and_zero_costs_match_scipy(seed):
    # Costs 0, 1 or 2 make many equal keys in the heap and zero-cost links, where a
    # decrease-key heap must neither lose a node nor settle one twice; scipy's Dijkstra
    # gives the distances (explicit zeros kept: csgraph treats them as links).
    rng = np.random.default_rng(100 + seed)
    n, m = 200, 1200
    tail = rng.integers(0, n, m)
    head = rng.integers(0, n, m)
    keep = tail != head
    tail, head = tail[keep], head[keep]
    cost = rng.integers(0, 3, tail.size).astype(float)
    net = Network(node_ids=np.arange(n), tail=tail, head=head, capacity=1.0,
                  free_flow_time=cost, zone_ids=[1, 2, 3], zone_nodes=[0, 1, 2],
                  demand=np.ones((3, 3)) - np.eye(3), through_centroids=True)
    best = {}
    for k, (u, v) in enumerate(zip(tail, head, strict=True)):
        best[(u, v)] = min(best.get((u, v), np.inf), cost[k])
    rows, cols = zip(*best, strict=True)
    vals = np.array(list(best.values()))
    mat = csr_matrix((np.where(vals == 0, 1e-300, vals), (rows, cols)), shape=(n, n))
    expected = scipy_dijkstra(mat, directed=True, indices=[0, 1, 2])
    sp = ShortestPaths(net)
    for i in range(3):
        dist, pred = sp.tree(i, cost)
        assert_allclose(dist, expected[i], atol=1e-250)
        on = pred >= 0
        assert np.array_equal(dist[head[pred[on]]], dist[tail[pred[on]]] + cost[pred[on]])
        # the predecessors form a tree rooted at the origin: every chain reaches it
        for v in np.flatnonzero(on):
            steps = 0
            while v != i:
                v = tail[pred[v]]
                steps += 1
                assert steps <= n


def test_negative_link_cost_is_refused():
    from congest import solve
    from congest.exceptions import NetworkError

    net = Network(node_ids=[1, 2, 3], tail=[0, 0, 2], head=[1, 2, 1], capacity=1.0,
                  free_flow_time=[5.0, 1.0, 1.0], fixed_cost=[0.0, -3.0, 0.0],
                  link_ids=[11, 12, 13], zone_ids=[1, 2], zone_nodes=[0, 1],
                  demand=[[0, 3], [0, 0]])
    with pytest.raises(NetworkError, match="link 12 has a negative generalized cost"):
        solve(net)


@pytest.mark.parametrize("seed", range(8))
def test_centroid_rule_matches_networkx(seed):
    net, cost = random_graph(seed, through_centroids=False)
    sp = ShortestPaths(net)
    differs = False
    for z in net.zone_nodes:
        g = reference_graph(net, cost, int(z))
        expected = nx.single_source_dijkstra_path_length(g, int(z))
        dist, _ = sp.tree(z, cost)
        want = np.full(net.n_nodes, np.inf)
        for node, d in expected.items():
            want[node] = d
        assert_allclose(dist, want, rtol=1e-13)
        free, _ = ShortestPaths(net.replace(through_centroids=True)).tree(z, cost)
        differs |= not np.allclose(free, dist)
        assert np.all(free <= dist + 1e-12)  # the rule only removes paths
    assert differs or net.n_zones < 2


@pytest.mark.parametrize("through", [True, False])
@pytest.mark.parametrize("seed", range(6))
def test_all_or_nothing_matches_path_by_path_loading(seed, through):
    # Reference: load each OD pair's trips on networkx's shortest path, link by link.
    # Costs are drawn from a continuous distribution, so shortest paths are unique.
    net, cost = random_graph(100 + seed, through_centroids=through)
    flow, od_cost = ShortestPaths(net).all_or_nothing(cost)
    expected = np.zeros(net.n_links)
    for o, zo in enumerate(net.zone_nodes):
        if net.demand[o].sum() == 0:
            assert np.isnan(od_cost[o]).all()
            continue
        g = reference_graph(net, cost, int(zo))
        lengths, routes = nx.single_source_dijkstra(g, int(zo))
        for d, zd in enumerate(net.zone_nodes):
            if d == o:
                assert od_cost[o, d] == 0.0
                continue
            if int(zd) not in lengths:
                assert od_cost[o, d] == np.inf
                continue
            assert_allclose(od_cost[o, d], lengths[int(zd)], rtol=1e-13)
            route = routes[int(zd)]
            for u, v in zip(route[:-1], route[1:], strict=True):
                expected[g[u][v]["link"]] += net.demand[o, d]
    # unreachable pairs carry no flow; everything else is loaded
    assert_allclose(flow, expected, rtol=1e-12, atol=1e-12)


def test_parallel_and_serial_loading_agree():
    # Enough origins x links to take the multi-threaded branch, compared with the
    # path-by-path reference through the serial branch (forced by a tiny demand copy).
    n = 200
    net, cost = random_graph(7, n=n, m=int(PARALLEL_MIN_WORK / 20) + 400, n_zones=40)
    sp = ShortestPaths(net)
    assert sp.origins.size * net.n_links >= PARALLEL_MIN_WORK
    flow, od_cost = sp.all_or_nothing(cost)
    serial_flow = np.zeros(net.n_links)
    serial_cost = np.full_like(od_cost, np.nan)
    for o in sp.origins:
        one = np.zeros_like(net.demand)
        one[o] = net.demand[o]
        sub = ShortestPaths(net.replace(demand=one))
        f, c = sub.all_or_nothing(cost)
        serial_flow += f
        serial_cost[o] = c[o]
    assert_allclose(flow, serial_flow, rtol=1e-12)
    assert_allclose(od_cost, serial_cost, rtol=0)


@pytest.mark.parametrize("seed", range(4))
def test_path_cost_equals_tree_distance(seed):
    net, cost = random_graph(200 + seed, through_centroids=seed % 2 == 0)
    sp = ShortestPaths(net)
    o = int(net.zone_nodes[0])
    dist, _ = sp.tree(o, cost)
    for d in range(net.n_nodes):
        links = sp.path(o, d, cost)
        if not np.isfinite(dist[d]):
            assert links == []
            continue
        assert_allclose(cost[links].sum() if links else 0.0, dist[d], rtol=1e-13)
        # the links chain from o to d
        nodes = [o] + [int(net.head[k]) for k in links]
        assert nodes[-1] == d
        assert all(int(net.tail[k]) == nodes[i] for i, k in enumerate(links))


def test_unreachable_pairs_listed():
    # zone 3 (node 2) has no incoming link; zone 2 is reachable from zone 1
    net = Network(node_ids=[1, 2, 3], tail=[0, 2], head=[1, 1], capacity=1.0,
                  free_flow_time=1.0, zone_ids=[1, 2, 3], zone_nodes=[0, 1, 2],
                  demand=[[0, 5, 2], [0, 0, 0], [0, 1, 0]])
    pairs = ShortestPaths(net).unreachable_pairs()
    assert pairs.tolist() == [[0, 2]]


def test_aon_on_a_tree_is_unique():
    # On a tree (one route per OD pair) all-or-nothing is the only feasible loading, so
    # every link carries the demand of the pairs whose route uses it (common practice).
    # Star with a chain: 0 -> 1 -> 2 and 1 -> 3; zones at 0, 2, 3.
    net = Network(node_ids=[1, 2, 3, 4], tail=[0, 1, 1], head=[1, 2, 3], capacity=1.0,
                  free_flow_time=[1.0, 2.0, 3.0], zone_ids=[1, 2, 3], zone_nodes=[0, 2, 3],
                  demand=[[0, 4, 6], [0, 0, 0], [0, 0, 0]])
    flow, od_cost = ShortestPaths(net).all_or_nothing(net.free_flow_time)
    assert flow.tolist() == [10.0, 4.0, 6.0]
    assert od_cost[0].tolist() == [0.0, 3.0, 4.0]


def test_loading_another_demand_uses_its_origins():
    # Demand passed to all_or_nothing may have origins the network's own demand lacks.
    net, cost = random_graph(11, through_centroids=True)
    other = np.zeros_like(net.demand)
    other[net.n_zones - 1, 0] = 5.0
    own = net.demand.copy()
    own[net.n_zones - 1] = 0.0
    net = net.replace(demand=own)
    flow, od_cost = ShortestPaths(net).all_or_nothing(cost, other)
    expected, expected_cost = ShortestPaths(net.replace(demand=other)).all_or_nothing(cost)
    assert_allclose(flow, expected, rtol=0)
    assert_allclose(od_cost, expected_cost, rtol=0)
    if np.isfinite(expected_cost[net.n_zones - 1, 0]):
        assert flow.sum() > 0
