"""The fleet outputs: ``fleet.json``, ``fleet-report.pdf``/``.html`` and ``fleet-workbook.xlsx``.

:func:`write_fleet_outputs` renders a :class:`tco.fleet.FleetResult` the way the
single-scenario writers render a Result:

* every figure comes from the ``fleet.json`` content
  (:func:`tco.report.fleet_summary.build_fleet_summary`), formatted here, so the report,
  the workbook and the JSON show one value for each figure;
* the template (``templates/fleet.html.j2``) computes nothing; it receives preformatted
  strings and chart ``data:`` URIs and escapes every value (``autoescape=True``);
* the PDF is rendered by :func:`tco.report.pdf.write_html_and_pdf` (``data:`` URIs only;
  a blocked fetch is an error);
* the workbook keeps text as text (:func:`tco.report.workbook_base.safe_text`) and writes
  the fleet arithmetic as live formulas (savings, avoided tonnes, cumulative sums, totals,
  present values, depot totals and shares), so a reader can audit it;
* everything is built in a staging folder and moved into ``OUT/<slug>/`` only when all
  outputs succeeded (:func:`tco.report.atomic.staged_output`).

Report context (``templates/fleet.html.j2``)
--------------------------------------------
All keys are required (``StrictUndefined``). Tables are ``{"title", "columns": [str],
"align": ["l" | "r"], "rows": [[str]], "foot": [[str]], "note"}``; figures are
``{"title", "caption", "uri"}`` with a ``data:image/svg+xml;base64,...`` URI.

``meta``: ``title``, ``notes``, ``date``, ``version``, ``fingerprint``, ``fleet_hash``,
``base_file``, ``fleet_file``, ``currency``, ``units``, ``rule``, ``page_size``.
``verdict``: str. ``key_figures``: ``[{"label", "value", "note"}]``.
``order``: table; ``remedies``: ``[{"vehicle", "route", "status", "text"}]``;
``cumulative``: figure. ``routes``: list of tables. ``yearly``: table.
``depot``: ``{"rule", "sharing", "facts": [str], "chart": figure, "shares": table,
"all_candidates": str}``. ``warnings``: [str]. ``method_notes``: ``[{"title", "text",
"equation"}]``. ``cautions``: [str].
"""
from __future__ import annotations

import functools
from pathlib import Path
from typing import Literal

import numpy as np
import pandas as pd
from markupsafe import Markup
from matplotlib.ticker import FuncFormatter, MaxNLocator

from tco.errors import InputError
from tco.report import charts
from tco.report import workbook_base as wbb
from tco.report.atomic import staged_output
from tco.report import formatting as fm
from tco.report.context import DisplayUnits, fmt_money
from tco.report.context import fmt_number as _n
from tco.report.fleet_plan import add_transition_sheets, transition_context
from tco.report.fleet_summary import (build_fleet_summary, depot_vehicles, dumps,
                                      interval_means, table_interval)
from tco.report.html import PAGE_SIZES, STYLESHEET, environment, nobreak
from tco.report.pdf import write_html_and_pdf
from tco.report.workbook_base import safe_text, write_value
from tco.resources import templates_dir

__all__ = ["write_fleet_outputs", "build_fleet_context", "render_fleet_html",
           "build_fleet_workbook", "write_fleet_workbook", "depot_power_chart",
           "cumulative_chart", "FILES", "SHEETS", "TEMPLATE"]

TEMPLATE = "fleet.html.j2"
#: Output files, in the order they are written.
FILES = ("fleet.json", "fleet-report.html", "fleet-report.pdf", "fleet-workbook.xlsx")
#: Workbook sheets, in order.
SHEETS = ("Routes", "Order", "Yearly", "Depot", "Notes")

RULES = {
    "first_come": "first come, first served (unmanaged charging)",
    "spread": "spread over each stay (managed charging)",
}
RULE_TEXT = {
    "first_come": (
        "Unmanaged charging: a truck plugs in when it arrives if a charger is free, "
        "otherwise it waits; a freed charger goes to the waiting truck that leaves first. "
        "A plugged truck charges at the charger's full power until it has its energy and "
        "then makes way. The depot gets the fewest chargers that give every truck its "
        "energy before it leaves."),
    "spread": (
        "Managed charging: each truck stays plugged in for its whole stay and draws the "
        "constant power that delivers its energy just in time (at most the charger's "
        "power). The depot gets one charger per truck present at the same time."),
}
SHARING_TEXT = (
    "How the depot's costs are shared: charger hardware, installation, grid connection, "
    "charger maintenance and the fixed fee by charger occupancy (the time each truck holds "
    "a charger in a day); the demand charge by each truck's contribution to the depot's "
    "coincident peak (its mean power in the peak {interval}-minute interval, averaged "
    "over every interval that reaches the peak), since that peak is what the charge bills. "
    "This sharing rule is the tool's own convention.")

METHOD_NOTES = [
    ("One comparison per route",
     "Each row of the fleet file becomes a two-truck comparison on its own duty cycle: the "
     "truck on the route today against its candidate, with the base scenario's finance, "
     "prices, depot, emissions and ambient conditions. Energy is simulated per route; cash "
     "flows and emissions follow as in the single-scenario report.", ""),
    ("Feasibility and the plan",
     "A candidate is feasible when it carries the payload within its gross-weight limit, "
     "its new battery covers the day (or en-route charging covers the rest: 'feasible with "
     "en-route charging') and the shared depot, with every candidate charging, delivers its "
     "nightly energy before it leaves. The plan electrifies the feasible routes; the others "
     "keep their current truck, and the order says what would make them feasible.", ""),
    ("Shared depot",
     "The candidates' nightly energy at the meter, arrival and departure go to one depot "
     "schedule simulated over three identical days (the middle day is reported). The peak "
     "is the highest mean depot power over a 15-minute clock interval, the interval "
     "commercial demand charges commonly bill (common practice; the tariff's own interval "
     "applies).", "P_peak = max_j (1/n) Σ_{k in interval j} P_k"),
    ("Sharing the depot's costs",
     "Fixed depot costs are shared by charger occupancy o_i, the demand charge by the "
     "contribution p_i to the coincident peak.",
     "s_i = o_i / Σ o;   d_i = p_i / P_peak"),
    ("Electrification order",
     "Feasible routes first, then by present-value saving, largest first; the rank by "
     "abatement cost is given beside it. Chargers and peak are recomputed as each route is "
     "added (exactly up to 200 routes, then at 20 evenly spaced steps).",
     "abatement cost = (PV_candidate − PV_current) / avoided tonnes (discounted like the "
     "money unless the scenario says otherwise)"),
    ("Fleet totals per year",
     "As-is: every route keeps its current truck type, renewed like for like (a new "
     "truck of that type bought in year 0, as in the single comparison). Plan: the plan's "
     "routes get their candidate instead, the rest as-is. Saving = as-is − plan; avoided = as-is − "
     "plan (well-to-wheel, location-based). The plan's present-value saving is the sum of "
     "its routes' savings and equals the present value of the yearly savings.",
     "PV = Σ_y S_y (1 + r)^−y"),
    ("Simplifications",
     "The whole plan changes over in year 1 (no phased roll-out); trucks outside the plan "
     "keep their current truck; the depot's charger power and costs are the base "
     "scenario's [depot] section; routes outside the plan are costed with the depot shared "
     "by every candidate; every truck arrives and leaves at its stated clock times on "
     "every operating day.", ""),
]

# =========================================================================== formatting
def _pct(x, digits: int = 1) -> str:
    return fm.percent(x, digits)


def _irr_cell(r: dict) -> str:
    """IRR in a table cell: a percentage, or "n/a" where the extra cost is never paid
    back (the reason is in the table's note)."""
    text = fm.irr_text(r["irr"], None, r["simple_payback_year"], check_payback=True)
    return "n/a" if text.startswith("n/a") else text


def _cap(text: str) -> str:
    return text[:1].upper() + text[1:] if text else text


def _table(title: str, columns: list[str], align: str, rows: list[list[str]],
           note: str = "", foot: list[list[str]] | None = None) -> dict:
    """A report table; ``align`` has one letter per column (l/r)."""
    if len(align) != len(columns):
        raise ValueError(f"table {title!r}: {len(align)} alignments for {len(columns)} columns")
    return {"title": title, "columns": columns, "align": list(align), "rows": rows,
            "foot": foot or [], "note": note}


# =========================================================================== charts
def _clock_ticks(start_hour: int):
    return FuncFormatter(lambda x, _pos=None: fm.clock(start_hour + x))


def depot_power_chart(frame: pd.DataFrame, *, start_hour: int, ylabel: str,
                      peak_kW: float, peak_label: str, capacity_kW: float | None = None,
                      capacity_label: str = "", xlabel: str = "Time of day") -> str:
    """Depot power over the day, stacked by truck, with the peak marked.

    Parameters
    ----------
    frame : pandas.DataFrame
        Index: hours after ``start_hour`` at the start of each interval (equal steps,
        covering one day); one column per truck (or group), in display units. [kW]
    start_hour : int
        Clock hour at the left edge of the chart. [h]
    ylabel, xlabel : str
        Axis labels with units.
    peak_kW : float
        The depot's peak, drawn as a line. [kW]
    peak_label : str
        Legend text of the peak line (formatted by the caller).
    capacity_kW : float, optional
        Installed charger power, drawn when it differs from the peak. [kW]
    capacity_label : str
        Legend text of the capacity line.

    Returns
    -------
    str
        SVG ``data:`` URI.
    """
    if frame.empty:
        raise ValueError("depot_power_chart: no data")
    x = np.asarray(frame.index, dtype=float)
    step = float(x[1] - x[0]) if len(x) > 1 else 24.0
    xs = np.append(x, x[-1] + step)  # one more edge, so the last interval is drawn
    with charts.chart_style():
        fig, axes = charts.new_figure(3.0)
        ax = axes[0, 0]
        ys = [np.append(frame[c].to_numpy(float), frame[c].iloc[-1]) for c in frame.columns]
        colors = [charts.PALETTE[i % len(charts.PALETTE)] for i in range(len(ys))]
        ax.stackplot(xs, ys, labels=[charts.plain_text(c) for c in frame.columns],
                     colors=colors, step="post", linewidth=0)
        ax.axhline(peak_kW, color=charts.INK, linewidth=0.9, linestyle=(0, (4, 2)),
                   label=charts.plain_text(peak_label))
        if capacity_kW is not None and capacity_kW > peak_kW * 1.001:
            ax.axhline(capacity_kW, color="#777777", linewidth=0.8, linestyle=(0, (1, 2)),
                       label=charts.plain_text(capacity_label))
        ax.set_xlim(0, 24)
        ax.set_ylim(0, max(peak_kW, capacity_kW or 0.0, 1e-9) * 1.12)
        ax.xaxis.set_major_locator(MaxNLocator(nbins=12, steps=[1, 2, 3, 6]))
        ax.xaxis.set_major_formatter(_clock_ticks(start_hour))
        ax.yaxis.set_major_formatter(FuncFormatter(charts.compact_number))
        ax.set_xlabel(charts.plain_text(xlabel))
        ax.set_ylabel(charts.plain_text(ylabel))
        charts.legend_below(fig, ax, ncol=min(4, len(ys) + 1))
        return charts.svg_data_uri(fig)


def cumulative_chart(labels: list[str], saving, avoided, in_plan, *, money_label: str,
                     tonnes_label: str, xlabel: str, plan_label: str = "In the plan",
                     other_label: str = "Not feasible") -> str:
    """Saving and avoided tonnes as routes are added in the electrification order.

    Two panels sharing the horizontal axis: each route's present-value saving (bars) and
    the cumulative saving (line); each route's avoided tonnes (bars) and the cumulative
    tonnes (line). Routes outside the plan are drawn grey, after a dashed boundary.

    Parameters
    ----------
    labels : list of str
        Route labels in order (vehicle ids; rank numbers are shown beyond 30 routes).
    saving : array_like
        Present-value saving of each route. [currency]
    avoided : array_like
        Emissions avoided by each route. [t CO2e]
    in_plan : array_like of bool
        Whether each route is in the plan.
    money_label, tonnes_label, xlabel : str
        Axis labels with units.
    plan_label, other_label : str
        Legend texts of the bar colours.

    Returns
    -------
    str
        SVG ``data:`` URI.
    """
    s = np.asarray(saving, dtype=float)
    a = np.asarray(avoided, dtype=float)
    plan = np.asarray(in_plan, dtype=bool)
    n = len(s)
    if n == 0:
        raise ValueError("cumulative_chart: no routes")
    x = np.arange(1, n + 1, dtype=float)
    bar_colors = np.where(plan, charts.PALETTE[0], "#B0B0B0")
    with charts.chart_style():
        fig, axes = charts.new_figure(4.4, nrows=2, sharex=True)
        top, bottom = axes[0, 0], axes[1, 0]
        for ax, per, color, label in ((top, s, charts.PALETTE[1], money_label),
                                      (bottom, a, charts.PALETTE[2], tonnes_label)):
            ax.bar(x, per, width=0.7, color=bar_colors, linewidth=0)
            ax.plot(x, np.cumsum(per), color=color, marker="o", markersize=3,
                    label="Cumulative")
            ax.axhline(0, color="#555555", linewidth=0.6)
            ax.set_title(charts.plain_text(label), loc="left", fontsize=8, color=charts.INK,
                         pad=3)
            ax.yaxis.set_major_formatter(FuncFormatter(charts.compact_number))
            ax.grid(axis="x", visible=False)
            if plan.any() and not plan.all():
                ax.axvline(int(plan.sum()) + 0.5, color=charts.INK, linewidth=0.7,
                           linestyle=(0, (3, 2)))
        if n <= 30:
            bottom.set_xticks(x, [charts.plain_text(t) for t in labels], rotation=60,
                              ha="right", fontsize=7)
        else:
            bottom.xaxis.set_major_locator(MaxNLocator(integer=True))
        bottom.set_xlabel(charts.plain_text(xlabel))
        from matplotlib.lines import Line2D
        from matplotlib.patches import Patch

        handles = [Patch(color=charts.PALETTE[0], linewidth=0),
                   Patch(color="#B0B0B0", linewidth=0),
                   Line2D([], [], color=charts.PALETTE[1], marker="o", markersize=3),
                   Line2D([], [], color=charts.PALETTE[2], marker="o", markersize=3)]
        names = [plan_label, other_label, "Cumulative saving", "Cumulative tonnes"]
        fig.legend(handles, [charts.plain_text(t) for t in names], loc="outside lower center",
                   ncol=4, handlelength=1.6, columnspacing=1.4)
        return charts.svg_data_uri(fig)


#: Most trucks drawn one by one in the depot chart; the rest are grouped.
MAX_STACKED = 7


def _depot_frame(result) -> tuple[pd.DataFrame, int]:
    """Per-truck interval power of the plan [kW], rotated to start at a quiet hour."""
    sched = result.depot_plan
    vehicles, _, _ = depot_vehicles(result, "plan")
    step = table_interval(sched.slot)
    if np.ndim(sched.truck_power) == 2 and len(vehicles):
        per = interval_means(sched.truck_power, sched.slot, step) / 1e3
    else:
        per = np.zeros((0, int(86400 / step)))
    energy = per.sum(axis=1)
    order = np.argsort(-energy, kind="stable")
    cols: dict[str, np.ndarray] = {}
    for k in order[:MAX_STACKED]:
        cols[vehicles[k]] = per[k]
    rest = order[MAX_STACKED:]
    if len(rest):
        cols[f"{len(rest)} other trucks"] = per[rest].sum(axis=0)
    if not cols:
        cols["Depot"] = np.zeros(per.shape[1])
    total = per.sum(axis=0) if len(per) else np.zeros(per.shape[1])
    per_hour = max(int(round(3600 / step)), 1)
    start = _quiet_middle(total.reshape(24, -1).sum(axis=1))
    shift = start * per_hour
    df = pd.DataFrame({k: np.roll(v, -shift) for k, v in cols.items()})
    df.index = np.arange(len(df)) * step / 3600.0
    return df, start


def _quiet_middle(hourly) -> int:
    """Clock hour in the middle of the longest run of the day's quietest hours.

    Starting the chart there puts the charging in the middle of the axis, so a night's
    charging across midnight shows as one block.
    """
    h = np.asarray(hourly, dtype=float)
    quiet = h <= h.min() + 1e-9 * max(float(h.max()), 1.0)
    if quiet.all():
        return 0
    best, best_start = 0, 0
    for s in range(24):  # runs on a circular day; 24 x 24 steps at most
        if quiet[s] and not quiet[s - 1]:
            n = 0
            while quiet[(s + n) % 24] and n < 24:
                n += 1
            if n > best:
                best, best_start = n, s
    return (best_start + best // 2) % 24


# =========================================================================== context
def _verdict(s: dict) -> str:
    p = s["plan"]
    cur = s["currency"]
    years = s["study"]["analysis_years"]
    n, total = p["routes_feasible"], p["routes_total"]
    if n == 0:
        return (f"None of the {total} routes can be run by its electric candidate as "
                "planned; the electrification order says what would make each feasible.")
    routes = "route" if total == 1 else "routes"
    own = "its" if n == 1 else "their"
    them = "it" if n == 1 else f"those {n}"
    word = "saves" if p["pv_saving"] >= 0 else "costs"
    tail = "" if p["pv_saving"] >= 0 else " more"
    dep = s["depot"]
    text = (f"{n} of {total} {routes} can be run by {own} electric candidate. Electrifying "
            f"{them} {word} {fmt_money(abs(p['pv_saving']), cur)}{tail} in present value over "
            f"{years} years and avoids {_n(p['avoided_t'])} t CO2e well-to-wheel; the depot "
            f"needs {p['chargers']} charger{'s' if p['chargers'] != 1 else ''} of "
            f"{_n(dep['charger_kW'])} kW and a peak of {_n(p['peak_kW'])} kW.")
    return text + _losing_sentence(s)


def _losing_sentence(s: dict) -> str:
    """What the loss-making feasible routes change, from fleet.json (empty when none)."""
    p, cur = s["plan"], s["currency"]
    losing = p.get("vehicles_losing_money") or []
    if not losing:
        return ""
    k, m = len(losing), p["routes_saving_money"]
    keep = (f"the {m} that save money save {fmt_money(p['pv_saving_money_routes'], cur)} "
            "together (electrification order)" if m else "none saves money on its own")
    plan = ("; the transition plan says which of them the target or the carbon price "
            "needs" if s.get("transition") else "")
    return (f" {k} of them ({', '.join(losing)}) cost more electric than diesel; "
            f"{keep}{plan}.")


def _key_figures(s: dict) -> list[dict]:
    p, cur = s["plan"], s["currency"]
    st = s["study"]
    dep = s["depot"]
    years = st["analysis_years"]
    basis = f"{years} years at {fm.percent(st['discount_rate'])} a year"
    per_t = ("present-value cost over discounted tonnes" if p["tonnes_discounted"]
             else "present-value cost over tonnes")
    return [
        {"label": "Routes the electric candidate can run",
         "value": f"{p['routes_feasible']} of {p['routes_total']}",
         "note": "the plan electrifies these"},
        {"label": "Present-value saving of the plan", "value": fmt_money(p["pv_saving"], cur),
         "note": f"cost as-is minus cost with the plan, {basis}"},
        {"label": "Emissions avoided by the plan", "value": f"{_n(p['avoided_t'])} t CO2e",
         "note": f"well-to-wheel, location-based, over {years} years"},
        {"label": "Abatement cost of the plan",
         "value": (f"{_n(p['abatement_cost_per_t'])} {cur}/t CO2e"
                   if p["abatement_cost_per_t"] is not None else "–"),
         "note": f"{per_t}; negative: saves money while cutting emissions"},
        {"label": "Depot chargers", "value": f"{p['chargers']} × {_n(dep['charger_kW'])} kW",
         "note": f"charging rule: {RULES.get(s['charging_rule'], s['charging_rule'])}"},
        {"label": "Depot peak power", "value": f"{_n(p['peak_kW'])} kW",
         "note": (f"highest {fm.number(dep['demand_interval_min'], trim=True)}-minute mean, from "
                  f"{dep['plan']['peak_interval_start']}")},
        {"label": "Depot energy per operating day",
         "value": f"{_n(dep['plan']['energy_kWh_per_day'])} kWh",
         "note": "at the meter, the plan's trucks together"},
        {"label": "Cumulative saving turns positive",
         "value": (f"year {p['payback_year']}" if p["payback_year"] is not None
                   else "not within the period"),
         "note": "not discounted; year 0 is the purchase"},
    ]


def _order_table(s: dict) -> dict:
    cur = s["currency"]
    rows = []
    for r in s["order"]:
        rows.append([str(r["rank_by_saving"]), str(r["rank_by_abatement"]), r["vehicle"],
                     r["route"], _cap(r["status"]), _n(r["pv_saving"]), _n(r["avoided_t"]),
                     _n(r["abatement_cost_per_t"]), _n(r["cumulative_pv_saving"]),
                     _n(r["cumulative_avoided_t"]),
                     "–" if r["chargers_after"] is None else str(r["chargers_after"]),
                     _n(r["peak_after_kW"])])
    return _table(
        "",  # the section heading names it
        ["Rank by saving", "Rank by abatement cost", "Vehicle", "Route", "Status",
         f"PV saving [{cur}]", "Avoided [t CO2e]", f"Abatement cost [{cur}/t CO2e]",
         f"Cumulative PV saving [{cur}]", "Cumulative avoided [t CO2e]",
         "Chargers after this step", "Depot peak after this step [kW]"],
        "rrlllrrrrrrr", rows,
        "Feasible routes first, largest saving first; the rank by abatement cost (lowest "
        "first) is beside it. Cumulative figures and the depot's needs are for the routes "
        "down to that row; rows after the last feasible route are not in the plan. "
        "Abatement cost: present-value cost difference per tonne avoided (negative: the "
        "route saves money while cutting emissions).")


def _remedies(s: dict) -> list[dict]:
    return [{"vehicle": r["vehicle"], "route": r["route"], "status": _cap(r["status"]),
             "text": "; ".join(r["remedies"]) + "."}
            for r in s["order"] if r["remedies"]]


def _routes_tables(s: dict, u: DisplayUnits) -> list[dict]:
    cur = s["currency"]
    per = u.per_dist / 1000.0  # display distance unit per km
    ops, money = [], []
    for r in s["routes"]:
        ops.append([r["vehicle"], r["route"], f"{r['current']} → {r['candidate']}",
                    _n(r["annual_distance_km"] / per), _n(r["trips_per_day"], 2),
                    _n(u.convert(r["diesel_L_per_year"] / 1000.0, "L")[0]),
                    _n(r["grid_kWh_per_year"] / 1000, 1),
                    _pct(r["soc_min"], 0), f"{r['arrive'] or '–'}–{r['depart'] or '–'}",
                    _cap(r["status"])])
        money.append([r["vehicle"], _n(r["pv_current"]), _n(r["pv_candidate"]),
                      _n(r["pv_saving"]), _n(r["levelized_current_per_km"] * per, 3),
                      _n(r["levelized_candidate_per_km"] * per, 3),
                      "–" if r["simple_payback_year"] is None
                      else str(r["simple_payback_year"]), _irr_cell(r),
                      _n(r["wtw_current_t"]), _n(r["wtw_candidate_t"]), _n(r["avoided_t"]),
                      _n(r["abatement_cost_per_t"])])
    years = s["study"]["analysis_years"]
    return [
        _table("Routes: operation and feasibility",
               ["Vehicle", "Route", "Current → candidate", f"Distance [{u.dist}/yr]",
                "Trips per day", f"Diesel, current [{u.volume}/yr]",
                "Electricity, candidate [MWh/yr]",
                "Lowest state of charge", "At the depot", "Status"],
               "lllrrrrrll", ops,
               "Electricity at the meter, depot and en-route charging; lowest state of "
               "charge in the day with the new battery (below zero: the day cannot be done "
               "on the battery alone)."),
        _table("Routes: cost and emissions",
               ["Vehicle", f"PV current [{cur}]", f"PV candidate [{cur}]",
                f"PV saving [{cur}]", f"Cost per {u.dist}, current [{cur}/{u.dist}]",
                f"Cost per {u.dist}, candidate [{cur}/{u.dist}]", "Payback year", "IRR",
                "Well-to-wheel, current [t CO2e]", "Well-to-wheel, candidate [t CO2e]",
                "Avoided [t CO2e]", f"Abatement cost [{cur}/t CO2e]"],
               "lrrrrrrrrrrr", money,
               f"Present values over {years} years at the base scenario's discount rate, "
               "with each route's share of the depot (the plan's depot for routes in the "
               "plan, the depot of every candidate for the others). Emissions well-to-wheel, "
               "location-based, over the period."
               + (" IRR n/a: the savings never recover the extra cost."
                  if any(row[7] == "n/a" for row in money) else "")),
    ]


def _yearly_table(s: dict) -> dict:
    cur = s["currency"]
    rows = [[str(r["year"]), str(r["calendar_year"]), _n(r["cost_as_is"]),
             _n(r["cost_plan"]), _n(r["saving"]), _n(r["cumulative_saving"]),
             _n(r["wtw_as_is_t"], 1), _n(r["wtw_plan_t"], 1), _n(r["avoided_t"], 1),
             str(r["chargers"]), _n(r["peak_kW"])] for r in s["yearly"]]
    t = s["yearly_totals"]
    foot = [["Total", "", _n(t["cost_as_is"]), _n(t["cost_plan"]), _n(t["saving"]), "",
             _n(t["wtw_as_is_t"], 1), _n(t["wtw_plan_t"], 1), _n(t["avoided_t"], 1), "", ""],
            ["Present value", "", _n(t["pv_cost_as_is"]), _n(t["pv_cost_plan"]),
             _n(t["pv_saving"]), "", "", "", "", "", ""]]
    st = s["study"]
    return _table(
        "",  # the section heading names it
        ["Year", "Calendar year", f"Cost as-is [{cur}]", f"Cost with the plan [{cur}]",
         f"Saving [{cur}]", f"Cumulative saving [{cur}]", "Emissions as-is [t CO2e]",
         "Emissions with the plan [t CO2e]", "Avoided [t CO2e]", "Chargers", "Peak [kW]"],
        "rrrrrrrrrrr", rows,
        f"Net cost of every route ({st['money_basis']} money, year 0 = purchase); emissions "
        "well-to-wheel, location-based. Present value at "
        f"{fm.percent(st['discount_rate'])} a year.", foot)


def _depot_section(result, s: dict) -> dict:
    dep = s["depot"]
    plan = dep["plan"]
    interval = dep["demand_interval_min"]
    routes = {r["vehicle"]: r["route"] for r in s["routes"]}
    rows = [[t["vehicle"], routes.get(t["vehicle"], ""),
             f"{t['arrive'] or '–'}–{t['depart'] or '–'}", _n(t["energy_kWh_per_day"]),
             _n(t["occupancy_h"], 2), _pct(t["cost_share"]), _n(t["peak_contribution_kW"], 1),
             _pct(t["demand_share"])] for t in plan["trucks"]]
    foot = [["All trucks", "", "", _n(plan["energy_kWh_per_day"]),
             _n(sum(t["occupancy_h"] for t in plan["trucks"]), 2),
             _pct(sum(t["cost_share"] for t in plan["trucks"])) if plan["trucks"] else "–",
             _n(plan["peak_kW"], 1),
             _pct(sum(t["demand_share"] for t in plan["trucks"])) if plan["trucks"] else "–"]]
    shares = _table(
        "Each truck's share of the depot (the plan)",
        ["Vehicle", "Route", "At the depot", "Energy per day [kWh]", "On a charger [h/day]",
         "Share of fixed depot costs", "Contribution to the peak [kW]",
         "Share of the demand charge"],
        "lllrrrrr", rows, "Energy at the meter per operating day.", foot)
    frame, start = _depot_frame(result)
    cap = plan["chargers"] * dep["charger_kW"]
    uri = depot_power_chart(
        frame, start_hour=start, ylabel="Depot power [kW]", peak_kW=plan["peak_kW"],
        peak_label=f"Peak, {fm.number(interval, trim=True)}-minute mean: {_n(plan['peak_kW'])} kW",
        capacity_kW=cap,
        capacity_label=f"Chargers: {plan['chargers']} × {_n(dep['charger_kW'])} kW")
    a = dep["all"]
    return {
        "rule": RULE_TEXT.get(s["charging_rule"], s["charging_rule"]),
        "sharing": SHARING_TEXT.format(interval=fm.number(interval, trim=True)),
        "facts": [
            f"Chargers: {plan['chargers']} × {_n(dep['charger_kW'])} kW",
            f"Peak power: {_n(plan['peak_kW'])} kW ({fm.number(interval, trim=True)}-minute mean from "
            f"{plan['peak_interval_start']})",
            f"Energy per operating day: {_n(plan['energy_kWh_per_day'])} kWh at the meter",
            f"Trucks charging: {len(plan['trucks'])}",
        ],
        "chart": {"title": "Depot power over the day with the plan",
                  "caption": f"Mean power in each {fm.number(plan['interval_min'], trim=True)}"
                             "-minute interval, stacked by truck, over one operating day "
                             f"starting at {fm.clock(start)}.", "uri": uri},
        "shares": shares,
        "all_candidates": (
            f"With every candidate charging (routes outside the plan included) the depot "
            f"would need {a['chargers']} × {_n(dep['charger_kW'])} kW and a peak of "
            f"{_n(a['peak_kW'])} kW for {_n(a['energy_kWh_per_day'])} kWh a day."),
    }


def _cumulative_figure(s: dict) -> dict:
    cur = s["currency"]
    order = s["order"]
    uri = cumulative_chart(
        [r["vehicle"] for r in order], [r["pv_saving"] for r in order],
        [r["avoided_t"] for r in order], [r["feasible"] for r in order],
        money_label=f"Present-value saving [{cur}]", tonnes_label="Avoided [t CO2e]",
        xlabel="Routes in the electrification order")
    return {"title": "Saving and emissions avoided as routes are added",
            "caption": "Bars: each route's present-value saving and avoided tonnes; lines: "
                       "the running totals in the electrification order. Grey bars after "
                       "the dashed line are routes outside the plan.", "uri": uri}


def build_fleet_context(result, summary: dict) -> dict:
    """The fleet report context (structure in the module docstring).

    Parameters
    ----------
    result : tco.fleet.FleetResult
        Used only for the depot chart's per-truck power.
    summary : dict
        The ``fleet.json`` content of the same result: the source of every figure.

    Returns
    -------
    dict
    """
    s = summary
    st = s["study"]
    u = DisplayUnits(st["units"])
    fleet_hash = s["inputs"]["fleet_file_sha256"]
    return {
        "meta": {"title": st["name"], "notes": st["notes"] or "", "date": s["created"][:10],
                 "version": s["tool"]["version"],
                 "fingerprint": "sha256:" + s["inputs"]["base_fingerprint_sha256"][:16],
                 "fleet_hash": ("sha256:" + fleet_hash[:16]) if fleet_hash else "–",
                 "base_file": s["inputs"]["base_file"] or "–",
                 "fleet_file": s["inputs"]["fleet_file"], "currency": s["currency"],
                 "units": u.label,
                 "rule": RULES.get(s["charging_rule"], s["charging_rule"]),
                 "page_size": st["page_size"]},
        "verdict": _verdict(s),
        "key_figures": _key_figures(s),
        "order": _order_table(s),
        "remedies": _remedies(s),
        "cumulative": _cumulative_figure(s),
        "routes": _routes_tables(s, u),
        "yearly": _yearly_table(s),
        "depot": _depot_section(result, s),
        "transition": transition_context(s),
        "warnings": list(s["warnings"]),
        "method_notes": [{"title": t, "text": x, "equation": eq} for t, x, eq in METHOD_NOTES],
        "cautions": list(s["cautions"]),
    }


# =========================================================================== HTML
_DATA_URI = ("data:image/svg+xml;base64,", "data:image/png;base64,")


def render_fleet_html(context: dict, *, for_print: bool,
                      page_size: Literal["A4", "Letter"] = "A4") -> str:
    """Render the fleet report to one standalone HTML string.

    Parameters
    ----------
    context : dict
        From :func:`build_fleet_context`.
    for_print : bool
        ``True`` for the PDF (cover page, running headers, page numbers, landscape pages
        for the wide tables), ``False`` for a browser page.
    page_size : {"A4", "Letter"}

    Returns
    -------
    str

    Raises
    ------
    InputError
        Unknown page size.
    ValueError
        A chart is not an embedded ``data:`` image.
    """
    if page_size not in PAGE_SIZES:
        raise InputError(f"unknown page size '{page_size}' (use A4 or Letter)",
                         where="study.page_size")
    for fig in (context["cumulative"], context["depot"]["chart"]):
        if not str(fig.get("uri", "")).startswith(_DATA_URI):
            raise ValueError(f"chart {fig.get('title')!r} is not an embedded data: image")
    css = (templates_dir() / STYLESHEET).read_text(encoding="utf-8")
    env = environment()
    env.filters["nobreak"] = functools.partial(nobreak, hard=for_print)  # as the report
    return env.get_template(TEMPLATE).render(
        **context, css=Markup(css), page_css_size=PAGE_SIZES[page_size],
        for_print=for_print)


# =========================================================================== workbook
_KM = '#,##0'
_PER_KM = '#,##0.000'
_TRIPS = '0.00'
_HOURS = '0.00'
_KW = '#,##0.0'


def _title(ws, text: str, row: int = 1):
    from openpyxl.styles import Font

    c = safe_text(ws.cell(row=row, column=1), text)
    c.font = Font(bold=True, size=13, color="0B3954")
    return c


def _bold(cell):
    from openpyxl.styles import Font

    cell.font = Font(bold=True)
    return cell


def _wrap(cell):
    from openpyxl.styles import Alignment

    cell.alignment = Alignment(wrap_text=True, vertical="top")
    return cell


def _L(col: int) -> str:
    from openpyxl.utils import get_column_letter

    return get_column_letter(col)


class _FleetBook:
    """Builds the fleet workbook from the fleet.json content (and the depot power)."""

    def __init__(self, result, summary: dict):
        from openpyxl import Workbook

        self.result, self.s = result, summary
        self.cur = summary["currency"]
        self.wb = Workbook()
        self.route_row: dict[str, int] = {}

    def build(self):
        from openpyxl.workbook.properties import CalcProperties

        wb = self.wb
        ws = wb.active
        ws.title = SHEETS[0]
        self._routes(ws)
        self._order(wb.create_sheet(SHEETS[1]))
        self._yearly(wb.create_sheet(SHEETS[2]))
        self._depot(wb.create_sheet(SHEETS[3]))
        self._notes(wb.create_sheet(SHEETS[4]))
        add_transition_sheets(wb, self.s)  # the transition plan, when there is one
        # openpyxl stores formulas without results: compute everything on opening.
        wb.calculation = CalcProperties(fullCalcOnLoad=True)
        return wb

    # ------------------------------------------------------------------ Routes
    def _route_columns(self):
        """(header, key, number format) per column; keys starting '=' are formulas."""
        cur = self.cur
        return [
            ("Vehicle", "vehicle", None), ("Route", "route", None),
            ("Current truck", "current", None), ("Candidate truck", "candidate", None),
            ("Status", "status", None), ("In the plan", "in_plan", None),
            ("Distance [km/yr]", "annual_distance_km", _KM),
            ("Trips per day", "trips_per_day", _TRIPS),
            ("Diesel, current [L/yr]", "diesel_L_per_year", _KM),
            ("Electricity, candidate [kWh/yr]", "grid_kWh_per_year", _KM),
            ("Lowest state of charge [%]", "soc_min", wbb.PERCENT),
            ("Share of fixed depot costs [%]", "depot_cost_share", wbb.PERCENT),
            ("Contribution to the depot peak [kW]", "peak_contribution_kW", _KW),
            (f"PV current [{cur}]", "pv_current", wbb.MONEY),
            (f"PV candidate [{cur}]", "pv_candidate", wbb.MONEY),
            (f"PV saving [{cur}]", "=saving", wbb.MONEY),
            (f"Cost per km, current [{cur}/km]", "levelized_current_per_km", _PER_KM),
            (f"Cost per km, candidate [{cur}/km]", "levelized_candidate_per_km", _PER_KM),
            ("Payback year", "simple_payback_year", wbb.INTEGER),
            ("IRR [%]", "irr", wbb.PERCENT),
            ("Well-to-wheel, current [t CO2e]", "wtw_current_t", wbb.MASS),
            ("Well-to-wheel, candidate [t CO2e]", "wtw_candidate_t", wbb.MASS),
            ("Avoided [t CO2e]", "=avoided", wbb.MASS),
            (f"Abatement cost [{cur}/t CO2e]", "=abatement", wbb.MONEY_CENTS),
            ("Avoided, discounted [t CO2e]" if self.s["plan"]["tonnes_discounted"]
             else "Avoided, for the abatement cost [t CO2e]", "abatement_t", wbb.MASS),
            ("What would make it feasible", "remedies", None),
        ]

    def _routes(self, ws):
        cols = self._route_columns()
        self.rcol = {key: i + 1 for i, (_, key, _) in enumerate(cols)}
        L = {key: _L(c) for key, c in self.rcol.items()}
        wbb.header_row(ws, 1, [h for h, _, _ in cols])
        wbb.freeze(ws, "B2")
        routes = self.s["routes"]
        discounted = self.s["plan"]["tonnes_discounted"]
        for i, r in enumerate(routes):
            row = 2 + i
            self.route_row[r["vehicle"]] = row
            for c, (_, key, fmt) in enumerate(cols, start=1):
                cell = ws.cell(row=row, column=c)
                if key == "=saving":
                    cell.value = f"={L['pv_current']}{row}-{L['pv_candidate']}{row}"
                    cell.number_format = fmt
                elif key == "=avoided":
                    cell.value = f"={L['wtw_current_t']}{row}-{L['wtw_candidate_t']}{row}"
                    cell.number_format = fmt
                elif key == "=abatement":
                    if r["abatement_cost_per_t"] is None:
                        safe_text(cell, "–")
                    elif discounted:  # over discounted tonnes (a model value, next column)
                        cell.value = f"=-{L['=saving']}{row}/{L['abatement_t']}{row}"
                        cell.number_format = fmt
                    else:
                        cell.value = f"=-{L['=saving']}{row}/{L['=avoided']}{row}"
                        cell.number_format = fmt
                elif key == "in_plan":
                    safe_text(cell, "yes" if r["in_plan"] else "no")
                elif key == "remedies":
                    safe_text(cell, "; ".join(r["remedies"]))
                elif key == "status":
                    safe_text(cell, r["status"])
                elif key == "irr" and fm.irr_reads_na(r["irr"], r["simple_payback_year"],
                                                      check_payback=True):  # as the report
                    safe_text(cell, "n/a")
                else:
                    write_value(cell, r[key], fmt)
        last = 1 + len(routes)
        self.routes_last = last
        # totals: the plan (SUMIFS over "In the plan") and every route
        plan_row, all_row = last + 2, last + 3
        self.plan_total_row = plan_row
        rng = lambda k: f"{L[k]}2:{L[k]}{last}"  # noqa: E731
        for row, label, make in (
                (plan_row, "Plan total (routes in the plan)",
                 lambda k: f'=SUMIFS({rng(k)},{rng("in_plan")},"yes")'),
                (all_row, "All routes", lambda k: f"=SUM({rng(k)})")):
            _bold(safe_text(ws.cell(row=row, column=1), label))
            for key in ("pv_current", "pv_candidate", "=saving", "wtw_current_t",
                        "wtw_candidate_t", "=avoided", "abatement_t"):
                fmt = dict((k, f) for _, k, f in cols)[key]
                c = ws.cell(row=row, column=self.rcol[key], value=make(key))
                c.number_format = fmt
            c = ws.cell(row=row, column=self.rcol["=abatement"],
                        value=f"=IF({L['abatement_t']}{row}>0,-{L['=saving']}{row}/"
                              f"{L['abatement_t']}{row},\"–\")")
            c.number_format = wbb.MONEY_CENTS
        wbb.set_widths(ws, {1: 14, 2: 22, 3: 18, 4: 18, 5: 22, 6: 9,
                            **{c: 14 for c in range(7, len(cols))}, len(cols): 60})

    # ------------------------------------------------------------------ Order
    def _order(self, ws):
        cur = self.cur
        R = {k: _L(c) for k, c in self.rcol.items()}
        heads = ["Rank by saving", "Rank by abatement cost", "Vehicle", "Route", "Status",
                 f"PV saving [{cur}]", "Avoided [t CO2e]", f"Abatement cost [{cur}/t CO2e]",
                 f"Cumulative PV saving [{cur}]", "Cumulative avoided [t CO2e]",
                 "Chargers after this step", "Depot peak after this step [kW]",
                 "What would make it feasible"]
        wbb.header_row(ws, 1, heads)
        wbb.freeze(ws, "D2")
        for i, r in enumerate(self.s["order"]):
            row = 2 + i
            src = self.route_row[r["vehicle"]]
            write_value(ws.cell(row=row, column=1), r["rank_by_saving"], wbb.INTEGER)
            write_value(ws.cell(row=row, column=2), r["rank_by_abatement"], wbb.INTEGER)
            safe_text(ws.cell(row=row, column=3), r["vehicle"])
            safe_text(ws.cell(row=row, column=4), r["route"])
            safe_text(ws.cell(row=row, column=5), r["status"])
            for col, key, fmt in ((6, "=saving", wbb.MONEY), (7, "=avoided", wbb.MASS),
                                  (8, "=abatement", wbb.MONEY_CENTS)):
                c = ws.cell(row=row, column=col, value=f"='{SHEETS[0]}'!{R[key]}{src}")
                c.number_format = fmt
            ws.cell(row=row, column=9, value=f"=SUM($F$2:F{row})").number_format = wbb.MONEY
            ws.cell(row=row, column=10, value=f"=SUM($G$2:G{row})").number_format = wbb.MASS
            write_value(ws.cell(row=row, column=11), r["chargers_after"], wbb.INTEGER)
            write_value(ws.cell(row=row, column=12), r["peak_after_kW"], _KW)
            safe_text(ws.cell(row=row, column=13), "; ".join(r["remedies"]))
        wbb.set_widths(ws, {1: 9, 2: 11, 3: 14, 4: 22, 5: 22, **{c: 15 for c in range(6, 13)},
                            13: 70})

    # ------------------------------------------------------------------ Yearly
    def _yearly(self, ws):
        cur = self.cur
        heads = ["Year", "Calendar year", f"Cost as-is [{cur}]", f"Cost with the plan [{cur}]",
                 f"Saving [{cur}]", f"Cumulative saving [{cur}]", "Emissions as-is [t CO2e]",
                 "Emissions with the plan [t CO2e]", "Avoided [t CO2e]",
                 "Cumulative avoided [t CO2e]", "Chargers", "Depot peak [kW]",
                 "Electric trucks"]
        wbb.header_row(ws, 1, heads)
        wbb.freeze(ws, "C2")
        yearly = self.s["yearly"]
        first, last = 2, 1 + len(yearly)
        for i, r in enumerate(yearly):
            row = 2 + i
            write_value(ws.cell(row=row, column=1), r["year"], wbb.YEAR)
            write_value(ws.cell(row=row, column=2), r["calendar_year"], wbb.YEAR)
            write_value(ws.cell(row=row, column=3), r["cost_as_is"], wbb.MONEY)
            write_value(ws.cell(row=row, column=4), r["cost_plan"], wbb.MONEY)
            ws.cell(row=row, column=5, value=f"=C{row}-D{row}").number_format = wbb.MONEY
            ws.cell(row=row, column=6, value=f"=SUM($E${first}:E{row})").number_format = \
                wbb.MONEY
            write_value(ws.cell(row=row, column=7), r["wtw_as_is_t"], wbb.MASS)
            write_value(ws.cell(row=row, column=8), r["wtw_plan_t"], wbb.MASS)
            ws.cell(row=row, column=9, value=f"=G{row}-H{row}").number_format = wbb.MASS
            ws.cell(row=row, column=10, value=f"=SUM($I${first}:I{row})").number_format = \
                wbb.MASS
            write_value(ws.cell(row=row, column=11), r["chargers"], wbb.INTEGER)
            write_value(ws.cell(row=row, column=12), r["peak_kW"], _KW)
            write_value(ws.cell(row=row, column=13), r["electric_trucks"], wbb.INTEGER)
        tot, pv, rate_row = last + 1, last + 2, last + 4
        _bold(safe_text(ws.cell(row=tot, column=1), "Total"))
        _bold(safe_text(ws.cell(row=pv, column=1), "Present value"))
        wbb.add_named_input(
            self.wb, ws, rate_row, "discount_rate", "Discount rate [per year]",
            self.s["study"]["discount_rate"], "per year", "base scenario: finance.discount_rate",
            number_format=wbb.PERCENT)
        for col, fmt in ((3, wbb.MONEY), (4, wbb.MONEY), (5, wbb.MONEY), (7, wbb.MASS),
                         (8, wbb.MASS), (9, wbb.MASS)):
            c = _L(col)
            ws.cell(row=tot, column=col, value=f"=SUM({c}{first}:{c}{last})").number_format \
                = fmt
        for col in (3, 4, 5):
            c = _L(col)
            # spreadsheet NPV discounts its first value one period: year 0 is added as is
            # (library notes), which equals numpy_financial.npv over years 0..N.
            ws.cell(row=pv, column=col,
                    value=f"=NPV(discount_rate,{c}{first + 1}:{c}{last})+{c}{first}"
                    ).number_format = wbb.MONEY
        self.yearly_rows = (first, last, tot, pv)
        wbb.set_widths(ws, {1: 14, 2: 10, **{c: 16 for c in range(3, 14)}})
        if len(yearly) > 1:
            wbb.add_chart(ws, "line", data_ws=ws, header_row=1, first_row=first,
                          last_row=last, cat_col=2, first_col=6, last_col=6,
                          anchor=f"O{2}", title="Cumulative saving of the plan",
                          x_title="Year", y_title=f"Cumulative saving [{cur}]",
                          y_number_format=wbb.MONEY)

    # ------------------------------------------------------------------ Depot
    def _depot(self, ws):
        s = self.s
        dep = s["depot"]
        plan = dep["plan"]
        sched = self.result.depot_plan
        vehicles, _, _ = depot_vehicles(self.result, "plan")
        step = table_interval(sched.slot)
        per = (interval_means(sched.truck_power, sched.slot, step) / 1e3
               if len(vehicles) else np.zeros((0, int(86400 / step))))
        n_int = per.shape[1]
        head, first = 8, 9
        last = first + n_int - 1
        nt = len(vehicles)
        _title(ws, "Depot power with the plan, by time of day")
        # label in A (runs over the empty B and C), value in D
        info = [
            ("Charging rule", "text", RULES.get(s["charging_rule"], s["charging_rule"])),
            ("Chargers", "value", plan["chargers"]),
            ("Charger power [kW]", "value", dep["charger_kW"]),
            (f"Peak, highest {fm.number(dep['demand_interval_min'], trim=True)}-minute mean "
             "[kW]", "formula",
             f"=MAX(C{first}:C{last})"),
            ("Energy per operating day [kWh]", "formula",
             f"=SUM(C{first}:C{last})*{float(step)!r}/3600"),  # full precision
        ]
        self.depot_info = {}
        for k, (label, kind, value) in enumerate(info, start=2):
            _bold(safe_text(ws.cell(row=k, column=1), label))
            c = ws.cell(row=k, column=4)
            if kind == "formula":
                c.value = value
                c.number_format = _KW if "MAX" in value else wbb.ENERGY
            else:
                write_value(c, value, wbb.INTEGER if isinstance(value, int) else _KW)
            self.depot_info[label] = k
        heads = ["From", "To", "Depot total [kW]"] + [f"{v} [kW]" for v in vehicles]
        wbb.header_row(ws, head, heads)
        for j in range(n_int):
            row = first + j
            a, b = j * step, (j + 1) * step
            safe_text(ws.cell(row=row, column=1), f"{int(a // 3600):02d}:{int(a % 3600 // 60):02d}")
            safe_text(ws.cell(row=row, column=2),
                      f"{int(b // 3600) % 24:02d}:{int(b % 3600 // 60):02d}")
            if nt:
                ws.cell(row=row, column=3,
                        value=f"=SUM(D{row}:{_L(3 + nt)}{row})").number_format = _KW
            else:
                write_value(ws.cell(row=row, column=3), 0.0, _KW)
            for k in range(nt):
                write_value(ws.cell(row=row, column=4 + k), float(per[k, j]), _KW)
        # per-truck shares, to the right (same header row, so both stay frozen)
        c0 = 4 + nt + 1
        self.share_cols = c0
        sh = ["Vehicle", "Route", "Arrives", "Leaves", "Energy per day [kWh]",
              "On a charger [h/day]", "Share of fixed depot costs [%]",
              "Contribution to the peak [kW]", "Share of the demand charge [%]"]
        wbb.header_row(ws, head, sh, start_col=c0)
        routes = {r["vehicle"]: r["route"] for r in s["routes"]}
        trucks = plan["trucks"]
        r0, r1 = first, first + max(len(trucks), 1) - 1
        occ, con = _L(c0 + 5), _L(c0 + 7)
        for k, t in enumerate(trucks):
            row = first + k
            safe_text(ws.cell(row=row, column=c0), t["vehicle"])
            safe_text(ws.cell(row=row, column=c0 + 1), routes.get(t["vehicle"], ""))
            safe_text(ws.cell(row=row, column=c0 + 2), t["arrive"])
            safe_text(ws.cell(row=row, column=c0 + 3), t["depart"])
            write_value(ws.cell(row=row, column=c0 + 4), t["energy_kWh_per_day"], wbb.ENERGY)
            write_value(ws.cell(row=row, column=c0 + 5), t["occupancy_h"], _HOURS)
            # the model's rule (tco.depot._shares): proportional, equal shares if all zero
            for col, src in ((c0 + 6, occ), (c0 + 8, con)):
                rng = f"${src}${r0}:${src}${r1}"
                ws.cell(row=row, column=col,
                        value=f"=IF(SUM({rng})>0,{src}{row}/SUM({rng}),1/ROWS({rng}))"
                        ).number_format = wbb.PERCENT
            write_value(ws.cell(row=row, column=c0 + 7), t["peak_contribution_kW"], _KW)
        if trucks:
            tot = r1 + 1
            _bold(safe_text(ws.cell(row=tot, column=c0), "All trucks"))
            for col, fmt in ((c0 + 4, wbb.ENERGY), (c0 + 5, _HOURS), (c0 + 6, wbb.PERCENT),
                             (c0 + 7, _KW), (c0 + 8, wbb.PERCENT)):
                c = _L(col)
                ws.cell(row=tot, column=col, value=f"=SUM({c}{r0}:{c}{r1})").number_format = fmt
        self.depot_rows = (head, first, last)
        wbb.freeze(ws, f"C{first}")
        wbb.set_widths(ws, {1: 10, 2: 10, 3: 16, **{4 + k: 12 for k in range(nt)},
                            c0: 14, c0 + 1: 22, **{c0 + k: 13 for k in range(2, 9)}})
        if nt:
            wbb.add_chart(ws, "bar", data_ws=ws, header_row=head, first_row=first,
                          last_row=last, cat_col=1, first_col=4, last_col=3 + nt,
                          anchor=f"{_L(c0)}{first + len(trucks) + 3}", stacked=True,
                          title="Depot power by time of day (the plan)", x_title="Time of day",
                          y_title="Power [kW]", y_number_format='#,##0')

    # ------------------------------------------------------------------ Notes
    def _notes(self, ws):
        s = self.s
        _title(ws, s["study"]["name"])
        info = [("Notes", s["study"]["notes"]), ("Created", s["created"]),
                ("Tool version", s["tool"]["version"]),
                ("Base scenario", s["inputs"]["base_file"]),
                ("Base scenario fingerprint (SHA-256)", s["inputs"]["base_fingerprint_sha256"]),
                ("Fleet file", s["inputs"]["fleet_file"]),
                ("Fleet file SHA-256", s["inputs"]["fleet_file_sha256"]),
                ("Currency (ISO 4217)", s["currency"]),
                ("Charging rule", RULES.get(s["charging_rule"], s["charging_rule"])),
                ("Money basis", s["study"]["money_basis"]),
                ("Discount rate [per year]", s["study"]["discount_rate"])]
        row = 2
        for label, value in info:
            _bold(safe_text(ws.cell(row=row, column=1), label))
            write_value(ws.cell(row=row, column=2), value,
                        wbb.PERCENT if label.startswith("Discount") else None)
            row += 1

        def section(row, title):
            from openpyxl.styles import Font

            c = safe_text(ws.cell(row=row, column=1), title)
            c.font = Font(bold=True, size=12, color="0B3954")
            return row + 1

        row = section(row + 1, "Cautions")
        for text in s["cautions"]:
            _wrap(safe_text(ws.cell(row=row, column=2), text))
            row += 1
        row = section(row + 1, "Method")
        for title, text, eq in METHOD_NOTES:
            _bold(safe_text(ws.cell(row=row, column=1), title))
            _wrap(safe_text(ws.cell(row=row, column=2), text + (f"  {eq}" if eq else "")))
            row += 1
        row = section(row + 1, "Warnings")
        for text in s["warnings"] or ["No warnings."]:
            _wrap(safe_text(ws.cell(row=row, column=2), text))
            row += 1
        row = section(row + 1, "Sources: every input of the base scenario")
        wbb.header_row(ws, row, ["Input", "Value", "Unit", "Source"])
        self.sources_header = row
        row += 1
        for a in s["assumptions"]:
            v = a["value"]
            if isinstance(v, list):
                v = ", ".join(str(x) for x in v)
            safe_text(ws.cell(row=row, column=1), a["field"])
            write_value(ws.cell(row=row, column=2), v)
            safe_text(ws.cell(row=row, column=3), a["unit"])
            _wrap(safe_text(ws.cell(row=row, column=4),
                            "user" if a["source"] == "user" else f"default: {a['source']}"))
            row += 1
        wbb.freeze(ws, "A2")
        wbb.set_widths(ws, {1: 40, 2: 90, 3: 14, 4: 60})


def build_fleet_workbook(result, summary: dict):
    """The fleet workbook as an :class:`openpyxl.Workbook` (not saved).

    Sheets (:data:`SHEETS`): ``Routes`` (one row per vehicle; PV saving, avoided tonnes
    and abatement cost as formulas; plan and fleet totals by ``SUMIFS``/``SUM``),
    ``Order`` (links to Routes, cumulative sums), ``Yearly`` (saving and avoided as
    as-is − plan, cumulative sums, totals, present values by ``NPV`` over the named
    ``discount_rate``), ``Depot`` (the plan's power per interval of the day per truck,
    totals, the peak as ``MAX``, per-truck shares by formula), ``Notes`` (cautions,
    method, warnings, the base scenario's inputs and their sources).

    Parameters
    ----------
    result : tco.fleet.FleetResult
    summary : dict
        Its ``fleet.json`` content.
    """
    return _FleetBook(result, summary).build()


def write_fleet_workbook(result, summary: dict, path) -> None:
    """Write :func:`build_fleet_workbook` to ``path`` (``.xlsx``)."""
    from tco.report.workbook_values import save_with_values

    save_with_values(build_fleet_workbook(result, summary), Path(path))


# =========================================================================== writer
def write_fleet_outputs(result, out_root, json_only: bool = False,
                        progress=None) -> list[Path]:
    """Write the fleet outputs into ``out_root/<slug>/``, all or nothing.

    Parameters
    ----------
    result : tco.fleet.FleetResult
    out_root : str or Path
        Output root; the files go into its ``<base scenario slug>`` folder.
    json_only : bool
        Write ``fleet.json`` only.
    progress : tco.progress.Steps, optional

    Returns
    -------
    list of Path
        The files written (:data:`FILES` order; only ``fleet.json`` with ``json_only``).

    Raises
    ------
    InputError
        The output folder cannot be written, or the report tried to fetch an outside
        resource (a defect: nothing is moved into place then).
    """
    target = Path(out_root) / result.base.slug
    summary = build_fleet_summary(result)
    page = summary["study"]["page_size"]
    names = ["fleet.json"]
    with staged_output(target) as stage:
        (stage / "fleet.json").write_text(dumps(summary), encoding="utf-8")
        if not json_only:
            if progress:
                progress.start("fleet report: charts and text")
            context = build_fleet_context(result, summary)
            write_html_and_pdf(lambda for_print: render_fleet_html(
                context, for_print=for_print, page_size=page), stage, "fleet-report",
                "the fleet report", progress=progress)
            if progress:
                progress.start("writing the fleet workbook")
            write_fleet_workbook(result, summary, stage / "fleet-workbook.xlsx")
            names += ["fleet-report.html", "fleet-report.pdf", "fleet-workbook.xlsx"]
    return [target / n for n in names]
