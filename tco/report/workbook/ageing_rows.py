"""Battery ageing as live rows of the Cash flow sheet: state of health month by month, the
replacements, the months the day falls short, and what the aged battery costs each year.

The rows repeat :func:`tco.battery.age` (and :func:`tco.energy.enroute_time`,
:func:`tco.energy.driver_time_lost`) as spreadsheet formulas over named inputs, so an edit
of the days or trips per year (which move the lives used per year) moves the state of health,
the replacement years and the en-route charging, as a new run of the model would:

* lives used per year ``L`` (the derived input ``tN_battery_lives_per_year``);
* the year the battery in use was fitted (``never``: 0; ``year``: the replacement year once
  passed; ``cycles``: the last year whose end the summed lives passed a whole number;
  ``range``: the year before a year the day would fall short with the battery in use);
* state of health at each month's middle, SoH = max(1 − (1 − SoH_eol)·L·(t − fitted), 0);
* the day's shortfall, max(need − available_new·SoH, 0), and its en-route charging time
  (charging-power curve, several stops when one fill is not enough, required breaks);
* per year: en-route energy and driver time per day (12-month means), the public charging,
  driver hours and depot share the cost lines read (``tN_public_kwh_by_year``,
  ``tN_charging_h_by_year``, ``tN_depot_share_by_year``), state of health at the year's end
  and lowest, months short, the first short year.
"""
from __future__ import annotations

import math

from openpyxl.workbook.defined_name import DefinedName

from tco.report import workbook_base as wbb
from tco.report.workbook_base import safe_text
from tco.report.workbook._common import (
    _BOLD,
    _CF,
    _FIRST_COL,
    _RATE,
    _YEAR_ROW,
    _col,
    _section,
)

MONTHS = 12


def _ceil(x: str) -> str:
    """Spreadsheet ceiling of an expression (−INT(−x))."""
    return f"(-INT(-({x})))"


class AgeingRows:
    """Live battery-ageing rows at the foot of the Cash flow sheet (a mixin of
    :class:`tco.report.workbook.book.Book`)."""

    def _ageing_rows(self, row: int) -> int:
        """Write every aged truck's ageing rows from ``row``; returns the next free row."""
        for i in range(len(self.trucks)):
            if self._aged(i):
                row = self._ageing_truck(i, row + 1)
        return row

    # one truck ---------------------------------------------------------------------
    def _time_of(self, i: int, d: str, soh: str) -> str:
        """Driver time [h] of one day's en-route charging of a shortfall ``d`` [kWh] with
        the battery at state of health ``soh`` (tco.energy.enroute_time and
        driver_time_lost, tco.electric.enroute_charging_time and enroute_stops)."""
        P = self.pre(i)
        r = self.s.trucks[i].electric.enroute
        s0 = float(self.s.trucks[i].electric.reserve if r.arrival_soc is None
                   else r.arrival_soc)
        s1, k1 = float(r.taper_start_soc), float(r.power_share_at_full)
        cap = f"({P}usable_new_kwh*{soh})"
        fill = 1.0 - s0

        def to(s: str) -> str:  # charging time per unit of C/rate from 0 to s
            flat = f"MIN({s},{s1!r})"
            span = 1.0 - s1
            if span <= 0.0:
                return flat
            slope = (k1 - 1.0) / span
            x = f"MAX({s}-{s1!r},0)"
            if abs(slope) < 1e-12:
                return f"({flat}+{x})"
            return f"({flat}+LN(1+{slope!r}*{x})/{slope!r})"

        def to_num(s: float) -> float:
            flat = min(s, s1)
            span = 1.0 - s1
            if span <= 0.0:
                return flat
            slope = (k1 - 1.0) / span
            x = max(s - s1, 0.0)
            return flat + x if abs(slope) < 1e-12 else flat + math.log1p(slope * x) / slope

        full = to_num(1.0) - to_num(s0)
        n_full = f"INT({d}/{cap}/{fill!r}+1E-12)"
        rest = f"MAX({d}/{cap}-{n_full}*{fill!r},0)"
        t = (f"{cap}/({P}enroute_kw*{P}enroute_eff)*({n_full}*{full!r}"
             f"+{to(f'MIN({s0!r}+{rest},1)')}-{to_num(s0)!r})")
        stops = f"MAX({_ceil(f'{d}/({cap}*{fill!r})-1E-12')},0)"
        if r.charge_during_breaks:
            return f"({stops}*{P}stop_overhead_h+MAX({t}-{P}break_cover_h,0))"
        return f"({t}+{stops}*{P}stop_overhead_h)"

    def _ageing_truck(self, i: int, row: int) -> int:
        ws, N, P = self.ws_cf, self.N, self.pre(i)
        b = self.inputs.trucks[i].costs.battery_replacement
        when = b.when if self.ops[i].battery_capacity > 0 else "never"
        years = [_FIRST_COL + y for y in range(1, N + 1)]
        L, eol = f"{P}battery_lives_per_year", f"{P}eol_soh"
        _section(ws, row, f"{self.trucks[i]}: battery ageing (live: state of health from the "
                 "energy discharged and calendar fade; replacement rule "
                 f"'{when}')")
        row += 1
        rows: dict[str, int] = {}

        def label(key: str, text: str, unit: str = "") -> int:
            nonlocal row
            rows[key] = row
            safe_text(ws.cell(row=row, column=1), text + (f" [{unit}]" if unit else ""))
            safe_text(ws.cell(row=row, column=2), f"ageing.{key}")
            row += 1
            return rows[key]

        def put(r: int, formula, fmt: str) -> None:
            for c in years:
                y = f"{_col(c)}${_YEAR_ROW}"
                ws.cell(row=r, column=c, value="=" + formula(c, y)).number_format = fmt

        # the year the battery in use in year y was fitted (years since service)
        r_fit = label("fitted", "Battery in use fitted at the end of year (0: new)")
        prev = lambda c: f"{_col(c - 1)}{r_fit}"  # noqa: E731
        if when == "year":
            put(r_fit, lambda c, y: f"IF(AND({y}>{P}battery_year,{P}battery_year<="
                f"analysis_years),{P}battery_year,0)", wbb.INTEGER)
        elif when == "cycles":
            put(r_fit, lambda c, y: "0" if c == years[0] else
                f"IF(INT(({y}-1)*{L}+1E-9)>INT(({y}-2)*{L}+1E-9),{y}-1,{prev(c)})",
                wbb.INTEGER)
        elif when == "range":
            def fit_range(c, y):
                if c == years[0]:
                    return "0"
                low = f"MAX(1-(1-{eol})*{L}*({y}-0.5/{MONTHS}-{prev(c)}),0)"
                return (f"IF(AND({P}day_need_kwh-{P}day_available_kwh*{low}>0,{y}-1>"
                        f"{prev(c)},{P}day_available_kwh>={P}day_need_kwh),{y}-1,{prev(c)})")
            put(r_fit, fit_range, wbb.INTEGER)
        else:
            put(r_fit, lambda c, y: "0", wbb.INTEGER)
        r_rep = label("replaced", "Battery replaced at the end of this year (1: yes)")
        if when == "cycles":
            put(r_rep, lambda c, y: f"IF(INT({y}*{L}+1E-9)>INT(({y}-1)*{L}+1E-9),1,0)",
                wbb.INTEGER)
        elif when in ("range", "year"):
            put(r_rep, lambda c, y: "0" if c == years[-1] and when == "range" else
                (f"IF({_col(c + 1)}{r_fit}={y},1,0)" if c != years[-1] else
                 f"IF({P}battery_year={y},1,0)"), wbb.INTEGER)
        else:
            put(r_rep, lambda c, y: "0", wbb.INTEGER)
        r_end = label("soh_end", "State of health at the year's end, before a "
                      "replacement", "-")
        # the model takes the end of year y as y − 1e-9 (tco.battery.age)
        put(r_end, lambda c, y: f"MAX(1-(1-{eol})*{L}*({y}-1E-9-{_col(c)}{r_fit}),0)",
            _RATE)
        # month grids: state of health, shortfall, driver time
        head = {}
        for key, text, unit, fmt in (("soh", "State of health at mid-month", "-", _RATE),
                                     ("short", "Shortfall of the day: need − available × "
                                      "state of health (≥ 0)", "kWh", "0.0"),
                                     ("time", "Driver time of the day's en-route charging",
                                      "h", "0.000")):
            head[key] = row
            safe_text(ws.cell(row=row, column=1), f"{text} [{unit}], months 1–12").font = _BOLD
            row += 1
            first = row
            for m in range(1, MONTHS + 1):
                safe_text(ws.cell(row=row, column=1), f"  month {m}")
                safe_text(ws.cell(row=row, column=2), f"ageing.{key}[{m}]")
                for c in years:
                    y = f"{_col(c)}${_YEAR_ROW}"
                    if key == "soh":
                        f = (f"MAX(1-(1-{eol})*{L}*({y}-1+{(m - 0.5) / MONTHS!r}"
                             f"-{_col(c)}${r_fit}),0)")
                    elif key == "short":
                        f = (f"MAX({P}day_need_kwh-{P}day_available_kwh*"
                             f"{_col(c)}{rows['soh'] + m - 1},0)")
                    else:
                        d = f"{_col(c)}{rows['short'] + m - 1}"
                        s = f"{_col(c)}{rows['soh'] + m - 1}"
                        f = (f"IF(AND({d}>0,{P}enroute_kw>0),{self._time_of(i, d, s)},0)"
                             if self._has_enroute(i) else "0")
                    ws.cell(row=row, column=c, value="=" + f).number_format = fmt
                row += 1
            rows[key] = first
        last = {k: rows[k] + MONTHS - 1 for k in ("soh", "short", "time")}

        def col_of(key, c):
            return f"{_col(c)}{rows[key]}:{_col(c)}{last[key]}"

        r_low = label("soh_low", "Lowest state of health in the year", "-")
        put(r_low, lambda c, y: f"MIN({col_of('soh', c)})", _RATE)
        r_sm = label("short_months", "Months the day falls short")
        put(r_sm, lambda c, y: f"SUMPRODUCT(({col_of('short', c)}>0)*1)", wbb.INTEGER)
        r_first = label("first_short_year", "First year the day falls short (0: not yet)")
        put(r_first, lambda c, y: (f"IF({_col(c)}{r_sm}>0,{y},0)" if c == years[0] else
                                   f"IF({_col(c - 1)}{r_first}>0,{_col(c - 1)}{r_first},"
                                   f"IF({_col(c)}{r_sm}>0,{y},0))"), wbb.INTEGER)
        enroute = self._has_enroute(i)
        r_e = label("enroute_kwh_per_day", "En-route energy into the battery per day", "kWh")
        put(r_e, lambda c, y: f"SUM({col_of('short', c)})/{MONTHS}" if enroute else "0",
            "0.00")
        r_t = label("enroute_h_per_day", "Driver time at en-route chargers per day", "h")
        put(r_t, lambda c, y: f"SUM({col_of('time', c)})/{MONTHS}", "0.0000")
        r_pub = label("public_kwh_by_year", "Public charging per year, modelled days",
                      "kWh/yr")
        put(r_pub, lambda c, y: f"{P}ageing_days*{_col(c)}{r_e}/{P}enroute_eff"
            if enroute else "0", wbb.ENERGY)
        r_h = label("charging_h_by_year", "En-route driver time per year, modelled days",
                    "h/yr")
        put(r_h, lambda c, y: f"{P}ageing_days*{_col(c)}{r_t}", "0.00")
        r_dep = label("depot_share_by_year", "Depot electricity ÷ the model's first year", "-")
        put(r_dep, lambda c, y: (f"{P}ageing_days*MAX({P}net_day_kwh-{_col(c)}{r_e},0)/"
                                 f"{P}depot_charge_eff/{P}depot_kwh")
            if self.ops[i].grid_energy_depot > 0 else "1", "0.000000")
        for key, r in (("public_kwh_by_year", r_pub), ("charging_h_by_year", r_h),
                       ("depot_share_by_year", r_dep), ("battery_replaced", r_rep),
                       ("battery_fitted", r_fit)):
            name = P + key
            wbb.check_name(name)
            self.wb.defined_names[name] = DefinedName(
                name, attr_text=f"'{_CF}'!${_col(years[0])}${r}:${_col(years[-1])}${r}")
        name = P + "battery_soh_end"
        wbb.check_name(name)
        self.wb.defined_names[name] = DefinedName(
            name, attr_text=f"'{_CF}'!${_col(years[-1])}${r_end}")
        self.ageing_rows = getattr(self, "ageing_rows", {})
        self.ageing_rows[i] = rows
        return row

    def _has_enroute(self, i: int) -> bool:
        return float(self.s.trucks[i].electric.enroute.power) > 0
