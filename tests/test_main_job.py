"""`breathfleet run` and `breathfleet demo --no-dashboard`: the main job end to end on a small demo fleet."""

from __future__ import annotations

import shutil

import duckdb
from click.testing import CliRunner

from pipeline.cli import main


def test_run_charts_models_ranks_and_publishes(demo_db, tmp_path):
    db = tmp_path / "fleet.duckdb"
    shutil.copy(demo_db, db)
    out = CliRunner().invoke(main, ["run", "--db", str(db)])
    assert out.exit_code == 0, out.output
    assert "charts: full run 1" in out.output and "model : converged" in out.output and "units ranked" in out.output
    con = duckdb.connect(str(db.with_name(db.name + ".snapshot")), read_only=True)
    counts = [con.execute(f"SELECT count(*) FROM {t}").fetchone()[0]  # noqa: S608
              for t in ("chart_points", "unit_estimates", "service_queue")]
    con.close()
    assert all(n > 0 for n in counts)
    again = CliRunner().invoke(main, ["run", "--db", str(db)])
    assert again.exit_code == 0 and "incremental run 2, 0 new checks" in again.output


def test_run_names_a_missing_database(tmp_path):
    out = CliRunner().invoke(main, ["run", "--db", str(tmp_path / "none.duckdb")])
    assert out.exit_code != 0 and "none.duckdb" in out.output
