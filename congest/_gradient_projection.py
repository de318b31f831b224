"""Path-based gradient projection: precise UE and SO, with route flows and warm starts.

Every OD pair keeps the set of routes it uses, with their flows. One iteration:

1. link flows are summed from the route flows (so they are exact, not drifted) and the
   link costs of the objective are evaluated (generalized cost for UE, marginal cost
   ``t(w) + w t'(w) + constant`` at ``w = flow + preload`` for SO);
2. shortest-path trees from every origin (in parallel on large networks); they give
   the relative gap of the current flows and, for each OD pair, a route that joins its
   set if it is new (column generation);
3. each OD pair moves flow from its dearer routes to its cheapest one with a Newton
   step (Jayakrishnan et al. 1994): ``delta_p = min(f_p, (c_p - c_b) / D_p)`` with
   ``D_p`` the sum of the cost derivatives on the links where route ``p`` and the
   cheapest route ``b`` differ. Link costs are updated after every move (Gauss-Seidel).
   A route whose flow reaches zero is dropped once it costs noticeably more than the
   cheapest one (option ``keep``); nearly cheapest unused routes stay, since an OD pair
   whose routes differ only on links of almost constant cost would otherwise swing all
   its flow between two routes and rediscover the other one iteration after iteration
   (at most ``max_idle`` of them per pair);
4. inner passes repeat step 3 over the fixed route sets (no shortest paths) until the
   excess cost is a small share of the iteration's start, since they are much cheaper
   than step 2 (an inner loop in the spirit of [2]_). They visit only the
   OD pairs whose excess at their last visit was not negligible; every third pass (a
   "wide" pass) visits all pairs that had any excess at all. A pair whose whole flow was
   on its cheapest route at its last visit waits for the next iteration's step 3, which
   visits every pair: on large networks most pairs are such, and visiting them in every
   wide pass cost more than all the other inner work.
   Where many pairs share links, the passes undo part of each other's moves and the
   route flows approach their limit geometrically; once two cycles of passes show the
   rate, the flows are extrapolated to the limit (option ``accelerate``, after
   Aitken [4]_), and the jump is kept only if the next pass confirms it.

Memory is proportional to the number of links plus the total length of the used routes
(a pool of link indices, compacted when half of it belongs to dropped routes), plus one
predecessor array per origin. Every loop over links, OD pairs or routes is compiled with
numba; the shortest-path trees run in parallel over origins when the network is large
enough for threads to pay (small ones run on one thread).

A warm start takes the route sets of an earlier result of the same network (its used
routes and the nearly cheapest ones kept without flow) and scales the flows to the new
demand of each OD pair, then re-balances them at the new costs
with inner passes before the first shortest-path pass; after a toll, capacity or small
demand change most routes stay, so fewer iterations are needed.

References
----------
.. [1] Jayakrishnan, R., Tsai, W.K., Prashker, J.N. & Rajadhyaksha, S. (1994). A faster
   path-based algorithm for traffic assignment. Transportation Research Record 1443,
   75-83.
.. [2] Chen, A., Jayakrishnan, R. & Tsai, W.K. (2002). Faster Frank-Wolfe traffic
   assignment with new flow update scheme. Journal of Transportation Engineering 128(1),
   31-39. (Details from memory.)
.. [3] Bertsekas, D.P. & Gafni, E.M. (1982). Projection methods for variational
   inequalities with application to the traffic assignment problem. Mathematical
   Programming Study 17, 139-159.
"""

from __future__ import annotations

import time
import types
from dataclasses import dataclass

import numba
import numpy as np

from .costs import time_derivatives_scalar
from .equilibrium import relative_gap
from .exceptions import SolverError
from .paths import adjacency_costs, dijkstra

__all__ = ["solve_gp", "RouteState"]

# columns of the packed per-link parameter array (one row per link: a link update reads
# one cache line, not six)
_T0, _ALPHA, _BETA, _CAP, _CONST, _PRELOAD = range(6)
# slots of the counter array
_N_PATHS, _POOL_USED, _DEAD_LINKS, _STAMP = range(4)
_STALL = 25  # iterations without a better gap after which the solver gives up
_FULL_EVERY = 3  # every third inner pass visits all OD pairs


@dataclass(frozen=True, eq=False)
class RouteState:
    """Route sets and flows of a gradient-projection result (``Equilibrium.state``).

    Arrays in CSR form: the routes of OD pair ``i`` are ``od_ptr[i]:od_ptr[i + 1]``; the
    links of route ``r`` are ``path_links[path_ptr[r]:path_ptr[r + 1]]`` in travel order.
    Use :func:`congest.routes.route_flows` rather than these arrays directly.

    Attributes
    ----------
    origin, destination : ndarray of int, shape (n_od,)
        Zone indices of the OD pairs with demand.
    demand : ndarray of shape (n_od,)
    od_ptr : ndarray of int, shape (n_od + 1,)
    path_ptr : ndarray of int, shape (n_routes + 1,)
    path_links : ndarray of int32, shape (path_ptr[-1],)
    path_flow : ndarray of shape (n_routes,)
    n_links : int
    idle_od_ptr, idle_path_ptr, idle_path_links : ndarray of int, optional
        The same CSR layout for the routes kept without flow (nearly cheapest at the
        solution, see option ``keep`` of :func:`solve_gp`). They are not route choices
        and :mod:`congest.routes` ignores them; a warm start loads them with the used
        routes, so that flow can move onto them at once when costs change.
    od_class : ndarray of int, shape (n_od,), optional
        User class of each entry (multi-class equilibrium: one entry per class and OD
        pair); ``None`` for a single class.
    """

    origin: np.ndarray
    destination: np.ndarray
    demand: np.ndarray
    od_ptr: np.ndarray
    path_ptr: np.ndarray
    path_links: np.ndarray
    path_flow: np.ndarray
    n_links: int
    idle_od_ptr: np.ndarray | None = None
    idle_path_ptr: np.ndarray | None = None
    idle_path_links: np.ndarray | None = None
    od_class: np.ndarray | None = None


# --------------------------------------------------------------------------- kernels
@numba.njit(cache=True, inline="always")
def _update_link(l, x, kind, par, so, cost, deriv):
    w = x[l] + par[l, _PRELOAD]
    t, d, d2 = time_derivatives_scalar(kind[l], par[l, _T0], par[l, _ALPHA], par[l, _BETA],
                                       par[l, _CAP], w)
    if so:
        cost[l] = t + w * d + par[l, _CONST]
        deriv[l] = 2.0 * d + w * d2 if w > 0.0 else 2.0 * d
    else:
        cost[l] = t + par[l, _CONST]
        deriv[l] = d


@numba.njit(cache=True)
def _refresh_costs(x, kind, par, so, cost, deriv):
    for l in range(x.size):
        _update_link(l, x, kind, par, so, cost, deriv)


def _trees_impl(origin_nodes, zone_nodes, indptr, adj_link, adj_head, cost, blocked, pred, zdist,
           n_chunks):
    """Shortest-path trees from every origin: predecessor links and zone distances."""
    n_nodes = indptr.size - 1
    cost_adj = np.empty(adj_link.size)
    adjacency_costs(cost, adj_link, cost_adj)
    for ch in numba.prange(n_chunks):
        dist = np.empty(n_nodes)
        p = np.empty(n_nodes, dtype=np.int64)
        order = np.empty(n_nodes, dtype=np.int64)
        pos = np.empty(n_nodes, dtype=np.int64)
        heap_key = np.empty(n_nodes)
        heap_node = np.empty(n_nodes, dtype=np.int64)
        for j in range(ch, origin_nodes.size, n_chunks):
            dijkstra(origin_nodes[j], indptr, adj_link, adj_head, cost_adj, blocked, dist, p,
                     order, pos, heap_key, heap_node)
            for i in range(n_nodes):
                pred[j, i] = p[i]
            for z in range(zone_nodes.size):
                zdist[j, z] = dist[zone_nodes[z]]


def _twins(impl):
    """A parallel and a serial compiled version of ``impl``, each with its own cache.

    numba names its cache files after the function and keys the entries by argument
    types only; two dispatchers of one function would share the file, and the one
    compiled first would be loaded for both (the parallel version then ran on one
    thread). Each twin is therefore compiled from a renamed copy of the function.
    """
    out = []
    for suffix, parallel in (("parallel", True), ("serial", False)):
        name = impl.__name__.replace("_impl", "_" + suffix)
        fn = types.FunctionType(impl.__code__, impl.__globals__, name, impl.__defaults__,
                                impl.__closure__)
        fn.__qualname__ = name
        fn.__doc__ = impl.__doc__
        out.append(numba.njit(cache=True, parallel=parallel)(fn))
    return tuple(out)


# Parallel regions cost a thread hand-over each; small networks run the serial twin.
_trees_parallel, _trees_serial = _twins(_trees_impl)
_PARALLEL_WORK = 200_000  # origins x links above which the trees run in parallel


@numba.njit(cache=True)
def _needs_route(od_row, od_d, zdist, cost, od_first, p_start, p_len, p_next, pool, rel_tol,
                 need, p_charge):
    """Flag the OD pairs whose tree route is cheaper than all their routes."""
    for od in range(od_first.size):
        p = od_first[od]
        best = np.inf
        while p >= 0:
            c = p_charge[p]
            for i in range(p_start[p], p_start[p] + p_len[p]):
                c += cost[pool[i]]
            if c < best:
                best = c
            p = p_next[p]
        if best == np.inf:
            need[od] = True
        else:
            need[od] = zdist[od_row[od], od_d[od]] < best - rel_tol * abs(best)


@numba.njit(cache=True)
def _sum_flows(od_demand, od_first, p_start, p_len, p_flow, p_next, pool, x):
    """Link flows from route flows; first restores each OD's route flows to its demand."""
    x[:] = 0.0
    for od in range(od_first.size):
        p = od_first[od]
        if p < 0:
            continue
        total = 0.0
        big = p
        while p >= 0:
            total += p_flow[p]
            if p_flow[p] > p_flow[big]:
                big = p
            p = p_next[p]
        p_flow[big] += od_demand[od] - total
        p = od_first[od]
        while p >= 0:
            f = p_flow[p]
            if f != 0.0:
                for i in range(p_start[p], p_start[p] + p_len[p]):
                    x[pool[i]] += f
            p = p_next[p]


@numba.njit(cache=True)
def _equilibrate(od, x, kind, par, so, cost, deriv, od_first, p_start, p_len, p_flow,
                 p_next, pool, counters, mark, mark2, keep, prune, p_cost, max_idle, p_charge):
    """Newton moves of one OD pair's flow to its cheapest route; returns its excess cost.

    The excess ``sum_p f_p (c_p - c_min)`` is measured before the moves. ``p_cost`` is
    scratch space per route (the route costs at the start of the visit); ``p_charge``
    is each route's constant cost of its class (zero with a single class).
    """
    first = od_first[od]
    if first < 0 or p_next[first] < 0:
        return 0.0
    best = -1
    best_cost = np.inf
    n_used = 0
    p = first
    while p >= 0:
        c = p_charge[p]
        for i in range(p_start[p], p_start[p] + p_len[p]):
            c += cost[pool[i]]
        p_cost[p] = c
        if c < best_cost:
            best_cost = c
            best = p
        if p_flow[p] > 0.0:
            n_used += 1
        p = p_next[p]
    if not prune and n_used == 1 and p_flow[best] > 0.0:
        return 0.0  # all flow is on the cheapest route: nothing to move or drop
    counters[_STAMP] += 1
    sb = counters[_STAMP]
    b0 = p_start[best]
    b1 = b0 + p_len[best]
    for i in range(b0, b1):
        mark[pool[i]] = sb
    excess = 0.0
    prev = -1
    n_idle = 0
    p = first
    while p >= 0:
        nxt = p_next[p]
        if p == best:
            prev = p
            p = nxt
            continue
        if p_flow[p] <= 0.0:
            # an unused route: nothing to move. Once per iteration (prune) it is dropped
            # unless nearly cheapest, when it would only be found again by a later
            # shortest-path pass
            if not prune:
                prev = p
                p = nxt
                continue
            if p_cost[p] - best_cost > keep * best_cost or n_idle >= max_idle:
                if prev < 0:
                    od_first[od] = nxt
                else:
                    p_next[prev] = nxt
                counters[_DEAD_LINKS] += p_len[p]
                p_len[p] = 0
            else:
                n_idle += 1
                prev = p
            p = nxt
            continue
        counters[_STAMP] += 1
        sp = counters[_STAMP]
        cp = p_charge[p]
        d_own = 0.0
        d_common = 0.0
        for i in range(p_start[p], p_start[p] + p_len[p]):
            l = pool[i]
            cp += cost[l]
            mark2[l] = sp
            if mark[l] == sb:
                d_common += deriv[l]
            else:
                d_own += deriv[l]
        cb = p_charge[best]
        db = 0.0
        for i in range(b0, b1):
            l = pool[i]
            cb += cost[l]
            db += deriv[l]
        f = p_flow[p]
        diff = cp - cb
        if diff > 0.0 and f > 0.0:
            excess += f * diff
            dsum = d_own + db - d_common
            delta = f
            if dsum > 0.0 and diff < f * dsum:
                delta = diff / dsum
            if delta > 0.0:
                for i in range(p_start[p], p_start[p] + p_len[p]):
                    l = pool[i]
                    if mark[l] != sb:
                        v = x[l] - delta
                        x[l] = v if v > 0.0 else 0.0
                        _update_link(l, x, kind, par, so, cost, deriv)
                for i in range(b0, b1):
                    l = pool[i]
                    if mark2[l] != sp:
                        x[l] += delta
                        _update_link(l, x, kind, par, so, cost, deriv)
                # Newton overshoots where the cost derivative grows fast along the move
                # (steep marginal costs of SO): if the routes swapped order, step back
                # to the secant root between the two points
                new_diff = p_charge[p] - p_charge[best]
                for i in range(p_start[p], p_start[p] + p_len[p]):
                    new_diff += cost[pool[i]]
                for i in range(b0, b1):
                    new_diff -= cost[pool[i]]
                if new_diff < 0.0:
                    back = delta * (-new_diff) / (diff - new_diff)
                    if back > 0.0:
                        for i in range(p_start[p], p_start[p] + p_len[p]):
                            l = pool[i]
                            if mark[l] != sb:
                                x[l] += back
                                _update_link(l, x, kind, par, so, cost, deriv)
                        for i in range(b0, b1):
                            l = pool[i]
                            if mark2[l] != sp:
                                v = x[l] - back
                                x[l] = v if v > 0.0 else 0.0
                                _update_link(l, x, kind, par, so, cost, deriv)
                        delta -= back
                p_flow[best] += delta
                f = f - delta if delta < f else 0.0
                p_flow[p] = f
        if f <= 0.0 and diff > keep * cb:
            # drop the route
            if prev < 0:
                od_first[od] = nxt
            else:
                p_next[prev] = nxt
            counters[_DEAD_LINKS] += p_len[p]
            p_len[p] = 0
        else:
            prev = p
        p = nxt
    return excess


def _find_routes_impl(need, od_row, od_dnode, tail, pred, od_first, p_start, p_len, p_hash,
                      p_next, pool, n_chunks, new_len, new_hash):
    """The tree route of every OD pair that needs one: its length, or -1 if it has none
    or already knows it.

    Read-only on the route pool, so the pairs are split over threads.
    """
    n_od = need.size
    for ch in numba.prange(n_chunks):
        work = np.empty(pred.shape[1], dtype=np.int32)
        for od in range(ch, n_od, n_chunks):
            new_len[od] = -1
            if not need[od]:
                continue
            row = od_row[od]
            node = od_dnode[od]
            n = 0
            h = 1469598103934665603
            while True:
                l = pred[row, node]
                if l < 0:
                    break
                work[n] = l
                n += 1
                h = (h ^ l) * 1099511628211
                node = tail[l]
            found = False
            p = od_first[od]
            while p >= 0 and not found:
                if p_hash[p] == h and p_len[p] == n:
                    s = p_start[p]
                    same = True
                    for i in range(n):
                        if pool[s + i] != work[n - 1 - i]:
                            same = False
                            break
                    found = same
                p = p_next[p]
            if not found:
                new_len[od] = n
                new_hash[od] = h


def _write_routes_impl(new_len, new_at, od_row, od_dnode, tail, pred, pool, n_chunks):
    """Write the links of each new tree route, in travel order, at ``pool[new_at[od]:]``."""
    n_od = new_len.size
    for ch in numba.prange(n_chunks):
        for od in range(ch, n_od, n_chunks):
            n = new_len[od]
            if n <= 0:
                continue
            row = od_row[od]
            node = od_dnode[od]
            s = new_at[od] + n - 1
            for i in range(n):
                l = pred[row, node]
                pool[s - i] = l
                node = tail[l]


# A pass over a million OD pairs is worth two threads; small networks run the serial twin.
_find_routes_parallel, _find_routes_serial = _twins(_find_routes_impl)
_write_routes_parallel, _write_routes_serial = _twins(_write_routes_impl)


@numba.njit(cache=True, inline="always")
def _join_route(od, n, start, h, flow, od_first, p_start, p_len, p_flow, p_hash, p_next,
                counters, pool, p_charge, od_cls, surcharge):
    """Give OD pair ``od`` a new route of ``n`` links at ``pool[start:]`` with ``flow``."""
    q = counters[_N_PATHS]
    counters[_N_PATHS] += 1
    k = od_cls[od]
    c = 0.0
    for i in range(start, start + n):
        c += surcharge[k, pool[i]]
    p_charge[q] = c
    p_start[q] = start
    p_len[q] = n
    p_hash[q] = h
    p_flow[q] = flow
    p_next[q] = od_first[od]
    od_first[od] = q


@numba.njit(cache=True)
def _column_pass(new_len, new_at, new_hash, od_demand, x, kind, par, so, cost, deriv,
                 od_first, p_start, p_len, p_flow, p_hash, p_next, pool, counters, mark,
                 mark2, keep, od_excess, p_cost, max_idle, p_charge, od_cls, surcharge):
    """Join each OD pair's new tree route (already written to the pool) to its set, then
    equilibrate the pair. Returns the excess cost found."""
    excess = 0.0
    # pairs without routes (a cold start, new pairs of a warm start) take their whole
    # demand on the tree route first, and the link costs are evaluated once after that
    loaded = False
    for od in range(od_first.size):
        n = new_len[od]
        if n < 0 or od_first[od] >= 0:
            continue
        _join_route(od, n, new_at[od], new_hash[od], od_demand[od], od_first, p_start, p_len,
                    p_flow, p_hash, p_next, counters, pool, p_charge, od_cls, surcharge)
        new_len[od] = -1
        od_excess[od] = 0.0
        for i in range(new_at[od], new_at[od] + n):
            x[pool[i]] += od_demand[od]
        loaded = True
    if loaded:
        for l in range(x.size):
            _update_link(l, x, kind, par, so, cost, deriv)
    for od in range(od_first.size):
        n = new_len[od]
        if n < 0:
            first = od_first[od]
            od_excess[od] = 0.0
            if first >= 0 and p_next[first] >= 0:
                e = _equilibrate(od, x, kind, par, so, cost, deriv, od_first, p_start, p_len,
                                 p_flow, p_next, pool, counters, mark, mark2, keep, True,
                                 p_cost, max_idle, p_charge)
                od_excess[od] = e
                excess += e
            continue
        _join_route(od, n, new_at[od], new_hash[od], 0.0, od_first, p_start, p_len, p_flow,
                    p_hash, p_next, counters, pool, p_charge, od_cls, surcharge)
        e = _equilibrate(od, x, kind, par, so, cost, deriv, od_first, p_start, p_len,
                         p_flow, p_next, pool, counters, mark, mark2, keep, True, p_cost,
                         max_idle, p_charge)
        # a pair that just got a route is always revisited by the next inner pass
        od_excess[od] = e if e > 0.0 else np.inf
        excess += e
    return excess


@numba.njit(cache=True)
def _inner_pass(x, kind, par, so, cost, deriv, od_first, p_start, p_len, p_flow, p_next,
                pool, counters, mark, mark2, keep, od_excess, threshold, p_cost, max_idle,
                p_charge):
    """Equilibrate the OD pairs whose last excess cost was above ``threshold``."""
    excess = 0.0
    for od in range(od_first.size):
        if od_excess[od] <= threshold:
            continue
        first = od_first[od]
        if first < 0 or p_next[first] < 0:
            od_excess[od] = 0.0
            continue  # a single route has nothing to move (checked here: calls are dear)
        e = _equilibrate(od, x, kind, par, so, cost, deriv, od_first, p_start, p_len,
                         p_flow, p_next, pool, counters, mark, mark2, keep, False, p_cost, max_idle,
                         p_charge)
        od_excess[od] = e
        excess += e
    return excess


@numba.njit(cache=True)
def _extrapolate(od_first, p_next, p_flow, step, od_demand, fac, od_excess):
    """Move every route flow ``fac`` times its last change further; keep OD totals.

    Flows that would turn negative become zero and each OD pair's flows are rescaled to
    its demand. The pairs that moved are flagged (``od_excess = inf``) for the next pass.
    """
    for od in range(od_first.size):
        p = od_first[od]
        moved = False
        total = 0.0
        while p >= 0:
            if step[p] != 0.0:
                moved = True
                f = p_flow[p] + fac * step[p]
                p_flow[p] = f if f > 0.0 else 0.0
            total += p_flow[p]
            p = p_next[p]
        if moved and total > 0.0:
            s = od_demand[od] / total
            p = od_first[od]
            while p >= 0:
                p_flow[p] *= s
                p = p_next[p]
            od_excess[od] = np.inf


@numba.njit(cache=True)
def _compact(od_first, p_start, p_len, p_flow, p_hash, p_next, pool, counters, new_id,
             live, p_charge):
    """Drop the dead routes in place: live links moved down, live routes renumbered.

    ``new_id`` and ``live`` are work arrays of at least ``counters[_N_PATHS]`` entries.
    Nothing is allocated but the sort order, so a large pool is not copied into fresh
    memory (page faults on gigabytes cost more than the copy).
    """
    n = counters[_N_PATHS]
    for p in range(n):
        new_id[p] = -1
    for od in range(od_first.size):
        p = od_first[od]
        while p >= 0:
            new_id[p] = 0
            p = p_next[p]
    m = 0
    for p in range(n):
        if new_id[p] == 0:
            live[m] = p
            m += 1
    # links: the live routes in pool order, each moved down to the write position
    order = np.argsort(p_start[live[:m]])
    s = 0
    for j in range(m):
        p = live[order[j]]
        a = p_start[p]
        if a != s:
            for i in range(p_len[p]):
                pool[s + i] = pool[a + i]
            p_start[p] = s
        s += p_len[p]
    # routes: renumbered in id order (the new id is never above the old one)
    for j in range(m):
        p = live[j]
        new_id[p] = j
        if p != j:
            p_start[j] = p_start[p]
            p_len[j] = p_len[p]
            p_flow[j] = p_flow[p]
            p_hash[j] = p_hash[p]
            p_next[j] = p_next[p]
            p_charge[j] = p_charge[p]
    for j in range(m):
        if p_next[j] >= 0:
            p_next[j] = new_id[p_next[j]]
    for od in range(od_first.size):
        if od_first[od] >= 0:
            od_first[od] = new_id[od_first[od]]
    counters[_N_PATHS] = m
    counters[_POOL_USED] = s
    counters[_DEAD_LINKS] = 0


@numba.njit(cache=True)
def _import(old_od_ptr, old_path_ptr, old_links, old_flow, idle_od_ptr, idle_path_ptr,
            idle_links, old_index, scale, od_first, p_start, p_len, p_flow, p_hash, p_next,
            pool, counters, p_charge, od_cls, surcharge):
    """Seed the route pool from an earlier state; ``old_index[od]`` = old OD or -1.

    Each OD pair gets its used routes (flows times ``scale``) and then its idle routes
    (no flow); each route's class charge is summed at the new charges.
    """
    q = 0
    s = 0
    for od in range(od_first.size):
        od_first[od] = -1
        k = old_index[od]
        if k < 0:
            continue
        last = -1
        n_used = old_od_ptr[k + 1] - old_od_ptr[k]
        n_idle = idle_od_ptr[k + 1] - idle_od_ptr[k]
        for j in range(n_used + n_idle):
            if j < n_used:
                r = old_od_ptr[k] + j
                f = old_flow[r] * scale[od]
                if f <= 0.0:
                    continue
                a, b = old_path_ptr[r], old_path_ptr[r + 1]
                links = old_links
            else:
                r = idle_od_ptr[k] + j - n_used
                f = 0.0
                a, b = idle_path_ptr[r], idle_path_ptr[r + 1]
                links = idle_links
            h = 1469598103934665603
            for i in range(b - 1, a - 1, -1):
                h = (h ^ links[i]) * 1099511628211
            c = 0.0
            for i in range(a, b):
                pool[s + i - a] = links[i]
                c += surcharge[od_cls[od], links[i]]
            p_charge[q] = c
            p_start[q] = s
            p_len[q] = b - a
            p_flow[q] = f
            p_hash[q] = h
            p_next[q] = -1
            s += b - a
            if last < 0:
                od_first[od] = q
            else:
                p_next[last] = q
            last = q
            q += 1
    counters[_N_PATHS] = q
    counters[_POOL_USED] = s


@numba.njit(cache=True)
def _export_counts(od_first, p_len, p_flow, p_next, counts, lengths, used):
    """Count the used routes (``used``) or the idle ones of every OD pair."""
    n = 0
    for od in range(od_first.size):
        p = od_first[od]
        c = 0
        while p >= 0:
            # a cheapest route may have just joined with no flow: idle
            if (p_flow[p] > 0.0) == used:
                lengths[n] = p_len[p]
                n += 1
                c += 1
            p = p_next[p]
        counts[od] = c
    return n


@numba.njit(cache=True)
def _export_fill(od_first, p_start, p_len, p_flow, p_next, pool, path_ptr, path_links,
                 path_flow, used):
    r = 0
    for od in range(od_first.size):
        p = od_first[od]
        while p >= 0:
            if (p_flow[p] > 0.0) == used:
                s = path_ptr[r]
                for i in range(p_len[p]):
                    path_links[s + i] = pool[p_start[p] + i]
                path_flow[r] = p_flow[p]
                r += 1
            p = p_next[p]


# ---------------------------------------------------------------------- the route pool
class _Pool:
    """Growable route storage: per-route start/length/flow/hash/next plus a link pool."""

    def __init__(self, n_od, n_paths, n_pool):
        self.od_first = np.full(n_od, -1, dtype=np.int64)
        self.start = np.zeros(n_paths, dtype=np.int64)
        self.length = np.zeros(n_paths, dtype=np.int64)
        self.flow = np.zeros(n_paths)
        self.cost = np.zeros(n_paths)  # scratch: route costs during a visit
        self.charge = np.zeros(n_paths)  # constant cost of the route's class
        self.hash = np.zeros(n_paths, dtype=np.int64)
        self.next = np.full(n_paths, -1, dtype=np.int64)
        self.links = np.zeros(n_pool, dtype=np.int32)
        self.counters = np.zeros(4, dtype=np.int64)

    def reserve(self, n_paths, n_pool):
        """Make room for ``n_paths`` more routes and ``n_pool`` more link entries."""
        if self._fits(n_paths, n_pool):
            return
        if self.counters[_DEAD_LINKS] > self.counters[_POOL_USED] // 4:
            self.compact()
            if self._fits(n_paths, n_pool):
                return
        used_p = int(self.counters[_N_PATHS])
        used_l = int(self.counters[_POOL_USED])
        need_p = used_p + n_paths
        need_l = used_l + n_pool
        if need_p > self.flow.size:
            size = max(need_p, 2 * self.flow.size)
            for name in ("start", "length", "flow", "hash", "cost", "charge"):
                old = getattr(self, name)
                new = np.zeros(size, dtype=old.dtype)
                new[:used_p] = old[:used_p]
                setattr(self, name, new)
            new = np.full(size, -1, dtype=np.int64)
            new[:used_p] = self.next[:used_p]
            self.next = new
        if need_l > self.links.size:
            new = np.zeros(max(need_l, 2 * self.links.size), dtype=np.int32)
            new[:used_l] = self.links[:used_l]
            self.links = new

    def _fits(self, n_paths, n_pool):
        return (self.counters[_N_PATHS] + n_paths <= self.flow.size
                and self.counters[_POOL_USED] + n_pool <= self.links.size)

    def compact(self):
        """Drop dead routes and their links, in place."""
        n = int(self.counters[_N_PATHS])
        _compact(self.od_first, self.start, self.length, self.flow, self.hash, self.next,
                 self.links, self.counters, np.empty(n, dtype=np.int64),
                 np.empty(n, dtype=np.int64), self.charge)

    def args(self):
        return (self.od_first, self.start, self.length, self.flow, self.hash, self.next,
                self.links, self.counters)

    def _export_csr(self, used):
        n_od = self.od_first.size
        counts = np.zeros(n_od, dtype=np.int64)
        lengths = np.zeros(int(self.counters[_N_PATHS]), dtype=np.int64)
        n = _export_counts(self.od_first, self.length, self.flow, self.next, counts, lengths,
                           used)
        od_ptr = np.zeros(n_od + 1, dtype=np.int64)
        np.cumsum(counts, out=od_ptr[1:])
        path_ptr = np.zeros(n + 1, dtype=np.int64)
        np.cumsum(lengths[:n], out=path_ptr[1:])
        path_links = np.empty(int(path_ptr[-1]), dtype=np.int32)
        path_flow = np.empty(n)
        _export_fill(self.od_first, self.start, self.length, self.flow, self.next,
                     self.links, path_ptr, path_links, path_flow, used)
        return od_ptr, path_ptr, path_links, path_flow

    def export(self, origin, destination, demand, n_links, od_class=None) -> RouteState:
        od_ptr, path_ptr, path_links, path_flow = self._export_csr(True)
        idle_od_ptr, idle_path_ptr, idle_path_links, _ = self._export_csr(False)
        for arr in (origin, destination, demand, od_ptr, path_ptr, path_links, path_flow,
                    idle_od_ptr, idle_path_ptr, idle_path_links, od_class):
            if arr is not None:
                arr.setflags(write=False)
        return RouteState(origin, destination, demand, od_ptr, path_ptr, path_links,
                          path_flow, int(n_links), idle_od_ptr, idle_path_ptr,
                          idle_path_links, od_class)


class _Accelerator:
    """Extrapolation of the route flows over cycles of inner passes.

    The inner passes are Gauss-Seidel sweeps over OD pairs; where many pairs share
    links, each sweep undoes part of the others' moves and the route flows approach
    their limit geometrically, the change of each cycle of passes about ``r`` times the
    one before. At the end of every full pass, once two cycles agree on ``r < 1``, the
    flows jump to the limit of that geometric series, ``f + step * r / (1 - r)``, as in
    Aitken's delta-squared process applied to the whole vector [4]_. The jump is
    checked by the next full pass: if that finds more excess cost than the pass before
    the jump by more than ``allow`` times, the flows are put back and jumps are halved
    from then on. (Right after a jump the pairs it moved show some excess of their own
    that the next passes remove quickly; a strict test would undo most good jumps.)
    """

    allow = 3.0  # excess after a jump, in times the excess before, that is still kept
    max_factor = 5.0  # longest jump, in cycles' steps (halved after each undone jump)

    def __init__(self, pool, od_q, od_excess):
        self.pool = pool
        self.od_q = od_q
        self.od_excess = od_excess
        # no routes join while an accelerator is in use: ids below n are all there are
        self.n = int(pool.counters[_N_PATHS])
        self.snapshot = pool.flow[:self.n].copy()
        self.last_step = None
        self.saved = None  # the flows before an unchecked jump

    def after_full_pass(self, excess):
        """Call after each full pass; returns True when it changed the route flows."""
        flow = self.pool.flow
        if self.saved is not None:
            saved, self.saved = self.saved, None
            if excess > self.allow * self.before:
                flow[:self.n] = saved
                self.od_excess[:] = np.inf
                self.max_factor *= 0.5
                self.snapshot = saved
                self.last_step = None
                return True
        step = flow[:self.n] - self.snapshot
        last, self.last_step = self.last_step, step
        self.snapshot = flow[:self.n].copy()
        if last is None or self.max_factor < 0.1:
            return False
        # sums of squares, not dot products: a BLAS call may wake its spinning threads
        norm_last = float(np.sum(last * last))
        r = float(np.sqrt(np.sum(step * step) / norm_last)) if norm_last > 0.0 else 1.0
        if not r < 0.95:
            return False
        self.saved = self.snapshot
        self.before = excess
        _extrapolate(self.pool.od_first, self.pool.next, flow, step, self.od_q,
                     min(r / (1.0 - r), self.max_factor), self.od_excess)
        self.snapshot = flow[:self.n].copy()
        self.last_step = None
        return True


@numba.njit(cache=True)
def _charge_total(od_first, p_next, p_flow, p_charge):
    """Sum of route flow times route class charge."""
    total = 0.0
    for od in range(od_first.size):
        p = od_first[od]
        while p >= 0:
            total += p_flow[p] * p_charge[p]
            p = p_next[p]
    return total


@numba.njit(cache=True)
def _class_flows_kernel(od_cls, od_first, p_start, p_len, p_flow, p_next, pool, xk):
    for od in range(od_first.size):
        k = od_cls[od]
        p = od_first[od]
        while p >= 0:
            f = p_flow[p]
            if f != 0.0:
                for i in range(p_start[p], p_start[p] + p_len[p]):
                    xk[k, pool[i]] += f
            p = p_next[p]


def _class_flows(n_cls, n_links, od_cls, pool):
    """Link flows of each class, shape ``(n_cls, n_links)``."""
    xk = np.zeros((n_cls, n_links))
    _class_flows_kernel(od_cls, pool.od_first, pool.start, pool.length, pool.flow, pool.next,
                        pool.links, xk)
    return xk


def _seed_from(state, network, od_o, od_d, od_q, od_cls, surcharge, pool):
    """Load the route sets of ``state`` scaled to the new demand into ``pool``."""
    if not isinstance(state, RouteState):
        raise SolverError(
            "a gradient-projection warm start needs an earlier result of method 'gp' "
            "(Frank-Wolfe results carry no routes)")
    old_cls = (np.zeros(state.origin.size, dtype=np.int64) if state.od_class is None
               else state.od_class)
    n_cls = surcharge.shape[0]
    if old_cls.size and old_cls.max() >= n_cls:
        raise SolverError(f"warm start has {int(old_cls.max()) + 1} user classes; this "
                          f"problem has {n_cls}")
    nz = network.n_zones
    index = np.full((n_cls, nz, nz), -1, dtype=np.int64)
    index[old_cls, state.origin, state.destination] = np.arange(state.origin.size)
    old = index[od_cls, od_o, od_d]
    old_q = np.where(old >= 0, state.demand[np.maximum(old, 0)], 0.0)
    old = np.where(old_q > 0, old, -1)
    scale = np.where(old >= 0, od_q / np.where(old_q > 0, old_q, 1.0), 0.0)
    if state.idle_od_ptr is None:
        idle = (np.zeros(state.origin.size + 1, dtype=np.int64), np.zeros(1, dtype=np.int64),
                np.zeros(0, dtype=np.int32))
    else:
        idle = (state.idle_od_ptr, state.idle_path_ptr, state.idle_path_links)
    n_paths = int(state.path_flow.size + idle[1].size - 1)
    n_pool = int(state.path_links.size + idle[2].size)
    pool.reserve(n_paths, n_pool)
    _import(state.od_ptr, state.path_ptr, state.path_links, state.path_flow, *idle, old,
            scale, *pool.args()[:-1], pool.counters, pool.charge, od_cls, surcharge)


def _check_same_network(old, net):
    same = (old.n_links == net.n_links and old.n_nodes == net.n_nodes
            and np.array_equal(old.tail, net.tail) and np.array_equal(old.head, net.head)
            and np.array_equal(old.zone_nodes, net.zone_nodes)
            and old.through_centroids == net.through_centroids)
    if not same:
        raise SolverError("warm start must come from the same network (same links, zones "
                          "and centroid rule); only costs and demand may differ")


# ------------------------------------------------------------------------------ solver
def solve_gp(problem, *, tol, max_iter, time_limit, warm_start, callback,
             inner_max=40, inner_ratio=0.01, warm_ratio=1e-3, keep=0.01, max_idle=1,
             accelerate=True):
    """Path-based gradient projection (Jayakrishnan et al. 1994) for UE and SO.

    Parameters
    ----------
    problem : congest.equilibrium.Problem
    tol, max_iter, time_limit, warm_start, callback
        As in :func:`congest.solve`; ``max_iter`` (default 500) counts outer iterations,
        each with one all-origins shortest-path pass.
    inner_max : int, default 40
        Most inner passes (route moves without new shortest paths) per iteration.
    inner_ratio : float, default 0.01
        Inner passes stop once a pass finds less excess cost than ``inner_ratio`` times
        the excess cost at the start of the iteration. Each iteration that fails to
        halve the gap divides the ratio by 10 for the rest of the run.
    warm_ratio : float, default 1e-3
        A warm start first re-balances the earlier routes (inner passes at the new costs)
        until a pass finds less than ``warm_ratio`` times the excess of the first pass.
    keep : float, default 0.01
        A route whose flow reaches zero stays in its OD pair's set (ready to take flow
        back without a new shortest-path search) while its cost is within ``keep``
        (relative) of the pair's cheapest route; it is checked once per iteration.
    max_idle : int, default 1
        Most routes an OD pair keeps without flow (the most recently found of those
        within ``keep``). On large networks with many nearly equal routes, an unbounded
        number of idle routes costs memory and time in every visit of the pair (on a
        100,000-link grid-like network they outnumbered the used routes two to one).
    accelerate : bool, default True
        Extrapolate the route flows over cycles of inner passes (see :class:`_Accelerator`).
        It speeds up SO on congested networks (Barcelona, Winnipeg, Chicago Sketch: 30 to
        40 % less time) and leaves UE about as fast; ``False`` gives the plain passes.

    Returns
    -------
    dict
        ``flow, iterations, converged, message, history, state``; ``state`` is a
        :class:`RouteState` for :mod:`congest.routes` and later warm starts.
    """
    net = problem.network
    model = problem.model
    sp = problem.paths
    so = problem.objective == "so"
    if max_iter is None:
        max_iter = 500
    if max_iter < 1:
        raise SolverError(f"max_iter must be at least 1, got {max_iter!r}")
    if inner_max < 0 or not (inner_ratio >= 0) or not (warm_ratio >= 0):
        raise SolverError("inner_max, inner_ratio and warm_ratio must be non-negative")
    start_time = time.perf_counter()
    n_links = net.n_links
    classes = getattr(problem, "commodities", None)
    if classes is None:
        od_o, od_d, od_q = net.od_pairs()
        od_cls = np.zeros(od_q.size, dtype=np.int64)
        surcharge = np.zeros((1, n_links))
    else:
        od_o, od_d, od_q, od_cls, surcharge = classes
        od_cls = np.ascontiguousarray(od_cls, dtype=np.int64)
        surcharge = np.ascontiguousarray(surcharge, dtype=np.float64)
    multi = classes is not None
    n_cls = surcharge.shape[0]
    od_o = od_o.astype(np.int64)
    od_d = od_d.astype(np.int64)
    od_q = np.ascontiguousarray(od_q, dtype=np.float64)
    n_od = od_q.size
    # one shortest-path tree per class and origin: rows in class order
    rows, od_row = np.unique(od_cls * net.n_zones + od_o, return_inverse=True)
    od_row = od_row.astype(np.int64)
    origins = rows % net.n_zones
    row_cls = rows // net.n_zones
    cls_rows = [slice(int(a), int(b)) for a, b in zip(
        np.searchsorted(row_cls, np.arange(n_cls)),
        np.searchsorted(row_cls, np.arange(n_cls), side="right"), strict=True)]
    origin_nodes = sp.zone_nodes[origins]
    od_dnode = sp.zone_nodes[od_d]
    kind = np.array(model.kind)  # writeable, as elsewhere: one compiled version per kernel
    par = np.ascontiguousarray(np.column_stack([model.t0, model.alpha, model.beta,
                                                model.capacity, model.constant,
                                                model.preload]))
    x = np.zeros(n_links)
    cost = np.empty(n_links)
    deriv = np.empty(n_links)
    history = {"iteration": [], "relative_gap": [], "objective": [], "wall_time": []}

    pool = _Pool(n_od, max(2 * n_od, 16), max(16 * n_od, 4 * net.n_nodes, 16))
    warm = warm_start is not None
    if warm:
        _check_same_network(warm_start.network, net)
        _seed_from(warm_start.state, net, od_o, od_d, od_q, od_cls, surcharge, pool)

    def export():
        return pool.export(od_o, od_d, od_q, n_links, od_cls if multi else None)

    if n_od == 0:
        return {"flow": x, "iterations": 0, "converged": True,
                "message": "no demand: every link flow is zero", "history": history,
                "state": export(),
                **({"class_flow": np.zeros((n_cls, n_links))} if multi else {})}

    n_nodes = net.n_nodes
    pred = np.empty((rows.size, n_nodes), dtype=np.int32)
    zdist = np.empty((rows.size, net.n_zones))
    od_flat = od_row * net.n_zones + od_d
    mark = np.zeros(n_links, dtype=np.int64)
    mark2 = np.zeros(n_links, dtype=np.int64)
    need = np.zeros(n_od, dtype=np.bool_)
    new_len = np.zeros(n_od, dtype=np.int64)
    new_at = np.zeros(n_od, dtype=np.int64)
    new_hash = np.zeros(n_od, dtype=np.int64)
    od_excess = np.zeros(n_od)
    # a tree route joins only if cheaper than the OD's routes by more than rounding
    route_tol = min(1e-13, 0.1 * tol)
    n_chunks = max(1, min(numba.get_num_threads(), origins.size))
    big = rows.size * n_links > _PARALLEL_WORK
    trees = _trees_parallel if big else _trees_serial
    find_routes = _find_routes_parallel if big else _find_routes_serial
    write_routes = _write_routes_parallel if big else _write_routes_serial
    converged = False
    message = ""
    k = 0

    def load():
        """Link flows summed from the route flows, and their costs."""
        _sum_flows(od_q, pool.od_first, pool.start, pool.length, pool.flow, pool.next,
                   pool.links, x)
        _refresh_costs(x, kind, par, so, cost, deriv)

    def all_trees():
        """Trees of every class and origin at the current costs (plus class charges)."""
        for k_cls, sl in enumerate(cls_rows):
            if sl.stop > sl.start:
                c = cost + surcharge[k_cls] if multi else cost
                trees(origin_nodes[sl], sp.zone_nodes, sp.indptr, sp.adj_link, sp.adj_head,
                      c, sp.blocked, pred[sl], zdist[sl], n_chunks)

    def charged():
        """Total class charges of the route flows (zero with a single class)."""
        return _charge_total(pool.od_first, pool.next, pool.flow, pool.charge) if multi else 0.0

    def jumped(accel, excess):
        """After a full pass: True if ``accel`` moved the flows (costs then refreshed)."""
        if accel is None or not accel.after_full_pass(excess):
            return False
        load()
        return True

    if warm:
        # the earlier routes, rescaled, are rarely in equilibrium at the new costs:
        # re-balance them first, which needs no shortest paths
        load()
        od_excess[:] = np.inf
        first = threshold = -1.0
        full = True
        accel = _Accelerator(pool, od_q, od_excess) if accelerate else None
        for n_pass in range(1, inner_max + 1):
            excess = _inner_pass(x, kind, par, so, cost, deriv, pool.od_first, pool.start,
                                 pool.length, pool.flow, pool.next, pool.links,
                                 pool.counters, mark, mark2, keep, od_excess,
                                 0.0 if full else threshold, pool.cost, max_idle,
                                 pool.charge)
            was_full = full
            if first < 0:
                first = excess
                threshold = 0.1 * warm_ratio * first / n_od
                full = False
            elif excess <= warm_ratio * first:
                if full:
                    break
                full = True
            else:
                full = n_pass % _FULL_EVERY == 0
            if was_full and jumped(accel, excess):
                full = True
    best_gap = (np.inf, 0)
    ratio = inner_ratio
    prev_gap = np.inf
    while True:
        load()
        all_trees()
        od_dist = np.take(zdist, od_flat)  # 2-d fancy indexing is far slower
        if k == 0 and not np.isfinite(od_dist).all():
            problem.all_or_nothing(cost)  # raises NetworkError naming the pairs
        sptt = float(np.sum(od_dist * od_q))  # a BLAS dot may wake its thread pool
        charge_total = charged()
        tstt = float(x @ cost) + charge_total
        # OD pairs without routes yet (cold start, or new pairs in a warm start) have no
        # flow, so the gap of the partial loading means nothing
        loaded = k > 0 or not (pool.od_first < 0).any()
        gap = relative_gap(tstt, sptt) if tstt > 0 and loaded else np.inf
        elapsed = time.perf_counter() - start_time
        if k > 0 or np.isfinite(gap):
            history["iteration"].append(k)
            history["relative_gap"].append(gap)
            history["objective"].append(problem.objective_value(x) + charge_total)
            history["wall_time"].append(elapsed)
        if gap <= tol:
            converged = True
            break
        if k > 0 and callback is not None and callback(k, x.copy(), gap):
            message = f"stopped by callback at relative gap {gap:.3g}"
            break
        if time_limit is not None and elapsed > time_limit:
            message = f"time limit {time_limit:g} s reached at relative gap {gap:.3g}"
            break
        if k >= max_iter:
            message = f"iteration cap {max_iter} reached at relative gap {gap:.3g}"
            break
        if gap < best_gap[0]:
            best_gap = (gap, k)
        elif k - best_gap[1] >= _STALL:
            # rounding, not the method, limits the gap (a target below what float64
            # sums of route costs resolve)
            message = (f"no progress for {_STALL} iterations: relative gap "
                       f"{best_gap[0]:.3g} is the limit of rounding here")
            break
        # slow progress (OD pairs contending for the same steep links undo each other's
        # moves) asks for more inner passes per iteration from now on
        if k > 1 and gap > 0.5 * prev_gap:
            ratio = 0.0
        prev_gap = gap
        k += 1
        excess_start = max(tstt - sptt, 0.0)
        _needs_route(od_row, od_d, zdist, cost, pool.od_first, pool.start, pool.length,
                     pool.next, pool.links, route_tol, need, pool.charge)
        find_routes(need, od_row, od_dnode, sp.tail, pred, pool.od_first, pool.start,
                    pool.length, pool.hash, pool.next, pool.links, n_chunks, new_len,
                    new_hash)
        # new routes go at the end of the pool, in OD order
        np.maximum(new_len, 0, out=new_at)
        n_links_new = int(new_at.sum())
        pool.reserve(int(np.count_nonzero(new_len >= 0)), n_links_new)
        np.cumsum(new_at, out=new_at)
        new_at -= np.maximum(new_len, 0)
        new_at += pool.counters[_POOL_USED]
        write_routes(new_len, new_at, od_row, od_dnode, sp.tail, pred, pool.links, n_chunks)
        pool.counters[_POOL_USED] += n_links_new
        _column_pass(new_len, new_at, new_hash, od_q, x, kind, par, so, cost, deriv,
                     *pool.args(), mark, mark2, keep, od_excess, pool.cost, max_idle,
                     pool.charge, od_cls, surcharge)
        # pairs whose excess is a negligible share of the total wait for the next pass
        threshold = 0.1 * ratio * excess_start / n_od
        # in exhaustive mode (slow progress) wide passes visit every pair with routes
        wide = -1.0 if ratio == 0.0 else 0.0
        full = False
        accel = _Accelerator(pool, od_q, od_excess) if accelerate else None
        for n_pass in range(1, inner_max + 1):
            excess = _inner_pass(x, kind, par, so, cost, deriv, pool.od_first, pool.start,
                                 pool.length, pool.flow, pool.next, pool.links,
                                 pool.counters, mark, mark2, keep, od_excess,
                                 wide if full else threshold, pool.cost, max_idle,
                                 pool.charge)
            was_full = full
            if excess <= ratio * excess_start:
                if full:
                    break
                full = True  # the skipped pairs may have drifted: confirm on them
            else:
                # pairs with little excess of their own still carry flow between the
                # links that others contend for: visit all with any excess now and then
                full = n_pass % _FULL_EVERY == 0
            if was_full and jumped(accel, excess):
                full = True  # the next full pass checks the jump
            if time_limit is not None and time.perf_counter() - start_time > time_limit:
                break
        if pool.counters[_DEAD_LINKS] > max(pool.counters[_POOL_USED] // 2, 1024):
            pool.compact()
    return {
        "flow": x.copy(),
        "iterations": k,
        "converged": converged,
        "message": message,
        "history": history,
        "state": export(),
        # per-class link flows, for a multi-class problem only
        **({"class_flow": _class_flows(n_cls, n_links, od_cls, pool)} if multi else {}),
    }
