"""Tests of the fleet writers: tco/report/fleet_summary.py and tco/report/fleet_report.py.

The demo fleet (inputs/fleet/, invented figures) is evaluated once per module with one
process. Checks:

* ``fleet.json`` is strict JSON with the schema id, the input fingerprints (SHA-256 by
  :mod:`hashlib`, FIPS 180-4) and SI converted to the units in its key names (1 km =
  1000 m, 1 kWh = 3.6 MJ: SI Brochure, 9th ed., Table 8); the plan's present-value saving
  equals numpy-financial's ``npv`` of the yearly savings (reference library); the
  depot's interval means equal pandas ``resample(...).mean()`` (reference library) and
  the shares follow the sharing rule stated in :mod:`tco.depot`.
* The PDF (pypdf text) shows every key figure exactly as fleet.json holds it (one source
  for each figure), runs "Page i of n" and the title on every page after the cover, and
  prints the wide tables on landscape ISO 216 A4 pages (595.28 x 841.89 pt).
* The workbook's formulas, recalculated by LibreOffice (tests/recalc.py), give the model's
  values to 1e-9 relative; without LibreOffice their structure and literal inputs are
  checked.
* Hostile text (vehicle ids and routes that are markup, file links or formula triggers)
  stays literal in the HTML, PDF and workbook, and nothing outside is fetched or
  embedded.
* A failure mid-way leaves an earlier output folder as it was.
"""
from __future__ import annotations

import csv
import hashlib
import json
import math
import re
import shutil
from pathlib import Path

import numpy as np
import numpy_financial as npf
import openpyxl
import pandas as pd
import pypdf
import pytest
from recalc import needs_soffice, recalculate

from tco.errors import InputError
from tco.report import fleet_report
from tco.report.fleet_report import (FILES, SHEETS, build_fleet_workbook,
                                     write_fleet_outputs)
from tco.report.fleet_summary import (SCHEMA, build_fleet_summary, clock, interval_means)
from tco.report import pdf as pdf_module
from tco.report.pdf import PdfResult

REL = 1e-9
CREATED = "2030-01-02T03:04:05+00:00"
# ISO 216 A4 in PostScript points (1 pt = 1/72 in): 210 mm x 297 mm.
A4 = (210 / 25.4 * 72, 297 / 25.4 * 72)


def _squash(text: str) -> str:
    """Text without whitespace: PDF text extraction breaks lines where the layout wraps."""
    return re.sub(r"\s+", "", text)


def _close(a, b, rel=REL) -> bool:
    return math.isclose(float(a), float(b), rel_tol=rel, abs_tol=rel * 1e-3)


# --------------------------------------------------------------------------- fixtures
def _evaluate(base_path: Path, fleet_path: Path):
    from tco.fleet import evaluate_fleet, read_fleet
    from tco.scenario import load_scenario

    return evaluate_fleet(load_scenario(base_path), read_fleet(fleet_path), fleet_path,
                          jobs=1)


@pytest.fixture(scope="module")
def fleet():
    from tco.resources import inputs_dir

    folder = inputs_dir() / "fleet"
    return _evaluate(folder / "base.toml", folder / "fleet.csv")


@pytest.fixture(scope="module")
def summary(fleet):
    return build_fleet_summary(fleet, created=CREATED)


class _Spy:
    """Wraps render_pdf to keep its PdfResult (blocked URLs, warnings)."""

    def __init__(self):
        self.results: list[PdfResult] = []
        self._real = pdf_module.render_pdf

    def __call__(self, html, path):
        r = self._real(html, path)
        self.results.append(r)
        return r


def _write_all(result, out: Path):
    spy = _Spy()
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(pdf_module, "render_pdf", spy)
        paths = write_fleet_outputs(result, out)
    folder = out / result.base.slug
    reader = pypdf.PdfReader(str(folder / "fleet-report.pdf"))
    return {"paths": paths, "folder": folder, "pdf": spy.results[-1], "reader": reader,
            # a figure's no-break spaces (tco.report.html.nobreak) read as plain spaces
            "pages": [p.extract_text().replace("\xa0", " ") for p in reader.pages],
            "json": json.loads((folder / "fleet.json").read_text(encoding="utf-8")),
            "html": (folder / "fleet-report.html").read_text(encoding="utf-8")}


@pytest.fixture(scope="module")
def written(fleet, tmp_path_factory):
    return _write_all(fleet, tmp_path_factory.mktemp("fleet-out"))


@pytest.fixture(scope="module")
def book(fleet, summary, tmp_path_factory):
    path = tmp_path_factory.mktemp("fleet-book") / "fleet-workbook.xlsx"
    build_fleet_workbook(fleet, summary).save(path)
    return path


# --------------------------------------------------------------------------- fleet.json
def _reject(name):
    raise ValueError(f"non-standard JSON constant {name}")


def test_summary_is_strict_json_with_schema_and_fingerprints(fleet, summary):
    from tco.report.fleet_summary import dumps

    text = dumps(summary)
    back = json.loads(text, parse_constant=_reject)  # NaN / Infinity would raise
    assert back == summary
    assert summary["schema"] == SCHEMA == "tco.fleet.summary/1.2"
    assert summary["created"] == CREATED
    # shared with summary.json and the batch index.json (added beside the old keys)
    assert summary["schema_version"] == "1.2" and summary["generated"] == CREATED
    assert summary["tool"]["name"] == "tco"
    inputs = summary["inputs"]
    assert inputs["base_fingerprint_sha256"] == fleet.base.fingerprint
    # FIPS 180-4 SHA-256 of the fleet file's bytes, computed by hashlib independently
    assert inputs["fleet_file_sha256"] == hashlib.sha256(
        Path(fleet.fleet_file).read_bytes()).hexdigest()
    assert summary["currency"] == fleet.currency == "EUR"
    assert summary["charging_rule"] == fleet.rule
    assert summary["plan"]["vehicles"] == fleet.plan
    assert [r["vehicle"] for r in summary["routes"]] == list(fleet.routes["vehicle"])
    assert [r["vehicle"] for r in summary["order"]] == list(fleet.order["vehicle"])
    assert len(summary["yearly"]) == len(fleet.yearly)


def test_summary_units_are_those_in_the_key_names(fleet, summary):
    """SI Brochure (9th ed.) Table 8: 1 kWh = 3.6 MJ; 1 km = 1000 m; 1 t = 1000 kg."""
    for rec, (_, row) in zip(summary["routes"], fleet.routes.iterrows()):
        assert rec["annual_distance_km"] == pytest.approx(row["annual_distance_m"] / 1000,
                                                          rel=1e-15)
        assert rec["grid_kWh_per_year"] == pytest.approx(row["grid_energy_J"] / 3.6e6,
                                                         rel=1e-15)
        assert rec["diesel_L_per_year"] == pytest.approx(row["diesel_m3"] * 1000, rel=1e-15)
        assert rec["peak_contribution_kW"] == pytest.approx(
            row["peak_contribution_W"] / 1000, rel=1e-15)
        assert rec["pv_saving"] == -rec["pv_difference"]
        assert rec["levelized_current_per_km"] == pytest.approx(
            row["levelized_current_per_m"] * 1000, rel=1e-15)
    for rec, (_, row) in zip(summary["yearly"], fleet.yearly.iterrows()):
        assert rec["avoided_t"] == pytest.approx(row["avoided_kg"] / 1000, rel=1e-15)
        assert rec["peak_kW"] == pytest.approx(row["peak_power_W"] / 1000, rel=1e-15)


def test_plan_saving_equals_npv_of_the_yearly_savings(summary):
    """The plan's present-value saving (sum over its routes) equals the present value of
    the fleet's yearly savings by numpy-financial (``npf.npv`` discounts year 0 by 1)."""
    plan = summary["plan"]
    routes = [r for r in summary["routes"] if r["in_plan"]]
    assert plan["pv_saving"] == pytest.approx(sum(r["pv_saving"] for r in routes), rel=1e-12)
    saving = [r["saving"] for r in summary["yearly"]]
    rate = summary["study"]["discount_rate"]
    assert npf.npv(rate, saving) == pytest.approx(plan["pv_saving"], rel=1e-9)
    assert summary["yearly_totals"]["pv_saving"] == pytest.approx(npf.npv(rate, saving),
                                                                  rel=1e-12)
    # the plan's tonnes avoided are physical tonnes: the sum of the yearly tonnes
    avoided = [r["avoided_t"] for r in summary["yearly"]]
    assert plan["avoided_t"] == pytest.approx(sum(avoided), rel=1e-9)
    # the abatement cost divides by discounted tonnes by default (emissions.discount_tonnes):
    # the yearly tonnes discounted like the savings (numpy_financial.npv, year 0 first)
    assert plan["tonnes_discounted"]
    assert plan["abatement_cost_per_t"] == pytest.approx(
        -plan["pv_saving"] / npf.npv(rate, avoided), rel=1e-9)
    cum = np.cumsum(saving)
    assert [r["cumulative_saving"] for r in summary["yearly"]] == pytest.approx(cum, rel=1e-12)
    first = int(np.flatnonzero(cum >= 0)[0])
    assert plan["payback_year"] == summary["yearly"][first]["year"]
    assert plan["routes_feasible"] == sum(r["feasible"] for r in summary["routes"])


def test_depot_shares_follow_the_stated_rule(fleet, summary):
    """tco/depot.py: fixed costs by charger occupancy, demand charge by contribution to
    the coincident peak; the peak is the highest 15-minute mean (common practice)."""
    dep = summary["depot"]["plan"]
    trucks = dep["trucks"]
    assert [t["vehicle"] for t in trucks] == [v for v in fleet.plan
                                              if v in {t["vehicle"] for t in trucks}]
    occ = np.array([t["occupancy_h"] for t in trucks])
    con = np.array([t["peak_contribution_kW"] for t in trucks])
    assert [t["cost_share"] for t in trucks] == pytest.approx(occ / occ.sum(), rel=1e-12)
    assert [t["demand_share"] for t in trucks] == pytest.approx(con / dep["peak_kW"],
                                                                rel=1e-9)
    assert sum(t["cost_share"] for t in trucks) == pytest.approx(1.0, rel=1e-12)
    assert max(dep["power_kW_by_interval"]) == pytest.approx(dep["peak_kW"], rel=1e-12)
    assert len(dep["power_kW_by_interval"]) == 96
    # energy per day: the interval means integrated over the day
    assert sum(dep["power_kW_by_interval"]) * 0.25 == pytest.approx(
        dep["energy_kWh_per_day"], rel=1e-9)
    # the routes table carries the same shares as the depot schedule
    by_vehicle = {r["vehicle"]: r for r in summary["routes"]}
    for t in trucks:
        assert by_vehicle[t["vehicle"]]["depot_cost_share"] == t["cost_share"]
        assert by_vehicle[t["vehicle"]]["arrive"] == t["arrive"]


def test_interval_means_equal_pandas_resample():
    """Reference library: pandas ``Series.resample('15min').mean()`` over a 1-minute day."""
    rng = np.random.default_rng(3)
    power = rng.uniform(0, 350e3, 1440)
    idx = pd.date_range("2030-01-01", periods=1440, freq="min")
    want = pd.Series(power, index=idx).resample("15min").mean().to_numpy()
    assert interval_means(power, 60.0, 900.0) == pytest.approx(want, rel=1e-12)
    two = interval_means(np.vstack([power, 2 * power]), 60.0, 3600.0)
    assert two.shape == (2, 24)
    assert two[1] == pytest.approx(2 * two[0], rel=1e-12)
    with pytest.raises(ValueError):
        interval_means(power, 60.0, 90.0)


def test_clock_times():
    assert clock(0.0) == "00:00"
    assert clock(19.5 * 3600) == "19:30"
    assert clock(86400.0 + 60.0) == "00:01"  # wraps to the next day
    assert clock(None) is None and clock(float("nan")) is None


def test_depot_chart_starts_in_the_quietest_stretch():
    from tco.report.fleet_report import _quiet_middle

    night = np.zeros(24)
    night[[18, 19, 20, 21, 22, 23, 0, 1, 2, 3, 4]] = 100.0  # charging 18:00-05:00
    assert _quiet_middle(night) == 11  # quiet 05:00-17:00: its middle hour
    assert _quiet_middle(np.zeros(24)) == 0


# --------------------------------------------------------------------------- writer
def test_json_only_writes_only_fleet_json(fleet, tmp_path):
    paths = write_fleet_outputs(fleet, tmp_path, json_only=True)
    folder = tmp_path / fleet.base.slug
    assert paths == [folder / "fleet.json"]
    assert sorted(p.name for p in folder.iterdir()) == ["fleet.json"]
    assert [p for p in tmp_path.iterdir() if p.name.startswith(".")] == []


@pytest.mark.slow
def test_demo_fleet_renders_all_outputs(written, fleet):
    folder = written["folder"]
    assert folder.name == fleet.base.slug == "demo-fleet"
    assert [p.name for p in written["paths"]] == ["fleet.json", "fleet-report.html",
                                                  "fleet-report.pdf", "fleet-workbook.xlsx"]
    assert sorted(FILES) == sorted(p.name for p in folder.iterdir())
    pdf = written["pdf"]
    assert pdf.blocked == [] and pdf.warnings == []
    assert pdf.pages == len(written["reader"].pages) >= 6
    assert written["json"]["schema"] == SCHEMA


# A figure as a reader sees it: digits grouped by commas in threes, no decimals, then the
# unit. Written out here, not taken from the report's own format strings.
_WHOLE = r"(-?\d{1,3}(?:,\d{3})*)"


def _read_whole(text: str) -> int:
    """'1,234,567' → 1234567 (the reader's reading of a shown whole number)."""
    return int(text.replace(",", ""))


def _key_figure_lines(s: dict) -> list[tuple[str, float | None]]:
    """For each key figure of fleet.json: a hand-written pattern of its line on the summary
    page, and the fleet.json value its number must round from (None: exact text)."""
    p, cur, dep = s["plan"], s["currency"], s["depot"]
    return [(rf"{p['routes_feasible']} of {p['routes_total']}", None),
            (rf"{_WHOLE} {cur}", p["pv_saving"]),
            (rf"{_WHOLE} t CO2e", p["avoided_t"]),
            (rf"{_WHOLE} {cur}/t CO2e", p["abatement_cost_per_t"]),
            (rf"{p['chargers']} × {_WHOLE} kW", dep["charger_kW"]),
            (rf"{_WHOLE} kW", p["peak_kW"]),
            (rf"{_WHOLE} kWh", dep["plan"]["energy_kWh_per_day"]),
            (rf"year {p['payback_year']}", None)]


def test_key_figures_read_as_written_by_hand(fleet, summary):
    """Key figures of hand-set fleet.json values, as the exact text a reader should see."""
    import copy

    from tco.report.fleet_report import build_fleet_context

    s = copy.deepcopy(summary)
    s["currency"] = "EUR"
    s["plan"].update(routes_feasible=7, routes_total=9, pv_saving=1_234_567.49,
                     avoided_t=2_345.5, abatement_cost_per_t=-61.4, chargers=3, peak_kW=987.6,
                     payback_year=4)
    s["depot"]["charger_kW"] = 150.0
    s["depot"]["plan"]["energy_kWh_per_day"] = 12_345.4
    values = [k["value"] for k in build_fleet_context(fleet, s)["key_figures"]]
    assert values == ["7 of 9", "1,234,567 EUR", "2,346 t CO2e", "-61 EUR/t CO2e",
                      "3 × 150 kW", "988 kW", "12,345 kWh", "year 4"], values


def test_money_routes_from_the_order_by_hand():
    """Hand-written order (by saving): A +100, B +50, C −10 (feasible), D +80 (not
    feasible, last). The routes that save money are A and B; together the order's
    cumulative saving after B, 150; C loses money; D is not counted."""
    from tco.report.fleet_summary import money_routes

    order = [
        {"vehicle": "A", "feasible": True, "pv_saving": 100.0, "cumulative_pv_saving": 100.0},
        {"vehicle": "B", "feasible": True, "pv_saving": 50.0, "cumulative_pv_saving": 150.0},
        {"vehicle": "C", "feasible": True, "pv_saving": -10.0, "cumulative_pv_saving": 140.0},
        {"vehicle": "D", "feasible": False, "pv_saving": 80.0, "cumulative_pv_saving": 220.0},
    ]
    assert money_routes(order) == {"routes_saving_money": 2, "vehicles_losing_money": ["C"],
                                   "pv_saving_money_routes": 150.0}
    assert money_routes(order[:2])["vehicles_losing_money"] == []


def test_verdict_names_the_routes_that_lose_money(fleet, summary):
    """Hand-set fleet.json values, read as the exact sentence a reader should see."""
    import copy

    from tco.report.fleet_report import build_fleet_context

    s = copy.deepcopy(summary)
    s["currency"] = "EUR"
    s["plan"].update(routes_feasible=3, routes_total=4, pv_saving=1_000.0, avoided_t=20.0,
                     chargers=1, peak_kW=100.0, routes_saving_money=2,
                     vehicles_losing_money=["MF-9"], pv_saving_money_routes=1_234.4)
    s["depot"]["charger_kW"] = 100.0
    s["transition"] = None
    text = build_fleet_context(fleet, s)["verdict"]
    assert text.endswith(" 1 of them (MF-9) cost more electric than diesel; the 2 that save "
                         "money save 1,234 EUR together (electrification order)."), text
    s["plan"]["vehicles_losing_money"] = []
    assert "cost more electric" not in build_fleet_context(fleet, s)["verdict"]


def test_demo_verdict_counts_agree_with_the_routes(summary):
    """fleet.json's new plan keys agree with its own routes table: the losing vehicles
    are the feasible routes whose candidate's present value is above the current one."""
    p = summary["plan"]
    losing = sorted(r["vehicle"] for r in summary["routes"]
                    if r["feasible"] and r["pv_difference"] > 0)
    assert sorted(p["vehicles_losing_money"]) == losing
    assert p["routes_saving_money"] + len(losing) == p["routes_feasible"]


@pytest.mark.slow
def test_pdf_shows_key_figures_exactly_as_in_fleet_json(written):
    s = written["json"]
    pages = written["pages"]
    # each key figure's value is a line of its own on the summary page (its card), not
    # only somewhere in the verdict's running text; read back, its number is fleet.json's
    # rounded to a whole unit (within half a unit)
    lines = [ln.strip() for ln in pages[1].splitlines()]
    for pattern, value in _key_figure_lines(s):
        found = [m for ln in lines if (m := re.fullmatch(pattern, ln))]
        assert found, pattern
        if value is not None:
            assert any(abs(_read_whole(m.group(1)) - value) <= 0.5 for m in found), \
                (pattern, value, [m.group(0) for m in found])
    cover = _squash(pages[0])
    p = s["plan"]
    for pattern, value in ((rf"{p['routes_feasible']}of{p['routes_total']}routes", None),
                           (rf"{_WHOLE}{s['currency']}", p["pv_saving"]),
                           (rf"{_WHOLE}tCO2e", p["avoided_t"]),
                           (rf"{p['chargers']}chargers", None),
                           (rf"{_WHOLE}kW", p["peak_kW"])):
        found = list(re.finditer(pattern, cover))
        assert found, pattern
        if value is not None:
            # the squashed cover runs numbers into the text before them: the figure is the
            # one whose last digits read the rounded value
            assert any(m.group(1).replace(",", "").endswith(str(round(value)).lstrip("-"))
                       for m in found), (pattern, value)
    assert _squash(s["study"]["name"]) in cover
    assert s["inputs"]["base_fingerprint_sha256"][:16] in cover
    assert s["inputs"]["fleet_file_sha256"][:16] in cover
    text = "\n".join(pages)
    # tables: each route's saving and the yearly present value, as in fleet.json: read
    # back as whole numbers with a thousands comma (within half a unit), and each truck's
    # depot cost share as a percentage with one decimal (0.3333 reads 33.3 %, within 0.05)
    whole = [_read_whole(m.group(1)) for m in
             re.finditer(r"(?<![\d,.])(-?\d{1,3}(?:,\d{3})*)(?![\d,.])", text)]

    def shown(value):
        return any(abs(x - value) <= 0.5 for x in whole)

    for r in s["order"]:
        assert shown(r["pv_saving"]) and shown(r["cumulative_pv_saving"]), r["vehicle"]
    assert shown(s["yearly_totals"]["pv_saving"])
    shares = [float(m.group(1)) for m in
              re.finditer(r"(?<![\d.])(\d{1,3}\.\d) ?%", text)]
    for t in s["depot"]["plan"]["trucks"]:
        assert any(abs(x - 100 * t["cost_share"]) <= 0.05 + 1e-9 for x in shares), t
    # remedies of the infeasible route, and the cautions
    for r in s["order"]:
        for remedy in r["remedies"]:
            assert _squash(remedy) in _squash(text)
    for needle in ("not financial, tax or legal advice", "ISO 14083",
                   "licensed electricians", "local law"):
        assert _squash(needle) in _squash(text)


@pytest.mark.slow
def test_pdf_pages_headers_and_orientation(written):
    pages, reader = written["pages"], written["reader"]
    n = len(pages)
    title = written["json"]["study"]["name"]
    landscape = 0
    for i, (text, page) in enumerate(zip(pages, reader.pages), start=1):
        assert f"Page {i} of {n}" in text
        if i > 1:
            assert _squash(title) in _squash(text)
        w, h = float(page.mediabox.width), float(page.mediabox.height)
        assert (w, h) == pytest.approx(A4, abs=0.01) or (h, w) == pytest.approx(A4, abs=0.01)
        landscape += w > h
    assert landscape >= 1  # the order, routes and yearly tables print across the page


@pytest.mark.slow
def test_html_is_standalone_and_shows_the_same_figures(written):
    from test_report_safety import _Parse

    html = written["html"]
    parsed = _Parse()
    parsed.feed(html)
    refs = [v for _, k, v in parsed.attrs if k in ("src", "href")]
    assert len(refs) == 2 and all(v.startswith("data:image/svg+xml;base64,") for v in refs)
    assert "link" not in parsed.tags and "script" not in parsed.tags
    assert "http://" not in html and "file:" not in html
    # the key figures as the PDF's summary page shows them (read back and checked against
    # fleet.json in test_pdf_shows_key_figures_exactly_as_in_fleet_json)
    lines = [ln.strip() for ln in written["pages"][1].splitlines()]
    for pattern, _ in _key_figure_lines(written["json"]):
        shown = next(ln for ln in lines if re.fullmatch(pattern, ln))
        assert shown in html, shown


# --------------------------------------------------------------------------- workbook
def test_workbook_structure_formulas_and_literal_inputs(book, summary):
    wb = openpyxl.load_workbook(book)
    assert wb.sheetnames == list(SHEETS)
    routes, order, yearly, depot = wb["Routes"], wb["Order"], wb["Yearly"], wb["Depot"]
    assert routes.freeze_panes == "B2" and yearly.freeze_panes == "C2"
    heads = [c.value for c in routes[1]]
    assert "PV saving [EUR]" in heads and "Avoided [t CO2e]" in heads
    col = {h: i + 1 for i, h in enumerate(heads)}
    # openpyxl stores numbers with 15 significant digits (xlsx number text), hence 1e-14
    lit = lambda v: pytest.approx(v, rel=1e-14)  # noqa: E731
    for i, r in enumerate(summary["routes"]):
        row = 2 + i
        assert routes.cell(row, col["Vehicle"]).value == r["vehicle"]
        assert routes.cell(row, col["PV current [EUR]"]).value == lit(r["pv_current"])
        assert routes.cell(row, col["PV candidate [EUR]"]).value == lit(r["pv_candidate"])
        assert routes.cell(row, col["PV saving [EUR]"]).value == f"=N{row}-O{row}"
        # physical tonnes: current minus candidate, live
        assert routes.cell(row, col["Avoided [t CO2e]"]).value == f"=U{row}-V{row}"
        assert r["avoided_t"] == pytest.approx(r["wtw_current_t"] - r["wtw_candidate_t"],
                                               rel=1e-9)
        assert routes.cell(row, col["Well-to-wheel, current [t CO2e]"]).value == \
            lit(r["wtw_current_t"])
    ny = len(summary["yearly"])
    for i, r in enumerate(summary["yearly"]):
        row = 2 + i
        assert yearly.cell(row, 3).value == lit(r["cost_as_is"])
        assert yearly.cell(row, 4).value == lit(r["cost_plan"])
        assert yearly.cell(row, 5).value == f"=C{row}-D{row}"
        assert yearly.cell(row, 6).value == f"=SUM($E$2:E{row})"
        assert yearly.cell(row, 9).value == f"=G{row}-H{row}"
    assert yearly.cell(ny + 2, 5).value == f"=SUM(E2:E{ny + 1})"
    assert yearly.cell(ny + 3, 5).value == f"=NPV(discount_rate,E3:E{ny + 1})+E2"
    assert "discount_rate" in wb.defined_names
    assert order.cell(2, 9).value == "=SUM($F$2:F2)"
    assert depot.cell(9, 3).value.startswith("=SUM(D9:")
    assert depot.cell(9, 1).value == "00:00" and depot.cell(104, 1).value == "23:45"


def test_workbook_irr_reads_as_the_report_reads_it(fleet, summary, tmp_path):
    """A route whose extra cost is never paid back within the period and whose rate of
    return is negative reads "n/a" in the report's table; the Routes sheet says the same
    (not a "-12.0 %" beside it); a route with a rate shows the number."""
    import copy

    from tco.report.fleet_report import _irr_cell

    s = copy.deepcopy(summary)
    s["routes"][0].update(irr=-0.12, simple_payback_year=None)
    path = tmp_path / "fleet.xlsx"
    build_fleet_workbook(fleet, s).save(path)
    routes = openpyxl.load_workbook(path)["Routes"]
    col = [c.value for c in routes[1]].index("IRR [%]") + 1
    assert _irr_cell(s["routes"][0]) == "n/a" == routes.cell(2, col).value
    assert routes.cell(3, col).value == pytest.approx(s["routes"][1]["irr"], rel=1e-14)


def _formula_cells(wb):
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if c.data_type == "f":
                    yield ws.title, c


@pytest.mark.slow
@needs_soffice
def test_workbook_recalculates_to_the_model(book, summary, tmp_path):
    out = recalculate(book, tmp_path / "recalc")
    wb = openpyxl.load_workbook(out, data_only=True)
    formulas = openpyxl.load_workbook(book)
    checked = set()

    def check(sheet, coord, want):
        got = wb[sheet][coord].value
        assert got is not None, (sheet, coord)
        assert _close(got, want), (sheet, coord, got, want)
        checked.add((sheet, coord))

    routes = summary["routes"]
    n = len(routes)
    for i, r in enumerate(routes):
        row = 2 + i
        check("Routes", f"P{row}", r["pv_saving"])
        check("Routes", f"W{row}", r["avoided_t"])
        check("Routes", f"X{row}", r["abatement_cost_per_t"])
    plan = summary["plan"]
    in_plan = [r for r in routes if r["in_plan"]]
    plan_row, all_row = n + 3, n + 4
    for col, key in (("N", "pv_current"), ("O", "pv_candidate"),
                     ("U", "wtw_current_t"), ("V", "wtw_candidate_t")):
        check("Routes", f"{col}{plan_row}", sum(r[key] for r in in_plan))
        check("Routes", f"{col}{all_row}", sum(r[key] for r in routes))
    check("Routes", f"P{plan_row}", plan["pv_saving"])
    check("Routes", f"W{plan_row}", plan["avoided_t"])
    check("Routes", f"X{plan_row}", plan["abatement_cost_per_t"])
    check("Routes", f"P{all_row}", sum(r["pv_saving"] for r in routes))
    check("Routes", f"W{all_row}", sum(r["avoided_t"] for r in routes))
    check("Routes", f"Y{plan_row}", sum(r["abatement_t"] for r in in_plan))
    check("Routes", f"Y{all_row}", sum(r["abatement_t"] for r in routes))
    # abatement cost over the tonnes of its convention (discounted by default)
    check("Routes", f"X{all_row}", -sum(r["pv_saving"] for r in routes)
          / sum(r["abatement_t"] for r in routes))
    for i, r in enumerate(summary["order"]):
        row = 2 + i
        check("Order", f"F{row}", r["pv_saving"])
        check("Order", f"G{row}", r["avoided_t"])
        check("Order", f"H{row}", r["abatement_cost_per_t"])
        check("Order", f"I{row}", r["cumulative_pv_saving"])
        check("Order", f"J{row}", r["cumulative_avoided_t"])
    yearly = summary["yearly"]
    ny = len(yearly)
    for i, r in enumerate(yearly):
        row = 2 + i
        check("Yearly", f"E{row}", r["saving"])
        check("Yearly", f"F{row}", r["cumulative_saving"])
        check("Yearly", f"I{row}", r["avoided_t"])
        check("Yearly", f"J{row}", r["cumulative_avoided_t"])
    tot = summary["yearly_totals"]
    for col, key in (("C", "cost_as_is"), ("D", "cost_plan"), ("E", "saving"),
                     ("G", "wtw_as_is_t"), ("H", "wtw_plan_t"), ("I", "avoided_t")):
        check("Yearly", f"{col}{ny + 2}", tot[key])
    rate = summary["study"]["discount_rate"]
    for col, key in (("C", "cost_as_is"), ("D", "cost_plan"), ("E", "saving")):
        check("Yearly", f"{col}{ny + 3}", tot[f"pv_{key}"])
        # numpy-financial as the outside reference for the spreadsheet NPV convention
        check("Yearly", f"{col}{ny + 3}", npf.npv(rate, [r[key] for r in yearly]))
    check("Yearly", f"E{ny + 3}", plan["pv_saving"])
    dep = summary["depot"]["plan"]
    for j, p in enumerate(dep["power_kW_by_interval"]):
        check("Depot", f"C{9 + j}", p)
    check("Depot", "D5", dep["peak_kW"])
    check("Depot", "D6", dep["energy_kWh_per_day"])
    ws = formulas["Depot"]
    heads = {ws.cell(8, c).value: c for c in range(1, ws.max_column + 1)}
    from openpyxl.utils import get_column_letter as L

    share, demand = L(heads["Share of fixed depot costs [%]"]), \
        L(heads["Share of the demand charge [%]"])
    for k, t in enumerate(dep["trucks"]):
        check("Depot", f"{share}{9 + k}", t["cost_share"])
        check("Depot", f"{demand}{9 + k}", t["demand_share"])
    total = 9 + len(dep["trucks"])
    for name, want in (("Share of fixed depot costs [%]", 1.0),
                       ("Share of the demand charge [%]", 1.0),
                       ("Energy per day [kWh]", dep["energy_kWh_per_day"]),
                       ("On a charger [h/day]", sum(t["occupancy_h"] for t in dep["trucks"])),
                       ("Contribution to the peak [kW]", dep["peak_kW"])):
        check("Depot", f"{L(heads[name])}{total}", want)
    # every formula cell of the workbook was compared with a model value
    unchecked = [(s, c.coordinate) for s, c in _formula_cells(formulas)
                 if (s, c.coordinate) not in checked]
    assert unchecked == []


# --------------------------------------------------------------------------- hostile text
HOSTILE_VEHICLES = ['=HYPERLINK("http://x","y")', "<script>alert(1)</script> $x$",
                    "@SUM(A1)"]
HOSTILE_ROUTES = ["<img src=file:///etc/passwd>", "+1+1",
                  "<link rel=attachment href=file:///etc/hostname>"]
HOSTILE_NAME = '<img src=file:///etc/passwd> =HYPERLINK("http://x","y")'


@pytest.fixture(scope="module")
def hostile(tmp_path_factory):
    from tco.resources import inputs_dir

    src = inputs_dir() / "fleet"
    d = tmp_path_factory.mktemp("hostile")
    base = (src / "base.toml").read_text(encoding="utf-8")
    base, n = re.subn(r'(?m)^name = "Maravell[^\n]*$', f"name = '''{HOSTILE_NAME}'''", base,
                      count=1)
    assert n == 1
    (d / "base.toml").write_text(base, encoding="utf-8")
    # cycles must lie in the fleet file's folder (tco.scenario.files): copy them there
    shutil.copytree(src / "cycles", d / "cycles")
    cycles = ["cycles/city-loop.toml", "cycles/yard-hop.csv", "cycles/city-loop.toml"]
    with open(d / "fleet.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["vehicle", "route", "cycle", "current", "candidate", "arrive", "depart"])
        for v, r, c, a in zip(HOSTILE_VEHICLES, HOSTILE_ROUTES, cycles,
                              ("17:00", "16:00", "18:00")):
            w.writerow([v, r, c, "Diesel rigid", "Electric rigid", a, "06:00"])
    result = _evaluate(d / "base.toml", d / "fleet.csv")
    return _write_all(result, d / "out")


@pytest.mark.slow
def test_hostile_text_is_literal_in_the_html(hostile):
    from test_report_safety import _Parse

    html = hostile["html"]
    got = _Parse()
    got.feed(html)
    for tag in ("script", "link", "a", "iframe", "object", "embed", "base"):
        assert tag not in got.tags
    refs = [v for _, k, v in got.attrs if k in ("src", "href")]
    assert refs and all(v.startswith("data:image/") for v in refs)
    assert got.tags.count("img") == 2  # the two charts
    text = "".join(got.text)
    for h in HOSTILE_VEHICLES + HOSTILE_ROUTES + [HOSTILE_NAME]:
        assert h in text, h
    assert "&lt;script&gt;" in html


@pytest.mark.slow
def test_hostile_text_fetches_nothing_and_prints_literally_in_the_pdf(hostile):
    from test_report_safety import _assert_no_leak

    pdf = hostile["pdf"]
    assert pdf.blocked == [] and pdf.warnings == []
    _assert_no_leak(hostile["folder"] / "fleet-report.pdf")
    text = _squash("".join(hostile["pages"]))
    for h in HOSTILE_VEHICLES + HOSTILE_ROUTES + [HOSTILE_NAME]:
        assert _squash(h) in text, h


@pytest.mark.slow
def test_hostile_text_stays_text_in_the_workbook(hostile):
    wb = openpyxl.load_workbook(hostile["folder"] / "fleet-workbook.xlsx")
    wanted = set(HOSTILE_VEHICLES + HOSTILE_ROUTES + [HOSTILE_NAME])
    found = set()
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if isinstance(c.value, str) and c.data_type == "s":
                    found |= {h for h in wanted if h in c.value}
                if c.data_type == "f":  # formulas are ours: no scenario text in them
                    assert not any(h in c.value for h in wanted), (ws.title, c.coordinate)
                    assert "HYPERLINK" not in c.value and "A1)" not in c.value
    assert found == wanted
    # the vehicle ids head the depot's per-truck columns as text
    depot = wb["Depot"]
    heads = [depot.cell(8, c).value for c in range(1, depot.max_column + 1)]
    assert f"{HOSTILE_VEHICLES[0]} [kW]" in heads


# --------------------------------------------------------------------------- atomic output
def _snapshot(folder: Path) -> dict:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


@pytest.mark.parametrize("failure", ["crash", "blocked fetch"])
def test_failure_mid_way_leaves_earlier_outputs_untouched(fleet, tmp_path, monkeypatch,
                                                          failure):
    write_fleet_outputs(fleet, tmp_path, json_only=True)
    folder = tmp_path / fleet.base.slug
    (folder / "my-notes.txt").write_text("the user's own file", encoding="utf-8")
    before = _snapshot(folder)

    def broken(html, path):
        Path(path).write_bytes(b"%PDF-1.7 half written")
        if failure == "crash":
            raise RuntimeError("disk full")
        return PdfResult(path=Path(path), pages=1, blocked=["file:///etc/passwd"])

    monkeypatch.setattr(pdf_module, "render_pdf", broken)
    with pytest.raises(RuntimeError if failure == "crash" else InputError):
        write_fleet_outputs(fleet, tmp_path)
    assert _snapshot(folder) == before  # same files, same bytes (fleet.json included)
    assert [p.name for p in tmp_path.iterdir()] == [fleet.base.slug]  # no staging left
