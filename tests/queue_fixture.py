"""A small fleet database for the queue, digest and record tests (built with the dashboard fixture fleet)."""

from __future__ import annotations

import shutil
from pathlib import Path

from dashboard_fixture import build_fleet_db

_CACHE: dict[str, Path] = {}


def fleet_copy(tmp_dir: Path, name: str = "fleet.duckdb") -> Path:
    """A private copy of the fixture fleet (built once per session) at tmp_dir/name."""
    if "fleet" not in _CACHE:
        base = Path(tmp_dir).parent / "queue-fixture-base"
        base.mkdir(exist_ok=True)
        _CACHE["fleet"] = build_fleet_db(base / "fleet.duckdb")
    target = Path(tmp_dir) / name
    shutil.copy(_CACHE["fleet"], target)
    return target
