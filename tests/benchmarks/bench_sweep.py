"""Benchmark: a demand sweep on Chicago Sketch, serial and on the local Dask cluster.

Prints, for 20 demand levels (UE and SO at each, plus the marginal-cost revenue):
the wall time of a serial run (this process, numba on every core), of the embedded
local cluster (one single-threaded worker process per core, including its start-up),
the cluster's start-up and worker warm-up (imports and numba cache loading) measured
apart, and the speed-up of the cluster over serial.

Run from the project folder::

    python tests/benchmarks/bench_sweep.py [--gap 1e-6] [--levels 0.1:2:20] [--chunk 2]

Needs the shared reference networks beside the project.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np


def _warm_up():
    start = time.perf_counter()
    from congest.generate import grid_network
    from congest.sweep import evaluate_point, sweep_points

    net = grid_network(3, 3, n_zones=2, seed=0)
    evaluate_point(net, sweep_points([1.0])[0])
    return time.perf_counter() - start


def main():
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from conftest import REFERENCE_DIR, load_reference

    from congest.cli.sweep import parse_values
    from congest.sweep import TIMING_COLUMNS, sweep

    parser = argparse.ArgumentParser()
    parser.add_argument("--network", default="chicagosketch")
    parser.add_argument("--levels", default="0.1:2:20")
    parser.add_argument("--gap", type=float, default=1e-6)
    parser.add_argument("--method", default="auto")
    parser.add_argument("--chunk", type=int, default=2)
    args = parser.parse_args()
    if not (REFERENCE_DIR / args.network).exists():
        sys.exit(f"reference network {args.network!r} not found under {REFERENCE_DIR}")
    net = load_reference(args.network)
    levels = parse_values(args.levels, "--levels")
    cores = os.cpu_count()
    print(f"{net.name}: {net.n_links} links, {net.n_zones} zones; {len(levels)} demand levels "
          f"{levels[0]:g}..{levels[-1]:g}; UE and SO to relative gap {args.gap:g}; "
          f"method {args.method}; chains of {args.chunk}; {cores} cores")

    from distributed import Client, LocalCluster

    t0 = time.perf_counter()
    cluster = LocalCluster(n_workers=cores, threads_per_worker=1, processes=True,
                           dashboard_address=":0", silence_logs=40)
    client = Client(cluster)
    t_start = time.perf_counter() - t0
    warm = client.gather([client.submit(_warm_up, pure=False, workers=[w])
                          for w in client.scheduler_info()["workers"]])
    client.close()
    cluster.close()
    print(f"local cluster start-up {t_start:.1f} s; worker warm-up (imports, numba cache, "
          f"first tiny solve) {max(warm):.1f} s")

    kw = dict(method=args.method, tol=args.gap, chunk_size=args.chunk)
    _warm_up()
    t0 = time.perf_counter()
    serial = sweep(net, levels, scheduler="serial", **kw)
    t_serial = time.perf_counter() - t0
    t0 = time.perf_counter()
    local = sweep(net, levels, **kw)
    t_local = time.perf_counter() - t0

    t = serial.table
    print()
    print(f"{'level':>6} {'PoA':>8} {'UE gap':>9} {'SO gap':>9} {'UE it':>5} {'SO it':>5} "
          f"{'revenue':>14} {'point s':>8}")
    for row in t.itertuples():
        print(f"{row.demand_scale:6.2f} {row.price_of_anarchy:8.5f} {row.ue_relative_gap:9.1e} "
              f"{row.so_relative_gap:9.1e} {row.ue_iterations:5d} {row.so_iterations:5d} "
              f"{row.first_best_revenue:14,.0f} {row.wall_time_s:8.2f}")
    cols = [c for c in t if c not in TIMING_COLUMNS]
    diff = np.nanmax(np.abs(t[cols].select_dtypes("number").to_numpy(float)
                            - local.table[cols].select_dtypes("number").to_numpy(float))
                     / np.maximum(1.0, np.abs(t[cols].select_dtypes("number").to_numpy(float))))
    print()
    print(f"failed points: serial {len(serial.failed)}, cluster {len(local.failed)}")
    print(f"serial ({cores} numba threads)           {t_serial:7.1f} s")
    print(f"local cluster ({cores} processes, incl. start-up) {t_local:7.1f} s")
    print(f"speed-up of the cluster over serial  {t_serial / t_local:7.2f}x")
    print(f"largest relative difference between the two tables {diff:.1e} "
          "(kernel thread counts differ)")
    peak = serial.peak()
    print(f"peak price of anarchy {peak['price_of_anarchy']:.5f} at demand level "
          f"{peak['demand_scale']:g}")


if __name__ == "__main__":
    main()
