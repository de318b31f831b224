"""Seeded random small networks for the reference-solver, invariant and method tests.

Zones hang off a strongly connected core (a random Hamiltonian cycle plus extra links),
so every zone reaches every other zone without passing through a third zone; with
``through_centroids=True`` some zone-to-zone links are added that paths may chain.
"""

from __future__ import annotations

import numpy as np

from congest.network import Network


def random_network(rng, *, n_core=None, n_zones=None, through_centroids=False,
                   betas=(1.0, 2.0, 4.0), zero_alpha=0.2, fixed_cost=False,
                   demand_density=0.7, load=1.0, kinds=(0,)) -> Network:
    """A random strongly connected BPR network with a few zones.

    Parameters
    ----------
    rng : numpy.random.Generator
    n_core, n_zones : int, optional
        Sizes (default 4-8 core nodes, 2-4 zones).
    through_centroids : bool, default False
    betas : tuple of float
        BPR exponents to draw from.
    zero_alpha : float
        Share of links with constant cost (alpha = 0).
    fixed_cost : bool
        Draw a constant generalized-cost term per link.
    demand_density : float
        Share of OD pairs with demand.
    load : float
        Scales demand relative to capacities (about 1 means near capacity).
    kinds : tuple of int, default (0,)
        Cost-function kinds to draw from (0 BPR, 1 conical with alpha in [2, 6],
        2 polynomial).
    """
    n_core = int(rng.integers(4, 9)) if n_core is None else n_core
    n_zones = int(rng.integers(2, 5)) if n_zones is None else n_zones
    zones = np.arange(n_zones)
    core = np.arange(n_zones, n_zones + n_core)
    links = set()
    cycle = rng.permutation(core)
    for i in range(n_core):
        links.add((int(cycle[i]), int(cycle[(i + 1) % n_core])))
    for _ in range(int(rng.integers(n_core, 3 * n_core + 1))):
        u, v = rng.choice(core, 2, replace=False)
        links.add((int(u), int(v)))
    for z in zones:
        for v in rng.choice(core, int(rng.integers(2, 4)), replace=False):
            links.add((int(z), int(v)))
        for u in rng.choice(core, int(rng.integers(2, 4)), replace=False):
            links.add((int(u), int(z)))
    if through_centroids and n_zones > 1:
        for _ in range(n_zones):
            u, v = rng.choice(zones, 2, replace=False)
            links.add((int(u), int(v)))
    links = sorted(links)
    m = len(links)
    tail = np.array([a for a, _ in links])
    head = np.array([b for _, b in links])
    demand = rng.uniform(5.0, 60.0, (n_zones, n_zones))
    demand *= rng.random((n_zones, n_zones)) < demand_density
    np.fill_diagonal(demand, 0.0)
    if demand.sum() == 0.0:
        demand[0, 1] = 30.0
    alpha = rng.uniform(0.1, 1.0, m) * (rng.random(m) >= zero_alpha)
    kind = 0
    if tuple(kinds) != (0,):  # extra draws only here, so BPR streams stay as they were
        kind = rng.choice(np.asarray(kinds, np.int8), m)
        alpha = np.where(kind == 1, rng.uniform(2.0, 6.0, m), alpha)
    return Network(
        node_ids=np.arange(1, n_zones + n_core + 1),
        tail=tail, head=head,
        capacity=rng.uniform(20.0, 80.0, m) / load,
        free_flow_time=rng.uniform(1.0, 4.0, m),
        alpha=alpha,
        beta=rng.choice(np.asarray(betas, float), m),
        fixed_cost=rng.uniform(0.0, 3.0, m) if fixed_cost else 0.0,
        zone_ids=np.arange(1, n_zones + 1), zone_nodes=zones, demand=demand,
        cost_kind=kind, through_centroids=through_centroids, name="random",
    )


def grid_links(n_rows, n_cols):
    """Tails and heads of a two-way street grid, nodes numbered row by row from 0."""
    ids = np.arange(n_rows * n_cols).reshape(n_rows, n_cols)
    tail, head = [], []
    for r in range(n_rows):
        for c in range(n_cols):
            for rr, cc in ((r, c + 1), (r + 1, c)):
                if rr < n_rows and cc < n_cols:
                    tail += [ids[r, c], ids[rr, cc]]
                    head += [ids[rr, cc], ids[r, c]]
    return tail, head
