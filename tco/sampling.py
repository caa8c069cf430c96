"""Drawing numbers from the uncertainty distributions: generators and inverse CDFs at array speed.

:func:`tco.uncertainty.distribution` describes each distribution as a frozen
:mod:`scipy.stats` object (its moments, quantiles and the report use it). Drawing through
that object costs far more than the numbers themselves: argument checks on every call, and
for beta-PERT under a copula the inverse CDF ``scipy.stats.beta.ppf`` (Boost's
``ibeta_inv``, some 2.5 µs a number, 30 times NumPy drawing a normal variate). This module
draws the same laws straight from :class:`numpy.random.Generator` and evaluates the
inverse CDFs in closed form or from a checked polynomial table:

* **Independent inputs** — the same generator calls, in the same order and with the same
  arithmetic, as ``dist.rvs(size=n, random_state=rng)`` in SciPy (``uniform``:
  ``rng.uniform``; ``triang``: ``rng.triangular``; ``beta``: ``rng.beta``; ``norm`` and
  ``lognorm``: ``rng.standard_normal``; ``truncnorm``: the inverse CDF of
  ``rng.uniform``), so a seed gives the same draws as before, bit for bit, except for the
  truncated normal (its inverse CDF here agrees with SciPy's to about 1e-15).
* **Copula inputs** (the copula hands over its normal variate ``z``; ``u = Φ(z)``) —
  normal and lognormal straight from ``z`` (``loc + scale·z``, ``scale·exp(s z)``: the
  exact values of ``F⁻¹(Φ(z))``, without the round trip through ``u``); uniform and
  triangular in closed form (SciPy's own formulas); truncated normal from
  :func:`truncnorm_ppf`; beta (PERT) from :func:`beta_ppf`.

Anything else falls back to the frozen object's own ``rvs`` / ``ppf``.

Inverse of the regularized incomplete beta function
---------------------------------------------------
``x = I⁻¹(u; a, b)``. Near u = 0, ``I_x(a, b) = x^a g(x) / (a B(a, b))`` with g analytic
and g(0) = 1 (the series of the incomplete beta function, DLMF 8.17.7), so x is an analytic
function of ``s = (u/u_m)^(1/a)`` on the lower half ``0 ≤ u ≤ u_m``; likewise ``1 − x`` is
an analytic function of ``s = ((1 − u)/(1 − u_m))^(1/b)`` on the upper half (the
symmetry ``I_x(a, b) = 1 − I_(1−x)(b, a)``). On each half, ``x/s`` (resp. ``(1 − x)/s``)
is interpolated by polynomials of degree :data:`DEGREE` on :data:`PIECES` equal pieces of
s ∈ [0, 1], through Chebyshev points where the exact values come from
:func:`scipy.special.betaincinv` (``2 · PIECES · (DEGREE + 1)`` = 576 evaluations a
distribution, well under a millisecond). Dividing by s keeps the relative accuracy near
0 and 1. Against :func:`scipy.stats.beta.ppf`, for a, b in [1, 5] (every beta-PERT), the
largest difference seen is about 2e-14 absolute and 6e-14 relative
(``tests/test_sampling.py`` holds it to 1e-12); over the whole of :data:`BETA_SHAPES`,
about 4e-12 (at a = b = 10; held to 1e-10). Outside that range the exact
:func:`scipy.special.betaincinv` is used.

References
----------
.. [1] NIST Digital Library of Mathematical Functions, §8.17 (incomplete beta function:
   8.17.7, hypergeometric series; 8.17.4, symmetry), https://dlmf.nist.gov/8.17.
.. [2] Trefethen, L. N. (2013), *Approximation Theory and Approximation Practice*, SIAM,
   ch. 4 and 8 (interpolation in Chebyshev points of analytic functions converges
   geometrically).
.. [3] Devroye, L. (1986), *Non-Uniform Random Variate Generation*, Springer, §II.2
   (inversion).
"""
from __future__ import annotations

import functools

import numpy as np
from scipy import special

__all__ = ["BETA_SHAPES", "DEGREE", "PIECES", "beta_ppf", "draw", "inverse_cdf",
           "standard_form", "truncnorm_ppf"]

#: Pieces of s ∈ [0, 1] per half of the beta table. [-]
PIECES = 32
#: Degree of the interpolating polynomial on each piece. [-]
DEGREE = 8
#: Range of both beta shapes over which the table is used (tested there). [-]
BETA_SHAPES = (0.5, 10.0)
#: Split of the beta table into its lower and upper half, a probability. [-]
_SPLIT = 0.5
#: Truncation points beyond which the truncated normal goes to SciPy (its tail mass
#: underflows in plain arithmetic). [-]
_TAIL = 30.0


def standard_form(dist) -> tuple[str, tuple[float, ...], float, float] | None:
    """The family, shape parameters, loc and scale of a frozen scipy.stats distribution.

    Parameters
    ----------
    dist : scipy.stats frozen distribution

    Returns
    -------
    (name, shapes, loc, scale) or None
        None when the object is not a frozen continuous distribution read here.
    """
    family = getattr(dist, "dist", None)
    if family is None or not hasattr(dist, "args"):
        return None
    names = [s.strip() for s in (family.shapes or "").split(",") if s.strip()]
    args = list(dist.args)
    kwds = dict(dist.kwds)
    shapes = []
    for name in names:
        if args:
            shapes.append(float(args.pop(0)))
        elif name in kwds:
            shapes.append(float(kwds.pop(name)))
        else:
            return None
    loc = float(args.pop(0)) if args else float(kwds.pop("loc", 0.0))
    scale = float(args.pop(0)) if args else float(kwds.pop("scale", 1.0))
    if args or kwds:
        return None
    return family.name, tuple(shapes), loc, scale


def draw(dist, n: int, rng: np.random.Generator, out: np.ndarray | None = None
         ) -> np.ndarray:
    """``n`` independent draws of ``dist``, straight from the generator.

    The same generator calls and arithmetic as ``dist.rvs(size=n, random_state=rng)``
    (see the module notes), without SciPy's per-call argument handling.

    Parameters
    ----------
    dist : scipy.stats frozen distribution
    n : int
        Number of draws.
    rng : numpy.random.Generator
    out : numpy.ndarray of shape (n,), optional
        Where to write the draws (saves a temporary array).

    Returns
    -------
    numpy.ndarray of shape (n,)
        [unit of the distribution]
    """
    form = standard_form(dist)
    if form is None:
        return _into(dist.rvs(size=n, random_state=rng), out)
    name, shapes, loc, scale = form
    if name == "uniform":
        x = rng.uniform(0.0, 1.0, n)
    elif name == "triang":
        x = rng.triangular(0, shapes[0], 1, n)
    elif name == "beta":
        x = rng.beta(shapes[0], shapes[1], n)
    elif name == "norm":
        x = rng.standard_normal(n)
    elif name == "lognorm":
        x = np.exp(shapes[0] * rng.standard_normal(n))
    elif name == "truncnorm" and _truncnorm_plain(*shapes):
        x = truncnorm_ppf(rng.uniform(size=n), *shapes)
    else:
        return _into(dist.rvs(size=n, random_state=rng), out)
    return _scaled(x, scale, loc, out)


def inverse_cdf(dist, z: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """``F⁻¹(Φ(z))`` for the copula's standard normal variates ``z``.

    Φ (:func:`scipy.special.ndtr`) is evaluated only for the families that need it:
    normal and lognormal are taken from z itself.

    Parameters
    ----------
    dist : scipy.stats frozen distribution
    z : numpy.ndarray
        The copula's standard normal variates. [-]
    out : numpy.ndarray, optional
        Where to write the values (saves a temporary array).

    Returns
    -------
    numpy.ndarray
        Of the shape of ``z``. [unit of the distribution]
    """
    form = standard_form(dist)
    if form is not None and form[0] in ("norm", "lognorm"):
        name, shapes, loc, scale = form
        return _scaled(z if name == "norm" else np.exp(shapes[0] * z), scale, loc, out)
    u = special.ndtr(z)
    if form is None:
        return _into(dist.ppf(u), out)
    name, shapes, loc, scale = form
    if name == "uniform":
        x = u
    elif name == "triang":
        c = shapes[0]
        x = np.where(u < c, np.sqrt(c * u), 1 - np.sqrt((1 - c) * (1 - u)))
    elif name == "beta":
        x = beta_ppf(u, *shapes)
    elif name == "truncnorm" and _truncnorm_plain(*shapes):
        x = truncnorm_ppf(u, *shapes)
    else:
        return _into(dist.ppf(u), out)
    return _scaled(x, scale, loc, out)


def _scaled(x: np.ndarray, scale: float, loc: float, out: np.ndarray | None) -> np.ndarray:
    """``x * scale + loc`` (in that order, as scipy.stats), into ``out`` when given."""
    if out is None:
        return x * scale + loc
    np.multiply(x, scale, out=out)
    out += loc
    return out


def _into(x, out: np.ndarray | None) -> np.ndarray:
    if out is None:
        return x
    out[...] = x
    return out


# --------------------------------------------------------------------------- beta
@functools.lru_cache(maxsize=64)
def _beta_table(a: float, b: float) -> np.ndarray:
    """Polynomial coefficients of x/s (lower half) and (1 − x)/s (upper half).

    Returns
    -------
    numpy.ndarray of shape (DEGREE + 1, 2 · PIECES)
        Row j: coefficient of r^j, r ∈ [−1, 1] the position within a piece; columns: the
        lower half's pieces, then the upper half's.
    """
    k = np.arange(DEGREE + 1)
    r = np.cos(np.pi * (2 * k + 1) / (2 * (DEGREE + 1)))[::-1]  # Chebyshev points
    s = (np.arange(PIECES)[:, None] + (r[None, :] + 1) / 2) / PIECES
    lower = special.betaincinv(a, b, _SPLIT * s**a) / s
    upper = special.betaincinv(b, a, (1 - _SPLIT) * s**b) / s
    to_monomial = np.linalg.inv(np.vander(r, DEGREE + 1, increasing=True))
    table = np.concatenate([lower @ to_monomial.T, upper @ to_monomial.T]).T
    return np.ascontiguousarray(table)


def beta_ppf(u, a: float, b: float) -> np.ndarray:
    """Inverse of the regularized incomplete beta function, ``x`` with ``I_x(a, b) = u``.

    The quantile function of the standard beta distribution (``scipy.stats.beta.ppf``),
    from the piecewise polynomial table of the module notes.

    Parameters
    ----------
    u : array_like
        Probabilities in [0, 1]. [-]
    a, b : float
        Shape parameters, > 0. [-]

    Returns
    -------
    numpy.ndarray
        Quantiles in [0, 1]. [-]

    Examples
    --------
    >>> round(float(beta_ppf(0.5, 2.0, 2.0)), 12)  # the median of a symmetric beta
    0.5
    """
    u = np.asarray(u, dtype=float)
    lo, hi = BETA_SHAPES
    if not (lo <= a <= hi and lo <= b <= hi):
        return special.betaincinv(a, b, u)
    table = _beta_table(float(a), float(b))
    valid = (u >= 0) & (u <= 1)  # NaN and outside [0, 1]: NaN, as scipy.stats.beta.ppf
    if not valid.all():
        u = np.where(valid, u, _SPLIT)
    upper = u >= _SPLIT
    s = np.where(upper, ((1 - u) / (1 - _SPLIT)) ** (1 / b), (u / _SPLIT) ** (1 / a))
    t = s * PIECES
    i = np.minimum(t.astype(np.intp), PIECES - 1)
    r = 2 * (t - i) - 1
    i += PIECES * upper
    x = table[DEGREE].take(i)
    for j in range(DEGREE - 1, -1, -1):  # Horner
        x *= r
        x += table[j].take(i)
    x *= s
    out = np.clip(np.where(upper, 1 - x, x), 0.0, 1.0)
    return out if valid.all() else np.where(valid, out, np.nan)


# --------------------------------------------------------------------------- truncated normal
def _truncnorm_plain(a: float, b: float) -> bool:
    """Whether the truncated normal's mass is representable without logarithms."""
    return a < _TAIL and b > -_TAIL


def truncnorm_ppf(q, a: float, b: float) -> np.ndarray:
    """Quantile of the standard normal truncated to [a, b].

    ``Φ(x) = (1 − q) Φ(a) + q Φ(b)`` below the mean, and above it, where Φ nears 1 and
    loses digits, ``Φ(−x) = (1 − q) Φ(−a) + q Φ(−b)`` (sums of positive terms: no
    cancellation); the result is clipped to [a, b].

    Parameters
    ----------
    q : array_like
        Probabilities in [0, 1]. [-]
    a, b : float
        Truncation points in standard deviations from the mean, a < b (±inf allowed). [-]

    Returns
    -------
    numpy.ndarray
        [-]

    Examples
    --------
    >>> float(truncnorm_ppf(0.5, -np.inf, np.inf))
    0.0
    """
    q = np.asarray(q, dtype=float)
    p = special.ndtr(a) * (1 - q) + special.ndtr(b) * q
    upper = p > 0.5
    x = special.ndtri(np.where(upper, special.ndtr(-a) * (1 - q) + special.ndtr(-b) * q, p))
    return np.clip(np.where(upper, -x, x), a, b)
