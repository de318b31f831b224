"""Road pricing: price of anarchy, first-best (marginal-cost) tolls and second-best tolls.

Every total here is a **system cost**: the sum over links of volume times the network's
own generalized cost, ``sum_a x_a (t_a(x_a) + constant_a)``, where ``constant`` is
``Network.constant_cost`` of the network *as given* (fixed link charges and any tolls it
already carries). Tolls added by this module are transfers from drivers to the road
operator, not a cost to society, so they are left out of the system cost; drivers still
see them in the generalized cost that shapes their routes. On a network without fixed
charges or tolls the system cost is the total travel time in vehicle-minutes.

First best
    The system optimum (SO) is the user equilibrium (UE) on marginal costs
    ``t(x) + x t'(x)`` (Beckmann, McGuire & Winsten 1956). Charging each link the
    externality ``x t'(x)`` evaluated at the SO flows makes the SO flows a UE of the
    tolled network, since the tolled UE cost ``t(x) + toll`` then equals the marginal
    cost at SO. :func:`first_best` solves all three problems and reports how far the
    tolled UE lands from SO, the evidence that the tolls work.

Second best
    Only some links may carry a toll (a bridge, a cordon). :func:`second_best` searches
    toll levels on those links that minimise the system cost of the UE response, with
    bounded, warm-started equilibrium solves, and reports the share of the first-best
    gain it recovers, ``(UE - tolled) / (UE - SO)``.

References
----------
.. [1] Pigou, A.C. (1920). The Economics of Welfare. Macmillan, London.
.. [2] Beckmann, M., McGuire, C.B. & Winsten, C.B. (1956). Studies in the Economics of
   Transportation. Yale University Press.
.. [3] Roughgarden, T. & Tardos, E. (2002). How bad is selfish routing? Journal of the
   ACM 49(2), 236-259.
.. [4] Verhoef, E.T. (2002). Second-best congestion pricing in general networks.
   Heuristic algorithms for finding second-best optimal toll levels and toll points.
   Transportation Research Part B 36(8), 707-729.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np

from .costs import CostModel
from .equilibrium import default_tol, solve
from .exceptions import ConvergenceWarning, NetworkError, SolverError

__all__ = [
    "system_cost",
    "tolled_mask",
    "price_of_anarchy",
    "marginal_cost_tolls",
    "minutes_to_money",
    "money_to_minutes",
    "FirstBest",
    "first_best",
    "TollPlan",
    "TolledScenario",
    "apply_toll_plan",
    "SecondBest",
    "second_best",
    "toll_sensitivity",
    "SECOND_BEST_METHODS",
]

#: Search methods of :func:`second_best`.
SECOND_BEST_METHODS = ("auto", "bounded", "powell", "nelder-mead", "l-bfgs-b", "gradient")

#: Points of the coarse scan that starts a second-best search, as fractions of each toll
#: group's range (see ``scan`` of :func:`second_best`).
SCAN_FRACTIONS = (0.0, 1 / 64, 1 / 32, 1 / 16, 1 / 8, 1 / 4, 1 / 2, 3 / 4, 1.0)

#: Tolls below this many minutes count as "no toll" when listing tolled links.
TOLL_EPS_MIN = 1e-9
#: Tolls below this share of the largest also count as "no toll": a marginal-cost toll
#: on a link that carries almost no SO volume is a rounding-level amount.
TOLL_RELATIVE_FLOOR = 1e-4


def tolled_mask(tolls):
    """Links whose toll counts as a toll: above ``TOLL_RELATIVE_FLOOR`` times the
    largest toll and above ``TOLL_EPS_MIN``.

    The one definition behind every count of tolled links (summaries, reports, the toll
    map and the ``tolled`` column of the toll table).
    """
    t = np.asarray(tolls, dtype=np.float64)
    top = float(t.max()) if t.size else 0.0
    return t > max(TOLL_RELATIVE_FLOOR * top, TOLL_EPS_MIN)


def minutes_to_money(minutes, value_of_time):
    """Convert minutes to money at ``value_of_time`` money per hour."""
    return np.asarray(minutes, dtype=np.float64) * (float(value_of_time) / 60.0)


def money_to_minutes(money, value_of_time):
    """Convert money to minutes at ``value_of_time`` money per hour."""
    return np.asarray(money, dtype=np.float64) * (60.0 / float(value_of_time))


def system_cost(eq, base=None) -> float:
    """System cost of an equilibrium's flows, vehicle-minutes.

    ``sum_a x_a (t_a + base.constant_cost_a)`` with ``t`` the travel time at the
    equilibrium's volumes: the generalized cost of the network ``base`` as given,
    without tolls added on top of it.

    Parameters
    ----------
    eq : Equilibrium
    base : Network, optional
        The untolled network; defaults to ``eq.network``.

    Returns
    -------
    float
    """
    base = eq.network if base is None else base
    return float(eq.flow @ (eq.time + base.constant_cost))


def price_of_anarchy(ue, so) -> float:
    """Price of anarchy: total generalized cost at UE over total generalized cost at SO.

    Both totals are ``sum_a x_a c_a(x_a)`` with ``c`` each result's own generalized cost
    (travel time plus the network's constant costs, vehicle-minutes), the quantity SO
    minimises; without fixed charges this is the ratio of total travel times.

    Parameters
    ----------
    ue, so : Equilibrium
        User equilibrium and system optimum of the same network. Their
        ``relative_gap`` tells how far the ratio can be trusted; :class:`FirstBest`
        reports both.

    Returns
    -------
    float
        ``>= 1`` up to the solvers' gaps.

    References
    ----------
    .. [1] Roughgarden, T. & Tardos, E. (2002). How bad is selfish routing? Journal of
       the ACM 49(2), 236-259.

    Examples
    --------
    Pigou's example (Pigou 1920): one unit of demand, link costs 1 and x.

    >>> from congest.network import Network
    >>> from congest import solve
    >>> pigou = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
    ...                 free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
    ...                 cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
    ...                 demand=[[0, 1], [0, 0]])
    >>> ue = solve(pigou, tol=1e-10)
    >>> so = solve(pigou, objective="so", tol=1e-10)
    >>> round(price_of_anarchy(ue, so), 6)
    1.333333
    """
    denom = so.total_cost
    if denom <= 0.0:
        return 1.0 if ue.total_cost <= 0.0 else float("inf")
    return float(ue.total_cost / denom)


def marginal_cost_tolls(so) -> np.ndarray:
    """First-best tolls ``x t'(x)`` at the system-optimum flows, minutes per vehicle.

    Parameters
    ----------
    so : Equilibrium
        A system optimum (``objective="so"``).

    Returns
    -------
    ndarray of shape (n_links,)
        The congestion externality each driver imposes on the others, minutes. Convert
        to money with :func:`minutes_to_money`.

    Notes
    -----
    For BPR costs ``t = t0 (1 + alpha (x/c)**beta)`` the toll is ``beta (t - t0)``, so
    revenue in time units is ``sum_a beta_a (t_a - t0_a) x_a``.

    References
    ----------
    .. [1] Beckmann, M., McGuire, C.B. & Winsten, C.B. (1956). Studies in the Economics
       of Transportation. Yale University Press.
    """
    if so.objective != "so":
        raise SolverError("marginal-cost tolls are evaluated at a system optimum "
                          f"(objective 'so'), got objective {so.objective!r}")
    model = CostModel.from_network(so.network)
    toll = so.flow * model.derivative(so.flow)
    return np.where(so.flow > 0.0, toll, 0.0)


@dataclass(frozen=True, eq=False)
class FirstBest:
    """Result of :func:`first_best`.

    Attributes
    ----------
    network : Network
        The untolled network.
    ue, so, tolled_ue : Equilibrium
        User equilibrium, system optimum, and user equilibrium with the tolls.
    tolls_minutes, tolls_money : ndarray of shape (n_links,)
        Marginal-cost tolls, in minutes and in ``currency`` at ``value_of_time``.
    value_of_time : float
        Money per hour.
    currency : str
    revenue_minutes : float
        ``sum_a toll_a x_a`` at the tolled UE, vehicle-minutes.
    revenue_money : float
        The same in money.
    tolled_links : ndarray of int
        User ids of the links with a positive toll.
    mean_toll_per_trip : float
        Revenue in money over the number of trips.
    max_flow_deviation : float
        ``max_a |tolled_ue.flow_a - so.flow_a|``, vehicles: how well the tolls reproduce
        SO (0 in exact arithmetic).
    price_of_anarchy : float
        UE over SO total generalized cost (:func:`price_of_anarchy`).
    system_cost_ue, system_cost_so, system_cost_tolled : float
        System cost (see module notes) of the three solutions, vehicle-minutes.
    """

    network: object
    ue: object
    so: object
    tolled_ue: object
    tolls_minutes: np.ndarray
    tolls_money: np.ndarray
    value_of_time: float
    currency: str
    revenue_minutes: float
    revenue_money: float
    tolled_links: np.ndarray
    mean_toll_per_trip: float
    max_flow_deviation: float
    price_of_anarchy: float
    system_cost_ue: float
    system_cost_so: float
    system_cost_tolled: float

    @property
    def gaps(self) -> dict:
        """Relative gap reached by each of the three solves."""
        return {"ue": self.ue.relative_gap, "so": self.so.relative_gap,
                "tolled_ue": self.tolled_ue.relative_gap}

    @property
    def so_lower_bound(self) -> float:
        """A certified lower bound on the optimal total generalized cost.

        The SO objective ``Z(x) = sum_a x_a c_a(x_a)`` is convex, so its linearisation
        at the solution ``x`` bounds it from below: ``Z* >= Z(x) - (x - y) . Z'(x)``
        with ``y`` the all-or-nothing load on marginal costs, i.e. ``Z(x)`` minus the
        SO gap in absolute terms.
        """
        return self.so.total_cost - self.so.average_excess_cost * self.network.total_demand

    @property
    def price_of_anarchy_upper(self) -> float:
        """Upper bound on the price of anarchy given the SO gap (UE total over the bound)."""
        lb = self.so_lower_bound
        return float(self.ue.total_cost / lb) if lb > 0 else float("inf")

    @property
    def gain_minutes(self) -> float:
        """System cost saved by the tolls, ``UE - tolled``, vehicle-minutes."""
        return self.system_cost_ue - self.system_cost_tolled

    def summary(self) -> dict:
        """Key figures as a flat dict."""
        return {
            "price_of_anarchy": self.price_of_anarchy,
            "price_of_anarchy_upper": self.price_of_anarchy_upper,
            "ue_relative_gap": self.ue.relative_gap,
            "so_relative_gap": self.so.relative_gap,
            "tolled_ue_relative_gap": self.tolled_ue.relative_gap,
            "max_flow_deviation": self.max_flow_deviation,
            "n_tolled_links": int(self.tolled_links.size),
            "revenue_money": self.revenue_money,
            "revenue_vehicle_hours": self.revenue_minutes / 60.0,
            "mean_toll_per_trip_money": self.mean_toll_per_trip,
            "currency": self.currency,
            "vehicle_hours_ue": self.ue.vehicle_hours,
            "vehicle_hours_so": self.so.vehicle_hours,
            "vehicle_hours_tolled": self.tolled_ue.vehicle_hours,
        }


def _quiet_solve(net, **kw):
    # a capped solve is still reported with its gap; the caller decides whether to warn
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        eq = solve(net, **kw)
    return eq, [w for w in caught if issubclass(w.category, ConvergenceWarning)]


def _warm_solve(net, *, warm_start, **kw):
    """Solve with a warm start, falling back to a cold start if the method refuses it."""
    if warm_start is not None:
        try:
            return solve(net, warm_start=warm_start, **kw)
        except SolverError:
            pass
    return solve(net, **kw)


def first_best(net, *, tol=None, method="auto", max_iter=None, ue=None, so=None,
               tolled_from_so=True) -> FirstBest:
    """User equilibrium, system optimum and marginal-cost (first-best) tolls.

    Parameters
    ----------
    net : Network
        The network as given; its constant costs and tolls are part of the base
        generalized cost.
    tol : float, optional
        Relative-gap target of the three solves. The tolled UE reproduces SO only as
        well as both are solved. Default: :func:`congest.equilibrium.default_tol`,
        1e-10, or 1e-5 with a link-based method.
    method : str, default "auto"
        Equilibrium method (see :func:`congest.solve`).
    max_iter : int, optional
        Iteration cap of each solve.
    ue, so : Equilibrium, optional
        Solutions already at hand (skip those solves).
    tolled_from_so : bool, default True
        Warm-start the tolled UE from the SO solution, which is its exact answer (the
        solve then only confirms the equilibrium conditions). False solves it from
        scratch, so ``max_flow_deviation`` is an independent check of the tolls.

    Returns
    -------
    FirstBest

    References
    ----------
    .. [1] Beckmann, M., McGuire, C.B. & Winsten, C.B. (1956). Studies in the Economics
       of Transportation. Yale University Press.

    Examples
    --------
    >>> from congest.network import Network
    >>> pigou = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
    ...                 free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
    ...                 cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
    ...                 demand=[[0, 1], [0, 0]])
    >>> fb = first_best(pigou, tol=1e-10)
    >>> [round(float(t), 6) for t in fb.tolls_minutes]
    [0.0, 0.5]
    >>> round(fb.max_flow_deviation, 6)
    0.0
    """
    tol = default_tol(method) if tol is None else tol
    kw = {"tol": tol, "method": method, "max_iter": max_iter}
    if ue is None:
        ue = solve(net, objective="ue", **kw)
    if so is None:
        so = solve(net, objective="so", warm_start=None, **kw)
    tolls = marginal_cost_tolls(so)
    tolled_net = net.with_tolls(tolls)
    tolled = _warm_solve(tolled_net, objective="ue",
                         warm_start=so if tolled_from_so else None, **kw)
    vot = net.value_of_time
    revenue_min = float(tolls @ tolled.flow)
    revenue_money = float(minutes_to_money(revenue_min, vot))
    total = net.total_demand
    return FirstBest(
        network=net, ue=ue, so=so, tolled_ue=tolled,
        tolls_minutes=_frozen(tolls), tolls_money=_frozen(minutes_to_money(tolls, vot)),
        value_of_time=vot, currency=net.currency,
        revenue_minutes=revenue_min, revenue_money=revenue_money,
        tolled_links=_frozen(net.link_ids[tolled_mask(tolls)]),
        mean_toll_per_trip=revenue_money / total if total else 0.0,
        max_flow_deviation=float(np.max(np.abs(tolled.flow - so.flow), initial=0.0)),
        price_of_anarchy=price_of_anarchy(ue, so),
        system_cost_ue=system_cost(ue, net), system_cost_so=system_cost(so, net),
        system_cost_tolled=system_cost(tolled, net),
    )


def _frozen(arr):
    arr = np.array(arr, dtype=np.float64 if np.asarray(arr).dtype.kind == "f" else None)
    arr.setflags(write=False)
    return arr


# ----------------------------------------------------------------- toll plans
@dataclass(frozen=True, eq=False)
class TollPlan:
    """Money charges per link, as read from a toll-plan file.

    Attributes
    ----------
    name : str
    charge : ndarray of shape (n_links,)
        Money per vehicle on each link (added to the network's own tolls).
    window : tuple of (str, str) or None
        Time window the plan states (``("07:00", "09:30")``); static runs ignore it.
    source : str
        Where the plan came from (a file path), for reports.
    """

    name: str
    charge: np.ndarray
    window: tuple = None
    source: str = ""

    @property
    def tolled_links(self) -> np.ndarray:
        """Indices of the links with a positive charge."""
        return np.flatnonzero(self.charge > 0.0)

    def apply(self, net):
        """The network with this plan's charges added to its tolls."""
        if self.charge.shape != (net.n_links,):
            raise NetworkError(f"toll plan {self.name!r} has {self.charge.size} charges, "
                               f"the network {net.n_links} links")
        return net.replace(toll=net.toll + self.charge)


@dataclass(frozen=True, eq=False)
class TolledScenario:
    """A user equilibrium under added money tolls (a toll plan).

    Attributes
    ----------
    name : str
    network : Network
        The untolled network.
    equilibrium : Equilibrium
        UE of the tolled network.
    charge : ndarray of shape (n_links,)
        Money per vehicle added on each link.
    revenue_money : float
    system_cost : float
        Vehicle-minutes, tolls excluded (see module notes).
    mean_generalized_cost_min : float
        Mean over trips of what a driver pays, tolls included, in minutes.
    """

    name: str
    network: object
    equilibrium: object
    charge: np.ndarray
    revenue_money: float
    system_cost: float
    mean_generalized_cost_min: float


def apply_toll_plan(net, plan, *, tol=None, method="auto", max_iter=None,
                    warm_start=None) -> TolledScenario:
    """User equilibrium of ``net`` with the charges of ``plan`` added.

    Tolls enter the generalized cost as ``charge / value_of_time`` (the network's value
    of time, money per hour).

    Parameters
    ----------
    net : Network
    plan : TollPlan
    tol, method, max_iter
        Passed to :func:`congest.solve`.
    warm_start : Equilibrium, optional

    Returns
    -------
    TolledScenario
    """
    tol = default_tol(method) if tol is None else tol
    tolled_net = plan.apply(net)
    eq = _warm_solve(tolled_net, objective="ue", warm_start=warm_start, tol=tol,
                     method=method, max_iter=max_iter)
    total = net.total_demand
    return TolledScenario(
        name=plan.name, network=net, equilibrium=eq, charge=plan.charge,
        revenue_money=float(plan.charge @ eq.flow), system_cost=system_cost(eq, net),
        mean_generalized_cost_min=eq.total_cost / total if total else 0.0,
    )


# ---------------------------------------------------------------- second best
@dataclass(frozen=True, eq=False)
class SecondBest:
    """Result of :func:`second_best`.

    Attributes
    ----------
    network : Network
        The untolled network.
    groups : tuple of ndarray of int
        Link indices of each toll group; the links of a group carry one common toll.
    group_link_ids : tuple of ndarray of int
        The same as user link ids.
    tolls_minutes, tolls_money : ndarray of shape (n_groups,)
        Best toll found per group.
    bounds_minutes : ndarray of shape (n_groups, 2)
        Search bounds, minutes.
    link_tolls_minutes : ndarray of shape (n_links,)
        The tolls spread onto the links.
    tolled_ue : Equilibrium
        UE with those tolls.
    system_cost_ue, system_cost_so, system_cost_tolled : float
        Vehicle-minutes (see module notes).
    share_of_first_best : float
        ``(UE - tolled) / (UE - SO)`` in system cost; NaN when UE equals SO.
    revenue_money : float
    evaluations : int
        Equilibrium solves made by the search.
    history : dict of str to ndarray
        ``tolls_minutes`` (n_evaluations, n_groups) and ``system_cost`` per evaluation.
    method : str
    converged : bool
    message : str
    first_best : FirstBest or None
    """

    network: object
    groups: tuple
    group_link_ids: tuple
    tolls_minutes: np.ndarray
    tolls_money: np.ndarray
    bounds_minutes: np.ndarray
    link_tolls_minutes: np.ndarray
    tolled_ue: object
    system_cost_ue: float
    system_cost_so: float
    system_cost_tolled: float
    share_of_first_best: float
    revenue_money: float
    evaluations: int
    history: dict = field(repr=False)
    method: str = ""
    converged: bool = True
    message: str = ""
    first_best: object = field(default=None, repr=False)

    def summary(self) -> dict:
        return {
            "n_groups": len(self.groups),
            "tolls_money": [float(t) for t in self.tolls_money],
            "tolls_minutes": [float(t) for t in self.tolls_minutes],
            "share_of_first_best": self.share_of_first_best,
            "vehicle_hours_ue": self.system_cost_ue / 60.0,
            "vehicle_hours_so": self.system_cost_so / 60.0,
            "vehicle_hours_tolled": self.system_cost_tolled / 60.0,
            "revenue_money": self.revenue_money,
            "tolled_ue_relative_gap": self.tolled_ue.relative_gap,
            "evaluations": self.evaluations,
            "method": self.method,
            "converged": self.converged,
        }


def _groups_of(net, links):
    """Normalise ``links`` (ids, or sequences of ids sharing one toll) to index arrays."""
    if links is None or (not np.isscalar(links) and len(links) == 0):
        raise SolverError("second-best tolls need at least one tollable link")
    if np.isscalar(links):
        links = [links]
    groups = []
    seen = set()
    for item in links:
        ids = [item] if np.isscalar(item) else list(item)
        if not ids:
            raise SolverError("a toll group holds no link")
        idx = np.array([net.link_index(i) for i in ids], dtype=np.int64)
        dup = seen.intersection(idx.tolist())
        if dup:
            raise SolverError(f"link {net.link_ids[min(dup)]} appears in more than one "
                              "toll group")
        seen.update(idx.tolist())
        groups.append(idx)
    return tuple(groups)


def second_best(net, links, *, bounds=None, tol=None, method="auto", search="auto",
                xtol=1e-4, max_evals=200, solver_max_iter=None, first_best_result=None,
                warm=True, callback=None, scan=True) -> SecondBest:
    """Tolls on a chosen set of links that minimise system cost under UE response.

    Parameters
    ----------
    net : Network
    links : sequence
        The tollable links by user id. Each item is a link id (its own toll) or a
        sequence of link ids sharing one toll (both directions of a bridge, a cordon).
    bounds : (float, float) or sequence of them, optional
        Toll range in **money** per group (one pair for all groups, or one per group).
        Default: 0 to twice the largest first-best toll on the group's links (or on the
        network, if that is larger than the group's own; at least 1 minute).
    tol : float, optional
        Relative-gap target of every equilibrium solve. The search needs the system
        cost to be a smooth function of the tolls, so solve tightly. Default:
        :func:`congest.equilibrium.default_tol`, 1e-10, or 1e-5 with a link-based
        method.
    method : str, default "auto"
        Equilibrium method (see :func:`congest.solve`).
    search : {"auto", "bounded", "powell", "nelder-mead", "l-bfgs-b", "gradient"}
        ``"auto"`` (default) is Brent's bounded method for one group and Powell's
        method with bounds for several (both derivative-free). ``"l-bfgs-b"`` is the
        bounded quasi-Newton method on forward-difference gradients (one extra solve
        per group and gradient, step ``xtol``); ``"gradient"`` is the same method on
        the equilibrium's sensitivity (:func:`toll_sensitivity`: one solve per
        gradient whatever the number of groups; needs a route-based equilibrium method
        such as ``"gp"``). Both need the tight gaps of a precise solver, and both
        stop where the system cost is locally flat in the tolls: when no OD pair is
        split between tolled and untolled routes a small toll change moves nobody
        (common on networks with few zones); the derivative-free searches step over
        such flats. See ``scan`` for the start of every search.
    xtol : float, default 1e-4
        Toll tolerance of the search, minutes.
    max_evals : int, default 200
        Cap on equilibrium solves made by the search; reaching it warns with
        :class:`~congest.exceptions.ConvergenceWarning`.
    solver_max_iter : int, optional
        Iteration cap of each equilibrium solve.
    first_best_result : FirstBest, optional
        First-best result of the same network (else computed).
    warm : bool, default True
        Warm-start each solve from the previous one (False: every solve from scratch;
        for timing comparisons).
    callback : callable, optional
        ``callback(tolls_minutes, system_cost)`` after each evaluation; return True to
        stop the search.
    scan : bool, default True
        Scan a coarse grid first, at the fractions :data:`SCAN_FRACTIONS` of each
        group's range (dense near the low end), one group at a time from no toll; the
        local search then starts from the best grid point (one group: Brent's method
        on the two grid cells around it). A toll high enough to empty the tolled links
        makes the system cost flat over most of the default range; a search started
        inside that plateau (Brent's first points lie at 38 % and 62 % of the range)
        never sees the small tolls that help. Costs ``8 * n_groups`` solves (plus one
        with several groups), counted in ``max_evals``.

    Returns
    -------
    SecondBest

    Raises
    ------
    SolverError
        No tollable link, a link in two groups, bad bounds or an unknown search.
    NetworkError
        An unknown link id.

    Notes
    -----
    Each evaluation is a UE solve of the network with the trial tolls, warm-started
    from the previous evaluation's solution, so successive solves start close to their
    answer. The UE flows are unique when link times strictly increase, which makes the
    system cost a continuous function of the tolls; it need not be convex (Verhoef
    2002), so a local search may stop at a local optimum. With several groups Powell's
    method searches along one coordinate at a time within the bounds.

    References
    ----------
    .. [1] Verhoef, E.T. (2002). Second-best congestion pricing in general networks.
       Transportation Research Part B 36(8), 707-729.
    .. [2] Brent, R.P. (1973). Algorithms for Minimization without Derivatives.
       Prentice-Hall.
    .. [3] Powell, M.J.D. (1964). An efficient method for finding the minimum of a
       function of several variables without calculating derivatives. The Computer
       Journal 7(2), 155-162.
    """
    tol = default_tol(method) if tol is None else tol
    from scipy.optimize import minimize, minimize_scalar

    if search not in SECOND_BEST_METHODS:
        raise SolverError(f"Unknown method {search!r}; choose one of {list(SECOND_BEST_METHODS)}")
    groups = _groups_of(net, links)
    k = len(groups)
    vot = net.value_of_time
    fb = first_best_result
    if fb is None:
        fb = first_best(net, tol=tol, method=method, max_iter=solver_max_iter)
    lo_hi = _bounds_minutes(bounds, groups, fb.tolls_minutes, vot)
    expand = np.zeros((net.n_links, k))
    for j, idx in enumerate(groups):
        expand[idx, j] = 1.0

    cache = {}
    grads = {}
    trace_tolls, trace_cost = [], []
    state = {"warm": fb.ue, "stop": False, "capped": False, "best": (np.inf, None, None)}
    kw = {"tol": tol, "method": method, "max_iter": solver_max_iter}

    def evaluate(tolls):
        tolls = np.clip(np.asarray(tolls, dtype=np.float64).ravel(), lo_hi[:, 0], lo_hi[:, 1])
        key = tuple(np.round(tolls, 12))
        if key in cache:
            return cache[key]
        if len(trace_cost) >= max_evals or state["stop"]:
            state["capped"] = not state["stop"]
            return state["best"][0]
        eq = _warm_solve(net.with_tolls(expand @ tolls), objective="ue",
                         warm_start=state["warm"] if warm else None, **kw)
        state["warm"] = eq
        value = system_cost(eq, net)
        cache[key] = value
        if search == "gradient":
            grads[key] = toll_sensitivity(eq, net, groups)[0]
        trace_tolls.append(tolls.copy())
        trace_cost.append(value)
        if value < state["best"][0]:
            state["best"] = (value, tolls.copy(), eq)
        if callback is not None and callback(tolls.copy(), value):
            state["stop"] = True
        return value

    if search == "auto":
        search = "bounded" if k == 1 else "powell"
    # the untolled UE is a candidate: a search must never do worse than no toll
    cache[tuple(np.zeros(k))] = fb.system_cost_ue
    state["best"] = (fb.system_cost_ue, np.zeros(k), fb.ue)
    if search == "bounded" and k != 1:
        raise SolverError("the bounded scalar search handles one toll group; "
                          "use search='powell' or 'nelder-mead'")
    fractions = np.asarray(SCAN_FRACTIONS)
    start = None
    cell = tuple(lo_hi[0])
    if scan:
        # one group at a time, from the low end, keeping each group's best grid point
        start = lo_hi[:, 0].copy()
        for j in range(k):
            grid = lo_hi[j, 0] + fractions * (lo_hi[j, 1] - lo_hi[j, 0])
            values = []
            for level in grid:
                trial = start.copy()
                trial[j] = level
                values.append(evaluate(trial))
            i = int(np.argmin(values))
            start[j] = grid[i]
            if k == 1:
                cell = (grid[max(i - 1, 0)], grid[min(i + 1, grid.size - 1)])
    if search == "bounded":
        if cell[1] > cell[0]:
            res = minimize_scalar(lambda t: evaluate([t]), bounds=cell, method="bounded",
                                  options={"xatol": xtol, "maxiter": max_evals})
            ok, msg = bool(res.success), str(res.message)
        else:
            ok, msg = True, "the toll range is a single point"
    else:
        x0 = np.clip(np.array([fb.tolls_minutes[idx].mean() for idx in groups]),
                     lo_hi[:, 0], lo_hi[:, 1])
        if start is not None and evaluate(start) <= evaluate(x0):
            x0 = start
        scale = max(1.0, fb.system_cost_ue)
        if search == "powell":
            name, opts = "Powell", {"xtol": xtol, "maxfev": max_evals}
        elif search == "nelder-mead":
            name, opts = "Nelder-Mead", {"xatol": xtol, "fatol": 1e-9 * scale,
                                         "maxfev": max_evals}
        else:
            name, opts = "L-BFGS-B", {"eps": xtol, "maxfun": max_evals, "ftol": 1e-12,
                                      "gtol": 1e-9 * scale}
        jac = None
        if search == "gradient":
            def jac(tolls):
                tolls = np.clip(np.asarray(tolls, dtype=np.float64).ravel(), lo_hi[:, 0],
                                lo_hi[:, 1])
                key = tuple(np.round(tolls, 12))
                evaluate(tolls)
                if key not in grads:
                    if key != tuple(np.zeros(k)):
                        return np.zeros(k)  # past the evaluation cap
                    grads[key] = toll_sensitivity(fb.ue, net, groups)[0]
                return grads[key]
        res = minimize(evaluate, x0, method=name, jac=jac, bounds=lo_hi, options=opts)
        ok, msg = bool(res.success), _search_message(res.message)
    value, best_tolls, eq = state["best"]
    n_evals = len(trace_cost)
    if state["capped"]:
        # past the cap every new point read as the best value so far: not a minimum
        ok, msg = False, f"evaluation cap {max_evals} reached: {msg}"
    if state["stop"]:
        ok, msg = False, "stopped by callback"
    if not ok and not state["stop"]:
        warnings.warn(f"second-best search: {msg}", ConvergenceWarning, stacklevel=2)
    gain_fb = fb.system_cost_ue - fb.system_cost_so
    share = (fb.system_cost_ue - value) / gain_fb if gain_fb > 0 else float("nan")
    link_tolls = expand @ best_tolls
    return SecondBest(
        network=net, groups=groups,
        group_link_ids=tuple(_frozen(net.link_ids[g]) for g in groups),
        tolls_minutes=_frozen(best_tolls), tolls_money=_frozen(minutes_to_money(best_tolls, vot)),
        bounds_minutes=_frozen(lo_hi), link_tolls_minutes=_frozen(link_tolls), tolled_ue=eq,
        system_cost_ue=fb.system_cost_ue, system_cost_so=fb.system_cost_so,
        system_cost_tolled=float(value), share_of_first_best=float(share),
        revenue_money=float(minutes_to_money(link_tolls @ eq.flow, vot)),
        evaluations=n_evals,
        history={"tolls_minutes": np.array(trace_tolls).reshape(-1, k),
                 "system_cost": np.array(trace_cost)},
        method=search, converged=ok, message=msg, first_best=fb,
    )


def _search_message(text):
    """SciPy's stopping message in words a toll analyst can act on."""
    text = str(text).strip()
    if text.upper().startswith("ABNORMAL"):
        return ("the quasi-Newton search stopped: its line search found no decrease, so "
                "the system cost is flat or not smooth near these tolls (a toll that moves "
                "nobody); the best tolls found are kept. search='powell' steps over flats")
    return text


def toll_sensitivity(eq, base, groups):
    """Derivative of the system cost of a UE with respect to toll levels.

    Parameters
    ----------
    eq : Equilibrium
        A UE of ``base`` with some tolls added, solved by a route-based method (its
        ``state`` holds route flows, as the gradient-projection method's does).
    base : Network
        The untolled network (its constant costs count in the system cost).
    groups : sequence of ndarray of int
        Link indices of each toll group (one common toll per group).

    Returns
    -------
    gradient : ndarray of shape (n_groups,)
        ``dZ / d toll_g``, vehicle-minutes per minute of toll.
    dflow : ndarray of shape (n_links, n_groups)
        ``d x / d toll_g``, vehicles per minute of toll.

    Raises
    ------
    SolverError
        The equilibrium carries no route flows.

    Notes
    -----
    Sensitivity analysis of the equilibrium (Tobin & Friesz 1988) on the used routes:
    with ``D = diag(t'(x))`` and ``M`` the link-incidence differences between each used
    route and a reference route of its OD pair, route-flow shifts ``z`` keep every OD's
    demand, and keeping the used routes of each OD equally costly under a toll change
    gives ``(M^T D M) z = -M^T e_g`` (``e_g`` marks the group's links). Then
    ``dx = M z`` and ``dZ/dtoll = (t + x t' + constant) . dx``. The system is solved by
    conjugate gradients. The derivative assumes the set of used routes does not change
    (strict complementarity); where a route is about to enter or leave it is one-sided.

    References
    ----------
    .. [1] Tobin, R.L. & Friesz, T.L. (1988). Sensitivity analysis for equilibrium network
       flow. Transportation Science 22(4), 242-250.
    """
    from scipy.sparse import csc_matrix
    from scipy.sparse.linalg import LinearOperator, cg

    state = eq.state
    needed = ("od_ptr", "path_ptr", "path_links", "path_flow", "demand")
    if state is None or not all(hasattr(state, a) for a in needed):
        raise SolverError("toll sensitivities need route flows: solve with a route-based "
                          "method (e.g. method='gp')")
    m = base.n_links
    k = len(groups)
    model = CostModel.from_network(base)
    x = np.asarray(eq.flow, dtype=np.float64)
    deriv = model.derivative(x)
    c_sys = model.time(x) + x * deriv + base.constant_cost
    od_ptr = np.asarray(state.od_ptr)
    path_ptr = np.asarray(state.path_ptr)
    flow = np.asarray(state.path_flow)
    n_routes = flow.size
    lengths = np.diff(path_ptr)
    od_of = np.repeat(np.arange(od_ptr.size - 1), np.diff(od_ptr))
    demand = np.asarray(state.demand)[od_of]
    used = flow > 1e-12 * np.maximum(demand, 1.0)
    # reference route of each OD pair: its largest flow
    order = np.lexsort((-flow, od_of))
    first = np.ones(n_routes, dtype=bool)
    first[1:] = od_of[order][1:] != od_of[order][:-1]
    ref_of_od = np.full(od_ptr.size - 1, -1)
    ref_of_od[od_of[order][first]] = order[first]
    ref = ref_of_od[od_of]
    others = np.flatnonzero(used & (np.arange(n_routes) != ref))
    dflow = np.zeros((m, k))
    if others.size == 0:
        return np.zeros(k), dflow
    incidence = csc_matrix((np.ones(path_ptr[-1]), (np.asarray(state.path_links),
                                                   np.repeat(np.arange(n_routes), lengths))),
                           shape=(m, n_routes))
    diff = (incidence[:, others] - incidence[:, ref[others]]).tocsr()
    diag = np.asarray(diff.multiply(diff).T @ deriv).ravel()
    ridge = 1e-12 * max(float(diag.mean()), 1e-300)
    op = LinearOperator((others.size, others.size), dtype=np.float64,
                        matvec=lambda v: diff.T @ (deriv * (diff @ v)) + ridge * v)
    precond = LinearOperator((others.size, others.size), dtype=np.float64,
                             matvec=lambda v: v / (diag + ridge))
    for j, idx in enumerate(groups):
        e = np.zeros(m)
        e[idx] = 1.0
        rhs = -(diff.T @ e)
        if not rhs.any():
            continue
        z, _ = cg(op, rhs, rtol=1e-12, atol=0.0, maxiter=10 * others.size + 100, M=precond)
        dflow[:, j] = diff @ z
    return c_sys @ dflow, dflow


def _bounds_minutes(bounds, groups, fb_tolls, vot):
    k = len(groups)
    if bounds is None:
        top = float(np.max(fb_tolls, initial=0.0))
        out = np.zeros((k, 2))
        for j, idx in enumerate(groups):
            own = float(np.max(fb_tolls[idx], initial=0.0))
            out[j, 1] = max(2.0 * max(own, top), 1.0)
        return out
    arr = np.asarray(bounds, dtype=np.float64)
    if arr.shape == (2,):
        arr = np.tile(arr, (k, 1))
    if arr.shape != (k, 2):
        raise SolverError(f"bounds must be one (low, high) pair or {k} pairs, got shape "
                          f"{arr.shape}")
    if not np.isfinite(arr).all() or (arr[:, 0] < 0).any() or (arr[:, 1] < arr[:, 0]).any():
        raise SolverError(f"toll bounds must be finite with 0 <= low <= high, got {arr.tolist()}")
    return money_to_minutes(arr, vot)
