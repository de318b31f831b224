"""Side-by-side scenarios: advice to all, selfish routing, system optimum and tolls.

:func:`compare` answers the analyst's three questions on one network: what selfish
routing costs (UE against SO), what a routing service that tells everyone the same
fastest route does (free-flow advice, reactive advice, advice followed by a share of
drivers), and which tolls fix it, at what revenue (marginal-cost tolls and any toll
plans the user gives).

Every row is measured the same way at the travel times its flows cause:

``vehicle_hours``
    Total travel time, vehicle-hours (tolls and fixed charges excluded).
``mean_trip_time_min``
    Travel time per trip, minutes.
``vehicle_distance``
    Sum of volume times link length, in the network's length unit (NaN without lengths).
``revenue_money``
    Tolls collected on top of the network's own, in its currency.
``system_cost_hours``
    System cost: volume times the network's generalized cost as given (time plus its
    fixed charges and own tolls; added tolls excluded), vehicle-hours.
``ratio_to_so``
    System cost over the system optimum's; for UE this is the price of anarchy.
``max_volume_capacity``, ``links_over_capacity``
    Largest volume/capacity ratio, and how many links exceed 1.
``relative_gap``
    Gap the scenario's solver reached on its own objective (NaN when no solver ran).
``wardrop_gap``
    UE relative gap of the scenario's flows under the costs its drivers see: 0 for a
    user equilibrium, larger the more drivers could gain by changing route.

The reactive-advice row shows time averages over the days after the burn-in: the
average day's vehicle-hours, system cost and gap, and link flows and times averaged
day by day.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .advice import advice_share as _advice_share
from .advice import free_flow_advice, reactive_advice
from .equilibrium import default_tol
from .pricing import apply_toll_plan, first_best, system_cost

__all__ = ["ScenarioComparison", "compare", "TABLE_COLUMNS", "LINK_COLUMNS"]

#: Columns of :attr:`ScenarioComparison.table`, in order.
TABLE_COLUMNS = (
    "label", "vehicle_hours", "mean_trip_time_min", "vehicle_distance", "revenue_money",
    "system_cost_hours", "ratio_to_so", "max_volume_capacity", "links_over_capacity",
    "relative_gap", "wardrop_gap",
)

#: Columns of each frame in :attr:`ScenarioComparison.links`, in order.
LINK_COLUMNS = ("link_id", "from_node", "to_node", "volume", "travel_time", "cost",
                "toll_money", "volume_capacity")


@dataclass(frozen=True, eq=False)
class ScenarioComparison:
    """Result of :func:`compare`.

    Attributes
    ----------
    network : Network
    table : pandas.DataFrame
        One row per scenario, indexed by a short snake_case key (``free_flow_advice``,
        ``reactive_advice``, ``advice_share``, ``user_equilibrium``,
        ``system_optimum``, ``marginal_cost_tolls``, ``plan_<name>``); columns
        :data:`TABLE_COLUMNS`. ``table.attrs`` holds ``currency``, ``length_unit``,
        ``value_of_time`` and ``advice_share``.
    links : dict of str to pandas.DataFrame
        Link results per scenario key, columns :data:`LINK_COLUMNS`, named as in
        :func:`congest.io.link_results`: ``volume`` (vehicles in the period),
        ``travel_time`` (minutes), ``cost`` (generalized cost the drivers see, added
        tolls included, minutes), ``toll_money`` (added toll, in the network's
        currency), ``volume_capacity``.
    results : dict of str to object
        The underlying results: ``first_best`` (:class:`~congest.pricing.FirstBest`),
        ``free_flow_advice`` (Equilibrium), ``reactive_advice``
        (:class:`~congest.advice.ReactiveAdvice`), ``advice_share``
        (:class:`~congest.advice.AdviceShare`), and ``plan_<name>``
        (:class:`~congest.pricing.TolledScenario`).
    """

    network: object
    table: pd.DataFrame
    links: dict = field(repr=False)
    results: dict = field(repr=False)


def _link_frame(net, flow, time, added_toll_minutes, added_toll_money):
    cap = net.period_capacity
    with np.errstate(divide="ignore", invalid="ignore"):
        vc = np.where(cap > 0, flow / cap, np.nan)
    return pd.DataFrame({
        "link_id": net.link_ids,
        "from_node": net.node_ids[net.tail],
        "to_node": net.node_ids[net.head],
        "volume": np.asarray(flow, dtype=np.float64),
        "travel_time": np.asarray(time, dtype=np.float64),
        "cost": np.asarray(time, dtype=np.float64) + net.constant_cost + added_toll_minutes,
        "toll_money": np.broadcast_to(added_toll_money, flow.shape).astype(np.float64),
        "volume_capacity": vc,
    }, columns=list(LINK_COLUMNS))


def _row(net, label, links, *, vehicle_hours, system_cost_min, revenue, solver_gap,
         wardrop_gap, vehicle_distance=None):
    flow = links["volume"].to_numpy()
    vc = links["volume_capacity"].to_numpy()
    total = net.total_demand
    if vehicle_distance is None:
        vehicle_distance = float("nan") if np.isnan(net.length).all() else float(
            flow @ np.nan_to_num(net.length))
    return {
        "label": label,
        "vehicle_hours": float(vehicle_hours),
        "mean_trip_time_min": 60.0 * vehicle_hours / total if total else 0.0,
        "vehicle_distance": float(vehicle_distance),
        "revenue_money": float(revenue),
        "system_cost_hours": system_cost_min / 60.0,
        "ratio_to_so": np.nan,  # filled once SO is known
        "max_volume_capacity": float(np.nanmax(vc)) if np.isfinite(vc).any() else np.nan,
        "links_over_capacity": int(np.sum(np.nan_to_num(vc) > 1.0)),
        "relative_gap": float(solver_gap),
        "wardrop_gap": float(wardrop_gap),
    }


def compare(net, *, advice_share=0.5, toll_plans=(), tol=None, method="auto",
            max_iter=None, n_days=60, burn_in=10, response=1.0) -> ScenarioComparison:
    """Compare routing-advice, equilibrium and tolling scenarios on one network.

    Parameters
    ----------
    net : Network
    advice_share : float, default 0.5
        Share of drivers following the free-flow advice in the mixed scenario.
    toll_plans : sequence of TollPlan, default ()
        User toll plans (see :func:`congest.io.tollplan.read_toll_plan`), each solved
        as a UE with its charges.
    tol : float, optional
        Relative-gap target of every equilibrium solve. Default:
        :func:`congest.equilibrium.default_tol`, 1e-10, or 1e-5 with a link-based
        method.
    method : str, default "auto"
        Equilibrium method (see :func:`congest.solve`).
    max_iter : int, optional
        Iteration cap of each solve.
    n_days, burn_in, response
        Reactive advice settings (see :func:`congest.advice.reactive_advice`).

    Returns
    -------
    ScenarioComparison

    Notes
    -----
    Solves: UE, SO, UE with marginal-cost tolls (warm-started from SO), the selfish
    group's UE in the mixed advice scenario (cold: its demand differs), and one UE per
    toll plan (warm-started from the UE). Reactive advice costs ``n_days``
    all-or-nothing passes.

    Examples
    --------
    Pigou's network (Pigou 1920): UE is 4/3 of SO.

    >>> from congest.network import Network
    >>> pigou = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
    ...                 free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
    ...                 cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
    ...                 demand=[[0, 1], [0, 0]])
    >>> cmp = compare(pigou, tol=1e-10)
    >>> cmp.table.loc[["user_equilibrium", "system_optimum"], "ratio_to_so"].round(6).tolist()
    [1.333333, 1.0]
    """
    tol = default_tol(method) if tol is None else tol
    vot = net.value_of_time
    zero = np.zeros(net.n_links)
    rows, links, results = {}, {}, {}

    fb = first_best(net, tol=tol, method=method, max_iter=max_iter)
    results["first_best"] = fb

    ff = free_flow_advice(net)
    results["free_flow_advice"] = ff
    links["free_flow_advice"] = _link_frame(net, ff.flow, ff.time, zero, 0.0)
    rows["free_flow_advice"] = _row(
        net, "free-flow advice to all", links["free_flow_advice"],
        vehicle_hours=ff.vehicle_hours, system_cost_min=system_cost(ff, net), revenue=0.0,
        solver_gap=np.nan, wardrop_gap=ff.relative_gap)

    ra = reactive_advice(net, n_days=n_days, burn_in=burn_in, response=response)
    results["reactive_advice"] = ra
    keep = slice(ra.burn_in, None)
    daily_system = (np.einsum("dl,dl->d", ra.flows[keep], _daily_times(net, ra.flows[keep]))
                    + ra.flows[keep] @ net.constant_cost)
    links["reactive_advice"] = _link_frame(net, ra.mean_flow, ra.mean_time, zero, 0.0)
    rows["reactive_advice"] = _row(
        net, "reactive advice (day average)", links["reactive_advice"],
        vehicle_hours=ra.mean_vehicle_hours, system_cost_min=float(daily_system.mean()),
        revenue=0.0, solver_gap=np.nan, wardrop_gap=ra.mean_relative_gap,
        vehicle_distance=ra.mean_vehicle_distance)

    mix = _advice_share(net, advice_share, tol=tol, method=method, max_iter=max_iter)
    results["advice_share"] = mix
    links["advice_share"] = _link_frame(net, mix.total.flow, mix.total.time, zero, 0.0)
    rows["advice_share"] = _row(
        net, f"advice followed by {100 * advice_share:g}%", links["advice_share"],
        vehicle_hours=mix.total.vehicle_hours, system_cost_min=system_cost(mix.total, net),
        revenue=0.0, solver_gap=np.nan if mix.selfish is None else mix.selfish.relative_gap,
        wardrop_gap=mix.total.relative_gap)

    for key, label, eq in (("user_equilibrium", "user equilibrium", fb.ue),
                           ("system_optimum", "system optimum", fb.so)):
        links[key] = _link_frame(net, eq.flow, eq.time, zero, 0.0)
        ue_gap = eq.relative_gap if eq.objective == "ue" else _ue_gap(net, eq.flow)
        rows[key] = _row(net, label, links[key], vehicle_hours=eq.vehicle_hours,
                         system_cost_min=system_cost(eq, net), revenue=0.0,
                         solver_gap=eq.relative_gap, wardrop_gap=ue_gap)

    t = fb.tolled_ue
    links["marginal_cost_tolls"] = _link_frame(net, t.flow, t.time, fb.tolls_minutes,
                                               fb.tolls_money)
    rows["marginal_cost_tolls"] = _row(
        net, "marginal-cost tolls", links["marginal_cost_tolls"], vehicle_hours=t.vehicle_hours,
        system_cost_min=fb.system_cost_tolled, revenue=fb.revenue_money,
        solver_gap=t.relative_gap, wardrop_gap=t.relative_gap)

    for plan in toll_plans:
        key = f"plan_{_slug(plan.name)}"
        if key in rows:
            raise ValueError(f"two toll plans share the name {plan.name!r}")
        res = apply_toll_plan(net, plan, tol=tol, method=method, max_iter=max_iter,
                              warm_start=fb.ue)
        results[key] = res
        eq = res.equilibrium
        added_min = plan.charge * (60.0 / vot)
        links[key] = _link_frame(net, eq.flow, eq.time, added_min, plan.charge)
        rows[key] = _row(net, f"toll plan {plan.name}", links[key],
                         vehicle_hours=eq.vehicle_hours, system_cost_min=res.system_cost,
                         revenue=res.revenue_money, solver_gap=eq.relative_gap,
                         wardrop_gap=eq.relative_gap)

    table = pd.DataFrame.from_dict(rows, orient="index")[list(TABLE_COLUMNS)]
    table.index.name = "scenario"
    so_cost = table.loc["system_optimum", "system_cost_hours"]
    table["ratio_to_so"] = table["system_cost_hours"] / so_cost if so_cost > 0 else np.nan
    table["links_over_capacity"] = table["links_over_capacity"].astype(np.int64)
    table.attrs.update({"currency": net.currency, "length_unit": net.length_unit,
                        "value_of_time": vot, "advice_share": float(advice_share),
                        "network": net.name})
    return ScenarioComparison(network=net, table=table, links=links, results=results)


def _daily_times(net, flows):
    from .costs import CostModel

    model = CostModel.from_network(net)
    return np.stack([model.time(f) for f in flows]) if len(flows) else np.zeros((0, net.n_links))


def _ue_gap(net, flow):
    from .advice import evaluate_flows

    return evaluate_flows(net, flow).relative_gap


def _slug(name):
    out = "".join(ch.lower() if ch.isalnum() else "_" for ch in str(name)).strip("_")
    return out or "unnamed"
