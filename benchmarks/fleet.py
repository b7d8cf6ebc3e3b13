"""The benchmark fleet: 5,000 units x 24 months (about 10 million checks) from the demo generator,
generated once into bench-output/ and ingested (cached; other benchmarks reuse the database)."""

from __future__ import annotations

import os
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
OUT = ROOT / "bench-output"
N_UNITS, MONTHS, SEED = 5_000, 24, 20261129


def fleet_dir() -> Path:
    """The generated source files (generated on first use)."""
    out = OUT / f"fleet-{N_UNITS}x{MONTHS}"
    if not (out / "manifest.json").exists():
        from demo_fleet.generator import generate_demo_fleet
        generate_demo_fleet(out, instruments=N_UNITS, months=MONTHS, seed=SEED)
    return out


def database_path() -> Path:
    return OUT / f"fleet-{N_UNITS}x{MONTHS}.duckdb"


def benchmark_database() -> Path:
    """Path of the ingested benchmark database, building it on first use."""
    db = database_path()
    if db.exists():
        return db
    from pipeline.demo_job import run_demo_job
    from pipeline.settings import Settings

    os.environ.setdefault("BREATHFLEET_OPERATOR_KEY", "benchmark-key")
    tmp = db.with_name(f"{db.name}.{os.getpid()}.building")
    for p in (tmp, tmp.with_name(tmp.name + ".wal")):
        p.unlink(missing_ok=True)
    from pipeline.db import snapshot_path
    run_demo_job(fleet_dir(), tmp, Settings())
    os.replace(tmp, db)
    os.replace(snapshot_path(tmp), snapshot_path(db))
    return db
