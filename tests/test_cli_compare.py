"""``congest compare`` and ``congest toll`` through click's CliRunner."""

from __future__ import annotations

import json
import os
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from numpy.testing import assert_allclose

from congest.cli import main


@pytest.fixture
def two_routes(tmp_path):
    """Plain tables for routes t1 = 2 + x1 (a road) and t2 = 1 + 2 x2 (a bridge), two
    trips. By hand (Wardrop 1952): UE (1, 1), 6 vehicle-minutes; SO (7/6, 5/6),
    213/36 vehicle-minutes; marginal-cost tolls (7/6, 5/3) minutes."""
    folder = tmp_path / "tworoutes"
    folder.mkdir()
    (folder / "links.csv").write_text(
        "link_id,from_node,to_node,capacity,free_flow_time,alpha,beta,cost_kind,length,"
        "facility_type\n"
        "1,1,2,1,2,1,1,polynomial,3,road\n"
        "2,1,2,1,1,2,1,polynomial,1,bridge\n")
    (folder / "demand.csv").write_text("origin,destination,volume\n1,2,2\n")
    return folder


def run(args, cwd):
    # run in a fresh folder under cwd so default output names land there
    work = Path(tempfile.mkdtemp(dir=cwd))
    old = os.getcwd()
    os.chdir(work)
    try:
        return CliRunner().invoke(main, args, catch_exceptions=False)
    finally:
        os.chdir(old)


def test_compare_writes_table_and_links(two_routes, tmp_path):
    out = tmp_path / "cmp"
    plan = tmp_path / "bridge.csv"
    # 0.5 money = 0.5 minutes at 60/h on the bridge alone reaches SO (by hand)
    plan.write_text("attribute,equals,charge,window_start,window_end\n"
                    "facility_type,bridge,0.5,07:00,09:00\n")
    result = run(["compare", str(two_routes), "--value-of-time", "60", "--gap", "1e-11",
                  "--plan", str(plan), "--out-dir", str(out), "--advice-share", "0.75",
                  "--days", "22", "--burn-in", "2"], tmp_path)
    assert result.exit_code == 0, result.output
    for words in ("free-flow advice to all", "reactive advice", "advice followed by 75%",
                  "user equilibrium", "system optimum", "marginal-cost tolls",
                  "toll plan bridge", "price of anarchy 1.0141"):
        assert words in result.output
    table = pd.read_csv(out / "scenarios.csv", index_col="scenario")
    so = 213 / 36
    assert_allclose(table["vehicle_hours"] * 60,
                    [10.0, 9.0, 7.25, 6.0, so, so, so], atol=1e-5)
    assert table.loc["plan_bridge", "revenue_money"] == pytest.approx(0.5 * 5 / 6, abs=1e-6)
    data = json.loads((out / "scenarios.json").read_text())
    assert [r["scenario"] for r in data["scenarios"]] == list(table.index)
    assert data["scenarios"][0]["relative_gap"] is None  # NaN written as null
    assert data["reactive_advice"]["cycle_days"] == 2
    assert data["first_best"]["price_of_anarchy"] == pytest.approx(6 / so, rel=1e-8)
    links = pd.read_csv(out / "links" / "marginal_cost_tolls.csv")
    assert list(links.columns) == ["link_id", "from_node", "to_node", "volume",
                                   "travel_time", "cost", "toll_money",
                                   "volume_capacity"]
    assert_allclose(links["toll_money"], [7 / 6, 5 / 3], atol=1e-6)
    assert sorted(p.name for p in (out / "links").iterdir()) == sorted(
        f"{k}.csv" for k in table.index)
    # nothing half-written is left behind
    assert not [p for p in out.rglob(".*.tmp")]


def test_compare_bad_plan_names_file_row_column(two_routes, tmp_path):
    plan = tmp_path / "bad.csv"
    plan.write_text("link_id,charge\n1,2\n7,1\n")
    result = run(["compare", str(two_routes), "--plan", str(plan)], tmp_path)
    assert result.exit_code == 1
    assert f"error: {plan}, row 3, column 'link_id'" in result.output
    assert "no link with this id" in result.output
    assert "Traceback" not in result.output


def test_compare_rejects_burn_in(two_routes, tmp_path):
    result = run(["compare", str(two_routes), "--days", "5", "--burn-in", "4"], tmp_path)
    assert result.exit_code == 1
    assert "--burn-in" in result.output


def test_toll_first_best(two_routes, tmp_path):
    out = tmp_path / "tolls.csv"
    result = run(["toll", str(two_routes), "--value-of-time", "60", "--gap", "1e-11",
                  "--out", str(out)], tmp_path)
    assert result.exit_code == 0, result.output
    assert "first-best tolls on 2 of 2 links" in result.output
    frame = pd.read_csv(out)
    # x t'(x) at SO (Beckmann, McGuire & Winsten 1956; by hand)
    assert_allclose(frame["toll_min"], [7 / 6, 5 / 3], atol=1e-6)
    assert_allclose(frame["toll_money"], frame["toll_min"])
    assert_allclose(frame["tolled_volume"], frame["so_volume"], atol=1e-6)
    assert_allclose(frame["ue_volume"], [1.0, 1.0], atol=1e-6)
    # the network's own link labels travel with the table
    assert frame["facility_type"].tolist() == ["road", "bridge"]


@pytest.mark.parametrize("how", [["--on", "2"], ["--on-attribute", "facility_type=bridge"]])
def test_toll_second_best_on_the_bridge(two_routes, tmp_path, how):
    out = tmp_path / "sb.csv"
    result = run(["toll", str(two_routes), "--value-of-time", "60", "--gap", "1e-11",
                  "--out", str(out), *how], tmp_path)
    assert result.exit_code == 0, result.output
    # one toll of 0.5 minutes on the bridge reaches SO: all of the first-best gain
    assert "share of the first-best gain recovered: 100.0%" in result.output
    frame = pd.read_csv(out)
    assert frame["link_id"].tolist() == [2]
    assert frame["facility_type"].tolist() == ["bridge"]
    assert frame["toll_money"].iloc[0] == pytest.approx(0.5, abs=1e-3)
    assert frame["tolled_volume"].iloc[0] == pytest.approx(5 / 6, abs=1e-3)


@pytest.mark.parametrize("args, words", [
    (["--on", "9"], "does not have"),
    (["--on", "a"], "link ids separated by commas"),
    (["--on-attribute", "facility_type"], "NAME=VALUE"),
    (["--on-attribute", "colour=red"], "no link attribute 'colour'"),
    (["--on-attribute", "facility_type=tunnel"], "no link has facility_type"),
    # the message lists the values that exist, so the user can pick one
    (["--on-attribute", "facility_type=tunnel"], "its values are: bridge, road"),
])
def test_toll_bad_groups(two_routes, tmp_path, args, words):
    result = run(["toll", str(two_routes), *args], tmp_path)
    assert result.exit_code == 1
    assert result.output.startswith("error: ")
    assert words in result.output


def test_toll_max_charge_binds(two_routes, tmp_path):
    out = tmp_path / "sb.csv"
    result = run(["toll", str(two_routes), "--value-of-time", "60", "--gap", "1e-11",
                  "--on", "2", "--max-charge", "0.25", "--out", str(out)], tmp_path)
    assert result.exit_code == 0, result.output
    assert pd.read_csv(out)["toll_money"].iloc[0] == pytest.approx(0.25, abs=1e-3)
    share = float(result.output.split("recovered: ")[1].split("%")[0])
    assert 0.0 < share < 100.0
    assert np.isfinite(share)


def test_toll_with_classes(two_routes, tmp_path):
    out = tmp_path / "fb.csv"
    # one class at the network's value of time: the per-class table is the single-class
    # result of the first-best tolls
    result = run(["toll", str(two_routes), "--value-of-time", "60", "--gap", "1e-11",
                  "--class", "all:1:60", "--out", str(out)], tmp_path)
    assert result.exit_code == 0, result.output
    table = pd.read_csv(tmp_path / "fb-classes.csv", index_col="class")
    # SO mean trip time (213/36) / 2 against UE 3 minutes (by hand, see two_routes)
    assert table.loc["all", "time_change_min"] == pytest.approx(213 / 72 - 3.0, abs=1e-5)
    # toll paid per trip: revenue 99/36 over 2 trips, money = minutes at 60/h
    assert table.loc["all", "toll_change_money"] == pytest.approx(99 / 72, abs=1e-5)
    assert "per class" in result.output
    # one class at the network's value of time: the class run is the single-class one,
    # so the first-best tolls reach SO and no contradiction is reported
    assert "do not reproduce the system optimum" not in result.output


def test_toll_with_classes_reports_their_own_totals(two_routes, tmp_path):
    # two classes around the network's value of time: the first-best tolls, set for one
    # value of time, leave the multi-class tolled equilibrium above SO, and the summary
    # gives the class run's own vehicle-hours and revenue beside the single-VOT ones
    from congest.io import read_network
    from congest.multiclass import UserClass, class_impacts
    from congest.pricing import first_best

    out = tmp_path / "fb.csv"
    result = run(["toll", str(two_routes), "--value-of-time", "60", "--gap", "1e-11",
                  "--class", "slow:0.5:6", "--class", "fast:0.5:600", "--out", str(out)],
                 tmp_path)
    assert result.exit_code == 0, result.output
    net = read_network(two_routes).replace(value_of_time=60.0)
    fb = first_best(net, tol=1e-11)
    imp = class_impacts(net, [UserClass("slow", 0.5, 6.0), UserClass("fast", 0.5, 600.0)],
                        fb.tolls_money, tol=1e-11)
    assert imp.tolled.vehicle_hours > fb.so.vehicle_hours * (1 + 1e-6)
    assert (f"tolled {imp.tolled.vehicle_hours:,.1f} (SO {fb.so.vehicle_hours:,.1f}); "
            f"revenue {imp.revenue_money:,.2f}") in result.output
    assert "do not reproduce the system optimum for this class mix" in result.output
    assert "values of time 6 to 600" in result.output


@pytest.mark.parametrize("spec, words", [
    ("all:1", "NAME:SHARE:VALUE_OF_TIME"),
    ("all:x:60", "must be numbers"),
    ("all:0.5:60", "sum to 1"),
])
def test_toll_bad_class(two_routes, tmp_path, spec, words):
    result = run(["toll", str(two_routes), "--class", spec], tmp_path)
    assert result.exit_code == 1
    assert words in result.output
