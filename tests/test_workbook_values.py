"""Tests of the formula evaluator that stores cached results (tco/report/workbook_values.py).

Expected values come from outside the code under test: the spreadsheet functions' worked
examples in the vendor documentation (recalled from memory, cited beside each check),
numpy-financial, and hand calculations written out here. The whole-workbook check against
LibreOffice's recalculation is in tests/test_workbook.py.
"""
from __future__ import annotations

import math

import numpy_financial as npf
import openpyxl
import pytest

from tco.report.workbook_values import XlError, evaluate, save_with_values


def _one(formula, **cells):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "S"
    for coord, v in cells.items():
        ws[coord] = v
    ws["Z99"] = formula
    return evaluate(wb)[("S", "Z99")]


@pytest.mark.parametrize("formula, want", [
    ("=-2^2", 4.0),            # negation before power (OpenFormula operator table; common practice)
    ("=2^3^2", 64.0),          # ^ groups left to right in spreadsheets: (2^3)^2
    ("=1+2*3-4/8", 6.5),       # hand: 1 + 6 - 0.5
    ("=(1+2)*3", 9.0),
    ("=10%", 0.1),
    ("=IF(1>2,1/0,7)", 7.0),   # the branch not taken is not evaluated
    ("=MOD(-7,3)", 2.0),       # spreadsheet MOD takes the divisor's sign (hand: -7 = 3*-3 + 2)
    ("=INT(-1.5)", -2.0),      # INT rounds down (toward minus infinity)
    ("=MIN(3,1,2)+MAX(3,1,2)", 4.0),
    ("=\"a\"&1&\"b\"", "a1b"),
    ("=AND(1,0)", False),
])
def test_operators_and_functions(formula, want):
    assert _one(formula) == want


def test_references_ranges_and_names():
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "In puts"
    for k, v in enumerate([1.0, 2.0, "text", None, 4.0], start=1):
        ws.cell(row=k, column=1, value=v)
    other = wb.create_sheet("Out")
    from openpyxl.workbook.defined_name import DefinedName
    wb.defined_names["vals"] = DefinedName("vals", attr_text="'In puts'!$A$1:$A$5")
    other["A1"] = "=SUM(vals)"                         # text and empty skipped: 7
    other["A2"] = "=COUNT('In puts'!$A$1:$A$5)"        # 3 numbers
    other["A3"] = "=A1*'In puts'!A2"                    # 14
    other["A4"] = "=INDEX(vals,5)"                      # 4
    other["A5"] = "=SUMIF(vals,\"<=\"&2,vals)"          # 1 + 2
    other["A6"] = "=SUMPRODUCT(('In puts'!A1:A2>1)*'In puts'!A1:A2)"  # 2
    got = evaluate(wb)
    assert [got[("Out", f"A{k}")] for k in range(1, 7)] == [7.0, 3.0, 14.0, 4.0, 3.0, 2.0]


def test_finance_functions():
    # Vendor documentation examples (from memory): a 125,000 loan at 9 %/yr, 30 years
    # monthly; interest paid in the second year -11,135.23, principal -934.11.
    assert _one("=CUMIPMT(0.09/12,360,125000,13,24,0)") == pytest.approx(-11135.23213,
                                                                         abs=1e-4)
    assert _one("=CUMPRINC(0.09/12,360,125000,13,24,0)") == pytest.approx(-934.1071234,
                                                                          abs=1e-6)
    # IRR of -70,000 then 12,000 .. 26,000: 8.66 % (vendor documentation, from memory)
    r = _one("=IRR(A1:A6)", A1=-70000, A2=12000, A3=15000, A4=18000, A5=21000, A6=26000)
    assert r == pytest.approx(0.0866309480, abs=1e-9)
    # spreadsheet NPV discounts the first value one period: equals npf.npv over [0, ...]
    v = _one("=NPV(0.1,A1:A3)", A1=-10000, A2=3000, A3=4200)
    assert v == pytest.approx(npf.npv(0.1, [0.0, -10000, 3000, 4200]), rel=1e-14)


def test_errors_are_spreadsheet_errors():
    assert _one("=1/0") == XlError("#DIV/0!")
    assert _one("=A1+1", A1="x") == XlError("#VALUE!")
    assert _one("=IRR(A1:A2)", A1=1, A2=1) == XlError("#NUM!")  # no sign change
    assert _one("=NOSUCH(1)") == XlError("#NAME?")
    assert _one("=A1*2", A1="=1/0") == XlError("#DIV/0!")  # errors propagate


def test_saved_file_carries_formula_and_value(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws["A1"] = 21
    ws["A2"] = "=A1*2"
    ws["A3"] = "=IF(A2>40,\"big\",\"small\")"
    ws["A4"] = "=A2>40"
    ws["A5"] = "=1/0"
    path = tmp_path / "v.xlsx"
    save_with_values(wb, path)
    f = openpyxl.load_workbook(path)
    v = openpyxl.load_workbook(path, data_only=True)
    assert f.active["A2"].value == "=A1*2"
    assert [v.active[c].value for c in ("A2", "A3", "A4", "A5")] == [42, "big", True,
                                                                     "#DIV/0!"]
    assert math.isclose(v.active["A2"].value, 42.0)
