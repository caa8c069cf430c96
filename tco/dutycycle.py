"""Duty-cycle time series: the speed, grade and elevation a truck drives, step by step.

Every source of a trip — a CSV trace, a GPX track, or a synthetic cycle built from route
segments — ends up in one form, the *trace*: a :class:`pandas.DataFrame` with a
``RangeIndex`` and these columns, all SI:

=============  ======  ==========================================================
column         unit    meaning
=============  ======  ==========================================================
``time``       [s]     0, dt, 2·dt, … (fixed step)
``speed``      [m/s]   vehicle speed at the sample, ≥ 0
``grade``      [-]     rise/run of the interval from this sample to the next
``elevation``  [m]     elevation at the sample
``distance``   [m]     cumulative distance from the start of the trace
``leg``        [-]     leg number, 0-based (int)
=============  ======  ==========================================================

An optional boolean column ``parked`` marks samples of a parked dwell (loading or
unloading at the end of a leg): the interval *into* such a sample is standing with the
engine off unless a parked-idle share is given (:func:`tco.energy.simulate`). Traffic
stops inside a leg are not parked. :func:`concatenate_legs` keeps the column.

Interval scheme
---------------
Interval *i* runs from sample *i* to sample *i + 1*. Its mean speed is
``(v[i] + v[i+1]) / 2`` and

    distance[i+1] - distance[i] = (v[i] + v[i+1]) / 2 · dt
    elevation[i+1] - elevation[i] = grade[i] · (distance[i+1] - distance[i])

hold to rounding for every trace this module returns. The last row has no interval of its
own; its grade repeats the one before. ``distance`` and ``speed`` are treated as
horizontal (map) distance and speed, so the rise of an interval is grade × run. Along the
road the length is larger by √(1 + grade²): at most 0.5 % for grades up to 10 %.

``DataFrame.attrs`` carries ``dt`` [s], ``leg_starts`` (sample index where each leg
starts), ``source``, ``smoothing`` (method and window, or ``None``),
``climb_before_smoothing`` and ``climb_after_smoothing`` [m], ``time_scale`` [-] and a
list of plain-language ``notes``.

Units in CSV headers are read with pint through :mod:`tco.units`; everything inside is SI.
User errors raise :class:`tco.errors.InputError` naming the file and the line/column (CSV),
the track point (GPX) or the segment field.
"""
from __future__ import annotations

import csv
import io
import math
import re
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any, Callable, NamedTuple

import numpy as np
import pandas as pd
from scipy.interpolate import PchipInterpolator

from tco.report import formatting as fm
from tco.budget import check_samples
from tco.errors import InputError
from tco.units import UnitError, to_si, ureg

__all__ = [
    "COLUMNS",
    "CSV_DEFAULT_UNITS",
    "DEFAULT_MAX_ACCEL",
    "DEFAULT_MAX_DECEL",
    "DEFAULT_SMOOTHING_WINDOW",
    "MAX_GRADE",
    "STOP_SPEED",
    "from_segments",
    "read_csv_trace",
    "read_gpx_trace",
    "smooth_elevation",
    "Resampled",
    "resample",
    "resample_arrays",
    "concatenate_legs",
    "leg_starts",
    "trace_summary",
]

#: Columns of a trace, in order.
COLUMNS = ("time", "speed", "grade", "elevation", "distance", "leg")

#: Default maximum acceleration of a loaded heavy truck (about 40 t gross). [m/s²]
#: From memory (common practice): loaded tractor-semitrailers pull away at roughly
#: 0.3–0.5 m/s² and keep well below that at motorway speed.
DEFAULT_MAX_ACCEL = 0.4

#: Default maximum (comfortable service) braking deceleration. [m/s²]
#: From memory (common practice): 0.8–1.0 m/s² is planned, comfortable braking for a
#: loaded heavy truck; emergency braking is several times higher and not part of a cycle.
DEFAULT_MAX_DECEL = 0.9

#: Default elevation smoothing window (full width of the Gaussian kernel, ±2σ). [m]
#: See :func:`smooth_elevation` for the justification.
DEFAULT_SMOOTHING_WINDOW = 250.0

#: Largest grade magnitude accepted after smoothing. [-]
MAX_GRADE = 0.30


def grade_beyond(grade: float) -> str:
    """``+35.0 % is beyond ±30 %``: a grade [-] refused for exceeding :data:`MAX_GRADE`."""
    return f"{fm.signed_percent(grade, 1)} is beyond ±{fm.percent(MAX_GRADE, 0)}"

#: Speed at or below which the truck counts as standing still in :func:`trace_summary`. [m/s]
STOP_SPEED = 0.5

#: Units assumed for CSV columns whose header has no ``[unit]``.
CSV_DEFAULT_UNITS = {
    "time": "s",
    "speed": "km/h",
    "grade": "percent",
    "elevation": "m",
    "distance": "km",
}

_KIND_WORDS = {
    "time": "time unit (s, min, h)",
    "speed": "speed unit (km/h, mph, m/s)",
    "grade": "grade unit (%, -)",
    "elevation": "length unit (m, ft)",
    "distance": "length unit (km, mi, m)",
}

_SEGMENT_KEYS = {"length", "speed", "grade", "stops", "dwell", "name"}

# Largest number of points of the fine working grids (kinematics, elevation smoothing).
_MAX_FINE_POINTS = 2_000_000


# ============================================================================ helpers
def _climb(z: np.ndarray) -> tuple[float, float]:
    """Total climb and total descent [m] of an elevation sequence [m]."""
    dz = np.diff(np.asarray(z, dtype=float))
    return float(dz[dz > 0].sum()), float(-dz[dz < 0].sum())


def _unique_profile(distance: np.ndarray, elevation: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Profile with strictly increasing distance; elevations at one distance are averaged."""
    d = np.asarray(distance, dtype=float)
    z = np.asarray(elevation, dtype=float)
    if d.size > 1 and bool(np.all(d[1:] >= d[:-1])):
        # already sorted (a cumulative distance): the same result as below without a sort
        new = np.empty(d.size, dtype=bool)
        new[0] = True
        np.not_equal(d[1:], d[:-1], out=new[1:])
        if new.all():
            return d, z
        inverse = np.cumsum(new) - 1
        return d[new], np.bincount(inverse, weights=z) / np.bincount(inverse)
    du, inverse, counts = np.unique(d, return_inverse=True, return_counts=True)
    if du.size == d.size:
        order = np.argsort(d, kind="stable")
        return d[order], z[order]
    zu = np.bincount(inverse, weights=z) / counts
    return du, zu


def _profile_slope(prof_d: np.ndarray, prof_z: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Slope [-] of the piecewise-linear profile on the piece that starts at or before x."""
    if prof_d.size < 2:
        return np.zeros_like(x, dtype=float)
    slopes = np.diff(prof_z) / np.diff(prof_d)
    idx = np.clip(np.searchsorted(prof_d, x, side="right") - 1, 0, prof_d.size - 2)
    return slopes[idx]


def _check_dt(dt: float) -> float:
    try:
        dt = float(dt)
    except (TypeError, ValueError):
        raise InputError(f"time step must be a number of seconds, got {dt!r}", where="dt") from None
    if not math.isfinite(dt) or dt <= 0:
        raise InputError(f"time step must be positive, got {fm.plain(dt)} s", where="dt")
    return dt


def _check_positive(value: float, name: str, unit: str) -> float:
    try:
        value = to_si(value, unit)
    except UnitError as exc:
        raise InputError(str(exc), where=name) from None
    if value <= 0:
        raise InputError(f"must be positive, got {fm.plain(value)} {unit}", where=name)
    return value


def _check_profile_grade(
    prof_d: np.ndarray,
    prof_z: np.ndarray,
    locate: Callable[[float], str],
    file=None,
    smoothed: bool = True,
) -> None:
    """Raise InputError where the (smoothed) profile is steeper than ±30 %."""
    if prof_d.size < 2:
        return
    slopes = np.diff(prof_z) / np.diff(prof_d)
    bad = np.flatnonzero(np.abs(slopes) > MAX_GRADE + 1e-12)
    if bad.size:
        i = int(bad[0])
        after = " after smoothing" if smoothed else ""
        raise InputError(
            f"grade of {fm.signed_percent(slopes[i], 1)}{after} is beyond "
            f"±{fm.percent(MAX_GRADE, 0)} (check the elevation data)",
            file=file,
            where=locate(float(prof_d[i])),
        )


# ============================================================================ smoothing
def _smooth_profile(
    distance: np.ndarray, elevation: np.ndarray, window: float | None
) -> tuple[np.ndarray, np.ndarray]:
    """Smoothed elevation on a regular distance grid: (grid [m], elevation [m])."""
    d, z = _unique_profile(distance, elevation)
    if window is None or window <= 0 or d.size < 2:
        return d, z
    length = d[-1] - d[0]
    spacing = float(np.median(np.diff(d)))
    h = min(max(spacing, window / 500.0), window / 50.0)
    h = max(h, length / _MAX_FINE_POINTS)
    n = max(1, int(math.ceil(length / h)))
    grid = np.linspace(d[0], d[-1], n + 1)
    h = grid[1] - grid[0]
    zg = np.interp(grid, d, z)
    sigma = window / 4.0 / h  # window = ±2σ, in grid points
    pad = int(math.ceil(4.0 * sigma)) + 1  # the kernel reaches 4σ (truncate=4.0)
    # Extend each end by the least-squares straight line through the last window of data,
    # so that a steady grade at either end is kept and a noisy end point is not pinned.
    k = max(2, min(zg.size, int(round(window / h)) + 1))
    head = np.polyfit(grid[:k] - grid[0], zg[:k], 1)
    tail = np.polyfit(grid[-k:] - grid[-1], zg[-k:], 1)
    left = np.polyval(head, -h * np.arange(pad, 0, -1))
    right = np.polyval(tail, h * np.arange(1, pad + 1))
    padded = np.concatenate([left, zg, right])
    # scipy.ndimage.gaussian_filter1d(padded, sigma, truncate=4.0)[pad:pad + zg.size], with
    # its kernel, as one numpy convolution over the span it needs (the same sums to
    # rounding, 1e-15 relative; numpy's is vectorised, some 2.5 times faster)
    kernel = _gaussian_kernel(sigma)
    r = kernel.size // 2  # ≤ pad
    zs = np.convolve(padded[pad - r:pad + zg.size + r], kernel, mode="valid")
    return grid, zs


def _gaussian_kernel(sigma: float) -> np.ndarray:
    """Normalised Gaussian weights of ``scipy.ndimage.gaussian_filter1d`` (truncate=4):
    radius ⌊4σ + ½⌋ points, weights exp(−x²/2σ²) / their sum. [-]"""
    radius = int(4.0 * sigma + 0.5)
    x = np.arange(-radius, radius + 1, dtype=float)
    w = np.exp(-0.5 / (sigma * sigma) * x * x)
    return w / w.sum()


def smooth_elevation(distance, elevation, window: float | None = DEFAULT_SMOOTHING_WINDOW):
    """Smooth a noisy elevation profile in the distance domain (Gaussian kernel).

    The profile is interpolated onto a regular distance grid of spacing ``h`` (the median
    sample spacing, kept between window/500 and window/50) and convolved with a Gaussian
    kernel of standard deviation σ = window / 4:

    .. math::

        \\tilde z(x) = \\int z(x') \\, \\frac{1}{\\sigma\\sqrt{2\\pi}}
                      e^{-(x - x')^2 / (2\\sigma^2)} \\, dx'

    Beyond each end the profile is extended by the least-squares straight line through the
    last ``window`` of data, so a steady grade at either end is kept exactly.

    Parameters
    ----------
    distance : array_like or pandas.Series
        Cumulative horizontal distance of each sample, non-decreasing. [m]
    elevation : array_like or pandas.Series
        Measured elevation of each sample. [m]
    window : float or None, optional
        Full width of the kernel, ±2σ (95 % of its weight). ``None`` or 0 turns smoothing
        off. Default 250. [m]

    Returns
    -------
    numpy.ndarray or pandas.Series
        Smoothed elevation at the given distances (a Series with the same index when
        ``elevation`` is a Series). [m]

    Notes
    -----
    Why smooth, and why in distance: GPS and barometric elevation carry noise of a few
    metres from sample to sample (Duran and Earleywine, 2012). Summed naively, that noise
    invents hundreds of metres of climbing on a flat road, and the energy model would
    charge the truck for lifting itself up every one of them. Smoothing over *distance*
    (not time) makes the result independent of how long the truck stood still or how fast
    it drove.

    Why this window: roads are built from straight grades joined by parabolic vertical
    curves whose length is L = K·A (A the change of grade in %). For highway design speeds
    of 80–100 km/h, K is about 26–52 m per % on crests and 30–45 m per % in sags (AASHTO
    Green Book, vertical-curve tables; from memory), so a 4 % change of grade takes
    roughly 100–200 m. Real relief shorter than about 200 m does not occur on roads a heavy
    truck uses at speed, while GPS noise does. The Gaussian's amplitude response is
    exp(-(2πσ/λ)²/2): with the default window (σ = 62.5 m) a hill of wavelength 2 km keeps
    98 % of its height, relief of wavelength 330 m keeps half, and sample-to-sample noise is
    removed. A straight grade is kept exactly (symmetric kernel); a parabolic crest of
    curvature c is lowered by c·σ²/2 (0.4 m for K = 52 m/%). A Gaussian was chosen over a
    Savitzky–Golay filter because its response has no side lobes: in tests here a
    Savitzky–Golay filter of the same width left three to four times as much spurious climb
    on a noisy flat road.

    Valid for road profiles sampled at least every window/4 or so; sparser data are only
    interpolated.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.arange(0.0, 2001.0, 10.0)
    >>> z = 100 + 0.02 * x                       # a steady 2 % grade is kept exactly
    >>> bool(np.allclose(smooth_elevation(x, z), z))
    True

    References
    ----------
    .. [1] Duran, A. and Earleywine, M. (2012). "GPS Data Filtration Method for Drive Cycle
       Analysis Applications." SAE Technical Paper 2012-01-0743, doi:10.4271/2012-01-0743.
    .. [2] American Association of State Highway and Transportation Officials (2011).
       *A Policy on Geometric Design of Highways and Streets*, 6th ed., section 3.4.6
       "Vertical Curves" (design K values; recalled from memory).
    .. [3] SciPy documentation, ``scipy.ndimage.gaussian_filter1d`` (the kernel used here,
       applied with ``numpy.convolve``).
    """
    d = np.asarray(distance, dtype=float)
    z = np.asarray(elevation, dtype=float)
    if d.shape != z.shape or d.ndim != 1:
        raise ValueError("distance and elevation must be 1-D and of equal length")
    if d.size == 0:
        out = z.copy()
    else:
        if np.any(np.diff(d) < 0):
            raise ValueError("distance must be non-decreasing")
        grid, zs = _smooth_profile(d, z, window)
        out = np.interp(d, grid, zs)
    if isinstance(elevation, pd.Series):
        return pd.Series(out, index=elevation.index, name=elevation.name)
    return out


# ============================================================================ resampling
class Resampled(NamedTuple):
    """A resampled trace as plain arrays (see :func:`resample_arrays`)."""

    time: np.ndarray       # [s], k·dt
    speed: np.ndarray      # [m/s]
    grade: np.ndarray      # [-]
    elevation: np.ndarray  # [m]
    distance: np.ndarray   # [m], from 0
    time_scale: float      # stretch of the source time axis (see resample, Notes) [-]


def _resample_core(
    time: np.ndarray,
    distance: np.ndarray,
    dt: float,
    speed: np.ndarray | None,
    prof_d: np.ndarray,
    prof_z: np.ndarray,
) -> pd.DataFrame:
    """Resample a validated trace; the elevation profile is (prof_d, prof_z)."""
    r = _resample_arrays(time, distance, dt, speed, prof_d, prof_z)
    df = pd.DataFrame(
        {
            "time": r.time,
            "speed": r.speed,
            "grade": r.grade,
            "elevation": r.elevation,
            "distance": r.distance,
            "leg": np.zeros(r.time.size, dtype=np.int64),
        }
    )
    df.attrs.update(dt=dt, time_scale=r.time_scale, leg_starts=[0], notes=[])
    return df


def _resample_arrays(
    time: np.ndarray,
    distance: np.ndarray,
    dt: float,
    speed: np.ndarray | None,
    prof_d: np.ndarray,
    prof_z: np.ndarray,
) -> Resampled:
    """:func:`_resample_core` without the DataFrame."""
    t = time - time[0]
    span = float(t[-1])
    if span < dt * (1 - 1e-9):
        raise InputError(
            f"the trace lasts {fm.plain(span)} s, less than one time step "
            f"(dt = {fm.plain(dt)} s)", where="dt"
        )
    check_samples(span / dt + 1, dt, what="this trace")  # before allocating the grid
    n = max(1, int(math.ceil(span / dt - 1e-9)))
    if speed is not None and speed[-1] == 0.0 and n * dt > span:
        # Ends at rest: standing a little longer changes nothing, so pad instead of stretching.
        t = np.append(t, n * dt)
        distance = np.append(distance, distance[-1])
        speed = np.append(speed, 0.0)
        span = n * dt
    scale = n * dt / span  # ≥ 1: stretch the time axis so the last sample is the end
    grid = np.arange(n + 1) * dt
    ts = t * scale
    if speed is not None:
        # Speeds are known at the source samples and vary linearly in time between them
        # (constant acceleration); sample them, then integrate by the interval rule.
        v = np.interp(grid, ts, speed / scale)
    else:
        # Only positions are known: interpolate distance monotonically (PCHIP keeps it
        # monotone), take the mean speed of each interval, m, and give each sample the mean
        # of its two intervals. The interval rule then reproduces the total distance exactly.
        s = distance - distance[0]
        with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
            sg = PchipInterpolator(ts, s)(grid)  # tiny steps can overflow its slope weights
        if not np.all(np.isfinite(sg)):
            sg = np.interp(grid, ts, s)
        sg[0], sg[-1] = 0.0, s[-1]
        sg = np.maximum.accumulate(np.maximum(sg, 0.0))
        m = np.diff(sg) / dt
        v = np.empty(n + 1)
        v[0], v[-1] = m[0], m[-1]
        v[1:-1] = 0.5 * (m[:-1] + m[1:])
    v = np.maximum(v, 0.0)
    dist = np.concatenate(([0.0], np.cumsum(0.5 * (v[1:] + v[:-1]) * dt)))
    x = distance[0] + dist
    elev = np.interp(x, prof_d, prof_z) if prof_d.size > 1 else np.full(n + 1, prof_z[0])
    dd = np.diff(dist)
    dz = np.diff(elev)
    moving = dd > 1e-9
    local = _profile_slope(prof_d, prof_z, x[:-1])
    grade_int = np.where(moving, dz / np.where(moving, dd, 1.0), local)
    grade = np.append(grade_int, grade_int[-1])
    bad = np.flatnonzero(np.abs(grade) > MAX_GRADE + 1e-9)
    if bad.size:
        i = int(bad[0])
        raise InputError(
            f"grade of {grade_beyond(grade[i])}",
            where=f"distance {fm.quantity(dist[i], 'm', digits=0)}",
        )
    return Resampled(grid, v, grade, elev, dist, float(scale))


def _validate_series(time, distance, elevation, speed) -> tuple[np.ndarray, ...]:
    arrays = {}
    for name, arr in (("time", time), ("distance", distance), ("elevation", elevation),
                      ("speed", speed)):
        if arr is None:
            arrays[name] = None
            continue
        a = np.asarray(arr, dtype=float).ravel()
        if not np.all(np.isfinite(a)):
            raise InputError(f"{name} has blank or non-finite values", where=name)
        arrays[name] = a
    n = arrays["time"].size
    for name, a in arrays.items():
        if a is not None and a.size != n:
            raise InputError(f"{name} has {a.size} values but time has {n}", where=name)
    if n < 2:
        raise InputError("a trace needs at least two samples", where="time")
    i = np.flatnonzero(np.diff(arrays["time"]) <= 0)
    if i.size:
        k = int(i[0]) + 1
        raise InputError("time goes backwards or repeats", where=f"time[{k}]")
    i = np.flatnonzero(np.diff(arrays["distance"]) < 0)
    if i.size:
        raise InputError("distance goes backwards", where=f"distance[{int(i[0]) + 1}]")
    if arrays["speed"] is not None and np.any(arrays["speed"] < 0):
        raise InputError("negative speed", where=f"speed[{int(np.argmax(arrays['speed'] < 0))}]")
    return arrays["time"], arrays["distance"], arrays["elevation"], arrays["speed"]


def resample(time, distance, elevation, dt: float = 1.0, speed=None) -> pd.DataFrame:
    """Resample a trace to a fixed time step and derive speed and grade consistently.

    With node speeds known (``speed`` given) they are taken as varying linearly in time
    between samples (constant acceleration), sampled at t_k = k·dt, and distance follows
    the interval rule

    .. math:: d_{k+1} = d_k + \\tfrac12 (v_k + v_{k+1})\\,\\Delta t .

    Without speeds, cumulative distance s(t) is interpolated with a monotone cubic (PCHIP),
    the interval means m_k = (s(t_{k+1}) - s(t_k))/Δt are formed and each sample gets
    v_k = (m_{k-1} + m_k)/2 (v_0 = m_0, v_n = m_{n-1}); the interval rule then gives the
    source's total distance exactly. Elevation is a function of distance (linear
    interpolation of the profile) and grade_k = Δz_k / Δd_k; where the truck stands still
    the grade is the profile's slope at that point.

    Parameters
    ----------
    time : array_like
        Sample times, strictly increasing; any origin. [s]
    distance : array_like
        Cumulative horizontal distance at each sample, non-decreasing. [m]
    elevation : array_like
        Elevation at each sample (not smoothed here; see :func:`smooth_elevation`). [m]
    dt : float, optional
        Output time step. Default 1. [s]
    speed : array_like, optional
        Speed at each sample, ≥ 0, consistent with ``distance``. [m/s]

    Returns
    -------
    pandas.DataFrame
        Trace with columns ``time, speed, grade, elevation, distance, leg`` (see the
        module description). [SI]

    Raises
    ------
    InputError
        Time going backwards or repeating, distance going backwards, negative speed, a
        trace shorter than ``dt``, or a grade beyond ±30 %.

    Notes
    -----
    The source duration T is rarely a whole number of steps; the output lasts n·dt with
    n = ⌈T/dt⌉. A trace with known speeds that ends at rest simply stands still for the
    extra fraction of a step. Otherwise the source time axis is stretched by n·dt/T ≥ 1
    (``attrs["time_scale"]``), so the last sample falls on the end of the trip: duration
    grows by less than one step, speeds and accelerations only shrink (by that factor,
    under dt/T), and total distance is kept. With speeds known, the interval
    rule integrates the sampled speed, which differs from the source's distance only where
    the acceleration changes inside a step: by at most |Δa|·dt²/8 per change. At the
    source's own step (and T a multiple of dt) the speeds are returned unchanged.

    Examples
    --------
    >>> tr = resample([0, 10, 20], [0, 100, 200], [5, 5, 5], dt=5.0, speed=[10, 10, 10])
    >>> tr["distance"].tolist()
    [0.0, 50.0, 100.0, 150.0, 200.0]

    References
    ----------
    .. [1] Fritsch, F. N. and Carlson, R. E. (1980). "Monotone Piecewise Cubic
       Interpolation." SIAM Journal on Numerical Analysis 17(2), 238–246 (PCHIP, as in
       ``scipy.interpolate.PchipInterpolator``).
    """
    dt = _check_dt(dt)
    t, s, z, v = _validate_series(time, distance, elevation, speed)
    prof_d, prof_z = _unique_profile(s, z)
    df = _resample_core(t, s, dt, v, prof_d, prof_z)
    climb = _climb(z)[0]
    df.attrs.update(source="arrays", smoothing=None, climb_before_smoothing=climb,
                    climb_after_smoothing=_climb(df["elevation"].to_numpy())[0])
    return df


def resample_arrays(time, distance, elevation, dt: float = 1.0, speed=None) -> Resampled:
    """:func:`resample` as plain arrays, for callers that resample many short traces.

    The same numbers as :func:`resample` (same checks, same errors), without building a
    DataFrame or the climb figures of its ``attrs``.

    Parameters
    ----------
    time, distance, elevation, dt, speed
        As :func:`resample`. [s], [m], [m], [s], [m/s]

    Returns
    -------
    Resampled
        ``time`` [s], ``speed`` [m/s], ``grade`` [-], ``elevation`` [m], ``distance`` [m]
        and ``time_scale`` [-].

    Examples
    --------
    >>> resample_arrays([0, 10, 20], [0, 100, 200], [5, 5, 5], dt=5.0,
    ...                 speed=[10, 10, 10]).distance.tolist()
    [0.0, 50.0, 100.0, 150.0, 200.0]
    """
    dt = _check_dt(dt)
    t, s, z, v = _validate_series(time, distance, elevation, speed)
    prof_d, prof_z = _unique_profile(s, z)
    return _resample_arrays(t, s, dt, v, prof_d, prof_z)


# ============================================================================ kinematics
def _drive(
    knot_s: np.ndarray,
    knot_limit: np.ndarray,
    interval_limit: np.ndarray,
    knot_dwell: np.ndarray,
    max_accel: float,
    max_decel: float,
    step: float,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Fastest speed profile within limits and acceleration bounds, as (t, s, v).

    ``knot_s`` are J+1 positions [m]; ``knot_limit`` the speed cap at each knot and
    ``interval_limit`` the cap inside each of the J intervals [m/s]; the truck waits
    ``knot_dwell`` [s] at each knot (only meaningful where it stops). On a fine grid of
    spacing ≤ ``step`` [m] the profile is the classic forward/backward pass

        v²_k = min_j (L²_j + 2a(s_k - s_j)) over j ≤ k,  and  min_j (L²_j + 2b(s_j - s_k))
        over j ≥ k,

    which the cumulative minima below compute without a Python loop. Within each fine cell
    v² is linear in s (constant acceleration), so the time of a cell is exactly
    Δs / ((v_k + v_{k+1}) / 2).
    """
    lengths = np.diff(knot_s)
    total = float(knot_s[-1] - knot_s[0])
    step = max(step, total / _MAX_FINE_POINTS)
    # At least two cells per interval: a stretch shorter than the step between two stops
    # still has a moving middle (one cell would have zero speed at both ends).
    cells = np.maximum(2, np.ceil(lengths / step - 1e-9).astype(np.int64))
    first = np.concatenate(([0], np.cumsum(cells)[:-1]))
    j = np.repeat(np.arange(lengths.size), cells)
    i_within = np.arange(j.size) - first[j]
    s = np.append(knot_s[j] + lengths[j] * i_within / cells[j], knot_s[-1])
    limit = np.append(np.where(i_within == 0, knot_limit[j], interval_limit[j]), knot_limit[-1])
    lim2 = limit**2
    a2, b2 = 2.0 * max_accel, 2.0 * max_decel
    fwd = a2 * s + np.minimum.accumulate(lim2 - a2 * s)
    bwd = -b2 * s + np.minimum.accumulate((lim2 + b2 * s)[::-1])[::-1]
    v = np.sqrt(np.maximum(np.minimum(fwd, bwd), 0.0))
    v[limit == 0] = 0.0
    mean = 0.5 * (v[1:] + v[:-1])
    ds = np.diff(s)
    if np.any((mean <= 0) & (ds > 0)):
        k = int(np.flatnonzero((mean <= 0) & (ds > 0))[0])
        raise InputError("the speed is zero over a stretch of road near "
                         f"{fm.quantity(s[k], 'm', digits=0)}")
    t = np.concatenate(([0.0], np.cumsum(np.where(ds > 0, ds / np.where(mean > 0, mean, 1), 0))))
    knot_node = np.append(first, j.size)
    dwell = np.asarray(knot_dwell, dtype=float)
    if np.any(dwell > 0):
        extra = np.zeros(s.size)
        np.add.at(extra, knot_node, dwell)
        t = t + np.cumsum(extra) - extra
        waits = np.flatnonzero(dwell > 0)
        nodes = knot_node[waits]
        t = np.insert(t, nodes + 1, t[nodes] + dwell[waits])
        s = np.insert(s, nodes + 1, s[nodes])
        v = np.insert(v, nodes + 1, 0.0)
    return t, s, v


def _segment_field(seg: Any, key: str, i: int, default=None):
    if isinstance(seg, Mapping):
        value = seg.get(key, default)
    else:
        value = getattr(seg, key, default)
    if value is None:
        raise InputError("missing value", where=f"segments[{i}].{key}")
    return value


def _segment_number(seg: Any, key: str, i: int, unit: str, default=None) -> float:
    value = _segment_field(seg, key, i, default)
    try:
        return to_si(value, unit)
    except UnitError as exc:
        raise InputError(str(exc), where=f"segments[{i}].{key}") from None


def from_segments(
    segments: Sequence[Mapping | Any],
    dt: float = 1.0,
    max_accel: float = DEFAULT_MAX_ACCEL,
    max_decel: float = DEFAULT_MAX_DECEL,
    start_elevation: float = 0.0,
    start_at_rest: bool = True,
    end_at_rest: bool = True,
    step: float = 1.0,
) -> pd.DataFrame:
    """Build a synthetic duty cycle from route segments with realistic speed changes.

    Each segment is driven at its cruise speed where the acceleration and braking limits
    allow. The truck stops at each of the segment's evenly spaced intermediate stops, waits
    the dwell time, and anticipates braking for a slower next segment, a stop or the end,
    so it arrives at the right speed. The profile is the fastest one that respects

    .. math:: v \\le v_\\text{cruise}, \\quad \\frac{dv}{dt} \\le a_\\max,
              \\quad -\\frac{dv}{dt} \\le b_\\max ,

    computed on a fine distance grid (spacing ``step``) and resampled to ``dt``. Elevation
    rises by L·s over a segment of horizontal length L at grade s.

    Parameters
    ----------
    segments : sequence of mapping or object, or pandas.DataFrame
        One entry (or row) per segment, each with ``length`` (horizontal) [m], ``speed`` (cruise) [m/s], and optionally
        ``grade`` (rise/run, default 0) [-], ``stops`` (intermediate stops, evenly spaced
        at L·j/(stops+1), default 0) [-], ``dwell`` (wait per stop, default 0) [s] and a
        ``name``. Numbers are SI; strings with units (``"12 km"``, ``"80 km/h"``,
        ``"3 %"``, ``"2 min"``) are converted with pint.
    dt : float, optional
        Output time step. Default 1. [s]
    max_accel : float, optional
        Largest acceleration. Default :data:`DEFAULT_MAX_ACCEL` (0.4). [m/s²]
    max_decel : float, optional
        Largest braking deceleration, positive. Default :data:`DEFAULT_MAX_DECEL` (0.9).
        [m/s²]
    start_elevation : float, optional
        Elevation at the start. Default 0. [m]
    start_at_rest, end_at_rest : bool, optional
        Start / end standing still (default) rather than at the first / last segment's
        cruise speed.
    step : float, optional
        Distance step of the fine working grid. Default 1. [m]

    Returns
    -------
    pandas.DataFrame
        Trace (see the module description). [SI]

    Raises
    ------
    InputError
        A missing or unknown segment field, a non-positive length or speed, a grade beyond
        ±30 %, a negative or fractional stop count, a negative dwell, or bad parameters.

    Notes
    -----
    Only acceleration limits shape the speed: a truck too weak to hold its cruise speed on
    a climb is the vehicle model's business, not the cycle's. The time of a move from rest
    to rest over length L at cruise speed V (L long enough to reach V) follows from
    constant-acceleration kinematics, t = L/V + V/(2a) + V/(2b). Resampling moves the total
    distance by at most |Δa|·dt²/8 per change of acceleration (see :func:`resample`).

    Examples
    --------
    >>> tr = from_segments([{"length": 1000.0, "speed": 20.0}], max_accel=0.5, max_decel=1.0)
    >>> round(tr["time"].iloc[-1])                     # 1000/20 + 20/(2·0.5) + 20/(2·1.0)
    80

    References
    ----------
    .. [1] Halliday, D., Resnick, R. and Walker, J. *Fundamentals of Physics*, chapter 2,
       "Motion along a straight line" (constant-acceleration equations v² = v₀² + 2aΔx).
    """
    dt = _check_dt(dt)
    max_accel = _check_positive(max_accel, "max_accel", "m/s^2")
    max_decel = _check_positive(max_decel, "max_decel", "m/s^2")
    step = _check_positive(step, "step", "m")
    try:
        start_elevation = to_si(start_elevation, "m")
    except UnitError as exc:
        raise InputError(str(exc), where="start_elevation") from None
    if isinstance(segments, pd.DataFrame):
        segments = segments.to_dict("records")
    if isinstance(segments, (str, bytes, Mapping)) or not isinstance(segments, Sequence):
        raise InputError("segments must be a list of segments", where="segments")
    if len(segments) == 0:
        raise InputError("no segments given", where="segments")

    lengths, speeds, grades, stops, dwells = [], [], [], [], []
    for i, seg in enumerate(segments):
        if isinstance(seg, Mapping):
            unknown = sorted(set(seg) - _SEGMENT_KEYS)
            if unknown:
                raise InputError(
                    f"unknown field '{unknown[0]}'; known fields are length, speed, grade, "
                    "stops, dwell, name",
                    where=f"segments[{i}]",
                )
        length = _segment_number(seg, "length", i, "m")
        speed = _segment_number(seg, "speed", i, "m/s")
        grade = _segment_number(seg, "grade", i, "", 0.0)
        n_stops = _segment_number(seg, "stops", i, "", 0)
        dwell = _segment_number(seg, "dwell", i, "s", 0.0)
        if length <= 0:
            raise InputError(f"length must be positive, got {fm.plain(length)} m",
                             where=f"segments[{i}].length")
        if speed <= 0:
            raise InputError(f"speed must be positive, got {fm.plain(speed)} m/s",
                             where=f"segments[{i}].speed")
        if abs(grade) > MAX_GRADE:
            raise InputError(
                f"grade {grade_beyond(grade)}",
                where=f"segments[{i}].grade",
            )
        if n_stops < 0 or n_stops != int(n_stops):
            raise InputError(
                f"stops must be a whole number ≥ 0, got {fm.plain(n_stops)}",
                where=f"segments[{i}].stops"
            )
        if dwell < 0:
            raise InputError(f"dwell must be ≥ 0, got {fm.plain(dwell)} s",
                             where=f"segments[{i}].dwell")
        lengths.append(length)
        speeds.append(speed)
        grades.append(grade)
        stops.append(int(n_stops))
        dwells.append(dwell)

    # Knots: every segment boundary and every intermediate stop.
    knot_s, knot_limit, interval_limit, knot_dwell = [0.0], [], [], []
    start = 0.0
    for i, (length, speed, n_stops, dwell) in enumerate(zip(lengths, speeds, stops, dwells)):
        prev_speed = speeds[i - 1] if i > 0 else (0.0 if start_at_rest else speed)
        knot_limit.append(min(prev_speed, speed))
        knot_dwell.append(0.0)
        for k in range(1, n_stops + 1):
            knot_s.append(start + length * k / (n_stops + 1))
            interval_limit.append(speed)
            knot_limit.append(0.0)
            knot_dwell.append(dwell)
        start += length
        knot_s.append(start)
        interval_limit.append(speed)
    knot_limit.append(0.0 if end_at_rest else speeds[-1])
    knot_dwell.append(0.0)
    t, s, v = _drive(np.array(knot_s), np.array(knot_limit), np.array(interval_limit),
                     np.array(knot_dwell), max_accel, max_decel, step)

    bounds = np.concatenate(([0.0], np.cumsum(lengths)))
    prof_z = start_elevation + np.concatenate(([0.0], np.cumsum(np.array(lengths) * grades)))
    df = _resample_core(t, s, dt, v, bounds, prof_z)
    climb = float(np.sum(np.array(lengths) * np.maximum(grades, 0.0)))
    df.attrs.update(
        source="segments",
        smoothing=None,
        climb_before_smoothing=climb,
        climb_after_smoothing=climb,
        max_accel=max_accel,
        max_decel=max_decel,
        notes=[f"synthetic cycle from {len(lengths)} segments, {sum(stops)} intermediate stops"],
    )
    return df


# ============================================================================ CSV
#: Fastest speed accepted in a recorded trace: above any truck's governed top speed, with
#: room for GPS jitter; a faster sample is a broken record (a bad coordinate or clock). [m/s]
MAX_TRACE_SPEED = 200 / 3.6


def _check_trace_speed(v: np.ndarray, where, path) -> None:
    """Refuse a recorded speed no truck reaches, naming the first such sample."""
    i = _first_bad(~(v <= MAX_TRACE_SPEED))
    if i is not None:
        limit = fm.quantity(MAX_TRACE_SPEED, "km/h", digits=0)
        raise InputError(f"speed {fm.quantity(v[i], 'km/h', digits=0)} is more than a truck "
                         f"can reach (the limit is {limit})", file=path,
                         where=where(i))

_HEADER = re.compile(r"^\s*([A-Za-z_][A-Za-z_ ]*?)\s*(?:\[\s*(.*?)\s*\])?\s*$")


def _csv_unit_factor(kind: str, unit_text: str, file: Path, where: str) -> float:
    """Factor [SI per user unit] for a column of ``kind`` written in ``unit_text``."""
    u = unit_text.strip()
    if u in ("", "-", "1"):
        u = "dimensionless"
    u = u.replace("%", "percent").replace("²", "^2")
    try:
        q = ureg.parse_expression(u)
    except Exception:  # pint raises several unrelated types for an unknown unit
        raise InputError("unknown unit in the column header", file=file, where=where) from None
    expected = ureg.parse_expression(CSV_DEFAULT_UNITS[kind]).dimensionality
    dim = getattr(q, "dimensionality", ureg.parse_expression("dimensionless").dimensionality)
    if dim != expected:
        raise InputError(
            f"the unit in the column header is not a {_KIND_WORDS[kind]}", file=file,
            where=where
        )
    try:
        return to_si(1.0, u)
    except UnitError as exc:
        raise InputError("cannot read the unit in the column header", file=file,
                         where=where) from None


def _read_csv_table(path: Path) -> tuple[dict[str, np.ndarray], dict[str, str], np.ndarray, int]:
    """Read a CSV trace: (SI columns, header text per column, line numbers, header line)."""
    if not path.is_file():
        raise InputError("file not found", file=path)
    return _read_csv_table_any(path, _fast_file(path))


def _read_csv_table_checked(path: Path):
    """The checked reader only (row by row, cell by cell)."""
    return _read_csv_table_any(path, None)


def _read_csv_table_any(path: Path, fast):
    header: list[str] | None = None
    header_line = 0
    rows: list[list[str]] = []
    lines: list[int] = []
    # a regular file (``fast``): only its header is read row by row here
    try:
        with (io.StringIO(fast[0], newline="") if fast is not None
              else path.open(newline="", encoding="utf-8-sig")) as fh:
            reader = csv.reader(fh)
            for row in reader:
                if not row:
                    continue
                first = row[0].lstrip()
                if first.startswith("#"):
                    continue
                if not first and all(not c.strip() for c in row):
                    continue
                if header is None:
                    header, header_line = row, reader.line_num
                else:
                    rows.append(row)
                    lines.append(reader.line_num)
    except UnicodeDecodeError:
        raise InputError("not a UTF-8 text file", file=path) from None
    except csv.Error as exc:
        raise InputError("cannot read as CSV", file=path) from None
    if header is None:
        raise InputError("empty trace: no header and no data", file=path)
    while header and not header[-1].strip():
        header.pop()
    names: list[str] = []
    factors: list[float] = []
    texts: dict[str, str] = {}
    for c, cell in enumerate(header):
        where = f"line {header_line}, column {c + 1}"
        if not cell.strip():
            raise InputError("empty column header", file=path, where=where)
        m = _HEADER.match(cell)
        name = m.group(1).strip().lower() if m else None
        if name not in CSV_DEFAULT_UNITS:
            raise InputError(
                "unknown column header; known columns are time, speed, grade, "
                "elevation, distance (each with an optional [unit])",
                file=path,
                where=where,
            )
        if name in texts:
            raise InputError(f"column '{name}' appears twice", file=path, where=where)
        unit = m.group(2) if m.group(2) is not None else CSV_DEFAULT_UNITS[name]
        where = f"line {header_line}, column '{name}'"
        factors.append(_csv_unit_factor(name, unit, path, where))
        names.append(name)
        texts[name] = cell.strip()
    ncol = len(names)
    if fast is not None:
        if fast[2].shape[1] == ncol:
            data, lines = fast[2], fast[1]
            columns = {name: data[:, c] * factors[c] for c, name in enumerate(names)}
            return columns, texts, lines, header_line
        return _read_csv_table_checked(path)
    if not rows:
        raise InputError("empty trace: the file has a header but no data rows", file=path,
                         where=f"line {header_line}")
    data = _fast_cells(rows, ncol)
    if data is not None:  # every cell a finite number: the per-cell checks cannot fail
        columns = {name: data[:, c] * factors[c] for c, name in enumerate(names)}
        return columns, texts, np.array(lines), header_line
    data = np.empty((len(rows), ncol))
    for r, (row, ln) in enumerate(zip(rows, lines)):
        if len(row) > ncol and any(c.strip() for c in row[ncol:]):
            raise InputError(
                f"{len(row)} cells but only {ncol} columns", file=path, where=f"line {ln}"
            )
        for c in range(ncol):
            where = f"line {ln}, column '{names[c]}'"
            text = row[c].strip() if c < len(row) else ""
            if not text:
                raise InputError("blank cell", file=path, where=where)
            try:
                value = float(text)
            except ValueError:
                raise InputError("not a number", file=path, where=where) from None
            if not math.isfinite(value):
                raise InputError("not a finite number", file=path, where=where)
            data[r, c] = value
    columns = {name: data[:, c] * factors[c] for c, name in enumerate(names)}
    return columns, texts, np.array(lines), header_line


def _fast_file(path: Path):
    """A regular trace file parsed by pandas' C reader, or None when it is irregular.

    Regular: comment and blank lines only above the header, then one row per line, every
    cell a finite number. Returns (the text up to the end of the header line, line
    numbers of the data rows, data). Anything else returns None and the file goes down the
    checked reader, which names the line and column of a problem.
    """
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError):
        return None
    pos, line = 0, 0
    while True:  # skip comments and blank lines, then the header
        end = text.find("\n", pos)
        if end < 0:
            return None
        line += 1
        cur = text[pos:end].strip()
        pos = end + 1
        if cur and not cur.startswith("#") and cur.strip(", \t\r"):
            break
    head, body = text[:pos], text[pos:]
    if "#" in body or '"' in body or "\n\n" in body.replace("\r", ""):
        return None
    try:
        df = pd.read_csv(io.StringIO(body), header=None, dtype=float, engine="c",
                         skip_blank_lines=False)
    except (ValueError, pd.errors.ParserError, pd.errors.EmptyDataError):
        return None
    data = df.to_numpy()
    if data.size == 0 or not np.isfinite(data).all():
        return None
    return head, line + 1 + np.arange(len(data)), data


def _fast_cells(rows: list[list[str]], ncol: int) -> np.ndarray | None:
    """The rows as a float array when every row has ``ncol`` finite numbers, else None.

    numpy's C parser does in one call what the checked loop below does cell by cell (a
    day of 1 Hz data is ~10x faster); any irregular row sends the file down the checked
    loop, which names the line and column of the problem.
    """
    if any(len(r) != ncol for r in rows):
        return None
    try:
        data = np.array(rows, dtype=float)  # strips spaces; rejects text
    except ValueError:
        return None
    if data.shape != (len(rows), ncol) or not np.isfinite(data).all():
        return None
    return data


def _first_bad(mask: np.ndarray) -> int | None:
    idx = np.flatnonzero(mask)
    return int(idx[0]) if idx.size else None


def read_csv_trace(
    path: str | Path,
    dt: float = 1.0,
    cruise_speed: float | str | None = None,
    smoothing_window: float | None = DEFAULT_SMOOTHING_WINDOW,
    max_accel: float = DEFAULT_MAX_ACCEL,
    max_decel: float = DEFAULT_MAX_DECEL,
) -> pd.DataFrame:
    """Read a duty-cycle trace from a CSV file and resample it to a fixed time step.

    The header names the columns, each with an optional unit in brackets read by pint:
    ``time [s]``, ``speed [km/h]``, ``grade [%]``, ``elevation [ft]``, ``distance [mi]``.
    Without a bracket the defaults are time s, speed km/h, grade %, elevation m, distance km
    (:data:`CSV_DEFAULT_UNITS`); ``grade [-]`` is rise/run. Lines starting with ``#`` and
    blank lines are skipped. Accepted column sets:

    * ``time, speed, grade`` or ``time, speed, elevation`` — a recorded drive. Distance is
      the integral of speed by the interval rule Δd = (v_i + v_{i+1})/2 · Δt. The grade of a
      row applies from that row to the next.
    * ``distance, elevation`` with a ``speed`` column or a constant ``cruise_speed`` — a
      route. A time trace is built as in :func:`from_segments`: the truck starts and ends
      at rest, has each row's speed at that row, may go up to the higher of two neighbouring
      rows' speeds between them, and keeps within ``max_accel``/``max_decel``. A row with
      speed 0 is a stop without dwell.

    An elevation column is smoothed over distance with :func:`smooth_elevation`; a grade
    column is used as given.

    Parameters
    ----------
    path : str or pathlib.Path
        The CSV file (comma-separated, UTF-8).
    dt : float, optional
        Output time step. Default 1. [s]
    cruise_speed : float or str, optional
        Constant speed for a distance-based file without a speed column; a number in m/s
        or a string with units (``"80 km/h"``). Ignored (with a note) when the file has a
        speed column. [m/s]
    smoothing_window : float or None, optional
        Elevation smoothing window; ``None`` or 0 for none. Default 250. [m]
    max_accel, max_decel : float, optional
        Acceleration limits for a distance-based file. Defaults 0.4 and 0.9. [m/s²]

    Returns
    -------
    pandas.DataFrame
        Trace (see the module description); ``attrs`` records the source, smoothing and
        total climb before and after smoothing. [SI]

    Raises
    ------
    InputError
        With the file and, for cell problems, ``line N, column 'header'`` where N is the
        line number an editor shows (the header is line 1 when there are no comment lines):
        missing file, empty trace, blank or non-numeric cells, time going backwards or
        repeating, distance going backwards or repeating, negative speed, grade beyond
        ±30 % (as given or after smoothing), unknown or missing columns, a unit of the wrong
        kind, or a missing cruise speed.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "t.csv"
    >>> _ = f.write_text("time [s],speed [m/s],grade [%]\\n0,10,0\\n10,10,0\\n")
    >>> read_csv_trace(f, dt=5)["distance"].tolist()
    [0.0, 50.0, 100.0]
    """
    path = Path(path)
    dt = _check_dt(dt)
    smoothing_window = _check_window(smoothing_window)
    smoothing_on = _smoothing_attr(smoothing_window) is not None
    cols, texts, lines, header_line = _read_csv_table(path)
    names = set(cols)
    hwhere = f"line {header_line}"

    def cell_where(name: str, i: int) -> str:
        return f"line {lines[i]}, column '{name}'"

    def nearest_line(s_rows: np.ndarray) -> Callable[[float], str]:
        def locate(x: float) -> str:
            i = int(np.clip(np.searchsorted(s_rows, x), 0, s_rows.size - 1))
            return f"line {lines[i]} (distance {fm.quantity(x, 'm', digits=0)})"
        return locate

    if len(lines) < 2:
        raise InputError("a trace needs at least two data rows", file=path,
                         where=f"line {lines[0]}")
    notes: list[str] = []
    if "time" in names:
        if "speed" not in names:
            raise InputError("missing column 'speed' (a trace with time needs speed and grade "
                             "or elevation)", file=path, where=hwhere)
        if "distance" in names:
            raise InputError("a trace with time takes its distance from speed: remove the "
                             "distance column", file=path, where=hwhere)
        if "grade" in names and "elevation" in names:
            raise InputError("give grade or elevation, not both", file=path, where=hwhere)
        if "grade" not in names and "elevation" not in names:
            raise InputError("missing column 'grade' or 'elevation'", file=path, where=hwhere)
        t, v = cols["time"], cols["speed"]
        i = _first_bad(np.diff(t) <= 0)
        if i is not None:
            word = "repeats" if t[i + 1] == t[i] else "goes backwards"
            raise InputError(f"time {word} ({fm.plain(t[i + 1])} s after {fm.plain(t[i])} s)",
                             file=path,
                             where=cell_where("time", i + 1))
        i = _first_bad(v < 0)
        if i is not None:
            raise InputError("negative speed", file=path, where=cell_where("speed", i))
        _check_trace_speed(v, lambda k: cell_where("speed", k), path)
        s = np.concatenate(([0.0], np.cumsum(0.5 * (v[1:] + v[:-1]) * np.diff(t))))
        if "grade" in names:
            g = cols["grade"]
            i = _first_bad(np.abs(g) > MAX_GRADE + 1e-12)
            if i is not None:
                raise InputError(f"grade {grade_beyond(g[i])}",
                                 file=path, where=cell_where("grade", i))
            z = np.concatenate(([0.0], np.cumsum(g[:-1] * np.diff(s))))
            prof_d, prof_z = _unique_profile(s, z)
            smoothing = None
            notes.append("grade column used as given (elevation starts at 0 m)")
        else:
            z = cols["elevation"]
            prof_d, prof_z = _smooth_profile(s, z, smoothing_window)
            _check_profile_grade(prof_d, prof_z, nearest_line(s), path, smoothing_on)
            smoothing = _smoothing_attr(smoothing_window)
        try:
            df = _resample_core(t, s, dt, v, prof_d, prof_z)
        except InputError as exc:
            raise exc.located(file=path) from None
    elif "distance" in names:
        if "elevation" not in names:
            raise InputError("missing column 'elevation' (a route with distance needs "
                             "elevation)", file=path, where=hwhere)
        if "grade" in names:
            raise InputError("a route with distance takes its grade from elevation: remove "
                             "the grade column", file=path, where=hwhere)
        d, z = cols["distance"], cols["elevation"]
        i = _first_bad(np.diff(d) <= 0)
        if i is not None:
            word = "repeats" if d[i + 1] == d[i] else "goes backwards"
            raise InputError(f"distance {word}", file=path, where=cell_where("distance", i + 1))
        s = d - d[0]
        if "speed" in names:
            v = cols["speed"]
            i = _first_bad(v < 0)
            if i is not None:
                raise InputError("negative speed", file=path, where=cell_where("speed", i))
            _check_trace_speed(v, lambda k: cell_where("speed", k), path)
            i = _first_bad((v[1:] == 0) & (v[:-1] == 0))
            if i is not None:
                raise InputError("speed is 0 on two rows in a row: the truck never gets there",
                                 file=path, where=cell_where("speed", i + 1))
            if cruise_speed is not None:
                notes.append("cruise_speed ignored: the file has a speed column")
        else:
            if cruise_speed is None:
                raise InputError("no speed column and no cruise speed given", file=path,
                                 where="cruise_speed")
            v = np.full(s.size, _check_positive(cruise_speed, "cruise_speed", "m/s"))
        max_accel = _check_positive(max_accel, "max_accel", "m/s^2")
        max_decel = _check_positive(max_decel, "max_decel", "m/s^2")
        prof_d, prof_z = _smooth_profile(s, z, smoothing_window)
        _check_profile_grade(prof_d, prof_z, nearest_line(s), path, smoothing_on)
        smoothing = _smoothing_attr(smoothing_window)
        knot_limit = v.copy()
        knot_limit[0] = knot_limit[-1] = 0.0  # start and end at rest
        interval_limit = np.maximum(v[1:], v[:-1])
        try:
            tt, ss, vv = _drive(s, knot_limit, interval_limit, np.zeros(s.size), max_accel,
                                max_decel, 1.0)
            df = _resample_core(tt, ss, dt, vv, prof_d, prof_z)
        except InputError as exc:
            raise exc.located(file=path) from None
        notes.append("time built from distance and speed, starting and ending at rest")
    else:
        raise InputError("missing column 'time' or 'distance'; accepted sets are time, speed "
                         "and grade or elevation; or distance and elevation (with speed or a "
                         "cruise speed)", file=path, where=hwhere)
    if "time" in names and cols["time"][0] != 0:
        notes.append(f"time shifted to start at 0 (file starts at {fm.plain(cols['time'][0])} s)")
    df.attrs.update(
        source=str(path),
        smoothing=smoothing,
        climb_before_smoothing=_climb(z)[0],
        climb_after_smoothing=_climb(df["elevation"].to_numpy())[0],
        notes=notes,
    )
    return df


def _check_window(window) -> float | None:
    """The smoothing window as a float ≥ 0 [m], or None for no smoothing."""
    if window is None:
        return None
    try:
        value = to_si(window, "m")
    except UnitError as exc:
        raise InputError(str(exc), where="smoothing_window") from None
    if value < 0:
        raise InputError(f"must be ≥ 0 m, got {fm.plain(value)} m", where="smoothing_window")
    return value


def _smoothing_attr(window: float | None) -> dict | None:
    if window is None or window <= 0:
        return None
    return {"method": "gaussian, distance domain", "window_m": float(window),
            "sigma_m": float(window) / 4.0}


# ============================================================================ GPX
def read_gpx_trace(
    path: str | Path,
    dt: float = 1.0,
    smoothing_window: float | None = DEFAULT_SMOOTHING_WINDOW,
) -> pd.DataFrame:
    """Read a GPX track with timestamps and elevation and resample it to a fixed step.

    All track points of all tracks and segments are taken in file order. Horizontal
    distance between consecutive points comes from gpxpy's ``distance_2d`` (equirectangular
    approximation for nearby points, haversine for distant ones, on a sphere of radius
    6 378 137 m); time from the timestamps; elevation is smoothed over distance with
    :func:`smooth_elevation`; speed follows from :func:`resample` (monotone interpolation
    of distance against time).

    Parameters
    ----------
    path : str or pathlib.Path
        The GPX file.
    dt : float, optional
        Output time step. Default 1. [s]
    smoothing_window : float or None, optional
        Elevation smoothing window; ``None`` or 0 for none. Default 250. [m]

    Returns
    -------
    pandas.DataFrame
        Trace (see the module description). [SI]

    Raises
    ------
    InputError
        Missing or unreadable file, no track points, a point without timestamp or
        elevation, time going backwards or repeating (``where`` names the track, segment
        and point, 1-based), or a grade beyond ±30 % after smoothing.

    Notes
    -----
    GPS position jitter while the truck stands still adds a little distance; drop such
    points beforehand if it matters. Gaps between segments are bridged by a straight line.

    References
    ----------
    .. [1] GPX 1.1 Schema Documentation, Topografix (2004), https://www.topografix.com/GPX/1/1/
    .. [2] gpxpy documentation, ``gpxpy.geo.distance``.
    """
    import gpxpy
    import gpxpy.gpx

    path = Path(path)
    dt = _check_dt(dt)
    smoothing_window = _check_window(smoothing_window)
    smoothing_on = _smoothing_attr(smoothing_window) is not None
    if not path.is_file():
        raise InputError("file not found", file=path)
    try:
        with path.open(encoding="utf-8-sig") as fh:  # a byte-order mark is allowed
            gpx = gpxpy.parse(fh)
    except (gpxpy.gpx.GPXException, UnicodeDecodeError, ValueError) as exc:
        raise InputError(f"not a readable GPX file ({type(exc).__name__})", file=path) from None
    points, labels = [], []
    n_segments = 0
    for ti, track in enumerate(gpx.tracks, 1):
        for si, segment in enumerate(track.segments, 1):
            n_segments += 1
            for pi, point in enumerate(segment.points, 1):
                points.append(point)
                labels.append(f"track {ti}, segment {si}, point {pi}")
    if not points:
        raise InputError("empty trace: the file has no track points", file=path)
    if len(points) < 2:
        raise InputError("a trace needs at least two track points", file=path, where=labels[0])
    for p, label in zip(points, labels):
        if p.time is None:
            raise InputError("track point has no timestamp", file=path, where=label)
        if p.elevation is None:
            raise InputError("track point has no elevation", file=path, where=label)
        # coordinates on the globe; an elevation between the deepest dry land and above
        # the highest road (about -430 m to 5,800 m, from memory), with margin
        if not (math.isfinite(p.latitude) and -90 <= p.latitude <= 90):
            raise InputError("latitude must be between -90 and 90 degrees", file=path,
                             where=label)
        if not (math.isfinite(p.longitude) and -180 <= p.longitude <= 180):
            raise InputError("longitude must be between -180 and 180 degrees", file=path,
                             where=label)
        if not (math.isfinite(p.elevation) and -1000 <= p.elevation <= 9000):
            raise InputError("elevation must be between -1,000 and 9,000 m", file=path,
                             where=label)
    t0 = points[0].time
    try:
        t = np.array([(p.time - t0).total_seconds() for p in points])
    except TypeError:
        raise InputError("timestamps mix time zones with local time", file=path) from None
    i = _first_bad(np.diff(t) <= 0)
    if i is not None:
        word = "repeats" if t[i + 1] == t[i] else "goes backwards"
        raise InputError(f"time {word}", file=path, where=labels[i + 1])
    steps = [0.0] + [points[k].distance_2d(points[k - 1]) for k in range(1, len(points))]
    s = np.cumsum(steps)
    _check_trace_speed(np.concatenate(([0.0], np.diff(s) / np.diff(t))),
                       lambda k: f"{labels[k]} (speed from the point before)", path)
    z = np.array([p.elevation for p in points], dtype=float)
    prof_d, prof_z = _smooth_profile(s, z, smoothing_window)

    def locate(x: float) -> str:
        k = int(np.clip(np.searchsorted(s, x), 0, s.size - 1))
        return f"{labels[k]} (distance {fm.quantity(x, 'm', digits=0)})"

    _check_profile_grade(prof_d, prof_z, locate, path, smoothing_on)
    try:
        df = _resample_core(t, s, dt, None, prof_d, prof_z)
    except InputError as exc:
        raise exc.located(file=path) from None
    notes = []
    if n_segments > 1:
        notes.append(f"{n_segments} track segments joined in file order")
    df.attrs.update(
        source=str(path),
        smoothing=_smoothing_attr(smoothing_window),
        climb_before_smoothing=_climb(z)[0],
        climb_after_smoothing=_climb(df["elevation"].to_numpy())[0],
        notes=notes,
    )
    return df


# ============================================================================ legs
def leg_starts(trace: pd.DataFrame) -> np.ndarray:
    """Sample index where each leg of a trace starts.

    Parameters
    ----------
    trace : pandas.DataFrame
        A trace with a ``leg`` column.

    Returns
    -------
    numpy.ndarray of int
        Index of the first sample of each leg, starting with 0.

    Examples
    --------
    >>> import pandas as pd
    >>> leg_starts(pd.DataFrame({"leg": [0, 0, 1, 1, 1, 2]})).tolist()
    [0, 2, 5]
    """
    leg = np.asarray(trace["leg"])
    return np.concatenate(([0], np.flatnonzero(np.diff(leg) != 0) + 1)).astype(np.int64)


def _trace_dt(df: pd.DataFrame) -> float:
    if "dt" in df.attrs:
        return float(df.attrs["dt"])
    t = df["time"].to_numpy()
    return float(t[1] - t[0]) if t.size > 1 else float("nan")


def concatenate_legs(traces: Sequence[pd.DataFrame]) -> pd.DataFrame:
    """Join legs (e.g. loaded out, empty back) into one continuous trace.

    Leg *j* follows leg *j−1* after one time step: its time is shifted to start at
    t_end + dt, its distance to start at d_end + (v_end + v_start)/2 · dt (the junction
    interval obeys the interval rule), and its elevation so that it starts where the
    previous leg ended plus grade × junction distance. ``leg`` numbers the legs in order
    (a trace that already has several legs keeps them, renumbered).

    Parameters
    ----------
    traces : sequence of pandas.DataFrame
        Traces with the same time step ``dt``. [SI]

    Returns
    -------
    pandas.DataFrame
        One trace; ``attrs["leg_starts"]`` lists the first sample index of each leg (also
        available as :func:`leg_starts`), ``attrs["elevation_shift"]`` the shift applied to
        each input [m], and climb before/after smoothing are summed. [SI]

    Raises
    ------
    InputError
        No traces, an empty trace, or different time steps.

    Notes
    -----
    Shifting elevation loses nothing: the model uses elevation differences only. If two
    legs' files disagree about absolute elevation (different GPS or map datum), the
    shift hides the disagreement rather than inventing a cliff at the junction.

    Examples
    --------
    >>> out = from_segments([{"length": 500.0, "speed": 15.0, "grade": 0.02}])
    >>> back = from_segments([{"length": 500.0, "speed": 15.0, "grade": -0.02}])
    >>> both = concatenate_legs([out, back])
    >>> both.attrs["leg_starts"] == [0, len(out)]
    True
    >>> round(float(both["elevation"].iloc[-1] - both["elevation"].iloc[0]), 6)
    0.0
    """
    traces = [] if isinstance(traces, pd.DataFrame) else list(traces)
    if not traces:
        raise InputError("no legs given (pass a list of traces)", where="legs")
    dt = None
    parts = []
    shifts = []
    notes: list[str] = []
    climbs = [0.0, 0.0]
    t_end = d_end = z_end = g_end = v_end = None
    leg_offset = 0
    for j, tr in enumerate(traces):
        missing = [c for c in COLUMNS if c not in tr.columns]
        if missing:
            raise InputError(f"not a trace: missing column '{missing[0]}'", where=f"legs[{j}]")
        if len(tr) < 2:
            raise InputError("empty trace", where=f"legs[{j}]")
        this_dt = _trace_dt(tr)
        if dt is None:
            dt = this_dt
        elif not math.isclose(this_dt, dt, rel_tol=1e-9):
            raise InputError(f"time step {fm.plain(this_dt)} s differs from the first leg's "
                             f"{fm.plain(dt)} s",
                             where=f"legs[{j}]")
        part = tr.loc[:, list(COLUMNS)].reset_index(drop=True).copy()
        part["parked"] = (tr["parked"].to_numpy(dtype=bool) if "parked" in tr.columns
                          else np.zeros(len(tr), dtype=bool))
        part["leg"] = pd.factorize(part["leg"])[0] + leg_offset
        if t_end is None:
            dz = 0.0
            part["time"] -= part["time"].iloc[0]
            part["distance"] -= part["distance"].iloc[0]
        else:
            gap = 0.5 * (v_end + part["speed"].iloc[0]) * dt
            part["time"] += t_end + dt - part["time"].iloc[0]
            part["distance"] += d_end + gap - part["distance"].iloc[0]
            dz = z_end + g_end * gap - part["elevation"].iloc[0]
            part["elevation"] += dz
        shifts.append(float(dz))
        leg_offset = int(part["leg"].iloc[-1]) + 1
        t_end, d_end = part["time"].iloc[-1], part["distance"].iloc[-1]
        z_end, g_end = part["elevation"].iloc[-1], part["grade"].iloc[-1]
        v_end = part["speed"].iloc[-1]
        parts.append(part)
        notes.extend(f"leg {j}: {n}" for n in tr.attrs.get("notes", []))
        for k, key in enumerate(("climb_before_smoothing", "climb_after_smoothing")):
            climbs[k] += float(tr.attrs.get(key, _climb(tr["elevation"].to_numpy())[0]))
    out = pd.concat(parts, ignore_index=True)
    out["leg"] = out["leg"].astype(np.int64)
    if not out["parked"].any():
        out = out.drop(columns="parked")
    out.attrs = {
        "dt": dt,
        "leg_starts": leg_starts(out).tolist(),
        "source": [tr.attrs.get("source", "unknown") for tr in traces],
        "smoothing": [tr.attrs.get("smoothing") for tr in traces],
        "elevation_shift": shifts,
        "climb_before_smoothing": climbs[0],
        "climb_after_smoothing": climbs[1],
        "notes": notes,
    }
    return out


# ============================================================================ summary
def trace_summary(trace: pd.DataFrame, stop_speed: float = STOP_SPEED) -> dict[str, float]:
    """Key figures of a trace.

    An interval counts as moving when its mean speed (v_i + v_{i+1})/2 exceeds
    ``stop_speed``. A stop is a run of standing intervals between two moving ones (standing
    at the very start or end is not a stop).

    Parameters
    ----------
    trace : pandas.DataFrame
        A trace (see the module description). [SI]
    stop_speed : float, optional
        Speed at or below which the truck stands. Default 0.5. [m/s]

    Returns
    -------
    dict
        ``distance`` [m], ``duration`` [s], ``moving_time`` [s], ``stops`` [-],
        ``mean_moving_speed`` [m/s] (distance while moving / moving time; 0 if it never
        moves), ``climb`` and ``descent`` [m] (sums of positive / negative elevation
        changes), ``max_grade`` and ``min_grade`` [-], ``legs`` [-].

    Examples
    --------
    >>> tr = from_segments([{"length": 2000.0, "speed": 20.0, "stops": 1, "dwell": 30.0}])
    >>> s = trace_summary(tr)
    >>> s["stops"], round(s["distance"])
    (1, 2000)
    """
    missing = [c for c in COLUMNS if c not in trace.columns]
    if missing:
        raise ValueError(f"not a trace: missing column '{missing[0]}'")
    t = trace["time"].to_numpy(dtype=float)
    v = trace["speed"].to_numpy(dtype=float)
    d = trace["distance"].to_numpy(dtype=float)
    z = trace["elevation"].to_numpy(dtype=float)
    g = trace["grade"].to_numpy(dtype=float)
    dt_int = np.diff(t)
    moving = 0.5 * (v[1:] + v[:-1]) > stop_speed
    moving_time = float(dt_int[moving].sum())
    moving_dist = float(np.diff(d)[moving].sum())
    stops = 0
    if moving.any():
        inner = moving[np.argmax(moving): moving.size - np.argmax(moving[::-1])]
        stops = int(np.sum(inner[1:] & ~inner[:-1]))  # each restart after standing
    climb, descent = _climb(z)
    return {
        "distance": float(d[-1] - d[0]),
        "duration": float(t[-1] - t[0]),
        "moving_time": moving_time,
        "stops": stops,
        "mean_moving_speed": moving_dist / moving_time if moving_time > 0 else 0.0,
        "climb": climb,
        "descent": descent,
        "max_grade": float(g.max()),
        "min_grade": float(g.min()),
        "legs": int(len(np.unique(trace["leg"]))),
    }
