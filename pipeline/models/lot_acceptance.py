"""New-lot acceptance: Wald's sequential probability ratio test on a lot's first checks.

Each check of the lot, in time order across the fleet, gives an error adjusted for its unit's
own estimated bias, drift and depletion, x_k ~ N(theta, s_k^2), with s_k^2 the residual
variance of its technology x level plus the variance of the unit's bias estimate. Two one-sided
SPRTs run together (H0 theta = 0 against H1 theta = +delta, and against theta = -delta), each at
alpha/2 and beta:
    LLR_+ = sum (delta x_k - delta^2/2) / s_k^2,  LLR_- = sum (-delta x_k - delta^2/2) / s_k^2.
Reject (the lot is off) when either reaches A = log((1 - beta) / (alpha/2)); accept when both are
at or below B = log(beta / (1 - alpha/2)); otherwise keep sampling (pending).
Checks on one unit share its bias; adjusting by the unit's estimate removes most of that
correlation, and what remains makes the rule somewhat quicker to react than its nominal alpha.
Source: Wald, A. (1945) "Sequential tests of statistical hypotheses", Ann. Math. Statist.
16(2):117-186; the two-sided combination of one-sided tests: Wald (1947) Sequential Analysis, ch. 5.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class SprtResult:
    """Outcome of the acceptance rule for one lot."""

    lot_id: str
    state: str                   # pending, accepted, rejected
    decided_index: int | None    # 0-based index of the deciding check
    decided_at: pd.Timestamp | None
    n_checks: int
    statistic: float             # max(LLR_+, LLR_-) at the stop (or at the end)
    upper_bound: float
    lower_bound: float
    delta_pct: float
    alpha: float
    beta: float


def sprt_bounds(alpha: float, beta: float) -> tuple[float, float]:
    """Wald's approximate bounds (A, B) for the two-sided test with alpha split over the sides."""
    a = alpha / 2.0
    return float(np.log((1.0 - beta) / a)), float(np.log(beta / (1.0 - a)))


def run_sprt(lot_id: str, x: np.ndarray, var: np.ndarray, times: pd.Series | None, *,
             delta: float, alpha: float, beta: float) -> SprtResult:
    """Run the two-sided SPRT on adjusted errors x (percent) with variances var, in time order.

    Parameters:
        x, var: adjusted errors and their variances (percent, percent^2).
        times: measured_at of each check (for decided_at), or None.
        delta: the effect under H1 (percent); alpha, beta: error rates.
    Returns:
        SprtResult; state 'rejected' (lot off), 'accepted' or 'pending'.
    """
    upper, lower = sprt_bounds(alpha, beta)
    x = np.asarray(x, float)
    var = np.asarray(var, float)
    plus = np.cumsum((delta * x - 0.5 * delta**2) / var)
    minus = np.cumsum((-delta * x - 0.5 * delta**2) / var)
    top = np.maximum(plus, minus)
    reject = np.flatnonzero(top >= upper)
    accept = np.flatnonzero((plus <= lower) & (minus <= lower))
    first_reject = reject[0] if len(reject) else None
    first_accept = accept[0] if len(accept) else None
    if first_reject is not None and (first_accept is None or first_reject < first_accept):
        state, idx = "rejected", int(first_reject)
    elif first_accept is not None:
        state, idx = "accepted", int(first_accept)
    else:
        state, idx = "pending", None
    stop = idx if idx is not None else len(x) - 1
    at = None if idx is None or times is None else pd.Timestamp(times.iloc[idx])
    return SprtResult(lot_id=lot_id, state=state, decided_index=idx, decided_at=at,
                      n_checks=int(stop + 1) if len(x) else 0,
                      statistic=float(top[stop]) if len(x) else 0.0, upper_bound=upper, lower_bound=lower,
                      delta_pct=delta, alpha=alpha, beta=beta)
