"""The assumptions appendix for a reader: inputs grouped by section, with human labels.

Every input of the run (:func:`tco.scenario.base.field_sources`) is shown once, under its
section (study, route, the trucks side by side, prices, finance, depot, emissions,
uncertainty), labelled from its description, its value in the currency and the study's
unit system. Inputs that do not apply are left out: lease fields of a truck bought with a
loan, battery fields of a diesel truck, the constant-BSFC figure under the Willans line,
the after-tax settings when the after-tax view is off... The route's segments, the
tariff bands and the uncertainty distributions read as compact tables.

A value the user set is printed plain; a default carries a bracketed number pointing to
its source in the numbered list at the end. The machine keys (``trucks[1].costs.tyres``)
stay in the workbook and summary.json.
"""
from __future__ import annotations

import re

from tco.report import formatting as fm

__all__ = ["build_appendix", "applies"]

SECTION_TITLES = {
    "study": "Study", "ambient": "Route and conditions", "route": "Route and conditions",
    "trucks": "Trucks", "prices": "Prices", "finance": "Finance", "depot": "Depot charging",
    "emissions": "Emissions", "uncertainty": "Uncertainty",
}
_INDEX = re.compile(r"\[(\d+)\]")


def _get(obj, path: str):
    """Attribute path on a model (``"costs.financing.method"``); None when absent."""
    for part in path.split("."):
        obj = getattr(obj, part, None)
        if obj is None:
            return None
    return obj


def applies(key: str, scenario) -> bool:
    """Whether the input at ``key`` takes part in this scenario's calculation.

    Parameters
    ----------
    key : str
        Field path as in summary.json (``"trucks[0].costs.financing.lease_payment"``).
    scenario : tco.scenario.Scenario
    """
    m = re.match(r"trucks\[(\d+)\]\.(.*)$", key)
    if m:
        truck = scenario.trucks[int(m.group(1))]
        return _truck_field_applies(m.group(2), truck, scenario)
    fin = scenario.finance
    if key == "finance.inflation":
        return fin.money_basis == "real"
    if key.startswith("finance.after_tax.") and key != "finance.after_tax.enabled":
        at = fin.after_tax
        if not at.enabled:
            return False
        leaf = key.rsplit(".", 1)[1]
        if leaf == "macrs_class":
            return at.depreciation == "macrs"
        if leaf == "declining_balance_percent":
            return at.depreciation == "declining_balance"
        if leaf == "depreciation_years":
            return at.depreciation != "macrs"
        return True
    electric = any(t.powertrain == "electric" for t in scenario.trucks)
    diesel = any(t.powertrain == "diesel" for t in scenario.trucks)
    if key.startswith(("depot.", "prices.electricity", "prices.public_charging",
                       "prices.escalation.electricity", "prices.escalation.public_charging",
                       "prices.escalation.equipment")):
        return electric
    if key.startswith(("prices.diesel", "prices.escalation.diesel")):
        return diesel
    if key.startswith("emissions.lifecycle.") and key != "emissions.lifecycle.include":
        return bool(scenario.emissions.lifecycle.include)
    if key.startswith("uncertainty.") and key != "uncertainty.enabled":
        return bool(scenario.uncertainty.enabled)
    return True


def _truck_field_applies(rest: str, truck, scenario) -> bool:
    electric = truck.powertrain == "electric"
    if rest.startswith("costs.battery_replacement") or rest == "costs.escalation.battery":
        if not electric:
            return False
        when = truck.costs.battery_replacement.when
        if rest == "costs.battery_replacement.when":
            return True
        if when == "never":
            return False
        return not (rest.endswith(".year") and when != "year")
    if rest == "body.zero_emission_allowance":
        return electric
    if rest.startswith("costs.financing."):
        f = truck.costs.financing
        leaf = rest.rsplit(".", 1)[1]
        if leaf == "method":
            return True
        if leaf.startswith("lease_"):
            return f.method == "lease" and (leaf != "lease_buyout_price"
                                            or f.lease_end == "buy_out")
        if leaf in ("loan_rate", "loan_years", "down_payment_share", "payments_per_year"):
            return f.method == "loan"
        return f.method != "cash"
    if rest.startswith("costs.residual."):
        method = truck.costs.residual.method
        return not ((rest.endswith(".shares") and method != "table")
                    or (rest.endswith(".rate") and method != "declining_balance"))
    if rest.startswith("diesel.") and truck.diesel is not None:
        model = truck.diesel.fuel_model
        if rest == "diesel.bsfc":
            return model == "bsfc"
        if rest.startswith("diesel.willans_"):
            return model == "willans"
    if rest.startswith("electric.enroute.") and rest != "electric.enroute.power" \
            and truck.electric is not None:
        return truck.electric.enroute.power > 0
    if rest in ("costs.tax_credit_year",):
        return truck.costs.tax_credit != 0
    return True


class _Sources:
    """Numbers the default sources in the order they are first met."""

    def __init__(self):
        self.numbers: dict[str, int] = {}

    def mark(self, row: dict) -> str:
        src = row["source"]
        if src == "user":
            return ""
        if src not in self.numbers:
            self.numbers[src] = len(self.numbers) + 1
        return f" [{self.numbers[src]}]"

    def listing(self) -> list[dict]:
        return [{"number": n, "text": _short_source(s)} for s, n in self.numbers.items()]


#: The tool's own defaults (no published source) are named once in the appendix's lead.
TOOL_ASSUMPTION = "assumption (tool default; replace with your own figure)"


def _short_source(text: str) -> str:
    if text.startswith(TOOL_ASSUMPTION):
        rest = text[len(TOOL_ASSUMPTION):].lstrip(" :;")
        return "tool assumption" + (f": {rest}" if rest else "")
    return text


def _cell(row: dict, cur: str, system: str, sources: _Sources) -> str:
    if row["value"] is None:
        return "not given" + sources.mark(row)
    return fm.input_value(row["value"], row["unit"], row["field"], cur, system) \
        + sources.mark(row)


def _shown(row: dict) -> bool:
    """A field left empty is shown only when its default stands for something."""
    if row["value"] is not None:
        return True
    if re.match(r"trucks\[\d+\]\.(diesel|electric)$", row["field"]):
        return False
    src = str(row["source"]).lower()
    return not src.startswith(("none", "no default", "user"))


def build_appendix(rows: list[dict], scenario, units: str = "metric") -> dict:
    """The appendix context: ``{"sections": [...], "sources": [...], "counts": {...}}``.

    Parameters
    ----------
    rows : list of dict
        :attr:`tco.result.Result.assumptions` (``field``, ``value`` in SI, ``unit``,
        ``description``, ``source``).
    scenario : tco.scenario.Scenario
    units : {"metric", "us"}

    Returns
    -------
    dict
        ``sections``: list of ``{"title", "columns", "rows", "tables"}`` where ``rows`` are
        ``[label, value, ...]`` (one value column per truck in the trucks section) and
        ``tables`` are compact tables ``{"title", "columns", "rows"}``; ``sources``: the
        numbered default sources; ``counts``: inputs shown, set by the user, left out.
    """
    cur = scenario.study.currency
    sources = _Sources()
    by_key = {r["field"]: r for r in rows}
    used = [r for r in rows if applies(r["field"], scenario) and _shown(r)]
    left_out = len(rows) - len(used)
    sections: dict[str, dict] = {}

    def section(title: str, columns=None) -> dict:
        if title not in sections:
            sections[title] = {"title": title, "columns": columns or ["Input", "Value"],
                               "rows": [], "tables": []}
        return sections[title]

    names = [t.name for t in scenario.trucks]
    truck_rows: dict[str, dict] = {}
    leg_rows: dict[int, dict] = {}
    dist_rows: dict[int, dict] = {}
    band_rows: dict[int, dict] = {}
    corr_rows: dict[int, dict] = {}
    escalations: dict[str, list[dict]] = {}  # "prices" or "trucks[i]" → its rows
    for r in used:
        key = r["field"]
        m = re.match(r"(prices|trucks\[\d+\]\.costs)\.escalation\.(\w+)$", key)
        if m:
            escalations.setdefault(m.group(1), []).append(r)
            continue
        top = key.split(".", 1)[0].split("[", 1)[0]
        label = fm.field_label(key, r["description"]) or key
        m = re.match(r"trucks\[(\d+)\]\.(.*)$", key)
        if m:
            rest = m.group(2)
            if rest in ("name",):
                continue
            entry = truck_rows.setdefault(rest, {"label": label, "cells": [""] * len(names)})
            entry["cells"][int(m.group(1))] = _cell(r, cur, units, sources)
            continue
        m = re.match(r"route\.legs\[(\d+)\]\.(.*)$", key)
        if m:
            leg = leg_rows.setdefault(int(m.group(1)), {"fields": {}, "segments": {}})
            sm = re.match(r"segments\[(\d+)\]\.(.*)$", m.group(2))
            if sm:
                leg["segments"].setdefault(int(sm.group(1)), {})[sm.group(2)] = r
            else:
                leg["fields"][m.group(2)] = r
            continue
        m = re.match(r"uncertainty\.distributions\[(\d+)\]\.(.*)$", key)
        if m:
            dist_rows.setdefault(int(m.group(1)), {})[m.group(2)] = r
            continue
        m = re.match(r"uncertainty\.correlations\[(\d+)\]\.(.*)$", key)
        if m:
            corr_rows.setdefault(int(m.group(1)), {})[m.group(2)] = r
            continue
        m = re.match(r"prices\.electricity\.bands\[(\d+)\]\.(.*)$", key)
        if m:
            band_rows.setdefault(int(m.group(1)), {})[m.group(2)] = r
            continue
        title = SECTION_TITLES.get(top, top.replace("_", " ").capitalize())
        if key in ("study.name", "study.notes") and r["value"]:
            # long free text, printed in full on the cover
            section(title)["rows"].append([label, "as on the cover" + sources.mark(r)])
            continue
        section(title)["rows"].append([label, _cell(r, cur, units, sources)])

    # route: leg fields as rows, segments as one compact table per leg
    if leg_rows:
        route = section(SECTION_TITLES["route"])
        u = fm.Units(units)
        seg_cols = [("length", f"Length [{u.dist}]"), ("speed", f"Speed [{u.speed}]"),  # noqa
                    ("grade", "Grade"), ("stops", "Stops"), ("dwell", "Dwell")]
        for i in sorted(leg_rows):
            leg = leg_rows[i]
            name = leg["fields"].get("name", {}).get("value") or f"leg {i + 1}"
            facts = []
            for k, r in leg["fields"].items():
                if k == "name" or r["value"] is None:
                    continue
                facts.append(f"{fm.label_from_description(r['description']).lower()}: "
                             f"{_cell(r, cur, units, sources)}")
            seg = leg["segments"]
            table_rows = []
            for j in sorted(seg):
                cells = [str(j + 1)]
                for k, _ in seg_cols:
                    r = seg[j].get(k)
                    if r is None:
                        cells.append("")
                        continue
                    text = fm.input_value(r["value"], r["unit"], r["field"], cur, units)
                    if k in ("length", "speed"):  # the unit is in the header
                        text = text.rsplit(" ", 1)[0]
                    cells.append(text + sources.mark(r))
                table_rows.append(cells)
            route["tables"].append({
                "kind": "leg", "title": f"Leg {i + 1}: {name}", "note": "; ".join(facts).capitalize(),
                "columns": ["Segment"] + [c for _, c in seg_cols] if table_rows else [],
                "rows": table_rows})
    if truck_rows:
        t = section("Trucks", ["Input"] + names)
        t["rows"] = [[e["label"]] + e["cells"] for e in truck_rows.values()]
        for i, name in enumerate(names):
            cell = _escalation_cell(escalations.get(f"trucks[{i}].costs", []), cur, units,
                                    sources)
            if cell:
                t.setdefault("notes", []).append(f"Cost changes per year, {name}: {cell}.")
    if escalations.get("prices"):
        p = section(SECTION_TITLES["prices"])
        p.setdefault("notes", []).append(
            "Price changes per year: "
            + _escalation_cell(escalations["prices"], cur, units, sources) + ".")
    if band_rows:
        p = section(SECTION_TITLES["prices"])
        p["tables"].append({
            "title": "Time-of-use bands", "note": "", "columns": ["Band", "Hours", "Price"],
            "rows": [[_cell(b[k], cur, units, sources) if k in b else ""
                      for k in ("name", "hours", "price")] for _, b in sorted(band_rows.items())]})
    input_labels = {k: fm.field_label(k, r["description"]) for k, r in by_key.items()}
    from tco.uncertainty import label_of

    def input_label(key) -> str:
        """An uncertain input by the name the sensitivity table gives it, else by its
        field's label (never the machine key)."""
        key = str(key)
        shown = label_of(key, names)
        return shown if shown != key else input_labels.get(key, key)

    input_labels = {**input_labels, **{str(d["input"]["value"]): input_label(
        d["input"]["value"]) for d in dist_rows.values() if d.get("input")}}
    if dist_rows:
        unc = section(SECTION_TITLES["uncertainty"])
        cols = ("input", "kind", "scale", "low", "mode", "high", "mean", "sd")
        unc["tables"].append({
            "title": "Distributions for the Monte Carlo draws",
            "note": "Relative: multiples of the scenario's value; absolute: values in the "
                    "input's documented unit.",
            "columns": ["Input", "Kind", "Scale", "Low", "Mode", "High", "Mean", "SD"],
            "rows": [[_dist_cell(d.get(k), input_labels) for k in cols] for _, d in sorted(dist_rows.items())]})
    if corr_rows:
        unc = section(SECTION_TITLES["uncertainty"])
        unc["tables"].append({
            "title": "Rank correlations", "note": "", "columns": ["Inputs", "Rank correlation"],
            "rows": [[" and ".join(input_label(x) for x in (c.get("inputs", {}).get("value") or [])),
                      fm.number(c.get("rank", {}).get("value"), 2)]
                     for _, c in sorted(corr_rows.items())]})
    order = ["Study", "Route and conditions", "Trucks", "Prices", "Finance", "Depot charging",
             "Emissions", "Uncertainty"]
    out = [sections[t] for t in order if t in sections]
    out += [s for t, s in sections.items() if t not in order]
    n_user = sum(1 for r in used if r["source"] == "user")
    return {"sections": out, "sources": sources.listing(),
            "counts": {"shown": len(used), "user": n_user, "default": len(used) - n_user,
                       "left_out": left_out}}


def _escalation_cell(rows: list[dict], cur: str, units: str, sources: "_Sources") -> str:
    """Yearly changes of several prices in one cell: ``diesel 2.5 %, tyres 0 % [15]``.

    Items with the same value and source share it: ``tyres, tolls 0 % [15]``.
    """
    groups: dict[tuple[str, str], list[str]] = {}
    for r in rows:
        name = r["field"].rsplit(".", 1)[1].replace("_", " ")
        value = fm.input_value(r["value"], r["unit"], r["field"], cur, units)
        groups.setdefault((value, sources.mark(r)), []).append(name)
    return "; ".join(f"{', '.join(names)} {value}{mark}"
                     for (value, mark), names in groups.items())


def _dist_cell(r, labels: dict) -> str:
    if r is None or r["value"] is None:
        return ""
    v = r["value"]
    if isinstance(v, str):
        return labels.get(v, v)
    return fm.number(v, trim=True)
