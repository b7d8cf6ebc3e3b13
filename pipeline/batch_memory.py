"""How a `breathfleet` process uses memory for fleet-wide arrays: small pages, freed memory reused.

A fleet-wide analyse allocates and frees hundreds of arrays of tens of megabytes. By default
glibc maps each of them fresh from the kernel and unmaps it when it is freed, and numpy asks the
kernel to back every array of 4 MB or more with 2 MB huge pages. Each new page is then a page
fault. On a virtual machine whose balloon driver hands freed 2 MB blocks back to the host (the
benchmark machine), each huge page is also one the host must supply again. Measured on analyse
of the 9.3-million-check benchmark fleet, one fresh process per run, alternated with the default:
kernel time fell from 4.5-5.9 s to 2.2-2.5 s per run and the run from 10.4-13.6 s to 8.6-9.8 s.

Two settings, each where it belongs:
- prepare_batch_process() sets NUMPY_MADVISE_HUGEPAGE=0, numpy's documented switch, read when
  numpy is imported (numpy manual, "Global state": madvise hugepage on Linux), unless the
  environment sets it. The console script (pipeline/console_script.py) calls it before numpy loads.
- freed_memory_kept() is a context for one fleet-wide computation (analyse_fleet): where the C
  library is glibc, malloc serves large blocks from the heap and keeps freed memory for reuse
  (mallopt M_MMAP_MAX = 0, M_TRIM_THRESHOLD = 2**31 - 1); on exit glibc's defaults come back
  (not values given in MALLOC_* environment variables) and malloc_trim returns the kept memory.
  Only there: kept memory counts toward the process's peak, and ingest has a peak-memory target
  (its peak rose from 1.73 to 1.94 GB with the setting on for the whole process).
- collector_paused() switches Python's cyclic garbage collector off for one fleet-wide
  computation. It is triggered by counts of allocated objects, and each pass walks every live
  container; pandas allocates many, and the passes took 2-3 % of a full analyse's CPU samples
  (perf, gc_collect_main and its visitors). Nothing of the run needs it: arrays are freed by
  reference counting, and the collector, on again after the run, frees any cycle the run left.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import gc
import os
from collections.abc import Iterator
from contextlib import contextmanager

# mallopt parameters and glibc's defaults for them (malloc.h; glibc manual, "Malloc Tunable Parameters")
M_TRIM_THRESHOLD, DEFAULT_TRIM_THRESHOLD = -1, 128 * 1024
M_MMAP_MAX, DEFAULT_MMAP_MAX = -4, 65536


def prepare_batch_process() -> None:
    """Give numpy no huge-page advice in this process (call before numpy is imported)."""
    os.environ.setdefault("NUMPY_MADVISE_HUGEPAGE", "0")


def _glibc():
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c"))
        libc.mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
        libc.malloc_trim.argtypes = [ctypes.c_size_t]
    except (OSError, TypeError, AttributeError):  # not glibc, or no C library found
        return None
    return libc


@contextmanager
def freed_memory_kept() -> Iterator[bool]:
    """Within the block, glibc's malloc keeps freed memory for reuse (see the module docstring).
    Yields True if glibc accepted the settings; a no-op elsewhere."""
    libc = _glibc()
    if libc is None:
        yield False
        return
    accepted = bool(libc.mallopt(M_MMAP_MAX, 0)) and bool(libc.mallopt(M_TRIM_THRESHOLD, 2**31 - 1))
    try:
        yield accepted
    finally:
        libc.mallopt(M_MMAP_MAX, DEFAULT_MMAP_MAX)
        libc.mallopt(M_TRIM_THRESHOLD, DEFAULT_TRIM_THRESHOLD)
        libc.malloc_trim(0)


@contextmanager
def collector_paused() -> Iterator[None]:
    """Python's cyclic garbage collector off within the block (see the module docstring), on again
    after it if it was on."""
    was_on = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_on:
            gc.enable()
