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
