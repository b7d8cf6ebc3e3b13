"""False alarms across a fleet: how many to expect per week, and a false-discovery-rate rule.

With thousands of units charted at once, each chart's small false-alarm rate adds up.
A chart restarted after each signal raises false alarms at the long-run rate 1/ARL0 per
check (renewal-reward theorem), so the fleet expects sum(checks per week) / ARL0 of them
per week; the superposition of many sparse independent renewal processes is close to
Poisson (Palm-Khintchine theorem), which gives P(at least one in a week).

For the fleet-level control each signal gets a p-value from the chart's in-control
run-length distribution, P0(RL <= t) for a signal t checks after the chart (re)started,
and the Benjamini-Hochberg (1995) step-up rule keeps the expected share of false signals
among the flagged units at or below q. Units are charted independently, so the p-values are
independent under the null and BH applies as published.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from pipeline.charts import arl as _arl

# Survival beyond this many checks is extended geometrically: the in-control run length of a
# Markov chain has a geometric tail whose ratio is the chain's largest eigenvalue.
_EXACT_STEPS = 1500
_P_VALUE_STATES = 150


@dataclass(frozen=True)
class FleetFalseAlarms:
    """Expected in-control false alarms per week across the fleet."""

    n_units: int
    checks_per_week: float
    arl0: tuple[float, ...]
    expected_per_week: float
    p_at_least_one: float
    method: str = "renewal rate 1/ARL0 per check per chart, summed; Poisson (Palm-Khintchine) for P(>=1)"


@dataclass(frozen=True)
class FdrResult:
    """Benjamini-Hochberg step-up decisions over a family of p-values (input order kept)."""

    q: float
    n_tests: int
    n_rejected: int
    threshold: float
    rejected: tuple[bool, ...]
    adjusted: tuple[float, ...]
    method: str = "Benjamini & Hochberg (1995) step-up"


def expected_false_alarms(checks_per_week: float | Sequence[float], arl0: float | Sequence[float]) -> FleetFalseAlarms:
    """Expected false alarms per week across units.

    Parameters: checks_per_week, one rate per unit (or one number for the whole fleet);
    arl0, the in-control ARL of each chart run on every check (e.g. (cusum_arl0, ewma_arl0));
    charts run side by side add their alarms, which slightly over-counts checks flagged by both.
    Returns: FleetFalseAlarms.
    Source: renewal-reward theorem (rate 1/ARL0 per check); Palm-Khintchine for the Poisson limit.
    """
    rates = np.atleast_1d(np.asarray(checks_per_week, dtype=float))
    arls = tuple(float(a) for a in np.atleast_1d(np.asarray(arl0, dtype=float)))
    if rates.size == 0 or np.any(~np.isfinite(rates)) or np.any(rates < 0):
        raise ValueError("checks per week must be non-negative finite numbers, one per unit")
    if not arls or any(not (a >= 1 and math.isfinite(a)) for a in arls):
        raise ValueError(f"each in-control ARL must be a finite number >= 1, got {arl0!r}")
    total = float(rates.sum())
    expected = total * sum(1.0 / a for a in arls)
    return FleetFalseAlarms(n_units=int(rates.size), checks_per_week=total, arl0=arls,
                            expected_per_week=expected, p_at_least_one=float(-math.expm1(-expected)))


def benjamini_hochberg(p_values: Sequence[float], q: float = 0.05, *, n_tests: int | None = None) -> FdrResult:
    """Benjamini-Hochberg false-discovery-rate rule.

    Parameters: p_values of the units that signalled; q the FDR level; n_tests the size of the
    family when units without a signal are left out (they count as p = 1, which is valid).
    Returns: FdrResult with BH-adjusted p-values (capped at 1) and the rejection per input.
    Source: Benjamini & Hochberg (1995), J. R. Statist. Soc. B 57:289-300: reject the i smallest
    where i is the largest with p_(i) <= i q / m.
    """
    rejected, adjusted, n_rej, threshold, m = benjamini_hochberg_arrays(p_values, q, n_tests=n_tests)
    return FdrResult(q=q, n_tests=m, n_rejected=n_rej, threshold=threshold,
                     rejected=tuple(bool(r) for r in rejected), adjusted=tuple(float(a) for a in adjusted))


def benjamini_hochberg_arrays(p_values, q: float = 0.05, *, n_tests: int | None = None
                              ) -> tuple[np.ndarray, np.ndarray, int, float, int]:
    """benjamini_hochberg as arrays, for a fleet's million signals: (rejected, adjusted, n_rejected,
    threshold, n_tests)."""
    p = np.asarray(p_values, dtype=float)
    if not 0 < q < 1:
        raise ValueError(f"q must lie in (0, 1), got {q!r}")
    if np.any(~np.isfinite(p)) or np.any((p < 0) | (p > 1)):
        raise ValueError("p-values must be numbers in [0, 1]")
    m = len(p) if n_tests is None else int(n_tests)
    if m < len(p):
        raise ValueError(f"n_tests ({m}) is smaller than the number of p-values ({len(p)})")
    if len(p) == 0:
        return np.zeros(0, dtype=bool), np.zeros(0), 0, 0.0, m
    # Any order of tied p-values gives the same result: a tie never straddles the cut (if the last
    # rejected rank ties the next, the next passes too) and tied adjusted values are equal; so the
    # fast unstable sort (numpy's SIMD argsort: 0.02 s against 0.13 s for a million signals).
    order = np.argsort(p)
    ranked = p[order]
    i = np.arange(1, len(p) + 1)
    below = ranked <= i * q / m
    n_rej = int(i[below].max()) if below.any() else 0
    adjusted_sorted = np.minimum.accumulate((ranked * m / i)[::-1])[::-1]
    adjusted = np.empty_like(p)
    adjusted[order] = np.minimum(adjusted_sorted, 1.0)
    rejected = np.zeros(len(p), dtype=bool)
    rejected[order[:n_rej]] = True
    threshold = float(ranked[n_rej - 1]) if n_rej else 0.0
    return rejected, adjusted, n_rej, threshold, m


def _p_from_survival(run_lengths: np.ndarray, survival: np.ndarray) -> np.ndarray:
    t = np.asarray(run_lengths)
    if np.any(t < 1) or np.any(t != np.floor(t)):
        raise ValueError("run lengths must be whole numbers of checks >= 1")
    t = t.astype(np.int64)
    n = len(survival)
    ratio = survival[-1] / survival[-2]
    inside = survival[np.minimum(t, n) - 1]
    beyond = survival[-1] * ratio ** np.maximum(t - n, 0).astype(float)
    return np.clip(1.0 - np.where(t <= n, inside, beyond), 0.0, 1.0)


def cusum_signal_p_values(run_lengths: Sequence[int] | int, k: float, h: float, headstart: float = 0.0) -> np.ndarray:
    """P-value of a two-sided CUSUM signal t checks after its start: P0(RL <= t).

    Source: in-control run-length distribution of the Brook & Evans (1972) chain (sides
    combined as independent, see arl.cusum_survival); geometric tail beyond 1500 checks.
    """
    t = np.atleast_1d(np.asarray(run_lengths))
    steps = int(min(max(int(t.max()), 2), _EXACT_STEPS))
    surv = _arl.cusum_survival(k, h, steps, 0.0, headstart, n_states=_P_VALUE_STATES)
    return _p_from_survival(t, surv)


def ewma_signal_p_values(run_lengths: Sequence[int] | int, lam: float, L: float) -> np.ndarray:
    """P-value of a two-sided EWMA signal t checks after its start: P0(RL <= t).

    Source: in-control run-length distribution by the Crowder (1987) Nystrom kernel;
    geometric tail beyond 1500 checks.
    """
    t = np.atleast_1d(np.asarray(run_lengths))
    steps = int(min(max(int(t.max()), 2), _EXACT_STEPS))
    surv = _arl.ewma_survival(lam, L, steps, 0.0)
    return _p_from_survival(t, surv)
