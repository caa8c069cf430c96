"""How sure is the answer: one-at-a-time sensitivity, break-even values and Monte Carlo.

Three studies of the comparison of each truck with the baseline truck (the cash-flow
model's baseline, also used as the reference for avoided emissions):

1. **Tornado** — each input at its low and its high value, the others at the scenario's
   values; the bar is the present-value difference ΔPV = PV(truck) − PV(baseline) at each
   end, and bars are sorted by their swing |ΔPV_high − ΔPV_low|. All bars are evaluated in
   one vectorized call of :func:`tco.cashflow.compute` (each bar end is one draw row).
2. **Break-even** — for each tornado input, the value at which ΔPV = 0: ΔPV is evaluated on
   a grid over a range in one vectorized call, the sign change nearest the scenario's
   value is refined with :func:`scipy.optimize.brentq` (:func:`tco.finance.find_break_even`),
   and the range is widened step by step (bracket expansion) when it holds no sign change;
   "none in range" when even the widest range holds none.
3. **Monte Carlo** — each uncertain input drawn from its distribution (uniform,
   triangular, normal, lognormal, beta-PERT), rank-correlated through a Gaussian copula,
   with a seeded :class:`numpy.random.Generator`; all draws go through the cash-flow and
   the emissions model in one vectorized call each (or a few calls of equal chunks when a
   progress callback is given; the draws are made up front, so the result does not depend
   on the chunking).

Inputs and how they propagate
-----------------------------
An input is a parameter path of :func:`tco.cashflow.flat_params` or
:func:`tco.emissions.flat_params` (SI values), or a named group (see
:mod:`tco.scenario.uncertainty`). The duty cycle and the energy model are run once, before
this module: energy use is uncertain through the yearly quantities of
:class:`~tco.operation.AnnualOperation`. The group ``energy_use[i]`` multiplies truck i's
``diesel_volume``, ``def_volume``, ``battery_energy``, ``grid_energy_depot`` and
``grid_energy_public`` (the ``operations[i].*`` parameters) by one factor: every cost and
emission line that depends on consumption is linear in these quantities (diesel and DEF
bought and burned, electricity bought and its emissions, battery throughput and so the
cycle-based replacements), so scaling them is the same as scaling the consumption per km.
Peak charging power, the charging schedule and the feasibility of the trip are held at the
scenario's values. An ``operations[i].<field>`` override reaches the emissions model too
(its operations are rebuilt with the drawn quantities), and so do ``route.days_per_year``
and ``route.trips_per_day`` (which scale every yearly quantity, as in the cost model).

Residual value ``residual_value[i]`` scales the truck's value at the end of the period by
a factor f: a value table has every share multiplied by f; a declining-balance rate r
becomes ``1 − f^(1/N) (1 − r)`` so that the end value is f times the scenario's (the
value at every age, and so insurance on value, follows).

Monte Carlo sampling
--------------------
For the k inputs that are correlated with another: Z = L·N(0, I) with L a Cholesky factor
(an eigen factor when the matrix is singular) of the Pearson matrix R of the copula's
normals, ``R_ab = 2 sin(π ρ_s,ab / 6)`` for the requested Spearman rank correlation ρ_s;
U = Φ(Z); each input ``x_j = F_j⁻¹(U_j)`` with the inverse CDF of its distribution
(:mod:`tco.sampling`: closed forms, and for beta-PERT a polynomial table checked against
:func:`scipy.stats.beta.ppf`). An input without correlations is drawn straight from its
distribution with the same generator (the calls of ``rvs`` in :mod:`scipy.stats`, made
directly). Percentiles are NumPy's linear interpolation (payback years: the inverted CDF,
so that they stay whole years; a payback not within the period counts as later than any
year).

The model pass runs the lean paths of the models: :func:`tco.cashflow.compute_totals`
(each truck's yearly totals, kept as parts) with :func:`tco.finance.compare_costs`
(present values and payback years in one compiled pass), and
:func:`tco.emissions.totals` (sums over the years). They give the same numbers as the
full models to rounding (the tests hold them equal draw by draw to a relative 1e-12).

Entry points
------------
``result = evaluate(settings, cost_inputs, emissions_settings, years, progress=None)``
then ``tco.report.summary_sections.uncertainty_summary(result)`` for summary.json. The pieces are public for tests and
benchmarks: :class:`Case`, :func:`resolve_input`, :func:`tornado`, :func:`break_even_table`,
:func:`distribution`, :func:`sample`, :func:`resolve_distributions`,
:func:`draw_overrides`, :func:`run_draws`, :func:`monte_carlo`.

References
----------
.. [1] Malcolm, D. G., Roseboom, J. H., Clark, C. E., Fazar, W. (1959), Application of a
   technique for research and development program evaluation, *Operations Research* 7(5),
   646–669 (PERT); beta-PERT with shape 4 as in Vose, D. (2008), *Risk Analysis: A
   Quantitative Guide*, 3rd ed., Wiley.
.. [2] Iman, R. L., Conover, W. J. (1982), A distribution-free approach to inducing rank
   correlation among input variables, *Communications in Statistics — Simulation and
   Computation* 11(3), 311–334.
.. [3] Kruskal, W. H. (1958), Ordinal measures of association, *Journal of the American
   Statistical Association* 53(284), 814–861 (ρ = 2 sin(π ρ_s / 6) for the normal).
.. [4] Brent, R. P. (1973), *Algorithms for Minimization without Derivatives*, Ch. 4
   (the root finder behind :func:`scipy.optimize.brentq`).
"""
from __future__ import annotations

import dataclasses
import difflib
import math
import re
import time
from dataclasses import dataclass, field
from typing import Any, Callable, Sequence

import numpy as np
import pandas as pd
from scipy import stats

from tco.report import formatting as fm
from tco import cashflow, emissions, heap, sampling
from tco import finance as fin
from tco.errors import InputError
from tco.scenario.route import Route
from tco.scenario.uncertainty import (
    UncertaintySettings,
    check_distribution,
    correlation_problem,
    pearson_matrix,
    unmatched_correlation,
)
from tco.units import UnitError, from_si, to_si

__all__ = [
    "Case", "EXTRA_UNITS", "ENERGY_FIELDS", "Input", "OUTPUTS", "SUMMARY_SCHEMA", "Uncertain",
    "UncertaintyResult", "DRAWS_PER_CALL", "break_even_one", "break_even_table",
    "default_inputs",
    "distribution", "draw_overrides", "evaluate", "label_of", "monte_carlo",
    "resolve_distributions", "resolve_input", "run_draws", "sample", "tornado",
]

#: Version of the summary's key layout; raised when a key is renamed or removed.
SUMMARY_SCHEMA = "tco.uncertainty.summary/1"

#: AnnualOperation quantities moved together by ``energy_use[i]``.
ENERGY_FIELDS = ("diesel_volume", "def_volume", "battery_energy", "grid_energy_depot",
                 "grid_energy_public", "battery_discharge_energy")

#: Units of absolute numbers for parameters that are not scenario fields (yearly
#: quantities per year; factor-table emission factors).
EXTRA_UNITS = {
    "distance": "km", "diesel_volume": "L", "def_volume": "L", "battery_energy": "kWh",
    "battery_discharge_energy": "kWh", "calendar_fade": "", "eol_state_of_health": "",
    "grid_energy_depot": "kWh", "grid_energy_public": "kWh", "charging_time_lost": "h",
    "extra_trips": "", "depot_charging_power": "kW", "trip_duration": "h",
    "battery_capacity": "kWh", "battery_cycle_life": "",
    "emissions.diesel_co2": "kg/L", "emissions.diesel_ch4_n2o": "kg/L",
    "emissions.diesel_ch4_n2o_distance": "kg/km", "emissions.diesel_upstream": "kg/L",
    "emissions.grid_table": "g/kWh", "emissions.hourly_shape": "",
}

#: Emissions-model operation fields that are also cost-model parameters.
_EM_OP_FIELDS = ("diesel_volume", "def_volume", "grid_energy_depot", "grid_energy_public",
                 "distance")
_EM_YEARLY = _EM_OP_FIELDS + ("payload_distance",)
_NUMBERS = ("low", "mode", "high", "mean", "sd")
_GROUP = re.compile(r"^(energy_use|residual_value)\[(\d+)\]$")
_TRUCK = re.compile(r"^(trucks|operations)\[(\d+)\]\.(.+)$")
_M_PER_KM = 1000.0
from tco.units import M_PER_MILE as _M_PER_MILE  # noqa: E402

_LABELS = {
    "prices.diesel": "Diesel price",
    "electricity_price": "Depot electricity price",
    "prices.electricity.demand_charge": "Demand charge",
    "prices.public_charging": "Public charging price",
    "route.days_per_year": "Annual distance (operating days)",
    "finance.discount_rate": "Discount rate",
    "emissions.diesel_co2": "Diesel CO2 factor, tank-to-wheel",
    "emissions.diesel_upstream": "Diesel upstream factor, well-to-tank",
    "emissions.grid_intensity": "Grid intensity, first year",
    "emissions.grid_change": "Grid intensity change per year",
}
_TRUCK_LABELS = {
    "costs.purchase_price": "Purchase price", "costs.grant": "Grant",
    "costs.tax_credit": "Tax credit", "costs.maintenance": "Maintenance",
    "residual_value": "Residual value", "energy_use": "Energy use",
}


# --------------------------------------------------------------------------- the case
class Case:
    """The scalar case the studies vary: cost inputs, emissions settings, base parameters.

    Parameters
    ----------
    cost_inputs : tco.cashflow.CostInputs
        As for :func:`tco.cashflow.compute`; its ``operations`` are used by both models.
    emissions_settings : EmissionsSettings or None
        The validated ``emissions`` section; None leaves the emission outputs out.
    years : array_like of int
        Years of service for the emissions model (calendar years, as for
        :func:`tco.emissions.compute`). [yr]

    Attributes
    ----------
    cost_params, emission_params : dict of str to float
        :func:`tco.cashflow.flat_params` and :func:`tco.emissions.flat_params`. [SI]
    baseline : int
        Index of the baseline truck.
    compared : list of int
        Indices of the other trucks.
    names : list of str
        Truck names.
    """

    def __init__(self, cost_inputs: cashflow.CostInputs, emissions_settings, years):
        self.inputs = cost_inputs
        self.ops = list(cost_inputs.operations)
        self.cost_params = cashflow.flat_params(cost_inputs)
        self.emissions_settings = emissions_settings
        self.emission_params = ({} if emissions_settings is None
                                else emissions.flat_params(emissions_settings))
        self.years = np.asarray(years)
        self.names = [t.name for t in cost_inputs.trucks]
        base = cashflow.compute(cost_inputs, params=self.cost_params, totals_only=True)
        self.baseline = base.baseline
        self.compared = [i for i in range(len(self.names)) if i != self.baseline]
        self.N = cost_inputs.finance.analysis_years
        ref = base.present_value(self.baseline)
        #: ΔPV of each compared truck in the scenario itself. [currency]
        self.base_difference = {k: base.present_value(k) - ref for k in self.compared}

    def base_value(self, path: str) -> float:
        """Scenario value of a parameter. [SI]"""
        if path in self.cost_params:
            return self.cost_params[path]
        return self.emission_params[path]

    def known(self, path: str) -> bool:
        return path in self.cost_params or path in self.emission_params

    def pv_difference(self, overrides: dict) -> dict[int, np.ndarray]:
        """ΔPV of each compared truck; overrides of emission parameters are ignored.

        Returns
        -------
        dict of int to ndarray of shape (n,) or (1,)
            [currency]
        """
        cost = {p: v for p, v in overrides.items() if p in self.cost_params}
        cf = cashflow.compute(self.inputs, cost, self.cost_params, totals_only=True)
        ref = cf.present_value(self.baseline)
        return {k: np.atleast_1d(cf.present_value(k) - ref) for k in self.compared}

    def split(self, overrides: dict) -> tuple[dict, dict, list]:
        """Cost overrides, emission overrides and the operations for the emissions model."""
        cost = {k: v for k, v in overrides.items() if k in self.cost_params}
        em_over = {k: v for k, v in overrides.items()
                   if k.startswith("emissions.") or k == "route.days_per_year"}
        tpd = overrides.get("route.trips_per_day")
        ops = []
        for i, op in enumerate(self.ops):
            changes = {f: overrides[f"operations[{i}].{f}"] for f in _EM_OP_FIELDS
                       if f"operations[{i}].{f}" in overrides}
            if tpd is not None and op.operating_days > 0:
                base_tpd = (op.trips - op.extra_trips) / op.operating_days
                if base_tpd > 0:
                    ratio = np.asarray(tpd, dtype=float) / base_tpd
                    for f in _EM_YEARLY:
                        changes[f] = np.asarray(changes.get(f, getattr(op, f))) * ratio
            ops.append(dataclasses.replace(op, **changes) if changes else op)
        return cost, em_over, ops


# --------------------------------------------------------------------------- inputs
@dataclass(frozen=True)
class Input:
    """An uncertain input: the parameters it moves and how.

    Attributes
    ----------
    key : str
        Parameter path or named group, as written.
    label : str
        Display name.
    paths : tuple of str
        Parameters moved.
    unit : str
        Documented unit of absolute numbers ("" dimensionless or money; "×" for groups).
    base : float
        Scenario value in SI (single parameter) or 1.0 (groups: the value is a factor).
    group : bool
        True: the value is a factor on the scenario's values (relative only).
    residual : tuple or None
        ``(rate, N)`` for a declining-balance residual group.
    bases : tuple of float
        Scenario values of ``paths`` for a group that scales them. [SI]
    """

    key: str
    label: str
    paths: tuple[str, ...]
    unit: str
    base: float
    group: bool = False
    residual: tuple[float, int] | None = None
    bases: tuple[float, ...] = ()

    @property
    def max_factor(self) -> float:
        """Largest factor of a declining-balance residual group (end value = price)."""
        if self.residual is None:
            return math.inf
        rate, n = self.residual
        return (1.0 - rate) ** -n if rate < 1 else math.inf

    def overrides(self, x) -> dict[str, np.ndarray]:
        """Parameter values for input values ``x`` (SI, or factors for a group). [SI]"""
        x = np.asarray(x, dtype=float)
        if not self.group:
            return {self.paths[0]: x}
        if self.residual is not None:
            rate, n = self.residual
            if np.any(x > self.max_factor * (1 + 1e-12)):
                raise InputError(f"a residual value factor above {fm.number(self.max_factor, 3)} "
                                 "would "
                                 "make the end value exceed the purchase price")
            with np.errstate(divide="ignore"):
                new = 1.0 - np.power(np.maximum(x, 0.0), 1.0 / n) * (1.0 - rate)
            return {self.paths[0]: np.clip(new, 0.0, 1.0)}
        return {p: b * x for p, b in zip(self.paths, self.bases, strict=True)}


def _truck_name(case: Case, i: int, where: str | None) -> str:
    if not 0 <= i < len(case.names):
        raise InputError(f"there is no truck {i} (trucks are numbered 0 to "
                         f"{len(case.names) - 1})", where=where)
    return case.names[i]


def label_of(key: str, names: Sequence[str]) -> str:
    """Display name of an input key (truck indices replaced by truck names)."""
    if key in _LABELS:
        return _LABELS[key]
    m = _GROUP.match(key)
    if m and int(m.group(2)) < len(names):
        return f"{_TRUCK_LABELS[m.group(1)]}, {names[int(m.group(2))]}"
    m = _TRUCK.match(key)
    if m and int(m.group(2)) < len(names):
        name = names[int(m.group(2))]
        if m.group(3) in _TRUCK_LABELS:
            return f"{_TRUCK_LABELS[m.group(3)]}, {name}"
        return f"{name}: {m.group(3) if m.group(1) == 'trucks' else 'operation ' + m.group(3)}"
    return key


def _documented_unit(case: Case, path: str) -> str:
    """The unit of a parameter's scenario field (its documented default unit)."""
    m = _TRUCK.match(path)
    if m and m.group(1) == "operations":
        return EXTRA_UNITS.get(m.group(3), "")
    if path.startswith("route."):
        info = Route.model_fields.get(path.split(".", 1)[1])
        return (info.json_schema_extra or {}).get("unit", "") if info else ""
    if path.startswith("emissions."):
        for prefix in ("emissions.grid_table", "emissions.hourly_shape"):
            if path.startswith(prefix):
                return EXTRA_UNITS[prefix]
        if path in EXTRA_UNITS:
            return EXTRA_UNITS[path]
        obj, rest = case.emissions_settings, path.split(".", 1)[1]
    elif m:
        obj, rest = case.inputs.trucks[int(m.group(2))].costs, m.group(3).split(".", 1)[1]
    else:
        head, rest = path.split(".", 1)
        obj = getattr(case.inputs, head, None)
    parts = rest.split(".")
    try:
        for part in parts[:-1]:
            name, _, idx = part.partition("[")
            obj = getattr(obj, name)
            if idx:
                obj = obj[int(idx[:-1])]
        name = parts[-1].partition("[")[0]
        info = type(obj).model_fields[name]
    except (AttributeError, KeyError, IndexError, ValueError):
        return ""
    return (info.json_schema_extra or {}).get("unit", "")


def resolve_input(case: Case, key: str, where: str | None = None) -> Input:
    """The :class:`Input` for a parameter path or named group.

    Raises
    ------
    InputError
        At ``where``: an unknown parameter or group, a truck that does not exist, a group
        with nothing to move.
    """
    names = case.names
    if key == "electricity_price":
        n = len(case.inputs.prices.electricity.bands)
        paths = [f"prices.electricity.bands[{j}].price" for j in range(n)]
        if math.isfinite(case.cost_params["prices.electricity.energy_price"]):
            paths.append("prices.electricity.energy_price")
        if not paths:
            raise InputError("the scenario has no depot electricity price to vary", where=where)
        return Input(key, label_of(key, names), tuple(paths), "×", 1.0, group=True,
                     bases=tuple(case.cost_params[p] for p in paths))
    m = _GROUP.match(key)
    if m:
        i = int(m.group(2))
        _truck_name(case, i, where)
        if m.group(1) == "energy_use":
            paths = [f"operations[{i}].{f}" for f in ENERGY_FIELDS
                     if case.cost_params[f"operations[{i}].{f}"] > 0]
            if not paths:
                raise InputError(f"truck {i} uses no energy to vary", where=where)
            return Input(key, label_of(key, names), tuple(paths), "×", 1.0, group=True,
                         bases=tuple(case.cost_params[p] for p in paths))
        residual = case.inputs.trucks[i].costs.residual
        tp = f"trucks[{i}].costs.residual"
        if residual.method == "table":
            paths = [f"{tp}.shares[{k}]" for k in range(len(residual.shares))]
            return Input(key, label_of(key, names), tuple(paths), "×", 1.0, group=True,
                         bases=tuple(case.cost_params[p] for p in paths))
        return Input(key, label_of(key, names), (f"{tp}.rate",), "×", 1.0, group=True,
                     residual=(case.cost_params[f"{tp}.rate"], case.N))
    if not case.known(key):
        close = difflib.get_close_matches(
            key, [*case.cost_params, *case.emission_params, "electricity_price"], n=1)
        hint = f"; did you mean '{close[0]}'?" if close else \
            " (see tco.cashflow.flat_params and tco.emissions.flat_params)"
        raise InputError(f"unknown input '{key}'{hint}", where=where)
    m = _TRUCK.match(key)
    if m:
        _truck_name(case, int(m.group(2)), where)
    return Input(key, label_of(key, names), (key,), _documented_unit(case, key),
                 case.base_value(key))


def _number_si(value, unit: str, where: str) -> float:
    """A user's absolute number or quantity string in SI."""
    if "currency" in unit:
        try:
            return float(value)
        except (TypeError, ValueError):
            raise InputError(f"'{value}' is not a number; write money as a plain number in "
                             "the scenario's currency", where=where) from None
    try:
        return to_si(value, unit)
    except UnitError as exc:
        raise InputError(str(exc), where=where) from None


def _to_unit(value, unit: str):
    """An SI value in a documented unit (money and dimensionless stay as they are)."""
    if not unit or "currency" in unit or unit == "×":
        return value
    return from_si(value, unit)


def _factors(numbers: dict, where: str) -> dict[str, float]:
    """Relative numbers (multipliers, or percentages such as "120 %") as floats."""
    out = {}
    for k, v in numbers.items():
        try:
            out[k] = to_si(v, "")
        except UnitError:
            raise InputError(f"{k} = '{v}' is not a plain number or percentage; relative "
                             "numbers are multipliers of the scenario's value",
                             where=f"{where}.{k}") from None
    return out


def _check_relative(inp: Input, where: str) -> None:
    if inp.group:
        return
    if not math.isfinite(inp.base):
        raise InputError(f"the scenario gives no value for {inp.key}; use scale = "
                         "'absolute'", where=f"{where}.scale")
    if inp.base == 0:
        raise InputError(f"the scenario's value of {inp.key} is 0, so a relative range "
                         "has no effect; use scale = 'absolute'", where=f"{where}.scale")


def _input_values(inp: Input, numbers: dict, scale: str, unit: str | None,
                  where: str) -> dict[str, float]:
    """Numbers of a tornado entry or a distribution as input values (SI, or factors for a
    group)."""
    if scale == "relative":
        _check_relative(inp, where)
        f = _factors(numbers, where)
        return f if inp.group else {k: v * inp.base for k, v in f.items()}
    if inp.group:
        raise InputError(f"'{inp.key}' moves several parameters and takes relative numbers "
                         "only (scale = 'relative')", where=f"{where}.scale")
    u = unit if unit is not None else inp.unit
    return {k: _number_si(v, u, f"{where}.{k}") for k, v in numbers.items()}


# --------------------------------------------------------------------------- tornado
_DEFAULT_SHARED = ("prices.diesel", "electricity_price", "prices.electricity.demand_charge",
                   "prices.public_charging", "route.days_per_year", "finance.discount_rate")
_DEFAULT_TRUCK = ("trucks[{i}].costs.purchase_price", "trucks[{i}].costs.grant",
                  "trucks[{i}].costs.tax_credit", "residual_value[{i}]",
                  "trucks[{i}].costs.maintenance", "energy_use[{i}]")


def default_inputs(case: Case) -> list[Input]:
    """The standard inputs of the tornado that the scenario gives a non-zero value."""
    keys = list(_DEFAULT_SHARED)
    for i in range(len(case.names)):
        keys += [k.format(i=i) for k in _DEFAULT_TRUCK]
    out = []
    for key in keys:
        try:
            inp = resolve_input(case, key)
        except InputError:
            continue  # nothing to vary (no electricity price, no energy of that kind)
        if not inp.group and not (math.isfinite(inp.base) and inp.base != 0):
            continue
        if inp.residual is not None and not inp.residual[0] < 1:
            continue
        if inp.group and inp.residual is None and not any(b > 0 for b in inp.bases):
            continue
        out.append(inp)
    return out


def _stack(case: Case, rows: list[dict]) -> dict[str, np.ndarray]:
    """One override array per parameter from per-row dicts (other rows at the base)."""
    paths = sorted({p for r in rows for p in r})
    out = {}
    for p in paths:
        base = case.base_value(p)
        # an optional price the scenario leaves out is unused there, so any fill will do
        a = np.full(len(rows), base if math.isfinite(base) else 0.0)
        for j, r in enumerate(rows):
            if p in r:
                a[j] = r[p]
        out[p] = a
    return out


def _tornado_table(case, bars, d, base, per: float) -> pd.DataFrame:
    """Rows of a tornado: each compared truck × bar, its input's low/high values and the
    output at each end (``d[k][b]`` low, ``d[k][B + b]`` high, divided by ``per``)."""
    B = len(bars)
    table = []
    for k in case.compared:
        for b, (inp, lo, hi, source, _) in enumerate(bars):
            low, high = float(d[k][b]) / per, float(d[k][B + b]) / per
            single = not inp.group
            table.append({
                "truck": case.names[k], "key": inp.key, "input": inp.label,
                "unit": inp.unit,
                "base_value": _to_unit(inp.base, inp.unit) if single else 1.0,
                "low_value": _to_unit(lo, inp.unit), "high_value": _to_unit(hi, inp.unit),
                "low_factor": lo / inp.base if single and inp.base else
                (math.nan if single else lo),
                "high_factor": hi / inp.base if single and inp.base else
                (math.nan if single else hi),
                "low": low, "high": high, "base": base[k],
                "swing": abs(high - low), "source": source,
            })
    return pd.DataFrame(table, columns=_TORNADO_COLUMNS)


def tornado(case: Case, settings: UncertaintySettings
            ) -> tuple[pd.DataFrame, list[Input], list[str]]:
    """One-at-a-time sensitivity of ΔPV, all bars in one vectorized call.

    Parameters
    ----------
    case : Case
    settings : UncertaintySettings
        ``default_inputs``, ``default_swing`` (low = (1 − s) × value, high = (1 + s) ×
        value) and ``tornado`` (own low/high, replacing the default range of that input).

    Returns
    -------
    table : pandas.DataFrame
        One row per compared truck and input, widest swing first within each truck.
        Columns: ``truck``; ``key`` (path or group); ``input`` (display name); ``unit``
        (of the value columns: the input's documented unit, ``×`` for a factor);
        ``base_value``, ``low_value``, ``high_value`` (input values in ``unit``);
        ``low_factor``, ``high_factor`` (values over the scenario's value) [-];
        ``low``, ``high`` ΔPV with the input at its low/high value [currency];
        ``base`` ΔPV of the scenario [currency]; ``swing`` = |high − low| [currency];
        ``source`` (``"default ±20%"`` for the default range, or ``"user"``).
    inputs : list of Input
        The inputs kept (those of zero swing for every truck left out unless given by
        the user).
    notes : list of str
    """
    bars = tornado_bars(case, settings)
    notes: list[str] = []
    if not bars:
        return _empty_tornado(), [], ["no tornado inputs"]
    d = _bar_outputs(case, bars, "present_value_difference")
    base = case.base_difference
    df = _tornado_table(case, bars, d, base, per=1.0)
    zero = df[df.source != "user"].groupby("key", sort=False)["swing"].max()
    zero = [k for k, v in zero.items() if v <= 1e-9 * max(1.0, df["base"].abs().max())]
    if zero:
        df = df[~df.key.isin(zero)]
        notes.append("Left out of the tornado, as they do not change the cost difference: "
                     + ", ".join(label_of(k, case.names) for k in zero) + ".")
    kept = [inp for inp, *_ in bars if inp.key not in zero]
    order = {n: j for j, n in enumerate(case.names)}
    df = df.assign(_t=df.truck.map(order)).sort_values(
        ["_t", "swing"], ascending=[True, False], kind="stable").drop(columns="_t")
    return df.reset_index(drop=True), kept, notes


#: The share of a distribution the tornado spans: its P10 to its P90.
TORNADO_QUANTILES = (0.1, 0.9)

#: Emission inputs the emissions tornado varies by the default swing (when the scenario
#: gives them a non-zero value and no range of its own).
_DEFAULT_EMISSIONS = ("emissions.diesel_co2", "emissions.diesel_upstream",
                      "emissions.grid_intensity", "emissions.grid_change")


def distribution_ranges(case: Case, settings: UncertaintySettings) -> dict[str, tuple]:
    """The tornado range of every input the scenario gives a distribution: its P10 and
    P90, as input values (SI, or factors for a group), from the same frozen distribution
    the Monte Carlo draws from. Only distributions the scenario lists count (the default
    triangular ones span the default swing already)."""
    if not settings.distributions:
        return {}
    unc, _, _ = resolve_distributions(case, settings)
    lo_q, hi_q = TORNADO_QUANTILES
    return {u.input.key: (float(u.values(np.asarray(u.dist.ppf(lo_q)))),
                          float(u.values(np.asarray(u.dist.ppf(hi_q)))), u.where)
            for u in unc}


def tornado_bars(case: Case, settings: UncertaintySettings, emission_inputs: bool = False
                 ) -> list[tuple[Input, float, float, str, str]]:
    """The tornado's inputs and ranges: ``(input, low, high, source, where)``.

    An input's range is, in order: the scenario's own tornado entry (``user``); the P10–P90
    of its distribution in ``[[uncertainty.distributions]]`` (the Monte Carlo's, so the
    two never disagree); else the default swing around its value. ``emission_inputs`` adds
    the emission factors (for the emissions tornado).
    """
    s = settings.default_swing
    bars: list[tuple[Input, float, float, str, str]] = []
    user_keys = {t.input for t in settings.tornado}
    ranges = distribution_ranges(case, settings)
    lo_q, hi_q = TORNADO_QUANTILES
    from_dist = (f"P{fm.number(lo_q * 100, 0)}–P{fm.number(hi_q * 100, 0)} of its "
                 "distribution")
    inputs = default_inputs(case) if settings.default_inputs else []
    seen = {inp.key for inp in inputs}
    for key in ranges:  # inputs with a distribution that are not standard ones
        if key not in seen and key not in user_keys:
            inputs.append(resolve_input(case, key))
            seen.add(key)
    if emission_inputs:
        for key in _DEFAULT_EMISSIONS:
            if key in seen or not case.known(key):
                continue
            inp = resolve_input(case, key)
            if math.isfinite(inp.base) and inp.base != 0:
                inputs.append(inp)
                seen.add(key)
    for inp in inputs:
        if inp.key in user_keys:
            continue
        if inp.key in ranges:
            lo, hi, where = ranges[inp.key]
            bars.append((inp, lo, hi, from_dist, where))
            continue
        lo, hi = (1 - s, 1 + s) if inp.group else ((1 - s) * inp.base, (1 + s) * inp.base)
        if inp.residual is not None:
            hi = min(hi, inp.max_factor)
        lo, hi = min(lo, hi), max(lo, hi)  # a negative value (a falling grid) stays ordered
        bars.append((inp, lo, hi, f"default ±{fm.percent(s, 0)}",
                     "uncertainty.default_swing"))
    for k, t in enumerate(settings.tornado):
        where = f"uncertainty.tornado[{k}]"
        inp = resolve_input(case, t.input, f"{where}.input")
        v = _input_values(inp, {"low": t.low, "high": t.high}, t.scale, t.unit, where)
        if v["low"] > v["high"]:
            raise InputError(f"low ({t.low}) is above high ({t.high})", where=where)
        bars.append((inp, v["low"], v["high"], "user", where))
    return bars


def _bar_outputs(case: Case, bars, output: str) -> dict[int, np.ndarray]:
    """One output at every bar's low end, then every bar's high end (one draw row each):
    ``present_value_difference`` through the cost model alone, or ``avoided_kg_location``
    through both models. [currency] or [kg CO2e]"""
    rows = []
    for end in (1, 2):
        for bar in bars:
            try:
                rows.append(bar[0].overrides(bar[end]))
            except InputError as exc:
                raise exc.located(where=bar[4]) from None
    try:
        if output == "present_value_difference":
            d = case.pv_difference(_stack(case, rows))
        else:
            d = {k: r[output] for k, r in run_draws(case, _stack(case, rows)).items()}
    except InputError as exc:
        where = next((w for inp, *_, w in bars if exc.where in inp.paths), None)
        raise InputError(f"a tornado value is out of range: {exc.message}",
                         where=where or exc.where) from None
    return {k: np.broadcast_to(v, (2 * len(bars),)) for k, v in d.items()}


def emissions_tornado(case: Case, settings: UncertaintySettings) -> pd.DataFrame:
    """One-at-a-time sensitivity of the emissions avoided (well-to-wheel, location-based,
    over the period), with the same inputs and ranges as :func:`tornado` plus the emission
    factors; inputs that do not move the emissions are left out.

    Returns
    -------
    pandas.DataFrame
        The columns of :func:`tornado`, with ``low``, ``high``, ``base`` and ``swing`` in
        tonnes CO2e avoided [t]. Empty without emissions settings.
    """
    if case.emissions_settings is None:
        return _empty_tornado()
    bars = tornado_bars(case, settings, emission_inputs=True)
    if not bars:
        return _empty_tornado()
    d = _bar_outputs(case, bars, "avoided_kg_location")
    base = {k: float(r["avoided_kg_location"][0]) / 1000
            for k, r in run_draws(case, {}).items()}
    df = _tornado_table(case, bars, d, base, per=1000.0)  # kg -> t
    scale = max(1.0, df["base"].abs().max())
    df = df[df.groupby("key", sort=False)["swing"].transform("max") > 1e-9 * scale]
    order = {n: j for j, n in enumerate(case.names)}
    df = df.assign(_t=df.truck.map(order)).sort_values(
        ["_t", "swing"], ascending=[True, False], kind="stable").drop(columns="_t")
    return df.reset_index(drop=True)


_TORNADO_COLUMNS = ["truck", "key", "input", "unit", "base_value", "low_value", "high_value",
                    "low_factor", "high_factor", "low", "high", "base", "swing", "source"]


def _empty_tornado() -> pd.DataFrame:
    return pd.DataFrame(columns=_TORNADO_COLUMNS)


# --------------------------------------------------------------------------- break-even
def _signed(path: str) -> bool:
    """Rates that may be negative (searched over an absolute range)."""
    return "escalation" in path or path.endswith(
        ("discount_rate", ".inflation", "grid_change"))


def _search_ranges(inp: Input, scale_money: float) -> list[tuple[float, float, str]]:
    """Growing search ranges (bracket expansion) in input values, with their wording."""
    if inp.group:
        top = inp.max_factor
        if math.isfinite(top):
            return [(0.0, top, f"0 and {fm.number(top)} times the scenario's values")]
        return [(0.0, h, f"0 and {fm.plain(h)} times the scenario's values")
                for h in (10, 100, 1000)]
    path, b = inp.paths[0], inp.base
    if _signed(path):
        return [(-0.5, 1.0, "-50 % and 100 % per year"),
                (-0.9, 10.0, "-90 % and 1000 % per year")]
    if path == "route.days_per_year":
        return [(0.02 * b, 5 * b, "0.02 and 5 times the scenario's value"),
                (0.02 * b, 50 * b, "0.02 and 50 times the scenario's value")]
    if math.isfinite(b) and b > 0:
        return [(0.0, h * b, f"0 and {fm.plain(h)} times the scenario's value")
                for h in (10, 100, 1000)]
    return [(0.0, h * scale_money, f"0 and {fm.number(_to_unit(h * scale_money, inp.unit))} "
             f"{inp.unit}".rstrip()) for h in (1, 10, 100)]


def break_even_one(case: Case, inp: Input, k: int, base_diff: float) -> fin.BreakEven:
    """Value of one input at which truck ``k`` costs the same as the baseline.

    Grid bracket search over a range in one vectorized call, Brent's method on the
    bracket nearest the scenario's value, and wider ranges when none has a sign change.

    Returns
    -------
    tco.finance.BreakEven
        Value in SI (a factor for a group), or None with the reason.
    """
    def many(x):
        return case.pv_difference(inp.overrides(np.atleast_1d(x)))[k]

    def one(x):
        return float(many(np.array([x]))[0])

    scale_money = 2.0 * max(abs(base_diff), max(
        case.cost_params[f"trucks[{i}].costs.purchase_price"] for i in range(len(case.names))),
        1.0)
    x0 = inp.base
    last = ""
    for lo, hi, text in _search_ranges(inp, scale_money):
        r = fin.find_break_even(many, one, lo, hi, x0 if math.isfinite(x0) else None,
                                range_text=text)
        if r.value is not None or not r.note.startswith("no break-even"):
            return r
        last = text
    return fin.BreakEven(None, f"none in range (no break-even between {last})")


def break_even_table(case: Case, inputs: Sequence[Input],
                     tornado_table: pd.DataFrame | None = None) -> pd.DataFrame:
    """Break-even value of each input for each compared truck.

    Parameters
    ----------
    case : Case
    inputs : sequence of Input
        Usually the tornado's inputs.
    tornado_table : pandas.DataFrame, optional
        The tornado; an input whose swing is zero for a truck is reported without a search.

    Returns
    -------
    pandas.DataFrame
        Columns ``truck``, ``key``, ``input`` (display name), ``unit`` (documented unit of
        ``value`` and ``base_value``; ``×`` for a factor on the scenario's values),
        ``value`` (break-even value, NaN when none), ``base_value``, ``factor`` (value over
        the scenario's value) [-], ``value_si`` [SI], ``note`` ("" when found; else why
        not, e.g. "none in range (…)").
    """
    base = case.base_difference
    rows = []
    for k in case.compared:
        for inp in inputs:
            swing = None
            if tornado_table is not None and len(tornado_table):
                t = tornado_table[(tornado_table.truck == case.names[k])
                                  & (tornado_table.key == inp.key)]
                swing = float(t.swing.iloc[0]) if len(t) else None
            if swing is not None and swing <= 1e-9 * max(1.0, abs(base[k])):
                r = fin.BreakEven(None, "the input does not change the cost difference")
            else:
                r = break_even_one(case, inp, k, base[k])
            single = not inp.group
            v = math.nan if r.value is None else r.value
            rows.append({
                "truck": case.names[k], "key": inp.key, "input": inp.label, "unit": inp.unit,
                "value": _to_unit(v, inp.unit),
                "base_value": _to_unit(inp.base, inp.unit) if single else 1.0,
                "factor": (v / inp.base if inp.base else math.nan) if single else v,
                "value_si": v, "note": r.note,
            })
    return pd.DataFrame(rows, columns=["truck", "key", "input", "unit", "value", "base_value",
                                       "factor", "value_si", "note"])


# --------------------------------------------------------------------------- sampling
def distribution(kind: str, low=None, mode=None, high=None, mean=None, sd=None):
    """The frozen :mod:`scipy.stats` distribution of a kind and its numbers.

    ``uniform(low, high)``; ``triangular(low, mode, high)`` = ``scipy.stats.triang`` with
    ``c = (mode − low)/(high − low)``; ``pert(low, mode, high)`` = ``scipy.stats.beta`` on
    [low, high] with ``α = 1 + 4 (mode − low)/(high − low)``, ``β = 1 + 4 (high − mode)/(high −
    low)`` (mean ``(low + 4 mode + high)/6``); ``normal(mean, sd)``, truncated to [low, high]
    when either is given (``scipy.stats.truncnorm``); ``lognormal(mean, sd)`` of the variable
    itself: ``σ² = ln(1 + sd²/mean²)``, ``scipy.stats.lognorm(s=σ, scale=mean·e^(−σ²/2))``.

    Parameters
    ----------
    kind : {"uniform", "triangular", "pert", "normal", "lognormal"}
    low, mode, high, mean, sd : float
        As the kind needs (see :data:`tco.scenario.uncertainty.KINDS`). [unit of the input]

    Returns
    -------
    scipy.stats frozen distribution

    Raises
    ------
    ValueError
        Inconsistent numbers (see :func:`tco.scenario.uncertainty.check_distribution`).

    Examples
    --------
    >>> round(float(distribution("pert", low=1, mode=2, high=6).mean()), 6)
    2.5
    """
    problem = check_distribution(kind, dict(low=low, mode=mode, high=high, mean=mean, sd=sd))
    if problem:
        raise ValueError(problem)
    if kind == "uniform":
        return stats.uniform(loc=low, scale=high - low)
    if kind == "triangular":
        return stats.triang((mode - low) / (high - low), loc=low, scale=high - low)
    if kind == "pert":
        w = high - low
        return stats.beta(1 + 4 * (mode - low) / w, 1 + 4 * (high - mode) / w, loc=low, scale=w)
    if kind == "normal":
        if low is None and high is None:
            return stats.norm(mean, sd)
        a = -np.inf if low is None else (low - mean) / sd
        b = np.inf if high is None else (high - mean) / sd
        return stats.truncnorm(a, b, loc=mean, scale=sd)
    s2 = math.log1p((sd / mean) ** 2)
    return stats.lognorm(math.sqrt(s2), scale=mean * math.exp(-s2 / 2))


def _factor(pearson: np.ndarray) -> np.ndarray:
    """L with L Lᵀ = R: Cholesky, or the eigen factor when R is singular."""
    try:
        return np.linalg.cholesky(pearson)
    except np.linalg.LinAlgError:
        w, v = np.linalg.eigh(pearson)
        return v * np.sqrt(np.clip(w, 0.0, None))


def sample(dists: Sequence, n: int, rng: np.random.Generator,
           pearson: np.ndarray | None = None) -> np.ndarray:
    """Draws of several inputs: a Gaussian copula for the correlated ones, the others
    straight from their distribution.

    Inputs with a correlation to another input (a non-zero off-diagonal entry of
    ``pearson``): ``Z = L·N(0, I)`` over those inputs, ``U = Φ(Z)``, ``x_j = F_j⁻¹(U_j)``
    (:func:`tco.sampling.inverse_cdf`: closed forms, normal and lognormal straight from Z,
    beta-PERT from a polynomial table within 1e-12 of ``scipy.stats.beta.ppf``).
    Inputs without one: straight from numpy's generators (:func:`tco.sampling.draw`, the
    same calls as ``dist.rvs(size=n, random_state=rng)``; for beta-PERT numpy's beta
    generator).

    The generator is used in a fixed order, so a seed gives the same draws every time:
    first the copula's normals (one row per correlated input, in input order), then each
    independent input in input order.

    Parameters
    ----------
    dists : sequence of scipy.stats frozen distributions
        One per input.
    n : int
        Number of draws.
    rng : numpy.random.Generator
    pearson : ndarray of shape (k, k), optional
        Pearson correlation of the copula's normals (identity when None); see
        :func:`tco.scenario.uncertainty.rank_to_pearson`.

    Returns
    -------
    numpy.ndarray of shape (k, n)
        [unit of each input]
    """
    k = len(dists)
    out = np.empty((k, n))
    linked = np.zeros(k, dtype=bool)
    if pearson is not None and not np.allclose(pearson, np.eye(k)):
        problem = correlation_problem(pearson)
        if problem:
            raise ValueError(problem)
        linked = np.any(np.abs(pearson - np.eye(k)) > 0, axis=1)
        idx = np.flatnonzero(linked)
        z = _factor(pearson[np.ix_(idx, idx)]) @ rng.standard_normal((idx.size, n))
        for row, j in enumerate(idx):
            sampling.inverse_cdf(dists[j], z[row], out=out[j])
    for j in np.flatnonzero(~linked):
        sampling.draw(dists[j], n, rng, out=out[j])
    return out


# --------------------------------------------------------------------------- model pass
#: Per-draw outputs of :func:`run_draws` for each compared truck, with units.
OUTPUTS = {
    "present_value_difference": "currency",
    "levelized_cost": "currency/m",
    "baseline_levelized_cost": "currency/m",
    "levelized_cost_difference": "currency/m",
    "simple_payback_year": "yr",
    "discounted_payback_year": "yr",
    "avoided_kg_location": "kg",
    "avoided_kg_market": "kg",
}


#: Most draws per call of the models in :func:`run_draws`. A call's temporaries grow with
#: its draws (some 30 MB for 100,000, 10 MB for 35,000); kept to about 10 MB they are
#: reused by the memory allocator, where more fresh memory per call cost more in page
#: faults than the arithmetic (up to a third of the pass, measured at 50,000 and 100,000).
DRAWS_PER_CALL = 35_000


def run_draws(case: Case, overrides: dict) -> dict[int, dict[str, np.ndarray]]:
    """The cash-flow and emissions models for arrays of draws.

    The draws go through the lean paths of both models in equal calls of at most
    :data:`DRAWS_PER_CALL` draws (the result does not depend on it).

    Parameters
    ----------
    case : Case
    overrides : dict of str to ndarray of shape (n,)
        Parameter values by path (cost and emission parameters together). [SI]

    Returns
    -------
    dict
        For each compared truck index, the arrays of :data:`OUTPUTS` of shape (n,) (1 for
        no array overrides): ΔPV [currency]; levelized cost of the truck and the baseline and
        their difference [currency/m]; simple and discounted payback year of the truck's
        savings over the baseline [yr] (inf: not within the period); avoided well-to-wheel
        emissions over the period, location- and market-based [kg CO2e] (absent without
        emissions settings).
    """
    n = max((len(v) for v in overrides.values() if np.ndim(v) == 1), default=1)
    if n > 1:
        heap.keep_freed_memory()  # no page faults for each pass's temporaries
    names = [q for q in OUTPUTS if case.emissions_settings is not None
             or not q.startswith("avoided_")]
    out = {k: {q: np.empty(n) for q in names} for k in case.compared}
    size = n if n <= DRAWS_PER_CALL else -(-n // -(-n // DRAWS_PER_CALL))  # equal calls
    for a in range(0, n, size):
        _run_models(case, {p: v[a:a + size] if np.ndim(v) == 1 else v
                           for p, v in overrides.items()},
                    {k: {q: v[a:a + size] for q, v in o.items()} for k, o in out.items()})
    return out


def _run_models(case: Case, overrides: dict, out: dict) -> None:
    """:func:`run_draws` in one call of each model, into the arrays of ``out`` (as
    :func:`run_draws` returns them, for the draws of this call)."""
    cost, em_over, ops = case.split(overrides)
    ref = case.baseline
    # the lean paths: sums over the years (emissions), yearly totals as parts (costs)
    if case.emissions_settings is not None:
        wtw = emissions.totals(case.emission_params, ops, case.years, em_over)
        r = case.ops[ref].truck
        for i in case.compared:
            for f, q in (("wtw", "avoided_kg_location"), ("wtw_market", "avoided_kg_market")):
                np.subtract(wtw[r][f], wtw[case.ops[i].truck][f], out=out[i][q])
        del wtw
    ct = cashflow.compute_totals(case.inputs, cost, case.cost_params)
    for k in case.compared:
        # present values, both payback years of the savings and the levelized costs (over
        # the discounted distance, the same distance in each year 1..N) in one pass
        o = out[k]
        fin.compare_levelized(
            ct.flows[ref], ct.flows[k], ct.discount_rate, ct.annual_distance[ref],
            ct.annual_distance[k], out=fin.LevelizedComparison(
                o["present_value_difference"], o["levelized_cost"],
                o["baseline_levelized_cost"], o["levelized_cost_difference"],
                o["simple_payback_year"], o["discounted_payback_year"]))


# --------------------------------------------------------------------------- Monte Carlo
@dataclass
class Uncertain:
    """A Monte Carlo input resolved against the case.

    Attributes
    ----------
    input : Input
    kind, scale : str
        As in the scenario section.
    numbers : dict of str to float
        The distribution's numbers: SI values (absolute) or factors (relative).
    dist : scipy.stats frozen distribution
        Of the drawn value (SI value or factor).
    where : str
        The scenario field, for errors.
    """

    input: Input
    kind: str
    scale: str
    numbers: dict[str, float]
    dist: Any
    where: str

    def values(self, x: np.ndarray) -> np.ndarray:
        """Drawn numbers as input values: SI (single parameters) or factors (groups)."""
        return x * self.input.base if self.scale == "relative" and not self.input.group else x


def _default_distributions(case: Case, settings: UncertaintySettings) -> list[dict]:
    s = settings.default_swing
    out = []
    for inp in default_inputs(case):
        hi = 1 + s if inp.residual is None else min(1 + s, inp.max_factor)
        out.append(dict(input=inp.key, kind="triangular", scale="relative", low=1 - s,
                        mode=1.0, high=hi, unit=None))
    return out


def resolve_distributions(case: Case, settings: UncertaintySettings
                          ) -> tuple[list[Uncertain], np.ndarray | None, list[str]]:
    """The Monte Carlo inputs of the settings, checked against the case.

    Returns
    -------
    inputs : list of Uncertain
        In the order of ``settings.distributions`` (or the standard inputs, when none are
        given and ``default_distributions`` is on).
    pearson : ndarray of shape (k, k) or None
        Correlation of the copula's normals; None when no correlations are given.
    notes : list of str

    Raises
    ------
    InputError
        At ``uncertainty.distributions[k]…``: unknown inputs, inputs moved twice, numbers
        that do not fit the input or the distribution; at ``uncertainty.correlations``: a
        matrix that is not positive semi-definite.
    """
    notes = []
    given = [d.model_dump() for d in settings.distributions]
    if not given and settings.default_distributions:
        given = _default_distributions(case, settings)
        if given:
            notes.append(
                "No distributions were given: each standard input is drawn from a triangular "
                f"distribution over ±{fm.percent(settings.default_swing, 0)} around its "
                "scenario value, independently (a first look; give your own distributions).")
    out: list[Uncertain] = []
    owner: dict[str, int] = {}
    for k, d in enumerate(given):
        where = f"uncertainty.distributions[{k}]"
        inp = resolve_input(case, d["input"], f"{where}.input")
        for p in inp.paths:
            if p in owner:
                raise InputError(f"{p} is already moved by distributions[{owner[p]}] "
                                 f"('{given[owner[p]]['input']}')", where=f"{where}.input")
            owner[p] = k
        numbers = {n: d[n] for n in _NUMBERS if d.get(n) is not None}
        if d["scale"] == "relative":  # the factor is drawn, then applied to the value
            _check_relative(inp, where)
            conv = _factors(numbers, where)
        else:
            conv = _input_values(inp, numbers, "absolute", d.get("unit"), where)
        problem = check_distribution(d["kind"], {n: conv.get(n) for n in _NUMBERS})
        if problem:
            raise InputError(problem, where=where)
        out.append(Uncertain(inp, d["kind"], d["scale"], conv,
                             distribution(d["kind"], **conv), where))
    pearson = None
    if settings.correlations and settings.distributions:
        problem = unmatched_correlation([d.input for d in settings.distributions],
                                        settings.correlations)
        if problem:
            k, _, rest = problem.partition("]: ")
            raise InputError(rest, where=f"uncertainty.correlations{k}]")
        pearson = pearson_matrix([d.input for d in settings.distributions],
                                 settings.correlations)
        problem = correlation_problem(pearson)
        if problem:
            raise InputError(problem, where="uncertainty.correlations")
    return out, pearson, notes


def draw_overrides(inputs: Sequence[Uncertain], draws: np.ndarray) -> dict[str, np.ndarray]:
    """Parameter overrides for drawn numbers (rows of ``draws`` follow ``inputs``). [SI]"""
    out: dict[str, np.ndarray] = {}
    for u, x in zip(inputs, draws, strict=True):
        try:
            out.update(u.input.overrides(u.values(x)))
        except InputError as exc:
            raise InputError(exc.message, where=u.where) from None
    return out


def monte_carlo(case: Case, inputs: Sequence[Uncertain], pearson: np.ndarray | None, n: int,
                seed: int, progress: Callable[[int], Any] | None = None,
                chunk_size: int | None = None):
    """Draw the inputs (all at once) and run the models over the draws.

    Returns
    -------
    draws : ndarray of shape (k, n)
        Drawn numbers (SI values, or factors for relative distributions).
    outputs : dict
        As :func:`run_draws`, over all draws.
    """
    heap.keep_freed_memory()  # see tco.heap: the same numbers, without page faults
    rng = np.random.default_rng(seed)
    draws = sample([u.dist for u in inputs], n, rng, pearson)
    if chunk_size is None:
        chunk_size = n if progress is None else max(1000, -(-n // 10))
    parts = []
    for a in range(0, n, chunk_size):
        over = draw_overrides(inputs, draws[:, a:a + chunk_size])
        try:
            parts.append(run_draws(case, over))
        except InputError as exc:
            owner = next((u.where for u in inputs if exc.where in u.input.paths), None)
            if owner is None:
                raise
            raise InputError(f"some draws are out of range ({exc.message}); narrow or "
                             "truncate the distribution", where=owner) from None
        if progress is not None:
            progress(min(chunk_size, n - a))
    if len(parts) == 1:  # one call over all draws: nothing to join
        return draws, parts[0]
    outputs = {k: {q: np.concatenate([p[k][q] for p in parts]) for q in parts[0][k]}
               for k in case.compared}
    return draws, outputs


_EVENTS = ("cheaper", "pays_back_simple", "pays_back_discounted",
           "avoids_emissions_location", "avoids_emissions_market")


def _statistics(case: Case, outputs) -> tuple[pd.DataFrame, pd.DataFrame]:
    stat_rows, prob_rows = [], []
    for k, res in outputs.items():
        name = case.names[k]
        for q, x in res.items():
            payback = q.endswith("payback_year")
            if payback:
                p = np.percentile(x, [10, 50, 90], method="inverted_cdf")
                mean = sd = math.nan
            else:
                p = np.percentile(x, [10, 50, 90])
                mean, sd = float(np.mean(x)), float(np.std(x, ddof=1)) if x.size > 1 else 0.0
            stat_rows.append({"truck": name, "quantity": q, "unit": OUTPUTS[q], "mean": mean,
                              "sd": sd, "p10": float(p[0]), "p50": float(p[1]),
                              "p90": float(p[2])})
        n = res["present_value_difference"].size
        events = {"cheaper": res["present_value_difference"] < 0,
                  "pays_back_simple": np.isfinite(res["simple_payback_year"]),
                  "pays_back_discounted": np.isfinite(res["discounted_payback_year"])}
        if "avoided_kg_location" in res:
            events["avoids_emissions_location"] = res["avoided_kg_location"] > 0
            events["avoids_emissions_market"] = res["avoided_kg_market"] > 0
        for e, hit in events.items():
            p = float(np.mean(hit))
            prob_rows.append({"truck": name, "event": e, "probability": p,
                              "standard_error": math.sqrt(p * (1 - p) / n)})
    return (pd.DataFrame(stat_rows, columns=["truck", "quantity", "unit", "mean", "sd", "p10",
                                             "p50", "p90"]),
            pd.DataFrame(prob_rows, columns=["truck", "event", "probability",
                                             "standard_error"]))


# --------------------------------------------------------------------------- result
@dataclass
class UncertaintyResult:
    """Sensitivity, break-even and Monte Carlo results (plain data and pandas objects).

    Money is in the scenario currency and money basis of the cash-flow model; other
    values SI unless a ``unit`` column says otherwise.

    Attributes
    ----------
    baseline : str
        The reference truck; differences are truck − baseline.
    trucks : list of str
        The compared trucks.
    base : pandas.DataFrame
        The scenario's own values of the outputs, one row per compared truck, columns
        ``truck`` and those of :data:`OUTPUTS`.
    tornado : pandas.DataFrame
        See :func:`tornado`.
    tornado_emissions : pandas.DataFrame
        See :func:`emissions_tornado` (tonnes CO2e avoided).
    break_even : pandas.DataFrame
        See :func:`break_even_table`.
    inputs : pandas.DataFrame
        The Monte Carlo inputs: ``key``, ``input`` (display name), ``kind``, ``scale``,
        ``unit`` (of ``base_value`` and of the draws' ``mean``, ``p10``, ``p50``, ``p90``:
        the input's documented unit, ``×`` for a factor), ``base_value``, ``parameters``
        (the distribution's numbers, converted: SI values for ``absolute``, factors for
        ``relative``).
    correlations : pandas.DataFrame
        ``a``, ``b`` (input keys), ``rank`` requested Spearman, ``pearson`` of the copula's
        normals, ``achieved_rank`` Spearman of the draws.
    samples : pandas.DataFrame
        One row per draw and compared truck: ``truck``, ``draw``, one column per input key
        (SI values, or factors for groups), and the outputs of :data:`OUTPUTS`.
    statistics : pandas.DataFrame
        ``truck``, ``quantity``, ``unit``, ``mean``, ``sd``, ``p10``, ``p50``, ``p90``
        (payback years: P-values only, inf = not within the period).
    probabilities : pandas.DataFrame
        ``truck``, ``event`` (``cheaper``: ΔPV < 0; ``pays_back_simple``,
        ``pays_back_discounted``: within the period; ``avoids_emissions_location``,
        ``avoids_emissions_market``: avoided WTW > 0), ``probability``,
        ``standard_error`` = √(p(1 − p)/n).
    draws : int
    seed : int
    default_swing : float
    notes : list of str
        Statements on how the studies were set up (left-out inputs, default ranges).
    timings : dict of str to float
        Seconds per step.
    """

    baseline: str
    trucks: list[str]
    base: pd.DataFrame
    tornado: pd.DataFrame
    break_even: pd.DataFrame
    inputs: pd.DataFrame
    correlations: pd.DataFrame
    samples: pd.DataFrame
    statistics: pd.DataFrame
    probabilities: pd.DataFrame
    draws: int
    seed: int
    default_swing: float
    notes: list[str] = field(default_factory=list)
    timings: dict[str, float] = field(default_factory=dict)
    tornado_emissions: pd.DataFrame = field(default_factory=lambda: _empty_tornado())


def evaluate(settings: UncertaintySettings, cost_inputs: cashflow.CostInputs,
             emissions_settings, years, *, progress: Callable[[int], Any] | None = None,
             chunk_size: int | None = None, break_evens: bool = True
             ) -> UncertaintyResult | None:
    """Tornado, break-even values and Monte Carlo of a scenario.

    Parameters
    ----------
    settings : UncertaintySettings
        The ``uncertainty`` section.
    cost_inputs : tco.cashflow.CostInputs
        The cost model's inputs; its ``operations`` (one AnnualOperation per truck, from
        the energy model run once) feed the emissions model too.
    emissions_settings : EmissionsSettings or None
        The ``emissions`` section (None: no emission outputs).
    years : array_like of int
        Years of service for the emissions model, as given to
        :func:`tco.emissions.evaluate`. [yr]
    progress : callable, optional
        Called as ``progress(k)`` after each chunk of ``k`` Monte Carlo draws (the total is
        ``settings.draws``), e.g. the ``advance`` of a rich progress bar.
    chunk_size : int, optional
        Draws per model call (default: all at once, or tenths of the draws with
        ``progress``); results do not depend on it.
    break_evens : bool
        Search the break-even values.

    Returns
    -------
    UncertaintyResult or None
        None when ``settings.enabled`` is false.

    Raises
    ------
    InputError
        Unknown inputs (``uncertainty.distributions[k].input``,
        ``uncertainty.tornado[k].input``), numbers that do not fit their distribution or
        input, draws out of an input's range, correlations that are not positive
        semi-definite.
    """
    if not settings.enabled:
        return None
    t0 = time.perf_counter()
    timings: dict[str, float] = {}
    case = Case(cost_inputs, emissions_settings, years)
    tor, tor_inputs, notes = tornado(case, settings)
    tor_em = emissions_tornado(case, settings)
    timings["tornado"] = time.perf_counter() - t0
    t = time.perf_counter()
    be = break_even_table(case, tor_inputs, tor) if break_evens else \
        break_even_table(case, [])
    timings["break_even"] = time.perf_counter() - t

    base = run_draws(case, {})
    base_df = pd.DataFrame([{"truck": case.names[k], **{q: float(v[0]) for q, v in r.items()}}
                            for k, r in base.items()])
    t = time.perf_counter()
    unc_inputs, pearson, more = resolve_distributions(case, settings)
    notes += more
    n = settings.draws if unc_inputs else 0
    if n == 0:
        notes.append("Monte Carlo not run: " + ("draws = 0." if settings.draws == 0
                                                else "no distributions given."))
        values, samples, statistics, probabilities, corr_rows = {}, *_empty_mc(), []
    else:
        draws, outputs = monte_carlo(case, unc_inputs, pearson, n, settings.seed, progress,
                                     chunk_size)
        names = [d.input for d in settings.distributions]
        corr_rows = []
        for c in settings.correlations:
            a, b = names.index(c.inputs[0]), names.index(c.inputs[1])
            achieved = stats.spearmanr(draws[a], draws[b])[0] if n > 2 else math.nan
            corr_rows.append({"a": c.inputs[0], "b": c.inputs[1], "rank": c.rank,
                              "pearson": float(pearson[a, b]),
                              "achieved_rank": float(achieved)})
        values = {u.input.key: u.values(x) for u, x in zip(unc_inputs, draws, strict=True)}
        samples = pd.concat([pd.DataFrame({"truck": case.names[k], "draw": np.arange(n),
                                           **values, **outputs[k]})
                             for k in case.compared], ignore_index=True)
        statistics, probabilities = _statistics(case, outputs)
    timings["monte_carlo"] = time.perf_counter() - t
    timings["total"] = time.perf_counter() - t0
    return UncertaintyResult(
        baseline=case.names[case.baseline], trucks=[case.names[k] for k in case.compared],
        base=base_df, tornado=tor, break_even=be, inputs=_inputs_table(unc_inputs, values),
        correlations=pd.DataFrame(corr_rows, columns=["a", "b", "rank", "pearson",
                                                      "achieved_rank"]),
        samples=samples, statistics=statistics, probabilities=probabilities, draws=n,
        seed=settings.seed, default_swing=settings.default_swing, notes=notes,
        timings=timings, tornado_emissions=tor_em)


def _inputs_table(inputs: Sequence[Uncertain], values: dict) -> pd.DataFrame:
    rows = []
    for u in inputs:
        inp = u.input
        x = values.get(inp.key)
        x = None if x is None else _to_unit(x, "×" if inp.group else inp.unit)
        pct = [math.nan] * 3 if x is None else np.percentile(x, [10, 50, 90]).tolist()
        rows.append({
            "key": inp.key, "input": inp.label, "kind": u.kind, "scale": u.scale,
            "unit": inp.unit, "base_value": 1.0 if inp.group else _to_unit(inp.base, inp.unit),
            "parameters": dict(u.numbers),
            "mean": math.nan if x is None else float(np.mean(x)),
            "p10": pct[0], "p50": pct[1], "p90": pct[2]})
    return pd.DataFrame(rows, columns=["key", "input", "kind", "scale", "unit", "base_value",
                                       "parameters", "mean", "p10", "p50", "p90"])


def _empty_mc():
    return (pd.DataFrame(columns=["truck", "draw", *OUTPUTS]),
            pd.DataFrame(columns=["truck", "quantity", "unit", "mean", "sd", "p10", "p50",
                                  "p90"]),
            pd.DataFrame(columns=["truck", "event", "probability", "standard_error"]))
