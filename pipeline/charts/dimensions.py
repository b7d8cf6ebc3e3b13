"""Small numbered tables that the large chart tables refer to by number.

- chart_series: one unit, level and baseline segment (a chart group). chart_point_values.series_id
  refers to it; the view chart_points joins the three names back (sql/views/chart_points.sql).
- chart_signal_kinds: one chart, rule and direction. chart_signal_values.kind refers to it; the
  view chart_signals joins the names back (sql/views/chart_signals.sql).

Storing a number instead of repeated names is what makes a fleet's millions of rows cheap to
store (sql/schema/105_chart_series.sql and 106_chart_signal_kinds.sql give the measurements).
"""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd

from pipeline.db import registered, sql_text

KEY = ["instrument_id", "level", "baseline_period"]  # a chart series (a chart group)
SIGNAL_KIND = ["chart", "rule", "direction"]


def dimension_ids(con: duckdb.DuckDBPyConnection, table: str, id_column: str, keys: pd.DataFrame) -> np.ndarray:
    """The number in `table` of each row of `keys` (one row per distinct key; its columns are the
    table's key columns), in row order. Keys not yet numbered get the next numbers, in row order,
    and are stored in `table` (inside the caller's transaction, if any)."""
    if keys.empty:
        return np.empty(0, dtype=np.int32)
    rows = pd.DataFrame({c: keys[c].to_numpy() if keys[c].dtype.kind in "biuf" else keys[c].astype(str).to_numpy()
                         for c in keys.columns}).assign(row=np.arange(len(keys)))
    query = sql_text("queries/dimension_lookup").format(table=table, id_column=id_column,
                                                        columns=", ".join(keys.columns))
    with registered(con, "_bf_dimension_keys", rows):
        found = con.execute(query).fetchnumpy()
        ids = np.asarray(found["id"], dtype=np.int64)[np.argsort(found["row"])]
        missing = np.flatnonzero(ids < 0)
        if len(missing):
            first = int(con.execute(f"SELECT coalesce(max({id_column}), 0) + 1 FROM {table}").fetchall()[0][0])  # noqa: S608
            ids[missing] = np.arange(first, first + len(missing))
            fresh = rows.iloc[missing].drop(columns="row").assign(**{id_column: ids[missing]})
            with registered(con, "_bf_dimension_new", fresh):
                con.execute(f"INSERT INTO {table} BY NAME SELECT * FROM _bf_dimension_new")  # noqa: S608
    return ids.astype(np.int32)


def series_ids(con: duckdb.DuckDBPyConnection, keys: pd.DataFrame) -> np.ndarray:
    """The chart_series number of each row of `keys` (KEY columns, one row per series)."""
    return dimension_ids(con, "chart_series", "series_id", keys[KEY])


def signal_kinds(con: duckdb.DuckDBPyConnection, signals: pd.DataFrame) -> np.ndarray:
    """The chart_signal_kinds number of each signal (its chart, rule and direction columns, best
    as pandas categoricals), looked up once per kind that occurs, not once per signal."""
    if signals.empty:
        return np.empty(0, dtype=np.int16)
    cols = [signals[c] if isinstance(signals[c].dtype, pd.CategoricalDtype) else signals[c].astype("category")
            for c in SIGNAL_KIND]
    sizes = [len(c.cat.categories) for c in cols]
    combo = np.zeros(len(signals), dtype=np.int64)
    for col, size in zip(cols, sizes):
        combo = combo * size + col.cat.codes.to_numpy()
    present = np.flatnonzero(np.bincount(combo, minlength=int(np.prod(sizes))))
    parts, rest = [], present
    for col, size in zip(cols[::-1], sizes[::-1]):
        parts.append(np.asarray(col.cat.categories)[rest % size])
        rest = rest // size
    kinds = pd.DataFrame(dict(zip(SIGNAL_KIND, parts[::-1])))
    lookup = np.zeros(int(np.prod(sizes)), dtype=np.int16)
    lookup[present] = dimension_ids(con, "chart_signal_kinds", "kind", kinds)
    return lookup[combo]
