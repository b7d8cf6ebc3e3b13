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

from pipeline.charts.grouping import Segments

METHOD = "Page (1954) last-zero estimator (Montgomery's N+/N- counter)"


def cusum_run_length(statistic: np.ndarray, starts: np.ndarray, carried: np.ndarray | None = None, *,
                     seg: Segments | None = None) -> np.ndarray:
    """N: number of consecutive checks, ending at each row, with the CUSUM side above zero.

    `carried` is the count carried in from earlier data, one per group (0 if None).
    Onset of a change = the check N-1 rows before the alarm (the first check of the positive run).
    seg: Segments.from_starts(starts), when the caller has it already.
    """
    from pipeline.charts import kernels

    statistic = np.ascontiguousarray(statistic, dtype=float)
    seg = Segments.from_starts(starts) if seg is None else seg
    # One compiled pass: N = N + 1 while the statistic is above zero, 0 where it is zero.
    first = np.zeros(seg.n_groups, dtype=np.int64) if carried is None else \
        np.broadcast_to(np.asarray(carried, dtype=float), (seg.n_groups,)).astype(np.int64)
    return kernels.runs_above_zero(statistic, seg.start_idx, first)
