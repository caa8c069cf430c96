"""Writers: each renders a :class:`tco.result.Result` into one output format.

``write_outputs`` builds every output in a staging folder and moves the files into
``OUT/<slug>/`` only when all of them succeeded (see :mod:`tco.report.atomic`).
"""
from __future__ import annotations

from pathlib import Path

from tco.report.atomic import staged_output
from tco.report.summary import build_summary, dumps


def write_outputs(result, out_root: Path, json_only: bool = False, progress=None,
                  ahead=None) -> list[Path]:
    """Write summary.json (and the PDF, HTML and workbook) for a Result.

    ``ahead``: the :class:`tco.report.context.ChartsAhead` given to
    :func:`tco.pipeline.evaluate`, whose charts are used (drawn while the models ran).

    Returns the paths written, inside ``out_root/<slug>/``.
    """
    target = Path(out_root) / result.loaded.slug
    summary = build_summary(result)
    names = ["summary.json"]
    with staged_output(target) as stage:
        (stage / "summary.json").write_text(dumps(summary), encoding="utf-8")
        if not json_only:
            from tco.report.deliverables import write_deliverables

            names += write_deliverables(result, summary, stage, progress=progress,
                                        ahead=ahead)
    return [target / n for n in names]
