"""The main job after ingest: chart every new check, fit the fleet model, rank the service queue, publish.

One function, run_main_job(con, settings, db_path), used by `breathfleet run` and `breathfleet demo`.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path

import duckdb

from pipeline.charts.analyse import AnalysisRun, analyse_fleet
from pipeline.dashboard_summary import write_dashboard_summary
from pipeline.db import publish_snapshot
from pipeline.models.fleet_model import FleetModelResult, fit_fleet_model, store_fleet_model
from pipeline.ranking import ServiceQueue, build_service_queue, store_service_queue
from pipeline.settings import Settings
from pipeline.standards import sync_standards_settings


@dataclass(frozen=True)
class MainJobSummary:
    """What the main job did: the chart run, the model fit, the queue, and seconds per step."""

    charts: AnalysisRun
    model: FleetModelResult
    model_fit_id: int | None
    queue: ServiceQueue
    seconds: dict[str, float]

    def lines(self) -> list[str]:
        """Plain-text summary lines for the command line."""
        c, m, q, s = self.charts, self.model, self.queue, self.seconds
        top = ", ".join(f"{e.instrument_id} ({100 * e.p_breach:.0f} %)" for e in q.entries[:3]) or "none"
        return [
            f"charts: {c.mode} run {c.run_id}, {c.n_new_checks:,} new checks, {c.n_signals:,} signals "
            f"({s['charts']:.1f} s)",
            f"model : {'converged' if m.converged else 'did NOT converge (estimates not stored)'}, "
            f"{m.n_checks:,} checks, {m.n_units:,} unit-periods, {m.n_lots} lots ({s['model']:.1f} s)",
            f"queue : {len(q.entries):,} units ranked; top: {top} ({s['queue']:.1f} s)",
        ]


def run_main_job(con: duckdb.DuckDBPyConnection, settings: Settings, db_path: str | Path) -> MainJobSummary:
    """Analyse what has been ingested: charts, fleet model, service queue; then publish the snapshot."""
    seconds: dict[str, float] = {}
    t = time.perf_counter()
    sync_standards_settings(con, settings)
    charts = analyse_fleet(con, settings)
    seconds["charts"] = time.perf_counter() - t
    t = time.perf_counter()
    model = fit_fleet_model(con, settings)
    fit_id = store_fleet_model(con, model)
    seconds["model"] = time.perf_counter() - t
    t = time.perf_counter()
    queue = build_service_queue(con, settings)
    store_service_queue(con, queue)
    seconds["queue"] = time.perf_counter() - t
    t = time.perf_counter()
    write_dashboard_summary(con)  # the dashboard's fleet-wide figures, read instead of 10M-row scans
    seconds["dashboard_summary"] = time.perf_counter() - t
    publish_snapshot(con, db_path)
    return MainJobSummary(charts, model, fit_id, queue, seconds)
