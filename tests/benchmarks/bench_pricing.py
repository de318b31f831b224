"""Benchmark of pricing and scenarios: first best, second best (warm vs cold), compare.

Run ``python tests/benchmarks/bench_pricing.py [--method gp] [--gap 1e-10]``. Prints
seconds and ratios; asserts nothing.

Networks: the demo city (networks/quillhaven) and, when the shared reference folder is
beside the project, Sioux Falls. The last table is the multi-class equilibrium (three
value-of-time classes, with and without the first-best tolls) by route-based gradient
projection and by Frank-Wolfe, and gradient projection alone on Chicago Sketch.
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests"))


def networks():
    from congest.io import read_network

    out = {"quillhaven": read_network(ROOT / "networks" / "quillhaven")}
    try:
        from conftest import REFERENCE_DIR, load_reference

        if (REFERENCE_DIR / "siouxfalls" / "links.csv").exists():
            out["siouxfalls"] = load_reference("siouxfalls")
    except Exception as err:  # noqa: BLE001 - the benchmark runs without them
        print(f"(reference networks skipped: {err})")
    return out


def bridge_links(net, fb):
    """Both directions of the demo city's Old Bridge, or the link with the top toll."""
    attr = net.link_attrs.get("facility_type")
    if attr is not None:
        ids = [int(i) for i, f in zip(net.link_ids, attr, strict=True) if f == "old_bridge"]
        if ids:
            return ids
    return [int(net.link_ids[fb.tolls_minutes.argmax()])]


def main():
    from congest.pricing import first_best, second_best
    from congest.scenarios import compare

    parser = argparse.ArgumentParser()
    parser.add_argument("--method", default="gp")
    parser.add_argument("--gap", type=float, default=1e-10)
    args = parser.parse_args()
    warnings.simplefilter("ignore")
    rows = []
    for name, net in networks().items():
        kw = {"tol": args.gap, "method": args.method}
        t = time.perf_counter()
        fb = first_best(net, **kw)
        t_fb = time.perf_counter() - t
        t = time.perf_counter()
        cold = first_best(net, ue=fb.ue, so=fb.so, tolled_from_so=False, **kw)
        t_cold_tolled = time.perf_counter() - t
        t = time.perf_counter()
        compare(net, **kw)
        t_cmp = time.perf_counter() - t
        links = [bridge_links(net, fb)]
        t = time.perf_counter()
        sb = second_best(net, links, first_best_result=fb, **kw)
        t_warm = time.perf_counter() - t
        t = time.perf_counter()
        sb_cold = second_best(net, links, first_best_result=fb, warm=False, **kw)
        t_cold = time.perf_counter() - t
        rows.append((name, net.n_links, fb, cold, t_fb, t_cold_tolled, t_cmp, sb, t_warm,
                     sb_cold, t_cold))
    print(f"method {args.method}, relative gap target {args.gap:g}\n")
    print(f"{'network':<12} {'links':>6} {'PoA':>8} {'first best s':>12} "
          f"{'cold tolled UE s':>16} {'max dev cold':>12} {'compare s':>10}")
    for name, m, fb, cold, t_fb, t_ct, t_cmp, *_ in rows:
        print(f"{name:<12} {m:>6} {fb.price_of_anarchy:>8.4f} {t_fb:>12.2f} {t_ct:>16.2f} "
              f"{cold.max_flow_deviation:>12.2e} {t_cmp:>10.2f}")
    print(f"\n{'network':<12} {'toll':>8} {'share':>7} {'solves':>6} {'warm s':>8} "
          f"{'s/solve':>8} {'cold s':>8} {'s/solve':>8} {'cold/warm':>9}")
    for name, _, _, _, _, _, _, sb, t_w, sbc, t_c in rows:
        per_w = t_w / max(sb.evaluations, 1)
        per_c = t_c / max(sbc.evaluations, 1)
        print(f"{name:<12} {sb.tolls_money[0]:>8.3f} {100 * sb.share_of_first_best:>6.1f}% "
              f"{sb.evaluations:>6} {t_w:>8.2f} {per_w:>8.3f} {t_c:>8.2f} {per_c:>8.3f} "
              f"{per_c / per_w:>9.2f}")
    multiclass_table(rows)


def multiclass_table(rows):
    from congest.multiclass import UserClass, class_impacts, solve_multiclass

    classes = [UserClass("hurried", 0.3, 45.0), UserClass("steady", 0.5, 15.0),
               UserClass("thrifty", 0.2, 4.0)]
    print(f"\nmulti-class (3 classes), untolled and with the first-best tolls:\n"
          f"{'network':<14} {'method':<6} {'target':>7} {'seconds':>8} {'gap untolled':>13} "
          f"{'gap tolled':>11} {'tolled it':>9}")
    for name, _, fb, *_ in rows:
        net = fb.ue.network
        for method, tol in (("gp", 1e-10), ("bfw", 1e-6)):
            t = time.perf_counter()
            imp = class_impacts(net, classes, fb.tolls_money, method=method, tol=tol,
                                max_iter=20_000)
            sec = time.perf_counter() - t
            print(f"{name:<14} {method:<6} {tol:>7.0e} {sec:>8.2f} "
                  f"{imp.untolled.relative_gap:>13.1e} {imp.tolled.relative_gap:>11.1e} "
                  f"{imp.tolled.iterations:>9}")
    try:
        from conftest import REFERENCE_DIR, load_reference
    except ImportError:
        return
    if not (REFERENCE_DIR / "chicagosketch" / "links.csv").exists():
        return
    net = load_reference("chicagosketch")
    toll = net.fixed_cost * 0.0
    toll[::50] = 2.0  # 2 money units on every 50th link
    t = time.perf_counter()
    base = solve_multiclass(net, classes, tol=1e-10)
    t_base = time.perf_counter() - t
    t = time.perf_counter()
    cold = solve_multiclass(net, classes, toll_money=toll, tol=1e-10)
    t_cold = time.perf_counter() - t
    t = time.perf_counter()
    warm = solve_multiclass(net, classes, toll_money=toll, tol=1e-10, warm_start=base)
    t_warm = time.perf_counter() - t
    print(f"Chicago Sketch, gp to 1e-10: untolled {t_base:.2f} s ({base.iterations} it, "
          f"gap {base.relative_gap:.1e}); tolled cold {t_cold:.2f} s (gap "
          f"{cold.relative_gap:.1e}), warm from untolled {t_warm:.2f} s (gap "
          f"{warm.relative_gap:.1e})")


if __name__ == "__main__":
    main()
