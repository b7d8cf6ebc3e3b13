"""Shared fixtures: a fresh in-memory database built from sql/, and the demo fleet."""

from __future__ import annotations

import duckdb
import pytest

from pipeline.db import migrate


@pytest.fixture
def fresh_db() -> duckdb.DuckDBPyConnection:
    """An empty in-memory DuckDB with the full schema and views, built from the same sql/ files."""
    con = duckdb.connect(":memory:")
    migrate(con)
    yield con
    con.close()


@pytest.fixture(scope="session")
def demo_db(tmp_path_factory):
    """A small demo fleet (40 units x 6 months) generated and ingested once per test session.

    Yields the database file path; the published snapshot sits beside it.
    """
    import os

    from pipeline.demo_job import run_demo_job
    from pipeline.settings import Settings

    base = tmp_path_factory.mktemp("demo_db")
    os.environ.setdefault("BREATHFLEET_OPERATOR_KEY", "test-session-key")
    summary = run_demo_job(base / "fleet", base / "demo.duckdb", Settings(), instruments=40, months=6, seed=7)
    assert summary.rows_stored > 0
    yield base / "demo.duckdb"
