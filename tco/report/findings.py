"""Feasibility findings as sentences in the study's unit system.

The energy model (:mod:`tco.energy`) returns its findings as SI numbers with a ``code``
and a ``warn`` flag: payload left behind [kg], time and distance over the power limit
[s, m], speed deficit [m/s], battery deficit [J], en-route time [s], charger powers [W],
the state of health year by year. This module is the only writer of the sentences a
reader sees about them — in the report, on the console, in the workbook and in
summary.json's ``text`` keys — in metric or US customary units (``study.units``), so a US
report never says "24.8 t", "15.15 km" or "6 km/h".
"""
from __future__ import annotations

from tco.report import formatting as fm

__all__ = ["payload_sentence", "power_sentence", "battery_sentence", "depot_sentence",
           "ageing_sentence", "ageing_verdict", "truck_sentences", "truck_warnings",
           "truck_findings", "other_warnings", "remedy_sentence", "REPORT_ORDER"]

#: The order of a truck's findings in the report's feasibility table.
REPORT_ORDER = ("payload", "power", "battery.new", "battery.end_of_life", "battery_by_year",
                "depot_charger")


def _units(u) -> fm.Units:
    return u if isinstance(u, fm.Units) else fm.Units(u or "metric")


def _mass(kg: float, u: fm.Units) -> str:
    # a payload: tenths of a tonne in metric, whole pounds in US units
    return u.quantity(kg, "t", 0 if u.us else 1)


def payload_sentence(name: str, f: dict, capacity: float, u) -> str:
    """The payload finding: ``f`` is ``feasibility["payload"]``; ``capacity`` [kg]."""
    u = _units(u)
    if not f["ok"]:
        return (f"{name} can legally carry {_mass(capacity, u)}; up to "
                f"{_mass(f['lost_per_trip'], u)} per trip is left behind, needing "
                f"{fm.count(f['extra_trips_per_year'])} extra trips a year to move the same "
                "tonnage.")
    return f"Payload fits: capacity {_mass(capacity, u)}."


def _power_code(f: dict) -> str:
    if f.get("code"):
        return f["code"]
    t = f["limited_time"]
    return ("within" if t <= 0 else "limited" if f["speed_deficit_max"] >= 1000.0 / 3600.0
            else "accelerating")


def _short_duration(s: float) -> str:
    # under a minute in seconds ("3 s", not "0.0 min"), else minutes with a decimal
    return fm.seconds(s) if s < 59.5 else fm.minutes(s, 1)


def power_sentence(name: str, f: dict, what: str, u) -> str:
    """The power-limit finding: ``f`` is ``feasibility["power"]``; ``what`` motor/engine."""
    u = _units(u)
    code = _power_code(f)
    if code == "slowed":
        return (f"{name}: where the cycle asks for more than the rated {what} power the truck "
                f"slows to the speed its power holds (up to "
                f"{u.quantity(f['slowed_speed_deficit_max'], 'km/h', 0)} below the trace over "
                f"{u.quantity(f['slowed_distance'], 'km', 2)}); each trip takes "
                f"{_short_duration(f['slowed_time_added'])} longer, counted in its time and "
                "energy.")
    if code == "limited":
        return (f"{name}: the cycle asks for more than the rated {what} power for "
                f"{fm.seconds(f['limited_time'])} over "
                f"{u.quantity(f['limited_distance'], 'km', 2)}; on those grades it can hold "
                f"up to {u.quantity(f['speed_deficit_max'], 'km/h', 0)} less than the trace "
                "asks.")
    if code == "accelerating":
        return (f"{name}: the cycle asks for more than the rated {what} power for "
                f"{fm.seconds(f['limited_time'])} while accelerating; the truck takes a "
                "little longer to reach speed but holds the trace's speeds on every grade.")
    return f"{name} holds the trace within its rated {what} power."


def _driver_time_words(charge_during_breaks: bool) -> str:
    return ("driver time beyond the required breaks" if charge_during_breaks
            else "driver time")


def battery_sentence(label: str, v: dict) -> str:
    """The day on the ``"new"`` or ``"end_of_life"`` battery: ``v`` is
    ``feasibility["battery"][label]``."""
    which = label.replace("_", "-")
    code = v["code"]
    if code == "enroute":
        soh = (f" (state of health {fm.percent(v['state_of_health'], 0)})"
               if label == "end_of_life" else "")
        return (f"With the {which} battery{soh}, on the scenario's mean day, the day needs "
                f"{fm.kwh(v['deficit'])} of en-route charging into the battery "
                f"({fm.kwh(v['enroute_grid_energy'])} at the meter): "
                f"{fm.minutes(v['enroute_time'])} a day at the {fm.kw(v['enroute_power'])} "
                f"charger, stop overhead included, of which "
                f"{fm.minutes(v['driver_time_lost'])} is "
                f"{_driver_time_words(v['charge_during_breaks'])}.")
    if code == "short":
        return (f"With the {which} battery the day is not feasible: it is "
                f"{fm.kwh(v['deficit'])} short of the {fm.percent(v['reserve'], 0)} reserve "
                "and no en-route charging is given.")
    return (f"With the {which} battery the day ends with "
            f"{fm.kwh(v['available'] - v['needed'])} above the "
            f"{fm.percent(v['reserve'], 0)} reserve.")


def depot_sentence(name: str, d: dict) -> str:
    """The depot charger finding: ``d`` is ``feasibility["depot_charger"]``."""
    window = f"{fm.count(d['window_hours'])} h"
    if d["code"] == "short":
        return (f"{name}: the depot charger ({fm.kw(d['charger_power'])}) cannot refill the "
                f"battery in the {window} window; it needs {fm.kw(d['required_power'])}.")
    return (f"{name} needs at least {fm.kw(d['required_power'])} at the depot to refill "
            f"{fm.kwh(d['grid_energy'])} in the {window} window"
            + (f"; the {fm.kw(d['charger_power'])} charger suffices."
               if d["charger_power"] else "."))


def _year(a: dict, year: int) -> str:
    return f"year {year} ({a['start_year'] + year - 1})"


def ageing_sentence(a: dict) -> str:
    """The battery year by year: ``a`` is ``feasibility["battery_by_year"]``."""
    code = a["code"]
    replaced = fm.years_list(a["replacements"])
    if code == "replaced_in_time":
        return (f"The day would no longer fit the battery in "
                f"{_year(a, a['first_short_year_without_replacement'])}; by the replacement "
                f"rule 'range' the battery is replaced at the end of year {replaced}, so no "
                "en-route charging is needed.")
    if code == "fits_all_years":
        return (f"The battery's state of health stays above what the day needs for all "
                f"{a['analysis_years']} years (lowest "
                f"{fm.percent(min(a['state_of_health_low']), 0)}"
                + (f"; replaced at the end of year {replaced}" if a["replacements"] else "")
                + ").")
    fy = a["first_short_year"]
    low = a["state_of_health_low"]
    if code == "short_enroute":
        w = a["worst_year"]
        below = (f", below the {fm.percent(a['eol_state_of_health'], 0)} end-of-life state "
                 "of health until the battery is replaced at the end of that year"
                 if low[w - 1] < a["eol_state_of_health"] - 5e-4 else "")
        energy = a["enroute_energy_per_day"][w - 1]
        text = (f"From {_year(a, fy)} the day no longer fits the battery (state of health "
                f"{fm.percent(low[fy - 1], 0)} at its lowest that year): from then on it needs "
                f"en-route charging, costed as public charging and driver time in each year it "
                f"is short. The most is in {_year(a, w)}, state of health down to "
                f"{fm.percent(low[w - 1], 0)}{below}: averaged over that year's operating days, "
                f"{fm.kwh(energy)} a day into the battery "
                f"({fm.kwh(energy / a['enroute_efficiency'])} at the meter) and "
                f"{fm.minutes(a['enroute_time_per_day'][w - 1])} a day of "
                f"{_driver_time_words(a['charge_during_breaks'])}.")
    else:
        text = (f"From {_year(a, fy)} the day no longer fits the battery (state of health "
                f"{fm.percent(low[fy - 1], 0)} at its lowest that year) and no en-route "
                "charging is given: the job cannot be done as planned from then on; replace "
                "the battery earlier ([trucks.costs.battery_replacement] when = \"range\") or "
                "give en-route charging.")
    if a["replacements"]:
        text += f" The battery is replaced at the end of year {replaced}."
    return text


def ageing_verdict(a: dict) -> str:
    """The battery-by-year verdict as a clause (``"its battery does the day in all 10
    years"``), for the feasibility verdict and the key figures."""
    code = a["code"]
    if code == "replaced_in_time":
        first = a["first_short_year_without_replacement"]
        return (f"its battery is replaced at the end of year "
                f"{fm.years_list(a['replacements'])}, before the day would no longer fit it "
                f"in {_year(a, first)}")
    if code == "fits_all_years":
        return f"its battery does the day in all {a['analysis_years']} years"
    fy = a["first_short_year"]
    if code == "short_enroute":
        return (f"from {_year(a, fy)} its aged battery needs en-route charging, costed at "
                "the public price plus driver time")
    return (f"from {_year(a, fy)} the day no longer fits its aged battery and no en-route "
            "charging is given")


def truck_sentences(tr, u) -> dict[str, str]:
    """Every finding of one truck as a sentence, keyed as in its ``feasibility``
    (``"payload"``, ``"power"``, ``"battery.new"``, ``"battery.end_of_life"``,
    ``"depot_charger"``, ``"battery_by_year"``), in the order a reader meets them."""
    u = _units(u)
    f = tr.feasibility
    out = {"payload": payload_sentence(tr.name, f["payload"], f["payload"].get(
        "capacity", tr.summary.get("payload_capacity", 0.0)), u)}
    if "power" in f:
        what = f["power"].get("what") or ("motor" if tr.powertrain == "electric"
                                          else "engine")
        out["power"] = power_sentence(tr.name, f["power"], what, u)
    for label, v in (f.get("battery") or {}).items():
        out[f"battery.{label}"] = battery_sentence(label, v)
    if f.get("depot_charger"):
        out["depot_charger"] = depot_sentence(tr.name, f["depot_charger"])
    if f.get("battery_by_year"):
        out["battery_by_year"] = ageing_sentence(f["battery_by_year"])
    return out


def _warns(tr, key: str) -> bool:
    head, _, label = key.partition(".")
    item = tr.feasibility[head][label] if label else tr.feasibility[head]
    return bool(item.get("warn"))


def truck_findings(tr, u) -> list[dict]:
    """One truck's findings for the report's feasibility table, in :data:`REPORT_ORDER`:
    ``{"key", "text", "warn"}``, where ``warn`` marks the findings that are warnings."""
    said = truck_sentences(tr, u)
    return [{"key": k, "text": said[k], "warn": _warns(tr, k)}
            for k in REPORT_ORDER if k in said]


def truck_warnings(tr, u) -> list[str]:
    """The findings of one truck that are warnings, as sentences (payload left behind,
    power short on grades, a battery that cannot do the day, a depot charger too small,
    an aged battery short of the day)."""
    out = []
    for key, text in truck_sentences(tr, u).items():
        if _warns(tr, key):
            # the payload, power and depot sentences name the truck already
            head = key.partition(".")[0]
            out.append(text if head in ("payload", "power", "depot_charger")
                       else f"{tr.name}: {text}")
    return out


def other_warnings(warnings, trucks, u) -> list[str]:
    """``warnings`` (a run's) without the trucks' feasibility findings, which the report
    gives once, marked, in its feasibility table (``trucks``: name → truck result)."""
    given = {w for tr in trucks.values() for w in truck_warnings(tr, u)}
    return [w for w in warnings if w not in given]


def remedy_sentence(x: dict, u) -> str:
    """What would make a fleet route feasible (:func:`tco.fleet.route_status`), from its
    code and SI numbers, in ``u``'s units."""
    u = _units(u)
    code = x["code"]
    if code == "payload":
        return (f"carry {_mass(x['lost_per_trip'], u)} more per trip (a higher gross limit) "
                f"or run {fm.count(x['extra_trips_per_year'])} extra trips a year")
    if code == "enroute":
        return (f"{fm.kwh(x['deficit'])} of en-route charging a day "
                f"({fm.minutes(x['enroute_time'])}), or {fm.kwh(x['deficit'])} more usable "
                "battery")
    if code == "battery":
        return (f"{fm.kwh(x['deficit'])} more usable battery, or en-route charging of "
                f"{fm.kwh(x['deficit'])} a day")
    if code == "day_too_long":
        return (f"the day takes {fm.number(x['driving'] / 3600.0, 1)} h of driving"
                + (f" and {fm.number(x['enroute'] / 3600.0, 1)} h of en-route charging"
                   if x["enroute"] else "")
                + f", more than the {fm.number(x['away'] / 3600.0, 1)} h away from the "
                "depot: fewer trips or a longer day")
    return (f"{fm.kwh(x['shortfall'])} more depot charging a night: a longer stay at the "
            "depot or more powerful chargers")
