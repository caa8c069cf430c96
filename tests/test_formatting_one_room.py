"""Formatting in one room: every number a person reads (error messages, warnings, notes,
the reports, the workbook's text, the command line, the charts) goes through
tco.report.formatting; conversion constants live in tco.units only.

The scan reads the source with the standard library's ``ast`` module: a format spec that
formats a number (``:,.0f``, ``:.1%``, ``:g``...) inside an f-string, ``"%.1f" % x``,
``format(x, ".2f")``, ``"{:.1f}".format(x)`` or a ``round(...)`` written into an f-string is
a local number format. Only the allow-list below may keep one, each with its reason.
"""
import ast
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

#: Every module of tco is scanned (a glob, so a new module is covered from its first line).
SCANNED = sorted(p.relative_to(ROOT).as_posix() for p in (ROOT / "tco").rglob("*.py"))

#: The formatting room itself: the one module that may turn numbers into text.
FORMATTING = "tco/report/formatting.py"

#: (module, text on the line) → why it may format locally. Keep it short.
ALLOWED = {
    ("tco/report/workbook/inputs_sheet.py", 'return float(f"'): "a cell's factor rounded to "
    "15 significant figures and read back as a number (1.0000000000000002 → 1), not text",
}


def test_the_scan_covers_every_module():
    # the glob finds the modules that print most (a sample, named by hand) and the list of
    # allowed lines names only modules that exist, with a line that still matches
    assert {"tco/cli.py", "tco/budget.py", "tco/plan.py", "tco/scenario/xlsx.py",
            "tco/report/workbook/inputs_sheet.py", FORMATTING} <= set(SCANNED)
    for module, snippet in [*ALLOWED, *E_SPEC_ALLOWED]:
        assert snippet in (ROOT / module).read_text(encoding="utf-8"), (module, snippet)


#: A format spec that formats a number: thousands separators, a precision, a float, percent
#: or general type. Alignment and width alone (``<28``, ``>18``) and ``d`` of an identifier
#: are not number formatting.
NUMBER_SPEC = re.compile(r"[,_]|\.\d|[eEfFgG%n]$")
PERCENT_OP = re.compile(r"%[-+ 0#]*\d*(\.\d+)?[dieEfFgG]")


def _spec_text(node: ast.JoinedStr) -> str:
    return "".join(v.value for v in node.values if isinstance(v, ast.Constant))


def local_formats(source: str) -> list[tuple[int, str]]:
    """(line, what) of every local number format in ``source``."""
    tree = ast.parse(source)
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.FormattedValue):
            if node.format_spec is not None and NUMBER_SPEC.search(_spec_text(node.format_spec)):
                found.append((node.lineno, f"format spec :{_spec_text(node.format_spec)}"))
            if isinstance(node.value, ast.Call) and getattr(node.value.func, "id", "") == "round":
                found.append((node.lineno, "round() into text"))
        elif (isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mod)
              and isinstance(node.left, ast.Constant) and isinstance(node.left.value, str)
              and PERCENT_OP.search(node.left.value)):
            found.append((node.lineno, "% formatting"))
        elif isinstance(node, ast.Call):
            f = node.func
            if (getattr(f, "id", "") == "format" and len(node.args) == 2
                    and isinstance(node.args[1], ast.Constant)
                    and NUMBER_SPEC.search(str(node.args[1].value))):
                found.append((node.lineno, "format()"))
            if (isinstance(f, ast.Attribute) and f.attr == "format"
                    and isinstance(f.value, ast.Constant) and isinstance(f.value.value, str)
                    and re.search(r"\{[^{}]*:[^{}]*([,_]|\.\d|[eEfFgG%])[^{}]*\}",
                                  f.value.value)):
                found.append((node.lineno, "str.format with a number spec"))
    return found


@pytest.mark.parametrize("module", [m for m in SCANNED if m != FORMATTING])
def test_no_local_number_formats(module):
    text = (ROOT / module).read_text(encoding="utf-8")
    lines = text.splitlines()
    bad = []
    for line, what in local_formats(text):
        src = lines[line - 1]
        if any(m == module and snippet in src for (m, snippet) in ALLOWED):
            continue
        bad.append(f"{module}:{line}: {what}: {src.strip()}")
    assert not bad, "format these through tco.report.formatting:\n" + "\n".join(bad)


@pytest.mark.parametrize("snippet, expected", [
    ('x = f"{a:,.0f} EUR"', 1), ('x = f"{a:.1%}"', 1), ('x = f"{a:g} s"', 1),
    ('x = "%.2f" % a', 1), ('x = format(a, ".3f")', 1), ('x = "{:,.1f}".format(a)', 1),
    ('x = f"{round(a, 1)} t"', 1), ('x = f"{name:<28} {n:02d}"', 0), ('x = f"{a}"', 0),
])
def test_the_scan_finds_what_it_should(snippet, expected):
    # the scan itself: each local number format is found, alignment alone is not
    assert len(local_formats(snippet)) == expected


def test_conversion_constants_only_in_units():
    # 1 kWh = 3.6e6 J and 1 mile = 1609.344 m (NIST SP 811, B.8) are written once, in
    # tco/units.py; everything else imports J_PER_KWH / M_PER_MILE
    pattern = re.compile(r"3\.6e\+?0?6|3[_,]?600[_,]?000(?![\d.])|1609\.344|1\.609344")
    bad = []
    for path in sorted((ROOT / "tco").rglob("*.py")):
        rel = path.relative_to(ROOT).as_posix()
        if rel == "tco/units.py":
            continue
        for k, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
            if pattern.search(line):
                bad.append(f"{rel}:{k}: {line.strip()}")
    assert not bad, "\n".join(bad)
    units = (ROOT / "tco/units.py").read_text(encoding="utf-8")
    assert "3.6e6" in units and "1609.344" in units


def test_dead_code_is_gone():
    import tco.emissions
    import tco.resources
    import tco.units

    assert not hasattr(tco.units, "display") and not hasattr(tco.units, "DISPLAY_UNITS")
    assert not hasattr(tco.resources, "data_dir")
    assert not hasattr(tco.emissions, "TTW_LINES")


#: Format specs that may print e-notation (``g``, ``e``) and are not text for a person:
#: rounding a float before it is read back as a number, or a spreadsheet constant.
E_SPEC_ALLOWED = {
    ("tco/report/workbook/inputs_sheet.py", 'return float(f"'),
    (FORMATTING, 'x = float(f"{x:.{int(significant)}g}")'),
}


def test_no_e_notation_spec_anywhere():
    # "no scientific notation anywhere a person reads": no module of tco formats a number
    # with a g / e spec into text (messages, notes, labels), outside the list above
    bad = []
    for path in sorted((ROOT / "tco").rglob("*.py")):
        rel = path.relative_to(ROOT).as_posix()
        text = path.read_text(encoding="utf-8")
        lines = text.splitlines()
        for line, what in local_formats(text):
            if not what.startswith("format spec") or not what.endswith(("g", "e", "G", "E")):
                continue
            if any(m == rel and snippet in lines[line - 1] for m, snippet in E_SPEC_ALLOWED):
                continue
            bad.append(f"{rel}:{line}: {what}: {lines[line - 1].strip()}")
    assert not bad, "\n".join(bad)
