"""Tests of tco.depot: shared depot charging against cases worked by hand.

Every expected figure below is worked by hand in the comment beside it from the stated
arrivals, departures, energies and charger power (no figure comes from the model).
"""
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tco.depot import schedule

H = 3600.0
KWH = 3.6e6


def test_first_come_worked_case():
    # Chargers of 100 kW. Trucks back at 18:00, 19:00, 20:00, all leave at 06:00 and need
    # 300, 500, 500 kWh (3, 5, 5 h of charging).
    # One charger: A 18-21, B 21-02, C 02-07 -> C misses its 06:00 departure by 1 h.
    # Two chargers: A 18-21 and B 19-00 on one each, C waits until 21:00 and takes A's
    # charger, 21-02. All done. Depot power: 100 kW 18-19, 200 kW 19-00, 100 kW 00-02.
    s = schedule([18 * H, 19 * H, 20 * H], [6 * H] * 3, np.array([300, 500, 500]) * KWH,
                 100e3)
    assert s.chargers == 2
    assert s.peak_power == pytest.approx(200e3)
    np.testing.assert_allclose(s.energy / KWH, [300, 500, 500])
    np.testing.assert_allclose(s.shortfall, 0.0, atol=1e-6)
    np.testing.assert_allclose(s.occupancy / H, [3, 5, 5])          # hours on a charger
    np.testing.assert_allclose(s.cost_share, np.array([3, 5, 5]) / 13)
    # the 200 kW peak runs 19:00-24:00, with A (until 21) and B throughout, C from 21:
    # 20 intervals of 15 min; A in 8, B in 20, C in 12 -> mean contributions
    np.testing.assert_allclose(s.peak_contribution / 1e3, [40, 100, 60])
    assert s.peak_contribution.sum() == pytest.approx(s.peak_power)
    # hour-of-day profile: A draws its energy in hours 18, 19, 20 in equal thirds
    np.testing.assert_allclose(s.profile[0, 18:21], [1 / 3] * 3)
    # C charges 21:00-02:00 -> 1/5 in each of hours 21, 22, 23, 0, 1
    np.testing.assert_allclose(s.profile[2, [21, 22, 23, 0, 1]], [0.2] * 5)

    one = schedule([18 * H, 19 * H, 20 * H], [6 * H] * 3, np.array([300, 500, 500]) * KWH,
                   100e3, chargers=1)
    # with one charger C gets 02:00-06:00 = 400 kWh of its 500
    np.testing.assert_allclose(one.shortfall / KWH, [0, 0, 100])
    assert not one.feasible[2] and one.feasible[:2].all()


def test_spread_worked_case():
    # Same arrivals, 06:00 departures, 300/200/500 kWh, managed: flat power over each stay.
    # Stays 12, 11, 10 h -> 25, 18.18, 50 kW; all three present 20:00-06:00 -> peak
    # 25 + 200/11 + 50 = 93.18 kW; three chargers (one per truck present at once).
    s = schedule([18 * H, 19 * H, 20 * H], [6 * H] * 3, np.array([300, 200, 500]) * KWH,
                 100e3, rule="spread")
    assert s.chargers == 3
    assert s.peak_power == pytest.approx((25 + 200 / 11 + 50) * 1e3)
    np.testing.assert_allclose(s.peak_contribution / 1e3, [25, 200 / 11, 50])
    np.testing.assert_allclose(s.occupancy / H, [12, 11, 10])
    np.testing.assert_allclose(s.energy / KWH, [300, 200, 500])


def test_stays_past_midnight_meet_the_next_evening():
    # A: 22:00-02:00 needs 400 kWh at 100 kW (its whole stay); B: 01:00-05:00 needs
    # 400 kWh (its whole stay). They overlap 01:00-02:00 -> two chargers, 200 kW peak.
    s = schedule([22 * H, 1 * H], [2 * H, 5 * H], np.array([400, 400]) * KWH, 100e3)
    assert s.chargers == 2 and s.peak_power == pytest.approx(200e3)
    # Days repeat. C arrives 20:00 and leaves 10:00 next morning needing 1400 kWh (its whole
    # 14 h stay); D is at the depot 08:00-12:00 needing 400 kWh (its whole stay). On a
    # single-day timeline they never meet; on repeating days they meet 08:00-10:00 -> two.
    s2 = schedule([20 * H, 8 * H], [10 * H, 12 * H], np.array([1400, 400]) * KWH, 100e3)
    assert s2.chargers == 2
    np.testing.assert_allclose(s2.shortfall, 0.0, atol=1e-6)


def test_stay_too_short_reports_the_shortfall():
    # 2 h at 100 kW is 200 kWh; 350 kWh needed -> 150 kWh short whatever the chargers.
    s = schedule([20 * H], [22 * H], [350 * KWH], 100e3)
    assert s.chargers == 1
    assert s.shortfall[0] / KWH == pytest.approx(150)
    assert not s.feasible[0]
    sp = schedule([20 * H], [22 * H], [350 * KWH], 100e3, rule="spread")
    assert sp.shortfall[0] / KWH == pytest.approx(150)


def test_no_energy_no_chargers():
    s = schedule([20 * H, 21 * H], [5 * H, 6 * H], [0.0, 0.0], 100e3)
    assert s.chargers == 0 and s.peak_power == 0.0


@pytest.mark.parametrize("kwargs, message", [
    (dict(arrive=[25 * H], depart=[5 * H], energy=[1.0]), "arrival"),
    (dict(arrive=[20 * H], depart=[5 * H], energy=[-1.0]), "energy"),
    (dict(arrive=[20 * H], depart=[5 * H], energy=[1.0], rule="fastest"), "rule"),
    (dict(arrive=[20 * H], depart=[5 * H], energy=[1.0], slot=7.0), "slot"),
])
def test_bad_arguments(kwargs, message):
    kwargs.setdefault("charger_power", 100e3)
    with pytest.raises(ValueError, match=message):
        schedule(**kwargs)


trucks = st.lists(st.tuples(st.integers(0, 95), st.integers(8, 60), st.floats(0, 600)),
                  min_size=1, max_size=8)


def _stays(spec):
    """Arrival, departure (quarter hours) and energy [J] of drawn trucks."""
    a = np.array([q * 900.0 for q, _, _ in spec])
    d = (a + np.array([n * 900.0 for _, n, _ in spec])) % 86400.0
    return a, d, np.array([x for _, _, x in spec]) * KWH


@settings(max_examples=40, deadline=None)
@given(trucks)
def test_conservation_and_shares(spec):
    # energy delivered + shortfall = energy needed; shares sum to one; contributions sum
    # to the peak; the peak never exceeds chargers x charger power.
    a, d, e = _stays(spec)
    for rule in ("first_come", "spread"):
        s = schedule(a, d, e, 50e3, rule=rule)
        np.testing.assert_allclose(s.energy + s.shortfall, e, rtol=1e-9, atol=1e-3)
        if e.sum() > 0:
            assert s.cost_share.sum() == pytest.approx(1.0)
            assert s.peak_contribution.sum() == pytest.approx(s.peak_power, rel=1e-9)
        assert s.peak_power <= s.chargers * 50e3 * (1 + 1e-9)


@settings(max_examples=30, deadline=None)
@given(trucks)
def test_more_chargers_never_serve_worse(spec):
    a, d, e = _stays(spec)
    best = schedule(a, d, e, 50e3)
    short = [schedule(a, d, e, 50e3, chargers=k).shortfall.sum()
             for k in range(1, len(spec) + 1)]
    assert all(x >= y - 1e-3 for x, y in zip(short, short[1:]))
    assert best.shortfall.sum() <= short[-1] + 1e-3


def test_queue_that_settles_after_the_first_day_conserves_energy():
    # Found by hypothesis: with 2 chargers of 50 kW the 09:15 truck (325 kWh, leaving
    # 00:15) is served one minute later on the second day than on the first, because the
    # second day starts with a truck still plugged in from the first; from the third day
    # the pattern repeats. The settled day must deliver what its trucks need: 325 kWh
    # = 6.5 h at 50 kW, worked by hand, with nothing short.
    spec = [(0, 8, 1.0), (0, 27, 326.0), (17, 10, 115.0), (17, 54, 549.0),
            (37, 34, 414.0), (37, 60, 325.0)]
    a, d, e = _stays(spec)
    s = schedule(a, d, e, 50e3, rule="first_come")
    np.testing.assert_allclose(s.energy + s.shortfall, e, rtol=1e-9, atol=1e-3)
    np.testing.assert_allclose(s.energy[5] / KWH, 325.0, rtol=1e-12)
    # the day's power, summed over its slots, is the energy drawn (60 s slots)
    assert s.power.sum() * 60.0 == pytest.approx(s.energy.sum(), rel=1e-12)
