"""Acceptance tolerance: the rule set of settings, applied as the view `check_results_live` does."""

from __future__ import annotations

from pipeline.settings import ToleranceRule
from pipeline.standards.parameters import level_milli

# Binary floats: 0.085 - 0.080 is 0.0050000000000000044; the view allows the same slack.
FLOAT_SLACK = 1e-9


def select_rule(rules: tuple[ToleranceRule, ...], check_type: str, level: float) -> ToleranceRule | None:
    """The most specific rule for a check: type and level, then type, then level, then default."""
    key = level_milli(level)
    for want_type, want_level in ((check_type, key), (check_type, 0), ("", key), ("", 0)):
        for rule in rules:
            if rule.check_type == want_type and level_milli(rule.level) == want_level:
                return rule
    return None


def tolerance_half_width(rule: ToleranceRule, expected: float) -> float:
    """Half-width of the acceptance window: max(absolute, relative x expected), g/210L."""
    return max(rule.absolute, rule.relative * expected)


def verdict(rule: ToleranceRule, measured: float, expected: float) -> str:
    """'pass' when |measured - expected| is within the rule's half-width, else 'fail'."""
    return "pass" if abs(measured - expected) <= tolerance_half_width(rule, expected) + FLOAT_SLACK else "fail"
