"""``congest solve NETWORK``: user equilibrium or system optimum, summary and link table.

Also home of the network-loading options shared by commands that read a network
(:func:`network_options`, :func:`load_network`).
"""

from __future__ import annotations

import json
import math
import re
import sys
from pathlib import Path

import click

from ..equilibrium import METHODS
from ._common import friendly_errors

__all__ = ["command", "network_options", "load_network", "check_paths"]

#: Pairs listed in a "no path" message before it gives a count.
SHOWN_PAIRS = 8


def network_options(func):
    """Click options that say how to read a network (used by several commands)."""
    options = [
        click.option("--demand", "demand", type=click.Path(dir_okay=False),
                     help="OD table (origin,destination,volume) when NETWORK is a "
                          "link-table CSV or a folder without demand.csv."),
        click.option("--zones", "zones", metavar="IDS",
                     help="Plain tables: node ids that are zones, e.g. '1-38' or "
                          "'1-10,12'. Default: the nodes in the OD table."),
        click.option("--pass-through-zones/--no-pass-through-zones", "through",
                     default=None,
                     help="Whether paths may pass through zone centroids. Default: the "
                          "network's setting (plain tables: no)."),
        click.option("--toll-weight", "toll_weight", type=float, metavar="MIN",
                     help="Plain tables: minutes of generalized cost per unit of the toll "
                          "column (otherwise tolls are money, converted with the value of "
                          "time)."),
        click.option("--length-weight", "length_weight", type=float, metavar="MIN",
                     help="Plain tables: minutes of generalized cost per unit of length."),
        click.option("--length-unit", "length_unit", metavar="UNIT",
                     help="Plain tables: unit of the length column, for reports "
                          "(e.g. km, mi, ft)."),
        click.option("--period-hours", "period_hours", type=float, metavar="H",
                     help="Length of the analysis period the demand is for, hours."),
        click.option("--value-of-time", "value_of_time", type=float, metavar="MONEY",
                     help="Money per hour, used to turn tolls into minutes."),
        click.option("--demand-scale", "demand_scale", type=float, default=1.0,
                     show_default=True, metavar="F", help="Multiply every OD entry by F."),
    ]
    for option in reversed(options):
        func = option(func)
    return func


def load_network(network, *, demand=None, zones=None, through=None, toll_weight=None,
                 length_weight=None, length_unit=None, period_hours=None, value_of_time=None,
                 demand_scale=1.0, **_ignored):
    """Read NETWORK with the options of :func:`network_options`.

    Returns
    -------
    net : Network
    layout : congest.io.Layout
    """
    from ..exceptions import InputError
    from ..io import detect_layout, read_network

    layout = detect_layout(network, demand=demand)
    if layout.kind == "gmns" and demand is not None:
        raise InputError("--demand is for plain tables; a GMNS folder names its trip "
                         "table in scenario.json", path=layout.folder)
    net = read_network(network, demand=demand, zones=zones, through_centroids=through,
                       toll_weight=toll_weight, length_weight=length_weight,
                       length_unit=length_unit, period_hours=period_hours,
                       value_of_time=value_of_time)
    if demand_scale != 1.0:
        if not (demand_scale >= 0 and math.isfinite(demand_scale)):
            raise InputError("--demand-scale must be a non-negative number",
                             value=demand_scale)
        net = net.scale_demand(demand_scale)
    return net, layout


def check_paths(net, layout):
    """Raise a clear InputError when OD pairs with trips have no path."""
    import numpy as np

    from ..exceptions import InputError
    from ..paths import ShortestPaths

    _, od_cost = ShortestPaths(net).all_or_nothing(net.free_flow_time + 1.0)
    pairs = np.argwhere((net.demand > 0) & ~np.isfinite(od_cost))
    if len(pairs) == 0:
        return
    shown = ", ".join(f"{net.zone_ids[o]}->{net.zone_ids[d]}" for o, d in pairs[:SHOWN_PAIRS])
    more = f" and {len(pairs) - SHOWN_PAIRS} more" if len(pairs) > SHOWN_PAIRS else ""
    hint = ("check the links at these zones" if net.through_centroids else
            "check the links at these zones, or allow paths through zone centroids "
            "(--pass-through-zones) if the network expects it")
    raise InputError(f"{len(pairs)} OD pair(s) with trips have no path through the network "
                     f"(origin zone -> destination zone): {shown}{more}; {hint}",
                     path=layout.demand)


def _slug(text):
    return re.sub(r"[^a-z0-9]+", "-", str(text).lower()).strip("-") or "network"


def _number(value, digits=1):
    return f"{value:,.{digits}f}"


def summary_lines(result, net, out):
    """The short summary ``congest solve`` prints, as (label, value) rows."""
    names = {"ue": "user equilibrium (UE)", "so": "system optimum (SO)"}
    rows = [
        ("network", f"{net.name}: {net.n_zones} zones, {net.n_nodes} nodes, "
                    f"{net.n_links} links, {_number(net.total_demand)} trips in "
                    f"{net.period_hours:g} h"),
        ("objective", names[result.objective]),
        ("method", result.method),
        ("converged", "yes" if result.converged else f"NO ({result.message})"),
        ("relative gap", f"{result.relative_gap:.3e}"),
        ("iterations", str(result.iterations)),
        ("solve time", f"{result.wall_time:.2f} s"),
        ("total vehicle-hours", _number(result.vehicle_hours)),
    ]
    distance = result.vehicle_distance
    if not math.isnan(distance):
        unit = f" vehicle-{net.length_unit}" if net.length_unit else " (length units)"
        rows.append(("vehicle-distance", _number(distance) + unit))
    rows.append(("mean trip time", f"{result.mean_trip_time:.2f} min"))
    vc = result.volume_capacity
    finite = vc[~(vc != vc)]
    if finite.size:
        rows.append(("links over capacity", f"{int((finite > 1).sum())} "
                                            f"(highest volume/capacity {finite.max():.2f})"))
    if out is not None:
        rows.append(("link results", str(out)))
    return rows


@click.command("solve")
@click.argument("network", type=click.Path(exists=True))
@click.option("--objective", type=click.Choice(["ue", "so"]), default="ue", show_default=True,
              help="ue: every driver takes a quickest route (Wardrop user equilibrium); "
                   "so: total travel time is least (system optimum).")
@click.option("--method", default="auto", show_default=True,
              help="Solution method: auto (the library's default) or one of "
                   f"{', '.join(sorted(METHODS))}.")
@click.option("--gap", "gap", type=float, default=1e-4, show_default=True,
              help="Target relative gap (TSTT - SPTT) / TSTT.")
@click.option("--max-iter", type=click.IntRange(min=1), default=None,
              help="Iteration cap (method default if not given).")
@click.option("--time-limit", type=click.FloatRange(min=0, min_open=True), default=None,
              metavar="SECONDS", help="Stop after this many seconds.")
@click.option("--out", "out", type=click.Path(dir_okay=False), default=None,
              help="Link results CSV ('-' for standard output). Default: "
                   "<network>-<objective>-links.csv in the current folder.")
@click.option("--json", "as_json", is_flag=True,
              help="Print the summary as JSON instead of text.")
@click.option("--strict", is_flag=True,
              help="Exit with code 2 when the gap target was not reached.")
@network_options
@friendly_errors
def command(network, objective, method, gap, max_iter, time_limit, out, as_json, strict,
            **net_opts):
    """Solve user equilibrium or system optimum on NETWORK.

    NETWORK is a GMNS folder (node.csv, link.csv, trips.csv, scenario.json), a folder
    with links.csv and demand.csv, or a link-table CSV (with --demand). Prints a short
    summary and writes one row per link: volume, travel time, generalized cost,
    volume/capacity and more.

    \b
    Examples:
      congest solve networks/quillhaven
      congest solve networks/quillhaven --objective so --gap 1e-6 --out so.csv
      congest solve path/to/anaheim --zones 1-38 --method bfw
    """
    from .. import solve
    from ..exceptions import InputError
    from ..io import link_results, write_link_results

    net, layout = load_network(network, **net_opts)
    if net.total_demand == 0:
        where = "no trip table found" if layout.demand is None else f"{layout.demand}"
        click.echo(f"warning: the network has no trips ({where}); every volume is zero",
                   err=True)
    check_paths(net, layout)
    result = solve(net, objective=objective, method=method, tol=gap, max_iter=max_iter,
                   time_limit=time_limit)
    if out is None:
        out = Path(f"{_slug(Path(network).resolve().stem)}-{objective}-links.csv")
    stream = sys.stdout
    if str(out) == "-":
        click.echo(link_results(result).to_csv(index=False, lineterminator="\n"), nl=False)
        stream = sys.stderr
        out = None
    else:
        try:
            write_link_results(result, out)
        except OSError as err:
            raise InputError(f"cannot write link results: {err.strerror}", path=out) from err
    if as_json:
        data = result.summary()
        data.update(network=net.name, n_zones=net.n_zones, n_links=net.n_links,
                    total_demand=net.total_demand, length_unit=net.length_unit,
                    link_results=None if out is None else str(out))
        data = {k: (None if isinstance(v, float) and math.isnan(v) else v)
                for k, v in data.items()}
        click.echo(json.dumps(data, indent=2), file=stream)
    else:
        rows = summary_lines(result, net, out)
        width = max(len(label) for label, _ in rows)
        for label, value in rows:
            click.echo(f"{label:<{width}}  {value}", file=stream)
    if not result.converged:
        click.echo(f"warning: the gap target {gap:g} was not reached "
                   f"(relative gap {result.relative_gap:.3g} after {result.iterations} "
                   "iterations); raise --max-iter or --time-limit", err=True)
        if strict:
            sys.exit(2)

