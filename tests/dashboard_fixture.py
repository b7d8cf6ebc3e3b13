"""A small invented fleet for the dashboard tests, with every table the dashboard reads.

Tables owned by other features (charts, model, queue) are created here with the columns of
the team's data contract when their migrations have not landed yet; when they exist, the
fixture fills the real tables. All names, sites and serials are invented.
"""

from __future__ import annotations

import json
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd

from pipeline.charts.dimensions import KEY as SERIES_KEY, series_ids, signal_kinds
from pipeline.check_results import refresh_check_results
from pipeline.dashboard_summary import write_dashboard_summary
from pipeline.db import migrate, publish_snapshot

CONTRACT_TABLES = {
    "chart_baselines": """baseline_id BIGINT, instrument_id TEXT, level DOUBLE, baseline_period INTEGER,
        version INTEGER, frozen_at TIMESTAMP, reason TEXT, sigma_source TEXT, center DOUBLE, sigma DOUBLE,
        n_checks BIGINT, parameters TEXT, software_version TEXT, run_id BIGINT""",
    "chart_runs": """run_id BIGINT, started_at TIMESTAMP, duration_s DOUBLE, mode TEXT, n_new_checks BIGINT,
        n_groups BIGINT, n_signals BIGINT, n_baselines BIGINT, parameters TEXT, software_version TEXT,
        ind_lcl DOUBLE, ind_ucl DOUBLE, mr_ucl DOUBLE""",
    "model_fits": """fit_id BIGINT, fitted_at TIMESTAMP, window_start TIMESTAMP, window_end TIMESTAMP,
        n_checks BIGINT, n_units BIGINT, n_lots BIGINT, converged BOOLEAN, boundary BOOLEAN, warnings TEXT,
        parameters TEXT, software_version TEXT, duration_s DOUBLE""",
    "lot_effects": """fit_id BIGINT, lot_id TEXT, standard_kind TEXT, effect_pct DOUBLE, ci_low_pct DOUBLE,
        ci_high_pct DOUBLE, n_units BIGINT, n_checks BIGINT, verdict TEXT, verdict_since DATE""",
    "unit_estimates": """fit_id BIGINT, instrument_id TEXT, baseline_period INTEGER, bias_pct DOUBLE,
        bias_ci_low_pct DOUBLE, bias_ci_high_pct DOUBLE, drift_pct_per_30d DOUBLE, drift_ci_low DOUBLE,
        drift_ci_high DOUBLE, bias_drift_cov DOUBLE, reference_at TIMESTAMP, variance_share DOUBLE,
        n_checks BIGINT, last_check_at TIMESTAMP""",
    "variance_components": "fit_id BIGINT, component TEXT, variance DOUBLE, ci_low DOUBLE, ci_high DOUBLE",
    "lot_acceptance": """lot_id TEXT, state TEXT, decided_at TIMESTAMP, n_checks BIGINT, statistic DOUBLE,
        parameters TEXT""",
    "model_diagnostics": "fit_id BIGINT, diagnostic TEXT, value DOUBLE, passed BOOLEAN, message TEXT",
    "service_queue": """computed_at TIMESTAMP, instrument_id TEXT, rank INTEGER, p_breach DOUBLE,
        rank_low INTEGER, rank_high INTEGER, reasons TEXT, evidence TEXT""",
}
REGIONS = {"North Basin": ["NB-01", "NB-02"], "Coastal Plain": ["CP-01", "CP-02"], "High Desert": ["HD-01", "HD-02"]}
START = pd.Timestamp("2026-01-05")


def _insert(con: duckdb.DuckDBPyConnection, table: str, df: pd.DataFrame) -> None:
    cols = [r[0] for r in con.execute(f"SELECT column_name FROM information_schema.columns "
                                      f"WHERE table_name = '{table}' ORDER BY ordinal_position").fetchall()]
    df = df[[c for c in df.columns if c in cols]]
    con.register("_incoming", df)
    con.execute(f"INSERT INTO {table} ({', '.join(df.columns)}) SELECT * FROM _incoming")
    con.unregister("_incoming")


def build_empty_db(path: Path) -> Path:
    """A database with the schema and no rows, published as a snapshot."""
    con = duckdb.connect(str(path))
    migrate(con)
    publish_snapshot(con, path)
    con.close()
    return path


def build_fleet_db(path: Path, n_units: int = 24, days: int = 180, seed: int = 7) -> Path:
    """A small populated fleet with charts, model, queue, ledger and quarantine; returns the path."""
    rng = np.random.default_rng(seed)
    con = duckdb.connect(str(path))
    migrate(con)
    existing = {r[0] for r in con.execute("SELECT table_name FROM information_schema.tables").fetchall()}
    for table, columns in CONTRACT_TABLES.items():
        if table not in existing:
            con.execute(f"CREATE TABLE {table} ({columns})")

    sites = pd.DataFrame([{"site_id": s, "region": r, "time_zone": "UTC", "elevation_m": 300.0}
                          for r, ss in REGIONS.items() for s in ss])
    _insert(con, "sites", sites)
    site_ids = sites["site_id"].tolist()
    units = pd.DataFrame({
        "instrument_id": [f"TX{1000 + i}" for i in range(n_units)],
        "technology": ["fuel_cell" if i % 3 else "infrared" for i in range(n_units)],
        "model": ["Model Q" if i % 2 else "Model R" for i in range(n_units)],
        "site_id": [site_ids[i % len(site_ids)] for i in range(n_units)],
        "in_service_on": [START.date()] * n_units,
    })
    units["region"] = units["site_id"].map(sites.set_index("site_id")["region"])
    _insert(con, "instruments", units)
    lots = pd.DataFrame({"lot_id": ["WB-A1", "WB-A2", "WB-B1", "DG-C1", "WB-L1"],
                         "standard_kind": ["wet_bath", "wet_bath", "wet_bath", "dry_gas", "wet_bath"],
                         "target": [0.080, 0.080, 0.080, 0.080, 0.040], "units": ["g/210L"] * 5,
                         "expanded_uncertainty": [0.0016] * 5, "certified_on": [START.date()] * 5,
                         "expires_on": [(START + pd.Timedelta(days=720)).date()] * 5, "supplier": ["Lab One"] * 5})
    _insert(con, "lots", lots)

    rows, events = [], []
    check_id = 0
    for u, unit in enumerate(units["instrument_id"]):
        drift = 0.02 / 180 if u % 5 == 0 else 0.0  # every fifth unit drifts 2 % over the period
        for d in range(days):
            at = START + pd.Timedelta(days=d, hours=8 + u % 8)
            lot = "WB-A1" if d < days // 2 else ("WB-B1" if u % 4 == 0 else "WB-A2")
            for level in (0.080, 0.040) if d % 7 == 0 else (0.080,):
                lot_here = lot if level == 0.080 else "WB-L1"
                measured = level * (1 + drift * d + rng.normal(0, 0.01))
                measured = np.floor(measured * 1000) / 1000
                rows.append({"check_id": check_id, "instrument_id": unit, "measured_at": at, "lot_id": lot_here,
                             "check_type": "daily" if level == 0.080 else "verification", "target": level,
                             "measured": measured, "units": "g/210L", "simulator_temp_c": 34.0,
                             "site_id": units.loc[u, "site_id"], "outcome": "pass", "file_id": 1 + d // 30,
                             "line": 2 + check_id})
                check_id += 1
            if d % 30 == 0:
                events.append({"instrument_id": unit, "event_at": at - pd.Timedelta(hours=1),
                               "event_type": "solution_change", "notes": "fresh solution"})
        events.append({"instrument_id": unit, "event_at": START + pd.Timedelta(days=days // 3),
                       "event_type": "calibration", "notes": "annual calibration"})
    checks = pd.DataFrame(rows)
    checks.loc[checks.index % 97 == 0, "outcome"] = "fail"  # some disagreements with our verdict
    _insert(con, "checks", checks)
    _insert(con, "service_events", pd.DataFrame(events))
    n_files = int(checks["file_id"].max())
    ledger = pd.DataFrame({"file_id": range(1, n_files + 1),
                           "path": [f"exports/checks-2026-{m:02d}.csv" for m in range(1, n_files + 1)],
                           "sha256": ["0" * 64] * n_files, "table_name": "checks", "profile": "canonical"})
    per_file = checks.groupby("file_id").size()
    ledger["rows_stored"] = ledger["file_id"].map(per_file).fillna(0).astype(int)
    ledger["rows_duplicate"] = 3
    ledger["rows_quarantined"] = 2
    ledger["rows_read"] = ledger["rows_stored"] + 5
    ledger["started_at"] = START
    ledger["finished_at"] = START
    ledger["software_version"] = "0.1.0"
    _insert(con, "ingest_ledger", ledger)
    quarantine = pd.DataFrame({"file_id": np.repeat(ledger["file_id"], 2).to_numpy(),
                               "line": range(9000, 9000 + 2 * n_files), "field": "measured",
                               "value": "abc", "reason": ["unparsable_field", "out_of_range"] * n_files,
                               "message": "not a number", "raw_line": "TX1000,abc"})
    _insert(con, "quarantine", quarantine)

    refresh_check_results(con)
    _fill_charts(con, checks, units)
    _fill_model(con, checks, units, lots)
    _fill_queue(con, units)
    write_dashboard_summary(con)  # the main job's last step before it publishes
    publish_snapshot(con, path)
    con.close()
    return path


def _fill_charts(con, checks: pd.DataFrame, units: pd.DataFrame) -> None:
    frames, signals, baselines = [], [], []
    checks = checks.assign(level=checks["target"].round(3),
                           re=(checks["measured"] - checks["target"]) / checks["target"])
    for (unit, level), g in checks.groupby(["instrument_id", "level"]):
        g = g.sort_values("measured_at")
        center, sigma = g["re"].iloc[:20].mean(), max(g["re"].iloc[:20].std(), 1e-4)
        z = (g["re"] - center) / sigma
        mr = z.diff().abs()
        up, lo, cu, cl, ew, e = [], [], 0.0, 0.0, [], 0.0
        for v in z:
            cu, cl = max(0.0, cu + v - 0.5), max(0.0, cl - v - 0.5)
            e = 0.2 * v + 0.8 * e
            up.append(cu), lo.append(cl), ew.append(e)
        f = pd.DataFrame({"check_id": g["check_id"], "instrument_id": unit, "level": level, "baseline_period": 0,
                          "measured_at": g["measured_at"], "position": range(1, len(g) + 1),
                          "relative_error": g["re"], "own_sigma": True, "z": z, "moving_range": mr, "cusum_upper": up,
                          "cusum_lower": lo, "ewma": ew, "ewma_ucl": 2.86 * 0.577, "center": center, "sigma": sigma})
        frames.append(f)
        baselines.append({"baseline_id": len(baselines), "instrument_id": unit, "level": level,
                          "baseline_period": 0, "version": 1, "frozen_at": g["measured_at"].iloc[min(19, len(g) - 1)],
                          "reason": "first 20 checks", "sigma_source": "unit", "center": center, "sigma": sigma,
                          "n_checks": 20, "parameters": json.dumps({"k": 0.5, "h": 4.77, "lambda": 0.2, "L": 2.86}),
                          "software_version": "0.1.0"})
        hit = f[f["cusum_upper"] > 4.77]
        if not hit.empty:
            first = hit.iloc[0]
            signals.append({"signal_id": len(signals), "instrument_id": unit, "level": level,
                            "check_id": first["check_id"], "measured_at": first["measured_at"], "chart": "cusum",
                            "rule": "cusum_h", "direction": "up", "size": first["cusum_upper"] / 4.77,
                            "onset_at": first["measured_at"] - pd.Timedelta(days=10), "impact_checks": 10,
                            "fleet_significant": True, "created_at": first["measured_at"]})
    last = checks["measured_at"].max()
    for i, unit in enumerate(units["instrument_id"][:3]):  # recent signals for the overview
        signals.append({"signal_id": 1000 + i, "instrument_id": unit, "level": 0.08, "check_id": 0,
                        "measured_at": last - pd.Timedelta(days=i + 1), "chart": "ewma", "rule": "ewma_limit",
                        "direction": "up", "size": 1.2, "onset_at": last - pd.Timedelta(days=i + 5),
                        "impact_checks": 4, "fleet_significant": False, "created_at": last})
    points = pd.concat(frames)
    keys = points[SERIES_KEY].drop_duplicates()
    _insert(con, "chart_point_values", points.merge(keys.assign(series_id=series_ids(con, keys)), on=SERIES_KEY))
    _insert(con, "chart_runs", pd.DataFrame([{
        "run_id": 1, "started_at": checks["measured_at"].max(), "duration_s": 1.0, "mode": "full",
        "n_new_checks": sum(map(len, frames)), "n_groups": len(frames), "n_signals": 0, "n_baselines": len(baselines),
        "parameters": "{}", "software_version": "0.1.0", "ind_lcl": -3.0, "ind_ucl": 3.0, "mr_ucl": 3.686}]))
    _insert(con, "chart_baselines", pd.DataFrame(baselines))
    signals = pd.DataFrame(signals)
    _insert(con, "chart_signal_values", signals.assign(kind=signal_kinds(con, signals)))


def _fill_model(con, checks: pd.DataFrame, units: pd.DataFrame, lots: pd.DataFrame) -> None:
    fitted = checks["measured_at"].max()
    _insert(con, "model_fits", pd.DataFrame([{
        "fit_id": 1, "fitted_at": fitted, "window_start": checks["measured_at"].min(), "window_end": fitted,
        "n_checks": len(checks), "n_units": len(units), "n_lots": len(lots), "converged": True,
        "boundary": False, "warnings": "[]", "parameters": "{}", "software_version": "0.1.0", "duration_s": 1.0}]))
    effects = [0.1, -0.2, 2.6, 0.0, 0.3]
    _insert(con, "lot_effects", pd.DataFrame({
        "fit_id": 1, "lot_id": lots["lot_id"], "standard_kind": lots["standard_kind"], "effect_pct": effects,
        "ci_low_pct": [e - 0.5 for e in effects], "ci_high_pct": [e + 0.5 for e in effects],
        "n_units": 6, "n_checks": 500, "verdict": ["agrees", "agrees", "off", "agrees", "agrees"],
        "verdict_since": fitted.date()}))
    drift = [0.33 if i % 5 == 0 else 0.0 for i in range(len(units))]
    _insert(con, "unit_estimates", pd.DataFrame({
        "fit_id": 1, "instrument_id": units["instrument_id"], "baseline_period": 1,
        "bias_pct": [d * 6 for d in drift], "bias_ci_low_pct": [d * 6 - 0.4 for d in drift],
        "bias_ci_high_pct": [d * 6 + 0.4 for d in drift], "drift_pct_per_30d": drift,
        "drift_ci_low": [d - 0.1 for d in drift], "drift_ci_high": [d + 0.1 for d in drift],
        "bias_drift_cov": 0.001, "reference_at": fitted, "variance_share": 0.3, "n_checks": 200,
        "last_check_at": fitted}))
    _insert(con, "variance_components", pd.DataFrame({
        "fit_id": 1, "component": ["unit", "lot", "residual"], "variance": [0.4, 0.1, 1.0],
        "ci_low": [0.2, 0.02, 0.9], "ci_high": [0.7, 0.3, 1.1]}))
    _insert(con, "lot_acceptance", pd.DataFrame({
        "lot_id": lots["lot_id"], "state": ["accepted", "accepted", "rejected", "pending", "accepted"],
        "decided_at": fitted, "n_checks": 40, "statistic": [0.2, 0.4, 5.1, None, 0.1], "parameters": "{}"}))
    _insert(con, "model_diagnostics", pd.DataFrame({
        "fit_id": 1, "diagnostic": ["residual_normality", "converged"], "value": [0.3, 1.0],
        "passed": [True, True], "message": ["ok", "ok"]}))


def _fill_queue(con, units: pd.DataFrame) -> None:
    n = len(units)
    _insert(con, "service_queue", pd.DataFrame({
        "computed_at": pd.Timestamp("2026-07-01"), "instrument_id": units["instrument_id"],
        "rank": range(1, n + 1), "p_breach": np.linspace(0.9, 0.01, n), "rank_low": range(1, n + 1),
        "rank_high": [min(n, r + 2) for r in range(1, n + 1)],
        "reasons": [json.dumps([f"Bias drifting by {0.3:.1f} % per 30 days." if i % 5 == 0 else
                                "Calibration due within 30 days."]) for i in range(n)],
        "evidence": "{}"}))
