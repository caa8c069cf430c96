"""The commented starter scenario written by ``tco init``.

Kept as a template string so it is always shipped with the code; a test checks that it
validates against the schema, so it cannot drift from the field names.
"""

STARTER = '''\
# tco starter scenario. Edit the values, then: tco check THIS_FILE && tco run THIS_FILE
#
# Every physical quantity takes a number in the unit named in its comment, or a string
# with units: "36 t", "73000 lb", "62 mph", "6.1 m^2", "1.3 kWh/km", "4.10 / gal".
# Money is plain numbers in study.currency (ISO 4217). Fields left out take the defaults
# listed, with their sources, in the report's assumptions table.

[study]
name = "My route: diesel or electric?"   # title shown on the report (any text)
currency = "EUR"                         # ISO 4217 code
units = "metric"                         # metric | us  (how results are shown)
start_year = 2027                        # first calendar year of service
page_size = "A4"                         # A4 | Letter

[ambient]
temperature = 12        # [degC] drives air density and cabin heating/cooling
altitude = 0            # [m] start elevation of synthetic routes
headwind = 0            # [km/h] wind speed (negative: tailwind with wind_treatment = "headwind")
wind_treatment = "average_over_directions"   # or "headwind": against the truck on every leg

[route]
trips_per_day = 1       # trips per operating day
days_per_year = 250     # operating days per year
time_step = 1           # [s] simulation step

# One trip is a list of legs; each leg has a payload and either segments or a trace
# file (file = "trace.csv" with columns like "time [s]", "speed [km/h]", "grade [%]";
# or a .gpx track with timestamps and elevation).
[[route.legs]]
name = "loaded out"
payload = 20            # [t]
dwell_end = 30          # [min] unloading at the end of the leg
  [[route.legs.segments]]
  length = 5            # [km]
  speed = 50            # [km/h] cruise speed
  stops = 2             # stops inside the stretch
  dwell = 30            # [s] per stop
  [[route.legs.segments]]
  length = 60           # [km]
  speed = 80            # [km/h]
  grade = 0.5           # [%] rise over run, negative downhill

[[route.legs]]
name = "empty back"
payload = 0             # [t]
  [[route.legs.segments]]
  length = 60
  speed = 80
  grade = -0.5
  [[route.legs.segments]]
  length = 5
  speed = 50
  stops = 2

[[trucks]]
name = "Diesel truck"
powertrain = "diesel"
  [trucks.body]
  curb_mass = 15        # [t] empty combination, ready to drive
  gross_mass_limit = 40 # [t] set to your local law
  frontal_area = 10     # [m^2]
  drag_coefficient = 0.6
  rolling_resistance = 0.0055
  [trucks.diesel]
  engine_power = 330    # [kW]
  fuel_model = "willans"   # willans | constant_bsfc
  [trucks.costs]
  purchase_price = 120000
  maintenance = 0.15    # [currency/km]
  tyres = 0.03          # [currency/km]
  insurance_rate = 0.025
    [trucks.costs.residual]
    method = "declining_balance"
    rate = 0.15         # value lost per year

[[trucks]]
name = "Electric truck"
powertrain = "electric"
  [trucks.body]
  curb_mass = 18.5      # [t] battery included
  gross_mass_limit = 40 # [t]
  zero_emission_allowance = 0   # [t] extra gross weight, where the law grants it
  frontal_area = 10
  drag_coefficient = 0.6
  rolling_resistance = 0.0055
  [trucks.electric]
  battery_capacity = 540   # [kWh] nominal
  motor_power = 400        # [kW]
  charging_efficiency = 0.9
  reserve = 0.1            # state of charge kept at the end of the day
  cycle_life = 3000        # full equivalent cycles (on discharged energy) to end of life
  calendar_fade = 0.01     # state of health lost per year with time alone
    [trucks.electric.enroute]
    power = 0              # [kW] en-route charging; 0 = none
  [trucks.costs]
  purchase_price = 250000
  grant = 0
  maintenance = 0.10
  tyres = 0.03
  insurance_rate = 0.025
    [trucks.costs.battery_replacement]
    when = "never"         # never | year | cycles (end of life) | range (day no longer fits)
    cost_per_kwh = 140     # [currency/kWh]
    [trucks.costs.residual]
    method = "declining_balance"
    rate = 0.18

[finance]
analysis_years = 10
discount_rate = 0.07
money_basis = "nominal"        # nominal | real
driver_cost_per_hour = 35      # [currency/h]

[prices]
diesel = 1.50                  # [currency/L]  ("4.10 / gal" also works)
diesel_exhaust_fluid = 0.6     # [currency/L]
public_charging = 0.50         # [currency/kWh]
  [prices.electricity]
  energy_price = 0.20          # [currency/kWh] outside any time-of-use band
  demand_charge = 10           # [currency per kW of monthly peak, per month]
  fixed_fee = 50               # [currency/month]
  [prices.escalation]
  diesel = 0.02                # per year
  electricity = 0.02

[depot]
charging = "managed"           # managed (smart: steady power to departure) | unmanaged (full power)
chargers = 1
charger_power = 150            # [kW]
hardware_cost = 60000
installation_cost = 20000
charging_start_hour = 20
charging_end_hour = 6

[emissions]
diesel_factors = "en_16258_2012"   # en_16258_2012 | us_epa_ghg_hub_2025 | ipcc_2006_guidelines
gwp = "ipcc_ar6"                   # ipcc_ar5 | ipcc_ar6
grid_intensity = 300               # [g/kWh] first-year grid intensity
grid_change = -4                   # [%] per year

[uncertainty]
enabled = true
draws = 10000
seed = 1
'''
