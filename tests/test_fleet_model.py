"""Fleet model end to end: simulated fleets through check_results, stored tables, commands, coverage."""

from __future__ import annotations

import json

import duckdb
import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from pipeline.cli import main
from pipeline.db import migrate
from pipeline.models.fleet_model import fit_fleet_model, store_fleet_model
from pipeline.models.simulate import simulate_fleet
from pipeline.settings import Settings

BAD_LOT = "WB-080-02"


@pytest.fixture
def planted(fresh_db):
    truth = simulate_fleet(fresh_db, n_units=60, checks_per_unit=120, seed=7, bad_lot_pct=3.0)
    return fresh_db, truth


def test_planted_bad_lot_is_off_and_healthy_lots_are_not(planted):
    con, truth = planted
    result = fit_fleet_model(con, Settings())
    assert result.converged and not result.boundary
    assert result.n_checks == truth.n_checks
    lots = result.lot_effects.set_index("lot_id")
    # Issue 5 acceptance: a planted bad lot of 3 % is called "off"
    assert lots.loc[BAD_LOT, "verdict"] == "off"
    assert lots.loc[BAD_LOT, "ci_low_pct"] < truth.lot_effects[BAD_LOT] < lots.loc[BAD_LOT, "ci_high_pct"]
    healthy = lots.drop(index=BAD_LOT)
    # Issue 5 acceptance: a healthy lot (|true effect| well under 2 %) is not "off"
    assert (healthy["verdict"] != "off").all()
    acceptance = {a.lot_id: a for a in result.acceptance}
    assert acceptance[BAD_LOT].state == "rejected"


def test_depletion_drift_and_unit_estimates_recover_truth(planted):
    con, truth = planted
    result = fit_fleet_model(con, Settings())
    se = result.parameters["fixed_se"]
    # simulated truth: depletion 0.3 % per 100 checks and fleet mean drift 0.05 % per 30 days,
    # recovered within 3.5 standard errors
    assert abs(result.fixed_effects["d"] - truth.depletion_per_100) < 3.5 * se["d"]
    assert abs(result.fixed_effects["t"] - truth.mean_drift) < 3.5 * se["t"]
    units = result.unit_estimates.merge(truth.unit_bias, on=["instrument_id", "baseline_period"])
    covered = ((units["drift_ci_low"] <= units["drift"]) & (units["drift"] <= units["drift_ci_high"])).mean()
    # common practice: conditional (BLUP) intervals cover the realised random effects about 95 % on average
    assert 0.85 <= covered <= 1.0
    assert units["variance_share"].sum() == pytest.approx(1.0)
    components = result.variance_components.set_index("component")["variance"]
    # simulated truth: repeatability SD 1.0 % for fuel cell at 0.080 (variance 1.0)
    assert components["repeatability fuel_cell @ 0.08"] == pytest.approx(1.0, rel=0.15)
    assert components["between_units_intercept"] == pytest.approx(0.64, rel=0.5)


def test_store_writes_every_table_and_keeps_verdict_since(planted):
    con, _ = planted
    first = store_fleet_model(con, fit_fleet_model(con, Settings()))
    second = store_fleet_model(con, fit_fleet_model(con, Settings()))
    assert second == first + 1
    for table in ("lot_effects", "unit_estimates", "variance_components", "model_diagnostics"):
        assert con.execute(f"SELECT count(*) FROM {table} WHERE fit_id = {second}").fetchone()[0] > 0
    fits = con.execute("SELECT converged, warnings, parameters FROM model_fits ORDER BY fit_id").fetchall()
    assert all(row[0] for row in fits) and json.loads(fits[0][2])["settings"]["window_days"] == 365
    since = con.execute("SELECT fit_id, verdict_since FROM lot_effects WHERE lot_id = $lot ORDER BY fit_id",
                        {"lot": BAD_LOT}).fetchall()
    assert since[0][1] == since[1][1]
    assert con.execute("SELECT count(*) FROM lot_acceptance").fetchone()[0] > 0
    names = {r[0] for r in con.execute("SELECT diagnostic FROM model_diagnostics").fetchall()}
    assert {"converged", "boundary", "residual_skewness", "residual_trend_over_window"} <= names


def test_an_empty_database_is_stored_as_a_failed_fit(fresh_db):
    result = fit_fleet_model(fresh_db, Settings())
    assert not result.converged and result.warnings
    fit_id = store_fleet_model(fresh_db, result)
    row = fresh_db.execute("SELECT converged FROM model_fits WHERE fit_id = $f", {"f": fit_id}).fetchone()
    assert row == (False,)
    assert fresh_db.execute("SELECT passed FROM model_diagnostics WHERE diagnostic = 'converged'").fetchone() == (False,)


def test_model_and_lots_commands(tmp_path):
    path = tmp_path / "fleet.duckdb"
    con = duckdb.connect(str(path))
    migrate(con)
    simulate_fleet(con, n_units=30, checks_per_unit=80, seed=5, bad_lot_pct=3.0)
    con.close()
    runner = CliRunner()
    out = runner.invoke(main, ["model", "--db", str(path)])
    assert out.exit_code == 0, out.output
    assert "converged" in out.output
    listed = runner.invoke(main, ["lots", "--db", str(path), "--json"])
    assert listed.exit_code == 0, listed.output
    records = {r["lot_id"]: r for r in json.loads(listed.output)}
    assert records[BAD_LOT]["verdict"] == "off"
    csv = runner.invoke(main, ["lots", "--db", str(path), "--csv"])
    assert csv.output.splitlines()[0].startswith("lot_id,standard_kind,effect_pct")
    both = runner.invoke(main, ["lots", "--db", str(path), "--csv", "--json"])
    assert both.exit_code != 0 and "choose one of --json and --csv" in both.output


def test_lots_command_without_a_model_says_what_to_do(tmp_path):
    path = tmp_path / "empty.duckdb"
    con = duckdb.connect(str(path))
    migrate(con)
    con.close()
    out = CliRunner().invoke(main, ["lots", "--db", str(path)])
    assert out.exit_code != 0 and "run `breathfleet model --db FILE`" in out.output


def test_lot_interval_coverage_across_simulated_fleets():
    """Across 25 small simulated fleets the 95 % lot intervals cover the true lot effects about 95 %."""
    hits, total = 0, 0
    for rep in range(25):
        con = duckdb.connect(":memory:")
        migrate(con)
        truth = simulate_fleet(con, n_units=24, checks_per_unit=60, days=200, lot_days=50, seed=100 + rep)
        lots = fit_fleet_model(con, Settings()).lot_effects
        con.close()
        true = lots["lot_id"].map(truth.lot_effects)
        hits += int(((lots["ci_low_pct"] <= true) & (true <= lots["ci_high_pct"])).sum())
        total += len(lots)
    rate = hits / total
    print(f"lot interval coverage {rate:.3f} over {total} intervals")
    # Nominal 95 % Wald coverage; Monte Carlo band: 4 binomial SEs over `total` intervals.
    band = 4 * np.sqrt(0.95 * 0.05 / total)
    assert abs(rate - 0.95) < band


def test_memory_limit_is_checked_and_restored(planted):
    import dataclasses

    from pipeline.errors import InputError

    con, _ = planted
    def limit() -> float:  # DuckDB prints the limit rounded, e.g. '18.8 GiB'
        return float(con.execute("SELECT current_setting('memory_limit')").fetchone()[0].split()[0])

    before = limit()
    fit_fleet_model(con, Settings())
    assert limit() == pytest.approx(before, rel=0.01)
    bad = dataclasses.replace(Settings(), model=dataclasses.replace(Settings().model, duckdb_memory_limit="2GB'; DROP"))
    with pytest.raises(InputError, match="model.duckdb_memory_limit must look like '2GB'"):
        fit_fleet_model(con, bad)
