"""Chart series: one unit, level and baseline segment, numbered once (table chart_series).

Stored points refer to their series by its number (chart_point_values.series_id); the view
chart_points joins the unit, level and segment back (sql/views/chart_points.sql).
"""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd

from pipeline.db import registered, sql_text

KEY = ["instrument_id", "level", "baseline_period"]  # a chart series (a chart group)


def series_ids(con: duckdb.DuckDBPyConnection, keys: pd.DataFrame) -> np.ndarray:
    """The series number of each row of `keys` (KEY columns, one row per series), in row order.

    Series not yet numbered get the next numbers, in row order, and are stored in chart_series
    (inside the caller's transaction, if any)."""
    if keys.empty:
        return np.empty(0, dtype=np.int32)
    rows = pd.DataFrame({c: keys[c].to_numpy() if c != "instrument_id" else keys[c].astype(str).to_numpy()
                         for c in KEY}).assign(row=np.arange(len(keys)))
    with registered(con, "_bf_series_keys", rows):
        found = con.execute(sql_text("queries/chart_series_lookup")).fetchnumpy()
        ids = found["series_id"][np.argsort(found["row"])]
        missing = np.flatnonzero(ids < 0)
        if len(missing):
            first = int(con.execute("SELECT coalesce(max(series_id), 0) + 1 FROM chart_series").fetchall()[0][0])
            ids[missing] = np.arange(first, first + len(missing))
            fresh = rows.iloc[missing][KEY].assign(series_id=ids[missing])
            with registered(con, "_bf_series_new", fresh):
                con.execute("INSERT INTO chart_series BY NAME SELECT * FROM _bf_series_new")
    return ids.astype(np.int32)
