"""Routing advice: what happens when one service tells drivers the fastest route.

Three scenarios, each measured at the travel times its flows really cause:

* :func:`free_flow_advice` -- every driver gets the route that is fastest on an empty
  network (all-or-nothing on free-flow generalized costs).
* :func:`reactive_advice` -- the service updates its advice each day with the travel
  times its own advice caused the day before. This fixed-point iteration
  ``x_{k+1} = (1 - r) x_k + r AON(c(x_k))`` (``r`` the share of drivers who switch to
  the new advice) has the UE as its only fixed point, but with ``r = 1`` it seldom
  reaches it: the flows swing between routes. The result keeps the daily swing and its
  time average.
* :func:`advice_share` -- a share ``p`` of drivers in every OD pair follow the
  free-flow advice, the rest choose routes selfishly knowing the advised traffic is
  there: the UE of the selfish group with the advised flows as a preload.

:func:`evaluate_flows` turns any link flows into an :class:`~congest.Equilibrium`
record (times, costs, and the UE gap of those flows), so every scenario can be
tabulated with the same columns as UE and SO.

References
----------
.. [1] Wardrop, J.G. (1952). Some theoretical aspects of road traffic research.
   Proceedings of the Institution of Civil Engineers 1(3), 325-378.
.. [2] Horowitz, J.L. (1984). The stability of stochastic equilibrium in a two-link
   transportation network. Transportation Research Part B 18(1), 13-28.
"""

from __future__ import annotations

import time as _time
from dataclasses import dataclass, field

import numpy as np

from .costs import CostModel
from .equilibrium import Equilibrium, Problem, conservation_error, default_tol, relative_gap, solve
from .exceptions import SolverError

__all__ = [
    "evaluate_flows",
    "free_flow_flows",
    "free_flow_advice",
    "ReactiveAdvice",
    "reactive_advice",
    "AdviceShare",
    "advice_share",
]


def evaluate_flows(net, flow, *, method="given flows", problem=None, wall_time=0.0,
                   iterations=0, message="") -> Equilibrium:
    """An :class:`~congest.Equilibrium` record for given link flows.

    Travel times and generalized costs are those the flows cause; ``relative_gap`` and
    ``average_excess_cost`` are the UE gaps of those flows (how far they are from a
    Wardrop equilibrium; 0 for a UE). ``converged`` is True when the flows are a UE to
    1e-8.

    Parameters
    ----------
    net : Network
    flow : ndarray of shape (n_links,)
    method : str, default "given flows"
        Label stored in the record.

    Returns
    -------
    Equilibrium
        With ``objective="ue"``.
    """
    problem = Problem(net, "ue") if problem is None else problem
    flow = np.array(flow, dtype=np.float64)
    if flow.shape != (net.n_links,):
        raise SolverError(f"flow must have shape ({net.n_links},), got {flow.shape}")
    flow.setflags(write=False)
    cost = problem.gradient(flow)
    _, sptt, od_cost = problem.all_or_nothing(cost)
    tstt = float(flow @ cost)
    gap = relative_gap(tstt, sptt)
    total = net.total_demand
    time_ = problem.model.time(flow)
    return Equilibrium(
        network=net, objective="ue", method=method, flow=flow, time=time_, cost=cost,
        relative_gap=float(gap), average_excess_cost=(tstt - sptt) / total if total else 0.0,
        objective_value=problem.objective_value(flow), iterations=int(iterations),
        wall_time=float(wall_time), converged=bool(gap <= 1e-8),
        message=message or f"UE relative gap of these flows {gap:.3g}",
        conservation_error=conservation_error(net, flow), history={}, od_cost=od_cost,
    )


def free_flow_flows(net, demand=None, *, problem=None) -> np.ndarray:
    """All-or-nothing flows on free-flow generalized costs (``t0 + constant``)."""
    problem = Problem(net, "ue") if problem is None else problem
    # times of the empty network, from the cost functions (t(0) need not equal t0)
    cost = CostModel.from_network(net).cost(np.zeros(net.n_links))
    flow, _ = problem.paths.all_or_nothing(cost, demand)
    return flow


def free_flow_advice(net) -> Equilibrium:
    """Every driver takes the route that is fastest on the empty network.

    Returns
    -------
    Equilibrium
        The all-or-nothing flows on free-flow generalized costs, with the travel times
        they cause and their UE gap (``method="free_flow_advice"``).

    Examples
    --------
    Two routes, ``t1 = 2 + x1`` and ``t2 = 1 + 2 x2``, two trips: the advice sends both
    to route 2 (free-flow 1 < 2), which then takes 5 minutes.

    >>> from congest.network import Network
    >>> net = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
    ...               free_flow_time=[2.0, 1.0], alpha=[1.0, 2.0], beta=1.0,
    ...               cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
    ...               demand=[[0, 2], [0, 0]])
    >>> eq = free_flow_advice(net)
    >>> eq.flow.tolist(), eq.time.tolist(), eq.total_travel_time
    ([0.0, 2.0], [2.0, 5.0], 10.0)
    """
    start = _time.perf_counter()
    problem = Problem(net, "ue")
    flow = free_flow_flows(net, problem=problem)
    return evaluate_flows(net, flow, method="free_flow_advice", problem=problem,
                          wall_time=_time.perf_counter() - start)


@dataclass(frozen=True, eq=False)
class ReactiveAdvice:
    """Result of :func:`reactive_advice`.

    Attributes
    ----------
    network : Network
    response : float
        Share of drivers who switch to the new advice each day.
    flows : ndarray of shape (n_days, n_links)
        Link flows of each day (day 0 is the free-flow advice).
    daily_vehicle_hours : ndarray of shape (n_days,)
    daily_relative_gap : ndarray of shape (n_days,)
        UE gap of each day's flows.
    burn_in : int
        Days left out of the averages.
    mean_flow, mean_time : ndarray of shape (n_links,)
        Time averages over the days after ``burn_in``: link flow, and link travel time
        as experienced day by day.
    mean_vehicle_hours : float
        Average of the daily vehicle-hours after ``burn_in``: what the drivers live
        through on an average day (at least the vehicle-hours of the mean flow, by
        convexity of link costs).
    mean_vehicle_distance : float
    swing : float
        Largest day-to-day change of a link flow over the averaging days, vehicles;
        0 means the advice settled.
    cycle : int
        Length of the repeating cycle the flows fell into (1: a fixed point), or 0 if
        none was found within the run.
    average : Equilibrium
        The time-averaged flows evaluated as a record (its times are those of the mean
        flow, its gap the UE gap of the mean flow).
    """

    network: object
    response: float
    flows: np.ndarray = field(repr=False)
    daily_vehicle_hours: np.ndarray = field(repr=False)
    daily_relative_gap: np.ndarray = field(repr=False)
    burn_in: int
    mean_flow: np.ndarray = field(repr=False)
    mean_time: np.ndarray = field(repr=False)
    mean_vehicle_hours: float
    mean_vehicle_distance: float
    swing: float
    cycle: int
    average: object = field(repr=False)

    @property
    def mean_trip_time(self) -> float:
        """Mean trip time over the averaging days, minutes."""
        total = self.network.total_demand
        return 60.0 * self.mean_vehicle_hours / total if total else 0.0

    @property
    def mean_relative_gap(self) -> float:
        return float(self.daily_relative_gap[self.burn_in:].mean())


def reactive_advice(net, *, n_days=60, burn_in=10, response=1.0) -> ReactiveAdvice:
    """Advice updated daily with the travel times the previous day's advice caused.

    Parameters
    ----------
    net : Network
    n_days : int, default 60
        Days simulated, day 0 being the free-flow advice.
    burn_in : int, default 10
        First days left out of the time averages.
    response : float, default 1.0
        Share ``r`` of drivers who take the new advice each day; the others keep their
        route of the day before: ``x_{k+1} = (1 - r) x_k + r AON(c(x_k))``.

    Returns
    -------
    ReactiveAdvice

    Notes
    -----
    Each day is one all-or-nothing pass. With ``r = 1`` the flows follow the best-reply
    map of the routing game, which on two routes alternates all drivers between them;
    with ``r < 1`` the iteration is damped and, for small enough ``r``, settles near
    the UE (compare the method of successive averages, whose step falls as ``1/k``).

    Examples
    --------
    Two routes ``t1 = 2 + x1``, ``t2 = 1 + 2 x2`` and two trips: the advice sends
    everyone to route 2, then to route 1, and back; on average one trip per route and
    9 vehicle-minutes a day, against 6 at UE.

    >>> from congest.network import Network
    >>> net = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
    ...               free_flow_time=[2.0, 1.0], alpha=[1.0, 2.0], beta=1.0,
    ...               cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
    ...               demand=[[0, 2], [0, 0]])
    >>> ra = reactive_advice(net, n_days=20, burn_in=2)
    >>> ra.cycle, ra.mean_flow.tolist(), round(ra.mean_vehicle_hours * 60, 9)
    (2, [1.0, 1.0], 9.0)
    """
    if n_days < 2:
        raise SolverError(f"n_days must be at least 2, got {n_days!r}")
    if not 0 <= burn_in < n_days - 1:
        raise SolverError(f"burn_in must be in 0..n_days-2, got {burn_in!r}")
    if not 0.0 < response <= 1.0:
        raise SolverError(f"response must be in (0, 1], got {response!r}")
    problem = Problem(net, "ue")
    model = problem.model
    m = net.n_links
    flows = np.empty((n_days, m))
    times = np.empty((n_days, m))
    vh = np.empty(n_days)
    gaps = np.empty(n_days)
    x = free_flow_flows(net, problem=problem)
    for day in range(n_days):
        cost = model.cost(x)
        y, sptt, _ = problem.all_or_nothing(cost)
        flows[day] = x
        times[day] = model.time(x)
        vh[day] = float(x @ times[day]) / 60.0
        gaps[day] = relative_gap(float(x @ cost), sptt)
        x = (1.0 - response) * x + response * y
    keep = slice(burn_in, n_days)
    mean_flow = flows[keep].mean(axis=0)
    length = np.nan_to_num(net.length)
    distance = float("nan") if np.isnan(net.length).all() else float(
        (flows[keep] @ length).mean())
    swing = float(np.max(np.abs(np.diff(flows[keep], axis=0)), initial=0.0))
    average = evaluate_flows(net, mean_flow, method="reactive_advice", problem=problem,
                             iterations=n_days)
    for arr in (flows, times, vh, gaps, mean_flow):
        arr.setflags(write=False)
    mean_time = times[keep].mean(axis=0)
    mean_time.setflags(write=False)
    return ReactiveAdvice(
        network=net, response=float(response), flows=flows, daily_vehicle_hours=vh,
        daily_relative_gap=gaps, burn_in=int(burn_in), mean_flow=mean_flow,
        mean_time=mean_time, mean_vehicle_hours=float(vh[keep].mean()),
        mean_vehicle_distance=distance, swing=swing, cycle=_cycle_length(flows),
        average=average,
    )


def _cycle_length(flows, max_cycle=8):
    """Smallest period with which the last days repeat exactly (to rounding), or 0."""
    n = flows.shape[0]
    scale = max(1.0, float(np.abs(flows).max(initial=0.0)))
    for period in range(1, max_cycle + 1):
        if 2 * period > n:
            break
        tail = flows[n - 2 * period:]
        if np.allclose(tail[:period], tail[period:], rtol=0.0, atol=1e-9 * scale):
            return period
    return 0


@dataclass(frozen=True, eq=False)
class AdviceShare:
    """Result of :func:`advice_share`.

    Attributes
    ----------
    network : Network
    share : float
        Share ``p`` of every OD pair's demand that follows the advice.
    advised_flow : ndarray of shape (n_links,)
        Flows of the advised drivers (the free-flow advice scaled by ``p``).
    selfish : Equilibrium
        UE of the other drivers with the advised flows as a preload; its ``flow``
        excludes the advised drivers.
    total : Equilibrium
        Both groups together, evaluated as a record: its gap is the UE gap of the joint
        flows (the advised drivers are the ones off their best routes).
    advised_mean_time, selfish_mean_time : float
        Mean trip time of each group, minutes (NaN for a group without trips).
    """

    network: object
    share: float
    advised_flow: np.ndarray = field(repr=False)
    selfish: object = field(repr=False)
    total: object = field(repr=False)
    advised_mean_time: float
    selfish_mean_time: float


def advice_share(net, share, *, tol=None, method="auto", max_iter=None,
                 warm_start=None) -> AdviceShare:
    """A share of drivers follow free-flow advice; the rest reach a UE around them.

    Parameters
    ----------
    net : Network
    share : float
        ``p`` in [0, 1]: the advised share of every OD pair's trips.
    tol, method, max_iter, warm_start
        Passed to :func:`congest.solve` for the selfish group.

    Returns
    -------
    AdviceShare

    Notes
    -----
    The advised drivers' routes do not depend on congestion, so the joint state is an
    equilibrium of the two groups exactly when the selfish group is at a UE of the
    network loaded with the advised flows (``solve(..., preload=advised_flow)``). Each
    group's mean trip time is its trips' time-weighted route cost: for the advised, the
    free-flow routes priced at the joint travel times.

    Examples
    --------
    Two routes ``t1 = 2 + x1``, ``t2 = 1 + 2 x2``, two trips, three quarters advised:
    1.5 trips go to route 2 (4 minutes), the selfish half trip takes route 1
    (2.5 minutes).

    >>> from congest.network import Network
    >>> net = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
    ...               free_flow_time=[2.0, 1.0], alpha=[1.0, 2.0], beta=1.0,
    ...               cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
    ...               demand=[[0, 2], [0, 0]])
    >>> res = advice_share(net, 0.75, tol=1e-10)
    >>> [round(float(v), 6) for v in res.total.flow]
    [0.5, 1.5]
    >>> round(res.advised_mean_time, 6), round(res.selfish_mean_time, 6)
    (4.0, 2.5)
    """
    tol = default_tol(method) if tol is None else tol
    share = float(share)
    if not 0.0 <= share <= 1.0:
        raise SolverError(f"advice share must be in [0, 1], got {share!r}")
    problem = Problem(net, "ue")
    advised = share * free_flow_flows(net, problem=problem)
    advised.setflags(write=False)
    if share < 1.0:
        selfish_net = net.scale_demand(1.0 - share)
        selfish = solve(selfish_net, objective="ue", method=method, tol=tol,
                        max_iter=max_iter, preload=advised, warm_start=warm_start)
        selfish_flow = selfish.flow
    else:
        selfish = None
        selfish_flow = np.zeros(net.n_links)
    total = evaluate_flows(net, advised + selfish_flow, method=f"advice_share_{share:g}",
                           problem=problem,
                           wall_time=0.0 if selfish is None else selfish.wall_time,
                           iterations=0 if selfish is None else selfish.iterations)
    demand = net.total_demand
    n_adv, n_self = share * demand, (1.0 - share) * demand
    adv_time = float(advised @ total.time) / n_adv if n_adv > 0 else float("nan")
    self_time = float(selfish_flow @ total.time) / n_self if n_self > 0 else float("nan")
    return AdviceShare(network=net, share=share, advised_flow=advised, selfish=selfish,
                       total=total, advised_mean_time=adv_time, selfish_mean_time=self_time)
