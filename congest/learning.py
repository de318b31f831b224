"""Day-to-day learning: repeated route choice with noisy travel-time estimates.

Drivers of every OD pair choose among the routes of a :class:`~congest.routesets.RouteSet`
day after day. Each day

1. the drivers' choices give route flows, route flows give link flows (sparse route-link
   incidence) and link flows give travel times through the network's cost functions,
   optionally with a random capacity factor per link and day (supply noise);
2. the day is recorded: vehicle-hours, relative gap of the day's flows against
   shortest paths in the *whole* network, distance to the UE link flows, per-driver
   regret, the share of drivers who switched;
3. drivers receive travel-time estimates, optionally noisy (estimate noise): for every
   route of their set (``information="full"``, a traveller-information service) or only
   for the route they drove (``information="experience"``), and update their choice
   with one of the published rules below;
4. a share of drivers (``advice_share``) follows a service that recommends yesterday's
   fastest route of the set to all its users.

Update rules (``rule=``), with ``s_t`` the rate of day ``t`` (``rate`` times the
schedule: constant, ``1/sqrt(t)`` or ``1/t``) and ``m`` a driver's latest known route
costs:

``"hedge"``
    Multiplicative weights on normalised costs: tomorrow's choice probabilities are
    proportional to ``exp(-s_t L)``, ``L`` the cumulative normalised cost of each route
    (Freund & Schapire 1997; Blum, Even-Dar & Ligett 2006; Krichene, Drighes & Bayen
    2015). Costs are normalised by ``cost_scale`` (default: the OD pair's UE cost).
``"logit"``
    Exponentially smoothed perceived costs ``c <- c + s_t (estimate - c)`` and logit
    choice with dispersion ``theta`` per minute (Horowitz 1984; Cascetta 1989).
``"best_response"``
    Inertial best response: a share ``s_t`` of drivers switches to yesterday's best
    known route. With ``rate=1`` and ``schedule="harmonic"`` this is the method of
    successive averages (share ``1/(t+1)`` on day ``t``).
``"smith"``
    Proportional switching (Smith 1984): from each route to each cheaper one moves
    ``s_t * flow * (cost difference) / cost_scale``, capped at the route's flow.

The population is a continuum by default (shares of each OD pair's demand). With
``drivers=N`` a finite population of ``N`` integer drivers is drawn (each carrying an
equal part of its OD demand); each driver then holds its own memory and samples its
route from its own choice probabilities. Under ``information="experience"`` a driver
learns only the cost of the route it drove; in the continuum each route's estimate is
taken up by the share of drivers who drove it (the mean-field form of the same rule).

Randomness comes from one :class:`numpy.random.SeedSequence` spawned into one
:class:`numpy.random.Generator` per replication, so results depend only on ``seed``
(not on the number of threads). Only three things are drawn at random: the capacity
factors (``supply_noise``), the factors on the estimates (``estimate_noise``) and, with
``drivers``, who follows advice and which route each driver samples. Without any of them
the run is deterministic and every replication repeats the first, which
:func:`simulate` warns about when more than one is asked for. Replications run together
in the compiled kernels, which are parallel over replications and OD pairs or drivers;
with fewer replications than threads, each day's whole-network gap (one shortest-path
tree per origin) runs on its own thread beside the rest of the day loop.

References
----------
.. [1] Freund, Y. & Schapire, R.E. (1997). A decision-theoretic generalization of on-line
   learning and an application to boosting. J. Computer and System Sciences 55(1).
.. [2] Blum, A., Even-Dar, E. & Ligett, K. (2006). Routing without regret: on convergence
   to Nash equilibria of regret-minimizing algorithms in routing games. PODC 2006.
.. [3] Krichene, W., Drighes, B. & Bayen, A.M. (2015). Online learning of Nash equilibria
   in congestion games. SIAM J. Control and Optimization 53(2), 1056-1081.
.. [4] Horowitz, J.L. (1984). The stability of stochastic equilibrium in a two-link
   transportation network. Transportation Research B 18(1), 13-28.
.. [5] Cascetta, E. (1989). A stochastic process approach to the analysis of temporal
   dynamics in transportation networks. Transportation Research B 23(1), 1-17.
.. [6] Smith, M.J. (1984). The stability of a dynamic model of traffic assignment -- an
   application of a method of Lyapunov. Transportation Science 18(3), 245-252.
.. [7] Cesa-Bianchi, N. & Lugosi, G. (2006). Prediction, Learning, and Games. Cambridge
   University Press (Theorems 2.2 and 2.3).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numba
import numpy as np

from .costs import CostModel, time_scalar
from .paths import ShortestPaths, adjacency_costs, iheap_pop, iheap_update

__all__ = ["simulate", "LearningResult", "draws_at_random", "RULES", "SCHEDULES",
           "INFORMATION"]

#: Update rules and their codes in the compiled kernels.
RULES = {"hedge": 0, "logit": 1, "best_response": 2, "smith": 3}
#: Rate schedules ``g(n)`` with ``s_n = rate * g(n)``.
SCHEDULES = {"constant": lambda n: 1.0, "sqrt": lambda n: 1.0 / np.sqrt(n),
             "harmonic": lambda n: 1.0 / n}
INFORMATION = ("full", "experience")
#: Default ``(rate, schedule)`` of each rule.
DEFAULTS = {"hedge": (10.0, "sqrt"), "logit": (0.3, "constant"),
            "best_response": (0.1, "constant"), "smith": (0.5, "constant")}
#: How each rule is named in labels and titles.
RULE_LABELS = {"hedge": "Hedge", "logit": "smoothed logit",
               "best_response": "inertial best response", "smith": "proportional switching"}


def draws_at_random(*, supply_noise=0.0, estimate_noise=0.0, drivers=None) -> bool:
    """Whether a run with these settings draws anything at random.

    Capacity noise, estimate noise and a finite population of drivers (who sample their
    routes and whether they follow advice) are the only sources of randomness; without
    them replications are identical whatever the seed.
    """
    return supply_noise > 0 or estimate_noise > 0 or drivers is not None


# ------------------------------------------------------------------------- kernels
@numba.njit(cache=True, parallel=True)
def _route_flows(continuum, share, cur, follower, follow_share, adv, agent_mass, od_agent_ptr,
                 od_ptr, n_routes, out, out_sum, moved):
    """Route flows ``out`` (R, n_routes) from choices; learners and advice followers.

    The new flows are added to ``out_sum``; in the continuum ``moved[r, od]`` is the
    flow of the pair on other routes than the day before, times two (``sum |f - f'|``).
    """
    n_rep = out.shape[0]
    n_od = od_ptr.size - 1
    for item in numba.prange(n_rep * n_od):
        r = item // n_od
        od = item - r * n_od
        start = od_ptr[od]
        n = od_ptr[od + 1] - start
        if continuum:
            # one agent per OD pair
            a = od_agent_ptr[od]
            mass = agent_mass[a]
            best = adv[r, od]
            change = 0.0
            for j in range(n):
                v = 0.0 + mass * (1.0 - follow_share) * share[r, a, j]
                if j == best:
                    v += mass * follow_share
                change += abs(v - out[r, start + j])
                out[r, start + j] = v
                out_sum[r, start + j] += v
            moved[r, od] = change
            continue
        for j in range(n):
            out[r, start + j] = 0.0
        for a in range(od_agent_ptr[od], od_agent_ptr[od + 1]):
            mass = agent_mass[a]
            if follower[r, a]:
                out[r, start + adv[r, od]] += mass
            else:
                out[r, start + cur[r, a]] += mass
        for j in range(n):
            out_sum[r, start + j] += out[r, start + j]


#: Route blocks of the link loading; a fixed number, so that link flows (sums of the
#: blocks' partial flows in block order) do not depend on the number of threads.
LOAD_BLOCKS = 8


@numba.njit(cache=True, parallel=True)
def _link_costs(route_flow, r_lptr, r_lidx, kind, t0, alpha, beta, cap, const, xi, noisy,
                x, t_act, c_nom, part):
    """Link flows, actual travel times (capacity factor ``xi``) and nominal costs.

    Flows are scattered route by route into small (cache-resident) link arrays ``part``
    (R, LOAD_BLOCKS, n_links), one block of consecutive routes per task, and the blocks
    are then added per link in block order; costs are filled per link.
    """
    n_rep, n_links = x.shape
    n_routes = r_lptr.size - 1
    n_blocks = part.shape[1]
    per_block = (n_routes + n_blocks - 1) // n_blocks
    for item in numba.prange(n_rep * n_blocks):
        r = item // n_blocks
        b = item - r * n_blocks
        xb = part[r, b]
        for e in range(n_links):
            xb[e] = 0.0
        for p in range(b * per_block, min(n_routes, (b + 1) * per_block)):
            v = route_flow[r, p]
            if v != 0.0:
                for k in range(r_lptr[p], r_lptr[p + 1]):
                    xb[r_lidx[k]] += v
    for item in numba.prange(n_rep * n_links):
        r = item // n_links
        e = item - r * n_links
        v = 0.0
        for b in range(n_blocks):
            v += part[r, b, e]
        x[r, e] = v
        nominal = time_scalar(kind[e], t0[e], alpha[e], beta[e], cap[e], v)
        c_nom[r, e] = nominal + const[e]
        if noisy:
            t_act[r, e] = time_scalar(kind[e], t0[e], alpha[e], beta[e], cap[e] * xi[r, e], v)
        else:
            t_act[r, e] = nominal


@numba.njit(cache=True, parallel=True)
def _route_costs(c_act, c_nom, both, r_lptr, r_lidx, out_act, out_nom, cum_act):
    """Route costs (sums over links) at the actual and, if ``both``, the nominal costs;
    the actual ones are added to ``cum_act``."""
    n_rep, n_routes = out_act.shape
    for item in numba.prange(n_rep * n_routes):
        r = item // n_routes
        p = item - r * n_routes
        s = 0.0
        s_nom = 0.0
        if both:
            for k in range(r_lptr[p], r_lptr[p + 1]):
                s += c_act[r, r_lidx[k]]
                s_nom += c_nom[r, r_lidx[k]]
        else:
            for k in range(r_lptr[p], r_lptr[p + 1]):
                s += c_act[r, r_lidx[k]]
            s_nom = s
        out_act[r, p] = s
        cum_act[r, p] += s
        out_nom[r, p] = s_nom


@numba.njit(cache=True, parallel=True)
def _od_best(route_value, od_ptr, out_min, out_arg):
    """Cheapest route of every OD pair: its value and its index within the pair."""
    n_rep = route_value.shape[0]
    n_od = od_ptr.size - 1
    for item in numba.prange(n_rep * n_od):
        r = item // n_od
        od = item - r * n_od
        best = 0
        start = od_ptr[od]
        for j in range(1, od_ptr[od + 1] - start):
            if route_value[r, start + j] < route_value[r, start + best]:
                best = j
        out_min[r, od] = route_value[r, start + best]
        out_arg[r, od] = best


@numba.njit(cache=True)
def _origin_sptt(origin, oz, zone_nodes, demand, indptr, adj_head, cost_adj, skip, dist,
                 pos, heap_key, heap_node):
    """``sum_d q_od * dist(o, d)`` for one origin zone ``oz`` at node ``origin``.

    Dijkstra with the indexed heap of :mod:`congest.paths` over the adjacency-ordered
    costs ``cost_adj``. Nodes with ``skip[v]`` get their distance but are never settled
    (nothing is relaxed from them): centroids that may not be passed through, and nodes
    whose links all lead back to the one node they are entered from (a path through them
    returns where it was, so with non-negative costs it is never shorter).
    """
    for i in range(dist.size):
        dist[i] = np.inf
        pos[i] = -1
    dist[origin] = 0.0
    size = iheap_update(heap_key, heap_node, pos, 0, 0.0, origin)
    while size > 0:
        d, u, size = iheap_pop(heap_key, heap_node, pos, size)
        for k in range(indptr[u], indptr[u + 1]):
            v = adj_head[k]
            nd = d + cost_adj[k]
            if nd < dist[v]:
                dist[v] = nd
                if not skip[v]:
                    size = iheap_update(heap_key, heap_node, pos, size, nd, v)
    total = 0.0
    for dz in range(zone_nodes.size):
        q = demand[oz, dz]
        if q > 0.0:
            total += q * dist[zone_nodes[dz]]  # inf when unreachable
    return total


@numba.njit(cache=True, nogil=True)
def _sptt_items(first, stride, cost, origins, zone_nodes, demand, indptr, adj_link,
                adj_head, skip, part):
    """Per-origin SPTT terms ``part[r, i]`` for items ``first, first + stride, ...`` of
    the ``n_rep * n_origins`` (replication, origin) pairs."""
    n_rep = cost.shape[0]
    n_orig = origins.size
    n_nodes = indptr.size - 1
    dist = np.empty(n_nodes)
    pos = np.empty(n_nodes, dtype=np.int32)
    heap_key = np.empty(n_nodes)
    heap_node = np.empty(n_nodes, dtype=np.int32)
    cost_adj = np.empty(adj_link.size)
    last_r = -1
    for item in range(first, n_rep * n_orig, stride):
        r = item // n_orig
        i = item - r * n_orig
        if r != last_r:
            adjacency_costs(cost[r], adj_link, cost_adj)
            last_r = r
        oz = origins[i]
        part[r, i] = _origin_sptt(zone_nodes[oz], oz, zone_nodes, demand, indptr, adj_head,
                                  cost_adj, skip, dist, pos, heap_key, heap_node)


@numba.njit(cache=True, parallel=True)
def _network_sptt(cost, origins, zone_nodes, demand, indptr, adj_link, adj_head, skip,
                  n_chunks):
    """Shortest-path total cost per replication over the whole network (SPTT)."""
    part = np.empty((cost.shape[0], origins.size))
    for c in numba.prange(n_chunks):
        _sptt_items(c, n_chunks, cost, origins, zone_nodes, demand, indptr, adj_link,
                    adj_head, skip, part)
    return part.sum(axis=1)


@numba.njit(cache=True, nogil=True)
def _network_sptt_nogil(cost, origins, zone_nodes, demand, indptr, adj_link, adj_head,
                        skip):
    """:func:`_network_sptt` on one thread without the GIL (runs beside the day loop)."""
    part = np.empty((cost.shape[0], origins.size))
    _sptt_items(0, 1, cost, origins, zone_nodes, demand, indptr, adj_link, adj_head, skip,
                part)
    return part.sum(axis=1)


def _gap_graph(network, sp):
    """Forward star (32-bit) and the ``skip`` flags of :func:`_origin_sptt`."""
    tail, head = network.tail, network.head
    n = network.n_nodes
    skip = sp.blocked.astype(np.uint8).copy()
    # the one node each node's links lead to (-1: several), and links entering from
    # another node than that one
    first_head = np.full(n, -1, dtype=np.int64)
    first_head[tail[::-1]] = head[::-1]
    n_out = np.bincount(tail, minlength=n)
    other_out = np.bincount(tail, weights=head != first_head[tail], minlength=n)
    other_in = np.bincount(head, weights=tail != first_head[head], minlength=n)
    skip[(n_out == 0) | ((other_out == 0) & (other_in == 0))] = 1
    return (sp.indptr, np.ascontiguousarray(sp.adj_link, dtype=np.int32),
            np.ascontiguousarray(sp.adj_head, dtype=np.int32), skip)


@numba.njit(cache=True, parallel=True)
def _learn(rule, continuum, experience, step, mem_rate, theta, route_cost, eps, noisy_est,
           u, share, cur, follower, adv, memory, cum_loss, scale, agent_od, od_ptr,
           route_cum, own_cum, follow_cum, regret_own, regret_follow, driven):
    """Regret bookkeeping for today, then each agent's choice for tomorrow."""
    n_rep, n_agents, width = memory.shape
    for item in numba.prange(n_rep * n_agents):
        r = item // n_agents
        a = item - r * n_agents
        od = agent_od[a]
        start = od_ptr[od]
        n = od_ptr[od + 1] - start
        # --- regret: own cumulative cost against the best single route in hindsight
        best = np.inf
        for j in range(n):
            if route_cum[r, start + j] < best:
                best = route_cum[r, start + j]
        if continuum:
            today = 0.0
            for j in range(n):
                today += share[r, a, j] * route_cost[r, start + j]
            own_cum[r, a] += today
            follow_cum[r, a] += route_cost[r, start + adv[r, od]]
            regret_follow[r, a] = follow_cum[r, a] - best
            drove = -1
        else:
            drove = adv[r, od] if follower[r, a] else cur[r, a]
            own_cum[r, a] += route_cost[r, start + drove]
            driven[r, a] = drove
        regret_own[r, a] = own_cum[r, a] - best
        # --- information: estimates taken up by this agent
        for j in range(n):
            est = route_cost[r, start + j]
            if noisy_est:
                est *= eps[r, a, j]
            if experience:
                if continuum:
                    w = share[r, a, j]
                else:
                    w = 1.0 if j == drove else 0.0
            else:
                w = 1.0
            memory[r, a, j] += mem_rate * w * (est - memory[r, a, j])
        # --- tomorrow's choice probabilities p (written into share[r, a])
        p = share[r, a]
        if rule == 0 or rule == 1:
            lo = np.inf
            for j in range(n):
                if rule == 0:
                    cum_loss[r, a, j] += memory[r, a, j] / scale[od]
                    val = step * cum_loss[r, a, j]
                else:
                    val = theta * memory[r, a, j]
                p[j] = val
                if val < lo:
                    lo = val
            tot = 0.0
            for j in range(n):
                p[j] = np.exp(-(p[j] - lo))
                tot += p[j]
            for j in range(n):
                p[j] /= tot
        else:
            if not continuum:
                for j in range(n):
                    p[j] = 0.0
                p[cur[r, a]] = 1.0
            if rule == 2:
                b = 0
                for j in range(1, n):
                    if memory[r, a, j] < memory[r, a, b]:
                        b = j
                for j in range(n):
                    p[j] *= 1.0 - step
                p[b] += step
            else:
                # proportional switching: out of j towards every cheaper i
                moved = np.zeros(width)
                for j in range(n):
                    out = 0.0
                    for i in range(n):
                        diff = memory[r, a, j] - memory[r, a, i]
                        if diff > 0.0:
                            out += diff
                    out *= step / scale[od]
                    if out <= 0.0 or p[j] <= 0.0:
                        continue
                    f = 1.0 if out <= 1.0 else 1.0 / out
                    for i in range(n):
                        diff = memory[r, a, j] - memory[r, a, i]
                        if diff > 0.0:
                            moved[i] += p[j] * f * step * diff / scale[od]
                    moved[j] -= p[j] * f * out
                for j in range(n):
                    p[j] = max(p[j] + moved[j], 0.0)
        if not continuum:
            acc = 0.0
            pick = n - 1
            for j in range(n):
                acc += p[j]
                if u[r, a] < acc:
                    pick = j
                    break
            cur[r, a] = pick


# ---------------------------------------------------------------------------- result
@dataclass(frozen=True, eq=False)
class LearningResult:
    """Result of :func:`simulate`.

    Attributes
    ----------
    days : pandas.DataFrame
        One row per day and replication: ``day`` (1-based), ``replication``,
        ``total_vehicle_hours`` (total travel time at the day's actual times, constant
        terms excluded), ``system_cost_hours`` (total generalized cost, time plus the
        network's constant terms, vehicle-hours), ``relative_gap`` (of the
        day's flows against shortest paths in the whole network, nominal costs; NaN on
        days skipped by ``gap_every``), ``route_set_gap`` (the same against the
        cheapest route of each set), ``distance_to_ue`` (``||x - x_ue|| / ||x_ue||``),
        ``mean_regret`` and ``max_regret`` (regret of the learning drivers: cumulative
        cost minus that of the best single route of the set in hindsight, divided by the
        number of days so far, minutes per trip; mean weighted by trips, max over
        drivers, or over OD pairs in the continuum), ``advice_regret`` (the same for
        advice followers, mean; NaN without followers),
        ``switching_share`` (share of trips on another route than the day before),
        and ``total_travel_time``: the same as ``total_vehicle_hours`` in
        vehicle-minutes, kept for readers of older tables (the learning chart reads it).
    route_shares : pandas.DataFrame or None
        For the tracked OD pairs: ``day, replication, origin, destination, route, share``.
    summary : pandas.DataFrame
        One row per replication: ``days_to_gap``, ``final_gap``, ``average_gap`` (gap of
        the time-averaged flows), ``final_mean_regret``, ``final_max_regret``,
        ``oscillates``, ``period``.
    flow, mean_flow : ndarray of shape (n_replications, n_links)
        Link flows of the last day and averaged over all days.
    route_flow, mean_route_flow : ndarray of shape (n_replications, n_routes)
    ue_flow : ndarray of shape (n_links,)
        UE link flows the distance is measured to.
    route_set : RouteSet
    params : dict
        Rule, rate, schedule, noise and the other settings used.
    ue_vehicle_hours : float
        Total travel time of the user equilibrium ``ue_flow`` (constant terms excluded,
        nominal capacities), the reference for ``total_vehicle_hours``.
    """

    days: object
    route_shares: object
    summary: object
    flow: np.ndarray
    mean_flow: np.ndarray
    route_flow: np.ndarray
    mean_route_flow: np.ndarray
    ue_flow: np.ndarray
    route_set: object = field(repr=False)
    params: dict = field(default_factory=dict)
    ue_vehicle_hours: float = float("nan")

    @property
    def draws_at_random(self) -> bool:
        """Whether the run drew anything at random (see :func:`draws_at_random`); if not,
        its replications are identical."""
        p = self.params
        return draws_at_random(supply_noise=p.get("supply_noise", 0.0),
                               estimate_noise=p.get("estimate_noise", 0.0),
                               drivers=p.get("drivers"))

    def label(self) -> str:
        """The run's setting in a few words, for titles: rule, advice, noise, drivers.

        For example ``"Hedge, no advice, capacity noise sd 10%"``; noise is the standard
        deviation of the mean-1 factor, as a share of the mean (its coefficient of
        variation).
        """
        p = self.params
        rule = p.get("rule")
        parts = [RULE_LABELS.get(rule, str(rule))]
        share = p.get("advice_share", 0.0)
        parts.append(f"{_percent(share)} follow advice" if share else "no advice")
        noise = [f"{what} noise sd {_percent(p[key])}"
                 for what, key in (("capacity", "supply_noise"),
                                   ("estimate", "estimate_noise")) if p.get(key)]
        parts += noise or ["no noise"]
        if p.get("drivers") is not None:
            parts.append(f"{p['drivers']:,} drivers")
        return ", ".join(parts)

    def overview(self) -> dict:
        """Key figures across replications (medians; oscillation as a share).

        ``final_vehicle_hours`` is the median of the last day's total travel time and
        ``final_vehicle_hours_spread`` its range over replications (largest minus
        smallest; 0 for one replication). ``draws_at_random`` is False when the
        replications are identical by construction.
        """
        s = self.summary
        reached = s["days_to_gap"].dropna()
        last = self.days[self.days["day"] == self.days["day"].max()]
        vh = last["total_vehicle_hours"].to_numpy(dtype=float)
        return {
            "rule": self.params.get("rule"),
            "replications": int(len(s)),
            "days": int(self.days["day"].max()),
            "gap_target": self.params.get("gap_target"),
            "days_to_gap": float(reached.median()) if len(reached) else float("nan"),
            "share_reaching_gap": float(len(reached) / len(s)),
            "final_gap": float(s["final_gap"].median()),
            "average_gap": float(s["average_gap"].median()),
            "final_mean_regret": float(s["final_mean_regret"].median()),
            "oscillating_share": float(s["oscillates"].mean()),
            "period": int(s["period"].mode().iloc[0]) if len(s) else 0,
            "final_vehicle_hours": float(np.median(vh)),
            "final_vehicle_hours_spread": float(vh.max() - vh.min()),
            "ue_vehicle_hours": float(self.ue_vehicle_hours),
            "draws_at_random": self.draws_at_random,
        }


def _percent(share):
    """0.1 -> "10%", 0.125 -> "12.5%"."""
    return f"{100 * share:.3g}%"


# ------------------------------------------------------------------------ simulate
def _lognormal_params(cv):
    sigma2 = np.log1p(cv * cv)
    return -0.5 * sigma2, np.sqrt(sigma2)


def _split_drivers(demand, n):
    """Integer drivers per OD pair, proportional to demand, at least one each."""
    n = int(n)
    if n < demand.size:
        raise ValueError(f"drivers must be at least the number of OD pairs ({demand.size})")
    raw = demand / demand.sum() * (n - demand.size)
    base = np.floor(raw).astype(np.int64)
    rest = n - demand.size - base.sum()
    if rest > 0:
        base[np.argsort(-(raw - base), kind="stable")[:rest]] += 1
    return base + 1


def simulate(network, *, rule="hedge", days=100, rate=None, schedule=None, theta=1.0,
             cost_scale="ue", information="full", advice_share=0.0, supply_noise=0.0,
             estimate_noise=0.0, drivers=None, initial="uniform", route_set=None, k=3,
             max_routes=None, equilibrium=None, ue_tol=1e-8, replications=1, seed=None,
             track=(), gap_every=1, gap_target=1e-3, workers=None) -> LearningResult:
    """Simulate day-to-day route choice learning on ``network``.

    Parameters
    ----------
    network : Network
    rule : {"hedge", "logit", "best_response", "smith"}, default "hedge"
        Update rule (see the module docstring).
    days : int, default 100
    rate : float, optional
        Rule's rate: Hedge learning rate (per normalised cost), logit smoothing weight in
        (0, 1], best-response switching share in (0, 1], Smith switching rate. Default
        per rule in :data:`DEFAULTS`.
    schedule : {"constant", "sqrt", "harmonic"}, optional
        Rate on day ``t`` is ``rate``, ``rate / sqrt(t + 1)`` or ``rate / (t + 1)``
        (it sets the choice of day ``t + 1``). Default per rule (Hedge: ``"sqrt"``).
    theta : float, default 1.0
        Logit dispersion, per minute of perceived cost.
    cost_scale : "ue", float or ndarray of shape (n_od,), default "ue"
        Cost normalisation of Hedge and Smith, minutes: the OD pair's UE cost, one value
        for all, or one per OD pair of the route set.
    information : {"full", "experience"}, default "full"
    advice_share : float in [0, 1], default 0
        Share of drivers following a service that recommends yesterday's fastest route
        of the set (on day 1, the free-flow fastest).
    supply_noise : float, default 0
        Coefficient of variation of a lognormal capacity factor (mean 1) drawn per link
        and day.
    estimate_noise : float, default 0
        Coefficient of variation of a lognormal factor (mean 1) on every travel-time
        estimate a driver (or, in the continuum, an OD pair's population) receives.
    drivers : int, optional
        Finite-agent mode with this many drivers in total; default a continuum.
    initial : {"uniform", "free_flow"} or ndarray of shape (n_routes,), default "uniform"
        Day-1 route shares: equal, all on the free-flow fastest route, or given (scaled
        to each OD pair's demand).
    route_set : RouteSet, optional
        Default :func:`congest.routesets.build_route_set` with ``k`` and ``max_routes``.
    k, max_routes : int
        Passed to :func:`~congest.routesets.build_route_set`.
    equilibrium : Equilibrium, optional
        UE solution of ``network`` (default ``solve(network, tol=ue_tol)``).
    ue_tol : float, default 1e-8
    replications : int, default 1
        Independent runs, each with its own random stream. They differ only when the run
        draws something at random (``supply_noise``, ``estimate_noise`` or ``drivers``);
        otherwise they are identical and a warning says so.
    seed : int, SeedSequence or None
    track : sequence of (origin id, destination id), default ()
        OD pairs whose route shares are recorded every day.
    gap_every : int, default 1
        Compute the whole-network relative gap every this many days (and on the last).
    gap_target : float, default 1e-3
        Gap for ``days_to_gap`` and the oscillation flag in the summary.
    workers : int, optional
        Threads for the compiled kernels. Default: all of numba's threads when a day's
        work is large enough to pay for waking them (many replications or a large
        network), else one.

    Returns
    -------
    LearningResult

    Raises
    ------
    ValueError
        Unknown rule, schedule or information type, or a parameter out of range.

    Warns
    -----
    UserWarning
        More than one replication of a run that draws nothing at random.

    Notes
    -----
    Work per day is ``O(R (nnz + A K))`` for the loading and the updates (``nnz`` the
    route-link incidence entries, ``A`` agents, ``K`` routes per OD pair) plus one
    shortest-path tree per origin and replication for the gap. Memory is about
    ``3 R A K`` floats.

    Examples
    --------
    >>> from congest.network import Network
    >>> from congest.learning import simulate
    >>> pigou = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
    ...                 free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
    ...                 cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
    ...                 demand=[[0, 1], [0, 0]])
    >>> res = simulate(pigou, rule="hedge", days=2000, seed=1)
    >>> bool(res.summary["average_gap"].iloc[0] < 1e-3)
    True
    """
    options = dict(locals())
    previous = numba.get_num_threads()
    try:
        return _simulate(**options)
    finally:
        numba.set_num_threads(previous)


def _simulate(network, *, rule, days, rate, schedule, theta, cost_scale, information,
              advice_share, supply_noise, estimate_noise, drivers, initial, route_set, k,
              max_routes, equilibrium, ue_tol, replications, seed, track, gap_every,
              gap_target, workers):
    import pandas as pd

    from .equilibrium import relative_gap, solve
    from .routesets import build_route_set

    if rule not in RULES:
        raise ValueError(f"Unknown rule {rule!r}; choose one of {sorted(RULES)}")
    if information not in INFORMATION:
        raise ValueError(f"Unknown information {information!r}; choose 'full' or "
                         "'experience'")
    d_rate, d_sched = DEFAULTS[rule]
    rate = d_rate if rate is None else float(rate)
    schedule = d_sched if schedule is None else schedule
    if schedule not in SCHEDULES:
        raise ValueError(f"Unknown schedule {schedule!r}; choose one of {sorted(SCHEDULES)}")
    if not (rate > 0 and np.isfinite(rate)):
        raise ValueError(f"rate must be positive, got {rate!r}")
    if rule in ("logit", "best_response") and rate > 1:
        raise ValueError(f"rate of rule {rule!r} must be in (0, 1], got {rate!r}")
    days = int(days)
    replications = int(replications)
    if days < 1 or replications < 1:
        raise ValueError("days and replications must be at least 1")
    if not 0.0 <= advice_share <= 1.0:
        raise ValueError(f"advice_share must be in [0, 1], got {advice_share!r}")
    for name, val in (("supply_noise", supply_noise), ("estimate_noise", estimate_noise),
                      ("theta", theta)):
        if not (val >= 0 and np.isfinite(val)):
            raise ValueError(f"{name} must be non-negative, got {val!r}")
    gap_every = max(1, int(gap_every))
    if replications > 1 and not draws_at_random(supply_noise=supply_noise,
                                                estimate_noise=estimate_noise,
                                                drivers=drivers):
        warnings.warn(f"the {replications} replications will be identical: without "
                      "capacity noise, estimate noise or individual drivers the run draws "
                      "nothing at random", UserWarning, stacklevel=3)

    if equilibrium is None:
        equilibrium = solve(network, tol=ue_tol)
    if route_set is None:
        route_set = build_route_set(network, k=k, max_routes=max_routes,
                                    equilibrium=equilibrium)
    rs = route_set
    n_od, n_routes, width = rs.n_od, rs.n_routes, rs.max_routes
    od_ptr = np.ascontiguousarray(rs.od_indptr, dtype=np.int64)
    n_per_od = rs.routes_per_od
    route_od = rs.route_od
    q_od = rs.od_demand
    total_q = float(q_od.sum())
    ue_flow = np.asarray(equilibrium.flow, dtype=np.float64)

    # route -> links (CSR); 32-bit link indices halve the memory traffic of the daily
    # loading and route-cost sweeps
    r_lptr = np.ascontiguousarray(rs.link_indptr, dtype=np.int64)
    r_lidx = np.ascontiguousarray(rs.link_index, dtype=np.int32)

    model = CostModel.from_network(network)
    sp = ShortestPaths(network)
    free_route = rs.route_costs(network.free_flow_time + network.constant_cost)
    pad = np.full((n_od, width), -1, dtype=np.int64)
    col = np.arange(n_routes) - od_ptr[route_od]
    pad[route_od, col] = np.arange(n_routes)
    valid = pad >= 0
    pad_safe = np.where(valid, pad, 0)

    def od_argmin(route_values):  # (R, n_routes) -> (R, n_od) index within the pair
        out_min = np.empty((route_values.shape[0], n_od))
        out_arg = np.empty((route_values.shape[0], n_od), dtype=np.int64)
        _od_best(np.ascontiguousarray(route_values), od_ptr, out_min, out_arg)
        return out_arg

    if isinstance(cost_scale, str):
        if cost_scale != "ue":
            raise ValueError(f"Unknown cost_scale {cost_scale!r}; use 'ue' or a number")
        scale = equilibrium.od_cost[rs.od_origin, rs.od_destination].astype(np.float64)
    else:
        scale = np.broadcast_to(np.asarray(cost_scale, dtype=np.float64), (n_od,)).copy()
    scale = np.where(np.isfinite(scale) & (scale > 0), scale, 1.0)

    # agents: one per OD pair (continuum) or drivers grouped by OD pair
    continuum = drivers is None
    if continuum:
        per_od = np.ones(n_od, dtype=np.int64)
    else:
        per_od = _split_drivers(q_od, drivers)
    od_agent_ptr = np.concatenate([[0], np.cumsum(per_od)]).astype(np.int64)
    agent_od = np.repeat(np.arange(n_od), per_od).astype(np.int64)
    agent_mass = (q_od / per_od)[agent_od]
    n_agents = agent_od.size

    # initial shares per agent
    if isinstance(initial, str):
        if initial == "uniform":
            init_route = 1.0 / n_per_od[route_od]
        elif initial == "free_flow":
            best = od_argmin(free_route[None, :])[0]
            init_route = (col == best[route_od]).astype(np.float64)
        else:
            raise ValueError(f"Unknown initial {initial!r}; use 'uniform', 'free_flow' or "
                             "an array")
    else:
        init_route = np.asarray(initial, dtype=np.float64)
        if init_route.shape != (n_routes,) or (init_route < 0).any():
            raise ValueError(f"initial must be non-negative of shape ({n_routes},)")
        sums = np.bincount(route_od, weights=init_route, minlength=n_od)
        if (sums <= 0).any():
            raise ValueError("initial must put some weight on every OD pair")
        init_route = init_route / sums[route_od]
    init_pad = np.where(valid, init_route[pad_safe], 0.0)  # (n_od, width)

    R = replications
    seq = seed if isinstance(seed, np.random.SeedSequence) else np.random.SeedSequence(seed)
    rngs = [np.random.default_rng(s) for s in seq.spawn(R)]
    share = np.repeat(init_pad[agent_od][None, :, :], R, axis=0).copy()
    memory = np.repeat(np.where(valid, free_route[pad_safe], 0.0)[agent_od][None], R, axis=0)
    memory = np.ascontiguousarray(memory)
    cum_loss = np.zeros((R, n_agents, width))
    cur = np.zeros((R, n_agents), dtype=np.int64)
    follower = np.zeros((R, n_agents), dtype=np.uint8)
    if not continuum:
        cdf = np.cumsum(share[0], axis=1)
        for r, g in enumerate(rngs):
            follower[r] = g.random(n_agents) < advice_share
            u0 = g.random(n_agents)
            cur[r] = np.minimum((u0[:, None] >= cdf).sum(axis=1), n_per_od[agent_od] - 1)
    follow_share = float(advice_share) if continuum else 0.0
    adv = np.repeat(od_argmin(free_route[None, :]), R, axis=0).astype(np.int64)
    route_cum = np.zeros((R, n_routes))
    own_cum = np.zeros((R, n_agents))
    follow_cum = np.zeros((R, n_agents))
    regret_own = np.zeros((R, n_agents))
    regret_follow = np.zeros((R, n_agents))
    driven = np.zeros((R, n_agents), dtype=np.int64)
    prev_driven = np.full((R, n_agents), -1, dtype=np.int64)

    f = np.zeros((R, n_routes))
    od_moved = np.zeros((R, n_od))
    x_part = np.empty((R, LOAD_BLOCKS, network.n_links))
    x = np.zeros((R, network.n_links))
    t_act = np.zeros_like(x)
    c_nom = np.zeros_like(x)
    c_act = np.zeros_like(x)
    c_route = np.zeros((R, n_routes))
    od_min = np.zeros((R, n_od))
    od_arg = np.zeros((R, n_od), dtype=np.int64)
    c_route_nom = np.zeros((R, n_routes))
    xi = np.ones((R, network.n_links))
    eps = np.ones((R, n_agents, width)) if estimate_noise > 0 else np.ones((1, 1, 1))
    u = np.zeros((R, n_agents))
    sup_mu, sup_sigma = _lognormal_params(supply_noise)
    est_mu, est_sigma = _lognormal_params(estimate_noise)

    demand = np.ascontiguousarray(network.demand)
    previous_threads = numba.get_num_threads()
    n_chunks = max(1, min(numba.config.NUMBA_NUM_THREADS * 4, R * sp.origins.size))
    ue_norm = float(np.linalg.norm(ue_flow)) or 1.0
    window, max_lag = max(2, min(20, days // 4)), 10
    hist = np.zeros((window + max_lag, R, network.n_links))
    moves = np.zeros((days, R))

    rec = {name: np.full((days, R), np.nan) for name in (
        "total_vehicle_hours", "system_cost_hours", "relative_gap", "route_set_gap",
        "distance_to_ue", "mean_regret", "max_regret", "advice_regret", "switching_share")}
    tracked = [rs.od_index(o, d) for o, d in track]
    shares_rec = [np.zeros((days, R, n_per_od[i])) for i in tracked]
    sum_x = np.zeros_like(x)
    sum_f = np.zeros_like(f)
    mass_l = (agent_mass * (1.0 - follow_share))[None, :]
    mass_f = (agent_mass * follow_share)[None, :]
    rule_code = RULES[rule]
    mem_rate = rate if rule == "logit" else 1.0
    g_sched = SCHEDULES[schedule]
    experience = information == "experience"

    if workers is None:
        work = R * (r_lidx.size + n_agents * width + sp.origins.size * network.n_links)
        workers = previous_threads if work > 200_000 else 1
    workers = max(1, min(int(workers), numba.config.NUMBA_NUM_THREADS))
    # With fewer replications than threads, the whole-network gap of each day runs on a
    # thread of its own beside the day loop (which then uses the remaining threads);
    # otherwise the kernels share all threads over replications.
    pool = None
    if workers >= 2 and R < workers:
        from concurrent.futures import ThreadPoolExecutor

        pool = ThreadPoolExecutor(max_workers=1)
        workers -= 1
    numba.set_num_threads(workers)
    pending = None

    g_indptr, g_link, g_head, g_skip = _gap_graph(network, sp)

    def gap_args(cost):
        return (cost, sp.origins, sp.zone_nodes, demand, g_indptr, g_link, g_head, g_skip)

    for t in range(days):
        if supply_noise > 0:
            for r, g in enumerate(rngs):
                xi[r] = g.lognormal(sup_mu, sup_sigma, network.n_links)
        if estimate_noise > 0:
            for r, g in enumerate(rngs):
                eps[r] = g.lognormal(est_mu, est_sigma, (n_agents, width))
        if not continuum:
            for r, g in enumerate(rngs):
                u[r] = g.random(n_agents)

        _route_flows(continuum, share, cur, follower, follow_share, adv, agent_mass,
                     od_agent_ptr, od_ptr, n_routes, f, sum_f, od_moved)
        _link_costs(f, r_lptr, r_lidx, model.kind, model.t0, model.alpha, model.beta,
                    model.capacity, model.constant, xi, supply_noise > 0, x, t_act, c_nom,
                    x_part)
        np.add(t_act, model.constant[None, :], out=c_act)
        _route_costs(c_act, c_nom, supply_noise > 0, r_lptr, r_lidx, c_route, c_route_nom,
                     route_cum)
        sum_x += x
        if t > 0:
            moves[t] = np.linalg.norm(x - hist[(t - 1) % hist.shape[0]], axis=1) / ue_norm
        hist[t % hist.shape[0]] = x

        tstt_nom = np.einsum("ij,ij->i", x, c_nom)
        rec["total_vehicle_hours"][t] = np.einsum("ij,ij->i", x, t_act) / 60.0
        rec["system_cost_hours"][t] = np.einsum("ij,ij->i", x, c_act) / 60.0
        _od_best(c_route_nom, od_ptr, od_min, od_arg)
        # no BLAS in the day loop: its spinning threads would take the cores from numba's
        rs_sptt = np.einsum("ij,j->i", od_min, q_od)
        rec["route_set_gap"][t] = _gaps(tstt_nom, rs_sptt)
        if t % gap_every == 0 or t == days - 1:
            if pool is None:
                sptt = _network_sptt(*gap_args(c_nom), n_chunks)
                rec["relative_gap"][t] = _gaps(tstt_nom, sptt)
            else:
                if pending is not None:
                    day, tstt_day, future = pending
                    rec["relative_gap"][day] = _gaps(tstt_day, future.result())
                pending = (t, tstt_nom, pool.submit(_network_sptt_nogil,
                                                    *gap_args(c_nom.copy())))
        rec["distance_to_ue"][t] = np.linalg.norm(x - ue_flow[None, :], axis=1) / ue_norm
        if t > 0 and continuum:
            rec["switching_share"][t] = 0.5 * od_moved.sum(axis=1) / total_q
        elif t == 0:
            rec["switching_share"][t] = 0.0
        for i, od in enumerate(tracked):
            shares_rec[i][t] = f[:, od_ptr[od]:od_ptr[od + 1]] / q_od[od]

        step = rate * g_sched(t + 1)
        _learn(rule_code, continuum, experience, step, mem_rate, float(theta), c_route, eps,
               estimate_noise > 0, u, share, cur, follower, adv, memory, cum_loss, scale,
               agent_od, od_ptr, route_cum, own_cum, follow_cum, regret_own, regret_follow,
               driven)
        if continuum:
            w_learn = np.broadcast_to(mass_l, regret_own.shape)
            w_follow = np.broadcast_to(mass_f, regret_own.shape)
            reg_follow = regret_follow
        else:
            w_learn = agent_mass[None, :] * (1 - follower)
            w_follow = agent_mass[None, :] * follower
            reg_follow = regret_own
            if t > 0:
                rec["switching_share"][t] = ((driven != prev_driven) * agent_mass[None, :]
                                             ).sum(axis=1) / total_q
            prev_driven[:] = driven
        learners = w_learn.sum(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            num = (w_learn * regret_own).sum(axis=1) / learners
            rec["advice_regret"][t] = ((w_follow * reg_follow).sum(axis=1)
                                       / w_follow.sum(axis=1) / (t + 1))
        worst = np.max(np.where(w_learn > 0, regret_own, -np.inf), axis=1)
        rec["mean_regret"][t] = np.where(learners > 0, num, np.nan) / (t + 1)
        worst = np.where(learners > 0, worst, np.nan)
        rec["max_regret"][t] = worst / (t + 1)
        if advice_share > 0:
            if supply_noise > 0:
                _od_best(c_route, od_ptr, od_min, adv)
            else:
                adv[:] = od_arg

    if pool is not None:
        if pending is not None:
            day, tstt_day, future = pending
            rec["relative_gap"][day] = _gaps(tstt_day, future.result())
        pool.shutdown()
    mean_x = sum_x / days
    mean_f = sum_f / days
    average_gap = np.empty(R)
    mean_cost = np.stack([model.cost(mx) for mx in mean_x])
    sptt_mean = _network_sptt(*gap_args(np.ascontiguousarray(mean_cost)), n_chunks)
    for r in range(R):
        average_gap[r] = relative_gap(float(mean_x[r] @ mean_cost[r]), float(sptt_mean[r]))

    day_no = np.repeat(np.arange(1, days + 1), R)
    rep_no = np.tile(np.arange(R), days)
    table = pd.DataFrame({"day": day_no, "replication": rep_no,
                          **{k_: v.ravel() for k_, v in rec.items()}})
    table["total_travel_time"] = 60.0 * table["total_vehicle_hours"]
    table = table.sort_values(["replication", "day"], kind="stable").reset_index(drop=True)

    route_shares = None
    if tracked:
        parts = []
        for (o_id, d_id), od, arr in zip(track, tracked, shares_rec, strict=True):
            n = n_per_od[od]
            parts.append(pd.DataFrame({
                "day": np.repeat(np.arange(1, days + 1), R * n),
                "replication": np.tile(np.repeat(np.arange(R), n), days),
                "origin": o_id, "destination": d_id,
                "route": np.tile(np.arange(n), days * R),
                "share": arr.ravel()}))
        route_shares = pd.concat(parts, ignore_index=True)

    noisy = draws_at_random(supply_noise=supply_noise, estimate_noise=estimate_noise,
                            drivers=drivers)
    osc, period = _oscillation(hist, days, window, max_lag, ue_norm, noisy,
                               rec["route_set_gap"], gap_target, moves)
    gaps = rec["relative_gap"]
    reached = np.where(np.nan_to_num(gaps, nan=np.inf) <= gap_target, 1, 0)
    first = np.where(reached.any(axis=0), reached.argmax(axis=0) + 1.0, np.nan)
    summary = pd.DataFrame({
        "replication": np.arange(R),
        "days_to_gap": first,
        "final_gap": gaps[-1],
        "average_gap": average_gap,
        "final_mean_regret": rec["mean_regret"][-1],
        "final_max_regret": rec["max_regret"][-1],
        "oscillates": osc,
        "period": period,
    }).set_index("replication")

    params = dict(rule=rule, rate=rate, schedule=schedule, theta=theta, days=days,
                  information=information, advice_share=advice_share,
                  supply_noise=supply_noise, estimate_noise=estimate_noise, drivers=drivers,
                  replications=R, seed=seed if not isinstance(seed, np.random.SeedSequence)
                  else seed.entropy, gap_target=gap_target, n_routes=n_routes)
    for arr in (mean_x, mean_f, x, f):
        arr.setflags(write=False)
    return LearningResult(days=table, route_shares=route_shares, summary=summary, flow=x,
                          mean_flow=mean_x, route_flow=f, mean_route_flow=mean_f,
                          ue_flow=ue_flow, route_set=rs, params=params,
                          ue_vehicle_hours=float(ue_flow @ model.time(ue_flow)) / 60.0)


def _gaps(tstt, sptt):
    """Relative gaps ``(TSTT - SPTT) / TSTT`` per replication (0 when both are 0)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        gap = (tstt - sptt) / tstt
    return np.where(tstt == 0, np.where(sptt == 0, 0.0, np.inf), gap)


def _oscillation(hist, days, window, max_lag, scale, noisy, gaps, gap_target, moves):
    """Whether flows still swing at the end, and the period of a cycle (0 if none).

    Over the last ``window`` days, ``d(p)`` is the mean distance between the flows of
    day ``t`` and day ``t - p`` (relative to the UE flows). The flows *swing* when
    ``d(1) > 1e-3``, the mean route-set gap of those days exceeds ``gap_target`` (small
    moves close to equilibrium do not count) and the day-to-day moves have not shrunk
    to under 3/4 of what they were half-way through (a dying swing does not count);
    the period is the smallest ``p >= 2`` with ``d(p) < d(1) / 4``. Without noise
    swinging flows oscillate; with noise only a detected cycle counts.
    """
    n_rep = hist.shape[1]
    size = hist.shape[0]
    if days < window + max_lag:
        return np.zeros(n_rep, dtype=bool), np.zeros(n_rep, dtype=np.int64)
    dist = np.zeros((max_lag + 1, n_rep))
    for p in range(1, max_lag + 1):
        for t in range(days - window, days):
            a = hist[t % size]
            b = hist[(t - p) % size]
            dist[p] += np.linalg.norm(a - b, axis=1) / scale / window
    half = days // 2
    earlier = moves[max(1, half - window):half].mean(axis=0)
    later = moves[days - window:days].mean(axis=0)
    moving = ((dist[1] > 1e-3) & (gaps[days - window:days].mean(axis=0) > gap_target)
              & (later >= 0.75 * earlier))
    period = np.zeros(n_rep, dtype=np.int64)
    for r in range(n_rep):
        if moving[r]:
            for p in range(2, max_lag + 1):
                if dist[p, r] < 0.25 * dist[1, r]:
                    period[r] = p
                    break
    osc = moving & (period > 0) if noisy else moving
    return osc, period
