"""Frank-Wolfe family on the reference networks: iterations and seconds to a relative gap.

Run from the project root::

    python tests/benchmarks/bench_frank_wolfe.py [--time-limit 120] [--methods fw cfw bfw]
                                                 [--networks siouxfalls anaheim ...]

For every reference network (../shared/reference-networks/) and method, one UE solve to
a relative gap of 1e-6 (or until the time limit) is recorded; the iterations and seconds
at which the gap first fell to 1e-4 and 1e-6 are read from its history. Each time is
also shown as a multiple of one all-origins shortest-path pass with
``scipy.sparse.csgraph.dijkstra`` (indices = the zone nodes, free-flow costs), timed in
the same run, so figures from busy or different machines can be compared. The column
``aon`` is congest's own all-or-nothing pass (trees plus loading) in the same unit.

Not collected by pytest; prints a table and the machine load.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import dijkstra

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))  # tests/ for conftest's reference loaders

import congest  # noqa: E402
from congest.equilibrium import Problem  # noqa: E402

TARGETS = (1e-4, 1e-6)


def _median_time(func, repeat):
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return float(np.median(times))


def scipy_pass_seconds(net, repeat=7):
    """Median seconds of one scipy Dijkstra pass from every zone node."""
    mat = csr_matrix((np.asarray(net.free_flow_time) + 1e-9, (net.tail, net.head)),
                     shape=(net.n_nodes, net.n_nodes))
    indices = np.asarray(net.zone_nodes)
    dijkstra(mat, directed=True, indices=indices[:1])  # warm up
    return _median_time(lambda: dijkstra(mat, directed=True, indices=indices), repeat)


def congest_pass_seconds(net, repeat=7):
    problem = Problem(net, "ue")
    cost = problem.gradient(np.zeros(net.n_links))
    problem.all_or_nothing(cost)  # compile / warm up
    return _median_time(lambda: problem.all_or_nothing(cost), repeat)


def first_reach(history, target):
    gaps = np.asarray(history["relative_gap"])
    hit = np.flatnonzero(gaps <= target)
    if hit.size == 0:
        return None, None
    i = int(hit[0])
    return int(history["iteration"][i]), float(history["wall_time"][i])


def run_case(net, method, time_limit):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", congest.ConvergenceWarning)
        res = congest.solve(net, method=method, tol=min(TARGETS), max_iter=10**7,
                            time_limit=time_limit)
    return res


def main(argv=None):
    from conftest import REFERENCE_NAMES, load_reference

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--time-limit", type=float, default=120.0,
                        help="seconds per (network, method) case (default 120)")
    parser.add_argument("--methods", nargs="+", default=["fw", "cfw", "bfw"])
    parser.add_argument("--networks", nargs="+", default=REFERENCE_NAMES)
    args = parser.parse_args(argv)

    load = os.getloadavg() if hasattr(os, "getloadavg") else (float("nan"),) * 3
    import numba

    print(f"congest {congest.__version__}, numba threads {numba.get_num_threads()}, "
          f"cpus {os.cpu_count()}, load average at start {load[0]:.2f} {load[1]:.2f} "
          f"{load[2]:.2f}")
    print(f"time limit per case {args.time_limit:g} s; ratio = seconds / one scipy "
          "Dijkstra all-zones pass")
    header = (f"{'network':<14}{'links':>6}{'zones':>6} {'method':<6}"
              f"{'sp (ms)':>9}{'aon':>6}"
              + "".join(f"{'its@' + f'{t:.0e}':>10}{'s':>8}{'ratio':>8}" for t in TARGETS)
              + f"{'final gap':>11}")
    print(header)
    print("-" * len(header))
    for name in args.networks:
        try:
            net = load_reference(name)
        except BaseException as err:  # pytest.skip raises outside pytest too
            print(f"{name:<14} skipped: {err}")
            continue
        sp = scipy_pass_seconds(net)
        aon = congest_pass_seconds(net) / sp
        for method in args.methods:
            res = run_case(net, method, args.time_limit)
            cells = []
            for t in TARGETS:
                its, sec = first_reach(res.history, t)
                if its is None:
                    cells.append(f"{'not reached':>26}")
                else:
                    cells.append(f"{its:>10d}{sec:>8.2f}{sec / sp:>8.0f}")
            print(f"{name:<14}{net.n_links:>6}{net.n_zones:>6} {method:<6}"
                  f"{sp * 1e3:>9.2f}{aon:>6.1f}" + "".join(cells)
                  + f"{res.relative_gap:>11.2e}", flush=True)
    load = os.getloadavg() if hasattr(os, "getloadavg") else (float("nan"),) * 3
    print(f"load average at end {load[0]:.2f} {load[1]:.2f} {load[2]:.2f}")


if __name__ == "__main__":
    main()
