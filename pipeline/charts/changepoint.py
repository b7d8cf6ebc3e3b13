"""When did the change begin? Page's last-zero estimator for tabular CUSUM alarms.

For an upper-side alarm at check t, the change is estimated to have begun just after the last
check before t at which C+ was 0 (the last time the statistic restarted); likewise for C-.
This is the N+ / N- counter of Montgomery's tabular CUSUM (Example 9.1: signal at 29, N+ = 7,
so the shift began after period 22).

Source: Page (1954); Montgomery, Introduction to Statistical Quality Control, 9.1.2
("the last period at which C+ was zero"); Nishina (1986) for its properties as an estimator.
"""

from __future__ import annotations

import numpy as np

from pipeline.charts.grouping import grouped_last_true, position_in_group

METHOD = "Page (1954) last-zero estimator (Montgomery's N+/N- counter)"


def cusum_run_length(statistic: np.ndarray, starts: np.ndarray, carried: np.ndarray | None = None) -> np.ndarray:
    """N: number of consecutive checks, ending at each row, with the CUSUM side above zero.

    `carried` is the count carried in from earlier data, per row of its group (0 if None).
    Onset of a change = the check N-1 rows before the alarm (the first check of the positive run).
    """
    statistic = np.asarray(statistic, dtype=float)
    zero = statistic <= 0.0
    last_zero = grouped_last_true(zero, starts)
    idx = np.arange(len(statistic))
    pos = position_in_group(starts)
    first = idx - pos
    carried = np.zeros(len(statistic)) if carried is None else np.asarray(carried, dtype=float)
    return np.where(last_zero >= 0, idx - last_zero, idx - first + 1 + carried).astype(np.int64)
