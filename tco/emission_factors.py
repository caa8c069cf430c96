"""Emission-factor tables and hourly grid-intensity profiles: the input data of
:mod:`tco.emissions`, read and checked here (no model).

Scenario sections (:mod:`tco.scenario.emissions`) check set names and profiles against
this module; the emissions model imports it too, so input descriptions never import the
model.

Each shipped table is a CSV in ``tco/data`` named after its source (format in
``tco/data/README.md``).
"""
from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pandas as pd

from tco.report import formatting as fm
from tco.errors import InputError
from tco.units import Q_

__all__ = [
    "DATA_DIR", "SHIPPED_TABLES", "UPSTREAM_FALLBACK_SET", "REQUIRED_COLUMNS",
    "OPTIONAL_COLUMNS", "QUANTITIES", "load_factor_table", "factor_table", "diesel_sets",
    "gwp_sets", "hourly_profile_24",
]

#: Folder of the shipped factor tables (package data).
DATA_DIR = Path(__file__).with_name("data")
#: The shipped emission factor tables (other models keep their own tables in the folder).
SHIPPED_TABLES = ("desnz_2025.csv", "us_epa_ghg_hub_2025.csv", "ipcc_2006_guidelines.csv",
                  "en_16258_2012.csv", "ipcc_gwp.csv")

#: The set whose well-to-tank figure is used when the chosen diesel set has none.
UPSTREAM_FALLBACK_SET = "desnz_2025"


# --------------------------------------------------------------------------- factor tables
REQUIRED_COLUMNS = ("set", "quantity", "value", "unit", "source", "year")
OPTIONAL_COLUMNS = ("status", "note")

# bases by pint dimensionality of the SI unit
_BASES = {
    "[mass] / [length] ** 3": "volume",
    "[time] ** 2 / [length] ** 2": "energy",
    "dimensionless": "mass",
    "[mass] / [length]": "distance",
    "[length] ** 2 / [time] ** 2": "specific_energy",
}
_FUEL_BASES = {"volume", "energy", "mass"}
#: Known quantities and the bases each accepts.
QUANTITIES: dict[str, set[str]] = {
    "diesel.co2": _FUEL_BASES,
    "diesel.ch4": _FUEL_BASES | {"distance"},
    "diesel.n2o": _FUEL_BASES | {"distance"},
    "diesel.co2e_ttw": _FUEL_BASES,
    "diesel.co2e_wtw": _FUEL_BASES,
    "diesel.co2e_wtt": _FUEL_BASES,
    "diesel.net_calorific_value": {"specific_energy"},
    "diesel.density": {"volume"},
    "gwp.co2": {"mass"},
    "gwp.ch4": {"mass"},
    "gwp.n2o": {"mass"},
}
#: Hard limits on a factor, in SI per basis: a value outside is not a factor of this kind
#: (a typing slip or a unit mix-up), so the table is refused. Generous physical bounds,
#: not usual ranges: burning pure carbon gives 44/12 = 3.67 kg CO2 per kg (stoichiometry),
#: and a well-to-wheel figure with upstream losses stays within a few times that, so 10 kg
#: per kg of fuel, 10 kg per litre, 1 kg per MJ (diesel's net calorific value is about
#: 43 MJ/kg, common practice) and 10 g per km of driving; diesel's density is about
#: 0.83 kg/L and its net calorific value about 43 MJ/kg (common practice), bounded here
#: at 0.5–1.2 kg/L and 10–150 MJ/kg; GWP100 of CH4 is 28–30 and of N2O 265–298 in the
#: IPCC AR5/AR6 tables (from memory), bounded at 1–200 and 1–1,000; GWP of CO2 is 1 by
#: definition. Tuples are (low, high) in SI, both allowed.
_EMISSION_LIMITS_SI = {
    "volume": (0.0, 10.0 / 1e-3),          # kg/m³ (10 kg/L)
    "energy": (0.0, 1.0 / 1e6),            # kg/J (1 kg/MJ)
    "mass": (0.0, 10.0),                   # kg/kg
    "distance": (0.0, 10e-3 / 1e3),        # kg/m (10 g/km)
}
_QUANTITY_LIMITS_SI = {
    "diesel.density": (500.0, 1200.0),                 # kg/m³
    "diesel.net_calorific_value": (10e6, 150e6),       # J/kg
    "gwp.co2": (1.0, 1.0),
    "gwp.ch4": (1.0, 200.0),
    "gwp.n2o": (1.0, 1000.0),
}


def _limits(quantity: str, basis: str) -> tuple[float, float]:
    """Hard limits [SI] of a factor table value of ``quantity`` on ``basis``."""
    return _QUANTITY_LIMITS_SI.get(quantity) or _EMISSION_LIMITS_SI[basis]


def _in_unit(value_si: float, scale: float) -> str:
    """A limit [SI] written in the row's own unit, to six significant digits (the unit's
    scale can leave a last-bit remainder such as 10.000000000000002)."""
    return fm.plain(value_si / scale, significant=6)


_SET_NAME = re.compile(r"^[A-Za-z0-9_.\-]+$")
_GAS_WORDS = re.compile(r"\b(CO2e|CO2|CH4|N2O)\b", re.IGNORECASE)


def _unit_si(unit: str) -> tuple[float, str]:
    """Scale to SI and basis name of a factor unit; raises ValueError when unreadable."""
    cleaned = _GAS_WORDS.sub("", unit).strip()
    cleaned = re.sub(r"\s+/", "/", re.sub(r"/\s+", "/", cleaned))
    q = Q_(1.0, cleaned if cleaned else "").to_base_units()
    dim = str(q.dimensionality) if str(q.dimensionality) != "dimensionless" else "dimensionless"
    if dim not in _BASES:
        raise ValueError(f"the unit is not a factor unit (dimension {dim})")
    return float(q.magnitude), _BASES[dim]


_CACHE: dict[tuple[str, int, int], pd.DataFrame] = {}


def load_factor_table(path: str | Path) -> pd.DataFrame:
    """Read and check one factor table.

    Parameters
    ----------
    path : str or Path
        A CSV file in the format of ``tco/data/README.md``.

    Returns
    -------
    pandas.DataFrame
        One row per factor with the file's columns plus ``value_si`` (value in SI units),
        ``basis`` (``volume``, ``energy``, ``mass``, ``distance``, ``specific_energy``),
        ``file`` and ``row`` (line number in the file, header = 1).

    Raises
    ------
    InputError
        Naming the file and the row (or the set) for any problem.

    Examples
    --------
    >>> t = load_factor_table(DATA_DIR / "ipcc_gwp.csv")
    >>> float(t.query("set == 'ipcc_ar5' and quantity == 'gwp.ch4'").value.iloc[0])
    28.0
    """
    path = Path(path)
    if not path.is_file():
        raise InputError("factor table not found", file=path)
    stat = path.stat()
    key = (str(path.resolve()), stat.st_mtime_ns, stat.st_size)
    if key not in _CACHE:  # settings validation and flat_params read the same files
        _CACHE[key] = _read_factor_table(path)
    return _CACHE[key].copy()


def _read_factor_table(path: Path) -> pd.DataFrame:
    try:
        raw = pd.read_csv(path, dtype=str, keep_default_na=False, skipinitialspace=True)
    except Exception as exc:  # pandas raises several parser errors
        # never quote the parser's message: it can hold a line of the file
        found = re.search(r"line (\d+)", str(exc))
        raise InputError(f"cannot read as CSV ({type(exc).__name__})", file=path,
                         where=f"row {found.group(1)}" if found else None) from None
    raw.columns = [str(c).strip() for c in raw.columns]
    missing = [c for c in REQUIRED_COLUMNS if c not in raw.columns]
    if missing:
        raise InputError(f"missing column(s) {', '.join(missing)}; a factor table needs "
                         f"{', '.join(REQUIRED_COLUMNS)}", file=path, where="header")
    rows = []
    seen: dict[tuple[str, str], int] = {}
    for i, rec in enumerate(raw.to_dict("records")):
        line = i + 2
        where = f"row {line}"
        rec = {k: str(v).strip() for k, v in rec.items()}
        name, quantity = rec["set"], rec["quantity"]
        if not _SET_NAME.match(name):
            raise InputError("a set name must be letters, digits, '_', '-' or '.'",
                             file=path, where=f"{where}, column set")
        if quantity not in QUANTITIES:
            raise InputError(f"unknown quantity (known: {', '.join(QUANTITIES)})",
                             file=path, where=f"{where}, column quantity")
        try:
            value = float(rec["value"])
        except ValueError:
            raise InputError("not a number", file=path,
                             where=f"{where}, column value") from None
        if not math.isfinite(value) or value < 0:
            raise InputError("must be a finite number, zero or more",
                             file=path, where=f"{where}, column value")
        try:
            scale, basis = _unit_si(rec["unit"])
        except Exception as exc:
            msg = str(exc) if isinstance(exc, ValueError) and "factor unit" in str(exc) \
                else "cannot read the unit"
            raise InputError(msg, file=path, where=f"{where}, column unit") from None
        if basis not in QUANTITIES[quantity]:
            raise InputError(f"the unit gives a {basis} basis; {quantity} accepts "
                             f"{', '.join(sorted(QUANTITIES[quantity]))}", file=path,
                             where=f"{where}, column unit")
        if not rec["source"]:
            raise InputError("source is empty; every factor needs a citation", file=path,
                             where=where)
        try:
            year = int(float(rec["year"]))
        except ValueError:
            raise InputError("not a year", file=path,
                             where=f"{where}, column year") from None
        if not 1800 <= year <= 2200:
            raise InputError(f"year {year} is out of range", file=path, where=where)
        key = (name, quantity)
        if key in seen:
            raise InputError(f"{quantity} of set '{name}' is given twice (also row "
                             f"{seen[key]})", file=path, where=where)
        seen[key] = line
        low, high = _limits(quantity, basis)
        if not low <= value * scale <= high:
            unit = f" {rec['unit']}" if rec["unit"] else ""
            if low == high:
                bound = f"{quantity} is {_in_unit(low, scale)}{unit} by definition"
            else:
                bound = (f"{quantity} must lie between {_in_unit(low, scale)} and "
                         f"{_in_unit(high, scale)}{unit}")
            raise InputError(f"{fm.plain(value)}{unit} is not a plausible factor: {bound}"
                             " (check the value and its unit)", file=path,
                             where=f"{where}, column value")
        rows.append({
            "set": name, "quantity": quantity, "value": value, "unit": rec["unit"],
            "source": rec["source"], "year": year, "status": rec.get("status", ""),
            "note": rec.get("note", ""), "value_si": value * scale, "basis": basis,
            "file": str(path), "row": line,
        })
    table = pd.DataFrame(rows, columns=[
        "set", "quantity", "value", "unit", "source", "year", "status", "note",
        "value_si", "basis", "file", "row"])
    _check_sets(table, path)
    return table


def _check_sets(table: pd.DataFrame, path: Path) -> None:
    for name, rows in table.groupby("set", sort=False):
        q = dict(zip(rows.quantity, rows.basis))
        where = f"set '{name}'"
        if "diesel.co2" in q and "diesel.co2e_ttw" in q:
            raise InputError("gives both diesel.co2 and diesel.co2e_ttw; keep one",
                             file=path, where=where)
        if "diesel.co2e_wtw" in q and "diesel.co2e_wtt" in q:
            raise InputError("gives both diesel.co2e_wtw and diesel.co2e_wtt; keep one",
                             file=path, where=where)
        diesel = [k for k in q if k.startswith("diesel.")]
        if diesel and not ({"diesel.co2", "diesel.co2e_ttw"} & set(q)) and (
                {"diesel.ch4", "diesel.n2o", "diesel.co2e_wtw"} & set(q)):
            raise InputError("has no tank-to-wheel CO2 (diesel.co2 or diesel.co2e_ttw)",
                             file=path, where=where)
        bases = {q[k] for k in diesel}
        if "energy" in bases:
            for need in ("diesel.net_calorific_value", "diesel.density"):
                if need not in q:
                    raise InputError(f"has per-energy factors but no {need} row",
                                     file=path, where=where)
        if "mass" in bases and "diesel.density" not in q:
            raise InputError("has per-mass factors but no diesel.density row",
                             file=path, where=where)
        gwp = [k for k in q if k.startswith("gwp.")]
        if gwp and not {"gwp.ch4", "gwp.n2o"} <= set(q):
            raise InputError("a GWP set needs gwp.ch4 and gwp.n2o", file=path, where=where)


def factor_table(extra_file: str | Path | None = None) -> pd.DataFrame:
    """All shipped factor tables, plus a user's file when given.

    Parameters
    ----------
    extra_file : str or Path, optional
        A user's CSV in the same format; its set names must not clash with shipped ones.

    Returns
    -------
    pandas.DataFrame
        The rows of every table (see :func:`load_factor_table`).
    """
    tables = [load_factor_table(DATA_DIR / name) for name in SHIPPED_TABLES]
    if extra_file is not None:
        tables.append(load_factor_table(extra_file))
    owner: dict[str, str] = {}
    for t in tables:
        for name in t["set"].unique():
            f = t.loc[t["set"] == name, "file"].iloc[0]
            if name in owner and owner[name] != f:
                raise InputError(f"factor set '{name}' is also defined in {owner[name]}; "
                                 "use another set name", file=f, where=f"set '{name}'")
            owner[name] = f
    return pd.concat(tables, ignore_index=True)


def diesel_sets(table: pd.DataFrame) -> list[str]:
    """Names of the sets that give diesel tank-to-wheel factors."""
    m = table.quantity.isin(["diesel.co2", "diesel.co2e_ttw"])
    return list(dict.fromkeys(table.loc[m, "set"]))


def gwp_sets(table: pd.DataFrame) -> list[str]:
    """Names of the sets that give global warming potentials."""
    return list(dict.fromkeys(table.loc[table.quantity == "gwp.ch4", "set"]))


#: Largest value of an hourly intensity profile: above any grid in g/kWh (about four times
#: lignite generation), and room for a shape written in another unit. [g/kWh or a shape]
MAX_PROFILE_VALUE = 5_000.0


def hourly_profile_24(values) -> np.ndarray:
    """Reduce an hourly intensity profile to 24 hour-of-day values.

    24 values are used as they are; 8760 (or 8784, a leap year) values, starting at 00:00
    on 1 January in local clock time, are averaged by hour of day over all days.

    Parameters
    ----------
    values : array_like
        24, 8760 or 8784 values, zero or more. [kg/J or any scale for a shape]

    Returns
    -------
    numpy.ndarray
        24 values. [same unit as ``values``]

    Raises
    ------
    ValueError
        Wrong number of values, negative or non-finite values, or all zero.
    """
    v = np.asarray(values, dtype=float).ravel()
    if v.size not in (24, 8760, 8784):
        raise ValueError(f"an hourly profile needs 24, 8760 or 8784 (leap year) values, got "
                         f"{v.size}")
    bad = np.flatnonzero(~np.isfinite(v) | (v < 0))
    if bad.size:
        raise ValueError(f"hourly profile value {fm.plain(v[bad[0]])} at hour {bad[0]} must "
                         "be a "
                         "finite number, zero or more")
    big = np.flatnonzero(v > MAX_PROFILE_VALUE)
    if big.size:
        raise ValueError(f"hourly profile value {fm.plain(v[big[0]])} at hour {big[0]} is "
                         "above "
                         f"{fm.plain(MAX_PROFILE_VALUE)} (g/kWh, or a shape in any unit)")
    if not np.any(v > 0):
        raise ValueError("hourly profile is all zero")
    return v.reshape(-1, 24).mean(axis=0)
