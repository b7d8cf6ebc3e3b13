"""Two-sided tabular CUSUM for many charts at once, from cumulative sums and running minima.

C+_i = max(0, C+_{i-1} + z_i - k) is Lindley's recursion, whose solution is
C+_i = S_i - min(-C+_0, min_{j<=i} S_j) with S_i = sum_{j<=i} (z_j - k); the lower side is the
same on -z. So the CUSUM of every unit follows from one grouped cumulative sum and one grouped
running minimum, with no loop over checks.

Source: Page (1954) Biometrika 41:100-115; tabular form and FIR headstart as in Lucas & Crosier
(1982) Technometrics 24:199-205 and Montgomery, Introduction to Statistical Quality Control, 9.1.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from pipeline.charts.grouping import Segments, grouped_cummin, grouped_cumsum


@dataclass(frozen=True)
class CusumResult:
    """Upper and lower tabular CUSUM (both >= 0, in sigma units) and the parameters used."""

    upper: np.ndarray
    lower: np.ndarray
    k: float
    h: float
    headstart: float


def _one_side(x: np.ndarray, seg: Segments, k: float, init: np.ndarray, sign: float) -> np.ndarray:
    """max(0, S - min(running min of S, -init)) with S the grouped cumulative sum of sign x - k.

    Written in place: at fleet scale every temporary array costs more than the arithmetic."""
    v = np.negative(x) if sign < 0 else x.copy()
    v -= k
    s = grouped_cumsum(v, seg.starts, seg=seg, overwrite=True)
    floor = np.negative(init)[seg.gid]
    np.minimum(grouped_cummin(s, seg.starts, seg=seg), floor, out=floor)
    s -= floor
    return np.maximum(s, 0.0, out=s)


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
    z = np.asarray(z, dtype=float)
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

    upper = _one_side(z, seg, k, _init(init_upper), 1.0)
    lower = _one_side(z, seg, k, _init(init_lower), -1.0)
    return CusumResult(upper=upper, lower=lower, k=k, h=h, headstart=headstart)
