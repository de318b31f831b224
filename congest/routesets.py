"""Route sets: the routes each OD pair may choose from, stored as flat arrays.

A :class:`RouteSet` lists, for every OD pair with demand, a few routes (link sequences).
Day-to-day learning (:mod:`congest.learning`) lets drivers choose among them, so the set
should hold the routes used at user equilibrium plus plausible alternatives:

* the used routes of a precise UE solution (from :func:`congest.routes.route_flows` when
  that module is present), and
* the ``k`` shortest loopless paths at free-flow costs and at UE costs (Yen 1971),
  respecting the centroid rule of the network.

Storage (all arrays, no Python objects per route)::

    od_origin, od_destination   zone indices of OD pair i                 (n_od,)
    od_demand                   trips of OD pair i                        (n_od,)
    od_indptr                   routes of OD i are od_indptr[i]:od_indptr[i+1]   (n_od+1,)
    link_indptr, link_index     route r uses links link_index[link_indptr[r]:link_indptr[r+1]]
                                in driving order (CSR)

References
----------
.. [1] Yen, J.Y. (1971). Finding the K shortest loopless paths in a network. Management
   Science 17(11), 712-716.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numba
import numpy as np
import scipy.sparse as sp

from .paths import ShortestPaths, heap_pop, heap_push

__all__ = ["RouteSet", "build_route_set", "k_shortest_paths", "SOURCE_FLAGS"]

#: Bit flags in ``RouteSet.source`` telling where a route came from.
SOURCE_FLAGS = {"ue_used": 1, "free_flow": 2, "ue_cost": 4, "given": 8}


@dataclass(frozen=True, eq=False)
class RouteSet:
    """Routes per OD pair of a network, in CSR form.

    Attributes
    ----------
    network : Network
    od_origin, od_destination : ndarray of int, shape (n_od,)
        Zone indices of each OD pair (rows and columns of ``network.demand``).
    od_demand : ndarray of float, shape (n_od,)
    od_indptr : ndarray of int, shape (n_od + 1,)
        Routes of OD pair ``i`` are ``od_indptr[i]`` to ``od_indptr[i + 1] - 1``.
    link_indptr : ndarray of int, shape (n_routes + 1,)
    link_index : ndarray of int, shape (n_route_links,)
        Link indices of every route, in driving order.
    source : ndarray of uint8, shape (n_routes,)
        Bit flags of :data:`SOURCE_FLAGS` (a route can come from several sources).
    ue_route_flow : ndarray of float, shape (n_routes,)
        Route flows at the equilibrium used to build the set (zeros if unknown).
    """

    network: object
    od_origin: np.ndarray
    od_destination: np.ndarray
    od_demand: np.ndarray
    od_indptr: np.ndarray
    link_indptr: np.ndarray
    link_index: np.ndarray
    source: np.ndarray
    ue_route_flow: np.ndarray = None
    _cache: dict = field(default_factory=dict, repr=False)

    def __post_init__(self):
        n_routes = self.link_indptr.size - 1
        if self.ue_route_flow is None:
            object.__setattr__(self, "ue_route_flow", np.zeros(n_routes))
        if self.od_indptr[-1] != n_routes:
            raise ValueError("od_indptr and link_indptr disagree on the number of routes")
        if np.any(np.diff(self.od_indptr) < 1):
            raise ValueError("every OD pair needs at least one route")

    # ---------------------------------------------------------------- sizes
    @property
    def n_od(self) -> int:
        return int(self.od_origin.size)

    @property
    def n_routes(self) -> int:
        return int(self.link_indptr.size - 1)

    @property
    def routes_per_od(self) -> np.ndarray:
        """Number of routes of each OD pair, shape (n_od,)."""
        return np.diff(self.od_indptr)

    @property
    def max_routes(self) -> int:
        return int(self.routes_per_od.max()) if self.n_od else 0

    @property
    def route_od(self) -> np.ndarray:
        """OD pair index of every route, shape (n_routes,)."""
        return np.repeat(np.arange(self.n_od), self.routes_per_od)

    # ------------------------------------------------------------ incidence
    @property
    def incidence(self) -> sp.csr_matrix:
        """Link-route incidence, sparse of shape (n_links, n_routes), 1 where used."""
        mat = self._cache.get("incidence")
        if mat is None:
            route_of = np.repeat(np.arange(self.n_routes), np.diff(self.link_indptr))
            mat = sp.csr_matrix(
                (np.ones(self.link_index.size), (self.link_index, route_of)),
                shape=(self.network.n_links, self.n_routes))
            self._cache["incidence"] = mat
        return mat

    def link_flows(self, route_flow) -> np.ndarray:
        """Link volumes from route flows of shape (n_routes,)."""
        return self.incidence @ np.asarray(route_flow, dtype=np.float64)

    def route_costs(self, link_cost) -> np.ndarray:
        """Route costs (sum of link costs) from link costs of shape (n_links,)."""
        return self.incidence.T @ np.asarray(link_cost, dtype=np.float64)

    def route_links(self, route) -> np.ndarray:
        """Link indices of one route."""
        return self.link_index[self.link_indptr[route]:self.link_indptr[route + 1]]

    def od_index(self, origin_id, destination_id) -> int:
        """Index of the OD pair between two zone *ids*; KeyError if not in the set."""
        zone = {int(z): i for i, z in enumerate(self.network.zone_ids)}
        o, d = zone.get(int(origin_id)), zone.get(int(destination_id))
        hit = np.flatnonzero((self.od_origin == o) & (self.od_destination == d))
        if o is None or d is None or hit.size == 0:
            raise KeyError(f"no OD pair {origin_id}->{destination_id} with demand")
        return int(hit[0])

    def to_frame(self):
        """One row per route: od, origin and destination ids, route number, links."""
        import pandas as pd

        net = self.network
        od = self.route_od
        first = self.od_indptr[:-1]
        link_ids = net.link_ids
        links = [" ".join(map(str, link_ids[self.route_links(r)])) for r in range(self.n_routes)]
        return pd.DataFrame({
            "od": od,
            "origin": net.zone_ids[self.od_origin[od]],
            "destination": net.zone_ids[self.od_destination[od]],
            "route": np.arange(self.n_routes) - first[od],
            "n_links": np.diff(self.link_indptr),
            "source": self.source,
            "ue_flow": self.ue_route_flow,
            "links": links,
        })

    # --------------------------------------------------------- construction
    @classmethod
    def from_routes(cls, network, routes, *, ue_route_flow=None) -> RouteSet:
        """Route set from explicit routes.

        Parameters
        ----------
        network : Network
        routes : dict
            ``(origin zone index, destination zone index) -> list of routes``, each route a
            sequence of link indices. Every OD pair with demand must be present.
        ue_route_flow : dict, optional
            Same keys, a list of route flows.

        Examples
        --------
        >>> from congest.network import Network
        >>> from congest.routesets import RouteSet
        >>> net = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
        ...               free_flow_time=[1.0, 1.0], zone_ids=[1, 2], zone_nodes=[0, 1],
        ...               demand=[[0, 1], [0, 0]])
        >>> RouteSet.from_routes(net, {(0, 1): [[0], [1]]}).n_routes
        2
        """
        o, d, q = network.od_pairs()
        per_od, flows = [], []
        for oi, di in zip(o.tolist(), d.tolist(), strict=True):
            if (oi, di) not in routes:
                raise ValueError(f"no routes given for OD pair {network.zone_ids[oi]}->"
                                 f"{network.zone_ids[di]}")
            per_od.append([np.asarray(r, dtype=np.int64) for r in routes[(oi, di)]])
            f = None if ue_route_flow is None else ue_route_flow.get((oi, di))
            flows.append(np.zeros(len(per_od[-1])) if f is None else np.asarray(f, float))
        _check_routes(network, o, d, per_od)
        counts = np.array([len(r) for r in per_od], dtype=np.int64)
        flat = [r for rs in per_od for r in rs]
        return cls(network=network, od_origin=o.astype(np.int64),
                   od_destination=d.astype(np.int64), od_demand=q.astype(np.float64),
                   od_indptr=np.concatenate([[0], np.cumsum(counts)]),
                   link_indptr=np.concatenate([[0], np.cumsum([r.size for r in flat])]
                                              ).astype(np.int64),
                   link_index=np.concatenate(flat) if flat else np.zeros(0, np.int64),
                   source=np.full(len(flat), SOURCE_FLAGS["given"], dtype=np.uint8),
                   ue_route_flow=np.concatenate(flows) if flows else np.zeros(0))


def _check_routes(network, o, d, per_od):
    """Every route must be a connected walk from its origin centroid to its destination."""
    zn = network.zone_nodes
    for oi, di, rs in zip(o, d, per_od, strict=True):
        for r in rs:
            if r.size == 0:
                raise ValueError("a route must have at least one link")
            tails, heads = network.tail[r], network.head[r]
            if tails[0] != zn[oi] or heads[-1] != zn[di] or np.any(tails[1:] != heads[:-1]):
                raise ValueError(f"route {r.tolist()} does not lead from zone "
                                 f"{network.zone_ids[oi]} to zone {network.zone_ids[di]}")


# --------------------------------------------------------------------- Yen's algorithm
@numba.njit(cache=True)
def _to_target(target, r_indptr, r_link, r_tail, cost, centroid, h, heap_key, heap_node):
    """Distance from every node to ``target`` (reverse Dijkstra, centroid rule)."""
    for i in range(h.size):
        h[i] = np.inf
    h[target] = 0.0
    size = heap_push(heap_key, heap_node, 0, 0.0, target)
    while size > 0:
        d, u, size = heap_pop(heap_key, heap_node, size)
        if d > h[u]:
            continue
        if centroid[u] and u != target:
            continue  # a path may start at a centroid but not pass through it
        for k in range(r_indptr[u], r_indptr[u + 1]):
            v = r_tail[k]
            nd = d + cost[r_link[k]]
            if nd < h[v]:
                h[v] = nd
                size = heap_push(heap_key, heap_node, size, nd, v)


@numba.njit(cache=True)
def _spur_search(source, target, indptr, adj_link, adj_head, cost, centroid, h,
                 removed_node, removed_link, dist, pred, touched, heap_key, heap_node):
    """A* search ``source -> target`` avoiding removed nodes and links.

    ``h`` (distance to the target without removals) is an exact lower bound, so the
    search settles little more than the path itself. Centroids other than ``source``
    may be reached but not passed through. Returns ``(distance, n_touched)``; only
    touched entries of ``dist`` need resetting.
    """
    n_touched = 1
    dist[source] = 0.0
    pred[source] = -1
    touched[0] = source
    result = np.inf
    if h[source] == np.inf:
        return result, n_touched
    size = heap_push(heap_key, heap_node, 0, h[source], source)
    while size > 0:
        f, u, size = heap_pop(heap_key, heap_node, size)
        g = dist[u]
        if f > g + h[u]:
            continue
        if u == target:
            result = g
            break
        if centroid[u] and u != source:
            continue
        for k in range(indptr[u], indptr[u + 1]):
            link = adj_link[k]
            v = adj_head[k]
            if removed_link[link] or removed_node[v] or h[v] == np.inf:
                continue
            nd = g + cost[link]
            if nd < dist[v]:
                if dist[v] == np.inf:
                    touched[n_touched] = v
                    n_touched += 1
                dist[v] = nd
                pred[v] = link
                size = heap_push(heap_key, heap_node, size, nd + h[v], v)
    return result, n_touched


@numba.njit(cache=True)
def _yen_one(origin, target, k, indptr, adj_link, adj_head, tail, cost, centroid, h,
             removed_node, removed_link, dist, pred, touched, heap_key, heap_node,
             paths, lengths, costs, cand, cand_len, cand_cost, spur_buf):
    """Up to ``k`` shortest loopless paths; fills ``paths[:n]``; returns n."""
    max_len = paths.shape[1]
    n_found = 0
    n_cand = 0
    n_cand_max = cand.shape[0]
    d, nt = _spur_search(origin, target, indptr, adj_link, adj_head, cost, centroid, h,
                         removed_node, removed_link, dist, pred, touched, heap_key,
                         heap_node)
    if d < np.inf:
        m = 0
        node = target
        while node != origin:
            spur_buf[m] = pred[node]
            m += 1
            node = tail[pred[node]]
        for j in range(m):
            paths[0, j] = spur_buf[m - 1 - j]
        lengths[0] = m
        costs[0] = d
        n_found = 1
    for j in range(nt):
        dist[touched[j]] = np.inf
    while 0 < n_found < k:
        prev = n_found - 1
        root_cost = 0.0
        for i in range(lengths[prev]):
            spur = origin if i == 0 else tail[paths[prev, i]]
            # links leaving the spur node on known paths with the same root
            for p in range(n_found):
                if lengths[p] > i:
                    same = True
                    for q in range(i):
                        if paths[p, q] != paths[prev, q]:
                            same = False
                            break
                    if same:
                        removed_link[paths[p, i]] = 1
            for q in range(i):
                removed_node[tail[paths[prev, q]]] = 1
            d, nt = _spur_search(spur, target, indptr, adj_link, adj_head, cost, centroid,
                                 h, removed_node, removed_link, dist, pred, touched,
                                 heap_key, heap_node)
            if d < np.inf:
                m = 0
                node = target
                while node != spur:
                    spur_buf[m] = pred[node]
                    m += 1
                    node = tail[pred[node]]
                total = root_cost + d
                length = i + m
                dup = False
                for c in range(n_cand):
                    if cand_len[c] == length:
                        same = True
                        for q in range(i):
                            if cand[c, q] != paths[prev, q]:
                                same = False
                                break
                        if same:
                            for q in range(m):
                                if cand[c, i + q] != spur_buf[m - 1 - q]:
                                    same = False
                                    break
                        if same:
                            dup = True
                            break
                if not dup and length <= max_len:
                    # keep only the best k candidates: no more can ever be accepted
                    slot = -1
                    if n_cand < n_cand_max:
                        slot = n_cand
                        n_cand += 1
                    else:
                        worst = 0
                        for c in range(1, n_cand):
                            if cand_cost[c] > cand_cost[worst]:
                                worst = c
                        if cand_cost[worst] > total:
                            slot = worst
                    if slot >= 0:
                        for q in range(i):
                            cand[slot, q] = paths[prev, q]
                        for q in range(m):
                            cand[slot, i + q] = spur_buf[m - 1 - q]
                        cand_len[slot] = length
                        cand_cost[slot] = total
            for j in range(nt):
                dist[touched[j]] = np.inf
            for p in range(n_found):
                if lengths[p] > i:
                    removed_link[paths[p, i]] = 0
            for q in range(i):
                removed_node[tail[paths[prev, q]]] = 0
            root_cost += cost[paths[prev, i]]
        if n_cand == 0:
            break
        best = 0
        for c in range(1, n_cand):
            if cand_cost[c] < cand_cost[best]:
                best = c
        for q in range(cand_len[best]):
            paths[n_found, q] = cand[best, q]
        lengths[n_found] = cand_len[best]
        costs[n_found] = cand_cost[best]
        n_found += 1
        n_cand -= 1
        if best != n_cand:
            for q in range(cand_len[n_cand]):
                cand[best, q] = cand[n_cand, q]
            cand_len[best] = cand_len[n_cand]
            cand_cost[best] = cand_cost[n_cand]
    return n_found


@numba.njit(cache=True, parallel=True)
def _yen_many(o_nodes, d_nodes, group_ptr, k, indptr, adj_link, adj_head, tail,
              r_indptr, r_link, r_tail, cost, centroid, max_len, n_chunks):
    # pairs are sorted by destination; group g holds pairs group_ptr[g]:group_ptr[g+1]
    n_pairs = o_nodes.size
    n_groups = group_ptr.size - 1
    n_nodes = indptr.size - 1
    n_links = tail.size
    out = np.full((n_pairs, k, max_len), -1, dtype=np.int32)
    out_len = np.zeros((n_pairs, k), dtype=np.int32)
    out_cost = np.full((n_pairs, k), np.inf)
    for c in numba.prange(n_chunks):
        removed_node = np.zeros(n_nodes, dtype=np.uint8)
        removed_link = np.zeros(n_links, dtype=np.uint8)
        h = np.empty(n_nodes)
        dist = np.full(n_nodes, np.inf)
        pred = np.full(n_nodes, -1, dtype=np.int64)
        touched = np.empty(n_nodes, dtype=np.int64)
        heap_key = np.empty(n_links + 1)
        heap_node = np.empty(n_links + 1, dtype=np.int64)
        paths = np.empty((k, max_len), dtype=np.int64)
        lengths = np.zeros(k, dtype=np.int64)
        costs = np.zeros(k)
        cand = np.empty((k, max_len), dtype=np.int64)
        cand_len = np.zeros(k, dtype=np.int64)
        cand_cost = np.zeros(k)
        spur_buf = np.empty(n_nodes, dtype=np.int64)
        for g in range(c, n_groups, n_chunks):
            _to_target(d_nodes[group_ptr[g]], r_indptr, r_link, r_tail, cost, centroid, h,
                       heap_key, heap_node)
            for j in range(group_ptr[g], group_ptr[g + 1]):
                n = _yen_one(o_nodes[j], d_nodes[j], k, indptr, adj_link, adj_head, tail,
                             cost, centroid, h, removed_node, removed_link, dist, pred,
                             touched, heap_key, heap_node, paths, lengths, costs, cand,
                             cand_len, cand_cost, spur_buf)
                for p in range(n):
                    out_len[j, p] = lengths[p]
                    out_cost[j, p] = costs[p]
                    for q in range(lengths[p]):
                        out[j, p, q] = paths[p, q]
    return out, out_len, out_cost


def k_shortest_paths(network, cost, k, *, pairs=None, batch=2048):
    """The ``k`` shortest loopless paths of every OD pair (Yen 1971), compiled.

    Parameters
    ----------
    network : Network
    cost : ndarray of shape (n_links,)
        Non-negative link costs.
    k : int
        Paths per OD pair (fewer when fewer exist).
    pairs : tuple of ndarray (origins, destinations), optional
        Zone indices; default every OD pair with demand.
    batch : int, default 2048
        OD pairs per compiled call (bounds the work memory).

    Returns
    -------
    list of list of ndarray
        For each pair, its paths in increasing cost, each an array of link indices.

    Notes
    -----
    Each path is found by Yen's deviation method: for every node of the previous path,
    the root up to it is fixed, the links leaving it on known paths with the same root
    and the root's nodes are removed, and a shortest spur path to the destination is
    searched. Only the best ``k`` candidates are kept. The centroid rule of the network
    (no passing through a zone centroid unless ``through_centroids``) holds throughout.
    Cost per pair is about ``k * L`` shortest-path searches with early exit, ``L`` the
    number of links on a path; pairs are processed in parallel.

    Examples
    --------
    >>> import numpy as np
    >>> from congest.network import Network
    >>> from congest.routesets import k_shortest_paths
    >>> net = Network(node_ids=[1, 2, 3], tail=[0, 0, 2], head=[1, 2, 1], capacity=1.0,
    ...               free_flow_time=[5.0, 1.0, 1.0], zone_ids=[1, 2], zone_nodes=[0, 1],
    ...               demand=[[0, 1], [0, 0]])
    >>> [p.tolist() for p in k_shortest_paths(net, net.free_flow_time, 3)[0]]
    [[1, 2], [0]]
    """
    sp_ = ShortestPaths(network)
    cost = np.ascontiguousarray(cost, dtype=np.float64)
    if pairs is None:
        o, d, _ = network.od_pairs()
    else:
        o, d = (np.asarray(a, dtype=np.int64) for a in pairs)
    k = int(k)
    if k < 1:
        raise ValueError(f"k must be at least 1, got {k}")
    zn = network.zone_nodes
    # reverse star for the trees towards each destination
    r_order = np.argsort(network.head, kind="stable")
    r_link = np.ascontiguousarray(r_order, dtype=np.int64)
    r_tail = np.ascontiguousarray(network.tail[r_order], dtype=np.int64)
    r_indptr = np.zeros(network.n_nodes + 1, dtype=np.int64)
    np.cumsum(np.bincount(network.head, minlength=network.n_nodes), out=r_indptr[1:])
    by_dest = np.argsort(d, kind="stable")
    max_len = max(1, network.n_nodes - 1)
    n_threads = numba.get_num_threads()
    out = [None] * o.size
    for start in range(0, o.size, batch):
        idx = by_dest[start:start + batch]
        oo = np.ascontiguousarray(zn[o[idx]], dtype=np.int64)
        dd = np.ascontiguousarray(zn[d[idx]], dtype=np.int64)
        cut = np.flatnonzero(np.diff(dd)) + 1
        group_ptr = np.concatenate([[0], cut, [dd.size]]).astype(np.int64)
        n_chunks = max(1, min(n_threads, group_ptr.size - 1))
        paths, lens, _ = _yen_many(oo, dd, group_ptr, k, sp_.indptr, sp_.adj_link,
                                   sp_.adj_head, sp_.tail, r_indptr, r_link, r_tail, cost,
                                   sp_.blocked, max_len, n_chunks)
        for j, pair in enumerate(idx.tolist()):
            out[pair] = [paths[j, p, :lens[j, p]].astype(np.int64) for p in range(k)
                         if lens[j, p] > 0]
    return out


# ------------------------------------------------------------------ route set builder
def _used_routes(equilibrium):
    """Used routes of a route-based solution, ``{(o, d): (routes, flows)}``.

    None when the solution keeps no routes (link-based methods such as Frank-Wolfe).
    """
    from .exceptions import SolverError
    from .routes import route_flows

    try:
        rf = route_flows(equilibrium)
    except SolverError:
        return None
    out = {}
    for i in range(rf.n_od):
        lo, hi = rf.od_ptr[i], rf.od_ptr[i + 1]
        out[(int(rf.origin[i]), int(rf.destination[i]))] = (
            [rf.links(r).astype(np.int64) for r in range(lo, hi)],
            rf.flow[lo:hi].tolist())
    return out


def build_route_set(network, *, k=3, max_routes=None, equilibrium=None, tol=1e-8,
                    min_share=1e-6, alternatives=("free_flow", "ue_cost")) -> RouteSet:
    """Route set of a network: UE used routes plus k shortest paths.

    Parameters
    ----------
    network : Network
    k : int, default 3
        Shortest loopless paths per OD pair at free-flow costs and again at UE costs
        (Yen 1971). ``k=0`` keeps only the used routes of a precise equilibrium.
    max_routes : int, optional
        Cap on routes per OD pair. Used UE routes come first (largest flow first), then
        the others by UE cost.
    equilibrium : Equilibrium, optional
        A UE solution of ``network``; default ``solve(network, tol=tol)`` with the
        default (route-based) method, whose used routes then enter the set.
    tol : float, default 1e-8
        Relative gap for the equilibrium solved here.
    min_share : float, default 1e-6
        Used routes carrying less than this share of their OD demand are not counted as
        used (they may still enter as shortest paths).
    alternatives : tuple of {"free_flow", "ue_cost"}, default both
        Costs at which the ``k`` shortest paths are searched (each is one Yen pass over
        all OD pairs; on large networks one pass may be enough).

    Returns
    -------
    RouteSet
        With ``ue_route_flow`` from the solution when it keeps route flows (zeros for a
        link-based solution such as Frank-Wolfe).

    Notes
    -----
    At a user equilibrium every used route of an OD pair has the minimal UE cost, so the
    ``k`` shortest paths at UE costs contain the used routes when ``k`` is at least
    their number; the route flows of a route-based solution make this exact.

    Examples
    --------
    >>> from congest.network import Network
    >>> from congest.routesets import build_route_set
    >>> braess = Network(node_ids=[1, 2, 3, 4], tail=[0, 0, 1, 2, 1], head=[1, 2, 3, 3, 2],
    ...                  capacity=1.0, free_flow_time=[0, 50, 50, 0, 10],
    ...                  alpha=[10, 1, 1, 10, 1], beta=1.0, cost_kind=2,
    ...                  zone_ids=[1, 4], zone_nodes=[0, 3], demand=[[0, 6], [0, 0]])
    >>> build_route_set(braess, k=3).n_routes
    3
    """
    from .equilibrium import solve

    if max_routes is not None and max_routes < 1:
        raise ValueError(f"max_routes must be at least 1, got {max_routes}")
    if equilibrium is None:
        equilibrium = solve(network, tol=tol)
    o, d, q = network.od_pairs()
    used = _used_routes(equilibrium)
    lists = [dict() for _ in range(o.size)]  # per OD: tuple(links) -> [flags, ue flow]

    def add(i, links, flag, flow=0.0):
        key = (tuple(links.tolist()) if isinstance(links, np.ndarray)
               else tuple(int(x) for x in links))
        entry = lists[i].get(key)
        if entry is None:
            lists[i][key] = [flag, flow]
        else:
            entry[0] |= flag
            entry[1] += flow

    if used is not None:
        for i, (oi, di) in enumerate(zip(o.tolist(), d.tolist(), strict=True)):
            routes, flows = used.get((oi, di), ([], []))
            for r, f in zip(routes, flows, strict=True):
                if f > min_share * q[i]:
                    add(i, r, SOURCE_FLAGS["ue_used"], f)
    unknown = set(alternatives) - {"free_flow", "ue_cost"}
    if unknown:
        raise ValueError(f"Unknown alternatives {sorted(unknown)}; use 'free_flow', "
                         "'ue_cost'")
    if k > 0:
        costs = {"free_flow": network.free_flow_time + network.constant_cost,
                 "ue_cost": equilibrium.cost}
        for flag in alternatives:
            for i, paths in enumerate(k_shortest_paths(network, costs[flag], k)):
                for p in paths:
                    add(i, p, SOURCE_FLAGS[flag])
    ue_cost = equilibrium.cost
    per_od, flags, flows = [], [], []
    for i, entries in enumerate(lists):
        if not entries:
            raise ValueError(f"OD pair {network.zone_ids[o[i]]}->{network.zone_ids[d[i]]} "
                             "has no route (use k >= 1)")
        items = list(entries.items())
        # used routes first by flow, then by UE cost
        items.sort(key=lambda kv: (-kv[1][1], float(ue_cost[list(kv[0])].sum())))
        if max_routes is not None:
            items = items[:max_routes]
        per_od.append([np.array(key, dtype=np.int64) for key, _ in items])
        flags.extend(v[0] for _, v in items)
        flows.extend(v[1] for _, v in items)
    counts = np.array([len(r) for r in per_od], dtype=np.int64)
    flat = [r for rs in per_od for r in rs]
    return RouteSet(network=network, od_origin=o.astype(np.int64),
                    od_destination=d.astype(np.int64), od_demand=q.astype(np.float64),
                    od_indptr=np.concatenate([[0], np.cumsum(counts)]).astype(np.int64),
                    link_indptr=np.concatenate([[0], np.cumsum([r.size for r in flat])]
                                               ).astype(np.int64),
                    link_index=np.concatenate(flat).astype(np.int64),
                    source=np.array(flags, dtype=np.uint8),
                    ue_route_flow=np.array(flows, dtype=np.float64))
