"""``congest inspect NETWORK``: sizes, zones, demand and consistency checks of a network."""

from __future__ import annotations

import json
import sys

import click

from ._common import SHOWN_PAIRS, friendly_errors, load_network, network_options

__all__ = ["command", "describe"]


def describe(net) -> dict:
    """Figures and findings about ``net`` (what ``congest inspect`` prints).

    Returns
    -------
    dict
        ``sizes``, ``settings``, ``demand``, ``links`` (counts by kind and type, ranges)
        and ``findings``: a list of ``{"level": "problem"|"note", "text": ...}``.
    """
    import numpy as np

    from ..network import COST_KINDS
    from ..paths import ShortestPaths

    findings = []
    names = {v: k for k, v in COST_KINDS.items()}
    out_deg = np.bincount(net.tail, minlength=net.n_nodes)
    in_deg = np.bincount(net.head, minlength=net.n_nodes)

    o, d, q = net.od_pairs()
    origins = net.demand.sum(axis=1)
    dests = net.demand.sum(axis=0)
    demand = {
        "total_trips": net.total_demand,
        "od_pairs_with_trips": int(q.size),
        "zones_sending": int((origins > 0).sum()),
        "zones_receiving": int((dests > 0).sum()),
    }
    if q.size:
        demand["largest_origin"] = {"zone": int(net.zone_ids[int(np.argmax(origins))]),
                                    "trips": float(origins.max())}
        demand["largest_destination"] = {"zone": int(net.zone_ids[int(np.argmax(dests))]),
                                         "trips": float(dests.max())}

    links = {"cost_kinds": {names[int(k)]: int(c) for k, c in zip(
        *np.unique(net.cost_kind, return_counts=True), strict=True)}}
    for key in ("facility_type", "link_type"):
        if key in net.link_attrs:
            vals, counts = np.unique(np.asarray(net.link_attrs[key]).astype(str),
                                     return_counts=True)
            links[key] = {str(v): int(c) for v, c in zip(vals, counts, strict=True)}
    for key, arr in (("capacity_veh_h", net.capacity), ("free_flow_time_min",
                                                        net.free_flow_time)):
        if arr.size:
            links[key] = {"min": float(arr.min()), "median": float(np.median(arr)),
                          "max": float(arr.max())}
    if not np.isnan(net.length).all():
        links["total_length"] = float(np.nansum(net.length))
    links["tolled"] = int((net.toll > 0).sum())
    links["with_fixed_cost"] = int((net.fixed_cost > 0).sum())
    links["constant_time"] = int(((net.alpha == 0) & (net.cost_kind != 1)).sum())

    # problems: things that stop a solve
    if q.size:
        _, od_cost = ShortestPaths(net).all_or_nothing(net.free_flow_time + 1.0)
        bad = np.argwhere((net.demand > 0) & ~np.isfinite(od_cost))
        if len(bad):
            shown = ", ".join(f"{net.zone_ids[a]}->{net.zone_ids[b]}"
                              for a, b in bad[:SHOWN_PAIRS])
            more = f" and {len(bad) - SHOWN_PAIRS} more" if len(bad) > SHOWN_PAIRS else ""
            findings.append({"level": "problem", "text": (
                f"{len(bad)} OD pair(s) with trips have no path: {shown}{more}")})
    else:
        findings.append({"level": "note", "text": "the network has no demand"})
    # notes: odd but solvable
    zn = net.zone_nodes
    for what, deg in (("no link leaving", out_deg), ("no link arriving", in_deg)):
        lonely = net.zone_ids[deg[zn] == 0]
        if lonely.size:
            findings.append({"level": "note", "text": f"{lonely.size} zone(s) with {what}: "
                             + ", ".join(map(str, lonely[:SHOWN_PAIRS]))})
    isolated = net.node_ids[(out_deg == 0) & (in_deg == 0)]
    if isolated.size:
        findings.append({"level": "note", "text": f"{isolated.size} node(s) without links: "
                         + ", ".join(map(str, isolated[:SHOWN_PAIRS]))})
    pairs = net.tail.astype(np.int64) * net.n_nodes + net.head
    n_parallel = int(pairs.size - np.unique(pairs).size)
    if n_parallel:
        findings.append({"level": "note", "text": f"{n_parallel} parallel link(s) (same "
                         "from and to node as another link)"})
    if net.through_centroids:
        findings.append({"level": "note", "text": "routes may pass through zone centroids"})

    return {
        "name": net.name,
        "sizes": {"nodes": net.n_nodes, "links": net.n_links, "zones": net.n_zones},
        "settings": {"period_hours": net.period_hours, "value_of_time": net.value_of_time,
                     "currency": net.currency, "length_unit": net.length_unit,
                     "crs": net.crs, "through_centroids": net.through_centroids},
        "demand": demand,
        "links": links,
        "findings": findings,
    }


def _lines(info, layout):
    s, st, dm, lk = info["sizes"], info["settings"], info["demand"], info["links"]
    yield f"{info['name']}  ({layout.kind} layout, {layout.folder})"
    yield f"  nodes {s['nodes']:,}   links {s['links']:,}   zones {s['zones']:,}"
    rule = "may" if st["through_centroids"] else "may not"
    yield (f"  period {st['period_hours']:g} h   value of time {st['value_of_time']:g} "
           f"{st['currency']}/h   routes {rule} pass through zones")
    if st["length_unit"] or st["crs"]:
        yield f"  length unit {st['length_unit'] or '?'}   crs {st['crs'] or '?'}"
    yield (f"demand: {dm['total_trips']:,.1f} trips, {dm['od_pairs_with_trips']:,} OD pairs, "
           f"{dm['zones_sending']} zones sending, {dm['zones_receiving']} receiving")
    if "largest_origin" in dm:
        yield (f"  largest origin zone {dm['largest_origin']['zone']} "
               f"({dm['largest_origin']['trips']:,.1f}), largest destination zone "
               f"{dm['largest_destination']['zone']} "
               f"({dm['largest_destination']['trips']:,.1f})")
    kinds = ", ".join(f"{k} {v}" for k, v in lk["cost_kinds"].items())
    yield f"links: cost functions {kinds}"
    for key in ("facility_type", "link_type"):
        if key in lk:
            yield f"  {key}: " + ", ".join(f"{k} {v}" for k, v in lk[key].items())
    for key, label in (("capacity_veh_h", "capacity veh/h"),
                       ("free_flow_time_min", "free-flow time min")):
        if key in lk:
            r = lk[key]
            yield f"  {label}: {r['min']:g} .. {r['median']:g} (median) .. {r['max']:g}"
    if "total_length" in lk:
        yield f"  total length {lk['total_length']:,.1f} {st['length_unit']}".rstrip()
    yield (f"  tolled {lk['tolled']}, with fixed cost {lk['with_fixed_cost']}, "
           f"constant travel time {lk['constant_time']}")
    if info["findings"]:
        yield "checks:"
        for f in info["findings"]:
            yield f"  {f['level']}: {f['text']}"
    else:
        yield "checks: nothing to report"


@click.command("inspect")
@click.argument("network", type=click.Path(exists=True))
@click.option("--json", "as_json", is_flag=True, help="Print the figures as JSON.")
@network_options
@friendly_errors
def command(network, as_json, **net_opts):
    """Show sizes, settings, demand and consistency checks of NETWORK.

    Reads NETWORK exactly as ``congest solve`` does (same options) and reports what it
    found. Exits with code 1 when a check finds a problem that would stop a solve (OD
    pairs with trips but no path).

    \b
    Examples:
      congest inspect networks/quillhaven
      congest inspect networks/quillhaven --json
      congest inspect my-links.csv --demand my-od.csv --zones 1-38
    """
    net, layout = load_network(network, **net_opts)
    info = describe(net)
    if as_json:
        click.echo(json.dumps(info, indent=2))
    else:
        for line in _lines(info, layout):
            click.echo(line)
    if any(f["level"] == "problem" for f in info["findings"]):
        sys.exit(1)
