"""Fast fused pass over a drive trace: road load, both powertrains and state of charge.

:func:`run_trace` gives the same totals as composing the reference functions of
:mod:`tco.roadload`, :mod:`tco.diesel` and :mod:`tco.electric` (the tests hold them equal
to a relative 1e-9 on random traces), in one compiled pass whose memory does not grow
with the trace beyond the state-of-charge output.

Why a compiled loop
-------------------
No library offers a fused road-load / powertrain / state-of-charge loop, and the numpy
form pays for its temporaries: on 10 million samples a numpy road load with trigonometric
temporaries costs about 75 times one pass over the data (``np.dot(speed, grade)``), and
about 20 times in the algebraic form; the battery energy with its "no charge above full"
limit is a running recursion that numpy can only express with several more full-length
temporaries (see :func:`tco.electric.battery_energy_track`). A numba loop over chunks
reads each input once and allocates nothing per sample.

How it is organised
-------------------
The trace is processed leg by leg (mass is constant within a leg) in chunks of
``chunk`` intervals. Each chunk goes through short loops instead of one long one: a
single loop carrying some twenty sums and two buffers measured slower than the split,
and the split lets every loop without a carried dependency vectorize (SIMD):

1. ``_road_load_pass`` — input check on the bit patterns (finite, speed ≥ 0; integer
   tests, which fast-math cannot bend, so the other loops may assume finite numbers),
   forces, wheel power, road-load energies.
2. ``_diesel_pass`` — engine power, Willans fuel, idling, time and distance above each
   powertrain's power limit.
3. ``_electric_pass`` — battery power, discharge and charge sums, wheel traction and
   braking.
4. ``_deficits`` — only where a power limit cannot hold the trace speed: the steady speed
   at the limit, solved by Newton's method for all such intervals of the chunk at once.
5. ``_soc_running_sum`` / ``_soc_clipped`` — the one sequential part, the recursion
   soc ← min(1, soc − P·dt/capacity). When a chunk cannot reach full there is nothing to
   clip and it is a plain running sum, run as four interleaved chains.

Steps 1–4 do not depend on the state of charge, so with ``workers`` > 1 threads share
the chunks of a step (numba ``prange``); step 5 then runs through them in order. Each
worker has its own accumulators, summed in a fixed order at the end, so the totals do not
depend on thread timing. One worker is the default: a thread hand-over costs milliseconds
when the machine is busy, and callers may run several traces in parallel themselves.
Carried state between chunks and calls: the state of charge, its minimum and the
accumulators; :class:`TraceStream` also carries the last sample, so a trace can be fed in
pieces of any size.

Fast-math is limited to what vectorizing needs (reassociating sums, no NaN/inf, no signed
zeros, reciprocal and contraction); everything stays float64. The physics formulas are the
private helpers of the reference modules, compiled here with ``numba.njit``; only the
derivative used by Newton's method is written here (scipy's ``brentq``, used by the
reference, cannot be called from compiled code). Note that numba's on-disk cache is keyed
on this file: after editing a formula in roadload/diesel/electric, delete
``tco/__pycache__/kernel*.nbi``/``*.nbc`` (the kernel-versus-reference tests catch a stale
cache).
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numba import njit, prange

from tco import diesel as _diesel
from tco import electric as _electric
from tco import roadload as _roadload
from tco.diesel import DIESEL_KEYS, DieselPowertrain
from tco.electric import ELECTRIC_KEYS, ElectricPowertrain
from tco.roadload import ENERGY_KEYS, Vehicle
from tco.units import G

__all__ = [
    "DEFAULT_CHUNK",
    "TOTAL_KEYS",
    "TraceResult",
    "TraceSeries",
    "TraceStream",
    "run_trace",
]

#: Intervals per chunk (each worker's work space: 8 float64 rows of this length).
DEFAULT_CHUNK = 32768
#: Chunks each worker thread takes per parallel step (with more than one worker). Few:
#: the step's battery power then stays in cache for the state-of-charge pass (measured
#: 23 ms with 2, 43 ms with 4 and 48 ms with 16 on 10 million samples, 2 workers). Each
#: step hands work to the threads once, which costs milliseconds when other processes
#: keep the cores busy. A single worker takes one chunk per step, with no hand-over.
CHUNKS_PER_WORKER = 2
#: Intervals per block when gathering the intervals to solve for a speed deficit
#: (blocks without any are skipped after a vectorized count).
GATHER_BLOCK = 64
#: Most Newton sweeps over all the intervals to solve at once (vectorized); intervals
#: not converged by then are solved one by one with a safeguarded iteration.
NEWTON_SWEEPS = 12
#: Skew of the cuts of the running-sum state-of-charge loop. [slots]
_SOC_SKEW = 24
#: Keys of ``TraceResult.totals``, in order (units as in the reference functions).
TOTAL_KEYS = ENERGY_KEYS + DIESEL_KEYS + ELECTRIC_KEYS

_FAST = {"nnan", "ninf", "nsz", "reassoc", "arcp", "contract"}
_JIT_FAST = {"cache": True, "nogil": True, "error_model": "numpy", "fastmath": _FAST}
_JIT_EXACT = {"cache": True, "nogil": True, "error_model": "numpy"}

# The reference formulas, compiled for scalars and inlined into the loops below.
_cos_sin = njit(inline="always")(_roadload._cos_sin)
_mean_speed_accel = njit(inline="always")(_roadload._mean_speed_accel)
_aero_force = njit(inline="always")(_roadload._aero_force)
_aero_slope = njit(inline="always")(_roadload._aero_slope)
_rolling_force = njit(inline="always")(_roadload._rolling_force)
_grade_force = njit(inline="always")(_roadload._grade_force)
_inertia_force = njit(inline="always")(_roadload._inertia_force)
_engine_demand = njit(inline="always")(_diesel._engine_demand)
_willans_fuel_rate = njit(inline="always")(_diesel._willans_fuel_rate)
_battery_traction = njit(inline="always")(_electric._battery_traction)
_regen_battery_power = njit(inline="always")(_electric._regen_battery_power)
_regen_refused = njit(inline="always")(_electric._regen_refused)

# Accumulator slots (float64 array ``acc``); energies [J], counts [-], distances [m].
(A_AERO, A_ROLL, A_CLIMB, A_DESC, A_ACCEL, A_DECEL, A_TRACTION, A_BRAKING, A_DIST,
 A_INTERVALS,
 D_ENGINE, D_FUEL, D_IDLE_N, D_LIM_N, D_LIM_DIST, D_DEF_SUM, D_DEF_MAX,
 E_OUT, E_IN, E_REFUSED, E_CLIPPED, E_LIM_N, E_LIM_DIST, E_DEF_SUM, E_DEF_MAX,
 N_ACC) = range(26)
# Carried state slots (float64 array ``state``): state of charge and its minimum [-], and
# the first sample of a chunk with bad input (-1: none).
S_SOC, S_SOC_MIN, S_BAD, N_STATE = range(4)



class TraceSeries(NamedTuple):
    """Per-interval and per-sample series of a trace, for charts (all SI).

    Attributes
    ----------
    wheel_power : ndarray
        Wheel power of each interval. [W]
    battery_power : ndarray
        Battery power of each interval, positive discharging. [W]
    fuel_rate : ndarray
        Diesel volume rate of each interval (idle included). [m³/s]
    soc : ndarray
        State of charge at each sample, fraction of usable capacity. [-]
    """

    wheel_power: np.ndarray
    battery_power: np.ndarray
    fuel_rate: np.ndarray
    soc: np.ndarray


class TraceResult(NamedTuple):
    """Result of :func:`run_trace`.

    Attributes
    ----------
    totals : dict of float
        Totals keyed by :data:`TOTAL_KEYS` (see :func:`tco.roadload.energy_components`,
        :func:`tco.diesel.fuel_use` and :func:`tco.electric.battery_use` for meanings and
        units).
    soc : ndarray
        State of charge at each sample. [-]
    series : TraceSeries or None
        Chart series when asked for with ``series=True``.
    """

    totals: dict
    soc: np.ndarray
    series: TraceSeries | None


# ----------------------------------------------------------------------------- compiled loops
_EXP_MASK = np.uint64(0x7FF0000000000000)  # exponent bits all ones: inf or NaN
_MINUS_ZERO = np.uint64(0x8000000000000000)


@njit(inline="always")
def _bad_speed(bits):
    """1 when the float64 with these bits is NaN, infinite or below zero, else 0."""
    return 1 if (bits >= _EXP_MASK) and (bits != _MINUS_ZERO) else 0


@njit(inline="always")
def _bad_grade(bits):
    """1 when the float64 with these bits is NaN or infinite, else 0."""
    return 1 if (bits & _EXP_MASK) == _EXP_MASK else 0


@njit(**_JIT_FAST)
def _road_load_pass(sp, gr, dt, mass, veh, pw, hold, acc):
    """Wheel power of each interval into ``pw``; road-load energies into ``acc``.

    ``hold`` receives min(wheel power, steady road power at the interval's speed) [W]:
    where it exceeds a power limit, the limit is hit and the limited power cannot even
    hold the trace speed (a speed deficit to solve for).

    Also checks the input on the bit patterns (integer tests, which fast-math cannot
    bend): returns how many speeds are NaN, infinite or negative (−0 is allowed) and
    grades NaN or infinite. The energies of a chunk with any are not used.
    """
    s_aero = s_roll = s_climb = s_desc = s_accel = s_decel = 0.0
    v_bits = sp.view(np.uint64)
    g_bits = gr.view(np.uint64)
    bad = _bad_speed(v_bits[pw.size])
    for i in range(pw.size):
        bad += _bad_speed(v_bits[i]) + _bad_grade(g_bits[i])
        vm, a = _mean_speed_accel(sp[i], sp[i + 1], dt)
        cos, sin = _cos_sin(gr[i])
        fa = _aero_force(vm, veh.air_density, veh.drag_coefficient, veh.frontal_area,
                         veh.headwind, veh.wind_averaged)
        fr = _rolling_force(vm, mass, cos, veh.crr, veh.crr_speed)
        fg = _grade_force(mass, sin)
        fi = _inertia_force(mass, a, veh.rotating_mass_factor)
        p_road = (fa + fr + fg) * vm
        p = p_road + fi * vm
        pw[i] = p
        hold[i] = min(p, p_road)
        pg = fg * vm
        pi = fi * vm
        s_aero += fa * vm
        s_roll += fr * vm
        s_climb += max(pg, 0.0)
        s_desc += min(pg, 0.0)
        s_accel += max(pi, 0.0)
        s_decel += min(pi, 0.0)
    if bad:
        return bad
    acc[A_AERO] += s_aero * dt
    acc[A_ROLL] += s_roll * dt
    acc[A_CLIMB] += s_climb * dt
    acc[A_DESC] += s_desc * dt
    acc[A_ACCEL] += s_accel * dt
    acc[A_DECEL] += s_decel * dt
    acc[A_INTERVALS] += pw.size
    return 0


@njit(**_JIT_FAST)
def _diesel_pass(sp, pw, dt, die, p_lim_d, p_lim_e, fuel, keep_fuel, acc):
    """Engine and fuel sums into ``acc``; with ``keep_fuel`` the fuel volume rate of each
    interval into ``fuel`` (a loop-invariant test: the compiler makes two loops of it).

    Also sums the distance, and counts the intervals, and their distance, above the
    wheel-power limits of both powertrains: ``p_lim_d`` (wheel power at rated engine
    power) and ``p_lim_e`` (motor limit) [W]. Returns the two counts.
    """
    loss = die.loss_fraction * die.rated_power
    inv_density = 1.0 / die.density
    s_eng = s_fuel = s_idle = 0.0
    n_lim_d = v_lim_d = n_lim_e = v_lim_e = s_v = 0.0
    for i in range(pw.size):
        vm = _mean_speed_accel(sp[i], sp[i + 1], dt)[0]
        p = pw[i]
        s_v += vm
        demand = _engine_demand(p, die.driveline_efficiency, die.accessory_power)
        p_eng = min(demand, die.rated_power)
        idle = vm < die.stop_speed
        fuelled = (p > 0.0) & (vm >= die.stop_speed)
        m_rate = (_willans_fuel_rate(p_eng, loss, die.marginal_efficiency, die.lhv)
                  if fuelled else 0.0)
        if keep_fuel:
            fuel[i] = m_rate * inv_density + (die.idle_fuel_rate if idle else 0.0)
        s_fuel += m_rate
        s_eng += p_eng if fuelled else 0.0
        s_idle += 1.0 if idle else 0.0
        # 0/1 masks as floats: reusing a bool in two selects stops LLVM vectorizing
        lim_d = 1.0 if p > p_lim_d else 0.0
        lim_e = 1.0 if p > p_lim_e else 0.0
        n_lim_d += lim_d
        v_lim_d += vm * lim_d
        n_lim_e += lim_e
        v_lim_e += vm * lim_e
    acc[D_LIM_N] += n_lim_d
    acc[D_LIM_DIST] += v_lim_d * dt
    acc[E_LIM_N] += n_lim_e
    acc[E_LIM_DIST] += v_lim_e * dt
    acc[D_ENGINE] += s_eng * dt
    acc[D_FUEL] += s_fuel * dt
    acc[D_IDLE_N] += s_idle
    acc[A_DIST] += s_v * dt
    return n_lim_d, n_lim_e


@njit(**_JIT_FAST)
def _electric_pass(pw, dt, ele, pb, acc):
    """Battery power into ``pb``; discharge, charge and refused-regen sums, and the
    wheel traction and braking sums, into ``acc``.

    Returns the chunk's total charge energy before the full-battery limit [J].
    """
    s_out = s_in = s_ref = s_trac = s_brake = 0.0
    for i in range(pw.size):
        p = pw[i]
        s_trac += max(p, 0.0)
        s_brake += max(-p, 0.0)
        regen = _regen_battery_power(p, ele.motor_power, ele.regen_efficiency,
                                     ele.regen_power_max)
        traction = p > 0.0
        p_batt = (_battery_traction(p, ele.motor_power, ele.drivetrain_efficiency,
                                    ele.aux_power)
                  if traction else regen + ele.aux_power)
        s_ref += 0.0 if traction else _regen_refused(p, regen, ele.regen_efficiency)
        pb[i] = p_batt
        s_out += max(p_batt, 0.0)
        s_in += max(-p_batt, 0.0)
    acc[E_OUT] += s_out * dt
    acc[E_IN] += s_in * dt
    acc[E_REFUSED] += s_ref * dt
    acc[A_TRACTION] += s_trac * dt
    acc[A_BRAKING] += s_brake * dt
    return s_in * dt


@njit(**_JIT_FAST)
def _soc_running_sum(pb, k, soc_start, soc):
    """State of charge as a plain running sum, soc ← soc − P·k with k = dt/capacity
    [1/W], when the chunk cannot reach full; written into ``soc``.

    The chunk is cut into four parts summed in one loop: four independent dependency
    chains instead of one. The cuts are 24 slots (192 bytes) off a multiple of 4 KiB
    so that the four load and four store streams do not alias. Returns (end, minimum)
    state of charge [-].
    """
    n = pb.size
    q = (n - 3 * _SOC_SKEW) // 4
    if q < 1:
        x, x_min, _ = _soc_clipped(pb, k, soc_start, soc, False)
        return x, x_min
    b1 = q + _SOC_SKEW
    b2 = 2 * b1
    b3 = 3 * b1
    t0 = t1 = t2 = 0.0
    for j in range(b1):
        t0 += pb[j]
        t1 += pb[b1 + j]
        t2 += pb[b2 + j]
    s0 = soc_start
    s1 = s0 - t0 * k
    s2 = s1 - t1 * k
    s3 = s2 - t2 * k
    m0 = m1 = m2 = m3 = soc_start
    for j in range(q):  # parts of b1, b1, b1 and n - 3·b1 = q + (n − 3·skew) % 4 slots
        s0 -= pb[j] * k
        s1 -= pb[b1 + j] * k
        s2 -= pb[b2 + j] * k
        s3 -= pb[b3 + j] * k
        soc[j] = s0
        soc[b1 + j] = s1
        soc[b2 + j] = s2
        soc[b3 + j] = s3
        m0 = min(m0, s0)
        m1 = min(m1, s1)
        m2 = min(m2, s2)
        m3 = min(m3, s3)
    for j in range(q, b1):  # the rest of each part
        s0 -= pb[j] * k
        s1 -= pb[b1 + j] * k
        s2 -= pb[b2 + j] * k
        soc[j] = s0
        soc[b1 + j] = s1
        soc[b2 + j] = s2
        m0 = min(m0, s0)
        m1 = min(m1, s1)
        m2 = min(m2, s2)
    for j in range(b3 + q, n):
        s3 -= pb[j] * k
        soc[j] = s3
        m3 = min(m3, s3)
    return s3, min(min(m0, m1), min(m2, m3))


@njit(**_JIT_FAST)
def _soc_clipped(pb, k, soc_start, soc, clip=True):
    """State of charge soc ← min(1, soc − P·k), k = dt/capacity [1/W]; into ``soc``.
    With ``clip`` false, without the min (a plain running sum).

    Returns (end, minimum) state of charge [-] and the charge refused at full [-]
    (a fraction of capacity).
    """
    x = soc_start
    x_min = soc_start
    refused = 0.0
    for j in range(pb.size):
        t = x - pb[j] * k
        x = min(t, 1.0) if clip else t
        refused += t - x
        x_min = min(x_min, x)
        soc[j] = x
    return x, x_min, refused


@njit(**_JIT_EXACT)
def _road_power_and_slope(v, mass, cos, sin, veh):
    """Steady road power v·F(v) [W] and its derivative d(v·F)/dv [W/(m/s)].

    F = aero + rolling + grade force (the reference formulas). The derivative,
    F + v·(dF_aero/dv + crr_speed·m·g·cos), is used here only: Newton's method needs
    it, and the reference solves with brentq instead.
    """
    f = (_aero_force(v, veh.air_density, veh.drag_coefficient, veh.frontal_area,
                     veh.headwind, veh.wind_averaged)
         + _rolling_force(v, mass, cos, veh.crr, veh.crr_speed) + _grade_force(mass, sin))
    d_aero = _aero_slope(v, veh.air_density, veh.drag_coefficient, veh.frontal_area,
                         veh.headwind, veh.wind_averaged)
    slope = f + v * (d_aero + veh.crr_speed * (mass * G) * cos)
    return v * f, slope


@njit(**_JIT_EXACT)
def _steady_speed(power, mass, cos, sin, veh, guess):
    """Steady speed at a wheel power on a grade [m/s], the root of v·F(v) = P, by a
    safeguarded Newton iteration from ``guess`` (the same root as
    tco.roadload.steady_speed, which uses brentq). The fallback of ``_deficits``.
    """
    if veh.drag_coefficient * veh.frontal_area == 0.0 and veh.crr_speed == 0.0:
        f0 = _rolling_force(0.0, mass, cos, veh.crr, 0.0) + _grade_force(mass, sin)
        return power / f0 if f0 > 0.0 else np.inf
    v = guess if (guess > 0.0 and guess < 1e6) else 1.0
    lo = 0.0
    hi = np.inf
    for _ in range(200):
        g, slope = _road_power_and_slope(v, mass, cos, sin, veh)
        r = g - power
        if r > 0.0:
            hi = v
        else:
            lo = v
        if r == 0.0:
            return v
        if slope > 0.0:
            v_new = v - r / slope
            # quadratic convergence: once a step is below 1e-8·v, the point it lands on
            # is within about 1e-16·v of the root
            if abs(v_new - v) <= 1e-8 * v:
                return v_new
            newton = lo < v_new < hi
        else:
            newton = False
        if not newton:  # keep to the bracket: bisect, or grow it while unbounded above
            if hi < np.inf:
                v_new = 0.5 * (lo + hi)
                if hi - lo <= 1e-15 * hi:
                    return v_new
            else:
                v_new = 2.0 * v
        v = v_new
    return v


@njit(**_JIT_EXACT)
def _chunks_per_step(workers):
    """Chunks in one step of :func:`_run`."""
    return 1 if workers == 1 else workers * CHUNKS_PER_WORKER


@njit(**_JIT_EXACT)
def _deficits(sp, gr, hold, dt, mass, veh, p_lim, idx, vm_b, cos_b, sin_b, v_b, acc,
              k_sum, k_max):
    """Speed deficits of the intervals whose ``hold`` exceeds the power limit ``p_lim``.

    Such an interval is limited and its limited power cannot hold the trace speed v on
    its grade, so the steady speed v_s at the limit is below v: the deficit v − v_s is
    solved for. Elsewhere the deficit max(0, v − v_s) is 0 without solving, because
    v·F(v) − P has a single root. The intervals are gathered, then Newton's method runs
    on all of them at once from an upper bound of the root, min(v, P/F_0) with
    F_0 = rolling + grade force at rest (valid when aerodynamic drag is ≥ 0), where the
    iteration on this convex function descends monotonically.
    """
    m = 0
    n = hold.size
    n_blocks = n // GATHER_BLOCK
    for blk in range(n_blocks):
        b0 = blk * GATHER_BLOCK
        hits = 0
        for i in range(GATHER_BLOCK):  # vectorized count (a fixed trip count helps)
            hits += 1 if hold[b0 + i] > p_lim else 0
        if hits:
            for i in range(b0, b0 + GATHER_BLOCK):  # branch-free gather
                idx[m] = i
                m += 1 if hold[i] > p_lim else 0
    for i in range(n_blocks * GATHER_BLOCK, n):
        idx[m] = i
        m += 1 if hold[i] > p_lim else 0
    if m == 0:
        return
    for j in range(m):  # gather
        i = idx[j]
        vm_b[j] = _mean_speed_accel(sp[i], sp[i + 1], dt)[0]
        sin_b[j] = gr[i]
    for j in range(m):
        cos, sin = _cos_sin(sin_b[j])
        cos_b[j] = cos
        sin_b[j] = sin
        f0 = _rolling_force(0.0, mass, cos, veh.crr, veh.crr_speed) + _grade_force(mass, sin)
        v_b[j] = min(vm_b[j], p_lim / f0) if f0 > 0.0 else vm_b[j]
    not_converged = m
    for _ in range(NEWTON_SWEEPS):
        not_converged = 0
        for j in range(m):  # one Newton step for all, vectorized
            v = v_b[j]
            g, slope = _road_power_and_slope(v, mass, cos_b[j], sin_b[j], veh)
            step = (g - p_lim) / slope
            v_b[j] = v - step
            # quadratic convergence: once a step is below 1e-8·v, the point it lands on
            # is within about 1e-16·v of the root (NaN, from slope <= 0, counts as not)
            not_converged += 0 if abs(step) <= 1e-8 * v else 1
        if not_converged == 0:
            break
    s_def = 0.0
    d_max = acc[k_max]
    for j in range(m):
        v = v_b[j]
        if not_converged:  # only after NEWTON_SWEEPS without convergence: safeguard
            g, slope = _road_power_and_slope(v, mass, cos_b[j], sin_b[j], veh)
            if not (v > 0.0 and abs(g - p_lim) <= 1e-8 * v * slope):
                v = _steady_speed(p_lim, mass, cos_b[j], sin_b[j], veh, vm_b[j])
        deficit = max(vm_b[j] - v, 0.0)
        s_def += deficit
        d_max = max(d_max, deficit)
    acc[k_sum] += s_def
    acc[k_max] = d_max


@njit(**_JIT_EXACT)
def _worker(speed, grade, dt, mass, veh, die, ele, chunk, s0, s1, w, workers, acc,
            pw_buf, fuel_buf, pb_buf, work, stride, idx, charge, full):
    """Everything but the state of charge for chunks w, w + workers, ... of the step
    [s0, s1): input check, road load, diesel, battery power into ``pb_buf``, deficits.

    ``charge[j]`` receives chunk j's charge energy [J] (for the SOC pass), or -1 when
    its input is bad. ``acc`` and ``work`` (8 rows, row r at ``r * stride``) belong to
    this worker alone.
    """
    p_lim_d = (die.rated_power - die.accessory_power) * die.driveline_efficiency
    p_lim_e = ele.motor_power
    hold_b = work[3 * stride:3 * stride + chunk]
    vm_b = work[4 * stride:4 * stride + chunk]
    cos_b = work[5 * stride:5 * stride + chunk]
    sin_b = work[6 * stride:6 * stride + chunk]
    v_b = work[7 * stride:7 * stride + chunk]
    n_chunks = (s1 - s0 + chunk - 1) // chunk
    for j in range(w, n_chunks, workers):
        i0 = s0 + j * chunk
        i1 = min(i0 + chunk, s1)
        n = i1 - i0
        sp = speed[i0:i1 + 1]
        gr = grade[i0:i1]
        if full:
            pw = pw_buf[i0:i1]
            fuel = fuel_buf[i0:i1]
            pb = pb_buf[i0:i1]
        else:
            pw = work[:n]
            fuel = work[stride:stride + n]
            pb = pb_buf[i0 - s0:i1 - s0]
        hold = hold_b[:n]
        if _road_load_pass(sp, gr, dt, mass, veh, pw, hold, acc):
            charge[j] = -1.0
            continue
        n_d, n_e = _diesel_pass(sp, pw, dt, die, p_lim_d, p_lim_e, fuel, full, acc)
        charge[j] = _electric_pass(pw, dt, ele, pb, acc)
        if n_d > 0.0:
            _deficits(sp, gr, hold, dt, mass, veh, p_lim_d, idx, vm_b, cos_b, sin_b, v_b,
                      acc, D_DEF_SUM, D_DEF_MAX)
        if n_e > 0.0:
            _deficits(sp, gr, hold, dt, mass, veh, p_lim_e, idx, vm_b, cos_b, sin_b, v_b,
                      acc, E_DEF_SUM, E_DEF_MAX)


@njit(cache=True, nogil=True, error_model="numpy", parallel=True)
def _run(speed, grade, dt, starts, masses, veh, die, ele, chunk, workers, acc, acc_w,
         state, pw_buf, fuel_buf, pb_buf, work, stride, idx, charge, soc, full):
    """Process every interval of ``speed``/``grade`` leg by leg, step by step.

    A step is ``workers × CHUNKS_PER_WORKER`` chunks (1 for one worker): the workers
    share its chunks (everything that does not depend on the state of charge, in
    parallel), then the state of charge runs through the step's chunks in order.
    ``soc[i + 1]`` receives the state of charge after interval i. With ``full`` the
    series buffers have one slot per interval; otherwise ``pb_buf`` has one slot per
    interval of a step.
    ``acc_w[w]``, ``work[w]``, ``idx[w]`` belong to worker w; ``acc`` to this thread.
    Sets ``state[S_BAD]`` to the first sample of a chunk with bad input and stops.
    """
    n_int = speed.size - 1
    k_soc = dt / ele.usable_capacity  # state-of-charge change per battery power [1/W]
    # the fast path runs only well below full, so that rounding in its running sum
    # cannot take the state of charge past 1
    headroom = 1.0 - 1e-9
    step = _chunks_per_step(workers) * chunk
    for leg in range(starts.size):
        a = starts[leg]
        b = starts[leg + 1] if leg + 1 < starts.size else n_int
        b = min(b, n_int)
        mass = masses[leg]
        for s0 in range(a, b, step):
            s1 = min(s0 + step, b)
            n_chunks = (s1 - s0 + chunk - 1) // chunk
            if workers == 1:  # no hand-over to a thread (its latency shows under load)
                _worker(speed, grade, dt, mass, veh, die, ele, chunk, s0, s1, 0, 1,
                        acc_w[0], pw_buf, fuel_buf, pb_buf, work[0], stride, idx[0],
                        charge, full)
            else:
                for w in prange(workers):
                    _worker(speed, grade, dt, mass, veh, die, ele, chunk, s0, s1, w, workers,
                            acc_w[w], pw_buf, fuel_buf, pb_buf, work[w], stride, idx[w],
                            charge, full)
            for j in range(n_chunks):
                if charge[j] < 0.0:
                    state[S_BAD] = s0 + j * chunk
                    return
            for j in range(n_chunks):  # the state of charge, in order
                i0 = s0 + j * chunk
                i1 = min(i0 + chunk, s1)
                pb = pb_buf[i0:i1] if full else pb_buf[i0 - s0:i1 - s0]
                x = state[S_SOC]
                if x + charge[j] / ele.usable_capacity <= headroom:
                    x, x_min = _soc_running_sum(pb, k_soc, x, soc[i0 + 1:i1 + 1])
                else:
                    x, x_min, refused = _soc_clipped(pb, k_soc, x, soc[i0 + 1:i1 + 1])
                    acc[E_CLIPPED] += refused * ele.usable_capacity
                state[S_SOC] = x
                state[S_SOC_MIN] = min(state[S_SOC_MIN], x_min)


# ----------------------------------------------------------------------------- public API
def _as_trace_array(name, values):
    arr = np.ascontiguousarray(values, dtype=np.float64)
    if arr.ndim != 1:
        raise ValueError(f"{name} must be a 1-D array")
    return arr


class TraceStream:
    """Run the fused kernel over a trace delivered in pieces, with bounded memory.

    Consecutive calls to :meth:`feed` continue the same trace: the last sample of a
    piece and the first of the next form one interval (with the previous piece's grade
    and mass). The state of charge and the accumulators carry over.

    Parameters
    ----------
    dt : float
        Time step of the trace. [s]
    vehicle : tco.roadload.Vehicle
        Road-load parameters.
    diesel : tco.diesel.DieselPowertrain
        Diesel powertrain parameters.
    electric : tco.electric.ElectricPowertrain
        Electric powertrain parameters.
    chunk : int
        Intervals per chunk inside the kernel.
    workers : int
        Threads sharing the work that does not depend on the state of charge (at most
        the numba thread count is used at once). One by default: no thread hand-overs,
        which cost milliseconds each on a busy machine, and room for callers that run
        several traces in parallel themselves. The totals do not depend on timing, only
        (to rounding) on this number, which fixes the order of summation.

    Examples
    --------
    >>> import numpy as np
    >>> veh = Vehicle(0.6, 10.0, 0.006)
    >>> die = DieselPowertrain(350e3, 0.85, 0.45, 0.05)
    >>> ele = ElectricPowertrain(1.8e9, 400e3, 0.9, 0.85, 300e3)
    >>> s = TraceStream(1.0, veh, die, ele)
    >>> for piece in np.array_split(np.full(1000, 20.0), 3):
    ...     _ = s.feed(piece, np.zeros(piece.size), 30000.0)
    >>> round(s.totals()["distance"])
    19980
    """

    def __init__(self, dt, vehicle, diesel, electric, chunk=DEFAULT_CHUNK, workers=1):
        dt = float(dt)
        if not (np.isfinite(dt) and dt > 0):
            raise ValueError(f"dt must be finite and > 0 s, got {dt}")
        chunk = int(chunk)
        if chunk < 1:
            raise ValueError("chunk must be >= 1")
        self.dt = dt
        self.chunk = chunk
        self.vehicle = Vehicle(*vehicle).checked()
        self.diesel = DieselPowertrain(*diesel).checked()
        self.electric = ElectricPowertrain(*electric).checked()
        workers = int(workers)
        if workers < 1:
            raise ValueError("workers must be >= 1")
        self.workers = workers
        self._acc = np.zeros(N_ACC)
        self._acc_w = np.zeros((workers, N_ACC))
        self._state = np.zeros(N_STATE)
        self._state[S_SOC] = self._state[S_SOC_MIN] = self.electric.initial_soc
        self._prev = None  # (speed, grade, mass) of the last sample fed
        self._scratch = None

    def _buffers(self):
        """Work space, bounded by the chunk size, carved from one page-aligned block: per
        worker 8 float64 rows of ``chunk`` slots, the battery power of one parallel step,
        per worker an index row, and the charge of each chunk of a step.

        Placement matters: two rows whose addresses are equal modulo 4 KiB make the
        processor confuse loads from one with stores to the other ("4K aliasing"),
        which was seen to slow the kernel by 70 %. The rows of a worker start 512 bytes
        apart modulo 4 KiB, the battery-power buffer 256 bytes off them.
        """
        if self._scratch is None:
            page = 512  # float64 slots in 4 KiB
            rows = 8 * self.workers
            row_len = -(-(self.chunk + 64) // page) * page + 64  # ≡ 64 slots mod page
            per_step = _chunks_per_step(self.workers)
            pb_len = per_step * self.chunk
            block = np.empty(rows * row_len + pb_len + 2 * page)
            base = (-block.ctypes.data % 4096) // 8  # first page-aligned slot
            work = block[base:base + rows * row_len].reshape(self.workers, 8 * row_len)
            pb0 = base + rows * row_len + (32 - (rows * row_len) % page) % page
            pb = block[pb0:pb0 + pb_len]
            idx = np.empty((self.workers, self.chunk), np.int64)
            self._scratch = (work, row_len, idx, pb, np.empty(per_step))
        return self._scratch

    def _call(self, speed, grade, starts, masses, series, soc, first=0):
        """Run the kernel on one array pair; ``series`` is (wheel power, fuel rate,
        battery power) arrays of one slot per interval, or None; ``first`` is the piece's
        sample number of ``speed[0]`` (for error messages)."""
        self._state[S_BAD] = -1.0
        work, stride, idx, pb, charge = self._buffers()
        full = series is not None
        pw_buf, fuel_buf, pb_buf = series if full else (pb, pb, pb)
        _run(speed, grade, self.dt, starts, masses, self.vehicle, self.diesel, self.electric,
             self.chunk, self.workers, self._acc, self._acc_w, self._state, pw_buf, fuel_buf,
             pb_buf, work, stride, idx, charge, soc, full)
        bad = int(self._state[S_BAD])
        if bad >= 0:
            seg_v = speed[bad:bad + self.chunk + 1]
            seg_g = grade[bad:bad + self.chunk]
            where = np.flatnonzero(~(np.isfinite(seg_v) & (seg_v >= 0)))
            what = "speed must be finite and >= 0 m/s"
            if where.size == 0:
                where = np.flatnonzero(~np.isfinite(seg_g))
                what = "grade must be finite"
            raise ValueError(f"{what} (sample {first + bad + int(where[0])} of this piece)")

    def feed(self, speed, grade, leg_mass, leg_starts=None, soc_out=None, series=False):
        """Process the next piece of the trace.

        Parameters
        ----------
        speed : array
            Speed at each sample of this piece. [m/s]
        grade : array
            Grade at each sample of this piece, rise over run. [-]
        leg_mass : float or array
            Vehicle mass for the piece, or one per leg of the piece. [kg]
        leg_starts : array of int, optional
            Sample index (within this piece) where each leg starts; first 0.
        soc_out : ndarray, optional
            Float64 array with one slot per sample of this piece that receives the state
            of charge; allocated when not given.
        series : bool
            Also return wheel power, battery power and fuel rate of the piece's
            intervals (one more than samples − 1 after the first piece: the interval
            joining it to the previous piece comes first).

        Returns
        -------
        soc : ndarray
            State of charge at each sample of the piece. [-]
        series : TraceSeries or None
            When asked for.

        Raises
        ------
        ValueError
            Bad input. A piece with a non-finite or negative value is refused partway
            (chunks before it are counted): do not feed the stream further.
        """
        speed = _as_trace_array("speed", speed)
        grade = _as_trace_array("grade", grade)
        n = speed.size
        if grade.size != n:
            raise ValueError("speed and grade must have the same length")
        if n == 0:
            raise ValueError("a piece needs at least one sample")
        if self._prev is None and n < 2:
            raise ValueError("a trace needs at least 2 samples")
        if not np.isfinite(grade[-1]):  # the kernel checks the grades it uses
            raise ValueError(f"grade must be finite (sample {n - 1} of this piece)")
        masses = np.atleast_1d(np.asarray(leg_mass, dtype=np.float64))
        starts = _roadload.check_legs(n, leg_starts, masses)
        if starts.size == 1 and masses.size == 1:
            _roadload._check_positive("mass", masses)
        if soc_out is None:
            soc_out = np.empty(n)
        elif (not isinstance(soc_out, np.ndarray) or soc_out.shape != (n,)
              or soc_out.dtype != np.float64 or not soc_out.flags.c_contiguous
              or not soc_out.flags.writeable):
            raise ValueError("soc_out must be a writeable contiguous float64 array with one "
                             "slot per sample")
        n_int = n - 1 + (self._prev is not None)
        if series:
            out = tuple(np.empty(n_int) for _ in range(3))
        else:
            out = None
        if self._prev is not None:
            v0, g0, m0 = self._prev
            sp = np.array([v0, speed[0]])
            gr = np.array([g0, grade[0]])
            soc2 = np.empty(2)
            seam = tuple(np.empty(1) for _ in range(3))
            self._call(sp, gr, np.zeros(1, np.int64), np.array([m0]), seam, soc2, first=-1)
            soc_out[0] = soc2[1]
            if series:
                for dst, src in zip(out, seam, strict=True):
                    dst[0] = src[0]
        else:
            soc_out[0] = self._state[S_SOC]
        if n > 1:
            bufs = tuple(x[n_int - (n - 1):] for x in out) if series else None
            self._call(speed, grade, starts, masses, bufs, soc_out)
        self._prev = (float(speed[-1]), float(grade[-1]), float(masses[-1]))
        ser = TraceSeries(out[0], out[2], out[1], soc_out) if series else None
        return soc_out, ser

    def restart(self, vehicle=None):
        """Start a new trace with the same parameters (new road-load parameters when
        ``vehicle`` is given), keeping the work space: as a new stream, without building
        one (a caller driving many short traces spends less time per trace)."""
        if vehicle is not None:
            self.vehicle = Vehicle(*vehicle).checked()
        self._acc[:] = 0.0
        self._acc_w[:] = 0.0
        self._state[:] = 0.0
        self._state[S_SOC] = self._state[S_SOC_MIN] = self.electric.initial_soc
        self._prev = None

    def totals(self) -> dict:
        """Totals so far, keyed by :data:`TOTAL_KEYS` (SI units)."""
        acc = self._acc + self._acc_w.sum(axis=0)
        for k in (D_DEF_MAX, E_DEF_MAX):
            acc[k] = max(self._acc[k], self._acc_w[:, k].max())
        # Python floats from here: the same IEEE operations as on NumPy scalars, faster
        acc = acc.tolist()
        st = self._state.tolist()
        die, ele, dt = self.diesel, self.electric, self.dt
        idle_time = acc[D_IDLE_N] * dt
        idle_volume = idle_time * die.idle_fuel_rate
        fuel_volume = acc[D_FUEL] / die.density + idle_volume
        clipped = acc[E_CLIPPED]
        regenerated = acc[E_IN] - clipped
        d_n, e_n = acc[D_LIM_N], acc[E_LIM_N]
        totals = {
            "distance": acc[A_DIST],
            "duration": acc[A_INTERVALS] * dt,
            "aerodynamic_energy": acc[A_AERO],
            "rolling_energy": acc[A_ROLL],
            "climbing_energy": acc[A_CLIMB],
            "descending_energy": acc[A_DESC],
            "acceleration_energy": acc[A_ACCEL],
            "deceleration_energy": acc[A_DECEL],
            "traction_energy": acc[A_TRACTION],
            "braking_energy": acc[A_BRAKING],
            "diesel_engine_energy": acc[D_ENGINE],
            "diesel_fuel_mass": acc[D_FUEL] + idle_volume * die.density,
            "diesel_fuel_volume": fuel_volume,
            "diesel_idle_fuel_volume": idle_volume,
            "diesel_def_volume": _diesel.def_volume(fuel_volume, die.def_ratio),
            "diesel_idle_time": idle_time,
            "diesel_limited_time": d_n * dt,
            "diesel_limited_distance": acc[D_LIM_DIST],
            "diesel_speed_deficit_max": acc[D_DEF_MAX],
            "diesel_speed_deficit_mean": acc[D_DEF_SUM] / d_n if d_n else 0.0,
            "electric_battery_energy_out": acc[E_OUT],
            "electric_battery_energy_regenerated": regenerated,
            "electric_battery_energy_net": acc[E_OUT] - regenerated,
            "electric_regen_refused_by_limits": acc[E_REFUSED],
            "electric_regen_refused_full_battery": clipped,
            "electric_friction_brake_energy": acc[E_REFUSED] + clipped / ele.regen_efficiency,
            "electric_soc_start": ele.initial_soc,
            "electric_soc_end": st[S_SOC],
            "electric_soc_min": st[S_SOC_MIN],
            "electric_limited_time": e_n * dt,
            "electric_limited_distance": acc[E_LIM_DIST],
            "electric_speed_deficit_max": acc[E_DEF_MAX],
            "electric_speed_deficit_mean": acc[E_DEF_SUM] / e_n if e_n else 0.0,
        }
        return {k: float(totals[k]) for k in TOTAL_KEYS}


def run_trace(speed, grade, dt, leg_starts, leg_mass, vehicle, diesel, electric,
              soc_out=None, chunk=DEFAULT_CHUNK, series=False, workers=1):
    """Road load, diesel and electric powertrains and state of charge over a trace, fused.

    Parameters
    ----------
    speed : array
        Speed at each sample, finite and ≥ 0. [m/s]
    grade : array
        Grade at each sample, rise over run. [-]
    dt : float
        Time step. [s]
    leg_starts : array of int or None
        Sample index where each leg starts (first 0); None for one leg.
    leg_mass : float or array
        Vehicle mass, one value or one per leg. [kg]
    vehicle : tco.roadload.Vehicle
        Road-load parameters.
    diesel : tco.diesel.DieselPowertrain
        Diesel powertrain parameters.
    electric : tco.electric.ElectricPowertrain
        Electric powertrain parameters.
    soc_out : ndarray, optional
        Preallocated float64 array of ``len(speed)`` slots for the state of charge.
    chunk : int
        Intervals processed per chunk (memory: 8 rows of ``chunk`` float64 per worker,
        and with several workers the battery power of a step).
    series : bool
        Also return wheel power, battery power and fuel rate per interval.
    workers : int
        Threads for the part that does not depend on the state of charge (default 1;
        ``numba.get_num_threads()`` to use all). See :class:`TraceStream`.

    Returns
    -------
    TraceResult
        ``totals`` (dict keyed by :data:`TOTAL_KEYS`), ``soc`` [-] and ``series``.

    Raises
    ------
    ValueError
        Bad parameters or a trace with non-finite or negative values.

    Notes
    -----
    Equal, to rounding, to composing :func:`tco.roadload.energy_components`,
    :func:`tco.diesel.fuel_use` and :func:`tco.electric.battery_use`.

    Examples
    --------
    >>> import numpy as np
    >>> veh = Vehicle(0.6, 10.0, 0.006)
    >>> die = DieselPowertrain(350e3, 0.85, 0.45, 0.05)
    >>> ele = ElectricPowertrain(1.8e9, 400e3, 0.9, 0.85, 300e3)
    >>> r = run_trace(np.full(3601, 20.0), np.zeros(3601), 1.0, None, 30000.0,
    ...               veh, die, ele)
    >>> round(r.totals["distance"] / 1000, 1), round(r.totals["electric_soc_end"], 3)
    (72.0, 0.856)
    """
    stream = TraceStream(dt, vehicle, diesel, electric, chunk=chunk, workers=workers)
    speed = _as_trace_array("speed", speed)
    if speed.size < 2:
        raise ValueError("a trace needs at least 2 samples")
    soc, ser = stream.feed(speed, grade, leg_mass, leg_starts=leg_starts, soc_out=soc_out,
                           series=series)
    return TraceResult(stream.totals(), soc, ser)
