"""Tests of tco.stints: a logged vehicle-day cut into stints and resampled in one compiled
pass.

The reference is independent of the code under test: the per-stint path the project used
before (``tco.dutycycle.smooth_elevation`` and ``tco.dutycycle.resample_arrays``, numpy
and scipy's Gaussian kernel), written out below as ``reference_day``, and numpy's own
``sum``, ``interp``, ``median`` and ``polyfit`` for the helpers. Where the compiled pass
sums in another order (the convolution, the end-line fit, libm's ``exp``) the module
documents a difference of a few units in the last place; the tests allow 1e-12
relative. Everything else must be the same bits.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.ndimage import gaussian_filter1d

from tco import dutycycle, stints
from tco.budget import MAX_TRIP_SAMPLES
from tco.errors import InputError


# ----------------------------------------------------------------------------- reference
def reference_stint(t, v, zg, is_grade, payload, dt, window, base_altitude):
    """One stint through the numpy functions of tco.dutycycle (the path used before)."""
    s = np.concatenate(([0.0], np.cumsum(0.5 * (v[1:] + v[:-1]) * np.diff(t))))
    if is_grade:
        z = base_altitude + np.concatenate(([0.0], np.cumsum(zg[:-1] * np.diff(s))))
    elif window:
        z = dutycycle.smooth_elevation(s, zg, window)
    else:
        z = zg
    tr = dutycycle.resample_arrays(t, s, z, dt, speed=v)
    src = tr.time / tr.time_scale
    k = np.clip(np.searchsorted(t - t[0], src * (1 + 1e-12), side="right") - 1, 0,
                t.size - 1)
    return tr.speed, tr.grade, tr.elevation, payload[k]


def reference_day(t, v, zg, payload, is_grade, dt, window, gap_limit, base_altitude):
    """(speed, grade, elevation, payload, kept, duplicates, gaps, gap time, unused)."""
    keep = np.concatenate(([True], np.diff(t) > 0))
    t, v, zg, payload = t[keep], v[keep], zg[keep], payload[keep]
    cuts = np.flatnonzero(np.diff(t) > gap_limit) + 1
    edges = np.concatenate(([0], cuts, [t.size]))
    parts, unused = [], 0
    for a, b in zip(edges[:-1], edges[1:]):
        if b - a < 2 or t[b - 1] - t[a] < dt * (1 - 1e-9):
            unused += b - a
            continue
        parts.append(reference_stint(t[a:b], v[a:b], zg[a:b], is_grade, payload[a:b], dt,
                                     window, base_altitude))
    gap_time = float(np.sum(t[cuts] - t[cuts - 1])) if cuts.size else 0.0
    arrays = (tuple(np.concatenate(x) for x in zip(*parts)) if parts
              else (None, None, None, None))
    return (*arrays, int(t.size), int(keep.size - t.size), int(cuts.size), gap_time, unused)


def random_day(rng, n=3000, rate=1.0, stops=True, gaps=True, dups=True, noise=1.0):
    """A made-up vehicle-day: ramps, stops, hills with noise, a few gaps and repeats."""
    t = np.sort(rng.uniform(0, n / rate, n)) if rate != 1.0 else np.arange(n, dtype=float)
    t = np.round(t * 1000) / 1000 + 20000.0
    if gaps:
        for at in rng.integers(1, max(2, n - 1), 2):
            t[at:] += rng.uniform(601, 3000)
    if dups:
        for at in rng.integers(1, max(2, n - 1), 5):
            t[at] = t[at - 1]
    v = np.clip(np.cumsum(rng.normal(0, 0.5, n)) + 15, 0, 30)
    if stops:
        for at in rng.integers(0, max(1, n - 60), 4):
            v[at:at + min(40, n // 3)] = 0.0
    x = np.cumsum(v)
    z = 200 + 20 * np.sin(x / 1500) + 5 * np.sin(x / 400) + rng.normal(0, noise, n)
    payload = np.repeat(rng.uniform(0, 2e4, 4), -(-n // 4))[:n]
    return t, v, z, payload


def assert_day_close(got: stints.PreparedDay, ref, exact_elevation: bool, dt: float):
    sp, gr, el, pl, kept, dups, gaps, gap_time, unused = ref
    assert (got.kept, got.duplicates, got.gaps, got.unused) == (kept, dups, gaps, unused)
    assert got.gap_time == gap_time
    if sp is None:
        assert got.speed is None
        return
    # speed and payload do not depend on the elevation: the same bits
    np.testing.assert_array_equal(got.speed, sp)
    np.testing.assert_array_equal(got.payload, pl)
    # the day's figures: numpy's own reductions of the returned arrays, the same bits
    assert got.mean_elevation == float(got.elevation.mean())
    assert got.payload_max == float(got.payload.max())
    assert got.payload_distance == float(np.sum(pl[:-1] * (0.5 * (sp[:-1] + sp[1:]) * dt)))
    np.testing.assert_array_equal(
        got.leg_starts, np.concatenate(([0], np.flatnonzero(np.diff(pl) != 0) + 1)))
    if exact_elevation:
        np.testing.assert_array_equal(got.elevation, el)
        np.testing.assert_array_equal(got.grade, gr)
    else:
        np.testing.assert_allclose(got.elevation, el, rtol=1e-12, atol=0)
        # grade = Δz/Δd: where Δd is short (creeping) an elevation difference of 1e-13 m
        # shows large in the grade, so compare each interval's rise grade·Δd [m]
        dd = np.append(0.5 * (sp[1:] + sp[:-1]), 0.0)  # per unit of dt, as the kernel
        scale = np.max(np.abs(el))
        np.testing.assert_allclose(got.grade * dd, gr * dd, rtol=0, atol=1e-12 * scale)
        np.testing.assert_allclose(got.grade, gr, rtol=1e-6, atol=1e-9)


# ----------------------------------------------------------------------------- the day
@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("dt", [1.0, 0.5, 3.0])
def test_elevation_day_matches_the_numpy_path(seed, dt):
    rng = np.random.default_rng(seed)
    t, v, z, p = random_day(rng)
    got = stints.prepare_day(t, v, z, p, False, dt, 250.0, 600.0, 0.0)
    ref = reference_day(t, v, z, p, False, dt, 250.0, 600.0, 0.0)
    assert_day_close(got, ref, exact_elevation=False, dt=dt)


@pytest.mark.parametrize("seed", range(3))
def test_grade_column_and_no_smoothing_are_the_same_bits(seed):
    rng = np.random.default_rng(10 + seed)
    t, v, z, p = random_day(rng, rate=0.7, noise=0.0)  # no noise: not steep unsmoothed
    g = np.clip(np.gradient(z) / 30, -0.1, 0.1)
    assert_day_close(stints.prepare_day(t, v, g, p, True, 1.0, 250.0, 600.0, 120.0),
                     reference_day(t, v, g, p, True, 1.0, 250.0, 600.0, 120.0),
                     exact_elevation=True, dt=1.0)
    assert_day_close(stints.prepare_day(t, v, z, p, False, 1.0, 0.0, 600.0, 0.0),
                     reference_day(t, v, z, p, False, 1.0, 0.0, 600.0, 0.0),
                     exact_elevation=True, dt=1.0)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), n=st.integers(2, 400),
       window=st.sampled_from([0.0, 30.0, 250.0, 1000.0]),
       dt=st.sampled_from([0.25, 1.0, 2.0, 7.0]), rate=st.sampled_from([1.0, 0.2, 3.0]))
def test_short_and_odd_days_match_the_numpy_path(seed, n, window, dt, rate):
    """Short stints, stints shorter than a step, standing still all stint, sparse and
    dense sampling, windows from tight to wide."""
    rng = np.random.default_rng(seed)
    t, v, z, p = random_day(rng, n=max(n, 4), rate=rate, gaps=n > 50, noise=3.0)
    if seed % 5 == 0:
        v[:] = 0.0                      # parked with the logger on: no distance at all
    try:
        ref = reference_day(t, v, z, p, False, dt, window, 600.0, 0.0)
    except InputError as exc:           # a grade beyond 30 % on a wild made-up profile
        with pytest.raises(InputError) as info:
            stints.prepare_day(t, v, z, p, False, dt, window, 600.0, 0.0)
        assert info.value.message == exc.message
        return
    got = stints.prepare_day(t, v, z, p, False, dt, window, 600.0, 0.0)
    assert_day_close(got, ref, exact_elevation=not window, dt=dt)


def test_day_without_a_usable_stint():
    t = np.array([0.0, 0.4, 700.0, 700.3, 2000.0])
    got = stints.prepare_day(t, np.ones(5), np.zeros(5), np.zeros(5), False, 1.0, 250.0,
                             600.0, 0.0)
    assert got.speed is None
    assert (got.kept, got.unused, got.gaps) == (5, 5, 2)
    assert got.gap_time == pytest.approx((700.0 - 0.4) + (2000.0 - 700.3), abs=1e-9)


def test_steep_grade_error_is_the_resamplers():
    """A 35 % ramp: the same message and location as tco.dutycycle.resample_arrays."""
    t = np.arange(200.0)
    v = np.full(200, 10.0)
    z = 0.35 * 10.0 * t
    with pytest.raises(InputError) as ref:
        reference_day(t, v, z, np.zeros(200), False, 1.0, 0.0, 600.0, 0.0)
    with pytest.raises(InputError) as got:
        stints.prepare_day(t, v, z, np.zeros(200), False, 1.0, 0.0, 600.0, 0.0)
    assert (got.value.message, got.value.where) == (ref.value.message, ref.value.where)
    assert "+35.0 %" in got.value.message and got.value.where == "distance 0 m"


def test_sample_budget_error_is_the_resamplers():
    t = np.array([0.0, 500.0])
    dt = 500.0 / (MAX_TRIP_SAMPLES * 2)
    with pytest.raises(InputError) as ref:
        reference_day(t, np.ones(2), np.zeros(2), np.zeros(2), False, dt, 0.0, 600.0, 0.0)
    with pytest.raises(InputError) as got:
        stints.prepare_day(t, np.ones(2), np.zeros(2), np.zeros(2), False, dt, 0.0, 600.0,
                           0.0)
    assert got.value.message == ref.value.message
    assert "samples" in got.value.message


def test_constant_speed_flat_day_by_hand():
    """10 m/s for 100 s at 1 Hz on a flat road: 101 samples, speed 10, grade 0, the
    payload of each sample (hand values)."""
    t = np.arange(101.0)
    p = np.where(t < 50, 1000.0, 2000.0)
    got = stints.prepare_day(t, np.full(101, 10.0), np.full(101, 50.0), p, False, 1.0,
                             250.0, 600.0, 0.0)
    assert got.speed.size == 101
    np.testing.assert_array_equal(got.speed, 10.0)
    np.testing.assert_allclose(got.elevation, 50.0, rtol=1e-13)
    np.testing.assert_allclose(got.grade, 0.0, atol=1e-14)
    np.testing.assert_array_equal(got.payload, p)


# ----------------------------------------------------------------------------- helpers
@pytest.mark.parametrize("n", [0, 1, 7, 8, 9, 100, 128, 129, 255, 256, 1000, 1001, 4097,
                               100_003])
def test_pairwise_sum_is_numpys(n):
    a = np.random.default_rng(n).standard_normal(n) * 10.0 ** np.random.default_rng(
        n + 1).uniform(-3, 3, n)
    assert stints._pairwise_sum(a, 0, n) == np.sum(a)


@pytest.mark.parametrize("interp", ["_interp_sorted", "_interp_pieces"])
@pytest.mark.parametrize("seed, points", [(3, 2000), (4, 40), (5, 300)])
def test_interp_is_numpys(interp, seed, points):
    # numpy.interp itself is the reference (same bits): points denser and sparser than
    # the pieces, outside both ends, on the knots, repeated; a uniform grid as in the
    # smoothing
    rng = np.random.default_rng(seed)
    xp = np.cumsum(rng.uniform(0.1, 2.0, 300))
    fp = rng.normal(0, 100, 300)
    x = np.sort(np.concatenate([rng.uniform(xp[0] - 5, xp[-1] + 5, points), xp[::7],
                                xp[5:6], xp[5:6], [xp[-1]]]))
    grid = np.linspace(xp[0], xp[-1], points)
    for xs in (x, grid, x[:1], x[-1:]):
        out = np.empty_like(xs)
        getattr(stints, interp)(xs, xp, fp, out)
        np.testing.assert_array_equal(out, np.interp(xs, xp, fp))


@pytest.mark.parametrize("n", [2, 3, 10, 11, 250])
def test_line_fit_is_polyfit(n):
    rng = np.random.default_rng(n)
    x = np.cumsum(rng.uniform(1, 5, n)) + 1000.0
    y = 3.0 - 0.02 * x + rng.normal(0, 1, n)
    b, a = stints._line_fit(x, y, 0, n, x[0])
    ref = np.polyfit(x - x[0], y, 1)
    np.testing.assert_allclose([b, a], ref, rtol=1e-12, atol=1e-12)


def test_round_half_even_is_pythons():
    for x in [0.5, 1.5, 2.5, 2.4999999, 2.5000001, 49.5, 50.5, 50.0, 0.0, 123456.5]:
        assert stints._round_half_even(x) == round(x)


def test_smoothing_matches_gaussian_filter1d():
    """The compiled smoothing against scipy.ndimage.gaussian_filter1d itself on a regular
    5 m grid (interior points, far from the ends' line extension)."""
    x = np.arange(0.0, 20_000.0, 5.0)
    z = 300 + 30 * np.sin(x / 900) + np.random.default_rng(0).normal(0, 2, x.size)
    out = np.empty_like(z)
    stints._smooth(x, z, 250.0, out, np.empty(0), np.zeros(1, np.int64))
    ref = gaussian_filter1d(z, sigma=250.0 / 4 / 5.0, truncate=4.0)
    inner = slice(100, -100)
    np.testing.assert_allclose(out[inner], ref[inner], rtol=1e-12)
    # a steady grade is kept exactly by the line extension at the ends
    z2 = 100 + 0.02 * x
    stints._smooth(x, z2, 250.0, out, np.empty(0), np.zeros(1, np.int64))
    np.testing.assert_allclose(out, z2, rtol=1e-12)
    assert math.isclose(out[-1], z2[-1], rel_tol=1e-12)


@pytest.mark.parametrize("size", [0, 1000, 20_000, 1_000_000])
def test_a_work_space_of_any_size_gives_the_same_day(size):
    """Arrays carved from a work space (too small, partly enough, ample) hold the same
    numbers as fresh arrays, including when the day has repeated timestamps."""
    rng = np.random.default_rng(7)
    t, v, z, p = random_day(rng)
    fresh = stints.prepare_day(t, v, z, p, False, 1.0, 250.0, 600.0, 0.0)
    ws = np.full(size, 123.0)
    got = stints.prepare_day(t, v, z, p, False, 1.0, 250.0, 600.0, 0.0, workspace=ws)
    for a, b in zip(fresh, got):
        if isinstance(a, np.ndarray):
            np.testing.assert_array_equal(a, b)
        else:
            assert a == b
    again = stints.prepare_day(t[::-1].copy()[::-1], v, z, p, False, 1.0, 250.0, 600.0,
                               0.0, workspace=ws)  # reused: the same again
    np.testing.assert_array_equal(again.elevation, fresh.elevation)
