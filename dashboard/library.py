"""Adapters from the pages to library functions that other parts of breathfleet provide.

Each adapter returns None when the library function is not available (its feature has not
been installed yet), so the page can say "not computed yet" instead of failing.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import importlib
import json
import tempfile
from pathlib import Path

import pandas as pd
import streamlit as st

from dashboard import loaders
from pipeline.db import query_df
from pipeline.errors import InputError


def _function(module: str, name: str):
    try:
        return getattr(importlib.import_module(module), name)
    except (ImportError, AttributeError):
        return None


def _find_key(tree, keys: tuple[str, ...]):
    if isinstance(tree, dict):
        for key in keys:
            if isinstance(tree.get(key), (int, float)):
                return float(tree[key])
        for value in tree.values():
            found = _find_key(value, keys)
            if found is not None:
                return found
    return None


def cusum_h(baselines: pd.DataFrame | None, level: float) -> float | None:
    """The CUSUM decision interval h recorded in the latest baseline's parameters at `level`
    (a key `h` or `cusum_h`, at the top of the JSON or inside a nested design table)."""
    if baselines is None or baselines.empty:
        return None
    rows = baselines[baselines["level"].round(3) == round(level, 3)]
    for text in reversed(rows["parameters"].tolist()):
        try:
            params = json.loads(text) if isinstance(text, str) else {}
        except ValueError:
            continue
        cusum = params.get("cusum") if isinstance(params.get("cusum"), dict) else None
        found = _find_key(cusum, ("h",)) if cusum else None
        found = found if found is not None else _find_key(params, ("cusum_h", "h"))
        if found is not None:
            return found
    return None


def forecast_sentence(estimate: pd.Series, tolerance_pct: float, horizon_days: int) -> str:
    """When the unit's mean bias reaches tolerance if its drift continues, from
    pipeline.forecast.forecast_bias (parameter uncertainty of the fleet model only)."""
    fn = _function("pipeline.forecast", "forecast_bias")
    if fn is None:
        return ""
    se_b = (estimate["bias_ci_high_pct"] - estimate["bias_ci_low_pct"]) / (2 * 1.959964)
    se_d = (estimate["drift_ci_high"] - estimate["drift_ci_low"]) / (2 * 1.959964)
    cov = estimate.get("bias_drift_cov")
    fc = fn(float(estimate["bias_pct"]), float(estimate["drift_pct_per_30d"]), float(se_b) ** 2, float(se_d) ** 2,
            0.0 if pd.isna(cov) else float(cov), 0.0, tolerance_pct, float(horizon_days))
    if fc.warnings:
        return "No forecast: " + "; ".join(fc.warnings) + "."
    ref = pd.Timestamp(estimate["reference_at"])

    def when(days: float) -> str:
        return "not within 10 years" if days == float("inf") else f"{ref + pd.Timedelta(days=days):%Y-%m-%d}"
    if fc.days_to_tolerance == float("inf") and fc.days_to_tolerance_low == float("inf"):
        return f"If the present drift continues, the bias stays inside ±{tolerance_pct:g} % (with its 95 % band)."
    return (f"If the present drift continues, the bias reaches the ±{tolerance_pct:g} % tolerance around "
            f"**{when(fc.days_to_tolerance)}** (95 % band: from {when(fc.days_to_tolerance_low)} to "
            f"{when(fc.days_to_tolerance_high)}); P(outside tolerance) in {horizon_days} days: {fc.p_breach:.0%}.")


@st.cache_data(max_entries=64, show_spinner=False)
def _budget(token: loaders.DataToken, instrument_id: str, as_of: pd.Timestamp):
    """Every level's budget of the unit as of its last check (one entry per unit, whichever level
    the page shows). compute_uncertainty_budget would first look up the last check in checks,
    which at 10 million rows means a full scan; the page knows it already (dashboard_unit_levels),
    so the adapter runs the budget's own query and pure function directly."""
    build = _function("pipeline.standards.uncertainty", "budget_from_checks")
    if build is None:
        return None
    when = pd.Timestamp(as_of).to_pydatetime()
    with loaders.reader_connection() as con:
        checks = query_df(con, "queries/standards_budget_checks", instrument_id=instrument_id, as_of=when)
    budget = build(checks, loaders.settings(), instrument_id=instrument_id, as_of=when)
    levels = {}
    for lv in budget.levels:
        summary = {"n_checks": lv.n_checks, "bias_pct": 100 * lv.bias_relative,
                   "combined_standard_uncertainty": lv.combined_standard_uncertainty,
                   "coverage_factor": lv.coverage_factor, "expanded_uncertainty": lv.expanded_uncertainty,
                   "relative_expanded_pct": 100 * lv.relative_expanded_uncertainty,
                   "first_check_at": lv.first_check_at, "last_check_at": lv.last_check_at}
        levels[round(lv.level, 3)] = {
            "summary": summary, "components": pd.DataFrame([dataclasses.asdict(c) for c in lv.components]),
            "warnings": list(lv.warnings) + list(budget.warnings), "baseline_period": budget.baseline_period}
    return {"levels": levels, "warnings": list(budget.warnings), "baseline_period": budget.baseline_period}


def uncertainty_budget(instrument_id: str, level: float, as_of: pd.Timestamp) -> dict | None:
    """The unit's GUM uncertainty budget at `level` (baseline period current at `as_of`, the
    unit's last check) from pipeline.standards.uncertainty: summary, components table and
    warnings; None if unavailable."""
    token = loaders.data_token()
    if token is None or not loaders.has_tables("checks", "check_results"):
        return None
    try:
        budget = _budget(token, instrument_id, pd.Timestamp(as_of))
    except InputError as exc:
        return {"summary": None, "components": None, "warnings": [str(exc)], "baseline_period": None}
    if budget is None:
        return None
    return budget["levels"].get(round(float(level), 3)) or {
        "summary": None, "components": None, "warnings": budget["warnings"],
        "baseline_period": budget["baseline_period"]}


def instrument_record(instrument_id: str, start: dt.date | None, end: dt.date | None):
    """Write the instrument record with pipeline.reports and return (file name, bytes, mime) or None."""
    fn = _function("pipeline.reports", "write_instrument_record")
    if fn is None or loaders.data_token() is None:
        return None
    with tempfile.TemporaryDirectory() as tmp, loaders.reader_connection() as con:
        out = Path(tmp) / f"instrument-record-{instrument_id}.html"
        written = fn(con, loaders.settings(), instrument_id, start, end, out)
        path = Path(written) if isinstance(written, (str, Path)) else out
        if not path.exists():
            produced = sorted(Path(tmp).rglob("*"))
            path = next((p for p in produced if p.is_file()), None)
            if path is None:
                return None
        mime = {".pdf": "application/pdf", ".html": "text/html", ".md": "text/markdown"}.get(
            path.suffix, "application/octet-stream")
        return path.name, path.read_bytes(), mime


def digest_preview(week: str):
    """Write this week's digest with pipeline.digest into a temporary folder and return
    a list of (file name, text or bytes); None when the digest step is not available."""
    token = loaders.data_token()
    if _function("pipeline.digest", "write_digest") is None or token is None:
        return None
    return _digest(token, week)


@st.cache_data(max_entries=16, show_spinner=False)
def _digest(token: loaders.DataToken, week: str):
    fn = _function("pipeline.digest", "write_digest")
    with tempfile.TemporaryDirectory() as tmp, loaders.reader_connection() as con:
        fn(con, loaders.settings(), week, Path(tmp))
        files = []
        for path in sorted(Path(tmp).rglob("*")):
            if path.is_file():
                data = path.read_bytes()
                try:
                    files.append((path.name, data.decode("utf-8")))
                except UnicodeDecodeError:
                    files.append((path.name, data))
        return files
