"""Plain link and OD tables (provisional minimal reader; full validation to follow)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from ..network import Network


def read_tables(links_path, demand_path, *, zones=None, through_centroids=False,
                toll_weight=0.0, length_weight=0.0, name=None, **network_options) -> Network:
    """Network from a link CSV and an OD CSV.

    The link table needs ``from_node, to_node, capacity, free_flow_time`` and may have
    ``alpha, beta, toll, length``; the OD table ``origin, destination, volume``.
    ``zones`` lists the node ids that are zones (default: every node in the OD table).
    ``toll_weight`` and ``length_weight`` (minutes per unit) put a constant
    generalized-cost term ``toll_weight * toll + length_weight * length`` on each link.
    """
    links = pd.read_csv(links_path)
    od = pd.read_csv(demand_path)
    ends = np.concatenate([links["from_node"].to_numpy(), links["to_node"].to_numpy()])
    if zones is None:
        zones = np.unique(np.concatenate([od["origin"].to_numpy(), od["destination"].to_numpy()]))
    zones = np.asarray(list(zones), dtype=np.int64)
    node_ids = np.unique(np.concatenate([ends.astype(np.int64), zones]))
    index = {int(v): i for i, v in enumerate(node_ids)}
    zindex = {int(z): i for i, z in enumerate(zones)}
    demand = np.zeros((zones.size, zones.size))
    np.add.at(demand, (od["origin"].map(zindex).to_numpy(), od["destination"].map(zindex).to_numpy()),
              od["volume"].to_numpy(dtype=float))
    toll = links["toll"].to_numpy(float) if "toll" in links else 0.0
    length = links["length"].to_numpy(float) if "length" in links else np.nan
    fixed = toll_weight * np.asarray(toll) + (length_weight * np.nan_to_num(length)
                                              if length_weight else 0.0)
    return Network(
        node_ids=node_ids,
        tail=links["from_node"].map(index).to_numpy(),
        head=links["to_node"].map(index).to_numpy(),
        capacity=links["capacity"].to_numpy(float),
        free_flow_time=links["free_flow_time"].to_numpy(float),
        alpha=links["alpha"].to_numpy(float) if "alpha" in links else 0.15,
        beta=links["beta"].to_numpy(float) if "beta" in links else 4.0,
        fixed_cost=fixed, length=length,
        zone_ids=zones, zone_nodes=[index[int(z)] for z in zones], demand=demand,
        through_centroids=through_centroids, name=name or Path(links_path).parent.name,
        **network_options,
    )
