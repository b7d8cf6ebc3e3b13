"""`breathfleet uncertainty`: the GUM uncertainty budget of one instrument, per level."""

from __future__ import annotations

import dataclasses
import json
import math
from datetime import datetime

import click

from pipeline.db import connect_reader
from pipeline.standards.uncertainty import compute_uncertainty_budget


def _signed(value: float, digits: int) -> str:
    return f"{round(value, digits) + 0.0:+.{digits}f}"  # + 0.0 turns -0.0 into 0.0


def _jsonable(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None if math.isnan(value) else "inf"
    if isinstance(value, datetime):
        return value.isoformat()
    if isinstance(value, dict):
        return {k: _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    return value


@click.command("uncertainty", epilog="Example: breathfleet uncertainty --db fleet.duckdb --instrument SN-10234")
@click.option("--db", "db_path", required=True, type=click.Path(exists=True, dir_okay=False), help="Database file.")
@click.option("--instrument", "instrument_id", required=True, help="Serial number of the unit.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON instead of a table.")
@click.pass_obj
def command(settings, db_path: str, instrument_id: str, as_json: bool) -> None:
    """Print the measurement uncertainty budget (GUM, k = 2) of one unit in its current baseline period."""
    budget = compute_uncertainty_budget(connect_reader(db_path), settings, instrument_id)
    if as_json:
        click.echo(json.dumps(_jsonable(dataclasses.asdict(budget)), indent=2))
        return
    click.echo(f"instrument {budget.instrument_id}   baseline period {budget.baseline_period}   "
               f"checks {budget.data_start} .. {budget.data_end}   software {budget.software_version}")
    for lv in budget.levels:
        click.echo("")
        click.echo(f"level {lv.level:.3f} g/210L  {lv.standard_kind}  correction {lv.correction_method}  "
                   f"n = {lv.n_checks}  lots {', '.join(lv.lots)}")
        click.echo(f"  bias {_signed(lv.bias, 5)} ({_signed(100 * lv.bias_relative, 2)} %)  u(bias) {lv.bias_standard_uncertainty:.5f}  "
                   f"truncation bias {_signed(lv.truncation_bias, 4)}  "
                   f"bias without truncation {_signed(lv.bias_excluding_truncation, 5)}")
        click.echo(f"  {'component':<22}{'type':<6}{'distribution':<14}{'u(x)':>10}{'c':>10}{'|c| u':>10}{'dof':>7}")
        for c in lv.components:
            dof = "inf" if math.isinf(c.degrees_of_freedom) else f"{c.degrees_of_freedom:.0f}"
            click.echo(f"  {c.name:<22}{c.evaluation:<6}{c.distribution:<14}{c.standard_uncertainty:>10.5f}"
                       f"{c.sensitivity:>10.4g}{c.contribution:>10.5f}{dof:>7}")
        nu = "inf" if math.isinf(lv.effective_degrees_of_freedom) else f"{lv.effective_degrees_of_freedom:.0f}"
        click.echo(f"  combined u_c {lv.combined_standard_uncertainty:.5f}   expanded U (k = {lv.coverage_factor:g}) "
                   f"{lv.expanded_uncertainty:.5f} ({100 * lv.relative_expanded_uncertainty:.2f} %)   nu_eff {nu}")
        for w in lv.warnings:
            click.echo(f"  warning: {w}")
    for w in budget.warnings:
        click.echo(f"warning: {w}")
