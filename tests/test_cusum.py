"""Tabular CUSUM and the change-point estimator against Montgomery Example 9.1; vectorised == loop."""

from __future__ import annotations

import numpy as np

from pipeline.charts.changepoint import cusum_run_length
from pipeline.charts.cusum import tabular_cusum
from pipeline.charts.grouping import group_starts

DATA = [9.45, 7.99, 9.29, 11.66, 12.16, 10.18, 8.04, 11.46, 9.20, 10.34, 9.03, 11.47, 10.51, 9.40, 10.08,
        9.37, 10.62, 10.31, 8.52, 10.84, 10.90, 9.33, 12.29, 11.50, 10.60, 11.08, 10.38, 11.62, 11.31, 10.52]
C_PLUS = [0, 0, 0, 1.16, 2.82, 2.50, 0.04, 1.00, 0, 0, 0, 0.97, 0.98, 0, 0, 0, 0.12, 0, 0, 0.34, 0.74, 0,
          1.79, 2.79, 2.89, 3.47, 3.35, 4.47, 5.28]


def test_montgomery_example_9_1():
    z = np.array(DATA) - 10.0
    res = tabular_cusum(z, k=0.5, h=5.0)
    # Montgomery, Introduction to Statistical Quality Control, Example 9.1 (Table 9.2), C+ periods 1-29
    np.testing.assert_allclose(res.upper[:29], C_PLUS, atol=0.006)
    first = int(np.flatnonzero(res.upper > 5.0)[0]) + 1
    # Montgomery Example 9.1: first out-of-control signal at period 29
    assert first == 29
    n_plus = cusum_run_length(res.upper, group_starts(np.zeros(30)))
    # Montgomery Example 9.1: N+ = 7 at period 29 (shift began after period 22)
    assert n_plus[28] == 7


def loop_cusum(z, k, h0):
    up, lo, cu, cl = [], [], h0, h0
    for v in z:
        cu = max(0.0, cu + v - k)
        cl = max(0.0, cl - v - k)
        up.append(cu)
        lo.append(cl)
    return np.array(up), np.array(lo)


def test_vectorised_equals_loop_on_random_groups():
    rng = np.random.default_rng(7)
    codes = np.sort(rng.integers(0, 40, 3000))
    z = rng.standard_normal(3000) + 0.3
    starts = group_starts(codes)
    res = tabular_cusum(z, starts, k=0.5, h=5.0, headstart=2.5)
    for g in np.unique(codes):
        m = codes == g
        up, lo = loop_cusum(z[m], 0.5, 2.5)
        # common practice: the recursion C_i = max(0, C_{i-1} + z_i - k) (Page 1954)
        np.testing.assert_allclose(res.upper[m], up, atol=1e-9)
        np.testing.assert_allclose(res.lower[m], lo, atol=1e-9)
        s = np.cumsum(z[m] - 0.5)
        # Lindley's closed form of the recursion: C+_i = S_i - min(-C+_0, min_{j<=i} S_j)
        np.testing.assert_allclose(res.upper[m], s - np.minimum(-2.5, np.minimum.accumulate(s)), atol=1e-9)
