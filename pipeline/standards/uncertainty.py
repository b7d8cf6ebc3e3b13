"""Measurement uncertainty budget of one instrument, per level, in its current baseline period.

Measurement model for a single result R of this unit at a level, corrected for the unit's
estimated bias:  Y = R - B + e_rep + e_res,  with B = mean(measured - expected) over the
unit's usable checks in the baseline period current at `as_of`. Inputs (uncorrelated):

- lot certificate: u = U_lot / 2 (k = 2 certificate), scaled by the correction factor; it
  enters through B, because every expected value carries the lot's error. Systematic, so it
  is not divided by sqrt(n).
- repeatability: s of (measured - expected), for a SINGLE result R (not the mean).
- bias estimate: s / sqrt(n), the standard uncertainty of the mean error B.
- resolution: results are reported in steps of 0.001 g/210L; the unknown remainder is
  rectangular of half-width 0.0005, u = 0.0005 / sqrt(3).
- truncation: truncating (not rounding) reads on average 0.0005 low. This -0.0005 bias is
  reported, not added as a separate correction: the checks are truncated the same way, so B
  already contains it and R - B removes it (bias_excluding_truncation shows B without it).
- simulator temperature (wet bath) or barometric pressure (dry gas, where scaled): the
  uncertainty of the correction input times its sensitivity dE/dT = c E or dE/dP = E / P.
  Systematic; not divided by sqrt(n). Without temperature correction the whole window
  (rectangular) counts instead.

Source: JCGM 100:2008 (GUM) 4.2, 4.3.7, 5.1.2, 6.2; Dubowski (1979) for dE/dT.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

import duckdb
import numpy as np
import pandas as pd

from pipeline import __version__
from pipeline.db import query_df
from pipeline.errors import InputError
from pipeline.settings import Settings
from pipeline.standards.expected_values import ISA_SEA_LEVEL_KPA
from pipeline.standards.gum import (UncertaintyComponent, combined_standard_uncertainty,
                                    effective_degrees_of_freedom, expanded_uncertainty, make_component,
                                    normal_u_from_expanded, rectangular_u)
from pipeline.standards.parameters import sync_standards_settings

COVERAGE_FACTOR = 2.0


@dataclass(frozen=True)
class LevelBudget:
    """The uncertainty budget of one instrument at one level (all values in g/210L)."""

    level: float
    standard_kind: str
    correction_method: str
    n_checks: int
    first_check_at: datetime
    last_check_at: datetime
    mean_expected: float
    bias: float                         # mean(measured - expected), includes the truncation bias
    bias_relative: float                # bias / mean_expected
    bias_standard_uncertainty: float    # sqrt(s^2/n + u_lot^2 + u_correction^2)
    truncation_bias: float              # -0.0005 when results are truncated, else 0
    bias_excluding_truncation: float    # bias - truncation_bias
    repeatability_sd: float             # s, for a single result
    components: tuple[UncertaintyComponent, ...]
    combined_standard_uncertainty: float
    coverage_factor: float
    expanded_uncertainty: float
    relative_expanded_uncertainty: float
    effective_degrees_of_freedom: float
    lots: tuple[str, ...]
    warnings: tuple[str, ...]


@dataclass(frozen=True)
class UncertaintyBudget:
    """Budgets of one instrument at every level it was checked at in its current baseline period."""

    instrument_id: str
    as_of: datetime
    baseline_period: int
    baseline_started_at: datetime | None
    levels: tuple[LevelBudget, ...]
    data_start: datetime | None
    data_end: datetime | None
    parameters: dict[str, Any] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    software_version: str = __version__


def budget_from_checks(checks: pd.DataFrame, settings: Settings, *, instrument_id: str,
                       as_of: datetime) -> UncertaintyBudget:
    """Build the budget from the rows of queries/standards_budget_checks (pure function).

    Parameters:
        checks: one row per usable check (columns of standards_budget_checks).
        settings: the standards section supplies resolution, truncation and input uncertainties.
        instrument_id, as_of: recorded with the result.

    Returns:
        UncertaintyBudget with one LevelBudget per level that has at least two checks.
    """
    std = settings.standards
    half_step = std.result_resolution / 2.0
    params = {
        "coverage_factor": COVERAGE_FACTOR,
        "result_resolution": std.result_resolution,
        "results_truncated": std.results_truncated,
        "simulator_thermometer_u_c": std.simulator_thermometer_u_c,
        "simulator_window_c": std.simulator_window_c,
        "wet_bath_temperature_coefficient": std.wet_bath_temperature_coefficient,
        "barometer_u_kpa": std.barometer_u_kpa,
        "elevation_pressure_u_kpa": std.elevation_pressure_u_kpa,
        "repeatability": "standard deviation of a single result",
        "bias_uncertainty": "s/sqrt(n) for the mean error, plus lot certificate and correction inputs",
        "excluded_checks": "lot_expired, lot_wrong_kind, lot_before_certified, temp_out_of_window, "
                           "outcome aborted or invalid",
    }
    levels: list[LevelBudget] = []
    warnings: list[str] = []
    for level, group in checks.groupby("level", sort=True):
        n = len(group)
        if n < 2:
            warnings.append(f"level {level:.3f}: only {n} usable check; no repeatability, no budget")
            continue
        levels.append(_level_budget(float(level), group, std, half_step))
    if not levels and not warnings:
        warnings.append("no usable checks in the current baseline period")
    first = checks["baseline_period"].iloc[0] if len(checks) else 0
    started = checks["baseline_started_at"].iloc[0] if len(checks) else None
    return UncertaintyBudget(
        instrument_id=instrument_id, as_of=as_of, baseline_period=int(first),
        baseline_started_at=None if started is None or pd.isna(started) else pd.Timestamp(started).to_pydatetime(),
        levels=tuple(levels),
        data_start=pd.Timestamp(checks["measured_at"].min()).to_pydatetime() if len(checks) else None,
        data_end=pd.Timestamp(checks["measured_at"].max()).to_pydatetime() if len(checks) else None,
        parameters=params, warnings=tuple(warnings))


def _level_budget(level: float, group: pd.DataFrame, std, half_step: float) -> LevelBudget:
    warnings: list[str] = []
    errors = group["error"].to_numpy(dtype=float)
    n = len(errors)
    s = float(np.std(errors, ddof=1))
    bias = float(np.mean(errors))
    mean_expected = float(group["expected"].mean())
    kinds = group["standard_kind"].value_counts()
    kind = str(kinds.index[0])
    methods = group["correction_method"].value_counts()
    method = str(methods.index[0])
    if len(methods) > 1:
        warnings.append(f"level {level:.3f}: mixed corrections {dict(methods)}; budget uses '{method}'")

    lot_u = group["lot_expanded_uncertainty"].to_numpy(dtype=float)
    factors = group["correction_factor"].to_numpy(dtype=float)
    known = ~np.isnan(lot_u)
    if not known.all():
        missing = sorted(set(group.loc[~known, "lot_id"]))
        warnings.append(f"level {level:.3f}: lots {', '.join(missing)} carry no expanded uncertainty; "
                        "their certificate component is left out")
    u_lot = float(np.sqrt(np.mean((normal_u_from_expanded(lot_u[known]) * factors[known]) ** 2))) if known.any() else 0.0

    components = [
        make_component("lot_certificate", u_lot, evaluation="B", distribution="normal",
                       description="lot certificate U/2 (k=2), root mean square over the checks' lots"),
        make_component("repeatability", s, evaluation="A", degrees_of_freedom=n - 1,
                       description="standard deviation s of measured - expected, for a single result"),
        make_component("bias_estimate", s / math.sqrt(n), evaluation="A", degrees_of_freedom=n - 1,
                       description="s / sqrt(n): standard uncertainty of the mean error (the bias)"),
        make_component("resolution", rectangular_u(half_step), evaluation="B", distribution="rectangular",
                       description=f"reported in steps of {std.result_resolution:g}: rectangular a/sqrt(3)"),
    ]
    u_corr_contribution = 0.0
    if kind == "wet_bath":
        sensitivity = std.wet_bath_temperature_coefficient * mean_expected
        if method == "wet_bath_temperature":
            comp = make_component("simulator_temperature", std.simulator_thermometer_u_c, sensitivity=sensitivity,
                                  description="logged simulator temperature (thermometer), dE/dT = c E")
        else:
            comp = make_component("simulator_temperature", rectangular_u(std.simulator_window_c),
                                  sensitivity=sensitivity, distribution="rectangular",
                                  description="temperature not corrected: the whole window, rectangular")
        components.append(comp)
        u_corr_contribution = comp.contribution
    elif kind == "dry_gas" and method in ("dry_gas_pressure_logged", "dry_gas_pressure_elevation"):
        pressure = float(np.mean(factors)) * ISA_SEA_LEVEL_KPA
        u_p = std.barometer_u_kpa if method == "dry_gas_pressure_logged" else std.elevation_pressure_u_kpa
        comp = make_component("barometric_pressure", u_p, sensitivity=mean_expected / pressure,
                              description=("logged barometric pressure" if method == "dry_gas_pressure_logged"
                                           else "pressure from site elevation (standard atmosphere)")
                              + ", dE/dP = E / P")
        components.append(comp)
        u_corr_contribution = comp.contribution
    if n < 10:
        warnings.append(f"level {level:.3f}: only {n} checks; s is poorly determined")

    uc = combined_standard_uncertainty(components)
    expanded = expanded_uncertainty(uc, COVERAGE_FACTOR)
    trunc = -half_step if std.results_truncated else 0.0
    return LevelBudget(
        level=level, standard_kind=kind, correction_method=method, n_checks=n,
        first_check_at=pd.Timestamp(group["measured_at"].min()).to_pydatetime(),
        last_check_at=pd.Timestamp(group["measured_at"].max()).to_pydatetime(),
        mean_expected=mean_expected, bias=bias, bias_relative=bias / mean_expected,
        bias_standard_uncertainty=math.sqrt(s * s / n + u_lot ** 2 + u_corr_contribution ** 2),
        truncation_bias=trunc, bias_excluding_truncation=bias - trunc, repeatability_sd=s,
        components=tuple(components), combined_standard_uncertainty=uc,
        coverage_factor=COVERAGE_FACTOR, expanded_uncertainty=expanded,
        relative_expanded_uncertainty=expanded / mean_expected,
        effective_degrees_of_freedom=effective_degrees_of_freedom(components),
        lots=tuple(sorted(set(group["lot_id"]))), warnings=tuple(warnings))


def compute_uncertainty_budget(con: duckdb.DuckDBPyConnection, settings: Settings, instrument_id: str,
                               as_of: datetime | None = None, *, sync: bool = False) -> UncertaintyBudget:
    """Load an instrument's usable checks in the baseline period current at `as_of` and build its budget.

    Parameters:
        con: a database connection (a reader's snapshot is fine unless sync=True).
        settings: program settings.
        instrument_id: the unit.
        as_of: UTC time; default the unit's last check.
        sync: write the standards settings into the database first (writers only).

    Raises:
        InputError: the instrument is unknown or has no checks.
    """
    if sync:
        sync_standards_settings(con, settings)
    known = con.execute("SELECT max(measured_at) FROM checks WHERE instrument_id = $id",
                        {"id": instrument_id}).fetchone()
    exists = con.execute("SELECT count(*) FROM instruments WHERE instrument_id = $id",
                         {"id": instrument_id}).fetchone()[0]
    if not exists and known[0] is None:
        raise InputError(f"no instrument '{instrument_id}' in the database; check the serial number")
    if known[0] is None:
        raise InputError(f"instrument '{instrument_id}' has no checks yet; nothing to build a budget from")
    as_of = as_of or known[0]
    checks = query_df(con, "queries/standards_budget_checks", instrument_id=instrument_id, as_of=as_of)
    return budget_from_checks(checks, settings, instrument_id=instrument_id, as_of=as_of)
