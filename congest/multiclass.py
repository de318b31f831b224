"""User classes with their own values of time: multi-class user equilibrium.

Drivers of class ``k`` make a share ``s_k`` of every OD pair's trips and value time at
``VOT_k`` money per hour. All classes share the roads, so a link's travel time depends on
the total volume ``X_a = sum_k x_ak``, but each class weighs money differently; its
generalized cost of link ``a``, in minutes, is::

    c_ak = t_a(X_a) + fixed_cost_a + 60 * toll_a / VOT_k

Because the class-specific part is a constant, the equilibrium solves a convex program
in the stacked class flows (Dafermos 1972)::

    min  sum_a integral_0^{X_a} t_a(u) du + sum_k sum_a (fixed_a + 60 toll_a / VOT_k) x_ak

whose gradient with respect to ``x_k`` is ``c_k``. :func:`solve_multiclass` solves it by
default with the route-based gradient projection of :mod:`congest._gradient_projection`
(method ``"gp"``): every class and OD pair keeps its own routes, each route carrying the
class's constant charge, and one iteration builds one shortest-path tree per class and
origin; it reaches relative gaps of 1e-10 and below, as for a single class. The
Frank-Wolfe family of :mod:`congest._frank_wolfe` (``"bfw"``, ``"cfw"``, ``"fw"``,
``"msa"``) runs on the stacked flows instead, one all-or-nothing pass per class and
iteration.

Gap (common practice, summed over classes, in generalized minutes)::

    relative gap = (sum_k x_k . c_k - sum_k SPTT_k) / sum_k x_k . c_k

The class flows of a multi-class UE need not be unique (only the totals on links whose
time strictly increases are, and only when classes differ), so compare classes by their
trips, times and tolls paid rather than by link flows.

References
----------
.. [1] Dafermos, S.C. (1972). The traffic assignment problem for multiclass-user
   transportation networks. Transportation Science 6(1), 73-87.
.. [2] Yang, H. & Huang, H.-J. (2004). The multi-class, multi-criteria traffic network
   equilibrium and systems optimum problem. Transportation Research Part B 38(1), 1-15.
"""

from __future__ import annotations

import dataclasses
import importlib
import time as _time
import warnings
from dataclasses import dataclass, field
from types import SimpleNamespace

import numpy as np

from .costs import CostModel
from .equilibrium import Problem, _no_path_message, conservation_error, default_tol, relative_gap
from .exceptions import ConvergenceWarning, NetworkError, SolverError
from .paths import ShortestPaths

__all__ = ["UserClass", "MultiClassEquilibrium", "solve_multiclass", "ClassImpacts",
           "class_impacts", "MULTICLASS_METHODS"]

#: Methods of :func:`solve_multiclass` -> function of :mod:`congest._frank_wolfe` (or of
#: :mod:`congest._gradient_projection` for ``"gp"``).
MULTICLASS_METHODS = {"gp": "solve_gp", "msa": "solve_msa", "fw": "solve_fw",
                      "cfw": "solve_cfw", "bfw": "solve_bfw"}


@dataclass(frozen=True)
class UserClass:
    """A group of drivers.

    Parameters
    ----------
    name : str
    share : float
        Share of every OD pair's trips, in (0, 1]; the shares of all classes sum to 1.
    value_of_time : float
        Money per hour.
    """

    name: str
    share: float
    value_of_time: float

    def __post_init__(self):
        if not (0.0 < float(self.share) <= 1.0):
            raise NetworkError(f"class {self.name!r}: share must be in (0, 1], got "
                               f"{self.share!r}")
        if not (float(self.value_of_time) > 0.0 and np.isfinite(self.value_of_time)):
            raise NetworkError(f"class {self.name!r}: value of time must be positive, got "
                               f"{self.value_of_time!r}")


def _check_classes(classes):
    classes = tuple(classes)
    if not classes:
        raise NetworkError("at least one user class is needed")
    names = [c.name for c in classes]
    if len(set(names)) != len(names):
        raise NetworkError(f"class names must be unique, got {names}")
    total = sum(float(c.share) for c in classes)
    if abs(total - 1.0) > 1e-9:
        raise NetworkError(f"class shares must sum to 1, got {total:.12g}")
    return classes


class _StackedProblem:
    """The multi-class program in the shape the Frank-Wolfe loop expects.

    A flow vector is the class flows stacked, shape ``(n_classes * n_links,)``.
    """

    def __init__(self, net, classes, toll_money):
        self.base = net
        self.classes = classes
        self.k = len(classes)
        self.m = net.n_links
        self.model = CostModel.from_network(net)
        money = net.toll + toll_money
        self.toll_money = money
        self.constants = np.stack([net.fixed_cost + money * (60.0 / c.value_of_time)
                                   for c in classes])
        self.demands = [float(c.share) * net.demand for c in classes]
        self.paths = ShortestPaths(net)
        # what the loop reads from ``problem.network``
        self.network = SimpleNamespace(n_links=self.k * self.m, demand=net.demand)
        self.objective = "ue"

    def split(self, x):
        return np.asarray(x).reshape(self.k, self.m)

    def gradient(self, x):
        total = self.split(x).sum(axis=0)
        return (self.model.time(total)[None, :] + self.constants).ravel()

    def gradient_derivative(self, x):
        # diagonal of the Hessian: every class block sees t'(X) (off-diagonal blocks,
        # equal to it, are left out as in the single-class conjugate directions)
        total = self.split(x).sum(axis=0)
        return np.tile(self.model.derivative(total), self.k)

    def objective_value(self, x):
        xs = self.split(x)
        return float(self.model.integral(xs.sum(axis=0)).sum()
                     + np.sum(self.constants * xs))

    def all_or_nothing(self, cost):
        costs = self.split(cost)
        flows = np.empty((self.k, self.m))
        od = []
        sptt = 0.0
        for j in range(self.k):
            flows[j], od_cost = self.paths.all_or_nothing(costs[j], self.demands[j])
            mask = self.demands[j] > 0
            vals = od_cost[mask]
            if not np.isfinite(vals).all():
                raise NetworkError(_no_path_message(
                    self.base, np.argwhere(mask & ~np.isfinite(od_cost))))
            sptt += float(np.sum(self.demands[j][mask] * vals))
            od.append(od_cost)
        self.last_od_cost = np.stack(od)
        return flows.ravel(), sptt, self.last_od_cost


class _CommodityProblem(Problem):
    """The multi-class program in the shape :func:`solve_gp` expects.

    One commodity per class and OD pair with demand; link costs are travel times only
    (the network's fixed costs and all tolls are each class's constant charges).
    """

    def __init__(self, stacked):
        net = stacked.base
        model = dataclasses.replace(stacked.model, constant=np.zeros(net.n_links))
        super().__init__(net, "ue", model=model, paths=stacked.paths)
        od_o, od_d, od_q = net.od_pairs()
        k = stacked.k
        shares = np.array([float(c.share) for c in stacked.classes])
        self.commodities = (np.tile(od_o, k), np.tile(od_d, k),
                            (shares[:, None] * od_q[None, :]).ravel(),
                            np.repeat(np.arange(k), od_q.size), stacked.constants)

    def all_or_nothing(self, cost):
        # reached only to name OD pairs without a path, which no class can reach
        return Problem(self.network, "ue", model=self.model,
                       paths=self.paths).all_or_nothing(cost)


@dataclass(frozen=True, eq=False)
class MultiClassEquilibrium:
    """Result of :func:`solve_multiclass`.

    Attributes
    ----------
    network : Network
    classes : tuple of UserClass
    toll_money : ndarray of shape (n_links,)
        Money charged per vehicle on each link (the network's tolls plus added ones).
    class_flow : ndarray of shape (n_classes, n_links)
    flow : ndarray of shape (n_links,)
        Total link volumes.
    time : ndarray of shape (n_links,)
        Travel time at the total volumes, minutes.
    class_cost : ndarray of shape (n_classes, n_links)
        Generalized cost per class, minutes.
    relative_gap, average_excess_cost : float
        Summed over classes (see module notes).
    iterations : int
    wall_time : float
    converged : bool
    message : str
    conservation_error : float
        Worst node balance over the classes, vehicles.
    history : dict of str to ndarray
    od_cost : ndarray of shape (n_classes, n_zones, n_zones)
    method : str
    state : RouteState or None
        Routes of every class and OD pair (method ``"gp"``), for warm starts.
    """

    network: object
    classes: tuple
    toll_money: np.ndarray
    class_flow: np.ndarray
    flow: np.ndarray
    time: np.ndarray
    class_cost: np.ndarray
    relative_gap: float
    average_excess_cost: float
    iterations: int
    wall_time: float
    converged: bool
    message: str
    conservation_error: float
    history: dict = field(repr=False)
    od_cost: np.ndarray = field(repr=False)
    method: str = "gp"
    state: object = field(default=None, repr=False)

    @property
    def vehicle_hours(self) -> float:
        return float(self.flow @ self.time) / 60.0

    def class_table(self):
        """One row per class: trips, vehicle-hours, mean time, toll and generalized cost.

        Returns
        -------
        pandas.DataFrame
            Index ``class``; columns ``share``, ``value_of_time``, ``trips``,
            ``vehicle_hours``, ``mean_time_min``, ``mean_toll_money``,
            ``mean_generalized_cost_min``, ``mean_generalized_cost_money``.
        """
        import pandas as pd

        rows = []
        total = self.network.total_demand
        for j, c in enumerate(self.classes):
            trips = float(c.share) * total
            x = self.class_flow[j]
            t = float(x @ self.time)
            toll = float(x @ self.toll_money)
            gen = float(x @ self.class_cost[j])

            def per(v, trips=trips):
                return v / trips if trips > 0 else float("nan")

            rows.append({
                "class": c.name, "share": float(c.share), "value_of_time": c.value_of_time,
                "trips": trips, "vehicle_hours": t / 60.0, "mean_time_min": per(t),
                "mean_toll_money": per(toll), "mean_generalized_cost_min": per(gen),
                "mean_generalized_cost_money": per(gen) * c.value_of_time / 60.0,
            })
        return pd.DataFrame(rows).set_index("class")


def solve_multiclass(net, classes, *, toll_money=None, method="gp", tol=None,
                     max_iter=None, time_limit=None, callback=None,
                     warm_start=None) -> MultiClassEquilibrium:
    """Multi-class user equilibrium with class values of time.

    Parameters
    ----------
    net : Network
        Its ``toll`` (money) and ``fixed_cost`` (minutes) apply to every class; its
        ``value_of_time`` is not used.
    classes : sequence of UserClass
        Shares summing to 1.
    toll_money : array_like of shape (n_links,), optional
        Money per vehicle added to the network's tolls.
    method : {"gp", "auto", "bfw", "cfw", "fw", "msa"}, default "gp"
        Route-based gradient projection (also for ``"auto"``), or a direction finder of
        the Frank-Wolfe loop (:mod:`congest._frank_wolfe`; these reach about 1e-6 in
        reasonable time).
    tol : float, optional
        Target relative gap. Default: :func:`congest.equilibrium.default_tol`, 1e-10,
        or 1e-5 with a link-based method.
    max_iter, time_limit, callback
        As for :func:`congest.solve`. The callback's flow is the total link flow with
        ``"gp"`` and the stacked class flows, shape ``(n_classes * n_links,)``, with the
        Frank-Wolfe methods.
    warm_start : MultiClassEquilibrium, optional
        An earlier ``"gp"`` result on the same network with the same classes (e.g. the
        untolled one before a toll): its routes are the starting point.

    Returns
    -------
    MultiClassEquilibrium

    Raises
    ------
    NetworkError
        Bad classes, or an OD pair without a path.
    SolverError
        Unknown method.

    Notes
    -----
    One iteration costs one shortest-path pass per class. With a single class (or
    all classes at one value of time) the program is the single-class Beckmann program
    and the total flows are its unique solution.

    Examples
    --------
    Two routes: a 10-minute road with a toll of 5 and a free road ``20 + x`` minutes;
    drivers valuing time at 60 per hour see the toll as 5 minutes, at 12 per hour as
    25 minutes.

    >>> from congest.network import Network
    >>> net = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
    ...               free_flow_time=[10.0, 20.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
    ...               cost_kind=2, toll=[5.0, 0.0], zone_ids=[1, 2], zone_nodes=[0, 1],
    ...               demand=[[0, 20], [0, 0]])
    >>> classes = [UserClass("business", 0.5, 60.0), UserClass("leisure", 0.5, 12.0)]
    >>> eq = solve_multiclass(net, classes, tol=1e-10)
    >>> eq.class_table()["mean_toll_money"].round(6).tolist()
    [5.0, 0.0]
    """
    if method == "auto":
        method = "gp"
    tol = default_tol(method) if tol is None else tol
    classes = _check_classes(classes)
    fname = MULTICLASS_METHODS.get(method)
    if fname is None:
        raise SolverError(f"Unknown method {method!r}; choose one of "
                          f"{sorted(MULTICLASS_METHODS)}")
    module = "congest._gradient_projection" if method == "gp" else "congest._frank_wolfe"
    func = getattr(importlib.import_module(module), fname)
    toll = np.zeros(net.n_links) if toll_money is None else np.asarray(toll_money, float)
    if toll.shape != (net.n_links,) or not np.isfinite(toll).all():
        raise NetworkError(f"toll_money must be {net.n_links} finite values")
    problem = _StackedProblem(net, classes, toll)
    least = problem.model.time(np.zeros(net.n_links))[None, :] + problem.constants
    if net.n_links and least.min() < 0.0:
        j, i = np.unravel_index(int(np.argmin(least)), least.shape)
        raise NetworkError(
            f"link {net.link_ids[i]} has a negative generalized cost at zero volume for "
            f"class {classes[j].name!r} ({least[j, i]:.6g} min); a rebate may not exceed "
            "the link's free-flow time and fixed cost")
    if warm_start is not None:
        if getattr(warm_start, "classes", None) is None:
            raise SolverError("a multi-class warm start needs an earlier multi-class result "
                              "(solve_multiclass); a single-class result has no class routes")
        if method != "gp" or getattr(warm_start, "state", None) is None:
            raise SolverError("a multi-class warm start needs method 'gp' and an earlier "
                              "'gp' result")
        if len(warm_start.classes) != len(classes):
            raise SolverError(f"warm start has {len(warm_start.classes)} classes; this "
                              f"problem has {len(classes)}")
    start = _time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        if method == "gp":
            raw = func(_CommodityProblem(problem), tol=tol, max_iter=max_iter,
                       time_limit=time_limit, warm_start=warm_start, callback=callback)
            raw["flow"] = raw.pop("class_flow").ravel()
        else:
            raw = func(problem, tol=tol, max_iter=max_iter, time_limit=time_limit,
                       warm_start=None, callback=callback)
    wall = _time.perf_counter() - start
    xs = np.maximum(problem.split(raw["flow"]), 0.0)
    grad = problem.gradient(xs.ravel())
    _, sptt, od_cost = problem.all_or_nothing(grad)
    tstt = float(xs.ravel() @ grad)
    gap = relative_gap(tstt, sptt)
    # the solver's own test counts too: its gap and this one differ by rounding only
    converged = bool(gap <= tol or raw.get("converged", False))
    message = raw.get("message") or (
        f"relative gap {gap:.3g} {'<=' if converged else '>'} target {tol:.3g}")
    if not converged:
        warnings.warn(f"multi-class {method}: stopped before the gap target: {message}",
                      ConvergenceWarning, stacklevel=2)
    flow = xs.sum(axis=0)
    cons = max(conservation_error(net.scale_demand(float(c.share)), xs[j])
               for j, c in enumerate(classes))
    total = net.total_demand
    arrays = [xs, flow, problem.model.time(flow), problem.split(grad).copy(), od_cost,
              problem.toll_money]
    for arr in arrays:
        arr.setflags(write=False)
    return MultiClassEquilibrium(
        network=net, classes=classes, toll_money=arrays[5], class_flow=arrays[0],
        flow=arrays[1], time=arrays[2], class_cost=arrays[3], relative_gap=float(gap),
        average_excess_cost=(tstt - sptt) / total if total else 0.0,
        iterations=int(raw["iterations"]), wall_time=wall, converged=converged,
        message=message, conservation_error=float(cons),
        history={k: np.asarray(v) for k, v in raw.get("history", {}).items()},
        od_cost=arrays[4], method=method, state=raw.get("state"),
    )


@dataclass(frozen=True, eq=False)
class ClassImpacts:
    """Result of :func:`class_impacts`: who gains and who pays under a toll.

    Attributes
    ----------
    untolled, tolled : MultiClassEquilibrium
    table : pandas.DataFrame
        One row per class: ``trips``, ``mean_time_min`` (tolled),
        ``mean_toll_money`` (tolled), ``time_change_min`` (tolled minus untolled mean
        trip time), ``time_change_money`` (the same valued at the class's value of
        time), ``toll_change_money`` (change of mean toll paid) and
        ``cost_change_money`` (their sum: the change of the class's mean generalized
        cost per trip in money, before any use of the revenue).
    revenue_money : float
    """

    untolled: object
    tolled: object
    table: object
    revenue_money: float


def class_impacts(net, classes, toll_money, *, method="gp", tol=None,
                  max_iter=None) -> ClassImpacts:
    """Per-class effect of added money tolls, against the same network without them.

    Parameters
    ----------
    net : Network
    classes : sequence of UserClass
    toll_money : array_like of shape (n_links,)
        Money per vehicle added on each link (e.g. ``FirstBest.tolls_money``).
    method, tol, max_iter
        As for :func:`solve_multiclass`.

    Returns
    -------
    ClassImpacts
    """
    tol = default_tol(method) if tol is None else tol
    base = solve_multiclass(net, classes, method=method, tol=tol, max_iter=max_iter)
    # the tolled equilibrium starts from the untolled routes (same network and classes)
    tolled = solve_multiclass(net, classes, toll_money=toll_money, method=method, tol=tol,
                              max_iter=max_iter,
                              warm_start=base if method == "gp" else None)
    before = base.class_table()
    after = tolled.class_table()
    table = after[["share", "value_of_time", "trips", "vehicle_hours", "mean_time_min",
                   "mean_toll_money"]].copy()
    table["time_change_min"] = after["mean_time_min"] - before["mean_time_min"]
    table["time_change_money"] = table["time_change_min"] * table["value_of_time"] / 60.0
    table["toll_change_money"] = after["mean_toll_money"] - before["mean_toll_money"]
    table["cost_change_money"] = table["time_change_money"] + table["toll_change_money"]
    revenue = float(tolled.flow @ np.asarray(toll_money, float))
    return ClassImpacts(untolled=base, tolled=tolled, table=table, revenue_money=revenue)
