"""Benchmark: the fleet path on many routes, each a day of 1 Hz data.

Writes N invented day-long traces (time, speed, grade at 1 Hz; 8–11 h of driving with
stops, hills and motorway stretches), a fleet file pointing to them, and runs
:func:`tco.fleet.evaluate_fleet` on the demo fleet base. Prints the wall time of each stage,
the peak memory (this process and the largest worker process), and the ratio of the whole
fleet run to a floor measured in the same run: reading the same trace files with pandas
alone.

Run: python tests/benchmarks/bench_fleet.py [--routes 1000] [--jobs 2] [--keep DIR]

The transition plan (``--plan-only``): the mixed-integer programme of
:mod:`tco.plan` for ``--routes`` vehicles × ``--years`` plan years (default 1,000 × 10),
built from invented but plausible option values (seeded): present values, capital in the
year bought, emissions falling when a vehicle goes electric, charger needs, peak
contributions, a yearly capital budget, a grid capacity with an upgrade and a Scope 1 + 2
target. Prints the solve time (target: within 60 s on two cores), the solver's status and
gap, and the ratio to a floor measured in the same run: the LP relaxation of the same
programme solved by HiGHS (scipy.optimize.linprog).

Run: python tests/benchmarks/bench_fleet.py --plan-only [--routes 1000] [--years 10]
"""
from __future__ import annotations

import argparse
import resource
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd


def day_trace(rng: np.random.Generator) -> pd.DataFrame:
    """One invented working day at 1 Hz: stretches of cruise, stops, grades."""
    hours = rng.uniform(8.0, 11.0)
    n = int(hours * 3600)
    speed = np.empty(n)
    grade = np.empty(n)
    i = 0
    while i < n:
        length = int(rng.integers(120, 1800))
        target = rng.choice([0.0, 30.0, 50.0, 80.0, 85.0], p=[0.1, 0.2, 0.2, 0.3, 0.2])
        g = rng.normal(0.0, 1.5)
        seg = np.full(length, target)
        ramp = min(length // 3, 60)
        if ramp > 0 and target > 0:
            seg[:ramp] = np.linspace(0, target, ramp)
            seg[-ramp:] = np.linspace(target, 0, ramp)
        speed[i:i + length] = seg[: n - i]
        grade[i:i + length] = g
        i += length
    return pd.DataFrame({"time [s]": np.arange(n, dtype=float),
                         "speed [km/h]": np.round(speed, 2), "grade [%]": np.round(grade, 2)})


class DescendantPeaks:
    """Peak resident memory (VmHWM) of every descendant process, polled from /proc.

    The fleet's workers are children of a fork server, not of this process, so
    ``RUSAGE_CHILDREN`` does not see them; their high-water mark is read while they live.
    """

    def __init__(self, every: float = 0.2):
        import threading

        self.peaks: dict[int, int] = {}
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, args=(every,), daemon=True)

    def __enter__(self):
        self._thread.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._thread.join()

    def _run(self, every):
        import os

        me = os.getpid()
        while not self._stop.wait(every):
            parent = {}
            for d in os.listdir("/proc"):
                if d.isdigit():
                    try:
                        with open(f"/proc/{d}/stat") as fh:
                            parent[int(d)] = int(fh.read().rsplit(")", 1)[1].split()[1])
                    except OSError:
                        continue
            for pid in parent:
                p, hops = pid, 0
                while p in parent and p != me and hops < 8:
                    p, hops = parent[p], hops + 1
                if p != me or pid == me:
                    continue
                try:
                    with open(f"/proc/{pid}/status") as fh:
                        for line in fh:
                            if line.startswith("VmHWM:"):
                                kb = int(line.split()[1])
                                self.peaks[pid] = max(self.peaks.get(pid, 0), kb * 1024)
                except OSError:
                    continue


def plan_problem(V: int, N: int, seed: int = 11):
    """An invented fleet plan of V vehicles and N years (see the module docstring)."""
    from tco.plan import PlanProblem

    rng = np.random.default_rng(seed)
    O = N + 1
    y = np.arange(N)
    disc = 1.07 ** -np.arange(1, N + 1)
    diesel_pv = rng.uniform(1.5e5, 7e5, V)
    gain = rng.normal(0.05, 0.12, V) * diesel_pv        # electric from year 0: saving
    pv = np.empty((V, O))
    pv[:, 0] = diesel_pv
    # later electric: less of the saving, less early resale
    pv[:, 1:] = diesel_pv[:, None] - gain[:, None] * (1 - y / N)[None, :] ** 1.2
    price = rng.uniform(1.8e5, 2.7e5, V)
    repl = rng.integers(0, N + 3, V)                      # due year (past N: not due)
    capex = np.zeros((V, O, N))
    for v in range(V):
        if repl[v] < N:
            capex[v, 0, repl[v]] = 0.5 * price[v]
        capex[v, 1 + np.arange(N), y] = price[v]
    allowed = np.zeros((V, O), dtype=bool)
    allowed[:, 0] = True
    feasible = rng.random(V) < 0.85
    for v in range(V):
        last = min(repl[v], N - 1)
        allowed[v, 1:last + 2] = feasible[v]
    e_d = rng.uniform(40, 160, V)                          # t a year diesel
    em = np.repeat(e_d[:, None, None], O, axis=1) * np.ones((1, 1, N))
    for t in range(N):
        em[:, 1 + t, t:] = (e_d * rng.uniform(0.15, 0.35, V))[:, None] * 0.94 ** y[t:]
    limit = 0.55 * e_d.sum()
    return PlanProblem(
        vehicles=[f"V{v}" for v in range(V)], pv=pv, capex=capex, emissions=em,
        allowed=allowed, discount=disc, carbon_price=50.0,
        charger_need=rng.choice([0.25, 0.33, 0.5], V), charger_pv=70_000 * 0.97 ** y,
        charger_capex=80_000 * np.ones(N), connection_pv=250_000 * 1.07 ** -y,
        connection_capex=250_000 * np.ones(N), peak=rng.uniform(15, 60, V),
        grid_capacity=0.35 * 40 * V, upgrade_kw=0.4 * 40 * V,
        upgrade_pv=1.5e6 * 1.07 ** -y, upgrade_capex=1.5e6 * np.ones(N), upgrade_lead=2,
        budget=np.full(N, 0.16 * price.sum()), target_limit=limit, target_from=min(6, N))


def bench_plan(V: int, N: int, time_limit: float) -> None:
    from scipy.optimize import linprog

    from tco.plan import _Model, solve

    t0 = time.perf_counter()
    pb = plan_problem(V, N)
    t_build = time.perf_counter() - t0
    m = _Model(pb, elastic=False)
    lb, ub = m.bounds()
    fin_hi, fin_lo = np.isfinite(m.hi), np.isfinite(m.lo)
    from scipy.sparse import vstack
    t0 = time.perf_counter()
    lp = linprog(m.cost(), A_ub=vstack([m.A[fin_hi], -m.A[fin_lo]]).tocsr(),
                 b_ub=np.concatenate([m.hi[fin_hi], -m.lo[fin_lo]]),
                 bounds=list(zip(lb, ub)), method="highs")
    t_floor = time.perf_counter() - t0
    t0 = time.perf_counter()
    sol = solve(pb, gap=1e-4, time_limit=time_limit, shadow=True)
    t_solve = time.perf_counter() - t0
    n_e = int((sol.choice > 0).sum())
    print(f"plan: {V} vehicles x {N} years ({pb.V * (N + 1)} vehicle-year choices), built "
          f"in {t_build:.2f} s")
    print(f"plan solve (HiGHS, mip_rel_gap 1e-4, time limit {time_limit:.0f} s per solve, "
          f"with what-binds and shadow prices): {t_solve:.1f} s; status {sol.status}; "
          f"gap {sol.mip_gap:.2e}; target met {sol.target_met}; {n_e} electric; "
          f"{len(sol.shadow)} shadow-price rows")
    print(f"floor (LP relaxation, linprog HiGHS, status {lp.status}): {t_floor:.2f} s; "
          f"ratio plan / floor = {t_solve / t_floor:.1f}")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--routes", type=int, default=1000)
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--keep", help="write the data here and keep it")
    ap.add_argument("--plan-only", action="store_true",
                    help="benchmark only the transition plan's solve (invented options)")
    ap.add_argument("--years", type=int, default=10, help="plan years (--plan-only)")
    ap.add_argument("--time-limit", type=float, default=60.0,
                    help="seconds per integer solve (--plan-only)")
    args = ap.parse_args()
    if args.plan_only:
        bench_plan(args.routes, args.years, args.time_limit)
        return

    from tco.fleet import evaluate_fleet, read_fleet
    from tco.resources import inputs_dir
    from tco.scenario import load_scenario

    work = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="bench-fleet-"))
    work.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(7)
    t0 = time.perf_counter()
    rows = ["vehicle,route,cycle,current,candidate,payload [t],arrive,depart"]
    samples = 0
    for k in range(args.routes):
        f = work / f"day-{k:04d}.csv"
        if not f.exists():
            tr = day_trace(rng)
            tr.to_csv(f, index=False)
        else:
            tr = None
        samples += len(tr) if tr is not None else sum(1 for _ in open(f)) - 1
        rigid = k % 2 == 1
        cur, cand = ("Diesel rigid", "Electric rigid") if rigid else \
            ("Diesel tractor", "Electric tractor")
        arrive = f"{int(rng.integers(15, 21)):02d}:{int(rng.integers(0, 4)) * 15:02d}"
        depart = f"{int(rng.integers(4, 7)):02d}:{int(rng.integers(0, 4)) * 15:02d}"
        rows.append(f"V{k:04d},day {k},{f.name},{cur},{cand},"
                    f"{8 if rigid else 18},{arrive},{depart}")
    fleet = work / "fleet.csv"
    fleet.write_text("\n".join(rows) + "\n")
    t_gen = time.perf_counter() - t0
    print(f"data: {args.routes} routes, {samples / 1e6:.1f} M samples at 1 Hz "
          f"({samples / args.routes / 3600:.1f} h a day on average), written in {t_gen:.0f} s")

    # floor: read every trace with pandas alone
    t0 = time.perf_counter()
    for k in range(args.routes):
        pd.read_csv(work / f"day-{k:04d}.csv")
    t_floor = time.perf_counter() - t0

    base = load_scenario(inputs_dir() / "fleet" / "base.toml")
    t0 = time.perf_counter()
    with DescendantPeaks() as peaks:
        res = evaluate_fleet(base, read_fleet(fleet), fleet, jobs=args.jobs)
    t_fleet = time.perf_counter() - t0

    self_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    child_mb = max(peaks.peaks.values(), default=0) / 2**20
    print(f"fleet run ({args.jobs} processes): {t_fleet:.1f} s = "
          f"{args.routes / t_fleet:.1f} routes/s, {samples / t_fleet / 1e6:.2f} M samples/s")
    print("  stages: " + ", ".join(f"{k} {v:.1f} s" for k, v in res.timings.items())
          + f", order and totals {t_fleet - sum(res.timings.values()):.1f} s")
    print(f"floor (pandas reading the traces, 1 process): {t_floor:.1f} s; "
          f"ratio fleet / floor = {t_fleet / t_floor:.2f}")
    print(f"peak memory: main process {self_mb:.0f} MB, largest worker {child_mb:.0f} MB "
          f"({len(peaks.peaks)} worker and server processes seen)")
    print(f"result: {len(res.plan)} of {len(res.routes)} routes feasible; depot "
          f"{res.depot_plan.chargers} chargers, peak {res.depot_plan.peak_power / 1e3:.0f} kW")
    if not args.keep:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
