"""Conversion between :class:`~congest.network.Network` and networkx graphs."""

from __future__ import annotations

import numpy as np

from ..exceptions import NetworkError
from ..network import COST_KINDS, Network

__all__ = ["from_networkx", "to_networkx"]

_KIND_NAMES = {v: k for k, v in COST_KINDS.items()}
_EDGE_FIELDS = ("capacity", "free_flow_time", "alpha", "beta", "cost_kind", "toll",
                "length", "fixed_cost", "link_id")
_GRAPH_FIELDS = ("through_centroids", "period_hours", "value_of_time", "currency",
                 "length_unit", "crs", "name")


def to_networkx(net: Network, *, multigraph=None):
    """The network as a networkx graph keyed by node id.

    Parameters
    ----------
    net : Network
    multigraph : bool, optional
        Return a ``MultiDiGraph`` (edge keys are link ids). Default: only when the
        network has parallel links.

    Returns
    -------
    networkx.DiGraph or networkx.MultiDiGraph
        Edge attributes ``link_id, capacity, free_flow_time, alpha, beta, cost_kind``
        (name), ``toll, length, fixed_cost`` and every ``link_attrs`` column; node
        attributes ``x, y``, ``zone_id`` on centroids and every ``node_attrs`` column;
        graph attributes ``demand`` (dict ``(origin zone, destination zone) -> trips``),
        ``link_order`` (link ids in the network's order, used by :func:`from_networkx`),
        ``name``, ``period_hours``, ``value_of_time``, ``currency``, ``length_unit``,
        ``crs``, ``through_centroids``.

    Examples
    --------
    >>> net = Network(node_ids=[1, 2], tail=[0], head=[1], capacity=[900.0],
    ...               free_flow_time=[3.0], zone_ids=[1, 2], zone_nodes=[0, 1],
    ...               demand=[[0, 10], [0, 0]])
    >>> G = to_networkx(net)
    >>> G.edges[1, 2]["capacity"], G.graph["demand"]
    (900.0, {(1, 2): 10.0})
    """
    import networkx as nx

    pairs = np.stack([net.tail, net.head], axis=1)
    parallel = np.unique(pairs, axis=0).shape[0] != net.n_links if net.n_links else False
    if multigraph is None:
        multigraph = parallel
    elif not multigraph and parallel:
        raise NetworkError("the network has parallel links; use multigraph=True")
    G = nx.MultiDiGraph() if multigraph else nx.DiGraph()
    o, d, q = net.od_pairs()
    G.graph["demand"] = {(int(net.zone_ids[i]), int(net.zone_ids[j])): float(v)
                         for i, j, v in zip(o, d, q, strict=True)}
    for key in _GRAPH_FIELDS:
        G.graph[key] = getattr(net, key)
    # networkx lists edges by adjacency, so record the link order for from_networkx
    G.graph["link_order"] = [int(v) for v in net.link_ids]
    zone_of = dict(zip(net.zone_nodes.tolist(), net.zone_ids.tolist(), strict=True))
    for i, node in enumerate(net.node_ids.tolist()):
        data = {"x": float(net.x[i]), "y": float(net.y[i])}
        if i in zone_of:
            data["zone_id"] = int(zone_of[i])
        for key, val in net.node_attrs.items():
            data[key] = _scalar(val[i])
        G.add_node(node, **data)
    for k in range(net.n_links):
        data = {"link_id": int(net.link_ids[k]), "capacity": float(net.capacity[k]),
                "free_flow_time": float(net.free_flow_time[k]),
                "alpha": float(net.alpha[k]), "beta": float(net.beta[k]),
                "cost_kind": _KIND_NAMES[int(net.cost_kind[k])],
                "toll": float(net.toll[k]), "length": float(net.length[k]),
                "fixed_cost": float(net.fixed_cost[k])}
        for key, val in net.link_attrs.items():
            data[key] = _scalar(val[k])
        u, v = int(net.node_ids[net.tail[k]]), int(net.node_ids[net.head[k]])
        if multigraph:
            G.add_edge(u, v, key=data["link_id"], **data)
        else:
            G.add_edge(u, v, **data)
    return G


def _scalar(value):
    return value.item() if isinstance(value, np.generic) else value


def from_networkx(G, *, demand=None, zones=None, through_centroids=None, name=None,
                  **network_options) -> Network:
    """Network from a networkx ``DiGraph`` or ``MultiDiGraph``.

    Parameters
    ----------
    G : networkx.DiGraph or networkx.MultiDiGraph
        Integer node ids. Edge attributes: ``capacity`` (veh/h) and ``free_flow_time``
        (minutes) are required; ``alpha``, ``beta`` (default 0.15, 4), ``cost_kind``
        (name or code), ``toll``, ``length``, ``fixed_cost``, ``link_id`` are optional;
        any other attribute is kept in ``link_attrs`` (missing values become NaN or None).
        Node attributes ``x``, ``y`` and ``zone_id`` are read; others go to
        ``node_attrs``.
    demand : dict or ndarray, optional
        ``{(origin zone, destination zone): trips}``, or a dense array in zone order.
        Default: ``G.graph["demand"]`` (empty if absent).
    zones : iterable of node ids, optional
        Centroid nodes; their zone id is the node id. Default: the nodes with a
        ``zone_id`` attribute, or, if none has one, the nodes named in ``demand``.
    through_centroids : bool, optional
        Default ``G.graph["through_centroids"]`` or False.
    name : str, optional
    **network_options
        Other Network fields (``period_hours``, ``value_of_time``, ...), overriding the
        graph attributes of the same name.

    Returns
    -------
    Network
        Links in the order of ``G.graph["link_order"]`` (link ids, as written by
        :func:`to_networkx`) when it matches the edges, else in the graph's edge order.

    Raises
    ------
    NetworkError
        A missing or bad attribute, naming the edge.
    """
    if not G.is_directed():
        raise NetworkError("from_networkx needs a directed graph (use G.to_directed())")
    node_list = list(G.nodes)
    for node in node_list:
        if isinstance(node, bool) or not isinstance(node, (int, np.integer)):
            raise NetworkError(f"node ids must be integers, got {node!r}")
    node_ids = np.asarray(node_list, dtype=np.int64)
    index = {int(v): i for i, v in enumerate(node_ids)}
    edges = list(G.edges(data=True, keys=True)) if G.is_multigraph() else [
        (u, v, None, d) for u, v, d in G.edges(data=True)]
    order = G.graph.get("link_order")
    if order is not None:
        position = {int(v): i for i, v in enumerate(order)}
        keyed = [d.get("link_id") for *_, d in edges]
        if len(position) == len(edges) and all(k in position for k in keyed):
            edges = [edges[i] for i in np.argsort([position[k] for k in keyed])]
    m = len(edges)
    values = {key: np.full(m, np.nan) for key in ("capacity", "free_flow_time", "alpha",
                                                   "beta", "toll", "length", "fixed_cost")}
    kind = np.zeros(m, dtype=np.int8)
    link_ids = np.arange(1, m + 1, dtype=np.int64)
    extra_keys = sorted({k for *_, d in edges for k in d} - set(_EDGE_FIELDS), key=str)
    extras = {k: [None] * m for k in extra_keys}
    for e, (u, v, _, data) in enumerate(edges):
        for key in values:
            if key in data and data[key] is not None:
                try:
                    values[key][e] = float(data[key])
                except (TypeError, ValueError) as err:
                    raise NetworkError(f"edge ({u}, {v}): {key} is not a number: "
                                       f"{data[key]!r}") from err
        for key in ("capacity", "free_flow_time"):
            if np.isnan(values[key][e]):
                raise NetworkError(f"edge ({u}, {v}) has no {key!r} attribute")
        if "cost_kind" in data:
            k = data["cost_kind"]
            code = COST_KINDS.get(str(k).lower(), k if k in COST_KINDS.values() else None)
            if code is None:
                raise NetworkError(f"edge ({u}, {v}): unknown cost_kind {k!r}")
            kind[e] = code
        if "link_id" in data:
            link_ids[e] = int(data["link_id"])
        for key in extra_keys:
            extras[key][e] = data.get(key)
    defaults = {"alpha": 0.15, "beta": 4.0, "toll": 0.0, "fixed_cost": 0.0}
    for key, default in defaults.items():
        values[key] = np.where(np.isnan(values[key]), default, values[key])
    link_attrs = {k: _column(v) for k, v in extras.items()}

    nd = dict(G.nodes(data=True))
    x = np.array([float(nd[n].get("x", np.nan)) for n in node_list])
    y = np.array([float(nd[n].get("y", np.nan)) for n in node_list])
    node_keys = sorted({k for d in nd.values() for k in d} - {"x", "y", "zone_id"}, key=str)
    node_attrs = {k: _column([nd[n].get(k) for n in node_list]) for k in node_keys}

    if demand is None:
        demand = G.graph.get("demand", {})
    if zones is not None:
        zone_nodes = [int(z) for z in zones]
        zone_ids = list(zone_nodes)
    else:
        tagged = [(int(nd[n]["zone_id"]), int(n)) for n in node_list if "zone_id" in nd[n]]
        if tagged:
            tagged.sort()
            zone_ids = [z for z, _ in tagged]
            zone_nodes = [n for _, n in tagged]
        elif isinstance(demand, dict):
            zone_ids = sorted({int(z) for pair in demand for z in pair})
            zone_nodes = list(zone_ids)
        else:
            raise NetworkError("give zones (or zone_id node attributes) with a demand array")
    for n in zone_nodes:
        if n not in index:
            raise NetworkError(f"zone centroid {n} is not a node of the graph")
    zpos = {z: i for i, z in enumerate(zone_ids)}
    if isinstance(demand, dict):
        matrix = np.zeros((len(zone_ids), len(zone_ids)))
        for (o, d), trips in demand.items():
            if int(o) not in zpos or int(d) not in zpos:
                raise NetworkError(f"demand names unknown zone in pair ({o}, {d})")
            matrix[zpos[int(o)], zpos[int(d)]] = float(trips)
    else:
        matrix = np.asarray(demand, dtype=np.float64)
    options = {key: G.graph[key] for key in _GRAPH_FIELDS if key in G.graph}
    if through_centroids is not None:
        options["through_centroids"] = through_centroids
    if name is not None:
        options["name"] = name
    options.update(network_options)
    tail = np.array([index[int(u)] for u, *_ in edges], dtype=np.int64)
    head = np.array([index[int(v)] for _, v, *_ in edges], dtype=np.int64)
    return Network(node_ids=node_ids, tail=tail, head=head, capacity=values["capacity"],
                   free_flow_time=values["free_flow_time"], alpha=values["alpha"],
                   beta=values["beta"], cost_kind=kind, toll=values["toll"],
                   length=values["length"], fixed_cost=values["fixed_cost"],
                   link_ids=link_ids, x=x, y=y, zone_ids=zone_ids,
                   zone_nodes=[index[n] for n in zone_nodes], demand=matrix,
                   link_attrs=link_attrs, node_attrs=node_attrs, **options)


def _column(items):
    """A numeric array when every item is a number (None -> NaN), else an object array."""
    if all(item is None or (isinstance(item, (int, float, np.number))
                            and not isinstance(item, bool)) for item in items):
        if all(isinstance(item, (int, np.integer)) for item in items):
            return np.asarray(items, dtype=np.int64)
        return np.asarray([np.nan if item is None else item for item in items], float)
    return np.asarray(items, dtype=object)
