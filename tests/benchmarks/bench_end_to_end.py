"""Benchmark: end-to-end `tco run` on the demo versus weasyprint alone.

Prints the time of the whole run (model, uncertainty, charts, JSON, HTML, PDF, workbook),
made the way ``tco run`` makes it (the base case's charts drawn beside the uncertainty
study: ``tco.report.context.ChartsAhead``), as a ratio to the time weasyprint alone needs
to render the same report HTML, both measured in this run, in alternating rounds after a
warm-up round (imports, numba cache, the equation cache). Target: ratio ≤ 1.3.

Also printed: the per-round ratios; weasyprint alone with the objects alive frozen out of
garbage collection (as ``tco run`` renders: a stricter floor, about a fifth faster than
the plain one in a process holding the models' results) and the ratio to it; and CPU
seconds of the main process, its children and weasyprint alone (on a loaded machine the
wall-clock ratio mostly measures the share of the cores each process gets).

Run: python tests/benchmarks/bench_end_to_end.py [--repeat 3]
"""
from __future__ import annotations

import argparse
import gc
import os
import resource
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
    from tco.report.context import ChartsAhead, build_context
    from tco.report.html import render_html
    from tco.report.pdf import DataOnlyFetcher
    from tco.report.summary import build_summary
    from tco.resources import demo_path
    from tco.scenario import load_scenario

    out = Path(tempfile.mkdtemp())
    totals, floors, steps, cpu, frozen = [], [], [], [], []

    def children_cpu():
        r = resource.getrusage(resource.RUSAGE_CHILDREN)
        return r.ru_utime + r.ru_stime

    for k in range(args.repeat + 1):
        c0, p0 = children_cpu(), time.process_time()
        t0 = time.perf_counter()
        loaded = load_scenario(demo_path())
        ahead = ChartsAhead()
        with Silent() as progress:
            result = evaluate(loaded, progress=progress, on_base_case=ahead)
            write_outputs(result, out, progress=progress, ahead=ahead)
        total = time.perf_counter() - t0
        run_cpu = (time.process_time() - p0, children_cpu() - c0)

        html = render_html(build_context(result, build_summary(result)), for_print=True,
                           page_size=loaded.scenario.study.page_size)
        p1 = time.process_time()
        t1 = time.perf_counter()
        weasyprint.HTML(string=html, url_fetcher=DataOnlyFetcher()).write_pdf(
            out / "floor.pdf")
        floor = time.perf_counter() - t1
        if k == 0:
            continue  # warm-up
        totals.append(total)
        floors.append(floor)
        cpu.append((*run_cpu, time.process_time() - p1))
        # the same, with the objects alive left out of garbage collection, as `tco run`
        # renders it (tco.report.context.frozen_heap): the stricter floor
        gc.freeze()
        t2 = time.perf_counter()
        weasyprint.HTML(string=html, url_fetcher=DataOnlyFetcher()).write_pdf(
            out / "floor.pdf")
        frozen.append(time.perf_counter() - t2)
        gc.unfreeze()
        steps.append({**result.timings, **progress.timings})
    t, f = statistics.median(totals), statistics.median(floors)
    print("load average (1, 5, 15 min): " + ", ".join(f"{x:.2f}" for x in os.getloadavg()))
    print(f"weasyprint alone (floor): {f:.2f} s (median of {args.repeat})")
    print(f"tco run end to end:       {t:.2f} s")
    ratios = [a / b for a, b in zip(totals, floors)]
    print(f"ratio of the medians: {t / f:.2f}  (target <= 1.3)")
    print(f"per-round ratios: {', '.join(f'{r:.2f}' for r in ratios)}; "
          f"median {statistics.median(ratios):.2f}")
    fz = statistics.median(frozen)
    print(f"weasyprint alone, objects frozen: {fz:.2f} s; tco run / it: {t / fz:.2f}")
    # CPU seconds: on a loaded machine the wall-clock ratio mostly measures the share of
    # the cores each process gets (more processes of ours, less for the main one); the
    # main process's CPU time against weasyprint's is what the run costs on its critical
    # path when the other core is free for the drawing processes.
    main_cpu, kids_cpu, floor_cpu = (statistics.median(c[i] for c in cpu) for i in range(3))
    print(f"CPU [s], medians: main process {main_cpu:.2f}, its child processes "
          f"{kids_cpu:.2f}, weasyprint alone {floor_cpu:.2f}; main process / weasyprint "
          f"{main_cpu / floor_cpu:.2f}")
    print("steps of the last run [s]:")
    for name, sec in steps[-1].items():
        print(f"  {name:<40} {sec:6.2f}")


if __name__ == "__main__":
    main()
