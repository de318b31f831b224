"""networkx conversion both ways."""

from __future__ import annotations

from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from congest.exceptions import NetworkError
from congest.io import from_networkx, read_network, to_networkx

NETWORKS = Path(__file__).resolve().parents[1] / "networks"


def same_network(a, b):
    for name in ("node_ids", "tail", "head", "link_ids", "zone_ids", "zone_nodes",
                 "cost_kind"):
        assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
    for name in ("capacity", "free_flow_time", "alpha", "beta", "toll", "fixed_cost",
                 "length", "x", "y", "demand"):
        assert_allclose(getattr(a, name), getattr(b, name), err_msg=name)
    for name in ("through_centroids", "period_hours", "value_of_time", "currency", "name"):
        assert getattr(a, name) == getattr(b, name), name


def test_round_trip_demo_city():
    net = read_network(NETWORKS / "quillhaven")
    G = to_networkx(net)
    assert isinstance(G, nx.DiGraph) and not G.is_multigraph()
    assert G.number_of_edges() == net.n_links
    back = from_networkx(G)
    same_network(net, back)
    assert back.link_attrs["facility_type"].tolist() == net.link_attrs["facility_type"].tolist()
    assert back.node_attrs["node_type"].tolist() == net.node_attrs["node_type"].tolist()


def test_parallel_links_need_a_multigraph():
    net = read_network(NETWORKS / "pigou")
    G = to_networkx(net)
    assert G.is_multigraph() and G.number_of_edges() == 2
    same_network(net, from_networkx(G))
    with pytest.raises(NetworkError, match="parallel"):
        to_networkx(net, multigraph=False)


def test_from_plain_digraph():
    G = nx.DiGraph()
    G.add_edge(1, 2, capacity=1000.0, free_flow_time=4.0, lanes=2)
    G.add_edge(2, 3, capacity=500.0, free_flow_time=1.0, alpha=0.3)
    net = from_networkx(G, demand={(1, 3): 25.0})
    assert net.zone_ids.tolist() == [1, 3]
    assert net.total_demand == 25.0
    assert_allclose(net.alpha, [0.15, 0.3])
    assert_allclose(net.link_attrs["lanes"], [2, np.nan])


def test_edge_without_capacity_is_an_error():
    G = nx.DiGraph()
    G.add_edge(1, 2, free_flow_time=1.0)
    with pytest.raises(NetworkError, match="capacity"):
        from_networkx(G, demand={(1, 2): 1.0})


def test_undirected_graph_is_refused():
    with pytest.raises(NetworkError, match="directed"):
        from_networkx(nx.Graph([(1, 2)]))
