"""The live workbook: inputs, cash flows and emissions as spreadsheet formulas.

:func:`write_workbook` renders a :class:`tco.result.Result` (and its ``summary.json``
content) as an ``.xlsx`` workbook whose results are *formulas over named inputs*, so a
finance analyst can audit every figure and change an input (a diesel price, an operating
day count, a grant) and see the present values move. Sheets:

``Summary``
    Key figures per truck as formulas pointing at the other sheets (present value,
    levelized cost per km and per mile, differences to the baseline truck, emissions and
    emissions avoided, abatement cost), the feasibility texts, warnings and cautions, and a
    native chart of the cumulative cost by truck.
``Inputs``
    One row per input (label, defined name, value, unit, source). Money per physical unit is
    shown per litre, per kWh, per km and per kW (converted from SI at this edge; the
    formulas work in these units). A few derived cells (the yearly scale of each truck's
    operation, its loan amount, its depot energy per time-of-use band) are formulas too.
    Below: every scenario field with its source, for reference.
``Cash flow``
    Per truck, one row per cost line the model computes for it (years 0..N in columns),
    each cell a formula following the conventions of :mod:`tco.cashflow` (running costs
    ``× (1 + e)^y``, one-offs ``× (1 + e)^t`` (one index), loan interest and principal by
    ``CUMIPMT``/``CUMPRINC``, depot costs shared, taxes from the deductible rows); total,
    cumulative and distance rows; present value ``NPV(rate, years 1..N) + year 0``,
    levelized cost and the differences to the baseline truck.
``Emissions``
    The grid-intensity path and, per truck and year, the line items of
    :mod:`tco.emissions` and the Scope 1/2/3, tank-to-wheel and well-to-wheel frames as
    formulas over named emission factors; emissions avoided; a native chart by year.
``Energy``
    The duty-cycle summary per truck (per trip, per distance metric and US, per year), as
    values with units.
``Sensitivity``, ``Sample statistics``
    When the uncertainty studies ran: the tornado rows and break-even values, and the Monte
    Carlo statistics and probabilities (values: they come from thousands of model runs).

All text from the scenario goes through :func:`tco.report.workbook_base.safe_text`, so a
name such as ``=HYPERLINK(...)`` lands as text; formulas are built only from defined names,
cell references and numbers, never from scenario text.

One builder per sheet: :mod:`.inputs_sheet`, :mod:`.cashflow_sheet`,
:mod:`.emissions_sheet`, :mod:`.energy_sheet`, :mod:`.summary_sheet`,
:mod:`.uncertainty_sheets`, composed by :class:`.book.Book`; shared helpers in
:mod:`._common`.
"""
from __future__ import annotations

from pathlib import Path
from openpyxl import Workbook

from tco.report.workbook._common import SHEETS
from tco.report.workbook.book import Book

__all__ = ["SHEETS", "write_workbook", "build_workbook"]


def write_workbook(result, summary: dict, path) -> None:
    """Write the live workbook of a Result.

    Parameters
    ----------
    result : tco.result.Result
        The evaluated scenario.
    summary : dict
        Its ``summary.json`` content (:func:`tco.report.summary.build_summary`).
    path : str or Path
        The ``.xlsx`` file to write (overwritten).
    """
    from tco.report.workbook_values import save_with_values

    save_with_values(build_workbook(result, summary), Path(path))


def build_workbook(result, summary: dict) -> Workbook:
    """The live workbook of a Result as an :class:`openpyxl.Workbook` (not saved).

    Parameters
    ----------
    result : tco.result.Result
    summary : dict
        ``summary.json`` content of the same Result.

    Returns
    -------
    openpyxl.Workbook
    """
    return Book(result, summary).build()
