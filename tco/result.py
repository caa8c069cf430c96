"""The Result of evaluating a scenario: plain data and pandas objects, nothing else.

Writers (``tco.report``) only render a Result; nothing here computes.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from tco.operation import AnnualOperation


@dataclass
class TruckResult:
    """Energy and feasibility of one truck on the duty cycle.

    Attributes
    ----------
    name, powertrain : str
        As in the scenario.
    trace : pandas.DataFrame
        One operating day, sample by sample (SI): time, speed, grade, elevation, distance,
        leg, wheel_power [W], and either engine_power [W] and fuel_rate [m³/s] (diesel) or
        battery_power [W] and soc [-] (electric).
    summary : dict
        Per-trip and per-day figures, SI (keys documented in docs/summary-schema.md).
    feasibility : dict
        Verdicts with reasons (electric: new and end-of-life battery, charger power,
        en-route charging; both: power limit, payload).
    warnings : list of str
        Plain-language warnings.
    operation : AnnualOperation
        The yearly quantities passed to the cash-flow and emissions models.
    """

    name: str
    powertrain: str
    trace: pd.DataFrame
    summary: dict[str, Any]
    feasibility: dict[str, Any]
    warnings: list[str]
    operation: AnnualOperation


@dataclass
class Result:
    """Everything a scenario evaluation produced.

    Attributes
    ----------
    loaded : tco.scenario.LoadedScenario
        The validated scenario with its file and fingerprint.
    route : pandas.DataFrame
        The duty cycle of one trip (see :mod:`tco.dutycycle`).
    route_summary : dict
        Distance, duration, climb… of one trip (SI).
    trucks : dict of str to TruckResult
        Per truck, in scenario order.
    cashflow : tco.cashflow.CashflowResult
        Yearly cash flows and finance metrics.
    emissions : object
        Emissions accounting result (tco.emissions).
    uncertainty : object or None
        Sensitivity, break-even and Monte Carlo results, when run.
    assumptions : list of dict
        Every input with value, unit and source (user or cited default).
    warnings : list of str
        Scenario-wide warnings.
    created : str
        ISO 8601 time of the evaluation (UTC).
    timings : dict
        Seconds per step.
    depot : dict or None
        The depot's charging rule, charger power, trucks sharing it and, per electric
        truck, the depot cost it carries and its demand charge under the chosen rule and
        the other one (see :func:`tco.pipeline.depot_summary`); None without depot charging.
    """

    loaded: Any
    route: pd.DataFrame
    route_summary: dict[str, Any]
    trucks: dict[str, TruckResult]
    cashflow: Any
    emissions: Any
    uncertainty: Any
    assumptions: list[dict]
    warnings: list[str]
    created: str
    timings: dict[str, float] = field(default_factory=dict)
    depot: dict | None = None

    @property
    def scenario(self):
        """The validated scenario model."""
        return self.loaded.scenario
