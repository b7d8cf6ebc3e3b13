"""Residual diagnostics of the fleet model: normality and trend of standardised residuals.

Conditional residuals r = y - fixed - unit BLUP are divided by the residual SD of their
technology x level. With hundreds of thousands of checks any normality test rejects on
trivial departures, so "passed" is judged on size: |skewness| < 0.5 and |excess kurtosis| < 1
(the Jarque-Bera statistic is reported alongside), and a trend of the residuals against
calendar time smaller than 0.1 SD over the window.
Source: Jarque & Bera (1980) Economics Letters 6:255-259; the size thresholds are common practice.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats


@dataclass(frozen=True)
class Diagnostic:
    """One diagnostic row."""

    diagnostic: str
    value: float | None
    passed: bool
    message: str


def residual_diagnostics(z: np.ndarray, days: np.ndarray) -> tuple[Diagnostic, ...]:
    """Normality and time-trend diagnostics of standardised residuals z observed at `days`."""
    z = np.asarray(z, float)
    days = np.asarray(days, float)
    if len(z) < 8:
        return (Diagnostic("residual_checks", float(len(z)), False,
                           "too few checks to judge the residuals; collect more data"),)
    skew = float(stats.skew(z))
    kurt = float(stats.kurtosis(z))
    jb = stats.jarque_bera(z)
    shape_ok = abs(skew) < 0.5 and abs(kurt) < 1.0
    out = [
        Diagnostic("residual_skewness", skew, abs(skew) < 0.5,
                   f"skewness of standardised residuals {skew:.3f} (limit +/-0.5)"),
        Diagnostic("residual_excess_kurtosis", kurt, abs(kurt) < 1.0,
                   f"excess kurtosis {kurt:.3f} (limit +/-1); heavy tails suggest outlying checks"),
        Diagnostic("residual_jarque_bera", float(jb.statistic), shape_ok,
                   f"Jarque-Bera {jb.statistic:.4g} on {len(z)} sampled checks, p = {jb.pvalue:.3g}; "
                   "judged by the size of skewness and kurtosis"),
        Diagnostic("residual_sd", float(np.std(z)), abs(float(np.std(z)) - 1.0) < 0.2,
                   f"SD of standardised residuals {np.std(z):.3f} (expected about 1)"),
    ]
    span = float(days.max() - days.min())
    if span > 0:
        fit = stats.linregress(days, z)
        change = float(fit.slope * span)
        out.append(Diagnostic("residual_trend_over_window", change, abs(change) < 0.1,
                              f"residuals change by {change:.3f} SD over the window against calendar time "
                              f"(p = {fit.pvalue:.3g}; limit 0.1 SD): a trend the model does not explain"))
    return tuple(out)
