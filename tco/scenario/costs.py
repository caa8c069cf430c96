"""Scenario sections for the money side: finance, prices, the depot and each truck's costs.

Money is a plain float in the scenario's currency (pint drops currency signs, see
:mod:`tco.units`). A price *per physical unit* is a quantity whose unit is the reciprocal of
that unit: a diesel price is read with ``Qty("1/L")``, so ``1.65`` means 1.65 currency per
litre and ``"4.10 / gal"`` means 4.10 currency per US gallon; after validation both hold
currency per cubic metre (SI), e.g. ``to_si("4.10 / gal", "1/L")`` = 1083.105... [currency/m³].
In the same way a price per kWh is held per joule, per km is held per metre, per kW is held
per watt and per hour is held per second. Rates and shares are dimensionless and accept
``"8 %"``.

Fields typed ``float`` are the numeric parameters that the cash-flow model lets an
uncertainty study replace with arrays (see :func:`tco.cashflow.flat_params`); fields typed
``int``, ``bool`` or a choice fix the structure of the case (years, terms, methods).

Sections: :class:`Finance` (with :class:`AfterTax`), :class:`Prices` (with
:class:`Tariff`, :class:`TouBand`, :class:`PriceEscalation`), :class:`Depot`,
:class:`TruckCosts` (with :class:`Financing`, :class:`BatteryReplacement`,
:class:`Residual`, :class:`TruckEscalation`).
"""
from __future__ import annotations

from typing import Annotated, Literal

from pydantic import AfterValidator, Field, field_validator, model_validator

from tco.report import formatting as fm
from tco.scenario.base import ASSUMPTION, Bounds, Qty, Section, mfield, qfield

__all__ = [
    "AfterTax", "BatteryReplacement", "Depot", "Finance", "Financing", "PriceEscalation",
    "Prices", "Residual", "Tariff", "TouBand", "TruckCosts", "TruckEscalation",
]

IRS_PUB_946_B1 = (
    "IRS Publication 946, Table B-1: asset class 00.26, tractor units for use "
    "over-the-road, GDS recovery period 3 years"
)
COMMON_MONTHLY = "common practice: loan instalments are paid monthly"
NO_ESCALATION = ("assumption: left unset, it follows general inflation (0 % a year above "
                 "inflation): finance.inflation in nominal money, 0 in real money")
NO_DEFAULT = "no default: give it when a truck uses it"
MANAGED_DEFAULT = (
    "assumption: depot chargers sold for fleets schedule their power (load management) as "
    "common practice, and a depot that pays a demand charge would use it; set unmanaged "
    "for chargers that always run at full power")


#: The highest yearly rate or escalation accepted: +100 % a year (prices doubling every
#: year). A larger figure is almost always a percent written as a plain number (8 for
#: 8 %); write 0.08 or "8 %". [-]
RATE_CEILING = 1.0
_AS_FRACTION = "write a fraction (0.03) or a percent string ('3 %')"
UNLEVERED_SOURCE = (
    "common practice in corporate finance: a project's unlevered flows are valued at the "
    "discount rate (WACC) and a loan or lease is a separate decision, judged at the after-tax "
    "cost of debt (Brealey, Myers and Allen, Principles of Corporate Finance, lease-versus-buy "
    "chapter; from memory)"
)


def _escalation_check(value: float) -> float:
    # Escalation compounds: price_y = price_0 * (1 + e)**y. The price stays positive over
    # any period exactly when e > -1, so this one bound is the whole "never negative" check.
    if value <= -1.0:
        raise ValueError(
            f"an escalation of {fm.percent(value, 0)} per year would make the price zero or "
            "negative; "
            "it must be above -100 %"
        )
    if value > RATE_CEILING:
        raise ValueError(f"an escalation of {fm.plain(value)} is {fm.percent(value, 0)} per "
                         f"year; the limit is {fm.percent(RATE_CEILING, 0)} ({_AS_FRACTION})")
    return value


def _rate_check(value: float) -> float:
    if value <= -1.0:
        raise ValueError(f"a rate of {fm.percent(value, 0)} per year or less has no meaning; "
                         "it must be "
                         "above -100 %")
    if value > RATE_CEILING:
        raise ValueError(f"a rate of {fm.plain(value)} is {fm.percent(value, 0)} per year; the "
                         f"limit is {fm.percent(RATE_CEILING, 0)} ({_AS_FRACTION})")
    return value


#: A yearly escalation rate: a fraction per year (``0.03`` or ``"3 %"``), above -100 % and
#: at most :data:`RATE_CEILING`. [-]
Escalation = Annotated[Qty(""), AfterValidator(_escalation_check),
                       Bounds(gt=-1.0, le=RATE_CEILING)]
#: A discount or inflation rate per year, above -100 % and at most :data:`RATE_CEILING`. [-]
Rate = Annotated[Qty(""), AfterValidator(_rate_check), Bounds(gt=-1.0, le=RATE_CEILING)]
#: A share between 0 and 1 (``0.2`` or ``"20 %"``). [-]
Share = Qty("", ge=0, le=1)


def _esc(description: str, source: str = NO_ESCALATION):
    return qfield(0.0, "", f"{description}, change per year (fraction, '3 %' accepted; usual "
                  "-15 % to +15 %)", source, usual=(-0.15, 0.15),
                  usual_source="common practice: prices seldom move more than 15 % a year "
                  "on average over a truck's life")


# --------------------------------------------------------------------------- finance
class AfterTax(Section):
    """Optional after-tax view: depreciation and the tax shields of costs and interest."""

    enabled: bool = mfield(False, "", "Show the after-tax view (off: pre-tax cash flows)",
                           ASSUMPTION)
    tax_rate: Qty("", ge=0, le=1) = qfield(
        0.25, "", "Income tax rate on the business's profit", ASSUMPTION,
        usual=(0.05, 0.5),
        usual_source="from memory: corporate income tax rates mostly 10–35 %, with local taxes up "
        "to about 40–50 %")
    depreciation: Literal["straight_line", "declining_balance", "macrs"] = mfield(
        "straight_line", "", "Tax depreciation of the truck: straight_line, declining_balance "
        "(switching to straight line) or macrs (US MACRS GDS, half-year, IRS Pub. 946 "
        "Table A-1)", ASSUMPTION
    )
    depreciation_years: int = mfield(
        5, "yr", "Tax life for straight_line and declining_balance", ASSUMPTION, ge=1, le=40,
        usual=(3, 12),
        usual_source="IRS Publication 946, Table B-1: over-the-road tractors 3 years; common "
        "practice 5–8 years elsewhere")
    declining_balance_percent: Literal[150, 200] = mfield(
        200, "%", "Declining-balance rate as a percent of the straight-line rate",
        "common practice: 200 % (double declining balance) or 150 %"
    )
    macrs_class: Literal[3, 5, 7] = mfield(3, "yr", "MACRS GDS property class", IRS_PUB_946_B1)
    deduct_operating_costs: bool = mfield(
        True, "", "Operating costs and lease payments are deductible in the year paid "
        "(battery replacements are capitalised and depreciated with the truck's schedule)",
        "common practice: ordinary business expenses are deductible; a major component "
        "replaced is a capital expense (IRS Publication 946, from memory)"
    )


class Finance(Section):
    """Analysis period, discounting, money basis, the baseline truck and driver cost.

    ``money_basis = "nominal"`` (default): every escalation and the discount rate are
    nominal and the flows are in money of each year. ``"real"``: escalations and the
    discount rate are given *above inflation*, and the flows are shown in money of year 0;
    amounts fixed in money terms (loan and lease payments, tax credit, tax depreciation,
    residual shares of the price paid) lose value with ``inflation``.
    """

    analysis_years: int = mfield(
        10, "yr", "Analysis period (year 0 = purchase, years 1..N of operation)", ASSUMPTION,
        ge=1, le=50,
        usual=(3, 20),
        usual_source="common practice: 5–12 years, a truck's time with its first owner")
    discount_rate: Rate = qfield(
        0.08, "", "Discount rate per year (nominal or real, as money_basis says; usual 0 to "
        "25 %)", ASSUMPTION, usual=(0.0, 0.25),
        usual_source="common practice: a firm's cost of capital, mostly 5–15 % nominal")
    money_basis: Literal["nominal", "real"] = mfield(
        "nominal", "", "nominal: money of each year; real: money of year 0", ASSUMPTION
    )
    inflation: Rate = qfield(
        0.02, "", "General inflation per year: turns real rates nominal when money_basis is "
        "real; in nominal money, the escalation of every price whose escalation is left unset "
        "(usual -2 % to 20 %)", ASSUMPTION, usual=(-0.02, 0.20),
        usual_source="from memory: 0–10 % a year in most economies in most years")
    after_tax: AfterTax = Field(default_factory=AfterTax, description="After-tax view")
    baseline: str | None = mfield(
        None, "", "Name of the reference truck the others are compared with (default: the "
        "first diesel truck, else the first truck)", ASSUMPTION
    )
    driver_cost_per_hour: Qty("1/h", ge=0) = qfield(
        0.0, "1/h", "Driver cost per hour, wages and overheads (currency per hour), charged "
        "for time lost at en-route chargers and for extra trips", ASSUMPTION,
        usual=(10, 100),
        usual_source="from memory: heavy-truck drivers' wages with overheads about 20–60 USD or "
        "EUR an hour")
    driver_cost_escalation: Escalation = _esc("Driver cost")
    valuation: Literal["unlevered", "as_financed"] = mfield(
        "unlevered", "", "Flows behind the headline present value, levelized cost, payback and "
        "IRR: unlevered (every truck paid in cash, financing judged apart at the cost of debt) "
        "or as_financed (loan or lease flows inside, discounted at the discount rate)",
        UNLEVERED_SOURCE
    )
    cost_of_debt: Rate | None = qfield(
        None, "", "Pre-tax borrowing rate per year (nominal) at which a loan or lease is "
        "judged against paying cash; empty: each truck's own loan rate, or the discount rate "
        "for a lease", ASSUMPTION,
        usual=(0, 0.25),
        usual_source="common practice: truck loans about 3–12 % a year")
    driver_wages: bool = mfield(
        False, "", "Count the driver's wages as a cost line: driver_cost_per_hour for the "
        "duty time of every trip (driving, loading and unloading; extra trips included) on "
        "top of the time lost at en-route chargers. Off: the driver is left out of the cost "
        "(the same job needs one either way) and the verdict says so",
        "assumption: off, so the comparison shows only what differs between the trucks"
    )
    residual_at: Literal["period_end", "end_of_life"] = mfield(
        "period_end", "", "When a truck bought in the study is valued and sold: period_end "
        "(at the end of the analysis period, whatever its age) or end_of_life (at the end "
        "of its own service_life; in a fleet plan a like truck is then bought to serve the "
        "rest of the period). A single case buys its trucks in year 0, so end_of_life needs "
        "a service_life at least as long as the period there",
        "assumption: period_end, the usual horizon of a TCO comparison"
    )
    service_life: int | None = mfield(
        None, "yr", "The trucks' own service life: years from purchase to sale when "
        "residual_at = end_of_life", "no default: needed when residual_at = 'end_of_life'",
        ge=1, le=50, usual=(3, 20), usual_source="common practice: heavy trucks are kept "
        "about 5 to 15 years by a first owner, longer by later ones"
    )

    @model_validator(mode="after")
    def _life_given(self):
        if self.residual_at == "end_of_life":
            if self.service_life is None:
                raise ValueError("residual_at = 'end_of_life' needs finance.service_life")
        return self


# --------------------------------------------------------------------------- prices
class TouBand(Section):
    """A time-of-use band of the depot electricity tariff."""

    name: str = mfield(..., "", "Name of the band (e.g. off-peak; at most 80 characters)",
                       text_limit=80)
    hours: list[int] = mfield(
        ..., "h", "Hours of the day in the band: 0 is the hour from 00:00 to 01:00, 23 the hour "
        "from 23:00 to 24:00", min_length=1, bounds=(0, 23),
        usual="none: any hour of the day"
    )
    price: Qty("1/kWh", ge=0) = qfield(..., "1/kWh", "Energy price in the band (currency per "
                                       "kWh)",
        usual=(0.01, 0.8),
        usual_source="from memory: commercial electricity about 0.05–0.40 USD or EUR per kWh, up "
        "to about 0.6 at peak")

    @field_validator("hours")
    @classmethod
    def _hours(cls, v: list[int]) -> list[int]:
        bad = [h for h in v if not 0 <= h <= 23]
        if bad:
            raise ValueError(f"hours must be 0..23; got {bad}")
        if len(set(v)) != len(v):
            raise ValueError("an hour is listed twice")
        return v


class Tariff(Section):
    """The depot's electricity tariff: energy (flat or by time of use), demand, fixed fee."""

    energy_price: Qty("1/kWh", ge=0) | None = qfield(
        None, "1/kWh", "Energy price for the hours not in any band (currency per kWh); needed "
        "when a truck charges at the depot in such hours", NO_DEFAULT,
        usual=(0.01, 0.8),
        usual_source="from memory: commercial electricity about 0.05–0.40 USD or EUR per kWh, up "
        "to about 0.6 at peak")
    bands: list[TouBand] = Field(
        default_factory=list, description="Time-of-use bands; hours outside every band pay "
        "energy_price"
    )
    demand_charge: Qty("1/kW", ge=0) = qfield(
        0.0, "1/kW", "Demand charge per kW of the depot's monthly peak, per month (currency "
        "per kW per month)", ASSUMPTION,
        usual=(0, 60),
        usual_source="from memory: demand charges mostly 5–30 USD per kW and month, a few above 50")
    fixed_fee: float = mfield(0.0, "currency/month", "Fixed connection fee of the depot meter",
                              ASSUMPTION, ge=0,
        usual=(0, 10_000),
        usual_source="from memory: tens to a few thousand USD or EUR a month for a commercial "
        "meter")

    @model_validator(mode="after")
    def _bands(self):
        names = [b.name for b in self.bands]
        if len(set(names)) != len(names):
            raise ValueError("time-of-use band names must be unique")
        seen: dict[int, str] = {}
        for b in self.bands:
            for h in b.hours:
                if h in seen:
                    raise ValueError(f"hour {h} is in both bands '{seen[h]}' and '{b.name}'")
                seen[h] = b.name
        return self


class PriceEscalation(Section):
    """Yearly price changes of the shared prices (nominal, or above inflation when real)."""

    diesel: Escalation = _esc("Diesel price")
    diesel_exhaust_fluid: Escalation = _esc("Diesel exhaust fluid price")
    electricity: Escalation = _esc("Depot electricity (energy, demand and fixed charges)")
    public_charging: Escalation = _esc("Public charging price")
    equipment: Escalation = _esc("Depot charger cost and maintenance")


class Prices(Section):
    """Energy prices shared by all trucks, and how they change."""

    diesel: Qty("1/L", ge=0) | None = qfield(
        None, "1/L", "Diesel price at the pump (currency per litre; '4.10 / gal' accepted); "
        "needed when a truck burns diesel", NO_DEFAULT,
        usual=(0.5, 3.0),
        usual_source="from memory: about 0.9–1.2 USD per litre (US) and 1.4–2.0 EUR per litre "
        "(Europe) in the 2020s")
    diesel_exhaust_fluid: Qty("1/L", ge=0) | None = qfield(
        None, "1/L", "Diesel exhaust fluid price (currency per litre); needed when a truck "
        "uses it", NO_DEFAULT,
        usual=(0.2, 2.0),
        usual_source="from memory: 0.3–1.0 USD or EUR per litre in bulk or at the pump")
    electricity: Tariff = Field(default_factory=Tariff, description="Depot electricity tariff")
    public_charging: Qty("1/kWh", ge=0) | None = qfield(
        None, "1/kWh", "Price of energy bought at public or en-route chargers (currency per "
        "kWh); needed when a truck charges en route", NO_DEFAULT,
        usual=(0.1, 1.5),
        usual_source="from memory: public truck charging about 0.3–0.8 USD or EUR per kWh")
    escalation: PriceEscalation = Field(default_factory=PriceEscalation,
                                        description="Yearly price changes")


# --------------------------------------------------------------------------- depot
class Depot(Section):
    """Depot charging: chargers, grid connection and the nightly charging window.

    The depot's costs are split equally among the trucks it serves (``trucks_served``;
    default: the scenario's electric trucks that charge there). The trucks charge by the
    rule ``charging`` (see :mod:`tco.depot`: ``managed`` is its ``spread`` rule,
    ``unmanaged`` its ``first_come`` rule); trucks sharing the depot that the scenario does
    not describe are taken to charge like the scenario's own. Charger hardware and
    installation are bought at year 0 and again at the end of each life that ends before
    the period does; hardware is worth ``residual_share`` of its cost at the end of its
    life (straight-line in between). The grid connection is paid once at year 0 and has no
    residual value.
    """

    chargers: int = mfield(0, "", "Number of depot chargers (at most 10,000)", ASSUMPTION,
                           ge=0, le=10_000,
        usual=(None, 500),
        usual_source="common practice: about one charger per one or two trucks; large depots have "
        "hundreds of trucks")
    charger_power: Qty("kW", ge=0, le=10_000) = qfield(
        0.0, "kW", "Rated power of one charger (0: no cap on the depot's peak)", ASSUMPTION,
        usual=(None, 1500),
        usual_source="common practice: depot chargers 20–400 kW (AC to DC); megawatt chargers "
        "above")
    hardware_cost: float = mfield(0.0, "currency", "Hardware cost of one charger",
                                  ASSUMPTION, ge=0,
        usual=(None, 400_000),
        usual_source="from memory: a few thousand (AC) to 50,000–200,000 (high-power DC) USD or "
        "EUR per charger")
    installation_cost: float = mfield(0.0, "currency", "Installation cost of one charger",
                                      ASSUMPTION, ge=0,
        usual=(None, 300_000),
        usual_source="from memory: installation about half to one times the hardware cost")
    grid_connection_cost: float = mfield(0.0, "currency", "Grid connection of the depot, once",
                                         ASSUMPTION, ge=0,
        usual=(None, 2e7),
        usual_source="from memory: from nothing (spare capacity) to a few million for a new "
        "medium-voltage connection")
    life: int = mfield(10, "yr", "Life of the charger hardware", ASSUMPTION, ge=1, le=50,
        usual=(5, 15),
        usual_source="from memory: charger hardware lasts about 8–12 years")
    residual_share: Share = qfield(
        0.0, "", "Value of the hardware at the end of its life, share of its cost", ASSUMPTION,
        usual=(0, 0.3),
        usual_source="common practice: chargers are worth little at the end of their life")
    maintenance_per_year: float = mfield(
        0.0, "currency/yr", "Maintenance and software fees of one charger per year",
        ASSUMPTION, ge=0,
        usual=(None, 30_000),
        usual_source="from memory: maintenance and software fees about 2–10 % of the hardware cost "
        "a year")
    trucks_served: int | None = mfield(
        None, "", "Trucks sharing the depot (default: the electric trucks of the scenario "
        "that charge at the depot; at most 100,000)", ASSUMPTION, ge=1, le=100_000,
        usual=(None, 1000),
        usual_source="common practice: a depot serves a few to several hundred trucks")
    charging: Literal["managed", "unmanaged"] = mfield(
        "managed", "", "Depot charging rule: managed (smart charging: each truck draws the "
        "steady power that refills it just in time for departure) or unmanaged (each truck "
        "charges at the charger's full power from plug-in until full)", MANAGED_DEFAULT
    )
    charging_start_hour: int = mfield(
        20, "h", "Hour of the day depot charging may start (0..23)", ASSUMPTION, ge=0, le=23,
        usual="none: any hour of the day")
    charging_end_hour: int = mfield(
        6, "h", "Hour of the day depot charging must end (0..23; equal to the start: all "
        "day)", ASSUMPTION, ge=0, le=23,
        usual="none: any hour of the day")


# --------------------------------------------------------------------------- truck costs
class Financing(Section):
    """How the truck is paid for: cash, a loan or a lease.

    A loan or lease that runs past the analysis period needs ``beyond_period``: ``settle``
    pays the remaining loan balance (or the remaining lease payments, and a buy-out) in the
    last year; ``drop`` (leases only) leaves the later payments out, together with the use
    of the truck after the period. The default ``error`` refuses such a case.
    """

    method: Literal["cash", "loan", "lease"] = mfield("cash", "", "cash, loan or lease",
                                                      ASSUMPTION)
    loan_rate: Qty("", ge=0, le=1) = qfield(0.0, "", "Loan interest rate per year (nominal)",
                                            ASSUMPTION,
        usual=(0, 0.25),
        usual_source="common practice: truck loans about 3–12 % a year")
    loan_years: int = mfield(5, "yr", "Loan term", ASSUMPTION, ge=1, le=40,
        usual=(2, 10),
        usual_source="common practice: truck loans run 3–7 years")
    down_payment_share: Share = qfield(
        0.0, "", "Down payment, share of the amount due at purchase (price plus taxes and "
        "fees, less the grant)", ASSUMPTION,
        usual=(0, 0.5),
        usual_source="common practice: 0–30 % down")
    payments_per_year: int = mfield(12, "1/yr", "Loan instalments per year", COMMON_MONTHLY,
                                    ge=1, le=52,
        usual=(1, 12),
        usual_source="common practice: monthly instalments; quarterly or yearly ones exist")
    lease_payment: float = mfield(0.0, "currency/month", "Lease payment per month", ASSUMPTION,
                                  ge=0,
        usual=(300, 20_000),
        usual_source="from memory: heavy-truck leases about 1,500–6,000 USD or EUR a month, "
        "electric more")
    lease_upfront: float = mfield(0.0, "currency", "Lease payment due at signing (year 0)",
                                  ASSUMPTION, ge=0,
        usual=(None, 200_000),
        usual_source="from memory: a few monthly payments at signing")
    lease_years: int = mfield(5, "yr", "Lease term", ASSUMPTION, ge=1, le=40,
        usual=(2, 10),
        usual_source="common practice: truck leases run 3–7 years")
    lease_end: Literal["return", "buy_out"] = mfield(
        "return", "", "At the end of the lease: return the truck, or buy it out (then it is "
        "owned and sold at its residual value at the end of the period)", ASSUMPTION
    )
    lease_buyout_price: float = mfield(0.0, "currency", "Buy-out price at the end of the lease",
                                       ASSUMPTION, ge=0,
        usual=(None, 600_000),
        usual_source="common practice: a share of the truck's price")
    beyond_period: Literal["error", "settle", "drop"] = mfield(
        "error", "", "A loan or lease longer than the analysis period: settle (pay it off in "
        "the last year), drop (lease only: leave later payments out) or error", ASSUMPTION
    )

    @model_validator(mode="after")
    def _drop_only_for_lease(self):
        if self.method == "loan" and self.beyond_period == "drop":
            raise ValueError("a loan's remaining balance cannot be dropped; use "
                             "beyond_period = 'settle'")
        return self


class BatteryReplacement(Section):
    """Traction battery replacement (electric trucks).

    ``when = "year"`` replaces it once, at the end of ``year``; ``"cycles"`` replaces it at
    its end of life: whenever the battery lives it has used (full equivalent cycles on the
    discharged energy over the cycle life, plus calendar fade over the state of health it
    may lose, :mod:`tco.battery`) pass a whole number; ``"range"`` replaces it at the end of
    the year before the first year in which the day would no longer fit it. In any year in
    which the day does not fit the battery in use, the shortfall is charged en route (public
    price and driver time), or the job cannot be done as planned. The price is ``cost +
    cost_per_kwh × capacity``, escalated by the truck's battery escalation.
    """

    when: Literal["never", "year", "cycles", "range"] = mfield(
        "never", "", "never, year, cycles (at end of life) or range (before the day no "
        "longer fits)", ASSUMPTION)
    year: int | None = mfield(None, "yr", "Year of the replacement (when = year)",
                              "no default: needed when when = 'year'",
                              ge=1, le=100,
        usual=(1, 20),
        usual_source="common practice: within the truck's life")
    cost: float = mfield(0.0, "currency", "Fixed part of the replacement price", ASSUMPTION,
                         ge=0,
        usual=(None, 200_000),
        usual_source="from memory: a fixed part of a few thousand for labour and parts")
    cost_per_kwh: Qty("1/kWh", ge=0) = qfield(
        0.0, "1/kWh", "Replacement price per kWh of nominal capacity (currency per kWh)",
        ASSUMPTION,
        usual=(50, 600),
        usual_source="from memory: battery pack prices about 100–200 USD per kWh in the early "
        "2020s (industry surveys); truck packs and replacements cost more")
    credit_remaining_life: bool = mfield(
        True, "", "Credit the unused share of a replacement battery's life at the end of the "
        "period", ASSUMPTION
    )

    @model_validator(mode="after")
    def _year_given(self):
        if self.when == "year" and self.year is None:
            raise ValueError("when = 'year' needs the replacement year")
        return self


class Residual(Section):
    """The truck's value by age, as a share of its purchase price.

    ``declining_balance``: share(age) = (1 − rate)^age. ``table``: ``shares[k]`` is the share
    at the end of year k + 1; ages past the table keep its last share.
    """

    method: Literal["declining_balance", "table"] = mfield(
        "declining_balance", "", "declining_balance or table", ASSUMPTION
    )
    rate: Share = qfield(0.15, "", "Loss of value per year (declining_balance)", ASSUMPTION,
        usual=(0.05, 0.3),
        usual_source="common practice: trucks lose about 10–20 % of their value a year")
    shares: list[Share] = mfield(
        [], "", "Value at the end of each year of age, share of the purchase price (table)",
        "no default: needed when method = 'table'",
        usual="none: a value table by age, any share")

    @model_validator(mode="after")
    def _table_given(self):
        if self.method == "table" and not self.shares:
            raise ValueError("method = 'table' needs the shares by year of age")
        return self


class TruckEscalation(Section):
    """Yearly changes of this truck's cost lines (nominal, or above inflation when real)."""

    maintenance: Escalation = _esc("Maintenance and repair cost")
    tyres: Escalation = _esc("Tyre cost")
    tolls: Escalation = _esc("Toll rate")
    insurance: Escalation = _esc("Insurance premium")
    registration: Escalation = _esc("Registration and road taxes")
    battery: Escalation = _esc("Battery replacement price")


class TruckCosts(Section):
    """One truck's purchase, incentives, financing, running costs and end-of-life value.

    Amounts are in the scenario currency; per-distance costs are read per km
    (``"0.2 / mi"`` accepted) and held per metre.
    """

    purchase_price: float = mfield(0.0, "currency", "Purchase price before taxes and fees",
                                   "placeholder 0: set the truck's price", ge=0,
        usual=(20_000, 800_000),
        usual_source="from memory: a new heavy tractor about 100,000–180,000 USD or EUR, "
        "battery-electric 250,000–500,000; light rigids from about 40,000")
    purchase_tax_rate: Share = qfield(0.0, "", "Purchase (sales) tax, share of the price",
                                      ASSUMPTION,
        usual=(0, 0.25),
        usual_source="from memory: sales taxes and VAT mostly 0–25 %")
    purchase_fees: float = mfield(0.0, "currency", "Fees at purchase (registration, delivery)",
                                  ASSUMPTION, ge=0,
        usual=(None, 50_000),
        usual_source="from memory: registration and delivery about 1–5 % of the price")
    grant: float = mfield(0.0, "currency", "Grant paid at purchase", ASSUMPTION, ge=0,
        usual=(None, 300_000),
        usual_source="from memory: purchase grants for zero-emission trucks from tens of thousands "
        "to about 200,000 USD or EUR")
    tax_credit: float = mfield(0.0, "currency", "Tax credit received in tax_credit_year",
                               ASSUMPTION, ge=0,
        usual=(None, 100_000),
        usual_source="from memory: tax credits for clean trucks of up to about 40,000 USD per "
        "truck")
    tax_credit_year: int = mfield(1, "yr", "Year the tax credit is received", ASSUMPTION,
                                  ge=0, le=100,
        usual=(0, 3),
        usual_source="common practice: the first tax year or the one after")
    financing: Financing = Field(default_factory=Financing, description="Cash, loan or lease")
    maintenance: Qty("1/km", ge=0) = qfield(
        0.0, "1/km", "Maintenance and repair per distance (currency per km)", ASSUMPTION,
        usual=(0.01, 0.5),
        usual_source="from memory: maintenance and repair of heavy trucks about 0.05–0.20 USD or "
        "EUR per km")
    tyres: Qty("1/km", ge=0) = qfield(0.0, "1/km", "Tyres per distance (currency per km)",
                                      ASSUMPTION,
        usual=(0, 0.1),
        usual_source="from memory: tyres about 0.01–0.05 USD or EUR per km")
    tolls: Qty("1/km", ge=0) = qfield(0.0, "1/km", "Road tolls per distance (currency per km)",
                                      ASSUMPTION,
        usual=(0, 1.0),
        usual_source="from memory: distance tolls for heavy trucks about 0.1–0.5 EUR per km")
    insurance_rate: Qty("", ge=0, le=1) = qfield(
        0.0, "", "Insurance per year, share of the truck's value at the start of the year",
        ASSUMPTION,
        usual=(0, 0.1),
        usual_source="from memory: 2–6 % of the truck's value a year")
    insurance_fixed: float = mfield(0.0, "currency/yr", "Insurance per year, fixed part",
                                    ASSUMPTION, ge=0,
        usual=(None, 30_000),
        usual_source="from memory: a few thousand to about 20,000 USD or EUR a year")
    registration: float = mfield(0.0, "currency/yr", "Registration and road taxes per year",
                                 ASSUMPTION, ge=0,
        usual=(None, 20_000),
        usual_source="from memory: a few hundred to several thousand USD or EUR a year")
    battery_replacement: BatteryReplacement = Field(
        default_factory=BatteryReplacement, description="Traction battery replacement"
    )
    residual: Residual = Field(default_factory=Residual, description="Value by age")
    escalation: TruckEscalation = Field(default_factory=TruckEscalation,
                                        description="Yearly changes of this truck's costs")
