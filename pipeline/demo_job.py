"""The demo job: generate the invented fleet (if absent), ingest it in manifest order, fill
check_results, publish. The analysis that follows is pipeline.main_job."""

from __future__ import annotations

import glob
import json
import time
from dataclasses import dataclass
from pathlib import Path

from pipeline.db import open_database, publish_snapshot
from pipeline.settings import Settings
from pipeline.sources.ingest import FileResult, ingest_paths
from pipeline.sources.profiles import load_profile
from pipeline.standards import sync_standards_settings


@dataclass(frozen=True)
class DemoSummary:
    out_dir: str
    db_path: str
    files: int
    rows_read: int
    rows_stored: int
    rows_duplicate: int
    rows_quarantined: int
    results: tuple[FileResult, ...]
    seconds: dict  # ingest (files to checks), check_results (expected values), publish (snapshot)


def run_demo_job(out_dir: str | Path, db_path: str | Path, settings: Settings, instruments: int = 300,
                 months: int = 18, seed: int | None = None) -> DemoSummary:
    """Generate the demo fleet into out_dir unless its manifest exists, ingest it, publish the snapshot."""
    out = Path(out_dir)
    manifest = out / "manifest.json"
    if not manifest.exists():
        from demo_fleet.generator import generate_demo_fleet
        kwargs = {"seed": seed} if seed is not None else {}
        generate_demo_fleet(out, instruments=instruments, months=months, **kwargs)
    con = open_database(db_path)
    results: list[FileResult] = []
    seconds = {}
    try:
        t = time.perf_counter()
        for entry in json.loads(manifest.read_text(encoding="utf-8")):
            profile = load_profile(out / entry["profile"]) if entry.get("profile") else None
            files = sorted(glob.glob(str(out / entry["path"])))
            results += ingest_paths(con, files, settings, profile, entry.get("table"))
        seconds["ingest"] = time.perf_counter() - t
        t = time.perf_counter()
        sync_standards_settings(con, settings)   # also fills check_results
        seconds["check_results"] = time.perf_counter() - t
        t = time.perf_counter()
        publish_snapshot(con, db_path)
        seconds["publish"] = time.perf_counter() - t
    finally:
        con.close()
    return DemoSummary(str(out), str(db_path), len(results), sum(r.rows_read for r in results),
                       sum(r.rows_stored for r in results), sum(r.rows_duplicate for r in results),
                       sum(r.rows_quarantined for r in results), tuple(results), seconds)
