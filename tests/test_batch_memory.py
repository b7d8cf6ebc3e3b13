"""Process memory for fleet-wide arrays (pipeline/batch_memory.py): no numpy huge-page advice in a
`breathfleet` process, and glibc keeping freed memory only for the duration of an analyse."""

from __future__ import annotations

import ctypes
import os
import subprocess
import sys
import sysconfig
from pathlib import Path

import numpy as np
import pytest

from pipeline.batch_memory import freed_memory_kept

ADVICE = ("from pipeline.batch_memory import prepare_batch_process; prepare_batch_process(); "
          "import numpy; print(numpy._core.multiarray._get_madvise_hugepage())")
GLIBC = sys.platform.startswith("linux") and bool(os.confstr("CS_GNU_LIBC_VERSION"))


def _run(code: str, **env: str) -> list[str]:
    clean = {k: v for k, v in os.environ.items() if k != "NUMPY_MADVISE_HUGEPAGE"} | env
    return subprocess.run([sys.executable, "-c", code], check=True, capture_output=True, text=True,
                          env=clean).stdout.split()


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="numpy's huge-page advice exists on Linux only")
def test_numpy_gives_no_huge_page_advice_unless_the_environment_asks():
    # numpy manual, "Global state": NUMPY_MADVISE_HUGEPAGE=0 turns the advice off, read at import
    assert _run(ADVICE) == ["False"]
    assert _run(ADVICE, NUMPY_MADVISE_HUGEPAGE="1") == ["True"]


class _MallInfo2(ctypes.Structure):  # glibc >= 2.33, malloc.h
    _fields_ = [(n, ctypes.c_size_t) for n in ("arena", "ordblks", "smblks", "hblks", "hblkhd", "usmblks",
                                                "fsmblks", "uordblks", "fordblks", "keepcost")]


@pytest.mark.skipif(not GLIBC, reason="mallopt settings are glibc's")
def test_large_arrays_come_from_the_heap_only_inside_the_block():
    libc = ctypes.CDLL(None)
    if not hasattr(libc, "mallinfo2"):
        pytest.skip("glibc older than 2.33")
    libc.mallinfo2.restype = _MallInfo2

    def mapped_chunks_for_a_64_mb_array() -> int:
        before = libc.mallinfo2().hblks  # chunks glibc mapped with mmap (glibc manual, "Statistics of Malloc")
        array = np.ones(8_000_000)
        added = libc.mallinfo2().hblks - before
        del array
        return added

    # glibc manual, "Malloc Tunable Parameters": M_MMAP_MAX = 0 disables mmap for large blocks
    assert mapped_chunks_for_a_64_mb_array() == 1
    with freed_memory_kept() as accepted:
        assert accepted
        assert mapped_chunks_for_a_64_mb_array() == 0
    assert mapped_chunks_for_a_64_mb_array() == 1  # defaults restored


def test_the_console_script_prepares_the_process_before_the_commands_load():
    script = Path(sysconfig.get_path("scripts")) / "breathfleet"
    if not script.exists():
        pytest.skip("breathfleet is not installed in this environment")
    assert "pipeline.console_script" in script.read_text(encoding="utf-8")
    # the console script's module must not import numpy before preparing (it sits outside pipeline.cli)
    assert _run("import sys, pipeline.console_script; print('numpy' in sys.modules)") == ["False"]


def test_collector_paused_within_the_block_and_restored_after():
    import gc

    from pipeline.batch_memory import collector_paused

    assert gc.isenabled()
    with collector_paused():
        assert not gc.isenabled()
    assert gc.isenabled()
    gc.disable()
    try:  # a collector that was off stays off
        with collector_paused():
            assert not gc.isenabled()
        assert not gc.isenabled()
    finally:
        gc.enable()
