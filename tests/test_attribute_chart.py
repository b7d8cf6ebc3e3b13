"""Tests of pipeline.attribute_chart: Laney's p' chart."""

from __future__ import annotations

import math

import numpy as np
import pytest

from pipeline.attribute_chart import laney_p_chart


def test_limits_follow_laney_formulas_on_a_small_case():
    x = [2, 8, 1, 6, 3]
    n = [100, 120, 80, 100, 90]
    chart = laney_p_chart(x, n)
    p_bar = sum(x) / sum(n)
    sig = [math.sqrt(p_bar * (1 - p_bar) / k) for k in n]
    z = [(xi / ni - p_bar) / s for xi, ni, s in zip(x, n, sig)]
    mr = [abs(z[i] - z[i - 1]) for i in range(1, len(z))]
    sigma_z = sum(mr) / len(mr) / 1.128
    # Laney (2002), Quality Engineering 14(4):531-537: UCL_i = p_bar + 3 sigma_pi sigma_z, sigma_z = MR-bar / 1.128
    # (the same formulas are printed in Minitab's "Methods and formulas for Laney P' chart")
    assert chart.p_bar == pytest.approx(p_bar)
    assert chart.sigma_z == pytest.approx(sigma_z)
    for i in range(len(n)):
        assert chart.ucl[i] == pytest.approx(min(1.0, p_bar + 3 * sig[i] * sigma_z))
        assert chart.lcl[i] == pytest.approx(max(0.0, p_bar - 3 * sig[i] * sigma_z))


def test_binomial_data_give_sigma_z_near_one_so_p_prime_is_the_p_chart():
    rng = np.random.default_rng(3)
    n = np.full(400, 500)
    x = rng.binomial(n, 0.03)
    chart = laney_p_chart(x, n)
    # Laney (2002): without overdispersion sigma_z is about 1 and the p' chart is the ordinary p chart
    assert 0.9 < chart.sigma_z < 1.1


def test_overdispersed_data_widen_the_limits():
    rng = np.random.default_rng(4)
    n = np.full(400, 500)
    x = rng.binomial(n, rng.beta(3, 97, 400))
    chart = laney_p_chart(x, n)
    # Laney (2002): between-subgroup variation inflates sigma_z above 1
    assert chart.sigma_z > 1.5
    p_bar = x.sum() / n.sum()
    plain_ucl = p_bar + 3 * math.sqrt(p_bar * (1 - p_bar) / 500)
    assert chart.ucl[0] > plain_ucl
    assert sum(chart.above) < sum(x / n > plain_ucl)


def test_degenerate_inputs_warn():
    chart = laney_p_chart([0, 0], [0, 10])
    assert chart.warnings
