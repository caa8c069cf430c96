"""Tests for tco.operation: payload capacity, extra trips, depot charging profile."""
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tco.operation import charging_profile, extra_trips, payload_capacity


def test_payload_capacity_scalar_and_array():
    # gross limit + allowance − curb (definition of legal payload; common practice)
    assert payload_capacity(15000.0, 40000.0) == 25000.0
    assert payload_capacity(19000.0, 40000.0, 2000.0) == 23000.0
    assert payload_capacity(45000.0, 40000.0) == 0.0
    np.testing.assert_allclose(payload_capacity(np.array([15e3, 19e3]), 40e3), [25e3, 21e3])


def test_extra_trips_by_hand():
    # 500 trips of 22 t when only 20 t fit: 500 · (22/20 − 1) = 50 extra trips
    assert extra_trips(500, 22.0, 20.0) == pytest.approx(50.0)
    assert extra_trips(500, 20.0, 20.0) == 0.0
    assert extra_trips(500, 0.0, 0.0) == 0.0
    assert extra_trips(500, 5.0, 0.0) == float("inf")


def test_charging_profile_fills_from_the_window_start():
    # 450 kWh at 150 kW from 21:00: three full hours, 21, 22 and 23
    p = charging_profile(450 * 3.6e6, 150e3, 21, 5)
    assert p[21] == p[22] == p[23] == pytest.approx(1 / 3)
    assert p.sum() == pytest.approx(1.0)
    # a window too short: the rest lands in its last hour
    q = charging_profile(1000 * 3.6e6, 100e3, 22, 0)
    assert q[22] == pytest.approx(0.1) and q[23] == pytest.approx(0.9)
    assert not charging_profile(0.0, 100e3, 22, 6).any()


@settings(max_examples=60, deadline=None)
@given(st.floats(1e6, 1e10), st.floats(1e3, 1e6), st.integers(0, 23), st.integers(0, 23))
def test_profile_is_a_share_inside_the_window(energy, power, start, end):
    p = charging_profile(energy, power, start, end)
    assert p.sum() == pytest.approx(1.0)
    assert (p >= 0).all()
    hours = (end - start) % 24 or 24
    window = {(start + k) % 24 for k in range(hours)}
    assert set(np.flatnonzero(p)) <= window
