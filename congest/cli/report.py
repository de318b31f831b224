"""``congest report NETWORK``: one folder with the comparison, all charts and a summary."""

from __future__ import annotations

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

_STEP_TEXT = {
    "scenarios": "solving the scenarios (UE, SO, tolls, advice)",
    "sweep": "running the demand sweep",
    "learning": "simulating day-to-day learning",
    "charts": "drawing the charts",
}


@click.command("report")
@click.argument("network", type=click.Path(exists=True))
@click.option("--out-dir", "out_dir", type=click.Path(file_okay=False), default=None,
              help="Report folder. Default: <network>-report in the current folder.")
@click.option("--gap", type=click.FloatRange(min=0, min_open=True), default=None,
              help=f"Target relative gap of every equilibrium. {GAP_DEFAULT_HELP}")
@click.option("--method", default="auto", show_default=True, help=METHOD_HELP)
@click.option("--advice-share", type=click.FloatRange(0.0, 1.0), default=0.5,
              show_default=True, help="Share of drivers on free-flow advice in the mixed "
                                      "scenario.")
@click.option("--plan", "plans", multiple=True, type=click.Path(dir_okay=False, exists=True),
              help="Toll plan file to add as a scenario (repeatable).")
@click.option("--sweep", "sweep_levels", metavar="VALUES", default=None,
              help="Also sweep demand multipliers, e.g. '0.25:2.5:10' or '0.5,1,1.5'.")
@click.option("--learning-days", type=click.IntRange(min=0), default=0, show_default=True,
              help="Also simulate day-to-day learning for this many days (0: no).")
@click.option("--replications", type=click.IntRange(min=1), default=5, show_default=True,
              help="Learning replications (one when --supply-noise is 0: nothing is "
                   "random then).")
@click.option("--supply-noise", type=click.FloatRange(min=0), default=0.1, show_default=True,
              metavar="CV", help="Learning: coefficient of variation of a daily capacity "
                                 "factor per link, as in 'congest learn' (0.1: sd 10%).")
@click.option("--seed", type=int, default=0, show_default=True, help="Learning seed.")
@click.option("--format", "image_format", type=click.Choice(["png", "svg"]), default="png",
              show_default=True, help="Picture format.")
@click.option("--embed/--no-embed", default=True, show_default=True,
              help="Embed the pictures in report.html (one file that travels alone) or "
                   "link to them.")
@click.option("--progress/--no-progress", default=True, show_default=True,
              help="Show progress.")
@network_options
@friendly_errors
def command(network, out_dir, gap, method, advice_share, plans, sweep_levels, learning_days,
            replications, supply_noise, seed, image_format, embed, progress, **net_opts):
    """Write a report folder for NETWORK.

    The folder holds scenarios.csv (the comparison of free-flow advice, reactive advice,
    advice followed by a share of drivers, user equilibrium, system optimum, marginal-cost
    tolls and any --plan), links.geojson, maps and charts, summary.md and report.html;
    with --sweep also sweep.csv, and with --learning-days learning-days.csv.
    Results are planning-level estimates, not for operational control or safety design.

    \b
    Examples:
      congest report networks/quillhaven
      congest report networks/quillhaven --sweep 0.25:2.5:10 --learning-days 200
    """
    import matplotlib

    matplotlib.use("Agg")
    from rich.console import Console

    from ..exceptions import InputError
    from ..io.geojson import is_lonlat
    from ..io.tollplan import read_toll_plan
    from ..report import build_report, write_report
    from .sweep import parse_values

    net, layout = load_network(network, **net_opts)
    check_paths(net, layout)
    toll_plans = [read_toll_plan(p, net) for p in plans]
    levels = parse_values(sweep_levels, "--sweep") if sweep_levels else None
    gap = default_gap(method) if gap is None else gap
    if out_dir is None:
        out_dir = Path(f"{_slug(Path(network).resolve().stem)}-report")
    console = Console(stderr=True, highlight=False)

    def build(step_callback):
        return build_report(net, tol=gap, method=method, advice_share=advice_share,
                            toll_plans=toll_plans, sweep_levels=levels,
                            learning_days=learning_days, learning_replications=replications,
                            learning_noise=supply_noise, seed=seed, progress=step_callback)

    if progress:
        status = console.status("starting")
        with status:
            report = build(lambda step, detail="": status.update(
                _STEP_TEXT.get(step, step) + (f" ({detail})" if detail else "")))
            status.update("writing the report folder")
            written = _write(write_report, report, out_dir, image_format, embed, InputError)
    else:
        report = build(None)
        written = _write(write_report, report, out_dir, image_format, embed, InputError)
    click.echo(f"wrote {len(written)} files to {out_dir}:")
    for path in written:
        click.echo(f"  {path.name}")
    click.echo(f"open {Path(out_dir) / 'report.html'}")
    if not is_lonlat(net.crs) and any(p.name == "links.geojson" for p in written):
        click.echo(f"note: links.geojson carries the network's own coordinates "
                   f"({net.crs or 'coordinate system not stated'}), not longitude/latitude; "
                   "assign that system when importing it into a GIS.", err=True)
    for note in report.notes:
        if note.startswith("No "):
            click.echo(f"note: {note}", err=True)


def _write(write_report, report, out_dir, image_format, embed, input_error):
    try:
        return write_report(report, out_dir, image_format=image_format, embed=embed)
    except OSError as err:
        raise input_error(f"cannot write the report: {err.strerror}", path=out_dir) from err
