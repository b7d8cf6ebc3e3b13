"""`breathfleet model`: fit the fleet mixed model and store lot effects, unit estimates and diagnostics."""

from __future__ import annotations

import click

from pipeline.db import open_database, publish_snapshot
from pipeline.models.fleet_model import fit_fleet_model, store_fleet_model
from pipeline.standards import sync_standards_settings


@click.command("model", epilog="Example: breathfleet model --db fleet.duckdb")
@click.option("--db", "db_path", required=True, type=click.Path(exists=True, dir_okay=False), help="Database file.")
@click.pass_obj
def command(settings, db_path: str) -> None:
    """Fit the fleet model (lot effects, unit bias and drift) on the window of checks and store it."""
    con = open_database(db_path)
    try:
        sync_standards_settings(con, settings)
        result = fit_fleet_model(con, settings)
        fit_id = store_fleet_model(con, result)
        publish_snapshot(con, db_path)
    finally:
        con.close()
    state = "converged" if result.converged else "FAILED (did not converge; estimates not stored)"
    click.echo(f"fit {fit_id}: {state}, {result.n_checks} checks, {result.n_units} unit-periods, "
               f"{result.n_lots} lots, {result.duration_s:.1f} s")
    if result.window_start is not None:
        click.echo(f"window {result.window_start:%Y-%m-%d %H:%M} to {result.window_end:%Y-%m-%d %H:%M} UTC")
    if result.boundary:
        click.echo("boundary fit: a variance component is at zero")
    for d in result.diagnostics:
        if not d.passed:
            click.echo(f"diagnostic {d.diagnostic}: {d.message}")
    if not result.lot_effects.empty:
        counts = result.lot_effects["verdict"].value_counts()
        click.echo("lots: " + ", ".join(f"{counts.get(v, 0)} {v}" for v in ("off", "watch", "agrees")))
