"""The report as HTML: one jinja2 template for the PDF (print) and the browser (screen).

The template computes nothing. Everything it shows arrives in a *context* dict of
preformatted strings and chart ``data:`` URIs, built from the model results by the
context builder. Every string is HTML-escaped on output (``autoescape=True``), so text
from a user's scenario can never become markup, a link or a fetch.

Context structure
-----------------
All keys are required (``StrictUndefined``: a missing key is an error, not a blank);
lists may be empty, and an empty chart group or list leaves its heading out.

``meta`` : dict
    ``title``        scenario name (also the running header). [str]
    ``date``         date of the run, e.g. ``"2025-03-14"``. [str]
    ``version``      tool version, e.g. ``"0.1.0"``. [str]
    ``fingerprint``  hash of the inputs, e.g. ``"sha256:9f2c…"``. [str]
    ``currency``     ISO 4217 code, e.g. ``"EUR"``. [str]
    ``units``        unit system shown, ``"metric"`` or ``"US customary"``. [str]
    ``page_size``    ``"A4"`` or ``"Letter"`` (informative; the argument of
                     :func:`render_html` decides the page). [str]
``verdict`` : str
    The result in one sentence.
``key_figures`` : list of dict
    ``{"label", "value", "note"}``: e.g. ``{"label": "Cost per km, electric",
    "value": "1.29 EUR/km", "note": "over 10 years"}``; ``note`` may be ``""``.
``charts`` : dict of list of dict
    Chart groups, each a list of figures ``{"title", "caption", "uri"}``, where ``uri`` is
    a ``data:image/svg+xml;base64,...`` (or ``data:image/png;base64,...``) URI from
    :mod:`tco.report.charts`. Groups, in report order:
    ``"cost"`` (cumulative cost with break-even; yearly cost stacked by line, one figure
    with a panel per truck), ``"energy"`` (energy per distance by road-load component;
    duty cycle),
    ``"emissions"`` (emissions per year by scope), ``"uncertainty"`` (tornado;
    distribution of the present value difference). All four keys must be present; an
    empty list leaves the group out.
``feasibility`` : list of dict
    ``{"truck", "verdict", "detail"}``, one per truck, in plain words, and optionally
    ``"parts"``: the findings that make up ``detail`` as ``{"text", "warn"}``; the
    findings that are warnings are marked in the table (and counted in the summary's
    number of warnings).
``warnings`` : list of str
    Plain-word warnings (model range exceeded, defaults relied on, ...), without the
    findings already marked in the feasibility table
    (:func:`tco.report.findings.other_warnings`): a reader meets each finding once.
``tables`` : list of dict
    ``{"title", "columns": [str], "rows": [[str]], "note"}`` and optionally ``"total"``
    (the last row is a total, set in bold), ``"widths"`` (each column's share of the
    width in percent, for a table whose figures need more room than the default split)
    and ``"wide"`` (more than
    ``context.WIDE_COLUMNS`` columns: the PDF prints it on a landscape page of its own,
    the named page ``wide``): detailed tables
    (cash flow per year, per-truck summary ...). The first column is text (left-aligned),
    the others figures (right-aligned); ``note`` may be ``""``. Put years in rows, not
    columns.
``assumptions`` : dict
    The appendix from :func:`tco.report.assumptions.build_appendix`: ``sections``
    (``{"title", "columns", "rows", "tables"}``, rows of preformatted strings, tables
    ``{"title", "note", "columns", "rows"}``), ``sources`` (``{"number", "text"}``: the
    numbered sources of the defaults) and ``counts`` (``shown``, ``user``, ``default``,
    ``left_out``).
``method_notes`` : list of dict
    ``{"title", "text", "equation", "equation_uri"}``: ``equation`` is the plain-text
    (Unicode) form, may be ``""``; ``equation_uri`` is the typeset form from
    :func:`tco.report.charts.equation` (a ``data:`` URI) or ``""`` to print the plain
    text instead. The plain text is the image's alternative text.
``cautions`` : list of str
    Limits of use (not financial, tax or legal advice; emissions to be verified ...).

Only ``data:`` chart URIs are accepted (:func:`render_html` raises ``ValueError``
otherwise); the stylesheet ``report.css`` is read from the package and inlined, so the
page is standalone.
"""
from __future__ import annotations

import functools
from typing import Literal

import jinja2
from markupsafe import Markup

from tco.errors import InputError
from tco.resources import templates_dir

__all__ = ["environment", "render_html", "check_context", "PAGE_SIZES", "TEMPLATE",
           "STYLESHEET", "REQUIRED_KEYS", "CHART_GROUPS", "nobreak"]

TEMPLATE = "report.html.j2"
STYLESHEET = "report.css"
#: Browser-only rules (responsive layout, navigation bar), added for screen pages only.
SCREEN_STYLESHEET = "report-screen.css"

#: Page size name → CSS ``@page size`` keyword.
PAGE_SIZES = {"A4": "A4", "Letter": "letter"}

REQUIRED_KEYS = ("meta", "verdict", "key_figures", "charts", "feasibility", "warnings",
                 "tables", "assumptions", "method_notes", "cautions")
META_KEYS = ("title", "date", "version", "fingerprint", "currency", "units", "page_size")
CHART_GROUPS = ("cost", "energy", "emissions", "uncertainty")
_DATA_URI_PREFIXES = ("data:image/svg+xml;base64,", "data:image/png;base64,")


def _no_control_characters(value):
    """Every string a template prints, with control characters replaced (tco.text)."""
    if isinstance(value, str):
        from markupsafe import Markup

        from tco.text import clean_text

        cleaned = clean_text(value, multiline=True)
        return Markup(cleaned) if isinstance(value, Markup) else cleaned
    return value


def nobreak(value, hard: bool = False) -> Markup:
    """The template filter ``nobreak``: ``value`` escaped, with each figure and its unit
    (:func:`tco.report.formatting.figure_spans`) in a ``<span class="nw">`` that the
    stylesheet keeps on one line, so "684,568" and "EUR" never end up on two lines.

    ``hard`` (the PDF) holds the figure together with characters instead, and no span:
    no-break spaces for its spaces and a word joiner (U+2060) after each slash
    ("EUR/\u2060kW·month"). Weasyprint (70), given an inline box whose first
    unbreakable run does not fit at the end of a line, can break the line far too early
    (a paragraph's first word left alone on its line). Text read back from the PDF has
    a plain space there and no joiner. The browser page keeps the text as written (it
    is found and copied as written).

    >>> str(nobreak("Cost 684,568 EUR <b>"))
    'Cost <span class="nw">684,568 EUR</span> &lt;b&gt;'
    >>> str(nobreak("Cost 0.15 EUR/km", hard=True))
    'Cost 0.15\xa0EUR/\u2060km'
    """
    from markupsafe import escape

    from tco.report.formatting import figure_spans

    if isinstance(value, Markup) or not isinstance(value, str):
        return value if isinstance(value, Markup) else escape(value)
    out, at = [], 0
    for a, b in figure_spans(value):
        if hard:
            out += [escape(value[at:a]),
                    escape(value[a:b].replace(" ", "\u00a0").replace("/", "/\u2060"))]
        else:
            out += [escape(value[at:a]), Markup('<span class="nw">'), escape(value[a:b]),
                    Markup("</span>")]
        at = b
    out.append(escape(value[at:]))
    return Markup("").join(out)


def environment() -> jinja2.Environment:
    """The jinja2 environment of the report templates.

    ``autoescape=True`` escapes every value in every template, whatever its file name
    (``select_autoescape`` would not treat ``*.j2`` as HTML); ``finalize`` replaces control
    characters in every printed string, whatever its origin. ``StrictUndefined`` makes a
    missing context key an error instead of an empty string. The filter ``nobreak``
    (:func:`nobreak`) keeps figures with their units in text and table cells.

    Returns
    -------
    jinja2.Environment
        Loader on :func:`tco.resources.templates_dir`.
    """
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(templates_dir())),
        autoescape=True,
        finalize=_no_control_characters,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters["nobreak"] = nobreak
    return env


def check_context(context: dict) -> None:
    """Check the context's shape before rendering.

    Raises
    ------
    ValueError
        A key is missing, or a chart or equation URI is not an embedded ``data:`` image
        (the report must never reference a file or the network).
    """
    missing = [k for k in REQUIRED_KEYS if k not in context]
    missing += [f"meta.{k}" for k in META_KEYS if k not in context.get("meta", {})]
    missing += [f"charts.{k}" for k in CHART_GROUPS if k not in context.get("charts", {})]
    if missing:
        raise ValueError(f"report context is missing {', '.join(missing)}")
    uris = [(f"charts.{group}[{i}].uri", fig.get("uri"))
            for group, figures in context["charts"].items() for i, fig in enumerate(figures)]
    uris += [(f"method_notes[{i}].equation_uri", note.get("equation_uri"))
             for i, note in enumerate(context["method_notes"]) if note.get("equation_uri")]
    for where, uri in uris:
        if not isinstance(uri, str) or not uri.startswith(_DATA_URI_PREFIXES):
            raise ValueError(f"{where} is not an embedded data: image")


def render_html(context: dict, *, for_print: bool,
                page_size: Literal["A4", "Letter"] = "A4") -> str:
    """Render the report to one standalone HTML string.

    Parameters
    ----------
    context : dict
        The report context (structure in the module docstring).
    for_print : bool
        ``True`` for the PDF (paged media: cover page, running headers, page numbers),
        ``False`` for a browser page (one scrolling column; printing it still works).
    page_size : {"A4", "Letter"}
        Paper size of the printed pages.

    Returns
    -------
    str
        The HTML document, with the stylesheet and charts inline.

    Raises
    ------
    InputError
        Unknown page size.
    ValueError
        The context is incomplete or a chart is not a ``data:`` URI.
    """
    if page_size not in PAGE_SIZES:
        raise InputError(f"unknown page size '{page_size}' (use A4 or Letter)",
                         where="study.page_size")
    check_context(context)
    env = environment()
    env.filters["nobreak"] = functools.partial(nobreak, hard=for_print)
    # The stylesheet is our own package file, not user input: inlined as trusted markup.
    css = (templates_dir() / STYLESHEET).read_text(encoding="utf-8")
    if not for_print:
        css += "\n" + (templates_dir() / SCREEN_STYLESHEET).read_text(encoding="utf-8")
    return env.get_template(TEMPLATE).render(
        **context,
        css=Markup(css),
        page_css_size=PAGE_SIZES[page_size],
        for_print=for_print,
        chart_groups=CHART_GROUPS,
    )
