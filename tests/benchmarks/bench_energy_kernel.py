"""Benchmark of the fused energy kernel (tco.kernel.run_trace) against the memory floor.

A script, not a test (speed is never asserted in the test suite). Run from the
repository root:

    python tests/benchmarks/bench_energy_kernel.py [--samples 10000000]

It prints:

* the floor: ``np.dot(speed, grade)`` on the same arrays, one pass over both, and a
  one-thread floor (a compiled dot loop); each timing is the best of ``--repeat`` runs
  in its own block;
* the kernel time for the whole model (road load, diesel, electric, state-of-charge
  track written into a preallocated output array) after a warm-up call, with the default
  single worker and with numba's thread count (np.dot may use all cores through BLAS),
  and the ratios to the floor (target ≤ 6; issue 17: ≤ 4× the one-thread floor), the
  nanoseconds per sample of the floor and the kernel (in and out of cache: N/10 samples
  fit a 32 MB L3), and the floor's read bandwidth; for information also the time when
  run_trace allocates the state-of-charge array itself (first-touch page faults
  included);
* the peak memory above the inputs while the kernel runs — resident set size high-water
  mark (reset through /proc/self/clear_refs where Linux allows, else ru_maxrss) and
  tracemalloc's peak of numpy allocations — against the input arrays' size (target ≤ 3×,
  state-of-charge output included);
* the linearity check: time at N/10 samples versus N samples (target ratio ≤ 11).

The synthetic trace is built in pieces so that building it leaves no large temporaries
behind that could hide the kernel's own peak. Its numbers are invented for the benchmark.
"""
from __future__ import annotations

import argparse
import importlib
import os
import resource
import sys
import time
import tracemalloc
from pathlib import Path

import numba
import numpy as np

# run as a script from anywhere: make the repository's tco importable
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
kernel = importlib.import_module("tco.kernel")

VEHICLE = kernel.Vehicle(drag_coefficient=0.6, frontal_area=10.0, crr=0.0055, crr_speed=2e-5,
                         rotating_mass_factor=1.04, air_density=1.2, headwind=1.0)
DIESEL = kernel.DieselPowertrain(rated_power=350e3, driveline_efficiency=0.85,
                                 marginal_efficiency=0.46, loss_fraction=0.05,
                                 accessory_power=5e3)
ELECTRIC = kernel.ElectricPowertrain(usable_capacity=500 * 3.6e6, motor_power=400e3,
                                     drivetrain_efficiency=0.9, regen_efficiency=0.85,
                                     regen_power_max=300e3, aux_power=6e3, initial_soc=1.0)
DT = 1.0
PIECE = 1 << 20


def synthetic_trace(n, seed=0):
    """A long invented duty cycle: cruising with slow speed swings, a stop every hour,
    rolling hills of ±3 %, sensor noise. Built piece by piece."""
    rng = np.random.default_rng(seed)
    speed = np.empty(n)
    grade = np.empty(n)
    for a in range(0, n, PIECE):
        t = np.arange(a, min(a + PIECE, n), dtype=np.float64)
        v = 21.0 + 4.0 * np.sin(t * (2 * np.pi / 1800.0)) + rng.normal(0.0, 0.15, t.size)
        phase = t % 3600.0  # decelerate, stand 120 s, accelerate back, once an hour
        v = np.where(phase < 60.0, v * (1.0 - phase / 60.0), v)
        v = np.where((phase >= 60.0) & (phase < 180.0), 0.0, v)
        v = np.where((phase >= 180.0) & (phase < 240.0), v * (phase - 180.0) / 60.0, v)
        speed[a:a + t.size] = np.maximum(v, 0.0)
        grade[a:a + t.size] = (0.02 * np.sin(t * (2 * np.pi / 900.0))
                               + 0.01 * np.sin(t * (2 * np.pi / 347.0)))
    return speed, grade


def best_of(fns, repeat):
    """Best time [s] of each function, the functions run in turn ``repeat`` times."""
    best = [float("inf")] * len(fns)
    for _ in range(repeat):
        for k, fn in enumerate(fns):
            t0 = time.perf_counter()
            fn()
            best[k] = min(best[k], time.perf_counter() - t0)
    return best


@numba.njit(fastmath=True, cache=True)
def _dot_one_thread(a, b):
    """One pass over two arrays on one thread (vectorized): a single-thread floor."""
    s = 0.0
    for i in range(a.size):
        s += a[i] * b[i]
    return s


def _vm_hwm():
    """Resident-set high-water mark [bytes] from /proc, or None."""
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        return None
    return None


def _reset_hwm():
    """Reset the kernel's RSS high-water mark (Linux); False when not allowed."""
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return True
    except OSError:
        return False


def _current_rss():
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


def run(speed, grade, **kw):
    return kernel.run_trace(speed, grade, DT, None, 36000.0, VEHICLE, DIESEL, ELECTRIC, **kw)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=10_000_000)
    ap.add_argument("--repeat", type=int, default=15, help="timed runs of each (best kept)")
    args = ap.parse_args(argv)
    n = args.samples

    # warm-up on a small trace: compilation (or cache load) happens here, before the
    # large arrays exist, so compiler memory is not counted against the kernel
    s_small, g_small = synthetic_trace(10_000)
    t0 = time.perf_counter()
    run(s_small, g_small)
    print(f"warm-up (compile or cache load): {time.perf_counter() - t0:.2f} s")

    speed, grade = synthetic_trace(n)
    input_bytes = speed.nbytes + grade.nbytes

    # memory: RSS high-water mark while the kernel runs, above the RSS with the inputs
    run(speed[:1000], grade[:1000])
    rss_before = _current_rss()
    reset = _reset_hwm()
    base_peak = _vm_hwm() if reset else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    tracemalloc.start()
    result = run(speed, grade)
    _, traced_peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    peak = _vm_hwm() if reset else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    rss_extra = peak - (rss_before if reset else base_peak)
    del result

    soc = np.zeros(n)  # preallocated output, touched once
    m = n // 10
    sp1, gr1, soc1 = speed[:m].copy(), grade[:m].copy(), np.zeros(m)
    workers = numba.get_num_threads()
    _dot_one_thread(speed[:10], grade[:10])
    # Each function is timed in its own block after one untimed call. np.dot comes last:
    # OpenBLAS threads keep spinning for a while after it returns and would compete with
    # the kernel's threads; switching between one and several threads also disturbs the
    # next run.
    def block(fn):
        fn()
        return best_of([fn], args.repeat)[0]

    floor_one = block(lambda: _dot_one_thread(speed, grade))
    t_all = block(lambda: run(speed, grade, soc_out=soc, workers=workers))
    t_kernel = block(lambda: run(speed, grade, soc_out=soc))
    t_small = block(lambda: run(sp1, gr1, soc_out=soc1))
    t_alloc = block(lambda: run(speed, grade))
    floor = block(lambda: np.dot(speed, grade))

    totals = run(speed, grade).totals
    limited_d = totals["diesel_limited_time"] / totals["duration"]
    limited_e = totals["electric_limited_time"] / totals["duration"]

    print(f"samples: {n:,}  (inputs {input_bytes / 1e6:.0f} MB: speed and grade, float64)")
    print(f"OPENBLAS_CORETYPE={os.environ.get('OPENBLAS_CORETYPE', '(unset)')}")
    print(f"floor np.dot(speed, grade), best of {args.repeat}:   {floor * 1e3:8.2f} ms   "
          "(BLAS threads as configured)")
    print(f"one-thread floor (compiled dot loop):  {floor_one * 1e3:8.2f} ms")
    print(f"kernel run_trace, {workers} workers:          {t_all * 1e3:8.2f} ms   "
          f"ratio {t_all / floor:5.2f}   (target <= 6)")
    print(f"kernel run_trace, 1 worker (default):  {t_kernel * 1e3:8.2f} ms   "
          f"ratio {t_kernel / floor:5.2f}; {t_kernel / floor_one:5.2f} x one-thread floor "
          "(issue 17: <= 4)")
    print(f"per sample: one-thread floor {floor_one / n * 1e9:.2f} ns "
          f"({input_bytes / floor_one / 1e9:.1f} GB/s read), kernel "
          f"{t_kernel / n * 1e9:.2f} ns; at {m:,} samples {t_small / m * 1e9:.2f} ns")
    print(f"run_trace allocating the SOC array:    {t_alloc * 1e3:8.2f} ms   "
          f"ratio {t_alloc / floor:5.2f}   (first-touch page faults included)")
    print(f"peak memory above inputs (RSS{'' if reset else ', ru_maxrss'}): "
          f"{rss_extra / 1e6:8.1f} MB = {rss_extra / input_bytes:.2f} x inputs   (target <= 3)")
    print(f"peak numpy allocations (tracemalloc): {traced_peak / 1e6:8.1f} MB = "
          f"{traced_peak / input_bytes:.2f} x inputs")
    print(f"linearity: {m:,} samples {t_small * 1e3:.2f} ms, {n:,} samples "
          f"{t_kernel * 1e3:.2f} ms, ratio {t_kernel / t_small:.2f}   (target <= 11)")
    print(f"trace: power-limited share of time diesel {limited_d:.1%}, electric "
          f"{limited_e:.1%}; final state of charge {totals['electric_soc_end']:.1f}")


if __name__ == "__main__":
    main()
