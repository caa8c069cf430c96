"""The Cash flow sheet: one formula per cost line and year, totals, present values, levelized
cost; the comparisons with the baseline (live payback, IRR, break-evens and their workings).
"""
from __future__ import annotations

import math
import re

from openpyxl.styles import Alignment

from tco.report import formatting as fm
from tco.report import workbook_base as wbb
from tco.report.workbook_base import safe_text, write_value
from tco.report.workbook._common import (
    _CF,
    _BOLD,
    _FACTOR,
    _BUMP,
    _Block,
    _FIRST_COL,
    _MODEL_FILL,
    _M_PER_KM,
    _M_PER_MILE,
    _NOT_LIVE,
    _RATE,
    _SECTION_FONT,
    _YEAR_ROW,
    _col,
    _number_header,
    _section,
    _title,
)


class FormulaEnv:
    """What a cost line's formula template (:mod:`tco.cost_lines`) is resolved against:
    one truck, one year column of the Cash flow sheet.

    Attributes
    ----------
    P : str
        The truck's prefix of defined names (``t1_``...).
    y : str
        The cell holding the column's year (0..N).
    N : str
        Defined name of the period length.
    S : str
        Defined name of the truck's scale of yearly quantities to the route's days/trips.
    col : str
        The column letter.
    rows : dict of str to int
        Rows of the truck's lines written so far (line name -> row).
    names : dict of str to str
        The template names: ``y``, ``P``, ``N``, ``S``, ``srv``, ``GE``.
    costs : TruckCosts
        The truck's costs as given (structure: financing terms, residual method...).
    bands : list of (str, str)
        Depot energy per time-of-use band and its price, as defined names.
    aged : bool
        The truck carries year-by-year battery-ageing rows (en-route energy, time,
        depot share).
    deductible, proceeds : set of str
        Lines deducted from taxable profit; end-of-period proceeds.
    """

    def __init__(self, sheet: "CashflowSheet", i: int, y: str, col: str, rows: dict):
        self._sheet, self._i = sheet, i
        self.P, self.y, self.N, self.col, self.rows = sheet.pre(i), y, "analysis_years", col, rows
        self.S = f"{self.P}scale"
        self.costs = sheet.inputs.trucks[i].costs
        self.bands = sheet.bands_of.get(i, [])
        self.aged = sheet._aged(i)
        self.deductible, self.proceeds = sheet._ded, sheet._proceeds
        self.names = {"y": y, "P": self.P, "N": self.N, "S": self.S,
                      "srv": "depot_trucks_served", "GE": sheet._g("esc_equipment")}

    def run(self, expr: str, esc: str) -> str:
        """A running cost: ``expr × (1 + e)^y`` in years 1..N, 0 in year 0 (``esc`` the
        defined name of the escalation)."""
        return self._sheet._run(expr, esc, self.y)

    def g(self, esc: str) -> str:
        """Nominal growth base of an escalation name."""
        return self._sheet._g(esc)

    def defl(self, y: str) -> str:
        """The real-basis deflator of year ``y`` ('' in the nominal basis)."""
        return self._sheet._defl(y)

    def share_age(self, age: str) -> str:
        """The truck's value as a share of its price at age ``age`` (a formula)."""
        return self._sheet._share_age(self._i, age)

    def unit_price(self, yexpr: str) -> str:
        """Price of one replacement battery bought in year ``yexpr``."""
        return self._sheet._unit_price(self._i, yexpr)

    def battery(self, line: str) -> str:
        """The battery replacement and remaining-life formulas (shared schedule)."""
        return self._sheet._battery(self._i, line, self.y)

    def depreciation(self) -> str:
        """Tax depreciation of the year (truck, depot share, battery replacements)."""
        return self._sheet._depreciation(self._i, self.y, self.rows)

    def book_left(self) -> str:
        """Tax book value left at the end of the period."""
        return self._sheet._book_left(self._i, self.rows)


class CashflowSheet:
    """The Cash flow sheet: one formula per cost line and year, totals, present values,
    levelized cost; the comparisons with the baseline (live payback, IRR, break-evens
    and their workings).

    A mixin of :class:`tco.report.workbook.book.Book`: it reads and writes the state the
    book shares (the result, the sheets, the row maps).
    """

    # ------------------------------------------------------------------------ Cash flow
    def _g(self, esc: str) -> str:
        """Growth base of an escalation name, nominal."""
        return f"((1+{esc})*(1+inflation))" if self.real else f"(1+{esc})"

    def _run(self, expr: str, esc: str, y: str) -> str:
        """A running cost: expr × (1 + e)^y in years 1..N, 0 in year 0."""
        return f"IF({y}>=1,({expr})*{self._g(esc)}^({y}),0)"

    def _defl(self, y: str) -> str:
        return f"/(1+inflation)^{y}" if self.real else ""

    def _share_age(self, i: int, age: str) -> str:
        P = self.pre(i)
        if self.inputs.trucks[i].costs.residual.method == "declining_balance":
            return f"(1-{P}residual_rate)^({age})"
        return (f"IF(({age})<1,1,INDEX({P}residual_shares,MIN({age},"
                f"COUNT({P}residual_shares))))")

    def _unit_price(self, i: int, yexpr: str) -> str:
        P = self.pre(i)
        return (f"({P}battery_cost+{P}battery_cost_per_kwh*{P}battery_capacity_kwh)"
                f"*{self._g(P + 'esc_battery')}^({yexpr})")

    def _formula(self, i: int, line: str, y: str, col: str, rows: dict) -> tuple[str, bool]:
        """The nominal-basis formula body of one line in one year, and whether the caller
        adds the real-basis deflator (False: it already refers to deflated cells). The
        line's template is its :class:`tco.cost_lines.CostLine` ``formula``.

        Raises
        ------
        KeyError
            The line is not in the registry in use.
        """
        from tco import cost_lines

        spec = cost_lines.by_name()[line]
        return spec.render(FormulaEnv(self, i, y, col, rows)), spec.deflate

    def _battery(self, i: int, line: str, y: str) -> str:
        P, N = self.pre(i), "analysis_years"
        b = self.inputs.trucks[i].costs.battery_replacement
        if b.when == "year":
            if line == "battery_replacement":
                return f"IF({y}={P}battery_year,{self._unit_price(i, y)},0)"
            return (f"IF({y}={N},-MAX(0,1-({N}-{P}battery_year)/{P}battery_year)"
                    f"*{self._unit_price(i, P + 'battery_year')},0)")
        if b.when == "range":  # the live ageing rows find the replacement years
            if not self._aged(i):
                return "0"
            if line == "battery_replacement":
                return (f"IF({y}>=1,IF(INDEX({P}battery_replaced,MAX({y},1))=1,"
                        f"{self._unit_price(i, y)},0),0)")
            yrs = (f"${_col(_FIRST_COL + 1)}${_YEAR_ROW}:"
                   f"${_col(_FIRST_COL + self.N)}${_YEAR_ROW}")
            last = f"SUMPRODUCT(MAX({P}battery_replaced*{yrs}))"
            left = f"MIN(MAX(({P}battery_soh_end-{P}eol_soh)/(1-{P}eol_soh),0),1)"
            return (f"IF(AND({y}={N},{last}>0),-{left}*{self._unit_price(i, last)},0)")
        if f"{P}battery_lives_per_year" not in self.wb.defined_names:
            return "0"  # no cycle limit: the model counts no replacement
        L = f"{P}battery_lives_per_year"
        if line == "battery_replacement":
            return (f"IF({y}>=1,(INT({y}*{L}+1E-9)-INT(({y}-1)*{L}+1E-9))"
                    f"*{self._unit_price(i, y)},0)")
        # the 1E-9 is the model's guard against rounding at whole cycles
        yrs = (f"${_col(_FIRST_COL + 1)}${_YEAR_ROW}:"
               f"${_col(_FIRST_COL + self.N)}${_YEAR_ROW}")
        last = (f"SUMPRODUCT(MAX((INT({yrs}*{L}+1E-9)-INT(({yrs}-1)*{L}+1E-9)>0)*{yrs}))")
        done = f"INT({N}*{L}+1E-9)"
        return (f"IF({y}={N},-IF({done}>0,MAX(0,MIN(1,1-({N}*{L}-{done})))"
                f"*{self._unit_price(i, last)},0),0)")

    def _assets(self, i: int) -> list[tuple[str, str]]:
        """Tax-depreciated assets of truck i: (basis formula, start-year formula)."""
        P, N = self.pre(i), "analysis_years"
        from tco.cashflow import headline_method

        c = self.inputs.trucks[i].costs
        fi = c.financing
        out = []
        if headline_method(self.inputs.finance, c) != "lease":
            out.append((f"({P}purchase_price+({P}purchase_price*{P}purchase_tax_rate"
                        f"+{P}purchase_fees)-{P}grant)", "0"))
        elif fi.lease_end == "buy_out" and "lease_buyout" in self.lines[i]:
            when = (f"MIN({P}lease_years,{N})" if fi.beyond_period == "settle"
                    else f"{P}lease_years")
            out.append((f"{P}lease_buyout_price", when))
        return out

    def _depot_basis(self, t: str) -> str:
        GE = self._g("esc_equipment")
        return (f"((depot_chargers*depot_hardware_cost+depot_chargers*depot_installation_cost)"
                f"*{GE}^({t})+IF({t}=0,depot_grid_connection_cost,0))/depot_trucks_served")

    def _depreciation(self, i: int, y: str, rows: dict | None = None) -> str:
        parts = []
        fr, n = "tax_depreciation_fractions", "COUNT(tax_depreciation_fractions)"
        for basis, s in self._assets(i) + self._replacements(rows or {}):
            parts.append(f"IF(AND({y}>{s},{y}-{s}<={n}),{basis}*INDEX({fr},{y}-{s}),0)")
        if "depot_chargers" in self.lines[i]:
            t = f"depot_life*INT(({y}-1)/depot_life)"
            parts.append(f"IF({y}>=1,{self._depot_basis(t)}/depot_life,0)")
        return "+".join(parts) or "0"

    def _book_left(self, i: int, rows: dict | None = None) -> str:
        N = "analysis_years"
        parts = []
        for basis, s in self._assets(i) + self._replacements(rows or {}):
            parts.append(f"{basis}*(1-SUMIF(tax_depreciation_years,\"<=\"&({N}-{s}),"
                         f"tax_depreciation_fractions))")
        if "depot_chargers" in self.lines[i]:
            tl = f"depot_life*INT(({N}-1)/depot_life)"
            parts.append(f"{self._depot_basis(tl)}*(1-({N}-{tl})/depot_life)")
        return "(" + ("+".join(parts) or "0") + ")"

    def _cashflow_sheet(self) -> None:
        from tco import cost_lines

        lines = cost_lines.registry()
        self._ded = {s.name for s in lines if s.deductible}
        self._proceeds = {s.name for s in lines if s.group == "end"}
        desc = {s.name: s.description for s in lines}
        ws, N, cur = self.ws_cf, self.N, self.cur
        basis = "real, money of year 0" if self.real else "nominal"
        _title(ws, f"Cash flow by truck and year [{cur}, {basis}]")
        safe_text(ws.cell(row=2, column=1),
                  "Costs positive, money in negative. Every amount is a formula over the "
                  "named inputs of the Inputs sheet; year 0 = purchase, year y = end of year "
                  "y. Every amount of year y (running cost or one-off): today's price × "
                  "(1 + escalation)^y.")
        cols = list(range(_FIRST_COL, _FIRST_COL + N + 1))
        c_sum, c_pv, c_note = _FIRST_COL + N + 1, _FIRST_COL + N + 2, _FIRST_COL + N + 3
        wbb.header_row(ws, _YEAR_ROW, ["Cost line", "Key"])
        for k, c in enumerate(cols):
            _number_header(ws, _YEAR_ROW, c, k)
        wbb.header_row(ws, _YEAR_ROW, ["Sum", "Present value", "Note"], start_col=c_sum)
        wbb.freeze(ws, f"{_col(_FIRST_COL)}{_YEAR_ROW + 1}")
        wbb.set_widths(ws, {"A": 50, "B": 36, **{c: 11 for c in cols}, c_sum: 14, c_pv: 15,
                            c_note: 50})
        wbb.set_widths(ws, {_FIRST_COL: 15})  # also holds the single figures below
        first, last = _col(_FIRST_COL), _col(_FIRST_COL + N)
        second = _col(_FIRST_COL + 1)

        def npv(r: int) -> str:
            return f"NPV(discount_rate,{second}{r}:{last}{r})+{first}{r}"

        row = _YEAR_ROW + 1
        safe_text(ws.cell(row=row, column=1), "Discount factor (1 + rate)^−y")
        safe_text(ws.cell(row=row, column=2), "discount_factor")
        for c in cols:
            y = f"{_col(c)}${_YEAR_ROW}"
            ws.cell(row=row, column=c, value=f"=1/(1+discount_rate)^{y}").number_format = \
                "0.0000"
        self.df_row = row
        row += 2
        for i, name in enumerate(self.trucks):
            row = self._truck_block(i, name, row, cols, c_sum, c_pv, c_note, desc, npv)
        self._cf_ctx = (cols, c_sum, c_pv, c_note, npv)
        self.cf_end = row
        # differences to the baseline (after all blocks, so the baseline rows are known)
        ref = self.blocks[self.ref]
        for i, blk in enumerate(self.blocks):
            if i == self.ref:
                continue
            for attr, base_attr in (("difference", "present_value"),
                                    ("difference_km", "levelized_km"),
                                    ("difference_mile", "levelized_mile")):
                r = getattr(blk, attr)
                ws.cell(row=r, column=_FIRST_COL,
                        value=f"={first}{getattr(blk, base_attr)}-{first}"
                              f"{getattr(ref, base_attr)}")
        self._comparisons()
        self._ageing_rows(self.cf_next + 1)

    # ------------------------------------------------------------------------ comparisons
    #: Break-even quantities (keys of summary.json ``break_even``): the workbook names they
    #: move, which trucks' costs they reach (None: every truck; "truck": the compared one)
    #: and the model's search range as multiples of the case's value
    #: (tco.cashflow.BREAK_EVEN_QUANTITIES).
    def _break_even_specs(self, i: int):
        P = self.pre(i)
        elec = [price for _, price in self.bands_of.get(i, [])]
        for _, price in self.bands_of.get(self.ref, []):
            if price not in elec:
                elec.append(price)
        return [
            ("diesel_price_per_litre", "diesel_price", ["diesel_price"], None, (0.0, 10.0)),
            ("electricity_price_per_kwh", "electricity prices (all depot bands together)",
             elec, None, (0.0, 10.0)),
            ("purchase_price", f"{P}purchase_price", [f"{P}purchase_price"], "truck",
             (0.0, 10.0)),
            ("annual_distance_km", "days_per_year", ["days_per_year"], None, (0.02, 5.0)),
        ]

    def _substituted(self, names: list[str], frozen=(), repl: dict | None = None):
        """A function rewriting a formula as if every name in ``names`` were 1 % higher,
        following the derived inputs (loan amount, scale...) that read them, except the
        derived inputs in ``frozen`` (held at their value). ``repl``: names replaced by
        given expressions instead."""
        pat = {}

        def rx(n):
            return re.compile(r"(?<![A-Za-z0-9_.$'!])" + re.escape(n) + r"(?![A-Za-z0-9_.(])")

        for n in names:
            pat[n] = (rx(n), f"({n}*{_BUMP})")
        for n, expr in (repl or {}).items():
            pat[n] = (rx(n), f"({expr})")

        def sub(f: str) -> str:
            for r, text in pat.values():
                f = r.sub(lambda m: text, f)
            return f

        for d, formula in self.derived_f.items():  # definition order: inputs first
            if d in frozen or d in (repl or {}):
                continue
            new = sub(formula)
            if new != formula:
                pat[d] = (rx(d), f"({new})")
        return sub

    def _cycled_lives(self) -> set[str]:
        """Derived names of the lives used per year of trucks whose battery is replaced by
        cycles (their replacements step with the distance)."""
        return {f"{self.pre(t)}battery_lives_per_year" for t in range(len(self.trucks))
                if self.inputs.trucks[t].costs.battery_replacement.when == "cycles"
                and f"{self.pre(t)}battery_lives_per_year" in self.derived_f}

    #: Iterations of the annual-distance break-even across battery-replacement steps.
    _REGIME_STEPS = 3

    def _distance_regimes(self, i: int, cyc: list[int], D: str, slope: str, row: int):
        """Annual-distance break-even when battery replacements by cycles step the cost.

        Present value is affine in the days multiplier k between replacement steps (the
        lives used per year are affine in k; the replacements are whole-number steps of
        y·L). From k = 1: evaluate the difference at k and 0.1 % above it with the
        replacements of k (workings rows: each cycled truck's battery lines at the lives of
        k), take the root of that affine piece, and move there; the root is exact when it
        lies in the piece it was computed from (the same replacement years). The 0.1 %
        step keeps the slope well conditioned (present values of 10⁵–10⁶ differ by about
        10² there); a step across a replacement shows as "not in this piece". Returns
        (cell of k at the root, cell of the consistency flag, flat-slope test, next row).
        """
        ws = self.ws_cf
        c_pv = self._cf_ctx[2]
        first, pv = _col(_FIRST_COL), _col(c_pv)
        yrs = (f"${_col(_FIRST_COL + 1)}${_YEAR_ROW}:${_col(_FIRST_COL + self.N)}"
               f"${_YEAR_ROW}")

        def lives(t: int, K: str) -> str:
            P = self.pre(t)
            cal = f"{P}calendar_fade/(1-{P}eol_soh)"
            return f"(({P}battery_lives_per_year-{cal})*{K}+{cal})"

        def steps(t: int, K: str) -> str:
            return f"INT({yrs}*{lives(t, K)}+1E-9)"

        s_k = f"({slope})*days_per_year"  # change of the PV difference per unit of k
        prev_root = None
        out = None
        for j in range(self._REGIME_STEPS):
            r_k = row
            safe_text(ws.cell(row=r_k, column=1), f"Annual distance, step {j + 1}: days × k "
                      "(1: the case)").font = _BOLD
            safe_text(ws.cell(row=r_k, column=2), "workings")
            ws.cell(row=r_k, column=_FIRST_COL,
                    value="=1" if prev_root is None else f"={first}{prev_root}"
                    ).number_format = _FACTOR
            row += 1
            K = {"at": f"{first}{r_k}", "above": f"{first}{r_k}*(1+1E-3)"}
            pvs = {}
            for tag in ("at", "above"):
                for t in cyc:
                    name = f"{self.pre(t)}battery_lives_per_year"
                    sub = self._substituted([], repl={name: lives(t, K[tag])})
                    at = "k" if tag == "at" else "k × (1 + 1e-3)"
                    tot, row = self._shadow(t, [], row, f"{self.trucks[t]}: lives of {at}",
                                            sub, what=f"lives of {at}")
                    pvs[(tag, t)] = f"{pv}{tot}"

            def diff(tag: str) -> str:
                expr = f"{D}+{s_k}*({K[tag]}-1)"
                for t in cyc:
                    sign = "+" if t == i else "-"
                    expr += (f"{sign}({pvs[(tag, t)]}-{first}"
                             f"{self.blocks[t].present_value})")
                return expr

            cells = {}
            for key, text, f, fmt in (
                    ("at", "PV difference at k", diff("at"), wbb.MONEY),
                    ("above", "PV difference at k × (1 + 1e-3)", diff("above"), wbb.MONEY)):
                cells[key] = row
                safe_text(ws.cell(row=row, column=1), f"  {text}")
                safe_text(ws.cell(row=row, column=2), "workings")
                ws.cell(row=row, column=_FIRST_COL, value="=" + f).number_format = fmt
                row += 1
            a, b = f"{first}{cells['at']}", f"{first}{cells['above']}"
            flat = f"{b}-{a}=0"
            r_root = row
            safe_text(ws.cell(row=row, column=1), "  Root of this piece: k − difference ÷ "
                      "slope")
            safe_text(ws.cell(row=row, column=2), "workings")
            ws.cell(row=row, column=_FIRST_COL,
                    value=f"=IF({flat},{K['at']},{K['at']}-{a}*({K['at']}*1E-3)/({b}-{a}))"
                    ).number_format = _FACTOR
            row += 1
            r_ok = row
            root = f"{first}{r_root}"
            same = ",".join(f"SUMPRODUCT(ABS({steps(t, root)}-{steps(t, K['at'])}))=0,"
                            f"SUMPRODUCT(ABS({steps(t, K['above'])}-{steps(t, K['at'])}))=0"
                            for t in cyc)
            safe_text(ws.cell(row=row, column=1), "  Root in this piece (same replacement "
                      "years)")
            safe_text(ws.cell(row=row, column=2), "workings")
            ws.cell(row=row, column=_FIRST_COL, value=f"=AND({same})")
            row += 1
            prev_root = r_root
            out = (root, f"{first}{r_ok}", flat)
        return out[0], out[1], out[2], row

    def _shadow(self, i: int, names: list[str], row: int, title: str,
                sub=None, what: str = "input 1 % higher") -> tuple[int, int]:
        """Truck i's cost lines that change when ``names`` are 1 % higher (or as ``sub``
        rewrites them), at the bottom of the Cash flow sheet; the changed total and its
        present value. Returns (row of the total, next free row)."""
        ws = self.ws_cf
        cols, c_sum, c_pv, c_note, npv = self._cf_ctx
        blk = self.blocks[i]
        sub = sub or self._substituted(names)
        safe_text(ws.cell(row=row, column=1), title).font = _BOLD
        safe_text(ws.cell(row=row, column=2), "workings")
        row += 1
        rows = dict(blk.rows)
        changed = []
        for line in self.lines[i]:
            cells = []
            differs = False
            for c in cols:
                col = _col(c)
                y = f"{col}${_YEAR_ROW}"
                body, deflate = self._formula(i, line, y, col, rows)
                orig, _ = self._formula(i, line, y, col, blk.rows)
                new = sub(body)
                if deflate and self.real:
                    new = f"({new}){self._defl(y)}"
                    orig = f"({orig}){self._defl(y)}"
                differs |= new != orig
                cells.append(new)
            if not differs:
                continue
            rows[line] = row
            changed.append(line)
            safe_text(ws.cell(row=row, column=1), f"  {line}, {what}")
            safe_text(ws.cell(row=row, column=2), "workings")
            for c, f in zip(cols, cells):
                ws.cell(row=row, column=c, value="=" + f).number_format = wbb.MONEY
            row += 1
        safe_text(ws.cell(row=row, column=1), f"  Net cost, {what}")
        safe_text(ws.cell(row=row, column=2), "workings")
        for c in cols:
            col = _col(c)
            delta = "".join(f"+{col}{rows[ln]}-{col}{blk.rows[ln]}" for ln in changed)
            ws.cell(row=row, column=c, value=f"={col}{blk.total}{delta}").number_format = \
                wbb.MONEY
        ws.cell(row=row, column=c_pv, value=f"={npv(row)}").number_format = wbb.MONEY
        return row, row + 1

    def _verify_step_cells(self) -> None:
        """Break-evens across battery-replacement steps: a safety net. The live formula
        (the root of the affine piece it lands in) is kept where it gives the model's root
        for the case as written (or both find none); else the model figure is shown,
        marked (e.g. the model found a root farther from the case)."""
        if not getattr(self, "_step_cells", None):
            return
        from tco.report.workbook_values import evaluate

        values = evaluate(self.wb)
        ws = self.ws_cf
        c_note = self._cf_ctx[3]
        for r, model in self._step_cells:
            got = values.get((_CF, f"{_col(_FIRST_COL)}{r}"))
            if (model is not None and isinstance(got, float)
                    and math.isclose(got, model, rel_tol=1e-9)) or (
                    model is None and isinstance(got, str)):
                continue
            cell = ws.cell(row=r, column=_FIRST_COL)
            write_value(cell, "-" if model is None else model, wbb.INTEGER).fill = _MODEL_FILL
            safe_text(ws.cell(row=r, column=c_note), f"{_NOT_LIVE}: a battery replacement "
                      "lies between the case and the break-even (the cost steps there)")

    def _model_comparison(self, i: int) -> dict:
        return next((c for c in self.summary.get("cashflow", {}).get("comparisons", [])
                     if c.get("truck") == self.trucks[i]), {})

    def _comparisons(self) -> None:
        """Per compared truck: savings rows, live payback years, IRR and break-evens."""
        ws, N = self.ws_cf, self.N
        cols, c_sum, c_pv, c_note, npv = self._cf_ctx
        ref = self.blocks[self.ref]
        first, last = _col(cols[0]), _col(cols[-1])
        years = f"${first}${_YEAR_ROW}:${last}${_YEAR_ROW}"
        row = self.cf_end + 1
        self.cmp_rows: dict[int, dict[str, int]] = {}
        self._step_cells: list[tuple[int, float | None]] = []
        work = []
        for i, blk in enumerate(self.blocks):
            if i == self.ref:
                continue
            R: dict[str, int] = {}
            self.cmp_rows[i] = R
            _section(ws, row, f"{self.trucks[i]} against {self.trucks[self.ref]}")
            safe_text(ws.cell(row=row, column=2), "comparison")
            safe_text(ws.cell(row=row, column=3), self.trucks[i])
            row += 1
            for key, label in (("savings", "Savings: baseline net cost − this truck's"),
                               ("discounted_savings", "Discounted savings"),
                               ("cumulative_savings", "Cumulative savings"),
                               ("discounted_cumulative_savings",
                                "Discounted cumulative savings")):
                R[key] = row
                self._label(row, label, key)
                for k, c in enumerate(cols):
                    col = _col(c)
                    if key == "savings":
                        f = f"={col}{ref.total}-{col}{blk.total}"
                    elif key == "discounted_savings":
                        f = f"={col}{R['savings']}*{col}{self.df_row}"
                    else:
                        src = R["savings" if key == "cumulative_savings"
                                else "discounted_savings"]
                        f = f"={col}{src}" if k == 0 else f"={_col(c - 1)}{row}+{col}{src}"
                    ws.cell(row=row, column=c, value=f).number_format = wbb.MONEY
                row += 1
            safe_text(ws.cell(row=R["savings"], column=c_note),
                      "positive: this truck costs less that year")
            # payback: the year after the last year the cumulative saving is below
            # −1e-9 × max(largest |saving| of the row, 1) (tco.finance.payback_year)
            for key, label, cum, flow in (
                    ("simple_payback_year", "Simple payback year", "cumulative_savings",
                     "savings"),
                    ("discounted_payback_year", "Discounted payback year",
                     "discounted_cumulative_savings", "discounted_savings")):
                fr = f"{first}{R[flow]}:{last}{R[flow]}"
                cr = f"{first}{R[cum]}:{last}{R[cum]}"
                dust = f"-1E-9*MAX(MAX({fr}),-MIN({fr}),1)"
                after = f"SUMPRODUCT(MAX(({cr}<{dust})*({years}+1)))"
                R[key] = row
                self._metric(row, label, key, f"=IF({after}>analysis_years,"
                             f"\"not within the period\",{after})", "0")
                safe_text(ws.cell(row=row, column=c_note), "the year after the last year "
                          "the cumulative saving is below zero (0: never below)")
                row += 1
            R["irr"] = row
            # the spreadsheet's IRR iterates from a starting guess; from its default 10 % it
            # misses strongly negative rates and picks among several roots by chance. The
            # guess is the model's IRR of the case as written (only the starting point:
            # the rate itself is recomputed from the savings row after any edit).
            model_irr = self._model_comparison(i).get("irr")
            guess = repr(float(model_irr)) if model_irr is not None else "0.1"
            # as the report reads it (formatting.irr_text): a negative rate on an extra cost
            # never paid back within the period (no simple payback year) is "n/a", the
            # savings never recover the extra cost; no rate at all is "n/a" too
            irr = f"IRR({first}{R['savings']}:{last}{R['savings']},{guess})"
            payback = f"{_col(_FIRST_COL)}{R['simple_payback_year']}"
            self._metric(row, "IRR of the extra investment (spreadsheet IRR over the savings)",
                         "irr", f"=IFERROR(IF(AND({irr}<0,NOT(ISNUMBER({payback}))),"
                         f"\"n/a\",{irr}),\"n/a\")", _RATE)
            row += 1
            work.append((i, R, row))
            row += len(self._break_even_specs(i)) + 1
        # break-even workings, then the break-even values (closed form: PV is affine)
        row += 1
        _section(ws, row, "Break-even workings: the cost lines that change when one input "
                 "is 1 % higher (present value is affine in each break-even input between "
                 "steps such as a battery replacement, so the slope is the change in present "
                 "value ÷ 1 % of the input)")
        row += 1
        shadow_pv: dict[tuple[str, int], int] = {}
        for i, R, r_be in work:
            for key, what, names, reach, _ in self._break_even_specs(i):
                if not names:
                    continue
                frozen = self._cycled_lives() if key == "annual_distance_km" else ()
                for t in ([i] if reach == "truck" else [i, self.ref]):
                    if (key, t) in shadow_pv:
                        continue
                    tot, row = self._shadow(t, names, row, f"{self.trucks[t]}: {what} "
                                            "1 % higher" + (", battery replacements held"
                                                            if frozen else ""),
                                            self._substituted(names, frozen))
                    shadow_pv[(key, t)] = tot
        for i, R, r_be in work:
            blk = self.blocks[i]
            D = f"{first}{blk.difference}"
            for k, (key, what, names, reach, (lo, hi)) in enumerate(
                    self._break_even_specs(i)):
                r = r_be + k
                R["break_even." + key] = r
                label = {"diesel_price_per_litre": f"Break-even diesel price [{self.cur}/L]",
                         "electricity_price_per_kwh": "Break-even depot electricity price, "
                         f"profile-weighted [{self.cur}/kWh]",
                         "purchase_price": f"Break-even purchase price [{self.cur}]",
                         "annual_distance_km": "Break-even annual distance of the baseline "
                         "truck [km/yr]"}[key]
                cyc = [t for t in (i, self.ref) if key == "annual_distance_km"
                       and self.pre(t) + "battery_lives_per_year" in self._cycled_lives()]
                if not names:
                    self._metric(r, label, "break_even." + key, None, "0.00")
                    safe_text(ws.cell(row=r, column=_FIRST_COL), "-")
                    safe_text(ws.cell(row=r, column=c_note), "the scenario has no depot "
                              "electricity price")
                    continue
                pv = f"{_col(c_pv)}"
                dpv = f"({pv}{shadow_pv[(key, i)]}-{first}{blk.present_value})"
                if reach != "truck":
                    dpv += (f"-({pv}{shadow_pv[(key, self.ref)]}-{first}"
                            f"{ref.present_value})")
                if key == "electricity_price_per_kwh":
                    x0 = "1"  # the factor on every depot band price
                else:
                    x0 = names[0]
                slope = f"({dpv})/({x0}*{_BUMP - 1!r})"
                root = f"({x0}-{D}/({slope}))"
                if key == "electricity_price_per_kwh":
                    who = i if self.ops[i].grid_energy_depot > 0 else self.ref
                    Pw = self.pre(who)
                    kwh = "+".join(f"{a}*{b}" for a, b in self.bands_of[who])
                    value = f"{root}*({kwh})/{Pw}depot_kwh"
                elif key == "annual_distance_km":
                    Pr = self.pre(self.ref)
                    value = f"{Pr}distance_km*{Pr}scale*{root}/days_per_year"
                else:
                    value = root
                f = (f"=IF({slope}=0,\"-\",IF(AND({root}>={lo}*{x0},{root}<={hi}*{x0}),"
                     f"{value},\"no break-even in the range\"))")
                if cyc:  # battery replacements by cycles: present value steps with the
                    # distance; the root of each step's affine piece, found by iteration
                    k, ok, flat, row = self._distance_regimes(i, cyc, D, slope, row)
                    b = self._model_comparison(i).get("break_even", {}).get(key, {})
                    self._step_cells.append((r, b.get("value")))
                    Pr = self.pre(self.ref)
                    f = (f"=IF({flat},\"-\",IF({ok},IF(AND({k}>={lo},{k}<={hi}),"
                         f"{Pr}distance_km*{Pr}scale*{k},\"no break-even in the range\"),"
                         "\"no exact break-even near the case: the cost steps across zero at "
                         "a battery replacement\"))")
                fmt = {"purchase_price": wbb.MONEY, "annual_distance_km": wbb.INTEGER
                       }.get(key, "#,##0.0000")
                self._metric(r, label, "break_even." + key, f, fmt)
                safe_text(ws.cell(row=r, column=c_note),
                          f"{what} − PV difference ÷ slope; searched "
                          f"{fm.plain(lo)}–{fm.plain(hi)}× the "
                          "case's value" + ("; between battery replacements PV is affine in "
                                            "the distance: the root of the piece it lands in "
                                            "(workings below)" if cyc else ""))
        self.cf_next = row

    def _truck_block(self, i, name, row, cols, c_sum, c_pv, c_note, desc, npv) -> int:
        ws = self.ws_cf
        blk = _Block()
        self.blocks.append(blk)
        P = self.pre(i)
        first = _col(_FIRST_COL)
        title = ws.cell(row=row, column=1)
        safe_text(title, name).font = _SECTION_FONT
        safe_text(ws.cell(row=row, column=2), "truck")
        safe_text(ws.cell(row=row, column=3),
                  f"truck {i + 1}, {self.powertrains[i]}"
                  + (", baseline" if i == self.ref else "")
                  + f"; its inputs are named {P}…")
        row += 1
        r0 = row
        for line in self.lines[i]:
            blk.rows[line] = row
            row += 1
        for line, r in blk.rows.items():
            safe_text(ws.cell(row=r, column=1), desc[line]).alignment = \
                Alignment(vertical="top")
            safe_text(ws.cell(row=r, column=2), line)
            for c in cols:
                col = _col(c)
                y = f"{col}${_YEAR_ROW}"
                body, deflate = self._formula(i, line, y, col, blk.rows)
                if deflate and self.real:
                    body = f"({body}){self._defl(y)}"
                ws.cell(row=r, column=c, value="=" + body).number_format = wbb.MONEY
            self._sum_pv(r, c_sum, c_pv, npv)
            note = self._line_note(i, line)
            if note:
                safe_text(ws.cell(row=r, column=c_note), note)
        r1 = row - 1
        # total, cumulative, distance
        blk.total = row
        self._label(row, "Net cost", "total", bold=True)
        for c in cols:
            ws.cell(row=row, column=c, value=f"=SUM({_col(c)}{r0}:{_col(c)}{r1})"
                    ).number_format = wbb.MONEY
            ws.cell(row=row, column=c).font = _BOLD
        self._sum_pv(row, c_sum, c_pv, npv)
        row += 1
        blk.cumulative = row
        self._label(row, "Cumulative net cost (not discounted)", "cumulative")
        for k, c in enumerate(cols):
            f = f"={_col(c)}{blk.total}" if k == 0 else \
                f"={_col(c - 1)}{row}+{_col(c)}{blk.total}"
            ws.cell(row=row, column=c, value=f).number_format = wbb.MONEY
        row += 1
        blk.distance = row
        self._label(row, "Distance driven [km]", "distance_km")
        for c in cols:
            y = f"{_col(c)}${_YEAR_ROW}"
            ws.cell(row=row, column=c, value=f"=IF({y}>=1,{P}distance_km*{P}scale,0)"
                    ).number_format = wbb.INTEGER
        self._sum_pv(row, c_sum, c_pv, npv, fmt=wbb.INTEGER)
        safe_text(ws.cell(row=row, column=c_note), "present value column: discounted km")
        row += 1
        # metrics in column C
        cur = self.cur
        blk.present_value = row
        self._metric(row, f"Present value of all costs [{cur}]", "present_value",
                     f"={npv(blk.total)}", wbb.MONEY)
        row += 1
        blk.levelized_km = row
        self._metric(row, f"Levelized cost [{cur}/km]: present value ÷ discounted km",
                     "levelized_cost_per_km", f"={first}{blk.present_value}/({npv(blk.distance)})",
                     "0.0000")
        row += 1
        blk.levelized_mile = row
        self._metric(row, f"Levelized cost [{cur}/mi]", "levelized_cost_per_mile",
                     f"={first}{blk.levelized_km}*{_M_PER_MILE / _M_PER_KM!r}", "0.0000")
        row += 1
        if i != self.ref:
            base = self.trucks[self.ref]
            for attr, key, label, fmt in (
                    ("difference", "present_value_difference",
                     f"Present value difference to the baseline [{cur}] (positive: costs "
                     "more)", wbb.MONEY),
                    ("difference_km", "levelized_cost_difference_per_km",
                     f"Levelized cost difference to the baseline [{cur}/km]", "0.0000"),
                    ("difference_mile", "levelized_cost_difference_per_mile",
                     f"Levelized cost difference to the baseline [{cur}/mi]", "0.0000")):
                setattr(blk, attr, row)
                self._metric(row, label, key, None, fmt)
                safe_text(ws.cell(row=row, column=c_note), f"baseline: {base}")
                row += 1
        return row + 1

    def _label(self, row: int, label: str, key: str, bold: bool = False) -> None:
        c = safe_text(self.ws_cf.cell(row=row, column=1), label)
        if bold:
            c.font = _BOLD
        safe_text(self.ws_cf.cell(row=row, column=2), key)

    def _metric(self, row, label, key, formula, fmt) -> None:
        ws = self.ws_cf
        safe_text(ws.cell(row=row, column=1), label).font = _BOLD
        safe_text(ws.cell(row=row, column=2), key)
        c = ws.cell(row=row, column=_FIRST_COL, value=formula)
        c.number_format = fmt
        c.font = _BOLD

    def _sum_pv(self, r, c_sum, c_pv, npv, fmt=wbb.MONEY) -> None:
        ws = self.ws_cf
        first, last = _col(_FIRST_COL), _col(_FIRST_COL + self.N)
        ws.cell(row=r, column=c_sum, value=f"=SUM({first}{r}:{last}{r})").number_format = fmt
        ws.cell(row=r, column=c_pv, value=f"={npv(r)}").number_format = fmt

    def _line_note(self, i: int, line: str) -> str:
        from tco import cost_lines

        return cost_lines.by_name()[line].note_for(self.inputs.trucks[i].costs)
