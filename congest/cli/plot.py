"""``congest plot KIND INPUT``: one map or chart as PNG, SVG or PDF.

Maps read a network (and optionally link result tables written by ``congest solve`` or
``congest compare``; without them the equilibrium is solved here). Charts of tables read
the CSV written by ``congest sweep``, ``congest learn`` or ``congest compare``. Plotting
only reads its inputs; it never changes a result file.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import click

from ._common import METHOD_HELP, check_paths, friendly_errors, load_network, network_options

__all__ = ["command", "KINDS", "read_link_column"]

#: Kind -> what INPUT is.
KINDS = {
    "flow": "network",
    "difference": "network",
    "toll": "network",
    "select-link": "network",
    "convergence": "network",
    "sweep": "table",
    "learning": "table",
    "scenarios": "table",
}

#: Accepted names of link-table columns, by meaning, in order of preference.
VOLUME_COLUMNS = ("volume", "flow")
TOLL_COLUMNS = ("toll_money", "toll")


def read_link_column(path, net, names):
    """One column of a link results CSV, in the network's link order.

    Rows are matched by ``link_id`` (or by ``from_node``/``to_node`` when there is no
    ``link_id``); every link of the network must appear.

    Raises
    ------
    InputError
        Missing column or link, or a value that is not a number.
    """
    import numpy as np
    import pandas as pd

    from ..exceptions import InputError

    path = Path(path)
    try:
        frame = pd.read_csv(path)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as err:
        raise InputError(f"cannot read link results: {err}", path=path) from err
    column = next((c for c in names if c in frame.columns), None)
    if column is None:
        raise InputError(f"no column named {' or '.join(repr(n) for n in names)}",
                         path=path, row=1)
    values = pd.to_numeric(frame[column], errors="coerce")
    if values.isna().any():
        i = int(np.flatnonzero(values.isna().to_numpy())[0])
        raise InputError("not a number", path=path, row=i + 2, column=column,
                         value=frame[column].iloc[i])
    if "link_id" in frame.columns:
        keys = [int(v) for v in frame["link_id"]]
        wanted = [int(v) for v in net.link_ids]
        what = "link id"
    elif {"from_node", "to_node"} <= set(frame.columns):
        keys = list(zip(frame["from_node"].astype(int), frame["to_node"].astype(int),
                        strict=True))
        wanted = list(zip(net.node_ids[net.tail].tolist(), net.node_ids[net.head].tolist(),
                          strict=True))
        what = "link (from_node, to_node)"
    else:
        raise InputError("link results need a link_id column (or from_node and to_node)",
                         path=path, row=1)
    position = {k: i for i, k in enumerate(keys)}
    missing = [k for k in wanted if k not in position]
    if missing:
        raise InputError(f"no row for {what} {missing[0]} ({len(missing)} link(s) missing)",
                         path=path)
    return values.to_numpy(dtype=float)[[position[k] for k in wanted]]


def _read_table(path):
    import pandas as pd

    from ..exceptions import InputError

    try:
        return pd.read_csv(path)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as err:
        raise InputError(f"cannot read table: {err}", path=path) from err


def _solve(net, objective, gap, method, **kw):
    from .. import solve
    from ..exceptions import ConvergenceWarning

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return solve(net, objective=objective, tol=gap, method=method, **kw)


def _scenario_name(path):
    return Path(path).stem.replace("_", " ").replace("-", " ")


def _network_figure(kind, net, *, results, objective, gap, method, links, methods, title):
    from .. import plotting

    if kind == "flow":
        if results:
            flow = read_link_column(results[0], net, VOLUME_COLUMNS)
            return plotting.flow_map(net, flow, scenario=title or _scenario_name(results[0])), \
                flow
        eq = _solve(net, objective, gap, method)
        return plotting.flow_map(net, eq, scenario=title), eq
    if kind == "difference":
        if len(results) not in (0, 2):
            raise click.UsageError("difference takes two --results tables (A then B) or none "
                                   "(then UE against SO)")
        if results:
            a, b = (read_link_column(p, net, VOLUME_COLUMNS) for p in results)
            labels = tuple(_scenario_name(p) for p in results)
            return plotting.difference_map(net, a, b, labels=labels), None
        ue = _solve(net, "ue", gap, method)
        so = _solve(net, "so", gap, method)
        return plotting.difference_map(net, ue, so, labels=("UE", "SO")), None
    if kind == "toll":
        if results:
            toll = read_link_column(results[0], net, TOLL_COLUMNS)
            flow = read_link_column(results[0], net, VOLUME_COLUMNS)
            return plotting.toll_map(net, toll, flow=flow,
                                     scenario=title or _scenario_name(results[0])), None
        if (net.toll > 0).any():
            eq = _solve(net, "ue", gap, method)
            return plotting.toll_map(net, net.toll, flow=eq,
                                     scenario=title or "tolls of the network"), None
        from ..pricing import first_best

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            fb = first_best(net, tol=gap, method=method)
        return plotting.toll_map(net, fb.tolls_money, flow=fb.tolled_ue,
                                 scenario=title or "marginal-cost tolls"), None
    if kind == "select-link":
        if not links:
            raise click.UsageError("select-link needs --link LINK_ID (one or more)")
        from ..exceptions import InputError, NetworkError

        try:
            index = [net.link_index(i) for i in links]
        except NetworkError as err:
            raise InputError(str(err), column="--link") from err
        eq = _solve(net, objective, gap, "gp" if method == "auto" else method)
        sel = plotting.select_link_flow(eq, index)
        return plotting.select_link_map(net, sel, index, label=title), None
    if kind == "convergence":
        names = [m.strip() for m in methods.split(",") if m.strip()]
        runs = {f"{m} ({objective.upper()})": _solve(net, objective, gap, m) for m in names}
        return plotting.convergence_chart(runs, tol=gap,
                                          title=title or f"{net.name}: convergence"), None
    raise AssertionError(kind)


def _table_figure(kind, path, *, currency, title, shares):
    from .. import plotting

    table = _read_table(path)
    if kind == "sweep":
        return plotting.sweep_chart(table, currency=currency or "money",
                                    title=title or "Demand sweep")
    if kind == "learning":
        return plotting.learning_chart(table, title=title or "Day-to-day learning",
                                       route_shares=_read_table(shares) if shares else None)
    if kind == "scenarios":
        if "scenario" in table.columns:
            table = table.set_index("scenario")
        return plotting.scenario_chart(table, currency=currency,
                                       title=title or "Scenarios compared")
    raise AssertionError(kind)


@click.command("plot")
@click.argument("kind", type=click.Choice(list(KINDS)))
@click.argument("input_path", metavar="INPUT", type=click.Path(exists=True))
@click.option("--out", "out", type=click.Path(dir_okay=False), default=None,
              help="Picture file: .png, .svg or .pdf. Default: <input>-<kind>.png here.")
@click.option("--results", "results", multiple=True, type=click.Path(exists=True,
              dir_okay=False), help="Link results CSV (from 'congest solve' or the links/ "
              "folder of 'congest compare'); give two for 'difference'. Without it the "
              "equilibrium is solved.")
@click.option("--objective", type=click.Choice(["ue", "so"]), default="ue", show_default=True,
              help="Equilibrium to solve when no --results are given.")
@click.option("--gap", type=click.FloatRange(min=0, min_open=True), default=1e-5,
              show_default=True, help="Target relative gap of solves made here.")
@click.option("--method", default="auto", show_default=True, help=METHOD_HELP)
@click.option("--link", "links", multiple=True, type=int, metavar="LINK_ID",
              help="select-link: id of a link whose trips to map; repeat the option for "
                   "several (--link 157 --link 158).")
@click.option("--methods", default="fw,bfw,gp", show_default=True,
              help="convergence: comma-separated methods to compare.")
@click.option("--currency", default=None,
              help="sweep, scenarios: currency label of the revenue.")
@click.option("--shares", "shares", type=click.Path(exists=True, dir_okay=False),
              default=None, help="learning: route-share CSV written by 'congest learn "
                                 "--track'.")
@click.option("--title", default=None, help="Scenario name or title shown on the picture.")
@click.option("--dpi", type=click.IntRange(min=50, max=600), default=150, show_default=True,
              help="Resolution of PNG output.")
@click.option("--geojson", "geojson", type=click.Path(dir_okay=False), default=None,
              help="flow: also write the link results as GeoJSON to this file.")
@network_options
@friendly_errors
def command(kind, input_path, out, results, objective, gap, method, links, methods, currency,
            shares, title, dpi, geojson, **net_opts):
    """Draw one map or chart.

    \b
    KIND         INPUT     draws
    flow         network   volumes (width) and volume/capacity (colour)
    difference   network   change in volume between two scenarios
    toll         network   tolled links and amounts
    select-link  network   where the trips using --link travel
    convergence  network   relative gap against iteration and time per method
    sweep        table     price of anarchy and toll revenue against demand
    learning     table     day-to-day travel time, gap and route shares
    scenarios    table     the comparison table as grouped bars

    \b
    Examples:
      congest plot flow networks/quillhaven --out ue.png
      congest plot flow networks/quillhaven --results so-links.csv --out so.svg
      congest plot difference networks/quillhaven --out ue-vs-so.pdf
      congest plot select-link networks/quillhaven --link 157
      congest plot sweep sweep.csv --currency crowns
      congest plot learning days.csv --shares days-shares.csv
    """
    import matplotlib

    matplotlib.use("Agg")
    from ..exceptions import InputError
    from ..plotting import FORMATS, save_figure

    source = Path(input_path)
    out = Path(out) if out is not None else Path(f"{source.resolve().stem}-{kind}.png")
    if out.suffix.lower() not in FORMATS:
        raise InputError(f"unknown picture format {out.suffix!r}; use .png, .svg or .pdf",
                         column="--out", value=str(out))
    if geojson and kind != "flow":
        raise click.UsageError("--geojson goes with 'flow'")
    if KINDS[kind] == "network":
        net, layout = load_network(input_path, **net_opts)
        if not results:
            check_paths(net, layout)
        from rich.console import Console

        with Console(stderr=True).status(f"drawing the {kind} picture of {net.name}"
                                         + ("" if results else " (solving first)")):
            fig, flow = _network_figure(kind, net, results=results, objective=objective,
                                        gap=gap, method=method, links=links, methods=methods,
                                        title=title)
        if geojson:
            from ..io.geojson import write_link_geojson

            data = flow if hasattr(flow, "flow") else {"volume": flow}
            fc = write_link_geojson(geojson, net, data)
            click.echo(f"wrote {geojson}")
            if "coordinate_note" in fc:
                click.echo(f"note: {fc['coordinate_note']}", err=True)
    else:
        fig = _table_figure(kind, input_path, currency=currency, title=title, shares=shares)
    try:
        save_figure(fig, out, dpi=dpi)
    except OSError as err:
        raise InputError(f"cannot write the picture: {err.strerror}", path=out) from err
    click.echo(f"wrote {out}")
