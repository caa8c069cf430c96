"""Tests of purchases after year 0 in tco.cashflow (``CostInputs.purchase_year``).

A truck bought in year t is paid and financed in year t, runs from t + 1 and holds its
residual value at the end of the period; prices are today's grown by their escalations.
Checks are hand calculations written out below and the Fisher relation (real = nominal).
"""
from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from tco.cashflow import compute, evaluate
from tco.errors import InputError
from test_cashflow import fisher_case, hand_case, rich_case



def _later(inputs, years, t):
    inputs = dataclasses.replace(inputs, purchase_year=t)
    inputs.finance = inputs.finance.model_copy(update=dict(analysis_years=years))
    return inputs


def test_hand_case_bought_in_year_two_of_five():
    """The three-year loan case of test_cashflow, bought in year 2 of a 5-year period.

    Same loan (the price does not escalate: equipment escalation 0): year 2 pays
    100,000 + 2,000 − 81,600 = 20,400.00; instalments 30,527.36 in years 3, 4, 5.
    Diesel in year y at today's price × 1.04^y (one price index): 20,000 L × 1.50 ×
    1.04³ = 33,745.92 in year 3, then 35,095.76, 36,499.59 (4 % a year, to the cent).
    Maintenance 5,000 and insurance 1,000 a year from year 3.
    Residual at the end of year 5, age 3: 100,000 × 0.8³ = 51,200.00.

    year 0: 0; year 1: 0; year 2: 20,400.00;
    year 3: 30,527.36 + 33,745.92 + 6,000 = 70,273.28;
    year 4: 30,527.36 + 35,095.76 + 6,000 = 71,623.12;
    year 5: 30,527.36 + 36,499.59 + 6,000 − 51,200 = 21,826.95.
    """
    cf = compute(_later(hand_case(), 5, 2), view="as_financed")
    cents = lambda a: np.round(a, 2).tolist()  # noqa: E731
    lines = cf.lines[0]
    assert cents(lines["diesel"]) == [0.0, 0.0, 0.0, 33745.92, 35095.76, 36499.59]
    assert cents(lines["loan_drawdown"]) == [0.0, 0.0, -81600.0, 0.0, 0.0, 0.0]
    assert cents(lines["residual_value"]) == [0.0, 0.0, 0.0, 0.0, 0.0, -51200.0]
    assert cents(cf.total(0)) == [0.0, 0.0, 20400.00, 70273.28, 71623.12, 21826.95]
    assert cents(cf.distance[0]) == [0.0, 0.0, 0.0, 5e7, 5e7, 5e7]
    # PV at 10 % of the unrounded flows above, each discounted from its own year.
    a = 81_600 * 0.06 / (1 - 1.06 ** -3)
    flows = [20_400, a + 33_745.92 + 6_000, a + 35_095.7568 + 6_000,
             a + 36_499.587072 + 6_000 - 51_200]
    pv = sum(f / 1.1 ** (k + 2) for k, f in enumerate(flows))
    assert cf.present_value(0) == pytest.approx(pv, rel=1e-12)


def test_truck_price_grows_with_the_equipment_escalation():
    """Equipment escalation 2 %: bought in year 2 at 100,000 × 1.02² = 104,040; the
    residual after 3 years is 104,040 × 0.8³ = 53,268.48."""
    inputs = _later(hand_case(), 5, 2)
    esc = inputs.prices.escalation.model_copy(update=dict(equipment=0.02))
    inputs.prices = inputs.prices.model_copy(update=dict(escalation=esc))
    lines = compute(inputs).lines[0]
    assert round(lines["purchase_price"][2], 2) == 104_040.00
    assert round(lines["residual_value"][5], 2) == -53_268.48


def test_year_zero_is_the_default_and_year_shift_keeps_the_years_owned():
    """purchase_year = 0 is the case as before; a zero-escalation case bought in year t
    of an N-year period has the flows of the (N − t)-year case moved t years later."""
    base = rich_case(9)
    assert compute(dataclasses.replace(base, purchase_year=0)).total(1).tolist() == \
        compute(base).total(1).tolist()
    def no_equipment_escalation(inputs):
        esc = inputs.prices.escalation.model_copy(update=dict(equipment=0.0))
        inputs.prices = inputs.prices.model_copy(update=dict(escalation=esc))
        return inputs

    later = compute(no_equipment_escalation(_later(rich_case(9), 12, 3)))
    now = compute(no_equipment_escalation(rich_case(9)))
    for k in range(2):
        # escalations make prices differ; compare only lines without one: loan, residual
        for line in ("loan_drawdown", "loan_interest", "loan_principal"):
            if line in now.lines[k]:
                np.testing.assert_allclose(later.lines[k][line][3:], now.lines[k][line],
                                           rtol=1e-12)
                assert not np.any(later.lines[k][line][:3])


def test_real_basis_equals_nominal_for_a_later_purchase():
    """Fisher relation with the purchase in year 4 of 12: real escalations e, rate r and
    inflation i give the nominal case with (1+e)(1+i)−1, (1+r)(1+i)−1."""
    i = 0.03

    def case(basis, conv):
        return compute(fisher_case(_later(rich_case(), 12, 4), basis, conv, i))

    real = case("real", lambda e: e)
    nominal = case("nominal", lambda e: (1 + e) * (1 + i) - 1)
    for k in range(2):
        assert real.present_value(k) == pytest.approx(nominal.present_value(k), rel=1e-12)
        np.testing.assert_allclose(real.total(k), nominal.total(k) / (1 + i) ** np.arange(13),
                                   rtol=1e-12, atol=1e-6)
        assert not np.any(real.total(k)[:4])


def test_purchase_year_outside_the_period_is_refused():
    with pytest.raises(InputError, match="purchase year"):
        compute(_later(hand_case(), 3, 3))


def test_evaluate_reads_the_first_year_in_service():
    r = evaluate(_later(hand_case(), 5, 2), break_evens=False)
    assert r.trucks[0].annual_distance == pytest.approx(5e7)


def test_sold_at_its_own_end_of_life():
    """The hand case bought in year 1 and sold at the end of year 4 of a 6-year period
    (its own 3-year life): the flows of years 1..4 are those of the 3-year case bought in
    year 1 of a 4-year period, and years 5 and 6 are empty; residual at age 3:
    100,000 × 0.8³ = 51,200.00 in year 4."""
    held = compute(_later(hand_case(), 4, 1))
    own = _later(hand_case(), 6, 1)
    own = dataclasses.replace(own, end_year=4)
    sold = compute(own)
    np.testing.assert_allclose(sold.total(0)[:5], held.total(0), rtol=1e-12)
    assert sold.total(0)[5:].tolist() == [0.0, 0.0]
    assert round(sold.lines[0]["residual_value"][4], 2) == -51_200.00
    with pytest.raises(InputError, match="end year"):
        compute(dataclasses.replace(own, end_year=1))


# ------------------------------------------------------------------ own end of life, chained
def _cash(inputs):
    t = inputs.trucks[0]
    costs = t.costs.model_copy(update=dict(
        financing=t.costs.financing.model_copy(update=dict(method="cash"))))
    return dataclasses.replace(inputs, trucks=[dataclasses.replace(t, costs=costs)])


def test_bought_in_year_two_with_a_five_year_life_in_a_ten_year_study():
    """The hand case paid in cash, bought in year 2 of a 10-year study, with a 5-year own
    life (finance.residual_at = "end_of_life", service_life = 5), worked by hand:

    - year 2: price 100,000 + fees 2,000 = 102,000 (equipment escalation 0);
    - years 3..10: diesel 20,000 L × 1.50 × 1.04^y (booked at the end of year y) plus
      maintenance 5,000 and insurance 1,000;
    - year 7: sold at age 5, 100,000 × 0.8⁵ = 32,768.00, and a like truck bought for
      102,000 to serve years 8..10;
    - year 10: that truck sold at age 3, 100,000 × 0.8³ = 51,200.00.

    1.04^y for y = 3..10: 1.124864, 1.16985856, 1.2166529, 1.26531902, 1.31593178,
    1.36856905, 1.42331181, 1.48024428 (× 30,000 = the diesel of the year).
    """
    inputs = _cash(_later(hand_case(), 10, 2))
    inputs = dataclasses.replace(inputs, service_life=5)
    cf = compute(inputs, view="as_financed")
    lines = cf.lines[0]
    cents = lambda a: np.round(a, 2).tolist()  # noqa: E731
    diesel = [0.0, 0.0, 0.0, 33745.92, 35095.76, 36499.59, 37959.57, 39477.95, 41057.07,
              42699.35, 44407.33]
    assert cents(lines["diesel"]) == diesel
    assert cents(lines["maintenance"]) == [0.0] * 3 + [5000.0] * 8
    assert cents(lines["purchase_price"]) == [0, 0, 100000.0, 0, 0, 0, 0, 100000.0, 0, 0, 0]
    assert cents(lines["residual_value"]) == [0.0] * 7 + [-32768.0, 0.0, 0.0, -51200.0]
    total = [0.0, 0.0, 102000.0] + [d + 6000.0 for d in diesel[3:]]
    total[7] += 102000.0 - 32768.0
    total[10] -= 51200.0
    np.testing.assert_allclose(cf.total(0), total, atol=0.006)
    assert cents(cf.distance[0]) == [0.0] * 3 + [5e7] * 8


def test_the_scenario_setting_reaches_the_cost_model():
    """finance.residual_at = end_of_life with service_life = 5 gives the chain above when
    the case is built by the pipeline; the default keeps the trucks to the period end."""
    from tco.pipeline import cost_inputs
    from tco.scenario.costs import Finance

    f = Finance(analysis_years=10, residual_at="end_of_life", service_life=5)
    assert f.residual_at == "end_of_life" and f.service_life == 5
    assert Finance().residual_at == "period_end" and Finance().service_life is None
    with pytest.raises(ValueError, match="needs finance.service_life"):
        Finance(residual_at="end_of_life")

    class _S:  # the parts of a Scenario cost_inputs reads
        finance = f
        prices = hand_case().prices
        depot = hand_case().depot
        trucks = []
        route = type("R", (), {"days_per_year": None, "trips_per_day": None})

    assert cost_inputs(_S, []).service_life == 5
    _S.finance = Finance(analysis_years=10)
    assert cost_inputs(_S, []).service_life is None


def test_a_life_as_long_as_the_holding_changes_nothing():
    """A service life that reaches the end of the period is no chain: every line equal,
    to the bit, to the truck held to the end (existing results unchanged)."""
    base = rich_case(9)
    n = base.finance.analysis_years
    same = compute(dataclasses.replace(base, service_life=n))
    held = compute(base)
    for k in range(2):
        assert same.lines[k].keys() == held.lines[k].keys()
        for name in held.lines[k]:
            assert np.array_equal(same.lines[k][name], held.lines[k][name])


def test_monte_carlo_totals_follow_the_chain():
    """compute_totals of a chained case equals compute's totals, draw by draw."""
    from tco.cashflow import compute_totals

    inputs = dataclasses.replace(_cash(_later(hand_case(), 10, 0)), service_life=4)
    draws = {"prices.diesel": np.array([1.2, 1.5, 1.9])}
    ref = compute(inputs, draws)
    lean = compute_totals(inputs, draws)
    np.testing.assert_allclose(lean.total_by_year[0].T, ref.total(0), rtol=1e-12)
    # sold at age 4 in years 4 and 8, the third truck valued at age 2 in year 10
    assert np.round(ref.lines[0]["residual_value"][0], 2).tolist() == \
        [0.0] * 4 + [-40960.0] + [0.0] * 3 + [-40960.0, 0.0, -64000.0]
