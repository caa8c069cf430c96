"""Tests for the report frame: tco.report.html, tco.report.pdf, tco.report.charts and
tco.report.workbook_base (rendering, page geometry, charts, workbook helpers).

The report context is the invented SAMPLE from conftest.py; these tests check the frame,
not model figures. Safety against hostile text is in test_report_safety.py.
"""
from __future__ import annotations

import base64
import re
import xml.etree.ElementTree as ET
import zipfile
from html.parser import HTMLParser

import numpy as np
import numpy_financial as npf
import openpyxl
import pandas as pd
import pypdf
import pytest
from recalc import needs_soffice, recalculate

from tco.errors import InputError
from tco.report import charts, workbook_base as wbb
from tco.report.html import environment, render_html
from tco.report.pdf import render_pdf

SVG_NS = "{http://www.w3.org/2000/svg}svg"

# Paper sizes in PostScript points (1 pt = 1/72 in):
# ISO 216 A4 = 210 mm x 297 mm = 595.28 x 841.89 pt;
# ANSI/ASME Y14.1 Letter = 8.5 in x 11 in = 612 x 792 pt.
PAGE_POINTS = {"A4": (210 / 25.4 * 72, 297 / 25.4 * 72), "Letter": (612.0, 792.0)}


def _squash(text: str) -> str:
    """Text without whitespace: PDF text extraction breaks lines where the layout wraps."""
    return re.sub(r"\s+", "", text)


# ---------------------------------------------------------------- PDF ----------------
@pytest.fixture(scope="module", params=["A4", "Letter"])
def rendered(request, tmp_path_factory, _sample_context_once):
    size = request.param
    ctx = dict(_sample_context_once)
    ctx["meta"] = {**ctx["meta"], "page_size": size}
    html = render_html(ctx, for_print=True, page_size=size)
    path = tmp_path_factory.mktemp(f"pdf-{size}") / "report.pdf"
    result = render_pdf(html, path)
    reader = pypdf.PdfReader(str(path))
    # a figure's no-break spaces (tco.report.html.nobreak) read as plain spaces
    pages = [p.extract_text().replace("\xa0", " ") for p in reader.pages]
    return size, ctx, result, reader, pages


@pytest.mark.slow
def test_pdf_is_written_clean_and_long_enough(rendered):
    size, ctx, result, reader, pages = rendered
    assert result.path.exists() and result.path.stat().st_size > 10_000
    assert result.pages == len(reader.pages) > 3
    # A clean report fetches nothing and triggers no weasyprint warning (bad CSS etc.).
    assert result.blocked == []
    assert result.warnings == []


@pytest.mark.slow
def test_pdf_page_size(rendered):
    size, ctx, result, reader, pages = rendered
    want_w, want_h = PAGE_POINTS[size]
    for page in reader.pages:
        box = page.mediabox
        # weasyprint writes the size to 6 decimals; 0.01 pt is far below any real error.
        assert float(box.width) == pytest.approx(want_w, abs=0.01)
        assert float(box.height) == pytest.approx(want_h, abs=0.01)


@pytest.mark.slow
def test_pdf_shows_key_figures_exactly(rendered):
    size, ctx, result, reader, pages = rendered
    summary = pages[2]  # cover, contents, summary
    for fig in ctx["key_figures"]:
        # exact characters; a value may wrap inside its card (three cards a row)
        assert _squash(fig["value"]) in _squash(summary), fig
        assert _squash(fig["label"]) in _squash(summary)
    cover = _squash(pages[0])
    assert _squash(ctx["verdict"]) in cover
    assert _squash(ctx["meta"]["fingerprint"]) in cover
    assert _squash(ctx["meta"]["title"]) in cover


@pytest.mark.slow
def test_pdf_running_header_and_page_numbers(rendered):
    size, ctx, result, reader, pages = rendered
    n = len(pages)
    title = ctx["meta"]["title"]
    for i, text in enumerate(pages, start=1):
        assert f"Page {i} of {n}" in text
        if i > 1:  # the cover has no running header
            assert title in text
            assert f"tco {ctx['meta']['version']}" in text
    # The section name runs in the header: the appendix may start part-way down a page
    # (the header then names the section the page started in); on the page with the last
    # input the header names the appendix.
    first = next(i for i, t in enumerate(pages) if "Discount rate per year" in t)
    last_label = ctx["assumptions"]["sections"][-1]["rows"][-1][0]
    last = max(i for i, t in enumerate(pages) if last_label in t)
    assert "Appendix: assumptions" in pages[first]
    assert last > first and "Appendix: assumptions" in pages[last]


@pytest.mark.slow
def test_pdf_has_every_section_and_input(rendered):
    size, ctx, result, reader, pages = rendered
    text = _squash("\n".join(pages))
    for heading in ("Summary", "Cost of ownership", "Energy and duty cycle", "Emissions",
                    "Uncertainty", "Feasibility and warnings", "Detailed figures",
                    "Contents", "Appendix: assumptions", "Appendix: method notes", "Cautions"):
        assert _squash(heading) in text
    for sec in ctx["assumptions"]["sections"]:
        for row in sec["rows"] + [r for t in sec["tables"] for r in t["rows"]]:
            for cell in row:
                assert _squash(cell) in text
    for src in ctx["assumptions"]["sources"]:
        assert _squash(src["text"]) in text
    for c in ctx["cautions"]:
        assert _squash(c) in text
    for w in ctx["warnings"]:
        assert _squash(w) in text


@pytest.mark.slow
def test_pdf_charts_are_vector(rendered):
    """Charts are SVG drawn as PDF vector forms: no raster image anywhere."""
    size, ctx, result, reader, pages = rendered
    forms = 0
    for page in reader.pages:
        xobjects = page["/Resources"].get("/XObject", {})
        for name in xobjects:
            subtype = xobjects[name].get_object().get("/Subtype")
            assert subtype != "/Image", f"raster image {name} on a page"
            forms += subtype == "/Form"
    assert forms > 0


# ---------------------------------------------------------------- HTML ---------------
class _Refs(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: list[str] = []
        self.refs: list[tuple[str, str, str]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for name, value in attrs:
            if name in ("src", "href", "srcset", "data", "action", "poster", "background"):
                self.refs.append((tag, name, value or ""))

    def handle_data(self, data):
        self.text.append(data)


@pytest.mark.parametrize("for_print", [True, False])
def test_html_is_standalone(sample_context, for_print):
    html = render_html(sample_context, for_print=for_print, page_size="A4")
    p = _Refs()
    p.feed(html)
    n_images = sum(len(v) for v in sample_context["charts"].values()) + sum(
        bool(n["equation_uri"]) for n in sample_context["method_notes"])
    # besides the images, only links to the document's own sections (the contents)
    inner = [v for _, name, v in p.refs if name == "href"]
    assert inner and all(v.startswith("#") for v in inner)
    images = [v for _, name, v in p.refs if name != "href"]
    assert len(images) == n_images
    assert all(v.startswith("data:image/") for v in images)
    assert "link" not in p.tags and "script" not in p.tags
    # No reference outside the document in the markup itself (the SVGs are base64).
    outside = re.sub(r'src="data:[^"]*"', "", html)
    assert not re.search(r"(https?|file|ftp):", outside)
    assert "url(" not in outside  # no CSS fetches either
    assert f'class="{"print" if for_print else "screen"}"' in html


@pytest.mark.parametrize("size, keyword", [("A4", "A4"), ("Letter", "letter")])
def test_html_page_size(sample_context, size, keyword):
    html = render_html(sample_context, for_print=True, page_size=size)
    assert f"@page {{ size: {keyword}; }}" in html


def test_html_unknown_page_size_is_an_input_error(sample_context):
    with pytest.raises(InputError, match="page size"):
        render_html(sample_context, for_print=True, page_size="A3")


def test_html_rejects_incomplete_context(sample_context):
    del sample_context["assumptions"]
    del sample_context["meta"]["fingerprint"]
    with pytest.raises(ValueError, match="assumptions.*meta.fingerprint"):
        render_html(sample_context, for_print=True)


def test_html_missing_nested_key_is_an_error_not_a_blank(sample_context):
    import jinja2

    del sample_context["key_figures"][0]["note"]
    with pytest.raises(jinja2.UndefinedError):
        render_html(sample_context, for_print=True)


@pytest.mark.parametrize("uri", ["file:///etc/passwd", "http://example.invalid/a.svg",
                                 "../../etc/passwd", "data:text/html;base64,PHA+"])
def test_html_rejects_chart_that_is_not_embedded_image(sample_context, uri):
    sample_context["charts"]["cost"][0]["uri"] = uri
    with pytest.raises(ValueError, match="data: image"):
        render_html(sample_context, for_print=True)


def test_environment_escapes_j2_templates():
    """autoescape applies to *.j2 (select_autoescape(['html']) would not — library notes)."""
    env = environment()
    assert env.autoescape is True
    assert env.from_string("{{ x }}").render(x="<b>") == "&lt;b&gt;"


def test_template_prints_values_verbatim(sample_context):
    """Templates compute nothing: preformatted strings appear unchanged."""
    sample_context["key_figures"][0]["value"] = "1.2345678 EUR/km"
    html = render_html(sample_context, for_print=False)
    assert "1.2345678 EUR/km" in html


# ---------------------------------------------------------------- charts -------------
def _svg_root(uri: str):
    prefix = "data:image/svg+xml;base64,"
    assert uri.startswith(prefix)
    root = ET.fromstring(base64.b64decode(uri[len(prefix):]))
    assert root.tag == SVG_NS
    return root


@pytest.fixture(scope="module")
def chart_inputs():
    years = np.arange(0, 6)
    cum = pd.DataFrame({"A": 100 + 20.0 * years, "B": 150 + 10.0 * years}, index=years)
    tidy = pd.DataFrame([(t, y, line, v) for t in ("A", "B") for y in years
                         for line, v in (("Energy", 10.0), ("Resale", -5.0 * (y == 5)))],
                        columns=["truck", "year", "line", "value"])
    comp = pd.DataFrame({"A": [0.5, 0.4, -0.1], "B": [0.5, 0.4, 0.0]},
                        index=["Rolling", "Aero", "Recovered"])
    t = np.arange(0, 600.0)
    trace = pd.DataFrame({"time": t / 60, "speed": 50 + 10 * np.sin(t / 30),
                          "elevation": 100 + t / 10, "soc": 90 - t / 60,
                          "power": 100 * np.sin(t / 20)})
    em = pd.DataFrame([(t_, y, s, 1.0) for t_ in ("A", "B") for y in years[1:]
                       for s in ("Scope 1", "Scope 2")], columns=["truck", "year", "scope",
                                                                 "value"])
    torn = pd.DataFrame({"input": ["x", "y"], "low": [-1.0, -3.0], "high": [2.0, 1.0]})
    return cum, tidy, comp, trace, em, torn


def _all_charts(inputs, names=("A", "B")):
    cum, tidy, comp, trace, em, torn = inputs
    labels = {"speed": "Speed [km/h]", "elevation": "Elevation [m]", "soc": "SoC [%]",
              "power": "Power [kW]"}
    return [
        charts.cumulative_cost(cum, 2.5, ylabel="Cost [EUR]"),
        charts.cumulative_cost(cum, None, ylabel="Cost [EUR]"),
        charts.stacked_yearly_cost(tidy, names[0], ylabel="Cost [EUR/yr]"),
        charts.stacked_yearly_cost(tidy, list(names), ylabel="Cost [EUR/yr]"),
        charts.energy_components(comp, xlabel="Energy [kWh/km]"),
        charts.duty_cycle(trace, xlabel="Time [min]", labels=labels),
        charts.duty_cycle(trace.drop(columns="soc"), xlabel="Time [min]", labels=labels),
        charts.emissions_by_scope(em, ylabel="t CO2e"),
        charts.tornado(torn, 0.0, xlabel="PV difference [EUR]"),
        charts.distribution(np.random.default_rng(1).normal(size=500), "PV [EUR]"),
        charts.equation(r"PV = \sum_{t=0}^{N} \dfrac{C_t}{(1+r)^t}"),
    ]


def test_charts_return_valid_svg_data_uris(chart_inputs):
    for uri in _all_charts(chart_inputs):
        root = _svg_root(uri)
        assert float(root.get("width").rstrip("pt")) > 10
        # Vector: no embedded raster image inside the SVG.
        assert not list(root.iter("{http://www.w3.org/2000/svg}image"))


def test_charts_are_byte_stable(chart_inputs):
    assert _all_charts(chart_inputs) == _all_charts(chart_inputs)


def test_chart_names_with_mathtext_are_literal(chart_inputs):
    r"""A ``$...$`` in a truck name must not be parsed as mathtext (``\foo`` would raise)."""
    cum, tidy, comp, trace, em, torn = chart_inputs
    bad = r"Truck $\foo$ {x}_1"
    renamed = tidy.replace({"truck": {"A": bad}})

    def texts(uri):  # text stays text in the SVG (svg.fonttype "none")
        return ["".join(t.itertext()) for t in _svg_root(uri).iter(f"{{{SVG_NS[1:-4]}}}text")]

    # the literal strings, dollar signs and backslashes included, are what the chart shows
    assert r"Cost [$\bar$]" in texts(charts.stacked_yearly_cost(renamed, bad,
                                                                ylabel=r"Cost [$\bar$]"))
    cum_texts = texts(charts.cumulative_cost(cum.rename(columns={"A": bad}), 1.0, ylabel="x",
                                             breakeven_label=r"$\foo$"))
    assert bad in cum_texts
    assert any(r"$\foo$" in t for t in cum_texts)
    assert bad in texts(charts.tornado(torn.assign(input=[bad, "$"]), 0.0, xlabel="x"))


def test_chart_bad_input_raises(chart_inputs):
    cum, tidy, comp, trace, em, torn = chart_inputs
    with pytest.raises(ValueError, match="no rows for truck"):
        charts.stacked_yearly_cost(tidy, "nope", ylabel="x")
    with pytest.raises(ValueError, match="missing column"):
        charts.duty_cycle(trace.drop(columns="power"), xlabel="t", labels={})
    with pytest.raises(ValueError, match="no axis label"):
        charts.duty_cycle(trace, xlabel="t", labels={"speed": "v"})
    with pytest.raises(ValueError, match="no finite samples"):
        charts.distribution([np.nan], "x")
    with pytest.raises(ValueError):
        charts.equation(r"\frac{1}")


def test_duty_cycle_thinning_keeps_peaks():
    """Min/max thinning keeps a one-sample spike that plain striding would drop."""
    x = np.arange(100_000, dtype=float)
    y = np.zeros_like(x)
    y[54_321] = 500.0
    y[77_777] = -300.0
    xs, ys = charts._envelope(x, y, 2000)
    assert len(xs) <= 2000 + 2
    assert ys.max() == 500.0 and ys.min() == -300.0
    assert xs[0] == 0 and xs[-1] == x[-1] and np.all(np.diff(xs) > 0)
    assert y[::50].max() == 0.0  # striding to a similar length loses the spike


def test_row_major_legend_order():
    # 7 entries in 3 columns: matplotlib fills columns of 3, 2, 2 (numpy.array_split).
    items = list("abcdefg")
    cols = charts._row_major(items, 3)
    columns = [cols[0:3], cols[3:5], cols[5:7]]
    rows = [[c[r] for c in columns if r < len(c)] for r in range(3)]
    assert [x for row in rows for x in row] == items


def test_compact_tick_labels():
    assert charts.compact_number(1_500) == "1.5k"
    assert charts.compact_number(2_000_000) == "2M"
    assert charts.compact_number(-250_000) == "\u2212250k"
    assert charts.compact_number(0) == "0"
    assert charts.compact_number(0.25) == "0.25"


# ---------------------------------------------------------------- workbook -----------
def _inputs_workbook():
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Inputs"
    wbb.input_header(ws)
    return wb, ws


def test_named_input_row_and_defined_name(tmp_path):
    wb, ws = _inputs_workbook()
    ref = wbb.add_named_input(wb, ws, 5, "discount_rate", "Discount rate", 0.06, "%/yr",
                              "user", number_format=wbb.PERCENT)
    assert ref == "'Inputs'!$C$5"
    path = tmp_path / "n.xlsx"
    wb.save(path)
    back = openpyxl.load_workbook(path)
    dn = back.defined_names["discount_rate"]
    assert dn.attr_text == "'Inputs'!$C$5"
    assert list(dn.destinations) == [("Inputs", "$C$5")]
    ws2 = back["Inputs"]
    assert [c.value for c in ws2[5]] == ["Discount rate", "discount_rate", 0.06, "%/yr", "user"]
    assert ws2["C5"].number_format == wbb.PERCENT
    assert ws2["C5"].fill.fgColor.rgb.endswith("FFF2CC")
    assert ws2.freeze_panes == "A2"
    assert [c.value for c in ws2[1]] == list(wbb.INPUT_COLUMNS)


def test_named_input_sheet_with_space_is_quoted():
    wb = openpyxl.Workbook()
    ws = wb.create_sheet("My inputs")
    assert wbb.add_named_input(wb, "My inputs", 2, "x", "X", 1, "-", "user") == \
        "'My inputs'!$C$2"


@pytest.mark.parametrize("name", ["A1", "xfd1048576", "R1C1", "R", "c", "TRUE", "1abc",
                                  "has space", "a-b", "", "x" * 256])
def test_check_name_rejects(name):
    with pytest.raises(ValueError, match="not a valid workbook name"):
        wbb.check_name(name)


@pytest.mark.parametrize("name", ["discount_rate", "in.rate", "_x", "Rate2", "ABCD1"])
def test_check_name_accepts(name):
    # "ABCD1": four letters exceed the last column (XFD), so it is not a cell reference.
    assert wbb.check_name(name) == name


def test_duplicate_name_rejected_case_insensitively():
    wb, ws = _inputs_workbook()
    wbb.add_named_input(wb, ws, 2, "rate", "Rate", 0.1, "-", "user")
    with pytest.raises(ValueError, match="already defined"):
        wbb.add_named_input(wb, ws, 3, "RATE", "Rate", 0.1, "-", "user")


def test_write_value_numbers_text_and_nonfinite():
    wb = openpyxl.Workbook()
    ws = wb.active
    assert wbb.write_value(ws["A1"], 3, wbb.MONEY).value == 3.0
    assert ws["A1"].number_format == wbb.MONEY
    assert wbb.write_value(ws["A2"], float("nan")).value is None
    assert wbb.write_value(ws["A3"], np.float64(np.inf)).value is None
    c = wbb.write_value(ws["A4"], True)
    assert c.value == "True" and c.data_type == "s"


def test_add_chart_writes_native_charts(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Cash flow"
    wbb.header_row(ws, 1, ["Year", "Diesel", "Electric"])
    for y in range(6):
        ws.append([y, 100 + 20 * y, 150 + 10 * y])
    wbb.add_chart(ws, "line", data_ws=ws, header_row=1, first_row=2, last_row=7, cat_col=1,
                  first_col=2, last_col=3, anchor="E2", title="Cumulative cost",
                  x_title="Year", y_title="Cost [EUR]", y_number_format=wbb.MONEY)
    wbb.add_chart(ws, "bar", data_ws=ws, header_row=1, first_row=2, last_row=7, cat_col=1,
                  first_col=2, last_col=3, anchor="E20", title="Yearly", x_title="Year",
                  y_title="Cost [EUR]", stacked=True)
    with pytest.raises(ValueError, match="unknown chart kind"):
        wbb.add_chart(ws, "pie", data_ws=ws, header_row=1, first_row=2, last_row=7,
                      cat_col=1, first_col=2, last_col=3, anchor="A1", title="", x_title="",
                      y_title="")
    path = tmp_path / "c.xlsx"
    wb.save(path)
    with zipfile.ZipFile(path) as z:
        xml = {n: z.read(n).decode() for n in z.namelist() if n.startswith("xl/charts/")}
    assert len(xml) == 2
    line = next(v for v in xml.values() if "lineChart" in v)
    bar = next(v for v in xml.values() if "barChart" in v)
    assert "'Cash flow'!$B$2:$B$7" in line and "'Cash flow'!$A$2:$A$7" in line
    assert 'grouping val="stacked"' in bar
    assert 'delete val="0"' in line  # axes shown
    assert 'formatCode="#,##0;[Red]-#,##0"' in line


# ------------------------------------------------------- LibreOffice recalculation ---
@pytest.mark.slow
@needs_soffice
def test_recalc_npv_irr_match_numpy_financial(tmp_path):
    """Named inputs and formulas recalculated by LibreOffice match numpy-financial.

    Reference: numpy-financial ``npv``/``irr`` (numpy-financial documentation: ``npv``
    discounts the first value by (1+r)^0, whereas spreadsheet ``NPV`` starts at (1+r)^1,
    so ``NPV(r, C1:Cn) + C0 == npf.npv(r, [C0..Cn])`` — library notes).
    """
    flows = [-250_000.0, 41_000.0, 43_500.0, 45_200.0, 47_000.0, 48_800.0, 50_100.0,
             52_000.0, 53_900.0, 56_000.0, 95_000.0]
    rate = 0.06
    wb, ws = _inputs_workbook()
    wbb.add_named_input(wb, ws, 2, "discount_rate", "Discount rate", rate, "-", "user",
                        number_format=wbb.PERCENT)
    cf = wb.create_sheet("Cash flow")
    wbb.header_row(cf, 1, ["Year", "Net cash flow"])
    for i, v in enumerate(flows):
        wbb.write_value(cf.cell(row=2 + i, column=1), i, wbb.YEAR)
        wbb.write_value(cf.cell(row=2 + i, column=2), v, wbb.MONEY)
    last = 1 + len(flows)
    cf["D2"] = f"=NPV(discount_rate,B3:B{last})+B2"
    cf["D3"] = f"=IRR(B2:B{last})"
    cf["D4"] = "=discount_rate*2"
    src = tmp_path / "npv.xlsx"
    wb.save(src)
    assert openpyxl.load_workbook(src, data_only=True)["Cash flow"]["D2"].value is None

    out = recalculate(src, tmp_path / "out")
    got = openpyxl.load_workbook(out, data_only=True)["Cash flow"]
    # 1e-9 relative: both sides are double-precision sums of 11 terms (observed ~1e-15).
    assert got["D2"].value == pytest.approx(npf.npv(rate, flows), rel=1e-9)
    assert got["D3"].value == pytest.approx(npf.irr(flows), rel=1e-9)
    assert got["D4"].value == pytest.approx(0.12, rel=1e-12)


@pytest.mark.slow
@needs_soffice
def test_recalc_recomputes_stale_cached_values(tmp_path):
    """A formula with a wrong cached value is recomputed (forced recalculation on load)."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws["A1"] = 2
    ws["A2"] = "=A1*3"
    src = tmp_path / "fresh.xlsx"
    wb.save(src)
    stale = tmp_path / "stale.xlsx"
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(stale, "w") as zout:
        for name in zin.namelist():
            data = zin.read(name)
            if name == "xl/worksheets/sheet1.xml":
                data = data.replace(b"<f>A1*3</f><v />", b"<f>A1*3</f><v>999</v>")
            zout.writestr(name, data)
    assert openpyxl.load_workbook(stale, data_only=True).active["A2"].value == 999
    out = recalculate(stale, tmp_path / "out")
    assert openpyxl.load_workbook(out, data_only=True).active["A2"].value == 6


def test_recalc_refuses_same_folder(tmp_path):
    from recalc import SOFFICE

    if SOFFICE is None:
        pytest.skip("LibreOffice (soffice) is not installed")
    with pytest.raises(ValueError, match="outdir"):
        recalculate(tmp_path / "x.xlsx", tmp_path)


@pytest.mark.slow
@needs_soffice
def test_recalc_parallel_calls_each_write_a_result(tmp_path):
    """Two simultaneous recalculations both produce a file (one profile per call; a
    shared profile makes one of them exit silently — library notes)."""
    from concurrent.futures import ThreadPoolExecutor

    paths = []
    for i in range(2):
        wb = openpyxl.Workbook()
        wb.active["A1"] = i + 1
        wb.active["A2"] = "=A1*10"
        (tmp_path / f"in{i}").mkdir()
        paths.append(tmp_path / f"in{i}" / "w.xlsx")
        wb.save(paths[-1])
    with ThreadPoolExecutor(2) as pool:
        outs = list(pool.map(lambda p: recalculate(p, p.parent / "out"), paths))
    values = [openpyxl.load_workbook(o, data_only=True).active["A2"].value for o in outs]
    assert values == [10, 20]


def test_equation_cache_gives_the_typeset_svg_and_survives_bad_files(tmp_path, monkeypatch):
    """Typeset equations are kept on disk; a cached one is the same bytes as typesetting
    it now, a damaged file is typeset again, and an unusable folder changes nothing."""
    import base64

    tex = r"E = \dfrac{m\,g\,h}{\eta}"
    monkeypatch.setenv("TCO_CACHE_DIR", str(tmp_path))
    charts._cached_equation_svg.cache_clear()
    fresh = charts._typeset_equation(tex, 11.0)
    first = charts.equation(tex)
    assert base64.b64decode(first.split(",", 1)[1]) == fresh
    files = list((tmp_path / "equations").glob("*.svg"))
    assert len(files) == 1 and files[0].read_bytes() == fresh
    assert not list((tmp_path / "equations").glob("*.tmp"))
    # from the file, without typesetting
    charts._cached_equation_svg.cache_clear()
    monkeypatch.setattr(charts, "_typeset_equation", lambda *a: pytest.fail("typeset"))
    assert charts.equation(tex) == first
    # another size is another key
    monkeypatch.undo()
    monkeypatch.setenv("TCO_CACHE_DIR", str(tmp_path))
    charts._cached_equation_svg.cache_clear()
    assert charts.equation(tex, fontsize=14.0) != first
    assert len(list((tmp_path / "equations").glob("*.svg"))) == 2
    # a damaged file is replaced
    files[0].write_bytes(b"<?xml broken")
    charts._cached_equation_svg.cache_clear()
    assert charts.equation(tex) == first
    assert files[0].read_bytes() == fresh
    # a cache "folder" that is a file: typeset every time, no error
    blocked = tmp_path / "blocked"
    blocked.write_text("not a folder")
    monkeypatch.setenv("TCO_CACHE_DIR", str(blocked))
    charts._cached_equation_svg.cache_clear()
    assert charts.equation(tex) == first
    charts._cached_equation_svg.cache_clear()
