"""Fleet pooled sigma, the unit's own frozen estimate, short-run Q statistics and re-baselines."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.charts.analyse import analyse_fleet
from pipeline.charts.baselines import own_estimates, pooled_sigma, record_rebaseline
from pipeline.charts.grouping import group_starts, position_in_group
from pipeline.charts.short_run import quesenberry_q
from pipeline.settings import Settings
from test_analyse import fleet_checks, make_db


def test_pooled_sigma_recovers_simulated_repeatability():
    rng = np.random.default_rng(4)
    gid = np.repeat(np.arange(200), 25)
    frame = pd.DataFrame({"technology": "fuel_cell", "standard_kind": "wet_bath", "level": 0.08, "gid": gid,
                          "relative_error": rng.normal(0, 0.012, len(gid)) + np.repeat(rng.normal(0, 0.02, 200), 25)})
    got = pooled_sigma(frame, group_starts(gid))
    # common practice: MR-bar / d2 estimates the within-unit sigma, unaffected by unit offsets
    assert abs(got["sigma"].iloc[0] / 0.012 - 1) < 0.05


def test_quesenberry_q_is_standard_normal_in_control():
    rng = np.random.default_rng(9)
    codes = np.repeat(np.arange(3000), 15)
    x = rng.normal(0.0, 0.01, len(codes)) + np.repeat(rng.normal(0, 0.05, 3000), 15)
    starts = group_starts(codes)
    q, _, _ = quesenberry_q(x, starts, np.full(len(x), 0.01))
    later = position_in_group(starts) >= 1
    # Quesenberry (1991) JQT 23:213-224: Q_r, r >= 2, are iid N(0,1) whatever the unknown mean
    assert abs(q[later].mean()) < 0.02 and abs(q[later].std() - 1) < 0.02
    # Quesenberry (1991): successive Q statistics are uncorrelated
    q2 = q.reshape(3000, 15)[:, 1:]
    assert abs(np.corrcoef(q2[:, 3], q2[:, 4])[0, 1]) < 0.05


def test_own_estimates_from_first_checks_only():
    x = np.r_[np.arange(20) * 0.0 + np.tile([0.0, 0.01], 10), np.full(10, 5.0)]
    starts = group_starts(np.zeros(30))
    est = own_estimates(x, starts, position_in_group(starts), 20)
    # Montgomery 6.4: centre = mean, sigma = MR-bar / d2(2) over the phase I checks (d2 = 1.128)
    assert abs(est["center"].iloc[0] - 0.005) < 1e-12 and abs(est["sigma"].iloc[0] - 0.01 / 1.128) < 1e-4
    assert est["row"].iloc[0] == 19


def test_rebaseline_needs_reason_and_starts_new_segment():
    checks = fleet_checks(n_units=3, n=40)
    con = make_db(checks)
    analyse_fleet(con, Settings())
    with pytest.raises(ValueError, match="needs a reason"):
        record_rebaseline(con, "U001", pd.Timestamp("2025-01-10"), " ")
    record_rebaseline(con, "U001", pd.Timestamp("2025-01-10"), "lot change agreed by program")
    analyse_fleet(con, Settings())
    segs = con.execute("SELECT DISTINCT baseline_period FROM chart_points WHERE instrument_id = 'U001' ORDER BY 1").fetchall()
    assert segs == [(0,), (1,)]
    reason = con.execute("SELECT reason FROM chart_baselines WHERE instrument_id = 'U001' AND baseline_period = 1 "
                         "AND version = 1").fetchall()
    assert reason == [("rebaseline: lot change agreed by program",)]
    assert con.execute("SELECT count(*) FROM chart_points").fetchall()[0][0] == len(checks)


def test_rebaseline_recomputes_replicate_groups():
    # every check of unit U001 has a replicate 5 minutes later: X-bar/S groups of two checks
    base = fleet_checks(n_units=3, n=40)
    rep = base[base["instrument_id"] == "U001"].assign(measured_at=lambda d: d["measured_at"] + pd.Timedelta(minutes=5))
    checks = pd.concat([base, rep], ignore_index=True).sort_values(["instrument_id", "measured_at"], kind="stable")
    checks = checks.assign(check_id=np.arange(1, len(checks) + 1), line=np.arange(1, len(checks) + 1))
    con = make_db(checks)
    analyse_fleet(con, Settings())
    record_rebaseline(con, "U001", pd.Timestamp("2025-01-10"), "sensor serviced")
    analyse_fleet(con, Settings())
    # each stored group's X-bar and S are those of its two checks' stored z (after the re-baseline too)
    got = con.execute(
        "SELECT g.check_id, g.n, g.xbar, g.s, (p.z + q.z) / 2 AS mean_z, abs(p.z - q.z) / sqrt(2) AS sd_z "
        "FROM chart_groups g JOIN chart_points p ON p.check_id = g.check_id "
        "JOIN chart_points q ON q.check_id = g.check_id - 1 ORDER BY 1").df()
    assert len(got) == 40 and (got["n"] == 2).all()
    assert np.allclose(got["xbar"], got["mean_z"], atol=1e-9) and np.allclose(got["s"], got["sd_z"], atol=1e-9)
