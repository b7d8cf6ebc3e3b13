"""`breathfleet record`: the self-contained HTML record of one instrument over a date range."""

from __future__ import annotations

import click

from pipeline.db import connect_reader
from pipeline.reports import write_instrument_record


@click.command("record", epilog="Example: breathfleet record --db fleet.duckdb --instrument SN-10234 "
                                "--from 2026-01-01 --to 2026-06-30 --out SN-10234.html")
@click.option("--db", "db_path", required=True, type=click.Path(exists=True, dir_okay=False), help="Database file.")
@click.option("--instrument", "instrument_id", required=True, help="Serial number of the unit.")
@click.option("--from", "start", required=True, help="First UTC date, e.g. 2026-01-01.")
@click.option("--to", "end", required=True, help="Last UTC date (inclusive).")
@click.option("--out", required=True, type=click.Path(dir_okay=False), help="HTML file to write.")
@click.pass_obj
def command(settings, db_path: str, instrument_id: str, start: str, end: str, out: str) -> None:
    """Write every check, event, lot, chart day, signal and the uncertainty budget of one unit."""
    rec = write_instrument_record(connect_reader(db_path), settings, instrument_id, start, end, out)
    click.echo(f"{rec.path}: {rec.n_checks} checks, {rec.n_events} events, {rec.n_signals} signals"
               + ("" if rec.uncertainty_available else "; uncertainty budget unavailable"))
