"""Tests of tco.fleet: a fleet of identical routes, depot sharing, ordering, bad input."""
import csv
import datetime
import re
import tomllib
from pathlib import Path

import numpy as np
import numpy_financial as npf
import pytest

from tco.errors import InputError
from tco.fleet import evaluate_fleet, read_fleet
from tco.resources import inputs_dir
from tco.scenario import load_scenario

CYCLE = '''
[route]
trips_per_day = 1
days_per_year = 250

[[route.legs]]
name = "out"
payload = "20 t"
dwell_end = "30 min"
  [[route.legs.segments]]
  length = "40 km"
  speed = "80 km/h"
  grade = "0.5 %"

[[route.legs]]
name = "back"
payload = "0 t"
  [[route.legs.segments]]
  length = "40 km"
  speed = "80 km/h"
  grade = "-0.5 %"
'''

HEADER = "vehicle,route,cycle,current,candidate,annual_distance [km],payload [t],arrive,depart\n"


def _base(tmp_path: Path, **depot) -> Path:
    """The demo fleet base with depot settings replaced (written beside the fleet)."""
    text = (inputs_dir() / "fleet" / "base.toml").read_text(encoding="utf-8")
    for key, value in depot.items():
        text = re.sub(rf"(?m)^(\s*){key} = .*$", rf"\g<1>{key} = {value}", text)
        assert f"{key} = {value}" in text
    p = tmp_path / "base.toml"
    p.write_text(text, encoding="utf-8")
    (tmp_path / "cycle.toml").write_text(CYCLE, encoding="utf-8")
    return p


def _fleet(tmp_path: Path, rows: list[str], name="fleet.csv") -> Path:
    p = tmp_path / name
    p.write_text(HEADER + "\n".join(rows) + "\n", encoding="utf-8")
    return p


def _row(vid, arrive="19:00", depart="05:00", dist=""):
    return f"{vid},loop,cycle.toml,Diesel tractor,Electric tractor,{dist},,{arrive},{depart}"


def _run(base, fleet, rule="first_come"):
    loaded = load_scenario(base)
    return evaluate_fleet(loaded, read_fleet(fleet), fleet, rule=rule, jobs=1)


@pytest.fixture(scope="module")
def identical(tmp_path_factory):
    """One route alone and three identical copies of it, spread rule.

    Per-depot items that do not scale with trucks (the grid connection, the tariff's fixed
    fee) are set to zero so that N identical routes must give exactly N times one route.
    """
    tmp = tmp_path_factory.mktemp("identical")
    base = _base(tmp, grid_connection_cost="0", fixed_fee="0")
    one = _run(base, _fleet(tmp, [_row("A")], "one.csv"), rule="spread")
    three = _run(base, _fleet(tmp, [_row(v) for v in "ABC"], "three.csv"), rule="spread")
    return one, three


def test_identical_routes_give_n_times_one(identical):
    one, three = identical
    r1, r3 = one.routes, three.routes
    assert list(r3["vehicle"]) == ["A", "B", "C"]
    for col in ("pv_current", "pv_candidate", "pv_difference", "avoided_t",
                "annual_distance_m", "grid_energy_J", "wtw_current_t", "wtw_candidate_t"):
        np.testing.assert_allclose(r3[col].to_numpy(), r1[col].iloc[0], rtol=1e-12,
                                   err_msg=col)
    for col in ("cost_as_is", "cost_plan", "saving", "wtw_as_is_kg", "wtw_plan_kg",
                "avoided_kg", "peak_power_W", "chargers", "electric_trucks"):
        np.testing.assert_allclose(three.yearly[col].to_numpy(),
                                   3 * one.yearly[col].to_numpy(), rtol=1e-12, err_msg=col)
    assert three.depot_plan.chargers == 3 * one.depot_plan.chargers == 3
    np.testing.assert_allclose(three.depot_plan.cost_share, 1 / 3)


def test_depot_costs_add_up_to_one_depot(tmp_path):
    # Three trucks share chargers under first_come; whatever the shares, the depot lines of
    # all routes together equal one depot with the scheduled number of chargers:
    # hardware + installation per charger at year 0 (life 10 = the period), grid
    # connection once.
    base = _base(tmp_path)
    res = _run(base, _fleet(tmp_path, [_row("A", "18:00", "06:00"),
                                        _row("B", "19:00", "06:00"),
                                        _row("C", "20:00", "06:00")]))
    k = res.depot_plan.chargers
    assert 1 <= k < 3  # 12 h stays: the chargers rotate
    d = res.base.scenario.depot
    np.testing.assert_allclose(res.depot_plan.cost_share.sum(), 1.0)
    # capital cost at year 0 carried by the candidates = one depot's capital cost
    cap = k * (d.hardware_cost + d.installation_cost) + d.grid_connection_cost
    shares = res.routes["depot_cost_share"].to_numpy()
    np.testing.assert_allclose((shares * cap).sum(), cap)
    # and each route's year-0 cost difference holds exactly its share of that capital
    cand_y0 = np.array([m.yearly_cost.query("year == 0 and truck == 'Electric tractor'")
                        ["amount"].iloc[0] for m in res.money])
    alone = cand_y0 - shares * cap
    np.testing.assert_allclose(alone, alone[0], rtol=1e-12)  # same truck, same purchase


def test_sharing_lowers_the_depot_cost_per_truck(tmp_path):
    base = _base(tmp_path)
    one = _run(base, _fleet(tmp_path, [_row("A", "18:00", "06:00")], "one.csv"))
    three = _run(base, _fleet(tmp_path, [_row(v, "18:00", "06:00") for v in "ABC"],
                              "three.csv"))
    assert three.depot_plan.chargers < 3
    assert (three.routes["pv_candidate"] < one.routes["pv_candidate"].iloc[0]).all()


def test_order_puts_feasible_routes_first_and_ranks_by_saving(tmp_path):
    base = _base(tmp_path)
    rows = [_row("A"), _row("B", dist="60000"), _row("C", dist="20000"),
            _row("D", dist="900000")]  # D: 45 round trips a day, far beyond any battery
    res = _run(base, _fleet(tmp_path, rows))
    order = res.order
    st = dict(zip(res.routes["vehicle"], res.routes["status"]))
    assert st["D"] == "not feasible"
    assert order["vehicle"].iloc[-1] == "D"
    assert "kWh" in order["remedies"].iloc[-1]
    feas = order[order["vehicle"] != "D"]
    assert list(feas["saving"]) == sorted(feas["saving"], reverse=True)
    assert "D" not in res.plan
    # fleet totals count D on its current truck in the plan
    assert res.yearly["electric_trucks"].iloc[1] == 3


def test_xlsx_fleet_file_reads_like_csv(tmp_path):
    from openpyxl import Workbook

    base = _base(tmp_path)
    csv_file = _fleet(tmp_path, [_row("A"), _row("B", "18:45", "05:15", dist="60000")])
    wb = Workbook()
    ws = wb.active

    def typed(cell):  # as a spreadsheet user would type them: times and numbers
        if re.fullmatch(r"\d\d:\d\d", cell):
            return datetime.time(int(cell[:2]), int(cell[3:]))
        return float(cell) if re.fullmatch(r"\d+", cell) else cell

    for k, line in enumerate(csv_file.read_text().splitlines()):
        ws.append(line.split(",") if k == 0 else [typed(c) for c in line.split(",")])
    wb.save(tmp_path / "fleet.xlsx")
    rows = read_fleet(tmp_path / "fleet.xlsx")
    assert rows == read_fleet(csv_file)
    assert base.is_file()
    # and both read as written, in SI (by hand): 60,000 km/yr = 6.0e7 m/yr; 19:00 is
    # 19 × 3600 = 68,400 s after midnight, 05:00 is 5 × 3600 = 18,000 s, 18:45 is
    # 64,800 + 45 × 60 = 67,500 s, 05:15 is 18,000 + 900 = 18,900 s; no distance given
    # on row A (the cycle's own is used)
    a, b = rows
    assert (a.row, a.vehicle, a.current, a.candidate) == (2, "A", "Diesel tractor",
                                                          "Electric tractor")
    assert (b.row, b.vehicle) == (3, "B")
    assert a.annual_distance is None and b.annual_distance == 6.0e7
    assert (a.arrive, a.depart) == (68_400.0, 18_000.0)
    assert (b.arrive, b.depart) == (67_500.0, 18_900.0)
    assert a.cycle == b.cycle == (tmp_path / "cycle.toml").resolve()


@pytest.mark.parametrize("rows, header, where, message", [
    ([_row("A"), _row("A")], HEADER, "row 3", "duplicate vehicle id 'A' (also on row 2)"),
    (["A,loop,missing.csv,Diesel tractor,Electric tractor,,,,"], HEADER, "row 2, cycle",
     "cycle file 'missing.csv' not found"),
    ([_row("A").replace("19:00", "25:00")], HEADER, "row 2, arrive", "not a clock time"),
    ([_row("A")], HEADER.replace("payload [t]", "paylaod [t]"), "header",
     "did you mean 'payload'"),
    ([_row("A")], HEADER.replace("payload [t]", "payload [km]"), "header",
     "column 'payload': 'km' is not a unit of the same kind as t"),
    ([_row("A")], HEADER.replace("candidate,", "").replace(",Electric tractor", ""),
     "header", "required column 'candidate' is missing"),
])
def test_bad_fleet_files(tmp_path, rows, header, where, message):
    _base(tmp_path)
    p = tmp_path / "fleet.csv"
    p.write_text(header + "\n".join(rows) + "\n", encoding="utf-8")
    with pytest.raises(InputError) as err:
        read_fleet(p)
    line = err.value.line()
    assert line.startswith(f"{p}: {where}: "), line
    if message:
        assert message in line
    assert "\n" not in line


def test_unknown_truck_names_the_row(tmp_path):
    base = _base(tmp_path)
    fleet = _fleet(tmp_path, [_row("A").replace("Electric tractor", "Electric tracter")])
    with pytest.raises(InputError) as err:
        _run(base, fleet)
    line = err.value.line()
    assert line.startswith(f"{fleet}: row 2, candidate: no truck 'Electric tracter'")
    assert "did you mean 'Electric tractor'" in line


def test_bad_cycle_names_the_row_and_the_cycle(tmp_path):
    base = _base(tmp_path)
    (tmp_path / "bad.toml").write_text(CYCLE.replace('speed = "80 km/h"', 'speed = "fast"',
                                                     1))
    fleet = _fleet(tmp_path, [_row("A"), _row("B").replace("cycle.toml", "bad.toml")])
    with pytest.raises(InputError) as err:
        _run(base, fleet)
    line = err.value.line()
    assert line.startswith(f"{fleet}: row 3 (B): bad.toml: route.legs[0].segments[0].speed")


def test_demo_fleet_runs_and_needs_shared_chargers():
    base = load_scenario(inputs_dir() / "fleet" / "base.toml")
    fleet = inputs_dir() / "fleet" / "fleet.csv"
    res = evaluate_fleet(base, read_fleet(fleet), fleet, jobs=2)
    assert len(res.routes) == 10
    assert res.depot_plan.chargers >= 2
    assert res.depot_plan.feasible.all()
    # the plan's avoided emissions are the sum over its routes, in physical tonnes: the
    # sum of the fleet's yearly tonnes; the abatement cost divides by discounted tonnes by
    # default (emissions.discount_tonnes), discounted like the savings (numpy_financial.npv)
    plan = res.routes[res.routes["in_plan"]]
    yearly_t = res.yearly.sort_values("year")["avoided_kg"].to_numpy() / 1000
    assert yearly_t.sum() == pytest.approx(plan["avoided_t"].sum(), rel=1e-9)
    assert res.plan_avoided_t == pytest.approx(yearly_t.sum(), rel=1e-9)
    assert base.scenario.emissions.discount_tonnes
    assert npf.npv(base.scenario.finance.discount_rate, yearly_t) == pytest.approx(
        plan["abatement_t"].sum(), rel=1e-9)
    # the plan's present-value saving is the net present value of the fleet's yearly
    # savings (year 0 undiscounted, numpy_financial.npv), and the sum of its routes'
    # differences (current minus candidate)
    saving = res.yearly.sort_values("year")["saving"].to_numpy()
    npv = npf.npv(base.scenario.finance.discount_rate, saving)
    assert npv == pytest.approx(-plan["pv_difference"].sum(), rel=1e-9)
    assert npv == pytest.approx((plan["pv_current"] - plan["pv_candidate"]).sum(), rel=1e-9)
    # the cost shares of the depot in the plan add up to one
    assert plan["depot_cost_share"].sum() == pytest.approx(1.0)
    # one route per vehicle row of the file, counted here with the csv module (comment
    # lines start with #), and the order lists each once
    with fleet.open(encoding="utf-8", newline="") as f:
        vehicles = [r["vehicle"] for r in csv.DictReader(
            ln for ln in f if ln.strip() and not ln.startswith("#"))]
    assert len(vehicles) == 10
    assert list(res.routes["vehicle"]) == vehicles
    assert sorted(res.order["vehicle"]) == sorted(vehicles)
    # from year 1 on, the plan runs one electric truck per planned route
    assert (res.yearly.sort_values("year")["electric_trucks"].iloc[1:] == len(plan)).all()
    assert tomllib.loads((inputs_dir() / "fleet" / "base.toml").read_text())["study"]["slug"]
