"""Benchmark of the precise route-based solver (``method="gp"``) on the reference networks.

Prints one table row per network and objective: iterations, seconds and relative gap
reached, the time as a multiple of one all-origins shortest-path pass with scipy's
Dijkstra (measured in the same run on the same network), and peak memory. Then:

* Chicago Sketch: time to relative gap 1e-10 as a multiple of one shortest-path pass;
* Anaheim: cvxpy with Clarabel on the Beckmann program (origin-based link flows with
  power cones), and the time ``gp`` needs for the same gap, as a ratio;
* warm start after a 5 % demand increase against a cold start, to 1e-10, and an upper
  bound for any route-set warm start: the same warm start given, in advance, every
  route the new equilibrium uses (``--only-warm`` runs just this part);
* peak resident memory of a fresh process solving each row, and the baseline of a
  process that only imports congest and loads Chicago Sketch.

Run from the project root: ``python tests/benchmarks/bench_precise.py [--no-cvxpy]``.
Needs the shared reference networks beside the project.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from conftest import load_reference  # noqa: E402

from congest import solve  # noqa: E402
from congest.equilibrium import Problem, relative_gap  # noqa: E402

TARGETS = {"siouxfalls": 1e-12, "anaheim": 1e-12, "barcelona": 1e-10, "winnipeg": 1e-12,
           "chicagosketch": 1e-12}


def sp_pass_seconds(net, repeat=5):
    """Best time of one all-origins scipy Dijkstra pass at free-flow generalized cost."""
    import scipy.sparse as sps
    from scipy.sparse.csgraph import dijkstra

    cost = np.maximum(net.free_flow_time + net.constant_cost, 1e-9)
    graph = sps.csr_matrix((cost, (net.tail, net.head)), shape=(net.n_nodes, net.n_nodes))
    origins = net.zone_nodes[net.demand.sum(axis=1) > 0]
    best = np.inf
    for _ in range(repeat):
        t = time.perf_counter()
        dijkstra(graph, indices=origins)
        best = min(best, time.perf_counter() - t)
    return best


def with_routes_of(base, target):
    """``base`` with every route ``target`` uses and ``base`` lacks added as idle routes.

    A warm start from the result knows the route set of the new equilibrium in advance:
    no route-set warm start can begin better (an oracle, for the benchmark only).
    """
    import dataclasses

    b, t = base.state, target.state
    assert np.array_equal(b.origin, t.origin) and np.array_equal(b.destination, t.destination)

    def routes(od_ptr, path_ptr, links, od):
        return [tuple(links[path_ptr[r]:path_ptr[r + 1]])
                for r in range(od_ptr[od], od_ptr[od + 1])]

    idle_od, idle_path, idle_links, added = [0], [0], [], 0
    for od in range(b.origin.size):
        old_idle = routes(b.idle_od_ptr, b.idle_path_ptr, b.idle_path_links, od)
        have = set(routes(b.od_ptr, b.path_ptr, b.path_links, od)) | set(old_idle)
        fresh = [r for r in routes(t.od_ptr, t.path_ptr, t.path_links, od) if r not in have]
        added += len(fresh)
        for r in fresh + old_idle:
            idle_links.extend(r)
            idle_path.append(len(idle_links))
        idle_od.append(len(idle_path) - 1)
    state = dataclasses.replace(b, idle_od_ptr=np.array(idle_od),
                                idle_path_ptr=np.array(idle_path),
                                idle_path_links=np.array(idle_links, dtype=np.int32))
    return dataclasses.replace(base, state=state), added


def time_to(eq, gap):
    h = eq.history
    hit = np.flatnonzero(np.asarray(h["relative_gap"]) <= gap)
    return float(np.asarray(h["wall_time"])[hit[0]]) if hit.size else float("nan")


def cvxpy_beckmann(net):
    """UE link flows of ``net`` (BPR) from cvxpy + Clarabel; returns (flow, seconds)."""
    import cvxpy as cp

    origins = np.flatnonzero(net.demand.sum(axis=1) > 0)
    n, m = net.n_nodes, net.n_links
    inc = np.zeros((n, m))
    inc[net.head, np.arange(m)] += 1.0
    inc[net.tail, np.arange(m)] -= 1.0
    rhs = np.zeros((origins.size, n))
    allowed = np.ones((origins.size, m))
    for i, o in enumerate(origins):
        rhs[i, net.zone_nodes] = net.demand[o]
        rhs[i, net.zone_nodes[o]] -= net.demand[o].sum()
        if not net.through_centroids:
            others = np.setdiff1d(net.zone_nodes, [net.zone_nodes[o]])
            allowed[i, np.isin(net.tail, others)] = 0.0
    x = cp.Variable((origins.size, m), nonneg=True)
    v = cp.sum(x, axis=0)
    cap = net.period_capacity
    b = net.beta
    assert np.all(b == b[0]), "benchmark formulation assumes one BPR exponent"
    coef = net.free_flow_time * net.alpha * cap / (b + 1.0)
    objective = (net.free_flow_time + net.constant_cost) @ v + coef @ cp.power(
        cp.multiply(v, 1.0 / cap), b[0] + 1.0)
    constraints = [x @ inc.T == rhs, cp.multiply(1.0 - allowed, x) == 0]
    prob = cp.Problem(cp.Minimize(objective), constraints)
    t = time.perf_counter()
    prob.solve(solver=cp.CLARABEL)
    seconds = time.perf_counter() - t
    return np.maximum(np.asarray(v.value).ravel(), 0.0), seconds


def gap_of(net, flow):
    problem = Problem(net, "ue")
    grad = problem.gradient(flow)
    _, sptt, _ = problem.all_or_nothing(grad)
    return relative_gap(float(flow @ grad), sptt)


def peak_memory_mib(name, tol, objective="ue"):
    code = (
        f"import sys; sys.path.insert(0, {str(HERE.parent)!r});"
        "from conftest import load_reference; from congest import solve;"
        f"eq = solve(load_reference({name!r}), method='gp', tol={tol!r}, "
        f"objective={objective!r});"
        "print(eq.relative_gap, [l for l in open('/proc/self/status') if 'VmHWM' in l]"
        "[0].split()[1])"
    )
    base = (
        f"import sys; sys.path.insert(0, {str(HERE.parent)!r});"
        "from conftest import load_reference; import congest, congest._gradient_projection;"
        f"net = load_reference({name!r});"
        "print(0, [l for l in open('/proc/self/status') if 'VmHWM' in l][0].split()[1])"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.split()
    out0 = subprocess.run([sys.executable, "-c", base], capture_output=True, text=True,
                          check=True).stdout.split()
    return int(out[1]) / 1024.0, int(out0[1]) / 1024.0


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--no-cvxpy", action="store_true", help="skip the cvxpy comparison")
    parser.add_argument("--networks", default=",".join(TARGETS))
    parser.add_argument("--only-warm", action="store_true",
                        help="run only the Chicago Sketch warm-start comparison")
    args = parser.parse_args()

    solve(load_reference("siouxfalls"), method="gp", tol=1e-6)  # load compiled kernels
    solve(load_reference("siouxfalls"), objective="so", method="gp", tol=1e-6)
    rows = []
    sp_time = {}
    ratio_cvxpy = {}
    cvx_line = ""
    names = args.networks.split(",")
    if args.only_warm:
        names, args.no_cvxpy = ["chicagosketch"], True
    if "anaheim" in names and not args.no_cvxpy:
        net = load_reference("anaheim")
        flow, cvx_seconds = cvxpy_beckmann(net)
        cvx_gap = gap_of(net, flow)
        eq = solve(net, method="gp", tol=max(cvx_gap, 1e-15))
        ratio_cvxpy[("anaheim", "ue")] = cvx_seconds / eq.wall_time
        cvx_line = (f"Anaheim cvxpy+Clarabel: {cvx_seconds:.2f} s to relative gap "
                    f"{cvx_gap:.2e}; gp to {eq.relative_gap:.2e} in {eq.wall_time:.4f} s: "
                    f"gp is {cvx_seconds / eq.wall_time:.0f}x faster")
    for name in names:
        net = load_reference(name)
        sp_time[name] = sp_pass_seconds(net)
        for objective in ("ue", "so"):
            eq = solve(net, objective=objective, method="gp", tol=TARGETS[name])
            peak, _ = peak_memory_mib(name, TARGETS[name], objective)
            rows.append((net.name, objective, "gp", eq.iterations, eq.wall_time,
                         eq.relative_gap, eq.wall_time / sp_time[name],
                         ratio_cvxpy.get((name, objective)), peak, time_to(eq, 1e-10)))

    head = (f"{'network':<15}{'obj':<5}{'method':<7}{'iter':>5}{'seconds':>9}{'gap':>10}"
            f"{'x SP pass':>10}{'x cvxpy':>9}{'to 1e-10 s':>11}{'peak MiB':>10}")
    # peak MiB: resident-set high-water mark of a fresh process that loads the network
    # and solves this row (interpreter, numpy, numba and the compiled kernels included)
    print(head)
    print("-" * len(head))
    for r in rows:
        cvx = f"{r[7]:.0f}" if r[7] is not None else "-"
        print(f"{r[0]:<15}{r[1]:<5}{r[2]:<7}{r[3]:>5}{r[4]:>9.3f}{r[5]:>10.1e}{r[6]:>10.1f}"
              f"{cvx:>9}{r[9]:>11.3f}{r[8]:>10.0f}")
    print()
    for name in names:
        print(f"one all-origins scipy Dijkstra pass on {name}: {sp_time[name] * 1e3:.1f} ms")
    if cvx_line:
        print(cvx_line)
    if "chicagosketch" in names:
        ue = [r for r in rows if r[0] == "Chicago Sketch" and r[1] == "ue"][0]
        print(f"Chicago Sketch UE to 1e-10: {ue[9]:.3f} s = "
              f"{ue[9] / sp_time['chicagosketch']:.0f} x one shortest-path pass "
              "(target <= 100)")
        net = load_reference("chicagosketch")
        base = solve(net, method="gp", tol=1e-10)
        new = net.scale_demand(1.05)
        tolled = net.with_tolls(np.where(np.arange(net.n_links) % 50 == 0, 1.0, 0.0))
        for label, changed in (("demand +5 %", new),
                               ("1-minute toll on every 50th link", tolled)):
            # best of three, alternating, so a busy machine hurts both alike
            cold_s = warm_s = np.inf
            for _ in range(3):
                cold = solve(changed, method="gp", tol=1e-10)
                warm = solve(changed, method="gp", tol=1e-10, warm_start=base)
                cold_s = min(cold_s, cold.wall_time)
                warm_s = min(warm_s, warm.wall_time)
            print(f"Chicago Sketch {label}, to 1e-10 (best of 3): cold {cold_s:.3f} s "
                  f"({cold.iterations} it), warm {warm_s:.3f} s ({warm.iterations} it): "
                  f"{cold_s / warm_s:.1f}x faster (target >= 5)")
            # where the warm start begins: the gap of its first shortest-path pass, and
            # the seconds spent before it (loading and re-balancing the earlier routes)
            print(f"  warm start: first relative gap {warm.history['relative_gap'][0]:.1e} "
                  f"after {warm.history['wall_time'][0]:.3f} s; gaps per iteration "
                  + " ".join(f"{g:.0e}" for g in warm.history["relative_gap"]))
            # the bound: the warm start handed every route of the new equilibrium
            oracle, added = with_routes_of(base, cold)
            oracle_s = min(solve(changed, method="gp", tol=1e-10, warm_start=oracle).wall_time
                           for _ in range(3))
            bound = solve(changed, method="gp", tol=1e-10, warm_start=oracle)
            print(f"  bound: the warm start given in advance the {added} routes the new "
                  f"equilibrium uses and the earlier one lacks: {oracle_s:.3f} s "
                  f"({bound.iterations} it), {cold_s / oracle_s:.1f}x faster than cold; "
                  f"first relative gap {bound.history['relative_gap'][0]:.1e}")
        peak, baseline = peak_memory_mib("chicagosketch", 1e-12)
        print(f"Chicago Sketch UE to 1e-12 in a fresh process: peak RSS {peak:.0f} MiB "
              f"(the same process loading the network without solving: {baseline:.0f} MiB; "
              "target < 1024)")


if __name__ == "__main__":
    main()
