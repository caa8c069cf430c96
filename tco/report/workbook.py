"""The live workbook: inputs, cash flows and emissions as spreadsheet formulas.

:func:`write_workbook` renders a :class:`tco.result.Result` (and its ``summary.json``
content) as an ``.xlsx`` workbook whose results are *formulas over named inputs*, so a
finance analyst can audit every figure and change an input (a diesel price, an operating
day count, a grant) and see the present values move. Sheets:

``Summary``
    Key figures per truck as formulas pointing at the other sheets (present value,
    levelized cost per km and per mile, differences to the baseline truck, emissions and
    emissions avoided, abatement cost), the feasibility texts, warnings and cautions, and a
    native chart of the cumulative cost by truck.
``Inputs``
    One row per input (label, defined name, value, unit, source). Money per physical unit is
    shown per litre, per kWh, per km and per kW (converted from SI at this edge; the
    formulas work in these units). A few derived cells (the yearly scale of each truck's
    operation, its loan amount, its depot energy per time-of-use band) are formulas too.
    Below: every scenario field with its source, for reference.
``Cash flow``
    Per truck, one row per cost line the model computes for it (years 0..N in columns),
    each cell a formula following the conventions of :mod:`tco.cashflow` (running costs
    ``× (1 + e)^y``, one-offs ``× (1 + e)^t`` (one index), loan interest and principal by
    ``CUMIPMT``/``CUMPRINC``, depot costs shared, taxes from the deductible rows); total,
    cumulative and distance rows; present value ``NPV(rate, years 1..N) + year 0``,
    levelized cost and the differences to the baseline truck.
``Emissions``
    The grid-intensity path and, per truck and year, the line items of
    :mod:`tco.emissions` and the Scope 1/2/3, tank-to-wheel and well-to-wheel frames as
    formulas over named emission factors; emissions avoided; a native chart by year.
``Energy``
    The duty-cycle summary per truck (per trip, per distance metric and US, per year), as
    values with units.
``Sensitivity``, ``Sample statistics``
    When the uncertainty studies ran: the tornado rows and break-even values, and the Monte
    Carlo statistics and probabilities (values: they come from thousands of model runs).

All text from the scenario goes through :func:`tco.report.workbook_base.safe_text`, so a
name such as ``=HYPERLINK(...)`` lands as text; formulas are built only from defined names,
cell references and numbers, never from scenario text.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from openpyxl import Workbook
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter
from openpyxl.workbook.defined_name import DefinedName
from openpyxl.workbook.properties import CalcProperties

from tco.report import workbook_base as wbb
from tco.report.workbook_base import safe_text, write_value

__all__ = ["SHEETS", "write_workbook", "build_workbook"]

#: Sheet titles in workbook order (the last two only when uncertainty results exist).
SHEETS = ("Summary", "Inputs", "Cash flow", "Emissions", "Energy", "Sensitivity",
          "Sample statistics")
_SU, _IN, _CF, _EM, _EN, _SE, _ST = SHEETS

_J_PER_KWH = 3.6e6
_M_PER_KM = 1000.0
_M_PER_MILE = 1609.344  # international mile, exact
_M3_PER_L = 1e-3
_S_PER_H = 3600.0
_W_PER_KW = 1000.0

#: Rows of the year sheets: header with the years, then the first data row.
_YEAR_ROW = 3
_FIRST_COL = 3  # column C = first year
_RATE = "0.00%"
_FACTOR = "0.000000"
#: Grey marks a model figure that cannot be live (Monte Carlo, step-function break-evens).
_MODEL_FILL = PatternFill("solid", fgColor="D9D9D9")
_DERIVED_FILL = PatternFill("solid", fgColor="E2EFDA")  # light green: formula on Inputs
_SECTION_FONT = Font(bold=True, size=12, color="0B3954")
_TITLE_FONT = Font(bold=True, size=14, color="0B3954")
_BOLD = Font(bold=True)
_WRAP = Alignment(wrap_text=True, vertical="top")
_NOT_LIVE = "model figure (not live)"
#: Hidden column of the Inputs sheet holding each named input's value as written.
_AS_WRITTEN_COL = 8
#: Factor on a break-even input in the workings that measure the present value's slope.
_BUMP = 1.01


def write_workbook(result, summary: dict, path) -> None:
    """Write the live workbook of a Result.

    Parameters
    ----------
    result : tco.result.Result
        The evaluated scenario.
    summary : dict
        Its ``summary.json`` content (:func:`tco.report.summary.build_summary`).
    path : str or Path
        The ``.xlsx`` file to write (overwritten).
    """
    from tco.report.workbook_values import save_with_values

    save_with_values(build_workbook(result, summary), Path(path))


def build_workbook(result, summary: dict) -> Workbook:
    """The live workbook of a Result as an :class:`openpyxl.Workbook` (not saved).

    Parameters
    ----------
    result : tco.result.Result
    summary : dict
        ``summary.json`` content of the same Result.

    Returns
    -------
    openpyxl.Workbook
    """
    return _Book(result, summary).build()


# --------------------------------------------------------------------------- helpers
def _col(c: int) -> str:
    return get_column_letter(c)


def _ref(sheet: str, col: int, row: int) -> str:
    """Absolute reference to a cell of another sheet: ``'Cash flow'!$C$10``."""
    return f"'{sheet}'!${_col(col)}${row}"


def _title(ws, text: str, row: int = 1) -> None:
    safe_text(ws.cell(row=row, column=1), text).font = _TITLE_FONT


def _section(ws, row: int, text: str, col: int = 1) -> None:
    safe_text(ws.cell(row=row, column=col), text).font = _SECTION_FONT


def _number_header(ws, row: int, col: int, value) -> None:
    c = ws.cell(row=row, column=col, value=value)
    c.font = wbb.HEADER_FONT
    c.fill = wbb.HEADER_FILL
    c.alignment = Alignment(horizontal="center")
    c.number_format = wbb.YEAR


def _unit_text(unit: str, currency: str) -> str:
    """A model unit string (``1/L``, ``currency``, ``×``) in words for the sheet."""
    if unit in ("", None):
        return "-"
    if unit == "currency":
        return currency
    if unit.startswith("1/"):
        return f"{currency}/{unit[2:]}"
    return unit


@dataclass
class _Block:
    """Where one truck's rows sit on the Cash flow sheet."""

    rows: dict[str, int] = field(default_factory=dict)
    present_value: int = 0
    levelized_km: int = 0
    levelized_mile: int = 0
    difference: int | None = None
    difference_km: int | None = None
    difference_mile: int | None = None
    cumulative: int = 0
    distance: int = 0
    total: int = 0


@dataclass
class _EmBlock:
    """Where one truck's rows sit on the Emissions sheet."""

    rows: dict[str, int] = field(default_factory=dict)
    avoided: dict[str, int] = field(default_factory=dict)


def _uses_depot(powertrain: str, op) -> bool:
    # The cash-flow model's rule (tco.cashflow._Context._uses_depot).
    return powertrain == "electric" and op.grid_energy_depot > 0


class _Book:
    """Builds the workbook; one instance per call."""

    def __init__(self, result, summary: dict):
        from tco import cashflow, emissions
        from tco.pipeline import cost_inputs

        self.result = result
        self.summary = summary
        self.s = result.scenario
        self.cur = str(self.s.study.currency)
        self.ops = [tr.operation for tr in result.trucks.values()]
        self.inputs = cost_inputs(self.s, self.ops)
        self.params = cashflow.flat_params(self.inputs)
        self.em_params = emissions.flat_params(self.s.emissions)
        self.cf = result.cashflow
        self.flows = self.cf.flows
        self.lines = self.flows.lines  # per truck: line -> amounts (all lines computed)
        self.trucks = list(self.flows.trucks)
        self.powertrains = list(self.flows.powertrains)
        self.ref = self.flows.baseline
        self.N = int(self.cf.analysis_years)
        self.real = self.cf.money_basis == "real"
        self.sources = {r["field"]: r["source"] for r in result.assumptions}
        d = self.inputs.depot
        self.served = d.trucks_served or max(1, sum(
            1 for t, op in zip(self.inputs.trucks, self.ops) if _uses_depot(t.powertrain, op)))
        self.wb = Workbook()
        self.blocks: list[_Block] = []
        self.em_blocks: list[_EmBlock] = []
        self.bands_of: dict[int, list[tuple[str, str]]] = {}  # truck -> (kWh name, price)
        self.derived_f: dict[str, str] = {}  # derived input name -> its formula

    # ------------------------------------------------------------------------ build
    def build(self) -> Workbook:
        wb = self.wb
        self.ws_su = wb.active
        self.ws_su.title = _SU
        self.ws_in = wb.create_sheet(_IN)
        self.ws_cf = wb.create_sheet(_CF)
        self.ws_em = wb.create_sheet(_EM)
        self.ws_en = wb.create_sheet(_EN)
        self._inputs_sheet()
        self._cashflow_sheet()
        self._emissions_sheet()
        self._energy_sheet()
        self._summary_sheet()
        unc = self.summary.get("uncertainty")
        if unc:
            self._sensitivity_sheet(unc)
            self._statistics_sheet(unc)
        self._formats_and_printing()
        # spreadsheet programs recompute everything when the file is opened (the file also
        # carries each formula's result, tco.report.workbook_values)
        wb.calculation = CalcProperties(fullCalcOnLoad=True)
        return wb

    def _formats_and_printing(self) -> None:
        """Money formats carry the currency code; every sheet gets its page setup."""
        money = {wbb.MONEY: wbb.money_format(self.cur, 0),
                 wbb.MONEY_CENTS: wbb.money_format(self.cur, 2)}
        years = range(_FIRST_COL, _FIRST_COL + self.N + 1)
        for ws in self.wb.worksheets:
            if ws.title == _IN:
                continue  # the Unit column names the currency of every input
            for row in ws.iter_rows():
                # year grids keep plain amounts (the sheet title names the currency);
                # single figures, sums and present values show the code
                grid = ws.title == _CF and row[_FIRST_COL].data_type == "f" \
                    if len(row) > _FIRST_COL else False
                for c in row:
                    f = money.get(c.number_format)
                    if f and not (grid and c.column in years):
                        c.number_format = f
        study = self.summary.get("scenario", {}).get("name", self.s.study.name)
        titles = {_SU: ("1:1", None), _IN: ("1:1", None),
                  _CF: (f"1:{_YEAR_ROW}", "A:B"), _EM: (f"1:{_YEAR_ROW}", "A:B"),
                  _EN: ("1:3", "A:B"), _SE: ("1:2", None), _ST: ("1:4", None)}
        for ws in self.wb.worksheets:
            rows, cols = titles.get(ws.title, (None, None))
            wbb.print_setup(ws, study, title_rows=rows, title_cols=cols)

    # ------------------------------------------------------------------------ sources
    def source(self, path: str) -> str:
        s = self.sources.get(path)
        if s is None:
            return "scenario"
        return "user" if s == "user" else f"default: {s}"

    def pre(self, i: int) -> str:
        """Prefix of truck i's defined names."""
        return f"t{i + 1}_"

    # ------------------------------------------------------------------------ Inputs
    def _inp(self, name, label, value, unit, source, fmt=None) -> str:
        wbb.add_named_input(self.wb, self.ws_in, self.row, name, label, value, unit, source,
                            number_format=fmt)
        # the value as written, in a hidden column: a rerun from this workbook reads the
        # scenario table, and refuses a named input edited here (it would be ignored)
        write_value(self.ws_in.cell(row=self.row, column=_AS_WRITTEN_COL), value)
        self.row += 1
        return name

    def _derived(self, name, label, formula, unit, fmt=None) -> str:
        """A named formula cell on the Inputs sheet (derived from inputs above it)."""
        ws, r = self.ws_in, self.row
        wbb.check_name(name)
        safe_text(ws.cell(row=r, column=1), label).alignment = _WRAP
        safe_text(ws.cell(row=r, column=2), name)
        c = ws.cell(row=r, column=3, value="=" + formula)
        c.fill = _DERIVED_FILL
        if fmt:
            c.number_format = fmt
        safe_text(ws.cell(row=r, column=4), unit)
        safe_text(ws.cell(row=r, column=5), "formula (derived): " + formula).alignment = _WRAP
        self._define(name, r, r)
        self.derived_f[name] = formula
        self.row += 1
        return name

    def _define(self, name: str, r0: int, r1: int) -> None:
        ref = f"'{_IN}'!$C${r0}" if r0 == r1 else f"'{_IN}'!$C${r0}:$C${r1}"
        self.wb.defined_names[name] = DefinedName(name, attr_text=ref)

    def _range(self, name, labels, values, unit, source, fmt=None, index_name=None) -> None:
        """Several values under one range name (column C), optional index name (col F)."""
        ws = self.ws_in
        wbb.check_name(name)
        r0 = self.row
        for k, (label, v) in enumerate(zip(labels, values)):
            r = self.row
            safe_text(ws.cell(row=r, column=1), label)
            safe_text(ws.cell(row=r, column=2), f"{name} [{k + 1}]")
            write_value(ws.cell(row=r, column=3), float(v), fmt).fill = wbb.INPUT_FILL
            safe_text(ws.cell(row=r, column=4), unit)
            safe_text(ws.cell(row=r, column=5), source).alignment = _WRAP
            if index_name:
                ws.cell(row=r, column=6, value=k + 1)
            self.row += 1
        self._define(name, r0, self.row - 1)
        if index_name:
            wbb.check_name(index_name)
            self.wb.defined_names[index_name] = DefinedName(
                index_name, attr_text=f"'{_IN}'!$F${r0}:$F${self.row - 1}")

    def _info(self, label, value, unit, source) -> None:
        """An input row without a name (a choice that fixes the structure)."""
        ws, r = self.ws_in, self.row
        safe_text(ws.cell(row=r, column=1), label).alignment = _WRAP
        safe_text(ws.cell(row=r, column=2), "(structure)")
        write_value(ws.cell(row=r, column=3), value)
        safe_text(ws.cell(row=r, column=4), unit)
        safe_text(ws.cell(row=r, column=5), source).alignment = _WRAP
        self.row += 1

    def _sec(self, text: str) -> None:
        self.row += 1
        _section(self.ws_in, self.row, text)
        self.row += 1

    def _inputs_sheet(self) -> None:
        ws, p, cur = self.ws_in, self.params, self.cur
        wbb.input_header(ws)
        wbb.set_widths(ws, {"F": 8})
        self.row = 2
        f = self.inputs.finance
        src = self.source

        self._sec("Study and finance")
        self._info("Money basis", f.money_basis, "", src("finance.money_basis")
                   + ("; real: escalations and the discount rate are above inflation, flows "
                      "in money of year 0" if self.real else ""))
        self._inp("analysis_years", "Analysis period (structure: the Cash flow sheet has one "
                  "column per year; re-run the tool to change it)", self.N, "yr",
                  src("finance.analysis_years"), wbb.INTEGER)
        self._inp("discount_rate", "Discount rate per year", p["finance.discount_rate"], "-",
                  src("finance.discount_rate"), _RATE)
        self._inp("inflation", "General inflation per year (used when the money basis is "
                  "real)", p["finance.inflation"], "-", src("finance.inflation"), _RATE)
        self._inp("days_per_year", "Operating days per year", p["route.days_per_year"], "d/yr",
                  src("route.days_per_year"), wbb.ENERGY)
        self._inp("trips_per_day", "Trips per operating day (extra trips not counted)",
                  p["route.trips_per_day"], "1/d", src("route.trips_per_day"), "0.00")
        self._inp("driver_cost_per_hour", "Driver cost per hour",
                  p["finance.driver_cost_per_hour"] * _S_PER_H, f"{cur}/h",
                  src("finance.driver_cost_per_hour"), wbb.MONEY_CENTS)
        self._inp("driver_cost_escalation", "Driver cost, change per year",
                  p["finance.driver_cost_escalation"], "-/yr",
                  src("finance.driver_cost_escalation"), _RATE)
        at = f.after_tax
        if at.enabled:
            self._inp("tax_rate", "Income tax rate", p["finance.after_tax.tax_rate"], "-",
                      src("finance.after_tax.tax_rate"), _RATE)
            self._info("Tax depreciation method", at.depreciation, "",
                       src("finance.after_tax.depreciation"))
            self._info("Operating costs deductible", "yes" if at.deduct_operating_costs
                       else "no", "", src("finance.after_tax.deduct_operating_costs"))
            from tco import finance as fin

            fr = fin.depreciation_fractions(at.depreciation, at.depreciation_years,
                                            at.declining_balance_percent, at.macrs_class)
            how = {"straight_line": f"straight line over {at.depreciation_years} years",
                   "declining_balance": f"{at.declining_balance_percent} % declining balance "
                                        f"over {at.depreciation_years} years, switching to "
                                        "straight line",
                   "macrs": f"MACRS GDS {at.macrs_class}-year class, half-year convention "
                            "(IRS Publication 946, Table A-1)"}[at.depreciation]
            self._range("tax_depreciation_fractions",
                        [f"Truck tax depreciation, tax year {k + 1}" for k in range(len(fr))],
                        fr, "-", f"{_NOT_LIVE}: {how}", _RATE,
                        index_name="tax_depreciation_years")

        self._sec(f"Prices (today's prices, {cur})")
        if not math.isnan(p["prices.diesel"]):
            self._inp("diesel_price", "Diesel price", p["prices.diesel"] * _M3_PER_L,
                      f"{cur}/L", src("prices.diesel"), wbb.MONEY_CENTS)
        if not math.isnan(p["prices.diesel_exhaust_fluid"]):
            self._inp("def_price", "Diesel exhaust fluid price",
                      p["prices.diesel_exhaust_fluid"] * _M3_PER_L, f"{cur}/L",
                      src("prices.diesel_exhaust_fluid"), wbb.MONEY_CENTS)
        if not math.isnan(p["prices.public_charging"]):
            self._inp("public_charging_price", "Public charging price",
                      p["prices.public_charging"] * _J_PER_KWH, f"{cur}/kWh",
                      src("prices.public_charging"), "0.0000")
        tariff = self.inputs.prices.electricity
        if not math.isnan(p["prices.electricity.energy_price"]):
            self._inp("elec_energy_price", "Depot electricity, hours outside every band",
                      p["prices.electricity.energy_price"] * _J_PER_KWH, f"{cur}/kWh",
                      src("prices.electricity.energy_price"), "0.0000")
        for j, band in enumerate(tariff.bands):
            hours = ", ".join(str(h) for h in band.hours)
            self._inp(f"elec_band{j + 1}_price", f"Depot electricity, band {j + 1} "
                      f"'{band.name}' (hours {hours})",
                      p[f"prices.electricity.bands[{j}].price"] * _J_PER_KWH, f"{cur}/kWh",
                      src(f"prices.electricity.bands[{j}].price"), "0.0000")
        self._inp("demand_charge", "Depot demand charge per kW of monthly peak",
                  p["prices.electricity.demand_charge"] * _W_PER_KW, f"{cur}/kW per month",
                  src("prices.electricity.demand_charge"), wbb.MONEY_CENTS)
        self._inp("fixed_fee", "Depot meter fixed fee", p["prices.electricity.fixed_fee"],
                  f"{cur}/month", src("prices.electricity.fixed_fee"), wbb.MONEY_CENTS)
        for key, name, label in (("diesel", "esc_diesel", "Diesel price"),
                                 ("diesel_exhaust_fluid", "esc_def", "Diesel exhaust fluid "
                                  "price"),
                                 ("electricity", "esc_electricity", "Depot electricity "
                                  "(energy, demand, fixed)"),
                                 ("public_charging", "esc_public_charging", "Public charging "
                                  "price"),
                                 ("equipment", "esc_equipment", "Depot charger cost and "
                                  "maintenance")):
            self._inp(name, f"{label}, change per year", p[f"prices.escalation.{key}"], "-/yr",
                      src(f"prices.escalation.{key}"), _RATE)

        self._sec("Depot charging (costs shared equally by the trucks it serves)")
        dp = "depot."
        d = self.inputs.depot
        self._inp("depot_chargers", "Number of depot chargers (structure)", d.chargers, "-",
                  src(dp + "chargers"), wbb.INTEGER)
        self._inp("depot_charger_power_kw", "Rated power of one charger (0: no cap)",
                  p[dp + "charger_power"] / _W_PER_KW, "kW", src(dp + "charger_power"),
                  wbb.ENERGY)
        self._inp("depot_hardware_cost", "Hardware cost of one charger",
                  p[dp + "hardware_cost"], cur, src(dp + "hardware_cost"), wbb.MONEY)
        self._inp("depot_installation_cost", "Installation cost of one charger",
                  p[dp + "installation_cost"], cur, src(dp + "installation_cost"), wbb.MONEY)
        self._inp("depot_grid_connection_cost", "Grid connection of the depot, once",
                  p[dp + "grid_connection_cost"], cur, src(dp + "grid_connection_cost"),
                  wbb.MONEY)
        self._inp("depot_life", "Life of the charger hardware", d.life, "yr", src(dp + "life"),
                  wbb.INTEGER)
        self._inp("depot_residual_share", "Hardware value at the end of its life, share of "
                  "its cost", p[dp + "residual_share"], "-", src(dp + "residual_share"), _RATE)
        self._inp("depot_maintenance_per_year", "Maintenance of one charger per year",
                  p[dp + "maintenance_per_year"], f"{cur}/yr", src(dp + "maintenance_per_year"),
                  wbb.MONEY)
        self._inp("depot_trucks_served", "Trucks sharing the depot's costs", self.served, "-",
                  src(dp + "trucks_served") if d.trucks_served else
                  "default: the electric trucks of the scenario that charge at the depot",
                  wbb.INTEGER)

        for i in range(len(self.trucks)):
            self._truck_inputs(i)
        self._emission_inputs()
        self._all_fields()

    def _truck_inputs(self, i: int) -> None:
        p, cur, P = self.params, self.cur, self.pre(i)
        t = self.inputs.trucks[i]
        op = self.ops[i]
        c = t.costs
        fpath = f"trucks[{i}].costs."
        src = self.source
        g = lambda k: p[fpath + k]  # noqa: E731
        self._sec(f"Truck {i + 1}: {t.name} ({t.powertrain})"
                  + (" — baseline" if i == self.ref else ""))
        self._inp(P + "purchase_price", "Purchase price before taxes and fees",
                  g("purchase_price"), cur, src(fpath + "purchase_price"), wbb.MONEY)
        self._inp(P + "purchase_tax_rate", "Purchase tax, share of the price",
                  g("purchase_tax_rate"), "-", src(fpath + "purchase_tax_rate"), _RATE)
        self._inp(P + "purchase_fees", "Fees at purchase", g("purchase_fees"), cur,
                  src(fpath + "purchase_fees"), wbb.MONEY)
        self._inp(P + "grant", "Grant paid at purchase", g("grant"), cur, src(fpath + "grant"),
                  wbb.MONEY)
        self._inp(P + "tax_credit", "Tax credit", g("tax_credit"), cur,
                  src(fpath + "tax_credit"), wbb.MONEY)
        self._inp(P + "tax_credit_year", "Year the tax credit is received", c.tax_credit_year,
                  "yr", src(fpath + "tax_credit_year"), wbb.INTEGER)
        fi = c.financing
        self._info("Financing", fi.method, "", src(fpath + "financing.method"))
        if fi.method != "cash":
            from tco.cashflow import headline_method

            self._info("Paid for in the Cash flow sheet (finance.valuation)",
                       headline_method(self.inputs.finance, c), "", src("finance.valuation"))
        if fi.method == "loan":
            self._inp(P + "loan_rate", "Loan interest rate per year (nominal)",
                      g("financing.loan_rate"), "-", src(fpath + "financing.loan_rate"), _RATE)
            self._inp(P + "loan_years", "Loan term", fi.loan_years, "yr",
                      src(fpath + "financing.loan_years"), wbb.INTEGER)
            self._inp(P + "down_payment", "Down payment, share of the amount due",
                      g("financing.down_payment_share"), "-",
                      src(fpath + "financing.down_payment_share"), _RATE)
            self._inp(P + "payments_per_year", "Loan instalments per year",
                      fi.payments_per_year, "1/yr", src(fpath + "financing.payments_per_year"),
                      wbb.INTEGER)
            self._derived(P + "loan_amount", "Amount borrowed: (price + taxes and fees − "
                          "grant, at least 0) × (1 − down payment)",
                          f"MAX({P}purchase_price+({P}purchase_price*{P}purchase_tax_rate"
                          f"+{P}purchase_fees)-{P}grant,0)*(1-{P}down_payment)", cur,
                          wbb.MONEY)
            if fi.loan_years > self.N:
                self._info("Loan beyond the period", fi.beyond_period, "",
                           src(fpath + "financing.beyond_period"))
        elif fi.method == "lease":
            self._inp(P + "lease_payment", "Lease payment per month",
                      g("financing.lease_payment"), f"{cur}/month",
                      src(fpath + "financing.lease_payment"), wbb.MONEY)
            self._inp(P + "lease_upfront", "Lease payment at signing",
                      g("financing.lease_upfront"), cur, src(fpath + "financing.lease_upfront"),
                      wbb.MONEY)
            self._inp(P + "lease_years", "Lease term", fi.lease_years, "yr",
                      src(fpath + "financing.lease_years"), wbb.INTEGER)
            self._info("At the end of the lease", fi.lease_end, "",
                       src(fpath + "financing.lease_end"))
            self._info("Lease beyond the period", fi.beyond_period, "",
                       src(fpath + "financing.beyond_period"))
            self._inp(P + "lease_buyout_price", "Lease buy-out price",
                      g("financing.lease_buyout_price"), cur,
                      src(fpath + "financing.lease_buyout_price"), wbb.MONEY)
        for k, label in (("maintenance", "Maintenance and repair"), ("tyres", "Tyres"),
                         ("tolls", "Road tolls")):
            self._inp(f"{P}{k}_per_km", f"{label} per km", g(k) * _M_PER_KM, f"{cur}/km",
                      src(fpath + k), "0.0000")
        self._inp(P + "insurance_rate", "Insurance per year, share of the value at the start "
                  "of the year", g("insurance_rate"), "-", src(fpath + "insurance_rate"), _RATE)
        self._inp(P + "insurance_fixed", "Insurance per year, fixed part", g("insurance_fixed"),
                  f"{cur}/yr", src(fpath + "insurance_fixed"), wbb.MONEY)
        self._inp(P + "registration", "Registration and road taxes per year",
                  g("registration"), f"{cur}/yr", src(fpath + "registration"), wbb.MONEY)
        r = c.residual
        if r.method == "declining_balance":
            self._inp(P + "residual_rate", "Loss of value per year (declining balance: value "
                      "share at age a = (1 − rate)^a)", g("residual.rate"), "-",
                      src(fpath + "residual.rate"), _RATE)
        else:
            self._range(P + "residual_shares",
                        [f"Value at the end of year of age {k + 1}, share of the price"
                         for k in range(len(r.shares))],
                        [g(f"residual.shares[{k}]") for k in range(len(r.shares))], "-",
                        src(fpath + "residual.shares") + " (later ages keep the last share)",
                        _RATE)
        for k in ("maintenance", "tyres", "tolls", "insurance", "registration", "battery"):
            self._inp(f"{P}esc_{k}", f"{k.capitalize()} cost, change per year",
                      g(f"escalation.{k}"), "-/yr", src(fpath + f"escalation.{k}"), _RATE)
        b = c.battery_replacement
        if b.when != "never" and op.battery_capacity > 0:
            self._info("Battery replacement", b.when, "", src(fpath + "battery_replacement.when"))
            self._inp(P + "battery_cost", "Battery replacement, fixed part",
                      g("battery_replacement.cost"), cur, src(fpath + "battery_replacement.cost"),
                      wbb.MONEY)
            self._inp(P + "battery_cost_per_kwh", "Battery replacement per kWh of capacity",
                      g("battery_replacement.cost_per_kwh") * _J_PER_KWH, f"{cur}/kWh",
                      src(fpath + "battery_replacement.cost_per_kwh"), wbb.MONEY_CENTS)
            if b.when == "year":
                self._inp(P + "battery_year", "Year of the battery replacement", b.year, "yr",
                          src(fpath + "battery_replacement.year"), wbb.INTEGER)
            self._info("Credit the unused battery life at the end",
                       "yes" if b.credit_remaining_life else "no", "",
                       src(fpath + "battery_replacement.credit_remaining_life"))

        # yearly operation as modelled (first year), and its scale
        model = ("model: energy simulation of the duty cycle, scaled to the operating year "
                 "(tco.energy, tco.operation)")
        _section(self.ws_in, self.row, f"Truck {i + 1}: {t.name}, yearly operation as "
                 "modelled", col=1)
        self.row += 1
        self._inp(P + "operating_days", "Operating days per year the operation was modelled "
                  "with", op.operating_days, "d/yr", model, wbb.ENERGY)
        base_tpd = (op.trips - op.extra_trips) / op.operating_days
        self._inp(P + "base_trips_per_day", "Trips per day the operation was modelled with "
                  "(extra trips not counted)", base_tpd, "1/d", model, "0.00")
        self._inp(P + "distance_km", "Distance per year", op.distance / _M_PER_KM, "km/yr",
                  model, wbb.ENERGY)
        self._inp(P + "diesel_L", "Diesel per year", op.diesel_volume / _M3_PER_L, "L/yr", model,
                  wbb.ENERGY)
        self._inp(P + "def_L", "Diesel exhaust fluid per year", op.def_volume / _M3_PER_L,
                  "L/yr", model, wbb.ENERGY)
        self._inp(P + "battery_kwh", "Battery net throughput per year (discharge less "
                  "regeneration)", op.battery_energy / _J_PER_KWH, "kWh/yr", model, wbb.ENERGY)
        if op.battery_capacity > 0:
            self._inp(P + "battery_discharge_kwh", "Battery energy discharged per year (the "
                      "wear basis: regeneration not netted)",
                      op.battery_discharge_energy / _J_PER_KWH, "kWh/yr", model, wbb.ENERGY)
            self._inp(P + "calendar_fade", "Battery state of health lost per year with time "
                      "alone", op.calendar_fade, "1/yr",
                      src(f"trucks[{i}].electric.calendar_fade"), _RATE)
            self._inp(P + "eol_soh", "Battery state of health at end of life",
                      op.eol_state_of_health, "-",
                      src(f"trucks[{i}].electric.eol_state_of_health"), _RATE)
        self._inp(P + "depot_kwh", "Depot electricity at the meter per year",
                  op.grid_energy_depot / _J_PER_KWH, "kWh/yr", model, wbb.ENERGY)
        self._band_inputs(i)
        self._inp(P + "public_kwh", "Public charging electricity per year",
                  op.grid_energy_public / _J_PER_KWH, "kWh/yr", model, wbb.ENERGY)
        self._inp(P + "charging_time_h", "Driver time at en-route chargers per year",
                  op.charging_time_lost / _S_PER_H, "h/yr", model, "0.00")
        if self._aged(i):
            years = range(1, self.N + 1)
            aged_src = ("model: battery state of health year by year (tco.battery), scaled "
                        "by the truck's scale below; not live: a change of days or trips per "
                        "day moves the ageing itself only on a new run of the tool")
            self._range(P + "public_kwh_by_year", [f"Public charging electricity, year {y}"
                                                   for y in years],
                        op.public_energy_by_year / _J_PER_KWH, "kWh/yr", aged_src, wbb.ENERGY)
            self._range(P + "charging_h_by_year", [f"Driver time at en-route chargers, year "
                                                   f"{y}" for y in years],
                        op.enroute_time_by_year / _S_PER_H, "h/yr", aged_src, "0.00")
            base = op.grid_energy_depot if op.grid_energy_depot > 0 else 1.0
            self._range(P + "depot_share_by_year", [f"Depot electricity as a share of the "
                                                    f"first year's, year {y}" for y in years],
                        op.depot_energy_by_year / base if op.grid_energy_depot > 0
                        else np.ones(self.N), "-", aged_src, _FACTOR)
        if c.battery_replacement.when == "range" and len(op.state_of_health) > self.N:
            self._inp(P + "battery_soh_end", "Battery state of health at the end of the "
                      "period (the battery in use)", float(op.state_of_health[self.N]), "-",
                      "model: tco.battery", _RATE)
        self._inp(P + "extra_trips", "Extra trips per year (lower payload)", op.extra_trips,
                  "1/yr", model, "0.00")
        self._inp(P + "trip_duration_h", "Duration of one trip (not scaled)",
                  op.trip_duration / _S_PER_H, "h", model, "0.000")
        self._inp(P + "depot_peak_kw", "Peak depot charging power (not scaled)",
                  op.depot_charging_power / _W_PER_KW, "kW", model, wbb.ENERGY)
        self._inp(P + "battery_capacity_kwh", "Nominal battery capacity",
                  op.battery_capacity / _J_PER_KWH, "kWh", model, wbb.ENERGY)
        if math.isfinite(op.battery_cycle_life):
            self._inp(P + "battery_cycle_life", "Battery cycle life (full equivalent cycles)",
                      op.battery_cycle_life, "-", model, wbb.INTEGER)
        self._inp(P + "payload_tkm", "Payload × distance per year",
                  op.payload_distance / 1e6, "t·km/yr", model, wbb.ENERGY)
        if base_tpd > 0:
            self._derived(P + "scale", "Scale of the yearly cost quantities: days per year ÷ "
                          "modelled days × trips per day ÷ modelled trips per day",
                          f"days_per_year/{P}operating_days*(trips_per_day/"
                          f"{P}base_trips_per_day)", "-", _FACTOR)
        else:
            self._derived(P + "scale", "Scale of the yearly cost quantities: days per year ÷ "
                          "modelled days", f"days_per_year/{P}operating_days", "-", _FACTOR)
        if c.battery_replacement.when == "cycles" and op.battery_capacity > 0:
            thru = "battery_discharge_kwh" if op.battery_discharge_energy > 0 \
                else "battery_kwh"
            cyc = (f"{P}{thru}*{P}scale/{P}battery_capacity_kwh/{P}battery_cycle_life+"
                   if math.isfinite(op.battery_cycle_life) else "")
            self._derived(P + "battery_lives_per_year", "Battery lives used per year: "
                          "discharged energy ÷ capacity ÷ cycle life + calendar fade ÷ "
                          "(1 − end-of-life state of health)",
                          f"{cyc}{P}calendar_fade/(1-{P}eol_soh)", "1/yr", _FACTOR)

    def _band_inputs(self, i: int) -> None:
        """Depot energy by time-of-use band: shares from the charging profile, and kWh."""
        op, P = self.ops[i], self.pre(i)
        parts: list[tuple[str, str]] = []
        if op.grid_energy_depot <= 0:
            self.bands_of[i] = parts
            return
        tariff = self.inputs.prices.electricity
        profile = np.asarray(op.charging_profile, dtype=float)
        covered = np.zeros(24, dtype=bool)
        model = "model: share of the depot energy drawn in the band's hours (charging profile)"
        for j, band in enumerate(tariff.bands):
            w = float(profile[band.hours].sum())
            covered[band.hours] = True
            if w > 0:  # the cash-flow model leaves out bands the truck does not use
                self._inp(f"{P}band{j + 1}_share", f"Share of depot energy in band {j + 1} "
                          f"'{band.name}'", w, "-", model, _RATE)
                parts.append((self._derived(
                    f"{P}depot_kwh_band{j + 1}", f"Depot energy per year in band {j + 1} "
                    f"'{band.name}'", f"{P}depot_kwh*{P}band{j + 1}_share", "kWh/yr",
                    wbb.ENERGY), f"elec_band{j + 1}_price"))
        rest = float(profile[~covered].sum())
        if rest > 1e-12:  # the model's threshold (tco.cashflow._Context.depot_price)
            self._inp(f"{P}other_share", "Share of depot energy in hours outside every band",
                      rest, "-", model, _RATE)
            parts.append((self._derived(
                f"{P}depot_kwh_other", "Depot energy per year outside every band",
                f"{P}depot_kwh*{P}other_share", "kWh/yr", wbb.ENERGY), "elec_energy_price"))
        self.bands_of[i] = parts

    def _emission_inputs(self) -> None:
        e = self.em_params
        src = self.source
        es = self.s.emissions
        prov = self.summary.get("emissions", {}).get("factors", [])
        set_rows = [f for f in prov if str(f["parameter"]).startswith(es.diesel_factors + ":")]
        set_src = "; ".join(f"{f['parameter']} = {f['value']} {f['unit']} ({f['source']}"
                            + (f", {f['status']}" if f.get("status") else "") + ")"
                            for f in set_rows) or es.diesel_factors
        gwp_rows = [f for f in prov if str(f["parameter"]).startswith(es.gwp + ":")]
        gwp_src = "; ".join(f"{f['parameter']} = {f['value']}" for f in gwp_rows)
        k = "emissions."
        self._sec("Emission factors (kg CO2e unless stated)")
        self._info("Diesel factor set", es.diesel_factors, "", src("emissions.diesel_factors"))
        self._info("GWP set", es.gwp, "", src("emissions.gwp"))
        self._inp("ef_diesel_ttw", "Diesel, tank-to-wheel CO2 (all gases when the set gives "
                  "one figure)", e[k + "diesel_co2"] * _M3_PER_L, "kg/L", set_src, "0.0000")
        self._inp("ef_diesel_ch4_n2o", "Diesel, CH4 and N2O per litre as CO2e",
                  e[k + "diesel_ch4_n2o"] * _M3_PER_L, "kg/L", f"{set_src}; GWP: {gwp_src}",
                  "0.000000")
        self._inp("ef_diesel_ch4_n2o_km", "Diesel trucks, CH4 and N2O per km as CO2e",
                  e[k + "diesel_ch4_n2o_distance"] * _M_PER_KM, "kg/km",
                  f"{set_src}; GWP: {gwp_src}", "0.000000")
        up_src = ("user" if es.diesel_upstream is not None else
                  "the diesel set's well-to-tank figure (or the DESNZ 2025 well-to-tank when the "
                  "set has none): " + "; ".join(
                      f"{f['parameter']} = {f['value']} {f['unit']} ({f['source']})"
                      for f in prov if ".co2e_w" in str(f["parameter"])))
        self._inp("ef_diesel_wtt", "Diesel, well-to-tank (upstream)",
                  e[k + "diesel_upstream"] * _M3_PER_L, "kg/L", up_src, "0.0000")
        self._inp("diesel_blend_share", "Biodiesel share of the diesel by volume (its CO2 "
                  "is biogenic, reported apart)", e[k + "diesel_blend_share"], "-",
                  src("emissions.diesel_blend_share"), _RATE)
        self._inp("ef_biodiesel_wtt", "Biodiesel, well-to-tank (upstream)",
                  e[k + "biodiesel_upstream"] * _M3_PER_L, "kg/L",
                  src("emissions.biodiesel_upstream"), "0.0000")
        self._inp("def_density", "Diesel exhaust fluid density", e[k + "def_density"] * _M3_PER_L,
                  "kg/L", src("emissions.def_density"), "0.000")
        self._inp("def_urea_share", "Urea mass share of diesel exhaust fluid",
                  e[k + "def_urea_share"], "-", src("emissions.def_urea_share"), _RATE)
        g = 1e3 * _J_PER_KWH  # kg/J -> g/kWh
        if es.grid_table:
            self.grid_years = sorted(int(y) for y in es.grid_table)
            for y in self.grid_years:
                self._inp(f"grid_table_{y}", f"Grid intensity in {y} (table; linear between "
                          "listed years, flat outside)", e[f"{k}grid_table.{y}"] * g,
                          "g/kWh", src("emissions.grid_table"), wbb.ENERGY)
            self._inp("grid_intensity", "Grid intensity in the table's first year (scales the "
                      "whole table)", e[k + "grid_intensity"] * g, "g/kWh",
                      src("emissions.grid_table"), wbb.ENERGY)
        else:
            self.grid_years = None
            self._inp("grid_intensity", "Grid intensity in the first year of service",
                      e[k + "grid_intensity"] * g, "g/kWh", src("emissions.grid_intensity"),
                      wbb.ENERGY)
            self._inp("grid_change", "Grid intensity, compound change per year",
                      e[k + "grid_change"], "-/yr", src("emissions.grid_change"), _RATE)
            self._inp("grid_floor", "Grid intensity floor", e[k + "grid_floor"] * g, "g/kWh",
                      src("emissions.grid_floor"), wbb.ENERGY)
        if k + "supplier_intensity" in e:
            self._inp("supplier_intensity", "Supplier's contractual intensity (market-based, "
                      "depot)", e[k + "supplier_intensity"] * g, "g/kWh",
                      src("emissions.supplier_intensity"), wbb.ENERGY)
        self._inp("renewable_share", "Contracted renewable share of depot electricity",
                  e[k + "renewable_share"], "-", src("emissions.renewable_share"), _RATE)
        self._inp("td_loss", "Grid transmission and distribution loss share", e[k + "td_loss"],
                  "-", src("emissions.td_loss"), _RATE)
        self._inp("ef_electricity_upstream", "Electricity upstream per kWh at the meter",
                  e[k + "electricity_upstream"] * g, "g/kWh",
                  src("emissions.electricity_upstream"), wbb.ENERGY)
        self._inp("ef_electricity_upstream_share", "Electricity upstream as a share of the "
                  "location-based grid intensity (when no figure per kWh is given)",
                  e[k + "electricity_upstream_share"], "-",
                  src("emissions.electricity_upstream_share"), _RATE)
        self._inp("residual_mix_ratio", "Residual mix ÷ grid average (market-based, "
                  "electricity without a contractual instrument; 1 when no residual mix is "
                  "given)", e[k + "residual_mix_ratio"], "-",
                  src("emissions.residual_mix_intensity"), "0.0000")
        from tco.emissions import hour_matching_factor

        shape = np.array([e[f"{k}hourly_shape.{h:02d}"] for h in range(24)])
        for i, op in enumerate(self.ops):
            self._inp(f"{self.pre(i)}hour_match", f"Hour-matching multiplier of depot "
                      f"charging, truck {i + 1} (1: no hourly profile)",
                      float(hour_matching_factor(op.charging_profile, shape)), "-",
                      "model: Σ charging share by hour × hourly intensity ÷ mean intensity "
                      "(tco.emissions.hour_matching_factor)", _FACTOR)

    def _all_fields(self) -> None:
        """The scenario as run, as a field table ``tco run THIS_WORKBOOK`` reads back."""
        from tco.scenario.xlsx import field_rows, write_field_table

        self._sec("The scenario as run: every field (empty value: the default). Edit the "
                  "values here, then rerun the whole model with: tco run THIS_WORKBOOK.xlsx "
                  "(the named rows above drive this workbook's formulas only)")
        raw = getattr(getattr(self.result, "loaded", None), "raw", None) or {}
        self.row = write_field_table(self.ws_in, self.row, field_rows(self.s, raw),
                                     widths=False, wrap=False)
        self.ws_in.column_dimensions[_col(_AS_WRITTEN_COL)].hidden = True
        safe_text(self.ws_in.cell(row=1, column=_AS_WRITTEN_COL), "as written")

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

    def _aged(self, i: int) -> bool:
        """Truck i carries yearly en-route energy, time and depot share as its battery
        ages (the cash-flow model's ``_Context.aged``)."""
        return len(self.ops[i].public_energy_by_year) == self.N

    def _unit_price(self, i: int, yexpr: str) -> str:
        P = self.pre(i)
        return (f"({P}battery_cost+{P}battery_cost_per_kwh*{P}battery_capacity_kwh)"
                f"*{self._g(P + 'esc_battery')}^({yexpr})")

    def _formula(self, i: int, line: str, y: str, col: str, rows: dict) -> tuple[str, bool]:
        """The nominal-basis formula body of one line in one year, and whether the caller
        adds the real-basis deflator (False: it already refers to deflated cells)."""
        P, N = self.pre(i), "analysis_years"
        S = f"{P}scale"
        c = self.inputs.trucks[i].costs
        fi = c.financing
        srv = "depot_trucks_served"
        GE = self._g("esc_equipment")
        if line == "purchase_price":
            return f"IF({y}=0,{P}purchase_price,0)", True
        if line == "purchase_taxes_fees":
            return f"IF({y}=0,{P}purchase_price*{P}purchase_tax_rate+{P}purchase_fees,0)", True
        if line == "grant":
            return f"IF({y}=0,-{P}grant,0)", True
        if line == "tax_credit":
            return f"IF({y}={P}tax_credit_year,-{P}tax_credit,0)", True
        if line == "loan_drawdown":
            return f"IF({y}=0,-{P}loan_amount,0)", True
        if line in ("loan_interest", "loan_principal"):
            m = f"{P}payments_per_year"
            args = (f"{P}loan_rate/{m},{P}loan_years*{m},{P}loan_amount,({y}-1)*{m}+1,"
                    f"{y}*{m},0")
            ok = f"AND({P}loan_rate>0,{P}loan_amount>0)"
            if line == "loan_interest":
                return (f"IF(AND({y}>=1,{y}<={P}loan_years),IF({ok},-CUMIPMT({args}),0),0)",
                        True)
            settle = (f"IF(AND({y}={N},{P}loan_years>{N}),{P}loan_amount-IF({ok},"
                      f"-CUMPRINC({P}loan_rate/{m},{P}loan_years*{m},{P}loan_amount,1,"
                      f"{N}*{m},0),{P}loan_amount*{N}/{P}loan_years),0)")
            return (f"IF(AND({y}>=1,{y}<={P}loan_years),IF({ok},-CUMPRINC({args}),"
                    f"{P}loan_amount/{P}loan_years),0)+{settle}", True)
        if line == "lease_upfront":
            return f"IF({y}=0,{P}lease_upfront,0)", True
        if line == "lease_payment":
            body = (f"IF(AND({y}>=1,{y}<=MIN({P}lease_years,{N})),12*{P}lease_payment,0)")
            if fi.beyond_period == "settle":
                body += (f"+IF(AND({y}={N},{P}lease_years>{N}),12*{P}lease_payment*"
                         f"({P}lease_years-{N}),0)")
            return body, True
        if line == "lease_buyout":
            when = (f"MIN({P}lease_years,{N})" if fi.beyond_period == "settle"
                    else f"{P}lease_years")
            return f"IF({y}={when},{P}lease_buyout_price,0)", True
        if line == "insurance":
            return self._run(f"{self._share_age(i, f'{y}-1')}*{P}insurance_rate*"
                             f"{P}purchase_price+{P}insurance_fixed", P + "esc_insurance", y), True
        if line == "residual_value":
            return f"IF({y}={N},-{P}purchase_price*{self._share_age(i, y)},0)", True
        if line == "depot_chargers":
            return (f"IF(AND(MOD({y},depot_life)=0,{y}<{N}),(depot_chargers*depot_hardware_cost"
                    f"+depot_chargers*depot_installation_cost)*{GE}^{y},0)/{srv}"), True
        if line == "depot_grid_connection":
            return f"IF({y}=0,depot_grid_connection_cost,0)/{srv}", True
        if line == "depot_maintenance":
            return self._run(f"depot_chargers*depot_maintenance_per_year/{srv}",
                             "esc_equipment", y), True
        if line == "depot_residual":
            tl = f"depot_life*INT(({N}-1)/depot_life)"
            return (f"(IF(AND({y}>0,{y}<{N},MOD({y},depot_life)=0),-depot_residual_share"
                    f"*depot_chargers*depot_hardware_cost*{GE}^({y}-depot_life),0)"
                    f"+IF({y}={N},-depot_chargers*depot_hardware_cost*{GE}^({tl})"
                    f"*(1-(1-depot_residual_share)*({N}-{tl})/depot_life),0))/{srv}"), True
        if line == "diesel":
            return self._run(f"{P}diesel_L*{S}*diesel_price", "esc_diesel", y), True
        if line == "diesel_exhaust_fluid":
            return self._run(f"{P}def_L*{S}*def_price", "esc_def", y), True
        if line == "electricity_energy":
            bands = "+".join(f"{kwh}*{price}" for kwh, price in self.bands_of[i])
            aged = f"*INDEX({P}depot_share_by_year,{y})" if self._aged(i) else ""
            return self._run(f"({bands})*{S}{aged}", "esc_electricity", y), True
        if line == "electricity_demand":
            peak = f"{P}depot_peak_kw*{srv}"
            cap = "depot_chargers*depot_charger_power_kw"
            return self._run(f"12*demand_charge*MIN({peak},IF({cap}>0,{cap},{peak}))/{srv}",
                             "esc_electricity", y), True
        if line == "electricity_fixed":
            return self._run(f"12*fixed_fee/{srv}", "esc_electricity", y), True
        if line == "public_charging":
            kwh = f"INDEX({P}public_kwh_by_year,{y})" if self._aged(i) else f"{P}public_kwh"
            return self._run(f"{kwh}*{S}*public_charging_price",
                             "esc_public_charging", y), True
        if line in ("maintenance", "tyres", "tolls"):
            return self._run(f"{P}distance_km*{S}*{P}{line}_per_km", f"{P}esc_{line}", y), True
        if line == "registration":
            return self._run(f"{P}registration", f"{P}esc_registration", y), True
        if line == "charging_driver_time":
            h = f"INDEX({P}charging_h_by_year,{y})" if self._aged(i) else f"{P}charging_time_h"
            return self._run(f"{h}*{S}*driver_cost_per_hour",
                             "driver_cost_escalation", y), True
        if line == "driver_wages":  # every trip's duty time, the extra ones included
            return self._run(f"({P}base_trips_per_day*{P}operating_days+{P}extra_trips)*{S}"
                             f"*{P}trip_duration_h*driver_cost_per_hour",
                             "driver_cost_escalation", y), True
        if line == "extra_trips_driver_time":
            return self._run(f"{P}extra_trips*{S}*{P}trip_duration_h*driver_cost_per_hour",
                             "driver_cost_escalation", y), True
        if line in ("battery_replacement", "battery_remaining_life"):
            return self._battery(i, line, y), True
        if line == "tax_shield_operating":
            cells = "+".join(f"{col}{r}" for name, r in rows.items() if name in self._ded)
            return f"-tax_rate*({cells or 0})", False
        if line == "tax_shield_interest":
            if "loan_interest" not in rows:
                return "0*tax_rate", False
            return f"-tax_rate*IF({y}>=1,{col}{rows['loan_interest']},0)", False
        if line == "tax_shield_depreciation":
            return f"-tax_rate*({self._depreciation(i, y, rows)})", True
        if line == "tax_on_sale":
            cells = "+".join(f"{col}{r}" for name, r in rows.items() if name in self._proceeds)
            return (f"tax_rate*(-({cells or 0})-IF({y}={N},{self._book_left(i, rows)},0)"
                    f"{self._defl(y)})"), False
        raise KeyError(line)

    def _battery(self, i: int, line: str, y: str) -> str:
        P, N = self.pre(i), "analysis_years"
        b = self.inputs.trucks[i].costs.battery_replacement
        if b.when == "year":
            if line == "battery_replacement":
                return f"IF({y}={P}battery_year,{self._unit_price(i, y)},0)"
            return (f"IF({y}={N},-MAX(0,1-({N}-{P}battery_year)/{P}battery_year)"
                    f"*{self._unit_price(i, P + 'battery_year')},0)")
        if b.when == "range":
            years = self.ops[i].battery_replacement_years
            if not years:
                return "0"
            if line == "battery_replacement":
                hit = "OR(" + ",".join(f"{y}={Y}" for Y in years) + ")"
                return f"IF({hit},{self._unit_price(i, y)},0)"
            left = f"MIN(MAX(({P}battery_soh_end-{P}eol_soh)/(1-{P}eol_soh),0),1)"
            return f"IF({y}={N},-{left}*{self._unit_price(i, str(years[-1]))},0)"
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

    def _replacements(self, rows: dict) -> list[tuple[str, str]]:
        """Battery replacements as tax assets (capitalised, depreciated like the truck):
        (nominal cost of year t's replacements, t), read from the battery row."""
        if "battery_replacement" not in rows:
            return []
        r = rows["battery_replacement"]
        inflate = (lambda t: f"*(1+inflation)^{t}") if self.real else (lambda t: "")
        return [(f"{_col(_FIRST_COL + t)}${r}{inflate(t)}", str(t))
                for t in range(1, self.N + 1)]

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
        from tco.cashflow import DEDUCTIBLE, PROCEEDS, LINES

        self._ded, self._proceeds = set(DEDUCTIBLE), set(PROCEEDS)
        desc = {s.name: s.description for s in LINES}
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
        wbb.set_widths(ws, {"A": 50, "B": 24, **{c: 11 for c in cols}, c_sum: 14, c_pv: 15,
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

    def _substituted(self, names: list[str]):
        """A function rewriting a formula as if every name in ``names`` were 1 % higher,
        following the derived inputs (loan amount, scale...) that read them."""
        pat = {}

        def rx(n):
            return re.compile(r"(?<![A-Za-z0-9_.$'!])" + re.escape(n) + r"(?![A-Za-z0-9_.(])")

        for n in names:
            pat[n] = (rx(n), f"({n}*{_BUMP})")

        def sub(f: str) -> str:
            for r, repl in pat.values():
                f = r.sub(repl, f)
            return f

        for d, formula in self.derived_f.items():  # definition order: inputs first
            new = sub(formula)
            if new != formula:
                pat[d] = (rx(d), f"({new})")
        return sub

    def _shadow(self, i: int, names: list[str], row: int, title: str) -> tuple[int, int]:
        """Truck i's cost lines that change when ``names`` are 1 % higher, at the bottom of
        the Cash flow sheet; the changed total and its present value. Returns (row of the
        total, next free row)."""
        ws = self.ws_cf
        cols, c_sum, c_pv, c_note, npv = self._cf_ctx
        blk = self.blocks[i]
        sub = self._substituted(names)
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
            safe_text(ws.cell(row=row, column=1), f"  {line}, input 1 % higher")
            safe_text(ws.cell(row=row, column=2), "workings")
            for c, f in zip(cols, cells):
                ws.cell(row=row, column=c, value="=" + f).number_format = wbb.MONEY
            row += 1
        safe_text(ws.cell(row=row, column=1), "  Net cost with the input 1 % higher")
        safe_text(ws.cell(row=row, column=2), "workings")
        for c in cols:
            col = _col(c)
            delta = "".join(f"+{col}{rows[ln]}-{col}{blk.rows[ln]}" for ln in changed)
            ws.cell(row=row, column=c, value=f"={col}{blk.total}{delta}").number_format = \
                wbb.MONEY
        ws.cell(row=row, column=c_pv, value=f"={npv(row)}").number_format = wbb.MONEY
        return row, row + 1

    def _no_replacement(self, trucks, i: int) -> bool:
        """True when no battery replacement by cycles falls in the period for these trucks,
        at the case's days per year nor at the model's break-even distance."""
        b = self._model_comparison(i).get("break_even", {}).get("annual_distance_km", {})
        ref_km = self.ops[self.ref].distance / _M_PER_KM
        k = max(1.0, (b.get("value") or 0.0) / ref_km) if ref_km > 0 else 1.0
        from tco.battery import lives_per_year

        for t in trucks:
            op = self.ops[t]
            thru = op.battery_discharge_energy if op.battery_discharge_energy > 0 \
                else op.battery_energy
            # the distance scales the cycling; calendar fade does not move with it
            cyc = lives_per_year(thru / op.battery_capacity, op.battery_cycle_life,
                                 op.eol_state_of_health, 0.0)
            cal = lives_per_year(0.0, op.battery_cycle_life, op.eol_state_of_health,
                                 op.calendar_fade)
            if (cyc * k + cal) * self.N + 1e-9 >= 1:
                return False
        return True

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
            self._metric(row, "IRR of the extra investment (spreadsheet IRR over the savings)",
                         "irr", f"=IFERROR(IRR({first}{R['savings']}:{last}{R['savings']},"
                         f"{guess}),\"-\")", _RATE)
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
                for t in ([i] if reach == "truck" else [i, self.ref]):
                    if (key, t) in shadow_pv:
                        continue
                    tot, row = self._shadow(t, names, row, f"{self.trucks[t]}: {what} "
                                            "1 % higher")
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
                       and f"{self.pre(t)}battery_lives_per_year" in self.derived_f]
                steps = bool(cyc) and not self._no_replacement(cyc, i)
                if steps:  # replacements by cycles: a step function of the distance
                    b = self._model_comparison(i).get("break_even", {}).get(key, {})
                    self._metric(r, label, "break_even." + key, None, wbb.INTEGER)
                    write_value(ws.cell(row=r, column=_FIRST_COL), "-" if b.get("value")
                                is None else b["value"], wbb.INTEGER).fill = _MODEL_FILL
                    safe_text(ws.cell(row=r, column=c_note), f"{_NOT_LIVE}: battery "
                              "replacements by cycles make the cost a step function of the "
                              "distance")
                    continue
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
                if cyc:  # live while no battery replacement falls in the period
                    ok = ",".join(f"{self.pre(t)}battery_lives_per_year*analysis_years*"
                                  f"MAX({root},days_per_year)/days_per_year+1E-9<1"
                                  for t in cyc)
                    value = (f"IF(AND({ok}),{value},\"a battery replacement makes a step: "
                             "rerun the model\")")
                f = (f"=IF({slope}=0,\"-\",IF(AND({root}>={lo}*{x0},{root}<={hi}*{x0}),"
                     f"{value},\"no break-even in the range\"))")
                fmt = {"purchase_price": wbb.MONEY, "annual_distance_km": wbb.INTEGER
                       }.get(key, "#,##0.0000")
                self._metric(r, label, "break_even." + key, f, fmt)
                safe_text(ws.cell(row=r, column=c_note),
                          f"{what} − PV difference ÷ slope; searched {lo:g}–{hi:g}× the "
                          "case's value")

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
        c = self.inputs.trucks[i].costs
        if line.startswith("depot_") or line in ("electricity_demand", "electricity_fixed"):
            return "depot cost ÷ depot_trucks_served"
        if line in ("loan_interest", "loan_principal"):
            return "CUMIPMT/CUMPRINC over the year's instalments (in arrears)"
        if line == "electricity_energy":
            return "Σ kWh per time-of-use band × band price"
        if line in ("insurance", "residual_value"):
            how = ("(1 − rate)^age" if c.residual.method == "declining_balance"
                   else "value table by age")
            return f"value share by age: {how}"
        if line == "battery_replacement" and c.battery_replacement.when == "cycles":
            return "a replacement each time the summed battery lives pass a whole number"
        if line == "tax_shield_operating":
            return "−tax rate × the deductible lines above"
        if line == "tax_shield_depreciation":
            return ("depreciation fractions from the Inputs sheet (the truck and each battery "
                    "replacement, capitalised)")
        if line == "tax_on_sale":
            return "tax rate × (end proceeds − tax book value left)"
        return ""

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

    # ------------------------------------------------------------------------ Energy
    def _energy_sheet(self) -> None:
        ws = self.ws_en
        names = self.trucks
        _title(ws, "Energy and operation on the duty cycle")
        safe_text(ws.cell(row=2, column=1), "Values from the model (summary.json); per-trip "
                  "and per-year figures of one operating day scaled to the year.")
        hdr = 3
        wbb.header_row(ws, hdr, ["Quantity", "Key"] + list(names) + ["Unit"])
        wbb.freeze(ws, f"C{hdr + 1}")
        wbb.set_widths(ws, {"A": 44, "B": 44, **{3 + k: 16 for k in range(len(names))},
                            3 + len(names): 16})
        rows: dict[str, dict] = {}
        order: list[str] = []
        trucks = self.summary.get("trucks", {})
        legs = [leg.get("name", f"leg {k + 1}") for k, leg in
                enumerate(self.summary.get("route", {}).get("legs", []))]
        for k, name in enumerate(names):
            t = trucks.get(name, {})
            flat: list[tuple[str, str, object, str]] = []
            for sec, label in (("per_trip", "Per trip"), ("per_year", "Per year")):
                self._flatten(t.get(sec, {}), sec, label, flat, legs,
                              per_year=sec == "per_year")
            for system, label in (("metric", "Per distance (metric)"),
                                  ("us", "Per distance (US)")):
                self._flatten(t.get("per_distance", {}).get(system, {}),
                              f"per_distance.{system}", label, flat, legs)
            for key, label, value, unit in flat:
                if key not in rows:
                    rows[key] = {"label": label, "unit": unit, "values": {}}
                    order.append(key)
                rows[key]["values"][k] = value
        row = hdr + 1
        route = self.summary.get("route", {})
        for key, label, unit in (("trip_distance_km", "Route: distance of one trip", "km"),
                                 ("trip_distance_mi", "Route: distance of one trip", "mi"),
                                 ("trip_duration_h", "Route: duration of one trip", "h"),
                                 ("climb_m", "Route: climb per trip", "m"),
                                 ("descent_m", "Route: descent per trip", "m"),
                                 ("stops", "Route: stops per trip", "-"),
                                 ("trips_per_day", "Route: trips per day", "1/d"),
                                 ("days_per_year", "Route: operating days per year", "d/yr")):
            if route.get(key) is None:
                continue
            safe_text(ws.cell(row=row, column=1), label)
            safe_text(ws.cell(row=row, column=2), f"route.{key}")
            for k in range(len(names)):
                write_value(ws.cell(row=row, column=3 + k), route[key], "#,##0.00")
            safe_text(ws.cell(row=row, column=3 + len(names)), unit)
            row += 1
        for key in order:
            r = rows[key]
            safe_text(ws.cell(row=row, column=1), r["label"])
            safe_text(ws.cell(row=row, column=2), key)
            for k in range(len(names)):
                v = r["values"].get(k)
                write_value(ws.cell(row=row, column=3 + k), v, "#,##0.000")
            safe_text(ws.cell(row=row, column=3 + len(names)), r["unit"])
            row += 1

    _SUFFIX = (("_kWh_per_km", "kWh/km"), ("_kWh_per_mi", "kWh/mi"),
               ("_L_per_100km", "L/100 km"), ("_gal_per_100mi", "US gal/100 mi"),
               ("_mpg", "mi/US gal"), ("_kWh", "kWh"), ("_kW", "kW"), ("tonne_km", "t·km"),
               ("_km", "km"), ("_mi", "mi"), ("_h", "h"), ("_t", "t"), ("_L", "L"))

    def _flatten(self, d: dict, prefix: str, label: str, out: list, legs: list,
                 per_year: bool = False) -> None:
        for key, v in d.items():
            unit, word = "-", key
            for suf, u in self._SUFFIX:
                if key.endswith(suf):
                    unit, word = u, key[: -len(suf)] if key != suf else key
                    break
            if key == "tonne_km":
                word = "payload × distance"
            if key in ("trips", "extra_trips"):
                unit = "1/yr" if per_year else "-"
            if key == "operating_days":
                unit = "d/yr"
            if per_year and unit not in ("-", "kW", "1/yr", "d/yr"):
                unit += "/yr"
            text = word.replace("_", " ").strip() or key
            name = f"{prefix}.{key}"
            if isinstance(v, dict):
                for sub, x in v.items():
                    out.append((f"{name}.{sub}", f"{label}: {text}, {sub}", x, unit))
            elif isinstance(v, (list, tuple)):
                for k, x in enumerate(v):
                    leg = legs[k] if k < len(legs) else f"leg {k + 1}"
                    out.append((f"{name}[{k}]", f"{label}: {text}, {leg}", x, unit))
            else:
                out.append((name, f"{label}: {text}", v, unit))

    # ------------------------------------------------------------------------ Summary
    def _summary_sheet(self) -> None:
        ws, cur = self.ws_su, self.cur
        sc = self.summary.get("scenario", {})
        names = self.trucks
        nt = len(names)
        safe_text(ws.cell(row=1, column=1), sc.get("name", self.s.study.name)).font = _TITLE_FONT
        wbb.set_widths(ws, {"A": 52, "B": 36, **{3 + k: 18 for k in range(nt)}, 3 + nt: 16,
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
        row = self._feasibility(row + 1)
        row = self._text_list(row + 1, "Warnings", self.summary.get("warnings", []))
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
                 ("IRR of the extra investment", "irr", "1/yr", _RATE),
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

    def _feasibility(self, row: int) -> int:
        ws = self.ws_su
        _section(ws, row, "Feasibility on the duty cycle")
        row += 1
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
                safe_text(ws.cell(row=row, column=1), f"  {key}")
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
            ws.cell(row=r, column=1, value=k).number_format = wbb.YEAR
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
                              y_number_format=wbb.MONEY, width=22, height=10)
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
                          y_number_format="#,##0", width=22, height=10)
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
                for k, q in enumerate(("mean", "sd", "p10", "p50", "p90")):
                    if q in st:
                        write_value(ws.cell(row=row, column=2 + k), st[q], "#,##0.0000")
                safe_text(ws.cell(row=row, column=7), unit)
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
                params = ", ".join(f"{k} = {v:.6g}" if isinstance(v, (int, float)) else
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
