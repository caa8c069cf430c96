"""Resource budgets: how big a run would be, worked out from the inputs before building it.

A scenario can ask for more than any machine has: a trip of a billion stops, a time step
of a tenth of a millisecond, a dwell of a billion minutes, a trace whose clock jumps by
years, a billion Monte Carlo draws. Each would end in ``MemoryError`` after minutes. The
checks here estimate the samples, draws and bytes from the inputs alone and refuse, with
one line, a run that would exceed a documented limit:

* :data:`MAX_TRIP_SAMPLES` samples in one trip (all legs, dwells included) at the time
  step; a sample costs about :data:`BYTES_PER_SAMPLE` bytes over a whole run;
* :data:`MAX_DRAWS` Monte Carlo draws, from the scenario or ``--draws``; a draw costs about
  :data:`BYTES_PER_DRAW` bytes;
* :data:`MAX_RUN_BYTES` for a whole command: a fleet (:data:`MAX_FLEET_ROWS` vehicles, each
  keeping :data:`BYTES_PER_FLEET_ROW`, plus the trips its workers build at once:
  :func:`fleet_problem`), a batch (:data:`MAX_BATCH_SCENARIOS` files; its workers are as
  many as fit, :func:`workers_for` over :func:`scenario_bytes`), a telematics partition
  (:data:`MAX_PARTITION_ROWS` rows, read from the Parquet metadata before the data).

The estimates are deliberately simple (time on a segment = its length over its speed,
plus the time to brake to and start from each stop, plus the dwells); they only need to
tell a day from a year.
"""
from __future__ import annotations

import math
from typing import Iterable

from tco.report import formatting as fm
from tco.errors import InputError

__all__ = ["BYTES_PER_DRAW", "BYTES_PER_FLEET_ROW", "BYTES_PER_SAMPLE",
           "BYTES_PER_TELEMATICS_ROW", "BYTES_PER_WORKER", "MAX_BATCH_SCENARIOS", "MAX_DRAWS",
           "MAX_FLEET_ROWS", "MAX_PARTITION_ROWS", "MAX_RUN_BYTES", "MAX_TRIP_SAMPLES",
           "check_batch_size", "check_draws", "check_samples", "check_trip", "draws_problem",
           "fleet_problem", "fleet_workers", "least_samples_problem", "partition_problem",
           "scenario_bytes", "segments_duration", "trip_samples", "workers_for"]

#: Most samples in one trip. At a 1 s step that is about 35 days of driving and standing;
#: at 0.1 s about 3.5 days. [-]
MAX_TRIP_SAMPLES = 3_000_000
#: Memory one trace sample costs over a whole run (trace columns, per-truck energy arrays,
#: joined legs, charts), measured on the demo at 1 s and 0.05 s steps (about 500 bytes),
#: rounded up. [bytes]
BYTES_PER_SAMPLE = 600
#: Most Monte Carlo draws (the scenario's ``uncertainty.draws`` and ``--draws`` alike). At
#: 10,000 draws a probability near 10 % has a standard error of 0.3 percentage points; a
#: million draws cuts that to 0.03. [-]
MAX_DRAWS = 1_000_000
#: Memory one Monte Carlo draw keeps over a run (inputs, yearly totals per truck,
#: metrics): the demo's peak memory grew by about 340 bytes per draw from 1,000 to
#: 1,000,000 draws; rounded up. [bytes]
BYTES_PER_DRAW = 400
#: The longest simulation time step accepted (``route.time_step``). [s]
LONGEST_TIME_STEP = 10.0
#: Most stops in one stretch: a stop takes at least two samples (standing, and moving
#: again), so more than half the trip budget can never fit. [-]
MAX_STOPS = MAX_TRIP_SAMPLES // 2
#: Longest standing time of one leg or stop: the whole trip budget at the longest time
#: step (about 347 days). [s]
MAX_DWELL = MAX_TRIP_SAMPLES * LONGEST_TIME_STEP


#: The memory one command (a fleet, a batch, a telematics partition) plans for at most:
#: what a laptop or a small cloud machine can give it. [bytes]
MAX_RUN_BYTES = 8 * 2**30
#: Memory a worker process takes before its work: the measured peak of a run refused at
#: its input (imports only) was about 180 MB; rounded up. [bytes]
BYTES_PER_WORKER = 200 * 2**20
#: Most vehicles in one fleet file. [-]
MAX_FLEET_ROWS = 10_000
#: Memory one fleet row keeps until the end of a fleet run (its energy and money results,
#: its rows of the tables): the demo fleet's result pickles to about 40 KB per row; five
#: times that for the Python objects and the report. [bytes]
BYTES_PER_FLEET_ROW = 200_000
#: Most scenario files in one batch folder (each is read before the batch starts). [-]
MAX_BATCH_SCENARIOS = 10_000
#: Memory one row of a telematics partition takes while the partition is processed (the
#: columns as read, the validated arrays, the sort order, a vehicle-day's work arrays):
#: about ten 8-byte columns twice, rounded up. [bytes]
BYTES_PER_TELEMATICS_ROW = 200
#: Most rows in one telematics partition file: :data:`MAX_RUN_BYTES` over
#: :data:`BYTES_PER_TELEMATICS_ROW`, about 43 million (some 500 vehicle-days at 1 Hz). [-]
MAX_PARTITION_ROWS = MAX_RUN_BYTES // BYTES_PER_TELEMATICS_ROW


def check_samples(n: float, dt: float, what: str = "this trip",
                  where: str | None = None, file=None) -> None:
    """Refuse a trace of ``n`` samples at step ``dt`` [s] above :data:`MAX_TRIP_SAMPLES`.

    Raises
    ------
    InputError
        ``this trip would need 4,320,000,000 samples at 0.0001 s, about 2.4 TiB; the limit
        is 3,000,000 samples (about 1.7 GiB): use a longer time_step or a shorter trip``.
    """
    if not math.isfinite(n) or n > MAX_TRIP_SAMPLES:
        need = fm.data_size(n * BYTES_PER_SAMPLE) if math.isfinite(n) else "no end"
        raise InputError(
            f"{what} would need {fm.count(n)} samples at {fm.plain(dt)} s, about {need}; the limit "
            f"is {fm.count(MAX_TRIP_SAMPLES)} samples (about "
            f"{fm.data_size(MAX_TRIP_SAMPLES * BYTES_PER_SAMPLE)}): use a longer time_step or a "
            "shorter trip", file=file, where=where)


def least_samples_problem(n: float, what: str) -> str | None:
    """Why ``n`` samples, the fewest an input needs at any time step, are too many, or None.

    For a single field (a number of stops, a dwell) before the trip is put together:
    ``1,000,000,000 stops would need at least 2,000,000,000 samples, about 1.1 TiB; the limit is
    3,000,000 samples (about 1.7 GiB)``.
    """
    if math.isfinite(n) and n <= MAX_TRIP_SAMPLES:
        return None
    need = fm.data_size(n * BYTES_PER_SAMPLE) if math.isfinite(n) else "no end"
    return (f"{what} would need at least {fm.count(n)} samples, about {need}; the limit is "
            f"{fm.count(MAX_TRIP_SAMPLES)} samples (about "
            f"{fm.data_size(MAX_TRIP_SAMPLES * BYTES_PER_SAMPLE)})")


def segments_duration(segments: Iterable, max_accel: float, max_decel: float) -> float:
    """An estimate of the time to drive synthetic segments [s].

    Each segment takes ``length / speed`` plus, for each of its stops and its end, the time
    lost braking to a stand and starting again, ``v / (2 a) + v / (2 b)``, plus the dwell at
    each stop.

    Parameters
    ----------
    segments : iterable
        Objects or mappings with ``length`` [m], ``speed`` [m/s], ``stops`` [-], ``dwell``
        [s].
    max_accel, max_decel : float
        Acceleration and braking limits [m/s²].
    """
    total = 0.0
    for seg in segments:
        get = seg.get if isinstance(seg, dict) else (lambda k, d=0.0: getattr(seg, k, d))
        length, speed = float(get("length", 0.0)), float(get("speed", 0.0))
        stops, dwell = float(get("stops", 0) or 0), float(get("dwell", 0.0) or 0.0)
        if speed <= 0:
            continue
        total += length / speed + (stops + 1) * (speed / (2 * max_accel)
                                                  + speed / (2 * max_decel)) + stops * dwell
    return total


def trip_samples(scenario) -> tuple[float, list[float]]:
    """Samples of the synthetic legs and end dwells of a scenario's trip, before building.

    Legs read from files are counted when they are read (:func:`check_samples` in the
    trace readers); here they count only their end dwell.

    Returns
    -------
    (float, list of float)
        The total, and the samples of each leg.
    """
    route = scenario.route
    dt = route.time_step
    per_leg = []
    for leg in route.legs:
        t = segments_duration(leg.segments, route.max_accel, route.max_decel) \
            if leg.segments else 0.0
        per_leg.append((t + leg.dwell_end) / dt)
    return float(sum(per_leg)), per_leg


def check_trip(scenario, file=None) -> None:
    """Refuse, before anything is built, a trip whose synthetic legs exceed the budget."""
    total, per_leg = trip_samples(scenario)
    dt = scenario.route.time_step
    for i, n in enumerate(per_leg):
        if not math.isfinite(n) or n > MAX_TRIP_SAMPLES:
            check_samples(n, dt, what="this leg", where=f"route.legs[{i}]", file=file)
    check_samples(total, dt, file=file, where="route")


def draws_problem(draws: int) -> str | None:
    """Why a number of Monte Carlo draws cannot be run, or None."""
    if draws < 0:
        return "must be zero or more"
    if draws > MAX_DRAWS:
        return (f"{fm.count(draws)} draws would need about "
                f"{fm.data_size(draws * BYTES_PER_DRAW)}; the limit is {fm.count(MAX_DRAWS)} "
                "draws (about "
                f"{fm.data_size(MAX_DRAWS * BYTES_PER_DRAW)})")
    return None


def check_draws(draws: int, where: str = "uncertainty.draws", file=None) -> int:
    """Refuse more Monte Carlo draws than :data:`MAX_DRAWS`; returns ``draws``."""
    problem = draws_problem(draws)
    if problem:
        raise InputError(problem, file=file, where=where)
    return draws


# --------------------------------------------------------------------------- whole runs
def scenario_bytes(scenario) -> float:
    """An estimate of the memory one scenario's run takes: a worker, its trip at the time
    step (synthetic legs and dwells; legs from files are held to the trip budget when they
    are read, so they count at most that), and its Monte Carlo draws. [bytes]"""
    total, _ = trip_samples(scenario)
    if any(leg.file for leg in scenario.route.legs):
        total = MAX_TRIP_SAMPLES  # unknown until read; the budget is the most it may take
    draws = scenario.uncertainty.draws if getattr(scenario.uncertainty, "enabled", False) \
        else 0
    return (BYTES_PER_WORKER + min(total, MAX_TRIP_SAMPLES) * BYTES_PER_SAMPLE
            + min(draws, MAX_DRAWS) * BYTES_PER_DRAW)


def workers_for(estimates: list[float], jobs: int) -> int:
    """How many of ``jobs`` workers may run at once so that the largest estimates running
    together stay within :data:`MAX_RUN_BYTES` (at least one)."""
    largest = sorted(estimates, reverse=True)
    k, used = 0, 0.0
    while k < min(jobs, len(largest)) and used + largest[k] <= MAX_RUN_BYTES:
        used += largest[k]
        k += 1
    return max(1, k)


def check_batch_size(n_files: int, file=None) -> None:
    """Refuse a batch folder with more than :data:`MAX_BATCH_SCENARIOS` scenario files."""
    if n_files > MAX_BATCH_SCENARIOS:
        raise InputError(
            f"{fm.count(n_files)} scenario files would be read before the batch starts; the limit "
            f"is {fm.count(MAX_BATCH_SCENARIOS)} scenarios: split the folder", file=file)


def fleet_problem(n_rows: int, trip_samples_each: float) -> str | None:
    """Why a fleet of ``n_rows`` vehicles, each trip up to ``trip_samples_each`` samples,
    cannot fit :data:`MAX_RUN_BYTES` even on one worker, or None."""
    kept = n_rows * BYTES_PER_FLEET_ROW
    one = BYTES_PER_WORKER + trip_samples_each * BYTES_PER_SAMPLE
    if n_rows > MAX_FLEET_ROWS:
        return (f"{fm.count(n_rows)} vehicles would keep about {fm.data_size(kept)} of "
                f"results; the limit is {fm.count(MAX_FLEET_ROWS)} vehicles (about "
                f"{fm.data_size(MAX_FLEET_ROWS * BYTES_PER_FLEET_ROW)}): split the fleet file")
    if kept + one > MAX_RUN_BYTES:
        return (f"this fleet would need about {fm.data_size(kept + one)} "
                f"({fm.count(n_rows)} vehicles and a trip of up to "
                f"{fm.count(trip_samples_each)} samples); the limit is "
                f"{fm.data_size(MAX_RUN_BYTES)}: split the fleet file or use shorter cycles")
    return None


def fleet_workers(n_rows: int, jobs: int, trip_samples_each: float) -> int:
    """How many of ``jobs`` workers may build trips of ``trip_samples_each`` samples at
    once beside the results of ``n_rows`` vehicles within :data:`MAX_RUN_BYTES` (at least
    one; :func:`fleet_problem` refuses a fleet that does not fit one)."""
    room = MAX_RUN_BYTES - n_rows * BYTES_PER_FLEET_ROW
    one = BYTES_PER_WORKER + trip_samples_each * BYTES_PER_SAMPLE
    return max(1, min(jobs, int(room // one)))


def partition_problem(n_rows: int) -> str | None:
    """Why a telematics partition of ``n_rows`` rows is too big to read, or None."""
    if n_rows > MAX_PARTITION_ROWS:
        return (f"this partition has {fm.count(n_rows)} rows and would need about "
                f"{fm.data_size(n_rows * BYTES_PER_TELEMATICS_ROW)}; the limit is "
                f"{fm.count(MAX_PARTITION_ROWS)} rows (about {fm.data_size(MAX_RUN_BYTES)}): "
                "write the data in smaller files (one per vehicle or per month)")
    return None

