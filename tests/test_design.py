"""Chart design by run length, its simulation check, and the design-chart command."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from click.testing import CliRunner

from pipeline.charts.arl import cusum_arl, cusum_drift_arl, ewma_arl, ewma_drift_arl
from pipeline.charts.design import design_cusum, design_ewma, evaluate_cusum, ewma_L_for_arl0
from pipeline.cli import main
from helpers.run_length import simulate_cusum, simulate_ewma


def test_design_cusum_defaults():
    d = design_cusum()
    # Montgomery section 9.1.3: k is half the shift to detect
    assert d.k == 0.5
    # the design solves ARL0 = 500 exactly (Brook & Evans chain), to 1e-4 relative
    assert d.arl0 == pytest.approx(500.0, rel=1e-4)
    assert d.converged and d.warnings == ()
    # Lucas & Crosier (1982) Table 1: h = 5 gives 465 and 10.4 at 1 sigma, so ARL0 500 needs h a little above 5
    assert 5.0 < d.h < 5.2
    assert d.arl1 == pytest.approx(cusum_arl(d.k, d.h, 1.0), rel=1e-12)


def test_design_cusum_recovers_published_h():
    # Lucas & Crosier (1982) Table 1: k = 0.5, h = 5 gives ARL0 465 (read back: the design for 465 has h = 5.00)
    assert design_cusum(465.0, 1.0).h == pytest.approx(5.0, abs=0.01)
    # same table: h = 4 gives ARL0 168
    assert design_cusum(168.0, 1.0).h == pytest.approx(4.0, abs=0.01)


def test_design_cusum_records_drift():
    d = design_cusum(500.0, 1.0, drift=0.05)
    # Gan (1992) time-varying chain: the design stores the drift ARL it was evaluated at
    assert d.arl_drift == pytest.approx(cusum_drift_arl(d.k, d.h, 0.05), rel=1e-12)
    assert json.loads(json.dumps(d.parameters()))["chart"] == "cusum"


@pytest.mark.parametrize("lam,published_L", [(0.5, 3.071), (0.25, 2.998), (0.10, 2.814), (0.05, 2.615)])
def test_ewma_L_for_arl0_matches_lucas_saccucci(lam, published_L):
    # Lucas & Saccucci (1990): (lambda, L) pairs with ARL0 = 500 (lambda 0.5 CONFIRMED, others from memory)
    assert ewma_L_for_arl0(lam, 500.0) == pytest.approx(published_L, abs=3e-3)


def test_design_ewma_is_optimal():
    d = design_ewma(500.0, 1.0)
    assert d.converged
    # Crowder (1987) integral equation: the design meets ARL0 = 500
    assert d.arl0 == pytest.approx(500.0, rel=1e-4)
    # Lucas & Saccucci (1990): the optimum is no worse than their tabulated designs at 1 sigma (10.3, 11.1)
    assert d.arl1 <= ewma_arl(0.10, 2.814, 1.0) + 1e-6
    assert d.arl1 <= ewma_arl(0.25, 2.998, 1.0)
    for lam in (d.lam - 0.03, d.lam + 0.03):
        # Lucas & Saccucci (1990) design procedure: neighbouring lambdas (L re-solved) detect 1 sigma no faster
        assert ewma_arl(lam, ewma_L_for_arl0(lam, 500.0), 1.0) >= d.arl1 - 1e-6


def test_design_ewma_smaller_shift_wants_smaller_lambda():
    # Lucas & Saccucci (1990): smaller shifts are best detected with smaller lambda (about 0.05 for 0.5 sigma)
    small, large = design_ewma(500.0, 0.5), design_ewma(500.0, 2.0)
    assert small.lam < design_ewma(500.0, 1.0).lam < large.lam
    assert small.lam == pytest.approx(0.05, abs=0.015)


def test_design_ewma_records_drift():
    d = design_ewma(500.0, 1.0, drift=0.02)
    # Gan (1991): the stored drift ARL is the time-varying-kernel value for the design
    assert d.arl_drift == pytest.approx(ewma_drift_arl(d.lam, d.L, 0.02), rel=1e-12)


def test_designed_charts_false_alarm_rate_matches_simulation():
    rng = np.random.default_rng(2026)
    cusum, ewma = design_cusum(500.0, 1.0), design_ewma(500.0, 1.0)
    for rl in (simulate_cusum(cusum.k, cusum.h, 20_000, rng), simulate_ewma(ewma.lam, ewma.L, 20_000, rng)):
        rate = rl.size / rl.sum()  # false alarms per in-control check
        se = rate * (rl.std(ddof=1) / math.sqrt(rl.size)) / rl.mean()
        # renewal-reward theorem: a chart restarted after each signal raises false alarms at 1/ARL0 per check;
        # observed rate within 4 Monte Carlo standard errors of 1/500
        assert rate == pytest.approx(1.0 / 500.0, abs=4 * se)


def test_design_rejects_bad_targets():
    with pytest.raises(ValueError, match="the in-control ARL must be a finite number above 1"):
        design_cusum(0.5, 1.0)
    with pytest.raises(ValueError, match=r"the shift to detect must be positive \(in sigma\)"):
        design_ewma(500.0, 0.0)


def test_design_rejects_unreachable_arl0():
    with pytest.raises(ValueError, match="no decision interval h gives an in-control ARL of 1.5 with k = 0.5"):
        design_cusum(1.5, 1.0)
    with pytest.raises(ValueError, match="no EWMA design reaches an in-control ARL of 1.5; choose a larger ARL0"):
        design_ewma(1.5, 1.0)


def test_design_ewma_warns_when_lambda_is_on_the_bound():
    d = design_ewma(500.0, 8.0)
    # Lucas & Saccucci (1990): for very large shifts the EWMA tends to the Shewhart chart (lambda -> 1)
    assert d.lam > 0.99 and any("search bound" in w for w in d.warnings)


def test_evaluate_cusum_headstart_recorded():
    d = evaluate_cusum(0.5, 5.0, 1.0, headstart=2.5)
    # Lucas & Crosier (1982): the FIR headstart h/2 shortens the out-of-control ARL
    assert d.headstart == 2.5 and d.arl1 < cusum_arl(0.5, 5.0, 1.0)


def test_cli_design_chart_json():
    result = CliRunner().invoke(main, ["design-chart", "--arl0", "500", "--shift", "1", "--drift", "0.05", "--json"])
    assert result.exit_code == 0, result.output
    out = json.loads(result.output)
    assert out["chart"] == "cusum" and out["h"] == pytest.approx(design_cusum().h, rel=1e-9)
    assert out["arl_drift"] > 0


def test_cli_design_chart_ewma_table_and_false_alarms():
    result = CliRunner().invoke(main, ["design-chart", "--chart", "ewma", "--checks-per-week", "10000"])
    assert result.exit_code == 0, result.output
    assert "lam" in result.output and "false_alarms_per_week  20.0000" in result.output


def test_cli_design_chart_help_ends_with_example():
    result = CliRunner().invoke(main, ["design-chart", "--help"])
    assert result.output.strip().splitlines()[-1].strip().startswith("Example: breathfleet design-chart")


def test_cli_design_chart_user_error_is_one_line():
    result = CliRunner().invoke(main, ["design-chart", "--shift", "-1"])
    assert result.exit_code != 0
    assert result.output.strip() == "Error: the shift to detect must be positive (in sigma), got -1.0"


def test_cli_design_chart_defaults_come_from_the_settings(tmp_path):
    # the design shown without options is the one analyse uses (chart_parameters reads the same settings)
    settings = tmp_path / "program.toml"
    settings.write_text("[charts]\ntarget_arl0 = 370.4\nshift_sigma = 1.5\n", encoding="utf-8")
    result = CliRunner().invoke(main, ["--settings", str(settings), "design-chart", "--json"])
    assert result.exit_code == 0, result.output
    out = json.loads(result.output)
    assert out["target_arl0"] == pytest.approx(370.4) and out["shift"] == pytest.approx(1.5)
    assert out["h"] == pytest.approx(design_cusum(370.4, 1.5).h, rel=1e-9)
