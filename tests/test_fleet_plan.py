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
    assert s["schema"] == "tco.fleet.summary/1.1"
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
