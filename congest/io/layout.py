"""Recognising a network's layout on disk and reading it with the right reader."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from ..exceptions import InputError
from ..network import Network

__all__ = ["Layout", "detect_layout", "read_network"]

_TABLE_OPTIONS = {"zones", "through_centroids", "toll_weight", "length_weight", "name",
                  "period_hours", "value_of_time", "currency", "length_unit", "crs"}
_GMNS_OPTIONS = {"name", "trips_file", "period_hours", "value_of_time", "currency",
                 "through_centroids", "cost_kind", "alpha", "beta"}


@dataclass(frozen=True)
class Layout:
    """Where a network's files are.

    Attributes
    ----------
    kind : {"gmns", "tables"}
    links : Path
        ``link.csv`` (GMNS) or the link table.
    demand : Path or None
        The trip table / OD table (None when a GMNS folder has none).
    nodes : Path or None
        ``node.csv`` (GMNS only).
    folder : Path
    """

    kind: str
    links: Path
    demand: Path | None
    nodes: Path | None
    folder: Path


def detect_layout(path, *, demand=None, trips_file=None) -> Layout:
    """Find the files of the network at ``path``.

    ``path`` may be a GMNS folder (``node.csv`` + ``link.csv``), a folder with plain
    ``links.csv`` + ``demand.csv``, or a link-table CSV file (the OD table is then
    ``demand`` or ``demand.csv`` beside it).
    """
    path = Path(path)
    if path.is_dir():
        if (path / "link.csv").is_file() and (path / "node.csv").is_file():
            from .gmns import SETTINGS_FILE, TRIPS_FILE

            name = trips_file
            if name is None:
                name = TRIPS_FILE
                settings = path / SETTINGS_FILE
                if settings.is_file():
                    import json

                    try:
                        name = json.loads(settings.read_text()).get("trips_file", name)
                    except (ValueError, AttributeError):
                        pass  # read_gmns reports a bad settings file properly
            trips = Path(name) if Path(name).is_absolute() else path / name
            return Layout("gmns", path / "link.csv", trips if trips.is_file() else None,
                          path / "node.csv", path)
        links = path / "links.csv"
        od = Path(demand) if demand is not None else path / "demand.csv"
        if links.is_file() and od.is_file():
            return Layout("tables", links, od, None, path)
        found = sorted(p.name for p in path.iterdir() if p.suffix == ".csv")
        raise InputError("not a network folder: expected node.csv + link.csv (GMNS) or "
                         f"links.csv + demand.csv; found {', '.join(found) or 'no CSV files'}",
                         path=path)
    if path.is_file():
        od = Path(demand) if demand is not None else path.parent / "demand.csv"
        if not od.is_file():
            raise InputError("no OD table: give one (demand=..., or --demand on the command "
                             "line) or put demand.csv beside the link table", path=od)
        return Layout("tables", path, od, None, path.parent)
    raise InputError("network not found (expected a folder or a link-table CSV file)",
                     path=path)


def read_network(path, *, demand=None, **options) -> Network:
    """Read a network in whatever supported layout ``path`` holds.

    Parameters
    ----------
    path : path-like
        A GMNS folder (see :func:`~congest.io.read_gmns`), a folder with ``links.csv``
        and ``demand.csv``, or a link-table CSV (see :func:`~congest.io.read_tables`).
    demand : path-like, optional
        OD table for the plain-table layouts.
    **options
        Passed to the reader. Plain tables: ``zones``, ``through_centroids``,
        ``toll_weight``, ``length_weight``, ``name``, ``period_hours``,
        ``value_of_time``, ... GMNS: ``name``, ``trips_file``, ``period_hours``,
        ``value_of_time``, ``currency``, ``through_centroids``, ``cost_kind``, ``alpha``,
        ``beta``. ``None`` values mean "not given".

    Returns
    -------
    Network

    Raises
    ------
    InputError
        Unknown layout, an option the layout does not take, or bad content.
    """
    options = {k: v for k, v in options.items() if v is not None}
    layout = detect_layout(path, demand=demand, trips_file=options.get("trips_file"))
    if layout.kind == "gmns":
        from .gmns import read_gmns

        bad = sorted(set(options) - _GMNS_OPTIONS)
        if bad:
            raise InputError(f"option(s) {', '.join(bad)} do not apply to a GMNS folder "
                             "(zones are the nodes with a zone_id in node.csv; tolls are "
                             "money in link.csv's toll column)", path=layout.folder)
        return read_gmns(layout.folder, **options)
    from .tables import read_tables

    bad = sorted(set(options) - _TABLE_OPTIONS)
    if bad:
        raise InputError(f"option(s) {', '.join(bad)} do not apply to plain tables",
                         path=layout.links)
    return read_tables(layout.links, layout.demand, **options)
