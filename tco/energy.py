"""Energy of each truck on the operating day, its feasibility, and its year of operation.

Glue between the scenario and the physics: it maps a truck's validated parameters onto the
kernel's parameter sets (:class:`tco.roadload.Vehicle`,
:class:`tco.diesel.DieselPowertrain`, :class:`tco.electric.ElectricPowertrain`), drives
one operating day (the trip repeated ``ceil(trips_per_day)`` times, so the battery is
tracked across the whole day), and turns the result into per-trip figures, feasibility
findings (numbers and codes; :mod:`tco.report.findings` writes the sentences) and an
:class:`tco.operation.AnnualOperation`.

Simplifications (stated in the report's method notes):

* Air density is taken once per route, at the trip's mean elevation and the ambient
  temperature (1976 standard atmosphere pressure).
* Each leg's payload is capped at the truck's legal payload capacity; the payload left
  behind is moved by extra trips, whose energy scales with the trip's.
* The depot charges each night from the charging window's start at the charger's power;
  :func:`tco.pipeline.evaluate` then replaces the charging hours and the power billed by
  the depot's schedule under the scenario's charging rule (:mod:`tco.depot`).
"""
from __future__ import annotations

import math

import numpy as np
import pandas as pd

from tco import dutycycle, electric, kernel, operation, powerlimit, roadload
from tco.diesel import DieselPowertrain
from tco.electric import ElectricPowertrain
from tco.operation import AnnualOperation
from tco.result import TruckResult


def vehicle_parameters(truck, ambient, mean_elevation: float) -> roadload.Vehicle:
    """Road-load parameters of a truck in the scenario's air. [SI]"""
    b = truck.body
    rho = float(roadload.air_density(mean_elevation, ambient.temperature))
    k_t = getattr(b, "rolling_resistance_temperature", 0.0)
    cold = float(roadload.rolling_resistance_at(1.0, ambient.temperature, k_t))
    return roadload.Vehicle(
        drag_coefficient=b.drag_coefficient, frontal_area=b.frontal_area,
        crr=b.rolling_resistance * cold, crr_speed=b.rolling_resistance_speed * cold,
        rotating_mass_factor=b.rotating_mass_factor, air_density=rho,
        **wind_parameters(ambient),
    ).checked()


def wind_parameters(ambient) -> dict:
    """The kernel's wind fields from the ambient section: ``headwind`` (on every leg) or
    ``wind_averaged`` (direction averaged over all directions). [m/s]"""
    if getattr(ambient, "wind_treatment", "headwind") == "headwind":
        return {"headwind": ambient.headwind, "wind_averaged": 0.0}
    return {"headwind": 0.0, "wind_averaged": abs(ambient.headwind)}


def diesel_parameters(d) -> DieselPowertrain:
    """Kernel parameters of a scenario diesel section. [SI]"""
    common = dict(accessory_power=d.accessory_power, lhv=d.fuel_lhv,
                  density=d.fuel_density, idle_fuel_rate=d.idle_fuel_rate,
                  def_ratio=d.def_ratio)
    if d.fuel_model == "constant_bsfc":
        return DieselPowertrain.from_bsfc(d.engine_power, d.driveline_efficiency, d.bsfc,
                                          **common)
    return DieselPowertrain(d.engine_power, d.driveline_efficiency, d.willans_efficiency,
                            d.willans_loss_share, **common)


def electric_parameters(e, temperature: float, state_of_health: float = 1.0
                        ) -> ElectricPowertrain:
    """Kernel parameters of a scenario electric section at a battery state of health. [SI]"""
    aux = float(electric.auxiliary_power(temperature, e.aux_power, e.heating_per_kelvin,
                                         e.cooling_per_kelvin, e.comfort_low,
                                         e.comfort_high))
    aux += float(electric.battery_heating_power(temperature, e.battery_heat_below,
                                                e.battery_heat_loss))
    regen_share = float(electric.regen_cold_share(temperature, e.regen_full_above,
                                                  e.regen_share_cold))
    return ElectricPowertrain(
        usable_capacity=e.battery_capacity * e.usable_share * state_of_health,
        motor_power=e.motor_power, drivetrain_efficiency=e.drivetrain_efficiency,
        regen_efficiency=e.regen_efficiency, regen_power_max=e.regen_power * regen_share,
        aux_power=aux, initial_soc=e.start_soc,
    ).checked()


# Neutral parameters for the powertrain a truck does not have (the fused kernel computes
# both; the unused one is ignored).
NO_DIESEL = DieselPowertrain(1e9, 1.0, 0.5)
NO_ELECTRIC = ElectricPowertrain(1e12, 1e9, 1.0, 1.0, 0.0)
#: Speed deficit on grades below which a power limit is not reported as a warning
#: (1 km/h) [m/s].
SPEED_DEFICIT_SHOWN = 1000.0 / 3600.0


def operating_day(trip: pd.DataFrame, trips_per_day: float) -> tuple[pd.DataFrame, int]:
    """The trip repeated ``ceil(trips_per_day)`` times: the heaviest operating day."""
    n = max(1, math.ceil(trips_per_day - 1e-9))
    if n == 1:
        return trip, 1
    return dutycycle.concatenate_legs([trip] * n), n


def leg_payloads(scenario, truck) -> tuple[np.ndarray, np.ndarray, float]:
    """Requested and carried payload per leg, and the truck's payload capacity. [kg]"""
    b = truck.body
    allowance = b.zero_emission_allowance if truck.powertrain == "electric" else 0.0
    capacity = float(operation.payload_capacity(b.curb_mass, b.gross_mass_limit, allowance))
    requested = np.array([leg.payload for leg in scenario.route.legs], dtype=float)
    return requested, np.minimum(requested, capacity), capacity


def simulate(truck, scenario, trip: pd.DataFrame) -> TruckResult:
    """Drive one operating day with one truck and report energy and feasibility.

    Parameters
    ----------
    truck : tco.scenario.Truck
        The truck.
    scenario : tco.scenario.Scenario
        The whole scenario (route, ambient, depot).
    trip : pandas.DataFrame
        One trip's trace (see :mod:`tco.dutycycle`).

    Returns
    -------
    TruckResult
        Its ``feasibility`` holds findings as SI numbers with a ``code`` and a ``warn``
        flag (payload, power, battery new / end of life, depot charger, battery by year);
        the sentences a reader sees are written by :mod:`tco.report.findings` in the
        study's units. ``warnings`` is left empty for the caller to fill.
    """
    route, ambient = scenario.route, scenario.ambient
    n_legs = len(route.legs)
    requested, carried, capacity = leg_payloads(scenario, truck)
    veh = vehicle_parameters(truck, ambient, float(trip["elevation"].mean()))
    is_e = truck.powertrain == "electric"
    die = diesel_parameters(truck.diesel) if not is_e else NO_DIESEL
    ele = electric_parameters(truck.electric, ambient.temperature) if is_e else NO_ELECTRIC
    slowed = {"time_added": 0.0, "slowed_distance": 0.0, "speed_deficit_max": 0.0}
    if getattr(route, "slow_when_power_limited", True):
        trip_legs = dutycycle.leg_starts(trip)
        trip_mass = truck.body.curb_mass + np.resize(carried, len(trip_legs))
        limit = ele.motor_power if is_e else die.rated_wheel_power
        trip, slowed = powerlimit.slow_trace(trip, trip_mass, veh, limit, route.max_accel)
    day, n_trips = operating_day(trip, route.trips_per_day)
    starts = dutycycle.leg_starts(day)
    leg_mass = truck.body.curb_mass + np.tile(carried, n_trips)[: len(starts)]
    speed = day["speed"].to_numpy(dtype=float)
    grade = day["grade"].to_numpy(dtype=float)
    run = kernel.run_trace(speed, grade, route.time_step, starts, leg_mass, veh, die, ele,
                           series=True)
    parked = (day["parked"].to_numpy(dtype=bool)[1:] if "parked" in day.columns
              else np.zeros(speed.size - 1, dtype=bool))
    tot, ser, soc = engine_off_when_parked(run.totals, run.series, run.soc, speed, parked,
                                           route.time_step, route.parked_idle_share,
                                           die, ele)

    out = day[["time", "speed", "grade", "elevation", "distance", "leg"]].copy()
    out["leg"] = out["leg"] % n_legs
    out["trip"] = np.repeat(np.arange(n_trips), len(trip))[: len(out)] if n_trips > 1 else 0
    out["wheel_power"] = _pad(ser.wheel_power)
    if is_e:
        out["battery_power"] = _pad(ser.battery_power)
        out["soc"] = soc
    else:
        out["fuel_rate"] = _pad(ser.fuel_rate)

    # per-trip payload-distance (requested and carried) from leg distances of one trip
    trip_leg_dist = _leg_distances(trip, n_legs)
    req_pd = float(np.dot(requested, trip_leg_dist))
    car_pd = float(np.dot(carried, trip_leg_dist))
    trip_distance = float(trip_leg_dist.sum())
    trip_duration = float(trip["time"].iloc[-1] - trip["time"].iloc[0]) + route.time_step

    summary = {
        "trips_simulated": n_trips,
        "trip_distance": trip_distance,
        "trip_duration": trip_duration,
        "power_limit_slowing": slowed,
        "day_driving_time": float(np.count_nonzero(
            0.5 * (speed[1:] + speed[:-1]) >= die.stop_speed)) * route.time_step,
        "day_distance": tot["distance"],
        "day_duration": tot["duration"],
        "payload_capacity": capacity,
        "payload_requested": requested.tolist(),
        "payload_carried": carried.tolist(),
        "air_density": veh.air_density,
        "wheel_energy": {k.removesuffix("_energy"): tot[k] / n_trips for k in (
            "aerodynamic_energy", "rolling_energy", "climbing_energy", "descending_energy",
            "acceleration_energy", "deceleration_energy", "traction_energy",
            "braking_energy")},
    }
    warnings: list[str] = []
    feas: dict = {}
    annual_days = route.days_per_year
    base_trips = route.trips_per_day * annual_days
    x_trips = operation.extra_trips(base_trips, req_pd, car_pd)
    trips = base_trips + x_trips
    if car_pd < req_pd:
        lost = float(np.max(requested - carried))
        feas["payload"] = {
            "ok": False, "code": "left_behind", "warn": True, "capacity": capacity,
            "lost_per_trip": lost, "extra_trips_per_year": x_trips}
    else:
        feas["payload"] = {"ok": True, "code": "fits", "warn": False, "capacity": capacity,
                           "lost_per_trip": 0.0, "extra_trips_per_year": 0.0}

    if is_e:
        op_fields = _electric_day(truck, scenario, tot, n_trips, summary, feas, ele)
        per_trip = {k: v / n_trips for k, v in op_fields["day"].items()}
        aged = _ageing(truck, scenario, tot, n_trips, trips, op_fields, feas, summary)
        op = AnnualOperation(
            truck=truck.name, powertrain="electric", operating_days=annual_days,
            trips=trips, extra_trips=x_trips, distance=trips * trip_distance,
            payload_distance=trips * car_pd,
            battery_energy=trips * per_trip["battery"],
            grid_energy_depot=trips * per_trip["grid_depot"],
            grid_energy_public=trips * per_trip["grid_public"],
            charging_time_lost=trips * per_trip["time_lost"],
            depot_charging_power=op_fields["depot_power"],
            charging_profile=op_fields["profile"], trip_duration=trip_duration,
            battery_capacity=truck.electric.battery_capacity,
            battery_cycle_life=truck.electric.cycle_life,
            payload_per_trip=car_pd / trip_distance if trip_distance > 0 else 0.0,
            battery_discharge_energy=trips * tot["electric_battery_energy_out"] / n_trips,
            calendar_fade=truck.electric.calendar_fade,
            eol_state_of_health=truck.electric.eol_state_of_health,
            **aged,
        )
    else:
        fuel_trip = tot["diesel_fuel_volume"] / n_trips
        def_trip = tot["diesel_def_volume"] / n_trips
        summary.update({
            "fuel_volume": fuel_trip, "def_volume": def_trip,
            "idle_fuel_volume": tot["diesel_idle_fuel_volume"] / n_trips,
            "engine_energy": tot["diesel_engine_energy"] / n_trips,
            "fuel_per_distance": fuel_trip / trip_distance,
        })
        feas["power"] = _power_limit(tot, "diesel", "engine", slowed)
        op = AnnualOperation(
            truck=truck.name, powertrain="diesel", operating_days=annual_days, trips=trips,
            extra_trips=x_trips, distance=trips * trip_distance,
            payload_distance=trips * car_pd, diesel_volume=trips * fuel_trip,
            def_volume=trips * def_trip, trip_duration=trip_duration,
            payload_per_trip=car_pd / trip_distance if trip_distance > 0 else 0.0,
        )
    summary["wheel_energy_per_distance"] = {
        k: v / trip_distance for k, v in summary["wheel_energy"].items()}
    return TruckResult(truck.name, truck.powertrain, out, summary, feas, warnings, op)


def engine_off_when_parked(totals: dict, series, soc: np.ndarray, speed: np.ndarray,
                           parked: np.ndarray, dt: float, idle_share: float, diesel: DieselPowertrain,
                           electric_pt: ElectricPowertrain):
    r"""Switch the truck off during parked dwells (loading, unloading) of a kernel run.

    The kernel idles the diesel engine and runs the electric truck's auxiliaries through
    every standing interval. Traffic stops are like that; a parked truck is switched off.
    For the parked intervals that are standing (mean speed below the diesel's stop speed)
    a share ``1 − idle_share`` of the idle fuel and of the auxiliary power is removed:

    .. math:: V_{idle} \leftarrow V_{idle} - (1-s)\,n_p\,\Delta t\,\dot V_{idle},
       \qquad P_b \leftarrow P_b - (1-s)\,P_{aux} \text{ on parked intervals}

    and the battery's energy track is recomputed from the corrected battery power with
    :func:`tco.electric.battery_energy_track` (the same full-battery rule as the kernel).

    Parameters
    ----------
    totals : dict
        Kernel totals (:data:`tco.kernel.TOTAL_KEYS`). [SI]
    series : tco.kernel.TraceSeries
        Kernel series of the same run.
    soc : ndarray
        State of charge at each sample. [-]
    speed : ndarray
        Speed at each sample of the run. [m/s]
    parked : ndarray of bool
        One per interval: the interval ends in a parked sample. [-]
    dt : float
        Time step. [s]
    idle_share : float
        Share of the parked time with the engine (or the auxiliaries) left running, e.g.
        for cab heating or cooling in a cold or hot climate. [-]
    diesel, electric_pt : DieselPowertrain, ElectricPowertrain
        Parameters of the run.

    Returns
    -------
    totals, series, soc
        Corrected copies (the inputs are not changed).
    """
    tot = dict(totals)
    if idle_share >= 1.0 or not parked.any():
        return tot, series, soc
    off = 1.0 - float(idle_share)
    vm = 0.5 * (speed[1:] + speed[:-1])
    standing = parked & (vm < diesel.stop_speed)
    n_off = float(np.count_nonzero(standing))
    # diesel: idle fuel during the parked time
    saved_time = off * n_off * dt
    saved_volume = saved_time * diesel.idle_fuel_rate
    fuel_volume = tot["diesel_fuel_volume"] - saved_volume
    tot["diesel_idle_time"] -= saved_time
    tot["diesel_idle_fuel_volume"] -= saved_volume
    tot["diesel_fuel_volume"] = fuel_volume
    tot["diesel_fuel_mass"] -= saved_volume * diesel.density
    tot["diesel_def_volume"] = float(
        tot["diesel_def_volume"] * fuel_volume / (fuel_volume + saved_volume)
        if fuel_volume + saved_volume > 0 else 0.0)
    fuel_rate = series.fuel_rate.copy()
    fuel_rate[standing] -= off * diesel.idle_fuel_rate
    # electric: auxiliaries during the parked time, battery track recomputed
    pb = series.battery_power.copy()
    pb[standing] -= off * electric_pt.aux_power
    cap = electric_pt.usable_capacity
    energy, refused_full = electric.battery_energy_track(
        pb, dt, electric_pt.initial_soc * cap, cap)
    new_soc = energy / cap
    out = float(np.maximum(pb, 0.0).sum() * dt)
    regenerated = float(np.maximum(-pb, 0.0).sum() * dt) - refused_full
    tot.update({
        "electric_battery_energy_out": out,
        "electric_battery_energy_regenerated": regenerated,
        "electric_battery_energy_net": out - regenerated,
        "electric_regen_refused_full_battery": refused_full,
        "electric_friction_brake_energy": (tot["electric_regen_refused_by_limits"]
                                           + refused_full / electric_pt.regen_efficiency),
        "electric_soc_end": float(new_soc[-1]),
        "electric_soc_min": float(new_soc.min()),
    })
    return tot, kernel.TraceSeries(series.wheel_power, pb, fuel_rate, new_soc), new_soc


def _pad(per_interval: np.ndarray) -> np.ndarray:
    """Per-interval values on samples (the last sample repeats the last interval)."""
    return np.append(per_interval, per_interval[-1] if per_interval.size else 0.0)


def _leg_distances(trip: pd.DataFrame, n_legs: int) -> np.ndarray:
    d = trip["distance"].to_numpy()
    legs = trip["leg"].to_numpy()
    out = np.zeros(n_legs)
    starts = dutycycle.leg_starts(trip)
    ends = np.append(starts[1:], len(d))
    for k, (a, b) in enumerate(zip(starts, ends)):
        # the junction interval into the next leg belongs to this leg
        last = d[b] if b < len(d) else d[-1]
        out[int(legs[a]) % n_legs] += last - d[a]
    return out


def _power_limit(tot, prefix: str, what: str, slowed: dict | None = None) -> dict:
    """The power-limit finding (SI numbers and a ``code``; the report layer writes it).

    ``code``: ``"slowed"`` (the trace was re-timed to the speed the power holds),
    ``"limited"`` (the truck falls short of the trace's speed on grades: a warning),
    ``"accelerating"`` (short of power only while accelerating) or ``"within"``.
    ``what`` is ``"motor"`` or ``"engine"``.
    """
    t = tot[f"{prefix}_limited_time"]
    info = {"ok": t <= 0, "what": what, "warn": False, "limited_time": t,
            "limited_distance": tot[f"{prefix}_limited_distance"],
            "speed_deficit_max": tot[f"{prefix}_speed_deficit_max"],
            "speed_deficit_mean": tot[f"{prefix}_speed_deficit_mean"]}
    if slowed and slowed["time_added"] > 0:
        info.update({"ok": True, "code": "slowed", "slowed_time_added": slowed["time_added"],
                     "slowed_distance": slowed["slowed_distance"],
                     "slowed_speed_deficit_max": slowed["speed_deficit_max"]})
    elif t > 0 and info["speed_deficit_max"] >= SPEED_DEFICIT_SHOWN:
        info.update({"code": "limited", "warn": True})
    elif t > 0:
        info["code"] = "accelerating"
    else:
        info["code"] = "within"
    return info


def preconditioning_grid(e, temperature: float) -> float:
    """Grid energy a day to pre-heat a cold-soaked pack at the depot [J] (0 when off)."""
    if not e.preconditioning:
        return 0.0
    mass = e.battery_mass or e.battery_capacity / electric.PACK_SPECIFIC_ENERGY
    return float(electric.preconditioning_energy(temperature, e.battery_heat_below, mass))


def enroute_time(e, usable_capacity: float, deficit: float) -> tuple[float, int]:
    """Charging time [s] and stops [-] for a day's en-route deficit [J] of a scenario
    electric section, with its charging-power curve, from the arrival state of charge
    (default: the reserve)."""
    r = e.enroute
    arrival = e.reserve if r.arrival_soc is None else r.arrival_soc
    t = float(electric.enroute_charging_time(deficit, r.power, r.efficiency, usable_capacity,
                                             arrival, r.taper_start_soc,
                                             r.power_share_at_full))
    return t, int(electric.enroute_stops(deficit, usable_capacity, arrival))


def driver_time_lost(e, charging_time: float, stops: int, driving_time: float) -> float:
    """Driver time the en-route charging costs [s]: with ``charge_during_breaks``, only
    the charging beyond the required breaks, plus each stop's overhead."""
    r = e.enroute
    if not r.charge_during_breaks:
        return charging_time + stops * r.overhead
    return float(electric.driver_time_beyond_breaks(
        charging_time, stops, r.overhead, driving_time, r.break_after, r.break_duration))


def _electric_day(truck, scenario, tot, n_trips, summary, feas, ele) -> dict:
    e = truck.electric
    driving_time = summary["day_driving_time"]
    depot = scenario.depot
    cap_new = ele.usable_capacity
    cap_eol = cap_new * e.eol_state_of_health
    start = e.start_soc
    drawdown = (start - tot["electric_soc_min"]) * cap_new  # deepest point of the day [J]
    net_day = tot["electric_battery_energy_net"]
    summary.update({
        "battery_energy_out": tot["electric_battery_energy_out"] / n_trips,
        "battery_energy_regenerated": tot["electric_battery_energy_regenerated"] / n_trips,
        "battery_energy_net": net_day / n_trips,
        "regen_refused_by_limits": tot["electric_regen_refused_by_limits"] / n_trips,
        "regen_refused_full_battery": tot["electric_regen_refused_full_battery"] / n_trips,
        "friction_brake_energy": tot["electric_friction_brake_energy"] / n_trips,
        "soc_start": tot["electric_soc_start"], "soc_end": tot["electric_soc_end"],
        "soc_min": tot["electric_soc_min"], "usable_capacity": cap_new,
        "usable_capacity_eol": cap_eol, "aux_power": ele.aux_power,
        "battery_per_distance": net_day / tot["distance"] if tot["distance"] else 0.0,
    })
    feas["power"] = _power_limit(tot, "electric", "motor", summary.get("power_limit_slowing"))

    verdicts = {}
    for label, cap in (("new", cap_new), ("end_of_life", cap_eol)):
        available = electric.energy_above_reserve(cap, start, e.reserve)
        deficit = max(drawdown - available, 0.0)
        v = {"ok": deficit <= 0, "usable_capacity": cap, "available": available,
             "needed": drawdown, "deficit": deficit, "enroute_energy": 0.0,
             "enroute_time": 0.0, "enroute_stops": 0, "driver_time_lost": 0.0,
             "reserve": e.reserve, "state_of_health": 1.0 if label == "new"
             else e.eol_state_of_health, "warn": deficit > 0}
        if deficit > 0 and e.enroute.power > 0:
            v["enroute_energy"] = deficit
            charge_t, stops = enroute_time(e, cap, deficit)
            v["enroute_time"] = charge_t + stops * e.enroute.overhead
            v["enroute_stops"] = stops
            v["driver_time_lost"] = driver_time_lost(e, charge_t, stops, driving_time)
            v["enroute_grid_energy"] = deficit / e.enroute.efficiency
            v["enroute_power"] = e.enroute.power
            v["charge_during_breaks"] = bool(e.enroute.charge_during_breaks)
            v["code"] = "enroute"
            v["ok_with_enroute"] = True
        elif deficit > 0:
            v["code"] = "short"
            v["ok_with_enroute"] = False
        else:
            v["code"] = "fits"
            v["ok_with_enroute"] = True
        verdicts[label] = v
    feas["battery"] = verdicts

    # Energy bought: the new-battery case (the cash-flow years run mostly before end of life)
    enroute_batt = verdicts["new"]["enroute_energy"]
    grid_public = enroute_batt / e.enroute.efficiency if enroute_batt > 0 else 0.0
    depot_batt = max(net_day - enroute_batt, 0.0)
    grid_depot = (float(electric.grid_energy(depot_batt, e.charging_efficiency))
                  + preconditioning_grid(e, scenario.ambient.temperature))
    window_h = (depot.charging_end_hour - depot.charging_start_hour) % 24 or 24
    required = float(electric.depot_charger_power(grid_depot, window_h * 3600.0))
    charger = depot.charger_power if depot.chargers > 0 and depot.charger_power > 0 else 0.0
    power = charger if charger > 0 else required
    ok = not (charger > 0 and required > charger * (1 + 1e-9))
    feas["depot_charger"] = {"ok": ok, "code": "fits" if ok else "short", "warn": not ok,
                             "required_power": required, "charger_power": charger,
                             "window_hours": window_h, "grid_energy": grid_depot}
    profile = operation.charging_profile(grid_depot, power, depot.charging_start_hour,
                                         depot.charging_end_hour)
    summary.update({"grid_energy_depot": grid_depot / n_trips,
                    "grid_energy_public": grid_public / n_trips,
                    "grid_per_distance": (grid_depot + grid_public) / tot["distance"]})
    return {
        "day": {"battery": net_day, "grid_depot": grid_depot, "grid_public": grid_public,
                "time_lost": verdicts["new"]["driver_time_lost"]},
        "depot_power": power,
        "profile": profile if profile.sum() > 0 else np.full(24, 1 / 24),
    }


def _ageing(truck, scenario, tot, n_trips, trips, op_fields, feas, summary
            ) -> dict:
    """State of health year by year and its consequences (:mod:`tco.battery`): the first
    year the day no longer fits the battery, and the en-route charging, driver time and
    depot energy of each year (or the replacements of the ``range`` rule)."""
    from tco import battery

    e = truck.electric
    N = scenario.finance.analysis_years
    new = feas["battery"]["new"]
    b = truck.costs.battery_replacement
    fec = trips * tot["electric_battery_energy_out"] / n_trips / e.battery_capacity
    lam = battery.lives_per_year(fec, e.cycle_life, e.eol_state_of_health, e.calendar_fade)
    usable_new = new["usable_capacity"]
    driving = summary["day_driving_time"]

    def time_of(deficit, soh):  # the day's en-route charging as the new-battery case does
        charge, stops = enroute_time(e, usable_new * soh, deficit)
        return driver_time_lost(e, charge, stops, driving)

    ag = battery.age(N, lam, e.eol_state_of_health, new["needed"], new["available"],
                     e.enroute.power, e.enroute.efficiency, e.enroute.overhead,
                     policy=b.when, policy_year=b.year, time_of=time_of)
    days = trips / n_trips  # operating days, extra trips included [1/yr]
    net_day = op_fields["day"]["battery"]
    depot_day = np.array([float(electric.grid_energy(max(net_day - x, 0.0),
                                                     e.charging_efficiency))
                          for x in ag.enroute_energy])
    start_year = scenario.study.start_year
    info = {
        "lives_per_year": ag.lives_per_year, "full_equivalent_cycles_per_year": fec,
        "state_of_health_end": ag.soh_end.tolist(), "state_of_health_low": ag.soh_low.tolist(),
        "short_months": ag.short_months.tolist(),
        "enroute_energy_per_day": ag.enroute_energy.tolist(),
        "enroute_time_per_day": ag.enroute_time.tolist(),
        "replacements": ag.replacements, "first_short_year": ag.first_short_year,
        "feasible": ag.feasible, "rule": b.when,
    }
    fy = ag.first_short_year
    info.update({"analysis_years": N, "start_year": start_year,
                 "eol_state_of_health": e.eol_state_of_health,
                 "enroute_power": e.enroute.power, "enroute_efficiency": e.enroute.efficiency,
                 "charge_during_breaks": bool(e.enroute.charge_during_breaks),
                 "warn": fy is not None})
    if fy is None and b.when == "range" and ag.replacements:
        info["code"] = "replaced_in_time"
        info["first_short_year_without_replacement"] = ag.replacements[0] + 1
    elif fy is None:
        info["code"] = "fits_all_years"
    else:
        info["code"] = "short_enroute" if e.enroute.power > 0 else "short_no_enroute"
        info["worst_year"] = int(np.argmax(ag.enroute_energy)) + 1  # the most en-route energy
    info["calendar_year"] = None if fy is None else start_year + fy - 1
    feas["battery_by_year"] = info
    enroute_grid = ag.enroute_energy / e.enroute.efficiency
    return {
        "state_of_health": ag.soh_end,
        "public_energy_by_year": days * enroute_grid,
        "enroute_time_by_year": days * ag.enroute_time,
        "depot_energy_by_year": days * depot_day,
        "battery_replacement_years": tuple(ag.replacements) if b.when == "range" else (),
    }
