"""Day-to-day learning: published dynamics and theorems as checks."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy.optimize import brentq

from congest import solve
from congest.costs import CostModel
from congest.learning import simulate
from congest.network import Network
from congest.routesets import build_route_set


def parallel_routes(a, b, demand):
    """One OD pair, parallel links with cost ``a_i + b_i x_i`` (polynomial, exact)."""
    n = len(a)
    return Network(node_ids=[1, 2], tail=[0] * n, head=[1] * n, capacity=1.0,
                   free_flow_time=a, alpha=b, beta=1.0, cost_kind=2, zone_ids=[1, 2],
                   zone_nodes=[0, 1], demand=[[0, demand], [0, 0]])


def pigou():
    # Pigou (1920); Roughgarden & Tardos (2002): costs 1 and x, one unit of demand.
    return parallel_routes([1.0, 0.0], [0.0, 1.0], 1.0)


def braess():
    # Braess (1968); Braess, Nagurney & Wakolbinger (2005), Transportation Science 39(4).
    return Network(node_ids=[1, 2, 3, 4], tail=[0, 0, 1, 2, 1], head=[1, 2, 3, 3, 2],
                   capacity=1.0, free_flow_time=[0, 50, 50, 0, 10],
                   alpha=[10, 1, 1, 10, 1], beta=1.0, cost_kind=2,
                   zone_ids=[1, 4], zone_nodes=[0, 3], demand=[[0, 6], [0, 0]])


def share_series(res, route=0, replication=0):
    s = res.route_shares
    s = s[(s["route"] == route) & (s["replication"] == replication)]
    return s.sort_values("day")["share"].to_numpy()


# ------------------------------------------------------------------ oscillation
def test_best_response_flips_with_period_two():
    # Two identical parallel routes, every driver takes yesterday's fastest route: an
    # all-or-nothing flip every day, period 2 (Ben-Akiva, de Palma & Kaysi 1991,
    # Transportation Research A 25(5); Fischer & Voecking 2004, "On the evolution of
    # selfish routing", oscillation with stale information -- from memory).
    net = parallel_routes([1.0, 1.0], [1.0, 1.0], 10.0)
    for kwargs in ({}, {"drivers": 100}):
        res = simulate(net, rule="best_response", rate=1.0, days=60, track=[(1, 2)],
                       seed=0, **kwargs)
        x = share_series(res)
        assert x[0] == pytest.approx(0.5 if not kwargs else x[0])
        flips = x[1:]
        np.testing.assert_allclose(flips[::2], flips[0], atol=1e-12)
        np.testing.assert_allclose(flips[1::2], 1.0 - flips[0], atol=1e-12)
        assert min(flips[0], 1.0 - flips[0]) < 1e-12
        assert res.summary["oscillates"].iloc[0]
        assert res.summary["period"].iloc[0] == 2
        assert res.days["switching_share"].iloc[5:].min() == pytest.approx(1.0)


def test_routing_service_advice_to_everyone_flips_too():
    # The same stale-information mechanism when a service tells all drivers
    # yesterday's fastest route (Ben-Akiva, de Palma & Kaysi 1991).
    net = parallel_routes([1.0, 1.0], [1.0, 1.0], 10.0)
    res = simulate(net, rule="hedge", advice_share=1.0, days=40, track=[(1, 2)], seed=0)
    x = share_series(res)[1:]
    assert set(np.unique(x)) == {0.0, 1.0}
    assert np.all(x[1:] != x[:-1])
    assert res.summary["period"].iloc[0] == 2
    assert np.isnan(res.days["mean_regret"]).all()  # no learners
    assert res.days["advice_regret"].iloc[-1] > 0


def test_small_switching_probability_converges():
    # With only a small share switching each day the flip dies out (Fischer & Voecking
    # 2004, from memory): inertia rate r keeps flows within r/2 of the equilibrium
    # split, and the 1/k rate (method of successive averages) converges to it.
    net = parallel_routes([1.0, 1.0], [1.0, 1.0], 10.0)
    rate = 0.02
    res = simulate(net, rule="best_response", rate=rate, days=400, track=[(1, 2)],
                   initial=np.array([1.0, 0.0]))
    x = share_series(res)
    assert np.abs(x[-100:] - 0.5).max() <= rate / 2 + 1e-12
    assert np.abs(x[1:20] - 0.5).max() > 0.4  # it started far from the split
    msa = simulate(net, rule="best_response", rate=1.0, schedule="harmonic", days=400,
                   initial=np.array([1.0, 0.0]), track=[(1, 2)])
    x = share_series(msa)
    days = np.arange(1, 401)
    assert np.all(np.abs(x[10:] - 0.5) <= 1.0 / days[10:])
    # here gap = (c1 - c2) x_cheap... ~ |x1 - Q/2| / 6 for the flows, so the 1/k rate
    # bounds it by Q / (6 t)
    gap = msa.days["relative_gap"].to_numpy()
    assert np.all(gap[10:] <= 10.0 / (6.0 * days[10:]) * (1 + 1e-9))
    assert not msa.summary["oscillates"].iloc[0]
    # finite drivers switching with small probability settle near the even split
    fin = simulate(net, rule="best_response", rate=rate, days=400, drivers=2000,
                   track=[(1, 2)], seed=3, initial=np.array([1.0, 0.0]))
    x = share_series(fin)
    assert np.abs(x[-100:] - 0.5).max() < 0.05


# ------------------------------------------------------------------- logit SUE
def logit_sue(theta, a, b, demand):
    """Two-route logit stochastic equilibrium (Daganzo & Sheffi 1977): x1 solves
    x1 = Q / (1 + exp(theta (c1(x1) - c2(Q - x1))))."""
    def f(x1):
        c1 = a[0] + b[0] * x1
        c2 = a[1] + b[1] * (demand - x1)
        return x1 - demand / (1.0 + math.exp(theta * (c1 - c2)))
    return brentq(f, 0.0, demand, xtol=1e-14)


@pytest.mark.parametrize("information", ["full", "experience"])
def test_smoothed_logit_reaches_logit_equilibrium(information):
    # Exponentially smoothed perceived costs with logit choice (Horowitz 1984,
    # Transportation Research B 18(1)): its stable steady state is the logit stochastic
    # user equilibrium (Daganzo & Sheffi 1977), here one equation in one unknown. With
    # experience only, each route's estimate is taken up by the share who drove it; the
    # fixed point is the same.
    a, b, q, theta = [10.0, 12.0], [0.02, 0.01], 200.0, 0.5
    net = parallel_routes(a, b, q)
    res = simulate(net, rule="logit", rate=0.3, theta=theta, days=600,
                   information=information)
    x1 = logit_sue(theta, a, b, q)
    np.testing.assert_allclose(res.flow[0], [x1, q - x1], rtol=1e-9)
    assert 0 < x1 < q and abs(x1 - q / 2) > 1  # not a trivial split


# ----------------------------------------------------------------------- Hedge
@pytest.mark.parametrize("name, net, rate, days", [
    ("pigou", pigou(), 10.0, 2000),
    ("braess", braess(), 10.0, 2000),
])
def test_hedge_time_average_approaches_ue(name, net, rate, days):
    # Hedge with decreasing rate: time-averaged flows approach the Wardrop equilibrium
    # and average regret goes to 0 (Blum, Even-Dar & Ligett 2006, "Routing without
    # regret"; Krichene, Drighes & Bayen 2015, SIAM J. Control Optim. 53(2)).
    res = simulate(net, rule="hedge", rate=rate, schedule="sqrt", days=days,
                   initial="free_flow")
    assert res.summary["average_gap"].iloc[0] < 1e-3
    regret = res.days["mean_regret"].to_numpy()
    assert regret[-1] < regret[days // 10] < regret[1]
    ue_cost = float(solve(net, tol=1e-10, method="bfw", max_iter=10_000).od_cost[0, 1])
    assert regret[-1] < 1e-2 * ue_cost


def test_hedge_time_average_approaches_ue_sioux_falls():
    # Sioux Falls (LeBlanc, Morlok & Pierskalla 1975), shared reference network; the
    # same claim as above (Blum, Even-Dar & Ligett 2006). The route set holds the used
    # routes of a precise UE solution, so the UE is reachable within it.
    from conftest import load_reference

    net = load_reference("siouxfalls")
    eq = solve(net, tol=1e-10)
    rs = build_route_set(net, k=3, equilibrium=eq)
    assert rs.ue_route_flow.sum() == pytest.approx(net.total_demand, rel=1e-5)
    res = simulate(net, rule="hedge", rate=10.0, days=3000, route_set=rs, equilibrium=eq,
                   gap_every=100)
    assert res.summary["average_gap"].iloc[0] < 1e-3
    regret = res.days["mean_regret"].to_numpy()
    assert regret[-1] < regret[300] < regret[30]


def three_routes():
    # normalised costs in [0, 1] for one unit of demand: a_i + b_i <= 1
    return parallel_routes([0.2, 0.5, 0.1], [0.8, 0.5, 0.9], 1.0)


@pytest.mark.parametrize("advice_share", [0.0, 0.5])
def test_hedge_fixed_horizon_regret_bound(advice_share):
    # Cesa-Bianchi & Lugosi (2006), Prediction, Learning, and Games, Theorem 2.2: with
    # losses in [0, 1] and rate sqrt(8 ln K / T), Hedge's regret after T rounds is at
    # most sqrt((T / 2) ln K), for any loss sequence. Advice followers chasing
    # yesterday's fastest route make the learners' losses jump from day to day.
    net, T, K = three_routes(), 400, 3
    res = simulate(net, rule="hedge", rate=math.sqrt(8 * math.log(K) / T),
                   schedule="constant", days=T, cost_scale=1.0, advice_share=advice_share)
    regret = res.days["max_regret"].to_numpy() * np.arange(1, T + 1)
    assert regret[-1] <= math.sqrt(T / 2 * math.log(K))
    assert regret[-1] > 0  # the bound is not met trivially


def test_hedge_anytime_regret_bound():
    # Cesa-Bianchi & Lugosi (2006), Theorem 2.3: with rate_t = sqrt(8 ln K / t) the
    # regret is at most 2 sqrt((T/2) ln K) + sqrt((ln K) / 8) for every T.
    net, K = three_routes(), 3
    res = simulate(net, rule="hedge", rate=math.sqrt(8 * math.log(K)), schedule="sqrt",
                   days=400, cost_scale=1.0, advice_share=0.5)
    t = np.arange(1, 401)
    regret = res.days["max_regret"].to_numpy() * t
    bound = 2 * np.sqrt(t / 2 * math.log(K)) + math.sqrt(math.log(K) / 8)
    assert np.all(regret <= bound)


# ------------------------------------------------------------------------ Smith
@pytest.mark.parametrize("name, net", [("braess", braess()),
                                       ("three", parallel_routes([1, 2, 3], [3, 2, 1], 4))])
def test_smith_gap_decreases_to_zero(name, net):
    # Proportional switching on a network with monotone costs: the gap decreases to 0
    # (Smith 1984, Transportation Science 18(3), Lyapunov stability).
    res = simulate(net, rule="smith", rate=0.05, days=1500, initial="free_flow")
    gap = res.days["relative_gap"].to_numpy()
    assert gap[0] > 1e-2
    assert gap[-1] < 1e-8
    assert np.all(np.diff(gap) <= 1e-14)  # non-increasing up to rounding


# ------------------------------------------------------------------- randomness
def test_same_seed_same_output_different_seed_different_noise():
    net = braess()
    kw = dict(rule="logit", rate=0.2, theta=0.2, days=30, supply_noise=0.1,
              estimate_noise=0.2, replications=3)
    a = simulate(net, seed=7, **kw)
    b = simulate(net, seed=7, **kw)
    c = simulate(net, seed=8, **kw)
    np.testing.assert_array_equal(a.days.to_numpy(), b.days.to_numpy())
    np.testing.assert_array_equal(a.flow, b.flow)
    assert not np.array_equal(a.flow, c.flow)
    # replications differ from each other, and replication 0 does not depend on how
    # many replications run with it (one spawned seed per replication)
    assert not np.array_equal(a.flow[0], a.flow[1])
    one = simulate(net, seed=7, **{**kw, "replications": 1})
    np.testing.assert_array_equal(one.flow[0], a.flow[0])


@pytest.mark.parametrize("source", [{}, {"supply_noise": 0.1}, {"estimate_noise": 0.1},
                                    {"drivers": 60}])
def test_replications_differ_only_when_something_is_random(source):
    # Capacity noise, estimate noise and individual drivers are the only random draws;
    # without them every replication repeats the first, and that is said, not hidden.
    net = braess()
    kw = dict(rule="hedge", days=20, replications=3, seed=4, **source)
    random = bool(source)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        simulate(net, days=5, seed=4, **source)  # one replication: nothing to say
        if random:
            res = simulate(net, **kw)
    if not random:
        with pytest.warns(UserWarning, match="3 replications will be identical"):
            res = simulate(net, **kw)
    last = res.days.loc[res.days["day"] == 20, "total_vehicle_hours"].to_numpy()
    ov = res.overview()
    assert ov["draws_at_random"] is random
    assert ov["final_vehicle_hours"] == pytest.approx(np.median(last), rel=1e-12)
    assert ov["final_vehicle_hours_spread"] == pytest.approx(last.max() - last.min(),
                                                             abs=1e-12)
    if random:
        assert ov["final_vehicle_hours_spread"] > 1e-6 * ov["final_vehicle_hours"]
        assert not np.allclose(res.flow[0], res.flow[1], rtol=1e-9, atol=0)
    else:
        assert ov["final_vehicle_hours_spread"] <= 1e-12 * ov["final_vehicle_hours"]
        np.testing.assert_allclose(res.flow, res.flow[[0, 0, 0]], rtol=1e-12)


def test_days_table_is_in_vehicle_hours():
    # Braess's network with a fixed charge of 3 minutes on the middle link, so that time
    # and generalized cost differ; the table's hours are recomputed from the last day's
    # flows through the network's own cost functions.
    net = braess().replace(fixed_cost=[0.0, 0.0, 0.0, 0.0, 3.0])
    res = simulate(net, rule="smith", rate=0.05, days=4, initial="free_flow")
    model = CostModel.from_network(net)
    x = res.flow[0]
    last = res.days.iloc[-1]
    assert list(res.days.columns[:4]) == ["day", "replication", "total_vehicle_hours",
                                          "system_cost_hours"]
    assert "total_cost" not in res.days
    assert last["total_vehicle_hours"] == pytest.approx(x @ model.time(x) / 60.0,
                                                        rel=1e-12)
    assert last["system_cost_hours"] == pytest.approx(x @ model.cost(x) / 60.0, rel=1e-12)
    assert last["system_cost_hours"] > last["total_vehicle_hours"]
    # the old minutes column stays for readers of older tables
    np.testing.assert_allclose(res.days["total_travel_time"],
                               60.0 * res.days["total_vehicle_hours"], rtol=1e-12)
    # Braess (1968); Braess, Nagurney & Wakolbinger (2005): at equilibrium the 6
    # vehicles take 92 minutes each
    plain = simulate(braess(), days=2)
    assert plain.ue_vehicle_hours == pytest.approx(6 * 92 / 60, rel=1e-6)
    assert plain.overview()["ue_vehicle_hours"] == plain.ue_vehicle_hours


def test_label_names_rule_advice_noise_and_drivers():
    res = simulate(braess(), rule="logit", days=2, advice_share=0.4, supply_noise=0.1,
                   estimate_noise=0.125, drivers=30, seed=0)
    assert res.label() == ("smoothed logit, 40% follow advice, capacity noise sd 10%, "
                           "estimate noise sd 12.5%, 30 drivers")
    assert simulate(braess(), days=2).label() == "Hedge, no advice, no noise"


def test_finite_drivers_are_integer_and_conserve_demand():
    net = braess()
    res = simulate(net, rule="hedge", days=50, drivers=60, estimate_noise=0.3,
                   information="experience", advice_share=0.25, seed=1, replications=2)
    mass = 6.0 / 60
    counts = res.route_flow / mass
    np.testing.assert_allclose(counts, np.round(counts), atol=1e-9)
    np.testing.assert_allclose(res.route_flow.sum(axis=1), 6.0)
    np.testing.assert_allclose(res.flow, res.route_flow @ res.route_set.incidence.T.toarray())
    assert (res.days["switching_share"].between(0, 1)).all()


def test_bad_options():
    net = braess()
    with pytest.raises(ValueError, match="Unknown rule"):
        simulate(net, rule="nope")
    with pytest.raises(ValueError, match="Unknown information"):
        simulate(net, information="rumour")
    with pytest.raises(ValueError, match="Unknown schedule"):
        simulate(net, schedule="weekly")
    with pytest.raises(ValueError, match="advice_share"):
        simulate(net, advice_share=1.5)


def test_threads_do_not_change_results():
    # one spawned random stream per replication, drawn outside the compiled kernels:
    # the thread count (and the gap computed beside the day loop) changes nothing
    net = braess()
    kw = dict(rule="hedge", days=25, supply_noise=0.1, estimate_noise=0.1, seed=11,
              drivers=40)
    for reps in (1, 3):
        one = simulate(net, replications=reps, workers=1, **kw)
        two = simulate(net, replications=reps, workers=2, **kw)
        np.testing.assert_array_equal(one.days.to_numpy(), two.days.to_numpy())
        np.testing.assert_array_equal(one.mean_flow, two.mean_flow)


def test_day_gap_matches_shortest_path_loading():
    # the daily whole-network gap equals (TSTT - SPTT) / TSTT from congest.paths'
    # all-or-nothing loading at the same flows (common practice definition)
    from conftest import load_reference

    from congest.equilibrium import Problem

    net = load_reference("siouxfalls")
    eq = solve(net, tol=1e-6)
    rs = build_route_set(net, k=2, equilibrium=eq)
    res = simulate(net, rule="smith", days=3, route_set=rs, equilibrium=eq)
    problem = Problem(net, "ue")
    x = res.route_set.link_flows(res.route_flow[0])  # the last day's flows
    np.testing.assert_allclose(x, res.flow[0], rtol=1e-12)
    cost = problem.gradient(x)
    _, sptt, _ = problem.all_or_nothing(cost)
    tstt = float(x @ cost)
    assert res.days["relative_gap"].iloc[-1] == pytest.approx((tstt - sptt) / tstt, rel=1e-9)
