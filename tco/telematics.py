"""Telematics histories of a fleet: the energy of every vehicle-day for each candidate truck.

A fleet's recorded driving — hundreds of trucks, months of 1 Hz samples, more than one
machine's memory — is replayed through the project's fused energy kernel
(:func:`tco.kernel.run_trace`) once for every truck of a scenario. The answer is one row
per vehicle, day and candidate truck: diesel and exhaust fluid, battery and grid energy,
the lowest state of charge, whether the day fits the battery above its reserve, distance,
time and payload-distance.

Input
-----
A *dataset* is a folder of Parquet files (hive-style subfolders such as
``day=2030-03-04/part-000.parquet`` are fine; hidden files and files starting with ``_``
are ignored) or one Parquet file. Each file is a *partition* with these columns (others
are ignored, only these are read):

===============  ===========================================================  ==========
column           meaning                                                      unit
===============  ===========================================================  ==========
``vehicle``      vehicle id (text; may instead be a hive folder ``vehicle=``)  [-]
``timestamp``    date-time (naive values are taken as UTC), or a number of    [s]
                 seconds since 1970-01-01 00:00 UTC
``speed``        vehicle speed, ≥ 0                                           [m/s]
``elevation``    elevation above sea level — or ``grade`` instead, not both   [m]
``grade``        road grade, rise over run, within ±30 %                      [-]
``payload``      mass carried, ≥ 0                                            [kg]
===============  ===========================================================  ==========

Unit of work
------------
A *vehicle-day* is a vehicle id and the UTC calendar date of its timestamps. **Every
vehicle-day must sit whole in one partition** (partition by day, by vehicle, or by blocks
of vehicles within a day — never split a vehicle's day across files). This is checked:
a vehicle-day found in two partitions is an :class:`~tco.errors.InputError` naming both
files. Each vehicle-day is an independent operating day: the battery starts it at the
truck's ``start_soc`` (charged overnight) and a day that crosses midnight UTC is two days.

Per vehicle-day
---------------
1. Samples are sorted by time; repeated timestamps keep their first row (counted in
   ``duplicates_dropped``). The day's first departure and last arrival (clock times,
   UTC: :func:`dwell_window`) are read from these samples; ``tco fleet --telematics``
   takes them as the depot dwell window. Naive timestamps are taken as UTC, so logs
   written in the depot's local time give local clock times.
2. Gaps longer than ``gap_limit`` (default 10 min) split the day into *stints*. A gap is
   taken as the truck parked and switched off: no time, distance, idle fuel or auxiliary
   power is counted for it (its length is reported as ``gap_time_s``). Consecutive stints
   are joined by one time step, so the state of charge carries across the gap; a truck
   still moving at either edge of a gap (lost signal) shows as one interval of speed
   change there. Shorter gaps are bridged by the resampling (speed linear in time).
3. Each stint's distance is the trapezoid integral of speed, Δd = (v_i + v_{i+1})/2 · Δt
   (the interval rule of :mod:`tco.dutycycle`). An elevation column is smoothed over
   distance with the scenario's ``route.smoothing_window``
   (:func:`tco.dutycycle.smooth_elevation`, as for CSV and GPX traces); a grade column is
   used as given, integrated to an elevation z_{i+1} = z_i + g_i · Δd_i starting at the
   scenario's ``ambient.altitude``. The stint is resampled to the scenario's
   ``route.time_step`` with :func:`tco.dutycycle.resample`. A stint shorter than one time
   step is dropped (``samples_unused``). Steps 1–3 and the payload of step 4 run as one
   compiled pass per vehicle-day, :func:`tco.stints.prepare_day` (the same methods, the
   same numbers to about 1e-14; see there).
4. Legs: wherever the payload changes the kernel starts a new leg with mass
   curb mass + payload. The payload of a resampled sample is that of the latest source
   sample at or before its time. The measured payload is driven even where a candidate
   truck could not legally carry it; ``payload_fits`` tells.
5. Each scenario truck drives the day through :func:`tco.kernel.run_trace` (one thread),
   with its parameters mapped as in :func:`tco.energy.simulate`
   (:func:`tco.energy.vehicle_parameters` with the air at the day's mean elevation and
   the scenario's ambient temperature, :func:`tco.energy.diesel_parameters`,
   :func:`tco.energy.electric_parameters`).

Of the scenario only the trucks, ``ambient`` (temperature, headwind, and the altitude
under a grade column), ``route.time_step`` and ``route.smoothing_window`` are used; its
route legs, prices and finance play no part here.

Scale-out
---------
:func:`process` runs :func:`process_partition` once per file: in this process one file
after another, or as one Dask task per file on a local cluster (``local_workers``) or an
existing one (``scheduler``). A task reads only its own file, so a worker's memory is
bounded by the largest partition, not by the dataset. The same function makes the same
numbers either way (the tests hold them equal). Workers of an existing cluster must be
able to import ``tco`` and read the partition paths as the client sees them (a shared
filesystem).
"""
from __future__ import annotations

import logging
import math
import threading
import uuid
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath
from typing import Callable, NamedTuple
from urllib.parse import unquote

import numpy as np
import pandas as pd
from numba import njit

from tco import dutycycle, electric, energy, heap, kernel, operation, roadload, stints
from tco.errors import InputError
from tco.report import formatting as fm

__all__ = [
    "DAY_COLUMNS",
    "GAP_LIMIT",
    "INPUT_COLUMNS",
    "SKIPPED_COLUMNS",
    "dwell_window",
    "VEHICLE_COLUMNS",
    "PartitionResult",
    "TelematicsResult",
    "find_partitions",
    "process",
    "process_partition",
    "process_table",
    "vehicle_summary",
    "write_example_dataset",
    "write_outputs",
]

#: Longest time between two samples still bridged by resampling; longer is a gap in which
#: the truck stood parked and switched off. [s] ASSUMPTION: 10 min, longer than traffic
#: stops and loss of signal in tunnels, shorter than breaks and loading (common practice
#: for trip segmentation of vehicle logs; from memory).
GAP_LIMIT = 600.0

#: Columns a partition is read for (``elevation`` or ``grade``, not both).
INPUT_COLUMNS = ("vehicle", "timestamp", "speed", "elevation", "grade", "payload")

#: Columns of :attr:`TelematicsResult.vehicle_days`, with their dtypes (SI units in the
#: names; nullable where a figure does not apply to the truck's powertrain).
DAY_COLUMNS = {
    "vehicle": "str",                      # vehicle id
    "day": "str",                          # UTC date, YYYY-MM-DD
    "truck": "str",                        # scenario truck name
    "powertrain": "str",                   # diesel or electric
    "partition": "str",                    # source file, relative to the dataset folder
    "samples": "int64",                    # source samples used [-]
    "duplicates_dropped": "int64",         # rows with a repeated timestamp [-]
    "samples_unused": "int64",             # samples in stints shorter than a step [-]
    "gaps": "int64",                       # gaps longer than the gap limit [-]
    "gap_time_s": "float64",               # time parked in those gaps [s]
    "duration_s": "float64",               # time simulated: logged, gaps excluded [s]
    "first_departure_s": "float64",        # clock time leaving rest, UTC [s after 00:00]
    "last_arrival_s": "float64",           # clock time back at rest, UTC [s after 00:00]
    "distance_m": "float64",               # distance [m]
    "payload_max_kg": "float64",           # heaviest payload of the day [kg]
    "payload_distance_kg_m": "float64",    # payload × distance [kg·m]
    "diesel_fuel_m3": "float64",           # diesel, idle included [m³]
    "diesel_def_m3": "float64",            # diesel exhaust fluid [m³]
    "battery_energy_J": "float64",         # net battery energy, out − regenerated [J]
    "grid_energy_J": "float64",            # grid energy to put it back [J]
    "battery_need_J": "float64",           # deepest drawdown from the start [J]
    "soc_end": "float64",                  # state of charge at the end [-]
    "soc_min": "float64",                  # lowest state of charge [-]
    "battery_fits": "boolean",             # new battery stays above the reserve
    "battery_fits_end_of_life": "boolean",  # end-of-life battery stays above the reserve
    "payload_fits": "bool",                # heaviest payload within legal capacity
    "power_limited_time_s": "float64",     # time the trace asks more than rated power [s]
}

#: Columns of :attr:`TelematicsResult.vehicles` (see :func:`vehicle_summary`).
VEHICLE_COLUMNS = {
    "vehicle": "str",
    "truck": "str",
    "powertrain": "str",
    "days": "int64",                                    # vehicle-days [-]
    "distance_m": "float64",                            # [m]
    "duration_s": "float64",                            # [s]
    "payload_distance_kg_m": "float64",                 # [kg·m]
    "diesel_fuel_m3": "float64",                        # [m³]
    "diesel_def_m3": "float64",                         # [m³]
    "battery_energy_J": "float64",                      # [J]
    "grid_energy_J": "float64",                         # [J]
    "diesel_fuel_per_distance_m3_per_m": "float64",     # [m³/m]
    "battery_energy_per_distance_J_per_m": "float64",   # [J/m]
    "grid_energy_per_distance_J_per_m": "float64",      # [J/m]
    "days_battery_fits_share": "float64",               # [-]
    "days_battery_fits_end_of_life_share": "float64",   # [-]
    "days_payload_fits_share": "float64",               # [-]
    "worst_day": "str",                                 # day of the largest need
    "worst_day_diesel_fuel_m3": "float64",              # [m³]
    "worst_day_battery_need_J": "float64",              # [J]
}

#: Columns of :attr:`TelematicsResult.skipped` (vehicle-days without a usable stint).
SKIPPED_COLUMNS = {"vehicle": "str", "day": "str", "partition": "str", "samples": "int64",
                   "reason": "str"}

#: Largest work space of a partition's vehicle-days (float64 slots: 32 MiB). [-]
_WORKSPACE_SLOTS = 4 * 2**20
_NS_PER_DAY = 86_400_000_000_000
_S_PER_DAY = 86_400
_TS_UNIT_NS = {"s": 1_000_000_000, "ms": 1_000_000, "us": 1_000, "ns": 1}


# ============================================================================ results
class PartitionResult(NamedTuple):
    """What :func:`process_partition` returns for one file.

    The rows travel as plain tuples (small to send back from a Dask worker, and one
    frame built for the whole dataset instead of one per partition: 27 pandas columns
    cost about 3 ms a partition); :attr:`rows` and :attr:`skipped` build the frames.

    Attributes
    ----------
    records : list of tuple
        One tuple per vehicle-day and truck, values in the order of :data:`DAY_COLUMNS`.
    skipped_records : list of tuple
        Vehicle-days with no usable stint, in the order of :data:`SKIPPED_COLUMNS`.
    rows_read : int
        Rows in the file. [-]
    """

    records: list
    skipped_records: list
    rows_read: int

    @property
    def rows(self) -> pd.DataFrame:
        """One row per vehicle-day and truck (columns :data:`DAY_COLUMNS`). [SI]"""
        return _frame(self.records, DAY_COLUMNS)

    @property
    def skipped(self) -> pd.DataFrame:
        """Vehicle-days with no usable stint (columns :data:`SKIPPED_COLUMNS`)."""
        return _frame(self.skipped_records, SKIPPED_COLUMNS)


@dataclass(frozen=True)
class TelematicsResult:
    """Energy of a fleet's recorded vehicle-days for each candidate truck (data only).

    Attributes
    ----------
    vehicle_days : pandas.DataFrame
        One row per (vehicle, day, truck), sorted by vehicle, day and the scenario's truck
        order; columns :data:`DAY_COLUMNS`. [SI]
    vehicles : pandas.DataFrame
        :func:`vehicle_summary` of ``vehicle_days``. [SI]
    skipped : pandas.DataFrame
        Vehicle-days left out, with the reason (columns :data:`SKIPPED_COLUMNS`).
    partitions : tuple of str
        The files read, relative to the dataset folder, in processing order.
    rows_read : int
        Rows read over all partitions. [-]
    backend : str
        ``"single process"``, ``"local cluster (N workers)"`` or the scheduler address.
    settings : dict
        ``time_step`` [s], ``gap_limit`` [s], ``smoothing_window`` [m],
        ``temperature`` [K], ``scenario`` (study name), ``trucks`` (names).
    """

    vehicle_days: pd.DataFrame
    vehicles: pd.DataFrame
    skipped: pd.DataFrame
    partitions: tuple
    rows_read: int
    backend: str
    settings: dict = field(default_factory=dict)


def _empty(columns: dict) -> pd.DataFrame:
    return pd.DataFrame({k: pd.Series([], dtype=v) for k, v in columns.items()})


def _frame(records: list, columns: dict) -> pd.DataFrame:
    if not records:
        return _empty(columns)
    # column by column: each built once with its dtype (no object frame to convert)
    return pd.DataFrame({k: pd.Series(list(v), dtype=columns[k])
                         for k, v in zip(columns, zip(*records))})


# ============================================================================ reading
def find_partitions(dataset) -> tuple[Path, list[Path]]:
    """The Parquet files of a dataset, in a fixed order.

    Parameters
    ----------
    dataset : str or Path
        A folder searched recursively for ``*.parquet`` files (names or folders starting
        with ``.`` or ``_`` are skipped, as Parquet writers use them for temporary and
        metadata files), or a single Parquet file.

    Returns
    -------
    root : Path
        The folder partition names are relative to.
    files : list of Path
        The partitions, sorted by their path relative to ``root``.

    Raises
    ------
    InputError
        The path does not exist or holds no Parquet file.
    """
    path = Path(dataset)
    if path.is_file():
        return path.parent, [path]
    if not path.is_dir():
        raise InputError("dataset not found (give a folder of Parquet files)", file=path)
    files = []
    for f in path.rglob("*.parquet"):
        rel = f.relative_to(path)
        if f.is_file() and not any(p.startswith((".", "_")) for p in rel.parts):
            files.append(f)
    if not files:
        raise InputError("no Parquet files (*.parquet) in this folder", file=path)
    files.sort(key=lambda f: f.relative_to(path).as_posix())
    return path, files


def _hive_keys(relative: str) -> dict:
    """``key=value`` folder names of a partition's relative path (URL-decoded)."""
    keys = {}
    for part in PurePosixPath(relative).parts[:-1]:
        if "=" in part:
            k, v = part.split("=", 1)
            keys[unquote(k)] = unquote(v)
    return keys


def process_partition(path, scenario, root=None, gap_limit: float = GAP_LIMIT,
                      threads: bool = True) -> PartitionResult:
    """Read one Parquet partition and drive each of its vehicle-days with every truck.

    Reads only the columns of :data:`INPUT_COLUMNS` present in the file, then calls
    :func:`process_table`. Memory: the file's columns plus one vehicle-day's work arrays.

    Parameters
    ----------
    path : str or Path
        The partition file.
    scenario : tco.scenario.Scenario or tco.scenario.LoadedScenario
        Candidate trucks, ambient conditions, time step and smoothing window.
    root : str or Path, optional
        Dataset folder; the partition's name in the output is its path relative to it
        (default: the file name), and its ``vehicle=`` hive folder supplies a missing
        vehicle column.
    gap_limit : float, optional
        Longest time between samples bridged by resampling. Default 600. [s]
    threads : bool, optional
        Decode the Parquet columns on pyarrow's thread pool (default); False reads on
        this thread only (a Dask worker sharing the cores with other workers).

    Returns
    -------
    PartitionResult

    Raises
    ------
    InputError
        An unreadable file or a bad column, with ``file`` the partition and ``where`` the
        column.
    """
    path = Path(path)
    name = path.relative_to(root).as_posix() if root is not None else path.name
    return _process_columns(_read_partition(path, name, threads), scenario, name, path,
                            gap_limit)


def _read_partition(path: Path, name: str, threads: bool = True):
    """The validated columns of one partition (:func:`_read_columns`), None when empty.

    ``threads``: let pyarrow decode the columns on its thread pool (one process); a Dask
    worker, one of several on the machine's cores, reads on its own thread."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        # vehicle ids straight as a dictionary (Parquet stores text that way): no strings
        # to build and encode again, 40 % less reading time here
        pf = pq.ParquetFile(path)
        if "vehicle" in pf.schema_arrow.names:  # (naming a missing column is an error)
            pf = pq.ParquetFile(path, metadata=pf.metadata, read_dictionary=["vehicle"])
        present = [c for c in INPUT_COLUMNS if c in pf.schema_arrow.names]
        from tco.budget import partition_problem

        problem = partition_problem(pf.metadata.num_rows)  # before reading any data
        if problem:
            raise InputError(problem, file=path)
        table = pf.read(columns=present, use_threads=threads)
    except (OSError, pa.ArrowException) as exc:
        text = " ".join(str(exc).split())
        raise InputError(f"not a readable Parquet file ({text})", file=path) from None
    if table.num_rows == 0:
        return None
    return _read_columns(table, path, _hive_keys(name))  # the table is let go here


# ============================================================================ columns
def _fail(message, file, where):
    raise InputError(message, file=file, where=where)


def _chunked(table, name):
    import pyarrow as pa

    col = table.column(name)
    return col if isinstance(col, pa.ChunkedArray) else pa.chunked_array([col])


def _first_null(col) -> int:
    import pyarrow.compute as pc

    return int(pc.index(pc.is_null(col), True).as_py())


def _numeric(table, name, file, lo=-np.inf, hi=np.inf) -> tuple[np.ndarray, int]:
    """A numeric column as float64, finite (InputError otherwise), and the row of its
    first value outside [lo, hi] (−1 for none)."""
    import pyarrow as pa

    col = _chunked(table, name)
    t = col.type
    if not (pa.types.is_integer(t) or pa.types.is_floating(t) or pa.types.is_decimal(t)):
        _fail(f"must be numbers, found {t}", file, name)
    if col.null_count:
        _fail(f"blank value at row {_first_null(col)} (rows count from 0)", file, name)
    arr = col.cast(pa.float64()).to_numpy()
    bad, outside = _first_bad(arr, lo, hi)
    if bad >= 0:
        _fail(f"non-finite value {arr[bad]} at row {bad} (rows count from 0)", file, name)
    return arr, outside


@njit(cache=True, nogil=True)
def _first_bad(a, lo, hi):
    """Row of the first non-finite value, and of the first finite value outside
    [lo, hi] (−1 for none), in one pass without temporary arrays."""
    outside = -1
    for i in range(a.size):
        x = a[i]
        if not np.isfinite(x):
            return i, outside
        if outside < 0 and (x < lo or x > hi):
            outside = i
    return -1, outside


def _vehicle_codes(table, file, hive, n) -> tuple[np.ndarray, list]:
    """Integer code per row and the vehicle ids they stand for."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if "vehicle" not in table.column_names:
        if "vehicle" in hive:
            return np.zeros(n, np.int64), [hive["vehicle"]]
        _fail("missing column 'vehicle'", file, "vehicle")
    col = _chunked(table, "vehicle")
    if col.null_count:
        _fail(f"blank vehicle id at row {_first_null(col)} (rows count from 0)", file,
              "vehicle")
    t = col.type
    if (pa.types.is_dictionary(t) and (pa.types.is_string(t.value_type)
                                       or pa.types.is_large_string(t.value_type))):
        # read as a dictionary: the same codes as encoding the text (numbered in order of
        # first appearance), from the dictionary's indices
        col = col.unify_dictionaries()
        names = col.chunk(0).dictionary.to_pylist() if col.num_chunks else []
        if len(set(names)) == len(names):
            idx = np.concatenate([c.indices.to_numpy(zero_copy_only=False)
                                  for c in col.chunks]).astype(np.int64, copy=False)
            codes, first = _first_appearance(idx, len(names))
            return codes, [names[k] for k in first]
    try:
        col = col.cast(pa.string())
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        _fail(f"vehicle ids must be text, found {col.type}", file, "vehicle")
    enc = pc.dictionary_encode(col.combine_chunks())
    return enc.indices.to_numpy().astype(np.int64), enc.dictionary.to_pylist()


@njit(cache=True, nogil=True)
def _first_appearance(idx, n_values):
    """Dictionary indices renumbered in order of first appearance: (codes, the index each
    code stands for) — what ``pyarrow.compute.dictionary_encode`` gives for the text."""
    new = np.full(n_values, -1, dtype=np.int64)
    first = np.empty(n_values, dtype=np.int64)
    codes = np.empty(idx.size, dtype=np.int64)
    used = 0
    for i in range(idx.size):
        k = idx[i]
        if new[k] < 0:
            new[k] = used
            first[used] = k
            used += 1
        codes[i] = new[k]
    return codes, first[:used]


@njit(cache=True, nogil=True)
def _split_ns(raw, factor):
    """Date-times ``raw`` in units of ``factor`` ns split into the day number and the
    time within the day [s] in one pass: the integer and float operations of the numpy
    expressions ``ns // _NS_PER_DAY`` and ``(ns - day · _NS_PER_DAY) / 1e9``, so the same
    bits (the day's length a constant of the compiled code: no hardware division)."""
    n = raw.size
    day = np.empty(n, dtype=np.int64)
    t = np.empty(n)
    for i in range(n):
        x = raw[i] * factor
        d = x // _NS_PER_DAY
        day[i] = d
        t[i] = (x - d * _NS_PER_DAY) / 1e9
    return day, t


def _day_and_time(table, file) -> tuple[np.ndarray, np.ndarray]:
    """UTC day number (days since 1970-01-01) and time within the day [s] of each row."""
    import pyarrow as pa

    col = _chunked(table, "timestamp")
    t = col.type
    if col.null_count:
        _fail(f"blank timestamp at row {_first_null(col)} (rows count from 0)", file,
              "timestamp")
    if pa.types.is_timestamp(t):
        return _split_ns(col.cast(pa.int64()).to_numpy(), _TS_UNIT_NS[t.unit])
    if pa.types.is_integer(t):
        sec = col.cast(pa.int64()).to_numpy()
        day = sec // _S_PER_DAY
        return day, (sec - day * _S_PER_DAY).astype(np.float64)
    if pa.types.is_floating(t):
        sec = col.cast(pa.float64()).to_numpy()
        bad = np.flatnonzero(~np.isfinite(sec))
        if bad.size:
            _fail(f"non-finite timestamp at row {bad[0]} (rows count from 0)", file,
                  "timestamp")
        day = np.floor(sec / _S_PER_DAY)
        return day.astype(np.int64), sec - day * _S_PER_DAY
    _fail(f"must be date-times or seconds since 1970-01-01 UTC, found {t}", file,
          "timestamp")


def _read_columns(table, file, hive):
    """Validated arrays of a partition: (codes, names, day, t, speed, z_or_g, is_grade,
    payload)."""
    n = table.num_rows
    names = set(table.column_names)
    for c in ("timestamp", "speed", "payload"):
        if c not in names:
            _fail(f"missing column '{c}'", file, c)
    has_z, has_g = "elevation" in names, "grade" in names
    if has_z and has_g:
        _fail("give elevation or grade, not both", file, "grade")
    if not (has_z or has_g):
        _fail("missing column 'elevation' (or 'grade')", file, "elevation")
    codes, ids = _vehicle_codes(table, file, hive, n)
    day, t = _day_and_time(table, file)
    speed, bad = _numeric(table, "speed", file, lo=0.0)
    if bad >= 0:
        _fail(f"negative speed {fm.number(speed[bad])} m/s at row {bad} (rows count "
              "from 0)",
              file, "speed")
    payload, bad = _numeric(table, "payload", file, lo=0.0)
    if bad >= 0:
        _fail(f"negative payload {fm.number(payload[bad])} kg at row {bad} (rows count "
              "from 0)",
              file, "payload")
    if has_g:
        limit = dutycycle.MAX_GRADE + 1e-12  # |grade| > limit, as -limit ≤ g ≤ limit
        zg, bad = _numeric(table, "grade", file, lo=-limit, hi=limit)
        if bad >= 0:
            _fail(f"grade {fm.percent(zg[bad], 1)} at row {bad} is beyond "
                  f"±{fm.percent(dutycycle.MAX_GRADE, 0)} (grade is rise over run, not "
                  "percent)",
                  file, "grade")
    else:
        zg, _ = _numeric(table, "elevation", file)
    return codes, ids, day, t, speed, zg, has_g, payload


# ============================================================================ one vehicle-day
def dwell_window(t, v) -> tuple[float, float]:
    """The day's first departure and last arrival: the depot dwell window of a vehicle-day.

    First departure: the time of the last sample at rest (speed 0) before the first moving
    sample, or the first sample when the day starts moving. Last arrival: the time of the
    first sample at rest after the last moving sample, or the last sample when the day
    ends moving. A day without a moving sample has neither (NaN).

    Parameters
    ----------
    t : ndarray
        Sorted clock times of the day's samples, UTC. [s after midnight]
    v : ndarray
        Speed at each sample. [m/s]

    Returns
    -------
    first_departure, last_arrival : float
        [s after midnight, UTC]
    """
    moving = np.flatnonzero(np.asarray(v) > 0)
    if moving.size == 0:
        return math.nan, math.nan
    a, b = int(moving[0]), int(moving[-1])
    return float(t[a - 1] if a > 0 else t[a]), float(t[b + 1] if b + 1 < len(t) else t[b])


@njit(cache=True, nogil=True)
def _dwell_window_of_rows(t, v):
    """:func:`dwell_window` of a sorted vehicle-day's rows whose repeated timestamps are
    still there (each keeps its first row, as :func:`tco.stints.prepare_day`), without
    copying the kept rows."""
    nan = np.nan
    first = nan
    last = nan
    prev = -1        # the kept row before the current one
    pending = False  # a moving row seen; waiting for the kept row after it
    found = False
    for i in range(t.size):
        if i > 0 and not t[i] - t[i - 1] > 0:
            continue  # a repeated timestamp
        if pending:
            last = t[i]
            pending = False
        if v[i] > 0:
            if not found:
                first = t[prev] if prev >= 0 else t[i]
                found = True
            pending = True
            last = t[i]  # the day may end moving
        prev = i
    return first, last


class _Truck(NamedTuple):
    """A scenario truck's kernel parameters that do not depend on the day."""

    index: int
    truck: object
    is_electric: bool
    diesel: object
    electric: object
    capacity: float        # legal payload [kg]


def _trucks(scenario) -> list[_Truck]:
    out = []
    for i, truck in enumerate(scenario.trucks):
        is_e = truck.powertrain == "electric"
        b = truck.body
        allowance = b.zero_emission_allowance if is_e else 0.0
        out.append(_Truck(
            i, truck, is_e,
            energy.diesel_parameters(truck.diesel) if not is_e else energy.NO_DIESEL,
            (energy.electric_parameters(truck.electric, scenario.ambient.temperature)
             if is_e else energy.NO_ELECTRIC),
            float(operation.payload_capacity(b.curb_mass, b.gross_mass_limit, allowance))))
    return out


class _Runner:
    """A truck's kernel stream, reused from one vehicle-day to the next (a new stream per
    day cost about 50 µs of checks and allocation, and the road-load parameters another
    35 µs: 2.6 ns a sample per truck on days of 32,000 samples)."""

    def __init__(self, tk: _Truck, ambient, dt: float):
        self.tk = tk
        # the road-load parameters but the air density do not depend on the day
        # (tco.energy.vehicle_parameters at any valid elevation; the density is replaced)
        self.vehicle = energy.vehicle_parameters(tk.truck, ambient, 0.0)
        self.stream = kernel.TraceStream(dt, self.vehicle, tk.diesel, tk.electric)
        self.soc = np.empty(0)

    def drive(self, day: stints.PreparedDay, air_density: float) -> dict:
        """The truck through one vehicle-day: the figures of its output row (what
        :func:`tco.kernel.run_trace` with :func:`tco.energy.vehicle_parameters` at the
        day's mean elevation gives, bit for bit)."""
        tk = self.tk
        truck = tk.truck
        stream = self.stream
        stream.restart(self.vehicle._replace(air_density=air_density))
        starts = day.leg_starts
        masses = truck.body.curb_mass + day.payload[starts]
        n = day.speed.size
        if self.soc.size < n:
            self.soc = np.empty(n)
        stream.feed(day.speed, day.grade, masses, leg_starts=starts, soc_out=self.soc[:n])
        tot = stream.totals()
        nan = float("nan")
        row = {"diesel_fuel_m3": nan, "diesel_def_m3": nan, "battery_energy_J": nan,
               "grid_energy_J": nan, "battery_need_J": nan, "soc_end": nan, "soc_min": nan,
               "battery_fits": pd.NA, "battery_fits_end_of_life": pd.NA}
        if tk.is_electric:
            e = truck.electric
            cap = tk.electric.usable_capacity
            need = (e.start_soc - tot["electric_soc_min"]) * cap
            net = tot["electric_battery_energy_net"]
            row.update(
                battery_energy_J=net,
                grid_energy_J=float(electric.grid_energy(max(net, 0.0),
                                                         e.charging_efficiency)),
                battery_need_J=need, soc_end=tot["electric_soc_end"],
                soc_min=tot["electric_soc_min"],
                # as tco.energy: the day fits when the drawdown stays within the energy
                # above the reserve, with the new and the end-of-life battery
                battery_fits=bool(need <= electric.energy_above_reserve(
                    cap, e.start_soc, e.reserve)),
                battery_fits_end_of_life=bool(need <= electric.energy_above_reserve(
                    cap * e.eol_state_of_health, e.start_soc, e.reserve)))
            limited = tot["electric_limited_time"]
        else:
            row.update(diesel_fuel_m3=tot["diesel_fuel_volume"],
                       diesel_def_m3=tot["diesel_def_volume"])
            limited = tot["diesel_limited_time"]
        row.update(duration_s=tot["duration"], distance_m=tot["distance"],
                   power_limited_time_s=limited)
        return row


# ============================================================================ one partition
def _as_table(table):
    import pyarrow as pa

    if isinstance(table, pd.DataFrame):
        return pa.Table.from_pandas(table, preserve_index=False)
    return table


def process_table(table, scenario, source: str = "table", file=None,
                  gap_limit: float = GAP_LIMIT, hive: dict | None = None) -> PartitionResult:
    """Drive every vehicle-day of one partition's table with every truck of a scenario.

    Parameters
    ----------
    table : pyarrow.Table or pandas.DataFrame
        Columns as in the module description (``vehicle``, ``timestamp``, ``speed``
        [m/s], ``elevation`` [m] or ``grade`` [-], ``payload`` [kg]).
    scenario : tco.scenario.Scenario or tco.scenario.LoadedScenario
        Candidate trucks, ``ambient``, ``route.time_step`` and ``route.smoothing_window``.
    source : str, optional
        Partition name written into the ``partition`` column.
    file : str or Path, optional
        File named in errors (default ``source``).
    gap_limit : float, optional
        Longest time between samples bridged by resampling. Default 600. [s]
    hive : dict, optional
        Hive folder keys of the partition; ``vehicle`` stands in for a missing column.

    Returns
    -------
    PartitionResult
        Rows in the order of the vehicles' first appearance, days and trucks.

    Raises
    ------
    InputError
        A missing or bad column (``where`` names it), or a grade beyond ±30 % after
        smoothing.
    """
    file = file if file is not None else source
    table = _as_table(table)
    if table.num_rows == 0:
        return PartitionResult([], [], 0)
    columns = _read_columns(table, file, hive or {})
    return _process_columns(columns, scenario, source, file, gap_limit)


@njit(cache=True, nogil=True)
def _bounds_if_in_order(codes, day, t):
    """:func:`_day_bounds` of rows already sorted by vehicle code, day and time, in the
    same pass as the test of that order (a repeated time is in order: the stable sort
    would keep it); an empty array when they are not sorted."""
    n = codes.size
    bounds = np.empty(n + 2, dtype=np.int64)
    bounds[0] = 0
    k = 1
    for i in range(1, n):
        if codes[i] != codes[i - 1]:
            if codes[i] < codes[i - 1]:
                return bounds[:0]
            bounds[k] = i
            k += 1
            continue
        if day[i] != day[i - 1]:
            if day[i] < day[i - 1]:
                return bounds[:0]
            bounds[k] = i
            k += 1
            continue
        if not t[i] - t[i - 1] >= 0:
            return bounds[:0]
    bounds[k] = n
    return bounds[:k + 1].copy()


@njit(cache=True, nogil=True)
def _day_bounds(codes, day):
    """Start of each run of equal (vehicle code, day), and the end: [0, …, n]."""
    n = codes.size
    runs = 1
    for i in range(1, n):
        if codes[i] != codes[i - 1] or day[i] != day[i - 1]:
            runs += 1
    bounds = np.empty(runs + 1, dtype=np.int64)
    bounds[0] = 0
    k = 1
    for i in range(1, n):
        if codes[i] != codes[i - 1] or day[i] != day[i - 1]:
            bounds[k] = i
            k += 1
    bounds[runs] = n
    return bounds


_SCRATCH = threading.local()


def _workspace(slots: int) -> np.ndarray:
    """A float64 work space of at least ``slots`` slots, kept by this thread from one
    partition to the next (at most :data:`_WORKSPACE_SLOTS`, 32 MiB): memory mapped and
    page-faulted in once, not once per partition (with 1,000-odd faults per partition
    that was about 1.5 ns a sample)."""
    ws = getattr(_SCRATCH, "ws", None)
    if ws is None or ws.size < slots:
        ws = _SCRATCH.ws = np.empty(slots)
    return ws


def _process_columns(columns, scenario, source, file, gap_limit) -> PartitionResult:
    """:func:`process_table` on the validated columns of :func:`_read_columns` (which
    the caller may hold without the table, to keep memory down); None (an empty
    partition, :func:`_read_partition`) gives an empty result."""
    if columns is None:
        return PartitionResult([], [], 0)
    scenario = getattr(scenario, "scenario", scenario)
    gap_limit = float(gap_limit)
    if not gap_limit > 0:
        raise InputError(f"gap limit must be positive, got {fm.number(gap_limit)} s",
                         where="gap_limit")
    codes, ids, day, t, speed, zg, is_grade, payload = columns
    del columns
    n = t.size
    ambient = scenario.ambient
    dt = float(scenario.route.time_step)
    window = float(scenario.route.smoothing_window or 0.0)
    runners = [_Runner(tk, ambient, dt) for tk in _trucks(scenario)]

    # Vehicle, day, time; the row number last, so a repeated timestamp keeps its first row.
    # Files written in that order (the usual case) skip the sort: it would not move a row.
    bounds = _bounds_if_in_order(codes, day, t)
    if bounds.size == 0:
        order = np.lexsort((np.arange(n), t, day, codes))
        codes, day = codes[order], day[order]
        t, speed, zg, payload = t[order], speed[order], zg[order], payload[order]
        del order
        bounds = _day_bounds(codes, day)
    bounds = bounds.tolist()
    # one work space for every vehicle-day of the partition: at 1 Hz and the usual time
    # steps a day's arrays fit in 32 slots per sample; at most 32 MiB (a whole day at
    # 1 Hz), so memory stays within the partition budget (longer days and larger needs
    # get new arrays, as without a work space)
    longest = max((b - a for a, b in zip(bounds[:-1], bounds[1:])), default=0)
    workspace = _workspace(min(32 * longest + 4096, _WORKSPACE_SLOTS))
    rows, skipped = [], []
    for a, b in zip(bounds[:-1], bounds[1:]):
        vehicle = ids[codes[a]]
        date = str(np.datetime64(int(day[a]), "D"))
        try:
            d = stints.prepare_day(t[a:b], speed[a:b], zg[a:b], payload[a:b], is_grade, dt,
                                   window, gap_limit, float(ambient.altitude), workspace)
        except InputError as exc:
            where = f" ({exc.where})" if exc.where else ""
            raise InputError(f"vehicle {vehicle!r} on {date}: {exc.message}{where}",
                             file=file, where="grade" if is_grade else "elevation") from None
        dups, used = d.duplicates, d.kept
        if d.speed is None:
            skipped.append((vehicle, date, source, used,
                            "no stretch of samples lasting one time step between gaps"))
            continue
        mean_z = d.mean_elevation
        rho = None
        first, last = _dwell_window_of_rows(t[a:b], speed[a:b])
        common = {"samples": used - d.unused, "duplicates_dropped": dups,
                  "first_departure_s": first, "last_arrival_s": last,
                  "samples_unused": d.unused, "gaps": d.gaps, "gap_time_s": d.gap_time,
                  "payload_max_kg": d.payload_max,
                  # payload × interval distance, intervals as in the kernel (numpy's
                  # pairwise sum order, not BLAS: the same bits with any thread count)
                  "payload_distance_kg_m": d.payload_distance}
        for run in runners:
            tk = run.tk
            try:
                if rho is None:  # the air at the day's mean elevation, for every truck
                    rho = float(roadload.air_density(mean_z, ambient.temperature))
                fig = run.drive(d, rho)
            except ValueError as exc:  # e.g. an elevation outside the standard atmosphere
                raise InputError(f"vehicle {vehicle!r} on {date}: {exc}", file=file,
                                 where="grade" if is_grade else "elevation") from None
            row = {"vehicle": vehicle, "day": date, "truck": tk.truck.name,
                   "powertrain": tk.truck.powertrain, "partition": source, **common, **fig,
                   "payload_fits": bool(common["payload_max_kg"] <= tk.capacity)}
            rows.append(tuple(row[k] for k in DAY_COLUMNS))
    return PartitionResult(rows, skipped, n)


# ============================================================================ whole dataset
def _combine(parts: list[PartitionResult], names: list[str], files: list[Path], trucks
             ) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Concatenate partition results, check that no vehicle-day spans two partitions, and
    sort deterministically."""
    rows = _frame([r for p in parts for r in p.records], DAY_COLUMNS)
    skipped = _frame([r for p in parts for r in p.skipped_records], SKIPPED_COLUMNS)
    keys = pd.concat([rows[["vehicle", "day", "partition"]].drop_duplicates(),
                      skipped[["vehicle", "day", "partition"]]], ignore_index=True)
    twice = keys[keys.duplicated(["vehicle", "day"], keep=False)]
    if len(twice):
        rank = {n: i for i, n in enumerate(names)}
        twice = twice.assign(_r=twice["partition"].map(rank)).sort_values(
            ["vehicle", "day", "_r"], kind="stable")
        v, d = twice["vehicle"].iloc[0], twice["day"].iloc[0]
        first, other = twice["_r"].iloc[0], twice["_r"].iloc[1]
        raise InputError(
            f"vehicle {v!r} on {d} also has samples in {files[other]}; each vehicle-day "
            "must sit whole in one partition (partition by day or by vehicle)",
            file=files[first], where="vehicle")
    order = {name: i for i, name in enumerate(trucks)}
    rows = (rows.assign(_k=rows["truck"].map(order))
            .sort_values(["vehicle", "day", "_k"], kind="stable")
            .drop(columns="_k").reset_index(drop=True))
    skipped = skipped.sort_values(["vehicle", "day"], kind="stable").reset_index(drop=True)
    return rows, skipped


def _partition_task(path: str, root: str, scenario, gap_limit: float):
    """A Dask task: :func:`process_partition`, with a user error returned as data.

    InputError does not keep its file and field through pickling, so it travels as
    ``("error", (message, file, where))`` and is raised again on the client.
    """
    try:
        return "ok", process_partition(path, scenario, root=root, gap_limit=gap_limit,
                                       threads=False)
    except InputError as exc:
        return "error", (exc.message, exc.file, exc.where)


#: glibc malloc settings for the workers of a local cluster: arrays below 32 MiB come from
#: the heap and up to 64 MiB of freed memory stays there for reuse. [bytes]
_MMAP_THRESHOLD = 32 * 2**20
_TRIM_THRESHOLD = 64 * 2**20


def _tune_malloc() -> bool:
    """Let glibc reuse freed memory for the next arrays (in a worker of our own cluster).

    Dask starts workers with ``MALLOC_TRIM_THRESHOLD_=65536`` so that they hand freed
    memory back to the system at once. Any such setting also freezes glibc's mmap
    threshold at 128 KiB, so every array above it (a vehicle-day column is about 300 KiB)
    is mapped fresh and page-faulted in: on this project's machine that made 37 times the
    page faults and a partition 60 % slower than in a plain process. Setting both
    thresholds (``mallopt``) restores plain-process speed; memory stays bounded (measured
    peak within 1 % of the plain process). Returns False where there is no glibc.
    """
    import ctypes

    try:
        libc = ctypes.CDLL("libc.so.6")
        m_trim_threshold, m_mmap_threshold = -1, -3  # glibc <malloc.h>
        return bool(libc.mallopt(m_mmap_threshold, _MMAP_THRESHOLD)
                    and libc.mallopt(m_trim_threshold, _TRIM_THRESHOLD))
    except (OSError, AttributeError):
        return False


#: Worker memory settings of the local cluster :func:`process` starts. A task keeps nothing
#: in worker memory but its small result, so Dask's spilling (from 60-70 % of the limit)
#: only costs time; pausing at 80 % and restarting at 95 % stay as Dask sets them.
LOCAL_WORKER_MEMORY = {"distributed.worker.memory.target": False,
                       "distributed.worker.memory.spill": False}


def local_cluster(n_workers: int, memory_limit=None):
    """A local Dask cluster for this path: processes of one thread, no dashboard, no
    spilling (:data:`LOCAL_WORKER_MEMORY`); call :func:`_tune_malloc` on its workers."""
    import dask
    from distributed import LocalCluster

    with dask.config.set(LOCAL_WORKER_MEMORY):  # read by the workers as they start
        return LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=True,
                            dashboard_address=None,
                            memory_limit="auto" if memory_limit is None else memory_limit,
                            silence_logs=logging.ERROR)


def _connect(address: str, timeout: float):
    """A Dask client of the scheduler at ``address``; InputError when it cannot be reached.

    A plain socket tries a TCP address first: a Client that failed to connect still tries
    to close itself when collected, which prints a stray timeout traceback.
    """
    import socket

    from distributed import Client
    from distributed.comm.addressing import parse_address, parse_host_port

    def fail(exc):
        text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise InputError(f"cannot connect to the Dask scheduler at {address!r} ({text})",
                         where="--scheduler") from None

    try:
        scheme, location = parse_address(str(address), strict=False)
        if scheme in ("tcp", "tls"):
            host, port = parse_host_port(location)
            socket.create_connection((host, port), timeout=timeout).close()
    except (OSError, ValueError, TypeError) as exc:
        fail(exc)
    try:
        return Client(address, timeout=timeout, set_as_default=False)
    except Exception as exc:  # noqa: BLE001 - a service that is not a Dask scheduler
        fail(exc)             # answers with anything, even a bogus message length


def _run_dask(client, files, root, scenario, gap_limit, progress):
    from distributed import KilledWorker, as_completed

    total = len(files)
    scen = client.scatter(scenario, broadcast=True, hash=False)
    futures = client.map(_partition_task, [str(f) for f in files], root=str(root),
                         scenario=scen, gap_limit=gap_limit, pure=False,
                         key=f"tco-telematics-{uuid.uuid4().hex[:8]}")
    where = {f.key: i for i, f in enumerate(futures)}
    out = [None] * total
    try:
        for done, fut in enumerate(as_completed(futures, loop=client.loop), start=1):
            i = where[fut.key]
            try:
                out[i] = fut.result()
            except KilledWorker:
                raise InputError("a Dask worker died while processing this partition (more "
                                 "memory than the worker's limit?): split it into smaller "
                                 "files or give workers more memory", file=files[i],
                                 where="--memory-limit") from None
            fut.release()
            if progress is not None:
                progress(done, total)
    except BaseException:
        client.cancel(futures)
        raise
    return out


def _process_reading_ahead(files, names, scenario, gap_limit, progress) -> list:
    """:func:`process_partition` on each file in order, the next file read and checked
    on a second thread while this one's vehicle-days are driven (pyarrow decodes and the
    compiled checks run without Python's lock, so on two cores the reading hides behind
    the work). Results and errors come in file order, as one file at a time would give
    them; at most two partitions' columns are held at once."""
    from concurrent.futures import ThreadPoolExecutor

    parts = []
    with ThreadPoolExecutor(1, thread_name_prefix="tco-read") as reader:
        ahead = reader.submit(_read_partition, files[0], names[0]) if files else None
        for i, f in enumerate(files):
            columns = ahead.result()
            ahead = (reader.submit(_read_partition, files[i + 1], names[i + 1])
                     if i + 1 < len(files) else None)
            try:
                parts.append(_process_columns(columns, scenario, names[i], f, gap_limit))
            except BaseException:
                if ahead is not None:
                    ahead.cancel()
                raise
            del columns
            if progress is not None:
                progress(i + 1, len(files))
    return parts


def process(dataset, loaded_scenario, scheduler: str | None = None,
            local_workers: int | None = None, memory_limit=None,
            progress: Callable[[int, int], None] | None = None,
            gap_limit: float = GAP_LIMIT, connect_timeout: float = 10.0) -> TelematicsResult:
    """Energy of every recorded vehicle-day of a fleet for each truck of a scenario.

    With neither ``scheduler`` nor ``local_workers`` the partitions are processed one by
    one in this process; otherwise each partition is one Dask task (see the module
    description). Both run :func:`process_partition` on each file and give the same
    numbers.

    Parameters
    ----------
    dataset : str or Path
        Folder of Parquet partitions, or one Parquet file (see :func:`find_partitions`).
    loaded_scenario : tco.scenario.LoadedScenario or tco.scenario.Scenario
        The candidate trucks and conditions (``tco.scenario.load_scenario(path)``).
    scheduler : str, optional
        Address of a running Dask scheduler, e.g. ``"tcp://10.0.0.5:8786"``.
    local_workers : int, optional
        Start a local Dask cluster of this many worker processes, one thread each.
    memory_limit : str or int, optional
        Memory limit of each local worker (``"700MB"`` or bytes; Dask's default, the
        machine's memory shared among the workers, when None). Only with
        ``local_workers``. See Notes.
    progress : callable, optional
        Called as ``progress(done, total)`` after each partition. [-]
    gap_limit : float, optional
        Longest time between samples bridged by resampling; a longer gap is parked time.
        Default 600. [s]
    connect_timeout : float, optional
        How long to try reaching ``scheduler``. Default 10. [s]

    Returns
    -------
    TelematicsResult

    Raises
    ------
    InputError
        A bad partition (file and column named), a vehicle-day split over two partitions
        (both files named), an unreachable scheduler (``where="--scheduler"``), or
        conflicting options.

    Notes
    -----
    Memory of a worker: its own footprint — about 360 MB here once numba's compiled
    kernel, pandas, pyarrow, scipy and distributed are loaded (measured with
    ``tests/benchmarks/bench_telematics.py``) — plus about four times the in-memory
    (Arrow) size of the partition it is working on. Dask pauses a worker at 80 % of its
    limit and restarts it at 95 %, so give each worker at least its footprint plus five
    times the largest partition, divided by 0.8 (e.g. 700 MB for partitions up to about
    40 MB); a worker that dies on a partition is reported naming it.

    Speed: workers of the local cluster get glibc malloc thresholds that let freed memory
    be reused (see ``_tune_malloc``: with Dask's default trimming a worker spent twice the
    CPU time on the same partitions here, 1.32 against 0.62 CPU-s on 5.2 M samples, from
    page faults on the kernel's and pandas' fresh arrays). On an existing cluster that is the operator's choice: starting workers
    with ``MALLOC_MMAP_THRESHOLD_=33554432`` and ``MALLOC_TRIM_THRESHOLD_=67108864`` in
    Dask's ``distributed.nanny.pre-spawn-environ`` has the same effect.

    Examples
    --------
    >>> import tempfile
    >>> from tco.resources import demo_path
    >>> from tco.scenario import load_scenario
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     _ = write_example_dataset(folder, vehicles=1, days=1, trips=1, seed=3)
    ...     res = process(folder, load_scenario(demo_path()))
    >>> res.vehicle_days[["vehicle", "truck"]].values.tolist()
    [['V001', 'Diesel tractor'], ['V001', 'Electric tractor']]
    """
    scenario = getattr(loaded_scenario, "scenario", loaded_scenario)
    if scheduler is not None and local_workers is not None:
        raise InputError("give a scheduler address or a number of local workers, not both",
                         where="--scheduler")
    if memory_limit is not None and local_workers is None:
        raise InputError("a memory limit applies to local workers only (an existing "
                         "cluster keeps its own)", where="--memory-limit")
    if local_workers is not None and (isinstance(local_workers, bool)
                                      or not isinstance(local_workers, int)
                                      or local_workers < 1):
        raise InputError(f"the number of local workers must be a whole number ≥ 1, got "
                         f"{local_workers!r}", where="--workers")
    if not float(gap_limit) > 0:
        raise InputError(f"gap limit must be positive, got {gap_limit!r} s",
                         where="gap_limit")
    root, files = find_partitions(dataset)
    names = [f.relative_to(root).as_posix() for f in files]
    if scheduler is None and local_workers is None:
        # freed arrays reused for the next partition's, not mapped and faulted in afresh
        # (the same numbers; see tco.heap)
        heap.keep_freed_memory()
        parts = _process_reading_ahead(files, names, scenario, gap_limit, progress)
        backend = "single process"
    else:
        from distributed import Client

        cluster = None
        if local_workers is not None:
            cluster = local_cluster(local_workers, memory_limit)
            client = Client(cluster, set_as_default=False)
            client.run(_tune_malloc)
            backend = f"local cluster ({local_workers} workers)"
        else:
            client = _connect(scheduler, connect_timeout)
            backend = str(scheduler)
        try:
            raw = _run_dask(client, files, root, scenario, gap_limit, progress)
        finally:
            client.close()
            if cluster is not None:
                cluster.close()
        parts = []
        for status, value in raw:  # the first bad partition in file order, as in one process
            if status == "error":
                raise InputError(*value)
            parts.append(value)
    truck_names = [t.name for t in scenario.trucks]
    rows, skipped = _combine(parts, names, files, truck_names)
    return TelematicsResult(
        vehicle_days=rows, vehicles=vehicle_summary(rows), skipped=skipped,
        partitions=tuple(names), rows_read=int(sum(p.rows_read for p in parts)),
        backend=backend,
        settings={"time_step": float(scenario.route.time_step), "gap_limit": float(gap_limit),
                  "smoothing_window": float(scenario.route.smoothing_window or 0.0),
                  "temperature": float(scenario.ambient.temperature),
                  "scenario": scenario.study.name, "trucks": truck_names})


# ============================================================================ summary
def vehicle_summary(vehicle_days: pd.DataFrame) -> pd.DataFrame:
    """Per vehicle and truck: days, totals, energy per distance, share of days that fit.

    .. math:: e = \\sum_d E_d / \\sum_d s_d

    Parameters
    ----------
    vehicle_days : pandas.DataFrame
        :attr:`TelematicsResult.vehicle_days` (columns :data:`DAY_COLUMNS`). [SI]

    Returns
    -------
    pandas.DataFrame
        Columns :data:`VEHICLE_COLUMNS`, in the order vehicles and trucks first appear.
        Totals in SI ([m], [s], [kg·m], [m³], [J]); energy per distance [m³/m] and [J/m]
        (NaN when the vehicle never moved); shares of days [-] (NaN where they do not
        apply); the worst day is the one with the largest battery need (electric) or
        diesel use (diesel).
    """
    df = vehicle_days
    if df.empty:
        return _empty(VEHICLE_COLUMNS)
    g = df.groupby(["vehicle", "truck"], sort=False)
    sums = g[["distance_m", "duration_s", "payload_distance_kg_m", "diesel_fuel_m3",
              "diesel_def_m3", "battery_energy_J", "grid_energy_J"]].sum(min_count=1)
    out = sums.reset_index()
    out.insert(2, "powertrain", g["powertrain"].first().to_numpy())
    out.insert(3, "days", g.size().to_numpy())
    dist = out["distance_m"].where(out["distance_m"] > 0)
    out["diesel_fuel_per_distance_m3_per_m"] = out["diesel_fuel_m3"] / dist
    out["battery_energy_per_distance_J_per_m"] = out["battery_energy_J"] / dist
    out["grid_energy_per_distance_J_per_m"] = out["grid_energy_J"] / dist
    keys = [df["vehicle"], df["truck"]]
    for col in ("battery_fits", "battery_fits_end_of_life", "payload_fits"):
        share = df[col].astype("Float64").groupby(keys, sort=False).mean()
        out[f"days_{col}_share"] = share.to_numpy(dtype=float, na_value=np.nan)
    need = df["battery_need_J"].where(df["powertrain"] == "electric", df["diesel_fuel_m3"])
    worst = need.fillna(-np.inf).groupby(keys, sort=False).idxmax()
    out["worst_day"] = df.loc[worst.to_numpy(), "day"].to_numpy()
    out["worst_day_diesel_fuel_m3"] = df.loc[worst.to_numpy(), "diesel_fuel_m3"].to_numpy()
    out["worst_day_battery_need_J"] = df.loc[worst.to_numpy(), "battery_need_J"].to_numpy()
    return out[list(VEHICLE_COLUMNS)].astype(VEHICLE_COLUMNS)


# ============================================================================ writing
# (SI column, header in the written files, factor from SI, number format)
from tco.units import J_PER_KWH as _J_PER_KWH  # noqa: E402

_KWH, _L = 1 / _J_PER_KWH, 1e3
_DAY_FILE = [
    ("vehicle", "vehicle", None, None), ("day", "day (UTC)", None, None),
    ("truck", "truck", None, None), ("powertrain", "powertrain", None, None),
    ("partition", "partition", None, None),
    ("samples", "samples", 1, "#,##0"),
    ("duplicates_dropped", "duplicates dropped", 1, "#,##0"),
    ("samples_unused", "samples unused", 1, "#,##0"),
    ("gaps", "gaps", 1, "#,##0"),
    ("gap_time_s", "gap time [h]", 1 / 3600, "0.00"),
    ("duration_s", "duration [h]", 1 / 3600, "0.00"),
    ("first_departure_s", "first departure [h after 00:00 UTC]", 1 / 3600, "0.000"),
    ("last_arrival_s", "last arrival [h after 00:00 UTC]", 1 / 3600, "0.000"),
    ("distance_m", "distance [km]", 1e-3, "#,##0.0"),
    ("payload_max_kg", "payload max [t]", 1e-3, "0.0"),
    ("payload_distance_kg_m", "payload-distance [t·km]", 1e-6, "#,##0"),
    ("diesel_fuel_m3", "diesel [L]", _L, "#,##0.0"),
    ("diesel_def_m3", "diesel exhaust fluid [L]", _L, "#,##0.0"),
    ("battery_energy_J", "battery energy [kWh]", _KWH, "#,##0.0"),
    ("grid_energy_J", "grid energy [kWh]", _KWH, "#,##0.0"),
    ("battery_need_J", "battery need [kWh]", _KWH, "#,##0.0"),
    ("soc_end", "state of charge at end [-]", 1, "0.0%"),
    ("soc_min", "lowest state of charge [-]", 1, "0.0%"),
    ("battery_fits", "fits the battery (new)", None, None),
    ("battery_fits_end_of_life", "fits the battery (end of life)", None, None),
    ("payload_fits", "payload within legal capacity", None, None),
    ("power_limited_time_s", "time above rated power [min]", 1 / 60, "#,##0.0"),
]
_VEHICLE_FILE = [
    ("vehicle", "vehicle", None, None), ("truck", "truck", None, None),
    ("powertrain", "powertrain", None, None), ("days", "days", 1, "#,##0"),
    ("distance_m", "distance [km]", 1e-3, "#,##0"),
    ("duration_s", "duration [h]", 1 / 3600, "#,##0.0"),
    ("payload_distance_kg_m", "payload-distance [t·km]", 1e-6, "#,##0"),
    ("diesel_fuel_m3", "diesel [L]", _L, "#,##0"),
    ("diesel_def_m3", "diesel exhaust fluid [L]", _L, "#,##0"),
    ("battery_energy_J", "battery energy [kWh]", _KWH, "#,##0"),
    ("grid_energy_J", "grid energy [kWh]", _KWH, "#,##0"),
    ("diesel_fuel_per_distance_m3_per_m", "diesel per distance [L/100 km]", 1e8, "0.0"),
    ("battery_energy_per_distance_J_per_m", "battery energy per distance [kWh/km]",
     1e3 * _KWH, "0.000"),
    ("grid_energy_per_distance_J_per_m", "grid energy per distance [kWh/km]", 1e3 * _KWH,
     "0.000"),
    ("days_battery_fits_share", "days fitting the battery (new) [-]", 1, "0.0%"),
    ("days_battery_fits_end_of_life_share", "days fitting the battery (end of life) [-]",
     1, "0.0%"),
    ("days_payload_fits_share", "days within legal payload [-]", 1, "0.0%"),
    ("worst_day", "worst day (UTC)", None, None),
    ("worst_day_diesel_fuel_m3", "worst day diesel [L]", _L, "#,##0.0"),
    ("worst_day_battery_need_J", "worst day battery need [kWh]", _KWH, "#,##0.0"),
]
_SKIPPED_FILE = [
    ("vehicle", "vehicle", None, None), ("day", "day (UTC)", None, None),
    ("partition", "partition", None, None), ("samples", "samples", 1, "#,##0"),
    ("reason", "reason", None, None),
]

#: Cautions and method notes written with the outputs.
NOTES = [
    "Estimates for planning from a physics model replaying recorded drives; they are not "
    "measurements and not financial, tax or legal advice. Check important decisions with "
    "metered fuel and electricity records and qualified advisers.",
    "Each vehicle-day (vehicle id and UTC calendar date) is an operating day on its own: "
    "the battery starts it at the truck's start state of charge, as after overnight "
    "charging. A shift across midnight UTC counts as two days.",
    "Gaps between samples longer than the gap limit are taken as parked with the truck "
    "switched off (no time, distance, idling or auxiliary power); shorter gaps are "
    "bridged.",
    "Elevation is smoothed over distance with the scenario's smoothing window; a grade "
    "column is used as given.",
    "Each candidate truck drives the measured payload. Where that exceeds its legal "
    "capacity, 'payload within legal capacity' is false; the energy shown is still for "
    "the measured mass.",
    "Air density is taken at the day's mean elevation and the scenario's ambient "
    "temperature; wind, traffic and driver are those of the recorded vehicle.",
    "Grid energy is the net battery energy divided by the charging efficiency; "
    "'fits the battery' compares the deepest drawdown of the day with the energy above "
    "the truck's reserve.",
    "Gross-weight limits and any allowance for zero-emission trucks are set by local law; "
    "check them for every road the truck uses.",
]


def _display(df: pd.DataFrame, spec) -> pd.DataFrame:
    """The table in the written files' units and headers."""
    out = {}
    for col, header, factor, _ in spec:
        s = df[col]
        out[header] = s * factor if factor not in (None, 1) else s
    return pd.DataFrame(out)


def _sheet(wb, title, df, spec):
    from openpyxl.utils import get_column_letter

    from tco.report import workbook_base as wbb

    ws = wb.create_sheet(title)
    wbb.header_row(ws, 1, [h for _, h, _, _ in spec])
    wbb.freeze(ws, "A2")
    for j, (col, _, factor, fmt) in enumerate(spec, start=1):
        values = df[col].tolist()
        for i, v in enumerate(values, start=2):
            cell = ws.cell(row=i, column=j)
            if v is None or v is pd.NA or (isinstance(v, float) and math.isnan(v)):
                continue
            if isinstance(v, (bool, np.bool_)):
                cell.value = bool(v)
            elif factor is not None:
                wbb.write_value(cell, float(v) * factor, fmt)
            else:
                wbb.safe_text(cell, v)
        ws.column_dimensions[get_column_letter(j)].width = 14 if factor else 18
    ws.row_dimensions[1].height = 45
    return ws


def write_outputs(result: TelematicsResult, out_folder) -> list[Path]:
    """Write the vehicle-day and vehicle tables as CSV and as one workbook, atomically.

    Files (built in a staging folder, then moved into ``out_folder`` one by one with
    :func:`tco.report.atomic.staged_output`; other files there are left alone):

    * ``vehicle_days.csv`` — one row per vehicle, day and truck;
    * ``vehicles.csv`` — :func:`vehicle_summary`;
    * ``skipped_days.csv`` — vehicle-days left out and why;
    * ``telematics.xlsx`` — the same tables on sheets "Vehicle days", "Vehicles" and
      "Skipped" (frozen header row, number formats), and a "Notes" sheet with the
      cautions, method notes and settings.

    The files show display units named in each header (km, h, L, kWh, t, t·km, L/100 km,
    kWh/km; state of charge and shares as fractions, formatted as percentages in the
    workbook); :class:`TelematicsResult` keeps SI.

    Parameters
    ----------
    result : TelematicsResult
        What :func:`process` returned.
    out_folder : str or Path
        Output folder (created when missing).

    Returns
    -------
    list of Path
        The files written.
    """
    from openpyxl import Workbook
    from openpyxl.styles import Alignment, Font

    from tco.report import workbook_base as wbb
    from tco.report.atomic import staged_output

    target = Path(out_folder)
    tables = [("vehicle_days.csv", "Vehicle days", result.vehicle_days, _DAY_FILE),
              ("vehicles.csv", "Vehicles", result.vehicles, _VEHICLE_FILE),
              ("skipped_days.csv", "Skipped", result.skipped, _SKIPPED_FILE)]
    with staged_output(target) as stage:
        wb = Workbook()
        wb.remove(wb.active)
        for fname, title, df, spec in tables:
            _display(df, spec).to_csv(stage / fname, index=False, encoding="utf-8")
            _sheet(wb, title, df, spec)
        ws = wb.create_sheet("Notes")
        bold = Font(bold=True)
        ws.column_dimensions["A"].width = 110
        r = 1
        wbb.safe_text(ws.cell(row=r, column=1), "Cautions and method").font = bold
        for note in NOTES:
            r += 1
            c = wbb.safe_text(ws.cell(row=r, column=1), note)
            c.alignment = Alignment(wrap_text=True, vertical="top")
        r += 2
        wbb.safe_text(ws.cell(row=r, column=1), "Settings").font = bold
        s = result.settings
        n_days = len(result.vehicle_days[["vehicle", "day"]].drop_duplicates())
        nan = float("nan")
        lines = [f"Scenario: {s.get('scenario', '')}",
                 f"Trucks: {', '.join(s.get('trucks', []))}",
                 f"Time step: {fm.quantity(s.get('time_step', nan), 's')}",
                 f"Gap limit: {fm.quantity(s.get('gap_limit', nan), 'min')}",
                 f"Elevation smoothing window: {fm.quantity(s.get('smoothing_window', nan), 'm')}",
                 f"Ambient temperature: {fm.quantity(s.get('temperature', nan), 'degC', digits=1)}",
                 f"Partitions read: {fm.count(len(result.partitions))}; rows read: "
                 f"{fm.count(result.rows_read)}",
                 f"Vehicle-days: {fm.count(n_days)}; skipped: {fm.count(len(result.skipped))}",
                 f"Processed by: {result.backend}"]
        for line in lines:
            r += 1
            wbb.safe_text(ws.cell(row=r, column=1), line)
        wb.save(stage / "telematics.xlsx")
        names = [t[0] for t in tables] + ["telematics.xlsx"]
    return [target / n for n in names]


# ============================================================================ demo data
def _moving_average(x: np.ndarray, w: int) -> np.ndarray:
    """Centred moving average over ``w`` samples, ends padded with the end values."""
    return np.convolve(np.pad(x, (w // 2, w - 1 - w // 2), mode="edge"), np.ones(w) / w,
                       mode="valid")


def _drive_cycle(rng, trips: int, rate: float):
    """An invented working day at ``rate`` samples per second: (t [s after midnight],
    speed [m/s], payload [kg]); None marks the samples of a parked, logger-off break."""
    blocks = []  # (duration [s], target speed [m/s], payload [kg], logged)

    def road(kind, load):
        lo, hi, vmin, vmax, stops = {"town": (240, 600, 10, 14, 3),
                                     "rural": (600, 1500, 18, 23, 1),
                                     "motorway": (900, 2400, 23, 25, 0)}[kind]
        dur = rng.uniform(lo, hi)
        n_stops = rng.integers(0, stops + 1)
        pieces = np.diff(np.sort(np.concatenate(([0, dur], rng.uniform(0, dur, n_stops)))))
        for k, p in enumerate(pieces):
            blocks.append((p, rng.uniform(vmin, vmax), load, True))
            if k < len(pieces) - 1:
                blocks.append((rng.uniform(20, 60), 0.0, load, True))

    for trip in range(trips):
        out_load = float(rng.uniform(6e3, 24e3))
        back_load = float(rng.choice([0.0, rng.uniform(0, 8e3)]))
        blocks.append((rng.uniform(600, 1200), 0.0, out_load, True))    # loading
        for kind in ("town", "rural", "motorway", "rural", "town"):
            road(kind, out_load)
        blocks.append((rng.uniform(600, 900), 0.0, out_load, True))     # unloading ...
        blocks.append((rng.uniform(600, 900), 0.0, back_load, True))    # ... and reloading
        for kind in ("town", "motorway", "rural", "town"):
            road(kind, back_load)
        if trip < trips - 1:
            blocks.append((rng.uniform(1800, 2700), 0.0, back_load, False))  # break, off
    dur = np.array([b[0] for b in blocks])
    n = np.maximum(1, np.round(dur * rate).astype(np.int64))
    target = np.repeat([b[1] for b in blocks], n)
    payload = np.repeat([b[2] for b in blocks], n)
    logged = np.repeat([b[3] for b in blocks], n)
    # a moving average over 80 s turns the steps into ramps of at most 25/80 ≈ 0.3 m/s²;
    # traffic adds slow swings of about ±0.5 m/s (white noise averaged over 40 s)
    speed = _moving_average(target, max(1, int(round(80 * rate))))
    swing = _moving_average(rng.normal(0, 3.0, speed.size), max(1, int(round(40 * rate))))
    speed = np.maximum(np.where(speed > 1.0, speed + swing, speed), 0.0)
    t = (rng.uniform(5, 7) * 3600) + np.arange(speed.size) / rate
    return t[logged], speed[logged], payload[logged]


def write_example_dataset(folder, vehicles: int = 4, days: int = 2, seed: int = 0,
                          files_per_day: int = 1, trips: int = 2, rate: float = 1.0,
                          terrain: str = "elevation", start: str = "2030-03-04"
                          ) -> list[Path]:
    """Write an invented fleet telematics dataset (synthetic drive cycles) as Parquet.

    Each vehicle-day is a working day of ``trips`` round trips — loading, town, rural road
    and motorway out, unloading and reloading, the way back — with acceleration ramps,
    speed noise, rolling hills (sums of sines over distance, grades within ±6 %), GPS-like
    elevation noise of about 1 m, and a parked break with the logger off between trips.
    Every number is invented for demonstration and testing.

    Layout: ``folder/day=YYYY-MM-DD/part-NNN.parquet``, the vehicles of a day split into
    ``files_per_day`` files, so each vehicle-day sits whole in one file.

    Parameters
    ----------
    folder : str or Path
        Where to write (created when missing).
    vehicles, days : int
        Fleet size and number of consecutive days. [-]
    seed : int
        Random seed; the same arguments give the same files.
    files_per_day : int
        Partitions per day. [-]
    trips : int
        Round trips per vehicle-day. [-]
    rate : float
        Samples per second. [1/s]
    terrain : {"elevation", "grade"}
        Write an ``elevation`` [m] column (with noise) or an exact ``grade`` [-] column.
    start : str
        First day (UTC), ISO date.

    Returns
    -------
    list of Path
        The files written.
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    if terrain not in ("elevation", "grade"):
        raise ValueError("terrain must be 'elevation' or 'grade'")
    folder = Path(folder)
    rng = np.random.default_rng(seed)
    ids = [f"V{k + 1:03d}" for k in range(vehicles)]
    # each vehicle's home terrain: base elevation [m], hill amplitudes [m] and wavelengths [m]
    hills = [(rng.uniform(50, 600), rng.uniform([15, 4, 0.5], [30, 8, 1.5]),
              rng.uniform([7000, 2500, 1000], [10000, 4000, 1500]), rng.uniform(0, 6.3, 3))
             for _ in ids]
    written = []
    first = np.datetime64(start, "D")
    for d in range(days):
        date = first + d
        midnight_ms = date.astype("datetime64[ms]").astype(np.int64)
        for block in np.array_split(np.arange(vehicles), files_per_day):
            cols = {"vehicle": [], "timestamp": [], "speed": [], terrain: [], "payload": []}
            for k in block:
                t, v, p = _drive_cycle(rng, trips, rate)
                x = np.concatenate(([0.0], np.cumsum(0.5 * (v[1:] + v[:-1]) / rate)))
                base, amp, lam, phase = hills[k]
                arg = 2 * np.pi * x[:, None] / lam + phase
                if terrain == "elevation":
                    z = base + (amp * np.sin(arg)).sum(axis=1) + rng.normal(0, 1.0, x.size)
                else:
                    z = (amp * 2 * np.pi / lam * np.cos(arg)).sum(axis=1)
                cols["vehicle"].append(np.full(t.size, ids[k], dtype=object))
                cols["timestamp"].append(midnight_ms + np.round(t * 1000).astype(np.int64))
                cols["speed"].append(v)
                cols[terrain].append(z)
                cols["payload"].append(p)
            if len(block) == 0:
                continue
            table = pa.table({
                "vehicle": pa.array(np.concatenate(cols["vehicle"]), pa.string()),
                "timestamp": pa.array(np.concatenate(cols["timestamp"]),
                                      pa.timestamp("ms", tz="UTC")),
                "speed": np.concatenate(cols["speed"]),
                terrain: np.concatenate(cols[terrain]),
                "payload": np.concatenate(cols["payload"]),
            })
            path = folder / f"day={date}" / f"part-{int(block[0]):03d}.parquet"
            path.parent.mkdir(parents=True, exist_ok=True)
            pq.write_table(table, path)
            written.append(path)
    return written
