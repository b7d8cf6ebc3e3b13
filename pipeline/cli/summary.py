"""`breathfleet summary`: counts over a database."""

from __future__ import annotations

import dataclasses
import json

import click

from pipeline.db import connect_reader
from pipeline.fleet_summary import summarise_fleet


@click.command("summary", epilog="Example: breathfleet summary --db fleet.duckdb")
@click.option("--db", "db_path", required=True, type=click.Path(exists=True, dir_okay=False), help="Database file.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON instead of a table.")
def command(db_path: str, as_json: bool) -> None:
    """Print how many units, checks, lots and quarantined rows the database holds."""
    summary = summarise_fleet(connect_reader(db_path))
    if as_json:
        click.echo(json.dumps(dataclasses.asdict(summary), indent=2))
        return
    for key, value in dataclasses.asdict(summary).items():
        click.echo(f"{key.replace('_', ' '):<18} {value}")
