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
    # the verdict's tonnes avoided are summary.json's (location-based, not summed twice),
    # shown in whole tonnes with a thousands comma: a hand-set 1,234,567.8 kg reads
    # "1,235 t" (1,234.5678 t rounded by hand)
    summary = build_summary(demo)
    summary["emissions"]["comparison"]["Electric tractor"]["avoided_kg_total"][
        "location"] = 1_234_567.8
    verdict = build_context(demo, summary)["verdict"]
    assert "avoids 1,235 t CO2e (well-to-wheel, location-based)" in verdict
    appendix = ctx["assumptions"]
    assert appendix["counts"]["user"] > 0 and appendix["counts"]["default"] > 0
    assert any(s["text"].startswith("US DOE") for s in appendix["sources"])


def test_metric_and_us_display(demo, monkeypatch):
    summary = build_summary(demo)
    per_km = summary["cashflow"]["trucks"]["Diesel tractor"]["levelized_cost_per_km"]
    per_mi = summary["cashflow"]["trucks"]["Diesel tractor"]["levelized_cost_per_mile"]
    # 1 mi = 1.609344 km (exact, international yard and pound agreement, 1959):
    # per-mile cost = per-km cost × 1.609344
    assert per_mi == pytest.approx(per_km * 1.609344, rel=1e-12)
    # the key figure as a reader sees it, for a hand-set cost of 1,234.5678 EUR/km
    # (1.2345678 EUR/m): three decimals and a thousands comma
    diesel = next(m for m in demo.cashflow.trucks if m.name == "Diesel tractor")
    monkeypatch.setattr(diesel, "levelized_cost", 1.2345678)
    values = [k["value"] for k in _context(demo)["key_figures"]]
    assert "1,234.568 EUR/km" in values, values
    demo.scenario.study.units = "us"
    try:
        ctx = _context(demo)
    finally:
        demo.scenario.study.units = "metric"
    # by hand: 1,234.5678 EUR/km × 1.609344 km/mi = 1,986.8443 EUR/mi
    values = [k["value"] for k in ctx["key_figures"]]
    assert "1,986.844 EUR/mi" in values, values
    assert ctx["meta"]["units"] == "US customary"
    energy = next(t for t in ctx["tables"] if t["title"] == "Energy and operation")
    assert energy["rows"][0][0] == "Distance per trip [mi]"
    assert any(r[0] == "Fuel use [mpg]" for r in energy["rows"])


def test_breakeven_caption_ties_the_crossing_to_the_payback_year(demo):
    # The cumulative cost chart shows a fractional crossing; the key figure counts whole
    # years. By hand: the crossing is the linear interpolation within the year where the
    # cumulative difference (electric − diesel) turns from positive to not positive, and
    # the payback is that year, counted from 1 (year k spans k − 1 .. k).
    import math

    ctx = _context(demo)
    cf = demo.cashflow
    names = [m.name for m in cf.trucks]
    cum = cf.yearly_totals()[names].cumsum()
    d = (cum[names[1]] - cum[names[0]]).to_numpy()
    k = next(k for k in range(1, len(d)) if d[k - 1] > 0 >= d[k] and all(d[k:] <= 0))
    crossing = k - 1 + d[k - 1] / (d[k - 1] - d[k])
    payback = next(f["value"] for f in ctx["key_figures"]
                   if f["label"] == "Payback of the extra purchase cost")
    assert payback == f"year {math.ceil(crossing)}"
    chart = next(c for c in ctx["charts"]["cost"] if c["title"] == "Cumulative cost of ownership")
    assert (f"The lines cross at year {crossing:.1f}, within year {math.ceil(crossing)}: the "
            f"extra purchase cost is paid back in year {math.ceil(crossing)}") in chart["caption"]


def test_charts_drawn_ahead_are_the_charts_drawn_after(monkeypatch):
    """The base case's charts, drawn by a forked child while the uncertainty study runs
    (ChartsAhead), are taken by build_context and are the same bytes as drawing them
    afterwards; the study's charts are drawn afterwards either way."""
    from tco.report import context as C
    from tco.report.summary import build_summary

    monkeypatch.setattr(C, "CHART_WORKERS", 2)
    monkeypatch.setattr("os.cpu_count", lambda: 2)
    loaded = load_scenario(demo_path())
    loaded.scenario.uncertainty.draws = 500
    seen = []
    ahead = C.ChartsAhead()

    def hook(base):
        seen.append(base.uncertainty)
        ahead(base)

    result = evaluate(loaded, on_base_case=hook)
    assert seen == [None]  # called once, before the study
    assert len(ahead.keys) == 10  # 5 charts of the base case and 5 equations
    summary = build_summary(result)
    with_ahead = C.build_context(result, summary, ahead)
    assert ahead.used == 10
    assert ahead.keys == frozenset()  # taken: the child is gone
    assert with_ahead == C.build_context(result, summary)
    assert len(C.chart_jobs(result)) == 13  # + two tornadoes and the distribution


def test_charts_ahead_does_nothing_in_a_batch_worker(monkeypatch):
    from tco.report import context as C

    monkeypatch.setattr(C, "CHART_WORKERS", 1)
    ahead = C.ChartsAhead()
    ahead(object())  # not even looked at
    assert ahead.keys == frozenset() and ahead.take() == {}


def test_financing_irr_reads_na_when_the_savings_never_recover_the_cost():
    """A negative rate of return on the financed extra cost means its undiscounted
    savings never pay it back (for flows that start with the outlay, NPV at 0 % < 0):
    the table says so in words, as the key figure does; a positive rate is shown."""
    from tco.report.context import _financing_table

    truck = {"method": "loan", "after_tax_cost_of_debt": 0.055,
             "present_value_at_cost_of_debt": 0.0, "present_value_as_financed": 100.0}
    rows = {}
    for irr in (-0.319, 0.159):
        cf = {"financing": {"trucks": {"A": truck}, "comparisons": [
            {"truck": "B", "baseline": "A", "irr_as_financed": irr,
             "present_value_difference_as_financed": 261591.0}]}}
        table = _financing_table(cf, "USD")
        assert table["columns"] == ["Figure", "A", "B"]
        assert table["rows"][-1][1] == "baseline"
        rows[irr] = table["rows"][-1][2]
    assert rows[-0.319] == "n/a (the savings never recover the extra cost)"
    assert rows[0.159] == "15.9 %"
