"""Fleet-wide summaries for the dashboard, written by the main job after charts, model and queue.

The dashboard's fleet pages need figures over every check (each unit's latest verdict, weekly
percentiles, lot usage, the funnel plot's per-unit means). Computing them per page view means
scanning ten million rows of check_results each time; here they are computed once per main
job into small tables (sql/schema/090-094), which the pages read in milliseconds:

- summary_unit_levels: per unit and level, checks, first/last check, the latest verdict, and
  verdict disagreements (unit's own pass/fail against ours);
- summary_weeks: per week and standard kind, mean and 10th/90th percentiles of relative error;
- summary_lots: per lot, checks, units, first and last use;
- summary_funnel: per window, level and unit, n, mean and variance of relative error
  (the sufficient statistics of Spiegelhalter's funnel plot);
- summary_state: what they were computed from (checks through, data range, version).

The summaries are as of the last main job: checks ingested since then enter at the next run.
"""

from __future__ import annotations

import json
import time
from dataclasses import dataclass
from datetime import UTC, datetime

import duckdb

from pipeline import __version__
from pipeline.db import sql_text

FUNNEL_WINDOW_DAYS = (30, 90, 180, 365, 730)  # the windows the comparison page offers
_TABLES = ("summary_unit_levels", "summary_weeks", "summary_lots", "summary_funnel")


@dataclass(frozen=True)
class DashboardSummary:
    """What write_dashboard_summary stored: rows per table, the checks included, and how."""

    rows: dict[str, int]
    checks_through: int
    n_checks: int
    first_check_at: datetime | None
    last_check_at: datetime | None
    computed_at: datetime
    parameters: dict
    software_version: str
    seconds: float


def write_dashboard_summary(con: duckdb.DuckDBPyConnection,
                            windows: tuple[int, ...] = FUNNEL_WINDOW_DAYS) -> DashboardSummary:
    """Recompute every summary table from check_results in one transaction.

    Parameters:
        con: a writer's connection; check_results must be up to date (the main job's
            sync_standards_settings refreshes it).
        windows: funnel windows in days before the latest check.

    Returns:
        A DashboardSummary with the rows written per table.
    """
    started = time.perf_counter()
    parameters = {"funnel_window_days": [int(w) for w in windows]}
    con.execute("BEGIN TRANSACTION")
    try:
        rows = {}
        for table in _TABLES:
            con.execute(f"DELETE FROM {table}")  # noqa: S608 - table names are the constants above
            params = {"windows": parameters["funnel_window_days"]} if table == "summary_funnel" else None
            rows[table] = con.execute(sql_text(f"queries/dashboard_fill_{table}"), params).fetchone()[0]
        through, n, first, last = con.execute(
            "SELECT coalesce(max(check_id), 0), count(*), min(measured_at), max(measured_at) FROM check_results"
        ).fetchone()
        computed_at = datetime.now(UTC).replace(tzinfo=None)
        seconds = time.perf_counter() - started
        con.execute("INSERT OR REPLACE INTO summary_state VALUES (1, $t, $n, $f, $l, $at, $p, $v, $s)",
                    {"t": through, "n": n, "f": first, "l": last, "at": computed_at,
                     "p": json.dumps(parameters), "v": __version__, "s": seconds})
        con.execute("COMMIT")
    except BaseException:
        con.execute("ROLLBACK")
        raise
    return DashboardSummary(rows, int(through), int(n), first, last, computed_at, parameters, __version__, seconds)
