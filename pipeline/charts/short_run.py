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

from pipeline.charts.grouping import Segments, grouped_cumsum

METHOD = "Quesenberry (1991) Q statistics, mean unknown / sigma known (fleet pooled); Q_1 against the calibrated target"


def quesenberry_q(x: np.ndarray, starts: np.ndarray, sigma: np.ndarray | float, *,
                  r0: np.ndarray | float | None = None, sum0: np.ndarray | float | None = None,
                  seg: Segments | None = None, rows: np.ndarray | None = None
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Q statistics per row, restarting at each group.

    Parameters:
        x: values sorted by group then time; sigma: known sigma per row (or one value).
        r0, sum0: per-row (or scalar) count and sum of x already seen in the group before these rows (0 if None).
        seg: Segments.from_starts(starts), when the caller has it already.
        rows: compute only these rows (the running sums still cover every row); per-row sigma,
            r0 and sum0 are then given for these rows only.
    Returns:
        (q, center, scale) per row (or per `rows`): q = (x - center) / scale, center the running
        mean used, scale the effective sigma sigma sqrt(r/(r-1)) (sigma for r = 1).
    """
    x = np.asarray(x, dtype=float)
    seg = Segments.from_starts(starts) if seg is None else seg
    csum = grouped_cumsum(x, seg.starts, seg=seg)
    pos = seg.pos
    if rows is not None:
        csum, x, pos = csum[rows], x[rows], pos[rows]
    r0 = 0.0 if r0 is None else r0
    sum0 = 0.0 if sum0 is None else sum0
    # The same arithmetic as r = r0 + pos + 1, prev_sum = sum0 + csum - x, prev_mean = prev_sum /
    # max(r - 1, 1) (0 at r = 1), scale = sigma sqrt(r / max(r - 1, 1)), written in place.
    r = np.add(r0, pos, dtype=float)
    r += 1
    first = r <= 1
    prev = np.add(sum0, csum, out=csum)
    prev -= x
    below = r - 1
    np.maximum(below, 1, out=below)
    prev /= below
    prev[first] = 0.0
    scale = np.divide(r, below, out=below)
    np.sqrt(scale, out=scale)
    scale *= sigma
    if first.any():
        scale[first] = np.broadcast_to(sigma, scale.shape)[first]
    q = x - prev
    q /= scale
    return q, prev, scale
