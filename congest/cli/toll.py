"""``congest toll NETWORK``: first-best or second-best toll table."""

from __future__ import annotations

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

__all__ = ["command", "parse_groups", "parse_classes"]


def parse_groups(net, on_links, on_attribute):
    """Toll groups from ``--on`` (comma-separated link ids) and ``--on-attribute``.

    Each option value is one group whose links share one toll.
    """
    from ..exceptions import InputError

    groups = []
    for text in on_links:
        ids = []
        for part in str(text).split(","):
            part = part.strip()
            if not part:
                continue
            try:
                ids.append(int(part))
            except ValueError:
                raise InputError("--on takes link ids separated by commas",
                                 value=part) from None
            if int(part) not in set(net.link_ids.tolist()):
                raise InputError("--on names a link the network does not have", value=part)
        if not ids:
            raise InputError("--on needs at least one link id", value=text)
        groups.append(ids)
    for text in on_attribute:
        name, sep, wanted = str(text).partition("=")
        name, wanted = name.strip(), wanted.strip()
        if not sep or not name or not wanted:
            raise InputError("--on-attribute takes NAME=VALUE, e.g. facility_type=old_bridge",
                             value=text)
        if name not in net.link_attrs:
            known = ", ".join(sorted(net.link_attrs)) or "none"
            raise InputError(f"the network has no link attribute {name!r} (attributes: "
                             f"{known})", value=text)
        from ..io.tollplan import _matches

        mask = _matches(net.link_attrs[name], wanted)
        if not mask.any():
            values = sorted({str(v) for v in net.link_attrs[name]})
            shown = ", ".join(values[:12]) + (f", ... ({len(values)} values)"
                                              if len(values) > 12 else "")
            raise InputError(f"no link has {name} equal to {wanted!r}; its values are: "
                             f"{shown}", value=text)
        groups.append(net.link_ids[mask].tolist())
    return groups


def parse_classes(values):
    """User classes from ``--class NAME:SHARE:VALUE_OF_TIME`` values."""
    from ..exceptions import InputError
    from ..multiclass import UserClass

    classes = []
    for text in values:
        parts = [p.strip() for p in str(text).split(":")]
        if len(parts) != 3 or not parts[0]:
            raise InputError("--class takes NAME:SHARE:VALUE_OF_TIME, e.g. "
                             "business:0.2:45", value=text)
        try:
            share, vot = float(parts[1]), float(parts[2])
        except ValueError:
            raise InputError("--class share and value of time must be numbers",
                             value=text) from None
        classes.append(UserClass(parts[0], share, vot))
    return classes


@click.command("toll")
@click.argument("network", type=click.Path(exists=True))
@click.option("--on", "on_links", multiple=True, metavar="IDS",
              help="Second best: tollable links by id, comma-separated; the links of one "
                   "--on share one toll (both directions of a bridge). Repeat for more "
                   "groups. Without --on or --on-attribute: first-best tolls on every link.")
@click.option("--on-attribute", "on_attribute", multiple=True, metavar="NAME=VALUE",
              help="Second best: one toll group of every link whose attribute NAME equals "
                   "VALUE (e.g. facility_type=bridge). Repeatable.")
@click.option("--max-charge", type=click.FloatRange(min=0, min_open=True), default=None,
              metavar="MONEY",
              help="Second best: highest toll searched, money per vehicle. Default: twice "
                   "the largest first-best toll.")
@click.option("--search",
              type=click.Choice(["auto", "bounded", "powell", "nelder-mead", "l-bfgs-b",
                                 "gradient"]),
              default="auto", show_default=True,
              help="Second best: search over toll levels (auto: bounded scalar search "
                   "for one group, Powell for several; l-bfgs-b: quasi-Newton on "
                   "finite-difference gradients; gradient: quasi-Newton on the "
                   "equilibrium's sensitivity, needs a route-based method such as gp).")
@click.option("--max-evals", type=click.IntRange(min=2), default=200, show_default=True,
              help="Second best: cap on equilibrium solves.")
@click.option("--class", "class_specs", multiple=True, metavar="NAME:SHARE:VOT",
              help="A user class: its share of every OD pair's trips and its value of time "
                   "(money per hour). Repeat; shares sum to 1. Adds a table of who gains "
                   "and who pays under the tolls (<out>-classes.csv).")
@click.option("--out", "out", type=click.Path(dir_okay=False), default=None,
              help="Toll table CSV. Default: <network>-tolls.csv in the current folder.")
@solver_options
@network_options
@friendly_errors
def command(network, on_links, on_attribute, max_charge, search, max_evals, class_specs,
            out, gap, method, max_iter, **net_opts):
    """Write the first-best (marginal-cost) or second-best toll table of NETWORK.

    Without --on/--on-attribute every link gets its marginal-cost toll x t'(x) at the
    system optimum, and the tolled equilibrium is checked against it. With them, congest
    searches toll levels on those links only that minimise total travel time under the
    drivers' response, and reports the share of the first-best gain they recover.

    \b
    Examples:
      congest toll networks/quillhaven
      congest toll networks/quillhaven --on-attribute facility_type=old_bridge
      congest toll networks/quillhaven --on 157,158 --on 359,360 --on 391,392 --max-charge 8
      congest toll networks/quillhaven --on-attribute "name=West Ring Bridge"
      congest toll networks/quillhaven --class commuter:0.8:15 --class business:0.2:45
    """
    import numpy as np
    import pandas as pd

    from ..exceptions import InputError
    from ..io.atomic import atomic_write
    from ..pricing import TOLL_RELATIVE_FLOOR, first_best, second_best, tolled_mask

    gap = default_gap(method) if gap is None else gap
    net, layout = load_network(network, **net_opts)
    check_paths(net, layout)
    groups = parse_groups(net, on_links, on_attribute)
    classes = parse_classes(class_specs)
    if classes:
        from ..multiclass import _check_classes

        _check_classes(classes)
    if out is None:
        out = Path(f"{_slug(Path(network).resolve().stem)}-tolls.csv")
    fb = first_best(net, tol=gap, method=method, max_iter=max_iter)
    cur = net.currency
    ends = {"link_id": net.link_ids, "from_node": net.node_ids[net.tail],
            "to_node": net.node_ids[net.head]}
    # the network's own link labels, so a reader finds the bridge by its name
    labels = {k: np.asarray(net.link_attrs[k]) for k in ("name", "facility_type")
              if k in net.link_attrs}
    ends.update(labels)
    if not groups:
        link_money = fb.tolls_money
        frame = pd.DataFrame({**ends, "so_volume": fb.so.flow,
                              "toll_min": fb.tolls_minutes, "toll_money": fb.tolls_money,
                              "tolled": tolled_mask(fb.tolls_minutes),
                              "tolled_volume": fb.tolled_ue.flow, "ue_volume": fb.ue.flow})
        lines = [
            f"first-best tolls on {fb.tolled_links.size} of {net.n_links} links "
            f"(value of time {net.value_of_time:g} {cur}/h; tolls under "
            f"{TOLL_RELATIVE_FLOOR:g} of the largest count as none)",
            f"vehicle-hours: UE {fb.ue.vehicle_hours:,.1f}, SO {fb.so.vehicle_hours:,.1f}, "
            f"tolled {fb.tolled_ue.vehicle_hours:,.1f}",
            f"price of anarchy {fb.price_of_anarchy:.4f}; tolled flows within "
            f"{fb.max_flow_deviation:.2g} vehicles of SO",
            f"revenue {fb.revenue_money:,.2f} {cur}, mean toll {fb.mean_toll_per_trip:.2f} "
            f"{cur} per trip",
            f"gaps: UE {fb.ue.relative_gap:.1e}, SO {fb.so.relative_gap:.1e}, tolled UE "
            f"{fb.tolled_ue.relative_gap:.1e}",
        ]
    else:
        bounds = None if max_charge is None else (0.0, max_charge)
        sb = second_best(net, groups, bounds=bounds, tol=gap, method=method, search=search,
                         max_evals=max_evals, solver_max_iter=max_iter, first_best_result=fb)
        rows = []
        for g, (idx, money, minutes) in enumerate(zip(sb.groups, sb.tolls_money,
                                                      sb.tolls_minutes, strict=True)):
            for i in idx:
                rows.append({"group": g + 1, "link_id": int(net.link_ids[i]),
                             "from_node": int(net.node_ids[net.tail[i]]),
                             "to_node": int(net.node_ids[net.head[i]]),
                             **{k: v[i] for k, v in labels.items()},
                             "toll_min": float(minutes), "toll_money": float(money),
                             "ue_volume": float(fb.ue.flow[i]),
                             "tolled_volume": float(sb.tolled_ue.flow[i]),
                             "first_best_toll_money": float(fb.tolls_money[i])})
        frame = pd.DataFrame(rows)
        link_money = sb.link_tolls_minutes * (net.value_of_time / 60.0)
        share = sb.share_of_first_best
        share_text = "n/a (UE is already SO)" if math.isnan(share) else f"{100 * share:.1f}%"
        tolls = ", ".join(f"group {g + 1}: {m:.2f} {cur}" for g, m in enumerate(sb.tolls_money))
        lines = [
            f"second-best tolls on {len(sb.groups)} group(s), "
            f"{sum(len(g) for g in sb.groups)} links: {tolls}",
            f"vehicle-hours: UE {sb.system_cost_ue / 60:,.1f}, SO {sb.system_cost_so / 60:,.1f},"
            f" tolled {sb.system_cost_tolled / 60:,.1f}",
            f"share of the first-best gain recovered: {share_text}",
            f"revenue {sb.revenue_money:,.2f} {cur}; {sb.evaluations} equilibrium solves "
            f"({sb.method}{'' if sb.converged else ', not converged: ' + sb.message})",
        ]
    written = [(out, frame, False)]
    if classes:
        from ..multiclass import class_impacts

        impacts = class_impacts(net, classes, link_money, method=method, tol=gap,
                                max_iter=max_iter)
        table = impacts.table
        class_out = Path(out).with_name(Path(out).stem + "-classes.csv")
        written.append((class_out, table, True))
        mean_vot = sum(float(c.share) * c.value_of_time for c in classes)
        vots = sorted({c.value_of_time for c in classes})
        span = (f"{vots[0]:g}" if len(vots) == 1 else f"{vots[0]:g} to {vots[-1]:g}")
        lines.append(f"with the classes (values of time {span} {cur}/h, mean {mean_vot:g}; "
                     f"the figures above are for one value of time, "
                     f"{net.value_of_time:g} {cur}/h):")
        so_vh = fb.so.vehicle_hours
        lines.append(f"  vehicle-hours: untolled {impacts.untolled.vehicle_hours:,.1f}, "
                     f"tolled {impacts.tolled.vehicle_hours:,.1f} (SO {so_vh:,.1f}); revenue "
                     f"{impacts.revenue_money:,.2f} {cur}")
        # differences within what the solves' gaps resolve are not reported
        if not groups and impacts.tolled.vehicle_hours > so_vh * (1 + max(1e-6, 100 * gap)):
            lines.append("  these tolls do not reproduce the system optimum for this class "
                         "mix: one money toll per link weighs differently with each class's "
                         "value of time")
        lines.append(f"  per class (multi-class equilibrium, relative gap "
                     f"{impacts.tolled.relative_gap:.1e}):")
        lines.append(f"    {'class':<14}{'trips':>10}{'min/trip':>10}{'toll/trip':>11}"
                     f"{'d min':>9}{'d cost ' + cur:>16}")
        for name, row in table.iterrows():
            lines.append(f"    {str(name):<14}{row['trips']:>10,.0f}"
                         f"{row['mean_time_min']:>10.2f}{row['mean_toll_money']:>11.2f}"
                         f"{row['time_change_min']:>+9.2f}{row['cost_change_money']:>+16.2f}")
        lines.append("    (d = change against no toll; cost = time at the class's value of "
                     "time plus toll, before any use of the revenue)")
    try:
        for path, data, keep_index in written:
            with atomic_write(path, newline="") as fh:
                data.to_csv(fh, index=keep_index, lineterminator="\n")
    except OSError as err:
        raise InputError(f"cannot write the toll table: {err.strerror}", path=out) from err
    lines.append(f"toll table: {out}")
    if classes:
        lines.append(f"class table: {written[1][0]}")
    for line in lines:
        click.echo(line)
