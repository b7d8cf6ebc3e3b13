"""A `breathfleet` process prepares its memory before numpy is imported (pipeline/batch_memory.py)."""

from __future__ import annotations

import os
import subprocess
import sys
import sysconfig
from pathlib import Path

import pytest

PROBE = ("from pipeline.batch_memory import prepare_batch_process; accepted = prepare_batch_process(); "
         "import numpy; print(accepted, numpy._core.multiarray._get_madvise_hugepage())")


def _run(code: str, **env: str) -> str:
    clean = {k: v for k, v in os.environ.items() if k != "NUMPY_MADVISE_HUGEPAGE"} | env
    return subprocess.run([sys.executable, "-c", code], check=True, capture_output=True, text=True,
                          env=clean).stdout.split()


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="numpy's huge-page advice exists on Linux only")
def test_numpy_gives_no_huge_page_advice_and_glibc_accepts_the_settings():
    # numpy manual, "Global state": NUMPY_MADVISE_HUGEPAGE=0 turns the advice off, read at import
    accepted, advice = _run(PROBE)
    assert advice == "False"
    # mallopt returns 1 on success (glibc manual, "Malloc Tunable Parameters"); musl has no mallopt
    assert accepted == ("True" if os.confstr("CS_GNU_LIBC_VERSION") else "False")


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="numpy's huge-page advice exists on Linux only")
def test_an_explicit_environment_setting_is_kept():
    _, advice = _run(PROBE, NUMPY_MADVISE_HUGEPAGE="1")
    assert advice == "True"


def test_the_console_script_prepares_the_process_before_the_commands_load():
    script = Path(sysconfig.get_path("scripts")) / "breathfleet"
    if not script.exists():
        pytest.skip("breathfleet is not installed in this environment")
    assert "pipeline.console_script" in script.read_text(encoding="utf-8")
    # the console script's module must not import numpy before preparing (it sits outside pipeline.cli)
    loaded = _run("import sys, pipeline.console_script; print('numpy' in sys.modules)")
    assert loaded == ["False"]
