"""Link results as GeoJSON (RFC 7946) for GIS.

Each link becomes a ``Feature`` whose geometry is a ``LineString`` from its tail node to
its head node, ``[x, y]`` taken from the network's node coordinates, and whose
``properties`` hold the link's attributes and result columns. RFC 7946 requires
longitude/latitude on WGS 84; when the network's coordinate system is anything else the
file still carries the network's own coordinates and says so in a top-level
``coordinate_note`` member (a foreign member, allowed by RFC 7946 section 6.1), so a GIS
user knows to assign the right projection on import.

References
----------
.. [1] Butler, H., Daly, M., Doyle, A., Gillies, S., Hagen, S. & Schaub, T. (2016).
   The GeoJSON Format. RFC 7946, IETF.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from ..exceptions import InputError, NetworkError
from .atomic import atomic_write

__all__ = [
    "is_lonlat",
    "coordinate_note",
    "link_feature_collection",
    "write_link_geojson",
    "read_link_geojson",
]

#: Spellings of longitude/latitude on WGS 84 accepted in ``Network.crs`` (compared in
#: lower case with spaces removed).
LONLAT_NAMES = frozenset({
    "epsg:4326", "wgs84", "wgs1984", "ogc:crs84", "crs84", "urn:ogc:def:crs:ogc:1.3:crs84",
    "urn:ogc:def:crs:epsg::4326", "lonlat", "lon/lat", "longitude/latitude", "4326",
})


def is_lonlat(crs: str) -> bool:
    """True when ``crs`` names longitude/latitude on WGS 84.

    Examples
    --------
    >>> is_lonlat("EPSG:4326"), is_lonlat("WGS 84"), is_lonlat(""), is_lonlat("EPSG:32616")
    (True, True, False, False)
    """
    return str(crs or "").strip().lower().replace(" ", "") in LONLAT_NAMES


def coordinate_note(crs: str) -> str:
    """One sentence saying what the node coordinates are, for maps and GIS files.

    Examples
    --------
    >>> coordinate_note("EPSG:4326")
    'Coordinates are longitude/latitude (EPSG:4326).'
    >>> coordinate_note("")
    'Coordinate system not stated: coordinates are not known to be longitude/latitude.'
    """
    crs = str(crs or "").strip()
    if is_lonlat(crs):
        return f"Coordinates are longitude/latitude ({crs})."
    if not crs:
        return "Coordinate system not stated: coordinates are not known to be longitude/latitude."
    return f"Coordinates are in {crs}, not longitude/latitude."


def _json_value(value):
    """A property value JSON can hold: numpy scalars unwrapped, NaN/inf as null."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _result_columns(network, result):
    """Per-link result columns from an Equilibrium, a mapping or a DataFrame."""
    if result is None:
        return {}
    if hasattr(result, "flow") and hasattr(result, "volume_capacity"):
        return {
            "volume": result.flow,
            "travel_time": result.time,
            "generalized_cost": result.cost,
            "volume_capacity": result.volume_capacity,
        }
    if hasattr(result, "columns"):  # a DataFrame of link results
        frame = result
        if "link_id" in frame.columns:
            order = {int(v): i for i, v in enumerate(frame["link_id"])}
            try:
                rows = [order[int(i)] for i in network.link_ids]
            except KeyError as err:
                raise NetworkError(f"link results have no row for link id {err.args[0]}") from err
            frame = frame.iloc[rows]
        elif len(frame) != network.n_links:
            raise NetworkError(
                f"link results have {len(frame)} rows but the network has "
                f"{network.n_links} links (add a link_id column to match them)")
        return {str(c): frame[c].to_numpy() for c in frame.columns if c != "link_id"}
    return {str(k): np.asarray(v) for k, v in dict(result).items()}


def link_feature_collection(network, result=None, *, properties=None) -> dict:
    """Links and their results as a GeoJSON FeatureCollection (a plain dict).

    Parameters
    ----------
    network : Network
        Must have finite coordinates for every link end node.
    result : Equilibrium, DataFrame or mapping of str to array of shape (n_links,), optional
        Result columns. An :class:`~congest.equilibrium.Equilibrium` gives ``volume``,
        ``travel_time`` (minutes), ``generalized_cost`` (minutes) and
        ``volume_capacity``; a DataFrame with a ``link_id`` column is matched by id,
        otherwise by row order.
    properties : mapping of str to array of shape (n_links,), optional
        More columns to add.

    Returns
    -------
    dict
        ``{"type": "FeatureCollection", "features": [...], "name": ...,
        "coordinate_note": ...}``; ``coordinate_note`` is only present when the
        coordinates are not longitude/latitude.

    Raises
    ------
    NetworkError
        A link end node has no coordinates, or a column has the wrong length.

    Examples
    --------
    >>> from congest.network import Network
    >>> net = Network(node_ids=[1, 2], tail=[0], head=[1], capacity=[10.0],
    ...               free_flow_time=[1.0], zone_ids=[1, 2], zone_nodes=[0, 1],
    ...               demand=[[0, 5], [0, 0]], x=[0.0, 1.0], y=[0.0, 0.0], crs="EPSG:4326")
    >>> fc = link_feature_collection(net, {"volume": [5.0]})
    >>> fc["features"][0]["geometry"]
    {'type': 'LineString', 'coordinates': [[0.0, 0.0], [1.0, 0.0]]}
    >>> fc["features"][0]["properties"]["volume"]
    5.0
    """
    net = network
    x, y = net.x, net.y
    ends = np.concatenate([net.tail, net.head])
    bad = ~(np.isfinite(x[ends]) & np.isfinite(y[ends]))
    if bad.any():
        node = net.node_ids[ends[np.flatnonzero(bad)[0]]]
        raise NetworkError(f"node {node} has no coordinates; GeoJSON needs x and y for "
                           "every link end node")
    columns = {
        "from_node": net.node_ids[net.tail],
        "to_node": net.node_ids[net.head],
        "capacity": net.capacity,
        "free_flow_time": net.free_flow_time,
        "length": net.length,
        "toll": net.toll,
    }
    for key, val in net.link_attrs.items():
        columns.setdefault(str(key), np.asarray(val))
    columns.update(_result_columns(net, result))
    columns.update({str(k): np.asarray(v) for k, v in dict(properties or {}).items()})
    for key, val in columns.items():
        if len(val) != net.n_links:
            raise NetworkError(f"column {key!r} has {len(val)} values for {net.n_links} links")

    names = list(columns)
    values = [np.asarray(columns[k]).tolist() for k in names]
    link_ids = net.link_ids.tolist()
    xt, yt = x[net.tail].tolist(), y[net.tail].tolist()
    xh, yh = x[net.head].tolist(), y[net.head].tolist()
    features = []
    for i, link_id in enumerate(link_ids):
        props = {"link_id": link_id}
        for name, col in zip(names, values, strict=True):
            props[name] = _json_value(col[i])
        features.append({
            "type": "Feature",
            "id": link_id,
            "geometry": {"type": "LineString",
                         "coordinates": [[xt[i], yt[i]], [xh[i], yh[i]]]},
            "properties": props,
        })
    collection = {"type": "FeatureCollection", "name": net.name, "features": features}
    if not is_lonlat(net.crs):
        collection["coordinate_note"] = coordinate_note(net.crs) + (
            " RFC 7946 expects WGS 84 longitude/latitude; assign the network's own "
            "coordinate system when importing.")
    return collection


def write_link_geojson(path, network, result=None, *, properties=None) -> dict:
    """Write :func:`link_feature_collection` to ``path`` atomically.

    The file is written to a temporary file in the same folder and moved into place, so
    a reader never sees half a file.

    Returns
    -------
    dict
        The collection written (its ``coordinate_note``, if any, is worth showing).
    """
    collection = link_feature_collection(network, result, properties=properties)
    text = json.dumps(collection, allow_nan=False, separators=(",", ":"))
    with atomic_write(path) as fh:
        fh.write(text)
    return collection


def read_link_geojson(path):
    """Read the link properties of a GeoJSON FeatureCollection back as a DataFrame.

    Returns
    -------
    pandas.DataFrame
        One row per feature, one column per property, plus ``geometry`` (the list of
        coordinate pairs).

    Raises
    ------
    InputError
        The file is not a FeatureCollection of LineString features.
    """
    import pandas as pd

    path = Path(path)
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as err:
        raise InputError(f"not valid JSON: {err.msg}", path=path) from err
    if not isinstance(data, dict) or data.get("type") != "FeatureCollection":
        raise InputError("expected a GeoJSON FeatureCollection", path=path,
                         value=data.get("type") if isinstance(data, dict) else None)
    rows = []
    for k, feature in enumerate(data.get("features", [])):
        geom = (feature or {}).get("geometry") or {}
        if geom.get("type") != "LineString":
            raise InputError(f"feature {k} is not a LineString", path=path,
                             value=geom.get("type"))
        row = dict(feature.get("properties") or {})
        row["geometry"] = geom.get("coordinates")
        rows.append(row)
    return pd.DataFrame(rows)
