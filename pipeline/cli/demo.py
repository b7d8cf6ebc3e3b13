"""`breathfleet demo`: generate the demo fleet, ingest it and publish the snapshot."""

from __future__ import annotations

import click

from pipeline.demo_job import run_demo_job


@click.command("demo", epilog="Example: breathfleet demo --out build/demo --db build/demo.duckdb --instruments 300 --months 18")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False))
@click.option("--db", "db_path", required=True, type=click.Path(dir_okay=False))
@click.option("--instruments", default=300, show_default=True)
@click.option("--months", default=18, show_default=True)
@click.option("--seed", default=None, type=int)
@click.pass_obj
def command(settings, out_dir, db_path, instruments, months, seed):
    """Run the demo: generate (if absent) and ingest the invented fleet."""
    s = run_demo_job(out_dir, db_path, settings, instruments, months, seed)
    click.echo(f"Ingested {s.files} files: read {s.rows_read:,}, stored {s.rows_stored:,}, "
               f"duplicate {s.rows_duplicate:,}, quarantined {s.rows_quarantined:,} into {s.db_path}")
