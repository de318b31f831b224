"""Shared fixtures: the reference networks beside the project, textbook networks."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from congest.network import Network

#: The read-only benchmark networks shipped beside the project (absent in a user's clone).
REFERENCE_DIR = Path(__file__).resolve().parents[1].parent / "shared" / "reference-networks"
REFERENCE_NAMES = ["siouxfalls", "anaheim", "barcelona", "winnipeg", "chicagosketch"]


def reference_dir(name: str) -> Path:
    """Folder of reference network ``name``; skips the test when it is absent."""
    path = REFERENCE_DIR / name
    if not (path / "links.csv").exists():
        pytest.skip(f"reference network {name!r} not found at {path} "
                    "(the shared benchmark folder sits beside the project on CI only)")
    return path


def reference_meta(name: str) -> dict:
    return json.loads((reference_dir(name) / "meta.json").read_text())


def load_reference(name: str) -> Network:
    """Load a reference network with zones 1..n_zones and its stated generalized cost."""
    from congest.io import read_tables

    path = reference_dir(name)
    meta = reference_meta(name)
    gen = meta.get("generalized_cost", {})
    return read_tables(
        path / "links.csv",
        path / "demand.csv",
        zones=range(1, meta["number_of_zones"] + 1),
        through_centroids=meta["first_thru_node"] == 1,
        toll_weight=gen.get("toll_factor", 0.0),
        length_weight=gen.get("distance_factor", 0.0),
        name=meta["name"],
    )


def reference_ue_flows(name: str) -> np.ndarray:
    """Published best-known UE link volumes, in link order."""
    data = np.genfromtxt(reference_dir(name) / "ue_flows.csv", delimiter=",", names=True)
    return np.asarray(data["volume"], dtype=np.float64)


@pytest.fixture(params=REFERENCE_NAMES)
def reference_name(request):
    return request.param
