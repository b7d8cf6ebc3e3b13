"""Two-sided tabular CUSUM for many charts at once, in one compiled pass over the fleet.

C+_i = max(0, C+_{i-1} + z_i - k) and C-_i = max(0, C-_{i-1} - z_i - k), restarting at each group
from its carried value (or the FIR headstart). The recursion is Lindley's, whose closed form
C+_i = S_i - min(-C+_0, min_{j<=i} S_j) with S_i = sum_{j<=i} (z_j - k) is a cumulative sum and a
running minimum; pipeline/charts/kernels.py runs the recursion itself for all groups back to back
(the closed form needs a grouped running minimum, which numpy lacks, and collects rounding).

Source: Page (1954) Biometrika 41:100-115; tabular form and FIR headstart as in Lucas & Crosier
(1982) Technometrics 24:199-205 and Montgomery, Introduction to Statistical Quality Control, 9.1.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from pipeline.charts.grouping import Segments


@dataclass(frozen=True)
class CusumResult:
    """Upper and lower tabular CUSUM (both >= 0, in sigma units) and the parameters used."""

    upper: np.ndarray
    lower: np.ndarray
    k: float
    h: float
    headstart: float


def tabular_cusum(z: np.ndarray, starts: np.ndarray | None = None, *, k: float = 0.5, h: float = 5.0,
                  headstart: float = 0.0, init_upper: np.ndarray | float | None = None,
                  init_lower: np.ndarray | float | None = None, seg: Segments | None = None) -> CusumResult:
    """Two-sided tabular CUSUM of standardised values, restarting at each group.

    Parameters:
        z: standardised values, sorted by group then time.
        starts: True at the first row of each group (None: one group).
        k, h: reference value and decision interval in sigma units.
        headstart: FIR starting value (sigma units) for groups without `init_*`.
        init_upper, init_lower: per-group (or scalar) values carried in from earlier data.
        seg: Segments.from_starts(starts), when the caller has it already.
    Returns:
        CusumResult with C+ and C- per row.
    """
    from pipeline.charts import kernels

    z = np.ascontiguousarray(z, dtype=float)
    if starts is None:
        starts = np.zeros(len(z), dtype=bool)
        if len(z):
            starts[0] = True
    seg = Segments.from_starts(starts) if seg is None else seg
    n_groups = seg.n_groups

    def _init(value):
        if value is None:
            return np.full(n_groups, float(headstart))
        return np.broadcast_to(np.asarray(value, dtype=float), (n_groups,))

    upper = kernels.cusum_side(z, seg.start_idx, float(k), 1.0, np.ascontiguousarray(_init(init_upper)))
    lower = kernels.cusum_side(z, seg.start_idx, float(k), -1.0, np.ascontiguousarray(_init(init_lower)))
    return CusumResult(upper=upper, lower=lower, k=k, h=h, headstart=headstart)
