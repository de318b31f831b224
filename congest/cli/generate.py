"""``congest generate KIND FOLDER``: a synthetic network written as a GMNS folder."""

from __future__ import annotations

import click

from ._common import friendly_errors

__all__ = ["command"]


@click.command("generate")
@click.argument("kind", type=click.Choice(["grid", "ring-radial", "planar"]))
@click.argument("folder", type=click.Path(file_okay=False))
@click.option("--links", "n_links", type=click.IntRange(min=16), default=None,
              help="Target number of directed links (connectors included); picks the "
                   "dimensions. Default: about 2,000.")
@click.option("--rows", type=click.IntRange(min=2), default=None,
              help="grid: intersections per column (with --cols; overrides --links).")
@click.option("--cols", type=click.IntRange(min=2), default=None,
              help="grid: intersections per row.")
@click.option("--rings", type=click.IntRange(min=1), default=None,
              help="ring-radial: number of rings (with --radials; overrides --links).")
@click.option("--radials", type=click.IntRange(min=3), default=None,
              help="ring-radial: number of radial roads.")
@click.option("--nodes", "n_nodes", type=click.IntRange(min=4), default=None,
              help="planar: number of road nodes (overrides --links).")
@click.option("--zones", "n_zones", type=click.IntRange(min=2), default=None,
              help="Number of zones. Default: one per 100 links (or per 25 road nodes).")
@click.option("--connectors", type=click.IntRange(min=1), default=2, show_default=True,
              help="Two-way connectors from each zone centroid to its nearest road nodes.")
@click.option("--vc-target", type=click.FloatRange(min=0, min_open=True), default=0.9,
              show_default=True, help="Target volume/capacity of the demand calibration.")
@click.option("--vc-statistic", type=click.Choice(["p90", "mean"]), default="p90",
              show_default=True, help="Which volume/capacity over the road links is "
                                      "calibrated: 90th percentile or mean.")
@click.option("--calibrate", type=click.Choice(["aon", "ue"]), default="aon",
              show_default=True,
              help="Measure volume/capacity at the free-flow all-or-nothing loading (fast) "
                   "or at user equilibrium (several solves).")
@click.option("--seed", type=int, default=0, show_default=True, help="Random seed.")
@click.option("--name", default=None, help="Network name stored in the folder.")
@friendly_errors
def command(kind, folder, n_links, rows, cols, rings, radials, n_nodes, n_zones, connectors,
            vc_target, vc_statistic, calibrate, seed, name):
    """Make a synthetic city of KIND and write it to FOLDER in the GMNS layout.

    KIND is a street grid, rings crossed by radial roads, or a random planar network
    (Delaunay triangulation of random points). Roads come in classes (motorway,
    arterial, local) with their capacity and speed; zone centroids are tied to the
    roads by connectors; a gravity-model demand is scaled to the target
    volume/capacity. The same seed gives the same network.

    \b
    Examples:
      congest generate grid city --links 5000 --zones 50
      congest generate planar big --links 100000 --zones 1000 --seed 7
      congest generate ring-radial town --rings 6 --radials 16 --calibrate ue
    """
    from .. import generate as gen
    from ..exceptions import InputError
    from ..io import write_gmns

    common = dict(connectors=connectors, vc_target=vc_target, statistic=vc_statistic,
                  calibrate=calibrate, seed=seed, name=name)
    try:
        if kind == "grid" and (rows or cols):
            if not (rows and cols):
                raise InputError("--rows and --cols go together")
            net = gen.grid_network(rows, cols, n_zones=n_zones, **common)
        elif kind == "ring-radial" and (rings or radials):
            if not (rings and radials):
                raise InputError("--rings and --radials go together")
            net = gen.ring_radial_network(rings, radials, n_zones=n_zones, **common)
        elif kind == "planar" and n_nodes:
            net = gen.planar_network(n_nodes, n_zones=n_zones, **common)
        else:
            net = gen.generate_network(kind, n_links=n_links or 2000, n_zones=n_zones,
                                       **common)
    except ValueError as err:
        if isinstance(err, InputError):
            raise
        raise InputError(str(err)) from err
    write_gmns(net, folder, description=f"synthetic {kind} network, seed {seed}, "
                                        f"{vc_statistic} v/c {vc_target:g} ({calibrate})")
    click.echo(f"{net.name}: {net.n_nodes} nodes, {net.n_links} links, {net.n_zones} zones, "
               f"{net.total_demand:,.0f} trips -> {folder}")
