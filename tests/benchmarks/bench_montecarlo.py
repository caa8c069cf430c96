"""Benchmark of the Monte Carlo pass (tco.uncertainty) against the random-number floor.

A script, not a test (speed is never asserted in the test suite). Run from the repository
root:

    python tests/benchmarks/bench_montecarlo.py [--draws 100000] [--repeats 9] [--cpu]

``--cpu`` times with the process's CPU time (``time.process_time``) instead of the wall
clock: on a shared machine it does not count the time other processes hold the core.

Case: two trucks (diesel baseline, electric), 15 years, eight uncertain inputs (diesel
price, depot electricity prices, demand charge, operating days, the electric truck's
purchase price and energy use, the discount rate, the grid intensity), two of them
rank-correlated. Its numbers are invented for the benchmark.

It times, in ``--repeats`` alternating rounds (the floor, the sampling, the model pass
and the whole step in turns, so that all see the same state of a shared machine, whose
speed was seen to drift by a factor of two within a minute), and prints the median over
the rounds of each ratio to the floor of its own round, with the smallest and largest:

* the floor: ``rng.standard_normal((8, draws))``, NumPy drawing the same number of
  random variates;
* the sampling (copula for the correlated inputs, the others straight from their
  distribution: :func:`tco.uncertainty.sample`) and its ratio to the floor;
* the model pass (:func:`tco.uncertainty.run_draws`: the lean paths of the cash-flow and
  emissions models, present values, levelized costs, payback years, avoided emissions)
  and its ratio to the floor (target ≤ 3);
* the whole Monte Carlo step (:func:`tco.uncertainty.monte_carlo`: sampling + model pass)
  and its ratio to the floor (target ≤ 4);
* a breakdown of the model pass by piece, for one call of each model over all draws
  (``run_draws`` makes calls of at most ``DRAWS_PER_CALL`` draws), and, for comparison,
  the full paths (every line and frame by year) the model pass does not use.
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tco import cashflow, emissions  # noqa: E402
from tco import finance as fin  # noqa: E402
from tco import uncertainty as unc  # noqa: E402
from tco.operation import AnnualOperation  # noqa: E402
from tco.scenario.costs import Depot, Finance, Prices, TruckCosts  # noqa: E402
from tco.scenario.emissions import EmissionsSettings  # noqa: E402
from tco.scenario.uncertainty import UncertaintySettings  # noqa: E402

KWH = 3.6e6
YEARS = list(range(2030, 2045))  # 15 years of service


def build_case() -> unc.Case:
    ops = [
        AnnualOperation(truck="Diesel", powertrain="diesel", operating_days=250.0,
                        trips=500.0, extra_trips=0.0, distance=1.1e8, payload_distance=2.2e12,
                        diesel_volume=33.0, def_volume=0.7, trip_duration=7.5 * 3600),
        AnnualOperation(truck="Electric", powertrain="electric", operating_days=250.0,
                        trips=500.0, extra_trips=5.0, distance=1.11e8,
                        payload_distance=2.2e12, battery_energy=120_000 * KWH,
                        grid_energy_depot=125_000 * KWH, grid_energy_public=8_000 * KWH,
                        charging_time_lost=80 * 3600.0, depot_charging_power=140e3,
                        trip_duration=7.5 * 3600, battery_capacity=560 * KWH,
                        battery_cycle_life=3500.0),
    ]
    inputs = cashflow.CostInputs(
        finance=Finance(analysis_years=15, discount_rate=0.07, driver_cost_per_hour=35.0),
        prices=Prices(diesel=1.55, diesel_exhaust_fluid=0.7, public_charging=0.45,
                      electricity=dict(energy_price=0.18, demand_charge=12.0, fixed_fee=40.0,
                                       bands=[dict(name="night", hours=[22, 23, 0, 1, 2, 3, 4,
                                                                        5], price=0.11)]),
                      escalation=dict(diesel=0.02, electricity=0.015)),
        depot=Depot(chargers=1, charger_power=150, hardware_cost=60_000,
                    installation_cost=25_000, maintenance_per_year=1_500),
        trucks=[cashflow.TruckSpec("Diesel", "diesel", TruckCosts(
                    purchase_price=125_000, maintenance=0.13, tyres=0.03, insurance_rate=0.02,
                    registration=2_500)),
                cashflow.TruckSpec("Electric", "electric", TruckCosts(
                    purchase_price=260_000, maintenance=0.09, tyres=0.035, grant=25_000,
                    insurance_rate=0.02, registration=500,
                    battery_replacement=dict(when="cycles", cost_per_kwh=120)))],
        operations=ops)
    return unc.Case(inputs, EmissionsSettings(), YEARS)


SETTINGS = UncertaintySettings(
    distributions=[
        dict(input="prices.diesel", kind="triangular", scale="relative", low=0.8, mode=1.0,
             high=1.35),
        dict(input="electricity_price", kind="pert", scale="relative", low=0.75, mode=1.0,
             high=1.5),
        dict(input="prices.electricity.demand_charge", kind="uniform", scale="relative",
             low=0.7, high=1.3),
        dict(input="route.days_per_year", kind="normal", scale="absolute", mean=250, sd=15,
             high=300),
        dict(input="trucks[1].costs.purchase_price", kind="pert", scale="absolute",
             low=230_000, mode=260_000, high=300_000),
        dict(input="energy_use[1]", kind="normal", scale="relative", mean=1.0, sd=0.06),
        dict(input="finance.discount_rate", kind="uniform", scale="absolute", low=0.05,
             high=0.09),
        dict(input="emissions.grid_intensity", kind="lognormal", scale="relative", mean=1.0,
             sd=0.15),
    ],
    correlations=[dict(inputs=["prices.diesel", "electricity_price"], rank=0.6)],
)


CLOCK = time.perf_counter


def best(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = CLOCK()
        fn()
        times.append(CLOCK() - t0)
    return min(times)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--draws", type=int, default=100_000)
    ap.add_argument("--repeats", type=int, default=9)
    ap.add_argument("--cpu", action="store_true", help="time with the process's CPU time")
    args = ap.parse_args()
    n, reps = args.draws, args.repeats
    global CLOCK
    CLOCK = time.process_time if args.cpu else time.perf_counter

    case = build_case()
    specs, pearson, _ = unc.resolve_distributions(case, SETTINGS)
    k = len(specs)
    rng = np.random.default_rng(1)

    dists = [s.dist for s in specs]
    over = unc.draw_overrides(specs, unc.sample(dists, n, rng, pearson))
    unc.run_draws(case, over)  # warm-up (and the compiled loops' cache)
    unc.monte_carlo(case, specs, pearson, n, 1)
    rounds = {"floor": [], "sampling": [], "models": [], "mc": []}
    for _ in range(reps):  # in turns; each ratio against the floor of its own round
        floor_r = best(lambda: rng.standard_normal((k, n)), 3)
        rounds["floor"].append(floor_r)
        rounds["sampling"].append(best(lambda: unc.sample(dists, n, rng, pearson), 1) / floor_r)
        rounds["models"].append(best(lambda: unc.run_draws(case, over), 1) / floor_r)
        rounds["mc"].append(best(lambda: unc.monte_carlo(case, specs, pearson, n, 1), 1)
                            / floor_r)
    floor = float(np.median(rounds["floor"]))
    r_sample, r_models, r_mc = (float(np.median(rounds[q])) for q in ("sampling", "models",
                                                                        "mc"))

    # breakdown of the model pass: the lean paths over all draws at once
    cost, em_over, ops = case.split(over)
    t_em = best(lambda: emissions.totals(case.emission_params, ops, case.years, em_over),
                reps)
    t_cf = best(lambda: cashflow.compute_totals(case.inputs, cost, case.cost_params), reps)
    ct = cashflow.compute_totals(case.inputs, cost, case.cost_params)
    t_cmp = best(lambda: fin.compare_costs(ct.flows[0], ct.flows[1], ct.discount_rate), reps)
    # the full paths, for comparison
    t_cf_full = best(lambda: cashflow.compute(case.inputs, cost, case.cost_params,
                                              totals_only=True), reps)
    cf = cashflow.compute(case.inputs, cost, case.cost_params, totals_only=True)
    tot = [np.atleast_2d(cf.total(i)) for i in (0, 1)]
    t_pay = best(lambda: (fin.payback_year(tot[0] - tot[1]),
                          fin.payback_year(tot[0] - tot[1], cf.discount_rate)), reps)
    t_em_full = best(lambda: emissions.compute(case.emission_params, ops, case.years,
                                               em_over), reps)

    def line(text, t, ratio=True):
        tail = f"  ratio {t / floor:6.1f}" if ratio else ""
        print(f"  {text:<44}{t * 1e3:9.1f} ms{tail}")

    def ratio_line(text, r, key, target=""):
        spread = f"[{min(rounds[key]):.1f}–{max(rounds[key]):.1f}]"
        print(f"  {text:<44}{r * floor * 1e3:9.1f} ms  ratio {r:6.1f}  {spread:<12}{target}")

    print(f"draws {n:,} × {len(YEARS)} years × 2 trucks, {k} uncertain inputs "
          f"({reps} alternating rounds: medians of the per-round ratios, [min–max]; "
          f"{'CPU time' if args.cpu else 'wall clock'})")
    line(f"floor  rng.standard_normal(({k}, {n}))", floor, ratio=False)
    ratio_line("sampling (copula + distributions)", r_sample, "sampling")
    ratio_line("model pass (run_draws)", r_models, "models", "(target ≤ 3)")
    ratio_line("Monte Carlo step (sampling + models)", r_mc, "mc", "(target ≤ 4)")
    print("  breakdown of the model pass (one call over all draws):")
    line("  emissions.totals", t_em, ratio=False)
    line("  cashflow.compute_totals", t_cf, ratio=False)
    line("  finance.compare_costs (PVs, paybacks)", t_cmp, ratio=False)
    print("  full paths, not used by the model pass:")
    line("  cashflow.compute(totals_only=True)", t_cf_full, ratio=False)
    line("  finance.payback_year on its totals, ×2", t_pay, ratio=False)
    line("  emissions.compute", t_em_full, ratio=False)


if __name__ == "__main__":
    main()
