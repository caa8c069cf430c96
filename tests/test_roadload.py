"""Tests of tco.roadload against published values, reference libraries and first principles."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import scipy.constants
from fluids.atmosphere import ATMOSPHERE_1976
from hypothesis import given, settings
from hypothesis import strategies as st

from tco import roadload as rl
from tco.units import G

VEH = rl.Vehicle(drag_coefficient=0.6, frontal_area=10.0, crr=0.006, crr_speed=2e-5,
                 rotating_mass_factor=1.05, air_density=1.2, headwind=1.5)


# ----------------------------------------------------------------------------- constants
def test_standard_gravity_is_scipy_g():
    # Source: CGPM 1901 standard gravity, as scipy.constants.g (references.md "Physics").
    assert G == scipy.constants.g == 9.80665


# ----------------------------------------------------------------------------- atmosphere
@pytest.mark.parametrize("z, rho_fluids", [(0.0, 1.224999), (1000.0, 1.111659),
                                           (2000.0, 1.006553)])
def test_air_density_matches_fluids_values(z, rho_fluids):
    # Source: U.S. Standard Atmosphere 1976 as reproduced by
    # fluids.atmosphere.ATMOSPHERE_1976(Z).rho (references.md, printed to 6 decimals).
    assert rl.air_density(z) == pytest.approx(rho_fluids, abs=5e-7)
    # same constants as fluids: agreement to rounding, not only to the printed digits
    assert rl.air_density(z) == pytest.approx(ATMOSPHERE_1976(z).rho, rel=1e-12)


@pytest.mark.parametrize("z, rho_table", [(0.0, 1.2250), (1000.0, 1.1117), (2000.0, 1.0066)])
def test_air_density_matches_1976_table(z, rho_table):
    # Source: U.S. Standard Atmosphere 1976 tables (references.md); the table prints
    # 4 decimals, so half a unit of the last digit is the tolerance.
    assert rl.air_density(z) == pytest.approx(rho_table, abs=5e-5)


@pytest.mark.parametrize("z", [-500.0, 300.0, 3500.0, 6000.0, 10500.0])
def test_standard_atmosphere_matches_fluids_over_troposphere(z):
    # Source: fluids.atmosphere.ATMOSPHERE_1976 (reference implementation of the 1976
    # standard). Same constants, so agreement to 1e-12 relative.
    t, p = rl.standard_atmosphere(z)
    ref = ATMOSPHERE_1976(z)
    assert t == pytest.approx(ref.T, rel=1e-12)
    assert p == pytest.approx(ref.P, rel=1e-12)


@pytest.mark.parametrize("z, dT", [(0.0, 15.0), (1500.0, -25.0)])
def test_air_density_with_ambient_temperature_matches_fluids(z, dT):
    # Source: fluids ATMOSPHERE_1976(Z, dT): standard pressure, temperature offset by dT.
    t_std, _ = rl.standard_atmosphere(z)
    assert rl.air_density(z, t_std + dT) == pytest.approx(ATMOSPHERE_1976(z, dT).rho,
                                                          rel=1e-12)


def test_standard_atmosphere_sea_level_definition():
    # Source: U.S. Standard Atmosphere 1976 defines 288.15 K and 101325 Pa at sea level.
    assert rl.standard_atmosphere(0.0) == (288.15, 101325.0)


def test_air_density_input_kinds():
    z = [0.0, 1000.0]
    arr = rl.air_density(np.array(z))
    assert isinstance(arr, np.ndarray) and arr.shape == (2,)
    ser = rl.air_density(pd.Series(z, index=["a", "b"]))
    assert isinstance(ser, pd.Series) and list(ser.index) == ["a", "b"]
    np.testing.assert_allclose(ser.to_numpy(), arr)
    assert isinstance(rl.air_density(500.0), float)


@pytest.mark.parametrize("kwargs, match", [
    ({"altitude": 12000.0}, "troposphere"),
    ({"altitude": -6000.0}, "troposphere"),
    ({"altitude": 0.0, "temperature": -3.0}, "kelvin"),
    ({"altitude": np.nan}, "finite"),
])
def test_air_density_errors(kwargs, match):
    with pytest.raises(ValueError, match=match):
        rl.air_density(**kwargs)


# ----------------------------------------------------------------------------- forces
def test_force_formulas_against_trigonometry():
    # Source: definition of grade, angle = atan(rise/run) (references.md); the module
    # computes sin/cos algebraically, checked here against numpy's trigonometry.
    s = np.array([-0.12, -0.03, 0.0, 0.02, 0.08])
    theta = np.arctan(s)
    m = 38000.0
    np.testing.assert_allclose(rl.grade_force(m, s), m * G * np.sin(theta), rtol=1e-14,
                               atol=1e-9)
    np.testing.assert_allclose(rl.rolling_force(20.0, m, s, 0.006, 1e-5),
                               (0.006 + 1e-5 * 20.0) * m * G * np.cos(theta), rtol=1e-14)


def test_aerodynamic_force_with_wind():
    # First principles: F = ½ρCdA(v+w)|v+w|; a tailwind faster than the truck pushes it.
    assert rl.aerodynamic_force(25.0, 1.2, 0.6, 10.0) == pytest.approx(2250.0)
    assert rl.aerodynamic_force(20.0, 1.2, 0.6, 10.0, headwind=5.0) == pytest.approx(2250.0)
    assert rl.aerodynamic_force(2.0, 1.2, 0.6, 10.0, headwind=-5.0) == pytest.approx(-32.4)


@pytest.mark.parametrize("v, w, head", [(25.0, 5.0, 0.0), (3.0, 5.0, 0.0), (5.0, 5.0, 0.0),
                                         (0.0, 5.0, 0.0), (10.0, 4.0, -13.0),
                                         (22.0, 1.4, 2.0)])
def test_aerodynamic_force_averaged_over_directions_matches_quadrature(v, w, head):
    # Independent reference: the mean over an evenly spread wind direction φ of
    # ½ρCdA·x|x|, x = v + v_w + w·cos φ, integrated numerically by scipy.integrate.quad.
    from scipy.integrate import quad

    k = 0.5 * 1.2 * 0.6 * 10.0
    mean, _ = quad(lambda phi: (v + head + w * np.cos(phi)) * abs(v + head + w * np.cos(phi)),
                   0.0, 2 * np.pi, epsabs=1e-12, limit=200)
    expected = k * mean / (2 * np.pi)
    got = rl.aerodynamic_force(v, 1.2, 0.6, 10.0, headwind=head, wind_averaged=w)
    assert got == pytest.approx(expected, rel=1e-9, abs=1e-9)
    if abs(v + head) >= w:  # hand form above the wind speed: ½ρCdA·(x² + w²/2)
        x = v + head
        assert got == pytest.approx(np.sign(x) * k * (x * x + w * w / 2), rel=1e-12)


def test_averaged_wind_cancels_over_a_round_trip_but_a_headwind_does_not():
    # Out and back at 80 km/h in a 5 km/h wind, by hand: a headwind on both legs costs
    # (v+w)² against v² (+13 %); averaged over directions it costs v² + w²/2 (+0.2 %).
    v, w = 80 / 3.6, 5 / 3.6
    still = rl.aerodynamic_force(v, 1.2, 0.6, 10.0)
    head = rl.aerodynamic_force(v, 1.2, 0.6, 10.0, headwind=w)
    avg = rl.aerodynamic_force(v, 1.2, 0.6, 10.0, wind_averaged=w)
    assert head / still == pytest.approx((85 / 80) ** 2, rel=1e-12)      # 1.1289
    assert avg / still == pytest.approx(1 + 0.5 * (5 / 80) ** 2, rel=1e-12)  # 1.00195


def test_inertia_force():
    assert rl.inertia_force(40000.0, 0.5, 1.05) == pytest.approx(21000.0)


def test_force_input_kinds():
    idx = pd.RangeIndex(3)
    v = pd.Series([10.0, 20.0, 30.0], index=idx)
    out = rl.aerodynamic_force(v, 1.2, 0.6, 10.0)
    assert isinstance(out, pd.Series) and out.index.equals(idx)
    assert isinstance(rl.aerodynamic_force(10.0, 1.2, 0.6, 10.0), float)
    arr = rl.rolling_force(np.array([10.0, 20.0]), 40000.0, 0.01, 0.006)
    assert isinstance(arr, np.ndarray) and arr.shape == (2,)
    ser = rl.grade_force(pd.Series([1000.0, 2000.0]), 0.05)
    assert isinstance(ser, pd.Series)
    assert isinstance(rl.inertia_force(1000.0, np.array([0.1, 0.2])), np.ndarray)


@pytest.mark.parametrize("call, match", [
    (lambda: rl.rolling_force(10.0, -5.0, 0.0, 0.006), "mass"),
    (lambda: rl.grade_force(0.0, 0.01), "mass"),
    (lambda: rl.inertia_force(1000.0, 0.1, 0.9), "rotating_mass_factor"),
    (lambda: rl.aerodynamic_force(10.0, 1.2, -0.6, 10.0), "drag_coefficient"),
    (lambda: rl.Vehicle(0.6, 10.0, -0.001).checked(), "crr"),
    (lambda: rl.Vehicle(0.6, 10.0, 0.006, rotating_mass_factor=0.5).checked(),
     "rotating_mass_factor"),
    (lambda: rl.Vehicle(0.6, 10.0, 0.006, air_density=0.0).checked(), "air_density"),
    (lambda: rl.Vehicle(0.6, "ten", 0.006).checked(), "frontal_area"),
])
def test_force_errors(call, match):
    with pytest.raises(ValueError, match=match):
        call()


# ----------------------------------------------------------------------------- traces
def test_trace_intervals_and_series_index():
    v = pd.Series([0.0, 2.0, 2.0], index=[10, 11, 12])
    vm, a, d, s = rl.trace_intervals(v, pd.Series([0.0, 0.01, 0.0], index=v.index), 1.0)
    assert list(vm.index) == [10, 11]
    assert vm.tolist() == [1.0, 2.0] and a.tolist() == [2.0, 0.0] and d.tolist() == [1.0, 2.0]
    assert s.tolist() == [0.0, 0.01]


def test_interval_mass_by_leg():
    # interval i takes the mass of the leg holding sample i
    assert rl.interval_mass(6, [30000.0, 20000.0, 25000.0], [0, 2, 4]).tolist() == [
        30000.0, 30000.0, 20000.0, 20000.0, 25000.0]
    assert rl.interval_mass(3, 1000.0).tolist() == [1000.0, 1000.0]


@pytest.mark.parametrize("starts, masses, match", [
    ([1, 3], [1.0, 2.0], "start at sample 0"),
    ([0, 3, 3], [1.0, 2.0, 3.0], "strictly increasing"),
    ([0, 9], [1.0, 2.0], "before the last sample"),
    ([0, 2], [1.0], "one value per leg"),
    ([0, 2], [1.0, -2.0], "mass must be finite and > 0"),
    ([0.0, 2.0], [1.0, 2.0], "integer"),
    (None, [1.0, 2.0], "leg_starts is required"),
])
def test_leg_errors(starts, masses, match):
    with pytest.raises(ValueError, match=match):
        rl.interval_mass(6, masses, starts)


@pytest.mark.parametrize("speed, grade, dt, match", [
    ([1.0, -1.0], [0.0, 0.0], 1.0, "speed"),
    ([1.0, np.nan], [0.0, 0.0], 1.0, "speed"),
    ([1.0, 1.0], [0.0, np.inf], 1.0, "grade"),
    ([1.0], [0.0], 1.0, "2 samples"),
    ([1.0, 2.0], [0.0], 1.0, "same length"),
    ([1.0, 2.0], [0.0, 0.0], 0.0, "dt"),
])
def test_trace_errors(speed, grade, dt, match):
    with pytest.raises(ValueError, match=match):
        rl.wheel_power(speed, grade, dt, 1000.0, VEH)


def test_constant_speed_flat_energy_by_hand():
    # Road-load form F = A + C·v² (SAE J1263 coastdown form, references.md), by hand.
    v, n, m = 22.0, 101, 36000.0
    veh = rl.Vehicle(0.6, 10.0, 0.006, air_density=1.2)
    e = rl.energy_components(np.full(n, v), np.zeros(n), 1.0, m, veh)
    dist = v * (n - 1)
    a_term = 0.006 * m * G
    c_term = 0.5 * 1.2 * 0.6 * 10.0
    assert e["distance"] == pytest.approx(dist)
    assert e["rolling_energy"] == pytest.approx(a_term * dist, rel=1e-12)
    assert e["aerodynamic_energy"] == pytest.approx(c_term * v**2 * dist, rel=1e-12)
    assert e["traction_energy"] == pytest.approx((a_term + c_term * v**2) * dist, rel=1e-12)
    assert e["braking_energy"] == 0.0 and e["acceleration_energy"] == 0.0


def test_inertia_and_grade_work_are_exact():
    # Trace convention: inertia work = f·m·(v_end² − v_start²)/2 and grade work =
    # m·g·sinθ·distance, exactly (module notes).
    rng = np.random.default_rng(7)
    v = rng.uniform(0, 30, 400)
    s = rng.normal(0, 0.04, 400)
    m = 30000.0
    e = rl.energy_components(v, s, 0.5, m, VEH)
    inertia = e["acceleration_energy"] + e["deceleration_energy"]
    assert inertia == pytest.approx(VEH.rotating_mass_factor * m * (v[-1]**2 - v[0]**2) / 2,
                                    rel=1e-9, abs=1e-6)
    sin = s[:-1] / np.sqrt(1 + s[:-1]**2)
    d = 0.5 * (v[:-1] + v[1:]) * 0.5
    assert e["climbing_energy"] + e["descending_energy"] == pytest.approx(
        m * G * np.sum(sin * d), rel=1e-9)


@settings(max_examples=60, deadline=None)
@given(st.integers(2, 60), st.integers(0, 2**32 - 1), st.floats(-6.0, 6.0))
def test_wheel_energy_balance_by_hand(n, seed, wind):
    # Work–energy theorem, written out here with trigonometry (θ = arctan s) instead of
    # the module's algebraic cos/sin, and without its force helpers: the net wheel work
    # (traction − braking) is the change of kinetic energy (with the rotating-mass
    # factor) plus the work against gravity, rolling resistance and air. Each interval
    # runs at its mean speed v̄ = (v_i + v_{i+1})/2 for dt, covering v̄·dt.
    rng = np.random.default_rng(seed)
    v = rng.uniform(0, 35, n)
    s = rng.normal(0, 0.05, n)
    m = rng.uniform(5e3, 5e4)
    veh = VEH._replace(headwind=wind)
    e = rl.energy_components(v, s, 1.0, m, veh)
    vm = 0.5 * (v[:-1] + v[1:])
    d = vm * 1.0
    theta = np.arctan(s[:-1])
    air = vm + wind
    kinetic = veh.rotating_mass_factor * m * (v[-1] ** 2 - v[0] ** 2) / 2
    gravity = np.sum(m * 9.80665 * np.sin(theta) * d)
    rolling = np.sum((veh.crr + veh.crr_speed * vm) * m * 9.80665 * np.cos(theta) * d)
    aero = np.sum(0.5 * veh.air_density * veh.drag_coefficient * veh.frontal_area
                  * air * np.abs(air) * d)
    scale = abs(kinetic) + abs(gravity) + rolling + abs(aero) + 1.0
    assert e["traction_energy"] - e["braking_energy"] == pytest.approx(
        kinetic + gravity + rolling + aero, abs=1e-9 * scale)
    assert e["rolling_energy"] == pytest.approx(rolling, rel=1e-12, abs=1e-9)
    assert e["aerodynamic_energy"] == pytest.approx(aero, rel=1e-12, abs=1e-9 * scale)
    assert e["climbing_energy"] + e["descending_energy"] == pytest.approx(
        gravity, abs=1e-9 * scale)


def test_wheel_power_series_and_legs():
    v = pd.Series([10.0, 11.0, 12.0, 12.0])
    p = rl.wheel_power(v, np.zeros(4), 1.0, [20000.0, 30000.0], VEH, leg_starts=[0, 2])
    assert isinstance(p, pd.Series) and len(p) == 3
    one = rl.wheel_power(v.to_numpy()[1:3], np.zeros(2), 1.0, 20000.0, VEH)
    assert p.iloc[1] == pytest.approx(one[0])


# ----------------------------------------------------------------------------- steady speed
def test_steady_speed_without_aero_is_power_over_force():
    # First principles: with no speed-dependent resistance, v = P / F.
    veh = rl.Vehicle(0.0, 10.0, 0.01)
    assert rl.steady_speed(98066.5, 0.0, 40000.0, veh) == pytest.approx(25.0, rel=1e-15)
    # downhill force beating rolling resistance: nothing limits the speed
    assert rl.steady_speed(1e5, -0.05, 40000.0, veh) == np.inf


def test_steady_speed_matches_cubic_roots():
    # Independent check: with no wind and crr_speed = 0, the power balance is the cubic
    # k·v³ + F0·v − P = 0, solved by numpy.roots (companion-matrix eigenvalues).
    veh = rl.Vehicle(0.6, 10.0, 0.006, air_density=1.2)
    k = 0.5 * 1.2 * 0.6 * 10.0
    for p, s, m in [(300e3, 0.0, 40000.0), (250e3, 0.04, 36000.0), (100e3, -0.01, 20000.0)]:
        f0 = m * G * (0.006 + s) / np.sqrt(1 + s * s)
        roots = np.roots([k, 0.0, f0, -p])
        real = roots[np.abs(roots.imag) < 1e-9].real
        expected = real[real > 0].max()
        assert rl.steady_speed(p, s, m, veh) == pytest.approx(expected, rel=1e-10)


def test_steady_speed_input_kinds_and_errors():
    p = pd.Series([2e5, 3e5])
    out = rl.steady_speed(p, 0.02, 30000.0, VEH)
    assert isinstance(out, pd.Series) and (np.diff(out.to_numpy()) > 0).all()
    assert isinstance(rl.steady_speed(2e5, np.array([0.0, 0.03]), 3e4, VEH), np.ndarray)
    with pytest.raises(ValueError, match="power"):
        rl.steady_speed(0.0, 0.0, 30000.0, VEH)


@pytest.mark.parametrize("t_c", [-30.0, -15.0, 0.0, 8.0, 25.0, 35.0])
def test_rolling_resistance_follows_the_tyre_regulation_temperature_correction(t_c):
    # UNECE Regulation No. 117, Annex 6 (ISO 28580): F_r25 = F_r·[1 + K_t·(t_amb − 25)],
    # K_t = 0.006 for class C3 tyres with load index above 121. The coefficient at t must
    # turn back into the label's 25 °C value through the regulation's own equation.
    crr_t = rl.rolling_resistance_at(0.0055, t_c + 273.15)
    assert crr_t * (1 + 0.006 * (t_c - 25.0)) == pytest.approx(0.0055, rel=1e-12)
    assert rl.rolling_resistance_at(0.0055, t_c + 273.15, 0.0) == 0.0055
