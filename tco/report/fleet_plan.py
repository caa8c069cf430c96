"""The fleet transition plan in ``fleet.json``, the fleet report and the fleet workbook.

:func:`transition_summary` turns a :class:`tco.plan.FleetPlan` into the JSON-safe
``transition`` block of ``fleet.json`` (the one source of every figure shown);
:func:`transition_context` formats it for the report (tables and two charts);
:func:`add_transition_sheets` writes it into the workbook, with the sums, the headroom
against the budget and the grid, and the gap to the target as live formulas.

``transition`` keys
-------------------
``solver`` ``{name, mip_gap, seconds}`` · ``settings`` (the plan inputs, in the units of
their key names) · ``target_met`` (bool, or null without a target) · ``shortfall_t``
(total over the target, 0 when met) · ``binds`` (list of str: what stops the target
being met) · ``objective`` (present value of the plan with the carbon price) ·
``pv_plan`` / ``pv_all_diesel`` / ``pv_saving`` (without the carbon price; the plan
against every vehicle staying diesel) · ``pv_depot`` (the shared depot's part of
``pv_plan``: chargers, grid connection and upgrade) · ``electric_vehicles`` (int) ·
``schedule`` (records: ``vehicle, route, feasible, decision, purchase_year,
diesel_replacement_year, pv, pv_diesel, saving, loses_money, reason``) ·
``yearly`` (records by calendar year of purchase/service: ``calendar_year, capital,
capital_budget, chargers_bought, chargers, depot_peak_kW, grid_capacity_kW,
grid_upgrade_ordered, electric_trucks, scope_1_t, scope_2_location_t, scope_2_market_t,
scope_3_cat3_t, scope_1_2_t`` (Scope 1 + Scope 2 on the target's basis), ``target_t``,
``shortfall_t``; since 1.2: ``capital_outlay`` (capital basis), ``cash_outlay`` (cash
basis; ``capital`` is the one on ``settings.budget_basis``), ``chargers_rederived`` and
``depot_peak_rederived_kW`` (the depot schedule re-run on that year's electric trucks)) · ``macc`` (records in order of cost per tonne: ``vehicle,
cost_per_t, avoided_t, cumulative_t``) · ``shadow_prices`` (records: ``constraint``
(budget, grid or target), ``calendar_year``, ``binding``, ``slack``, ``dual`` (LP
relaxation, currency per unit of right-hand side), ``near`` (slack within 5 % of the
limit), ``unit``, ``step``, ``step_saving``
(integer re-solve, currency)) · ``notes`` (list of str) · since 1.2: ``depot_rounds``
(solves with the depot coefficients re-derived from the plan's trucks), ``depot_settled``
(bool: the last solve's trucks gave back its coefficients) and ``settings.budget_basis``
(``capital`` or ``cash``).
"""
from __future__ import annotations

import math

import numpy as np

from tco.report import charts
from tco.report import formatting as fm
from tco.report.context import fmt_number as _n

__all__ = ["transition_summary", "transition_context", "add_transition_sheets"]

_YEAR_S = 365.25 * 86400.0


def _f(x):
    if x is None:
        return None
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def _i(x):
    return None if x is None or (isinstance(x, float) and not math.isfinite(x)) else int(x)


def transition_summary(result) -> dict | None:
    """The ``transition`` block of fleet.json (None when no plan was asked for)."""
    tp = getattr(result, "transition", None)
    if tp is None:
        return None
    st = tp.settings
    sol = tp.solution
    s2 = f"scope_2_{tp.basis}_t"
    yearly = []
    for r in tp.yearly.to_dict("records"):
        rec = {
            "calendar_year": int(r["calendar_year"]), "capital": _f(r["capital"]),
            "capital_budget": _f(r["capital_budget"]),
            "chargers_bought": int(r["chargers_bought"]), "chargers": int(r["chargers"]),
            "depot_peak_kW": _f(r["depot_peak_kw"]),
            "grid_capacity_kW": _f(r["grid_capacity_kw"]),
            "grid_upgrade_ordered": bool(r["grid_upgrade_ordered"]),
            "electric_trucks": int(r["electric_trucks"]),
            "scope_1_t": _f(r["scope_1_t"]), "scope_2_location_t": _f(r["scope_2_location_t"]),
            "scope_2_market_t": _f(r["scope_2_market_t"]),
            "scope_3_cat3_t": _f(r["scope_3_cat3_t"]),
            "target_t": _f(r["target_t"]), "shortfall_t": _f(r["shortfall_t"]),
            "capital_outlay": _f(r.get("capital_outlay")),
            "cash_outlay": _f(r.get("cash_outlay")),
            "chargers_rederived": _i(r.get("chargers_rederived")),
            "depot_peak_rederived_kW": _f(r.get("depot_peak_rederived_kw")),
        }
        rec["scope_1_2_t"] = rec["scope_1_t"] + rec[s2]
        yearly.append(rec)
    target = None
    if st.target is not None:
        target = {"reduction": st.target.reduction, "year": st.target.year,
                  "base_year": st.target.base_year, "basis": st.target.basis,
                  "base_emissions_t": None if st.target.base_emissions is None
                  else st.target.base_emissions / 1000.0}
    budget = st.capital_budget
    schedule = [{
        "vehicle": r["vehicle"], "route": r["route"], "feasible": bool(r["feasible"]),
        "decision": r["decision"], "purchase_year": _i(r["purchase_year"]),
        "diesel_replacement_year": _i(r["diesel_replacement_year"]),
        "pv": _f(r["present_value"]), "pv_diesel": _f(r["present_value_diesel"]),
        "saving": _f(r["saving"]), "loses_money": bool(r["loses_money"]),
        "reason": r["reason"]} for r in tp.schedule.to_dict("records")]
    return {
        "solver": {"name": "HiGHS (scipy.optimize.milp)", "mip_gap": _f(sol.mip_gap),
                   "seconds": _f(sol.solve_seconds)},
        "settings": {
            "service_life_yr": st.service_life / _YEAR_S,
            "earliest_year": st.earliest_year,
            "capital_budget": budget if not isinstance(budget, dict)
            else {str(k): float(v) for k, v in budget.items()},
            "grid_capacity_kW": None if st.grid_capacity is None else st.grid_capacity / 1e3,
            "grid_upgrade_capacity_kW": st.grid_upgrade_capacity / 1e3,
            "grid_upgrade_cost": st.grid_upgrade_cost,
            "grid_upgrade_lead_time_yr": st.grid_upgrade_lead_time,
            "carbon_price_per_t": st.carbon_price,
            "budget_basis": st.budget_basis,
            "target": target,
        },
        "target_met": None if st.target is None else bool(sol.target_met),
        "shortfall_t": float(np.sum(sol.shortfall)),
        "binds": list(sol.binds),
        "objective": _f(tp.objective),
        "pv_plan": _f(tp.present_value),
        "pv_all_diesel": _f(tp.present_value_diesel),
        "pv_saving": _f(tp.present_value_diesel - tp.present_value),
        "pv_depot": _f(tp.present_value - sum(r["present_value"] for r in
                                                tp.schedule.to_dict("records"))),
        "electric_vehicles": sum(1 for r in schedule if r["decision"] == "electric"),
        "schedule": schedule,
        "yearly": yearly,
        "macc": [{"vehicle": r["vehicle"], "cost_per_t": _f(r["cost_per_t"]),
                  "avoided_t": _f(r["avoided_t"]), "cumulative_t": _f(r["cumulative_t"])}
                 for r in tp.macc.to_dict("records")],
        "shadow_prices": [{
            "constraint": r["constraint"], "calendar_year": int(r["calendar_year"]),
            "binding": bool(r["binding"]), "near": bool(r["near"]), "slack": _f(r["slack"]),
            "dual": _f(r["dual"]),
            "unit": r["unit"], "step": _f(r["step"]), "step_saving": _f(r["step_saving"])}
            for r in tp.shadow.to_dict("records")],
        "notes": list(tp.notes),
        "depot_rounds": int(getattr(tp, "depot_rounds", 1)),
        "depot_settled": bool(getattr(tp, "depot_converged", True)),
    }


# --------------------------------------------------------------------------- report
def _binding(r: dict) -> str:
    return "yes" if r["binding"] else "near" if r["near"] else "no"


def _t(title, columns, align, rows, note=""):
    return {"title": title, "columns": columns, "align": list(align), "rows": rows,
            "foot": [], "note": note}


def _unit(unit: str, currency: str) -> str:
    """A constraint's unit as a reader sees it: the currency's code, not "currency"."""
    return currency if unit == "currency" else unit


def macc_chart(macc: list[dict], currency: str) -> str:
    """Marginal abatement cost curve: bars as wide as each route's tonnes, as high as its
    cost per tonne, in order of cost (an SVG data URI)."""
    with charts.chart_style():
        fig, axes = charts.new_figure(3.0)
        ax = axes[0][0]
        left = 0.0
        for r in macc:
            w, h = r["avoided_t"] or 0.0, r["cost_per_t"] or 0.0
            ax.bar(left, h, width=w, align="edge",
                   color="#2e7d32" if h <= 0 else "#c62828", edgecolor="white")
            if len(macc) <= 20:
                ax.text(left + w / 2, h, charts.plain_text(r["vehicle"]), ha="center",
                        va="bottom" if h >= 0 else "top", fontsize=7)
            left += w
        ax.axhline(0, color="black", linewidth=0.6)
        ax.set_xlabel("Cumulative emissions avoided over the period [t CO2e]")
        ax.set_ylabel(f"Cost of abatement [{currency}/t CO2e]")
        return charts.svg_data_uri(fig)


def emissions_chart(yearly: list[dict], basis: str) -> str:
    """Fleet emissions per year by scope (stacked) against the target line."""
    with charts.chart_style():
        fig, axes = charts.new_figure(3.0)
        ax = axes[0][0]
        years = [r["calendar_year"] for r in yearly]
        s1 = np.array([r["scope_1_t"] for r in yearly])
        s2 = np.array([r[f"scope_2_{basis}_t"] for r in yearly])
        s3 = np.array([r["scope_3_cat3_t"] for r in yearly])
        ax.bar(years, s1, color="#455a64", label="Scope 1")
        ax.bar(years, s2, bottom=s1, color="#1e88e5", label=f"Scope 2 ({basis}-based)")
        ax.bar(years, s3, bottom=s1 + s2, color="#b0bec5",
               label="Scope 3 cat. 3 (not in the target)")
        tgt = [(y, r["target_t"]) for y, r in zip(years, yearly) if r["target_t"] is not None]
        if tgt:
            ax.step([y for y, _ in tgt], [v for _, v in tgt], where="mid", color="#c62828",
                    linewidth=1.5, label="Target (Scope 1 + 2)")
        ax.set_ylabel("Emissions [t CO2e]")
        ax.set_xlabel("Year")
        ax.legend(loc="upper right", fontsize=7)
        return charts.svg_data_uri(fig)


def transition_context(summary: dict) -> dict | None:
    """Report tables and figures of the plan (every figure from fleet.json)."""
    tr = summary.get("transition")
    if not tr:
        return None
    cur = summary["currency"]
    basis = (tr["settings"]["target"] or {}).get("basis", "location")
    sched = _t("Schedule by vehicle",
               ["Vehicle", "Route", "Decision", "Electric from", "New diesel in",
                f"PV of the choice [{cur}]", f"PV staying diesel [{cur}]",
                f"Saving [{cur}]", "Why (loss-making routes)"], "lllrrrrrl",
               [[r["vehicle"], r["route"], r["decision"] if r["feasible"] else
                 "diesel (route not feasible)",
                 str(r["purchase_year"] or "–"), str(r["diesel_replacement_year"] or "–"),
                 _n(r["pv"]), _n(r["pv_diesel"]), _n(r["saving"]), r["reason"] or ""]
                for r in tr["schedule"]],
               "Present values of each vehicle's own cash flows (truck, energy, running "
               "costs, resale of the current truck), shared depot costs and the carbon price "
               "left out. An electric truck bought in a year runs from that year.")
    bb = tr["settings"].get("budget_basis", "capital")
    spent = "Cash out" if bb == "cash" else "Capital"
    yearly = _t("Capital, depot and emissions by year",
                ["Year", f"{spent} [{cur}]", f"Budget [{cur}]", "Chargers (new)",
                 "Depot peak [kW]", "Schedule re-run: chargers, peak [kW]",
                 "Grid capacity [kW]", "Electric trucks",
                 "Scope 1 [t]", f"Scope 2 {basis} [t]", "Scope 3 cat. 3 [t]",
                 "Target [t]", "Over target [t]"], "rrrrrrrrrrrrr",
                [[str(r["calendar_year"]), _n(r["capital"]),
                  "–" if r["capital_budget"] is None else _n(r["capital_budget"]),
                  f"{r['chargers']} ({r['chargers_bought']})", _n(r["depot_peak_kW"]),
                  "–" if r.get("chargers_rederived") is None else
                  f"{r['chargers_rederived']}, {_n(r['depot_peak_rederived_kW'])}",
                  "–" if r["grid_capacity_kW"] is None else _n(r["grid_capacity_kW"])
                  + (" (upgrade ordered)" if r["grid_upgrade_ordered"] else ""),
                  str(r["electric_trucks"]), _n(r["scope_1_t"], 1),
                  _n(r[f"scope_2_{basis}_t"], 1), _n(r["scope_3_cat3_t"], 1),
                  "–" if r["target_t"] is None else _n(r["target_t"], 1),
                  _n(r["shortfall_t"], 1)] for r in tr["yearly"]],
                (("Cash out (the budget's basis): down payments and loan or lease payments "
                  "of the trucks bought in the plan, chargers, the grid connection and "
                  "upgrade, less the resale of the trucks replaced. ") if bb == "cash" else
                 ("Capital (the budget's basis): truck prices with taxes and fees less "
                  "grants, chargers, the grid connection and upgrade, in the year bought "
                  "(loans and resale proceeds not netted). "))
                + "Schedule re-run: the depot schedule of that year's electric trucks. "
                "Emissions of the year's service; the target covers Scope 1 + 2.")
    shadow = _t("Shadow prices of the budget, grid and target constraints",
                ["Constraint", "Year", "Binding", "Slack", "Marginal value (LP)",
                 "Step", f"Saving of the step [{cur}]"], "lrlrrrr",
                [[r["constraint"], str(r["calendar_year"]), _binding(r),
                  f"{fm.number(r['slack'])} {_unit(r['unit'], cur)}",
                  "–" if r["dual"] is None else
                  f"{fm.number(-r['dual'])} {cur} per {_unit(r['unit'], cur)}",
                  f"{fm.number(r['step'])} {_unit(r['unit'], cur)}",
                  "–" if r["step_saving"] is None else _n(r["step_saving"])]
                 for r in tr["shadow_prices"]],
                "Marginal value: what one more unit of the constraint's limit saves in the LP "
                "relaxation of the plan (integer choices relaxed; HiGHS duals). Saving of the "
                "step: the whole-truck plan re-solved with the limit raised by the step.")
    macc = _t("Marginal abatement cost of the routes",
              ["Vehicle", f"Cost per tonne [{cur}/t]", "Avoided [t]", "Cumulative [t]"],
              "lrrr", [[r["vehicle"], _n(r["cost_per_t"]), _n(r["avoided_t"], 1),
                        _n(r["cumulative_t"], 1)] for r in tr["macc"]],
              "Each feasible route electrified from the start over the whole period "
              "(negative: it saves money); well-to-wheel tonnes, location-based.")
    key = [
        {"label": "Vehicles going electric", "value": f"{tr['electric_vehicles']} of "
                                                      f"{len(tr['schedule'])}"},
        {"label": "Present value of the plan", "value": f"{_n(tr['pv_plan'])} {cur}"},
        {"label": "Saving against staying diesel", "value": f"{_n(tr['pv_saving'])} {cur}"},
    ]
    if tr["target_met"] is not None:
        key.append({"label": "Emissions target", "value": "met" if tr["target_met"] else
                    f"missed by {_n(tr['shortfall_t'], 1)} t"})
    return {"key_figures": key, "notes": list(tr["notes"]), "schedule": sched,
            "yearly": yearly, "shadow": shadow, "macc": macc,
            "macc_chart": {"title": "Marginal abatement cost curve of the routes",
                           "caption": "Width: tonnes avoided; height: cost per tonne "
                                      "(below zero the route saves money).",
                           "uri": macc_chart(tr["macc"], cur)},
            "emissions_chart": {"title": "Fleet emissions by scope against the target",
                                "caption": "Stacked by scope with the plan; the line is the "
                                           "target on Scope 1 + 2.",
                                "uri": emissions_chart(tr["yearly"], basis)},
            "method": ("The plan is a mixed-integer programme solved with HiGHS "
                       "(scipy.optimize.milp): one choice per vehicle (stay diesel, or "
                       "electric bought in a given year within its replacement window), "
                       "whole chargers by year, the grid connection and an optional grid "
                       "upgrade; it respects the capital budget, the grid capacity and the "
                       "routes' feasibility, and minimises the fleet's present value with "
                       "the carbon price, subject to the target (or, when the target cannot "
                       "be met, first the smallest shortfall).")}


# --------------------------------------------------------------------------- workbook
def add_transition_sheets(wb, summary: dict) -> None:
    """Sheets ``Plan`` (schedule) and ``Plan by year`` (capital against budget with the
    headroom by formula, chargers, peak against grid, emissions by scope with Scope 1 + 2
    and the gap to the target by formula), ``Abatement`` (cumulative tonnes by formula)
    and ``Shadow prices``."""
    from tco.report import workbook_base as wbb
    from tco.report.workbook_base import safe_text, write_value

    tr = summary.get("transition")
    if not tr:
        return
    cur = summary["currency"]
    basis = (tr["settings"]["target"] or {}).get("basis", "location")
    ws = wb.create_sheet("Plan")
    heads = ["Vehicle", "Route", "Feasible", "Decision", "Electric from", "New diesel in",
             f"PV of the choice [{cur}]", f"PV staying diesel [{cur}]", f"Saving [{cur}]",
             "Loses money", "Why"]
    wbb.header_row(ws, 1, heads)
    wbb.freeze(ws, "B2")
    rows = tr["schedule"]
    for i, r in enumerate(rows):
        row = 2 + i
        safe_text(ws.cell(row=row, column=1), r["vehicle"])
        safe_text(ws.cell(row=row, column=2), r["route"])
        safe_text(ws.cell(row=row, column=3), "yes" if r["feasible"] else "no")
        safe_text(ws.cell(row=row, column=4), r["decision"])
        write_value(ws.cell(row=row, column=5), r["purchase_year"], wbb.YEAR)
        write_value(ws.cell(row=row, column=6), r["diesel_replacement_year"], wbb.YEAR)
        write_value(ws.cell(row=row, column=7), r["pv"], wbb.MONEY)
        write_value(ws.cell(row=row, column=8), r["pv_diesel"], wbb.MONEY)
        ws.cell(row=row, column=9, value=f"=H{row}-G{row}").number_format = wbb.MONEY
        safe_text(ws.cell(row=row, column=10), "yes" if r["loses_money"] else "no")
        safe_text(ws.cell(row=row, column=11), r["reason"])
    last = 1 + len(rows)
    tot = last + 1
    safe_text(ws.cell(row=tot, column=1), "Vehicles")
    for col in (7, 8, 9):
        c = chr(64 + col)
        ws.cell(row=tot, column=col, value=f"=SUM({c}2:{c}{last})").number_format = wbb.MONEY
    ws.cell(row=tot, column=4, value=f'=COUNTIF(D2:D{last},"electric")')
    safe_text(ws.cell(row=tot + 1, column=1), "Shared depot (chargers, grid connection, "
                                               "upgrade)")
    write_value(ws.cell(row=tot + 1, column=7), tr["pv_depot"], wbb.MONEY)
    safe_text(ws.cell(row=tot + 2, column=1), "Plan")
    ws.cell(row=tot + 2, column=7, value=f"=G{tot}+G{tot + 1}").number_format = wbb.MONEY
    ws.cell(row=tot + 2, column=8, value=f"=H{tot}").number_format = wbb.MONEY
    ws.cell(row=tot + 2, column=9, value=f"=H{tot + 2}-G{tot + 2}").number_format = wbb.MONEY
    note = tot + 4
    for k, text in enumerate(tr["notes"]):
        safe_text(ws.cell(row=note + k, column=1), text)
    wbb.set_widths(ws, {1: 12, 2: 18, 3: 9, 4: 10, 5: 12, 6: 12, 7: 16, 8: 16, 9: 14,
                        10: 11, 11: 60})

    ws = wb.create_sheet("Plan by year")
    bb = tr["settings"].get("budget_basis", "capital")
    heads = ["Year", f"{'Cash out' if bb == 'cash' else 'Capital'} (budget basis) [{cur}]",
             f"Budget [{cur}]", f"Headroom [{cur}]",
             "Chargers bought", "Chargers", "Depot peak [kW]", "Grid capacity [kW]",
             "Grid headroom [kW]", "Electric trucks", "Scope 1 [t]",
             f"Scope 2 {basis} [t]", "Scope 1 + 2 [t]", "Scope 3 cat. 3 [t]", "Target [t]",
             "Over target [t]", f"Capital [{cur}]", f"Cash out [{cur}]",
             "Chargers (schedule re-run)", "Depot peak, schedule re-run [kW]"]
    wbb.header_row(ws, 1, heads)
    wbb.freeze(ws, "B2")
    yr = tr["yearly"]
    for i, r in enumerate(yr):
        row = 2 + i
        write_value(ws.cell(row=row, column=1), r["calendar_year"], wbb.YEAR)
        write_value(ws.cell(row=row, column=2), r["capital"], wbb.MONEY)
        write_value(ws.cell(row=row, column=3), r["capital_budget"], wbb.MONEY)
        ws.cell(row=row, column=4, value=f'=IF(C{row}="","",C{row}-B{row})'
                ).number_format = wbb.MONEY
        write_value(ws.cell(row=row, column=5), r["chargers_bought"], wbb.INTEGER)
        ws.cell(row=row, column=6, value=f"=SUM($E$2:E{row})").number_format = wbb.INTEGER
        write_value(ws.cell(row=row, column=7), r["depot_peak_kW"], wbb.ENERGY)
        write_value(ws.cell(row=row, column=8), r["grid_capacity_kW"], wbb.ENERGY)
        ws.cell(row=row, column=9, value=f'=IF(H{row}="","",H{row}-G{row})'
                ).number_format = wbb.ENERGY
        write_value(ws.cell(row=row, column=10), r["electric_trucks"], wbb.INTEGER)
        write_value(ws.cell(row=row, column=11), r["scope_1_t"], wbb.MASS)
        write_value(ws.cell(row=row, column=12), r[f"scope_2_{basis}_t"], wbb.MASS)
        ws.cell(row=row, column=13, value=f"=K{row}+L{row}").number_format = wbb.MASS
        write_value(ws.cell(row=row, column=14), r["scope_3_cat3_t"], wbb.MASS)
        write_value(ws.cell(row=row, column=15), r["target_t"], wbb.MASS)
        ws.cell(row=row, column=16, value=f'=IF(O{row}="",0,MAX(0,M{row}-O{row}))'
                ).number_format = wbb.MASS
        write_value(ws.cell(row=row, column=17), r.get("capital_outlay"), wbb.MONEY)
        write_value(ws.cell(row=row, column=18), r.get("cash_outlay"), wbb.MONEY)
        write_value(ws.cell(row=row, column=19), r.get("chargers_rederived"), wbb.INTEGER)
        write_value(ws.cell(row=row, column=20), r.get("depot_peak_rederived_kW"), wbb.ENERGY)
    last = 1 + len(yr)
    safe_text(ws.cell(row=last + 1, column=1), "Total")
    ws.cell(row=last + 1, column=2, value=f"=SUM(B2:B{last})").number_format = wbb.MONEY
    wbb.set_widths(ws, {c: 14 for c in range(1, 21)})
    if len(yr) > 1:
        wbb.add_chart(ws, "line", data_ws=ws, header_row=1, first_row=2, last_row=last,
                      cat_col=1, first_col=13, last_col=13, anchor=f"A{last + 4}",
                      title="Scope 1 + 2 with the plan", x_title="Year",
                      y_title="Emissions [t CO2e]", y_number_format=wbb.MASS)

    ws = wb.create_sheet("Abatement")
    wbb.header_row(ws, 1, ["Vehicle", f"Cost per tonne [{cur}/t]", "Avoided [t]",
                           "Cumulative [t]"])
    for i, r in enumerate(tr["macc"]):
        row = 2 + i
        safe_text(ws.cell(row=row, column=1), r["vehicle"])
        write_value(ws.cell(row=row, column=2), r["cost_per_t"], wbb.MONEY)
        write_value(ws.cell(row=row, column=3), r["avoided_t"], wbb.MASS)
        ws.cell(row=row, column=4, value=f"=SUM($C$2:C{row})").number_format = wbb.MASS
    wbb.set_widths(ws, {1: 12, 2: 18, 3: 14, 4: 14})

    ws = wb.create_sheet("Shadow prices")
    wbb.header_row(ws, 1, ["Constraint", "Year", "Binding", "Slack", "Unit",
                           f"Marginal value (LP) [{cur} per unit]", "Step",
                           f"Saving of the step [{cur}]"])
    for i, r in enumerate(tr["shadow_prices"]):
        row = 2 + i
        safe_text(ws.cell(row=row, column=1), r["constraint"])
        write_value(ws.cell(row=row, column=2), r["calendar_year"], wbb.YEAR)
        safe_text(ws.cell(row=row, column=3), _binding(r))
        write_value(ws.cell(row=row, column=4), r["slack"], wbb.MASS)
        safe_text(ws.cell(row=row, column=5), _unit(r["unit"], cur))
        write_value(ws.cell(row=row, column=6), None if r["dual"] is None else -r["dual"],
                    "#,##0.000")
        write_value(ws.cell(row=row, column=7), r["step"], wbb.MASS)
        write_value(ws.cell(row=row, column=8), r["step_saving"], wbb.MONEY)
    safe_text(ws.cell(row=len(tr["shadow_prices"]) + 3, column=1),
              "Marginal value: LP relaxation of the plan (HiGHS duals), per unit of the "
              "limit. Saving of the step: the integer plan re-solved with the limit raised "
              "by the step.")
    wbb.set_widths(ws, {1: 12, 2: 8, 3: 9, 4: 12, 5: 10, 6: 26, 7: 12, 8: 20})
    study = (summary.get("study") or {}).get("name") or ""
    for title in ("Plan", "Plan by year", "Abatement", "Shadow prices"):
        # one page wide, the header row and the first column on every page
        wbb.print_setup(wb[title], study, title_rows="1:1", title_cols="A:A")
