"""The demo's PDF as a reader gets it, read back with poppler's ``pdftotext -bbox-layout``
(word boxes in PostScript points): nothing past the right margin, no word broken inside,
no heading left alone at the foot of a page, the Monte Carlo cells under their own
headers, no placeholder units or scientific notation, and the page counts of the board
pack (body at most 12 pages, the whole PDF at most 18)."""
from __future__ import annotations

import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import pytest

pytestmark = [pytest.mark.slow,
              pytest.mark.skipif(shutil.which("pdftotext") is None,
                                 reason="needs poppler-utils (pdftotext)")]

# A4 in points (ISO 216: 210 mm × 297 mm; 1 pt = 1/72 in) and the report's margins
# (report.css: @page margin 20mm 18mm 18mm 18mm).
MM = 72 / 25.4
PAGE_W = 210 * MM
MARGIN_LEFT = MARGIN_RIGHT = 18 * MM
MARGIN_TOP, MARGIN_BOTTOM = 20 * MM, 18 * MM
PAGE_H = 297 * MM
NS = "{http://www.w3.org/1999/xhtml}"


def _print_pdf(result, folder):
    """The result's report as a print PDF in ``folder``: (context, html, PDF, pages of
    pdftotext's word boxes)."""
    from tco.report.context import build_context
    from tco.report.html import render_html
    from tco.report.pdf import render_pdf
    from tco.report.summary import build_summary

    ctx = build_context(result, build_summary(result))
    html = render_html(ctx, for_print=True, page_size="A4")
    pdf = render_pdf(html, folder / "report.pdf")
    bbox = folder / "bbox.html"
    subprocess.run(["pdftotext", "-bbox-layout", str(pdf.path), str(bbox)], check=True)
    return ctx, html, pdf, ET.parse(bbox).getroot().findall(f".//{NS}page")


@pytest.fixture(scope="module")
def demo_pdf(tmp_path_factory):
    from tco.pipeline import evaluate
    from tco.resources import demo_path
    from tco.scenario import load_scenario

    loaded = load_scenario(demo_path())
    loaded.scenario.uncertainty.draws = 2000  # the tables have the same shape at 10,000
    ctx, html, pdf, pages = _print_pdf(evaluate(loaded), tmp_path_factory.mktemp("layout"))
    text = subprocess.run(["pdftotext", str(pdf.path), "-"], check=True,
                          capture_output=True, text=True).stdout
    return {"ctx": ctx, "html": html, "pages": pages, "text": text, "count": pdf.pages}


def _words(page):
    for w in page.iter(f"{NS}word"):
        yield (w.text or "", float(w.get("xMin")), float(w.get("yMin")),
               float(w.get("xMax")), float(w.get("yMax")))


def _lines(page):
    """Visual lines of the page body (running header and footer left out), top to
    bottom: words whose baselines (yMax) agree within 1 pt, left to right. Table cells
    are separate blocks for pdftotext, so its own lines do not span a table row."""
    words = [(t, x0, y0, x1, y1) for t, x0, y0, x1, y1 in _words(page)
             if y0 >= MARGIN_TOP - 1 and y1 <= PAGE_H - MARGIN_BOTTOM + 1]
    words.sort(key=lambda w: (w[4], w[1]))
    out: list[tuple[float, float, list]] = []
    for t, x0, y0, x1, y1 in words:
        if out and abs(out[-1][1] - y1) <= 1.0:
            out[-1][2].append((t, x0, x1))
        else:
            out.append((y0, y1, [(t, x0, x1)]))
    for line in out:
        line[2].sort(key=lambda w: w[1])
    return out


class _Text(HTMLParser):
    """Visible text of the HTML and the headings, by element. Inline elements (a figure
    kept with its unit, bold, links) continue the word they sit in; every other element
    starts a new one."""

    INLINE = ("span", "b", "i", "em", "strong", "a", "sub", "sup")

    def __init__(self):
        super().__init__()
        self.stack: list[str] = []
        self.text: list[str] = []
        self.headings: list[str] = []
        self._h: list[str] | None = None

    def handle_starttag(self, tag, attrs):
        self.stack.append(tag)
        if tag not in self.INLINE:
            self.text.append(" ")
        if tag in ("h1", "h2", "h3", "h4"):
            self._h = []

    def handle_endtag(self, tag):
        if tag not in self.INLINE:
            self.text.append(" ")
        if tag in ("h1", "h2", "h3", "h4") and self._h is not None:
            self.headings.append(" ".join("".join(self._h).split()))
            self._h = None
        while self.stack and self.stack.pop() != tag:
            pass

    def handle_data(self, data):
        if "style" in self.stack or "title" in self.stack:
            return
        data = data.replace("\u2060", "")  # word joiner: holds a unit together, unseen
        self.text.append(data)
        if self._h is not None:
            self._h.append(data)


def _chart_words(html: str) -> set[str]:
    import base64

    out: set[str] = set()
    for b64 in re.findall(r"data:image/svg\+xml;base64,([A-Za-z0-9+/=]+)", html):
        svg = ET.fromstring(base64.b64decode(b64))
        for el in svg.iter():
            for piece in (el.text, el.tail):
                if piece:
                    out.update(piece.split())
    return out


# The board pack's targets (issue 13): a body of at most 12 pages and a whole PDF of at
# most 18, with nothing dropped. Both are asserted at the target.
BODY_PAGES_GUARD, WHOLE_PAGES_GUARD = 12, 18


def test_page_counts_within_the_board_pack_guard(demo_pdf):
    pages = demo_pdf["pages"]
    first_appendix = next(i for i, p in enumerate(pages)
                          if any(t == "Appendix:" for t, *_ in _words(p))
                          and i > 1)  # the contents page names it too
    body = first_appendix  # cover, contents, summary ... cautions; then the appendices
    # (method notes, assumptions)
    assert body <= BODY_PAGES_GUARD, f"body is {body} pages"
    assert demo_pdf["count"] <= WHOLE_PAGES_GUARD
    assert len(pages) - body >= 4  # the appendices are there, nothing dropped


def test_no_word_beyond_the_margins(demo_pdf):
    right = PAGE_W - MARGIN_RIGHT + 0.5  # half a point for glyph side bearings
    for n, page in enumerate(demo_pdf["pages"], start=1):
        for text, x0, y0, x1, y1 in _words(page):
            assert x1 <= right, f"page {n}: '{text}' ends at {x1:.1f} pt (> {right:.1f})"
            assert x0 >= MARGIN_LEFT - 0.5, f"page {n}: '{text}' starts at {x0:.1f} pt"


def test_no_words_run_into_each_other(demo_pdf):
    """On every visual line, each word ends at least 1 pt before the next begins: a
    figure kept whole on one line but wider than its table column would run into the
    next column's text (common practice: a word space of this face at 7–10 pt is
    2–3 pt)."""
    bad = []
    for n, page in enumerate(demo_pdf["pages"], start=1):
        for _, _, words in _lines(page):
            for (t0, _, x1), (t1, x0, _) in zip(words, words[1:]):
                if x0 - x1 < 1.0:
                    bad.append((n, t0, t1, round(x0 - x1, 1)))
    assert not bad, bad[:20]


def test_no_line_broken_early(demo_pdf):
    """In every paragraph (a pdftotext block of three or more left-aligned lines), a line
    ends early only when the next line's first word would not have fitted after it: the
    block's widest line marks the measure, a word space is taken as 2 pt (common
    practice: about a quarter of an em at 8–10 pt); a figure is measured with its unit,
    and a line starting with a capital is left out (table blocks put one cell a line).
    A paragraph whose first word stands alone on its line, a weasyprint fault before a
    ``nowrap`` span holding an ordinary space, fails here."""
    bad = []
    for n, page in enumerate(demo_pdf["pages"], start=1):
        for block in page.iter(f"{NS}block"):
            lines = []
            for line in block.iter(f"{NS}line"):
                ws = [(w.text or "", float(w.get("xMin")), float(w.get("xMax")))
                      for w in line.iter(f"{NS}word") if w.text != "•"]  # list marker
                if ws:
                    lines.append(ws)
            if len(lines) < 3 or len({round(ln[0][1]) for ln in lines}) != 1:
                continue
            right = max(ln[-1][2] for ln in lines)
            if right - lines[0][0][1] < 100:  # a narrow column of figures, not a measure
                continue
            for this, nxt in zip(lines, lines[1:]):
                word, x0, x1 = nxt[0]
                if word[:1].isupper():  # a new cell or sentence may start a line
                    continue
                if word[:1].isdigit() and len(nxt) > 1:  # a figure goes with its unit
                    x1 = nxt[1][2]
                if this[-1][2] + 2.0 + (x1 - x0) < right - 1.0:
                    bad.append((n, this[-1][0], word))
    assert not bad, bad[:20]


def test_no_word_broken_inside(demo_pdf):
    """Every word of the PDF is a word of the HTML (or a part of one after a hyphen,
    slash or dash, where a line may break): a word cut in two ("demonstratio n") would
    leave fragments that are in neither."""
    p = _Text()
    p.feed(demo_pdf["html"])
    tokens = set("".join(p.text).split())
    chart_text = "".join(_chart_words(demo_pdf["html"]))  # SVG text stays text in the PDF
    tokens |= {t.upper() for t in tokens}  # text-transform: uppercase (kicker, labels)
    tokens.add("•")  # list markers
    allowed = set(tokens)
    for t in tokens:  # a line may break after a hyphen, slash, dash or middle dot
        cuts = [m.end() for m in re.finditer(r"[-/–·—]", t)]
        for a in [0] + cuts:
            for b in cuts + [len(t)]:
                if b > a:
                    allowed.add(t[a:b])
    generated = re.compile(r"^(Page|of|\d+|·)$")  # running footer and contents numbers
    bad = []
    for n, page in enumerate(demo_pdf["pages"], start=1):
        for text, *_ in _words(page):
            if text in allowed or generated.match(text) or text in chart_text:
                continue
            if set(text) <= set(chart_text):  # typeset equations: glyphs placed one by one
                continue
            bad.append((n, text))
    assert not bad, bad[:20]


def test_no_heading_ends_a_page(demo_pdf):
    p = _Text()
    p.feed(demo_pdf["html"])
    headings = {h for h in p.headings if h}
    for n, page in enumerate(demo_pdf["pages"][:-1], start=1):
        lines = _lines(page)
        if not lines:
            continue
        last = " ".join(w for w, *_ in lines[-1][2])
        assert last not in headings, f"page {n} ends with the heading '{last}'"


def _table_columns(pages, header_words: list[str]):
    """The header line holding ``header_words`` and the lines under it on that page."""
    for page in pages:
        lines = _lines(page)
        for k, (y0, y1, words) in enumerate(lines):
            texts = [w for w, *_ in words]
            if all(h in texts for h in header_words):
                return words, lines[k + 1:]
    raise AssertionError(f"no line with {header_words}")


def test_monte_carlo_cells_sit_under_their_headers(demo_pdf):
    # statistics: every row's three numbers are right-aligned under P10, P50, P90
    header, below = _table_columns(demo_pdf["pages"], ["Quantity", "P10", "P50", "P90"])
    right_edges = [x1 for w, x0, x1 in header if w in ("P10", "P50", "P90")]
    rows = 0
    for y0, y1, words in below:
        number = r"[-−]?[\d,]+(\.\d+)?"
        if not re.fullmatch(number, words[-1][0]):
            break  # past the table (its note)
        numbers = [(w, x1) for w, x0, x1 in words if re.fullmatch(number, w)]
        for (w, x1), edge in zip(numbers[-3:], right_edges):
            assert x1 == pytest.approx(edge, abs=1.5), (w, x1, edge)
        rows += 1
    assert rows >= 3
    # probabilities: the probability and its standard error in their own columns
    header, below = _table_columns(demo_pdf["pages"], ["Probability", "Standard", "error"])
    edges = {w: x1 for w, x0, x1 in header}
    checked = 0
    for y0, y1, words in below:
        percents = [x1 for w, x0, x1 in words if w == "%"]
        if len(percents) < 2:
            if checked:
                break
            continue
        assert percents[0] == pytest.approx(edges["Probability"], abs=1.5)
        assert percents[1] == pytest.approx(edges["error"], abs=1.5)
        checked += 1
    assert checked >= 1


def test_no_placeholder_units_or_scientific_notation(demo_pdf):
    text = demo_pdf["text"]
    assert not re.search(r"\d[eE][+-]\d", text), re.findall(r"\S*\d[eE][+-]\d\S*", text)
    for bad in ("1/L", "1/km", "1/kWh", "1/kW", "1/h"):
        assert not re.search(rf"(?<![\w/]){re.escape(bad)}\b", text), bad
    assert "currency" not in text  # money is always named by its ISO code
    assert "Page size" not in text
    # the unit prices and rates a reader expects
    assert "EUR/L" in text and "EUR/kWh" in text and "EUR/kW·month" in text
    assert re.search(r"\d %", text)


def test_contents_page_lists_sections_with_their_pages(demo_pdf):
    pages = demo_pdf["pages"]
    # the cover is one page; the contents page follows it
    contents = " ".join(w for w, *_ in _words(pages[1]))
    assert "Contents" in contents
    found = re.findall(r"Cautions (\d+)", contents)
    assert found
    n = int(found[0])
    assert "Cautions" in [w for w, *_ in _words(pages[n - 1])]



def test_equations_are_drawn_with_a_font_that_has_their_glyphs():
    """The method-note equations are typeset by matplotlib's mathtext in the DejaVu Serif
    that matplotlib ships; every character they use is in that font's character map
    (read with fontTools), and the SVG carries outlines, not text for a PDF font to
    substitute (the dot of ṁ once printed as a placeholder glyph)."""
    import base64

    from fontTools.ttLib import TTFont
    from matplotlib import font_manager

    from tco.report import charts
    from tco.report.context import METHOD_NOTES

    path = font_manager.findfont(font_manager.FontProperties(family="DejaVu Serif"),
                                 fallback_to_default=False)
    assert "matplotlib" in path  # the font that ships with matplotlib
    cmap = TTFont(path).getBestCmap()
    for title, text, plain, tex in METHOD_NOTES:
        svg = base64.b64decode(charts.equation(tex).split(",", 1)[1]).decode()
        assert "<text" not in svg and "<path" in svg, title
        for ch in plain.replace(" ", ""):
            if ch == "ṁ":  # U+1E41, and its parts m + combining dot above (U+0307)
                assert 0x1E41 in cmap and ord("m") in cmap and 0x0307 in cmap
                continue
            if ch in "_^{}":  # plain-text sub/superscript markers, not glyphs
                continue
            assert ord(ch) in cmap or ord(ch) in _dejavu_sans_cmap(), (title, ch)


def _dejavu_sans_cmap():
    from fontTools.ttLib import TTFont
    from matplotlib import font_manager

    return TTFont(font_manager.findfont("DejaVu Sans")).getBestCmap()


# ---------------------------------------------------------------- wide tables ---------
@pytest.fixture(scope="module")
def four_truck_pdf(tmp_path_factory):
    """The demo with four trucks (each of its two copied under another name): the net
    cost by year and the present value by cost line then have 8 columns (the line, four
    trucks, three differences), more than a portrait page holds (context.WIDE_COLUMNS)."""
    from tco.pipeline import evaluate
    from tco.resources import demo_path
    from tco.scenario import load_scenario

    loaded = load_scenario(demo_path())
    s = loaded.scenario
    s.uncertainty.enabled = False
    for t in list(s.trucks):
        twin = t.model_copy(deep=True)
        twin.name = t.name + " B"
        s.trucks.append(twin)
    s.depot.chargers = 2  # managed charging: one charger per electric truck
    ctx, _, pdf, pages = _print_pdf(evaluate(loaded), tmp_path_factory.mktemp("wide"))
    return {"ctx": ctx, "pages": pages, "path": pdf.path}


def test_wide_tables_print_on_landscape_pages(four_truck_pdf):
    import pypdf

    wide = {t["title"]: " ".join(t["note"].split()[:4])
            for t in four_truck_pdf["ctx"]["tables"] if t["wide"]}
    assert "Net cost by year" in wide and "Present value by cost line" in wide
    narrow = [t["title"] for t in four_truck_pdf["ctx"]["tables"] if not t["wide"]]
    assert narrow  # tables with few columns stay on portrait pages
    reader = pypdf.PdfReader(str(four_truck_pdf["path"]))
    pages = four_truck_pdf["pages"]
    assert len(reader.pages) == len(pages)
    texts = [" ".join(w[0] for w in _words(page)) for page in pages]
    sizes = [(float(b.mediabox.width), float(b.mediabox.height)) for b in reader.pages]
    for title, note in wide.items():
        # from the page with the title (after the cover and contents) to the one with
        # the table's note below it: every page is A4 landscape, 297 mm × 210 mm (ISO 216)
        first = next(n for n in range(2, len(texts)) if title in texts[n])
        last = next(n for n in range(first, len(texts)) if note in texts[n])
        for n in range(first, last + 1):
            w, h = sizes[n]
            assert w == pytest.approx(PAGE_H, abs=0.5) and h == pytest.approx(PAGE_W, abs=0.5), \
                f"page {n + 1} of '{title}' is {w:.0f} × {h:.0f} pt"
    for n, page in enumerate(pages):
        # nothing past the right margin on any page, portrait or landscape
        right = sizes[n][0] - MARGIN_RIGHT + 0.5
        for t, x0, y0, x1, y1 in _words(page):
            assert x1 <= right, f"page {n + 1}: '{t}' ends at {x1:.1f} pt (> {right:.1f})"
    portrait = sum(float(b.mediabox.width) < float(b.mediabox.height) for b in reader.pages)
    assert portrait >= len(reader.pages) - 4  # only the wide tables' pages turn


# A machine name as a reader would spot one: words joined by underscores
# ("tax_credit_year", "as_financed") or a command-line option ("--out").
MACHINE_NAME = re.compile(r"(?<![\w-])(?:[a-z]+(?:_[a-z]+)+(?![\w])|--[a-z])")


def test_body_and_appendix_speak_without_machine_names(demo_pdf):
    """The verdict, key figures, findings, warnings, tables, cautions and the assumption
    appendix's labels and tables name inputs in words; the machine keys stay in the
    workbook and summary.json (the method notes name the settings they describe, and
    the sources quote their citations as written)."""
    ctx = demo_pdf["ctx"]
    texts = [ctx["verdict"], *ctx["warnings"], *ctx["cautions"]]
    texts += [v for f in ctx["key_figures"] for v in f.values()]
    texts += [f["detail"] for f in ctx["feasibility"]]
    texts += [c for t in ctx["tables"] for row in t["rows"] for c in row] + \
        [t["note"] for t in ctx["tables"]]
    for sec in ctx["assumptions"]["sections"]:
        texts += [c for row in sec["rows"] for c in row] + list(sec.get("notes", []))
        texts += [c for t in sec["tables"] for row in t["rows"] for c in row]
    found = [t for t in texts if isinstance(t, str) and MACHINE_NAME.search(t)]
    assert not found, found[:10]
