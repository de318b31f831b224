"""Reading and writing networks and results. Everything here validates at the edge.

Readers
    :func:`read_network` (detects the layout), :func:`read_gmns` (GMNS folder with
    congest's trip table), :func:`read_tables` (plain link and OD CSVs),
    :func:`from_networkx`.
Writers (all atomic)
    :func:`write_gmns`, :func:`write_link_results`, :func:`to_networkx`, and the
    :func:`~congest.io.atomic.atomic_write` helper for any other output.
"""

from .atomic import atomic_folder, atomic_write
from .geojson import (
    coordinate_note,
    is_lonlat,
    link_feature_collection,
    read_link_geojson,
    write_link_geojson,
)
from .gmns import read_gmns, write_gmns
from .graph import from_networkx, to_networkx
from .layout import Layout, detect_layout, read_network
from .results import link_results, write_link_results
from .tables import parse_zones, read_tables
from .tollplan import read_toll_plan

__all__ = [
    "read_network",
    "read_gmns",
    "read_tables",
    "from_networkx",
    "to_networkx",
    "write_gmns",
    "write_link_results",
    "link_results",
    "atomic_write",
    "atomic_folder",
    "detect_layout",
    "Layout",
    "parse_zones",
    "read_toll_plan",
    "link_feature_collection",
    "write_link_geojson",
    "read_link_geojson",
    "is_lonlat",
    "coordinate_note",
]
