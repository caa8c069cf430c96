"""Tests of tco.cashflow: the yearly cost lines per truck and the finance metrics.

Cases are built from the section models and hand-made AnnualOperation objects (no full
scenario). Figures in the cases are test inputs, not data; the checks are against hand
calculations written in the docstrings, against numpy-financial (reference library), and
against invariants (hypothesis).
"""
from __future__ import annotations

import json

import numpy as np
import numpy_financial as npf
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from pydantic import ValidationError

from tco import finance as fin
from tco.cashflow import (
    LINES, CostInputs, TruckSpec, break_even, compute, compute_totals,
    evaluate, flat_params,
)
from tco.report.summary_sections import cashflow_summary
from tco.errors import InputError
from tco.operation import AnnualOperation
from tco.scenario.costs import Depot, Finance, Prices, TruckCosts
from tco.units import to_si

KM = 1000.0  # [m]
KWH = 3.6e6  # [J]
L = 1e-3  # [m³]


# --------------------------------------------------------------------------- builders
def diesel_op(name="D", distance_km=100_000.0, litres=30_000.0, days=250.0, trips=500.0,
              **kw):
    return AnnualOperation(name, "diesel", days, trips, 0.0, distance_km * KM, 0.0,
                           diesel_volume=litres * L, **kw)


def electric_op(name="E", distance_km=100_000.0, depot_kwh=120_000.0, days=250.0,
                trips=500.0, **kw):
    kw.setdefault("battery_energy", depot_kwh * 0.9 * KWH)
    kw.setdefault("battery_capacity", 500 * KWH)
    kw.setdefault("battery_cycle_life", 4000.0)
    return AnnualOperation(name, "electric", days, trips, kw.pop("extra_trips", 0.0),
                           distance_km * KM, 0.0, grid_energy_depot=depot_kwh * KWH, **kw)


def two_trucks(finance=None, prices=None, depot=None, d_costs=None, e_costs=None,
               d_op=None, e_op=None, **kw):
    """A diesel and an electric truck with plain, round inputs."""
    finance = finance or Finance(analysis_years=10, discount_rate=0.07)
    prices = prices or Prices(diesel=1.6, electricity=dict(energy_price=0.15))
    depot = depot or Depot()
    d_costs = d_costs or TruckCosts(purchase_price=120_000, maintenance=0.12)
    e_costs = e_costs or TruckCosts(purchase_price=250_000, maintenance=0.08)
    return CostInputs(finance, prices, depot,
                      [TruckSpec("D", "diesel", d_costs), TruckSpec("E", "electric", e_costs)],
                      [d_op or diesel_op(), e_op or electric_op()], **kw)


def rich_case(n_years=12):
    """Every kind of line at once: loan, depot, TOU tariff, public charging, battery by
    cycles, table residual, driver time, tolls, insurance by value."""
    prof = np.zeros(24)
    prof[[22, 23, 0, 1, 2, 3]] = 1 / 6
    finance = Finance(analysis_years=n_years, discount_rate=0.06, driver_cost_per_hour=35,
                      driver_cost_escalation=0.02)
    prices = Prices(diesel=1.55, diesel_exhaust_fluid=0.5, public_charging=0.5,
                    electricity=dict(energy_price=0.22, demand_charge=12, fixed_fee=80,
                                     bands=[dict(name="night", hours=[22, 23, 0, 1, 2],
                                                 price=0.11)]),
                    escalation=dict(diesel=0.025, electricity=0.01, equipment=0.01))
    depot = Depot(chargers=2, charger_power=150, hardware_cost=50_000, installation_cost=15_000,
                  grid_connection_cost=40_000, life=7, residual_share=0.1,
                  maintenance_per_year=1_000, trucks_served=2)
    d = TruckCosts(purchase_price=130_000, purchase_tax_rate=0.05, maintenance=0.11,
                   tyres=0.03, tolls=0.12, insurance_rate=0.02, registration=1_500,
                   financing=dict(method="loan", loan_rate=0.05, loan_years=5,
                                  down_payment_share=0.1))
    e = TruckCosts(purchase_price=280_000, grant=40_000, tax_credit=15_000, tax_credit_year=1,
                   maintenance=0.08, tyres=0.035, tolls=0.06, insurance_rate=0.02,
                   insurance_fixed=400, registration=200,
                   battery_replacement=dict(when="cycles", cost_per_kwh=140),
                   residual=dict(method="table", shares=[0.8, 0.68, 0.58, 0.5, 0.44]),
                   escalation=dict(battery=-0.03, maintenance=0.01))
    e_op = electric_op(distance_km=104_000, depot_kwh=125_000, extra_trips=20, trips=520,
                       grid_energy_public=15_000 * KWH, charging_time_lost=90 * 3600,
                       depot_charging_power=110e3, charging_profile=prof,
                       trip_duration=4 * 3600, battery_energy=135_000 * KWH,
                       battery_cycle_life=1_800)
    d_op = diesel_op(litres=31_000, def_volume=620 * L, trip_duration=4 * 3600)
    return two_trucks(finance, prices, depot, d, e, d_op, e_op, days_per_year=250,
                      trips_per_day=2)


# --------------------------------------------------------------------------- units of prices
def test_price_per_volume_reads_gallons():
    """A diesel price "4.10 / gal" is 4.10 currency per US gallon; the US gallon is
    exactly 3.785411784 L (NIST Handbook 44, Appendix C), so the SI value is
    4.10 / 0.003785411784 currency per m³."""
    assert to_si("4.10 / gal", "1/L") == pytest.approx(4.10 / 0.003785411784, rel=1e-12)
    assert Prices(diesel="4.10 / gal").diesel == pytest.approx(4.10 / 0.003785411784,
                                                               rel=1e-12)
    assert Prices(diesel=1.65).diesel == pytest.approx(1650.0)


def test_cost_per_distance_reads_miles():
    """"0.2 / mi" is 0.2 currency per international mile (1609.344 m exactly)."""
    assert TruckCosts(maintenance="0.2 / mi").maintenance == pytest.approx(0.2 / 1609.344)
    assert TruckCosts(tolls=0.2).tolls == pytest.approx(0.2 / 1000)


# --------------------------------------------------------------------------- hand-worked case
def hand_case():
    finance = Finance(analysis_years=3, discount_rate=0.10)
    prices = Prices(diesel=1.50, escalation=dict(diesel=0.04))
    costs = TruckCosts(
        purchase_price=100_000, purchase_fees=2_000, maintenance=0.10, insurance_fixed=1_000,
        financing=dict(method="loan", loan_rate=0.06, loan_years=3, payments_per_year=1,
                       down_payment_share=0.2),
        residual=dict(method="declining_balance", rate=0.2))
    op = diesel_op(distance_km=50_000, litres=20_000)
    return CostInputs(finance, prices, Depot(), [TruckSpec("D", "diesel", costs)], [op])


def test_three_year_loan_case_worked_by_hand():
    """Three years, one loan, worked by hand to the cent.

    Amount due 100,000 + 2,000 fees = 102,000; down payment 20 % = 20,400; loan
    P = 81,600 at 6 % a year, three yearly instalments:
    A = P·i / (1 − 1.06⁻³) = 4,896 / 0.160380717 = 30,527.36.

    ====  =========  =========  =========
    year  interest   principal  balance
    ====  =========  =========  =========
    1     4,896.00   25,631.36  55,968.64
    2     3,358.12   27,169.24  28,799.40
    3     1,727.96   28,799.40  0
    ====  =========  =========  =========

    Diesel 20,000 L × 1.50 = 30,000.00 at today's price, rising 4 % a year and booked at
    the end of each year (one price index, (1 + e)^y): 31,200.00, 32,448.00, 33,745.92.
    Maintenance 50,000 km × 0.10 = 5,000.00 a year; insurance 1,000.00 a year.
    Residual value after 3 years, declining balance 20 %: 100,000 × 0.8³ = 51,200.00.

    Net cost: year 0 = 100,000 + 2,000 − 81,600 = 20,400.00;
    year 1 = 30,527.36 + 31,200 + 5,000 + 1,000 = 67,727.36;
    year 2 = 30,527.36 + 32,448 + 6,000 = 68,975.36;
    year 3 = 30,527.36 + 33,745.92 + 6,000 − 51,200 = 19,073.28.
    PV at 10 % with the unrounded instalment A = 30,527.3607:
    20,400 + 67,727.3607/1.1 + 68,975.3607/1.21 + 19,073.2807/1.331 = 153,304.80.
    """
    cf = compute(hand_case(), view="as_financed")
    lines = cf.lines[0]
    cents = lambda a: np.round(a, 2).tolist()  # noqa: E731
    assert cents(lines["loan_interest"]) == [0.0, 4896.00, 3358.12, 1727.96]
    assert cents(lines["loan_principal"]) == [0.0, 25631.36, 27169.24, 28799.40]
    assert cents(lines["loan_drawdown"]) == [-81600.0, 0.0, 0.0, 0.0]
    assert cents(lines["diesel"]) == [0.0, 31200.00, 32448.00, 33745.92]
    assert cents(lines["maintenance"]) == [0.0, 5000.0, 5000.0, 5000.0]
    assert cents(lines["insurance"]) == [0.0, 1000.0, 1000.0, 1000.0]
    assert cents(lines["residual_value"]) == [0.0, 0.0, 0.0, -51200.00]
    assert cents(cf.total(0)) == [20400.00, 67727.36, 68975.36, 19073.28]
    assert round(cf.present_value(0), 2) == 153304.80


def test_model_flows_through_numpy_financial():
    """The model's own yearly totals give the same PV through npf.npv, the same loan
    instalments through npf.pmt, and the same IRR of the savings through npf.irr."""
    inputs = rich_case()
    cf = compute(inputs, view="as_financed")
    for i in range(2):
        assert cf.present_value(i) == pytest.approx(npf.npv(0.06, cf.total(i)), rel=1e-12)
    # loan of truck D: principal = 0.9 × 130,000 × 1.05, monthly over 5 years
    principal = 0.9 * 130_000 * 1.05
    pay = -npf.pmt(0.05 / 12, 60, principal)
    d = cf.lines[0]
    yearly = d["loan_interest"] + d["loan_principal"]
    np.testing.assert_allclose(yearly[1:6], 12 * pay, rtol=1e-12)
    assert np.all(yearly[6:] == 0)
    savings = cf.total(0) - cf.total(1)
    r, status = fin.irr(savings)
    assert status == 0
    assert r == pytest.approx(npf.irr(savings), abs=1e-10)


# --------------------------------------------------------------------------- lines by hand
def test_time_of_use_energy_demand_and_fixed_charges():
    """Charging profile 5/6 in the night band (0.11) and 1/6 at the flat price (0.22):
    weighted 0.1283.. per kWh; 125,000 kWh → 16,041.67 at today's prices, +1 % a year
    from today (year y × 1.01^y). Demand: 12 per kW·month × 12 months × 110 kW (two
    trucks × 110 kW = 220 kW, under the 2 × 150 kW chargers) / 2 trucks × 2 = 15,840.
    Fixed: 80 × 12 / 2 = 480; both × 1.01 in year 1 (hand)."""
    cf = compute(rich_case())
    e = cf.lines[1]
    price = 5 / 6 * 0.11 + 1 / 6 * 0.22
    assert e["electricity_energy"][1] == pytest.approx(125_000 * price * 1.01, rel=1e-12)
    assert e["electricity_energy"][2] == pytest.approx(125_000 * price * 1.01 ** 2,
                                                       rel=1e-12)
    assert e["electricity_demand"][1] == pytest.approx(12 * 12 * 110 * 1.01, rel=1e-12)
    assert e["electricity_fixed"][1] == pytest.approx(480.0 * 1.01, rel=1e-12)
    assert "electricity_energy" not in cf.lines[0]


def test_depot_cost_is_shared_and_replaced_at_end_of_life():
    """Depot shared by 2 trucks: chargers 2 × (50,000 + 15,000) = 130,000 → 65,000 each
    in year 0; replaced in year 7 at 130,000 × 1.01⁷ / 2; the old hardware is worth
    10 % × 100,000 / 2 = 5,000 then. At year 12 the new hardware is 5 of 7 years old:
    worth 100,000 × 1.01⁷ × (1 − 0.9 × 5/7) / 2 (hand)."""
    cf = compute(rich_case())
    e = cf.lines[1]
    assert e["depot_chargers"][0] == pytest.approx(65_000)
    assert e["depot_chargers"][7] == pytest.approx(65_000 * 1.01 ** 7)
    assert e["depot_grid_connection"][0] == pytest.approx(20_000)
    assert e["depot_residual"][7] == pytest.approx(-5_000)
    assert e["depot_residual"][12] == pytest.approx(-50_000 * 1.01 ** 7 * (1 - 0.9 * 5 / 7))
    assert e["depot_maintenance"][1] == pytest.approx(1_000 * 1.01)  # today's price × 1.01¹
    assert "depot_chargers" not in cf.lines[0]


def test_battery_replaced_when_cycles_reach_the_cycle_life():
    """135,000 kWh a year / 500 kWh = 270 full cycles a year; 1,800 cycles are reached in
    year 7 (6.67 years). Price 140 × 500 = 70,000, falling 3 % a year: 70,000 × 0.97⁷.
    At year 12 the new battery has used (3,240 − 1,800)/1,800 = 80 % of its life, so 20 %
    of its price is credited (hand)."""
    cf = compute(rich_case())
    e = cf.lines[1]
    repl = e["battery_replacement"]
    assert np.flatnonzero(repl).tolist() == [7]
    assert repl[7] == pytest.approx(70_000 * 0.97 ** 7)
    assert e["battery_remaining_life"][12] == pytest.approx(-0.2 * 70_000 * 0.97 ** 7)


def test_battery_replacement_after_the_period_is_a_stated_assumption():
    e = TruckCosts(purchase_price=250_000,
                   battery_replacement=dict(when="year", year=12, cost=60_000))
    res = evaluate(two_trucks(e_costs=e), break_evens=False)
    assert any("year 12 falls after the 10-year period" in a for a in res.assumptions)
    assert "battery_replacement" not in set(res.table.line)


def test_battery_replacement_in_a_given_year():
    """Replaced in year 6 of 10 at 60,000; it would last 6 years, so 2/6 of its life is
    left at year 10: credit 20,000 (hand)."""
    e = TruckCosts(purchase_price=250_000,
                   battery_replacement=dict(when="year", year=6, cost=60_000))
    lines = compute(two_trucks(e_costs=e)).lines[1]
    assert lines["battery_replacement"][6] == pytest.approx(60_000)
    assert lines["battery_remaining_life"][10] == pytest.approx(-20_000)


def test_payload_and_charging_driver_time():
    """Extra trips: 20 a year × 4 h × 35 per hour = 2,800; charging: 90 h × 35 = 3,150
    at today's wage; both +2 % a year from today, × 1.02^y in year y (hand). Diesel
    truck: no such lines."""
    cf = compute(rich_case())
    e = cf.lines[1]
    assert e["extra_trips_driver_time"][1] == pytest.approx(2_800 * 1.02)
    assert e["extra_trips_driver_time"][2] == pytest.approx(2_800 * 1.02 ** 2)
    assert e["charging_driver_time"][1] == pytest.approx(3_150 * 1.02)
    assert np.all(cf.lines[0]["extra_trips_driver_time"] == 0)


def test_incentives_insurance_and_residual_table():
    """Grant −40,000 in year 0, tax credit −15,000 in year 1; insurance 2 % of the value
    at the start of the year + 400 (year 1: 0.02 × 280,000 + 400 = 6,000; year 2:
    0.02 × 0.8 × 280,000 + 400 = 4,880); the residual table stops at age 5, so age 12
    keeps 0.44 → −123,200 (hand)."""
    res = evaluate(rich_case(), break_evens=False)
    e = res.flows.lines[1]
    assert e["grant"][0] == -40_000 and e["tax_credit"][1] == -15_000
    assert e["insurance"][1] == pytest.approx(6_000)
    assert e["insurance"][2] == pytest.approx(4_880)
    assert e["residual_value"][12] == pytest.approx(-0.44 * 280_000)
    assert any("residual value table stops at age 5" in a for a in res.assumptions)


def test_days_per_year_scales_distance_lines_but_not_peak_power():
    inputs = rich_case()
    base = compute(inputs)
    more = compute(inputs, {"route.days_per_year": 300.0})
    for line in ("diesel", "maintenance", "tolls"):
        np.testing.assert_allclose(more.lines[0][line], base.lines[0][line] * 1.2, rtol=1e-12)
    np.testing.assert_allclose(more.lines[1]["electricity_demand"],
                               base.lines[1]["electricity_demand"])
    np.testing.assert_allclose(more.distance[1], base.distance[1] * 1.2)


# --------------------------------------------------------------------------- leases and loans
def test_lease_with_buy_out():
    """Lease 3,000 a month for 4 of 6 years, 1,000 at signing, buy-out 50,000 in year 4;
    then owned: residual value at year 6 counted; purchase price line absent (hand)."""
    fin6 = Finance(analysis_years=6, discount_rate=0.05)
    e = TruckCosts(purchase_price=250_000, residual=dict(rate=0.1),
                   financing=dict(method="lease", lease_payment=3_000, lease_upfront=1_000,
                                  lease_years=4, lease_end="buy_out",
                                  lease_buyout_price=50_000))
    lines = compute(two_trucks(finance=fin6, e_costs=e), view="as_financed").lines[1]
    assert lines["lease_payment"].tolist() == [0, 36_000, 36_000, 36_000, 36_000, 0, 0]
    assert lines["lease_upfront"][0] == 1_000 and lines["lease_buyout"][4] == 50_000
    assert lines["residual_value"][6] == pytest.approx(-250_000 * 0.9 ** 6)
    assert "purchase_price" not in lines


def test_lease_past_the_period_settled_or_dropped():
    fin3 = Finance(analysis_years=3)
    base = dict(method="lease", lease_payment=1_000, lease_years=5)
    settle = TruckCosts(purchase_price=1, financing={**base, "beyond_period": "settle"})
    drop = TruckCosts(purchase_price=1, financing={**base, "beyond_period": "drop"})
    s = compute(two_trucks(finance=fin3, e_costs=settle),
                view="as_financed").lines[1]["lease_payment"]
    d = compute(two_trucks(finance=fin3, e_costs=drop),
                view="as_financed").lines[1]["lease_payment"]
    assert s.tolist() == [0, 12_000, 12_000, 12_000 + 24_000]
    assert d.tolist() == [0, 12_000, 12_000, 12_000]


def test_loan_past_the_period_settled():
    """A 5-year loan in a 3-year study, settled: repaid principal sums to the loan."""
    fin3 = Finance(analysis_years=3, valuation="as_financed")
    e = TruckCosts(purchase_price=200_000, financing=dict(
        method="loan", loan_rate=0.07, loan_years=5, beyond_period="settle"))
    res = evaluate(two_trucks(finance=fin3, e_costs=e), break_evens=False)
    lines = res.flows.lines[1]
    assert lines["loan_principal"].sum() == pytest.approx(200_000)
    assert any("balance left after year 3" in a for a in res.assumptions)


# --------------------------------------------------------------------------- after tax
def test_after_tax_straight_line_shield_by_hand():
    """Tax 25 %, straight line over 5 years on 120,000: shield 6,000 a year in years 1..5;
    at year 10 the truck (book value 0) sells for 120,000 × 0.85¹⁰, taxed at 25 %. The
    operating shield is 25 % of the deductible lines (diesel, maintenance) (hand)."""
    f = Finance(analysis_years=10, discount_rate=0.07,
                after_tax=dict(enabled=True, tax_rate=0.25, depreciation="straight_line",
                               depreciation_years=5))
    lines = compute(two_trucks(finance=f)).lines[0]
    np.testing.assert_allclose(lines["tax_shield_depreciation"],
                               [0] + [-6_000] * 5 + [0] * 5)
    assert lines["tax_on_sale"][10] == pytest.approx(0.25 * 120_000 * 0.85 ** 10)
    np.testing.assert_allclose(lines["tax_shield_operating"],
                               -0.25 * (lines["diesel"] + lines["maintenance"]))


def test_after_tax_macrs_uses_the_table():
    """MACRS 3-year (IRS Pub. 946 Table A-1): deductions 33.33, 44.45, 14.81, 7.41 % of the
    basis in years 1-4."""
    f = Finance(analysis_years=6, after_tax=dict(enabled=True, tax_rate=0.2,
                                                 depreciation="macrs", macrs_class=3))
    lines = compute(two_trucks(finance=f)).lines[0]
    expected = -0.2 * 120_000 * np.array([0, 0.3333, 0.4445, 0.1481, 0.0741, 0, 0])
    np.testing.assert_allclose(lines["tax_shield_depreciation"], expected, atol=1e-9)


def test_after_tax_interest_shield():
    f = Finance(analysis_years=5, after_tax=dict(enabled=True, tax_rate=0.3))
    d = TruckCosts(purchase_price=100_000, financing=dict(method="loan", loan_rate=0.08,
                                                          loan_years=5))
    lines = compute(two_trucks(finance=f, d_costs=d), view="as_financed").lines[0]
    np.testing.assert_allclose(lines["tax_shield_interest"], -0.3 * lines["loan_interest"])


def fisher_case(inputs, basis, conv, inflation):
    """``inputs`` in money ``basis`` with inflation, a 4 % discount rate and a set of
    escalations, each rate passed through ``conv`` (identity for real rates, the Fisher
    relation (1+e)(1+i)−1 for their nominal equivalents)."""
    inputs.finance = inputs.finance.model_copy(update=dict(
        money_basis=basis, inflation=inflation, discount_rate=conv(0.04),
        driver_cost_escalation=conv(0.01)))
    esc = inputs.prices.escalation.model_copy(update=dict(
        diesel=conv(0.02), electricity=conv(-0.01), equipment=conv(0.0),
        diesel_exhaust_fluid=conv(0.0), public_charging=conv(0.005)))
    inputs.prices = inputs.prices.model_copy(update=dict(escalation=esc))
    for k, t in enumerate(inputs.trucks):
        e = t.costs.escalation.model_copy(update=dict(
            maintenance=conv(0.01), battery=conv(-0.04), insurance=conv(0.0),
            tyres=conv(0.0), tolls=conv(0.0), registration=conv(0.0)))
        inputs.trucks[k] = TruckSpec(t.name, t.powertrain,
                                     t.costs.model_copy(update=dict(escalation=e)))
    return inputs


# --------------------------------------------------------------------------- money basis
def test_real_basis_equals_nominal_with_fisher_rates():
    """Real escalations e and real discount rate r with inflation i are the nominal case
    with (1+e)(1+i)−1 and (1+r)(1+i)−1: same present value, and the real flows are the
    nominal ones divided by (1+i)^y (Fisher relation)."""
    i = 0.03

    def case(basis, conv):
        return compute(fisher_case(rich_case(), basis, conv, i))

    real = case("real", lambda e: e)
    nominal = case("nominal", lambda e: (1 + e) * (1 + i) - 1)
    years = np.arange(13)
    for k in range(2):
        assert real.present_value(k) == pytest.approx(nominal.present_value(k), rel=1e-12)
        np.testing.assert_allclose(real.total(k), nominal.total(k) / (1 + i) ** years,
                                   rtol=1e-12, atol=1e-6)


# --------------------------------------------------------------------------- vectorization
def test_vectorized_call_equals_scalar_calls_draw_by_draw():
    inputs = rich_case()
    params = flat_params(inputs)
    rng = np.random.default_rng(11)
    n = 12
    over = {
        "prices.diesel": rng.uniform(1000, 2500, n),
        "prices.electricity.bands[0].price": rng.uniform(0.05, 0.3, n) / KWH,
        "route.days_per_year": rng.uniform(150, 320, n),  # moves the battery replacement
        "finance.discount_rate": rng.uniform(0.0, 0.12, n),
        "trucks[1].costs.purchase_price": rng.uniform(150_000, 350_000, n),
        "trucks[1].costs.residual.shares[4]": rng.uniform(0.2, 0.6, n),
        "trucks[0].costs.financing.loan_rate": rng.uniform(0.0, 0.1, n),
        "prices.escalation.diesel": rng.uniform(-0.05, 0.08, n),
        "depot.hardware_cost": rng.uniform(20_000, 80_000, n),
        "trucks[1].costs.escalation.battery": rng.uniform(-0.08, 0.02, n),
    }
    many = compute(inputs, over, params)
    totals = compute(inputs, over, params, totals_only=True)
    for i in range(2):
        assert many.total(i).shape == (n, 13)
        np.testing.assert_allclose(totals.total(i), many.total(i), rtol=1e-12, atol=1e-6)
    for k in range(n):
        one = compute(inputs, {p: v[k] for p, v in over.items()}, params)
        for i in range(2):
            assert set(one.lines[i]) == set(many.lines[i])
            for line, v in one.lines[i].items():
                np.testing.assert_allclose(many.lines[i][line][k], v, rtol=1e-12, atol=1e-6,
                                           err_msg=line)
            assert many.present_value(i)[k] == pytest.approx(one.present_value(i), rel=1e-12)


def test_after_tax_and_lease_vectorized_equals_scalar():
    f = Finance(analysis_years=8, after_tax=dict(enabled=True, depreciation="macrs",
                                                 macrs_class=5))
    e = TruckCosts(purchase_price=250_000, financing=dict(
        method="lease", lease_payment=4_000, lease_years=5, lease_end="buy_out",
        lease_buyout_price=60_000))
    inputs = two_trucks(finance=f, e_costs=e)
    over = {"finance.after_tax.tax_rate": np.array([0.1, 0.3]),
            "trucks[1].costs.financing.lease_buyout_price": np.array([10_000.0, 90_000.0])}
    many = compute(inputs, over)
    for k in range(2):
        one = compute(inputs, {p: v[k] for p, v in over.items()})
        for i in range(2):
            np.testing.assert_allclose(many.total(i)[k], one.total(i), rtol=1e-12)


# --------------------------------------------------------------------------- lean path
def _random_overrides(params: dict, paths, rng, n: int) -> dict:
    """Draws around the case's values: factors 0.6..1.4 on amounts and quantities,
    ±3 points on rates and escalations (shares kept at most 1)."""
    out = {}
    for path in paths:
        base = params[path]
        if "escalation" in path or path.endswith(("discount_rate", ".inflation")):
            out[path] = base + rng.uniform(-0.03, 0.03, n)
        elif path.endswith(("_rate", ".rate")):  # shares
            out[path] = np.clip(base + rng.uniform(-0.03, 0.03, n), 0.0, 1.0)
        else:
            v = base * rng.uniform(0.6, 1.4, n)
            out[path] = np.minimum(v, 1.0) if ".shares[" in path else v
    return out


_RICH_PATHS = (
    "prices.diesel", "prices.diesel_exhaust_fluid", "prices.public_charging",
    "prices.electricity.bands[0].price", "prices.electricity.energy_price",
    "prices.electricity.demand_charge", "route.days_per_year", "route.trips_per_day",
    "finance.discount_rate", "finance.driver_cost_per_hour",
    "trucks[0].costs.purchase_price", "trucks[1].costs.purchase_price",
    "trucks[1].costs.grant", "trucks[1].costs.maintenance", "trucks[0].costs.tolls",
    "trucks[1].costs.insurance_rate", "trucks[1].costs.residual.shares[3]",
    "trucks[1].costs.battery_replacement.cost_per_kwh", "operations[1].battery_energy",
    "operations[1].grid_energy_depot", "operations[0].diesel_volume", "depot.hardware_cost",
)


def _lean_cases():
    """(name, inputs, parameter paths drawn): every kind of line and both money bases."""
    rich = rich_case()
    yield "rich", rich, _RICH_PATHS
    # drawn escalations, loan rate and residual share: lines whose yearly shape varies
    yield "shapes vary", rich, _RICH_PATHS + (
        "prices.escalation.diesel", "trucks[0].costs.financing.loan_rate",
        "trucks[1].costs.escalation.battery", "prices.escalation.equipment")
    real = rich_case()
    real.finance = Finance(analysis_years=12, discount_rate=0.04, money_basis="real",
                           inflation=0.025, driver_cost_per_hour=35)
    yield "real basis", real, _RICH_PATHS
    yield "real, drawn inflation", real, _RICH_PATHS + ("finance.inflation",)
    f = Finance(analysis_years=8, after_tax=dict(enabled=True, depreciation="macrs",
                                                 macrs_class=5))
    e = TruckCosts(purchase_price=250_000, maintenance=0.08, financing=dict(
        method="lease", lease_payment=4_000, lease_years=10, beyond_period="settle"),
        battery_replacement=dict(when="year", year=5, cost_per_kwh=150))
    d = TruckCosts(purchase_price=120_000, maintenance=0.12, financing=dict(
        method="loan", loan_rate=0.06, loan_years=5))
    taxed = two_trucks(finance=f, d_costs=d, e_costs=e)
    yield "after tax, lease, loan", taxed, (
        "finance.after_tax.tax_rate", "trucks[1].costs.financing.lease_payment",
        "trucks[0].costs.purchase_price", "prices.diesel", "route.days_per_year",
        "trucks[1].costs.battery_replacement.cost_per_kwh", "finance.discount_rate")


@pytest.mark.parametrize("name,inputs,paths", list(_lean_cases()),
                         ids=[c[0] for c in _lean_cases()])
def test_lean_totals_equal_the_full_model_draw_by_draw(name, inputs, paths):
    """compute_totals (lines summed as yearly-vector × per-draw pairs) and
    finance.compare_costs give the same yearly totals, present values, payback years and
    discounted distances as the full model (compute: every line by year, with
    finance.payback_year on its totals), draw by draw, to a relative 1e-12."""
    params = flat_params(inputs)
    rng = np.random.default_rng(len(name))
    n = 40
    over = _random_overrides(params, paths, rng, n)
    full = compute(inputs, over, params)
    lean = compute_totals(inputs, over, params)
    assert lean.n_draws == n and lean.trucks == full.trucks
    assert lean.baseline == full.baseline
    rate = full.discount_rate
    for i in range(len(full.trucks)):
        want = full.total(i)  # (n, N + 1)
        got = lean.total_by_year[i].T
        # atol: year 0 of a loan nets the price against the loan (cancellation)
        np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-9, err_msg=str(i))
    ref, k = full.baseline, 1 - full.baseline
    c = fin.compare_costs(lean.flows[ref], lean.flows[k], lean.discount_rate)
    for i in (ref, k):  # the same distance in each year 1..N, discounted
        np.testing.assert_allclose(lean.annual_distance[i] * c.annuity,
                                   full.discounted_distance(i), rtol=1e-12)
    np.testing.assert_allclose(c.pv_baseline, full.present_value(ref), rtol=1e-12)
    np.testing.assert_allclose(c.pv, full.present_value(k), rtol=1e-12)
    savings = full.total(ref) - full.total(k)
    np.testing.assert_array_equal(c.simple_payback, fin.payback_year(savings))
    np.testing.assert_array_equal(c.discounted_payback, fin.payback_year(savings, rate))
    # totals_only is the same lean sum
    np.testing.assert_allclose(compute(inputs, over, params, totals_only=True).total(1),
                               full.total(1), rtol=1e-12, atol=1e-9)


def test_lean_totals_of_a_scalar_case_and_shared_lines():
    """Without array overrides the totals are one series ((N + 1, 1)) equal to the
    scalar model; a truck whose costs do not vary keeps one series among draws."""
    inputs = rich_case()
    lean = compute_totals(inputs)
    full = compute(inputs)
    assert lean.n_draws is None
    for i in range(2):
        assert lean.total_by_year[i].shape == (13, 1)
        np.testing.assert_allclose(lean.total_by_year[i][:, 0], full.total(i), rtol=1e-12)
    lean = compute_totals(inputs, {"trucks[1].costs.purchase_price": np.array([2e5, 3e5])})
    assert lean.total_by_year[0].shape == (13, 1) and lean.total_by_year[1].shape == (13, 2)


# --------------------------------------------------------------------------- properties
diesel_prices = st.floats(0.0, 5.0)


@settings(max_examples=50, deadline=None)
@given(a=diesel_prices, b=diesel_prices)
def test_higher_diesel_price_never_lowers_the_diesel_trucks_cost(a, b):
    lo, hi = sorted((a, b))
    inputs = rich_case(8)
    cf = compute(inputs, {"prices.diesel": np.array([lo, hi]) / L})
    pv = cf.present_value(0)
    assert pv[1] >= pv[0] - 1e-9 * abs(pv[0])


@settings(max_examples=50, deadline=None)
@given(r1=st.floats(-0.5, 1.0), r2=st.floats(-0.5, 1.0),
       flows=st.lists(st.floats(0.0, 1e6), min_size=2, max_size=15))
def test_higher_discount_rate_never_raises_pv_of_costs(r1, r2, flows):
    lo, hi = sorted((r1, r2))
    assert fin.present_value(flows, hi) <= fin.present_value(flows, lo) * (1 + 1e-12) + 1e-9


@settings(max_examples=30, deadline=None)
@given(rate=st.floats(0.0, 0.3), diesel=st.floats(0.5, 3.0),
       e_price=st.floats(100_000, 600_000))
def test_higher_discount_rate_lowers_the_model_pv_of_a_cash_truck(rate, diesel, e_price):
    """All-cost stream (cash purchase, no residual value): PV falls as the rate rises."""
    e = TruckCosts(purchase_price=e_price, maintenance=0.1, residual=dict(rate=1.0))
    inputs = two_trucks(e_costs=e, prices=Prices(diesel=diesel,
                                                 electricity=dict(energy_price=0.2)))
    cf = compute(inputs, {"finance.discount_rate": np.array([rate, rate + 0.05])})
    pv = cf.present_value(1)
    assert pv[1] <= pv[0]


@settings(max_examples=25, deadline=None)
@given(e_price=st.floats(150_000, 450_000), diesel=st.floats(0.8, 2.5),
       electricity=st.floats(0.05, 0.4), days=st.floats(150, 330))
def test_a_break_even_found_makes_the_difference_zero(e_price, diesel, electricity, days):
    inputs = two_trucks(e_costs=TruckCosts(purchase_price=e_price, maintenance=0.08),
                        prices=Prices(diesel=diesel, electricity=dict(energy_price=electricity)),
                        days_per_year=days)
    params = flat_params(inputs)
    scale = compute(inputs).present_value(0)
    checks = {"diesel_price": "prices.diesel",
              "purchase_price": "trucks[1].costs.purchase_price",
              "annual_distance": "route.days_per_year"}
    for q, path in checks.items():
        be = break_even(inputs, q, 1, params)
        if be.value is None:
            assert be.note
            continue
        x = be.value
        if q == "annual_distance":  # reported as the diesel truck's distance per year
            x = be.value / (100_000 * KM) * 250.0
        cf = compute(inputs, {path: x}, params)
        assert abs(cf.present_value(1) - cf.present_value(0)) <= 1e-6 * scale


def test_electricity_break_even_is_the_weighted_depot_price():
    inputs = two_trucks(prices=Prices(diesel=1.8, electricity=dict(energy_price=0.15)))
    be = break_even(inputs, "electricity_price", 1)
    assert be.value is not None
    cf = compute(inputs, {"prices.electricity.energy_price": be.value})
    assert cf.present_value(1) == pytest.approx(cf.present_value(0), rel=1e-9)


# --------------------------------------------------------------------------- result and summary
def test_evaluate_table_metrics_and_summary():
    res = evaluate(rich_case())
    t = res.table
    assert list(t.columns) == ["truck", "year", "line", "amount"]
    assert set(t.line) <= {s.name for s in LINES}
    assert t[(t.year == 0) & (t.line == "purchase_price")].amount.tolist() == [130_000,
                                                                               280_000]
    totals = res.yearly_totals()
    for m in res.trucks:
        assert m.present_value == pytest.approx(npf.npv(0.06, totals[m.name]), rel=1e-12)
        assert m.levelized_cost == pytest.approx(
            m.present_value / npf.npv(0.06, [0] + [m.annual_distance] * 12), rel=1e-12)
    c = res.comparisons[0]
    assert (c.truck, c.baseline) == ("E", "D")
    assert c.present_value_difference == pytest.approx(
        res.trucks[1].present_value - res.trucks[0].present_value)
    s = cashflow_summary(res)
    text = json.dumps(s, allow_nan=False)  # JSON-able, no NaN
    assert json.loads(text)["baseline"] == "D"
    assert set(s) == {"money_basis", "discount_rate", "analysis_years", "baseline", "lines",
                      "trucks", "comparisons", "assumptions", "valuation", "financing"}
    assert set(s["trucks"]["E"]) == {
        "powertrain", "present_value", "undiscounted_total", "levelized_cost_per_km",
        "levelized_cost_per_mile", "annual_distance_km", "yearly_totals",
        "present_value_by_line"}
    assert set(s["comparisons"][0]["break_even"]) == {
        "diesel_price_per_litre", "electricity_price_per_kwh", "purchase_price",
        "annual_distance_km"}
    # a mile is 1.609344 km
    e = s["trucks"]["E"]
    assert e["levelized_cost_per_mile"] == pytest.approx(e["levelized_cost_per_km"] * 1.609344)
    assert len(e["yearly_totals"]) == 13


def test_payback_and_irr_in_the_comparison():
    """An electric truck that costs 100,000 more and saves diesel: payback and IRR agree
    with the finance functions applied to the savings flows."""
    inputs = two_trucks(prices=Prices(diesel=2.0, electricity=dict(energy_price=0.10)))
    res = evaluate(inputs, break_evens=False)
    c = res.comparisons[0]
    savings = res.flows.total(0) - res.flows.total(1)
    assert c.extra_upfront_cost == pytest.approx(130_000)
    assert c.simple_payback_year == int(fin.payback_year(savings))
    assert c.irr == pytest.approx(npf.irr(savings), abs=1e-10)


def test_no_irr_when_the_flows_never_change_sign():
    """An electric truck cheaper to buy and to run: savings never negative, no IRR."""
    e = TruckCosts(purchase_price=100_000, maintenance=0.05)
    res = evaluate(two_trucks(e_costs=e), break_evens=False)
    c = res.comparisons[0]
    assert c.irr is None and "never change sign" in c.irr_note
    assert c.simple_payback_year == 0 and c.payback_note == "no extra up-front cost"


def test_baseline_can_be_named():
    f = Finance(baseline="E")
    res = evaluate(two_trucks(finance=f), break_evens=False)
    assert res.baseline == "E" and res.comparisons[0].truck == "D"


# --------------------------------------------------------------------------- errors
def test_discount_rate_of_minus_100_percent_is_refused():
    with pytest.raises(ValidationError, match="above -100 %"):
        Finance(discount_rate=-1.0)
    with pytest.raises(InputError, match="above -100 %"):
        compute(two_trucks(), {"finance.discount_rate": np.array([0.05, -1.2])})


def test_loan_longer_than_the_period_needs_an_end_treatment():
    e = TruckCosts(purchase_price=200_000, financing=dict(method="loan", loan_years=12))
    with pytest.raises(InputError, match="runs past the 10-year analysis period") as exc:
        compute(two_trucks(e_costs=e))
    assert exc.value.where == "trucks[1].costs.financing.beyond_period"
    with pytest.raises(ValidationError, match="cannot be dropped"):
        TruckCosts(financing=dict(method="loan", beyond_period="drop"))


def test_lease_longer_than_the_period_needs_an_end_treatment():
    e = TruckCosts(financing=dict(method="lease", lease_years=12, lease_payment=1))
    with pytest.raises(InputError, match="lease runs past"):
        compute(two_trucks(e_costs=e))


def test_returned_lease_ending_before_the_period_is_refused():
    e = TruckCosts(financing=dict(method="lease", lease_years=4, lease_payment=1))
    with pytest.raises(InputError, match="returned, before the 10-year period ends"):
        compute(two_trucks(e_costs=e))


def test_negative_prices_are_refused():
    with pytest.raises(ValidationError, match="at least 0"):
        Prices(diesel=-1.0)
    with pytest.raises(ValidationError):
        TruckCosts(purchase_price=-5)
    with pytest.raises(InputError, match="must not be negative"):
        compute(two_trucks(), {"prices.diesel": np.array([1.0, -0.5])})


def test_escalation_that_would_turn_a_price_negative_is_refused():
    """Compound escalation keeps a price positive exactly when the rate is above −100 %."""
    with pytest.raises(ValidationError, match="zero or negative"):
        Prices(escalation=dict(diesel=-1.0))
    with pytest.raises(ValidationError, match="zero or negative"):
        TruckCosts(escalation=dict(maintenance="-150 %"))


def test_missing_price_for_a_truck_that_needs_it():
    with pytest.raises(InputError, match="D burns diesel") as exc:
        compute(two_trucks(prices=Prices(electricity=dict(energy_price=0.1))))
    assert exc.value.where == "prices.diesel"


def test_unknown_baseline_and_unknown_override():
    with pytest.raises(InputError, match="not one of the trucks"):
        compute(two_trucks(finance=Finance(baseline="X")))
    with pytest.raises(InputError, match="unknown parameter"):
        compute(two_trucks(), {"prices.kerosene": 1.0})


def test_overlapping_time_of_use_bands_are_refused():
    with pytest.raises(ValidationError, match="hour 3 is in both bands"):
        Prices(electricity=dict(bands=[dict(name="a", hours=[1, 2, 3], price=0.1),
                                       dict(name="b", hours=[3, 4], price=0.2)]))


def test_tidy_table_is_a_dataframe_with_numbers():
    res = evaluate(hand_case(), break_evens=False)
    assert isinstance(res.table, pd.DataFrame)
    assert res.table.amount.dtype == float
    assert res.table.year.min() == 0 and res.table.year.max() == 3
    assert res.comparisons == []


def test_share_overrides_above_one_and_too_few_served_trucks_are_refused():
    with pytest.raises(InputError, match="at most 1"):
        compute(two_trucks(), {"trucks[1].costs.residual.rate": np.array([0.1, 1.5])})
    depot = Depot(chargers=1, trucks_served=1)
    inputs = two_trucks(depot=depot)
    inputs.trucks.append(TruckSpec("E2", "electric", TruckCosts(purchase_price=1)))
    inputs.operations.append(electric_op("E2"))
    with pytest.raises(InputError, match="2 trucks of the scenario charge at the depot") as e:
        compute(inputs)
    assert e.value.where == "depot.trucks_served"


def test_every_input_field_is_documented_with_unit_and_source():
    """Style rule of the project: each field says its unit, default and the default's
    source (nested sections are checked through their own fields)."""
    from pydantic import BaseModel

    from tco.scenario import costs

    for model in (costs.Finance, costs.AfterTax, costs.Prices, costs.Tariff, costs.TouBand,
                  costs.PriceEscalation, costs.Depot, costs.TruckCosts, costs.Financing,
                  costs.BatteryReplacement, costs.Residual, costs.TruckEscalation):
        for name, info in model.model_fields.items():
            assert info.description, f"{model.__name__}.{name}"
            ann = info.annotation
            nested = isinstance(ann, type) and issubclass(ann, BaseModel)
            if nested or name == "bands":
                continue
            extra = info.json_schema_extra or {}
            assert "unit" in extra and extra.get("source"), f"{model.__name__}.{name}"


# --------------------------------------------------------------------------- unlevered headline
def test_headline_is_unlevered_and_the_loan_is_shown_apart():
    """The hand case of test_three_year_loan_case_worked_by_hand with the headline on
    unlevered flows (the truck paid in cash), worked by hand:

    year 0 = 100,000 + 2,000 = 102,000; year 1 = 31,200 + 5,000 + 1,000 = 37,200;
    year 2 = 32,448 + 6,000 = 38,448; year 3 = 33,745.92 + 6,000 − 51,200 = −11,454.08.
    PV at 10 % = 102,000 + 37,200/1.1 + 38,448/1.21 − 11,454.08/1.331 = 158,987.77.

    The equity view (flows as financed) keeps the hand figure 153,304.80 of that test. The
    loan's own flows (financed − cash) are −81,600 then three instalments of 30,527.36;
    at the loan's own 6 % they are worth 0 (a loan at its own rate has zero NPV; checked
    with numpy_financial.npv)."""
    res = evaluate(hand_case(), break_evens=False)
    pv = 102_000 + 37_200 / 1.1 + 38_448 / 1.21 - 11_454.08 / 1.331
    assert res.trucks[0].present_value == pytest.approx(pv, abs=0.005)
    assert round(pv, 2) == 158_987.77
    assert "loan_interest" not in set(res.table.line)
    f = res.financing
    assert f.valuation == "unlevered"
    (t,) = f.trucks
    assert t.method == "loan" and t.cost_of_debt == pytest.approx(0.06)
    assert t.after_tax_cost_of_debt == pytest.approx(0.06)  # pre-tax view: no tax
    a = -npf.pmt(0.06, 3, 81_600)
    np.testing.assert_allclose(t.flows, [-81_600, a, a, a], rtol=1e-12)
    assert npf.npv(0.06, t.flows) == pytest.approx(0.0, abs=1e-6)
    assert t.present_value_at_cost_of_debt == pytest.approx(0.0, abs=1e-6)
    assert round(t.present_value_as_financed, 2) == 153_304.80
    assert t.present_value_unlevered == pytest.approx(pv, abs=0.005)


def test_loan_worth_zero_at_the_after_tax_cost_of_debt():
    """With interest deductible at 30 %, a loan at 8 % is worth 0 at 8 % × (1 − 0.3) =
    5.6 % (the standard lease-versus-buy result, Myers, Dill and Bautista 1976, from
    memory): its flows are −P, then each year the instalment less 30 % of that year's
    interest (numpy_financial.pmt and ipmt, yearly instalments)."""
    f = Finance(analysis_years=5, discount_rate=0.09,
                after_tax=dict(enabled=True, tax_rate=0.3))
    d = TruckCosts(purchase_price=100_000, financing=dict(
        method="loan", loan_rate=0.08, loan_years=5, payments_per_year=1))
    res = evaluate(two_trucks(finance=f, d_costs=d), break_evens=False)
    (t,) = res.financing.trucks
    assert t.after_tax_cost_of_debt == pytest.approx(0.056)
    per = np.arange(1, 6)
    pay = -npf.pmt(0.08, 5, 100_000)
    interest = -npf.ipmt(0.08, per, 5, 100_000)
    want = np.concatenate([[-100_000], pay - 0.3 * interest])
    np.testing.assert_allclose(t.flows, want, rtol=1e-9, atol=1e-6)
    assert npf.npv(0.056, want) == pytest.approx(0.0, abs=1e-6)
    assert t.present_value_at_cost_of_debt == pytest.approx(0.0, abs=1e-6)
    # the headline does not see the loan: the same truck bought in cash gives the same PV
    cash = evaluate(two_trucks(finance=f, d_costs=TruckCosts(purchase_price=100_000)),
                    break_evens=False)
    assert res.trucks[0].present_value == pytest.approx(cash.trucks[0].present_value,
                                                        rel=1e-13)
    assert res.comparisons[0].irr == pytest.approx(cash.comparisons[0].irr, rel=1e-12)


def test_lease_against_cash_by_hand():
    """Lease 2,500 a month for 3 years, truck returned; bought in cash it costs 100,000
    and is worth 100,000 × 0.8³ = 51,200 at the end. Lease minus cash, as booked by year:
    [−100,000, 30,000, 30,000, 30,000 + 51,200]. At the 6 % cost of debt, compounded per
    monthly payment (0.5 % a month) with each payment at its month:
    −100,000 + 2,500 × (1 − 1.005⁻³⁶)/0.005 + 51,200 × 1.005⁻³⁶ = 24,962.56 (the lease
    costs more than buying; numpy_financial.pv for the annuity)."""
    f = Finance(analysis_years=3, discount_rate=0.10, cost_of_debt=0.06)
    e = TruckCosts(purchase_price=100_000, residual=dict(rate=0.2), financing=dict(
        method="lease", lease_payment=2_500, lease_years=3))
    res = evaluate(two_trucks(finance=f, e_costs=e), break_evens=False)
    (t,) = res.financing.trucks
    np.testing.assert_allclose(t.flows, [-100_000, 30_000, 30_000, 81_200], rtol=1e-12)
    want = -100_000 + npf.pv(0.005, 36, -2_500) + 51_200 / 1.005 ** 36
    assert round(want, 2) == 24_962.56
    assert t.present_value_at_cost_of_debt == pytest.approx(want, rel=1e-12)
    assert "lease_payment" not in set(res.table.line)
    s = cashflow_summary(res)
    assert s["valuation"] == "unlevered"
    assert s["financing"]["trucks"]["E"]["present_value_at_cost_of_debt"] == \
        pytest.approx(want, rel=1e-12)
    # as financed the lease is inside the headline, and a lease needs no price then
    f2 = f.model_copy(update={"valuation": "as_financed"})
    res2 = evaluate(two_trucks(finance=f2, e_costs=e), break_evens=False)
    assert "lease_payment" in set(res2.table.line)
    assert res2.trucks[1].present_value == pytest.approx(t.present_value_as_financed)


def test_leased_truck_without_price_is_refused_in_the_unlevered_view():
    e = TruckCosts(financing=dict(method="lease", lease_payment=2_500, lease_years=10))
    with pytest.raises(InputError) as err:
        evaluate(two_trucks(e_costs=e), break_evens=False)
    assert err.value.where == "trucks[1].costs.purchase_price"
    f = Finance(valuation="as_financed")
    res = evaluate(two_trucks(finance=f, e_costs=e), break_evens=False)
    assert res.financing.trucks == []


def test_battery_replacement_capitalised_and_depreciated_for_tax():
    """A battery replaced at the end of year 4 for 60,000 (no escalation), tax 25 %,
    straight line over 5 years: it is not deducted in year 4 (capitalised) but depreciated
    12,000 a year in years 5..8, a shield of 3,000 a year; at year 8 it has 60,000 − 4 ×
    12,000 = 12,000 of book value left. Its unused life credited at year 8,
    1 − (8 − 4)/4 = 0 here, so the sale is a loss of 12,000, saving 3,000 of tax
    (common practice: a replaced major component is capitalised; hand)."""
    f = Finance(analysis_years=8, discount_rate=0.07,
                after_tax=dict(enabled=True, tax_rate=0.25, depreciation="straight_line",
                               depreciation_years=5))
    e = TruckCosts(purchase_price=200_000, battery_replacement=dict(when="year", year=4,
                                                                    cost=60_000))
    d = TruckCosts(purchase_price=200_000)
    with_b = compute(two_trucks(finance=f, e_costs=e)).lines[1]
    without = compute(two_trucks(finance=f, e_costs=d)).lines[1]
    assert with_b["battery_replacement"][4] == pytest.approx(60_000)
    # the operating shield does not include the battery
    np.testing.assert_allclose(with_b["tax_shield_operating"],
                               without["tax_shield_operating"], atol=1e-9)
    extra = with_b["tax_shield_depreciation"] - without["tax_shield_depreciation"]
    np.testing.assert_allclose(extra, [0, 0, 0, 0, 0, -3_000, -3_000, -3_000, -3_000],
                               atol=1e-9)
    sale = with_b["tax_on_sale"] - without["tax_on_sale"]
    assert sale[8] == pytest.approx(-0.25 * 12_000)


# --------------------------------------------------------------------------- aged battery
def test_aged_battery_costs_by_year_by_hand():
    """A battery that falls short from year 2 of 3 (tco.battery): public energy 1,000 kWh
    in year 2 and 2,000 kWh in year 3 at 0.5/kWh growing 10 %/yr (a year-y amount at
    today's price × 1.1^y), driver time 10 h and 20 h at 30/h growing 0 %, and the depot
    energy down to 95 % and 90 % of the first year's 100,000 kWh at 0.2/kWh (no
    escalation). By hand, year by year:
    public 0 | 1,000 × 0.5 × 1.1² = 605 | 2,000 × 0.5 × 1.1³ = 1,331;
    driver 0 | 300 | 600; depot energy 20,000 | 19,000 | 18,000."""
    op = electric_op(depot_kwh=100_000.0, battery_energy=90_000 * KWH,
                     public_energy_by_year=np.array([0.0, 1_000.0, 2_000.0]) * KWH,
                     enroute_time_by_year=np.array([0.0, 10.0, 20.0]) * 3600,
                     depot_energy_by_year=np.array([1.0, 0.95, 0.9]) * 100_000 * KWH)
    inputs = two_trucks(finance=Finance(analysis_years=3, discount_rate=0.1,
                                        driver_cost_per_hour=30),
                        prices=Prices(diesel=1.6, public_charging=0.5,
                                      electricity=dict(energy_price=0.2),
                                      escalation=dict(public_charging=0.1)),
                        e_op=op)
    cf = compute(inputs)
    lines = cf.lines[1]
    np.testing.assert_allclose(lines["public_charging"], [0, 0, 605, 1331], rtol=1e-12)
    np.testing.assert_allclose(lines["charging_driver_time"], [0, 0, 300, 600], rtol=1e-12)
    np.testing.assert_allclose(lines["electricity_energy"], [0, 20_000, 19_000, 18_000],
                               rtol=1e-12)


def test_battery_replaced_for_range_by_hand():
    """Rule ``range``: the replacement years come from the battery's ageing (here the end
    of year 2 of 4) at 100 kWh × 150/kWh falling 5 %/yr: 15,000 × 0.95² = 13,537.5 in
    year 2. The battery in use at the end has state of health 0.9 with end of life at 0.8:
    half its life left, credited as −0.5 × 13,537.5 = −6,768.75 in year 4."""
    op = electric_op(battery_capacity=100 * KWH, battery_replacement_years=(2,),
                     state_of_health=np.array([1.0, 0.95, 0.9, 0.95, 0.9]),
                     eol_state_of_health=0.8)
    e = TruckCosts(purchase_price=250_000,
                   battery_replacement=dict(when="range", cost_per_kwh=150),
                   escalation=dict(battery=-0.05))
    cf = compute(two_trucks(finance=Finance(analysis_years=4, discount_rate=0.07),
                            e_costs=e, e_op=op))
    np.testing.assert_allclose(cf.lines[1]["battery_replacement"], [0, 0, 13_537.5, 0, 0],
                               rtol=1e-12)
    np.testing.assert_allclose(cf.lines[1]["battery_remaining_life"],
                               [0, 0, 0, 0, -6_768.75], rtol=1e-12)


def test_cycles_count_discharge_and_calendar_by_hand():
    """Rule ``cycles`` with 200,000 kWh discharged a year from a 500 kWh battery of 4,000
    cycles to 80 %, and 1 %/yr calendar fade: 400/4000 + 0.01/0.2 = 0.15 lives a year, so
    one replacement in year 7 (0.15 × 7 = 1.05) of 10. Net throughput (here 150,000 kWh:
    0.075 + 0.05 = 0.125 lives, year 8) is not the wear basis."""
    op = electric_op(battery_energy=150_000 * KWH, battery_discharge_energy=200_000 * KWH,
                     calendar_fade=0.01, eol_state_of_health=0.8)
    e = TruckCosts(purchase_price=250_000,
                   battery_replacement=dict(when="cycles", cost_per_kwh=100))
    cf = compute(two_trucks(e_costs=e, e_op=op))
    repl = cf.lines[1]["battery_replacement"]
    assert np.flatnonzero(repl).tolist() == [7]
    assert repl[7] == pytest.approx(500 * 100, rel=1e-12)


def test_driver_wages_line_by_hand():
    """finance.driver_wages on: every trip's duty time is paid. 500 planned trips plus 20
    extra a year, 4 h each (loading included), at 30/h growing 2 %/yr (year y at today's
    rate × 1.02^y): 520 × 4 × 30 × 1.02 = 63,648 in year 1 and 62,400 × 1.02² = 64,920.96 in
    year 2. The extra trips
    are inside it, so their own driver-time line is not shown. Off (the default): only the
    extra trips' 20 × 4 × 30 = 2,400 a year."""
    op = electric_op(trips=520, extra_trips=20, trip_duration=4 * 3600)
    fin_on = Finance(analysis_years=2, discount_rate=0.07, driver_cost_per_hour=30,
                     driver_cost_escalation=0.02, driver_wages=True)
    cf = compute(two_trucks(finance=fin_on, e_op=op))
    np.testing.assert_allclose(cf.lines[1]["driver_wages"], [0, 63_648, 64_920.96],
                               rtol=1e-12)
    assert "extra_trips_driver_time" not in cf.lines[1] or \
        not np.any(cf.lines[1]["extra_trips_driver_time"])
    fin_off = Finance(analysis_years=2, discount_rate=0.07, driver_cost_per_hour=30,
                      driver_cost_escalation=0.0)
    cf = compute(two_trucks(finance=fin_off, e_op=op))
    np.testing.assert_allclose(cf.lines[1]["extra_trips_driver_time"], [0, 2_400, 2_400],
                               rtol=1e-12)
    assert "driver_wages" not in cf.lines[1] or not np.any(cf.lines[1]["driver_wages"])
def test_one_price_index_running_costs_and_one_offs():
    """One convention for every flow: an amount of year y is today's price × (1 + e)^y.
    In the real money basis a price with 0 % real escalation is then the same real amount
    in every year (was today's price / (1 + inflation) when running costs used
    (1 + e)^(y − 1)). Hand: diesel 20,000 L × 1.50 = 30,000 a year, inflation 3 %,
    real escalation 0: 30,000 in every year, real money of year 0."""
    inputs = hand_case()
    inputs.finance = Finance(analysis_years=3, discount_rate=0.05, money_basis="real",
                             inflation=0.03)
    inputs.prices = Prices(diesel=1.50)
    lines = compute(inputs, view="unlevered").lines[0]
    np.testing.assert_allclose(lines["diesel"], [0.0, 30_000, 30_000, 30_000], rtol=1e-12)


def test_monthly_loan_worth_zero_at_its_own_rate():
    """A 5-year loan of 100,000 at 6 % with monthly instalments: discounted month by month
    at 0.5 % a month it is worth 0 (numpy_financial.pmt and npv: the annuity's definition),
    although the model books each year's twelve instalments at the year's end (their
    yearly sum would look like a gain of several hundred at 6 % a year)."""
    f = Finance(analysis_years=5, discount_rate=0.09)
    d = TruckCosts(purchase_price=100_000, financing=dict(
        method="loan", loan_rate=0.06, loan_years=5, payments_per_year=12))
    res = evaluate(two_trucks(finance=f, d_costs=d), break_evens=False)
    (t,) = res.financing.trucks
    pay = -npf.pmt(0.005, 60, 100_000)
    assert npf.npv(0.005, [-100_000] + [pay] * 60) == pytest.approx(0.0, abs=1e-6)
    np.testing.assert_allclose(t.flows[1:], 12 * pay, rtol=1e-12)
    booked = npf.npv(0.06, t.flows)  # the year-end booking alone is not zero
    assert booked < -100
    assert t.present_value_at_cost_of_debt == pytest.approx(0.0, abs=1e-6)
