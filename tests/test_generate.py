"""Synthetic networks: sizes, connectivity, planarity, seeds, calibration, files."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from click.testing import CliRunner
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from scipy.spatial import ConvexHull

from congest import solve
from congest.generate import (
    GENERATORS,
    generate_network,
    grid_network,
    planar_network,
    ring_radial_network,
)
from congest.paths import ShortestPaths

ARRAYS = ("tail", "head", "capacity", "free_flow_time", "alpha", "beta", "length", "x", "y",
          "zone_nodes", "demand")


def _road_links(net):
    return net.link_attrs["facility_type"] != "connector"


def _strongly_connected_roads(net):
    road = _road_links(net)
    nodes = np.arange(net.n_zones, net.n_nodes)  # centroids come first
    n = net.n_nodes
    graph = coo_matrix((np.ones(road.sum()), (net.tail[road], net.head[road])), shape=(n, n))
    _, labels = connected_components(graph, directed=True, connection="strong")
    return np.unique(labels[nodes]).size == 1


@pytest.mark.parametrize("kind", sorted(GENERATORS))
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_connected_and_every_zone_reachable(kind, seed):
    net = generate_network(kind, n_links=1500, n_zones=15, seed=seed)
    assert _strongly_connected_roads(net)
    assert len(ShortestPaths(net).unreachable_pairs()) == 0
    assert net.total_demand > 0 and not net.through_centroids
    assert np.isfinite(net.x).all() and np.isfinite(net.y).all()


def test_exact_sizes_of_grid_and_ring_radial():
    # counting segments: a rows x cols grid has rows(cols-1) + cols(rows-1) streets;
    # rings x radials gives one radial and one ring segment per (ring, radial) node
    net = grid_network(7, 9, n_zones=5, connectors=3, seed=0)
    assert net.n_nodes == 7 * 9 + 5
    assert net.n_links == 2 * (7 * 8 + 9 * 6) + 2 * 3 * 5
    net = ring_radial_network(4, 10, n_zones=6, seed=0)
    assert net.n_nodes == 1 + 4 * 10 + 6
    assert net.n_links == 4 * 4 * 10 + 2 * 2 * 6
    assert net.n_zones == 6


@pytest.mark.parametrize("kind", sorted(GENERATORS))
@pytest.mark.parametrize("n_links", [800, 12_000])
def test_requested_link_count(kind, n_links):
    net = generate_network(kind, n_links=n_links, n_zones=n_links // 100, seed=4)
    assert net.n_zones == n_links // 100
    assert abs(net.n_links - n_links) <= 0.05 * n_links


def test_planar_network_is_a_delaunay_triangulation():
    # Euler's formula for a triangulation of n points with h on the convex hull:
    # 3n - 3 - h edges (e.g. de Berg et al. 2008, Computational Geometry, Thm 9.1);
    # planarity checked independently with networkx (Boyer & Myrvold 2004)
    n = 300
    net = planar_network(n, n_zones=10, seed=5)
    road = _road_links(net)
    xy = np.column_stack([net.x, net.y])[net.n_zones:]
    h = len(ConvexHull(xy).vertices)
    assert road.sum() == 2 * (3 * n - 3 - h)
    graph = nx.Graph()
    graph.add_edges_from(zip(net.tail[road].tolist(), net.head[road].tolist(), strict=True))
    assert nx.check_planarity(graph)[0]


def test_road_classes_follow_their_definitions():
    net = planar_network(400, n_zones=12, seed=6, motorway_share=0.05, arterial_share=0.15)
    kind = net.link_attrs["facility_type"]
    road = _road_links(net)
    share = {c: np.mean(kind[road] == c) for c in ("motorway", "arterial", "local")}
    n_seg = road.sum() // 2
    assert share["motorway"] == pytest.approx(round(0.05 * n_seg) / n_seg)
    assert share["arterial"] == pytest.approx(round(0.15 * n_seg) / n_seg)
    # free-flow time = length / speed (km, km/h -> minutes), per class
    speed = {"motorway": 100.0, "arterial": 60.0, "local": 40.0, "connector": 30.0}
    expect = net.length / np.array([speed[k] for k in kind]) * 60.0
    np.testing.assert_allclose(net.free_flow_time, expect, rtol=1e-12)
    assert (net.alpha[~road] == 0).all()
    grid = grid_network(9, 9, n_zones=4, arterial_every=4, motorway_every=8, seed=0)
    assert set(grid.link_attrs["facility_type"]) == {"motorway", "arterial", "local",
                                                     "connector"}


@pytest.mark.parametrize("kind", sorted(GENERATORS))
def test_same_seed_same_network_other_seed_other_network(kind):
    a = generate_network(kind, n_links=1000, n_zones=10, seed=11)
    b = generate_network(kind, n_links=1000, n_zones=10, seed=11)
    c = generate_network(kind, n_links=1000, n_zones=10, seed=12)
    for name in ARRAYS:
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name))
    assert not all(np.array_equal(getattr(a, n), getattr(c, n)) for n in ARRAYS)


@pytest.mark.parametrize("statistic", ["p90", "mean"])
def test_calibration_at_free_flow_loading(statistic):
    net = grid_network(12, 12, n_zones=10, vc_target=0.7, statistic=statistic, seed=3)
    flow, _ = ShortestPaths(net).all_or_nothing(net.free_flow_time)
    used = _road_links(net) & (flow > 0)
    vc = flow[used] / net.period_capacity[used]
    value = np.percentile(vc, 90) if statistic == "p90" else vc.mean()
    assert value == pytest.approx(0.7, rel=1e-9)


def test_calibration_at_user_equilibrium():
    net = ring_radial_network(5, 12, n_zones=8, vc_target=0.8, calibrate="ue", seed=2)
    ue = solve(net, tol=1e-4, max_iter=5000)
    used = _road_links(net) & (ue.flow > 0)
    p90 = np.percentile(ue.flow[used] / net.period_capacity[used], 90)
    assert p90 == pytest.approx(0.8, rel=0.03)


def test_bad_generator_arguments():
    with pytest.raises(ValueError, match="Unknown generator"):
        generate_network("spiral", n_links=100)
    with pytest.raises(ValueError, match="n_zones"):
        grid_network(3, 3, n_zones=50)
    with pytest.raises(ValueError, match="statistic"):
        grid_network(3, 3, n_zones=2, statistic="median")


def test_cli_writes_a_gmns_folder_that_reads_back(tmp_path):
    from congest.cli import main
    from congest.io import read_network

    out = tmp_path / "town"
    result = CliRunner().invoke(main, ["generate", "ring-radial", str(out), "--rings", "3",
                                       "--radials", "8", "--zones", "5", "--seed", "9"])
    assert result.exit_code == 0, result.output
    assert "5 zones" in result.output
    assert (out / "node.csv").exists() and (out / "link.csv").exists()
    back = read_network(out)
    net = ring_radial_network(3, 8, n_zones=5, seed=9)
    assert (back.n_nodes, back.n_links, back.n_zones) == (net.n_nodes, net.n_links, 5)
    np.testing.assert_allclose(back.demand, net.demand, rtol=1e-12)
    np.testing.assert_allclose(back.capacity, net.capacity, rtol=1e-12)
    np.testing.assert_allclose(back.free_flow_time, net.free_flow_time, rtol=1e-12)
    bad = CliRunner().invoke(main, ["generate", "grid", str(tmp_path / "g"), "--rows", "3"])
    assert bad.exit_code == 1 and "error:" in bad.output
