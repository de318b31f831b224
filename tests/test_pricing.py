"""Price of anarchy and first-best (marginal-cost) tolls against textbook results."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import load_reference
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from random_networks import random_network

from congest import METHODS, solve
from congest.exceptions import SolverError
from congest.network import Network
from congest.pricing import (
    first_best,
    marginal_cost_tolls,
    minutes_to_money,
    price_of_anarchy,
    system_cost,
    tolled_mask,
)

#: Methods that reach tight gaps (the shared first-best checks run for each).
PRECISE = [m for m in ("bfw", "gp") if m in METHODS]


def pigou(demand=1.0, value_of_time=20.0):
    """Pigou (1920): one link costs 1, the other x; one unit of demand."""
    return Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                   free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
                   cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
                   demand=[[0, demand], [0, 0]], value_of_time=value_of_time,
                   currency="crowns")


def braess(with_middle=True):
    """Braess (1968), as translated by Braess, Nagurney & Wakolbinger (2005):
    demand 6 from s to t; links s-a 10x, s-b 50+x, a-t 50+x, b-t 10x, a-b 10+x."""
    tail, head = [0, 0, 1, 2], [1, 2, 3, 3]
    t0, a = [0.0, 50.0, 50.0, 0.0], [10.0, 1.0, 1.0, 10.0]
    if with_middle:
        tail, head, t0, a = tail + [1], head + [2], t0 + [10.0], a + [1.0]
    return Network(node_ids=[1, 2, 3, 4], tail=tail, head=head, capacity=1.0,
                   free_flow_time=t0, alpha=a, beta=1.0, cost_kind=2,
                   zone_ids=[1, 4], zone_nodes=[0, 3], demand=[[0, 6], [0, 0]])


@pytest.mark.parametrize("method", PRECISE)
def test_pigou_first_best(method):
    fb = first_best(pigou(), tol=1e-12, tolled_from_so=False, method=method)
    # Pigou (1920): the social optimum splits the unit demand in half
    assert_allclose(fb.so.flow, [0.5, 0.5], atol=1e-6)
    # marginal-cost toll x t'(x) = 1/2 on the variable link, none on the constant one
    # (Beckmann, McGuire & Winsten 1956)
    assert_allclose(fb.tolls_minutes, [0.0, 0.5], atol=1e-6)
    # the tolled UE is the SO
    assert_allclose(fb.tolled_ue.flow, fb.so.flow, atol=1e-6)
    assert fb.max_flow_deviation < 1e-6
    # Roughgarden & Tardos (2002): price of anarchy 4/3 for affine costs, tight on Pigou
    assert fb.price_of_anarchy == pytest.approx(4.0 / 3.0, rel=1e-8)
    assert fb.price_of_anarchy_upper >= fb.price_of_anarchy - 1e-12
    assert fb.price_of_anarchy_upper == pytest.approx(4.0 / 3.0, rel=1e-6)
    # revenue: half the drivers pay half a minute; 20 crowns/hour -> 1/6 crown a minute
    assert fb.revenue_minutes == pytest.approx(0.25, rel=1e-6)
    assert fb.revenue_money == pytest.approx(0.25 / 3.0, rel=1e-6)
    assert fb.currency == "crowns"
    assert fb.mean_toll_per_trip == pytest.approx(0.25 / 3.0, rel=1e-6)
    assert fb.tolled_links.tolist() == [2]
    # total travel time: UE 1, SO 3/4 (Pigou 1920)
    assert fb.system_cost_ue == pytest.approx(1.0, rel=1e-8)
    assert fb.system_cost_so == pytest.approx(0.75, rel=1e-8)
    assert fb.gain_minutes == pytest.approx(0.25, rel=1e-5)


def test_price_of_anarchy_uses_total_generalized_cost():
    net = pigou()
    ue = solve(net, tol=1e-12)
    so = solve(net, objective="so", tol=1e-12)
    # hand computation: UE all on the x link -> cost 1; SO half and half -> 1/2 + 1/4
    assert price_of_anarchy(ue, so) == pytest.approx(1.0 / 0.75, rel=1e-9)
    # a fixed charge of 1 minute on both links is part of the generalized cost:
    # totals become 2 and 1.75 (hand computation)
    charged = net.replace(fixed_cost=[1.0, 1.0])
    ue2, so2 = solve(charged, tol=1e-12), solve(charged, objective="so", tol=1e-12)
    assert price_of_anarchy(ue2, so2) == pytest.approx(2.0 / 1.75, rel=1e-9)


@pytest.mark.parametrize("method", PRECISE)
def test_braess_first_best(method):
    fb = first_best(braess(), tol=1e-12, tolled_from_so=False, method=method)
    without = solve(braess(with_middle=False), tol=1e-12)
    # Braess (1968): the SO of the network with the middle link equals the UE (and SO)
    # without it: 3 trips on each outer route, total cost 498
    assert_allclose(fb.so.flow[:4], without.flow, atol=1e-5)
    assert fb.so.flow[4] == pytest.approx(0.0, abs=1e-6)
    assert fb.system_cost_so == pytest.approx(498.0, rel=1e-8)
    # UE with the middle link: route cost 92, total 552 (Braess 1968)
    assert fb.system_cost_ue == pytest.approx(552.0, rel=1e-8)
    assert fb.price_of_anarchy == pytest.approx(552.0 / 498.0, rel=1e-8)
    # the tolls make the middle link unused: x t'(x) = 30, 3, 3, 30, 0 (hand computation)
    assert_allclose(fb.tolls_minutes, [30.0, 3.0, 3.0, 30.0, 0.0], atol=1e-5)
    assert fb.tolled_ue.flow[4] == pytest.approx(0.0, abs=1e-6)
    assert fb.max_flow_deviation < 1e-5


def _bpr_identity(net, tol):
    fb = first_best(net, tol=tol)
    so = fb.so
    # x t'(x) = beta t0 alpha (x/c)^beta = beta (t - t0) for BPR: revenue in time
    # units = sum_a beta_a (t_a - t0_a) x_a at the SO flows (follows from the toll)
    expected = float(np.sum(net.beta * (so.time - net.free_flow_time) * so.flow))
    assert float(fb.tolls_minutes @ so.flow) == pytest.approx(expected, rel=1e-10)
    # the revenue collected at the tolled UE agrees up to how well tolled UE hits SO
    assert fb.revenue_minutes == pytest.approx(expected, rel=1e-3)
    return fb


def test_bpr_identity_random():
    net = random_network(np.random.default_rng(7), zero_alpha=0.0, n_core=6, n_zones=3)
    _bpr_identity(net, 1e-7)


@pytest.mark.slow
def test_bpr_identity_sioux_falls():
    net = load_reference("siouxfalls")
    fb = _bpr_identity(net, 1e-5)
    # Sioux Falls (LeBlanc et al. 1975): a price of anarchy a little above 1
    assert 1.0 < fb.price_of_anarchy < 1.1


def test_tolls_in_money():
    net = pigou(value_of_time=30.0)
    fb = first_best(net, tol=1e-12)
    # 30 money per hour = 0.5 money per minute
    assert_allclose(fb.tolls_money, 0.5 * fb.tolls_minutes)
    assert_allclose(minutes_to_money(fb.tolls_minutes, 30.0), fb.tolls_money)
    # charging the money tolls through the network's own toll field reproduces SO
    tolled = solve(net.replace(toll=fb.tolls_money), tol=1e-12)
    assert_allclose(tolled.flow, fb.so.flow, atol=1e-6)


def test_marginal_cost_tolls_need_so():
    ue = solve(pigou(), tol=1e-10)
    with pytest.raises(SolverError, match="system optimum"):
        marginal_cost_tolls(ue)


def test_system_cost_excludes_added_tolls():
    net = pigou()
    fb = first_best(net, tol=1e-12)
    # drivers pay tolls (total cost counts them), society does not (system cost)
    assert fb.tolled_ue.total_cost > system_cost(fb.tolled_ue, net) + 0.2
    assert system_cost(fb.tolled_ue, net) == pytest.approx(0.75, rel=1e-6)


@pytest.mark.parametrize("method", PRECISE)
@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000))
def test_tolled_ue_equals_so_random(method, seed):
    # Beckmann, McGuire & Winsten (1956): with marginal-cost tolls the UE is the SO;
    # strictly increasing BPR costs (alpha > 0) make the link flows unique
    net = random_network(np.random.default_rng(seed), zero_alpha=0.0, n_core=5, n_zones=3)
    # link-based methods stall before 1e-10 on some of these networks
    gap = 1e-7 if method == "bfw" else 1e-10
    fb = first_best(net, tol=gap, tolled_from_so=False, method=method)
    scale = max(1.0, float(fb.so.flow.max()))
    assert fb.max_flow_deviation <= (5e-3 if method == "bfw" else 1e-3) * scale
    assert fb.system_cost_tolled == pytest.approx(fb.system_cost_so, rel=10 * gap)
    # SO total never above UE (Wardrop 1952; definitions)
    assert fb.system_cost_so <= fb.system_cost_ue * (1 + 1e-9)


def test_one_definition_of_a_tolled_link():
    """Summary, table and map count the same links (common practice: a charge of a
    ten-thousandth of the largest toll is rounding, not a toll)."""
    assert tolled_mask([0.0, 1e-6, 2e-4, 1.0]).tolist() == [False, False, True, True]
    assert tolled_mask([0.0, 0.0]).tolist() == [False, False]
    assert tolled_mask(np.zeros(0)).size == 0
    from congest.generate import grid_network

    net = grid_network(6, 6, seed=3)
    fb = first_best(net, tol=1e-10)
    mask = tolled_mask(fb.tolls_minutes)
    assert fb.tolled_links.tolist() == net.link_ids[mask].tolist()
    from congest.plotting import MAP_LAYERS, toll_map

    fig = toll_map(net, fb.tolls_money)
    drawn = [c for ax in fig.axes for c in ax.collections
             if c.get_gid() == MAP_LAYERS["links"]]
    assert len(drawn[0].get_segments()) == int(mask.sum())
