"""Database: migrations are recorded and safe to re-run; snapshots are published atomically."""

import duckdb
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
