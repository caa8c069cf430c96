"""The workbook builder: shared state, build order, formats and page setup."""
from __future__ import annotations

from openpyxl import Workbook
from openpyxl.styles import Alignment
from openpyxl.workbook.properties import CalcProperties

from tco.report import workbook_base as wbb
from tco.report.workbook._common import (
    _Block,
    _CF,
    _EM,
    _EN,
    _EmBlock,
    _FIRST_COL,
    _IN,
    _SC,
    _SE,
    _ST,
    _SU,
    _YEAR_ROW,
    _col,
    _uses_depot,
)
from tco.report.workbook.ageing_rows import AgeingRows
from tco.report.workbook.inputs_sheet import InputsSheet
from tco.report.workbook.cashflow_sheet import CashflowSheet
from tco.report.workbook.emissions_sheet import EmissionsSheet
from tco.report.workbook.energy_sheet import EnergySheet
from tco.report.workbook.summary_sheet import SummarySheet
from tco.report.workbook.uncertainty_sheets import UncertaintySheets


class Book(InputsSheet, CashflowSheet, AgeingRows, EmissionsSheet, EnergySheet,
           SummarySheet, UncertaintySheets):
    """Builds the workbook; one instance per call. Each sheet has its builder (a mixin in
    its own module); this class holds the shared state and the order of the build."""

    def __init__(self, result, summary: dict):
        from tco import cashflow, emissions
        from tco.pipeline import cost_inputs

        self.result = result
        self.summary = summary
        self.s = result.scenario
        self.cur = str(self.s.study.currency)
        self.ops = [tr.operation for tr in result.trucks.values()]
        self.inputs = cost_inputs(self.s, self.ops)
        self.params = cashflow.flat_params(self.inputs)
        self.em_params = emissions.flat_params(self.s.emissions)
        self.cf = result.cashflow
        self.flows = self.cf.flows
        self.lines = self.flows.lines  # per truck: line -> amounts (all lines computed)
        self.trucks = list(self.flows.trucks)
        self.powertrains = list(self.flows.powertrains)
        self.ref = self.flows.baseline
        self.N = int(self.cf.analysis_years)
        self.real = self.cf.money_basis == "real"
        self.sources = {r["field"]: r["source"] for r in result.assumptions}
        d = self.inputs.depot
        self.served = d.trucks_served or max(1, sum(
            1 for t, op in zip(self.inputs.trucks, self.ops) if _uses_depot(t.powertrain, op)))
        self.wb = Workbook()
        self.blocks: list[_Block] = []
        self.em_blocks: list[_EmBlock] = []
        self.bands_of: dict[int, list[tuple[str, str]]] = {}  # truck -> (kWh name, price)
        self.derived_f: dict[str, str] = {}  # derived input name -> its formula

    # ------------------------------------------------------------------------ build
    def build(self) -> Workbook:
        wb = self.wb
        self.ws_su = wb.active
        self.ws_su.title = _SU
        self.ws_in = wb.create_sheet(_IN)
        self.ws_sc = wb.create_sheet(_SC)
        self.ws_cf = wb.create_sheet(_CF)
        self.ws_em = wb.create_sheet(_EM)
        self.ws_en = wb.create_sheet(_EN)
        self._inputs_sheet()
        self._cashflow_sheet()
        self._emissions_sheet()
        self._energy_sheet()
        self._summary_sheet()
        unc = self.summary.get("uncertainty")
        if unc:
            self._sensitivity_sheet(unc)
            self._statistics_sheet(unc)
        self._verify_step_cells()
        self._formats_and_printing()
        # spreadsheet programs recompute everything when the file is opened (the file also
        # carries each formula's result, tco.report.workbook_values)
        wb.calculation = CalcProperties(fullCalcOnLoad=True)
        return wb

    def _formats_and_printing(self) -> None:
        """Money formats carry the currency code; every sheet gets its page setup."""
        money = {wbb.MONEY: wbb.money_format(self.cur, 0),
                 wbb.MONEY_CENTS: wbb.money_format(self.cur, 2)}
        years = range(_FIRST_COL, _FIRST_COL + self.N + 1)
        cur = self.cur
        chart = getattr(self, "su_chart", (0, -1))

        def names_currency(t) -> bool:  # a unit cell or a label stating the currency
            return isinstance(t, str) and (t == cur or t.startswith((cur + "/", cur + " "))
                                           or f"[{cur}" in t)

        for ws in self.wb.worksheets:
            if ws.title == _IN:
                continue  # the Unit column names the currency of every input
            titled: set[int] = set()  # columns whose table heading names the currency
            for row in ws.iter_rows():
                if any(c.fill == wbb.HEADER_FILL for c in row):
                    titled = {c.column for c in row if names_currency(c.value)}
                    continue
                if not any(c.value is not None for c in row):
                    titled = set()  # a table ends at an empty row
                # the unit is shown once: year grids and tables whose title names the
                # currency, rows with a Unit column or a label "[EUR…]" keep plain
                # amounts; a figure with its unit nowhere else shows the code
                grid = ws.title == _CF and row[_FIRST_COL].data_type == "f" \
                    if len(row) > _FIRST_COL else False
                if any(names_currency(c.value) for c in row) or (
                        ws.title == _SU and chart[0] <= row[0].row <= chart[1]):
                    continue
                for c in row:
                    f = money.get(c.number_format)
                    if f and not (grid and c.column in years) and c.column not in titled:
                        c.number_format = f
        self._wrap_cut_text()
        # a unit after a right-aligned number: one character apart, not touching it
        nt = len(self.trucks)
        for title, col in ((_IN, 4), (_SC, 4), (_SU, 3 + nt), (_EN, 3 + nt),
                           (_CF, _FIRST_COL + self.N + 3), (_SE, 10), (_ST, 7)):
            if title not in self.wb.sheetnames:
                continue
            ws = self.wb[title]
            for (cell,) in ws.iter_rows(min_row=2, min_col=col, max_col=col):
                if isinstance(cell.value, str):
                    a = cell.alignment
                    cell.alignment = Alignment(horizontal="left", indent=1,
                                               vertical=a.vertical,
                                               wrap_text=a.wrap_text)
        study = self.summary.get("scenario", {}).get("name", self.s.study.name)
        titles = {_SU: ("1:1", None), _IN: ("1:1", None), _SC: ("1:2", None),
                  _CF: (f"1:{_YEAR_ROW}", "A:B"), _EM: (f"1:{_YEAR_ROW}", "A:B"),
                  _EN: ("1:3", "A:B"), _SE: ("1:2", None), _ST: ("1:4", None)}
        for ws in self.wb.worksheets:
            rows, cols = titles.get(ws.title, (None, None))
            wbb.print_setup(ws, study, title_rows=rows, title_cols=cols)

    def _wrap_cut_text(self) -> None:
        """Wrap a text that the next cell would cut (a long label before its key, a key
        before its figure) and a long note in a table's last column (the page edge would
        cut it); :func:`workbook_base.fit_row_heights` then gives the row its lines."""
        from openpyxl.utils import get_column_letter

        last = {_CF: _FIRST_COL + self.N + 3}
        for ws in self.wb.worksheets:
            if ws.title in (_IN, _SC):
                continue  # wrapped where it is written (the scenario table: one line a field)
            for row in ws.iter_rows():
                cells = [c for c in row if c.value is not None]
                for k, c in enumerate(cells):
                    if not isinstance(c.value, str) or c.data_type == "f" or \
                            c.fill == wbb.HEADER_FILL:
                        continue
                    width = ws.column_dimensions[get_column_letter(c.column)].width or 8.43
                    bold = 1.15 if c.font is not None and c.font.b else 1.0
                    if len(c.value) * bold <= width * 1.15:
                        continue
                    cut = k + 1 < len(cells) and cells[k + 1].column == c.column + 1
                    edge = c.column == last.get(ws.title) or (
                        ws.title == _SE and c.column >= 10)
                    if cut or edge:
                        a = c.alignment
                        c.alignment = Alignment(wrap_text=True, vertical="top",
                                                horizontal=a.horizontal, indent=a.indent)

    # ------------------------------------------------------------------------ sources
    def source(self, path: str) -> str:
        """The source text of a scenario field; the field is remembered for the named
        input written next (:meth:`InputsSheet._inp` links the row to it)."""
        s = self.sources.get(path)
        text = "scenario" if s is None else ("user" if s == "user" else f"default: {s}")
        self._src_seen = (path, text)
        return text

    def pre(self, i: int) -> str:
        """Prefix of truck i's defined names."""
        return f"t{i + 1}_"

    def _aged(self, i: int) -> bool:
        """Truck i carries yearly en-route energy, time and depot share as its battery
        ages (the cash-flow model's ``_Context.aged``)."""
        return len(self.ops[i].public_energy_by_year) == self.N

    def _replacements(self, rows: dict) -> list[tuple[str, str]]:
        """Battery replacements as tax assets (capitalised, depreciated like the truck):
        (nominal cost of year t's replacements, t), read from the battery row."""
        if "battery_replacement" not in rows:
            return []
        r = rows["battery_replacement"]
        inflate = (lambda t: f"*(1+inflation)^{t}") if self.real else (lambda t: "")
        return [(f"{_col(_FIRST_COL + t)}${r}{inflate(t)}", str(t))
                for t in range(1, self.N + 1)]
