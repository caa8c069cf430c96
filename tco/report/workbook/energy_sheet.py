"""The Energy sheet: the duty-cycle summary per truck, as values with units."""
from __future__ import annotations

from tco.report import workbook_base as wbb
from tco.report.workbook_base import safe_text, write_value
from tco.report.workbook._common import (
    _title,
)


class EnergySheet:
    """The Energy sheet: the duty-cycle summary per truck, as values with units.

    A mixin of :class:`tco.report.workbook.book.Book`: it reads and writes the state the
    book shares (the result, the sheets, the row maps).
    """

    # ------------------------------------------------------------------------ Energy
    def _energy_sheet(self) -> None:
        ws = self.ws_en
        names = self.trucks
        _title(ws, "Energy and operation on the duty cycle")
        safe_text(ws.cell(row=2, column=1), "Values from the model (summary.json); per-trip "
                  "and per-year figures of one operating day scaled to the year.")
        hdr = 3
        wbb.header_row(ws, hdr, ["Quantity", "Key"] + list(names) + ["Unit"])
        wbb.freeze(ws, f"C{hdr + 1}")
        wbb.set_widths(ws, {"A": 44, "B": 50, **{3 + k: 16 for k in range(len(names))},
                            3 + len(names): 16})
        rows: dict[str, dict] = {}
        order: list[str] = []
        trucks = self.summary.get("trucks", {})
        legs = [leg.get("name", f"leg {k + 1}") for k, leg in
                enumerate(self.summary.get("route", {}).get("legs", []))]
        for k, name in enumerate(names):
            t = trucks.get(name, {})
            flat: list[tuple[str, str, object, str]] = []
            for sec, label in (("per_trip", "Per trip"), ("per_year", "Per year")):
                self._flatten(t.get(sec, {}), sec, label, flat, legs,
                              per_year=sec == "per_year")
            for system, label in (("metric", "Per distance (metric)"),
                                  ("us", "Per distance (US)")):
                self._flatten(t.get("per_distance", {}).get(system, {}),
                              f"per_distance.{system}", label, flat, legs)
            for key, label, value, unit in flat:
                if key not in rows:
                    rows[key] = {"label": label, "unit": unit, "values": {}}
                    order.append(key)
                rows[key]["values"][k] = value
        row = hdr + 1
        route = self.summary.get("route", {})
        for key, label, unit in (("trip_distance_km", "Route: distance of one trip", "km"),
                                 ("trip_distance_mi", "Route: distance of one trip", "mi"),
                                 ("trip_duration_h", "Route: duration of one trip", "h"),
                                 ("climb_m", "Route: climb per trip", "m"),
                                 ("descent_m", "Route: descent per trip", "m"),
                                 ("stops", "Route: stops per trip", "-"),
                                 ("trips_per_day", "Route: trips per day", "1/d"),
                                 ("days_per_year", "Route: operating days per year", "d/yr")):
            if route.get(key) is None:
                continue
            safe_text(ws.cell(row=row, column=1), label)
            safe_text(ws.cell(row=row, column=2), f"route.{key}")
            for k in range(len(names)):
                write_value(ws.cell(row=row, column=3 + k), route[key], "#,##0.00")
            safe_text(ws.cell(row=row, column=3 + len(names)), unit)
            row += 1
        for key in order:
            r = rows[key]
            safe_text(ws.cell(row=row, column=1), r["label"])
            safe_text(ws.cell(row=row, column=2), key)
            for k in range(len(names)):
                v = r["values"].get(k)
                write_value(ws.cell(row=row, column=3 + k), v, "#,##0.000")
            safe_text(ws.cell(row=row, column=3 + len(names)), r["unit"])
            row += 1

    _SUFFIX = (("_kWh_per_km", "kWh/km"), ("_kWh_per_mi", "kWh/mi"),
               ("_L_per_100km", "L/100 km"), ("_gal_per_100mi", "US gal/100 mi"),
               ("_mpg", "mi/US gal"), ("_kWh", "kWh"), ("_kW", "kW"), ("tonne_km", "t·km"),
               ("_km", "km"), ("_mi", "mi"), ("_h", "h"), ("_t", "t"), ("_L", "L"))

    def _flatten(self, d: dict, prefix: str, label: str, out: list, legs: list,
                 per_year: bool = False) -> None:
        for key, v in d.items():
            unit, word = "-", key
            for suf, u in self._SUFFIX:
                if key.endswith(suf):
                    unit, word = u, key[: -len(suf)] if key != suf else key
                    break
            if key == "tonne_km":
                word = "payload × distance"
            if key in ("trips", "extra_trips"):
                unit = "1/yr" if per_year else "-"
            if key == "operating_days":
                unit = "d/yr"
            if per_year and unit not in ("-", "kW", "1/yr", "d/yr"):
                unit += "/yr"
            text = word.replace("_", " ").strip() or key
            name = f"{prefix}.{key}"
            if isinstance(v, dict):
                for sub, x in v.items():
                    out.append((f"{name}.{sub}", f"{label}: {text}, {sub}", x, unit))
            elif isinstance(v, (list, tuple)):
                for k, x in enumerate(v):
                    leg = legs[k] if k < len(legs) else f"leg {k + 1}"
                    out.append((f"{name}[{k}]", f"{label}: {text}, {leg}", x, unit))
            else:
                out.append((name, f"{label}: {text}", v, unit))
