"""Diesel powertrain: engine power, fuel and diesel exhaust fluid over a trace.

The engine supplies the wheel power through the driveline plus the accessories::

    P_engine = P_wheel / eta_driveline + P_accessory          (P_wheel > 0)

capped at the rated power. When the wheels need no power and the truck moves, the
injection is cut (fuel cut-off on overrun); when it stands still the engine idles at a
measured volume rate. Fuel follows the Willans line::

    fuel power     = (P_engine + P_loss) / eta_marginal
    fuel mass rate = fuel power / LHV

where ``P_loss`` is the friction and pumping loss power (a fraction of rated power) and
``eta_marginal`` the marginal (indicated) efficiency. A constant brake-specific fuel
consumption is the special case ``P_loss = 0`` with ``eta_marginal = 1 / (BSFC · LHV)``:
:meth:`DieselPowertrain.from_bsfc` builds it, so one code path serves both models.

Units: BSFC is kept in kg/J inside. 1 g/kWh = 1e-3 kg / J_PER_KWH (tco.units) = 2.7778e-10 kg/J;
multiply a figure in g/kWh by :data:`G_PER_KWH` to get kg/J.

This module is the readable reference; :mod:`tco.kernel` compiles the same private
formulas (``_engine_demand``, ``_willans_fuel_rate``) into its fused loop.
"""
from __future__ import annotations

import math

from typing import NamedTuple

import numpy as np

from tco import roadload
from tco.units import J_PER_KWH, M3_PER_US_GALLON
from tco.roadload import _check_nonnegative, _check_positive, _inputs

__all__ = [
    "DEF_RATIO",
    "DIESEL_DENSITY",
    "DIESEL_LHV",
    "G_PER_KWH",
    "IDLE_FUEL_RATE_32000LB",
    "IDLE_FUEL_RATE_LOADED",
    "DieselPowertrain",
    "bsfc_from_efficiency",
    "def_volume",
    "efficiency_from_bsfc",
    "engine_power",
    "fuel_rate",
    "fuel_rate_bsfc",
    "fuel_rate_willans",
    "fuel_use",
]

_US_GALLON = M3_PER_US_GALLON  # [m³], exact by definition
_HOUR = 3600.0  # [s]

#: Density of road diesel (EN 590 type). [kg/m³] JEC Well-to-Tank report v5 (JRC, 2020),
#: "Standard properties of fuels": 0.832 kg/L.
DIESEL_DENSITY = 832.0
#: Lower heating value of road diesel. [J/kg] JEC Well-to-Tank report v5 (JRC, 2020):
#: 43.1 MJ/kg.
DIESEL_LHV = 43.1e6
#: Idle fuel rate of a loaded (80,000 lb) tractor-semitrailer, 0.64 US gal/h. [m³/s]
#: US DOE Vehicle Technologies Office, Fact of the Week #861 (2015).
IDLE_FUEL_RATE_LOADED = 0.64 * _US_GALLON / _HOUR
#: Idle fuel rate of a 32,000 lb combination truck, 0.49 US gal/h. [m³/s]
#: US DOE Vehicle Technologies Office, Fact of the Week #861 (2015).
IDLE_FUEL_RATE_32000LB = 0.49 * _US_GALLON / _HOUR
#: Diesel exhaust fluid use as a fraction of diesel volume (trade range 2–4 %). [-]
#: Common practice (trade articles).
DEF_RATIO = 0.02
#: One g/kWh in kg/J. [kg/J per g/kWh]
G_PER_KWH = 1e-3 / J_PER_KWH


class DieselPowertrain(NamedTuple):
    """Parameters of a diesel powertrain (all SI).

    Attributes
    ----------
    rated_power : float
        Rated engine power; demand above it is capped. [W]
    driveline_efficiency : float
        Efficiency from engine output to wheel, in (0, 1] (about 0.8 at highway load,
        common practice). [-]
    marginal_efficiency : float
        Slope of the Willans line: extra engine power per extra fuel power, in (0, 1].
        For a constant BSFC it is the brake efficiency 1 / (BSFC · LHV). [-]
    loss_fraction : float
        Friction and pumping loss power of the Willans line as a fraction of rated
        power (0 gives a constant BSFC). [-]
    accessory_power : float
        Power the engine drives for accessories (fans, compressor, alternator). [W]
    lhv : float
        Lower heating value of the fuel. [J/kg]
    density : float
        Fuel density. [kg/m³]
    idle_fuel_rate : float
        Fuel volume rate while the truck stands still. [m³/s]
    def_ratio : float
        Diesel exhaust fluid volume per diesel volume. [-]
    stop_speed : float
        Mean interval speed below which the truck counts as standing (idling). [m/s]
    """

    rated_power: float
    driveline_efficiency: float
    marginal_efficiency: float
    loss_fraction: float = 0.0
    accessory_power: float = 0.0
    lhv: float = DIESEL_LHV
    density: float = DIESEL_DENSITY
    idle_fuel_rate: float = IDLE_FUEL_RATE_LOADED
    def_ratio: float = DEF_RATIO
    stop_speed: float = 0.1

    @classmethod
    def from_bsfc(cls, rated_power, driveline_efficiency, bsfc, **kwargs) -> DieselPowertrain:
        """A powertrain with a constant brake-specific fuel consumption.

        Parameters
        ----------
        rated_power : float
            Rated engine power. [W]
        driveline_efficiency : float
            Engine-to-wheel efficiency. [-]
        bsfc : float
            Brake-specific fuel consumption. [kg/J] (g/kWh × :data:`G_PER_KWH`)
        **kwargs
            Other fields (``lhv``, ``accessory_power``...). ``loss_fraction`` is 0.

        Returns
        -------
        DieselPowertrain
            With ``marginal_efficiency = 1 / (bsfc · lhv)`` and no loss power.
        """
        if "loss_fraction" in kwargs:
            raise ValueError("a constant-BSFC engine has no separate loss power")
        lhv = kwargs.get("lhv", DIESEL_LHV)
        _check_positive("bsfc", bsfc)
        return cls(rated_power, driveline_efficiency, float(efficiency_from_bsfc(bsfc, lhv)),
                   **kwargs)

    @property
    def loss_power(self) -> float:
        """Friction and pumping loss power of the Willans line. [W]"""
        return self.loss_fraction * self.rated_power

    @property
    def rated_wheel_power(self) -> float:
        """Wheel power at rated engine power, after accessories and driveline. [W]"""
        return (self.rated_power - self.accessory_power) * self.driveline_efficiency

    def checked(self) -> DieselPowertrain:
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
                raise ValueError(f"diesel {name} must be a number, got {value!r}") from None
            if not np.isfinite(value):
                raise ValueError(f"diesel {name} must be finite, got {value}")
            vals[name] = value
        for name in ("driveline_efficiency", "marginal_efficiency"):
            if not 0.0 < vals[name] <= 1.0:
                raise ValueError(f"diesel {name} must be in (0, 1], got {vals[name]}")
        for name in ("rated_power", "lhv", "density"):
            if vals[name] <= 0:
                raise ValueError(f"diesel {name} must be > 0, got {vals[name]}")
        for name in ("loss_fraction", "accessory_power", "idle_fuel_rate", "def_ratio",
                     "stop_speed"):
            if vals[name] < 0:
                raise ValueError(f"diesel {name} must be >= 0, got {vals[name]}")
        if vals["accessory_power"] >= vals["rated_power"]:
            raise ValueError("diesel accessory_power must be below rated_power")
        return DieselPowertrain(**vals)


# ----------------------------------------------------------------------------- shared formulas
# Plain arithmetic, elementwise on arrays here and on scalars in tco.kernel (numba).
def _engine_demand(wheel_power, driveline_efficiency, accessory_power):
    """Engine power asked for by a positive wheel power, before the rated cap [W]."""
    return wheel_power / driveline_efficiency + accessory_power


def _willans_fuel_rate(engine_power, loss_power, marginal_efficiency, lhv):
    """Fuel mass rate of the Willans line [kg/s]."""
    return (engine_power + loss_power) / (marginal_efficiency * lhv)


# ----------------------------------------------------------------------------- public functions
def _check_efficiency(name, value):
    value = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(value)) or np.any(value <= 0) or np.any(value > 1):
        raise ValueError(f"{name} must be in (0, 1]")


def bsfc_from_efficiency(efficiency, lhv=DIESEL_LHV):
    """Brake-specific fuel consumption of an engine of given brake efficiency.

    .. math:: \\mathrm{BSFC} = 1 / (\\eta \\cdot \\mathrm{LHV})

    Parameters
    ----------
    efficiency : float, array or Series
        Brake thermal efficiency, in (0, 1]. [-]
    lhv : float
        Lower heating value of the fuel. [J/kg]

    Returns
    -------
    float, array or Series
        BSFC. [kg/J] Divide by :data:`G_PER_KWH` for g/kWh:
        BSFC [g/kWh] = 3600 / (efficiency × LHV [MJ/kg]).

    Examples
    --------
    >>> round(bsfc_from_efficiency(0.5, 43.0e6) / G_PER_KWH, 1)
    167.4

    References
    ----------
    .. [1] National Research Council, "Review of the 21st Century Truck Partnership,
       Second Report", National Academies Press, 2012, Finding 8-2 (50 % brake thermal
       efficiency target on a demonstration vehicle).
    """
    (eta,), restore = _inputs(efficiency)
    _check_efficiency("efficiency", eta)
    _check_positive("lhv", lhv)
    return restore(1.0 / (eta * float(lhv)))


def efficiency_from_bsfc(bsfc, lhv=DIESEL_LHV):
    """Brake efficiency of an engine of given BSFC, the inverse of :func:`bsfc_from_efficiency`.

    .. math:: \\eta = 1 / (\\mathrm{BSFC} \\cdot \\mathrm{LHV})

    Parameters
    ----------
    bsfc : float, array or Series
        Brake-specific fuel consumption. [kg/J]
    lhv : float
        Lower heating value. [J/kg]

    Returns
    -------
    float, array or Series
        Brake efficiency. [-]

    Raises
    ------
    ValueError
        When the BSFC is not > 0 or implies an efficiency above 1.

    Examples
    --------
    >>> round(efficiency_from_bsfc(200 * G_PER_KWH, 43.0e6), 4)
    0.4186
    """
    (b,), restore = _inputs(bsfc)
    _check_positive("bsfc", b)
    _check_positive("lhv", lhv)
    eta = 1.0 / (b * float(lhv))
    if np.any(eta > 1.0):
        raise ValueError("bsfc is below the energy content of the fuel (efficiency above 1)")
    return restore(eta)


def engine_power(wheel_power, driveline_efficiency, accessory_power=0.0, rated_power=np.inf):
    """Engine output power for a wheel power, capped at rated power.

    .. math:: P_{eng} = \\min(P_{wheel}/\\eta_{dl} + P_{acc},\\ P_{rated})
              \\ \\text{if}\\ P_{wheel} > 0, \\quad 0 \\ \\text{otherwise}

    Parameters
    ----------
    wheel_power : float, array or Series
        Power at the wheels. [W]
    driveline_efficiency : float
        Engine-to-wheel efficiency, in (0, 1]. [-]
    accessory_power : float
        Accessory power driven by the engine. [W]
    rated_power : float
        Rated engine power. [W]

    Returns
    -------
    float, array or Series
        Engine power while fuelled. [W] Zero when the wheels need no power (overrun,
        fuel cut off: the engine is driven by the vehicle and burns nothing).

    Examples
    --------
    >>> engine_power([100e3, -5e3, 500e3], 0.8, 5e3, 350e3).tolist()
    [130000.0, 0.0, 350000.0]
    """
    (p,), restore = _inputs(wheel_power)
    _check_efficiency("driveline_efficiency", driveline_efficiency)
    _check_nonnegative("accessory_power", accessory_power)
    demand = _engine_demand(p, float(driveline_efficiency), float(accessory_power))
    return restore(np.where(p > 0, np.minimum(demand, float(rated_power)), 0.0))


def fuel_rate_bsfc(engine_power, bsfc):
    """Fuel mass rate at a constant brake-specific fuel consumption.

    .. math:: \\dot m = \\mathrm{BSFC} \\cdot P_{eng}

    Parameters
    ----------
    engine_power : float, array or Series
        Engine output power, ≥ 0. [W]
    bsfc : float
        Brake-specific fuel consumption. [kg/J]

    Returns
    -------
    float, array or Series
        Fuel mass rate. [kg/s]

    Examples
    --------
    >>> round(fuel_rate_bsfc(300e3, 190 * G_PER_KWH) * 3600, 3)
    57.0
    """
    (p,), restore = _inputs(engine_power)
    _check_nonnegative("engine_power", p)
    _check_positive("bsfc", bsfc)
    return restore(float(bsfc) * p)


def fuel_rate_willans(engine_power, marginal_efficiency, loss_power=0.0, lhv=DIESEL_LHV):
    """Fuel mass rate of the Willans line.

    .. math:: \\dot m = (P_{eng} + P_{loss}) / (\\eta_{marginal} \\cdot \\mathrm{LHV})

    Parameters
    ----------
    engine_power : float, array or Series
        Engine output power, ≥ 0. [W]
    marginal_efficiency : float
        Marginal (indicated) efficiency, the slope of the Willans line, in (0, 1]. [-]
    loss_power : float
        Friction and pumping loss power. [W]
    lhv : float
        Lower heating value of the fuel. [J/kg]

    Returns
    -------
    float, array or Series
        Fuel mass rate. [kg/s]

    Notes
    -----
    A straight line in power: valid over the fuelled operating range of one engine
    speed band; part-load efficiency falls as the loss power weighs more.

    Examples
    --------
    >>> round(fuel_rate_willans(200e3, 0.5, 20e3, 44e6), 6)
    0.01

    References
    ----------
    .. [1] Guzzella, L. and Sciarretta, A., "Vehicle Propulsion Systems", 3rd ed.,
       Springer, 2013, Willans approximation of engine efficiency (cited from memory).
    """
    (p,), restore = _inputs(engine_power)
    _check_nonnegative("engine_power", p)
    _check_efficiency("marginal_efficiency", marginal_efficiency)
    _check_nonnegative("loss_power", loss_power)
    _check_positive("lhv", lhv)
    return restore(_willans_fuel_rate(p, float(loss_power), float(marginal_efficiency),
                                      float(lhv)))


def def_volume(diesel_volume, def_ratio=DEF_RATIO):
    """Diesel exhaust fluid used alongside a volume of diesel.

    .. math:: V_{DEF} = r \\cdot V_{diesel}

    Parameters
    ----------
    diesel_volume : float, array or Series
        Diesel volume burnt. [m³]
    def_ratio : float
        DEF volume per diesel volume; about 0.02 (trade range 0.02–0.04). [-]

    Returns
    -------
    float, array or Series
        DEF volume. [m³]

    Examples
    --------
    >>> def_volume(1.0)
    0.02

    References
    ----------
    .. [1] Common practice (trade articles): DEF use about 2 % of diesel volume.
    """
    if type(diesel_volume) is float and type(def_ratio) is float:
        # one number (a trace's totals): the same checks and product without arrays
        for name, x in (("diesel_volume", diesel_volume), ("def_ratio", def_ratio)):
            if not (math.isfinite(x) and x >= 0):
                raise ValueError(f"{name} must be finite and >= 0")
        return def_ratio * diesel_volume
    (v,), restore = _inputs(diesel_volume)
    _check_nonnegative("diesel_volume", v)
    _check_nonnegative("def_ratio", def_ratio)
    return restore(float(def_ratio) * v)


def fuel_rate(wheel_power, mean_speed, diesel):
    """Fuel volume rate and engine power over the intervals of a trace.

    Parameters
    ----------
    wheel_power : array or Series
        Wheel power of each interval. [W]
    mean_speed : array or Series
        Mean speed of each interval. [m/s]
    diesel : DieselPowertrain
        Powertrain parameters.

    Returns
    -------
    volume_rate : array or Series
        Fuel volume rate. [m³/s] The idle rate when standing, zero on overrun.
    engine_power : array or Series
        Engine output power where fuelled by the Willans line, else 0. [W]
    limited : array of bool
        Where the engine demand exceeds rated power (the trace is not followed), tested
        as wheel power above :attr:`DieselPowertrain.rated_wheel_power` (the same in
        exact arithmetic, and the test the compiled kernel makes).

    Examples
    --------
    >>> d = DieselPowertrain(350e3, 0.85, 0.45, 0.05)
    >>> rate, p_eng, lim = fuel_rate([100e3, -1e3, 0.0], [20.0, 20.0, 0.0], d)
    >>> float(rate[1]), bool(lim.any())
    (0.0, False)
    """
    d = DieselPowertrain(*diesel).checked()
    (p, vm), restore = _inputs(wheel_power, mean_speed)
    mass_rate, p_eng, stopped, limited = _fuel_intervals(p, vm, d)
    volume_rate = mass_rate / d.density + np.where(stopped, d.idle_fuel_rate, 0.0)
    return restore(volume_rate), restore(p_eng), limited


def _fuel_intervals(p, vm, d):
    """Willans fuel mass rate [kg/s] while moving, engine power [W], standing and
    power-limited masks of each interval."""
    stopped = vm < d.stop_speed
    demand = _engine_demand(p, d.driveline_efficiency, d.accessory_power)
    fuelled = (p > 0.0) & ~stopped
    p_eng = np.where(fuelled, np.minimum(demand, d.rated_power), 0.0)
    mass_rate = np.where(
        fuelled, _willans_fuel_rate(p_eng, d.loss_power, d.marginal_efficiency, d.lhv), 0.0)
    return mass_rate, p_eng, stopped, np.asarray(p > d.rated_wheel_power)


#: Keys of :func:`fuel_use`: energy [J], mass [kg], volumes [m³], times [s], distance [m],
#: speeds [m/s].
DIESEL_KEYS = (
    "diesel_engine_energy", "diesel_fuel_mass", "diesel_fuel_volume",
    "diesel_idle_fuel_volume", "diesel_def_volume", "diesel_idle_time",
    "diesel_limited_time", "diesel_limited_distance",
    "diesel_speed_deficit_max", "diesel_speed_deficit_mean",
)


def fuel_use(speed, grade, dt, mass, vehicle, diesel, leg_starts=None):
    """Fuel, DEF and power-limit figures of a diesel truck driving a trace.

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
    diesel : DieselPowertrain
        Powertrain parameters.
    leg_starts : array of int, optional
        Sample index where each leg starts.

    Returns
    -------
    dict of float
        ``diesel_engine_energy`` [J] (engine output while fuelled), ``diesel_fuel_mass``
        [kg], ``diesel_fuel_volume`` [m³] (idle included), ``diesel_idle_fuel_volume``
        [m³], ``diesel_def_volume`` [m³], ``diesel_idle_time`` [s], and for intervals
        where demand exceeds rated power: ``diesel_limited_time`` [s],
        ``diesel_limited_distance`` [m], ``diesel_speed_deficit_max`` and
        ``diesel_speed_deficit_mean`` [m/s].

    Notes
    -----
    The speed deficit of a limited interval is its mean trace speed minus the steady
    speed that rated wheel power holds on its grade (:func:`tco.roadload.steady_speed`),
    floored at 0: a limit met while accelerating on the flat costs acceleration, not
    top speed. The mean is over limited intervals. The fuel of a limited interval is the
    fuel at rated power; the trace is not re-timed.
    """
    d = DieselPowertrain(*diesel).checked()
    veh = roadload.Vehicle(*vehicle).checked()
    p = np.asarray(roadload.wheel_power(speed, grade, dt, mass, veh, leg_starts), dtype=float)
    vm, _, dist, s = (np.asarray(x) for x in roadload.trace_intervals(
        np.asarray(speed, dtype=float), np.asarray(grade, dtype=float), dt))
    m = roadload.interval_mass(vm.size + 1, mass, leg_starts)
    dt = float(dt)
    mass_rate, p_eng, stopped, limited = _fuel_intervals(p, vm, d)
    fuel_mass_moving = float(mass_rate.sum() * dt)
    idle_time = float(stopped.sum() * dt)
    idle_volume = idle_time * d.idle_fuel_rate
    fuel_volume = fuel_mass_moving / d.density + idle_volume
    if limited.any():
        v_ss = roadload.steady_speed(d.rated_wheel_power, s[limited], m[limited], veh)
        deficit = np.maximum(vm[limited] - v_ss, 0.0)
        deficit_max, deficit_mean = float(deficit.max()), float(deficit.mean())
    else:
        deficit_max = deficit_mean = 0.0
    return {
        "diesel_engine_energy": float(p_eng.sum() * dt),
        "diesel_fuel_mass": fuel_mass_moving + idle_volume * d.density,
        "diesel_fuel_volume": fuel_volume,
        "diesel_idle_fuel_volume": idle_volume,
        "diesel_def_volume": float(def_volume(fuel_volume, d.def_ratio)),
        "diesel_idle_time": idle_time,
        "diesel_limited_time": float(limited.sum() * dt),
        "diesel_limited_distance": float(dist[limited].sum()),
        "diesel_speed_deficit_max": deficit_max,
        "diesel_speed_deficit_mean": deficit_mean,
    }
