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


def _replicate_runs(frame: pd.DataFrame, window_minutes: float) -> tuple[np.ndarray, np.ndarray] | None:
    """Replicate groups of >= 2 checks without sorting, when rows are already in (unit, level, time) order.

    Returns (rows, g): the rows of those groups in (unit, level, check type, time) order and their
    group number (0, 1, ...), or None when the frame is not in that order.
    """
    t = frame["measured_at"].to_numpy()
    if t.dtype.kind != "M":
        return None
    # Times in their own unit (no conversion of millions of values); a whole number of units is
    # within the window exactly when it is in nanoseconds.
    unit_ns = int(np.timedelta64(1, np.datetime_data(t.dtype)[0]) / np.timedelta64(1, "ns"))
    window = int(window_minutes * 60e9) // unit_ns
    t = t.view(np.int64)
    inst, ctype = _codes(frame["instrument_id"]), _codes(frame["check_type"])
    level = frame["level"].to_numpy(dtype=float)
    same_inst = inst[1:] == inst[:-1]
    same_level = same_inst & (level[1:] == level[:-1])
    ordered = (inst[1:] > inst[:-1]) | (same_inst & (level[1:] > level[:-1])) | (same_level & (t[1:] >= t[:-1]))
    if not ordered.all():
        return None
    block = np.cumsum(np.r_[True, ~same_level])  # (unit, level) number, increasing down the frame
    parts = []
    for c in np.unique(ctype):
        r = np.flatnonzero(ctype == c)  # this check type's rows in time order within each block
        b, tc = block[r], t[r]
        joined = (b[1:] == b[:-1]) & (np.diff(tc) <= window)
        head = np.r_[True, ~joined]
        size = np.diff(np.r_[np.flatnonzero(head), len(r)])
        member = np.repeat(size >= 2, size)
        if member.any():
            parts.append((r[member], head[member], c))
    if not parts:
        return np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64)
    rows = np.concatenate([p[0] for p in parts])
    head = np.concatenate([p[1] for p in parts])
    local = np.cumsum(head) - 1
    firsts = rows[head]
    # Groups in (unit, level, check type, time) order, as replicate_groups sorts them.
    kind = np.concatenate([np.full(int(p[1].sum()), p[2]) for p in parts])
    rank = np.empty(len(firsts), dtype=np.int64)
    rank[np.lexsort((firsts, kind, block[firsts]))] = np.arange(len(firsts))
    g = rank[local]
    order = np.argsort(g, kind="stable")
    return rows[order], g[order]


def xbar_s_groups(frame: pd.DataFrame, window_minutes: float = 10.0, *, with_rows: bool = False):
    """One row per replicate group with >= 2 checks: mean and SD of z, limits and out-of-limit flags.

    frame columns: check_id, instrument_id, level, check_type, measured_at, z. A frame already in
    (unit, level, time) order is grouped without sorting. with_rows: also return the frame row
    (position in frame) of each group's latest check.
    """
    columns = ["instrument_id", "level", "check_type", "check_id", "measured_at", "n",
               "xbar", "s", "xbar_lcl", "xbar_ucl", "s_lcl", "s_ucl"]
    none = (pd.DataFrame(columns=columns), np.empty(0, dtype=np.int64))
    if frame.empty:
        return none if with_rows else none[0]
    runs = _replicate_runs(frame, window_minutes)
    if runs is None:
        order, g = replicate_groups(frame, window_minutes)
    else:
        order, g = runs
    n = np.bincount(g)
    keep = np.flatnonzero(n >= 2)
    if not len(keep):
        return none if with_rows else none[0]
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
    return (agg, rows) if with_rows else agg
