"""The lot registry as checks see it: which lots were used, and how often against the rules."""

from __future__ import annotations

from datetime import datetime

import duckdb
import pandas as pd

from pipeline.db import query_df

FAR_PAST = datetime(1900, 1, 1)
FAR_FUTURE = datetime(9999, 12, 31)


def summarise_lot_flags(con: duckdb.DuckDBPyConnection, start: datetime | None = None,
                        end: datetime | None = None) -> pd.DataFrame:
    """One row per lot used by checks in [start, end]: registry entry and counts of flagged checks.

    Unregistered lots appear with registered = False, so a typed-by-hand lot id is visible.
    Columns: those of sql/queries/standards_lot_flags.sql.
    """
    return query_df(con, "queries/standards_lot_flags", start=start or FAR_PAST, end=end or FAR_FUTURE)
