"""``congest plot KIND INPUT``: one map or chart as PNG, SVG or PDF.

Maps read a network (and optionally link result tables written by ``congest solve`` or
``congest compare``; without them the equilibrium is solved here, to the gap target of
``congest solve``). Charts of tables read the CSV written by ``congest sweep``,
``congest learn`` or ``congest compare`` (or the JSON of ``congest compare``); a table
of the wrong kind is refused with a message naming the columns it lacks and the command
that writes the right one. Plotting only reads its inputs; it never changes a result
file.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import click

from ._common import (
    GAP_DEFAULT_HELP,
    METHOD_HELP,
    check_paths,
    default_gap,
    friendly_errors,
    load_network,
    network_options,
)

__all__ = ["command", "KINDS", "TABLES", "CONVERGENCE_GAP", "read_link_column"]

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

#: Tables the charts read: what the table is, the columns it must have (a tuple: one
#: of them), who writes it. "shares" is the --shares table of 'learning'; a scenario
#: comparison needs any one of the measures of
#: :data:`congest.plotting._charts.SCENARIO_METRICS`.
TABLES = {
    "sweep": ("a demand sweep table", ("demand_scale", "price_of_anarchy"),
              "'congest sweep' writes one"),
    "learning": ("a per-day learning table",
                 ("day", ("total_vehicle_hours", "total_travel_time"), "relative_gap"),
                 "'congest learn' writes one"),
    "shares": ("a route-share table", ("day", "route", "share"),
               "'congest learn --track' writes one"),
    "scenarios": ("a scenario comparison", (),
                  "'congest compare' writes one, as scenarios.csv and scenarios.json"),
}

#: Columns of each table that the charts compute with, when present.
_NUMBERS = {
    "sweep": ("demand_scale", "price_of_anarchy", "first_best_revenue", "tolled_revenue",
              "toll_scale", "advice_share"),
    "learning": ("day", "total_vehicle_hours", "total_travel_time", "relative_gap",
                 "replication"),
    "shares": ("day", "share", "replication"),
    "scenarios": ("revenue_money",),  # and the measures
}

#: Default gap target of the convergence chart, for every method it compares: the
#: tight default of the other commands (1e-10) is out of reach of Frank-Wolfe methods,
#: which would all run to their iteration cap; at 1e-6 the methods part ways clearly
#: and the chart takes seconds.
CONVERGENCE_GAP = 1e-6
_CONVERGENCE_GAP_TEXT = f"{CONVERGENCE_GAP:.0e}".replace("e-0", "e-")  # "1e-6"

#: Accepted names of link-table columns, by meaning, in order of preference.
VOLUME_COLUMNS = ("volume", "flow")
TOLL_COLUMNS = ("toll_money", "toll")
TIME_COLUMNS = ("travel_time",)

_RESULTS_HINT = ("link results come from 'congest solve --out' or the links/ folder of "
                 "'congest compare'")


def read_link_column(path, net, names, *, required=True):
    """One column of a link results CSV, in the network's link order.

    Rows are matched by ``link_id`` (or by ``from_node``/``to_node`` when there is no
    ``link_id``); every link of the network must appear. The column is the first of
    ``names`` the table has; without any, None when not ``required``.

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
        if not required:
            return None
        raise InputError(f"no column named {' or '.join(repr(n) for n in names)}; "
                         f"{_RESULTS_HINT}", path=path, row=1)
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


def _is_link_table(columns):
    return "link_id" in columns or {"from_node", "to_node"} <= set(columns)


def _has(columns, needed):
    """Columns of ``needed`` missing from ``columns``; a tuple entry is alternatives."""
    return [c for c in needed
            if not (set(c) & set(columns) if isinstance(c, tuple) else c in columns)]


def _names(needed):
    return ", ".join(" or ".join(repr(n) for n in c) if isinstance(c, tuple) else repr(c)
                     for c in needed)


#: How to draw each kind of table, for messages about a table given to the wrong chart.
_HOW = {
    "links": "give link results to a map with --results, or draw a network with "
             "'congest plot flow'",
    "sweep": "draw it with 'congest plot sweep'",
    "learning": "draw it with 'congest plot learning'",
    "shares": "give it to 'congest plot learning' with --shares, and the per-day table "
              "of 'congest learn' as INPUT",
    "scenarios": "draw it with 'congest plot scenarios'",
}


def _kind_of(columns):
    """The kind of table these columns make ("links", a key of TABLES), or None."""
    from ..plotting._charts import SCENARIO_METRICS

    if _is_link_table(columns):
        return "links"
    for kind in ("sweep", "learning", "shares"):
        if not _has(columns, TABLES[kind][1]):
            return kind
    if set(columns) & set(SCENARIO_METRICS):
        return "scenarios"
    return None


def _looks_like(kind):
    what = "a link table" if kind == "links" else TABLES[kind][0]
    return f"it looks like {what}: {_HOW[kind]}"


def _read_comparison_json(path):
    """The scenario rows of the JSON that 'congest compare' writes, as a table."""
    import json

    import pandas as pd

    from ..exceptions import InputError

    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except UnicodeDecodeError as err:
        raise InputError("cannot read table: not a text file", path=path) from err
    except json.JSONDecodeError as err:
        raise InputError(f"not valid JSON: {err.msg} at line {err.lineno}, column "
                         f"{err.colno}", path=path) from err
    rows = data.get("scenarios") if isinstance(data, dict) else None
    if not (isinstance(rows, list) and rows and all(isinstance(r, dict) for r in rows)):
        raise InputError("not a table congest writes: the JSON tables read here are "
                         "those of 'congest compare', with a 'scenarios' list", path=path)
    frame = pd.DataFrame(rows)
    for key in ("currency", "length_unit"):
        if isinstance(data.get(key), str):
            frame.attrs[key] = data[key]
    return frame


def _read_table(path):
    """A table CSV, or the JSON of 'congest compare'."""
    import pandas as pd

    from ..exceptions import InputError

    path = Path(path)
    if path.suffix.lower() == ".json":
        return _read_comparison_json(path)
    try:
        return pd.read_csv(path)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as err:
        raise InputError(f"cannot read table: {err}", path=path) from err


def _check_table(kind, table, path):
    """Raise a one-line InputError unless ``table`` is a table of ``kind``.

    Also turns the columns the chart computes with into numbers, or names the first
    cell that is not one.
    """
    from ..exceptions import InputError
    from ..plotting._charts import SCENARIO_METRICS

    what, needed, writer = TABLES[kind]
    columns = [str(c) for c in table.columns]
    other = _kind_of(columns)
    measures = [c for c in SCENARIO_METRICS if c in columns] if kind == "scenarios" else []
    if kind == "scenarios" and other not in (None, "scenarios"):
        # a link, sweep or learning table has measures of its own: not a comparison
        problem = "its columns are those of another table"
    elif kind == "scenarios" and not measures:
        first, second = list(SCENARIO_METRICS)[:2]
        problem = f"no measure column such as {first!r} or {second!r}"
    else:
        missing = _has(columns, needed)
        problem = (f"missing column{'s' if len(missing) > 1 else ''} {_names(missing)}"
                   if missing else None)
    if problem is not None:
        hint = f"; {_looks_like(other)}" if other not in (None, kind) else ""
        raise InputError(f"not {what}: {problem} ({writer}){hint}", path=path,
                         row=None if _is_json(path) else 1)
    if table.empty:
        raise InputError(f"{what} without rows", path=path)
    _to_numbers(table, [c for c in (*measures, *_NUMBERS[kind]) if c in columns], path)


def _is_json(path):
    return Path(path).suffix.lower() == ".json"


def _to_numbers(table, columns, path):
    """Make ``columns`` of ``table`` numbers (in place); name the first cell that is not."""
    import numpy as np
    import pandas as pd

    from ..exceptions import InputError

    for column in columns:
        raw = table[column]
        values = pd.to_numeric(raw, errors="coerce")
        bad = (values.isna() & raw.notna()).to_numpy()
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            if _is_json(path):
                raise InputError(f"not a number in scenario {i + 1} of the 'scenarios' "
                                 "list", path=path, column=column, value=raw.iloc[i])
            raise InputError("not a number", path=path, row=i + 2, column=column,
                             value=raw.iloc[i])
        table[column] = values


def _refuse_table(kind, path):
    """A table CSV or compare's JSON given where a network belongs: say what it is."""
    import pandas as pd

    from ..exceptions import CongestError, InputError

    path = Path(path)
    if not path.is_file() or path.suffix.lower() not in (".csv", ".json"):
        return
    try:
        columns = (_read_table(path) if _is_json(path) else pd.read_csv(path, nrows=0)).columns
    except (CongestError, ValueError, UnicodeDecodeError):
        return  # not a table of congest's: the network reader says what is wrong
    other = _kind_of([str(c) for c in columns])
    if other not in (None, "links"):
        raise InputError(f"not a network: 'congest plot {kind}' reads a network (a folder "
                         f"or a link table); {_looks_like(other)}", path=path)


def _solve(net, objective, gap, method, **kw):
    from .. import solve
    from ..exceptions import ConvergenceWarning

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return solve(net, objective=objective, tol=gap, method=method, **kw)


def _results_label(path):
    """Name of a link results table on a picture.

    A table of the links/ folder of 'congest compare' takes its scenario's label from
    the comparison beside the folder ("marginal-cost tolls"); any other, its file name.
    """
    import pandas as pd

    path = Path(path)
    comparison = path.parent.parent / "scenarios.csv"
    if path.parent.name == "links" and comparison.is_file():
        try:
            frame = pd.read_csv(comparison, usecols=["scenario", "label"], dtype=str)
        except (ValueError, pd.errors.ParserError, UnicodeDecodeError):
            frame = None
        if frame is not None:
            match = frame.loc[frame["scenario"] == path.stem, "label"].dropna()
            if len(match):
                return str(match.iloc[0])
    return path.name


def _one_results(kind, results):
    if len(results) > 1:
        extra = " (to compare two, use 'congest plot difference')" if kind == "flow" else ""
        raise click.UsageError(f"{kind} draws one --results table, got {len(results)}"
                               f"{extra}")
    return results[0]


def _network_figure(kind, net, *, results, objective, gap, method, links, methods, title):
    from .. import plotting

    if kind == "flow":
        if results:
            path = _one_results(kind, results)
            flow = read_link_column(path, net, VOLUME_COLUMNS)
            time = read_link_column(path, net, TIME_COLUMNS, required=False)
            return plotting.flow_map(net, flow, scenario=title or _results_label(path),
                                     travel_time=time), flow
        eq = _solve(net, objective, gap, method)
        return plotting.flow_map(net, eq, scenario=title), eq
    if kind == "difference":
        if len(results) not in (0, 2):
            raise click.UsageError("difference takes two --results tables (A then B) or none "
                                   "(then UE against SO)")
        if results:
            a, b = (read_link_column(p, net, VOLUME_COLUMNS) for p in results)
            times = [read_link_column(p, net, TIME_COLUMNS, required=False) for p in results]
            labels = tuple(_results_label(p) for p in results)
            return plotting.difference_map(
                net, a, b, labels=labels, title=title,
                travel_time=None if any(t is None for t in times) else times), None
        ue = _solve(net, "ue", gap, method)
        so = _solve(net, "so", gap, method)
        return plotting.difference_map(net, ue, so, labels=("UE", "SO"), title=title), None
    if kind == "toll":
        if results:
            path = _one_results(kind, results)
            toll = read_link_column(path, net, TOLL_COLUMNS)
            flow = read_link_column(path, net, VOLUME_COLUMNS)
            return plotting.toll_map(net, toll, flow=flow,
                                     scenario=title or _results_label(path)), None
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
        from ..exceptions import InputError

        ids = set(net.link_ids.tolist())
        unknown = [i for i in links if int(i) not in ids]
        if unknown:
            raise InputError(f"--link {unknown[0]}: no link of {net.name} has this id "
                             f"(its link ids run from {int(net.link_ids.min())} to "
                             f"{int(net.link_ids.max())})")
        index = [net.link_index(i) for i in links]
        eq = _solve(net, objective, gap, "gp" if method == "auto" else method)
        sel = plotting.select_link_flow(eq, index)
        return plotting.select_link_map(net, sel, index, label=title), None
    if kind == "convergence":
        names = [m.strip() for m in methods.split(",") if m.strip()]
        if not names:
            raise click.UsageError("--methods needs at least one method name, e.g. fw,gp")
        runs = {f"{m} ({objective.upper()})": _solve(net, objective, gap, m) for m in names}
        return plotting.convergence_chart(runs, tol=gap,
                                          title=title or f"{net.name}: convergence"), None
    raise AssertionError(kind)


def _table_figure(kind, path, *, currency, title, shares):
    from .. import plotting
    from ..exceptions import CongestError, InputError

    table = _read_table(path)
    _check_table(kind, table, path)
    route_shares = None
    if kind == "learning" and shares:
        route_shares = _read_table(shares)
        _check_table("shares", route_shares, shares)
    try:
        if kind == "sweep":
            return plotting.sweep_chart(table, currency=currency or "money",
                                        title=title or "Demand sweep")
        if kind == "learning":
            return plotting.learning_chart(table, title=title or "Day-to-day learning",
                                           route_shares=route_shares)
        if kind == "scenarios":
            if "scenario" in table.columns:
                table = table.set_index("scenario")
            return plotting.scenario_chart(table, currency=currency,
                                           title=title or "Scenarios compared")
    except CongestError:
        raise
    except (ValueError, KeyError, TypeError) as err:
        # the checks above catch the tables of the wrong kind; this, what they miss
        raise InputError(f"cannot draw {TABLES[kind][0]} from this table: {err}",
                         path=path) from err
    raise AssertionError(kind)


@click.command("plot")
@click.argument("kind", type=click.Choice(list(KINDS)))
@click.argument("input_path", metavar="INPUT", type=click.Path(exists=True))
@click.option("--out", "out", type=click.Path(dir_okay=False), default=None,
              help="Picture file: .png, .svg or .pdf. Default: <input>-<kind>.png here.")
@click.option("--results", "results", multiple=True, type=click.Path(exists=True,
              dir_okay=False), help="flow, toll: a link results CSV (from 'congest solve "
              "--out' or the links/ folder of 'congest compare'); difference: two (A then "
              "B). Without it the equilibrium is solved.")
@click.option("--objective", type=click.Choice(["ue", "so"]), default="ue", show_default=True,
              help="Equilibrium to solve when no --results are given.")
@click.option("--gap", type=click.FloatRange(min=0, min_open=True), default=None,
              help="Target relative gap of solves made here. " + GAP_DEFAULT_HELP
              + f" convergence: {_CONVERGENCE_GAP_TEXT} for every method compared "
                "(1e-10 is out of reach of Frank-Wolfe methods; a run that cannot reach the "
                "target stops at its iteration cap).")
@click.option("--method", default="auto", show_default=True, help=METHOD_HELP)
@click.option("--link", "links", multiple=True, type=int, metavar="LINK_ID",
              help="select-link: id of a link whose trips to map; repeat the option for "
                   "several (--link 157 --link 158).")
@click.option("--methods", default="fw,bfw,gp", show_default=True,
              help="convergence: comma-separated methods to compare (each solved to "
                   f"--gap, by default {_CONVERGENCE_GAP_TEXT}).")
@click.option("--currency", default=None,
              help="sweep, scenarios: currency label of the revenue.")
@click.option("--shares", "shares", type=click.Path(exists=True, dir_okay=False),
              default=None, help="learning: route-share CSV written by 'congest learn "
                                 "--track'.")
@click.option("--title", default=None,
              help="Title shown on the picture; on maps after the network's name. Default: "
                   "what was solved, or the scenario of a --results table (its label in "
                   "'congest compare', else its file name).")
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
      congest plot scenarios quillhaven-compare/scenarios.json

    Solves made here use the gap target of 'congest solve' unless --gap is given;
    the convergence chart has its own (see --gap).
    """
    import matplotlib

    matplotlib.use("Agg")
    from ..exceptions import InputError
    from ..plotting import FORMATS, save_figure

    source = Path(input_path)
    out = Path(out) if out is not None else Path(f"{source.resolve().stem}-{kind}.png")
    if out.suffix.lower() not in FORMATS:
        raise InputError(f"--out {out}: unknown picture format {out.suffix!r}; use .png, "
                         ".svg or .pdf")
    if geojson and kind != "flow":
        raise click.UsageError("--geojson goes with 'flow'")
    if results and kind not in ("flow", "difference", "toll"):
        raise click.UsageError("--results goes with 'flow', 'difference' and 'toll'")
    if shares and kind != "learning":
        raise click.UsageError("--shares goes with 'learning'")
    if gap is None:
        gap = CONVERGENCE_GAP if kind == "convergence" else default_gap(method)
    if KINDS[kind] == "network":
        _refuse_table(kind, source)
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
        if source.is_dir():
            what, _, writer = TABLES[kind]
            raise InputError(f"a folder, not a table: 'congest plot {kind}' reads {what} "
                             f"({writer})", path=source)
        fig = _table_figure(kind, input_path, currency=currency, title=title, shares=shares)
    try:
        save_figure(fig, out, dpi=dpi)
    except OSError as err:
        raise InputError(f"cannot write the picture: {err.strerror}", path=out) from err
    click.echo(f"wrote {out}")
