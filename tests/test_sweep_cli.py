"""``congest sweep`` through click's test runner, on the shipped Pigou network."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from congest.cli import main
from congest.cli.sweep import parse_values
from congest.exceptions import InputError

PIGOU = Path(__file__).resolve().parents[1] / "networks" / "pigou"


def test_sweep_writes_table_prints_peak_and_resumes(tmp_path):
    out = tmp_path / "pigou.csv"
    args = ["sweep", str(PIGOU), "--levels", "0.25:2:8", "--gap", "1e-10",
            "--scheduler", "serial", "--out", str(out)]
    first = CliRunner().invoke(main, args)
    assert first.exit_code == 0, first.output
    table = pd.read_csv(out)
    assert len(table) == 8
    # Pigou (1920) with costs 1 and x: PoA q^2 / (q - 1/4) on (1/2, 1], q / (q - 1/4)
    # above 1, so the peak 4/3 is at q = 1 (Roughgarden & Tardos 2002)
    q = table["demand_scale"].to_numpy()
    ue = np.where(q <= 1, q**2, q)
    so = np.where(q <= 0.5, q**2, q - 0.25)
    np.testing.assert_allclose(table["price_of_anarchy"], ue / so, rtol=1e-8)
    assert "peak price of anarchy       1.3333 at demand level 1" in first.output
    assert "8 computed, 0 reused" in first.output
    assert len(list((tmp_path / "pigou.csv.points").glob("*.json"))) == 8
    again = CliRunner().invoke(main, args)
    assert again.exit_code == 0 and "0 computed, 8 reused" in again.output


def test_sweep_bad_levels_are_clear_errors(tmp_path):
    for levels in ("a:b", "1,-2", "0:1:0"):
        res = CliRunner().invoke(main, ["sweep", str(PIGOU), "--levels", levels,
                                        "--scheduler", "serial",
                                        "--out", str(tmp_path / "x.csv")])
        assert res.exit_code == 1 and res.output.startswith("error:"), res.output
    with pytest.raises(InputError, match="start:stop:count"):
        parse_values("1:2", "--levels")


def test_worker_timeout_reaches_the_sweep(tmp_path):
    # the library's worker_timeout (tested on a cluster without workers in
    # test_sweep.py) is the --worker-timeout option; a real cluster with no worker
    # for that long reports the unfinished points as failed (exit code 1)
    from distributed import LocalCluster

    with LocalCluster(n_workers=0, processes=False, protocol="tcp", dashboard_address=":0",
                      silence_logs=50) as cluster:
        res = CliRunner().invoke(main, ["sweep", str(PIGOU), "--levels", "0.5,1",
                                        "--scheduler", cluster.scheduler_address,
                                        "--worker-timeout", "1", "--no-progress",
                                        "--out", str(tmp_path / "x.csv")])
    assert res.exit_code == 1, res.output
    assert "the Dask cluster had no worker for 1 s" in res.output
    bad = CliRunner().invoke(main, ["sweep", str(PIGOU), "--worker-timeout", "0"])
    assert bad.exit_code == 2 and "--worker-timeout" in bad.output


def test_sweep_cautions_far_above_capacity(tmp_path):
    # both Pigou links have capacity 1; at demand level 5 the UE puts 1 trip on the
    # variable link (its cost x reaches the constant 1) and 4 on the constant one:
    # volume/capacity 4, past where volume-delay curves are fitted
    out = tmp_path / "pigou.csv"
    args = ["sweep", str(PIGOU), "--levels", "0.5,5", "--gap", "1e-10",
            "--scheduler", "serial", "--out", str(out)]
    res = CliRunner().invoke(main, args)
    assert res.exit_code == 0, res.output
    labels = [line.split("  ")[0] for line in res.output.splitlines()]
    assert "caution" in labels and "volume/capacity reaches 4.0 at demand level 5" in res.output
    calm = CliRunner().invoke(main, [*args[:3], "0.5,1", *args[4:],
                                     "--store", str(tmp_path / "calm")])
    assert calm.exit_code == 0
    assert "caution" not in [line.split("  ")[0] for line in calm.output.splitlines()]
