"""Write-then-read round trips on many seeded random networks (seeds 0..19)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from congest.io import from_networkx, read_gmns, read_tables, to_networkx, write_gmns
from congest.network import Network


def random_network(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 25))
    node_ids = rng.choice(np.arange(1, 1000), size=n, replace=False)
    m = int(rng.integers(n, 4 * n))
    tail = rng.integers(0, n, m)
    head = (tail + rng.integers(1, n, m)) % n  # never a self-loop
    kind = rng.choice([0, 1, 2], m, p=[0.6, 0.2, 0.2]).astype(np.int8)
    alpha = np.where(kind == 1, rng.uniform(1.5, 6, m), rng.uniform(0, 1, m))
    alpha[rng.random(m) < 0.1] = 0.0
    alpha[kind == 1] = np.maximum(alpha[kind == 1], 1.5)
    z = int(rng.integers(2, min(n, 8) + 1))
    zone_nodes = rng.choice(n, size=z, replace=False)
    demand = rng.uniform(0, 100, (z, z)) * (rng.random((z, z)) < 0.6)
    words = np.array(["main st", "ring, north", 'say "hi"', "", "Brücke"], dtype=object)
    return Network(
        node_ids=node_ids, tail=tail, head=head, capacity=rng.uniform(100, 5000, m),
        free_flow_time=rng.uniform(0, 10, m), alpha=alpha, beta=rng.uniform(0, 6, m),
        cost_kind=kind, fixed_cost=rng.uniform(0, 1, m) * (rng.random(m) < 0.3),
        toll=rng.uniform(0, 5, m) * (rng.random(m) < 0.3), length=rng.uniform(0.1, 5, m),
        link_ids=rng.choice(np.arange(1, 10 * m), size=m, replace=False),
        x=rng.uniform(-1e4, 1e4, n), y=rng.uniform(-1e4, 1e4, n),
        # readers order zones by id, so the round trip is exact for sorted ids
        zone_ids=np.sort(rng.choice(np.arange(1, 500), size=z, replace=False)),
        zone_nodes=zone_nodes,
        demand=demand, through_centroids=bool(rng.random() < 0.5),
        period_hours=float(rng.choice([1.0, 2.5])), value_of_time=float(rng.uniform(5, 50)),
        currency="crowns", length_unit=str(rng.choice(["km", "mi", "m"])), name=f"r{seed}",
        link_attrs={"label": words[rng.integers(0, words.size, m)],
                    "lanes": rng.integers(1, 4, m)},
        node_attrs={"district": words[rng.integers(0, words.size, n)]},
    )


def assert_same(a, b, exact_ids=True):
    for name in ("node_ids", "tail", "head", "link_ids", "zone_ids", "zone_nodes",
                 "cost_kind"):
        assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
    for name in ("capacity", "free_flow_time", "alpha", "beta", "toll", "fixed_cost",
                 "length", "x", "y", "demand"):
        assert_allclose(getattr(b, name), getattr(a, name), rtol=1e-14, atol=0,
                        err_msg=name)
    for name in ("through_centroids", "period_hours", "value_of_time", "currency", "name"):
        assert getattr(a, name) == getattr(b, name), name


@pytest.mark.parametrize("seed", range(20))
def test_gmns_round_trip(tmp_path, seed):
    net = random_network(seed)
    write_gmns(net, tmp_path)
    back = read_gmns(tmp_path)
    assert_same(net, back)
    assert back.length_unit == net.length_unit
    labels = ["" if v is None or v != v else v for v in back.link_attrs["label"]]
    assert labels == net.link_attrs["label"].tolist()
    assert_array_equal(back.link_attrs["lanes"], net.link_attrs["lanes"])
    # writing what was read gives the same files again
    write_gmns(back, tmp_path / "again")
    for name in ("node.csv", "link.csv", "trips.csv", "config.csv", "scenario.json"):
        assert (tmp_path / name).read_bytes() == (tmp_path / "again" / name).read_bytes()


@pytest.mark.parametrize("seed", range(20))
def test_networkx_round_trip(seed):
    net = random_network(seed)
    assert_same(net, from_networkx(to_networkx(net)))


@pytest.mark.parametrize("seed", range(10))
def test_plain_tables_round_trip(tmp_path, seed):
    net = random_network(seed)
    links = pd.DataFrame({
        "link_id": net.link_ids, "from_node": net.node_ids[net.tail],
        "to_node": net.node_ids[net.head], "capacity": net.capacity,
        "free_flow_time": net.free_flow_time, "alpha": net.alpha, "beta": net.beta,
        "cost_kind": net.cost_kind, "toll": net.toll, "length": net.length,
        "fixed_cost": net.fixed_cost})
    o, d, q = net.od_pairs()
    od = pd.DataFrame({"origin": net.node_ids[net.zone_nodes[o]],
                       "destination": net.node_ids[net.zone_nodes[d]], "volume": q})
    links.to_csv(tmp_path / "links.csv", index=False)
    od.to_csv(tmp_path / "demand.csv", index=False)
    back = read_tables(tmp_path / "links.csv", tmp_path / "demand.csv",
                       zones=net.node_ids[net.zone_nodes])
    for name in ("capacity", "free_flow_time", "alpha", "beta", "toll", "fixed_cost",
                 "length"):
        assert_allclose(getattr(back, name), getattr(net, name), rtol=1e-15, err_msg=name)
    assert_array_equal(back.link_ids, net.link_ids)
    assert_array_equal(back.cost_kind, net.cost_kind)
    ids = back.node_ids
    assert_array_equal(ids[back.tail], net.node_ids[net.tail])
    assert_array_equal(ids[back.head], net.node_ids[net.head])
    assert_allclose(back.demand, net.demand, rtol=1e-15)


def test_unsorted_zone_ids_keep_their_trips(tmp_path):
    net = random_network(3)
    order = np.arange(net.n_zones)[::-1]
    shuffled = net.replace(zone_ids=net.zone_ids[order], zone_nodes=net.zone_nodes[order],
                           demand=net.demand[np.ix_(order, order)])
    write_gmns(shuffled, tmp_path)
    back = read_gmns(tmp_path)
    assert_array_equal(back.zone_ids, net.zone_ids)  # zones come back in id order
    assert_allclose(back.demand, net.demand, rtol=1e-15)
