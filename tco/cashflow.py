"""Yearly cash flows of buying (or leasing) and running each truck, and the finance metrics.

The purchase case: for every truck, one cost line per item — purchase, incentives,
financing, depot charging, energy, running costs, battery replacement, end-of-life value
and, optionally, taxes — by year 0..N (year 0 = purchase, year y = end of year y), then
the present value, the levelized cost per km and per mile, each truck's difference from
the baseline truck, the payback, the IRR of the extra investment and break-even values.

How to call it
--------------
The model does not need the whole scenario, only its money sections and the yearly
physical quantities per truck::

    inputs = CostInputs(
        finance=scenario.finance, prices=scenario.prices, depot=scenario.depot,
        trucks=[TruckSpec(t.name, t.powertrain, t.costs) for t in scenario.trucks],
        operations=annual_operations,            # list[AnnualOperation], same order
        days_per_year=scenario.route.days_per_year,
        trips_per_day=scenario.route.trips_per_day,
    )
    result = evaluate(inputs)                    # scalar case: table, metrics, break-evens
    summary["cashflow"] = cashflow_summary(result)   # tco.report.summary_sections

    # uncertainty: every float input may be an array of draws
    params = flat_params(inputs)                 # {"prices.diesel": 1650.0, ...}  (SI)
    flows = compute(inputs, overrides={"prices.diesel": draws_a, "route.days_per_year": d},
                    params=params, totals_only=True)
    pv = flows.present_value(0)                  # shape (n_draws,)
    yearly = flows.total(0)                      # shape (n_draws, N + 1)

    # Monte Carlo: only each truck's net cost by year and its distance
    totals = compute_totals(inputs, overrides, params)
    totals.total_by_year[0]                      # shape (N + 1, n_draws), years first
    tco.finance.compare_costs(totals.flows[0], totals.flows[1], totals.discount_rate)

Conventions
-----------
* Amounts are costs: positive = money out, negative = money in (grant, loan received,
  residual value, tax savings). Each year's total is the net cash out.
* Every price is today's (year 0) price, and one price index serves every flow: an amount
  booked at the end of year y — a running cost of year y or a one-off bought then (a
  battery, a charger) — is priced at ``price × (1 + e)^y``. The same index, with the
  inflation rate, deflates the real money basis, so a price that does not change in real
  terms is the same real amount in every year.
* Physical quantities are those of :class:`~tco.operation.AnnualOperation`, scaled by
  ``days_per_year / operating_days`` and by ``trips_per_day`` over the operation's own
  ``(trips - extra_trips) / operating_days``, so that the annual distance can be varied
  through ``route.days_per_year`` (linearly: the day's duty and charging are assumed to
  still fit). Peak charging power, trip duration and battery data are not scaled.
* Money basis ``"real"``: the escalations and the discount rate given are real; they are
  turned nominal with the inflation rate, all flows are worked out in nominal money (loan
  and lease payments, tax credit, depreciation and residual shares of the price paid are
  fixed in money terms), and then every flow of year y is divided by (1 + inflation)^y. So
  a real case and the nominal case with the Fisher-converted rates give the same present
  value.

After-tax view (``finance.after_tax.enabled``): tax effects fall in the year of the flow
(the business is assumed to have enough taxable profit). Deductible: energy, running
costs, lease payments and depot maintenance. Loan interest gives its own shield. The
truck's basis (price + taxes and fees − grant, or a lease buy-out) is depreciated by the
chosen method from the year after purchase, and so is each battery replacement (a
capitalised component) from the year after it is fitted; depot
equipment (with the grid connection) straight-line over its life. At the end of the
period, and when charger hardware ends its life, assets are treated as sold at their
residual value: the gain over the remaining tax book value is taxed (a loss saves tax).
The tax credit and the grant are not taxed.

Payload effect, without double counting: the extra trips an electric truck needs because
it carries less per trip are already in ``AnnualOperation.distance`` and in its energy, so
their energy, maintenance, tyres and tolls are in those lines. The only cost they add
beyond distance is the driver's time, shown alone as ``extra_trips_driver_time`` =
extra_trips × trip_duration × driver cost. The driver's regular hours are not a cost line
for any truck (the same job needs them either way) unless ``finance.driver_wages`` is on:
then ``driver_wages`` = every trip's duty time (trips × trip_duration, extra trips
included, so ``extra_trips_driver_time`` is not shown) × driver cost, for a full operating
cost per km. Time lost at en-route chargers is always a line (``charging_driver_time``).

References
----------
.. [1] numpy-financial documentation (``npv``, ``irr``, ``pmt``), the reference the
   metrics are checked against.
.. [2] Internal Revenue Service, *Publication 946, How To Depreciate Property*, Table A-1.
"""
from __future__ import annotations

import math
import types
import typing
from dataclasses import dataclass, field
from typing import Annotated

import numpy as np
import pandas as pd
from numba import njit
from pydantic import BaseModel

from tco.report import formatting as fm
from tco import cost_lines as _cl
from tco import finance as fin
from tco.errors import InputError
from tco.operation import AnnualOperation
from tco.scenario.costs import Depot, Finance, Prices, TruckCosts

__all__ = [
    "LINES", "BREAK_EVEN_QUANTITIES", "CashFlows", "CashflowResult", "Comparison",
    "CostInputs", "CostTotals", "LineSpec", "TruckMetrics", "TruckSpec", "break_even",
    "check_inputs", "compute", "compute_totals", "evaluate",
    "flat_params",
]

_M_PER_KM = 1000.0
from tco.units import J_PER_KWH as _J_PER_KWH  # noqa: E402
from tco.units import M_PER_MILE as _M_PER_MILE  # noqa: E402
_M3_PER_L = 1e-3


# --------------------------------------------------------------------------- lines
#: A cost line's definition (name, description, group, tax treatment, computation and
#: workbook formula): :class:`tco.cost_lines.CostLine`.
LineSpec = _cl.CostLine

#: All cost lines in table order (the default registry, :data:`tco.cost_lines.REGISTRY`;
#: the model reads :func:`tco.cost_lines.registry`, which a test may extend). A line that
#: is zero in every year for a truck is left out of that truck's table rows.
LINES: tuple[LineSpec, ...] = _cl.REGISTRY
DEDUCTIBLE = tuple(s.name for s in LINES if s.deductible)

#: The order in which the lines of the default registry enter a truck's running sums (the
#: Monte Carlo totals, the deductible costs, the end proceeds) and the order of the notes
#: they add to the assumptions. Kept as it was before the registry, so that every figure
#: is bit-identical; a line not listed here comes after them in table order, and the lines
#: that read other lines (``reads_lines``, the tax effects) come last.
_SUM_ORDER = (
    "purchase_price", "purchase_taxes_fees", "grant", "tax_credit", "loan_drawdown",
    "loan_interest", "loan_principal", "lease_upfront", "lease_payment", "lease_buyout",
    "insurance", "residual_value", "depot_chargers", "depot_grid_connection",
    "depot_maintenance", "depot_residual", "diesel", "diesel_exhaust_fluid",
    "electricity_energy", "electricity_demand", "electricity_fixed", "public_charging",
    "maintenance", "tyres", "tolls", "registration", "charging_driver_time", "driver_wages",
    "extra_trips_driver_time", "battery_replacement", "battery_remaining_life",
)


def _evaluation_order(lines) -> list:
    """The lines in the order they are computed and summed (see :data:`_SUM_ORDER`)."""
    rank = {n: k for k, n in enumerate(_SUM_ORDER)}
    first = [c for c in lines if not c.reads_lines]
    first.sort(key=lambda c: rank.get(c.name, len(rank)))  # stable: table order after
    return first + [c for c in lines if c.reads_lines]


#: AnnualOperation fields exposed as parameters ``operations[i].<field>``; the first group
#: is yearly and scales with days and trips per day.
_OP_SCALED = ("distance", "diesel_volume", "def_volume", "battery_energy",
              "grid_energy_depot", "grid_energy_public", "charging_time_lost", "extra_trips",
              "battery_discharge_energy")
_OP_FIXED = ("depot_charging_power", "trip_duration", "battery_capacity", "battery_cycle_life",
             "calendar_fade", "eol_state_of_health")


# --------------------------------------------------------------------------- inputs
@dataclass(frozen=True)
class TruckSpec:
    """A truck as the cost model sees it.

    Attributes
    ----------
    name : str
        Truck name (unique).
    powertrain : str
        ``"diesel"`` or ``"electric"``.
    costs : TruckCosts
        Its cost section.
    """

    name: str
    powertrain: str
    costs: TruckCosts


@dataclass
class CostInputs:
    """Everything the cash-flow model reads.

    Attributes
    ----------
    finance, prices, depot : Finance, Prices, Depot
        Scenario sections.
    trucks : list of TruckSpec
        Candidate trucks, in scenario order (parameter paths ``trucks[i]`` follow it).
    operations : list of AnnualOperation
        One per truck, same order.
    days_per_year : float, optional
        Operating days per year of the route (default: the operations' own). [1/yr]
    trips_per_day : float, optional
        Trips per operating day, extra trips not counted (default: the operations' own).
    purchase_year : int
        Year t the trucks (and their share of depot equipment) are bought, 0..N−1. They
        are paid and financed from year t, run from year t + 1 (energy, running costs,
        distance), and hold their residual value at the end of the period (age N − t).
        Prices are those of year t: today's prices grown by their escalations (the truck's
        price by ``prices.escalation.equipment``). Years before t carry no flows. 0 (the
        default) is the purchase now. [yr]
    end_year : int, optional
        Year the trucks leave the fleet at the end of their own life, sold at their
        residual value then (age ``end_year − purchase_year``); no flows after it. None
        (the default): held to the end of the period. [yr]
    service_life : int, optional
        The trucks' own life (``finance.residual_at = "end_of_life"``): each truck is sold
        at its residual value at age ``service_life`` and, when that comes before the
        period ends, a like truck is bought that year at that year's prices (a replacement
        chain) until the period ends; the last one is valued at the end of the period.
        The depot's equipment keeps its own life. None (the default): held to the end.
        [yr]
    """

    finance: Finance
    prices: Prices
    depot: Depot
    trucks: list[TruckSpec]
    operations: list[AnnualOperation]
    days_per_year: float | None = None
    trips_per_day: float | None = None
    purchase_year: int = 0
    end_year: int | None = None
    service_life: int | None = None


def _base_trips_per_day(op: AnnualOperation) -> float:
    return (op.trips - op.extra_trips) / op.operating_days if op.operating_days > 0 else 0.0


def _baseline_index(inputs: CostInputs) -> int:
    name = inputs.finance.baseline
    names = [t.name for t in inputs.trucks]
    if name is not None:
        if name not in names:
            raise InputError(f"baseline '{name}' is not one of the trucks ({', '.join(names)})",
                             where="finance.baseline")
        return names.index(name)
    for k, t in enumerate(inputs.trucks):
        if t.powertrain == "diesel":
            return k
    return 0


def _end_year(inputs: CostInputs) -> int:
    """Year the trucks leave: their own end of life, or the end of the period."""
    return inputs.finance.analysis_years if inputs.end_year is None else inputs.end_year


def check_inputs(inputs: CostInputs, view: str = "as_financed") -> None:
    """Cross-section checks the section models cannot make alone.

    Raises
    ------
    InputError
        A loan or lease longer than the period without ``beyond_period``; a returned lease
        that ends before the period; a leased truck without a purchase price in the
        unlevered view; an unknown baseline truck; operations that do not match the trucks.
    """
    end = _end_year(inputs)
    n = end - inputs.purchase_year  # years owned in the period
    if not 0 <= inputs.purchase_year < inputs.finance.analysis_years:
        raise InputError(f"purchase year {inputs.purchase_year} is outside 0.."
                         f"{inputs.finance.analysis_years - 1}", where="purchase_year")
    if not inputs.purchase_year < end <= inputs.finance.analysis_years:
        raise InputError(f"end year {end} is not after the purchase year "
                         f"{inputs.purchase_year} and within the period", where="end_year")
    if len(inputs.trucks) != len(inputs.operations):
        raise ValueError("one AnnualOperation per truck is needed, in the same order")
    for i, (t, op) in enumerate(zip(inputs.trucks, inputs.operations)):
        if op.truck != t.name:
            raise ValueError(f"operations[{i}] is for '{op.truck}', not '{t.name}'")
        if t.powertrain not in ("diesel", "electric"):
            raise InputError("powertrain must be diesel or electric", where=f"trucks[{i}]")
        if op.operating_days <= 0:
            raise InputError("no operating days", where=f"trucks[{i}]")
        f = t.costs.financing
        where = f"trucks[{i}].costs.financing"
        if f.method == "loan" and f.loan_years > n and f.beyond_period == "error":
            raise InputError(
                f"the {f.loan_years}-year loan runs past the {n}-year analysis period; set "
                "beyond_period = 'settle' to pay the remaining balance in the last year",
                where=f"{where}.beyond_period")
        if f.method == "lease":
            if f.lease_years > n and f.beyond_period == "error":
                raise InputError(
                    f"the {f.lease_years}-year lease runs past the {n}-year analysis period; "
                    "set beyond_period = 'settle' (pay the rest in the last year) or 'drop' "
                    "(leave the later payments out)", where=f"{where}.beyond_period")
            if f.lease_years < n and f.lease_end == "return":
                raise InputError(
                    f"the lease ends in year {f.lease_years} and the truck is returned, "
                    f"before the {n}-year period ends; use lease_end = 'buy_out' or a lease "
                    "of at least the period", where=f"{where}.lease_years")
            if view == "unlevered" and t.costs.purchase_price <= 0:
                raise InputError(
                    "a leased truck needs its purchase price: the headline values every truck "
                    "bought in cash and judges the lease apart (or set finance.valuation = "
                    "'as_financed')", where=f"trucks[{i}].costs.purchase_price")
    _baseline_index(inputs)
    users = sum(1 for t, op in zip(inputs.trucks, inputs.operations)
                if _Context._uses_depot(t, op))
    served = inputs.depot.trucks_served
    if served is not None and served < users:
        raise InputError(f"{users} trucks of the scenario charge at the depot, more than the "
                         f"{served} it serves", where="depot.trucks_served")
    if inputs.days_per_year is None:
        days = {op.operating_days for op in inputs.operations}
        if max(days) - min(days) > 1e-9 * max(days):
            raise ValueError("operations differ in operating_days; pass days_per_year")


# --------------------------------------------------------------------------- parameters
def _is_float_annotation(ann) -> bool:
    if ann is float:
        return True
    origin = typing.get_origin(ann)
    if origin is Annotated:
        return _is_float_annotation(typing.get_args(ann)[0])
    if origin in (typing.Union, types.UnionType):
        return any(_is_float_annotation(a) for a in typing.get_args(ann))
    return False


def _walk(model: BaseModel, prefix: str, out: dict[str, float]) -> None:
    for name, info in type(model).model_fields.items():
        value = getattr(model, name)
        path = f"{prefix}{name}"
        if isinstance(value, BaseModel):
            _walk(value, path + ".", out)
        elif isinstance(value, list):
            for k, item in enumerate(value):
                if isinstance(item, BaseModel):
                    _walk(item, f"{path}[{k}].", out)
                elif isinstance(item, float):
                    out[f"{path}[{k}]"] = item
        elif isinstance(value, float):
            out[path] = value
        elif value is None and _is_float_annotation(info.annotation):
            out[path] = math.nan  # an optional price left out: an error only if needed


def flat_params(inputs: CostInputs) -> dict[str, float]:
    """Every numeric input of the cost model by dotted path, in SI.

    Only ``float`` fields are parameters (prices, rates, amounts, quantities); ``int``,
    ``bool`` and choice fields fix the structure (years, terms, methods) and are read from
    the models. An optional price left out is NaN (an error only if a truck needs it).

    Paths: ``finance.<field>``, ``finance.after_tax.<field>``, ``prices.<field>``,
    ``prices.electricity.bands[j].price``, ``prices.escalation.<line>``, ``depot.<field>``,
    ``trucks[i].costs.<field>`` (nested: ``.financing.loan_rate``,
    ``.residual.shares[k]``, ``.escalation.maintenance`` ...), ``route.days_per_year``,
    ``route.trips_per_day``, ``operations[i].<field>`` for the AnnualOperation quantities
    (distance, diesel_volume, def_volume, battery_energy, grid_energy_depot,
    grid_energy_public, charging_time_lost, extra_trips, depot_charging_power,
    trip_duration, battery_capacity, battery_cycle_life).

    Parameters
    ----------
    inputs : CostInputs

    Returns
    -------
    dict of str to float
        Path -> value in SI (money per SI unit for prices: currency/m³, currency/J,
        currency/m, currency/W, currency/s).
    """
    out: dict[str, float] = {}
    _walk(inputs.finance, "finance.", out)
    _walk(inputs.prices, "prices.", out)
    _walk(inputs.depot, "depot.", out)
    for i, t in enumerate(inputs.trucks):
        _walk(t.costs, f"trucks[{i}].costs.", out)
    ops = inputs.operations
    out["route.days_per_year"] = float(
        inputs.days_per_year if inputs.days_per_year is not None else ops[0].operating_days)
    out["route.trips_per_day"] = float(
        inputs.trips_per_day if inputs.trips_per_day is not None else _base_trips_per_day(ops[0]))
    for i, op in enumerate(ops):
        for name in _OP_SCALED + _OP_FIXED:
            out[f"operations[{i}].{name}"] = float(getattr(op, name))
    return out


def _may_be_negative(path: str) -> bool:
    return "escalation" in path or path.endswith(("discount_rate", ".inflation"))


#: Parameters that are shares, at most 1 (as their section models say).
_SHARES = ("purchase_tax_rate", "down_payment_share", "residual_share", "insurance_rate",
           "tax_rate", "residual.rate", "loan_rate")


def _is_share(path: str) -> bool:
    return path.endswith(_SHARES) or ".residual.shares[" in path


class _Params:
    """Read parameters: a float, or an (n,) row of draws when an override is an array."""

    def __init__(self, base: dict[str, float], overrides: dict | None):
        self.base = base
        self.values: dict[str, float | np.ndarray] = {}
        self.n: int | None = None
        for path, v in (overrides or {}).items():
            if path not in base:
                raise InputError(f"unknown parameter '{path}'", where=path)
            a = np.asarray(v, dtype=float)
            if a.ndim > 1:
                raise InputError("an override must be a number or a 1-D array", where=path)
            if a.ndim == 1:
                if self.n is not None and a.shape[0] != self.n:
                    raise InputError(f"override has {a.shape[0]} draws, others {self.n}",
                                     where=path)
                self.n = a.shape[0]
            # the smallest and largest draw say it all (min and max are NaN if any is)
            lo, hi = (float(a.min()), float(a.max())) if a.size else (0.0, 0.0)
            if math.isnan(lo):
                raise InputError("override has NaN values", where=path)
            if _may_be_negative(path):
                if lo <= -1.0:
                    raise InputError("a rate or escalation must be above -100 % per year",
                                     where=path)
            elif lo < 0:
                raise InputError("must not be negative", where=path)
            if _is_share(path) and hi > 1:
                raise InputError("a share must be at most 1", where=path)
            self.values[path] = float(a) if a.ndim == 0 else a

    def __call__(self, path: str):
        if path in self.values:
            return self.values[path]
        return self.base[path]

    def needed(self, path: str, why: str):
        v = self(path)
        if np.any(np.isnan(v)):
            raise InputError(f"this price is needed: {why}", where=path)
        return v

    def varies(self, path: str) -> bool:
        return isinstance(self.values.get(path), np.ndarray)


# --------------------------------------------------------------------------- results
@dataclass
class CashFlows:
    """Cost lines by truck and year, from :func:`compute`.

    Arrays are ``(N + 1,)`` for a case without array overrides and ``(n_draws, N + 1)``
    with them (years on the last axis). They are read-only views: lines that do not vary
    across draws are broadcast, and the data are stored years-first (``(N + 1, n_draws)``,
    see :attr:`by_year`) because numpy's inner loop then runs over the draws, which is
    several times faster than over 16 years.

    Attributes
    ----------
    years : ndarray of int
        0..N.
    trucks, powertrains : list of str
    by_year : list of dict of str to ndarray
        Per truck, line name -> amount, shape ``(N + 1, n_draws)`` or ``(N + 1, 1)``
        (years first). [currency]
    distance_by_year : list of ndarray
        Per truck, distance driven by year (0 in year 0), years first. [m]
    discount_rate : float or ndarray of shape (n_draws,)
        Rate in the case's money basis (real rate when the basis is real). [-]
    money_basis : str
    baseline : int
        Index of the reference truck.
    n_draws : int or None
        None for a case without array overrides.
    assumptions : list of str
        Statements about how the case was read (things left out, held constant).
    """

    years: np.ndarray
    trucks: list[str]
    powertrains: list[str]
    by_year: list[dict[str, np.ndarray]]
    distance_by_year: list[np.ndarray]
    discount_rate: float | np.ndarray
    money_basis: str
    baseline: int
    n_draws: int | None
    assumptions: list[str] = field(default_factory=list)

    def _out(self, a: np.ndarray) -> np.ndarray:
        """Years-first (N+1, k) -> the public years-last shape."""
        if self.n_draws is None:
            return np.asarray(a)[:, 0]
        return np.broadcast_to(a, (len(self.years), self.n_draws)).T

    @property
    def lines(self) -> list[dict[str, np.ndarray]]:
        """Per truck, line name -> amount by year, years last. [currency]"""
        return [{k: self._out(v) for k, v in d.items()} for d in self.by_year]

    @property
    def distance(self) -> list[np.ndarray]:
        """Per truck, distance by year, years last. [m]"""
        return [self._out(d) for d in self.distance_by_year]

    def _total_first(self, i: int) -> np.ndarray:
        out = np.zeros((len(self.years), 1))
        for v in self.by_year[i].values():
            out = out + v
        return out

    def _pv_first(self, a: np.ndarray):
        df = (1.0 + np.asarray(self.discount_rate, dtype=float)) ** -self.years[:, None]
        pv = np.sum(a * df, axis=0)
        return float(pv[0]) if self.n_draws is None else np.broadcast_to(pv, (self.n_draws,))

    def total(self, i: int) -> np.ndarray:
        """Net cost by year of truck i, years last. [currency]"""
        return self._out(self._total_first(i))

    def present_value(self, i: int):
        """Present value of truck i's costs at year 0. [currency]"""
        return self._pv_first(self._total_first(i))

    def discounted_distance(self, i: int):
        """Discounted distance of truck i. [m]"""
        return self._pv_first(self.distance_by_year[i])

    def levelized_cost(self, i: int):
        """Discounted cost over discounted distance. [currency/m]"""
        return self.present_value(i) / self.discounted_distance(i)


def headline_view(finance: Finance) -> str:
    """The flows behind the headline figures: ``"unlevered"`` or ``"as_financed"``."""
    return finance.valuation


def headline_method(finance: Finance, costs: TruckCosts) -> str:
    """How a truck is paid for in the headline flows: its own method when the valuation
    is as financed, ``"cash"`` when it is unlevered."""
    return "cash" if finance.valuation == "unlevered" else costs.financing.method


def _view(inputs: CostInputs, view: str | None) -> str:
    v = headline_view(inputs.finance) if view is None else view
    if v not in ("unlevered", "as_financed"):
        raise ValueError(f"unknown view '{v}'")
    return v


def compute(inputs: CostInputs, overrides: dict | None = None,
            params: dict[str, float] | None = None, totals_only: bool = False,
            view: str | None = None) -> CashFlows:
    """Yearly cost lines of every truck, vectorized over draws.

    .. math:: PV_k = \\sum_{y=0}^{N} \\sum_{l} C_{k,l,y} (1 + r)^{-y}

    Parameters
    ----------
    inputs : CostInputs
        Sections, trucks and yearly operation.
    overrides : dict of str to float or ndarray of shape (n,), optional
        Replacement values by parameter path (see :func:`flat_params`), SI units. Arrays
        give ``n`` draws; all arrays must have the same length.
    params : dict, optional
        The output of :func:`flat_params` when already made (saves the walk).
    totals_only : bool
        Sum the lines as they are made and keep only each truck's total, under the single
        line name ``"total"``. For Monte Carlo: with 100,000 draws a line is 13 MB, and
        touching fresh memory for some 50 of them costs more than the arithmetic; most
        lines are a yearly vector times a per-draw factor, and are summed in that form
        (see :func:`compute_totals`).
    view : {None, "unlevered", "as_financed"}
        ``"unlevered"``: every truck is paid in cash (no loan or lease lines);
        ``"as_financed"``: each truck's financing as given. None (default): the headline
        view of ``finance.valuation``.

    Returns
    -------
    CashFlows

    Raises
    ------
    InputError
        Inconsistent inputs (see :func:`check_inputs`), a price a truck needs is missing,
        an override is unknown or out of range.

    Notes
    -----
    Cost lines, their computations and workbook formulas are defined in
    :mod:`tco.cost_lines` (:func:`tco.cost_lines.registry`).
    The depot's costs are split equally among ``depot.trucks_served`` trucks (default: the
    electric trucks that charge at the depot). The depot's peak is taken as all served
    trucks charging at once at this truck's peak power, capped by the chargers' rating.
    """
    if _segments(inputs) is not None:
        return _compute_chain(inputs, overrides, params, totals_only, view)
    ctx, made = _make_lines(inputs, overrides, params, keep=not totals_only,
                            view=_view(inputs, view))
    p = ctx.p
    if totals_only:
        lines = [{"total": m.sums["total"].value(ctx.deflator())} for m in made]
    else:
        names = [c.name for c in _cl.registry()]
        lines = [{k: m[k] for k in names if k in m} for m in made]
        if ctx.real:
            deflator = ctx.deflator()
            lines = [{k: v * deflator for k, v in d.items()} for d in lines]
    total = inputs.finance.analysis_years
    lines = [{k: _delayed(_as_first(v, ctx.N), ctx.t0, total) for k, v in d.items()}
             for d in lines]
    rate = p("finance.discount_rate")
    return CashFlows(
        years=np.arange(total + 1), trucks=[t.name for t in inputs.trucks],
        powertrains=[t.powertrain for t in inputs.trucks], by_year=lines,
        distance_by_year=[_delayed(_as_first(ctx.distance(i), ctx.N), ctx.t0, total)
                          for i in range(len(inputs.trucks))],
        discount_rate=rate, money_basis=inputs.finance.money_basis,
        baseline=_baseline_index(inputs), n_draws=p.n, assumptions=ctx.assumptions,
    )


def _make_lines(inputs: CostInputs, overrides: dict | None, params: dict | None,
                keep: bool, view: str = "as_financed") -> tuple[_Context, list[_Lines]]:
    """Check the inputs, read the parameters and make every truck's lines."""
    check_inputs(inputs, view)
    p = _Params(params if params is not None else flat_params(inputs), overrides)
    ctx = _Context(inputs, p, view)
    made = [ctx.truck(i, keep=keep) for i in range(len(inputs.trucks))]
    return ctx, made


@dataclass
class CostTotals:
    """Each truck's net cost by year and its distance, from :func:`compute_totals`.

    Attributes
    ----------
    years : ndarray of int
        0..N.
    trucks : list of str
    flows : list of tco.finance.FlowParts
        Per truck, net cost by year as parts (formed when read; give two of them to
        :func:`tco.finance.compare_costs`). [currency, money basis of the case]
    annual_distance : list of float or ndarray of shape (n_draws,)
        Per truck, distance driven in each of years 1..N (none in year 0). [m/yr]
    discount_rate : float or ndarray of shape (n_draws,)
        Rate in the case's money basis. [-]
    money_basis : str
    baseline : int
        Index of the reference truck.
    n_draws : int or None
        None for a case without array overrides.
    assumptions : list of str
    """

    years: np.ndarray
    trucks: list[str]
    flows: list[fin.FlowParts]
    annual_distance: list
    discount_rate: float | np.ndarray
    money_basis: str
    baseline: int
    n_draws: int | None
    assumptions: list[str] = field(default_factory=list)

    @property
    def total_by_year(self) -> list[np.ndarray]:
        """Per truck, net cost by year, years first: ``(N + 1, n_draws)`` (each draw's
        years contiguous in memory), or ``(N + 1, 1)`` when it does not vary across draws.
        [currency]"""
        return [f.years_last().T for f in self.flows]


def compute_totals(inputs: CostInputs, overrides: dict | None = None,
                   params: dict[str, float] | None = None,
                   view: str | None = None) -> CostTotals:
    """Each truck's net cost by year, vectorized over draws: the lean path for Monte Carlo.

    The same totals as ``compute(inputs, overrides, params, totals_only=True)`` (to
    rounding), without the bookkeeping of :class:`CashFlows`. Most cost lines are a
    yearly vector (a price path, a one-off year) times a per-draw factor (a drawn price
    or quantity); such lines are summed as those pairs, one factor per distinct yearly
    vector, and kept as :class:`tco.finance.FlowParts` instead of one pass over
    ``(N + 1, n)`` memory per line. Lines whose yearly shape itself varies across draws
    (a drawn escalation or residual rate, battery replacements moved by drawn energy)
    are added as full arrays.

    Parameters
    ----------
    inputs, overrides, params, view
        As for :func:`compute`.

    Returns
    -------
    CostTotals

    Raises
    ------
    InputError
        As :func:`compute`.
    """
    if _segments(inputs) is not None:  # a replacement chain: the full path, as parts
        cf = compute(inputs, overrides, params, totals_only=True, view=view)
        n_years = len(cf.years)
        return CostTotals(
            years=cf.years, trucks=cf.trucks,
            flows=[fin.FlowParts(const=np.zeros(n_years), shapes=np.zeros((0, n_years)),
                                 factors=np.zeros((0, 1)), rest=np.asarray(d["total"]),
                                 scale=np.ones(n_years)) for d in cf.by_year],
            annual_distance=[_first_service(d, inputs.purchase_year)
                             for d in cf.distance_by_year],
            discount_rate=cf.discount_rate, money_basis=cf.money_basis,
            baseline=cf.baseline, n_draws=cf.n_draws, assumptions=cf.assumptions)
    if inputs.purchase_year or inputs.end_year is not None:
        raise ValueError("compute_totals covers trucks held from year 0 to the end; use "
                         "compute")
    ctx, made = _make_lines(inputs, overrides, params, keep=False, view=_view(inputs, view))
    p = ctx.p
    n = len(inputs.trucks)
    return CostTotals(
        years=np.arange(ctx.N + 1), trucks=[t.name for t in inputs.trucks],
        flows=[m.sums["total"].parts(ctx.deflator()) for m in made],
        annual_distance=[ctx.q(i, "distance") for i in range(n)],
        discount_rate=p("finance.discount_rate"), money_basis=inputs.finance.money_basis,
        baseline=_baseline_index(inputs), n_draws=p.n, assumptions=ctx.assumptions)


def _delayed(v: np.ndarray, t0: int, total: int) -> np.ndarray:
    """A years-first line of the years owned (0..end−t0) placed at years t0..end of a
    ``total``-year period (zeros before the purchase year and after the end year)."""
    after = total + 1 - t0 - v.shape[0]
    if t0 == 0 and after == 0:
        return v
    return np.concatenate([np.zeros((t0, v.shape[1])), v, np.zeros((after, v.shape[1]))],
                          axis=0)


def _as_first(v, n_years: int) -> np.ndarray:
    """A line as a 2-D years-first array: (N+1, 1) or (N+1, n)."""
    v = np.asarray(v, dtype=float)
    if v.ndim < 2:
        v = np.broadcast_to(v.reshape(-1, 1) if v.ndim == 1 else v, (n_years + 1, 1))
    return v


#: End-of-period proceeds (the ``end`` group of the default registry): taxed on their gain
#: over the tax book value in the after-tax view.
PROCEEDS = tuple(s.name for s in LINES if s.group == "end")

# line values: a yearly vector times a per-draw factor, and its helpers (tco.cost_lines)
_Outer = _cl.Outer
_scaled = _cl.scaled
_dense = _cl.dense


# A compiled loop: a replacement in year y is a step of floor(y·λ), and numpy needs about
# eight (n,) temporaries per year for it (a tenth of the Monte Carlo pass at 100,000 draws).
@njit(cache=True, nogil=True)
def _battery_replacements(lives_per_year, unit_price, costs, done, credit):
    """Battery replacements by cycles, for m draws.

    Replacements by the end of year y: ``floor(y·λ + 1e-9)`` with λ the battery lives
    used per year; the cost of year y is the new ones times ``unit_price[y]``. The unused
    life of the battery in use at the end of year N is ``clip(1 − (N·λ − done), 0, 1)``
    of its price (0 when none was replaced).

    ``lives_per_year`` (m,) or (1,); ``unit_price`` (N + 1, m) or (N + 1, 1). Out:
    ``costs`` (N + 1, m) by year, ``done`` (m,) replacements in the period, ``credit``
    (m,) value of the unused life at the end.
    """
    n_years, m = costs.shape
    wide_lives = lives_per_year.shape[0] > 1
    wide_price = unit_price.shape[1] > 1
    last_price = np.zeros(m)
    costs[0, :] = 0.0
    done[:] = 0.0
    for yr in range(1, n_years):  # years outer, draws inner: rows written in order
        row = costs[yr]
        for j in range(m):
            now = np.floor(yr * lives_per_year[j if wide_lives else 0] + 1e-9)
            count = now - done[j]
            price = unit_price[yr, j if wide_price else 0]
            row[j] = count * price
            last_price[j] = price if count > 0 else last_price[j]
            done[j] = now
    for j in range(m):
        lives = lives_per_year[j if wide_lives else 0]
        left = min(max(1.0 - ((n_years - 1) * lives - done[j]), 0.0), 1.0)
        credit[j] = left * last_price[j] if done[j] > 0 else 0.0


class _Sum:
    """A running sum of lines, years first, kept in parts until it is read.

    * ``const`` (N+1, 1): lines that do not vary across draws;
    * ``pairs``: for lines ``v ⊗ a`` (a yearly column times a per-draw row), the sum of
      the rows ``a`` for each distinct yearly vector ``v``;
    * ``rest`` (N+1, n): lines given as full arrays. The first is kept by reference and
      the next ones make a new array: a line's array is never written into.

    :meth:`parts` hands them over as :class:`tco.finance.FlowParts`, which forms the
    flows in one compiled pass (or never writes them out at all, for
    :func:`tco.finance.compare_costs`): a line costs about one (n,) addition instead of a
    pass over (N+1, n) memory.
    """

    def __init__(self, n_years: int):
        self.const = np.zeros((n_years + 1, 1))
        self.pairs: dict[bytes, tuple[np.ndarray, np.ndarray]] = {}
        self.rest: np.ndarray | None = None

    def add(self, value) -> None:
        if isinstance(value, _Outer):
            self._outer(value.v, value.a)
        elif isinstance(value, tuple):
            for term in value:
                self.add(term)
        else:
            self._array(value)

    def _array(self, v) -> None:
        v = np.asarray(v, dtype=float)
        if v.ndim < 2 or v.shape[1] == 1:
            self.const = self.const + (v.reshape(-1, 1) if v.ndim == 1 else v)
        else:
            self.rest = v if self.rest is None else self.rest + v

    def _outer(self, v, a) -> None:
        v = np.asarray(v, dtype=float)
        a = np.asarray(a, dtype=float)
        if a.size == 1 or v.shape[1] != 1:  # not a column times a row of draws
            self._array(v * a)
            return
        key = v.tobytes()
        if key in self.pairs:
            self.pairs[key] = (v, self.pairs[key][1] + a)
        else:
            self.pairs[key] = (v, a)

    def parts(self, scale: np.ndarray | None = None) -> fin.FlowParts:
        """The sum as parts, each year times ``scale`` ((N+1, 1) or (N+1, n), e.g. the
        deflator of the real money basis) if given."""
        n_years = len(self.const)
        if scale is not None and scale.shape[1] > 1:  # a yearly factor per draw
            flows = self.value() * scale
            return fin.FlowParts(np.zeros(n_years), np.zeros((0, n_years)),
                                 np.zeros((0, flows.shape[1])), flows, np.ones(n_years))
        n = self.rest.shape[1] if self.rest is not None else \
            next(iter(self.pairs.values()))[1].shape[0] if self.pairs else 1
        return fin.FlowParts(
            const=np.ascontiguousarray(self.const[:, 0]),
            shapes=np.array([v[:, 0] for v, _ in self.pairs.values()]).reshape(-1, n_years),
            factors=np.array([a for _, a in self.pairs.values()]).reshape(-1, n),
            rest=self.rest,
            scale=np.ones(n_years) if scale is None else np.ascontiguousarray(scale[:, 0]))

    def value(self, scale: np.ndarray | None = None) -> np.ndarray:
        """The sum, (N+1, 1) or (N+1, n), times ``scale`` if given. A sum over draws
        comes out years first with each draw's years contiguous in memory."""
        if not self.pairs and self.rest is None:
            return self.const if scale is None else self.const * scale
        return self.parts(scale).years_last().T


class _Lines(dict):
    """A truck's lines as they are made, with running sums of the total and, for the
    after-tax view, of the deductible lines and the end-of-life credits.

    With ``keep=True`` the lines are stored as arrays (the table); with ``keep=False``
    only the total is kept, as a :class:`_Sum` of the lines in their factored form.
    """

    def __init__(self, n_years: int, keep: bool, tax: bool, lines=None):
        super().__init__()
        self.keep, self.tax = keep, tax
        self.sums = {k: _Sum(n_years) for k in ("total", "ded", "cred")}
        lines = _cl.registry() if lines is None else lines
        self._ded = {c.name for c in lines if c.deductible}
        self._proceeds = {c.name for c in lines if c.group == "end"}

    @property
    def deductible(self) -> np.ndarray:
        return self.sums["ded"].value()

    @property
    def credits(self) -> np.ndarray:
        return self.sums["cred"].value()

    def __setitem__(self, name: str, v) -> None:
        if self.keep:
            v = _dense(v)
            super().__setitem__(name, v)
        else:
            self.sums["total"].add(v)
        if self.tax and name in self._ded:
            self.sums["ded"].add(v)
        if self.tax and name in self._proceeds:
            self.sums["cred"].add(v)

    def update(self, other: dict) -> None:  # type: ignore[override]
        for k, v in other.items():
            self[k] = v


def _first(a) -> np.ndarray:
    """A years-last result of :mod:`tco.finance` ((N+1,) or (n, N+1)) as years-first."""
    a = np.asarray(a, dtype=float)
    return a[:, None] if a.ndim == 1 else a.T


class _Context:
    """The arithmetic of :func:`compute`; one instance per call.

    Layout: years first. Year vectors are (N+1, 1) columns; a parameter is a float or an
    (n,) row of draws; a line is (N+1, 1) or (N+1, n). :meth:`at` takes year t of a line
    as a (1,) or (n,) row.
    """

    def __init__(self, inputs: CostInputs, p: _Params, view: str = "as_financed"):
        self.inputs, self.p = inputs, p
        self.view = view
        # Bought in year t0: the arithmetic runs over the years owned, 0..N (N = the
        # period's years after the purchase), priced at year t0; compute() places them.
        self.t0 = inputs.purchase_year
        self.N = _end_year(inputs) - self.t0
        self.y = np.arange(self.N + 1, dtype=float)[:, None]
        self.e0 = self.unit(0)
        self.eN = self.unit(self.N)
        self.op_mask = (self.y >= 1).astype(float)
        self.real = inputs.finance.money_basis == "real"
        self.assumptions: list[str] = []
        self._scales: dict[int, float | np.ndarray] = {}
        ops = inputs.operations
        self._depot: dict | None = None
        self.served = inputs.depot.trucks_served or max(1, sum(
            1 for t, op in zip(inputs.trucks, ops) if self._uses_depot(t, op)))

    # helpers -------------------------------------------------------------------------
    @staticmethod
    def at(line, t: int) -> np.ndarray:
        """Year t of a line as a (1,) or (n,) row."""
        return np.asarray(line, dtype=float)[t]

    def unit(self, t: int) -> np.ndarray:
        e = np.zeros((self.N + 1, 1))
        e[t] = 1.0
        return e

    def deflator(self) -> np.ndarray | None:
        """(1 + inflation)^-y for the real money basis, None for the nominal one."""
        return (1.0 + self.p("finance.inflation")) ** -(self.y + self.t0) if self.real \
            else None

    def esc(self, path: str):
        """Nominal escalation rate of a line (real ones are turned nominal)."""
        e = self.p(path)
        return (1.0 + e) * (1.0 + self.p("finance.inflation")) - 1.0 if self.real else e

    def running(self, path: str) -> np.ndarray:
        """(1 + e)^y in years 1..N, 0 in year 0 (years counted from today): the running
        cost of year y, booked at its end, at that moment's price (as a one-off)."""
        return self.op_mask * (1.0 + self.esc(path)) ** (self.y + self.t0)

    def one_off(self, path: str) -> np.ndarray:
        """(1 + e)^t for a one-off bought at the end of year t (counted from today)."""
        return (1.0 + self.esc(path)) ** (self.y + self.t0)

    @staticmethod
    def _uses_depot(truck: TruckSpec, op: AnnualOperation) -> bool:
        return truck.powertrain == "electric" and op.grid_energy_depot > 0

    def scale(self, i: int):
        if i not in self._scales:  # per truck: (n,) rows are worth not redoing
            op = self.inputs.operations[i]
            s = self.p("route.days_per_year") / op.operating_days
            base_tpd = _base_trips_per_day(op)
            if base_tpd > 0:
                s = s * (self.p("route.trips_per_day") / base_tpd)
            self._scales[i] = s
        return self._scales[i]

    def q(self, i: int, name: str):
        """Quantity of truck i's operation; yearly ones scaled to the route's days/trips."""
        v = self.p(f"operations[{i}].{name}")
        if name not in _OP_SCALED or (isinstance(v, float) and v == 0.0):
            return v  # a quantity the truck does not have stays one zero, not one per draw
        return v * self.scale(i)

    def distance(self, i: int) -> np.ndarray:
        return self.q(i, "distance") * self.op_mask

    # depot ---------------------------------------------------------------------------
    def depot_plan(self) -> dict:
        """The depot's chargers bought at 0, L, 2L... before the end and sold at the end of
        each life and of the period; each truck's equal share of them (cached per call).

        Returns
        -------
        dict
            ``capex`` and ``residual`` by year, years first [currency, nominal], for the
            whole depot; ``share`` = 1 / trucks served [-]; ``assets`` for tax
            depreciation, (basis [currency], year bought, fractions), already one
            truck's share.
        """
        if self._depot is not None:
            return self._depot
        d, p, N = self.inputs.depot, self.p, self.N
        share = 1.0 / self.served
        n = d.chargers
        hw = n * p("depot.hardware_cost")
        inst = n * p("depot.installation_cost")
        grid = p("depot.grid_connection_cost")
        rs = p("depot.residual_share")
        grow = self.one_off("prices.escalation.equipment")
        installs = list(range(0, N, d.life))  # bought at 0, L, 2L ... before the end
        capex = np.zeros((N + 1, 1))
        residual = np.zeros((N + 1, 1))
        assets = []  # (basis, year bought, fractions): straight line over the life
        sl = fin.depreciation_fractions("straight_line", d.life)
        for t in installs:
            cost_t = (hw + inst) * self.at(grow, t)
            capex = capex + self.unit(t) * cost_t
            assets.append((cost_t + (grid if t == 0 else 0.0), t, sl))
            if t > 0:  # the previous hardware ends its life now
                residual = residual - self.unit(t) * (rs * hw * self.at(grow, t - d.life))
        t_last = installs[-1]
        age = N - t_last
        residual = residual - self.eN * (
            hw * self.at(grow, t_last) * (1.0 - (1.0 - rs) * age / d.life))
        self._depot = {"capex": capex, "residual": residual, "share": share,
                       "assets": [(b * share, t, f) for b, t, f in assets]}
        return self._depot

    # one truck -----------------------------------------------------------------------
    def truck(self, i: int, keep: bool = True) -> _Lines:
        """Truck i's lines: its context, then every line of the registry
        (:func:`tco.cost_lines.registry`) in the order of :func:`_evaluation_order`."""
        lines = _cl.registry()
        tc = TruckContext(self, i, keep, lines)
        for spec in _evaluation_order(lines):
            v = spec.compute(tc)
            if v is not None:
                tc.lines[spec.name] = v
        return tc.lines

    def _tax_fractions(self):
        a = self.inputs.finance.after_tax
        return fin.depreciation_fractions(a.depreciation, a.depreciation_years,
                                          a.declining_balance_percent, a.macrs_class)

    def aged(self, i: int) -> dict | None:
        """Truck i's yearly en-route energy, driver time and depot-energy share as its
        battery ages (:mod:`tco.battery`), years first; None for an operation without
        them. The yearly shapes are the base case's; a draw moves them by its depot
        energy over the base one (days, trips and energy use)."""
        op = self.inputs.operations[i]
        if len(op.public_energy_by_year) != self.N:
            return None
        col = self._col
        if op.grid_energy_depot > 0:
            factor = self.q(i, "grid_energy_depot") / op.grid_energy_depot
            depot = col(np.asarray(op.depot_energy_by_year) / op.grid_energy_depot)
        else:
            factor = self.scale(i)
            depot = col(np.ones(self.N))
        return {"public": col(op.public_energy_by_year), "time": col(op.enroute_time_by_year),
                "depot": depot, "factor": factor}

    def _col(self, by_year) -> np.ndarray:
        """Values of years 1..N as a years-first column with 0 in year 0."""
        return np.concatenate([[0.0], np.asarray(by_year, dtype=float)])[:, None]

    def depot_price(self, i: int):
        """Charging-profile-weighted depot energy price of truck i. [currency/J]"""
        tariff = self.inputs.prices.electricity
        profile = np.asarray(self.inputs.operations[i].charging_profile, dtype=float)
        covered = np.zeros(24, dtype=bool)
        price = 0.0
        for j, band in enumerate(tariff.bands):
            w = float(profile[band.hours].sum())
            covered[band.hours] = True
            if w > 0:
                price = price + w * self.p(f"prices.electricity.bands[{j}].price")
        rest = float(profile[~covered].sum())
        if rest > 1e-12:
            hours = [h for h in range(24) if not covered[h] and profile[h] > 0]
            flat = self.p.needed(
                "prices.electricity.energy_price",
                f"{self.inputs.trucks[i].name} charges at the depot in hours {hours}, which "
                "no time-of-use band covers")
            price = price + rest * flat
        return price

    def _residual_shares(self, i: int, t: TruckSpec, c: TruckCosts) -> np.ndarray:
        """Value as a share of the purchase price at ages 0..N, years first. [-]"""
        N, p = self.N, self.p
        tp = f"trucks[{i}].costs.residual"
        if c.residual.method == "declining_balance":
            return _as_first((1.0 - p(f"{tp}.rate")) ** self.y, N)
        k = len(c.residual.shares)
        if k < N:
            self.assumptions.append(
                f"{t.name}: the residual value table stops at age {k}; later ages keep its "
                "last share")
        rows = [1.0] + [p(f"{tp}.shares[{min(a, k) - 1}]") for a in range(1, N + 1)]
        rows = np.broadcast_arrays(*[np.atleast_1d(np.asarray(v, dtype=float)) for v in rows])
        return np.stack(rows, axis=0)

    def _battery(self, i: int, t: TruckSpec, c: TruckCosts, op: AnnualOperation) -> dict:
        b = c.battery_replacement
        if b.when == "never" or op.battery_capacity <= 0:
            return {}
        N, p, y = self.N, self.p, self.y
        tp = f"trucks[{i}].costs"
        cap = self.q(i, "battery_capacity")
        unit_price = self.one_off(f"{tp}.escalation.battery") * (
            p(f"{tp}.battery_replacement.cost")
            + p(f"{tp}.battery_replacement.cost_per_kwh") * cap)
        credit_on = b.credit_remaining_life
        if b.when == "year":
            Y = b.year
            if Y > N:
                self.assumptions.append(
                    f"{t.name}: the battery replacement of year {Y} falls after the {N}-year "
                    "period and is not counted")
                return {}
            out = {"battery_replacement": _Outer(self.unit(Y), self.at(unit_price, Y))}
            if credit_on:
                left = max(0.0, 1.0 - (N - Y) / Y)  # the new battery lasts as long as the first
                out["battery_remaining_life"] = _Outer(self.eN, -left * self.at(unit_price, Y))
            return out
        if b.when == "range":  # replaced before the year the day would no longer fit
            repl = np.zeros((N + 1, 1))
            for Y in op.battery_replacement_years:
                repl = repl + self.unit(Y) * self.at(unit_price, Y)
            out = {"battery_replacement": repl}
            if credit_on and op.battery_replacement_years and len(op.state_of_health) > N:
                eol = op.eol_state_of_health
                left = min(max((float(op.state_of_health[N]) - eol) / (1.0 - eol), 0.0), 1.0)
                Y = op.battery_replacement_years[-1]
                out["battery_remaining_life"] = _Outer(self.eN, -left * self.at(unit_price, Y))
            return out
        # cycles: the battery is replaced at its end of life, when the lives it has used
        # (full equivalent cycles on the discharged energy over the cycle life, plus
        # calendar fade over the state of health it may lose; tco.battery) pass a whole
        # number. Operations without a discharge figure count their net throughput.
        life = self.q(i, "battery_cycle_life")
        thru = "battery_discharge_energy" if op.battery_discharge_energy > 0 \
            else "battery_energy"
        per_year = self.q(i, thru) / cap
        with np.errstate(invalid="ignore", divide="ignore"):
            # (a finite cycle life given as one number: the same values without np.where)
            used = per_year / life if isinstance(life, float) and math.isfinite(life) \
                else np.where(np.isfinite(life), per_year / life, 0.0)
            lives_per_year = used + p(f"operations[{i}].calendar_fade") / (1.0 - p(
                f"operations[{i}].eol_state_of_health"))
        m = int(np.prod(np.broadcast_shapes(np.shape(lives_per_year), unit_price.shape[1:])))
        repl = np.empty((N + 1, m))
        done = np.empty(m)  # replacements in the period
        credit = np.empty(m)  # unused life of the battery in use at the end, if replaced
        _battery_replacements(np.ascontiguousarray(np.atleast_1d(lives_per_year), dtype=float),
                              np.ascontiguousarray(unit_price, dtype=float), repl, done,
                              credit)
        out = {"battery_replacement": repl}
        if not done.any() and np.max(lives_per_year) > 0:
            years = 1.0 / float(np.max(lives_per_year))
            self.assumptions.append(
                f"{t.name}: the battery reaches its end of life (cycles and calendar ageing) "
                f"after about {fm.number(years, 1)} years, after the {N}-year period: no "
                "replacement "
                "counted")
        if credit_on:
            out["battery_remaining_life"] = _Outer(self.eN, -credit)
        return out

    def _replacement_assets(self, cost: np.ndarray) -> list:
        """Each year's battery replacements as an asset for tax depreciation: placed in
        service in that year, depreciated with the truck's schedule from the next."""
        cost = np.asarray(cost, dtype=float)
        out = []
        for yr in range(1, self.N + 1):
            row = cost[yr]
            if np.any(row != 0):
                out.append((row if row.size > 1 else float(row[0]), yr,
                            self._tax_fractions()))
        return out


_UNSET = object()


class TruckContext:
    """What the cost lines of one truck are computed from (:mod:`tco.cost_lines`).

    Assembled by :meth:`_Context.truck`; each line's ``compute`` reads it. Layout: years
    first, year vectors are (N+1, 1) columns, a parameter is a float or an (n,) row of
    draws. Quantities several lines share (the loan schedule, the value by age, the
    battery replacements, the depot plan, the tax depreciation) are worked out once, when
    a line first asks.

    Attributes
    ----------
    i : int
        Truck index.
    t, op, c, f
        The truck (:class:`TruckSpec`), its :class:`~tco.operation.AnnualOperation`, its
        :class:`~tco.scenario.costs.TruckCosts` and the financing of the view (a truck
        paid in cash in the unlevered view).
    tp : str
        Parameter path prefix of the truck's costs (``trucks[i].costs``).
    p : callable
        Parameter reader (SI; floats or (n,) rows of draws).
    N : int
        Years owned after the purchase; ``y`` the (N+1, 1) column of years 0..N.
    keep : bool
        The lines are kept as a table (False: only their sum, for Monte Carlo).
    lines : _Lines
        The lines made so far (lines with ``reads_lines`` read them).
    price, taxes, grant, credit : float or ndarray
        Purchase price (grown to the purchase year), purchase taxes and fees, grant and tax
        credit. [currency]
    buyout_year : int or None
        Year of a lease buy-out inside the period.
    owned_at_end : bool
        The truck is owned at the end of the period (sold at its residual value).
    """

    def __init__(self, ctx: "_Context", i: int, keep: bool, lines):
        self.ctx, self.i, self.keep = ctx, i, keep
        inputs, p = ctx.inputs, ctx.p
        self.inputs, self.p, self.N, self.y = inputs, p, ctx.N, ctx.y
        self.e0, self.eN, self.op_mask = ctx.e0, ctx.eN, ctx.op_mask
        self.unit, self.at, self.running, self.one_off = (ctx.unit, ctx.at, ctx.running,
                                                          ctx.one_off)
        self.served = ctx.served
        t = self.t = inputs.trucks[i]
        op = self.op = inputs.operations[i]
        c = self.c = t.costs
        f = c.financing
        if ctx.view == "unlevered" and f.method != "cash":
            f = f.model_copy(update={"method": "cash"})  # paid in cash: financing apart
        self.f = f
        tp = self.tp = f"trucks[{i}].costs"
        self.lines = _Lines(ctx.N, keep, tax=inputs.finance.after_tax.enabled, lines=lines)
        price = p(f"{tp}.purchase_price")
        if ctx.t0:  # bought later: today's price grown to the year of purchase
            price = price * ctx.at(ctx.one_off("prices.escalation.equipment"), 0)
        self.price = price
        self.taxes = price * p(f"{tp}.purchase_tax_rate") + p(f"{tp}.purchase_fees")
        self.grant = p(f"{tp}.grant")
        self.credit = p(f"{tp}.tax_credit")
        self.buyout_year = None
        if f.method == "lease" and f.lease_end == "buy_out":
            T, N = f.lease_years, ctx.N
            self.buyout_year = T if T <= N else (N if f.beyond_period == "settle" else None)
        self.owned_at_end = f.method != "lease" or self.buyout_year is not None
        self.uses_depot = ctx._uses_depot(t, op)
        self._cache: dict = {}
        if f.method == "lease" and (c.purchase_tax_rate or c.purchase_fees or c.grant
                                    or c.tax_credit):
            self.note(f"{t.name}: leased, so purchase taxes, fees, grant and tax credit belong "
                      "to the lessor (reflected in the lease payment) and are not counted")

    # quantities ------------------------------------------------------------------------
    def note(self, text: str) -> None:
        """Add a statement about how the case was read (summary.json assumptions)."""
        self.ctx.assumptions.append(text)

    @property
    def scale(self):
        """Yearly quantities scaled to the route's days and trips. [-]"""
        return self.ctx.scale(self.i)

    def q(self, name: str):
        """A quantity of the truck's operation; yearly ones scaled to the route (SI)."""
        return self.ctx.q(self.i, name)

    def has(self, name: str) -> bool:
        """The operation has this yearly quantity (or it varies across draws)."""
        return getattr(self.op, name) > 0 or self.p.varies(f"operations[{self.i}].{name}")

    def depot_price(self):
        """Charging-profile-weighted depot energy price. [currency/J]"""
        return self.ctx.depot_price(self.i)

    @property
    def tax_rate(self):
        """Income tax rate. [-]"""
        return self.p("finance.after_tax.tax_rate")

    def _cached(self, key: str, make):
        v = self._cache.get(key, _UNSET)
        if v is _UNSET:
            v = self._cache[key] = make()
        return v

    @property
    def aged(self) -> dict | None:
        """Yearly en-route energy, driver time and depot share as the battery ages
        (:meth:`_Context.aged`), or None."""
        return self._cached("aged", lambda: self.ctx.aged(self.i))

    @property
    def value_share(self) -> tuple[np.ndarray, np.ndarray]:
        """The truck's value as a share of its price at ages 0..N and at the start of
        each year (0 in year 0), years first. [-]"""
        def make():
            share_age = self.ctx._residual_shares(self.i, self.t, self.c)
            start = np.concatenate([np.zeros((1, share_age.shape[1])), share_age[:-1]])
            return share_age, start
        return self._cached("value_share", make)

    @property
    def loan(self) -> dict:
        """The loan: ``principal`` borrowed [currency], ``interest`` and ``repaid``
        principal by year (the balance left after the period settled in its last year)."""
        return self._cached("loan", self._loan)

    def _loan(self) -> dict:
        p, f, tp, N = self.p, self.f, self.tp, self.N
        due = np.maximum(self.price + self.taxes - self.grant, 0.0)
        principal = due * (1.0 - p(f"{tp}.financing.down_payment_share"))
        rate_path = f"{tp}.financing.loan_rate"
        # For the totals, a loan at a rate that does not vary is the schedule of a loan
        # of 1 times each draw's principal (the schedule is linear in the principal).
        per_unit = not self.keep and not p.varies(rate_path)
        s = fin.loan_schedule(1.0 if per_unit else principal, p(rate_path), f.loan_years,
                              f.payments_per_year, N)
        times = (lambda x: _Outer(x, principal)) if per_unit else (lambda x: x)
        interest = times(_first(s.interest))
        repaid = _first(s.principal)
        if f.loan_years > N:  # beyond_period == "settle" (checked)
            repaid = repaid + self.eN * self.at(_first(s.balance), N)
            self.note(f"{self.t.name}: the loan's balance left after year {N} is paid off in "
                      f"year {N}")
        return {"principal": principal, "interest": interest, "repaid": times(repaid)}

    @property
    def interest(self):
        """Loan interest by year (0.0 without a loan)."""
        return self.loan["interest"] if self.f.method == "loan" else 0.0

    @property
    def battery(self) -> dict:
        """``battery_replacement`` and ``battery_remaining_life`` lines, those that apply."""
        return self._cached("battery", lambda: self.ctx._battery(self.i, self.t, self.c,
                                                                 self.op))

    @property
    def depot_plan(self) -> dict:
        """The depot's chargers and their share (:meth:`_Context.depot_plan`)."""
        return self.ctx.depot_plan()

    def depot_part(self, v):
        """This truck's part of a depot line already divided equally (None when the truck
        does not charge at the depot; a shared-depot schedule's share when set)."""
        if not self.uses_depot:
            return None
        if self.op.depot_cost_share is None:
            return v
        return _scaled(v, self.op.depot_cost_share * self.served)  # tco.depot set it

    @property
    def depreciation(self) -> tuple[np.ndarray, float | np.ndarray]:
        """Tax depreciation by year, years first, and the tax book value left at the end,
        of the truck (or lease buy-out), its depot share and each battery replacement.
        [currency]"""
        return self._cached("depreciation", self._depreciation)

    def _depreciation(self):
        ctx, N = self.ctx, self.N
        assets: list = []  # (basis, year bought, fractions)
        if self.f.method != "lease":
            assets.append((self.price + self.taxes - self.grant, 0, ctx._tax_fractions()))
        elif self.buyout_year is not None:
            assets.append((self.p(f"{self.tp}.financing.lease_buyout_price"),
                           self.buyout_year, ctx._tax_fractions()))
        if self.uses_depot:
            d = self.depot_plan["assets"]
            if self.op.depot_cost_share is None:
                assets += d
            else:
                f = self.op.depot_cost_share * self.served
                assets += [(b * f, yr, fr) for b, yr, fr in d]
        if "battery_replacement" in self.battery:  # capitalised: depreciated like the truck
            assets += ctx._replacement_assets(_dense(self.battery["battery_replacement"]))
        dep = np.zeros((N + 1, 1))
        book_left = 0.0
        for basis, start, fractions in assets:  # bases are floats or (1,)/(n,) rows
            d, left = fin.depreciation_flows(basis, start, fractions, N)
            dep = dep + _first(d)
            book_left = book_left + left
        return dep, book_left

# --------------------------------------------------------------------------- break-even
#: Break-even quantities, the parameter they move, and the searched range as multiples of
#: the case's own value (a tool assumption of what is sensible).
BREAK_EVEN_QUANTITIES = {
    "diesel_price": ("prices.diesel", (0.0, 10.0)),
    "electricity_price": ("depot energy prices (all bands together)", (0.0, 10.0)),
    "purchase_price": ("trucks[i].costs.purchase_price", (0.0, 10.0)),
    "annual_distance": ("route.days_per_year", (0.02, 5.0)),
}


def _electricity_paths(inputs: CostInputs, base: dict) -> list[str]:
    paths = [f"prices.electricity.bands[{j}].price"
             for j in range(len(inputs.prices.electricity.bands))]
    if not math.isnan(base["prices.electricity.energy_price"]):
        paths.append("prices.electricity.energy_price")
    return paths


def break_even(inputs: CostInputs, quantity: str, truck: int,
               params: dict[str, float] | None = None) -> fin.BreakEven:
    """The value of one input at which truck ``truck`` costs the same as the baseline.

    The difference PV(truck) − PV(baseline) is evaluated on a grid over a sensible range
    in one vectorized call, and the sign change nearest the case's own value is refined
    with ``scipy.optimize.brentq`` (:func:`tco.finance.find_break_even`).

    Parameters
    ----------
    inputs : CostInputs
    quantity : {"diesel_price", "electricity_price", "purchase_price", "annual_distance"}
        ``diesel_price``: ``prices.diesel`` [currency/m³], searched over 0..10× the case.
        ``electricity_price``: all depot energy prices scaled together, reported as the
        truck's charging-profile-weighted depot price [currency/J], 0..10×.
        ``purchase_price``: this truck's purchase price [currency], 0..10×.
        ``annual_distance``: ``route.days_per_year`` varied over 0.02..5×, reported as
        the baseline truck's distance per year [m/yr].
    truck : int
        Index of the compared truck (not the baseline).
    params : dict, optional
        Output of :func:`flat_params`.

    Returns
    -------
    BreakEven
        Value in the units above, or None with the reason.
    """
    base = params if params is not None else flat_params(inputs)
    ref = _baseline_index(inputs)
    lo_k, hi_k = BREAK_EVEN_QUANTITIES[quantity][1]

    def diff_for(make_overrides):
        def many(x):
            cf = compute(inputs, make_overrides(np.asarray(x, dtype=float)), base)
            return cf.present_value(truck) - cf.present_value(ref)

        def one(x):
            return float(many(np.array([x]))[0])
        return many, one

    if quantity == "electricity_price":
        paths = _electricity_paths(inputs, base)
        if not paths:
            return fin.BreakEven(None, "the scenario has no depot electricity price")
        many, one = diff_for(lambda k: {q: base[q] * k for q in paths})
        r = fin.find_break_even(many, one, lo_k, hi_k, 1.0,
                                range_text=f"{fm.plain(lo_k)} and {fm.plain(hi_k)} times "
                                           "the scenario's "
                                           "depot energy prices")
        if r.value is None:
            return r
        who = truck if inputs.operations[truck].grid_energy_depot > 0 else ref
        weighted = _Context(inputs, _Params(base, None)).depot_price(who)
        return fin.BreakEven(r.value * float(weighted), r.note)
    if quantity == "diesel_price":
        path = "prices.diesel"
    elif quantity == "purchase_price":
        path = f"trucks[{truck}].costs.purchase_price"
    elif quantity == "annual_distance":
        path = "route.days_per_year"
    else:
        raise ValueError(f"unknown break-even quantity '{quantity}'")
    x0 = base[path]
    if math.isnan(x0):
        return fin.BreakEven(None, f"the scenario has no {path}")
    if x0 <= 0:
        return fin.BreakEven(None, f"{path} is zero in the scenario; no range to search")
    many, one = diff_for(lambda x: {path: x})
    r = fin.find_break_even(many, one, lo_k * x0, hi_k * x0, x0,
                            range_text=f"{fm.plain(lo_k)} and {fm.plain(hi_k)} times the "
                                       "scenario's value")
    if quantity == "annual_distance" and r.value is not None:
        ctx = _Context(inputs, _Params(base, {path: r.value}))
        return fin.BreakEven(float(ctx.q(ref, "distance")), r.note)
    return r


# --------------------------------------------------------------------------- evaluate
@dataclass
class TruckMetrics:
    """Money metrics of one truck (money basis of the case).

    Attributes
    ----------
    name, powertrain : str
    present_value : float
        Present value of all costs at year 0. [currency]
    undiscounted_total : float
        Sum of the yearly net costs. [currency]
    levelized_cost : float
        Discounted cost over discounted distance. [currency/m]
    annual_distance : float
        Distance in the first year. [m/yr]
    present_value_by_line : dict of str to float
        Present value of each line. [currency]
    """

    name: str
    powertrain: str
    present_value: float
    undiscounted_total: float
    levelized_cost: float
    annual_distance: float
    present_value_by_line: dict[str, float]


@dataclass
class Comparison:
    """One truck against the baseline (differences are truck − baseline).

    Attributes
    ----------
    truck, baseline : str
    present_value_difference : float
        Positive: the truck costs more. [currency]
    levelized_cost_difference : float
        [currency/m]
    extra_upfront_cost : float
        Year-0 net cost difference. [currency]
    simple_payback_year, discounted_payback_year : int or None
        First year from which the cumulative saving over the baseline stays ≥ 0; None:
        not within the period. [yr]
    payback_note : str
    irr : float or None
        IRR of the savings flows (baseline cost − truck cost by year). [-/yr]
    irr_note : str
    break_even : dict of str to BreakEven
        See :func:`break_even` for the units.
    """

    truck: str
    baseline: str
    present_value_difference: float
    levelized_cost_difference: float
    extra_upfront_cost: float
    simple_payback_year: int | None
    discounted_payback_year: int | None
    payback_note: str
    irr: float | None
    irr_note: str
    break_even: dict[str, fin.BreakEven]


@dataclass
class TruckFinancing:
    """A truck's loan or lease judged against paying cash, and its equity view.

    Attributes
    ----------
    name, method : str
        Truck name; ``"loan"`` or ``"lease"``.
    cost_of_debt : float
        Pre-tax borrowing rate, nominal. [-/yr]
    after_tax_cost_of_debt : float
        ``cost_of_debt × (1 − tax rate)`` (tax rate 0 in the pre-tax view), in the money
        basis of the case (turned real with the inflation rate when the basis is real).
        [-/yr]
    flows : ndarray, shape (N + 1,)
        Financed net cost minus the same truck's net cost paid in cash, by year (loan
        received negative; repayments, interest, lease payments, their tax effects and
        the lost depreciation and residual value positive). [currency]
    present_value_at_cost_of_debt : float
        Present value of ``flows`` at the after-tax cost of debt, a nominal yearly rate
        compounded per instalment (monthly for a lease), each instalment at its month:
        positive, the loan or lease costs more than paying cash; negative, it is worth
        taking. [currency]
    present_value_unlevered, present_value_as_financed : float
        The truck's present value of costs at the discount rate, paid in cash and as
        financed (the equity view). [currency]
    """

    name: str
    method: str
    cost_of_debt: float
    after_tax_cost_of_debt: float
    flows: np.ndarray
    present_value_at_cost_of_debt: float
    present_value_unlevered: float
    present_value_as_financed: float


@dataclass
class FinancingResult:
    """Financing shown apart from the headline (see :func:`financing_view`).

    Attributes
    ----------
    valuation : str
        The headline view, ``"unlevered"`` or ``"as_financed"``.
    trucks : list of TruckFinancing
        The trucks with a loan or lease.
    comparisons : list of dict
        Per non-baseline truck: ``truck``, ``baseline``,
        ``present_value_difference_unlevered``, ``present_value_difference_as_financed``
        [currency], ``irr_unlevered``, ``irr_as_financed`` [-/yr or None] and their notes.
    """

    valuation: str
    trucks: list[TruckFinancing]
    comparisons: list[dict]


@dataclass
class CashflowResult:
    """The purchase case of a scenario.

    Attributes
    ----------
    table : pandas.DataFrame
        Tidy: columns ``truck``, ``year`` (0 = purchase), ``line``, ``amount``
        [currency, money basis of the case]; lines zero in every year are left out.
    trucks : list of TruckMetrics
    comparisons : list of Comparison
        Every truck other than the baseline.
    baseline : str
    money_basis : str
    discount_rate : float
    analysis_years : int
    assumptions : list of str
    flows : CashFlows
        The headline flows (``finance.valuation``).
    financing : FinancingResult or None
        Loans and leases judged apart, and the other view's figures.
    valuation : str
        The flows behind the headline: ``"unlevered"`` or ``"as_financed"``.
    """

    table: pd.DataFrame
    trucks: list[TruckMetrics]
    comparisons: list[Comparison]
    baseline: str
    money_basis: str
    discount_rate: float
    analysis_years: int
    assumptions: list[str]
    flows: CashFlows
    financing: FinancingResult | None = None
    valuation: str = "unlevered"

    def yearly_totals(self) -> pd.DataFrame:
        """Net cost by year (rows) and truck (columns). [currency]"""
        return self.table.pivot_table(index="year", columns="truck", values="amount",
                                      aggfunc="sum", fill_value=0.0).reindex(
            index=range(self.analysis_years + 1), fill_value=0.0)


def evaluate(inputs: CostInputs, break_evens: bool = True,
             financing: bool = True) -> CashflowResult:
    """Cash flows, metrics, comparisons and break-even values of the scalar case.

    Parameters
    ----------
    inputs : CostInputs
    break_evens : bool
        Search the break-even values (four root searches per compared truck).
    financing : bool
        Judge loans and leases apart (:func:`financing_view`: one more pass of the model
        when a truck is financed); False leaves ``CashflowResult.financing`` None.

    Returns
    -------
    CashflowResult
    """
    params = flat_params(inputs)
    cf = compute(inputs, params=params)
    rate = float(cf.discount_rate)
    rows = []
    metrics = []
    for i, name in enumerate(cf.trucks):
        shown = {k: v for k, v in cf.lines[i].items() if np.any(v != 0)}  # table order
        by_line = {k: float(fin.present_value(v, rate)) for k, v in shown.items()}
        rows += [(name, int(yr), k, float(v[yr]) + 0.0)  # + 0.0: no "-0.0" in the table
                 for yr in cf.years for k, v in shown.items()]
        total = cf.total(i)
        metrics.append(TruckMetrics(
            name=name, powertrain=cf.powertrains[i], present_value=float(cf.present_value(i)),
            undiscounted_total=float(total.sum()), levelized_cost=float(cf.levelized_cost(i)),
            annual_distance=float(cf.distance[i][inputs.purchase_year + 1]),
            present_value_by_line=by_line))
    table = pd.DataFrame(rows, columns=["truck", "year", "line", "amount"])

    ref = cf.baseline
    comparisons = []
    for i, name in enumerate(cf.trucks):
        if i == ref:
            continue
        savings = cf.total(ref) - cf.total(i)
        simple = fin.payback_year(savings)
        disc = fin.payback_year(savings, rate)
        extra = float(-savings[0])
        if np.isnan(simple) and np.isnan(disc):
            note = "not within the period"
        elif extra <= 0 and simple == 0:
            note = "no extra up-front cost"
        else:
            note = "" if not np.isnan(disc) else "discounted payback not within the period"
        irr_value, irr_note = _irr_and_note(savings)
        be = {}
        if break_evens:
            for qname in BREAK_EVEN_QUANTITIES:
                be[qname] = break_even(inputs, qname, i, params)
        comparisons.append(Comparison(
            truck=name, baseline=cf.trucks[ref],
            present_value_difference=metrics[i].present_value - metrics[ref].present_value,
            levelized_cost_difference=metrics[i].levelized_cost - metrics[ref].levelized_cost,
            extra_upfront_cost=extra,
            simple_payback_year=None if np.isnan(simple) else int(simple),
            discounted_payback_year=None if np.isnan(disc) else int(disc),
            payback_note=note, irr=irr_value, irr_note=irr_note,
            break_even=be))
    return CashflowResult(
        table=table, trucks=metrics, comparisons=comparisons, baseline=cf.trucks[ref],
        money_basis=cf.money_basis, discount_rate=rate,
        analysis_years=inputs.finance.analysis_years, assumptions=list(cf.assumptions),
        flows=cf, financing=financing_view(inputs, cf, params) if financing else None,
        valuation=headline_view(inputs.finance))


def _irr_and_note(savings: np.ndarray) -> tuple[float | None, str]:
    r, status = fin.irr(savings)
    note = "" if status == 0 else fin.IRR_STATUS[status]
    if status == 2:
        note += ": " + ", ".join(fm.percent(x, 2) for x in fin.irr_roots(savings))
    return (None if status else float(r)), note


def after_tax_cost_of_debt(finance: Finance, costs: TruckCosts) -> tuple[float, float]:
    r"""A truck's pre-tax cost of debt (nominal) and its after-tax cost of debt in the money
    basis of the case.

    .. math:: r_{d,\,after\ tax} = r_d (1 - \tau), \qquad
              r_{real} = \frac{1 + r_{d,\,after\ tax}}{1 + i} - 1

    ``r_d`` is ``finance.cost_of_debt`` when given, else the truck's loan rate (a loan),
    else the discount rate (made nominal when the basis is real); ``τ`` is the tax rate
    of the after-tax view, 0 in the pre-tax view.

    Returns
    -------
    (float, float)
        Pre-tax nominal rate and after-tax rate in the case's basis. [-/yr]
    """
    real = finance.money_basis == "real"
    if finance.cost_of_debt is not None:
        rd = float(finance.cost_of_debt)
    elif costs.financing.method == "loan":
        rd = float(costs.financing.loan_rate)
    else:
        rd = float(fin.nominal_rate(finance.discount_rate, finance.inflation)) if real \
            else float(finance.discount_rate)
    tau = finance.after_tax.tax_rate if finance.after_tax.enabled else 0.0
    after = rd * (1.0 - tau)
    if real:
        after = float(fin.real_rate(after, finance.inflation))
    return rd, after


def _financing_pv(inputs: CostInputs, costs: TruckCosts, flows: np.ndarray,
                  rd: float) -> float:
    """Present value of a truck's financing flows at its after-tax cost of debt, with
    the loan instalments or lease payments at their own months.

    The model books a year's instalments at the year's end; here each one is discounted
    from its month, at the per-instalment rate ``r_d (1 − τ) / m`` (m instalments a year,
    12 for a lease), so a loan at the borrowing rate is worth exactly 0 before tax. The
    other flows (drawdown, balance settled, buy-out, tax effects) stay at year ends.
    Flows of the real basis are turned nominal with the inflation rate first.
    """
    f = inputs.finance
    fi = costs.financing
    tau = f.after_tax.tax_rate if f.after_tax.enabled else 0.0
    m = fi.payments_per_year if fi.method == "loan" else 12
    i = rd * (1.0 - tau) / m
    years = np.arange(len(flows), dtype=float)
    nominal = flows * ((1.0 + f.inflation) ** years if f.money_basis == "real" else 1.0)
    pv = float(np.sum(nominal * (1.0 + i) ** (-m * years)))
    t0 = inputs.purchase_year
    owned = len(flows) - 1 - t0
    if fi.method == "loan":
        principal = -float(nominal[t0])
        n = fi.loan_years * m
        pay = fin.annuity_payment(principal, fi.loan_rate / m, n) if principal > 0 else 0.0
        periods = min(n, m * owned)
    else:
        pay = float(fi.lease_payment)
        periods = m * min(fi.lease_years, owned)
    k = np.arange(1, periods + 1, dtype=float)
    at_months = np.sum((1.0 + i) ** -(m * t0 + k))
    at_year_ends = np.sum((1.0 + i) ** -(m * (t0 + np.ceil(k / m))))
    return pv + float(pay) * float(at_months - at_year_ends)


def financing_view(inputs: CostInputs, headline: CashFlows,
                   params: dict[str, float] | None = None) -> FinancingResult:
    """Loans and leases judged apart from the headline: against paying cash at the
    after-tax cost of debt, and the equity view (the flows as financed at the discount
    rate).

    The financing's own flows are the truck's net cost as financed minus its net cost
    paid in cash, year by year, so they hold the loan or lease payments and every tax
    effect they change (interest shield, deductible lease payments against depreciation,
    the residual value a returned lease gives up). Their present value at the after-tax
    cost of debt is the lease-versus-buy (or borrow-versus-pay-cash) figure of corporate
    finance: a loan at the borrowing rate, with interest deductible, is worth 0 at that
    rate.

    Parameters
    ----------
    inputs : CostInputs
    headline : CashFlows
        The headline flows (from :func:`compute` with the default view).
    params : dict, optional
        From :func:`flat_params`.

    Returns
    -------
    FinancingResult
    """
    params = params if params is not None else flat_params(inputs)
    view = headline_view(inputs.finance)
    financed = [t for t in inputs.trucks if t.costs.financing.method != "cash"]
    no_price = [t.name for t in financed if t.costs.financing.method == "lease"
                and t.costs.purchase_price <= 0]
    if no_price:  # as financed, with a lease but no price: nothing to compare it with
        return FinancingResult(valuation=view, trucks=[], comparisons=[])
    if financed:
        other = compute(inputs, params=params,
                        view="as_financed" if view == "unlevered" else "unlevered")
    else:
        other = headline  # every truck in cash: both views are the same flows
    unlev, levered = (headline, other) if view == "unlevered" else (other, headline)
    trucks = []
    for i, t in enumerate(inputs.trucks):
        if t.costs.financing.method == "cash":
            continue
        rd, after = after_tax_cost_of_debt(inputs.finance, t.costs)
        flows = np.asarray(levered.total(i) - unlev.total(i), dtype=float)
        trucks.append(TruckFinancing(
            name=t.name, method=t.costs.financing.method, cost_of_debt=rd,
            after_tax_cost_of_debt=after, flows=flows,
            present_value_at_cost_of_debt=_financing_pv(inputs, t.costs, flows, rd),
            present_value_unlevered=float(unlev.present_value(i)),
            present_value_as_financed=float(levered.present_value(i))))
    comps = []
    ref = headline.baseline
    for i, t in enumerate(inputs.trucks):
        if i == ref:
            continue
        entry = {"truck": t.name, "baseline": inputs.trucks[ref].name}
        for key, cf in (("unlevered", unlev), ("as_financed", levered)):
            entry[f"present_value_difference_{key}"] = float(
                cf.present_value(i) - cf.present_value(ref))
            r, note = _irr_and_note(np.asarray(cf.total(ref) - cf.total(i), dtype=float))
            entry[f"irr_{key}"] = r
            entry[f"irr_note_{key}"] = note
        comps.append(entry)
    return FinancingResult(valuation=view, trucks=trucks, comparisons=comps)


# --------------------------------------------------------------------------- replacement chain
def _segments(inputs: CostInputs) -> list[tuple[int, int]] | None:
    """The (purchase year, sale year) of each truck of a replacement chain, or None when
    the trucks' own life does not end before they leave (no chain)."""
    life = inputs.service_life
    if life is None:
        return None
    if life < 1:
        raise InputError(f"service life {life} is not a whole number of years ≥ 1",
                         where="finance.service_life")
    end = _end_year(inputs)
    if inputs.purchase_year + life >= end:
        return None
    starts = range(inputs.purchase_year, end, life)
    return [(s, min(s + life, end)) for s in starts]


def _first_service(distance_years_first: np.ndarray, t0: int):
    """Distance of the first year in service, as :attr:`CostTotals.annual_distance`."""
    row = np.asarray(distance_years_first)[t0 + 1]
    return float(row[0]) if row.shape[0] == 1 else row


def _compute_chain(inputs: CostInputs, overrides, params, totals_only: bool,
                   view: str | None) -> CashFlows:
    """:func:`compute` for a replacement chain: each truck sold at the end of its own life
    and a like truck bought then (``CostInputs.service_life``).

    The trucks' lines are those of each link (:func:`compute` with that link's purchase
    and end year) added up; the depot's lines are those of the whole holding, once (the
    chargers keep their own life). The after-tax view is refused: its depreciation mixes
    truck and depot assets per link.
    """
    import dataclasses

    if inputs.finance.after_tax.enabled:
        raise InputError("residual_at = 'end_of_life' with a service life shorter than the "
                         "period is not available with the after-tax view",
                         where="finance.residual_at")
    links = _segments(inputs)
    whole = dataclasses.replace(inputs, service_life=None)
    depot = {s.name for s in LINES if s.group == "depot"}
    held = compute(whole, overrides, params, totals_only=False, view=view)
    by_year = [{k: v for k, v in d.items() if k in depot} for d in held.by_year]
    distance = [np.zeros_like(np.asarray(d)) for d in held.distance_by_year]
    assumptions = list(held.assumptions)
    for start, end in links:
        link = compute(dataclasses.replace(whole, purchase_year=start, end_year=end),
                       overrides, params, totals_only=False, view=view)
        for k, d in enumerate(link.by_year):
            for name, v in d.items():
                if name not in depot:
                    by_year[k][name] = by_year[k][name] + v if name in by_year[k] else v
            distance[k] = distance[k] + link.distance_by_year[k]
        assumptions += [a for a in link.assumptions if a not in assumptions]
    order = {c.name: j for j, c in enumerate(_cl.registry())}
    by_year = [dict(sorted(d.items(), key=lambda kv: order[kv[0]])) for d in by_year]
    if totals_only:
        by_year = [{"total": sum(d.values())} for d in by_year]
    return dataclasses.replace(held, by_year=by_year, distance_by_year=distance,
                               assumptions=assumptions)
