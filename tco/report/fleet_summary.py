"""``fleet.json``: the machine-readable result of a fleet, with stable key names.

Schema id :data:`SCHEMA` (``"tco.fleet.summary/1.2"``; 1.1 added ``transition``; 1.2 added the plan's budget basis, cash and capital outlays and the re-derived depot by year). Units are in the key names
(``_km``, ``_kWh``, ``_kW``, ``_L``, ``_t``, ``_h``); money is in the base scenario's
ISO 4217 currency (``currency``), present values at the base scenario's discount rate;
shares are fractions (0.25 = 25 %). NaN and infinity are written as null.

This dict is the one source of every figure the fleet report and workbook show
(:mod:`tco.report.fleet_report` formats it; it does not recompute it).

Top-level keys
--------------
``schema``, ``tool`` ``{name, version}``, ``created`` (ISO 8601, UTC);
``schema_version`` (``"1.2"``, the version part of ``schema``) and ``generated`` (equal
to ``created``), added so that summary.json, fleet.json and a batch's index.json share
``schema_version``, ``tool`` and ``generated``
``study``
    ``name``, ``slug``, ``notes``, ``units``, ``start_year``, ``analysis_years``,
    ``discount_rate``, ``money_basis``.
``inputs``
    ``base_file``, ``base_fingerprint_sha256`` (the base scenario's input fingerprint),
    ``fleet_file``, ``fleet_file_sha256`` (SHA-256 of the fleet file's bytes).
``currency``, ``charging_rule``
``plan``
    ``vehicles`` (electrified in the plan), ``routes_total``, ``routes_feasible``,
    ``pv_saving`` (present value, as-is minus plan), ``avoided_t`` (well-to-wheel,
    location-based, over the period), ``abatement_cost_per_t``, ``payback_year`` (first
    year the plan's cumulative saving, not discounted, is no longer negative),
    ``chargers``, ``peak_kW``, ``tonnes_discounted`` (the abatement costs divide the
    present-value cost by discounted tonnes; ``avoided_t`` is always physical tonnes);
    since 1.2: ``routes_saving_money`` (feasible routes whose own saving is ≥ 0),
    ``vehicles_losing_money`` (the other feasible ones) and ``pv_saving_money_routes``
    (the order's cumulative saving after the last route that saves money).
``depot``
    ``charger_kW``, ``demand_interval_min`` and, for ``plan`` and ``all`` (every
    candidate): ``chargers``, ``peak_kW``, ``peak_interval_start`` (``HH:MM``),
    ``energy_kWh_per_day``, ``trucks`` (``vehicle``, ``arrive``, ``depart``,
    ``energy_kWh_per_day``, ``shortfall_kWh_per_day``, ``occupancy_h``, ``cost_share``,
    ``demand_share``, ``peak_contribution_kW``); ``plan`` also has ``interval_min`` and
    ``power_kW_by_interval`` (mean depot power in each interval of the day from midnight:
    the demand interval, or an hour where the simulation slot does not divide it).
``routes``, ``order``, ``yearly``
    Records (lists of dicts), see :func:`route_records`, :func:`order_records`,
    :func:`yearly_records`; ``yearly_totals`` holds their sums and present values.
``transition``
    The fleet transition plan (null when no plan settings were given): schedule by
    vehicle and year, capital against budget, chargers, depot peak and grid capacity,
    emissions by scope against the target, the marginal abatement cost curve and shadow
    prices; keys in :mod:`tco.report.fleet_plan`.
``warnings``, ``cautions``, ``assumptions``
    Plain-word lists; ``assumptions`` lists every input of the base scenario with its
    value (display unit), unit and source.
"""
from __future__ import annotations

import hashlib
import math
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from tco import __version__
from tco.depot import DEFAULT_DEMAND_INTERVAL
from tco.report.fleet_plan import transition_summary
from tco.report.summary import clean_json, dumps

__all__ = ["SCHEMA", "build_fleet_summary", "dumps", "file_sha256", "depot_vehicles",
           "interval_means", "route_records", "order_records", "yearly_records", "clock"]

SCHEMA = "tco.fleet.summary/1.2"
from tco.units import J_PER_KWH  # noqa: E402  [J/kWh]
W_PER_KW = 1e3
M_PER_KM = 1e3
L_PER_M3 = 1e3
KG_PER_T = 1e3
S_PER_H = 3600.0


def file_sha256(path) -> str | None:
    """SHA-256 of a file's bytes (hex), or None when the file cannot be read."""
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError:
        return None


def clock(seconds: float | None) -> str | None:
    """A time of day as ``HH:MM``.

    Parameters
    ----------
    seconds : float or None
        Time after midnight (wrapped to one day). [s]
    """
    if seconds is None or not math.isfinite(seconds):
        return None
    minutes = int(round(seconds / 60.0)) % (24 * 60)
    return f"{minutes // 60:02d}:{minutes % 60:02d}"


def interval_means(power, slot: float, interval: float = DEFAULT_DEMAND_INTERVAL):
    """Mean power over consecutive clock intervals of the day.

    .. math:: \\bar P_j = \\frac{1}{n} \\sum_{k = jn}^{(j+1)n - 1} P_k, \\quad n = \\Delta / s

    Parameters
    ----------
    power : array_like, shape (..., slots)
        Power in each slot of the day, midnight first. [W]
    slot : float
        Slot length. [s]
    interval : float
        Averaging interval, a multiple of ``slot`` (the demand-charge interval by default;
        an hour where the slot does not divide it). [s]

    Returns
    -------
    numpy.ndarray, shape (..., 86400 / interval)
        Mean power in each interval. [W]
    """
    p = np.asarray(power, dtype=float)
    n = int(round(interval / slot))
    if n < 1 or abs(n * slot - interval) > 1e-9 * interval or p.shape[-1] % n:
        raise ValueError("the interval must be a whole number of slots dividing the day")
    return p.reshape(p.shape[:-1] + (p.shape[-1] // n, n)).mean(axis=-1)


def table_interval(slot: float) -> float:
    """The interval the depot tables use: the demand interval, or an hour. [s]"""
    for interval in (DEFAULT_DEMAND_INTERVAL, 3600.0):
        if interval % slot == 0:
            return interval
    return slot


def depot_vehicles(result, which: str = "plan") -> tuple[list[str], list, list]:
    """Vehicles of a depot schedule, in the schedule's truck order, with their clock times.

    The schedule's rows are the candidates that charge at the depot (electric, with depot
    energy), in fleet-file order: the selection :func:`tco.fleet.evaluate_fleet` made.

    Parameters
    ----------
    result : tco.fleet.FleetResult
    which : {"plan", "all"}

    Returns
    -------
    vehicles : list of str
    arrive, depart : list of float
        Clock times at the depot. [s after midnight]
    """
    sched = result.depot_plan if which == "plan" else result.depot_all
    vehicles = result.depot_plan_vehicles if which == "plan" else result.depot_all_vehicles
    return (list(vehicles), [float(x) for x in sched.arrive],
            [float(x) for x in sched.depart])


def _depot(result, which: str, with_profile: bool) -> dict:
    sched = result.depot_plan if which == "plan" else result.depot_all
    vehicles, arrive, depart = depot_vehicles(result, which)
    interval = sched.demand_interval
    trucks = []
    for k, v in enumerate(vehicles):
        trucks.append({
            "vehicle": v, "arrive": clock(arrive[k]), "depart": clock(depart[k]),
            "energy_kWh_per_day": float(sched.energy[k]) / J_PER_KWH,
            "shortfall_kWh_per_day": float(sched.shortfall[k]) / J_PER_KWH,
            "occupancy_h": float(sched.occupancy[k]) / S_PER_H,
            "cost_share": float(sched.cost_share[k]),
            "demand_share": float(sched.demand_share[k]),
            "peak_contribution_kW": float(sched.peak_contribution[k]) / W_PER_KW,
        })
    out = {
        "chargers": int(sched.chargers),
        "peak_kW": float(sched.peak_power) / W_PER_KW,
        "peak_interval_start": clock(sched.peak_interval * interval),
        "energy_kWh_per_day": float(np.sum(sched.energy)) / J_PER_KWH,
        "trucks": trucks,
    }
    if with_profile:
        step = table_interval(sched.slot)
        out["interval_min"] = step / 60.0
        out["power_kW_by_interval"] = (interval_means(sched.power, sched.slot, step)
                                       / W_PER_KW).tolist()
    return out


def route_records(result) -> list[dict]:
    """One record per vehicle (fleet-file order), SI converted to the key names' units.

    Keys: ``vehicle``, ``route``, ``current``, ``candidate``, ``arrive``, ``depart``
    (``HH:MM`` at the depot), ``annual_distance_km``, ``trip_distance_km``,
    ``trips_per_day``, ``tonne_km_per_year``, ``diesel_L_per_year``,
    ``grid_kWh_per_year``, ``depot_kWh_per_day``, ``status``, ``feasible``,
    ``remedies`` (list of str), ``soc_min`` [-], ``in_plan``, ``depot_cost_share`` [-],
    ``peak_contribution_kW``, ``pv_current``, ``pv_candidate``, ``pv_difference``
    (candidate − current), ``pv_saving`` (current − candidate), ``levelized_current_per_km``,
    ``levelized_candidate_per_km`` [currency/km], ``simple_payback_year``, ``irr`` [-],
    ``wtw_current_t``, ``wtw_candidate_t``, ``ttw_current_t``, ``ttw_candidate_t``,
    ``avoided_t`` (physical tonnes over the period), ``abatement_cost_per_t`` [currency/t CO2e],
    ``abatement_t`` (the tonnes the abatement cost divides by: discounted by default).
    """
    dep = result.base.scenario.depot
    times = {}
    for e in result.energies:
        times[e.row.vehicle] = (
            e.row.arrive if e.row.arrive is not None else dep.charging_start_hour * 3600.0,
            e.row.depart if e.row.depart is not None else dep.charging_end_hour * 3600.0)
    out = []
    for r in result.routes.to_dict("records"):
        a, d = times.get(r["vehicle"], (None, None))
        payback = r["simple_payback_year"]
        out.append({
            "vehicle": r["vehicle"], "route": r["route"], "current": r["current"],
            "candidate": r["candidate"], "arrive": clock(a), "depart": clock(d),
            "annual_distance_km": r["annual_distance_m"] / M_PER_KM,
            "trip_distance_km": r["trip_distance_m"] / M_PER_KM,
            "trips_per_day": r["trips_per_day"],
            "tonne_km_per_year": r["payload_distance_kgm"] / (KG_PER_T * M_PER_KM),
            "diesel_L_per_year": r["diesel_m3"] * L_PER_M3,
            "grid_kWh_per_year": r["grid_energy_J"] / J_PER_KWH,
            "depot_kWh_per_day": r["depot_energy_per_day_J"] / J_PER_KWH,
            "status": r["status"], "feasible": bool(r["feasible"]),
            "remedies": [x for x in str(r["remedies"] or "").split("; ") if x],
            "soc_min": r["soc_min"], "in_plan": bool(r["in_plan"]),
            "depot_cost_share": r["depot_cost_share"],
            "peak_contribution_kW": r["peak_contribution_W"] / W_PER_KW,
            "pv_current": r["pv_current"], "pv_candidate": r["pv_candidate"],
            "pv_difference": r["pv_difference"], "pv_saving": r["saving"],
            "levelized_current_per_km": r["levelized_current_per_m"] * M_PER_KM,
            "levelized_candidate_per_km": r["levelized_candidate_per_m"] * M_PER_KM,
            "simple_payback_year": None if payback is None or _nan(payback) else int(payback),
            "irr": r["irr"],
            "wtw_current_t": r["wtw_current_t"], "wtw_candidate_t": r["wtw_candidate_t"],
            "ttw_current_t": r["ttw_current_t"], "ttw_candidate_t": r["ttw_candidate_t"],
            "avoided_t": r["avoided_t"], "abatement_cost_per_t": r["abatement_cost_per_t"],
            "abatement_t": r["abatement_t"],
        })
    return out


def _nan(x) -> bool:
    return isinstance(x, float) and not math.isfinite(x)


def order_records(result) -> list[dict]:
    """The electrification order, one record per vehicle (rank by saving first).

    Keys: ``rank_by_saving``, ``rank_by_abatement``, ``vehicle``, ``route``, ``status``,
    ``feasible``, ``pv_saving``, ``avoided_t``, ``abatement_cost_per_t``,
    ``cumulative_pv_saving``, ``cumulative_avoided_t``, ``chargers_after``,
    ``peak_after_kW`` (null where the depot was not recomputed for that step),
    ``remedies`` (list of str).
    """
    feasible = dict(zip(result.routes["vehicle"], result.routes["feasible"]))
    out = []
    for r in result.order.to_dict("records"):
        ch = r["chargers_after"]
        out.append({
            "rank_by_saving": int(r["rank_by_saving"]),
            "rank_by_abatement": int(r["rank_by_abatement"]),
            "vehicle": r["vehicle"], "route": r["route"], "status": r["status"],
            "feasible": bool(feasible.get(r["vehicle"], False)),
            "pv_saving": r["saving"], "avoided_t": r["avoided_t"],
            "abatement_cost_per_t": r["abatement_cost_per_t"],
            "cumulative_pv_saving": r["cumulative_saving"],
            "cumulative_avoided_t": r["cumulative_avoided_t"],
            "chargers_after": None if _nan(ch) or ch is None else int(ch),
            "peak_after_kW": r["peak_after_W"] / W_PER_KW,
            "remedies": [x for x in str(r["remedies"] or "").split("; ") if x],
        })
    return out


def yearly_records(result) -> list[dict]:
    """Fleet totals per year (year 0 = purchase).

    Keys: ``year``, ``calendar_year``, ``cost_as_is``, ``cost_plan``, ``saving``
    [currency, not discounted], ``wtw_as_is_t``, ``wtw_plan_t``, ``avoided_t``
    [t CO2e, well-to-wheel, location-based], ``cumulative_saving``,
    ``cumulative_avoided_t`` (running sums from year 0), ``chargers``, ``peak_kW``,
    ``electric_trucks``.
    """
    out = []
    cum_saving = cum_avoided = 0.0
    for r in result.yearly.to_dict("records"):
        cum_saving += r["saving"]
        cum_avoided += r["avoided_kg"] / KG_PER_T
        out.append({
            "year": int(r["year"]), "calendar_year": int(r["calendar_year"]),
            "cost_as_is": r["cost_as_is"], "cost_plan": r["cost_plan"],
            "saving": r["saving"],
            "wtw_as_is_t": r["wtw_as_is_kg"] / KG_PER_T,
            "wtw_plan_t": r["wtw_plan_kg"] / KG_PER_T,
            "avoided_t": r["avoided_kg"] / KG_PER_T,
            "cumulative_saving": cum_saving, "cumulative_avoided_t": cum_avoided,
            "chargers": int(r["chargers"]), "peak_kW": r["peak_power_W"] / W_PER_KW,
            "electric_trucks": int(r["electric_trucks"]),
        })
    return out


def _yearly_totals(yearly: list[dict], rate: float) -> dict:
    from tco.finance import present_value

    col = {k: np.array([r[k] for r in yearly], dtype=float)
           for k in ("cost_as_is", "cost_plan", "saving", "wtw_as_is_t", "wtw_plan_t",
                     "avoided_t")}
    out = {k: float(v.sum()) for k, v in col.items()}
    for k in ("cost_as_is", "cost_plan", "saving"):
        out[f"pv_{k}"] = float(present_value(col[k], rate))
    return out


def _payback_year(yearly: list[dict]) -> int | None:
    """First year whose cumulative saving (not discounted) is no longer negative."""
    total = 0.0
    for r in yearly:
        total += r["saving"]
        if total >= 0:
            return r["year"]
    return None


def _assumptions(loaded) -> list[dict]:
    from tco.scenario.base import field_sources
    from tco.units import from_si

    rows = []
    for r in field_sources(loaded.scenario):
        v, unit = r["value"], r["unit"]
        if isinstance(v, float) and unit and unit not in ("", "-"):
            try:
                v = from_si(v, unit)
            except Exception:  # noqa: BLE001 - units such as "currency/yr" are labels only
                pass
        if hasattr(v, "__fspath__"):
            v = str(v)
        rows.append({"field": r["field"], "value": v, "unit": unit, "source": r["source"]})
    return rows


def cautions() -> list[str]:
    """Limits of use of the fleet outputs (the single-scenario cautions, adapted)."""
    from tco.report.context import CAUTIONS

    return [
        "This report is a decision aid built on the base scenario's inputs (listed with "
        "their sources in fleet.json and in the workbook's Notes sheet) and on the fleet "
        "file. It is not financial, tax or legal advice; have the purchase case checked by "
        "qualified advisers before you commit money.",
        *[c for c in CAUTIONS if "assumptions table" not in c],
        "The depot schedule assumes every truck arrives and leaves at its stated times on "
        "every operating day; late arrivals, extra shifts or other loads on the site change "
        "the chargers and the peak. Confirm the connection capacity with the utility before "
        "ordering chargers.",
    ]


def money_routes(order: list[dict]) -> dict:
    """The feasible routes that save money on their own, and their saving together: the
    electrification order's cumulative saving after the last of them (the order puts
    them first), so the figure is the one the order table shows."""
    feasible = [o for o in order if o["feasible"]]
    keep = [o for o in feasible if (o["pv_saving"] or 0.0) >= 0.0]
    return {"routes_saving_money": len(keep),
            "vehicles_losing_money": [o["vehicle"] for o in feasible
                                      if (o["pv_saving"] or 0.0) < 0.0],
            "pv_saving_money_routes": (keep[-1]["cumulative_pv_saving"] if keep else 0.0)}


def build_fleet_summary(result, created: str | None = None) -> dict:
    """The ``fleet.json`` content of a fleet result (JSON-safe).

    Parameters
    ----------
    result : tco.fleet.FleetResult
    created : str, optional
        Time stamp (ISO 8601); default now, in UTC, to the second.

    Returns
    -------
    dict
        Structure in the module docstring; schema id :data:`SCHEMA`.
    """
    loaded = result.base
    s = loaded.scenario
    created = created or datetime.now(timezone.utc).replace(microsecond=0).isoformat()
    routes = route_records(result)
    yearly = yearly_records(result)
    pv_saving = result.plan_saving
    avoided = result.plan_avoided_t
    tonnes_discounted = bool(getattr(s.emissions, "discount_tonnes", False))
    order = order_records(result)
    out = {
        "schema": SCHEMA,
        # shared with summary.json and the batch index.json: schema_version, tool, generated
        "schema_version": SCHEMA.rsplit("/", 1)[1],
        "tool": {"name": "tco", "version": __version__},
        "created": created,
        "generated": created,
        "study": {"name": s.study.name, "slug": loaded.slug, "notes": s.study.notes,
                  "units": s.study.units, "page_size": s.study.page_size,
                  "start_year": s.study.start_year,
                  "analysis_years": s.finance.analysis_years,
                  "discount_rate": s.finance.discount_rate,
                  "money_basis": s.finance.money_basis},
        "inputs": {"base_file": loaded.path.name if loaded.path else None,
                   "base_fingerprint_sha256": loaded.fingerprint,
                   "fleet_file": Path(result.fleet_file).name,
                   "fleet_file_sha256": file_sha256(result.fleet_file)},
        "currency": result.currency,
        "charging_rule": result.rule,
        "plan": {
            **money_routes(order),
            "vehicles": list(result.plan),
            "routes_total": len(routes),
            "routes_feasible": sum(1 for r in routes if r["feasible"]),
            "pv_saving": pv_saving,
            "avoided_t": avoided,
            "abatement_cost_per_t": (-pv_saving / result.plan_abatement_t
                                     if result.plan_abatement_t > 0 else None),
            "payback_year": _payback_year(yearly),
            "chargers": int(result.depot_plan.chargers),
            "peak_kW": float(result.depot_plan.peak_power) / W_PER_KW,
            "tonnes_discounted": tonnes_discounted,
        },
        "depot": {"charger_kW": float(s.depot.charger_power) / W_PER_KW,
                  "demand_interval_min": result.depot_plan.demand_interval / 60.0,
                  "plan": _depot(result, "plan", with_profile=True),
                  "all": _depot(result, "all", with_profile=False)},
        "routes": routes,
        "order": order,
        "yearly": yearly,
        "yearly_totals": _yearly_totals(yearly, s.finance.discount_rate),
        "transition": transition_summary(result),
        "warnings": list(result.warnings),
        "cautions": cautions(),
        "assumptions": _assumptions(loaded),
    }
    return clean_json(out)
