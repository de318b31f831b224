"""Plain link/OD tables, including the open benchmark networks beside the project."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import REFERENCE_NAMES, load_reference, reference_dir, reference_meta
from numpy.testing import assert_allclose, assert_array_equal

from congest.costs import CostModel
from congest.exceptions import InputError
from congest.io import parse_zones, read_network, read_tables

LINKS = """from_node,to_node,capacity,free_flow_time,alpha,beta,toll,length,link_type
1,3,1000,2,0.15,4,0,1.0,1
3,4,2000,3,0.3,2,5,2.0,2
4,2,1000,2,,,0,1.5,1
1,2,500,12,0,0,0,8.0,3
"""
OD = "origin,destination,volume\n1,2,100\n2,1,40\n"


def tables(tmp_path, links=LINKS, od=OD):
    (tmp_path / "links.csv").write_text(links)
    (tmp_path / "demand.csv").write_text(od)
    return tmp_path / "links.csv", tmp_path / "demand.csv"


def test_read_tables_fields(tmp_path):
    net = read_tables(*tables(tmp_path))
    assert net.node_ids.tolist() == [1, 2, 3, 4]
    assert net.zone_ids.tolist() == [1, 2]  # default: the nodes in the OD table
    assert_array_equal(net.demand, [[0, 100], [40, 0]])
    assert_allclose(net.capacity, [1000, 2000, 1000, 500])
    assert_allclose(net.alpha, [0.15, 0.3, 0.15, 0.0])  # empty cell -> BPR default 0.15
    assert_allclose(net.beta, [4, 2, 4, 0])
    assert_allclose(net.toll, [0, 5, 0, 0])  # money by default
    assert net.link_ids.tolist() == [1, 2, 3, 4]
    assert net.link_attrs["link_type"].tolist() == [1, 2, 1, 3]
    assert not net.through_centroids
    assert net.name == tmp_path.name


def test_toll_and_length_weights_make_constant_cost(tmp_path):
    net = read_tables(*tables(tmp_path), toll_weight=0.02, length_weight=0.04)
    assert_allclose(net.fixed_cost, 0.02 * np.array([0, 5, 0, 0]) + 0.04 * np.array(
        [1.0, 2.0, 1.5, 8.0]))
    assert_allclose(net.toll, 0.0)  # not counted twice
    assert_allclose(net.link_attrs["toll"], [0, 5, 0, 0])


def test_explicit_zones_and_passable_zones(tmp_path):
    net = read_tables(*tables(tmp_path), zones="1-3", through_centroids=True)
    assert net.zone_ids.tolist() == [1, 2, 3]
    assert net.through_centroids
    assert_array_equal(net.demand[:2, :2], [[0, 100], [40, 0]])


def test_od_row_outside_the_zones_is_an_error(tmp_path):
    with pytest.raises(InputError, match="unknown zone") as err:
        read_tables(*tables(tmp_path), zones=[1, 3])
    assert (err.value.row, err.value.column, err.value.value) == (2, "destination", 2)


def test_trips_column_name_is_accepted(tmp_path):
    net = read_tables(*tables(tmp_path, od="origin,destination,trips\n1,2,7\n"))
    assert net.total_demand == 7


def test_read_network_on_plain_folder_and_file(tmp_path):
    links, od = tables(tmp_path)
    assert read_network(tmp_path).n_links == 4
    assert read_network(links, zones=[1, 2]).n_zones == 2
    other = tmp_path / "other_od.csv"
    other.write_text("origin,destination,volume\n1,2,3\n")
    assert read_network(links, demand=other).total_demand == 3


@pytest.mark.parametrize("spec, ids", [("1-3", [1, 2, 3]), ("1-2,5,7-8", [1, 2, 5, 7, 8]),
                                       (range(4, 6), [4, 5]), ("od", None), (None, None)])
def test_parse_zones(spec, ids):
    out = parse_zones(spec)
    assert (out is None and ids is None) or out.tolist() == ids


@pytest.mark.parametrize("spec", ["1-", "a,b", "5-1", "1,1"])
def test_parse_zones_rejects(spec):
    with pytest.raises(InputError):
        parse_zones(spec)


# ------------------------------------------------------------ reference networks
@pytest.mark.parametrize("name", REFERENCE_NAMES)
def test_reference_network_sizes(name):
    # sizes and totals stated in each network's meta.json (from the source files' headers)
    meta = reference_meta(name)
    net = load_reference(name)
    assert net.n_links == meta["number_of_links"]
    assert net.n_zones == meta["number_of_zones"]
    assert net.total_demand == pytest.approx(meta["total_od_flow"], rel=1e-9)
    assert net.through_centroids == (meta["first_thru_node"] == 1)


@pytest.mark.parametrize("name", REFERENCE_NAMES)
def test_reference_costs_at_published_flows(name):
    # The published best-known UE files list each link's cost at its volume (Transportation
    # Networks for Research collection; see the shared README). Reading capacity, free-flow
    # time, alpha, beta and the Chicago Sketch generalized-cost weights correctly
    # reproduces those costs.
    from conftest import reference_ue_flows

    net = load_reference(name)
    published = np.genfromtxt(reference_dir(name) / "ue_flows.csv", delimiter=",",
                              names=True)
    cost = CostModel.from_network(net).cost(reference_ue_flows(name))
    assert_allclose(cost, published["cost"], rtol=1e-9, atol=1e-9)


def test_reference_loads_through_read_network():
    path = reference_dir("anaheim")
    net = read_network(path, zones="1-38")
    assert net.n_zones == 38 and not net.through_centroids
    assert_allclose(net.capacity, load_reference("anaheim").capacity)


def test_zero_capacity_on_polynomial_link_is_an_error(tmp_path):
    links = ("from_node,to_node,capacity,free_flow_time,alpha,beta,cost_kind\n"
             "1,2,0,1,2,1,polynomial\n")
    with pytest.raises(InputError, match="capacity is zero") as err:
        read_tables(*tables(tmp_path, links=links, od="origin,destination,volume\n1,2,1\n"))
    assert (err.value.row, err.value.column) == (2, "capacity")


def test_bom_crlf_and_spaces_are_accepted(tmp_path):
    links = "\ufefffrom_node, to_node ,capacity,free_flow_time\r\n1, 2 ,1000,5\r\n2,3,1000,5\r\n"
    net = read_tables(*tables(tmp_path, links=links, od="origin,destination,volume\r\n1,3,50\r\n"))
    assert net.n_links == 2 and net.total_demand == 50


def test_row_longer_than_header_is_an_error(tmp_path):
    with pytest.raises(InputError, match="row has 4 cells but the header has 3") as err:
        read_tables(*tables(tmp_path, od="origin,destination,volume\n1,2,5\n2,1,3,4\n"))
    assert err.value.row == 3 and err.value.path.endswith("demand.csv")


def test_file_that_is_not_text_is_an_error(tmp_path):
    links, od = tables(tmp_path)
    od.write_bytes(b"origin,destination,volume\n1,2,\xff\n")
    with pytest.raises(InputError, match="not UTF-8"):
        read_tables(links, od)
