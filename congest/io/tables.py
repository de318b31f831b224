"""Plain link and OD tables: the layout for users with a bare link list and trip table.

Link table (one row per directed link)
    required ``from_node, to_node, capacity, free_flow_time``; optional ``link_id``,
    ``alpha``, ``beta`` (BPR defaults 0.15 and 4), ``cost_kind`` (``bpr``, ``conical``,
    ``polynomial``), ``toll``, ``length``, ``fixed_cost`` (minutes); any other column
    (``link_type``, ``name``, ...) is kept in ``Network.link_attrs``.
OD table
    ``origin, destination, volume`` (``trips`` is accepted for ``volume``); one row per
    pair, zero rows may be left out.

Capacity is in vehicles per hour, free-flow time in minutes, volume in trips for the
analysis period (``period_hours``, default 1).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from ..exceptions import InputError
from ..network import Network
from ._table import Table, check_links, check_unique, cost_kinds, demand_matrix, lookup

__all__ = ["read_tables", "parse_zones"]

LINK_COLUMNS = ("link_id", "from_node", "to_node", "capacity", "free_flow_time", "alpha",
                "beta", "cost_kind", "toll", "length", "fixed_cost")


def parse_zones(spec):
    """Zone ids from a text spec such as ``"1-38"``, ``"1-10,12,20-24"``.

    Parameters
    ----------
    spec : str or iterable of int or None
        ``None``, ``""`` or ``"od"`` mean "every node in the OD table" (returns None).

    Returns
    -------
    ndarray of int64 or None

    Examples
    --------
    >>> parse_zones("1-3,7").tolist()
    [1, 2, 3, 7]
    """
    if spec is None:
        return None
    if isinstance(spec, str):
        text = spec.strip().lower()
        if text in ("", "od"):
            return None
        ids = []
        for part in text.split(","):
            part = part.strip()
            m = re.fullmatch(r"(-?\d+)\s*(?:-|\.\.|:)\s*(-?\d+)", part)
            if m:
                lo, hi = int(m.group(1)), int(m.group(2))
                if hi < lo:
                    raise InputError(f"zone range {part!r} runs backwards", value=spec)
                ids.extend(range(lo, hi + 1))
            elif re.fullmatch(r"-?\d+", part):
                ids.append(int(part))
            else:
                raise InputError("zones must be ids and ranges such as '1-38' or '1-10,12'",
                                 value=spec)
        arr = np.asarray(ids, dtype=np.int64)
    else:
        arr = np.asarray(list(spec), dtype=np.int64).ravel()
    if np.unique(arr).size != arr.size:
        raise InputError("zones list a node more than once", value=spec)
    return arr


def read_tables(links_path, demand_path, *, zones=None, through_centroids=False,
                toll_weight=None, length_weight=0.0, name=None, **network_options) -> Network:
    """Network from a link CSV and an OD CSV.

    Parameters
    ----------
    links_path, demand_path : path-like
        The link table and the OD table (layout in the module docstring). Neither file
        is modified.
    zones : iterable of int or str, optional
        Node ids that are zones (centroids), e.g. ``range(1, 39)`` or ``"1-38"``. Default:
        every node that appears in the OD table, in increasing order.
    through_centroids : bool, default False
        If False, paths may start or end at a zone but not pass through one.
    toll_weight : float, optional
        Minutes per unit of the ``toll`` column. If given, tolls enter the generalized
        cost as ``toll_weight * toll`` minutes (``Network.fixed_cost``) and the raw column
        is kept in ``link_attrs["toll"]``; if not, tolls are money and are converted with
        ``value_of_time``.
    length_weight : float, default 0
        Minutes per unit of length added to the generalized cost (a distance charge).
    name : str, optional
        Network name (default: the folder of the link table).
    **network_options
        Other :class:`~congest.network.Network` fields: ``period_hours``,
        ``value_of_time``, ``currency``, ``length_unit``, ``crs``.

    Returns
    -------
    Network

    Raises
    ------
    InputError
        A missing column or a bad cell, naming the file, row, column and value.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "links.csv").write_text("from_node,to_node,capacity,free_flow_time\\n"
    ...                                  "1,2,1000,5\\n2,3,1000,5\\n")
    >>> _ = (d / "demand.csv").write_text("origin,destination,volume\\n1,3,500\\n")
    >>> read_tables(d / "links.csv", d / "demand.csv")
    Network(name=..., n_nodes=3, n_links=2, n_zones=2, total_demand=500)
    """
    links = Table(links_path, "link table")
    links.require("from_node", "to_node", "capacity", "free_flow_time")
    tail_ids = links.ids("from_node", describe="from node")
    head_ids = links.ids("to_node", describe="to node")
    capacity = links.number("capacity", minimum=0)
    fft = links.number("free_flow_time", minimum=0, describe="free-flow time")
    alpha = links.number("alpha", default=0.15, minimum=0)
    beta = links.number("beta", default=4.0, minimum=0)
    kind = cost_kinds(links, "cost_kind", "bpr")
    toll = links.number("toll", default=0.0)
    length = links.number("length", default=np.nan, minimum=0)
    fixed = links.number("fixed_cost", default=0.0, describe="fixed cost")
    if "link_id" in links:
        link_ids = links.ids("link_id", describe="link id")
        check_unique(links, link_ids, "link_id", "link id")
    else:
        link_ids = np.arange(1, links.n_rows + 1, dtype=np.int64)
    check_links(links, tail_ids, head_ids, kind, alpha, capacity, from_col="from_node",
                to_col="to_node", capacity_col="capacity")
    attrs = links.extras(LINK_COLUMNS)

    if toll_weight is not None:
        toll_weight = float(toll_weight)
        if not np.isfinite(toll_weight):
            raise InputError("toll weight must be a finite number", value=toll_weight)
        fixed = fixed + toll_weight * toll
        if "toll" in links:
            attrs["toll"] = toll
        toll = np.zeros_like(toll)
    elif (toll < 0).any():
        i = int(np.flatnonzero(toll < 0)[0])
        links.fail("toll is negative", index=i, column="toll", value=links.text("toll")[i])
    if length_weight:
        length_weight = float(length_weight)
        if np.isnan(length).any():
            i = int(np.flatnonzero(np.isnan(length))[0])
            links.fail("a length weight was given but this link has no length", index=i,
                       column="length", value="")
        fixed = fixed + length_weight * length
    if (fixed < 0).any():
        i = int(np.flatnonzero(fixed < 0)[0])
        links.fail(f"the constant cost term of this link is negative ({fixed[i]:g} minutes)",
                   index=i, column="fixed_cost" if "fixed_cost" in links else "toll")

    od = Table(demand_path, "OD table")
    trips_col = "volume" if "volume" in od or "trips" not in od else "trips"
    od.require("origin", "destination", trips_col)
    origins = od.ids("origin")
    destinations = od.ids("destination")
    trips = od.number(trips_col, minimum=0, describe="demand")

    link_nodes = np.unique(np.concatenate([tail_ids, head_ids]))
    zones = parse_zones(zones)
    if zones is None:
        zones = np.unique(np.concatenate([origins, destinations]))
        known = np.isin(zones, link_nodes)
        if not known.all():
            # an OD row naming a node no link touches
            bad = int(zones[~known][0])
            col, vals = ("origin", origins) if bad in set(origins.tolist()) else (
                "destination", destinations)
            od.fail("unknown node: no link starts or ends here", index=int(
                np.flatnonzero(vals == bad)[0]), column=col, value=bad)
    demand = demand_matrix(od, origins, destinations, trips, zones, origin_col="origin",
                           destination_col="destination", trips_col=trips_col)
    node_ids = np.unique(np.concatenate([link_nodes, zones]))
    index = {int(v): i for i, v in enumerate(node_ids)}
    options = {"length_unit": "", **network_options}
    return Network(
        node_ids=node_ids, tail=lookup(node_ids, tail_ids),
        head=lookup(node_ids, head_ids), capacity=capacity,
        free_flow_time=fft, alpha=alpha, beta=beta, cost_kind=kind, fixed_cost=fixed,
        toll=toll, length=length, link_ids=link_ids, zone_ids=zones,
        zone_nodes=[index[int(z)] for z in zones], demand=demand,
        through_centroids=through_centroids,
        name=name or Path(links_path).resolve().parent.name, link_attrs=attrs, **options,
    )
