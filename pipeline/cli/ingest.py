"""`breathfleet ingest`: read source files into the database (a thin shell over pipeline.sources)."""

from __future__ import annotations

import json

import click

from pipeline.db import open_database, publish_snapshot
from pipeline.sources.ingest import expand_paths, iter_ingest
from pipeline.sources.profiles import TABLES, load_profile
from pipeline.sources.pseudonymise import operator_key
from pipeline.standards import sync_standards_settings


@click.command("ingest", epilog="Example: breathfleet ingest --db fleet.duckdb --profile tollmere.toml exports/*.csv")
@click.option("--db", "db_path", required=True, type=click.Path(dir_okay=False), help="Database file (created if absent).")
@click.option("--profile", "profile_path", type=click.Path(dir_okay=False), help="Source profile (TOML); default canonical CSV.")
@click.option("--table", type=click.Choice(TABLES), help="Target table; default from profile, file name or header.")
@click.option("--quiet", is_flag=True, help="No progress bar or summary (for scheduled runs).")
@click.option("--json", "as_json", is_flag=True, help="Print the per-file counts as JSON.")
@click.argument("paths", nargs=-1, required=True, type=click.Path())
@click.pass_obj
def command(settings, db_path, profile_path, table, quiet, as_json, paths):
    """Ingest check exports and reference tables: validate, convert to g/210L and UTC, quarantine bad rows,
    skip exact duplicates; each file is one transaction with a ledger row."""
    profile = load_profile(profile_path) if profile_path else None
    files = expand_paths(paths)
    con = open_database(db_path)
    key = operator_key(settings.ingest.operator_key_file)
    results = []
    try:
        show = not quiet and not as_json and len(files) > 1
        with click.progressbar(length=len(files), label="Ingesting", file=None if show else _Null()) as bar:
            for result in iter_ingest(con, files, settings, profile, table, key=key):
                results.append(result)
                bar.update(1)
    finally:
        if results:
            # once per command, not per file: derived expected values and verdicts, then the
            # snapshot readers use (they keep reading the previous one until it is replaced)
            sync_standards_settings(con, settings)
            publish_snapshot(con, db_path)
        con.close()
    if as_json:
        click.echo(json.dumps([r.as_dict() for r in results], indent=2))
    elif not quiet:
        for r in results:
            click.echo(f"{r.path}: {r.table} read {r.rows_read:,}, stored {r.rows_stored:,}, "
                       f"duplicate {r.rows_duplicate:,}, quarantined {r.rows_quarantined:,}")


class _Null:
    def write(self, *_):
        pass

    def flush(self):
        pass

    def isatty(self):
        return False
