"""Tests of tco/uncertainty.py and the uncertainty scenario section.

Outside sources: scipy.stats (distribution moments, the normal law, Spearman's rank
correlation), numpy-financial (annuity factor), the closed-form moments of the triangular
and PERT distributions (textbook formulas, from memory), the copula relation
ρ = 2 sin(π ρ_s / 6) (Kruskal 1958, from memory), and the US gallon (NIST Handbook 44).
Each check names its source beside it.

Sampling tolerances are five standard errors of the estimate (a false failure about once
in 1.7 million runs for a normal estimate); the seeds are fixed, so the runs are
reproducible.
"""
from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import numpy_financial as npf
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from pydantic import ValidationError
from scipy import stats

from tco.report.summary_sections import uncertainty_summary
from tco import cashflow, emissions
from tco import finance as fin
from tco import uncertainty as unc
from tco.errors import InputError
from tco.operation import AnnualOperation
from tco.scenario.costs import Depot, Finance, Prices, TruckCosts
from tco.scenario.emissions import EmissionsSettings
from tco.scenario.uncertainty import UncertaintySettings, rank_to_pearson

KWH = 3.6e6  # J
US_GALLON = 3.785411784e-3  # m³, exact by definition (NIST Handbook 44, Appendix C)
YEARS = list(range(2030, 2040))  # 10 years of service
N_YEARS = len(YEARS)
DIESEL_VOLUME = 30.0  # m³/yr of the diesel truck


def _ops(**electric):
    diesel = AnnualOperation(
        truck="Diesel", powertrain="diesel", operating_days=250.0, trips=500.0,
        extra_trips=0.0, distance=1.0e8, payload_distance=2.0e12,
        diesel_volume=DIESEL_VOLUME, def_volume=0.6, trip_duration=8 * 3600.0)
    ev = dict(truck="Electric", powertrain="electric", operating_days=250.0, trips=500.0,
              extra_trips=0.0, distance=1.0e8, payload_distance=2.0e12,
              battery_energy=110_000 * KWH, grid_energy_depot=120_000 * KWH,
              depot_charging_power=150e3, battery_capacity=500 * KWH,
              trip_duration=8 * 3600.0)
    ev.update(electric)
    return [diesel, AnnualOperation(**ev)]


def cost_inputs(ev_costs: dict | None = None, prices: dict | None = None, **electric):
    """Two trucks built by hand (invented figures), no escalation, nominal money."""
    pr = dict(diesel=1.6, diesel_exhaust_fluid=0.8,
              electricity=dict(energy_price=0.15, demand_charge=10.0,
                               bands=[dict(name="night", hours=[22, 23, 0, 1, 2, 3, 4, 5],
                                           price=0.10)]))
    pr.update(prices or {})
    ev = dict(purchase_price=250_000, maintenance=0.08, grant=30_000)
    ev.update(ev_costs or {})
    return cashflow.CostInputs(
        finance=Finance(analysis_years=N_YEARS, discount_rate=0.08),
        prices=Prices(**pr),
        depot=Depot(chargers=1, charger_power=150, hardware_cost=50_000,
                    installation_cost=20_000),
        trucks=[cashflow.TruckSpec("Diesel", "diesel",
                                   TruckCosts(purchase_price=120_000, maintenance=0.12)),
                cashflow.TruckSpec("Electric", "electric", TruckCosts(**ev))],
        operations=_ops(**electric))


@pytest.fixture(scope="module")
def inputs():
    return cost_inputs()


@pytest.fixture(scope="module")
def em_settings():
    return EmissionsSettings()


@pytest.fixture(scope="module")
def case(inputs, em_settings):
    return unc.Case(inputs, em_settings, YEARS)


def pv_diff(inputs, overrides=None) -> float:
    """ΔPV (electric − diesel) from one scalar run of the cash-flow model. [currency]"""
    cf = cashflow.compute(inputs, overrides)
    return float(cf.present_value(1) - cf.present_value(0))


def mean_tol(sd, n):
    return 5 * sd / math.sqrt(n)


# ------------------------------------------------------------------ distributions
N_MOMENTS = 200_000


def _closed_form(kind, p):
    """Mean and variance from textbook formulas (from memory)."""
    if kind == "uniform":
        a, b = p["low"], p["high"]
        return (a + b) / 2, (b - a) ** 2 / 12
    if kind == "triangular":
        a, c, b = p["low"], p["mode"], p["high"]
        return (a + b + c) / 3, (a * a + b * b + c * c - a * b - a * c - b * c) / 18
    if kind == "pert":
        # beta-PERT, λ = 4: mean (a + 4m + b)/6, variance (μ − a)(b − μ)/7 (Vose 2008)
        a, m, b = p["low"], p["mode"], p["high"]
        mu = (a + 4 * m + b) / 6
        return mu, (mu - a) * (b - mu) / 7
    if kind in ("normal", "lognormal"):
        return p["mean"], p["sd"] ** 2
    raise ValueError(kind)


def _scipy_reference(kind, p):
    """The distribution built directly with scipy.stats from its textbook parameters."""
    if kind == "uniform":
        return stats.uniform(loc=p["low"], scale=p["high"] - p["low"])
    if kind == "triangular":
        w = p["high"] - p["low"]
        return stats.triang((p["mode"] - p["low"]) / w, loc=p["low"], scale=w)
    if kind == "pert":
        w = p["high"] - p["low"]
        return stats.beta(1 + 4 * (p["mode"] - p["low"]) / w, 1 + 4 * (p["high"] - p["mode"]) / w,
                          loc=p["low"], scale=w)
    if kind == "normal":
        return stats.norm(p["mean"], p["sd"])
    # lognormal with mean m and sd s: σ² = ln(1 + s²/m²), median m/√(1 + s²/m²)
    s2 = math.log(1 + (p["sd"] / p["mean"]) ** 2)
    return stats.lognorm(math.sqrt(s2), scale=p["mean"] / math.sqrt(1 + (p["sd"] / p["mean"]) ** 2))


CASES = [
    ("uniform", dict(low=2.0, high=5.0)),
    ("triangular", dict(low=1.0, mode=2.0, high=6.0)),
    ("pert", dict(low=1.0, mode=2.0, high=6.0)),
    ("normal", dict(mean=10.0, sd=2.0)),
    ("lognormal", dict(mean=3.0, sd=1.5)),
]


@pytest.mark.parametrize("kind,p", CASES)
def test_sampled_moments_match_scipy(kind, p):
    """Mean and variance of the draws against scipy.stats (uniform, triang, beta, norm,
    lognorm built from the textbook parameters) and the closed forms; tolerance five
    standard errors: of the mean σ/√n, of the variance σ²·√(2/(n−1) + κ/n) with κ the
    excess kurtosis from scipy.stats."""
    ref = _scipy_reference(kind, p)
    mu, var = _closed_form(kind, p)
    assert float(ref.mean()) == pytest.approx(mu, rel=1e-12)
    assert float(ref.var()) == pytest.approx(var, rel=1e-12)
    dist = unc.distribution(kind, **p)
    assert float(dist.mean()) == pytest.approx(mu, rel=1e-12)
    assert float(dist.var()) == pytest.approx(var, rel=1e-12)

    x = unc.sample([dist], N_MOMENTS, np.random.default_rng(11))[0]
    n = x.size
    kurt = float(ref.stats(moments="k"))
    assert abs(x.mean() - mu) < mean_tol(math.sqrt(var), n)
    assert abs(x.var(ddof=1) - var) < 5 * var * math.sqrt(2 / (n - 1) + kurt / n)
    if kind in ("uniform", "triangular", "pert"):
        assert x.min() >= p["low"] and x.max() <= p["high"]


def test_truncated_normal_against_scipy_truncnorm():
    """normal with low/high = scipy.stats.truncnorm; sampled mean within 5 SE."""
    dist = unc.distribution("normal", mean=1.0, sd=0.5, low=0.0)
    ref = stats.truncnorm(-2.0, np.inf, loc=1.0, scale=0.5)
    assert float(dist.mean()) == pytest.approx(float(ref.mean()), rel=1e-12)
    x = unc.sample([dist], N_MOMENTS, np.random.default_rng(3))[0]
    assert x.min() >= 0.0
    assert abs(x.mean() - ref.mean()) < mean_tol(ref.std(), x.size)


def test_rank_to_pearson_known_value_and_inverse():
    """Kruskal (1958), from memory: for the bivariate normal ρ_s = (6/π) asin(ρ/2), so
    ρ = 2 sin(π ρ_s / 6); ρ_s = 0.5 gives 2 sin(π/12) = 0.517638..."""
    assert rank_to_pearson(0.5) == pytest.approx(2 * math.sin(math.pi / 12), rel=1e-15)
    for rs in (-1.0, -0.3, 0.0, 0.7, 1.0):
        assert 6 / math.pi * math.asin(rank_to_pearson(rs) / 2) == pytest.approx(rs, abs=1e-12)


def _fisher_tol(n):
    # standard error of atanh(Spearman) ≈ √(1.06/(n − 3)) (Fieller, Hartley & Pearson 1957,
    # Biometrika 44, from memory); five of them
    return 5 * math.sqrt(1.06 / (n - 3))


def test_copula_reproduces_rank_correlations():
    """scipy.stats.spearmanr of the draws equals the requested rank correlations (within
    five standard errors in Fisher's z), with three different margins."""
    rho = np.array([[1.0, 0.7, 0.0], [0.7, 1.0, -0.4], [0.0, -0.4, 1.0]])
    pearson = rank_to_pearson(rho)
    dists = [unc.distribution("uniform", low=0, high=1),
             unc.distribution("lognormal", mean=2.0, sd=1.0),
             unc.distribution("pert", low=0, mode=1, high=5)]
    n = 50_000
    x = unc.sample(dists, n, np.random.default_rng(5), pearson)
    for a, b in ((0, 1), (1, 2), (0, 2)):
        got = stats.spearmanr(x[a], x[b])[0]
        assert abs(math.atanh(got) - math.atanh(rho[a, b])) < _fisher_tol(n), (a, b, got)


def test_copula_through_the_scenario_section(inputs, em_settings):
    """Correlated diesel and electricity prices: the achieved Spearman (scipy.stats) in the
    result equals the requested 0.8 within five standard errors."""
    s = UncertaintySettings(
        draws=20_000, default_inputs=False,
        distributions=[
            dict(input="prices.diesel", kind="triangular", scale="absolute", low=1.3,
                 mode=1.6, high=2.2),
            dict(input="electricity_price", kind="pert", scale="relative", low=0.7, mode=1.0,
                 high=1.6)],
        correlations=[dict(inputs=["prices.diesel", "electricity_price"], rank=0.8)])
    r = unc.evaluate(s, inputs, em_settings, YEARS, break_evens=False)
    got = r.correlations.achieved_rank.iloc[0]
    assert abs(math.atanh(got) - math.atanh(0.8)) < _fisher_tol(20_000)
    assert r.correlations.pearson.iloc[0] == pytest.approx(2 * math.sin(math.pi * 0.8 / 6))
    x = r.samples["prices.diesel"].to_numpy()
    assert abs(stats.spearmanr(x, r.samples["electricity_price"])[0] - got) < 1e-12


@settings(max_examples=50, deadline=None)
@given(low=st.floats(-100, 100), width=st.floats(0.01, 100), at=st.floats(0, 1),
       kind=st.sampled_from(["triangular", "pert"]), seed=st.integers(0, 2**32 - 1))
def test_bounded_draws_stay_in_range_and_full_correlation_is_comonotone(
        low, width, at, kind, seed):
    """Invariants: bounded kinds never leave [low, high]; a rank correlation of 1 gives
    identical ranks (Spearman = 1, scipy.stats.spearmanr)."""
    high = low + width
    d = unc.distribution(kind, low=low, mode=low + at * width, high=high)
    x = unc.sample([d, unc.distribution("uniform", low=0, high=1)], 200,
                   np.random.default_rng(seed), np.ones((2, 2)))
    assert np.all((x[0] >= low) & (x[0] <= high))
    assert stats.spearmanr(x[0], x[1])[0] == pytest.approx(1.0)


# ------------------------------------------------------------------ analytic case
def test_linear_in_a_normal_diesel_price_gives_the_known_normal(inputs, em_settings):
    """ΔPV is linear in the diesel price: ΔPV(p) = ΔPV(p0) − V·AF·(p − p0) with V the
    baseline's yearly diesel volume and AF the annuity factor numpy_financial.pv(r, N, −1).
    With p ~ Normal(μ = p0, σ) the result is Normal(ΔPV(p0), V·AF·σ) (a linear function of
    a normal variable); the Monte Carlo mean, sd, P10/P90 and P(ΔPV < 0) match it
    (scipy.stats.norm) within five standard errors."""
    sd_l = 0.25  # currency per litre
    s = UncertaintySettings(
        draws=40_000, seed=7, default_inputs=False,
        distributions=[dict(input="prices.diesel", kind="normal", scale="absolute",
                            mean=1.6, sd=sd_l)])
    r = unc.evaluate(s, inputs, em_settings, YEARS, break_evens=False)
    annuity = npf.pv(0.08, N_YEARS, -1.0)
    slope = -DIESEL_VOLUME * annuity  # [currency per (currency/m³)]
    mean = pv_diff(inputs)
    sd = abs(slope) * sd_l * 1000  # sd of the price in currency/m³
    # the model's own slope agrees with the annuity (scalar runs)
    assert pv_diff(inputs, {"prices.diesel": 2600.0}) - mean == pytest.approx(slope * 1000,
                                                                               rel=1e-9)
    x = r.samples["present_value_difference"].to_numpy()
    n = x.size
    assert abs(x.mean() - mean) < mean_tol(sd, n)
    assert abs(x.std(ddof=1) - sd) < 5 * sd / math.sqrt(2 * (n - 1))
    law = stats.norm(mean, sd)
    st_row = r.statistics.set_index("quantity").loc["present_value_difference"]
    for q, col in ((0.1, "p10"), (0.9, "p90")):
        se = math.sqrt(q * (1 - q) / n) / law.pdf(law.ppf(q))  # SE of a sample quantile
        assert abs(st_row[col] - law.ppf(q)) < 5 * se
    p = float(law.cdf(0.0))
    got = r.probabilities.set_index("event").probability["cheaper"]
    assert abs(got - p) < 5 * math.sqrt(p * (1 - p) / n)


def test_avoided_emissions_linear_in_a_normal_grid_intensity(inputs, em_settings):
    """Avoided WTW emissions fall linearly with the grid intensity I: avoided(I) = WTW_D −
    E·N·I·(1/(1 − L) + u) (Scope 2 location plus T&D losses plus the upstream share u of
    the grid intensity; emissions module docstring), E the depot energy, L the loss share.
    With I normal the Monte Carlo mean and sd match the linear transform within five
    standard errors."""
    mu = em_settings.grid_intensity
    sigma = 0.1 * mu
    s = UncertaintySettings(
        draws=20_000, seed=3, default_inputs=False,
        distributions=[dict(input="emissions.grid_intensity", kind="normal",
                            scale="relative", mean=1.0, sd=0.1)])
    r = unc.evaluate(s, inputs, em_settings, YEARS, break_evens=False)
    out = emissions.compute(emissions.flat_params(em_settings), inputs.operations, YEARS)
    wtw_d = out["Diesel"]["wtw"].sum()
    e = inputs.operations[1].grid_energy_depot
    assert em_settings.electricity_upstream is None  # the share applies
    k = e * N_YEARS * (1 / (1 - em_settings.td_loss) + em_settings.electricity_upstream_share)
    x = r.samples["avoided_kg_location"].to_numpy()
    assert abs(x.mean() - (wtw_d - k * mu)) < mean_tol(k * sigma, x.size)
    assert abs(x.std(ddof=1) - k * sigma) < 5 * k * sigma / math.sqrt(2 * (x.size - 1))
    # costs do not depend on the grid intensity
    assert np.ptp(r.samples["present_value_difference"]) == 0.0


# ------------------------------------------------------------------ energy-use propagation
def test_energy_use_factor_equals_scaled_operations(case, inputs):
    """energy_use[1] × f gives the same costs and emissions as running both models with
    the electric truck's energy quantities multiplied by f (scalar runs)."""
    inp = unc.resolve_input(case, "energy_use[1]")
    f = np.array([0.8, 1.25])
    out = unc.run_draws(case, inp.overrides(f))[1]
    for j, fj in enumerate(f):
        op = inputs.operations[1]
        scaled = dataclasses.replace(op, **{k: getattr(op, k) * fj for k in unc.ENERGY_FIELDS})
        ops = [inputs.operations[0], scaled]
        again = dataclasses.replace(inputs, operations=ops)
        assert out["present_value_difference"][j] == pytest.approx(pv_diff(again), rel=1e-12)
        em = emissions.compute(case.emission_params, ops, YEARS)
        avoided = em["Diesel"]["wtw"].sum() - em["Electric"]["wtw"].sum()
        assert out["avoided_kg_location"][j] == pytest.approx(avoided, rel=1e-12)


def test_trips_per_day_reaches_the_emissions_model(case):
    """route.trips_per_day × 1.5 scales every yearly quantity in both models, so avoided
    emissions (all lines linear in them) grow by 1.5 exactly."""
    base = unc.run_draws(case, {})[1]["avoided_kg_location"][0]
    tpd = case.cost_params["route.trips_per_day"]
    got = unc.run_draws(case, {"route.trips_per_day": np.array([1.5 * tpd])})[1]
    assert got["avoided_kg_location"][0] == pytest.approx(1.5 * base, rel=1e-12)


def test_run_draws_equals_the_full_models_draw_by_draw(case, monkeypatch):
    """The model pass (lean paths: cashflow.compute_totals with finance.compare_costs,
    emissions.totals; several calls of a few draws each) gives, draw by draw, the outputs
    worked out from the full models: every cost line by year (cashflow.compute) with
    finance.payback_year on its totals, and every emission line by year
    (emissions.compute) summed. Money and emissions to a relative 1e-12, payback years
    exactly."""
    monkeypatch.setattr(unc, "DRAWS_PER_CALL", 7)
    rng = np.random.default_rng(21)
    n = 30
    p, e = case.cost_params, case.emission_params
    over = {k: p[k] * rng.uniform(0.6, 1.4, n) for k in (
        "prices.diesel", "prices.electricity.bands[0].price",
        "prices.electricity.energy_price", "prices.electricity.demand_charge",
        "trucks[1].costs.purchase_price", "trucks[1].costs.grant",
        "trucks[0].costs.maintenance", "operations[1].grid_energy_depot",
        "operations[1].battery_energy", "operations[0].diesel_volume",
        "route.days_per_year", "route.trips_per_day")}
    over["finance.discount_rate"] = rng.uniform(0.0, 0.12, n)
    over["prices.escalation.diesel"] = rng.uniform(-0.02, 0.05, n)
    over.update({k: e[k] * rng.uniform(0.6, 1.4, n) for k in (
        "emissions.grid_intensity", "emissions.diesel_co2", "emissions.diesel_upstream")})
    over["emissions.grid_change"] = rng.uniform(-0.05, 0.0, n)
    got = unc.run_draws(case, over)

    cost, em_over, ops = case.split(over)
    full = cashflow.compute(case.inputs, cost, p)
    yearly = emissions.compute(e, ops, YEARS, em_over)
    rate = full.discount_rate
    pv = [full.present_value(i) for i in (0, 1)]
    savings = full.total(0) - full.total(1)
    lc = [full.levelized_cost(i) for i in (0, 1)]
    want = {
        "present_value_difference": pv[1] - pv[0],
        "levelized_cost": lc[1], "baseline_levelized_cost": lc[0],
        "levelized_cost_difference": lc[1] - lc[0],
        "avoided_kg_location": (yearly["Diesel"]["wtw"] - yearly["Electric"]["wtw"]).sum(-1),
        "avoided_kg_market": (yearly["Diesel"]["wtw_market"]
                              - yearly["Electric"]["wtw_market"]).sum(-1),
    }
    scale = {"present_value_difference": np.abs(pv).max(),
             "levelized_cost_difference": np.abs(lc).max(),
             "avoided_kg_location": yearly["Diesel"]["wtw"].sum(-1).max(),
             "avoided_kg_market": yearly["Diesel"]["wtw_market"].sum(-1).max()}
    out = got[1]
    assert set(out) == set(unc.OUTPUTS)
    for q, w in want.items():  # a difference: relative to the size of its terms
        np.testing.assert_allclose(out[q], w, rtol=1e-12, atol=1e-12 * scale.get(q, 0.0),
                                   err_msg=q)
    for q, w in (("simple_payback_year", fin.payback_year(savings)),
                 ("discounted_payback_year", fin.payback_year(savings, rate))):
        np.testing.assert_array_equal(out[q], np.where(np.isnan(w), np.inf, w), err_msg=q)
    assert np.isfinite(out["simple_payback_year"]).any()  # the check is not empty


def test_independent_input_is_drawn_apart_from_the_copula():
    """With two correlated inputs and one without correlations, the third is drawn from
    its own distribution (beta-PERT: closed-form mean and variance, Vose 2008) and has no
    rank correlation with the others (scipy.stats.spearmanr, five standard errors in
    Fisher's z), while the pair keeps its rank correlation; a seed gives the same draws."""
    n = 60_000
    pearson = np.eye(3)
    pearson[0, 1] = pearson[1, 0] = rank_to_pearson(0.6)
    pert = dict(low=1.0, mode=2.0, high=6.0)
    dists = [unc.distribution("uniform", low=0, high=1),
             unc.distribution("lognormal", mean=2.0, sd=0.5),
             unc.distribution("pert", **pert)]
    x = unc.sample(dists, n, np.random.default_rng(8), pearson)
    mu, var = _closed_form("pert", pert)
    assert abs(x[2].mean() - mu) < mean_tol(math.sqrt(var), n)
    kurt = float(_scipy_reference("pert", pert).stats(moments="k"))
    assert abs(x[2].var(ddof=1) - var) < 5 * var * math.sqrt(2 / (n - 1) + kurt / n)
    for a in (0, 1):
        assert abs(math.atanh(stats.spearmanr(x[a], x[2])[0])) < _fisher_tol(n)
    assert abs(math.atanh(stats.spearmanr(x[0], x[1])[0]) - math.atanh(0.6)) < _fisher_tol(n)
    again = unc.sample(dists, n, np.random.default_rng(8), pearson)
    np.testing.assert_array_equal(x, again)


# ------------------------------------------------------------------ tornado
@pytest.fixture(scope="module")
def default_result(inputs, em_settings):
    return unc.evaluate(UncertaintySettings(draws=2_000), inputs, em_settings, YEARS)


def _scalar_overrides(case, key, value):
    """Parameter values for one input value, written out here from the documented meaning
    of each named group (not through tco.uncertainty)."""
    p = case.cost_params
    if key == "electricity_price":
        return {k: p[k] * value for k in p
                if k.startswith("prices.electricity.bands[") or k.endswith("energy_price")}
    if key.startswith("energy_use["):
        i = key[len("energy_use["):-1]
        fields = ("diesel_volume", "def_volume", "battery_energy", "grid_energy_depot",
                  "grid_energy_public")
        return {f"operations[{i}].{f}": p[f"operations[{i}].{f}"] * value for f in fields
                if p[f"operations[{i}].{f}"] > 0}
    if key.startswith("residual_value["):
        # declining balance: end value (1 − r')^N = f (1 − r)^N
        path = f"trucks[{key[len('residual_value['):-1]}].costs.residual.rate"
        return {path: 1 - value ** (1 / N_YEARS) * (1 - p[path])}
    return {key: value}


def test_tornado_extremes_equal_single_runs(default_result, case, inputs):
    """Each bar's ends equal a scalar run of the cash-flow model with that one input at its
    low or high value (groups: every parameter they move)."""
    t = default_result.tornado
    assert len(t) >= 10
    for row in t.itertuples():
        inp = unc.resolve_input(case, row.key)
        for end in ("low", "high"):
            x = getattr(row, f"{end}_factor") if inp.group else \
                getattr(row, f"{end}_factor") * inp.base
            got = pv_diff(inputs, _scalar_overrides(case, row.key, x))
            assert getattr(row, end) == pytest.approx(got, rel=1e-9, abs=1e-6), row.key
        assert row.base == pytest.approx(pv_diff(inputs), rel=1e-12)
    assert list(t.swing) == sorted(t.swing, reverse=True)
    assert (t.low_factor.round(12) == 0.8).all() and (t.high_factor.round(12) == 1.2).all()


def test_tornado_user_range_in_us_units(case, inputs, em_settings):
    """A user's range replaces the default one; "4.10 / gal" is 4.10 / 3.785411784e-3 m³
    (US gallon, NIST Handbook 44) = 1083.105... currency/m³."""
    s = UncertaintySettings(draws=0, tornado=[dict(input="prices.diesel", low="3.00 / gal",
                                                   high="4.10 / gal", scale="absolute")])
    r = unc.evaluate(s, inputs, em_settings, YEARS, break_evens=False)
    row = r.tornado.set_index("key").loc["prices.diesel"]
    assert row.source == "user"
    assert row.high_value * 1000 == pytest.approx(4.10 / US_GALLON, rel=1e-12)
    assert row.high == pytest.approx(pv_diff(inputs, {"prices.diesel": 4.10 / US_GALLON}),
                                     rel=1e-12)
    assert (r.tornado.key == "prices.diesel").sum() == 1


def test_tornado_leaves_out_inputs_that_do_not_matter(inputs, em_settings):
    """A user's emissions-only input stays with zero swing; no default bar has zero swing."""
    s = UncertaintySettings(draws=0, tornado=[
        dict(input="emissions.grid_intensity", low=0.5, high=1.5, scale="relative")])
    r = unc.evaluate(s, inputs, em_settings, YEARS)
    row = r.tornado.set_index("key").loc["emissions.grid_intensity"]
    assert row.swing == 0.0
    assert (r.tornado[r.tornado.source != "user"].swing > 0).all()
    be = r.break_even.set_index("key").loc["emissions.grid_intensity"]
    assert math.isnan(be.value) and "does not change" in be.note


# ------------------------------------------------------------------ break-even
def test_break_even_agrees_with_the_cash_flow_model(default_result, inputs):
    """Diesel and purchase price break-evens equal tco.cashflow.break_even, and ΔPV is zero
    at every break-even found (scalar runs)."""
    be = default_result.break_even.set_index("key")
    ref = cashflow.break_even(inputs, "diesel_price", 1)
    assert be.loc["prices.diesel", "value_si"] == pytest.approx(ref.value, rel=1e-8)
    ref = cashflow.break_even(inputs, "purchase_price", 1)
    assert be.loc["trucks[1].costs.purchase_price", "value_si"] == pytest.approx(ref.value,
                                                                                 rel=1e-8)
    case = unc.Case(inputs, None, YEARS)
    scale = abs(pv_diff(inputs)) + 1e5
    found = default_result.break_even.dropna(subset=["value"])
    assert len(found) >= 8
    for row in found.itertuples():
        d = pv_diff(inputs, _scalar_overrides(case, row.key, row.value_si))
        assert abs(d) < 1e-6 * scale, row.key


def test_break_even_discount_rate_is_the_irr(default_result, inputs):
    """The discount rate that makes ΔPV zero is the IRR of the savings flows
    (numpy_financial.irr)."""
    cf = cashflow.compute(inputs)
    savings = cf.total(0) - cf.total(1)
    be = default_result.break_even.set_index("key").loc["finance.discount_rate", "value"]
    assert be == pytest.approx(npf.irr(savings), rel=1e-8)


def test_break_even_found_after_widening_the_range(em_settings):
    """The diesel truck's maintenance that equalises the costs lies beyond 10× its small
    scenario value: the search widens the range and still finds it."""
    inp = cost_inputs()
    inp.trucks[0] = cashflow.TruckSpec("Diesel", "diesel",
                                       TruckCosts(purchase_price=120_000, maintenance=0.001))
    case = unc.Case(inp, em_settings, YEARS)
    i = unc.resolve_input(case, "trucks[0].costs.maintenance")
    r = unc.break_even_one(case, i, 1, case.base_difference[1])
    assert r.value is not None and r.value > 10 * i.base
    assert abs(pv_diff(inp, {"trucks[0].costs.maintenance": r.value})) < 1e-3


def test_break_even_none_in_range(em_settings):
    """When the electric truck is already cheaper, no grant ≥ 0 makes the costs equal:
    "none in range"."""
    inp = cost_inputs(ev_costs=dict(purchase_price=140_000))
    case = unc.Case(inp, em_settings, YEARS)
    assert case.base_difference[1] < 0
    r = unc.break_even_one(case, unc.resolve_input(case, "trucks[1].costs.grant"), 1,
                           case.base_difference[1])
    assert r.value is None and r.note.startswith("none in range")


# ------------------------------------------------------------------ reproducibility
def test_same_seed_same_results_other_seed_differs(inputs, em_settings):
    s = UncertaintySettings(draws=3_000, seed=42)
    a = unc.evaluate(s, inputs, em_settings, YEARS, break_evens=False)
    b = unc.evaluate(s, inputs, em_settings, YEARS, break_evens=False)
    pd.testing.assert_frame_equal(a.samples, b.samples)
    pd.testing.assert_frame_equal(a.statistics, b.statistics)
    c = unc.evaluate(s.model_copy(update={"seed": 43}), inputs, em_settings, YEARS,
                     break_evens=False)
    assert not np.allclose(a.samples.present_value_difference,
                           c.samples.present_value_difference)


def test_chunks_and_progress_do_not_change_the_result(inputs, em_settings):
    s = UncertaintySettings(draws=2_500, seed=9)
    whole = unc.evaluate(s, inputs, em_settings, YEARS, break_evens=False)
    seen = []
    parts = unc.evaluate(s, inputs, em_settings, YEARS, break_evens=False,
                         progress=seen.append, chunk_size=1_000)
    assert seen == [1_000, 1_000, 500]
    num = whole.samples.select_dtypes("number").columns
    np.testing.assert_allclose(parts.samples[num].to_numpy(), whole.samples[num].to_numpy(),
                               rtol=1e-12)


# ------------------------------------------------------------------ results and summary
def test_result_tables_and_summary(default_result):
    r = default_result
    assert r.baseline == "Diesel" and r.trucks == ["Electric"]
    assert len(r.samples) == 2_000
    stats_ = r.statistics.set_index("quantity")
    assert (stats_.p10 <= stats_.p50).all() and (stats_.p50 <= stats_.p90).all()
    x = r.samples.present_value_difference
    p = r.probabilities.set_index("event").probability
    assert p["cheaper"] == pytest.approx((x < 0).mean())
    assert p["avoids_emissions_location"] == pytest.approx(
        (r.samples.avoided_kg_location > 0).mean())
    assert any("triangular" in n for n in r.notes)

    s = uncertainty_summary(r)
    text = json.dumps(s, allow_nan=False)
    assert json.loads(text)["schema"] == unc.SUMMARY_SCHEMA
    mc = s["monte_carlo"]["Electric"]
    assert mc["present_value_difference"]["p50"] == pytest.approx(
        stats_.loc["present_value_difference", "p50"])
    assert mc["levelized_cost_per_km"]["p50"] == pytest.approx(
        stats_.loc["levelized_cost", "p50"] * 1000)
    assert mc["probability_cheaper"] == pytest.approx(p["cheaper"])
    assert set(mc["avoided_kg"]) == {"location", "market"}
    for key in ("tornado", "break_even", "base", "inputs", "correlations", "notes", "draws",
                "seed", "baseline", "default_swing"):
        assert key in s
    bars = s["tornado"]["Electric"]
    assert bars[0]["swing"] >= bars[-1]["swing"]


def test_disabled_returns_none(inputs, em_settings):
    assert unc.evaluate(UncertaintySettings(enabled=False), inputs, em_settings, YEARS) is None
    assert uncertainty_summary(None) is None


def test_zero_draws_runs_tornado_only(inputs, em_settings):
    r = unc.evaluate(UncertaintySettings(draws=0), inputs, em_settings, YEARS,
                     break_evens=False)
    assert r.draws == 0 and r.samples.empty and len(r.tornado)
    assert uncertainty_summary(r)["monte_carlo"] == {}


# ------------------------------------------------------------------ error paths
def _error(**kw):
    with pytest.raises(ValidationError) as e:
        UncertaintySettings(**kw)
    return e.value


def test_low_above_high_is_refused():
    err = _error(distributions=[dict(input="prices.diesel", kind="uniform", scale="absolute",
                                     low=2.0, high=1.5)])
    assert "low (2) must be below high (1.5)" in str(err)
    err = _error(tornado=[dict(input="prices.diesel", low=2.0, high=1.5, scale="absolute")])
    assert "low (2) is above high (1.5)" in str(err)


def test_negative_standard_deviation_is_refused():
    err = _error(distributions=[dict(input="prices.diesel", kind="normal", scale="absolute",
                                     mean=1.6, sd=-0.1)])
    assert err.errors()[0]["loc"] == ("distributions", 0, "sd")
    assert "greater than zero" in str(err)


def test_missing_and_unused_numbers_are_refused():
    assert "mode is missing" in str(_error(distributions=[dict(
        input="prices.diesel", kind="triangular", scale="relative", low=0.8, high=1.2)]))
    assert "sd is not used" in str(_error(distributions=[dict(
        input="prices.diesel", kind="uniform", scale="relative", low=0.8, high=1.2, sd=1)]))


def test_correlations_not_positive_semi_definite_are_refused():
    d = [dict(input=k, kind="uniform", scale="relative", low=0.9, high=1.1)
         for k in ("a", "b", "c")]
    err = _error(distributions=d, correlations=[
        dict(inputs=["a", "b"], rank=0.9), dict(inputs=["b", "c"], rank=0.9),
        dict(inputs=["a", "c"], rank=-0.9)])
    assert "positive semi-definite" in str(err)
    assert err.errors()[0]["loc"] == ("correlations",)


def test_correlation_of_an_input_without_distribution_is_refused():
    err = _error(distributions=[dict(input="a", kind="uniform", scale="relative", low=0.9,
                                     high=1.1)],
                 correlations=[dict(inputs=["a", "b"], rank=0.5)])
    assert "'b' has no distribution" in str(err)


def test_repeated_input_is_refused():
    d = dict(input="prices.diesel", kind="uniform", scale="relative", low=0.9, high=1.1)
    assert "given twice" in str(_error(distributions=[d, d]))


def test_scenario_loader_reports_one_line():
    """Through the scenario loader: one InputError naming the field."""
    from tco.scenario import parse_scenario
    data = {
        "study": {"name": "Test study", "currency": "EUR"},
        "route": {"legs": [{"name": "out", "payload": 20, "segments": [
            {"length": 10, "speed": 80}]}]},
        "trucks": [
            {"name": "D", "powertrain": "diesel", "body": {"curb_mass": 15},
             "diesel": {"engine_power": 330}},
            {"name": "E", "powertrain": "electric", "body": {"curb_mass": 18},
             "electric": {"battery_capacity": 600, "motor_power": 400}}],
        "uncertainty": {"distributions": [{"input": "prices.diesel", "kind": "normal",
                                           "scale": "absolute", "mean": 1.6, "sd": -1}]},
    }
    with pytest.raises(InputError) as e:
        parse_scenario(data)
    assert e.value.where == "uncertainty.distributions[0].sd"
    assert "greater than zero" in e.value.message
    data["uncertainty"] = {"draws": 500, "default_swing": "25 %", "distributions": [
        {"input": "prices.diesel", "kind": "pert", "scale": "absolute", "low": "1.4 / L",
         "mode": 1.6, "high": "8.5 / gal"}]}
    u = parse_scenario(data).uncertainty
    assert u.default_swing == 0.25 and u.distributions[0].high == "8.5 / gal"


@pytest.mark.parametrize("dist,where,text", [
    (dict(input="prices.diesl", kind="uniform", scale="relative", low=0.9, high=1.1),
     "uncertainty.distributions[0].input", "did you mean 'prices.diesel'"),
    (dict(input="energy_use[7]", kind="uniform", scale="relative", low=0.9, high=1.1),
     "uncertainty.distributions[0].input", "there is no truck 7"),
    (dict(input="trucks[0].costs.grant", kind="uniform", scale="relative", low=0.9, high=1.1),
     "uncertainty.distributions[0].scale", "is 0"),
    (dict(input="electricity_price", kind="uniform", scale="absolute", low=0.1, high=0.2),
     "uncertainty.distributions[0].scale", "relative numbers only"),
    (dict(input="prices.diesel", kind="uniform", scale="absolute", low="1 kg", high=2.0),
     "uncertainty.distributions[0].low", "'1 kg'"),
    (dict(input="prices.diesel", kind="uniform", scale="absolute", low="2.0 / L",
          high="1 / L"),
     "uncertainty.distributions[0]", "must be below high"),
    (dict(input="prices.diesel", kind="normal", scale="absolute", mean=1.6, sd=5.0),
     "uncertainty.distributions[0]", "out of range"),
])
def test_evaluation_errors_name_the_field(inputs, em_settings, dist, where, text):
    s = UncertaintySettings(draws=500, default_inputs=False, distributions=[dist])
    with pytest.raises(InputError) as e:
        unc.evaluate(s, inputs, em_settings, YEARS, break_evens=False)
    assert e.value.where == where
    assert text in e.value.message
    assert "\n" not in e.value.line()


def test_unknown_tornado_input(inputs, em_settings):
    s = UncertaintySettings(draws=0, tornado=[dict(input="route.days", low=0.9, high=1.1,
                                                   scale="relative")])
    with pytest.raises(InputError) as e:
        unc.evaluate(s, inputs, em_settings, YEARS)
    assert e.value.where == "uncertainty.tornado[0].input"


def test_absolute_numbers_in_other_units(inputs, em_settings):
    """Absolute numbers: a quantity string in any unit, or plain numbers in the unit named
    by ``unit``; 1 US gallon = 3.785411784 L (NIST Handbook 44)."""
    s = UncertaintySettings(draws=200, default_inputs=False, distributions=[
        dict(input="prices.diesel", kind="pert", scale="absolute", low="1.4 / L", mode=1.6,
             high="8.5 / gal"),
        dict(input="trucks[1].costs.maintenance", kind="uniform", scale="absolute",
             low=0.1, high=0.2, unit="1/mi")])
    r = unc.evaluate(s, inputs, em_settings, YEARS, break_evens=False)
    p = r.inputs.set_index("key").parameters
    assert p["prices.diesel"] == pytest.approx(
        {"low": 1400.0, "mode": 1600.0, "high": 8.5 / US_GALLON})
    mile = 1609.344  # m, exact (international mile)
    assert p["trucks[1].costs.maintenance"] == pytest.approx(
        {"low": 0.1 / mile, "high": 0.2 / mile})
    x = r.samples["trucks[1].costs.maintenance"]
    assert x.between(0.1 / mile, 0.2 / mile).all()


def test_residual_value_factor_above_the_price_is_refused(inputs, em_settings):
    """Declining balance 15 %/yr over 10 years keeps 0.85^10 of the price; a factor above
    1/0.85^10 = 5.079 would value the truck above its price."""
    s = UncertaintySettings(draws=0, default_inputs=False, tornado=[
        dict(input="residual_value[1]", low=0.5, high=6.0, scale="relative")])
    with pytest.raises(InputError) as e:
        unc.evaluate(s, inputs, em_settings, YEARS)
    assert e.value.where == "uncertainty.tornado[0]"
    assert f"{0.85 ** -10:.4g}" == "5.079" and "5.079" in e.value.message


def test_summary_payback_years_are_whole_years_or_null(default_result):
    s = uncertainty_summary(default_result)["monte_carlo"]["Electric"]
    for kind in ("simple_payback_year", "discounted_payback_year"):
        assert set(s[kind]) == {"p10", "p50", "p90"}
        assert all(v is None or isinstance(v, int) for v in s[kind].values())
    row = default_result.statistics.set_index("quantity").loc["present_value_difference"]
    assert s["present_value_difference"]["mean"] == pytest.approx(row["mean"])
