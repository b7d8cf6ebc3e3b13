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


def replicate_groups(frame: pd.DataFrame, window_minutes: float) -> pd.Series:
    """Replicate-group number per row of frame (instrument_id, level, check_type, measured_at)."""
    f = frame.sort_values(["instrument_id", "level", "check_type", "measured_at"], kind="stable")
    same = ((f["instrument_id"] == f["instrument_id"].shift()) & (f["level"] == f["level"].shift())
            & (f["check_type"] == f["check_type"].shift())
            & ((f["measured_at"] - f["measured_at"].shift()) <= pd.Timedelta(minutes=window_minutes)))
    return (~same).cumsum().reindex(frame.index)


def xbar_s_groups(frame: pd.DataFrame, window_minutes: float = 10.0) -> pd.DataFrame:
    """One row per replicate group with >= 2 checks: mean and SD of z, limits and out-of-limit flags.

    frame columns: check_id, instrument_id, level, check_type, measured_at, z.
    """
    if frame.empty:
        return pd.DataFrame(columns=["instrument_id", "level", "check_type", "check_id", "measured_at", "n",
                                     "xbar", "s", "xbar_lcl", "xbar_ucl", "s_lcl", "s_ucl"])
    g = replicate_groups(frame, window_minutes)
    agg = (frame.assign(g=g.to_numpy()).sort_values("measured_at", kind="stable").groupby("g")
           .agg(instrument_id=("instrument_id", "first"), level=("level", "first"),
                check_type=("check_type", "first"), check_id=("check_id", "last"),
                measured_at=("measured_at", "last"), n=("z", "size"), xbar=("z", "mean"), s=("z", "std")))
    agg = agg[agg["n"] >= 2].reset_index(drop=True)
    n = agg["n"].to_numpy()
    c4 = np.array([c4_of(int(v)) for v in np.minimum(n, 100)]) if len(n) else np.empty(0)
    agg["xbar_lcl"] = -3 / np.sqrt(n)
    agg["xbar_ucl"] = 3 / np.sqrt(n)
    agg["s_lcl"] = np.maximum(0.0, c4 - 3 * np.sqrt(1 - c4 ** 2))
    agg["s_ucl"] = c4 + 3 * np.sqrt(1 - c4 ** 2)
    return agg
