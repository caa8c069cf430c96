"""Evaluate a scenario: duty cycle → energy per truck → a year of operation → cash flows,
emissions and uncertainty → :class:`tco.result.Result`.

The data flows one way; writers in :mod:`tco.report` only render the Result.
"""
from __future__ import annotations

import copy
import dataclasses
import math
import re
import time
from datetime import datetime, timezone
from typing import Any, Callable

import numpy as np
import pandas as pd

from tco import depot as depot_model
from tco import dutycycle
from tco.errors import InputError
from tco.progress import Silent, Steps
from tco.report import formatting as fm
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
        service_life=(scenario.finance.service_life
                      if scenario.finance.residual_at == "end_of_life" else None),
    )


def service_years(scenario: Scenario) -> np.ndarray:
    """Calendar years of service 1..N. [yr]"""
    return scenario.study.start_year + np.arange(scenario.finance.analysis_years)


def depot_schedule(loaded: LoadedScenario, ops: list, rule: str | None = None):
    """The depot schedule of the scenario's electric trucks (:mod:`tco.depot`)."""
    try:
        return depot_model.scenario_schedule(loaded.scenario.depot, ops, rule)
    except ValueError as exc:
        msg = str(exc)
        m = re.search(r"needs (\d+) chargers .*; (\d+) given", msg)
        if m:
            msg = (f"managed charging keeps each truck plugged in for its whole stay, so "
                   f"{m.group(1)} trucks sharing the depot need {m.group(1)} chargers; "
                   f"{m.group(2)} given (add chargers, or set charging = 'unmanaged')")
        raise InputError(msg, file=loaded.shown, where="depot.chargers") from None


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


def _depot_variant(loaded: LoadedScenario, ops_u: list, **update) -> dict[str, float]:
    """Present value of each truck with the depot changed (charger power, rule, trucks
    served): the depot is scheduled again and the cash flows computed (the same chain as
    :func:`evaluate`). [currency]"""
    from tco import cashflow

    s = loaded.scenario
    dep = s.depot.model_copy(update=update)
    sd = depot_model.scenario_schedule(dep, ops_u)
    ops = depot_model.with_schedule(ops_u, sd)
    cf = cashflow.compute(cost_inputs(s.model_copy(update={"depot": dep}), ops),
                          totals_only=True)
    return {t.name: float(cf.present_value(i)) for i, t in enumerate(s.trucks)}


def depot_sensitivity(loaded: LoadedScenario, sd, ops: list, cf, swing: float
                      ) -> tuple[list[dict], list[dict]]:
    """Tornado bars and break-even values of the depot's charger power, charging rule and
    trucks served: structural inputs, so each value is scheduled and costed again.

    Ranges: charger power ± the default swing; the rule managed ↔ unmanaged; trucks served
    from ⌊n(1 − swing)⌋ (at least 1) to ⌈n(1 + swing)⌉ (at least n + 1), the chargers
    scaled with them. Break-even: the charger power at which the cost difference is zero
    (searched from 1 kW to 10 × the charger; Brent's method on a sign change of a grid),
    the fewest trucks sharing the depot that make it zero or better (1..100), and whether
    the other rule changes the sign.

    Returns
    -------
    bars, break_evens : list of dict
        Rows in the columns of :func:`tco.uncertainty.tornado` and
        :func:`tco.uncertainty.break_even_table`.
    """
    from scipy.optimize import brentq

    if sd is None:
        return [], []
    s = loaded.scenario
    dep = s.depot
    ops_u = _unscheduled(ops)
    names = [t.name for t in s.trucks]
    ref = cf.baseline
    compared = [n for n in names if n != ref]
    base_pv = {m.name: m.present_value for m in cf.trucks}
    base = {n: base_pv[n] - base_pv[ref] for n in compared}

    def diff(**update):
        pv = _depot_variant(loaded, ops_u, **update)
        return {n: pv[n] - pv[ref] for n in compared}

    bars, bes = [], []
    n0 = len(sd.members)
    power = sd.schedule.charger_power
    rule = dep.charging
    other = depot_model.CHARGING_OF_RULE[depot_model.other_rule(rule)]
    n_lo, n_hi = max(1, math.floor(n0 * (1 - swing))), max(n0 + 1, math.ceil(n0 * (1 + swing)))

    def served(n):
        chargers = max(1, math.ceil(dep.chargers * n / n0)) if dep.chargers else 0
        return {"trucks_served": n, "chargers": chargers}

    variants = []
    if dep.chargers > 0 and dep.charger_power > 0:
        variants.append(("depot.charger_power", "Depot charger power", "kW", power / 1e3,
                         power * (1 - swing) / 1e3, power * (1 + swing) / 1e3,
                         {"charger_power": power * (1 - swing)},
                         {"charger_power": power * (1 + swing)},
                         f"default ±{fm.percent(swing, 0)}"))
    managed, unmanaged = ({"charging": "managed"}, {"charging": "unmanaged"})
    variants.append(("depot.charging", f"Depot charging rule (low: managed, high: unmanaged; "
                     f"scenario: {rule})", "", math.nan, math.nan, math.nan, managed,
                     unmanaged, "the two rules"))
    variants.append(("depot.trucks_served", "Trucks sharing the depot", "", float(n0),
                     float(n_lo), float(n_hi), served(n_lo), served(n_hi),
                     f"default ±{fm.percent(swing, 0)}, whole trucks"))
    for key, label, unit, b, lo, hi, up_lo, up_hi, source in variants:
        try:
            d_lo, d_hi = diff(**up_lo), diff(**up_hi)
        except (InputError, ValueError):
            continue
        for n in compared:
            bars.append({"truck": n, "key": key, "input": label, "unit": unit,
                         "base_value": b, "low_value": lo, "high_value": hi,
                         "low_factor": lo / b if b else math.nan,
                         "high_factor": hi / b if b else math.nan,
                         "low": d_lo[n], "high": d_hi[n], "base": base[n],
                         "swing": abs(d_hi[n] - d_lo[n]), "source": source})

    def be_row(n, key, label, unit, value, base_value, note):
        return {"truck": n, "key": key, "input": label, "unit": unit, "value": value,
                "base_value": base_value,
                "factor": value / base_value if base_value and value == value else math.nan,
                "value_si": value, "note": note}

    for n in compared:
        # charger power
        if dep.chargers > 0 and dep.charger_power > 0:
            grid = np.geomspace(1e3, 10 * power, 17)
            vals = [diff(charger_power=float(x))[n] for x in grid]
            found, note = math.nan, "none in range (1 kW to 10 × the charger)"
            for a, b_, fa, fb in zip(grid[:-1], grid[1:], vals[:-1], vals[1:]):
                if fa == 0 or fa * fb < 0:
                    found = a if fa == 0 else brentq(
                        lambda x: diff(charger_power=float(x))[n], a, b_, xtol=1.0)
                    note = ""
                    break
            bes.append(be_row(n, "depot.charger_power", "Depot charger power", "kW",
                              found / 1e3, power / 1e3, note))
        # trucks sharing the depot
        found, note = math.nan, "none from 1 to 100 trucks"
        sign = np.sign(base[n])
        for k in range(1, 101):
            try:
                v = diff(**served(k))[n]
            except (InputError, ValueError):
                continue
            if np.sign(v) != sign or v == 0:
                found, note = float(k), ("the fewest trucks sharing the depot at which the "
                                         "sign of the cost difference changes")
                break
        bes.append(be_row(n, "depot.trucks_served", "Trucks sharing the depot", "", found,
                          float(n0), note))
        # the rule
        try:
            alt = diff(charging=other)[n]
            shown = fm.money(alt, s.study.currency)
            note = (f"the sign changes with {other} charging ({shown})"
                    if np.sign(alt) != np.sign(base[n]) else
                    f"no break-even: the same sign with {other} charging ({shown})")
        except (InputError, ValueError):
            note = f"{other} charging cannot run with the chargers given"
        bes.append(be_row(n, "depot.charging", "Depot charging rule", "", math.nan, math.nan,
                          note))
    return bars, bes


def _with_rows(df: pd.DataFrame, rows: list[dict], sort: bool = False, order=()):
    """A table with rows added (widest swing first within each truck when sorting)."""
    if not rows:
        return df
    out = pd.concat([df, pd.DataFrame(rows, columns=df.columns)], ignore_index=True)
    if sort:
        pos = {n: j for j, n in enumerate(order)}
        out = out.assign(_t=out.truck.map(pos)).sort_values(
            ["_t", "swing"], ascending=[True, False], kind="stable").drop(columns="_t")
    return out.reset_index(drop=True)


def _unscheduled(ops: list) -> list:
    """Operations as the energy model made them (no depot schedule applied)."""
    return [dataclasses.replace(op, depot_peak_contribution=None, depot_cost_share=None)
            for op in ops]


def _unset_escalations_text(keys: list[str], trucks: list[str]) -> str:
    """The escalation keys left unset, in words a reader knows (the machine keys stay in
    summary.json): ``"driver cost; diesel exhaust fluid and equipment prices; maintenance,
    tyres … for Diesel tractor and Electric tractor"``."""
    import re

    driver = [k for k in keys if k.startswith("finance.")]
    prices = [k.rsplit(".", 1)[1].replace("_", " ") for k in keys if k.startswith("prices.")]
    per_truck: dict[str, list[int]] = {}
    for k in keys:
        m = re.match(r"trucks\[(\d+)\]\.costs\.escalation\.(\w+)$", k)
        if m:
            per_truck.setdefault(m.group(2).replace("_", " "), []).append(int(m.group(1)))

    def _and(items):
        items = list(items)
        return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]

    parts = ["driver cost"] if driver else []
    if prices:
        parts.append(f"{_and(prices)} price{'s' if len(prices) > 1 else ''}")
    groups: dict[tuple, list[str]] = {}
    for line, idx in per_truck.items():
        groups.setdefault(tuple(sorted(idx)), []).append(line)
    for idx, lines in groups.items():
        parts.append(f"{_and(lines)} of {_and(trucks[i] for i in idx)}")
    return "; ".join(parts)


def with_finding_warnings(tr, units: str):
    """``tr`` with the warnings among its feasibility findings first in its warnings,
    as sentences written by the report layer (:mod:`tco.report.findings`) in ``units``."""
    from tco.report.findings import truck_warnings

    tr.warnings = truck_warnings(tr, units) + list(tr.warnings)
    return tr


def evaluate(loaded: LoadedScenario, progress: Steps | None = None,
             on_base_case: Callable[[Result], Any] | None = None) -> Result:
    """Evaluate a loaded scenario end to end.

    Parameters
    ----------
    loaded : LoadedScenario
        From :func:`tco.scenario.load_scenario`.
    progress : Steps, optional
        Progress display (the CLI passes one; silent by default).
    on_base_case : callable, optional
        Called once the base case is done and before the uncertainty study (only when
        the scenario has one), with a Result of the base case: no uncertainty, no
        warnings yet. The caller may start work on it meanwhile (the report draws the
        charts that do not depend on the study: :class:`tco.report.context.ChartsAhead`);
        it must not change it.

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
        trucks[t.name] = with_finding_warnings(
            timed(f"energy of {t.name}", energy.simulate, t, s, trip), s.study.units)
    ops = [trucks[t.name].operation for t in s.trucks]
    sd = timed("depot charging schedule", depot_schedule, loaded, ops)
    ops = depot_model.with_schedule(ops, sd)
    for t, op in zip(s.trucks, ops):
        trucks[t.name] = dataclasses.replace(trucks[t.name], operation=op)

    inputs = cost_inputs(s, ops)
    cf = timed("cash flows and metrics", cashflow.evaluate, inputs)
    depot_info = timed("depot under the other rule", depot_summary, loaded, sd, ops, cf)
    unset = s.unset_escalations()
    if unset:
        cf.assumptions.append(
            f"Nominal money: the {len(unset)} price escalations left unset follow general "
            f"inflation, {fm.percent(s.finance.inflation, 1)} a year (0 % above inflation): "
            + _unset_escalations_text(unset, [t.name for t in s.trucks]))
    pv = {m.name: m.present_value for m in cf.trucks}
    ref = cf.baseline
    diff = {name: v - pv[ref] for name, v in pv.items() if name != ref}
    em = timed("emissions", emissions.evaluate, s.emissions, ops, service_years(s),
               reference=ref, cost_difference=diff, discount_rate=cf.discount_rate)

    unc = None
    if getattr(s.uncertainty, "enabled", False):
        from tco import uncertainty

        if on_base_case is not None:
            on_base_case(Result(
                loaded=loaded, route=trip, route_summary=dutycycle.trace_summary(trip),
                trucks=trucks, cashflow=cf, emissions=em, uncertainty=None, depot=depot_info,
                assumptions=[], warnings=[], created="", timings={}))
        t0 = time.perf_counter()
        advance = steps.bar(s.uncertainty.draws, "uncertainty (Monte Carlo)")
        try:
            unc = uncertainty.evaluate(s.uncertainty, inputs, s.emissions, service_years(s),
                                       progress=advance)
        except InputError as exc:
            raise exc.located(file=loaded.shown) from None
        if unc is not None and sd is not None:
            bars, bes = depot_sensitivity(loaded, sd, ops, cf, s.uncertainty.default_swing)
            unc.tornado = _with_rows(unc.tornado, bars, sort=True,
                                     order=[t.name for t in s.trucks])
            unc.break_even = _with_rows(unc.break_even, bes)
        timings["uncertainty"] = time.perf_counter() - t0

    warnings = unusual_values(s)
    warnings += [w for tr in trucks.values() for w in tr.warnings]
    warnings += list(getattr(cf, "assumptions", []))
    warnings += timed("other modelling conventions", other_conventions, loaded, trip, diff,
                      ref)
    return Result(
        loaded=loaded, route=trip, route_summary=dutycycle.trace_summary(trip),
        trucks=trucks, cashflow=cf, emissions=em, uncertainty=unc, depot=depot_info,
        assumptions=field_sources(s), warnings=warnings,
        created=datetime.now(timezone.utc).replace(microsecond=0).isoformat(),
        timings=timings,
    )


#: Modelling conventions where practice differs: (name, applies to the scenario, change
#: to the other convention, what the other convention is).
CONVENTIONS = (
    ("wind",
     lambda s: s.ambient.headwind != 0 and s.ambient.wind_treatment != "headwind",
     lambda s: setattr(s.ambient, "wind_treatment", "headwind"),
     "the wind blowing against the truck on every leg (ambient.wind_treatment = "
     "\"headwind\") instead of averaged over all directions"),
    ("breaks",
     lambda s: any(t.powertrain == "electric" and t.electric.enroute.power > 0
                   and t.electric.enroute.charge_during_breaks for t in s.trucks),
     lambda s: [setattr(t.electric.enroute, "charge_during_breaks", False)
                for t in s.trucks if t.powertrain == "electric"],
     "en-route charging never coinciding with the driver's required breaks "
     "(enroute.charge_during_breaks = false)"),
)


def other_conventions(loaded: LoadedScenario, trip: pd.DataFrame, diff: dict,
                      baseline: str) -> list[str]:
    """A warning for each convention whose other form would change the verdict.

    For each of :data:`CONVENTIONS` that applies, the energy and the cash flows are run
    again with the other form (no break-even search) and the present-value difference
    of each truck against the baseline compared with ``diff`` [currency]: where its sign
    changes, the verdict depends on the convention and the warning says by how much.
    """
    from tco import cashflow, energy

    out = []
    for _name, applies, change, what in CONVENTIONS:
        if not applies(loaded.scenario):
            continue
        s2 = loaded.scenario.model_copy(deep=True)
        change(s2)
        alt = copy.copy(loaded)
        alt.scenario = s2
        ops = [energy.simulate(t, s2, trip).operation for t in s2.trucks]
        sd = depot_schedule(alt, ops)
        ops = depot_model.with_schedule(ops, sd)
        cf2 = cashflow.evaluate(cost_inputs(s2, ops), break_evens=False)
        pv2 = {m.name: m.present_value for m in cf2.trucks}
        cur = s2.study.currency
        for name, d in diff.items():
            d2 = pv2[name] - pv2[baseline]
            if (d > 0) != (d2 > 0):
                def word(x):
                    return "more" if x > 0 else "less"
                out.append(
                    f"The verdict depends on a modelling convention: with {what}, "
                    f"{name} would cost {fm.money(abs(d2), cur)} {word(d2)} than {baseline} "
                    f"(present value) instead of {fm.money(abs(d), cur)} {word(d)}.")
    return out


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
