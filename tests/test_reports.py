"""Tests of pipeline.reports (the instrument record) and the record command."""

from __future__ import annotations

import re
from pathlib import Path

import duckdb
import pytest
from click.testing import CliRunner

from golden_files import check_golden
from pipeline.cli import main
from pipeline.digest import CAUTIONS
from pipeline.errors import InputError
from pipeline.reports import write_instrument_record
from pipeline.settings import Settings
from queue_fixture import analysed_demo, fleet_copy


@pytest.fixture(scope="module")
def fleet(tmp_path_factory) -> Path:
    return fleet_copy(tmp_path_factory.mktemp("record"))


@pytest.fixture(scope="module")
def record(fleet, tmp_path_factory):
    con = duckdb.connect(str(fleet), read_only=True)
    rec = write_instrument_record(con, Settings(), "TX1005", "2026-05-25", "2026-06-14",
                                  tmp_path_factory.mktemp("out") / "TX1005.html")
    n_expected = con.execute("SELECT count(*) FROM checks WHERE instrument_id = 'TX1005' AND measured_at >= "
                             "'2026-05-25' AND measured_at < '2026-06-15'").fetchone()[0]
    con.close()
    return rec, n_expected


def test_record_holds_every_check_in_range(record):
    rec, n_expected = record
    html = rec.path.read_text()
    assert rec.n_checks == n_expected
    checks_table = html.split("<h2>Checks</h2>")[1]
    assert checks_table.count("<tr><td>2026-") == n_expected
    for section in ("Calibrations and service events", "Lots used", "Uncertainty budget",
                    "Signals and impact windows", "Chart status by day"):
        assert f"<h2>{section}</h2>" in html
    assert CAUTIONS in html and Settings().digest() in html


def test_record_shows_signal_lots_and_budget(record):
    rec, _ = record
    html = rec.path.read_text()
    assert "cusum cusum_h" in html            # the fixture's CUSUM signal of TX1005 on 2026-06-08
    assert "WB-A2" in html and "agrees" in html
    assert rec.uncertainty_available and "expanded U (k = 2)" in html


def test_record_is_self_contained_and_reproducible(fleet, record, tmp_path):
    rec, _ = record
    html = rec.path.read_text()
    assert not re.search(r"<(script|link)\b|src=\"http", html)
    con = duckdb.connect(str(fleet), read_only=True)
    again = write_instrument_record(con, Settings(), "TX1005", "2026-05-25", "2026-06-14", tmp_path / "again.html")
    con.close()
    assert again.path.read_bytes() == rec.path.read_bytes()
    check_golden("record-TX1005-2026-05-25-2026-06-14.html", html)


def test_budget_unavailable_is_said_not_faked(fleet, tmp_path):
    con = duckdb.connect(str(fleet), read_only=True)
    rec = write_instrument_record(con, Settings(), "TX1005", "2025-01-01", "2025-01-31", tmp_path / "empty.html")
    con.close()
    html = rec.path.read_text()
    assert not rec.uncertainty_available and "No checks in the range: no budget." in html
    assert "No checks in the period." in html


def test_errors_name_the_problem(fleet, tmp_path):
    con = duckdb.connect(str(fleet), read_only=True)
    with pytest.raises(InputError, match="no instrument 'NOPE' in the database"):
        write_instrument_record(con, Settings(), "NOPE", "2026-01-01", "2026-01-31", tmp_path / "x.html")
    with pytest.raises(InputError, match="is after --to"):
        write_instrument_record(con, Settings(), "TX1005", "2026-02-01", "2026-01-31", tmp_path / "x.html")
    con.close()


def test_record_command(fleet, tmp_path):
    out = tmp_path / "r.html"
    result = CliRunner().invoke(main, ["record", "--db", str(fleet), "--instrument", "TX1001", "--from", "2026-06-01",
                                       "--to", "2026-06-07", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert out.exists() and "checks" in result.output


def test_record_golden_on_the_demo_fleet(demo_db, tmp_path):
    path, truth = analysed_demo(demo_db, tmp_path)
    unit = next(f["instrument_id"] for f in truth["faults"] if f["kind"] == "step")
    con = duckdb.connect(str(path), read_only=True)
    rec = write_instrument_record(con, Settings(), unit, "2026-08-01", "2026-09-30", tmp_path / "demo.html")
    con.close()
    assert rec.n_checks > 0 and rec.uncertainty_available
    check_golden(f"demo-record-{unit}-2026-08-01-2026-09-30.html", rec.path.read_text())
