"""Linearity of a multi-level verification: slope and intercept of measured vs expected.

Ordinary least squares per verification session (verification checks of one unit, successive
times at most `window_minutes` apart, at >= 3 checks and >= 2 levels), computed for all sessions
at once from grouped sums. t intervals with n - 2 degrees of freedom. Proportional bias: the slope
interval excludes 1. Constant bias: the intercept interval excludes 0.

Source: Draper & Smith, Applied Regression Analysis, ch. 1 (simple linear regression intervals);
CLSI EP06 for the linearity use of a calibration line.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.stats import t as t_dist


def verification_sessions(frame: pd.DataFrame, window_minutes: float = 60.0) -> pd.Series:
    """Session number per row (instrument_id, measured_at) of verification checks."""
    f = frame.sort_values(["instrument_id", "measured_at"], kind="stable")
    same = ((f["instrument_id"] == f["instrument_id"].shift())
            & ((f["measured_at"] - f["measured_at"].shift()) <= pd.Timedelta(minutes=window_minutes)))
    return (~same).cumsum().reindex(frame.index)


def fit_linearity(frame: pd.DataFrame, window_minutes: float = 60.0, confidence: float = 0.95) -> pd.DataFrame:
    """Slope, intercept, intervals and bias flags per verification session.

    frame columns: instrument_id, measured_at, expected, measured (g/210L), level.
    Returns one row per session with >= 3 checks at >= 2 levels.
    """
    cols = ["instrument_id", "started_at", "ended_at", "n_checks", "n_levels", "slope", "slope_low", "slope_high",
            "intercept", "intercept_low", "intercept_high", "residual_sd", "proportional_bias", "constant_bias"]
    if frame.empty:
        return pd.DataFrame(columns=cols)
    s = verification_sessions(frame, window_minutes)
    x, y = frame["expected"].to_numpy(float), frame["measured"].to_numpy(float)
    d = pd.DataFrame({"g": s.to_numpy(), "x": x, "y": y, "xx": x * x, "xy": x * y, "yy": y * y,
                      "instrument_id": frame["instrument_id"].to_numpy(), "t": frame["measured_at"].to_numpy(),
                      "level": frame["level"].to_numpy()})
    a = d.groupby("g").agg(instrument_id=("instrument_id", "first"), started_at=("t", "min"), ended_at=("t", "max"),
                           n_checks=("x", "size"), n_levels=("level", "nunique"), sx=("x", "sum"), sy=("y", "sum"),
                           sxx=("xx", "sum"), sxy=("xy", "sum"), syy=("yy", "sum"))
    a = a[(a["n_checks"] >= 3) & (a["n_levels"] >= 2)].reset_index(drop=True)
    n = a["n_checks"].to_numpy(float)
    sxx = a["sxx"] - a["sx"] ** 2 / n
    sxy = a["sxy"] - a["sx"] * a["sy"] / n
    syy = a["syy"] - a["sy"] ** 2 / n
    slope = sxy / sxx
    intercept = (a["sy"] - slope * a["sx"]) / n
    sse = np.maximum(syy - slope * sxy, 0.0)
    s2 = sse / np.maximum(n - 2, 1)
    se_b = np.sqrt(s2 / sxx)
    se_a = np.sqrt(s2 * (1 / n + (a["sx"] / n) ** 2 / sxx))
    tq = t_dist.ppf(0.5 + confidence / 2, np.maximum(n - 2, 1))
    out = a[["instrument_id", "started_at", "ended_at", "n_checks", "n_levels"]].copy()
    out["slope"], out["slope_low"], out["slope_high"] = slope, slope - tq * se_b, slope + tq * se_b
    out["intercept"], out["intercept_low"], out["intercept_high"] = intercept, intercept - tq * se_a, intercept + tq * se_a
    out["residual_sd"] = np.sqrt(s2)
    out["proportional_bias"] = (out["slope_low"] > 1) | (out["slope_high"] < 1)
    out["constant_bias"] = (out["intercept_low"] > 0) | (out["intercept_high"] < 0)
    return out[cols]
