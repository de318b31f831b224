"""Wardrop user equilibrium (UE) and system optimum (SO): one entry point, many methods.

:func:`solve` dispatches to a method module; every method fills the same
:class:`Equilibrium` record, which carries what a user needs to trust the numbers: the
relative gap, the average excess cost, the objective, the worst flow-conservation error,
the iteration history and a converged flag.

SO is solved as UE on marginal costs ``t(v) + v t'(v) + constant`` (Beckmann, McGuire &
Winsten 1956), so every method serves both objectives with one machinery.

Gap definitions (common practice), with ``c`` the objective's link cost (generalized cost
for UE, marginal cost for SO) at the current flows ``x``::

    TSTT = sum_a x_a c_a                     total cost on the flows
    SPTT = sum_od q_od * min-path-cost_od    the same demand on shortest paths
    relative gap         = (TSTT - SPTT) / TSTT
    average excess cost  = (TSTT - SPTT) / total demand
"""

from __future__ import annotations

import importlib
import time
import warnings
from dataclasses import dataclass, field

import numpy as np

from .costs import CostModel
from .exceptions import ConvergenceWarning, NetworkError, SolverError
from .paths import ShortestPaths

__all__ = ["solve", "Equilibrium", "METHODS", "conservation_error", "relative_gap",
           "Problem", "default_tol", "LINK_BASED"]

#: Method name -> "module:function" implementing it (imported on first use).
METHODS = {
    "msa": "congest._frank_wolfe:solve_msa",
    "fw": "congest._frank_wolfe:solve_fw",
    "cfw": "congest._frank_wolfe:solve_cfw",
    "bfw": "congest._frank_wolfe:solve_bfw",
    "gp": "congest._gradient_projection:solve_gp",
}

#: Method used by ``method="auto"``.
DEFAULT_METHOD = "gp"

OBJECTIVES = ("ue", "so")


class Problem:
    """A network, its cost model and shortest-path engine, and the objective.

    Methods receive one of these; it is built once per :func:`solve` call.

    Attributes
    ----------
    network : Network
    model : CostModel
    paths : ShortestPaths
    objective : {"ue", "so"}
    """

    def __init__(self, network, objective, model=None, paths=None, preload=None):
        if objective not in OBJECTIVES:
            raise SolverError(f"Unknown objective {objective!r}; expected 'ue' or 'so'")
        self.network = network
        self.objective = objective
        if model is None:
            model = CostModel.from_network(network, preload=preload)
        self.model = model
        # costs only grow with volume, so the cost at zero volume is each link's least;
        # shortest-path trees (Dijkstra) are wrong on negative link costs
        least = model.time(np.zeros(network.n_links)) + model.constant
        if network.n_links and least.min() < 0.0:
            i = int(np.argmin(least))
            raise NetworkError(
                f"link {network.link_ids[i]} has a negative generalized cost at zero volume "
                f"({least[i]:.6g} min: travel time plus fixed cost plus toll in minutes); "
                "link costs must be non-negative, so a rebate may not exceed the link's "
                "free-flow time")
        self.paths = ShortestPaths(network) if paths is None else paths

    def gradient(self, x):
        """Link cost the objective equilibrates: generalized cost (UE) or marginal (SO)."""
        return self.model.cost(x) if self.objective == "ue" else self.model.marginal(x)

    def gradient_derivative(self, x):
        """Diagonal of the Hessian of the objective at ``x``."""
        if self.objective == "ue":
            return self.model.derivative(x)
        # d/dv [t + w t'] = 2 t' + w t'' at w = v + preload
        w = x + self.model.preload
        second = self.model.second_derivative(x)
        return 2.0 * self.model.derivative(x) + w * second

    def objective_value(self, x) -> float:
        """Beckmann objective (UE) or total generalized cost (SO)."""
        return self.model.beckmann(x) if self.objective == "ue" else self.model.total_cost(x)

    def all_or_nothing(self, cost):
        """Shortest-path loading at ``cost``; returns ``(flow, sptt, od_cost)``."""
        flow, od_cost = self.paths.all_or_nothing(cost)
        demand = self.network.demand
        mask = demand > 0
        costs = od_cost[mask]
        if not np.isfinite(costs).all():
            raise NetworkError(_no_path_message(self.network,
                                                np.argwhere(mask & ~np.isfinite(od_cost))))
        sptt = float(np.sum(demand[mask] * costs))
        return flow, sptt, od_cost


def relative_gap(tstt: float, sptt: float) -> float:
    """``(TSTT - SPTT) / TSTT``, 0 when both are 0."""
    if tstt == 0.0:
        return 0.0 if sptt == 0.0 else np.inf
    return (tstt - sptt) / tstt


def conservation_error(network, flow) -> float:
    """Worst node balance residual ``|inflow - outflow - (trips in - trips out)|``."""
    n = network.n_nodes
    net_in = np.bincount(network.head, weights=flow, minlength=n)
    net_in -= np.bincount(network.tail, weights=flow, minlength=n)
    demand_in = np.zeros(n)
    zone_balance = network.demand.sum(axis=0) - network.demand.sum(axis=1)
    np.add.at(demand_in, network.zone_nodes, zone_balance)
    return float(np.max(np.abs(net_in - demand_in))) if n else 0.0


@dataclass(frozen=True, eq=False)
class Equilibrium:
    """Result of :func:`solve`.

    Attributes
    ----------
    network : Network
    objective : {"ue", "so"}
    method : str
    flow : ndarray of shape (n_links,)
        Link volumes (trips in the analysis period).
    time : ndarray of shape (n_links,)
        Travel time at those volumes, minutes, without the constant term.
    cost : ndarray of shape (n_links,)
        Generalized cost ``time + constant`` (what a driver pays in minutes).
    relative_gap, average_excess_cost : float
        Final gap in the objective's cost (see module docstring).
    objective_value : float
        Beckmann objective (UE) or total generalized cost (SO).
    iterations : int
    wall_time : float
        Seconds.
    converged : bool
    message : str
    conservation_error : float
        Worst node-balance residual, vehicles.
    history : dict of str to ndarray
        Per iteration: ``iteration``, ``relative_gap``, ``objective``, ``wall_time``.
    od_cost : ndarray of shape (n_zones, n_zones)
        Shortest-path cost between zones in the objective's cost at the final flows.
    state : object
        Method-specific state for warm starts and route queries (may be None).
    """

    network: object
    objective: str
    method: str
    flow: np.ndarray
    time: np.ndarray
    cost: np.ndarray
    relative_gap: float
    average_excess_cost: float
    objective_value: float
    iterations: int
    wall_time: float
    converged: bool
    message: str
    conservation_error: float
    history: dict = field(repr=False)
    od_cost: np.ndarray = field(repr=False)
    state: object = field(default=None, repr=False)

    @property
    def total_travel_time(self) -> float:
        """Sum of volume x travel time, vehicle-minutes (constant terms excluded)."""
        return float(self.flow @ self.time)

    @property
    def total_cost(self) -> float:
        """Sum of volume x generalized cost, vehicle-minutes."""
        return float(self.flow @ self.cost)

    @property
    def vehicle_hours(self) -> float:
        """Total travel time in vehicle-hours."""
        return self.total_travel_time / 60.0

    @property
    def vehicle_distance(self) -> float:
        """Sum of volume x length (NaN when lengths are unknown)."""
        length = self.network.length
        if np.isnan(length).all():
            return float("nan")
        return float(self.flow @ np.nan_to_num(length))

    @property
    def mean_trip_time(self) -> float:
        """Mean trip time, minutes."""
        total = self.network.total_demand
        return self.total_travel_time / total if total else 0.0

    @property
    def volume_capacity(self) -> np.ndarray:
        """Volume over period capacity per link (NaN where capacity is 0)."""
        cap = self.network.period_capacity
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(cap > 0, self.flow / cap, np.nan)

    def summary(self) -> dict:
        """Key figures as a flat dict (for tables and reports)."""
        vc = self.volume_capacity
        return {
            "objective": self.objective,
            "method": self.method,
            "vehicle_hours": self.vehicle_hours,
            "vehicle_distance": self.vehicle_distance,
            "mean_trip_time_min": self.mean_trip_time,
            "relative_gap": self.relative_gap,
            "average_excess_cost": self.average_excess_cost,
            "objective_value": self.objective_value,
            "iterations": self.iterations,
            "wall_time_s": self.wall_time,
            "converged": self.converged,
            "conservation_error": self.conservation_error,
            "max_volume_capacity": float(np.nanmax(vc)) if vc.size else float("nan"),
            "links_over_capacity": int(np.sum(vc > 1.0)),
        }


#: Methods that move link flows (the Frank-Wolfe family); they stall before tight gaps.
LINK_BASED = ("msa", "fw", "cfw", "bfw")


def default_tol(method="auto") -> float:
    """Relative-gap target when none is given: 1e-10, or 1e-5 for a link-based method.

    One rule for :func:`solve`, :func:`~congest.scenarios.compare`,
    :func:`~congest.pricing.first_best` and the command line, so one network gives one
    set of numbers wherever it is computed.

    Examples
    --------
    >>> default_tol(), default_tol("gp"), default_tol("bfw")
    (1e-10, 1e-10, 1e-05)
    """
    name = DEFAULT_METHOD if method == "auto" else method
    return 1e-5 if name in LINK_BASED else 1e-10


def _resolve(method):
    name = DEFAULT_METHOD if method == "auto" else method
    target = METHODS.get(name)
    if target is None:
        raise SolverError(f"Unknown method {method!r}; choose one of {sorted(METHODS)} or 'auto'")
    module, func = target.split(":")
    return name, getattr(importlib.import_module(module), func)


def solve(network, *, objective="ue", method="auto", tol=None, max_iter=None,
          time_limit=None, warm_start=None, callback=None, preload=None,
          **options) -> Equilibrium:
    """Solve user equilibrium or system optimum on ``network``.

    Parameters
    ----------
    network : Network
    objective : {"ue", "so"}, default "ue"
    method : str, default "auto"
        One of :data:`METHODS` (``"msa"``, ``"fw"``, ``"cfw"``, ``"bfw"``, ...);
        ``"auto"`` picks :data:`DEFAULT_METHOD`.
    tol : float, optional
        Target relative gap. Default :func:`default_tol`: 1e-10, or 1e-5 with a
        link-based method.
    max_iter : int, optional
        Iteration cap (method-specific default). Reaching it warns with
        :class:`~congest.exceptions.ConvergenceWarning` and returns the best result with
        ``converged=False``.
    time_limit : float, optional
        Seconds; treated like the iteration cap.
    warm_start : Equilibrium, optional
        An earlier solution of the same network (possibly with other tolls, demand or
        capacities) to start from.
    callback : callable, optional
        ``callback(iteration, flow, gap)`` after every iteration; return True to stop.
    preload : ndarray of shape (n_links,), optional
        Fixed volume already on the links (e.g. drivers on routes given to them). Costs
        are evaluated at ``flow + preload``; the result's ``flow`` excludes it and its
        ``time``/``cost`` are at the total volume.
    **options
        Method-specific options.

    Returns
    -------
    Equilibrium

    Raises
    ------
    SolverError
        Unknown method or objective.
    NetworkError
        An OD pair with demand has no path.

    Examples
    --------
    >>> from congest.network import Network
    >>> from congest import solve
    >>> pigou = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
    ...                 free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
    ...                 cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
    ...                 demand=[[0, 1], [0, 0]])
    >>> round(float(solve(pigou, objective="so", tol=1e-10).flow[1]), 6)
    0.5
    """
    if tol is None:
        tol = default_tol(method)
    if not (tol > 0):
        raise SolverError(f"tol must be positive, got {tol!r}")
    name, func = _resolve(method)
    problem = Problem(network, objective, preload=preload)
    start = time.perf_counter()
    raw = func(problem, tol=tol, max_iter=max_iter, time_limit=time_limit,
               warm_start=warm_start, callback=callback, **options)
    wall = time.perf_counter() - start
    return _finish(problem, name, raw, wall, tol)


def _finish(problem, method, raw, wall, tol) -> Equilibrium:
    net = problem.network
    flow = np.maximum(np.asarray(raw["flow"], dtype=np.float64), 0.0)
    flow.setflags(write=False)
    grad = problem.gradient(flow)
    _, sptt, od_cost = problem.all_or_nothing(grad)
    tstt = float(flow @ grad)
    gap = relative_gap(tstt, sptt)
    total = net.total_demand
    aec = (tstt - sptt) / total if total else 0.0
    converged = bool(raw.get("converged", gap <= tol))
    message = raw.get("message") or (
        f"relative gap {gap:.3g} {'<=' if converged else '>'} target {tol:.3g}")
    if not converged:
        warnings.warn(f"{method}: stopped before the gap target: {message}",
                      ConvergenceWarning, stacklevel=3)
    time_ = problem.model.time(flow)
    cost = time_ + problem.model.constant
    history = {k: np.asarray(v) for k, v in raw.get("history", {}).items()}
    return Equilibrium(
        network=net, objective=problem.objective, method=method, flow=flow, time=time_,
        cost=cost, relative_gap=float(gap), average_excess_cost=float(aec),
        objective_value=problem.objective_value(flow), iterations=int(raw["iterations"]),
        wall_time=wall, converged=converged, message=message,
        conservation_error=conservation_error(net, flow), history=history,
        od_cost=od_cost, state=raw.get("state"),
    )


def _no_path_message(net, pairs, limit=5) -> str:
    shown = ", ".join(f"{net.zone_ids[o]}->{net.zone_ids[d]}" for o, d in pairs[:limit])
    more = f" and {len(pairs) - limit} more" if len(pairs) > limit else ""
    return f"{len(pairs)} OD pair(s) with demand have no path: {shown}{more}"
