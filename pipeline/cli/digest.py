"""`breathfleet digest`: the weekly digest as HTML, Markdown and text; optionally mailed."""

from __future__ import annotations

import click

from pipeline.db import connect_reader
from pipeline.digest import write_digest
from pipeline.mailer import send_digest


@click.command("digest", epilog="Example: breathfleet digest --db fleet.duckdb --week 2026-W48 --out digests/ --send")
@click.option("--db", "db_path", required=True, type=click.Path(exists=True, dir_okay=False), help="Database file.")
@click.option("--week", required=True, help="ISO week, e.g. 2026-W48 (Monday to Sunday, UTC).")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False), help="Output directory.")
@click.option("--send", is_flag=True, help="Mail the digest through the SMTP server in the settings.")
@click.pass_obj
def command(settings, db_path: str, week: str, out_dir: str, send: bool) -> None:
    """Write the weekly digest (signals, queue, lots, tolerance, silence, data quality, model)."""
    files = write_digest(connect_reader(db_path), settings, week, out_dir)
    for path in (files.html, files.markdown, files.text):
        click.echo(str(path))
    if send:
        accepted = send_digest(files, settings.smtp)
        click.echo(f"sent to {', '.join(accepted)}")
