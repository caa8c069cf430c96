"""Tests of tco.electric: battery power, regeneration, state of charge and feasibility."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tco import electric as el
from tco import roadload as rl
from tco.units import G

VEH = rl.Vehicle(drag_coefficient=0.6, frontal_area=10.0, crr=0.006, air_density=1.2)
ELE = el.ElectricPowertrain(usable_capacity=500 * 3.6e6, motor_power=400e3,
                            drivetrain_efficiency=0.9, regen_efficiency=0.8,
                            regen_power_max=250e3, aux_power=5e3, initial_soc=0.9)


# ----------------------------------------------------------------------------- auxiliaries
def test_auxiliary_power_degree_model():
    # Formula by hand: base + heating·(T_low − T) below the band, cooling above it.
    args = (2000.0, 300.0, 400.0, 288.15, 295.15)
    assert el.auxiliary_power(263.15, *args) == pytest.approx(2000 + 300 * 25)
    assert el.auxiliary_power(290.0, *args) == 2000.0
    assert el.auxiliary_power(305.15, *args) == pytest.approx(2000 + 400 * 10)


def test_auxiliary_power_input_kinds_and_errors():
    args = (2000.0, 300.0, 400.0, 288.15, 295.15)
    assert isinstance(el.auxiliary_power(np.array([270.0, 300.0]), *args), np.ndarray)
    ser = el.auxiliary_power(pd.Series([270.0], index=["jan"]), *args)
    assert isinstance(ser, pd.Series) and ser.index[0] == "jan"
    with pytest.raises(ValueError, match="kelvin"):
        el.auxiliary_power(-5.0, *args)
    with pytest.raises(ValueError, match="comfort_low"):
        el.auxiliary_power(280.0, 2000.0, 300.0, 400.0, 300.0, 290.0)
    with pytest.raises(ValueError, match="heating_per_K"):
        el.auxiliary_power(280.0, 2000.0, -1.0, 400.0, 288.0, 295.0)


# ----------------------------------------------------------------------------- battery power
def test_battery_power_by_hand():
    p = el.battery_power([90e3, -100e3, -500e3, 600e3], ELE)
    assert p[0] == pytest.approx(90e3 / 0.9 + 5e3)
    assert p[1] == pytest.approx(-100e3 * 0.8 + 5e3)  # within every limit
    assert p[2] == pytest.approx(-250e3 + 5e3)  # battery charge limit
    assert p[3] == pytest.approx(400e3 / 0.9 + 5e3)  # motor limit in traction


def test_regen_limited_by_motor_at_the_wheel():
    e = ELE._replace(motor_power=100e3, regen_power_max=1e9)
    assert el.battery_power(-300e3, e) == pytest.approx(-100e3 * 0.8 + 5e3)
    assert el.regen_refused(-300e3, e) == pytest.approx(200e3)


def test_regen_refused():
    r = el.regen_refused([-100e3, -500e3, 50e3], ELE)
    assert r.tolist() == pytest.approx([0.0, 500e3 - 250e3 / 0.8, 0.0])


def test_battery_power_input_kinds():
    assert isinstance(el.battery_power(1e5, ELE), float)
    assert isinstance(el.battery_power(pd.Series([1e5, -1e5]), ELE), pd.Series)
    assert isinstance(el.regen_refused(np.array([-1e5]), ELE), np.ndarray)


# ----------------------------------------------------------------------------- energy track
def _track_by_loop(p, dt, e0, emax):
    """The recursion written out plainly, as an independent check of the closed form."""
    e = [e0]
    refused = 0.0
    for x in p:
        t = e[-1] - x * dt
        refused += max(t - emax, 0.0)
        e.append(min(t, emax))
    return np.array(e), refused


@settings(max_examples=80, deadline=None)
@given(st.lists(st.floats(-5e5, 5e5), min_size=1, max_size=80),
       st.floats(0.0, 1.0), st.floats(0.1, 10.0))
def test_energy_track_closed_form_equals_recursion(p, frac, dt):
    emax = 3.6e8
    e, refused = el.battery_energy_track(p, dt, frac * emax, emax)
    e_ref, refused_ref = _track_by_loop(p, dt, frac * emax, emax)
    np.testing.assert_allclose(e, e_ref, rtol=1e-12, atol=1e-3)
    assert refused == pytest.approx(refused_ref, rel=1e-9, abs=1e-3)
    assert e.max() <= emax  # never above full


def test_energy_track_not_floored():
    e, refused = el.battery_energy_track([10.0, 10.0], 1.0, 15.0, 20.0)
    assert e.tolist() == [15.0, 5.0, -5.0] and refused == 0.0
    with pytest.raises(ValueError, match="energy_start"):
        el.battery_energy_track([1.0], 1.0, 30.0, 20.0)


# ----------------------------------------------------------------------------- over a trace
def test_constant_speed_battery_by_hand():
    # Road-load form F = A + C·v² (SAE J1263), battery = wheel / eta + aux, by hand.
    v, n, m = 20.0, 3601, 36000.0
    tot, soc = el.battery_use(np.full(n, v), np.zeros(n), 1.0, m, VEH, ELE)
    p_wheel = (0.006 * m * G + 0.5 * 1.2 * 0.6 * 10.0 * v**2) * v
    e_out = (p_wheel / 0.9 + 5e3) * 3600
    assert tot["electric_battery_energy_out"] == pytest.approx(e_out, rel=1e-12)
    assert tot["electric_battery_energy_net"] == pytest.approx(e_out, rel=1e-12)
    assert tot["electric_soc_end"] == pytest.approx(0.9 - e_out / ELE.usable_capacity,
                                                    rel=1e-12)
    assert tot["electric_soc_min"] == tot["electric_soc_end"] == soc[-1]
    assert soc[0] == pytest.approx(0.9)


def test_full_battery_refuses_regeneration():
    # Start full and coast downhill: everything regenerated goes to the friction brakes.
    n = 121
    e = ELE._replace(initial_soc=1.0, aux_power=0.0)
    tot, soc = el.battery_use(np.full(n, 15.0), np.full(n, -0.05), 1.0, 36000.0, VEH, e)
    assert soc.max() == 1.0
    assert tot["electric_battery_energy_regenerated"] == pytest.approx(0.0, abs=1e-6)
    assert tot["electric_friction_brake_energy"] == pytest.approx(
        rl.energy_components(np.full(n, 15.0), np.full(n, -0.05), 1.0, 36000.0,
                             VEH)["braking_energy"], rel=1e-12)


def test_motor_limit_and_deficit():
    n, v, s, m = 31, 25.0, 0.07, 40000.0
    tot, _ = el.battery_use(np.full(n, v), np.full(n, s), 1.0, m, VEH, ELE)
    v_ss = rl.steady_speed(ELE.motor_power, s, m, VEH)
    assert tot["electric_limited_time"] == 30.0
    assert tot["electric_speed_deficit_max"] == pytest.approx(v - v_ss, rel=1e-12)


@settings(max_examples=40, deadline=None)
@given(st.integers(2, 80), st.integers(0, 2**32 - 1), st.floats(0.0, 1.0))
def test_battery_use_against_a_step_by_step_hand_model(n, seed, soc0):
    # An independent, plain-Python transcription of the physics (trigonometric road load,
    # the motor and regeneration rules written out per interval, and the state of charge
    # stepped one interval at a time with min(1, ·)), against the module's vectorised
    # closed form. Rules: traction draws min(P, P_motor)/η + P_aux; braking returns
    # max(max(P, −P_motor)·η_r, −P_regen) + P_aux; the battery never charges above full.
    import math

    rng = np.random.default_rng(seed)
    v = rng.uniform(0, 30, n)
    s = rng.normal(0, 0.06, n)
    m, e = 36000.0, ELE._replace(initial_soc=soc0)
    x = soc0 * e.usable_capacity
    lowest, out, refused_limits, refused_full = x, 0.0, 0.0, 0.0
    for i in range(n - 1):
        vm, a = 0.5 * (v[i] + v[i + 1]), v[i + 1] - v[i]
        th = math.atan(s[i])
        p = vm * (0.006 * m * 9.80665 * math.cos(th) + 0.5 * 1.2 * 0.6 * 10.0 * vm * vm
                  + m * 9.80665 * math.sin(th) + m * a)
        if p > 0:
            pb = min(p, 400e3) / 0.9 + 5e3
        else:
            regen = max(max(p, -400e3) * 0.8, -250e3)
            refused_limits += regen / 0.8 - p
            pb = regen + 5e3
        out += max(pb, 0.0)
        y = x - pb
        x = min(y, e.usable_capacity)
        refused_full += y - x
        lowest = min(lowest, x)
    tot, soc = el.battery_use(v, s, 1.0, m, VEH, e)
    cap = e.usable_capacity
    assert soc.max() <= 1.0
    assert soc[-1] == pytest.approx(x / cap, abs=1e-9)
    assert soc.min() == pytest.approx(lowest / cap, abs=1e-9)
    assert tot["electric_battery_energy_out"] == pytest.approx(out, rel=1e-9, abs=1e-3)
    assert tot["electric_regen_refused_by_limits"] == pytest.approx(refused_limits, rel=1e-9,
                                                                    abs=1e-3)
    assert tot["electric_regen_refused_full_battery"] == pytest.approx(refused_full,
                                                                       rel=1e-9, abs=1e-3)


# ----------------------------------------------------------------------------- feasibility
def test_day_feasibility():
    r = el.day_feasibility(1.2e9, 1.8e9, 1.44e9, 0.1)
    assert r["feasible_new"] and r["feasible_eol"]
    assert r["margin_eol"] == pytest.approx(1.44e9 * 0.9 - 1.2e9)
    assert r["required_capacity"] == pytest.approx(1.2e9 / 0.9)
    r = el.day_feasibility(np.array([1.0e9, 1.5e9]), 1.8e9, 1.44e9, 0.1)
    assert r["feasible_new"].tolist() == [True, True]
    assert r["feasible_eol"].tolist() == [True, False]
    with pytest.raises(ValueError, match="reserve_fraction"):
        el.day_feasibility(1e9, 1.8e9, 1.44e9, 1.0)
    with pytest.raises(ValueError, match="eol"):
        el.day_feasibility(1e9, 1.0e9, 1.44e9, 0.1)


def test_charging_helpers():
    # Charging efficiency 88.4 %: measured light-duty Level 2 value (references.md),
    # used here only as an input to the formula E_grid = E_battery / eta.
    kwh = 3.6e6
    assert el.grid_energy(100 * kwh, 0.884) == pytest.approx(113.122 * kwh, rel=1e-5)
    assert el.depot_charger_power(3.6e9, 36000.0) == pytest.approx(100e3)
    assert el.enroute_charging_time(3.6e8, 400e3, 0.9) == pytest.approx(1000.0)
    assert el.enroute_charging_time(-1.0, 400e3, 0.9) == 0.0
    assert isinstance(el.grid_energy(pd.Series([1.0]), 0.9), pd.Series)
    with pytest.raises(ValueError, match="charging_efficiency"):
        el.grid_energy(1.0, 1.5)
    with pytest.raises(ValueError, match="window_seconds"):
        el.depot_charger_power(1.0, 0.0)
    with pytest.raises(ValueError, match="efficiency"):
        el.enroute_charging_time(1.0, 1e5, 0.0)


@pytest.mark.parametrize("field, value", [
    ("drivetrain_efficiency", 0.0), ("regen_efficiency", 1.01), ("usable_capacity", -1.0),
    ("motor_power", 0.0), ("regen_power_max", -1.0), ("aux_power", -5.0),
    ("initial_soc", 1.2), ("aux_power", np.inf),
])
def test_parameter_errors(field, value):
    with pytest.raises(ValueError, match=field):
        ELE._replace(**{field: value}).checked()


# ----------------------------------------------------------------------------- en-route curve
@pytest.mark.parametrize("arrival, deficit_kwh", [(0.1, 50.0), (0.1, 400.0), (0.5, 240.0),
                                                  (0.85, 70.0)])
def test_enroute_taper_matches_quadrature(arrival, deficit_kwh):
    # Independent reference: t = ∫ C ds / (P·η·k(s)) from s0 to s0 + E/C, with k = 1 up
    # to 80 % and linear to 20 % at 100 % (scipy.integrate.quad). 500 kWh at 350 kW, 92 %.
    from scipy.integrate import quad

    cap, p, eta = 500 * 3.6e6, 350e3, 0.92

    def k(s):
        return 1.0 if s <= 0.8 else 1.0 - 0.8 * (s - 0.8) / 0.2

    s1 = arrival + deficit_kwh * 3.6e6 / cap
    assert s1 <= 1.0
    ref, _ = quad(lambda s: cap / (p * eta * k(s)), arrival, s1, points=[0.8], epsabs=1e-9)
    got = el.enroute_charging_time(deficit_kwh * 3.6e6, p, eta, cap, arrival, 0.8, 0.2)
    assert got == pytest.approx(ref, rel=1e-9)
    if s1 <= 0.8:  # below the taper: the flat formula, E / (P·η)
        assert got == pytest.approx(deficit_kwh * 3.6e6 / (p * eta), rel=1e-12)


def test_enroute_deficit_beyond_one_fill_takes_two_stops():
    # 100 kWh usable, from 10 %: one fill is 90 kWh. 120 kWh = one full fill + 30 kWh.
    # Flat curve (no taper): time = 120 kWh / (100 kW · 1.0) = 1.2 h, two stops.
    cap = 100 * 3.6e6
    t = el.enroute_charging_time(120 * 3.6e6, 100e3, 1.0, cap, 0.1, 1.0, 1.0)
    assert t == pytest.approx(1.2 * 3600, rel=1e-12)
    assert el.enroute_stops(120 * 3.6e6, cap, 0.1) == 2
    assert el.enroute_stops(90 * 3.6e6, cap, 0.1) == 1


def test_driver_time_beyond_breaks_by_the_break_rule():
    # Regulation (EC) No 561/2006, Art. 7: 45 min break after 4.5 h of driving. With 9.5 h
    # driving there are two breaks (90 min); 100 min of charging costs 10 min of driver
    # time plus 2 × 10 min of stop overhead; with 4 h driving there is no break.
    h, mn = 3600.0, 60.0
    assert el.driver_time_beyond_breaks(100 * mn, 2, 10 * mn, 9.5 * h, 4.5 * h, 45 * mn) == \
        pytest.approx(30 * mn)
    assert el.driver_time_beyond_breaks(100 * mn, 1, 10 * mn, 4 * h, 4.5 * h, 45 * mn) == \
        pytest.approx(110 * mn)
    assert el.driver_time_beyond_breaks(30 * mn, 1, 10 * mn, 5 * h, 4.5 * h, 45 * mn) == \
        pytest.approx(10 * mn)


# ----------------------------------------------------------------------------- cold weather
def test_cold_weather_helpers_by_hand():
    # Pack heat loss UA = 50 W/K kept at 10 °C in −15 °C air: 50 × 25 = 1250 W.
    assert el.battery_heating_power(258.15, 283.15, 50.0) == pytest.approx(1250.0)
    assert el.battery_heating_power(293.15, 283.15, 50.0) == 0.0
    # Pre-heating a 4.2 t pack by 25 K at 1 kJ/(kg·K): 4200 × 1000 × 25 J = 29.17 kWh.
    assert el.preconditioning_energy(258.15, 283.15, 4200.0) / 3.6e6 == pytest.approx(
        4200 * 25 / 3600)
    # Regeneration: full at 0 °C, half at −20 °C, linear between, held below.
    for t_c, share in ((5.0, 1.0), (0.0, 1.0), (-5.0, 0.875), (-20.0, 0.5), (-35.0, 0.5)):
        assert el.regen_cold_share(t_c + 273.15, 273.15, 0.5) == pytest.approx(share)
    with pytest.raises(ValueError, match="share_cold"):
        el.regen_cold_share(260.0, 273.15, 1.5)
