"""``congest learn NETWORK``: day-to-day learning, a short summary and the per-day table."""

from __future__ import annotations

import json
import math
import warnings
from pathlib import Path

import click

from ..exceptions import ConvergenceWarning
from ._common import _slug, check_paths, friendly_errors, load_network, network_options

__all__ = ["command"]

RULE_NAMES = {"hedge": "hedge", "logit": "logit", "best-response": "best_response",
              "smith": "smith"}


def _pair(text):
    try:
        o, d = text.split(":")
        return int(o), int(d)
    except ValueError as err:
        raise click.BadParameter(f"expected ORIGIN:DESTINATION zone ids, got {text!r}",
                                 param_hint="--track") from err


def _fmt(value, spec):
    return "n/a" if value is None or (isinstance(value, float) and math.isnan(value)) \
        else format(value, spec)


def _spread(ov):
    """The summary's row on how far the replications differ."""
    if not ov["draws_at_random"]:
        return ("none, all identical: nothing here is random (see --supply-noise, "
                "--estimate-noise, --drivers)")
    return (f"{ov['final_vehicle_hours_spread']:,.1f} vehicle-hours between the lowest and "
            "the highest on the last day")


def summary_lines(res, net, out, shares_out):
    """The short summary ``congest learn`` prints, as (label, value) rows."""
    p = res.params
    ov = res.overview()
    rate = f"rate {p['rate']:g} ({p['schedule']})"
    if p["rule"] == "logit":
        rate += f", theta {p['theta']:g}/min"
    noise = []
    for what, key in (("capacity", "supply_noise"), ("estimate", "estimate_noise")):
        if p[key]:
            noise.append(f"{what} sd {100 * p[key]:.3g}% (CV {p[key]:g})")
    drivers = "continuum" if p["drivers"] is None else f"{p['drivers']:,} drivers"
    reached = ov["share_reaching_gap"]
    rows = [
        ("network", f"{net.name}: {net.n_zones} zones, {net.n_links} links, "
                    f"{res.route_set.n_routes:,} routes in the route set"),
        ("rule", f"{p['rule'].replace('_', ' ')}, {rate}"),
        ("population", f"{drivers}, {p['information']} information, "
                       f"{p['advice_share']:.0%} follow advice"),
        ("noise", ", ".join(noise) if noise else "none"),
        ("days x replications", f"{p['days']} x {p['replications']}"),
        ("final vehicle-hours", f"{ov['final_vehicle_hours']:,.1f}"
                                + (" (median)" if p["replications"] > 1 else "")
                                + f"; user equilibrium {ov['ue_vehicle_hours']:,.1f}"),
    ]
    if p["replications"] > 1:
        rows.append(("spread over replications", _spread(ov)))
    rows += [
        (f"days to gap {p['gap_target']:g}",
         f"{_fmt(ov['days_to_gap'], '.0f')} (median; reached in {reached:.0%} of runs)"),
        ("final relative gap", _fmt(ov["final_gap"], ".3e")),
        ("gap of time-averaged flows", _fmt(ov["average_gap"], ".3e")),
        ("average regret", f"{_fmt(ov['final_mean_regret'], '.4g')} min per trip"),
        ("oscillates", (f"yes in {ov['oscillating_share']:.0%} of runs"
                        + (f", period {ov['period']} days" if ov["period"] else ""))
         if ov["oscillating_share"] > 0 else "no"),
        ("per-day table", str(out)),
    ]
    if shares_out is not None:
        rows.append(("route shares", str(shares_out)))
    return rows


def chart_title(res, net):
    """Title of the learning chart: the network and the run's setting."""
    return f"{net.name}: day-to-day learning ({res.label()})"


def _echo_warning(message, category, filename, lineno, file=None, line=None):
    click.echo(f"warning: {message}", err=True)


def _write_csv(frame, path):
    from ..exceptions import InputError
    from ..io import atomic_write

    try:
        with atomic_write(path, newline="") as fh:
            frame.to_csv(fh, index=False, lineterminator="\n")
    except OSError as err:
        raise InputError(f"cannot write the table: {err.strerror}", path=path) from err


@click.command("learn")
@click.argument("network", type=click.Path(exists=True))
@click.option("--rule", type=click.Choice(sorted(RULE_NAMES)), default="hedge",
              show_default=True,
              help="hedge: multiplicative weights; logit: smoothed perceived costs with "
                   "logit choice; best-response: a share switches to yesterday's best "
                   "route; smith: proportional switching to cheaper routes.")
@click.option("--rate", type=click.FloatRange(min=0, min_open=True), default=None,
              help="Learning rate, smoothing weight or switching share of the rule "
                   "(rule default if not given).")
@click.option("--schedule", type=click.Choice(["constant", "sqrt", "harmonic"]),
              default=None, help="How the rate falls with the day t: constant, "
                                 "1/sqrt(t) or 1/t (rule default if not given).")
@click.option("--theta", type=click.FloatRange(min=0), default=1.0, show_default=True,
              help="Logit dispersion, per minute.")
@click.option("--days", type=click.IntRange(min=1), default=200, show_default=True,
              help="Days of repeated play in each replication.")
@click.option("--information", type=click.Choice(["full", "experience"]), default="full",
              show_default=True,
              help="full: estimates for every route of the set; experience: only for the "
                   "route driven.")
@click.option("--advice-share", type=click.FloatRange(0, 1), default=0.0, show_default=True,
              help="Share of drivers following a service that recommends yesterday's "
                   "fastest route.")
@click.option("--supply-noise", type=click.FloatRange(min=0), default=0.0, show_default=True,
              metavar="CV", help="Coefficient of variation of a daily capacity factor "
                                 "per link.")
@click.option("--estimate-noise", type=click.FloatRange(min=0), default=0.0,
              show_default=True, metavar="CV",
              help="Coefficient of variation of the noise on travel-time estimates.")
@click.option("--drivers", type=click.IntRange(min=1), default=None,
              help="Simulate this many individual drivers instead of a continuum.")
@click.option("--replications", type=click.IntRange(min=1), default=1, show_default=True,
              help="Independent runs, each with its own random draws; the per-day CSV has "
                   "one row per day and replication. Runs differ only with "
                   "--supply-noise, --estimate-noise or --drivers (otherwise nothing is "
                   "random and a warning says so).")
@click.option("--seed", type=int, default=None, help="Seed for every random draw.")
@click.option("--routes", "k", type=click.IntRange(min=0), default=3, show_default=True,
              help="Shortest paths per OD pair added to the route set, at free-flow and "
                   "at equilibrium costs (besides the routes used at equilibrium).")
@click.option("--max-routes", type=click.IntRange(min=1), default=None,
              help="Cap on routes per OD pair.")
@click.option("--gap-target", type=click.FloatRange(min=0, min_open=True), default=1e-3,
              show_default=True, help="Relative gap for 'days to gap'.")
@click.option("--gap-every", type=click.IntRange(min=1), default=1, show_default=True,
              help="Compute the whole-network gap every N days (and on the last).")
@click.option("--track", multiple=True, metavar="O:D",
              help="Record route shares of this OD pair (zone ids); repeatable.")
@click.option("--out", type=click.Path(dir_okay=False), default=None,
              help="Per-day CSV. Default: <network>-learn-days.csv in the current folder.")
@click.option("--shares-out", type=click.Path(dir_okay=False), default=None,
              help="Route-share CSV for --track. Default: beside --out, '-shares.csv'.")
@click.option("--chart", type=click.Path(dir_okay=False), default=None,
              help="Also draw the learning chart to this picture file (.png, .svg or "
                   ".pdf): vehicle-hours against the user equilibrium, the gap and any "
                   "--track route shares, titled with the rule, advice and noise.")
@click.option("--json", "as_json", is_flag=True, help="Print the summary as JSON.")
@network_options
@friendly_errors
def command(network, rule, rate, schedule, theta, days, information, advice_share,
            supply_noise, estimate_noise, drivers, replications, seed, k, max_routes,
            gap_target, gap_every, track, out, shares_out, chart, as_json, **net_opts):
    """Simulate drivers learning their routes day by day on NETWORK.

    Each day drivers choose among a few routes per OD pair, the network's cost functions
    give the travel times, and drivers update their choice with the chosen rule. Prints
    vehicle-hours on the last day against the user equilibrium (and how far replications
    differ), days to reach the gap target, the final gap, the gap of the time-averaged
    flows, average regret and whether the flows oscillate, and writes one row per day and
    replication (vehicle-hours in total_vehicle_hours).

    \b
    Examples:
      congest learn networks/quillhaven --days 300
      congest learn networks/quillhaven --rule logit --rate 0.2 --theta 0.5
      congest learn networks/quillhaven --advice-share 0.4 --supply-noise 0.1 \
          --replications 20 --seed 1 --chart learning.png
    """
    from ..learning import simulate

    if chart is not None:
        from ..exceptions import InputError
        from ..plotting import FORMATS

        if Path(chart).suffix.lower() not in FORMATS:
            raise InputError(f"--chart {chart}: unknown picture format "
                             f"{Path(chart).suffix!r}; use .png, .svg or .pdf")
    net, layout = load_network(network, **net_opts)
    check_paths(net, layout)
    pairs = [_pair(t) for t in track]
    try:
        with warnings.catch_warnings():
            # the library's own warnings (identical replications) as one plain line
            warnings.simplefilter("always", UserWarning)
            warnings.simplefilter("ignore", ConvergenceWarning)
            warnings.showwarning = _echo_warning
            res = simulate(net, rule=RULE_NAMES[rule], days=days, rate=rate,
                           schedule=schedule, theta=theta, information=information,
                           advice_share=advice_share, supply_noise=supply_noise,
                           estimate_noise=estimate_noise, drivers=drivers,
                           replications=replications, seed=seed, k=k, max_routes=max_routes,
                           track=pairs, gap_every=gap_every, gap_target=gap_target)
    except KeyError as err:
        raise click.BadParameter(str(err.args[0]), param_hint="--track") from err
    except ValueError as err:
        raise click.UsageError(str(err)) from err
    if out is None:
        out = Path(f"{_slug(Path(network).resolve().stem)}-learn-days.csv")
    out = Path(out)
    _write_csv(res.days, out)
    if pairs:
        shares_out = Path(shares_out) if shares_out else out.with_name(
            out.stem + "-shares.csv")
        _write_csv(res.route_shares, shares_out)
    else:
        shares_out = None
    if chart is not None:
        _draw(res, net, Path(chart))
    if as_json:
        data = res.overview()
        data.update(network=net.name, per_day_table=str(out),
                    route_shares=None if shares_out is None else str(shares_out),
                    chart=None if chart is None else str(chart))
        data = {key: (None if isinstance(v, float) and math.isnan(v) else v)
                for key, v in data.items()}
        click.echo(json.dumps(data, indent=2))
        return
    rows = summary_lines(res, net, out, shares_out)
    if chart is not None:
        rows.append(("chart", str(chart)))
    width = max(len(label) for label, _ in rows)
    for label, value in rows:
        click.echo(f"{label:<{width}}  {value}")


def _draw(res, net, path):
    import matplotlib

    matplotlib.use("Agg")
    from .. import plotting
    from ..exceptions import InputError

    fig = plotting.learning_chart(res, ue_total=60.0 * res.ue_vehicle_hours,
                                  title=chart_title(res, net))
    try:
        plotting.save_figure(fig, path)
    except OSError as err:
        raise InputError(f"cannot write the chart: {err.strerror}", path=path) from err
