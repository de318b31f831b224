"""Maps and charts, checked for what they draw (Agg backend, no window).

The checks compare the drawn artists with the data they were given: one segment per
link at its nodes' coordinates, widths ordered like volumes, colours equal to the colour
map applied to volume/capacity, colour-bar ranges, titles with the key figures.
"""

from __future__ import annotations

import subprocess
import sys
import warnings

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pandas as pd
import pytest
from matplotlib.colors import LogNorm, Normalize
from random_networks import grid_links

import congest
from congest.exceptions import NetworkError
from congest.network import Network
from congest.plotting import (
    MAP_LAYERS,
    TOLL_LOG_SPAN,
    change_colormap,
    convergence_chart,
    difference_map,
    flow_map,
    learning_chart,
    load_colormap,
    save_figure,
    scenario_chart,
    select_link_map,
    sweep_chart,
    toll_colormap,
    toll_map,
    toll_scale,
)
from congest.pricing import tolled_mask


def grid(n_rows=4, n_cols=5, *, spacing=1.0, crs="", one_way=True, seed=0, **extra):
    """A two-way street grid with zones at the corners (and one one-way street)."""
    rng = np.random.default_rng(seed)
    xs, ys = np.meshgrid(np.arange(n_cols) * spacing, np.arange(n_rows) * spacing)
    x, y = xs.ravel(), ys.ravel()
    ids = np.arange(n_rows * n_cols).reshape(n_rows, n_cols)
    tail, head = grid_links(n_rows, n_cols)
    if one_way:  # drop one direction of the first street
        tail, head = tail[1:], head[1:]
    m = len(tail)
    zones = [ids[0, 0], ids[0, -1], ids[-1, 0], ids[-1, -1]]
    demand = rng.uniform(50, 150, (4, 4))
    return Network(node_ids=np.arange(1, x.size + 1), tail=tail, head=head,
                   capacity=rng.uniform(200, 400, m), free_flow_time=rng.uniform(1, 2, m),
                   zone_ids=[1, 2, 3, 4], zone_nodes=zones, demand=demand, x=x, y=y,
                   crs=crs, length=np.full(m, spacing), length_unit="km", **extra)


def layer(fig, name):
    found = [c for ax in fig.axes for c in ax.collections if c.get_gid() == MAP_LAYERS[name]]
    assert len(found) == 1, f"expected one {name!r} layer, found {len(found)}"
    return found[0]


def text(fig, gid):
    return next(t.get_text() for t in fig.texts if t.get_gid() == gid)


@pytest.fixture(scope="module")
def net():
    return grid()


@pytest.fixture(scope="module")
def ue(net):
    return congest.solve(net, tol=1e-6, max_iter=2000)


# ----------------------------------------------------------------- flow map
def test_flow_map_one_segment_per_link_at_its_nodes(net):
    flow = np.linspace(10, 500, net.n_links)
    fig = flow_map(net, flow)
    seg = np.asarray(layer(fig, "links").get_segments())
    assert seg.shape == (net.n_links, 2, 2)
    # each segment runs parallel to its link, moved sideways by less than 30% of it
    start = np.column_stack([net.x[net.tail], net.y[net.tail]])
    end = np.column_stack([net.x[net.head], net.y[net.head]])
    np.testing.assert_allclose(seg[:, 1] - seg[:, 0], end - start, atol=1e-12)
    shift = np.linalg.norm(seg[:, 0] - start, axis=1)
    assert np.all(shift <= 0.3 * np.linalg.norm(end - start, axis=1) + 1e-12)
    # the one-way street sits on its centre line; two-way ones do not
    n = net.n_nodes
    two_way = np.isin(net.head * n + net.tail, net.tail * n + net.head)
    assert not two_way.all()
    np.testing.assert_allclose(shift[~two_way], 0.0, atol=1e-12)
    assert np.all(shift[two_way] > 0)


def test_two_directions_side_by_side_without_overlap(net):
    rng = np.random.default_rng(3)
    flow = rng.uniform(0, 600, net.n_links)
    fig = flow_map(net, flow)
    lc = layer(fig, "links")
    seg = np.asarray(lc.get_segments())
    widths = np.asarray(lc.get_linewidths())
    ax = lc.axes
    fig.canvas.draw()
    to_pt = ax.transData.transform
    pair = {(int(t), int(h)): i for i, (t, h) in enumerate(zip(net.tail, net.head,
                                                                strict=True))}
    checked = 0
    for i, (t, h) in enumerate(zip(net.tail, net.head, strict=True)):
        j = pair.get((int(h), int(t)))
        if j is None or j < i:
            continue
        # distance in display pixels between the two parallel centre lines
        a, b = to_pt(seg[i][0]), to_pt(seg[j][1])
        gap_px = np.linalg.norm(a - b)
        need_px = (widths[i] + widths[j]) / 2 * fig.dpi / 72.0
        assert gap_px >= need_px - 1e-6
        checked += 1
    assert checked > 10


def test_flow_map_widths_ordered_like_volumes(net):
    flow = np.random.default_rng(1).permutation(np.linspace(0, 900, net.n_links))
    widths = np.asarray(layer(flow_map(net, flow), "links").get_linewidths())
    order = np.argsort(flow)
    assert np.all(np.diff(widths[order]) > 0)
    # affine in volume: a hairline plus a part proportional to volume
    slope = (widths - widths.min()) / np.where(flow > 0, flow, 1)
    np.testing.assert_allclose(slope[flow > 0], slope[flow > 0][0], rtol=1e-9)


def test_flow_scales_fit_every_flow_of_the_set(net):
    from congest.plotting import flow_scales

    low = np.linspace(0, 900, net.n_links)
    high = 1.7 * low
    scales = flow_scales(net, low, high)
    assert scales["volume_max"] == pytest.approx(high.max())
    # one flow alone gives the map's own defaults: the same picture with or without
    own = layer(flow_map(net, high), "links")
    shared = layer(flow_map(net, high, **flow_scales(net, high)), "links")
    np.testing.assert_allclose(shared.get_linewidths(), own.get_linewidths())
    np.testing.assert_allclose(shared.get_colors(), own.get_colors())
    assert flow_scales(net, np.zeros(net.n_links)) == {"vc_max": 1.0}


def test_flow_maps_with_a_shared_volume_scale_draw_equal_volumes_equally(net):
    big = np.linspace(0, 900, net.n_links)
    small = big / 3.0
    shared = dict(volume_max=900.0, vc_max=1.0)
    w_big = np.asarray(layer(flow_map(net, big, **shared), "links").get_linewidths())
    w_small = np.asarray(layer(flow_map(net, small, **shared), "links").get_linewidths())
    # a link with 300 vehicles is as wide on both maps
    i = int(np.argmin(np.abs(big - 300.0)))
    j = int(np.argmin(np.abs(small - big[i])))
    np.testing.assert_allclose(w_big[i], w_small[j], rtol=1e-2)
    # each map scaled to its own maximum would draw the smaller volumes as wide
    w_own = np.asarray(layer(flow_map(net, small), "links").get_linewidths())
    assert w_own.max() == pytest.approx(w_big.max())
    assert w_small.max() < 0.5 * w_big.max()
    with pytest.raises(ValueError, match="volume_max"):
        flow_map(net, big, volume_max=0.0)


def test_flow_map_colours_are_the_colour_map_of_volume_capacity(net):
    flow = np.linspace(0, 1.3, net.n_links) * net.period_capacity
    fig = flow_map(net, flow)
    colors = layer(fig, "links").get_colors()
    expected = load_colormap()(Normalize(0.0, 1.5)(flow / net.period_capacity))
    np.testing.assert_allclose(colors, expected, atol=1e-12)
    # colour bar: 0 to the top of the scale (1.3 rounded up to a quarter)
    cbar_ax = [ax for ax in fig.axes if ax.get_ylabel() == "Volume / capacity"]
    assert len(cbar_ax) == 1
    np.testing.assert_allclose(cbar_ax[0].get_ylim(), (0.0, 1.5))


def test_flow_map_colour_bar_arrow_when_links_exceed_the_scale(net):
    flow = np.full(net.n_links, 3.0) * net.period_capacity
    fig = flow_map(net, flow)
    cbar_ax = next(ax for ax in fig.axes if ax.get_ylabel() == "Volume / capacity")
    np.testing.assert_allclose(cbar_ax.get_ylim(), (0.0, 2.0))
    colors = layer(fig, "links").get_colors()
    np.testing.assert_allclose(colors, load_colormap()(np.ones(net.n_links)), atol=1e-12)


def test_flow_map_title_has_the_scenario_and_its_key_figures(net, ue):
    fig = flow_map(net, ue)
    assert text(fig, "congest-title") == f"{net.name}: user equilibrium"
    sub = text(fig, "congest-subtitle")
    assert f"{ue.vehicle_hours:,.0f} vehicle-hours" in sub
    assert f"mean trip {ue.mean_trip_time:.1f} min" in sub
    assert f"of {net.n_links} links over capacity" in sub
    fig = flow_map(net, ue.flow, scenario="morning peak")
    assert text(fig, "congest-title").endswith("morning peak")


def test_flow_map_marks_zone_centroids(net):
    fig = flow_map(net, np.ones(net.n_links))
    offsets = np.asarray(layer(fig, "zones").get_offsets())
    expected = np.column_stack([net.x[net.zone_nodes], net.y[net.zone_nodes]])
    np.testing.assert_allclose(offsets, expected)


def test_coordinate_note_and_scale_in_km():
    planar = grid(crs="")
    note = text(flow_map(planar, np.ones(planar.n_links)), "congest-footnote")
    assert "not known to be longitude/latitude" in note
    utm = grid(crs="EPSG:32616")
    note = text(flow_map(utm, np.ones(utm.n_links)), "congest-footnote")
    assert "EPSG:32616, not longitude/latitude" in note
    # about 0.01 degree blocks near 41.9 N: bar labelled in metres or km, not degrees
    lonlat = grid(crs="EPSG:4326", spacing=0.01)
    lonlat = lonlat.replace(x=lonlat.x - 87.6, y=lonlat.y + 41.9)
    fig = flow_map(lonlat, np.ones(lonlat.n_links))
    assert "longitude/latitude (EPSG:4326)" in text(fig, "congest-footnote")
    labels = [t.get_text() for t in fig.axes[0].texts]
    assert any(lbl.endswith(" km") or lbl.endswith(" m") for lbl in labels)
    # planar coordinates whose link lengths (km) match the node distances: a 500 m bar
    # (a fifth of the 4.24 km wide frame, rounded down to 1, 2, 2.5 or 5)
    labels = [t.get_text() for t in flow_map(planar, np.ones(planar.n_links)).axes[0].texts]
    assert "500 m" in labels
    # lengths that do not match the coordinates: no unit is claimed
    odd = planar.replace(length=planar.length * 3)
    labels = [t.get_text() for t in flow_map(odd, np.ones(odd.n_links)).axes[0].texts]
    assert any(lbl.endswith("coordinate units") for lbl in labels)


def test_lonlat_map_corrects_the_aspect_for_latitude():
    lonlat = grid(crs="EPSG:4326", spacing=0.01)
    lonlat = lonlat.replace(x=lonlat.x + 10.0, y=lonlat.y + 60.0)
    ax = flow_map(lonlat, np.ones(lonlat.n_links)).axes[0]
    # one degree of latitude is 1/cos(60 deg) = 2 degrees of longitude on the ground
    np.testing.assert_allclose(ax.get_aspect(), 1 / np.cos(np.radians(60.015)), rtol=1e-3)


def test_map_without_coordinates_is_refused(net):
    blank = net.replace(x=np.full(net.n_nodes, np.nan))
    with pytest.raises(NetworkError, match="no coordinates"):
        flow_map(blank, np.ones(net.n_links))


def test_flow_shape_is_checked(net):
    with pytest.raises(ValueError, match="shape"):
        flow_map(net, np.ones(net.n_links + 1))


def test_big_network_gets_thin_lines():
    # a Chicago-Sketch-sized synthetic city (about 2,950 links)
    from congest.generate import generate_network

    big = generate_network("grid", n_links=2950, n_zones=300, seed=5)
    assert 2800 < big.n_links < 3100
    small = grid(3, 4)
    rng = np.random.default_rng(0)
    fig_big = flow_map(big, rng.uniform(0, 2000, big.n_links))
    fig_small = flow_map(small, rng.uniform(0, 2000, small.n_links))
    w_big = layer(fig_big, "links").get_linewidths()
    w_small = layer(fig_small, "links").get_linewidths()
    # roads in the links layer, the generator's zone connectors in their own
    n_roads = int(np.sum(~big.connectors))
    assert 0 < n_roads < big.n_links
    assert len(layer(fig_big, "links").get_segments()) == n_roads
    assert len(layer(fig_big, "connectors").get_segments()) == big.n_links - n_roads
    assert max(w_big) < max(w_small)
    assert max(w_big) <= 4.0


# --------------------------------------------------------------- other maps
def test_difference_map_is_centred_on_zero(net):
    rng = np.random.default_rng(2)
    a = rng.uniform(0, 400, net.n_links)
    change = rng.uniform(-130, 90, net.n_links)
    change[:3] = 0.0
    fig = difference_map(net, a, a + change, labels=("UE", "SO"))
    lc = layer(fig, "links")
    # largest change 130 (or less) rounds up to a symmetric scale
    top = np.abs(change).max()
    cbar_ax = next(ax for ax in fig.axes if "SO minus UE" in ax.get_ylabel())
    assert max(len(line) for line in cbar_ax.get_ylabel().splitlines()) <= 34
    lo, hi = cbar_ax.get_ylim()
    assert lo == -hi and hi >= top
    expected = change_colormap()(Normalize(lo, hi)(change))
    np.testing.assert_allclose(lc.get_colors(), expected, atol=1e-12)
    np.testing.assert_allclose(lc.get_colors()[:3], [change_colormap()(0.5)] * 3, atol=1e-12)
    widths = np.asarray(lc.get_linewidths())
    order = np.argsort(np.abs(change))
    assert np.all(np.diff(widths[order]) >= -1e-12)
    assert text(fig, "congest-title").endswith("SO against UE")


def test_difference_map_reports_vehicle_hours(net, ue):
    so = congest.solve(net, objective="so", tol=1e-6, max_iter=2000)
    sub = text(difference_map(net, ue, so, labels=("UE", "SO")), "congest-subtitle")
    dvh = so.vehicle_hours - ue.vehicle_hours
    assert f"{abs(dvh):,.0f}" in sub and "\u2212" in sub  # SO never costs more (Wardrop)


def test_toll_map_draws_tolled_links_and_amounts(net):
    toll = np.zeros(net.n_links)
    toll[[2, 5, 9]] = [1.5, 3.0, 0.75]
    fig = toll_map(net, toll, currency="crowns")
    lc = layer(fig, "links")
    assert len(lc.get_segments()) == 3
    expected = toll_colormap()(Normalize(0.0, 3.0)(toll[[2, 5, 9]]))
    np.testing.assert_allclose(lc.get_colors(), expected, atol=1e-12)
    assert len(layer(fig, "context").get_segments()) == net.n_links - 3
    labels = {t.get_text() for t in fig.axes[0].texts}
    assert {"1.5", "3", "0.75"} <= labels
    assert any(ax.get_ylabel() == "Toll, crowns per vehicle" for ax in fig.axes)
    flow = np.full(net.n_links, 100.0)
    sub = text(toll_map(net, toll, flow=flow, currency="crowns"), "congest-subtitle")
    assert "revenue 525 crowns" in sub  # (1.5 + 3 + 0.75) * 100
    # a toll of rounding-noise size is drawn as untolled and said so
    noisy = toll.copy()
    noisy[0] = 1e-9
    fig = toll_map(net, noisy, currency="crowns")
    assert len(layer(fig, "links").get_segments()) == 3
    assert "1 link(s) with tolls below" in text(fig, "congest-footnote")


def colour_bar(fig, label_start="Toll"):
    return next(ax for ax in fig.axes if ax.get_ylabel().startswith(label_start))


def test_toll_map_keeps_a_dear_link_apart_on_a_log_scale(net):
    toll = np.zeros(net.n_links)
    toll[:20] = np.linspace(0.1, 0.5, 20)
    toll[20] = 4.0  # one bridge toll eight times the dearest of the rest, 40 the cheapest
    fig = toll_map(net, toll, currency="crowns")
    # every toll in its own colour on a log scale from the smallest toll to the largest
    expected = toll_colormap()(LogNorm(0.1, 4.0)(toll[:21]))
    np.testing.assert_allclose(layer(fig, "links").get_colors(), expected, atol=1e-12)
    colors = layer(fig, "links").get_colors()
    # the bridge is as far in colour from the next toll as 0.5 is from 0.1 (both x8 / x5):
    # no capping colour shared by the dear link and the usual ones
    bridge_gap = np.abs(colors[20, :3] - colors[19, :3]).sum()
    assert bridge_gap > 0.5 * np.abs(colors[19, :3] - colors[0, :3]).sum()
    cbar = colour_bar(fig)
    assert cbar.get_yscale() == "log"
    np.testing.assert_allclose(cbar.get_ylim(), (0.1, 4.0))
    labels = [t.get_text() for t in cbar.get_yticklabels()]
    assert labels[0] == "0.1" and labels[-1] == "4"  # the true largest toll is a tick
    assert "1" in labels
    assert "logarithmic" in cbar.get_ylabel()
    note = " ".join(text(fig, "congest-footnote").split())
    assert "colour scale is logarithmic" in note and "top colour" not in note


def test_toll_map_linear_when_the_tolls_are_close(net):
    toll = np.zeros(net.n_links)
    toll[:20] = np.linspace(0.5, 4.0, 20)  # a factor 8: a linear scale from zero
    fig = toll_map(net, toll, currency="crowns")
    expected = toll_colormap()(Normalize(0.0, 4.0)(toll[:20]))
    np.testing.assert_allclose(layer(fig, "links").get_colors(), expected, atol=1e-12)
    cbar = colour_bar(fig)
    assert cbar.get_yscale() == "linear"
    assert cbar.get_ylabel() == "Toll, crowns per vehicle"
    assert "logarithmic" not in text(fig, "congest-footnote")


def test_toll_map_log_scale_floor_and_what_falls_below_it(net):
    # marginal-cost-like tolls spanning four decades, as a bridge over a ring of
    # light tolls gives: the scale starts at 0.005 (half a hundredth, above 1/1000 of
    # the largest toll) and the tolls under it are drawn as untolled and counted
    rng = np.random.default_rng(4)
    toll = np.zeros(net.n_links)
    toll[:30] = 10.0 ** rng.uniform(-3.6, -0.7, 30)
    toll[30] = 2.23
    toll[31] = 1e-9  # rounding noise, not a toll
    tolled = tolled_mask(toll)
    norm, floor, ticks = toll_scale(toll)
    assert isinstance(norm, LogNorm)
    assert floor == pytest.approx(0.005) and norm.vmax == pytest.approx(2.23)
    drawn = tolled & (toll >= floor)
    assert 0 < drawn.sum() < tolled.sum()
    fig = toll_map(net, toll, currency="crowns")
    np.testing.assert_allclose(layer(fig, "links").get_colors(),
                               toll_colormap()(LogNorm(floor, 2.23)(toll[drawn])), atol=1e-12)
    n_context = int(np.sum(~drawn & ~net.connectors))
    assert len(layer(fig, "context").get_segments()) == n_context
    small, k = int(np.sum(tolled & ~drawn)), int(tolled.sum())
    note = " ".join(text(fig, "congest-footnote").split())  # the footnote wraps
    assert (f"{small} of the {k} tolled links charge under 0.005 crowns and are drawn "
            "as untolled") in note
    assert "1 link(s) with tolls below 0.000223 crowns do not count as tolled" in note
    key = [t.get_text() for ax in fig.axes for t in ax.texts]
    assert "untolled, or under\n0.005 crowns" in key
    labels = [t.get_text() for t in colour_bar(fig).get_yticklabels()]
    assert labels == ["0.005", "0.01", "0.1", "1", "2.23"]
    # the subtitle still counts every tolled link (one definition of a tolled link)
    assert text(fig, "congest-subtitle").startswith(f"{int(tolled.sum())} tolled links")


@pytest.mark.parametrize("seed", range(20))
def test_toll_scale_is_log_exactly_when_the_tolls_span_a_wide_range(seed):
    rng = np.random.default_rng(seed)
    toll = np.where(rng.random(40) < 0.6, 10.0 ** rng.uniform(-3, 1, 40), 0.0)
    toll[0] = 10.0 ** rng.uniform(-1, 2)
    norm, floor, ticks = toll_scale(toll)
    shown = toll[tolled_mask(toll)]
    top = shown.max()
    # the floor: the smallest toll, at least 1/1000 of the largest and 0.005, rounded
    # down to 1, 2 or 5 times a power of ten
    lowest = max(shown.min(), top / 1000, 0.005)
    power = 10.0 ** np.floor(np.log10(lowest))
    expected_floor = max(m for m in (1, 2, 5) if m * power <= lowest * (1 + 1e-9)) * power
    if top > TOLL_LOG_SPAN * expected_floor:
        assert isinstance(norm, LogNorm)
        assert floor == pytest.approx(expected_floor)
        assert norm.vmin == floor and norm.vmax == top
        assert ticks[0] == floor and ticks[-1] == top
        assert np.all(np.diff(np.log10(ticks)) >= np.log10(1.5) - 1e-12)
    else:
        assert not isinstance(norm, LogNorm)
        assert floor == 0 and norm.vmin == 0 and top <= norm.vmax < 1.3 * top


def test_select_link_map_highlights_the_selection(net):
    sel_flow = np.zeros(net.n_links)
    sel_flow[[0, 4, 7, 12]] = [80.0, 80.0, 35.0, 45.0]
    fig = select_link_map(net, sel_flow, 4)
    assert len(layer(fig, "links").get_segments()) == 4
    assert len(layer(fig, "selected").get_segments()) == 1
    assert len(layer(fig, "context").get_segments()) == net.n_links - 4
    assert f"link {net.link_ids[4]}" in text(fig, "congest-title")
    with pytest.raises(ValueError, match="indices"):
        select_link_map(net, sel_flow, net.n_links)


# ------------------------------------------------------------------- charts
def test_convergence_chart_one_line_per_method(net):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", congest.ConvergenceWarning)
        runs = [congest.solve(net, method=m, tol=1e-6, max_iter=40) for m in ("fw", "bfw")]
    fig = convergence_chart(runs, tol=1e-6)
    ax_it, ax_t = fig.axes
    for ax, key in ((ax_it, "iteration"), (ax_t, "wall_time")):
        assert ax.get_yscale() == "log"
        lines = [ln for ln in ax.get_lines() if ln.get_label() in ("fw (UE)", "bfw (UE)")]
        assert [ln.get_label() for ln in lines] == ["fw (UE)", "bfw (UE)"]
        for ln, run in zip(lines, runs, strict=True):
            np.testing.assert_allclose(ln.get_xdata(), run.history[key])
            np.testing.assert_allclose(ln.get_ydata(), run.history["relative_gap"])
    assert text(fig, "congest-title") == "Convergence"


def test_sweep_chart_draws_the_sweep_table():
    from congest.sweep import sweep

    # Pigou's example (Pigou 1920): with demand q <= 1/2 UE = SO (price of anarchy 1);
    # at q = 1 the price of anarchy is 4/3 (Roughgarden & Tardos 2002).
    pigou = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                    free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
                    cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
                    demand=[[0, 1], [0, 0]])
    res = sweep(pigou, [0.25, 0.5, 1.0], scheduler="serial", tol=1e-8)
    fig = sweep_chart(res.table, currency="crowns")
    ax_p, ax_r = fig.axes
    line = ax_p.get_lines()[0]
    np.testing.assert_allclose(line.get_xdata(), [0.25, 0.5, 1.0])
    np.testing.assert_allclose(line.get_ydata(), res.table["price_of_anarchy"])
    np.testing.assert_allclose(line.get_ydata()[-1], 4 / 3, rtol=1e-4)
    np.testing.assert_allclose(ax_r.get_lines()[0].get_ydata(),
                               res.table["first_best_revenue"])
    assert "crowns" in ax_r.get_ylabel()
    assert "peak price of anarchy 1.333" in text(fig, "congest-subtitle")


def test_learning_chart_median_and_band():
    rng = np.random.default_rng(0)
    days = pd.DataFrame([{"day": d, "replication": r,
                          "total_travel_time": 1000 + 500 / d + rng.normal(0, 5),
                          "relative_gap": 0.5 / d * rng.uniform(0.5, 1.5)}
                         for r in range(5) for d in range(1, 31)])
    shares = pd.DataFrame([{"day": d, "route": name, "share": s}
                           for d in range(1, 31) for name, s in (("A", 0.6), ("B", 0.4))])
    fig = learning_chart(days, ue_total=1000.0, route_shares=shares)
    ax_tt, ax_gap, ax_sh = fig.axes
    median = days.groupby("day")["total_travel_time"].median() / 60.0
    np.testing.assert_allclose(ax_tt.get_lines()[0].get_ydata(), median.to_numpy())
    assert len(ax_tt.collections) == 1  # the 10-90% band
    assert ax_gap.get_yscale() == "log"
    assert [ln.get_label() for ln in ax_sh.get_lines()] == ["A", "B"]
    assert "5 replication(s)" in text(fig, "congest-subtitle")


def test_learning_chart_reads_a_simulation():
    from congest.learning import simulate

    # Pigou's two roads (Pigou 1920) under Hedge with a decreasing rate
    pigou = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                    free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
                    cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
                    demand=[[0, 1], [0, 0]])
    res = simulate(pigou, days=40, replications=3, seed=0, track=[(1, 2)],
                   estimate_noise=0.1)
    fig = learning_chart(res)
    ax_tt, _, ax_sh = fig.axes
    median = res.days.groupby("day")["total_travel_time"].median() / 60.0
    np.testing.assert_allclose(ax_tt.get_lines()[0].get_ydata(), median.to_numpy())
    assert sorted(ln.get_label() for ln in ax_sh.get_lines()) == ["route 1", "route 2"]
    for ln in ax_sh.get_lines():
        assert np.all((ln.get_ydata() >= 0) & (ln.get_ydata() <= 1))


def test_scenario_chart_bars_indexed_to_the_baseline():
    table = pd.DataFrame({"scenario": ["UE", "SO", "tolled UE"],
                          "vehicle_hours": [1200.0, 1000.0, 1010.0],
                          "mean_trip_time_min": [12.0, 10.0, 10.4],
                          "max_volume_capacity": [1.4, 1.1, 1.12]})
    fig = scenario_chart(table)
    ax = fig.axes[0]
    bars = {c.get_label(): c for c in ax.containers}
    assert list(bars) == ["UE", "SO", "tolled UE"]
    heights = [r.get_height() for r in bars["SO"]]
    np.testing.assert_allclose(heights, [100 * 1000 / 1200, 100 * 10 / 12, 100 * 1.1 / 1.4])
    np.testing.assert_allclose([r.get_height() for r in bars["UE"]], 100.0)
    with pytest.raises(ValueError, match="baseline"):
        scenario_chart(table, baseline="nope")
    # an extreme scenario is cut at the cap, its value still written on the bar
    wild = pd.concat([table, pd.DataFrame({"scenario": ["advice"], "vehicle_hours": [6000.0],
                                           "mean_trip_time_min": [60.0],
                                           "max_volume_capacity": [5.0]})])
    ax = scenario_chart(wild, cap=250.0).axes[0]
    advice = next(c for c in ax.containers if c.get_label() == "advice")
    np.testing.assert_allclose([r.get_height() for r in advice], 250.0)
    assert "6,000 (500%)" in {t.get_text() for t in ax.texts}


def test_scenario_chart_reads_the_compare_table():
    from congest.scenarios import compare

    # Pigou (Pigou 1920): SO and marginal-cost tolls cost 3/4 of UE (Roughgarden &
    # Tardos 2002: price of anarchy 4/3)
    pigou = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                    free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
                    cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
                    demand=[[0, 1], [0, 0]])
    table = compare(pigou, tol=1e-10).table
    ax = scenario_chart(table, metrics=["system_cost_hours"]).axes[0]
    bars = {c.get_label(): c[0].get_height() for c in ax.containers}
    assert set(bars) == set(table["label"])
    np.testing.assert_allclose(bars["user equilibrium"], 100.0)
    np.testing.assert_allclose(bars["system optimum"], 75.0, rtol=1e-6)


def pigou_table(**changes):
    from congest.scenarios import compare

    # Pigou (Pigou 1920): one constant road and one congestible road
    pigou = Network(node_ids=[1, 2], tail=[0, 0], head=[1, 1], capacity=1.0,
                    free_flow_time=[1.0, 0.0], alpha=[0.0, 1.0], beta=[0.0, 1.0],
                    cost_kind=2, zone_ids=[1, 2], zone_nodes=[0, 1],
                    demand=[[0, 1], [0, 0]], currency="crowns", **changes)
    return compare(pigou, tol=1e-10).table


def group_heights(ax):
    """Bar heights of each measure group, one row per measure."""
    return np.array([[rect.get_height() for rect in c] for c in ax.containers]).T


def test_scenario_chart_draws_no_measure_twice():
    # without fixed charges system cost is vehicle-hours, and with the same trips in
    # every scenario mean trip time is vehicle-hours over a constant: all three would
    # draw the same bars
    table = pigou_table()
    np.testing.assert_allclose(table["system_cost_hours"], table["vehicle_hours"])
    fig = scenario_chart(table)
    ax = fig.axes[0]
    labels = [t.get_text() for t in ax.get_xticklabels()]
    assert labels[0] == "Vehicle-hours"
    assert not any("veh-h" in lbl or "Mean trip" in lbl for lbl in labels)
    assert len(set(labels)) == len(labels)
    heights = group_heights(ax)
    assert len(heights) == len(labels) >= 2
    for i in range(len(heights)):
        for j in range(i):
            assert not np.allclose(heights[i], heights[j]), (labels[i], labels[j])
    note = text(fig, "congest-footnote")
    assert "mean trip time and system cost" in note and "vehicle-hours" in note
    # a fixed charge per link makes system cost a measure of its own
    charged = pigou_table(fixed_cost=[0.0, 0.5])
    labels = [t.get_text() for t in scenario_chart(charged).axes[0].get_xticklabels()]
    assert any("System cost" in lbl for lbl in labels)
    # measures asked for are drawn as asked
    ax = scenario_chart(table, metrics=["vehicle_hours", "system_cost_hours"]).axes[0]
    assert len(ax.get_xticks()) == 2


def test_scenario_chart_shows_revenue_beside_the_bars():
    table = pigou_table()
    revenue = table["revenue_money"].to_numpy(float)
    assert (revenue > 0).sum() == 1  # the marginal-cost tolls
    fig = scenario_chart(table)
    ax, rax = fig.axes
    assert "Toll revenue, crowns per period" == rax.get_title(loc="left")
    bars = list(rax.patches)
    np.testing.assert_allclose([b.get_width() for b in bars], revenue)
    names = [t.get_text() for t in rax.get_yticklabels()]
    assert names == table["label"].tolist()
    # the revenue panel's colours and swatches are those of the scenarios' bars
    for bar, swatch, container in zip(bars, (ln for ln in rax.get_lines()
                                             if ln.get_gid() == "congest-scenario-swatch"),
                                      ax.containers, strict=True):
        np.testing.assert_allclose(bar.get_facecolor(), container[0].get_facecolor())
        np.testing.assert_allclose(matplotlib.colors.to_rgba(swatch.get_color()),
                                   container[0].get_facecolor())
    assert ax.get_legend() is None  # the revenue panel names the scenarios
    # no revenue anywhere: one panel and a legend
    fig = scenario_chart(table.drop(columns="revenue_money"))
    assert len(fig.axes) == 1 and fig.axes[0].get_legend() is not None


# ------------------------------------------------------------------- output
@pytest.mark.parametrize("suffix, magic", [(".png", b"\x89PNG"), (".svg", b"<?xml"),
                                           (".pdf", b"%PDF")])
def test_save_figure_formats(tmp_path, net, suffix, magic):
    path = save_figure(flow_map(net, np.ones(net.n_links)), tmp_path / f"map{suffix}")
    assert path.read_bytes().startswith(magic)
    assert [p.name for p in tmp_path.iterdir()] == [f"map{suffix}"]  # no temp files left


def test_save_figure_unknown_suffix(tmp_path, net):
    with pytest.raises(ValueError, match="Unknown picture format"):
        save_figure(flow_map(net, np.ones(net.n_links)), tmp_path / "map.bmp")
    assert list(tmp_path.iterdir()) == []


def test_import_congest_does_not_import_matplotlib():
    code = ("import sys, congest, congest.plotting, congest.report, congest.io.geojson; "
            "print('matplotlib' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "False"
