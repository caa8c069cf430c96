"""Shared fixtures: a SAMPLE report context (invented figures, tests only) and hostile text.

The sample context has the structure documented in ``tco/report/html.py`` and charts made
by ``tco.report.charts`` from invented pandas data. None of its numbers is a model
result; they only exercise the report frame.
"""
from __future__ import annotations

import copy

import numpy as np
import pandas as pd
import pytest

#: Hostile scenario text: markup that would fetch or embed local files, links, and
#: spreadsheet formula triggers. Nothing of it may act; all of it must show literally.
HOSTILE = [
    "<img src=file:///etc/passwd>",
    "<link rel=attachment href=file:///etc/hostname>",
    '<a href="file:///etc/passwd">click</a>',
    "file:///etc/hostname",
    '=HYPERLINK("http://x","y")',
    "+1+1",
    "@SUM(A1)",
    "-2+3",
    "<script>alert(1)</script>",
    "$x$ and {{ meta }} and {% raw %}",
]

@pytest.fixture(autouse=True, scope="session")
def _own_cache_folder(tmp_path_factory):
    """Typeset equations are cached in a folder of the test session, not the user's."""
    import os

    old = os.environ.get("TCO_CACHE_DIR")
    os.environ["TCO_CACHE_DIR"] = str(tmp_path_factory.mktemp("tco-cache"))
    yield
    if old is None:
        os.environ.pop("TCO_CACHE_DIR", None)
    else:
        os.environ["TCO_CACHE_DIR"] = old


_YEARS = np.arange(0, 11)
BREAKEVEN = "6.4"  # year the sample's cumulative cost lines cross (checked when built)
_TRUCKS = ["Diesel 6x4", "Electric 6x4"]


def _sample_charts() -> dict:
    from tco.report import charts

    # Invented yearly costs [EUR]: purchase in year 0, running costs after, resale at the end.
    lines = {
        "Diesel 6x4": {"Purchase": 135_000, "Energy": 52_000, "Maintenance and repair": 14_500,
                       "Road charges": 12_000, "Insurance": 7_500, "Resale value": -30_000},
        "Electric 6x4": {"Purchase": 295_000, "Charging equipment": 40_000, "Energy": 33_000,
                         "Maintenance and repair": 9_000, "Road charges": 1_500,
                         "Insurance": 12_800, "Resale value": -55_000},
    }
    rows = []
    for truck, items in lines.items():
        for year in _YEARS:
            for line, amount in items.items():
                if line in ("Purchase", "Charging equipment"):
                    value = amount if year == 0 else 0.0
                elif line == "Resale value":
                    value = amount if year == _YEARS[-1] else 0.0
                else:
                    value = 0.0 if year == 0 else amount * 1.02 ** (year - 1)
                rows.append((truck, year, line, value))
    tidy = pd.DataFrame(rows, columns=["truck", "year", "line", "value"])
    cumulative = (tidy.groupby(["year", "truck"])["value"].sum().unstack("truck")
                  [_TRUCKS].cumsum())
    # Where the lines cross (linear between years), so the sample's marker sits on it.
    gap = (cumulative[_TRUCKS[1]] - cumulative[_TRUCKS[0]]).to_numpy()
    k = int(np.flatnonzero(gap <= 0)[0])
    breakeven = k - 1 + gap[k - 1] / (gap[k - 1] - gap[k])
    assert f"{breakeven:.1f}" == BREAKEVEN

    energy = pd.DataFrame(
        {"Diesel 6x4": [0.46, 0.39, 0.03, 0.06, 0.0, 0.07, 2.05],
         "Electric 6x4": [0.50, 0.39, 0.03, 0.06, -0.11, 0.06, 0.17]},
        index=["Rolling resistance", "Aerodynamic drag", "Grade (net)", "Inertia (net)",
               "Recovered braking", "Auxiliaries", "Drivetrain losses"])

    t = np.arange(0, 3 * 3600, 1.0)  # 3 h at 1 Hz [s]
    speed = np.clip(80 * (1 - np.exp(-t / 200)) * (0.85 + 0.15 * np.sin(t / 900))
                    - 60 * ((t // 1800) % 2 == 1) * (np.sin(t / 120) > 0.6), 0, None)
    speed = np.convolve(np.pad(speed, 45, mode="edge"), np.ones(91) / 91, mode="valid")
    elevation = 220 + 90 * np.sin(t / 2300) + 25 * np.sin(t / 410)
    accel = np.gradient(speed / 3.6, t)
    grade = np.gradient(elevation, t) / np.maximum(speed / 3.6, 1.0)
    power = (40_000 * 9.81 * (0.0055 + np.clip(grade, -0.06, 0.06)) * speed / 3.6
             + 0.5 * 1.2 * 5.8 * (speed / 3.6) ** 3 + 40_000 * accel * speed / 3.6) / 1000
    soc = 90 - np.cumsum(np.clip(power, -250, None)) / 3600 / 540 * 100
    trace = pd.DataFrame({"time": t / 60, "speed": speed, "elevation": elevation,
                          "soc": soc, "power": power})

    em_rows = []
    for year in _YEARS[1:]:
        em_rows += [("Diesel 6x4", year, "Scope 1 (tank-to-wheel)", 96.0),
                    ("Diesel 6x4", year, "Scope 2 (electricity)", 0.0),
                    ("Diesel 6x4", year, "Scope 3 (fuel upstream)", 21.0),
                    ("Electric 6x4", year, "Scope 1 (tank-to-wheel)", 0.0),
                    ("Electric 6x4", year, "Scope 2 (electricity)", 34.0 * 0.95 ** year),
                    ("Electric 6x4", year, "Scope 3 (fuel upstream)", 6.0 * 0.95 ** year)]
    emissions = pd.DataFrame(em_rows, columns=["truck", "year", "scope", "value"])

    tornado_rows = pd.DataFrame({
        "input": ["Electricity price", "Diesel price", "Annual distance", "Battery price",
                  "Discount rate", "Resale value, electric", "Maintenance, electric",
                  "Road charge exemption"],
        "low": [-92_000, -8_000, -11_000, -70_000, -52_000, -38_000, -55_000, -31_000],
        "high": [-4_000, -95_000, -86_000, -26_000, -44_000, -59_000, -41_000, -48_300],
    })
    samples = np.random.default_rng(7).normal(-48_300, 36_000, 2000)

    fig = lambda title, caption, uri: {"title": title, "caption": caption, "uri": uri}  # noqa
    return {
        "cost": [
            fig("Cumulative cost of each truck",
                "Costs in nominal EUR, not discounted. The lines cross at the break-even "
                f"point, year {BREAKEVEN}.",
                charts.cumulative_cost(cumulative, breakeven, ylabel="Cumulative cost [EUR]")),
            fig("Yearly cost by cost line",
                "Costs upward, resale value downward; the black bar marks the net for "
                "the year.",
                charts.stacked_yearly_cost(tidy, _TRUCKS, ylabel="Cost [EUR per year]")),
        ],
        "energy": [
            fig("Energy per kilometre by road-load component",
                "Energy drawn from the tank or the grid per kilometre, split by where "
                "it goes.",
                charts.energy_components(energy, xlabel="Energy per distance [kWh/km]")),
            fig("Duty cycle: Electric 6x4", "One working day as simulated.",
                charts.duty_cycle(trace, xlabel="Time [min]",
                                  labels={"speed": "Speed [km/h]",
                                          "elevation": "Elevation [m]",
                                          "soc": "State of charge [%]",
                                          "power": "Battery power [kW]"})),
        ],
        "emissions": [
            fig("Emissions per year by scope", "Well-to-wheel, t CO₂e per year.",
                charts.emissions_by_scope(emissions, ylabel="Emissions [t CO₂e per year]")),
        ],
        "uncertainty": [
            fig("What moves the result most", "Present value difference (electric minus "
                "diesel) with one input at a time at its low or high value.",
                charts.tornado(tornado_rows, -48_300,
                               xlabel="Present value difference [EUR]")),
            fig("Distribution of the present value difference",
                "2 000 Monte Carlo draws; left of zero the electric truck costs less.",
                charts.distribution(samples, "Present value difference [EUR]")),
        ],
    }


def _sample_context() -> dict:
    from tco.report import charts

    years = [str(y) for y in _YEARS]
    cash_rows = [[y, "295,000" if y == "0" else "0", "40,000" if y == "0" else "0",
                  "0" if y == "0" else f"{33_000 * 1.02 ** (int(y) - 1):,.0f}",
                  "0" if y == "0" else "9,000", "0" if y == "0" else "1,500",
                  "0" if y == "0" else "12,800", "−55,000" if y == "10" else "0"]
                 for y in years]
    assumptions = {
        "sections": [
            {"title": "Finance", "columns": ["Input", "Value"],
             "rows": [["Discount rate per year", "6.0 %"], ["Analysis period", "10 years"]],
             "tables": []},
            {"title": "Route and conditions", "columns": ["Input", "Value"],
             "rows": [["Distance per year", "115,000 km"]],
             "tables": [{"title": "Leg 1: out", "note": "Payload carried on this leg: 20 t",
                         "columns": ["Segment", "Length [km]", "Speed [km/h]", "Grade"],
                         "rows": [["1", "12", "60", "0 % [1]"], ["2", "40", "80", "1.5 %"]]}]},
            {"title": "Trucks", "columns": ["Input", "Diesel 6x4", "Electric 6x4"],
             "rows": [["Empty mass", "9.2 t", "11.4 t"],
                      ["Nominal battery capacity", "", "540 kWh"],
                      ["Rolling-resistance coefficient", "0.0055 [2]", "0.0055 [2]"]] + [
                 [f"Cost item {i:02d} per year", f"{1000 + 37 * i:,} EUR/year [1]",
                  f"{1100 + 37 * i:,} EUR/year [1]"] for i in range(40)],
             "tables": []},
        ],
        "sources": [
            {"number": 1, "text": "assumption (tool default; replace with your own figure)"},
            {"number": 2, "text": "Regulation (EU) 2020/740, Annex I Part A: C3 (truck) tyre "
                                  "rolling-resistance classes A ≤ 4.0, B 4.1–5.0, C 5.1–6.0 "
                                  "kg/t; 5.5 kg/t is the middle of class C"},
        ],
        "counts": {"shown": 46, "user": 6, "default": 40, "left_out": 3},
    }
    return {
        "meta": {"title": "Regional distribution, 40 t, two shifts", "date": "2025-03-14",
                 "version": "0.1.0",
                 "fingerprint": "sha256:9f2c4e1a7b3d5c6e8f0a1b2c3d4e5f60718293a4b5c6d7e8f9"
                                "0a1b2c3d4e5f",
                 "currency": "EUR", "units": "metric", "page_size": "A4"},
        "verdict": "The electric truck costs 48,300 EUR less than the diesel truck over 10 "
                   f"years in present value, pays back in {BREAKEVEN} years and avoids 612 t "
                   "CO₂e.",
        "key_figures": [
            {"label": "Cost per km, diesel", "value": "1.38 EUR/km", "note": "10 years"},
            {"label": "Cost per km, electric", "value": "1.29 EUR/km", "note": "10 years"},
            {"label": "Present value difference (electric − diesel)", "value": "−48,300 EUR",
             "note": "discounted at 6.0 % a year"},
            {"label": "Payback of the extra investment", "value": f"{BREAKEVEN} years",
             "note": ""},
            {"label": "Internal rate of return", "value": "9.4 %",
             "note": "of the extra investment"},
            {"label": "Emissions avoided", "value": "612 t CO₂e",
             "note": "well-to-wheel, over 10 years"},
            {"label": "Abatement cost", "value": "−79 EUR/t CO₂e",
             "note": "negative: saves money while cutting emissions"},
            {"label": "Feasibility", "value": "Both trucks feasible",
             "note": "electric: one 35-minute charge at the depot at midday"},
        ],
        "charts": _sample_charts(),
        "feasibility": [
            {"truck": "Diesel 6x4", "verdict": "Feasible",
             "detail": "Gross weight 39.2 t within the 40 t limit; fuel for 1,450 km."},
            {"truck": "Electric 6x4", "verdict": "Feasible",
             "detail": "Lowest state of charge 18 % (reserve 15 %) with one 35-minute charge "
                       "at 350 kW; gross weight 39.8 t within the 40 t limit."},
        ],
        "warnings": [
            "Grade exceeds 8 % on 0.4 km of the route; the road-load model is checked up to "
            "8 %.",
            "The charger power was not given; the default 350 kW was used.",
        ],
        "tables": [
            {"title": "Yearly cash flow, Electric 6x4 [EUR]",
             "columns": ["Year", "Purchase", "Charging equipment", "Energy", "Maintenance",
                         "Road charges", "Insurance", "Resale value"],
             "rows": cash_rows, "note": "Nominal amounts; costs positive, income negative."},
            {"title": "Per-truck summary",
             "columns": ["Figure", "Diesel 6x4", "Electric 6x4"],
             "rows": [["Energy per km", "3.06 kWh/km", "1.10 kWh/km"],
                      ["Total cost of ownership (PV)", "1,154,200 EUR", "1,105,900 EUR"],
                      ["Emissions, well-to-wheel", "1,170 t CO₂e", "558 t CO₂e"]],
             "note": ""},
        ],
        "assumptions": assumptions,
        "method_notes": [
            {"title": "Road load",
             "text": "The force at the wheels on each step of the duty cycle is the sum of "
                     "rolling resistance, aerodynamic drag, grade and inertia.",
             "equation": "F = m·g·C_rr·cos θ + ½·ρ·C_d·A·v² + m·g·sin θ + m·a",
             "equation_uri": charts.equation(
                 r"F = m\,g\,C_{rr}\cos\theta + \dfrac{1}{2}\rho\,C_d A\,v^2"
                 r" + m\,g\sin\theta + m\,a")},
            {"title": "Present value",
             "text": "Yearly cash flows are discounted to the purchase date.",
             "equation": "PV = Σ C_t / (1 + r)^t, t = 0 … N",
             "equation_uri": charts.equation(r"PV = \sum_{t=0}^{N} \dfrac{C_t}{(1+r)^t}")},
            {"title": "Abatement cost",
             "text": "Present value difference divided by the emissions avoided.",
             "equation": "AC = ΔPV / ΔE", "equation_uri": ""},
        ],
        "cautions": [
            "This report is an estimate for planning. It is not financial, tax or legal "
            "advice.",
            "Emissions figures are estimates; verify them under the GHG Protocol, ISO 14083 "
            "and your regulator's rules before reporting them.",
            "Charger installation must be done by licensed electricians under local codes "
            "and utility rules.",
            "Gross-weight limits are set by local law; check the limits that apply on your "
            "route.",
        ],
    }


@pytest.fixture(scope="session")
def _sample_context_once() -> dict:
    return _sample_context()


@pytest.fixture
def sample_context(_sample_context_once) -> dict:
    """A complete report context with invented figures (a fresh copy per test)."""
    return copy.deepcopy(_sample_context_once)


@pytest.fixture
def hostile() -> list[str]:
    """Hostile scenario strings (markup, file links, formula triggers)."""
    return list(HOSTILE)
