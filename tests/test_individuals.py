"""Individuals and moving-range limits against the NIST/SEMATECH e-Handbook 6.3.2.2 example."""

from __future__ import annotations

import numpy as np

from pipeline.charts.individuals import individuals_limits, moving_range


def test_nist_handbook_individuals_example():
    x = np.array([49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1])
    lim = individuals_limits(x)
    # NIST/SEMATECH e-Handbook 6.3.2.2: mean 50.81, MR-bar 1.8778
    assert abs(lim.center - 50.81) < 1e-9 and abs(lim.mr_bar - 1.8778) < 1e-4
    # NIST/SEMATECH e-Handbook 6.3.2.2: UCL 55.8041, LCL 45.8159 (d2 = 1.128; ours computed, so 2e-3)
    assert abs(lim.ucl - 55.8041) < 2e-3 and abs(lim.lcl - 45.8159) < 2e-3
    mr = moving_range(x)
    # common practice: the first moving range is undefined
    assert np.isnan(mr[0]) and abs(np.nanmean(mr) - lim.mr_bar) < 1e-12
