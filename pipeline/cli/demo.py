"""`breathfleet demo`: generate the demo fleet, ingest it, run the main job, open the dashboard."""

from __future__ import annotations

import click

from pipeline.cli.run import run_and_report
from pipeline.demo_job import run_demo_job


@click.command("demo", epilog="Example: breathfleet demo --out build/demo --db build/demo.duckdb --instruments 300 --months 18")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False))
@click.option("--db", "db_path", required=True, type=click.Path(dir_okay=False))
@click.option("--instruments", default=300, show_default=True)
@click.option("--months", default=18, show_default=True)
@click.option("--seed", default=None, type=int)
@click.option("--dashboard/--no-dashboard", default=True, show_default=True,
              help="Open the dashboard on the result when done.")
@click.option("--port", default=8501, show_default=True, type=click.IntRange(1, 65535), help="Dashboard port.")
@click.pass_context
def command(ctx: click.Context, out_dir, db_path, instruments, months, seed, dashboard, port):
    """Run the demo: generate (if absent) and ingest the invented fleet, chart it, fit the fleet model,
    rank the service queue, then open the dashboard."""
    settings = ctx.obj
    s = run_demo_job(out_dir, db_path, settings, instruments, months, seed)
    click.echo(f"Ingested {s.files} files: read {s.rows_read:,}, stored {s.rows_stored:,}, "
               f"duplicate {s.rows_duplicate:,}, quarantined {s.rows_quarantined:,} into {s.db_path}")
    run_and_report(settings, db_path)
    if dashboard:
        from pipeline.cli.dashboard import command as dashboard_command
        ctx.invoke(dashboard_command, db_path=db_path, port=port)
