"""``congest compare NETWORK``: advice, equilibrium and tolling scenarios side by side."""

from __future__ import annotations

import json
import math
from pathlib import Path

import click

from ._common import (
    _slug,
    check_paths,
    default_gap,
    friendly_errors,
    load_network,
    network_options,
    solver_options,
)

__all__ = ["command", "write_comparison", "comparison_json"]

#: Columns printed on screen: (table column, header, format).
SHOWN = (
    ("vehicle_hours", "veh-hours", "{:,.0f}"),
    ("mean_trip_time_min", "trip min", "{:.2f}"),
    ("vehicle_distance", "veh-{unit}", "{:,.0f}"),
    ("revenue_money", "revenue {currency}", "{:,.0f}"),
    ("ratio_to_so", "vs SO", "{:.4f}"),
    ("max_volume_capacity", "max v/c", "{:.2f}"),
    ("links_over_capacity", "over cap", "{:d}"),
    ("wardrop_gap", "Wardrop gap", "{:.1e}"),
)


def _clean(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if hasattr(value, "item"):
        return _clean(value.item())
    return value


def comparison_json(cmp) -> dict:
    """The comparison as plain data: settings, the scenario rows and key figures."""
    table = cmp.table
    fb = cmp.results["first_best"]
    ra = cmp.results["reactive_advice"]
    rows = []
    for key, row in table.iterrows():
        rows.append({"scenario": key, **{c: _clean(row[c]) for c in table.columns}})
    return {
        "network": cmp.network.name,
        "currency": table.attrs.get("currency"),
        "length_unit": table.attrs.get("length_unit"),
        "value_of_time": table.attrs.get("value_of_time"),
        "advice_share": table.attrs.get("advice_share"),
        "scenarios": rows,
        "first_best": {k: _clean(v) for k, v in fb.summary().items()},
        "reactive_advice": {
            "days": int(ra.flows.shape[0]), "burn_in": ra.burn_in,
            "response": ra.response, "cycle_days": ra.cycle, "swing_vehicles": ra.swing,
            "daily_vehicle_hours": [float(v) for v in ra.daily_vehicle_hours],
        },
    }


def write_comparison(cmp, folder) -> list:
    """Write ``scenarios.csv``, ``scenarios.json`` and ``links/<scenario>.csv`` atomically.

    Returns the paths written.
    """
    from ..io.atomic import atomic_folder

    folder = Path(folder)
    targets = {folder / "scenarios.csv": None, folder / "scenarios.json": None}
    for key in cmp.links:
        targets[folder / "links" / f"{key}.csv"] = key
    with atomic_folder(list(targets)) as temps:
        for target, key in targets.items():
            tmp = temps[target]
            if target.name == "scenarios.csv":
                cmp.table.to_csv(tmp, lineterminator="\n")
            elif target.name == "scenarios.json":
                tmp.write_text(json.dumps(comparison_json(cmp), indent=2) + "\n")
            else:
                cmp.links[key].to_csv(tmp, index=False, lineterminator="\n")
    return list(targets)


def render_table(cmp):
    """A rich table of the scenarios (one row each)."""
    from rich.table import Table

    attrs = cmp.table.attrs
    unit = attrs.get("length_unit") or "dist"
    currency = attrs.get("currency") or "money"
    has_distance = cmp.table["vehicle_distance"].notna().any()
    out = Table(title=f"{cmp.network.name}: {cmp.network.total_demand:,.0f} trips, "
                      f"value of time {attrs.get('value_of_time'):g} {currency}/h",
                title_justify="left", header_style="bold")
    out.add_column("scenario", no_wrap=True)
    shown = [s for s in SHOWN if has_distance or s[0] != "vehicle_distance"]
    for _, header, _ in shown:
        out.add_column(header.format(unit=unit, currency=currency), justify="right",
                       no_wrap=True)
    for _, row in cmp.table.iterrows():
        cells = [row["label"]]
        for column, _, fmt in shown:
            value = row[column]
            if isinstance(value, float) and not math.isfinite(value):
                cells.append("-")
            else:
                cells.append(fmt.format(int(value) if fmt == "{:d}" else value))
        out.add_row(*cells)
    return out


@click.command("compare")
@click.argument("network", type=click.Path(exists=True))
@click.option("--advice-share", type=click.FloatRange(0.0, 1.0), default=0.5,
              show_default=True, metavar="P",
              help="Share of drivers following the free-flow advice in the mixed "
                   "scenario (the rest choose routes selfishly).")
@click.option("--plan", "plans", multiple=True, type=click.Path(dir_okay=False, exists=True),
              metavar="FILE",
              help="A toll-plan CSV (link_id or attribute/equals, charge in money); "
                   "repeat for several plans.")
@click.option("--out-dir", "out_dir", type=click.Path(file_okay=False), default=None,
              help="Folder for scenarios.csv, scenarios.json and links/<scenario>.csv. "
                   "Default: <network>-compare in the current folder.")
@solver_options
@click.option("--days", type=click.IntRange(min=2), default=60, show_default=True,
              help="Days of reactive advice simulated.")
@click.option("--burn-in", type=click.IntRange(min=0), default=10, show_default=True,
              help="First days of reactive advice left out of its averages.")
@click.option("--switch-share", type=click.FloatRange(0.0, 1.0, min_open=True), default=1.0,
              show_default=True,
              help="Share of drivers taking the new advice each day (reactive advice).")
@network_options
@friendly_errors
def command(network, advice_share, plans, out_dir, gap, method, max_iter, days, burn_in,
            switch_share, **net_opts):
    """Compare routing advice, selfish routing, the system optimum and tolls on NETWORK.

    Scenarios: every driver told the free-flow fastest route; that advice updated daily
    from the times it caused (day average); advice followed by a share of drivers;
    user equilibrium; system optimum; marginal-cost tolls; each toll plan given with
    --plan. Prints one table and writes it as CSV and JSON with link results per
    scenario.

    \b
    Examples:
      congest compare networks/quillhaven
      congest compare networks/quillhaven --plan bridge-toll.csv --advice-share 0.3
    """
    from rich.console import Console

    from ..exceptions import InputError
    from ..io.tollplan import read_toll_plan
    from ..scenarios import compare

    if burn_in >= days - 1:
        raise InputError("--burn-in must be smaller than --days minus 1", value=burn_in)
    gap = default_gap(method) if gap is None else gap
    net, layout = load_network(network, **net_opts)
    check_paths(net, layout)
    toll_plans = [read_toll_plan(p, net) for p in plans]
    names = [p.name for p in toll_plans]
    for i, name in enumerate(names):
        if name in names[:i]:
            raise InputError(f"two toll plans are named {name!r}; rename one file",
                             path=plans[i])
    cmp = compare(net, advice_share=advice_share, toll_plans=toll_plans, tol=gap,
                  method=method, max_iter=max_iter, n_days=days, burn_in=burn_in,
                  response=switch_share)
    if out_dir is None:
        out_dir = Path(f"{_slug(Path(network).resolve().stem)}-compare")
    try:
        written = write_comparison(cmp, out_dir)
    except OSError as err:
        raise InputError(f"cannot write the comparison: {err.strerror}", path=out_dir) from err
    # wide enough for every column whether or not the output is a terminal
    console = Console(width=max(160, Console().width), highlight=False)
    console.print(render_table(cmp))
    fb = cmp.results["first_best"]
    ra = cmp.results["reactive_advice"]
    cycle = f"a {ra.cycle}-day cycle" if ra.cycle else "no repeating cycle"
    lines = [
        "Wardrop gap: relative gap of each scenario's flows to user equilibrium (0: no "
        "driver can save by switching routes; SO and advice flows are not meant to be 0)",
        f"price of anarchy {fb.price_of_anarchy:.4f} (at most {fb.price_of_anarchy_upper:.4f} "
        f"given the SO gap); gaps: UE {fb.ue.relative_gap:.1e}, SO {fb.so.relative_gap:.1e}, "
        f"tolled UE {fb.tolled_ue.relative_gap:.1e}",
        f"marginal-cost tolls on {fb.tolled_links.size} links reproduce SO flows to "
        f"{fb.max_flow_deviation:.2g} vehicles; mean toll {fb.mean_toll_per_trip:.2f} "
        f"{net.currency} per trip",
        f"reactive advice: {cycle}, day-to-day swing up to {ra.swing:,.0f} vehicles on a link",
        f"written: {len(written)} files in {out_dir}",
    ]
    for line in lines:
        click.echo(line)
