"""Benchmark: end-to-end `tco run` on the demo versus weasyprint alone.

Prints the time of the whole run (model, uncertainty, charts, JSON, HTML, PDF, workbook)
as a ratio to the time weasyprint alone needs to render the same report HTML, both
measured in this run, after a warm-up (imports, numba cache). Target: ratio ≤ 1.5.

Run: python tests/benchmarks/bench_end_to_end.py [--repeat 3]
"""
from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()

    import weasyprint

    from tco.pipeline import evaluate
    from tco.progress import Silent
    from tco.report import write_outputs
    from tco.report.context import build_context
    from tco.report.html import render_html
    from tco.report.pdf import DataOnlyFetcher
    from tco.report.summary import build_summary
    from tco.resources import demo_path
    from tco.scenario import load_scenario

    out = Path(tempfile.mkdtemp())
    totals, floors, steps = [], [], []
    for k in range(args.repeat + 1):
        t0 = time.perf_counter()
        loaded = load_scenario(demo_path())
        with Silent() as progress:
            result = evaluate(loaded, progress=progress)
            write_outputs(result, out, progress=progress)
        total = time.perf_counter() - t0

        html = render_html(build_context(result, build_summary(result)), for_print=True,
                           page_size=loaded.scenario.study.page_size)
        t1 = time.perf_counter()
        weasyprint.HTML(string=html, url_fetcher=DataOnlyFetcher()).write_pdf(
            out / "floor.pdf")
        floor = time.perf_counter() - t1
        if k == 0:
            continue  # warm-up
        totals.append(total)
        floors.append(floor)
        steps.append({**result.timings, **progress.timings})
    t, f = statistics.median(totals), statistics.median(floors)
    print(f"weasyprint alone (floor): {f:.2f} s (median of {args.repeat})")
    print(f"tco run end to end:       {t:.2f} s")
    print(f"ratio: {t / f:.2f}  (target <= 1.5)")
    print("steps of the last run [s]:")
    for name, sec in steps[-1].items():
        print(f"  {name:<40} {sec:6.2f}")


if __name__ == "__main__":
    main()
