"""Write the small textbook networks as GMNS folders: Pigou and Braess.

* ``networks/pigou/``: two parallel links from zone 1 to zone 2, costs ``1`` and ``x``,
  one unit of demand (Pigou 1920; Roughgarden & Tardos 2002). UE cost 1, SO 3/4.
* ``networks/braess/`` and ``networks/braess-before/``: Braess (1968) with demand 6 and
  link costs ``10x``, ``50+x``, ``50+x``, ``10x``, with and without the added link
  ``10+x``; route cost 92 with it, 83 without (English translation: Braess, Nagurney &
  Wakolbinger 2005, Transportation Science 39(4)).

Every link uses the polynomial cost ``u_free_flow_time + u_alpha * (v / capacity) **
u_beta`` with capacity 1 and a one-hour period, so volumes are plain numbers of trips.

Run from the repository root: ``python networks/tools/build_textbook.py``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from congest.io import write_gmns
from congest.network import COST_KINDS, Network

ROOT = Path(__file__).resolve().parents[1]
POLY = COST_KINDS["polynomial"]


def pigou() -> Network:
    return Network(
        node_ids=[1, 2], x=[0.0, 1000.0], y=[0.0, 0.0], tail=[0, 0], head=[1, 1],
        capacity=1.0, free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
        cost_kind=POLY, zone_ids=[1, 2], zone_nodes=[0, 1], demand=[[0, 1], [0, 0]],
        name="Pigou", currency="money",
        link_attrs={"name": np.array(["constant road", "congestible road"], dtype=object)},
    )


def braess(with_link: bool = True) -> Network:
    # nodes: 1 start, 2 upper, 3 lower, 4 end (Braess 1968, Fig. 1)
    links = [(1, 2, 0.0, 10.0, "start-upper 10x"), (1, 3, 50.0, 1.0, "start-lower 50+x"),
             (2, 4, 50.0, 1.0, "upper-end 50+x"), (3, 4, 0.0, 10.0, "lower-end 10x")]
    if with_link:
        links.append((2, 3, 10.0, 1.0, "added link 10+x"))
    return Network(
        node_ids=[1, 2, 3, 4], x=[0.0, 1000.0, 1000.0, 2000.0], y=[0.0, 500.0, -500.0, 0.0],
        tail=[a - 1 for a, *_ in links], head=[b - 1 for _, b, *_ in links], capacity=1.0,
        free_flow_time=[c for _, _, c, _, _ in links], alpha=[s for *_, s, _ in links],
        beta=1.0, cost_kind=POLY, zone_ids=[1, 4], zone_nodes=[0, 3],
        demand=[[0, 6], [0, 0]], name="Braess" if with_link else "Braess before",
        link_attrs={"name": np.array([n for *_, n in links], dtype=object)},
    )


def main():
    write_gmns(pigou(), ROOT / "pigou", description="Pigou (1920): costs 1 and x, demand 1.")
    write_gmns(braess(True), ROOT / "braess",
               description="Braess (1968) with the added link 10+x: route cost 92.")
    write_gmns(braess(False), ROOT / "braess-before",
               description="Braess (1968) without the added link: route cost 83.")
    print("wrote", ", ".join(str(ROOT / n) for n in ("pigou", "braess", "braess-before")))


if __name__ == "__main__":
    main()
