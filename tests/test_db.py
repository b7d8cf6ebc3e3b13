"""Database: migrations are recorded and safe to re-run; snapshots are published atomically."""

import duckdb
import numpy as np
import pytest

from pipeline.db import connect, connect_reader, migrate, open_database, publish_snapshot, snapshot_path
from pipeline.errors import DatabaseLockedError


def test_migrations_are_recorded_and_rerun_is_a_no_op(fresh_db):
    versions = [r[0] for r in fresh_db.execute("SELECT version FROM schema_migrations ORDER BY 1").fetchall()]
    assert versions[:3] == [1, 2, 3]
    assert migrate(fresh_db) == []


def test_views_exist_on_an_empty_database(fresh_db):
    assert fresh_db.execute("SELECT count(*) FROM check_results").fetchone() == (0,)


def test_snapshot_is_readable_while_writer_holds_the_file(tmp_path):
    db = tmp_path / "fleet.duckdb"
    writer = open_database(db)
    writer.execute("INSERT INTO sites (site_id, time_zone) VALUES ('S1', 'UTC')")
    publish_snapshot(writer, db)
    reader = connect_reader(db)
    assert reader.execute("SELECT count(*) FROM sites").fetchone() == (1,)
    assert snapshot_path(db).exists()
    writer.close()


def test_second_writer_gets_a_clear_lock_error(tmp_path):
    db = tmp_path / "fleet.duckdb"
    writer = open_database(db)
    # A second process is needed to see DuckDB's file lock; within one process DuckDB shares the instance.
    import subprocess, sys
    code = ("from pipeline.db import connect\nfrom pipeline.errors import DatabaseLockedError\n"
            f"try:\n    connect(r'{db}')\nexcept DatabaseLockedError as e:\n    print('LOCKED', e)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.startswith("LOCKED") and "database is locked by another breathfleet process" in out
    writer.close()


def test_fetch_arrays_equals_fetchnumpy_whatever_the_capacity():
    from pipeline.db import fetch_arrays

    con = duckdb.connect(":memory:")
    con.execute("CREATE TABLE t AS SELECT i::BIGINT AS id, (i % 7)::TINYINT AS code, (i % 300)::SMALLINT AS small, "
                "(i * 0.5)::DOUBLE AS x, TIMESTAMP '2026-01-01' + to_microseconds(i) AS at FROM range(5000) r(i)")
    query = "SELECT * FROM t WHERE id >= $lo ORDER BY code, id"
    want = con.execute(query, {"lo": 10}).fetchnumpy()
    for capacity, batch_rows in ((5000, 1 << 19), (4990, 512), (100, 512), (0, 64), (100_000, 512)):
        got = fetch_arrays(con, query, {"lo": 10}, capacity=capacity, batch_rows=batch_rows)
        assert list(got) == list(want)
        for name, column in want.items():
            assert got[name].dtype == np.asarray(column).dtype, name
            assert np.array_equal(got[name], np.asarray(column)), name
    empty = fetch_arrays(con, query, {"lo": 10**6}, capacity=5000)
    assert {name: len(a) for name, a in empty.items()} == dict.fromkeys(want, 0)
    assert empty["at"].dtype == np.dtype("datetime64[us]")
    with pytest.raises(ValueError, match="column x has NULL"):
        fetch_arrays(con, "SELECT id, CASE WHEN id = 3 THEN NULL ELSE x END AS x FROM t", capacity=5000,
                     batch_rows=64)
    assert con.execute("SELECT count(*) FROM t").fetchall() == [(5000,)]  # the connection is free again
