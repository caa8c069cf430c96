"""Fleet transition plan: which vehicle goes electric in which year, as a mixed-integer
programme solved by HiGHS (``scipy.optimize.milp``).

The problem
-----------
Each vehicle ``v`` has options ``o``: 0 = stay diesel ("never": keep the current truck and
replace it by a new diesel truck in its planned replacement year), ``1 + t`` = an electric
truck bought in plan year ``t`` (0..N−1, in service from year t + 1; the current truck is
sold then). Options outside the vehicle's replacement window, or electric options of a
route the candidate cannot do, are not allowed. The depot adds chargers (integer, bought
by year, never removed), one grid connection (when the first charger comes) and an
optional grid upgrade (binary, usable ``lead`` years after it is ordered).

.. math::

   \\min \\sum_{v,o} (PV_{v,o} + c_{CO_2} \\sum_y d_y E_{v,o,y}) x_{v,o}
        + \\sum_t (P^{ch}_t b_t + P^{gc}_t w_t + P^{up}_t u_t)

subject to

* one option per vehicle: :math:`\\sum_o x_{v,o} = 1`;
* chargers: :math:`\\sum_{t' \\le t} b_{t'} \\ge \\sum_v k_v \\sum_{t' \\le t} x_{v,1+t'}`
  (``k_v`` the vehicle's charger need, its occupancy share in the depot schedule);
* grid connection before chargers: :math:`\\sum_{t'\\le t} b_{t'} \\le M \\sum_{t'\\le t}
  w_{t'}`, :math:`\\sum_t w_t \\le 1`;
* grid capacity: :math:`\\sum_v p_v \\sum_{t'\\le t} x_{v,1+t'} \\le G + U \\sum_{t' \\le
  t-L} u_{t'}`, :math:`\\sum_t u_t \\le 1` (``p_v`` the vehicle's contribution to the
  depot's coincident peak);
* capital budget: :math:`\\sum_{v,o} K_{v,o,t} x_{v,o} + K^{ch}_t b_t + K^{gc}_t w_t +
  K^{up}_t u_t \\le B_t` in each year with a budget;
* emissions target: :math:`\\sum_{v,o} E_{v,o,y} x_{v,o} \\le (1 - r) E_{base}` in every
  year from the target year on.

With a target, the programme is first solved with the target as a hard limit. When no
plan meets it, the programme is solved lexicographically: first the
smallest total shortfall (an elastic target, :math:`E_y - s_y \\le` limit, minimise
:math:`\\sum s_y`), then the lowest cost at that shortfall. What binds is found by
re-solving the first stage with one family of constraints lifted at a time (budget, grid,
replacement windows, route feasibility).

Shadow prices
-------------
Two figures per binding constraint, because a mixed-integer programme has no duals of its
own:

* ``dual``: the marginal value from the **LP relaxation** of the final programme
  (integrality dropped; HiGHS dual simplex through ``scipy.optimize.linprog``,
  ``res.ineqlin.marginals``): the change of the relaxed optimum per unit of right-hand
  side (currency of budget, kW of grid, tonne of target). It is exact for the relaxed
  plan and a guide for the integer one.
* ``step_saving``: the **integer** re-solve with the right-hand side relaxed by a stated
  step (10 % of that year's budget, 10 % of the grid capacity, 1 % of the target limit):
  what that step would really save. Run for fleets of up to ``STEP_RESOLVE_MAX`` vehicles.

Money is in the case's currency and money basis; emissions in tonnes CO2e.

References
----------
.. [1] Huangfu, Q. and Hall, J. A. J. (2018). Parallelizing the dual revised simplex
   method. *Mathematical Programming Computation* 10, 119–142 (HiGHS).
.. [2] SciPy documentation, ``scipy.optimize.milp`` and ``scipy.optimize.linprog``
   (method ``highs``; ``ineqlin.marginals`` are the duals of the inequality rows).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, linprog, milp
from scipy.sparse import coo_array, csr_array, vstack

__all__ = ["FleetPlan", "PlanInfeasible", "PlanProblem", "PlanSettings", "PlanSolution",
           "STEP_RESOLVE_MAX", "load_plan_settings", "plan_fleet", "solve"]

#: Fleets up to this many vehicles get integer re-solves for the shadow-price steps.
STEP_RESOLVE_MAX = 300
#: A constraint within this share of its right-hand side is reported as (nearly) binding:
#: whole trucks rarely fill a budget to the unit. [-]
NEAR_BINDING = 0.05


@dataclass
class PlanProblem:
    """A fleet transition plan as plain arrays (V vehicles, N plan years, O = N + 1).

    Attributes
    ----------
    vehicles : list of str
    pv : ndarray (V, O)
        Present value of each option's own cash flows (trucks, energy, running, resale),
        depot equipment excluded. [currency]
    capex : ndarray (V, O, N)
        Capital spent by each option in each plan year (purchase price, taxes and fees,
        less grant). [currency]
    emissions : ndarray (V, O, N)
        Emissions counted against the target and priced, by year of service 1..N (index
        y − 1). [t CO2e]
    allowed : ndarray of bool (V, O)
        Options the vehicle may take (option 0 is always allowed).
    discount : ndarray (N,)
        Discount factor of each year of service 1..N, for the carbon price. [-]
    carbon_price : float
        Internal carbon price. [currency/t]
    charger_need : ndarray (V,)
        Chargers the vehicle needs once electric (its occupancy share). [-]
    charger_pv, charger_capex : ndarray (N,)
        Present value of the whole life of a charger bought in year t, and its capital in
        year t. [currency]
    connection_pv, connection_capex : ndarray (N,)
        The depot's grid connection made in year t. [currency]
    peak : ndarray (V,)
        Contribution to the depot's coincident peak once electric. [kW]
    grid_capacity : float or None
        Depot grid capacity available for charging; None: no limit. [kW]
    upgrade_kw : float
        Capacity added by an upgrade. [kW]
    upgrade_pv, upgrade_capex : ndarray (N,)
        The upgrade ordered in year t. [currency]
    upgrade_lead : int
        Years from ordering an upgrade to using it. [yr]
    budget : ndarray (N,)
        Capital budget by plan year; inf: no limit. [currency]
    target_limit : float or None
        Emissions allowed in each year from ``target_from`` on. [t CO2e]
    target_from : int
        First year of service (1..N) the target applies to.
    window_open : ndarray of bool (V, O), optional
        Options that only the replacement window forbids (used to say what binds).
    """

    vehicles: list
    pv: np.ndarray
    capex: np.ndarray
    emissions: np.ndarray
    allowed: np.ndarray
    discount: np.ndarray
    carbon_price: float = 0.0
    charger_need: np.ndarray | None = None
    charger_pv: np.ndarray | None = None
    charger_capex: np.ndarray | None = None
    connection_pv: np.ndarray | None = None
    connection_capex: np.ndarray | None = None
    peak: np.ndarray | None = None
    grid_capacity: float | None = None
    upgrade_kw: float = 0.0
    upgrade_pv: np.ndarray | None = None
    upgrade_capex: np.ndarray | None = None
    upgrade_lead: int = 0
    budget: np.ndarray | None = None
    target_limit: float | None = None
    target_from: int = 1
    window_open: np.ndarray | None = None
    feasible_open: np.ndarray | None = None

    def __post_init__(self):
        self.pv = np.asarray(self.pv, dtype=float)
        V, O = self.pv.shape
        N = O - 1
        z = np.zeros(N)
        self.capex = np.asarray(self.capex, dtype=float).reshape(V, O, N)
        self.emissions = np.asarray(self.emissions, dtype=float).reshape(V, O, N)
        self.allowed = np.asarray(self.allowed, dtype=bool).reshape(V, O).copy()
        self.allowed[:, 0] = True
        self.discount = np.asarray(self.discount, dtype=float).reshape(N)
        for name in ("charger_pv", "charger_capex", "connection_pv", "connection_capex",
                     "upgrade_pv", "upgrade_capex"):
            v = getattr(self, name)
            setattr(self, name, z.copy() if v is None else
                    np.broadcast_to(np.asarray(v, dtype=float), (N,)).copy())
        self.charger_need = np.zeros(V) if self.charger_need is None else \
            np.asarray(self.charger_need, dtype=float).reshape(V)
        self.peak = np.zeros(V) if self.peak is None else \
            np.asarray(self.peak, dtype=float).reshape(V)
        self.budget = np.full(N, np.inf) if self.budget is None else \
            np.broadcast_to(np.asarray(self.budget, dtype=float), (N,)).copy()

    @property
    def V(self) -> int:
        return self.pv.shape[0]

    @property
    def N(self) -> int:
        return self.pv.shape[1] - 1

    def objective_pv(self) -> np.ndarray:
        """PV of each option with the carbon price: (V, O). [currency]"""
        return self.pv + self.carbon_price * np.einsum("voy,y->vo", self.emissions,
                                                       self.discount)


@dataclass
class PlanSolution:
    """The solved plan.

    Attributes
    ----------
    choice : ndarray of int (V,)
        Option per vehicle: 0 = stay diesel, 1 + t = electric bought in plan year t.
    chargers_bought, connection, upgrade : ndarray (N,)
        Chargers bought, grid connection made (0/1), upgrade ordered (0/1) by plan year.
    objective : float
        Cost of the plan, carbon price included. [currency]
    status : str
        ``optimal``, or the solver's message.
    target_met : bool
    shortfall : ndarray (N,)
        Emissions above the target by year of service (0 where met). [t]
    binds : list of str
        When the target is missed: the constraint families whose lifting lowers the
        shortfall.
    shadow : list of dict
        One per budget, grid or target row that binds, nearly binds (slack within
        :data:`NEAR_BINDING` of its right-hand side) or has a non-zero LP dual:
        ``constraint``, ``year`` (plan year; year of service for the target), ``slack``,
        ``binding`` (slack ~ 0), ``near`` (within :data:`NEAR_BINDING`), ``dual`` (LP
        relaxation) [currency per unit], ``unit``,
        ``step``, ``step_saving`` [currency] (None when not re-solved).
    mip_gap : float
        Relative gap HiGHS reports. [-]
    """

    choice: np.ndarray
    chargers_bought: np.ndarray
    connection: np.ndarray
    upgrade: np.ndarray
    objective: float
    status: str
    target_met: bool = True
    shortfall: np.ndarray | None = None
    binds: list = field(default_factory=list)
    shadow: list = field(default_factory=list)
    mip_gap: float = 0.0
    solve_seconds: float = 0.0

    def chargers(self) -> np.ndarray:
        """Chargers installed at the end of each plan year (cumulative)."""
        return np.cumsum(self.chargers_bought)


# --------------------------------------------------------------------------- the model
class _Model:
    """Column layout and rows of the programme for one problem."""

    def __init__(self, pb: PlanProblem, elastic: bool):
        self.pb = pb
        V, N = pb.V, pb.N
        O = N + 1
        self.nx = V * O
        self.i_b = self.nx
        self.i_w = self.i_b + N
        self.i_u = self.i_w + N
        self.target_years = list(range(pb.target_from - 1, N)) \
            if pb.target_limit is not None else []
        self.i_s = self.i_u + N
        self.n = self.i_s + (len(self.target_years) if elastic else 0)
        self.elastic = elastic
        self.rows: dict[str, tuple[int, int]] = {}  # family -> (first row, count)
        self._build()

    def x(self, v, o):
        return v * (self.pb.N + 1) + o

    def _build(self):
        pb = self.pb
        V, N = pb.V, pb.N
        O = N + 1
        A, lo, hi, names = [], [], [], []

        def add(name, mat, l, h):
            start = sum(m.shape[0] for m in A)
            A.append(csr_array(mat))
            lo.extend(np.broadcast_to(l, (mat.shape[0],)).tolist())
            hi.extend(np.broadcast_to(h, (mat.shape[0],)).tolist())
            self.rows[name] = (start, mat.shape[0])
            names.append(name)

        n = self.n
        # one option per vehicle
        r = np.repeat(np.arange(V), O)
        add("one", coo_array((np.ones(V * O), (r, np.arange(V * O))), shape=(V, n)), 1.0, 1.0)
        # electric in service after plan year t: S[v, t] = sum_{t' <= t} x[v, 1 + t']
        tri = np.tril(np.ones((N, N)))  # [t, t']: t' <= t
        # chargers: sum b_{<=t} - sum_v k_v S[v,t] >= -eps
        k = np.round(pb.charger_need, 12)
        if np.any(k > 0):
            rows, cols, vals = [], [], []
            for t in range(N):
                for tp in range(t + 1):
                    rows.append(np.full(V, t))
                    cols.append(np.arange(V) * O + 1 + tp)
                    vals.append(-k)
                    rows.append([t]); cols.append([self.i_b + tp]); vals.append([1.0])
            m = coo_array((np.concatenate(vals), (np.concatenate(rows),
                                                   np.concatenate(cols))), shape=(N, n))
            add("chargers", m, -1e-7, np.inf)
            # grid connection before the first charger
            big = float(np.ceil(k.sum() + 1))
            m2 = np.zeros((N, n))
            m2[:, self.i_b:self.i_b + N] = tri
            m2[:, self.i_w:self.i_w + N] = -big * tri
            add("connection", m2, -np.inf, 0.0)
        one_w = np.zeros((1, n))
        one_w[0, self.i_w:self.i_w + N] = 1.0
        add("connection_once", one_w, 0.0, 1.0)
        one_u = np.zeros((1, n))
        one_u[0, self.i_u:self.i_u + N] = 1.0
        add("upgrade_once", one_u, 0.0, 1.0 if pb.grid_capacity is not None else 0.0)
        if pb.grid_capacity is not None:
            rows, cols, vals = [], [], []
            for t in range(N):
                for tp in range(t + 1):
                    rows.append(np.full(V, t)); cols.append(np.arange(V) * O + 1 + tp)
                    vals.append(pb.peak)
                for tp in range(0, t - pb.upgrade_lead + 1):
                    rows.append([t]); cols.append([self.i_u + tp]); vals.append([-pb.upgrade_kw])
            m = coo_array((np.concatenate(vals), (np.concatenate(rows),
                                                   np.concatenate(cols))), shape=(N, n))
            add("grid", m, -np.inf, pb.grid_capacity + 1e-9 * max(1.0, pb.grid_capacity))
        has_budget = np.isfinite(pb.budget)
        if has_budget.any():
            years = np.flatnonzero(has_budget)
            m = np.zeros((len(years), n))
            for j, t in enumerate(years):
                m[j, :self.nx] = pb.capex[:, :, t].reshape(-1)
                m[j, self.i_b + t] = pb.charger_capex[t]
                m[j, self.i_w + t] = pb.connection_capex[t]
                m[j, self.i_u + t] = pb.upgrade_capex[t]
            self.budget_years = years
            add("budget", m, -np.inf, pb.budget[years] * (1 + 1e-12) + 1e-6)
        else:
            self.budget_years = np.array([], dtype=int)
        if self.target_years:
            m = np.zeros((len(self.target_years), n))
            for j, y in enumerate(self.target_years):
                m[j, :self.nx] = pb.emissions[:, :, y].reshape(-1)
                if self.elastic:
                    m[j, self.i_s + j] = -1.0
            add("target", m, -np.inf, pb.target_limit * (1 + 1e-12) + 1e-9)
        self.A = vstack(A).tocsr()
        self.lo = np.array(lo)
        self.hi = np.array(hi)

    def cost(self) -> np.ndarray:
        pb = self.pb
        c = np.zeros(self.n)
        c[:self.nx] = pb.objective_pv().reshape(-1)
        c[self.i_b:self.i_b + pb.N] = pb.charger_pv
        c[self.i_w:self.i_w + pb.N] = pb.connection_pv
        c[self.i_u:self.i_u + pb.N] = pb.upgrade_pv
        return c

    def bounds(self, allowed: np.ndarray | None = None):
        pb = self.pb
        ub = np.full(self.n, np.inf)
        allowed = pb.allowed if allowed is None else allowed
        ub[:self.nx] = allowed.reshape(-1).astype(float)
        ub[self.i_w:self.i_u + pb.N] = 1.0
        if pb.grid_capacity is None:
            ub[self.i_u:self.i_u + pb.N] = 0.0
        return np.zeros(self.n), ub

    def integrality(self) -> np.ndarray:
        it = np.ones(self.n)
        it[self.i_s:] = 0
        return it


def _run_milp(model: _Model, c, lb, ub, extra=None, gap=1e-9, time_limit=None):
    cons = [LinearConstraint(model.A, model.lo, model.hi)]
    if extra is not None:
        cons.append(extra)
    opts = {"mip_rel_gap": gap, "presolve": True}
    if time_limit:
        opts["time_limit"] = time_limit
    return milp(c, integrality=model.integrality(), bounds=Bounds(lb, ub),
                constraints=cons, options=opts)


def _shortfall_objective(model: _Model) -> np.ndarray:
    c = np.zeros(model.n)
    c[model.i_s:] = 1.0
    return c


def solve(pb: PlanProblem, gap: float = 1e-9, time_limit: float | None = None,
          shadow: bool = True) -> PlanSolution:
    """Solve the plan with HiGHS.

    Parameters
    ----------
    pb : PlanProblem
    gap : float
        Relative optimality gap at which HiGHS stops (``mip_rel_gap``). [-]
    time_limit : float, optional
        Seconds for each integer solve. [s]
    shadow : bool
        Work out shadow prices of the binding constraints.

    Returns
    -------
    PlanSolution
    """
    import time

    t_start = time.perf_counter()
    elastic = pb.target_limit is not None
    model = _Model(pb, elastic=elastic)
    lb, ub = model.bounds()
    c = model.cost()
    shortfall = np.zeros(pb.N)
    binds: list[str] = []
    extra = None
    res = None
    if elastic:
        # The target as a hard limit first: when a plan meets it, that is the answer.
        hard = _Model(pb, elastic=False)
        h_lb, h_ub = hard.bounds()
        r = _run_milp(hard, hard.cost(), h_lb, h_ub, gap=gap, time_limit=time_limit)
        if r.x is not None:
            model, lb, ub, c, res = hard, h_lb, h_ub, hard.cost(), r
        else:  # out of reach (or not found in time): smallest shortfall, then lowest cost
            first = _run_milp(model, _shortfall_objective(model), lb, ub, gap=gap,
                              time_limit=time_limit)
            _check(first)
            total_short = float(first.fun)
            if total_short > 1e-6:
                binds = _what_binds(pb, total_short, gap, time_limit)
            row = np.zeros(model.n)
            row[model.i_s:] = 1.0
            # HiGHS meets rows to its feasibility tolerance (1e-7), so the first stage's
            # shortfall can be a little under what the second stage can reach exactly
            extra = LinearConstraint(row[None, :], -np.inf,
                                     total_short * (1 + 1e-7) + 1e-6)
    if res is None:
        res = _run_milp(model, c, lb, ub, extra=extra, gap=gap, time_limit=time_limit)
        _check(res)
    x = res.x.copy()
    x[:model.i_s] = np.round(x[:model.i_s])  # integers within HiGHS' tolerance: exact
    V, N = pb.V, pb.N
    choice = np.argmax(x[:model.nx].reshape(V, N + 1), axis=1)
    if model.elastic:
        shortfall[model.target_years] = np.maximum(res.x[model.i_s:], 0.0)
        shortfall[shortfall < 1e-6] = 0.0
    sol = PlanSolution(
        choice=choice, chargers_bought=x[model.i_b:model.i_b + N].astype(int),
        connection=x[model.i_w:model.i_w + N].astype(int),
        upgrade=x[model.i_u:model.i_u + N].astype(int),
        objective=float(c @ x), status="optimal" if res.status == 0 else res.message,
        target_met=not shortfall.any(), shortfall=shortfall, binds=binds,
        mip_gap=float(getattr(res, "mip_gap", 0.0) or 0.0))
    if shadow:
        sol.shadow = _shadow_prices(pb, model, res.x, extra, gap, time_limit, sol.objective)
    sol.solve_seconds = time.perf_counter() - t_start
    return sol


class PlanInfeasible(RuntimeError):
    """No plan satisfies the hard constraints (the capital budget)."""


def _check(res) -> None:
    if res.status == 2:
        raise PlanInfeasible(res.message)
    if res.x is None:
        raise RuntimeError(f"the plan could not be solved: {res.message}")


def _what_binds(pb: PlanProblem, total_short: float, gap, time_limit) -> list[str]:
    """Constraint families whose lifting lowers the smallest shortfall."""
    out = []
    trials = []
    if np.isfinite(pb.budget).any():
        trials.append(("capital budget", dict(budget=np.full(pb.N, np.inf))))
    if pb.grid_capacity is not None:
        trials.append(("grid capacity", dict(grid_capacity=None)))
    if pb.window_open is not None and np.any(pb.window_open & ~pb.allowed):
        trials.append(("replacement windows", dict(allowed=pb.allowed | pb.window_open)))
    if pb.feasible_open is not None and np.any(pb.feasible_open & ~pb.allowed):
        trials.append(("route feasibility", dict(allowed=pb.allowed | pb.feasible_open)))
    for name, change in trials:
        q = PlanProblem(**{**pb.__dict__, **change})
        m = _Model(q, elastic=True)
        lb, ub = m.bounds()
        r = _run_milp(m, _shortfall_objective(m), lb, ub, gap=gap, time_limit=time_limit)
        if r.x is not None and r.fun < total_short - 1e-6 * max(1.0, total_short):
            out.append(f"{name} (lifting it cuts the shortfall from "
                       f"{fm.number(total_short, 1)} t to {fm.number(max(r.fun, 0.0), 1)} t)")
    if not out:
        out.append("the vehicles themselves: every allowed electrification together does "
                   "not reach the target")
    return out


def _shadow_prices(pb, model: _Model, xsol, extra, gap, time_limit, objective) -> list[dict]:
    """Binding budget, grid and target rows: LP-relaxation duals and integer steps."""
    c = model.cost()
    lb, ub = model.bounds()
    act = model.A @ xsol
    A_ub, b_ub, idx = [], [], []
    for fam in ("budget", "grid", "target"):
        if fam not in model.rows:
            continue
        s, k = model.rows[fam]
        for j in range(s, s + k):
            idx.append((fam, j - s, j))
    # LP relaxation: rows as A x <= hi (and -A x <= -lo for equality / lower rows)
    hi = model.hi.copy()
    lo = model.lo.copy()
    fin_hi = np.isfinite(hi)
    fin_lo = np.isfinite(lo)
    A_all = vstack([model.A[fin_hi], -model.A[fin_lo]]).tocsr()
    b_all = np.concatenate([hi[fin_hi], -lo[fin_lo]])
    pos_hi = -np.ones(len(hi), dtype=int)
    pos_hi[np.flatnonzero(fin_hi)] = np.arange(fin_hi.sum())
    if extra is not None:
        A_all = vstack([A_all, csr_array(extra.A)]).tocsr()
        b_all = np.concatenate([b_all, np.atleast_1d(extra.ub)])
    lp = linprog(c, A_ub=A_all, b_ub=b_all, bounds=list(zip(lb, ub)), method="highs")
    duals = lp.ineqlin.marginals if lp.status == 0 else None
    out = []
    for fam, j, row in idx:
        if fam == "budget":
            rhs = pb.budget[int(model.budget_years[j])]
        elif fam == "grid":
            rhs = pb.grid_capacity
        else:
            rhs = pb.target_limit
        slack = float(rhs - act[row])
        binding = slack <= 1e-6 * max(1.0, abs(rhs))
        dual = None if duals is None else float(duals[pos_hi[row]])
        near = slack <= NEAR_BINDING * max(1.0, abs(rhs))
        if not (near or (dual is not None and abs(dual) > 1e-12)):
            continue
        if fam == "budget":
            year = int(model.budget_years[j])
            unit, step = "currency", 0.1 * pb.budget[year]
        elif fam == "grid":
            year, unit, step = j, "kW", 0.1 * max(pb.grid_capacity, 1.0)
        else:
            year, unit, step = model.target_years[j] + 1, "t CO2e", \
                0.01 * max(pb.target_limit, 1.0)
        rec = {"constraint": fam, "year": year, "slack": max(slack, 0.0), "dual": dual,
               "binding": bool(binding), "near": bool(near), "unit": unit,
               "step": float(step),
               "step_saving": None}
        if pb.V <= STEP_RESOLVE_MAX and near:
            hi2 = model.hi.copy()
            hi2[row] += step
            cons = [LinearConstraint(model.A, model.lo, hi2)] + ([extra] if extra else [])
            r = milp(c, integrality=model.integrality(), bounds=Bounds(lb, ub),
                     constraints=cons, options={"mip_rel_gap": gap,
                                                **({"time_limit": time_limit}
                                                   if time_limit else {})})
            if r.x is not None:
                gain = float(objective - c @ r.x)
                rec["step_saving"] = 0.0 if abs(gain) < 1e-6 * max(1.0, abs(objective)) else gain
        out.append(rec)
    return out


# =========================================================================== fleet inputs
from typing import Literal  # noqa: E402

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator  # noqa: E402

from tco.errors import InputError  # noqa: E402
from tco.report import formatting as fm  # noqa: E402
from tco.scenario.base import (  # noqa: E402
    ASSUMPTION,
    MONEY_CEILING,
    Qty,
    Section,
    mfield,
    qfield,
)

_YEAR_S = 365.25 * 86400.0  # the unit registry's year (Julian). [s]


#: Calendar years accepted in the plan (as the scenario's start_year). [yr]
YEARS = (1990, 2100)
_YEAR = dict(bounds=YEARS, usual="none: any calendar year of the plan")


def _year(v):
    if v is not None and not YEARS[0] <= v <= YEARS[1]:
        raise ValueError(f"must be a calendar year between {YEARS[0]} and {YEARS[1]}")
    return v


class TargetSettings(Section):
    """An emissions target: Scope 1 + 2 down by ``reduction`` by ``year`` against
    ``base_year``."""

    model_config = ConfigDict(extra="forbid", validate_default=True)
    reduction: Qty("", ge=0, le=1) = qfield(..., "", "Cut of Scope 1 + 2 emissions against "
                                            "the base year, share",
                                            usual="none: any share is a possible target")
    year: int = mfield(..., "", "Calendar year by which the cut is reached (and kept)",
                       **_YEAR)
    base_year: int | None = mfield(None, "", "Calendar year of the base emissions "
                                   "(default: the first year of service)", **_YEAR)
    base_emissions: Qty("t", ge=0, le=1e9) | None = qfield(
        None, "t", "Base-year Scope 1 + 2 emissions of the fleet (default: the fleet as it "
        "is, in the base year; at most a billion tonnes)",
        usual=(None, 1e7), usual_source="from memory: a heavy truck emits about 50–150 t "
        "CO2e a year, so 10 million tonnes is a fleet of about 100,000 trucks")

    _years = field_validator("year", "base_year")(classmethod(lambda cls, v: _year(v)))
    basis: str = mfield("location", "", "Scope 2 basis: location or market", ASSUMPTION)

    @field_validator("basis")
    @classmethod
    def _basis(cls, v):
        if v not in ("location", "market"):
            raise ValueError("must be 'location' or 'market'")
        return v


class PlanSettings(Section):
    """Fleet-wide inputs of the transition plan (``plan.toml``, table ``[plan]``); all
    optional. Money in the base scenario's currency and money basis."""

    model_config = ConfigDict(extra="forbid", validate_default=True)
    service_life: Qty("yr", gt=0, le=50) = qfield(
        10, "yr", "Age at which a diesel truck is replaced when its replacement year is not "
        "given", ASSUMPTION, usual=(5, 20), usual_source="common practice: heavy trucks "
        "are kept about 5 to 15 years by a first owner, longer by later ones")
    earliest_year: int | None = mfield(None, "", "First calendar year a truck may be "
                                       "bought (default: the first year of service)", **_YEAR)
    capital_budget: float | dict[str, float] | None = mfield(
        None, "currency", "Capital budget: one amount for every year, or a table by "
        "calendar year (years left out: no limit)", bounds=(0, MONEY_CEILING),
        usual="none: scales with the fleet")
    budget_basis: Literal["capital", "cash"] = mfield(
        "capital", "", "What the capital budget counts in a year: capital (truck prices "
        "with taxes and fees less grants, chargers, grid connection and upgrade, in the "
        "year bought, before loans and resale) or cash (the money that leaves the company "
        "that year: down payments and loan or lease payments of the trucks bought in the "
        "plan, chargers, grid connection and upgrade, less the resale of the trucks they "
        "replace)", "assumption: capital, the usual basis of a capital expenditure budget")
    grid_capacity: Qty("kW", ge=0, le=1e6) | None = qfield(
        None, "kW", "Depot grid capacity available for charging (default: no limit; at most "
        "1 GW)", usual=(None, 50_000), usual_source="common practice: a depot on a "
        "medium-voltage connection draws up to a few tens of MW")
    grid_upgrade_capacity: Qty("kW", ge=0, le=1e6) = qfield(
        0, "kW", "Capacity an upgrade adds (at most 1 GW)", usual=(None, 50_000),
        usual_source="common practice: a depot on a medium-voltage connection draws up to "
        "a few tens of MW")
    grid_upgrade_cost: float = mfield(0.0, "currency", "Cost of the upgrade", ge=0,
                                      usual=(None, 20e6), usual_source="from memory: a "
                                      "new medium-voltage depot connection costs from about "
                                      "0.1 to a few million")
    grid_upgrade_lead_time: int = mfield(0, "yr", "Years from ordering the upgrade to using "
                                         "it", ge=0, le=50, usual=(0, 10),
                                         usual_source="from memory: grid connections take "
                                         "months to several years")
    carbon_price: float = mfield(0.0, "currency/t", "Internal carbon price on Scope 1 + 2 "
                                 "(basis of the target, location by default)", ge=0,
                                 usual=(None, 1000), usual_source="from memory: carbon "
                                 "prices and internal prices are mostly below 200 per tonne; "
                                 "published social costs of carbon reach several hundred")
    target: TargetSettings | None = Field(None, description="Emissions target")

    _years = field_validator("earliest_year")(classmethod(lambda cls, v: _year(v)))

    @field_validator("capital_budget")
    @classmethod
    def _budget(cls, v):
        if isinstance(v, dict):
            for k, amount in v.items():
                if not str(k).strip().isdigit():
                    raise ValueError(f"budget key '{k}' is not a calendar year")
                if not math.isfinite(float(amount)) or not 0 <= amount <= MONEY_CEILING:
                    raise ValueError(f"budget of {k} must be a number from 0 to "
                                     f"{fm.number(MONEY_CEILING, 0)}")
        elif v is not None and (not math.isfinite(v) or not 0 <= v <= MONEY_CEILING):
            raise ValueError(f"must be a number from 0 to {fm.number(MONEY_CEILING, 0)}")
        return v


def load_plan_settings(path) -> PlanSettings:
    """Read ``plan.toml`` (table ``[plan]``, optional ``[plan.target]``).

    Raises
    ------
    InputError
        Not TOML, no ``[plan]`` table, an unknown field or a bad value (one line).
    """
    import tomllib
    from pathlib import Path

    from tco.scenario.files import MAX_SCENARIO_BYTES
    from tco.text import one_line

    path = Path(path)
    if not path.is_file():
        raise InputError("file not found", file=path)
    size = path.stat().st_size
    if size > MAX_SCENARIO_BYTES:  # as a scenario file
        raise InputError(f"is {fm.data_size(size)}; a plan file may be at most "
                         f"{fm.data_size(MAX_SCENARIO_BYTES)}", file=path)
    try:  # a byte-order mark, as some editors write, is accepted
        raw = tomllib.loads(path.read_text(encoding="utf-8-sig"))
    except UnicodeDecodeError:
        raise InputError("not a UTF-8 text file", file=path) from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {one_line(str(exc))}", file=path) from None
    except RecursionError:
        raise InputError("not valid TOML: tables or arrays nested too deeply",
                         file=path) from None
    if set(raw) - {"plan"}:
        raise InputError(f"unknown table '{sorted(set(raw) - {'plan'})[0]}' (expected [plan])",
                         file=path)
    try:
        return PlanSettings.model_validate(raw.get("plan", {}))
    except ValidationError as exc:
        e = exc.errors()[0]
        where = "plan." + ".".join(str(x) for x in e["loc"])
        msg = "unknown field" if e["type"] == "extra_forbidden" else e["msg"]
        raise InputError(msg.removeprefix("Value error, "), file=path, where=where) from None


# =========================================================================== option flows
_DEPOT_LINES = None
_CAPEX_LINES = ("purchase_price", "purchase_taxes_fees", "grant")
#: Lines of the as-financed flows that are cash paid for a truck (``budget_basis = "cash"``):
#: the price less the loan drawn is the down payment, then the loan or lease payments; a
#: truck sold at the end of its own life inside the plan years brings its resale.
_CASH_LINES = _CAPEX_LINES + ("loan_drawdown", "loan_interest", "loan_principal",
                              "lease_upfront", "lease_payment", "lease_buyout",
                              "residual_value")
_RUNNING_GROUPS = ("energy", "running")
SCOPES = ("scope_1", "scope_2_location", "scope_2_market", "scope_3_cat3")


def _depot_lines():
    global _DEPOT_LINES
    if _DEPOT_LINES is None:
        from tco.cashflow import LINES
        _DEPOT_LINES = tuple(s.name for s in LINES if s.group == "depot")
    return _DEPOT_LINES


def _settled(inputs):
    """The inputs with loans and leases that run past a shortened period settled at its end
    (a later purchase owns the truck fewer years)."""
    import dataclasses

    from tco.cashflow import TruckSpec

    trucks = []
    for t in inputs.trucks:
        f = t.costs.financing
        if f.method in ("loan", "lease") and f.beyond_period == "error":
            f = f.model_copy(update={"beyond_period": "settle"})
        trucks.append(TruckSpec(t.name, t.powertrain,
                                t.costs.model_copy(update={"financing": f})))
    return dataclasses.replace(inputs, trucks=trucks)


def option_flows(inputs, cf, totals) -> dict:
    """The yearly money and emissions a plan needs from one fleet row.

    Parameters
    ----------
    inputs : tco.cashflow.CostInputs
        The row's two trucks (0 = current, 1 = candidate).
    cf : tco.cashflow.CashflowResult
        The row's cash flows with both bought in year 0.
    totals : pandas.DataFrame
        ``EmissionsResult.totals`` of the row (calendar years).

    Returns
    -------
    dict
        ``bought`` (2, N, N + 1): each truck bought in plan year t, all lines but the depot
        equipment, by year [currency]; ``capex`` (2, N, N): its capital by plan year (in year t, and again when a
        like truck replaces it at the end of its own life, ``finance.residual_at``)
        [currency]; ``cash`` (2, N, N): the cash paid for it by plan year (down payment,
        loan or lease payments, resale at the end of its own life) [currency];
        ``ok`` (2, N) bool: whether that purchase could be costed; ``running`` (N + 1,):
        the current truck's energy and running costs by year [currency]; ``scopes``
        (2, 4, N): emissions by scope (:data:`SCOPES`) and year of service [t].
    """
    import dataclasses

    from tco import cashflow
    from tco.cashflow import LINES

    N = inputs.finance.analysis_years
    depot = set(_depot_lines())
    groups = {s.name: s.group for s in LINES}
    bought = np.zeros((2, N, N + 1))
    capex = np.zeros((2, N, N))
    cash = np.zeros((2, N, N))
    ok = np.ones((2, N), dtype=bool)
    settled = _settled(inputs)
    financed = cashflow.headline_view(inputs.finance) == "unlevered" and any(
        t.costs.financing.method != "cash" for t in inputs.trucks)
    for t in range(N):
        try:
            at_t = dataclasses.replace(settled, purchase_year=t)
            flows = cashflow.compute(at_t)
            paid = cashflow.compute(at_t, view="as_financed") if financed else flows
        except InputError:
            ok[:, t] = False
            continue
        for k in range(2):
            lines = flows.lines[k]
            bought[k, t] = sum((v for name, v in lines.items() if name not in depot),
                               np.zeros(N + 1))
            capex[k, t] = sum(lines[name][:N] for name in _CAPEX_LINES if name in lines)
            lines = paid.lines[k]
            cash[k, t] = sum(lines[name][:N] for name in _CASH_LINES if name in lines)
    lines0 = cf.flows.lines[0]
    running = sum((v for name, v in lines0.items() if groups[name] in _RUNNING_GROUPS),
                  np.zeros(N + 1))
    scopes = np.zeros((2, len(SCOPES), N))
    names = [t.name for t in inputs.trucks]
    years = sorted(totals["year"].unique())
    pos = {y: j for j, y in enumerate(years)}
    for row in totals.itertuples(index=False):
        if row.frame in SCOPES and row.truck in names and pos[row.year] < N:
            scopes[names.index(row.truck), SCOPES.index(row.frame), pos[row.year]] = \
                row.kg_co2e / 1000.0
    return {"bought": bought, "capex": capex, "cash": cash, "ok": ok, "running": running,
            "scopes": scopes}


# =========================================================================== the fleet plan
def value_share(residual, age: float) -> float:
    """A truck's value at ``age`` as a share of its price, by its residual model. [-]"""
    if age <= 0:
        return 1.0
    if residual.method == "declining_balance":
        return float((1.0 - residual.rate) ** age)
    k = len(residual.shares)
    a = int(round(age))
    return float(residual.shares[min(a, k) - 1]) if a >= 1 else 1.0


def charger_costs(depot, prices, finance, N: int) -> tuple[np.ndarray, np.ndarray]:
    """Present value of a charger's whole life in the period, and its capital, by the plan
    year it is bought (same rules as the depot lines of :mod:`tco.cashflow`: bought with
    installation, bought again at the end of each life before the period ends with the old
    hardware worth ``residual_share`` of its cost, straight-line value at the end,
    maintenance from the next year).

    Returns
    -------
    pv, capex : ndarray (N,)
        [currency, money basis of the case]
    """
    e = prices.escalation.equipment
    i = finance.inflation
    real = finance.money_basis == "real"
    esc = (1 + e) * (1 + i) - 1 if real else e
    y = np.arange(N + 1)
    defl = (1 + i) ** -y if real else np.ones(N + 1)
    disc = (1 + finance.discount_rate) ** -y
    hw, inst = depot.hardware_cost, depot.installation_cost
    pv = np.zeros(N)
    capex = np.zeros(N)
    for t in range(N):
        flows = np.zeros(N + 1)
        buys = list(range(t, N, depot.life))
        for j, b in enumerate(buys):
            flows[b] += (hw + inst) * (1 + esc) ** b
            if j > 0:
                flows[b] -= depot.residual_share * hw * (1 + esc) ** buys[j - 1]
        age = N - buys[-1]
        flows[N] -= hw * (1 + esc) ** buys[-1] * (1 - (1 - depot.residual_share) * age
                                                    / depot.life)
        run = y > t
        flows[run] += depot.maintenance_per_year * (1 + esc) ** (y[run] - 1)
        flows = flows * defl
        pv[t] = float(flows @ disc)
        capex[t] = (hw + inst) * (1 + esc) ** t * defl[t]
    return pv, capex


@dataclass
class FleetPlan:
    """The fleet transition plan and its tables (plain data and pandas).

    Attributes
    ----------
    settings : PlanSettings
    problem : PlanProblem
    solution : PlanSolution
    schedule : pandas.DataFrame
        One row per vehicle: ``vehicle, route, feasible, decision (electric / diesel),
        purchase_year`` (calendar year the electric truck is bought and starts service,
        or None), ``diesel_replacement_year`` (calendar year of the new diesel truck when
        it stays diesel, or None), ``present_value`` (of the choice), ``present_value_diesel``
        (staying diesel), ``saving`` (diesel − choice, without shared depot costs and carbon
        price) [currency], ``loses_money`` (bool), ``reason`` (str).
    yearly : pandas.DataFrame
        By calendar year: ``calendar_year, capital`` (on the budget's basis),
        ``capital_outlay`` (capital basis), ``cash_outlay`` (cash basis), ``capital_budget,
        chargers_bought,
        chargers, depot_peak_kw, grid_capacity_kw, grid_upgrade_ordered, electric_trucks,
        scope_1_t, scope_2_location_t, scope_2_market_t, scope_3_cat3_t, target_t,
        shortfall_t``.
    macc : pandas.DataFrame
        Feasible routes by abatement cost: ``vehicle, cost_per_t, avoided_t,
        cumulative_t`` (electric from year 0 over the whole period).
    shadow : pandas.DataFrame
        ``constraint, calendar_year, dual, unit, step, step_saving``.
    notes : list of str
        What the plan found (target met or missed and by how much, what binds, loss-making
        routes and why, the depot re-derived from the plan's own trucks).
    depot_rounds : int
        Solves of the programme with the depot coefficients re-derived from the plan's
        trucks (:func:`tco.fleet.settle_depot`). [-]
    depot_converged : bool
        Whether the last round's trucks gave back the coefficients it was solved with.
    objective : float
        Cost of the plan with the carbon price. [currency]
    present_value : float
        Cost of the plan without the carbon price. [currency]
    present_value_diesel : float
        Every vehicle staying diesel, same basis. [currency]
    """

    settings: PlanSettings
    problem: PlanProblem
    solution: PlanSolution
    schedule: object
    yearly: object
    macc: object
    shadow: object
    notes: list
    objective: float
    present_value: float
    present_value_diesel: float
    start_year: int
    basis: str
    depot_rounds: int = 1
    depot_converged: bool = True


def _budget_array(settings: PlanSettings, start: int, N: int, where) -> np.ndarray:
    b = np.full(N, np.inf)
    cb = settings.capital_budget
    if cb is None:
        return b
    if isinstance(cb, dict):
        for k, v in cb.items():
            t = int(k) - start
            if not 0 <= t < N:
                raise InputError(f"budget year {k} is outside the plan's years {start}.."
                                 f"{start + N - 1}", file=where, where=f"plan.capital_budget.{k}")
            b[t] = float(v)
        return b
    return np.full(N, float(cb))


def plan_fleet(base, energies, money, routes, sched, sched_vehicles, settings: PlanSettings,
               where=None, gap: float = 1e-6, time_limit: float | None = 120.0,
               depot_override: dict | None = None) -> FleetPlan:
    """Build the fleet's :class:`PlanProblem` from its rows and solve it.

    Parameters
    ----------
    base : LoadedScenario
    energies : list of tco.fleet.RouteEnergy
    money : list of tco.fleet.RouteMoney
        With ``plan_flows`` (:func:`option_flows`).
    routes : pandas.DataFrame
        The fleet's routes table (feasibility, abatement cost).
    sched : tco.depot.DepotSchedule
        Depot schedule of every feasible candidate; each truck's charger need is its share
        of the chargers by occupancy, its peak its contribution to the coincident peak.
    sched_vehicles : list of str
        Vehicle of each truck row of ``sched``.
    settings : PlanSettings
    where : path, optional
        The plan file, named in errors.
    gap : float
        Relative optimality gap at which HiGHS stops. [-]
    time_limit : float, optional
        Seconds for each integer solve; a solve stopped by it keeps its best plan and the
        notes say how far from proven best it may be. [s]
    depot_override : dict, optional
        Vehicle -> (charger need [-], peak contribution [kW]) replacing the shares taken
        from ``sched`` (re-derived from the depot schedule of the plan's own trucks, see
        :func:`tco.fleet.settle_depot`).

    Returns
    -------
    FleetPlan
    """
    import pandas as pd

    s = base.scenario
    N = s.finance.analysis_years
    start = s.study.start_year
    fin_ = s.finance
    real = fin_.money_basis == "real"
    y = np.arange(N + 1)
    defl = (1 + fin_.inflation) ** -y if real else np.ones(N + 1)
    disc = (1 + fin_.discount_rate) ** -y
    V = len(energies)
    O = N + 1
    target = settings.target
    basis = target.basis if target else "location"
    s2 = SCOPES.index(f"scope_2_{basis}")
    earliest = 0 if settings.earliest_year is None else settings.earliest_year - start
    if not 0 <= earliest < N:
        raise InputError(f"earliest year {settings.earliest_year} is outside {start}.."
                         f"{start + N - 1}", file=where, where="plan.earliest_year")

    pv = np.zeros((V, O))
    capex = np.zeros((V, O, N))
    cash = np.zeros((V, O, N))
    em = np.zeros((V, O, N))
    em_scopes = np.zeros((V, O, len(SCOPES), N))
    allowed = np.zeros((V, O), dtype=bool)
    window_open = np.zeros((V, O), dtype=bool)
    feasible_open = np.zeros((V, O), dtype=bool)
    repl = np.zeros(V, dtype=int)
    feas = dict(zip(routes["vehicle"], routes["feasible"]))
    for v, (e, m) in enumerate(zip(energies, money)):
        f = m.plan_flows
        row = e.row
        cur = e.scenario.trucks[0].costs
        age = row.age
        if row.replacement_year is not None:
            r = int(row.replacement_year) - start
            if age is None:
                age = max(settings.service_life / _YEAR_S - max(r, 0), 0.0)
        else:
            age = 0.0 if age is None else age
            r = int(math.ceil(settings.service_life / _YEAR_S - age - 1e-9))
        r = max(r, 0)
        repl[v] = r
        resale0 = row.resale_value if row.resale_value is not None else \
            cur.purchase_price * value_share(cur.residual, age)
        share_now = value_share(cur.residual, age)

        def resale(t):
            out = np.zeros(N + 1)
            k = value_share(cur.residual, age + t) / share_now if share_now > 0 else 0.0
            out[t] = -resale0 * k * defl[t]
            return out

        run = f["running"]
        sc = f["scopes"]  # (2, 4, N)
        # option 0: stay diesel
        if r < N:
            flows = np.where(y <= r, run, 0.0) * (y >= 1) + resale(r) + f["bought"][0, r]
            capex[v, 0] = f["capex"][0, r]
            cash[v, 0] = f["cash"][0, r] + resale(r)[:N]
        else:
            flows = run * (y >= 1) + resale(N)
        pv[v, 0] = flows @ disc
        em_scopes[v, 0] = sc[0]
        for t in range(N):
            o = 1 + t
            flows = np.where(y <= t, run, 0.0) * (y >= 1) + resale(t) + f["bought"][1, t]
            pv[v, o] = flows @ disc
            capex[v, o] = f["capex"][1, t]
            cash[v, o] = f["cash"][1, t] + resale(t)[:N]
            served = np.arange(1, N + 1) > t
            em_scopes[v, o] = np.where(served, sc[1], sc[0])
            in_window = earliest <= t <= r and f["ok"][1, t]
            ok = bool(feas.get(row.vehicle, False))
            allowed[v, o] = in_window and ok
            window_open[v, o] = ok and f["ok"][1, t] and not in_window
            feasible_open[v, o] = in_window and not ok
    em = em_scopes[:, :, 0] + em_scopes[:, :, s2]

    # depot: charger need and peak from the schedule of every feasible candidate
    need = np.zeros(V)
    peak = np.zeros(V)
    vpos = {e.row.vehicle: v for v, e in enumerate(energies)}
    for j, veh in enumerate(sched_vehicles):
        need[vpos[veh]] = float(sched.cost_share[j]) * sched.chargers
        peak[vpos[veh]] = float(sched.peak_contribution[j]) / 1000.0
    for veh, (k, kw) in (depot_override or {}).items():
        need[vpos[veh]], peak[vpos[veh]] = k, kw
    d = s.depot
    ch_pv, ch_capex = charger_costs(d, s.prices, fin_, N)
    e_eq = s.prices.escalation.equipment
    esc = (1 + e_eq) * (1 + fin_.inflation) - 1 if real else e_eq
    grow = (1 + esc) ** y[:N] * defl[:N]
    conn_capex = d.grid_connection_cost * grow
    up_capex = settings.grid_upgrade_cost * grow

    limit = None
    target_from = 1
    base_t = None
    if target is not None:
        ty = target.year - start + 1
        if not 1 <= ty <= N:
            raise InputError(f"target year {target.year} is outside the years of service "
                             f"{start}..{start + N - 1}", file=where, where="plan.target.year")
        target_from = ty
        if target.base_emissions is not None:
            base_t = target.base_emissions / 1000.0
        else:
            by = (target.base_year if target.base_year is not None else start) - start + 1
            if not 1 <= by <= N:
                raise InputError(f"base year {target.base_year} is outside the years of "
                                 "service; give base_emissions", file=where,
                                 where="plan.target.base_year")
            base_t = float(em[:, 0, by - 1].sum())
        limit = (1 - target.reduction) * base_t

    pb = PlanProblem(
        vehicles=[e.row.vehicle for e in energies], pv=pv,
        capex=cash if settings.budget_basis == "cash" else capex, emissions=em,
        allowed=allowed, discount=disc[1:], carbon_price=settings.carbon_price,
        charger_need=need, charger_pv=ch_pv, charger_capex=ch_capex,
        connection_pv=conn_capex * disc[:N], connection_capex=conn_capex, peak=peak,
        grid_capacity=None if settings.grid_capacity is None else settings.grid_capacity / 1000,
        upgrade_kw=settings.grid_upgrade_capacity / 1000.0,
        upgrade_pv=up_capex * disc[:N], upgrade_capex=up_capex,
        upgrade_lead=settings.grid_upgrade_lead_time,
        budget=_budget_array(settings, start, N, where), target_limit=limit,
        target_from=target_from, window_open=window_open, feasible_open=feasible_open)
    try:
        sol = solve(pb, gap=gap, time_limit=time_limit)
    except PlanInfeasible:
        raise InputError("no plan fits the capital budget: even the cheapest choices "
                         "(the diesel replacements due) cost more than a year's budget",
                         file=where, where="plan.capital_budget") from None

    # why loss-making routes are in: the plan without target, and without carbon price
    reason_of = {}
    best_e = np.where(allowed[:, 1:], pv[:, 1:], np.inf).min(axis=1)
    chosen_e = sol.choice > 0
    loses = pv[np.arange(V), sol.choice] > pv[:, 0]   # the electric choice costs more
    if np.any(loses & chosen_e):
        money_only = solve(PlanProblem(**{**pb.__dict__, "carbon_price": 0.0,
                                          "target_limit": None}), gap=gap,
                           time_limit=time_limit, shadow=False)
        carbon_only = solve(PlanProblem(**{**pb.__dict__, "target_limit": None}), gap=gap,
                            time_limit=time_limit, shadow=False) \
            if settings.carbon_price > 0 else money_only
        for v in np.flatnonzero(loses & chosen_e):
            if money_only.choice[v] > 0:
                reason_of[v] = ("it pays for the fleet as a whole (shared depot costs, and "
                                "the years the budget and grid leave)")
            elif carbon_only.choice[v] > 0:
                price = fm.unit_price(settings.carbon_price, "t", s.study.currency)
                reason_of[v] = f"the carbon price of {price} makes it worth it"
            else:
                reason_of[v] = "the emissions target needs it"

    # tables ----------------------------------------------------------------------------
    rows = []
    for v, e in enumerate(energies):
        o = int(sol.choice[v])
        rows.append({
            "vehicle": e.row.vehicle, "route": e.row.route,
            "feasible": bool(feas.get(e.row.vehicle, False)),
            "decision": "electric" if o > 0 else "diesel",
            "purchase_year": start + o - 1 if o > 0 else None,
            "diesel_replacement_year": start + int(repl[v]) if o == 0 and repl[v] < N
            else None,
            "present_value": float(pv[v, o]), "present_value_diesel": float(pv[v, 0]),
            "saving": float(pv[v, 0] - pv[v, o]),
            "loses_money": bool(o > 0 and loses[v]),
            "reason": reason_of.get(v, ""),
        })
    schedule = pd.DataFrame.from_records(rows)
    X = np.zeros((V, O))
    X[np.arange(V), sol.choice] = 1.0
    depot_by_year = ch_capex * sol.chargers_bought + conn_capex * sol.connection + \
        up_capex * sol.upgrade
    capital_by_year = np.einsum("vo,vot->t", X, capex) + depot_by_year
    cash_by_year = np.einsum("vo,vot->t", X, cash) + depot_by_year
    cap_by_year = cash_by_year if settings.budget_basis == "cash" else capital_by_year
    S = np.zeros((V, N))  # electric in service after plan year t (from service year t + 1)
    for v in range(V):
        if sol.choice[v] > 0:
            S[v, sol.choice[v] - 1:] = 1.0
    upgraded = np.zeros(N)
    for t in np.flatnonzero(sol.upgrade):
        upgraded[t + pb.upgrade_lead:] = pb.upgrade_kw
    scopes_y = np.einsum("vo,vosy->sy", X, em_scopes)
    yearly = pd.DataFrame({
        "calendar_year": start + np.arange(N),
        "capital": cap_by_year,
        "capital_outlay": capital_by_year, "cash_outlay": cash_by_year,
        "capital_budget": [None if not np.isfinite(b) else float(b) for b in pb.budget],
        "chargers_bought": sol.chargers_bought, "chargers": sol.chargers(),
        "depot_peak_kw": S.T @ peak,
        "grid_capacity_kw": [None if pb.grid_capacity is None else pb.grid_capacity + u
                             for u in upgraded],
        "grid_upgrade_ordered": sol.upgrade.astype(bool),
        "electric_trucks": S.sum(axis=0).astype(int),
        "scope_1_t": scopes_y[0], "scope_2_location_t": scopes_y[1],
        "scope_2_market_t": scopes_y[2], "scope_3_cat3_t": scopes_y[3],
        "target_t": [limit if (limit is not None and yy + 1 >= target_from) else None
                     for yy in range(N)],
        "shortfall_t": sol.shortfall,
    })
    fr = routes[routes["feasible"]].copy()
    fr = fr[fr["avoided_t"] > 0]
    per = fr["abatement_t"] if "abatement_t" in fr else fr["avoided_t"]  # its convention
    fr = fr.assign(cost_per_t=(-fr["saving"]) / per).sort_values(
        ["cost_per_t", "vehicle"], kind="mergesort")
    macc = pd.DataFrame({"vehicle": fr["vehicle"].tolist(),
                         "cost_per_t": fr["cost_per_t"].astype(float).tolist(),
                         "avoided_t": fr["avoided_t"].astype(float).tolist()})
    macc["cumulative_t"] = macc["avoided_t"].cumsum()
    shadow = pd.DataFrame.from_records(
        [{"constraint": r["constraint"],
          "calendar_year": start + r["year"] if r["constraint"] != "target"
          else start + r["year"] - 1,
          "binding": r["binding"], "near": r["near"], "slack": r["slack"],
          "dual": r["dual"], "unit": r["unit"], "step": r["step"],
          "step_saving": r["step_saving"]} for r in sol.shadow],
        columns=["constraint", "calendar_year", "binding", "near", "slack", "dual", "unit",
                 "step", "step_saving"])

    notes = []
    cur = s.study.currency
    if settings.budget_basis == "cash":
        notes.append("The budget counts cash: down payments and loan or lease payments of "
                     "the trucks bought in the plan, chargers, grid connection and upgrade, "
                     "less the resale of the trucks they replace.")
    if sol.status != "optimal":
        notes.append(f"HiGHS stopped before proving the plan best ({sol.status}); the plan "
                     f"kept is within {fm.percent(sol.mip_gap, 2)} of the best possible.")
    if target is not None:
        if sol.target_met:
            notes.append(f"The target ({fm.percent(target.reduction, 0)} below "
                         f"{fm.number(base_t, 0)} t by "
                         f"{target.year}, Scope 1 + 2, {basis}-based) is met.")
        else:
            worst = int(np.argmax(sol.shortfall))
            notes.append(f"The target cannot be met within the constraints: "
                         f"{fm.number(sol.shortfall.sum(), 1)} t over it in total, "
                         f"{fm.number(sol.shortfall[worst], 1)} t in {start + worst}. What binds: "
                         + "; ".join(sol.binds) + ".")
    for v in np.flatnonzero(loses & chosen_e):
        o = int(sol.choice[v])
        notes.append(f"{energies[v].row.vehicle} costs {fm.money(pv[v, o] - pv[v, 0], cur)} more "
                     f"electric from {start + o - 1} than staying diesel and is electrified "
                     f"because {reason_of[v]}.")
    n_lossy = int(np.sum((best_e > pv[:, 0]) & ~chosen_e & allowed[:, 1:].any(axis=1)))
    if n_lossy:
        notes.append(f"{n_lossy} feasible route(s) that would lose money stay diesel.")
    pv_plan = float(sum(pv[v, sol.choice[v]] for v in range(V)) + ch_pv @ sol.chargers_bought
                    + (conn_capex * disc[:N]) @ sol.connection
                    + (up_capex * disc[:N]) @ sol.upgrade)
    return FleetPlan(settings=settings, problem=pb, solution=sol, schedule=schedule,
                     yearly=yearly, macc=macc, shadow=shadow, notes=notes,
                     objective=sol.objective, present_value=pv_plan,
                     present_value_diesel=float(pv[:, 0].sum()), start_year=start,
                     basis=basis)
