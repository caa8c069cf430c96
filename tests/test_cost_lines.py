"""The cost-line registry (tco.cost_lines): one definition per line, read by the model and
the workbook.

* every line of the registry has a computation and a formula template, checked when the
  module is imported (a line without one cannot be registered);
* a throw-away line (a yearly permit fee driven by a fixture-only field) added to a
  temporary registry reaches the model's cash flows, the present values and the workbook
  as a live formula that LibreOffice recalculates to the model's value — with no other
  change to the program.

Expected values are hand calculations written out here and numpy-financial's ``pv`` (the
reference library for the annuity factor), never the code under test.
"""
from __future__ import annotations

import dataclasses
import tomllib

import numpy as np
import numpy_financial as npf
import openpyxl
import pytest
from recalc import needs_soffice, recalculate

from tco import cost_lines
from tco.cost_lines import REGISTRY, CostLine, Outer, SheetInput
from tco.scenario.costs import TruckCosts


# --------------------------------------------------------------------------- the registry
def test_every_line_has_a_computation_and_a_formula_template():
    names = [c.name for c in REGISTRY]
    assert len(names) == len(set(names))
    for c in REGISTRY:
        assert callable(c.compute), c.name
        assert callable(c.formula) or (isinstance(c.formula, str) and c.formula), c.name
        assert c.sign in ("cost", "income", "either"), c.name
        assert c.group in ("purchase", "financing", "depot", "energy", "running", "battery",
                           "end", "tax"), c.name
        assert c.label and c.description, c.name


def _line(**kw) -> CostLine:
    base = dict(name="test_line", label="Test", description="A test line", group="running",
                sign="cost", compute=lambda tc: None, formula="IF({y}>=1,1,0)")
    base.update(kw)
    return CostLine(**base)


@pytest.mark.parametrize("kw, says", [
    ({"formula": ""}, "no formula template"),
    ({"formula": None}, "no formula template"),
    ({"compute": None}, "no computation"),
    ({"formula": "IF({y}>=1,{P}fee*{price},0)"}, "price"),  # a name the workbook lacks
    ({"sign": "plus"}, "sign"),
    ({"group": "misc"}, "group"),
    ({"name": "diesel"}, "repeated"),
])
def test_a_line_missing_a_part_cannot_be_registered(kw, says):
    with pytest.raises(ValueError, match=says):
        with cost_lines.using(REGISTRY + (_line(**kw),)):
            pass
    assert cost_lines.registry() is REGISTRY  # left as it was


def test_the_default_registry_is_the_models_table_order():
    from tco.cashflow import LINES

    assert LINES is REGISTRY
    assert [c.name for c in cost_lines.registry()] == [c.name for c in LINES]


# --------------------------------------------------------------------------- a new line
class _PermitCosts(TruckCosts):
    """TruckCosts with a field only this test has (the scenario field of the recipe)."""

    permit_fee: float = 0.0  # [currency/yr]


def _permit(tc):
    """Yearly permit fee, paid at the end of years 1..N, not escalated. [currency]"""
    if not hasattr(tc.c, "permit_fee"):
        return None
    return Outer(tc.op_mask, tc.p(f"{tc.tp}.permit_fee"))


PERMIT = CostLine(
    "permit_fee", "Permit fee", "Yearly route permit fee (test line)", "running", "cost",
    compute=_permit, formula="IF({y}>=1,{P}permit_fee,0)", deductible=True,
    inputs=(SheetInput("permit_fee", "Route permit fee per year",
                       "trucks[{i}].costs.permit_fee", "{cur}/yr"),))

FEES = (1800.0, 2450.0)  # invented, per truck [currency/yr]


def _demo_scenario(with_fee: bool):
    from tco.resources import demo_path
    from tco.scenario import LoadedScenario, parse_scenario

    data = tomllib.loads(demo_path().read_text(encoding="utf-8"))
    data["uncertainty"] = {"enabled": False}
    s = parse_scenario(data)
    if with_fee:
        s.trucks = [t.model_copy(update={"costs": _PermitCosts.model_construct(
            **dict(t.costs), permit_fee=fee)}) for t, fee in zip(s.trucks, FEES)]
    return LoadedScenario(s, None, data, "test")


def _run(with_fee: bool):
    from tco.pipeline import evaluate
    from tco.report.summary import build_summary

    result = evaluate(_demo_scenario(with_fee))
    return result, build_summary(result)


@pytest.fixture(scope="module")
def plain():
    return _run(False)


@pytest.fixture(scope="module")
def permit():
    with cost_lines.using(REGISTRY + (PERMIT,)):
        return _run(True)


def test_a_new_line_is_in_the_monte_carlo_totals_and_the_tax_shield(permit):
    """The lean Monte Carlo path and the after-tax view follow the new line too: with a
    25 % tax rate, the deductible fee saves 0.25 × fee a year (hand calculation), so the
    net cost grows by 0.75 × fee."""
    from tco import cashflow
    from tco.pipeline import cost_inputs

    result, _ = permit
    s = result.scenario
    ops = [tr.operation for tr in result.trucks.values()]
    fin = s.finance.model_copy(update={"after_tax": s.finance.after_tax.model_copy(
        update={"enabled": True, "tax_rate": 0.25})})
    inputs = cost_inputs(s, ops)
    taxed = dataclasses.replace(inputs, finance=fin)
    N = s.finance.analysis_years
    params = cashflow.flat_params(inputs)
    assert params["trucks[1].costs.permit_fee"] == FEES[1]
    draws = {"prices.diesel": params["prices.diesel"] * np.array([0.9, 1.0, 1.1])}
    with cost_lines.using(REGISTRY + (PERMIT,)):
        lean = cashflow.compute_totals(inputs, draws, params)
        with_tax = cashflow.compute(taxed)
    lean0 = cashflow.compute_totals(inputs, draws, params)
    without_tax = cashflow.compute(taxed)
    for k, fee in enumerate(FEES):
        want = np.array([0.0] + [fee] * N)[:, None]  # years first, one column per draw
        got = (np.broadcast_to(lean.total_by_year[k], (N + 1, 3))
               - np.broadcast_to(lean0.total_by_year[k], (N + 1, 3)))
        np.testing.assert_allclose(got, np.broadcast_to(want, (N + 1, 3)), rtol=0, atol=1e-8)
        np.testing.assert_allclose(
            with_tax.lines[k]["tax_shield_operating"]
            - without_tax.lines[k]["tax_shield_operating"], -0.25 * want[:, 0], rtol=0,
            atol=1e-8)
        np.testing.assert_allclose(with_tax.total(k) - without_tax.total(k),
                                   0.75 * want[:, 0], rtol=0, atol=1e-8)


@pytest.mark.slow
@needs_soffice
def test_a_new_line_reaches_flows_totals_and_a_live_workbook_formula(plain, permit,
                                                                      tmp_path):
    from tco.report.workbook import write_workbook
    from tco.report.workbook._common import _CF, _FIRST_COL

    plain, _ = plain
    result, summary = permit
    path = tmp_path / "permit.xlsx"
    with cost_lines.using(REGISTRY + (PERMIT,)):
        write_workbook(result, summary, path)
    s = result.scenario
    assert s.finance.money_basis == "nominal"  # the hand calculation below is nominal
    N, r = s.finance.analysis_years, s.finance.discount_rate
    flows, before = result.cashflow.flows, plain.cashflow.flows

    # the model's cash flows: the fee in years 1..N (hand calculation)
    for k, fee in enumerate(FEES):
        want = np.array([0.0] + [fee] * N)
        np.testing.assert_array_equal(flows.lines[k]["permit_fee"], want)
        # the totals: each year's net cost grows by the fee, the present value by the
        # annuity of the fee (numpy-financial pv, payments at the end of each year)
        np.testing.assert_allclose(flows.total(k) - before.total(k), want, rtol=0,
                                   atol=1e-9)
        annuity = -npf.pv(r, N, fee)
        assert flows.present_value(k) - before.present_value(k) == pytest.approx(
            annuity, rel=1e-9)
        # summary.json carries the line and the new present value
        t = summary["cashflow"]["trucks"][flows.trucks[k]]
        assert t["present_value"] == pytest.approx(before.present_value(k) + annuity,
                                                   rel=1e-12)
        assert t["present_value_by_line"]["permit_fee"] == pytest.approx(annuity, rel=1e-12)
    assert summary["cashflow"]["lines"][-1] == "permit_fee"
    # the line appears in the table after the registry's own lines (its place in it)
    assert list(flows.lines[0])[-1] == "permit_fee"
    # outside the temporary registry the model has no such line
    assert "permit_fee" not in before.lines[0]

    # the workbook: a live formula over the named input, recalculated by LibreOffice
    wb_f = openpyxl.load_workbook(path)
    assert "t1_permit_fee" in wb_f.defined_names and "t2_permit_fee" in wb_f.defined_names
    wb_v = openpyxl.load_workbook(recalculate(path, tmp_path / "recalc"), data_only=True)
    ws_f, ws_v = wb_f[_CF], wb_v[_CF]
    rows = [r for r in range(1, ws_f.max_row + 1) if ws_f.cell(row=r, column=2).value
            == "permit_fee" and ws_f.cell(row=r, column=_FIRST_COL).data_type == "f"]
    blocks = rows[:2]  # the two trucks' blocks (break-even workings may repeat it below)
    assert len(blocks) == 2
    for k, row in enumerate(blocks):
        for yr in range(N + 1):
            c = _FIRST_COL + yr
            formula = ws_f.cell(row=row, column=c).value
            assert isinstance(formula, str) and f"t{k + 1}_permit_fee" in formula
            assert ws_v.cell(row=row, column=c).value == pytest.approx(
                flows.lines[k]["permit_fee"][yr], rel=1e-12, abs=1e-9)
        # the truck's present value on the sheet (its block's first one below the line)
        pv_row = next(r for r in range(row, ws_f.max_row + 1)
                      if ws_f.cell(row=r, column=2).value == "present_value")
        assert ws_v.cell(row=pv_row, column=_FIRST_COL).value == pytest.approx(
            flows.present_value(k), rel=1e-9)
