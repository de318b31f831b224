"""GMNS folder reading and writing (General Modeling Network Specification v0.96).

Semantics checked against the GMNS v0.96 specification (Zephyr Foundation,
github.com/zephyr-data-specs/GMNS, link and config tables): capacity is per lane per
hour, ``directed=false`` is a two-way link, length is in ``long_length`` units and
free speed in ``speed`` units, user columns start with ``u_``.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from numpy.testing import assert_allclose, assert_array_equal

from congest.exceptions import InputError
from congest.io import read_gmns, read_network, write_gmns
from congest.network import COST_KINDS

NETWORKS = Path(__file__).resolve().parents[1] / "networks"

NODES = """node_id,x_coord,y_coord,zone_id,node_type,district
1,0,0,1,centroid,north
2,1000,0,,,north
3,1000,1000,,,south
4,0,1000,2,centroid,south
"""

LINKS = """\
link_id,from_node_id,to_node_id,directed,length,lanes,capacity,free_speed,toll,facility_type,surface
10,1,2,true,1.5,2,900,45,0,arterial,asphalt
11,2,3,false,1.0,1,800,30,0.5,street,cobbles
12,3,4,true,2.0,3,1000,60,0,arterial,asphalt
13,1,4,true,6.0,1,1200,60,0,ring,asphalt
"""

TRIPS = """origin_zone,destination_zone,trips
1,2,500
2,1,120
"""


def make_folder(path, nodes=NODES, links=LINKS, trips=TRIPS, config="long_length,speed\nkm,kph\n",
                settings=None):
    path.mkdir(parents=True, exist_ok=True)
    (path / "node.csv").write_text(nodes)
    (path / "link.csv").write_text(links)
    if trips is not None:
        (path / "trips.csv").write_text(trips)
    if config is not None:
        (path / "config.csv").write_text(config)
    if settings is not None:
        (path / "scenario.json").write_text(json.dumps(settings))
    return path


def test_capacity_is_per_lane_times_lanes(tmp_path):
    # GMNS v0.96 link table: capacity "per lane per hour"; link capacity = capacity x lanes
    net = read_gmns(make_folder(tmp_path))
    k = net.link_index(10)
    assert net.capacity[k] == pytest.approx(2 * 900)
    assert net.capacity[net.link_index(12)] == pytest.approx(3 * 1000)
    assert_array_equal(net.link_attrs["lanes"][[k]], [2])


def test_undirected_link_becomes_two_directed_links(tmp_path):
    net = read_gmns(make_folder(tmp_path))
    assert net.n_links == 5  # four rows, one of them two-way
    fwd, rev = net.link_index(11), net.link_index(-11)
    assert rev == fwd + 1  # reverse right after its forward link
    ids = net.node_ids
    assert (ids[net.tail[fwd]], ids[net.head[fwd]]) == (2, 3)
    assert (ids[net.tail[rev]], ids[net.head[rev]]) == (3, 2)
    for name in ("capacity", "free_flow_time", "length", "toll"):
        assert getattr(net, name)[fwd] == getattr(net, name)[rev]
    assert net.link_attrs["surface"][rev] == "cobbles"


def test_free_flow_time_from_length_and_speed(tmp_path):
    net = read_gmns(make_folder(tmp_path))
    # 1.5 km at 45 km/h = 2 minutes (common practice: t = 60 * length / speed)
    assert net.free_flow_time[net.link_index(10)] == pytest.approx(2.0)
    assert net.free_flow_time[net.link_index(13)] == pytest.approx(6.0)
    assert net.length_unit == "km"


# 1 mile = 1.609344 km and 1 ft = 0.3048 m exactly (international yard and pound, 1959)
@pytest.mark.parametrize("long_length, speed, length, free_speed, minutes", [
    ("km", "kph", 1.5, 45, 2.0),
    ("mi", "mph", 1.0, 30, 2.0),
    ("m", "km/h", 500, 30, 1.0),
    ("ft", "mph", 5280, 60, 1.0),
    ("km", "m/s", 0.9, 15, 1.0),
    ("mi", "kph", 1.0, 1.609344 * 60, 1.0),
    ("meters", "mph", 1609.344, 60, 1.0),
])
def test_unit_conversion(tmp_path, long_length, speed, length, free_speed, minutes):
    links = ("link_id,from_node_id,to_node_id,length,capacity,free_speed\n"
             f"1,1,4,{length},1000,{free_speed}\n")
    net = read_gmns(make_folder(tmp_path, links=links,
                                config=f"long_length,speed\n{long_length},{speed}\n"))
    assert net.free_flow_time[0] == pytest.approx(minutes, rel=1e-12)


def test_without_config_length_per_hour_is_assumed(tmp_path):
    links = "link_id,from_node_id,to_node_id,length,capacity,free_speed\n1,1,4,2,1000,60\n"
    net = read_gmns(make_folder(tmp_path, links=links, config=None))
    assert net.free_flow_time[0] == pytest.approx(2.0)
    assert net.length_unit == ""


def test_user_columns_for_cost_function(tmp_path):
    links = ("link_id,from_node_id,to_node_id,length,capacity,free_speed,u_free_flow_time,"
             "u_cost_kind,u_alpha,u_beta,u_fixed_cost\n"
             "1,1,2,1,1000,60,3.5,conical,4,,0.25\n"
             "2,2,4,1,1000,60,,polynomial,2,1,\n"
             "3,1,4,1,1000,60,,,,,\n")
    net = read_gmns(make_folder(tmp_path, links=links),
                    alpha=0.5, beta=5.0)  # defaults for the empty cells
    assert net.free_flow_time[0] == 3.5  # explicit u_free_flow_time wins
    assert net.free_flow_time[1] == pytest.approx(1.0)  # 1 km at 60 km/h
    assert net.cost_kind.tolist() == [COST_KINDS["conical"], COST_KINDS["polynomial"],
                                      COST_KINDS["bpr"]]
    assert net.alpha.tolist() == [4.0, 2.0, 0.5]
    assert net.beta.tolist() == [5.0, 1.0, 5.0]
    assert net.fixed_cost.tolist() == [0.25, 0.0, 0.0]


def test_extra_columns_are_kept(tmp_path):
    net = read_gmns(make_folder(tmp_path))
    assert net.link_attrs["facility_type"].tolist() == [
        "arterial", "street", "street", "arterial", "ring"]
    assert net.link_attrs["surface"][0] == "asphalt"
    assert net.node_attrs["district"].tolist() == ["north", "north", "south", "south"]
    assert net.node_attrs["node_type"][0] == "centroid"


def test_zones_demand_and_settings(tmp_path):
    settings = {"period_hours": 2.0, "value_of_time": 30.0, "currency": "crowns",
                "through_centroids": True, "name": "tiny",
                "default_cost": {"alpha": 0.5}}
    net = read_gmns(make_folder(tmp_path, settings=settings))
    assert net.zone_ids.tolist() == [1, 2]
    assert net.node_ids[net.zone_nodes].tolist() == [1, 4]
    assert_array_equal(net.demand, [[0, 500], [120, 0]])
    assert net.period_hours == 2.0 and net.value_of_time == 30.0
    assert net.currency == "crowns" and net.name == "tiny" and net.through_centroids
    assert_allclose(net.alpha, 0.5)
    assert_allclose(net.x, [0, 1000, 1000, 0])
    # toll of 0.5 crowns at 30 crowns/hour is one minute of generalized cost
    assert net.constant_cost[net.link_index(11)] == pytest.approx(1.0)


def test_overrides_beat_settings(tmp_path):
    folder = make_folder(tmp_path, settings={"period_hours": 2.0})
    net = read_gmns(folder, period_hours=3.0, through_centroids=True)
    assert net.period_hours == 3.0 and net.through_centroids


def test_zone_shared_by_nodes_uses_the_centroid(tmp_path):
    nodes = NODES.replace("2,1000,0,,,north", "2,1000,0,1,,north")
    net = read_gmns(make_folder(tmp_path, nodes=nodes))
    assert net.node_ids[net.zone_nodes].tolist() == [1, 4]


def test_zone_shared_without_centroid_mark_is_an_error(tmp_path):
    nodes = NODES.replace("1,0,0,1,centroid", "1,0,0,1,").replace("2,1000,0,,,", "2,1000,0,1,,")
    with pytest.raises(InputError, match="zone 1 is given to several nodes") as err:
        read_gmns(make_folder(tmp_path, nodes=nodes))
    assert err.value.row == 3 and err.value.column == "zone_id"


def test_no_trip_table_means_no_demand(tmp_path):
    net = read_gmns(make_folder(tmp_path, trips=None))
    assert net.total_demand == 0.0


def test_named_trip_table_must_exist(tmp_path):
    folder = make_folder(tmp_path, trips=None, settings={"trips_file": "am_peak.csv"})
    with pytest.raises(InputError, match="trip table not found"):
        read_gmns(folder)


def test_trip_table_named_with_the_default_name_must_exist(tmp_path):
    # a settings file that names trips.csv (the default name) means the network has
    # trips: a deleted trips.csv is an error, not a silent zero-demand network
    folder = make_folder(tmp_path, trips=None, settings={"trips_file": "trips.csv"})
    with pytest.raises(InputError, match=r"trip table not found \(named by scenario.json\)"):
        read_gmns(folder)



def test_unknown_setting_is_an_error(tmp_path):
    with pytest.raises(InputError, match="unknown setting 'period'"):
        read_gmns(make_folder(tmp_path, settings={"period": 2}))


def test_round_trip(tmp_path):
    net = read_gmns(make_folder(tmp_path / "a", settings={"value_of_time": 25.0,
                                                          "currency": "crowns"}))
    write_gmns(net, tmp_path / "b")
    back = read_gmns(tmp_path / "b")
    for name in ("node_ids", "tail", "head", "link_ids", "zone_ids", "zone_nodes",
                 "cost_kind"):
        assert_array_equal(getattr(back, name), getattr(net, name), err_msg=name)
    for name in ("capacity", "free_flow_time", "alpha", "beta", "toll", "fixed_cost",
                 "length", "x", "y", "demand"):
        assert_allclose(getattr(back, name), getattr(net, name), rtol=1e-15, err_msg=name)
    for name in ("period_hours", "value_of_time", "currency", "length_unit",
                 "through_centroids", "name"):
        assert getattr(back, name) == getattr(net, name), name
    assert back.link_attrs["surface"].tolist() == net.link_attrs["surface"].tolist()
    assert back.node_attrs["district"].tolist() == net.node_attrs["district"].tolist()


def test_round_trip_of_demo_city(tmp_path):
    net = read_network(NETWORKS / "quillhaven")
    write_gmns(net, tmp_path)
    back = read_gmns(tmp_path)
    assert_array_equal(back.link_ids, net.link_ids)
    assert_allclose(back.free_flow_time, net.free_flow_time, rtol=1e-15)
    assert_allclose(back.capacity, net.capacity, rtol=1e-15)
    assert_allclose(back.demand, net.demand, rtol=1e-15)
    # the committed files are exactly what write_gmns produces
    for name in ("node.csv", "link.csv", "trips.csv", "config.csv"):
        assert (tmp_path / name).read_text() == (
            NETWORKS / "quillhaven" / name).read_text(), name


def test_write_gmns_of_plain_network(tmp_path):
    from congest.network import Network

    net = Network(node_ids=[5, 6, 7], tail=[0, 1], head=[1, 2], capacity=[1000.0, 500.0],
                  free_flow_time=[2.0, 3.0], zone_ids=[1, 2], zone_nodes=[0, 2],
                  demand=[[0, 10], [0, 0]], name="plain")
    write_gmns(net, tmp_path)
    back = read_gmns(tmp_path)
    assert_allclose(back.free_flow_time, [2.0, 3.0])
    assert back.zone_ids.tolist() == [1, 2]
    assert_allclose(back.demand, net.demand)


def test_read_network_detects_gmns(tmp_path):
    net = read_network(make_folder(tmp_path))
    assert net.n_links == 5


def test_gmns_rejects_table_options(tmp_path):
    with pytest.raises(InputError, match="zones"):
        read_network(make_folder(tmp_path), zones="1-2")
