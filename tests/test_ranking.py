"""Tests of pipeline.ranking (the service queue) and the queue command."""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import os
from pathlib import Path

import duckdb
import numpy as np
import pytest
from click.testing import CliRunner

from pipeline.cli import main
from pipeline.cli.queue import escape_cell
from pipeline.ranking import build_service_queue, shrink, store_service_queue, tolerance_pct
from pipeline.settings import QueueSettings, Settings
from queue_fixture import analysed_demo, fleet_copy


@pytest.fixture(scope="module")
def fleet(tmp_path_factory) -> Path:
    return fleet_copy(tmp_path_factory.mktemp("queue"))


@pytest.fixture(scope="module")
def queue(fleet):
    con = duckdb.connect(str(fleet), read_only=True)
    yield build_service_queue(con, Settings())
    con.close()


def test_shrink_pulls_noisy_estimates_harder():
    est = np.array([0.0, 0.5, -0.5, 1.0, 4.0, 4.0])
    se = np.array([0.3, 0.3, 0.3, 0.3, 0.3, 3.0])
    post, var, mean, tau2 = shrink(est, se)
    # Efron & Morris (1975), JASA 70:311-319: the shrinkage factor tau2 / (tau2 + se2) is smaller for the noisier estimate
    assert abs(post[5] - mean) < abs(post[4] - mean)
    assert var[5] < se[5] ** 2 and tau2 > 0


def test_queue_ranks_are_a_permutation_with_intervals(queue):
    ranks = [e.rank for e in queue.entries]
    assert ranks == list(range(1, len(ranks) + 1))
    assert all(e.rank_low <= e.rank <= e.rank_high for e in queue.entries)
    assert all(0.0 <= e.p_breach <= 1.0 for e in queue.entries)
    assert [e.p_breach for e in queue.entries] == sorted((e.p_breach for e in queue.entries), reverse=True)
    assert all(e.reasons and all(r.endswith(".") for r in e.reasons) for e in queue.entries)


def test_queue_is_deterministic(fleet, queue):
    con = duckdb.connect(str(fleet), read_only=True)
    again = build_service_queue(con, Settings())
    con.close()
    assert [(e.instrument_id, e.p_breach, e.rank_low, e.rank_high, e.reasons) for e in again.entries] == \
           [(e.instrument_id, e.p_breach, e.rank_low, e.rank_high, e.reasons) for e in queue.entries]


def test_tolerance_in_percent_uses_the_default_rule():
    # common practice: max(0.005 g/210L, 5 %) at 0.080 g/210L is 6.25 %
    assert tolerance_pct(Settings()) == pytest.approx(6.25)


def test_lot_verdict_explains_and_lowers_priority(tmp_path):
    path = fleet_copy(tmp_path)
    con = duckdb.connect(str(path))
    # TX1000's upward signals raised on checks of lot WB-B1 (fixture verdict 'off', +2.6 %)
    con.execute("UPDATE chart_signal_values SET check_id = (SELECT max(check_id) FROM checks WHERE instrument_id = "
                "'TX1000' AND lot_id = 'WB-B1') WHERE instrument_id = 'TX1000'")
    assert con.execute("SELECT DISTINCT direction FROM chart_signals WHERE instrument_id = 'TX1000'").fetchall() == [("up",)]
    entry = next(e for e in build_service_queue(con, Settings()).entries if e.instrument_id == "TX1000")
    unexplained = build_service_queue(con, dataclasses.replace(
        Settings(), queue=QueueSettings(lot_explained_factor=1.0)))
    con.close()
    assert entry.evidence["lot_explained"] is True
    assert any("WB-B1" in r and "the lot, not the unit" in r for r in entry.reasons)
    other = next(e for e in unexplained.entries if e.instrument_id == "TX1000")
    assert entry.p_breach < other.p_breach


def test_few_check_unit_does_not_top_the_list_by_noise(tmp_path):
    path = fleet_copy(tmp_path)
    con = duckdb.connect(str(path))
    # a precise moderate bias against a large but very uncertain one
    con.execute("UPDATE unit_estimates SET bias_pct = 5.0, bias_ci_low_pct = 4.8, bias_ci_high_pct = 5.2, "
                "drift_pct_per_30d = 0, drift_ci_low = -0.05, drift_ci_high = 0.05 WHERE instrument_id = 'TX1004'")
    con.execute("UPDATE unit_estimates SET bias_pct = 12.0, bias_ci_low_pct = -12.0, bias_ci_high_pct = 36.0, "
                "drift_pct_per_30d = 0, drift_ci_low = -2, drift_ci_high = 2, n_checks = 3 "
                "WHERE instrument_id = 'TX1003'")
    shrunk = {e.instrument_id: e for e in build_service_queue(con, Settings()).entries}
    raw = {e.instrument_id: e for e in build_service_queue(
        con, dataclasses.replace(Settings(), queue=QueueSettings(shrink_to_fleet=False))).entries}
    con.close()
    assert raw["TX1003"].rank < raw["TX1004"].rank          # unshrunk, the noisy unit looks worse
    assert shrunk["TX1004"].rank < shrunk["TX1003"].rank    # shrunk toward the fleet, it does not
    assert shrunk["TX1003"].rank_high - shrunk["TX1003"].rank_low >= 0


def test_store_replaces_rows_of_the_same_time(tmp_path):
    path = fleet_copy(tmp_path)
    con = duckdb.connect(str(path))
    q = build_service_queue(con, Settings())
    store_service_queue(con, q)
    store_service_queue(con, q)
    n = con.execute("SELECT count(*) FROM service_queue WHERE computed_at = $t", {"t": q.as_of}).fetchone()[0]
    reasons = json.loads(con.execute("SELECT reasons FROM service_queue WHERE rank = 1 AND computed_at = $t",
                                     {"t": q.as_of}).fetchone()[0])
    con.close()
    assert n == len(q.entries)
    assert reasons == list(q.entries[0].reasons)


@pytest.mark.parametrize("value, expected", [("=1+2", "'=1+2"), ("+SUM(A1)", "'+SUM(A1)"), ("-3", "'-3"),
                                             ("@cmd", "'@cmd"), ("TX1000", "TX1000"), (None, "")])
def test_csv_cells_that_look_like_formulas_are_escaped(value, expected):
    # OWASP, "CSV Injection": prefix cells beginning with = + - @ with a single quote
    assert escape_cell(value) == expected


def test_queue_command_json_csv_region_top(tmp_path):
    path = fleet_copy(tmp_path)
    runner = CliRunner()
    out = runner.invoke(main, ["queue", "--db", str(path), "--json", "--top", "3"])
    assert out.exit_code == 0, out.output
    data = json.loads(out.output)
    assert [u["rank"] for u in data["units"]] == [1, 2, 3]
    assert data["settings_digest"] == Settings().digest()
    out = runner.invoke(main, ["queue", "--db", str(path), "--csv", "--region", "North Basin"])
    assert out.exit_code == 0, out.output
    rows = list(csv.DictReader(io.StringIO(out.output)))
    assert rows and all(r["region"] == "North Basin" for r in rows)
    out = runner.invoke(main, ["queue", "--db", str(path), "--region", "Nowhere"])
    assert out.exit_code != 0 and "no units in region 'Nowhere'" in out.output
    out = runner.invoke(main, ["queue", "--db", str(path), "--top", "2"])
    assert out.exit_code == 0 and "P(breach)" in out.output
    con = duckdb.connect(str(path), read_only=True)
    assert con.execute("SELECT count(*) FROM service_queue").fetchone()[0] > 0
    con.close()


@pytest.fixture(scope="module")
def demo_analysed(demo_db, tmp_path_factory):
    return analysed_demo(demo_db, tmp_path_factory.mktemp("demo_queue"))


def test_demo_fleet_faulty_units_rank_above_healthy_and_bad_lot_is_explained(demo_analysed):
    path, truth = demo_analysed
    con = duckdb.connect(str(path), read_only=True)
    q = build_service_queue(con, Settings())
    bad_lots = [b["lot_id"] for b in truth["bad_lots"]]
    lot_users = {r[0] for r in con.execute(
        "SELECT DISTINCT instrument_id FROM checks WHERE list_contains($l, lot_id) "
        "AND measured_at > (SELECT max(measured_at) FROM checks) - INTERVAL 60 DAY", {"l": bad_lots}).fetchall()}
    con.close()
    rank = {e.instrument_id: e.rank for e in q.entries}
    # A fault that ended before the as-of time (a drift stopped by a sensor replacement, a simulator heater
    # repaired) leaves a healthy unit: the queue ranks the risk from now to the next visit.
    faulty = {f["instrument_id"] for f in truth["faults"] if f["active_at_end"]}
    healthy = set(rank) - faulty - lot_users - {truth["legitimate_gap"]["instrument_id"]}
    assert {f["kind"] for f in truth["faults"] if f["active_at_end"]} == {"drift", "step", "noisy", "silent",
                                                                          "elevated_aborts"}
    # demo_fleet truth.json (the planted faults of the invented scenario): every one outranks every healthy unit
    assert max(rank[u] for u in faulty) < min(rank[u] for u in healthy)
    explained = [e for e in q.entries if e.instrument_id in lot_users - faulty and e.evidence.get("lot_explained")]
    assert explained


def test_demo_noisy_unit_breaches_more_through_its_own_repeatability(demo_analysed):
    path, truth = demo_analysed
    noisy = next(f["instrument_id"] for f in truth["faults"] if f["kind"] == "noisy")
    con = duckdb.connect(str(path), read_only=True)
    own = {e.instrument_id: e for e in build_service_queue(con, Settings()).entries}
    # a prior with overwhelming weight leaves every unit the fleet model's repeatability of its technology
    fleet = {e.instrument_id: e for e in build_service_queue(con, dataclasses.replace(
        Settings(), queue=QueueSettings(repeatability_prior_df=1e9))).entries}
    con.close()
    # demo_fleet SCENARIO.md: the noisy unit's repeatability sd is 4.5 %, healthy units' 1.0-1.5 %
    assert own[noisy].evidence["residual_sd_pct"] > 3.5
    assert own[noisy].p_breach > fleet[noisy].p_breach
    assert any("Repeatability sd" in r for r in own[noisy].reasons)


def test_uncertainty_grows_with_time_since_the_last_check(tmp_path):
    path = fleet_copy(tmp_path)
    con = duckdb.connect(str(path))
    before = {e.instrument_id: e for e in build_service_queue(con, Settings()).entries}
    con.execute("UPDATE unit_estimates SET reference_at = reference_at - INTERVAL 40 DAY "
                "WHERE instrument_id = 'TX1002'")
    after = {e.instrument_id: e for e in build_service_queue(con, Settings()).entries}
    con.close()
    # Montgomery & Runger 11-6: the prediction variance grows with the distance from the data (here the days
    # since the unit's last check, over which its drift is as uncertain as the fleet's drifts)
    assert after["TX1002"].evidence["forecast_sd_pct"] > before["TX1002"].evidence["forecast_sd_pct"]
