"""Safety of the outputs: nothing in a scenario executes or reaches outside.

Hostile names and notes (markup that would fetch or embed local files, file links,
spreadsheet formula triggers — conftest.HOSTILE) are fed through the HTML, the PDF and the
workbook helpers. The checks: the HTML has no element or reference the template did not
put there; the PDF fetches nothing, has no attachment, no link and no byte of the /etc
files, and shows the markup as text; workbook cells hold literal strings after reload and
after LibreOffice recalculation.

Each detector is also run once against an unprotected path (plain weasyprint, plain
openpyxl assignment) to show it does catch a leak — a check that cannot fail proves
nothing.
"""
from __future__ import annotations

import copy
import re
import socket
import zipfile
from html.parser import HTMLParser
from pathlib import Path

import openpyxl
import pypdf
import pytest
import weasyprint
from recalc import needs_soffice, recalculate
from weasyprint.urls import URLFetcher

from tco.report import workbook_base as wbb
from tco.report.html import render_html
from tco.report.pdf import render_pdf

ETC_FILES = [Path("/etc/passwd"), Path("/etc/hostname")]


def _squash(text: str) -> str:
    return re.sub(r"\s+", "", text)


def _hostile_context(ctx: dict, hostile: list[str]) -> dict:
    """Put hostile text in every place a scenario's text can reach."""
    ctx = copy.deepcopy(ctx)
    joined = " | ".join(hostile)
    ctx["meta"]["title"] = hostile[0] + " " + hostile[1]
    ctx["meta"]["fingerprint"] = hostile[4]
    ctx["verdict"] = joined
    ctx["key_figures"][0].update(label=hostile[2], value=hostile[4], note=hostile[6])
    ctx["feasibility"][0].update(truck=hostile[0], verdict=hostile[5], detail=hostile[1],
                                 parts=[{"text": hostile[1], "warn": True},
                                        {"text": hostile[7], "warn": False}])
    ctx["warnings"] = list(hostile)
    ctx["tables"][1]["columns"][1] = hostile[8]
    ctx["tables"][1]["rows"].append(list(hostile[:3]))
    ctx["assumptions"]["sections"].insert(0, {
        "title": hostile[0], "columns": ["Input", hostile[1]],
        "rows": [[h, h] for h in hostile],
        "tables": [{"title": hostile[2], "note": hostile[3], "columns": [hostile[4]],
                    "rows": [[h] for h in hostile]}]})
    ctx["assumptions"]["sources"] += [{"number": 90 + i, "text": h}
                                      for i, h in enumerate(hostile)]
    ctx["method_notes"][0].update(title=hostile[3], text=joined, equation=hostile[9])
    ctx["cautions"].append(joined)
    for figures in ctx["charts"].values():
        for fig in figures:
            fig.update(title=hostile[1], caption=hostile[2])
    return ctx


class _Parse(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: list[str] = []
        self.attrs: list[tuple[str, str, str]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs += [(tag, k, v or "") for k, v in attrs]

    def handle_data(self, data):
        self.text.append(data)


# ---------------------------------------------------------------- HTML ---------------
@pytest.mark.parametrize("for_print", [True, False])
def test_html_shows_hostile_text_literally(sample_context, hostile, for_print):
    clean = render_html(sample_context, for_print=for_print)
    html = render_html(_hostile_context(sample_context, hostile), for_print=for_print)
    got, ref = _Parse(), _Parse()
    got.feed(html)
    ref.feed(clean)
    # The hostile report has exactly the kinds of elements the clean one has: no img,
    # link, a or script came from the text (the only links are the contents' own).
    assert set(got.tags) == set(ref.tags)
    assert got.tags.count("img") == ref.tags.count("img")
    assert got.tags.count("a") == ref.tags.count("a")
    for tag in ("link", "script", "iframe", "object", "embed", "base"):
        assert tag not in got.tags
    refs = [(t, k, v) for t, k, v in got.attrs if k in ("src", "href")]
    assert all(v.startswith("data:image/") if k == "src" else
               (t == "a" and v.startswith("#") and v[1:].replace("-", "").isalpha())
               for t, k, v in refs)
    assert not any(k.startswith("on") for _, k, _ in got.attrs)  # no event handlers
    text = "".join(got.text)
    for h in hostile:
        assert h in text  # shown as text, entity-decoded by the parser
    assert "&lt;img src=file:///etc/passwd&gt;" in html


# ---------------------------------------------------------------- PDF ----------------
def _pdf_streams(path: Path) -> bytes:
    """All decompressed stream data and string objects of a PDF."""
    reader = pypdf.PdfReader(str(path))
    chunks = [path.read_bytes()]
    ids = {(num, gen) for gen, table in reader.xref.items() for num in table}
    ids |= {(num, 0) for num in reader.xref_objStm}
    assert ids  # the walk reaches the objects
    for num, gen in sorted(ids):
        obj = reader.get_object(pypdf.generic.IndirectObject(num, gen, reader))
        if isinstance(obj, pypdf.generic.StreamObject):
            try:
                chunks.append(obj.get_data())
            except Exception:  # noqa: BLE001 - undecodable filters are not our concern
                pass
    return b"\n".join(chunks)


def _etc_markers() -> list[bytes]:
    """Distinctive lines of the local files the hostile text points at."""
    marks = []
    for f in ETC_FILES:
        try:
            lines = [ln for ln in f.read_bytes().splitlines() if len(ln.strip()) >= 4]
        except OSError:
            continue
        marks += lines[:3]
    return marks


def _assert_no_leak(path: Path):
    reader = pypdf.PdfReader(str(path))
    assert dict(reader.attachments) == {}
    names = reader.trailer["/Root"].get("/Names")
    assert names is None or "/EmbeddedFiles" not in names.get_object()
    for page in reader.pages:
        for annot in page.get("/Annots") or []:
            a = annot.get_object()
            action = a.get("/A")
            assert action is None or "/URI" not in action.get_object(), a
            assert a.get("/Subtype") != "/FileAttachment"
    data = _pdf_streams(path)
    for mark in _etc_markers():
        assert mark not in data, f"content of a local file leaked: {mark[:20]!r}"


@pytest.fixture(scope="module")
def hostile_pdf(tmp_path_factory, _sample_context_once):
    from conftest import HOSTILE

    ctx = _hostile_context(_sample_context_once, HOSTILE)
    html = render_html(ctx, for_print=True, page_size="A4")
    path = tmp_path_factory.mktemp("hostile") / "report.pdf"
    return render_pdf(html, path), ctx


@pytest.mark.slow
def test_pdf_from_hostile_text_fetches_and_embeds_nothing(hostile_pdf):
    result, ctx = hostile_pdf
    assert result.blocked == []  # escaped markup is text: nothing even tried to fetch
    assert result.warnings == []
    _assert_no_leak(result.path)


@pytest.mark.slow
def test_pdf_shows_hostile_text_literally(hostile_pdf, hostile):
    result, ctx = hostile_pdf
    reader = pypdf.PdfReader(str(result.path))
    pages = [_squash(p.extract_text()) for p in reader.pages]
    text = "".join(pages)
    for h in hostile:
        assert _squash(h) in text, h
    # The hostile title runs in the header of every page after the cover.
    for page in pages[1:]:
        assert _squash(ctx["meta"]["title"]) in page


RAW_ATTACK = """<html><body><p>x</p>
<link rel=attachment href="file:///etc/hostname">
<link rel=attachment href="file:///etc/passwd">
<img src="file:///etc/passwd">
<img src="../../../../../../etc/passwd">
<link rel=stylesheet href="file:///etc/passwd">
</body></html>"""


def test_detector_catches_an_unprotected_render(tmp_path):
    """Control: plain weasyprint (default fetcher) DOES embed /etc/hostname and
    /etc/passwd; both leak checks (attachments, file content in the streams) see it.
    Proves the checks in the tests above can fail."""
    markers = _etc_markers()
    if not markers:
        pytest.skip("no readable /etc/passwd on this machine")
    path = tmp_path / "unsafe.pdf"
    weasyprint.HTML(string=RAW_ATTACK, base_url=str(tmp_path) + "/").write_pdf(str(path))
    reader = pypdf.PdfReader(str(path))
    assert {"hostname", "passwd"} <= set(reader.attachments)
    data = _pdf_streams(path)
    assert all(m in data for m in markers)
    with pytest.raises(AssertionError):
        _assert_no_leak(path)


def test_render_pdf_blocks_raw_markup_and_reports_it(tmp_path):
    """Even markup that bypassed escaping fetches nothing, and the blocks are reported."""
    result = render_pdf(RAW_ATTACK, tmp_path / "safe.pdf")
    _assert_no_leak(result.path)
    assert "file:///etc/hostname" in result.blocked
    assert "file:///etc/passwd" in result.blocked
    assert dict(pypdf.PdfReader(str(result.path)).attachments) == {}
    assert any("file:///etc/hostname" in w for w in result.warnings)
    # The relative path has no base to resolve against: not fetched, reported by
    # weasyprint as an error we pass on.
    assert not any("../" in u and "etc/passwd" in u for u in result.blocked
                   if u.startswith("file:"))
    assert any("Relative URI reference without a base URI" in w for w in result.warnings)


def _listener():
    srv = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    srv.bind(("127.0.0.1", 0))
    srv.listen(4)
    srv.setblocking(False)
    return srv


def _connections(srv) -> int:
    n = 0
    while True:
        try:
            conn, _ = srv.accept()
        except BlockingIOError:
            return n
        conn.close()
        n += 1


def test_render_pdf_makes_no_network_request(tmp_path):
    """A local listening socket sees no connection from render_pdf; the control (plain
    fetcher with a 1 s timeout) does connect, so the detector works."""
    srv = _listener()
    try:
        port = srv.getsockname()[1]
        html = (f'<p>x</p><img src="http://127.0.0.1:{port}/a.png">'
                f'<link rel=stylesheet href="http://127.0.0.1:{port}/a.css">')
        result = render_pdf(html, tmp_path / "net.pdf")
        assert _connections(srv) == 0
        assert f"http://127.0.0.1:{port}/a.png" in result.blocked
        weasyprint.HTML(string=html, url_fetcher=URLFetcher(timeout=1)).write_pdf(
            str(tmp_path / "control.pdf"))
        assert _connections(srv) >= 1
    finally:
        srv.close()


# ---------------------------------------------------------------- workbook -----------
def _write_hostile_workbook(path: Path, hostile: list[str]) -> None:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Inputs"
    wbb.input_header(ws)
    for i, h in enumerate(hostile):
        wbb.add_named_input(wb, ws, 2 + i, f"note_{i}", h, h, h, h)
    notes = wb.create_sheet("Notes")
    wbb.header_row(notes, 1, hostile)
    for i, h in enumerate(hostile):
        wbb.safe_text(notes.cell(row=2 + i, column=1), h)
        wbb.write_value(notes.cell(row=2 + i, column=2), h)
    wb.save(path)


def _assert_literal_cells(wb, hostile):
    ws = wb["Inputs"]
    for i, h in enumerate(hostile):
        for col in (1, 3, 4, 5):
            cell = ws.cell(row=2 + i, column=col)
            assert cell.value == h and cell.data_type == "s", (cell.coordinate, cell.value)
    notes = wb["Notes"]
    for i, h in enumerate(hostile):
        assert notes.cell(row=1, column=1 + i).value == h
        for col in (1, 2):
            cell = notes.cell(row=2 + i, column=col)
            assert cell.value == h and cell.data_type == "s"


def test_workbook_keeps_hostile_text_as_text(tmp_path, hostile):
    path = tmp_path / "hostile.xlsx"
    _write_hostile_workbook(path, hostile)
    _assert_literal_cells(openpyxl.load_workbook(path), hostile)
    # No formula anywhere in the sheets' XML.
    with zipfile.ZipFile(path) as z:
        for name in z.namelist():
            if name.startswith("xl/worksheets/"):
                assert b"<f>" not in z.read(name) and b"<f " not in z.read(name)


def test_workbook_detector_catches_plain_assignment(tmp_path):
    """Control: a plain openpyxl assignment makes a live formula, and the check sees it."""
    wb = openpyxl.Workbook()
    wb.active["A1"] = '=HYPERLINK("http://x","y")'
    wb.save(tmp_path / "unsafe.xlsx")
    cell = openpyxl.load_workbook(tmp_path / "unsafe.xlsx").active["A1"]
    assert cell.data_type == "f"


def test_safe_text_drops_unstorable_characters_and_caps_length(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    wbb.safe_text(ws["A1"], "=bad\x00\x07name\x1b")
    wbb.safe_text(ws["A2"], "x" * 40_000)
    wbb.safe_text(ws["A3"], None)
    wb.save(tmp_path / "odd.xlsx")
    back = openpyxl.load_workbook(tmp_path / "odd.xlsx").active
    assert back["A1"].value == "=badname" and back["A1"].data_type == "s"
    assert len(back["A2"].value) == wbb.MAX_CELL_CHARS
    assert back["A3"].value is None


@pytest.mark.slow
@needs_soffice
def test_workbook_text_survives_libreoffice(tmp_path, hostile):
    """After a spreadsheet program opens and recalculates the file, the hostile text is
    still text: ``+1+1`` is not 2, ``-2+3`` is not 1, no HYPERLINK appears."""
    path = tmp_path / "hostile.xlsx"
    _write_hostile_workbook(path, hostile)
    out = recalculate(path, tmp_path / "out")
    _assert_literal_cells(openpyxl.load_workbook(out, data_only=True), hostile)
    formulas = openpyxl.load_workbook(out)  # formulas, if any, would show as "f" cells
    for ws in formulas.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                assert cell.data_type != "f", cell.coordinate
