"""The table check_results (filled from the view check_results_live) on a small hand-made dataset."""

import dataclasses
import math
from datetime import datetime, timedelta

import pytest

from pipeline.check_results import refresh_check_results
from pipeline.errors import InputError
from pipeline.settings import Settings, StandardsSettings, ToleranceRule
from pipeline.standards import sync_standards_settings
from pipeline.standards.expected_values import standard_atmosphere_pressure

CONTRACT_COLUMNS = [
    "check_id", "instrument_id", "measured_at", "lot_id", "check_type", "level", "target", "measured", "units",
    "simulator_temp_c", "pressure_kpa", "site_id", "operator_id", "outcome", "technology", "model", "region",
    "standard_kind", "baseline_period", "baseline_started_at", "solution_changed_at",
    "checks_since_solution_change", "expected_raw", "expected", "correction_factor", "correction_method",
    "error", "relative_error", "verdict",
    "lot_expired", "lot_wrong_kind", "lot_before_certified", "temp_out_of_window", "verdict_disagrees",
]
T0 = datetime(2026, 3, 2, 8, 0)


def insert_reference(con):
    """Two sites (sea level, 1600 m), four units, five lots."""
    con.execute("INSERT INTO sites VALUES ('LOW', 'coast', 'UTC', NULL, NULL, 0.0), "
                "('HIGH', 'mountain', 'America/Denver', NULL, NULL, 1600.0)")
    con.execute("INSERT INTO instruments VALUES "
                "('FC-1', 'fuel_cell', 'Model-A', 'LOW', 'coast', NULL, NULL, NULL), "
                "('IR-1', 'infrared', 'Model-B', 'HIGH', 'mountain', NULL, NULL, NULL), "
                "('IR-2', 'infrared', 'Model-C', 'HIGH', 'mountain', NULL, NULL, NULL), "
                "('DU-1', 'dual', 'Model-D', 'HIGH', 'mountain', NULL, NULL, NULL)")
    con.execute("INSERT INTO lots VALUES "
                "('WB-80', 'wet_bath', 0.080, 'g/210L', 0.0010, DATE '2026-01-01', DATE '2026-12-31', 'Lab'), "
                "('WB-OLD', 'wet_bath', 0.080, 'g/210L', 0.0010, DATE '2024-01-01', DATE '2026-02-28', 'Lab'), "
                "('WB-NEW', 'wet_bath', 0.080, 'g/210L', 0.0010, DATE '2026-06-01', DATE '2027-06-01', 'Lab'), "
                "('DG-100', 'dry_gas', 0.100, 'g/210L', 0.0020, DATE '2026-01-01', DATE '2027-01-01', 'Lab'), "
                "('ODD', 'liquid_nitrogen', 0.100, 'g/210L', NULL, NULL, NULL, 'Lab')")


def insert_check(con, check_id, instrument_id, lot_id, measured, *, target=None, temp=None, pressure=None,
                 check_type="daily", outcome="pass", site_id=None, at=None):
    con.execute(
        "INSERT INTO checks VALUES ($id, $inst, $at, $lot, $type, $target, $measured, 'g/210L', $temp, $pressure, "
        "$site, NULL, $outcome, 1, $id)",
        {"id": check_id, "inst": instrument_id, "at": at or T0 + timedelta(hours=check_id), "lot": lot_id,
         "type": check_type, "target": 0.080 if target is None else target, "measured": measured,
         "temp": temp, "pressure": pressure, "site": site_id, "outcome": outcome})
    refresh_check_results(con)


def row(con, check_id):
    refresh_check_results(con)
    df = con.execute("SELECT * FROM check_results WHERE check_id = $id", {"id": check_id}).df()
    assert len(df) == 1
    return df.iloc[0]


@pytest.fixture
def db(fresh_db):
    insert_reference(fresh_db)
    sync_standards_settings(fresh_db, Settings(standards=StandardsSettings(
        pressure_compensating_models=("Model-C",), pressure_compensating_technologies=("dual",))))
    return fresh_db


def test_contract_columns_in_order(fresh_db):
    columns = [r[0] for r in fresh_db.execute("DESCRIBE check_results").fetchall()]
    assert columns[:len(CONTRACT_COLUMNS)] == CONTRACT_COLUMNS


def test_migration_defaults_equal_settings_defaults(fresh_db):
    std = StandardsSettings()
    params = fresh_db.execute("SELECT simulator_nominal_c, simulator_window_c, correct_wet_bath_temperature, "
                              "correct_dry_gas_pressure, wet_bath_temperature_coefficient, reference_pressure_kpa "
                              "FROM standards_parameters").fetchall()
    assert params == [(std.simulator_nominal_c, std.simulator_window_c, std.correct_wet_bath_temperature,
                       std.correct_dry_gas_pressure, std.wet_bath_temperature_coefficient,
                       std.reference_pressure_kpa)]
    rule = std.tolerance_rules[0]
    assert fresh_db.execute("SELECT check_type, level_milli, absolute, relative FROM tolerance_rules").fetchall() \
        == [("", 0, rule.absolute, rule.relative)]


def test_wet_bath_temperature_correction(db):
    insert_check(db, 1, "FC-1", "WB-80", 0.081, temp=34.1)
    r = row(db, 1)
    # Dubowski (1979): expected = lot value x exp(0.06583 (T - 34.0)).
    assert r.correction_factor == pytest.approx(math.exp(0.06583 * 0.1), rel=1e-12)
    assert r.expected_raw == 0.080
    assert r.expected == pytest.approx(0.080 * math.exp(0.006583), rel=1e-12)
    assert r.correction_method == "wet_bath_temperature"
    assert r.relative_error == pytest.approx((0.081 - r.expected) / r.expected, rel=1e-12)
    assert r.standard_kind == "wet_bath" and r.region == "coast" and r.technology == "fuel_cell"
    assert not (r.lot_expired or r.lot_wrong_kind or r.lot_before_certified or r.temp_out_of_window)
    assert r.verdict == "pass" and not r.verdict_disagrees


def test_temperature_window_flag(db):
    insert_check(db, 1, "FC-1", "WB-80", 0.080, temp=34.2)
    insert_check(db, 2, "FC-1", "WB-80", 0.080, temp=34.25)
    insert_check(db, 3, "FC-1", "WB-80", 0.080, temp=33.7)
    # Settings default window 34.0 +/- 0.2 C (forensic practice); the edge is inside.
    assert not row(db, 1).temp_out_of_window
    assert row(db, 2).temp_out_of_window
    assert row(db, 3).temp_out_of_window


def test_dry_gas_logged_pressure_and_elevation(db):
    insert_check(db, 1, "IR-1", "DG-100", 0.083, target=0.100, pressure=83.0)
    insert_check(db, 2, "IR-1", "DG-100", 0.083, target=0.100)
    r1, r2 = row(db, 1), row(db, 2)
    # Ideal gas: expected = label x P / 101.325.
    assert r1.expected == pytest.approx(0.100 * 83.0 / 101.325, rel=1e-12)
    assert r1.correction_method == "dry_gas_pressure_logged"
    # ICAO/ISO 2533 standard atmosphere at the site's 1600 m when no pressure is logged: x 0.8243.
    assert r2.correction_factor == pytest.approx(standard_atmosphere_pressure(1600.0) / 101.325, rel=1e-12)
    assert r2.correction_factor == pytest.approx(0.8243, abs=1e-4)
    assert r2.correction_method == "dry_gas_pressure_elevation"
    assert r2.verdict == "pass"


def test_compensating_model_and_technology_are_not_scaled(db):
    insert_check(db, 1, "IR-2", "DG-100", 0.100, target=0.100, pressure=83.0)
    insert_check(db, 2, "DU-1", "DG-100", 0.100, target=0.100, pressure=83.0)
    for check_id in (1, 2):
        r = row(db, check_id)
        assert (r.correction_method, r.correction_factor, r.expected) == ("none_compensating", 1.0, 0.100)


def test_switching_corrections_off_in_settings(db):
    insert_check(db, 1, "FC-1", "WB-80", 0.080, temp=34.1)
    insert_check(db, 2, "IR-1", "DG-100", 0.083, target=0.100, pressure=83.0)
    sync_standards_settings(db, StandardsSettings(correct_wet_bath_temperature=False, correct_dry_gas_pressure=False))
    assert (row(db, 1).expected, row(db, 1).correction_method) == (0.080, "none_not_corrected")
    assert (row(db, 2).expected, row(db, 2).verdict) == (0.100, "fail")


def test_lot_flags(db):
    insert_check(db, 1, "FC-1", "WB-OLD", 0.080, temp=34.0, at=datetime(2026, 3, 1, 0, 30))
    insert_check(db, 2, "FC-1", "WB-OLD", 0.080, temp=34.0, at=datetime(2026, 2, 28, 23, 59))
    insert_check(db, 3, "FC-1", "WB-NEW", 0.080, temp=34.0, at=datetime(2026, 5, 31, 12, 0))
    insert_check(db, 4, "IR-1", "WB-80", 0.080, pressure=83.0)          # logs pressure but lot is wet bath
    insert_check(db, 5, "FC-1", "DG-100", 0.100, target=0.100, temp=34.0)  # logs temperature but lot is dry gas
    insert_check(db, 6, "FC-1", "ODD", 0.100, target=0.100, temp=34.0)
    insert_check(db, 7, "FC-1", "NOT-REGISTERED", 0.080, temp=34.0)
    assert row(db, 1).lot_expired and not row(db, 2).lot_expired
    assert row(db, 3).lot_before_certified
    assert [bool(row(db, i).lot_wrong_kind) for i in range(1, 8)] == [False, False, False, True, True, True, True]
    r7 = row(db, 7)
    assert (r7.correction_method, r7.expected) == ("none_unknown_lot", 0.080)
    assert row(db, 6).correction_method == "none_unknown_kind"


def test_verdict_disagrees_with_the_instrument(db):
    insert_check(db, 1, "FC-1", "WB-80", 0.086, temp=34.0, outcome="pass")
    insert_check(db, 2, "FC-1", "WB-80", 0.080, temp=34.0, outcome="fail")
    insert_check(db, 3, "FC-1", "WB-80", 0.086, temp=34.0, outcome="fail")
    insert_check(db, 4, "FC-1", "WB-80", 0.086, temp=34.0, outcome="aborted")
    assert [row(db, i).verdict for i in (1, 2, 3)] == ["fail", "pass", "fail"]
    assert [bool(row(db, i).verdict_disagrees) for i in (1, 2, 3, 4)] == [True, True, False, False]


@pytest.mark.parametrize("level, half_width", [(0.020, 0.005), (0.080, 0.005), (0.160, 0.008)])
def test_default_tolerance_edges_in_the_view(db, level, half_width):
    insert_check(db, 1, "FC-1", "WB-80", level + half_width, target=level, temp=34.0, outcome=None)
    insert_check(db, 2, "FC-1", "WB-80", level + half_width + 0.001, target=level, temp=34.0, outcome=None)
    db.execute("UPDATE lots SET target = $t WHERE lot_id = 'WB-80'", {"t": level})
    # Common practice, from memory (US model specifications): +/-0.005 g/210L or +/-5 %, whichever is greater.
    assert row(db, 1).tolerance == pytest.approx(half_width, rel=1e-12)
    assert (row(db, 1).verdict, row(db, 2).verdict) == ("pass", "fail")


def test_rules_per_check_type_and_level(db):
    rules = (ToleranceRule(), ToleranceRule(absolute=0.002, relative=0.0, check_type="control"),
             ToleranceRule(absolute=0.010, relative=0.0, check_type="control", level=0.08))
    sync_standards_settings(db, StandardsSettings(tolerance_rules=rules))
    insert_check(db, 1, "FC-1", "WB-80", 0.089, temp=34.0, check_type="control")
    insert_check(db, 2, "FC-1", "DG-100", 0.103, target=0.100, check_type="control", site_id="LOW")
    insert_check(db, 3, "FC-1", "WB-80", 0.089, temp=34.0, check_type="daily")
    assert [row(db, i).tolerance_rule_id for i in (1, 2, 3)] == [2, 1, 0]
    assert [row(db, i).verdict for i in (1, 2, 3)] == ["pass", "fail", "fail"]


def test_sync_refuses_a_rule_set_without_default(db):
    with pytest.raises(InputError, match="needs one default rule"):
        sync_standards_settings(db, dataclasses.replace(StandardsSettings(),
                                                        tolerance_rules=(ToleranceRule(level=0.08),)))
    # The previous rules stay in place.
    assert db.execute("SELECT count(*) FROM tolerance_rules").fetchone()[0] == 1


def test_baseline_and_solution_context(db):
    db.execute("INSERT INTO service_events VALUES ('FC-1', $a, 'calibration', NULL), ('FC-1', $b, 'solution_change', NULL)",
               {"a": T0 + timedelta(hours=2, minutes=30), "b": T0 + timedelta(hours=3, minutes=30)})
    for i in range(1, 6):
        insert_check(db, i, "FC-1", "WB-80", 0.080, temp=34.0)
    refresh_check_results(db)
    df = db.execute("SELECT check_id, baseline_period, checks_since_solution_change FROM check_results "
                    "ORDER BY check_id").fetchall()
    assert df == [(1, 0, 0), (2, 0, 1), (3, 1, 2), (4, 1, 0), (5, 1, 1)]


def test_lot_flag_summary(db):
    from pipeline.standards.lots import summarise_lot_flags

    insert_check(db, 1, "FC-1", "WB-OLD", 0.080, temp=34.0, at=datetime(2026, 3, 1, 0, 30))
    insert_check(db, 2, "FC-1", "WB-OLD", 0.080, temp=34.0, at=datetime(2026, 2, 1))
    insert_check(db, 3, "FC-1", "TYPO-1", 0.080, temp=34.0)
    df = summarise_lot_flags(db).set_index("lot_id")
    assert df.loc["WB-OLD", "n_checks"] == 2 and df.loc["WB-OLD", "n_expired"] == 1
    assert not df.loc["TYPO-1", "registered"] and df.loc["TYPO-1", "n_wrong_kind"] == 1


def test_sync_inside_a_callers_transaction(db):
    db.execute("BEGIN TRANSACTION")
    sync_standards_settings(db, StandardsSettings(simulator_window_c=0.3), own_transaction=False)
    assert db.execute("SELECT simulator_window_c FROM standards_parameters").fetchone()[0] == 0.3
    db.execute("ROLLBACK")
    # The caller's rollback undoes the sync too: the fixture's window of 0.2 C stays.
    assert db.execute("SELECT simulator_window_c FROM standards_parameters").fetchone()[0] == 0.2
