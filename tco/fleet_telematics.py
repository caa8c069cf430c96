"""Logged duty for a fleet: ``tco telematics`` output as the vehicles' duty in ``tco fleet``.

``tco fleet --telematics FOLDER`` reads ``FOLDER/vehicle_days.csv`` (written by
``tco telematics``: one row per vehicle, UTC day and scenario truck) and, for every fleet
row whose ``vehicle`` id was logged, replaces the row's duty by the logs:

* **distance**: the mean logged distance per day × the row's operating days a year (the
  row's ``days_per_year``, else its cycle's, else the base scenario's), through the row's
  ``annual_distance``, which sets its trips per day;
* **energy**: each truck's diesel, battery and grid energy per distance as logged (the
  simulated year of the row's cycle is rescaled to the logged figures per metre, so the
  cost lines, emissions and the depot's nightly energy follow the logs);
* **depot dwell**: the logged first departure and last arrival of each day (clock
  times, UTC as logged, see :func:`tco.telematics.dwell_window`), averaged on the clock
  (a circular mean, so 23:30 and 00:30 average to midnight), become the row's ``depart``
  and ``arrive`` where the row gives none; the depot schedule then charges each truck
  in its logged dwell window. Logs without those columns (older ``tco telematics``
  output): the truck is taken back at the depot after its mean logged span of the day
  (driving time plus parked gaps) from its departure (the row's ``depart``, or the base
  depot's charging end hour).

Rows whose vehicle has no logs keep their cycle; a row whose vehicle was logged without
one of its two trucks is an input error (run ``tco telematics`` with the same base
scenario). The cycle file still gives the route's shape (speeds, grades) for the
feasibility checks of a day, which use the simulated day, not the logged worst day.
"""
from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pandas as pd

from tco.errors import InputError
from tco.report import formatting as fm

__all__ = ["apply_logged_duty", "clock_mean", "read_logged_duty", "rescale_operation"]

_DAY_S = 86_400.0
_M_PER_KM = 1000.0
_M3_PER_L = 1e-3
from tco.units import J_PER_KWH as _J_PER_KWH  # noqa: E402
#: vehicle_days.csv header -> (SI name, factor to SI)
_COLUMNS = {
    "vehicle": ("vehicle", None), "truck": ("truck", None), "day (UTC)": ("day", None),
    "distance [km]": ("distance_m", _M_PER_KM), "duration [h]": ("duration_s", 3600.0),
    "gap time [h]": ("gap_time_s", 3600.0), "diesel [L]": ("diesel_m3", _M3_PER_L),
    "battery energy [kWh]": ("battery_J", _J_PER_KWH),
    "grid energy [kWh]": ("grid_J", _J_PER_KWH),
}
#: The most a logged vehicle-day can hold, per column in its written unit: a day is 24 h,
#: and 24 h at 200 km/h (the fastest recorded speed accepted, tco.dutycycle) is 4,800 km;
#: fuel and energy allow 1 L or 4 kWh a km over that distance, several times what a heavy
#: truck uses (common practice: about 0.3–0.4 L or 1.1–1.5 kWh a km). Above: refused.
DAY_LIMITS = {"distance [km]": 4_800.0, "duration [h]": 24.0, "gap time [h]": 24.0,
              "diesel [L]": 4_800.0, "battery energy [kWh]": 19_200.0,
              "grid energy [kWh]": 19_200.0}
#: Largest vehicle_days.csv read (it is read whole): about 4 million vehicle-days of
#: about 120 bytes a line. [bytes]
MAX_LOG_BYTES = 512 * 2**20
#: Optional columns (written by tco telematics since the dwell window was added).
_OPTIONAL = {
    "first departure [h after 00:00 UTC]": ("depart_s", 3600.0),
    "last arrival [h after 00:00 UTC]": ("arrive_s", 3600.0),
}


def clock_mean(seconds) -> float:
    r"""Mean of clock times on the 24-hour circle (NaN values left out; NaN when none).

    .. math:: \bar t = \frac{D}{2\pi} \operatorname{atan2}\Big(\sum \sin\frac{2\pi
       t_i}{D}, \sum \cos\frac{2\pi t_i}{D}\Big) \bmod D, \quad D = 86\,400 s

    The circular mean (Fisher, *Statistical Analysis of Circular Data*, 1993, §2.2; from
    memory). [s after midnight]
    """
    t = np.asarray(seconds, dtype=float)
    t = t[np.isfinite(t)]
    if t.size == 0:
        return math.nan
    a = 2 * math.pi * t / _DAY_S
    m = math.atan2(float(np.sin(a).sum()), float(np.cos(a).sum()))
    out = round(m / (2 * math.pi) * _DAY_S, 6) % _DAY_S  # to the microsecond
    return float(out if out < _DAY_S else 0.0)


def read_logged_duty(folder) -> pd.DataFrame:
    """Per vehicle and truck, the logged duty from ``tco telematics`` output.

    Parameters
    ----------
    folder : str or Path
        The output folder of ``tco telematics`` (with ``vehicle_days.csv``), or that file.

    Returns
    -------
    pandas.DataFrame
        ``vehicle, truck, days, distance_per_day_m`` [m], ``span_s`` (mean logged span of
        a day: driving plus parked gaps) [s], ``diesel_per_m`` [m³/m], ``battery_per_m``,
        ``grid_per_m`` [J/m], ``depart_s`` and ``arrive_s`` (the clock mean of the
        logged first departures and last arrivals; NaN when the logs do not give them)
        [s after midnight].

    Raises
    ------
    InputError
        Missing file or column, a value that is not a number ≥ 0.
    """
    path = Path(folder)
    f = path / "vehicle_days.csv" if path.is_dir() else path
    if not f.is_file():
        raise InputError("no vehicle_days.csv here (give the folder tco telematics wrote)",
                         file=f)
    size = f.stat().st_size
    if size > MAX_LOG_BYTES:  # before reading: the table is read whole
        raise InputError(f"is {fm.data_size(size)}; the limit is {fm.data_size(MAX_LOG_BYTES)} "
                         "(about 4 million vehicle-days): give fewer days or vehicles",
                         file=f)
    try:
        df = pd.read_csv(f, dtype={"vehicle": str, "truck": str})
    except (pd.errors.ParserError, UnicodeDecodeError, pd.errors.EmptyDataError) as exc:
        raise InputError(f"cannot read the table ({type(exc).__name__})", file=f) from None
    missing = [c for c in _COLUMNS if c not in df.columns]
    if missing:
        raise InputError(f"missing column '{missing[0]}'", file=f, where="header")
    out = pd.DataFrame()
    columns = dict(_COLUMNS)
    columns.update({h: v for h, v in _OPTIONAL.items() if h in df.columns})
    for head, (name, factor) in columns.items():
        col = df[head]
        if factor is None:
            out[name] = col.astype(str)
            continue
        x = pd.to_numeric(col, errors="coerce").fillna(0.0 if name in
                                                       ("diesel_m3", "battery_J", "grid_J",
                                                        "gap_time_s") else np.nan)
        if name in ("depart_s", "arrive_s"):  # blank: a day without moving samples
            bad = (x < 0) | (x > 24) | (~np.isfinite(x) & col.notna())
        else:
            bad = ~np.isfinite(x) | (x < 0)
        if bad.any():
            k = int(np.flatnonzero(bad.to_numpy())[0])
            raise InputError(f"'{col.iloc[k]}' is not a number ≥ 0", file=f,
                             where=f"row {k + 2}, {head}")
        if head in DAY_LIMITS and (x > DAY_LIMITS[head]).any():
            k = int(np.flatnonzero((x > DAY_LIMITS[head]).to_numpy())[0])
            raise InputError(f"{fm.plain(x.iloc[k])} is more than one vehicle-day can hold "
                             f"(at most {fm.plain(DAY_LIMITS[head])})", file=f,
                             where=f"row {k + 2}, {head}")
        out[name] = x * factor
    g = out.groupby(["vehicle", "truck"], sort=False)
    agg = g.agg(days=("day", "nunique"), distance=("distance_m", "sum"),
                duration=("duration_s", "sum"), gaps=("gap_time_s", "sum"),
                diesel=("diesel_m3", "sum"), battery=("battery_J", "sum"),
                grid=("grid_J", "sum")).reset_index()
    with np.errstate(invalid="ignore", divide="ignore"):
        res = pd.DataFrame({
            "vehicle": agg["vehicle"], "truck": agg["truck"], "days": agg["days"],
            "distance_per_day_m": agg["distance"] / agg["days"],
            "span_s": (agg["duration"] + agg["gaps"]) / agg["days"],
            "diesel_per_m": agg["diesel"] / agg["distance"],
            "battery_per_m": agg["battery"] / agg["distance"],
            "grid_per_m": agg["grid"] / agg["distance"],
        })
    for name in ("depart_s", "arrive_s"):
        res[name] = (g[name].agg(clock_mean).reset_index(drop=True) if name in out
                     else np.nan)
    return res


def rescale_operation(op, logged: dict):
    """An :class:`~tco.operation.AnnualOperation` with its energy per distance set to the
    logged figures (``diesel_per_m`` [m³/m], ``battery_per_m``, ``grid_per_m`` [J/m]);
    exhaust fluid follows diesel, public charging follows the grid in proportion."""
    d = op.distance
    if d <= 0:
        return op
    upd = {}
    if op.diesel_volume > 0 and math.isfinite(logged.get("diesel_per_m", math.nan)):
        k = logged["diesel_per_m"] * d / op.diesel_volume
        upd.update(diesel_volume=op.diesel_volume * k, def_volume=op.def_volume * k)
    grid = op.grid_energy_depot + op.grid_energy_public
    if grid > 0 and math.isfinite(logged.get("grid_per_m", math.nan)):
        k = logged["grid_per_m"] * d / grid
        upd.update(grid_energy_depot=op.grid_energy_depot * k,
                   grid_energy_public=op.grid_energy_public * k)
    if op.battery_energy > 0 and math.isfinite(logged.get("battery_per_m", math.nan)):
        upd.update(battery_energy=logged["battery_per_m"] * d)
    return dataclasses.replace(op, **upd) if upd else op


def apply_logged_duty(rows: list, logged: pd.DataFrame, base, source=None) -> tuple[list, list]:
    """Fleet rows with the logged duty of their vehicles.

    Parameters
    ----------
    rows : list of tco.fleet.FleetRow
    logged : pandas.DataFrame
        From :func:`read_logged_duty`.
    base : LoadedScenario
        The base scenario (operating days, the depot's default departure hour).
    source : path, optional
        The telematics file, named in errors.

    Returns
    -------
    rows : list of FleetRow
        With ``annual_distance``, ``depart`` and ``arrive`` (when not given) and
        ``logged`` set for the
        vehicles that were logged.
    notes : list of str
        One line per row: logged or not.
    """
    by = {(v, t): r for v, t, r in zip(logged["vehicle"], logged["truck"],
                                      logged.to_dict("records"))}
    vehicles = set(logged["vehicle"])
    out, notes = [], []
    dep = base.scenario.depot
    units = base.scenario.study.units
    for row in rows:
        if row.vehicle not in vehicles:
            out.append(row)
            notes.append(f"{row.vehicle}: no logs; its cycle is used")
            continue
        recs = {}
        for col in ("current", "candidate"):
            truck = getattr(row, col)
            r = by.get((row.vehicle, truck))
            if r is None:
                raise InputError(f"vehicle '{row.vehicle}' was logged without truck '{truck}' "
                                 "(run tco telematics with the same base scenario)",
                                 file=source, where=f"vehicle {row.vehicle}")
            recs[truck] = r
        cur = recs[row.current]
        if not cur["distance_per_day_m"] > 0:
            raise InputError(f"vehicle '{row.vehicle}' has no logged distance", file=source,
                             where=f"vehicle {row.vehicle}")
        days = row.days_per_year or _cycle_days(row) or base.scenario.route.days_per_year
        upd = {"annual_distance": float(cur["distance_per_day_m"] * days),
               "logged": tuple((t, k, float(r[k])) for t, r in recs.items()
                               for k in ("diesel_per_m", "battery_per_m", "grid_per_m")
                               if math.isfinite(float(r[k])))}
        if row.depart is None and math.isfinite(cur.get("depart_s", math.nan)):
            upd["depart"] = float(cur["depart_s"])
        if row.arrive is None and math.isfinite(cur.get("arrive_s", math.nan)):
            upd["arrive"] = float(cur["arrive_s"])
        elif row.arrive is None:
            depart = upd.get("depart", row.depart)
            depart = depart if depart is not None else dep.charging_end_hour * 3600.0
            upd["arrive"] = float((depart + cur["span_s"]) % _DAY_S)
        out.append(dataclasses.replace(row, **upd))
        notes.append(f"{row.vehicle}: logged duty of {fm.count(cur['days'])} day(s), "
                     f"{fm.quantity(cur['distance_per_day_m'], 'km', units, 1)} a day")
    return out, notes


def _cycle_days(row) -> float | None:
    """Operating days a year of the row's cycle scenario, if it says. [1/yr]"""
    from tco.fleet import _cycle_route

    days = _cycle_route(row).get("days_per_year")
    return float(days) if isinstance(days, (int, float)) and days > 0 else None


def logged_for(row, truck: str) -> dict:
    """The logged figures of one truck of a row (empty when none)."""
    return {k: v for t, k, v in (row.logged or ()) if t == truck}
