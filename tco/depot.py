"""Shared depot charging: how many chargers a group of trucks needs, the depot's peak
power, and a fair share of the depot's costs for each truck.

Each truck arrives at the depot at a clock time, leaves at another (the stay may run past
midnight) and needs an energy at the meter every day. Two charging rules are modelled:

``first_come``
    Unmanaged charging. A truck plugs in when it arrives if a charger is free, otherwise
    it waits; a freed charger goes to the waiting truck that leaves first (earliest
    deadline first). A plugged truck charges at the charger's full power until it has its
    energy, then is moved off the charger (chargers are shared by rotation). The number of
    chargers is the smallest that gets every truck its energy before it leaves.
``spread``
    Managed charging. Each truck stays plugged for its whole stay and draws the constant
    power that delivers its energy just in time (capped at the charger's power). One
    charger per truck present at the same time; the lowest flat power per truck.

Days repeat: the schedule is simulated over three identical days and the middle day is
reported, so a stay that runs past midnight meets the next evening's arrivals exactly as
it would in service.

The demand charge is billed on the highest mean power over a fixed clock interval
(15 minutes by default: common practice for commercial tariffs; use the tariff's own).

Fair shares (our own rule, stated in the report): charger hardware, installation,
grid connection, charger maintenance and the fixed fee are shared by **charger
occupancy** (the time each truck holds a charger); the demand charge by each truck's
**contribution to the depot's coincident peak** (its mean power in the peak interval),
since that peak is what the charge bills.

Written by hand: the rules above are a small discrete-event simulation; no scheduling
library models non-preemptive charger rotation with departure deadlines.
"""
from __future__ import annotations

import heapq
import math
from dataclasses import dataclass, field

import numpy as np

DAY = 86400.0
DEFAULT_SLOT = 60.0          # [s] simulation step
DEFAULT_DEMAND_INTERVAL = 900.0  # [s] common practice: 15-minute demand intervals
RULES = ("first_come", "spread")
N_DAYS = 3  # identical days simulated; the middle one (index 1) is the steady state
#: Days simulated under ``first_come`` while the queue has not settled: a day that starts
#: with trucks still plugged in from the day before can differ from the first day, so
#: the simulation is lengthened until two consecutive days draw the same (see
#: :func:`_first_come_steady`).
SETTLE_DAYS = (3, 6, 12, 24, 48)


@dataclass(frozen=True)
class DepotSchedule:
    """The depot's daily charging schedule in steady state (a settled simulated day).

    Attributes
    ----------
    rule : str
        ``first_come`` or ``spread``.
    chargers : int
        Chargers needed. [-]
    charger_power : float
        Power of one charger at the meter. [W]
    peak_power : float
        Highest mean depot power over one demand interval. [W]
    peak_interval : int
        Index of that interval in the day (0 = the one starting at midnight). [-]
    power : numpy.ndarray
        Depot power in each slot of the day. [W]
    slot : float
        Slot length. [s]
    truck_power : numpy.ndarray
        (trucks, slots) power drawn by each truck. [W]
    energy : numpy.ndarray
        Energy delivered to each truck per day. [J]
    shortfall : numpy.ndarray
        Energy each truck still lacked when it left. [J]
    occupancy : numpy.ndarray
        Time each truck held a charger per day. [s]
    peak_contribution : numpy.ndarray
        Each truck's mean power in the peak interval (averaged over every interval that
        reaches the peak); sums to ``peak_power``. [W]
    cost_share : numpy.ndarray
        Share of the depot's fixed costs borne by each truck (occupancy share). [-]
    demand_share : numpy.ndarray
        Share of the demand charge borne by each truck (peak-contribution share). [-]
    profile : numpy.ndarray
        (trucks, 24) share of each truck's energy drawn in each clock hour. [-]
    arrive, depart : numpy.ndarray
        Clock times of each truck's stay, as given. [s after midnight]
    demand_interval : float
        Interval the peak is averaged over. [s]
    """

    rule: str
    chargers: int
    charger_power: float
    peak_power: float
    peak_interval: int
    power: np.ndarray
    slot: float
    truck_power: np.ndarray
    energy: np.ndarray
    shortfall: np.ndarray
    occupancy: np.ndarray
    peak_contribution: np.ndarray
    cost_share: np.ndarray
    demand_share: np.ndarray
    profile: np.ndarray
    arrive: np.ndarray = field(default_factory=lambda: np.zeros(0))
    depart: np.ndarray = field(default_factory=lambda: np.zeros(0))
    demand_interval: float = DEFAULT_DEMAND_INTERVAL

    @property
    def feasible(self) -> np.ndarray:
        """True for each truck that leaves with all its energy. [-]"""
        return self.shortfall <= 1e-6 * np.maximum(self.energy + self.shortfall, 1.0)


def _check(arrive, depart, energy, charger_power, slot, demand_interval):
    arrive = np.atleast_1d(np.asarray(arrive, dtype=float))
    depart = np.atleast_1d(np.asarray(depart, dtype=float))
    energy = np.atleast_1d(np.asarray(energy, dtype=float))
    if not (arrive.shape == depart.shape == energy.shape) or arrive.ndim != 1:
        raise ValueError("arrive, depart and energy must be 1-D arrays of one length")
    if np.any(~np.isfinite(arrive)) or np.any((arrive < 0) | (arrive >= DAY)):
        raise ValueError("arrival times must be clock times in [0, 86400) s")
    if np.any(~np.isfinite(depart)) or np.any((depart < 0) | (depart >= DAY)):
        raise ValueError("departure times must be clock times in [0, 86400) s")
    if np.any(~np.isfinite(energy)) or np.any(energy < 0):
        raise ValueError("energy must be finite and >= 0")
    if not (charger_power > 0 and math.isfinite(charger_power)):
        raise ValueError("charger power must be > 0")
    if not (slot > 0 and DAY % slot == 0):
        raise ValueError("the slot must divide a day")
    if not (demand_interval >= slot and demand_interval % slot == 0
            and DAY % demand_interval == 0):
        raise ValueError("the demand interval must be a multiple of the slot and divide a day")
    return arrive, depart, energy


def _stays(arrive, depart, slot):
    """First slot and number of slots of each stay (departure after arrival, ≤ a day)."""
    a = np.round(arrive / slot).astype(np.int64)
    stay = np.round(((depart - arrive) % DAY) / slot).astype(np.int64)
    stay = np.where(stay == 0, int(DAY / slot), stay)  # same clock time: a whole day
    return a, stay


def _first_come(a, stay, need, k, per_slot, n_days, day_slots):
    """Simulate unmanaged charging with ``k`` chargers; energy per truck per slot.

    Event-driven: time jumps from one arrival or charge completion to the next. At each
    event, chargers freed now go to the waiting trucks that leave first; a truck whose
    departure comes before its charge is done leaves with a shortfall.
    """
    n = len(a)
    width = n_days * day_slots
    drawn = np.zeros((n, width))
    short = np.zeros((n_days, n))
    arrivals = sorted((d * day_slots + int(a[i]), d, i) for d in range(n_days)
                      for i in range(n) if need[i] > 0)
    waiting: list[tuple[int, int, int, int]] = []   # (deadline, order, day, truck)
    busy: list[int] = []                            # finish slots of plugged trucks
    free = int(k)
    nxt = 0
    while nxt < len(arrivals) or waiting:
        t = arrivals[nxt][0] if nxt < len(arrivals) else None
        if busy and (t is None or busy[0] < t):
            t = busy[0]
        if t is None:  # trucks wait but no charger will ever free up (k = 0)
            for _, _, d, i in waiting:
                short[d, i] += need[i]
            break
        while busy and busy[0] <= t:
            heapq.heappop(busy)
            free += 1
        while nxt < len(arrivals) and arrivals[nxt][0] <= t:
            s0, d, i = arrivals[nxt]
            heapq.heappush(waiting, (s0 + int(stay[i]), nxt, d, i))
            nxt += 1
        while waiting and waiting[0][0] <= t:  # left before a charger came free
            _, _, d, i = heapq.heappop(waiting)
            short[d, i] += need[i]
        while waiting and free > 0:
            deadline, _, d, i = heapq.heappop(waiting)
            full = int(need[i] // per_slot)
            rest = need[i] - full * per_slot
            if rest <= 1e-9 * per_slot:
                rest = 0.0
            m = full + (1 if rest > 0 else 0)
            end = min(t + m, deadline)
            lo, hi = t, min(end, width)
            if t + m <= deadline:
                if full:
                    drawn[i, lo:min(t + full, width)] += per_slot
                if rest > 0 and t + full < width:
                    drawn[i, t + full] += rest
            else:  # unplugged at departure
                drawn[i, lo:hi] += per_slot
                short[d, i] += need[i] - (deadline - t) * per_slot
            heapq.heappush(busy, end)
            free -= 1
    return drawn, short


def _first_come_steady(a, stay, need, k, per_slot, day_slots):
    """Unmanaged charging on a repeating day, once the queue has settled.

    The first simulated day starts with no truck plugged in; later days start with the
    stays that run past midnight. The queue can take more than one day to settle (a truck
    served a minute later each day until the pattern repeats), so days are simulated
    until two consecutive ones draw the same power in every slot and leave the same
    shortfalls, and the earlier of the two is returned. Energy is then conserved: what a
    day's clock window draws equals what that day's arrivals take.

    Returns
    -------
    day : numpy.ndarray
        (trucks, day_slots) energy drawn in each slot of the settled day, past-midnight
        draws of the day before included. [J]
    shortfall : numpy.ndarray
        Energy each truck leaves without on the settled day. [J]
    """
    tol = 1e-9 * per_slot  # the rounding bound of _first_come
    for n_days in SETTLE_DAYS:
        drawn, short = _first_come(a, stay, need, k, per_slot, n_days, day_slots)
        r = n_days - 2
        day = drawn[:, r * day_slots:(r + 1) * day_slots]
        nxt = drawn[:, (r + 1) * day_slots:(r + 2) * day_slots]
        if (np.allclose(day, nxt, rtol=0.0, atol=tol)
                and np.allclose(short[r], short[r + 1], rtol=0.0, atol=tol)):
            break
    # not settled after the longest run (a queue that cycles): the last full day is the
    # best estimate of a long run of days
    return day, short[r]


def _spread(a, stay, need, per_slot, n_days, day_slots):
    """Managed charging: each truck draws need/stay in every slot of its stay."""
    n = len(a)
    drawn = np.zeros((n, n_days * day_slots))
    short = np.zeros((n_days, n))
    rate = np.minimum(need / stay, per_slot)
    for d in range(n_days):
        for i in range(n):
            s0 = d * day_slots + int(a[i])
            s1 = min(s0 + int(stay[i]), drawn.shape[1])
            drawn[i, s0:s1] += rate[i]
            short[d, i] = max(need[i] - rate[i] * stay[i], 0.0)
    return drawn, short


def schedule(arrive, depart, energy, charger_power, rule: str = "first_come",
             chargers: int | None = None, slot: float = DEFAULT_SLOT,
             demand_interval: float = DEFAULT_DEMAND_INTERVAL) -> DepotSchedule:
    """Charging schedule of trucks sharing a depot, and each truck's fair share.

    Parameters
    ----------
    arrive, depart : array_like
        Clock time each truck arrives at and leaves the depot, seconds after midnight in
        [0, 86400); a departure at or before the arrival is the next day. [s]
    energy : array_like
        Energy each truck must take at the meter per day. [J]
    charger_power : float
        Power of one charger at the meter. [W]
    rule : {"first_come", "spread"}
        Charging rule (see the module notes).
    chargers : int, optional
        Chargers available. Default: the fewest that serve every truck in full (or, if no
        number does, the number that serves the most).
    slot : float
        Simulation step; must divide a day. [s]
    demand_interval : float
        Interval the demand charge averages power over; a multiple of ``slot``. [s]

    Returns
    -------
    DepotSchedule

    Raises
    ------
    ValueError
        Times outside a day, negative energy, a bad rule or slot.

    Examples
    --------
    Three trucks back at 18:00, 19:00 and 20:00, all leaving at 06:00, needing 300, 500 and
    500 kWh from 100 kW chargers: one charger cannot do it (the last truck would finish at
    07:00), two can.

    >>> from tco.units import J_PER_KWH
    >>> h = 3600.0
    >>> s = schedule([18 * h, 19 * h, 20 * h], [6 * h] * 3,
    ...              np.array([300, 500, 500]) * J_PER_KWH, 100e3)
    >>> s.chargers, round(s.peak_power / 1e3)
    (2, 200)
    """
    if rule not in RULES:
        raise ValueError(f"unknown charging rule '{rule}' (use {' or '.join(RULES)})")
    arrive, depart, energy = _check(arrive, depart, energy, charger_power, slot,
                                    demand_interval)
    n = len(arrive)
    day_slots = int(DAY / slot)
    n_days = N_DAYS
    per_slot = charger_power * slot
    a, stay = _stays(arrive, depart, slot)
    a = a % day_slots

    if n == 0:
        z = np.zeros(0)
        return DepotSchedule(rule, 0, charger_power, 0.0, 0, np.zeros(day_slots), slot,
                             np.zeros((0, day_slots)), z, z, z, z, z, z, np.zeros((0, 24)),
                             z, z, float(demand_interval))

    if rule == "spread":
        drawn, short = _spread(a, stay, energy, per_slot, n_days, day_slots)
        present = _present(a, stay, day_slots)
        k_needed = int(present[energy > 0].sum(axis=0).max(initial=0))
        k = k_needed if chargers is None else int(chargers)
        if chargers is not None and k < k_needed:
            raise ValueError(f"the spread rule needs {k_needed} chargers (one per truck "
                             f"present); {k} given")
        # periodic from the first day: the middle day is the steady state
        day = drawn[:, day_slots:2 * day_slots]  # past-midnight draws included
        shortfall = short[1]
    else:
        if chargers is None:
            k = _fewest(a, stay, energy, per_slot, day_slots)
        else:
            k = int(chargers)
        if k < 0:
            raise ValueError("chargers must be >= 0")
        day, shortfall = _first_come_steady(a, stay, energy, k, per_slot, day_slots)
    truck_power = day / slot
    power = truck_power.sum(axis=0)
    per_int = int(demand_interval / slot)
    means = power.reshape(-1, per_int).mean(axis=1)
    j = int(np.argmax(means))
    peak = float(means[j])
    # Every interval that reaches the peak bills it: contributions are averaged over them,
    # so a tie (one charger busy all night) does not pin the charge on whoever came first.
    ties = np.flatnonzero(means >= peak * (1.0 - 1e-9)) if peak > 0 else np.array([j])
    by_int = truck_power.reshape(n, -1, per_int).mean(axis=2)
    contrib = by_int[:, ties].mean(axis=1)
    # spread: a truck holds a charger for its whole stay; first come: from plug-in to the
    # end of its charge
    occupied = present if rule == "spread" else day > 0
    occupancy = occupied.sum(axis=1) * slot
    delivered = day.sum(axis=1)
    cost_share = _shares(occupancy)
    demand_share = _shares(contrib)
    hourly = day.reshape(n, 24, -1).sum(axis=2)
    with np.errstate(invalid="ignore", divide="ignore"):
        profile = np.where(delivered[:, None] > 0, hourly / delivered[:, None], 0.0)
    return DepotSchedule(rule, int(k), float(charger_power), peak, j, power, float(slot),
                         truck_power, delivered, shortfall, occupancy, contrib, cost_share,
                         demand_share, profile, arrive, depart, float(demand_interval))


def _present(a, stay, day_slots) -> np.ndarray:
    """(trucks, slots) True while each truck is at the depot on a repeating day."""
    n = len(a)
    out = np.zeros((n, day_slots), dtype=bool)
    for i in range(n):
        idx = (int(a[i]) + np.arange(int(stay[i]))) % day_slots
        out[i, idx] = True
    return out


def _shares(x: np.ndarray) -> np.ndarray:
    total = float(np.sum(x))
    if total <= 0:
        return np.full(len(x), 1.0 / len(x)) if len(x) else np.zeros(0)
    return np.asarray(x, dtype=float) / total


def _fewest(a, stay, need, per_slot, day_slots) -> int:
    """Fewest chargers that serve every truck in full under ``first_come``.

    Bisection between a lower bound (energy over a day of one charger) and one charger per
    truck; more chargers never serve a truck later under this rule, so feasibility is
    monotone in the number of chargers. If even one charger per truck leaves a shortfall
    (a stay too short for the energy), the count that serves every other truck is
    returned and the shortfall is reported.
    """
    users = int(np.count_nonzero(need > 0))
    if users == 0:
        return 0

    def short_total(k):
        return float(_first_come_steady(a, stay, need, k, per_slot, day_slots)[1].sum())

    best = short_total(users)
    lo = max(1, math.ceil(float(need.sum()) / (per_slot * day_slots) - 1e-9))
    hi = users
    while lo < hi:
        mid = (lo + hi) // 2
        if short_total(mid) <= best + 1e-9 * per_slot:  # the rounding bound of _first_come
            hi = mid
        else:
            lo = mid + 1
    return hi


# --------------------------------------------------------------------------- scenarios
#: The scenario's trade words for the two rules (``[depot] charging``).
RULE_OF_CHARGING = {"managed": "spread", "unmanaged": "first_come"}
CHARGING_OF_RULE = {v: k for k, v in RULE_OF_CHARGING.items()}


def rule_name(rule: str) -> str:
    """The schedule rule (``spread``/``first_come``) of a rule or trade word. [-]"""
    rule = RULE_OF_CHARGING.get(rule, rule)
    if rule not in RULES:
        raise ValueError(f"unknown charging rule '{rule}' (use managed or unmanaged)")
    return rule


def other_rule(rule: str) -> str:
    """The other of the two rules, as a schedule rule. [-]"""
    return "first_come" if rule_name(rule) == "spread" else "spread"


@dataclass(frozen=True)
class ScenarioDepot:
    """The depot schedule of one scenario's trucks, and where each truck sits in it.

    Attributes
    ----------
    schedule : DepotSchedule
        The schedule of every truck sharing the depot.
    members : list of int
        For each truck of the schedule, the index of the scenario truck it is (trucks the
        scenario does not describe, up to ``depot.trucks_served``, repeat the scenario's
        own in turn).
    row : dict of int to int
        Scenario truck index -> its own row in the schedule.
    """

    schedule: DepotSchedule
    members: list
    row: dict


def scenario_schedule(depot, operations, rule: str | None = None) -> ScenarioDepot | None:
    """Schedule the scenario's electric trucks at its depot, as a fleet would.

    Each electric truck that takes energy at the depot arrives when the charging window
    opens (``depot.charging_start_hour``) and leaves when it closes, needing its daily
    depot energy at the meter. When ``depot.trucks_served`` names more trucks than the
    scenario describes, the others are taken to charge like the scenario's own (repeated
    in turn), so the depot's peak and each truck's part of it follow from the same rule.

    Parameters
    ----------
    depot : tco.scenario.Depot
        The depot section (charger count and power, window, rule, trucks served).
    operations : list of tco.operation.AnnualOperation
        The scenario's trucks, in order.
    rule : str, optional
        ``managed``/``unmanaged`` (or ``spread``/``first_come``); default the depot's own.

    Returns
    -------
    ScenarioDepot or None
        None when no truck charges at the depot.

    Raises
    ------
    ValueError
        Managed charging with fewer chargers than trucks plugged in at once.
    """
    rule = rule_name(rule or depot.charging)
    users = [i for i, op in enumerate(operations)
             if op.powertrain == "electric" and op.grid_energy_depot > 0]
    if not users:
        return None
    n = max(int(depot.trucks_served or len(users)), len(users))
    members = users + [users[j % len(users)] for j in range(n - len(users))]
    start = depot.charging_start_hour * 3600.0
    end = depot.charging_end_hour * 3600.0
    stay = (end - start) % DAY or DAY
    need = np.array([operations[i].grid_energy_depot / operations[i].operating_days
                     for i in members])
    given = depot.chargers > 0 and depot.charger_power > 0
    power = depot.charger_power if given else float(need.max() / stay)
    sched = schedule(np.full(n, start), np.full(n, end), need, power, rule=rule,
                     chargers=depot.chargers if given else None)
    return ScenarioDepot(sched, members, {i: members.index(i) for i in users})


def scheduled_operation(op, sched: DepotSchedule, k: int, cost_share: bool):
    """One truck's operation with its row ``k`` of a depot schedule.

    The truck gets its hour-of-day charging profile, its mean power in the depot's peak
    interval (``depot_charging_power`` and ``depot_peak_contribution``, on which the
    demand charge is billed) and, with ``cost_share``, its occupancy share of the depot's
    fixed costs (otherwise they are split equally among the trucks served). The one rule
    for single scenarios (:func:`with_schedule`) and fleets (:mod:`tco.fleet`).
    """
    import dataclasses

    prof = sched.profile[k]
    extra = {"depot_cost_share": float(sched.cost_share[k])} if cost_share else {}
    return dataclasses.replace(
        op, charging_profile=prof if prof.sum() > 0 else op.charging_profile,
        depot_charging_power=float(sched.peak_contribution[k]),
        depot_peak_contribution=float(sched.peak_contribution[k]), **extra)


def with_schedule(operations, sd: ScenarioDepot | None) -> list:
    """The scenario's operations with their rows of its depot schedule (fixed costs split
    equally among the trucks served; see :func:`scheduled_operation`)."""
    if sd is None:
        return list(operations)
    out = list(operations)
    for i, k in sd.row.items():
        out[i] = scheduled_operation(out[i], sd.schedule, k, cost_share=False)
    return out
