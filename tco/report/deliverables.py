"""The PDF, HTML and workbook of a Result, written into a staging folder."""
from __future__ import annotations

from pathlib import Path


def write_deliverables(result, summary: dict, stage: Path, progress=None) -> list[str]:
    """Write report.html, report.pdf and workbook.xlsx into ``stage``; return the names."""
    from tco.report.context import build_context
    from tco.report.html import render_html
    from tco.report.pdf import write_html_and_pdf

    steps = progress
    page = result.scenario.study.page_size
    if steps:
        steps.start("charts and report text")
    context = build_context(result, summary)
    write_html_and_pdf(lambda for_print: render_html(context, for_print=for_print,
                                                     page_size=page),
                       stage, "report", "the report", progress=steps)
    if steps:
        steps.start("writing the workbook")
    from tco.report.workbook import write_workbook

    write_workbook(result, summary, stage / "workbook.xlsx")
    return ["report.pdf", "report.html", "workbook.xlsx"]
