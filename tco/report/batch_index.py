"""The batch index: one table across the clients of a batch, as JSON, workbook and PDF.

Every figure comes from one place: the client's own ``summary.json`` as written
(:class:`tco.batch.ScenarioOutcome` ``.summary``); nothing is recomputed here. Rows are
built once (:func:`index_data`, also written as ``index.json``); the workbook and the
report only format them, and the template formats nothing.

One row per client and compared truck: a scenario with a diesel baseline and one
electric truck gives one row; one with two candidate trucks gives two. A skipped scenario
gives one row with status ``error`` and its one-line error.

``index.json`` (``schema`` ``tco.batch.index/1.1``; ``schema_version`` ``"1.1"``, ``tool`` and
``generated`` as in summary.json and fleet.json)
-------------------------------------------------
``batch``, ``generated`` (ISO 8601, UTC), ``tool`` {name, version}, ``counts``
{scenarios, ok, errors}, ``rows`` [row], ``errors`` [{file, error}], ``totals``
{``by_currency`` [{currency, clients, truck_cheaper, present_value_difference,
avoided_t_co2e}], ``all_currencies`` {clients, truck_cheaper, avoided_t_co2e},
``left_out`` [file]}, ``cautions`` [str].

A row: ``file``, ``status`` (``ok``/``error``), ``error`` (one line or null), ``study``,
``slug``, ``currency`` (ISO 4217), ``units`` (since 1.1: ``metric``/``us``), ``truck``, ``truck_powertrain``, ``baseline``,
``baseline_powertrain``, ``compared_trucks`` (rows of this client),
``present_value_baseline``, ``present_value_truck``, ``present_value_difference``
(truck − baseline; negative: the truck costs less) [currency], ``truck_cheaper`` (bool,
null when equal or unknown), ``levelized_cost_per_km_baseline``,
``levelized_cost_per_km_truck`` [currency/km], ``simple_payback_year``,
``discounted_payback_year`` (year of service, null: not within the period), ``irr`` [-]
and ``irr_note``, ``avoided_t_co2e`` (well-to-wheel, location-based, over the period) [t],
``abatement_cost_per_t_co2e`` (location-based) [currency/t], ``battery_new``,
``battery_end_of_life`` (``yes``, ``with en-route charging``, ``no``; null for a truck
without a battery), ``depot_charger_ok``, ``feasible`` (the summary's overall verdict),
``probability_cheaper`` [-] and ``draws`` (null when no Monte Carlo ran), ``links``
{file name: path relative to the index}.

Totals are per currency only; money is never summed across currencies. Clients with more
than one compared truck are left out of the totals (their rows are alternatives, not
additions) and listed in ``left_out``.
"""
from __future__ import annotations

import math
import re
from datetime import datetime, timezone
from pathlib import Path

from markupsafe import Markup

from tco import __version__
from tco.errors import InputError
from tco.report import formatting as fm
from tco.report.context import fmt_money, fmt_number

__all__ = ["INDEX_SCHEMA", "TEMPLATE", "index_data", "index_rows", "currency_totals",
           "verdict_text", "build_index_context", "render_index_html", "write_index_workbook",
           "write_index"]

INDEX_SCHEMA = "tco.batch.index/1.1"
TEMPLATE = "batch_index.html.j2"
_CURRENCY = re.compile(r"^[A-Z]{3}$")

#: Link labels of the files a client's row points at, in display order.
LINKS = {"report.pdf": "report", "workbook.xlsx": "workbook", "report.html": "HTML",
         "summary.json": "summary.json"}

#: The first caution of the client reports, worded for the index; the others are shared.
_FIRST_CAUTION = (
    "This index gathers the client reports; each is a decision aid built on the inputs "
    "listed in its own assumptions table. It is not financial, tax or legal advice; have "
    "each purchase case checked by qualified advisers before any money is committed.")

READING = [
    "One row per client and compared truck. PV: present value of all costs over each "
    "client's analysis period at the client's own discount rate; the difference is the "
    "compared truck minus the baseline, so a negative difference means the compared truck "
    "costs less.",
    "Money is in each client's own currency (ISO 4217 code beside each figure). Totals are "
    "given per currency only and never summed across currencies.",
    "Emissions avoided are well-to-wheel and location-based over the analysis period; the "
    "abatement cost is the present value difference divided by the tonnes avoided.",
    "Feasible, new / end of life: whether the compared truck does the operating day on its "
    "battery when new and at the end of its life; 'en-route' means only with en-route "
    "charging.",
    "P(cheaper) is the share of Monte Carlo draws in which the compared truck costs less; "
    "'–' when the client's scenario ran no Monte Carlo.",
    "Each client's own report and workbook hold the inputs, assumptions and detail behind "
    "every figure here.",
]


# ---------------------------------------------------------------- rows (raw values) ----
def _get(d, *keys):
    for k in keys:
        if not isinstance(d, dict):
            return None
        d = d.get(k)
    return d


def _battery(feasibility: dict, life: str) -> str | None:
    b = _get(feasibility, "battery", life)
    if b is None:
        return None
    if b.get("ok"):
        return "yes"
    if b.get("ok_with_enroute"):
        return "with en-route charging"
    return "no"


def _links(outputs: list[str]) -> dict:
    by_name = {Path(p).name: p for p in outputs}
    return {name: by_name[name] for name in LINKS if name in by_name}


def _error_row(sc) -> dict:
    return {"file": sc.file, "status": "error", "error": sc.error, "study": sc.study,
            "slug": sc.slug, "links": {}}


def _row(sc, s: dict, c: dict, n: int) -> dict:
    truck, baseline = c["truck"], c["baseline"]
    trucks = _get(s, "cashflow", "trucks") or {}
    em = _get(s, "emissions", "comparison", truck) or {}
    feas = _get(s, "trucks", truck, "feasibility") or {}
    mc = _get(s, "uncertainty", "monte_carlo", truck)
    diff = c.get("present_value_difference")
    avoided = _get(em, "avoided_kg_total", "location")
    return {
        "file": sc.file, "status": "ok", "error": None,
        "study": _get(s, "scenario", "name"), "slug": _get(s, "scenario", "slug"),
        "currency": _get(s, "scenario", "currency"),
        "units": _get(s, "scenario", "units") or "metric",
        "truck": truck, "truck_powertrain": _get(trucks, truck, "powertrain"),
        "baseline": baseline, "baseline_powertrain": _get(trucks, baseline, "powertrain"),
        "compared_trucks": n,
        "present_value_baseline": _get(trucks, baseline, "present_value"),
        "present_value_truck": _get(trucks, truck, "present_value"),
        "present_value_difference": diff,
        "truck_cheaper": None if diff is None or diff == 0 else diff < 0,
        "levelized_cost_per_km_baseline": _get(trucks, baseline, "levelized_cost_per_km"),
        "levelized_cost_per_km_truck": _get(trucks, truck, "levelized_cost_per_km"),
        "simple_payback_year": c.get("simple_payback_year"),
        "discounted_payback_year": c.get("discounted_payback_year"),
        "irr": c.get("irr"), "irr_note": c.get("irr_note") or "",
        "avoided_t_co2e": None if avoided is None else avoided / 1000.0,
        "abatement_cost_per_t_co2e": _get(em, "abatement_cost_per_tonne", "location"),
        "battery_new": _battery(feas, "new"),
        "battery_end_of_life": _battery(feas, "end_of_life"),
        "depot_charger_ok": _get(feas, "depot_charger", "ok"),
        "feasible": feas.get("feasible"),
        "probability_cheaper": _get(mc, "probability_cheaper") if mc else None,
        "draws": _get(s, "uncertainty", "draws") if mc else None,
        "links": _links(sc.outputs),
    }


def index_rows(outcome) -> list[dict]:
    """The index rows of a batch, in file-name order (structure in the module docstring)."""
    rows = []
    for sc in outcome.scenarios:
        if not sc.ok:
            rows.append(_error_row(sc))
            continue
        comps = _get(sc.summary, "cashflow", "comparisons") or []
        rows += [_row(sc, sc.summary, c, len(comps)) for c in comps]
    return rows


def outcome_row(sc) -> dict:
    """The index row of one finished scenario (its first comparison), for the console."""
    if not sc.ok:
        return _error_row(sc)
    comps = _get(sc.summary, "cashflow", "comparisons") or []
    if not comps:
        return {"file": sc.file, "status": "ok", "study": _get(sc.summary, "scenario", "name"),
                "present_value_difference": None, "avoided_t_co2e": None}
    return _row(sc, sc.summary, comps[0], len(comps))


def currency_totals(rows: list[dict]) -> dict:
    """Totals per currency over clients with one compared truck.

    Money is summed within a currency only; clients and tonnes are also given across all
    currencies. Clients with several compared trucks are left out (alternatives, not
    additions).

    Returns
    -------
    dict
        ``by_currency`` [{currency, clients, truck_cheaper, present_value_difference
        [currency], avoided_t_co2e [t]}] sorted by currency, ``all_currencies`` {clients,
        truck_cheaper, avoided_t_co2e [t]}, ``left_out`` [file].
    """
    ok = [r for r in rows if r["status"] == "ok"]
    left_out = sorted({r["file"] for r in ok if r["compared_trucks"] != 1})
    counted = [r for r in ok if r["compared_trucks"] == 1]

    def total(group: list[dict]) -> dict:
        tonnes = [r["avoided_t_co2e"] for r in group if r["avoided_t_co2e"] is not None]
        return {"clients": len(group),
                "truck_cheaper": sum(1 for r in group if r["truck_cheaper"]),
                "avoided_t_co2e": math.fsum(tonnes) if tonnes else None}

    by_currency = []
    for cur in sorted({r["currency"] for r in counted}):
        group = [r for r in counted if r["currency"] == cur]
        money = [r["present_value_difference"] for r in group
                 if r["present_value_difference"] is not None]
        by_currency.append({"currency": cur, **total(group),
                            "present_value_difference": math.fsum(money) if money else None})
    return {"by_currency": by_currency, "all_currencies": total(counted), "left_out": left_out}


def index_data(outcome, generated: str | None = None) -> dict:
    """Everything the index shows, as plain JSON-able values (``index.json``)."""
    from tco.report.context import CAUTIONS

    rows = index_rows(outcome)
    return {
        "schema": INDEX_SCHEMA,
        # shared with summary.json and fleet.json: schema_version, tool, generated
        "schema_version": INDEX_SCHEMA.rsplit("/", 1)[1],
        "batch": outcome.name,
        "generated": generated or datetime.now(timezone.utc).replace(microsecond=0).isoformat(),
        "tool": {"name": "tco", "version": __version__},
        "counts": {"scenarios": len(outcome.scenarios), "ok": len(outcome.ok),
                   "errors": len(outcome.errors)},
        "rows": rows,
        "errors": [{"file": s.file, "error": s.error} for s in outcome.errors],
        "totals": currency_totals(rows),
        "cautions": [_FIRST_CAUTION] + list(CAUTIONS[1:]),
    }


# ---------------------------------------------------------------- formatting -----------
def _finite(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _n(x, digits: int = 0) -> str:
    return fmt_number(x, digits) if _finite(x) else "–"


def _money(x, cur: str, digits: int = 0) -> str:
    return fmt_money(x, cur, digits) if _finite(x) else "–"


def _pct(x, digits: int = 0) -> str:
    return fm.percent(x, digits)


def verdict_text(row: dict) -> str:
    """The row's verdict in two or three words, e.g. "Electric cheaper"."""
    if row["status"] != "ok":
        return "Skipped"
    diff = row["present_value_difference"]
    if not _finite(diff):
        return "–"
    if diff == 0:
        return "Same cost"
    cheaper = row["truck_cheaper"]
    tp, bp = row["truck_powertrain"], row["baseline_powertrain"]
    if tp and bp and tp != bp:
        return f"{(tp if cheaper else bp).capitalize()} cheaper"
    return f"{row['truck'] if cheaper else row['baseline']} cheaper"


def _payback(year) -> str:
    return f"year {year}" if year is not None else "not within the period"


def _irr(row: dict) -> str:
    from tco.report.formatting import irr_text

    return irr_text(row["irr"], None, row.get("simple_payback_year"), check_payback=True)


def _short_feasible(v: str | None) -> str:
    return {"yes": "yes", "with en-route charging": "en-route", "no": "no"}.get(v, "–")


def _counts_text(counts: dict) -> str:
    n, ok, bad = counts["scenarios"], counts["ok"], counts["errors"]
    return f"{n} scenario{'' if n == 1 else 's'}: {ok} reported, {bad} skipped"


# ---------------------------------------------------------------- report context -------
COLUMNS = ["Client", "Verdict", "PV baseline", "PV compared", "Difference",
           "Cost per distance, baseline → compared", "Payback", "IRR", "Avoided [t CO2e]",
           "Abatement [per t CO2e]", "Feasible, new / end of life", "P(cheaper)", "Reports"]
#: CSS class of each column: text columns left-aligned, figures right-aligned.
_CLASSES = ["client", "verdict-cell"] + ["num"] * (len(COLUMNS) - 3) + ["links"]
#: Files a row of the PDF and HTML index links to (summary.json is in index.json).
_REPORT_LINKS = ("report.pdf", "workbook.xlsx", "report.html")


def _cell(text: str, note: str = "", cls: str = "num") -> dict:
    return {"text": text, "note": note, "cls": cls}


def _per_distance_cell(r: dict) -> dict:
    """Cost per km, or per mile for a client whose study is in US units."""
    u = fm.Units(r.get("units") or "metric")
    per = u.per_dist / 1000.0  # km per display distance unit

    def one(x):
        return _n(None if x is None else x * per, 3)

    return _cell(f"{one(r['levelized_cost_per_km_baseline'])} → "
                 f"{one(r['levelized_cost_per_km_truck'])}", f"{r['currency']}/{u.dist}")


def _irr_cell(r: dict) -> dict:
    """IRR, or "n/a" with its reason in the cell's small print."""
    text = _irr(r)
    if text.startswith("n/a (") and text.endswith(")"):
        reason = text[len("n/a ("):-1]
        return _cell("n/a", "; ".join(x for x in (reason, r["irr_note"]) if x))
    return _cell(text, r["irr_note"])


def _context_row(r: dict) -> dict:
    client = _cell(r["study"] or "–", r["file"], "client")
    if r["status"] != "ok":
        return {"status": "error", "cells": [client], "error": r["error"] or "", "links": []}
    cur = r["currency"]
    feasible = "–"
    if r["battery_new"] is not None:
        feasible = (f"{_short_feasible(r['battery_new'])} / "
                    f"{_short_feasible(r['battery_end_of_life'])}")
    depot = "" if r["depot_charger_ok"] in (None, True) else "depot charger too small"
    prob = _cell(_pct(r["probability_cheaper"]),
                 f"{fm.count(r['draws'])} draws" if r["draws"] else "")
    cells = [
        client,
        _cell(verdict_text(r), f"{r['truck']} vs {r['baseline']}", "verdict-cell"),
        _cell(_money(r["present_value_baseline"], cur)),
        _cell(_money(r["present_value_truck"], cur)),
        _cell(_money(r["present_value_difference"], cur)),
        _per_distance_cell(r),
        _cell(_payback(r["simple_payback_year"])),
        _irr_cell(r),
        _cell(_n(r["avoided_t_co2e"])),
        _cell(_money(r["abatement_cost_per_t_co2e"], cur)),
        _cell(feasible, depot),
        prob,
    ]
    links = [{"label": LINKS[name], "href": path} for name, path in r["links"].items()
             if name in _REPORT_LINKS]
    return {"status": "ok", "cells": cells, "error": "", "links": links}


def _totals_table(totals: dict) -> dict:
    rows = [[t["currency"], _n(t["clients"]), _n(t["truck_cheaper"]),
             _money(t["present_value_difference"], t["currency"]), _n(t["avoided_t_co2e"])]
            for t in totals["by_currency"]]
    a = totals["all_currencies"]
    if len(totals["by_currency"]) > 1:
        rows.append(["All currencies", _n(a["clients"]), _n(a["truck_cheaper"]),
                     "not summed across currencies", _n(a["avoided_t_co2e"])])
    note = ("Sums of the rows above, one currency at a time.")
    if totals["left_out"]:
        note += (" Left out: clients comparing more than one truck ("
                 + ", ".join(totals["left_out"]) + "), whose rows are alternatives.")
    return {"columns": ["Currency", "Clients", "Compared truck cheaper",
                        "Sum of differences", "Avoided [t CO2e]"], "rows": rows, "note": note}


def build_index_context(data: dict) -> dict:
    """The index report context: every figure of :func:`index_data` as text.

    Structure: ``meta`` {title, batch, date, version, counts}, ``columns`` [{label,
    cls}], ``rows`` [{status, cells [{text, note, cls}], error, links [{label, href}]}],
    ``error_colspan`` (int), ``totals`` {columns, rows, note}, ``errors`` [{file, error}],
    ``reading`` [str], ``cautions`` [str]. Link targets are relative paths made of
    validated slugs and fixed file names.
    """
    return {
        "meta": {"title": f"Batch index: {data['batch']}", "batch": data["batch"],
                 "date": data["generated"][:10], "version": data["tool"]["version"],
                 "counts": _counts_text(data["counts"])},
        "columns": [{"label": c, "cls": k} for c, k in zip(COLUMNS, _CLASSES)],
        "rows": [_context_row(r) for r in data["rows"]],
        "error_colspan": len(COLUMNS) - 1,
        "totals": _totals_table(data["totals"]),
        "errors": [{"file": e["file"], "error": e["error"] or ""} for e in data["errors"]],
        "reading": list(READING),
        "cautions": list(data["cautions"]),
    }


def render_index_html(context: dict, *, for_print: bool) -> str:
    """Render the index to one standalone HTML string (A4 landscape when printed).

    The stylesheet ``report.css`` is inlined as in the client reports; every value is
    escaped (the environment of :func:`tco.report.html.environment` has autoescape on).
    """
    import functools

    from tco.report.html import STYLESHEET, environment, nobreak
    from tco.resources import templates_dir

    css = (templates_dir() / STYLESHEET).read_text(encoding="utf-8")
    env = environment()
    env.filters["nobreak"] = functools.partial(nobreak, hard=for_print)  # as the report
    return env.get_template(TEMPLATE).render(
        **context, css=Markup(css), for_print=for_print)


# ---------------------------------------------------------------- workbook -------------
SHEETS = ("Index", "Totals", "Errors", "Notes")

#: Index sheet columns: (header, row key or None, kind, width). Kinds choose the format.
_WB_COLUMNS = [
    ("File", "file", "text", 22), ("Study", "study", "text", 36),
    ("Status", "status", "text", 8), ("Currency", "currency", "text", 9),
    ("Compared truck", "truck", "text", 20), ("Baseline truck", "baseline", "text", 20),
    ("Verdict", None, "verdict", 18),
    ("Present value, baseline", "present_value_baseline", "money", 16),
    ("Present value, compared", "present_value_truck", "money", 16),
    ("Difference, compared − baseline", "present_value_difference", "money", 16),
    ("Cost per km, baseline", "levelized_cost_per_km_baseline", "per_km", 14),
    ("Cost per km, compared", "levelized_cost_per_km_truck", "per_km", 14),
    ("Simple payback [year of service]", "simple_payback_year", "year", 12),
    ("IRR of the extra investment", "irr", "irr", 11),
    ("Avoided [t CO2e]", "avoided_t_co2e", "tonnes", 12),
    ("Abatement cost [per t CO2e]", "abatement_cost_per_t_co2e", "per_t", 14),
    ("Battery new", "battery_new", "text", 14),
    ("Battery end of life", "battery_end_of_life", "text", 14),
    ("Depot charger suffices", "depot_charger_ok", "yesno", 11),
    ("P(compared cheaper)", "probability_cheaper", "share", 11),
    ("Report", "report.pdf", "link", 11), ("Workbook", "workbook.xlsx", "link", 11),
    ("Error", "error", "text", 60),
]


def _money_format(cur: str | None, suffix: str = "", digits: int = 0) -> str:
    from tco.report import workbook_base as wbb

    base = "#,##0" + ("." + "0" * digits if digits else "")
    if not cur or not _CURRENCY.match(cur):  # our own validated code; anything else: plain
        return wbb.MONEY if not digits else f"{base};[Red]-{base}"
    unit = f'" {cur}{suffix}"'
    return f"{base}{unit};[Red]-{base}{unit}"


def _write_index_sheet(ws, rows: list[dict]) -> None:
    from openpyxl.styles import Alignment
    from openpyxl.utils import get_column_letter

    from tco.report import workbook_base as wbb

    wbb.header_row(ws, 1, [c[0] for c in _WB_COLUMNS])
    wbb.set_widths(ws, {i + 1: c[3] for i, c in enumerate(_WB_COLUMNS)})
    ws.row_dimensions[1].height = 45
    for k, r in enumerate(rows):
        row = k + 2
        cur = r.get("currency")
        for j, (_, key, kind, _) in enumerate(_WB_COLUMNS):
            cell = ws.cell(row=row, column=j + 1)
            if kind == "link":
                target = r["links"].get(key)
                if target:
                    wbb.safe_text(cell, LINKS[key])
                    cell.hyperlink = target  # relative to the index: slug/file
                    cell.style = "Hyperlink"
                continue
            if kind == "verdict":
                wbb.safe_text(cell, verdict_text(r))
                continue
            value = r.get(key)
            if r["status"] != "ok" and kind != "text":
                continue
            if kind == "text":
                wbb.safe_text(cell, value)
            elif kind == "money":
                wbb.write_value(cell, value, _money_format(cur))
            elif kind == "per_km":
                wbb.write_value(cell, value, _money_format(cur, "/km", 3))
            elif kind == "per_t":
                wbb.write_value(cell, value, _money_format(cur, "/t"))
            elif kind == "year":
                if value is None:
                    wbb.safe_text(cell, "not within the period")
                else:
                    wbb.write_value(cell, value, wbb.YEAR)
            elif kind == "irr":
                if _finite(value):
                    wbb.write_value(cell, value, wbb.PERCENT)
                else:
                    wbb.safe_text(cell, r.get("irr_note") or "none")
            elif kind == "tonnes":
                wbb.write_value(cell, value, wbb.MASS)
            elif kind == "share":
                wbb.write_value(cell, value, "0%")
            elif kind == "yesno":
                wbb.safe_text(cell, None if value is None else ("yes" if value else "no"))
        ws.cell(row=row, column=len(_WB_COLUMNS)).alignment = Alignment(wrap_text=True,
                                                                         vertical="top")
    last = get_column_letter(len(_WB_COLUMNS))
    ws.auto_filter.ref = f"A1:{last}{max(len(rows) + 1, 2)}"
    wbb.freeze(ws, "C2")  # header row and the file and study columns stay in view


def _write_totals_sheet(ws, totals: dict) -> None:
    from tco.report import workbook_base as wbb

    wbb.header_row(ws, 1, ["Currency", "Clients", "Compared truck cheaper",
                           "Sum of differences, compared − baseline", "Avoided [t CO2e]"])
    wbb.set_widths(ws, {"A": 16, "B": 10, "C": 14, "D": 22, "E": 16})
    wbb.freeze(ws, "A2")
    row = 2
    for t in totals["by_currency"]:
        wbb.safe_text(ws.cell(row=row, column=1), t["currency"])
        wbb.write_value(ws.cell(row=row, column=2), t["clients"], wbb.INTEGER)
        wbb.write_value(ws.cell(row=row, column=3), t["truck_cheaper"], wbb.INTEGER)
        wbb.write_value(ws.cell(row=row, column=4), t["present_value_difference"],
                        _money_format(t["currency"]))
        wbb.write_value(ws.cell(row=row, column=5), t["avoided_t_co2e"], wbb.MASS)
        row += 1
    a = totals["all_currencies"]
    if len(totals["by_currency"]) > 1:
        wbb.safe_text(ws.cell(row=row, column=1), "All currencies")
        wbb.write_value(ws.cell(row=row, column=2), a["clients"], wbb.INTEGER)
        wbb.write_value(ws.cell(row=row, column=3), a["truck_cheaper"], wbb.INTEGER)
        wbb.safe_text(ws.cell(row=row, column=4), "not summed across currencies")
        wbb.write_value(ws.cell(row=row, column=5), a["avoided_t_co2e"], wbb.MASS)
        row += 1
    note = "Money is summed within one currency only."
    if totals["left_out"]:
        note += (" Left out: clients comparing more than one truck ("
                 + ", ".join(totals["left_out"]) + "), whose rows are alternatives.")
    wbb.safe_text(ws.cell(row=row + 1, column=1), note)


def _write_errors_sheet(ws, errors: list[dict]) -> None:
    from openpyxl.styles import Alignment

    from tco.report import workbook_base as wbb

    wbb.header_row(ws, 1, ["File", "Error"])
    wbb.set_widths(ws, {"A": 26, "B": 110})
    wbb.freeze(ws, "A2")
    for k, e in enumerate(errors):
        wbb.safe_text(ws.cell(row=k + 2, column=1), e["file"])
        wbb.safe_text(ws.cell(row=k + 2, column=2), e["error"]).alignment = Alignment(
            wrap_text=True, vertical="top")
    if not errors:
        wbb.safe_text(ws.cell(row=2, column=1), "No scenario was skipped.")


def _write_notes_sheet(ws, data: dict) -> None:
    from openpyxl.styles import Alignment, Font

    from tco.report import workbook_base as wbb

    wrap = Alignment(wrap_text=True, vertical="top")
    wbb.set_widths(ws, {"A": 110})
    wbb.safe_text(ws.cell(row=1, column=1), f"Batch index: {data['batch']}").font = \
        Font(bold=True, size=14)
    wbb.safe_text(ws.cell(row=2, column=1),
                  f"{data['generated']} · tco {data['tool']['version']} · "
                  + _counts_text(data["counts"]))
    row = 4
    for title, lines in (("Reading the index", READING), ("Cautions", data["cautions"])):
        wbb.safe_text(ws.cell(row=row, column=1), title).font = Font(bold=True)
        row += 1
        for line in lines:
            wbb.safe_text(ws.cell(row=row, column=1), line).alignment = wrap
            row += 1
        row += 1


def write_index_workbook(data: dict, path) -> None:
    """Write ``index.xlsx``: Index, Totals, Errors and Notes sheets.

    Values only (no formulas): every figure is the one in the client's summary.json.
    All text goes through :func:`tco.report.workbook_base.safe_text`, so a study name
    such as ``=HYPERLINK(...)`` stays text; links point at each client's files by a
    relative path (``slug/report.pdf``), so the folder can be moved whole.
    """
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.title = SHEETS[0]
    _write_index_sheet(ws, data["rows"])
    _write_totals_sheet(wb.create_sheet(SHEETS[1]), data["totals"])
    _write_errors_sheet(wb.create_sheet(SHEETS[2]), data["errors"])
    _write_notes_sheet(wb.create_sheet(SHEETS[3]), data)
    wb.save(str(path))


# ---------------------------------------------------------------- all files ------------
def write_index(outcome, stage: Path, json_only: bool = False) -> list[str]:
    """Write the index files into ``stage``; return their names.

    ``index.json`` always; ``index.xlsx``, ``index.html`` and ``index.pdf`` unless
    ``json_only``.
    """
    from tco.report.summary import dumps

    data = index_data(outcome)
    (stage / "index.json").write_text(dumps(data), encoding="utf-8")
    names = ["index.json"]
    if json_only:
        return names
    from tco.report.pdf import write_html_and_pdf

    write_index_workbook(data, stage / "index.xlsx")
    context = build_index_context(data)
    write_html_and_pdf(lambda for_print: render_index_html(context, for_print=for_print),
                       stage, "index", "the batch index")
    return names + ["index.xlsx", "index.html", "index.pdf"]
