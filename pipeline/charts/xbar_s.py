"""X-bar and S charts for replicate checks (verification duplicates), on standardised values.

A replicate group is a run of checks of one unit, level and check type whose successive times
are at most `window_minutes` apart. With standardised values (sigma 1, centre 0) the X-bar limits
are +/- 3 / sqrt(n) and the S limits B5 = max(0, c4 - 3 sqrt(1 - c4^2)), B6 = c4 + 3 sqrt(1 - c4^2)
(sigma known), for each group's own size n.

Source: Montgomery, Introduction to Statistical Quality Control, 6.3 (X-bar and S, sigma known);
c4 from pipeline.charts.constants.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from pipeline.charts.constants import c4 as c4_of


def _codes(values: pd.Series) -> np.ndarray:
    if isinstance(values.dtype, pd.CategoricalDtype):
        return values.cat.codes.to_numpy()
    return pd.factorize(values, sort=True)[0]


def replicate_groups(frame: pd.DataFrame, window_minutes: float) -> tuple[np.ndarray, np.ndarray]:
    """Rows in (unit, level, check type, time) order and the replicate-group number of each."""
    t = frame["measured_at"].to_numpy(dtype="datetime64[ns]").astype(np.int64)
    inst, ctype = _codes(frame["instrument_id"]), _codes(frame["check_type"])
    level = frame["level"].to_numpy(dtype=float)
    order = np.lexsort((t, ctype, level, inst))
    t, inst, ctype, level = t[order], inst[order], ctype[order], level[order]
    same = np.zeros(len(order), dtype=bool)
    same[1:] = ((inst[1:] == inst[:-1]) & (level[1:] == level[:-1]) & (ctype[1:] == ctype[:-1])
                & (np.diff(t) <= int(window_minutes * 60e9)))
    return order, np.cumsum(~same) - 1


def xbar_s_groups(frame: pd.DataFrame, window_minutes: float = 10.0) -> pd.DataFrame:
    """One row per replicate group with >= 2 checks: mean and SD of z, limits and out-of-limit flags.

    frame columns: check_id, instrument_id, level, check_type, measured_at, z.
    """
    columns = ["instrument_id", "level", "check_type", "check_id", "measured_at", "n",
               "xbar", "s", "xbar_lcl", "xbar_ucl", "s_lcl", "s_ucl"]
    if frame.empty:
        return pd.DataFrame(columns=columns)
    order, g = replicate_groups(frame, window_minutes)
    n = np.bincount(g)
    keep = np.flatnonzero(n >= 2)
    if not len(keep):
        return pd.DataFrame(columns=columns)
    z = frame["z"].to_numpy(dtype=float)[order]
    mean = np.bincount(g, weights=z) / n
    s_dev = np.sqrt(np.bincount(g, weights=(z - mean[g]) ** 2) / np.maximum(n - 1, 1))
    last = np.r_[np.flatnonzero(g[1:] != g[:-1]), len(g) - 1][keep]   # latest row of each group
    rows = order[last]
    agg = pd.DataFrame({c: frame[c].to_numpy()[rows] if not isinstance(frame[c].dtype, pd.CategoricalDtype)
                        else frame[c].array[rows] for c in ("instrument_id", "level", "check_type", "check_id",
                                                             "measured_at")})
    n = n[keep]
    agg["n"], agg["xbar"], agg["s"] = n, mean[keep], s_dev[keep]
    sizes, which = np.unique(np.minimum(n, 100), return_inverse=True)
    c4 = np.array([c4_of(int(v)) for v in sizes])[which]
    agg["xbar_lcl"] = -3 / np.sqrt(n)
    agg["xbar_ucl"] = 3 / np.sqrt(n)
    agg["s_lcl"] = np.maximum(0.0, c4 - 3 * np.sqrt(1 - c4 ** 2))
    agg["s_ucl"] = c4 + 3 * np.sqrt(1 - c4 ** 2)
    return agg
