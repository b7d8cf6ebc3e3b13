"""`breathfleet analyse`: chart every new check of the fleet and publish the snapshot."""

from __future__ import annotations

from pathlib import Path

import click

from pipeline.charts.analyse import analyse_fleet
from pipeline.db import open_database, publish_snapshot
from pipeline.errors import InputError


@click.command("analyse", epilog="Example: breathfleet --settings program.toml analyse --db fleet.duckdb")
@click.option("--db", "db_path", required=True, type=click.Path(dir_okay=False), help="Database file.")
@click.pass_obj
def command(settings, db_path: str) -> None:
    """Chart all units (individuals, moving range, run rules, CUSUM, EWMA); only new checks are charted.

    Settings come from the group option: `breathfleet --settings S.toml analyse ...`.
    """
    if not Path(db_path).exists():
        raise InputError("database file does not exist; ingest data first", file=db_path)
    con = open_database(db_path)
    try:
        try:
            run = analyse_fleet(con, settings)
        except ValueError as exc:
            raise InputError(str(exc)) from exc
        publish_snapshot(con, db_path)
    finally:
        con.close()
    click.echo(f"{run.mode} run {run.run_id}: {run.n_new_checks} new checks in {run.n_groups} chart groups, "
               f"{run.n_signals} signals, {run.n_baselines} baselines frozen, {run.duration_s:.2f} s")
