"""Feasibility findings: the model returns numbers and codes, the report layer
(tco.report.findings) writes every sentence, in the study's unit system.

US values are checked against hand conversions of the model's SI numbers with exact
factors written here (NIST SP 811, 2008, Appendix B, and NIST Handbook 44, Appendix C):
1 international mile = 1609.344 m; 1 short ton = 2000 lb = 907.18474 kg, so
1 lb = 0.45359237 kg; 1 US gallon = 3.785411784 L; 1 mph = 1609.344 m / 3600 s.
The expected texts never come from tco.report.formatting.
"""
import re

import pytest

from tco.pipeline import evaluate
from tco.report.context import build_context
from tco.report.summary import build_summary
from tco.resources import demo_path
from tco.scenario import load_scenario

MILE_M = 1609.344                 # NIST SP 811 B.8: mile (international) = 1609.344 m
SHORT_TON_KG = 907.18474          # NIST HB 44 App. C: short ton = 2000 lb = 907.18474 kg
POUND_KG = SHORT_TON_KG / 2000    # = 0.45359237 kg (avoirdupois pound)
US_GALLON_L = 3.785411784         # NIST SP 811 B.8: gallon (US) = 3.785411784 L
MPH_M_S = MILE_M / 3600           # 0.44704 m/s

#: metric words that must not appear in a US-units sentence: a tonne, kilometres,
#: km/h (as whole words, so "kWh" and "kW" stay allowed)
METRIC = re.compile(r"(?<![\w/])(t|km|km/h|kg|L)(?![\w/])")


@pytest.fixture(scope="module")
def us_demo():
    loaded = load_scenario(demo_path())
    s = loaded.scenario
    s.study.units = "us"
    s.uncertainty.enabled = False
    # a heavier electric truck so that the payload finding is a shortfall, and a weak
    # diesel engine so that the power finding has a distance and a speed in it
    electric = next(t for t in s.trucks if t.powertrain == "electric")
    electric.body.curb_mass += 8000.0
    diesel = next(t for t in s.trucks if t.powertrain == "diesel")
    diesel.diesel.engine_power = 150e3
    result = evaluate(loaded)
    return result, build_summary(result)


def _all_sentences(result, summary):
    ctx = build_context(result, summary)
    texts = [row["detail"] for row in ctx["feasibility"]]
    texts += list(result.warnings)
    for truck in summary["trucks"].values():
        f = truck["feasibility"]
        texts += [f[k]["text"] for k in ("payload", "power", "depot_charger") if k in f]
        texts += [v["text"] for v in (f.get("battery") or {}).values()]
        if f.get("battery_by_year"):
            texts += [f["battery_by_year"]["text"], f["battery_by_year"]["verdict"]]
    return texts


def test_us_feasibility_sentences_have_no_metric_units(us_demo):
    result, summary = us_demo
    texts = _all_sentences(result, summary)
    assert texts
    for text in texts:
        assert not METRIC.search(text), text
        assert "km/h" not in text and " km" not in text, text


def test_us_payload_sentence_by_hand(us_demo):
    result, summary = us_demo
    electric = next(tr for tr in result.trucks.values() if tr.powertrain == "electric")
    f = electric.feasibility["payload"]
    assert not f["ok"] and f["code"] == "left_behind"
    capacity_lb = electric.summary["payload_capacity"] / POUND_KG
    lost_lb = f["lost_per_trip"] / POUND_KG
    text = summary["trucks"][electric.name]["feasibility"]["payload"]["text"]
    assert f"can legally carry {capacity_lb:,.0f} lb" in text, text
    assert f"up to {lost_lb:,.0f} lb per trip is left behind" in text, text
    # the same sentence is a warning of the run and sits in the report's table
    assert text in result.warnings
    ctx = build_context(result, summary)
    assert any(text in row["detail"] for row in ctx["feasibility"])


def test_us_power_sentence_by_hand(us_demo):
    result, summary = us_demo
    diesel = next(tr for tr in result.trucks.values() if tr.powertrain == "diesel")
    f = diesel.feasibility["power"]
    text = summary["trucks"][diesel.name]["feasibility"]["power"]["text"]
    if f["code"] == "slowed":
        miles, mph = f["slowed_distance"] / MILE_M, f["slowed_speed_deficit_max"] / MPH_M_S
    elif f["code"] == "limited":
        miles, mph = f["limited_distance"] / MILE_M, f["speed_deficit_max"] / MPH_M_S
    else:
        pytest.fail(f"the weakened engine should be short of power: {f['code']}")
    assert f"{miles:.2f} mi" in text, text
    assert f"{mph:.0f} mph" in text, text


def test_metric_sentences_keep_metric_units(tmp_path):
    # the same findings for a metric study: tonnes with one decimal, km with two
    from tco.report.findings import payload_sentence, power_sentence

    p = {"ok": False, "lost_per_trip": 1_250.0, "extra_trips_per_year": 14.2}
    assert payload_sentence("E", p, 24_800.0, "metric") == (
        "E can legally carry 24.8 t; up to 1.2 t per trip is left behind, needing 14 extra "
        "trips a year to move the same tonnage.")
    f = {"code": "limited", "limited_time": 976.4, "limited_distance": 15_150.0,
         "speed_deficit_max": 6 / 3.6}
    assert power_sentence("D", f, "engine", "metric") == (
        "D: the cycle asks for more than the rated engine power for 976 s over 15.15 km; "
        "on those grades it can hold up to 6 km/h less than the trace asks.")


def test_model_writes_no_sentences(us_demo):
    # the energy model returns codes and SI numbers only: no 'text' or 'verdict' key
    result, _ = us_demo
    for tr in result.trucks.values():
        for key, item in tr.feasibility.items():
            items = item.values() if key == "battery" else [item]
            for it in items:
                assert "text" not in it and "verdict" not in it, (tr.name, key)
                assert "code" in it, (tr.name, key)


def test_us_report_tables_and_labels_use_us_units(us_demo):
    # the emissions intensity per mile: g/km × 1.609344 km/mi (NIST SP 811 B.8), and the
    # appendix labels carry no metric bound such as "(at most 500 t)"
    result, summary = us_demo
    ctx = build_context(result, summary)
    em = next(t for t in ctx["tables"] if t["title"].startswith("Emissions over"))
    row = next(r for r in em["rows"] if r[0].startswith("Well-to-wheel intensity [g CO2e/"
                                                        ) and "t·km" not in r[0])
    assert row[0] == "Well-to-wheel intensity [g CO2e/mi]"
    for name, cell in zip(em["columns"][1:], row[1:]):
        per_km = summary["emissions"]["trucks"][name]["g_co2e_per_km"]["wtw"]
        assert cell == f"{per_km * MILE_M / 1000:,.0f}"
    labels = [r[0] for sec in ctx["assumptions"]["sections"] for r in sec["rows"]]
    labels += [t.get("note", "") for sec in ctx["assumptions"]["sections"]
               for t in sec.get("tables", [])]
    assert not any(METRIC.search(x) for x in labels if "(at most" in x), labels
    assert not any("(at most" in x for x in labels)


def test_report_gives_each_warning_finding_once(us_demo):
    """A finding that is a warning (payload left behind, power short) sits in the report's
    feasibility table, marked, and is not repeated in the list of other warnings; the
    summary still counts every warning of the run."""
    import html as html_lib

    from tco.report.html import render_html

    result, summary = us_demo
    ctx = build_context(result, summary)
    page = render_html(ctx, for_print=False)
    body = re.sub(r"</?(span|b)\b[^>]*>", "", page[page.index("<body"):])  # inline
    text = " ".join(html_lib.unescape(re.sub(r"<[^>]+>", " ", body)).split())
    details = " ".join(row["detail"] for row in ctx["feasibility"])
    # the run's warnings whose sentence (after a "Truck name: " lead) is a finding
    repeated = [w for w in result.warnings if w in details
                or w.split(": ", 1)[-1] in details]
    assert len(repeated) >= 2  # the payload and the power finding of this case
    for w in repeated:
        sentence = w if w in details else w.split(": ", 1)[-1]
        assert text.count(" ".join(sentence.split())) == 1, sentence
        assert w not in ctx["warnings"]
    assert text.count("Warning:") == len(repeated)
    assert f"{len(result.warnings)} warnings: see" in text
