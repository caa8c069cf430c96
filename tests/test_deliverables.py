"""End to end: `tco run` writes summary.json, the PDF, the HTML and the workbook, and the
figures the PDF shows equal those of summary.json (text extracted with pypdf)."""
import json
import re
import zipfile

import pytest
from pypdf import PdfReader

from tco.cli import main
from tco.resources import demo_path

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("out")
    assert main(["run", "--out", str(out), "--quiet", "--draws", "2000"]) == 0
    folder = out / "demo"
    summary = json.loads((folder / "summary.json").read_text())
    text = "\n".join(p.extract_text() for p in PdfReader(folder / "report.pdf").pages)
    return folder, summary, re.sub(r"\s+", " ", text)


def test_all_outputs_written(demo_run):
    folder, _, _ = demo_run
    for name in ("summary.json", "report.pdf", "report.html", "workbook.xlsx"):
        assert (folder / name).stat().st_size > 1000, name
    assert zipfile.is_zipfile(folder / "workbook.xlsx")


# A number as a reader sees it: optional minus, digits grouped by commas in threes, an
# optional decimal part. Written out here, not taken from the report's own format strings.
_NUMBER = r"(?<![\d,.])([-−]?\d{1,3}(?:,\d{3})*(?:\.\d+)?)(?![\d,])"


def _shown(text: str, after: str, decimals: int) -> list[float]:
    """Numbers of the PDF text with exactly ``decimals`` decimals followed by ``after``
    ('1,234.568 EUR/km' → 1234.568)."""
    out = []
    for m in re.finditer(_NUMBER + re.escape(after), text):
        digits = m.group(1)
        if len(digits.partition(".")[2]) == decimals:
            out.append(float(digits.replace(",", "").replace("−", "-")))
    return out


def _rounds_to(shown: list[float], value: float, decimals: int) -> bool:
    """One of the shown numbers is ``value`` rounded to ``decimals`` (within half a unit
    of its last digit)."""
    return any(abs(x - value) <= 0.5 * 10.0 ** -decimals + 1e-9 for x in shown)


def test_pdf_key_figures_equal_summary(demo_run):
    """Each key figure of summary.json is in the PDF as a reader would read it: read back
    with a hand-written pattern, its number is summary.json's rounded to the decimals the
    report promises (three for a cost per km, none for money and tonnes)."""
    _, s, text = demo_run
    cur = s["scenario"]["currency"]
    for name, t in s["cashflow"]["trucks"].items():
        assert _rounds_to(_shown(text, f" {cur}/km", 3), t["levelized_cost_per_km"], 3), name
        assert _rounds_to(_shown(text, "", 0), t["present_value"], 0), name
    comp = s["cashflow"]["comparisons"][0]
    diff = comp["present_value_difference"]
    # the key figure keeps the sign, the verdict's sentence says "more"/"less"
    assert _rounds_to(_shown(text, f" {cur}", 0), diff, 0)
    assert _rounds_to(_shown(text, f" {cur} {'more' if diff > 0 else 'less'} than", 0),
                      abs(diff), 0)
    em = s["emissions"]["comparison"][comp["truck"]]
    assert _rounds_to(_shown(text, " t CO2e", 0), em["avoided_kg_total"]["location"] / 1000,
                      0)
    assert _rounds_to(_shown(text, f" {cur}/t CO2e", 0),
                      em["abatement_cost_per_tonne"]["location"], 0)
    assert s["scenario"]["fingerprint_sha256"][:16] in text
    assert "Page 2 of" in text
    for caution in ("not financial, tax or legal advice", "GHG Protocol",
                    "licensed electricians", "local law"):
        assert caution in text


def test_pdf_break_evens_equal_the_workbook_summary(demo_run):
    """The break-even depot electricity price and annual distance, which the workbook's
    Summary sheet states per kWh and per year (summary.json ``break_even``), are in the
    PDF's break-even table in those terms too, rounded to the shown decimals."""
    folder, s, text = demo_run
    cur = s["scenario"]["currency"]
    be = s["cashflow"]["comparisons"][0]["break_even"]
    assert _rounds_to(_shown(text, f" {cur}/kWh)", 3),
                      be["electricity_price_per_kwh"]["value"], 3)
    assert _rounds_to(_shown(text, " km/year)", 0), be["annual_distance_km"]["value"], 0)
    # and the workbook's cached Summary values are the same numbers
    from openpyxl import load_workbook

    ws = load_workbook(folder / "workbook.xlsx", data_only=True)["Summary"]
    cells = {ws.cell(row=r, column=2).value: ws.cell(row=r, column=4).value
             for r in range(1, ws.max_row + 1)}
    assert abs(cells["break_even.electricity_price_per_kwh"]
               - be["electricity_price_per_kwh"]["value"]) < 1e-9
    assert abs(cells["break_even.annual_distance_km"]
               - be["annual_distance_km"]["value"]) < 1e-6


def test_workbook_summary_gives_each_finding_once(demo_run):
    """The demo's aged-battery findings are warnings: the workbook's Summary sheet reads
    each once (in its feasibility block), as the report does, while summary.json keeps
    them among its warnings."""
    from openpyxl import load_workbook

    folder, s, _ = demo_run
    ws = load_workbook(folder / "workbook.xlsx", data_only=True)["Summary"]
    cells = [c.value for row in ws.iter_rows() for c in row if isinstance(c.value, str)]
    findings = [w.split(": ", 1)[1] for w in s["warnings"]
                if w.startswith("Electric tractor: ")]
    assert len(findings) >= 2
    for sentence in findings:
        assert sum(sentence in c for c in cells) == 1, sentence
    assert any(c.startswith("Other warnings") for c in cells)


def test_html_is_standalone(demo_run):
    folder, _, _ = demo_run
    html = (folder / "report.html").read_text()
    assert "http:" not in html.replace("http://www.w3.org", "")
    assert "file:" not in html
    assert "<script" not in html


def test_letter_page_size(tmp_path):
    assert main(["run", "--out", str(tmp_path), "--quiet", "--draws", "200",
                 "--page-size", "Letter"]) == 0
    box = PdfReader(tmp_path / "demo" / "report.pdf").pages[0].mediabox
    # US Letter is 8.5 × 11 in = 612 × 792 pt (ANSI/ASME Y14.1)
    assert (round(float(box.width)), round(float(box.height))) == (612, 792)


def test_unknown_page_size_is_bad_input(tmp_path, capsys):
    assert main(["run", "--out", str(tmp_path), "--page-size", "A5"]) == 2
    assert "--page-size" in capsys.readouterr().err
    assert not any(tmp_path.iterdir())


HOSTILE_NAME = '<img src=file:///etc/passwd> =HYPERLINK("http://x","y")'
HOSTILE_NOTE = '<link rel=attachment href=file:///etc/hostname> +1+1 @SUM(A1) -2+3'


def test_hostile_scenario_text_does_not_leak(tmp_path):
    from openpyxl import load_workbook

    text = demo_path().read_text()
    text = re.sub(r'^name = "Maravell[^"]*"', f"name = '{HOSTILE_NAME}'", text, count=1,
                  flags=re.M)
    text = re.sub(r'^notes = "[^"]*"', f"notes = '{HOSTILE_NOTE}'", text, count=1, flags=re.M)
    text = text.replace('"Diesel tractor"', "'=1+1 diesel'")
    scenario = tmp_path / "hostile.toml"
    scenario.write_text(text)
    assert main(["run", str(scenario), "--out", str(tmp_path / "out"), "--quiet",
                 "--draws", "100"]) == 0
    folder = tmp_path / "out" / "demo"
    reader = PdfReader(folder / "report.pdf")
    pdf_text = " ".join(p.extract_text() for p in reader.pages)
    assert "<img src=file:///etc/passwd>" in re.sub(r"\s+", " ", pdf_text)
    assert "/EmbeddedFiles" not in str(reader.trailer["/Root"])
    assert "root:x:0:0" not in pdf_text
    html = (folder / "report.html").read_text()
    assert "<img src=file" not in html and "&lt;img src=file:///etc/passwd&gt;" in html
    wb = load_workbook(folder / "workbook.xlsx")
    found = 0
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                v = cell.value
                if isinstance(v, str) and ("HYPERLINK" in v or "+1+1" in v or "=1+1" in v):
                    assert cell.data_type == "s", (ws.title, cell.coordinate, v)
                    found += 1
    assert found >= 2


def _write_marker(path):
    import os

    path.write_text(str(os.getpid()), encoding="utf-8")
    return 7


def _fail_in_child():
    from tco.errors import InputError

    raise InputError("bad cell", file="book.xlsx", where="B2")


def test_background_job_writes_returns_and_raises(tmp_path):
    """The workbook's background process: what it writes is there after result(), its
    value comes back, and an InputError raised in it keeps its message, file and field;
    discard() waits for it. Without a second chart worker (a batch worker) the job runs
    in this process when its result is asked for."""
    from tco.errors import InputError
    from tco.report import context
    from tco.report.deliverables import _Background

    import multiprocessing as mp
    import os

    job = _Background(lambda: _write_marker(tmp_path / "a.txt"))
    assert job.result() == 7
    if "fork" in mp.get_all_start_methods() and (os.cpu_count() or 1) > 1:
        assert (tmp_path / "a.txt").read_text(encoding="utf-8") != str(os.getpid())
    with pytest.raises(InputError) as err:
        _Background(_fail_in_child).result()
    assert (err.value.message, str(err.value.file), err.value.where) == \
        ("bad cell", "book.xlsx", "B2")
    other = _Background(lambda: _write_marker(tmp_path / "b.txt"))
    other.discard()
    assert (tmp_path / "b.txt").exists()
    saved = context.CHART_WORKERS
    try:
        context.CHART_WORKERS = 1
        late = _Background(lambda: _write_marker(tmp_path / "c.txt"))
        assert not (tmp_path / "c.txt").exists()
        assert late.result() == 7
        assert (tmp_path / "c.txt").read_text(encoding="utf-8") == str(os.getpid())
    finally:
        context.CHART_WORKERS = saved


def _failing_chart():
    raise ValueError("no rows for truck 'X'")


def test_deferred_charts_give_the_same_pdf_and_raise_a_chart_error(tmp_path, monkeypatch):
    """Charts drawn by forked processes while weasyprint reads the HTML: the PDF is the
    same bytes as from the finished HTML, the screen context is filled with the same
    charts, and a chart that fails raises its own error instead of leaving a blank."""
    from tco.report import charts
    from tco.report import context as C
    from tco.report.pdf import render_pdf

    monkeypatch.setattr(C, "CHART_WORKERS", 2)
    monkeypatch.setattr("os.cpu_count", lambda: 2)
    jobs = [C._later(charts.equation, r"a^2 + b^2"), C._later(charts.equation, r"\eta_{1}")]
    deferred = C.DeferredCharts()
    try:
        stand_ins = deferred.start(jobs)
        assert deferred.active and all(u.startswith("data:image/svg+xml;base64,")
                                       for u in stand_ins)
        page = "<p>Charts</p>" + "".join(f'<img src="{u}">' for u in stand_ins)
        render_pdf(page, tmp_path / "deferred.pdf", charts=deferred)
        filled = deferred.fill({"charts": stand_ins, "other": "data:,x"})
    finally:
        deferred.close()
    assert filled == {"charts": [job() for job in jobs], "other": "data:,x"}
    done = "<p>Charts</p>" + "".join(f'<img src="{u}">' for u in filled["charts"])
    render_pdf(done, tmp_path / "done.pdf")
    assert (tmp_path / "deferred.pdf").read_bytes() == (tmp_path / "done.pdf").read_bytes()
    assert deferred.resolve("data:,x") is None

    failing = C.DeferredCharts()
    try:
        stand_ins = failing.start([jobs[0], C._later(_failing_chart)])
        with pytest.raises(ValueError, match="no rows for truck"):
            render_pdf("".join(f'<img src="{u}">' for u in stand_ins), tmp_path / "x.pdf",
                       charts=failing)
    finally:
        failing.close()
