"""Demand sweeps: closed forms, the light/heavy traffic limits, engines and resuming."""

from __future__ import annotations

import contextlib

import numpy as np
import pandas as pd
import pytest
from conftest import load_reference

import congest.equilibrium as equilibrium
from congest import solve
from congest.network import Network
from congest.sweep import TIMING_COLUMNS, PointStore, sweep, sweep_points

# a method that supports warm starts after a demand change, if one is registered
WARM_METHOD = "gp" if "gp" in equilibrium.METHODS else "auto"


def pigou(q0=1.0):
    """Pigou's network (Pigou 1920): link costs 1 and x / q0, one unit of demand."""
    return Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=[1.0, q0],
                   free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
                   cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
                   demand=[[0, 1], [0, 0]])


def _results(table):
    return table.drop(columns=[c for c in TIMING_COLUMNS if c in table])


def test_pigou_price_of_anarchy_against_closed_form():
    # Pigou (1920); Roughgarden & Tardos (2002), Section 2: with demand q and costs 1 and
    # x/q0, UE puts x = min(q, q0) on the variable link, SO x = min(q, q0/2) (where the
    # marginal cost 2x/q0 meets 1). Total cost x^2/q0 + (q - x) at each.
    q0 = 2.0
    levels = [0.1, 0.4, 0.9, 1.0, 1.3, 2.0, 3.0, 6.0, 20.0]
    res = sweep(pigou(q0), levels, scheduler="serial", tol=1e-12)
    assert not res.failed
    q = np.array(levels)
    x_ue, x_so = np.minimum(q, q0), np.minimum(q, q0 / 2)
    ue = x_ue**2 / q0 + (q - x_ue)
    so = x_so**2 / q0 + (q - x_so)
    t = res.table
    np.testing.assert_allclose(t["demand_scale"], q)
    np.testing.assert_allclose(t["ue_system_cost"], ue, rtol=1e-8)
    np.testing.assert_allclose(t["so_system_cost"], so, rtol=1e-8)
    np.testing.assert_allclose(t["price_of_anarchy"], ue / so, rtol=1e-8)
    # the marginal-cost toll x t'(x) = x / q0 on the variable link (Beckmann, McGuire &
    # Winsten 1956), paid by the x SO drivers there: revenue x^2 / q0
    np.testing.assert_allclose(t["first_best_revenue_minutes"], x_so**2 / q0, rtol=1e-6)
    # the peak is 4/3 at q = q0 (Roughgarden & Tardos 2002, affine costs)
    assert t.loc[t["price_of_anarchy"].idxmax(), "demand_scale"] == pytest.approx(q0)
    assert res.peak()["price_of_anarchy"] == pytest.approx(4 / 3, rel=1e-8)


def test_pigou_toll_scale_and_advice_share():
    # Pigou (1920), q = q0 = 1: a toll s * 1/2 on the variable link gives the UE split
    # x = min(1, 1 - s/2) (cost x + s/2 equals 1), so s = 1 reproduces SO (x = 1/2).
    res = sweep(pigou(), [1.0], toll_scales=[0.0, 0.5, 1.0], advice_shares=[0.0, 1.0],
                scheduler="serial", tol=1e-12)
    t = res.table.set_index(["toll_scale", "advice_share"])
    for s in (0.0, 0.5, 1.0):
        x = 1.0 - s / 2
        assert t.loc[(s, 0.0), "tolled_system_cost"] == pytest.approx(x**2 + 1 - x, rel=1e-8)
        assert t.loc[(s, 0.0), "tolled_revenue_minutes"] == pytest.approx(s / 2 * x, rel=1e-6)
    assert t.loc[(1.0, 0.0), "tolled_gain_share"] == pytest.approx(1.0, abs=1e-6)
    # free-flow advice sends everyone to the variable link (free-flow cost 0): cost 1 each
    assert t.loc[(0.0, 1.0), "advice_system_cost"] == pytest.approx(1.0, rel=1e-10)
    assert t.loc[(0.0, 1.0), "advice_ratio_to_so"] == pytest.approx(4 / 3, rel=1e-8)


def test_siouxfalls_price_of_anarchy_tends_to_one_at_light_and_heavy_demand():
    # Colini-Baldeschi, Cominetti, Mertikopoulos & Scarsini (2020), Operations Research
    # 68(2): PoA -> 1 in light and in heavy traffic (BPR costs of one degree); Youn,
    # Gastner & Jeong (2008) show the same rise and fall on city networks.
    net = load_reference("siouxfalls")
    res = sweep(net, [0.01, 1.0, 20.0], scheduler="serial", tol=1e-8, method=WARM_METHOD,
                chunk_size=1)
    assert not res.failed
    poa = res.table.set_index("demand_scale")["price_of_anarchy"]
    assert poa[1.0] > 1.02  # measurably inefficient near the published demand
    for level in (0.01, 20.0):
        assert 1.0 - 1e-6 <= poa[level] < 1.0 + 0.05 * (poa[1.0] - 1.0)


@pytest.mark.slow
@pytest.mark.parametrize("name", ["anaheim"])
def test_reference_price_of_anarchy_tends_to_one(name):
    # Colini-Baldeschi et al. (2020), Operations Research 68(2): light and heavy traffic.
    # Barcelona, Winnipeg and Chicago Sketch are left out: at 30 x demand their steep
    # cost functions (beta up to 16.8, capacities normalised to 1) make the UE and SO
    # solves to 1e-7 run for many minutes each, too long for the slow suite.
    net = load_reference(name)
    res = sweep(net, [0.005, 1.0, 30.0], scheduler="serial", tol=1e-7, method=WARM_METHOD,
                chunk_size=1)
    assert not res.failed
    poa = res.table.set_index("demand_scale")["price_of_anarchy"]
    peak = max(poa[1.0], 1.0)
    for level in (0.005, 30.0):
        assert poa[level] - 1.0 < max(0.2 * (peak - 1.0), 2e-3)


def test_in_process_cluster_gives_the_serial_table():
    # the same chains on any engine: bit-identical results (same kernel thread count)
    net = load_reference("siouxfalls")
    levels = np.linspace(0.4, 1.6, 6)
    serial = sweep(net, levels, scheduler="serial", tol=1e-6, method=WARM_METHOD,
                   chunk_size=3, numba_threads=1)
    dask = sweep(net, levels, processes=False, n_workers=2, tol=1e-6, method=WARM_METHOD,
                 chunk_size=3)
    assert not serial.failed and not dask.failed
    pd.testing.assert_frame_equal(_results(serial.table), _results(dask.table),
                                  check_exact=True)


def test_resume_computes_only_the_rest(tmp_path):
    net = load_reference("siouxfalls")
    levels = np.linspace(0.5, 1.5, 6)
    kw = dict(tol=1e-6, method=WARM_METHOD, chunk_size=3, numba_threads=1)
    full = sweep(net, levels, scheduler="serial", **kw)

    def stop_after(n):
        return lambda info: info.done >= n

    first = sweep(net, levels, scheduler="serial", store=tmp_path,
                  callback=stop_after(3), **kw)
    assert first.stopped and first.computed == 3
    assert len(list(tmp_path.glob("*.json"))) == 3
    second = sweep(net, levels, scheduler="serial", store=tmp_path, **kw)
    assert (second.reused, second.computed) == (3, 3)
    # the stop fell on a chain boundary, so every point saw the same warm start
    pd.testing.assert_frame_equal(_results(second.table), _results(full.table),
                                  check_exact=True)
    third = sweep(net, levels, scheduler="serial", store=tmp_path, **kw)
    assert (third.reused, third.computed) == (6, 0)
    pd.testing.assert_frame_equal(third.table, second.table)


def test_resume_inside_a_chain_on_a_cluster(tmp_path):
    # stopped mid-chain, the rest of that chain starts cold: same answer to solver accuracy
    net = load_reference("siouxfalls")
    levels = np.linspace(0.5, 1.5, 5)
    kw = dict(tol=1e-9, method=WARM_METHOD, chunk_size=5)
    full = sweep(net, levels, scheduler="serial", **kw)
    first = sweep(net, levels, processes=False, n_workers=2, store=tmp_path,
                  callback=lambda info: info.done >= 2, **kw)
    assert first.stopped and 2 <= first.computed < 5
    second = sweep(net, levels, processes=False, n_workers=2, store=tmp_path, **kw)
    assert second.reused == first.computed and second.computed == 5 - first.computed
    a, b = _results(second.table), _results(full.table)
    assert list(a.columns) == list(b.columns)
    for col in ("ue_system_cost", "so_system_cost", "price_of_anarchy", "first_best_revenue"):
        np.testing.assert_allclose(a[col], b[col], rtol=1e-6)


def _flaky(problem, **kw):
    # fails on the point with total demand 0.75 (the third of four levels below)
    if abs(problem.network.total_demand - 0.75) < 1e-12:
        raise RuntimeError("synthetic failure")
    from congest._frank_wolfe import solve_fw

    return solve_fw(problem, **kw)


@pytest.mark.parametrize("engine", ["serial", "threads"])
def test_failing_point_is_reported_and_others_finish(tmp_path, monkeypatch, engine):
    monkeypatch.setitem(equilibrium.METHODS, "flaky", f"{__name__}:_flaky")
    levels = [0.25, 0.5, 0.75, 1.0]
    kw = dict(method="flaky", tol=1e-10, store=tmp_path, chunk_size=4)
    kw.update(scheduler="serial") if engine == "serial" else kw.update(
        processes=False, n_workers=2)
    res = sweep(pigou(), levels, **kw)
    assert [p.demand_scale for p, _ in res.failed] == [0.75]
    assert "RuntimeError: synthetic failure" in res.failed[0][1]
    assert res.table["demand_scale"].tolist() == [0.25, 0.5, 1.0]
    # the point after the failure is still right (Pigou closed form, q = 1: PoA 4/3)
    assert res.table["price_of_anarchy"].iloc[-1] == pytest.approx(4 / 3, rel=1e-8)
    assert len(list(tmp_path.glob("*.json"))) == 3
    monkeypatch.setitem(equilibrium.METHODS, "flaky", "congest._frank_wolfe:solve_fw")
    again = sweep(pigou(), levels, **kw)
    assert (again.reused, again.computed, again.failed) == (3, 1, [])


WORKER_PRELOAD = '''
import sys

sys.path.insert(0, {folder!r})
import congest.equilibrium as equilibrium

equilibrium.METHODS["dies_once"] = "congest_dies_once:solve"
equilibrium.METHODS["dies_at_two"] = "congest_dies_once:dies_at_two"
equilibrium.METHODS["slow_beside_two"] = "congest_dies_once:slow_beside_two"
'''

DIES_ONCE = '''
import os
import time
from congest._frank_wolfe import solve_fw

MARKER = {marker!r}


def solve(problem, **kw):
    if not os.path.exists(MARKER):
        open(MARKER, "w").close()
        os._exit(1)  # the worker process dies mid-point
    return solve_fw(problem, **kw)


def dies_at_two(problem, **kw):
    if problem.network.total_demand == 2.0:
        time.sleep(1.0)  # as a real point takes a while: the rows before it are fetched
        os._exit(1)  # every time
    return solve(problem, **kw)


def slow_beside_two(problem, **kw):
    # the other points take longer than demand 2 takes to kill its worker: started
    # beside it, they are still running when the worker dies
    if problem.network.total_demand != 2.0:
        time.sleep(2.0)
    return dies_at_two(problem, **kw)
'''


def _dying_methods(folder):
    """Write the methods above into ``folder``; returns the worker preload's path."""
    (folder / "congest_dies_once.py").write_text(
        DIES_ONCE.format(marker=str(folder / "died")))
    preload = folder / "preload.py"
    preload.write_text(WORKER_PRELOAD.format(folder=str(folder)))
    return preload


@contextlib.contextmanager
def _dying_cluster(folder, threads=1):
    """A cluster of one worker process that knows the methods above.

    Dask reruns a task once after its worker died (``allowed-failures`` 1), fewer than
    the sweep's default ``retries``, as a running cluster may have its own setting.
    The cluster would close the nanny for good if its worker happened to be down
    (being restarted) 15 s after one of its deaths (``lost-worker-timeout``), as the
    embedded cluster of :func:`sweep` is kept from doing.
    """
    import dask
    from distributed import Client, LocalCluster

    preload = _dying_methods(folder)
    config = {"distributed.scheduler.allowed-failures": 1,
              "distributed.deploy.lost-worker-timeout": "30 days"}
    with dask.config.set(config), LocalCluster(
            n_workers=1, threads_per_worker=threads, processes=True,
            dashboard_address=":0", silence_logs=50,
            preload=[str(preload)]) as cluster, Client(cluster) as client:
        yield client


def _pigou_poa(q):
    # Pigou (1920), q0 = 1: UE puts x = min(q, 1) on the variable link, SO x = min(q, 1/2);
    # total cost x^2 + (q - x) at each (as in the closed-form test above)
    q = np.asarray(q, dtype=float)
    x_ue, x_so = np.minimum(q, 1.0), np.minimum(q, 0.5)
    return (x_ue**2 + q - x_ue) / (x_so**2 + q - x_so)


@pytest.mark.slow  # kills and restarts worker processes
def test_worker_that_dies_is_retried(tmp_path):
    # a point whose worker dies once is rerun and finishes; one that kills its worker
    # every time is reported with KilledWorker, and the others still finish
    with _dying_cluster(tmp_path) as client:
        res = sweep(pigou(), [0.5, 1.0, 2.0], scheduler=client, method="dies_once",
                    tol=1e-10)
        assert (tmp_path / "died").exists()
        bad = sweep(pigou(), [1.0, 2.0, 3.0], scheduler=client, method="dies_at_two",
                    tol=1e-10)
    assert not res.failed, res.failed
    # Pigou (1920) closed form with q0 = 1: PoA 1, 4/3 and 2 / 1.75
    np.testing.assert_allclose(res.table["price_of_anarchy"], [1.0, 4 / 3, 2 / 1.75],
                               rtol=1e-8)
    assert [p.demand_scale for p, _ in bad.failed] == [2.0], bad.failed
    assert bad.failed[0][1].startswith("KilledWorker: its worker died")
    assert bad.table["demand_scale"].tolist() == [1.0, 3.0]
    np.testing.assert_allclose(bad.table["price_of_anarchy"], _pigou_poa([1.0, 3.0]),
                               rtol=1e-8)


@pytest.mark.slow  # kills and restarts worker processes
def test_points_beside_a_killing_point_finish(tmp_path):
    # one point per chain on a worker of two threads: demand 3 runs beside demand 2
    # each time demand 2 kills the worker, so Dask gives up on both; only demand 2,
    # which also kills its worker when it runs alone, is reported. Through the
    # scheduler's address, as `congest sweep --scheduler ADDRESS` does.
    (tmp_path / "died").touch()  # only demand 2 kills its worker
    with _dying_cluster(tmp_path, threads=2) as client:
        res = sweep(pigou(), [2.0, 3.0], scheduler=client.scheduler.address,
                    method="slow_beside_two", tol=1e-10, chunk_size=1, retries=1)
    assert [p.demand_scale for p, _ in res.failed] == [2.0], res.failed
    assert res.failed[0][1].startswith("KilledWorker: its worker died")
    assert res.table["demand_scale"].tolist() == [3.0]
    np.testing.assert_allclose(res.table["price_of_anarchy"], _pigou_poa([3.0]),
                               rtol=1e-8)


@pytest.mark.slow  # kills and restarts worker processes
def test_embedded_cluster_reruns_points_whose_worker_died(tmp_path):
    # the sweep's own cluster (here of one worker) loads the methods through Dask's
    # worker preload setting. Dask reruns demand 2 `retries` times, then the sweep
    # reruns it alone, where its worker dies `retries` + 1 times again.
    import dask

    preload = _dying_methods(tmp_path)
    (tmp_path / "died").touch()  # only demand 2 kills its worker
    with dask.config.set({"distributed.worker.preload": [str(preload)]}):
        res = sweep(pigou(), [1.0, 2.0, 3.0], n_workers=1, method="dies_at_two",
                    tol=1e-10, retries=1, store=tmp_path / "points")
    assert [p.demand_scale for p, _ in res.failed] == [2.0], res.failed
    assert res.failed[0][1].startswith("KilledWorker: its worker died 2 times")
    assert res.table["demand_scale"].tolist() == [1.0, 3.0]
    np.testing.assert_allclose(res.table["price_of_anarchy"], _pigou_poa([1.0, 3.0]),
                               rtol=1e-8)
    assert len(list((tmp_path / "points").glob("*.json"))) == 2


def test_cluster_without_workers_reports_the_points():
    # a cluster whose workers are gone for good: the points are reported, not awaited
    from distributed import Client, LocalCluster

    with LocalCluster(n_workers=0, processes=False, dashboard_address=":0",
                      silence_logs=50) as cluster, Client(cluster) as client:
        res = sweep(pigou(), [0.5, 1.0], scheduler=client, worker_timeout=1.0)
    assert res.table.empty
    assert [p.demand_scale for p, _ in res.failed] == [0.5, 1.0]
    for _, error in res.failed:
        assert error == "not run: the Dask cluster had no worker for 1 s"


def test_store_keys_depend_on_network_settings_and_point(tmp_path):
    net = pigou()
    sweep(net, [1.0], scheduler="serial", tol=1e-8, store=tmp_path)
    sweep(net, [1.0], scheduler="serial", tol=1e-9, store=tmp_path)
    sweep(net.replace(capacity=[1.0, 2.0]), [1.0], scheduler="serial", tol=1e-8,
          store=tmp_path)
    assert len(list(tmp_path.glob("*.json"))) == 3
    again = sweep(net, [1.0], scheduler="serial", tol=1e-8, store=tmp_path)
    assert again.reused == 1
    # a damaged file is recomputed, not trusted
    key = next(iter(tmp_path.glob("*.json")))
    key.write_text("{not json")
    store = PointStore(tmp_path)
    assert store.load(key.stem) is None


def test_warm_start_chain_matches_cold_solves():
    # warm-started points agree with independent cold solves to solver accuracy
    net = load_reference("siouxfalls")
    res = sweep(net, [0.8, 1.0, 1.2], scheduler="serial", tol=1e-10, method=WARM_METHOD)
    for row in res.table.itertuples():
        cold = solve(net.scale_demand(row.demand_scale), tol=1e-10, method=WARM_METHOD)
        assert row.ue_system_cost == pytest.approx(cold.total_cost, rel=1e-8)


def test_bad_sweep_arguments():
    with pytest.raises(ValueError, match="demand_scales"):
        sweep_points([-1.0])
    with pytest.raises(ValueError, match="advice_shares"):
        sweep_points([1.0], advice_shares=[1.5])
    with pytest.raises(ValueError, match="chunk_size"):
        sweep(pigou(), [1.0], scheduler="serial", chunk_size=0)


@pytest.mark.slow
def test_default_local_cluster_of_processes_gives_the_serial_table():
    # the embedded cluster (one single-threaded worker process per core) and a serial
    # run with one kernel thread follow the same chains: identical tables
    net = load_reference("siouxfalls")
    levels = np.linspace(0.5, 1.5, 4)
    kw = dict(tol=1e-8, method=WARM_METHOD, chunk_size=2)
    serial = sweep(net, levels, scheduler="serial", numba_threads=1, **kw)
    cluster = sweep(net, levels, n_workers=2, **kw)
    pd.testing.assert_frame_equal(_results(serial.table), _results(cluster.table),
                                  check_exact=True)


def test_scenario_columns_from_compare():
    # Pigou (1920), costs 1 and x: free-flow advice sends all q drivers to the variable
    # link (free-flow cost 0), total q^2; SO total is q^2 for q <= 1/2, q - 1/4 above
    res = sweep(pigou(), [0.25, 1.0, 2.0], scheduler="serial", tol=1e-10,
                scenarios=("free_flow_advice", "marginal_cost_tolls"))
    assert not res.failed
    t = res.table
    q = t["demand_scale"].to_numpy()
    so = np.where(q <= 0.5, q**2, q - 0.25)
    np.testing.assert_allclose(t["free_flow_advice_ratio_to_so"], q**2 / so, rtol=1e-8)
    np.testing.assert_allclose(t["marginal_cost_tolls_ratio_to_so"], 1.0, atol=1e-8)
    assert "free_flow_advice_label" not in t  # text columns are left out
