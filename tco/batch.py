"""Batch mode: one full report per scenario file in a folder, and an index across them.

A broker comparing trucks for many client carriers keeps one scenario file per client in
a folder. :func:`run_batch` evaluates every ``*.toml`` directly in that folder, writes
each one's outputs exactly as ``tco run`` does (``summary.json``, ``report.pdf``,
``report.html``, ``workbook.xlsx`` in ``OUT/<batch>/<slug>/``, built in a staging folder
and moved into place), then the index across them (``index.json``, ``index.xlsx``,
``index.pdf``, ``index.html`` in ``OUT/<batch>/``; see :mod:`tco.report.batch_index`).

Scenarios run in parallel worker processes, one scenario per task. A bad scenario —
unreadable or invalid TOML, a bad field, a missing or malformed trace file, a slug
another file of the batch already uses — is recorded with its one-line error
(:meth:`tco.errors.InputError.line`) and skipped; an internal error in one scenario, even
a worker process that dies, is recorded the same way. The others always finish, and the
index is written after all of them, listing the skipped ones.

Exit codes (for the command line): 0 when every scenario succeeded
(:attr:`BatchOutcome.all_ok`), 2 when any was skipped — after the others finished and the
index was written. A problem with the batch as a whole (folder missing or empty, output
folder not writable, ``jobs`` below 1) raises :class:`~tco.errors.InputError` before any
scenario runs.

Processes
---------
Workers start with the ``forkserver`` method where the platform has it (else
``spawn``): a fresh server process imports the model once and forks the workers from it.
Forking the caller directly would copy whatever threads it runs (a progress display, the
numerical libraries' thread pools), which is unsafe. Each worker sets
``tco.report.context.CHART_WORKERS = 1`` so that its report's charts are drawn in the
worker itself: the workers already keep every core busy, and a chart pool inside each
would only oversubscribe them.
"""
from __future__ import annotations

import json
import multiprocessing as mp
import os
import shutil
import time
import warnings
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field
from pathlib import Path

from tco.errors import InputError

__all__ = ["BatchOutcome", "ScenarioOutcome", "run_batch", "scenario_files", "batch_name",
           "demo_batch_dir", "INDEX_FILES"]

#: Files the index writes into ``OUT/<batch>/``; no scenario's slug may take these names.
INDEX_FILES = ("index.json", "index.xlsx", "index.pdf", "index.html")

#: Process start method for the workers; ``None`` picks forkserver, else spawn (tests
#: set "fork" to reach a patched worker function).
_START_METHOD: str | None = None

#: Modules the fork server imports once, so each worker starts warm.
_PRELOAD = ["tco.pipeline", "tco.energy", "tco.cashflow", "tco.emissions", "tco.uncertainty",
            "tco.report", "tco.report.deliverables", "tco.report.context",
            "tco.report.workbook", "tco.report.pdf", "tco.batch"]


@dataclass
class ScenarioOutcome:
    """What became of one scenario file of a batch.

    Attributes
    ----------
    file : str
        The scenario file's name in the batch folder.
    status : str
        ``"ok"`` or ``"error"``.
    slug : str or None
        Output folder name under the batch folder (``None`` when the file could not be
        read far enough to know it).
    study : str or None
        The study name (``study.name``) when the file could be validated.
    error : str or None
        The one-line error of a skipped scenario.
    summary : dict or None
        The scenario's ``summary.json`` content as written (status ``"ok"`` only).
    outputs : list of str
        Files written, relative to the batch output folder (``"acme/report.pdf"``).
    seconds : float
        Time spent on the scenario in its worker. [s]
    """

    file: str
    status: str
    slug: str | None = None
    study: str | None = None
    error: str | None = None
    summary: dict | None = None
    outputs: list[str] = field(default_factory=list)
    seconds: float = 0.0

    def __post_init__(self):
        # A file name is user text too: no control characters in the index or terminal.
        from tco.text import clean_text, one_line

        if self.file:
            self.file = clean_text(self.file)
        if self.error:
            self.error = one_line(self.error)

    @property
    def ok(self) -> bool:
        return self.status == "ok"


@dataclass
class BatchOutcome:
    """The result of :func:`run_batch`.

    Attributes
    ----------
    name : str
        Batch name (the folder's name, made safe as a folder name).
    folder : Path
        The folder the scenario files were read from.
    out_dir : Path
        ``out_root/<name>``: per-scenario folders and the index files.
    scenarios : list of ScenarioOutcome
        One per scenario file, in file-name order (whatever order they finished in).
    index : list of Path
        The index files written.
    jobs : int
        Worker processes used (1: all in the calling process). [-]
    seconds : float
        Wall time of the whole batch. [s]
    """

    name: str
    folder: Path
    out_dir: Path
    scenarios: list[ScenarioOutcome]
    index: list[Path]
    jobs: int
    seconds: float

    @property
    def ok(self) -> list[ScenarioOutcome]:
        return [s for s in self.scenarios if s.ok]

    @property
    def errors(self) -> list[ScenarioOutcome]:
        return [s for s in self.scenarios if not s.ok]

    @property
    def all_ok(self) -> bool:
        """Every scenario succeeded (the command line exits 0; otherwise 2)."""
        return not self.errors


def demo_batch_dir() -> Path:
    """The bundled demo batch folder (three invented client scenarios)."""
    from tco.resources import inputs_dir

    return inputs_dir() / "batch"


def batch_name(folder: Path) -> str:
    """The batch's name: the folder's name with anything unsafe in a file name as '-'."""
    stem = Path(folder).resolve().name
    name = "".join(c if c.isalnum() or c in "._-" else "-" for c in stem).lstrip(".-")
    return name or "batch"


def scenario_files(folder: Path) -> list[Path]:
    """The scenario files of a batch: ``*.toml`` directly in ``folder``, sorted by name.

    Raises
    ------
    InputError
        The folder does not exist, is not a folder or holds no ``*.toml`` file.
    """
    folder = Path(folder)
    if not folder.exists():
        raise InputError("folder not found", file=folder)
    if not folder.is_dir():
        raise InputError("is not a folder (batch mode reads a folder of scenario files)",
                         file=folder)
    files = sorted((p for p in folder.glob("*.toml") if p.is_file()), key=lambda p: p.name)
    if not files:
        raise InputError("no scenario files (*.toml) in the folder", file=folder)
    return files


def _one_line(text: str) -> str:
    from tco.text import one_line

    return one_line(" ".join(str(text).splitlines()))


def _internal(path: Path, exc: BaseException | str) -> str:
    what = exc if isinstance(exc, str) else f"{type(exc).__name__}: {exc}"
    return _one_line(f"{path}: internal error: {what}")


def _load_all(files: list[Path]):
    """Validate every file in order; the second user of a slug is an error.

    Returns
    -------
    tasks : list of (Path, LoadedScenario)
        The scenarios to run.
    skipped : dict of str to ScenarioOutcome
        File name → the error outcome.
    """
    from tco.scenario import load_scenario

    tasks, skipped, owner = [], {}, {}
    reserved = {n.casefold() for n in INDEX_FILES}
    for path in files:
        try:
            loaded = load_scenario(path)
        except InputError as exc:
            skipped[path.name] = ScenarioOutcome(path.name, "error", error=_one_line(exc.line()))
            continue
        except OSError as exc:
            skipped[path.name] = ScenarioOutcome(
                path.name, "error", error=InputError(f"cannot read: {exc.strerror}",
                                                     file=path).line())
            continue
        except Exception as exc:  # noqa: BLE001 - one scenario's fault, reported, not fatal
            skipped[path.name] = ScenarioOutcome(path.name, "error", error=_internal(path, exc))
            continue
        slug, study = loaded.slug, loaded.scenario.study.name
        # Compared without case: on a case-insensitive file system they are one folder.
        key = slug.casefold()
        problem = None
        if key in owner:
            problem = f"slug '{slug}' also used by file {owner[key]}"
        elif key in reserved:
            problem = f"slug '{slug}' is the name of a batch index file; choose another"
        if problem:
            skipped[path.name] = ScenarioOutcome(
                path.name, "error", slug=slug, study=study,
                error=InputError(problem, file=path, where="study.slug").line())
            continue
        owner[key] = path.name
        tasks.append((path, loaded))
    return tasks, skipped


def _evaluate_and_write(loaded, batch_dir: Path, json_only: bool) -> tuple[list[str], dict]:
    """Evaluate one scenario and write its outputs as ``tco run`` does.

    Returns the files written (relative to ``batch_dir``) and the summary.json content
    read back from the file, so the index shows exactly what the file says.
    """
    from tco.pipeline import evaluate
    from tco.report import write_outputs

    result = evaluate(loaded)
    written = write_outputs(result, batch_dir, json_only=json_only)
    summary = json.loads((batch_dir / loaded.slug / "summary.json").read_text(encoding="utf-8"))
    return [p.relative_to(batch_dir).as_posix() for p in written], summary


def _run_one(path: Path, loaded, batch_dir: Path, json_only: bool) -> ScenarioOutcome:
    """One scenario, with every error it can raise turned into a recorded outcome."""
    t0 = time.perf_counter()
    base = dict(file=path.name, slug=loaded.slug, study=loaded.scenario.study.name)
    try:
        outputs, summary = _evaluate_and_write(loaded, batch_dir, json_only)
    except InputError as exc:
        return ScenarioOutcome(status="error", error=_one_line(exc.located(file=path).line()),
                               seconds=time.perf_counter() - t0, **base)
    except Exception as exc:  # noqa: BLE001 - one scenario's fault, reported, not fatal
        return ScenarioOutcome(status="error", error=_internal(path, exc),
                               seconds=time.perf_counter() - t0, **base)
    return ScenarioOutcome(status="ok", summary=summary, outputs=outputs,
                           seconds=time.perf_counter() - t0, **base)


def _worker_init(started=None, allowed=()) -> None:
    """Set up a worker process: charts drawn in the worker, no pool inside the pool.

    ``started`` (a shared counter) counts the workers that came up, so the caller can
    tell a pool that never started from a scenario that killed its worker. ``allowed``:
    the folders allowed with ``--allow-folder`` (a worker does not inherit them).
    """
    from tco.report import context
    from tco.scenario.files import allow_folders

    allow_folders(allowed)

    context.CHART_WORKERS = 1
    if started is not None:
        with started.get_lock():
            started.value += 1


def _mp_context():
    methods = mp.get_all_start_methods()
    method = _START_METHOD or ("forkserver" if "forkserver" in methods else "spawn")
    ctx = mp.get_context(method)
    if method == "forkserver":
        ctx.set_forkserver_preload(_PRELOAD)
    return ctx


def _remove_stale_staging(batch_dir: Path, slug: str, since: float) -> None:
    """Remove staging folders a killed worker left for ``slug`` during this batch.

    ``tco.report.atomic.staged_output`` removes its staging folder on any error, but a
    process killed outright cannot; only folders of this run (modified since it began)
    are removed, never anything else.
    """
    for stage in batch_dir.glob(f".{slug}.*.part"):
        try:
            if stage.is_dir() and stage.stat().st_mtime >= since:
                shutil.rmtree(stage, ignore_errors=True)
        except OSError:
            pass


def _pool_pass(tasks, workers, batch_dir, json_only, done):
    """Run ``tasks`` on a pool; return the tasks lost to a dead worker process and the
    number of workers that started."""
    lost = []
    ctx = _mp_context()
    started = ctx.Value("i", 0)
    from tco.scenario.files import allowed_folders

    pool = ProcessPoolExecutor(workers, mp_context=ctx, initializer=_worker_init,
                               initargs=(started, tuple(allowed_folders())))
    try:
        futures = {pool.submit(_run_one, path, loaded, batch_dir, json_only): (path, loaded)
                   for path, loaded in tasks}
        for fut in as_completed(futures):
            path, loaded = futures[fut]
            try:
                outcome = fut.result()
            except BrokenProcessPool:
                lost.append((path, loaded))
                continue
            except Exception as exc:  # noqa: BLE001 - e.g. a result that cannot be sent back
                outcome = ScenarioOutcome(path.name, "error", slug=loaded.slug,
                                          study=loaded.scenario.study.name,
                                          error=_internal(path, exc))
            done(outcome)
    except BaseException:
        pool.shutdown(wait=False, cancel_futures=True)
        raise
    pool.shutdown(wait=True)
    return lost, started.value


#: Why a batch ran in one process although more workers were asked for.
NO_WORKERS = (
    "tco batch: the worker processes could not start, so the scenarios ran one after the "
    "other in this process. A script that calls run_batch with jobs > 1 must do so under "
    "`if __name__ == \"__main__\":` (each worker imports the script's main module).")


def _run_parallel(tasks, workers, batch_dir, json_only, done, since) -> int:
    """Run the tasks on ``workers`` processes; return the number of processes used."""
    lost, started = _pool_pass(tasks, workers, batch_dir, json_only, done)
    if lost and not started:
        # No worker came up at all (e.g. a calling script without the main guard): not
        # the scenarios' fault, so they run here instead.
        warnings.warn(NO_WORKERS, RuntimeWarning, stacklevel=3)
        for path, loaded in lost:
            done(_run_one(path, loaded, batch_dir, json_only))
        return 1
    # A worker that died (killed, out of memory, a crash in native code) breaks the whole
    # pool: every scenario in flight is lost with it. Each of those runs again alone, so
    # only the one that kills its process is reported.
    for path, loaded in lost:
        _remove_stale_staging(batch_dir, loaded.slug, since)
        if _pool_pass([(path, loaded)], 1, batch_dir, json_only, done)[0]:
            _remove_stale_staging(batch_dir, loaded.slug, since)
            done(ScenarioOutcome(path.name, "error", slug=loaded.slug,
                                 study=loaded.scenario.study.name,
                                 error=_internal(path, "the worker process running this "
                                                 "scenario ended unexpectedly")))
    return workers


def run_batch(folder, out_root, jobs: int | None = None, json_only: bool = False,
              progress=None, on_done=None) -> BatchOutcome:
    """Run every scenario in a folder and write each one's outputs and the batch index.

    Parameters
    ----------
    folder : str or Path
        Folder of scenario files; every ``*.toml`` directly in it is one scenario,
        taken in file-name order.
    out_root : str or Path
        Output root: each scenario goes to ``out_root/<batch>/<slug>/``, the index to
        ``out_root/<batch>/``, where ``<batch>`` is the folder's name.
    jobs : int, optional
        Worker processes; default ``os.cpu_count()``. 1 runs every scenario in the
        calling process. Never more than there are scenarios to run. [-]
    json_only : bool
        Write ``summary.json`` only for each scenario, and ``index.json`` only for the
        index (no PDF, HTML or workbooks).
    progress : tco.progress.Steps, optional
    on_done : callable, optional
        Called with each :class:`ScenarioOutcome` as soon as it finishes (the command
        line prints one line per client from it).
        Progress display: a bar advancing by one per scenario, then a step for the
        index. Silent by default.

    Returns
    -------
    BatchOutcome
        Every scenario's outcome and the index files. ``outcome.all_ok`` is False when any
        scenario was skipped: the command line then exits 2 (after everything else
        finished and the index was written), and 0 otherwise.

    Raises
    ------
    InputError
        The folder is missing, not a folder or has no scenario file; the output folder
        cannot be written; ``jobs`` is below 1. Nothing is run then.

    Notes
    -----
    Workers import the calling program's main module, as with any ``forkserver`` or
    ``spawn`` process pool: a script calling this with ``jobs`` > 1 must do so under
    ``if __name__ == "__main__":``. (``tco`` and ``python -m tco`` are fine.) If no worker
    can start, the scenarios run in the calling process after a ``RuntimeWarning``.

    Examples
    --------
    >>> from tco.batch import demo_batch_dir, run_batch
    >>> outcome = run_batch(demo_batch_dir(), "/tmp/out")   # doctest: +SKIP
    >>> [(s.file, s.status) for s in outcome.scenarios]     # doctest: +SKIP
    """
    from tco.progress import Silent
    from tco.report.atomic import check_writable, staged_output
    from tco.report.batch_index import write_index

    t_start = time.time()
    t0 = time.perf_counter()
    if jobs is None:
        jobs = os.cpu_count() or 1
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1:
        raise InputError("must be a whole number, 1 or more", where="--jobs")
    folder = Path(folder)
    files = scenario_files(folder)
    from tco import budget

    budget.check_batch_size(len(files), file=folder)
    name = batch_name(folder)
    batch_dir = Path(out_root) / name
    check_writable(batch_dir)
    steps = progress or Silent()

    advance = steps.bar(len(files), f"0 of {len(files)} scenarios done")
    results: dict[str, ScenarioOutcome] = {}

    def done(outcome: ScenarioOutcome) -> None:
        results[outcome.file] = outcome
        advance(1)
        steps.describe(f"{len(results)} of {len(files)} scenarios done")
        if on_done is not None:
            on_done(outcome)

    tasks, skipped = _load_all(files)
    for outcome in skipped.values():
        done(outcome)
    # as many workers as the largest scenarios fit in the memory budget (tco.budget)
    workers = min(jobs, len(tasks),
                  budget.workers_for([budget.scenario_bytes(ld.scenario) for _, ld in tasks],
                                     jobs))
    try:
        batch_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"output folder cannot be written ({exc.strerror})", file=batch_dir,
                         where="--out") from None
    if workers > 1:
        workers = _run_parallel(tasks, workers, batch_dir, json_only, done, t_start)
    else:
        for path, loaded in tasks:
            done(_run_one(path, loaded, batch_dir, json_only))

    outcome = BatchOutcome(name=name, folder=folder, out_dir=batch_dir,
                           scenarios=[results[p.name] for p in files], index=[],
                           jobs=max(workers, 1), seconds=0.0)
    steps.start("writing the batch index")
    with staged_output(batch_dir) as stage:
        names = write_index(outcome, stage, json_only=json_only)
    outcome.index = [batch_dir / n for n in names]
    outcome.seconds = time.perf_counter() - t0
    return outcome
