"""The weekly digest: what changed in the fleet in one ISO week, as HTML, Markdown and plain text.

Deterministic by design: the same database and settings give byte-identical files. Every time in
the output comes from the data (never the wall clock), rows are sorted on full keys, and the small
charts are rendered to PNG by vl-convert (no browser) and embedded as data URIs.
"""

from __future__ import annotations

import base64
import json
import re
from dataclasses import dataclass
from datetime import date, datetime, timedelta
from pathlib import Path

import altair as alt
import duckdb
import jinja2
import pandas as pd
import vl_convert

from pipeline import __version__
from pipeline.db import query_df
from pipeline.errors import InputError
from pipeline.ranking import build_service_queue, table_exists
from pipeline.settings import Settings

TEMPLATES = Path(__file__).resolve().parent / "templates"
CAUTIONS = ("This report informs maintenance and oversight of the instrument program. It does not certify an "
            "instrument, validate or invalidate any subject test, or replace the program's approved procedures, "
            "local regulations, or the judgement of licensed and trained practitioners; defer to those.")
_WEEK = re.compile(r"^(\d{4})-W(\d{2})$")
TOP_PER_REGION = 5
MIN_P_SHOWN = 0.01   # units below 1 % chance of breach are not listed as the top of the queue


@dataclass(frozen=True)
class DigestFiles:
    """The files of one digest and the subject line for mailing it."""

    week: str
    html: Path
    markdown: Path
    text: Path
    subject: str


@dataclass(frozen=True)
class ReportHeader:
    """What every written output states about how it was made."""

    software_version: str
    settings_digest: str
    first_check_at: str
    last_check_at: str
    n_checks: int


def parse_week(week: str) -> tuple[datetime, datetime]:
    """ISO week 'YYYY-Www' -> [Monday 00:00, next Monday 00:00) in UTC."""
    m = _WEEK.match(week or "")
    if not m:
        raise InputError(f"week must look like 2026-W48, got '{week}'", field="week")
    try:
        start = date.fromisocalendar(int(m.group(1)), int(m.group(2)), 1)
    except ValueError as exc:
        raise InputError(f"no such ISO week: {week}", field="week") from exc
    start_dt = datetime(start.year, start.month, start.day)
    return start_dt, start_dt + timedelta(days=7)


def report_header(con: duckdb.DuckDBPyConnection, settings: Settings) -> ReportHeader:
    r = query_df(con, "queries/digest_data_range").iloc[0]
    fmt = (lambda v: "none" if pd.isna(v) else f"{pd.Timestamp(v):%Y-%m-%d %H:%M} UTC")
    return ReportHeader(__version__, settings.digest(), fmt(r["first_check_at"]), fmt(r["last_check_at"]),
                        int(r["n_checks"]))


def png_data_uri(spec: dict) -> str:
    """Render a Vega-Lite spec to PNG with vl-convert (no browser) and return a data URI."""
    png = vl_convert.vegalite_to_png(vl_spec=json.dumps(spec, sort_keys=True), scale=1)
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def _fmt_ts(v) -> str:
    return "" if v is None or pd.isna(v) else f"{pd.Timestamp(v):%Y-%m-%d %H:%M}"


def _fmt_day(v) -> str:
    return "" if v is None or pd.isna(v) else f"{pd.Timestamp(v):%Y-%m-%d}"


def render(name: str, context: dict) -> str:
    env = jinja2.Environment(loader=jinja2.FileSystemLoader(str(TEMPLATES)), undefined=jinja2.StrictUndefined,
                             autoescape=jinja2.select_autoescape(["html"]), keep_trailing_newline=True,
                             trim_blocks=True, lstrip_blocks=True)
    return env.get_template(name).render(**context)


def digest_context(con: duckdb.DuckDBPyConnection, settings: Settings, week: str) -> dict:
    """Everything the digest templates show, as plain strings and lists (no rendering)."""
    start, end = parse_week(week)
    header = report_header(con, settings)
    p = {"start": start, "end": end}
    sections: dict = {"unavailable": []}

    if table_exists(con, "chart_signals"):
        sig = query_df(con, "queries/digest_signals", **p)
        sections["signals"] = [{
            "unit": r.instrument_id, "region": r.region or "-", "level": f"{r.level:.3f}", "at": _fmt_ts(r.measured_at),
            "chart": f"{r.chart} {r.rule}", "direction": r.direction, "size": f"{r.size:.2f}",
            "onset": _fmt_day(r.onset_at) or "unknown",
            "impact": "unknown" if pd.isna(r.impact_checks) else str(int(r.impact_checks)),
            "fleet": "yes" if r.fleet_significant else "no"} for r in sig.itertuples()]
    else:
        sections["signals"] = []
        sections["unavailable"].append("chart signals (charts not computed)")

    queue = build_service_queue(con, settings, as_of=min(end - timedelta(microseconds=1), _last_check(con, end)))
    regions: dict[str, list] = {}
    for e in queue.entries:
        lst = regions.setdefault(e.region or "(no region)", [])
        if len(lst) < TOP_PER_REGION and e.p_breach >= MIN_P_SHOWN:
            lst.append({"rank": e.rank, "unit": e.instrument_id, "site": e.site_id or "-",
                        "p": f"{100 * e.p_breach:.1f} %", "ranks": f"{e.rank_low}-{e.rank_high}",
                        "reason": " ".join(e.reasons)})
    sections["queue"] = [{"region": k, "units": v} for k, v in sorted(regions.items())]
    sections["queue_as_of"] = _fmt_ts(queue.as_of)
    sections["tolerance"] = f"{queue.tolerance_pct:.2f} %"
    sections["horizon"] = queue.horizon_days

    model_tables = table_exists(con, "model_fits") and table_exists(con, "lot_effects")
    if model_tables:
        lots = query_df(con, "queries/digest_lot_changes", **p)
        sections["lots"] = [{"lot": r.lot_id, "kind": r.standard_kind or "-", "was": r.previous_verdict or "new",
                             "now": r.verdict, "effect": f"{r.effect_pct:+.2f} %",
                             "ci": f"{r.ci_low_pct:+.2f} to {r.ci_high_pct:+.2f} %", "units": int(r.n_units),
                             "since": _fmt_day(r.verdict_since)} for r in lots.itertuples()]
        fit = query_df(con, "queries/digest_model_fit", end=end)
        if fit.empty:
            sections["model"] = {"status": "no fit", "line": "No fleet model fit before the end of this week.",
                                 "warnings": [], "diagnostics": []}
        else:
            f = fit.iloc[0]
            warns = json.loads(f["warnings"]) if isinstance(f["warnings"], str) and f["warnings"] else []
            diags = query_df(con, "queries/digest_model_diagnostics", fit_id=int(f["fit_id"]))
            status = "converged" if bool(f["converged"]) else "FAILED"
            sections["model"] = {
                "status": status,
                "line": (f"Fit {int(f['fit_id'])} over {_fmt_day(f['window_start'])} to {_fmt_day(f['window_end'])}: "
                         f"{int(f['n_checks'])} checks, {int(f['n_units'])} unit-periods, {int(f['n_lots'])} lots; "
                         f"{status}" + ("; a variance component is at its boundary" if bool(f["boundary"]) else "")
                         + ("." if bool(f["converged"]) else " - its estimates are not used this week.")),
                "warnings": [str(w) for w in warns],
                "diagnostics": [{"name": d.diagnostic, "value": "" if pd.isna(d.value) else f"{d.value:.4g}",
                                 "passed": "pass" if d.passed else "FAIL", "message": d.message}
                                for d in diags.itertuples()]}
    else:
        sections["lots"] = []
        sections["model"] = {"status": "unavailable", "line": "The fleet model has not been computed.",
                             "warnings": [], "diagnostics": []}
        sections["unavailable"].append("lot verdicts and model diagnostics (model not computed)")

    oot = query_df(con, "queries/digest_out_of_tolerance", **p)
    sections["oot"] = [{"unit": r.instrument_id, "region": r.region or "-", "n": int(r.n_fail),
                        "worst": f"{100 * r.worst_relative_error:+.2f} %", "last": _fmt_ts(r.last_fail_at),
                        "lots": r.lots} for r in oot.itertuples()]
    silent = query_df(con, "queries/digest_silent_units", end=end, silence_days=settings.queue.silence_days)
    sections["silent"] = [{"unit": r.instrument_id, "region": r.region or "-", "site": r.site_id or "-",
                           "last": _fmt_ts(r.last_check_at), "days": int(r.days_silent)} for r in silent.itertuples()]
    files = query_df(con, "queries/digest_files", **p)
    quar = query_df(con, "queries/digest_quarantine", **p)
    sections["files"] = [{"path": r.path, "table": r.table_name, "profile": r.profile or "canonical",
                          "read": int(r.rows_read), "stored": int(r.rows_stored), "dup": int(r.rows_duplicate),
                          "quar": int(r.rows_quarantined)} for r in files.itertuples()]
    sections["quarantine"] = [{"reason": r.reason, "rows": int(r.n_rows), "files": int(r.n_files)}
                              for r in quar.itertuples()]

    daily = query_df(con, "queries/digest_daily_fails", **p)
    charts: dict = {"daily": None, "queue": None}
    if not daily.empty:
        d = daily.assign(day=daily["day"].astype(str), within=daily["n_checks"] - daily["n_fail"])
        long = pd.concat([d[["day"]].assign(verdict="within tolerance", checks=d["within"]),
                          d[["day"]].assign(verdict="out of tolerance", checks=d["n_fail"])])
        spec = alt.Chart(long, title="Fleet checks per day").mark_bar().encode(
            x=alt.X("day:O", title="UTC day"), y=alt.Y("sum(checks):Q", title="checks"),
            color=alt.Color("verdict:N", scale=alt.Scale(domain=["within tolerance", "out of tolerance"],
                                                          range=["#0072B2", "#D55E00"]))
        ).properties(width=360, height=140).to_dict()
        charts["daily"] = png_data_uri(spec)
    top = [e for e in queue.entries if e.p_breach >= MIN_P_SHOWN][:10]
    if top:
        tdf = pd.DataFrame({"unit": [e.instrument_id for e in top], "p": [100 * e.p_breach for e in top]})
        spec = alt.Chart(tdf, title="Top of the queue: chance of breach before the next visit (%)").mark_bar(
            color="#E69F00").encode(x=alt.X("p:Q", title="%", scale=alt.Scale(domain=[0, 100])),
                                    y=alt.Y("unit:N", sort=None, title=None)).properties(width=360, height=14 * len(top)).to_dict()
        charts["queue"] = png_data_uri(spec)

    return {"week": week, "week_start": f"{start:%Y-%m-%d}", "week_end": f"{end - timedelta(days=1):%Y-%m-%d}",
            "header": header, "cautions": CAUTIONS, "charts": charts, **sections}


def _last_check(con: duckdb.DuckDBPyConnection, end: datetime) -> datetime:
    v = con.execute("SELECT max(measured_at) FROM checks WHERE measured_at < $end", {"end": end}).fetchone()[0]
    return end - timedelta(microseconds=1) if v is None else pd.Timestamp(v).to_pydatetime()


def write_digest(con: duckdb.DuckDBPyConnection, settings: Settings, week: str, out_dir: str | Path) -> DigestFiles:
    """Write digest-<week>.html, .md and .txt into out_dir.

    Parameters:
        con: a connection (a reader's snapshot is fine).
        settings: program settings; their digest is printed in the header.
        week: ISO week, e.g. '2026-W48' (Monday to Sunday, UTC).
        out_dir: directory, created if missing.
    Returns:
        DigestFiles with the three paths and a mail subject.
    """
    ctx = digest_context(con, settings, week)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    files = DigestFiles(week=week, html=out / f"digest-{week}.html", markdown=out / f"digest-{week}.md",
                        text=out / f"digest-{week}.txt",
                        subject=f"breathfleet weekly digest {week} ({ctx['week_start']} to {ctx['week_end']})")
    files.html.write_text(render("digest.html.j2", ctx), encoding="utf-8")
    files.markdown.write_text(render("digest.md.j2", ctx), encoding="utf-8")
    files.text.write_text(render("digest.txt.j2", ctx), encoding="utf-8")
    return files
