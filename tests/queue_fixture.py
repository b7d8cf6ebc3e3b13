"""A small fleet database for the queue, digest and record tests (built with the dashboard fixture fleet)."""

from __future__ import annotations

import shutil
from pathlib import Path

import duckdb

from dashboard_fixture import build_fleet_db

_CACHE: dict[str, Path] = {}


def fleet_copy(tmp_dir: Path, name: str = "fleet.duckdb") -> Path:
    """A private copy of the fixture fleet (built once per session) at tmp_dir/name."""
    if "fleet" not in _CACHE:
        base = Path(tmp_dir).parent / "queue-fixture-base"
        base.mkdir(exist_ok=True)
        _CACHE["fleet"] = build_fleet_db(base / "fleet.duckdb")
        # One unit near tolerance (invented), so the queue has a unit a coordinator should visit: the
        # dashboard fixture's estimates (bias 2 %, drift 0.33 % per 30 days) are far from 6.25 %.
        con = duckdb.connect(str(_CACHE["fleet"]))
        con.execute("UPDATE unit_estimates SET bias_pct = 4.8, bias_ci_low_pct = 4.4, bias_ci_high_pct = 5.2, "
                    "drift_pct_per_30d = 0.6, drift_ci_low = 0.5, drift_ci_high = 0.7 WHERE instrument_id = 'TX1010'")
        con.close()
    target = Path(tmp_dir) / name
    shutil.copy(_CACHE["fleet"], target)
    return target


def analysed_demo(demo_db: Path, tmp_dir: Path) -> tuple[Path, dict]:
    """A copy of the session's demo fleet, charted and modelled, with its truth.json (cached per session)."""
    import json

    from pipeline.charts.analyse import analyse_fleet
    from pipeline.db import open_database, publish_snapshot
    from pipeline.models.fleet_model import fit_fleet_model, store_fleet_model
    from pipeline.settings import Settings
    from pipeline.standards import sync_standards_settings

    if "demo" not in _CACHE:
        base = Path(tmp_dir).parent / "queue-demo-base"
        base.mkdir(exist_ok=True)
        path = base / "demo.duckdb"
        shutil.copy(demo_db, path)
        con = open_database(path)
        sync_standards_settings(con, Settings())
        analyse_fleet(con, Settings())
        store_fleet_model(con, fit_fleet_model(con, Settings()))
        publish_snapshot(con, path)
        con.close()
        _CACHE["demo"] = path
    truth = json.loads((Path(demo_db).parent / "fleet" / "truth.json").read_text())
    return _CACHE["demo"], truth
