"""Building blocks of the live workbook: injection-proof text, a style kit, named inputs,
native charts.

The workbook the tool writes is *live*: its results are spreadsheet formulas over an
inputs sheet, so a reader can change an input and see the effect. That makes two things
essential here:

* **Text is never a formula.** A scenario name like ``=HYPERLINK("http://x","y")`` or a
  note starting with ``+``, ``-`` or ``@`` must land as text. openpyxl turns any string
  starting with ``=`` into a formula on assignment; :func:`safe_text` assigns the value and
  then forces the cell type to string, which survives saving and reloading (verified with
  openpyxl 3.1 and LibreOffice, see ``tests/test_report_safety.py``).
* **Inputs have names.** :func:`add_named_input` writes one input row and defines a
  workbook-level name for its value cell, so formulas read ``=NPV(discount_rate, ...)``
  instead of ``=NPV(Inputs!$C$5, ...)``.

openpyxl computes nothing: formulas are stored without cached values until a spreadsheet
program recalculates them (``tests/recalc.py`` does that with LibreOffice for the tests).
"""
from __future__ import annotations

import math
import re
from numbers import Real

from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE
from openpyxl.chart import BarChart, LineChart, Reference
from openpyxl.chart.data_source import NumFmt
from openpyxl.styles import Alignment, Border, Font, PatternFill, Side
from openpyxl.utils import absolute_coordinate, get_column_letter, quote_sheetname
from openpyxl.workbook.defined_name import DefinedName

__all__ = [
    "MONEY", "MONEY_CENTS", "PERCENT", "ENERGY", "ENERGY_RATE", "MASS", "INTEGER", "YEAR",
    "HEADER_FONT", "HEADER_FILL", "INPUT_FILL", "INPUT_COLUMNS", "MAX_CELL_CHARS",
    "safe_text", "write_value", "header_row", "freeze", "set_widths", "input_header",
    "add_named_input", "add_chart", "check_name", "print_setup", "fit_row_heights",
    "money_format",
]

# ---- number formats (currency-neutral: the currency code goes into the column header) --
#: Money, whole units, negatives in red with a minus sign. [currency]
MONEY = '#,##0;[Red]-#,##0'
#: Money with cents, for prices per unit. [currency/kWh, currency/L ...]
MONEY_CENTS = '#,##0.00;[Red]-#,##0.00'
#: A fraction shown as a percentage (cell holds 0.06 for 6 %). [-]
PERCENT = '0.0%'
#: Energy amounts. [kWh, MWh]
ENERGY = '#,##0.0'
#: Energy per distance. [kWh/km, kWh/mi]
ENERGY_RATE = '0.000'
#: Masses of emissions. [t, kg]
MASS = '#,##0.0'
#: Counts. [-]
INTEGER = '#,##0'
#: Calendar or model year. [-]
YEAR = '0'

# ---- cell styles -------------------------------------------------------------------
HEADER_FONT = Font(bold=True, color="FFFFFF")
HEADER_FILL = PatternFill("solid", fgColor="0B3954")
#: Light yellow marks cells meant to be edited (common practice in financial models).
INPUT_FILL = PatternFill("solid", fgColor="FFF2CC")
_HEADER_BORDER = Border(bottom=Side(style="thin", color="0B3954"))
_WRAP_TOP = Alignment(wrap_text=True, vertical="top")

#: Longest text a cell holds (the xlsx format's limit). [characters]
MAX_CELL_CHARS = 32767

#: Columns of an inputs sheet, written by :func:`input_header`.
INPUT_COLUMNS = ("Input", "Name", "Value", "Unit", "Source")
_VALUE_COL = 3  # column C holds the value a defined name points at


def safe_text(cell, value):
    """Write ``value`` into ``cell`` as literal text, never as a formula.

    Parameters
    ----------
    cell : openpyxl.cell.Cell
        Target cell.
    value : object
        Any value; written as ``str(value)`` (``None`` writes an empty cell).

    Returns
    -------
    openpyxl.cell.Cell
        The cell, holding a string (``data_type == "s"``).

    Notes
    -----
    Assigning first and setting ``data_type = "s"`` afterwards is what works in openpyxl
    3.1: setting the type first, or a leading apostrophe, does not (library notes).
    Characters the xlsx format cannot store (ASCII control characters other than tab,
    line feed and carriage return) are dropped, and text is cut at the format's
    32 767-character limit, so a hostile name cannot make the save fail.
    """
    if value is None:
        cell.value = None
        return cell
    text = ILLEGAL_CHARACTERS_RE.sub("", str(value))
    if len(text) > MAX_CELL_CHARS:
        text = text[: MAX_CELL_CHARS - 1] + "…"
    cell.value = text
    cell.data_type = "s"
    return cell


def write_value(cell, value, number_format: str | None = None):
    """Write a number as a number and anything else as safe text.

    Parameters
    ----------
    cell : openpyxl.cell.Cell
        Target cell.
    value : float, int, str or None
        Numbers (not ``bool``) are written as numbers; a non-finite number (NaN, inf)
        leaves the cell empty, since the xlsx format has no such values. Everything else
        goes through :func:`safe_text`.
    number_format : str, optional
        Number format for numeric cells, e.g. :data:`MONEY`.

    Returns
    -------
    openpyxl.cell.Cell
        The cell.
    """
    if isinstance(value, Real) and not isinstance(value, bool):
        v = float(value)
        cell.value = v if math.isfinite(v) else None
        if number_format:
            cell.number_format = number_format
        return cell
    return safe_text(cell, value)


def header_row(ws, row: int, labels, start_col: int = 1) -> None:
    """Write a styled header row (bold white on dark blue, wrapped).

    Parameters
    ----------
    ws : openpyxl.worksheet.worksheet.Worksheet
        Target sheet.
    row : int
        Row number (1-based). [-]
    labels : iterable of str
        Header texts, written as safe text.
    start_col : int
        First column (1-based). [-]
    """
    for i, label in enumerate(labels):
        c = safe_text(ws.cell(row=row, column=start_col + i), label)
        c.font = HEADER_FONT
        c.fill = HEADER_FILL
        c.border = _HEADER_BORDER
        c.alignment = Alignment(wrap_text=True, vertical="bottom")


def freeze(ws, cell: str = "A2") -> None:
    """Freeze the rows above and the columns left of ``cell`` (e.g. ``"B2"``)."""
    ws.freeze_panes = cell


def set_widths(ws, widths: dict) -> None:
    """Set column widths.

    Parameters
    ----------
    ws : Worksheet
        Target sheet.
    widths : dict
        Column letter or 1-based index → width in character units. [-]
    """
    for col, width in widths.items():
        letter = get_column_letter(col) if isinstance(col, int) else col
        ws.column_dimensions[letter].width = width


_NAME_RE = re.compile(r"^[A-Za-z_\\][A-Za-z0-9_.]*$")
_A1_RE = re.compile(r"^[A-Za-z]{1,3}[0-9]+$")
_R1C1_RE = re.compile(r"^[Rr]([0-9]*)([Cc][0-9]*)?$|^[Cc][0-9]*$")


def check_name(name: str) -> str:
    """Check a workbook defined name against the spreadsheet naming rules.

    Rules (ECMA-376 Part 1, §18.2.5 definedName, and the spreadsheet programs' own
    checks, common practice): starts with a letter, ``_`` or ``\\``; then letters,
    digits, ``_`` and ``.``; at most 255 characters; must not look like a cell reference
    (``AB12``, ``R1C1``, ``R``, ``C``) or be ``TRUE``/``FALSE``.

    Raises
    ------
    ValueError
        The name breaks a rule. Names are chosen by the workbook writer, not the user,
        so this is a programming error.
    """
    if (not isinstance(name, str) or not _NAME_RE.match(name) or len(name) > 255
            or _A1_RE.match(name) or _R1C1_RE.match(name)
            or name.upper() in ("TRUE", "FALSE")):
        raise ValueError(f"not a valid workbook name: {name!r}")
    return name


def input_header(ws, row: int = 1) -> None:
    """Write the header of an inputs sheet (:data:`INPUT_COLUMNS`), widths and freeze."""
    header_row(ws, row, INPUT_COLUMNS)
    set_widths(ws, {"A": 38, "B": 26, "C": 16, "D": 12, "E": 60})
    freeze(ws, f"A{row + 1}")


def add_named_input(wb, sheet, row: int, name: str, label: str, value, unit: str,
                    source: str, *, number_format: str | None = None) -> str:
    """Write one input row and name its value cell at workbook level.

    Row layout (see :data:`INPUT_COLUMNS`): A label, B name, C value (input-coloured),
    D unit, E source.

    Parameters
    ----------
    wb : openpyxl.Workbook
        The workbook that receives the defined name.
    sheet : Worksheet or str
        The inputs sheet, or its title.
    row : int
        Row number (1-based). [-]
    name : str
        Workbook-level defined name, e.g. ``"discount_rate"`` (checked by
        :func:`check_name`; must be new in the workbook).
    label : str
        What the input is, in words (safe text).
    value : float, int or str
        The value in the unit shown; numbers stay numbers, text stays text.
    unit : str
        Display unit, e.g. ``"EUR/kWh"`` (safe text).
    source : str
        ``"user"`` or ``"default: <citation>"`` (safe text).
    number_format : str, optional
        Number format of the value cell, e.g. :data:`PERCENT`.

    Returns
    -------
    str
        The absolute reference the name points at, e.g. ``"'Inputs'!$C$5"``.

    Raises
    ------
    ValueError
        Invalid or duplicate name.
    """
    ws = wb[sheet] if isinstance(sheet, str) else sheet
    check_name(name)
    if any(existing.lower() == name.lower() for existing in wb.defined_names):
        raise ValueError(f"workbook name already defined: {name!r}")
    safe_text(ws.cell(row=row, column=1), label).alignment = _WRAP_TOP
    safe_text(ws.cell(row=row, column=2), name)
    value_cell = write_value(ws.cell(row=row, column=_VALUE_COL), value, number_format)
    value_cell.fill = INPUT_FILL
    safe_text(ws.cell(row=row, column=4), unit)
    safe_text(ws.cell(row=row, column=5), source).alignment = _WRAP_TOP
    ref = f"{quote_sheetname(ws.title)}!{absolute_coordinate(value_cell.coordinate)}"
    # quote_sheetname leaves simple titles bare; quote always for one stable form.
    if not ref.startswith("'"):
        ref = f"'{ws.title}'!{absolute_coordinate(value_cell.coordinate)}"
    wb.defined_names[name] = DefinedName(name, attr_text=ref)
    return ref


def add_chart(ws, kind: str, *, data_ws, header_row: int, first_row: int, last_row: int,
              cat_col: int, first_col: int, last_col: int, anchor: str, title: str,
              x_title: str, y_title: str, stacked: bool = False,
              y_number_format: str | None = None, width: float = 18.0,
              height: float = 9.0, horizontal: bool = False):
    """Add a native line or bar chart over a block of the workbook.

    The block on ``data_ws``: categories (e.g. years) in ``cat_col``, one series per
    column ``first_col..last_col``, series names in ``header_row``, values in rows
    ``first_row..last_row``. The chart reads the cells, so it follows the formulas when
    an input changes.

    Parameters
    ----------
    ws : Worksheet
        Sheet the chart is drawn on.
    kind : {"line", "bar"}
        Line chart or clustered/stacked column chart.
    data_ws : Worksheet
        Sheet holding the data block.
    header_row, first_row, last_row, cat_col, first_col, last_col : int
        The block, 1-based. [-]
    anchor : str
        Top-left cell of the chart, e.g. ``"H2"``.
    title, x_title, y_title : str
        Chart and axis titles (units in the axis titles).
    stacked : bool
        Stack the bars (``kind="bar"`` only).
    y_number_format : str, optional
        Number format of the value axis, e.g. :data:`MONEY`.
    width, height : float
        Chart size. [cm]
    horizontal : bool
        Bars along the value axis, categories read down the side, first row on top
        (``kind="bar"`` only; a tornado: long input names stay readable).

    Returns
    -------
    openpyxl.chart.LineChart or openpyxl.chart.BarChart
        The chart, already added to ``ws``.
    """
    if kind == "line":
        chart = LineChart()
    elif kind == "bar":
        chart = BarChart()
        chart.type = "bar" if horizontal else "col"
        if horizontal:
            chart.x_axis.scaling.orientation = "maxMin"  # the first row at the top
            chart.x_axis.tickLblPos = "low"  # names at the left edge, clear of the bars
        if stacked:
            chart.grouping = "stacked"
            chart.overlap = 100
        chart.gapWidth = 60
    else:
        raise ValueError(f"unknown chart kind {kind!r} (use 'line' or 'bar')")
    data = Reference(data_ws, min_col=first_col, max_col=last_col, min_row=header_row,
                     max_row=last_row)
    cats = Reference(data_ws, min_col=cat_col, max_col=cat_col, min_row=first_row,
                     max_row=last_row)
    chart.add_data(data, titles_from_data=True)
    chart.set_categories(cats)
    chart.title = title
    chart.x_axis.title = x_title
    chart.y_axis.title = y_title
    # openpyxl 3.1 writes axes as deleted unless told otherwise; recent spreadsheet
    # programs then hide them.
    chart.x_axis.delete = False
    chart.y_axis.delete = False
    if y_number_format:
        chart.y_axis.numFmt = NumFmt(formatCode=y_number_format, sourceLinked=False)
    chart.legend.position = "b"
    chart.width, chart.height = width, height
    ws.add_chart(chart, anchor)
    return chart


# ---- printing ----------------------------------------------------------------------
#: Points per line of wrapped 11-point text (the default row height is 15 pt).
_LINE_PT = 15.0
#: Characters of 11-point text per unit of column width (measured on LibreOffice's PDF
#: of the demo: about 1.2; a column width counts the widest digit).
_CHARS_PER_WIDTH = 1.2


def _width(ws, letter: str) -> float:
    d = ws.column_dimensions.get(letter)
    return float(d.width) if d is not None and d.width else 8.43


def fit_row_heights(ws) -> None:
    """Give every row with wrapped text the height its longest cell needs.

    Spreadsheet programs grow a row for wrapped text only when they lay the row out
    themselves; a written height (or none, for a file that is never re-laid out, as
    LibreOffice treats an xlsx on load) leaves wrapped text overlapping the next row. The
    line count is estimated from the text length and the column width (common practice;
    an estimate, so it errs toward a taller row).
    """
    from openpyxl.utils import get_column_letter as letter_of

    merged = {}
    for m in ws.merged_cells.ranges:
        if m.min_row == m.max_row:
            merged[(m.min_row, m.min_col)] = sum(
                _width(ws, letter_of(k)) for k in range(m.min_col, m.max_col + 1))
    for row in ws.iter_rows():
        lines = 1
        for c in row:
            if not isinstance(c.value, str) or c.data_type == "f":
                continue
            if not (c.alignment is not None and c.alignment.wrap_text):
                continue
            width = merged.get((c.row, c.column)) or _width(ws, letter_of(c.column))
            per_line = max(1.0, width * _CHARS_PER_WIDTH - 1)
            n = sum(max(1, math.ceil(len(part) / per_line)) for part in c.value.split("\n"))
            lines = max(lines, n)
        if lines > 1:
            ws.row_dimensions[row[0].row].height = _LINE_PT * lines + 2
            for c in row:  # everything in a tall row starts at its top (indent kept)
                if c.value is not None and (c.alignment is None
                                            or c.alignment.vertical is None):
                    a = c.alignment
                    c.alignment = Alignment(wrap_text=a.wrap_text if a is not None else None,
                                            horizontal=a.horizontal if a is not None
                                            else None,
                                            indent=a.indent if a is not None else 0,
                                            vertical="top")


#: Printable A4 area with the margins of :func:`print_setup` (portrait). [mm]
_A4_PRINT = (210.0 - 2 * 10.2, 297.0 - 2 * 15.2 - 12.0)
#: Printed width of one unit of column width at 100 % (about 7 px at 96 dpi). [mm]
_MM_PER_WIDTH = 1.9
#: Smallest print scale accepted when choosing an orientation (text stays readable). [-]
_MIN_SCALE = 0.6
#: Height LibreOffice gives a row of one line of 11-point text with no height set
#: (measured on its PDF export of the demo workbook: 41 rows plus 3 title rows in 200.8 mm
#: of page at scale 1, 12.9 pt a row). [pt]
_DEFAULT_ROW_PT = 12.8


def _fewer_pages_landscape(ws) -> bool:
    """Landscape when it prints the sheet, one page wide, on fewer pages than portrait
    (an estimate from the column widths and row heights; ties and a portrait scale below
    :data:`_MIN_SCALE` go to landscape)."""
    from openpyxl.utils import get_column_letter as letter_of

    def hidden(c: int) -> bool:
        d = ws.column_dimensions.get(letter_of(c))
        return d is not None and bool(d.hidden)

    # LibreOffice prints up to the last column with content that is not hidden, a merged
    # range or a chart reaches
    used = max([c.column for row in ws.iter_rows() for c in row
                if c.value is not None and not hidden(c.column)]
               + [m.max_col for m in ws.merged_cells.ranges] + [1])
    width = sum(_width(ws, letter_of(c)) for c in range(1, used + 1)
                if not hidden(c)) * _MM_PER_WIDTH
    for chart in getattr(ws, "_charts", []):
        a = chart.anchor  # "L5" until saved, else an anchor object (0-based column)
        if isinstance(a, str):
            from openpyxl.utils.cell import column_index_from_string, coordinate_from_string

            start = column_index_from_string(coordinate_from_string(a)[0]) - 1
        else:
            start = a._from.col
        left = sum(_width(ws, letter_of(c)) for c in range(1, start + 1)
                   if not hidden(c)) * _MM_PER_WIDTH
        width = max(width, left + 10.0 * chart.width)  # chart width [cm]
    height = sum((ws.row_dimensions[r].height if r in ws.row_dimensions and
                  ws.row_dimensions[r].height else _DEFAULT_ROW_PT) for r in
                 range(1, ws.max_row + 1)) * 0.3528  # pt -> mm
    pages = {}
    for land, (w, h) in ((False, _A4_PRINT), (True, _A4_PRINT[::-1])):
        scale = min(1.0, w / max(width, 1.0))
        pages[land] = (math.ceil(height * scale / h), scale)
    if pages[False][1] < _MIN_SCALE:
        return True
    return pages[True][0] <= pages[False][0]


def _header_text(text: str) -> str:
    """Text for a page header: ``&`` starts a code there, so it is doubled."""
    text = ILLEGAL_CHARACTERS_RE.sub("", str(text)).replace("&", "&&")
    return text[:200]


def print_setup(ws, study: str, *, title_rows: str | None = None,
                title_cols: str | None = None, landscape: bool | None = None) -> None:
    """Page setup of a sheet: A4, one page wide, repeated titles, header and footer.

    Parameters
    ----------
    ws : Worksheet
    study : str
        Study name for the page header (literal text; ``&`` codes are escaped).
    title_rows : str, optional
        Rows repeated at the top of every page, e.g. ``"1:3"``.
    title_cols : str, optional
        Columns repeated at the left of every page, e.g. ``"A:B"``.
    landscape : bool, optional
        Orientation; default: landscape when the used columns are wider than about 110
        characters, portrait otherwise.
    """
    from openpyxl.utils import get_column_letter as letter_of
    from openpyxl.worksheet.properties import PageSetupProperties

    fit_row_heights(ws)
    if landscape is None:
        landscape = _fewer_pages_landscape(ws)
    ws.page_setup.orientation = "landscape" if landscape else "portrait"
    ws.page_setup.paperSize = ws.PAPERSIZE_A4
    ws.sheet_properties.pageSetUpPr = PageSetupProperties(fitToPage=True)
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0  # as many pages down as needed
    ws.page_margins.left = ws.page_margins.right = 0.4
    ws.page_margins.top = ws.page_margins.bottom = 0.6
    ws.page_margins.header = ws.page_margins.footer = 0.25
    ws.print_options.gridLines = False
    if title_rows:
        ws.print_title_rows = title_rows
    if title_cols:
        ws.print_title_cols = title_cols
    ws.oddHeader.left.text = _header_text(study)
    ws.oddHeader.right.text = "&A"  # sheet name
    ws.oddFooter.center.text = "Page &P of &N"
    ws.oddFooter.right.text = "&D"


def money_format(currency: str, digits: int = 0) -> str:
    """A number format showing the ISO 4217 code after the amount (as the PDF report
    does: ``244,534 EUR``), negatives in red with a minus sign.

    Parameters
    ----------
    currency : str
        Three-letter code; anything else is left out of the format (a format string
        must not carry user text).
    digits : int
        Decimals shown.
    """
    body = "#,##0" + ("." + "0" * digits if digits else "")
    code = currency if re.fullmatch(r"[A-Z]{3}", str(currency or "")) else ""
    suffix = f' "{code}"' if code else ""
    return f"{body}{suffix};[Red]-{body}{suffix}"
