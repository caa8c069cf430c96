"""The PDF, HTML and workbook of a Result, written into a staging folder."""
from __future__ import annotations

from pathlib import Path

from tco.errors import InputError


def write_deliverables(result, summary: dict, stage: Path, progress=None) -> list[str]:
    """Write report.html, report.pdf and workbook.xlsx into ``stage``; return the names."""
    from tco.report.context import build_context
    from tco.report.html import render_html
    from tco.report.pdf import render_pdf

    steps = progress
    page = result.scenario.study.page_size
    if steps:
        steps.start("charts and report text")
    context = build_context(result, summary)
    screen = render_html(context, for_print=False, page_size=page)
    (stage / "report.html").write_text(screen, encoding="utf-8")
    if steps:
        steps.start("rendering the PDF")
    pdf = render_pdf(render_html(context, for_print=True, page_size=page),
                     stage / "report.pdf")
    if pdf.blocked:
        raise InputError("the report tried to fetch outside resources: "
                         + ", ".join(pdf.blocked[:3]))
    if steps:
        steps.start("writing the workbook")
    from tco.report.workbook import write_workbook

    write_workbook(result, summary, stage / "workbook.xlsx")
    return ["report.pdf", "report.html", "workbook.xlsx"]
