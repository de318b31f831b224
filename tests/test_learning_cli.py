"""``congest learn`` through click's CliRunner."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from congest.cli.learn import command

NETWORKS = Path(__file__).resolve().parents[1] / "networks"


@pytest.fixture
def runner():
    return CliRunner()


def test_learn_writes_table_and_summary(runner, tmp_path):
    out = tmp_path / "days.csv"
    res = runner.invoke(command, [str(NETWORKS / "braess"), "--rule", "best-response",
                                  "--rate", "1", "--days", "40", "--out", str(out),
                                  "--track", "1:4"])
    assert res.exit_code == 0, res.output
    table = pd.read_csv(out)
    assert list(table.columns[:3]) == ["day", "replication", "total_travel_time"]
    assert len(table) == 40 and table["day"].tolist() == list(range(1, 41))
    # everybody on yesterday's fastest route: the flows flip, period 2
    # (Ben-Akiva, de Palma & Kaysi 1991)
    assert "oscillates" in res.output and "period 2" in res.output
    shares = pd.read_csv(tmp_path / "days-shares.csv")
    sums = shares.groupby(["day", "replication"])["share"].sum()
    assert ((sums - 1).abs() < 1e-9).all()


def test_learn_json_replications_seed(runner, tmp_path):
    args = [str(NETWORKS / "braess"), "--rule", "logit", "--rate", "0.2", "--theta", "0.1",
            "--days", "30", "--replications", "3", "--seed", "5", "--supply-noise", "0.1",
            "--estimate-noise", "0.1", "--json"]
    a = runner.invoke(command, args + ["--out", str(tmp_path / "a.csv")])
    b = runner.invoke(command, args + ["--out", str(tmp_path / "b.csv")])
    assert a.exit_code == 0, a.output
    data = json.loads(a.output)
    assert data["replications"] == 3 and data["rule"] == "logit"
    # same seed, same table
    assert (tmp_path / "a.csv").read_text() == (tmp_path / "b.csv").read_text()
    assert b.exit_code == 0


def test_learn_bad_input(runner, tmp_path):
    res = runner.invoke(command, [str(NETWORKS / "braess"), "--track", "1-4",
                                  "--out", str(tmp_path / "x.csv")])
    assert res.exit_code != 0 and "ORIGIN:DESTINATION" in res.output
    res = runner.invoke(command, [str(NETWORKS / "braess"), "--track", "4:1",
                                  "--out", str(tmp_path / "x.csv")])
    assert res.exit_code != 0 and "4->1" in res.output
    res = runner.invoke(command, [str(NETWORKS / "braess"), "--rule", "logit", "--rate", "2",
                                  "--out", str(tmp_path / "x.csv")])
    assert res.exit_code != 0 and "(0, 1]" in res.output
    assert not (tmp_path / "x.csv").exists()
