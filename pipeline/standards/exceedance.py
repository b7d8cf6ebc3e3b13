"""Probability that the true breath alcohol concentration is at or above a limit, given a result.

Assumptions (stated with every result): the unit's error at the result's concentration is
its bias at the nearest checked level, scaled in proportion to concentration; the error of
the bias-corrected result is normal with the budget's combined standard uncertainty (also
scaled in proportion); the unit behaved on the day as in its checks of the current baseline
period; the subject sample itself (breath sampling, mouth alcohol, the breath:blood
convention) is not part of the budget. The figure is a statistical estimate, not a finding.

Source: JCGM 100:2008 (GUM) G.1-G.2 (normal coverage); JCGM 106:2012 for conformity
probabilities (the probability of conformity p_c = Phi((y - L) / u)).
"""

from __future__ import annotations

from dataclasses import dataclass

from scipy.stats import norm

from pipeline.errors import InputError
from pipeline.standards.uncertainty import UncertaintyBudget

ASSUMPTIONS = (
    "normal distribution of the bias-corrected result",
    "bias and uncertainty at the nearest checked level, scaled in proportion to concentration",
    "the unit behaved on the day as in its checks of the current baseline period",
    "the budget covers the instrument only, not breath sampling or the breath:blood convention",
)


@dataclass(frozen=True)
class ExceedanceProbability:
    """P(true value >= limit | result), with the inputs that made it."""

    result: float
    limit: float
    level_used: float
    bias_applied: float
    corrected_result: float
    standard_uncertainty: float
    probability: float
    assumptions: tuple[str, ...] = ASSUMPTIONS


def probability_at_or_above(result: float, limit: float, bias: float, standard_uncertainty: float) -> float:
    """P(Y >= L) for Y ~ Normal(result - bias, u): 1 - Phi((L - (R - b)) / u).

    Raises:
        InputError: standard_uncertainty is not positive.
    """
    if not standard_uncertainty > 0:
        raise InputError("standard uncertainty must be positive to give a probability")
    return float(norm.sf((limit - (result - bias)) / standard_uncertainty))


def exceedance_for_result(budget: UncertaintyBudget, result: float, limit: float) -> ExceedanceProbability:
    """Apply a unit's budget (built with as_of = the day of the test) to a subject result R.

    Raises:
        InputError: the budget has no level.
    """
    if not budget.levels:
        raise InputError(f"instrument '{budget.instrument_id}' has no uncertainty budget to apply")
    nearest = min(budget.levels, key=lambda lv: abs(lv.level - result))
    scale = result / nearest.mean_expected
    bias = nearest.bias * scale
    u = nearest.combined_standard_uncertainty * scale
    return ExceedanceProbability(result=result, limit=limit, level_used=nearest.level, bias_applied=bias,
                                 corrected_result=result - bias, standard_uncertainty=u,
                                 probability=probability_at_or_above(result, limit, bias, u))
