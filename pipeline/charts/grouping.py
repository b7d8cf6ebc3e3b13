"""Segmented-array helpers: many charts stored back to back in one sorted array.

Every chart statistic of the fleet is computed on arrays sorted by (group, time), where a
group is one unit, level and baseline segment. `starts` marks the first row of each group.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class Segments:
    """The group structure of a sorted array, computed once and shared by every statistic.

    starts: True at each group's first row; start_idx: those rows; gid: 0-based group number of
    each row; pos: 0-based position inside the group.
    """

    starts: np.ndarray
    start_idx: np.ndarray
    gid: np.ndarray
    pos: np.ndarray

    @classmethod
    def from_starts(cls, starts: np.ndarray) -> Segments:
        starts = np.asarray(starts, dtype=bool)
        n = len(starts)
        if n and not starts[0]:  # the first row always begins a group
            starts = starts.copy()
            starts[0] = True
        start_idx = np.flatnonzero(starts)
        lengths = np.diff(np.append(start_idx, n))
        gid = np.repeat(np.arange(len(start_idx)), lengths)
        pos = np.arange(n)
        pos -= np.repeat(start_idx, lengths)  # in place: at fleet scale temporaries cost more than arithmetic
        return cls(starts=starts, start_idx=start_idx, gid=gid, pos=pos)

    @property
    def n_groups(self) -> int:
        return len(self.start_idx)

    @property
    def last_idx(self) -> np.ndarray:
        """The last row of each group."""
        return np.append(self.start_idx[1:], len(self.starts)) - 1


def group_starts(codes: np.ndarray) -> np.ndarray:
    """Boolean array: True where a new group begins (codes sorted so groups are contiguous)."""
    codes = np.asarray(codes)
    out = np.ones(len(codes), dtype=bool)
    if len(codes) > 1:
        out[1:] = codes[1:] != codes[:-1]
    return out


def position_in_group(starts: np.ndarray) -> np.ndarray:
    """0-based position of each row inside its group."""
    idx = np.arange(len(starts))
    first = np.maximum.accumulate(np.where(starts, idx, 0))
    return idx - first


def grouped_cumsum(values: np.ndarray, starts: np.ndarray, *, seg: Segments | None = None,
                   overwrite: bool = False) -> np.ndarray:
    """Cumulative sum restarting at each group (difference of one global cumulative sum).

    seg: Segments.from_starts(starts), when the caller has it already; overwrite: the result may
    be written into `values` (a float array the caller no longer needs)."""
    values = np.asarray(values, dtype=float)
    if not len(values):
        return np.cumsum(values)
    seg = Segments.from_starts(starts) if seg is None else seg
    head = values[seg.start_idx]
    total = np.cumsum(values, out=values if overwrite else None)
    before = total[seg.start_idx] - head  # the global sum before each group
    total -= before[seg.gid]
    return total


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


def key_runs(frame: pd.DataFrame, columns: list[str]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Runs of successive rows with one value of the key `columns`: the first row of each run, the
    key's integer code for each run (missing values are a value; codes numbered in order of first
    appearance) and the first row of each code. Categorical columns use their codes."""
    n = len(frame)
    if not n:
        return (np.empty(0, dtype=np.int64),) * 3
    # Rows of sorted frames come in long runs of one key: find the runs and number the keys of the
    # runs' first rows (a small table).
    values = []
    change = np.zeros(n, dtype=bool)
    change[0] = True
    for c in columns:
        col = frame[c]
        v = col.cat.codes.to_numpy() if isinstance(col.dtype, pd.CategoricalDtype) else col.to_numpy()
        change[1:] |= v[1:] != v[:-1]
        values.append(v)
    run = np.flatnonzero(change)
    code_run = np.zeros(len(run), dtype=np.int64)
    for v in values:
        part, uniq = pd.factorize(v[run], use_na_sentinel=False)
        code_run = code_run * len(uniq) + part
    code_run, uniq = pd.factorize(code_run)  # numbered in order of first appearance
    first_row = np.full(len(uniq), n, dtype=np.int64)
    np.minimum.at(first_row, code_run, run)
    return run, code_run, first_row


def narrowest_codes(codes: np.ndarray) -> np.ndarray:
    """Non-negative integer codes as int8 or int16 where they fit: numpy's stable sort (and so
    lexsort) sorts integers of 16 bits or fewer by radix, and wider ones by merging."""
    codes = np.asarray(codes)
    if not len(codes) or codes.min() < 0:
        return codes
    top = codes.max()
    return codes.astype(np.int8) if top < 2**7 else codes.astype(np.int16) if top < 2**15 else codes
