"""``congest sweep NETWORK``: price of anarchy and toll revenue across demand levels."""

from __future__ import annotations

import math
import sys
from pathlib import Path

import click

from ._common import (
    METHOD_HELP,
    _slug,
    check_paths,
    friendly_errors,
    load_network,
    network_options,
)

__all__ = ["command", "parse_values"]


def parse_values(text, name):
    """Numbers from ``"0.5,1,1.5"`` or an inclusive range ``"START:STOP:COUNT"``.

    Examples
    --------
    >>> parse_values("0.5:1.5:3", "--levels")
    [0.5, 1.0, 1.5]
    >>> parse_values("1, 2", "--levels")
    [1.0, 2.0]
    """
    from ..exceptions import InputError

    text = str(text).strip()
    try:
        if ":" in text:
            start, stop, count = text.split(":")
            count = int(count)
            if count < 1:
                raise ValueError
            if count == 1:
                return [float(start)]
            a, b = float(start), float(stop)
            return [a + (b - a) * i / (count - 1) for i in range(count)]
        return [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise InputError(f"{name} takes numbers 'a,b,c' or a range 'start:stop:count'",
                         value=text) from None


def _progress(total, enabled):
    """A rich progress bar and the sweep callback that drives it."""
    if not enabled:
        return None, None
    from rich.progress import (
        BarColumn,
        MofNCompleteColumn,
        Progress,
        TextColumn,
        TimeElapsedColumn,
        TimeRemainingColumn,
    )

    bar = Progress(TextColumn("sweep"), BarColumn(), MofNCompleteColumn(),
                   TextColumn("[red]{task.fields[failed]} failed"),
                   TextColumn("elapsed"), TimeElapsedColumn(),
                   TextColumn("left"), TimeRemainingColumn(),
                   transient=False, console=None)
    task = bar.add_task("sweep", total=total, failed=0)

    def callback(info):
        bar.update(task, completed=info.done + info.failed + info.reused, failed=info.failed)
        return False

    return bar, callback


#: Highest link volume/capacity of a sweep above which the summary adds a caution.
VC_CAUTION = 2.0


def summary_lines(result, net, out):
    rows = [("network", f"{net.name}: {net.n_zones} zones, {net.n_links} links, "
                        f"{net.total_demand:,.1f} trips at demand level 1"),
            ("points", f"{len(result.table)} done ({result.computed} computed, "
                       f"{result.reused} reused), {len(result.failed)} failed"),
            ("time", f"{result.wall_time:.1f} s")]
    peak = result.peak()
    table = result.table
    if peak is not None:
        where = f"demand level {peak['demand_scale']:.4g}"
        for key in ("toll_scale", "advice_share"):
            if key in peak:
                where += f", {key.replace('_', ' ')} {peak[key]:.4g}"
        rows.append(("peak price of anarchy", f"{peak['price_of_anarchy']:.4f} at {where}"))
        lo = table.loc[table["demand_scale"].idxmin()]
        hi = table.loc[table["demand_scale"].idxmax()]
        rows.append(("price of anarchy at ends",
                     f"{lo['price_of_anarchy']:.4f} at {lo['demand_scale']:.4g}, "
                     f"{hi['price_of_anarchy']:.4f} at {hi['demand_scale']:.4g}"))
        top = table.loc[table["first_best_revenue"].idxmax()]
        rows.append(("largest first-best revenue",
                     f"{top['first_best_revenue']:,.0f} {net.currency} at demand level "
                     f"{top['demand_scale']:.4g}"))
        if "ue_max_volume_capacity" in table:
            worst = table.loc[table["ue_max_volume_capacity"].idxmax()]
            # common practice: volume-delay curves are fitted near and below capacity;
            # far above it they extrapolate
            if worst["ue_max_volume_capacity"] > VC_CAUTION:
                rows.append(("caution", f"volume/capacity reaches "
                             f"{worst['ue_max_volume_capacity']:.1f} at demand level "
                             f"{worst['demand_scale']:.4g}; volume-delay curves are rarely "
                             f"fitted above about {VC_CAUTION:g}, so treat those rows as "
                             "indicative"))
        bad = int((~table["ue_converged"].astype(bool)).sum()
                  + (~table["so_converged"].astype(bool)).sum())
        if bad:
            rows.append(("not converged", f"{bad} solve(s) stopped before the gap target"))
    rows.append(("table", str(out)))
    return rows


@click.command("sweep")
@click.argument("network", type=click.Path(exists=True))
@click.option("--levels", default="0.25:2.5:10", show_default=True, metavar="VALUES",
              help="Demand multipliers: 'a,b,c' or an inclusive range 'start:stop:count'.")
@click.option("--toll-scales", metavar="VALUES", default=None,
              help="Also solve UE with these multiples of the first-best tolls "
                   "(0 = no toll, 1 = first best).")
@click.option("--advice-shares", metavar="VALUES", default=None,
              help="Also solve with these shares of drivers on free-flow advice.")
@click.option("--scenario", "scenarios", multiple=True, metavar="NAME",
              help="Add the columns of this scenario of 'congest compare' (repeatable), "
                   "e.g. free_flow_advice.")
@click.option("--method", default="auto", show_default=True, help=METHOD_HELP)
@click.option("--gap", type=click.FloatRange(min=0, min_open=True), default=1e-6,
              show_default=True, help="Target relative gap of every solve.")
@click.option("--max-iter", type=click.IntRange(min=1), default=None,
              help="Iteration cap of every solve.")
@click.option("--out", "out", type=click.Path(dir_okay=False), default=None,
              help="Table CSV. Default: <network>-sweep.csv in the current folder.")
@click.option("--store", "store", type=click.Path(file_okay=False), default=None,
              help="Folder of finished points, for resuming. Default: <out>.points")
@click.option("--scheduler", metavar="ADDRESS", default=None,
              help="Address of a running Dask scheduler (e.g. tcp://host:8786), or "
                   "'serial' to run in this process. Default: a local cluster with one "
                   "worker process per core.")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Worker processes of the local cluster (default: one per core).")
@click.option("--chunk", type=click.IntRange(min=1), default=2, show_default=True,
              help="Demand levels per warm-start chain.")
@click.option("--retries", type=click.IntRange(min=0), default=2, show_default=True,
              help="Reruns of a point whose worker died.")
@click.option("--worker-timeout", type=click.FloatRange(min=0, min_open=True), default=60.0,
              show_default=True, metavar="SECONDS",
              help="Seconds to wait while the cluster has no worker (all died, or none "
                   "joined a --scheduler); then the unfinished points are reported as "
                   "failed.")
@click.option("--progress/--no-progress", default=True, show_default=True,
              help="Show a progress bar.")
@network_options
@friendly_errors
def command(network, levels, toll_scales, advice_shares, scenarios, method, gap, max_iter,
            out, store, scheduler, workers, chunk, retries, worker_timeout, progress,
            **net_opts):
    """Sweep demand levels on NETWORK: UE, SO, price of anarchy, first-best revenue.

    Every finished point is saved in the store folder at once; run the same command
    again to resume an interrupted sweep. Writes the table as CSV and prints the peak
    price of anarchy and where it occurs.

    \b
    Examples:
      congest sweep networks/quillhaven
      congest sweep networks/quillhaven --levels 0.1:3:30 --toll-scales 0,0.5,1
      congest sweep big-city --scheduler tcp://scheduler-host:8786 --gap 1e-8
    """
    from ..exceptions import InputError
    from ..io import atomic_write
    from ..sweep import sweep

    net, layout = load_network(network, **net_opts)
    check_paths(net, layout)
    demand = parse_values(levels, "--levels")
    tolls = None if toll_scales is None else parse_values(toll_scales, "--toll-scales")
    shares = None if advice_shares is None else parse_values(advice_shares,
                                                             "--advice-shares")
    for name, values, high in (("--levels", demand, math.inf), ("--toll-scales", tolls,
                                math.inf), ("--advice-shares", shares, 1.0)):
        for v in values or ():
            if not (math.isfinite(v) and 0.0 <= v <= high):
                raise InputError(f"{name} values must lie in [0, {high:g}]", value=v)
    if out is None:
        out = Path(f"{_slug(Path(network).resolve().stem)}-sweep.csv")
    out = Path(out)
    store = Path(store) if store is not None else out.with_name(out.name + ".points")
    n_points = len(demand) * len(tolls or [0]) * len(shares or [0])
    bar, callback = _progress(n_points, progress and sys.stderr.isatty())
    kwargs = dict(toll_scales=tolls, advice_shares=shares, scenarios=scenarios,
                  method=method, tol=gap, max_iter=max_iter, store=store,
                  scheduler=scheduler, n_workers=workers, chunk_size=chunk, retries=retries,
                  worker_timeout=worker_timeout, callback=callback)
    try:
        if bar is not None:
            with bar:
                result = sweep(net, demand, **kwargs)
        else:
            result = sweep(net, demand, **kwargs)
    except KeyboardInterrupt:
        click.echo(f"interrupted: finished points are kept in {store}; run the same "
                   "command again to resume", err=True)
        sys.exit(130)
    with atomic_write(out, newline="") as fh:
        result.table.to_csv(fh, index=False, lineterminator="\n")
    rows = summary_lines(result, net, out)
    width = max(len(label) for label, _ in rows)
    for label, value in rows:
        click.echo(f"{label:<{width}}  {value}")
    for point, error in result.failed:
        where = ", ".join(f"{k} {v:g}" for k, v in point.as_dict().items())
        click.echo(f"failed: {where}: {error}", err=True)
    if result.failed:
        sys.exit(1)
