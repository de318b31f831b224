"""``congest plot`` through click's CliRunner: the tables it reads, the gap it solves to,
the titles of maps made from result files, and one-line errors for the wrong input.

The tables are the ones congest's own commands write for a small test town, so every
"wrong kind of table" case is a file a user can actually hold. Figures are caught on
their way to ``save_figure`` and checked for what they say.
"""

from __future__ import annotations

import json
import math

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

import congest
import congest.plotting
import congest.pricing
from congest.cli import main
from congest.cli._common import default_gap
from congest.cli.plot import CONVERGENCE_GAP, KINDS
from congest.generate import grid_network
from congest.io import write_gmns

runner = CliRunner()


def invoke(*args):
    return runner.invoke(main, [str(a) for a in args])


def ok(res):
    assert res.exit_code == 0, res.output
    return res


def one_line_error(res):
    """The message of a clean failure: exit 1, no traceback, one ``error:`` line."""
    assert res.exit_code == 1, res.output
    assert isinstance(res.exception, SystemExit), repr(res.exception)  # not a traceback
    lines = [ln for ln in res.output.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: "), res.output
    return lines[0]


@pytest.fixture(scope="module")
def city():
    return grid_network(5, 6, n_zones=6, seed=3, name="Test town").replace(currency="crowns")


@pytest.fixture(scope="module")
def made(city, tmp_path_factory):
    """The town as a GMNS folder and the tables congest's commands write for it."""
    root = tmp_path_factory.mktemp("plotcli")
    folder = root / "town"
    write_gmns(city, folder)
    o, d = city.zone_ids[0], city.zone_ids[-1]
    ok(invoke("compare", folder, "--out-dir", root / "town-compare"))
    ok(invoke("sweep", folder, "--levels", "0.5,1", "--scheduler", "serial", "--out",
              root / "sweep.csv"))
    ok(invoke("learn", folder, "--days", "6", "--replications", "1", "--track", f"{o}:{d}",
              "--out", root / "days.csv"))
    ok(invoke("solve", folder, "--out", root / "ue-links.csv"))
    ok(invoke("solve", folder, "--objective", "so", "--out", root / "so-links.csv"))
    tables = {
        "scenarios.csv": root / "town-compare" / "scenarios.csv",
        "scenarios.json": root / "town-compare" / "scenarios.json",
        "sweep": root / "sweep.csv",
        "days": root / "days.csv",
        "shares": root / "days-shares.csv",
        "links": root / "so-links.csv",
    }
    assert all(p.is_file() for p in tables.values())
    return {"folder": folder, "root": root, **tables}


@pytest.fixture
def drawn(monkeypatch):
    """The figures ``congest plot`` saves, in order."""
    figures = []
    save = congest.plotting.save_figure

    def keep(fig, path, **kw):
        figures.append(fig)
        return save(fig, path, **kw)

    monkeypatch.setattr(congest.plotting, "save_figure", keep)
    return figures


def texts(fig, gid):
    return [t.get_text() for t in fig.texts if t.get_gid() == gid]


def title(fig):
    return texts(fig, "congest-title")[0]


def subtitle(fig):
    return texts(fig, "congest-subtitle")[0]


# ------------------------------------------------------------------ tables of compare
def bar_heights(fig):
    return [[rect.get_height() for rect in bars] for bars in fig.axes[0].containers]


def test_scenarios_reads_the_json_compare_writes_as_it_reads_the_csv(made, tmp_path, drawn,
                                                                     city):
    ok(invoke("plot", "scenarios", made["scenarios.json"], "--out", tmp_path / "j.png"))
    ok(invoke("plot", "scenarios", made["scenarios.csv"], "--out", tmp_path / "c.png"))
    from_json, from_csv = drawn
    assert (tmp_path / "j.png").read_bytes().startswith(b"\x89PNG")
    expected = pd.read_csv(made["scenarios.csv"])
    # one bar per scenario, in each measure's group, whichever file was read
    assert len(from_json.axes[0].containers) == len(expected)
    np.testing.assert_allclose(bar_heights(from_json), bar_heights(from_csv))
    assert ([b.get_label() for b in from_json.axes[0].containers]
            == list(expected["label"]))
    # the JSON also says the currency, which the revenue panel then names
    assert len(from_json.axes) == 2  # marginal-cost tolls raise revenue
    assert from_json.axes[1].get_title(loc="left") == "Toll revenue, crowns per period"


def test_scenarios_refuses_json_that_is_not_a_comparison(tmp_path):
    odd = tmp_path / "odd.json"
    odd.write_text('{"network": "Test town"}\n')
    line = one_line_error(invoke("plot", "scenarios", odd, "--out", tmp_path / "x.png"))
    assert "odd.json" in line and "'congest compare'" in line
    broken = tmp_path / "broken.json"
    broken.write_text('{"scenarios": [\n')
    line = one_line_error(invoke("plot", "scenarios", broken, "--out", tmp_path / "x.png"))
    assert "broken.json" in line and "not valid JSON" in line


# ------------------------------------------------------------ the wrong kind of table
#: What each chart needs, and the command whose table has it.
NEEDS = {
    "sweep": (("demand_scale", "price_of_anarchy"), "congest sweep"),
    "learning": (("day", "relative_gap"), "congest learn"),
    "scenarios": ((), "congest compare"),
}
#: Which chart draws each table, and what the message says to do with it.
DRAWS = {"sweep": ("sweep", "'congest plot sweep'"),
         "days": ("learning", "'congest plot learning'"),
         "scenarios.csv": ("scenarios", "'congest plot scenarios'"),
         "scenarios.json": ("scenarios", "'congest plot scenarios'"),
         "shares": (None, "with --shares"),
         "links": (None, "with --results")}


@pytest.mark.parametrize("kind", sorted(NEEDS))
@pytest.mark.parametrize("table", sorted(DRAWS))
def test_every_chart_refuses_the_wrong_kind_of_table_in_one_line(made, tmp_path, kind,
                                                                 table):
    chart, remedy = DRAWS[table]
    if chart == kind:
        ok(invoke("plot", kind, made[table], "--out", tmp_path / "x.png"))
        return
    path = made[table]
    line = one_line_error(invoke("plot", kind, path, "--out", tmp_path / "x.png"))
    assert path.name in line
    needed, writer = NEEDS[kind]
    assert f"'{writer}" in line  # the command that writes the right table
    have = (set(pd.read_csv(path, nrows=0).columns) if path.suffix == ".csv"
            else set(json.loads(path.read_text())["scenarios"][0]))
    missing = [c for c in needed if c not in have]
    assert all(repr(c) in line for c in missing)  # the columns it lacks
    if kind == "learning" and not {"total_vehicle_hours", "total_travel_time"} & have:
        assert "'total_travel_time'" in line
    assert remedy in line  # and what to do with the table it was given
    assert not (tmp_path / "x.png").exists()


def test_learning_refuses_a_route_share_table_of_the_wrong_kind(made, tmp_path):
    line = one_line_error(invoke("plot", "learning", made["days"], "--shares", made["sweep"],
                                 "--out", tmp_path / "x.png"))
    assert made["sweep"].name in line and "'route'" in line and "--track" in line
    ok(invoke("plot", "learning", made["days"], "--shares", made["shares"], "--out",
              tmp_path / "x.png"))


@pytest.mark.parametrize("kind", [k for k, what in KINDS.items() if what == "network"])
def test_maps_refuse_a_table_given_as_the_network(made, tmp_path, kind):
    line = one_line_error(invoke("plot", kind, made["sweep"], "--link", 1,
                                 "--out", tmp_path / "x.png"))
    assert "sweep.csv" in line and "not a network" in line
    assert "'congest plot sweep'" in line


@pytest.mark.parametrize("kind", [k for k, what in KINDS.items() if what == "table"])
def test_charts_refuse_a_folder(made, tmp_path, kind):
    line = one_line_error(invoke("plot", kind, made["folder"], "--out", tmp_path / "x.png"))
    assert str(made["folder"]) in line and "a folder" in line


def test_a_cell_that_is_not_a_number_is_named(made, tmp_path):
    table = pd.read_csv(made["sweep"])
    table["price_of_anarchy"] = table["price_of_anarchy"].astype(object)
    table.loc[1, "price_of_anarchy"] = "n.a."
    bad = tmp_path / "bad-sweep.csv"
    table.to_csv(bad, index=False)
    line = one_line_error(invoke("plot", "sweep", bad, "--out", tmp_path / "x.png"))
    assert "bad-sweep.csv" in line and "row 3" in line and "'price_of_anarchy'" in line
    assert "n.a." in line


def test_a_table_without_rows_is_refused(made, tmp_path):
    empty = tmp_path / "empty.csv"
    pd.read_csv(made["sweep"]).iloc[:0].to_csv(empty, index=False)
    line = one_line_error(invoke("plot", "sweep", empty, "--out", tmp_path / "x.png"))
    assert "empty.csv" in line and "without rows" in line


# ----------------------------------------------------------------- the gap of solves
@pytest.fixture
def gaps(monkeypatch):
    """The gap targets of the solves ``congest plot`` makes: (method, tol) pairs."""
    seen = []
    solve, first_best = congest.solve, congest.pricing.first_best

    def spy_solve(net, *, method="auto", tol=None, **kw):
        seen.append((method, tol))
        return solve(net, method=method, tol=tol, **kw)

    def spy_first_best(net, *, method="auto", tol=None, **kw):
        seen.append((method, tol))
        return first_best(net, method=method, tol=tol, **kw)

    monkeypatch.setattr(congest, "solve", spy_solve)
    monkeypatch.setattr(congest.pricing, "first_best", spy_first_best)
    return seen


@pytest.mark.parametrize(("kind", "method"), [
    (kind, method) for kind in ("flow", "difference", "toll", "select-link")
    for method in ("auto", "bfw") if (kind, method) != ("select-link", "bfw")])  # needs routes
def test_maps_solve_to_the_gap_of_the_other_commands(made, city, tmp_path, gaps, kind,
                                                     method):
    ok(invoke("plot", kind, made["folder"], "--method", method, "--link",
              int(city.link_ids[0]), "--out", tmp_path / "x.png"))
    assert gaps and all(tol == default_gap(m) for m, tol in gaps)
    assert {tol for _, tol in gaps} == {default_gap(method)}
    gaps.clear()
    ok(invoke("plot", kind, made["folder"], "--method", method, "--gap", "1e-4", "--link",
              int(city.link_ids[0]), "--out", tmp_path / "x.png"))
    assert gaps and all(tol == 1e-4 for _, tol in gaps)


def test_flow_map_says_what_solve_says(made, tmp_path, drawn):
    ok(invoke("plot", "flow", made["folder"], "--out", tmp_path / "x.png"))
    ue = pd.read_csv(made["root"] / "ue-links.csv")  # 'congest solve' at its default gap
    vh = float(ue["volume"] @ ue["travel_time"]) / 60.0
    assert subtitle(drawn[0]).startswith(f"{vh:,.0f} vehicle-hours")


def test_convergence_has_its_own_default_gap_and_says_so(made, tmp_path, gaps):
    ok(invoke("plot", "convergence", made["folder"], "--methods", "fw,gp", "--out",
              tmp_path / "c.png"))
    assert [m for m, _ in gaps] == ["fw", "gp"]
    assert all(tol == CONVERGENCE_GAP for _, tol in gaps)
    help_text = " ".join(ok(invoke("plot", "--help")).output.split())
    assert f"convergence: {CONVERGENCE_GAP:.0e} for every method".replace("e-0", "e-") \
        in help_text
    assert "Default: 1e-10, or 1e-5 with a link-based method" in help_text


def test_convergence_needs_a_method(made, tmp_path):
    res = invoke("plot", "convergence", made["folder"], "--methods", ",", "--out",
                 tmp_path / "c.png")
    assert res.exit_code == 2 and "--methods" in res.output


# ------------------------------------------------------------------------- options
def test_unknown_link_reads_as_an_option_not_a_column(made, city, tmp_path):
    line = one_line_error(invoke("plot", "select-link", made["folder"], "--link", 999999,
                                 "--out", tmp_path / "x.png"))
    assert line.startswith("error: --link 999999: no link")
    assert "column" not in line
    top = int(city.link_ids.max())
    assert str(top) in line  # says which ids there are
    line = one_line_error(invoke("plot", "flow", made["folder"], "--out", tmp_path / "x.bmp"))
    assert line.startswith("error: --out ") and "column" not in line


def test_options_that_do_not_go_with_the_kind_are_refused(made, tmp_path):
    res = invoke("plot", "flow", made["folder"], "--results", made["links"], "--results",
                 made["root"] / "ue-links.csv", "--out", tmp_path / "x.png")
    assert res.exit_code == 2 and "one --results table" in res.output
    assert "difference" in res.output
    res = invoke("plot", "toll", made["folder"], "--results", made["links"], "--results",
                 made["links"], "--out", tmp_path / "x.png")
    assert res.exit_code == 2 and "one --results table" in res.output
    res = invoke("plot", "sweep", made["sweep"], "--results", made["links"], "--out",
                 tmp_path / "x.png")
    assert res.exit_code == 2 and "--results" in res.output
    res = invoke("plot", "sweep", made["sweep"], "--shares", made["shares"], "--out",
                 tmp_path / "x.png")
    assert res.exit_code == 2 and "--shares" in res.output
    assert not (tmp_path / "x.png").exists()


# --------------------------------------------------------- maps of result tables
def test_flow_map_of_a_results_table_keeps_its_title_and_key_figures(made, city, tmp_path,
                                                                     drawn):
    so = congest.solve(city, objective="so", tol=default_gap("auto"))
    ok(invoke("plot", "flow", made["folder"], "--results", made["links"], "--out",
              tmp_path / "a.png"))
    fig = drawn[-1]
    assert title(fig) == f"{city.name}: so-links.csv"
    sub = subtitle(fig)
    assert f"{so.vehicle_hours:,.0f} vehicle-hours" in sub
    assert f"mean trip {so.mean_trip_time:.1f} min" in sub
    assert "relative gap" not in sub  # the table does not hold one
    ok(invoke("plot", "flow", made["folder"], "--results", made["links"], "--title",
              "system optimum, morning", "--out", tmp_path / "b.png"))
    assert title(drawn[-1]) == f"{city.name}: system optimum, morning"


def test_results_from_compare_take_the_scenario_label(made, city, tmp_path, drawn):
    links = made["root"] / "town-compare" / "links"
    labels = pd.read_csv(made["scenarios.csv"]).set_index("scenario")["label"]
    ok(invoke("plot", "flow", made["folder"], "--results", links / "system_optimum.csv",
              "--out", tmp_path / "a.png"))
    assert title(drawn[-1]) == f"{city.name}: {labels['system_optimum']}"
    ok(invoke("plot", "toll", made["folder"], "--results", links / "marginal_cost_tolls.csv",
              "--out", tmp_path / "b.png"))
    assert title(drawn[-1]) == f"{city.name}: {labels['marginal_cost_tolls']}"


def test_difference_of_two_results_tables(made, city, tmp_path, drawn):
    ue_links, so_links = made["root"] / "ue-links.csv", made["links"]
    ok(invoke("plot", "difference", made["folder"], "--results", ue_links, "--results",
              so_links, "--out", tmp_path / "d.png"))
    fig = drawn[-1]
    assert title(fig) == f"{city.name}: so-links.csv against ue-links.csv"
    a, b = pd.read_csv(ue_links), pd.read_csv(so_links)
    change = (float(b["volume"] @ b["travel_time"]) - float(a["volume"] @ a["travel_time"]))
    change /= 60.0
    shown = f"{change:+,.0f}".replace("-", "\u2212")
    assert subtitle(fig).startswith(f"vehicle-hours {shown} (")
    assert not math.isclose(change, 0.0)
    ok(invoke("plot", "difference", made["folder"], "--results", ue_links, "--results",
              so_links, "--title", "tolls on", "--out", tmp_path / "e.png"))
    assert title(drawn[-1]) == f"{city.name}: tolls on"
