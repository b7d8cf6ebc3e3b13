"""How a `breathfleet` command process uses memory: freed memory is kept for reuse, in small pages.

A fleet-wide analyse allocates and frees hundreds of arrays of tens of megabytes. By default
glibc maps each of them fresh from the kernel and unmaps it when it is freed, and numpy asks the
kernel to back every array of 4 MB or more with 2 MB huge pages. Each new page is then a page
fault. On a virtual machine whose balloon driver hands freed 2 MB blocks back to the host (the
benchmark machine), each huge page is also one the host must supply again. Measured on analyse
of the 9.3-million-check benchmark fleet, one fresh process per run, alternated with the default:
kernel time fell from 4.5-5.9 s to 2.2-2.5 s per run and the run from 10.4-13.6 s to 8.6-9.8 s.

prepare_batch_process() runs before numpy is imported (pipeline/console_script.py, the console
script). It does two things:
- it sets NUMPY_MADVISE_HUGEPAGE=0, numpy's documented switch, read when numpy is imported
  (numpy manual, "Global state": madvise hugepage on Linux), unless the environment sets it;
- where the C library is glibc, it tells malloc (mallopt) to serve large blocks from the heap
  and to keep up to 2 GB of freed memory for reuse instead of returning it: M_MMAP_MAX = 0 and
  M_TRIM_THRESHOLD = 2**31 - 1.
The process then keeps its peak memory until it exits, which a batch command can afford. The
dashboard server runs in a process of its own and keeps the defaults.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import os

# mallopt parameter numbers (glibc malloc.h)
M_TRIM_THRESHOLD = -1
M_MMAP_MAX = -4


def prepare_batch_process() -> bool:
    """Apply the memory settings above to this process; True if glibc's malloc accepted them."""
    os.environ.setdefault("NUMPY_MADVISE_HUGEPAGE", "0")
    name = ctypes.util.find_library("c")
    try:
        libc = ctypes.CDLL(name)
        mallopt = libc.mallopt
    except (OSError, TypeError, AttributeError):  # not glibc, or no C library found
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    return bool(mallopt(M_MMAP_MAX, 0)) and bool(mallopt(M_TRIM_THRESHOLD, 2**31 - 1))
