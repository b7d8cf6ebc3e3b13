"""Tests of pipeline.forecast: the textbook prediction interval and the bias forecast."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from pipeline.forecast import breach_probability, forecast_bias, linear_prediction_interval, shrunk_line_forecast

# Montgomery & Runger, "Applied Statistics and Probability for Engineers", Table 11-1: oxygen purity (y, %)
# against hydrocarbon level (x, %), 20 observations (data recalled from memory; the book's fitted
# values below are reproduced to every printed digit, which checks the recall).
HYDROCARBON = [0.99, 1.02, 1.15, 1.29, 1.46, 1.36, 0.87, 1.23, 1.55, 1.40,
               1.19, 1.15, 0.98, 1.01, 1.11, 1.20, 1.26, 1.32, 1.43, 0.95]
PURITY = [90.01, 89.05, 91.43, 93.74, 96.73, 94.45, 87.59, 91.77, 99.42, 93.65,
          93.54, 92.52, 90.56, 89.54, 89.85, 90.39, 93.25, 93.41, 94.98, 87.33]


def test_prediction_interval_matches_montgomery_runger_worked_example():
    pi = linear_prediction_interval(HYDROCARBON, PURITY, x0=1.00, confidence=0.95)
    # Montgomery & Runger, Example 11-1: y_hat = 74.283 + 14.947 x, sigma2_hat = 1.18
    assert pi.intercept == pytest.approx(74.283, abs=5e-4)
    assert pi.slope == pytest.approx(14.947, abs=5e-4)
    assert pi.sigma2 == pytest.approx(1.18, abs=5e-3)
    # Montgomery & Runger, section 11-6 (prediction interval on a future observation at x0 = 1.00 %):
    # 86.83 <= Y0 <= 91.63 (95 %)
    assert pi.estimate == pytest.approx(89.23, abs=5e-3)
    assert pi.low == pytest.approx(86.83, abs=5e-3)
    assert pi.high == pytest.approx(91.63, abs=5e-3)


@pytest.mark.parametrize("x0", [0.8, 1.2, 1.7])
def test_prediction_interval_agrees_with_statsmodels_ols(x0):
    pi = linear_prediction_interval(HYDROCARBON, PURITY, x0=x0, confidence=0.90)
    fit = sm.OLS(np.asarray(PURITY), sm.add_constant(np.asarray(HYDROCARBON))).fit()
    frame = fit.get_prediction(np.array([[1.0, x0]])).summary_frame(alpha=0.10)
    # Draper & Smith, "Applied Regression Analysis", 3rd ed., section 1.4 (same formula; statsmodels obs_ci)
    assert pi.low == pytest.approx(frame["obs_ci_lower"].iloc[0], rel=1e-10)
    assert pi.high == pytest.approx(frame["obs_ci_upper"].iloc[0], rel=1e-10)


def test_prediction_interval_needs_three_points():
    with pytest.raises(ValueError, match="at least 3"):
        linear_prediction_interval([1, 2], [1, 2], 3)


def test_breach_probability_two_sided():
    # common practice: P(|X| > t) for X ~ N(m, s^2)
    p = breach_probability(1.0, 2.0, 5.0)
    assert float(p) == pytest.approx(stats.norm.sf(2.0) + stats.norm.cdf(-3.0), rel=1e-12)


def test_forecast_bias_times_are_ordered_and_consistent():
    fc = forecast_bias(1.0, 0.5, var_bias=0.04, var_drift=0.01, cov=0.001, extra_var=1.0, tolerance_pct=5.0,
                       horizon_days=30)
    # the mean line meets tolerance at (5 - 1) / 0.5 * 30 = 240 days (arithmetic)
    assert fc.days_to_tolerance == 240
    assert fc.days_to_tolerance_low < fc.days_to_tolerance < fc.days_to_tolerance_high
    assert fc.mean_at_horizon == pytest.approx(1.5)
    assert fc.sd_at_horizon == pytest.approx(math.sqrt(0.04 + 0.01 + 2 * 0.001 + 1.0))


def test_forecast_without_drift_never_reaches_tolerance_on_the_mean():
    fc = forecast_bias(0.0, 0.0, 0.01, 0.0001, 0.0, 0.25, 5.0, 30)
    assert math.isinf(fc.days_to_tolerance)
    assert fc.p_breach < 1e-6


def test_unshrunk_line_forecast_is_the_textbook_prediction_variance():
    fc = shrunk_line_forecast(HYDROCARBON, PURITY, x0=1.00)
    pi = linear_prediction_interval(HYDROCARBON, PURITY, x0=1.00)
    # Montgomery & Runger, section 11-6: Var(Y0 - Y0_hat) = sigma2 (1 + 1/n + (x0 - xbar)^2 / Sxx);
    # Example 11-1 gives the fitted line 74.283 + 14.947 x
    assert fc.estimate == pytest.approx(pi.estimate, rel=1e-12)
    assert fc.var_mean + fc.sigma2 == pytest.approx(pi.standard_error ** 2, rel=1e-12)
    assert fc.slope == pytest.approx(14.947, abs=5e-4) and fc.shrinkage == 1.0


def test_shrunk_slope_moves_toward_the_prior_by_the_efron_morris_factor():
    x = np.asarray(HYDROCARBON)
    sxx = float(((x - x.mean()) ** 2).sum())
    free = shrunk_line_forecast(HYDROCARBON, PURITY, x0=1.5)
    prior_var = free.sigma2 / sxx          # prior as uncertain as the estimate: B = 1/2
    fc = shrunk_line_forecast(HYDROCARBON, PURITY, x0=1.5, slope_prior_mean=10.0, slope_prior_var=prior_var)
    # Efron & Morris (1975), JASA 70:311-319: posterior mean m + B (b - m), B = A / (A + V), variance B V
    assert fc.shrinkage == pytest.approx(0.5, rel=1e-12)
    assert fc.slope == pytest.approx(10.0 + 0.5 * (free.slope - 10.0), rel=1e-12)
    assert fc.var_mean == pytest.approx(free.sigma2 / len(x) + (1.5 - x.mean()) ** 2 * 0.5 * free.sigma2 / sxx,
                                        rel=1e-12)
    assert fc.var_mean < free.var_mean
