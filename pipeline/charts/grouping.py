"""Segmented-array helpers: many charts stored back to back in one sorted array.

Every chart statistic of the fleet is computed on arrays sorted by (group, time), where a
group is one unit, level and baseline segment. `starts` marks the first row of each group.
"""

from __future__ import annotations

import numpy as np


def group_starts(codes: np.ndarray) -> np.ndarray:
    """Boolean array: True where a new group begins (codes sorted so groups are contiguous)."""
    codes = np.asarray(codes)
    out = np.ones(len(codes), dtype=bool)
    if len(codes) > 1:
        out[1:] = codes[1:] != codes[:-1]
    return out


def group_index(starts: np.ndarray) -> np.ndarray:
    """0-based number of the group of each row."""
    return np.cumsum(starts) - 1


def position_in_group(starts: np.ndarray) -> np.ndarray:
    """0-based position of each row inside its group."""
    idx = np.arange(len(starts))
    first = np.maximum.accumulate(np.where(starts, idx, 0))
    return idx - first


def grouped_cumsum(values: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Cumulative sum restarting at each group (difference of one global cumulative sum)."""
    values = np.asarray(values, dtype=float)
    total = np.cumsum(values)
    before = np.where(starts, total - values, 0.0)
    offset = np.maximum.accumulate(np.where(starts, np.arange(len(values)), 0))
    return total - before[offset]


def grouped_cummin(values: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Running minimum restarting at each group."""
    import pandas as pd

    gid = group_index(starts)
    return pd.Series(np.asarray(values, dtype=float)).groupby(gid).cummin().to_numpy()


def grouped_last_true(flags: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Index of the latest row at or before each row (same group) where flags is True; -1 if none."""
    idx = np.arange(len(flags))
    first = np.maximum.accumulate(np.where(starts, idx, 0))
    last = np.maximum.accumulate(np.where(flags, idx, -1))
    return np.where(last >= first, last, -1)


def grouped_lag(values: np.ndarray, starts: np.ndarray, lag: int = 1, fill: float = np.nan, *,
                pos: np.ndarray | None = None) -> np.ndarray:
    """values shifted by `lag` rows inside each group (fill where the lag leaves the group).

    pos: position_in_group(starts), when the caller has it already."""
    values = np.asarray(values, dtype=float)
    out = np.full(len(values), fill)
    if lag < len(values):
        out[lag:] = values[:-lag] if lag else values
    pos = position_in_group(starts) if pos is None else pos
    out[pos < lag] = fill
    return out


def grouped_rolling_sum(flags: np.ndarray, starts: np.ndarray, window: int, *,
                        pos: np.ndarray | None = None) -> np.ndarray:
    """Sum of the last `window` values inside each group; NaN where fewer than `window` rows exist.

    pos: position_in_group(starts), when the caller has it already."""
    values = np.asarray(flags, dtype=float)
    c = np.concatenate([[0.0], np.cumsum(values)])
    n = len(values)
    idx = np.arange(n)
    lo = np.maximum(idx - window + 1, 0)
    out = c[idx + 1] - c[lo]
    pos = position_in_group(starts) if pos is None else pos
    return np.where(pos >= window - 1, out, np.nan)
