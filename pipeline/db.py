"""The DuckDB database: connections, numbered migrations, named SQL files and read snapshots.

Concurrency design: DuckDB lets one process hold a database file for writing, and other
processes cannot open it meanwhile. Writers (ingest, analyse, model) work on the main
file. When a writer commits a unit of work it calls `publish_snapshot`, which checkpoints,
copies the file to a temporary name beside it and renames it over `<db>.snapshot`
(an atomic rename on one file system). Readers (the dashboard, reports) open the
snapshot read-only through `connect_reader`; a reader that holds the old snapshot open
keeps its inode until it reconnects, so it never sees a lock error or a half-written file.
"""

from __future__ import annotations

import os
import re
import shutil
from collections.abc import Iterator
import functools
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import duckdb
import numpy as np
import pandas as pd

from pipeline.errors import DatabaseLockedError, InputError

SQL_DIR = Path(__file__).resolve().parent.parent / "sql"
_MIGRATION_NAME = re.compile(r"^(\d{3})_([a-z0-9_]+)\.sql$")


def sql_text(name: str) -> str:
    """Text of a named SQL file, e.g. 'views/check_results_live' or 'queries/fleet_summary'."""
    path = SQL_DIR / f"{name}.sql"
    try:
        return path.read_text(encoding="utf-8")
    except FileNotFoundError as exc:
        raise InputError(f"no SQL file named '{name}'", file=str(path)) from exc


def connect(path: str | Path, *, read_only: bool = False) -> duckdb.DuckDBPyConnection:
    """Open a database file; a lock held by another process becomes a DatabaseLockedError."""
    try:
        return duckdb.connect(str(path), read_only=read_only)
    except duckdb.IOException as exc:
        if "lock" in str(exc).lower():
            raise DatabaseLockedError(
                "database is locked by another breathfleet process; wait for it to finish "
                "or read the published snapshot instead", file=str(path)) from exc
        raise InputError(f"cannot open database: {exc}", file=str(path)) from exc


# A writer checkpoints when it publishes its snapshot (publish_snapshot), not whenever a
# commit's write-ahead log passes DuckDB's default 16 MB: a week of check_results rows crossed it
# and the commit then spent most of an incremental update rewriting the file.
WRITER_CHECKPOINT_THRESHOLD = "1GB"
# DuckDB's buffer pool of a writer (default 80 % of RAM). Blocks a writer has written stay cached
# until the limit makes it evict them; the bound keeps a whole-fleet ingest under 2 GB of memory.
# Larger sorts and windows spill to the temp directory instead of failing.
WRITER_MEMORY_LIMIT = "1536MB"
# The buffer pool while the chart engine runs (pipeline/charts/analyse.py). Its sorted read of a
# whole fleet and its inserts were faster with a larger pool: on the 10-million-check fleet a full
# run took 0.1-2.6 s less with 3-4 GB than with 1.5 GB in each of 5 paired runs, and the process
# peak stayed 3.7 GB either way (the engine's own arrays set it, not DuckDB's pool).
ANALYSE_MEMORY_LIMIT = "3GB"


def open_database(path: str | Path) -> duckdb.DuckDBPyConnection:
    """Open a database for writing and bring its schema and views up to date."""
    con = connect(path)
    con.execute(f"SET checkpoint_threshold = '{WRITER_CHECKPOINT_THRESHOLD}'")
    con.execute(f"SET memory_limit = '{WRITER_MEMORY_LIMIT}'")
    migrate(con)
    return con


@contextmanager
def memory_limit(con: duckdb.DuckDBPyConnection, limit: str) -> Iterator[None]:
    """DuckDB's memory_limit set to `limit` inside the block, restored after it."""
    before = con.execute("SELECT current_setting('memory_limit')").fetchone()[0]
    con.execute(f"SET memory_limit = '{limit}'")
    try:
        yield
    finally:
        con.execute(f"SET memory_limit = '{before}'")


@contextmanager
def registered(con: duckdb.DuckDBPyConnection, name: str, rows) -> Iterator[None]:
    """A frame (or Arrow table) visible to `con`'s queries as view `name` inside the block."""
    con.register(name, rows)
    try:
        yield
    finally:
        con.unregister(name)


@functools.cache
def latest_schema_version() -> int:
    """The newest numbered schema file in sql/schema: the tables this version's queries expect."""
    return max(int(m.group(1)) for p in (SQL_DIR / "schema").glob("*.sql") if (m := _MIGRATION_NAME.match(p.name)))


def migrate(con: duckdb.DuckDBPyConnection) -> list[str]:
    """Apply numbered schema files not yet recorded, then (re)create every view.

    Safe to re-run. Returns the names of the schema files applied now.
    """
    con.execute(sql_text("schema/000_schema_migrations"))
    done = {row[0] for row in con.execute("SELECT version FROM schema_migrations").fetchall()}
    applied = []
    for path in sorted((SQL_DIR / "schema").glob("*.sql")):
        match = _MIGRATION_NAME.match(path.name)
        if match is None:
            raise InputError("schema file name must look like 012_name.sql", file=str(path))
        version = int(match.group(1))
        if version == 0 or version in done:
            continue
        con.execute("BEGIN TRANSACTION")
        try:
            con.execute(path.read_text(encoding="utf-8"))
            con.execute("INSERT INTO schema_migrations (version, name) VALUES ($version, $name)",
                        {"version": version, "name": match.group(2)})
            con.execute("COMMIT")
        except duckdb.Error as exc:
            con.execute("ROLLBACK")
            raise InputError(f"schema migration failed: {exc}", file=str(path)) from exc
        applied.append(path.name)
    create_views(con)
    return applied


def create_views(con: duckdb.DuckDBPyConnection) -> None:
    """Create or replace every view in sql/views, in an order that satisfies their dependencies."""
    pending = sorted((SQL_DIR / "views").glob("*.sql"))
    while pending:
        failed: list[tuple[Path, duckdb.Error]] = []
        for path in pending:
            try:
                con.execute(path.read_text(encoding="utf-8"))
            except duckdb.CatalogException as exc:  # depends on a view not created yet
                failed.append((path, exc))
        if len(failed) == len(pending):
            path, exc = failed[0]
            raise InputError(f"view cannot be created: {exc}", file=str(path))
        pending = [path for path, _ in failed]


def fetch_arrays(con: duckdb.DuckDBPyConnection, query: str, params: dict | None = None, *, capacity: int,
                 batch_rows: int = 1 << 19) -> dict[str, np.ndarray]:
    """A query's result as one numpy array per column, streamed batch by batch (Arrow) into arrays
    allocated for `capacity` rows, an upper bound on the result (more rows still work, at the cost
    of a copy). Pages beyond the result are never touched; a result under half the capacity is
    copied into arrays of its own size. The columns must hold no NULL.

    Why not fetchnumpy: it materialises the whole result inside DuckDB, then converts it. For the
    chart engine's sorted read of 9.3 million checks, streaming took 1.30-1.41 s against 1.84-1.94 s
    and touched 0.6 GB less memory (350 thousand page faults against 505 thousand).
    """
    reader = con.sql(query, params=params).to_arrow_reader(batch_rows)
    try:  # closed in any case: an unfinished result would keep the connection busy
        out = {f.name: np.empty(capacity, dtype=f.type.to_pandas_dtype()) for f in reader.schema}
        n = 0
        for batch in reader:
            m = batch.num_rows
            if n + m > capacity:
                capacity = max(2 * capacity, n + m)
                out = {name: np.resize(a[:n], capacity) for name, a in out.items()}
            for name, column in zip(batch.schema.names, batch.columns):
                if column.null_count:
                    raise ValueError(f"fetch_arrays: column {name} has NULL values")
                out[name][n:n + m] = column.to_numpy(zero_copy_only=False)
            n += m
    finally:
        reader.close()
    return {name: a[:n].copy() if n < len(a) // 2 else a[:n] for name, a in out.items()}


def query_df(con: duckdb.DuckDBPyConnection, name: str, **params: Any) -> pd.DataFrame:
    """Run a named SQL file from sql/ with named parameters ($name) and return a DataFrame."""
    return con.execute(sql_text(name), params or None).df()


def snapshot_path(path: str | Path) -> Path:
    """Where the read snapshot of a database file is published."""
    path = Path(path)
    return path.with_name(path.name + ".snapshot")


def publish_snapshot(con: duckdb.DuckDBPyConnection, path: str | Path) -> Path:
    """Checkpoint the writer's database and atomically publish a read-only copy for readers."""
    path = Path(path)
    con.execute("CHECKPOINT")
    target = snapshot_path(path)
    tmp = target.with_name(f".{target.name}.{os.getpid()}.tmp")
    shutil.copyfile(path, tmp)
    os.replace(tmp, target)
    return target


def connect_reader(path: str | Path) -> duckdb.DuckDBPyConnection:
    """Open the published snapshot read-only; fall back to the main file when none exists yet."""
    snap = snapshot_path(path)
    if snap.exists():
        return connect(snap, read_only=True)
    return connect(path, read_only=True)


@contextmanager
def transaction(con: duckdb.DuckDBPyConnection) -> Iterator[duckdb.DuckDBPyConnection]:
    """One transaction: committed on success, rolled back on any exception."""
    con.execute("BEGIN TRANSACTION")
    try:
        yield con
    except BaseException:
        con.execute("ROLLBACK")
        raise
    con.execute("COMMIT")
