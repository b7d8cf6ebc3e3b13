"""`breathfleet lots`: the lot verdicts of the latest converged fleet-model fit."""

from __future__ import annotations

import json

import click

from pipeline.db import connect_reader, query_df
from pipeline.errors import InputError


@click.command("lots", epilog="Example: breathfleet lots --db fleet.duckdb --csv > lots.csv")
@click.option("--db", "db_path", required=True, type=click.Path(exists=True, dir_okay=False), help="Database file.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON records.")
@click.option("--csv", "as_csv", is_flag=True, help="Print CSV.")
def command(db_path: str, as_json: bool, as_csv: bool) -> None:
    """List each lot's effect (%) with its 95 % interval, units, checks, verdict and acceptance state."""
    if as_json and as_csv:
        raise InputError("choose one of --json and --csv")
    con = connect_reader(db_path)
    try:
        has = con.execute("SELECT count(*) FROM information_schema.tables WHERE table_name = 'lot_effects'").fetchone()[0]
        if not has:
            raise InputError("this database has no fleet model yet; run `breathfleet model --db FILE` first",
                             file=db_path)
        frame = query_df(con, "queries/model_lot_verdicts")
    finally:
        con.close()
    if frame.empty:
        raise InputError("no converged fleet-model fit stored; run `breathfleet model --db FILE` and check "
                         "its diagnostics", file=db_path)
    for col in ("verdict_since", "acceptance_decided_at"):
        frame[col] = frame[col].astype(str).replace({"NaT": "", "None": ""})
    if as_json:
        click.echo(json.dumps(frame.to_dict(orient="records"), indent=2, default=str))
    elif as_csv:
        click.echo(frame.to_csv(index=False), nl=False)
    else:
        click.echo(f"{'lot':<14}{'kind':<10}{'effect %':>9}{'95 % interval':>20}{'units':>7}{'checks':>8}  "
                   f"{'verdict':<8}{'since':<12}acceptance")
        for r in frame.itertuples():
            click.echo(f"{r.lot_id:<14}{str(r.standard_kind):<10}{r.effect_pct:>9.2f}"
                       f"{f'[{r.ci_low_pct:.2f}, {r.ci_high_pct:.2f}]':>20}{r.n_units:>7}{r.n_checks:>8}  "
                       f"{r.verdict:<8}{r.verdict_since:<12}{r.acceptance or ''}")
