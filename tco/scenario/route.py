"""Scenario sections describing the job: study settings, ambient conditions and the route."""
from __future__ import annotations

import re
from typing import Annotated, Literal

from pydantic import AfterValidator, Field, field_validator, model_validator

from tco.report import formatting as fm
from tco.budget import LONGEST_TIME_STEP, MAX_DWELL, MAX_STOPS, least_samples_problem
from tco.scenario.base import ASSUMPTION, Bounds, Qty, Section, mfield, qfield

ISA_SEA_LEVEL = "U.S. Standard Atmosphere 1976: 15 °C at sea level"
SLUG = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,79}$")
CURRENCY = re.compile(r"^[A-Z]{3}$")
#: Longest study notes accepted: room for a few pages of text, not a document. [characters]
NOTES_LIMIT = 20_000
#: Longest synthetic stretch; a trip longer than a few days is refused by the trace budget
#: anyway (:mod:`tco.budget`). [km]
MAX_SEGMENT_KM = 5_000
#: Fastest speed accepted anywhere on a route: above any truck's legal or governed top
#: speed. [km/h]
MAX_TRUCK_SPEED_KMH = 150


class Study(Section):
    """What the study is called and how results are shown."""

    name: str = mfield(..., "", "Title of the study, shown on the report (any text, at most "
                       "200 characters)")
    slug: str | None = mfield(
        None, "", "Name of the output folder under --out; letters, digits, '.', '_' and '-' "
        "only. Default: the scenario file's name without extension", "scenario file name"
    )
    currency: str = mfield(
        "EUR", "", "ISO 4217 code of the currency all money is written in", ASSUMPTION
    )
    units: Literal["metric", "us"] = mfield(
        "metric", "", "Unit system for displayed results: metric or US customary", ASSUMPTION
    )
    start_year: int = mfield(2027, "", "Calendar year of the first year of service (1990 to "
                             "2100)", ASSUMPTION, bounds=(1990, 2100),
        usual=(2020, 2050),
        usual_source="common practice: a study of trucks bought now or in the coming years")
    page_size: Literal["A4", "Letter"] = mfield("A4", "", "Report page size", ASSUMPTION)
    notes: str = mfield("", "", "Free text shown in the report (line breaks kept; at most "
                        f"{fm.count(NOTES_LIMIT)} characters, a few pages)", ASSUMPTION,
                        text_limit=NOTES_LIMIT, multiline=True)

    @field_validator("slug")
    @classmethod
    def _slug(cls, v):
        if v is not None and not SLUG.match(v):
            raise ValueError(
                f"'{v}' is not a valid file name: use letters, digits, '.', '_' or '-', "
                "starting with a letter or digit, at most 80 characters"
            )
        return v

    @field_validator("currency")
    @classmethod
    def _currency(cls, v):
        if not CURRENCY.match(v):
            raise ValueError(f"'{v}' is not an ISO 4217 code (three capital letters, e.g. EUR, USD)")
        return v

    @field_validator("start_year")
    @classmethod
    def _year(cls, v):
        if not 1990 <= v <= 2100:
            raise ValueError("must be a calendar year between 1990 and 2100")
        return v


class Ambient(Section):
    """Ambient conditions on the route."""

    temperature: Qty("degC", ge=-60, le=60) = qfield(
        15.0, "degC", "Ambient air temperature", ISA_SEA_LEVEL,
        usual=(-30, 45),
        usual_source="from memory: air temperatures on roads lie between about -30 and 45 °C")
    altitude: Qty("m", ge=-500, le=6000) = qfield(
        0.0, "m", "Elevation of the route's start above sea level (synthetic routes; "
        "traces bring their own elevation)", ASSUMPTION,
        usual=(-100, 3000),
        usual_source="from memory: most roads lie below 3,000 m")
    headwind: Qty("km/h", ge=-100, le=100) = qfield(
        0.0, "km/h", "Wind speed. With wind_treatment 'average_over_directions' (default) "
        "its direction relative to the truck is averaged over all directions, as over "
        "the changing headings of a trip; with 'headwind' it blows against the truck on "
        "every leg (negative: tailwind)",
        ASSUMPTION + " (still air)",
        usual=(-30, 30),
        usual_source="from memory: mean wind speeds near the ground are mostly below 30 km/h")
    wind_treatment: Literal["average_over_directions", "headwind"] = mfield(
        "average_over_directions", "", "How the wind acts on the truck: averaged over all "
        "directions (a steady wind largely cancels over a round trip; adds ½ρC_dA·w²/2 "
        "to the drag) or as a headwind on every leg (the worst case)",
        "common practice (from memory): direction-averaged wind for a route with changing "
        "headings "
        "(the wind-averaged drag idea of SAE J1252, without its yaw correction)"
    )


def _dwell_budget(value: float) -> float:
    if value > MAX_DWELL:
        raise ValueError(least_samples_problem(value / LONGEST_TIME_STEP,
                                               f"a dwell of {fm.number(value / 60)} min"))
    return value


#: Standing time at the end of a leg: at most the trip budget at the longest time step
#: (:data:`tco.budget.MAX_DWELL`, refused with the budget's sentence). [min]
DwellEnd = Annotated[Qty("min", ge=0), AfterValidator(_dwell_budget),
                     Bounds(le=MAX_DWELL / 60)]


class Segment(Section):
    """One stretch of a synthetic route."""

    length: Qty("km", gt=0, le=MAX_SEGMENT_KM) = qfield(
        ..., "km", f"Horizontal length of the stretch (at most {fm.count(MAX_SEGMENT_KM)} km)",
        usual=(None, 1000),
        usual_source="common practice: a stretch is a part of a day's drive")
    speed: Qty("km/h", gt=0, le=MAX_TRUCK_SPEED_KMH) = qfield(
        ..., "km/h", f"Cruise speed (at most {MAX_TRUCK_SPEED_KMH} km/h)", usual=(None, 110),
        usual_source="common practice: truck speed limiters at 80–90 km/h; highway limits up to "
        "about 110 km/h")
    grade: Qty("percent", ge=-30, le=30) = qfield(
        0.0, "percent", "Road grade, rise over run (negative downhill)", ASSUMPTION,
        usual=(-12, 12),
        usual_source="common practice: main roads are built to grades below about 6–8 %; steep "
        "local roads reach 12 %")
    stops: int = mfield(0, "", "Stops inside the stretch (evenly spaced; at most "
                        f"{fm.count(MAX_STOPS)}: each needs two samples of the trip budget, "
                        "tco.budget)", ASSUMPTION, ge=0, bounds=(0, MAX_STOPS),
        usual=(None, 500),
        usual_source="common practice: urban delivery makes up to a few hundred stops a day")
    dwell: Qty("s", ge=0, le=86_400) = qfield(
        30.0, "s", "Time standing at each stop (at most a day)", ASSUMPTION, usual=(None, 3600),
        usual_source="common practice: traffic stops and deliveries last seconds to an hour")


    @field_validator("stops")
    @classmethod
    def _stops_budget(cls, v: int) -> int:
        if v > MAX_STOPS:
            raise ValueError(least_samples_problem(2.0 * v, f"{fm.count(v)} stops"))
        return v


class Leg(Section):
    """A part of the trip with one payload, e.g. loaded out or empty back."""

    name: str = mfield("leg", "", "Name of the leg (at most 80 characters)", ASSUMPTION,
                       text_limit=80)
    payload: Qty("t", ge=0, le=500) = qfield(..., "t", "Payload carried on this leg (at most "
                                             "500 t)", usual=(None, 60),
        usual_source="common practice: road laws of 40–44 t gross leave about 25–30 t of payload; "
        "long combinations up to about 60 t")
    file: str | None = mfield(
        None, "", "CSV trace or GPX track for this leg, relative to the scenario file",
        "none: the leg is built from segments"
    )
    cruise_speed: Qty("km/h", gt=0, le=MAX_TRUCK_SPEED_KMH) | None = qfield(
        None, "km/h", "Constant cruise speed for a CSV with distance and elevation only (at "
        f"most {MAX_TRUCK_SPEED_KMH} km/h)", "none", usual=(None, 110),
        usual_source="common practice: truck speed limiters at 80–90 km/h; highway limits up to "
        "about 110 km/h")
    segments: list[Segment] = Field(default_factory=list, description="Synthetic stretches")
    dwell_end: DwellEnd = qfield(
        0.0, "min", "Time standing at the end of the leg (loading or unloading); the whole "
        "trip is held to the trace budget of tco.budget", ASSUMPTION, usual=(None, 720),
        usual_source="common practice: loading or unloading takes minutes to a few hours")

    @model_validator(mode="after")
    def _one_source(self):
        if self.file and self.segments:
            raise ValueError("give either file or segments, not both")
        if not self.file and not self.segments:
            raise ValueError("needs a file (CSV or GPX) or at least one segment")
        if self.file and not self.file.lower().endswith((".csv", ".gpx")):
            raise ValueError(f"file '{self.file}' must be a .csv trace or a .gpx track")
        return self


class Route(Section):
    """The duty cycle: legs of one trip, and how often it runs."""

    legs: list[Leg] = Field(..., min_length=1, description="Legs of one trip, in order")
    trips_per_day: Qty("", gt=0, le=50) = qfield(1.0, "", "Trips per operating day", ASSUMPTION,
        usual=(0.2, 12),
        usual_source="common practice: from a trip every few days (long haul) to about ten short "
        "shuttles a day")
    days_per_year: Qty("", gt=0, le=366) = qfield(
        250.0, "", "Operating days per year", "common practice: about 250 working days a year",
        usual=(150, 365),
        usual_source="common practice: about 250 working days a year; every day in continuous "
        "operation")
    parked_idle_share: Qty("", ge=0, le=1) = qfield(
        0.0, "", "Share of the parked dwell (loading, unloading at the end of a leg) with "
        "the engine or auxiliaries left running, e.g. for cab heating or cooling; traffic "
        "stops always idle",
        "common practice: trucks are switched off while parked (anti-idling rules)",
        usual="none: any share, from switched off to always running")
    slow_when_power_limited: bool = mfield(
        True, "", "Where the trace asks for more power than a truck has, the truck slows to "
        "the speed its power holds (time and energy follow); false keeps the trace speed "
        "and caps the power (work the truck cannot do is then not counted)",
        "first principles: a truck at full power on a climb slows to its steady speed"
    )
    time_step: Qty("s", gt=0, le=LONGEST_TIME_STEP) = qfield(
        1.0, "s", "Simulation time step", ASSUMPTION, usual=(0.1, 2),
        usual_source="common practice: drive cycles and logged traces at 1 to 10 Hz (0.1 to 1 s)")
    smoothing_window: Qty("m", ge=0, le=5000) = qfield(
        250.0, "m", "Elevation smoothing window for CSV and GPX traces (0 = off)", ASSUMPTION,
        usual=(0, 1000),
        usual_source="from memory: road elevation data are smoothed over tens to hundreds of "
        "metres")
    max_accel: Qty("m/s^2", gt=0, le=3) = qfield(
        0.4, "m/s^2", "Acceleration limit for synthetic routes",
        "common practice: 0.3–0.5 m/s² for a loaded heavy truck",
        usual=(0.1, 1.0),
        usual_source="common practice: 0.3–0.5 m/s² for a loaded heavy truck, more when empty")
    max_decel: Qty("m/s^2", gt=0, le=5) = qfield(
        0.8, "m/s^2", "Service-braking deceleration for synthetic routes",
        "common practice: 0.7–1.0 m/s² comfortable braking for heavy trucks",
        usual=(0.3, 2.0),
        usual_source="common practice: 0.7–1.0 m/s² comfortable braking for heavy trucks")
