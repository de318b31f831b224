"""Benchmark of day-to-day learning (not collected by pytest).

Prints, for the shared reference networks:

* Chicago Sketch: seconds for the UE solution, the route set, and 1,000 days of Hedge
  with full information (one replication), on 1 thread and on all threads;
* Sioux Falls: seconds for 100 replications of 300 days (Hedge with supply and estimate
  noise), on 1 thread and on all threads.

Run:  python tests/benchmarks/bench_learning.py [--quick]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numba

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from conftest import REFERENCE_DIR, load_reference  # noqa: E402

from congest import solve  # noqa: E402
from congest.learning import simulate  # noqa: E402
from congest.routesets import build_route_set  # noqa: E402


def timed(func, *args, **kwargs):
    start = time.perf_counter()
    out = func(*args, **kwargs)
    return out, time.perf_counter() - start


def timed_cpu(func, *args, **kwargs):
    """Wall and CPU seconds (all threads of this process: on a shared machine the CPU
    seconds show the work done, the wall seconds also the wait for a free core)."""
    start, cpu = time.perf_counter(), time.process_time()
    out = func(*args, **kwargs)
    return out, time.perf_counter() - start, time.process_time() - cpu


def scipy_pass(net, repeat=5):
    """Best time of one all-origins Dijkstra pass with scipy (through-centroid network)."""
    import numpy as np
    import scipy.sparse as sp
    from scipy.sparse.csgraph import dijkstra

    graph = sp.csr_matrix((net.free_flow_time + net.constant_cost + 1e-9,
                           (net.tail, net.head)), shape=(net.n_nodes, net.n_nodes))
    best = np.inf
    for _ in range(repeat):
        start = time.perf_counter()
        dijkstra(graph, indices=net.zone_nodes)
        best = min(best, time.perf_counter() - start)
    return best


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--quick", action="store_true", help="a tenth of the days")
    parser.add_argument("--k", type=int, default=2, help="shortest paths per OD pair")
    args = parser.parse_args()
    if not (REFERENCE_DIR / "chicagosketch" / "links.csv").exists():
        print(f"reference networks not found at {REFERENCE_DIR}")
        return
    threads = numba.config.NUMBA_NUM_THREADS
    scale = 10 if args.quick else 1

    # warm the compiled kernels on a tiny case so compile time is not counted
    small = load_reference("siouxfalls")
    simulate(small, days=3, replications=2, supply_noise=0.1, estimate_noise=0.1, seed=0)

    print("== Chicago Sketch, Hedge, full information, one replication")
    net = load_reference("chicagosketch")
    one_pass = scipy_pass(net)
    print(f"one all-origins shortest-path pass with scipy's Dijkstra: {1e3 * one_pass:.1f} ms "
          "(the yardstick for this machine's current speed)")
    eq, t_ue = timed(solve, net, tol=1e-8)
    print(f"UE solve (method {eq.method}, gap {eq.relative_gap:.1e}): {t_ue:.1f} s")
    rs, t_rs = timed(build_route_set, net, k=args.k, equilibrium=eq)
    print(f"route set (used routes + {args.k} shortest at free flow and at UE): "
          f"{t_rs:.1f} s, {rs.n_routes:,} routes, {rs.link_index.size:,} route-link "
          f"entries, up to {rs.max_routes} per OD pair")
    days = 1000 // scale
    for workers in sorted({1, threads}):
        res, t, cpu = timed_cpu(simulate, net, rule="hedge", days=days, route_set=rs,
                                equilibrium=eq, workers=workers)
        last = res.days.iloc[-1]
        print(f"{days} days on {workers} thread(s): {t:.1f} s, cpu {cpu:.1f} s "
              f"({1e3 * t / days:.1f} ms/day = {t / days / one_pass:.2f} scipy passes); "
              f"final gap {last['relative_gap']:.2e}, "
              f"gap of the average {res.summary['average_gap'].iloc[0]:.2e}")

    print("== Sioux Falls, Hedge, supply CV 0.1, estimate CV 0.1")
    eq, _ = timed(solve, small, tol=1e-10)
    rs = build_route_set(small, k=3, equilibrium=eq)
    days, reps = 300 // scale, 100
    for workers in sorted({1, threads}):
        res, t, cpu = timed_cpu(simulate, small, rule="hedge", days=days, replications=reps,
                                route_set=rs, equilibrium=eq, supply_noise=0.1,
                                estimate_noise=0.1, seed=1, workers=workers)
        print(f"{reps} replications x {days} days on {workers} thread(s): {t:.1f} s, "
              f"cpu {cpu:.1f} s; "
              f"median final gap {res.summary['final_gap'].median():.2e}")


if __name__ == "__main__":
    main()
