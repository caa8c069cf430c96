"""Battery ageing (tco.battery) against hand calculations of the linear rule.

The rule (module notes): state of health falls by (1 − SoH_eol) for every cycle life of
full equivalent cycles and by the calendar fade each year; cycles are counted on the
energy discharged. The expected values below are worked out by hand in each docstring.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from tco import battery

KWH = 3.6e6


def test_lives_per_year_by_hand():
    """300 FEC/yr of a 3,000-cycle battery to 80 %, 1 %/yr calendar fade:
    300/3000 + 0.01/0.2 = 0.1 + 0.05 = 0.15 lives a year."""
    assert battery.lives_per_year(300, 3000, 0.8, 0.01) == pytest.approx(0.15, rel=1e-12)
    # no cycle limit: the calendar alone, 0.02/0.25 = 0.08
    assert battery.lives_per_year(300, math.inf, 0.75, 0.02) == pytest.approx(0.08)
    # arrays of draws
    got = battery.lives_per_year(np.array([150.0, 600.0]), 3000, 0.8, 0.0)
    np.testing.assert_allclose(got, [0.05, 0.2])


def test_state_of_health_by_hand():
    """λ = 0.15/yr to 80 %: SoH falls 0.2 × 0.15 = 0.03 a year. After 2 years 0.94; a
    battery refitted at year 5 is at 1 − 0.03 × 1.5 = 0.955 at 6.5 years."""
    soh = battery.state_of_health([0.0, 2.0, 6.5], 0.15, 0.8, [0.0, 5.0])
    np.testing.assert_allclose(soh, [1.0, 0.94, 0.955], rtol=1e-12)


def test_replacement_years_by_hand():
    """λ = 0.15: summed lives 0.15, 0.30 … pass 1 in year 7 (1.05) and 2 in year 14
    (2.10); within 10 years only year 7."""
    assert battery.replacement_years_by_life(0.15, 10) == [7]
    assert battery.replacement_years_by_life(0.15, 15) == [7, 14]
    assert battery.replacement_years_by_life(0.0, 10) == []


# A hand case: the day needs 400 kWh above the reserve, the new battery gives 450 kWh;
# λ = 0.15/yr to 80 %, so SoH = 1 − 0.03 t and the day falls short once
# 450 (1 − 0.03 t) < 400, i.e. t > (1 − 400/450) / 0.03 = 3.7037 years: in year 4, from
# the month whose middle 3 + (m + 0.5)/12 passes 3.7037 (m = 8: September) — 4 months.
NEED, AVAIL, LAM = 400 * KWH, 450 * KWH, 0.15


def test_first_short_year_and_months_by_hand():
    a = battery.age(10, LAM, 0.8, NEED, AVAIL, 350e3, 0.92, 600.0)
    assert a.first_short_year == 4
    assert a.short_months[:4].tolist() == [0, 0, 0, 4]
    assert a.short_months[4:].tolist() == [12] * 6
    # year 4's en-route energy per day, averaged over its 12 months (hand sum)
    t = 3 + (np.arange(12) + 0.5) / 12
    deficit = np.maximum(400 - 450 * (1 - 0.03 * t), 0.0)  # kWh
    assert a.enroute_energy[3] / KWH == pytest.approx(deficit.sum() / 12, rel=1e-12)
    # time: energy / (350 kW × 0.92) + 10 min in each short month
    hours = deficit / (350 * 0.92)
    minutes = np.where(deficit > 0, hours * 60 + 10, 0.0)
    assert a.enroute_time[3] / 60 == pytest.approx(minutes.mean(), rel=1e-12)
    assert a.feasible and a.replacements == []
    # SoH at the end of year 4: 1 − 0.03 × 4 = 0.88
    assert a.soh_end[4] == pytest.approx(0.88, rel=1e-9)


def test_no_enroute_charging_is_not_feasible():
    a = battery.age(10, LAM, 0.8, NEED, AVAIL, 0.0, 0.92, 600.0)
    assert a.first_short_year == 4 and not a.feasible
    assert not a.enroute_energy.any() and not a.enroute_time.any()


def test_range_rule_replaces_before_the_short_year():
    """Replaced at the end of year 3 (year 4 would fall short); the new battery falls
    short 3.7037 years later, in year 7, so again at the end of year 6, and of year 9."""
    a = battery.age(10, LAM, 0.8, NEED, AVAIL, 350e3, 0.92, 600.0, policy="range")
    assert a.replacements == [3, 6, 9]
    assert a.first_short_year is None and not a.enroute_energy.any()
    # the battery in use at the end was fitted at year 9: SoH 1 − 0.03 = 0.97
    assert a.soh_end[10] == pytest.approx(0.97, rel=1e-9)


def test_cycles_rule_replaces_at_end_of_life():
    """λ = 0.15: replaced at the end of year 7; years 4–7 fall short, 8–10 do not
    (SoH 1 − 0.03 × 2.5 = 0.925 mid-year 10 gives 416 kWh ≥ 400)."""
    a = battery.age(10, LAM, 0.8, NEED, AVAIL, 350e3, 0.92, 600.0, policy="cycles")
    assert a.replacements == [7]
    assert a.short_months.tolist() == [0, 0, 0, 4, 12, 12, 12, 0, 0, 0]


def test_a_battery_too_small_when_new_is_not_replaced_for_range():
    a = battery.age(5, LAM, 0.8, 500 * KWH, AVAIL, 350e3, 0.92, 600.0, policy="range")
    assert a.replacements == [] and a.first_short_year == 1


def test_worst_year_can_exceed_the_end_of_life_design_point():
    # Hand-worked example (hand calculation written out here). The day needs 100 kWh above
    # the reserve; a new battery gives 110 kWh, so at the end-of-life state of health 0.80
    # it gives 88 kWh and the design-point deficit is 100 − 88 = 12 kWh into the battery.
    # With 0.3 lives a year SoH(t) = 1 − 0.2·0.3·t = 1 − 0.06·t: end of life at t = 3.33 yr,
    # i.e. during year 4, and the "cycles" rule replaces the battery at the END of year 4.
    # Year 4 (t = 3..4, all twelve months short) averages SoH 1 − 0.06·3.5 = 0.79, below
    # 0.80, so its average deficit is 100 − 110·0.79 = 13.1 kWh a day: more than the
    # end-of-life design point. At the meter both are divided by the charger efficiency
    # 0.9: 12 / 0.9 = 13.33 kWh and 13.1 / 0.9 = 14.56 kWh.
    kwh = 3.6e6
    ag = battery.age(5, 0.3, 0.8, 100 * kwh, 110 * kwh, 100e3, 0.9, 0.0, policy="cycles")
    assert ag.replacements == [4]
    assert ag.soh_low[3] < 0.8
    assert ag.enroute_energy[3] / kwh == pytest.approx(13.1, rel=1e-9)
    design_point = 100 - 110 * 0.8
    assert design_point == pytest.approx(12.0)
    assert ag.enroute_energy.max() / kwh > design_point
    assert ag.enroute_energy[3] / 0.9 / kwh == pytest.approx(14.556, abs=1e-3)
