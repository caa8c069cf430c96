"""The ``uncertainty`` section of a scenario: tornado ranges, distributions, correlations.

How sure is the answer? The section sets up three studies run by :mod:`tco.uncertainty`:
a one-at-a-time sensitivity (tornado), break-even values of the same inputs, and a Monte
Carlo simulation with a distribution per uncertain input.

Naming an input
---------------
``input`` is either a parameter path as listed by :func:`tco.cashflow.flat_params` or
:func:`tco.emissions.flat_params` (``prices.diesel``, ``trucks[1].costs.purchase_price``,
``finance.discount_rate``, ``route.days_per_year``, ``operations[1].grid_energy_depot``,
``emissions.grid_intensity`` …; truck ``i`` is the i-th ``[[trucks]]`` entry, from 0) or one
of three named groups that move several parameters together:

* ``electricity_price`` — every depot energy price (all time-of-use bands and the flat
  energy price) by the same factor;
* ``energy_use[i]`` — truck i's energy use: its diesel, diesel exhaust fluid, battery
  throughput and grid energy (depot and public) per year, all by the same factor;
* ``residual_value[i]`` — truck i's value at the end of the period by the same factor (a
  value table: every share; declining balance: the yearly rate that gives that end value).

Numbers: ``scale``
------------------
Every tornado entry and distribution says what its numbers are:

* ``scale = "relative"`` — multipliers of the scenario's own value (``0.8``, ``"120 %"``).
  Needs no units; the only choice for a named group.
* ``scale = "absolute"`` — values of the input in the input's documented default unit (the
  unit of the scenario field, e.g. ``1.65`` for a diesel price in currency per litre), or a
  string with units (``"4.10 / gal"``), or in the unit named by ``unit``. Inputs that are not
  scenario fields use the units listed in :data:`tco.uncertainty.EXTRA_UNITS` (litres, kWh,
  km, h, kg/L …).

Distributions and the numbers each needs: ``uniform`` low, high · ``triangular`` low,
mode, high · ``pert`` low, mode, high (beta-PERT with shape λ = 4) · ``normal`` mean, sd
(optionally low and/or high to truncate it) · ``lognormal`` mean, sd (of the input itself,
not of its logarithm).
"""
from __future__ import annotations

import difflib
import math
from typing import Literal

import numpy as np
from pydantic import Field, ValidationInfo, field_validator, model_validator

from tco.report import formatting as fm
from tco.budget import MAX_DRAWS
from tco.scenario.base import (
    ASSUMPTION,
    INT_CEILING,
    MONEY_CEILING,
    Qty,
    Section,
    mfield,
    qfield,
)
from tco.units import UnitError, to_si

__all__ = ["KINDS", "Correlation", "Distribution", "TornadoInput", "UncertaintySettings",
           "check_distribution", "check_fields", "correlation_problem", "pearson_matrix",
           "rank_to_pearson"]

#: The numbers each distribution kind needs (required, optional).
KINDS: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    "uniform": (("low", "high"), ()),
    "triangular": (("low", "mode", "high"), ()),
    "pert": (("low", "mode", "high"), ()),
    "normal": (("mean", "sd"), ("low", "high")),
    "lognormal": (("mean", "sd"), ()),
}
_NUMBERS = ("low", "mode", "high", "mean", "sd")

Number = float | str
#: Largest size of a tornado or distribution number: the money ceiling, since a number may
#: be an amount of money. [input's unit, or a factor]
NUMBER_LIMIT = MONEY_CEILING
_NUMBER_BOUNDS = dict(bounds=(-NUMBER_LIMIT, NUMBER_LIMIT),
                      usual="none: the input's own unit, or a factor")


def _number_size(value):
    if isinstance(value, float) and abs(value) > NUMBER_LIMIT:
        raise ValueError(f"{fm.plain(value)} is above {fm.plain(NUMBER_LIMIT)} in size")
    return value
_AS_NEEDED = "none: given by you where the kind needs it"
SCALE_TEXT = ("relative: multipliers of the scenario's value (0.8, '120 %'); absolute: "
              "values in the input's documented unit, or a string with units")


def _plain(value) -> float | None:
    """A number given as a plain number or a percent/bare-number string, else None."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    if isinstance(value, str):
        try:
            return to_si(value, "")
        except UnitError:
            return None
    return None


def check_fields(kind: str, given: set[str]) -> str | None:
    """What is missing or superfluous among the numbers given for a distribution, or None."""
    need, optional = KINDS[kind]
    for name in need:
        if name not in given:
            return f"a {kind} distribution needs {', '.join(need)}; {name} is missing"
    for name in _NUMBERS:
        if name in given and name not in need + optional:
            return (f"{name} is not used by a {kind} distribution (it takes "
                    f"{', '.join(need + optional)})")
    return None


def check_distribution(kind: str, values: dict[str, float | None]) -> str | None:
    """What is wrong with a distribution's numbers, or None.

    Parameters
    ----------
    kind : str
        One of :data:`KINDS`.
    values : dict
        ``low``, ``mode``, ``high``, ``mean``, ``sd`` (None when not given), all in one unit.

    Returns
    -------
    str or None
        A one-line message naming the field, or None when the numbers are consistent.
    """
    problem = check_fields(kind, {k for k, x in values.items() if x is not None})
    if problem:
        return problem
    v = {k: x for k, x in values.items() if x is not None}
    for name, x in v.items():
        if not math.isfinite(x):
            return f"{name} must be a finite number"
    lo, mode, hi = v.get("low"), v.get("mode"), v.get("high")
    if lo is not None and hi is not None and lo >= hi:
        return f"low ({fm.plain(lo)}) must be below high ({fm.plain(hi)})"
    if mode is not None and not lo <= mode <= hi:
        return (f"mode ({fm.plain(mode)}) must lie between low ({fm.plain(lo)}) and high "
                f"({fm.plain(hi)})")
    if "sd" in v and v["sd"] <= 0:
        return f"the standard deviation sd ({fm.plain(v['sd'])}) must be greater than zero"
    if kind == "lognormal" and v["mean"] <= 0:
        return f"a lognormal distribution needs a mean above zero (got {fm.plain(v['mean'])})"
    if kind == "normal":
        if lo is not None and lo >= v["mean"] + 6 * v["sd"]:
            return "the truncation bound low lies more than 6 sd above the mean"
        if hi is not None and hi <= v["mean"] - 6 * v["sd"]:
            return "the truncation bound high lies more than 6 sd below the mean"
    return None


def rank_to_pearson(rank):
    """Pearson correlation of two normals that gives a Spearman rank correlation.

    .. math:: \\rho = 2 \\sin(\\pi \\rho_s / 6)

    Parameters
    ----------
    rank : float or array_like
        Spearman rank correlation, −1 … 1. [-]

    Returns
    -------
    float or numpy.ndarray
        Pearson correlation of the underlying normals (Gaussian copula). [-]

    Notes
    -----
    Exact for the bivariate normal; the rank correlation survives any increasing transform
    of each margin, so it is the rank correlation of the sampled inputs too.

    Examples
    --------
    >>> round(rank_to_pearson(0.5), 6)
    0.517638

    References
    ----------
    .. [1] Pearson, K. (1907), *On further methods of determining correlation*, Drapers'
       Company Research Memoirs, Biometric Series IV; the relation is given in Kruskal, W.
       H. (1958), Ordinal measures of association, *JASA* 53(284), 814–861.
    """
    out = 2.0 * np.sin(np.pi * np.asarray(rank, dtype=float) / 6.0)
    return float(out) if out.ndim == 0 else out


def correlation_problem(matrix: np.ndarray) -> str | None:
    """Why a correlation matrix cannot be used (not positive semi-definite), or None."""
    w = np.linalg.eigvalsh(np.asarray(matrix, dtype=float))
    if w.min() < -1e-10:
        return ("the correlations are not consistent with each other: the correlation matrix "
                f"is not positive semi-definite (smallest eigenvalue {fm.plain(w.min())})")
    return None


class TornadoInput(Section):
    """One input of the tornado with its own low and high values."""

    input: str = mfield(..., "", "Parameter path or named group (see the section's notes)")
    low: Number = mfield(..., "", "Low value of the input (see scale)", **_NUMBER_BOUNDS)
    high: Number = mfield(..., "", "High value of the input (see scale)", **_NUMBER_BOUNDS)
    scale: Literal["relative", "absolute"] = mfield(..., "", SCALE_TEXT)
    unit: str | None = mfield(None, "", "Unit of absolute numbers given as plain numbers "
                              "(default: the input's documented unit)",
                              "the input's documented unit")

    @field_validator("low", "high")
    @classmethod
    def _size(cls, value):
        return _number_size(value)

    @model_validator(mode="after")
    def _order(self):
        lo, hi = _plain(self.low), _plain(self.high)
        if lo is not None and hi is not None and lo > hi:
            raise ValueError(f"low ({fm.plain(lo)}) is above high ({fm.plain(hi)})")
        return self


class Distribution(Section):
    """The distribution of one uncertain input of the Monte Carlo simulation."""

    input: str = mfield(..., "", "Parameter path or named group (see the section's notes)")
    kind: Literal["uniform", "triangular", "normal", "lognormal", "pert"] = mfield(
        ..., "", "uniform (low, high), triangular (low, mode, high), pert (low, mode, high; "
        "beta-PERT, λ = 4), normal (mean, sd; optional low/high truncation), lognormal "
        "(mean, sd of the input itself)")
    scale: Literal["relative", "absolute"] = mfield(..., "", SCALE_TEXT)
    low: Number | None = mfield(None, "", "Lowest value (see scale)", _AS_NEEDED,
                                **_NUMBER_BOUNDS)
    mode: Number | None = mfield(None, "", "Most likely value (see scale)", _AS_NEEDED,
                                 **_NUMBER_BOUNDS)
    high: Number | None = mfield(None, "", "Highest value (see scale)", _AS_NEEDED,
                                 **_NUMBER_BOUNDS)
    mean: Number | None = mfield(None, "", "Mean (see scale)", _AS_NEEDED, **_NUMBER_BOUNDS)
    sd: Number | None = mfield(None, "", "Standard deviation, above zero (see scale)",
                               _AS_NEEDED, **_NUMBER_BOUNDS)

    @field_validator("low", "mode", "high", "mean", "sd")
    @classmethod
    def _size(cls, value):
        return _number_size(value)
    unit: str | None = mfield(None, "", "Unit of absolute numbers given as plain numbers "
                              "(default: the input's documented unit)",
                              "the input's documented unit")

    @field_validator("sd")
    @classmethod
    def _sd(cls, value):
        v = _plain(value)
        if v is not None and v <= 0:
            raise ValueError("the standard deviation must be greater than zero "
                             f"(got {fm.plain(v)})")
        return value

    @model_validator(mode="after")
    def _numbers(self):
        given = {k: getattr(self, k) for k in _NUMBERS if getattr(self, k) is not None}
        plain = {k: _plain(v) for k, v in given.items()}
        if any(v is None for v in plain.values()):
            # a quantity string ("4.10 / gal") is converted and checked when the model runs
            problem = check_fields(self.kind, set(given))
        else:
            problem = check_distribution(self.kind, plain)
        if problem:
            raise ValueError(problem)
        return self


class Correlation(Section):
    """A rank correlation between two uncertain inputs (Gaussian copula)."""

    inputs: list[str] = mfield(..., "", "The two inputs, spelled as in distributions",
                               min_length=2, max_length=2)
    rank: Qty("", ge=-1, le=1) = qfield(..., "", "Spearman rank correlation, -1 to 1",
        usual="none: any rank correlation from -1 to 1")

    @field_validator("inputs")
    @classmethod
    def _two(cls, value: list[str]) -> list[str]:
        if value[0] == value[1]:
            raise ValueError("an input cannot be correlated with itself")
        return value


class UncertaintySettings(Section):
    """Sensitivity (tornado), break-even and Monte Carlo settings.

    The correlation matrix of the inputs named in ``correlations`` (rank correlations
    turned into the Pearson correlations of the copula's normals, see
    :func:`rank_to_pearson`) must be positive semi-definite.
    """

    enabled: bool = mfield(True, "", "Run the uncertainty studies", ASSUMPTION)
    draws: int = mfield(10_000, "", "Monte Carlo draws (0: tornado and break-even only; at "
                        "most 1,000,000, see tco.budget)",
                        "derived: at 10,000 draws a probability near 10 % has a standard "
                        "error of √(0.1 × 0.9 / 10,000) = 0.3 percentage points",
                        ge=0, bounds=(0, MAX_DRAWS), usual=(None, 100_000),
                        usual_source="derived: at 100,000 draws a 10 % probability has a "
                        "standard error of √(0.1 × 0.9 / 100,000) = 0.09 percentage points; "
                        "more draws only cost time (fewer are usual: 0 turns the Monte "
                        "Carlo off, a few hundred give a first look)")
    seed: int = mfield(12345, "", "Seed of the random number generator; the same seed "
                       "gives the same draws", ASSUMPTION + ": a fixed seed so that repeated "
                       "runs agree", ge=0, le=INT_CEILING,
                       usual="none: any whole number is as good a seed")
    default_swing: Qty("", gt=0, lt=1) = qfield(
        0.2, "", "Tornado inputs without their own low/high move by this share down and up "
        "('20 %' accepted)", ASSUMPTION,
        usual=(0.05, 0.5),
        usual_source="common practice: ±10–30 % for a first sensitivity study")
    default_inputs: bool = mfield(
        True, "", "Include the standard tornado inputs (fuel and electricity prices, demand "
        "charge, operating days, discount rate, and per truck: purchase price, grant, tax "
        "credit, residual value, maintenance, energy use) besides those in tornado",
        ASSUMPTION)
    tornado: list[TornadoInput] = Field(
        default_factory=list, description="Tornado inputs with their own low and high "
        "values; they replace the default range of the same input [-]",
        json_schema_extra={"unit": "", "source": "none: default inputs and swing"})
    distributions: list[Distribution] = Field(
        default_factory=list, description="Monte Carlo inputs and their distributions [-]",
        json_schema_extra={"unit": "", "source": "user"})
    default_distributions: bool = mfield(
        True, "", "With no distributions given, draw each standard tornado input from a "
        "triangular distribution over ± default_swing around the scenario value",
        ASSUMPTION + ": a first look only; give your own distributions")
    correlations: list[Correlation] = Field(
        default_factory=list, description="Rank correlations between inputs of "
        "distributions; unnamed pairs are independent [-]",
        json_schema_extra={"unit": "", "source": "none: independent inputs"})

    @field_validator("draws")
    @classmethod
    def _draws_budget(cls, value: int) -> int:
        from tco.budget import draws_problem

        problem = draws_problem(value)
        if problem:
            raise ValueError(problem)
        return value

    @field_validator("tornado")
    @classmethod
    def _unique_tornado(cls, value: list[TornadoInput]) -> list[TornadoInput]:
        _no_repeats([t.input for t in value], "tornado")
        return value

    @field_validator("distributions")
    @classmethod
    def _unique_distributions(cls, value: list[Distribution]) -> list[Distribution]:
        _no_repeats([d.input for d in value], "distributions")
        return value

    @field_validator("correlations")
    @classmethod
    def _correlations(cls, value: list[Correlation], info: ValidationInfo):
        dists = info.data.get("distributions")
        if dists is None:  # the distributions failed validation already
            return value
        names = [d.input for d in dists]
        pairs: dict[frozenset, int] = {}
        deferred = False
        for k, c in enumerate(value):
            for name in c.inputs:
                if name not in names:
                    # A name close to a distribution's input means one of the two is
                    # misspelt, and only the model's parameter list can tell which: the
                    # check is left to tco.uncertainty.resolve_distributions, which reports
                    # an unknown distribution input at the distribution ("did you mean")
                    # before it looks at the correlations.
                    if close_distribution(name, names) is not None:
                        deferred = True
                        continue
                    raise ValueError(f"[{k}]: '{name}' has no distribution; correlations "
                                     "join inputs of distributions")
            key = frozenset(c.inputs)
            if key in pairs:
                raise ValueError(f"[{k}]: the pair is already correlated in [{pairs[key]}]")
            pairs[key] = k
        if value and not deferred:
            problem = correlation_problem(pearson_matrix(names, value))
            if problem:
                raise ValueError(problem)
        return value


def close_distribution(name: str, names: list[str]) -> int | None:
    """Index of the distribution input that ``name`` is probably a misspelling of, or None."""
    close = difflib.get_close_matches(name, names, n=1, cutoff=0.6)
    return names.index(close[0]) if close else None


def unmatched_correlation(names: list[str], correlations: list[Correlation]) -> str | None:
    """One line for the first correlation naming an input without a distribution, or None.

    The line names the correlation (``[k]: …``) and the distribution input it is probably
    a misspelling of.
    """
    for k, c in enumerate(correlations):
        for name in c.inputs:
            if name not in names:
                j = close_distribution(name, names)
                hint = (f" (did you mean '{names[j]}', the input of distributions[{j}]?)"
                        if j is not None else "")
                return (f"[{k}]: '{name}' has no distribution; correlations join inputs of "
                        f"distributions{hint}")
    return None


def pearson_matrix(names: list[str], correlations: list[Correlation]) -> np.ndarray:
    """Pearson correlation matrix of the copula's normals, in the order of ``names``."""
    idx = {n: k for k, n in enumerate(names)}
    r = np.eye(len(names))
    for c in correlations:
        a, b = idx[c.inputs[0]], idx[c.inputs[1]]
        r[a, b] = r[b, a] = rank_to_pearson(c.rank)
    return r


def _no_repeats(names: list[str], field: str) -> None:
    seen: dict[str, int] = {}
    for k, n in enumerate(names):
        if n in seen:
            raise ValueError(f"input '{n}' is given twice (items {seen[n]} and {k})")
        seen[n] = k
