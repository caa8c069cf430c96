"""Telematics feeding the fleet (tco.fleet_telematics): logged duty replaces the cycle's.

One check runs the real chain — an invented Parquet dataset through ``tco telematics``
(process + write_outputs) into a fleet — and compares the fleet's yearly quantities with
the logged figures by hand arithmetic; the others use a hand-written vehicle_days.csv.
"""
from __future__ import annotations

import pandas as pd
import pytest

from tco.errors import InputError
from tco.fleet import evaluate_fleet, read_fleet
from tco.fleet_telematics import apply_logged_duty, read_logged_duty
from tco.resources import inputs_dir
from tco.scenario import load_scenario

from test_fleet import _base  # noqa: E402  (demo base and the invented cycle)

HEAD = ("vehicle,day (UTC),truck,distance [km],duration [h],gap time [h],diesel [L],"
        "battery energy [kWh],grid energy [kWh]\n")


def _logs(tmp_path, text):
    d = tmp_path / "tel"
    d.mkdir(exist_ok=True)
    (d / "vehicle_days.csv").write_text(HEAD + text, encoding="utf-8")
    return d


def _fleet(tmp_path):
    p = tmp_path / "fleet.csv"
    p.write_text("vehicle,route,cycle,current,candidate,depart\n"
                 "T1,loop,cycle.toml,Diesel tractor,Electric tractor,05:00\n"
                 "T2,loop,cycle.toml,Diesel tractor,Electric tractor,05:00\n",
                 encoding="utf-8")
    return p


def test_logged_duty_by_hand(tmp_path):
    """T1 logged two days: 300 + 500 km, 9 + 11 h driving with 1 + 1 h parked, diesel
    90 + 150 L (0.30 L/km), electric tractor grid 360 + 600 kWh (1.2 kWh/km).
    Per day: 400 km, span (9 + 1 + 11 + 1) / 2 = 11 h → back at 05:00 + 11 h = 16:00.
    With 250 days (the invented cycle's): 100,000 km a year. T2 has no logs."""
    base = load_scenario(_base(tmp_path))
    text = ("T1,2030-03-04,Diesel tractor,300,9,1,90,,\n"
            "T1,2030-03-05,Diesel tractor,500,11,1,150,,\n"
            "T1,2030-03-04,Electric tractor,300,9,1,,330,360\n"
            "T1,2030-03-05,Electric tractor,500,11,1,,550,600\n")
    logged = read_logged_duty(_logs(tmp_path, text))
    rows = read_fleet(_fleet(tmp_path))
    rows2, notes = apply_logged_duty(rows, logged, base)
    r = rows2[0]
    assert r.arrive == pytest.approx(16 * 3600.0)
    assert r.annual_distance == pytest.approx(400e3 * base.scenario.route.days_per_year)
    assert rows2[1] == rows[1]
    assert "no logs" in notes[1]
    res = evaluate_fleet(base, rows2, tmp_path / "fleet.csv", jobs=1)
    d_op, e_op = res.energies[0].operations
    assert d_op.diesel_volume / d_op.distance == pytest.approx(0.30e-3 / 1e3)   # m³/m
    grid = e_op.grid_energy_depot + e_op.grid_energy_public
    assert grid / e_op.distance == pytest.approx(1.2 * 3.6e6 / 1e3)            # J/m
    assert e_op.battery_energy / e_op.distance == pytest.approx(1.1 * 3.6e6 / 1e3)
    # trips a day are set from the cycle's trip distance; the simulated (resampled) trip
    # differs from it by well under a metre a trip: 1e-6 relative
    assert d_op.distance == pytest.approx(400e3 * 250, rel=1e-6)


def test_logged_vehicle_without_its_candidate_truck_is_refused(tmp_path):
    base = load_scenario(_base(tmp_path))
    logged = read_logged_duty(_logs(tmp_path, "T1,2030-03-04,Diesel tractor,300,9,1,90,,\n"))
    with pytest.raises(InputError, match="without truck 'Electric tractor'"):
        apply_logged_duty(read_fleet(_fleet(tmp_path)), logged, base)


def test_bad_logs_name_the_row(tmp_path):
    with pytest.raises(InputError) as e:
        read_logged_duty(_logs(tmp_path, "T1,2030-03-04,Diesel tractor,-3,9,1,90,,\n"))
    assert "row 2, distance [km]" in str(e.value)
    (tmp_path / "x").mkdir()
    with pytest.raises(InputError, match="no vehicle_days.csv"):
        read_logged_duty(tmp_path / "x")


@pytest.mark.parametrize("row, column", [
    # 24 h at 200 km/h is 4,800 km: 5,000 km cannot be one day's log
    ("T1,2030-03-04,Diesel tractor,5000,9,1,90,,\n", "distance [km]"),
    ("T1,2030-03-04,Diesel tractor,300,25,1,90,,\n", "duration [h]"),  # a day is 24 h
    ("T1,2030-03-04,Electric tractor,300,9,1,,20000,0\n", "battery energy [kWh]"),
])
def test_logs_beyond_what_a_day_can_hold_are_refused(tmp_path, row, column):
    with pytest.raises(InputError, match="more than one vehicle-day can hold") as e:
        read_logged_duty(_logs(tmp_path, row))
    assert f"row 2, {column}" in str(e.value)


def test_real_telematics_output_feeds_the_fleet(tmp_path):
    """tco telematics on an invented dataset (two vehicles, two days), then the fleet:
    each vehicle's yearly distance is its mean logged day × operating days, its diesel
    per distance the logged total over the logged distance, and the depot schedule holds
    each truck between its logged last arrival and first departure."""
    from tco.telematics import process, write_example_dataset, write_outputs

    base = load_scenario(inputs_dir() / "fleet" / "base.toml")
    data = tmp_path / "data"
    write_example_dataset(data, vehicles=2, days=2, seed=3, trips=1)
    out = tmp_path / "tel"
    write_outputs(process(data, base), out)
    days = pd.read_csv(out / "vehicle_days.csv", dtype={"vehicle": str})
    ids = sorted(days["vehicle"].unique())
    (tmp_path / "cycle.toml").write_text((inputs_dir() / "fleet" / "cycles" /
                                          "valley-shuttle.toml").read_text())
    rows = "\n".join(f"{v},logged,cycle.toml,Diesel tractor,Electric tractor" for v in ids)
    fleet = tmp_path / "fleet.csv"
    fleet.write_text("vehicle,route,cycle,current,candidate\n" + rows + "\n")
    fleet_rows, _ = apply_logged_duty(read_fleet(fleet), read_logged_duty(out), base)
    res = evaluate_fleet(base, fleet_rows, fleet, jobs=1)
    for e in res.energies:
        mine = days[(days["vehicle"] == e.row.vehicle) & (days["truck"] == "Diesel tractor")]
        per_day_km = mine["distance [km]"].sum() / mine["day (UTC)"].nunique()
        d_op = e.operations[0]
        year_days = e.scenario.route.days_per_year
        # the CSV shows 0.1 km and 0.1 L: compare to that rounding
        assert d_op.distance / 1e3 == pytest.approx(per_day_km * year_days, rel=1e-3)
        assert d_op.diesel_volume / d_op.distance * 1e6 == pytest.approx(
            mine["diesel [L]"].sum() / mine["distance [km]"].sum(), rel=2e-3)
        # the depot dwell window from the logs: two days each, less than 12 h apart, so
        # their clock mean is the plain mean of the two logged times
        dep = mine["first departure [h after 00:00 UTC]"]
        arr = mine["last arrival [h after 00:00 UTC]"]
        assert dep.max() - dep.min() < 12 and arr.max() - arr.min() < 12
        k = res.depot_all_vehicles.index(e.row.vehicle)
        assert float(res.depot_all.depart[k]) == pytest.approx(dep.mean() * 3600, rel=1e-9)
        assert float(res.depot_all.arrive[k]) == pytest.approx(arr.mean() * 3600, rel=1e-9)


HEAD_DWELL = HEAD.rstrip("\n") + (",first departure [h after 00:00 UTC],"
                                  "last arrival [h after 00:00 UTC]\n")


def test_logged_dwell_window_sets_the_depot_schedule(tmp_path):
    """T1 logged two days leaving at 04:30 and 05:30 and back at 23:30 and 00:30 (the
    second day's arrival after midnight). The clock mean (circular, so the arrivals
    average to midnight, not noon): departure 05:00 = 18,000 s, arrival 00:00 = 0 s.
    The fleet file gives T1 no departure here, so both come from the logs; the depot
    schedule then holds T1 from 00:00 to 05:00."""
    base = load_scenario(_base(tmp_path))
    d = tmp_path / "tel"
    d.mkdir()
    (d / "vehicle_days.csv").write_text(
        HEAD_DWELL
        + "T1,2030-03-04,Diesel tractor,300,9,1,90,,,4.5,23.5\n"
          "T1,2030-03-05,Diesel tractor,500,11,1,150,,,5.5,0.5\n"
          "T1,2030-03-04,Electric tractor,300,9,1,,330,360,4.5,23.5\n"
          "T1,2030-03-05,Electric tractor,500,11,1,,550,600,5.5,0.5\n", encoding="utf-8")
    fleet = tmp_path / "fleet.csv"
    fleet.write_text("vehicle,route,cycle,current,candidate\n"
                     "T1,loop,cycle.toml,Diesel tractor,Electric tractor\n", encoding="utf-8")
    logged = read_logged_duty(d)
    assert logged["depart_s"].tolist() == pytest.approx([18_000.0, 18_000.0])
    arrive = logged["arrive_s"].to_numpy() % 86_400.0
    assert min(arrive[0], 86_400.0 - arrive[0]) == pytest.approx(0.0, abs=1e-6)
    rows, _ = apply_logged_duty(read_fleet(fleet), logged, base)
    assert rows[0].depart == pytest.approx(18_000.0)
    res = evaluate_fleet(base, rows, fleet, jobs=1)
    sched = res.depot_all
    assert float(sched.depart[0]) == pytest.approx(18_000.0)
    a = float(sched.arrive[0]) % 86_400.0
    assert min(a, 86_400.0 - a) == pytest.approx(0.0, abs=1e-6)


def test_clock_mean_by_hand():
    """Circular mean on the 24-hour clock: 22:00 and 02:00 → 00:00; 06:00 and 08:00 →
    07:00; blanks left out."""
    from tco.fleet_telematics import clock_mean
    h = 3600.0
    m = clock_mean([22 * h, 2 * h]) % 86_400.0
    assert min(m, 86_400.0 - m) == pytest.approx(0.0, abs=1e-6)
    assert clock_mean([6 * h, 8 * h, float("nan")]) == pytest.approx(7 * h)
    assert clock_mean([float("nan")]) != clock_mean([float("nan")])  # NaN


def test_logged_times_outside_the_day_are_refused(tmp_path):
    d = tmp_path / "tel"
    d.mkdir()
    (d / "vehicle_days.csv").write_text(
        HEAD_DWELL + "T1,2030-03-04,Diesel tractor,300,9,1,90,,,25,18\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"row 2, first departure"):
        read_logged_duty(d)
