"""tco.heap: glibc keeps freed array memory for reuse once the thresholds are set.

What is checked is the documented behaviour of glibc's ``M_TRIM_THRESHOLD`` and
``M_MMAP_THRESHOLD`` (The GNU C Library Reference Manual, §3.2.3.7 "Malloc Tunable
Parameters"; mallopt(3)): with both raised, memory freed at the top of the heap is not
handed back, so allocating the same arrays again takes no new page faults. The count of
minor page faults comes from getrusage(2). No speed is asserted.
"""
from __future__ import annotations

import platform
import resource
import subprocess
import sys

import pytest

from tco import heap

glibc_only = pytest.mark.skipif(platform.libc_ver()[0] != "glibc", reason="glibc mallopt")

# twenty 1 MiB arrays alive at once, freed together, five times over: with glibc's
# defaults (dynamic thresholds of about 1 MiB and 2 MiB after the first free) the 20 MiB
# freed at the top of the heap is given back and faulted in again each time
_PATTERN = """
import resource, numpy as np, sys
if sys.argv[1] == "tuned":
    from tco import heap
    assert heap.keep_freed_memory()
def rounds():
    for _ in range(5):
        arrays = [np.ones(2**17) for _ in range(20)]
        del arrays
rounds()  # the first round faults its pages in, either way
before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
rounds()
print(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)
"""


def _faults(mode: str) -> int:
    out = subprocess.run([sys.executable, "-c", _PATTERN, mode], capture_output=True,
                         text=True, check=True)
    return int(out.stdout.split()[-1])


@glibc_only
def test_freed_arrays_are_reused_without_page_faults():
    pages = 20 * 2**20 // resource.getpagesize()  # one round's arrays, in pages
    tuned, plain = _faults("tuned"), _faults("plain")
    assert tuned < pages // 10  # a few stray pages, not the arrays
    assert plain > 2 * pages  # the defaults do give the memory back (the check has teeth)


@glibc_only
def test_keep_freed_memory_is_set_once_and_reports_it():
    assert heap.keep_freed_memory() is True
    assert heap.keep_freed_memory() is True  # cached: no second mallopt call
    assert heap.keep_freed_memory.cache_info().hits >= 1
