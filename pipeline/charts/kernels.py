"""Compiled loops for the chart recursions (numba, cached on disk): one pass over the whole fleet.

Each kernel walks the fleet's groups (unit, level, baseline segment) back to back, in order, in
one compiled loop over all rows; `start_idx` holds the first row of each group (as in
grouping.Segments) and `init` one carried-in value per group. Imported lazily by the chart
modules so that commands which chart nothing do not load numba.
"""

from __future__ import annotations

import numba
import numpy as np


@numba.njit(cache=True, nogil=True)
def cusum_side(z: np.ndarray, start_idx: np.ndarray, k: float, sign: float, init: np.ndarray) -> np.ndarray:
    """One side of the tabular CUSUM: C_i = max(0, C_{i-1} + sign z_i - k), C_0 = init[group]."""
    n = len(z)
    out = np.empty(n)
    n_groups = len(start_idx)
    for g in range(n_groups):
        hi = start_idx[g + 1] if g + 1 < n_groups else n
        c = init[g]
        for i in range(start_idx[g], hi):
            c = c + sign * z[i] - k
            if c < 0.0:
                c = 0.0
            out[i] = c
    return out


@numba.njit(cache=True, nogil=True)
def ewma_recursion(z: np.ndarray, start_idx: np.ndarray, lam: float, init: np.ndarray, count0: np.ndarray,
                   halfwidth: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """E_i = lam z_i + (1 - lam) E_{i-1}, E_0 = init[group]; and the limit half-width of each row,
    halfwidth[c] for its count c of points charted (count0[group] before the group's first row)."""
    n = len(z)
    out = np.empty(n)
    half = np.empty(n)
    n_groups = len(start_idx)
    keep = 1.0 - lam
    for g in range(n_groups):
        hi = start_idx[g + 1] if g + 1 < n_groups else n
        e = init[g]
        c = count0[g]
        for i in range(start_idx[g], hi):
            e = lam * z[i] + keep * e
            c += 1
            out[i] = e
            half[i] = halfwidth[c]
    return out, half


@numba.njit(cache=True, nogil=True)
def runs_above_zero(stat: np.ndarray, start_idx: np.ndarray, carried: np.ndarray) -> np.ndarray:
    """Consecutive rows, ending at each row, since stat was last <= 0; a group starts from carried[group]."""
    n = len(stat)
    out = np.empty(n, dtype=np.int64)
    n_groups = len(start_idx)
    for g in range(n_groups):
        hi = start_idx[g + 1] if g + 1 < n_groups else n
        run = carried[g]
        for i in range(start_idx[g], hi):
            run = 0 if stat[i] <= 0.0 else run + 1
            out[i] = run
    return out


def load_all() -> None:
    """Compile every kernel (or load it from numba's cache) by running it once on a tiny input."""
    one, start = np.zeros(1), np.zeros(1, dtype=np.int64)
    cusum_side(one, start, 0.5, 1.0, one)
    ewma_recursion(one, start, 0.1, one, start, np.zeros(2))
    runs_above_zero(one, start, start)
