"""Network folders in the GMNS layout (General Modeling Network Specification v0.96).

A folder holds::

    node.csv      node_id, x_coord, y_coord, [zone_id], [node_type], ...
    link.csv      link_id, from_node_id, to_node_id, [directed], [length], [lanes],
                  capacity, [free_speed], [toll], [facility_type], [u_...], ...
    config.csv    optional: long_length, speed, currency, crs, dataset_name, ...
    trips.csv     congest's trip table: origin_zone, destination_zone, trips
    scenario.json congest's settings: period, value of time, default cost function, ...

GMNS semantics kept: ``capacity`` is per lane per hour (link capacity = capacity x
lanes, ``lanes`` default 1); ``directed=false`` makes two directed links (the reverse one
gets id ``-link_id``); ``length`` is in ``long_length`` units and ``free_speed`` in
``speed`` units of ``config.csv``; columns congest does not know are kept in
``Network.link_attrs`` / ``node_attrs``. GMNS has no volume-delay function, so congest's
are user columns (the spec's ``u_`` prefix): ``u_free_flow_time`` (minutes, overrides
``length / free_speed``), ``u_cost_kind`` (``bpr``, ``conical``, ``polynomial``),
``u_alpha``, ``u_beta`` and ``u_fixed_cost`` (minutes). Zones are the nodes with a
``zone_id``. The full format reference is ``networks/README.md``.

References
----------
.. [1] Zephyr Foundation (2023). General Modeling Network Specification (GMNS), v0.96.
   https://github.com/zephyr-data-specs/GMNS
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd

from ..exceptions import InputError
from ..network import COST_KINDS, Network
from ._table import Table, check_links, check_unique, cost_kinds, demand_matrix, lookup
from .atomic import atomic_folder

__all__ = ["read_gmns", "write_gmns", "SETTINGS_FILE", "TRIPS_FILE", "DEFAULT_SETTINGS"]

SETTINGS_FILE = "scenario.json"
TRIPS_FILE = "trips.csv"

#: Settings used when ``scenario.json`` is absent or leaves a key out.
DEFAULT_SETTINGS = {
    "name": None,
    "description": "",
    "trips_file": TRIPS_FILE,
    "period_hours": 1.0,
    "value_of_time": 20.0,
    "currency": None,
    "through_centroids": False,
    "default_cost": {"kind": "bpr", "alpha": 0.15, "beta": 4.0},
}

#: Kilometres per unit of length, by the names config.csv may use.
LENGTH_UNITS = {
    "km": 1.0, "kilometer": 1.0, "kilometers": 1.0, "kilometre": 1.0, "kilometres": 1.0,
    "m": 1e-3, "meter": 1e-3, "meters": 1e-3, "metre": 1e-3, "metres": 1e-3,
    "mi": 1.609344, "mile": 1.609344, "miles": 1.609344,
    "ft": 0.0003048, "feet": 0.0003048, "foot": 0.0003048,
}
#: Kilometres per hour per unit of speed.
SPEED_UNITS = {
    "kph": 1.0, "km/h": 1.0, "kmh": 1.0, "kmph": 1.0, "km/hr": 1.0,
    "mph": 1.609344, "mi/h": 1.609344, "mi/hr": 1.609344,
    "m/s": 3.6, "mps": 3.6, "ft/s": 1.09728, "fps": 1.09728,
}
_CANONICAL_LENGTH = {1.0: "km", 1e-3: "m", 1.609344: "mi", 0.0003048: "ft"}

NODE_COLUMNS = ("node_id", "x_coord", "y_coord", "zone_id")
LINK_COLUMNS = ("link_id", "from_node_id", "to_node_id", "directed", "length", "lanes",
                "capacity", "free_speed", "toll", "u_free_flow_time", "u_cost_kind",
                "u_alpha", "u_beta", "u_fixed_cost")
_KIND_NAMES = {v: k for k, v in COST_KINDS.items()}


# -------------------------------------------------------------------- reading
def _read_config(folder: Path) -> dict:
    path = folder / "config.csv"
    if not path.is_file():
        return {}
    table = Table(path, "config file")
    if table.n_rows == 0:
        return {}
    if table.n_rows > 1:
        raise InputError("config file must have one data row", path=path, row=3)
    return {c: table.text(c)[0] for c in table.columns if table.text(c)[0] != ""}


def _read_settings(folder: Path, overrides: dict) -> tuple[dict, Path | None, set]:
    """Defaults, the folder's settings file and the overrides, merged; with the file's
    path (or None) and the keys the file itself names."""
    path = folder / SETTINGS_FILE
    settings = json.loads(json.dumps(DEFAULT_SETTINGS))
    named = set()
    if path.is_file():
        try:
            given = json.loads(path.read_text(encoding="utf-8"))
        except json.JSONDecodeError as err:
            raise InputError(f"settings file is not valid JSON: {err.msg} at line "
                             f"{err.lineno}, column {err.colno}", path=path) from err
        if not isinstance(given, dict):
            raise InputError("settings file must hold one JSON object", path=path)
        _merge_settings(settings, given, path)
        named = set(given)
    else:
        path = None
    cost_keys = {"cost_kind": "kind", "alpha": "alpha", "beta": "beta"}
    flat = {k: v for k, v in overrides.items() if v is not None}
    for key, sub in cost_keys.items():
        if key in flat:
            settings["default_cost"][sub] = flat.pop(key)
    _merge_settings(settings, flat, None)
    return settings, path, named


def _merge_settings(settings, given, path):
    for key, value in given.items():
        if key not in DEFAULT_SETTINGS:
            raise InputError(f"unknown setting {key!r}; known settings: "
                             f"{', '.join(DEFAULT_SETTINGS)}", path=path, value=value)
        if key == "default_cost":
            if not isinstance(value, dict):
                raise InputError("default_cost must be an object with kind, alpha, beta",
                                 path=path, value=value)
            for sub, v in value.items():
                if sub not in DEFAULT_SETTINGS["default_cost"]:
                    raise InputError(f"unknown key {sub!r} in default_cost; expected kind, "
                                     "alpha, beta", path=path, value=v)
                settings["default_cost"][sub] = v
        else:
            settings[key] = value
    s = settings
    for key in ("period_hours", "value_of_time"):
        v = s[key]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not (
                math.isfinite(v) and v > 0):
            raise InputError(f"{key} must be a positive number", path=path, value=v)
    if not isinstance(s["through_centroids"], bool):
        raise InputError("through_centroids must be true or false", path=path,
                         value=s["through_centroids"])
    cost = s["default_cost"]
    if str(cost["kind"]).lower() not in COST_KINDS:
        raise InputError(f"default_cost kind must be one of {sorted(COST_KINDS)}",
                         path=path, value=cost["kind"])
    for sub in ("alpha", "beta"):
        v = cost[sub]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not (
                math.isfinite(v) and v >= 0):
            raise InputError(f"default_cost {sub} must be a non-negative number", path=path,
                             value=v)


def _unit(config, key, table, folder):
    name = config.get(key)
    if name is None:
        return None, None
    factor = table.get(str(name).strip().lower())
    if factor is None:
        raise InputError(f"unknown {key} unit; expected one of {', '.join(sorted(table))}",
                         path=folder / "config.csv", row=2, column=key, value=name)
    return str(name), factor


def read_gmns(folder, **overrides) -> Network:
    """Read a network folder in the GMNS layout with congest's trip table and settings.

    Parameters
    ----------
    folder : path-like
        Folder with ``node.csv`` and ``link.csv`` (and optionally ``config.csv``,
        ``trips.csv``, ``scenario.json``). Nothing in it is modified.
    **overrides
        Settings that take precedence over ``scenario.json``: ``name``,
        ``trips_file`` (relative to the folder, or absolute), ``period_hours``,
        ``value_of_time``, ``currency``, ``through_centroids``, ``cost_kind``,
        ``alpha``, ``beta`` (the defaults for links whose ``u_`` columns are empty).
        ``None`` values are ignored.

    Returns
    -------
    Network
        Links in file order, an undirected link followed by its reverse (id
        ``-link_id``). Zones in increasing ``zone_id`` order.

    Raises
    ------
    InputError
        A missing file or column or a bad cell, naming file, row, column and value.

    Examples
    --------
    >>> from pathlib import Path
    >>> net = read_gmns(Path(__file__).parents[2] / "networks" / "braess")
    >>> net.n_links, float(net.demand.sum())
    (5, 6.0)
    """
    folder = Path(folder)
    if not folder.is_dir():
        raise InputError("network folder not found", path=folder)
    settings, settings_path, named = _read_settings(folder, overrides)
    config = _read_config(folder)
    cost = settings["default_cost"]

    # nodes
    nodes = Table(folder / "node.csv", "node table")
    nodes.require("node_id")
    node_ids = nodes.ids("node_id", describe="node id")
    check_unique(nodes, node_ids, "node_id", "node id")
    x = nodes.number("x_coord", default=np.nan)
    y = nodes.number("y_coord", default=np.nan)
    node_attrs = nodes.extras(NODE_COLUMNS)
    zone_of = nodes.number("zone_id", default=np.nan, describe="zone id")
    has_zone = ~np.isnan(zone_of)
    zone_rows = np.flatnonzero(has_zone)
    zone_ids = zone_of[zone_rows]
    if (zone_ids != np.round(zone_ids)).any():
        i = int(zone_rows[np.flatnonzero(zone_ids != np.round(zone_ids))[0]])
        nodes.fail("zone id must be a whole number", index=i, column="zone_id",
                   value=nodes.text("zone_id")[i])
    zone_ids = zone_ids.astype(np.int64)
    zone_rows, zone_ids = _pick_centroids(nodes, zone_rows, zone_ids)
    order = np.argsort(zone_ids, kind="stable")
    zone_rows, zone_ids = zone_rows[order], zone_ids[order]

    # links
    links = Table(folder / "link.csv", "link table")
    links.require("link_id", "from_node_id", "to_node_id")
    link_ids = links.ids("link_id", describe="link id")
    check_unique(links, link_ids, "link_id", "link id")
    tail_ids = links.ids("from_node_id", describe="from node")
    head_ids = links.ids("to_node_id", describe="to node")
    tail = _node_indices(links, tail_ids, node_ids, "from_node_id")
    head = _node_indices(links, head_ids, node_ids, "to_node_id")
    directed = links.boolean("directed", default=True)
    kind = cost_kinds(links, "u_cost_kind", str(cost["kind"]).lower())
    alpha = links.number("u_alpha", default=float(cost["alpha"]), minimum=0,
                         describe="alpha")
    beta = links.number("u_beta", default=float(cost["beta"]), minimum=0, describe="beta")
    lanes = links.number("lanes", default=1.0, minimum=0, describe="lanes")
    cap_lane = links.number("capacity", default=np.nan, minimum=0, describe="capacity")
    congestible = ((alpha > 0) & (kind != COST_KINDS["polynomial"])) | (
        kind == COST_KINDS["conical"])
    missing = np.isnan(cap_lane)
    if (missing & congestible).any():
        i = int(np.flatnonzero(missing & congestible)[0])
        if "capacity" not in links:
            links.require("capacity")
        links.fail("capacity is empty on a link whose travel time depends on volume",
                   index=i, column="capacity", value="")
    capacity = np.where(missing, 1.0, cap_lane * lanes)
    zero_lanes = np.flatnonzero((lanes == 0) & congestible)
    if zero_lanes.size:
        links.fail("lanes is zero on a link whose travel time depends on volume",
                   index=int(zero_lanes[0]), column="lanes", value=links.text("lanes")[
                       int(zero_lanes[0])])
    check_links(links, tail_ids, head_ids, kind, alpha, capacity, from_col="from_node_id",
                to_col="to_node_id", capacity_col="capacity")

    length_name, length_km = _unit(config, "long_length", LENGTH_UNITS, folder)
    speed_name, speed_kmh = _unit(config, "speed", SPEED_UNITS, folder)
    length = links.number("length", default=np.nan, minimum=0)
    speed = links.number("free_speed", default=np.nan, minimum=0, describe="free speed")
    fft = links.number("u_free_flow_time", default=np.nan, minimum=0,
                       describe="free-flow time")
    need = np.isnan(fft)
    if need.any():
        if (length_km is None) != (speed_kmh is None):
            given = "long_length" if length_km is not None else "speed"
            other = "speed" if given == "long_length" else "long_length"
            raise InputError(f"config gives {given} but not {other}; both are needed to "
                             "turn length / free_speed into a travel time",
                             path=folder / "config.csv", column=other)
        ratio = 1.0 if length_km is None else length_km / speed_kmh
        no_data = need & (np.isnan(length) | np.isnan(speed))
        if no_data.any():
            i = int(np.flatnonzero(no_data)[0])
            col = "length" if np.isnan(length[i]) else "free_speed"
            links.fail("no free-flow time: give u_free_flow_time (minutes) or both length "
                       "and free_speed", index=i, column=col, value="")
        stopped = need & (speed <= 0) & (length > 0)
        if stopped.any():
            i = int(np.flatnonzero(stopped)[0])
            links.fail("free speed is zero on a link with length > 0 (and no "
                       "u_free_flow_time)", index=i, column="free_speed",
                       value=links.text("free_speed")[i])
        with np.errstate(divide="ignore", invalid="ignore"):
            derived = np.where(length > 0, 60.0 * ratio * length / speed, 0.0)
        fft = np.where(need, derived, fft)
    toll = links.number("toll", default=0.0, minimum=0)
    fixed = links.number("u_fixed_cost", default=0.0, minimum=0, describe="fixed cost")
    link_attrs = links.extras(LINK_COLUMNS)
    for col in ("lanes", "free_speed"):
        if col in links:
            link_attrs[col] = lanes if col == "lanes" else speed

    # undirected rows become two directed links, the reverse right after the forward
    rows = np.repeat(np.arange(links.n_rows), np.where(directed, 1, 2))
    reverse = np.zeros(rows.size, dtype=bool)
    reverse[1:] = rows[1:] == rows[:-1]
    ids = np.where(reverse, -link_ids[rows], link_ids[rows])
    if reverse.any() and np.unique(ids).size != ids.size:
        clash = [int(v) for v in ids[reverse] if np.count_nonzero(ids == v) > 1][0]
        i = int(np.flatnonzero(link_ids == clash)[0])
        links.fail(f"link id {clash} is also the id of the reverse direction of undirected "
                   f"link {-clash}", index=i, column="link_id", value=clash)
    tail_d = np.where(reverse, head[rows], tail[rows])
    head_d = np.where(reverse, tail[rows], head[rows])
    link_attrs = {k: v[rows] for k, v in link_attrs.items()}

    # demand
    trips_file = Path(settings["trips_file"])
    trips_path = trips_file if trips_file.is_absolute() else folder / trips_file
    demand = np.zeros((zone_ids.size, zone_ids.size))
    if trips_path.is_file():
        trips = Table(trips_path, "trip table")
        trips.require("origin_zone", "destination_zone", "trips")
        demand = demand_matrix(trips, trips.ids("origin_zone", describe="origin zone"),
                               trips.ids("destination_zone", describe="destination zone"),
                               trips.number("trips", minimum=0, describe="trips"), zone_ids,
                               origin_col="origin_zone", destination_col="destination_zone",
                               trips_col="trips")
    elif "trips_file" in overrides or "trips_file" in named:
        # named (in the settings file or by the caller) but absent: an error, never a
        # silent network without trips
        where = f" (named by {settings_path.name})" if "trips_file" in named else ""
        raise InputError(f"trip table not found{where}", path=trips_path)

    currency = settings["currency"] or config.get("currency") or "money"
    name = settings["name"] or config.get("dataset_name") or folder.resolve().name
    length_unit = _CANONICAL_LENGTH.get(length_km, length_name or "") if length_km else ""
    return Network(
        node_ids=node_ids, tail=tail_d, head=head_d, capacity=capacity[rows],
        free_flow_time=fft[rows], alpha=alpha[rows], beta=beta[rows], cost_kind=kind[rows],
        fixed_cost=fixed[rows], toll=toll[rows], length=length[rows], link_ids=ids,
        x=x, y=y, zone_ids=zone_ids, zone_nodes=zone_rows, demand=demand,
        through_centroids=settings["through_centroids"],
        period_hours=float(settings["period_hours"]),
        value_of_time=float(settings["value_of_time"]), currency=str(currency),
        length_unit=length_unit, crs=str(config.get("crs", "")), name=str(name),
        link_attrs=link_attrs, node_attrs=node_attrs,
    )


def _node_indices(table, ids, node_ids, column):
    out = lookup(node_ids, ids)
    if (out < 0).any():
        i = int(np.flatnonzero(out < 0)[0])
        table.fail("unknown node: not in node.csv", index=i, column=column, value=int(ids[i]))
    return out


def _pick_centroids(nodes, rows, zone_ids):
    """One centroid per zone: the node with the zone id, or the one marked a centroid."""
    if np.unique(zone_ids).size == zone_ids.size:
        return rows, zone_ids
    kinds = np.array([str(t).lower() for t in nodes.text("node_type")], dtype=object)
    keep = np.ones(rows.size, dtype=bool)
    for z in np.unique(zone_ids):
        members = np.flatnonzero(zone_ids == z)
        if members.size == 1:
            continue
        marked = [m for m in members if kinds[rows[m]] in ("centroid", "zone")]
        if len(marked) != 1:
            first, second = rows[members[:2]]
            nodes.fail(f"zone {int(z)} is given to several nodes (also row {first + 2}); "
                       "mark exactly one of them node_type=centroid", index=second,
                       column="zone_id", value=int(z))
        keep[members] = False
        keep[marked[0]] = True
    return rows[keep], zone_ids[keep]


# -------------------------------------------------------------------- writing
def _speed_unit(length_unit):
    factor = LENGTH_UNITS.get(length_unit.lower()) if length_unit else None
    if factor is None:
        return None, None
    if length_unit.lower() in ("mi", "mile", "miles", "ft", "feet", "foot"):
        return "mph", factor / SPEED_UNITS["mph"]
    return "kph", factor


def write_gmns(net: Network, folder, *, trips_file=TRIPS_FILE, description="") -> Path:
    """Write ``net`` as a GMNS folder that :func:`read_gmns` reads back unchanged.

    Parameters
    ----------
    net : Network
    folder : path-like
        Created if missing. ``node.csv``, ``link.csv``, ``config.csv``, the trip table
        and ``scenario.json`` are replaced atomically (each written to a temporary file
        beside it, then renamed); other files in the folder are left alone.
    trips_file : str, default "trips.csv"
    description : str, optional
        Free text stored in ``scenario.json``.

    Returns
    -------
    Path
        The folder.

    Notes
    -----
    Every link is written ``directed=true`` with ``lanes`` from ``link_attrs`` (default
    1) and ``capacity`` per lane; ``u_free_flow_time``, ``u_cost_kind``, ``u_alpha``,
    ``u_beta`` and ``u_fixed_cost`` are always written, so the file does not depend on
    default settings. ``free_speed`` is recomputed from length and free-flow time when
    the length unit is known. Numbers are written with full precision.
    """
    folder = Path(folder)
    m = net.n_links
    zone_col = np.full(net.n_nodes, "", dtype=object)
    zone_col[net.zone_nodes] = [str(int(z)) for z in net.zone_ids]
    node = {"node_id": net.node_ids, "x_coord": net.x, "y_coord": net.y,
            "zone_id": zone_col}
    for key, val in net.node_attrs.items():
        if key not in node:
            node[key] = val

    attrs = dict(net.link_attrs)
    lanes = np.asarray(attrs.pop("lanes", np.ones(m)), dtype=np.float64)
    lanes = np.where(lanes > 0, lanes, 1.0)
    attrs.pop("free_speed", None)
    speed_name, km_per_unit = _speed_unit(net.length_unit)
    with np.errstate(divide="ignore", invalid="ignore"):
        if speed_name is not None:
            speed = np.where(net.free_flow_time > 0,
                             net.length * km_per_unit / (net.free_flow_time / 60.0), np.nan)
        else:
            speed = np.where(net.free_flow_time > 0,
                             net.length / (net.free_flow_time / 60.0), np.nan)
    link = {
        "link_id": net.link_ids, "from_node_id": net.node_ids[net.tail],
        "to_node_id": net.node_ids[net.head], "directed": np.full(m, "true"),
        "length": net.length, "lanes": _whole(lanes), "capacity": net.capacity / lanes,
        "free_speed": _rounded(speed), "toll": net.toll,
        "u_free_flow_time": net.free_flow_time,
        "u_cost_kind": [_KIND_NAMES[int(k)] for k in net.cost_kind],
        "u_alpha": net.alpha, "u_beta": net.beta, "u_fixed_cost": net.fixed_cost,
    }
    for key, val in attrs.items():
        if key not in link:
            link[key] = val
    config = {"dataset_name": net.name, "long_length": net.length_unit,
              "speed": speed_name or "", "crs": net.crs, "currency": net.currency,
              "version_number": "0.96"}
    o, d, q = net.od_pairs()
    trips = {"origin_zone": net.zone_ids[o], "destination_zone": net.zone_ids[d], "trips": q}
    settings = {
        "name": net.name, "description": description, "trips_file": trips_file,
        "period_hours": net.period_hours, "value_of_time": net.value_of_time,
        "currency": net.currency, "through_centroids": net.through_centroids,
        "default_cost": DEFAULT_SETTINGS["default_cost"],
    }
    frames = {"node.csv": pd.DataFrame(node), "link.csv": pd.DataFrame(link),
              "config.csv": pd.DataFrame([config]), trips_file: pd.DataFrame(trips)}
    targets = {name: folder / name for name in [*frames, SETTINGS_FILE]}
    with atomic_folder(targets.values()) as temps:
        for name, frame in frames.items():
            frame.to_csv(temps[targets[name]], index=False, na_rep="", lineterminator="\n")
        temps[targets[SETTINGS_FILE]].write_text(json.dumps(settings, indent=2) + "\n",
                                                 encoding="utf-8")
    return folder


def _rounded(values, digits=10):
    """Derived values to ``digits`` significant digits (45.00000000000001 -> 45.0)."""
    out = np.asarray(values, dtype=np.float64).copy()
    ok = np.isfinite(out) & (out != 0)
    scale = 10.0 ** (digits - 1 - np.floor(np.log10(np.abs(out[ok]))))
    out[ok] = np.round(out[ok] * scale) / scale
    return out


def _whole(values):
    values = np.asarray(values, dtype=np.float64)
    if np.all(values == np.round(values)):
        return values.astype(np.int64)
    return values
