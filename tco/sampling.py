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

Speed without changing a bit: the generators write straight into the caller's row where
NumPy lets them (``out=``), and the arithmetic around Φ, Φ⁻¹ and the power function runs
in compiled loops (numba) that repeat the array form's operations in the same order
(no fused multiply-add). Φ (``special.ndtr``), Φ⁻¹ (``special.ndtri``), ``**`` and
``exp`` stay SciPy's and NumPy's own: NumPy's vectorized ``**`` and ``exp`` differ from
the C library's in the last bit for some numbers, so a compiled loop calling the C
library would change the draws.

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
from numba import njit
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
    if name in ("uniform", "norm", "lognorm"):  # generated in place, then scaled there
        dest = _destination(out, n)
        if name == "uniform":
            rng.random(out=dest)  # uniform(0, 1): 0 + 1·d, the same doubles
        else:
            rng.standard_normal(out=dest)
            if name == "lognorm":
                np.multiply(dest, shapes[0], out=dest)
                np.exp(dest, out=dest)
        return _into(_scaled(dest, scale, loc, dest), out)
    if name == "triang":
        x = rng.triangular(0, shapes[0], 1, n)
    elif name == "beta":
        x = rng.beta(shapes[0], shapes[1], n)
    elif name == "truncnorm" and _truncnorm_plain(*shapes):
        dest = _destination(out, n)
        _truncnorm_into(rng.uniform(size=n), *shapes, scale, loc, dest)
        return _into(dest, out)
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
        if name == "norm":
            return _scaled(z, scale, loc, out)
        dest = _destination(out, np.shape(z))
        np.multiply(z, shapes[0], out=dest)
        np.exp(dest, out=dest)
        return _into(_scaled(dest, scale, loc, dest), out)
    if form is None:
        return _into(dist.ppf(special.ndtr(z)), out)
    name, shapes, loc, scale = form
    plain = name in ("uniform", "triang") or (name == "beta" and _in_table(*shapes)) or (
        name == "truncnorm" and _truncnorm_plain(*shapes))
    if not plain:
        u = special.ndtr(z)
        if name == "beta":  # shapes outside the table: the exact inverse
            return _scaled(special.betaincinv(*shapes, u), scale, loc, out)
        return _into(dist.ppf(u), out)
    dest = _destination(out, np.shape(z))
    flat = dest.reshape(-1)
    if name == "uniform":
        special.ndtr(z, out=dest)
        return _into(_scaled(dest, scale, loc, dest), out)
    if name == "truncnorm":
        _truncnorm_into(special.ndtr(np.ravel(z)), *shapes, scale, loc, flat)
    else:
        special.ndtr(z, out=dest)  # u, then overwritten with the quantiles
        if name == "triang":
            _triangular_inverse(flat, shapes[0], scale, loc, flat)
        else:
            _beta_into(flat, *shapes, scale, loc, flat)
    return _into(dest, out)


def _scaled(x: np.ndarray, scale: float, loc: float, out: np.ndarray | None) -> np.ndarray:
    """``x * scale + loc`` (in that order, as scipy.stats), into ``out`` when given
    (one compiled pass for 1-D float64 arrays)."""
    if out is None:
        if np.ndim(x) != 1 or x.dtype != np.float64:
            return x * scale + loc
        out = np.empty(x.shape)
    if (x.ndim == 1 and out.ndim == 1 and x.shape == out.shape
            and x.dtype == np.float64 and out.dtype == np.float64):
        _affine(x, float(scale), float(loc), out)
        return out
    np.multiply(x, scale, out=out)
    out += loc
    return out


@njit(cache=True, nogil=True)
def _affine(x, scale, loc, out):
    """``out = x * scale + loc`` (two roundings, as the array form), ``out`` may be ``x``."""
    for i in range(x.shape[0]):
        out[i] = x[i] * scale + loc


def _into(x, out: np.ndarray | None) -> np.ndarray:
    if out is None or x is out:
        return x
    out[...] = x
    return out


def _destination(out: np.ndarray | None, shape) -> np.ndarray:
    """``out`` when the generators and the compiled loops can write into it (contiguous
    float64), else a new array (copied into ``out`` by :func:`_into`)."""
    if (out is not None and out.dtype == np.float64 and out.flags.c_contiguous
            and out.shape == (shape if isinstance(shape, tuple) else (shape,))):
        return out
    return np.empty(shape)


@njit(cache=True, nogil=True)
def _triangular_inverse(u, c, scale, loc, out):
    """``F⁻¹(u)`` of the standard triangular distribution with mode c, times ``scale``
    plus ``loc`` (SciPy's formula, ``triang._ppf``), into ``out`` (may be ``u``)."""
    for i in range(u.shape[0]):
        v = u[i]
        x = np.sqrt(c * v) if v < c else 1 - np.sqrt((1 - c) * (1 - v))
        out[i] = x * scale + loc


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
    if not _in_table(a, b):
        return special.betaincinv(a, b, u)
    out = np.empty(u.shape)
    _beta_into(np.ravel(u), a, b, 1.0, 0.0, out.reshape(-1))
    return out


def _in_table(a: float, b: float) -> bool:
    lo, hi = BETA_SHAPES
    return bool(lo <= a <= hi and lo <= b <= hi)


def _beta_into(u: np.ndarray, a: float, b: float, scale: float, loc: float,
               out: np.ndarray) -> None:
    """:func:`beta_ppf` of the 1-D ``u`` (shapes within :data:`BETA_SHAPES`) times
    ``scale`` plus ``loc``, into ``out`` (which may be ``u``).

    Two compiled passes around NumPy's power function: the first forms the bases of
    ``s`` for both halves, NumPy raises them to their powers (its own power function,
    which differs from the C library's in the last bit for some numbers, so it stays),
    the second evaluates the table.
    """
    table = _beta_table(float(a), float(b))
    lower = np.empty(u.shape[0])
    upper = np.empty(u.shape[0])
    _beta_bases(u, _SPLIT, lower, upper)
    lower **= 1 / a
    upper **= 1 / b
    _beta_table_values(u, _SPLIT, lower, upper, table, PIECES, scale, loc, out)


@njit(cache=True, nogil=True)
def _beta_bases(u, split, lower, upper):
    """The bases of ``s`` on each half, ``u/split`` into ``lower`` and ``(1 − u)/(1 −
    split)`` into ``upper``; a u that is NaN or outside [0, 1] counts as the split."""
    for i in range(u.shape[0]):
        v = u[i]
        v = v if (v >= 0.0 and v <= 1.0) else split
        upper[i] = (1 - v) / (1 - split)
        lower[i] = v / split


@njit(cache=True, nogil=True)
def _beta_table_values(u, split, s_lower, s_upper, table, pieces, scale, loc, out):
    """x from the table at ``s`` (``s_lower`` or ``s_upper`` as u is below or above the
    split), clipped to [0, 1] as ``np.clip``, times ``scale`` plus ``loc`` into ``out``
    (may be ``u``); NaN where u is NaN or outside [0, 1]. Without branches, and with the
    degree a constant (the Horner loop is unrolled), so that the loop over u runs in
    vector registers."""
    for i in range(u.shape[0]):
        v = u[i]
        valid = v >= 0.0 and v <= 1.0
        v = v if valid else split
        above = v >= split
        s = s_upper[i] if above else s_lower[i]
        t = s * pieces
        k = min(int(t), pieces - 1)
        r = 2 * (t - k) - 1
        col = k + pieces * above
        x = table[DEGREE, col]
        for j in range(DEGREE - 1, -1, -1):  # Horner
            x = x * r
            x = x + table[j, col]
        x = x * s
        x = 1 - x if above else x
        x = 0.0 if x < 0.0 else x  # np.clip(x, 0, 1): x itself at the bounds and if NaN
        x = 1.0 if x > 1.0 else x
        out[i] = x * scale + loc if valid else np.nan


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
    out = np.empty(q.shape)
    _truncnorm_into(np.ravel(q), a, b, 1.0, 0.0, out.reshape(-1))
    return out


def _truncnorm_into(q: np.ndarray, a: float, b: float, scale: float, loc: float,
                    out: np.ndarray) -> None:
    """:func:`truncnorm_ppf` of the 1-D ``q`` times ``scale`` plus ``loc``, into ``out``
    (not ``q``): a compiled pass for the probabilities, SciPy's ``ndtri`` in place, a
    compiled pass for the sign, the clip and the scale."""
    a, b = float(a), float(b)
    phi = (special.ndtr(a), special.ndtr(b), special.ndtr(-a), special.ndtr(-b))
    _truncnorm_probability(q, *phi, out)
    special.ndtri(out, out=out)
    _truncnorm_finish(q, phi[0], phi[1], a, b, float(scale), float(loc), out)


@njit(cache=True, nogil=True)
def _truncnorm_probability(q, phi_a, phi_b, phi_minus_a, phi_minus_b, out):
    """Φ(x) below the mean, Φ(−x) above it (the module's formulas), into ``out``."""
    for i in range(q.shape[0]):
        v = q[i]
        p = phi_a * (1 - v) + phi_b * v
        out[i] = phi_minus_a * (1 - v) + phi_minus_b * v if p > 0.5 else p


@njit(cache=True, nogil=True)
def _truncnorm_finish(q, phi_a, phi_b, a, b, scale, loc, x):
    """x → −x above the mean, clipped to [a, b] as ``np.clip`` (NaN kept), times
    ``scale`` plus ``loc``, in place."""
    for i in range(q.shape[0]):
        v = q[i]
        y = -x[i] if phi_a * (1 - v) + phi_b * v > 0.5 else x[i]
        y = a if y < a else y  # np.clip(y, a, b): y itself at the bounds and if NaN
        y = b if y > b else y
        x[i] = y * scale + loc
