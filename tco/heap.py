"""How the C heap hands out the memory of large NumPy arrays (glibc malloc settings).

A vectorized pass over many Monte Carlo draws makes dozens of short-lived arrays of
0.1–1 MB each. With glibc's default settings a freed block at the top of the heap is
given back to the system once more than the trim threshold (a few MB at most, after
glibc's own adjustment) is free there, and blocks above the mmap threshold are mapped
fresh each time, so the next pass page-faults its arrays in again: measured on this
project's two-core machine, :func:`tco.emissions.totals` for 100,000 draws spent 9.5 ms
of which 7.5 ms were page faults (2.0 ms with the settings below), and the whole Monte
Carlo step of ``tests/benchmarks/bench_montecarlo.py`` went from 5.2 to 4.0 times its
random-number floor.

:func:`keep_freed_memory` raises both thresholds (``mallopt``), so that arrays below
32 MiB come from the heap and up to 64 MiB of freed memory stays there for the next
arrays. The process keeps at most that much more memory than it needs at a time. It is
called before the Monte Carlo pass; it changes nothing but speed (the same numbers are
computed), and nothing where the C library is not glibc.

References
----------
.. [1] The GNU C Library Reference Manual, §3.2.3.7 "Malloc Tunable Parameters"
   (``M_MMAP_THRESHOLD``, ``M_TRIM_THRESHOLD``, and the dynamic adjustment of both).
.. [2] mallopt(3), Linux man-pages ("M_MMAP_THRESHOLD", "M_TRIM_THRESHOLD").
"""
from __future__ import annotations

import ctypes
import ctypes.util
import functools

__all__ = ["MMAP_THRESHOLD", "TRIM_THRESHOLD", "keep_freed_memory"]

#: Blocks below this size come from the heap, not from a fresh mapping. [bytes]
MMAP_THRESHOLD = 32 * 2**20
#: Freed memory at the top of the heap up to this size stays there for reuse. [bytes]
TRIM_THRESHOLD = 64 * 2**20
# glibc <malloc.h>
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3


@functools.cache
def keep_freed_memory() -> bool:
    """Set glibc's mmap and trim thresholds (:data:`MMAP_THRESHOLD`,
    :data:`TRIM_THRESHOLD`) for this process, once.

    Returns
    -------
    bool
        True when both were set; False where there is no glibc ``mallopt`` (the process
        then runs as before).
    """
    name = ctypes.util.find_library("c")
    try:
        libc = ctypes.CDLL(name or "libc.so.6")
        mallopt = libc.mallopt
    except (OSError, AttributeError):
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    mallopt.restype = ctypes.c_int
    return bool(mallopt(_M_MMAP_THRESHOLD, MMAP_THRESHOLD)
                and mallopt(_M_TRIM_THRESHOLD, TRIM_THRESHOLD))
