"""Battery-electric powertrain: battery power, regeneration, state of charge, feasibility.

Battery power for a wheel power ``P`` (motor power limit ``P_mot`` at the wheel)::

    traction (P > 0):  P_batt = min(P, P_mot) / eta_drivetrain + P_aux
    braking  (P <= 0): P_regen = max(max(P, -P_mot) * eta_regen, -P_regen_max)
                       P_batt  = P_regen + P_aux

Braking power the motor or the battery charge limit cannot take goes to the friction
brakes, and so does regeneration a full battery refuses. The battery energy follows::

    E_0 = E_start,   E_{i+1} = min(E_max, E_i - P_batt,i * dt)

There is no charging above full, and no floor: a trace that would take the battery below
empty shows a negative state of charge, reported as infeasible rather than hidden.

This module is the readable reference; :mod:`tco.kernel` compiles the same private
formulas (``_battery_traction``, ``_regen_battery_power``, ``_regen_refused``) into its
fused loop.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from tco import roadload
from tco.roadload import _check_finite, _check_nonnegative, _check_positive, _inputs

__all__ = [
    "ElectricPowertrain",
    "auxiliary_power",
    "battery_energy_track",
    "battery_power",
    "battery_use",
    "day_feasibility",
    "depot_charger_power",
    "energy_above_reserve",
    "enroute_charging_time",
    "grid_energy",
    "regen_refused",
]


class ElectricPowertrain(NamedTuple):
    """Parameters of a battery-electric powertrain (all SI).

    Attributes
    ----------
    usable_capacity : float
        Usable battery energy between empty and full. [J] (1 kWh = ``tco.units.J_PER_KWH`` J)
    motor_power : float
        Motor power limit expressed at the wheel, for traction and regeneration. [W]
    drivetrain_efficiency : float
        Battery-to-wheel efficiency in traction, in (0, 1] (about 0.9, common practice).
        [-]
    regen_efficiency : float
        Wheel-to-battery efficiency when regenerating, in (0, 1]. [-]
    regen_power_max : float
        Largest charge power the battery accepts while regenerating. [W]
    aux_power : float
        Auxiliary power drawn from the battery at all times (see
        :func:`auxiliary_power`). [W]
    initial_soc : float
        State of charge at the start of the trace, fraction of usable capacity in [0, 1].
        [-]
    """

    usable_capacity: float
    motor_power: float
    drivetrain_efficiency: float
    regen_efficiency: float
    regen_power_max: float
    aux_power: float = 0.0
    initial_soc: float = 1.0

    def checked(self) -> ElectricPowertrain:
        """Return a copy with every field a float, after checking the values.

        Raises
        ------
        ValueError
            When a value is not finite or out of its range.
        """
        vals = {}
        for name, value in zip(self._fields, self, strict=True):
            try:
                value = float(value)
            except (TypeError, ValueError):
                raise ValueError(f"electric {name} must be a number, got {value!r}") from None
            if not np.isfinite(value):
                raise ValueError(f"electric {name} must be finite, got {value}")
            vals[name] = value
        for name in ("drivetrain_efficiency", "regen_efficiency"):
            if not 0.0 < vals[name] <= 1.0:
                raise ValueError(f"electric {name} must be in (0, 1], got {vals[name]}")
        for name in ("usable_capacity", "motor_power"):
            if vals[name] <= 0:
                raise ValueError(f"electric {name} must be > 0, got {vals[name]}")
        for name in ("regen_power_max", "aux_power"):
            if vals[name] < 0:
                raise ValueError(f"electric {name} must be >= 0, got {vals[name]}")
        if not 0.0 <= vals["initial_soc"] <= 1.0:
            raise ValueError(f"electric initial_soc must be in [0, 1], got {vals['initial_soc']}")
        return ElectricPowertrain(**vals)


# ----------------------------------------------------------------------------- shared formulas
# Plain arithmetic, elementwise on arrays here and on scalars in tco.kernel (numba).
def _battery_traction(wheel_power, motor_power, drivetrain_efficiency, aux_power):
    """Battery power for a positive wheel power, motor limit applied [W]."""
    return np.minimum(wheel_power, motor_power) / drivetrain_efficiency + aux_power


def _regen_battery_power(wheel_power, motor_power, regen_efficiency, regen_power_max):
    """Power regenerated into the battery (≤ 0) for a wheel power ≤ 0 [W]."""
    return np.maximum(np.maximum(wheel_power, -motor_power) * regen_efficiency,
                      -regen_power_max)


def _regen_refused(wheel_power, regen_power, regen_efficiency):
    """Braking power at the wheel left to the friction brakes by the power limits [W]."""
    return regen_power / regen_efficiency - wheel_power


# ----------------------------------------------------------------------------- public functions
def auxiliary_power(temperature, base, heating_per_K, cooling_per_K, comfort_low,
                    comfort_high):
    """Auxiliary power of a battery-electric truck at an ambient temperature.

    .. math:: P_{aux} = P_{base} + h \\max(0, T_{low} - T) + c \\max(0, T - T_{high})

    Parameters
    ----------
    temperature : float, array or Series
        Ambient temperature. [K]
    base : float
        Power drawn whatever the weather (controls, compressor, steering). [W]
    heating_per_K : float
        Cabin and battery heating power per kelvin below the comfort band. [W/K]
    cooling_per_K : float
        Cooling power per kelvin above the comfort band. [W/K]
    comfort_low : float
        Lower edge of the band needing neither heating nor cooling. [K]
    comfort_high : float
        Upper edge of that band. [K]

    Returns
    -------
    float, array or Series
        Auxiliary power. [W]

    Notes
    -----
    A linear degree-hour model; the coefficients are the scenario's, not published
    constants.

    Examples
    --------
    >>> auxiliary_power(263.15, 2000.0, 300.0, 400.0, 288.15, 295.15)
    9500.0
    """
    (t,), restore = _inputs(temperature)
    if not np.all(np.isfinite(t)) or np.any(t <= 0):
        raise ValueError("temperature must be finite and > 0 K (give kelvin)")
    for name, value in (("base", base), ("heating_per_K", heating_per_K),
                        ("cooling_per_K", cooling_per_K)):
        _check_nonnegative(name, value)
    if not comfort_low <= comfort_high:
        raise ValueError("comfort_low must not be above comfort_high")
    p = (float(base) + float(heating_per_K) * np.maximum(0.0, comfort_low - t)
         + float(cooling_per_K) * np.maximum(0.0, t - comfort_high))
    return restore(p)


#: Pack specific energy used to estimate a battery's mass when none is given. [J/kg]
#: From memory: heavy-truck packs hold roughly 130–170 Wh/kg at pack level.
PACK_SPECIFIC_ENERGY = 150.0 * 3600.0
#: Specific heat of a lithium-ion pack. [J/(kg·K)] From memory: cells measure about
#: 0.9–1.1 kJ/(kg·K).
PACK_SPECIFIC_HEAT = 1000.0
#: Temperature at which the cold regeneration share is reached. [K] (−20 °C)
REGEN_COLD_AT = 253.15


def battery_heating_power(temperature, heat_below, loss_per_K):
    """Power that keeps a battery pack warm while operating in the cold.

    .. math:: P = UA \\max(0, T_{min} - T)

    the pack's heat loss at its lowest working temperature, made up by its heater.

    Parameters
    ----------
    temperature : float, array or Series
        Ambient temperature. [K]
    heat_below : float
        Pack temperature the thermal management keeps, and below which it heats. [K]
    loss_per_K : float
        Heat-loss conductance of the pack to the air, UA. [W/K]

    Returns
    -------
    float, array or Series
        Heating power. [W]

    Examples
    --------
    >>> float(battery_heating_power(258.15, 283.15, 50.0))   # −15 °C, kept at 10 °C
    1250.0
    """
    (t,), restore = _inputs(temperature)
    _check_nonnegative("loss_per_K", loss_per_K)
    return restore(float(loss_per_K) * np.maximum(0.0, float(heat_below) - t))


def preconditioning_energy(temperature, heat_below, pack_mass,
                           specific_heat=PACK_SPECIFIC_HEAT):
    """Energy to warm a cold-soaked pack to its working temperature before the day.

    .. math:: E = m\\, c_p \\max(0, T_{min} - T)

    drawn from the grid while the truck is plugged in at the depot (a resistive heater:
    heat = electricity).

    Parameters
    ----------
    temperature : float, array or Series
        Ambient temperature (the pack is taken as cold-soaked to it). [K]
    heat_below : float
        Working temperature the pack is warmed to. [K]
    pack_mass : float
        Battery pack mass. [kg]
    specific_heat : float
        Specific heat of the pack. [J/(kg·K)]

    Returns
    -------
    float, array or Series
        Energy. [J]

    Examples
    --------
    >>> from tco.units import J_PER_KWH
    >>> float(preconditioning_energy(258.15, 283.15, 4000.0)) / J_PER_KWH   # 4 t, 25 K
    27.77777777777778
    """
    (t,), restore = _inputs(temperature)
    _check_nonnegative("pack_mass", pack_mass)
    return restore(float(pack_mass) * float(specific_heat)
                   * np.maximum(0.0, float(heat_below) - t))


def regen_cold_share(temperature, full_above, share_cold, cold_at=REGEN_COLD_AT):
    """Share of the regenerative charging power a cold battery accepts.

    1 at and above ``full_above``, falling linearly to ``share_cold`` at ``cold_at``
    (−20 °C) and held there below: cold cells take charge slowly (lithium plating), so
    battery management limits regeneration until the pack is warm.

    Parameters
    ----------
    temperature : float, array or Series
        Ambient temperature. [K]
    full_above : float
        Temperature from which regeneration is not limited. [K]
    share_cold : float
        Share accepted at ``cold_at`` and below, in [0, 1]. [-]
    cold_at : float
        Temperature of the full cold limit, below ``full_above``. [K]

    Returns
    -------
    float, array or Series
        Share of the regeneration power limit. [-]

    Examples
    --------
    >>> round(float(regen_cold_share(263.15, 273.15, 0.5)), 12)   # −10 °C: half way
    0.75
    """
    (t,), restore = _inputs(temperature)
    if not 0.0 <= share_cold <= 1.0:
        raise ValueError(f"share_cold must be in [0, 1], got {share_cold}")
    if not cold_at < full_above:
        raise ValueError("cold_at must be below full_above")
    x = np.clip((float(full_above) - t) / (float(full_above) - float(cold_at)), 0.0, 1.0)
    return restore(1.0 - x * (1.0 - float(share_cold)))


def battery_power(wheel_power, electric):
    """Battery power for a wheel power, with the motor and regeneration limits.

    .. math::

        P_{batt} = \\min(P, P_{mot})/\\eta_{dt} + P_{aux} \\quad (P > 0)

        P_{batt} = \\max(\\max(P, -P_{mot})\\,\\eta_{regen},\\ -P_{regen,max}) + P_{aux}
        \\quad (P \\le 0)

    Parameters
    ----------
    wheel_power : float, array or Series
        Power at the wheels. [W]
    electric : ElectricPowertrain
        Powertrain parameters.

    Returns
    -------
    float, array or Series
        Battery power, positive when discharging. [W]

    Examples
    --------
    >>> e = ElectricPowertrain(1.8e9, 400e3, 0.9, 0.8, 250e3, 5e3)
    >>> battery_power([90e3, -100e3, -500e3], e).tolist()
    [105000.0, -75000.0, -245000.0]
    """
    e = ElectricPowertrain(*electric).checked()
    (p,), restore = _inputs(wheel_power)
    return restore(_battery_power_array(p, e))


def _battery_power_array(p, e):
    traction = _battery_traction(p, e.motor_power, e.drivetrain_efficiency, e.aux_power)
    regen = _regen_battery_power(p, e.motor_power, e.regen_efficiency, e.regen_power_max)
    return np.where(p > 0.0, traction, regen + e.aux_power)


def regen_refused(wheel_power, electric):
    """Braking power at the wheel that the motor and battery power limits leave to the
    friction brakes.

    .. math:: P_{refused} = P_{regen}/\\eta_{regen} - P \\quad (P \\le 0), \\quad 0 \\ (P > 0)

    Parameters
    ----------
    wheel_power : float, array or Series
        Power at the wheels. [W]
    electric : ElectricPowertrain
        Powertrain parameters.

    Returns
    -------
    float, array or Series
        Braking power not regenerated, ≥ 0. [W] A full battery refuses more; see
        :func:`battery_energy_track`.

    Examples
    --------
    >>> e = ElectricPowertrain(1.8e9, 400e3, 0.9, 0.8, 250e3)
    >>> regen_refused([-100e3, -500e3], e).tolist()
    [0.0, 187500.0]
    """
    e = ElectricPowertrain(*electric).checked()
    (p,), restore = _inputs(wheel_power)
    regen = _regen_battery_power(p, e.motor_power, e.regen_efficiency, e.regen_power_max)
    return restore(np.where(p > 0.0, 0.0, _regen_refused(p, regen, e.regen_efficiency)))


def battery_energy_track(battery_power, dt, energy_start, energy_max):
    """Battery energy at each sample, with no charging above full.

    .. math:: E_0 = E_{start}, \\quad E_{i+1} = \\min(E_{max},\\ E_i - P_i \\Delta t)

    computed without a Python loop from the closed form of this one-sided reflection:
    with :math:`Y_k = E_{start} - \\sum_{j<k} P_j \\Delta t`,

    .. math:: E_k = Y_k - \\max\\bigl(0, \\max_{j \\le k} (Y_j - E_{max})\\bigr)

    Parameters
    ----------
    battery_power : array
        Battery power of each interval, positive discharging. [W]
    dt : float
        Time step. [s]
    energy_start : float
        Battery energy at the first sample, ≤ ``energy_max``. [J]
    energy_max : float
        Battery energy when full. [J]

    Returns
    -------
    energy : ndarray of n + 1 values
        Battery energy at each sample. [J] Not floored: it goes below 0 when the battery
        would run flat.
    refused : float
        Charge energy refused because the battery was full. [J]

    Notes
    -----
    The closed form is the discrete Skorokhod reflection at an upper barrier; it holds
    because the barrier is constant and ``energy_start <= energy_max``.

    Examples
    --------
    >>> e, refused = battery_energy_track([-2.0, 1.0, -3.0], 1.0, 9.0, 10.0)
    >>> e.tolist(), refused
    ([9.0, 10.0, 9.0, 10.0], 3.0)
    """
    x = np.asarray(battery_power, dtype=float) * float(dt)
    if not energy_start <= energy_max:
        raise ValueError("energy_start must not be above energy_max")
    y = np.empty(x.size + 1)
    y[0] = energy_start
    y[1:] = energy_start - np.cumsum(x)
    pushed = np.maximum(np.maximum.accumulate(y - energy_max), 0.0)
    return y - pushed, float(pushed[-1])


#: Keys of :func:`battery_use`: energies [J], SOC [-], time [s], distance [m], speeds [m/s].
ELECTRIC_KEYS = (
    "electric_battery_energy_out", "electric_battery_energy_regenerated",
    "electric_battery_energy_net", "electric_regen_refused_by_limits",
    "electric_regen_refused_full_battery", "electric_friction_brake_energy",
    "electric_soc_start", "electric_soc_end", "electric_soc_min",
    "electric_limited_time", "electric_limited_distance",
    "electric_speed_deficit_max", "electric_speed_deficit_mean",
)


def battery_use(speed, grade, dt, mass, vehicle, electric, leg_starts=None):
    """Battery energy, regeneration and state of charge of an electric truck on a trace.

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
    vehicle : tco.roadload.Vehicle
        Road-load parameters.
    electric : ElectricPowertrain
        Powertrain parameters.
    leg_starts : array of int, optional
        Sample index where each leg starts.

    Returns
    -------
    totals : dict of float
        ``electric_battery_energy_out`` [J] (discharge), ``..._regenerated`` [J] (charge
        accepted, net of auxiliaries while braking), ``..._net`` [J] (out − regenerated
        = start − end energy), ``electric_regen_refused_by_limits`` [J at the wheel],
        ``electric_regen_refused_full_battery`` [J at the battery],
        ``electric_friction_brake_energy`` [J at the wheel], ``electric_soc_start``,
        ``electric_soc_end``, ``electric_soc_min`` [-], and for intervals where the wheel
        power exceeds the motor limit: ``electric_limited_time`` [s],
        ``electric_limited_distance`` [m], ``electric_speed_deficit_max`` and
        ``electric_speed_deficit_mean`` [m/s].
    soc : ndarray of n values
        State of charge at each sample, fraction of usable capacity. [-]

    Notes
    -----
    The speed deficit is defined as for the diesel (:func:`tco.diesel.fuel_use`), with
    the motor power at the wheel.
    """
    e = ElectricPowertrain(*electric).checked()
    veh = roadload.Vehicle(*vehicle).checked()
    p = np.asarray(roadload.wheel_power(speed, grade, dt, mass, veh, leg_starts), dtype=float)
    vm, _, dist, s = (np.asarray(x) for x in roadload.trace_intervals(
        np.asarray(speed, dtype=float), np.asarray(grade, dtype=float), dt))
    m = roadload.interval_mass(vm.size + 1, mass, leg_starts)
    dt = float(dt)
    p_batt = _battery_power_array(p, e)
    regen = _regen_battery_power(p, e.motor_power, e.regen_efficiency, e.regen_power_max)
    refused_limits = float(
        np.where(p > 0.0, 0.0, _regen_refused(p, regen, e.regen_efficiency)).sum() * dt)
    x = p_batt * dt
    e_start = e.initial_soc * e.usable_capacity
    energy, refused_full = battery_energy_track(p_batt, dt, e_start, e.usable_capacity)
    soc = energy / e.usable_capacity
    out = float(np.maximum(x, 0.0).sum())
    regenerated = float(np.maximum(-x, 0.0).sum()) - refused_full
    limited = p > e.motor_power
    if limited.any():
        v_ss = roadload.steady_speed(e.motor_power, s[limited], m[limited], veh)
        deficit = np.maximum(vm[limited] - v_ss, 0.0)
        deficit_max, deficit_mean = float(deficit.max()), float(deficit.mean())
    else:
        deficit_max = deficit_mean = 0.0
    totals = {
        "electric_battery_energy_out": out,
        "electric_battery_energy_regenerated": regenerated,
        "electric_battery_energy_net": out - regenerated,
        "electric_regen_refused_by_limits": refused_limits,
        "electric_regen_refused_full_battery": refused_full,
        "electric_friction_brake_energy": refused_limits + refused_full / e.regen_efficiency,
        "electric_soc_start": float(soc[0]),
        "electric_soc_end": float(soc[-1]),
        "electric_soc_min": float(soc.min()),
        "electric_limited_time": float(limited.sum() * dt),
        "electric_limited_distance": float(dist[limited].sum()),
        "electric_speed_deficit_max": deficit_max,
        "electric_speed_deficit_mean": deficit_mean,
    }
    return totals, soc


# ----------------------------------------------------------------------------- feasibility
def day_feasibility(net_battery_energy_per_day, usable_capacity_new, usable_capacity_eol,
                    reserve_fraction):
    """Whether a day's battery energy fits the battery when new and at end of life.

    .. math:: \\text{margin} = C (1 - r) - E_{day}, \\qquad
              C_{required} = E_{day} / (1 - r)

    Parameters
    ----------
    net_battery_energy_per_day : float or array
        Net energy taken from the battery over the day's driving (between charges). [J]
    usable_capacity_new : float or array
        Usable capacity of the new battery. [J]
    usable_capacity_eol : float or array
        Usable capacity at end of life (after ageing), ≤ the new capacity. [J]
    reserve_fraction : float
        Share of usable capacity kept in reserve and never planned to be used, in [0, 1).
        [-]

    Returns
    -------
    dict
        ``feasible_new`` and ``feasible_eol`` (bool or bool array), ``margin_new`` and
        ``margin_eol`` [J] (negative: short by that much), ``required_capacity`` [J]
        (smallest usable capacity that serves the day with the reserve intact).

    Examples
    --------
    >>> r = day_feasibility(1.2e9, 1.8e9, 1.44e9, 0.1)
    >>> from tco.units import J_PER_KWH
    >>> r["feasible_new"], r["feasible_eol"], round(r["required_capacity"] / J_PER_KWH, 1)
    (True, True, 370.4)
    """
    e_day = np.asarray(net_battery_energy_per_day, dtype=float)
    new = np.asarray(usable_capacity_new, dtype=float)
    eol = np.asarray(usable_capacity_eol, dtype=float)
    _check_finite("net_battery_energy_per_day", e_day)
    _check_positive("usable_capacity_new", new)
    _check_positive("usable_capacity_eol", eol)
    if np.any(eol > new):
        raise ValueError("usable_capacity_eol must not exceed usable_capacity_new")
    if not 0.0 <= reserve_fraction < 1.0:
        raise ValueError(f"reserve_fraction must be in [0, 1), got {reserve_fraction}")
    keep = 1.0 - float(reserve_fraction)
    margin_new = energy_above_reserve(new, 1.0, float(reserve_fraction)) - e_day
    margin_eol = energy_above_reserve(eol, 1.0, float(reserve_fraction)) - e_day

    def out(x):
        return x.item() if np.ndim(x) == 0 else x

    return {
        "feasible_new": out(margin_new >= 0),
        "feasible_eol": out(margin_eol >= 0),
        "margin_new": out(margin_new),
        "margin_eol": out(margin_eol),
        "required_capacity": out(np.maximum(e_day, 0.0) / keep),
    }


def grid_energy(battery_energy, charging_efficiency):
    """Energy drawn from the grid to put an energy into the battery.

    .. math:: E_{grid} = E_{battery} / \\eta_{charge}

    Parameters
    ----------
    battery_energy : float, array or Series
        Energy to put back into the battery. [J]
    charging_efficiency : float
        Grid-to-battery efficiency, in (0, 1] (about 0.9 for depot or DC charging,
        from memory; 0.884 measured on a light-duty car at Level 2). [-]

    Returns
    -------
    float, array or Series
        Grid energy. [J]

    Examples
    --------
    >>> grid_energy(0.9, 0.9)
    1.0
    """
    (e,), restore = _inputs(battery_energy)
    if not 0.0 < charging_efficiency <= 1.0:
        raise ValueError(f"charging_efficiency must be in (0, 1], got {charging_efficiency}")
    return restore(e / float(charging_efficiency))


def energy_above_reserve(usable_capacity: float, start_soc: float, reserve: float) -> float:
    """Energy a battery can give in a day before it reaches its reserve.

    .. math:: E_{avail} = C_{usable}\\,(SOC_{start} - SOC_{reserve})

    A day fits the battery when its deepest drawdown, (SOC_start − SOC_min)·C_usable,
    is at most this energy.

    Parameters
    ----------
    usable_capacity : float
        Usable capacity at the battery's state of health. [J]
    start_soc : float
        State of charge at the start of the day. [-]
    reserve : float
        State of charge kept in reserve. [-]

    Returns
    -------
    float
        Available energy. [J]

    Examples
    --------
    >>> from tco.units import J_PER_KWH
    >>> energy_above_reserve(500 * J_PER_KWH, 1.0, 0.1) / J_PER_KWH
    450.0
    """
    return usable_capacity * (start_soc - reserve)


def depot_charger_power(grid_energy, window_seconds):
    """Smallest charger power that draws an energy from the grid within a time window.

    .. math:: P = E_{grid} / t_{window}

    Parameters
    ----------
    grid_energy : float, array or Series
        Energy to draw from the grid (see :func:`grid_energy`). [J]
    window_seconds : float, array or Series
        Time the truck stands at the depot charger. [s]

    Returns
    -------
    float, array or Series
        Charger power drawn from the grid. [W]

    Notes
    -----
    Constant power over the window; the battery's charge taper near full is ignored.

    Examples
    --------
    >>> depot_charger_power(3.6e9, 36000.0)
    100000.0
    """
    (e, t), restore = _inputs(grid_energy, window_seconds)
    _check_nonnegative("grid_energy", e)
    _check_positive("window_seconds", t)
    return restore(e / t)


def enroute_charging_time(deficit_energy, charger_power, efficiency, capacity=None,
                          arrival_soc=0.0, taper_start_soc=1.0, share_at_full=1.0):
    """Time at an en-route charger to make up a battery energy deficit.

    Flat (no ``capacity`` given): :math:`t = E_{deficit} / (P_{charger}\\, \\eta)`.

    With a charging-power curve: the battery takes :math:`P\\,\\eta\\,k(s)` at state of
    charge s, where the share k is 1 up to ``taper_start_soc`` and falls linearly to
    ``share_at_full`` at a full battery (the constant-current / constant-voltage shape
    of lithium-ion charging). Charging from ``arrival_soc`` by :math:`\\Delta s =
    E_{deficit}/C`,

    .. math:: t = \\frac{C}{P\\,\\eta} \\int_{s_0}^{s_0+\\Delta s} \\frac{ds}{k(s)},

    in closed form on each linear piece (:math:`\\int ds/(a + b s) = \\ln(a + b s)/b`).
    A deficit beyond one fill (to a full battery) takes several stops, each from
    ``arrival_soc``.

    Parameters
    ----------
    deficit_energy : float, array or Series
        Battery energy missing for the day; zero or negative needs no stop. [J]
    charger_power : float
        Power the charger draws from the grid. [W]
    efficiency : float
        Grid-to-battery efficiency, in (0, 1]. [-]
    capacity : float, optional
        Usable battery capacity; without it the power is flat. [J]
    arrival_soc : float
        State of charge when charging starts, in [0, 1). [-]
    taper_start_soc : float
        State of charge where the charging power starts to fall, in (0, 1]. [-]
    share_at_full : float
        Share of the charger power still taken at a full battery, in (0, 1]. [-]

    Returns
    -------
    float, array or Series
        Charging time. [s]

    Examples
    --------
    >>> enroute_charging_time(3.6e8, 400e3, 0.9)
    1000.0
    >>> # 80 % → 100 % of 100 kWh at 100 kW, power falling from 100 % to 20 %:
    >>> # t = (20 kWh / 100 kW) · ln(1/0.2) / 0.8 = 0.2 h · 2.0118 = 1448.5 s
    >>> round(float(enroute_charging_time(7.2e7, 100e3, 1.0, 3.6e8, 0.8, 0.8, 0.2)), 1)
    1448.5
    """
    (e,), restore = _inputs(deficit_energy)
    _check_finite("deficit_energy", e)
    _check_positive("charger_power", charger_power)
    if not 0.0 < efficiency <= 1.0:
        raise ValueError(f"efficiency must be in (0, 1], got {efficiency}")
    e = np.maximum(e, 0.0)
    rate = float(charger_power) * float(efficiency)
    if capacity is None:
        return restore(e / rate)
    cap = float(capacity)
    s0, s1, k1 = float(arrival_soc), float(taper_start_soc), float(share_at_full)
    if not (cap > 0 and 0.0 <= s0 < 1.0 and 0.0 < s1 <= 1.0 and 0.0 < k1 <= 1.0):
        raise ValueError("capacity must be > 0, arrival_soc in [0, 1), taper_start_soc and "
                         "share_at_full in (0, 1]")

    def to(s):  # charging time per unit of C/rate from state of charge 0 to s
        flat = np.minimum(s, s1)
        x = np.maximum(s - s1, 0.0)
        span = 1.0 - s1
        if span <= 0.0:
            return flat
        slope = (k1 - 1.0) / span  # k(s) = 1 + slope·(s − s1) above s1
        if abs(slope) < 1e-12:
            return flat + x
        return flat + np.log1p(slope * x) / slope

    fill = 1.0 - s0
    n_full = np.floor(e / cap / fill + 1e-12)
    rest = np.maximum(e / cap - n_full * fill, 0.0)
    t = n_full * (to(1.0) - to(s0)) + to(np.minimum(s0 + rest, 1.0)) - to(s0)
    return restore(cap / rate * t)


def enroute_stops(deficit_energy, capacity, arrival_soc=0.0):
    """Charging stops needed for a deficit, each from ``arrival_soc`` to at most full. [-]

    Examples
    --------
    >>> enroute_stops(np.array([0.0, 1.0, 9.0, 10.0]), 10.0, 0.1)
    array([0., 1., 1., 2.])
    """
    e = np.maximum(np.asarray(deficit_energy, dtype=float), 0.0)
    fill = float(capacity) * (1.0 - float(arrival_soc))
    return np.maximum(np.ceil(e / fill - 1e-12), 0.0) + 0.0


def driver_time_beyond_breaks(charging_time, stops, overhead, driving_time, break_after,
                              break_duration):
    """Driver time lost to en-route charging beyond the breaks the driver must take anyway.

    .. math:: t_{lost} = n\\,t_{overhead} + \\max(0,\\ t_{charge} - b\\,t_{break}),
       \\qquad b = \\lfloor t_{driving} / t_{after} \\rfloor

    Charging overlaps the required breaks (the truck charges while the driver rests);
    the overhead of each stop (detour, plugging in) is always lost.

    Parameters
    ----------
    charging_time : float or array
        Time charging in the day. [s]
    stops : float or array
        Charging stops in the day. [-]
    overhead : float
        Time lost per stop besides charging. [s]
    driving_time : float
        Driving time of the day. [s]
    break_after : float
        Driving time after which a break is required; ``inf`` for no rule. [s]
    break_duration : float
        Length of a required break. [s]

    Returns
    -------
    float or array
        Driver time lost. [s]

    Examples
    --------
    >>> # 9 h driving, a 45 min break after every 4.5 h: 2 breaks cover 90 min of charging
    >>> float(driver_time_beyond_breaks(6000.0, 1, 600.0, 9 * 3600.0, 4.5 * 3600.0, 2700.0))
    1200.0
    """
    breaks = np.floor(float(driving_time) / float(break_after) + 1e-12) \
        if np.isfinite(break_after) and break_after > 0 else 0.0
    covered = breaks * float(break_duration)
    return (np.asarray(stops, dtype=float) * float(overhead)
            + np.maximum(np.asarray(charging_time, dtype=float) - covered, 0.0))
