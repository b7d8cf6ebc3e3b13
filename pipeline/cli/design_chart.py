"""`breathfleet design-chart`: choose CUSUM (k, h) or EWMA (lambda, L) for a target in-control run length."""

from __future__ import annotations

import json

import click

from pipeline.charts.design import design_cusum, design_ewma
from pipeline.charts.fleet_alarms import expected_false_alarms
from pipeline.errors import InputError


@click.command("design-chart", epilog="Example: breathfleet design-chart --arl0 500 --shift 1 --drift 0.05")
@click.option("--arl0", type=float, default=None,
              help="Target in-control average run length, in checks (default: charts.target_arl0 of the settings).")
@click.option("--shift", type=float, default=None,
              help="Step change to detect, in sigma (default: charts.shift_sigma of the settings).")
@click.option("--chart", type=click.Choice(["cusum", "ewma"]), default="cusum", show_default=True, help="Chart to design.")
@click.option("--drift", type=float, default=None, help="Also report the run length under a linear drift (sigma per check).")
@click.option("--headstart", type=float, default=None,
              help="CUSUM fast-initial-response headstart, sigma (default: charts.cusum_headstart of the settings).")
@click.option("--checks-per-week", type=float, default=None, help="Fleet checks per week: report expected false alarms per week.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON instead of a table.")
@click.pass_obj
def command(settings, arl0: float | None, shift: float | None, chart: str, drift: float | None,
            headstart: float | None, checks_per_week: float | None, as_json: bool) -> None:
    """Design a two-sided CUSUM or EWMA chart by average run length (in sigma units); options not
    given come from the program's [charts] settings, so the design shown is the one analyse uses."""
    cs = settings.charts
    arl0 = cs.target_arl0 if arl0 is None else arl0
    shift = cs.shift_sigma if shift is None else shift
    if headstart is None:
        headstart = cs.cusum_headstart if chart == "cusum" else 0.0
    try:
        if chart == "cusum":
            design = design_cusum(arl0, shift, headstart=headstart, drift=drift)
        else:
            if headstart:
                raise ValueError("--headstart applies to the CUSUM only")
            design = design_ewma(arl0, shift, drift=drift)
        alarms = None if checks_per_week is None else expected_false_alarms(checks_per_week, design.arl0)
    except ValueError as exc:
        raise InputError(str(exc)) from exc
    out = design.parameters()
    if alarms is not None:
        out["false_alarms_per_week"] = alarms.expected_per_week
        out["p_false_alarm_in_week"] = alarms.p_at_least_one
    if as_json:
        click.echo(json.dumps(out, indent=2))
        return
    for key, value in out.items():
        if key == "warnings":
            value = "; ".join(value) or "none"
        elif isinstance(value, float):
            value = f"{value:.4f}" if abs(value) < 1e6 else f"{value:.4g}"
        click.echo(f"{key:<22} {value}")
