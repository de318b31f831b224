"""Build the demo city Quillhaven (fictional) as a GMNS folder: networks/quillhaven/.

Quillhaven is an invented river city. The river Sable runs west to east through the
middle; north of it lies the old centre with most jobs, south of it most homes. Three
bridges cross the river: the Old Bridge in the centre (short, two lanes each way, slow
streets on both ends) and the two bridges of the ring road, far to the west and east
(long way round, fast and wide). The street grid is denser towards the centre.

The morning-peak demand (one hour) sends most trips from the south bank into the
centre. Drivers choosing for themselves crowd the Old Bridge and the central streets;
the system optimum sends more of them round the ring. Everything is deterministic:
random perturbations come from a seeded generator.

Run from the repository root::

    python networks/tools/build_demo_city.py            # writes networks/quillhaven/
    python networks/tools/build_demo_city.py --check    # also solves UE/SO, prints PoA
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path

import numpy as np

from congest.io import write_gmns
from congest.network import Network

SEED = 20260
NAME = "Quillhaven"
OUT = Path(__file__).resolve().parents[1] / "quillhaven"

#: Street-grid positions in metres: closer together near the centre.
XS = [-3600, -2500, -1600, -1000, -500, 0, 500, 1000, 1600, 2500, 3600]
YS = [-3300, -2300, -1500, -900, -350, 350, 900, 1500, 2300, 3300]
#: Invented street names: east-west rows from south to north, north-south columns west to east.
ROW_NAMES = ["Heath Road", "Marsh Road", "Furnace Row", "Wharf Street", "South Riverside",
             "North Riverside", "Guild Street", "Abbey Street", "Beacon Road", "Hill Road"]
COLUMN_NAMES = ["Quarry Street", "Orchard Street", "Tanner Street", "Weaver Street",
                "Chandler Street", "Sable Avenue", "Cooper Street", "Mason Street",
                "Fletcher Street", "Thatcher Street", "Kiln Street"]
RIVER_Y = 0.0  # the Sable runs along y = 0 between the rows at -350 and 350
CITY_RADIUS = 3900.0  # grid nodes further out are fields, not streets
RING_RADIUS = 3500.0
RING_NODES = 16

#: Road classes: lanes per direction, capacity per lane per hour, free speed km/h.
ROADS = {
    "ring": (2, 1900.0, 90.0),
    "radial": (1, 1300.0, 60.0),
    "arterial": (2, 850.0, 45.0),
    "street": (1, 650.0, 30.0),
    "old_bridge": (2, 1000.0, 40.0),
    "connector": (None, None, None),
}
CONNECTOR_MINUTES = 1.0
DECAY_M = 2500.0  # gravity-model distance decay, metres
PEAK_TRIPS = 24000.0  # trips in the one-hour morning peak (base demand)


def build(peak_trips=PEAK_TRIPS, seed=SEED) -> Network:
    rng = np.random.default_rng(seed)
    node_id, x, y, node_type, node_name = [], [], [], [], []

    def add_node(i, px, py, kind="", label=""):
        node_id.append(i)
        x.append(float(px))
        y.append(float(py))
        node_type.append(kind)
        node_name.append(label)

    # street grid, ids 101.. row by row
    grid = {}
    for r, gy in enumerate(YS):
        for c, gx in enumerate(XS):
            if math.hypot(gx, gy) <= CITY_RADIUS:
                grid[r, c] = 101 + len(grid)
                add_node(grid[r, c], gx, gy)

    # ring road, ids 201..; offset half a step so the ring crosses the river mid-segment
    ring = []
    for k in range(RING_NODES):
        ang = 2 * math.pi * (k + 0.5) / RING_NODES
        ring.append(201 + k)
        add_node(ring[-1], round(RING_RADIUS * math.cos(ang), 1),
                 round(RING_RADIUS * math.sin(ang), 1),
                 label="Ring")

    links = []  # (from, to, road class, name, length km)
    pos = dict(zip(node_id, zip(x, y, strict=True), strict=True))

    def road(a, b, kind, label):
        (xa, ya), (xb, yb) = pos[a], pos[b]
        km = round(math.hypot(xa - xb, ya - yb) / 1000.0, 3)
        links.append((a, b, kind, label, km))
        links.append((b, a, kind, label, km))

    arterial_x = {-1600, 0, 1600}
    arterial_y = {-1500, -350, 350, 1500}
    for (r, c), n in grid.items():
        gx, gy = XS[c], YS[r]
        if (r, c + 1) in grid:  # east-west street
            kind = "arterial" if gy in arterial_y else "street"
            label = ROW_NAMES[r]
            road(n, grid[r, c + 1], kind, label)
        if (r + 1, c) in grid:  # north-south street
            crosses = (YS[r] < RIVER_Y) != (YS[r + 1] < RIVER_Y)
            if crosses and gx != 0:
                continue  # no bridge here
            if crosses:
                road(n, grid[r + 1, c], "old_bridge", "Old Bridge")
            else:
                kind = "arterial" if gx in arterial_x else "street"
                road(n, grid[r + 1, c], kind, COLUMN_NAMES[c])

    for k in range(RING_NODES):
        a, b = ring[k], ring[(k + 1) % RING_NODES]
        ya, yb = pos[a][1], pos[b][1]
        label = "Ring Road"
        if (ya < RIVER_Y) != (yb < RIVER_Y):
            label = "West Ring Bridge" if pos[a][0] < 0 else "East Ring Bridge"
        road(a, b, "ring", label)
        # radial to the nearest grid node on the city's edge
        rx, ry = pos[a]
        near = min(grid.values(), key=lambda n: math.hypot(pos[n][0] - rx, pos[n][1] - ry))
        road(a, near, "radial", "Radial")

    # zones: centroid nodes 1..n with connectors to the nearest grid nodes on their bank
    centres = _zone_centres()
    zone_ids = []
    homes, jobs = [], []
    for z, (zx, zy, h, j) in enumerate(centres, start=1):
        add_node(z, zx, zy, kind="centroid", label=f"Zone {z}")
        pos[z] = (float(zx), float(zy))
        zone_ids.append(z)
        homes.append(h * rng.uniform(0.85, 1.15))
        jobs.append(j * rng.uniform(0.85, 1.15))
        same_bank = [n for n in grid.values() if (pos[n][1] < RIVER_Y) == (zy < RIVER_Y)]
        near = sorted(same_bank, key=lambda n: math.hypot(pos[n][0] - zx, pos[n][1] - zy))[:2]
        for n in near:
            links.append((z, n, "connector", "Connector", None))
            links.append((n, z, "connector", "Connector", None))

    # assemble the network
    index = {n: i for i, n in enumerate(node_id)}
    m = len(links)
    tail = np.array([index[a] for a, *_ in links])
    head = np.array([index[b] for _, b, *_ in links])
    capacity = np.empty(m)
    fft = np.empty(m)
    alpha = np.full(m, 0.15)
    lanes = np.ones(m, dtype=np.int64)
    length = np.empty(m)
    for k, (a, b, kind, _, km) in enumerate(links):
        if kind == "connector":
            (xa, ya), (xb, yb) = pos[a], pos[b]
            length[k] = round(math.hypot(xa - xb, ya - yb) / 1000.0, 3)
            capacity[k] = 99999.0
            fft[k] = CONNECTOR_MINUTES
            alpha[k] = 0.0
            continue
        n_lanes, per_lane, speed = ROADS[kind]
        lanes[k] = n_lanes
        capacity[k] = n_lanes * per_lane
        length[k] = km
        fft[k] = 60.0 * km / speed

    demand = _demand(np.array(homes), np.array(jobs), centres, peak_trips)
    return Network(
        node_ids=node_id, tail=tail, head=head, capacity=capacity, free_flow_time=fft,
        alpha=alpha, beta=4.0, length=length, x=x, y=y,
        zone_ids=zone_ids, zone_nodes=[index[z] for z in zone_ids], demand=demand,
        through_centroids=False, period_hours=1.0, value_of_time=18.0, currency="crowns",
        length_unit="km", crs="a local metric grid of the fictional city, metres "
        "(origin at the Old Bridge, x east, y north)", name=NAME,
        link_attrs={"facility_type": np.array([k for _, _, k, _, _ in links], dtype=object),
                    "name": np.array([nm for _, _, _, nm, _ in links], dtype=object),
                    "lanes": lanes},
        node_attrs={"node_type": np.array(node_type, dtype=object),
                    "name": np.array(node_name, dtype=object)},
    )


def _zone_centres():
    """(x, y, homes weight, jobs weight) of each zone, centre first."""
    zones = []
    # centre north (old town, offices): many jobs
    for zx in (-1300, -750, -250, 250, 750, 1300):
        zones.append((zx, 625, 0.4, 5.0))
    for zx in (-750, 0, 750):
        zones.append((zx, 1200, 0.6, 3.0))
    # centre south (inner south bank): mixed
    for zx in (-1300, -250, 750):
        zones.append((zx, -625, 1.5, 2.5))
    # outer north: mostly homes, some jobs
    for ang in (30, 60, 90, 120, 150):
        a = math.radians(ang)
        zones.append((2900 * math.cos(a), 2600 * math.sin(a), 1.8, 0.8))
    zones.append((3300, 900, 1.0, 1.0))
    zones.append((-3300, 900, 1.0, 1.0))
    # outer south: the big housing districts
    for ang in (200, 225, 250, 270, 290, 315, 340):
        a = math.radians(ang)
        zones.append((3000 * math.cos(a), 2800 * math.sin(a), 3.0, 0.3))
    for zx in (-2000, 0, 2000):
        zones.append((zx, -1900, 2.5, 0.4))
    zones.append((3300, -900, 2.0, 0.5))
    zones.append((-3300, -900, 2.0, 0.5))
    return zones


def _demand(homes, jobs, centres, total):
    """Doubly weighted gravity model: homes x jobs x exp(-distance / DECAY_M)."""
    xy = np.array([(cx, cy) for cx, cy, *_ in centres], dtype=float)
    dist = np.hypot(xy[:, None, 0] - xy[None, :, 0], xy[:, None, 1] - xy[None, :, 1])
    w = homes[:, None] * jobs[None, :] * np.exp(-dist / DECAY_M)
    np.fill_diagonal(w, 0.0)
    trips = w / w.sum() * total
    return np.round(trips, 1)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=OUT)
    parser.add_argument("--check", action="store_true", help="solve UE and SO, print PoA")
    args = parser.parse_args(argv)
    net = build()
    write_gmns(net, args.out, description=(
        "Quillhaven, a fictional river city: morning peak hour. The Old Bridge is the "
        "short way across the Sable; the ring road's two bridges are the long way round. "
        "Built by networks/tools/build_demo_city.py."))
    print(f"wrote {args.out}: {net.n_zones} zones, {net.n_nodes} nodes, {net.n_links} links, "
          f"{net.total_demand:,.0f} trips")
    if args.check:
        from congest import solve

        ue = solve(net, objective="ue", method="bfw", tol=1e-6, max_iter=5000)
        so = solve(net, objective="so", method="bfw", tol=1e-6, max_iter=5000)
        print(f"UE {ue.vehicle_hours:,.1f} veh-h (gap {ue.relative_gap:.1e}), "
              f"SO {so.vehicle_hours:,.1f} veh-h (gap {so.relative_gap:.1e}), "
              f"PoA {ue.total_travel_time / so.total_travel_time:.4f}")


if __name__ == "__main__":
    main()
