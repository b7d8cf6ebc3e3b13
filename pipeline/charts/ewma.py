"""EWMA of many charts at once in one compiled pass, with exact time-varying limits.

E_i = lam z_i + (1 - lam) E_{i-1}, from each group's carried value E_0, runs for all groups back
to back (pipeline/charts/kernels.py). Limits: +/- L sqrt(lam/(2-lam) [1 - (1-lam)^(2i)]) for the
i-th point since the chart started.

Source: Roberts (1959) Technometrics 1:239-250; exact limits as in Lucas & Saccucci (1990)
Technometrics 32:1-12 and NIST/SEMATECH e-Handbook of Statistical Methods, 6.3.2.4.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from pipeline.charts.grouping import Segments


@dataclass(frozen=True)
class EwmaResult:
    """EWMA values and exact limits (same units as z; centre 0 for standardised data).

    The limits are centre -/+ `half`; with centre 0, `ucl` is `half` itself and `lcl` its negation."""

    ewma: np.ndarray
    half: np.ndarray
    lam: float
    L: float
    center: float = 0.0

    @property
    def ucl(self) -> np.ndarray:
        return self.half if self.center == 0.0 else self.center + self.half

    @property
    def lcl(self) -> np.ndarray:
        return np.negative(self.half) if self.center == 0.0 else self.center - self.half


def ewma_limits_halfwidth(i: np.ndarray, lam: float, L: float, sigma: float = 1.0) -> np.ndarray:
    """Exact half-width of the EWMA limits after i points (i >= 1)."""
    i = np.asarray(i, dtype=float)
    return L * sigma * np.sqrt(lam / (2.0 - lam) * (1.0 - (1.0 - lam) ** (2.0 * i)))


def ewma(z: np.ndarray, starts: np.ndarray | None = None, *, lam: float, L: float,
         init: np.ndarray | float = 0.0, count0: np.ndarray | float = 0.0,
         center: float = 0.0, sigma: float = 1.0, seg: Segments | None = None) -> EwmaResult:
    """EWMA restarting at each group, with exact limits.

    Parameters:
        z: values sorted by group then time.
        starts: True at the first row of each group (None: one group).
        lam, L: smoothing constant and limit width.
        init: per-group (or scalar) EWMA value before the group's first row (the target at start).
        count0: points already charted in the group before these rows (for the limits).
        center, sigma: target and sigma of z (0 and 1 for standardised data).
        seg: Segments.from_starts(starts), when the caller has it already.
    """
    from pipeline.charts import kernels

    z = np.asarray(z, dtype=float)
    n = len(z)
    if starts is None:
        starts = np.zeros(n, dtype=bool)
        if n:
            starts[0] = True
    if n == 0:
        empty = np.empty(0)
        return EwmaResult(empty, empty, lam, L, center)
    seg = Segments.from_starts(starts) if seg is None else seg
    n_groups = seg.n_groups
    e0 = np.broadcast_to(np.asarray(init, dtype=float), (n_groups,))
    c0 = np.broadcast_to(np.asarray(count0, dtype=float), (n_groups,))
    if not (np.array_equal(c0, np.floor(c0)) and c0.min() >= 0):
        raise ValueError("count0 must be whole numbers of points already charted")
    c0 = c0.astype(np.int64)
    # The half-width depends only on the count of points: evaluated once per count, then looked up.
    longest = int(np.diff(np.append(seg.start_idx, n)).max())
    table = ewma_limits_halfwidth(np.arange(int(c0.max()) + longest + 1), lam, L, sigma)
    out, half = kernels.ewma_recursion(np.ascontiguousarray(z), seg.start_idx, float(lam),
                                       np.ascontiguousarray(e0), c0, table)
    return EwmaResult(ewma=out, half=half, lam=lam, L=L, center=center)
