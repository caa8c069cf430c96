"""The ``emissions`` section of a scenario: factor sets, grid intensity, market basis.

Every field states its unit, its default and the default's source. Quantities accept a
plain number in the documented unit or a string with units (``"0.37 kg/kWh"``); after
validation they hold SI values (intensities in kg/J, shares as fractions 0–1, masses in kg,
densities in kg/m³).

Relative file paths (``factor_file``, ``hourly_profile_file``) are read relative to
``base_dir`` in the validation context (the scenario file's folder) when the loader gives
one, otherwise relative to the working directory.
"""
from __future__ import annotations

import csv
import math
from pathlib import Path
from typing import Literal

import numpy as np
from pydantic import Field, PrivateAttr, ValidationInfo, field_validator, model_validator

from tco.emission_factors import (
    MAX_PROFILE_VALUE,
    UPSTREAM_FALLBACK_SET,
    diesel_sets,
    factor_table,
    gwp_sets,
    hourly_profile_24,
)
from tco.errors import InputError
from tco.scenario.base import ASSUMPTION, Qty, Section, mfield, qfield

#: Highest grid or supplier intensity accepted: about twice the most carbon-intensive
#: generation (lignite, about 1,100–1,200 g CO2e/kWh, from memory). [g/kWh]
MAX_GRID_G_PER_KWH = 2500
GRID_DEFAULT_SOURCE = (
    "US EPA eGRID2022 (published January 2024), US total output emission rate 823.1 lb "
    "CO2/MWh; CO2 only, at generation"
)


def _resolve_path(value, info: ValidationInfo) -> Path | None:
    """A named CSV file, confined to the scenario's folder (see :mod:`tco.scenario.files`)."""
    if value is None:
        return None
    from tco.scenario.files import input_file

    base = (info.context or {}).get("base_dir") if info.context else None
    what = {"factor_file": "factor file"}.get(info.field_name, "profile file")
    try:
        return input_file(value, base, (".csv",), what)
    except InputError as exc:
        raise ValueError(exc.message) from None


def read_hourly_profile(path: str | Path) -> np.ndarray:
    """Read an hourly intensity profile: one number per line (the last column is used).

    A first line that is not a number is taken as a header.

    Raises
    ------
    InputError
        Naming the file and the row of a value that is not a number.
    """
    path = Path(path)
    try:
        values = _read_profile_rows(path)
    except UnicodeDecodeError:
        raise InputError("not a UTF-8 text file", file=path) from None
    except csv.Error:
        raise InputError("cannot read as CSV", file=path) from None
    try:
        hourly_profile_24(values)
    except ValueError as exc:
        raise InputError(str(exc), file=path) from None
    return np.asarray(values)


def _read_profile_rows(path: Path) -> list[float]:
    values: list[float] = []
    with path.open(newline="", encoding="utf-8-sig", errors="strict") as fh:
        for i, row in enumerate(csv.reader(fh)):
            if i > 10_000:
                raise InputError("more than 10,000 rows; an hourly profile has 24, 8760 or "
                                 "8784 values", file=path)
            cells = [c.strip() for c in row if c.strip()]
            if not cells:
                continue
            try:
                v = float(cells[-1])
            except ValueError:
                if i == 0:
                    continue  # header
                raise InputError("not a number", file=path,
                                 where=f"row {i + 1}") from None
            if not math.isfinite(v) or v < 0:
                raise InputError("must be a finite number, zero or more",
                                 file=path, where=f"row {i + 1}")
            values.append(v)
    return values


class LifecycleAddon(Section):
    """Optional manufacturing emissions, reported apart from operational emissions."""

    include: bool = mfield(
        False, "", "Report manufacturing emissions and the electric truck's payback distance",
        "tool default: off (no published default figures are shipped)")
    vehicle_diesel: Qty("kg", ge=0, le=1e7) | None = qfield(
        None, "kg", "Manufacturing emissions of the diesel truck, CO2e",
        "none: you give it when include is true",
        usual=(None, 100_000),
        usual_source="from memory: manufacturing a heavy truck emits about 10–50 t CO2e")
    vehicle_electric: Qty("kg", ge=0, le=1e7) | None = qfield(
        None, "kg", "Manufacturing emissions of the electric truck without its battery, CO2e",
        "none: you give it when include is true",
        usual=(None, 100_000),
        usual_source="from memory: manufacturing a heavy truck emits about 10–50 t CO2e")
    battery: Qty("kg/kWh", ge=0, le=1000) | None = qfield(
        None, "kg/kWh", "Battery manufacturing emissions per kWh of nominal capacity, CO2e",
        "none: you give it when include is true",
        usual=(30, 200),
        usual_source="from memory: published studies put battery manufacturing at about 50–150 kg "
        "CO2e per kWh")

    @model_validator(mode="after")
    def _complete(self):
        if self.include:
            missing = [n for n in ("vehicle_diesel", "vehicle_electric", "battery")
                       if getattr(self, n) is None]
            if missing:
                raise ValueError(f"include is true but {', '.join(missing)} "
                                 f"{'is' if len(missing) == 1 else 'are'} not given")
        return self


class EmissionsSettings(Section):
    """How emissions are counted: factor sets, grid intensity and market basis."""

    factor_file: Path | None = mfield(
        None, "", "Your own factor table (CSV in the format of tco/data/README.md); its sets "
        "can then be named in diesel_factors and gwp", "none: only the shipped tables")
    diesel_factors: str = mfield(
        "desnz_2025", "",
        "Diesel factor set: desnz_2025 (tank-to-wheel and well-to-tank CO2e per litre), "
        "us_epa_ghg_hub_2025, ipcc_2006_guidelines, en_16258_2012 (superseded by ISO "
        "14083:2023; kept for comparison), or a set of your factor_file",
        "UK DESNZ greenhouse gas reporting conversion factors 2025 (Scope 1 tank-to-wheel and "
        "Scope 3 well-to-tank, all gases as CO2e, consistent with the GHG Protocol and the "
        "ISO 14083 well-to-wheel split; tco/data/desnz_2025.csv gives each value's status)")
    gwp: str = mfield(
        "ipcc_ar5", "", "Global warming potential set for CH4 and N2O: ipcc_ar5, ipcc_ar6, or "
        "a set of your factor_file",
        "IPCC AR5 WG1 Ch. 8 Table 8.7 (GWP100), values from memory (tco/data/ipcc_gwp.csv)")
    diesel_upstream: Qty("kg/L", ge=0, le=20) | None = qfield(
        None, "kg/L", "Well-to-tank emissions of diesel per litre, CO2e; empty: the diesel "
        "set's own figure, or the DESNZ 2025 well-to-tank when the set has none",
        f"the diesel set; otherwise {UPSTREAM_FALLBACK_SET} (UK DESNZ conversion factors "
        "2025, WTT- fuels, diesel; tco/data/desnz_2025.csv)",
        usual=(0.3, 1.0),
        usual_source="UK DESNZ conversion factors 2025, WTT- fuels, diesel: about 0.6 kg CO2e/L "
        "(tco/data/desnz_2025.csv)")
    def_density: Qty("kg/L", gt=0, le=3) = qfield(
        1.09, "kg/L", "Density of diesel exhaust fluid", "ISO 22241-1 (from memory)",
        usual=(1.08, 1.1),
        usual_source="ISO 22241-1: 1.087–1.093 kg/L at 20 °C (from memory)")
    def_urea_share: Qty("percent", ge=0, le=100) = qfield(
        32.5, "percent", "Urea mass share of diesel exhaust fluid",
        "ISO 22241-1, nominal urea content (from memory)",
        usual=(31.8, 33.2),
        usual_source="ISO 22241-1: urea 31.8–33.2 % by mass (from memory)")
    grid_intensity: Qty("g/kWh", ge=0, le=MAX_GRID_G_PER_KWH) = qfield(
        "823.1 lb/MWh", "g/kWh", "Location-based grid intensity in the first year of service, "
        "CO2e per kWh at the meter (373.4 g/kWh)", GRID_DEFAULT_SOURCE,
        usual=(0, 1200),
        usual_source="European Environment Agency (2020): EU-27 generation 281 g CO2e/kWh in 2018; "
        "lignite plants about 1,100–1,200 g/kWh (from memory)")
    grid_change: Qty("percent", ge=-100, le=100) = qfield(
        0.0, "percent", "Compound change of the grid intensity per year (-3 means 3 % lower "
        "each year)", ASSUMPTION + ": no change",
        usual=(-15, 5),
        usual_source="from memory: grids decarbonise by 0–10 % a year in current plans")
    grid_floor: Qty("g/kWh", ge=0, le=MAX_GRID_G_PER_KWH) = qfield(
        0.0, "g/kWh", "A declining grid intensity stops at this value",
        ASSUMPTION + ": no floor",
        usual=(0, 1200),
        usual_source="European Environment Agency (2020): EU-27 generation 281 g CO2e/kWh in 2018; "
        "lignite plants about 1,100–1,200 g/kWh (from memory)")
    grid_table: dict[int, Qty("g/kWh", ge=0, le=MAX_GRID_G_PER_KWH)] | None = qfield(
        None, "g/kWh", "Grid intensity by calendar year, instead of grid_intensity with "
        "grid_change (linear between listed years, flat outside them)",
        "none: the trajectory is used",
        usual=(0, 1200),
        usual_source="European Environment Agency (2020): EU-27 generation 281 g CO2e/kWh in 2018; "
        "lignite plants about 1,100–1,200 g/kWh (from memory)")
    hourly_profile: list[float] | None = mfield(
        None, "", "Grid intensity by hour: 24 hour-of-day values, or 8760 (8784) hourly "
        "values from 00:00 on 1 January, averaged by hour of day; read as a shape or in "
        "g/kWh (see hourly_profile_kind); each value 0 to 5,000", "none: no hour matching",
        bounds=(0, MAX_PROFILE_VALUE), usual="none: a shape has no unit")
    hourly_profile_file: Path | None = mfield(
        None, "", "The same profile from a CSV file, one value per line (last column)",
        "none")
    hourly_profile_kind: Literal["shape", "absolute"] = mfield(
        "shape", "", "'shape': only the profile's ratios to its mean count (the annual "
        "intensity stays); 'absolute': values in g/kWh, their mean is the first-year "
        "intensity", ASSUMPTION)
    supplier_intensity: Qty("g/kWh", ge=0, le=MAX_GRID_G_PER_KWH) | None = qfield(
        None, "g/kWh", "Market-based: your depot supplier's contractual emission factor "
        "(held constant over the years; public charging stays at the grid intensity)",
        "none: the market-based figure uses the grid intensity",
        usual=(0, 1200),
        usual_source="European Environment Agency (2020): EU-27 generation 281 g CO2e/kWh in 2018; "
        "lignite plants about 1,100–1,200 g/kWh (from memory)")
    residual_mix_intensity: Qty("g/kWh", ge=0, le=MAX_GRID_G_PER_KWH) | None = qfield(
        None, "g/kWh", "Market-based: residual-mix emission factor, for electricity bought "
        "without a contractual instrument (depot electricity not covered by the supplier "
        "factor or the renewable share, and public charging), in the year of grid_intensity; "
        "it follows the grid intensity's path in proportion",
        "none: the market-based figure falls back on the grid average (a caution says so; the "
        "GHG Protocol Scope 2 Guidance asks for a residual mix where one is published)",
        usual=(0, 1200),
        usual_source="European Environment Agency (2020): EU-27 generation 281 g CO2e/kWh in 2018; "
        "lignite plants about 1,100–1,200 g/kWh (from memory)")
    residual_mix_source: str | None = mfield(
        None, "", "Where the residual-mix factor comes from (publisher, year, table; at most "
        "200 characters); needed with residual_mix_intensity", "none", text_limit=200)
    renewable_share: Qty("percent", ge=0, le=100) = qfield(
        0.0, "percent", "Market-based: share of depot electricity covered by contracted "
        "renewable supply with certificates (counted at zero)",
        ASSUMPTION + ": none contracted",
        usual="none: any share can be contracted")
    td_loss: Qty("percent", ge=0, lt=100) = qfield(
        5.0, "percent", "Transmission-and-distribution loss share of the grid, for Scope 3 "
        "category 3; 0 when the grid intensity already includes losses",
        ASSUMPTION + ": a typical order of magnitude for national grids",
        usual=(0, 20),
        usual_source="from memory: national grids lose about 3–10 % in transmission and "
        "distribution, up to 20 % in some")
    electricity_upstream: Qty("g/kWh", ge=0, le=MAX_GRID_G_PER_KWH) | None = qfield(
        None, "g/kWh", "Upstream (well-to-tank of the power plants' fuels) emissions per kWh "
        "at the meter, Scope 3 category 3; empty: electricity_upstream_share of the grid "
        "intensity", "none: electricity_upstream_share is used",
        usual=(0, 300),
        usual_source="from memory: well-to-tank of grid electricity about a tenth of the "
        "generation factor")
    electricity_upstream_share: Qty("percent", ge=0, le=100) = qfield(
        10.0, "percent", "Upstream emissions of electricity as a share of the grid intensity "
        "of each year, used when electricity_upstream is empty (ISO 14083 well-to-wheel "
        "includes them)",
        "from memory: national factor sets (e.g. the UK government conversion factors) put "
        "the well-to-tank of grid electricity generation at roughly a tenth of the "
        "generation factor; replace with your grid's published figure",
        usual=(0, 30),
        usual_source="from memory: national factor sets put it at roughly a tenth of the "
        "generation factor")
    diesel_blend_share: Qty("percent", ge=0, le=100) = qfield(
        0.0, "percent", "Biodiesel (FAME) share of the diesel by volume; its CO2 is biogenic "
        "and reported apart from the scopes",
        ASSUMPTION + ": pure fossil diesel (road diesel is often a blend with up to 7 % "
        "biodiesel by volume, EN 590; from memory)",
        usual=(0, 30),
        usual_source="EN 590: up to 7 % FAME by volume (from memory); B20 and B30 blends exist")
    biodiesel_co2: Qty("kg/L", ge=0, le=20) = qfield(
        2.50, "kg/L", "Biogenic CO2 from burning a litre of biodiesel (FAME), reported "
        "outside the scopes",
        "from memory: rapeseed methyl ester about 0.88 kg/L and 77 % carbon by mass, "
        "× 44/12 = 2.5 kg CO2/L",
        usual=(2.3, 2.7),
        usual_source="from memory: FAME about 0.88 kg/L and 77 % carbon by mass: 2.5 kg "
        "CO2/L")
    biodiesel_upstream: Qty("kg/L", ge=0, le=20) | None = qfield(
        None, "kg/L", "Well-to-tank emissions of a litre of biodiesel, CO2e (Scope 3 "
        "category 3); empty: the diesel upstream factor", ASSUMPTION + ": as fossil diesel",
        usual=(0, 3),
        usual_source="from memory: well-to-tank of biodiesel depends on the feedstock, mostly "
        "below 2 kg CO2e/L")
    discount_tonnes: bool = mfield(
        True, "", "Abatement cost on discounted tonnes (present-value cost over tonnes "
        "discounted at the finance discount rate); false: over undiscounted tonnes. Both are "
        "reported; this picks the headline",
        "common practice in cost-effectiveness analysis: a levelized cost per unit discounts "
        "cost and quantity alike, as the levelized cost per km does (from memory)")
    lifecycle: LifecycleAddon = Field(
        default_factory=LifecycleAddon,
        description="Optional life-cycle add-on (manufacturing), apart from operational "
        "reporting [-]", json_schema_extra={"unit": "", "source": "tool default: off"})

    _profile: np.ndarray | None = PrivateAttr(default=None)

    @field_validator("factor_file", "hourly_profile_file", mode="before")
    @classmethod
    def _path(cls, value, info: ValidationInfo):
        return _resolve_path(value, info)

    @field_validator("diesel_factors")
    @classmethod
    def _diesel_set(cls, value: str, info: ValidationInfo) -> str:
        known = diesel_sets(factor_table(info.data.get("factor_file")))
        if value not in known:
            raise ValueError(f"unknown diesel factor set '{value}' (known: {', '.join(known)})")
        return value

    @field_validator("gwp")
    @classmethod
    def _gwp_set(cls, value: str, info: ValidationInfo) -> str:
        known = gwp_sets(factor_table(info.data.get("factor_file")))
        if value not in known:
            raise ValueError(f"unknown GWP set '{value}' (known: {', '.join(known)})")
        return value

    @field_validator("hourly_profile")
    @classmethod
    def _profile_values(cls, value):
        if value is not None:
            hourly_profile_24(value)
        return value

    @field_validator("grid_table")
    @classmethod
    def _table(cls, value):
        if value is not None and not value:
            raise ValueError("grid_table needs at least one year")
        return value

    @model_validator(mode="after")
    def _consistent(self):
        given = self.model_fields_set
        if self.hourly_profile is not None and self.hourly_profile_file is not None:
            raise ValueError("give hourly_profile or hourly_profile_file, not both")
        if self.hourly_profile_file is not None:
            self._profile = read_hourly_profile(self.hourly_profile_file)
        elif self.hourly_profile is not None:
            self._profile = np.asarray(self.hourly_profile, dtype=float)
        if self.residual_mix_intensity is not None and not self.residual_mix_source:
            raise ValueError("residual_mix_intensity needs residual_mix_source (publisher, "
                             "year, table)")
        if self.grid_table is not None:
            clash = [n for n in ("grid_intensity", "grid_change", "grid_floor") if n in given]
            if clash:
                raise ValueError(f"give either grid_table or {', '.join(clash)}, not both")
        if self._profile is not None and self.hourly_profile_kind == "absolute":
            if self.grid_table is not None:
                raise ValueError("an absolute hourly profile sets the first-year intensity; "
                                 "with grid_table use hourly_profile_kind = 'shape'")
            if "grid_intensity" in given:
                raise ValueError("an absolute hourly profile sets the first-year intensity; "
                                 "leave out grid_intensity or use hourly_profile_kind = "
                                 "'shape'")
        return self

    def hourly_values(self) -> np.ndarray | None:
        """The hourly profile as given (inline or from its file), or None."""
        return self._profile
