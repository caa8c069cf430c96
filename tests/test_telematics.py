"""Tests of tco.telematics: fleet telematics through the energy kernel, in one process and
on Dask.

Outside sources used below:

* Road-load form F = A + B·v + C·v² with A = Crr·m·g and C = ½·ρ·Cd·A_f (SAE J1263 /
  40 CFR 1037.528, as listed in /work/shared/references.md); on a grade m·g·sin θ with
  θ = atan(grade) (definition of grade, references.md).
* Air density of the U.S. Standard Atmosphere 1976 from the independent ``fluids``
  library (``fluids.atmosphere.ATMOSPHERE_1976``).
* Standard gravity from ``scipy.constants.g`` (CGPM 1901).
* Constant brake-specific fuel consumption: fuel mass = BSFC × engine work (definition).
* Diesel exhaust fluid as a share of diesel volume (common practice, about 2 %).

The Dask tests start real clusters (worker processes) and run in the default suite.
"""
from __future__ import annotations

import math
import socket
import time

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from fluids.atmosphere import ATMOSPHERE_1976
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from openpyxl import load_workbook
from scipy.constants import g as G_SCIPY

from tco import energy, kernel
from tco import telematics as tm
from tco.errors import InputError
from tco.resources import demo_path
from tco.scenario import load_scenario

V = 22.0            # speed [m/s]
N = 1801            # samples at 1 Hz: 1800 s of driving
M_CURB = 15000.0    # [kg]
PAYLOAD = 20000.0   # [kg]
CD, AREA, CRR = 0.6, 10.0, 0.006
ETA_DL, BSFC_G_KWH, P_ACC = 0.9, 200.0, 2000.0      # diesel driveline, BSFC, accessories
ETA_E, P_AUX, ETA_CHARGE = 0.9, 3000.0, 0.8         # electric drivetrain, aux, charging
DENSITY_DIESEL = 832.0                               # [kg/m³]
T0 = pd.Timestamp("2030-03-04 08:00:00", tz="UTC")


def write_scenario(tmp_path, smoothing=250.0):
    """A two-truck scenario with round numbers (its route is not used by telematics)."""
    body = (f"curb_mass = {M_CURB / 1000}\ndrag_coefficient = {CD}\nfrontal_area = {AREA}\n"
            f"rolling_resistance = {CRR}\nrotating_mass_factor = 1.0\n")
    (tmp_path / "s.toml").write_text(f"""
[study]
name = "telematics test"
[ambient]
temperature = 15
altitude = 0
[route]
smoothing_window = {smoothing}
[[route.legs]]
payload = 0
  [[route.legs.segments]]
  length = 1
  speed = 50
[[trucks]]
name = "D"
powertrain = "diesel"
  [trucks.body]
  {body}
  [trucks.diesel]
  engine_power = 2000
  fuel_model = "constant_bsfc"
  bsfc = {BSFC_G_KWH}
  driveline_efficiency = {ETA_DL}
  accessory_power = {P_ACC / 1000}
  idle_fuel_rate = 0
  def_ratio = 0.02
[[trucks]]
name = "E"
powertrain = "electric"
  [trucks.body]
  {body}
  [trucks.electric]
  battery_capacity = 5000
  motor_power = 2000
  regen_power = 2000
  drivetrain_efficiency = {ETA_E}
  aux_power = {P_AUX / 1000}
  heating_per_kelvin = 0
  cooling_per_kelvin = 0
  charging_efficiency = {ETA_CHARGE}
""")
    return load_scenario(tmp_path / "s.toml")


def day_frame(n=N, speed=V, payload=PAYLOAD, vehicle="A1", start=T0, elevation=None,
              grade=None):
    """One vehicle-day at 1 Hz as a DataFrame (flat, constant speed by default)."""
    df = pd.DataFrame({
        "vehicle": vehicle,
        "timestamp": start + pd.to_timedelta(np.arange(n), unit="s"),
        "speed": np.broadcast_to(np.asarray(speed, float), (n,)).copy(),
        "payload": np.broadcast_to(np.asarray(payload, float), (n,)).copy(),
    })
    if grade is not None:
        df["grade"] = grade
    else:
        df["elevation"] = 0.0 if elevation is None else elevation
    return df


def write(path, df):
    path.parent.mkdir(parents=True, exist_ok=True)
    pq.write_table(pa.Table.from_pandas(df, preserve_index=False), path)
    return path


def only_row(result, truck):
    rows = result.vehicle_days[result.vehicle_days["truck"] == truck]
    assert len(rows) == 1
    return rows.iloc[0]


def road_force(mass, rho, v=V, grade=0.0):
    """F = Crr·m·g·cos θ + ½·ρ·Cd·A·v² + m·g·sin θ, θ = atan(grade) (SAE J1263 form).

    Crr at the scenario's 15 °C from its 25 °C label value by the UNECE Regulation
    No. 117 Annex 6 correction, F_r25 = F_r·[1 + 0.006·(t − 25)] (C3 tyres)."""
    th = math.atan(grade)
    crr = CRR / (1 + 0.006 * (15.0 - 25.0))
    return (crr * mass * G_SCIPY * math.cos(th) + 0.5 * rho * CD * AREA * v**2
            + mass * G_SCIPY * math.sin(th))


# ----------------------------------------------------------------------------- physics
def test_constant_speed_flat_day_matches_road_load_by_hand(tmp_path):
    loaded = write_scenario(tmp_path)
    write(tmp_path / "data" / "p0.parquet", day_frame())
    res = tm.process(tmp_path / "data", loaded)

    # 1976 standard atmosphere at 0 m, 15 °C (its own sea-level temperature): fluids
    rho = ATMOSPHERE_1976(0.0).rho
    d = V * (N - 1)
    t = N - 1.0
    work = road_force(M_CURB + PAYLOAD, rho) * d          # F·d, no acceleration, flat
    ev, di = only_row(res, "E"), only_row(res, "D")
    for row in (ev, di):
        assert row["distance_m"] == pytest.approx(d, rel=1e-12)
        assert row["duration_s"] == pytest.approx(t, rel=1e-12)
        assert row["payload_distance_kg_m"] == pytest.approx(PAYLOAD * d, rel=1e-12)
        assert row["payload_max_kg"] == PAYLOAD
        assert row["samples"] == N and row["gaps"] == 0 and row["duplicates_dropped"] == 0
    # battery: wheel work through the drivetrain plus auxiliaries over the time; the
    # tolerance covers the kernel's air density (ideal gas, R_air = 287.053) vs fluids
    battery = work / ETA_E + P_AUX * t
    assert ev["battery_energy_J"] == pytest.approx(battery, rel=1e-6)
    assert ev["grid_energy_J"] == pytest.approx(battery / ETA_CHARGE, rel=1e-6)
    assert ev["battery_need_J"] == pytest.approx(battery, rel=1e-6)  # monotone discharge
    usable = 5000 * 3.6e6 * loaded.scenario.trucks[1].electric.usable_share
    assert ev["soc_min"] == pytest.approx(1.0 - battery / usable, rel=1e-9)
    assert bool(ev["battery_fits"]) and bool(ev["payload_fits"])
    # diesel, constant BSFC: fuel mass = BSFC · (wheel work / η + accessory power · t)
    fuel_mass = BSFC_G_KWH * 1e-3 / 3.6e6 * (work / ETA_DL + P_ACC * t)
    assert di["diesel_fuel_m3"] == pytest.approx(fuel_mass / DENSITY_DIESEL, rel=1e-6)
    # DEF: 2 % of the diesel volume (common practice)
    assert di["diesel_def_m3"] == pytest.approx(0.02 * di["diesel_fuel_m3"], rel=1e-12)
    assert pd.isna(di["battery_energy_J"]) and pd.isna(ev["diesel_fuel_m3"])


def test_payload_change_splits_legs_and_mass_matters(tmp_path):
    loaded = write_scenario(tmp_path)
    k = 1000                                     # payload dropped at sample 1000
    payload = np.where(np.arange(N) < k, PAYLOAD, 0.0)
    write(tmp_path / "two" / "p.parquet", day_frame(payload=payload))
    write(tmp_path / "one" / "p.parquet", day_frame())
    two = only_row(tm.process(tmp_path / "two", loaded), "E")
    one = only_row(tm.process(tmp_path / "one", loaded), "E")

    rho = ATMOSPHERE_1976(0.0).rho
    d1, d2 = V * k, V * (N - 1 - k)              # interval i takes the mass at sample i
    work = road_force(M_CURB + PAYLOAD, rho) * d1 + road_force(M_CURB, rho) * d2
    assert two["battery_energy_J"] == pytest.approx(work / ETA_E + P_AUX * (N - 1),
                                                    rel=1e-6)
    # the empty leg saves exactly the rolling resistance of the payload over it
    saved = CRR / (1 + 0.006 * (15.0 - 25.0)) * PAYLOAD * G_SCIPY * d2 / ETA_E
    assert one["battery_energy_J"] - two["battery_energy_J"] == pytest.approx(saved,
                                                                              rel=1e-6)
    assert two["payload_distance_kg_m"] == pytest.approx(PAYLOAD * d1, rel=1e-12)
    assert two["payload_max_kg"] == PAYLOAD


def test_same_as_calling_the_kernel_directly(tmp_path):
    """Varying speed, hills and three payload legs: the row equals run_trace on the same
    arrays (at the source's own 1 Hz step resampling changes nothing)."""
    loaded = write_scenario(tmp_path, smoothing=0)
    i = np.arange(N)
    v = 15.0 + 5.0 * np.sin(i / 90.0)
    s = np.concatenate(([0.0], np.cumsum(0.5 * (v[1:] + v[:-1]))))
    z = 300.0 + 25.0 * np.sin(s / 3000.0)
    payload = np.select([i < 600, i < 1200], [PAYLOAD, 8000.0], 0.0)
    write(tmp_path / "d" / "p.parquet", day_frame(speed=v, payload=payload, elevation=z))
    res = tm.process(tmp_path / "d", loaded)

    sc = loaded.scenario
    grade = np.diff(z) / np.diff(s)
    grade = np.append(grade, grade[-1])
    starts = np.array([0, 600, 1200])
    for truck in sc.trucks:
        is_e = truck.powertrain == "electric"
        veh = energy.vehicle_parameters(truck, sc.ambient, float(z.mean()))
        die = energy.diesel_parameters(truck.diesel) if not is_e else energy.NO_DIESEL
        ele = (energy.electric_parameters(truck.electric, sc.ambient.temperature) if is_e
               else energy.NO_ELECTRIC)
        tot = kernel.run_trace(v, grade, 1.0, starts, M_CURB + payload[starts], veh, die,
                               ele).totals
        row = only_row(res, truck.name)
        assert row["distance_m"] == pytest.approx(tot["distance"], rel=1e-12)
        if is_e:
            assert row["battery_energy_J"] == pytest.approx(
                tot["electric_battery_energy_net"], rel=1e-9)
            assert row["soc_min"] == pytest.approx(tot["electric_soc_min"], rel=1e-9)
        else:
            assert row["diesel_fuel_m3"] == pytest.approx(tot["diesel_fuel_volume"],
                                                          rel=1e-9)


def test_grade_column_equals_elevation_column(tmp_path):
    """A steady 2 % grade given as grade, or as elevation (which the smoothing keeps
    exactly), gives the same day; the climb adds m·g·sin θ (θ = atan(grade))."""
    loaded = write_scenario(tmp_path)
    gr = 0.02
    s = V * np.arange(N)
    write(tmp_path / "g" / "p.parquet", day_frame(grade=np.full(N, gr)))
    write(tmp_path / "z" / "p.parquet", day_frame(elevation=gr * s))
    by_grade = only_row(tm.process(tmp_path / "g", loaded), "E")
    by_z = only_row(tm.process(tmp_path / "z", loaded), "E")
    assert by_grade["battery_energy_J"] == pytest.approx(by_z["battery_energy_J"], rel=1e-9)
    # air at the mean elevation of each day: both start at the scenario's altitude 0 m
    rho = ATMOSPHERE_1976(float(np.mean(gr * s))).P / (287.053 * 288.15)
    work = road_force(M_CURB + PAYLOAD, rho, grade=gr) * V * (N - 1)
    # the trace's distance is horizontal; the road runs √(1+g²) longer (documented in
    # tco.dutycycle), so the forces above act over the horizontal distance here
    assert by_grade["battery_energy_J"] == pytest.approx(work / ETA_E + P_AUX * (N - 1),
                                                         rel=1e-6)


def test_gap_is_parked_time_not_driven(tmp_path):
    loaded = write_scenario(tmp_path)
    a = day_frame(n=601)
    b = day_frame(n=601, start=T0 + pd.Timedelta(seconds=600 + 1800))  # 30 min off
    write(tmp_path / "d" / "p.parquet", pd.concat([a, b]))
    row = only_row(tm.process(tmp_path / "d", loaded), "D")
    assert row["gaps"] == 1
    assert row["gap_time_s"] == 1800.0
    # two stints of 600 s and one step joining them; no time or idling for the gap
    assert row["duration_s"] == 600 + 600 + 1
    assert row["distance_m"] == pytest.approx(V * 1201, rel=1e-12)


def test_duplicate_timestamps_keep_the_first_row(tmp_path):
    loaded = write_scenario(tmp_path)
    df = day_frame()
    dup = df.iloc[[10, 500, 501]].assign(speed=0.0)   # repeated stamps, different values
    write(tmp_path / "dup" / "p.parquet", pd.concat([df, dup]).sample(frac=1, random_state=1))
    write(tmp_path / "clean" / "p.parquet", df)
    got = tm.process(tmp_path / "dup", loaded).vehicle_days
    ref = tm.process(tmp_path / "clean", loaded).vehicle_days
    assert (got["duplicates_dropped"] == 3).all()
    cols = ["distance_m", "battery_energy_J", "diesel_fuel_m3", "soc_min"]
    pd.testing.assert_frame_equal(got[cols], ref[cols])


def test_timestamp_as_seconds_and_vehicle_from_hive_folder(tmp_path):
    loaded = write_scenario(tmp_path)
    df = day_frame()
    write(tmp_path / "a" / "p.parquet", df)
    secs = df.drop(columns="vehicle").assign(
        timestamp=(df["timestamp"] - pd.Timestamp("1970-01-01", tz="UTC")).dt.total_seconds())
    write(tmp_path / "b" / "vehicle=A1" / "p.parquet", secs)
    ra = tm.process(tmp_path / "a", loaded).vehicle_days
    rb = tm.process(tmp_path / "b", loaded).vehicle_days
    assert rb["vehicle"].tolist() == ["A1", "A1"] and rb["day"].tolist() == ["2030-03-04"] * 2
    cols = ["distance_m", "battery_energy_J", "diesel_fuel_m3"]
    pd.testing.assert_frame_equal(ra[cols], rb[cols])


def test_day_is_the_utc_date(tmp_path):
    loaded = write_scenario(tmp_path)
    start = pd.Timestamp("2030-03-04 23:30", tz="UTC")   # 30 min before midnight, 1 h on
    write(tmp_path / "d" / "p.parquet", day_frame(n=3601, start=start))
    res = tm.process(tmp_path / "d", loaded)
    assert sorted(res.vehicle_days["day"].unique()) == ["2030-03-04", "2030-03-05"]


def test_single_sample_day_is_skipped_with_reason(tmp_path):
    loaded = write_scenario(tmp_path)
    lone = day_frame(n=1, vehicle="B2")
    write(tmp_path / "d" / "p.parquet", pd.concat([day_frame(), lone]))
    res = tm.process(tmp_path / "d", loaded)
    assert res.skipped["vehicle"].tolist() == ["B2"]
    assert "time step" in res.skipped["reason"].iloc[0]
    assert set(res.vehicle_days["vehicle"]) == {"A1"}


@settings(max_examples=25, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(seed=st.integers(0, 2**32 - 1))
def test_row_order_does_not_matter(tmp_path, seed):
    """Property: shuffling a partition's rows changes nothing (samples are sorted)."""
    loaded = write_scenario(tmp_path)
    i = np.arange(900)
    df = pd.concat([
        day_frame(n=900, speed=12 + 6 * np.sin(i / 40), payload=np.where(i < 450, 9e3, 2e3),
                  elevation=40 * np.sin(i / 300)),
        day_frame(n=900, vehicle="Z9", speed=18.0, elevation=5.0)])
    ref = tm.process_table(df, loaded, source="p").rows
    shuffled = df.sample(frac=1, random_state=np.random.RandomState(seed % 2**32))
    got = tm.process_table(shuffled, loaded, source="p").rows
    key = ["vehicle", "day", "truck"]
    pd.testing.assert_frame_equal(got.sort_values(key, ignore_index=True),
                                  ref.sort_values(key, ignore_index=True))


# ----------------------------------------------------------------------------- bad input
def assert_one_line(exc: InputError, file=None, where=None):
    assert "\n" not in str(exc)
    if file is not None:
        assert exc.file == str(file)
    if where is not None:
        assert exc.where == where


@pytest.mark.parametrize("change, where", [
    (lambda df: df.drop(columns="payload"), "payload"),
    (lambda df: df.drop(columns="timestamp"), "timestamp"),
    (lambda df: df.drop(columns="vehicle"), "vehicle"),
    (lambda df: df.drop(columns="elevation"), "elevation"),
    (lambda df: df.assign(grade=0.0), "grade"),                       # both given
    (lambda df: df.assign(speed=np.where(df.index == 7, -1.0, V)), "speed"),
    (lambda df: df.assign(speed=df["speed"].astype(str)), "speed"),   # not numbers
    (lambda df: df.assign(payload=np.where(df.index == 3, np.nan, 1.0)), "payload"),
    (lambda df: df.assign(timestamp="08:00"), "timestamp"),
])
def test_bad_partition_is_one_line_naming_file_and_column(tmp_path, change, where):
    loaded = write_scenario(tmp_path)
    path = write(tmp_path / "d" / "day=1" / "bad.parquet", change(day_frame()))
    with pytest.raises(InputError) as info:
        tm.process(tmp_path / "d", loaded)
    assert_one_line(info.value, file=path, where=where)


def test_grade_beyond_thirty_percent_names_vehicle_and_column(tmp_path):
    loaded = write_scenario(tmp_path)
    path = write(tmp_path / "d" / "p.parquet", day_frame(grade=np.full(N, 35.0)))  # percent
    with pytest.raises(InputError, match="beyond") as info:
        tm.process(tmp_path / "d", loaded)
    assert_one_line(info.value, file=path, where="grade")


def test_vehicle_day_split_across_partitions_names_both_files(tmp_path):
    loaded = write_scenario(tmp_path)
    df = day_frame()
    first = write(tmp_path / "d" / "part-0.parquet", df.iloc[:900])
    second = write(tmp_path / "d" / "part-1.parquet", df.iloc[900:])
    with pytest.raises(InputError, match="whole in one partition") as info:
        tm.process(tmp_path / "d", loaded)
    assert_one_line(info.value, file=first, where="vehicle")
    assert str(second) in str(info.value)


def test_unreadable_or_missing_dataset(tmp_path):
    loaded = write_scenario(tmp_path)
    with pytest.raises(InputError, match="not found"):
        tm.process(tmp_path / "nowhere", loaded)
    (tmp_path / "empty").mkdir()
    with pytest.raises(InputError, match="no Parquet files"):
        tm.process(tmp_path / "empty", loaded)
    (tmp_path / "junk").mkdir()
    (tmp_path / "junk" / "x.parquet").write_text("not parquet")
    with pytest.raises(InputError, match="not a readable Parquet file") as info:
        tm.process(tmp_path / "junk", loaded)
    assert_one_line(info.value, file=tmp_path / "junk" / "x.parquet")


def _closed_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.mark.parametrize("address", [lambda: f"tcp://127.0.0.1:{_closed_port()}",
                                     lambda: "no-port-here", lambda: "xyz://127.0.0.1:1"])
def test_bad_scheduler_address(tmp_path, address):
    loaded = write_scenario(tmp_path)
    write(tmp_path / "d" / "p.parquet", day_frame(n=10))
    with pytest.raises(InputError, match="cannot connect to the Dask scheduler") as info:
        tm.process(tmp_path / "d", loaded, scheduler=address(), connect_timeout=5)
    assert_one_line(info.value, where="--scheduler")


def test_conflicting_options(tmp_path):
    loaded = write_scenario(tmp_path)
    write(tmp_path / "d" / "p.parquet", day_frame(n=10))
    with pytest.raises(InputError, match="not both"):
        tm.process(tmp_path / "d", loaded, scheduler="tcp://127.0.0.1:1", local_workers=2)
    with pytest.raises(InputError) as info:
        tm.process(tmp_path / "d", loaded, memory_limit="1GB")
    assert info.value.where == "--memory-limit"
    with pytest.raises(InputError) as info:
        tm.process(tmp_path / "d", loaded, local_workers=0)
    assert info.value.where == "--workers"


# ----------------------------------------------------------------------------- Dask
@pytest.fixture(scope="module")
def example_dataset(tmp_path_factory):
    folder = tmp_path_factory.mktemp("fleet")
    files = tm.write_example_dataset(folder, vehicles=3, days=2, seed=11, files_per_day=2,
                                     trips=1)
    return folder, files


def assert_same_results(a: tm.TelematicsResult, b: tm.TelematicsResult):
    """Same rows, texts and flags; numbers equal to 1e-9 relative."""
    for name in ("vehicle_days", "vehicles"):
        x, y = getattr(a, name), getattr(b, name)
        assert list(x.columns) == list(y.columns) and len(x) == len(y) > 0
        for col in x.columns:
            if x[col].dtype == np.float64:
                np.testing.assert_allclose(y[col].to_numpy(), x[col].to_numpy(), rtol=1e-9,
                                           atol=0, equal_nan=True, err_msg=col)
            else:
                pd.testing.assert_series_equal(x[col], y[col])


def test_dask_local_cluster_matches_single_process(example_dataset):
    folder, files = example_dataset
    loaded = load_scenario(demo_path())
    single = tm.process(folder, loaded)
    calls = []
    # 1 GB: a worker holds about 360 MB before any partition and Dask pauses it at 80 %
    dask = tm.process(folder, loaded, local_workers=2, memory_limit="1GB",
                      progress=lambda done, total: calls.append((done, total)))
    assert dask.backend == "local cluster (2 workers)"
    assert calls == [(k, len(files)) for k in range(1, len(files) + 1)]
    assert_same_results(single, dask)
    assert dask.partitions == single.partitions and dask.rows_read == single.rows_read
    assert len(single.vehicle_days) == 3 * 2 * 2          # vehicles × days × trucks


def test_dask_scheduler_address_matches_and_keeps_error_location(example_dataset, tmp_path):
    from distributed import LocalCluster

    folder, _ = example_dataset
    loaded = load_scenario(demo_path())
    single = tm.process(folder, loaded)
    bad = write(tmp_path / "bad" / "p.parquet", day_frame().drop(columns="speed"))
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                      dashboard_address=None) as cluster:
        remote = tm.process(folder, loaded, scheduler=cluster.scheduler_address)
        assert remote.backend == cluster.scheduler_address
        with pytest.raises(InputError) as info:
            tm.process(tmp_path / "bad", loaded, scheduler=cluster.scheduler_address)
    assert_same_results(single, remote)
    assert_one_line(info.value, file=bad, where="speed")


# ----------------------------------------------------------------------------- outputs
def test_vehicle_summary_totals_and_shares(example_dataset):
    folder, _ = example_dataset
    res = tm.process(folder, load_scenario(demo_path()))
    days, veh = res.vehicle_days, res.vehicles
    assert len(veh) == 3 * 2
    for _, r in veh.iterrows():
        mine = days[(days["vehicle"] == r["vehicle"]) & (days["truck"] == r["truck"])]
        assert r["days"] == len(mine) == 2
        assert r["distance_m"] == pytest.approx(mine["distance_m"].sum(), rel=1e-12)
        if r["powertrain"] == "electric":
            assert r["battery_energy_per_distance_J_per_m"] == pytest.approx(
                mine["battery_energy_J"].sum() / mine["distance_m"].sum(), rel=1e-12)
            assert r["days_battery_fits_share"] == mine["battery_fits"].astype(float).mean()
            worst = mine.loc[mine["battery_need_J"].idxmax()]
            assert r["worst_day"] == worst["day"]
            assert r["worst_day_battery_need_J"] == worst["battery_need_J"]
        else:
            assert math.isnan(r["days_battery_fits_share"])
            assert r["diesel_fuel_m3"] == pytest.approx(mine["diesel_fuel_m3"].sum())
    # plausibility of the invented fleet on the demo trucks: a 40 t class tractor uses
    # roughly 25–45 L/100 km of diesel (common practice, from memory)
    per_100km = veh["diesel_fuel_per_distance_m3_per_m"].dropna() * 1e8
    assert per_100km.between(20, 50).all()


def test_write_outputs_files_units_and_safety(tmp_path):
    loaded = write_scenario(tmp_path)
    hostile = '=HYPERLINK("http://x","y")'
    write(tmp_path / "d" / "p.parquet", day_frame(vehicle=hostile))
    res = tm.process(tmp_path / "d", loaded)
    out = tmp_path / "out"
    (out).mkdir()
    (out / "keep.txt").write_text("mine")
    written = tm.write_outputs(res, out)
    assert sorted(p.name for p in written) == ["skipped_days.csv", "telematics.xlsx",
                                               "vehicle_days.csv", "vehicles.csv"]
    assert (out / "keep.txt").read_text() == "mine"          # files not ours stay
    assert not [p for p in out.iterdir() if p.name.startswith(".")]  # no staging left

    csv = pd.read_csv(out / "vehicle_days.csv")
    assert csv["distance [km]"].tolist() == pytest.approx(
        (res.vehicle_days["distance_m"] / 1000).tolist(), rel=1e-12)
    ev = res.vehicle_days["truck"] == "E"
    assert csv.loc[ev.to_numpy(), "battery energy [kWh]"].iloc[0] == pytest.approx(
        res.vehicle_days.loc[ev, "battery_energy_J"].iloc[0] / 3.6e6, rel=1e-12)

    wb = load_workbook(out / "telematics.xlsx")
    assert wb.sheetnames == ["Vehicle days", "Vehicles", "Skipped", "Notes"]
    ws = wb["Vehicle days"]
    assert ws.freeze_panes == "A2"
    assert ws["A2"].value == hostile and ws["A2"].data_type == "s"   # text, not a formula
    header = [c.value for c in ws[1]]
    col = header.index("distance [km]") + 1
    assert ws.cell(row=2, column=col).number_format == "#,##0.0"
    notes = " ".join(str(c.value) for c in wb["Notes"]["A"] if c.value)
    assert "not financial" in notes and "estimates" in notes.lower()


def test_example_dataset_is_reproducible_and_partitioned_by_day(tmp_path):
    a = tm.write_example_dataset(tmp_path / "a", vehicles=2, days=2, seed=5, trips=1)
    b = tm.write_example_dataset(tmp_path / "b", vehicles=2, days=2, seed=5, trips=1)
    assert [p.relative_to(tmp_path / "a") for p in a] == \
        [p.relative_to(tmp_path / "b") for p in b]
    for x, y in zip(a, b):
        assert pq.read_table(x).equals(pq.read_table(y))
    t = pq.read_table(a[0]).to_pandas()
    assert set(t.columns) == {"vehicle", "timestamp", "speed", "elevation", "payload"}
    assert (t["speed"] >= 0).all() and t["timestamp"].dt.date.nunique() == 1


def test_dwell_window_first_departure_and_last_arrival(tmp_path):
    """A day parked at the depot from 05:00, moving from 05:10:00 to 15:00:00 (with the
    last moving sample at 14:59:59) and parked again until 16:00; samples every second.
    By hand: the last sample at rest before moving is 05:09:59 = 18,599 s, the first at
    rest after the last moving one is 15:00:00 = 54,000 s (UTC clock)."""
    loaded = write_scenario(tmp_path)
    start = pd.Timestamp("2030-03-04 05:00:00", tz="UTC")
    n = 11 * 3600 + 1
    t = np.arange(n)
    speed = np.where((t >= 600) & (t < 10 * 3600), 10.0, 0.0)
    write(tmp_path / "d" / "p.parquet", day_frame(n=n, speed=speed, start=start))
    res = tm.process(tmp_path / "d", loaded)
    for truck in ("D", "E"):
        row = only_row(res, truck)
        assert row["first_departure_s"] == 5 * 3600 + 599
        assert row["last_arrival_s"] == 15 * 3600
    assert tm.dwell_window(np.array([1.0, 2.0, 3.0]), np.array([4.0, 0.0, 4.0])) == (1.0, 3.0)
    first, last = tm.dwell_window(np.array([1.0, 2.0]), np.zeros(2))
    assert math.isnan(first) and math.isnan(last)
    out = tmp_path / "out"
    tm.write_outputs(res, out)
    csv = pd.read_csv(out / "vehicle_days.csv")
    assert csv["first departure [h after 00:00 UTC]"].tolist() == \
        pytest.approx([(5 * 3600 + 599) / 3600] * 2, rel=1e-12)
    assert csv["last arrival [h after 00:00 UTC]"].tolist() == pytest.approx([15.0] * 2)


def test_vehicle_ids_read_as_a_dictionary_are_numbered_as_the_text():
    """Vehicle ids arrive as a Parquet dictionary, in chunks with dictionaries of their
    own order: the codes are those pyarrow.compute.dictionary_encode gives the text
    (numbered in order of first appearance; pyarrow is the reference)."""
    import pyarrow.compute as pc

    text = ["V2", "V1", "V2", "V3", "V1", "V3"]
    chunk1 = pa.DictionaryArray.from_arrays(pa.array([1, 2, 1], pa.int32()),
                                            pa.array(["V3", "V2", "V1"]))
    chunk2 = pa.DictionaryArray.from_arrays(pa.array([0, 1, 0], pa.int32()),
                                            pa.array(["V3", "V1", "V9"]))
    table = pa.table({"vehicle": pa.chunked_array([chunk1, chunk2])})
    codes, ids = tm._vehicle_codes(table, "f.parquet", {}, len(text))
    ref = pc.dictionary_encode(pa.array(text))
    assert codes.tolist() == ref.indices.to_pylist()
    assert ids == ref.dictionary.to_pylist() == ["V2", "V1", "V3"]


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 3), st.sampled_from([0.0, 0.0, 2.5])),
                min_size=1, max_size=40))
def test_dwell_window_of_rows_keeps_the_first_of_repeated_times(steps):
    """The compiled dwell window on rows with repeated timestamps equals dwell_window on
    the rows kept (first of each repeated time), the rule written out here with numpy."""
    t = np.cumsum([float(s) for s, _ in steps])
    v = np.array([x for _, x in steps])
    keep = np.concatenate(([True], np.diff(t) > 0))
    ref = tm.dwell_window(t[keep], v[keep])
    got = tm._dwell_window_of_rows(t, v)
    assert (np.isnan(got[0]) and np.isnan(ref[0])) or got == ref


@pytest.mark.parametrize("column, value, row, message", [
    ("speed", np.nan, 7, "blank value at row 7"),  # pandas NaN: an Arrow null
    ("speed", -np.inf, 3, "non-finite value -inf at row 3"),
    ("speed", -0.5, 5, r"negative speed -0\.5\d* m/s at row 5"),
    ("payload", -1.0, 9, r"negative payload -1(\.0+)? kg at row 9"),
    ("elevation", np.inf, 2, "non-finite value inf at row 2"),
    ("grade", 0.35, 4, "grade 35.0 % at row 4 is beyond"),
    ("grade", -0.31, 6, "grade -31.0 % at row 6 is beyond"),
])
def test_bad_value_names_its_column_and_first_row(column, value, row, message):
    # Hand-made table: the first bad row is where the value was put (a second bad value
    # later on must not be the one named); rows count from 0.
    n = 12
    terrain = "grade" if column == "grade" else "elevation"
    df = pd.DataFrame({"vehicle": ["A"] * n,
                       "timestamp": pd.date_range("2030-03-04 06:00", periods=n, freq="s",
                                                  tz="UTC"),
                       "speed": np.full(n, 10.0), terrain: np.zeros(n),
                       "payload": np.full(n, 5e3)})
    df.loc[row, column] = value
    df.loc[n - 1, column] = value
    with pytest.raises(InputError, match=message) as exc:
        tm.process_table(df, load_scenario(demo_path()), source="p.parquet")
    assert exc.value.where == column


def test_reading_ahead_gives_each_partition_in_order(tmp_path, monkeypatch):
    """One process reads the next partition on a second thread while it works on one: the
    rows equal process_partition on each file in turn, and of two bad partitions the
    first in file order is the one reported (as one file at a time would), even though
    the second was read while the first was being worked on."""
    loaded = write_scenario(tmp_path)
    folder = tmp_path / "ok"
    files = tm.write_example_dataset(folder, vehicles=2, days=2, seed=7, trips=1,
                                     files_per_day=2)
    res = tm.process(folder, loaded)
    one_by_one = [tm.process_partition(f, loaded.scenario, root=folder).rows
                  for f in tm.find_partitions(folder)[1]]
    assert len(files) >= 3
    expected = pd.concat(one_by_one, ignore_index=True)
    assert len(expected) == len(res.vehicle_days) == 2 * 2 * 2  # vehicles × days × trucks
    key = ["vehicle", "day", "truck"]
    pd.testing.assert_frame_equal(
        res.vehicle_days.sort_values(key).reset_index(drop=True),
        expected.sort_values(key).reset_index(drop=True), check_exact=True)
    bad = tmp_path / "bad"
    # a fails while its vehicle-days are driven (a stand-in fault), after b, itself
    # unreadable, has been read on the other thread: a's error is the one reported
    first = write(bad / "a.parquet", day_frame())
    write(bad / "b.parquet", day_frame(vehicle="B1").drop(columns="speed"))
    read, drive = [], tm._process_columns
    real_read = tm._read_partition

    def reading(path, name, threads=True):
        read.append(name)
        return real_read(path, name, threads)

    def driving(columns, scenario, name, path, gap_limit):
        if name == "a.parquet":
            deadline = time.monotonic() + 30
            while len(read) < 2 and time.monotonic() < deadline:  # b's reading started
                time.sleep(0.01)
            raise InputError("stand-in fault", file=path, where="speed")
        return drive(columns, scenario, name, path, gap_limit)

    monkeypatch.setattr(tm, "_read_partition", reading)
    monkeypatch.setattr(tm, "_process_columns", driving)
    with pytest.raises(InputError, match="stand-in fault") as info:
        tm.process(bad, loaded)
    assert read == ["a.parquet", "b.parquet"]
    assert_one_line(info.value, file=first, where="speed")
