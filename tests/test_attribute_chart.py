"""Tests of pipeline.attribute_chart: Laney's p' chart."""

from __future__ import annotations

import math
from pathlib import Path

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


def _read_nhs_accidents():
    path = Path(__file__).parent / "reference" / "laney_p_nhs_accidents.csv"
    lines = [ln for ln in path.read_text().splitlines() if ln and not ln.startswith("#")]
    header, rows = lines[0].split(","), [ln.split(",") for ln in lines[1:]]
    return {name: np.array([float(row[i]) for row in rows]) for i, name in enumerate(header)}


NHS_P_BAR = 0.95289971134419116  # centre line printed for case "nhs pp" (see the CSV header)


def test_p_prime_reproduces_the_published_nhs_accidents_example():
    ref = _read_nhs_accidents()
    chart = laney_p_chart(ref["r"], ref["n"])
    # qicharts2 0.8.1 qic(chart='pp') on its dataset nhs_accidents (Mohammed et al., BMJ Qual Saf 2013;22:362-368),
    # centre line as recorded in AUS-DOH-Safety-and-Quality/PowerBI-SPC test/fixtures/qicharts2.ts, case "nhs pp"
    assert chart.p_bar == pytest.approx(NHS_P_BAR, rel=1e-14)
    sigma_p = np.sqrt(NHS_P_BAR * (1 - NHS_P_BAR) / ref["n"])
    implied_sigma_z = (ref["ucl3"] - NHS_P_BAR) / (3 * sigma_p)
    # same fixture: the sigma_z implied by each printed UCL (ul99) is one number (10.6404...), Laney (2002) sigma_z
    assert np.ptp(implied_sigma_z) < 1e-9
    assert chart.sigma_z == pytest.approx(implied_sigma_z[0], rel=1e-9)
    assert chart.sigma_z == pytest.approx(10.6404, abs=1e-4)
    # same fixture, ul99 / ll99 for all 20 weeks (3-sigma p' limits, Laney 2002)
    np.testing.assert_allclose(chart.ucl, ref["ucl3"], rtol=0, atol=1e-12)
    np.testing.assert_allclose(chart.lcl, ref["lcl3"], rtol=0, atol=1e-12)
    two_sigma = laney_p_chart(ref["r"], ref["n"], sigma_multiplier=2.0)
    # same fixture, ul95 / ll95 for all 20 weeks (2-sigma p' limits)
    np.testing.assert_allclose(two_sigma.ucl, ref["ucl2"], rtol=0, atol=1e-12)
    np.testing.assert_allclose(two_sigma.lcl, ref["lcl2"], rtol=0, atol=1e-12)
    # same fixture: every weekly proportion (its "values") lies inside the p' limits ll99..ul99
    p = np.array(chart.proportions)
    assert np.all((p > ref["lcl3"]) & (p < ref["ucl3"])) and not any(chart.above)
