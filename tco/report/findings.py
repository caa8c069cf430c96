"""Feasibility findings as sentences in the study's unit system.

The energy model (:mod:`tco.energy`) returns its findings as numbers in SI (payload left
behind [kg], time and distance over the power limit [s, m], speed deficit [m/s], battery
deficit [J], en-route time [s], charger powers [W]); the sentences a reader sees are
written here, in metric or US customary units (``study.units``), so a US report never
says "24.8 t" or "15.15 km". summary.json keeps the model's own ``text`` keys unchanged.
"""
from __future__ import annotations

from tco.report import formatting as fm
from tco.units import J_PER_KWH

__all__ = ["sentences", "rewrite_warnings", "payload_sentence", "power_sentence"]


def _kwh(j: float) -> str:
    return f"{j / J_PER_KWH:.0f} kWh"


def _kw(w: float) -> str:
    return f"{w / 1000:.0f} kW"


def payload_sentence(name: str, f: dict, capacity: float, u: fm.Units) -> str:
    """The payload finding: ``f`` is ``feasibility["payload"]``; ``capacity`` [kg]."""
    mass = (lambda kg: u.quantity(kg, "t", 0)) if u.us else (
        lambda kg: u.quantity(kg, "t", 1))
    if not f["ok"]:
        return (f"{name} can legally carry {mass(capacity)}; up to "
                f"{mass(f['lost_per_trip'])} per trip is left behind, needing "
                f"{f['extra_trips_per_year']:.0f} extra trips a year to move the same "
                "tonnage.")
    return f"Payload fits: capacity {mass(capacity)}."


def power_sentence(name: str, f: dict, what: str, u: fm.Units) -> str:
    """The power-limit finding: ``f`` is ``feasibility["power"]``."""
    t = f["limited_time"]
    deficit = f["speed_deficit_max"]
    if t > 0 and deficit * 3.6 >= 1.0:
        dist = u.quantity(f["limited_distance"], "km", 2)
        speed = u.quantity(deficit, "km/h", 0)
        return (f"{name}: the cycle asks for more than the rated {what} power for {t:.0f} s "
                f"over {dist}; on those grades it can hold up to {speed} less than the "
                "trace asks.")
    if t > 0:
        return (f"{name}: the cycle asks for more than the rated {what} power for {t:.0f} s "
                "while accelerating; the truck takes a little longer to reach speed but "
                "holds the trace's speeds on every grade.")
    return f"{name} holds the trace within its rated {what} power."


def sentences(tr, u: fm.Units) -> dict[str, str]:
    """``{model text: report sentence}`` of one truck's findings in ``u``'s units."""
    f = tr.feasibility
    out = {}
    if "payload" in f and "text" in f["payload"]:
        out[f["payload"]["text"]] = payload_sentence(
            tr.name, f["payload"], tr.summary["payload_capacity"], u)
    if "power" in f and "text" in f["power"]:
        what = "motor" if tr.powertrain == "electric" else "engine"
        out[f["power"]["text"]] = power_sentence(tr.name, f["power"], what, u)
    return out


def rewrite_warnings(warnings: list[str], result, u: fm.Units) -> list[str]:
    """The run's warnings with each finding sentence written in ``u``'s units."""
    table: dict[str, str] = {}
    for tr in result.trucks.values():
        table.update(sentences(tr, u))
    return [table.get(w, w) for w in warnings]
