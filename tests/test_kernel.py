"""Tests of tco.kernel: the fused compiled pass equals the reference functions and the physics.

The reference is the composition of tco.roadload.energy_components, tco.diesel.fuel_use and
tco.electric.battery_use (pure numpy, scipy's brentq for steady speeds); the hand checks use
the road-load form F = A + B·v + C·v² (SAE J1263 / 40 CFR 1037.528, references.md).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from fluids.atmosphere import ATMOSPHERE_1976
from hypothesis import given, settings
from hypothesis import strategies as st

from tco import diesel as dz
from tco import electric as el
from tco import kernel as kn
from tco import roadload as rl
from tco.units import G

VEH = rl.Vehicle(drag_coefficient=0.6, frontal_area=10.0, crr=0.006, crr_speed=2e-5,
                 rotating_mass_factor=1.05, air_density=1.2, headwind=1.5)
DIE = dz.DieselPowertrain(rated_power=300e3, driveline_efficiency=0.85,
                          marginal_efficiency=0.46, loss_fraction=0.05, accessory_power=5e3)
ELE = el.ElectricPowertrain(usable_capacity=400 * 3.6e6, motor_power=350e3,
                            drivetrain_efficiency=0.9, regen_efficiency=0.85,
                            regen_power_max=250e3, aux_power=6e3, initial_soc=0.95)


def reference(speed, grade, dt, starts, masses, veh=VEH, die=DIE, ele=ELE):
    """The kernel's totals from the readable reference functions."""
    mass = masses if starts is not None else float(np.asarray(masses).ravel()[0])
    out = rl.energy_components(speed, grade, dt, mass, veh, starts)
    out.update(dz.fuel_use(speed, grade, dt, mass, veh, die, starts))
    tot, soc = el.battery_use(speed, grade, dt, mass, veh, ele, starts)
    out.update(tot)
    return out, soc


def assert_totals_match(got, ref, rtol=1e-9):
    # rtol 1e-9 as asked; the absolute floor covers figures that are zero in exact
    # arithmetic and only summation-order rounding in one of the two (energies: 1e-12 of
    # the energy turned over; states of charge; speeds).
    assert set(got) == set(ref) == set(kn.TOTAL_KEYS)
    scale = max(ref["traction_energy"] + ref["braking_energy"], 1.0)
    for key in kn.TOTAL_KEYS:
        if "soc" in key:
            atol = 1e-12
        elif "deficit" in key:
            atol = 1e-9
        elif "volume" in key or "mass" in key:
            atol = 1e-15
        elif key in ("distance", "duration") or key.endswith(("_time", "_distance")):
            atol = 1e-9
        else:
            atol = 1e-12 * scale
        assert got[key] == pytest.approx(ref[key], rel=rtol, abs=atol), key


def random_trace(rng, n, stops=True):
    """Speeds with accelerations, stops and noise; grades in plateaus (as from a map)."""
    v = np.clip(np.cumsum(rng.normal(0, 0.6, n)) % 32.0, 0, None)
    if stops and n > 40:
        a = rng.integers(0, n - 20)
        v[a:a + rng.integers(2, 20)] = 0.0
    s = np.repeat(rng.normal(0, 0.035, n // 7 + 1), 7)[:n]
    return v, s


# ----------------------------------------------------------------------------- vs reference
@pytest.mark.parametrize("seed, soc0, chunk, workers", [
    (1, 0.95, 32768, 1), (2, 1.0, 37, 2), (3, 0.2, 101, 1), (4, 1.0, 4096, 3),
])
def test_kernel_equals_reference_on_random_traces(seed, soc0, chunk, workers):
    rng = np.random.default_rng(seed)
    n = 3000
    v, s = random_trace(rng, n)
    starts = np.array([0, 700, 1900])
    masses = np.array([40000.0, 18000.0, 31000.0])
    ele = ELE._replace(initial_soc=soc0)
    ref, soc = reference(v, s, 1.0, starts, masses, ele=ele)
    res = kn.run_trace(v, s, 1.0, starts, masses, VEH, DIE, ele, chunk=chunk, workers=workers)
    assert_totals_match(res.totals, ref)
    np.testing.assert_allclose(res.soc, soc, rtol=0, atol=1e-12)
    # the traces exercise what they are meant to
    assert ref["diesel_limited_time"] > 0 and ref["electric_limited_time"] > 0
    assert ref["diesel_idle_time"] > 0
    if soc0 == 1.0:
        assert ref["electric_regen_refused_full_battery"] > 0


@settings(max_examples=40, deadline=None)
@given(st.integers(2, 400), st.integers(0, 2**32 - 1), st.floats(0.0, 1.0),
       st.floats(-8.0, 8.0), st.sampled_from([0.5, 1.0, 2.0]), st.integers(1, 64))
def test_kernel_equals_reference_property(n, seed, soc0, wind, dt, chunk):
    rng = np.random.default_rng(seed)
    v, s = random_trace(rng, n)
    veh = VEH._replace(headwind=wind, wind_averaged=abs(wind) * (seed % 3) / 2)
    ele = ELE._replace(initial_soc=soc0)
    mass = rng.uniform(8e3, 44e3)
    ref, soc = reference(v, s, dt, None, mass, veh=veh, ele=ele)
    res = kn.run_trace(v, s, dt, None, mass, veh, DIE, ele, chunk=chunk)
    assert_totals_match(res.totals, ref)
    np.testing.assert_allclose(res.soc, soc, rtol=0, atol=1e-12)


def test_series_equal_reference_functions():
    rng = np.random.default_rng(11)
    v, s = random_trace(rng, 500)
    res = kn.run_trace(v, s, 1.0, None, 30000.0, VEH, DIE, ELE, series=True, chunk=64)
    p = rl.wheel_power(v, s, 1.0, 30000.0, VEH)
    np.testing.assert_allclose(res.series.wheel_power, p, rtol=1e-12, atol=1e-6)
    np.testing.assert_allclose(res.series.battery_power, el.battery_power(p, ELE),
                               rtol=1e-12, atol=1e-6)
    rate, _, _ = dz.fuel_rate(p, 0.5 * (v[:-1] + v[1:]), DIE)
    np.testing.assert_allclose(res.series.fuel_rate, rate, rtol=1e-12, atol=1e-15)
    assert res.series.soc is res.soc


# ----------------------------------------------------------------------------- by hand
def test_constant_speed_flat_by_hand():
    # F = A + C·v² (SAE J1263): A = crr·m·g, C = ½·rho·Cd·A; times distance.
    v, n, m = 22.0, 1801, 36000.0
    veh = rl.Vehicle(0.6, 10.0, 0.006, air_density=1.2)
    r = kn.run_trace(np.full(n, v), np.zeros(n), 1.0, None, m, veh, DIE, ELE).totals
    dist = v * (n - 1)
    a_term, c_term = 0.006 * m * G, 0.5 * 1.2 * 0.6 * 10.0
    assert r["distance"] == pytest.approx(dist, rel=1e-12)
    assert r["rolling_energy"] == pytest.approx(a_term * dist, rel=1e-12)
    assert r["aerodynamic_energy"] == pytest.approx(c_term * v**2 * dist, rel=1e-12)
    wheel = (a_term + c_term * v**2) * dist
    assert r["traction_energy"] == pytest.approx(wheel, rel=1e-12)
    assert r["braking_energy"] == 0.0 and r["climbing_energy"] == 0.0
    t = n - 1
    p_eng = wheel / t / 0.85 + 5e3
    assert r["diesel_fuel_mass"] == pytest.approx(
        (p_eng + 0.05 * 300e3) / (0.46 * dz.DIESEL_LHV) * t, rel=1e-12)
    e_out = wheel / 0.9 + 6e3 * t
    assert r["electric_battery_energy_out"] == pytest.approx(e_out, rel=1e-12)
    assert r["electric_soc_end"] == pytest.approx(0.95 - e_out / ELE.usable_capacity, rel=1e-12)


def test_constant_speed_on_grade_adds_weight_component():
    # On a grade s the wheel force adds m·g·sinθ, sinθ = s/√(1+s²), and rolling uses cosθ.
    v, n, m, s = 15.0, 601, 30000.0, 0.025
    veh = rl.Vehicle(0.6, 10.0, 0.006, air_density=1.2)
    r = kn.run_trace(np.full(n, v), np.full(n, s), 1.0, None, m, veh, DIE, ELE).totals
    dist = v * (n - 1)
    sin, cos = s / np.sqrt(1 + s * s), 1 / np.sqrt(1 + s * s)
    assert r["climbing_energy"] == pytest.approx(m * G * sin * dist, rel=1e-12)
    assert r["rolling_energy"] == pytest.approx(0.006 * m * G * cos * dist, rel=1e-12)
    assert r["traction_energy"] == pytest.approx(
        (0.006 * m * G * cos + 0.5 * 1.2 * 0.6 * 10 * v**2 + m * G * sin) * dist, rel=1e-12)


# ----------------------------------------------------------------------------- conservation
def _loop(v=18.0, s=0.04, half=300):
    speed = np.full(2 * half + 1, v)
    grade = np.concatenate([np.full(half, s), np.full(half + 1, -s)])
    return speed, grade


def test_up_and_down_loop_never_returns_more_than_it_took():
    speed, grade = _loop()
    r = kn.run_trace(speed, grade, 1.0, None, 36000.0, VEH, DIE, ELE).totals
    assert r["electric_battery_energy_net"] > 0  # the battery ends lower
    assert r["electric_battery_energy_regenerated"] < r["electric_battery_energy_out"]
    assert r["climbing_energy"] + r["descending_energy"] == pytest.approx(
        0.0, abs=1e-9 * r["climbing_energy"])
    assert r["diesel_fuel_mass"] > 0


def test_lossless_loop_returns_exactly_what_it_took():
    # Losses off (Cd = 0, Crr = 0, efficiencies 1, no auxiliaries, no caps): climbing and
    # descending cancel and the battery ends where it started.
    speed, grade = _loop()
    veh = rl.Vehicle(0.0, 10.0, 0.0)
    ele = el.ElectricPowertrain(400 * 3.6e6, 1e9, 1.0, 1.0, 1e9, 0.0, initial_soc=0.5)
    die = DIE._replace(rated_power=1e9)
    r = kn.run_trace(speed, grade, 1.0, None, 36000.0, veh, die, ele).totals
    assert r["climbing_energy"] > 1e7
    assert r["climbing_energy"] + r["descending_energy"] == pytest.approx(
        0.0, abs=1e-12 * r["climbing_energy"])
    assert r["traction_energy"] == pytest.approx(r["braking_energy"], rel=1e-12)
    assert r["electric_soc_end"] == pytest.approx(0.5, abs=1e-13)
    assert r["electric_battery_energy_net"] == pytest.approx(0.0, abs=1e-3)
    assert r["electric_friction_brake_energy"] == pytest.approx(0.0, abs=1e-3)


# ----------------------------------------------------------------------------- limits
def _hand_wheel_power(v, s, m, rho, cd=0.6, area=10.0, crr=0.006):
    """Steady wheel power on a grade, written out with trigonometry (θ = atan s). [W]"""
    th = math.atan(s)
    return v * (crr * m * 9.80665 * math.cos(th) + 0.5 * rho * cd * area * v * v
                + m * 9.80665 * math.sin(th))


def test_power_limits_by_hand():
    # A 10 min climb at 8 % and a 10 min descent at −8 %, both at 15 m/s, 36 t, in air
    # of the 1976 standard atmosphere at 500 m and 0 °C (fluids.atmosphere). The hand
    # wheel power is 15·(rolling + drag + weight) ≈ +466 kW up and −378 kW down: beyond
    # the engine (300 kW, 5 kW accessories: 250.75 kW at the wheel), the motor (350 kW;
    # 350·0.85 = 297.5 kW regenerated) and the regeneration cap (250 kW, the tighter one
    # downhill), so every clamp is hit and its value is known.
    rho = ATMOSPHERE_1976(Z=500.0, dT=0.0 - (15.0 - 0.0065 * 500.0)).rho
    veh = rl.Vehicle(0.6, 10.0, 0.006, air_density=rho)
    v, m, n = 15.0, 36000.0, 600
    speed = np.full(2 * n + 1, v)
    grade = np.concatenate([np.full(n, 0.08), np.full(n + 1, -0.08)])
    p_up, p_down = _hand_wheel_power(v, 0.08, m, rho), _hand_wheel_power(v, -0.08, m, rho)
    assert p_up > 350e3 and min(-p_down, 350e3) * 0.85 > 250e3
    ele = ELE._replace(initial_soc=0.5)
    res = kn.run_trace(speed, grade, 1.0, None, m, veh, DIE, ele, series=True)
    ser, tot = res.series, res.totals
    np.testing.assert_allclose(ser.wheel_power[:n], p_up, rtol=1e-12)
    np.testing.assert_allclose(ser.wheel_power[n:], p_down, rtol=1e-12)
    # climb: the motor gives its 350 kW through 90 %, plus 6 kW auxiliaries
    np.testing.assert_allclose(ser.battery_power[:n], 350e3 / 0.9 + 6e3, rtol=1e-12)
    # descent: 250 kW into the battery at most, the auxiliaries draw 6 kW of it
    np.testing.assert_allclose(ser.battery_power[n:], -250e3 + 6e3, rtol=1e-12)
    assert tot["electric_regen_refused_by_limits"] == pytest.approx(
        (-p_down - 250e3 / 0.85) * n, rel=1e-12)
    # diesel on the climb: rated 300 kW on the Willans line, 5 % of rated as the loss,
    # 46 % marginal efficiency, 43.1 MJ/kg, 832 kg/m³ (DIE); no fuel on the descent
    fuel_rated = (300e3 + 0.05 * 300e3) / (0.46 * 43.1e6 * 832.0)
    np.testing.assert_allclose(ser.fuel_rate[:n], fuel_rated, rtol=1e-12)
    np.testing.assert_array_equal(ser.fuel_rate[n:], 0.0)
    assert tot["diesel_engine_energy"] == pytest.approx(300e3 * n, rel=1e-12)
    assert tot["diesel_limited_time"] == n and tot["electric_limited_time"] == n
    # speed the capped power holds on the climb: root of k·v³ + F0·v − P = 0 (numpy.roots)
    f0 = 0.006 * m * 9.80665 * math.cos(math.atan(0.08)) + m * 9.80665 * math.sin(
        math.atan(0.08))
    k = 0.5 * rho * 0.6 * 10.0
    for key, p_lim in (("diesel", (300e3 - 5e3) * 0.85), ("electric", 350e3)):
        r = np.roots([k, 0.0, f0, -p_lim])
        v_s = r[np.abs(r.imag) < 1e-9].real.max()
        assert tot[f"{key}_speed_deficit_max"] == pytest.approx(v - v_s, rel=1e-9)


def test_regeneration_stops_at_a_full_battery_by_hand():
    # Starting full on the −8 % descent the battery cannot take any charge: the state of
    # charge stays at 1 and all the regenerated energy (net of the auxiliaries) is refused.
    speed = np.full(301, 15.0)
    grade = np.full(301, -0.08)
    veh = rl.Vehicle(0.6, 10.0, 0.006, air_density=1.2)
    ele = ELE._replace(initial_soc=1.0)
    res = kn.run_trace(speed, grade, 1.0, None, 36000.0, veh, DIE, ele)
    assert res.soc.max() == 1.0 and res.soc.min() == 1.0
    assert res.totals["electric_regen_refused_full_battery"] == pytest.approx(
        (250e3 - 6e3) * 300, rel=1e-12)
    assert res.totals["electric_battery_energy_regenerated"] == pytest.approx(0.0, abs=1e-6)


@pytest.mark.parametrize("wind", [0.0, 1.4])
def test_air_from_fluids_and_averaged_wind_by_hand(wind):
    # Air density of the 1976 standard atmosphere at 800 m and −10 °C from the fluids
    # library; at 20 m/s with a wind of w from evenly spread directions the drag is
    # ½ρCdA·(v² + w²/2) (the along-road component averages out, its square to w²/2).
    rho = ATMOSPHERE_1976(Z=800.0, dT=-10.0 - (15.0 - 0.0065 * 800.0)).rho
    veh = rl.Vehicle(0.6, 10.0, 0.006, air_density=rho, wind_averaged=wind)
    v, n, m = 20.0, 1201, 30000.0
    r = kn.run_trace(np.full(n, v), np.zeros(n), 1.0, None, m, veh, DIE, ELE).totals
    d = v * (n - 1)
    assert r["aerodynamic_energy"] == pytest.approx(
        0.5 * rho * 0.6 * 10.0 * (v * v + wind * wind / 2) * d, rel=1e-12)
    assert r["rolling_energy"] == pytest.approx(0.006 * m * 9.80665 * d, rel=1e-12)


@settings(max_examples=40, deadline=None)
@given(st.integers(2, 300), st.integers(0, 2**32 - 1), st.floats(0.5, 1.0),
       st.integers(1, 50))
def test_limits_hold(n, seed, soc0, chunk):
    # Random traces: the clamps of the hand test above hold everywhere.
    rng = np.random.default_rng(seed)
    v, s = random_trace(rng, n)
    ele = ELE._replace(initial_soc=soc0, regen_power_max=rng.uniform(5e4, 4e5),
                       motor_power=rng.uniform(1e5, 5e5))
    res = kn.run_trace(v, s, 1.0, None, 36000.0, VEH, DIE, ele, series=True, chunk=chunk)
    ser = res.series
    assert np.all(ser.battery_power >= -ele.regen_power_max + ele.aux_power - 1e-6)
    assert np.all(ser.battery_power <= ele.motor_power / ele.drivetrain_efficiency
                  + ele.aux_power + 1e-6)
    assert res.soc.max() <= 1.0


# ----------------------------------------------------------------------------- chunks, pieces
def test_chunk_size_and_workers_do_not_change_results():
    rng = np.random.default_rng(5)
    v, s = random_trace(rng, 5000)
    base = kn.run_trace(v, s, 1.0, None, 30000.0, VEH, DIE, ELE, workers=1)
    for chunk, workers in [(1, 2), (13, 2), (999, 4), (100000, 1), (64, 1)]:
        other = kn.run_trace(v, s, 1.0, None, 30000.0, VEH, DIE, ELE, chunk=chunk,
                             workers=workers)
        assert_totals_match(other.totals, base.totals, rtol=1e-12)
        np.testing.assert_allclose(other.soc, base.soc, rtol=0, atol=1e-13)


def test_stream_in_pieces_equals_one_run():
    rng = np.random.default_rng(6)
    v, s = random_trace(rng, 2000)
    one = kn.run_trace(v, s, 1.0, [0, 800], [36000.0, 20000.0], VEH, DIE, ELE, series=True)
    stream = kn.TraceStream(1.0, VEH, DIE, ELE, chunk=50)
    socs, wheel = [], []
    for a, b, m in [(0, 300, 36000.0), (300, 800, 36000.0), (800, 801, 20000.0),
                    (801, 2000, 20000.0)]:
        soc, ser = stream.feed(v[a:b], s[a:b], m, series=True)
        socs.append(soc)
        wheel.append(ser.wheel_power)
    assert_totals_match(stream.totals(), one.totals, rtol=1e-12)
    np.testing.assert_allclose(np.concatenate(socs), one.soc, rtol=0, atol=1e-13)
    np.testing.assert_allclose(np.concatenate(wheel), one.series.wheel_power, rtol=1e-13)


def test_restarted_stream_drives_each_trace_afresh():
    # A stream restarted between traces (new air density for the second) gives each
    # trace's totals as the reference composition computes them for that trace alone.
    rng = np.random.default_rng(11)
    stream = kn.TraceStream(1.0, VEH, DIE, ELE, chunk=64)
    for k, rho in enumerate((1.2, 1.05, 1.2)):
        veh = VEH._replace(air_density=rho)
        v, s = random_trace(rng, 700 + 300 * k)
        stream.restart(veh)
        soc, _ = stream.feed(v, s, [30000.0, 22000.0], leg_starts=[0, 400])
        ref, ref_soc = reference(v, s, 1.0, [0, 400], [30000.0, 22000.0], veh=veh)
        assert_totals_match(stream.totals(), ref)
        assert soc[0] == ELE.initial_soc
        np.testing.assert_allclose(soc, ref_soc, rtol=0, atol=1e-12)


def test_bad_sample_in_a_later_piece():
    stream = kn.TraceStream(1.0, VEH, DIE, ELE)
    stream.feed(np.full(5, 10.0), np.zeros(5), 1e4)
    with pytest.raises(ValueError, match="sample 0 of this piece"):
        stream.feed(np.array([np.nan, 10.0]), np.zeros(2), 1e4)


def test_soc_out_is_written_in_place():
    v, s = np.full(50, 10.0), np.zeros(50)
    soc = np.zeros(50)
    res = kn.run_trace(v, s, 1.0, None, 20000.0, VEH, DIE, ELE, soc_out=soc)
    assert res.soc is soc and soc[0] == ELE.initial_soc and soc[-1] < soc[0]


# ----------------------------------------------------------------------------- errors
@pytest.mark.parametrize("speed, grade, match", [
    ([10.0, np.nan, 10.0], [0.0, 0.0, 0.0], r"speed .*sample 1"),
    ([10.0, 10.0, -1.0], [0.0, 0.0, 0.0], r"speed .*sample 2"),
    ([10.0, 10.0, 10.0], [0.0, np.inf, 0.0], r"grade .*sample 1"),
    ([10.0, np.inf, 10.0], [0.0, 0.0, 0.0], r"speed .*sample 1"),
    ([10.0, 10.0, 10.0], [np.nan, 0.0, 0.0], r"grade .*sample 0"),
    ([10.0, 10.0, 10.0], [0.0, 0.0, np.nan], r"grade .*sample 2"),
    ([10.0, 10.0], [0.0], "same length"),
    ([10.0], [0.0], "2 samples"),
])
def test_bad_trace(speed, grade, match):
    with pytest.raises(ValueError, match=match):
        kn.run_trace(np.array(speed), np.array(grade), 1.0, None, 1e4, VEH, DIE, ELE)


def test_minus_zero_speed_is_a_stop():
    v = np.array([0.0, -0.0, 5.0, -0.0])
    r = kn.run_trace(v, np.zeros(4), 1.0, None, 1e4, VEH, DIE, ELE).totals
    assert r["distance"] == pytest.approx(5.0)


def test_bad_trace_in_a_later_chunk():
    v = np.full(500, 12.0)
    v[377] = np.nan
    with pytest.raises(ValueError, match="sample 377"):
        kn.run_trace(v, np.zeros(500), 1.0, None, 1e4, VEH, DIE, ELE, chunk=16)


@pytest.mark.parametrize("kwargs, match", [
    ({"dt": 0.0}, "dt"),
    ({"leg_mass": -5.0}, "mass"),
    ({"leg_starts": [0, 5], "leg_mass": [1e4]}, "one value per leg"),
    ({"soc_out": np.zeros(3)}, "soc_out"),
    ({"soc_out": np.zeros(10, dtype=np.float32)}, "soc_out"),
    ({"chunk": 0}, "chunk"),
    ({"workers": 0}, "workers"),
    ({"electric": ELE._replace(regen_efficiency=0.0)}, "regen_efficiency"),
    ({"diesel": DIE._replace(driveline_efficiency=1.5)}, "driveline_efficiency"),
    ({"vehicle": VEH._replace(frontal_area=-1.0)}, "frontal_area"),
])
def test_bad_parameters(kwargs, match):
    args = {"speed": np.full(10, 5.0), "grade": np.zeros(10), "dt": 1.0, "leg_starts": None,
            "leg_mass": 1e4, "vehicle": VEH, "diesel": DIE, "electric": ELE}
    args.update(kwargs)
    with pytest.raises(ValueError, match=match):
        kn.run_trace(**args)


@pytest.mark.parametrize("tail, spread, air_sq", [(-5.0, 0.0, 9.0), (-8.0, 1.4, 36.98)])
def test_tailwind_faster_than_the_truck_pushes_it_by_hand(tail, spread, air_sq):
    # First principles: the air moves at |2 + v_w| m/s past the truck from behind, so the
    # drag is −½ρCdA·(v + v_w)² (a push), plus w²/2 = 0.98 for a wind of w = 1.4 m/s
    # spread over all directions: negative aerodynamic work over the 1200 m.
    veh = rl.Vehicle(0.6, 10.0, 0.006, air_density=1.2, headwind=tail, wind_averaged=spread)
    n = 601
    r = kn.run_trace(np.full(n, 2.0), np.zeros(n), 1.0, None, 30000.0, veh, DIE, ELE).totals
    assert r["aerodynamic_energy"] == pytest.approx(-0.5 * 1.2 * 0.6 * 10.0 * air_sq * 1200.0,
                                                    rel=1e-12)
