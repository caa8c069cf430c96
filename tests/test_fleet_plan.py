"""The transition plan through a whole fleet run (tco.fleet + tco.plan + fleet outputs).

Three identical routes of an invented cycle against the demo fleet's base scenario; the
capital budget is set by hand to hold one electric truck a year. Checks are hand
arithmetic on the run's own inputs (the truck prices of the base scenario) and
consistency between fleet.json, the workbook and the plan.
"""
from __future__ import annotations

import pytest

from tco.errors import InputError
from tco.fleet import evaluate_fleet, read_fleet
from tco.plan import PlanSettings, TargetSettings
from tco.scenario import load_scenario

from test_fleet import _base  # noqa: E402  (same invented cycle and base)

PLAN_HEADER = ("vehicle,route,cycle,current,candidate,annual_distance [km],payload [t],"
               "arrive,depart,age [yr],replacement_year,resale_value\n")


def _rows(tmp_path):
    rows = [f"{v},loop,cycle.toml,Diesel tractor,Electric tractor,,,19:00,05:00,9,,40000"
            for v in "ABC"]
    p = tmp_path / "fleet.csv"
    p.write_text(PLAN_HEADER + "\n".join(rows) + "\n", encoding="utf-8")
    return p


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    """Capital by hand from the demo base (electric tractor 265,000 + fees 2,500 − grant
    45,000 = 222,500; diesel tractor 125,000 + 2,500 = 127,500; a charger 62,000 + 18,000
    = 80,000; grid connection 25,000). The base leaves the equipment escalation unset, so
    in nominal money it follows the 2 % inflation: a truck bought in 2028 costs its price
    × 1.02 (fees and grant as given).

    On this short invented cycle electric loses money, so only the target electrifies:
    Scope 1 + 2 down 40 % by 2030 needs two of the three trucks electric (one electric
    truck leaves 2 diesel + 1 electric, about 77 % of the base; two leave about 53 %).
    Each truck is 9 years old with a 10-year life: due in 2028, so it can go electric in
    2027 or 2028. Budget 500,000 a year: two electric trucks in 2028 with the third's
    diesel replacement cost 2 × 222,500 + 127,500 = 572,500 > 500,000; so one goes in
    2027 (222,500 + charger 80,000 + connection 25,000 = 327,500) and one in 2028
    (265,000 × 1.02 + 2,500 − 45,000 = 227,800 plus the diesel 125,000 × 1.02 + 2,500 =
    130,000: 357,800).
    """
    tmp = tmp_path_factory.mktemp("plan")
    base = _base(tmp)
    fleet = _rows(tmp)
    loaded = load_scenario(base)
    rows = read_fleet(fleet)
    budget = 500_000.0
    settings = PlanSettings(capital_budget=budget,
                            target=TargetSettings(reduction=0.4, year=2030))
    res = evaluate_fleet(loaded, rows, fleet, jobs=1, plan=settings)
    return loaded, rows, fleet, res, budget


def test_fleet_columns_for_the_plan_are_read(run):
    _, rows, _, _, _ = run
    assert rows[0].age == pytest.approx(9.0)
    assert rows[0].resale_value == 40_000
    assert rows[0].replacement_year is None


def test_budget_splits_the_target_driven_purchases(run):
    loaded, _, _, res, budget = run
    tp = res.transition
    y = tp.yearly
    assert (y["capital"] <= budget + 1e-6).all()
    sched = tp.schedule
    electric = sched[sched["decision"] == "electric"]
    assert sorted(electric["purchase_year"].tolist()) == [2027, 2028]
    assert y["capital"].tolist()[:2] == pytest.approx([327_500.0, 357_800.0])
    diesel = sched[sched["decision"] == "diesel"]
    assert diesel["diesel_replacement_year"].tolist() == [2028]
    assert electric["loses_money"].all()
    assert (electric["reason"] == "the emissions target needs it").all()
    assert tp.solution.target_met
    assert y["electric_trucks"].tolist()[:2] == [1, 2]


def test_fleet_json_and_workbook_show_the_same_plan(run, tmp_path):
    from tco.report.fleet_report import build_fleet_workbook
    from tco.report.fleet_summary import build_fleet_summary

    _, _, _, res, _ = run
    s = build_fleet_summary(res)
    tr = s["transition"]
    assert s["schema"] == "tco.fleet.summary/1.2"
    assert tr["electric_vehicles"] == int((res.transition.schedule["decision"]
                                           == "electric").sum())
    assert tr["pv_saving"] == pytest.approx(tr["pv_all_diesel"] - tr["pv_plan"])
    wb = build_fleet_workbook(res, s)
    ws = wb["Plan"]
    assert [ws.cell(row=2 + i, column=1).value for i in range(3)] == \
        [r["vehicle"] for r in tr["schedule"]]
    assert ws.cell(row=2, column=7).value == pytest.approx(tr["schedule"][0]["pv"])


def test_target_year_outside_the_period_is_refused(run):
    loaded, rows, fleet, _, _ = run
    bad = PlanSettings(target=TargetSettings(reduction=0.5, year=2100))
    with pytest.raises(InputError, match="target year"):
        evaluate_fleet(loaded, rows, fleet, jobs=1, plan=bad)


@pytest.mark.slow
def test_plan_sheets_recalculate_to_fleet_json(run, tmp_path):
    """LibreOffice recalculates the plan sheets' formulas (tests/recalc.py) to the figures
    of fleet.json: savings, totals, budget and grid headroom, cumulative chargers,
    Scope 1 + 2, the excess over the target, cumulative abated tonnes. Every formula cell
    of those sheets is compared."""
    import math

    import openpyxl
    from recalc import needs_soffice, recalculate  # noqa: F401

    from tco.report.fleet_report import build_fleet_workbook
    from tco.report.fleet_summary import build_fleet_summary

    import shutil
    if shutil.which("soffice") is None:
        pytest.skip("LibreOffice (soffice) is not installed")
    _, _, _, res, _ = run
    s = build_fleet_summary(res)
    tr = s["transition"]
    book = tmp_path / "book.xlsx"
    build_fleet_workbook(res, s).save(book)
    out = recalculate(book, tmp_path / "recalc")
    wb = openpyxl.load_workbook(out, data_only=True)
    formulas = openpyxl.load_workbook(book)
    checked = set()

    def check(sheet, coord, want):
        got = wb[sheet][coord].value
        if want is None or want == "":
            assert got in (None, ""), (sheet, coord, got)
        else:
            assert math.isclose(float(got), float(want), rel_tol=1e-9, abs_tol=1e-6), \
                (sheet, coord, got, want)
        checked.add((sheet, coord))

    sched = tr["schedule"]
    for i, r in enumerate(sched):
        check("Plan", f"I{2 + i}", r["pv_diesel"] - r["pv"])
    tot = 2 + len(sched)
    check("Plan", f"G{tot}", sum(r["pv"] for r in sched))
    check("Plan", f"H{tot}", sum(r["pv_diesel"] for r in sched))
    check("Plan", f"I{tot}", sum(r["pv_diesel"] - r["pv"] for r in sched))
    check("Plan", f"D{tot}", tr["electric_vehicles"])
    # the plan row: vehicles plus the shared depot, against every vehicle staying diesel
    check("Plan", f"G{tot + 2}", tr["pv_plan"])
    check("Plan", f"H{tot + 2}", tr["pv_all_diesel"])
    check("Plan", f"I{tot + 2}", tr["pv_saving"])
    chargers = 0
    for i, r in enumerate(tr["yearly"]):
        row = 2 + i
        chargers += r["chargers_bought"]
        check("Plan by year", f"D{row}", None if r["capital_budget"] is None
              else r["capital_budget"] - r["capital"])
        check("Plan by year", f"F{row}", chargers)
        assert chargers == r["chargers"]
        check("Plan by year", f"I{row}", None if r["grid_capacity_kW"] is None
              else r["grid_capacity_kW"] - r["depot_peak_kW"])
        check("Plan by year", f"M{row}", r["scope_1_2_t"])
        check("Plan by year", f"P{row}", r["shortfall_t"])
    check("Plan by year", f"B{2 + len(tr['yearly'])}", sum(r["capital"] for r in tr["yearly"]))
    for i, r in enumerate(tr["macc"]):
        check("Abatement", f"D{2 + i}", r["cumulative_t"])
    unchecked = [(ws.title, c.coordinate) for ws in formulas.worksheets
                 if ws.title in ("Plan", "Plan by year", "Abatement", "Shadow prices")
                 for row in ws.iter_rows() for c in row
                 if c.data_type == "f" and (ws.title, c.coordinate) not in checked]
    assert unchecked == []


# ------------------------------------------------------------------ budget basis: cash
@pytest.fixture(scope="module")
def case34(tmp_path_factory):
    """The three vehicles of ``run`` over a 4-year study (2027–2030) with 3-year loans:
    the 3 × 4 case, planned on the capital basis and on the cash basis, same budget."""
    from test_fleet import _base as base_with

    tmp = tmp_path_factory.mktemp("plan34")
    loaded = load_scenario(base_with(tmp, analysis_years="4", loan_years="3"))
    fleet = _rows(tmp)
    rows = read_fleet(fleet)
    out = {}
    for basis in ("capital", "cash"):
        settings = PlanSettings(capital_budget=500_000.0, budget_basis=basis,
                                target=TargetSettings(reduction=0.4, year=2030))
        out[basis] = evaluate_fleet(loaded, rows, fleet, jobs=1, plan=settings)
    return out


def test_cash_basis_counts_down_payments_loan_service_and_resale(case34):
    """The 3 × 4 case by hand, from the base scenario: both trucks are bought on a loan
    (20 % down, 5.5 % a year, here 36 monthly instalments); each current truck sells for
    its resale value 40,000 now, declining 16 % a year (the diesel tractor's residual
    rate): 40,000 × 0.84 = 33,600 in 2028. The target needs two electric trucks by 2030.

    Capital basis (as in ``run``): the budget of 500,000 binds in 2028 (two electric
    trucks and the third's new diesel: 2 × 227,800 + 130,000 = 585,600 > 500,000), so one
    electric truck goes in 2027: 222,500 + charger 80,000 + connection 25,000 = 327,500;
    2028: 227,800 + 130,000 = 357,800. Its cash in 2027: the down payment 20 % × 222,500
    = 44,500, charger and connection 105,000, less the resale 40,000: 109,500.

    Cash basis: the same budget no longer binds, so both electric trucks wait for 2028,
    the cheaper year for a truck that loses money:

    - 2028: down payments 2 × 20 % × (265,000 × 1.02 + 2,500 − 45,000) = 2 × 45,560 and
      20 % × (125,000 × 1.02 + 2,500) = 26,000 for the new diesel; one charger
      80,000 × 1.02 = 81,600 and the grid connection 25,000 × 1.02 = 25,500; less three
      resales of 33,600: 91,120 + 26,000 + 81,600 + 25,500 − 100,800 = 123,420;
    - 2029 and 2030: the instalments of the three loans, 12 × monthly payment on
      2 × 182,240 + 104,000 = 468,480 (numpy_financial.pmt, the reference library);
    - ``capital_outlay`` keeps the capital basis: 2 × 227,800 + 130,000 + 81,600 +
      25,500 = 692,700 in 2028, more than the budget, which the cash basis does not count.
    """
    import numpy_financial as npf

    cap = case34["capital"].transition
    sched = cap.schedule
    assert sorted(sched[sched["decision"] == "electric"]["purchase_year"]) == [2027, 2028]
    assert cap.yearly["capital"].tolist()[:2] == pytest.approx([327_500.0, 357_800.0])
    assert cap.yearly["capital"].tolist() == cap.yearly["capital_outlay"].tolist()
    assert cap.yearly["cash_outlay"].iloc[0] == pytest.approx(109_500.0)

    tp = case34["cash"].transition
    sched = tp.schedule
    assert sorted(sched[sched["decision"] == "electric"]["purchase_year"]) == [2028, 2028]
    y = tp.yearly
    assert y["calendar_year"].tolist() == [2027, 2028, 2029, 2030]
    service = 12 * npf.pmt(0.055 / 12, 36, -468_480.0)
    assert y["capital"].tolist() == pytest.approx([0.0, 123_420.0, service, service],
                                                  rel=1e-9)
    assert y["cash_outlay"].tolist() == y["capital"].tolist()
    assert y["capital_outlay"].tolist() == pytest.approx([0.0, 692_700.0, 0.0, 0.0])
    assert (y["capital"] <= 500_000.0).all()
    assert tp.solution.target_met


def test_budget_basis_is_shown_in_fleet_json_report_and_workbook(case34):
    from tco.report.fleet_plan import transition_context
    from tco.report.fleet_report import build_fleet_workbook
    from tco.report.fleet_summary import build_fleet_summary

    cash_run = case34["cash"]
    s = build_fleet_summary(cash_run)
    tr = s["transition"]
    assert tr["settings"]["budget_basis"] == "cash"
    assert [r["capital"] for r in tr["yearly"]][:2] == pytest.approx([0.0, 123_420.0])
    assert tr["yearly"][1]["capital_outlay"] == pytest.approx(692_700.0)
    ctx = transition_context(s)
    assert ctx["yearly"]["columns"][1] == "Cash out [EUR]"
    assert "Cash out (the budget's basis)" in ctx["yearly"]["note"]
    assert any("The budget counts cash" in n for n in tr["notes"])
    ws = build_fleet_workbook(cash_run, s)["Plan by year"]
    assert ws["B1"].value == "Cash out (budget basis) [EUR]"
    assert ws["B3"].value == pytest.approx(123_420.0)
    assert ws["Q1"].value == "Capital [EUR]" and ws["Q3"].value == pytest.approx(692_700.0)


def test_budget_basis_must_be_capital_or_cash(tmp_path):
    from tco.plan import load_plan_settings

    p = tmp_path / "plan.toml"
    p.write_text('[plan]\nbudget_basis = "loans"\n', encoding="utf-8")
    with pytest.raises(InputError, match=r"plan\.budget_basis.*capital' or 'cash"):
        load_plan_settings(p)


# ------------------------------------------------------------------ the depot re-derived
def test_depot_is_rederived_from_the_plans_own_trucks(run):
    """The first solve takes each truck's charger need and peak from the schedule of all
    three feasible routes (a third of a charger each); the plan's two electric trucks are
    then scheduled on their own and the plan re-solved with their shares (half a charger
    each), which gives back the same trucks: settled after 2 solves.

    By hand (first_come, one 100 kW charger): in 2027 one electric truck charges alone at
    the charger's full 100 kW, so the schedule re-run on that year's trucks peaks at
    100 kW, while the plan counts that truck's linear share of the two-truck peak (its
    contribution when both charge, below 100 kW): the note names 2027. From 2028 both
    trucks share one charger, which draws at most 100 kW: plan and schedule agree.
    """
    tp = run[3].transition
    assert tp.depot_rounds == 2 and tp.depot_converged
    pb = tp.problem
    electric = set(tp.schedule[tp.schedule["decision"] == "electric"]["vehicle"])
    for v, name in enumerate(pb.vehicles):
        if name in electric:
            assert pb.charger_need[v] == pytest.approx(0.5)
    y = tp.yearly
    assert y["chargers_rederived"].tolist() == [1] * len(y)
    assert y["depot_peak_rederived_kw"].tolist() == pytest.approx([100.0] * len(y))
    assert y["depot_peak_kw"].iloc[0] < 100.0
    assert y["depot_peak_kw"].iloc[1:].tolist() == pytest.approx([100.0] * (len(y) - 1))
    flagged = [n for n in tp.notes if n.startswith("20")]
    assert len(flagged) == 1 and flagged[0].startswith("2027: the depot schedule peaks at "
                                                       "100 kW")


def test_depot_rounds_are_bounded_and_say_when_unsettled():
    """A plan whose chosen trucks and depot coefficients change at every re-solve stops
    after DEPOT_ROUNDS solves and says it is not settled."""
    from types import SimpleNamespace

    import numpy as np
    import pandas as pd

    from tco.fleet import DEPOT_ROUNDS, settle_depot

    def plan(chosen, coeffs):
        sched = pd.DataFrame({"vehicle": ["A", "B"],
                              "decision": ["electric" if v == chosen else "diesel"
                                           for v in "AB"],
                              "purchase_year": [2027 if v == chosen else None for v in "AB"]})
        need = np.array([coeffs.get(v, (0.3, 10.0))[0] for v in "AB"])
        peak = np.array([coeffs.get(v, (0.3, 10.0))[1] for v in "AB"])
        yearly = pd.DataFrame({"calendar_year": [2027, 2028], "chargers": [1, 1],
                               "depot_peak_kw": [50.0, 50.0],
                               "grid_capacity_kw": [None, None]})
        return SimpleNamespace(schedule=sched, yearly=yearly, notes=[],
                               problem=SimpleNamespace(vehicles=["A", "B"],
                                                       charger_need=need, peak=peak))

    solves = []

    def resolve(coeffs):  # flips to the other truck every time
        solves.append(coeffs)
        return plan("B" if len(solves) % 2 else "A", coeffs)

    runs = []

    def schedule_of(vehicles):  # a whole charger; a peak that moves with every run
        runs.append(vehicles)
        kw = 40_000.0 + 1_000.0 * len(runs)
        return [0 if v == "A" else 1 for v in sorted(vehicles)], SimpleNamespace(
            cost_share=np.ones(len(vehicles)), chargers=1,
            peak_contribution=np.full(len(vehicles), kw), peak_power=kw)

    out = settle_depot(plan("A", {}), resolve, schedule_of, ["A", "B"])
    assert len(solves) == DEPOT_ROUNDS - 1
    assert out.depot_rounds == DEPOT_ROUNDS and not out.depot_converged
    assert "not settled after 4 solves" in out.notes[0]
    assert out.yearly["chargers_rederived"].tolist() == [1, 1]
    # the last plan's own year-by-year re-run (one more schedule, same trucks both years)
    assert out.yearly["depot_peak_rederived_kw"].tolist() == \
        [40.0 + len(runs), 40.0 + len(runs)]


def test_shadow_prices_read_in_the_currency_and_the_target_in_percent(run):
    # a reader sees the scenario's ISO 4217 code, never the placeholder word "currency",
    # and the target as a percentage with the report's spacing ("40 %", not "40%")
    from tco.report.fleet_plan import transition_context
    from tco.report.fleet_summary import build_fleet_summary

    s = build_fleet_summary(run[3])
    ctx = transition_context(s)
    table = ctx["shadow"]
    cells = [c for row in table["rows"] for c in row]
    assert not any("currency" in c for c in cells), cells
    budget_rows = [row for row in table["rows"] if row[0] == "budget"]
    assert budget_rows and all(row[5].endswith(" EUR") for row in budget_rows)
    notes = " ".join(s["transition"]["notes"])
    if "The target (" in notes:
        assert "The target (40 % below" in notes, notes
