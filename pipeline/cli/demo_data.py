"""`breathfleet demo-data`: write the invented demo fleet (a thin shell over demo_fleet)."""

from __future__ import annotations

from datetime import date

import click

from pipeline.errors import InputError


@click.command("demo-data", epilog="Example: breathfleet demo-data --out build/demo --instruments 300 --months 18 --seed 7")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False), help="Directory to write into.")
@click.option("--instruments", default=300, show_default=True, type=int, help="Number of units (at least 12).")
@click.option("--months", default=18, show_default=True, type=int, help="Calendar months of checks.")
@click.option("--seed", default=20261129, show_default=True, type=int, help="Same seed and sizes give identical files.")
@click.option("--end", "end", default="2026-11-29", show_default=True, help="Last day with checks (YYYY-MM-DD).")
def command(out_dir: str, instruments: int, months: int, seed: int, end: str) -> None:
    """Generate the invented demo fleet: reference tables, monthly exports in several layouts,
    broken rows, manifest.json (ingest order) and truth.json (planted faults)."""
    from demo_fleet import generate_demo_fleet

    try:
        end_date = date.fromisoformat(end)
    except ValueError as exc:
        raise InputError(f"--end must be a date YYYY-MM-DD, got '{end}'", field="end") from exc
    if instruments < 12:
        raise InputError(f"--instruments must be at least 12 (the planted faults need distinct units), got {instruments}",
                         field="instruments")
    if months < 1:
        raise InputError(f"--months must be at least 1, got {months}", field="months")
    fleet = generate_demo_fleet(out_dir, instruments=instruments, months=months, seed=seed, end=end_date)
    click.echo(f"Wrote {fleet.checks:,} checks of {fleet.instruments} units, {fleet.start} to {fleet.end}, "
               f"{fleet.service_events:,} service events, {fleet.lots} lots, {fleet.sites} sites, into {fleet.out_dir}")
    click.echo(f"Ingest in the order of {fleet.manifest}; planted faults are in {fleet.truth}.")
