"""The report folder and the plot/report commands (through click's CliRunner).

Checks: every image the HTML page and the Markdown summary reference exists (or is an
embedded data URI that decodes to a picture), the cautions are on the page, the table
matches the comparison, the GeoJSON carries every scenario's volumes, plotting leaves the
result files it reads unchanged, and bad inputs give one-line errors.
"""

from __future__ import annotations

import base64
import hashlib
import json
import re
from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from pandas.testing import assert_frame_equal

from congest.cli import main
from congest.generate import grid_network
from congest.io import write_gmns
from congest.io.geojson import read_link_geojson
from congest.report import CAUTIONS, build_report, write_report


@pytest.fixture(scope="module")
def city():
    return grid_network(5, 6, n_zones=6, seed=3, name="Test town")


@pytest.fixture(scope="module")
def folder(city, tmp_path_factory):
    path = tmp_path_factory.mktemp("net") / "town"
    write_gmns(city, path)
    return path


@pytest.fixture(scope="module")
def report(city):
    return build_report(city, tol=1e-6, sweep_levels=[0.5, 1.0], learning_days=20,
                        learning_replications=2)


@pytest.fixture(scope="module")
def linked(report, tmp_path_factory):
    out = tmp_path_factory.mktemp("linked")
    return out, write_report(report, out, embed=False)


@pytest.fixture(scope="module")
def embedded(report, tmp_path_factory):
    out = tmp_path_factory.mktemp("embedded")
    write_report(report, out)
    return out


def image_sources(page):
    return re.findall(r'<img src="([^"]+)"', page)


def test_html_references_only_images_that_exist(report, linked):
    out, written = linked
    page = (out / "report.html").read_text()
    sources = image_sources(page)
    assert len(sources) == len(report.charts) >= 8
    for src in sources:
        assert not src.startswith(("/", "http")), src  # relative: the folder travels
        assert (out / src).is_file(), src
        assert (out / src).read_bytes().startswith(b"\x89PNG")
    md = (out / "summary.md").read_text()
    for src in re.findall(r"!\[[^\]]*\]\(([^)]+)\)", md):
        assert (out / src).is_file(), src
    assert {p.name for p in written} == {p.name for p in out.iterdir()}


def test_embedded_page_stands_alone(report, embedded):
    page = (embedded / "report.html").read_text()
    sources = image_sources(page)
    assert len(sources) == len(report.charts)
    for src in sources:
        head, data = src.split(",", 1)
        assert head == "data:image/png;base64"
        assert base64.b64decode(data).startswith(b"\x89PNG")


def test_page_and_summary_carry_the_cautions(embedded):
    tmp_path = embedded
    page = (tmp_path / "report.html").read_text()
    md = (tmp_path / "summary.md").read_text()
    for caution in CAUTIONS:
        assert caution in md
        assert caution.replace("'", "&#x27;") in page
    assert "planning-level" in page and "not for operational control or safety design" in page


def test_table_and_geojson_match_the_comparison(report, embedded):
    tmp_path = embedded
    table = pd.read_csv(tmp_path / "scenarios.csv", index_col=0)
    np.testing.assert_allclose(table["vehicle_hours"],
                               report.comparison.table["vehicle_hours"], rtol=1e-12)
    links = read_link_geojson(tmp_path / "links.geojson")
    for key, frame in report.comparison.links.items():
        np.testing.assert_array_equal(links[f"volume_{key}"], frame["volume"])
    data = json.loads((tmp_path / "links.geojson").read_text())
    assert "coordinate_note" in data  # generated towns are on a local plane
    # the summary's key figure is the comparison's price of anarchy
    fb = report.comparison.results["first_best"]
    assert f"Price of anarchy {fb.price_of_anarchy:.4f}" in (tmp_path / "summary.md").read_text()


def test_sweep_and_learning_tables_are_written(report, linked):
    out, written = linked
    sweep = pd.read_csv(out / "sweep.csv")
    assert sweep["demand_scale"].tolist() == [0.5, 1.0]
    assert_frame_equal(sweep, report.sweep.table.reset_index(drop=True), check_dtype=False,
                       rtol=1e-12)
    days = pd.read_csv(out / "learning-days.csv")
    assert len(days) == len(report.learning.days)
    assert {out / "sweep.csv", out / "learning-days.csv"} <= set(written)


def _title(fig):
    return next(t.get_text() for t in fig.texts if t.get_gid() == "congest-title")


def test_learning_chart_states_the_noise_and_the_replications(report):
    (chart,) = [c for c in report.charts if c.name == "learning"]
    noise = report.learning.params["supply_noise"]
    assert noise > 0 and report.learning.params["replications"] == 2
    stated = f"capacity noise sd {100 * noise:g}%"
    assert stated in chart.caption and "over 2 replications" in chart.caption
    assert _title(chart.figure) == f"Day-to-day learning (Hedge, no advice, {stated})"
    # the user-equilibrium reference line is drawn at the UE's vehicle-hours
    ue = report.comparison.results["first_best"].ue
    (line,) = [ln for ln in chart.figure.axes[0].get_lines()
               if ln.get_label() == "user equilibrium"]
    assert line.get_ydata()[0] == pytest.approx(ue.vehicle_hours, rel=1e-12)


def test_learning_without_noise_runs_once_and_says_so(city):
    # nothing random: three replications would be copies of one (and the library would
    # warn, which the test settings turn into an error)
    rep = build_report(city, tol=1e-4, learning_days=5, learning_replications=3,
                       learning_noise=0.0)
    assert rep.learning.params["replications"] == 1
    assert rep.learning.params["supply_noise"] == 0.0
    assert any(n.startswith("No capacity noise") and "3 identical" in n for n in rep.notes)
    (chart,) = [c for c in rep.charts if c.name == "learning"]
    assert "without capacity noise; one run" in chart.caption
    assert _title(chart.figure).endswith("(Hedge, no advice, no noise)")


def test_cli_report_sets_the_learning_noise(folder, tmp_path):
    runner = CliRunner()
    out = tmp_path / "rep"
    res = runner.invoke(main, ["report", str(folder), "--out-dir", str(out), "--gap", "1e-4",
                               "--learning-days", "5", "--replications", "2",
                               "--supply-noise", "0.25", "--no-progress"])
    assert res.exit_code == 0, res.output
    md = (out / "summary.md").read_text()
    assert "capacity noise sd 25%" in md and "over 2 replications" in md
    res = runner.invoke(main, ["report", str(folder), "--out-dir", str(tmp_path / "rep0"),
                               "--gap", "1e-4", "--learning-days", "5", "--supply-noise", "0",
                               "--no-progress"])
    assert res.exit_code == 0, res.output
    assert "note: No capacity noise in the learning simulation" in res.stderr
    assert "without capacity noise" in (tmp_path / "rep0" / "summary.md").read_text()


def test_network_without_coordinates_gets_charts_but_no_maps(tmp_path):
    # Braess's paradox network (Braess 1968) without node coordinates
    from congest.network import Network

    braess = Network(node_ids=[1, 2, 3, 4], tail=[0, 0, 1, 2, 1], head=[1, 2, 3, 3, 2],
                     capacity=1.0, free_flow_time=[0.0, 50.0, 50.0, 0.0, 10.0],
                     alpha=[10.0, 1.0, 1.0, 10.0, 1.0], beta=1.0, cost_kind=2,
                     zone_ids=[1, 4], zone_nodes=[0, 3], demand=[[0, 6], [0, 0]])
    rep = build_report(braess, tol=1e-8)
    written = {p.name for p in write_report(rep, tmp_path, embed=False)}
    assert "links.geojson" not in written and "flow-ue.png" not in written
    assert {"scenarios.png", "report.html", "summary.md", "scenarios.csv"} <= written
    page = (tmp_path / "report.html").read_text()
    for src in image_sources(page):
        assert (tmp_path / src).is_file()
    assert "links.geojson" not in page
    assert "No maps: the network has no node coordinates." in page


def test_toll_plans_get_their_own_map(city, tmp_path):
    from congest.io.tollplan import read_toll_plan
    from congest.plotting import MAP_LAYERS

    plan_file = tmp_path / "gate.csv"
    plan_file.write_text(f"link_id,charge\n{city.link_ids[3]},2.5\n")
    plan = read_toll_plan(plan_file, city)
    rep = build_report(city, tol=1e-6, toll_plans=[plan])
    chart = next(c for c in rep.charts if c.name.startswith("plan-"))
    links = [c for ax in chart.figure.axes for c in ax.collections
             if c.get_gid() == MAP_LAYERS["links"]]
    assert len(links) == 1 and len(links[0].get_segments()) == 1  # the one charged link
    sub = next(t.get_text() for t in chart.figure.texts if t.get_gid() == "congest-subtitle")
    assert sub.startswith("1 tolled link  ·  2.50 ")


def test_svg_report(report, tmp_path):
    write_report(report, tmp_path, image_format="svg", embed=False)
    for src in image_sources((tmp_path / "report.html").read_text()):
        assert src.endswith(".svg") and (tmp_path / src).read_text().lstrip().startswith("<?xml")


# ---------------------------------------------------------------------- CLI
def digest(path):
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def test_cli_report_writes_the_folder(folder, tmp_path):
    out = tmp_path / "rep"
    res = CliRunner().invoke(main, ["report", str(folder), "--out-dir", str(out), "--gap",
                                    "1e-5", "--no-progress"])
    assert res.exit_code == 0, res.output
    assert "report.html" in res.output
    page = (out / "report.html").read_text()
    assert all(c.replace("'", "&#x27;") in page for c in CAUTIONS)
    assert "not longitude/latitude" in res.output  # the GeoJSON coordinate message


def test_cli_plot_kinds_and_formats(folder, tmp_path):
    runner = CliRunner()
    solved = tmp_path / "ue.csv"
    res = runner.invoke(main, ["solve", str(folder), "--gap", "1e-6", "--out", str(solved)])
    assert res.exit_code == 0, res.output
    before = digest(solved)
    for kind, suffix, magic in (("flow", ".png", b"\x89PNG"), ("difference", ".svg", b"<?xml"),
                                ("toll", ".pdf", b"%PDF")):
        out = tmp_path / f"{kind}{suffix}"
        args = ["plot", kind, str(folder), "--out", str(out)]
        if kind == "flow":
            args += ["--results", str(solved), "--geojson", str(tmp_path / "ue.geojson")]
        res = runner.invoke(main, args)
        assert res.exit_code == 0, res.output
        assert out.read_bytes().startswith(magic)
    assert digest(solved) == before  # plotting never changes a result file
    back = read_link_geojson(tmp_path / "ue.geojson")
    np.testing.assert_allclose(back["volume"], pd.read_csv(solved)["volume"], rtol=1e-12)


def test_cli_plot_select_link_and_tables(folder, tmp_path, city):
    runner = CliRunner()
    out = tmp_path / "sel.png"
    link = str(int(city.link_ids[0]))
    res = runner.invoke(main, ["plot", "select-link", str(folder), "--link", link, "--out",
                               str(out)])
    assert res.exit_code == 0, res.output
    assert out.is_file()
    table = tmp_path / "sweep.csv"
    pd.DataFrame({"demand_scale": [0.5, 1.0], "price_of_anarchy": [1.01, 1.05],
                  "first_best_revenue": [10.0, 50.0]}).to_csv(table, index=False)
    res = runner.invoke(main, ["plot", "sweep", str(table), "--out", str(tmp_path / "s.png")])
    assert res.exit_code == 0, res.output
    res = runner.invoke(main, ["plot", "convergence", str(folder), "--methods", "fw,gp",
                               "--gap", "1e-4", "--out", str(tmp_path / "c.svg")])
    assert res.exit_code == 0, res.output
    svg = (tmp_path / "c.svg").read_text()
    assert "fw (UE)" in svg and "gp (UE)" in svg


def test_cli_plot_learning_from_the_learn_command(folder, tmp_path, city):
    runner = CliRunner()
    days = tmp_path / "days.csv"
    o, d = city.zone_ids[0], city.zone_ids[-1]
    res = runner.invoke(main, ["learn", str(folder), "--days", "15", "--replications", "2",
                               "--supply-noise", "0.1", "--seed", "1", "--track", f"{o}:{d}",
                               "--out", str(days)])
    assert res.exit_code == 0, res.output
    shares = tmp_path / "days-shares.csv"
    before = digest(days), digest(shares)
    out = tmp_path / "learning.png"
    res = runner.invoke(main, ["plot", "learning", str(days), "--shares", str(shares),
                               "--out", str(out)])
    assert res.exit_code == 0, res.output
    assert out.read_bytes().startswith(b"\x89PNG")
    assert (digest(days), digest(shares)) == before


def test_cli_plot_errors_are_one_line(folder, tmp_path):
    runner = CliRunner()
    bad = tmp_path / "bad.csv"
    bad.write_text("link_id,volume\n1,abc\n")
    res = runner.invoke(main, ["plot", "flow", str(folder), "--results", str(bad),
                               "--out", str(tmp_path / "x.png")])
    assert res.exit_code == 1
    assert "row 2" in res.output and "'volume'" in res.output and "abc" in res.output
    res = runner.invoke(main, ["plot", "flow", str(folder), "--out", str(tmp_path / "x.bmp")])
    assert res.exit_code == 1 and "unknown picture format" in res.output
    res = runner.invoke(main, ["plot", "select-link", str(folder), "--link", "999999",
                               "--out", str(tmp_path / "x.png")])
    assert res.exit_code == 1 and "999999" in res.output
    assert not (tmp_path / "x.png").exists()


def test_flow_maps_are_scaled_by_the_roads_not_the_connectors(report, city):
    from congest.plotting import MAP_LAYERS, flow_map

    def drawn(fig, name):
        (lc,) = [c for ax in fig.axes for c in ax.collections
                 if c.get_gid() == MAP_LAYERS[name]]
        return lc

    conn = city.connectors
    fb = report.comparison.results["first_best"]
    advice = report.comparison.links["free_flow_advice"]
    flows = [fb.ue.flow, fb.so.flow, advice["volume"].to_numpy(float)]
    road_top = max(float(f[~conn].max()) for f in flows)
    # the town's connectors carry more than any road: a scale that counted them would
    # draw every road thinner
    assert max(float(f[conn].max()) for f in flows) > road_top
    road_vc = max(float((f / city.period_capacity)[~conn].max()) for f in flows)
    vc_top = float(np.clip(np.ceil(road_vc * 4.0) / 4.0, 1.0, 2.0))
    charts = {c.name: c.figure for c in report.charts}
    expected = drawn(flow_map(city, fb.ue, volume_max=road_top, vc_max=vc_top), "links")
    got = drawn(charts["flow-ue"], "links")
    np.testing.assert_allclose(got.get_linewidths(), expected.get_linewidths())
    np.testing.assert_allclose(got.get_colors(), expected.get_colors())
    for name in ("flow-ue", "flow-so", "flow-free-flow-advice", "difference-ue-so",
                 "tolls"):
        assert len(drawn(charts[name], "connectors").get_segments()) == int(conn.sum())
    sub = next(t.get_text() for t in charts["flow-free-flow-advice"].texts
               if t.get_gid() == "congest-subtitle")
    over = int(np.sum(advice["volume_capacity"].to_numpy(float)[~conn] > 1.0))
    assert sub.endswith(f"{over} of {int(np.sum(~conn))} road links over capacity")
