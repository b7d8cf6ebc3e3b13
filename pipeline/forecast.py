"""Time to tolerance: where a unit's linear drift takes its bias, with a prediction interval.

Two pieces:
- `linear_prediction_interval`: the textbook interval for a future observation in simple linear
  regression. Source: Montgomery & Runger, "Applied Statistics and Probability for Engineers",
  section 11-6 "Prediction of new observations" (the prediction interval on a future observation):
  y0_hat +/- t(alpha/2, n-2) sqrt(sigma2_hat (1 + 1/n + (x0 - x_bar)^2 / Sxx)); also Draper & Smith,
  "Applied Regression Analysis", 3rd ed., section 1.4.
- `forecast_bias`: the same idea on the fleet model's estimates: the predictive distribution of
  the unit's bias h days after its reference time is normal with mean b + d h / 30 and variance
  var(b) + (h/30)^2 var(d) + 2 (h/30) cov(b, d) + residual variance + lot variance (delta method,
  the model's estimates taken as approximately normal).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import stats


@dataclass(frozen=True)
class PredictionInterval:
    """A prediction interval for one future observation at x0."""

    x0: float
    estimate: float
    low: float
    high: float
    standard_error: float      # sqrt(sigma2 (1 + 1/n + (x0 - xbar)^2 / Sxx))
    slope: float
    intercept: float
    sigma2: float
    degrees_of_freedom: int
    confidence: float


def linear_prediction_interval(x, y, x0: float, confidence: float = 0.95) -> PredictionInterval:
    """Least-squares line through (x, y) and the prediction interval of a new observation at x0.

    Source: Montgomery & Runger, Applied Statistics and Probability for Engineers, section 11-6.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    n = len(x)
    if n < 3:
        raise ValueError("a prediction interval needs at least 3 points")
    xbar, ybar = x.mean(), y.mean()
    sxx = float(((x - xbar) ** 2).sum())
    if sxx == 0:
        raise ValueError("all x are equal; the slope is not defined")
    slope = float(((x - xbar) * (y - ybar)).sum() / sxx)
    intercept = float(ybar - slope * xbar)
    resid = y - (intercept + slope * x)
    sigma2 = float((resid ** 2).sum() / (n - 2))
    se = math.sqrt(sigma2 * (1 + 1 / n + (x0 - xbar) ** 2 / sxx))
    t = float(stats.t.ppf(0.5 + confidence / 2, n - 2))
    est = intercept + slope * x0
    return PredictionInterval(x0=x0, estimate=est, low=est - t * se, high=est + t * se, standard_error=se,
                              slope=slope, intercept=intercept, sigma2=sigma2, degrees_of_freedom=n - 2,
                              confidence=confidence)


@dataclass(frozen=True)
class LineForecast:
    """A line through recent points, its slope shrunk toward a prior, predicted at x0."""

    x0: float
    estimate: float            # predicted mean at x0
    var_mean: float            # variance of the predicted mean (parameter uncertainty only)
    sigma2: float              # residual variance about the line
    slope: float               # slope after shrinkage
    slope_ols: float
    level_now: float           # the line at the last x (the current level)
    shrinkage: float           # B = prior var / (prior var + var(slope_ols)); 1 = no shrinkage
    n: int


def shrunk_line_forecast(x, y, x0: float, slope_prior_mean: float = 0.0,
                         slope_prior_var: float = math.inf) -> LineForecast:
    """Least-squares line through (x, y) with its slope shrunk toward a prior, predicted at x0.

    The intercept is the mean at x_bar (independent of the slope in least squares), so the
    predicted mean is y_bar + b* (x0 - x_bar) with variance sigma2 / n + (x0 - x_bar)^2 var(b*),
    where b* = m + B (b - m), B = prior var / (prior var + sigma2 / Sxx) and var(b*) = B sigma2 / Sxx
    (normal-normal posterior of the slope). With an infinite prior variance B = 1 and
    var_mean + sigma2 is the Montgomery & Runger 11-6 prediction variance.
    Source: Montgomery & Runger, Applied Statistics and Probability for Engineers, section 11-6;
    Efron & Morris (1975), JASA 70:311-319 (the shrinkage factor).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    n = len(x)
    if n < 3:
        raise ValueError("a line forecast needs at least 3 points")
    xbar, ybar = float(x.mean()), float(y.mean())
    sxx = float(((x - xbar) ** 2).sum())
    if sxx <= 0:
        raise ValueError("all x are equal; the slope is not defined")
    b = float(((x - xbar) * (y - ybar)).sum() / sxx)
    sigma2 = float(((y - ybar - b * (x - xbar)) ** 2).sum() / (n - 2))
    var_b = sigma2 / sxx
    shrink = 1.0 if not math.isfinite(slope_prior_var) else (
        slope_prior_var / (slope_prior_var + var_b) if slope_prior_var + var_b > 0 else 0.0)
    b_star = slope_prior_mean + shrink * (b - slope_prior_mean)
    var_mean = sigma2 / n + (x0 - xbar) ** 2 * shrink * var_b
    return LineForecast(x0=float(x0), estimate=ybar + b_star * (x0 - xbar), var_mean=var_mean, sigma2=sigma2,
                        slope=b_star, slope_ols=b, level_now=ybar + b_star * (float(x.max()) - xbar),
                        shrinkage=shrink, n=n)


@dataclass(frozen=True)
class BiasForecast:
    """Predictive distribution of a unit's bias (percent) over the days ahead, and time to tolerance."""

    bias_pct: float
    drift_pct_per_30d: float
    tolerance_pct: float
    horizon_days: float
    mean_at_horizon: float
    sd_at_horizon: float
    p_breach: float                 # P(|bias| > tolerance) at the horizon
    days_to_tolerance: float        # where the mean line meets tolerance (inf if never)
    days_to_tolerance_low: float    # where the prediction interval first reaches tolerance
    days_to_tolerance_high: float   # where the far side of the interval reaches it (inf if never)
    confidence: float
    warnings: tuple[str, ...] = field(default_factory=tuple)


def predictive_moments(bias_pct: float, drift_pct_per_30d: float, var_bias: float, var_drift: float,
                       cov: float, extra_var: float, days):
    """Mean and standard deviation of the predicted bias `days` after the reference time."""
    u = np.asarray(days, dtype=float) / 30.0
    mean = bias_pct + drift_pct_per_30d * u
    var = var_bias + u ** 2 * var_drift + 2 * u * cov + extra_var
    return mean, np.sqrt(np.maximum(var, 1e-12))


def breach_probability(mean, sd, tolerance_pct: float):
    """P(|X| > tolerance) for X ~ N(mean, sd^2)."""
    mean = np.asarray(mean, dtype=float)
    sd = np.asarray(sd, dtype=float)
    return stats.norm.sf((tolerance_pct - mean) / sd) + stats.norm.cdf((-tolerance_pct - mean) / sd)


def forecast_bias(bias_pct: float, drift_pct_per_30d: float, var_bias: float, var_drift: float, cov: float,
                  extra_var: float, tolerance_pct: float, horizon_days: float, confidence: float = 0.95,
                  max_days: int = 3650) -> BiasForecast:
    """Forecast a unit's bias: breach probability at the horizon and days until tolerance.

    Source: delta-method predictive variance of a linear trend (Montgomery & Runger, section 11-6,
    with the estimate covariance of the fleet model in place of the OLS one).
    """
    warnings = []
    if not all(math.isfinite(v) for v in (bias_pct, drift_pct_per_30d)):
        warnings.append("bias or drift missing: no forecast")
        nan = float("nan")
        return BiasForecast(bias_pct, drift_pct_per_30d, tolerance_pct, horizon_days, nan, nan, nan,
                            math.inf, math.inf, math.inf, confidence, tuple(warnings))
    mean_h, sd_h = predictive_moments(bias_pct, drift_pct_per_30d, var_bias, var_drift, cov, extra_var, horizon_days)
    p = float(breach_probability(mean_h, sd_h, tolerance_pct))
    days = np.arange(0, max_days + 1, dtype=float)
    mean, sd = predictive_moments(bias_pct, drift_pct_per_30d, var_bias, var_drift, cov, extra_var, days)
    z = float(stats.norm.ppf(0.5 + confidence / 2))
    hi, lo = mean + z * sd, mean - z * sd

    def first(mask) -> float:
        idx = np.flatnonzero(mask)
        return float(days[idx[0]]) if idx.size else math.inf

    est = first(np.abs(mean) >= tolerance_pct)
    early = first((hi >= tolerance_pct) | (lo <= -tolerance_pct))
    late = first((lo >= tolerance_pct) | (hi <= -tolerance_pct))
    return BiasForecast(bias_pct, drift_pct_per_30d, tolerance_pct, horizon_days, float(mean_h), float(sd_h), p,
                        est, early, late, confidence, tuple(warnings))
