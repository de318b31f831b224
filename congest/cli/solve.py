"""``congest solve NETWORK``: user equilibrium or system optimum, summary and link table."""

from __future__ import annotations

import json
import math
import sys
import time
from pathlib import Path

import click

from ._common import (
    GAP_DEFAULT_HELP,
    METHOD_HELP,
    _slug,
    check_paths,
    default_gap,
    friendly_errors,
    load_network,
    network_options,
)

__all__ = ["command"]

def _number(value, digits=1):
    return f"{value:,.{digits}f}"


def summary_lines(result, net, out):
    """The short summary ``congest solve`` prints, as (label, value) rows."""
    names = {"ue": "user equilibrium (UE)", "so": "system optimum (SO)"}
    rows = [
        ("network", f"{net.name}: {net.n_zones:,} zones, {net.n_nodes:,} nodes, "
                    f"{net.n_links:,} links, {_number(net.total_demand)} trips in "
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


def _progress_printer(every=1.0):
    """A solver callback that prints the iteration and gap at most every ``every`` s."""
    start = last = time.perf_counter()

    def report(k, flow, gap):
        nonlocal last
        now = time.perf_counter()
        if now - last >= every:
            last = now
            click.echo(f"  iteration {k}: relative gap {gap:.2e} after {now - start:.0f} s",
                       err=True)
        return False

    return report


@click.command("solve")
@click.argument("network", type=click.Path(exists=True))
@click.option("--objective", type=click.Choice(["ue", "so"]), default="ue", show_default=True,
              help="ue: every driver takes a quickest route (Wardrop user equilibrium); "
                   "so: total travel time is least (system optimum).")
@click.option("--method", default="auto", show_default=True, help=METHOD_HELP)
@click.option("--gap", "gap", type=click.FloatRange(min=0, min_open=True), default=None,
              help=f"Target relative gap (TSTT - SPTT) / TSTT. {GAP_DEFAULT_HELP}")
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
@click.option("--progress/--no-progress", default=None,
              help="Print the relative gap on standard error while solving (at most once "
                   "a second). Default: on when standard error is a terminal.")
@network_options
@friendly_errors
def command(network, objective, method, gap, max_iter, time_limit, out, as_json, strict,
            progress, **net_opts):
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
    gap = default_gap(method) if gap is None else gap
    if progress is None:
        progress = sys.stderr.isatty()
    result = solve(net, objective=objective, method=method, tol=gap, max_iter=max_iter,
                   time_limit=time_limit, callback=_progress_printer() if progress else None)
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

