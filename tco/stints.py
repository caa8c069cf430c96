"""Logged vehicle-days made ready for the energy kernel, in one compiled pass.

A telematics vehicle-day (:mod:`tco.telematics`) is a run of samples sorted by time. Before
the kernel can drive it, the day is cut into stints at long gaps, each stint's distance
is integrated, its elevation smoothed over distance (or its grade column integrated to an
elevation), and it is resampled to the scenario's time step. :func:`prepare_day` does all
of it for one vehicle-day in one numba-compiled call, with the methods of
:mod:`tco.dutycycle` step for step:

* distance by the interval rule, Δd = (v_i + v_{i+1})/2 · Δt (:func:`tco.dutycycle.resample`);
* the Gaussian smoothing of :func:`tco.dutycycle.smooth_elevation` — a regular distance
  grid, ends extended by the least-squares straight line through the last window, the
  kernel of ``scipy.ndimage.gaussian_filter1d`` (truncate = 4) — evaluated only at the
  grid points that the linear interpolation back to the samples reads;
* the resampling of :func:`tco.dutycycle.resample_arrays` with known speeds (speed linear
  in time, the time axis stretched so the last sample is the end, grade = Δz/Δd or the
  profile's slope where the truck stands still);
* each resampled sample's payload from the latest source sample at or before it.

Why compiled, and not the numpy functions themselves
----------------------------------------------------
A vehicle-day holds a few stints of a few thousand samples. Called per stint, the numpy
functions spend more time in call overhead and temporaries than in arithmetic (some 30
calls and 20 temporary arrays per stint), and the smoothing convolves the whole grid —
three to five grid points per sample at highway speed — where the interpolation back to
the samples reads only the two points around each sample. No library offers the fused
pass, so it is written here.

Agreement with :mod:`tco.dutycycle`
-----------------------------------
Linear interpolation (numpy's ``interp`` formula, ``slope·(x − x_j) + y_j``), running sums,
the grid (numpy's ``linspace``), the median spacing, group means of repeated distances and
the comparisons are the same floating-point operations in the same order, so they give
the same bits. Three steps differ in rounding only: the convolution sums its 2r + 1
products in another order than numpy's ``convolve`` (which calls BLAS ``ddot``), the
end lines are fitted in closed form rather than by LAPACK's least squares
(``numpy.polyfit``), and the kernel's ``exp`` is libm's rather than numpy's. Each changes
a smoothed elevation by a few units in the last place (about 1e-13 m at 500 m), which
moves a day's totals by about 1e-14 relative; ``tests/test_stints.py`` holds the results
to the numpy functions at 1e-12.
"""
from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
from numba import njit

from tco.budget import check_samples
from tco.dutycycle import MAX_GRADE, grade_beyond
from tco.errors import InputError
from tco.report import formatting as fm

__all__ = ["PreparedDay", "prepare_day"]

#: Finest elevation grid of the smoothing, as :mod:`tco.dutycycle` (its ``_MAX_FINE_POINTS``).
_MAX_FINE_POINTS = 2_000_000.0

_JIT = {"cache": True, "nogil": True, "error_model": "numpy"}
# Reassociation only for the convolution's dot product (vectorised); no other fast-math.
_JIT_DOT = {"cache": True, "nogil": True, "error_model": "numpy",
            "fastmath": {"reassoc", "contract", "nsz"}}

_OK, _TOO_MANY, _STEEP = 0, 1, 2
_NO_WORKSPACE = np.empty(0)


class PreparedDay(NamedTuple):
    """One vehicle-day resampled for the kernel (what :func:`prepare_day` returns).

    Attributes
    ----------
    speed, grade, elevation, payload : numpy.ndarray or None
        Per resampled sample, stints back to back: [m/s], [-], [m], [kg]. None when no
        stint lasts one time step.
    kept : int
        Samples kept after dropping repeated timestamps. [-]
    duplicates : int
        Rows dropped for a repeated timestamp. [-]
    gaps : int
        Gaps longer than the gap limit. [-]
    gap_time : float
        Time in those gaps. [s]
    unused : int
        Kept samples in stints shorter than one time step. [-]
    leg_starts : numpy.ndarray or None
        Index of the first sample and of every sample whose payload differs from the one
        before (int64). [-]
    mean_elevation : float
        Mean of ``elevation`` (numpy's pairwise sum, divided by the count). [m]
    payload_max : float
        Heaviest payload of the day. [kg]
    payload_distance : float
        Σ payload_k · (v_k + v_{k+1})/2 · dt over the intervals (numpy's pairwise sum, as
        ``np.sum``). [kg·m]
    """

    speed: np.ndarray | None
    grade: np.ndarray | None
    elevation: np.ndarray | None
    payload: np.ndarray | None
    kept: int
    duplicates: int
    gaps: int
    gap_time: float
    unused: int
    leg_starts: np.ndarray | None = None
    mean_elevation: float = float("nan")
    payload_max: float = float("nan")
    payload_distance: float = float("nan")


# ----------------------------------------------------------------------------- helpers
@njit(**_JIT)
def _block_sum(a, lo, n):
    """One block (n ≤ 128) of numpy's pairwise summation: eight interleaved partial sums."""
    if n < 8:
        res = 0.0
        for i in range(lo, lo + n):
            res += a[i]
        return res
    r0, r1, r2, r3 = a[lo], a[lo + 1], a[lo + 2], a[lo + 3]
    r4, r5, r6, r7 = a[lo + 4], a[lo + 5], a[lo + 6], a[lo + 7]
    i = 8
    stop = n - (n % 8)
    while i < stop:
        j = lo + i
        r0 += a[j]
        r1 += a[j + 1]
        r2 += a[j + 2]
        r3 += a[j + 3]
        r4 += a[j + 4]
        r5 += a[j + 5]
        r6 += a[j + 6]
        r7 += a[j + 7]
        i += 8
    res = ((r0 + r1) + (r2 + r3)) + ((r4 + r5) + (r6 + r7))
    while i < n:
        res += a[lo + i]
        i += 1
    return res


@njit(**_JIT)
def _pairwise_sum(a, lo, n):
    """numpy's pairwise summation of ``a[lo:lo + n]`` (``np.sum`` of a contiguous float64
    array: blocks of up to 128, halves above, left + right), so the same bits. Written
    with an explicit stack: numba's on-disk cache does not keep recursive functions."""
    if n <= 128:
        return _block_sum(a, lo, n)
    f_lo = np.empty(64, dtype=np.int64)
    f_n = np.empty(64, dtype=np.int64)
    f_left = np.empty(64)
    f_has = np.zeros(64, dtype=np.bool_)
    top = 0
    f_lo[0], f_n[0], f_has[0] = lo, n, False
    while True:
        if f_n[top] > 128:  # descend into the left half
            n2 = f_n[top] // 2
            n2 -= n2 % 8
            f_lo[top + 1], f_n[top + 1], f_has[top + 1] = f_lo[top], n2, False
            top += 1
            continue
        val = _block_sum(a, f_lo[top], f_n[top])
        top -= 1
        while top >= 0 and f_has[top]:  # a right half done: combine, go up
            val = f_left[top] + val
            top -= 1
        if top < 0:
            return val
        # a left half done: keep it, then do the right half
        f_left[top], f_has[top] = val, True
        n2 = f_n[top] // 2
        n2 -= n2 % 8
        f_lo[top + 1], f_n[top + 1], f_has[top + 1] = f_lo[top] + n2, f_n[top] - n2, False
        top += 1


@njit(inline="always")
def _take(ws, top, k):
    """k float64 slots from the work space ``ws`` (bump pointer ``top[0]``), or a new
    array when it is full. Reusing one block keeps the allocator out of the loop: with
    Dask's default ``MALLOC_TRIM_THRESHOLD_`` every fresh array of a stint was mapped and
    page-faulted anew (2.7 times the CPU time, measured)."""
    o = top[0]
    if o + k <= ws.size:
        top[0] = o + k
        return ws[o:o + k]
    return np.empty(k)


@njit(**_JIT)
def _round_half_even(x):
    """Python's ``round(x)`` of a float (ties to even) as an int."""
    f = math.floor(x)
    d = x - f
    if d > 0.5 or (d == 0.5 and f % 2.0 != 0.0):
        f += 1.0
    return int(f)


@njit(**_JIT)
def _interp_sorted(x, xp, fp, out):
    """``numpy.interp(x, xp, fp)`` into ``out`` for non-decreasing ``x`` and strictly
    increasing ``xp`` (a forward walk instead of numpy's guessed binary search; the same
    bracket, the same formula ``slope·(x − xp_j) + fp_j``, the same bits)."""
    n = xp.size
    if n == 1:
        for i in range(x.size):
            out[i] = fp[0]
        return
    j = 0
    js = -1
    slope = 0.0
    last = xp[n - 1]
    for i in range(x.size):
        xv = x[i]
        if xv < xp[0]:
            out[i] = fp[0]
        elif xv > last:
            out[i] = fp[n - 1]
        else:
            while j < n - 1 and xp[j + 1] <= xv:
                j += 1
            if j == n - 1 or xp[j] == xv:
                out[i] = fp[j]
            else:
                if j != js:  # numpy too divides once per piece when x is the longer
                    slope = (fp[j + 1] - fp[j]) / (xp[j + 1] - xp[j])
                    js = j
                out[i] = slope * (xv - xp[j]) + fp[j]


@njit(**_JIT)
def _interp_pieces(x, xp, fp, out):
    """``numpy.interp(x, xp, fp)`` into ``out`` for non-decreasing ``x`` and strictly
    increasing ``xp`` of at least two points, piece by piece of ``xp`` rather than point by
    point of ``x``: the same bracket, the same formula, the same bits as
    :func:`_interp_sorted`. Faster where ``x`` is the denser (the smoothing grid: several
    points a sample): the test for a new piece is taken once a piece, not once a point
    (7 % of :func:`prepare_day`, measured)."""
    n = xp.size
    m = x.size
    i = 0
    first = xp[0]
    while i < m and x[i] < first:
        out[i] = fp[0]
        i += 1
    for j in range(n - 1):
        if i == m:
            break
        hi = xp[j + 1]
        if x[i] < hi:
            xj = xp[j]
            fj = fp[j]
            slope = (fp[j + 1] - fj) / (hi - xj)
            while i < m and x[i] < hi:
                xv = x[i]
                out[i] = fj if xv == xj else slope * (xv - xj) + fj
                i += 1
    while i < m:
        out[i] = fp[n - 1]
        i += 1


@njit(**_JIT)
def _unique_profile(d, z, ws, top):
    """``tco.dutycycle._unique_profile`` for non-decreasing ``d``: distances made strictly
    increasing, the elevations at one distance averaged (summed in order, then divided,
    as ``numpy.bincount``)."""
    n = d.size
    groups = 1
    for i in range(1, n):
        if d[i] != d[i - 1]:
            groups += 1
    if groups == n:
        return d, z
    du = _take(ws, top, groups)
    zu = _take(ws, top, groups)
    g = 0
    du[0] = d[0]
    acc = 0.0 + z[0]
    count = 1
    for i in range(1, n):
        if d[i] != d[i - 1]:
            zu[g] = acc / count
            g += 1
            du[g] = d[i]
            acc = 0.0 + z[i]
            count = 1
        else:
            acc += z[i]
            count += 1
    zu[g] = acc / count
    return du, zu


@njit(**_JIT)
def _line_fit(x, y, lo, k, x0):
    """Least-squares straight line through (x[lo:lo+k] − x0, y[lo:lo+k]): (slope,
    intercept) — ``numpy.polyfit(..., 1)`` in closed form (centred sums)."""
    sx = 0.0
    sy = 0.0
    for i in range(lo, lo + k):
        sx += x[i] - x0
        sy += y[i]
    xm = sx / k
    ym = sy / k
    sxx = 0.0
    sxy = 0.0
    for i in range(lo, lo + k):
        dx = (x[i] - x0) - xm
        sxx += dx * dx
        sxy += dx * (y[i] - ym)
    b = sxy / sxx
    return b, ym - b * xm


@njit(**_JIT_DOT)
def _dot(a, lo, w):
    """Σ_j a[lo + j]·w[j] (reassociated: vectorised; on a view, so that the loop has no
    index arithmetic that keeps it scalar: 6 ns for 101 terms here, against 31 ns)."""
    x = a[lo:lo + w.size]
    acc = 0.0
    for j in range(w.size):
        acc += x[j] * w[j]
    return acc


@njit(**_JIT)
def _smooth(s, z, window, out, ws, top):
    """``tco.dutycycle.smooth_elevation(s, z, window)`` into ``out`` (window > 0, s
    non-decreasing): the Gaussian-smoothed grid evaluated only where the interpolation
    back to ``s`` reads it."""
    du, zu = _unique_profile(s, z, ws, top)
    p = du.size
    if p < 2:
        for i in range(s.size):
            out[i] = zu[0]
        return
    length = du[p - 1] - du[0]
    # h = min(max(median spacing, window/500), window/50). When the middle spacings are
    # all at least window/50 (a truck moving at more than 5 m per sample with the default
    # window), so is the median and h is window/50: a count instead of a selection.
    hi = window / 50.0
    below = 0
    for i in range(p - 1):
        if du[i + 1] - du[i] < hi:
            below += 1
    if below <= (p - 2) // 2:
        h = hi
    else:
        spacing = np.median(np.diff(du))
        h = min(max(spacing, window / 500.0), hi)
    h = max(h, length / _MAX_FINE_POINTS)
    n = max(1, int(math.ceil(length / h)))
    ng = n + 1
    grid = _take(ws, top, ng)  # numpy.linspace(du[0], du[-1], n + 1)
    step = length / n
    for i in range(ng):
        grid[i] = float(i) * step + du[0]
    grid[n] = du[p - 1]
    h = grid[1] - grid[0]
    sigma = window / 4.0 / h
    pad = int(math.ceil(4.0 * sigma)) + 1
    k = max(2, min(ng, _round_half_even(window / h) + 1))
    padded = _take(ws, top, ng + 2 * pad)
    zg = padded[pad:pad + ng]
    _interp_pieces(grid, du, zu, zg)
    # ends: the least-squares line through the last window of the grid
    bh, ah = _line_fit(grid, zg, 0, k, grid[0])
    bt, at = _line_fit(grid, zg, ng - k, k, grid[ng - 1])
    for j in range(pad):
        padded[j] = bh * (-h * float(pad - j)) + ah
        padded[pad + ng + j] = bt * (h * float(j + 1)) + at
    # scipy.ndimage.gaussian_filter1d's kernel (truncate = 4)
    radius = int(4.0 * sigma + 0.5)
    w = np.empty(2 * radius + 1)
    c = -0.5 / (sigma * sigma)
    for j in range(w.size):
        xj = float(j - radius)
        w[j] = math.exp(c * xj * xj)
    total = _pairwise_sum(w, 0, w.size)
    for j in range(w.size):
        w[j] = w[j] / total
    zs = _take(ws, top, ng)  # NaN: not computed yet (the smoothed values are finite)
    zs[:] = np.nan
    lo = pad - radius
    # numpy.interp(s, grid, zs), computing zs[j] on first use
    j = 0
    last = grid[ng - 1]
    for i in range(s.size):
        xv = s[i]
        while j < ng - 1 and grid[j + 1] <= xv:
            j += 1
        if np.isnan(zs[j]):
            zs[j] = _dot(padded, lo + j, w)
        if j == ng - 1 or grid[j] == xv or xv >= last:
            out[i] = zs[j]
        else:
            if np.isnan(zs[j + 1]):
                zs[j + 1] = _dot(padded, lo + j + 1, w)
            slope = (zs[j + 1] - zs[j]) / (grid[j + 1] - grid[j])
            out[i] = slope * (xv - grid[j]) + zs[j]


@njit(**_JIT)
def _resample(t, s, z, v, pay, dt, n, o, sp, gr, el, pl, ws, top):
    """``tco.dutycycle.resample_arrays(t, s, z, dt, speed=v)`` of one stint, with each
    sample's payload, written into ``sp, gr, el, pl`` from index ``o`` (n + 1 samples).
    Returns (0, 0, 0) or, for a grade beyond the limit, (2, grade [-], distance [m])."""
    m = t.size
    tt = _take(ws, top, m + 1)
    vv = _take(ws, top, m + 1)
    t0 = t[0]
    for i in range(m):
        tt[i] = t[i] - t0
        vv[i] = v[i]
    span = tt[m - 1]
    mm = m
    if v[m - 1] == 0.0 and n * dt > span:
        # ends at rest: stand a little longer instead of stretching the time axis
        tt[m] = n * dt
        vv[m] = 0.0
        span = n * dt
        mm = m + 1
    scale = n * dt / span
    for i in range(mm):
        tt[i] = tt[i] * scale
        vv[i] = vv[i] / scale
    grid = _take(ws, top, n + 1)
    for k in range(n + 1):
        grid[k] = float(k) * dt
    vo = sp[o:o + n + 1]
    _interp_sorted(grid, tt[:mm], vv[:mm], vo)
    dist = _take(ws, top, n + 1)
    dist[0] = 0.0
    vo[0] = max(vo[0], 0.0)
    for k in range(1, n + 1):
        vo[k] = max(vo[k], 0.0)
        dist[k] = dist[k - 1] + 0.5 * (vo[k] + vo[k - 1]) * dt
    x = _take(ws, top, n + 1)
    for k in range(n + 1):
        x[k] = s[0] + dist[k]
    prof_d, prof_z = _unique_profile(s, z, ws, top)
    npf = prof_d.size
    eo = el[o:o + n + 1]
    if npf > 1:
        _interp_sorted(x, prof_d, prof_z, eo)
    else:
        for k in range(n + 1):
            eo[k] = prof_z[0]
    # grade of each interval: Δz/Δd where moving, else the profile's slope there
    j = 0
    for k in range(n):
        dd = dist[k + 1] - dist[k]
        if dd > 1e-9:
            g = (eo[k + 1] - eo[k]) / dd
        elif npf < 2:
            g = 0.0
        else:
            # numpy.searchsorted(prof_d, x, "right") - 1, clipped to a piece
            while j < npf and prof_d[j] <= x[k]:
                j += 1
            i = min(max(j - 1, 0), npf - 2)
            g = (prof_z[i + 1] - prof_z[i]) / (prof_d[i + 1] - prof_d[i])
        gr[o + k] = g
    gr[o + n] = gr[o + n - 1]
    for k in range(n + 1):
        if abs(gr[o + k]) > MAX_GRADE + 1e-9:
            return 2, gr[o + k], dist[k]
    # payload of the latest source sample at or before each output sample
    j = 0
    for k in range(n + 1):
        key = grid[k] / scale * (1 + 1e-12)
        while j < m and t[j] - t0 <= key:
            j += 1
        pl[o + k] = pay[min(max(j - 1, 0), m - 1)]
    return 0, 0.0, 0.0


@njit(**_JIT)
def _prepare(t_in, v_in, zg_in, p_in, is_grade, dt, window, gap_limit, base_altitude,
             max_samples, ws):
    """The compiled body of :func:`prepare_day`.

    Returns (speed, grade, elevation, payload, kept, gaps, gap time, unused, error code,
    error value 1, error value 2, slots of ``ws`` holding the outputs).
    """
    m0 = t_in.size
    top = np.zeros(1, dtype=np.int64)
    # repeated timestamps keep their first row
    keep = 1
    for i in range(1, m0):
        if t_in[i] - t_in[i - 1] > 0:
            keep += 1
    if keep == m0:
        t, v, zg, pay = t_in, v_in, zg_in, p_in
    else:
        t = _take(ws, top, keep)
        v = _take(ws, top, keep)
        zg = _take(ws, top, keep)
        pay = _take(ws, top, keep)
        q = 0
        for i in range(m0):
            if i == 0 or t_in[i] - t_in[i - 1] > 0:
                t[q] = t_in[i]
                v[q] = v_in[i]
                zg[q] = zg_in[i]
                pay[q] = p_in[i]
                q += 1
    m = keep
    # stints: cut at gaps longer than the limit
    ncut = 0
    for i in range(1, m):
        if t[i] - t[i - 1] > gap_limit:
            ncut += 1
    edges = np.empty(ncut + 2, dtype=np.int64)
    gapl = np.empty(ncut)
    edges[0] = 0
    q = 1
    for i in range(1, m):
        if t[i] - t[i - 1] > gap_limit:
            edges[q] = i
            gapl[q - 1] = t[i] - t[i - 1]
            q += 1
    edges[ncut + 1] = m
    gap_time = _pairwise_sum(gapl, 0, ncut) if ncut else 0.0
    # samples of each stint (0: too short); the first stint over the sample budget
    ns = np.zeros(ncut + 1, dtype=np.int64)
    total = 0
    unused = 0
    over, over_n = ncut + 1, 0.0
    for c in range(ncut + 1):
        a, b = edges[c], edges[c + 1]
        if b - a < 2 or t[b - 1] - t[a] < dt * (1 - 1e-9):
            unused += b - a
            continue
        span = t[b - 1] - t[a]
        if not (span / dt + 1 <= max_samples):
            if over > ncut:
                over, over_n = c, span / dt + 1
            continue
        n = max(1, int(math.ceil(span / dt - 1e-9)))
        ns[c] = n
        total += n + 1
    sp = _take(ws, top, total)
    gr = _take(ws, top, total)
    el = _take(ws, top, total)
    pl = _take(ws, top, total)
    o = 0
    for c in range(ncut + 1):
        if c == over:
            return sp, gr, el, pl, m, ncut, gap_time, unused, _TOO_MANY, over_n, 0.0, 0
        n = ns[c]
        if n == 0:
            continue
        a, b = edges[c], edges[c + 1]
        ts, vs = t[a:b], v[a:b]
        base = top[0]  # the stint's work arrays are given back after it
        s = _take(ws, top, b - a)
        s[0] = 0.0
        for i in range(1, b - a):
            s[i] = s[i - 1] + 0.5 * (vs[i] + vs[i - 1]) * (ts[i] - ts[i - 1])
        if is_grade:
            z = _take(ws, top, b - a)
            z[0] = base_altitude + 0.0
            acc = 0.0
            for i in range(1, b - a):
                acc += zg[a + i - 1] * (s[i] - s[i - 1])
                z[i] = base_altitude + acc
        elif window > 0:
            z = _take(ws, top, b - a)
            _smooth(s, zg[a:b], window, z, ws, top)
        else:
            z = zg[a:b]
        err, e1, e2 = _resample(ts, s, z, vs, pay[a:b], dt, n, o, sp, gr, el, pl, ws, top)
        if err:
            return sp, gr, el, pl, m, ncut, gap_time, unused, err, e1, e2, 0
        o += n + 1
        top[0] = base
    return sp, gr, el, pl, m, ncut, gap_time, unused, _OK, 0.0, 0.0, top[0]


@njit(**_JIT)
def _day_figures(sp, el, pl, dt, ws):
    """Leg starts (payload changes), mean elevation, heaviest payload and payload ×
    interval distance of a prepared day, summed as numpy sums."""
    n = sp.size
    changes = 1
    for k in range(1, n):
        if pl[k] != pl[k - 1]:
            changes += 1
    starts = np.empty(changes, dtype=np.int64)
    starts[0] = 0
    q = 1
    pmax = pl[0]
    for k in range(1, n):
        if pl[k] != pl[k - 1]:
            starts[q] = k
            q += 1
        if pl[k] > pmax:
            pmax = pl[k]
    top = np.zeros(1, dtype=np.int64)
    work = _take(ws, top, max(n - 1, 0))
    for k in range(n - 1):
        work[k] = pl[k] * (0.5 * (sp[k] + sp[k + 1]) * dt)
    return (starts, _pairwise_sum(el, 0, n) / n, pmax, _pairwise_sum(work, 0, n - 1))


def prepare_day(time, speed, terrain, payload, is_grade: bool, dt: float, window: float,
                gap_limit: float, base_altitude: float, workspace=None) -> PreparedDay:
    """Cut a sorted vehicle-day into stints and resample them for the kernel.

    Parameters
    ----------
    time : numpy.ndarray
        Sample times, non-decreasing (a repeated time keeps its first row). [s]
    speed : numpy.ndarray
        Speed at each sample, finite and ≥ 0. [m/s]
    terrain : numpy.ndarray
        Elevation [m] at each sample, or grade [-] with ``is_grade``.
    payload : numpy.ndarray
        Mass carried at each sample. [kg]
    is_grade : bool
        ``terrain`` is a grade, integrated to an elevation from ``base_altitude``.
    dt : float
        Output time step. [s]
    window : float
        Elevation smoothing window (:func:`tco.dutycycle.smooth_elevation`); 0 for none. [m]
    gap_limit : float
        Longest time between samples bridged by resampling; longer cuts a stint. [s]
    base_altitude : float
        Elevation at the start of each stint of a grade column. [m]
    workspace : numpy.ndarray, optional
        A float64 array to carve the work arrays and the results from (any size; new
        arrays where it is full). The returned arrays then live in it: they are valid
        until the next call with the same work space. Default: new arrays.

    Returns
    -------
    PreparedDay
        The resampled samples (None when no stint lasts one time step) and the counts.

    Raises
    ------
    InputError
        A stint that would need more samples than :data:`tco.budget.MAX_TRIP_SAMPLES`, or a
        resampled grade beyond ±30 % (``where`` gives the distance into the stint), with
        the messages of :func:`tco.dutycycle.resample_arrays`.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(11.0)
    >>> day = prepare_day(t, np.full(11, 10.0), np.zeros(11), np.full(11, 5e3), False,
    ...                   1.0, 250.0, 600.0, 0.0)
    >>> float(day.speed.sum()), float(day.grade.max()), day.gaps
    (110.0, 0.0, 0)
    """
    from tco.budget import MAX_TRIP_SAMPLES

    arrays = [np.ascontiguousarray(a, dtype=np.float64)
              for a in (time, speed, terrain, payload)]
    ws = _NO_WORKSPACE if workspace is None else workspace
    (sp, gr, el, pl, kept, gaps, gap_time, unused, err, e1, e2, used) = _prepare(
        *arrays, bool(is_grade), float(dt), float(window), float(gap_limit),
        float(base_altitude), float(MAX_TRIP_SAMPLES), ws)
    if err == _TOO_MANY:
        check_samples(e1, float(dt), what="this trace")
    elif err == _STEEP:
        raise InputError(f"grade of {grade_beyond(e1)}",
                         where=f"distance {fm.quantity(e2, 'm', digits=0)}")
    dups = int(arrays[0].size - kept)
    if sp.size == 0:
        return PreparedDay(None, None, None, None, int(kept), dups, int(gaps),
                           float(gap_time), int(unused))
    starts, mean_z, pmax, pdist = _day_figures(sp, el, pl, float(dt), ws[used:])
    return PreparedDay(sp, gr, el, pl, int(kept), dups, int(gaps), float(gap_time),
                       int(unused), starts, float(mean_z), float(pmax), float(pdist))
