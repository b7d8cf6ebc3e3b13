"""Tolerance rules: the default rule and rule selection."""

import pytest

from pipeline.errors import InputError
from pipeline.settings import ToleranceRule
from pipeline.standards.parameters import validate_tolerance_rules
from pipeline.standards.tolerance import select_rule, tolerance_half_width, verdict

DEFAULT = ToleranceRule()


@pytest.mark.parametrize("level, half_width", [(0.020, 0.005), (0.080, 0.005), (0.160, 0.008)])
def test_default_rule_at_the_us_test_levels(level, half_width):
    # Common practice, from memory: US model specifications for evidential breath testers
    # (test levels 0.020, 0.080, 0.160): within +/-0.005 g/210L or +/-5 %, whichever is greater.
    assert tolerance_half_width(DEFAULT, level) == pytest.approx(half_width, rel=1e-12)
    assert verdict(DEFAULT, level + half_width, level) == "pass"
    assert verdict(DEFAULT, level - half_width, level) == "pass"
    assert verdict(DEFAULT, level + half_width + 0.001, level) == "fail"
    assert verdict(DEFAULT, level - half_width - 0.001, level) == "fail"


def test_most_specific_rule_wins():
    rules = (ToleranceRule(), ToleranceRule(absolute=0.01, relative=0.1, check_type="daily"),
             ToleranceRule(absolute=0.002, relative=0.02, level=0.08),
             ToleranceRule(absolute=0.003, relative=0.03, check_type="daily", level=0.08))
    # Settings: type and level, then type, then level, then the default.
    assert select_rule(rules, "daily", 0.080) is rules[3]
    assert select_rule(rules, "daily", 0.040) is rules[1]
    assert select_rule(rules, "control", 0.080) is rules[2]
    assert select_rule(rules, "control", 0.040) is rules[0]


def test_rule_set_without_default_is_refused():
    with pytest.raises(InputError, match="needs one default rule with neither check_type nor level"):
        validate_tolerance_rules((ToleranceRule(level=0.08),))


def test_duplicate_rules_are_refused():
    with pytest.raises(InputError, match="two tolerance rules for check_type 'daily' and level 0.08"):
        validate_tolerance_rules((ToleranceRule(), ToleranceRule(check_type="daily", level=0.08),
                                  ToleranceRule(check_type="daily", level=0.0800001)))
