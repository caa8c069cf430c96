"""Every numeric input has documented hard bounds and a usual range (or says why not).

The walk covers every section of the scenario (``tco.scenario.Scenario``), the transition
plan settings (``tco.plan.PlanSettings``) and the numeric columns of a fleet file
(``tco.fleet.COLUMN_LIMITS``). For each numeric field it checks that

* both hard limits are declared beside the field (``Qty(ge=, le=…)``, ``mfield(ge=, le=)``,
  ``bounds=``, or the money ceiling for money and prices), and that each is enforced: a
  value just outside is refused by the field's own validation;
* a usual range is declared with where it comes from (``usual=``, ``usual_source=``), or
  the field says why it has none (``usual="none: …"``).

The bounds are the project's own decisions; what this test checks is that none is missing
and that none is only written down.
"""
from __future__ import annotations

import copy
import math
import tomllib
import typing

import pytest
from pydantic import BaseModel, ValidationError

from tco.plan import PlanSettings, TargetSettings
from tco.resources import demo_path
from tco.scenario import Scenario, parse_scenario
from tco.scenario.base import MONEY_CEILING, field_limits
from tco.scenario.costs import TouBand
from tco.scenario.uncertainty import Correlation, Distribution, TornadoInput

DEMO = tomllib.loads(demo_path().read_text(encoding="utf-8"))


def _numeric(annotation) -> str | None:
    """'int' or 'float' when the type holds numbers (alone, optional, in a list or dict)."""
    if annotation is bool:
        return None
    if annotation is int:
        return "int"
    if annotation is float:
        return "float"
    args = typing.get_args(annotation)
    if typing.get_origin(annotation) is dict:
        args = args[1:]
    for a in args:
        if a is str:
            continue
        got = _numeric(a)
        if got:
            return got
    return None


def _sections(cls, seen=None):
    seen = {} if seen is None else seen
    if cls in seen:
        return seen
    seen[cls] = True
    for info in cls.model_fields.values():
        stack = [info.annotation]
        while stack:
            a = stack.pop()
            if isinstance(a, type) and issubclass(a, BaseModel):
                _sections(a, seen)
            stack += list(typing.get_args(a))
    return seen


SECTIONS = list(_sections(Scenario)) + list(_sections(PlanSettings))
NUMERIC = [(cls, name, info) for cls in SECTIONS for name, info in cls.model_fields.items()
           if _numeric(info.annotation)]


def _extra(info) -> dict:
    return info.json_schema_extra if isinstance(info.json_schema_extra, dict) else {}


def test_the_walk_sees_the_fields_it_should():
    names = {f"{c.__name__}.{n}" for c, n, _ in NUMERIC}
    # a price, a money amount, a rate, a count, a list, a table, a distribution number
    for expected in ("Prices.diesel", "TruckCosts.purchase_price", "Finance.discount_rate",
                     "Segment.stops", "Residual.shares", "EmissionsSettings.grid_table",
                     "Distribution.mean", "PlanSettings.capital_budget", "TouBand.hours"):
        assert expected in names
    assert len(NUMERIC) > 140


def test_every_numeric_field_has_both_hard_bounds():
    missing = [f"{c.__name__}.{n}: {field_limits(i)}" for c, n, i in NUMERIC
               if None in field_limits(i)]
    assert not missing, "numeric fields without a hard bound:\n" + "\n".join(missing)


def test_every_numeric_field_has_a_usual_range_with_its_source_or_says_why_not():
    problems = []
    for c, n, i in NUMERIC:
        usual = _extra(i).get("usual")
        if usual is None:
            problems.append(f"{c.__name__}.{n}: no usual range and no reason")
        elif isinstance(usual, str):
            if not usual.startswith("none: ") or len(usual) < 12:
                problems.append(f"{c.__name__}.{n}: '{usual}' is not 'none: <why>'")
        elif not _extra(i).get("usual_source"):
            problems.append(f"{c.__name__}.{n}: usual range without usual_source")
        else:
            low, high = field_limits(i)
            u_low, u_high = usual
            if (u_low is not None and u_low < low) or (u_high is not None and u_high > high):
                problems.append(f"{c.__name__}.{n}: usual range {usual} outside the hard "
                                f"bounds {(low, high)}")
    assert not problems, "\n".join(problems)


# --------------------------------------------------------------------------- enforcement
def _instances() -> dict[type, BaseModel]:
    """One valid instance of every section: from the demo, plus hand-made ones."""
    found: dict[type, BaseModel] = {}

    def walk(m):
        if isinstance(m, BaseModel):
            found.setdefault(type(m), m)
            for name in type(m).model_fields:
                walk(getattr(m, name))
        elif isinstance(m, list):
            for x in m:
                walk(x)

    walk(parse_scenario(copy.deepcopy(DEMO)))
    found.setdefault(TouBand, TouBand(name="night", hours=[1, 2], price=0.1))
    found.setdefault(TornadoInput, TornadoInput(input="prices.diesel", low=0.9, high=1.1,
                                                scale="relative"))
    found.setdefault(Distribution, Distribution(input="prices.diesel", kind="normal",
                                                scale="relative", mean=1.0, sd=0.1))
    found.setdefault(Correlation, Correlation(inputs=["a", "b"], rank=0.5))
    found[TargetSettings] = TargetSettings(reduction=0.5, year=2035)
    found[PlanSettings] = PlanSettings(target=found[TargetSettings])
    return found


INSTANCES = _instances()


def _beyond(limit: float, up: bool, kind: str) -> float | int:
    if kind == "int":
        return int(limit) + (1 if up else -1)
    step = max(abs(limit) * 1e-6, 1e-9)
    return limit + step if up else limit - step


def _shaped(info, value):
    origin = typing.get_origin(info.annotation)
    args = typing.get_args(info.annotation)
    if origin is list or any(typing.get_origin(a) is list for a in args):
        return [value]
    if origin is dict or (any(typing.get_origin(a) is dict for a in args)
                          and not isinstance(value, float)):
        return {2030: value}
    return value


@pytest.mark.parametrize("cls, name, info", NUMERIC,
                         ids=[f"{c.__name__}.{n}" for c, n, _ in NUMERIC])
def test_each_hard_bound_is_enforced(cls, name, info):
    """A value just outside either hard bound is refused by the field's validation."""
    assert cls in INSTANCES, f"no valid {cls.__name__} to test with"
    kind = _numeric(info.annotation)
    low, high = field_limits(info)
    for limit, up in ((low, False), (high, True)):
        value = _beyond(limit, up, kind)
        if not math.isfinite(value) or abs(value) > 10 * MONEY_CEILING:
            continue
        obj = copy.deepcopy(INSTANCES[cls])
        with pytest.raises(ValidationError):
            cls.__pydantic_validator__.validate_assignment(obj, name, _shaped(info, value))


# --------------------------------------------------------------------------- usual ranges
def _warnings(**changes) -> list[str]:
    from tco.scenario.base import unusual_values

    data = copy.deepcopy(DEMO)
    for path, value in changes.items():
        *parents, last = path.split("__")
        node = data
        for p in parents:
            node = node[int(p)] if p.isdigit() else node.setdefault(p, {})
        node[last] = value
    return unusual_values(parse_scenario(data))


def test_the_demo_and_the_shipped_examples_raise_no_usual_range_warning():
    assert _warnings() == []


def test_prices_and_amounts_outside_their_usual_range_are_named_in_dollar_like_currencies():
    # a diesel price of 15 per litre: about ten times the pump price in USD or EUR
    found = _warnings(prices__diesel=15.0)
    assert found == ["prices.diesel = 15 per L is outside the usual range (0.5 to 3 per L); "
                     "check that it is meant"]
    # 4.10 per US gallon is 4.10 / 3.785411784 = 1.083 per litre (US gallon: NIST Handbook
    # 44, 231 cubic inches): inside the range, whatever unit it was written in
    assert _warnings(prices__diesel="4.10 / gal") == []
    # a truck price of 50: a price written in thousands
    assert any(w.startswith("trucks[0].costs.purchase_price = 50 is outside")
               for w in _warnings(trucks__0__costs__purchase_price=50.0))
    # in a currency of another size (ISO 4217 JPY) the same numbers are held to the hard
    # bounds only
    assert _warnings(prices__diesel=15.0, study__currency="JPY") == []


def test_whole_numbers_are_compared_as_written():
    """A loan of 30 years is unusual; 5 years is not (ints are not held in SI)."""
    assert _warnings(trucks__1__costs__financing__loan_years=5) == []
    found = _warnings(trucks__1__costs__financing__loan_years=30)
    assert found == ["trucks[1].costs.financing.loan_years = 30 yr is outside the usual "
                     "range (2 to 10 yr); check that it is meant"]


# --------------------------------------------------------------------------- fleet columns
def test_every_numeric_fleet_column_has_limits():
    from tco.fleet import COLUMN_LIMITS, COLUMN_USUAL, COLUMNS

    numeric = {"annual_distance", "payload", "days_per_year", "age", "replacement_year",
               "resale_value"}
    assert numeric <= set(COLUMNS)
    assert set(COLUMN_LIMITS) == numeric
    assert set(COLUMN_USUAL) == numeric
    for name, usual in COLUMN_USUAL.items():
        if isinstance(usual, str):
            assert usual.startswith("none: ") and len(usual) > 12, name
        else:
            low, high, source = usual
            assert source and (low is None or low >= COLUMN_LIMITS[name][0]), name
            assert high is None or high <= COLUMN_LIMITS[name][1], name


def test_fleet_cells_outside_their_usual_range_are_named():
    from tco.fleet import FleetRow, column_warnings

    # 400,000 km a year: 1,100 km every day of the year, twice what a truck with one driver
    # covers; kept in SI as 4e8 m
    row = FleetRow(row=3, vehicle="V7", cycle=None, current="d", candidate="e",
                   annual_distance=4e8, age=30.0, resale_value=2e6)
    found = column_warnings([row], "EUR")
    assert found == [
        "V7 (row 3): annual_distance = 400,000 km is outside the usual range (5,000 to "
        "250,000 km); check that it is meant",
        "V7 (row 3): age = 30 yr is outside the usual range (at most 25 yr); check that it "
        "is meant",
        "V7 (row 3): resale_value = 2,000,000 is outside the usual range (at most 800,000); "
        "check that it is meant"]
    assert len(column_warnings([row], "JPY")) == 2  # money only in dollar-sized currencies


@pytest.mark.parametrize("column", ["annual_distance", "payload", "days_per_year", "age",
                                    "replacement_year", "resale_value"])
def test_each_fleet_column_limit_is_enforced(tmp_path, column):
    from tco.errors import InputError
    from tco.fleet import COLUMN_LIMITS, read_fleet

    (tmp_path / "c.csv").write_text("time [s],speed [km/h]\n0,0\n10,50\n")
    low, high, low_in = COLUMN_LIMITS[column]
    step = 1 if column == "replacement_year" else max(abs(high) * 1e-6, 1e-6)
    outside = [high + step, low - step if low_in else low]
    if column == "replacement_year":
        outside = [int(high) + 1, int(low) - 1]
    for value in outside:
        (tmp_path / "f.csv").write_text(
            f"vehicle,cycle,current,candidate,{column}\nA,c.csv,d,e,{value}\n")
        with pytest.raises(InputError, match=rf"row 2, {column}"):
            read_fleet(tmp_path / "f.csv")
    inside = int(high) if column == "replacement_year" else high
    (tmp_path / "f.csv").write_text(
        f"vehicle,cycle,current,candidate,{column}\nA,c.csv,d,e,{inside}\n")
    read_fleet(tmp_path / "f.csv")


def test_fleet_limits_read_as_written(tmp_path):
    """The refusal names the limit as a person writes it: a calendar year without a
    thousands separator (1990, not 1,990), a distance with one (1,500,000 km); the limits
    are those of docs: replacement years 1990 to 2100, at most 1.5 million km a year."""
    from tco.errors import InputError
    from tco.fleet import read_fleet

    (tmp_path / "c.csv").write_text("time [s],speed [km/h]\n0,0\n10,50\n")
    for column, value, expected in [("replacement_year", 1989, "must be at least 1990"),
                                    ("replacement_year", 2101, "must be at most 2100"),
                                    ("annual_distance", 2e6, "must be at most 1,500,000 km")]:
        (tmp_path / "f.csv").write_text(
            f"vehicle,cycle,current,candidate,{column}\nA,c.csv,d,e,{value}\n")
        with pytest.raises(InputError) as err:
            read_fleet(tmp_path / "f.csv")
        assert expected in str(err.value), str(err.value)


def test_zero_amounts_and_no_monte_carlo_are_not_unusual():
    """0 leaves a cost out (driver cost, maintenance) and draws = 0 turns the Monte Carlo
    off: neither is a slip to warn about; 0.001 per km of maintenance is."""
    assert _warnings(finance__driver_cost_per_hour=0.0,
                     trucks__0__costs__maintenance=0.0, uncertainty__draws=0) == []
    assert _warnings(trucks__0__costs__maintenance=0.001) == [
        "trucks[0].costs.maintenance = 0.001 per km is outside the usual range (0.01 to 0.5 "
        "per km); check that it is meant"]
