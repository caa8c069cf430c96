"""Report charts: pandas data in, a vector SVG ``data:`` URI out.

Every function here only draws what it is given. Values arrive already converted to the
display units and every axis label arrives as an argument (for example
``ylabel="Cumulative cost [EUR]"``), so the charts never convert units or guess them.

The URIs are embedded in the HTML/PDF report (``<img src="data:image/svg+xml;base64,...">``):
vector output, no file access, and weasyprint's data-only fetcher accepts them.

Design notes
------------
* Figures are built with :class:`matplotlib.figure.Figure` and rendered by matplotlib's own
  SVG backend, never through ``pyplot``: no GUI backend is touched, no global figure
  registry fills up, and a caller's own backend choice (``Agg`` or a notebook's) is left
  alone. Rasterising is never involved, so the Agg backend is the implicit one.
* Output is byte-stable for equal input: ``svg.hashsalt`` is fixed and the SVG date
  metadata is dropped.
* Text stays text (``svg.fonttype = "none"``): the PDF renders it with its own DejaVu fonts,
  so chart labels can be searched and copied, and the PDF renders faster.
* Text that can come from a user's scenario (truck names, cost lines, input names) is
  escaped for matplotlib's mathtext, so a ``$`` in a name prints as a dollar sign instead
  of failing or being typeset as a formula.
* Colours: the Okabe–Ito colour-blind-safe palette (Okabe & Ito 2008). Trucks take
  colours in the order they are given, so the caller keeps trucks in one order across
  charts to keep one colour per truck.

References
----------
Okabe, M. and Ito, K. (2008). "Color Universal Design (CUD): How to make figures and
presentations that are friendly to colorblind people." https://jfly.uni-koeln.de/color/
"""
from __future__ import annotations

import base64
import contextlib
import io
import math
import os
import tempfile
import warnings
from contextlib import contextmanager
from functools import lru_cache
from pathlib import Path

import matplotlib
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.patches import Patch
from matplotlib.ticker import FuncFormatter, MaxNLocator

from tco.report import formatting as fm

__all__ = [
    "PALETTE",
    "cumulative_cost",
    "stacked_yearly_cost",
    "energy_components",
    "duty_cycle",
    "emissions_by_scope",
    "tornado",
    "distribution",
    "equation",
    "svg_data_uri",
]

#: Okabe–Ito palette (Okabe & Ito 2008), black left out (kept for reference lines).
PALETTE = (
    "#0072B2",  # blue
    "#D55E00",  # vermillion
    "#009E73",  # bluish green
    "#E69F00",  # orange
    "#56B4E9",  # sky blue
    "#CC79A7",  # reddish purple
    "#F0E442",  # yellow
    "#7F7F7F",  # grey (extension for an eighth series)
)
INK = "#222222"
_GRID = "#D9D9D9"

#: Width of the report's text column. [inch] (A4 with 18 mm margins: 174 mm ≈ 6.85 in)
_WIDTH = 6.7

#: Fonts tried, in order, for characters DejaVu Sans lacks (emoji, scripts of names); only
#: those installed are used (matplotlib 3.6+ falls back glyph by glyph).
FALLBACK_FONTS = ("Noto Sans", "Noto Sans Hebrew", "Noto Sans Arabic", "Noto Sans CJK JP",
                  "Noto Color Emoji", "Noto Emoji", "Symbola", "OpenSymbol")


@lru_cache(maxsize=1)
def font_families() -> list[str]:
    """DejaVu Sans, then every installed font of :data:`FALLBACK_FONTS`."""
    from matplotlib import font_manager

    fm = font_manager.fontManager
    installed = {f.name for f in fm.ttflist}
    if not set(FALLBACK_FONTS) <= installed:
        # matplotlib's font cache is written once; a font installed after it (e.g. the
        # fonts-symbola package) is found by adding the system's font files it lacks
        known = {f.fname for f in fm.ttflist}
        for path in font_manager.findSystemFonts():
            if path not in known:
                try:
                    fm.addfont(path)
                except (OSError, RuntimeError, ValueError):
                    continue  # an unreadable font file: skipped
        installed = {f.name for f in fm.ttflist}
    return ["DejaVu Sans"] + [f for f in FALLBACK_FONTS if f in installed]


# A character no installed font has is drawn as a box in the chart (the SVG keeps the text
# itself, so the report's own fonts may still show it); matplotlib's warning per glyph
# would only flood the terminal, even with --quiet.
warnings.filterwarnings("ignore", message=r"Glyph \d+ .*missing from (current )?font",
                        category=UserWarning)

_RC = {
    "svg.hashsalt": "tco-report",
    "svg.fonttype": "none",
    "font.family": "DejaVu Sans",
    "font.size": 8.5,
    "axes.titlesize": 9,
    "axes.labelsize": 8.5,
    "xtick.labelsize": 8,
    "ytick.labelsize": 8,
    "legend.fontsize": 8,
    "axes.edgecolor": "#555555",
    "axes.labelcolor": INK,
    "xtick.color": "#444444",
    "ytick.color": "#444444",
    "axes.linewidth": 0.6,
    "xtick.major.width": 0.6,
    "ytick.major.width": 0.6,
    "lines.linewidth": 1.6,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.axisbelow": True,
    "grid.color": _GRID,
    "grid.linewidth": 0.5,
    "legend.frameon": False,
    "figure.dpi": 100,
    "text.usetex": False,
}


@contextmanager
def chart_style():
    with matplotlib.rc_context({**_RC, "font.family": font_families()}):
        yield


def new_figure(height: float, nrows: int = 1, ncols: int = 1, **kw):
    fig = Figure(figsize=(_WIDTH, height), layout="constrained")
    axes = fig.subplots(nrows, ncols, squeeze=False, **kw)
    return fig, axes


def svg_data_uri(fig: Figure) -> str:
    """Render a figure as a base64 SVG ``data:`` URI.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure to render (drawn by matplotlib's SVG backend).

    Returns
    -------
    str
        ``"data:image/svg+xml;base64,..."``.
    """
    buf = io.BytesIO()
    # Date metadata dropped and hash salt fixed: equal input gives equal bytes.
    fig.savefig(buf, format="svg", metadata={"Date": None})
    return "data:image/svg+xml;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def plain_text(text) -> str:
    """Text from data shown literally: mathtext's ``$`` escaped."""
    return str(text).replace("$", r"\$")


#: Tick labels: the report layer's one formatter (tco.report.formatting).
compact_number = fm.compact_number


def _truck_colors(names) -> dict:
    return {name: PALETTE[i % len(PALETTE)] for i, name in enumerate(names)}


def _row_major(items: list, ncol: int) -> list:
    """Reorder legend entries so they read left to right, row by row.

    matplotlib fills a legend column by column, splitting entries like
    ``numpy.array_split`` (the first ``n % ncol`` columns one longer).
    """
    n = len(items)
    if ncol <= 1 or n <= ncol:
        return items
    sizes = [len(a) for a in np.array_split(np.arange(n), ncol)]
    columns = [[] for _ in sizes]
    k = 0
    for row in range(max(sizes)):
        for c, size in enumerate(sizes):
            if row < size:
                columns[c].append(items[k])
                k += 1
    return [item for col in columns for item in col]


def legend_below(fig: Figure, ax, ncol: int | None = None, last: str | None = None):
    handles, labels = ax.get_legend_handles_labels()
    if not handles:
        return
    pairs = list(zip(handles, labels))
    if last is not None:
        pairs = [p for p in pairs if p[1] != last] + [p for p in pairs if p[1] == last]
    ncol = ncol or min(len(pairs), 4)
    pairs = _row_major(pairs, ncol)
    fig.legend([h for h, _ in pairs], [lab for _, lab in pairs], loc="outside lower center",
               ncol=ncol, handlelength=1.6, columnspacing=1.4)


def _require(df: pd.DataFrame, columns, what: str):
    missing = [c for c in columns if c not in df.columns]
    if missing:
        raise ValueError(f"{what}: missing column(s) {missing}; has {list(df.columns)}")


# --------------------------------------------------------------------------------------
def cumulative_cost(df_years_by_truck: pd.DataFrame, breakeven_year: float | None = None, *,
                    ylabel: str, xlabel: str = "Year",
                    breakeven_label: str | None = None) -> str:
    """Cumulative cost of each truck over the years, with the break-even point marked.

    Parameters
    ----------
    df_years_by_truck : pandas.DataFrame
        Index: year (0 = purchase). One column per truck, values the cumulative cost
        up to the end of that year, in display money. [currency]
    breakeven_year : float, optional
        Year at which the cumulative costs of the first two trucks cross, as computed by
        the cost model; ``None`` when they do not cross. [yr]
    ylabel, xlabel : str
        Axis labels with units, e.g. ``"Cumulative cost [EUR]"``.
    breakeven_label : str, optional
        Text beside the break-even marker (default ``"Break-even: year 4.7"``).

    Returns
    -------
    str
        SVG ``data:`` URI.

    Notes
    -----
    The marker's height is read off the first truck's line by linear interpolation
    between yearly points, which is how the lines themselves are drawn.
    """
    if df_years_by_truck.empty:
        raise ValueError("cumulative_cost: no data")
    with chart_style():
        fig, axes = new_figure(3.1)
        ax = axes[0, 0]
        x = np.asarray(df_years_by_truck.index, dtype=float)
        colors = _truck_colors(df_years_by_truck.columns)
        for name in df_years_by_truck.columns:
            ax.plot(x, df_years_by_truck[name].to_numpy(float), marker="o", markersize=2.8,
                    color=colors[name], label=plain_text(name))
        if breakeven_year is not None and np.isfinite(breakeven_year):
            first = df_years_by_truck.iloc[:, 0].to_numpy(float)
            y = float(np.interp(breakeven_year, x, first))
            ax.axvline(breakeven_year, color=INK, linewidth=0.7, linestyle=(0, (3, 2)))
            ax.plot([breakeven_year], [y], marker="D", markersize=6, color=INK, zorder=5,
                    linestyle="none")
            text = breakeven_label or f"Break-even: year {fm.number(breakeven_year, 1)}"
            ax.annotate(plain_text(text), (breakeven_year, y), xytext=(-8, 10),
                        textcoords="offset points", fontsize=8, color=INK, ha="right",
                        bbox={"boxstyle": "round,pad=0.25", "fc": "white", "ec": "none",
                              "alpha": 0.9})
        ax.set_xlabel(plain_text(xlabel))
        ax.set_ylabel(plain_text(ylabel))
        ax.yaxis.set_major_formatter(FuncFormatter(compact_number))
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
        ax.set_xlim(x.min(), x.max())
        legend_below(fig, ax)
        return svg_data_uri(fig)


def stacked_yearly_cost(tidy_cashflow: pd.DataFrame, truck, *, ylabel: str,
                        xlabel: str = "Year", truck_col: str = "truck", year_col: str = "year",
                        line_col: str = "line", value_col: str = "value",
                        net_label: str = "Net") -> str:
    """Yearly cost stacked by cost line, with the net per year; one panel per truck.

    Positive lines (costs) stack upward, negative lines (resale value, credits) stack
    downward; a black bar marks each year's net total. Each cost line keeps one colour
    across trucks and calls: colours follow the order in which lines first appear in the
    whole ``tidy_cashflow`` table, not only in the rows of the truck drawn.

    Parameters
    ----------
    tidy_cashflow : pandas.DataFrame
        Long table with columns ``truck``, ``year``, ``line``, ``value``; value is the
        cost in that year in display money (costs positive, income negative). [currency]
    truck : str or list of str
        Truck to draw, or several trucks side by side on a shared scale.
    ylabel, xlabel : str
        Axis labels with units.
    truck_col, year_col, line_col, value_col : str
        Column names, if the caller's differ.
    net_label : str
        Legend text of the net marker.

    Returns
    -------
    str
        SVG ``data:`` URI.
    """
    _require(tidy_cashflow, [truck_col, year_col, line_col, value_col], "stacked_yearly_cost")
    trucks = [truck] if isinstance(truck, str) else list(truck)
    all_lines = list(dict.fromkeys(tidy_cashflow[line_col]))
    colors = {line: PALETTE[i % len(PALETTE)] for i, line in enumerate(all_lines)}
    subs = []
    for name in trucks:
        sub = tidy_cashflow[tidy_cashflow[truck_col] == name]
        if sub.empty:
            raise ValueError(f"stacked_yearly_cost: no rows for truck {name!r}")
        subs.append(sub)
    with chart_style():
        fig, axes = new_figure(3.0, ncols=len(trucks), sharey=True)
        seen: dict = {}
        for ax, name, sub in zip(axes[0], trucks, subs):
            lines = [ln for ln in all_lines if ln in set(sub[line_col])]
            wide = (sub.pivot_table(index=year_col, columns=line_col, values=value_col,
                                    aggfunc="sum").reindex(columns=lines).fillna(0.0)
                    .sort_index())
            x = np.asarray(wide.index, dtype=float)
            pos_base = np.zeros(len(x))
            neg_base = np.zeros(len(x))
            for line in lines:
                v = wide[line].to_numpy(float)
                pos, neg = np.clip(v, 0, None), np.clip(v, None, 0)
                # only non-zero segments are drawn: most lines fall in one or two years
                for part, base in ((pos, pos_base), (neg, neg_base)):
                    nz = part != 0
                    if nz.any():
                        ax.bar(x[nz], part[nz], bottom=base[nz], width=0.72,
                               color=colors[line], linewidth=0)
                        seen.setdefault(line, Patch(color=colors[line], linewidth=0))
                pos_base += pos
                neg_base += neg
            net = wide.sum(axis=1).to_numpy(float)
            marker = ax.plot(x, net, linestyle="none", marker="_", markersize=9,
                             markeredgewidth=2, color=INK)[0]
            ax.axhline(0, color="#555555", linewidth=0.6)
            ax.set_xlabel(plain_text(xlabel))
            ax.yaxis.set_major_formatter(FuncFormatter(compact_number))
            ax.xaxis.set_major_locator(MaxNLocator(integer=True))
            ax.grid(axis="x", visible=False)
            if len(trucks) > 1:
                ax.set_title(plain_text(name), loc="left", fontsize=8.5, color=INK)
        axes[0, 0].set_ylabel(plain_text(ylabel))
        order = [ln for ln in all_lines if ln in seen]
        handles = [seen[ln] for ln in order] + [marker]
        labels = [plain_text(ln) for ln in order] + [plain_text(net_label)]
        ncol = min(len(labels), 4)
        pairs = _row_major(list(zip(handles, labels)), ncol)
        fig.legend([h for h, _ in pairs], [lab for _, lab in pairs],
                   loc="outside lower center", ncol=ncol, handlelength=1.6,
                   columnspacing=1.4)
        return svg_data_uri(fig)


def energy_components(per_km_by_truck: pd.DataFrame, *, xlabel: str,
                      net_label: str = "Net at the source") -> str:
    """Energy per distance split by road-load component, one horizontal bar per truck.

    Parameters
    ----------
    per_km_by_truck : pandas.DataFrame
        Rows: components (rolling resistance, aerodynamic drag, grade, inertia,
        auxiliaries, drivetrain losses, recovered braking energy ...); columns: trucks.
        Values in display units, e.g. kWh/km; recovered energy negative. [kWh/km]
    xlabel : str
        Axis label with unit, e.g. ``"Energy per distance [kWh/km]"``.
    net_label : str
        Legend text of the net marker (sum of all components).

    Returns
    -------
    str
        SVG ``data:`` URI.
    """
    if per_km_by_truck.empty:
        raise ValueError("energy_components: no data")
    trucks = list(per_km_by_truck.columns)
    with chart_style():
        fig, axes = new_figure(0.9 + 0.55 * len(trucks)
                               + 0.25 * math.ceil(len(per_km_by_truck) / 4))
        ax = axes[0, 0]
        y = np.arange(len(trucks))[::-1].astype(float)
        pos_base = np.zeros(len(trucks))
        neg_base = np.zeros(len(trucks))
        for i, comp in enumerate(per_km_by_truck.index):
            v = per_km_by_truck.loc[comp].to_numpy(float)
            pos, neg = np.clip(v, 0, None), np.clip(v, None, 0)
            color = PALETTE[i % len(PALETTE)]
            ax.barh(y, pos, left=pos_base, height=0.6, color=color, label=plain_text(comp),
                    linewidth=0)
            if np.any(neg < 0):
                ax.barh(y, neg, left=neg_base, height=0.6, color=color, linewidth=0,
                        hatch="////", edgecolor="white")
            pos_base += pos
            neg_base += neg
        net = per_km_by_truck.sum(axis=0).to_numpy(float)
        ax.plot(net, y, linestyle="none", marker="|", markersize=16, markeredgewidth=2.2,
                color=INK, label=plain_text(net_label))
        ax.axvline(0, color="#555555", linewidth=0.6)
        ax.set_yticks(y, [plain_text(t) for t in trucks])
        ax.set_xlabel(plain_text(xlabel))
        ax.grid(axis="y", visible=False)
        ax.tick_params(axis="y", length=0)
        legend_below(fig, ax, ncol=3, last=plain_text(net_label))
        return svg_data_uri(fig)


def _envelope(x: np.ndarray, y: np.ndarray, max_points: int):
    """Thin a long series for drawing, keeping each bin's minimum and maximum.

    Written here because no kept library offers min/max decimation; plain striding
    would drop the power peaks the chart is meant to show. Returns at most
    ``max_points + 2`` points (two per bin, plus the first and last sample); NaN samples
    are skipped.
    """
    n = len(x)
    if n <= max_points:
        return x, y
    bins = max(max_points // 2, 1)
    edges = np.linspace(0, n, bins + 1).astype(int)
    keep = [0, n - 1]
    for a, b in zip(edges[:-1], edges[1:]):
        seg = y[a:b]
        finite = np.flatnonzero(np.isfinite(seg))
        if finite.size:
            keep.append(a + finite[np.argmin(seg[finite])])
            keep.append(a + finite[np.argmax(seg[finite])])
    order = np.unique(np.array(keep))
    return x[order], y[order]


def duty_cycle(trace: pd.DataFrame, *, x: str = "time", xlabel: str,
               labels: dict[str, str], max_points: int = 1500) -> str:
    """The duty cycle as stacked panels sharing the x axis.

    Panels, top to bottom: speed, elevation, battery state of charge (only when the trace
    has an ``soc`` column) and power at the wheels or battery.

    Parameters
    ----------
    trace : pandas.DataFrame
        Columns ``x`` (time or distance), ``speed``, ``elevation``, ``power`` and optional
        ``soc``, each in display units (e.g. min, km/h, m, %, kW).
    x : str
        Name of the column on the horizontal axis.
    xlabel : str
        Horizontal axis label with unit, e.g. ``"Time [min]"``.
    labels : dict of str
        Vertical axis label for each panel column, e.g.
        ``{"speed": "Speed [km/h]", "elevation": "Elevation [m]", "soc": "State of
        charge [%]", "power": "Power [kW]"}``.
    max_points : int
        Longest series drawn per panel; longer traces are thinned keeping each bin's
        minimum and maximum, so peaks survive (1 500 points on a 6.7 in wide chart is
        finer than print resolution needs). [-]

    Returns
    -------
    str
        SVG ``data:`` URI.
    """
    panels = ["speed", "elevation"] + (["soc"] if "soc" in trace.columns else []) + ["power"]
    _require(trace, [x] + panels, "duty_cycle")
    missing = [p for p in panels if p not in labels]
    if missing:
        raise ValueError(f"duty_cycle: no axis label for {missing}")
    x_all = trace[x].to_numpy(float)
    # Each panel thinned on its own: panels share the x axis, not the sample positions.
    series = [_envelope(x_all, trace[p].to_numpy(float), max_points) for p in panels]
    colors = {"speed": PALETTE[0], "elevation": "#8C6D46", "soc": PALETTE[2],
              "power": PALETTE[1]}
    with chart_style():
        fig, axes = new_figure(1.0 * len(panels) + 0.4, nrows=len(panels), sharex=True)
        for ax, name, (xs, y) in zip(axes[:, 0], panels, series):
            if name == "elevation":
                ax.fill_between(xs, y, np.nanmin(y), color=colors[name], alpha=0.25,
                                linewidth=0)
                ax.plot(xs, y, color=colors[name], linewidth=1.0)
            elif name == "power":
                ax.fill_between(xs, y, 0, where=y >= 0, color=colors[name], alpha=0.8,
                                linewidth=0, interpolate=True)
                ax.fill_between(xs, y, 0, where=y < 0, color=PALETTE[4], alpha=0.9,
                                linewidth=0, interpolate=True)
                ax.axhline(0, color="#555555", linewidth=0.5)
            else:
                ax.plot(xs, y, color=colors[name], linewidth=0.9)
            # Horizontal panel titles read better than rotated labels on short panels.
            ax.set_title(plain_text(labels[name]), loc="left", fontsize=8, color=INK, pad=3)
            ax.yaxis.set_major_locator(MaxNLocator(4))
            ax.yaxis.set_major_formatter(FuncFormatter(compact_number))
        axes[-1, 0].set_xlabel(plain_text(xlabel))
        axes[-1, 0].set_xlim(np.nanmin(x_all), np.nanmax(x_all))
        return svg_data_uri(fig)


def emissions_by_scope(tidy: pd.DataFrame, *, ylabel: str, xlabel: str = "Year",
                       truck_col: str = "truck", year_col: str = "year",
                       scope_col: str = "scope", value_col: str = "value") -> str:
    """Emissions per year stacked by scope, one panel per truck on a shared scale.

    Parameters
    ----------
    tidy : pandas.DataFrame
        Long table with columns ``truck``, ``year``, ``scope``, ``value``; value is the
        emissions in that year in display units, e.g. t CO2e. [t]
    ylabel, xlabel : str
        Axis labels with units, e.g. ``"Emissions [t CO₂e per year]"``.
    truck_col, year_col, scope_col, value_col : str
        Column names, if the caller's differ.

    Returns
    -------
    str
        SVG ``data:`` URI.
    """
    _require(tidy, [truck_col, year_col, scope_col, value_col], "emissions_by_scope")
    if tidy.empty:
        raise ValueError("emissions_by_scope: no data")
    trucks = list(dict.fromkeys(tidy[truck_col]))
    scopes = list(dict.fromkeys(tidy[scope_col]))
    with chart_style():
        fig, axes = new_figure(2.9, ncols=len(trucks), sharey=True)
        for ax, truck in zip(axes[0], trucks):
            sub = tidy[tidy[truck_col] == truck]
            wide = sub.pivot_table(index=year_col, columns=scope_col, values=value_col,
                                   aggfunc="sum").reindex(columns=scopes).fillna(0.0)
            x = np.asarray(wide.index, dtype=float)
            base = np.zeros(len(x))
            for i, scope in enumerate(scopes):
                v = wide[scope].to_numpy(float)
                ax.bar(x, v, bottom=base, width=0.72, color=PALETTE[(i + 2) % len(PALETTE)],
                       label=plain_text(scope), linewidth=0)
                base += v
            ax.set_title(plain_text(truck), loc="left", fontsize=8.5, color=INK)
            ax.set_xlabel(plain_text(xlabel))
            ax.xaxis.set_major_locator(MaxNLocator(integer=True))
            ax.grid(axis="x", visible=False)
            ax.yaxis.set_major_formatter(FuncFormatter(compact_number))
        axes[0, 0].set_ylabel(plain_text(ylabel))
        legend_below(fig, axes[0, 0])
        return svg_data_uri(fig)


def tornado(rows: pd.DataFrame, base: float, *, xlabel: str, low_label: str = "Input low",
            high_label: str = "Input high", max_rows: int = 12) -> str:
    """One-at-a-time sensitivity: the result at each input's low and high value.

    Bars run from the base result to the result with the input at its low (one colour)
    and high (other colour) value; inputs are sorted by swing, widest on top.

    Parameters
    ----------
    rows : pandas.DataFrame
        Columns ``input`` (display name), ``low`` and ``high``: the result with that input
        at its low / high value, in display units. [currency]
    base : float
        The result with every input at its base value. [currency]
    xlabel : str
        Axis label with unit, e.g. ``"Present value difference [EUR]"``.
    low_label, high_label : str
        Legend texts.
    max_rows : int
        Show at most this many inputs (the widest swings). [-]

    Returns
    -------
    str
        SVG ``data:`` URI.
    """
    _require(rows, ["input", "low", "high"], "tornado")
    if rows.empty:
        raise ValueError("tornado: no data")
    df = rows.assign(_swing=(rows["high"] - rows["low"]).abs())
    df = df.sort_values("_swing", ascending=False, kind="stable").head(max_rows)
    n = len(df)
    with chart_style():
        fig, axes = new_figure(0.75 + 0.24 * n)
        ax = axes[0, 0]
        y = np.arange(n)[::-1].astype(float)
        low = df["low"].to_numpy(float)
        high = df["high"].to_numpy(float)
        ax.barh(y, low - base, left=base, height=0.62, color=PALETTE[4],
                label=plain_text(low_label),
                linewidth=0)
        ax.barh(y, high - base, left=base, height=0.62, color=PALETTE[0],
                label=plain_text(high_label), linewidth=0)
        ax.axvline(base, color=INK, linewidth=0.8)
        ax.set_yticks(y, [plain_text(t) for t in df["input"]])
        ax.tick_params(axis="y", length=0)
        ax.set_xlabel(plain_text(xlabel))
        ax.xaxis.set_major_formatter(FuncFormatter(compact_number))
        ax.grid(axis="y", visible=False)
        legend_below(fig, ax)
        return svg_data_uri(fig)


def distribution(samples, label: str, *, ylabel: str = "Share of draws [%]", bins: int = 40,
                 reference: float | None = 0.0, reference_label: str = "Zero") -> str:
    """Histogram of Monte Carlo draws with the P10, P50 and P90 marked.

    Parameters
    ----------
    samples : array_like
        The draws of the result (e.g. present value difference) in display units;
        non-finite draws are left out. [currency]
    label : str
        Horizontal axis label with unit, e.g. ``"Present value difference [EUR]"``.
    ylabel : str
        Vertical axis label.
    bins : int
        Number of histogram bins. [-]
    reference : float or None
        A value to mark with a solid line (default 0: the break-even of a difference).
    reference_label : str
        Legend text of the reference line.

    Returns
    -------
    str
        SVG ``data:`` URI.

    Notes
    -----
    Percentiles use :func:`numpy.percentile` with its default (linear) method.
    """
    s = np.asarray(samples, dtype=float).ravel()
    s = s[np.isfinite(s)]
    if s.size == 0:
        raise ValueError("distribution: no finite samples")
    with chart_style():
        fig, axes = new_figure(2.8)
        ax = axes[0, 0]
        weights = np.full(s.size, 100.0 / s.size)
        ax.hist(s, bins=bins, weights=weights, color=PALETTE[0], alpha=0.85, linewidth=0)
        p10, p50, p90 = np.percentile(s, [10, 50, 90])
        for value, name, style in ((p10, "P10", (0, (2, 2))), (p50, "P50", "-"),
                                   (p90, "P90", (0, (2, 2)))):
            ax.axvline(value, color=PALETTE[1], linewidth=1.0, linestyle=style)
            ax.annotate(name, (value, 1.0), xycoords=("data", "axes fraction"),
                        xytext=(0, 2), textcoords="offset points", fontsize=7.5,
                        color=PALETTE[1], ha="center", va="bottom", annotation_clip=False)
        if reference is not None:
            ax.axvline(reference, color=INK, linewidth=1.2, label=plain_text(reference_label))
        ax.set_xlabel(plain_text(label))
        ax.set_ylabel(plain_text(ylabel))
        ax.xaxis.set_major_formatter(FuncFormatter(compact_number))
        ax.grid(axis="x", visible=False)
        if reference is not None:
            legend_below(fig, ax)
        return svg_data_uri(fig)


def equation(tex: str, *, fontsize: float = 11.0) -> str:
    """Typeset an equation with matplotlib's mathtext, as an SVG ``data:`` URI.

    For the method notes: the SVG keeps its natural size (in points), so at
    ``fontsize`` 11 it sits beside 9.5 pt body text at a readable size.

    The report's equations are the same in every run, and typesetting them (mathtext's
    parser, glyph outlines) is a sixth of the charts' time, so the SVG is kept in a
    cache folder (:func:`equation_cache_dir`) under a key made of everything that
    shapes it: the formula, the size, this module's source (colours, chart style and
    typesetting code) and the matplotlib version. A file that cannot be read or written
    there only means typesetting again.

    Parameters
    ----------
    tex : str
        Mathtext without the surrounding ``$``, e.g.
        ``r"PV = \\sum_{t=0}^{N} \\frac{C_t}{(1+r)^t}"``. Written by the tool, never taken
        from a scenario (``$`` is not escaped here, unlike chart labels).
    fontsize : float
        Size of the typeset text. [pt]

    Returns
    -------
    str
        SVG ``data:`` URI.

    Raises
    ------
    ValueError
        ``tex`` is not valid mathtext.
    """
    return "data:image/svg+xml;base64," + base64.b64encode(
        _cached_equation_svg(tex, float(fontsize))).decode("ascii")


def equation_cache_dir() -> Path:
    """Where typeset equations are kept: ``$TCO_CACHE_DIR/equations``, else
    ``$XDG_CACHE_HOME/tco/equations``, else ``~/.cache/tco/equations``."""
    own = os.environ.get("TCO_CACHE_DIR")
    if own:
        return Path(own) / "equations"
    base = os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache"
    return Path(base) / "tco" / "equations"


@lru_cache(maxsize=1)
def _code_digest() -> str:
    """Digest of this module's source: its style, colours and typesetting code."""
    import hashlib

    return hashlib.sha256(Path(__file__).read_bytes()).hexdigest()


def _equation_key(tex: str, fontsize: float) -> str:
    import hashlib

    parts = [matplotlib.__version__, _code_digest(), tex, repr(fontsize)]
    return hashlib.sha256("\x00".join(parts).encode("utf-8")).hexdigest()


@lru_cache(maxsize=64)
def _cached_equation_svg(tex: str, fontsize: float) -> bytes:
    folder = equation_cache_dir()
    path = folder / f"{_equation_key(tex, fontsize)}.svg"
    try:
        svg = path.read_bytes()
        if svg.startswith(b"<?xml") and svg.rstrip().endswith(b"</svg>"):
            return svg
    except OSError:
        pass
    svg = _typeset_equation(tex, fontsize)
    temp = None
    try:  # atomically: a reader sees the whole file or none
        folder.mkdir(parents=True, exist_ok=True)
        with tempfile.NamedTemporaryFile(dir=folder, suffix=".tmp", delete=False) as f:
            temp = f.name
            f.write(svg)
        os.replace(temp, path)
    except OSError:
        if temp is not None:
            with contextlib.suppress(OSError):
                os.unlink(temp)
    return svg


def _typeset_equation(tex: str, fontsize: float) -> bytes:
    """The SVG of :func:`equation`, typeset now."""
    # Glyphs as outlines ("path"), from the DejaVu Serif that ships inside matplotlib:
    # the PDF then needs no font of its own for them, so an accent such as the dot of
    # ṁ can never fall back to a placeholder glyph (tests/test_report_layout.py checks
    # the font has every glyph and the SVG no text).
    with chart_style(), matplotlib.rc_context({"mathtext.fontset": "dejavuserif",
                                               "svg.fonttype": "path"}):
        fig = Figure(figsize=(0.1, 0.1))
        fig.text(0, 0, f"${tex}$", fontsize=fontsize, color=INK)
        buf = io.BytesIO()
        fig.savefig(buf, format="svg", metadata={"Date": None}, bbox_inches="tight",
                    pad_inches=0.02, transparent=True)
    return buf.getvalue()
