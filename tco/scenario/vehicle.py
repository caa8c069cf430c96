"""Scenario sections describing the trucks' physics: body, diesel and electric powertrains."""
from __future__ import annotations

from typing import Literal

from pydantic import Field, model_validator

from tco.scenario.base import ASSUMPTION, Qty, Section, mfield, qfield

EU_TYRE_LABEL = (
    "Regulation (EU) 2020/740, Annex I Part A: C3 (truck) tyre rolling-resistance classes "
    "A ≤ 4.0, B 4.1–5.0, C 5.1–6.0 kg/t; 5.5 kg/t is the middle of class C"
)
COMMON_DRIVETRAIN = "common practice: battery-to-wheel drivetrain efficiency about 90 %"
COMMON_DRIVELINE = "common practice: engine-output-to-wheel driveline efficiency about 85–90 % at highway load"
JEC_FUELS = "JEC Well-to-Tank report v5 (JRC, 2020), standard properties of fuels"


class Body(Section):
    """The vehicle as the road sees it: masses, aerodynamics, tyres."""

    curb_mass: Qty("t", gt=0, le=200) = qfield(
        ..., "t", "Empty mass of the complete combination ready to drive (tractor, trailer, "
        "battery or full tank, driver)", usual=(3, 40)
    )
    gross_mass_limit: Qty("t", gt=0, le=300) = qfield(
        40.0, "t", "Legal gross combination weight limit for this operation; set it to "
        "your local law", ASSUMPTION + "; weight limits vary by jurisdiction", usual=(3, 80)
    )
    zero_emission_allowance: Qty("t", ge=0, le=20) = qfield(
        0.0, "t", "Extra gross weight allowed for a zero-emission truck, where the local law "
        "grants one (electric trucks only)", ASSUMPTION + "; varies by jurisdiction",
        usual=(None, 4)
    )
    frontal_area: Qty("m^2", gt=0, le=40) = qfield(
        10.0, "m^2", "Frontal area",
        "common practice: 9–10.5 m² for a tractor with a box trailer",
        usual=(4, 12)
    )
    drag_coefficient: Qty("", gt=0, le=2) = qfield(
        0.6, "", "Aerodynamic drag coefficient Cd",
        "common practice: 0.55–0.65 for a tractor-trailer with a roof deflector"
    )
    rolling_resistance: Qty("", ge=0, le=0.05) = qfield(
        0.0055, "", "Rolling-resistance coefficient at low speed and 25 °C, the tyre-label "
        "test temperature (kg/t ÷ 1000)", EU_TYRE_LABEL
    )
    rolling_resistance_temperature: Qty("1/K", ge=0, le=0.01) = qfield(
        0.006, "1/K", "Temperature coefficient K_t of the rolling resistance: "
        "Crr(t) = Crr(25 °C) / (1 + K_t·(t − 25 °C)); 0 ignores temperature",
        "UNECE Regulation No. 117, Annex 6 (ISO 28580): K_t = 0.006 for class C3 tyres "
        "with load index above 121 (extrapolated outside 20–30 °C)"
    )
    rolling_resistance_speed: Qty("s/m", ge=0, le=0.01) = qfield(
        0.0, "s/m", "Speed dependence of the rolling-resistance coefficient: "
        "Crr(v) = Crr + k·v", ASSUMPTION + " (no speed dependence)"
    )
    rotating_mass_factor: Qty("", ge=1, le=1.5) = qfield(
        1.05, "", "Equivalent-mass factor for rotating parts (wheels, driveline) in acceleration",
        "common practice: 1.03–1.10 for a loaded heavy truck"
    )


class Diesel(Section):
    """Diesel powertrain: engine, driveline and fuel model."""

    engine_power: Qty("kW", gt=0, le=3000) = qfield(..., "kW", "Rated engine power",
        usual=(80, 800))
    driveline_efficiency: Qty("", gt=0, le=1) = qfield(
        0.88, "", "Engine-output-to-wheel efficiency (gearbox, axle)", COMMON_DRIVELINE
    )
    accessory_power: Qty("kW", ge=0, le=200) = qfield(
        3.0, "kW", "Engine-driven accessory load (air compressor, alternator, fan, steering)",
        ASSUMPTION, usual=(None, 30)
    )
    fuel_model: Literal["willans", "constant_bsfc"] = qfield(
        "willans", "", "Fuel model: the Willans line (part-load) or a constant BSFC",
        "Willans line: fuel power linear in engine power (published part-load model)"
    )
    bsfc: Qty("g/kWh", gt=100, lt=400) = qfield(
        200.0, "g/kWh", "Brake-specific fuel consumption for the constant-BSFC model",
        "from memory: typical heavy-duty cycle average 200–215 g/kWh"
    )
    willans_efficiency: Qty("", gt=0, le=0.7) = qfield(
        0.48, "", "Willans line marginal efficiency (slope of brake power over fuel power)",
        ASSUMPTION + "; gives about 44 % brake efficiency at rated power with the default loss"
    )
    willans_loss_share: Qty("", ge=0, le=0.5) = qfield(
        0.08, "", "Willans line friction and pumping loss at zero load, as a share of rated "
        "power", ASSUMPTION
    )
    idle_fuel_rate: Qty("L/h", ge=0, le=100) = qfield(
        2.42, "L/h", "Fuel burned while idling when stopped",
        "US DOE Vehicle Technologies Office, Fact of the Week #861 (2015): 0.64 US gal/h "
        "for a loaded tractor-semitrailer", usual=(None, 10)
    )
    fuel_density: Qty("kg/L", gt=0.7, lt=1.0) = qfield(0.832, "kg/L", "Diesel density", JEC_FUELS)
    fuel_lhv: Qty("MJ/kg", gt=30, lt=50) = qfield(
        43.1, "MJ/kg", "Diesel lower heating value", JEC_FUELS
    )
    def_ratio: Qty("", ge=0, le=0.1) = qfield(
        0.02, "", "Diesel exhaust fluid used per litre of diesel",
        "common practice: about 2 % of diesel volume (trade range 2–4 %)"
    )


class EnRoute(Section):
    """Optional en-route (public or opportunity) charging during the day."""

    power: Qty("kW", ge=0, le=10_000) = qfield(
        0.0, "kW", "Charger power available en route; 0 means no en-route charging", ASSUMPTION,
        usual=(None, 4000)
    )
    efficiency: Qty("", gt=0, le=1) = qfield(
        0.92, "", "Grid-to-battery efficiency at the en-route (DC) charger",
        "from memory: about 90 % (85–95 %) typical for DC charging"
    )
    overhead: Qty("min", ge=0, le=1440) = qfield(
        10.0, "min", "Time lost per en-route charging stop besides charging (detour, plugging)",
        ASSUMPTION, usual=(None, 120)
    )
    taper_start_soc: Qty("", gt=0, le=1) = qfield(
        0.8, "", "State of charge above which the charging power falls (linearly to "
        "power_share_at_full at a full battery)",
        "from memory: lithium-ion fast charging holds near full power to about 80 % state "
        "of charge, then tapers (constant current, then constant voltage)"
    )
    power_share_at_full: Qty("", gt=0, le=1) = qfield(
        0.2, "", "Share of the charger power still taken when the battery is full",
        "from memory: a few tens of percent of peak power near full charge"
    )
    arrival_soc: Qty("", ge=0, lt=1) | None = qfield(
        None, "", "State of charge when en-route charging starts; default: the reserve",
        "the battery's reserve (the truck charges when it must)"
    )
    charge_during_breaks: bool = mfield(
        True, "", "En-route charging may coincide with the driver's required breaks; the "
        "driver-time cost then counts only charging time beyond them (stop overhead always)",
        "common practice: trucks charge at rest areas during the required break"
    )
    break_after: Qty("h", gt=0, le=24) = qfield(
        4.5, "h", "Driving time after which the driver must take a break",
        "Regulation (EC) No 561/2006, Art. 7: a break after 4.5 h of driving"
    )
    break_duration: Qty("min", ge=0, le=600) = qfield(
        45.0, "min", "Length of the required break",
        "Regulation (EC) No 561/2006, Art. 7: at least 45 min"
    )


class Electric(Section):
    """Battery-electric powertrain: battery, motor, regeneration, auxiliaries, charging."""

    battery_capacity: Qty("kWh", gt=0, le=20_000) = qfield(..., "kWh", "Nominal battery capacity",
        usual=(50, 2000))
    usable_share: Qty("", gt=0, le=1) = qfield(
        0.9, "", "Share of the nominal capacity the battery management lets you use", ASSUMPTION
    )
    battery_mass: Qty("t", ge=0, le=50) = qfield(
        0.0, "t", "Battery mass (already inside curb mass; shown for the payload analysis)",
        ASSUMPTION, usual=(None, 12)
    )
    motor_power: Qty("kW", gt=0, le=5000) = qfield(..., "kW", "Rated (continuous) motor power",
        usual=(80, 1200))
    regen_power: Qty("kW", ge=0, le=5000) = qfield(
        300.0, "kW", "Maximum regenerative charging power into the battery", ASSUMPTION
    )
    drivetrain_efficiency: Qty("", gt=0, le=1) = qfield(
        0.90, "", "Battery-to-wheel efficiency in traction", COMMON_DRIVETRAIN
    )
    regen_efficiency: Qty("", ge=0, le=1) = qfield(
        0.85, "", "Wheel-to-battery efficiency when regenerating", ASSUMPTION
    )
    aux_power: Qty("kW", ge=0, le=200) = qfield(
        2.5, "kW", "Auxiliary load (compressor, steering, electronics) besides cabin climate",
        ASSUMPTION, usual=(None, 30)
    )
    heating_per_kelvin: Qty("kW/K", ge=0, le=10) = qfield(
        0.15, "kW/K", "Cabin heating load per kelvin below the comfort band (the battery's "
        "own heating is battery_heat_loss)",
        ASSUMPTION
    )
    battery_heat_below: Qty("degC", ge=-60, le=60) = qfield(
        10.0, "degC", "Battery temperature the thermal management keeps: below it the pack "
        "is heated while driving and pre-heated from the grid before the day",
        "from memory: lithium-ion packs are kept above about 10–15 °C for power and charging"
    )
    battery_heat_loss: Qty("kW/K", ge=0, le=1) = qfield(
        0.05, "kW/K", "Heat-loss conductance of the battery pack to the air (heating power "
        "per kelvin below battery_heat_below while operating)", ASSUMPTION
    )
    preconditioning: bool = mfield(
        True, "", "Pre-heat the cold-soaked pack to battery_heat_below from the depot grid "
        "each day (pack mass × specific heat 1 kJ/(kg·K) × kelvin; mass from battery_mass, "
        "or the capacity at 150 Wh/kg)",
        "from memory: cells about 0.9–1.1 kJ/(kg·K); packs about 130–170 Wh/kg"
    )
    regen_full_above: Qty("degC", ge=-60, le=60) = qfield(
        0.0, "degC", "Temperature from which regeneration is not limited by the cold; below "
        "it the regeneration power limit falls linearly to regen_share_cold at −20 °C",
        "from memory: battery management limits charge into cold cells (lithium plating)"
    )
    regen_share_cold: Qty("", ge=0, le=1) = qfield(
        0.5, "", "Share of the regeneration power limit left at −20 °C and below", ASSUMPTION
    )
    cooling_per_kelvin: Qty("kW/K", ge=0, le=10) = qfield(
        0.12, "kW/K", "Cabin and battery cooling load per kelvin above the comfort band",
        ASSUMPTION
    )
    comfort_low: Qty("degC", ge=-60, le=60) = qfield(
        15.0, "degC", "Lower edge of the comfort band", ASSUMPTION)
    comfort_high: Qty("degC", ge=-60, le=60) = qfield(
        24.0, "degC", "Upper edge of the comfort band", ASSUMPTION)
    charging_efficiency: Qty("", gt=0, le=1) = qfield(
        0.90, "", "Grid-to-battery efficiency at the depot charger (meter to cells)",
        "from memory: about 90 % (85–95 %) typical for depot or DC charging"
    )
    reserve: Qty("", ge=0, lt=1) = qfield(
        0.10, "", "State of charge that must remain at the end of the day", ASSUMPTION
    )
    start_soc: Qty("", gt=0, le=1) = qfield(
        1.0, "", "State of charge when the day starts (after overnight charging)", ASSUMPTION
    )
    eol_state_of_health: Qty("", gt=0, le=1) = qfield(
        0.80, "", "State of health (usable capacity share) at the battery's end of life",
        "common practice: 70–80 % for traction batteries"
    )
    cycle_life: Qty("", gt=0, le=1_000_000) = qfield(
        3000.0, "", "Full equivalent cycles until the end-of-life state of health (cycles "
        "counted on the energy discharged, regeneration not netted)", ASSUMPTION,
        usual=(300, 20000)
    )
    calendar_fade: Qty("", ge=0, le=0.5) = qfield(
        0.01, "", "State of health lost per year with time alone (calendar ageing; '1 %' "
        "accepted), on top of the wear of cycling",
        "from memory: lithium-ion traction cells at moderate temperature and mid state of "
        "charge lose roughly 1-2 % of capacity a year; a linear rule (measured fade slows "
        "with time)"
    )
    enroute: EnRoute = Field(default_factory=EnRoute, description="En-route charging")

    @model_validator(mode="after")
    def _band(self):
        if self.comfort_low > self.comfort_high:
            raise ValueError("comfort_low is above comfort_high")
        return self
