"""The fleet model: tell instrument drift from reference-lot effects.

Response: relative_error x 100 (percent) from `check_results`, checks in the window
(window_end - window_days, window_end], window_end = the latest check.

    y = lot effect (fixed) + fleet mean drift x t + depletion x d
        + unit-period intercept + unit-period drift x t (random, correlated) + residual,

t = time since the unit-period's calibration in 30-day units (period 0: since its first check
in the window), d = checks since the last wet-bath solution change / 100 (0 for dry gas),
residual variance by technology x level.

Why lots are fixed effects: a calibration sets each unit to read true on average, so the
fleet-average unit effect is zero and a fixed lot effect reads directly as that lot's bias
against its certificate, with a Wald interval from the GLS covariance; it is not shrunk
towards zero (a small new lot that is off would be hidden by shrinkage); and crossed random
lots do not factor by unit, so they are out of reach at fleet size. The between-lot variance
is reported by moments from the fixed effects.

Why it is fast: the data enter only through sufficient statistics per (unit-period, lot,
technology x level) cell, aggregated in DuckDB, and the profiled REML of pipeline.models.reml
integrates each unit-period's 2x2 block by Woodbury identities.
"""

from __future__ import annotations

import datetime as dt
import json
import re
import time
from dataclasses import asdict, dataclass, field

import duckdb
import numpy as np
import pandas as pd
from scipy import stats

from pipeline import __version__
from pipeline.db import query_df, sql_text, transaction
from pipeline.errors import InputError
from pipeline.models.diagnostics import Diagnostic, residual_diagnostics
from pipeline.models.lot_acceptance import SprtResult, run_sprt
from pipeline.models.lot_verdicts import classify_lot, verdict_since
from pipeline.models.reml import STAT_COLUMNS, RemlFit, fit_reml
from pipeline.settings import Settings


@dataclass(frozen=True)
class FleetModelResult:
    """Everything one fit produced; frames hold rows for the tables of the same name."""

    fitted_at: dt.datetime
    window_start: dt.datetime | None
    window_end: dt.datetime | None
    n_checks: int
    n_units: int
    n_lots: int
    converged: bool
    boundary: bool
    warnings: tuple[str, ...]
    parameters: dict
    duration_s: float
    lot_effects: pd.DataFrame = field(repr=False)
    unit_estimates: pd.DataFrame = field(repr=False)
    variance_components: pd.DataFrame = field(repr=False)
    diagnostics: tuple[Diagnostic, ...] = ()
    acceptance: tuple[SprtResult, ...] = ()
    fixed_effects: dict = field(default_factory=dict)


def _empty_result(settings: Settings, fitted_at: dt.datetime, started: float, message: str,
                  window: tuple = (None, None)) -> FleetModelResult:
    return FleetModelResult(
        fitted_at=fitted_at, window_start=window[0], window_end=window[1], n_checks=0, n_units=0, n_lots=0,
        converged=False, boundary=False, warnings=(message,),
        parameters={"settings": asdict(settings.model)}, duration_s=time.perf_counter() - started,
        lot_effects=pd.DataFrame(), unit_estimates=pd.DataFrame(), variance_components=pd.DataFrame(),
        diagnostics=(Diagnostic("converged", 0.0, False, message),))


def fit_fleet_model(con: duckdb.DuckDBPyConnection, settings: Settings) -> FleetModelResult:
    """Fit the fleet model on the window of checks and derive lot verdicts and unit estimates.

    Parameters:
        con: a database connection (check_results must be readable; call
            sync_standards_settings first when settings differ from the stored ones).
        settings: settings.model gives the window, verdict and acceptance rules.
    Returns:
        FleetModelResult; converged is False (with the reason in warnings) when there is no
        data or the optimiser did not converge.
    Source: profiled REML from cell sufficient statistics (pipeline.models.reml).
    """
    started = time.perf_counter()
    ms = settings.model
    fitted_at = dt.datetime.now(dt.UTC).replace(tzinfo=None, microsecond=0)
    end = query_df(con, "queries/model_window_end")["window_end"].iloc[0]
    if pd.isna(end):
        return _empty_result(settings, fitted_at, started, "no checks with a relative error: nothing to fit")
    window_end = pd.Timestamp(end).to_pydatetime()
    window_start = window_end - dt.timedelta(days=ms.window_days)
    previous_limit = con.execute("SELECT current_setting('memory_limit')").fetchone()[0]
    if ms.duckdb_memory_limit:
        _set_memory_limit(con, ms.duckdb_memory_limit)
    try:
        con.execute(sql_text("queries/model_base"), {"window_start": window_start, "window_end": window_end})
    finally:
        _set_memory_limit(con, previous_limit)
    sql_s = time.perf_counter() - started
    try:
        result = _fit_window(con, settings, fitted_at, started, window_start, window_end)
        result.parameters.setdefault("timings_s", {})["check_results_to_model_base"] = sql_s
        return result
    finally:
        con.execute("DROP TABLE IF EXISTS model_base")


def _fit_window(con, settings: Settings, fitted_at, started, window_start, window_end) -> FleetModelResult:
    ms = settings.model
    cells = query_df(con, "queries/model_cells")
    if cells.empty:
        return _empty_result(settings, fitted_at, started, "no checks in the window", (window_start, window_end))
    cells["subject"], subjects = pd.factorize(
        pd.MultiIndex.from_arrays([cells["instrument_id"], cells["baseline_period"]]), sort=True)
    cells["lot"], lot_ids = pd.factorize(cells["lot_id"], sort=True)
    cells["group"], groups = pd.factorize(cells["residual_group"], sort=True)
    for col in STAT_COLUMNS:
        cells[col] = cells[col].astype(float)
    has_d = bool((cells["sdd"] > 0).any())
    reml_started = time.perf_counter()
    fit = fit_reml(cells, n_lots=len(lot_ids), n_subjects=len(subjects), n_groups=len(groups),
                   fixed_t=True, fixed_d=has_d, random_slope=True, lot_names=tuple(lot_ids),
                   theta0=_previous_theta(con, list(map(str, groups))))
    reml_s = time.perf_counter() - reml_started
    n_checks = int(cells["n"].sum())
    fixed = {name: float(v) for name, v in zip(fit.fixed_names, fit.fixed)}
    params = {
        "settings": asdict(ms),
        "response": "100 * relative_error (percent)",
        "time_unit_days": 30, "depletion_unit_checks": 100,
        "fixed_slope_t_pct_per_30d": fixed.get("t"), "fixed_slope_d_pct_per_100_checks": fixed.get("d"),
        "fixed_se": {name: float(np.sqrt(v)) for name, v in zip(fit.fixed_names[len(lot_ids):],
                                                                np.diag(fit.fixed_cov)[len(lot_ids):])},
        "theta": [float(x) for x in fit.theta], "neg2_reml": fit.neg2_reml, "iterations": fit.iterations,
        "residual_groups": list(map(str, groups)), "n_cells": int(len(cells)),
        "timings_s": {"reml": reml_s},
    }
    variance = _variance_components(fit, groups, cells, lot_ids)
    diags = [Diagnostic("converged", float(fit.converged), fit.converged,
                        "the REML optimiser converged" if fit.converged else
                        "the REML optimiser did not converge: the fit failed and its estimates are not used"),
             Diagnostic("boundary", float(fit.boundary), not fit.boundary,
                        "a random-effect variance or correlation is at its limit (zero)" if fit.boundary else
                        "no variance component at its limit"),
             Diagnostic("warnings", float(len(fit.warnings)), not fit.warnings,
                        "; ".join(fit.warnings) if fit.warnings else "no warnings during the fit")]
    if not fit.converged:
        return FleetModelResult(
            fitted_at=fitted_at, window_start=window_start, window_end=window_end, n_checks=n_checks,
            n_units=len(subjects), n_lots=len(lot_ids), converged=False, boundary=fit.boundary,
            warnings=fit.warnings, parameters=params, duration_s=time.perf_counter() - started,
            lot_effects=pd.DataFrame(), unit_estimates=pd.DataFrame(), variance_components=variance,
            diagnostics=tuple(diags), fixed_effects=fixed)
    lots = _lot_effects(fit, cells, lot_ids, ms)
    units = _unit_estimates(fit, cells, subjects, ms)
    sample = query_df(con, "queries/model_sample", share=min(1.0, ms.diagnostics_sample / max(n_checks, 1)))
    adj, var = _adjust(sample, fit, subjects, lot_ids, groups, include_lot=True)
    z = adj / np.sqrt(np.asarray(fit.residual_var)[sample["residual_group"].map(
        {g: i for i, g in enumerate(groups)}).to_numpy()])
    days = (pd.to_datetime(sample["measured_at"]) - window_start).dt.total_seconds().to_numpy() / 86400.0
    diags.extend(residual_diagnostics(z, days))
    acceptance = _acceptance(con, fit, subjects, lot_ids, groups, ms, window_end)
    return FleetModelResult(
        fitted_at=fitted_at, window_start=window_start, window_end=window_end, n_checks=n_checks,
        n_units=len(subjects), n_lots=len(lot_ids), converged=True, boundary=fit.boundary,
        warnings=fit.warnings, parameters=params, duration_s=time.perf_counter() - started,
        lot_effects=lots, unit_estimates=units, variance_components=variance, diagnostics=tuple(diags),
        acceptance=acceptance, fixed_effects=fixed)


_MEMORY = re.compile(r"^\d+(\.\d+)?\s*(B|KB|MB|GB|TB|KiB|MiB|GiB|TiB)$")


def _set_memory_limit(con, limit: str) -> None:
    """SET takes no bound parameters, so the value is checked against a strict pattern first."""
    if not _MEMORY.match(limit.strip()):
        raise InputError(f"model.duckdb_memory_limit must look like '2GB', got {limit!r}")
    con.execute(f"SET memory_limit = '{limit.strip()}'")


def _previous_theta(con, groups: list[str]) -> np.ndarray | None:
    """Theta of the latest converged fit with the same residual groups: a warm start for the optimiser."""
    row = con.execute("SELECT parameters FROM model_fits WHERE converged ORDER BY fit_id DESC LIMIT 1").fetchone()
    if row is None:
        return None
    try:
        params = json.loads(row[0])
    except (TypeError, ValueError):
        return None
    if params.get("residual_groups") != groups or "theta" not in params:
        return None
    return np.asarray(params["theta"], float)


def _z(ms) -> float:
    return float(stats.norm.ppf(0.5 + ms.confidence / 2.0))


def _lot_effects(fit: RemlFit, cells: pd.DataFrame, lot_ids, ms) -> pd.DataFrame:
    K = len(lot_ids)
    se = np.sqrt(np.diag(fit.fixed_cov)[:K])
    eff = fit.fixed[:K]
    z = _z(ms)
    per_lot = cells.groupby("lot_id").agg(standard_kind=("standard_kind", "first"), n_checks=("n", "sum"),
                                          n_units=("instrument_id", "nunique"))
    frame = pd.DataFrame({"lot_id": list(lot_ids), "effect_pct": eff, "ci_low_pct": eff - z * se,
                          "ci_high_pct": eff + z * se, "se_pct": se})
    frame = frame.join(per_lot, on="lot_id")
    frame["n_checks"] = frame["n_checks"].astype("int64")
    frame["verdict"] = [classify_lot(e, lo, hi, ms) for e, lo, hi in
                        zip(frame["effect_pct"], frame["ci_low_pct"], frame["ci_high_pct"])]
    return frame


def _unit_estimates(fit: RemlFit, cells: pd.DataFrame, subjects, ms) -> pd.DataFrame:
    per = cells.groupby("subject").agg(t_ref=("t_max", "max"), last_check_at=("last_check_at", "max"),
                                       n_checks=("n", "sum")).sort_index()
    t = per["t_ref"].to_numpy(float)
    ti = fit.fixed_names.index("t")
    beta_t, var_bt = fit.fixed[ti], fit.fixed_cov[ti, ti]
    b, cv = fit.blup, fit.blup_cov
    bias = b[:, 0] + (beta_t + b[:, 1]) * t
    var_bias = cv[:, 0, 0] + 2 * t * cv[:, 0, 1] + t * t * cv[:, 1, 1] + t * t * var_bt
    drift = beta_t + b[:, 1]
    var_drift = cv[:, 1, 1] + var_bt
    cov_bd = cv[:, 0, 1] + t * cv[:, 1, 1] + t * var_bt
    z = _z(ms)
    sq = bias**2
    return pd.DataFrame({
        "instrument_id": [s[0] for s in subjects], "baseline_period": [int(s[1]) for s in subjects],
        "bias_pct": bias, "bias_ci_low_pct": bias - z * np.sqrt(var_bias),
        "bias_ci_high_pct": bias + z * np.sqrt(var_bias), "drift_pct_per_30d": drift,
        "drift_ci_low": drift - z * np.sqrt(var_drift), "drift_ci_high": drift + z * np.sqrt(var_drift),
        "bias_drift_cov": cov_bd, "reference_at": per["last_check_at"].to_numpy(),
        "variance_share": sq / sq.sum() if sq.sum() > 0 else np.zeros_like(sq),
        "n_checks": per["n_checks"].to_numpy().astype("int64"), "last_check_at": per["last_check_at"].to_numpy(),
    })


def _variance_components(fit: RemlFit, groups, cells: pd.DataFrame, lot_ids) -> pd.DataFrame:
    rows = [("between_units_intercept", fit.cov_re[0, 0], None, None),
            ("unit_drift_per_30d", fit.cov_re[1, 1], None, None),
            ("unit_intercept_drift_cov", fit.cov_re[0, 1], None, None)]
    n_group = cells.groupby("group")["n"].sum().sort_index().to_numpy()
    for g, (name, v) in enumerate(zip(groups, fit.residual_var)):
        nu = max(float(n_group[g]) - 1.0, 1.0)   # chi-square interval, dof ~ checks in the group
        rows.append((f"repeatability {name}", v, nu * v / stats.chi2.ppf(0.975, nu),
                     nu * v / stats.chi2.ppf(0.025, nu)))
    K = len(lot_ids)
    if K > 1:
        eff = fit.fixed[:K]
        se2 = np.diag(fit.fixed_cov)[:K]
        # Moment estimate: spread of the lot effects minus their average sampling variance.
        rows.append(("between_lots", max(float(np.var(eff, ddof=1) - se2.mean()), 0.0), None, None))
    return pd.DataFrame(rows, columns=["component", "variance", "ci_low", "ci_high"])


def _adjust(frame: pd.DataFrame, fit: RemlFit, subjects, lot_ids, groups, *, include_lot: bool):
    """Errors minus fixed drift, depletion, the unit's BLUP (and the lot effect); with the unit-bias variance."""
    names = fit.fixed_names
    beta_t = fit.fixed[names.index("t")]
    beta_d = fit.fixed[names.index("d")] if "d" in names else 0.0
    index = pd.MultiIndex.from_arrays([frame["instrument_id"], frame["baseline_period"]])
    pos = subjects.get_indexer(index)
    known = pos >= 0
    safe = np.where(known, pos, 0)
    t = frame["t"].to_numpy(float)
    b0 = np.where(known, fit.blup[safe, 0], 0.0)
    b1 = np.where(known, fit.blup[safe, 1], 0.0)
    cv = fit.blup_cov[safe]
    unit_var = np.where(known, cv[:, 0, 0] + 2 * t * cv[:, 0, 1] + t * t * cv[:, 1, 1],
                        fit.cov_re[0, 0] + 2 * t * fit.cov_re[0, 1] + t * t * fit.cov_re[1, 1])
    adj = frame["y"].to_numpy(float) - beta_t * t - beta_d * frame["d"].to_numpy(float) - b0 - b1 * t
    if include_lot:
        lot_pos = pd.Index(lot_ids).get_indexer(frame["lot_id"])
        adj = adj - np.where(lot_pos >= 0, fit.fixed[np.maximum(lot_pos, 0)], 0.0)
    return adj, unit_var


def _acceptance(con, fit: RemlFit, subjects, lot_ids, groups, ms, window_end) -> tuple[SprtResult, ...]:
    first = query_df(con, "queries/model_lot_first_checks", max_checks=int(ms.acceptance_max_checks))
    if first.empty:
        return ()
    adj, unit_var = _adjust(first, fit, subjects, lot_ids, groups, include_lot=False)
    gpos = pd.Index(groups).get_indexer(first["residual_group"])
    resid = np.where(gpos >= 0, fit.residual_var[np.maximum(gpos, 0)], float(np.max(fit.residual_var)))
    first = first.assign(x=adj, v=resid + unit_var)
    out = []
    for lot_id, rows in first.groupby("lot_id", sort=True):
        out.append(run_sprt(str(lot_id), rows["x"].to_numpy(), rows["v"].to_numpy(),
                            rows["measured_at"].reset_index(drop=True), delta=ms.acceptance_delta_pct,
                            alpha=ms.acceptance_alpha, beta=ms.acceptance_beta))
    return tuple(out)


def store_fleet_model(con: duckdb.DuckDBPyConnection, result: FleetModelResult) -> int:
    """Write one fit into model_fits, lot_effects, unit_estimates, variance_components,
    model_diagnostics and lot_acceptance in one transaction; returns the new fit_id.

    A failed fit (converged False) is stored in model_fits and model_diagnostics only, so the
    dashboard and digest show the failure instead of stale or untrustworthy estimates.
    """
    with transaction(con):
        fit_id = int(con.execute("SELECT coalesce(max(fit_id), 0) + 1 FROM model_fits").fetchone()[0])
        con.execute(
            "INSERT INTO model_fits VALUES ($fit_id, $fitted_at, $ws, $we, $n_checks, $n_units, $n_lots, "
            "$converged, $boundary, $warnings, $parameters, $software_version, $duration_s)",
            {"fit_id": fit_id, "fitted_at": result.fitted_at,
             "ws": result.window_start or result.fitted_at, "we": result.window_end or result.fitted_at,
             "n_checks": result.n_checks, "n_units": result.n_units, "n_lots": result.n_lots,
             "converged": result.converged, "boundary": result.boundary,
             "warnings": json.dumps(list(result.warnings)),
             "parameters": json.dumps(result.parameters, default=str),
             "software_version": __version__, "duration_s": result.duration_s})
        for d in result.diagnostics:
            con.execute("INSERT INTO model_diagnostics VALUES ($f, $d, $v, $p, $m)",
                        {"f": fit_id, "d": d.diagnostic, "v": None if d.value is None or not np.isfinite(d.value)
                         else float(d.value), "p": bool(d.passed), "m": d.message})
        if not result.variance_components.empty:
            vc = result.variance_components.assign(fit_id=fit_id)
            con.register("_vc", vc)
            con.execute("INSERT INTO variance_components SELECT fit_id, component, variance, ci_low, ci_high FROM _vc")
            con.unregister("_vc")
        if not result.converged:
            return fit_id
        previous = query_df(con, "queries/model_previous_verdicts", fit_id=fit_id)
        prev = {r.lot_id: (r.verdict, None if pd.isna(r.verdict_since) else pd.Timestamp(r.verdict_since).date())
                for r in previous.itertuples()}
        fit_date = pd.Timestamp(result.window_end).date()
        lots = result.lot_effects.assign(fit_id=fit_id)
        lots["verdict_since"] = [verdict_since(v, fit_date, prev.get(lot))
                                 for lot, v in zip(lots["lot_id"], lots["verdict"])]
        con.register("_lots", lots)
        con.execute("INSERT INTO lot_effects SELECT fit_id, lot_id, standard_kind, effect_pct, ci_low_pct, "
                    "ci_high_pct, n_units, n_checks, verdict, verdict_since FROM _lots")
        con.unregister("_lots")
        units = result.unit_estimates.assign(fit_id=fit_id)
        con.register("_units", units)
        con.execute("INSERT INTO unit_estimates SELECT fit_id, instrument_id, baseline_period, bias_pct, "
                    "bias_ci_low_pct, bias_ci_high_pct, drift_pct_per_30d, drift_ci_low, drift_ci_high, "
                    "bias_drift_cov, reference_at, variance_share, n_checks, last_check_at FROM _units")
        con.unregister("_units")
        con.execute("DELETE FROM lot_acceptance")
        for a in result.acceptance:
            con.execute("INSERT INTO lot_acceptance VALUES ($lot, $state, $at, $n, $stat, $params)",
                        {"lot": a.lot_id, "state": a.state,
                         "at": None if a.decided_at is None else a.decided_at.to_pydatetime(),
                         "n": a.n_checks, "stat": a.statistic,
                         "params": json.dumps({"rule": "Wald SPRT (1945), two-sided", "delta_pct": a.delta_pct,
                                               "alpha": a.alpha, "beta": a.beta, "upper": a.upper_bound,
                                               "lower": a.lower_bound, "fit_id": fit_id})})
    return fit_id
