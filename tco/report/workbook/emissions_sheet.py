"""The Emissions sheet: grid path, line items, scopes and frames, emissions avoided, the life-
cycle add-on.
"""
from __future__ import annotations

from tco.report import workbook_base as wbb
from tco.report.workbook_base import safe_text, write_value
from tco.report.workbook._common import (
    _BOLD,
    _EmBlock,
    _FIRST_COL,
    _NOT_LIVE,
    _SECTION_FONT,
    _YEAR_ROW,
    _col,
    _number_header,
    _section,
    _title,
)


class EmissionsSheet:
    """The Emissions sheet: grid path, line items, scopes and frames, emissions avoided, the
    life-cycle add-on.

    A mixin of :class:`tco.report.workbook.book.Book`: it reads and writes the state the
    book shares (the result, the sheets, the row maps).
    """

    # ------------------------------------------------------------------------ Emissions
    def _emissions_sheet(self) -> None:
        from tco.emissions import LINE_NAMES

        ws = self.ws_em
        years = [int(y) for y in self.result.emissions.years]
        self.em_years = years
        n = len(years)
        cols = list(range(_FIRST_COL, _FIRST_COL + n))
        c_tot, c_note = _FIRST_COL + n, _FIRST_COL + n + 1
        _title(ws, "Emissions by truck and year [kg CO2e]")
        safe_text(ws.cell(row=2, column=1),
                  "GHG Protocol scopes and ISO 14083 frames; every cell is a formula over the "
                  "emission factors and yearly quantities of the Inputs sheet. Scope 2 "
                  "location- and market-based figures are alternatives, never added.")
        wbb.header_row(ws, _YEAR_ROW, ["Line", "Key"])
        for c, y in zip(cols, years):
            _number_header(ws, _YEAR_ROW, c, y)
        wbb.header_row(ws, _YEAR_ROW, ["Total", "Note"], start_col=c_tot)
        wbb.freeze(ws, f"{_col(_FIRST_COL)}{_YEAR_ROW + 1}")
        wbb.set_widths(ws, {"A": 48, "B": 24, **{c: 11 for c in cols}, c_tot: 13,
                            c_note: 50})
        row = _YEAR_ROW + 1
        self.grid_row = row
        safe_text(ws.cell(row=row, column=1), "Grid intensity, location-based [g CO2e/kWh]")
        safe_text(ws.cell(row=row, column=2), "grid_intensity")
        for c, yv in zip(cols, years):
            ws.cell(row=row, column=c, value="=" + self._grid_formula(c, yv)
                    ).number_format = wbb.ENERGY
        note = ("table: linear between listed years, flat outside" if self.grid_years else
                "MAX(start × (1 + change)^(year − first year), MIN(floor, start))")
        safe_text(ws.cell(row=row, column=c_note), note)
        row += 2
        labels = {
            "diesel_co2": "Diesel, tank-to-wheel CO2 (Scope 1)",
            "diesel_ch4_n2o": "Diesel, CH4 and N2O as CO2e (Scope 1)",
            "def_urea_co2": "Diesel exhaust fluid, CO2 from urea (Scope 1)",
            "electricity_location": "Electricity, location-based (Scope 2)",
            "electricity_market": "Electricity, market-based (Scope 2)",
            "diesel_upstream": "Diesel, well-to-tank (Scope 3 cat. 3)",
            "electricity_upstream": "Electricity, upstream (Scope 3 cat. 3)",
            "electricity_td_losses": "Electricity, grid losses (Scope 3 cat. 3)",
        }
        frames = (
            ("scope_1", "Scope 1 = tank-to-wheel", ("diesel_co2", "diesel_ch4_n2o",
                                                    "def_urea_co2")),
            ("scope_2_location", "Scope 2, location-based", ("electricity_location",)),
            ("scope_2_market", "Scope 2, market-based", ("electricity_market",)),
            ("scope_3_cat3", "Scope 3 category 3", ("diesel_upstream", "electricity_upstream",
                                                   "electricity_td_losses")),
            ("total_location", "Total, location-based = well-to-wheel",
             ("scope_1", "scope_2_location", "scope_3_cat3")),
            ("total_market", "Total, market-based = well-to-wheel (market)",
             ("scope_1", "scope_2_market", "scope_3_cat3")),
        )
        for i, name in enumerate(self.trucks):
            blk = _EmBlock()
            self.em_blocks.append(blk)
            safe_text(ws.cell(row=row, column=1), name).font = _SECTION_FONT
            safe_text(ws.cell(row=row, column=2), "truck")
            row += 1
            for line in LINE_NAMES:
                blk.rows[line] = row
                safe_text(ws.cell(row=row, column=1), labels[line])
                safe_text(ws.cell(row=row, column=2), line)
                for c in cols:
                    ws.cell(row=row, column=c, value="=" + self._em_formula(i, line, c, blk)
                            ).number_format = wbb.MASS
                self._em_total(row, cols, c_tot)
                row += 1
            for key, label, parts in frames:
                blk.rows[key] = row
                safe_text(ws.cell(row=row, column=1), label).font = _BOLD
                safe_text(ws.cell(row=row, column=2), key)
                for c in cols:
                    col = _col(c)
                    ws.cell(row=row, column=c, value="=" + "+".join(
                        f"{col}{blk.rows[p]}" for p in parts)).number_format = wbb.MASS
                self._em_total(row, cols, c_tot)
                row += 1
            row += 1
        # emissions avoided against the baseline
        ref = self.em_blocks[self.ref]
        for i, blk in enumerate(self.em_blocks):
            if i == self.ref:
                continue
            safe_text(ws.cell(row=row, column=1),
                      f"Emissions avoided by {self.trucks[i]} against {self.trucks[self.ref]}"
                      ).font = _SECTION_FONT
            safe_text(ws.cell(row=row, column=2), "avoided")
            safe_text(ws.cell(row=row, column=3), self.trucks[i])
            row += 1
            for basis, frame in (("location", "total_location"), ("market", "total_market")):
                blk.avoided[basis] = row
                safe_text(ws.cell(row=row, column=1), f"Well-to-wheel avoided, {basis}-based "
                          "(baseline − truck)")
                safe_text(ws.cell(row=row, column=2), f"avoided_{basis}")
                for c in cols:
                    col = _col(c)
                    ws.cell(row=row, column=c, value=f"={col}{ref.rows[frame]}-"
                            f"{col}{blk.rows[frame]}").number_format = wbb.MASS
                self._em_total(row, cols, c_tot)
                row += 1
            row += 1
        # chart block: well-to-wheel by year, years in rows
        row += 1
        _section(ws, row, "Well-to-wheel emissions by year [t CO2e] (location-based)")
        safe_text(ws.cell(row=row, column=2), "wtw_by_year")
        row += 1
        head = row
        wbb.header_row(ws, head, ["Year"] + [t for t in self.trucks])
        for k, yv in enumerate(years):
            r = head + 1 + k
            ws.cell(row=r, column=1, value=yv).number_format = wbb.YEAR
            for i, blk in enumerate(self.em_blocks):
                ws.cell(row=r, column=2 + i,
                        value=f"={_col(cols[k])}{blk.rows['total_location']}/1000"
                        ).number_format = wbb.MASS
        self.em_chart = (head, head + n)
        wbb.add_chart(ws, "bar", data_ws=ws, header_row=head, first_row=head + 1,
                      last_row=head + n, cat_col=1, first_col=2,
                      last_col=1 + len(self.trucks), anchor=f"{_col(len(self.trucks) + 3)}"
                      f"{head}", title="Well-to-wheel emissions by year",
                      x_title="Year", y_title="Emissions [t CO2e]", y_number_format=wbb.MASS)
        self._lifecycle(row=head + n + 18)

    def _em_total(self, row, cols, c_tot) -> None:
        self.ws_em.cell(row=row, column=c_tot, value=f"=SUM({_col(cols[0])}{row}:"
                        f"{_col(cols[-1])}{row})").number_format = wbb.MASS

    def _grid_formula(self, c: int, year: int) -> str:
        if not self.grid_years:
            y, y0 = f"{_col(c)}${_YEAR_ROW}", f"${_col(_FIRST_COL)}${_YEAR_ROW}"
            return ("MAX(grid_intensity*(1+grid_change)^(" + y + "-" + y0 + "),"
                    "MIN(grid_floor,grid_intensity))")
        ty = self.grid_years
        scale = f"IF(grid_table_{ty[0]}>0,grid_intensity/grid_table_{ty[0]},1)"
        if year <= ty[0]:
            base = f"grid_table_{ty[0]}"
        elif year >= ty[-1]:
            base = f"grid_table_{ty[-1]}"
        else:
            b = next(k for k in range(1, len(ty)) if ty[k] >= year)
            a, bb = ty[b - 1], ty[b]
            y = f"{_col(c)}${_YEAR_ROW}"
            base = (f"(grid_table_{a}+(grid_table_{bb}-grid_table_{a})*({y}-{a})/"
                    f"({bb}-{a}))")
        return f"{base}*{scale}"

    def _em_formula(self, i: int, line: str, c: int, blk: _EmBlock) -> str:
        P = self.pre(i)
        S = f"{P}scale"  # emissions follow days and trips like the costs
        grid = f"{_col(c)}${self.grid_row}/1000"  # kg/kWh
        if line == "diesel_co2":
            return f"{P}diesel_L*{S}*(1-diesel_blend_share)*ef_diesel_ttw"
        if line == "diesel_ch4_n2o":
            f = f"{P}diesel_L*{S}*ef_diesel_ch4_n2o"
            if self.powertrains[i] == "diesel":
                f += f"+{P}distance_km*{S}*ef_diesel_ch4_n2o_km"
            return f
        if line == "def_urea_co2":
            # IPCC 2006 Vol. 2 Ch. 3 Eq. 3.2.2: urea C share 12/60, CO2 per C 44/12
            return f"{P}def_L*{S}*def_density*def_urea_share*12/60*44/12"
        if line == "electricity_location":
            return f"({P}depot_kwh*{S}*{P}hour_match+{P}public_kwh*{S})*{grid}"
        if line == "electricity_market":
            depot = ("supplier_intensity/1000" if "supplier_intensity" in self.wb.defined_names
                     else f"{P}hour_match*{grid}*residual_mix_ratio")
            return (f"(1-renewable_share)*{P}depot_kwh*{S}*{depot}+{P}public_kwh*{S}*{grid}"
                    "*residual_mix_ratio")
        if line == "diesel_upstream":
            return (f"{P}diesel_L*{S}*((1-diesel_blend_share)*ef_diesel_wtt"
                    "+diesel_blend_share*ef_biodiesel_wtt)")
        if line == "electricity_upstream":
            return (f"({P}depot_kwh+{P}public_kwh)*{S}*ef_electricity_upstream/1000"
                    f"+{_col(c)}{blk.rows['electricity_location']}"
                    "*ef_electricity_upstream_share")
        if line == "electricity_td_losses":
            return f"{_col(c)}{blk.rows['electricity_location']}*td_loss/(1-td_loss)"
        raise KeyError(line)

    def _lifecycle(self, row: int) -> None:
        lc = self.summary.get("emissions", {}).get("lifecycle")
        if not lc:
            return
        ws = self.ws_em
        _section(ws, row, "Life-cycle add-on: manufacturing, outside Scopes 1–3: "
                 f"{_NOT_LIVE}")
        row += 1
        wbb.header_row(ws, row, ["Truck", "", "Manufacturing [kg CO2e]",
                                 "Extra vs baseline [kg CO2e]", "Payback distance [km]",
                                 "Payback time [yr]"])
        for name, v in lc.items():
            row += 1
            safe_text(ws.cell(row=row, column=1), name)
            for k, key in enumerate(("manufacturing_kg", "extra_kg", "payback_distance_km",
                                     "payback_years")):
                write_value(ws.cell(row=row, column=3 + k), v.get(key), wbb.MASS)
