"""Benchmark of network input/output: read, write and round-trip times.

For each network (the demo city and, when the shared reference folder is beside the
project, the five reference networks) prints: links and OD pairs, seconds to read the
plain tables, to write and re-read the network as a GMNS folder, to write a link-results
table, and the read time as a multiple of one all-origins shortest-path pass (scipy's
Dijkstra, measured in the same run): on the larger networks reading costs a few
passes; on tiny ones the fixed cost of parsing dominates.

Run from the project root: ``python tests/benchmarks/bench_io.py``. Asserts nothing.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import dijkstra

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from conftest import REFERENCE_DIR, REFERENCE_NAMES  # noqa: E402

from congest import solve  # noqa: E402
from congest.io import read_gmns, read_network, write_gmns, write_link_results  # noqa: E402


def best_of(func, repeat=3):
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        out = func()
        times.append(time.perf_counter() - start)
    return min(times), out


def scipy_pass(net):
    graph = sp.csr_matrix((net.free_flow_time + 1e-9, (net.tail, net.head)),
                          shape=(net.n_nodes, net.n_nodes))
    return best_of(lambda: dijkstra(graph, indices=net.zone_nodes))[0]


def main():
    cases = [("quillhaven", lambda: read_network("networks/quillhaven"))]
    for name in REFERENCE_NAMES:
        folder = REFERENCE_DIR / name
        if (folder / "links.csv").exists():
            import json

            meta = json.loads((folder / "meta.json").read_text())
            gen = meta.get("generalized_cost", {})
            cases.append((name, lambda f=folder, m=meta, g=gen: read_network(
                f, zones=f"1-{m['number_of_zones']}",
                through_centroids=m["first_thru_node"] == 1,
                toll_weight=g.get("toll_factor"), length_weight=g.get("distance_factor"))))
    print(f"{'network':<14}{'links':>7}{'OD pairs':>10}{'read s':>9}{'write GMNS s':>14}"
          f"{'read GMNS s':>13}{'results s':>11}{'read / SP pass':>16}")
    for name, read in cases:
        t_read, net = best_of(read)
        with tempfile.TemporaryDirectory() as tmp:
            t_write, _ = best_of(lambda n=net, t=tmp: write_gmns(n, Path(t) / "g"))
            t_regmns, _ = best_of(lambda t=tmp: read_gmns(Path(t) / "g"))
            import warnings

            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                result = solve(net, tol=1e-2, max_iter=5)
            t_res, _ = best_of(lambda r=result, t=tmp: write_link_results(
                r, Path(t) / "links.csv"))
        t_sp = scipy_pass(net)
        pairs = int(np.count_nonzero(net.demand))
        print(f"{name:<14}{net.n_links:>7}{pairs:>10}{t_read:>9.3f}{t_write:>14.3f}"
              f"{t_regmns:>13.3f}{t_res:>11.3f}{t_read / t_sp:>16.1f}")


if __name__ == "__main__":
    main()
