"""EWMA against the NIST/SEMATECH e-Handbook 6.3.2.4 example; vectorised == loop."""

from __future__ import annotations

import numpy as np

from pipeline.charts.ewma import ewma, ewma_limits_halfwidth
from pipeline.charts.grouping import group_starts

DATA = [52.0, 47.0, 53.0, 49.3, 50.1, 47.0, 51.0, 50.1, 51.2, 50.5, 49.6, 47.6, 49.9, 51.3, 47.8, 51.2,
        52.6, 52.4, 53.6, 52.1]


def test_nist_handbook_ewma_example():
    res = ewma(np.array(DATA), lam=0.3, L=3.0, init=50.0, center=50.0, sigma=2.0539)
    # NIST/SEMATECH e-Handbook of Statistical Methods, 6.3.2.4: EWMA_1..5
    np.testing.assert_allclose(res.ewma[:5], [50.60, 49.52, 50.56, 50.18, 50.16], atol=0.005)
    # NIST/SEMATECH e-Handbook 6.3.2.4: EWMA_20 = 51.99
    assert abs(res.ewma[19] - 51.99) < 0.005
    half = ewma_limits_halfwidth(np.array([1e6]), 0.3, 3.0, 2.0539)[0]
    # NIST/SEMATECH e-Handbook 6.3.2.4: UCL 52.5884, LCL 47.4115 (asymptotic limits)
    assert abs(50 + half - 52.5884) < 1e-4 and abs(50 - half - 47.4115) < 1e-4
    # NIST/SEMATECH e-Handbook 6.3.2.4: no point out of control
    assert not ((res.ewma > res.ucl) | (res.ewma < res.lcl)).any()


def test_vectorised_equals_loop_and_exact_limits():
    rng = np.random.default_rng(3)
    codes = np.sort(rng.integers(0, 30, 2000))
    z = rng.standard_normal(2000)
    starts = group_starts(codes)
    init = rng.standard_normal(30) * 0.1
    res = ewma(z, starts, lam=0.2, L=2.86, init=init[np.unique(codes)])
    for j, g in enumerate(np.unique(codes)):
        m = np.flatnonzero(codes == g)
        e, out = init[g], []
        for v in z[m]:
            e = 0.2 * v + 0.8 * e
            out.append(e)
        # common practice: E_i = lam z_i + (1 - lam) E_{i-1} (Roberts 1959)
        np.testing.assert_allclose(res.ewma[m], out, atol=1e-9)
        i = np.arange(1, len(m) + 1)
        # Lucas & Saccucci (1990): exact limits L sqrt(lam/(2-lam) (1 - (1-lam)^(2i)))
        np.testing.assert_allclose(res.ucl[m], 2.86 * np.sqrt(0.2 / 1.8 * (1 - 0.8 ** (2 * i))))
