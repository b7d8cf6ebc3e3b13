"""Individuals and moving-range chart: limits from MR-bar / d2, for many charts at once.

Source: Montgomery, Introduction to Statistical Quality Control, 6.4; NIST/SEMATECH
e-Handbook 6.3.2.2. d2 and D4 come from pipeline.charts.constants (numerical integration).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from pipeline.charts.constants import shewhart_constants
from pipeline.charts.grouping import grouped_lag


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


def moving_range(x: np.ndarray, starts: np.ndarray | None = None) -> np.ndarray:
    """|x_i - x_{i-1}| inside each group; NaN at each group's first row."""
    x = np.asarray(x, dtype=float)
    if starts is None:
        starts = np.zeros(len(x), dtype=bool)
        if len(x):
            starts[0] = True
    return np.abs(x - grouped_lag(x, starts, 1))


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
