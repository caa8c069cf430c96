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
        "battery or full tank, driver)", usual=(3, 40),
        usual_source="common practice: about 3 t (light rigid) to 15–25 t (tractor-trailer, "
        "electric included)")
    gross_mass_limit: Qty("t", gt=0, le=300) = qfield(
        40.0, "t", "Legal gross combination weight limit for this operation; set it to "
        "your local law", ASSUMPTION + "; weight limits vary by jurisdiction", usual=(3, 80),
        usual_source="common practice: road laws set 3.5 to 44 t for most trucks; long "
        "combinations 60–80 t where allowed")
    zero_emission_allowance: Qty("t", ge=0, le=20) = qfield(
        0.0, "t", "Extra gross weight allowed for a zero-emission truck, where the local law "
        "grants one (electric trucks only)", ASSUMPTION + "; varies by jurisdiction",
        usual=(None, 4),
        usual_source="from memory: allowances for zero-emission trucks are about 1–4 t where "
        "granted")
    frontal_area: Qty("m^2", gt=0, le=40) = qfield(
        10.0, "m^2", "Frontal area",
        "common practice: 9–10.5 m² for a tractor with a box trailer",
        usual=(4, 12),
        usual_source="common practice: about 5 m² (light rigid) to 9–10.5 m² (tractor with a box "
        "trailer)")
    drag_coefficient: Qty("", gt=0, le=2) = qfield(
        0.6, "", "Aerodynamic drag coefficient Cd",
        "common practice: 0.55–0.65 for a tractor-trailer with a roof deflector",
        usual=(0.3, 0.9),
        usual_source="common practice: 0.55–0.65 for a tractor-trailer with a roof deflector; 0.4 "
        "(streamlined) to 0.9 (boxy rigid), from memory")
    rolling_resistance: Qty("", ge=0, le=0.05) = qfield(
        0.0055, "", "Rolling-resistance coefficient at low speed and 25 °C, the tyre-label "
        "test temperature (kg/t ÷ 1000)", EU_TYRE_LABEL,
        usual=(0.003, 0.01),
        usual_source="Regulation (EU) 2020/740 tyre classes A (≤ 4.0 kg/t) to E (≥ 7.1 kg/t); worn "
        "or winter tyres and poor roads more (from memory)")
    rolling_resistance_temperature: Qty("1/K", ge=0, le=0.01) = qfield(
        0.006, "1/K", "Temperature coefficient K_t of the rolling resistance: "
        "Crr(t) = Crr(25 °C) / (1 + K_t·(t − 25 °C)); 0 ignores temperature",
        "UNECE Regulation No. 117, Annex 6 (ISO 28580): K_t = 0.006 for class C3 tyres "
        "with load index above 121 (extrapolated outside 20–30 °C)",
        usual=(0.0, 0.01),
        usual_source="UNECE Regulation No. 117, Annex 6: K_t 0.006 (C3), 0.008 (C2), 0.010 (C1), "
        "from memory; 0 ignores temperature")
    rolling_resistance_speed: Qty("s/m", ge=0, le=0.01) = qfield(
        0.0, "s/m", "Speed dependence of the rolling-resistance coefficient: "
        "Crr(v) = Crr + k·v", ASSUMPTION + " (no speed dependence)",
        usual=(0.0, 0.0002),
        usual_source="from memory: truck tyres gain at most about the low-speed coefficient again "
        "at highway speed (0.0002 s/m × 25 m/s = 0.005)")
    rotating_mass_factor: Qty("", ge=1, le=1.5) = qfield(
        1.05, "", "Equivalent-mass factor for rotating parts (wheels, driveline) in acceleration",
        "common practice: 1.03–1.10 for a loaded heavy truck",
        usual=(1.02, 1.15),
        usual_source="common practice: 1.03–1.10 for a loaded heavy truck, more when empty")


class Diesel(Section):
    """Diesel powertrain: engine, driveline and fuel model."""

    engine_power: Qty("kW", gt=0, le=3000) = qfield(..., "kW", "Rated engine power",
        usual=(80, 800),
        usual_source="common practice: about 100 kW (light rigid) to 600 kW (heavy tractor)")
    driveline_efficiency: Qty("", gt=0, le=1) = qfield(
        0.88, "", "Engine-output-to-wheel efficiency (gearbox, axle)", COMMON_DRIVELINE,
        usual=(0.8, 0.95),
        usual_source="common practice: engine-output-to-wheel driveline efficiency about 85–90 % "
        "at highway load")
    accessory_power: Qty("kW", ge=0, le=200) = qfield(
        3.0, "kW", "Engine-driven accessory load (air compressor, alternator, fan, steering)",
        ASSUMPTION, usual=(None, 30),
        usual_source="common practice: a few kW on average; tens with a refrigeration or power "
        "take-off load")
    fuel_model: Literal["willans", "constant_bsfc"] = qfield(
        "willans", "", "Fuel model: the Willans line (part-load) or a constant BSFC",
        "Willans line: fuel power linear in engine power (published part-load model)"
    )
    bsfc: Qty("g/kWh", gt=100, lt=400) = qfield(
        200.0, "g/kWh", "Brake-specific fuel consumption for the constant-BSFC model",
        "from memory: typical heavy-duty cycle average 200–215 g/kWh",
        usual=(180, 260),
        usual_source="from memory: best points about 185 g/kWh, cycle averages 200–215; smaller or "
        "older engines more")
    willans_efficiency: Qty("", gt=0, le=0.7) = qfield(
        0.48, "", "Willans line marginal efficiency (slope of brake power over fuel power)",
        ASSUMPTION + "; gives about 44 % brake efficiency at rated power with the default loss",
        usual=(0.4, 0.55),
        usual_source="from memory: marginal (Willans) efficiency of heavy-duty diesels about "
        "0.45–0.5")
    willans_loss_share: Qty("", ge=0, le=0.5) = qfield(
        0.08, "", "Willans line friction and pumping loss at zero load, as a share of rated "
        "power", ASSUMPTION,
        usual=(0.03, 0.15),
        usual_source="from memory: friction and pumping mean effective pressure of 1–2 bar against "
        "20 bar or more at rated load")
    idle_fuel_rate: Qty("L/h", ge=0, le=100) = qfield(
        2.42, "L/h", "Fuel burned while idling when stopped",
        "US DOE Vehicle Technologies Office, Fact of the Week #861 (2015): 0.64 US gal/h "
        "for a loaded tractor-semitrailer", usual=(None, 10),
        usual_source="US DOE VTO Fact of the Week #861 (2015): 0.49–0.64 US gal/h (1.9–2.4 L/h); "
        "more at high idle or with loads (from memory)")
    fuel_density: Qty("kg/L", gt=0.7, lt=1.0) = qfield(0.832, "kg/L", "Diesel density", JEC_FUELS,
        usual=(0.8, 0.86),
        usual_source="EN 590: 0.820–0.845 kg/L at 15 °C (from memory); JEC WTT v5: 0.832 kg/L")
    fuel_lhv: Qty("MJ/kg", gt=30, lt=50) = qfield(
        43.1, "MJ/kg", "Diesel lower heating value", JEC_FUELS,
        usual=(40, 44),
        usual_source="JEC WTT v5: 43.1 MJ/kg for diesel; FAME blends less (FAME about 37 MJ/kg, "
        "from memory)")
    def_ratio: Qty("", ge=0, le=0.1) = qfield(
        0.02, "", "Diesel exhaust fluid used per litre of diesel",
        "common practice: about 2 % of diesel volume (trade range 2–4 %)",
        usual=(0.01, 0.06),
        usual_source="common practice: about 2 % of diesel volume (trade range 2–4 %)")


class EnRoute(Section):
    """Optional en-route (public or opportunity) charging during the day."""

    power: Qty("kW", ge=0, le=10_000) = qfield(
        0.0, "kW", "Charger power available en route; 0 means no en-route charging", ASSUMPTION,
        usual=(None, 4000),
        usual_source="from memory: public truck chargers 150–400 kW; megawatt charging about "
        "1–3.75 MW")
    efficiency: Qty("", gt=0, le=1) = qfield(
        0.92, "", "Grid-to-battery efficiency at the en-route (DC) charger",
        "from memory: about 90 % (85–95 %) typical for DC charging",
        usual=(0.8, 0.98),
        usual_source="from memory: about 90 % (85–95 %) typical for DC charging")
    overhead: Qty("min", ge=0, le=1440) = qfield(
        10.0, "min", "Time lost per en-route charging stop besides charging (detour, plugging)",
        ASSUMPTION, usual=(None, 120),
        usual_source="common practice: a detour and plugging in take minutes to an hour")
    taper_start_soc: Qty("", gt=0, le=1) = qfield(
        0.8, "", "State of charge above which the charging power falls (linearly to "
        "power_share_at_full at a full battery)",
        "from memory: lithium-ion fast charging holds near full power to about 80 % state "
        "of charge, then tapers (constant current, then constant voltage)",
        usual=(0.5, 0.95),
        usual_source="from memory: lithium-ion fast charging tapers from about 60–90 % state of "
        "charge")
    power_share_at_full: Qty("", gt=0, le=1) = qfield(
        0.2, "", "Share of the charger power still taken when the battery is full",
        "from memory: a few tens of percent of peak power near full charge",
        usual="none: the shape of a charging curve, any share")
    arrival_soc: Qty("", ge=0, lt=1) | None = qfield(
        None, "", "State of charge when en-route charging starts; default: the reserve",
        "the battery's reserve (the truck charges when it must)",
        usual=(0, 0.5),
        usual_source="common practice: trucks arrive at a charger with about 10–30 % left")
    charge_during_breaks: bool = mfield(
        True, "", "En-route charging may coincide with the driver's required breaks; the "
        "driver-time cost then counts only charging time beyond them (stop overhead always)",
        "common practice: trucks charge at rest areas during the required break"
    )
    break_after: Qty("h", gt=0, le=24) = qfield(
        4.5, "h", "Driving time after which the driver must take a break",
        "Regulation (EC) No 561/2006, Art. 7: a break after 4.5 h of driving",
        usual=(4, 8),
        usual_source="Regulation (EC) No 561/2006, Art. 7: 4.5 h; other road laws about 4–8 h "
        "(from memory)")
    break_duration: Qty("min", ge=0, le=600) = qfield(
        45.0, "min", "Length of the required break",
        "Regulation (EC) No 561/2006, Art. 7: at least 45 min",
        usual=(15, 60),
        usual_source="Regulation (EC) No 561/2006, Art. 7: 45 min (or 15 + 30); other rules 30 min "
        "(from memory)")


class Electric(Section):
    """Battery-electric powertrain: battery, motor, regeneration, auxiliaries, charging."""

    battery_capacity: Qty("kWh", gt=0, le=20_000) = qfield(..., "kWh", "Nominal battery capacity",
        usual=(50, 2000),
        usual_source="common practice: about 100 kWh (light rigid) to 600–1,000 kWh (heavy "
        "tractor)")
    usable_share: Qty("", gt=0, le=1) = qfield(
        0.9, "", "Share of the nominal capacity the battery management lets you use", ASSUMPTION,
        usual=(0.7, 1.0),
        usual_source="common practice: battery management keeps about 5–20 % of the nominal "
        "capacity unused")
    battery_mass: Qty("t", ge=0, le=50) = qfield(
        0.0, "t", "Battery mass (already inside curb mass; shown for the payload analysis)",
        ASSUMPTION, usual=(None, 12),
        usual_source="from memory: packs of about 130–170 Wh/kg: 1,000 kWh weighs about 6–8 t")
    motor_power: Qty("kW", gt=0, le=5000) = qfield(..., "kW", "Rated (continuous) motor power",
        usual=(80, 1200),
        usual_source="common practice: about 100 kW (light rigid) to 500–700 kW (heavy tractor)")
    regen_power: Qty("kW", ge=0, le=5000) = qfield(
        300.0, "kW", "Maximum regenerative charging power into the battery", ASSUMPTION,
        usual=(0, 1000),
        usual_source="from memory: regeneration is held to a few hundred kW by the motor and "
        "battery")
    drivetrain_efficiency: Qty("", gt=0, le=1) = qfield(
        0.90, "", "Battery-to-wheel efficiency in traction", COMMON_DRIVETRAIN,
        usual=(0.8, 0.95),
        usual_source="common practice: battery-to-wheel drivetrain efficiency about 90 %")
    regen_efficiency: Qty("", ge=0, le=1) = qfield(
        0.85, "", "Wheel-to-battery efficiency when regenerating", ASSUMPTION,
        usual=(0.6, 0.95),
        usual_source="from memory: wheel-to-battery efficiency about 70–90 %")
    aux_power: Qty("kW", ge=0, le=200) = qfield(
        2.5, "kW", "Auxiliary load (compressor, steering, electronics) besides cabin climate",
        ASSUMPTION, usual=(None, 30),
        usual_source="common practice: a few kW on average; tens with a refrigeration or power "
        "take-off load")
    heating_per_kelvin: Qty("kW/K", ge=0, le=10) = qfield(
        0.15, "kW/K", "Cabin heating load per kelvin below the comfort band (the battery's "
        "own heating is battery_heat_loss)",
        ASSUMPTION,
        usual=(0, 0.5),
        usual_source="from memory: a truck cab needs a few kW of heat at -20 °C, about 0.1–0.3 "
        "kW/K")
    battery_heat_below: Qty("degC", ge=-60, le=60) = qfield(
        10.0, "degC", "Battery temperature the thermal management keeps: below it the pack "
        "is heated while driving and pre-heated from the grid before the day",
        "from memory: lithium-ion packs are kept above about 10–15 °C for power and charging",
        usual=(0, 25),
        usual_source="from memory: lithium-ion packs are kept above about 10–15 °C for power and "
        "charging")
    battery_heat_loss: Qty("kW/K", ge=0, le=1) = qfield(
        0.05, "kW/K", "Heat-loss conductance of the battery pack to the air (heating power "
        "per kelvin below battery_heat_below while operating)", ASSUMPTION,
        usual=(0, 0.2),
        usual_source="from memory: an insulated pack loses tens to a few hundred watts per kelvin")
    preconditioning: bool = mfield(
        True, "", "Pre-heat the cold-soaked pack to battery_heat_below from the depot grid "
        "each day (pack mass × specific heat 1 kJ/(kg·K) × kelvin; mass from battery_mass, "
        "or the capacity at 150 Wh/kg)",
        "from memory: cells about 0.9–1.1 kJ/(kg·K); packs about 130–170 Wh/kg"
    )
    regen_full_above: Qty("degC", ge=-60, le=60) = qfield(
        0.0, "degC", "Temperature from which regeneration is not limited by the cold; below "
        "it the regeneration power limit falls linearly to regen_share_cold at −20 °C",
        "from memory: battery management limits charge into cold cells (lithium plating)",
        usual=(-10, 15),
        usual_source="from memory: battery management limits charge into cells colder than about "
        "0–10 °C")
    regen_share_cold: Qty("", ge=0, le=1) = qfield(
        0.5, "", "Share of the regeneration power limit left at −20 °C and below", ASSUMPTION,
        usual="none: any share, from no regeneration to the full limit")
    cooling_per_kelvin: Qty("kW/K", ge=0, le=10) = qfield(
        0.12, "kW/K", "Cabin and battery cooling load per kelvin above the comfort band",
        ASSUMPTION,
        usual=(0, 0.5),
        usual_source="from memory: a truck cab needs a few kW of cooling on a hot day, about "
        "0.1–0.3 kW/K")
    comfort_low: Qty("degC", ge=-60, le=60) = qfield(
        15.0, "degC", "Lower edge of the comfort band", ASSUMPTION,
        usual=(10, 22),
        usual_source="common practice: indoor comfort about 18–24 °C; the band's edges are where "
        "the cab needs heat or cooling")
    comfort_high: Qty("degC", ge=-60, le=60) = qfield(
        24.0, "degC", "Upper edge of the comfort band", ASSUMPTION,
        usual=(18, 30),
        usual_source="common practice: indoor comfort about 18–24 °C; the band's edges are where "
        "the cab needs heat or cooling")
    charging_efficiency: Qty("", gt=0, le=1) = qfield(
        0.90, "", "Grid-to-battery efficiency at the depot charger (meter to cells)",
        "from memory: about 90 % (85–95 %) typical for depot or DC charging",
        usual=(0.8, 0.98),
        usual_source="from memory: about 90 % (85–95 %) typical for depot or DC charging")
    reserve: Qty("", ge=0, lt=1) = qfield(
        0.10, "", "State of charge that must remain at the end of the day", ASSUMPTION,
        usual=(0, 0.3),
        usual_source="common practice: 5–20 % of charge kept as a reserve")
    start_soc: Qty("", gt=0, le=1) = qfield(
        1.0, "", "State of charge when the day starts (after overnight charging)", ASSUMPTION,
        usual=(0.7, 1.0),
        usual_source="common practice: trucks are charged to 80–100 % overnight")
    eol_state_of_health: Qty("", gt=0, le=1) = qfield(
        0.80, "", "State of health (usable capacity share) at the battery's end of life",
        "common practice: 70–80 % for traction batteries",
        usual=(0.6, 0.9),
        usual_source="common practice: 70–80 % for traction batteries")
    cycle_life: Qty("", gt=0, le=1_000_000) = qfield(
        3000.0, "", "Full equivalent cycles until the end-of-life state of health (cycles "
        "counted on the energy discharged, regeneration not netted)", ASSUMPTION,
        usual=(300, 20000),
        usual_source="from memory: about 1,500–3,000 full cycles for NMC cells and 3,000–6,000 for "
        "LFP cells")
    calendar_fade: Qty("", ge=0, le=0.5) = qfield(
        0.01, "", "State of health lost per year with time alone (calendar ageing; '1 %' "
        "accepted), on top of the wear of cycling",
        "from memory: lithium-ion traction cells at moderate temperature and mid state of "
        "charge lose roughly 1-2 % of capacity a year; a linear rule (measured fade slows "
        "with time)",
        usual=(0, 0.05),
        usual_source="from memory: lithium-ion traction cells lose roughly 1–2 % of capacity a "
        "year with time alone")
    enroute: EnRoute = Field(default_factory=EnRoute, description="En-route charging")

    @model_validator(mode="after")
    def _band(self):
        if self.comfort_low > self.comfort_high:
            raise ValueError("comfort_low is above comfort_high")
        return self
