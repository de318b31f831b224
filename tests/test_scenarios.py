"""Scenario comparison on hand-solved routes, and the toll-plan file reader."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from congest.exceptions import InputError
from congest.io.tollplan import read_toll_plan
from congest.network import Network
from congest.pricing import TollPlan, apply_toll_plan
from congest.scenarios import LINK_COLUMNS, TABLE_COLUMNS, compare

TOL = 1e-11


def two_routes():
    """Routes t1 = 2 + x1 and t2 = 1 + 2 x2, two trips, value of time 60 per hour (so
    one money unit is one minute). By hand (Wardrop 1952): UE (1, 1), total 6; SO
    from 2 + 2 x1 = 1 + 4 x2: (7/6, 5/6), total 213/36; marginal-cost tolls x t' =
    (7/6, 5/3) minutes."""
    return Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                   free_flow_time=[2.0, 1.0], alpha=[1.0, 2.0], beta=1.0, cost_kind=2,
                   zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, 2.0], [0, 0]],
                   length=[3.0, 1.0], value_of_time=60.0, currency="crowns",
                   link_attrs={"facility_type": np.array(["road", "bridge"], dtype=object)})


def test_compare_two_routes():
    net = two_routes()
    # a charge of 0.5 on route 2 alone reaches SO: 2 + 7/6 = 1 + 2 * 5/6 + 0.5
    plan = TollPlan(name="bridge charge", charge=np.array([0.0, 0.5]))
    cmp = compare(net, advice_share=0.75, toll_plans=[plan], tol=TOL, n_days=22, burn_in=2)
    t = cmp.table
    assert list(t.columns) == list(TABLE_COLUMNS)
    assert list(t.index) == ["free_flow_advice", "reactive_advice", "advice_share",
                             "user_equilibrium", "system_optimum", "marginal_cost_tolls",
                             "plan_bridge_charge"]
    so = 213.0 / 36.0
    minutes = t["vehicle_hours"] * 60.0
    # free-flow advice: both trips on route 2 at 5 minutes
    assert minutes["free_flow_advice"] == pytest.approx(10.0)
    # reactive advice alternates days of 10 and 8 vehicle-minutes
    assert minutes["reactive_advice"] == pytest.approx(9.0)
    # 3/4 advised: 1.5 trips on route 2 at 4 minutes, 0.5 on route 1 at 2.5
    assert minutes["advice_share"] == pytest.approx(7.25, abs=1e-6)
    assert minutes["user_equilibrium"] == pytest.approx(6.0, abs=1e-8)
    assert minutes["system_optimum"] == pytest.approx(so, abs=1e-8)
    assert minutes["marginal_cost_tolls"] == pytest.approx(so, abs=1e-6)
    assert minutes["plan_bridge_charge"] == pytest.approx(so, abs=1e-6)
    assert t.loc["user_equilibrium", "ratio_to_so"] == pytest.approx(6.0 / so, rel=1e-8)
    assert t.loc["system_optimum", "ratio_to_so"] == 1.0
    assert t.loc["free_flow_advice", "ratio_to_so"] == pytest.approx(10.0 / so)
    # revenue at SO flows: (7/6)^2 + (5/6)(5/3) = 99/36 minutes = crowns at 60/h
    assert t.loc["marginal_cost_tolls", "revenue_money"] == pytest.approx(99 / 36, abs=1e-6)
    assert t.loc["plan_bridge_charge", "revenue_money"] == pytest.approx(0.5 * 5 / 6, abs=1e-6)
    assert t.loc["user_equilibrium", "revenue_money"] == 0.0
    # trip times and distances
    assert t.loc["user_equilibrium", "mean_trip_time_min"] == pytest.approx(3.0, abs=1e-8)
    assert t.loc["free_flow_advice", "vehicle_distance"] == pytest.approx(2.0)
    assert t.loc["user_equilibrium", "vehicle_distance"] == pytest.approx(4.0, abs=1e-8)
    # v/c: capacity 1 per hour, so free-flow advice puts 2 on route 2
    assert t.loc["free_flow_advice", "max_volume_capacity"] == pytest.approx(2.0)
    assert t.loc["free_flow_advice", "links_over_capacity"] == 1
    # gaps: the UE rows are equilibria, advice and SO flows are not
    assert t.loc["user_equilibrium", "wardrop_gap"] <= 1e-10
    assert t.loc["free_flow_advice", "wardrop_gap"] == pytest.approx(0.6)
    assert t.loc["system_optimum", "wardrop_gap"] > 1e-3
    assert np.isnan(t.loc["free_flow_advice", "relative_gap"])
    assert t.attrs["currency"] == "crowns"

    links = cmp.links
    assert set(links) == set(t.index)
    for frame in links.values():
        assert list(frame.columns) == list(LINK_COLUMNS)
    mc = links["marginal_cost_tolls"]
    assert_allclose(mc["volume"], [7 / 6, 5 / 6], atol=1e-6)
    assert_allclose(mc["toll_money"], [7 / 6, 5 / 3], atol=1e-6)
    # drivers' cost includes the toll: 2 + 7/6 + 7/6 on route 1
    assert mc["cost"].iloc[0] == pytest.approx(2 + 7 / 3, abs=1e-6)
    assert_allclose(links["reactive_advice"]["volume"], [1.0, 1.0])
    assert cmp.results["first_best"].price_of_anarchy == pytest.approx(6.0 / so, rel=1e-8)


def test_apply_toll_plan_generalized_cost():
    net = two_routes().replace(value_of_time=30.0)
    # 30 per hour: 0.25 money = 0.5 minutes on route 2 reaches SO (see two_routes)
    res = apply_toll_plan(net, TollPlan("p", np.array([0.0, 0.25])), tol=TOL)
    assert_allclose(res.equilibrium.flow, [7 / 6, 5 / 6], atol=1e-6)
    assert res.system_cost == pytest.approx(213 / 36, abs=1e-6)
    # every trip's generalized cost is 2 + 7/6 minutes at the tolled UE
    assert res.mean_generalized_cost_min == pytest.approx(2 + 7 / 6, abs=1e-6)
    assert res.revenue_money == pytest.approx(0.25 * 5 / 6, abs=1e-6)


# ------------------------------------------------------------------- toll plans
def write(tmp_path, text, name="plan.csv"):
    path = tmp_path / name
    path.write_text(text)
    return path


def grid_net():
    return Network(node_ids=[1, 2, 3, 4], tail=[0, 1, 2, 0, 3], head=[1, 2, 3, 3, 2],
                   capacity=10.0, free_flow_time=1.0, zone_ids=[1, 3], zone_nodes=[0, 2],
                   demand=[[0, 5], [0, 0]], link_ids=[11, 12, 13, 14, 15],
                   link_attrs={"facility_type": np.array(["motorway", "street", "motorway",
                                                          "bridge", "street"], dtype=object),
                               "lanes": np.array([2, 1, 2, 3, 1])})


def test_read_toll_plan_rules(tmp_path):
    path = write(tmp_path, "attribute,equals,link_id,charge,window_start,window_end,note\n"
                 "facility_type,motorway,,2.00,07:00,09:30,all motorways\n"
                 ",,13,5,07:00,09:30,except this one\n"
                 "lanes,3,,1.5,,,\n")
    plan = read_toll_plan(path, grid_net())
    assert plan.charge.tolist() == [2.0, 0.0, 5.0, 1.5, 0.0]
    assert plan.window == ("07:00", "09:30")
    assert plan.name == "plan"
    assert plan.source == str(path)
    assert plan.tolled_links.tolist() == [0, 2, 3]
    applied = plan.apply(grid_net())
    assert applied.toll.tolist() == [2.0, 0.0, 5.0, 1.5, 0.0]


def test_read_toll_plan_by_id_only(tmp_path):
    plan = read_toll_plan(write(tmp_path, "link_id,charge\n14,3\n"), grid_net(), name="x")
    assert plan.charge.tolist() == [0.0, 0.0, 0.0, 3.0, 0.0]
    assert plan.window is None and plan.name == "x"


@pytest.mark.parametrize("text, row, column, value, words", [
    ("link_id,amount\n11,2\n", 1, "charge", None, "required column is missing"),
    ("note,charge\nx,2\n", 1, "link_id", None, "required column is missing"),
    ("link_id,charge,colour\n11,2,red\n", 1, "colour", None, "unknown column"),
    ("link_id,charge\n11,-2\n", 2, "charge", "-2", "negative"),
    ("link_id,charge\n11,two\n", 2, "charge", "two", "not a number"),
    ("link_id,charge\n11,\n", 2, "charge", "", "empty"),
    ("link_id,charge\n11,2\n99,1\n", 3, "link_id", "99", "no link with this id"),
    ("link_id,charge\n1.5,2\n", 2, "link_id", "1.5", "whole number"),
    ("attribute,equals,charge\nspeed,1,2\n", 2, "attribute", "speed", "no link attribute"),
    ("attribute,equals,charge\nfacility_type,tunnel,2\n", 2, "equals", "tunnel",
     "no link has facility_type"),
    ("attribute,charge\nfacility_type,2\n", 2, "equals", "", "needs the value"),
    ("link_id,attribute,equals,charge\n11,lanes,2,1\n", 2, "link_id", "11", "has both"),
    ("link_id,attribute,equals,charge\n,,,1\n", 2, "attribute", "", "has neither"),
    ("link_id,charge,window_start,window_end\n11,1,7am,09:00\n", 2, "window_start", "7am",
     "HH:MM"),
    ("link_id,charge,window_start,window_end\n11,1,07:00,\n", 2, "window_end", "",
     "needs both"),
    ("link_id,charge,window_start,window_end\n11,1,07:00,09:00\n12,1,16:00,18:00\n", 3,
     "window_start", "16:00", "share one time window"),
])
def test_read_toll_plan_errors(tmp_path, text, row, column, value, words):
    path = write(tmp_path, text)
    with pytest.raises(InputError, match=words) as info:
        read_toll_plan(path, grid_net())
    err = info.value
    assert err.path == str(path)
    assert err.row == row
    assert err.column == column
    if value is not None:
        assert err.value == value
    assert str(path) in str(err)


def test_read_toll_plan_missing_file(tmp_path):
    with pytest.raises(InputError, match="not found"):
        read_toll_plan(tmp_path / "none.csv", grid_net())


def test_reader_leaves_input_unchanged(tmp_path):
    text = "link_id,charge\n11,2\n"
    path = write(tmp_path, text)
    read_toll_plan(path, grid_net())
    assert path.read_text() == text


# ------------------------------------------------------------------- demo city
DEMO = Path(__file__).resolve().parents[1] / "networks" / "quillhaven"


@pytest.mark.slow
def test_demo_city_story():
    # the demo city is built so that selfish routing costs something (price of anarchy
    # of at least about 1.05) and a toll on the Old Bridge matters
    if not (DEMO / "link.csv").exists():
        pytest.skip("demo city not built")
    from congest.io import read_network
    from congest.pricing import second_best

    net = read_network(DEMO)
    cmp = compare(net, tol=1e-6)
    t = cmp.table
    assert t.loc["user_equilibrium", "ratio_to_so"] >= 1.05
    assert t.loc["marginal_cost_tolls", "ratio_to_so"] == pytest.approx(1.0, abs=1e-4)
    # advice to all on free-flow routes is worse than selfish routing
    assert t.loc["free_flow_advice", "ratio_to_so"] > t.loc["user_equilibrium", "ratio_to_so"]
    bridge = net.link_ids[net.link_attrs["facility_type"] == "old_bridge"].tolist()
    sb = second_best(net, [bridge], tol=1e-6, first_best_result=cmp.results["first_best"])
    assert 0.0 < sb.share_of_first_best < 1.0
