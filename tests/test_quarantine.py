"""`breathfleet quarantine`: listing, reason filter, CSV export with formula escaping."""

from __future__ import annotations

import csv

from click.testing import CliRunner

from pipeline.cli import main
from pipeline.cli.quarantine import _safe


def test_formula_cells_escaped():
    # common practice (OWASP CSV injection): cells starting with = + - @ are prefixed with a quote
    assert [_safe(x) for x in ("=1+1", "+1", "-1", "@SUM", "ok", 3)] == ["'=1+1", "'+1", "'-1", "'@SUM", "ok", 3]


def test_list_and_export(demo_db, tmp_path):
    runner = CliRunner()
    res = runner.invoke(main, ["quarantine", "--db", str(demo_db), "--reason", "unknown_lot"])
    assert res.exit_code == 0, res.output
    assert "unknown_lot" in res.output and "broken-rows.csv" in res.output
    out = tmp_path / "q.csv"
    res = runner.invoke(main, ["quarantine", "--db", str(demo_db), "--csv", str(out)])
    assert res.exit_code == 0, res.output
    with open(out, encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    reasons = {r["reason"] for r in rows}
    assert {"malformed_line", "nonexistent_local_time", "ambiguous_local_time", "unknown_outcome"} <= reasons
    assert all(not (r["value"] or "x")[0] in "=+-@" for r in rows)
