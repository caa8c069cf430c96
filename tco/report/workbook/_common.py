"""Shared constants, cell helpers and row records of the live workbook's sheet builders."""
from __future__ import annotations

from dataclasses import dataclass, field
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from tco.report import workbook_base as wbb
from tco.report.workbook_base import safe_text
from tco.units import J_PER_KWH, M_PER_MILE


#: Sheet titles in workbook order (the last two only when uncertainty results exist).
SHEETS = ("Summary", "Inputs", "Scenario", "Cash flow", "Emissions", "Energy", "Sensitivity",
          "Sample statistics")


_SU, _IN, _SC, _CF, _EM, _EN, _SE, _ST = SHEETS


_J_PER_KWH = J_PER_KWH  # from tco.units, the one home of conversion constants


_M_PER_KM = 1000.0


_M_PER_MILE = M_PER_MILE  # international mile, exact (tco.units)


_M3_PER_L = 1e-3


_S_PER_H = 3600.0


_W_PER_KW = 1000.0


#: Rows of the year sheets: header with the years, then the first data row.
_YEAR_ROW = 3


_FIRST_COL = 3  # column C = first year


_RATE = "0.00%"


_FACTOR = "0.000000"


#: Grey marks a model figure that cannot be live (Monte Carlo, step-function break-evens).
_MODEL_FILL = PatternFill("solid", fgColor="D9D9D9")


_DERIVED_FILL = PatternFill("solid", fgColor="E2EFDA")  # light green: formula on Inputs


_SECTION_FONT = Font(bold=True, size=12, color="0B3954")


_TITLE_FONT = Font(bold=True, size=14, color="0B3954")


_BOLD = Font(bold=True)


_WRAP = Alignment(wrap_text=True, vertical="top")


_NOT_LIVE = "model figure (not live)"


#: Hidden columns of the Inputs sheet: each named input's value as written, the scenario
#: field it shows (empty: a model figure) and the factor from the value shown to the field
#: table's unit (``tco.scenario.xlsx`` reads an edited named input through them).
_AS_WRITTEN_COL = 8
_FIELD_COL = 9
_FIELD_FACTOR_COL = 10


#: Factor on a break-even input in the workings that measure the present value's slope.
_BUMP = 1.01


# --------------------------------------------------------------------------- helpers
def _col(c: int) -> str:
    return get_column_letter(c)


def _ref(sheet: str, col: int, row: int) -> str:
    """Absolute reference to a cell of another sheet: ``'Cash flow'!$C$10``."""
    return f"'{sheet}'!${_col(col)}${row}"


def _title(ws, text: str, row: int = 1) -> None:
    safe_text(ws.cell(row=row, column=1), text).font = _TITLE_FONT


def _section(ws, row: int, text: str, col: int = 1) -> None:
    safe_text(ws.cell(row=row, column=col), text).font = _SECTION_FONT


def _number_header(ws, row: int, col: int, value) -> None:
    c = ws.cell(row=row, column=col, value=value)
    c.font = wbb.HEADER_FONT
    c.fill = wbb.HEADER_FILL
    c.alignment = Alignment(horizontal="center")
    c.number_format = wbb.YEAR


def _unit_text(unit: str, currency: str) -> str:
    """A model unit string (``1/L``, ``currency``, ``×``) in words for the sheet."""
    if unit in ("", None):
        return "-"
    if unit == "currency":
        return currency
    if unit.startswith("1/"):
        return f"{currency}/{unit[2:]}"
    return unit


@dataclass
class _Block:
    """Where one truck's rows sit on the Cash flow sheet."""

    rows: dict[str, int] = field(default_factory=dict)
    present_value: int = 0
    levelized_km: int = 0
    levelized_mile: int = 0
    difference: int | None = None
    difference_km: int | None = None
    difference_mile: int | None = None
    cumulative: int = 0
    distance: int = 0
    total: int = 0


@dataclass
class _EmBlock:
    """Where one truck's rows sit on the Emissions sheet."""

    rows: dict[str, int] = field(default_factory=dict)
    avoided: dict[str, int] = field(default_factory=dict)


def _uses_depot(powertrain: str, op) -> bool:
    # The cash-flow model's rule (tco.cashflow._Context._uses_depot).
    return powertrain == "electric" and op.grid_energy_depot > 0
