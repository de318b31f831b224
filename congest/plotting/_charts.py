"""Charts of curves and tables: convergence, sweeps, learning, scenario comparisons.

All charts share a plain look: a bold left-aligned title, a grey subtitle with the key
figure, light horizontal grid lines, no top/right frame, units in every axis label.
"""

from __future__ import annotations

import math

import numpy as np

from ._maps import _INK, _MUTED, _fmt

__all__ = ["convergence_chart", "sweep_chart", "learning_chart", "scenario_chart",
           "PALETTE"]

#: Line and bar colours, in order: dark enough to read on white, distinct in grey print
#: when combined with the line styles below.
PALETTE = ("#23456b", "#c2571a", "#3a8a5c", "#8a3f8f", "#b08d1c", "#4f8fbf", "#7a4a2a",
           "#9c2f4d")
_STYLES = ("-", "--", "-.", ":")


def _new_figure(figsize, n_cols=1, n_rows=1, *, sharex=False, width_ratios=None):
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize)
    axes = fig.subplots(n_rows, n_cols, sharex=sharex, squeeze=False,
                        width_ratios=width_ratios).ravel()
    for ax in axes:
        ax.spines[["top", "right"]].set_visible(False)
        for side in ("left", "bottom"):
            ax.spines[side].set_color(_MUTED)
        ax.tick_params(colors=_INK, labelsize=8.5)
        ax.grid(True, axis="y", color="#e3e6ea", lw=0.8)
        ax.set_axisbelow(True)
    return fig, list(axes)


def _titles(fig, title, subtitle, *, top=0.84):
    fig.text(0.02, 0.975, title, fontsize=13, fontweight="bold", color=_INK, va="top",
             gid="congest-title")
    if subtitle:
        fig.text(0.02, 0.915, subtitle, fontsize=9, color=_MUTED, va="top",
                 gid="congest-subtitle")
    fig.subplots_adjust(top=top)


def _tidy_log_y(ax):
    """Plain tick labels on a log axis (0.03, 1e-05); minor labels only on short spans."""
    from matplotlib.ticker import FuncFormatter, NullFormatter

    lo, hi = ax.get_ylim()
    plain = FuncFormatter(lambda v, _: f"{v:g}")

    def two_and_five(v, _):
        mantissa = round(v / 10.0 ** math.floor(math.log10(v)), 6) if v > 0 else 0
        return f"{v:g}" if mantissa in (2.0, 5.0) else ""

    ax.yaxis.set_major_formatter(plain)
    short = lo > 0 and hi / lo < 30
    ax.yaxis.set_minor_formatter(FuncFormatter(two_and_five) if short else NullFormatter())
    ax.tick_params(axis="y", which="minor", labelsize=7.5)


def _label(ax, xlabel, ylabel):
    ax.set_xlabel(xlabel, fontsize=9, color=_INK)
    ax.set_ylabel(ylabel, fontsize=9, color=_INK)


# ------------------------------------------------------------------ convergence
def _histories(results):
    """(label, history dict) pairs from Equilibria, a sequence or a mapping."""
    if hasattr(results, "history"):
        results = [results]
    if isinstance(results, dict):
        items = list(results.items())
    else:
        items = []
        for res in results:
            label = getattr(res, "method", "result")
            if getattr(res, "objective", None) is not None:
                label = f"{label} ({res.objective.upper()})"
            items.append((label, res))
    out = []
    for label, res in items:
        hist = res.history if hasattr(res, "history") else res
        out.append((str(label), {k: np.asarray(v, dtype=np.float64)
                                 for k, v in dict(hist).items()}))
    return out


def convergence_chart(results, *, tol=None, title="Convergence", figsize=(11.0, 4.6)):
    """Relative gap against iteration and against time, one line per method.

    Parameters
    ----------
    results : Equilibrium, sequence of Equilibrium, or mapping of str to Equilibrium
        Each needs a ``history`` with ``relative_gap`` and ``iteration`` and/or
        ``wall_time`` (seconds); a mapping may also hold such history dicts directly.
        Sequence entries are labelled "method (objective)".
    tol : float, optional
        Gap target drawn as a horizontal line.
    title : str, default "Convergence"
    figsize : (float, float), default (11, 4.6)

    Returns
    -------
    matplotlib.figure.Figure
        Two axes (iteration, seconds), log-scaled gap, one ``Line2D`` per method in each,
        labelled by method.
    """
    items = _histories(results)
    if not items:
        raise ValueError("convergence_chart needs at least one result")
    fig, (ax_it, ax_t) = _new_figure(figsize, n_cols=2)
    floor = None
    ends = {"iteration": [], "wall_time": []}
    for k, (label, hist) in enumerate(items):
        gap = hist.get("relative_gap")
        if gap is None or gap.size == 0:
            continue
        shown = np.where(gap > 0, gap, np.nan)
        if np.isfinite(shown).any():
            lo = float(np.nanmin(shown))
            floor = lo if floor is None else min(floor, lo)
        style = {"color": PALETTE[k % len(PALETTE)], "ls": _STYLES[(k // 2) % len(_STYLES)],
                 "lw": 1.5 if gap.size < 300 else 1.0, "label": label}
        iters = hist.get("iteration", np.arange(1, gap.size + 1, dtype=np.float64))
        ax_it.plot(iters, shown, **style)
        ends["iteration"].append(float(np.max(iters)))
        if "wall_time" in hist:
            ax_t.plot(hist["wall_time"], shown, **style)
            ends["wall_time"].append(float(np.max(hist["wall_time"])))
    for ax, key in ((ax_it, "iteration"), (ax_t, "wall_time")):
        # runs of very different lengths: a log axis keeps the short ones visible
        span = [e for e in ends[key] if e > 0]
        if len(span) > 1 and max(span) > 20 * min(span):
            ax.set_xscale("log")
    for ax in (ax_it, ax_t):
        ax.set_yscale("log")
        if tol is not None:
            ax.axhline(tol, color=_MUTED, lw=0.9, ls=(0, (4, 3)))
            ax.text(1.0, tol, f" target {tol:.0e}", transform=ax.get_yaxis_transform(),
                    fontsize=7.5, color=_MUTED, va="bottom", ha="right")
        ax.grid(True, axis="x", color="#f0f2f4", lw=0.6)
    _tidy_log_y(ax_it)
    _tidy_log_y(ax_t)
    _label(ax_it, "Iteration" + (" (log scale)" if ax_it.get_xscale() == "log" else ""),
           "Relative gap (log scale)")
    _label(ax_t, "Time since the solve started, seconds"
           + (" (log scale)" if ax_t.get_xscale() == "log" else ""), "Relative gap (log scale)")
    ax_it.legend(fontsize=8, frameon=False, loc="upper right")
    best = f"best final gap {floor:.1e}" if floor is not None else "no gap history"
    _titles(fig, title, f"{len(items)} run(s)  ·  {best}")
    fig.subplots_adjust(left=0.07, right=0.98, bottom=0.12, wspace=0.25)
    return fig


# ----------------------------------------------------------------------- sweeps
def sweep_chart(table, *, currency="money", title="Demand sweep", figsize=(9.0, 7.0)):
    """Price of anarchy and first-best toll revenue against the demand multiplier.

    Parameters
    ----------
    table : pandas.DataFrame
        A sweep table (:attr:`congest.sweep.SweepResult.table`) with columns
        ``demand_scale``, ``price_of_anarchy`` and, if present, ``first_best_revenue``;
        when ``advice_share`` or ``toll_scale`` vary, the revenue panel draws one line per
        setting and the price-of-anarchy panel uses the first setting (it does not depend
        on them).
    currency : str, default "money"
    title : str, default "Demand sweep"
    figsize : (float, float), default (9, 7)

    Returns
    -------
    matplotlib.figure.Figure
        Two axes sharing the demand axis: price of anarchy (with the line at 1) and
        revenue in ``currency`` per period.
    """
    if "demand_scale" not in table or "price_of_anarchy" not in table:
        raise ValueError("sweep table needs demand_scale and price_of_anarchy columns")
    if table.empty:
        raise ValueError("sweep table is empty")
    keys = [c for c in ("toll_scale", "advice_share")
            if c in table and table[c].nunique() > 1]
    groups = list(table.groupby(keys, sort=True)) if keys else [((), table)]
    fig, (ax_p, ax_r) = _new_figure(figsize, n_rows=2, sharex=True)
    first = groups[0][1].sort_values("demand_scale")
    x, poa = first["demand_scale"].to_numpy(float), first["price_of_anarchy"].to_numpy(float)
    ax_p.plot(x, poa, color=PALETTE[0], lw=1.8, marker="o", ms=3.5)
    ax_p.axhline(1.0, color=_MUTED, lw=0.9, ls=(0, (4, 3)))
    ax_p.text(1.0, 1.0, "1 = selfish routing costs nothing extra ", fontsize=7.5, color=_MUTED,
              va="bottom", ha="right", transform=ax_p.get_yaxis_transform())
    ok = np.isfinite(poa)
    sub = ""
    if ok.any():
        i = int(np.nanargmax(np.where(ok, poa, -np.inf)))
        ax_p.plot([x[i]], [poa[i]], marker="o", ms=7, mfc="none", mec=PALETTE[1], mew=1.5)
        right_half = x[i] > (x.min() + x.max()) / 2
        ax_p.annotate(f"peak {poa[i]:.4f} at demand x{_fmt(x[i])}", (x[i], poa[i]),
                      xytext=(-8 if right_half else 8, 9), textcoords="offset points",
                      fontsize=8, color=_INK, va="bottom",
                      ha="right" if right_half else "left")
        sub = f"peak price of anarchy {poa[i]:.4f} at demand x{_fmt(x[i])}"
        top = float(np.nanmax(poa))
        ax_p.set_ylim(min(0.995, float(np.nanmin(poa))), 1.0 + (top - 1.0) * 1.35 + 2e-3)
    _label(ax_p, "", "Price of anarchy\n(UE / SO system cost)")
    if "first_best_revenue" in table:
        for k, (key, grp) in enumerate(groups):
            grp = grp.sort_values("demand_scale")
            key = key if isinstance(key, tuple) else (key,)
            label = ", ".join(f"{n.replace('_', ' ')} {_fmt(v)}"
                              for n, v in zip(keys, key, strict=True))
            col = "tolled_revenue" if "toll_scale" in keys and "tolled_revenue" in grp \
                else "first_best_revenue"
            ax_r.plot(grp["demand_scale"], grp[col], color=PALETTE[k % len(PALETTE)],
                      lw=1.8, marker="o", ms=3.5, label=label or "marginal-cost tolls")
        ax_r.legend(fontsize=8, frameon=False, loc="upper left")
        from matplotlib.ticker import FuncFormatter

        ax_r.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:,.0f}"))
    else:
        ax_r.text(0.5, 0.5, "no revenue column in the sweep table", ha="center",
                  transform=ax_r.transAxes, color=_MUTED)
    _label(ax_r, "Demand multiplier (1 = base demand)",
           f"Toll revenue,\n{currency} per period")
    _titles(fig, title, f"{len(table)} points  ·  {sub}", top=0.87)
    fig.subplots_adjust(left=0.13, right=0.97, bottom=0.09, hspace=0.12)
    return fig


# ---------------------------------------------------------------------- learning
def _spread(ax, frame, x, column, color, label):
    """Median line and 10-90% band over replications (a plain line for one run)."""
    frame = frame[np.isfinite(frame[column].to_numpy(dtype=float))]
    if "replication" in frame and frame["replication"].nunique() > 1:
        grouped = frame.groupby(x)[column]
        mid = grouped.median()
        lo, hi = grouped.quantile(0.1), grouped.quantile(0.9)
        ax.fill_between(mid.index, lo.to_numpy(), hi.to_numpy(), color=color, alpha=0.18,
                        lw=0)
        ax.plot(mid.index, mid.to_numpy(), color=color, lw=1.6, label=label)
        return frame["replication"].nunique()
    ax.plot(frame[x], frame[column], color=color, lw=1.4, label=label)
    return 1


def _route_labels(shares):
    """One label per route: "route 1" (numbers from 0 shown from 1) or the route's own
    name, prefixed by "origin→destination" when several OD pairs are tracked."""
    shares = shares.copy()
    import pandas as pd

    route = shares["route"]
    name = ("route " + (route + 1).astype(str) if pd.api.types.is_integer_dtype(route)
            else route.astype(str))
    if {"origin", "destination"} <= set(shares) and \
            shares[["origin", "destination"]].drop_duplicates().shape[0] > 1:
        name = (shares["origin"].astype(str) + "\u2192" + shares["destination"].astype(str)
                + " " + name)
    shares["label"] = name
    return shares


def learning_chart(days, *, ue_total=None, route_shares=None, title="Day-to-day learning",
                   max_routes=8, figsize=(10.0, 8.5)):
    """Total travel time, relative gap and route shares day by day.

    Parameters
    ----------
    days : LearningResult or pandas.DataFrame
        A :class:`congest.learning.LearningResult` (its ``days`` and ``route_shares``
        are used), or one row per day (and replication): ``day``,
        ``total_vehicle_hours`` (or ``total_travel_time`` in vehicle-minutes) and
        ``relative_gap``; with a
        ``replication`` column the spread across replications is drawn as the median
        and a 10-90% band.
    ue_total : float, optional
        Total travel time at user equilibrium (vehicle-minutes), a reference line.
    route_shares : pandas.DataFrame, optional
        Columns ``day``, ``route`` and ``share`` (0..1), optional ``replication``,
        ``origin``, ``destination``; one line per route.
    title : str, default "Day-to-day learning"
    max_routes : int, default 8
        Route-share lines drawn at most (the routes with the largest mean share).
    figsize : (float, float), default (10, 8.5)

    Returns
    -------
    matplotlib.figure.Figure
        Two or three stacked axes sharing the day axis.
    """
    if hasattr(days, "days") and hasattr(days, "summary"):
        if route_shares is None:
            route_shares = days.route_shares
        days = days.days
    for col in ("day", "relative_gap"):
        if col not in days:
            raise ValueError(f"learning table needs a {col!r} column")
    if "total_vehicle_hours" not in days and "total_travel_time" not in days:
        raise ValueError("learning table needs a 'total_vehicle_hours' or "
                         "'total_travel_time' column")
    n_rows = 3 if route_shares is not None and len(route_shares) else 2
    fig, axes = _new_figure(figsize, n_rows=n_rows, sharex=True)
    frame = days.copy()
    frame["vehicle_hours"] = (frame["total_vehicle_hours"] if "total_vehicle_hours" in frame
                              else frame["total_travel_time"] / 60.0)
    n_rep = _spread(axes[0], frame, "day", "vehicle_hours", PALETTE[0],
                    "simulated" + (" (median, 10-90% band)" if "replication" in frame
                                   and frame["replication"].nunique() > 1 else ""))
    if ue_total is not None:
        axes[0].axhline(ue_total / 60.0, color=PALETTE[1], lw=1.0, ls=(0, (4, 3)),
                        label="user equilibrium")
    axes[0].legend(fontsize=8, frameon=False, loc="upper right")
    _label(axes[0], "", "Total travel time,\nvehicle-hours")
    frame["gap_shown"] = frame["relative_gap"].where(frame["relative_gap"] > 0)
    _spread(axes[1], frame, "day", "gap_shown", PALETTE[2], "relative gap")
    axes[1].set_yscale("log")
    _tidy_log_y(axes[1])
    _label(axes[1], "", "Relative gap of the\nday's flows (log)")
    if n_rows == 3:
        shares = _route_labels(route_shares)
        keep = (shares.groupby("label")["share"].mean().sort_values(ascending=False)
                .index[:max_routes])
        for k, label in enumerate(sorted(keep)):
            _spread(axes[2], shares[shares["label"] == label], "day", "share",
                    PALETTE[k % len(PALETTE)], label)
        axes[2].set_ylim(-0.02, 1.02)
        axes[2].legend(fontsize=7.5, frameon=False, loc="best", ncol=min(4, len(keep)))
        _label(axes[2], "", "Route share of\nthe OD pair's trips")
    _label(axes[-1], "Day", axes[-1].get_ylabel())
    last = frame[frame["day"] == frame["day"].max()]
    final = float(np.nanmedian(last["relative_gap"])) if last["relative_gap"].notna().any() \
        else float("nan")
    sub = (f"{int(frame['day'].max())} days  ·  {n_rep} replication(s)  ·  final relative "
           f"gap {final:.1e}" + (" (median)" if n_rep > 1 else ""))
    if n_rows == 3 and {"origin", "destination"} <= set(route_shares):
        pairs = route_shares[["origin", "destination"]].drop_duplicates()
        if len(pairs) == 1:
            o, d = pairs.iloc[0]
            sub += f"  ·  route shares from zone {o} to zone {d}"
    _titles(fig, title, sub, top=0.88)
    fig.subplots_adjust(left=0.12, right=0.97, bottom=0.07, hspace=0.12)
    return fig


# --------------------------------------------------------------------- scenarios
#: Comparison columns drawn by :func:`scenario_chart` by default, with their labels.
SCENARIO_METRICS = {
    "vehicle_hours": "Vehicle-hours",
    "mean_trip_time_min": "Mean trip time, min",
    "vehicle_distance": "Vehicle-distance",
    "system_cost_hours": "System cost, veh-h",
    "max_volume_capacity": "Highest volume/capacity",
    "links_over_capacity": "Links over capacity",
}

#: Bars taller than this percentage of the baseline are cut at it (value still written).
SCENARIO_CAP = 250.0


def _same_bars(a, b):
    """True when two rows of percentages would draw the same bars (NaN where NaN)."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    if not np.array_equal(np.isnan(a), np.isnan(b)):
        return False
    ok = ~np.isnan(a)
    return bool(ok.any()) and bool(np.allclose(a[ok], b[ok], rtol=1e-6, atol=1e-9))


def _drop_repeats(index, metrics):
    """Measures left after dropping those whose bars equal an earlier measure's.

    Returns the kept mapping and, for each kept label, the labels it stands for.
    """
    kept, repeats = {}, {}
    for col, label in metrics.items():
        twin = next((c for c in kept if _same_bars(index[col], index[c])), None)
        if twin is None:
            kept[col] = label
        else:
            repeats.setdefault(kept[twin], []).append(label)
    return kept, repeats


def _scenario_key(ax, names):
    """Colour swatches in front of the scenario names on ``ax``'s y axis."""
    from matplotlib.transforms import ScaledTranslation, blended_transform_factory

    ax.tick_params(axis="y", length=0, pad=15)
    shift = ScaledTranslation(-7 / 72, 0, ax.figure.dpi_scale_trans)
    at = blended_transform_factory(ax.transAxes, ax.transData) + shift
    for k in range(len(names)):
        ax.plot([0], [k], marker="s", ms=7, color=PALETTE[k % len(PALETTE)], ls="none",
                transform=at, clip_on=False, gid="congest-scenario-swatch")


def scenario_chart(table, *, metrics=None, baseline=None, scenario_column=None,
                   currency=None, title="Scenarios compared", cap=SCENARIO_CAP,
                   figsize=(11.0, 5.8)):
    """Grouped bar chart of a scenario comparison table, indexed to a baseline, and the
    toll revenue of each scenario beside it.

    Each group of the main panel is one measure; each bar one scenario, its height the
    measure as a percentage of the baseline scenario (so measures in different units
    share one axis); the actual value is written on the bar. When some scenario raises
    toll revenue (a ``revenue_money`` column), a second panel shows every scenario's
    revenue in money, which a percentage of an untolled baseline cannot show.

    Parameters
    ----------
    table : pandas.DataFrame
        One row per scenario, e.g. ``congest.scenarios.compare(...).table``. Scenario
        names come from a ``label`` column if present, else ``scenario_column``, else
        the index.
    metrics : mapping of column to label, or sequence of column names, optional
        Default: those of :data:`SCENARIO_METRICS` present in the table, leaving out
        any whose bars would repeat an earlier one's exactly (mean trip time when every
        scenario carries the same trips; system cost when the network has no fixed
        charges, where it equals vehicle-hours); a footnote names what was left out.
        Measures given here are all drawn.
    baseline : str, optional
        Scenario = 100 (default: user equilibrium if present, else the first row).
    scenario_column : str, optional
        Column holding scenario names.
    currency : str, optional
        Currency of the revenue panel (default: ``table.attrs["currency"]``, else
        "money").
    title : str, default "Scenarios compared"
    cap : float, default 250
        Bars above ``cap`` percent are cut at it and marked with a notch (their value is
        still written), so one extreme scenario does not flatten the others.
    figsize : (float, float), default (11, 5.8)

    Returns
    -------
    matplotlib.figure.Figure
        ``axes[0]`` holds one BarContainer per scenario, labelled with the scenario's
        name; ``axes[1]``, when drawn, one horizontal bar of revenue per scenario with
        the scenario names (and their colours) as its key.
    """
    frame = table.copy()
    if scenario_column is None:
        scenario_column = next((c for c in ("label", "scenario") if c in frame), None)
    keys = [str(i) for i in frame.index]
    if scenario_column is not None:
        frame = frame.set_index(scenario_column)
    frame.index = [str(i) for i in frame.index]
    chosen = metrics is None
    if metrics is None:
        metrics = {c: lbl for c, lbl in SCENARIO_METRICS.items() if c in frame}
        unit = getattr(table, "attrs", {}).get("length_unit")
        if "vehicle_distance" in metrics:
            if frame["vehicle_distance"].astype(float).isna().all():
                del metrics["vehicle_distance"]
            elif unit:
                metrics["vehicle_distance"] = f"Vehicle-{unit}"
    elif not isinstance(metrics, dict):
        metrics = {c: SCENARIO_METRICS.get(c, c.replace("_", " ")) for c in metrics}
    missing = [c for c in metrics if c not in frame]
    if missing:
        raise ValueError(f"comparison table has no column(s) {missing}")
    if not metrics:
        raise ValueError("no measure to draw: pass metrics=")
    names = list(frame.index)
    if baseline is None:
        ue_like = [n for n, k in zip(names, keys, strict=True)
                   if n.lower() in ("ue", "user equilibrium") or k == "user_equilibrium"]
        baseline = ue_like[0] if ue_like else names[0]
    elif baseline not in names and baseline in keys:
        baseline = names[keys.index(baseline)]
    if baseline not in names:
        raise ValueError(f"baseline {baseline!r} is not a scenario; choose from {names}")
    values = frame[list(metrics)].apply(lambda c: c.astype(float))
    base = values.loc[baseline]
    with np.errstate(divide="ignore", invalid="ignore"):
        index = 100.0 * values / base.where(base != 0)
    repeats = {}
    if chosen:
        metrics, repeats = _drop_repeats(index, metrics)
        values, index = values[list(metrics)], index[list(metrics)]
    revenue = frame["revenue_money"].astype(float) if has_revenue(frame) else None
    if revenue is None:
        fig, (ax,) = _new_figure(figsize)
    else:
        fig, (ax, rax) = _new_figure(figsize, n_cols=2, width_ratios=(3.0, 1.0))
    n_s, n_m = len(names), len(metrics)
    width = 0.8 / n_s
    centers = np.arange(n_m)
    finite = index.to_numpy()[np.isfinite(index.to_numpy())]
    tall = min(float(finite.max()) if finite.size else 100.0, cap)
    for k, name in enumerate(names):
        pos = centers - 0.4 + width * (k + 0.5)
        heights = index.loc[name].to_numpy(float)
        shown = np.minimum(np.nan_to_num(heights), cap)
        bars = ax.bar(pos, shown, width * 0.92, label=name,
                      color=PALETTE[k % len(PALETTE)], zorder=2)
        for rect, val, h in zip(bars, values.loc[name].to_numpy(float), heights,
                                strict=True):
            x_mid = rect.get_x() + rect.get_width() / 2
            if math.isfinite(h) and h > cap:  # a notch: the bar goes on beyond the axis
                ax.plot([rect.get_x(), rect.get_x() + rect.get_width()],
                        [cap * 0.96, cap * 0.985], color="white", lw=2.2, zorder=3)
            if n_s * n_m <= 60:
                label = _fmt(val) if math.isfinite(val) else "n/a"
                if math.isfinite(h) and h > cap:
                    label += f" ({h:.0f}%)"
                top = min(h, cap) if math.isfinite(h) else 0.0
                ax.text(x_mid, top + tall * 0.01, label, ha="center", va="bottom",
                        fontsize=6.5, color=_INK, rotation=90, zorder=4,
                        bbox={"boxstyle": "square,pad=0.05", "fc": "white", "ec": "none",
                              "alpha": 0.8})
    ax.axhline(100.0, color=_MUTED, lw=0.9, ls=(0, (4, 3)), zorder=3)
    import textwrap

    ax.set_xticks(centers, [textwrap.fill(lbl, 16) for lbl in metrics.values()],
                  fontsize=8.5)
    ax.set_ylim(0, tall * 1.3)
    _label(ax, "", f"Percent of {baseline} (= 100)")
    if revenue is None:
        ax.legend(fontsize=8, frameon=False, loc="upper left", bbox_to_anchor=(1.0, 1.0))
        fig.subplots_adjust(left=0.07, right=0.78, bottom=0.12 if repeats else 0.1)
    else:
        if currency is None:
            currency = getattr(table, "attrs", {}).get("currency") or "money"
        _revenue_panel(rax, names, revenue.reindex(names).to_numpy(float), currency)
        fig.subplots_adjust(left=0.07, right=0.97, bottom=0.12 if repeats else 0.1,
                            wspace=0.62)
    _titles(fig, title, f"{n_s} scenarios  ·  bars as a percentage of {baseline}; the "
            "value in the table's units is written on each bar")
    if repeats:
        notes = [f"{' and '.join(_measure(lbl) for lbl in same)}, whose bars would be "
                 f"those of {_measure(label)}" for label, same in repeats.items()]
        fig.text(0.02, 0.012, "Not drawn: " + "; ".join(notes) + ".", fontsize=7.5,
                 color=_MUTED, ha="left", va="bottom", gid="congest-footnote")
    return fig


def has_revenue(table):
    """True when some scenario of ``table`` raises toll revenue (the chart's second panel)."""
    return ("revenue_money" in table
            and bool((table["revenue_money"].astype(float).fillna(0.0) > 0).any()))


def _measure(label):
    """A measure's label inside a sentence: "Mean trip time, min" -> "mean trip time"."""
    head = label.split(",")[0].strip()
    return head[:1].lower() + head[1:] if head[1:2].islower() else head


def _revenue_panel(ax, names, revenue, currency):
    """Horizontal bars of each scenario's toll revenue, first scenario on top."""
    from matplotlib.ticker import FuncFormatter, MaxNLocator

    ys = np.arange(len(names))
    amount = np.nan_to_num(revenue)
    ax.barh(ys, amount, 0.62, color=[PALETTE[k % len(PALETTE)] for k in ys], zorder=2)
    top = float(amount.max())
    for y, val in zip(ys, revenue, strict=True):
        text = _fmt(val) if math.isfinite(val) else "n/a"
        ax.text((val if math.isfinite(val) else 0.0) + top * 0.03, y, text, va="center",
                ha="left", fontsize=7.5, color=_INK)
    ax.set_yticks(ys, names, fontsize=8)
    ax.set_ylim(len(names) - 0.5, -0.5)
    ax.set_xlim(0, top * 1.45)
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:,.0f}"))
    ax.xaxis.set_major_locator(MaxNLocator(3))
    ax.grid(False, axis="y")
    ax.grid(True, axis="x", color="#e3e6ea", lw=0.8)
    ax.spines["left"].set_visible(False)
    ax.set_title(f"Toll revenue, {currency} per period", fontsize=9, color=_INK,
                 loc="left")
    _scenario_key(ax, names)
