"""analyse_fleet: stored tables, incremental == full recompute, frozen baselines, signals."""

from __future__ import annotations

import json

import duckdb
import numpy as np
import pandas as pd
import pytest
from scipy.stats import linregress
from scipy.stats import t as t_dist

from pipeline.charts.analyse import analyse_fleet
from pipeline.check_results import refresh_check_results
from pipeline.db import migrate, sql_text
from pipeline.settings import Settings

COLUMNS = ["check_id", "instrument_id", "measured_at", "lot_id", "check_type", "target", "measured", "units",
           "simulator_temp_c", "pressure_kpa", "site_id", "operator_id", "outcome", "file_id", "line"]


def fleet_checks(n_units: int = 30, n: int = 80, seed: int = 1, shift_unit: int = 0) -> pd.DataFrame:
    """Invented fleet: control checks at 0.080 every 12 h, 1 % repeatability, one unit shifting +3 % late."""
    rng = np.random.default_rng(seed)
    u = np.repeat(np.arange(n_units), n)
    j = np.tile(np.arange(n), n_units)
    rel = 0.01 * rng.standard_normal(len(u)) + np.where((u == shift_unit) & (j > 50), 0.03, 0.0)
    return pd.DataFrame({
        "check_id": np.arange(1, len(u) + 1), "instrument_id": [f"U{i:03d}" for i in u],
        "measured_at": pd.Timestamp("2025-01-01") + pd.to_timedelta(12 * j, unit="h"), "lot_id": "L1",
        "check_type": "control", "target": 0.08, "measured": np.floor(0.08 * (1 + rel) * 1000) / 1000,
        "units": "g/210L", "simulator_temp_c": None, "pressure_kpa": 101.325, "site_id": "S1", "operator_id": None,
        "outcome": "pass", "file_id": 1, "line": np.arange(1, len(u) + 1)})[COLUMNS]


def make_db(checks: pd.DataFrame) -> duckdb.DuckDBPyConnection:
    con = duckdb.connect(":memory:")
    migrate(con)
    units = checks["instrument_id"].unique()
    con.register("u", pd.DataFrame({"instrument_id": units}))
    con.execute("INSERT INTO instruments (instrument_id, technology, model, site_id, region) "
                "SELECT instrument_id, 'fuel_cell', 'M1', 'S1', 'R1' FROM u")
    con.execute("INSERT INTO lots VALUES ('L1', 'dry_gas', 0.08, 'g/210L', 0.001, '2020-01-01', '2030-01-01', 'x')")
    add_checks(con, checks)
    return con


def add_checks(con, checks: pd.DataFrame) -> None:
    con.register("c", checks)
    con.execute("INSERT INTO checks SELECT * FROM c")
    con.unregister("c")


POINT_COLS = ["check_id", "position", "z", "moving_range", "cusum_upper", "cusum_lower", "ewma", "ewma_ucl",
              "center", "sigma", "own_sigma"]


def points(con) -> pd.DataFrame:
    return con.execute(f"SELECT {', '.join(POINT_COLS)} FROM chart_points ORDER BY check_id").df()


def test_analyse_stores_points_baselines_and_signals():
    checks = fleet_checks()
    con = make_db(checks)
    run = analyse_fleet(con, Settings())
    assert run.mode == "full" and run.n_new_checks == len(checks)
    assert con.execute("SELECT count(*) FROM chart_points").fetchone()[0] == len(checks)
    # two versions per segment: fleet pooled at the first check, the unit's own after 20 checks
    got = con.execute("SELECT version, sigma_source, count(*) FROM chart_baselines GROUP BY ALL ORDER BY 1").fetchall()
    assert got == [(1, "fleet_pooled", 30), (2, "unit", 30)]
    # each baseline's parameters are its run's: the unit page reads the run's CUSUM design through it
    rows = con.execute(sql_text("queries/dashboard_unit_baselines"), {"instrument_id": "U000"}).df()
    assert len(rows) == 2 and con.execute("SELECT count(*) FROM chart_baselines WHERE run_id = $r",
                                          {"r": run.run_id}).fetchone()[0] == 60
    assert {json.loads(p)["cusum"]["h"] for p in rows["parameters"]} == {run.parameters["cusum"]["h"]}
    # the shifted unit raises an upper CUSUM signal with an onset and an impact window
    sig = con.execute("SELECT * FROM chart_signals WHERE instrument_id = 'U000' AND chart = 'cusum'").df()
    assert (sig["direction"] == "up").any()
    shift_at = pd.Timestamp("2025-01-01") + pd.Timedelta(hours=12 * 51)
    first = sig[sig["measured_at"] >= shift_at].sort_values("measured_at").iloc[0]
    assert first["onset_at"] <= first["measured_at"] and first["impact_checks"] >= 1
    assert first["onset_at"] >= shift_at - pd.Timedelta(hours=12 * 6)


def seed_pooled(con, sigma=0.01):
    # the pooled sigma is frozen at the first run; give both databases the same one
    con.execute("INSERT INTO chart_pooled_sigma VALUES ('fuel_cell', 'dry_gas', 0.08, $s, 100, now(), 'test')",
                {"s": sigma})


def test_incremental_equals_full_recompute():
    checks = fleet_checks(n=70, seed=3)
    full = make_db(checks)
    seed_pooled(full)
    analyse_fleet(full, Settings())
    inc = make_db(checks[checks["measured_at"] < pd.Timestamp("2025-01-08")])
    seed_pooled(inc)
    analyse_fleet(inc, Settings())
    add_checks(inc, checks[(checks["measured_at"] >= pd.Timestamp("2025-01-08"))
                           & (checks["measured_at"] < pd.Timestamp("2025-01-20"))])
    analyse_fleet(inc, Settings())
    add_checks(inc, checks[checks["measured_at"] >= pd.Timestamp("2025-01-20")])
    run = analyse_fleet(inc, Settings())
    assert run.mode == "incremental"
    a, b = points(full), points(inc)
    pd.testing.assert_frame_equal(a, b, check_exact=False, rtol=1e-9, atol=1e-12)
    # the CUSUM onset (Page's last-zero estimate) and the impact window do not depend on where a run
    # of new checks began, nor do the run counters carried in chart_state
    cols = "check_id, chart, rule, direction, onset_at, impact_checks"
    sa = full.execute(f"SELECT {cols} FROM chart_signals ORDER BY ALL").fetchall()
    sb = inc.execute(f"SELECT {cols} FROM chart_signals ORDER BY ALL").fetchall()
    assert sa == sb
    state = "SELECT * EXCLUDE (last_check_id) FROM chart_state ORDER BY ALL"
    pd.testing.assert_frame_equal(full.execute(state).df(), inc.execute(state).df(), check_exact=False, rtol=1e-9)
    # signal ids stay unique over three runs (chart_signals has no key index: analyse numbers them)
    assert inc.execute("SELECT count(DISTINCT signal_id) = count(*) FROM chart_signals").fetchone()[0]
    # every run records the individuals and moving-range limits its points use (z units); the
    # moving-range limit is D4 * d2 = d2 + 3 d3 for n = 2: 1.1284 + 3 * 0.8525 = 3.686 (d2, d3 as tabled
    # in Montgomery, Introduction to Statistical Quality Control, Appendix VI; values from memory)
    limits = inc.execute("SELECT DISTINCT ind_lcl, ind_ucl, round(mr_ucl, 3) FROM chart_runs").fetchall()
    assert limits == [(-3.0, 3.0, 3.686)]


def test_late_checks_chart_their_groups_again():
    # U001 checks in replicate pairs; four of its pairs (after its own baseline is set) arrive late,
    # with check ids above every charted one: its groups are charted again and equal a full run's
    base = fleet_checks(n_units=3, n=60, seed=4)
    rep = base[base["instrument_id"] == "U001"].assign(measured_at=lambda d: d["measured_at"] + pd.Timedelta(minutes=5))
    checks = pd.concat([base, rep], ignore_index=True).sort_values(["instrument_id", "measured_at"], kind="stable")
    checks = checks.assign(check_id=np.arange(1, len(checks) + 1), line=np.arange(1, len(checks) + 1))
    late_from = pd.Timestamp("2025-01-01") + pd.Timedelta(hours=12 * 40)
    late = (checks["instrument_id"] == "U001") & checks["measured_at"].between(late_from, late_from + pd.Timedelta(days=2))
    full = make_db(checks)
    seed_pooled(full)
    analyse_fleet(full, Settings())
    inc = make_db(checks[~late])
    seed_pooled(inc)
    analyse_fleet(inc, Settings())
    add_checks(inc, checks[late].assign(check_id=lambda d: d["check_id"] + 10_000))
    run = analyse_fleet(inc, Settings())
    assert run.mode == "incremental" and run.n_new_checks > late.sum()  # the unit's later checks too
    ids = "CASE WHEN check_id > 10000 THEN check_id - 10000 ELSE check_id END"
    for table, cols in (("chart_points", "z, cusum_upper, cusum_lower, ewma, position"),
                        ("chart_signals", "chart, rule, direction"), ("chart_groups", "n, xbar, s")):
        a = full.execute(f"SELECT check_id, {cols} FROM {table} ORDER BY ALL").df()
        b = inc.execute(f"SELECT {ids} AS check_id, {cols} FROM {table} ORDER BY ALL").df()
        pd.testing.assert_frame_equal(a, b, check_exact=False, rtol=1e-9, atol=1e-12, check_dtype=False)


def test_baseline_frozen_when_later_data_arrive():
    checks = fleet_checks(n=60, seed=5)
    con = make_db(checks[checks["measured_at"] < pd.Timestamp("2025-01-20")])
    analyse_fleet(con, Settings())
    before = con.execute("SELECT * FROM chart_baselines ORDER BY baseline_id").df()
    later = checks[checks["measured_at"] >= pd.Timestamp("2025-01-20")].copy()
    later["measured"] = later["measured"] * 1.05  # very different later data
    add_checks(con, later)
    analyse_fleet(con, Settings())
    after = con.execute("SELECT * FROM chart_baselines ORDER BY baseline_id").df()
    pd.testing.assert_frame_equal(before, after.iloc[:len(before)].reset_index(drop=True))
    assert len(after) == len(before)


def test_nothing_new_is_a_noop():
    con = make_db(fleet_checks(n_units=5, n=30))
    analyse_fleet(con, Settings())
    run = analyse_fleet(con, Settings())
    assert run.n_new_checks == 0 and run.n_signals == 0


def test_analyse_command_stores_and_publishes(tmp_path):
    from click.testing import CliRunner

    from pipeline.cli import main
    from pipeline.db import snapshot_path

    db = tmp_path / "fleet.duckdb"
    con = make_db(fleet_checks(n_units=4, n=30))
    con.execute(f"ATTACH '{db}' AS f")
    con.execute("COPY FROM DATABASE memory TO f")
    con.close()
    result = CliRunner().invoke(main, ["analyse", "--db", str(db)])
    assert result.exit_code == 0, result.output
    assert "full run 1: 120 new checks" in result.output
    assert snapshot_path(db).exists()
    missing = CliRunner().invoke(main, ["analyse", "--db", str(tmp_path / "none.duckdb")])
    assert missing.exit_code != 0 and "database file does not exist; ingest data first" in missing.output


def test_linearity_of_a_verification_session_matches_linregress():
    # U002 runs a verification session: two checks at each of 0.040, 0.080 and 0.160 within 30 minutes
    checks = fleet_checks(n_units=3, n=40)
    at = pd.Timestamp("2025-01-05 09:00")
    targets = [0.040, 0.040, 0.080, 0.080, 0.160, 0.160]
    measured = [0.041, 0.040, 0.081, 0.082, 0.164, 0.163]
    ver = pd.DataFrame({"instrument_id": "U002", "measured_at": [at + pd.Timedelta(minutes=5 * i) for i in range(6)],
                        "lot_id": [{0.04: "L2", 0.08: "L1", 0.16: "L3"}[t] for t in targets],
                        "check_type": "verification", "target": targets, "measured": measured})
    checks = pd.concat([checks, ver.assign(**{c: checks[c].iloc[0] for c in COLUMNS if c not in ver})],
                       ignore_index=True).assign(check_id=lambda d: np.arange(1, len(d) + 1))[COLUMNS]
    con = make_db(checks)
    con.execute("INSERT INTO lots VALUES ('L2', 'dry_gas', 0.04, 'g/210L', 0.001, '2020-01-01', '2030-01-01', 'x'), "
                "('L3', 'dry_gas', 0.16, 'g/210L', 0.001, '2020-01-01', '2030-01-01', 'x')")
    refresh_check_results(con)  # expected values of the checks on the lots added after them
    analyse_fleet(con, Settings())
    got = con.execute("SELECT * FROM chart_linearity").df()
    assert len(got) == 1 and got["instrument_id"].iloc[0] == "U002" and got["n_checks"].iloc[0] == 6
    # scipy.stats.linregress (ordinary least squares) with 95 % t intervals on 4 degrees of freedom
    ref = linregress(targets, measured)
    tq = t_dist.ppf(0.975, 4)
    row = got.iloc[0]
    assert row["slope"] == pytest.approx(ref.slope, rel=1e-9)
    assert row["intercept"] == pytest.approx(ref.intercept, abs=1e-12)
    assert row["slope_high"] - row["slope"] == pytest.approx(tq * ref.stderr, rel=1e-6)
    assert row["intercept_high"] - row["intercept"] == pytest.approx(tq * ref.intercept_stderr, rel=1e-6)
    assert bool(row["proportional_bias"]) == (abs(ref.slope - 1) > tq * ref.stderr)


def test_a_failure_while_points_are_stored_rolls_the_run_back(monkeypatch):
    # the points insert runs while the rest of the run is computed: a failure there stores nothing
    import pipeline.charts.analyse as analyse_module

    con = make_db(fleet_checks(n_units=3, n=40))

    def fail(*args, **kwargs):
        raise RuntimeError("injected failure")
    monkeypatch.setattr(analyse_module, "_signals_groups_baselines", fail)
    with pytest.raises(RuntimeError, match="injected"):
        analyse_fleet(con, Settings())
    assert [con.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in ("chart_points", "chart_runs")] == [0, 0]
    monkeypatch.undo()
    run = analyse_fleet(con, Settings())
    assert run.mode == "full" and con.execute("SELECT count(*) FROM chart_points").fetchone()[0] == 120
