"""Routing-advice scenarios on two parallel routes, solved by hand."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from random_networks import random_network

from congest import solve
from congest.advice import advice_share, evaluate_flows, free_flow_advice, reactive_advice
from congest.exceptions import SolverError
from congest.network import Network

TOL = 1e-10


def two_routes(demand=2.0):
    """Routes t1 = 2 + x1 and t2 = 1 + 2 x2. By hand (Wardrop 1952): with demand 2 the
    UE is (1, 1) at 3 minutes, total 6 vehicle-minutes."""
    return Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                   free_flow_time=[2.0, 1.0], alpha=[1.0, 2.0], beta=1.0, cost_kind=2,
                   zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, demand], [0, 0]],
                   length=[3.0, 1.0])


def test_free_flow_advice():
    eq = free_flow_advice(two_routes())
    # route 2 is faster when empty (1 < 2): both trips go there and take 1 + 2 * 2 = 5
    assert eq.flow.tolist() == [0.0, 2.0]
    assert eq.time.tolist() == [2.0, 5.0]
    assert eq.total_travel_time == pytest.approx(10.0)
    assert eq.vehicle_distance == pytest.approx(2.0)
    # UE gap of these flows: (10 - 2 * 2) / 10, route 1 would take 2 minutes
    assert eq.relative_gap == pytest.approx(0.6)
    assert not eq.converged


def test_reactive_advice_oscillates():
    ra = reactive_advice(two_routes(), n_days=21, burn_in=1)
    # day 0 all on route 2 (5 minutes, route 1 at 2); day 1 all on route 1 (4 minutes,
    # route 2 at 1); and back: a two-day cycle (hand computation)
    assert_allclose(ra.flows[0], [0.0, 2.0])
    assert_allclose(ra.flows[1], [2.0, 0.0])
    assert ra.cycle == 2
    assert ra.swing == pytest.approx(2.0)
    # time average over days 1..20: one trip per route, days of 8 and 10 vehicle-minutes
    assert_allclose(ra.mean_flow, [1.0, 1.0])
    assert ra.mean_vehicle_hours * 60.0 == pytest.approx(9.0)
    assert ra.mean_trip_time == pytest.approx(4.5)
    # the link times drivers live through, averaged day by day: route 1 (4 + 2) / 2,
    # route 2 (1 + 5) / 2 -- not the times of the mean flow (3, 3)
    assert_allclose(ra.mean_time, [3.0, 3.0])
    assert_allclose(ra.average.time, [3.0, 3.0])
    # daily gaps 0.6 (day 0 pattern) and 0.75 ((8 - 2) / 8) alternate
    assert_allclose(ra.daily_relative_gap[:2], [0.6, 0.75])
    assert ra.mean_relative_gap == pytest.approx(0.675)
    assert ra.mean_vehicle_distance == pytest.approx((6.0 + 2.0) / 2.0)


def test_reactive_advice_damped_settles_near_ue():
    # with a small share switching each day the iteration stays within a few switching
    # steps of the UE (1, 1); compare the method of successive averages
    r = 0.02
    ra = reactive_advice(two_routes(), n_days=400, burn_in=200, response=r)
    assert ra.swing <= r * 2.0 + 1e-12
    assert_allclose(ra.mean_flow, [1.0, 1.0], atol=0.05)
    assert ra.mean_vehicle_hours * 60 == pytest.approx(6.0, rel=0.01)


def test_advice_share_selfish_drivers_respond():
    net = two_routes()
    # p = 3/4: 1.5 advised trips on route 2 (1 + 2 * 1.5 = 4 minutes); the half trip
    # left is selfish and takes route 1 (2.5 < 4); hand computation
    res = advice_share(net, 0.75, tol=TOL)
    assert_allclose(res.advised_flow, [0.0, 1.5])
    assert_allclose(res.selfish.flow, [0.5, 0.0], atol=1e-7)
    assert_allclose(res.total.flow, [0.5, 1.5], atol=1e-7)
    assert res.advised_mean_time == pytest.approx(4.0, abs=1e-6)
    assert res.selfish_mean_time == pytest.approx(2.5, abs=1e-6)
    assert res.total.total_travel_time == pytest.approx(0.5 * 2.5 + 1.5 * 4.0, abs=1e-6)
    # p = 1/4: 0.5 advised trips on route 2; the selfish 1.5 split (1, 0.5) and the
    # joint flows are the UE (1, 1), both groups at 3 minutes
    res = advice_share(net, 0.25, tol=TOL)
    assert_allclose(res.total.flow, [1.0, 1.0], atol=1e-6)
    assert res.advised_mean_time == pytest.approx(3.0, abs=1e-6)
    assert res.selfish_mean_time == pytest.approx(3.0, abs=1e-6)
    assert res.total.relative_gap == pytest.approx(0.0, abs=1e-8)


def test_advice_share_limits():
    net = random_network(np.random.default_rng(3), n_core=6, n_zones=3)
    ue = solve(net, tol=1e-8)
    # nobody advised: the UE; everybody advised: the free-flow advice
    assert_allclose(advice_share(net, 0.0, tol=1e-8).total.flow, ue.flow, atol=1e-2)
    full = advice_share(net, 1.0)
    assert full.selfish is None
    assert_allclose(full.total.flow, free_flow_advice(net).flow)
    assert np.isnan(full.selfish_mean_time)


def test_evaluate_flows_of_ue_has_zero_gap():
    net = random_network(np.random.default_rng(5), n_core=6, n_zones=3)
    ue = solve(net, tol=1e-10)
    rec = evaluate_flows(net, ue.flow)
    assert rec.relative_gap == pytest.approx(ue.relative_gap, abs=1e-12)
    assert_allclose(rec.cost, ue.cost)
    assert rec.total_travel_time == pytest.approx(ue.total_travel_time)


def test_bad_settings():
    net = two_routes()
    with pytest.raises(SolverError, match="advice share"):
        advice_share(net, 1.5)
    with pytest.raises(SolverError, match="response"):
        reactive_advice(net, response=0.0)
    with pytest.raises(SolverError, match="burn_in"):
        reactive_advice(net, n_days=5, burn_in=5)
    with pytest.raises(SolverError, match="shape"):
        evaluate_flows(net, [1.0])
