"""``summary.json``: the machine-readable result, with stable key names.

The schema is documented in ``docs/summary-schema.md``; its version is
:data:`SCHEMA_VERSION`. Units are in the key names (``_km``, ``_kWh``, ``_L``…); money is
in the scenario's currency (``scenario.currency``). NaN and infinity are written as null.
"""
from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

from tco import __version__
from tco.units import J_PER_KWH as KWH
from tco.units import M_PER_MILE, from_si, mpg_us

SCHEMA_VERSION = "1.3"
_L = 1e-3


def clean_json(x: Any) -> Any:
    """JSON-safe: numpy scalars to Python, NaN/inf to None, recursively."""
    if isinstance(x, dict):
        return {str(k): clean_json(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [clean_json(v) for v in x]
    if isinstance(x, np.ndarray):
        return [clean_json(v) for v in x.tolist()]
    if isinstance(x, (np.bool_, bool)):
        return bool(x)
    if isinstance(x, (np.integer,)):
        return int(x)
    if isinstance(x, (float, np.floating)):
        x = float(x)
        return x if math.isfinite(x) else None
    return x


def _per_distance(tr) -> dict:
    s = tr.summary
    d = s["trip_distance"]
    wheel = s["wheel_energy"]
    metric = {"wheel_kWh_per_km": {k: v / KWH * 1000 / d for k, v in wheel.items()}}
    us = {"wheel_kWh_per_mi": {k: v / KWH * M_PER_MILE / d for k, v in wheel.items()}}
    if tr.powertrain == "diesel":
        per_m = s["fuel_per_distance"]
        metric["fuel_L_per_100km"] = from_si(per_m, "L/(100 km)")
        us["fuel_mpg"] = mpg_us(per_m)
        us["fuel_gal_per_100mi"] = from_si(per_m, "gal/(100 mi)")
    else:
        for key, si in (("battery", s["battery_energy_net"] / d),
                        ("grid", (s["grid_energy_depot"] + s["grid_energy_public"]) / d)):
            metric[f"{key}_kWh_per_km"] = si / KWH * 1000
            us[f"{key}_kWh_per_mi"] = si / KWH * M_PER_MILE
    return {"metric": metric, "us": us}


def _per_trip(tr) -> dict:
    s = tr.summary
    out = {
        "distance_km": s["trip_distance"] / 1000,
        "duration_h": s["trip_duration"] / 3600,
        "wheel_energy_kWh": {k: v / KWH for k, v in s["wheel_energy"].items()},
        "payload_requested_t": [p / 1000 for p in s["payload_requested"]],
        "payload_carried_t": [p / 1000 for p in s["payload_carried"]],
    }
    if tr.powertrain == "diesel":
        out.update(diesel_L=s["fuel_volume"] / _L, def_L=s["def_volume"] / _L,
                   idle_diesel_L=s["idle_fuel_volume"] / _L,
                   engine_energy_kWh=s["engine_energy"] / KWH)
    else:
        out.update(
            battery_out_kWh=s["battery_energy_out"] / KWH,
            battery_regenerated_kWh=s["battery_energy_regenerated"] / KWH,
            battery_net_kWh=s["battery_energy_net"] / KWH,
            friction_brake_kWh=s["friction_brake_energy"] / KWH,
            grid_depot_kWh=s["grid_energy_depot"] / KWH,
            grid_public_kWh=s["grid_energy_public"] / KWH,
            grid_kWh=(s["grid_energy_depot"] + s["grid_energy_public"]) / KWH,
            auxiliary_power_kW=s["aux_power"] / 1000,
        )
    return out


def _per_year(tr) -> dict:
    op = tr.operation
    return {
        "operating_days": op.operating_days, "trips": op.trips, "extra_trips": op.extra_trips,
        "distance_km": op.distance / 1000, "distance_mi": op.distance / M_PER_MILE,
        "tonne_km": op.payload_distance / 1e6,
        "diesel_L": op.diesel_volume / _L, "def_L": op.def_volume / _L,
        "battery_kWh": op.battery_energy / KWH,
        "grid_depot_kWh": op.grid_energy_depot / KWH,
        "grid_public_kWh": op.grid_energy_public / KWH,
        "charging_time_lost_h": op.charging_time_lost / 3600,
        "battery_discharge_kWh": op.battery_discharge_energy / KWH,
        "depot_charging_power_kW": op.depot_charging_power / 1000,
    }


def _feasibility(tr, units: str = "metric") -> dict:
    from tco.report import findings

    f = tr.feasibility
    said = findings.truck_sentences(tr, units)
    out: dict[str, Any] = {
        "payload": {"ok": f["payload"]["ok"],
                    "capacity_t": tr.summary["payload_capacity"] / 1000,
                    "lost_per_trip_t": f["payload"]["lost_per_trip"] / 1000,
                    "extra_trips_per_year": f["payload"]["extra_trips_per_year"],
                    "text": said["payload"]},
        "power": {"ok": f["power"]["ok"], "limited_time_s": f["power"]["limited_time"],
                  "limited_distance_km": f["power"]["limited_distance"] / 1000,
                  "speed_deficit_max_kmh": f["power"]["speed_deficit_max"] * 3.6,
                  "text": said["power"]},
    }
    if tr.powertrain == "electric":
        out["battery"] = {
            label: {"ok": v["ok"], "ok_with_enroute": v["ok_with_enroute"],
                    "usable_kWh": v["usable_capacity"] / KWH,
                    "available_kWh": v["available"] / KWH, "needed_kWh": v["needed"] / KWH,
                    "deficit_kWh": v["deficit"] / KWH,
                    "enroute_kWh": v["enroute_energy"] / KWH,
                    "enroute_minutes": v["enroute_time"] / 60,
                    "enroute_stops": v.get("enroute_stops", 0),
                    "driver_minutes_lost": v.get("driver_time_lost", 0.0) / 60,
                    "text": said[f"battery.{label}"]}
            for label, v in f["battery"].items()}
        d = f["depot_charger"]
        a = f.get("battery_by_year")
        if a:
            out["battery_by_year"] = {
                "verdict": findings.ageing_verdict(a), "text": said["battery_by_year"],
                "rule": a["rule"],
                "first_short_year": a["first_short_year"],
                "first_short_calendar_year": a["calendar_year"],
                "feasible": a["feasible"], "replacement_years": a["replacements"],
                "lives_per_year": a["lives_per_year"],
                "full_equivalent_cycles_per_year": a["full_equivalent_cycles_per_year"],
                "state_of_health_end": a["state_of_health_end"],
                "state_of_health_low": a["state_of_health_low"],
                "short_months": a["short_months"],
                "enroute_kWh_per_day": [x / KWH for x in a["enroute_energy_per_day"]],
                "enroute_minutes_per_day": [x / 60 for x in a["enroute_time_per_day"]],
            }
        out["depot_charger"] = {"ok": d["ok"], "required_kW": d["required_power"] / 1000,
                                "charger_kW": d["charger_power"] / 1000,
                                "window_hours": d["window_hours"],
                                "text": said["depot_charger"]}
        out["soc_min"] = tr.summary["soc_min"]
        out["soc_end"] = tr.summary["soc_end"]
    out["feasible"] = bool(out["payload"]["ok"]) and _battery_ok(out) and bool(
        (out.get("battery_by_year") or {}).get("feasible", True))
    return out


def _battery_ok(out: dict) -> bool:
    b = out.get("battery")
    if not b:
        return True
    return bool(b["new"]["ok_with_enroute"]) and out.get("depot_charger", {}).get("ok", True)


def _assumptions(result) -> list[dict]:
    rows = []
    for r in result.assumptions:
        v = r["value"]
        if isinstance(v, float) and r["unit"] and r["unit"] not in ("", "-"):
            try:
                v = from_si(v, r["unit"])
            except Exception:  # noqa: BLE001 - units such as "currency/yr" are labels only
                pass
        rows.append({"field": r["field"], "value": v if not hasattr(v, "__fspath__")
                     else str(v), "unit": r["unit"], "source": r["source"]})
    return rows


def cost_covers(result) -> dict:
    """What the cost includes (``cost_covers`` key): the driver's wages or not, the driver
    cost per hour, and the escalations left unset that follow inflation."""
    f = result.scenario.finance
    return {
        "driver_wages": bool(f.driver_wages),
        "driver_cost_per_hour": f.driver_cost_per_hour * 3600.0,
        "escalations_following_inflation": result.scenario.unset_escalations(),
        "inflation": f.inflation,
        "text": driver_sentence(result),
    }


def driver_sentence(result) -> str:
    """One sentence: whether the cost includes the driver's wages (the verdict says it)."""
    f = result.scenario.finance
    cur = result.scenario.study.currency
    if f.driver_wages:
        from tco.report import formatting as fm

        return (f"Driver wages are included ({fm.money(f.driver_cost_per_hour * 3600, cur, 2)} "
                "an hour of duty), so the cost per km is the full operating cost.")
    return ("Driver wages are not included, only driver time that differs between the "
            "trucks (the scenario's finance setting for driver wages adds them).")


def depot_summary(result) -> dict | None:
    """The depot charging facts the verdict states (``depot`` key; null without depot
    charging). Money in present value, powers in kW."""
    d = getattr(result, "depot", None)
    if not d:
        return None

    def kw(x):
        return None if x is None else x / 1000

    return {
        "charging": d["charging"], "other_charging": d["other_charging"],
        "charger_kW": kw(d["charger_power"]), "chargers": d["chargers"],
        "trucks_sharing": d["trucks_sharing"], "peak_kW": kw(d["peak_power"]),
        "other_peak_kW": kw(d["other_peak_power"]),
        "trucks": {name: {
            "depot_cost_pv": t["depot_cost"], "demand_charge_pv": t["demand_charge"],
            "other_demand_charge_pv": t["other_demand_charge"],
            "peak_contribution_kW": kw(t["peak_contribution"]),
            "other_peak_contribution_kW": kw(t["other_peak_contribution"]),
            "present_value_difference": t["difference"],
            "other_present_value_difference": t["other_difference"],
        } for name, t in d["trucks"].items()},
    }


def build_summary(result) -> dict:
    """The summary.json content of a Result (JSON-safe)."""
    from tco.report.summary_sections import cashflow_summary, emissions_summary

    s = result.scenario
    loaded = result.loaded
    rs = result.route_summary
    out = {
        "schema_version": SCHEMA_VERSION,
        "tool": {"name": "tco", "version": __version__},
        "generated": result.created,
        "scenario": {
            "name": s.study.name, "slug": loaded.slug,
            "file": loaded.path.name if loaded.path else None,
            "fingerprint_sha256": loaded.fingerprint,
            "inputs_fingerprint_sha256": getattr(loaded, "inputs_fingerprint", None),
            "currency": s.study.currency,
            "units": s.study.units, "start_year": s.study.start_year,
            "analysis_years": s.finance.analysis_years,
        },
        "route": {
            "trips_per_day": s.route.trips_per_day, "days_per_year": s.route.days_per_year,
            "trip_distance_km": rs["distance"] / 1000,
            "trip_distance_mi": rs["distance"] / M_PER_MILE,
            "trip_duration_h": rs["duration"] / 3600,
            "climb_m": rs.get("climb"), "descent_m": rs.get("descent"),
            "stops": rs.get("stops"),
            "legs": [{"name": leg.name, "payload_t": leg.payload / 1000}
                     for leg in s.route.legs],
        },
        "trucks": {
            name: {"powertrain": tr.powertrain, "per_trip": _per_trip(tr),
                   "per_distance": _per_distance(tr), "per_year": _per_year(tr),
                   "feasibility": _feasibility(tr, s.study.units), "warnings": tr.warnings}
            for name, tr in result.trucks.items()
        },
        "cashflow": cashflow_summary(result.cashflow),
        "emissions": emissions_summary(result.emissions),
        "uncertainty": None,
        "depot": depot_summary(result),
        "cost_covers": cost_covers(result),
        "warnings": result.warnings,
        "assumptions": _assumptions(result),
    }
    if result.uncertainty is not None:
        from tco.report.summary_sections import uncertainty_summary

        out["uncertainty"] = uncertainty_summary(result.uncertainty)
    return clean_json(out)


def dumps(summary: dict) -> str:
    """Serialise with NaN forbidden (strict JSON)."""
    return json.dumps(summary, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
