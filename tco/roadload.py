"""Road load of a heavy truck: the forces it must overcome and the work they take.

This module is the readable reference for the energy model. Every function is a pure
function of numpy arrays (scalar, array and pandas Series in, the same out) and every
quantity is SI. The fast path in :mod:`tco.kernel` compiles the very same private
force formulas defined here (``_aero_force`` ... ``_inertia_force``), so the two cannot
drift apart; tests check that the kernel's totals equal what these functions give.

Forces on a vehicle of mass ``m`` at speed ``v`` on a road of grade ``s`` (rise/run)::

    F_aero    = 0.5 * rho * Cd * A * (v + v_w) * |v + v_w|      (v_w: headwind)
              = 0.5 * rho * Cd * A * w**2 * f((v + v_w) / w)    (w: wind averaged over directions)
    F_rolling = (crr + crr_speed * v) * m * g * cos(theta)
    F_grade   = m * g * sin(theta)
    F_inertia = f_rot * m * a

with ``cos(theta) = 1 / sqrt(1 + s**2)`` and ``sin(theta) = s / sqrt(1 + s**2)``: the exact
angle ``theta = atan(s)``, computed without trigonometric functions.

Trace convention
----------------
A trace is sampled at a fixed time step ``dt`` [s]: ``speed`` [m/s] and ``grade`` [-],
``n`` samples each. Interval ``i`` runs from sample ``i`` to ``i + 1`` (``n - 1``
intervals) with mean speed ``v = (v_i + v_{i+1}) / 2``, acceleration
``a = (v_{i+1} - v_i) / dt``, distance ``v * dt`` and grade ``grade[i]``. With this scheme
the inertia work of an interval is exactly ``f_rot * m * (v_{i+1}**2 - v_i**2) / 2`` and
the grade work exactly ``m * g * sin(theta) * distance``, so energy is conserved exactly.
The mass may change by leg (loading, unloading): ``leg_starts`` lists the sample index
where each leg starts (the first is 0) and ``leg_mass`` the mass of each leg; interval
``i`` takes the mass of the leg that contains sample ``i``.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np
import pandas as pd
from scipy.optimize import brentq

from tco.units import G

__all__ = [
    "Vehicle",
    "aerodynamic_force",
    "air_density",
    "check_legs",
    "energy_components",
    "grade_force",
    "inertia_force",
    "interval_mass",
    "rolling_force",
    "standard_atmosphere",
    "steady_speed",
    "trace_intervals",
    "wheel_power",
]

# ----------------------------------------------------------------------------- constants
#: U.S. Standard Atmosphere 1976, sea-level pressure. [Pa]
P0_1976 = 101325.0
#: U.S. Standard Atmosphere 1976, sea-level temperature. [K]
T0_1976 = 288.15
#: U.S. Standard Atmosphere 1976, temperature gradient of the troposphere. [K/m]
LAPSE_1976 = -0.0065
#: U.S. Standard Atmosphere 1976, universal gas constant as the standard defines it. [J/(mol·K)]
R_STAR_1976 = 8.31432
#: U.S. Standard Atmosphere 1976, mean molar mass of sea-level air. [kg/mol]
M0_1976 = 0.0289644
#: U.S. Standard Atmosphere 1976, effective Earth radius for geopotential altitude. [m]
R0_1976 = 6356766.0
#: Specific gas constant of dry air implied by the 1976 standard, R*/M0. [J/(kg·K)]
R_AIR = R_STAR_1976 / M0_1976
#: Valid geopotential altitudes of the troposphere layer used here (the 1976 tables
#: start at -5 km). [m]
TROPOSPHERE_RANGE = (-5000.0, 11000.0)


# ----------------------------------------------------------------------------- parameters
class Vehicle(NamedTuple):
    """Road-load parameters of a vehicle and the air it drives through (all SI).

    Mass is not here: it changes by leg and is passed with the trace.

    Attributes
    ----------
    drag_coefficient : float
        Aerodynamic drag coefficient Cd. [-]
    frontal_area : float
        Frontal area A. [m²]
    crr : float
        Rolling-resistance coefficient at zero speed (a tyre label of 5 kg/t is 0.005). [-]
    crr_speed : float
        Growth of the rolling-resistance coefficient with speed, Crr(v) = crr + crr_speed·v.
        [s/m]
    rotating_mass_factor : float
        Equivalent rotating-mass factor f_rot ≥ 1: inertia of wheels and driveline added to
        the translating mass. [-]
    air_density : float
        Density of the ambient air the trace is driven in (see :func:`air_density`).
        [kg/m³]
    headwind : float
        Wind speed against the direction of travel (negative: tailwind). [m/s]
    wind_averaged : float
        Speed of a wind whose direction relative to the truck is averaged over all
        directions (evenly spread); adds to ``headwind``. See :func:`aerodynamic_force`.
        [m/s]
    """

    drag_coefficient: float
    frontal_area: float
    crr: float
    crr_speed: float = 0.0
    rotating_mass_factor: float = 1.0
    air_density: float = 1.225
    headwind: float = 0.0
    wind_averaged: float = 0.0

    def checked(self) -> Vehicle:
        """Return a copy with every field a float, after checking the values.

        Raises
        ------
        ValueError
            When a value is not finite or out of its physical range.
        """
        vals = {}
        for name, value in zip(self._fields, self, strict=True):
            try:
                value = float(value)
            except (TypeError, ValueError):
                raise ValueError(f"vehicle {name} must be a number, got {value!r}") from None
            if not np.isfinite(value):
                raise ValueError(f"vehicle {name} must be finite, got {value}")
            vals[name] = value
        for name in ("drag_coefficient", "frontal_area", "crr", "crr_speed"):
            if vals[name] < 0:
                raise ValueError(f"vehicle {name} must be >= 0, got {vals[name]}")
        if vals["rotating_mass_factor"] < 1.0:
            raise ValueError(
                f"vehicle rotating_mass_factor must be >= 1, got {vals['rotating_mass_factor']}"
            )
        if vals["air_density"] <= 0:
            raise ValueError(f"vehicle air_density must be > 0, got {vals['air_density']}")
        if vals["wind_averaged"] < 0:
            raise ValueError(f"vehicle wind_averaged must be >= 0, got {vals['wind_averaged']}")
        return Vehicle(**vals)


# ----------------------------------------------------------------------------- input handling
def _inputs(*values):
    """Float arrays of ``values`` and a function giving results back in the input's kind.

    Scalars in → float out; arrays in → ndarray out; any pandas Series in → Series out on
    the first Series' index.
    """
    index = next((v.index for v in values if isinstance(v, pd.Series)), None)
    arrays = [np.asarray(v, dtype=float) for v in values]
    scalar = index is None and all(a.ndim == 0 for a in arrays)

    def restore(result, index_override=None):
        if index is not None:
            return pd.Series(result, index=index if index_override is None else index_override)
        if scalar:
            return float(result)
        return np.asarray(result, dtype=float)

    return arrays, restore


def _check_positive(name, value):
    value = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(value)) or np.any(value <= 0):
        raise ValueError(f"{name} must be finite and > 0")


def _check_nonnegative(name, value):
    value = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(value)) or np.any(value < 0):
        raise ValueError(f"{name} must be finite and >= 0")


def _check_finite(name, value):
    if not np.all(np.isfinite(np.asarray(value, dtype=float))):
        raise ValueError(f"{name} must be finite")


# ----------------------------------------------------------------------------- shared formulas
#: Averaged wind speed below which there is no wind (keeps |x|/w finite). [m/s]
WIND_NEGLIGIBLE = 1e-6

# These private formulas are written once, with plain arithmetic and numpy ufuncs, so that
# they work elementwise on numpy arrays here and on scalars inside the compiled loop of
# tco.kernel (which wraps them with numba.njit). Keep them branch-free.
def _cos_sin(grade):
    """cos and sin of the road angle from its grade, without trigonometry."""
    inv = 1.0 / np.sqrt(1.0 + grade * grade)
    return inv, grade * inv


def _mean_speed_accel(v_start, v_end, dt):
    """Mean speed [m/s] and acceleration [m/s²] of an interval."""
    return 0.5 * (v_start + v_end), (v_end - v_start) / dt


def _aero_force(speed, air_density, drag_coefficient, frontal_area, headwind,
                wind_averaged=0.0):
    """Aerodynamic force [N]: ½ρC_dA times x·|x|, x = v + v_w, or, with a wind of speed
    w from evenly spread directions, its mean over the direction: with a = min(|x|, w)/w,
    sign(x)·(2/π)·[arcsin(a)·(x² + w²/2) + 1.5·w²·a·√(1 − a²)] (= x|x| + sign(x)·w²/2
    for |x| ≥ w). a is clamped after the division, so where |x| is well above w it is
    exactly 1 (arcsin is steep at 1); a wind below WIND_NEGLIGIBLE counts as none.
    """
    x = speed + headwind
    k = 0.5 * air_density * drag_coefficient * frontal_area
    if wind_averaged < WIND_NEGLIGIBLE:
        return k * x * np.abs(x)
    w2 = wind_averaged * wind_averaged
    a = np.minimum(np.abs(x) / wind_averaged, 1.0)
    f = (2.0 / np.pi) * (np.arcsin(a) * (x * x + 0.5 * w2) + 1.5 * w2 * a * np.sqrt(1.0 - a * a))
    return k * np.copysign(f, x)


def _aero_slope(speed, air_density, drag_coefficient, frontal_area, headwind,
                wind_averaged=0.0):
    """Derivative of :func:`_aero_force` with respect to speed [N/(m/s)]:
    ρC_dA·|x|, or with the averaged wind ½ρC_dA·(4/π)·[w·√(1 − a²) + |x|·arcsin(a)]."""
    x = speed + headwind
    k = 0.5 * air_density * drag_coefficient * frontal_area
    if wind_averaged < WIND_NEGLIGIBLE:
        return 2.0 * k * np.abs(x)
    ax = np.abs(x)
    a = np.minimum(ax / wind_averaged, 1.0)
    return k * (4.0 / np.pi) * (wind_averaged * np.sqrt(1.0 - a * a) + ax * np.arcsin(a))


def _rolling_force(speed, mass, cos, crr, crr_speed):
    return (crr + crr_speed * speed) * (mass * G) * cos


def _grade_force(mass, sin):
    return (mass * G) * sin


def _inertia_force(mass, acceleration, rotating_mass_factor):
    return (rotating_mass_factor * mass) * acceleration


def _resistance_force(speed, mass, cos, sin, air_density, drag_coefficient, frontal_area,
                      headwind, crr, crr_speed, wind_averaged=0.0):
    """Aerodynamic + rolling + grade force at a steady speed [N]."""
    return (
        _aero_force(speed, air_density, drag_coefficient, frontal_area, headwind,
                    wind_averaged)
        + _rolling_force(speed, mass, cos, crr, crr_speed)
        + _grade_force(mass, sin)
    )


# ----------------------------------------------------------------------------- atmosphere
def standard_atmosphere(altitude):
    """Temperature and pressure of the U.S. Standard Atmosphere 1976 troposphere.

    .. math::

        h = r_0 z / (r_0 + z), \\quad T = T_0 + L h, \\quad
        p = p_0 (T_0 / T)^{g_0 M_0 / (R^* L)}

    Parameters
    ----------
    altitude : float, array or Series
        Geometric altitude above mean sea level z. [m]

    Returns
    -------
    temperature : float, array or Series
        Standard temperature. [K]
    pressure : float, array or Series
        Standard pressure. [Pa]

    Raises
    ------
    ValueError
        When the geopotential altitude is outside -5 km ... 11 km (the troposphere layer).

    Notes
    -----
    The geometric altitude z is converted to geopotential altitude h with the effective
    Earth radius r0 = 6356766 m. Only the first layer (constant lapse rate -6.5 K/km) is
    implemented: it covers every road on Earth. Written here rather than taken from
    ``fluids.atmosphere.ATMOSPHERE_1976`` because that class is scalar-only and fluids is a
    test dependency; the tests check this function against it.

    Examples
    --------
    >>> t, p = standard_atmosphere(0.0)
    >>> t, p
    (288.15, 101325.0)

    References
    ----------
    .. [1] NOAA, NASA, USAF, "U.S. Standard Atmosphere, 1976", NOAA-S/T 76-1562,
       U.S. Government Printing Office, Washington D.C., 1976.
    """
    (z,), restore = _inputs(altitude)
    _check_finite("altitude", z)
    h = R0_1976 * z / (R0_1976 + z)
    if np.any(h < TROPOSPHERE_RANGE[0]) or np.any(h > TROPOSPHERE_RANGE[1]):
        raise ValueError(
            "altitude must be within the troposphere layer of the 1976 standard atmosphere "
            "(-5000 m to 11000 m geopotential)"
        )
    temperature = T0_1976 + LAPSE_1976 * h
    exponent = G * M0_1976 / (R_STAR_1976 * LAPSE_1976)
    pressure = P0_1976 * (T0_1976 / temperature) ** exponent
    return restore(temperature), restore(pressure)


def air_density(altitude, temperature=None):
    """Density of dry air from the U.S. Standard Atmosphere 1976 pressure.

    .. math:: \\rho = p_{1976}(z) / (R_{air} T)

    Parameters
    ----------
    altitude : float, array or Series
        Geometric altitude above mean sea level. [m]
    temperature : float, array or Series, optional
        Ambient air temperature. [K] When None, the standard-atmosphere temperature at
        that altitude is used.

    Returns
    -------
    float, array or Series
        Air density. [kg/m³]

    Raises
    ------
    ValueError
        Altitude outside the troposphere layer, or a temperature that is not > 0 K.

    Notes
    -----
    Pressure follows the standard atmosphere (weather is ignored); a given temperature
    only changes the ideal-gas density at that pressure. R_air = R*/M0 = 287.053 J/(kg·K)
    as implied by the 1976 standard.

    Examples
    --------
    >>> round(air_density(0.0), 6)
    1.224999
    >>> round(air_density(1000.0), 4)
    1.1117

    References
    ----------
    .. [1] NOAA, NASA, USAF, "U.S. Standard Atmosphere, 1976", NOAA-S/T 76-1562,
       U.S. Government Printing Office, Washington D.C., 1976.
    """
    t_std, pressure = standard_atmosphere(np.asarray(altitude, dtype=float))
    if temperature is None:
        t = t_std
    else:
        t = np.asarray(temperature, dtype=float)
        if not np.all(np.isfinite(t)) or np.any(t <= 0):
            raise ValueError("temperature must be finite and > 0 K (give kelvin)")
    rho = pressure / (R_AIR * t)
    _, restore = _inputs(altitude, temperature if temperature is not None else 0.0)
    return restore(rho)


# ----------------------------------------------------------------------------- tyres
#: Temperature coefficient of the rolling resistance of class C3 truck tyres with a load
#: index above 121. [1/K] UNECE Regulation No. 117, Annex 6 (as aligned with ISO 28580):
#: F_r25 = F_r·[1 + K_t·(t_amb − 25 °C)], K_t = 0.006 (0.010 for C2 and lighter C3).
ROLLING_TEMPERATURE_COEFFICIENT = 0.006
#: Reference temperature of tyre rolling-resistance labels (UNECE R117 / ISO 28580). [K]
ROLLING_REFERENCE_TEMPERATURE = 298.15


def rolling_resistance_at(crr_25, temperature, coefficient=ROLLING_TEMPERATURE_COEFFICIENT):
    """Rolling-resistance coefficient at an ambient temperature from its 25 °C value.

    .. math:: C_{rr}(t) = C_{rr,25} / [1 + K_t (t - 25\\,°C)]

    the temperature correction of UNECE Regulation No. 117, Annex 6 (ISO 28580) solved
    for the value at t.

    Parameters
    ----------
    crr_25 : float
        Coefficient at 25 °C, as on a tyre label. [-]
    temperature : float, array or Series
        Ambient temperature. [K]
    coefficient : float
        K_t, ≥ 0. [1/K]

    Returns
    -------
    float, array or Series
        Coefficient at that temperature. [-]

    Notes
    -----
    The regulation applies the correction between 20 and 30 °C; using it in winter is an
    extrapolation (cold tyres roll harder: +32 % at −15 °C with K_t = 0.006). Ambient
    temperatures below −60 °C are refused.

    Examples
    --------
    >>> round(float(rolling_resistance_at(0.005, 258.15)), 6)   # −15 °C
    0.006579
    """
    (t,), restore = _inputs(temperature)
    if not np.all(np.isfinite(t)) or np.any(t < 213.15):
        raise ValueError("temperature must be finite and ≥ −60 °C (give kelvin)")
    _check_nonnegative("coefficient", coefficient)
    return restore(float(crr_25) / (1.0 + float(coefficient)
                                    * (t - ROLLING_REFERENCE_TEMPERATURE)))


# ----------------------------------------------------------------------------- forces
def aerodynamic_force(speed, air_density, drag_coefficient, frontal_area, headwind=0.0,
                      wind_averaged=0.0):
    """Aerodynamic drag force.

    .. math:: F = \\tfrac12 \\rho C_d A (v + v_w) |v + v_w|

    or, with a wind of speed w whose direction relative to the truck is averaged over all
    directions, the mean over the angle φ of that force with v_w + w·cos φ along the road:

    .. math:: F = \\tfrac12 \\rho C_d A\\, w^2 f\\!\\left(\\frac{v + v_w}{w}\\right),
       \\quad f(u) = u^2 + \\tfrac12 \\ (|u| \\ge 1)

    Parameters
    ----------
    speed : float, array or Series
        Vehicle speed. [m/s]
    air_density : float, array or Series
        Air density. [kg/m³]
    drag_coefficient : float
        Drag coefficient Cd. [-]
    frontal_area : float
        Frontal area. [m²]
    headwind : float, array or Series
        Wind against the direction of travel (negative: tailwind). [m/s]
    wind_averaged : float
        Wind speed averaged over evenly spread directions (0: none). [m/s]

    Returns
    -------
    float, array or Series
        Drag force, positive against the motion. [N]

    Notes
    -----
    Wind is taken along the road only; the rise of the drag coefficient with yaw angle
    in a crosswind is not modelled. Averaged over directions, a steady wind w adds
    ½ρC_dA·w²/2 at speeds above w (its along-road component w·cos φ averages out and
    its square averages to w²/2), instead of the ½ρC_dA·(2vw + w²) of a headwind on
    every leg. For |u| < 1 (the truck slower than the wind) f is the exact integral
    (2/π)·[arcsin(u)(u² + ½) + 1.5·u·√(1 − u²)], continuous with u² + ½ at u = 1.

    Examples
    --------
    >>> round(aerodynamic_force(25.0, 1.2, 0.6, 10.0), 6)
    2250.0

    References
    ----------
    .. [1] SAE J1263, "Road Load Measurement and Dynamometer Simulation Using Coastdown
       Techniques", SAE International (road-load form F = A + B·v + C·v²).
    """
    (v, rho, w), restore = _inputs(speed, air_density, headwind)
    _check_nonnegative("drag_coefficient", drag_coefficient)
    _check_nonnegative("frontal_area", frontal_area)
    _check_positive("air_density", rho)
    _check_nonnegative("wind_averaged", wind_averaged)
    return restore(_aero_force(v, rho, float(drag_coefficient), float(frontal_area), w,
                               float(wind_averaged)))


def rolling_force(speed, mass, grade, crr, crr_speed=0.0):
    """Rolling-resistance force.

    .. math:: F = (c_{rr} + c_{rr,v} v) \\, m g \\cos\\theta, \\quad
              \\cos\\theta = 1/\\sqrt{1+s^2}

    Parameters
    ----------
    speed : float, array or Series
        Vehicle speed. [m/s]
    mass : float, array or Series
        Vehicle mass. [kg]
    grade : float, array or Series
        Road grade, rise over run. [-]
    crr : float
        Rolling-resistance coefficient at zero speed. [-]
    crr_speed : float
        Speed slope of the coefficient. [s/m]

    Returns
    -------
    float, array or Series
        Rolling-resistance force. [N]

    Notes
    -----
    Heavy-truck tyres on highway have crr of about 0.005–0.008 (common practice); the EU
    tyre label classes A–D for C3 tyres are ≤ 4.0, 4.1–5.0, 5.1–6.0 and 6.1–7.0 kg/t.

    Examples
    --------
    >>> round(rolling_force(20.0, 40000.0, 0.0, 0.006), 4)
    2353.596

    References
    ----------
    .. [1] Regulation (EU) 2020/740 of the European Parliament and of the Council on the
       labelling of tyres with respect to fuel efficiency, Annex I Part A.
    """
    (v, m, s), restore = _inputs(speed, mass, grade)
    _check_positive("mass", m)
    _check_nonnegative("crr", crr)
    _check_nonnegative("crr_speed", crr_speed)
    cos, _ = _cos_sin(s)
    return restore(_rolling_force(v, m, cos, float(crr), float(crr_speed)))


def grade_force(mass, grade):
    """Weight component along the road.

    .. math:: F = m g \\sin\\theta, \\quad \\sin\\theta = s/\\sqrt{1+s^2}

    Parameters
    ----------
    mass : float, array or Series
        Vehicle mass. [kg]
    grade : float, array or Series
        Road grade, rise over run (percent grade / 100). [-]

    Returns
    -------
    float, array or Series
        Force, positive uphill (resisting), negative downhill. [N]

    Examples
    --------
    >>> round(grade_force(40000.0, 0.05), 2)
    19588.83

    References
    ----------
    .. [1] Definition of grade: percent grade = 100 · rise / run, angle = atan(rise/run).
    """
    (m, s), restore = _inputs(mass, grade)
    _check_positive("mass", m)
    _check_finite("grade", s)
    _, sin = _cos_sin(s)
    return restore(_grade_force(m, sin))


def inertia_force(mass, acceleration, rotating_mass_factor=1.0):
    """Force to accelerate the vehicle and its rotating parts.

    .. math:: F = f_{rot} m a

    Parameters
    ----------
    mass : float, array or Series
        Vehicle mass. [kg]
    acceleration : float, array or Series
        Acceleration along the road. [m/s²]
    rotating_mass_factor : float
        Equivalent rotating-mass factor f_rot ≥ 1. [-]

    Returns
    -------
    float, array or Series
        Inertia force, negative when decelerating. [N]

    Examples
    --------
    >>> inertia_force(40000.0, 0.5, 1.05)
    21000.0
    """
    (m, a), restore = _inputs(mass, acceleration)
    _check_positive("mass", m)
    if not np.isfinite(rotating_mass_factor) or rotating_mass_factor < 1.0:
        raise ValueError(f"rotating_mass_factor must be >= 1, got {rotating_mass_factor}")
    return restore(_inertia_force(m, a, float(rotating_mass_factor)))


# ----------------------------------------------------------------------------- traces
def _check_trace(speed, grade, dt):
    v = np.asarray(speed, dtype=float)
    s = np.asarray(grade, dtype=float)
    if v.ndim != 1 or s.ndim != 1 or v.shape != s.shape:
        raise ValueError("speed and grade must be 1-D arrays of the same length")
    if v.size < 2:
        raise ValueError("a trace needs at least 2 samples")
    if not np.all(np.isfinite(v)) or np.any(v < 0):
        raise ValueError("speed must be finite and >= 0 m/s")
    if not np.all(np.isfinite(s)):
        raise ValueError("grade must be finite")
    if not (np.isfinite(dt) and dt > 0):
        raise ValueError(f"dt must be finite and > 0 s, got {dt}")
    return v, s


def trace_intervals(speed, grade, dt):
    """Mean speed, acceleration, distance and grade of each interval of a trace.

    .. math:: \\bar v_i = (v_i + v_{i+1})/2, \\quad a_i = (v_{i+1} - v_i)/\\Delta t,
              \\quad d_i = \\bar v_i \\Delta t

    Parameters
    ----------
    speed : array or Series
        Speed at each sample. [m/s]
    grade : array or Series
        Grade at each sample, rise over run. [-]
    dt : float
        Time step between samples. [s]

    Returns
    -------
    mean_speed, acceleration, distance, grade : arrays or Series of n - 1 values
        [m/s], [m/s²], [m] and [-]. A Series input gives Series on the index of each
        interval's first sample.

    Examples
    --------
    >>> vm, a, d, s = trace_intervals([0.0, 2.0, 2.0], [0.0, 0.01, 0.0], 1.0)
    >>> vm.tolist(), a.tolist(), d.tolist(), s.tolist()
    ([1.0, 2.0], [2.0, 0.0], [1.0, 2.0], [0.0, 0.01])
    """
    v, s = _check_trace(speed, grade, dt)
    vm, a = _mean_speed_accel(v[:-1], v[1:], float(dt))
    _, restore = _inputs(speed, grade)
    idx = _series_index(speed, grade)
    return tuple(restore(x, idx) for x in (vm, a, vm * float(dt), s[:-1]))


def _series_index(*values):
    for v in values:
        if isinstance(v, pd.Series):
            return v.index[:-1]
    return None


def interval_mass(n_samples, mass, leg_starts=None):
    """Mass of each interval of a trace whose mass changes by leg.

    Parameters
    ----------
    n_samples : int
        Number of samples in the trace (there are ``n_samples - 1`` intervals).
    mass : float or array
        One mass for the whole trace, or the mass of each leg. [kg]
    leg_starts : array of int, optional
        Sample index where each leg starts; the first must be 0, strictly increasing.
        Required when ``mass`` has one value per leg.

    Returns
    -------
    ndarray
        Mass of each interval; interval i takes the mass of the leg holding sample i. [kg]

    Raises
    ------
    ValueError
        Bad leg starts, a length mismatch or a mass that is not > 0.

    Examples
    --------
    >>> interval_mass(5, [30000.0, 20000.0], [0, 2]).tolist()
    [30000.0, 30000.0, 20000.0, 20000.0]
    """
    m = np.asarray(mass, dtype=float)
    _check_positive("mass", m)
    n_int = int(n_samples) - 1
    if n_int < 1:
        raise ValueError("a trace needs at least 2 samples")
    if m.ndim == 0:
        return np.full(n_int, float(m))
    starts = check_legs(n_samples, leg_starts, m)
    ends = np.append(starts[1:], n_samples)
    counts = np.minimum(ends, n_int) - np.minimum(starts, n_int)
    return np.repeat(m, counts)


def check_legs(n_samples, leg_starts, leg_mass):
    """Validate leg starts and leg masses; return the starts as an int64 array.

    Parameters
    ----------
    n_samples : int
        Number of samples in the trace.
    leg_starts : array of int
        Sample index where each leg starts (first 0, strictly increasing, < n_samples).
    leg_mass : array
        Mass of each leg. [kg]

    Returns
    -------
    ndarray of int64
        The leg starts.

    Raises
    ------
    ValueError
        When the legs do not describe the trace.
    """
    m = np.asarray(leg_mass, dtype=float)
    if leg_starts is None:
        if m.ndim == 0 or m.size == 1:
            return np.zeros(1, dtype=np.int64)
        raise ValueError("leg_starts is required when a mass is given per leg")
    starts = np.asarray(leg_starts)
    if starts.ndim != 1 or starts.size == 0 or not np.issubdtype(starts.dtype, np.integer):
        raise ValueError("leg_starts must be a 1-D array of integer sample indices")
    starts = starts.astype(np.int64)
    if m.ndim != 1 or m.size != starts.size:
        raise ValueError("leg_mass must have one value per leg start")
    _check_positive("leg_mass", m)
    if starts[0] != 0:
        raise ValueError("the first leg must start at sample 0")
    if np.any(np.diff(starts) <= 0):
        raise ValueError("leg_starts must be strictly increasing")
    if starts[-1] >= n_samples:
        raise ValueError("every leg must start before the last sample of the trace")
    return starts


def _interval_forces(speed, grade, dt, mass, vehicle, leg_starts):
    """Per-interval forces [N], mean speed [m/s] and mass [kg] of a trace."""
    vehicle = Vehicle(*vehicle).checked()
    v, s = _check_trace(speed, grade, dt)
    m = interval_mass(v.size, mass, leg_starts)
    vm, a = _mean_speed_accel(v[:-1], v[1:], float(dt))
    cos, sin = _cos_sin(s[:-1])
    f_aero = _aero_force(vm, vehicle.air_density, vehicle.drag_coefficient,
                         vehicle.frontal_area, vehicle.headwind, vehicle.wind_averaged)
    f_roll = _rolling_force(vm, m, cos, vehicle.crr, vehicle.crr_speed)
    f_grade = _grade_force(m, sin)
    f_inertia = _inertia_force(m, a, vehicle.rotating_mass_factor)
    return f_aero, f_roll, f_grade, f_inertia, vm, m


def wheel_power(speed, grade, dt, mass, vehicle, leg_starts=None):
    """Power at the wheels over each interval of a trace.

    .. math:: P_i = (F_{aero} + F_{rolling} + F_{grade} + F_{inertia})\\,\\bar v_i

    Parameters
    ----------
    speed : array or Series
        Speed at each sample. [m/s]
    grade : array or Series
        Grade at each sample, rise over run. [-]
    dt : float
        Time step. [s]
    mass : float or array
        Vehicle mass, one value or one per leg. [kg]
    vehicle : Vehicle
        Road-load parameters.
    leg_starts : array of int, optional
        Sample index where each leg starts (see :func:`interval_mass`).

    Returns
    -------
    array or Series of n - 1 values
        Wheel power; positive is traction, negative must be braked or regenerated. [W]

    Examples
    --------
    >>> veh = Vehicle(drag_coefficient=0.0, frontal_area=10.0, crr=0.0)
    >>> wheel_power([0.0, 1.0], [0.0, 0.0], 1.0, 1000.0, veh).tolist()
    [500.0]
    """
    f_aero, f_roll, f_grade, f_inertia, vm, _ = _interval_forces(
        speed, grade, dt, mass, vehicle, leg_starts)
    p = (f_aero + f_roll + f_grade + f_inertia) * vm
    _, restore = _inputs(speed, grade)
    return restore(p, _series_index(speed, grade))


#: Keys of :func:`energy_components`, all energies [J] except distance [m], duration [s].
ENERGY_KEYS = (
    "distance", "duration",
    "aerodynamic_energy", "rolling_energy", "climbing_energy", "descending_energy",
    "acceleration_energy", "deceleration_energy", "traction_energy", "braking_energy",
)


def energy_components(speed, grade, dt, mass, vehicle, leg_starts=None):
    """Where the wheel energy of a trace goes.

    .. math:: E_{traction} - E_{braking} = E_{aero} + E_{rolling} + E_{climbing}
              + E_{descending} + E_{acceleration} + E_{deceleration}

    Parameters
    ----------
    speed, grade, dt, mass, vehicle, leg_starts
        As for :func:`wheel_power`.

    Returns
    -------
    dict of float
        ``distance`` [m], ``duration`` [s] and energies [J]: ``aerodynamic_energy``,
        ``rolling_energy``, ``climbing_energy`` (sum of positive grade work),
        ``descending_energy`` (sum of negative grade work, ≤ 0), ``acceleration_energy``
        (positive inertia work), ``deceleration_energy`` (≤ 0), ``traction_energy``
        (sum of positive wheel work) and ``braking_energy`` (negative wheel work as a
        positive figure: what must be dissipated or regenerated).

    Notes
    -----
    Energy is conserved exactly by the trace convention (see the module notes).

    Examples
    --------
    >>> veh = Vehicle(drag_coefficient=0.0, frontal_area=10.0, crr=0.0)
    >>> e = energy_components([0.0, 2.0, 0.0], [0.0, 0.0, 0.0], 1.0, 1000.0, veh)
    >>> e["acceleration_energy"], e["braking_energy"]
    (2000.0, 2000.0)
    """
    f_aero, f_roll, f_grade, f_inertia, vm, _ = _interval_forces(
        speed, grade, dt, mass, vehicle, leg_starts)
    d = vm * float(dt)
    w_grade = f_grade * d
    w_inertia = f_inertia * d
    w_wheel = (f_aero + f_roll + f_grade + f_inertia) * vm * float(dt)
    return {
        "distance": float(d.sum()),
        "duration": float(d.size * float(dt)),
        "aerodynamic_energy": float((f_aero * d).sum()),
        "rolling_energy": float((f_roll * d).sum()),
        "climbing_energy": float(np.maximum(w_grade, 0.0).sum()),
        "descending_energy": float(np.minimum(w_grade, 0.0).sum()),
        "acceleration_energy": float(np.maximum(w_inertia, 0.0).sum()),
        "deceleration_energy": float(np.minimum(w_inertia, 0.0).sum()),
        "traction_energy": float(np.maximum(w_wheel, 0.0).sum()),
        "braking_energy": float(np.maximum(-w_wheel, 0.0).sum()),
    }


# ----------------------------------------------------------------------------- steady speed
def _steady_speed_one(power, grade, mass, veh):
    cos, sin = _cos_sin(grade)

    def surplus(v):  # road power needed at v minus the power available
        return v * _resistance_force(v, mass, cos, sin, veh.air_density,
                                     veh.drag_coefficient, veh.frontal_area, veh.headwind,
                                     veh.crr, veh.crr_speed, veh.wind_averaged) - power

    if veh.drag_coefficient * veh.frontal_area == 0.0 and veh.crr_speed == 0.0:
        f0 = _resistance_force(0.0, mass, cos, sin, veh.air_density, 0.0, 0.0, 0.0,
                               veh.crr, 0.0)
        return power / f0 if f0 > 0 else np.inf
    hi = 1.0
    while surplus(hi) <= 0.0:
        hi *= 2.0
        if hi > 1e9:  # pragma: no cover - unreachable with a quadratic or cubic term
            return np.inf
    return brentq(surplus, 0.0, hi, xtol=1e-13, rtol=4 * np.finfo(float).eps, maxiter=200)


def steady_speed(power, grade, mass, vehicle):
    """Constant speed a vehicle holds on a grade with a given power at the wheels.

    Solves :math:`v\\,(F_{aero}(v) + F_{rolling}(v) + F_{grade}) = P` for v > 0 with
    Brent's method (:func:`scipy.optimize.brentq`).

    Parameters
    ----------
    power : float, array or Series
        Power at the wheels, > 0. [W]
    grade : float, array or Series
        Road grade, rise over run. [-]
    mass : float, array or Series
        Vehicle mass. [kg]
    vehicle : Vehicle
        Road-load parameters (air density and headwind included).

    Returns
    -------
    float, array or Series
        Steady speed. [m/s] ``inf`` when nothing limits the speed (no aerodynamic or
        speed-dependent rolling resistance and a downhill force that beats rolling).

    Notes
    -----
    For v > 0 the resistance force grows with speed, so the root is unique. Used for the
    speed deficit of a power-limited truck: the trace speed minus the speed its rated
    power holds on that grade.

    Examples
    --------
    >>> veh = Vehicle(drag_coefficient=0.0, frontal_area=10.0, crr=0.01)
    >>> round(steady_speed(98066.5, 0.0, 40000.0, veh), 9)
    25.0

    References
    ----------
    .. [1] Brent, R. P., "Algorithms for Minimization without Derivatives",
       Prentice-Hall, 1973, ch. 4.
    """
    veh = Vehicle(*vehicle).checked()
    (p, s, m), restore = _inputs(power, grade, mass)
    _check_positive("power", p)
    _check_positive("mass", m)
    _check_finite("grade", s)
    p, s, m = np.broadcast_arrays(p, s, m)
    out = np.empty(p.shape)
    for idx in np.ndindex(p.shape):
        out[idx] = _steady_speed_one(float(p[idx]), float(s[idx]), float(m[idx]), veh)
    return restore(out if out.ndim else out[()])
