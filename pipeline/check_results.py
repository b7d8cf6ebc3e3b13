"""Keep the table check_results up to date with checks, reference tables, events and settings.

check_results holds, per check, what every later feature reads (expected value, correction,
error, verdict, flags, baseline period, solution age). Its rows come from the view
check_results_live (sql/views/), computed once and stored, because recomputing the view for
10 million checks on every read takes tens of seconds. refresh_check_results decides how much
to recompute, from the state recorded at the last refresh:

- full      the reference tables, standards settings or the view's SQL changed, or checks were
            removed: every row again;
- units     a unit's calibration, sensor-replacement or solution-change events changed, or it got
            a check older than its newest stored one: that unit's rows again;
- new_checks the usual case: rows for checks with a higher check_id than any stored;
- unchanged nothing to do.

Writers call it through sync_standards_settings (pipeline/standards) and after ingest.
"""

from __future__ import annotations

import hashlib
import time
from dataclasses import dataclass
from datetime import UTC, datetime

import duckdb

from pipeline.db import sql_text

VIEW_FILES = ("views/check_results_live", "views/baseline_periods")
BATCH_CHECKS = 1_000_000  # checks per statement when whole units are recomputed


@dataclass(frozen=True)
class RefreshResult:
    """What one refresh did."""

    mode: str            # full, units, new_checks, unchanged
    rows_written: int
    units_recomputed: int
    checks_through: int
    seconds: float


def _view_sql_digest() -> str:
    return hashlib.sha256("\n".join(sql_text(v) for v in VIEW_FILES).encode()).hexdigest()


def _unit_filter(units: list[str]) -> str:
    quoted = ", ".join("'" + u.replace("'", "''") + "'" for u in units)
    return f"l.instrument_id IN ({quoted})"


def refresh_check_results(con: duckdb.DuckDBPyConnection, *, in_transaction: bool = False) -> RefreshResult:
    """Bring check_results up to date (see the module text for the modes); one transaction.

    in_transaction: the caller has begun a transaction and commits it (DuckDB has no nested ones).
    """
    started = time.perf_counter()
    if not in_transaction:
        con.execute("BEGIN TRANSACTION")
    try:
        result = _refresh(con, started)
        if not in_transaction:
            con.execute("COMMIT")
    except BaseException:
        if not in_transaction:
            con.execute("ROLLBACK")
        raise
    return result


def _refresh(con: duckdb.DuckDBPyConnection, started: float) -> RefreshResult:
    inputs, events = con.execute(sql_text("queries/check_results_inputs_digest"),
                                 {"view_sql": _view_sql_digest()}).fetchone()
    state = con.execute("SELECT checks_through, inputs_digest, events_digest FROM check_results_state "
                        "WHERE state_id = 1").fetchone()
    top = con.execute("SELECT coalesce(max(check_id), 0) FROM checks").fetchone()[0]
    stored_rows = con.execute("SELECT count(*) FROM check_results").fetchone()[0]
    through = state[0] if state else 0
    still_there = (con.execute("SELECT count(*) FROM checks WHERE check_id <= $t", {"t": through}).fetchone()[0]
                   if state else 0)
    units: list[str] = []
    if state is None or state[1] != inputs or still_there != stored_rows or top < through:
        mode = "full"
        con.execute("DELETE FROM check_results")
        all_units = [r[0] for r in con.execute("SELECT DISTINCT instrument_id FROM checks ORDER BY 1").fetchall()]
        rows = _insert_units(con, all_units)
    else:
        if state[2] != events or top > through:
            units = [r[0] for r in con.execute(sql_text("queries/check_results_affected_units"),
                                               {"through": through}).fetchall()]
        rows = 0
        if units:
            con.execute("CREATE OR REPLACE TEMP TABLE _cr_units AS SELECT unnest($u) AS instrument_id", {"u": units})
            con.execute("DELETE FROM check_results WHERE instrument_id IN (SELECT instrument_id FROM _cr_units)")
            con.execute("DROP TABLE _cr_units")
            rows += _insert_units(con, units)
        if top > through:
            others = f"NOT ({_unit_filter(units)})" if units else "TRUE"
            rows += con.execute(sql_text("queries/check_results_insert_new").format(unit_filter=others),
                                {"through": through}).fetchone()[0]
        mode = "units" if units else ("new_checks" if top > through else "unchanged")
    if state is None or state[2] != events:
        con.execute("DELETE FROM check_results_events")
        con.execute("INSERT INTO check_results_events SELECT instrument_id, event_at, event_type FROM service_events "
                    "WHERE event_type IN ('calibration', 'sensor_replacement', 'solution_change')")
    con.execute("INSERT OR REPLACE INTO check_results_state VALUES (1, $t, $i, $e, $at, $m)",
                {"t": top, "i": inputs, "e": events, "at": datetime.now(UTC).replace(tzinfo=None), "m": mode})
    return RefreshResult(mode, int(rows), len(units), int(top), time.perf_counter() - started)


def _insert_units(con: duckdb.DuckDBPyConnection, units: list[str]) -> int:
    """Insert the rows of whole units, a batch of about BATCH_CHECKS checks at a time, so memory
    stays bounded (one statement over 10 million checks needed 8 GB for its window)."""
    if not units:
        return 0
    con.execute("CREATE OR REPLACE TEMP TABLE _cr_units AS SELECT unnest($u) AS instrument_id", {"u": units})
    counts = con.execute("SELECT u.instrument_id, count(c.check_id) FROM _cr_units u "
                         "LEFT JOIN checks c USING (instrument_id) GROUP BY 1 ORDER BY 1").fetchall()
    con.execute("DROP TABLE _cr_units")
    rows, batch, size = 0, [], 0
    for i, (unit, n) in enumerate(counts):
        batch.append(unit)
        size += n
        if size >= BATCH_CHECKS or i == len(counts) - 1:
            rows += con.execute(sql_text("queries/check_results_insert_units").format(
                unit_filter=_unit_filter(batch))).fetchone()[0]
            batch, size = [], 0
    return int(rows)
