"""The table check_results after incremental refreshes equals a full recomputation from the view.

Invariant checked (no external source: this is the project's own consistency contract): whatever
arrives in whatever order (new checks, late checks, a new calibration, changed settings), the
stored rows are exactly the rows of check_results_live plus the solution-age window.
"""

from __future__ import annotations

import dataclasses

import duckdb
import pandas as pd
import pytest

from pipeline.check_results import refresh_check_results
from pipeline.db import migrate, sql_text
from pipeline.models.simulate import simulate_fleet
from pipeline.settings import Settings
from pipeline.standards import sync_standards_settings


def recomputed(con: duckdb.DuckDBPyConnection) -> pd.DataFrame:
    """Every row computed afresh, by the same SQL the full refresh uses, into a scratch table."""
    con.execute("CREATE OR REPLACE TEMP TABLE _expect AS SELECT * FROM check_results LIMIT 0")
    con.execute(sql_text("queries/check_results_insert_units").format(unit_filter="TRUE")
                .replace("INSERT INTO check_results", "INSERT INTO _expect"))
    return con.execute("SELECT * FROM _expect ORDER BY check_id").df()


def stored(con: duckdb.DuckDBPyConnection) -> pd.DataFrame:
    return con.execute("SELECT * FROM check_results ORDER BY check_id").df()


def assert_matches_full(con: duckdb.DuckDBPyConnection) -> None:
    pd.testing.assert_frame_equal(stored(con), recomputed(con), check_exact=False, rtol=1e-12)


@pytest.fixture
def con():
    c = duckdb.connect(":memory:")
    migrate(c)
    simulate_fleet(c, n_units=12, checks_per_unit=40, days=120, seed=5)
    yield c
    c.close()


def append_checks(con, source: str, shift_days: int, id_offset: int) -> None:
    con.execute(f"""INSERT INTO checks SELECT check_id + {id_offset}, instrument_id,
                    measured_at + INTERVAL {shift_days} DAY, lot_id, check_type, target, measured, units,
                    simulator_temp_c, pressure_kpa, site_id, operator_id, outcome, file_id, line
                    FROM checks WHERE {source}""")


def test_full_refresh_then_new_checks_then_late_checks(con):
    first = refresh_check_results(con)
    assert first.mode in ("full", "unchanged")
    assert_matches_full(con)
    top = con.execute("SELECT max(check_id) FROM checks").fetchone()[0]
    append_checks(con, "check_id <= 60", 200, top)                 # later than everything: new checks
    r = refresh_check_results(con)
    assert r.mode == "new_checks" and r.rows_written == 60
    assert_matches_full(con)
    top = con.execute("SELECT max(check_id) FROM checks").fetchone()[0]
    append_checks(con, "check_id BETWEEN 100 AND 110", 0, top)      # same times again: late for their units
    r = refresh_check_results(con)
    assert r.mode == "units" and r.units_recomputed >= 1
    assert_matches_full(con)
    assert refresh_check_results(con).mode == "unchanged"


def test_new_calibration_recomputes_only_that_unit(con):
    refresh_check_results(con)
    unit, mid = con.execute("SELECT instrument_id, median(measured_at) FROM checks GROUP BY 1 ORDER BY 1 LIMIT 1").fetchone()
    con.execute("INSERT INTO service_events VALUES ($u, $at, 'calibration', NULL)", {"u": unit, "at": mid})
    r = refresh_check_results(con)
    assert r.mode == "units" and r.units_recomputed == 1
    assert_matches_full(con)


def test_changed_settings_recompute_everything(con):
    sync_standards_settings(con, Settings())
    before = stored(con)["expected"].sum()
    std = dataclasses.replace(Settings().standards, simulator_nominal_c=34.1)  # simulated wet baths run at 34.0
    sync_standards_settings(con, dataclasses.replace(Settings(), standards=std))
    assert con.execute("SELECT mode FROM check_results_state").fetchone()[0] == "full"
    assert_matches_full(con)
    assert stored(con)["expected"].sum() != before


def test_removed_checks_are_removed(con):
    refresh_check_results(con)
    con.execute("DELETE FROM checks WHERE check_id % 7 = 0")
    assert refresh_check_results(con).mode == "full"
    assert_matches_full(con)
