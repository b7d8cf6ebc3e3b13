"""The SQL view and the Python formulas agree on random checks; settings reach the view from TOML."""

from datetime import datetime, timedelta

import numpy as np
import pytest
from click.testing import CliRunner

from pipeline.check_results import refresh_check_results
from pipeline.cli import main
from pipeline.settings import Settings, load_settings
from pipeline.standards import sync_standards_settings
from pipeline.standards.expected_values import (expected_dry_gas, expected_wet_bath,
                                                standard_atmosphere_pressure)
from pipeline.standards.tolerance import select_rule, tolerance_half_width, verdict

PROGRAM = """
[standards]
simulator_window_c = 0.3
pressure_compensating_models = ["Model-C"]
tolerance_rules = [
  {absolute = 0.005, relative = 0.05},
  {absolute = 0.004, relative = 0.0, check_type = "control"},
  {absolute = 0.010, relative = 0.08, level = 0.04},
  {absolute = 0.003, relative = 0.03, check_type = "verification", level = 0.15},
]
"""


@pytest.fixture
def settings(tmp_path) -> Settings:
    path = tmp_path / "program.toml"
    path.write_text(PROGRAM)
    return load_settings(path)


def test_view_agrees_with_python_on_random_checks(fresh_db, settings):
    rng = np.random.default_rng(20261202)
    con = fresh_db
    con.execute("INSERT INTO sites VALUES ('A', 'r', 'UTC', NULL, NULL, 0.0), ('B', 'r', 'UTC', NULL, NULL, 2100.0)")
    con.execute("INSERT INTO instruments VALUES ('U1', 'infrared', 'Model-B', 'B', 'r', NULL, NULL, NULL), "
                "('U2', 'infrared', 'Model-C', 'B', 'r', NULL, NULL, NULL), "
                "('U3', 'fuel_cell', 'Model-A', 'A', 'r', NULL, NULL, NULL)")
    levels = (0.040, 0.080, 0.150)
    for level in levels:
        con.execute("INSERT INTO lots VALUES ($w, 'wet_bath', $t, 'g/210L', 0.001, NULL, NULL, 'L'), "
                    "($d, 'dry_gas', $t, 'g/210L', 0.002, NULL, NULL, 'L')",
                    {"w": f"W{level}", "d": f"D{level}", "t": level})
    sync_standards_settings(con, settings)
    std = settings.standards
    want = {}
    for check_id in range(300):
        level = levels[rng.integers(3)]
        check_type = ("control", "daily", "verification")[rng.integers(3)]
        unit = ("U1", "U2", "U3")[rng.integers(3)]
        wet = unit == "U3"
        temp = float(np.round(34.0 + rng.normal(0, 0.15), 2)) if wet else None
        pressure = None if wet or rng.random() < 0.5 else float(np.round(rng.uniform(75, 102), 1))
        measured = float(np.floor(level * (1 + rng.normal(0, 0.05)) * 1000) / 1000)
        con.execute("INSERT INTO checks VALUES ($id, $u, $at, $lot, $type, $t, $m, 'g/210L', $temp, $p, NULL, NULL, "
                    "NULL, 1, $id)",
                    {"id": check_id, "u": unit, "at": datetime(2026, 1, 1) + timedelta(hours=check_id),
                     "lot": f"{'W' if wet else 'D'}{level}", "type": check_type, "t": level, "m": measured,
                     "temp": temp, "p": pressure})
        if wet:
            expected = expected_wet_bath(level, temp)
        elif unit == "U2":
            expected = level
        else:
            expected = expected_dry_gas(level, pressure if pressure is not None else standard_atmosphere_pressure(2100.0))
        rule = select_rule(std.tolerance_rules, check_type, level)
        want[check_id] = (expected, tolerance_half_width(rule, expected), verdict(rule, measured, expected))
    refresh_check_results(con)
    rows = con.execute("SELECT check_id, expected, tolerance, verdict FROM check_results ORDER BY check_id").fetchall()
    assert len(rows) == 300
    assert {r[3] for r in rows} == {"pass", "fail"}
    assert len({r[2] for r in rows}) > 3
    for check_id, expected, tolerance, got_verdict in rows:
        exp_expected, exp_tolerance, exp_verdict = want[check_id]
        # Dubowski (1979), ICAO standard atmosphere and the settings' rules, as in pipeline.standards.
        assert expected == pytest.approx(exp_expected, rel=1e-12)
        assert tolerance == pytest.approx(exp_tolerance, rel=1e-12)
        assert got_verdict == exp_verdict


def test_window_from_settings_reaches_the_view(fresh_db, settings):
    fresh_db.execute("INSERT INTO lots VALUES ('W', 'wet_bath', 0.08, 'g/210L', 0.001, NULL, NULL, 'L')")
    fresh_db.execute("INSERT INTO checks VALUES (1, 'X', TIMESTAMP '2026-01-01', 'W', 'daily', 0.08, 0.08, 'g/210L', "
                     "34.25, NULL, NULL, NULL, 'pass', 1, 1)")
    flag = "SELECT temp_out_of_window FROM check_results"
    refresh_check_results(fresh_db)
    assert fresh_db.execute(flag).fetchone()[0] is True
    sync_standards_settings(fresh_db, settings)
    assert fresh_db.execute(flag).fetchone()[0] is False
    assert fresh_db.execute("SELECT settings_digest FROM standards_parameters").fetchone()[0] == settings.digest()


def test_command_is_documented():
    readme = (__import__("pathlib").Path(__file__).parents[1] / "README.md").read_text()
    assert "`breathfleet uncertainty --db FILE --instrument ID [--json]`" in readme
    assert "## About the exceedance probability" in readme
    out = CliRunner().invoke(main, ["uncertainty", "--help"])
    assert out.exit_code == 0 and "Example: breathfleet uncertainty --db" in out.output
