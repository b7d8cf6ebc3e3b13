"""New-lot acceptance by Wald's SPRT: error rates, decision bounds and speed of catching a bad lot."""

from __future__ import annotations

import numpy as np
import pytest

from pipeline.models.lot_acceptance import run_sprt, sprt_bounds
from pipeline.models.fleet_model import fit_fleet_model
from pipeline.models.simulate import simulate_fleet
from pipeline.settings import Settings


def test_wald_bounds():
    # Wald (1945), eq. for the approximate bounds: A = log((1 - beta) / alpha), B = log(beta / (1 - alpha)),
    # here with alpha split over the two sides
    upper, lower = sprt_bounds(0.01, 0.01)
    assert upper == pytest.approx(np.log(0.99 / 0.005))
    assert lower == pytest.approx(np.log(0.01 / 0.995))


def _rates(effect: float, reps: int = 2000, n: int = 400, seed: int = 0):
    rng = np.random.default_rng(seed)
    states, used = [], []
    for _ in range(reps):
        x = rng.normal(effect, 1.5, n)
        r = run_sprt("L", x, np.full(n, 1.5**2), None, delta=2.0, alpha=0.01, beta=0.01)
        states.append(r.state)
        used.append(r.n_checks)
    return np.array(states), np.array(used)


def test_error_rates_respect_walds_inequalities():
    states, _ = _rates(0.0)
    # Wald (1945): the realised type I error is at most alpha / (1 - beta) (here per side 0.005 / 0.99, two sides)
    assert np.mean(states == "rejected") <= 0.01 / 0.99 + 3 * np.sqrt(0.01 / 2000)
    states, used = _rates(2.0, seed=1)
    # Wald (1945): the realised type II error is at most beta / (1 - alpha)
    assert np.mean(states == "accepted") <= 0.01 / 0.99 + 3 * np.sqrt(0.01 / 2000)
    # Stated speed: with repeatability SD 1.5 % a 2 % lot is rejected within 20 checks in 95 % of runs
    assert np.quantile(used[states == "rejected"], 0.95) <= 20


def test_bad_lot_in_a_simulated_fleet_is_rejected_within_days(fresh_db):
    simulate_fleet(fresh_db, n_units=40, checks_per_unit=100, seed=3, bad_lot_pct=3.0)
    result = fit_fleet_model(fresh_db, Settings())
    decision = {a.lot_id: a for a in result.acceptance}["WB-080-02"]
    first = fresh_db.execute("SELECT min(measured_at) FROM checks WHERE lot_id = 'WB-080-02'").fetchone()[0]
    assert decision.state == "rejected"
    # Issue 5: a bad lot is caught within days of its first checks across the fleet
    assert decision.n_checks <= 20
    assert (decision.decided_at - first).days <= 3
    healthy = [a for a in result.acceptance if a.lot_id != "WB-080-02"]
    assert np.mean([a.state == "rejected" for a in healthy]) < 0.2
