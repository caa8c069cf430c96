"""The PDF, HTML and workbook of a Result, written into a staging folder.

The workbook does not depend on the PDF, and weasyprint renders on one core: where the
platform can fork, the workbook is written by a child process while this one renders the
PDF (on this project's two-core machine it then costs no time of its own; see the
benchmarks section of DEVELOPERS.md). Without fork, or in a batch worker (which already
runs one scenario per core), it is written after the PDF, as before. Either way the
files are the same.
"""
from __future__ import annotations

import contextlib
import os
from pathlib import Path
from typing import Callable

#: The job a forked child runs (handed over by fork, never pickled).
_JOB: Callable[[], object] | None = None


def _run_job():
    # The workbook is not awaited until the PDF is done, and the PDF may be waiting for a
    # chart drawn in another child meanwhile: a lower priority leaves the cores to those
    # first (on a quiet two-core machine the workbook still has the PDF's idle time).
    with contextlib.suppress(OSError, AttributeError):
        os.nice(5)
    return _JOB()


class _Background:
    """``fn()`` in a forked child process, or later in this one where that is not possible.

    :meth:`result` waits for it and raises what it raised.
    """

    def __init__(self, fn: Callable[[], object]):
        global _JOB
        import multiprocessing as mp
        import os

        from tco.report import context
        from tco.report.context import frozen_heap

        self._fn, self._pool, self._future = fn, None, None
        if (context.CHART_WORKERS > 1 and (os.cpu_count() or 1) > 1
                and "fork" in mp.get_all_start_methods()):
            from concurrent.futures import ProcessPoolExecutor

            _JOB = fn
            try:
                self._pool = ProcessPoolExecutor(1, mp_context=mp.get_context("fork"))
                with frozen_heap():  # the child leaves the parent's objects alone
                    self._future = self._pool.submit(_run_job)  # forks here
            except (OSError, RuntimeError):  # pragma: no cover - no fork in this sandbox
                self._pool = self._future = None
            finally:
                _JOB = None

    def result(self):
        if self._future is None:
            return self._fn()
        try:
            return self._future.result()
        finally:
            self._pool.shutdown()

    def discard(self) -> None:
        """Wait for the child (it writes into the stage) and drop its outcome."""
        if self._future is not None:
            try:
                self._future.result()
            except BaseException:  # noqa: BLE001 - the caller's own error comes first
                pass
            finally:
                self._pool.shutdown()


def write_deliverables(result, summary: dict, stage: Path, progress=None, ahead=None
                       ) -> list[str]:
    """Write report.html, report.pdf and workbook.xlsx into ``stage``; return the names.

    ``ahead``: the :class:`tco.report.context.ChartsAhead` of the evaluation, if any.
    The charts are drawn by forked processes while weasyprint reads the report
    (:class:`tco.report.context.DeferredCharts`), and the objects alive before (the
    models' results) are left out of garbage collection meanwhile
    (:func:`tco.report.context.frozen_heap`).
    """
    from tco.report.context import DeferredCharts, build_context, frozen_heap
    from tco.report.html import render_html
    from tco.report.pdf import write_html_and_pdf
    from tco.report.workbook import write_workbook

    steps = progress
    page = result.scenario.study.page_size
    if steps:
        steps.start("charts and report text")
    charts = DeferredCharts()
    with frozen_heap():
        try:
            context = build_context(result, summary, ahead, deferred=charts)
            workbook = _Background(lambda: write_workbook(result, summary,
                                                          stage / "workbook.xlsx"))
            try:
                write_html_and_pdf(lambda for_print: render_html(
                    context if for_print else charts.fill(context), for_print=for_print,
                    page_size=page), stage, "report", "the report", progress=steps,
                    charts=charts if charts.active else None)
            except BaseException:
                workbook.discard()
                raise
        finally:
            charts.close()
        if steps:
            steps.start("writing the workbook")
        workbook.result()
    return ["report.pdf", "report.html", "workbook.xlsx"]
