"""Traction battery ageing: state of health year by year, and what an aged battery costs.

State of health (SoH, usable capacity as a share of the new battery's) falls linearly with
throughput and with time:

.. math::

    \\mathrm{SoH}(t) = 1 - (1 - \\mathrm{SoH}_{eol})\\,\\frac{\\mathrm{FEC}(t)}{N_{cycle}}
                     - f_{cal}\\,t

with FEC the full equivalent cycles since the battery was fitted, counted on the energy
*discharged* from the battery (regeneration is not netted: a kWh regenerated on a descent
and discharged again wears the battery like any other), ``N_cycle`` the cycles to the end-of-life
state of health ``SoH_eol`` and ``f_cal`` the calendar fade per year. The battery reaches
its end of life when SoH = SoH_eol; one "life" is used at the rate

.. math::

    \\lambda = \\frac{\\mathrm{FEC}_{yr}}{N_{cycle}}
              + \\frac{f_{cal}}{1 - \\mathrm{SoH}_{eol}} \\quad [1/yr].

A linear rule in both terms is a simplification: measured calendar fade slows with time
(closer to √t) and cycle fade depends on depth, C-rate and temperature. The linear cycle
term is how warranties state cycle life (cycles to a stated SoH, common practice); the
calendar fade default (1 % a year) is from memory (lithium-ion traction cells at moderate
temperature and mid state of charge lose roughly 1–2 % of capacity a year).

Each year is evaluated month by month (SoH at each month's middle), so a year in which the
battery falls short for only its last months is costed for those months only.

Written by hand: no battery-ageing library fits a yearly cost model (PyBaMM and similar
simulate cells, not fleet years).

References
----------
.. [1] Common practice: traction battery warranties state a cycle life to a stated state of
   health (typically 70–80 %).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

MONTHS = 12


def lives_per_year(fec_per_year, cycle_life, eol_soh, calendar_fade):
    """Share of a battery's life used per year by cycling and calendar ageing.

    .. math:: \\lambda = \\mathrm{FEC}_{yr}/N_{cycle} + f_{cal}/(1 - \\mathrm{SoH}_{eol})

    Parameters
    ----------
    fec_per_year : float or array
        Full equivalent cycles per year (discharged energy ÷ nominal capacity). [1/yr]
    cycle_life : float or array
        Full equivalent cycles to the end-of-life state of health (inf: no cycle wear). [-]
    eol_soh : float
        State of health at the end of life, in (0, 1). [-]
    calendar_fade : float or array
        State of health lost per year with time alone. [1/yr]

    Returns
    -------
    float or array
        Lives used per year. [1/yr]

    Examples
    --------
    300 cycles a year of a 3,000-cycle battery and 1 % a year calendar fade to 80 %:
    0.1 + 0.01/0.2 = 0.15 lives a year (end of life after 6.7 years).

    >>> round(lives_per_year(300, 3000, 0.8, 0.01), 12)
    0.15
    """
    cyc = np.where(np.isfinite(cycle_life), np.asarray(fec_per_year, float)
                   / np.asarray(cycle_life, float), 0.0)
    out = cyc + np.asarray(calendar_fade, float) / (1.0 - eol_soh)
    return float(out) if np.ndim(out) == 0 else out


def replacement_years_by_life(lam: float, years: int) -> list[int]:
    """Years (1..N) at whose end a battery replaced at end of life is replaced.

    A replacement falls in year y when the summed lives pass a whole number during it:
    ``floor(λy) > floor(λ(y−1))`` (the rule of the cash-flow model).
    """
    return [y for y in range(1, years + 1)
            if math.floor(y * lam + 1e-9) > math.floor((y - 1) * lam + 1e-9)]


def state_of_health(t, lam: float, eol_soh: float, fitted) -> np.ndarray:
    """State of health at times ``t`` of a battery refitted at the times ``fitted``.

    Parameters
    ----------
    t : array
        Years since the truck entered service. [yr]
    lam : float
        Lives used per year (:func:`lives_per_year`). [1/yr]
    eol_soh : float
        State of health at the end of life. [-]
    fitted : sequence of float
        Times a new battery was fitted (0 = the first). [yr]

    Returns
    -------
    ndarray
        State of health, never below 0. [-]
    """
    t = np.asarray(t, dtype=float)
    fit = np.sort(np.asarray(list(fitted), dtype=float))
    last = fit[np.maximum(np.searchsorted(fit, t, side="right") - 1, 0)]
    return np.maximum(1.0 - (1.0 - eol_soh) * lam * (t - last), 0.0)


@dataclass(frozen=True)
class Ageing:
    """A battery's state of health and its consequences, year by year (years 1..N).

    Attributes
    ----------
    lives_per_year : float
        Lives used per year. [1/yr]
    soh_end : ndarray
        State of health at the end of years 0..N, before a replacement at that year's
        end. [-]
    soh_low : ndarray
        Lowest state of health in each of years 1..N. [-]
    short_months : ndarray
        Months of each year 1..N in which the day needs more than the battery gives. [-]
    enroute_energy : ndarray
        En-route energy per operating day into the battery, averaged over each year. [J]
    enroute_time : ndarray
        Driver time per operating day at en-route chargers, averaged over each year. [s]
    replacements : list of int
        Years at whose end the battery is replaced. [-]
    first_short_year : int or None
        First year in which the day no longer fits the battery alone. [-]
    feasible : bool
        False when a year falls short and no en-route charging is given. [-]
    """

    lives_per_year: float
    soh_end: np.ndarray
    soh_low: np.ndarray
    short_months: np.ndarray
    enroute_energy: np.ndarray
    enroute_time: np.ndarray
    replacements: list
    first_short_year: int | None
    feasible: bool


def age(years: int, lam: float, eol_soh: float, need, available_new, enroute_power,
        enroute_efficiency, enroute_overhead, policy: str = "never",
        policy_year: int | None = None, time_of=None) -> Ageing:
    """Year-by-year state of health, the years the day falls short, and what it costs.

    The day needs ``need`` from the battery above its reserve; the battery gives
    ``available_new × SoH``. When it gives less, the difference is charged en route (if a
    charger power is given), for the months it falls short, or the battery is replaced.

    Parameters
    ----------
    years : int
        Analysis period N. [yr]
    lam : float
        Lives used per year (:func:`lives_per_year`). [1/yr]
    eol_soh : float
        State of health at the end of life. [-]
    need : float
        Deepest drawdown of the operating day. [J]
    available_new : float
        Energy above the reserve with the new battery. [J]
    enroute_power : float
        En-route charger power (0: none). [W]
    enroute_efficiency : float
        Grid-to-battery efficiency en route (time is energy ÷ (power × efficiency)). [-]
    enroute_overhead : float
        Time lost per en-route stop besides charging (one stop a day). [s]
    policy : {"never", "year", "cycles", "range"}
        Battery replacement: never; once at the end of ``policy_year``; at end of life
        (``cycles``: whenever the summed lives pass a whole number, the cash-flow rule); or
        ``range``: at the end of the year before the first year the day would fall short.
    policy_year : int, optional
        The year of a ``year`` replacement.
    time_of : callable, optional
        ``time_of(deficit, soh)``: driver time [s] a day's en-route charging of ``deficit``
        [J] costs with the battery at state of health ``soh`` (e.g. with a charging-power
        curve and breaks, :func:`tco.energy.driver_time_lost`). Default: the flat rule,
        deficit ÷ (power × efficiency) plus the overhead of one stop.

    Returns
    -------
    Ageing
    """
    from tco.electric import enroute_charging_time

    fitted = [0.0]
    if policy == "year" and policy_year is not None and policy_year <= years:
        fitted.append(float(policy_year))
    elif policy == "cycles":
        fitted += [float(y) for y in replacement_years_by_life(lam, years)]

    def month_deficit(fit):
        t = (np.arange(years * MONTHS) + 0.5) / MONTHS
        soh = state_of_health(t, lam, eol_soh, fit)
        return soh, np.maximum(need - available_new * soh, 0.0)

    soh, deficit = month_deficit(fitted)
    if policy == "range":  # replace before each year that would fall short, if that helps
        y = 1
        while y <= years:
            short = deficit.reshape(years, MONTHS)[y - 1] > 0
            if short.any() and (y - 1) > fitted[-1] and available_new >= need:
                fitted.append(float(y - 1))
                soh, deficit = month_deficit(fitted)
            y += 1
    by_year = deficit.reshape(years, MONTHS)
    short_months = (by_year > 0).sum(axis=1)
    has_enroute = enroute_power > 0
    time = np.zeros_like(by_year)
    if has_enroute and time_of is None:
        charge = np.asarray(enroute_charging_time(by_year.ravel(), enroute_power,
                                                  enroute_efficiency)).reshape(by_year.shape)
        time = np.where(by_year > 0, charge + enroute_overhead, 0.0)
    elif has_enroute:
        flat_soh = soh.reshape(years, MONTHS)
        for y, m in zip(*np.nonzero(by_year > 0)):
            time[y, m] = time_of(float(by_year[y, m]), float(flat_soh[y, m]))
    first = int(np.argmax(short_months > 0)) + 1 if short_months.any() else None
    ends = np.arange(years + 1, dtype=float)
    soh_end = state_of_health(ends - 1e-9, lam, eol_soh, fitted)
    soh_end[0] = 1.0
    return Ageing(
        lives_per_year=float(lam), soh_end=soh_end,
        soh_low=soh.reshape(years, MONTHS).min(axis=1),
        short_months=short_months,
        enroute_energy=by_year.mean(axis=1) if has_enroute else np.zeros(years),
        enroute_time=time.mean(axis=1), replacements=[int(f) for f in fitted[1:]],
        first_short_year=first, feasible=has_enroute or first is None)
