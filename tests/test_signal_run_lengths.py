"""Run lengths the signals' p-values are computed on: checks since the previous signal of the same
series (unit, level, baseline segment, chart, rule, side), or since the segment began."""

from __future__ import annotations

import numpy as np
import pandas as pd

from pipeline.charts.signals import signal_run_lengths


def test_each_segment_counts_from_its_own_start():
    # One unit, level and chart; segment 1 signals at checks 10 and 50, segment 2 at checks 20 and 60
    # (time order). Each segment's first signal counts from its segment's start, whatever the
    # positions of the other segment's signals.
    period = np.array([1, 1, 2, 2])
    zeros = np.zeros(4, dtype=np.int64)
    run = signal_run_lengths([zeros, zeros, period, zeros, zeros, zeros], np.array([10, 50, 20, 60]))
    assert run.tolist() == [10, 40, 20, 40]
    # a later segment's first signal at a higher position than the last signal of the one before
    run = signal_run_lengths([zeros[:2], zeros[:2], np.array([1, 2]), zeros[:2], zeros[:2], zeros[:2]],
                             np.array([10, 50]))
    assert run.tolist() == [10, 50]


def test_run_lengths_equal_a_per_series_count():
    # Independent check: pandas groupby over each series in time order, previous signal's position.
    rng = np.random.default_rng(11)
    rows = []
    for unit in range(6):
        for level in range(2):
            for period in range(3):
                pos = np.sort(rng.choice(np.arange(1, 400), size=40, replace=False))
                t0 = unit * 10_000 + level * 3_000 + period * 1_000
                for p in pos:
                    rows.append((unit, level, period, rng.integers(0, 3), rng.integers(0, 4), rng.integers(0, 2),
                                 p, t0 + p))
    sig = pd.DataFrame(rows, columns=["unit", "level", "period", "chart", "rule", "direction", "position", "t"])
    sig = sig.sample(frac=1, random_state=2).sort_values("t", kind="stable").reset_index(drop=True)
    series = ["unit", "level", "period", "chart", "rule", "direction"]
    prev = sig.groupby(series)["position"].shift()
    want = np.where(prev.isna(), sig["position"], sig["position"] - prev.fillna(0)).astype(np.int64)
    got = signal_run_lengths([sig[c].to_numpy() for c in series], sig["position"].to_numpy())
    assert got.tolist() == want.tolist()
    assert (got < sig["position"].to_numpy()).any()  # some runs count from an earlier signal
