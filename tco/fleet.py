"""Many routes sharing one depot: which routes to electrify first, how many chargers the
depot needs, and fleet totals per year.

A **fleet file** (CSV or XLSX) has one row per vehicle or route; each row points to a duty
cycle and names the truck on it today (``current``) and its replacement candidate
(``candidate``) from the trucks of a **base scenario** (a scenario TOML whose trucks,
finance, prices, depot, emissions and ambient conditions apply to every row).

Columns (header units in brackets, read by pint; the unit shown is the default):

==================== ========== ===========================================================
column               required   meaning
==================== ========== ===========================================================
``vehicle``          yes        id, unique in the file
``cycle``            yes        a trace (``.csv``/``.gpx``) or a scenario ``.toml`` whose
                                route (legs, segments) is used; relative to the fleet file
``current``          yes        truck name in the base scenario
``candidate``        yes        truck name in the base scenario
``route``            no         a label for the report
``annual_distance``  no [km]    distance per year; sets the trips per day (default: the
                                cycle's own trips per day, 1 for a trace)
``payload``          no [t]     payload on the loaded legs (default: the cycle's; 0 for a
                                trace)
``days_per_year``    no         operating days (default: the cycle's or the base's)
``arrive``           no         clock time back at the depot, ``HH:MM`` (default: the base
                                depot's charging start hour)
``depart``           no         clock time leaving the depot (default: the base depot's
                                charging end hour)
``age``              no [yr]    age of the current truck today (transition plan)
``replacement_year`` no         calendar year the current truck is due to be replaced
                                (transition plan; default: when it reaches the plan's
                                service life)
``resale_value``     no         what the current truck would sell for today, in the base
                                scenario's currency (default: its price × its residual
                                share at its age)
==================== ========== ===========================================================

The flow: each row becomes a two-truck scenario (current against candidate) and its energy
is simulated (in parallel over the machine's cores); the candidates' nightly energy goes
to :func:`tco.depot.schedule`, which sizes the shared chargers and peak and sets each
truck's share of the depot costs and its charging hours; then each row's cash flows and
emissions are computed with that share, and the routes are ranked.

Simplifications (stated in the report): the routes table and the electrification order
compare each route changing over in year 1 (the phased roll-out, year by year under a
budget, grid and target, is the transition plan of :mod:`tco.plan`, run when plan
settings are given); trucks outside the plan keep their current truck; the depot's charger power and
costs are the base scenario's ``[depot]``.
"""
from __future__ import annotations

import copy
import csv
import difflib
import math
import os
import re
import tomllib
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from tco import depot as depot_model
from tco.errors import InputError
from tco.report import formatting as fm
from tco.scenario.base import TEXT_LIMIT
from tco.scenario.files import input_file
from tco.text import clean_text
from tco.scenario import LoadedScenario, parse_scenario
from tco.units import UnitError, from_si, to_si

# column -> (required, default unit or None for text/number)
COLUMNS: dict[str, tuple[bool, str | None]] = {
    "vehicle": (True, None), "cycle": (True, None), "current": (True, None),
    "candidate": (True, None), "route": (False, None), "annual_distance": (False, "km"),
    "payload": (False, "t"), "days_per_year": (False, ""), "arrive": (False, None),
    "depart": (False, None), "age": (False, "yr"), "replacement_year": (False, None),
    "resale_value": (False, None),
}
_YEAR_S = 365.25 * 86400.0  # the unit registry's (Julian) year [s]
#: Hard limits of the numeric columns, in each column's default unit (low, high, low
#: included?). A value outside is refused with one line naming the row and column.
#: ``tests/test_field_bounds.py`` checks each limit is enforced.
COLUMN_LIMITS: dict[str, tuple[float, float, bool]] = {
    # a truck driving 24 h a day at 150 km/h every day of a leap year covers 1.3e6 km
    "annual_distance": (0.0, 1_500_000.0, False),  # [km]
    "payload": (0.0, 500.0, True),  # [t], as the scenario's leg payload
    "days_per_year": (0.0, 366.0, False),  # [1/yr]
    "age": (0.0, 50.0, True),  # [yr], as the plan's service life
    "replacement_year": (1990.0, 2100.0, True),  # calendar year, as study.start_year
    "resale_value": (0.0, 1e13, True),  # [currency], the money ceiling
}
#: Usual ranges of the numeric columns in their default units (low, high; None: open) and
#: where they come from, or why there is none: a value outside is run and named in the
#: fleet's warnings (money only in the currencies of ``tco.scenario.base.DOLLAR_LIKE``).
COLUMN_USUAL: dict[str, tuple[float | None, float | None, str] | str] = {
    "annual_distance": (5_000.0, 250_000.0, "common practice: heavy trucks run about "
                        "20,000–200,000 km a year"),
    "payload": (None, 60.0, "as the scenario's leg payload: road laws of 40–44 t gross "
                "leave about 25–30 t; long combinations up to about 60 t"),
    "days_per_year": (150.0, 365.0, "as route.days_per_year: about 250 working days a "
                      "year; every day in continuous operation"),
    "age": (None, 25.0, "common practice: trucks older than 20–25 years are rare in "
            "commercial fleets"),
    "replacement_year": "none: any year of the plan",
    "resale_value": (None, 800_000.0, "from memory: a new heavy tractor costs about "
                     "100,000–500,000 USD or EUR, so a used one sells for less"),
}


def column_warnings(rows: list["FleetRow"], currency: str) -> list[str]:
    """One sentence per fleet cell outside its column's usual range (:data:`COLUMN_USUAL`),
    naming the row and the vehicle."""
    from tco.scenario.base import DOLLAR_LIKE, number_text as num

    out = []
    for row in rows:
        for name, usual in COLUMN_USUAL.items():
            value = getattr(row, name)
            if isinstance(usual, str) or value is None:
                continue
            if name == "resale_value" and currency not in DOLLAR_LIKE:
                continue
            unit = COLUMNS[name][1] or ""
            shown = float(from_si(value, unit)) if unit and name != "age" else float(value)
            low, high, _ = usual
            if (low is not None and shown < low) or (high is not None and shown > high):
                rng = (f"{num(low)} to {num(high)}" if low is not None and high is not None
                       else f"at least {num(low)}" if low is not None else f"at most {num(high)}")
                u = f" {unit}" if unit else ""
                out.append(f"{row.vehicle} (row {row.row}): {name} = {num(shown)}{u} is outside "
                           f"the usual range ({rng}{u}); check that it is meant")
    return out


def _limit_problem(name: str, v: float) -> str | None:
    low, high, low_in = COLUMN_LIMITS[name]
    unit = COLUMNS[name][1] or ""
    u = f" {unit}" if unit else ""
    # a calendar year reads 1990, not 1,990
    num = (lambda x: str(int(x))) if name == "replacement_year" else fm.plain
    if not math.isfinite(v) or v > high:
        return f"must be at most {num(high)}{u}"
    if v < low or (v == low and not low_in):
        return f"must be {'at least' if low_in else 'more than'} {num(low)}{u}"
    return None
_HEADER = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_ ]*?)\s*(?:\[(.*)\])?\s*$")
_CLOCK = re.compile(r"^\s*(\d{1,2}):(\d{2})(?::00)?\s*$")  # a workbook time adds ":00"


@dataclass(frozen=True)
class FleetRow:
    """One row of a fleet file, in SI.

    Attributes
    ----------
    row : int
        Line number in the file (header = 1).
    vehicle, route, current, candidate : str
    cycle : Path
        Absolute path of the duty cycle.
    annual_distance : float or None
        [m/yr]
    payload : float or None
        [kg]
    days_per_year : float or None
        [1/yr]
    arrive, depart : float or None
        Clock times at the depot. [s after midnight]
    age : float or None
        Age of the current truck today (plan years are whole years). [yr]
    replacement_year : int or None
        Calendar year the current truck is due to be replaced.
    resale_value : float or None
        Value of the current truck if sold today. [currency]
    logged : tuple or None
        Logged energy per distance, ``(truck, quantity, value)`` with quantity
        ``diesel_per_m`` [m³/m], ``battery_per_m`` or ``grid_per_m`` [J/m]
        (:mod:`tco.fleet_telematics`); None: the cycle's simulated energy.
    """

    row: int
    vehicle: str
    cycle: Path
    current: str
    candidate: str
    route: str = ""
    annual_distance: float | None = None
    payload: float | None = None
    days_per_year: float | None = None
    arrive: float | None = None
    depart: float | None = None
    age: float | None = None
    replacement_year: int | None = None
    resale_value: float | None = None
    logged: tuple | None = None


# --------------------------------------------------------------------------- reading
def _read_table(path: Path) -> tuple[list[str], list[list[str]], list[int]]:
    """Header and rows (as text) of a CSV or XLSX file, with each row's line number."""
    suffix = path.suffix.lower()
    if suffix in (".xlsx", ".xlsm"):
        from openpyxl import load_workbook

        try:
            wb = load_workbook(path, read_only=True, data_only=True)
        except Exception as exc:  # noqa: BLE001 - any unreadable workbook is bad input
            raise InputError(f"cannot read the workbook ({type(exc).__name__})",
                             file=path) from None
        ws = wb.worksheets[0]
        rows = [["" if c is None else str(c) for c in r] for r in ws.iter_rows(values_only=True)]
        wb.close()
        lines = list(range(1, len(rows) + 1))
    elif suffix == ".csv":
        try:
            text = path.read_text(encoding="utf-8-sig")
        except UnicodeDecodeError:
            raise InputError("not a UTF-8 text file", file=path) from None
        rows, lines = [], []
        for n, r in enumerate(csv.reader(text.splitlines()), start=1):
            if not r or all(not c.strip() for c in r) or r[0].lstrip().startswith("#"):
                continue
            rows.append(r)
            lines.append(n)
    else:
        raise InputError("a fleet file must be .csv or .xlsx", file=path)
    rows = [r for r in rows if any(str(c).strip() for c in r)]
    if not rows:
        raise InputError("the fleet file is empty", file=path)
    return rows[0], rows[1:], lines[1:len(rows)]


def _clock(text: str, path: Path, where: str) -> float:
    m = _CLOCK.match(text)
    if not m or int(m.group(1)) > 23 or int(m.group(2)) > 59:
        raise InputError(f"'{text}' is not a clock time HH:MM", file=path, where=where)
    return int(m.group(1)) * 3600.0 + int(m.group(2)) * 60.0


def read_fleet(path: str | Path) -> list[FleetRow]:
    """Read and check a fleet file (CSV or XLSX).

    Parameters
    ----------
    path : str or Path
        The fleet file; cycles are resolved relative to its folder.

    Returns
    -------
    list of FleetRow

    Raises
    ------
    InputError
        Unknown or missing columns, a bad value, a duplicate vehicle id or a missing cycle
        file, naming the row.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError("file not found", file=path)
    header, body, lines = _read_table(path)
    cols: dict[str, tuple[int, str | None]] = {}
    for j, h in enumerate(header):
        m = _HEADER.match(str(h))
        name = m.group(1).strip().lower().replace(" ", "_") if m else str(h)
        if name not in COLUMNS:
            close = difflib.get_close_matches(name, COLUMNS, n=1)
            hint = f" (did you mean '{close[0]}'?)" if close else \
                f" (known: {', '.join(COLUMNS)})"
            raise InputError(f"unknown column '{h}'{hint}", file=path, where="header")
        if name in cols:
            raise InputError(f"column '{name}' appears twice", file=path, where="header")
        unit = m.group(2).strip() if m and m.group(2) else None
        default = COLUMNS[name][1]
        if unit and default is None:
            raise InputError(f"column '{name}' takes no unit", file=path, where="header")
        if unit and default:
            try:
                to_si(f"1 {unit}", default)
            except UnitError:
                raise InputError(f"column '{name}': '{unit}' is not a unit of the same kind "
                                 f"as {default}", file=path, where="header") from None
        cols[name] = (j, unit or default)
    for name, (required, _) in COLUMNS.items():
        if required and name not in cols:
            raise InputError(f"required column '{name}' is missing", file=path,
                             where="header")
    if not body:
        raise InputError("the fleet file has no vehicles", file=path)

    out: list[FleetRow] = []
    seen: dict[str, int] = {}
    for r, line in zip(body, lines):
        where = f"row {line}"

        def cell(name):
            if name not in cols:
                return ""
            j = cols[name][0]
            text = str(r[j]).strip() if j < len(r) and r[j] is not None else ""
            if len(text) > TEXT_LIMIT:  # names and labels: bounded, like scenario text
                raise InputError(f"is {fm.count(len(text))} characters long; the limit is "
                                 f"{fm.count(TEXT_LIMIT)}", file=path, where=f"{where}, {name}")
            return clean_text(text)  # control characters replaced (see tco.text)

        vals: dict = {}
        for name in ("vehicle", "cycle", "current", "candidate"):
            vals[name] = cell(name)
            if not vals[name]:
                raise InputError(f"'{name}' is empty", file=path, where=where)
        vid = vals["vehicle"]
        if vid in seen:
            raise InputError(f"duplicate vehicle id '{vid}' (also on row {seen[vid]})",
                             file=path, where=where)
        seen[vid] = line
        try:  # inside the fleet file's folder (or an allowed one), see tco.scenario.files
            cyc = input_file(vals["cycle"], path.parent, (".csv", ".gpx", ".toml"),
                             "cycle file")
        except InputError as exc:
            raise exc.located(file=path, where=f"{where}, cycle") from None
        extra: dict = {}
        for name in ("annual_distance", "payload", "days_per_year"):
            text = cell(name)
            if not text:
                continue
            try:
                v = to_si(float(text), cols[name][1]) if _is_number(text) else \
                    to_si(text, cols[name][1] or "")
            except (UnitError, ValueError) as exc:
                raise InputError(str(exc), file=path, where=f"{where}, {name}") from None
            default = COLUMNS[name][1]
            problem = _limit_problem(name, float(from_si(v, default)) if default else v)
            if problem:
                raise InputError(problem, file=path, where=f"{where}, {name}")
            extra[name] = v
        for name in ("arrive", "depart"):
            text = cell(name)
            if text:
                extra[name] = _clock(text, path, f"{where}, {name}")
        text = cell("age")
        if text:
            try:
                v = to_si(float(text), cols["age"][1]) if _is_number(text) else \
                    to_si(text, cols["age"][1])
            except (UnitError, ValueError) as exc:
                raise InputError(str(exc), file=path, where=f"{where}, age") from None
            problem = _limit_problem("age", v / _YEAR_S)
            if problem:
                raise InputError(problem, file=path, where=f"{where}, age")
            extra["age"] = v / _YEAR_S
        text = cell("replacement_year")
        if text:
            if not re.fullmatch(r"\d{4}(\.0)?", text):
                raise InputError(f"'{text}' is not a calendar year", file=path,
                                 where=f"{where}, replacement_year")
            problem = _limit_problem("replacement_year", float(text))
            if problem:
                raise InputError(problem, file=path, where=f"{where}, replacement_year")
            extra["replacement_year"] = int(float(text))
        text = cell("resale_value")
        if text:
            v = float(text) if _is_number(text) else math.nan
            if math.isnan(v):
                raise InputError(f"'{text}' is not an amount", file=path,
                                 where=f"{where}, resale_value")
            problem = _limit_problem("resale_value", v)
            if problem:
                raise InputError(problem, file=path, where=f"{where}, resale_value")
            extra["resale_value"] = v
        out.append(FleetRow(row=line, vehicle=vid, cycle=cyc,  # as the user gave it
                            current=vals["current"], candidate=vals["candidate"],
                            route=cell("route"), **extra))
    return out


def _is_number(text: str) -> bool:
    try:
        float(text)
        return True
    except ValueError:
        return False


# --------------------------------------------------------------------------- row scenarios
def _cycle_route(row: FleetRow) -> dict:
    """The ``[route]`` table of a row's cycle (leg files relative to the cycle's folder)."""
    if row.cycle.suffix.lower() == ".toml":
        try:
            raw = tomllib.loads(row.cycle.read_text(encoding="utf-8-sig"))
        except UnicodeDecodeError:
            raise InputError("not a UTF-8 text file", file=row.cycle) from None
        except tomllib.TOMLDecodeError as exc:
            raise InputError(f"not valid TOML: {exc}", file=row.cycle) from None
        except RecursionError:
            raise InputError("not valid TOML: tables or arrays nested too deeply",
                             file=row.cycle) from None
        if "route" not in raw:
            raise InputError("a cycle scenario needs a [route] section", file=row.cycle)
        route = copy.deepcopy(raw["route"])
        # leg files stay as written: relative to the cycle's folder, where the row's
        # LoadedScenario resolves (and confines) them
        return route
    return {"legs": [{"name": row.route or row.vehicle, "payload": 0.0,
                      "file": row.cycle.name}], "trips_per_day": 1.0}


def row_scenario(base: LoadedScenario, row: FleetRow, fleet_file: Path) -> dict:
    """The raw scenario of one row: the base with the row's cycle and its two trucks."""
    raw = copy.deepcopy(base.raw)
    trucks = {t.get("name"): t for t in raw.get("trucks", []) if isinstance(t, dict)}
    for col in ("current", "candidate"):
        name = getattr(row, col)
        if name not in trucks:
            close = difflib.get_close_matches(name, list(trucks), n=1)
            hint = f" (did you mean '{close[0]}'?)" if close else \
                f" (trucks of the base: {', '.join(map(str, trucks))})"
            raise InputError(f"no truck '{name}' in the base scenario{hint}",
                             file=fleet_file, where=f"row {row.row}, {col}")
    if row.current == row.candidate:
        raise InputError("current and candidate are the same truck", file=fleet_file,
                         where=f"row {row.row}, candidate")
    route = _cycle_route(row)
    if row.payload is not None:
        legs = route.get("legs", [])
        loaded = [leg for leg in legs if _payload_kg(leg.get("payload", 0)) > 0] or legs[:1]
        for leg in loaded:
            leg["payload"] = f"{row.payload} kg"
    if row.days_per_year is not None:
        route["days_per_year"] = row.days_per_year
    for key in ("time_step", "smoothing_window", "max_accel", "max_decel"):
        if key in base.raw.get("route", {}) and key not in route:
            route[key] = base.raw["route"][key]
    raw["route"] = route
    raw["trucks"] = [trucks[row.current], trucks[row.candidate]]
    raw.setdefault("finance", {})["baseline"] = row.current
    raw.setdefault("uncertainty", {})["enabled"] = False
    study = raw.setdefault("study", {})
    study["name"] = f"{row.vehicle} {row.route}".strip()
    study.pop("slug", None)
    dep = raw.setdefault("depot", {})
    if row.arrive is not None:
        dep["charging_start_hour"] = int(math.ceil(row.arrive / 3600.0 - 1e-9)) % 24
    if row.depart is not None:
        dep["charging_end_hour"] = int(row.depart // 3600.0) % 24
    return raw


def _payload_kg(value) -> float:
    try:
        return to_si(value, "t")
    except UnitError:
        return 0.0


# --------------------------------------------------------------------------- stage 1: energy
@dataclass
class RouteEnergy:
    """Energy and feasibility of one row's two trucks (no traces kept)."""

    row: FleetRow
    scenario: object
    trip_distance: float
    trip_duration: float
    trips_per_day: float
    operations: list
    summaries: dict
    feasibility: dict
    warnings: list


def _row_energy(args) -> RouteEnergy:
    base, row, fleet_file = args
    from tco import energy
    from tco.fleet_telematics import logged_for, rescale_operation
    from tco.pipeline import build_trip, with_finding_warnings

    raw = row_scenario(base, row, fleet_file)
    where = f"row {row.row} ({row.vehicle})"
    try:
        s = parse_scenario(raw, row.cycle if row.cycle.suffix == ".toml" else fleet_file)
        loaded = LoadedScenario(s, row.cycle, raw, "")
        trip = build_trip(loaded)
        trip_distance = float(trip["distance"].iloc[-1] - trip["distance"].iloc[0])
        if row.annual_distance is not None:
            if trip_distance <= 0:
                raise InputError("the cycle covers no distance", file=row.cycle)
            tpd = row.annual_distance / (s.route.days_per_year * trip_distance)
            if not 0 < tpd <= 50:
                raise InputError(f"annual distance needs {fm.number(tpd, 2)} trips a day on this "
                                 "cycle (allowed up to 50)", where="annual_distance")
            s.route.trips_per_day = tpd
        trucks = [with_finding_warnings(energy.simulate(t, s, trip), s.study.units)
                  for t in s.trucks]
    except InputError as exc:
        raise InputError(exc.message, file=fleet_file,
                         where=f"{where}: " + ": ".join(
                             p for p in (exc.file and Path(exc.file).name, exc.where) if p)
                         ) from None
    for tr in trucks:  # keep no traces: a fleet holds many days of 1 Hz data
        tr.trace = None
    return RouteEnergy(
        row=row, scenario=s, trip_distance=trip_distance,
        trip_duration=float(trucks[0].summary["trip_duration"]),
        trips_per_day=float(s.route.trips_per_day),
        operations=[t.operation for t in trucks] if row.logged is None else
        [rescale_operation(t.operation, logged_for(row, t.name)) for t in trucks],
        summaries={t.name: t.summary for t in trucks},
        feasibility={t.name: t.feasibility for t in trucks},
        warnings=[w for t in trucks for w in t.warnings])


#: Modules the fork server imports once, so each worker starts warm.
_PRELOAD = ["tco.fleet", "tco.pipeline", "tco.energy", "tco.kernel", "tco.cashflow",
            "tco.emissions"]


def _pool(jobs: int, n_items: int):
    """A process pool for the fleet's stages, or None to run inline.

    Workers start from a fork server (a fresh process that imported the model once):
    forking the caller itself would copy its threads (a progress display, numerical
    libraries' pools), which is unsafe. Where the platform has no fork server, spawn.
    A script calling :func:`evaluate_fleet` with ``jobs`` > 1 needs
    ``if __name__ == "__main__":``.
    """
    import multiprocessing as mp

    if jobs <= 1 or n_items <= 1:
        return None
    methods = mp.get_all_start_methods()
    ctx = mp.get_context("forkserver" if "forkserver" in methods else "spawn")
    if ctx.get_start_method() == "forkserver":
        ctx.set_forkserver_preload(_PRELOAD)
    from tco.scenario.files import allow_folders, allowed_folders

    # workers do not inherit the folders allowed with --allow-folder
    return ProcessPoolExecutor(min(jobs, n_items), mp_context=ctx, initializer=allow_folders,
                               initargs=(tuple(allowed_folders()),))


def _map(fn, items, pool, jobs: int, progress=None):
    """fn over items on ``pool`` of ``jobs`` processes (or inline when None); results in
    order."""
    results = map(fn, items) if pool is None else \
        pool.map(fn, items, chunksize=max(1, len(items) // (jobs * 8)))
    out = []
    for r in results:
        out.append(r)
        if progress:
            progress(1)
    return out


# --------------------------------------------------------------------------- feasibility
def route_status(e: RouteEnergy, shortfall: float = 0.0) -> dict:
    """Can the candidate do this route, and if not what would make it possible.

    The remedies are found here as codes with SI numbers (``remedy_findings``:
    ``payload`` lost_per_trip [kg], extra_trips_per_year; ``enroute`` or ``battery``
    deficit [J], enroute_time [s]; ``day_too_long`` driving, enroute, away [s];
    ``depot`` shortfall [J]) and written as sentences by the report layer
    (:func:`tco.report.findings.remedy_sentence`) in the base scenario's units.
    """
    from tco.report.findings import remedy_sentence

    cand = e.row.candidate
    f = e.feasibility[cand]
    s = e.summaries[cand]
    found: list[dict] = []
    ok_payload = bool(f["payload"]["ok"])
    if not ok_payload:
        found.append({"code": "payload", "lost_per_trip": f["payload"]["lost_per_trip"],
                      "extra_trips_per_year": f["payload"]["extra_trips_per_year"]})
    bat = f.get("battery")
    ok_battery = ok_enroute = True
    if bat:
        new = bat["new"]
        ok_battery = bool(new["ok"])
        ok_enroute = bool(new["ok_with_enroute"])
        if not ok_battery:
            found.append({"code": "enroute" if ok_enroute else "battery",
                          "deficit": new["deficit"], "enroute_time": new["enroute_time"]})
    # the day must fit between leaving the depot and coming back, en-route charging included
    r = e.row
    away = (r.arrive - r.depart) % depot_model.DAY if r.arrive is not None and \
        r.depart is not None else depot_model.DAY
    away = away or depot_model.DAY
    # the candidate's own trip: a power-limited truck is slowed on climbs (tco.powerlimit)
    driving = e.trips_per_day * float(e.summaries[cand].get("trip_duration", e.trip_duration))
    enroute = bat["new"]["enroute_time"] if bat and not ok_battery else 0.0
    if driving + enroute > away * (1 + 1e-9):
        ok_enroute = ok_battery = False
        found.append({"code": "day_too_long", "driving": driving, "enroute": enroute,
                      "away": away})
    ok_depot = shortfall <= 1.0
    if not ok_depot:
        found.append({"code": "depot", "shortfall": shortfall})
    units = e.scenario.study.units
    remedies = [remedy_sentence(x, units) for x in found]
    if bat is None:
        status = "feasible" if ok_payload else "not feasible"
    elif ok_payload and ok_battery and ok_depot:
        status = "feasible"
    elif ok_payload and ok_enroute and ok_depot:
        status = "feasible with en-route charging"
    else:
        status = "not feasible"
    return {"status": status, "feasible": status != "not feasible", "remedies": remedies,
            "remedy_findings": found, "soc_min": s.get("soc_min")}


# --------------------------------------------------------------------------- stage 3: money
def _with_depot(ops: list, cand_index: int, sched: depot_model.DepotSchedule | None,
                k: int | None) -> list:
    """The candidate's operation with its scheduled charging hours and depot shares."""
    if sched is None or k is None:
        return ops
    op = ops[cand_index]
    if op.powertrain != "electric" or op.grid_energy_depot <= 0:
        return ops
    new = depot_model.scheduled_operation(op, sched, k, cost_share=True)
    out = list(ops)
    out[cand_index] = new
    return out


@dataclass
class RouteMoney:
    """Cash flows and emissions of one row (current against candidate)."""

    vehicle: str
    present_value: dict
    levelized_cost: dict
    difference: float
    simple_payback: int | None
    irr: float | None
    yearly_cost: pd.DataFrame        # truck, year, amount
    yearly_emissions: pd.DataFrame   # truck, year, kg_co2e (well-to-wheel, location)
    avoided_t: float                 # well-to-wheel, location-based, over the period [t]
    abatement_cost: float | None
    abatement_t: float               # the tonnes abatement_cost divides by (its convention)
    ttw_t: dict
    wtw_t: dict
    plan_flows: dict | None = None  # tco.plan.option_flows, when a plan is asked for


def _route_money_task(args) -> RouteMoney:
    return _route_money(*args)


def _route_money(e: RouteEnergy, base: LoadedScenario, ops: list, chargers: int,
                 served: int, plan: bool = False) -> RouteMoney:
    from tco import cashflow, emissions
    from tco.pipeline import cost_inputs, service_years

    s = e.scenario.model_copy(deep=False)
    s.depot = base.scenario.depot.model_copy(update={
        "chargers": chargers, "trucks_served": max(served, 1),
        "charging_start_hour": e.scenario.depot.charging_start_hour,
        "charging_end_hour": e.scenario.depot.charging_end_hour})
    inputs = cost_inputs(s, ops)
    cf = cashflow.evaluate(inputs, break_evens=False, financing=False)  # not in fleet.json
    pv = {m.name: m.present_value for m in cf.trucks}
    lc = {m.name: m.levelized_cost for m in cf.trucks}
    cur, cand = e.row.current, e.row.candidate
    comp = cf.comparisons[0]
    diff = pv[cand] - pv[cur]
    em = emissions.evaluate(s.emissions, ops, service_years(s), reference=cur,
                            cost_difference={cand: diff}, discount_rate=cf.discount_rate)
    yc = cf.table.groupby(["truck", "year"], as_index=False)["amount"].sum()
    tot = em.totals
    wtw = tot[tot["frame"] == "wtw"][["truck", "year", "kg_co2e"]].reset_index(drop=True)
    wtw["year"] = wtw["year"] - s.study.start_year + 1  # calendar year -> year of service
    ttw_t = {t: float(tot[(tot["frame"] == "ttw") & (tot["truck"] == t)]["kg_co2e"].sum()
                      / 1000) for t in (cur, cand)}
    wtw_t = {t: float(wtw[wtw["truck"] == t]["kg_co2e"].sum() / 1000) for t in (cur, cand)}
    ab = em.abatement.get(cand, {})
    # physical tonnes over the period; the abatement cost divides by the scenario's own
    # convention (discounted tonnes by default), kept apart so the two never mix
    avoided = float(ab.get("tonnes_location_undiscounted", wtw_t[cur] - wtw_t[cand]))
    abatement_t = float(ab.get("tonnes_location", avoided))
    flows = None
    if plan:
        from tco.plan import option_flows
        flows = option_flows(inputs, cf, tot)
    return RouteMoney(
        vehicle=e.row.vehicle, present_value=pv, levelized_cost=lc, difference=diff,
        simple_payback=comp.simple_payback_year, irr=comp.irr, yearly_cost=yc,
        yearly_emissions=wtw, avoided_t=avoided,
        abatement_cost=ab.get("cost_per_tonne_location"), abatement_t=abatement_t,
        ttw_t=ttw_t, wtw_t=wtw_t,
        plan_flows=flows)


# --------------------------------------------------------------------------- the fleet
@dataclass
class FleetResult:
    """Everything the fleet writers need (plain data and pandas objects).

    Attributes
    ----------
    base : LoadedScenario
    fleet_file : Path
    rule : str
        Depot charging rule (:mod:`tco.depot`).
    routes : pandas.DataFrame
        One row per vehicle: route, trucks, distance, energy, feasibility, depot share,
        present values, difference, payback, IRR, emissions, abatement cost, order.
    order : pandas.DataFrame
        Electrification order with the depot's chargers and peak as routes are added.
    yearly : pandas.DataFrame
        Fleet totals per year: cost and well-to-wheel emissions as-is and with the plan,
        chargers and peak power of the plan.
    depot_all, depot_plan : DepotSchedule
        Depot schedule with every candidate, and with the plan's candidates only.
    depot_all_vehicles, depot_plan_vehicles : list of str
        The vehicle of each truck row of those schedules, in order.
    plan : list of str
        Vehicles the plan electrifies (feasible routes).
    energies, money : list
        Per-row :class:`RouteEnergy` and :class:`RouteMoney` (plan shares).
    warnings : list of str
    """

    base: LoadedScenario
    fleet_file: Path
    rule: str
    routes: pd.DataFrame
    order: pd.DataFrame
    yearly: pd.DataFrame
    depot_all: depot_model.DepotSchedule
    depot_plan: depot_model.DepotSchedule
    plan: list
    depot_all_vehicles: list = field(default_factory=list)
    depot_plan_vehicles: list = field(default_factory=list)
    energies: list = field(repr=False, default_factory=list)
    money: list = field(repr=False, default_factory=list)
    warnings: list = field(default_factory=list)
    timings: dict = field(default_factory=dict)
    transition: object = None  # tco.plan.FleetPlan when plan settings were given

    @property
    def currency(self) -> str:
        return self.base.scenario.study.currency

    @property
    def plan_saving(self) -> float:
        """Present-value saving of the plan: the sum over its routes. [currency]"""
        return float(sum(self.routes.loc[self.routes["in_plan"], "saving"].tolist()))

    @property
    def plan_avoided_t(self) -> float:
        """Well-to-wheel tonnes avoided by the plan over the period: the sum over its
        routes. [t CO2e]"""
        return float(sum(self.routes.loc[self.routes["in_plan"], "avoided_t"].tolist()))

    @property
    def plan_abatement_t(self) -> float:
        """Tonnes the plan's abatement cost divides by: discounted tonnes when the scenario
        discounts them (the default), else :attr:`plan_avoided_t`. [t CO2e]"""
        return float(sum(self.routes.loc[self.routes["in_plan"], "abatement_t"].tolist()))


def _depot_inputs(energies: list[RouteEnergy], base: LoadedScenario, vehicles: set[str]):
    """Arrival, departure and nightly depot energy of the candidates in ``vehicles``."""
    dep = base.scenario.depot
    idx, arrive, depart, need = [], [], [], []
    for k, e in enumerate(energies):
        if e.row.vehicle not in vehicles:
            continue
        op = e.operations[1]
        if op.powertrain != "electric" or op.grid_energy_depot <= 0:
            continue
        idx.append(k)
        arrive.append(e.row.arrive if e.row.arrive is not None
                      else dep.charging_start_hour * 3600.0)
        depart.append(e.row.depart if e.row.depart is not None
                      else dep.charging_end_hour * 3600.0)
        need.append(op.grid_energy_depot / op.operating_days)
    return idx, np.array(arrive), np.array(depart), np.array(need)


def _schedule(energies, base, vehicles, rule):
    dep = base.scenario.depot
    if dep.charger_power <= 0:
        raise InputError("a fleet needs the depot's charger power", file=base.path,
                         where="depot.charger_power")
    idx, a, d, need = _depot_inputs(energies, base, vehicles)
    return idx, depot_model.schedule(a, d, need, dep.charger_power, rule=rule)


def _cycle_samples(base: LoadedScenario, row: FleetRow, fleet_file: Path) -> float:
    """An estimate of the samples of a row's trip, before it is built: a TOML cycle's
    synthetic legs and dwells (:func:`tco.budget.trip_samples`); a trace file counts as the
    trip budget, the most it may take when read. [-]"""
    from tco import budget

    if row.cycle.suffix.lower() != ".toml":
        # a logged trace: one sample a line (a GPX point takes a line or more), taken as
        # 1 s apart (common practice: logged at 1 Hz) and resampled to the time step
        with row.cycle.open("rb") as fh:
            lines = sum(chunk.count(b"\n") for chunk in iter(lambda: fh.read(1 << 20), b""))
        per_line = max(1.0, 1.0 / base.scenario.route.time_step)
        return min(lines * per_line, float(budget.MAX_TRIP_SAMPLES))
    raw = row_scenario(base, row, fleet_file)
    s = parse_scenario(raw, row.cycle)
    if any(leg.file for leg in s.route.legs):
        return float(budget.MAX_TRIP_SAMPLES)
    return min(budget.trip_samples(s)[0], float(budget.MAX_TRIP_SAMPLES))


def check_fleet_memory(base: LoadedScenario, rows: list[FleetRow], fleet_file: Path,
                       jobs: int) -> int:
    """The workers a fleet may use within :data:`tco.budget.MAX_RUN_BYTES`, worked out
    before any row is simulated: the results every row keeps, and the trips the workers
    build at once (each distinct cycle estimated once, :func:`_cycle_samples`; the largest
    counts for every worker).

    Returns
    -------
    int
        At most ``jobs``, at least 1.

    Raises
    ------
    InputError
        The fleet does not fit even one worker: one line naming the size, the limit and
        what to change.
    """
    from tco import budget

    if len(rows) > budget.MAX_FLEET_ROWS:
        largest = 0.0
    else:
        seen: dict[Path, float] = {}
        for row in rows:
            if row.cycle not in seen:
                try:
                    seen[row.cycle] = _cycle_samples(base, row, fleet_file)
                except InputError:
                    seen[row.cycle] = 0.0  # reported with its row when the row is run
        largest = max(seen.values(), default=0.0)
    problem = budget.fleet_problem(len(rows), largest)
    if problem:
        raise InputError(problem, file=fleet_file)
    return budget.fleet_workers(len(rows), jobs, largest)


def evaluate_fleet(base: LoadedScenario, rows: list[FleetRow], fleet_file: Path,
                   rule: str | None = None, jobs: int | None = None, progress=None,
                   plan=None, plan_file: Path | None = None) -> FleetResult:
    """Evaluate a fleet: energy per row, shared depot, money and emissions, the order.

    Parameters
    ----------
    base : LoadedScenario
        The base scenario (trucks, finance, prices, depot, emissions).
    rows : list of FleetRow
        From :func:`read_fleet`.
    fleet_file : Path
        The fleet file (named in errors).
    rule : {"managed", "unmanaged", "spread", "first_come"}, optional
        Depot charging rule (managed is ``spread``, unmanaged ``first_come``); default the
        base scenario's ``[depot] charging``.
    jobs : int, optional
        Processes for the energy simulation (default: every core).
    progress : tco.progress.Steps, optional
    plan : tco.plan.PlanSettings, optional
        Work out the transition plan (:func:`tco.plan.plan_fleet`) with these settings.
    plan_file : Path, optional
        The file the settings came from (named in errors).

    Returns
    -------
    FleetResult
    """
    from tco.progress import Silent

    steps = progress or Silent()
    timings = {}
    rule = depot_model.rule_name(rule or base.scenario.depot.charging)
    jobs = jobs or os.cpu_count() or 1
    jobs = check_fleet_memory(base, rows, fleet_file, jobs)
    pool = _pool(jobs, len(rows))
    try:
        return _evaluate(base, rows, fleet_file, rule, pool, jobs, steps, timings, plan,
                         plan_file)
    finally:
        if pool is not None:
            pool.shutdown(cancel_futures=True)


def _evaluate(base, rows, fleet_file, rule, pool, jobs, steps, timings, plan_settings=None,
              plan_file=None) -> FleetResult:
    import time

    t0 = time.perf_counter()
    advance = steps.bar(len(rows), "energy of each route")
    energies = _map(_row_energy, [(base, r, fleet_file) for r in rows], pool, jobs, advance)
    timings["energy"] = time.perf_counter() - t0

    steps.start("sharing the depot")
    t0 = time.perf_counter()
    everyone = {e.row.vehicle for e in energies}
    idx_all, sched_all = _schedule(energies, base, everyone, rule)
    short_all = {idx_all[j]: float(sched_all.shortfall[j]) for j in range(len(idx_all))}
    status = [route_status(e, short_all.get(k, 0.0)) for k, e in enumerate(energies)]
    plan = [e.row.vehicle for e, st in zip(energies, status) if st["feasible"]]
    idx_plan, sched_plan = _schedule(energies, base, set(plan), rule)
    timings["depot"] = time.perf_counter() - t0

    steps.start("cash flows and emissions of each route")
    t0 = time.perf_counter()
    pos_all = {k: j for j, k in enumerate(idx_all)}
    pos_plan = {k: j for j, k in enumerate(idx_plan)}
    work = []
    for k, e in enumerate(energies):
        if k in pos_plan:  # in the plan: its share of the plan's depot
            ops = _with_depot(e.operations, 1, sched_plan, pos_plan[k])
            work.append((e, base, ops, sched_plan.chargers, len(idx_plan),
                         plan_settings is not None))
        else:  # outside it: as if every candidate went electric
            ops = _with_depot(e.operations, 1, sched_all, pos_all.get(k))
            work.append((e, base, ops, sched_all.chargers, len(idx_all),
                         plan_settings is not None))
    money = _map(_route_money_task, work, pool, jobs)
    timings["money"] = time.perf_counter() - t0

    routes = _routes_table(energies, status, money, sched_all, sched_plan, pos_all, pos_plan)
    order = _order(routes, energies, base, rule)
    yearly = _yearly(energies, money, set(plan), sched_plan, base)
    from tco.scenario.base import unusual_values

    warnings = [f"base scenario: {w}" for w in unusual_values(base.scenario)]
    warnings += column_warnings([e.row for e in energies], base.scenario.study.currency)
    warnings += [f"{e.row.vehicle}: {w}" for e in energies for w in e.warnings]
    transition = None
    if plan_settings is not None:
        from tco.plan import plan_fleet

        steps.start("transition plan (mixed-integer programme)")
        t0 = time.perf_counter()
        transition = plan_fleet(base, energies, money, routes, sched_plan,
                                [energies[k].row.vehicle for k in idx_plan], plan_settings,
                                where=plan_file)
        transition = settle_depot(
            transition, lambda coeffs: plan_fleet(
                base, energies, money, routes, sched_plan,
                [energies[k].row.vehicle for k in idx_plan], plan_settings,
                where=plan_file, depot_override=coeffs),
            lambda vehicles: _schedule(energies, base, vehicles, rule),
            [e.row.vehicle for e in energies])
        timings["plan"] = time.perf_counter() - t0
    return FleetResult(base=base, fleet_file=Path(fleet_file), rule=rule, routes=routes,
                       order=order, yearly=yearly, depot_all=sched_all,
                       depot_plan=sched_plan, plan=plan,
                       depot_all_vehicles=[energies[k].row.vehicle for k in idx_all],
                       depot_plan_vehicles=[energies[k].row.vehicle for k in idx_plan],
                       energies=energies,
                       money=money, warnings=warnings, timings=timings,
                       transition=transition)


#: Solves of the transition plan with its depot coefficients re-derived (first solve
#: included) before the plan is kept as it is and said to be unsettled.
DEPOT_ROUNDS = 4
#: The re-derived depot peak may exceed the plan's by this share before it is flagged. [-]
PEAK_TOLERANCE = 0.01


def settle_depot(transition, resolve, schedule_of, vehicles: list[str]):
    """Re-derive the plan's depot from its own trucks, and re-solve until it is stable.

    The programme adds each electric truck's charger need and peak contribution linearly;
    both come from a depot schedule (:func:`tco.depot.schedule`). The first solve takes
    them from the schedule of every feasible route. Here the depot schedule is re-run on
    the trucks the plan makes electric (those in service by its last year); their
    coefficients replace the old ones and the programme is solved again, until the plan
    makes the same trucks electric with the coefficients it was solved with, or
    :data:`DEPOT_ROUNDS` solves. Then the schedule is run for the electric trucks of
    every year, and the chargers and coincident peak it needs are set beside the plan's
    (``chargers_rederived``, ``depot_peak_rederived_kw`` in ``transition.yearly``); a year
    where the schedule needs more chargers than the plan buys, or a peak more than
    :data:`PEAK_TOLERANCE` above the plan's, is named in the notes.

    Parameters
    ----------
    transition : tco.plan.FleetPlan
    resolve : callable
        ``resolve(coefficients) -> FleetPlan``: the plan solved with ``{vehicle: (charger
        need, peak kW)}``.
    schedule_of : callable
        ``schedule_of(set of vehicles) -> (row indices, DepotSchedule)``.
    vehicles : list of str
        The vehicle of each fleet row (row index -> vehicle).

    Returns
    -------
    tco.plan.FleetPlan
    """
    def electric_by_year(tp):
        sched = tp.schedule
        years = tp.yearly["calendar_year"].tolist()
        bought = {r["vehicle"]: r["purchase_year"] for r in sched.to_dict("records")
                  if r["decision"] == "electric"}
        return [frozenset(v for v, y in bought.items() if y <= yr) for yr in years]

    def coefficients(chosen):
        idx, sch = schedule_of(set(chosen))
        return {vehicles[k]: (float(sch.cost_share[j]) * sch.chargers,
                              float(sch.peak_contribution[j]) / 1000.0)
                for j, k in enumerate(idx)}, sch

    coeffs: dict = {}
    rounds, converged = 1, True
    while True:
        final = electric_by_year(transition)[-1]
        if not final:
            break
        new, _ = coefficients(final)
        pb = transition.problem
        pos = {v: i for i, v in enumerate(pb.vehicles)}
        used = {v: (float(pb.charger_need[pos[v]]), float(pb.peak[pos[v]])) for v in new}
        if all(np.allclose(used[v], new[v], rtol=1e-9, atol=1e-9) for v in new):
            break
        if rounds >= DEPOT_ROUNDS:
            converged = False
            break
        coeffs.update(new)
        transition = resolve(dict(coeffs))
        rounds += 1
    transition.depot_rounds, transition.depot_converged = rounds, converged

    sets = electric_by_year(transition)
    y = transition.yearly
    memo: dict = {}
    chargers, peak = [], []
    for chosen in sets:
        if chosen not in memo:
            memo[chosen] = (0, 0.0) if not chosen else (
                lambda sch: (int(sch.chargers), float(sch.peak_power) / 1000.0))(
                    coefficients(chosen)[1])
        chargers.append(memo[chosen][0])
        peak.append(memo[chosen][1])
    y["chargers_rederived"] = chargers
    y["depot_peak_rederived_kw"] = peak
    short = [(int(r.calendar_year), int(r.chargers_rederived), int(r.chargers))
             for r in y.itertuples() if r.chargers_rederived > r.chargers]
    over = [(int(r.calendar_year), r.depot_peak_rederived_kw, r.depot_peak_kw)
            for r in y.itertuples()
            if r.depot_peak_rederived_kw > r.depot_peak_kw * (1 + PEAK_TOLERANCE) + 1e-6]
    grid = [(int(r.calendar_year), r.depot_peak_rederived_kw, r.grid_capacity_kw)
            for r in y.itertuples() if r.grid_capacity_kw is not None
            and r.depot_peak_rederived_kw > r.grid_capacity_kw + 1e-6]
    notes = transition.notes
    how = (f"settled after {rounds} solve(s)" if converged else
           f"not settled after {rounds} solves (the trucks chosen kept changing); the last "
           "plan is kept")
    notes.append("Depot: each electric truck's charger need and peak are its shares in a "
                 "depot schedule (tco.depot), added linearly in the programme; they were "
                 "re-derived from the schedule of the plan's own electric trucks and the plan "
                 f"re-solved, {how}. The schedule re-run on each year's electric trucks "
                 + ("agrees with the plan's chargers and peak in every year."
                    if not (short or over or grid) else "disagrees with the plan:"))
    for yr, need, have in short:
        notes.append(f"{yr}: the depot schedule needs {need} chargers, the plan buys {have}.")
    for yr, kw, plan_kw in over:
        notes.append(f"{yr}: the depot schedule peaks at {fm.kw(kw * 1e3)}, the plan counts "
                     f"{fm.kw(plan_kw * 1e3)}.")
    for yr, kw, cap in grid:
        notes.append(f"{yr}: the depot schedule's peak of {fm.kw(kw * 1e3)} is over the grid "
                     f"capacity of {fm.kw(cap * 1e3)}.")
    return transition


def _routes_table(energies, status, money, sched_all, sched_plan, pos_all, pos_plan):
    recs = []
    for k, (e, st, m) in enumerate(zip(energies, status, money)):
        cur, cand = e.row.current, e.row.candidate
        op_c, op_e = e.operations
        in_plan = k in pos_plan
        sch, j = (sched_plan, pos_plan[k]) if in_plan else (sched_all, pos_all.get(k))
        recs.append({
            "vehicle": e.row.vehicle, "route": e.row.route, "current": cur,
            "candidate": cand, "annual_distance_m": op_e.distance,
            "trips_per_day": e.trips_per_day, "trip_distance_m": e.trip_distance,
            "payload_distance_kgm": op_c.payload_distance,
            "diesel_m3": op_c.diesel_volume if op_c.powertrain == "diesel" else 0.0,
            "grid_energy_J": op_e.grid_energy_depot + op_e.grid_energy_public,
            "depot_energy_per_day_J": op_e.grid_energy_depot / op_e.operating_days
            if op_e.operating_days else 0.0,
            "status": st["status"], "feasible": st["feasible"],
            "remedies": "; ".join(st["remedies"]), "soc_min": st["soc_min"],
            "in_plan": in_plan,
            "depot_cost_share": float(sch.cost_share[j]) if j is not None else 0.0,
            "peak_contribution_W": float(sch.peak_contribution[j]) if j is not None else 0.0,
            "pv_current": m.present_value[cur], "pv_candidate": m.present_value[cand],
            "pv_difference": m.difference,
            "saving": -m.difference,
            "levelized_current_per_m": m.levelized_cost[cur],
            "levelized_candidate_per_m": m.levelized_cost[cand],
            "simple_payback_year": m.simple_payback, "irr": m.irr,
            "wtw_current_t": m.wtw_t[cur], "wtw_candidate_t": m.wtw_t[cand],
            "ttw_current_t": m.ttw_t[cur], "ttw_candidate_t": m.ttw_t[cand],
            "avoided_t": m.avoided_t, "abatement_cost_per_t": m.abatement_cost,
            "abatement_t": m.abatement_t,
        })
    df = pd.DataFrame.from_records(recs)
    return df


def _order(routes: pd.DataFrame, energies, base, rule) -> pd.DataFrame:
    """Electrification order: feasible routes first, then by saving (largest first); the
    rank by abatement cost is given beside it, with the depot's needs as routes are
    added (exact up to 200 routes, then at 20 evenly spaced steps)."""
    df = routes.copy()
    df["_feas"] = (~df["feasible"]).astype(int)
    df = df.sort_values(["_feas", "saving", "vehicle"], ascending=[True, False, True],
                        kind="mergesort").reset_index(drop=True)
    df["rank_by_saving"] = np.arange(1, len(df) + 1)
    ab = df["abatement_cost_per_t"].astype(float).fillna(np.inf)
    by_ab = df.assign(_ab=ab).sort_values(["_feas", "_ab", "vehicle"], kind="mergesort")
    rank_ab = {v: i + 1 for i, v in enumerate(by_ab["vehicle"])}
    df["rank_by_abatement"] = df["vehicle"].map(rank_ab)
    df["cumulative_saving"] = df["saving"].cumsum()
    df["cumulative_avoided_t"] = df["avoided_t"].cumsum()
    n = len(df)
    steps = list(range(1, n + 1)) if n <= 200 else sorted(
        {int(round(x)) for x in np.linspace(1, n, 20)})
    chargers = np.full(n, np.nan)
    peak = np.full(n, np.nan)
    for m in steps:
        _, sch = _schedule(energies, base, set(df["vehicle"].iloc[:m]), rule)
        chargers[m - 1] = sch.chargers
        peak[m - 1] = sch.peak_power
    df["chargers_after"] = chargers
    df["peak_after_W"] = peak
    cols = ["rank_by_saving", "rank_by_abatement", "vehicle", "route", "status", "saving",
            "avoided_t", "abatement_cost_per_t", "cumulative_saving", "cumulative_avoided_t",
            "chargers_after", "peak_after_W", "remedies"]
    return df[cols]


def _yearly(energies, money, plan, sched_plan, base) -> pd.DataFrame:
    """Fleet totals per year: as-is (every current truck) and the plan."""
    years = None
    as_is_c = as_is_e = plan_c = plan_e = None
    for e, m in zip(energies, money):
        cur, cand = e.row.current, e.row.candidate
        take = cand if e.row.vehicle in plan else cur
        c = m.yearly_cost.pivot(index="year", columns="truck", values="amount").fillna(0.0)
        em = m.yearly_emissions.pivot(index="year", columns="truck",
                                      values="kg_co2e").fillna(0.0)
        if years is None:
            years = c.index
            as_is_c = np.zeros(len(c)); plan_c = np.zeros(len(c))
            as_is_e = np.zeros(len(c)); plan_e = np.zeros(len(c))
        as_is_c += c[cur].to_numpy()
        plan_c += c[take].to_numpy()
        emi = em.reindex(years).fillna(0.0)
        as_is_e += emi[cur].to_numpy()
        plan_e += emi[take].to_numpy()
    first = base.scenario.study.start_year
    df = pd.DataFrame({
        "year": years, "calendar_year": [first + y - 1 if y > 0 else first - 1
                                         for y in years],
        "cost_as_is": as_is_c, "cost_plan": plan_c, "saving": as_is_c - plan_c,
        "wtw_as_is_kg": as_is_e, "wtw_plan_kg": plan_e, "avoided_kg": as_is_e - plan_e,
        "chargers": [sched_plan.chargers] * len(years),  # installed in year 0, all years
        "peak_power_W": [sched_plan.peak_power] * len(years),
        "electric_trucks": [len(plan)] * len(years),
    })
    return df
