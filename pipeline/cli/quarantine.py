"""`breathfleet quarantine`: list or export quarantined rows."""

from __future__ import annotations

import csv

import click

from pipeline.db import connect_reader, query_df
from pipeline.errors import QuarantineReason


def _safe(cell):
    """Escape a cell a spreadsheet would run as a formula."""
    if isinstance(cell, str) and cell[:1] in ("=", "+", "-", "@"):
        return "'" + cell
    return cell


@click.command("quarantine", epilog="Example: breathfleet quarantine --db fleet.duckdb --reason unknown_lot --csv bad.csv")
@click.option("--db", "db_path", required=True, type=click.Path(dir_okay=False, exists=True))
@click.option("--reason", type=click.Choice([r.value for r in QuarantineReason]), help="Only this reason.")
@click.option("--csv", "out", type=click.Path(dir_okay=False), help="Write all matching rows to this CSV file.")
@click.option("--limit", default=50, show_default=True, help="Rows to list on screen.")
def command(db_path, reason, out, limit):
    """List quarantined rows (file, line, field, value, reason, message) or export them as CSV."""
    con = connect_reader(db_path)
    try:
        df = query_df(con, "queries/quarantine_rows", reason=reason)
    finally:
        con.close()
    if out:
        with open(out, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(df.columns)
            for row in df.itertuples(index=False):
                w.writerow([_safe(c) for c in row])
        click.echo(f"Wrote {len(df):,} quarantined rows to {out}")
        return
    click.echo(f"{len(df):,} quarantined rows" + (f" ({reason})" if reason else ""))
    for r in df.head(limit).itertuples(index=False):
        field = r.field if isinstance(r.field, str) else ""
        value = r.value if isinstance(r.value, str) else ""
        click.echo(f"{r.path}:{r.line} {r.reason} {field}={value:.40} - {r.message}")
