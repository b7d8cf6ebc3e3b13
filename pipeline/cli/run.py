"""`breathfleet run`: the main job on an ingested database (charts, fleet model, service queue)."""

from __future__ import annotations

from pathlib import Path

import click

from pipeline.db import open_database
from pipeline.errors import InputError
from pipeline.main_job import run_main_job


@click.command("run", epilog="Example: breathfleet run --db fleet.duckdb")
@click.option("--db", "db_path", required=True, type=click.Path(dir_okay=False), help="Database file.")
@click.pass_obj
def command(settings, db_path: str) -> None:
    """Chart every new check, fit the fleet model, rank the service queue and publish the snapshot."""
    if not Path(db_path).exists():
        raise InputError("database file does not exist; ingest data first", file=db_path)
    run_and_report(settings, db_path)


def run_and_report(settings, db_path: str) -> None:
    """Open the database, run the main job, print its summary lines (also used by `demo`)."""
    con = open_database(db_path)
    try:
        job = run_main_job(con, settings, db_path)
    finally:
        con.close()
    for line in job.lines():
        click.echo(line)
