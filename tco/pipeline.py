"""Evaluate a scenario: duty cycle → energy per truck → a year of operation → cash flows,
emissions and uncertainty → :class:`tco.result.Result`.

The data flows one way; writers in :mod:`tco.report` only render the Result.
"""
from __future__ import annotations

import dataclasses
import time
from datetime import datetime, timezone

import numpy as np
import pandas as pd

from tco import depot as depot_model
from tco import dutycycle
from tco.errors import InputError
from tco.progress import Silent, Steps
from tco.result import Result
from tco.scenario import LoadedScenario, Scenario, field_sources
from tco.scenario.base import unusual_values


def _leg_trace(loaded: LoadedScenario, i: int) -> pd.DataFrame:
    s = loaded.scenario
    leg = s.route.legs[i]
    route = s.route
    where = f"route.legs[{i}]"
    if leg.file:
        try:
            path = loaded.resolve(leg.file)
        except InputError as exc:
            raise exc.located(file=loaded.shown, where=f"{where}.file") from None
        window = route.smoothing_window or None
        try:
            if path.suffix.lower() == ".gpx":
                trace = dutycycle.read_gpx_trace(path, dt=route.time_step,
                                                 smoothing_window=window)
            else:
                trace = dutycycle.read_csv_trace(
                    path, dt=route.time_step, cruise_speed=leg.cruise_speed,
                    smoothing_window=window, max_accel=route.max_accel,
                    max_decel=route.max_decel)
        except InputError as exc:
            raise exc.located(file=path, where=f"{where}.file") from None
    else:
        segs = [dict(length=g.length, speed=g.speed, grade=g.grade, stops=g.stops,
                     dwell=g.dwell) for g in leg.segments]
        try:
            trace = dutycycle.from_segments(
                segs, dt=route.time_step, max_accel=route.max_accel,
                max_decel=route.max_decel, start_elevation=s.ambient.altitude)
        except InputError as exc:
            raise exc.located(file=loaded.shown, where=f"{where}.segments") from None
    if leg.dwell_end > 0:
        trace = _append_dwell(trace, leg.dwell_end, route.time_step)
    return trace


def _append_dwell(trace: pd.DataFrame, dwell: float, dt: float) -> pd.DataFrame:
    """Stand still for ``dwell`` seconds at the end of a trace (loading, unloading).

    The added samples are marked ``parked`` (engine off, see :func:`tco.energy.simulate`).
    """
    n = int(round(dwell / dt))
    if n <= 0:
        return trace
    last = trace.iloc[-1]
    if last["speed"] > 0:  # a trace that ends moving cannot stand still at once
        return trace
    extra = pd.DataFrame({
        "time": last["time"] + dt * np.arange(1, n + 1),
        "speed": 0.0, "grade": 0.0, "elevation": last["elevation"],
        "distance": last["distance"], "leg": last["leg"], "parked": True,
    })
    trace = trace.assign(parked=trace["parked"].to_numpy(dtype=bool)
                         if "parked" in trace.columns else False)
    out = pd.concat([trace, extra], ignore_index=True)
    out["leg"] = out["leg"].astype(trace["leg"].dtype)
    out.attrs = dict(trace.attrs)
    return out


def build_traces(loaded: LoadedScenario) -> list[pd.DataFrame]:
    """The trace of each leg of one trip (validated, resampled to the time step).

    The trip is held to the trace budget (:mod:`tco.budget`): synthetic legs and dwells are
    estimated before anything is built, legs read from files when they are read, and the
    running total after each leg.
    """
    from tco import budget

    s = loaded.scenario
    budget.check_trip(s, file=loaded.shown)
    legs, total = [], 0
    for i in range(len(s.route.legs)):
        legs.append(_leg_trace(loaded, i))
        total += len(legs[-1])
        budget.check_samples(total, s.route.time_step, file=loaded.shown, where="route")
    return legs


def build_trip(loaded: LoadedScenario) -> pd.DataFrame:
    """One trip: the legs joined into a continuous trace."""
    legs = build_traces(loaded)
    return dutycycle.concatenate_legs(legs) if len(legs) > 1 else legs[0]


def cost_inputs(scenario: Scenario, operations):
    """The cash-flow model's inputs from a scenario and its yearly operation."""
    from tco.cashflow import CostInputs, TruckSpec

    return CostInputs(
        finance=scenario.finance, prices=scenario.prices, depot=scenario.depot,
        trucks=[TruckSpec(t.name, t.powertrain, t.costs) for t in scenario.trucks],
        operations=operations, days_per_year=scenario.route.days_per_year,
        trips_per_day=scenario.route.trips_per_day,
    )


def service_years(scenario: Scenario) -> np.ndarray:
    """Calendar years of service 1..N. [yr]"""
    return scenario.study.start_year + np.arange(scenario.finance.analysis_years)


def depot_schedule(loaded: LoadedScenario, ops: list, rule: str | None = None):
    """The depot schedule of the scenario's electric trucks (:mod:`tco.depot`)."""
    try:
        return depot_model.scenario_schedule(loaded.scenario.depot, ops, rule)
    except ValueError as exc:
        raise InputError(str(exc), file=loaded.path, where="depot.chargers") from None


def depot_summary(loaded: LoadedScenario, sd, ops: list, cf) -> dict | None:
    """What the depot costs each electric truck under the chosen rule and the other.

    The other rule's figures come from the same cash-flow model run on the operations
    scheduled under that rule (everything else unchanged).

    Returns
    -------
    dict or None
        ``charging`` (managed/unmanaged), ``other_charging``, ``charger_power`` [W],
        ``chargers``, ``trucks_sharing``, ``peak_power`` and ``other_peak_power`` (the
        depot's) [W], and per electric truck name in ``trucks``: ``depot_cost`` (present
        value of its depot lines: chargers, grid connection, maintenance, residual)
        [currency], ``demand_charge`` and ``other_demand_charge`` (present values)
        [currency], ``peak_contribution`` and ``other_peak_contribution`` [W],
        ``present_value`` and ``other_present_value`` [currency], ``difference`` and
        ``other_difference`` (against the baseline) [currency]. None without depot
        charging.
    """
    from tco import cashflow

    if sd is None:
        return None
    s = loaded.scenario
    rule = sd.schedule.rule
    alt_rule = depot_model.other_rule(rule)
    try:
        alt = depot_schedule(loaded, [trk for trk in _unscheduled(ops)], alt_rule)
    except InputError:
        alt = None
    alt_cf = None
    if alt is not None:
        alt_ops = depot_model.with_schedule(_unscheduled(ops), alt)
        alt_cf = cashflow.compute(cost_inputs(s, alt_ops))
    rate = cf.discount_rate
    pv = {m.name: m.present_value for m in cf.trucks}
    ref = cf.baseline
    out = {
        "charging": depot_model.CHARGING_OF_RULE[rule],
        "other_charging": depot_model.CHARGING_OF_RULE[alt_rule],
        "charger_power": sd.schedule.charger_power, "chargers": sd.schedule.chargers,
        "trucks_sharing": len(sd.members), "peak_power": sd.schedule.peak_power,
        "other_peak_power": alt.schedule.peak_power if alt is not None else None,
        "trucks": {},
    }
    from tco import finance as fin

    names = [t.name for t in cf.trucks]
    for i, k in sd.row.items():
        m = cf.trucks[i]
        by = m.present_value_by_line
        row = {
            "depot_cost": sum(by.get(n, 0.0) for n in (
                "depot_chargers", "depot_grid_connection", "depot_maintenance",
                "depot_residual")),
            "demand_charge": by.get("electricity_demand", 0.0),
            "peak_contribution": float(sd.schedule.peak_contribution[k]),
            "present_value": m.present_value,
            "difference": m.present_value - pv[ref] if m.name != ref else 0.0,
            "other_demand_charge": None, "other_peak_contribution": None,
            "other_present_value": None, "other_difference": None,
        }
        if alt_cf is not None:
            lines = alt_cf.lines[i]
            dem = lines.get("electricity_demand")
            row["other_demand_charge"] = float(fin.present_value(dem, rate)) \
                if dem is not None else 0.0
            row["other_peak_contribution"] = float(
                alt.schedule.peak_contribution[alt.row[i]])
            alt_pv = [float(alt_cf.present_value(j)) for j in range(len(s.trucks))]
            row["other_present_value"] = alt_pv[i]
            row["other_difference"] = alt_pv[i] - alt_pv[names.index(ref)]
        out["trucks"][m.name] = row
    return out


def _unscheduled(ops: list) -> list:
    """Operations as the energy model made them (no depot schedule applied)."""
    return [dataclasses.replace(op, depot_peak_contribution=None, depot_cost_share=None)
            for op in ops]


def evaluate(loaded: LoadedScenario, progress: Steps | None = None) -> Result:
    """Evaluate a loaded scenario end to end.

    Parameters
    ----------
    loaded : LoadedScenario
        From :func:`tco.scenario.load_scenario`.
    progress : Steps, optional
        Progress display (the CLI passes one; silent by default).

    Returns
    -------
    Result

    Raises
    ------
    InputError
        Bad input found while evaluating (a trace file, a missing price...).
    """
    from tco import cashflow, emissions, energy

    steps = progress or Silent()
    s = loaded.scenario
    timings: dict[str, float] = {}

    def timed(name, fn, *a, **k):
        steps.start(name)
        t0 = time.perf_counter()
        try:
            out = fn(*a, **k)
        except InputError as exc:  # name the scenario file when the model did not
            raise exc.located(file=loaded.shown) from None
        timings[name] = time.perf_counter() - t0
        return out

    trip = timed("building the duty cycle", build_trip, loaded)
    trucks = {}
    for t in s.trucks:
        trucks[t.name] = timed(f"energy of {t.name}", energy.simulate, t, s, trip)
    ops = [trucks[t.name].operation for t in s.trucks]
    sd = timed("depot charging schedule", depot_schedule, loaded, ops)
    ops = depot_model.with_schedule(ops, sd)
    for t, op in zip(s.trucks, ops):
        trucks[t.name] = dataclasses.replace(trucks[t.name], operation=op)

    inputs = cost_inputs(s, ops)
    cf = timed("cash flows and metrics", cashflow.evaluate, inputs)
    depot_info = timed("depot under the other rule", depot_summary, loaded, sd, ops, cf)
    pv = {m.name: m.present_value for m in cf.trucks}
    ref = cf.baseline
    diff = {name: v - pv[ref] for name, v in pv.items() if name != ref}
    em = timed("emissions", emissions.evaluate, s.emissions, ops, service_years(s),
               reference=ref, cost_difference=diff, discount_rate=cf.discount_rate)

    unc = None
    if getattr(s.uncertainty, "enabled", False):
        from tco import uncertainty

        t0 = time.perf_counter()
        advance = steps.bar(s.uncertainty.draws, "uncertainty (Monte Carlo)")
        try:
            unc = uncertainty.evaluate(s.uncertainty, inputs, s.emissions, service_years(s),
                                       progress=advance)
        except InputError as exc:
            raise exc.located(file=loaded.shown) from None
        timings["uncertainty"] = time.perf_counter() - t0

    warnings = unusual_values(s)
    warnings += [w for tr in trucks.values() for w in tr.warnings]
    warnings += list(getattr(cf, "assumptions", []))
    return Result(
        loaded=loaded, route=trip, route_summary=dutycycle.trace_summary(trip),
        trucks=trucks, cashflow=cf, emissions=em, uncertainty=unc, depot=depot_info,
        assumptions=field_sources(s), warnings=warnings,
        created=datetime.now(timezone.utc).replace(microsecond=0).isoformat(),
        timings=timings,
    )


#: Monte Carlo draws made when only validating (``tco check``): enough to read and check
#: every distribution and correlation the way a full run does. [-]
VALIDATION_DRAWS = 16


def validate(loaded: LoadedScenario) -> Result:
    """Every check :func:`evaluate` makes, for ``tco check``.

    The whole chain runs (duty cycle, energy, cash flows, emissions, uncertainty set-up), so
    whatever ``tco run`` would refuse is refused here too; only the Monte Carlo draws are
    cut to :data:`VALIDATION_DRAWS` (the scenario's own number has passed its budget check
    when the scenario was read). Nothing is written.

    Returns
    -------
    Result
        The result of the short run (its warnings are the run's warnings).
    """
    u = loaded.scenario.uncertainty
    saved = u.draws
    u.draws = min(saved, VALIDATION_DRAWS)
    try:
        return evaluate(loaded)
    finally:
        u.draws = saved
