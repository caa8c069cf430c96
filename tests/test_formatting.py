"""tco.report.formatting, tco.report.assumptions and tco.report.findings: figures as a
reader sees them. Expected texts are written out by hand; US values are converted with
the exact factors written here (international mile 1609.344 m, US gallon 3.785411784 L,
avoirdupois pound 0.45359237 kg: 1959 international yard and pound agreement; NIST
Handbook 44 Appendix C), never with the code's own conversion."""
import pytest

from tco.report import formatting as fm

MILE_M = 1609.344
GALLON_L = 3.785411784
POUND_KG = 0.45359237


def test_number_has_separators_and_no_exponent():
    assert fm.number(212345.6) == "212,346"
    assert fm.number(1.4567) == "1.46"
    assert fm.number(0.0452036) == "0.0452"
    assert fm.number(1.457e5, 0) == "145,700"
    assert fm.number(3.18e5) == "318,000"
    assert fm.number(None) == fm.DASH and fm.number(float("nan")) == fm.DASH
    for x in (1e-7, 2.5e-5, 1.2e9, -3.3e12):
        assert "e" not in fm.number(x).lower()


def test_data_size_in_binary_units():
    # IEC 80000-13 binary prefixes: 1 KiB = 2**10 bytes, 1 MiB = 2**20, 1 GiB = 2**30,
    # 1 TiB = 2**40. Hand calculation: 2,000,000,000 bytes / 2**30 = 1.8626... GiB → 1.9;
    # 1.2e12 bytes / 2**40 = 1.0914 TiB → 1.1; 50 * 2**30 bytes = 50 GiB (whole above 10)
    assert fm.data_size(2_000_000_000) == "1.9 GiB"
    assert fm.data_size(1.2e12) == "1.1 TiB"
    assert fm.data_size(50 * 2**30) == "50 GiB"
    assert fm.data_size(4 * 2**20) == "4 MiB"  # a whole number of units has no decimals
    assert fm.data_size(2_200) == "2.1 KiB"  # 2,200 / 1,024 = 2.148
    assert fm.data_size(1023) == "1,023 bytes"
    assert fm.data_size(float("inf")) == fm.DASH
    assert "e" not in fm.data_size(1e30).lower()  # 1e30 / 2**40 ≈ 9.1e17 TiB, written out


def test_plain_with_significant_figures():
    # hand values: 1/3 to six significant figures is 0.333333; 123456789 to three is
    # 123,000,000; 2/3 × 10**-7 to three is 0.0000000667 (never e-notation)
    assert fm.plain(1 / 3, significant=6) == "0.333333"
    assert fm.plain(123_456_789.0, significant=3) == "123,000,000"
    assert fm.plain(2e-7 / 3, significant=3) == "0.0000000667"
    assert fm.plain(0.1 + 0.2) == "0.30000000000000004"  # without: the shortest repr
    assert fm.plain(0.1 + 0.2, significant=15) == "0.3"


def test_money_and_percent():
    assert fm.money(19955.4, "EUR") == "19,955 EUR"
    assert fm.money(-102000, "USD") == "-102,000 USD"
    assert fm.signed_money(1200, "EUR") == "+1,200 EUR"
    # 0.0452036 as a rate: 4.52 % (the break-even discount rate of the example)
    assert fm.percent(0.0452036, 2) == "4.52 %"
    assert fm.percent(0.346) == "34.6 %"
    assert fm.percent(0) == "0 %"


def test_unit_prices_metric():
    assert fm.unit_price(1.48, "L", "EUR") == "1.48 EUR/L"
    assert fm.unit_price(0.21, "kWh", "EUR") == "0.210 EUR/kWh"
    assert fm.unit_price(11.5, "kW·month", "EUR") == "11.50 EUR/kW·month"
    assert fm.unit_price(0.15, "km", "EUR") == "0.150 EUR/km"


def test_unit_prices_us_with_exact_factors():
    # 1.48 per litre = 1.48 × 3.785411784 per US gallon = 5.6024 → "5.60"
    assert fm.unit_price(1.48, "L", "USD", "us") == f"{1.48 * GALLON_L:.2f} USD/US gal"
    # 0.15 per km = 0.15 × 1.609344 per mile = 0.2414 → "0.241"
    assert fm.unit_price(0.15, "km", "USD", "us") == f"{0.15 * MILE_M / 1000:.3f} USD/mi"
    # energy prices are per kWh in both systems
    assert fm.unit_price(0.12, "kWh", "USD", "us") == "0.120 USD/kWh"


def test_quantities_us_with_exact_factors():
    us = fm.Units("us")
    assert us.quantity(24_800.0, "t", 0) == f"{24_800 / POUND_KG:,.0f} lb"     # 54,675 lb
    assert us.quantity(15_150.0, "km", 2) == f"{15_150 / MILE_M:.2f} mi"       # 9.41 mi
    assert us.quantity(6 / 3.6, "km/h", 0) == f"{6 / 3.6 / 0.44704:.0f} mph"  # 4 mph
    # 0 °C = 32 °F; 8 °C = 46.4 °F (Fahrenheit = Celsius × 9/5 + 32)
    assert us.quantity(281.15, "degC", 1) == "46.4 °F"
    metric = fm.Units("metric")
    assert metric.quantity(24_800.0, "t", 1) == "24.8 t"
    assert metric.per_dist == 1000.0 and us.per_dist == MILE_M


def test_input_values_read_as_a_person_writes_them():
    # prices stored per SI unit (currency per m, per m³, per J) read per km, L, kWh
    assert fm.input_value(0.15 / 1000, "1/km", "trucks[0].costs.maintenance", "EUR") \
        == "0.150 EUR/km"
    assert fm.input_value(1.48 / 1e-3, "1/L", "prices.diesel", "EUR") == "1.48 EUR/L"
    assert fm.input_value(11.5 / 1000, "1/kW", "prices.electricity.demand_charge",
                          "EUR") == "11.50 EUR/kW·month"
    assert fm.input_value(125000.0, "currency", "x.purchase_price", "EUR") == "125,000 EUR"
    assert fm.input_value(95.0, "currency/month", "x.fixed_fee", "EUR") == "95 EUR/month"
    assert fm.input_value(0.055, "", "x.loan_rate", "EUR") == "5.5 %"
    assert fm.input_value(0.58, "", "x.drag_coefficient", "EUR") == "0.580"
    assert fm.input_value(2027, "", "study.start_year", "EUR") == "2027"
    assert fm.input_value([22, 23, 0, 1, 2, 3, 4, 5], "h", "bands[0].hours", "EUR") \
        == "22:00–06:00"
    assert fm.input_value("declining_balance", "", "x.method", "EUR") == "declining balance"
    assert fm.input_value("en_16258_2012", "", "x.diesel_factors", "EUR") == "en_16258_2012"
    # a per-kelvin coefficient is no price: UNECE Regulation No. 117 / ISO 28580 give the
    # rolling-resistance temperature correction K_t per kelvin (0.006 for C3 tyres)
    for cur, system in (("EUR", "metric"), ("USD", "us")):
        text = fm.input_value(0.006, "1/K", "trucks[0].rolling_resistance_temperature",
                              cur, system)
        assert cur not in text and text.endswith("/K"), text


def test_labels_come_from_descriptions():
    assert fm.label_from_description(
        "Maintenance and repair per distance (currency per km) [1/km]") \
        == "Maintenance and repair per distance"
    assert fm.field_label("trucks[0].costs.residual.method", "declining_balance or table [-]") \
        == "Residual value method"
    # a description naming another field, a choice or an option: the label stops before
    # that clause (the machine names stay in the workbook and summary.json)
    for description, label in [
            ("Tax credit received in tax_credit_year [currency]", "Tax credit received"),
            ("Loss of value per year (declining_balance) [-]", "Loss of value per year"),
            ("Count the driver's wages as a cost line: driver_cost_per_hour for the duty "
             "time of every trip", "Count the driver's wages as a cost line"),
            ("Name of the output folder under --out", "Name of the output folder"),
            ("Wind speed. With wind_treatment 'average' its direction is averaged [km/h]",
             "Wind speed")]:
        assert fm.label_from_description(description) == label


def test_irr_text():
    assert fm.irr_text(0.094) == "9.4 %"
    assert fm.irr_text(None, "the extra investment never pays back") \
        == "n/a (the extra investment never pays back)"


# ---------------------------------------------------------------- appendix ----------
@pytest.fixture(scope="module")
def demo_rows():
    from tco.resources import demo_path
    from tco.scenario import load_scenario
    from tco.scenario.base import field_sources

    loaded = load_scenario(demo_path())
    return loaded.scenario, field_sources(loaded.scenario)


def test_appendix_shows_only_what_applies(demo_rows):
    from tco.report.assumptions import applies, build_appendix

    scenario, rows = demo_rows
    # the demo's trucks are bought with loans: no lease field applies
    assert scenario.trucks[0].costs.financing.method == "loan"
    assert not applies("trucks[0].costs.financing.lease_payment", scenario)
    assert applies("trucks[0].costs.financing.loan_rate", scenario)
    # a diesel truck has no battery to replace
    assert scenario.trucks[0].powertrain == "diesel"
    assert not applies("trucks[0].costs.battery_replacement.cost_per_kwh", scenario)
    appendix = build_appendix(rows, scenario)
    text = repr(appendix)
    assert "Lease payment" not in text
    assert "trucks[0]" not in text and "route.legs" not in text  # no machine keys
    # no unit placeholders: "currency" only as the word in the study's currency label
    assert "currency" not in text
    assert "1/L" not in text and "1/km" not in text and "e+0" not in text
    trucks = next(s for s in appendix["sections"] if s["title"] == "Trucks")
    assert trucks["columns"] == ["Input", "Diesel tractor", "Electric tractor"]
    route = next(s for s in appendix["sections"] if s["title"] == "Route and conditions")
    assert len(route["tables"]) == len(scenario.route.legs)  # one segment table per leg
    counts = appendix["counts"]
    assert counts["shown"] + counts["left_out"] == len(rows)
    assert counts["user"] == sum(1 for r in rows if r["source"] == "user"
                                 and applies(r["field"], scenario) and r["value"] is not None)


def test_appendix_marks_defaults_with_their_source(demo_rows):
    from tco.report.assumptions import build_appendix

    scenario, rows = demo_rows
    appendix = build_appendix(rows, scenario)
    numbers = {s["number"]: s["text"] for s in appendix["sources"]}
    # the idle fuel rate of the diesel truck is a default with a published source
    trucks = next(s for s in appendix["sections"] if s["title"] == "Trucks")
    idle = next(r for r in trucks["rows"] if r[0].startswith("Fuel burned while idling"))
    mark = int(idle[1].rsplit("[", 1)[1].rstrip("]"))
    assert numbers[mark].startswith("US DOE")
    # 0.64 US gal/h (the source's figure) in litres: 0.64 × 3.785411784 = 2.42 L/h
    assert idle[1].startswith(f"{0.64 * GALLON_L:.2f} L/h")


# ---------------------------------------------------------------- findings ----------
def test_power_sentence_in_us_units():
    from tco.report.findings import payload_sentence, power_sentence

    f = {"limited_time": 976.0, "limited_distance": 15_150.0, "speed_deficit_max": 6 / 3.6}
    us = power_sentence("Diesel tractor", f, "engine", fm.Units("us"))
    assert f"over {15_150 / MILE_M:.2f} mi" in us
    assert f"up to {6 / 3.6 / 0.44704:.0f} mph less" in us
    assert " km" not in us and "km/h" not in us
    metric = power_sentence("Diesel tractor", f, "engine", fm.Units("metric"))
    assert "over 15.15 km" in metric and "up to 6 km/h less" in metric
    p = {"ok": False, "lost_per_trip": 1_200.0, "extra_trips_per_year": 14.0}
    text = payload_sentence("Electric tractor", p, 24_800.0, fm.Units("us"))
    assert f"carry {24_800 / POUND_KG:,.0f} lb" in text and " t " not in text
