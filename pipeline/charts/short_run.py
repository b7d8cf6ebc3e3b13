"""Short-run standardisation from the first check after a calibration: Quesenberry's Q statistics.

Within a baseline segment, check r (1-based) with value x_r gets
    Q_1 = x_1 / sigma                                    (calibration target 0 is the known mean)
    Q_r = sqrt((r-1)/r) (x_r - mean(x_1..x_{r-1})) / sigma,   r >= 2
with sigma known (the fleet's pooled repeatability for the unit's technology, standard kind and
level). Under control the Q_r are independent N(0,1), so every chart (individuals, CUSUM, EWMA)
is valid from the first check, before the unit has its own estimates.

Source: Quesenberry, C.P. (1991) "SPC Q charts for start-up processes and short or long runs",
J. Quality Technology 23:213-224, case of mean unknown and sigma known (Q_1 uses the
calibrated target as the known mean).
"""

from __future__ import annotations

import numpy as np

from pipeline.charts.grouping import grouped_cumsum

METHOD = "Quesenberry (1991) Q statistics, mean unknown / sigma known (fleet pooled); Q_1 against the calibrated target"


def quesenberry_q(x: np.ndarray, starts: np.ndarray, sigma: np.ndarray, *, r0: np.ndarray | None = None,
                  sum0: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Q statistics per row, restarting at each group.

    Parameters:
        x: values sorted by group then time; sigma: known sigma per row.
        r0, sum0: per-row count and sum of x already seen in the group before these rows (0 if None).
    Returns:
        (q, center, scale): q = (x - center) / scale, center the running mean used, scale the
        effective sigma sigma sqrt(r/(r-1)) (sigma for r = 1).
    """
    x = np.asarray(x, dtype=float)
    n = len(x)
    r0 = np.zeros(n) if r0 is None else np.asarray(r0, dtype=float)
    sum0 = np.zeros(n) if sum0 is None else np.asarray(sum0, dtype=float)
    csum = grouped_cumsum(x, starts)
    from pipeline.charts.grouping import position_in_group
    r = r0 + position_in_group(starts) + 1
    prev_sum = sum0 + csum - x
    prev_mean = np.where(r > 1, prev_sum / np.maximum(r - 1, 1), 0.0)
    scale = np.where(r > 1, sigma * np.sqrt(r / np.maximum(r - 1, 1)), sigma)
    q = (x - prev_mean) / scale
    return q, prev_mean, scale
