"""A report a planner can hand on: one folder with the comparison, the charts, a summary.

:func:`build_report` runs the scenario comparison of :func:`congest.scenarios.compare`
(and, when asked, a demand sweep and a learning simulation) and draws every chart;
:func:`write_report` writes the folder::

    scenarios.csv        the comparison table, one row per scenario
    sweep.csv            the demand sweep's table, when a sweep was run
    learning-days.csv    the learning simulation's per-day table, when one was run
    links.geojson        link results of every scenario (RFC 7946 LineStrings)
    *.png / *.svg        the maps and charts
    summary.md           the key figures, the table and the cautions in Markdown
    report.html          one page showing all of it (images embedded, so the file
                         can travel alone)

Every file is written atomically; nothing outside the folder is touched.
"""

from __future__ import annotations

import base64
import html
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

__all__ = ["CAUTIONS", "Chart", "Report", "build_report", "write_report",
           "markdown_summary", "html_page", "REPORT_STEPS"]

#: The cautions every report carries.
CAUTIONS = (
    "These are planning-level estimates from a static traffic assignment model.",
    "They are not for operational control or safety design.",
    "Tolling and road design decisions follow local law, codes and licensed engineering "
    "practice.",
)

#: Steps :func:`build_report` reports to its ``progress`` callback, in order.
REPORT_STEPS = ("scenarios", "sweep", "learning", "charts")

#: Columns of the comparison shown in the summary, with their headings.
SUMMARY_COLUMNS = {
    "vehicle_hours": "Vehicle-hours",
    "mean_trip_time_min": "Mean trip, min",
    "vehicle_distance": "Vehicle-distance",
    "revenue_money": "Revenue",
    "ratio_to_so": "Ratio to SO",
    "max_volume_capacity": "Highest v/c",
    "links_over_capacity": "Links over capacity",
    "relative_gap": "Relative gap",
}


@dataclass(frozen=True, eq=False)
class Chart:
    """One picture of the report: file stem, figure, heading and a sentence about it."""

    name: str
    figure: object
    heading: str
    caption: str


@dataclass(frozen=True, eq=False)
class Report:
    """Everything :func:`write_report` writes.

    Attributes
    ----------
    network : Network
    comparison : congest.scenarios.ScenarioComparison
    charts : list of Chart
    sweep : congest.sweep.SweepResult or None
    learning : congest.learning.LearningResult or None
    notes : list of str
        Things the reader should know (charts left out and why, coordinate system).
    """

    network: object
    comparison: object
    charts: list = field(default_factory=list)
    sweep: object = None
    learning: object = None
    notes: list = field(default_factory=list)

    @property
    def has_coordinates(self) -> bool:
        """True when every node has coordinates (maps and links.geojson are written)."""
        net = self.network
        return bool(np.isfinite(net.x).all() and np.isfinite(net.y).all())


def _step(progress, name, detail=""):
    if progress is not None:
        progress(name, detail)


def build_report(network, *, tol=None, method="auto", advice_share=0.5, toll_plans=(),
                 sweep_levels=None, learning_days=0, learning_replications=5,
                 learning_noise=0.1, seed=0, progress=None) -> Report:
    """Solve the scenarios and draw the report's charts.

    Parameters
    ----------
    network : Network
    tol : float, optional
        Relative-gap target of every equilibrium. Default:
        :func:`congest.equilibrium.default_tol`, 1e-10, or 1e-5 with a link-based method.
    method : str, default "auto"
    advice_share : float, default 0.5
        Share of drivers on free-flow advice in the mixed scenario.
    toll_plans : sequence of TollPlan, default ()
    sweep_levels : sequence of float, optional
        Demand multipliers for a sweep chart (run in this process).
    learning_days : int, default 0
        Days of a Hedge learning simulation for a learning chart (0: none).
    learning_replications : int, default 5
        Replications of the learning simulation; one when ``learning_noise`` is 0 (the
        run then draws nothing at random, so more would be identical), with a note.
    learning_noise : float, default 0.1
        Day-to-day capacity noise of the simulation: the coefficient of variation (sd as
        a share of the mean) of a capacity factor drawn per link and day, so that
        replications differ and their spread shows. The chart's caption states it.
    seed : int, default 0
        Seed of the learning simulation.
    progress : callable, optional
        ``progress(step, detail)`` before each step of :data:`REPORT_STEPS` that runs,
        and during the sweep after every point (``detail`` like ``"3 of 10 points"``).

    Returns
    -------
    Report
    """
    import warnings

    from .equilibrium import default_tol
    from .exceptions import ConvergenceWarning, SolverError
    from .io.geojson import coordinate_note
    from .scenarios import compare

    tol = default_tol(method) if tol is None else tol
    net = network
    notes = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        _step(progress, "scenarios")
        cmp = compare(net, advice_share=advice_share, toll_plans=toll_plans, tol=tol,
                      method=method)
        sweep_result = None
        if sweep_levels is not None and len(sweep_levels):
            from .sweep import sweep

            _step(progress, "sweep", f"0 of {len(sweep_levels)} points")

            def on_point(info):
                _step(progress, "sweep", f"{info.done + info.failed + info.reused} of "
                      f"{info.total} points")
                return False

            sweep_result = sweep(net, list(sweep_levels), method=method, tol=tol,
                                 scheduler="serial", callback=on_point)
            if sweep_result.failed:
                notes.append(f"{len(sweep_result.failed)} sweep point(s) failed and are "
                             "missing from the sweep chart.")
        learning_result = None
        if learning_days:
            from .learning import simulate

            _step(progress, "learning")
            ue = cmp.results["first_best"].ue
            o, d = np.unravel_index(int(np.argmax(net.demand)), net.demand.shape)
            n_rep = int(learning_replications)
            if n_rep > 1 and not learning_noise > 0:
                notes.append(f"No capacity noise in the learning simulation: nothing in it "
                             f"is random, so one run is shown instead of {n_rep} identical "
                             "replications.")
                n_rep = 1
            learning_result = simulate(net, rule="hedge", days=int(learning_days),
                                       replications=n_rep, seed=seed,
                                       supply_noise=float(learning_noise),
                                       track=[(int(net.zone_ids[o]), int(net.zone_ids[d]))],
                                       equilibrium=ue if ue.state is not None else None)
    _step(progress, "charts")
    charts = _charts(net, cmp, sweep_result, learning_result, notes, SolverError, tol)
    notes.append(coordinate_note(net.crs))
    return Report(network=net, comparison=cmp, charts=charts, sweep=sweep_result,
                  learning=learning_result, notes=notes)


def _charts(net, cmp, sweep_result, learning_result, notes, solver_error, tol):
    from . import plotting
    from .plotting._charts import has_revenue

    fb = cmp.results["first_best"]
    ue, so = fb.ue, fb.so
    table = cmp.table
    charts = []
    has_xy = bool(np.isfinite(net.x).all() and np.isfinite(net.y).all())
    if has_xy:
        # one width and one colour scale for all flow maps, so that they compare by eye
        advice = cmp.links.get("free_flow_advice")
        advice_flow = None if advice is None else advice["volume"].to_numpy(float)
        scales = plotting.flow_scales(net, ue, so,
                                      *([] if advice_flow is None else [advice_flow]))
        charts.append(Chart("flow-ue", plotting.flow_map(net, ue, **scales),
                            "User equilibrium",
                            "Every driver takes a quickest route. Width shows volume, colour "
                            "volume over capacity; all flow maps here share both scales, "
                            "set by the roads (zone connectors are grey dashes, not to "
                            "scale)."))
        charts.append(Chart("flow-so", plotting.flow_map(net, so, **scales), "System optimum",
                            "Routes that make the total generalized cost least (travel time "
                            "plus any fixed link charges and tolls, valued in minutes)."))
        charts.append(Chart("difference-ue-so",
                            plotting.difference_map(net, ue, so, labels=("UE", "SO")),
                            "What the system optimum moves",
                            "Change in volume from user equilibrium to system optimum: "
                            "warm colours gain traffic, cool colours lose it."))
        if advice_flow is not None:
            charts.append(Chart(
                "flow-free-flow-advice",
                plotting.flow_map(net, advice_flow, scenario="free-flow advice to all",
                                  key_figure=_row_key_figure(table, "free_flow_advice", net,
                                                             advice),
                                  **scales),
                "Advice to all on free-flow routes",
                "A routing service tells every driver the fastest route on empty roads; "
                "volumes and volume/capacity at the times that advice causes."))
        charts.append(Chart("tolls", plotting.toll_map(net, fb.tolls_money, flow=fb.tolled_ue,
                                                       scenario="marginal-cost tolls"),
                            "Marginal-cost tolls",
                            f"Each link's toll is the delay one more vehicle imposes on "
                            f"everyone else on it at the system optimum (volume times the "
                            f"slope of its travel-time curve), in {net.currency} per vehicle; "
                            "with these tolls, drivers choosing their own fastest-and-"
                            "cheapest routes reproduce the system optimum."))
        for key, links in cmp.links.items():
            if not key.startswith("plan_"):
                continue
            label = str(table.loc[key, "label"]) if key in table.index else key
            charts.append(Chart(
                key.replace("_", "-"),
                plotting.toll_map(net, links["toll_money"].to_numpy(float),
                                  flow=links["volume"].to_numpy(float), scenario=label),
                f"Toll plan: {label}",
                f"The plan's tolls in {net.currency} per vehicle, with the volumes on the "
                "tolled links under user equilibrium."))
        try:
            busiest = int(np.argmax(ue.flow))
            sel = plotting.select_link_flow(ue, busiest)
        except solver_error:
            notes.append("No select-link map: the equilibrium method keeps no routes "
                         "(use a route-based method such as 'gp').")
        else:
            charts.append(Chart("select-link", plotting.select_link_map(net, sel, busiest),
                                f"Who uses the busiest link, {net.link_ids[busiest]}"
                                + _named(net, busiest),
                                "Volumes of the trips whose user-equilibrium routes use it."))
    else:
        notes.append("No maps: the network has no node coordinates.")
    charts.append(Chart("scenarios", plotting.scenario_chart(table, currency=net.currency),
                        "Scenarios side by side",
                        "Each measure as a percentage of user equilibrium (measures that "
                        "would repeat another's bars are left out)"
                        + (f", and the toll revenue of each scenario in {net.currency}."
                           if has_revenue(table) else ".")))
    runs = {f"{r.method} ({r.objective.upper()})": r for r in (ue, so) if r.history}
    if runs:
        charts.append(Chart("convergence", plotting.convergence_chart(runs, tol=tol),
                            "Convergence", "Relative gap of the UE and SO solves."))
    if sweep_result is not None and not sweep_result.table.empty:
        charts.append(Chart("sweep", plotting.sweep_chart(sweep_result.table,
                                                          currency=net.currency),
                            "Price of anarchy as demand grows",
                            "UE over SO system cost, and first-best toll revenue, against "
                            "a multiplier on the demand."))
    if learning_result is not None:
        charts.append(Chart("learning", plotting.learning_chart(
                            learning_result, ue_total=ue.total_travel_time,
                            title=f"Day-to-day learning ({learning_result.label()})"),
                            "Day-to-day learning", _learning_caption(learning_result)))
    return charts


def _learning_caption(result):
    """What the learning chart shows, with the amount of noise and of replications."""
    p = result.params
    noise = p.get("supply_noise", 0.0)
    n_rep = p.get("replications", 1)
    share = p.get("advice_share", 0.0)
    advice = f"{100 * share:.3g}% follow advice" if share else "no advice"
    text = f"Drivers learning routes from daily travel times (Hedge rule, {advice}) "
    if noise:
        text += (f"with day-to-day capacity noise sd {100 * noise:.3g}% (each link's "
                 "capacity times a random factor of mean 1, drawn every day); ")
    else:
        text += "without capacity noise; "
    if n_rep > 1:
        text += f"median and 10-90% band over {n_rep} replications; "
    else:
        text += "one run; "
    return (text + "the dashed line is the user equilibrium; route shares of the busiest "
            "OD pair.")


def _named(net, i):
    names = net.link_attrs.get("name")
    name = "" if names is None else str(names[i]).strip()
    return f" ({name})" if name and name.lower() != "nan" else ""


def _connector_note(net):
    n = int(net.connectors.sum())
    return f" ({n:,} of them zone connectors)" if n else ""


def _row_key_figure(table, key, net, links):
    """Subtitle of a scenario's flow map; like the map's own, it counts road links only."""
    from .plotting._maps import _over_capacity

    if key not in table.index:
        return None
    row = table.loc[key]
    over = _over_capacity(links["volume_capacity"].to_numpy(float), ~net.connectors)
    return (f"{row['vehicle_hours']:,.0f} vehicle-hours  ·  mean trip "
            f"{row['mean_trip_time_min']:.1f} min  ·  {over}")


# ------------------------------------------------------------------ writing
def _fmt_cell(column, value):
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "n/a"
    if column in ("relative_gap", "wardrop_gap"):
        return f"{value:.1e}"
    if column == "links_over_capacity":
        return f"{int(value):,}"
    if column in ("ratio_to_so", "max_volume_capacity"):
        return f"{value:.3f}"
    if column == "mean_trip_time_min":
        return f"{value:.2f}"
    return f"{value:,.0f}"


def _table_rows(report):
    table = report.comparison.table
    net = report.network
    cols = [c for c in SUMMARY_COLUMNS if c in table.columns]
    heads = ["Scenario"] + [SUMMARY_COLUMNS[c] for c in cols]
    unit = {"vehicle_distance": f" ({net.length_unit})" if net.length_unit else "",
            "revenue_money": f" ({net.currency})"}
    heads = ["Scenario"] + [SUMMARY_COLUMNS[c] + unit.get(c, "") for c in cols]
    rows = []
    for key, row in table.iterrows():
        name = str(row["label"]) if "label" in table.columns else str(key)
        rows.append([name] + [_fmt_cell(c, row[c]) for c in cols])
    return heads, rows


def _key_findings(report):
    net = report.network
    fb = report.comparison.results["first_best"]
    table = report.comparison.table
    lines = [
        f"{net.name}: {net.n_zones:,} zones, {net.n_nodes:,} nodes, {net.n_links:,} links"
        f"{_connector_note(net)}, "
        f"{net.total_demand:,.0f} trips in {net.period_hours:g} h.",
        f"Price of anarchy {fb.price_of_anarchy:.4f}: selfish routing costs "
        f"{100 * (fb.price_of_anarchy - 1):.1f}% more than the system optimum "
        f"(UE gap {fb.ue.relative_gap:.1e}, SO gap {fb.so.relative_gap:.1e}).",
        f"Marginal-cost tolls on {fb.tolled_links.size:,} links raise "
        f"{fb.revenue_money:,.0f} {net.currency} per period "
        f"({fb.mean_toll_per_trip:.2f} {net.currency} per trip) and bring UE to SO flows "
        f"within {fb.max_flow_deviation:.2g} vehicles.",
    ]
    if "free_flow_advice" in table.index and "user_equilibrium" in table.index:
        a = table.loc["free_flow_advice", "vehicle_hours"]
        u = table.loc["user_equilibrium", "vehicle_hours"]
        lines.append(f"Free-flow advice to all drivers: {a:,.0f} vehicle-hours, "
                     f"{100 * (a / u - 1):+.1f}% against user equilibrium.")
    sw = report.sweep
    if sw is not None and sw.peak() is not None:
        peak = sw.peak()
        lines.append(f"Across the demand sweep the price of anarchy peaks at "
                     f"{peak['price_of_anarchy']:.4f} at {peak['demand_scale']:g} times the "
                     "base demand.")
    return lines


def markdown_summary(report, images) -> str:
    """The report's short summary in Markdown.

    Parameters
    ----------
    report : Report
    images : mapping of chart name to file name (relative to the folder)
    """
    heads, rows = _table_rows(report)
    out = [f"# {report.network.name}: congestion report", ""]
    out += ["## Cautions", ""] + [f"- {c}" for c in CAUTIONS] + [""]
    out += ["## Key figures", ""] + [f"- {line}" for line in _key_findings(report)] + [""]
    out += ["## Scenarios", "", "| " + " | ".join(heads) + " |",
            "|" + "|".join(["---"] + ["---:"] * (len(heads) - 1)) + "|"]
    out += ["| " + " | ".join(r) + " |" for r in rows]
    where = "The full table is in `scenarios.csv`"
    if report.has_coordinates:
        where += "; link results of every scenario are in `links.geojson`"
    out += ["", where + ".", "", "## Charts", ""]
    for chart in report.charts:
        out += [f"### {chart.heading}", "", chart.caption, "",
                f"![{chart.heading}]({images[chart.name]})", ""]
    if report.notes:
        out += ["## Notes", ""] + [f"- {n}" for n in report.notes] + [""]
    return "\n".join(out)


_CSS = """
body { font-family: system-ui, sans-serif; color: #1f2a36; max-width: 1100px;
       margin: 2em auto; padding: 0 1em; line-height: 1.45; }
h1 { font-size: 1.7em; margin-bottom: 0.2em; }
h2 { font-size: 1.25em; margin-top: 2em; border-bottom: 1px solid #d5dae0; }
.cautions { background: #f4f1e8; border-left: 4px solid #8a6d1c; padding: 0.6em 1em; }
table { border-collapse: collapse; font-size: 0.9em; }
th, td { padding: 0.3em 0.7em; border-bottom: 1px solid #e3e6ea; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
th { text-align: left; background: #f0f2f4; }
figure { margin: 1.5em 0; }
figure img { max-width: 100%; border: 1px solid #e3e6ea; }
figcaption { color: #5b6672; font-size: 0.9em; }
"""


def html_page(report, images, *, embed_from=None) -> str:
    """The report as one HTML page.

    Parameters
    ----------
    report : Report
    images : mapping of chart name to file name (relative to the folder)
    embed_from : Path, optional
        Folder holding the images; when given they are embedded as ``data:`` URIs so
        the page needs no other file, otherwise referenced by relative path.
    """
    esc = html.escape
    heads, rows = _table_rows(report)
    title = f"{report.network.name}: congestion report"
    parts = [
        "<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
        f"<title>{esc(title)}</title>", f"<style>{_CSS}</style>", "</head>", "<body>",
        f"<h1>{esc(title)}</h1>",
        '<div class="cautions"><strong>Cautions.</strong><ul>'
        + "".join(f"<li>{esc(c)}</li>" for c in CAUTIONS) + "</ul></div>",
        "<h2>Key figures</h2><ul>"
        + "".join(f"<li>{esc(line)}</li>" for line in _key_findings(report)) + "</ul>",
        "<h2>Scenarios</h2><table><thead><tr>"
        + "".join(f"<th>{esc(h)}</th>" for h in heads) + "</tr></thead><tbody>",
    ]
    for row in rows:
        parts.append("<tr><td>" + esc(row[0]) + "</td>"
                     + "".join(f'<td class="num">{esc(v)}</td>' for v in row[1:]) + "</tr>")
    parts.append("</tbody></table>")
    parts.append("<p>Full table: <code>scenarios.csv</code>"
                 + ("; link results of every scenario: <code>links.geojson</code>"
                    if report.has_coordinates else "") + ".</p>")
    parts.append("<h2>Charts</h2>")
    mime = {".png": "image/png", ".svg": "image/svg+xml"}
    for chart in report.charts:
        name = images[chart.name]
        if embed_from is not None:
            data = base64.b64encode((Path(embed_from) / name).read_bytes()).decode("ascii")
            src = f"data:{mime[Path(name).suffix.lower()]};base64,{data}"
        else:
            src = esc(name)
        parts.append(f'<figure id="{esc(chart.name)}"><h3>{esc(chart.heading)}</h3>'
                     f'<img src="{src}" alt="{esc(chart.heading)}">'
                     f"<figcaption>{esc(chart.caption)}</figcaption></figure>")
    if report.notes:
        parts.append("<h2>Notes</h2><ul>"
                     + "".join(f"<li>{esc(n)}</li>" for n in report.notes) + "</ul>")
    parts += ["</body>", "</html>", ""]
    return "\n".join(parts)


def write_report(report, folder, *, image_format="png", embed=True, dpi=150) -> list:
    """Write the report folder.

    Parameters
    ----------
    report : Report
    folder : path-like
        Created if missing; files of an earlier report there are replaced.
    image_format : {"png", "svg"}, default "png"
    embed : bool, default True
        Embed the images in ``report.html`` (one file that travels alone) or reference
        them by relative path.
    dpi : int, default 150

    Returns
    -------
    list of Path
        The files written.
    """
    from .io.atomic import atomic_write
    from .io.geojson import write_link_geojson
    from .plotting import save_figure

    if image_format not in ("png", "svg"):
        raise ValueError(f"Unknown image format {image_format!r}; use 'png' or 'svg'")
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    cmp = report.comparison
    with atomic_write(folder / "scenarios.csv", newline="") as fh:
        cmp.table.to_csv(fh, lineterminator="\n")
    written.append(folder / "scenarios.csv")
    tables = {"sweep.csv": getattr(report.sweep, "table", None),
              "learning-days.csv": getattr(report.learning, "days", None)}
    for name, frame in tables.items():
        if frame is not None:
            with atomic_write(folder / name, newline="") as fh:
                frame.to_csv(fh, index=False, lineterminator="\n")
            written.append(folder / name)
    net = report.network
    if report.has_coordinates:
        props = {}
        for key, links in cmp.links.items():
            props[f"volume_{key}"] = links["volume"].to_numpy(float)
            props[f"volume_capacity_{key}"] = links["volume_capacity"].to_numpy(float)
            if (links["toll_money"] != 0).any():
                props[f"toll_{key}"] = links["toll_money"].to_numpy(float)
        write_link_geojson(folder / "links.geojson", net, properties=props)
        written.append(folder / "links.geojson")
    images = {}
    for chart in report.charts:
        name = f"{chart.name}.{image_format}"
        save_figure(chart.figure, folder / name, dpi=dpi)
        images[chart.name] = name
        written.append(folder / name)
    with atomic_write(folder / "summary.md") as fh:
        fh.write(markdown_summary(report, images))
    written.append(folder / "summary.md")
    with atomic_write(folder / "report.html") as fh:
        fh.write(html_page(report, images, embed_from=folder if embed else None))
    written.append(folder / "report.html")
    return written
