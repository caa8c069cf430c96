"""A year of operation: scaling one duty cycle to trips, days and a year.

The energy model gives per-trip figures; this module turns them into the yearly quantities
the cash-flow and emissions models consume (:class:`AnnualOperation`), including the
payload effect (extra trips when a truck carries less per trip) and the depot charging
schedule (hour-of-day shares of the energy drawn from the grid).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class AnnualOperation:
    """Yearly operating quantities of one truck, all SI, for the first year of service.

    Attributes
    ----------
    truck : str
        Truck name as given in the scenario.
    powertrain : str
        ``"diesel"`` or ``"electric"``.
    operating_days : float
        Operating days per year. [1/yr]
    trips : float
        Trips per year, including extra trips caused by lost payload. [1/yr]
    extra_trips : float
        Extra trips per year needed to move the same tonnage as the requested payload. [1/yr]
    distance : float
        Distance driven per year, extra trips included. [m/yr]
    payload_distance : float
        Payload mass times distance per year (tonne-km in SI units). [kg·m/yr]
    diesel_volume : float
        Diesel burned per year. [m³/yr]
    def_volume : float
        Diesel exhaust fluid used per year. [m³/yr]
    battery_energy : float
        Net energy drawn from the battery per year (battery throughput basis). [J/yr]
    grid_energy_depot : float
        Electricity taken from the grid at the depot meter per year (charging losses
        included). [J/yr]
    grid_energy_public : float
        Electricity bought at public/en-route chargers per year, at the meter. [J/yr]
    charging_time_lost : float
        Driver time spent at en-route chargers per year. [s/yr]
    depot_charging_power : float
        Peak depot charging power drawn by this truck. [W]
    charging_profile : numpy.ndarray
        Share of the depot grid energy drawn in each hour of the day (24 values, sum 1). [-]
    trip_duration : float
        Duration of one trip, dwell included. [s]
    battery_capacity : float
        Nominal battery capacity (0 for a diesel truck). [J]
    battery_cycle_life : float
        Full equivalent cycles until the battery reaches its end-of-life state of health. [-]
    payload_per_trip : float
        Payload actually carried per trip, loaded legs averaged by distance. [kg]
    """

    truck: str
    powertrain: str
    operating_days: float
    trips: float
    extra_trips: float
    distance: float
    payload_distance: float
    diesel_volume: float = 0.0
    def_volume: float = 0.0
    battery_energy: float = 0.0
    grid_energy_depot: float = 0.0
    grid_energy_public: float = 0.0
    charging_time_lost: float = 0.0
    depot_charging_power: float = 0.0
    charging_profile: np.ndarray = field(default_factory=lambda: np.full(24, 1 / 24))
    trip_duration: float = 0.0
    battery_capacity: float = 0.0
    battery_cycle_life: float = float("inf")
    payload_per_trip: float = 0.0

    @property
    def grid_energy(self) -> float:
        """All electricity bought per year, depot and public. [J/yr]"""
        return self.grid_energy_depot + self.grid_energy_public
