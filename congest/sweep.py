"""Demand sweeps: price of anarchy, toll revenue and scenarios as demand grows.

A sweep solves user equilibrium (UE) and system optimum (SO) at many demand levels
(optionally crossed with a scale on the first-best tolls and a share of drivers taking
free-flow advice) and tabulates, per point, the price of anarchy, the marginal-cost toll
revenue and the requested scenario figures. The literature finds the price of anarchy
near 1 at light and at heavy demand with peaks in between [1]_ [2]_ [3]_; a sweep shows
where a given network peaks.

Engine
------
Points run as tasks on a Dask distributed cluster [4]_: by default an embedded
``LocalCluster`` with one single-threaded worker process per core; ``scheduler=`` an
address (or a ``distributed.Client``) sends the same sweep to an existing cluster, and
``scheduler="serial"`` runs it in this process without Dask. Consecutive demand levels
of one (toll scale, advice share) setting form *chains* of ``chunk_size`` points: each
point is warm-started from the previous point of its chain (methods that cannot
warm-start after a demand change are solved cold). The chains depend only on the
points and ``chunk_size``, never on the engine, so every engine returns the same table.

Resuming
--------
With ``store=FOLDER`` every finished point is written at once, atomically, to
``FOLDER/<key>.json``, where ``key`` hashes the network's content, the solver settings
and the point. Running the sweep again with the same arguments loads those points and
computes only the others; points not yet done at the start of a chain are started cold.
A point whose worker dies is rerun elsewhere (``retries``); a point that fails, or whose
worker died once too often, is reported with its error in :attr:`SweepResult.failed`
and does not stop the others (the rest of its chain starts cold).

Columns
-------
Per point: ``demand_scale`` (and ``toll_scale``, ``advice_share`` when swept),
``total_demand``; for ``ue`` and ``so``: ``*_system_cost`` (vehicle-minutes of
generalized cost), ``*_vehicle_hours``, ``*_mean_trip_time_min``, ``*_relative_gap``,
``*_iterations``, ``*_converged``, ``*_max_volume_capacity``, ``*_links_over_capacity``;
``price_of_anarchy`` (:func:`congest.pricing.price_of_anarchy`);
``first_best_revenue_minutes`` and ``first_best_revenue`` (money): the marginal-cost
tolls ``x t'(x)`` [5]_ times the SO flows; ``first_best_mean_toll`` (money per trip).
With tolls: ``tolled_*`` for the UE under ``toll_scale`` times the first-best tolls,
with its ``tolled_revenue`` and ``tolled_gain_share`` = (UE - tolled) / (UE - SO) in
system cost. With advice: ``advice_*`` for the two-group equilibrium of
:func:`congest.advice.advice_share`. Scenario columns are ``<scenario>_<column>``
taken from :func:`congest.scenarios.compare`. ``wall_time_s`` is the point's time.

References
----------
.. [1] Youn, H., Gastner, M.T. & Jeong, H. (2008). Price of anarchy in transportation
   networks: efficiency and optimality control. Physical Review Letters 101, 128701.
.. [2] O'Hare, S.J., Connors, R.D. & Watling, D.P. (2016). Mechanisms that govern how
   the price of anarchy varies with travel demand. Transportation Research B 84, 55-80.
.. [3] Colini-Baldeschi, R., Cominetti, R., Mertikopoulos, P. & Scarsini, M. (2020).
   When is selfish routing bad? The price of anarchy in light and heavy traffic.
   Operations Research 68(2), 411-434.
.. [4] Dask Development Team (2016). Dask: library for dynamic task scheduling.
   https://dask.org
.. [5] Beckmann, M., McGuire, C.B. & Winsten, C.B. (1956). Studies in the Economics of
   Transportation. Yale University Press.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .equilibrium import DEFAULT_METHOD, solve
from .exceptions import ConvergenceWarning, SolverError

__all__ = [
    "SweepPoint",
    "SweepProgress",
    "SweepResult",
    "PointStore",
    "sweep",
    "sweep_points",
    "evaluate_point",
    "network_fingerprint",
]

#: Columns that measure the run, not the result (left out when comparing tables).
TIMING_COLUMNS = ("wall_time_s", "ue_wall_time_s", "so_wall_time_s")


@dataclass(frozen=True)
class SweepPoint:
    """One point of a sweep.

    Attributes
    ----------
    demand_scale : float
        Multiplier on every OD entry.
    toll_scale : float or None
        Multiplier on the first-best tolls for a tolled UE (None: no tolled UE).
    advice_share : float or None
        Share of drivers on free-flow advice (None: no advice scenario).
    """

    toll_scale: float | None
    advice_share: float | None
    demand_scale: float

    def as_dict(self) -> dict:
        out = {"demand_scale": self.demand_scale}
        if self.toll_scale is not None:
            out["toll_scale"] = self.toll_scale
        if self.advice_share is not None:
            out["advice_share"] = self.advice_share
        return out


@dataclass(frozen=True)
class SweepProgress:
    """What a sweep's ``callback`` receives after every finished or failed point.

    Attributes
    ----------
    done, failed, reused, total : int
        Points computed now, failed, loaded from the store, and in the sweep.
    point : SweepPoint
    row : dict or None
        The point's table row (None when it failed).
    error : str or None
    elapsed : float
        Seconds since the sweep started.
    """

    done: int
    failed: int
    reused: int
    total: int
    point: SweepPoint
    row: dict | None
    error: str | None
    elapsed: float


@dataclass(frozen=True, eq=False)
class SweepResult:
    """Result of :func:`sweep`.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per finished point, in point order (toll scale, advice share, demand).
    failed : list of (SweepPoint, str)
        Points that failed, with their error.
    computed, reused : int
        Points solved in this run and points loaded from the store.
    stopped : bool
        True if the callback stopped the sweep early.
    wall_time : float
        Seconds.
    """

    table: object
    failed: list = field(default_factory=list)
    computed: int = 0
    reused: int = 0
    stopped: bool = False
    wall_time: float = 0.0

    def peak(self) -> dict | None:
        """The row with the highest price of anarchy (None if the table is empty)."""
        if self.table.empty or "price_of_anarchy" not in self.table:
            return None
        return self.table.loc[self.table["price_of_anarchy"].idxmax()].to_dict()


# ------------------------------------------------------------------ points
def _floats(name, values, *, low=0.0, high=math.inf):
    out = []
    for v in np.atleast_1d(np.asarray(values, dtype=np.float64)).tolist():
        if not (math.isfinite(v) and low <= v <= high):
            raise ValueError(f"{name} must be finite and in [{low:g}, {high:g}], got {v!r}")
        out.append(float(v))
    if not out:
        raise ValueError(f"{name} is empty")
    return sorted(set(out))


def sweep_points(demand_scales, toll_scales=None, advice_shares=None) -> list[SweepPoint]:
    """Every combination of the given values, sorted (toll scale, advice share, demand).

    Examples
    --------
    >>> [p.demand_scale for p in sweep_points([1.0, 0.5])]
    [0.5, 1.0]
    >>> len(sweep_points([0.5, 1.0], toll_scales=[0.0, 1.0]))
    4
    """
    demand = _floats("demand_scales", demand_scales)
    tolls = [None] if toll_scales is None else _floats("toll_scales", toll_scales)
    shares = [None] if advice_shares is None else _floats("advice_shares", advice_shares,
                                                          high=1.0)
    return [SweepPoint(t, a, d) for t in tolls for a in shares for d in demand]


def _chains(points, chunk_size):
    """Consecutive demand levels of one setting, cut into runs of ``chunk_size``."""
    chains, current = [], []
    for p in points:
        if current and (current[-1].toll_scale, current[-1].advice_share) != (
                p.toll_scale, p.advice_share):
            chains.append(current)
            current = []
        current.append(p)
    if current:
        chains.append(current)
    return [c[i:i + chunk_size] for c in chains for i in range(0, len(c), chunk_size)]


# ------------------------------------------------------------- computation
@dataclass(frozen=True)
class _Settings:
    method: str
    tol: float
    max_iter: int | None
    scenarios: tuple
    scenario_options: tuple
    numba_threads: int | None = None

    def key(self) -> dict:
        method = DEFAULT_METHOD if self.method == "auto" else self.method
        return {"method": method, "tol": repr(float(self.tol)), "max_iter": self.max_iter,
                "scenarios": list(self.scenarios),
                "scenario_options": [list(kv) for kv in self.scenario_options]}


def _solve(net, warm, **kw):
    if warm is not None:
        try:
            return solve(net, warm_start=warm, **kw)
        except SolverError:
            pass  # this method cannot start from an earlier solution after this change
    return solve(net, **kw)


def _stats(prefix, eq, system_cost):
    s = eq.summary()
    return {
        f"{prefix}_system_cost": system_cost,
        f"{prefix}_vehicle_hours": s["vehicle_hours"],
        f"{prefix}_mean_trip_time_min": s["mean_trip_time_min"],
        f"{prefix}_relative_gap": s["relative_gap"],
        f"{prefix}_iterations": s["iterations"],
        f"{prefix}_converged": s["converged"],
        f"{prefix}_max_volume_capacity": s["max_volume_capacity"],
        f"{prefix}_links_over_capacity": s["links_over_capacity"],
    }


def evaluate_point(net, point, *, method="auto", tol=1e-6, max_iter=None, scenarios=(),
                   scenario_options=None, warm=None):
    """Solve one sweep point.

    Parameters
    ----------
    net : Network
        The base network (demand scale 1).
    point : SweepPoint
    method, tol, max_iter
        Passed to :func:`congest.solve` for every equilibrium of the point.
    scenarios : sequence of str, default ()
        Scenario rows of :func:`congest.scenarios.compare` to add as columns.
    scenario_options : dict, optional
        Extra keyword arguments for ``compare``.
    warm : dict, optional
        The ``warm`` output of the previous point of a chain.

    Returns
    -------
    row : dict
        The point's table row (see the module notes for the columns).
    warm : dict
        Solutions to warm-start the next point from.
    """
    from .pricing import marginal_cost_tolls, price_of_anarchy, system_cost

    start = time.perf_counter()
    warm = warm or {}
    kw = {"method": method, "tol": tol, "max_iter": max_iter}
    scaled = net.scale_demand(point.demand_scale)
    row = point.as_dict()
    row["total_demand"] = scaled.total_demand
    with warnings.catch_warnings():
        # a capped solve shows in the row's *_converged and *_relative_gap columns
        warnings.simplefilter("ignore", ConvergenceWarning)
        ue = _solve(scaled, warm.get("ue"), objective="ue", **kw)
        so = _solve(scaled, warm.get("so"), objective="so", **kw)
        ue_cost, so_cost = system_cost(ue, scaled), system_cost(so, scaled)
        row.update(_stats("ue", ue, ue_cost))
        row.update(_stats("so", so, so_cost))
        row["price_of_anarchy"] = price_of_anarchy(ue, so)
        tolls = marginal_cost_tolls(so)
        vot = scaled.value_of_time
        revenue = float(tolls @ so.flow)
        row["first_best_revenue_minutes"] = revenue
        row["first_best_revenue"] = revenue * vot / 60.0
        total = scaled.total_demand
        row["first_best_mean_toll"] = revenue * vot / 60.0 / total if total else 0.0
        nxt = {"ue": ue, "so": so}
        if point.toll_scale is not None:
            tolled_net = scaled.with_tolls(point.toll_scale * tolls)
            tolled = _solve(tolled_net, warm.get("tolled", so), objective="ue", **kw)
            t_cost = system_cost(tolled, scaled)
            row.update(_stats("tolled", tolled, t_cost))
            t_rev = float((point.toll_scale * tolls) @ tolled.flow)
            row["tolled_revenue_minutes"] = t_rev
            row["tolled_revenue"] = t_rev * vot / 60.0
            row["tolled_ratio_to_so"] = t_cost / so_cost if so_cost > 0 else 1.0
            gain = ue_cost - so_cost
            row["tolled_gain_share"] = (ue_cost - t_cost) / gain if gain > 0 else float("nan")
            nxt["tolled"] = tolled
        if point.advice_share is not None:
            from .advice import advice_share

            akw = dict(kw, warm_start=warm.get("advice"))
            try:
                adv = advice_share(scaled, point.advice_share, **akw)
            except SolverError:
                akw["warm_start"] = None
                adv = advice_share(scaled, point.advice_share, **akw)
            a_cost = system_cost(adv.total, scaled)
            row.update(_stats("advice", adv.total, a_cost))
            row["advice_ratio_to_so"] = a_cost / so_cost if so_cost > 0 else 1.0
            row["advice_advised_mean_time_min"] = adv.advised_mean_time
            row["advice_selfish_mean_time_min"] = adv.selfish_mean_time
            if adv.selfish is not None:
                nxt["advice"] = adv.selfish
        if scenarios:
            row.update(_scenario_columns(scaled, scenarios, scenario_options or {}, kw))
    row["wall_time_s"] = time.perf_counter() - start
    return row, nxt


def _scenario_columns(net, scenarios, options, kw):
    from . import scenarios as scenario_module

    comparison = scenario_module.compare(net, **{**kw, **options})
    table = comparison.table
    if "scenario" in getattr(table, "columns", ()):
        table = table.set_index("scenario")
    out = {}
    for name in scenarios:
        if name not in table.index:
            raise ValueError(f"Unknown scenario {name!r}; compare gives {list(table.index)}")
        for col, value in table.loc[name].items():
            if isinstance(value, (int, float, np.integer, np.floating, bool, np.bool_)):
                out[f"{name}_{col}"] = value.item() if hasattr(value, "item") else value
    return out


class _Outcome:
    """What a point task returns: its row or error, and the warm starts it offers."""

    __slots__ = ("row", "error", "warm")

    def __init__(self, row, error, warm):
        self.row, self.error, self.warm = row, error, warm


def _point_task(net, settings, point, previous):
    if settings.numba_threads:
        import numba

        numba.set_num_threads(min(settings.numba_threads, numba.config.NUMBA_NUM_THREADS))
    warm = previous.warm if previous is not None else None
    try:
        row, nxt = evaluate_point(
            net, point, method=settings.method, tol=settings.tol, max_iter=settings.max_iter,
            scenarios=settings.scenarios, scenario_options=dict(settings.scenario_options),
            warm=warm)
    except Exception as err:  # noqa: BLE001 - a failing point is reported, not raised
        return _Outcome(None, f"{type(err).__name__}: {err}", None)
    return _Outcome(row, None, nxt)


def _identity(value):
    return value


def _outcome_row(outcome):
    return outcome.row, outcome.error


# ------------------------------------------------------------------- store
def network_fingerprint(net) -> str:
    """SHA-256 of everything in ``net`` that changes an equilibrium.

    Examples
    --------
    >>> from congest.network import Network
    >>> net = Network(node_ids=[1, 2], tail=[0], head=[1], capacity=[10.0],
    ...               free_flow_time=[1.0], zone_ids=[1, 2], zone_nodes=[0, 1],
    ...               demand=[[0, 5], [0, 0]])
    >>> network_fingerprint(net) == network_fingerprint(net.scale_demand(1.0))
    True
    >>> network_fingerprint(net) == network_fingerprint(net.scale_demand(2.0))
    False
    """
    h = hashlib.sha256()
    for name in ("tail", "head", "capacity", "free_flow_time", "alpha", "beta", "cost_kind",
                 "fixed_cost", "toll", "zone_nodes", "demand"):
        arr = np.ascontiguousarray(getattr(net, name))
        h.update(name.encode())
        h.update(str(arr.dtype).encode())
        h.update(arr.tobytes())
    scalars = (net.n_nodes, net.through_centroids, net.period_hours, net.value_of_time)
    h.update(repr(scalars).encode())
    return h.hexdigest()


def _atomic_write_text(path, text):
    try:
        from .io.atomic import atomic_write
    except ImportError:  # pragma: no cover - older trees without the shared helper
        import tempfile

        fd, tmp = tempfile.mkstemp(prefix=f".{Path(path).name}.", suffix=".tmp",
                                   dir=Path(path).parent)
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
        return
    with atomic_write(path) as fh:
        fh.write(text)


class PointStore:
    """A folder of finished sweep points, one JSON file per point.

    Parameters
    ----------
    folder : path-like
        Created when missing. Points of different sweeps can share it: every file name
        is a hash of the network, the settings and the point.
    """

    def __init__(self, folder):
        self.folder = Path(folder)
        self.folder.mkdir(parents=True, exist_ok=True)

    @staticmethod
    def key(fingerprint, settings_key, point) -> str:
        text = json.dumps([fingerprint, settings_key, point.as_dict()], sort_keys=True)
        return hashlib.sha256(text.encode()).hexdigest()[:32]

    def path(self, key) -> Path:
        return self.folder / f"{key}.json"

    def load(self, key):
        """The stored row of ``key``, or None (also for an unreadable file)."""
        path = self.path(key)
        try:
            return json.loads(path.read_text(encoding="utf-8"))["row"]
        except (FileNotFoundError, ValueError, KeyError):
            return None

    def save(self, key, point, row):
        text = json.dumps({"point": point.as_dict(), "row": row}, allow_nan=True)
        _atomic_write_text(self.path(key), text)


def _json_row(row):
    return {k: (v.item() if hasattr(v, "item") else v) for k, v in row.items()}


# ------------------------------------------------------------------ engines
def _client_for(scheduler, n_workers, processes, retries):
    """(client, cluster) for ``scheduler``; an embedded cluster is closed by the caller."""
    import dask
    from distributed import Client, LocalCluster

    if isinstance(scheduler, Client):
        return scheduler, None
    if isinstance(scheduler, str):
        return Client(scheduler), None
    n = n_workers or os.cpu_count() or 1
    # a task whose worker dies is rerun on another (or a restarted) worker this often
    with dask.config.set({"distributed.scheduler.allowed-failures": retries}):
        cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=processes,
                               dashboard_address=None, silence_logs=40)
    return Client(cluster), cluster


class _Run:
    """Book-keeping shared by both engines: store, rows, failures, progress."""

    def __init__(self, points, store, keys, callback, total, reused):
        self.points, self.store, self.keys = points, store, keys
        self.callback = callback
        self.rows = {}
        self.failed = []
        self.done = 0
        self.total = total
        self.reused = reused
        self.start = time.perf_counter()

    def finish(self, point, row, error):
        if error is None:
            row = _json_row(row)
            self.rows[point] = row
            self.done += 1
            if self.store is not None:
                self.store.save(self.keys[point], point, row)
        else:
            self.failed.append((point, error))
        if self.callback is None:
            return False
        info = SweepProgress(done=self.done, failed=len(self.failed), reused=self.reused,
                             total=self.total, point=point, row=row, error=error,
                             elapsed=time.perf_counter() - self.start)
        return bool(self.callback(info))


def _run_serial(net, settings, chains, run):
    for chain in chains:
        previous = None
        for point in chain:
            outcome = _point_task(net, settings, point, previous)
            previous = outcome
            if run.finish(point, outcome.row, outcome.error):
                return True
    return False


def _run_dask(net, settings, chains, run, client, retries):
    from distributed import wait

    # a task rather than scattered data: if the worker holding it dies, the scheduler
    # can make it again
    net_future = client.submit(_identity, net, pure=False, retries=retries)
    pending = {}  # row future -> (chain, position)
    second_tries = set()

    def submit(chain, first):
        previous = None
        for pos in range(first, len(chain)):
            out = client.submit(_point_task, net_future, settings, chain[pos], previous,
                                pure=False, retries=retries)
            row = client.submit(_outcome_row, out, pure=False, retries=retries)
            pending[row] = (chain, pos)
            previous = out

    def settle(fut):
        """Record one finished row future; True if the callback asks to stop."""
        entry = pending.pop(fut, None)
        if entry is None:
            return False  # dropped after an earlier point of its chain failed
        chain, pos = entry
        try:
            row, error = fut.result()
        except Exception as err:  # noqa: BLE001 - reported with the point
            # Dask gave up on the task: its worker died more often than allowed, or it
            # could not be run or sent back. A worker's death also fails the tasks
            # queued beside it, so a point gets one fresh attempt before it is
            # reported; the rest of its chain restarts cold either way.
            if any(c is chain and p < pos for c, p in pending.values()):
                pending[fut] = entry  # wait: the earlier point's outcome decides
                time.sleep(0.01)
                return False
            later = [f for f, (c, p) in pending.items() if c is chain and p > pos]
            for f in later:
                del pending[f]
            client.cancel(later)
            point = chain[pos]
            if point not in second_tries:
                second_tries.add(point)
                submit(chain, pos)
                return False
            if pos + 1 < len(chain):
                submit(chain, pos + 1)
            row, error = None, f"{type(err).__name__}: {err}"
        return run.finish(chain[pos], row, error)

    for chain in chains:
        submit(chain, 0)
    stopped = False
    try:
        while pending and not stopped:
            done, _ = wait(list(pending), return_when="FIRST_COMPLETED")
            # earlier points of a chain first: their errors explain the later ones
            for fut in sorted(done, key=lambda f: pending.get(f, (None, -1))[1]):
                if settle(fut):
                    stopped = True
                    break
    finally:
        if pending:
            client.cancel(list(pending))
    return stopped


def sweep(net, demand_scales, *, toll_scales=None, advice_shares=None, scenarios=(),
          scenario_options=None, method="auto", tol=1e-6, max_iter=None, store=None,
          scheduler=None, n_workers=None, processes=True, chunk_size=2, retries=2,
          numba_threads=None, callback=None) -> SweepResult:
    """Solve UE and SO over a range of demand levels (and toll scales, advice shares).

    Parameters
    ----------
    net : Network
        The base network; point ``d`` solves it with demand ``d * net.demand``.
    demand_scales : sequence of float
        Demand multipliers (non-negative), e.g. ``numpy.linspace(0.1, 3, 30)``.
    toll_scales : sequence of float, optional
        For each, a UE with ``toll_scale`` times the point's first-best tolls.
    advice_shares : sequence of float in [0, 1], optional
        For each, the equilibrium with that share of drivers on free-flow advice.
    scenarios : sequence of str, default ()
        Rows of :func:`congest.scenarios.compare` to add as ``<scenario>_<column>``.
    scenario_options : dict, optional
        Keyword arguments for ``compare``.
    method : str, default "auto"
        Equilibrium method (see :func:`congest.solve`).
    tol : float, default 1e-6
        Relative-gap target of every solve.
    max_iter : int, optional
    store : path-like, optional
        Folder of finished points for resuming (see the module notes).
    scheduler : None, "serial", str or distributed.Client, default None
        None: an embedded ``LocalCluster`` (``n_workers`` workers, default one per
        core, one thread each, worker processes unless ``processes=False``);
        ``"serial"``: this process, no Dask; any other string: the address of a running
        Dask scheduler; or a ``Client`` to use as is.
    n_workers : int, optional
    processes : bool, default True
        Worker processes (True) or threads of this process (False) in the embedded
        cluster.
    chunk_size : int, default 2
        Points per warm-start chain. Longer chains warm-start more often; shorter ones
        spread the work more evenly over the workers (heavy demand levels cost more).
    retries : int, default 2
        How often a point is rerun after its worker died (the embedded cluster's
        ``allowed-failures``; a running cluster keeps its own setting) and after an
        error in Dask itself. Errors in the computation are not retried: the point
        is reported as failed.
    numba_threads : int, optional
        Threads of the compiled kernels in each point. Default: cores / workers in the
        embedded cluster, numba's own setting elsewhere. The all-or-nothing loading
        adds per-thread partial flows, so the last digits of a result depend on this
        number: equal settings give bit-identical tables on every engine.
    callback : callable, optional
        ``callback(progress: SweepProgress)`` after every point; return True to stop
        (finished points stay in the store).

    Returns
    -------
    SweepResult

    Raises
    ------
    ValueError
        Bad demand scales, toll scales, advice shares or chunk size.

    Notes
    -----
    Each point costs two to four equilibrium solves. In worker processes the compiled
    kernels come from numba's on-disk cache, so a fresh worker pays only the load
    time; the all-or-nothing kernel runs on ``cores / n_workers`` threads there.

    Examples
    --------
    Pigou's network (Pigou 1920) with demand ``q``: costs 1 and ``x``.

    >>> from congest.network import Network
    >>> pigou = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
    ...                 free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
    ...                 cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
    ...                 demand=[[0, 1], [0, 0]])
    >>> res = sweep(pigou, [0.25, 1.0, 4.0], scheduler="serial", tol=1e-10)
    >>> [round(v, 4) for v in res.table["price_of_anarchy"]]
    [1.0, 1.3333, 1.0667]
    """
    import pandas as pd

    points = sweep_points(demand_scales, toll_scales, advice_shares)
    if int(chunk_size) < 1:
        raise ValueError(f"chunk_size must be at least 1, got {chunk_size!r}")
    threads = None if numba_threads is None else int(numba_threads)
    if threads is None and scheduler is None:
        cores = os.cpu_count() or 1
        threads = max(1, cores // (n_workers or cores))
    settings = _Settings(method=method, tol=float(tol), max_iter=max_iter,
                         scenarios=tuple(scenarios),
                         scenario_options=tuple(sorted((scenario_options or {}).items())),
                         numba_threads=threads)
    store = None if store is None else PointStore(store)
    keys, rows = {}, {}
    if store is not None:
        fingerprint, skey = network_fingerprint(net), settings.key()
        for p in points:
            keys[p] = PointStore.key(fingerprint, skey, p)
            row = store.load(keys[p])
            if row is not None:
                rows[p] = row
    todo = [p for p in points if p not in rows]
    chains = []
    for chain in _chains(points, int(chunk_size)):
        run_of = []
        for p in chain:
            if p in rows:
                if run_of:
                    chains.append(run_of)
                run_of = []
            else:
                run_of.append(p)
        if run_of:
            chains.append(run_of)
    run = _Run(points, store, keys, callback, total=len(points), reused=len(rows))
    stopped = False
    if todo:
        if scheduler == "serial":
            stopped = _run_serial(net, settings, chains, run)
        else:
            client, cluster = _client_for(scheduler, n_workers, processes, int(retries))
            try:
                stopped = _run_dask(net, settings, chains, run, client, int(retries))
            finally:
                if cluster is not None:
                    client.close()
                    cluster.close()
    rows.update(run.rows)
    table = pd.DataFrame([rows[p] for p in points if p in rows])
    order = {p: i for i, p in enumerate(points)}
    failed = sorted(run.failed, key=lambda pe: order[pe[0]])
    return SweepResult(table=table, failed=failed, computed=run.done, reused=run.reused,
                       stopped=stopped, wall_time=time.perf_counter() - run.start)
