"""Linearity per verification session, and X-bar/S replicate groups."""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from pipeline.charts.linearity import fit_linearity
from pipeline.charts.xbar_s import xbar_s_groups


def session(unit, start, expected, measured):
    t = pd.Timestamp(start) + pd.to_timedelta(np.arange(len(expected)) * 2, unit="min")
    return pd.DataFrame({"instrument_id": unit, "measured_at": t, "expected": expected, "measured": measured,
                         "level": np.round(expected, 3)})


def test_slope_and_intercept_match_linregress_and_flags():
    exp = np.array([0.040, 0.040, 0.080, 0.080, 0.150, 0.150])
    rng = np.random.default_rng(2)
    prop = exp * 1.08 + rng.normal(0, 0.0005, 6)
    const = exp + 0.006 + rng.normal(0, 0.0005, 6)
    fits = fit_linearity(pd.concat([session("A", "2025-01-01", exp, prop), session("B", "2025-01-02", exp, const)]))
    ref = stats.linregress(exp, prop)
    tq = stats.t.ppf(0.975, 4)
    a = fits.set_index("instrument_id").loc["A"]
    # Draper & Smith ch. 1 formulas, checked against scipy.stats.linregress (an independent implementation)
    assert abs(a["slope"] - ref.slope) < 1e-10 and abs(a["intercept"] - ref.intercept) < 1e-12
    assert abs((a["slope_high"] - a["slope"]) - tq * ref.stderr) < 1e-9
    assert abs((a["intercept_high"] - a["intercept"]) - tq * ref.intercept_stderr) < 1e-9
    # a pure 8 % gain is proportional bias, a pure +0.006 offset is constant bias
    assert a["proportional_bias"] and not a["constant_bias"]
    b = fits.set_index("instrument_id").loc["B"]
    assert b["constant_bias"] and not b["proportional_bias"]


def test_single_level_sessions_are_not_fitted():
    exp = np.array([0.08, 0.08, 0.08])
    assert fit_linearity(session("A", "2025-01-01", exp, exp)).empty


def test_xbar_s_groups_limits():
    t = pd.Timestamp("2025-01-01")
    frame = pd.DataFrame({"check_id": [1, 2, 3, 4], "instrument_id": "A", "level": 0.08, "check_type": "verification",
                          "measured_at": [t, t + pd.Timedelta(minutes=2), t + pd.Timedelta(days=1),
                                          t + pd.Timedelta(days=1, minutes=3)], "z": [2.5, 3.5, 0.0, 0.5]})
    g = xbar_s_groups(frame, 10)
    assert list(g["n"]) == [2, 2]
    # Montgomery 6.3: X-bar limits +/- 3 sigma / sqrt(n) with sigma known (= 1 for standardised data)
    np.testing.assert_allclose(g["xbar_ucl"], 3 / np.sqrt(2))
    # Montgomery 6.3 (sigma known): B6 = c4 + 3 sqrt(1 - c4^2); c4(2) = 0.7979 (Walpole et al. Table A.22)
    np.testing.assert_allclose(g["s_ucl"], 0.7979 + 3 * np.sqrt(1 - 0.7979 ** 2), atol=2e-4)
    assert g["xbar"].iloc[0] == 3.0 and g["xbar"].iloc[0] > g["xbar_ucl"].iloc[0]


def test_sessions_split_by_unit_and_gap_whatever_the_row_order():
    exp = np.array([0.040, 0.080, 0.150])
    parts = [session("A", "2025-01-01 08:00", exp, exp * 1.01), session("A", "2025-01-01 10:00", exp, exp),
             session("B", "2025-01-01 08:01", exp, exp + 0.002)]
    frame = pd.concat(parts, ignore_index=True).sample(frac=1.0, random_state=3)
    fits = fit_linearity(frame, window_minutes=60.0)
    # common practice: a session is one unit's checks run together; 2 h apart are two sessions
    assert list(zip(fits["instrument_id"], fits["started_at"])) == [
        ("A", pd.Timestamp("2025-01-01 08:00")), ("A", pd.Timestamp("2025-01-01 10:00")),
        ("B", pd.Timestamp("2025-01-01 08:01"))]
    assert list(fits["n_checks"]) == [3, 3, 3] and list(fits["n_levels"]) == [3, 3, 3]
    assert abs(fits["slope"].iloc[0] - 1.01) < 1e-9
