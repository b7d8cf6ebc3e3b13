"""Lot verdict rule and the date a verdict was first reached."""

from __future__ import annotations

import datetime as dt

import pytest

from pipeline.models.lot_verdicts import classify_lot, verdict_since
from pipeline.settings import ModelSettings

RULES = ModelSettings()


@pytest.mark.parametrize(("effect", "low", "high", "expected"), [
    (3.0, 2.6, 3.4, "off"),        # interval excludes 0 and |effect| > 2 % (issue 5 default rule)
    (-2.5, -2.9, -2.1, "off"),
    (1.5, 1.2, 1.8, "watch"),      # excludes 0, 1 % < |effect| <= 2 %
    (2.5, -0.2, 5.2, "watch"),     # interval includes 0 but reaches past 2 %: cannot rule out "off"
    (0.2, 0.1, 0.3, "agrees"),     # significant but of no practical size
    (0.4, -0.3, 1.1, "agrees"),
])
def test_classify_lot(effect, low, high, expected):
    # Issue 5: "off" when the interval excludes zero and the effect exceeds 2 %; watch and agrees
    # by the documented rule in pipeline/models/lot_verdicts.py
    assert classify_lot(effect, low, high, RULES) == expected


def test_thresholds_come_from_settings():
    strict = ModelSettings(lot_off_effect_pct=1.0, lot_watch_effect_pct=0.5)
    assert classify_lot(1.5, 1.2, 1.8, strict) == "off"
    assert classify_lot(0.7, 0.5, 0.9, strict) == "watch"


def test_verdict_since_is_kept_while_the_verdict_holds():
    day1, day2 = dt.date(2026, 3, 1), dt.date(2026, 3, 8)
    assert verdict_since("off", day2, ("off", day1)) == day1
    assert verdict_since("off", day2, ("watch", day1)) == day2
    assert verdict_since("agrees", day2, None) == day2
