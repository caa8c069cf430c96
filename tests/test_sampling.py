"""Tests of tco.sampling: the generators and inverse CDFs against scipy.stats.

The reference throughout is SciPy: ``scipy.stats.<dist>.rvs`` (the generator calls the
fast paths must repeat), ``scipy.stats.beta.ppf`` (Boost's ``ibeta_inv``),
``scipy.special.betainc`` (the forward function, for a round trip where the inverse in
SciPy gives up) and ``scipy.stats.truncnorm.ppf``.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import special, stats

from tco import sampling
from tco import uncertainty as unc

# probabilities: uniform draws, the tails on a log scale, and the ends
_RNG = np.random.default_rng(20)
U = np.concatenate([_RNG.random(20_000), np.logspace(-12, -1, 200),
                    1 - np.logspace(-12, -1, 200), [0.0, 0.5, 1.0]])


@pytest.mark.parametrize("c", np.linspace(0.0, 1.0, 11))
def test_beta_ppf_of_every_pert_shape_against_scipy(c):
    """beta-PERT shapes α = 1 + 4c, β = 1 + 4(1 − c) (Vose 2008): within 1e-12 of
    scipy.stats.beta.ppf, absolute on [0, 1] (the issue asked for 1e-10; the table's
    largest difference seen is about 2e-14)."""
    a, b = 1 + 4 * c, 1 + 4 * (1 - c)
    np.testing.assert_allclose(sampling.beta_ppf(U, a, b), stats.beta.ppf(U, a, b),
                               rtol=0, atol=1e-12)


@pytest.mark.filterwarnings("ignore:Error in function boost")  # scipy's own root finder
@pytest.mark.parametrize("a", [0.5, 0.8, 1.0, 1.7, 3.0, 6.5, 10.0])
@pytest.mark.parametrize("b", [0.5, 1.0, 2.2, 4.9, 10.0])
def test_beta_ppf_over_its_table_range_against_scipy(a, b):
    """Shapes over the whole table range (BETA_SHAPES): within 1e-10 of
    scipy.stats.beta.ppf (largest seen about 4e-12, at a = b = 10)."""
    np.testing.assert_allclose(sampling.beta_ppf(U, a, b), stats.beta.ppf(U, a, b),
                               rtol=0, atol=1e-10)


@pytest.mark.parametrize("a,b", [(1.0, 5.0), (2.3, 3.7), (5.0, 1.0), (0.5, 3.0), (3.0, 0.5)])
def test_beta_ppf_far_tails_round_trip_through_betainc(a, b):
    """Far tails (u down to 1e-250 and 1 − u down to 1e-15), where scipy.stats.beta.ppf
    can give up (Boost's root finder returns 0.5 for a = 0.5, b = 3, u = 1e-16): the
    forward function scipy.special.betainc of the result gives u back to a relative 1e-10
    (lower tail); in the upper tail the result is within 1e-12 of 1 − betaincinv(b, a,
    1 − u) (the symmetry I_x(a, b) = 1 − I_(1−x)(b, a), DLMF 8.17.4)."""
    lo = np.logspace(-250, -2, 300)
    x = sampling.beta_ppf(lo, a, b)
    ok = x > 1e-300  # below, x itself underflows
    np.testing.assert_allclose(special.betainc(a, b, x[ok]), lo[ok], rtol=1e-10)
    tail = 1 - (1 - np.logspace(-15, -2, 200))  # 1 − u for the floats u near 1
    exact = 1 - special.betaincinv(b, a, tail)
    np.testing.assert_allclose(sampling.beta_ppf(1 - tail, a, b), exact, rtol=0, atol=1e-12)


def test_beta_ppf_outside_the_table_and_nan():
    """Shapes outside BETA_SHAPES use scipy.special.betaincinv itself; NaN stays NaN."""
    u = np.array([0.1, 0.5, 0.9])
    np.testing.assert_array_equal(sampling.beta_ppf(u, 20.0, 3.0),
                                  special.betaincinv(20.0, 3.0, u))
    assert np.isnan(sampling.beta_ppf(np.array([np.nan]), 2.0, 3.0)[0])


@pytest.mark.parametrize("a,b", [(-np.inf, 3.3), (-2.0, np.inf), (0.5, 2.0), (-3.0, -1.0),
                                 (1.0, 5.0), (-1.0, 1.0), (5.0, 9.0), (-9.0, -5.0),
                                 (-0.1, 20.0), (12.0, 13.0)])
def test_truncnorm_ppf_against_scipy(a, b):
    """Against scipy.stats.truncnorm.ppf within 1e-10 standard deviations (largest seen
    2.6e-12, deep in an upper tail where both are bounded by Φ rounding to 1)."""
    q = np.concatenate([_RNG.random(20_000), [0.0, 1.0]])
    got, ref = sampling.truncnorm_ppf(q, a, b), stats.truncnorm.ppf(q, a, b)
    finite = np.isfinite(ref)
    np.testing.assert_allclose(got[finite], ref[finite], rtol=0, atol=1e-10)
    np.testing.assert_array_equal(got[~finite], ref[~finite])


SAME_STREAM = [
    stats.uniform(loc=2.0, scale=3.0),
    stats.triang(0.25, loc=1.0, scale=5.0),
    stats.beta(1.8, 4.2, loc=1.0, scale=5.0),
    stats.norm(10.0, 2.0),
    stats.lognorm(0.47, scale=2.7),
    stats.norm(loc=-1.0, scale=0.3),
]


@pytest.mark.parametrize("dist", SAME_STREAM, ids=lambda d: d.dist.name)
def test_draw_repeats_scipy_rvs_bit_for_bit(dist):
    """The independent draws make the generator calls of scipy.stats' rvs: the same seed
    gives the same numbers, bit for bit, and leaves the generator in the same state."""
    r1, r2 = np.random.default_rng(4), np.random.default_rng(4)
    np.testing.assert_array_equal(sampling.draw(dist, 5_000, r1),
                                  dist.rvs(size=5_000, random_state=r2))
    assert r1.random() == r2.random()
    into = np.empty(5_000)
    sampling.draw(dist, 5_000, r1, out=into)
    np.testing.assert_array_equal(into, dist.rvs(size=5_000, random_state=r2))


def test_draw_truncated_normal_matches_scipy_rvs():
    """The truncated normal: scipy.stats.truncnorm.rvs draws the inverse CDF of uniform
    variates; with the same seed the numbers agree to 1e-10 standard deviations."""
    dist = unc.distribution("normal", mean=250.0, sd=15.0, high=300.0)
    r1, r2 = np.random.default_rng(9), np.random.default_rng(9)
    np.testing.assert_allclose(sampling.draw(dist, 20_000, r1),
                               dist.rvs(size=20_000, random_state=r2), rtol=0,
                               atol=15.0 * 1e-10)


def test_unknown_family_falls_back_to_scipy():
    """A family without a fast path (gamma) goes to scipy.stats itself."""
    dist = stats.gamma(2.0, scale=3.0)
    np.testing.assert_array_equal(sampling.draw(dist, 100, np.random.default_rng(1)),
                                  dist.rvs(size=100, random_state=np.random.default_rng(1)))
    z = np.array([-1.2, 0.0])
    np.testing.assert_array_equal(sampling.inverse_cdf(dist, z), dist.ppf(special.ndtr(z)))


KINDS = [("uniform", dict(low=2.0, high=5.0)),
         ("triangular", dict(low=1.0, mode=2.0, high=6.0)),
         ("pert", dict(low=230_000.0, mode=260_000.0, high=300_000.0)),
         ("normal", dict(mean=10.0, sd=2.0)),
         ("normal", dict(mean=1.0, sd=0.5, low=0.0)),
         ("lognormal", dict(mean=3.0, sd=1.5))]


@pytest.mark.parametrize("kind,p", KINDS)
def test_inverse_cdf_of_each_kind_equals_scipy_ppf(kind, p):
    """The copula's inverse CDF equals the frozen distribution's scipy ppf of u = Φ(z)
    (scipy.special.ndtr) within 1e-12 of the distribution's spread (P1 to P99), for z over
    ±6. Above the median the reference is scipy's isf (of 1 − u, or of Φ(−z) for normal
    and lognormal, computed here from z itself): scipy's truncnorm.ppf there is 1.6e-10 sd
    off its own isf at z = 5.4."""
    dist = unc.distribution(kind, **p)
    z = np.linspace(-6, 6, 2001)
    u = special.ndtr(z)
    # above the median: scipy's isf of 1 − u (exact for u ≥ 1/2), or of Φ(−z) where
    # the copula's value comes from z itself
    upper = special.ndtr(-z) if kind in ("normal", "lognormal") and "low" not in p else 1 - u
    ref = np.where(z <= 0, dist.ppf(u), dist.isf(upper))
    spread = float(dist.ppf(0.99) - dist.ppf(0.01))
    np.testing.assert_allclose(sampling.inverse_cdf(dist, z), ref, rtol=0,
                               atol=1e-12 * spread)
    into = np.empty_like(z)
    assert sampling.inverse_cdf(dist, z, out=into) is into
    np.testing.assert_array_equal(into, sampling.inverse_cdf(dist, z))


def test_copula_pert_quantiles_match_scipy():
    """Correlated beta-PERT draws through the copula: the empirical deciles match
    scipy.stats.beta.ppf of the same PERT (Vose 2008 shapes) within five binomial
    standard errors of the probability, √(p(1 − p)/n), mapped through the density."""
    low, mode, high = 0.75, 1.0, 1.5
    w = high - low
    ref = stats.beta(1 + 4 * (mode - low) / w, 1 + 4 * (high - mode) / w, loc=low, scale=w)
    pearson = np.array([[1.0, 0.6], [0.6, 1.0]])
    dists = [unc.distribution("triangular", low=0.8, mode=1.0, high=1.35),
             unc.distribution("pert", low=low, mode=mode, high=high)]
    n = 100_000
    x = unc.sample(dists, n, np.random.default_rng(2), pearson)[1]
    for p in np.arange(0.1, 1.0, 0.1):
        q = float(ref.ppf(p))
        tol = 5 * math.sqrt(p * (1 - p) / n) / float(ref.pdf(q))
        assert abs(np.quantile(x, p) - q) < tol, p


@settings(max_examples=60, deadline=None)
@given(c=st.floats(0.0, 1.0), u=st.floats(0.0, 1.0))
def test_beta_ppf_is_monotone_and_inverts_betainc(c, u):
    """Property: for any PERT shape and probability, scipy.special.betainc of the result
    is u within 1e-11 absolute, and the result lies in [0, 1]."""
    a, b = 1 + 4 * c, 1 + 4 * (1 - c)
    x = float(sampling.beta_ppf(np.array([u]), a, b)[0])
    assert 0.0 <= x <= 1.0
    assert special.betainc(a, b, x) == pytest.approx(u, abs=1e-11)


def test_standard_form_reads_positional_and_keyword_arguments():
    """loc and scale given by position or by name; shapes by position or by name."""
    assert sampling.standard_form(stats.norm(3.0, 2.0)) == ("norm", (), 3.0, 2.0)
    assert sampling.standard_form(stats.beta(a=2.0, b=3.0, scale=4.0)) == \
        ("beta", (2.0, 3.0), 0.0, 4.0)
    assert sampling.standard_form(stats.triang(0.5, 1.0, 2.0)) == ("triang", (0.5,), 1.0, 2.0)
    assert sampling.standard_form(object()) is None
