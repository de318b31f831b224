"""``congest learn`` through click's CliRunner."""

from __future__ import annotations

import json
import re
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
    assert list(table.columns[:3]) == ["day", "replication", "total_vehicle_hours"]
    assert len(table) == 40 and table["day"].tolist() == list(range(1, 41))
    # hours like every other table; the minutes column stays for older readers
    pd.testing.assert_series_equal(table["total_travel_time"] / 60.0,
                                   table["total_vehicle_hours"], check_names=False,
                                   rtol=1e-12)
    # Braess (1968): 6 vehicles at 92 minutes each at equilibrium
    assert re.search(r"final vehicle-hours\s+[\d.,]+; user equilibrium 9\.2\b", res.output)
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


def test_identical_replications_are_said_on_stderr_and_in_the_summary(runner, tmp_path):
    base = [str(NETWORKS / "braess"), "--days", "20", "--replications", "3", "--seed", "2",
            "--out", str(tmp_path / "days.csv")]
    res = runner.invoke(command, base)
    assert res.exit_code == 0, res.output
    assert "warning: the 3 replications will be identical" in res.stderr
    assert "warning" not in res.stdout
    assert re.search(r"spread over replications\s+none, all identical", res.stdout)
    table = pd.read_csv(tmp_path / "days.csv")
    last = table[table["day"] == 20]["total_vehicle_hours"]
    assert last.max() - last.min() <= 1e-12 * last.max()
    # capacity noise makes them differ: no warning, and the spread is the table's
    res = runner.invoke(command, base + ["--supply-noise", "0.2"])
    assert res.exit_code == 0, res.output
    assert "warning" not in res.stderr
    shown = re.search(r"spread over replications\s+([\d.,]+) vehicle-hours", res.stdout)
    table = pd.read_csv(tmp_path / "days.csv")
    last = table[table["day"] == 20]["total_vehicle_hours"]
    assert float(shown.group(1).replace(",", "")) == pytest.approx(last.max() - last.min(),
                                                                   abs=0.051)
    assert float(shown.group(1)) > 0
    # one replication: no spread row, no warning
    res = runner.invoke(command, [str(NETWORKS / "braess"), "--days", "20",
                                  "--out", str(tmp_path / "one.csv")])
    assert res.exit_code == 0 and "spread" not in res.stdout and not res.stderr


def test_learn_chart_names_the_setting_and_draws_the_equilibrium(runner, tmp_path):
    chart = tmp_path / "learning.svg"
    res = runner.invoke(command, [str(NETWORKS / "braess"), "--days", "30",
                                  "--advice-share", "0.4", "--supply-noise", "0.1",
                                  "--replications", "2", "--seed", "1", "--track", "1:4",
                                  "--out", str(tmp_path / "days.csv"), "--chart", str(chart)])
    assert res.exit_code == 0, res.output
    svg = chart.read_text()
    # matplotlib's SVG keeps every text as a comment beside its glyphs
    assert "day-to-day learning (Hedge, 40% follow advice, capacity noise sd 10%)" in svg
    assert "user equilibrium" in svg and "route 1" in svg
    assert re.search(r"^chart\s+\S*learning\.svg$", res.stdout, re.MULTILINE)
    res = runner.invoke(command, [str(NETWORKS / "braess"), "--out",
                                  str(tmp_path / "x.csv"), "--chart", str(tmp_path / "x.bmp")])
    assert res.exit_code == 1 and "unknown picture format" in res.output
    assert "column" not in res.output and "--chart" in res.output  # an option, named so
    assert not (tmp_path / "x.csv").exists() and not (tmp_path / "x.bmp").exists()
