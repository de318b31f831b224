"""The road network and its demand, in one canonical, validated form.

Every loader (GMNS folder, plain tables, networkx graph, generators) ends by calling
:class:`Network`; solvers trust what it holds.

Conventions
-----------
* Links are directed and kept in one shared order; every per-link array has shape
  ``(n_links,)`` in that order.
* Nodes are addressed internally by index ``0..n_nodes-1``; ``node_ids`` maps an index
  back to the user's id.
* Times are in **minutes**. Capacities are in vehicles per hour; demand is in trips for
  the analysis period of ``period_hours`` hours, so a link's capacity for the period is
  ``capacity * period_hours``.
* ``fixed_cost`` is a constant added to a link's generalized cost, in minutes (a distance
  charge, or a toll already in time units). Money tolls are in ``toll`` and enter the
  generalized cost as ``toll / value_of_time`` (value of time in money per hour).
* Cost-function kinds (``cost_kind``): ``0`` BPR, ``1`` conical, ``2`` polynomial; see
  :mod:`congest.costs`.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields, replace

import numpy as np

from .exceptions import NetworkError

__all__ = ["Network", "COST_KINDS"]

#: Names of the cost-function kinds, by their code in ``Network.cost_kind``.
COST_KINDS = {"bpr": 0, "conical": 1, "polynomial": 2}


def _float_array(name, value, n, *, default=None):
    if value is None:
        if default is None:
            raise NetworkError(f"{name} is required")
        value = default
    arr = np.array(value, dtype=np.float64)
    if arr.ndim == 0:
        arr = np.full(n, float(arr))
    if arr.shape != (n,):
        raise NetworkError(f"{name} must have shape ({n},), got {arr.shape}")
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True, eq=False)
class Network:
    """A directed road network with link cost functions and an OD demand table.

    Parameters
    ----------
    node_ids : array_like of int, shape (n_nodes,)
        User ids of the nodes.
    tail, head : array_like of int, shape (n_links,)
        Node *indices* (not ids) at the start and end of each link.
    capacity : array_like of float, shape (n_links,)
        Vehicles per hour. Used by BPR and conical costs; for polynomial costs it scales
        the volume (``v / capacity``) and defaults to 1.
    free_flow_time : array_like of float, shape (n_links,)
        Minutes. For polynomial costs this is the constant term ``a``.
    alpha, beta : array_like of float, shape (n_links,), default 0.15 and 4
        Cost-function parameters (BPR 1964 defaults, common practice).
    zone_ids : array_like of int, shape (n_zones,)
        User ids of the zones.
    zone_nodes : array_like of int, shape (n_zones,)
        Node index of each zone's centroid.
    demand : array_like of float, shape (n_zones, n_zones)
        Trips from zone i to zone j in the analysis period. The diagonal is ignored.
    cost_kind : array_like of int, default 0 (BPR)
    fixed_cost : array_like of float, default 0
        Constant generalized-cost term per link, minutes.
    toll : array_like of float, default 0
        Money charged per vehicle on each link.
    length : array_like of float, default NaN (unknown)
    link_ids : array_like of int, default ``1..n_links``
    x, y : array_like of float, shape (n_nodes,), default NaN
        Node coordinates.
    through_centroids : bool, default False
        If False a path may start or end at a zone centroid but not pass through one.
    period_hours : float, default 1
    value_of_time : float, default 20
        Money per hour, converting tolls into minutes.
    currency, length_unit, crs, name : str
        Labels for reports.
    link_attrs : dict of str to ndarray of shape (n_links,)
        Extra link columns carried through unchanged (kept for output and selection).
    node_attrs : dict of str to ndarray of shape (n_nodes,)
        Extra node columns.
    """

    node_ids: np.ndarray
    tail: np.ndarray
    head: np.ndarray
    capacity: np.ndarray
    free_flow_time: np.ndarray
    zone_ids: np.ndarray
    zone_nodes: np.ndarray
    demand: np.ndarray
    alpha: np.ndarray = None
    beta: np.ndarray = None
    cost_kind: np.ndarray = None
    fixed_cost: np.ndarray = None
    toll: np.ndarray = None
    length: np.ndarray = None
    link_ids: np.ndarray = None
    x: np.ndarray = None
    y: np.ndarray = None
    through_centroids: bool = False
    period_hours: float = 1.0
    value_of_time: float = 20.0
    currency: str = "money"
    length_unit: str = ""
    crs: str = ""
    name: str = "network"
    link_attrs: dict = field(default_factory=dict)
    node_attrs: dict = field(default_factory=dict)

    def __post_init__(self):
        set_ = object.__setattr__
        node_ids = np.array(self.node_ids, dtype=np.int64).ravel()
        n = node_ids.size
        if np.unique(node_ids).size != n:
            raise NetworkError("node ids must be unique")
        tail = np.array(self.tail, dtype=np.int64).ravel()
        head = np.array(self.head, dtype=np.int64).ravel()
        m = tail.size
        if head.size != m:
            raise NetworkError("tail and head must have the same length")
        if m and (tail.min() < 0 or head.min() < 0 or tail.max() >= n or head.max() >= n):
            raise NetworkError("link end points must be node indices in 0..n_nodes-1")
        if np.any(tail == head):
            i = int(np.flatnonzero(tail == head)[0])
            raise NetworkError(f"link {i} is a self-loop at node {node_ids[tail[i]]}")
        for arr in (node_ids, tail, head):
            arr.setflags(write=False)
        set_(self, "node_ids", node_ids)
        set_(self, "tail", tail)
        set_(self, "head", head)

        kind = np.array(0 if self.cost_kind is None else self.cost_kind, dtype=np.int8)
        if kind.ndim == 0:
            kind = np.full(m, int(kind), dtype=np.int8)
        if kind.shape != (m,) or not np.isin(kind, list(COST_KINDS.values())).all():
            raise NetworkError("cost_kind must hold codes 0 (BPR), 1 (conical), 2 (polynomial)")
        kind.setflags(write=False)
        set_(self, "cost_kind", kind)
        cap_default = 1.0 if self.capacity is None else None
        set_(self, "capacity", _float_array("capacity", self.capacity, m, default=cap_default))
        set_(self, "free_flow_time", _float_array("free_flow_time", self.free_flow_time, m))
        set_(self, "alpha", _float_array("alpha", self.alpha, m, default=0.15))
        set_(self, "beta", _float_array("beta", self.beta, m, default=4.0))
        set_(self, "fixed_cost", _float_array("fixed_cost", self.fixed_cost, m, default=0.0))
        set_(self, "toll", _float_array("toll", self.toll, m, default=0.0))
        set_(self, "length", _float_array("length", self.length, m, default=np.nan))
        set_(self, "x", _float_array("x", self.x, n, default=np.nan))
        set_(self, "y", _float_array("y", self.y, n, default=np.nan))
        link_ids = np.arange(1, m + 1) if self.link_ids is None else self.link_ids
        link_ids = np.array(link_ids, dtype=np.int64).ravel()
        if link_ids.shape != (m,) or np.unique(link_ids).size != m:
            raise NetworkError("link ids must be unique, one per link")
        link_ids.setflags(write=False)
        set_(self, "link_ids", link_ids)

        for name in ("capacity", "free_flow_time", "alpha", "beta", "fixed_cost", "toll"):
            arr = getattr(self, name)
            if not np.isfinite(arr).all():
                i = int(np.flatnonzero(~np.isfinite(arr))[0])
                raise NetworkError(f"{name} of link {link_ids[i]} is not finite: {arr[i]}")
        for name in ("capacity", "free_flow_time", "alpha", "beta"):
            arr = getattr(self, name)
            if (arr < 0).any():
                i = int(np.flatnonzero(arr < 0)[0])
                raise NetworkError(f"{name} of link {link_ids[i]} is negative: {arr[i]}")
        congestible = (self.alpha > 0) & (self.cost_kind != COST_KINDS["polynomial"])
        congestible |= self.cost_kind == COST_KINDS["conical"]
        bad = congestible & (self.capacity <= 0)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise NetworkError(f"capacity of congestible link {link_ids[i]} must be positive")
        conical = self.cost_kind == COST_KINDS["conical"]
        if (conical & (self.alpha <= 1)).any():
            i = int(np.flatnonzero(conical & (self.alpha <= 1))[0])
            raise NetworkError(f"conical cost of link {link_ids[i]} needs alpha > 1")

        zone_ids = np.array(self.zone_ids, dtype=np.int64).ravel()
        zone_nodes = np.array(self.zone_nodes, dtype=np.int64).ravel()
        z = zone_ids.size
        if zone_nodes.size != z:
            raise NetworkError("zone_ids and zone_nodes must have the same length")
        if np.unique(zone_ids).size != z or np.unique(zone_nodes).size != z:
            raise NetworkError("zone ids and zone centroid nodes must be unique")
        if z and (zone_nodes.min() < 0 or zone_nodes.max() >= n):
            raise NetworkError("zone centroids must be node indices")
        demand = np.array(self.demand, dtype=np.float64)
        if demand.shape != (z, z):
            raise NetworkError(f"demand must have shape ({z}, {z}), got {demand.shape}")
        if not np.isfinite(demand).all() or (demand < 0).any():
            raise NetworkError("demand must be finite and non-negative")
        demand = demand.copy()
        np.fill_diagonal(demand, 0.0)
        for arr in (zone_ids, zone_nodes, demand):
            arr.setflags(write=False)
        set_(self, "zone_ids", zone_ids)
        set_(self, "zone_nodes", zone_nodes)
        set_(self, "demand", demand)
        if not (self.period_hours > 0 and np.isfinite(self.period_hours)):
            raise NetworkError("period_hours must be positive")
        if not (self.value_of_time > 0 and np.isfinite(self.value_of_time)):
            raise NetworkError("value_of_time must be positive")
        set_(self, "period_hours", float(self.period_hours))
        set_(self, "value_of_time", float(self.value_of_time))
        set_(self, "through_centroids", bool(self.through_centroids))
        for attrs, size, what in ((self.link_attrs, m, "link"), (self.node_attrs, n, "node")):
            for key, val in attrs.items():
                if len(val) != size:
                    raise NetworkError(f"{what} attribute {key!r} must have {size} values")

    # ------------------------------------------------------------------ sizes
    @property
    def n_nodes(self) -> int:
        return int(self.node_ids.size)

    @property
    def n_links(self) -> int:
        return int(self.tail.size)

    @property
    def n_zones(self) -> int:
        return int(self.zone_ids.size)

    @property
    def total_demand(self) -> float:
        return float(self.demand.sum())

    # ------------------------------------------------------------ derived data
    @property
    def period_capacity(self) -> np.ndarray:
        """Capacity for the analysis period, ``capacity * period_hours``."""
        return self.capacity * self.period_hours

    @property
    def toll_minutes(self) -> np.ndarray:
        """Money tolls converted to minutes through the value of time."""
        return self.toll * (60.0 / self.value_of_time)

    @property
    def constant_cost(self) -> np.ndarray:
        """Flow-independent generalized-cost term per link, minutes."""
        return self.fixed_cost + self.toll_minutes

    @property
    def connectors(self) -> np.ndarray:
        """Mask of shape (n_links,): True for zone connectors, False for roads.

        A zone connector joins a zone centroid that stands apart from the roads to the
        road network. A zone node counts as such a centroid when every link in or out of
        it has a cost that does not depend on volume (BPR or polynomial with
        ``alpha = 0`` or ``beta = 0``) and leads to a node that is not a zone; every
        link at such a centroid is a connector. A zone node with a congestible link, or
        a link to another zone, is a road node (zones placed on road intersections, as
        in many textbook and benchmark networks), and none of its links is a connector.
        A link at a zone node whose ``link_attrs["facility_type"]`` names a connector is
        one too, whatever its cost. When the rule would make every link a connector
        there are no roads to set them apart from, and the mask is all False.

        Examples
        --------
        >>> from congest.network import Network
        >>> # zone 1 sits on its road node 0; zone 2 is a centroid (node 2) off node 1
        >>> net = Network(node_ids=[1, 2, 3], tail=[0, 1, 2], head=[1, 2, 1],
        ...               capacity=100.0, free_flow_time=1.0, alpha=[0.15, 0.0, 0.0],
        ...               zone_ids=[1, 2], zone_nodes=[0, 2], demand=[[0, 5], [0, 0]])
        >>> net.connectors.tolist()
        [False, True, True]
        """
        is_zone = np.zeros(self.n_nodes, dtype=bool)
        is_zone[self.zone_nodes] = True
        polynomial_like = np.isin(self.cost_kind, (COST_KINDS["bpr"], COST_KINDS["polynomial"]))
        steady = polynomial_like & ((self.alpha == 0) | (self.beta == 0))
        zone_end = is_zone[self.tail] | is_zone[self.head]
        # any congestible link, or one between two zones, makes its zone ends road nodes
        road_like = ~steady | (is_zone[self.tail] & is_zone[self.head])
        ordinary = np.zeros(self.n_nodes, dtype=bool)
        ordinary[self.tail[road_like]] = True
        ordinary[self.head[road_like]] = True
        centroid = is_zone & ~ordinary
        mask = centroid[self.tail] | centroid[self.head]
        kind = self.link_attrs.get("facility_type")
        if kind is not None:
            named = np.array(["connector" in str(v).lower() for v in kind], dtype=bool)
            mask |= named & zone_end
        if mask.all():
            mask[:] = False
        return mask

    def node_index(self, node_id) -> int:
        """Index of the node with user id ``node_id``."""
        idx = self._node_lookup.get(int(node_id))
        if idx is None:
            raise NetworkError(f"unknown node id {node_id!r}")
        return idx

    def link_index(self, link_id) -> int:
        """Index of the link with user id ``link_id``."""
        idx = self._link_lookup.get(int(link_id))
        if idx is None:
            raise NetworkError(f"unknown link id {link_id!r}")
        return idx

    @property
    def _node_lookup(self):
        cache = self.__dict__.get("_node_lookup_cache")
        if cache is None:
            cache = {int(v): i for i, v in enumerate(self.node_ids)}
            object.__setattr__(self, "_node_lookup_cache", cache)
        return cache

    @property
    def _link_lookup(self):
        cache = self.__dict__.get("_link_lookup_cache")
        if cache is None:
            cache = {int(v): i for i, v in enumerate(self.link_ids)}
            object.__setattr__(self, "_link_lookup_cache", cache)
        return cache

    def od_pairs(self):
        """Origin index, destination index and trips of every OD pair with demand.

        Returns
        -------
        origins, destinations : ndarray of int, zone indices (not ids)
        trips : ndarray of float
        """
        o, d = np.nonzero(self.demand)
        return o, d, self.demand[o, d]

    # ------------------------------------------------------------- variations
    def replace(self, **changes) -> Network:
        """A copy with some fields changed, validated again.

        Examples
        --------
        >>> from congest.network import Network
        >>> net = Network(node_ids=[1, 2], tail=[0], head=[1], capacity=[10.0],
        ...               free_flow_time=[1.0], zone_ids=[1, 2], zone_nodes=[0, 1],
        ...               demand=[[0, 5], [0, 0]])
        >>> net.replace(demand=net.demand * 2).total_demand
        10.0
        """
        names = {f.name for f in fields(self)}
        unknown = set(changes) - names
        if unknown:
            raise TypeError(f"unknown Network fields: {sorted(unknown)}")
        return replace(self, **changes)

    def scale_demand(self, factor: float) -> Network:
        """A copy with every OD entry multiplied by ``factor``."""
        return self.replace(demand=self.demand * float(factor))

    def with_tolls(self, toll_minutes) -> Network:
        """A copy with ``toll_minutes`` (shape (n_links,)) added to the fixed cost."""
        extra = _float_array("toll_minutes", toll_minutes, self.n_links)
        return self.replace(fixed_cost=self.fixed_cost + extra)

    def __repr__(self) -> str:
        return (
            f"Network(name={self.name!r}, n_nodes={self.n_nodes}, n_links={self.n_links}, "
            f"n_zones={self.n_zones}, total_demand={self.total_demand:.6g})"
        )
