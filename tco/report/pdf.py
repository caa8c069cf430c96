"""The report as PDF: the print HTML rendered by weasyprint, with nothing fetched.

weasyprint would by default read ``file://`` URLs, follow relative paths, try the
network and embed ``<link rel="attachment">`` targets in the PDF. The report needs none of
that: charts are ``data:`` URIs and the stylesheet is inline. So the fetcher here allows
the ``data`` scheme only, and ``base_url`` is ``None`` (relative references resolve to
nothing). A blocked fetch is not silent: it is collected and returned as a warning, so the
caller can show it (a blocked fetch means some markup that should not be there).
"""
from __future__ import annotations

import logging
from dataclasses import dataclass, field
from pathlib import Path

import weasyprint
from weasyprint.urls import URLFetcher

__all__ = ["render_pdf", "write_html_and_pdf", "PdfResult", "DataOnlyFetcher"]


class DataOnlyFetcher(URLFetcher):
    """A weasyprint URL fetcher that serves ``data:`` URIs and refuses everything else.

    Every refused URL is recorded in :attr:`blocked`. (A plain function as
    ``url_fetcher`` crashes in weasyprint 70; a ``URLFetcher`` subclass is the supported
    way.)
    """

    def __init__(self, charts=None):
        super().__init__(allowed_protocols={"data"}, allow_redirects=False, timeout=1)
        self.blocked: list[str] = []
        self._charts = charts

    def fetch(self, url, headers=None):
        if not str(url).lower().startswith("data:"):
            self.blocked.append(str(url))
        elif self._charts is not None:  # a chart still being drawn: wait for it
            url = self._charts.resolve(url) or url
        # The parent refuses every other scheme with ValueError before opening anything.
        return super().fetch(url, headers)


#: weasyprint messages that describe the installation, not the document: left out.
_NOT_ABOUT_THE_DOCUMENT = ("Using fontTools instead of HarfBuzz-Subset",)


class _Collect(logging.Handler):
    def __init__(self):
        super().__init__(level=logging.WARNING)
        self.messages: list[str] = []

    def emit(self, record):
        message = record.getMessage()
        if not message.startswith(_NOT_ABOUT_THE_DOCUMENT):
            self.messages.append(message)


@dataclass
class PdfResult:
    """What :func:`render_pdf` wrote.

    Attributes
    ----------
    path : Path
        The PDF file.
    pages : int
        Number of pages. [-]
    blocked : list of str
        URLs the document tried to fetch and was refused (empty for a clean report).
    warnings : list of str
        Plain-word warnings: one per blocked URL, then weasyprint's own warnings
        (unsupported CSS, unreadable images ...).
    """

    path: Path
    pages: int
    blocked: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)


def render_pdf(html: str, path, charts=None) -> PdfResult:
    """Render report HTML to a PDF file, fetching nothing but ``data:`` URIs.

    Parameters
    ----------
    html : str
        The print HTML from :func:`tco.report.html.render_html` (``for_print=True``).
    path : str or Path
        Where to write the PDF (the caller stages it for atomic output).
    charts : tco.report.context.DeferredCharts, optional
        Charts still being drawn while weasyprint reads the document: the HTML holds
        their stand-in ``data:`` URIs, and each is swapped for the chart (waiting for it)
        when weasyprint reaches its image. The PDF is the same as from the finished HTML.

    Returns
    -------
    PdfResult
        Path, page count, blocked URLs and warnings.

    Examples
    --------
    >>> from tco.report.pdf import render_pdf
    >>> r = render_pdf("<p>Hello</p>", "/tmp/hello.pdf")  # doctest: +SKIP
    >>> r.pages, r.warnings                                # doctest: +SKIP
    (1, [])
    """
    path = Path(path)
    fetcher = DataOnlyFetcher(charts)
    collect = _Collect()
    logger = logging.getLogger("weasyprint")
    old_level = logger.level
    logger.addHandler(collect)
    if logger.getEffectiveLevel() > logging.WARNING:
        logger.setLevel(logging.WARNING)  # collect warnings even if logging is quietened
    try:
        doc = weasyprint.HTML(string=html, base_url=None, url_fetcher=fetcher).render()
        if charts is not None:
            charts.check()  # a chart that failed raises here, not as a missing image
        doc.write_pdf(target=str(path))
    finally:
        logger.removeHandler(collect)
        logger.setLevel(old_level)
    warnings = [f"blocked a reference to {url!r}: the report fetches no files or network "
                "resources" for url in fetcher.blocked]
    warnings += [m for m in collect.messages
                 if not any(url in m for url in fetcher.blocked)]
    return PdfResult(path=path, pages=len(doc.pages), blocked=list(fetcher.blocked),
                     warnings=warnings)


def write_html_and_pdf(render, stage: Path, stem: str, what: str, progress=None,
                       charts=None) -> list[str]:
    """Write ``<stem>.html`` (screen) and ``<stem>.pdf`` (print) of one report into a stage.

    Parameters
    ----------
    render : callable
        ``render(for_print: bool) -> str``: the report's HTML for screen or print.
    stage : Path
        The staging folder (see :func:`tco.report.atomic.staged_output`).
    stem : str
        File name without extension, e.g. ``"report"``.
    what : str
        The report's name in the error message, e.g. ``"the fleet report"``.
    progress : tco.progress.Steps, optional
    charts : tco.report.context.DeferredCharts, optional
        Charts still being drawn (see :func:`render_pdf`): the PDF is rendered first, from
        ``render(True)`` with their stand-ins, and the HTML after it, when they are done.

    Returns
    -------
    list of str
        The two file names, HTML first.

    Raises
    ------
    InputError
        When the document tried to fetch anything outside itself (user text that reached
        the HTML as a link); nothing is fetched either way.
    """
    from tco.errors import InputError

    stage = Path(stage)
    if charts is None:
        (stage / f"{stem}.html").write_text(render(False), encoding="utf-8")
    if progress:
        progress.start(f"rendering {what} (PDF)")
    deferred = {} if charts is None else {"charts": charts}
    pdf = render_pdf(render(True), stage / f"{stem}.pdf", **deferred)
    if pdf.blocked:
        raise InputError(f"{what} tried to fetch outside resources: "
                         + ", ".join(pdf.blocked[:3]))
    if charts is not None:
        (stage / f"{stem}.html").write_text(render(False), encoding="utf-8")
    return [f"{stem}.html", f"{stem}.pdf"]
