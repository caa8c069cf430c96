"""The Summary sheet: key figures as formulas over the other sheets, payback/IRR/break-even
references, feasibility, warnings, cautions, the cumulative-cost chart.
"""
from __future__ import annotations

import math

from openpyxl.styles import Alignment

from tco.report import formatting as fm
from tco.report import workbook_base as wbb
from tco.report.summary_sections import financing_rows
from tco.report.workbook_base import safe_text, write_value
from tco.report.workbook._common import (
    _BOLD,
    _Block,
    _CF,
    _EM,
    _EmBlock,
    _FIRST_COL,
    _RATE,
    _TITLE_FONT,
    _WRAP,
    _col,
    _ref,
    _section,
)


class SummarySheet:
    """The Summary sheet: key figures as formulas over the other sheets, payback/IRR/break-even
    references, feasibility, warnings, cautions, the cumulative-cost chart.

    A mixin of :class:`tco.report.workbook.book.Book`: it reads and writes the state the
    book shares (the result, the sheets, the row maps).
    """

    # ------------------------------------------------------------------------ Summary
    def _summary_sheet(self) -> None:
        ws, cur = self.ws_su, self.cur
        sc = self.summary.get("scenario", {})
        names = self.trucks
        nt = len(names)
        safe_text(ws.cell(row=1, column=1), sc.get("name", self.s.study.name)).font = _TITLE_FONT
        wbb.set_widths(ws, {"A": 66, "B": 36, **{3 + k: 18 for k in range(nt)}, 3 + nt: 16,
                            4 + nt: 40})
        info = [
            ("Notes", self.s.study.notes),
            ("Currency", cur),
            ("Money basis", self.cf.money_basis + (" (money of year 0)" if self.real else "")),
            ("Analysis period", f"{self.N} years from {self.s.study.start_year}"),
            ("Baseline truck", self.trucks[self.ref]),
            ("Generated", self.summary.get("generated")),
            ("Tool version", self.summary.get("tool", {}).get("version")),
            ("Scenario fingerprint (SHA-256)", sc.get("fingerprint_sha256")),
        ]
        row = 2
        for label, value in info:
            safe_text(ws.cell(row=row, column=1), label).font = _BOLD
            safe_text(ws.cell(row=row, column=2), value)
            row += 1
        row += 1
        _section(ws, row, "Key figures (formulas over the Cash flow and Emissions sheets)")
        row += 1
        self.su_header = row
        wbb.header_row(ws, row, ["Figure", "Key"] + list(names) + ["Unit"])
        wbb.freeze(ws, "A2")
        row += 1
        em_tot = _FIRST_COL + len(self.em_years)

        def cf(r):
            return _ref(_CF, _FIRST_COL, r)

        def em(r):
            return _ref(_EM, em_tot, r)

        specs = [
            ("Present value of all costs", "present_value", wbb.MONEY, cur,
             lambda i, b, e: f"={cf(b.present_value)}"),
            ("Levelized cost per km", "levelized_cost_per_km", "0.0000", f"{cur}/km",
             lambda i, b, e: f"={cf(b.levelized_km)}"),
            ("Levelized cost per mile", "levelized_cost_per_mile", "0.0000", f"{cur}/mi",
             lambda i, b, e: f"={cf(b.levelized_mile)}"),
            ("Present value difference to the baseline (positive: costs more)",
             "present_value_difference", wbb.MONEY, cur,
             lambda i, b, e: None if b.difference is None else f"={cf(b.difference)}"),
            ("Levelized cost difference per km", "levelized_cost_difference_per_km", "0.0000",
             f"{cur}/km",
             lambda i, b, e: None if b.difference is None else f"={cf(b.difference_km)}"),
            ("Levelized cost difference per mile", "levelized_cost_difference_per_mile",
             "0.0000", f"{cur}/mi",
             lambda i, b, e: None if b.difference is None else f"={cf(b.difference_mile)}"),
            ("Well-to-wheel emissions over the period, location-based", "wtw_t", wbb.MASS,
             "t CO2e", lambda i, b, e: f"={em(e.rows['total_location'])}/1000"),
            ("Well-to-wheel emissions over the period, market-based", "wtw_market_t",
             wbb.MASS, "t CO2e", lambda i, b, e: f"={em(e.rows['total_market'])}/1000"),
            ("Tank-to-wheel (Scope 1) emissions over the period", "ttw_t", wbb.MASS, "t CO2e",
             lambda i, b, e: f"={em(e.rows['scope_1'])}/1000"),
            ("Emissions avoided against the baseline, location-based", "avoided_location_t",
             wbb.MASS, "t CO2e",
             lambda i, b, e: f"={em(e.avoided['location'])}/1000" if e.avoided else None),
            ("Emissions avoided against the baseline, market-based", "avoided_market_t",
             wbb.MASS, "t CO2e",
             lambda i, b, e: f"={em(e.avoided['market'])}/1000" if e.avoided else None),
            ("Abatement cost, location-based (negative: saves money and emissions)",
             "abatement_cost_location", wbb.MONEY_CENTS, f"{cur}/t CO2e",
             lambda i, b, e: self._abatement(b, e, "location")),
            ("Abatement cost, market-based", "abatement_cost_market", wbb.MONEY_CENTS,
             f"{cur}/t CO2e", lambda i, b, e: self._abatement(b, e, "market")),
        ]
        self.su_rows = {}
        for label, key, fmt, unit, make in specs:
            safe_text(ws.cell(row=row, column=1), label)
            safe_text(ws.cell(row=row, column=2), key)
            for i in range(nt):
                f = make(i, self.blocks[i], self.em_blocks[i])
                c = ws.cell(row=row, column=3 + i)
                if f is None:
                    safe_text(c, "baseline" if i == self.ref else "-")
                else:
                    c.value = f
                    c.number_format = fmt
            safe_text(ws.cell(row=row, column=3 + nt), unit)
            self.su_rows[key] = row
            row += 1
        row = self._comparison_values(row + 1)
        row = self._financing(row + 1)
        row = self._feasibility(row + 1)
        # a finding that is a warning is read once, in the feasibility block above (as in
        # the report); summary.json keeps every warning
        shown = getattr(self, "_finding_texts", [])
        others = [w for w in self.summary.get("warnings", [])
                  if not any(w in t or w.split(": ", 1)[-1] in t for t in shown)]
        row = self._text_list(row + 1, "Other warnings (the findings above are not repeated)"
                              if len(others) < len(self.summary.get("warnings", []))
                              else "Warnings", others)
        row = self._text_list(row + 1, "How the purchase case was read",
                              self.summary.get("cashflow", {}).get("assumptions", []))
        row = self._text_list(row + 1, "Emissions cautions",
                              self.summary.get("emissions", {}).get("cautions", []))
        self._cumulative_chart(row + 2)

    def _abatement(self, b: _Block, e: _EmBlock, basis: str) -> str | None:
        if not e.avoided:
            return None
        r = e.avoided[basis]
        if self.summary.get("emissions", {}).get("settings", {}).get("tonnes_discounted"):
            first = _col(_FIRST_COL)
            last = _col(_FIRST_COL + len(self.em_years) - 1)
            # tonne weights (1 + i)^-k for service years k = 1..n: spreadsheet NPV
            tonnes = f"NPV(discount_rate,'{_EM}'!${first}${r}:${last}${r})/1000"
        else:
            tonnes = f"{_ref(_EM, _FIRST_COL + len(self.em_years), r)}/1000"
        return f"=IF({tonnes}>0,{_ref(_CF, _FIRST_COL, b.difference)}/({tonnes}),\"n/a\")"

    def _comparison_values(self, row: int) -> int:
        ws = self.ws_su
        if not self.cmp_rows:
            return row
        _section(ws, row, "Payback, IRR and break-even values (formulas over the Cash flow "
                 "sheet)")
        row += 1
        names = self.trucks
        wbb.header_row(ws, row, ["Figure", "Key"] + list(names) + ["Unit"])
        row += 1
        cur = self.cur
        items = [("Simple payback year", "simple_payback_year", "yr", "0"),
                 ("Discounted payback year", "discounted_payback_year", "yr", "0"),
                 ("IRR of the extra investment", "irr", "per year", _RATE),
                 ("Break-even diesel price", "break_even.diesel_price_per_litre", f"{cur}/L",
                  "#,##0.0000"),
                 ("Break-even depot electricity price (profile-weighted)",
                  "break_even.electricity_price_per_kwh", f"{cur}/kWh", "#,##0.0000"),
                 ("Break-even purchase price", "break_even.purchase_price", cur, wbb.MONEY),
                 ("Break-even annual distance (baseline truck)",
                  "break_even.annual_distance_km", "km/yr", wbb.INTEGER)]
        for label, key, unit, fmt in items:
            safe_text(ws.cell(row=row, column=1), label)
            safe_text(ws.cell(row=row, column=2), key)
            for i in range(len(names)):
                cell = ws.cell(row=row, column=3 + i)
                R = self.cmp_rows.get(i)
                if R is None:
                    safe_text(cell, "baseline")
                    continue
                cell.value = "=" + _ref(_CF, _FIRST_COL, R[key])
                cell.number_format = fmt
            safe_text(ws.cell(row=row, column=3 + len(names)), unit)
            self.su_rows[key] = row
            row += 1
        return row

    def _financing(self, row: int) -> int:
        """Loans and leases shown apart from the headline (values of the model: the Cash flow
        sheet holds the headline flows only)."""
        f = self.summary.get("cashflow", {}).get("financing") or {}
        trucks = f.get("trucks") or {}
        if not trucks:
            return row
        ws, cur = self.ws_su, self.cur
        view = self.summary.get("cashflow", {}).get("valuation", "unlevered")
        _section(ws, row, "Financing, shown apart (values of the model; the figures above "
                          + ("pay every truck in cash)" if view == "unlevered"
                             else "include the loans and leases)"))
        row += 1
        names = list(self.trucks)
        wbb.header_row(ws, row, ["Figure", "Key"] + names + ["Unit"])
        row += 1
        units = {"money": cur, "rate": "per year", "text": ""}
        for r in financing_rows(f, names):
            safe_text(ws.cell(row=row, column=1), r["label"])
            # the field's name in summary.json's cashflow.financing (as the other keys
            # here, the name without its path)
            safe_text(ws.cell(row=row, column=2), r["key"].rsplit(".", 1)[-1])
            for i, n in enumerate(names):
                cell, v = ws.cell(row=row, column=3 + i), r["values"][n]
                if isinstance(v, str):
                    safe_text(cell, v)
                elif "notes" in r and fm.irr_reads_na(v, None, check_payback=True):
                    safe_text(cell, "n/a")  # as the report reads the rate
                elif v is None or not math.isfinite(v):
                    safe_text(cell, "-")
                else:
                    write_value(cell, float(v), wbb.MONEY if r["kind"] == "money" else _RATE)
            safe_text(ws.cell(row=row, column=3 + len(names)), units[r["kind"]])
            row += 1
        return row

    def _feasibility(self, row: int) -> int:
        ws = self.ws_su
        _section(ws, row, "Feasibility on the duty cycle")
        row += 1
        self._finding_texts = []
        for name in self.trucks:
            f = self.summary.get("trucks", {}).get(name, {}).get("feasibility", {})
            texts = []
            for key in ("payload", "power", "depot_charger"):
                if isinstance(f.get(key), dict) and f[key].get("text"):
                    texts.append((key, f[key].get("ok"), f[key]["text"]))
            for label, v in (f.get("battery") or {}).items():
                status = ("ok" if v.get("ok") else "en-route charging"
                          if v.get("ok_with_enroute") else "not feasible")
                texts.append((f"battery ({label.replace('_', ' ')})", status, v.get("text")))
            a = f.get("battery_by_year")
            if a:  # the same end-of-life verdict as the report and summary.json
                status = ("ok" if a.get("first_short_year") is None else
                          f"en-route charging from year {a['first_short_year']}"
                          if a.get("feasible") else
                          f"not feasible from year {a['first_short_year']}")
                texts.append(("battery by year", status,
                              f"{a['verdict'][0].upper()}{a['verdict'][1:]}. {a['text']}"))
            safe_text(ws.cell(row=row, column=1), name).font = _BOLD
            safe_text(ws.cell(row=row, column=2),
                      "feasible" if f.get("feasible", True) else "not feasible")
            row += 1
            for key, ok, text in texts:
                self._finding_texts.append(text or "")
                safe_text(ws.cell(row=row, column=1), f"  {key.replace('_', ' ')}")
                safe_text(ws.cell(row=row, column=2),
                          ok if isinstance(ok, str) else "ok" if ok else "check")
                self._wrapped(row, 3, 4 + len(self.trucks), text)
                row += 1
        return row

    def _text_list(self, row: int, title: str, texts) -> int:
        if not texts:
            return row
        ws = self.ws_su
        _section(ws, row, title)
        row += 1
        for t in texts:
            self._wrapped(row, 1, 4 + len(self.trucks), t)
            row += 1
        return row

    def _wrapped(self, row: int, c0: int, c1: int, text) -> None:
        """Long text on the Summary sheet: merged over columns c0..c1, wrapped, and the
        row made tall enough (so it prints within the page width)."""
        ws = self.ws_su
        c = safe_text(ws.cell(row=row, column=c0), text)
        c.alignment = _WRAP
        ws.merge_cells(start_row=row, start_column=c0, end_row=row, end_column=c1)

    def _cumulative_chart(self, row: int) -> None:
        ws = self.ws_su
        _section(ws, row, f"Cumulative net cost by year [{self.cur}] (not discounted)")
        safe_text(ws.cell(row=row, column=2), "cumulative_by_year")
        row += 1
        head = row
        wbb.header_row(ws, head, ["Year", ""] + list(self.trucks))
        for k in range(self.N + 1):
            r = head + 1 + k
            c = ws.cell(row=r, column=1, value=k)
            c.number_format = wbb.YEAR
            c.alignment = Alignment(horizontal="left")
            for i, blk in enumerate(self.blocks):
                ws.cell(row=r, column=3 + i, value="=" + _ref(_CF, _FIRST_COL + k,
                                                              blk.cumulative)
                        ).number_format = wbb.MONEY
        self.su_chart = (head, head + self.N + 1)
        wbb.add_chart(ws, "line", data_ws=ws, header_row=head, first_row=head + 1,
                      last_row=head + self.N + 1, cat_col=1, first_col=3,
                      last_col=2 + len(self.trucks), anchor=f"{_col(4 + len(self.trucks))}"
                      f"{head}", title="Cumulative cost by truck", x_title="Year",
                      y_title=f"Cumulative cost [{self.cur}]", y_number_format=wbb.MONEY)
