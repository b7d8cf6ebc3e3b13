"""The instrument record: one unit over a date range, complete and reproducible, as one HTML file.

Holds every check in the range (expected value, error, verdict, flags), calibrations and service
events, the lots used with their verdicts, the chart status on each day with checks, the GUM
uncertainty budget (pipeline.standards.uncertainty), the signals and impact windows, the header
(software version, data range, settings hash) and the cautions. No wall-clock time is written.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import date, datetime, timedelta
from pathlib import Path

import duckdb
import pandas as pd

from pipeline.db import query_df
from pipeline.digest import CAUTIONS, render, report_header
from pipeline.errors import InputError
from pipeline.ranking import table_exists
from pipeline.settings import Settings


@dataclass(frozen=True)
class InstrumentRecord:
    """Where the record was written and what it covers."""

    path: Path
    instrument_id: str
    start: date
    end: date
    n_checks: int
    n_events: int
    n_signals: int
    uncertainty_available: bool


def _d(v) -> date:
    if isinstance(v, datetime):
        return v.date()
    if isinstance(v, date):
        return v
    try:
        return date.fromisoformat(str(v))
    except ValueError as exc:
        raise InputError(f"dates must look like 2026-11-30, got '{v}'") from exc


def _ts(v) -> str:
    return "" if v is None or pd.isna(v) else f"{pd.Timestamp(v):%Y-%m-%d %H:%M}"


def _num(v, fmt: str) -> str:
    return "" if v is None or (isinstance(v, float) and math.isnan(v)) or pd.isna(v) else format(v, fmt)


def _flags(r) -> str:
    names = [n.replace("_", " ") for n in ("lot_expired", "lot_wrong_kind", "lot_before_certified",
                                            "temp_out_of_window", "verdict_disagrees") if bool(getattr(r, n))]
    return ", ".join(names)


def uncertainty_section(con: duckdb.DuckDBPyConnection, settings: Settings, instrument_id: str,
                        as_of: datetime) -> dict:
    """The GUM budget from pipeline.standards, or the reason it is unavailable (figures are never invented)."""
    try:
        from pipeline.standards.uncertainty import compute_uncertainty_budget
    except ImportError as exc:
        return {"available": False, "message": f"The uncertainty budget is not available in this version ({exc})."}
    try:
        budget = compute_uncertainty_budget(con, settings, instrument_id, as_of)
    except InputError as exc:
        return {"available": False, "message": f"The uncertainty budget could not be computed: {exc}"}
    levels = []
    for lv in budget.levels:
        levels.append({
            "level": f"{lv.level:.3f}", "kind": lv.standard_kind, "n": lv.n_checks,
            "bias": f"{lv.bias:+.5f}", "u_c": f"{lv.combined_standard_uncertainty:.5f}",
            "U": f"{lv.expanded_uncertainty:.5f}", "k": f"{lv.coverage_factor:g}",
            "rel": f"{100 * lv.relative_expanded_uncertainty:.2f} %",
            "nu": "inf" if math.isinf(lv.effective_degrees_of_freedom) else f"{lv.effective_degrees_of_freedom:.0f}",
            "components": [{"name": c.name, "type": c.evaluation, "dist": c.distribution,
                            "u": f"{c.standard_uncertainty:.5f}", "c": f"{c.sensitivity:.4g}",
                            "contrib": f"{c.contribution:.5f}"} for c in lv.components],
            "warnings": list(lv.warnings)})
    return {"available": True, "message": "", "period": budget.baseline_period,
            "data": f"{_ts(budget.data_start)} to {_ts(budget.data_end)}", "levels": levels,
            "warnings": list(budget.warnings)}


def write_instrument_record(con: duckdb.DuckDBPyConnection, settings: Settings, instrument_id: str,
                            start, end, out: str | Path) -> InstrumentRecord:
    """Write the self-contained HTML record of one instrument from `start` to `end` (UTC dates, inclusive).

    Raises:
        InputError: unknown instrument, or start after end.
    """
    d0, d1 = _d(start), _d(end)
    if d0 > d1:
        raise InputError(f"--from {d0} is after --to {d1}")
    inst = query_df(con, "queries/record_instrument", instrument_id=instrument_id)
    if inst.empty:
        raise InputError(f"no instrument '{instrument_id}' in the database", field="instrument")
    t0 = datetime(d0.year, d0.month, d0.day)
    t1 = datetime(d1.year, d1.month, d1.day) + timedelta(days=1)
    p = {"instrument_id": instrument_id, "start": t0, "end": t1}
    checks = query_df(con, "queries/record_checks", **p)
    events = query_df(con, "queries/record_events", **p)
    unavailable = []
    has_model = table_exists(con, "model_fits") and table_exists(con, "lot_effects")
    if has_model:
        lots = query_df(con, "queries/record_lots", **p)
    else:
        unavailable.append("lot verdicts (fleet model not computed)")
        lots = None
    has_charts = table_exists(con, "chart_points") and table_exists(con, "chart_signals")
    days = query_df(con, "queries/record_chart_days", **p) if has_charts else pd.DataFrame()
    signals = query_df(con, "queries/record_signals", **p) if has_charts else pd.DataFrame()
    if not has_charts:
        unavailable.append("chart status and signals (charts not computed)")
    last = checks["measured_at"].max() if not checks.empty else None
    unc = (uncertainty_section(con, settings, instrument_id, pd.Timestamp(last).to_pydatetime())
           if last is not None else {"available": False, "message": "No checks in the range: no budget."})
    i = inst.iloc[0]
    ctx = {
        "header": report_header(con, settings), "cautions": CAUTIONS, "unavailable": unavailable,
        "unit": {"id": instrument_id, "technology": i["technology"], "model": i["model"] or "-",
                 "site": i["site_id"] or "-", "region": i["region"] or "-",
                 "in_service": "" if pd.isna(i["in_service_on"]) else str(i["in_service_on"])[:10]},
        "start": str(d0), "end": str(d1),
        "summary": {"n": len(checks), "fail": int((checks["verdict"] == "fail").sum()) if len(checks) else 0},
        "checks": [{"at": _ts(r.measured_at), "type": r.check_type, "level": _num(r.level, ".3f"), "lot": r.lot_id,
                    "expected": _num(r.expected, ".4f"), "measured": _num(r.measured, ".3f"),
                    "error": _num(100 * r.relative_error if pd.notna(r.relative_error) else None, "+.2f"),
                    "correction": r.correction_method or "", "verdict": r.verdict or "no rule",
                    "outcome": r.outcome or "", "flags": _flags(r)} for r in checks.itertuples()],
        "events": [{"at": _ts(r.event_at), "type": r.event_type.replace("_", " "), "notes": r.notes or ""}
                   for r in events.itertuples()],
        "lots": [] if lots is None else [{
            "lot": r.lot_id, "kind": r.standard_kind or "-", "target": _num(r.target, ".4f"),
            "U": _num(r.expanded_uncertainty, ".4f"), "certified": "" if pd.isna(r.certified_on) else str(r.certified_on)[:10],
            "expires": "" if pd.isna(r.expires_on) else str(r.expires_on)[:10], "n": int(r.n_checks),
            "used": f"{_ts(r.first_at)} to {_ts(r.last_at)}", "verdict": r.verdict or "not assessed",
            "effect": "" if pd.isna(r.effect_pct) else f"{r.effect_pct:+.2f} % ({r.ci_low_pct:+.2f} to {r.ci_high_pct:+.2f})"}
            for r in lots.itertuples()],
        "days": [{"day": str(r.day)[:10], "level": f"{r.level:.3f}", "n": int(r.n_points),
                  "z": _num(r.max_abs_z, ".2f"), "cusum": _num(r.cusum, ".2f"),
                  "ewma": _num(r.ewma, "+.2f"), "status": r.signals if isinstance(r.signals, str) else "no signal"}
                 for r in days.itertuples()],
        "signals": [{"at": _ts(r.measured_at), "level": f"{r.level:.3f}", "chart": f"{r.chart} {r.rule}",
                     "direction": r.direction, "size": f"{r.size:.2f}", "onset": _ts(r.onset_at) or "unknown",
                     "impact": "unknown" if pd.isna(r.impact_checks) else str(int(r.impact_checks)),
                     "fleet": "yes" if r.fleet_significant else "no"} for r in signals.itertuples()],
        "uncertainty": unc,
    }
    out = Path(out)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(render("record.html.j2", ctx), encoding="utf-8")
    return InstrumentRecord(out, instrument_id, d0, d1, len(checks), len(events), len(signals), unc["available"])
