"""Shared pieces of the CLI: error mapping and the network-loading options."""

from __future__ import annotations

import functools
import math
import re
import sys
import warnings

import click

from ..exceptions import CongestError, ConvergenceWarning

#: ``--help`` text of every ``--method`` option.
METHOD_HELP = ("Equilibrium method: auto (gradient projection, gp), gp, or a Frank-Wolfe "
               "variant (msa, fw, cfw, bfw).")

#: Link-based methods: they stall long before a relative gap of 1e-10 (the same tuple as
#: ``congest.equilibrium.LINK_BASED``, repeated so ``--help`` imports no solver).
LINK_BASED = ("msa", "fw", "cfw", "bfw")

#: How ``default_gap`` reads in ``--help``.
GAP_DEFAULT_HELP = ("Default: 1e-10, or 1e-5 with a link-based method (msa, fw, cfw, bfw), "
                    "which stall before tighter gaps.")


def default_gap(method):
    """Gap target used when none is given: tight unless the method is link-based.

    The library's rule (:func:`congest.equilibrium.default_tol`), so one network gives
    one set of numbers whichever command, or Python call, computed them.
    """
    from ..equilibrium import default_tol

    return default_tol(method)


def friendly_errors(func):
    """Turn congest's errors into a one-line message and exit code 1 (no traceback)."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", ConvergenceWarning)
                return func(*args, **kwargs)
        except CongestError as err:
            click.echo(f"error: {err}", err=True)
            sys.exit(1)
        except (FileNotFoundError, PermissionError, IsADirectoryError) as err:
            click.echo(f"error: {err}", err=True)
            sys.exit(1)

    return wrapper


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
    from ..exceptions import InputError
    from ..paths import ShortestPaths

    pairs = ShortestPaths(net).unreachable_pairs()
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


def solver_options(func):
    """``--gap``, ``--method`` and ``--max-iter`` of commands that run many solves."""
    options = [
        click.option("--gap", type=float, default=None,
                     help=f"Target relative gap of every equilibrium solve. "
                          f"{GAP_DEFAULT_HELP}"),
        click.option("--method", default="auto", show_default=True, help=METHOD_HELP),
        click.option("--max-iter", type=click.IntRange(min=1), default=None,
                     help="Iteration cap of each solve."),
    ]
    for option in reversed(options):
        func = option(func)
    return func
