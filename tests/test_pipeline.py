"""The whole chain on the demo: the depot charging rule, shared with ``tco fleet``."""
from __future__ import annotations

import math
import re
import tomllib

import numpy as np
import pytest

from tco.fleet import evaluate_fleet, read_fleet
from tco.pipeline import evaluate
from tco.report.context import depot_sentences
from tco.report.summary import build_summary
from tco.resources import demo_path
from tco.scenario import LoadedScenario, load_scenario, parse_scenario

KWH = 3.6e6


def _demo(tmp_path=None, **depot) -> LoadedScenario:
    """The demo with keys added to its [depot] and the Monte Carlo off (written out when
    asked, so a fleet can use it as its base and its cycle)."""
    text = demo_path().read_text(encoding="utf-8").replace("enabled = true",
                                                            "enabled = false")
    lines = [f"{k} = {v!r}".replace("'", '"') for k, v in depot.items()]
    for k in depot:
        text = re.sub(rf"(?m)^{k} = .*$\n", "", text)
    text = text.replace("[depot]\n", "[depot]\n" + "\n".join(lines) + "\n")
    assert tomllib.loads(text)["depot"].items() >= depot.items()
    if tmp_path is None:
        raw = tomllib.loads(text)
        return LoadedScenario(parse_scenario(raw, demo_path()), demo_path(), raw, "test")
    p = tmp_path / "demo.toml"
    p.write_text(text, encoding="utf-8")
    return load_scenario(p)


@pytest.fixture(scope="module")
def by_rule():
    return {rule: evaluate(_demo(charging=rule)) for rule in ("managed", "unmanaged")}


@pytest.mark.parametrize("rule", ["managed", "unmanaged"])
def test_one_truck_equals_a_one_vehicle_fleet(tmp_path, by_rule, rule):
    """`tco run` and `tco fleet` share one depot model: the demo run as a fleet of one
    vehicle (the same route, arriving when the demo's window opens and leaving when it
    closes) gives the same present values to 1e-9 under each rule."""
    base = _demo(tmp_path, charging=rule)
    fleet = tmp_path / "fleet.csv"
    fleet.write_text("vehicle,route,cycle,current,candidate,arrive,depart\n"
                     "D-1,demo,demo.toml,Diesel tractor,Electric tractor,21:00,05:00\n",
                     encoding="utf-8")
    res = evaluate_fleet(base, read_fleet(fleet), fleet, jobs=1)
    row = res.routes.iloc[0]
    pv = {m.name: m.present_value for m in by_rule[rule].cashflow.trucks}
    assert row["pv_current"] == pytest.approx(pv["Diesel tractor"], rel=1e-9, abs=1e-6)
    assert row["pv_candidate"] == pytest.approx(pv["Electric tractor"], rel=1e-9, abs=1e-6)
    assert row["peak_contribution_W"] == pytest.approx(
        by_rule[rule].depot["trucks"]["Electric tractor"]["peak_contribution"], rel=1e-12)


def test_managed_demand_charge_by_hand(by_rule):
    """Managed charging of one truck: it draws its nightly depot energy evenly over the
    21:00-05:00 window (8 h), so the monthly peak is E/8 h and the demand charge is
    12 × 11.5 EUR/kW-month × peak a year at today's price, growing 1.5 %/yr with
    electricity (year y at × 1.015^y), each year discounted at 7 % (hand calculation of the
    tariff's definition)."""
    r = by_rule["managed"]
    op = r.trucks["Electric tractor"].operation
    per_day = op.grid_energy_depot / op.operating_days
    peak_kw = per_day / (8 * 3600) / 1000
    yearly = 12 * 11.5 * peak_kw
    pv = sum(yearly * 1.015 ** y / 1.07 ** y for y in range(1, 11))
    d = r.depot["trucks"]["Electric tractor"]
    assert d["peak_contribution"] / 1000 == pytest.approx(peak_kw, rel=1e-9)
    assert d["demand_charge"] == pytest.approx(pv, rel=1e-9)
    # unmanaged: the same truck at the charger's full 150 kW
    full = sum(12 * 11.5 * 150 * 1.015 ** y / 1.07 ** y for y in range(1, 11))
    assert d["other_demand_charge"] == pytest.approx(full, rel=1e-9)
    assert by_rule["unmanaged"].depot["trucks"]["Electric tractor"]["demand_charge"] == \
        pytest.approx(full, rel=1e-9)


def test_the_charging_rule_alone_flips_the_verdict_and_the_report_says_why(by_rule):
    diff = {k: r.cashflow.comparisons[0].present_value_difference
            for k, r in by_rule.items()}
    assert diff["managed"] < 0 < diff["unmanaged"]
    for rule, other in (("managed", "unmanaged"), ("unmanaged", "managed")):
        r = by_rule[rule]
        text = " ".join(depot_sentences(r))
        d = r.depot["trucks"]["Electric tractor"]
        assert f"Depot: {rule} charging on 1 × 150 kW charger for this truck alone" in text
        assert "the Electric tractor carries all of its build and upkeep" in text
        assert f"({round(d['depot_cost']):,} EUR in present value)" in text
        assert f"demand charge of {round(d['demand_charge']):,} EUR" in text
        assert f"{other} charging: {round(d['other_demand_charge']):,} EUR" in text
        # the other rule's verdict is the other run's own figure
        word = "more" if diff[other] > 0 else "less"
        assert f"would cost {round(abs(diff[other])):,} EUR {word}" in text
        # summary.json carries the same facts
        s = build_summary(r)["depot"]
        assert s["charging"] == rule and s["other_charging"] == other
        assert s["charger_kW"] == 150 and s["trucks_sharing"] == 1
        t = s["trucks"]["Electric tractor"]
        assert t["other_present_value_difference"] == pytest.approx(diff[other], rel=1e-9)
        assert t["demand_charge_pv"] == d["demand_charge"]


def test_trucks_sharing_the_depot_split_its_cost():
    """Four trucks sharing the depot (four chargers): this truck carries a quarter of the
    depot's build and its own part of the peak."""
    one = evaluate(_demo(charging="managed"))
    four = evaluate(_demo(charging="managed", trucks_served=4, chargers=4))
    a = one.depot["trucks"]["Electric tractor"]
    b = four.depot["trucks"]["Electric tractor"]
    # four chargers at a quarter each: the same depot cost as one charger alone, except
    # the grid connection, paid once and split four ways
    grid = 25000
    assert b["depot_cost"] == pytest.approx(a["depot_cost"] - grid + grid / 4, rel=1e-9)
    assert b["peak_contribution"] == pytest.approx(a["peak_contribution"], rel=1e-9)
    assert four.depot["trucks_sharing"] == 4
    assert "shared by 4 trucks; the Electric tractor carries 1/4 of its build" in \
        " ".join(depot_sentences(four))


def test_managed_charging_needs_a_charger_per_truck():
    from tco.errors import InputError

    with pytest.raises(InputError) as err:
        evaluate(_demo(charging="managed", trucks_served=3))
    assert err.value.where == "depot.chargers"
    assert "3 trucks sharing the depot need 3 chargers; 1 given" in err.value.line()
    assert "\n" not in err.value.line()




def test_end_of_life_verdict_is_the_same_everywhere(by_rule):
    """The battery's end-of-life verdict (the year the day no longer fits) reads the same
    in summary.json, the report's verdict and feasibility table (HTML and PDF share them)
    and the workbook's Summary sheet, which used to say "ok" where summary.json did not."""
    from tco.report.context import _feasibility, _verdict
    from tco.report.workbook import build_workbook

    r = by_rule["managed"]
    s = build_summary(r)
    a = s["trucks"]["Electric tractor"]["feasibility"]["battery_by_year"]
    assert a["first_short_year"] is not None
    year = a["first_short_year"]
    assert a["verdict"].startswith(f"from year {year} ({2027 + year - 1})")
    assert a["verdict"] in _verdict(r, s)
    table = {row["truck"]: row for row in _feasibility(r)}
    assert a["text"] in table["Electric tractor"]["detail"]
    ws = build_workbook(r, s)["Summary"]
    rows = {str(row[0].value).strip(): row for row in ws.iter_rows()
            if row[0].value is not None}
    status = rows["battery by year"][1].value
    assert status == f"en-route charging from year {year}"
    assert a["text"] in rows["battery by year"][2].value
    # the end-of-life battery needs en-route charging: not "ok" in the workbook either
    assert s["trucks"]["Electric tractor"]["feasibility"]["battery"]["end_of_life"]["ok"] \
        is False
    assert rows["battery (end of life)"][1].value == "en-route charging"


def test_the_verdict_says_whether_driver_wages_are_in(by_rule):
    from tco.report.context import _verdict

    off = by_rule["managed"]
    s = build_summary(off)
    assert s["cost_covers"]["driver_wages"] is False
    assert "Driver wages are not included" in _verdict(off, s)
    # the escalations the demo leaves unset follow inflation, and the assumptions say so
    assert "trucks[0].costs.escalation.maintenance" in \
        s["cost_covers"]["escalations_following_inflation"]
    assert any("follow general inflation, 2.0 % a year" in a
               for a in s["cashflow"]["assumptions"])

    text = demo_path().read_text(encoding="utf-8").replace(
        "enabled = true", "enabled = false").replace(
        "driver_cost_per_hour = 38", "driver_cost_per_hour = 38\ndriver_wages = true")
    raw = tomllib.loads(text)
    on = evaluate(LoadedScenario(parse_scenario(raw, demo_path()), demo_path(), raw, "t"))
    s_on = build_summary(on)
    assert s_on["cost_covers"]["driver_wages"] is True
    assert "Driver wages are included (38.00 EUR an hour of duty)" in _verdict(on, s_on)
    # year 1 wages of the diesel: 500 trips × its trip duration × 38 EUR/h, grown one year
    # at the 2 % inflation its unset escalation follows
    op = on.trucks["Diesel tractor"].operation
    year1 = on.cashflow.table.query("truck == 'Diesel tractor' and line == 'driver_wages' "
                                    "and year == 1")["amount"].iloc[0]
    assert year1 == pytest.approx(op.trips * op.trip_duration / 3600 * 38 * 1.02, rel=1e-12)


@pytest.fixture(scope="module")
def demo_unc():
    text = demo_path().read_text(encoding="utf-8").replace("draws = 10000", "draws = 4000")
    raw = tomllib.loads(text)
    return evaluate(LoadedScenario(parse_scenario(raw, demo_path()), demo_path(), raw, "t"))


def test_tornado_spans_the_p10_p90_of_the_scenario_distribution(demo_unc):
    """The demo's diesel price is triangular(1.20, 1.48, 1.95) EUR/L. Its P10 and P90 by
    the triangular quantile function (hand calculation; F(mode) = 0.28/0.75 = 0.373):
    P10 = 1.20 + √(0.1 × 0.75 × 0.28) = 1.344914, P90 = 1.95 − √(0.1 × 0.75 × 0.47) =
    1.762250; scipy.stats.triang gives the same (reference library)."""
    from scipy import stats

    t = demo_unc.uncertainty.tornado
    bar = t[(t.truck == "Electric tractor") & (t.key == "prices.diesel")].iloc[0]
    p10 = 1.20 + math.sqrt(0.1 * 0.75 * 0.28)
    p90 = 1.95 - math.sqrt(0.1 * 0.75 * 0.47)
    assert bar.low_value == pytest.approx(p10, rel=1e-9)
    assert bar.high_value == pytest.approx(p90, rel=1e-9)
    ref = stats.triang(0.28 / 0.75, loc=1.20, scale=0.75).ppf([0.1, 0.9])
    assert [bar.low_value, bar.high_value] == pytest.approx(list(ref), rel=1e-9)
    assert bar.source == "P10–P90 of its distribution"
    # an input without a distribution keeps the default ±20 %
    pp = t[(t.truck == "Electric tractor") & (t.key == "trucks[1].costs.purchase_price")]
    assert pp.iloc[0].low_value == pytest.approx(0.8 * 265000)
    assert pp.iloc[0].source == "default ±20 %"


def test_tornado_and_monte_carlo_agree_on_every_range(demo_unc):
    """Every tornado input with a distribution spans the P10–P90 of the Monte Carlo's own
    draws of it (4,000 draws: the sample quantiles are within a few per cent)."""
    unc = demo_unc.uncertainty
    t = unc.tornado[unc.tornado.truck == "Electric tractor"]
    draws = unc.samples[unc.samples.truck == "Electric tractor"]
    checked = 0
    for bar in t[t.source == "P10–P90 of its distribution"].itertuples():
        x = draws[bar.key].to_numpy()
        if bar.unit not in ("×", ""):  # draws are SI; bars in the documented unit
            from tco.units import from_si
            x = np.asarray(from_si(x, bar.unit))
        lo, hi = np.quantile(x, [0.1, 0.9])
        width = bar.high_value - bar.low_value
        assert abs(lo - bar.low_value) < 0.05 * width, bar.key
        assert abs(hi - bar.high_value) < 0.05 * width, bar.key
        checked += 1
    assert checked == 6  # every distribution of the demo


def test_depot_inputs_in_the_tornado_and_break_even(demo_unc):
    unc = demo_unc.uncertainty
    keys = set(unc.tornado[unc.tornado.truck == "Electric tractor"].key)
    assert {"depot.charger_power", "depot.charging", "depot.trucks_served",
            "prices.electricity.demand_charge"} <= keys
    be = set(unc.break_even[unc.break_even.truck == "Electric tractor"].key)
    assert {"depot.charger_power", "depot.charging", "depot.trucks_served",
            "prices.electricity.demand_charge"} <= be
    # the rule's bar ends are the cost difference under each rule (the verdict's figures)
    rule = unc.tornado[(unc.tornado.key == "depot.charging")].iloc[0]
    d = demo_unc.depot["trucks"]["Electric tractor"]
    assert rule.low == pytest.approx(d["difference"], rel=1e-9)        # managed: the demo's
    assert rule.high == pytest.approx(d["other_difference"], rel=1e-9)  # unmanaged
    s = build_summary(demo_unc)["uncertainty"]
    assert any(b["key"] == "depot.charging" for b in s["tornado"]["Electric tractor"])


def test_emissions_tornado_by_hand(demo_unc):
    """Raising the diesel tank-to-wheel CO2 factor by 20 % raises the tonnes the electric
    tractor avoids by 20 % of the diesel's tank-to-wheel CO2: 0.2 × 2.67 kg/L × the litres
    it burns over the 10 years (hand calculation; the factor is the demo's set)."""
    unc = demo_unc.uncertainty
    te = unc.tornado_emissions
    bar = te[(te.truck == "Electric tractor") & (te.key == "emissions.diesel_co2")].iloc[0]
    litres = demo_unc.trucks["Diesel tractor"].operation.diesel_volume * 1000 * 10
    factor = bar.base_value  # kg/L as documented
    assert bar.high - bar.base == pytest.approx(0.2 * factor * litres / 1000, rel=1e-9)
    assert bar.base - bar.low == pytest.approx(0.2 * factor * litres / 1000, rel=1e-9)
    # a cost-only input does not move the emissions and is left out
    assert "trucks[1].costs.purchase_price" not in set(te.key)
    s = build_summary(demo_unc)["uncertainty"]["tornado_emissions"]["Electric tractor"]
    assert {b["key"] for b in s} == set(te[te.truck == "Electric tractor"].key)


def test_workbook_and_report_show_the_emissions_tornado(demo_unc):
    from tco.report.context import _uncertainty_tables
    from tco.report.workbook import build_workbook

    s = build_summary(demo_unc)
    ws = build_workbook(demo_unc, s)["Sensitivity"]
    texts = [str(c.value) for row in ws.iter_rows() for c in row if c.value is not None]
    assert any(t.startswith("Emissions avoided: Electric tractor") for t in texts)
    assert "Diesel CO2 factor, tank-to-wheel" in texts
    assert "P10–P90 of its distribution" in texts
    titles = [t["title"] for t in _uncertainty_tables(demo_unc, "EUR")]
    assert "Sensitivity, one input at a time" in titles


def test_other_convention_is_reported_only_where_it_moves_the_verdict():
    # The demo's 5 km/h wind, averaged over directions by default. The same scenario run
    # with the headwind rule gives the other present-value difference; a warning appears
    # only when the difference given changes sign under the other rule.
    from tco.pipeline import build_trip, evaluate, other_conventions
    from tco.resources import demo_path
    from tco.scenario import load_scenario

    loaded = load_scenario(demo_path())
    loaded.scenario.uncertainty.enabled = False
    trip = build_trip(loaded)
    head = load_scenario(demo_path())
    head.scenario.uncertainty.enabled = False
    head.scenario.ambient.wind_treatment = "headwind"
    pv = {m.name: m.present_value for m in evaluate(head).cashflow.trucks}
    other = pv["Electric tractor"] - pv["Diesel tractor"]
    assert other < 0  # electric cheaper under the headwind rule too
    same = other_conventions(loaded, trip, {"Electric tractor": -1.0}, "Diesel tractor")
    assert same == []
    flipped = other_conventions(loaded, trip, {"Electric tractor": 1.0}, "Diesel tractor")
    wind = [w for w in flipped if "ambient.wind_treatment" in w]
    assert len(wind) == 1  # (the break rule, which the demo also has, is the other)
    assert f"would cost {abs(other):,.0f} EUR less than Diesel tractor" in wind[0]


def test_unset_escalations_are_named_in_words():
    # the reader sees the cost lines and trucks, not machine keys (written out by hand)
    from tco.pipeline import _unset_escalations_text

    keys = ["finance.driver_cost_escalation", "prices.escalation.diesel_exhaust_fluid",
            "prices.escalation.equipment", "trucks[0].costs.escalation.maintenance",
            "trucks[0].costs.escalation.tyres", "trucks[1].costs.escalation.maintenance",
            "trucks[1].costs.escalation.tyres", "trucks[1].costs.escalation.battery"]
    assert _unset_escalations_text(keys, ["Diesel tractor", "Electric tractor"]) == (
        "driver cost; diesel exhaust fluid and equipment prices; maintenance and tyres of "
        "Diesel tractor and Electric tractor; battery of Electric tractor")
