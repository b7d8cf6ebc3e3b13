"""Lot verdicts from a lot's estimated effect and its interval.

Rule (settings.model): with a 95 % interval [lo, hi] for the lot effect e (percent),
- "off"   when the interval excludes 0 and |e| > lot_off_effect_pct (default 2 %): the lot is
          shown to differ from its certificate by more than the program tolerates;
- "watch" when the interval excludes 0 and |e| > lot_watch_effect_pct (default 1 %), or when
          the interval still reaches beyond +/- lot_off_effect_pct (too little data to rule out "off");
- "agrees" otherwise.
A tiny but significant effect (say 0.2 % on a million checks) is not a "watch": the rule asks
for an effect of practical size, as in an equivalence view of the certificate.
Source: common practice (a significance and a size criterion together); the 2 % default is
the issue's "off" rule.
"""

from __future__ import annotations

import datetime as dt

from pipeline.settings import ModelSettings

VERDICTS = ("agrees", "watch", "off")


def classify_lot(effect_pct: float, ci_low_pct: float, ci_high_pct: float, settings: ModelSettings) -> str:
    """Verdict of one lot: 'agrees', 'watch' or 'off' (see the module docstring for the rule)."""
    excludes_zero = ci_low_pct > 0.0 or ci_high_pct < 0.0
    size = abs(effect_pct)
    if excludes_zero and size > settings.lot_off_effect_pct:
        return "off"
    if (excludes_zero and size > settings.lot_watch_effect_pct) or \
            max(abs(ci_low_pct), abs(ci_high_pct)) > settings.lot_off_effect_pct:
        return "watch"
    return "agrees"


def verdict_since(verdict: str, fit_date: dt.date, previous: tuple[str, dt.date | None] | None) -> dt.date:
    """Date the verdict was first reached: kept from the previous fit when the verdict is unchanged."""
    if previous is not None and previous[0] == verdict and previous[1] is not None:
        return previous[1]
    return fit_date
