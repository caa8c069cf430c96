"""The cost lines: one definition per line, read by the cash-flow model and the workbook.

Each :class:`CostLine` carries everything about one line of the cash-flow table:

* its name, label, description, category, sign and tax treatment;
* ``compute``: the numpy computation of the line for one truck, a function of the truck's
  context (:class:`tco.cashflow.TruckContext`: parameters, yearly price indices, physical
  quantities), returning the line by year (years first, currency of the year, nominal) or
  None when the line does not apply to that truck;
* ``formula``: the spreadsheet formula of the line in one year, a template over the named
  inputs of the workbook's Inputs sheet, resolved by the workbook
  (:class:`tco.report.workbook.cashflow_sheet.FormulaEnv`);
* ``inputs``: named inputs of the Inputs sheet the line needs beyond the ones the sheet
  already writes (a new scenario field's cell).

:func:`tco.cashflow.compute` and the workbook's Cash flow sheet loop over
:func:`registry`; neither names a line. Adding a line = a scenario field and one
:class:`CostLine` here (DEVELOPERS.md, "Adding a cost line").

Formula templates
-----------------
A template is either a string, formatted with the names below, or a function of the
workbook's :class:`FormulaEnv`-like object ``w`` returning the formula body (without the
leading ``=``):

========  ===============================================================
``{y}``   the cell holding the year of the column (0..N)
``{P}``   the truck's prefix of defined names (``t1_``, ``t2_``...)
``{N}``   the defined name of the period length (``analysis_years``)
``{S}``   the truck's scale of yearly quantities to the route's days and trips
``{srv}`` the number of trucks sharing the depot's costs
``{GE}``  the nominal growth base of equipment prices
========  ===============================================================

``w.run(expr, esc)`` is a running cost (``expr × (1 + e)^y`` in years 1..N, 0 in year 0),
``w.g(esc)`` the nominal growth base of an escalation name; see
:class:`tco.report.workbook.cashflow_sheet.FormulaEnv` for the rest.

References
----------
.. [1] numpy-financial documentation (``npv``, ``irr``, ``pmt``) and the spreadsheet
   functions CUMIPMT/CUMPRINC, the loan lines' reference.
"""
from __future__ import annotations

import contextlib
import string
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field

import numpy as np

__all__ = ["CostLine", "SheetInput", "REGISTRY", "registry", "using", "by_name", "Outer"]


# --------------------------------------------------------------------------- line values
@dataclass(frozen=True)
class Outer:
    """A line that is a yearly vector times a per-draw factor: ``v * a``.

    ``v`` is (N+1, 1) (or (N+1, n) when its yearly shape varies across draws); ``a`` a
    float or an (n,) row. The Monte Carlo totals keep the factors apart
    (:class:`tco.cashflow._Sum`); the table's line is exactly ``v * a``.
    """

    v: np.ndarray
    a: float | np.ndarray


def scaled(value, f: float):
    """A line (array, Outer or tuple of them) times a scalar."""
    if isinstance(value, Outer):
        return Outer(value.v, value.a * f)
    if isinstance(value, tuple):
        return tuple(scaled(v, f) for v in value)
    return value * f


def dense(value) -> np.ndarray:
    """A line as an array: an array stays, an Outer is ``v * a``, a tuple of them is
    their sum (left to right)."""
    if isinstance(value, Outer):
        return value.v * value.a
    if isinstance(value, tuple):
        out = dense(value[0])
        for term in value[1:]:
            out = out + dense(term)
        return out
    return value


# --------------------------------------------------------------------------- definitions
@dataclass(frozen=True)
class SheetInput:
    """A named input of the workbook's Inputs sheet that a cost line needs.

    Attributes
    ----------
    name : str
        Defined name without the truck prefix (``permit_fee`` → ``t1_permit_fee``).
    label : str
        Text of the Inputs sheet row.
    field : str
        Parameter path with ``{i}`` for the truck index (``trucks[{i}].costs.permit_fee``),
        as in :func:`tco.cashflow.flat_params`.
    unit : str
        Unit shown; ``{cur}`` is replaced by the currency code.
    factor : float
        Sheet value = SI value × factor (e.g. 1000 for per metre → per km). [-]
    """

    name: str
    label: str
    field: str
    unit: str = "{cur}"
    factor: float = 1.0


@dataclass(frozen=True)
class CostLine:
    """One cost line: its computation, its spreadsheet formula and what it is.

    Attributes
    ----------
    name : str
        Stable key used in the table, summary.json and the workbook.
    label : str
        Short title (charts, tables).
    description : str
        What the line holds; the workbook's row text.
    group : str
        Category: purchase, financing, depot, energy, running, battery, end or tax. The
        ``end`` lines are end-of-period proceeds (taxed on the gain over book value in the
        after-tax view).
    sign : str
        ``"cost"`` (positive, money out), ``"income"`` (negative, money in) or
        ``"either"``.
    compute : callable
        ``compute(tc) -> line | None``: the line by year for one truck
        (:class:`tco.cashflow.TruckContext`), years first, an array, an :class:`Outer` or
        a tuple of them [currency, nominal]; None when the line does not apply.
    formula : str or callable
        The spreadsheet formula of one year (template, see the module docstring).
    deductible : bool
        Deducted from taxable profit in the year paid (after-tax view).
    reads_lines : bool
        The computation reads other lines of the truck (tax effects): computed after
        every other line.
    deflate : bool
        In the real money basis the workbook divides the formula by the year's deflator;
        False when the formula refers to cells that are already deflated.
    note : str or callable
        The workbook's note beside the row, or ``note(costs) -> str`` of the truck's
        :class:`~tco.scenario.costs.TruckCosts`.
    inputs : tuple of SheetInput
        Named inputs the Inputs sheet adds for this line (per truck having the field).
    """

    name: str
    label: str
    description: str
    group: str
    sign: str
    compute: Callable
    formula: str | Callable
    deductible: bool = False
    reads_lines: bool = False
    deflate: bool = True
    note: str | Callable = ""
    inputs: tuple[SheetInput, ...] = field(default_factory=tuple)

    @property
    def category(self) -> str:
        """Alias of :attr:`group`."""
        return self.group

    def render(self, w) -> str:
        """The formula body of one year for the workbook environment ``w``."""
        if callable(self.formula):
            return self.formula(w)
        return self.formula.format_map(w.names)

    def note_for(self, costs) -> str:
        """The workbook note for a truck with these costs."""
        return self.note(costs) if callable(self.note) else self.note


# --------------------------------------------------------------------------- computations
# Each takes the truck context ``tc`` (tco.cashflow.TruckContext) and returns the line
# (years first) or None. Prices are today's; tc.running(path) is the running-cost index
# (0 in year 0, (1 + e)^y after), tc.one_off(path) the one-off index, tc.q(name) a yearly
# quantity of the truck's operation scaled to the route's days and trips (SI).

def _owned(tc) -> bool:
    return tc.f.method != "lease"


def _c_purchase_price(tc):
    """Purchase price in year 0 (not for a leased truck). [currency]"""
    return Outer(tc.e0, tc.price) if _owned(tc) else None


def _c_purchase_taxes_fees(tc):
    """Purchase taxes (price × rate) and fees in year 0. [currency]"""
    return Outer(tc.e0, tc.taxes) if _owned(tc) else None


def _c_grant(tc):
    """Grant received in year 0, negative. [currency]"""
    return Outer(tc.e0, -tc.grant) if _owned(tc) else None


def _c_tax_credit(tc):
    """Tax credit in its year, negative; noted and left out after the period. [currency]"""
    if not _owned(tc):
        return None
    c, N = tc.c, tc.N
    if c.tax_credit_year <= N:
        return Outer(tc.unit(c.tax_credit_year), -tc.credit)
    if c.tax_credit > 0:
        tc.note(f"{tc.t.name}: the tax credit of year {c.tax_credit_year} falls after the "
                f"{N}-year period and is not counted")
    return None


def _c_loan_drawdown(tc):
    """Loan received in year 0, negative. [currency]"""
    return Outer(tc.e0, -tc.loan["principal"]) if tc.f.method == "loan" else None


def _c_loan_interest(tc):
    """Loan interest of each year's instalments (in arrears). [currency]"""
    return tc.loan["interest"] if tc.f.method == "loan" else None


def _c_loan_principal(tc):
    """Principal repaid by year; the balance left after the period settled in its last year.
    [currency]"""
    return tc.loan["repaid"] if tc.f.method == "loan" else None


def _c_lease_upfront(tc):
    """Lease payment at signing, year 0. [currency]"""
    if tc.f.method != "lease":
        return None
    return Outer(tc.e0, tc.p(f"{tc.tp}.financing.lease_upfront"))


def _c_lease_payment(tc):
    """12 × monthly payment in years 1..min(T, N); the rest in year N when settled. [currency]"""
    f, N, y = tc.f, tc.N, tc.y
    if f.method != "lease":
        return None
    T = f.lease_years
    yearly = 12.0 * tc.p(f"{tc.tp}.financing.lease_payment")
    pay = Outer((y >= 1) & (y <= min(T, N)), yearly)
    if T > N and f.beyond_period == "settle":
        pay = (pay, Outer(tc.eN, yearly * (T - N)))
        tc.note(f"{tc.t.name}: the lease payments after year {N} are paid in year {N}")
    elif T > N:
        tc.note(f"{tc.t.name}: the lease payments after year {N} are left out, with the use "
                "of the truck after the period")
    return pay


def _c_lease_buyout(tc):
    """Lease buy-out price in the buy-out year. [currency]"""
    if tc.f.method != "lease" or tc.buyout_year is None:
        return None
    return Outer(tc.unit(tc.buyout_year), tc.p(f"{tc.tp}.financing.lease_buyout_price"))


def _c_insurance(tc):
    """(rate × price × value share at the start of the year + fixed) × index, years 1..N.
    [currency]"""
    insurance = tc.running(f"{tc.tp}.escalation.insurance")
    start_value = tc.value_share[1]
    on_value = tc.p(f"{tc.tp}.insurance_rate") * tc.price
    fixed = tc.p(f"{tc.tp}.insurance_fixed")
    if tc.keep:
        return insurance * (start_value * on_value + fixed)
    # for the totals, the same line as two yearly-vector × per-draw-factor terms
    return (Outer(insurance * start_value, on_value), Outer(insurance, fixed))


def _c_residual_value(tc):
    """−price × value share at age N, in year N, for a truck owned at the end. [currency]"""
    if not tc.owned_at_end:
        return None
    return Outer(tc.eN, -tc.price * tc.at(tc.value_share[0], tc.N))


def _c_depot_chargers(tc):
    """Charger hardware and installation at 0, L, 2L... ÷ trucks served. [currency]"""
    return tc.depot_part(tc.depot_plan["capex"] * tc.depot_plan["share"])


def _c_depot_grid_connection(tc):
    """Grid connection in year 0 ÷ trucks served. [currency]"""
    d = tc.depot_plan
    return tc.depot_part(Outer(tc.e0, tc.p("depot.grid_connection_cost") * d["share"]))


def _c_depot_maintenance(tc):
    """Chargers × maintenance per year × index ÷ trucks served. [currency]"""
    d = tc.depot_plan
    return tc.depot_part(Outer(tc.running("prices.escalation.equipment"),
                               tc.inputs.depot.chargers * tc.p("depot.maintenance_per_year")
                               * d["share"]))


def _c_depot_residual(tc):
    """−hardware value at the end of each life and of the period ÷ trucks served. [currency]"""
    return tc.depot_part(tc.depot_plan["residual"] * tc.depot_plan["share"])


_ESC = "prices.escalation."


def _c_diesel(tc):
    """Diesel volume [m³/yr] × price [currency/m³] × index. [currency]"""
    if not tc.has("diesel_volume"):
        return None
    price = tc.p.needed("prices.diesel", f"{tc.t.name} burns diesel")
    return Outer(tc.running(_ESC + "diesel"), tc.q("diesel_volume") * price)


def _c_diesel_exhaust_fluid(tc):
    """DEF volume [m³/yr] × price [currency/m³] × index. [currency]"""
    if not tc.has("def_volume"):
        return None
    price = tc.p.needed("prices.diesel_exhaust_fluid",
                        f"{tc.t.name} uses diesel exhaust fluid")
    return Outer(tc.running(_ESC + "diesel_exhaust_fluid"), tc.q("def_volume") * price)


def _c_electricity_energy(tc):
    """Depot energy [J/yr] × profile-weighted price [currency/J] × index (× the ageing share by
    year). [currency]"""
    if not tc.has("grid_energy_depot"):
        return None
    aged = tc.aged
    return Outer(tc.running(_ESC + "electricity") * (aged["depot"] if aged else 1.0),
                 tc.q("grid_energy_depot") * tc.depot_price())


def _c_electricity_demand(tc):
    """12 × demand charge [currency/W/month] × depot peak (capped by the chargers) ÷
    trucks served. [currency]"""
    if not tc.uses_depot:
        return None
    op, served = tc.op, tc.served
    if op.depot_peak_contribution is not None:  # billed on its part of the peak
        capped = op.depot_peak_contribution * served
    else:
        peak = tc.q("depot_charging_power")
        cap = tc.inputs.depot.chargers * tc.p("depot.charger_power")
        capped = np.minimum(peak * served, np.where(cap > 0, cap, np.inf))
    return Outer(tc.running(_ESC + "electricity"),
                 12.0 * tc.p("prices.electricity.demand_charge") * capped / served)


def _c_electricity_fixed(tc):
    """12 × fixed fee per month × this truck's share. [currency]"""
    if not tc.uses_depot:
        return None
    op = tc.op
    fee_share = 1.0 / tc.served if op.depot_cost_share is None else op.depot_cost_share
    return Outer(tc.running(_ESC + "electricity"),
                 12.0 * tc.p("prices.electricity.fixed_fee") * fee_share)


def _c_public_charging(tc):
    """En-route energy [J/yr] (by year as the battery ages) × public price [currency/J] × index.
    [currency]"""
    aged = tc.aged
    if aged and aged["public"].any():  # en-route charging as the battery ages
        price = tc.p.needed("prices.public_charging", f"{tc.t.name} charges en route")
        return Outer(tc.running(_ESC + "public_charging") * aged["public"],
                     aged["factor"] * price)
    if tc.has("grid_energy_public"):
        price = tc.p.needed("prices.public_charging", f"{tc.t.name} charges en route")
        return Outer(tc.running(_ESC + "public_charging"), tc.q("grid_energy_public") * price)
    return None


def _per_distance(name: str):
    def compute(tc):
        return Outer(tc.running(f"{tc.tp}.escalation.{name}"),
                     tc.q("distance") * tc.p(f"{tc.tp}.{name}"))
    compute.__name__ = f"_c_{name}"
    compute.__doc__ = f"{name}: distance × cost per metre, escalated."
    return compute


def _c_registration(tc):
    """Registration and road taxes per year × index. [currency]"""
    return Outer(tc.running(f"{tc.tp}.escalation.registration"),
                 tc.p(f"{tc.tp}.registration"))


def _wage(tc):
    """Driver cost [currency/s] and its running index."""
    return tc.p("finance.driver_cost_per_hour"), tc.running("finance.driver_cost_escalation")


def _c_charging_driver_time(tc):
    """Time lost at en-route chargers [s/yr] × driver cost [currency/s] × index. [currency]"""
    wage, driver = _wage(tc)
    aged = tc.aged
    if aged:
        return Outer(driver * aged["time"], aged["factor"] * wage)
    return Outer(driver, tc.q("charging_time_lost") * wage)


def _c_driver_wages(tc):
    """Every trip's duty time [s/yr] × driver cost [currency/s] × index (finance.driver_wages on).
    [currency]"""
    if not tc.inputs.finance.driver_wages:
        return None
    wage, driver = _wage(tc)
    op = tc.op  # every trip's duty time, the extra ones included
    trips = (op.trips - op.extra_trips) * tc.scale + tc.q("extra_trips")
    return Outer(driver, trips * tc.q("trip_duration") * wage)


def _c_extra_trips_driver_time(tc):
    """Extra trips × trip duration [s] × driver cost [currency/s] × index. [currency]"""
    if tc.inputs.finance.driver_wages:
        return None
    wage, driver = _wage(tc)
    return Outer(driver, tc.q("extra_trips") * tc.q("trip_duration") * wage)


def _c_battery_replacement(tc):
    """Battery replacements by year (the truck's battery schedule). [currency]"""
    return tc.battery.get("battery_replacement")


def _c_battery_remaining_life(tc):
    """−unused life of the last replacement at the end, in year N. [currency]"""
    return tc.battery.get("battery_remaining_life")


def _c_tax_shield_operating(tc):
    """−tax rate × the deductible lines (after-tax view). [currency]"""
    a = tc.inputs.finance.after_tax
    if not (a.enabled and a.deduct_operating_costs):
        return None
    return -tc.tax_rate * tc.lines.deductible


def _c_tax_shield_interest(tc):
    """−tax rate × loan interest (after-tax view). [currency]"""
    if not tc.inputs.finance.after_tax.enabled:
        return None
    return -tc.tax_rate * (dense(tc.interest) * tc.op_mask)


def _c_tax_shield_depreciation(tc):
    """−tax rate × tax depreciation of the truck, depot share and replacements. [currency]"""
    if not tc.inputs.finance.after_tax.enabled:
        return None
    return -tc.tax_rate * tc.depreciation[0]


def _c_tax_on_sale(tc):
    """Tax rate × (end proceeds − tax book value left), in year N. [currency]"""
    if not tc.inputs.finance.after_tax.enabled:
        return None
    # sold or valued at the end: proceeds (the credits, negative lines) less book value;
    # hardware sold at the end of a life before the period ends is fully depreciated
    return tc.tax_rate * (-tc.lines.credits - tc.eN * tc.depreciation[1])


# --------------------------------------------------------------------------- formulas
def _f_loan(line: str):
    def formula(w) -> str:
        P, N, y = w.P, w.N, w.y
        m = f"{P}payments_per_year"
        args = (f"{P}loan_rate/{m},{P}loan_years*{m},{P}loan_amount,({y}-1)*{m}+1,"
                f"{y}*{m},0")
        ok = f"AND({P}loan_rate>0,{P}loan_amount>0)"
        if line == "loan_interest":
            return f"IF(AND({y}>=1,{y}<={P}loan_years),IF({ok},-CUMIPMT({args}),0),0)"
        settle = (f"IF(AND({y}={N},{P}loan_years>{N}),{P}loan_amount-IF({ok},"
                  f"-CUMPRINC({P}loan_rate/{m},{P}loan_years*{m},{P}loan_amount,1,"
                  f"{N}*{m},0),{P}loan_amount*{N}/{P}loan_years),0)")
        return (f"IF(AND({y}>=1,{y}<={P}loan_years),IF({ok},-CUMPRINC({args}),"
                f"{P}loan_amount/{P}loan_years),0)+{settle}")
    return formula


def _f_lease_payment(w) -> str:
    P, N, y = w.P, w.N, w.y
    body = f"IF(AND({y}>=1,{y}<=MIN({P}lease_years,{N})),12*{P}lease_payment,0)"
    if w.costs.financing.beyond_period == "settle":
        body += (f"+IF(AND({y}={N},{P}lease_years>{N}),12*{P}lease_payment*"
                 f"({P}lease_years-{N}),0)")
    return body


def _f_lease_buyout(w) -> str:
    P, N, y = w.P, w.N, w.y
    when = (f"MIN({P}lease_years,{N})" if w.costs.financing.beyond_period == "settle"
            else f"{P}lease_years")
    return f"IF({y}={when},{P}lease_buyout_price,0)"


def _f_insurance(w) -> str:
    P = w.P
    return w.run(f"{w.share_age(f'{w.y}-1')}*{P}insurance_rate*{P}purchase_price"
                 f"+{P}insurance_fixed", P + "esc_insurance")


def _f_residual_value(w) -> str:
    return f"IF({w.y}={w.N},-{w.P}purchase_price*{w.share_age(w.y)},0)"


def _f_depot_residual(w) -> str:
    N, y, GE, srv = w.N, w.y, w.names["GE"], w.names["srv"]
    tl = f"depot_life*INT(({N}-1)/depot_life)"
    return (f"(IF(AND({y}>0,{y}<{N},MOD({y},depot_life)=0),-depot_residual_share"
            f"*depot_chargers*depot_hardware_cost*{GE}^({y}-depot_life),0)"
            f"+IF({y}={N},-depot_chargers*depot_hardware_cost*{GE}^({tl})"
            f"*(1-(1-depot_residual_share)*({N}-{tl})/depot_life),0))/{srv}")


def _f_electricity_energy(w) -> str:
    bands = "+".join(f"{kwh}*{price}" for kwh, price in w.bands)
    aged = f"*INDEX({w.P}depot_share_by_year,{w.y})" if w.aged else ""
    return w.run(f"({bands})*{w.S}{aged}", "esc_electricity")


def _f_electricity_demand(w) -> str:
    srv = w.names["srv"]
    peak = f"{w.P}depot_peak_kw*{srv}"
    cap = "depot_chargers*depot_charger_power_kw"
    return w.run(f"12*demand_charge*MIN({peak},IF({cap}>0,{cap},{peak}))/{srv}",
                 "esc_electricity")


def _f_public_charging(w) -> str:
    kwh = f"INDEX({w.P}public_kwh_by_year,{w.y})" if w.aged else f"{w.P}public_kwh"
    return w.run(f"{kwh}*{w.S}*public_charging_price", "esc_public_charging")


def _f_per_distance(name: str):
    def formula(w) -> str:
        return w.run(f"{w.P}distance_km*{w.S}*{w.P}{name}_per_km", f"{w.P}esc_{name}")
    return formula


def _f_charging_driver_time(w) -> str:
    h = f"INDEX({w.P}charging_h_by_year,{w.y})" if w.aged else f"{w.P}charging_time_h"
    return w.run(f"{h}*{w.S}*driver_cost_per_hour", "driver_cost_escalation")


def _f_tax_shield_operating(w) -> str:
    cells = "+".join(f"{w.col}{r}" for name, r in w.rows.items() if name in w.deductible)
    return f"-tax_rate*({cells or 0})"


def _f_tax_shield_interest(w) -> str:
    if "loan_interest" not in w.rows:
        return "0*tax_rate"
    return f"-tax_rate*IF({w.y}>=1,{w.col}{w.rows['loan_interest']},0)"


def _f_tax_on_sale(w) -> str:
    cells = "+".join(f"{w.col}{r}" for name, r in w.rows.items() if name in w.proceeds)
    return (f"tax_rate*(-({cells or 0})-IF({w.y}={w.N},{w.book_left()},0)"
            f"{w.defl(w.y)})")


# --------------------------------------------------------------------------- notes
def _n_value_share(costs) -> str:
    how = ("(1 − rate)^age" if costs.residual.method == "declining_balance"
           else "value table by age")
    return f"value share by age: {how}"


def _n_battery(costs) -> str:
    if costs.battery_replacement.when == "cycles":
        return "a replacement each time the summed battery lives pass a whole number"
    return ""


_DEPOT_NOTE = "depot cost ÷ depot_trucks_served"
_LOAN_NOTE = "CUMIPMT/CUMPRINC over the year's instalments (in arrears)"


# --------------------------------------------------------------------------- the registry
def _run(expr: str, esc: str) -> Callable:
    """A running cost's formula: ``expr`` (a template) escalated by ``esc`` (a template)."""
    def formula(w) -> str:
        return w.run(expr.format_map(w.names), esc.format_map(w.names))
    return formula


#: Every cost line, in table order. A line that is zero in every year for a truck is left
#: out of that truck's table rows.
REGISTRY: tuple[CostLine, ...] = (
    CostLine("purchase_price", "Purchase price", "Purchase price (cash or loan)",
             "purchase", "cost", _c_purchase_price, "IF({y}=0,{P}purchase_price,0)"),
    CostLine("purchase_taxes_fees", "Purchase taxes and fees", "Purchase taxes and fees",
             "purchase", "cost", _c_purchase_taxes_fees,
             "IF({y}=0,{P}purchase_price*{P}purchase_tax_rate+{P}purchase_fees,0)"),
    CostLine("grant", "Grant", "Grant received at purchase (negative)", "purchase", "income",
             _c_grant, "IF({y}=0,-{P}grant,0)"),
    CostLine("tax_credit", "Tax credit", "Tax credit received (negative)", "purchase",
             "income", _c_tax_credit, "IF({y}={P}tax_credit_year,-{P}tax_credit,0)"),
    CostLine("loan_drawdown", "Loan received", "Loan received at purchase (negative)",
             "financing", "income", _c_loan_drawdown, "IF({y}=0,-{P}loan_amount,0)"),
    CostLine("loan_interest", "Loan interest", "Loan interest", "financing", "cost",
             _c_loan_interest, _f_loan("loan_interest"), note=_LOAN_NOTE),
    CostLine("loan_principal", "Loan principal", "Loan principal repaid (remaining balance "
             "settled in the last year when the loan runs past the period)", "financing",
             "cost", _c_loan_principal, _f_loan("loan_principal"), note=_LOAN_NOTE),
    CostLine("lease_upfront", "Lease at signing", "Lease payment at signing", "financing",
             "cost", _c_lease_upfront, "IF({y}=0,{P}lease_upfront,0)", deductible=True),
    CostLine("lease_payment", "Lease payments", "Lease payments", "financing", "cost",
             _c_lease_payment, _f_lease_payment, deductible=True),
    CostLine("lease_buyout", "Lease buy-out", "Lease buy-out", "financing", "cost",
             _c_lease_buyout, _f_lease_buyout),
    CostLine("depot_chargers", "Depot chargers", "Depot charger hardware and installation, "
             "this truck's share", "depot", "cost", _c_depot_chargers,
             "IF(AND(MOD({y},depot_life)=0,{y}<{N}),(depot_chargers*depot_hardware_cost"
             "+depot_chargers*depot_installation_cost)*{GE}^{y},0)/{srv}", note=_DEPOT_NOTE),
    CostLine("depot_grid_connection", "Depot grid connection", "Depot grid connection, this "
             "truck's share", "depot", "cost", _c_depot_grid_connection,
             "IF({y}=0,depot_grid_connection_cost,0)/{srv}", note=_DEPOT_NOTE),
    CostLine("depot_maintenance", "Depot maintenance", "Depot charger maintenance, this "
             "truck's share", "depot", "cost", _c_depot_maintenance,
             _run("depot_chargers*depot_maintenance_per_year/{srv}", "esc_equipment"),
             deductible=True, note=_DEPOT_NOTE),
    CostLine("diesel", "Diesel", "Diesel", "energy", "cost", _c_diesel,
             _run("{P}diesel_L*{S}*diesel_price", "esc_diesel"), deductible=True),
    CostLine("diesel_exhaust_fluid", "Diesel exhaust fluid", "Diesel exhaust fluid", "energy",
             "cost", _c_diesel_exhaust_fluid, _run("{P}def_L*{S}*def_price", "esc_def"),
             deductible=True),
    CostLine("electricity_energy", "Depot electricity, energy", "Depot electricity, energy "
             "charge by time-of-use band", "energy", "cost", _c_electricity_energy,
             _f_electricity_energy, deductible=True,
             note="Σ kWh per time-of-use band × band price"),
    CostLine("electricity_demand", "Depot electricity, demand", "Depot electricity, demand "
             "charge (this truck's share of the depot peak)", "energy", "cost",
             _c_electricity_demand, _f_electricity_demand, deductible=True, note=_DEPOT_NOTE),
    CostLine("electricity_fixed", "Depot electricity, fixed fees", "Depot electricity, fixed "
             "fees (this truck's share)", "energy", "cost", _c_electricity_fixed,
             _run("12*fixed_fee/{srv}", "esc_electricity"), deductible=True, note=_DEPOT_NOTE),
    CostLine("public_charging", "Public charging", "Electricity bought at public chargers",
             "energy", "cost", _c_public_charging, _f_public_charging, deductible=True),
    CostLine("maintenance", "Maintenance", "Maintenance and repair", "running", "cost",
             _per_distance("maintenance"), _f_per_distance("maintenance"), deductible=True),
    CostLine("tyres", "Tyres", "Tyres", "running", "cost", _per_distance("tyres"),
             _f_per_distance("tyres"), deductible=True),
    CostLine("insurance", "Insurance", "Insurance", "running", "cost", _c_insurance,
             _f_insurance, deductible=True, note=_n_value_share),
    CostLine("registration", "Registration", "Registration and road taxes", "running", "cost",
             _c_registration, _run("{P}registration", "{P}esc_registration"),
             deductible=True),
    CostLine("tolls", "Tolls", "Road tolls", "running", "cost", _per_distance("tolls"),
             _f_per_distance("tolls"), deductible=True),
    CostLine("driver_wages", "Driver wages", "Driver wages for the duty time of every trip "
             "(when finance.driver_wages is on)", "running", "cost", _c_driver_wages,
             _run("({P}base_trips_per_day*{P}operating_days+{P}extra_trips)*{S}"
                  "*{P}trip_duration_h*driver_cost_per_hour", "driver_cost_escalation"),
             deductible=True),
    CostLine("charging_driver_time", "Charging time", "Driver time lost at en-route chargers",
             "running", "cost", _c_charging_driver_time, _f_charging_driver_time,
             deductible=True),
    CostLine("extra_trips_driver_time", "Extra trips", "Driver time of the extra trips "
             "caused by lower payload", "running", "cost", _c_extra_trips_driver_time,
             _run("{P}extra_trips*{S}*{P}trip_duration_h*driver_cost_per_hour",
                  "driver_cost_escalation"), deductible=True),
    CostLine("battery_replacement", "Battery replacement", "Traction battery replacement "
             "(capitalised and depreciated for tax)", "battery", "cost",
             _c_battery_replacement, lambda w: w.battery("battery_replacement"),
             note=_n_battery),
    CostLine("battery_remaining_life", "Battery life left", "Unused life of a replacement "
             "battery at the end (negative)", "end", "income", _c_battery_remaining_life,
             lambda w: w.battery("battery_remaining_life")),
    CostLine("residual_value", "Residual value", "Residual value of the truck at the end "
             "(negative)", "end", "income", _c_residual_value, _f_residual_value,
             note=_n_value_share),
    CostLine("depot_residual", "Depot residual", "Value of depot charger hardware at the end "
             "of each life and of the period (negative)", "end", "income", _c_depot_residual,
             _f_depot_residual, note=_DEPOT_NOTE),
    CostLine("tax_shield_operating", "Tax saved, operating", "Tax saved on deductible costs "
             "(negative)", "tax", "income", _c_tax_shield_operating, _f_tax_shield_operating,
             reads_lines=True, deflate=False,
             note="−tax rate × the deductible lines above"),
    CostLine("tax_shield_interest", "Tax saved, interest", "Tax saved on loan interest "
             "(negative)", "tax", "income", _c_tax_shield_interest, _f_tax_shield_interest,
             reads_lines=True, deflate=False),
    CostLine("tax_shield_depreciation", "Tax saved, depreciation", "Tax saved on depreciation "
             "(negative)", "tax", "income", _c_tax_shield_depreciation,
             lambda w: f"-tax_rate*({w.depreciation()})", reads_lines=True,
             note="depreciation fractions from the Inputs sheet (the truck and each battery "
                  "replacement, capitalised)"),
    CostLine("tax_on_sale", "Tax on sale", "Tax on the gain (saving on the loss) of assets "
             "sold or valued at the end", "tax", "either", _c_tax_on_sale, _f_tax_on_sale,
             reads_lines=True, deflate=False,
             note="tax rate × (end proceeds − tax book value left)"),
)

_active: tuple[CostLine, ...] = REGISTRY


def registry() -> tuple[CostLine, ...]:
    """The cost lines in use, in table order (:data:`REGISTRY` unless :func:`using`)."""
    return _active


def by_name() -> dict[str, CostLine]:
    """The cost lines in use by name."""
    return {c.name: c for c in _active}


@contextlib.contextmanager
def using(lines: tuple[CostLine, ...]) -> Iterator[tuple[CostLine, ...]]:
    """Use another set of cost lines (e.g. :data:`REGISTRY` plus a line of a test) within
    the block; the model and the workbook read it."""
    global _active
    _check(lines)
    before = _active
    _active = tuple(lines)
    try:
        yield _active
    finally:
        _active = before


#: The names a string formula template may use (module docstring).
TEMPLATE_NAMES = ("y", "P", "N", "S", "srv", "GE")
_SIGNS = ("cost", "income", "either")
_GROUPS = ("purchase", "financing", "depot", "energy", "running", "battery", "end", "tax")


def _check(lines) -> None:
    """Every line has a name, a computation, a formula template, a known sign and group;
    names are unique. Raises ValueError (at import for :data:`REGISTRY`)."""
    seen = set()
    for c in lines:
        if not c.name or c.name in seen:
            raise ValueError(f"cost line name '{c.name}' is empty or repeated")
        seen.add(c.name)
        if not callable(c.compute):
            raise ValueError(f"cost line '{c.name}' has no computation")
        if not (callable(c.formula) or (isinstance(c.formula, str) and c.formula)):
            raise ValueError(f"cost line '{c.name}' has no formula template")
        if isinstance(c.formula, str):
            unknown = {f for _, f, _, _ in string.Formatter().parse(c.formula)
                       if f is not None} - set(TEMPLATE_NAMES)
            if unknown:
                raise ValueError(f"cost line '{c.name}': formula template names "
                                 f"{sorted(unknown)}, not one of {TEMPLATE_NAMES}")
        if c.sign not in _SIGNS:
            raise ValueError(f"cost line '{c.name}': sign '{c.sign}' is not one of {_SIGNS}")
        if c.group not in _GROUPS:
            raise ValueError(f"cost line '{c.name}': group '{c.group}' is not one of "
                             f"{_GROUPS}")


_check(REGISTRY)
