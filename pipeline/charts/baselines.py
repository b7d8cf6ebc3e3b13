"""Frozen, versioned chart baselines: fleet pooled sigma, the unit's own estimate, re-baselines.

A chart segment (unit, level, baseline period) starts at a calibration or sensor replacement
(or a recorded re-baseline). Version 1 of its baseline is frozen at the first check: centre 0
(the calibrated target) with the fleet's pooled repeatability sigma for the unit's technology,
standard kind and level (short-run Q statistics, see short_run.py). Version 2 is frozen once
the segment has `own_baseline_min_checks` checks: centre = their mean, sigma = their MR-bar/d2.
Neither changes as later data arrive; limits never quietly widen.
"""

from __future__ import annotations

from datetime import UTC, datetime

import duckdb
import numpy as np
import pandas as pd

from pipeline.charts.constants import shewhart_constants
from pipeline.charts.grouping import Segments, key_runs
from pipeline.charts.individuals import moving_range

POOLED_METHOD = "pooled MR-bar / d2(2) over consecutive checks of each unit segment (Montgomery 6.4)"


def pooled_sigma(frame: pd.DataFrame, starts: np.ndarray, min_pairs: int = 30) -> pd.DataFrame:
    """Pooled repeatability per technology, standard kind and level from consecutive checks.

    frame: columns technology, standard_kind, level, relative_error, sorted by segment then time;
    starts: True at each segment's first row. Returns one row per key: technology, standard_kind,
    level, sigma, n_pairs. Keys with fewer than `min_pairs` moving ranges take the median sigma of
    their technology (or of the fleet).
    """
    key = ["technology", "standard_kind", "level"]
    x = frame["relative_error"].to_numpy(dtype=float)
    mr = moving_range(x, starts)
    d2 = shewhart_constants(2).d2
    # One integer code per (technology, standard kind, level), numbered in order of appearance, for
    # each run of rows with one key; sums per run, then per key.
    run, code, first_row = key_runs(frame, key)
    keys = frame[key].iloc[first_row].reset_index(drop=True)
    pair = ~np.isnan(mr)  # the first check of each segment has no moving range
    mr[~pair] = 0.0
    n_pairs = np.bincount(code, weights=np.add.reduceat(pair, run, dtype=np.int64),
                          minlength=len(keys)).astype(np.int64)
    n_pairs[keys.isna().any(axis=1).to_numpy()] = 0  # a key with a missing part has no pairs
    with np.errstate(invalid="ignore", divide="ignore"):
        mr_bar = np.bincount(code, weights=np.add.reduceat(mr, run), minlength=len(keys)) / n_pairs
    out = keys.assign(mr_bar=np.where(n_pairs > 0, mr_bar, np.nan), n_pairs=n_pairs.astype("int64"))
    out["sigma"] = out["mr_bar"] / d2
    good = out[(out["n_pairs"] >= min_pairs) & (out["sigma"] > 0)]
    fleet = float(good["sigma"].median()) if len(good) else 0.02
    by_tech = good.groupby("technology")["sigma"].median()
    weak = (out["n_pairs"] < min_pairs) | ~(out["sigma"] > 0)
    if weak.any():
        out.loc[weak, "sigma"] = out.loc[weak, "technology"].map(by_tech).fillna(fleet).to_numpy(dtype=float)
    return out[["technology", "standard_kind", "level", "sigma", "n_pairs"]].reset_index(drop=True)


def own_estimates(x: np.ndarray, starts: np.ndarray, pos: np.ndarray, n_min: int, *,
                  seg: Segments | None = None) -> pd.DataFrame:
    """The unit's own centre and sigma from the first n_min checks of each group that has them.

    pos: 0-based check number in the segment (counting checks charted before these rows);
    seg: Segments.from_starts(starts), when the caller has it already.
    Returns rows: group (0-based group number), center, sigma (MR-bar / d2), row of the n_min-th check.
    Source: Montgomery 6.4, individuals chart phase I estimates.
    """
    seg = Segments.from_starts(starts) if seg is None else seg
    gid = seg.gid
    # The n_min-th check of each group that has one, and the group's first n_min checks before it.
    rows = np.flatnonzero(pos == n_min - 1)
    rows = rows[rows >= n_min - 1]
    back = rows - (n_min - 1)
    rows = rows[(pos[back] == 0) & (gid[back] == gid[rows])]  # all n_min checks are among these rows
    window = rows[:, None] - np.arange(n_min - 1, -1, -1)  # one row per group, oldest first
    xs = x[window]
    center = xs.mean(axis=1)
    mr_bar = np.abs(np.diff(xs, axis=1)).mean(axis=1) if n_min > 1 else np.full(len(rows), np.nan)
    return pd.DataFrame({"group": gid[rows], "center": center, "sigma": mr_bar / shewhart_constants(2).d2,
                         "row": rows})


def record_rebaseline(con: duckdb.DuckDBPyConnection, instrument_id: str, rebaseline_at: datetime,
                      reason: str, recorded_by: str | None = None) -> None:
    """Record an explicit re-baseline of a unit's charts from `rebaseline_at` (UTC) with its reason.

    Checks already charted after that time are charted again on the next analyse run.
    Raises ValueError when the reason is empty.
    """
    if not reason or not reason.strip():
        raise ValueError("a re-baseline needs a reason (it is recorded with the baseline)")
    con.execute("INSERT INTO chart_rebaselines VALUES ($i, $at, $reason, $now, $by)",
                {"i": instrument_id, "at": rebaseline_at, "reason": reason.strip(),
                 "now": datetime.now(UTC).replace(tzinfo=None), "by": recorded_by})
    con.execute("DELETE FROM chart_point_values WHERE measured_at >= $at AND series_id IN "
                "(SELECT series_id FROM chart_series WHERE instrument_id = $i)", {"i": instrument_id, "at": rebaseline_at})
    for table in ("chart_signal_values", "chart_groups"):
        con.execute(f"DELETE FROM {table} WHERE instrument_id = $i AND measured_at >= $at",  # noqa: S608
                    {"i": instrument_id, "at": rebaseline_at})
    con.execute("DELETE FROM chart_state WHERE instrument_id = $i AND last_measured_at >= $at",
                {"i": instrument_id, "at": rebaseline_at})
