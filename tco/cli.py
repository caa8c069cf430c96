"""The command line: parse, call, print, exit code. No modelling happens here.

Exit codes: 0 success, 2 bad input (one line naming file, field or row, and the problem),
1 internal error, 130 interrupted (Ctrl-C), 143 terminated (SIGTERM); an interrupted or
terminated run leaves the previous outputs as they were and removes its staging folder.
"""
from __future__ import annotations

import argparse
import os
import signal
import sys
from pathlib import Path

from tco import __version__
from tco.errors import InputError

EXIT_OK, EXIT_INTERNAL, EXIT_INPUT = 0, 1, 2


class _Parser(argparse.ArgumentParser):
    """argparse with its errors on one line (``tco: error: ...``), exit 2; --help as usual."""

    def error(self, message):
        from tco.text import one_line

        self.exit(EXIT_INPUT, one_line(f"tco: error: {self.prog}: {message} (see "
                                       f"{self.prog} --help)") + "\n")


def _parser() -> argparse.ArgumentParser:
    p = _Parser(
        prog="tco",
        description="Compare battery-electric and diesel heavy trucks on a duty cycle: "
        "energy, cost of ownership, emissions, uncertainty; writes summary.json, a PDF and "
        "HTML report and a live workbook.",
    )
    p.add_argument("--version", action="version", version=f"tco {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    run = sub.add_parser("run", help="run a scenario and write its outputs",
                         description="Run a scenario (default: the bundled demo) and write "
                         "summary.json, report.pdf, report.html and workbook.xlsx into "
                         "OUT/<scenario>/.")
    run.add_argument("scenario", nargs="?", help="scenario TOML file (default: bundled demo)")
    run.add_argument("--out", default="out", help="output folder (default: ./out)")
    run.add_argument("--page-size", help="report page size: A4 or Letter (default: scenario)")
    run.add_argument("--json-only", action="store_true",
                     help="write summary.json only (no PDF, HTML or workbook)")
    run.add_argument("--draws", type=int, help="Monte Carlo draws (default: scenario)")
    run.add_argument("--quiet", action="store_true", help="print only the output paths")

    chk = sub.add_parser("check", help="validate a scenario without running it",
                         description="Validate a scenario and its trace files; print what "
                         "it describes. Exit 0 when valid, 2 when not.")
    chk.add_argument("scenario", help="scenario TOML file")

    fl = sub.add_parser("fleet", help="compare many routes sharing one depot",
                        description="Evaluate a fleet file (CSV or XLSX, one row per vehicle) "
                        "against a base scenario: energy per route, shared depot chargers and "
                        "peak, cost and emissions per route, electrification order and fleet "
                        "totals per year. Writes fleet.json, fleet-report.pdf/.html and "
                        "fleet-workbook.xlsx into OUT/<base scenario>/. Default: the bundled "
                        "demo fleet.")
    fl.add_argument("fleet", nargs="?", help="fleet file, .csv or .xlsx (default: demo fleet)")
    fl.add_argument("--base", help="base scenario TOML (default: base.toml beside the fleet "
                    "file)")
    fl.add_argument("--rule", choices=("managed", "unmanaged", "spread", "first_come"),
                    default=None,
                    help="depot charging rule: managed (also 'spread': flat power over each "
                    "stay) or unmanaged (also 'first_come': full power, chargers rotate); "
                    "default: the base scenario's [depot] charging")
    fl.add_argument("--jobs", type=int, help="processes to use (default: every core)")
    fl.add_argument("--out", default="out", help="output folder (default: ./out)")
    fl.add_argument("--json-only", action="store_true", help="write fleet.json only")
    fl.add_argument("--plan", help="transition plan settings (plan.toml: budget, grid, "
                    "carbon price, target); default: plan.toml beside the fleet file, if any")
    fl.add_argument("--telematics", metavar="FOLDER",
                    help="tco telematics output (vehicle_days.csv): logged vehicles take "
                    "their distance, energy per distance and depot return time from the logs")
    fl.add_argument("--no-plan", action="store_true",
                    help="skip the transition plan even if plan.toml is there")
    fl.add_argument("--quiet", action="store_true", help="print only the output paths")

    bt = sub.add_parser("batch", help="run every scenario in a folder (one per client)",
                        description="Run every *.toml scenario in FOLDER in parallel and write "
                        "each one's outputs (as `tco run`) into OUT/<folder>/<scenario>/, "
                        "plus index.json, index.xlsx, index.pdf and index.html across them. "
                        "A bad scenario is reported and skipped; the rest finish (exit 2 if "
                        "any was bad). Default: the bundled demo batch.")
    bt.add_argument("folder", nargs="?", help="folder of scenario TOML files (default: demo)")
    bt.add_argument("--out", default="out", help="output folder (default: ./out)")
    bt.add_argument("--jobs", type=int, help="processes to use (default: every core)")
    bt.add_argument("--json-only", action="store_true",
                    help="write summary.json per scenario and index.json only")
    bt.add_argument("--quiet", action="store_true", help="print only the output paths")

    tm = sub.add_parser("telematics", help="energy of recorded vehicle-days (Parquet, Dask)",
                        description="Replay partitioned Parquet telematics (vehicle, timestamp, "
                        "speed, elevation or grade, payload) through the energy model for "
                        "every truck of a base scenario, one vehicle-day at a time; in this "
                        "process, on a local Dask cluster (--workers) or on an existing one "
                        "(--scheduler). Writes vehicle_days.csv, vehicles.csv, "
                        "skipped_days.csv and telematics.xlsx into OUT/<dataset>/. Without a "
                        "dataset, writes and replays a small invented example.")
    tm.add_argument("dataset", nargs="?", help="folder of Parquet files, or one file")
    tm.add_argument("--base", help="scenario whose trucks are replayed (default: the demo)")
    tm.add_argument("--workers", type=int, help="start a local Dask cluster of N processes")
    tm.add_argument("--scheduler", help="address of a running Dask scheduler "
                    "(tcp://host:port)")
    tm.add_argument("--memory-limit", help="memory limit per local worker, e.g. 700MB")
    tm.add_argument("--out", default="out", help="output folder (default: ./out)")
    tm.add_argument("--quiet", action="store_true", help="print only the output paths")

    for sp in (run, chk, fl, bt, tm):
        sp.add_argument("--allow-folder", action="append", default=[], metavar="FOLDER",
                        help="also read trace, factor and profile files from FOLDER (by "
                        "default only from the scenario's own folder); repeatable")

    init = sub.add_parser("init", help="write a commented starter scenario",
                          description="Write a commented starter scenario to PATH.")
    init.add_argument("path", nargs="?", default="scenario.toml",
                      help="where to write it (default: scenario.toml)")
    init.add_argument("--force", action="store_true", help="overwrite an existing file")
    init.add_argument("--xlsx", metavar="NAME.xlsx",
                      help="write a starter input workbook instead: one row per input with "
                           "unit, description, source and default; sheets Inputs, Route "
                           "and Trucks (read it with tco check / tco run NAME.xlsx)")
    return p


def _cmd_run(args) -> int:
    from tco.pipeline import evaluate
    from tco.progress import Steps
    from tco.report import write_outputs
    from tco.resources import demo_path
    from tco.scenario import load_scenario

    path = Path(args.scenario) if args.scenario else demo_path()
    with Steps(quiet=args.quiet) as steps:
        steps.start("reading scenario")
        loaded = load_scenario(path)
        if args.page_size:
            if args.page_size.lower() not in ("a4", "letter"):
                raise InputError(f"unknown page size '{args.page_size}' (use A4 or Letter)",
                                 where="--page-size")
            loaded.scenario.study.page_size = "A4" if args.page_size.lower() == "a4" \
                else "Letter"
        if args.draws is not None:
            from tco.budget import check_draws

            loaded.scenario.uncertainty.draws = check_draws(args.draws, where="--draws")
        from tco.report.atomic import check_writable

        check_writable(Path(args.out) / loaded.slug)
        # the base case's charts are drawn beside the uncertainty study (tco.report.context)
        ahead = None
        if not args.json_only:
            from tco.report.context import ChartsAhead

            ahead = ChartsAhead()
        try:
            result = evaluate(loaded, progress=steps, on_base_case=ahead)
            steps.start("writing outputs")
            written = write_outputs(result, Path(args.out), json_only=args.json_only,
                                    progress=steps, ahead=ahead)
        finally:
            if ahead is not None:
                ahead.close()
    if not args.quiet:
        from tco.report.console import print_summary

        print_summary(result)
    for f in written:
        print(f)
    return EXIT_OK


def _cmd_check(args) -> int:
    from tco.pipeline import validate
    from tco.report import formatting as fm
    from tco.scenario import load_scenario
    from tco.text import one_line

    loaded = load_scenario(args.scenario)
    result = validate(loaded)  # every check `tco run` makes
    s = loaded.scenario
    total = float(result.route["distance"].iloc[-1] - result.route["distance"].iloc[0])
    print(one_line(f"{args.scenario}: valid — '{s.study.name}', {len(s.trucks)} trucks "
                   f"({', '.join(t.name for t in s.trucks)}), {len(s.route.legs)} legs, "
                   f"{fm.quantity(total, 'km', s.study.units, 1)} per trip", limit=None))
    for w in result.warnings:
        print(one_line(f"warning: {w}", limit=None))
    return EXIT_OK


def _at_least_one(value, option: str = "--jobs") -> int | None:
    """A process count from the command line: None (default) or a whole number ≥ 1."""
    if value is not None and value < 1:
        raise InputError("must be 1 or more", where=option)
    return value


def _cmd_fleet(args) -> int:
    from tco.fleet import evaluate_fleet, read_fleet
    from tco.progress import Steps
    from tco.report import formatting as fm
    from tco.report.atomic import check_writable
    from tco.resources import inputs_dir
    from tco.scenario import load_scenario

    jobs = _at_least_one(args.jobs)
    fleet = Path(args.fleet) if args.fleet else inputs_dir() / "fleet" / "fleet.csv"
    if not fleet.is_file():
        raise InputError("file not found", file=fleet)
    base = Path(args.base) if args.base else fleet.parent / "base.toml"
    if not args.base and not base.is_file():
        raise InputError("no base scenario: give --base (or put base.toml beside the fleet "
                         "file)", file=fleet, where="--base")
    plan_file = None if args.no_plan else Path(args.plan) if args.plan else \
        (fleet.parent / "plan.toml" if (fleet.parent / "plan.toml").is_file() else None)
    with Steps(quiet=args.quiet) as steps:
        steps.start("reading the fleet")
        loaded = load_scenario(base)
        rows = read_fleet(fleet)
        logged_notes = []
        if args.telematics:
            from tco.fleet_telematics import apply_logged_duty, read_logged_duty
            rows, logged_notes = apply_logged_duty(rows, read_logged_duty(args.telematics),
                                                   loaded, source=Path(args.telematics))
        settings = None
        if plan_file is not None:
            from tco.plan import load_plan_settings
            settings = load_plan_settings(plan_file)
        check_writable(Path(args.out) / loaded.slug)
        result = evaluate_fleet(loaded, rows, fleet, rule=args.rule, jobs=jobs,
                                progress=steps, plan=settings, plan_file=plan_file)
        steps.start("writing outputs")
        from tco.report.fleet_report import write_fleet_outputs

        written = write_fleet_outputs(result, Path(args.out), json_only=args.json_only,
                                      progress=steps)
    if not args.quiet:
        plan = result.depot_plan
        cur = result.currency
        sav, avo = result.plan_saving, result.plan_avoided_t
        money = (f"saves {fm.money(sav, cur)}" if sav >= 0
                 else f"costs {fm.money(-sav, cur)} more")
        print(f"{len(result.plan)} of {len(result.routes)} routes feasible; the plan {money} "
              f"(present value), avoids {fm.number(avo, 0)} t CO2e well-to-wheel, "
              f"needs {fm.count(plan.chargers)} chargers and {fm.kw(plan.peak_power)} peak")
        from tco.report.fleet_summary import money_routes, order_records

        mr = money_routes(order_records(result))  # as fleet.json "plan" says
        losing = mr["vehicles_losing_money"]
        if losing:
            m = mr["routes_saving_money"]
            both = (f"the {fm.count(m)} that save money save "
                    f"{fm.money(mr['pv_saving_money_routes'], cur)} together"
                    if m else "none saves money on its own")
            print(f"  {fm.count(len(losing))} of them cost more electric than diesel "
                  f"({', '.join(losing)}); {both}")
        for note in logged_notes:
            print(f"  {note}")
        tr = result.transition
        if tr is not None:
            sch = tr.schedule
            n_e = int((sch["decision"] == "electric").sum())
            print(f"transition plan: {n_e} of {len(sch)} vehicles go electric; present "
                  f"value {fm.money(tr.present_value, cur)} against "
                  f"{fm.money(tr.present_value_diesel, cur)} staying diesel")
            for note in tr.notes:
                print(f"  {note}")
    for f in written:
        print(f)
    return EXIT_OK


def _cmd_batch(args) -> int:
    from tco.batch import demo_batch_dir, run_batch
    from tco.progress import Steps

    jobs = _at_least_one(args.jobs)
    folder = Path(args.folder) if args.folder else demo_batch_dir()
    from tco.report import formatting as fm
    from tco.report.batch_index import outcome_row
    from tco.report.formatting import client_line

    def report(sc) -> None:  # one line per client as it finishes
        if not args.quiet and sc.ok:
            print(client_line(outcome_row(sc)), flush=True)

    with Steps(quiet=args.quiet) as steps:
        outcome = run_batch(folder, Path(args.out), jobs=jobs, json_only=args.json_only,
                            progress=steps, on_done=report)
    for bad in outcome.errors:
        print(f"tco: error: {bad.error}", file=sys.stderr)
    if not args.quiet:
        print(f"{len(outcome.ok)} of {len(outcome.scenarios)} scenarios done"
              + (f", {len(outcome.errors)} skipped (see above and the index)"
                 if outcome.errors else "") + f" in {fm.seconds(outcome.seconds, 1)}")
    for name in outcome.index:
        print(name)
    return EXIT_OK if outcome.all_ok else EXIT_INPUT


def _cmd_telematics(args) -> int:
    from tco import telematics
    from tco.progress import Steps
    from tco.report.atomic import check_writable
    from tco.resources import demo_path
    from tco.scenario import load_scenario

    _at_least_one(args.workers, "--workers")
    if args.workers and args.scheduler:
        raise InputError("give --workers or --scheduler, not both", where="--scheduler")
    loaded = load_scenario(Path(args.base) if args.base else demo_path())
    out = Path(args.out)
    if args.dataset:
        dataset = Path(args.dataset)
        name = (dataset.stem if dataset.is_file() else dataset.resolve().name) or "telematics"
    else:
        name = "telematics-example"
        dataset = out / name / "data"
    target = out / name
    check_writable(target)
    with Steps(quiet=args.quiet) as steps:
        if not args.dataset:
            steps.start("writing an invented example dataset")
            telematics.write_example_dataset(dataset)
        steps.start("replaying vehicle-days")
        bar = {}

        def progress(done, total):
            if "advance" not in bar:
                bar["advance"] = steps.bar(total, "partitions")
            bar["advance"](1)

        result = telematics.process(dataset, loaded, scheduler=args.scheduler,
                                    local_workers=args.workers,
                                    memory_limit=args.memory_limit, progress=progress)
        steps.start("writing outputs")
        written = telematics.write_outputs(result, target)
    if not args.quiet:
        vd = result.vehicle_days
        days = len(vd[["vehicle", "day"]].drop_duplicates())
        print(f"{vd['vehicle'].nunique()} vehicles, {days} vehicle-days, "
              f"{len(result.partitions)} partitions ({result.backend}); "
              f"{len(result.skipped)} vehicle-days skipped")
    for f in written:
        print(f)
    return EXIT_OK


def _cmd_init(args) -> int:
    from tco.starter import STARTER

    if args.xlsx:
        return _init_xlsx(Path(args.xlsx), args.force)
    path = Path(args.path)
    if path.exists() and not args.force:
        raise InputError("already exists; use --force to overwrite", file=path)
    from tco.report.atomic import write_text_atomic

    try:
        write_text_atomic(path, STARTER)
    except OSError as exc:
        raise InputError(f"cannot write: {exc.strerror}", file=path) from None
    print(f"wrote {path}; edit it, then run: tco check {path} && tco run {path}")
    return EXIT_OK


def _init_xlsx(path: Path, force: bool) -> int:
    import tomllib

    from tco.scenario import parse_scenario
    from tco.scenario.xlsx import write_starter_workbook
    from tco.starter import STARTER

    if path.suffix.lower() != ".xlsx":
        raise InputError("the starter workbook must be named .xlsx", file=path)
    if path.exists() and not force:
        raise InputError("already exists; use --force to overwrite", file=path)
    raw = tomllib.loads(STARTER)
    try:
        write_starter_workbook(path, parse_scenario(raw), raw)
    except OSError as exc:
        raise InputError(f"cannot write: {exc.strerror}", file=path) from None
    print(f"wrote {path}; edit it, then run: tco check {path} && tco run {path}")
    return EXIT_OK


class Terminated(KeyboardInterrupt):
    """SIGTERM, raised like Ctrl-C so that every ``finally`` (staging folders) runs."""


def _on_sigterm(signum, frame):
    raise Terminated()


def _interrupted_line(what: str) -> str:
    """The one line for Ctrl-C or SIGTERM: which output folders were put in place in full
    before it (the moves are never interrupted halfway), and that the rest were left as
    they were."""
    from tco.report.atomic import COMMITTED
    from tco.text import one_line

    if not COMMITTED:
        return f"tco: {what}; previous outputs left as they were"
    shown = ", ".join(str(p) for p in COMMITTED[-3:])
    more = len(COMMITTED) - 3
    done = f"{shown} and {more} more" if more > 0 else shown
    return one_line(f"tco: {what} after writing {done} in full; other outputs left as "
                    "they were")


def main(argv: list[str] | None = None) -> int:
    parser = _parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return EXIT_INPUT
    handler = {"run": _cmd_run, "check": _cmd_check, "init": _cmd_init,
               "fleet": _cmd_fleet, "batch": _cmd_batch,
               "telematics": _cmd_telematics}[args.command]
    from tco.report import atomic

    atomic.COMMITTED.clear()
    try:
        previous = signal.signal(signal.SIGTERM, _on_sigterm)
    except ValueError:  # not the main thread (main() called from a thread): leave it
        previous = None
    try:
        if getattr(args, "allow_folder", None):
            from tco.scenario.files import allow_folders

            allow_folders(args.allow_folder)
        return handler(args)
    except InputError as exc:
        print(f"tco: error: {exc.line()}", file=sys.stderr)
        return EXIT_INPUT
    except RecursionError:  # a structure nested deeper than any reader handles
        print("tco: error: input nested too deeply (tables, arrays or XML elements)",
              file=sys.stderr)
        return EXIT_INPUT
    except Terminated:
        print(_interrupted_line("terminated"), file=sys.stderr)
        return 143
    except KeyboardInterrupt:
        print(_interrupted_line("interrupted"), file=sys.stderr)
        return 130
    except Exception as exc:  # noqa: BLE001 - the one place internal errors are reported
        if os.environ.get("TCO_DEBUG"):
            raise
        from tco.text import one_line

        print(one_line(f"tco: internal error: {type(exc).__name__}: {exc} "
                       "(set TCO_DEBUG=1 for a traceback)"), file=sys.stderr)
        return EXIT_INTERNAL
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
        from tco.scenario.files import allow_folders

        allow_folders([])


if __name__ == "__main__":
    sys.exit(main())
