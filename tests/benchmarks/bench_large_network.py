"""Benchmark: user equilibrium on a 100,000-link synthetic network with 1,000 zones.

Generates a random planar network (Delaunay triangulation, road classes, gravity demand
calibrated to a 90th-percentile volume/capacity of 0.9 at the free-flow loading), then
solves UE towards relative gap 1e-6 with each requested method, each in a fresh process
so its peak memory (maximum resident set size) is its own. Prints generation time,
solve time, iterations, gap reached, peak memory, and the time of one all-origins
shortest-path pass with scipy's Dijkstra on the same network, as a yardstick.

Run from the project folder::

    python tests/benchmarks/bench_large_network.py [--links 100000] [--zones 1000]
        [--methods auto gp bfw] [--time-limit 300] [--kind planar]
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time
import warnings


def _build(kind, n_links, n_zones, seed):
    from congest.generate import generate_network

    return generate_network(kind, n_links=n_links, n_zones=n_zones, seed=seed)


def child(args):
    from congest import ConvergenceWarning, solve

    t0 = time.perf_counter()
    net = _build(args.kind, args.links, args.zones, args.seed)
    t_gen = time.perf_counter() - t0
    rss_gen = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        t0 = time.perf_counter()
        eq = solve(net, method=args.child, tol=args.gap, time_limit=args.time_limit)
        t_solve = time.perf_counter() - t0
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20
    print(json.dumps({"method": eq.method, "generate_s": t_gen, "solve_s": t_solve,
                      "solver_wall_s": eq.wall_time, "iterations": eq.iterations,
                      "gap": eq.relative_gap, "converged": eq.converged,
                      "peak_gib": rss, "peak_after_generate_gib": rss_gen,
                      "n_links": net.n_links, "n_nodes": net.n_nodes,
                      "n_zones": net.n_zones, "trips": net.total_demand}))


def scipy_pass(args):
    import numpy as np
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import dijkstra

    net = _build(args.kind, args.links, args.zones, args.seed)
    n = net.n_nodes
    graph = csr_matrix((net.free_flow_time, (net.tail, net.head)), shape=(n, n))
    times = []
    for _ in range(3):
        t0 = time.perf_counter()
        dijkstra(graph, directed=True, indices=np.asarray(net.zone_nodes))
        times.append(time.perf_counter() - t0)
    return min(times)


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--links", type=int, default=100_000)
    parser.add_argument("--zones", type=int, default=1000)
    parser.add_argument("--kind", default="planar")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--gap", type=float, default=1e-6)
    parser.add_argument("--time-limit", type=float, default=300.0)
    parser.add_argument("--methods", nargs="+", default=["auto"])
    parser.add_argument("--child", default=None, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(args)
        return
    from congest.equilibrium import DEFAULT_METHOD

    print(f"{args.kind} network, about {args.links:,} links, {args.zones:,} zones, seed "
          f"{args.seed}; UE to relative gap {args.gap:g} (time limit {args.time_limit:g} s); "
          f"auto = {DEFAULT_METHOD}")
    sp = scipy_pass(args)
    print(f"one all-origins scipy Dijkstra pass: {sp * 1000:.0f} ms")
    print(f"{'method':>8} {'links':>8} {'nodes':>7} {'zones':>6} {'gen s':>6} {'solve s':>8} "
          f"{'iters':>6} {'gap':>9} {'conv':>5} {'peak GiB':>9} {'solve/sp':>9}")
    for method in args.methods:
        cmd = [sys.executable, __file__, "--child", method, "--links", str(args.links),
               "--zones", str(args.zones), "--kind", args.kind, "--seed", str(args.seed),
               "--gap", str(args.gap), "--time-limit", str(args.time_limit)]
        out = subprocess.run(cmd, capture_output=True, text=True)
        if out.returncode != 0:
            print(f"{method:>8} failed: {out.stderr.strip().splitlines()[-1:]}")
            continue
        r = json.loads(out.stdout.strip().splitlines()[-1])
        print(f"{r['method']:>8} {r['n_links']:8,d} {r['n_nodes']:7,d} {r['n_zones']:6,d} "
              f"{r['generate_s']:6.1f} {r['solve_s']:8.1f} {r['iterations']:6d} "
              f"{r['gap']:9.2e} {str(r['converged']):>5} {r['peak_gib']:9.2f} "
              f"{r['solve_s'] / sp:9.0f}")


if __name__ == "__main__":
    main()
