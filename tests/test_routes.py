"""Route flows and select-link queries (congest.routes)."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import load_reference
from test_precise_solver import random_network

from congest import SolverError, solve
from congest.network import Network
from congest.routes import route_flows, select_link


def braess(with_bridge=True):
    # Braess (1968), English translation Braess, Nagurney & Wakolbinger (2005): demand 6
    # from s to t, links s-a 10x, s-b 50+x, a-t 50+x, b-t 10x, bridge a-b 10+x.
    tail, head = [0, 0, 1, 2], [1, 2, 3, 3]
    t0, a = [0.0, 50.0, 50.0, 0.0], [10.0, 1.0, 1.0, 10.0]
    if with_bridge:
        tail, head, t0, a = tail + [1], head + [2], t0 + [10.0], a + [1.0]
    return Network(node_ids=[1, 2, 3, 4], tail=tail, head=head, capacity=1.0,
                   free_flow_time=t0, alpha=a, beta=1.0, cost_kind=2, zone_ids=[1, 4],
                   zone_nodes=[0, 3], demand=[[0, 6], [0, 0]], through_centroids=True)


def test_braess_routes():
    # with the bridge each of the three routes carries 2 and costs 92; without it the two
    # routes carry 3 and cost 83 (Braess 1968)
    rf = route_flows(solve(braess(), method="gp", tol=1e-13))
    got = sorted((tuple(r.links.tolist()), r.flow, r.cost) for r in rf.routes(1, 4))
    assert [g[0] for g in got] == [(0, 2), (0, 4, 3), (1, 3)]
    np.testing.assert_allclose([g[1] for g in got], [2, 2, 2], rtol=1e-10)
    np.testing.assert_allclose([g[2] for g in got], [92, 92, 92], rtol=1e-12)
    rf = route_flows(solve(braess(False), method="gp", tol=1e-13))
    np.testing.assert_allclose(rf.flow, [3, 3], rtol=1e-10)
    np.testing.assert_allclose(rf.cost, [83, 83], rtol=1e-12)


def _check_routes(net, eq):
    rf = route_flows(eq)
    # per OD pair the route flows sum to the demand
    per_od = np.bincount(rf.route_od, weights=rf.flow, minlength=rf.n_od)
    np.testing.assert_allclose(per_od, rf.demand, rtol=1e-12)
    np.testing.assert_array_equal(rf.demand, net.demand[rf.origin, rf.destination])
    assert (rf.flow > 0).all()
    # and over the routes through a link they give the link flow
    np.testing.assert_allclose(rf.link_flows(), eq.flow, rtol=1e-12, atol=1e-10)
    # every route is a connected walk from the origin centroid to the destination one
    zn = net.zone_nodes
    for r in range(rf.n_routes):
        links = rf.links(r)
        od = rf.route_od[r]
        assert net.tail[links[0]] == zn[rf.origin[od]]
        assert net.head[links[-1]] == zn[rf.destination[od]]
        np.testing.assert_array_equal(net.head[links[:-1]], net.tail[links[1:]])
        assert np.unique(links).size == links.size
        if not net.through_centroids:
            assert not np.isin(net.head[links[:-1]], zn).any()
    return rf


@pytest.mark.parametrize("seed", range(8))
def test_route_flows_are_consistent_on_random_networks(seed):
    net = random_network(300 + seed, through_centroids=bool(seed % 2))
    for objective in ("ue", "so"):
        _check_routes(net, solve(net, objective=objective, method="gp", tol=1e-10))


def test_route_flows_on_a_reference_network():
    net = load_reference("anaheim")
    rf = _check_routes(net, solve(net, method="gp", tol=1e-10))
    frame = rf.to_frame()
    assert list(frame.columns) == ["origin", "destination", "route", "flow", "share",
                                   "cost", "n_links", "links"]
    assert len(frame) == rf.n_routes
    np.testing.assert_allclose(frame.groupby(["origin", "destination"])["share"].sum(), 1.0,
                               rtol=1e-12)
    first = frame.iloc[0]
    links = [net.link_index(i) for i in first["links"]]
    routes = rf.routes(first["origin"], first["destination"])
    assert links == routes[0].links.tolist()


def test_select_link_single_link_gives_link_flow():
    net = load_reference("siouxfalls")
    eq = solve(net, method="gp", tol=1e-12)
    for link in (0, 17, 40):
        sl = select_link(eq, link)
        assert sl.total == pytest.approx(eq.flow[link], rel=1e-12)
        assert (sl.share > 0).all() and (sl.share <= 1 + 1e-12).all()
        m = sl.matrix()
        assert m.sum() == pytest.approx(eq.flow[link], rel=1e-12)
        frame = sl.to_frame()
        assert set(frame["origin"]) <= set(net.zone_ids.tolist())


def test_select_link_any_and_all():
    eq = solve(braess(), method="gp", tol=1e-13)
    # routes: 0-2, 0-4-3, 1-3 carry 2 each
    assert select_link(eq, [0, 1]).total == pytest.approx(6.0, rel=1e-10)
    assert select_link(eq, [0, 3], require="all").total == pytest.approx(2.0, rel=1e-10)
    assert select_link(eq, [4]).share[0] == pytest.approx(1 / 3, rel=1e-10)
    assert select_link(eq, [1, 2], require="all").total == 0.0
    with pytest.raises(IndexError):
        select_link(eq, [9])
    with pytest.raises(SolverError, match="Unknown require"):
        select_link(eq, [0], require="some")


def test_link_based_results_keep_no_routes():
    eq = solve(braess(), method="bfw", tol=1e-4)
    with pytest.raises(SolverError, match="keeps no routes"):
        route_flows(eq)
    with pytest.raises(SolverError, match="keeps no routes"):
        select_link(eq, [0])


def test_unknown_pair():
    rf = route_flows(solve(braess(), method="gp", tol=1e-10))
    with pytest.raises(KeyError):
        rf.routes(4, 1)
    with pytest.raises(KeyError):
        rf.routes(1, 99)
