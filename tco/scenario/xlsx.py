"""Scenarios in a spreadsheet: the field table a finance user edits, read and written.

A scenario can live in an ``.xlsx`` workbook as well as a TOML file. The workbook holds a
*field table*: one row per scenario input, with columns

``Field``  the input's path, as in the TOML (``prices.diesel``,
           ``route.legs[0].segments[2].speed``, ``trucks[1].costs.purchase_price``);
``Kind``   how the value cell is read: ``number``, ``text``, ``yes/no`` or ``list``
           (a list or table written as JSON, e.g. ``[0.8, 0.68]`` or ``{"2030": 200}``);
``Value``  the value in the field's unit; **empty means the default**;
``Unit``   the field's unit (a number is read in it; text such as ``"36 t"`` may carry
           its own unit, as in the TOML);
then description, source and default.

Where the table lives:

* ``tco init --xlsx NAME.xlsx`` writes a starter workbook with the table split over three
  sheets: ``Inputs`` (study, ambient, route, finance, prices, depot, emissions,
  uncertainty), ``Route`` (legs and their segments) and ``Trucks``; choices have list
  validation and numbers a range check;
* the workbook ``tco run`` delivers carries the same table on its ``Scenario``
  sheet (the scenario as run, user values as written), so ``tco run workbook.xlsx``
  reruns the whole model from it. The yellow named inputs of its ``Inputs`` sheet (the
  cells the workbook's formulas read) are read too: one edited there goes into the field it shows
  (hidden columns H–J hold the value as written, the field and the factor from the unit
  shown to the field's), so a finance user edits the visible input and reruns.

The reader (:func:`load_workbook_scenario`) is guarded like the TOML one: macro-enabled
files (``.xlsm``, or a VBA project inside) are refused, so are files or sheets too large
to be a scenario; a formula in a value cell is an error naming the cell (formulas are
never evaluated); every error names the sheet, row and column. Trace files are found
relative to the workbook's folder, as for TOML.
"""
from __future__ import annotations

import json
import math
import re
import typing
import zipfile
from pathlib import Path

from pydantic import BaseModel

from tco.report import formatting as fm
from tco.errors import InputError

__all__ = ["FIELD_HEADER", "MAX_ROWS", "MAX_COLUMNS", "MAX_BYTES", "field_rows",
           "write_field_table", "write_starter_workbook", "load_workbook_scenario",
           "is_workbook"]

#: Header of a field table (columns A..G).
FIELD_HEADER = ("Field", "Kind", "Value", "Unit", "Description", "Source", "Default")
#: Largest sheet accepted (rows, columns): a scenario has a few hundred fields. [-]
MAX_ROWS, MAX_COLUMNS = 20_000, 60
#: Largest workbook accepted, packed and unpacked. [bytes]
MAX_BYTES = 20_000_000
_UNPACKED_LIMIT = 200_000_000
_KINDS = ("number", "text", "yes/no", "list")
_PATH_RE = re.compile(r"^[a-z_][a-z0-9_]*(\[[0-9]+\])?(\.[a-z_0-9][a-z0-9_]*(\[[0-9]+\])?)*$")


def is_workbook(path) -> bool:
    """True for a spreadsheet file name (``.xlsx``, ``.xlsm``, ``.xls``)."""
    return Path(path).suffix.lower() in (".xlsx", ".xlsm", ".xls")


# --------------------------------------------------------------------------- rows
def _kind(value) -> str:
    if isinstance(value, bool):
        return "yes/no"
    if isinstance(value, (int, float)):
        return "number"
    if isinstance(value, (list, dict, tuple)):
        return "list"
    return "text"


def _raw_at(raw: dict, path: str):
    """The value at a field path in the TOML dict as written, or KeyError."""
    node = raw
    for part in re.findall(r"[^.\[\]]+|\[[0-9]+\]", path):
        if part.startswith("["):
            node = node[int(part[1:-1])]
        else:
            node = node[part]
    return node


def _walk(model: BaseModel, prefix: str, out: list) -> None:
    for name, info in type(model).model_fields.items():
        value = getattr(model, name)
        path = f"{prefix}{name}"
        extra = info.json_schema_extra if isinstance(info.json_schema_extra, dict) else {}
        if isinstance(value, BaseModel):
            _walk(value, path + ".", out)
        elif isinstance(value, list) and value and all(isinstance(v, BaseModel)
                                                       for v in value):
            for i, item in enumerate(value):
                _walk(item, f"{path}[{i}].", out)
        else:
            default = None if info.is_required() else info.get_default(
                call_default_factory=True)
            if isinstance(default, BaseModel):
                default = None
            choices = [a for a in typing.get_args(info.annotation)
                       if isinstance(a, str)] if typing.get_origin(info.annotation) is \
                typing.Literal else []
            from tco.scenario.base import field_limits

            out.append({"field": path, "unit": extra.get("unit", ""),
                        "limits": field_limits(info),
                        "description": info.description or "",
                        "source": extra.get("source", ""), "default": default,
                        "choices": choices, "user": name in model.model_fields_set,
                        "required": info.is_required()})


def field_rows(scenario: BaseModel, raw: dict) -> list[dict]:
    """Every field of a validated scenario as a row of the field table.

    The value is the one written in ``raw`` (the TOML as written, so a value such as
    ``"36 t"`` round-trips exactly); a field the scenario leaves at its default has an
    empty value.

    Parameters
    ----------
    scenario : tco.scenario.Scenario
    raw : dict
        The scenario as written (parsed TOML or a field table).

    Returns
    -------
    list of dict
        ``field, kind, value, unit, description, source, default, choices``.
    """
    rows: list[dict] = []
    _walk(scenario, "", rows)
    for r in rows:
        try:
            v = _raw_at(raw, r["field"])
        except (KeyError, IndexError, TypeError):
            v = None
        if isinstance(v, dict) or isinstance(v, list):
            v = json.loads(json.dumps(v))  # plain JSON types
        r["value"] = v
        d = r["default"]
        r["kind"] = _kind(v if v is not None else d) if (v is not None or d is not None) \
            else ("text" if r["choices"] else "number")
    return rows


def _cell_value(v, kind: str):
    if v is None:
        return None
    if kind == "list":
        return json.dumps(v, ensure_ascii=False)
    if kind == "yes/no":
        return "yes" if v else "no"
    return v


def write_field_table(ws, row: int, rows: list[dict], *, validations: bool = True,
                      widths: bool = True, wrap: bool = True) -> int:
    """Write a field table (header and rows) into a sheet, starting at ``row``.

    Returns the next free row. Text goes in as text (never a formula); the value column
    is input-coloured; choices get list validation, numbers a check that they are
    numbers or text with a unit.
    """
    from openpyxl.styles import Alignment
    from openpyxl.worksheet.datavalidation import DataValidation

    from tco.report import workbook_base as wbb

    wbb.header_row(ws, row, FIELD_HEADER)
    head = row
    row += 1
    yesno = DataValidation(type="list", formula1='"yes,no"', allow_blank=True)
    number = DataValidation(type="custom", formula1="OR(ISNUMBER(C1),ISTEXT(C1))",
                            allow_blank=True)
    lists: dict[tuple, DataValidation] = {}
    ranges: dict[tuple, tuple] = {}  # (low, high) in the field's unit -> (validation, row)
    for r in rows:
        wbb.safe_text(ws.cell(row=row, column=1), r["field"])
        wbb.safe_text(ws.cell(row=row, column=2), r["kind"])
        v = _cell_value(r.get("value"), r["kind"])
        c = wbb.write_value(ws.cell(row=row, column=3), v)
        c.fill = wbb.INPUT_FILL
        wbb.safe_text(ws.cell(row=row, column=4), r["unit"] or "-")
        wbb.safe_text(ws.cell(row=row, column=5), r["description"])
        wbb.safe_text(ws.cell(row=row, column=6), "required" if r.get("required")
                      else r["source"])
        d = r.get("default")
        wbb.write_value(ws.cell(row=row, column=7), _cell_value(d, _kind(d)) if d is not
                        None else ("(none)" if not r.get("required") else "(required)"))
        if validations:
            coord = f"C{row}"
            if r["choices"]:
                key = tuple(r["choices"])
                if key not in lists and all("," not in x and '"' not in x for x in key):
                    lists[key] = DataValidation(type="list",
                                                formula1='"' + ",".join(key) + '"',
                                                allow_blank=True)
                if key in lists:
                    lists[key].add(coord)
            elif r["kind"] == "yes/no":
                yesno.add(coord)
            elif r["kind"] == "number" and any(x is not None for x in
                                               r.get("limits", (None, None))):
                lo, hi = r["limits"]
                if (lo, hi) not in ranges:  # relative to its first cell, as in the sheet
                    ranges[(lo, hi)] = (DataValidation(type="custom", allow_blank=True),
                                        row)
                ranges[(lo, hi)][0].add(coord)
            elif r["kind"] == "number":
                number.add(coord)
        row += 1
    if validations:
        number.formula1 = f"OR(ISNUMBER(C{head + 1}),ISTEXT(C{head + 1}))"
        number.error = "a number in the unit shown, or text with its unit such as '36 t'"
        for (lo, hi), (dv, first) in ranges.items():
            c = f"C{first}"
            bounds = [f"{c}>={lo!r}"] * (lo is not None) + [f"{c}<={hi!r}"] * (hi is not None)
            dv.formula1 = f"OR(ISTEXT({c}),AND(ISNUMBER({c}),{','.join(bounds)}))"
            span = (f"from {fm.plain(lo)} to {fm.plain(hi)}" if lo is not None and hi is not None
                    else f"of at least {fm.plain(lo)}" if lo is not None
                    else f"of at most {fm.plain(hi)}")
            dv.error = (f"a number {span} in the unit shown, or text with its unit such as "
                        "'36 t'")
        for dv in (yesno, number, *lists.values(), *(v[0] for v in ranges.values())):
            if dv.sqref:
                dv.showErrorMessage = True
                ws.add_data_validation(dv)
    if widths:
        wbb.set_widths(ws, {"A": 44, "B": 8, "C": 18, "D": 12, "E": 60, "F": 40, "G": 14})
    for r in range(head + 1, row if wrap else head + 1):
        ws.cell(row=r, column=5).alignment = Alignment(wrap_text=True, vertical="top")
    return row


def write_starter_workbook(path, scenario, raw: dict) -> None:
    """The starter input workbook of ``tco init --xlsx``: Inputs, Route and Trucks sheets.

    Parameters
    ----------
    path : str or Path
        The ``.xlsx`` to write (atomically).
    scenario : tco.scenario.Scenario
        The validated starter scenario.
    raw : dict
        Its TOML as written.
    """
    from openpyxl import Workbook

    from tco.report import workbook_base as wbb
    from tco.report.atomic import write_bytes_atomic

    rows = field_rows(scenario, raw)
    parts = {"Inputs": [r for r in rows if not r["field"].startswith(("route.legs",
                                                                      "trucks["))],
             "Route": [r for r in rows if r["field"].startswith("route.legs")],
             "Trucks": [r for r in rows if r["field"].startswith("trucks[")]}
    wb = Workbook()
    first = True
    for title, block in parts.items():
        ws = wb.active if first else wb.create_sheet(title)
        ws.title = title
        first = False
        wbb.safe_text(ws.cell(row=1, column=1), {
            "Inputs": "Scenario inputs: type a value in column C (empty: the default in "
                      "column G). Then: tco check THIS_FILE && tco run THIS_FILE",
            "Route": "Route: one block of rows per leg (route.legs[k]) and per segment "
                     "(route.legs[k].segments[j]); add rows with the next index for more",
            "Trucks": "Trucks: one block of rows per truck (trucks[k]); the first truck is "
                      "the baseline unless finance names another"}[title])
        end = write_field_table(ws, 3, block)
        wbb.freeze(ws, "C4")
        wbb.print_setup(ws, str(scenario.study.name), title_rows="3:3", title_cols="A:A")
        del end
    import io

    buf = io.BytesIO()
    wb.save(buf)
    write_bytes_atomic(Path(path), buf.getvalue())


# --------------------------------------------------------------------------- reading
def _refuse_macros_and_size(path: Path) -> None:
    if path.suffix.lower() == ".xlsm":
        raise InputError("macro-enabled workbooks (.xlsm) are refused; save it as .xlsx",
                         file=path)
    if path.suffix.lower() == ".xls":
        raise InputError("the old .xls format is not read; save it as .xlsx", file=path)
    if not path.is_file():
        raise InputError("file not found", file=path)
    if path.stat().st_size > MAX_BYTES:
        raise InputError(f"too large for a scenario workbook "
                         f"({fm.count(path.stat().st_size)} bytes; at most "
                         f"{fm.count(MAX_BYTES)})", file=path)
    try:
        with zipfile.ZipFile(path) as z:
            infos = z.infolist()
    except (zipfile.BadZipFile, OSError):
        raise InputError("not an .xlsx workbook (not a zip package)", file=path) from None
    if any(i.filename.lower().endswith("vbaproject.bin") for i in infos):
        raise InputError("the workbook contains macros (a VBA project); macros are not "
                         "allowed", file=path)
    if sum(i.file_size for i in infos) > _UNPACKED_LIMIT:
        raise InputError("too large once unpacked for a scenario workbook", file=path)


def _set(data: dict, path: str, value) -> None:
    parts = re.findall(r"[^.\[\]]+|\[[0-9]+\]", path)
    node = data
    for k, part in enumerate(parts):
        last = k == len(parts) - 1
        nxt = parts[k + 1] if not last else None
        if part.startswith("["):
            continue
        idx = nxt if nxt is not None and nxt.startswith("[") else None
        if idx is not None:
            lst = node.setdefault(part, [])
            if not isinstance(lst, list):
                raise ValueError("mixes a list and a single value")
            i = int(idx[1:-1])
            if i > len(lst) + 1000:
                raise ValueError("list index too large")
            while len(lst) <= i:
                lst.append({})
            if k + 1 == len(parts) - 1:
                lst[i] = value
                return
            node = lst[i]
        elif last:
            if part in node:
                raise ValueError("given twice")
            node[part] = value
        else:
            node = node.setdefault(part, {})
            if not isinstance(node, dict):
                raise ValueError("mixes a section and a single value")


def _read_value(kind: str, v, where: str, path: Path):
    if kind == "list":
        if not isinstance(v, str):
            raise InputError("expected a list written as JSON, e.g. [0.8, 0.7]", file=path,
                             where=where)
        try:
            out = json.loads(v)
        except json.JSONDecodeError:
            raise InputError("not a list written as JSON, e.g. [0.8, 0.7]", file=path,
                             where=where) from None
        if not isinstance(out, (list, dict)):
            raise InputError("expected a list or table in JSON", file=path, where=where)
        return out
    if kind == "yes/no":
        if isinstance(v, bool):
            return v
        t = str(v).strip().lower()
        if t in ("yes", "true", "1"):
            return True
        if t in ("no", "false", "0"):
            return False
        raise InputError("expected yes or no", file=path, where=where)
    if kind == "number":
        if isinstance(v, bool):
            raise InputError("expected a number, got true/false", file=path, where=where)
        if isinstance(v, float) and not math.isfinite(v):
            raise InputError("not a finite number", file=path, where=where)
        return v
    return v


def load_workbook_scenario(path):
    """Read and validate a scenario from a workbook's field table.

    Parameters
    ----------
    path : str or Path
        An ``.xlsx`` written by ``tco init --xlsx`` or delivered by ``tco run``.

    Returns
    -------
    tco.scenario.LoadedScenario

    Raises
    ------
    InputError
        One line naming the file and the sheet, row and column (e.g. ``Inputs!C12
        (prices.diesel)``): macros, size, a formula in a value cell, an unknown kind, a
        field given twice, or any error of the scenario itself.
    """
    import openpyxl

    from tco.scenario import LoadedScenario, parse_scenario

    path = Path(path)
    _refuse_macros_and_size(path)
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=False)
    except Exception as exc:  # openpyxl raises many kinds on a damaged package
        raise InputError(f"cannot read the workbook: {type(exc).__name__}", file=path) \
            from None
    data: dict = {}
    where_of: dict[str, str] = {}
    named_edits: list[tuple[str, float, str, float | None]] = []
    lists: dict[str, dict[int, float]] = {}
    found = False
    try:
        for ws in wb.worksheets:
            if ws.max_row and ws.max_row > MAX_ROWS or ws.max_column and \
                    ws.max_column > MAX_COLUMNS:
                raise InputError(f"sheet '{ws.title}' is too large for a scenario "
                                 f"({ws.max_row} rows × {ws.max_column} columns; at most "
                                 f"{MAX_ROWS} × {MAX_COLUMNS})", file=path)
            inside = named = False
            for r, cells in enumerate(ws.iter_rows(max_col=10), start=1):
                if r > MAX_ROWS:
                    raise InputError(f"sheet '{ws.title}' is too large for a scenario",
                                     file=path)
                vals = [c.value if c is not None else None for c in cells] + [None] * 10
                if r == 1:
                    named = vals[7] == "as written"  # a delivered workbook's Inputs sheet
                if tuple(vals[:4]) == FIELD_HEADER[:4]:
                    inside = found = True
                    continue
                if not inside:
                    if named and r > 1:
                        _named_input(ws.title, r, vals, path, named_edits, lists)
                    continue
                field, kind, value = vals[0], vals[1], vals[2]
                if field is None or (isinstance(field, str) and not field.strip()):
                    continue
                where = f"{ws.title}!C{r} ({field})"
                cell = cells[2] if len(cells) > 2 else None
                if cell is not None and getattr(cell, "data_type", None) == "f":
                    raise InputError("a formula in an input cell; type the value (formulas "
                                     "are not evaluated)", file=path,
                                     where=f"{ws.title}!C{r} ({field})")
                if not isinstance(field, str) or not _PATH_RE.match(field.strip()):
                    raise InputError("not a field path such as prices.diesel", file=path,
                                     where=f"{ws.title}!A{r}")
                if kind not in _KINDS:
                    raise InputError(f"unknown kind {kind!r} (use one of: "
                                     f"{', '.join(_KINDS)})", file=path,
                                     where=f"{ws.title}!B{r} ({field})")
                if value is None or (isinstance(value, str) and not value.strip()):
                    continue  # the default
                v = _read_value(kind, value, where, path)
                field = field.strip()
                try:
                    _set(data, field, v)
                except ValueError as exc:
                    raise InputError(str(exc), file=path, where=where) from None
                where_of[field] = where
    finally:
        wb.close()
    if not found:
        raise InputError("no field table (a header row 'Field | Kind | Value | Unit') in "
                         "any sheet", file=path)
    _compact(data)
    _apply_named_edits(data, where_of, named_edits, lists, path)
    try:
        scenario = parse_scenario(data, path)
    except InputError as exc:
        raise InputError(exc.message, file=path,
                         where=_cell_of(exc.where, where_of)) from None
    fp, inputs_fp = _fingerprints(path, scenario)
    return LoadedScenario(scenario, path.resolve(), data, fp, inputs_fp, shown=path)


def _named_input(sheet: str, r: int, vals: list, path: Path, edits: list,
                 lists: dict) -> None:
    """A delivered workbook's named input (above the field table): the cell the sheet's
    formulas read. Edited, it is what a rerun uses: its value goes into the scenario
    field it shows (hidden columns H–J: value as written, field, factor to the field's
    unit). A model figure (no field) must stay as written: a rerun computes it."""
    name, value, written, field, factor = vals[1], vals[2], vals[7], vals[8], vals[9]
    if not isinstance(name, str) or written is None or isinstance(written, str):
        return
    where = f"{sheet}!C{r}"
    number = isinstance(value, (int, float)) and not isinstance(value, bool)
    if number and not math.isfinite(float(value)):
        raise InputError(f"the named input '{name}' is not a finite number", file=path,
                         where=where)
    linked = isinstance(field, str) and _PATH_RE.match(field) and \
        isinstance(factor, (int, float)) and not isinstance(factor, bool)
    m = re.match(r"^(.*)\[([0-9]+)\]$", field) if linked else None
    if m and number:  # an item of a list field: the rerun takes the whole list shown
        lists.setdefault(m.group(1), {})[int(m.group(2))] = float(value) * float(factor)
    same = number and math.isclose(float(value), float(written), rel_tol=1e-12, abs_tol=0.0)
    if same:
        return
    if not number:
        raise InputError(f"the named input '{name}' must be a number (a formula or text is "
                         "not read)", file=path, where=where)
    if not linked:
        raise InputError(f"the named input '{name}' is a model figure, computed again by a "
                         "rerun: it cannot be edited for a rerun (edit the scenario inputs "
                         "it comes from)", file=path, where=where)
    edits.append((field, float(value) * float(factor), where, float(written) * float(factor)))


def _apply_named_edits(data: dict, where_of: dict, edits: list, lists: dict,
                       path: Path) -> None:
    """Put the edited named inputs into the scenario read from the field table; refuse a
    field edited in both places with different values."""
    for field, value, where, written in edits:
        m = re.match(r"^(.*)\[([0-9]+)\]$", field)
        target = m.group(1) if m and m.group(1) in lists else field
        if target != field:
            new = [lists[target][k] for k in sorted(lists[target])]
        else:  # a whole number reads as one (counts and years are integer fields)
            new = int(value) if value.is_integer() and abs(value) < 2**53 else value
        try:
            old = _raw_at(data, target)
        except (KeyError, IndexError, TypeError):
            old = None
        if old is not None and target == field and written is not None:
            try:
                same = isinstance(old, (int, float)) and math.isclose(
                    float(old), written, rel_tol=1e-9)
            except (TypeError, ValueError):
                same = False
            if not same and not isinstance(old, str):
                raise InputError(f"'{field}' was edited both in the named input {where} and "
                                 f"in the field table ({where_of.get(field, 'below')}): "
                                 "keep one", file=path, where=where)
        try:
            _replace(data, target, new)
        except ValueError as exc:
            raise InputError(str(exc), file=path, where=where) from None
        where_of[target] = where


def _replace(data: dict, path: str, value) -> None:
    """Set a field path in the TOML-like dict, replacing what is there."""
    parts = re.findall(r"[^.\[\]]+|\[[0-9]+\]", path)
    node = data
    for k, part in enumerate(parts[:-1]):
        nxt = parts[k + 1]
        if part.startswith("["):
            i = int(part[1:-1])
            while len(node) <= i:
                node.append({})
            node = node[i]
        elif nxt.startswith("["):
            node = node.setdefault(part, [])
        else:
            node = node.setdefault(part, {})
        if not isinstance(node, (dict, list)):
            raise ValueError("mixes a section and a single value")
    last = parts[-1]
    if last.startswith("["):
        i = int(last[1:-1])
        while len(node) <= i:
            node.append({})
        node[i] = value
    else:
        node[last] = value


def _compact(data) -> None:
    """Drop list items that no row filled (an index skipped in the table)."""
    if isinstance(data, dict):
        for k, v in list(data.items()):
            if isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
                data[k] = [x for x in v if x]
            _compact(data[k])
    elif isinstance(data, list):
        for x in data:
            _compact(x)


def _cell_of(where: str | None, where_of: dict[str, str]) -> str | None:
    """The sheet cell of a field path named by a scenario error (or of its section)."""
    if not where:
        return where
    if where in where_of:
        return where_of[where]
    prefix = [w for p, w in where_of.items() if p.startswith(where + ".")
              or p.startswith(where + "[")]
    if prefix:
        return f"{where} (near {prefix[0].split(' ')[0]})"
    return where


def _fingerprints(path: Path, scenario) -> tuple[str, str]:
    import hashlib

    from tco.scenario import inputs_fingerprint

    h = hashlib.sha256(path.read_bytes())
    traces = []
    for i, leg in enumerate(scenario.route.legs):
        if leg.file:
            from tco.scenario.files import input_file

            try:  # in the workbook's folder (or an allowed one), see tco.scenario.files
                trace = input_file(leg.file, path.parent, (".csv", ".gpx"), "trace file")
            except InputError as exc:
                raise exc.located(file=path, where=f"route.legs[{i}].file") from None
            blob = trace.read_bytes()
            h.update(blob)
            traces.append(blob)
    return h.hexdigest(), inputs_fingerprint(scenario, traces)
