"""Tests of tco.plan: the fleet transition plan as a mixed-integer programme.

Checks: a 3-vehicle, 4-year case worked by hand where the capital budget binds in year 1;
the solver's plan against exhaustive enumeration of every plan on random small fleets
(hypothesis); the target's shortfall and what binds; charger life costs worked by hand;
the settings file's errors. The solver is HiGHS through scipy.optimize.milp; the
enumeration below is written independently of tco.plan's rows.
"""
from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tco.errors import InputError
from tco.plan import PlanProblem, charger_costs, load_plan_settings, solve, value_share


# --------------------------------------------------------------------------- hand case
def hand_problem(budget_year1=500.0):
    """Three vehicles A, B, C, plan years 0..3, no discounting (money in k-currency).

    Every vehicle is due for replacement in plan year 1. Staying diesel: a new diesel
    truck in year 1, capital 100, present value 1,000. Going electric in year 1: capital
    250, present value 1,000 − saving, savings A 100, B 80, C 50. Going electric early,
    in year 0 (the current truck sold sooner): capital 250 in year 0, savings A 60,
    B 50, C 10. Budgets: year 0: 300, year 1: 500.

    By hand. Without budgets every vehicle goes electric in year 1: saving 230, PV 2,770,
    but capital in year 1 would be 3 × 250 = 750 > 500. With the budgets:

    * year 0 holds one electric truck (250 ≤ 300; two would be 500 > 300);
    * year 1: two electric + one diesel = 600 > 500; one electric + two diesel = 450;
      two electric (the third went in year 0) = 500 ≤ 500.

    So the best is one vehicle in year 0 and the other two electric in year 1:
      A early: 60 + 80 + 50 = 190;  B early: 100 + 50 + 50 = 200;  C early: 100 + 80 + 10
      = 190; or one electric in year 1 only (A): 100.
    Best: B in year 0, A and C in year 1: PV 3,000 − 200 = 2,800, capital 250 in year 0
    (slack 50) and 500 in year 1: the year-1 budget binds. A 10 % larger year-1 budget
    (550) still cannot take a third electric truck in year 1 (600 > 550): that step saves 0.
    """
    N, O = 4, 5
    pv = np.full((3, O), 1000.0)
    capex = np.zeros((3, O, N))
    allowed = np.zeros((3, O), dtype=bool)
    capex[:, 0, 1] = 100.0
    for v, (s1, s0) in enumerate([(100, 60), (80, 50), (50, 10)]):
        pv[v, 1], pv[v, 2] = 1000.0 - s0, 1000.0 - s1   # options 1 + t: electric in year t
        allowed[v, 1:3] = True
        capex[v, 1, 0] = capex[v, 2, 1] = 250.0
    return PlanProblem(vehicles=["A", "B", "C"], pv=pv, capex=capex,
                       emissions=np.zeros((3, O, N)), allowed=allowed, discount=np.ones(N),
                       budget=[300.0, budget_year1, math.inf, math.inf])


def test_hand_case_budget_binds_in_year_one():
    sol = solve(hand_problem())
    assert sol.choice.tolist() == [2, 1, 2]  # A year 1, B year 0, C year 1
    assert sol.objective == pytest.approx(2800.0, abs=1e-9)
    binding = [(r["constraint"], r["year"]) for r in sol.shadow]
    assert binding == [("budget", 1)]
    assert sol.shadow[0]["step"] == pytest.approx(50.0)
    assert sol.shadow[0]["step_saving"] == pytest.approx(0.0, abs=1e-9)
    # the LP-relaxation dual says more budget is worth something (never less than zero)
    assert sol.shadow[0]["dual"] <= 0.0


def test_hand_case_without_budget_pressure():
    """Year-1 budget 750: all three electric in year 1, PV 2,770 (worked above)."""
    sol = solve(hand_problem(750.0))
    assert sol.choice.tolist() == [2, 2, 2]
    assert sol.objective == pytest.approx(2770.0, abs=1e-9)


def test_lp_dual_matches_the_relaxed_optimum_per_unit():
    """The reported dual is a slope of the LP relaxation's optimum in the year-1 budget
    (scipy.optimize.linprog, HiGHS), checked by one-sided differences of the relaxed
    problem written here from the hand case (variables: the 15 option choices). At a
    kink of the relaxed optimum any slope between the two sides is a valid dual (LP
    duality: the subgradient), so the dual must lie between them."""
    from scipy.optimize import linprog

    def relaxed(b1):
        pb = hand_problem(b1)
        c = pb.pv.reshape(-1)
        A_eq = np.kron(np.eye(3), np.ones(5))
        A_ub = np.array([pb.capex[:, :, 0].reshape(-1), pb.capex[:, :, 1].reshape(-1)])
        res = linprog(c, A_ub=A_ub, b_ub=[300.0, b1], A_eq=A_eq, b_eq=np.ones(3),
                      bounds=[(0, float(a)) for a in pb.allowed.reshape(-1)], method="highs")
        return res.fun

    right = relaxed(501.0) - relaxed(500.0)
    left = relaxed(500.0) - relaxed(499.0)
    dual = solve(hand_problem()).shadow[0]["dual"]
    assert min(left, right) - 1e-9 <= dual <= max(left, right) + 1e-9
    assert right < 0  # more budget is worth something here


# --------------------------------------------------------------------------- target
def target_problem(budget0=math.inf):
    """Two vehicles, two years. Vehicle 0 saves 10 going electric in year 0 and emits 0
    after; vehicle 1 loses 30 going electric and then emits 0. Diesel: 10 t a year each.
    Target: at most 5 t in year 2 → both must be electric by year 1 (plan year ≤ 1)."""
    N, O = 2, 3
    pv = np.array([[100.0, 90.0, 95.0], [100.0, 130.0, 120.0]])
    em = np.full((2, O, N), 10.0)
    em[:, 1, :] = 0.0          # electric from year 1
    em[:, 2, 1] = 0.0          # electric from year 2
    capex = np.zeros((2, O, N))
    capex[:, 1, 0] = 50.0
    capex[:, 2, 1] = 50.0
    return PlanProblem(vehicles=["a", "b"], pv=pv, capex=capex, emissions=em,
                       allowed=np.ones((2, O), bool), discount=np.ones(N),
                       budget=[budget0, math.inf], target_limit=5.0, target_from=2)


def test_target_makes_a_loss_making_vehicle_go_electric():
    """Without the target, b stays diesel (100 < 120); with it, b goes in year 1 (the
    cheapest electric option, 120): total 90 + 120 = 210."""
    sol = solve(target_problem())
    assert sol.target_met
    assert sol.choice.tolist() == [1, 2]
    assert sol.objective == pytest.approx(210.0)


def test_missed_target_says_by_how_much_and_what_binds():
    """Year-0 budget 0 and ... both vehicles can still go in year 1 (capex 100 ≤ ∞): the
    target is met. With the year-1 options removed, only year 0 remains, and a budget of
    50 allows one: year-2 emissions 10 t against 5 t: 5 t short, the budget binds."""
    pb = target_problem(budget0=50.0)
    pb.allowed[:, 2] = False
    sol = solve(pb)
    assert not sol.target_met
    assert sol.shortfall.tolist() == pytest.approx([0.0, 5.0])
    assert any(b.startswith("capital budget") for b in sol.binds)


# --------------------------------------------------------------------------- enumeration
def _enumerate(pb: PlanProblem):
    """Best (shortfall, cost) over every plan, by brute force (independent of tco.plan).

    Every vehicle choice, every non-decreasing whole number of chargers installed by year
    (up to the most the fleet could need: a charger may be bought early, e.g. where a year
    has budget to spare), the grid connection in any year up to the first charger, the
    upgrade in any year or never.
    """
    V, N = pb.V, pb.N
    opts = [np.flatnonzero(pb.allowed[v]) for v in range(V)]
    combos = np.array(list(itertools.product(*opts)), dtype=int).reshape(-1, V)
    C = len(combos)
    obj = (pb.pv + pb.carbon_price * (pb.emissions * pb.discount).sum(axis=2))
    base_cost = obj[np.arange(V), combos].sum(axis=1)
    t = np.arange(N)
    S = (combos[:, :, None] > 0) & (combos[:, :, None] - 1 <= t)          # (C, V, N)
    need = np.einsum("cvt,v->ct", S, pb.charger_need)
    capex = pb.capex[np.arange(V), combos].sum(axis=1)                   # (C, N)
    peak = np.einsum("cvt,v->ct", S, pb.peak)
    em = pb.emissions[np.arange(V), combos].sum(axis=1)                  # (C, N)
    if pb.target_limit is not None:
        short = np.round(np.maximum(em[:, pb.target_from - 1:] - pb.target_limit, 0)
                         .sum(axis=1), 6)
    else:
        short = np.zeros(C)
    K = int(math.ceil(pb.charger_need.sum() - 1e-7))
    best = (math.inf, math.inf)
    ups = [None] + (list(range(N)) if pb.grid_capacity is not None else [])
    for n in itertools.combinations_with_replacement(range(K + 1), N):  # non-decreasing
        n = np.array(n, dtype=float)
        b = np.diff(np.concatenate([[0.0], n]))
        ok_n = np.all(need <= n + 1e-7, axis=1)
        if not ok_n.any():
            continue
        first = int(np.argmax(n > 0)) if n[-1] > 0 else N
        for u in ups:
            add = np.zeros(N)
            cap_u = np.zeros(N)
            if u is not None:
                add[u + pb.upgrade_lead:] = pb.upgrade_kw
                cap_u[u] = pb.upgrade_capex[u]
            grid_ok = ok_n if pb.grid_capacity is None else \
                ok_n & np.all(peak <= pb.grid_capacity + add + 1e-9, axis=1)
            for w in [None] + list(range(first + 1 if first < N else 0)):
                if w is None and first < N:
                    continue  # chargers need the connection
                cap_w = np.zeros(N)
                if w is not None:
                    cap_w[w] = pb.connection_capex[w]
                spent = capex + b * pb.charger_capex + cap_u + cap_w
                ok = grid_ok & np.all(spent <= pb.budget + 1e-6, axis=1)
                if not ok.any():
                    continue
                total = base_cost[ok] + b @ pb.charger_pv \
                    + (0.0 if u is None else pb.upgrade_pv[u]) \
                    + (0.0 if w is None else pb.connection_pv[w])
                m = short[ok].min()
                cand = total[short[ok] == m].min()
                if (m, cand) < best:
                    best = (m, cand)
    return best


@st.composite
def small_fleets(draw):
    V = draw(st.integers(1, 6))
    N = draw(st.integers(1, 5))
    O = N + 1
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    allowed = rng.random((V, O)) < (2.5 / O)
    allowed[:, 0] = True
    pv = rng.uniform(50, 150, (V, O)).round(2)
    capex = np.zeros((V, O, N))
    for v in range(V):
        for o in range(1, O):
            capex[v, o, o - 1] = rng.uniform(0, 100)
        if draw(st.booleans()):
            capex[v, 0, rng.integers(N)] = rng.uniform(0, 50)
    em = np.zeros((V, O, N))
    dies = rng.uniform(1, 10, V)
    for v in range(V):
        em[v, :, :] = dies[v]
        for o in range(1, O):
            em[v, o, o - 1:] = dies[v] * rng.uniform(0, 0.5)
    kw = dict(vehicles=[f"v{v}" for v in range(V)], pv=pv, capex=capex, emissions=em,
              allowed=allowed, discount=0.95 ** np.arange(1, N + 1),
              carbon_price=float(draw(st.sampled_from([0.0, 2.0]))))
    if draw(st.booleans()):
        kw.update(charger_need=rng.choice([0.0, 0.25, 0.5, 1.0], V),
                  charger_pv=rng.uniform(5, 30, N), charger_capex=rng.uniform(0, 20, N),
                  connection_pv=rng.uniform(0, 20, N), connection_capex=rng.uniform(0, 20, N))
    if draw(st.booleans()):
        kw.update(budget=np.where(rng.random(N) < 0.6, rng.uniform(40, 200, N), np.inf))
    if draw(st.booleans()):
        kw.update(peak=rng.uniform(0, 50, V), grid_capacity=float(rng.uniform(20, 120)),
                  upgrade_kw=float(rng.uniform(0, 100)), upgrade_pv=rng.uniform(0, 30, N),
                  upgrade_capex=rng.uniform(0, 30, N), upgrade_lead=int(rng.integers(0, 3)))
    if draw(st.booleans()):
        kw.update(target_limit=float(dies.sum() * rng.uniform(0.1, 0.9)),
                  target_from=int(rng.integers(1, N + 1)))
    return PlanProblem(**kw)


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(small_fleets())
def test_solver_plan_equals_exhaustive_enumeration(pb):
    best_short, best_cost = _enumerate(pb)
    if math.isinf(best_cost):  # no plan fits the budget
        with pytest.raises(Exception):
            solve(pb, shadow=False)
        return
    sol = solve(pb, shadow=False)
    assert sol.shortfall.sum() == pytest.approx(best_short, abs=1e-5)
    assert sol.objective == pytest.approx(best_cost, rel=1e-9, abs=1e-6)


# --------------------------------------------------------------------------- money pieces
def test_charger_life_costs_by_hand():
    """One charger: hardware 1,000 + installation 200, maintenance 50 a year, life 10,
    worth 10 % at the end of its life, straight line between; 3 years, no discounting or
    escalation. Bought in year 0: 1,200 + 3 × 50 − 1,000 × (1 − 0.9 × 3/10) = 1,350 − 730
    = 620. Bought in year 2: 1,200 + 50 − 1,000 × (1 − 0.9 × 1/10) = 1,250 − 910 = 340."""
    from tco.scenario.costs import Depot, Finance, Prices

    d = Depot(hardware_cost=1000, installation_cost=200, maintenance_per_year=50, life=10,
              residual_share=0.1)
    pv, capex = charger_costs(d, Prices(), Finance(analysis_years=3, discount_rate=0.0), 3)
    assert pv[0] == pytest.approx(620.0)
    assert pv[2] == pytest.approx(340.0)
    assert capex.tolist() == pytest.approx([1200.0] * 3)


def test_value_share_by_residual_model():
    """Declining balance 20 %: 0.8³ = 0.512 at age 3 (hand); a table keeps its last
    share past its end."""
    from tco.scenario.costs import Residual

    assert value_share(Residual(method="declining_balance", rate=0.2), 3) == \
        pytest.approx(0.512)
    table = Residual(method="table", shares=[0.8, 0.6])
    assert value_share(table, 0) == 1.0
    assert value_share(table, 1) == 0.8
    assert value_share(table, 5) == 0.6


def test_plan_settings_errors(tmp_path):
    p = tmp_path / "plan.toml"
    p.write_text("[plan]\ncapital_budgt = 5\n")
    with pytest.raises(InputError, match="unknown field"):
        load_plan_settings(p)
    p.write_text("[plan]\ncapital_budget = {soon = 5}\n")
    with pytest.raises(InputError, match="not a calendar year"):
        load_plan_settings(p)
    p.write_text("[plan.target]\nreduction = 1.5\nyear = 2030\n")
    with pytest.raises(InputError) as e:
        load_plan_settings(p)
    assert "plan.target.reduction" in str(e.value)
    p.write_text("[plan]\ngrid_capacity = \"400 kW\"\nservice_life = 12\n")
    s = load_plan_settings(p)
    assert s.grid_capacity == pytest.approx(400e3)
    assert s.service_life == pytest.approx(12 * 365.25 * 86400)


# --------------------------------------------------------------------------- own end of life
def test_option_flows_follow_the_trucks_own_life():
    """finance.residual_at = end_of_life, service_life = 5, 10-year study: the option
    "bought in plan year 2" carries the hand-worked chain of
    tests/test_cashflow_purchase_year.py (cash, 102,000 in year 2, sold at age 5 for
    32,768.00 in year 7 and a like truck bought for 102,000, sold at age 3 for 51,200.00
    in year 10; running costs in years 3..10 only), and its capital counts against the
    budget of both purchase years."""
    import dataclasses

    import pandas as pd
    from test_cashflow import hand_case

    from tco.cashflow import TruckSpec, evaluate
    from tco.plan import option_flows

    inputs = hand_case()
    inputs.finance = inputs.finance.model_copy(update=dict(analysis_years=10))
    t = inputs.trucks[0]
    costs = t.costs.model_copy(update=dict(
        financing=t.costs.financing.model_copy(update=dict(method="cash"))))
    trucks = [TruckSpec("D", "diesel", costs), TruckSpec("D2", "diesel", costs)]
    op2 = dataclasses.replace(inputs.operations[0], truck="D2")
    inputs = dataclasses.replace(inputs, trucks=trucks, operations=[inputs.operations[0], op2],
                                 service_life=5)
    cf = evaluate(inputs, break_evens=False, financing=False)
    totals = pd.DataFrame(columns=["frame", "truck", "year", "kg_co2e"])
    f = option_flows(inputs, cf, totals)
    diesel = [0.0, 0.0, 0.0, 33745.92, 35095.76, 36499.59, 37959.57, 39477.95, 41057.07,
              42699.35, 44407.33]
    hand = [0.0, 0.0, 102000.0] + [d + 6000.0 for d in diesel[3:]]
    hand[7] += 102000.0 - 32768.0
    hand[10] -= 51200.0
    np.testing.assert_allclose(f["bought"][1, 2], hand, atol=0.006)
    assert f["capex"][1, 2].tolist() == [0, 0, 102000.0, 0, 0, 0, 0, 102000.0, 0, 0]
    # bought in year 6: sold at age 4 at the period end, no second truck
    assert f["capex"][1, 6].tolist() == [0] * 6 + [102000.0] + [0] * 3
