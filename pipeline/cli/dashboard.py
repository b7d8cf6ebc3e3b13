"""`breathfleet dashboard`: start the Streamlit dashboard on localhost over a database's read snapshot."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import click

from pipeline.errors import InputError

APP = Path(__file__).resolve().parent.parent.parent / "dashboard" / "app.py"


def streamlit_command(port: int, address: str = "127.0.0.1") -> list[str]:
    """The command line that serves the dashboard headless on `address:port` (through
    dashboard.serve, which imports the heavy libraries before the server listens)."""
    return [sys.executable, "-m", "dashboard.serve", "run", str(APP),
            "--server.headless", "true", "--server.address", address, "--server.port", str(port),
            "--browser.gatherUsageStats", "false", "--global.developmentMode", "false",
            "--server.fileWatcherType", "none", "--client.toolbarMode", "viewer"]


def dashboard_environment(db_path: str | Path, settings_path: str | None) -> dict[str, str]:
    """The environment the dashboard reads: BREATHFLEET_DB (absolute) and, if given, BREATHFLEET_SETTINGS."""
    env = dict(os.environ)
    env["BREATHFLEET_DB"] = str(Path(db_path).resolve())
    if settings_path:
        env["BREATHFLEET_SETTINGS"] = str(Path(settings_path).resolve())
    return env


@click.command("dashboard", epilog="Example: breathfleet dashboard --db fleet.duckdb --port 8501")
@click.option("--db", "db_path", required=True, type=click.Path(dir_okay=False), help="Database file.")
@click.option("--port", default=8501, show_default=True, type=click.IntRange(1, 65535), help="Port on localhost.")
@click.pass_context
def command(ctx: click.Context, db_path: str, port: int) -> None:
    """Open the dashboard on http://localhost:PORT. It only reads the snapshot that writers publish,
    so it keeps working while an ingest or analysis runs."""
    db = Path(db_path)
    if not db.exists() and not db.with_name(db.name + ".snapshot").exists():
        raise InputError("database file does not exist; ingest data first (breathfleet ingest --db FILE ...)",
                         file=str(db))
    settings_path = ctx.find_root().params.get("settings_path")
    click.echo(f"breathfleet dashboard on http://localhost:{port} (reading {db}); press Ctrl+C to stop.")
    try:
        result = subprocess.run(streamlit_command(port), env=dashboard_environment(db, settings_path), check=False)
    except KeyboardInterrupt:
        return
    if result.returncode not in (0, -2, 130):
        raise click.ClickException(f"the dashboard server stopped with exit code {result.returncode}")
