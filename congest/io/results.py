"""Writing solver results as tables."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..network import COST_KINDS
from .atomic import atomic_write

__all__ = ["link_results", "write_link_results"]

_KIND_NAMES = {v: k for k, v in COST_KINDS.items()}


def link_results(result) -> pd.DataFrame:
    """One row per link with its volume, times and costs at the solution.

    Parameters
    ----------
    result : Equilibrium

    Returns
    -------
    pandas.DataFrame
        Columns ``link_id, from_node, to_node, volume, travel_time, cost,
        free_flow_time, delay, capacity, volume_capacity, vehicle_hours`` and, when the
        network has them, ``length``, ``speed`` (length units per hour), ``toll`` and the
        link's ``link_type`` / ``facility_type`` / ``name`` columns. Times are minutes
        per vehicle, ``capacity`` vehicles per hour, ``volume`` trips in the period,
        ``cost`` the generalized cost (travel time plus constant terms).
    """
    net = result.network
    flow = np.asarray(result.flow)
    time = np.asarray(result.time)
    out = {
        "link_id": net.link_ids,
        "from_node": net.node_ids[net.tail],
        "to_node": net.node_ids[net.head],
        "volume": flow,
        "travel_time": time,
        "cost": np.asarray(result.cost),
        "free_flow_time": net.free_flow_time,
        "delay": time - net.free_flow_time,
        "capacity": net.capacity,
        "volume_capacity": result.volume_capacity,
        "vehicle_hours": flow * time / 60.0,
    }
    if not np.isnan(net.length).all():
        out["length"] = net.length
        with np.errstate(divide="ignore", invalid="ignore"):
            out["speed"] = np.where(time > 0, net.length / (time / 60.0), np.nan)
    if (net.toll != 0).any():
        out["toll"] = net.toll
    for key in ("link_type", "facility_type", "name"):
        if key in net.link_attrs:
            out[key] = net.link_attrs[key]
    return pd.DataFrame(out)


def write_link_results(result, path):
    """Write :func:`link_results` as CSV, atomically.

    Parameters
    ----------
    result : Equilibrium
    path : path-like
        Output file; parent folders are created. Numbers keep full precision.

    Returns
    -------
    pathlib.Path
    """
    from pathlib import Path

    frame = link_results(result)
    with atomic_write(path, newline="") as fh:
        frame.to_csv(fh, index=False, na_rep="", lineterminator="\n")
    return Path(path)
