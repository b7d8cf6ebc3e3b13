"""`breathfleet queue`: the ranked service queue with reasons."""

from __future__ import annotations

import csv
import io
import json

import click

from pipeline.db import connect_reader, open_database, publish_snapshot
from pipeline.errors import DatabaseLockedError, InputError
from pipeline.ranking import build_service_queue, evidence_json, store_service_queue

FORMULA_START = ("=", "+", "-", "@")


def escape_cell(value) -> str:
    """Make a CSV cell safe for spreadsheets: a leading = + - @ gets a single quote in front (OWASP CSV injection)."""
    text = "" if value is None else str(value)
    return "'" + text if text.startswith(FORMULA_START) else text


@click.command("queue", epilog="Example: breathfleet queue --db fleet.duckdb --region 'North Basin' --top 20")
@click.option("--db", "db_path", required=True, type=click.Path(exists=True, dir_okay=False), help="Database file.")
@click.option("--region", default=None, help="Only units in this region.")
@click.option("--top", type=click.IntRange(min=1), default=None, help="Only the first N units.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON.")
@click.option("--csv", "as_csv", is_flag=True, help="Print CSV (formula-like cells escaped).")
@click.pass_obj
def command(settings, db_path: str, region: str | None, top: int | None, as_json: bool, as_csv: bool) -> None:
    """Rank units by the chance they breach tolerance before their next visit, with reasons.

    Stores the queue in the database when it can take the write lock; otherwise it reads the snapshot.
    """
    if as_json and as_csv:
        raise InputError("choose one of --json and --csv")
    try:
        con = open_database(db_path)
        from pipeline.standards import sync_standards_settings
        sync_standards_settings(con, settings)
        try:
            queue = build_service_queue(con, settings)
            store_service_queue(con, queue)
            publish_snapshot(con, db_path)
        finally:
            con.close()
    except DatabaseLockedError:
        reader = connect_reader(db_path)
        try:
            queue = build_service_queue(reader, settings)
        finally:
            reader.close()
    entries = [e for e in queue.entries if region is None or e.region == region]
    if region is not None and not entries:
        raise InputError(f"no units in region '{region}'")
    entries = entries[:top] if top else entries
    if as_json:
        click.echo(json.dumps({"as_of": queue.as_of.isoformat(), "tolerance_pct": queue.tolerance_pct,
                               "horizon_days": queue.horizon_days, "settings_digest": queue.settings_digest,
                               "software_version": queue.software_version, "warnings": list(queue.warnings),
                               "units": [{"rank": e.rank, "instrument_id": e.instrument_id, "region": e.region,
                                          "site_id": e.site_id, "p_breach": round(e.p_breach, 6),
                                          "rank_low": e.rank_low, "rank_high": e.rank_high,
                                          "reasons": list(e.reasons), "evidence": json.loads(evidence_json(e.evidence))}
                                         for e in entries]}, indent=2))
        return
    if as_csv:
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(["rank", "instrument_id", "region", "site_id", "p_breach", "rank_low", "rank_high", "reasons"])
        for e in entries:
            w.writerow([escape_cell(v) for v in (e.rank, e.instrument_id, e.region, e.site_id, f"{e.p_breach:.4f}",
                                                 e.rank_low, e.rank_high, " ".join(e.reasons))])
        click.echo(buf.getvalue(), nl=False)
        return
    click.echo(f"service queue as of {queue.as_of:%Y-%m-%d %H:%M} UTC   tolerance {queue.tolerance_pct:.2f} %   "
               f"next visit in {queue.horizon_days} days   settings {queue.settings_digest}")
    click.echo(f"{'rank':>4}  {'unit':<14}{'region':<16}{'P(breach)':>10}  {'rank 90 %':>10}  reasons")
    for e in entries:
        click.echo(f"{e.rank:>4}  {e.instrument_id:<14}{(e.region or '-'):<16}{100 * e.p_breach:>9.1f}%  "
                   f"{f'{e.rank_low}-{e.rank_high}':>10}  {e.reasons[0]}")
        for r in e.reasons[1:]:
            click.echo(f"{'':>48}{r}")
    for w in queue.warnings:
        click.echo(f"warning: {w}")
