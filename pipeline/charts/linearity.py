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


def verification_sessions(frame: pd.DataFrame, window_minutes: float = 60.0) -> tuple[np.ndarray, np.ndarray]:
    """Rows of verification checks (instrument_id, measured_at) in (unit, time) order, and the
    session number (0, 1, ...) of each: a unit's checks at most `window_minutes` after the previous one."""
    unit = frame["instrument_id"]
    codes = unit.cat.codes.to_numpy() if isinstance(unit.dtype, pd.CategoricalDtype) else \
        pd.factorize(unit, sort=True)[0]
    t = frame["measured_at"].to_numpy(dtype="datetime64[ns]").view(np.int64)
    order = np.lexsort((t, codes))
    codes, t = codes[order], t[order]
    same = (codes[1:] == codes[:-1]) & (np.diff(t) <= int(window_minutes * 60e9))
    return order, np.cumsum(np.r_[True, ~same]) - 1


def fit_linearity(frame: pd.DataFrame, window_minutes: float = 60.0, confidence: float = 0.95) -> pd.DataFrame:
    """Slope, intercept, intervals and bias flags per verification session.

    frame columns: instrument_id, measured_at, expected, measured (g/210L), level.
    Returns one row per session with >= 3 checks at >= 2 levels.
    """
    cols = ["instrument_id", "started_at", "ended_at", "n_checks", "n_levels", "slope", "slope_low", "slope_high",
            "intercept", "intercept_low", "intercept_high", "residual_sd", "proportional_bias", "constant_bias"]
    if frame.empty:
        return pd.DataFrame(columns=cols)
    order, g = verification_sessions(frame, window_minutes)
    x, y = frame["expected"].to_numpy(float)[order], frame["measured"].to_numpy(float)[order]
    level = frame["level"].to_numpy(float)[order]
    # Grouped sums of the sorted rows (each session's rows are contiguous and in time order).
    n = np.bincount(g).astype(float)
    sx, sy = np.bincount(g, x), np.bincount(g, y)
    sxx_raw, sxy_raw, syy_raw = np.bincount(g, x * x), np.bincount(g, x * y), np.bincount(g, y * y)
    by_level = np.lexsort((level, g))
    new_level = np.r_[True, (g[by_level][1:] != g[by_level][:-1]) | (level[by_level][1:] != level[by_level][:-1])]
    n_levels = np.bincount(g[by_level][new_level], minlength=len(n))
    first = np.flatnonzero(np.r_[True, g[1:] != g[:-1]])
    last = np.r_[first[1:], len(g)] - 1
    fit = np.flatnonzero((n >= 3) & (n_levels >= 2))
    n, sx, sy = n[fit], sx[fit], sy[fit]
    sxx = sxx_raw[fit] - sx ** 2 / n
    sxy = sxy_raw[fit] - sx * sy / n
    syy = syy_raw[fit] - sy ** 2 / n
    slope = sxy / sxx
    intercept = (sy - slope * sx) / n
    sse = np.maximum(syy - slope * sxy, 0.0)
    s2 = sse / np.maximum(n - 2, 1)
    se_b = np.sqrt(s2 / sxx)
    se_a = np.sqrt(s2 * (1 / n + (sx / n) ** 2 / sxx))
    tq = t_dist.ppf(0.5 + confidence / 2, np.maximum(n - 2, 1))
    when = frame["measured_at"].to_numpy()[order]
    out = pd.DataFrame({"instrument_id": frame["instrument_id"].take(order[first[fit]]).to_numpy(),
                        "started_at": when[first[fit]], "ended_at": when[last[fit]],
                        "n_checks": n.astype(np.int64), "n_levels": n_levels[fit]})
    out["slope"], out["slope_low"], out["slope_high"] = slope, slope - tq * se_b, slope + tq * se_b
    out["intercept"], out["intercept_low"], out["intercept_high"] = intercept, intercept - tq * se_a, intercept + tq * se_a
    out["residual_sd"] = np.sqrt(s2)
    out["proportional_bias"] = (out["slope_low"] > 1) | (out["slope_high"] < 1)
    out["constant_bias"] = (out["intercept_low"] > 0) | (out["intercept_high"] < 0)
    return out[cols]
