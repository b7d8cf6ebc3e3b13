"""A plain fleet summary: how many units, checks, lots and quarantined rows a database holds."""

from __future__ import annotations

from dataclasses import dataclass

import duckdb

from pipeline.db import sql_text


@dataclass(frozen=True)
class FleetSummary:
    """Counts over the whole database."""

    instruments: int
    checks: int
    lots: int
    quarantined_rows: int
    first_check_at: str | None
    last_check_at: str | None
    failing_checks: int


def summarise_fleet(con: duckdb.DuckDBPyConnection) -> FleetSummary:
    """Count units, checks, lots and quarantined rows; data range in UTC."""
    row = con.execute(sql_text("queries/fleet_summary")).fetchone()
    return FleetSummary(*[None if v is None else (str(v) if i in (4, 5) else int(v)) for i, v in enumerate(row)])
