"""Individuals and moving-range chart: limits from MR-bar / d2, for many charts at once.

Source: Montgomery, Introduction to Statistical Quality Control, 6.4; NIST/SEMATECH
e-Handbook 6.3.2.2. d2 and D4 come from pipeline.charts.constants (numerical integration).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from pipeline.charts.constants import shewhart_constants
from pipeline.charts.grouping import Segments


@dataclass(frozen=True)
class IndividualsLimits:
    """Individuals (X) and moving-range limits from a set of values."""

    center: float
    sigma: float
    mr_bar: float
    lcl: float
    ucl: float
    mr_ucl: float
    n: int
    method: str = "sigma = MR-bar / d2(2); X limits center +/- 3 sigma; MR UCL = D4(2) MR-bar"


def moving_range(x: np.ndarray, starts: np.ndarray | None = None, *, seg: Segments | None = None) -> np.ndarray:
    """|x_i - x_{i-1}| inside each group; NaN at each group's first row.

    seg: Segments.from_starts(starts), when the caller has it already."""
    x = np.asarray(x, dtype=float)
    out = np.empty(len(x))
    if not len(x):
        return out
    np.subtract(x[1:], x[:-1], out=out[1:])
    np.abs(out, out=out)
    out[0] = np.nan
    if seg is not None:
        out[seg.start_idx] = np.nan
    elif starts is not None:
        out[np.asarray(starts, dtype=bool)] = np.nan
    return out


def individuals_limits(x: np.ndarray, width: float = 3.0) -> IndividualsLimits:
    """Limits of an individuals chart estimated from the values x (one series)."""
    x = np.asarray(x, dtype=float)
    mr = np.abs(np.diff(x))
    sc = shewhart_constants(2)
    mr_bar = float(mr.mean()) if len(mr) else float("nan")
    sigma = mr_bar / sc.d2
    center = float(x.mean())
    return IndividualsLimits(center=center, sigma=sigma, mr_bar=mr_bar, lcl=center - width * sigma,
                             ucl=center + width * sigma, mr_ucl=sc.D4 * mr_bar, n=len(x))


def mr_ucl_standardised() -> float:
    """MR upper limit for standardised values (sigma 1): D4(2) d2(2), about 3.686."""
    sc = shewhart_constants(2)
    return sc.D4 * sc.d2
