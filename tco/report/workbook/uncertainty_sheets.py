"""The Sensitivity and Sample statistics sheets: model values (not live), marked as such."""
from __future__ import annotations

from tco.report import formatting as fm
from tco.report import workbook_base as wbb
from tco.report.workbook_base import safe_text, write_value
from tco.report.workbook._common import (
    _BOLD,
    _MODEL_FILL,
    _NOT_LIVE,
    _SE,
    _ST,
    _section,
    _title,
    _unit_text,
)


class UncertaintySheets:
    """The Sensitivity and Sample statistics sheets: model values (not live), marked as such.

    A mixin of :class:`tco.report.workbook.book.Book`: it reads and writes the state the
    book shares (the result, the sheets, the row maps).
    """

    # ------------------------------------------------------------------------ uncertainty
    def _sensitivity_sheet(self, unc: dict) -> None:
        ws = self.wb.create_sheet(_SE)
        cur = self.cur
        _title(ws, f"Sensitivity: present value difference to {unc.get('baseline')} "
               f"[{cur}] with one input at a time at its low or high value")
        banner = safe_text(ws.cell(row=2, column=1), f"{_NOT_LIVE.upper()}: each row is a "
                           "model run with one input changed; differences are truck − "
                           "baseline (positive: the truck costs more). Editing the Inputs "
                           "sheet does not change this sheet.")
        banner.font, banner.fill = _BOLD, _MODEL_FILL
        ws.sheet_properties.tabColor = "808080"
        wbb.set_widths(ws, {"A": 40, "B": 34, "C": 12, "D": 14, "E": 14, "F": 14, "G": 18,
                            "H": 18, "I": 16, "J": 30})
        row = 4
        first_chart = True
        for truck, bars in (unc.get("tornado") or {}).items():
            _section(ws, row, f"{truck} against {unc.get('baseline')}")
            row += 1
            base = (unc.get("base") or {}).get(truck, {})
            safe_text(ws.cell(row=row, column=1), "Present value difference at the "
                      "scenario's values")
            write_value(ws.cell(row=row, column=7), base.get("present_value_difference"),
                        wbb.MONEY)
            safe_text(ws.cell(row=row, column=10), cur)
            row += 1
            head = row
            wbb.header_row(ws, head, ["Input", "Key", "Unit", "Scenario value", "Low value",
                                      "High value", f"PV difference at low [{cur}]",
                                      f"PV difference at high [{cur}]", f"Swing [{cur}]",
                                      "Source"])
            if first_chart:
                wbb.freeze(ws, f"A{head + 1}")
            for b in bars:
                row += 1
                vals = [b.get("input"), b.get("key"), _unit_text(b.get("unit"), cur),
                        b.get("base_value"), b.get("low_value"), b.get("high_value"),
                        b.get("low"), b.get("high"), b.get("swing"), b.get("source")]
                unit_fmt = wbb.MONEY if vals[2] == cur else "#,##0.0000"
                for k, v in enumerate(vals):
                    write_value(ws.cell(row=row, column=1 + k), v,
                                unit_fmt if 3 <= k <= 5 else wbb.MONEY)
            if bars:
                wbb.add_chart(ws, "bar", data_ws=ws, header_row=head, first_row=head + 1,
                              last_row=row, cat_col=1, first_col=7, last_col=8,
                              anchor=f"L{head}", title=f"What moves the difference: {truck}"[:200],
                              x_title="Input", y_title=f"PV difference [{cur}]",
                              y_number_format=wbb.MONEY, width=22, horizontal=True,
                              height=max(10.0, 0.6 * (row - head) + 4.0))
                first_chart = False
            row += 2
            be = (unc.get("break_even") or {}).get(truck, [])
            if be:
                _section(ws, row, f"Break-even values: {truck}")
                row += 1
                wbb.header_row(ws, row, ["Input", "Key", "Unit", "Break-even value",
                                         "Scenario value", "Factor on the scenario value",
                                         "Note"])
                for b in be:
                    row += 1
                    vals = [b.get("input"), b.get("key"), _unit_text(b.get("unit"), cur),
                            b.get("value"), b.get("base_value"), b.get("factor"), b.get("note")]
                    unit_fmt = wbb.MONEY if vals[2] == cur else "#,##0.0000"
                    for k, v in enumerate(vals):
                        write_value(ws.cell(row=row, column=1 + k), v,
                                    "0.000" if k == 5 else unit_fmt)
                row += 2
        for truck, bars in (unc.get("tornado_emissions") or {}).items():
            if not bars:
                continue
            _section(ws, row, f"Emissions avoided: {truck} against {unc.get('baseline')} "
                     "[t CO2e, well-to-wheel, location-based, over the period]")
            row += 1
            head = row
            wbb.header_row(ws, head, ["Input", "Key", "Unit", "Scenario value", "Low value",
                                      "High value", "Avoided at low [t CO2e]",
                                      "Avoided at high [t CO2e]", "Swing [t CO2e]", "Source"])
            for b in bars:
                row += 1
                vals = [b.get("input"), b.get("key"), _unit_text(b.get("unit"), cur),
                        b.get("base_value"), b.get("low_value"), b.get("high_value"),
                        b.get("low"), b.get("high"), b.get("swing"), b.get("source")]
                for k, v in enumerate(vals):
                    write_value(ws.cell(row=row, column=1 + k), v,
                                "#,##0.0000" if 3 <= k <= 5 else "#,##0.0")
            wbb.add_chart(ws, "bar", data_ws=ws, header_row=head, first_row=head + 1,
                          last_row=row, cat_col=1, first_col=7, last_col=8,
                          anchor=f"L{head}",
                          title=f"What moves the emissions avoided: {truck}"[:200],
                          x_title="Input", y_title="Avoided [t CO2e]",
                          y_number_format="#,##0", width=22, horizontal=True,
                          height=max(10.0, 0.6 * (row - head) + 4.0))
            row += 3
        for note in unc.get("notes") or []:
            safe_text(ws.cell(row=row, column=1), note)
            row += 1

    def _statistics_sheet(self, unc: dict) -> None:
        ws = self.wb.create_sheet(_ST)
        cur = self.cur
        _title(ws, f"Monte Carlo: {unc.get('draws', 0)} draws, seed {unc.get('seed')}")
        banner = safe_text(ws.cell(row=2, column=1), f"{_NOT_LIVE.upper()}: statistics of "
                           "the Monte Carlo model run over the sampled inputs; differences are "
                           f"truck − baseline ({unc.get('baseline')}). Editing the Inputs "
                           "sheet does not change this sheet.")
        banner.font, banner.fill = _BOLD, _MODEL_FILL
        ws.sheet_properties.tabColor = "808080"
        wbb.set_widths(ws, {"A": 52, "B": 16, "C": 16, "D": 16, "E": 16, "F": 16, "G": 16,
                            "H": 18})
        row = 4
        wbb.header_row(ws, row, ["Quantity", "Mean", "SD", "P10", "P50", "P90", "Unit",
                                 "Truck"])
        wbb.freeze(ws, f"A{row + 1}")
        row += 1
        mc = unc.get("monte_carlo") or {}
        if not mc:
            safe_text(ws.cell(row=row, column=1), "The Monte Carlo simulation did not run.")
            row += 1
        items = [("present_value_difference", "Present value difference", cur),
                 ("levelized_cost_per_km", "Levelized cost of the truck", f"{cur}/km"),
                 ("baseline_levelized_cost_per_km", "Levelized cost of the baseline",
                  f"{cur}/km"),
                 ("levelized_cost_difference_per_km", "Levelized cost difference", f"{cur}/km"),
                 ("levelized_cost_per_mile", "Levelized cost of the truck", f"{cur}/mi"),
                 ("baseline_levelized_cost_per_mile", "Levelized cost of the baseline",
                  f"{cur}/mi"),
                 ("levelized_cost_difference_per_mile", "Levelized cost difference",
                  f"{cur}/mi"),
                 ("simple_payback_year", "Simple payback year (blank: not within the period)",
                  "yr"),
                 ("discounted_payback_year", "Discounted payback year (blank: not within the "
                  "period)", "yr")]
        for truck, e in mc.items():
            for key, label, unit in items + [("avoided.location", "Emissions avoided, "
                                              "well-to-wheel, location-based", "kg CO2e"),
                                             ("avoided.market", "Emissions avoided, "
                                              "well-to-wheel, market-based", "kg CO2e")]:
                st = (e.get("avoided_kg") or {}).get(key.split(".")[1]) \
                    if key.startswith("avoided.") else e.get(key)
                if st is None:
                    continue
                safe_text(ws.cell(row=row, column=1), label)
                # the format of the figure's unit: money in whole units, costs per km and
                # years as elsewhere in the workbook, emissions in tonnes as on the Summary
                fmt, k_unit = {cur: (wbb.MONEY, 1.0), "yr": ("0.0", 1.0),
                               "kg CO2e": ("#,##0.0", 1e-3)}.get(unit, ("0.0000", 1.0))
                for k, q in enumerate(("mean", "sd", "p10", "p50", "p90")):
                    if q in st and st[q] is not None:
                        write_value(ws.cell(row=row, column=2 + k), st[q] * k_unit, fmt)
                    elif q in st:
                        write_value(ws.cell(row=row, column=2 + k), st[q], fmt)
                safe_text(ws.cell(row=row, column=7), "t CO2e" if unit == "kg CO2e" else unit)
                safe_text(ws.cell(row=row, column=8), truck)
                row += 1
            probs = [("Probability the truck is cheaper (PV difference < 0)",
                      e.get("probability_cheaper")),
                     ("  its standard error", e.get("probability_cheaper_standard_error"))]
            for k, v in (e.get("probability_pays_back") or {}).items():
                probs.append((f"Probability of a {k} payback within the period", v))
            for k, v in (e.get("probability_avoids_emissions") or {}).items():
                probs.append((f"Probability of avoiding emissions ({k}-based)", v))
            for label, v in probs:
                safe_text(ws.cell(row=row, column=1), label)
                write_value(ws.cell(row=row, column=2), v, "0.0%")
                safe_text(ws.cell(row=row, column=7), "-")
                safe_text(ws.cell(row=row, column=8), truck)
                row += 1
            row += 1
        inputs = unc.get("inputs") or []
        if inputs:
            row += 1
            _section(ws, row, "Sampled inputs")
            row += 1
            wbb.header_row(ws, row, ["Input", "Key", "Distribution", "Scale", "Unit",
                                     "Scenario value", "Parameters (SI or factors)"])
            for r in inputs:
                row += 1
                params = ", ".join(f"{k} = {fm.plain(v, significant=6)}"
                                   if isinstance(v, (int, float)) else
                                   f"{k} = {v}" for k, v in (r.get("parameters") or {}).items())
                vals = [r.get("input"), r.get("key"), r.get("kind"), r.get("scale"),
                        _unit_text(r.get("unit"), cur), r.get("base_value"), params]
                for k, v in enumerate(vals):
                    write_value(ws.cell(row=row, column=1 + k), v, "#,##0.0000")
        corr = unc.get("correlations") or []
        if corr:
            row += 2
            _section(ws, row, "Rank correlations")
            row += 1
            wbb.header_row(ws, row, ["Input a", "Input b", "Requested rank", "Pearson "
                                     "(normals)", "Achieved rank"])
            for r in corr:
                row += 1
                for k, key in enumerate(("a", "b", "rank", "pearson", "achieved_rank")):
                    write_value(ws.cell(row=row, column=1 + k), r.get(key), "0.000")
        notes = unc.get("notes") or []
        if notes:
            row += 2
            for n in notes:
                safe_text(ws.cell(row=row, column=1), n)
                row += 1
