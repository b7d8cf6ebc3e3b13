"""Uncertainty budget per instrument and level, the exceedance helper and the uncertainty command."""

import json
import math
import statistics
from datetime import datetime, timedelta

import duckdb
import pytest
from click.testing import CliRunner

from pipeline.check_results import refresh_check_results
from pipeline.cli import main
from pipeline.db import migrate
from pipeline.errors import InputError
from pipeline.settings import Settings
from pipeline.standards import sync_standards_settings
from pipeline.standards.exceedance import exceedance_for_result, probability_at_or_above
from pipeline.standards.uncertainty import compute_uncertainty_budget

T0 = datetime(2026, 4, 1, 8, 0)
MEASURED_80 = [0.079, 0.080, 0.081, 0.078, 0.080, 0.079, 0.081, 0.080, 0.079, 0.080, 0.078, 0.079]
MEASURED_DG = [0.097, 0.099, 0.098, 0.098, 0.097, 0.099]


def fill(con):
    con.execute("INSERT INTO sites VALUES ('S', 'r', 'UTC', NULL, NULL, 0.0)")
    con.execute("INSERT INTO instruments VALUES ('FC-9', 'fuel_cell', 'M', 'S', 'r', NULL, NULL, NULL), "
                "('IR-9', 'infrared', 'M', 'S', 'r', NULL, NULL, NULL)")
    con.execute("INSERT INTO lots VALUES ('WB', 'wet_bath', 0.080, 'g/210L', 0.0016, DATE '2025-01-01', DATE '2027-01-01', 'L'), "
                "('DG', 'dry_gas', 0.100, 'g/210L', 0.0020, DATE '2025-01-01', DATE '2027-01-01', 'L')")
    con.execute("INSERT INTO service_events VALUES ('FC-9', $at, 'calibration', NULL)", {"at": T0})
    rows = []
    # Before the calibration: a badly biased period that must not enter the budget.
    rows += [("FC-9", T0 - timedelta(days=d + 1), "WB", 0.080, 0.090, 34.0, None, "fail") for d in range(5)]
    rows += [("FC-9", T0 + timedelta(days=i + 1), "WB", 0.080, m, 34.0, None, "pass") for i, m in enumerate(MEASURED_80)]
    # Out of the temperature window: excluded.
    rows += [("FC-9", T0 + timedelta(days=30), "WB", 0.080, 0.070, 34.5, None, "fail")]
    rows += [("IR-9", T0 + timedelta(days=i + 1), "DG", 0.100, m, None, 99.0, "pass") for i, m in enumerate(MEASURED_DG)]
    for check_id, (inst, at, lot, target, measured, temp, pressure, outcome) in enumerate(rows, start=1):
        con.execute("INSERT INTO checks VALUES ($id, $inst, $at, $lot, 'daily', $target, $m, 'g/210L', $temp, $p, "
                    "NULL, NULL, $outcome, 1, $id)",
                    {"id": check_id, "inst": inst, "at": at, "lot": lot, "target": target, "m": measured,
                     "temp": temp, "p": pressure, "outcome": outcome})
    refresh_check_results(con)


@pytest.fixture
def db(fresh_db):
    fill(fresh_db)
    sync_standards_settings(fresh_db, Settings())
    return fresh_db


def component(level_budget, name):
    return next(c for c in level_budget.components if c.name == name)


def test_wet_bath_budget_components(db):
    budget = compute_uncertainty_budget(db, Settings(), "FC-9")
    assert budget.baseline_period == 1 and len(budget.levels) == 1
    lv = budget.levels[0]
    errors = [m - 0.080 for m in MEASURED_80]
    s = statistics.stdev(errors)
    assert lv.n_checks == len(MEASURED_80)
    assert lv.bias == pytest.approx(statistics.mean(errors), abs=1e-12)
    # Repeatability for a single result is s; the bias estimate (a mean of n) has s / sqrt(n).
    assert component(lv, "repeatability").standard_uncertainty == pytest.approx(s, rel=1e-9)
    assert component(lv, "bias_estimate").standard_uncertainty == pytest.approx(s / math.sqrt(len(errors)), rel=1e-9)
    # JCGM 100:2008 4.3.3: certificate U = 0.0016 at k = 2 gives u = 0.0008.
    assert component(lv, "lot_certificate").standard_uncertainty == pytest.approx(0.0008, rel=1e-9)
    # JCGM 100:2008 4.3.7: truncation to 0.001 leaves a remainder uniform over a step, u = 0.0005 / sqrt(3).
    assert component(lv, "resolution").standard_uncertainty == pytest.approx(0.0005 / math.sqrt(3), rel=1e-12)
    # Dubowski (1979): dE/dT = 0.06583 E per C, times the thermometer's u = 0.05 C (settings default).
    temp = component(lv, "simulator_temperature")
    assert temp.sensitivity == pytest.approx(0.06583 * 0.080, rel=1e-9)
    assert temp.contribution == pytest.approx(0.06583 * 0.080 * 0.05, rel=1e-9)
    # JCGM 100:2008 5.1.2 and 6.2.1: quadrature of the contributions, then k = 2.
    uc = math.sqrt(sum(c.contribution ** 2 for c in lv.components))
    assert lv.combined_standard_uncertainty == pytest.approx(uc, rel=1e-12)
    assert lv.expanded_uncertainty == pytest.approx(2 * uc, rel=1e-12)
    assert lv.truncation_bias == -0.0005
    assert lv.bias_excluding_truncation == pytest.approx(lv.bias + 0.0005, abs=1e-15)
    assert lv.bias_standard_uncertainty == pytest.approx(
        math.sqrt(s ** 2 / len(errors) + 0.0008 ** 2 + temp.contribution ** 2), rel=1e-9)
    assert budget.software_version and budget.parameters["coverage_factor"] == 2.0


def test_dry_gas_budget_uses_pressure(db):
    lv = compute_uncertainty_budget(db, Settings(), "IR-9").levels[0]
    p = component(lv, "barometric_pressure")
    # Ideal gas: dE/dP = E / P with E = 0.100 x 99 / 101.325 and P = 99 kPa.
    assert p.sensitivity == pytest.approx(0.100 / 101.325, rel=1e-9)
    assert p.standard_uncertainty == Settings().standards.barometer_u_kpa
    assert "only 6 checks" in " ".join(lv.warnings)


def test_as_of_before_the_calibration_uses_the_old_period(db):
    budget = compute_uncertainty_budget(db, Settings(), "FC-9", as_of=T0 - timedelta(hours=1))
    assert budget.baseline_period == 0
    assert budget.levels[0].bias == pytest.approx(0.010, abs=1e-12)


def test_unknown_instrument_is_named(db):
    with pytest.raises(InputError, match="no instrument 'NOPE' in the database; check the serial number"):
        compute_uncertainty_budget(db, Settings(), "NOPE")


def test_probability_at_or_above():
    # Normal model: a bias-corrected result exactly at the limit is at or above it with probability 1/2.
    assert probability_at_or_above(0.082, 0.080, 0.002, 0.003) == pytest.approx(0.5, abs=1e-12)
    # Normal distribution: P(Z >= -1.959964) = 0.975.
    assert probability_at_or_above(0.080 + 1.959964 * 0.002, 0.080, 0.0, 0.002) == pytest.approx(0.975, abs=1e-6)
    with pytest.raises(InputError, match="standard uncertainty must be positive"):
        probability_at_or_above(0.08, 0.08, 0.0, 0.0)


def test_exceedance_for_result_scales_the_nearest_level(db):
    budget = compute_uncertainty_budget(db, Settings(), "FC-9")
    lv = budget.levels[0]
    result = exceedance_for_result(budget, 0.084, 0.080)
    scale = 0.084 / lv.mean_expected
    assert result.level_used == 0.080
    assert result.corrected_result == pytest.approx(0.084 - lv.bias * scale, rel=1e-12)
    assert result.probability == pytest.approx(
        probability_at_or_above(0.084, 0.080, lv.bias * scale, lv.combined_standard_uncertainty * scale), rel=1e-12)
    assert 0.5 < result.probability < 1.0 and result.assumptions


def test_command_prints_table_and_json(tmp_path):
    path = tmp_path / "fleet.duckdb"
    con = duckdb.connect(str(path))
    migrate(con)
    fill(con)
    con.close()
    runner = CliRunner()
    out = runner.invoke(main, ["uncertainty", "--db", str(path), "--instrument", "FC-9"])
    assert out.exit_code == 0, out.output
    assert "level 0.080 g/210L" in out.output and "expanded U (k = 2)" in out.output
    assert "lot_certificate" in out.output and "simulator_temperature" in out.output
    out = runner.invoke(main, ["uncertainty", "--db", str(path), "--instrument", "FC-9", "--json"])
    data = json.loads(out.output)
    assert data["instrument_id"] == "FC-9" and data["levels"][0]["n_checks"] == len(MEASURED_80)
    out = runner.invoke(main, ["uncertainty", "--db", str(path), "--instrument", "XX-1"])
    assert out.exit_code == 1 and "no instrument 'XX-1'" in out.output
