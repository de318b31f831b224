"""Textbook networks with closed-form equilibria, solved through ``congest.solve``.

The networks are built here with polynomial costs (``cost_kind=2``, capacity 1), so a
link's cost is exactly ``t0 + alpha * v**beta``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

import congest
from congest.network import Network

TOL = 1e-10  # relative-gap target; the closed forms below are then met to ~1e-6 or better


def two_link(const, alpha, beta, demand=1.0):
    """Two parallel links from zone 1 to zone 2 with costs ``const[i] + alpha[i] v**beta[i]``."""
    return Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                   free_flow_time=const, alpha=alpha, beta=beta, cost_kind=2,
                   zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, demand], [0, 0]])


def pigou(d=1):
    # Pigou (1920), as in Roughgarden & Tardos (2002), JACM 49(2) (from memory): two
    # links s -> t, cost 1 and cost x**d, one unit of demand.
    return two_link([1.0, 0.0], [0.0, 1.0], [0.0, float(d)])


def braess(with_bridge):
    # Braess (1968); Braess, Nagurney & Wakolbinger (2005), Transportation Science 39(4),
    # figures 1-2 (from memory): nodes 1 (origin), 2, 3, 4 (destination); demand 6;
    # links 1->2: 10x, 1->3: 50 + x, 2->4: 50 + x, 3->4: 10x, and the new link 2->3: 10 + x.
    tail, head = [0, 0, 1, 2], [1, 2, 3, 3]
    t0, a = [0.0, 50.0, 50.0, 0.0], [10.0, 1.0, 1.0, 10.0]
    if with_bridge:
        tail, head, t0, a = tail + [1], head + [2], t0 + [10.0], a + [1.0]
    demand = np.zeros((2, 2))
    demand[0, 1] = 6.0
    return Network(node_ids=[1, 2, 3, 4], tail=tail, head=head, capacity=1.0,
                   free_flow_time=t0, alpha=a, beta=1.0, cost_kind=2,
                   zone_ids=[1, 4], zone_nodes=[0, 3], demand=demand,
                   through_centroids=True)


def _solve(net, objective):
    res = congest.solve(net, objective=objective, tol=TOL)
    assert res.converged and res.relative_gap <= TOL
    return res


def test_pigou_linear():
    # Roughgarden & Tardos (2002), introduction (from memory): UE sends everything on the x link,
    # cost 1; SO splits 1/2-1/2, cost 3/4; price of anarchy 4/3.
    ue, so = _solve(pigou(), "ue"), _solve(pigou(), "so")
    assert_allclose(ue.flow, [0.0, 1.0], atol=1e-6)
    assert_allclose(ue.total_cost, 1.0, rtol=1e-6)
    assert_allclose(so.flow, [0.5, 0.5], atol=1e-6)
    assert_allclose(so.total_cost, 0.75, rtol=1e-9)
    assert_allclose(ue.total_cost / so.total_cost, 4.0 / 3.0, rtol=1e-6)


def test_pigou_quartic_price_of_anarchy():
    # Roughgarden (2003), J. Computer and System Sciences 67(2): for polynomials of
    # degree d the worst price of anarchy is [1 - d (d+1)**(-(d+1)/d)]**-1, attained by
    # Pigou's network with cost x**d. Derivation for the SO: minimise (1 - x) + x**(d+1),
    # so (d+1) x**d = 1, x = (d+1)**(-1/d), total 1 - d/(d+1) x = 1 - d (d+1)**(-(d+1)/d).
    d = 4
    bound = 1.0 / (1.0 - d * (d + 1) ** (-(d + 1) / d))
    assert_allclose(bound, 2.1505, atol=5e-5)  # value quoted by Roughgarden (2003) (from memory)
    ue, so = _solve(pigou(d), "ue"), _solve(pigou(d), "so")
    assert_allclose(so.flow[1], (d + 1) ** (-1 / d), rtol=1e-6)
    assert_allclose(ue.total_cost, 1.0, rtol=1e-6)
    assert_allclose(ue.total_cost / so.total_cost, bound, rtol=1e-6)


@pytest.mark.parametrize("with_bridge,route_cost,total", [(False, 83.0, 498.0),
                                                          (True, 92.0, 552.0)])
def test_braess_paradox(with_bridge, route_cost, total):
    # Braess, Nagurney & Wakolbinger (2005) (from memory): 3 trips on each of the two
    # routes cost 10*3 + 50 + 3 = 83 (total 498); with the new link each of the three
    # routes carries 2 and costs 10*4 + 10 + 2 + 10*4 = 92 (total 552).
    net = braess(with_bridge)
    ue = _solve(net, "ue")
    assert_allclose(ue.od_cost[0, 1], route_cost, rtol=1e-7)
    assert_allclose(ue.total_cost, total, rtol=1e-7)
    expected = [3.0, 3.0, 3.0, 3.0] if not with_bridge else [4.0, 2.0, 2.0, 4.0, 2.0]
    assert_allclose(ue.flow, expected, atol=1e-5)


def test_braess_system_optimum_ignores_bridge():
    # Hand derivation: SO is UE in marginal costs 20x, 50 + 2x, 10 + 2x. Without the
    # bridge the symmetric split 3/3 gives marginal route cost 60 + 56 = 116; the bridge
    # route would cost 60 + 16 + 60 = 136 > 116 at that point, so the SO leaves the
    # bridge empty and keeps total cost 498 (Braess, Nagurney & Wakolbinger 2005).
    so = _solve(braess(True), "so")
    assert_allclose(so.flow, [3.0, 3.0, 3.0, 3.0, 0.0], atol=1e-5)
    assert_allclose(so.total_cost, 498.0, rtol=1e-9)


def test_two_route_affine_exercise():
    # t1 = 8 + x1, t2 = 1 + 2 x2, demand 4 (textbook exercise, from memory).
    # UE (Wardrop's first principle, equal costs): 8 + x1 = 1 + 2 (4 - x1)
    #   => 3 x1 = 1 => x1 = 1/3, x2 = 11/3, common cost 25/3.
    # SO (equal marginal costs t + x t'): 8 + 2 x1 = 1 + 4 (4 - x1)
    #   => 6 x1 = 9 => x1 = 1.5, x2 = 2.5.
    net = two_link([8.0, 1.0], [1.0, 2.0], [1.0, 1.0], demand=4.0)
    ue, so = _solve(net, "ue"), _solve(net, "so")
    assert_allclose(ue.flow, [1 / 3, 11 / 3], atol=1e-6)
    assert_allclose(ue.cost, [25 / 3, 25 / 3], atol=1e-6)
    assert_allclose(so.flow, [1.5, 2.5], atol=1e-6)
    # SO total: 1.5 * 9.5 + 2.5 * 6 = 29.25; UE total 4 * 25/3 = 33.33...
    assert_allclose(so.total_cost, 29.25, rtol=1e-10)
    assert_allclose(ue.total_cost, 100 / 3, rtol=1e-7)


NETWORKS_DIR = Path(__file__).resolve().parents[1] / "networks"


# Expected (UE total cost, SO total cost, UE link flows) from the closed forms above.
SHIPPED = {
    "pigou": (1.0, 0.75, [0.0, 1.0]),
    "braess-before": (498.0, 498.0, [3.0, 3.0, 3.0, 3.0]),
    "braess": (552.0, 498.0, [4.0, 2.0, 2.0, 4.0, 2.0]),
}


@pytest.mark.parametrize("name", sorted(SHIPPED))
def test_shipped_textbook_files(name):
    # The same closed forms as above (Pigou 1920; Braess, Nagurney & Wakolbinger 2005),
    # from the GMNS folders shipped in networks/.
    folder = NETWORKS_DIR / name
    if not folder.is_dir():
        pytest.skip(f"no {name} network folder shipped under {NETWORKS_DIR}")
    from congest.io import read_network

    net = read_network(folder)
    ue, so = _solve(net, "ue"), _solve(net, "so")
    want_ue, want_so, flows = SHIPPED[name]
    assert_allclose(ue.total_cost, want_ue, rtol=1e-6)
    assert_allclose(so.total_cost, want_so, rtol=1e-6)
    assert_allclose(ue.flow, flows, atol=1e-5)
