"""Expected false alarms across a fleet, Benjamini-Hochberg, and signal p-values."""

from __future__ import annotations

import math

import numpy as np
import pytest
from statsmodels.stats.multitest import multipletests

from pipeline.charts.fleet_alarms import (
    benjamini_hochberg,
    cusum_signal_p_values,
    ewma_signal_p_values,
    expected_false_alarms,
)
from helpers.run_length import simulate_cusum, simulate_ewma

# Benjamini & Hochberg (1995), J. R. Statist. Soc. B 57:289-300, section 4 example: 15 p-values (from memory)
BH_EXAMPLE = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459,
              0.3240, 0.4262, 0.5719, 0.6528, 0.7590, 1.0000]


def test_expected_false_alarms_arithmetic():
    fa = expected_false_alarms([2.0] * 5000, 500.0)
    # renewal-reward theorem: 10,000 checks a week at 1/500 per check is 20 false alarms a week
    assert fa.expected_per_week == pytest.approx(20.0)
    # Palm-Khintchine: the superposed alarms are close to Poisson, P(>= 1) = 1 - exp(-20)
    assert fa.p_at_least_one == pytest.approx(1.0 - math.exp(-20.0))
    # two charts (CUSUM and EWMA) on every check add their alarms
    assert expected_false_alarms([2.0] * 5000, [500.0, 500.0]).expected_per_week == pytest.approx(40.0)


def test_expected_false_alarms_against_simulation():
    # 400 units, each charted for 5,000 in-control checks with a restart after every signal
    rng = np.random.default_rng(17)
    k, h, n_units, n_checks = 0.5, 5.0707, 400, 5000
    sp, sm = np.zeros(n_units), np.zeros(n_units)
    alarms = np.zeros(n_units)
    for _ in range(n_checks):
        x = rng.standard_normal(n_units)
        sp, sm = np.maximum(0.0, sp + x - k), np.maximum(0.0, sm - x - k)
        signal = (sp > h) | (sm > h)
        alarms += signal
        sp[signal] = sm[signal] = 0.0
    expected = expected_false_alarms([n_checks] * n_units, 500.0).expected_per_week
    se = alarms.std(ddof=1) * math.sqrt(n_units)
    # renewal-reward theorem: the long-run alarm count is checks / ARL0, within 4 Monte Carlo standard errors
    assert alarms.sum() == pytest.approx(expected, abs=4 * se)


def test_benjamini_hochberg_paper_example():
    result = benjamini_hochberg(BH_EXAMPLE, 0.05)
    # Benjamini & Hochberg (1995), section 4: the step-up rule rejects the four smallest at q = 0.05 (from memory)
    assert result.n_rejected == 4
    assert result.rejected == tuple([True] * 4 + [False] * 11)
    assert result.threshold == 0.0095


def test_benjamini_hochberg_matches_statsmodels():
    rng = np.random.default_rng(1)
    p = np.concatenate([rng.uniform(size=80), rng.uniform(0, 0.002, size=20)])
    ours = benjamini_hochberg(p, 0.1)
    reject, adjusted, _, _ = multipletests(p, alpha=0.1, method="fdr_bh")
    # statsmodels multipletests(method="fdr_bh"), an independent implementation of Benjamini & Hochberg (1995)
    assert ours.rejected == tuple(bool(r) for r in reject)
    np.testing.assert_allclose(ours.adjusted, adjusted, rtol=1e-12)


def test_benjamini_hochberg_n_tests_counts_silent_units_as_p_one():
    padded = benjamini_hochberg(BH_EXAMPLE[:9] + [1.0] * 6, 0.05)
    short = benjamini_hochberg(BH_EXAMPLE[:9], 0.05, n_tests=15)
    # Benjamini & Hochberg (1995): m is the size of the family; units without a signal enter with p = 1
    assert short.rejected == padded.rejected[:9]
    assert short.n_tests == 15


def test_benjamini_hochberg_rejects_bad_input():
    with pytest.raises(ValueError, match=r"p-values must be numbers in \[0, 1\]"):
        benjamini_hochberg([0.1, 1.5])
    with pytest.raises(ValueError, match=r"n_tests \(1\) is smaller than the number of p-values \(2\)"):
        benjamini_hochberg([0.1, 0.2], n_tests=1)


@pytest.mark.parametrize("chart", ["cusum", "ewma"])
def test_signal_p_values_are_valid_under_control(chart):
    rng = np.random.default_rng(23)
    if chart == "cusum":
        rl = simulate_cusum(0.5, 5.0707, 8000, rng)
        p = cusum_signal_p_values(rl, 0.5, 5.0707)
    else:
        rl = simulate_ewma(0.1336, 2.8826, 8000, rng)
        p = ewma_signal_p_values(rl, 0.1336, 2.8826)
    for alpha in (0.01, 0.05, 0.2, 0.5):
        observed = float((p <= alpha).mean())
        se = math.sqrt(alpha * (1 - alpha) / rl.size)
        # probability integral transform: P0(RL <= t) at the in-control run length is uniform, so
        # P(p <= alpha) = alpha within 4 Monte Carlo standard errors (+0.005 for the two-sided CUSUM approximation)
        assert observed == pytest.approx(alpha, abs=4 * se + 0.005)


def test_signal_p_values_increase_with_run_length():
    p = cusum_signal_p_values([1, 5, 50, 500, 5000], 0.5, 5.0)
    # common practice: an earlier signal is stronger evidence
    assert np.all(np.diff(p) > 0) and p[0] < 1e-6 and p[-1] > 0.99


def test_benjamini_hochberg_arrays_ignore_the_order_of_tied_p_values():
    # p-values of chart signals take few distinct values (one per run length): many ties. The
    # rejections and adjusted values must not depend on how the ties are ordered.
    from pipeline.charts.fleet_alarms import benjamini_hochberg_arrays

    rng = np.random.default_rng(8)
    p = np.round(rng.random(50_000) ** 3, 3)
    rejected, adjusted, n_rej, threshold, _ = benjamini_hochberg_arrays(p, 0.05)
    assert 0 < n_rej < len(p) and rejected.sum() == n_rej
    assert (rejected == (p <= threshold)).all()
    perm = rng.permutation(len(p))
    rejected2, adjusted2, n_rej2, _, _ = benjamini_hochberg_arrays(p[perm], 0.05)
    assert n_rej2 == n_rej and (rejected2 == rejected[perm]).all() and np.array_equal(adjusted2, adjusted[perm])
