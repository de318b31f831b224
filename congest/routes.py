"""Route flows and select-link queries of an equilibrium.

A route-based solver (``method="gp"``, the default) keeps, for every OD pair with
demand, the routes it uses and their flows; :func:`route_flows` hands them out in one
CSR-like record, and :func:`select_link` answers "which OD pairs use this link (or these
links), and with how many trips".

Results of link-based methods (``"msa"``, ``"fw"``, ``"cfw"``, ``"bfw"``) keep no routes:
a link-flow solution has many route decompositions and none of them is *the* route
choice, so both functions raise :class:`~congest.exceptions.SolverError` for them rather
than invent one. Solve with ``method="gp"`` (warm-started from the link-based result's
network if needed) to get routes.

Examples
--------
>>> from congest.network import Network
>>> from congest import solve
>>> from congest.routes import route_flows, select_link
>>> two_roads = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
...                     free_flow_time=[8.0, 1.0], alpha=[1.0, 2.0], beta=[1.0, 1.0],
...                     cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
...                     demand=[[0, 4], [0, 0]])
>>> eq = solve(two_roads, method="gp", tol=1e-12)
>>> rf = route_flows(eq)
>>> [(r.links.tolist(), round(r.flow, 6)) for r in rf.routes(1, 2)]
[([0], 0.333333), ([1], 3.666667)]
>>> round(float(select_link(eq, [0]).flow.sum()), 6)
0.333333
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .exceptions import SolverError

__all__ = ["Route", "RouteFlows", "SelectLink", "route_flows", "select_link", "select_link_volumes"]


@dataclass(frozen=True, eq=False)
class Route:
    """One used route of an OD pair.

    Attributes
    ----------
    links : ndarray of int
        Link indices in travel order.
    flow : float
        Trips on the route in the analysis period.
    cost : float
        Generalized cost of the route at the equilibrium flows, minutes.
    """

    links: np.ndarray
    flow: float
    cost: float


@dataclass(frozen=True, eq=False)
class RouteFlows:
    """The used routes of every OD pair with demand, in CSR-like arrays.

    The routes of OD pair ``i`` (origin zone index ``origin[i]``, destination zone index
    ``destination[i]``) are ``od_ptr[i]:od_ptr[i + 1]``; the links of route ``r`` are
    ``route_links[route_ptr[r]:route_ptr[r + 1]]`` in travel order.

    Attributes
    ----------
    network : Network
    origin, destination : ndarray of int, shape (n_od,)
        Zone indices (``network.zone_ids[origin]`` are the user's ids).
    demand : ndarray of shape (n_od,)
    od_ptr : ndarray of int, shape (n_od + 1,)
    route_ptr : ndarray of int, shape (n_routes + 1,)
    route_links : ndarray of int, shape (route_ptr[-1],)
    flow : ndarray of shape (n_routes,)
        Route flows; per OD pair they sum to its demand and over the routes through a
        link they sum to the link's flow (up to rounding).
    cost : ndarray of shape (n_routes,)
        Generalized cost of each route at the equilibrium flows, minutes.
    """

    network: object
    origin: np.ndarray
    destination: np.ndarray
    demand: np.ndarray
    od_ptr: np.ndarray
    route_ptr: np.ndarray
    route_links: np.ndarray
    flow: np.ndarray
    cost: np.ndarray

    @property
    def n_od(self) -> int:
        return int(self.origin.size)

    @property
    def n_routes(self) -> int:
        return int(self.flow.size)

    @property
    def route_od(self) -> np.ndarray:
        """OD-pair index of every route, shape (n_routes,)."""
        return np.repeat(np.arange(self.n_od), np.diff(self.od_ptr))

    def od_index(self, origin, destination) -> int:
        """Index of the OD pair between two zone *ids*; KeyError if it has no demand."""
        net = self.network
        zone = {int(z): i for i, z in enumerate(net.zone_ids)}
        try:
            o, d = zone[int(origin)], zone[int(destination)]
        except KeyError as err:
            raise KeyError(f"unknown zone id {err.args[0]!r}") from err
        hit = np.flatnonzero((self.origin == o) & (self.destination == d))
        if hit.size == 0:
            raise KeyError(f"no demand from zone {origin!r} to zone {destination!r}")
        return int(hit[0])

    def routes(self, origin, destination) -> list[Route]:
        """The used routes between two zone ids, as :class:`Route` records."""
        i = self.od_index(origin, destination)
        return [Route(self.links(r), float(self.flow[r]), float(self.cost[r]))
                for r in range(self.od_ptr[i], self.od_ptr[i + 1])]

    def links(self, route) -> np.ndarray:
        """Link indices of route number ``route``, in travel order."""
        return self.route_links[self.route_ptr[route]:self.route_ptr[route + 1]]

    def link_flows(self) -> np.ndarray:
        """Link flows rebuilt from the route flows, shape (n_links,)."""
        per_entry = np.repeat(self.flow, np.diff(self.route_ptr))
        return np.bincount(self.route_links, weights=per_entry,
                           minlength=self.network.n_links)

    def to_frame(self):
        """One row per route: origin and destination zone ids, route number within the
        pair, flow, share of the pair's demand, cost, number of links and the link ids.

        Returns
        -------
        pandas.DataFrame
        """
        import pandas as pd

        net = self.network
        od = self.route_od
        ids = net.link_ids[self.route_links]
        bounds = self.route_ptr
        return pd.DataFrame({
            "origin": net.zone_ids[self.origin[od]],
            "destination": net.zone_ids[self.destination[od]],
            "route": np.arange(self.n_routes) - self.od_ptr[od],
            "flow": self.flow,
            "share": self.flow / self.demand[od],
            "cost": self.cost,
            "n_links": np.diff(bounds),
            "links": [tuple(ids[bounds[r]:bounds[r + 1]].tolist())
                      for r in range(self.n_routes)],
        })


@dataclass(frozen=True, eq=False)
class SelectLink:
    """OD pairs whose routes use the selected links, and how many of their trips do.

    Attributes
    ----------
    network : Network
    links : ndarray of int
        The selected link indices.
    require : {"any", "all"}
        Whether a route counts when it uses any of the links or all of them.
    origin, destination : ndarray of int, shape (k,)
        Zone indices of the OD pairs with some flow through the selection.
    flow : ndarray of shape (k,)
        Trips of each such pair whose route uses the selection.
    demand : ndarray of shape (k,)
        The pairs' total demand.
    """

    network: object
    links: np.ndarray
    require: str
    origin: np.ndarray
    destination: np.ndarray
    flow: np.ndarray
    demand: np.ndarray

    @property
    def share(self) -> np.ndarray:
        """Fraction of each pair's demand that uses the selection."""
        return self.flow / self.demand

    @property
    def total(self) -> float:
        """All trips through the selection (the link flow, for a single link)."""
        return float(self.flow.sum())

    def matrix(self) -> np.ndarray:
        """Select-link trips as a dense (n_zones, n_zones) table in zone order."""
        nz = self.network.n_zones
        out = np.zeros((nz, nz))
        out[self.origin, self.destination] = self.flow
        return out

    def to_frame(self):
        """One row per OD pair: origin and destination zone ids, flow, demand, share.

        Returns
        -------
        pandas.DataFrame
        """
        import pandas as pd

        z = self.network.zone_ids
        return pd.DataFrame({"origin": z[self.origin], "destination": z[self.destination],
                             "flow": self.flow, "demand": self.demand,
                             "share": self.share})


def route_flows(result) -> RouteFlows:
    """Used routes of every OD pair of an equilibrium, with their flows and costs.

    Parameters
    ----------
    result : Equilibrium
        A result of a route-based method (``method="gp"``, the default).

    Returns
    -------
    RouteFlows

    Raises
    ------
    SolverError
        When ``result`` comes from a link-based method, which keeps no routes.

    Notes
    -----
    Route costs are generalized costs (``result.cost`` summed along the route), also for
    a system-optimum result, whose routes are equal in *marginal* cost instead.
    """
    state = _route_state(result)
    links = state.path_links.astype(np.int64)
    ptr = state.path_ptr
    if links.size:
        cost = np.add.reduceat(result.cost[links], ptr[:-1]) if ptr.size > 1 else np.zeros(0)
    else:
        cost = np.zeros(state.path_flow.size)
    cost = np.where(np.diff(ptr) > 0, cost, 0.0)
    for arr in (links, cost):
        arr.setflags(write=False)
    return RouteFlows(result.network, state.origin, state.destination, state.demand,
                      state.od_ptr, ptr, links, state.path_flow, cost)


def select_link(result, links, *, require="any") -> SelectLink:
    """Which OD pairs use a link or set of links, and with how many trips.

    Parameters
    ----------
    result : Equilibrium
        A result of a route-based method (``method="gp"``, the default).
    links : int or array_like of int
        Link indices (use ``network.link_index(link_id)`` to turn ids into indices).
    require : {"any", "all"}, default "any"
        Count a route when it uses any of the links, or only when it uses all of them.

    Returns
    -------
    SelectLink
        Only OD pairs with a positive flow through the selection are listed.

    Raises
    ------
    SolverError
        When ``result`` keeps no routes, or ``require`` is unknown.
    IndexError
        A link index out of range.
    """
    state = _route_state(result)
    sel, uses = _routes_using(state, result.network.n_links, links, require)
    od = np.repeat(np.arange(state.origin.size), np.diff(state.od_ptr))
    flow = np.bincount(od, weights=np.where(uses, state.path_flow, 0.0),
                       minlength=state.origin.size)
    keep = flow > 0
    return SelectLink(result.network, sel, require, state.origin[keep],
                      state.destination[keep], flow[keep], state.demand[keep])


def select_link_volumes(result, links, *, require="any") -> np.ndarray:
    """Link volumes of the trips whose routes use the selected links.

    Parameters are those of :func:`select_link`. Returns an ndarray of shape
    ``(n_links,)``; on a single selected link it equals that link's volume.
    """
    state = _route_state(result)
    n_links = result.network.n_links
    _, uses = _routes_using(state, n_links, links, require)
    lengths = np.diff(state.path_ptr)
    per_entry = np.repeat(np.where(uses, state.path_flow, 0.0), lengths)
    return np.bincount(state.path_links, weights=per_entry, minlength=n_links)


def _routes_using(state, n_links, links, require):
    # the selected link indices, and which routes use any/all of them
    if require not in ("any", "all"):
        raise SolverError(f"Unknown require {require!r}; expected 'any' or 'all'")
    sel = np.unique(np.atleast_1d(np.asarray(links, dtype=np.int64)))
    if sel.size == 0:
        raise SolverError("select_link needs at least one link")
    if sel.min() < 0 or sel.max() >= n_links:
        bad = sel[(sel < 0) | (sel >= n_links)][0]
        raise IndexError(f"link index {bad} out of range 0..{n_links - 1}")
    chosen = np.zeros(n_links, dtype=bool)
    chosen[sel] = True
    lengths = np.diff(state.path_ptr)
    hits_per_route = np.zeros(lengths.size)
    if state.path_links.size:
        route_of_entry = np.repeat(np.arange(lengths.size), lengths)
        hits_per_route = np.bincount(route_of_entry, weights=chosen[state.path_links],
                                     minlength=lengths.size)
    return sel, hits_per_route >= (1 if require == "any" else sel.size)


def _route_state(result):
    from ._gradient_projection import RouteState

    state = getattr(result, "state", None)
    if not isinstance(state, RouteState):
        raise SolverError(
            f"result of method {getattr(result, 'method', '?')!r} keeps no routes; "
            "solve with method='gp' to get route flows")
    if state.od_class is not None:
        raise SolverError(
            "route flows and select-link queries take a single-class result; a multi-class "
            "result keeps its routes per class in .state (RouteState.od_class) for warm "
            "starts")
    return state
