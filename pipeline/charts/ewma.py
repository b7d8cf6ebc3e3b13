"""EWMA of many charts at once as one linear filter, with exact time-varying limits.

E_i = lam z_i + (1 - lam) E_{i-1}. One scipy.signal.lfilter pass runs over all groups back to
back; because the filter is linear, a group's own series is the global output minus the decayed
carry-over of the previous group's last value: E_i = y_i + (1-lam)^p (E_0 - y_{start-1}), p the
1-based position in the group. Limits: +/- L sqrt(lam/(2-lam) [1 - (1-lam)^(2i)]) for the i-th
point since the chart started.

Source: Roberts (1959) Technometrics 1:239-250; exact limits as in Lucas & Saccucci (1990)
Technometrics 32:1-12 and NIST/SEMATECH e-Handbook of Statistical Methods, 6.3.2.4.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.signal import lfilter

from pipeline.charts.grouping import group_index, position_in_group


@dataclass(frozen=True)
class EwmaResult:
    """EWMA values and exact limits (same units as z; centre 0 for standardised data)."""

    ewma: np.ndarray
    lcl: np.ndarray
    ucl: np.ndarray
    lam: float
    L: float


def ewma_limits_halfwidth(i: np.ndarray, lam: float, L: float, sigma: float = 1.0) -> np.ndarray:
    """Exact half-width of the EWMA limits after i points (i >= 1)."""
    i = np.asarray(i, dtype=float)
    return L * sigma * np.sqrt(lam / (2.0 - lam) * (1.0 - (1.0 - lam) ** (2.0 * i)))


def ewma(z: np.ndarray, starts: np.ndarray | None = None, *, lam: float, L: float,
         init: np.ndarray | float = 0.0, count0: np.ndarray | float = 0.0,
         center: float = 0.0, sigma: float = 1.0) -> EwmaResult:
    """EWMA restarting at each group, with exact limits.

    Parameters:
        z: values sorted by group then time.
        starts: True at the first row of each group (None: one group).
        lam, L: smoothing constant and limit width.
        init: per-group (or scalar) EWMA value before the group's first row (the target at start).
        count0: points already charted in the group before these rows (for the limits).
        center, sigma: target and sigma of z (0 and 1 for standardised data).
    """
    z = np.asarray(z, dtype=float)
    n = len(z)
    if starts is None:
        starts = np.zeros(n, dtype=bool)
        if n:
            starts[0] = True
    if n == 0:
        empty = np.empty(0)
        return EwmaResult(empty, empty, empty, lam, L)
    gid = group_index(starts)
    n_groups = int(gid[-1]) + 1
    e0 = np.broadcast_to(np.asarray(init, dtype=float), (n_groups,))[gid]
    c0 = np.broadcast_to(np.asarray(count0, dtype=float), (n_groups,))[gid]
    y = lfilter([lam], [1.0, -(1.0 - lam)], z)
    start_idx = np.flatnonzero(starts)
    prev = np.where(start_idx > 0, y[np.maximum(start_idx - 1, 0)], 0.0)
    pos = position_in_group(starts) + 1
    decay = (1.0 - lam) ** pos
    out = y + decay * (e0 - prev[gid])
    half = ewma_limits_halfwidth(c0 + pos, lam, L, sigma)
    return EwmaResult(ewma=out, lcl=center - half, ucl=center + half, lam=lam, L=L)
