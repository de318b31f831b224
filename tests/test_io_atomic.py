"""Atomic output: a failed write leaves the old file (or nothing), never a partial file."""

from __future__ import annotations

import os
from pathlib import Path

import pandas as pd
import pytest

from congest import solve
from congest.io import atomic_folder, atomic_write, read_network, write_gmns, write_link_results

NETWORKS = Path(__file__).resolve().parents[1] / "networks"


def leftovers(folder):
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


def test_atomic_write_replaces(tmp_path):
    target = tmp_path / "out.txt"
    target.write_text("old")
    with atomic_write(target) as fh:
        fh.write("new")
        assert target.read_text() == "old"  # nothing visible until the block ends
    assert target.read_text() == "new"
    assert leftovers(tmp_path) == []


def test_atomic_write_error_keeps_old_file(tmp_path):
    target = tmp_path / "out.txt"
    target.write_text("old")
    with pytest.raises(RuntimeError), atomic_write(target) as fh:
        fh.write("partial")
        raise RuntimeError("disk on fire")
    assert target.read_text() == "old"
    assert leftovers(tmp_path) == []


def test_atomic_write_error_leaves_no_file(tmp_path):
    target = tmp_path / "sub" / "out.bin"
    with pytest.raises(RuntimeError), atomic_write(target, "wb") as fh:
        fh.write(b"partial")
        raise RuntimeError
    assert not target.exists()
    assert leftovers(tmp_path / "sub") == []


def test_atomic_write_permissions_follow_umask(tmp_path):
    target = tmp_path / "out.txt"
    with atomic_write(target) as fh:
        fh.write("x")
    umask = os.umask(0)
    os.umask(umask)
    assert target.stat().st_mode & 0o777 == 0o666 & ~umask


def test_unknown_mode():
    with pytest.raises(ValueError, match="Unknown mode 'a'"), atomic_write("x", "a"):
        pass


def test_atomic_folder_all_or_nothing(tmp_path):
    a, b = tmp_path / "a.txt", tmp_path / "b.txt"
    a.write_text("old a")
    with pytest.raises(RuntimeError), atomic_folder([a, b]) as temps:
        temps[a].write_text("new a")
        raise RuntimeError
    assert a.read_text() == "old a" and not b.exists()
    assert leftovers(tmp_path) == []


def test_write_gmns_failure_leaves_folder_unchanged(tmp_path, monkeypatch):
    net = read_network(NETWORKS / "braess")
    write_gmns(net, tmp_path)
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    calls = []
    real = pd.DataFrame.to_csv

    def flaky(self, *args, **kwargs):
        calls.append(1)
        if len(calls) == 3:
            raise OSError("no space left on device")
        return real(self, *args, **kwargs)

    monkeypatch.setattr(pd.DataFrame, "to_csv", flaky)
    with pytest.raises(OSError):
        write_gmns(net.scale_demand(2.0), tmp_path)
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == before


def test_write_link_results_failure_leaves_no_partial_file(tmp_path, monkeypatch):
    result = solve(read_network(NETWORKS / "braess"), tol=1e-8)
    target = tmp_path / "links.csv"

    def broken(self, fh, *args, **kwargs):
        fh.write("link_id,vol")
        raise OSError("interrupted")

    monkeypatch.setattr(pd.DataFrame, "to_csv", broken)
    with pytest.raises(OSError):
        write_link_results(result, target)
    assert not target.exists()
    assert leftovers(tmp_path) == []
