"""Synthetic road networks of any size: grid, ring-radial and random planar.

Every generator builds the same kind of city: a road graph whose links belong to road
classes (capacity, free speed, lanes), zone centroids tied to the roads by connectors,
and a gravity-model demand scaled so that the network is as congested as asked. They
are seeded, need no downloads and return a :class:`~congest.network.Network` with node
coordinates (kilometres, a local plane), ready for :func:`congest.solve` or for writing
as a network folder.

Layout of the result
--------------------
* Nodes ``1..n_zones`` are the zone centroids (zone id = node id); road nodes follow.
  Paths may not pass through centroids (``through_centroids=False``).
* Every road segment is two directed links of its class; every zone has
  ``connectors`` two-way connector links to its nearest road nodes, with constant cost
  (``alpha = 0``) and the free speed of :data:`CONNECTOR`.
* ``link_attrs["facility_type"]`` holds the class name and ``link_attrs["lanes"]`` the
  lanes; ``capacity`` is the link's capacity in vehicles per hour (all lanes).

Demand and calibration
----------------------
Zone productions and attractions are drawn from a log-normal law; trips follow the
gravity model with an exponential deterrence in free-flow time,
``T_ij = k P_i A_j exp(-c_ij / tau)`` with ``tau`` the mean zone-to-zone free-flow time
(Wilson 1970). The scale ``k`` is set so that a volume/capacity statistic over the road
links (not connectors) that carry traffic -- ``"p90"`` (90th percentile, the default) or
``"mean"`` -- hits ``vc_target``:

* ``calibrate="aon"`` (default): at the free-flow all-or-nothing loading. Volumes are
  linear in ``k`` there, so one loading gives ``k`` exactly. Fast at any size; the
  loading concentrates traffic, so equilibrium volume/capacity ends lower.
* ``calibrate="ue"``: at user equilibrium (solved to relative gap 1e-3), by a fixed-point
  iteration ``k <- k * target / statistic`` until within 1 percent.

References
----------
.. [1] Wilson, A.G. (1970). Entropy in Urban and Regional Modelling. Pion, London.
.. [2] Delaunay, B. (1934). Sur la sphere vide. Izvestia Akademii Nauk SSSR 7, 793-800.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from .exceptions import ConvergenceWarning, SolverError
from .network import Network

__all__ = [
    "RoadClass",
    "ROAD_CLASSES",
    "CONNECTOR",
    "grid_network",
    "ring_radial_network",
    "planar_network",
    "generate_network",
    "GENERATORS",
]


@dataclass(frozen=True)
class RoadClass:
    """One class of road.

    Attributes
    ----------
    name : str
    capacity : float
        Vehicles per hour for the whole link (all lanes).
    free_speed : float
        Kilometres per hour.
    lanes : int
    alpha, beta : float
        BPR parameters (defaults 0.15 and 4: Bureau of Public Roads 1964, common practice).
    """

    name: str
    capacity: float
    free_speed: float
    lanes: int = 1
    alpha: float = 0.15
    beta: float = 4.0


#: Default road classes, fastest first (figures of the trade's usual order, common practice).
ROAD_CLASSES = (
    RoadClass("motorway", capacity=6000.0, free_speed=100.0, lanes=3),
    RoadClass("arterial", capacity=2400.0, free_speed=60.0, lanes=2),
    RoadClass("local", capacity=900.0, free_speed=40.0, lanes=1),
)

#: Zone connectors: constant cost (no congestion), ample capacity.
CONNECTOR = RoadClass("connector", capacity=10000.0, free_speed=30.0, lanes=1, alpha=0.0,
                      beta=1.0)

_STATISTICS = ("p90", "mean")


def _rng(seed):
    return np.random.default_rng(seed)


def _classes(road_classes):
    classes = tuple(ROAD_CLASSES if road_classes is None else road_classes)
    if len(classes) != 3:
        raise ValueError("road_classes must hold three classes: fast, middle, slow")
    return classes


# ----------------------------------------------------------------- geometries
def _grid_geometry(n_rows, n_cols, spacing, arterial_every, motorway_every):
    if n_rows < 2 or n_cols < 2:
        raise ValueError(f"a grid needs at least 2 rows and 2 columns, got {n_rows}x{n_cols}")
    r, c = np.divmod(np.arange(n_rows * n_cols), n_cols)
    xy = np.column_stack([c * spacing, r * spacing]).astype(np.float64)
    node = np.arange(n_rows * n_cols).reshape(n_rows, n_cols)
    horiz = np.column_stack([node[:, :-1].ravel(), node[:, 1:].ravel()])
    vert = np.column_stack([node[:-1, :].ravel(), node[1:, :].ravel()])
    line_h = np.repeat(np.arange(n_rows), n_cols - 1)  # row of each horizontal segment
    line_v = np.tile(np.arange(n_cols), n_rows - 1)  # column of each vertical segment
    edges = np.vstack([horiz, vert])
    line = np.concatenate([line_h, line_v])
    level = np.full(edges.shape[0], 2, dtype=np.int64)
    if arterial_every:
        level[line % arterial_every == 0] = 1
    if motorway_every:
        level[line % motorway_every == 0] = 0
    return xy, edges, level


def _ring_radial_geometry(n_rings, n_radials, ring_spacing, motorway_ring, arterial_every):
    if n_rings < 1 or n_radials < 3:
        raise ValueError(f"need at least 1 ring and 3 radials, got {n_rings} and {n_radials}")
    ring = np.repeat(np.arange(1, n_rings + 1), n_radials)
    spoke = np.tile(np.arange(n_radials), n_rings)
    angle = 2.0 * np.pi * spoke / n_radials
    xy = np.vstack([[0.0, 0.0],
                    np.column_stack([ring * ring_spacing * np.cos(angle),
                                     ring * ring_spacing * np.sin(angle)])])
    idx = 1 + (ring - 1) * n_radials + spoke  # node of (ring, spoke)
    inner = np.where(ring == 1, 0, idx - n_radials)
    radial = np.column_stack([inner, idx])
    around = np.column_stack([idx, 1 + (ring - 1) * n_radials + (spoke + 1) % n_radials])
    edges = np.vstack([radial, around])
    level = np.full(edges.shape[0], 2, dtype=np.int64)
    if arterial_every:
        level[: radial.shape[0]][spoke % arterial_every == 0] = 1
    if motorway_ring is None:
        motorway_ring = max(1, (2 * n_rings) // 3)
    if motorway_ring:
        level[radial.shape[0]:][ring == motorway_ring] = 0
    return xy, edges, level


def _planar_geometry(n_nodes, spacing, rng):
    from scipy.spatial import Delaunay

    if n_nodes < 4:
        raise ValueError(f"a planar network needs at least 4 nodes, got {n_nodes}")
    side = spacing * np.sqrt(n_nodes)
    xy = rng.uniform(0.0, side, size=(n_nodes, 2))
    tri = Delaunay(xy)
    s = tri.simplices
    pairs = np.vstack([s[:, [0, 1]], s[:, [1, 2]], s[:, [2, 0]]])
    pairs.sort(axis=1)
    edges = np.unique(pairs, axis=0)
    return xy, edges, None


# ---------------------------------------------------------------- assembling
def _zones(xy, n_zones, connectors, rng):
    from scipy.spatial import cKDTree

    n_road = xy.shape[0]
    if not 2 <= n_zones <= n_road:
        raise ValueError(f"n_zones must be between 2 and the {n_road} road nodes, got {n_zones}")
    anchors = rng.choice(n_road, size=n_zones, replace=False)
    k = min(max(1, int(connectors)), n_road)
    # a centroid sits a little off its anchor so connectors have a length
    jitter = rng.normal(scale=0.05, size=(n_zones, 2)) * _typical_spacing(xy)
    zxy = xy[anchors] + jitter
    _, near = cKDTree(xy).query(zxy, k=k)
    near = np.asarray(near).reshape(n_zones, k)
    return zxy, near


def _typical_spacing(xy):
    span = np.ptp(xy, axis=0)
    return float(np.sqrt(max(span[0] * span[1], 1e-12) / xy.shape[0]))


def _build(xy, edges, level, classes, zxy, near, demand, name):
    n_zones = zxy.shape[0]
    all_xy = np.vstack([zxy, xy])
    road = edges + n_zones
    zone_idx = np.repeat(np.arange(n_zones), near.shape[1])
    conn = np.column_stack([zone_idx, near.ravel() + n_zones])
    tail = np.concatenate([road[:, 0], road[:, 1], conn[:, 0], conn[:, 1]])
    head = np.concatenate([road[:, 1], road[:, 0], conn[:, 1], conn[:, 0]])
    n_road_links = 2 * road.shape[0]
    link_class = np.concatenate([level, level, np.full(2 * conn.shape[0], 3)])
    table = tuple(classes) + (CONNECTOR,)
    pick = np.array
    length = np.hypot(*(all_xy[head] - all_xy[tail]).T)
    length = np.maximum(length, 1e-3)
    speed = pick([c.free_speed for c in table])[link_class]
    net = Network(
        node_ids=np.arange(1, all_xy.shape[0] + 1),
        tail=tail, head=head,
        capacity=pick([c.capacity for c in table])[link_class],
        free_flow_time=length / speed * 60.0,
        alpha=pick([c.alpha for c in table])[link_class],
        beta=pick([c.beta for c in table])[link_class],
        length=length,
        x=all_xy[:, 0], y=all_xy[:, 1],
        zone_ids=np.arange(1, n_zones + 1), zone_nodes=np.arange(n_zones),
        demand=np.zeros((n_zones, n_zones)) if demand is None else demand,
        through_centroids=False, length_unit="km", name=name,
        link_attrs={
            "facility_type": np.array([c.name for c in table], dtype=object)[link_class],
            "lanes": pick([c.lanes for c in table], dtype=np.int64)[link_class],
        },
    )
    return net, n_road_links


def _gravity(net, rng, spread):
    from .paths import ShortestPaths

    n = net.n_zones
    prod = rng.lognormal(0.0, spread, size=n)
    attr = rng.lognormal(0.0, spread, size=n)
    # every pair gets one trip so the zone-to-zone times come out of one pass
    probe = net.replace(demand=np.ones((n, n)))
    _, od_time = ShortestPaths(probe).all_or_nothing(probe.free_flow_time)
    off = ~np.eye(n, dtype=bool)
    tau = float(np.mean(od_time[off]))
    base = np.outer(prod, attr) * np.exp(-od_time / tau)
    base[~off] = 0.0
    return base / base.sum()


def _vc_stat(flow, capacity, statistic):
    vc = flow[flow > 0] / capacity[flow > 0]
    if vc.size == 0:
        return 0.0
    return float(np.percentile(vc, 90.0)) if statistic == "p90" else float(vc.mean())


def _calibrate(net, base, n_road_links, vc_target, statistic, calibrate, max_iter=25):
    from .paths import ShortestPaths

    cap = net.period_capacity[:n_road_links]
    paths = ShortestPaths(net.replace(demand=base))
    flow, _ = paths.all_or_nothing(net.free_flow_time)
    stat = _vc_stat(flow[:n_road_links], cap, statistic)
    if stat <= 0.0:
        raise ValueError("the demand loads no road link; use more zones or fewer connectors")
    scale = vc_target / stat
    if calibrate == "aon":
        return scale
    from .equilibrium import solve

    warm = None
    for _ in range(max_iter):
        trial = net.replace(demand=base * scale)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            try:
                ue = solve(trial, tol=1e-3, warm_start=warm)
            except SolverError:  # a method that cannot warm-start after a demand change
                ue = solve(trial, tol=1e-3)
        warm = ue
        stat = _vc_stat(ue.flow[:n_road_links], cap, statistic)
        if abs(stat / vc_target - 1.0) <= 0.01:
            break
        scale *= vc_target / stat
    return scale


def _finish(net, n_road_links, rng, *, vc_target, statistic, calibrate, spread):
    if statistic not in _STATISTICS:
        raise ValueError(f"Unknown statistic {statistic!r}; expected one of {_STATISTICS}")
    if calibrate not in ("aon", "ue"):
        raise ValueError(f"Unknown calibration {calibrate!r}; expected 'aon' or 'ue'")
    if not vc_target > 0:
        raise ValueError(f"vc_target must be positive, got {vc_target!r}")
    base = _gravity(net, rng, spread)
    scale = _calibrate(net, base, n_road_links, vc_target, statistic, calibrate)
    return net.replace(demand=base * scale)


def _default_zones(n_road_nodes):
    return int(min(n_road_nodes, max(2, round(n_road_nodes / 25))))


_COMMON_DOC = """
    n_zones : int, optional
        Number of zones (default: one per 25 road nodes, at least 2).
    connectors : int, default 2
        Two-way connectors from each centroid to its nearest road nodes.
    vc_target : float, default 0.9
        Target of the volume/capacity statistic (see the module notes).
    statistic : {"p90", "mean"}, default "p90"
    calibrate : {"aon", "ue"}, default "aon"
        Loading the target is measured on (see the module notes).
    road_classes : sequence of three RoadClass, optional
        Fast, middle and slow class (default :data:`ROAD_CLASSES`).
    spread : float, default 0.5
        Log-normal sigma of zone productions and attractions.
    seed : int or numpy Generator, optional
    name : str, optional
"""


def grid_network(n_rows, n_cols, *, spacing=0.5, arterial_every=4, motorway_every=0,
                 n_zones=None, connectors=2, vc_target=0.9, statistic="p90",
                 calibrate="aon", road_classes=None, spread=0.5, seed=None,
                 name=None) -> Network:
    """A rectangular street grid.

    Parameters
    ----------
    n_rows, n_cols : int
        Intersections per column and per row (at least 2 each); the grid has
        ``2 * (n_rows * (n_cols - 1) + n_cols * (n_rows - 1))`` road links.
    spacing : float, default 0.5
        Block length, km.
    arterial_every, motorway_every : int, default 4 and 0
        Every k-th street (counting from 0) is an arterial / motorway; 0 for none.
    {common}
    Returns
    -------
    Network

    Examples
    --------
    >>> from congest.generate import grid_network
    >>> net = grid_network(5, 6, n_zones=4, seed=1)
    >>> net.n_links, net.n_zones
    (114, 4)
    """
    rng = _rng(seed)
    xy, edges, level = _grid_geometry(int(n_rows), int(n_cols), float(spacing),
                                      int(arterial_every), int(motorway_every))
    n_zones = _default_zones(xy.shape[0]) if n_zones is None else int(n_zones)
    zxy, near = _zones(xy, n_zones, connectors, rng)
    net, n_road = _build(xy, edges, level, _classes(road_classes), zxy, near, None,
                         name or f"grid {n_rows}x{n_cols}")
    return _finish(net, n_road, rng, vc_target=vc_target, statistic=statistic,
                   calibrate=calibrate, spread=spread)


def ring_radial_network(n_rings, n_radials, *, ring_spacing=1.0, motorway_ring=None,
                        arterial_every=2, n_zones=None, connectors=2, vc_target=0.9,
                        statistic="p90", calibrate="aon", road_classes=None, spread=0.5,
                        seed=None, name=None) -> Network:
    """Concentric rings crossed by radial roads meeting at a centre node.

    Parameters
    ----------
    n_rings : int
        Rings (at least 1), ``ring_spacing`` km apart.
    n_radials : int
        Radial roads (at least 3); the network has ``4 * n_rings * n_radials`` road links.
    ring_spacing : float, default 1.0
        km.
    motorway_ring : int, optional
        Ring (1 = innermost) built as a motorway; default two thirds out; 0 for none.
    arterial_every : int, default 2
        Every k-th radial is an arterial; 0 for none.
    {common}
    Returns
    -------
    Network

    Examples
    --------
    >>> from congest.generate import ring_radial_network
    >>> net = ring_radial_network(3, 8, n_zones=5, seed=2)
    >>> net.n_links, net.n_zones
    (116, 5)
    """
    rng = _rng(seed)
    xy, edges, level = _ring_radial_geometry(int(n_rings), int(n_radials),
                                             float(ring_spacing), motorway_ring,
                                             int(arterial_every))
    n_zones = _default_zones(xy.shape[0]) if n_zones is None else int(n_zones)
    zxy, near = _zones(xy, n_zones, connectors, rng)
    net, n_road = _build(xy, edges, level, _classes(road_classes), zxy, near, None,
                         name or f"ring-radial {n_rings}x{n_radials}")
    return _finish(net, n_road, rng, vc_target=vc_target, statistic=statistic,
                   calibrate=calibrate, spread=spread)


def planar_network(n_nodes, *, spacing=0.4, motorway_share=0.05, arterial_share=0.15,
                   n_zones=None, connectors=2, vc_target=0.9, statistic="p90",
                   calibrate="aon", road_classes=None, spread=0.5, seed=None,
                   name=None) -> Network:
    """A random planar road network: the Delaunay triangulation of random points.

    Points are uniform in a square of side ``spacing * sqrt(n_nodes)`` km. Road classes
    follow use: the segments carrying the most trips at the free-flow all-or-nothing
    loading of the gravity demand (on an all-slow network) become motorways
    (``motorway_share`` of the segments) and arterials (the next ``arterial_share``).

    Parameters
    ----------
    n_nodes : int
        Road nodes (at least 4); a triangulation of ``n`` points has about ``3 n``
        segments, so about ``6 n`` road links.
    spacing : float, default 0.4
        Mean distance between neighbouring points, km.
    motorway_share, arterial_share : float, default 0.05 and 0.15
    {common}
    Returns
    -------
    Network

    Examples
    --------
    >>> from congest.generate import planar_network
    >>> net = planar_network(40, n_zones=6, seed=3)
    >>> net.n_zones, bool(net.total_demand > 0)
    (6, True)
    """
    from .paths import ShortestPaths

    rng = _rng(seed)
    xy, edges, _ = _planar_geometry(int(n_nodes), float(spacing), rng)
    n_zones = _default_zones(xy.shape[0]) if n_zones is None else int(n_zones)
    zxy, near = _zones(xy, n_zones, connectors, rng)
    classes = _classes(road_classes)
    n_seg = edges.shape[0]
    slow = np.full(n_seg, 2, dtype=np.int64)
    net, n_road = _build(xy, edges, slow, classes, zxy, near, None, "probe")
    trial = net.replace(demand=_gravity(net, _rng(rng.integers(2**63)), spread))
    flow, _ = ShortestPaths(trial).all_or_nothing(trial.free_flow_time)
    use = flow[:n_seg] + flow[n_seg:n_road]  # both directions of a segment
    rank = np.argsort(-use, kind="stable")
    level = slow.copy()
    n_motor = int(round(motorway_share * n_seg))
    n_art = int(round(arterial_share * n_seg))
    level[rank[:n_motor]] = 0
    level[rank[n_motor:n_motor + n_art]] = 1
    net, n_road = _build(xy, edges, level, classes, zxy, near, None,
                         name or f"planar {n_nodes}")
    return _finish(net, n_road, rng, vc_target=vc_target, statistic=statistic,
                   calibrate=calibrate, spread=spread)


for _f in (grid_network, ring_radial_network, planar_network):
    _f.__doc__ = _f.__doc__.replace("    {common}\n", _COMMON_DOC.lstrip("\n"))
del _f

#: Generator name -> function.
GENERATORS = {"grid": grid_network, "ring-radial": ring_radial_network,
              "planar": planar_network}


def generate_network(kind, *, n_links, n_zones=None, seed=None, **options) -> Network:
    """A synthetic network of about ``n_links`` links (connectors included).

    Chooses the dimensions of the ``kind`` generator (``"grid"``, ``"ring-radial"`` or
    ``"planar"``) so the link count lands near ``n_links``: square grids, rings with
    twice as many radials, or ``n_links / 6`` planar points. Exact counts follow the
    formulas in each generator's docstring.

    Parameters
    ----------
    kind : {"grid", "ring-radial", "planar"}
    n_links : int
        Target number of directed links.
    n_zones : int, optional
        Default: one per 100 target links, at least 2.
    seed : int, optional
    **options
        Passed to the generator.

    Returns
    -------
    Network

    Examples
    --------
    >>> from congest.generate import generate_network
    >>> net = generate_network("grid", n_links=2000, n_zones=20, seed=0)
    >>> abs(net.n_links - 2000) < 100
    True
    """
    if kind not in GENERATORS:
        raise ValueError(f"Unknown generator {kind!r}; choose one of {sorted(GENERATORS)}")
    n_links = int(n_links)
    if n_zones is None:
        n_zones = max(2, n_links // 100)
    n_zones = int(n_zones)
    conn = int(options.get("connectors", 2))
    road = n_links - 4 * conn * n_zones // 2
    if road < 16:
        raise ValueError(f"n_links={n_links} is too small for {n_zones} zones")
    if kind == "grid":
        side = max(2, int(round((1.0 + np.sqrt(1.0 + road)) / 2.0)))
        return grid_network(side, side, n_zones=n_zones, seed=seed, **options)
    if kind == "ring-radial":
        rings = max(1, int(round(np.sqrt(road / 8.0))))
        radials = max(3, int(round(road / (4.0 * rings))))
        return ring_radial_network(rings, radials, n_zones=n_zones, seed=seed, **options)
    return planar_network(max(4, int(round(road / 6.0))), n_zones=n_zones, seed=seed,
                          **options)
