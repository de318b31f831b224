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
A point whose worker dies is rerun elsewhere, and at last alone (``retries``); a point
that fails, or whose worker kept dying while it ran alone, is reported with its error
in :attr:`SweepResult.failed` and does not stop the others (the rest of its chain
starts cold).

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

import asyncio
import contextlib
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

# Seconds between looks at the cluster while a Dask sweep waits for points.
_POLL_SECONDS = 2.0
# The embedded cluster's lost-worker-timeout: far longer than any sweep.
_NANNY_KEEP = "30 days"


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


#: Default relative-gap target of a sweep's solves (many solves: looser than one solve's).
SWEEP_TOL = 1e-6


def evaluate_point(net, point, *, method="auto", tol=SWEEP_TOL, max_iter=None, scenarios=(),
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
    tol = SWEEP_TOL if tol is None else tol
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
@contextlib.contextmanager
def _dask_client(scheduler, n_workers, processes, retries):
    """A client for ``scheduler``; an embedded cluster lasts as long as the context."""
    import dask
    from distributed import Client, LocalCluster

    if isinstance(scheduler, Client):
        yield scheduler
        return
    if isinstance(scheduler, str):
        with Client(scheduler) as client:
            yield client
        return
    n = n_workers or os.cpu_count() or 1
    config = {
        # a task whose worker dies is rerun on another (or a restarted) worker this
        # often before the sweep sets it aside to rerun alone
        "distributed.scheduler.allowed-failures": retries,
        # the cluster closes a worker's nanny for good if the worker is down (being
        # restarted) when this long has passed since one of its deaths; here nannies
        # restart their workers, and the sweep itself gives up on a cluster without
        # workers (worker_timeout)
        "distributed.deploy.lost-worker-timeout": _NANNY_KEEP,
    }
    with dask.config.set(config), LocalCluster(
            n_workers=n, threads_per_worker=1, processes=processes,
            dashboard_address=":0", silence_logs=40) as cluster, Client(cluster) as client:
        yield client


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


class _DaskSweep:
    """The chains on a Dask cluster, with reruns alone for points whose worker died.

    When a worker dies, the scheduler counts the death against every task assigned to
    that worker, so a point queued behind one that kills its worker can end in
    ``KilledWorker`` as well. Such points are set aside and, once everything else is
    done, rerun one at a time with nothing else of the sweep on the cluster: a point
    that finishes there was a bystander; one whose worker died ``retries + 1`` times
    while it ran alone is reported as failed.
    """

    def __init__(self, net, settings, record, client, retries, worker_timeout):
        self.net, self.settings, self.record = net, settings, record
        self.client, self.retries = client, retries
        self.worker_timeout = float(worker_timeout)
        self.pending = {}  # row future -> (chain, position)
        self.suspects = []  # points whose worker died, to rerun alone
        self.queue = []  # chains not yet handed to the cluster
        self.deaths = {}  # point -> worker deaths while it ran alone
        self._net_future = None

    def net_future(self):
        # a task rather than scattered data: if the worker holding it dies, the
        # scheduler can make it again; made anew should the scheduler give up on it
        if self._net_future is None or self._net_future.status == "error":
            self._net_future = self.client.submit(_identity, self.net, pure=False,
                                                  retries=self.retries)
        return self._net_future

    def submit(self, chain, first):
        previous = None
        for pos in range(first, len(chain)):
            out = self.client.submit(_point_task, self.net_future(), self.settings,
                                     chain[pos], previous, pure=False,
                                     retries=self.retries)
            row = self.client.submit(_outcome_row, out, pure=False, retries=self.retries)
            self.pending[row] = (chain, pos)
            previous = out

    def run(self, chains):
        """Run every chain; True if the callback stopped the sweep.

        The dearest chains (highest demand) go first, and the cluster holds no more
        chains than it has worker threads: Dask places a task on a worker when it is
        submitted, so chains handed over all at once can leave two heavy ones queued on
        one worker while the other has finished its share and idles.
        """
        self.queue = sorted(chains, key=lambda c: -max(p.demand_scale for p in c))
        try:
            while self.pending or self.suspects or self.queue:
                slots = max(self.n_threads(), 1)
                while self.queue and len({id(c) for c, _ in self.pending.values()}) < slots:
                    self.submit(self.queue.pop(0), 0)
                if not self.pending:
                    self.submit([self.suspects.pop(0)], 0)
                if not self.wait():
                    self.abandon(f"the Dask cluster had no worker for "
                                 f"{self.worker_timeout:g} s")
                    return False
                for fut in self.ready():
                    if fut in self.pending and self.settle(fut):
                        return True
        finally:
            if self.pending:
                self.client.cancel(list(self.pending))
        return False

    def ready(self):
        """Row futures to settle now, earlier points of a chain first.

        A task Dask gave up on waits for the earlier points of its chain: when one of
        those failed, its error is this one's too.
        """
        out = []
        for fut, (chain, pos) in self.pending.items():
            if fut.done() and (fut.status == "finished" or not any(
                    c is chain and p < pos for c, p in self.pending.values())):
                out.append(fut)
        return sorted(out, key=lambda f: self.pending[f][1])

    def wait(self):
        """Wait until a row future is ready; False if the cluster stays without workers.

        Every wait is bounded: a cluster whose workers all died and were not restarted
        (or that never had any) is noticed after ``worker_timeout`` seconds.
        """
        from distributed import wait
        from distributed.client import FuturesCancelledError

        since = None
        while self.pending and not self.ready():
            waiting = [f for f in self.pending if not f.done()]
            try:
                wait(waiting, timeout=_POLL_SECONDS, return_when="FIRST_COMPLETED")
                continue
            except FuturesCancelledError:
                continue  # reported with the point
            except asyncio.TimeoutError:  # TimeoutError from Python 3.11 on
                pass
            if self.n_threads():
                since = None
            elif since is None:
                since = time.monotonic()
            elif time.monotonic() - since > self.worker_timeout:
                return False
        return True

    def n_threads(self):
        """Worker threads on the cluster now (0 without workers, or if the scheduler
        does not answer: then no worker can be reached either)."""
        try:
            return sum(self.client.nthreads(callback_timeout=_POLL_SECONDS).values())
        except (OSError, asyncio.TimeoutError):
            return 0

    def settle(self, fut):
        """Record one ready row future; True if the callback asks to stop."""
        from distributed import KilledWorker

        chain, pos = self.pending.pop(fut)
        point = chain[pos]
        if fut.status == "finished":
            row, error = fut.result()
            return self.record.finish(point, row, error)
        # Dask gave up on the task; the rest of its chain restarts cold
        later = [f for f, (c, p) in self.pending.items() if c is chain and p > pos]
        for f in later:
            del self.pending[f]
        self.client.cancel(later)
        if pos + 1 < len(chain):
            self.submit(chain, pos + 1)
        err = fut.exception() if fut.status == "error" else None
        if err is None:
            return self.record.finish(point, None, "cancelled by the Dask scheduler")
        error = f"{type(err).__name__}: {err}"
        if isinstance(err, KilledWorker):
            if point not in self.deaths:  # it did not run alone: it may be a bystander
                self.deaths[point] = 0
                self.suspects.append(point)
                return False
            # Dask itself reran it this often before giving up
            self.deaths[point] += getattr(err, "allowed_failures", 0) + 1
            if self.deaths[point] <= self.retries:
                self.suspects.insert(0, point)
                return False
            error = (f"{type(err).__name__}: its worker died {self.deaths[point]} times "
                     f"while it ran alone. {err}")
        return self.record.finish(point, None, error)

    def abandon(self, reason):
        """Report every point not yet finished as failed, with ``reason``."""
        points = [chain[pos] for chain, pos in self.pending.values()] + self.suspects
        points += [point for chain in self.queue for point in chain]
        self.client.cancel(list(self.pending))
        self.pending.clear()
        self.suspects = []
        self.queue = []
        for point in points:
            self.record.finish(point, None, f"not run: {reason}")


def sweep(net, demand_scales, *, toll_scales=None, advice_shares=None, scenarios=(),
          scenario_options=None, method="auto", tol=SWEEP_TOL, max_iter=None, store=None,
          scheduler=None, n_workers=None, processes=True, chunk_size=2, retries=2,
          worker_timeout=60.0, numba_threads=None, callback=None) -> SweepResult:
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
    tol : float, default 1e-6 (:data:`SWEEP_TOL`)
        Relative-gap target of every solve (None: the default).
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
        How often a point is rerun after its worker died, and after an error in Dask
        itself. Dask reruns it first (the embedded cluster's ``allowed-failures``; a
        running cluster keeps its own setting); a point Dask gives up on is rerun
        alone (see Notes) and reported as failed once its worker has died at least
        ``retries + 1`` times while it ran alone. Errors in the computation are not
        retried: the point is reported as failed.
    worker_timeout : float, default 60
        Seconds the sweep waits while the cluster has no worker (all died and none
        came back, or none ever joined); then the points not yet finished are
        reported as failed.
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

    When a worker dies, Dask counts the death against every point assigned to that
    worker, including those only queued there behind the point that was running. So
    a point Dask gives up on (``KilledWorker``) is not reported at once: it waits
    until the other points are done and is then rerun with nothing else of the sweep
    on the cluster, cold. Points queued behind a point that kills its worker finish
    there; only a point that keeps killing its worker alone is reported as failed.

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
    settings = _Settings(method=method, tol=float(SWEEP_TOL if tol is None else tol),
                         max_iter=max_iter,
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
            with _dask_client(scheduler, n_workers, processes, int(retries)) as client:
                engine = _DaskSweep(net, settings, run, client, int(retries),
                                    worker_timeout)
                stopped = engine.run(chains)
    rows.update(run.rows)
    table = pd.DataFrame([rows[p] for p in points if p in rows])
    order = {p: i for i, p in enumerate(points)}
    failed = sorted(run.failed, key=lambda pe: order[pe[0]])
    return SweepResult(table=table, failed=failed, computed=run.done, reused=run.reused,
                       stopped=stopped, wall_time=time.perf_counter() - run.start)
