"""The speed a power-limited truck actually drives: slowed climbs, slower pull-aways.

A duty-cycle trace says how fast the job wants the truck to go. Where that asks for more
wheel power than the powertrain has (a heavy truck on a long climb, or pulling away
fully loaded), the truck cannot follow: it slows to the steady speed its power holds on
the grade, and takes longer to accelerate. :func:`limited_speed` gives that speed on the
trace's own distance grid; :func:`slow_trace` re-times the trace with it (each interval
takes its distance over its new mean speed) and resamples it to the fixed time step, so
the time, the energy and the fuel of the slowed stretch all follow from the kernel as
for any other trace.

Model
-----
Walking the trace sample by sample along distance, with u the truck's speed, the power
limit gives the acceleration (positive or negative) the truck has at full power,

.. math:: a_P(u) = \\frac{P_{max}/u - F_{road}(u, \\theta)}{f_{rot}\\, m},

with :math:`F_{road}` = aerodynamic + rolling + grade force (the formulas of
:mod:`tco.roadload`), capped by the route's acceleration limit. Over a step of distance
Δd the speed reachable at full power is :math:`\\sqrt{u^2 + 2 a_P \\Delta d}`, kept on
its side of the steady speed :math:`v_s` (:math:`P_{max} = v_s F_{road}(v_s)`, solved
by Newton's method) so that a coarse step cannot overshoot it. The truck drives the
smaller of that and the trace's speed: braking, stops and speeds below the limit are
the trace's own.

Why compiled
------------
The walk is a recursion over the samples (each speed depends on the previous one); a
numba loop runs a day of 1 Hz samples in well under a millisecond, where a Python loop
would take a noticeable part of a fleet run.

References
----------
.. [1] Guzzella, L. and Sciarretta, A., *Vehicle Propulsion Systems*, 3rd ed., Springer,
   2013, ch. 2 (longitudinal dynamics: m·dv/dt = F_traction − F_resistance).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from numba import njit

from tco import dutycycle
from tco import roadload as _rl
from tco.units import G

__all__ = ["limited_speed", "slow_trace"]

_aero_force = njit(inline="always")(_rl._aero_force)
_aero_slope = njit(inline="always")(_rl._aero_slope)
_rolling_force = njit(inline="always")(_rl._rolling_force)
_grade_force = njit(inline="always")(_rl._grade_force)
_cos_sin = njit(inline="always")(_rl._cos_sin)


@njit(cache=True)
def _road(v, mass, cos, sin, veh):
    """Road force at a steady speed [N] and its derivative [N/(m/s)]."""
    f = (_aero_force(v, veh.air_density, veh.drag_coefficient, veh.frontal_area,
                     veh.headwind, veh.wind_averaged)
         + _rolling_force(v, mass, cos, veh.crr, veh.crr_speed) + _grade_force(mass, sin))
    df = (_aero_slope(v, veh.air_density, veh.drag_coefficient, veh.frontal_area,
                      veh.headwind, veh.wind_averaged) + veh.crr_speed * mass * G * cos)
    return f, df


@njit(cache=True)
def _steady(power, mass, cos, sin, veh, guess):
    """Root of v·F(v) = P for v > 0 by safeguarded Newton [m/s] (inf when unbounded)."""
    lo, hi = 0.0, np.inf
    v = guess if guess > 0.0 else 1.0
    for _ in range(100):
        f, df = _road(v, mass, cos, sin, veh)
        r = v * f - power
        if r > 0.0:
            hi = v
        else:
            lo = v
        slope = f + v * df
        v_new = v - r / slope if slope > 0.0 else -1.0
        if not (lo < v_new < hi):
            v_new = 0.5 * (lo + hi) if hi < np.inf else 2.0 * v
        if abs(v_new - v) <= 1e-12 * v:
            return v_new
        v = v_new
        if v > 1e4:
            return np.inf
    return v


@njit(cache=True)
def _walk(speed, dist, grade, mass, veh, p_max, a_max, f_rot, out):
    n = speed.size
    u = speed[0]
    out[0] = u
    v_s = 1.0
    for k in range(n - 1):
        dd = dist[k + 1] - dist[k]
        target = speed[k + 1]
        if dd <= 0.0 or target <= 0.0:
            u = target
            out[k + 1] = u
            continue
        cos, sin = _cos_sin(grade[k])
        f, _ = _road(u, mass[k], cos, sin, veh)
        if u > 0.0:
            a = min((p_max / u - f) / (f_rot * mass[k]), a_max)
        else:
            a = a_max
        reach2 = u * u + 2.0 * a * dd
        if reach2 >= target * target:  # the trace can be followed
            u = target
        else:
            v_s = _steady(p_max, mass[k], cos, sin, veh, v_s if v_s < np.inf else u)
            reach = np.sqrt(max(reach2, 0.0))
            u = max(reach, v_s) if u > v_s else min(reach, v_s)
            u = min(max(u, 0.0), target)
        out[k + 1] = u


def limited_speed(speed, distance, grade, mass, vehicle, power, max_accel):
    """Speed a truck can drive at each sample of a trace with a wheel-power limit.

    Parameters
    ----------
    speed : array
        Trace speed at each sample. [m/s]
    distance : array
        Cumulative distance at each sample. [m]
    grade : array
        Grade of the interval from each sample, rise over run. [-]
    mass : float or array
        Vehicle mass, one value or one per sample. [kg]
    vehicle : tco.roadload.Vehicle
        Road-load parameters.
    power : float
        Wheel-power limit, > 0. [W]
    max_accel : float
        Acceleration limit when catching up with the trace, > 0. [m/s²]

    Returns
    -------
    ndarray
        Speed at each sample, ≤ the trace speed. [m/s]

    Examples
    --------
    >>> from tco.roadload import Vehicle
    >>> veh = Vehicle(0.0, 10.0, 0.01)   # no drag: v_s = P / (m·g·(crr + sinθ))
    >>> v = limited_speed(np.full(4001, 20.0), np.arange(4001) * 20.0, np.full(4001, 0.05),
    ...                   40000.0, veh, 200e3, 0.4)
    >>> round(float(v[-1]), 3)   # 200 kW / (40 t · g · (0.01 + 0.0499)) = 8.5 m/s
    8.507
    """
    veh = _rl.Vehicle(*vehicle).checked()
    v = np.ascontiguousarray(speed, dtype=float)
    d = np.ascontiguousarray(distance, dtype=float)
    s = np.ascontiguousarray(grade, dtype=float)
    m = np.ascontiguousarray(np.broadcast_to(np.asarray(mass, dtype=float), v.shape))
    if not (np.isfinite(power) and power > 0):
        raise ValueError(f"power must be finite and > 0 W, got {power}")
    if not (np.isfinite(max_accel) and max_accel > 0):
        raise ValueError(f"max_accel must be finite and > 0 m/s², got {max_accel}")
    out = np.empty_like(v)
    _walk(v, d, s, m, veh, float(power), float(max_accel), veh.rotating_mass_factor, out)
    return out


def slow_trace(trace: pd.DataFrame, leg_mass, vehicle, power: float,
               max_accel: float) -> tuple[pd.DataFrame, dict]:
    """The trace as a truck with a wheel-power limit drives it, re-timed and resampled.

    Parameters
    ----------
    trace : pandas.DataFrame
        A trace (:mod:`tco.dutycycle`), one or several legs, optionally ``parked``.
    leg_mass : array
        Vehicle mass on each leg of the trace. [kg]
    vehicle : tco.roadload.Vehicle
        Road-load parameters.
    power : float
        Wheel-power limit. [W]
    max_accel : float
        Acceleration limit when catching up with the trace. [m/s²]

    Returns
    -------
    trace : pandas.DataFrame
        The trace unchanged when the truck can follow it everywhere; otherwise each
        slowed leg re-timed (interval time = distance / mean speed) and resampled to the
        trace's time step, parked tails kept, legs joined again.
    info : dict
        ``time_added`` [s] (whole time steps), ``slowed_distance`` [m] (distance where the truck drives
        below the trace speed by more than 0.1 m/s), ``speed_deficit_max`` [m/s].
    """
    dt = float(trace.attrs.get("dt", trace["time"].iloc[1] - trace["time"].iloc[0]))
    starts = dutycycle.leg_starts(trace)
    ends = np.append(starts[1:], len(trace))
    legs, slowed, deficit = [], 0.0, 0.0
    changed = False
    for j, (a, b) in enumerate(zip(starts, ends)):
        leg = trace.iloc[a:b].reset_index(drop=True)
        leg.attrs = {"dt": dt}
        if "parked" in leg.columns and leg["parked"].any():
            first = int(np.argmax(leg["parked"].to_numpy()))
            move, tail = leg.iloc[:first], leg.iloc[first:]
        else:
            move, tail = leg, leg.iloc[0:0]
        v = move["speed"].to_numpy(dtype=float)
        d = move["distance"].to_numpy(dtype=float)
        u = limited_speed(v, d, move["grade"].to_numpy(dtype=float), float(leg_mass[j]),
                          vehicle, power, max_accel)
        gap = v - u
        if len(move) < 2 or gap.max() <= 1e-9:
            legs.append(leg)
            continue
        changed = True
        deficit = max(deficit, float(gap.max()))
        dd = np.diff(d)
        um = 0.5 * (u[1:] + u[:-1])
        moving = dd > 0
        step = np.where(moving, dd / np.where(um > 0, um, 1.0), dt)
        t_new = np.concatenate(([0.0], np.cumsum(step)))
        slowed += float(dd[(0.5 * (gap[1:] + gap[:-1]) > 0.1)].sum())
        new = dutycycle.resample(t_new, d, move["elevation"].to_numpy(dtype=float), dt=dt,
                                 speed=u)
        new["distance"] += d[0]
        new["leg"] = int(leg["leg"].iloc[0])
        if len(tail):
            t0 = float(new["time"].iloc[-1])
            tail = tail.copy()
            tail["time"] = t0 + dt * np.arange(1, len(tail) + 1)
            tail["distance"] = float(new["distance"].iloc[-1])
            tail["elevation"] = float(new["elevation"].iloc[-1])
            new["parked"] = False
            new = pd.concat([new, tail], ignore_index=True)
        new.attrs = {"dt": dt}
        legs.append(new)
    info = {"time_added": 0.0, "slowed_distance": slowed, "speed_deficit_max": deficit}
    if not changed:
        return trace, info
    out = dutycycle.concatenate_legs(legs) if len(legs) > 1 else legs[0]
    out.attrs.update({k: v for k, v in trace.attrs.items() if k not in out.attrs})
    info["time_added"] = (len(out) - len(trace)) * dt
    return out, info
