"""Zone connectors: which links they are, and how the maps draw them.

A connector ties a zone centroid that stands apart from the roads to the road network.
Its volume is every trip of its zone and its capacity a modelling device, so the maps
draw connectors as thin grey dashes of one width, in a layer of their own, and let only
the roads set the width and colour scales. Networks whose zones sit on road nodes have
no connectors, and their maps are drawn as before.
"""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pytest
from matplotlib.colors import to_rgba_array
from random_networks import grid_links

import congest
from congest.generate import GENERATORS, generate_network, grid_network
from congest.network import Network
from congest.plotting import (
    MAP_LAYERS,
    difference_map,
    flow_map,
    flow_scales,
    toll_map,
)

NETWORKS = Path(__file__).resolve().parents[1] / "networks"


def layers(fig, name):
    return [c for ax in fig.axes for c in ax.collections if c.get_gid() == MAP_LAYERS[name]]


def layer(fig, name):
    found = layers(fig, name)
    assert len(found) == 1, f"expected one {name!r} layer, found {len(found)}"
    return found[0]


def text(fig, gid):
    return next(t.get_text() for t in fig.texts if t.get_gid() == gid)


def key_lines(fig):
    return [ln for ax in fig.axes for ln in ax.get_lines()
            if ln.get_gid() == "congest-key-connector"]


def dashed(collection):
    return [dashes is not None for _, dashes in collection.get_linestyle()]


@pytest.fixture(scope="module")
def town():
    """A generated street grid with centroids tied on by connectors, and volumes in
    which every connector carries more than any road (ten times the busiest road)."""
    net = grid_network(4, 5, n_zones=4, seed=2)
    rng = np.random.default_rng(7)
    flow = rng.uniform(50.0, 400.0, net.n_links)
    flow[net.connectors] = rng.uniform(4000.0, 6000.0, int(net.connectors.sum()))
    return net, flow


def corner_grid():
    """A 3 x 4 two-way grid of congestible streets with zones on its corner nodes."""
    n_rows, n_cols = 3, 4
    ids = np.arange(n_rows * n_cols).reshape(n_rows, n_cols)
    tail, head = grid_links(n_rows, n_cols)
    xs, ys = np.meshgrid(np.arange(n_cols, dtype=float), np.arange(n_rows, dtype=float))
    return Network(node_ids=np.arange(1, ids.size + 1), tail=tail, head=head,
                   capacity=300.0, free_flow_time=1.0, zone_ids=[1, 2],
                   zone_nodes=[ids[0, 0], ids[-1, -1]], demand=[[0, 100], [50, 0]],
                   x=xs.ravel(), y=ys.ravel())


# ------------------------------------------------------------------- the rule
def test_the_demo_city_connectors_are_found_from_its_structure():
    city = congest.read_network(NETWORKS / "quillhaven")
    marked = city.link_attrs["facility_type"] == "connector"
    assert 0 < marked.sum() < city.n_links
    np.testing.assert_array_equal(city.connectors, marked)
    # without the file's marks the structure alone gives the same links
    np.testing.assert_array_equal(city.replace(link_attrs={}).connectors, marked)
    # and each of them has a centroid at one end and a road node at the other
    centroid = city.node_attrs["node_type"] == "centroid"
    ends = centroid[city.tail[marked]].astype(int) + centroid[city.head[marked]]
    assert np.all(ends == 1)


@pytest.mark.parametrize("kind", sorted(GENERATORS))
@pytest.mark.parametrize("seed", range(3))
def test_generated_connectors_are_found_from_their_structure(kind, seed):
    net = generate_network(kind, n_links=400, n_zones=6, seed=seed)
    marked = net.link_attrs["facility_type"] == "connector"
    np.testing.assert_array_equal(net.replace(link_attrs={}).connectors, marked)


@pytest.mark.parametrize("name", ["braess", "braess-before", "pigou"])
def test_zones_on_road_nodes_have_no_connectors(name):
    # the textbook networks put their zones on road nodes: every link is a road
    net = congest.read_network(NETWORKS / name)
    assert not net.connectors.any()
    assert not corner_grid().connectors.any()


def test_a_zone_on_an_intersection_keeps_its_roads():
    # node 0 is a zone on a congestible street (0-1) that also has a constant-cost
    # link (a ferry, 0-2); node 3 is a centroid off node 1 with constant connectors
    net = Network(node_ids=[1, 2, 3, 4], tail=[0, 1, 0, 2, 3, 1], head=[1, 0, 2, 0, 1, 3],
                  capacity=500.0, free_flow_time=2.0, alpha=[0.15, 0.15, 0, 0, 0, 0],
                  zone_ids=[1, 2], zone_nodes=[0, 3], demand=[[0, 10], [10, 0]])
    assert net.connectors.tolist() == [False, False, False, False, True, True]


def test_constant_cost_links_between_two_zones_are_roads():
    # two zone nodes joined directly by a constant-cost link: neither is a centroid
    net = Network(node_ids=[1, 2, 3], tail=[0, 1, 2], head=[1, 2, 0], capacity=1.0,
                  free_flow_time=1.0, alpha=0.0, zone_ids=[1, 2], zone_nodes=[0, 1],
                  demand=[[0, 1], [0, 0]])
    assert net.connectors.tolist() == [False, False, False]


def test_polynomial_and_bpr_constant_forms_count_and_conical_does_not():
    def star(**costs):
        # centroid 0 and centroid 2 tied to road node 1; a road 1-3 carries traffic on
        return Network(node_ids=[1, 2, 3, 4], tail=[0, 1, 2, 1, 1], head=[1, 2, 1, 3, 0],
                       capacity=100.0, free_flow_time=1.0, zone_ids=[1, 2],
                       zone_nodes=[0, 2], demand=[[0, 5], [5, 0]], **costs)

    road = [False, False, False, True, False]
    flat = {"alpha": [0.0, 0.0, 0.0, 0.15, 0.0]}
    assert star(**flat).connectors.tolist() == [not r for r in road]
    assert star(beta=[0.0, 0.0, 0.0, 4.0, 0.0]).connectors.tolist() == [not r for r in road]
    assert star(cost_kind=2, **flat).connectors.tolist() == [not r for r in road]
    # a conical cost always grows with volume: its zone end (node 0) is a road node
    conical = star(cost_kind=[1, 0, 0, 0, 0], alpha=[4.0, 0, 0, 0.15, 0])
    assert conical.connectors.tolist() == [False, True, True, False, False]


def test_a_link_named_a_connector_is_one_whatever_its_cost():
    net = corner_grid()
    kind = np.array(["street"] * net.n_links, dtype=object)
    at_zone = np.flatnonzero(net.tail == net.zone_nodes[0])
    away = np.flatnonzero(~np.isin(net.tail, net.zone_nodes)
                          & ~np.isin(net.head, net.zone_nodes))[0]
    kind[at_zone] = "Zone Connector"
    kind[away] = "connector"  # touches no zone: not a zone connector
    named = net.replace(link_attrs={"facility_type": kind})
    expected = np.zeros(net.n_links, dtype=bool)
    expected[at_zone] = True
    np.testing.assert_array_equal(named.connectors, expected)


def test_when_every_link_would_be_a_connector_none_is():
    # two centroids meeting at one node: no roads to set the links apart from
    net = Network(node_ids=[1, 2, 3], tail=[0, 1], head=[1, 2], capacity=1.0,
                  free_flow_time=1.0, alpha=0.0, zone_ids=[1, 2], zone_nodes=[0, 2],
                  demand=[[0, 1], [0, 0]])
    assert not net.connectors.any()


# ------------------------------------------------------------------ flow maps
def test_connectors_are_thin_grey_dashes_beneath_the_roads(town):
    net, flow = town
    is_conn = net.connectors
    fig = flow_map(net, flow)
    roads, conns = layer(fig, "links"), layer(fig, "connectors")
    assert len(roads.get_segments()) == int(np.sum(~is_conn))
    assert len(conns.get_segments()) == int(np.sum(is_conn))
    # connectors on their centre line between their own nodes, both directions of a
    # pair drawn from the same end so that their dashes fall on each other
    seg = np.asarray(conns.get_segments())
    lo = np.minimum(net.tail, net.head)[is_conn]
    hi = np.maximum(net.tail, net.head)[is_conn]
    np.testing.assert_allclose(seg[:, 0], np.column_stack([net.x[lo], net.y[lo]]), atol=1e-12)
    np.testing.assert_allclose(seg[:, 1], np.column_stack([net.x[hi], net.y[hi]]), atol=1e-12)
    # one thin width whatever the volume, well under the widest road
    conn_w = np.asarray(conns.get_linewidths())
    road_w = np.asarray(roads.get_linewidths())
    assert np.ptp(conn_w) == 0.0
    assert conn_w.max() < 0.25 * road_w.max()
    # grey (next to no hue), lighter than the ink, dashed; the roads are solid
    rgba = to_rgba_array(conns.get_colors())
    assert np.all(np.ptp(rgba[:, :3], axis=1) < 0.1)
    assert np.all(rgba[:, :3].mean(axis=1) > 0.5)
    assert all(dashed(conns)) and not any(dashed(roads))
    assert conns.get_zorder() < roads.get_zorder()


def test_the_key_names_the_zone_connector(town):
    net, flow = town
    fig = flow_map(net, flow)
    conns = layer(fig, "connectors")
    (line,) = key_lines(fig)
    assert line.get_linewidth() == pytest.approx(conns.get_linewidths()[0])
    np.testing.assert_allclose(to_rgba_array(line.get_color()), conns.get_colors())
    assert line.get_linestyle() != "-"
    key_texts = [t.get_text() for t in line.axes.texts]
    assert "zone connector" in key_texts and "zone centroid" in key_texts
    assert "Zone connectors are not drawn to scale" in " ".join(
        text(fig, "congest-footnote").split())


def test_connector_volumes_set_neither_scale(town):
    net, flow = town
    is_conn = net.connectors
    quiet = np.where(is_conn, 0.0, flow)
    loud = layer(flow_map(net, flow), "links")
    calm = layer(flow_map(net, quiet), "links")
    np.testing.assert_allclose(loud.get_linewidths(), calm.get_linewidths())
    np.testing.assert_allclose(loud.get_colors(), calm.get_colors())
    # the busiest road is drawn at full width
    widths = np.asarray(loud.get_linewidths())
    assert widths[int(np.argmax(flow[~is_conn]))] == pytest.approx(widths.max())
    # so does the scale shared by a set of maps
    assert flow_scales(net, flow) == flow_scales(net, quiet)
    assert flow_scales(net, flow, 0.5 * flow)["volume_max"] == pytest.approx(
        flow[~is_conn].max())
    # a connector far over its (nominal) capacity leaves the colour bar alone
    tight = net.replace(capacity=np.where(is_conn, 1.0, net.capacity))
    fig = flow_map(tight, flow)
    cbar = next(ax for ax in fig.axes if ax.get_ylabel() == "Volume / capacity")
    road_vc = flow[~is_conn] / tight.period_capacity[~is_conn]
    top = np.clip(np.ceil(road_vc.max() * 4.0) / 4.0, 1.0, 2.0)
    np.testing.assert_allclose(cbar.get_ylim(), (0.0, top))
    assert flow_scales(tight, flow)["vc_max"] == pytest.approx(top)


def test_the_subtitle_counts_road_links(town):
    net, flow = town
    net = net.replace(capacity=np.where(net.connectors, 100.0, net.capacity))
    n_roads = int(np.sum(~net.connectors))
    over = flow > net.period_capacity
    assert over[net.connectors].all()  # connectors over capacity are not counted
    sub = text(flow_map(net, flow), "congest-subtitle")
    assert sub == f"{int(over[~net.connectors].sum())} of {n_roads} road links over capacity"
    ue = congest.solve(net, tol=1e-6)
    assert f"of {n_roads} road links over capacity" in text(flow_map(net, ue),
                                                              "congest-subtitle")


def test_networks_without_connectors_draw_as_before():
    net = corner_grid()
    fig = flow_map(net, np.linspace(0, 500, net.n_links))
    assert len(layer(fig, "links").get_segments()) == net.n_links
    assert layers(fig, "connectors") == [] and key_lines(fig) == []
    assert text(fig, "congest-subtitle").endswith(f"of {net.n_links} links over capacity")
    assert "Zone connectors" not in text(fig, "congest-footnote")


# ------------------------------------------------------------ other maps
def test_difference_map_keeps_connectors_out_of_its_scale(town):
    net, flow = town
    is_conn = net.connectors
    change = np.random.default_rng(4).uniform(-80.0, 60.0, net.n_links)
    change[is_conn] *= 50.0
    fig = difference_map(net, flow, flow + change, labels=("UE", "SO"))
    assert len(layer(fig, "links").get_segments()) == int(np.sum(~is_conn))
    assert len(layer(fig, "connectors").get_segments()) == int(np.sum(is_conn))
    cbar = next(ax for ax in fig.axes if "SO minus UE" in ax.get_ylabel())
    lo, hi = cbar.get_ylim()
    assert hi >= np.abs(change[~is_conn]).max() and hi < np.abs(change[is_conn]).max()
    assert len(key_lines(fig)) == 1
    assert "Zone connectors are not drawn to scale" in " ".join(
        text(fig, "congest-footnote").split())
    n_up = int(np.sum(change[~is_conn] > 0))
    assert f"{n_up} road links gain volume" in text(fig, "congest-subtitle")


def test_toll_map_draws_untolled_connectors_as_connectors(town):
    net, flow = town
    is_conn = net.connectors
    toll = np.zeros(net.n_links)
    roads = np.flatnonzero(~is_conn)
    toll[roads[:3]] = [1.0, 2.0, 3.0]
    for volumes in (None, flow):
        fig = toll_map(net, toll, flow=volumes, currency="crowns")
        assert len(layer(fig, "links").get_segments()) == 3
        assert len(layer(fig, "context").get_segments()) == int(np.sum(~is_conn)) - 3
        assert len(layer(fig, "connectors").get_segments()) == int(np.sum(is_conn))
        assert len(key_lines(fig)) == 1
