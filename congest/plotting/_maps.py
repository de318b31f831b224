"""Maps of link results drawn between node coordinates.

Every map shares one frame: the network drawn as straight lines between node
coordinates, the two directions of a two-way road drawn side by side (each to the right
of its direction of travel, as traffic keeps right), line width growing with the mapped
quantity, colour from a perceptually uniform colour map with its colour bar, a width key,
zone centroids, a scale bar and a note on the coordinate system. Zone connectors (see
:attr:`congest.network.Network.connectors`) are not roads: they are drawn as thin grey
dashes of one width, in a layer of their own, and no width or colour scale counts them.
Links go into one ``LineCollection`` per layer so that networks of thousands of links
draw in well under a second.

References
----------
.. [1] Smith, N. & van der Walt, S. (2015). A better default colormap for matplotlib.
   SciPy 2015 (the perceptually uniform viridis/magma family).
.. [2] Moreland, K. (2009). Diverging color maps for scientific visualization.
   Advances in Visual Computing, LNCS 5876, 92-103 (the coolwarm map).
"""

from __future__ import annotations

import math

import numpy as np

from ..exceptions import NetworkError
from ..io.geojson import coordinate_note, is_lonlat

__all__ = [
    "flow_map",
    "difference_map",
    "toll_map",
    "select_link_map",
    "select_link_flow",
    "load_colormap",
    "toll_colormap",
    "toll_scale",
    "change_colormap",
    "MAP_LAYERS",
    "TOLL_LOG_SPAN",
]

#: ``gid`` of the collections a map draws, for finding them again in a figure.
MAP_LAYERS = {
    "links": "congest-links",
    "context": "congest-context",
    "selected": "congest-selected",
    "zones": "congest-zones",
    "connectors": "congest-connectors",
}

_HAIRLINE = 0.25  # points: the thinnest line drawn, so empty links stay visible
_INK = "#1f2a36"
_MUTED = "#5b6672"
_CONTEXT = "#c9ced4"
#: zone connectors: one thin width, mid grey (lighter ink than any road), dashed
_CONNECTOR_STYLE = {"linewidths": 0.65, "colors": "#a3aab2", "linestyles": (0, (2.6, 1.8))}
_OBJECTIVE_NAMES = {"ue": "user equilibrium", "so": "system optimum"}


# ----------------------------------------------------------------- colour maps
def load_colormap():
    """Colour map for volume/capacity: light at free flow, dark where roads are full.

    A slice of matplotlib's perceptually uniform ``magma`` map, run from light to dark
    and stopped short of white (invisible on paper) and black (indistinguishable from
    text).
    """
    from matplotlib import colormaps
    from matplotlib.colors import ListedColormap

    return ListedColormap(colormaps["magma"](np.linspace(0.87, 0.08, 256)),
                          name="congest_load")


def toll_colormap():
    """Colour map for toll amounts: a light-to-dark slice of ``viridis``."""
    from matplotlib import colormaps
    from matplotlib.colors import ListedColormap

    return ListedColormap(colormaps["viridis"](np.linspace(0.85, 0.05, 256)),
                          name="congest_toll")


def change_colormap():
    """Diverging colour map for changes (light at zero): matplotlib's ``coolwarm``."""
    from matplotlib import colormaps

    return colormaps["coolwarm"]


# ------------------------------------------------------------------ helpers
def _nice(value, *, up=True, fine=False):
    """Round ``value`` > 0 to 1, 2, 2.5 or 5 times a power of ten (finer if ``fine``)."""
    if not (value > 0 and math.isfinite(value)):
        return 1.0
    exp = math.floor(math.log10(value))
    base = 10.0 ** exp
    steps = ((1.0, 1.2, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0) if fine
             else (1.0, 2.0, 2.5, 5.0, 10.0))
    if up:
        return next(s for s in steps if s * base >= value * (1 - 1e-9)) * base
    return [s for s in steps if s * base <= value * (1 + 1e-9)][-1] * base


def _money(value):
    """Money per vehicle with two decimals; "under 0.01" for smaller positive amounts."""
    if 0 < value < 0.005:
        return "under 0.01"
    return f"{value:,.2f}"


def _samples(top):
    """Three round values for a width key: the largest below ``top``, half, a quarter."""
    if not (top > 0 and math.isfinite(top)):
        return []
    first = _nice(top, up=False, fine=True)
    return sorted({first, _nice(first / 2, up=False, fine=True),
                   _nice(first / 4, up=False, fine=True)}, reverse=True)


def _fmt(value):
    """Compact number for labels: 1,250 / 12.5 / 0.25."""
    if value == 0:
        return "0"
    mag = abs(value)
    if mag >= 100:
        return f"{value:,.0f}"
    if mag >= 10:
        return f"{value:,.1f}".rstrip("0").rstrip(".")
    return f"{value:.2f}".rstrip("0").rstrip(".")


def _as_flow(net, values, what):
    """Array of shape (n_links,) from an Equilibrium or array-like."""
    if hasattr(values, "flow") and hasattr(values, "network"):
        values = values.flow
    arr = np.asarray(values, dtype=np.float64)
    if arr.shape != (net.n_links,):
        raise ValueError(f"{what} must have shape ({net.n_links},), got {arr.shape}")
    return arr


def _coordinate_unit(crs):
    """Unit of the coordinates: 'deg', 'm', 'km', 'ft', 'mi' or None when unknown."""
    text = str(crs or "").lower()
    if is_lonlat(crs):
        return "deg"
    if "km" in text or "kilomet" in text:
        return "km"
    if "metre" in text or "meter" in text or "utm" in text or "epsg:3857" in text:
        return "m"
    if text.startswith("epsg:326") or text.startswith("epsg:327"):
        return "m"
    if "feet" in text or "foot" in text or "ft" in text.split():
        return "ft"
    if "mile" in text:
        return "mi"
    return None


class _Frame:
    """Figure, map axes, legend axes and the link geometry at the map's scale."""

    def __init__(self, net, *, figsize, legend=True):
        from matplotlib.figure import Figure

        if net.n_links == 0:
            raise NetworkError("the network has no links to draw")
        ends = np.unique(np.concatenate([net.tail, net.head]))
        x, y = net.x[ends], net.y[ends]
        if not (np.isfinite(x).all() and np.isfinite(y).all()):
            missing = ends[~(np.isfinite(x) & np.isfinite(y))]
            raise NetworkError(
                f"node {net.node_ids[missing[0]]} has no coordinates; maps need x and y "
                f"for every node ({missing.size} node(s) missing)")
        self.net = net
        self.fig = Figure(figsize=figsize, layout=None)
        self.fig.patch.set_facecolor("white")
        right = 0.76 if legend else 0.96
        self.ax = self.fig.add_axes((0.03, 0.08, right - 0.03, 0.80))
        self.ax.set_axis_off()
        self.lonlat = is_lonlat(net.crs)
        lat0 = float(np.mean(y)) if self.lonlat else 0.0
        # in lon/lat a degree of longitude is shorter than a degree of latitude
        self.sy = 1.0 / math.cos(math.radians(lat0)) if self.lonlat else 1.0
        xmin, xmax, ymin, ymax = x.min(), x.max(), y.min(), y.max()
        span = max(xmax - xmin, (ymax - ymin) * self.sy, 1e-9)
        pad = 0.03 * span
        self.ax.set_xlim(xmin - pad, xmax + pad)
        # room below the network for the scale bar
        self.ax.set_ylim(ymin - 2.8 * pad / self.sy, ymax + pad / self.sy)
        self.ax.set_aspect(self.sy, adjustable="box")
        self.ax.apply_aspect()
        pos = self.ax.get_position()
        width_pt = pos.width * figsize[0] * 72.0
        self.units_per_point = (xmax - xmin + 2 * pad) / width_pt

        # link geometry in "display-scaled" units (y stretched by sy)
        x0, y0 = net.x[net.tail], net.y[net.tail] * self.sy
        x1, y1 = net.x[net.head], net.y[net.head] * self.sy
        dx, dy = x1 - x0, y1 - y0
        length = np.hypot(dx, dy)
        safe = np.where(length > 0, length, 1.0)
        self._geom = (x0, y0, x1, y1, dy / safe * (length > 0), -dx / safe * (length > 0),
                      length)
        n = np.int64(net.n_nodes)
        keys = net.tail * n + net.head
        self.two_way = np.isin(net.head * n + net.tail, keys)
        #: zone connectors, drawn apart from the roads and left out of every scale
        self.connector = net.connectors
        self.road = ~self.connector
        positive = length[(length > 0) & self.road]
        median_pt = (np.median(positive) if positive.size else span) / self.units_per_point
        #: widest line, points: thin enough that both directions fit on a short link
        self.max_width = float(np.clip(0.16 * median_pt, 0.8, 6.0))
        self.legend = legend
        if legend:
            self.cax = self.fig.add_axes((0.805, 0.50, 0.022, 0.34))
            self.kax = self.fig.add_axes((0.785, 0.10, 0.20, 0.32))
            self.kax.set_axis_off()
            self.kax.set_xlim(0, 1)
            self.kax.set_ylim(0, 1)

    # geometry -------------------------------------------------------------
    def segments(self, widths=None, *, gap=0.4):
        """Segments of shape (n_links, 2, 2); two-way roads moved right of travel.

        Each direction of a two-way road sits half its own width plus ``gap`` points
        off the road's centre line, so the pair never overlaps whatever the widths;
        never more than 30% of the link's length. Connectors stay on their centre line
        (both directions are drawn alike, so one dashed line shows the pair).
        """
        x0, y0, x1, y1, nx, ny, length = self._geom
        half = self.max_width / 2.0 if widths is None else np.asarray(widths) / 2.0
        offset = np.where(self.two_way & self.road, half + gap, 0.0)
        offset = np.minimum(offset * self.units_per_point, 0.3 * length)
        ox, oy = nx * offset, ny * offset
        seg = np.empty((x0.size, 2, 2))
        seg[:, 0, 0], seg[:, 0, 1] = x0 + ox, (y0 + oy) / self.sy
        seg[:, 1, 0], seg[:, 1, 1] = x1 + ox, (y1 + oy) / self.sy
        return seg

    def widths(self, magnitude, reference):
        """Line widths growing in proportion to ``magnitude`` above a hairline."""
        ref = reference if reference > 0 else 1.0
        share = np.clip(np.nan_to_num(np.abs(magnitude)) / ref, 0.0, 1.0)
        return _HAIRLINE + (self.max_width - _HAIRLINE) * share

    # layers ------------------------------------------------------------------
    def add_links(self, widths, colors, *, layer="links", zorder=2, mask=None,
                  place_as=None):
        """One LineCollection; ``place_as`` gives the widths that set the offsets."""
        from matplotlib.collections import LineCollection

        seg = self.segments(widths if place_as is None else place_as)
        if mask is not None:
            seg, widths, colors = seg[mask], np.asarray(widths)[mask], colors[mask]
        lc = LineCollection(seg, linewidths=widths, colors=colors, capstyle="butt",
                            joinstyle="round", zorder=zorder)
        lc.set_gid(MAP_LAYERS[layer])
        self.ax.add_collection(lc, autolim=False)
        return lc

    def add_connectors(self, mask=None):
        """The zone connectors (those in ``mask``, default all) as thin grey dashes."""
        from matplotlib.collections import LineCollection

        chosen = self.connector if mask is None else self.connector & mask
        if not chosen.any():
            return None
        seg = self.segments()
        # both directions of a connector run from the same end, so their dashes coincide
        # (drawn from opposite ends they would fill each other's gaps into a solid line)
        flip = self.net.tail > self.net.head
        seg[flip] = seg[flip, ::-1]
        lc = LineCollection(seg[chosen], capstyle="butt", zorder=1.5, **_CONNECTOR_STYLE)
        lc.set_gid(MAP_LAYERS["connectors"])
        self.ax.add_collection(lc, autolim=False)
        self._connectors_drawn = True
        return lc

    def add_zones(self):
        net = self.net
        if net.n_zones == 0:
            return None
        size = float(np.clip(1600.0 / net.n_zones, 2.0, 28.0)) * (self.max_width / 6.0) ** 0.5
        pts = self.ax.scatter(net.x[net.zone_nodes], net.y[net.zone_nodes], s=size,
                              marker="o", facecolor="white", edgecolor=_INK,
                              linewidths=0.7 if net.n_zones <= 400 else 0.4, zorder=4)
        pts.set_gid(MAP_LAYERS["zones"])
        self._zone_size = size
        return pts

    def add_colorbar(self, cmap, norm, label, *, extend="neither", ticks=None):
        from matplotlib.cm import ScalarMappable

        sm = ScalarMappable(norm=norm, cmap=cmap)
        cbar = self.fig.colorbar(sm, cax=self.cax, extend=extend, ticks=ticks)
        cbar.set_label(label, fontsize=9, color=_INK)
        cbar.ax.tick_params(labelsize=8, colors=_INK, length=3)
        cbar.outline.set_linewidth(0.5)
        return cbar

    def add_width_key(self, values, label, *, color=_MUTED, reference):
        """Sample lines for a few values, their widths as on the map."""
        kax = self.kax
        kax.text(0.0, 0.97, label, fontsize=9, color=_INK, va="top", ha="left")
        shown = [v for v in values if v > 0]
        ys = np.linspace(0.80, 0.80 - 0.13 * (len(shown) - 1), len(shown)) if shown else []
        for yv, val in zip(ys, shown, strict=True):
            w = float(self.widths(np.array([val]), reference)[0])
            kax.plot([0.02, 0.30], [yv, yv], color=color, lw=w, solid_capstyle="butt")
            kax.text(0.36, yv, _fmt(val), fontsize=8, color=_INK, va="center")
        return self.add_symbols((ys[-1] if len(shown) else 0.85) - 0.16)

    def add_symbols(self, y_next):
        """Key entries for the zone connectors and centroids drawn; returns the next y."""
        kax = self.kax
        if getattr(self, "_connectors_drawn", False):
            style = _CONNECTOR_STYLE
            kax.plot([0.02, 0.30], [y_next, y_next], color=style["colors"],
                     lw=style["linewidths"], ls=style["linestyles"], solid_capstyle="butt",
                     gid="congest-key-connector")
            kax.text(0.36, y_next, "zone connector", fontsize=8, color=_INK, va="center")
            y_next -= 0.13
        if getattr(self, "_zone_size", None):
            kax.scatter([0.16], [y_next], s=max(self._zone_size, 12.0), marker="o",
                        facecolor="white", edgecolor=_INK, linewidths=0.7)
            kax.text(0.36, y_next, "zone centroid", fontsize=8, color=_INK, va="center")
            y_next -= 0.13
        return y_next

    def add_scale_bar(self):
        """A bar of a round length in the lower left, labelled in km where known."""
        ax = self.ax
        (x_lo, x_hi), (y_lo, y_hi) = ax.get_xlim(), ax.get_ylim()
        unit = _coordinate_unit(self.net.crs) or self._unit_from_lengths()
        target = 0.2 * (x_hi - x_lo)  # coordinate units
        if unit == "deg":
            lat = (y_lo + y_hi) / 2.0
            km_per_unit = 111.32 * math.cos(math.radians(lat))
        else:
            km_per_unit = {"m": 1e-3, "km": 1.0}.get(unit)
        if km_per_unit:
            km = _nice(target * km_per_unit, up=False)
            length = km / km_per_unit
            text = f"{_fmt(km)} km" if km >= 1 else f"{_fmt(km * 1000)} m"
        else:
            length = _nice(target, up=False)
            text = f"{_fmt(length)} {unit}" if unit else f"{_fmt(length)} coordinate units"
        x0 = x_lo + 0.01 * (x_hi - x_lo)
        y0 = y_lo + 0.012 * (y_hi - y_lo)
        tick = 0.006 * (y_hi - y_lo)
        ax.plot([x0, x0 + length], [y0, y0], color=_INK, lw=1.6, solid_capstyle="butt",
                zorder=6)
        for xe in (x0, x0 + length):
            ax.plot([xe, xe], [y0 - tick, y0 + tick], color=_INK, lw=1.0, zorder=6)
        ax.text(x0 + length * 1.04, y0, text, ha="left", va="center", fontsize=8,
                color=_INK, zorder=6)

    def _unit_from_lengths(self):
        """The length unit, when link lengths match straight-line node distances."""
        net = self.net
        unit = str(net.length_unit or "").strip().lower()
        unit = {"kilometres": "km", "kilometers": "km", "metres": "m", "meters": "m",
                "miles": "mi", "feet": "ft"}.get(unit, unit)
        if unit not in ("km", "m", "mi", "ft"):
            return None
        dist = self._geom[6]
        ok = np.isfinite(net.length) & (dist > 0) & (net.length > 0)
        if ok.sum() < max(3, 0.5 * net.n_links):
            return None
        ratio = np.median(net.length[ok] / dist[ok])
        return unit if 0.9 <= ratio <= 1.25 else None

    def titles(self, title, subtitle):
        self.fig.text(0.03, 0.965, title, fontsize=14, fontweight="bold", color=_INK,
                      va="top", ha="left", gid="congest-title")
        if subtitle:
            self.fig.text(0.03, 0.925, subtitle, fontsize=9.5, color=_MUTED, va="top",
                          ha="left", gid="congest-subtitle")

    def footnote(self, extra=""):
        import textwrap

        note = coordinate_note(self.net.crs)
        scale = ("Zone connectors are not drawn to scale."
                 if getattr(self, "_connectors_drawn", False) else "")
        text = " ".join(s for s in (note, extra, scale, "Planning-level estimate.") if s)
        width = int(self.fig.get_figwidth() * 16.5)  # characters of 7.5 pt text per line
        self.fig.text(0.03, 0.012, textwrap.fill(text, width), fontsize=7.5, color=_MUTED,
                      ha="left", va="bottom", gid="congest-footnote", linespacing=1.3)


def _link_name(net, i):
    """`` (Old Bridge)`` when the network names its links, else empty."""
    names = net.link_attrs.get("name")
    if names is None:
        return ""
    name = str(names[i]).strip()
    return f" ({name})" if name and name.lower() != "nan" else ""


def _key_figures(eq, road):
    """Subtitle for one equilibrium: vehicle-hours, mean trip, overloaded roads, gap."""
    return (f"{eq.vehicle_hours:,.0f} vehicle-hours  ·  mean trip {eq.mean_trip_time:.1f} min  ·"
            f"  {_over_capacity(eq.volume_capacity, road)}  ·"
            f"  relative gap {eq.relative_gap:.1e}")


def _vehicle_minutes(net, volume, travel_time, what):
    """Sum of volume x travel time over every link, vehicle-minutes."""
    return float(volume @ _as_flow(net, travel_time, what))


def _table_key_figures(net, volume, travel_time, vc, road):
    """Subtitle for link results with travel times: vehicle-hours, mean trip, overloads."""
    minutes = _vehicle_minutes(net, volume, travel_time, "travel_time")
    trips = net.total_demand
    mean = f"  ·  mean trip {minutes / trips:.1f} min" if trips > 0 else ""
    return f"{minutes / 60.0:,.0f} vehicle-hours{mean}  ·  {_over_capacity(vc, road)}"


def _over_capacity(vc, road):
    """"12 of 394 road links over capacity" (plain "links" when there are no connectors)."""
    return (f"{int(np.sum(vc[road] > 1.0)):,} of {int(road.sum()):,} {_road_links(road)} "
            "over capacity")


def _road_links(road):
    """"links", or "road links" when some links are zone connectors (``road`` False)."""
    return "links" if road.all() else "road links"


def _period(net):
    h = net.period_hours
    return f"{_fmt(h)}-hour period" if h != 1 else "1-hour period"


# ------------------------------------------------------------------- maps
def flow_map(network, flow, *, scenario=None, key_figure=None, travel_time=None,
             vc_max=None, volume_max=None, show_zones=True, figsize=(10.0, 8.0)):
    """Map of link volumes: width by volume, colour by volume/capacity.

    Parameters
    ----------
    network : Network
        With node coordinates ``x``, ``y``.
    flow : Equilibrium or array_like of shape (n_links,)
        Link volumes (trips in the analysis period). An
        :class:`~congest.equilibrium.Equilibrium` also supplies the scenario name and
        its key figures for the title.
    scenario : str, optional
        Name shown in the title (default: the equilibrium's objective, or "volumes").
    key_figure : str, optional
        Subtitle (default: vehicle-hours, mean trip time, links over capacity and the
        relative gap, when ``flow`` is an Equilibrium; vehicle-hours, mean trip time and
        links over capacity when ``travel_time`` is given; else links over capacity).
    travel_time : array_like of shape (n_links,), optional
        Link travel times, minutes, at the volumes ``flow`` (e.g. the ``travel_time``
        column of a link results table), for the key figures of volumes that are not an
        Equilibrium: vehicle-hours are ``sum(volume * travel_time) / 60`` and the mean
        trip time that sum over the network's trips.
    vc_max : float, optional
        Top of the colour scale. Default: the largest volume/capacity of a road link
        rounded up to a quarter, at least 1 and at most 2; links above it take the top
        colour and the colour bar shows an arrow.
    volume_max : float, optional
        Volume drawn at full width. Default: the largest volume of a road link on this
        map. Maps meant to be compared side by side (UE against SO, say) need the same
        ``volume_max`` and ``vc_max`` (see :func:`flow_scales`), or equal widths stand
        for different volumes.
    show_zones : bool, default True
    figsize : (float, float), default (10, 8)
        Inches.

    Returns
    -------
    matplotlib.figure.Figure
        The road links are the collection with gid ``MAP_LAYERS["links"]``, one segment
        per road link in the network's link order; the zone connectors
        (:attr:`~congest.network.Network.connectors`), if any, are the
        ``MAP_LAYERS["connectors"]`` collection of thin grey dashes, one segment per
        connector, with a "zone connector" entry in the key.

    Notes
    -----
    Width is ``w0 + (w1 - w0) * v / v_max`` points with a hairline ``w0`` so that
    unused links stay visible; ``w1`` shrinks with the typical link length on the page,
    so big networks get thin lines. Colours are ``load_colormap()`` applied to
    ``v / (capacity * period_hours)`` scaled to ``[0, vc_max]``. Connectors carry every
    trip of their zone at a capacity that is a modelling device, so their volumes and
    volume/capacity say nothing about the roads: they are drawn at one width in grey and
    set neither scale, and the subtitle counts road links only.

    Examples
    --------
    >>> from congest.network import Network
    >>> net = Network(node_ids=[1, 2, 3], tail=[0, 1, 1], head=[1, 0, 2],
    ...               capacity=100.0, free_flow_time=1.0, zone_ids=[1, 3],
    ...               zone_nodes=[0, 2], demand=[[0, 80], [0, 0]],
    ...               x=[0.0, 1.0, 2.0], y=[0.0, 0.0, 0.5])
    >>> fig = flow_map(net, [80.0, 0.0, 80.0], scenario="example")
    >>> [t.get_text() for t in fig.texts][0]
    'network: example'
    """
    from matplotlib.colors import Normalize

    net = network
    eq = flow if hasattr(flow, "flow") and hasattr(flow, "network") else None
    volume = _as_flow(net, flow, "flow")
    frame = _Frame(net, figsize=figsize)
    road = frame.road
    vc = _volume_capacity(net, volume)
    top = float(np.max(vc[road], initial=0.0))
    if vc_max is None:
        vc_max = _vc_scale_top(top)
    norm = Normalize(vmin=0.0, vmax=vc_max)
    cmap = load_colormap()

    vref = float(np.max(volume[road], initial=0.0))
    if volume_max is not None:
        if not (volume_max > 0) or not math.isfinite(volume_max):
            raise ValueError(f"volume_max must be a positive number, got {volume_max!r}")
        vref = float(volume_max)
    widths = frame.widths(np.minimum(volume, vref), vref)
    frame.add_connectors()
    frame.add_links(widths, cmap(norm(vc)), mask=road)
    if show_zones:
        frame.add_zones()
    ticks = np.arange(0.0, vc_max + 1e-9, 0.25 if vc_max <= 1.5 else 0.5)
    cbar = frame.add_colorbar(cmap, norm, "Volume / capacity",
                              extend="max" if top > vc_max else "neither", ticks=ticks)
    cbar.ax.axhline(1.0, color="white", lw=1.2)
    cbar.ax.set_yticklabels([f"{t:.2f}" + ("  at capacity" if abs(t - 1.0) < 1e-9 else "")
                             for t in ticks])
    frame.add_width_key(_samples(vref), f"Volume, vehicles\nin the {_period(net)}",
                        reference=vref)
    frame.add_scale_bar()
    if scenario is None:
        scenario = _OBJECTIVE_NAMES.get(getattr(eq, "objective", None), "volumes")
    if key_figure is None:
        if eq is not None:
            key_figure = _key_figures(eq, road)
        elif travel_time is not None:
            key_figure = _table_key_figures(net, volume, travel_time, vc, road)
        else:
            key_figure = _over_capacity(vc, road)
    frame.titles(f"{net.name}: {scenario}", key_figure)
    frame.footnote("Two-way roads: each direction drawn on its right-hand side.")
    return frame.fig


def _volume_capacity(net, volume, links=slice(None)):
    """Volume over period capacity (0 where there is no capacity) of ``links``."""
    cap = net.period_capacity[links]
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(cap > 0, volume / cap, 0.0)


def _vc_scale_top(top):
    """Top of the volume/capacity colour scale: ``top`` up to a quarter, in [1, 2]."""
    return float(np.clip(math.ceil(top * 4.0 - 1e-9) / 4.0, 1.0, 2.0))


def flow_scales(network, *flows):
    """``vc_max`` and ``volume_max`` for :func:`flow_map` that fit all of ``flows``.

    Pass the result to every map of a set (``flow_map(net, ue, **scales)``) so that the
    maps share one width and one colour scale and compare by eye. Like
    :func:`flow_map`, it looks at road links only: zone connectors
    (:attr:`~congest.network.Network.connectors`) set neither scale.
    """
    road = ~network.connectors
    volumes = [_as_flow(network, f, "flow")[road] for f in flows]
    top_vc = max((float(np.max(_volume_capacity(network, v, road), initial=0.0))
                  for v in volumes), default=0.0)
    scales = {"vc_max": _vc_scale_top(top_vc)}
    top_volume = max((float(np.max(v, initial=0.0)) for v in volumes), default=0.0)
    if top_volume > 0:
        scales["volume_max"] = top_volume
    return scales


def difference_map(network, flow_a, flow_b, *, labels=("A", "B"), title=None,
                   key_figure=None, travel_time=None, show_zones=False,
                   figsize=(10.0, 8.0)):
    """Map of the change in link volume from scenario A to scenario B.

    Parameters
    ----------
    network : Network
    flow_a, flow_b : Equilibrium or array_like of shape (n_links,)
        Volumes in the two scenarios, same network and link order.
    labels : (str, str), default ("A", "B")
        Scenario names.
    title : str, optional
        Title after the network's name (default: "B against A").
    key_figure : str, optional
        Subtitle (default: the change in vehicle-hours when both are Equilibria or
        ``travel_time`` is given, then the number of links gaining and losing volume).
    travel_time : (array_like, array_like), optional
        Link travel times in minutes of scenarios A and B, each of shape (n_links,),
        for the change in vehicle-hours of volumes that are not Equilibria.
    show_zones : bool, default False
    figsize : (float, float), default (10, 8)

    Returns
    -------
    matplotlib.figure.Figure
        Road links are the ``MAP_LAYERS["links"]`` collection (in link order), coloured
        by ``change_colormap()`` on ``B - A`` over ``[-m, m]`` (centred on zero, ``m``
        the largest change on a road rounded up), width growing with ``|B - A|``. Zone
        connectors are grey dashes of one width (``MAP_LAYERS["connectors"]``) and set
        no scale; the counts in the subtitle are of road links.
    """
    from matplotlib.colors import Normalize

    net = network
    a = _as_flow(net, flow_a, "flow_a")
    b = _as_flow(net, flow_b, "flow_b")
    change = b - a
    frame = _Frame(net, figsize=figsize)
    road = frame.road
    biggest = float(np.max(np.abs(change[road]), initial=0.0))
    scale = biggest * 1e-9 + 1e-12
    m = _nice(biggest, fine=True) if biggest > scale else 1.0
    norm = Normalize(vmin=-m, vmax=m)
    cmap = change_colormap()

    widths = frame.widths(change, biggest)
    frame.add_connectors()
    frame.add_links(widths, cmap(norm(change)), mask=road)
    if show_zones:
        frame.add_zones()
    import textwrap

    frame.add_colorbar(cmap, norm, textwrap.fill(
        f"Change in volume, {labels[1]} minus {labels[0]}, vehicles", 34))
    frame.add_width_key(_samples(biggest), "Size of change,\nvehicles", reference=biggest)
    frame.add_scale_bar()
    tiny = 1e-9 * max(float(np.max(np.abs(a))) if a.size else 0.0, 1.0)
    n_up, n_down = int(np.sum(change[road] > tiny)), int(np.sum(change[road] < -tiny))
    if key_figure is None:
        parts = []
        if all(hasattr(f, "vehicle_hours") for f in (flow_a, flow_b)):
            vh_a, vh_b = flow_a.vehicle_hours, flow_b.vehicle_hours
        elif travel_time is not None:
            time_a, time_b = travel_time
            vh_a = _vehicle_minutes(net, a, time_a, "travel_time of A") / 60.0
            vh_b = _vehicle_minutes(net, b, time_b, "travel_time of B") / 60.0
        else:
            vh_a = vh_b = None
        if vh_a is not None:
            dvh = vh_b - vh_a
            pct = 100.0 * dvh / vh_a if vh_a else 0.0
            change_txt = f"{dvh:+,.0f} ({pct:+.1f}%)".replace("-", "\u2212")
            parts.append(f"vehicle-hours {change_txt}")
        parts.append(f"{n_up} {_road_links(road)} gain volume, {n_down} lose")
        key_figure = "  ·  ".join(parts)
    if title is None:
        title = f"{labels[1]} against {labels[0]}"
    frame.titles(f"{net.name}: {title}", key_figure)
    frame.footnote()
    return frame.fig


#: Tolls whose largest is more than this many times the smallest drawn get a
#: logarithmic colour scale; closer tolls share a linear one from zero.
TOLL_LOG_SPAN = 15.0
#: Decades of the logarithmic toll scale at most: its floor is no lower than the
#: largest toll divided by ten to this power.
TOLL_LOG_DECADES = 3
#: Money per vehicle below which a toll rounds to 0.00: the log scale never starts lower.
_MONEY_STEP = 0.005


def _amount(value):
    """Money with up to three significant digits: 0.005, 0.17, 2.23, 12.5, 1,250."""
    if not (value > 0 and math.isfinite(value)):
        return _fmt(value)
    if value >= 100:
        return f"{value:,.0f}"
    digits = max(0, 2 - math.floor(math.log10(value)))
    return f"{value:,.{digits}f}".rstrip("0").rstrip(".")


def toll_scale(tolls):
    """Colour scale of :func:`toll_map`: linear from zero, or logarithmic from a floor.

    Parameters
    ----------
    tolls : array_like
        Money per vehicle; only tolled links (:func:`congest.pricing.tolled_mask`) count.

    Returns
    -------
    norm : matplotlib.colors.Normalize or matplotlib.colors.LogNorm
    floor : float
        Smallest toll drawn in colour (0 for a linear scale); tolls below it are drawn
        as untolled.
    ticks : ndarray or None
        Colour-bar ticks of a logarithmic scale (the floor, the largest toll and round
        values between); None for a linear scale (matplotlib's own ticks).

    Notes
    -----
    With tolls from ``lo`` to ``top`` the floor is ``max(lo, top / 10**3, 0.005)``
    (rounded down to 1, 2 or 5 times a power of ten), so that tolls that round to
    0.00 and the rounding noise of a marginal-cost toll set no colour. When ``top``
    is over :data:`TOLL_LOG_SPAN` times the floor the scale is logarithmic from the
    floor to ``top``, so a bridge charging ten times the ring road's toll gets a
    colour a ring-road toll never has; otherwise it is linear from zero to ``top``
    rounded up.
    """
    from matplotlib.colors import LogNorm, Normalize

    from ..pricing import tolled_mask

    amount = np.asarray(tolls, dtype=np.float64)
    tolled = tolled_mask(amount) if amount.size else np.zeros(0, dtype=bool)
    if not tolled.any():
        return Normalize(vmin=0.0, vmax=1.0), 0.0, np.linspace(0.0, 1.0, 5)
    top, low = float(amount[tolled].max()), float(amount[tolled].min())
    floor = max(low, top * 10.0 ** -TOLL_LOG_DECADES, _MONEY_STEP)
    floor = _nice_down_125(floor)
    if top <= TOLL_LOG_SPAN * floor:
        scale_top = _nice(top, fine=True)
        return Normalize(vmin=0.0, vmax=scale_top), 0.0, None
    return LogNorm(vmin=floor, vmax=top), floor, _log_ticks(floor, top)


def _nice_down_125(value):
    """``value`` rounded down to 1, 2 or 5 times a power of ten."""
    exp = math.floor(math.log10(value))
    base = 10.0 ** exp
    return max(s for s in (1.0, 2.0, 5.0) if s * base <= value * (1 + 1e-9)) * base


def _log_ticks(lo, hi):
    """Ticks of a log scale: the ends, the powers of ten between and, on scales under
    two decades, 2 and 5 times them; none closer than a factor 1.5 to an end."""
    steps = (1.0, 2.0, 5.0) if hi / lo < 100.0 else (1.0,)
    inner = [s * 10.0 ** e for e in range(math.floor(math.log10(lo)),
                                          math.ceil(math.log10(hi)) + 1) for s in steps]
    inner = [t for t in inner if lo * 1.5 <= t <= hi / 1.5]
    return np.array([lo, *inner, hi])


def toll_map(network, toll=None, *, flow=None, currency=None, label_limit=24,
             scenario="tolls", figsize=(10.0, 8.0)):
    """Map of tolled links and their amounts.

    Parameters
    ----------
    network : Network
    toll : array_like of shape (n_links,), optional
        Money per vehicle (default ``network.toll``).
    flow : Equilibrium or array_like of shape (n_links,), optional
        Volumes under the tolls; when given, tolled links' width grows with volume and
        the subtitle shows the revenue.
    currency : str, optional
        Default ``network.currency``.
    label_limit : int, default 24
        Amounts are written beside the tolled links when at most this many are drawn.
    scenario : str, default "tolls"
    figsize : (float, float), default (10, 8)

    Returns
    -------
    matplotlib.figure.Figure
        Tolled links (:func:`congest.pricing.tolled_mask`) at or above the scale's floor
        are the ``MAP_LAYERS["links"]`` collection, coloured by ``toll_colormap()``
        under the norm of :func:`toll_scale`: linear from 0 to the largest toll rounded
        up, or logarithmic from a floor to the largest toll when the tolls span more
        than :data:`TOLL_LOG_SPAN` times. The other roads are the grey
        ``MAP_LAYERS["context"]`` collection and the other zone connectors the dashed
        ``MAP_LAYERS["connectors"]`` one; the key and the footnote say how many
        tolls are too small to draw.
    """
    net = network
    amount = _as_flow(net, net.toll if toll is None else toll, "toll")
    currency = net.currency if currency is None else currency
    volume = None if flow is None else _as_flow(net, flow, "flow")
    from ..pricing import TOLL_RELATIVE_FLOOR, tolled_mask

    # tolls below 1e-4 of the largest (rounding noise where an SO flow is near zero) are
    # not tolls, as in every count of tolled links; a log scale also leaves out those
    # below its floor. Both are drawn as untolled and counted in the key and footnote.
    tolled = tolled_mask(amount)
    norm, floor, ticks = toll_scale(amount)
    drawn = tolled & (amount >= floor)
    top = float(amount[tolled].max()) if tolled.any() else 0.0
    noise = float(np.max(amount, initial=0.0)) * TOLL_RELATIVE_FLOOR
    below = max(floor, noise)
    hidden = int(np.sum((amount > 0) & ~drawn))
    small = int(np.sum(tolled & ~drawn))  # tolled, but under the log scale's floor
    frame = _Frame(net, figsize=figsize)
    hair = np.full(net.n_links, _HAIRLINE * 2)
    context = np.tile(np.array([[0.79, 0.81, 0.83, 1.0]]), (net.n_links, 1))
    frame.add_links(hair, context, layer="context", zorder=1, mask=~drawn & frame.road)
    frame.add_connectors(mask=~drawn)
    cmap = toll_colormap()
    if volume is not None:
        vref = float(np.max(volume[drawn])) if drawn.any() else 0.0
        widths = frame.widths(volume, vref)
        widths = np.maximum(widths, 1.0)
    else:
        vref = 0.0
        widths = np.full(net.n_links, max(frame.max_width * 0.7, 1.0))
    frame.add_links(widths, cmap(norm(np.maximum(amount, floor))), mask=drawn, zorder=3)
    logarithmic = floor > 0
    cbar = frame.add_colorbar(cmap, norm, f"Toll, {currency} per vehicle"
                              + ("\n(logarithmic scale)" if logarithmic else ""),
                              ticks=ticks)
    if logarithmic:
        from matplotlib.ticker import NullFormatter

        cbar.set_ticks(ticks, labels=[_amount(t) for t in ticks])
        cbar.ax.yaxis.set_minor_formatter(NullFormatter())
    if volume is not None and vref > 0:
        y_next = frame.add_width_key(_samples(vref), f"Volume on tolled links,\nvehicles "
                                     f"in the {_period(net)}", reference=vref)
    else:
        y_next = frame.add_symbols(0.90)
    untolled = ("untolled" if not hidden else
                f"untolled, or under\n{_amount(below)} {currency}")
    # a little wider than on the map, where the many grey lines make each other visible
    frame.kax.plot([0.02, 0.30], [y_next, y_next], color=context[0], lw=_HAIRLINE * 4,
                   solid_capstyle="butt", gid="congest-key-untolled")
    frame.kax.text(0.36, y_next, untolled, fontsize=8, color=_INK, va="center")
    frame.add_scale_bar()
    if 0 < int(drawn.sum()) <= label_limit:
        seg = frame.segments()
        x0, y0, x1, y1, nx, ny, _ = frame._geom
        push = 2.2 * frame.max_width * frame.units_per_point
        for i in np.flatnonzero(drawn):
            mx = seg[i, :, 0].mean() + nx[i] * push
            my = seg[i, :, 1].mean() + ny[i] * push / frame.sy
            frame.ax.text(mx, my, _amount(amount[i]), fontsize=7, color=_INK, ha="center",
                          va="center", zorder=7,
                          bbox={"boxstyle": "round,pad=0.12", "fc": "white", "ec": "none",
                                "alpha": 0.85})
    k = int(tolled.sum())
    if k:
        lo, hi = _money(amount[tolled].min()), _money(top)
        sub = (f"{k:,} tolled link{'s' if k != 1 else ''}  ·  "
               f"{lo if lo == hi else f'{lo} to {hi}'} {currency} per vehicle")
        if volume is not None:
            sub += f"  ·  revenue {float(amount @ volume):,.0f} {currency} per period"
    else:
        sub = "no tolled links"
    frame.titles(f"{net.name}: {scenario}", sub)
    notes = []
    if logarithmic:
        notes.append("The colour scale is logarithmic: equal steps of colour are equal "
                     "ratios of toll.")
    if small:
        notes.append(f"{small:,} of the {k:,} tolled links charge under {_amount(floor)} "
                     f"{currency} and are drawn as untolled.")
    if hidden > small:
        notes.append(f"{hidden - small:,} link(s) with tolls below {_amount(noise)} "
                     f"{currency} do not count as tolled and are drawn as untolled.")
    frame.footnote(" ".join(notes))
    return frame.fig


def select_link_flow(result, links, *, require="any"):
    """Link volumes of the trips whose routes use the selected links.

    Parameters
    ----------
    result : Equilibrium
        From a route-based method (see :func:`congest.routes.route_flows`).
    links : int or array_like of int
        Link indices.
    require : {"any", "all"}, default "any"
        A route counts when it uses any of the links, or all of them.

    Returns
    -------
    ndarray of shape (n_links,)
        On each selected link it equals the link's volume (``require="any"``, one link).
    """
    from ..routes import select_link_volumes

    return select_link_volumes(result, links, require=require)


def select_link_map(network, select_flow, selected, *, label=None, figsize=(10.0, 8.0)):
    """Map of where the trips using some selected links travel.

    Parameters
    ----------
    network : Network
    select_flow : array_like of shape (n_links,)
        Volume on every link of the trips that use the selected link(s), e.g. from
        :func:`select_link_flow`.
    selected : int or sequence of int
        Link *indices* of the selected links.
    label : str, optional
        Name of the selection for the title (default: the link ids).
    figsize : (float, float), default (10, 8)

    Returns
    -------
    matplotlib.figure.Figure
        Links carrying selected trips form the ``MAP_LAYERS["links"]`` collection (in
        link order, coloured by ``load_colormap()`` over ``[0, max]``), the rest the grey
        ``MAP_LAYERS["context"]`` collection and the selected links the
        ``MAP_LAYERS["selected"]`` outline.
    """
    from matplotlib.colors import Normalize

    net = network
    volume = _as_flow(net, select_flow, "select_flow")
    sel = np.atleast_1d(np.asarray(selected, dtype=np.int64))
    if sel.size == 0 or sel.min() < 0 or sel.max() >= net.n_links:
        raise ValueError(f"selected links must be indices in 0..{net.n_links - 1}")
    frame = _Frame(net, figsize=figsize)
    used = volume > 1e-9 * max(float(volume.max()) if volume.size else 0.0, 1.0)
    context = np.tile(np.array([[0.79, 0.81, 0.83, 1.0]]), (net.n_links, 1))
    frame.add_links(np.full(net.n_links, _HAIRLINE * 2), context, layer="context",
                    zorder=1, mask=~used)
    vref = float(volume.max()) if volume.size else 0.0
    norm = Normalize(vmin=0.0, vmax=_nice(vref, fine=True) if vref > 0 else 1.0)
    cmap = load_colormap()
    widths = frame.widths(volume, vref)
    is_sel = np.zeros(net.n_links, dtype=bool)
    is_sel[sel] = True
    outline = np.where(is_sel, widths + 3.0, 0.0)
    ink = np.tile(np.array([[0.0, 0.63, 0.63, 1.0]]), (net.n_links, 1))
    frame.add_links(outline, ink, layer="selected", zorder=2, mask=is_sel, place_as=widths)
    frame.add_links(widths, cmap(norm(volume)), mask=used, zorder=3)
    frame.add_colorbar(cmap, norm, "Volume of selected trips, vehicles")
    y_next = frame.add_width_key(_samples(vref), "Volume of selected\ntrips, vehicles",
                                 reference=vref)
    frame.kax.plot([0.02, 0.30], [y_next, y_next], color=ink[0], lw=4.0,
                   solid_capstyle="butt")
    frame.kax.text(0.36, y_next, "selected link", fontsize=8, color=_INK, va="center")
    frame.add_scale_bar()
    if label is None:
        ids = ", ".join(str(v) for v in net.link_ids[sel][:6])
        label = (f"trips using link {ids}{_link_name(net, sel[0])}" if sel.size == 1
                 else f"trips using links {ids}{' ...' if sel.size > 6 else ''}")
    on_selected = volume[sel]
    volume_note = (f"{float(on_selected[0]):,.0f} vehicles on the selected link"
                   if sel.size == 1 else
                   f"{float(on_selected.min()):,.0f} to {float(on_selected.max()):,.0f} "
                   "vehicles on the selected links")
    frame.titles(f"{net.name}: {label}",
                 f"{volume_note}  ·  {int(used.sum())} links carry some of them")
    frame.footnote()
    return frame.fig
