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
    depot_cost_share : float or None
        Share of the depot's chargers, grid connection, charger maintenance and fixed fee
        borne by this truck, set by a shared-depot schedule (:mod:`tco.depot`); None
        splits them equally among the trucks the depot serves. [-]
    battery_discharge_energy : float
        Energy discharged from the battery per year, regeneration not netted (the
        throughput that wears it). [J/yr]
    calendar_fade : float
        Battery state of health lost per year with time alone. [1/yr]
    eol_state_of_health : float
        Battery state of health at its end of life. [-]
    state_of_health : numpy.ndarray
        Battery state of health at the end of years 0..N (before a replacement at that
        year's end); empty for a diesel truck or an operation made without ageing. [-]
    public_energy_by_year, enroute_time_by_year, depot_energy_by_year : numpy.ndarray
        Public (en-route) electricity at the meter, driver time at en-route chargers and
        depot electricity at the meter in each year 1..N, as the battery ages (:mod:`tco.battery`);
        empty: every year as the first. [J/yr], [s/yr], [J/yr]
    battery_replacement_years : tuple of int
        Years at whose end the battery is replaced because the day would no longer fit
        (replacement rule ``range``). [-]
    depot_peak_contribution : float or None
        This truck's mean power in the depot's peak demand interval, set by a
        shared-depot schedule; the demand charge is billed on it. None: the scenario's
        own rule (all served trucks charging at once, capped by the chargers). [W]
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
    depot_cost_share: float | None = None
    depot_peak_contribution: float | None = None
    battery_discharge_energy: float = 0.0
    calendar_fade: float = 0.0
    eol_state_of_health: float = 0.8
    state_of_health: np.ndarray = field(default_factory=lambda: np.zeros(0))
    public_energy_by_year: np.ndarray = field(default_factory=lambda: np.zeros(0))
    enroute_time_by_year: np.ndarray = field(default_factory=lambda: np.zeros(0))
    depot_energy_by_year: np.ndarray = field(default_factory=lambda: np.zeros(0))
    battery_replacement_years: tuple = ()

    @property
    def grid_energy(self) -> float:
        """All electricity bought per year, depot and public. [J/yr]"""
        return self.grid_energy_depot + self.grid_energy_public


def payload_capacity(curb_mass, gross_mass_limit, allowance=0.0):
    """Payload a truck may legally carry.

    ``capacity = gross_mass_limit + allowance − curb_mass`` (never below zero).

    Parameters
    ----------
    curb_mass : float or array
        Empty mass of the combination ready to drive. [kg]
    gross_mass_limit : float or array
        Legal gross combination weight. [kg]
    allowance : float or array
        Extra gross weight granted to zero-emission trucks where the law allows it. [kg]

    Returns
    -------
    float or array
        Payload capacity. [kg]
    """
    return np.maximum(np.asarray(gross_mass_limit) + allowance - curb_mass, 0.0)


def extra_trips(trips, requested_payload_distance, carried_payload_distance):
    """Extra trips needed to move the requested tonnage when less fits per trip.

    ``extra = trips · (requested / carried − 1)``, zero when everything fits.

    Parameters
    ----------
    trips : float
        Trips per year with full payload. [1/yr]
    requested_payload_distance, carried_payload_distance : float
        Payload × distance of one trip as requested and as legally carried. [kg·m]

    Returns
    -------
    float
        Extra trips per year; ``inf`` when nothing can be carried but something must be.
        [1/yr]
    """
    if requested_payload_distance <= 0:
        return 0.0
    if carried_payload_distance <= 0:
        return float("inf")
    return max(trips * (requested_payload_distance / carried_payload_distance - 1.0), 0.0)


def charging_profile(energy, power, window_start_h, window_end_h):
    """Hour-of-day shares of depot charging that starts when the window opens.

    The truck charges at ``power`` from ``window_start_h`` until ``energy`` is delivered
    (wrapping past midnight). If the window is too short the remainder is spread over the
    window's last hour, and the shortfall is for the caller to report.

    Parameters
    ----------
    energy : float
        Energy to draw from the grid per day. [J]
    power : float
        Charging power at the meter. [W]
    window_start_h, window_end_h : int
        Hours of day (0–23) when the window opens and closes (end exclusive; a window
        from 20 to 6 spans the night).

    Returns
    -------
    numpy.ndarray
        24 shares summing to 1 (all zeros if ``energy`` is 0). [-]
    """
    shares = np.zeros(24)
    if energy <= 0:
        return shares
    hours = (window_end_h - window_start_h) % 24 or 24
    left = energy
    per_hour = power * 3600.0
    for k in range(hours):
        h = (window_start_h + k) % 24
        take = min(left, per_hour) if k < hours - 1 else left
        shares[h] += take
        left -= take
        if left <= 0:
            break
    return shares / energy
