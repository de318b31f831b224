"""Shortest-path trees and all-or-nothing loading, compiled with numba.

This is the hot loop of every solver. One Dijkstra tree per origin zone (indexed 4-ary
heap with decrease-key, link costs in forward-star order), computed in parallel over
origins; the demand of each origin is loaded onto its tree by a single backward sweep
over the nodes in the order they were settled.

The centroid rule: when ``Network.through_centroids`` is False, a path may start or end
at a zone centroid but never pass through one, so links leaving a centroid are relaxed
only from the origin of the tree.
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["ShortestPaths"]


@numba.njit(cache=True, inline="always")
def heap_push(heap_key, heap_node, size, key, node):
    """Push ``(key, node)`` on a binary min-heap of ``size`` entries; returns the new size."""
    i = size
    while i > 0:
        parent = (i - 1) // 2
        if heap_key[parent] > key:
            heap_key[i] = heap_key[parent]
            heap_node[i] = heap_node[parent]
            i = parent
        else:
            break
    heap_key[i] = key
    heap_node[i] = node
    return size + 1


@numba.njit(cache=True, inline="always")
def heap_pop(heap_key, heap_node, size):
    """Pop the smallest entry; returns ``(key, node, new_size)``."""
    key0 = heap_key[0]
    node0 = heap_node[0]
    size -= 1
    if size > 0:
        key = heap_key[size]
        node = heap_node[size]
        i = 0
        while True:
            child = 2 * i + 1
            if child >= size:
                break
            if child + 1 < size and heap_key[child + 1] < heap_key[child]:
                child += 1
            if heap_key[child] < key:
                heap_key[i] = heap_key[child]
                heap_node[i] = heap_node[child]
                i = child
            else:
                break
        heap_key[i] = key
        heap_node[i] = node
    return key0, node0, size


# An indexed 4-ary heap with decrease-key for the Dijkstra trees: at most one entry per
# node (``pos[v]`` is its slot, -1 before it is reached, -2 once settled), so it holds
# n_nodes entries, not one per relaxed link, and a 4-ary tree is half as deep as a binary
# one. On a 100,000-link network this halves the time of a tree.
_ARITY = 4


@numba.njit(cache=True, inline="always")
def _place(heap_key, heap_node, pos, i, key, node):
    heap_key[i] = key
    heap_node[i] = node
    pos[node] = i


@numba.njit(cache=True, inline="always")
def _sift_up(heap_key, heap_node, pos, i, key, node):
    while i > 0:
        parent = (i - 1) // _ARITY
        if heap_key[parent] > key:
            _place(heap_key, heap_node, pos, i, heap_key[parent], heap_node[parent])
            i = parent
        else:
            break
    _place(heap_key, heap_node, pos, i, key, node)


@numba.njit(cache=True, inline="always")
def iheap_update(heap_key, heap_node, pos, size, key, node):
    """Insert ``node`` with ``key`` or lower its key; returns the new size."""
    i = pos[node]
    if i < 0:
        i = size
        size += 1
    _sift_up(heap_key, heap_node, pos, i, key, node)
    return size


@numba.njit(cache=True, inline="always")
def iheap_pop(heap_key, heap_node, pos, size):
    """Pop the smallest entry and mark it settled; returns ``(key, node, new_size)``."""
    key0 = heap_key[0]
    node0 = heap_node[0]
    pos[node0] = -2
    size -= 1
    if size > 0:
        key = heap_key[size]
        node = heap_node[size]
        i = 0
        while True:
            child = _ARITY * i + 1
            if child >= size:
                break
            best = child
            best_key = heap_key[child]
            last = min(child + _ARITY, size)
            for j in range(child + 1, last):
                if heap_key[j] < best_key:
                    best = j
                    best_key = heap_key[j]
            if best_key < key:
                _place(heap_key, heap_node, pos, i, best_key, heap_node[best])
                i = best
            else:
                break
        _place(heap_key, heap_node, pos, i, key, node)
    return key0, node0, size


@numba.njit(cache=True)
def adjacency_costs(cost, adj_link, out):
    """``out[k] = cost[adj_link[k]]``: link costs in forward-star order, for :func:`dijkstra`."""
    for k in range(adj_link.size):
        out[k] = cost[adj_link[k]]


@numba.njit(cache=True)
def dijkstra(origin, indptr, adj_link, adj_head, cost_adj, blocked, dist, pred, order,
             pos, heap_key, heap_node):
    """One shortest-path tree from node ``origin``.

    ``cost_adj`` holds the link costs in forward-star order (:func:`adjacency_costs`), so
    the scan of a node's links reads memory in sequence. Fills ``dist`` (inf where
    unreachable), ``pred`` (link index into each node, -1 at the origin and at unreached
    nodes) and ``order`` (nodes in settling order); returns how many nodes were settled.
    ``pos``, ``heap_key`` and ``heap_node`` are work arrays of size ``n_nodes`` (indexed
    heap). ``blocked[u] != 0`` forbids passing through node ``u``.
    """
    n = dist.size
    for i in range(n):
        dist[i] = np.inf
        pred[i] = -1
        pos[i] = -1
    dist[origin] = 0.0
    size = iheap_update(heap_key, heap_node, pos, 0, 0.0, origin)
    n_settled = 0
    while size > 0:
        d, u, size = iheap_pop(heap_key, heap_node, pos, size)
        order[n_settled] = u
        n_settled += 1
        if blocked[u] and u != origin:
            continue
        for k in range(indptr[u], indptr[u + 1]):
            v = adj_head[k]
            nd = d + cost_adj[k]
            if nd < dist[v]:
                dist[v] = nd
                pred[v] = adj_link[k]
                size = iheap_update(heap_key, heap_node, pos, size, nd, v)
    return n_settled


@numba.njit(cache=True)
def _aon_origins(first, step, origins, zone_nodes, demand, indptr, adj_link, adj_head, tail,
                 cost, blocked, flow, od_cost):
    # Trees and loading for origins[first::step], adding into flow and od_cost rows.
    n_nodes = indptr.size - 1
    n_zones = zone_nodes.size
    dist = np.empty(n_nodes)
    pred = np.empty(n_nodes, dtype=np.int64)
    order = np.empty(n_nodes, dtype=np.int64)
    acc = np.zeros(n_nodes)
    pos = np.empty(n_nodes, dtype=np.int64)
    heap_key = np.empty(n_nodes)
    heap_node = np.empty(n_nodes, dtype=np.int64)
    cost_adj = np.empty(adj_link.size)
    adjacency_costs(cost, adj_link, cost_adj)
    for j in range(first, origins.size, step):
        oz = origins[j]
        settled = dijkstra(zone_nodes[oz], indptr, adj_link, adj_head, cost_adj, blocked,
                           dist, pred, order, pos, heap_key, heap_node)
        for dz in range(n_zones):
            od_cost[oz, dz] = dist[zone_nodes[dz]]
            acc[zone_nodes[dz]] += demand[oz, dz]
        for k in range(settled - 1, 0, -1):
            u = order[k]
            a = acc[u]
            if a != 0.0:
                link = pred[u]
                flow[link] += a
                acc[tail[link]] += a
                acc[u] = 0.0
        for dz in range(n_zones):
            acc[zone_nodes[dz]] = 0.0  # origin and unreachable destinations
        od_cost[oz, oz] = 0.0


@numba.njit(cache=True, parallel=True)
def _aon_all(origins, zone_nodes, demand, indptr, adj_link, adj_head, tail, cost, blocked,
             n_chunks):
    flows = np.zeros((n_chunks, tail.size))
    od_cost = np.full((zone_nodes.size, zone_nodes.size), np.nan)
    for c in numba.prange(n_chunks):
        _aon_origins(c, n_chunks, origins, zone_nodes, demand, indptr, adj_link, adj_head,
                     tail, cost, blocked, flows[c], od_cost)
    return flows, od_cost


@numba.njit(cache=True)
def _aon_serial(origins, zone_nodes, demand, indptr, adj_link, adj_head, tail, cost,
                blocked):
    flows = np.zeros((1, tail.size))
    od_cost = np.full((zone_nodes.size, zone_nodes.size), np.nan)
    _aon_origins(0, 1, origins, zone_nodes, demand, indptr, adj_link, adj_head, tail, cost,
                 blocked, flows[0], od_cost)
    return flows, od_cost


#: Below this many (origins x links) one all-or-nothing pass runs on one thread: the
#: thread-pool hand-off costs more than it saves on small networks, and far more when
#: the machine is busy.
PARALLEL_MIN_WORK = 50_000


class ShortestPaths:
    """Forward-star graph of a network, ready for repeated shortest-path passes.

    Parameters
    ----------
    network : Network

    Examples
    --------
    >>> import numpy as np
    >>> from congest.network import Network
    >>> from congest.paths import ShortestPaths
    >>> net = Network(node_ids=[1, 2, 3], tail=[0, 0, 2], head=[1, 2, 1],
    ...               capacity=1.0, free_flow_time=[5.0, 1.0, 1.0],
    ...               zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, 3], [0, 0]])
    >>> flow, od_cost = ShortestPaths(net).all_or_nothing(net.free_flow_time)
    >>> flow.tolist(), float(od_cost[0, 1])
    ([0.0, 3.0, 3.0], 2.0)
    """

    def __init__(self, network):
        self.network = network
        n = network.n_nodes
        order = np.argsort(network.tail, kind="stable")
        self.adj_link = np.ascontiguousarray(order, dtype=np.int64)
        self.adj_head = np.ascontiguousarray(network.head[order], dtype=np.int64)
        counts = np.bincount(network.tail, minlength=n)
        self.indptr = np.zeros(n + 1, dtype=np.int64)
        np.cumsum(counts, out=self.indptr[1:])
        # own, writeable copies: the network's arrays are read-only, and numba compiles
        # every kernel once more for read-only array arguments
        self.tail = np.array(network.tail, dtype=np.int64)
        self.head = np.array(network.head, dtype=np.int64)
        self.blocked = np.zeros(n, dtype=np.uint8)
        if not network.through_centroids:
            self.blocked[network.zone_nodes] = 1
        self.zone_nodes = np.array(network.zone_nodes, dtype=np.int64)
        self.origins = np.flatnonzero(network.demand.sum(axis=1) > 0).astype(np.int64)

    def all_or_nothing(self, cost, demand=None):
        """Load ``demand`` (default: the network's) on shortest paths at ``cost``.

        Parameters
        ----------
        cost : ndarray of shape (n_links,)
            Non-negative link costs.
        demand : ndarray of shape (n_zones, n_zones), optional

        Returns
        -------
        flow : ndarray of shape (n_links,)
        od_cost : ndarray of shape (n_zones, n_zones)
            Shortest-path cost between zones; NaN rows for origins without demand,
            inf where no path exists.
        """
        if demand is None:
            demand, origins = self.network.demand, self.origins
        else:
            # trees are grown from the origins of *this* demand, not the network's
            demand = np.ascontiguousarray(demand, dtype=np.float64)
            origins = np.flatnonzero(demand.sum(axis=1) > 0).astype(np.int64)
        cost = np.ascontiguousarray(cost, dtype=np.float64)
        n_chunks = max(1, min(numba.get_num_threads(), origins.size))
        args = (origins, self.zone_nodes, np.ascontiguousarray(demand), self.indptr,
                self.adj_link, self.adj_head, self.tail, cost, self.blocked)
        if n_chunks == 1 or origins.size * self.tail.size < PARALLEL_MIN_WORK:
            flows, od_cost = _aon_serial(*args)
        else:
            flows, od_cost = _aon_all(*args, n_chunks)
        return flows.sum(axis=0), od_cost

    def tree(self, origin_node, cost):
        """Shortest-path tree from node index ``origin_node``.

        Returns
        -------
        dist : ndarray of shape (n_nodes,)
        pred : ndarray of int, shape (n_nodes,)
            Link index entering each node on the tree; -1 at the origin and unreached nodes.
        """
        n = self.network.n_nodes
        dist = np.empty(n)
        pred = np.empty(n, dtype=np.int64)
        order = np.empty(n, dtype=np.int64)
        cost_adj = np.ascontiguousarray(cost, dtype=np.float64)[self.adj_link]
        dijkstra(int(origin_node), self.indptr, self.adj_link, self.adj_head, cost_adj,
                 self.blocked, dist, pred, order, np.empty(n, dtype=np.int64), np.empty(n),
                 np.empty(n, dtype=np.int64))
        return dist, pred

    def path(self, origin_node, destination_node, cost):
        """Link indices of a shortest path between two node indices ([] if none)."""
        _, pred = self.tree(origin_node, cost)
        links = []
        node = int(destination_node)
        if pred[node] < 0 and node != origin_node:
            return links
        while node != origin_node:
            link = int(pred[node])
            links.append(link)
            node = int(self.tail[link])
        return links[::-1]

    def unreachable_pairs(self):
        """Zone-index pairs with demand but no path, as an array of shape (k, 2)."""
        _, od_cost = self.all_or_nothing(self.network.free_flow_time + 1.0)
        demand = self.network.demand
        # inf marks no path (nan_to_num would turn it into a large finite number)
        bad = (demand > 0) & ~np.isfinite(od_cost)
        return np.argwhere(bad)
