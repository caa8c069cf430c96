"""Scenarios in a workbook (tco/scenario/xlsx.py): round trip, starter workbook, guards.

The round trip is checked against the model's own TOML path (the same scenario read two
ways must give the same figures, 1e-12, and the same inputs fingerprint); the guards
against one-line errors naming the sheet, row and column.
"""
from __future__ import annotations

import json
import math
import re
import shutil
import tomllib
import zipfile

import openpyxl
import pytest

from tco.errors import InputError
from tco.scenario import load_scenario
from tco.scenario.xlsx import MAX_ROWS, load_workbook_scenario


def _demo_raw() -> dict:
    from tco.resources import demo_path

    raw = tomllib.loads(demo_path().read_text(encoding="utf-8"))
    raw["uncertainty"] = {"enabled": False}
    return raw


def _toml(d: dict, prefix: str = "") -> str:
    """A small TOML writer for the test (scalars, arrays, tables, arrays of tables)."""
    def val(v):
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, (int, float)):
            return repr(v)
        if isinstance(v, str):
            return json.dumps(v, ensure_ascii=False)
        if isinstance(v, list):
            return "[" + ", ".join(val(x) for x in v) + "]"
        if isinstance(v, dict):
            return "{" + ", ".join(f'"{k}" = {val(x)}' for k, x in v.items()) + "}"
        raise TypeError(v)

    lines, tables = [], []
    for k, v in d.items():
        if isinstance(v, dict):
            tables.append((k, v))
        elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
            tables.append((k, v))
        else:
            lines.append(f"{k} = {val(v)}")
    out = "\n".join(lines) + "\n"
    for k, v in tables:
        name = f"{prefix}{k}"
        if isinstance(v, dict):
            out += f"\n[{name}]\n" + _toml(v, name + ".")
        else:
            for item in v:
                out += f"\n[[{name}]]\n" + _toml(item, name + ".")
    return out


@pytest.fixture(scope="module")
def delivered(tmp_path_factory):
    """The demo (no uncertainty study) run from TOML, and its delivered workbook in
    another folder with a copy of nothing else (the demo uses synthetic segments)."""
    from tco.pipeline import evaluate
    from tco.report.summary import build_summary
    from tco.report.workbook import write_workbook

    base = tmp_path_factory.mktemp("toml")
    toml = base / "demo.toml"
    toml.write_text(_toml(_demo_raw()), encoding="utf-8")
    loaded = load_scenario(toml)
    result = evaluate(loaded)
    summary = build_summary(result)
    wb = tmp_path_factory.mktemp("delivered") / "workbook.xlsx"
    write_workbook(result, summary, wb)
    return loaded, summary, wb


def _figures(x, path=""):
    """Every number of a summary.json as (path, value), skipping file-specific keys."""
    if isinstance(x, dict):
        for k, v in x.items():
            if k not in ("generated", "fingerprint_sha256", "file"):
                yield from _figures(v, f"{path}.{k}")
    elif isinstance(x, list):
        for i, v in enumerate(x):
            yield from _figures(v, f"{path}[{i}]")
    else:
        yield path, x


def test_round_trip_toml_workbook_run(delivered):
    """demo TOML → delivered workbook → the scenario read back from the workbook gives the
    same summary.json figures (1e-12 relative) and the same inputs fingerprint."""
    from tco.pipeline import evaluate
    from tco.report.summary import build_summary

    loaded, summary, wb = delivered
    back = load_scenario(wb)
    assert back.inputs_fingerprint == loaded.inputs_fingerprint
    assert back.fingerprint != loaded.fingerprint  # the file fingerprint is of the bytes
    again = build_summary(evaluate(back))
    a, b = dict(_figures(summary)), dict(_figures(again))
    assert a.keys() == b.keys()
    n = 0
    for k, v in a.items():
        w = b[k]
        if isinstance(v, float) and not isinstance(v, bool):
            assert math.isclose(v, w, rel_tol=1e-12, abs_tol=1e-300), (k, v, w)
            n += 1
        else:
            assert v == w, (k, v, w)
    assert n > 200
    assert again["scenario"]["inputs_fingerprint_sha256"] == loaded.inputs_fingerprint


def test_an_edit_in_the_field_table_reruns_the_model(delivered, tmp_path):
    """A value typed into the field table is what the rerun uses."""
    _, _, wb_path = delivered
    wb = openpyxl.load_workbook(wb_path)
    ws = wb["Scenario"]
    r = next(r for r in range(1, ws.max_row + 1) if ws.cell(row=r, column=1).value
             == "prices.diesel")
    ws.cell(row=r, column=3).value = 1.6
    edited = tmp_path / "edited.xlsx"
    wb.save(edited)
    assert load_scenario(edited).scenario.prices.diesel == pytest.approx(1600.0)  # [/m³]


def test_traces_are_found_next_to_the_workbook(tmp_path):
    """A leg's trace file is resolved relative to the workbook's folder, as for TOML."""
    from tco.resources import demo_path
    from tco.scenario.xlsx import field_rows, write_field_table

    trace = demo_path().parent / "example-trace.csv"
    raw = _demo_raw()
    raw["route"]["legs"] = [{"name": "traced", "payload": 20, "file": "trace.csv"}]
    (tmp_path / "a").mkdir()
    shutil.copy(trace, tmp_path / "a" / "trace.csv")
    toml = tmp_path / "a" / "s.toml"
    toml.write_text(_toml(raw), encoding="utf-8")
    loaded = load_scenario(toml)
    wb = openpyxl.Workbook()
    write_field_table(wb.active, 1, field_rows(loaded.scenario, loaded.raw))
    (tmp_path / "b").mkdir()
    path = tmp_path / "b" / "s.xlsx"
    wb.save(path)
    with pytest.raises(InputError, match="trace file 'trace.csv' not found"):
        load_scenario(path)
    shutil.copy(trace, tmp_path / "b" / "trace.csv")
    assert load_scenario(path).inputs_fingerprint == loaded.inputs_fingerprint


def test_starter_workbook(tmp_path):
    """tco init --xlsx: Inputs, Route and Trucks sheets, one row per input with unit,
    description, source and default, list validation for choices; it validates."""
    from tco.cli import main

    path = tmp_path / "start.xlsx"
    assert main(["init", "--xlsx", str(path)]) == 0
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames == ["Inputs", "Route", "Trucks"]
    ws = wb["Inputs"]
    assert [c.value for c in ws[3]][:7] == ["Field", "Kind", "Value", "Unit", "Description",
                                           "Source", "Default"]
    fields = {ws.cell(row=r, column=1).value: r for r in range(4, ws.max_row + 1)}
    assert "study.units" in fields and "prices.diesel" in fields
    rows = {r: [c.value for c in ws[r]] for r in fields.values()}
    assert all(rows[fields["prices.diesel"]][k] for k in (3, 4))  # unit, description
    lists = [dv for dv in ws.data_validations.dataValidation if dv.type == "list"]
    assert any('"metric,us"' == dv.formula1 for dv in lists)
    assert any(c.startswith("route.legs[0].segments[0].") for c in
               (wb["Route"].cell(row=r, column=1).value or "" for r in range(4, 60)))
    assert wb["Trucks"].cell(row=4, column=1).value.startswith("trucks[0].")
    assert main(["check", str(path)]) == 0
    assert main(["init", "--xlsx", str(path)]) == 2  # exists: not overwritten


def test_starter_workbook_checks_number_ranges(tmp_path):
    """Numbers with hard limits get a range check in the spreadsheet (text with a unit
    stays allowed): operating days per year between 0 and 366 (a leap year's days, the
    field's own limit), a share between 0 and 1; the formula is written for the group's
    first cell, as a spreadsheet program shifts it to each cell of the range."""
    from tco.cli import main

    path = tmp_path / "start.xlsx"
    assert main(["init", "--xlsx", str(path)]) == 0
    wb = openpyxl.load_workbook(path)
    found = {}
    for ws in wb:
        rows = {ws.cell(row=r, column=1).value: r for r in range(1, ws.max_row + 1)}
        for field in ("route.days_per_year", "depot.residual_share"):
            if field not in rows:
                continue
            coord = f"C{rows[field]}"
            dv = next(d for d in ws.data_validations.dataValidation if coord in d.sqref)
            first = min(dv.sqref.ranges, key=lambda r: r.min_row).coord.split(":")[0]
            # 366 and 366.0 are the same limit
            found[field] = re.sub(r"(\d)\.0\b", r"\1", dv.formula1.replace(first, "X"))
    assert found["route.days_per_year"] == "OR(ISTEXT(X),AND(ISNUMBER(X),X>=0,X<=366))"
    assert found["depot.residual_share"] == "OR(ISTEXT(X),AND(ISNUMBER(X),X>=0,X<=1))"


def _starter(tmp_path):
    from tco.cli import main

    path = tmp_path / "s.xlsx"
    main(["init", "--xlsx", str(path)])
    return path


def _row(ws, field):
    return next(r for r in range(1, ws.max_row + 1) if ws.cell(row=r, column=1).value
                == field)


def test_a_bad_value_names_sheet_row_and_column(tmp_path, capsys):
    from tco.cli import main

    path = _starter(tmp_path)
    wb = openpyxl.load_workbook(path)
    ws = wb["Trucks"]
    r = _row(ws, "trucks[1].costs.purchase_price")
    ws.cell(row=r, column=3).value = "lots"
    wb.save(path)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and f"Trucks!C{r}" in err[0], err


def test_a_formula_in_an_input_cell_is_an_error(tmp_path):
    path = _starter(tmp_path)
    wb = openpyxl.load_workbook(path)
    ws = wb["Inputs"]
    r = _row(ws, "prices.diesel")
    ws.cell(row=r, column=3).value = "=1+1"
    wb.save(path)
    with pytest.raises(InputError, match="formula") as e:
        load_workbook_scenario(path)
    assert e.value.where.startswith(f"Inputs!C{r}")


def test_macros_and_huge_sheets_are_refused(tmp_path):
    path = _starter(tmp_path)
    xlsm = tmp_path / "s.xlsm"
    shutil.copy(path, xlsm)
    with pytest.raises(InputError, match=r"\.xlsm"):
        load_scenario(xlsm)
    vba = tmp_path / "vba.xlsx"
    shutil.copy(path, vba)
    with zipfile.ZipFile(vba, "a") as z:
        z.writestr("xl/vbaProject.bin", b"\0" * 16)
    with pytest.raises(InputError, match="macros"):
        load_scenario(vba)
    wb = openpyxl.load_workbook(path)
    wb["Route"].cell(row=MAX_ROWS + 5, column=1).value = "x"
    big = tmp_path / "big.xlsx"
    wb.save(big)
    with pytest.raises(InputError, match="too large"):
        load_scenario(big)
    with pytest.raises(InputError, match="not an .xlsx"):
        (tmp_path / "fake.xlsx").write_text("hello")
        load_scenario(tmp_path / "fake.xlsx")


def _named(wb, name):
    sheet, coord = next(iter(wb.defined_names[name].destinations))
    return wb[sheet][coord.replace("$", "")]


@pytest.mark.parametrize("name, shown, path, toml_value", [
    ("diesel_price", 1.6, ("prices", "diesel"), 1.6),                        # EUR/L both
    ("days_per_year", 280, ("route", "days_per_year"), 280),
    ("t2_purchase_price", 240000, ("trucks", 1, "costs", "purchase_price"), 240000),
    ("td_loss", 0.07, ("emissions", "td_loss"), "7 %"),                      # shown as a share
    ("t2_battery_cost_per_kwh", 120, ("trucks", 1, "costs", "battery_replacement",
                                      "cost_per_kwh"), 120),
])
def test_an_edited_named_input_reruns_as_a_toml_edit(delivered, tmp_path, name, shown, path,
                                                      toml_value):
    """The yellow named input is the one source of truth: edited in the delivered workbook
    (openpyxl), a rerun from the workbook gives every summary.json figure a run of the TOML
    with the same edit gives (1e-12), and the same inputs fingerprint."""
    from tco.pipeline import evaluate
    from tco.report.summary import build_summary

    _, summary, wb_path = delivered
    wb = openpyxl.load_workbook(wb_path)
    _named(wb, name).value = shown
    edited = tmp_path / "edited.xlsx"
    wb.save(edited)
    raw = _demo_raw()
    node = raw
    for k in path[:-1]:
        node = node[k] if isinstance(k, int) else node.setdefault(k, {})
    node[path[-1]] = toml_value
    toml = tmp_path / "edited.toml"
    toml.write_text(_toml(raw), encoding="utf-8")
    want_loaded = load_scenario(toml)
    got_loaded = load_scenario(edited)
    assert got_loaded.inputs_fingerprint == want_loaded.inputs_fingerprint
    want = dict(_figures(build_summary(evaluate(want_loaded))))
    got = dict(_figures(build_summary(evaluate(got_loaded))))
    before = dict(_figures(summary))
    moved = 0
    for k, v in want.items():
        if isinstance(v, float):
            assert math.isclose(got[k], v, rel_tol=1e-12, abs_tol=1e-300), (k, got[k], v)
            moved += not math.isclose(before.get(k, v), v, rel_tol=1e-12)
        elif k not in (".scenario.inputs_fingerprint_sha256",):
            assert got[k] == v, (k, got[k], v)
    assert moved > 0  # the edit did change the figures


def test_an_edited_model_figure_is_refused_naming_the_cell(delivered, tmp_path):
    """A named input the model computes (the modelled diesel per year) cannot be edited
    for a rerun: one line naming the cell."""
    _, _, wb_path = delivered
    wb = openpyxl.load_workbook(wb_path)
    cell = _named(wb, "t1_diesel_L")
    cell.value = 1.0
    edited = tmp_path / "edited.xlsx"
    wb.save(edited)
    with pytest.raises(InputError, match="t1_diesel_L.*model figure") as e:
        load_scenario(edited)
    assert e.value.where == f"Inputs!{cell.coordinate}"


def test_a_field_edited_in_two_places_is_refused(delivered, tmp_path):
    """The same field changed both in its named input and in the field table, to different
    values, is an error naming the named input's cell."""
    _, _, wb_path = delivered
    wb = openpyxl.load_workbook(wb_path)
    cell = _named(wb, "diesel_price")
    cell.value = 1.6
    ws = wb["Scenario"]
    r = next(r for r in range(1, ws.max_row + 1) if ws.cell(row=r, column=1).value
             == "prices.diesel")
    ws.cell(row=r, column=3).value = 1.7
    edited = tmp_path / "edited.xlsx"
    wb.save(edited)
    with pytest.raises(InputError, match="both") as e:
        load_scenario(edited)
    assert e.value.where == f"Inputs!{cell.coordinate}"


def test_an_edited_residual_share_reruns(tmp_path):
    """A value-table residual share edited on the Inputs sheet (a range row) is read into
    the list field, as the same list written in the TOML."""
    from tco.pipeline import evaluate
    from tco.report.summary import build_summary
    from tco.report.workbook import write_workbook

    raw = _demo_raw()
    raw["trucks"][0]["costs"]["residual"] = {"method": "table", "shares": [0.8, 0.7, 0.6]}
    toml = tmp_path / "a.toml"
    toml.write_text(_toml(raw), encoding="utf-8")
    result = evaluate(load_scenario(toml))
    wb_path = tmp_path / "w.xlsx"
    write_workbook(result, build_summary(result), wb_path)
    wb = openpyxl.load_workbook(wb_path)
    ws = wb["Inputs"]
    r = next(r for r in range(1, ws.max_row + 1)
             if ws.cell(row=r, column=2).value == "t1_residual_shares [2]")
    ws.cell(row=r, column=3).value = 0.65
    wb.save(wb_path)
    got = load_scenario(wb_path).scenario.trucks[0].costs.residual.shares
    assert list(got) == pytest.approx([0.8, 0.65, 0.6], rel=1e-15)
