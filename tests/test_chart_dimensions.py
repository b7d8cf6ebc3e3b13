"""Chart series and signal kinds: numbered once, reused by later runs; points and signals of older
databases are carried over."""

import re

import numpy as np
import pandas as pd

from pipeline.charts.dimensions import series_ids, signal_kinds
from pipeline.db import SQL_DIR, migrate


def _keys(rows):
    return pd.DataFrame(rows, columns=["instrument_id", "level", "baseline_period"])


def test_new_series_are_numbered_in_row_order_and_known_ones_reused(fresh_db):
    first = series_ids(fresh_db, _keys([("U2", 0.08, 0), ("U1", 0.08, 1000)]))
    assert first.tolist() == [1, 2]
    again = series_ids(fresh_db, _keys([("U1", 0.08, 1000), ("U3", 0.04, 0), ("U2", 0.08, 0)]))
    assert again.tolist() == [2, 3, 1]
    stored = fresh_db.execute("SELECT series_id, instrument_id, level, baseline_period FROM chart_series "
                              "ORDER BY 1").fetchall()
    assert stored == [(1, "U2", 0.08, 0), (2, "U1", 0.08, 1000), (3, "U3", 0.04, 0)]
    assert series_ids(fresh_db, _keys([])).size == 0


def test_signal_kinds_are_numbered_once_per_kind(fresh_db):
    sig = pd.DataFrame({"chart": pd.Categorical(["ewma", "cusum", "ewma", "ewma"], categories=["cusum", "ewma", "s"]),
                        "rule": ["limit", "h", "limit", "limit"], "direction": ["up", "down", "down", "up"]})
    kinds = signal_kinds(fresh_db, sig)
    assert kinds.tolist() == [3, 1, 2, 3]  # numbered in (chart, rule, direction) order of the kinds present
    assert signal_kinds(fresh_db, sig.iloc[[2, 1]]).tolist() == [2, 1]
    assert fresh_db.execute("SELECT count(*) FROM chart_signal_kinds").fetchone()[0] == 3
    assert signal_kinds(fresh_db, sig.iloc[:0]).size == 0


def test_points_and_signals_of_a_database_from_before_the_split_read_back_unchanged(tmp_path):
    import duckdb

    con = duckdb.connect(str(tmp_path / "old.duckdb"))
    con.execute((SQL_DIR / "schema" / "000_schema_migrations.sql").read_text())
    for path in sorted((SQL_DIR / "schema").glob("*.sql")):
        version, name = re.match(r"(\d+)_(.+)\.sql$", path.name).groups()
        if 0 < int(version) < 105:
            con.execute(path.read_text())
            con.execute("INSERT INTO schema_migrations (version, name) VALUES ($v, $n)", {"v": int(version), "n": name})
    old = pd.DataFrame({
        "check_id": [11, 12, 13], "instrument_id": ["U9", "U9", "U1"], "level": [0.08, 0.08, 0.04],
        "baseline_period": [0, 0, 2000], "measured_at": pd.to_datetime(["2026-01-02", "2026-01-03", "2026-01-02"]),
        "position": [1, 2, 1], "relative_error": [0.01, -0.02, 0.0], "z": [0.5, -1.0, 0.0],
        "moving_range": [np.nan, 1.5, np.nan], "cusum_upper": [0.0, 0.0, 0.0], "cusum_lower": [0.0, 0.5, 0.0],
        "ewma": [0.1, -0.12, 0.0], "ewma_ucl": [0.6, 0.77, 0.6], "center": [0.0, 0.0, 0.0],
        "sigma": [0.02, 0.02, 0.01], "own_sigma": [False, False, True]})
    con.register("old", old)
    con.execute("INSERT INTO chart_points BY NAME SELECT * FROM old")
    con.unregister("old")
    signals = pd.DataFrame({
        "signal_id": [1, 2], "instrument_id": ["U9", "U1"], "level": [0.08, 0.04], "check_id": [12, 13],
        "measured_at": pd.to_datetime(["2026-01-03", "2026-01-02"]), "chart": ["cusum", "individuals"],
        "rule": ["h", "WE1"], "direction": ["down", "up"], "size": [4.2, 3.1],
        "onset_at": pd.to_datetime(["2026-01-02", None]), "impact_checks": [2, 1], "p_value": [0.01, np.nan],
        "fleet_significant": pd.array([True, None], dtype="boolean"), "run_id": [1, 1],
        "created_at": pd.to_datetime(["2026-01-04", "2026-01-04"])})
    con.register("old", signals)
    con.execute("INSERT INTO chart_signals BY NAME SELECT * FROM old")
    con.unregister("old")
    applied = migrate(con)
    assert {"105_chart_series.sql", "106_chart_signal_kinds.sql"} <= set(applied)
    pd.testing.assert_frame_equal(con.execute("SELECT * FROM chart_signals ORDER BY signal_id").df()[signals.columns],
                                  signals, check_dtype=False)
    back = con.execute("SELECT * FROM chart_points ORDER BY check_id").df()
    pd.testing.assert_frame_equal(back[old.columns], old, check_dtype=False)
    assert con.execute("SELECT series_id, instrument_id FROM chart_series ORDER BY 1").fetchall() == [(1, "U1"), (2, "U9")]
    con.close()
