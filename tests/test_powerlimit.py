"""Tests of tco.powerlimit: a power-limited truck slows on climbs; time and fuel follow.

Independent references: the steady speed on a grade is the positive root of the cubic
k·v³ + F0·v − P = 0 (numpy.roots); the slowing itself is the longitudinal equation of
motion m·v·dv/dx = P/v − F(v) (Guzzella and Sciarretta, Vehicle Propulsion Systems,
ch. 2), integrated along distance with scipy.integrate.solve_ivp.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from tco import dutycycle, powerlimit
from tco import roadload as rl

G = 9.80665
VEH = rl.Vehicle(0.6, 10.0, 0.006, air_density=1.2)
K = 0.5 * 1.2 * 0.6 * 10.0


def _f0(m, s):
    th = math.atan(s)
    return m * G * (0.006 * math.cos(th) + math.sin(th))


def test_long_climb_settles_at_the_steady_speed_of_numpy_roots():
    m, s, p = 40000.0, 0.05, 250e3
    n = 3001
    v = np.full(n, 20.0)
    d = np.arange(n) * 20.0
    u = powerlimit.limited_speed(v, d, np.full(n, s), m, VEH, p, 0.4)
    r = np.roots([K, 0.0, _f0(m, s), -p])
    v_s = r[np.abs(r.imag) < 1e-9].real.max()
    assert 8.0 < v_s < 20.0
    assert u[-1] == pytest.approx(v_s, rel=1e-9)
    assert np.all(np.diff(u) <= 1e-12)  # it only slows down on the climb


def test_no_slowing_where_the_power_suffices():
    # 10 m/s on the flat needs 10·(0.006·m·g + K·100) ≈ 41 kW < 250 kW: unchanged.
    n = 501
    v = np.full(n, 10.0)
    u = powerlimit.limited_speed(v, np.arange(n) * 10.0, np.zeros(n), 40000.0, VEH, 250e3,
                                 0.4)
    np.testing.assert_array_equal(u, v)


def test_slowing_matches_the_equation_of_motion():
    # Climb of 3 km at 5 % entered at 20 m/s with 250 kW at the wheel, 40 t, f_rot = 1:
    # m·v·dv/dx = P/v − F(v) integrated with solve_ivp gives the speed along the climb and
    # the time ∫dx/v; the trace re-timed by the model must take as long (to the 1 s grid).
    m, s, p, length = 40000.0, 0.05, 250e3, 3000.0

    def dvdx(x, y):
        v = y[0]
        return [(p / v - _f0(m, s) - K * v * v) / (m * v), 1.0 / v]

    sol = solve_ivp(dvdx, (0.0, length), [20.0, 0.0], rtol=1e-10, atol=1e-10,
                    dense_output=True)
    t_ref = sol.y[1, -1]
    n = int(length / 20.0) + 1
    trace = dutycycle.resample(np.arange(n) * 1.0, np.arange(n) * 20.0, np.arange(n) * 20.0 * s,
                               dt=1.0, speed=np.full(n, 20.0))
    slowed, info = powerlimit.slow_trace(trace, [m], VEH, p, 0.4)
    assert slowed["distance"].iloc[-1] == pytest.approx(length, rel=2e-3)
    assert info["time_added"] == pytest.approx(t_ref - (n - 1), abs=2.0)
    # the speed at 1.5 km into the climb, against the integrated equation of motion
    x = slowed["distance"].to_numpy()
    k = int(np.searchsorted(x, 1500.0))
    assert slowed["speed"].iloc[k] == pytest.approx(sol.sol(x[k])[0], rel=5e-3)
    assert info["speed_deficit_max"] == pytest.approx(20.0 - sol.y[0, -1], rel=1e-2)


def test_parked_tail_kept_and_legs_joined():
    m, s = 40000.0, 0.05
    n = 301
    a = dutycycle.resample(np.arange(n) * 1.0, np.arange(n) * 20.0, np.arange(n) * 20.0 * s,
                           dt=1.0, speed=np.concatenate([np.full(n - 1, 20.0), [0.0]]))
    a = a.assign(parked=False)
    tail = a.iloc[[-1] * 10].copy()
    tail["time"] = a["time"].iloc[-1] + np.arange(1, 11)
    tail["parked"] = True
    a = dutycycle.concatenate_legs([a.__class__(
        np.vstack([a.to_numpy(), tail.to_numpy()]), columns=a.columns).astype(a.dtypes)
        .assign(parked=lambda f: f["parked"].astype(bool))])
    b = dutycycle.from_segments([{"length": 1000.0, "speed": 15.0}])
    trip = dutycycle.concatenate_legs([a, b])
    slowed, info = powerlimit.slow_trace(trip, [m, 15000.0], VEH, 250e3, 0.4)
    assert info["time_added"] > 0
    assert int(slowed["parked"].sum()) == 10
    assert list(np.unique(slowed["leg"])) == [0, 1]
    assert slowed["distance"].iloc[-1] == pytest.approx(trip["distance"].iloc[-1], rel=2e-3)


def test_bad_parameters():
    with pytest.raises(ValueError, match="power"):
        powerlimit.limited_speed([1.0, 1.0], [0.0, 1.0], [0.0, 0.0], 1e4, VEH, 0.0, 0.4)
    with pytest.raises(ValueError, match="max_accel"):
        powerlimit.limited_speed([1.0, 1.0], [0.0, 1.0], [0.0, 0.0], 1e4, VEH, 1e5, -1.0)
