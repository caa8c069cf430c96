"""The report context: figures formatted in the scenario's unit system, nothing computed
in templates, every section present."""
import pytest

from tco.pipeline import evaluate
from tco.report.context import build_context
from tco.report.html import check_context
from tco.report.summary import build_summary
from tco.resources import demo_path
from tco.scenario import load_scenario


@pytest.fixture(scope="module")
def demo():
    loaded = load_scenario(demo_path())
    loaded.scenario.uncertainty.draws = 500
    return evaluate(loaded)


def _context(result):
    return build_context(result, build_summary(result))


def test_context_has_every_section(demo):
    ctx = _context(demo)
    check_context(ctx)
    assert all(ctx["charts"][g] for g in ("cost", "energy", "emissions", "uncertainty"))
    assert ctx["verdict"].startswith("Over 10 years")
    # the verdict's tonnes avoided equal summary.json (location-based, not summed twice)
    avoided = build_summary(demo)["emissions"]["comparison"]["Electric tractor"][
        "avoided_kg_total"]["location"]
    assert f"avoids {avoided / 1000:,.0f} t CO2e" in ctx["verdict"]
    appendix = ctx["assumptions"]
    assert appendix["counts"]["user"] > 0 and appendix["counts"]["default"] > 0
    assert any(s["text"].startswith("US DOE") for s in appendix["sources"])


def test_metric_and_us_display(demo):
    summary = build_summary(demo)
    ctx = _context(demo)
    per_km = summary["cashflow"]["trucks"]["Diesel tractor"]["levelized_cost_per_km"]
    assert f"{per_km:,.3f} EUR/km" in [k["value"] for k in ctx["key_figures"]]
    demo.scenario.study.units = "us"
    try:
        ctx = _context(demo)
    finally:
        demo.scenario.study.units = "metric"
    per_mi = summary["cashflow"]["trucks"]["Diesel tractor"]["levelized_cost_per_mile"]
    # 1 mi = 1.609344 km (exact): per-mile cost = per-km cost × 1.609344
    assert per_mi == pytest.approx(per_km * 1.609344, rel=1e-12)
    assert f"{per_mi:,.3f} EUR/mi" in [k["value"] for k in ctx["key_figures"]]
    assert ctx["meta"]["units"] == "US customary"
    energy = next(t for t in ctx["tables"] if t["title"] == "Energy and operation")
    assert energy["rows"][0][0] == "Distance per trip [mi]"
    assert any(r[0] == "Fuel use [mpg]" for r in energy["rows"])
