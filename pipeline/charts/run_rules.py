"""Western Electric and Nelson run rules on standardised individuals (or X-bar) values.

Apply only to independent, standardised Shewhart points (z = (x - center) / sigma): never to
CUSUM or EWMA statistics (autocorrelated) or to the moving range. Each rule is evaluated on
rolling windows inside each group at once; an event is the first point completing the pattern.

Sources: Western Electric Co. (1956) Statistical Quality Control Handbook, rules 1-4 (zones
A/B/C at 3, 2, 1 sigma); Nelson, L.S. (1984) "The Shewhart control chart - tests for special
causes", J. Quality Technology 16:237-239, tests 1-8.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from pipeline.charts.grouping import grouped_lag, grouped_rolling_sum, position_in_group

# rule name -> (description, window)
RULES: dict[str, dict[str, tuple[str, int]]] = {
    "western_electric": {
        "WE1": ("one point beyond 3 sigma", 1),
        "WE2": ("two of three successive points beyond 2 sigma, same side", 3),
        "WE3": ("four of five successive points beyond 1 sigma, same side", 5),
        "WE4": ("eight successive points on one side of the center line", 8),
    },
    "nelson": {
        "N1": ("one point beyond 3 sigma", 1),
        "N2": ("nine points in a row on one side of the center line", 9),
        "N3": ("six points in a row steadily increasing or decreasing", 6),
        "N4": ("fourteen points in a row alternating up and down", 14),
        "N5": ("two of three points beyond 2 sigma, same side", 3),
        "N6": ("four of five points beyond 1 sigma, same side", 5),
        "N7": ("fifteen points in a row within 1 sigma", 15),
        "N8": ("eight points in a row beyond 1 sigma, either side", 8),
    },
}


@dataclass(frozen=True)
class RuleEvents:
    """Run-rule events: one row per (row index, rule) with direction ('up'/'down')."""

    events: pd.DataFrame  # columns: row, rule, rule_set, direction, description
    rule_set: str
    rules: tuple[str, ...]


def select_rules(rule_set: str, rules: tuple[str, ...] | None = None) -> tuple[str, ...]:
    """Validate a rule-set name and a subset of its rules (None: all)."""
    if rule_set not in RULES:
        raise ValueError(f"unknown run-rule set '{rule_set}'; choose one of {', '.join(RULES)}")
    names = tuple(RULES[rule_set])
    if rules is None:
        return names
    unknown = [r for r in rules if r not in names]
    if unknown:
        raise ValueError(f"unknown rule(s) {', '.join(unknown)} for set '{rule_set}'; known: {', '.join(names)}")
    return tuple(rules)


def _rule_hits(name: str, z: np.ndarray, starts: np.ndarray, pos: np.ndarray) -> list[tuple[np.ndarray, str]]:
    def _count(flags, starts, w):
        return grouped_rolling_sum(flags, starts, w, pos=pos)

    up, down = z > 0, z < 0
    if name in ("WE1", "N1"):
        return [(z > 3, "up"), (z < -3, "down")]
    if name in ("WE2", "N5"):
        return [(_count(z > 2, starts, 3) >= 2, "up"), (_count(z < -2, starts, 3) >= 2, "down")]
    if name in ("WE3", "N6"):
        return [(_count(z > 1, starts, 5) >= 4, "up"), (_count(z < -1, starts, 5) >= 4, "down")]
    if name in ("WE4", "N2"):
        w = 8 if name == "WE4" else 9
        return [(_count(up, starts, w) == w, "up"), (_count(down, starts, w) == w, "down")]
    d = z - grouped_lag(z, starts, 1, pos=pos)
    if name == "N3":
        return [(_count(d > 0, starts, 5) == 5, "up"), (_count(d < 0, starts, 5) == 5, "down")]
    if name == "N4":
        alt = (d * grouped_lag(d, starts, 1, pos=pos)) < 0
        return [(_count(alt, starts, 12) == 12, "up")]
    if name == "N7":
        return [(_count(np.abs(z) < 1, starts, 15) == 15, "up")]
    if name == "N8":
        return [(_count(np.abs(z) > 1, starts, 8) == 8, "up")]
    raise ValueError(name)


def apply_run_rules(z: np.ndarray, starts: np.ndarray | None = None, rule_set: str = "western_electric",
                    rules: tuple[str, ...] | None = None, *, only_onset: bool = True) -> RuleEvents:
    """Evaluate run rules on standardised Shewhart values, restarting at each group.

    Parameters:
        z: standardised individuals or X-bar values (sigma units), sorted by group then time.
        starts: True at each group's first row (None: one group).
        rule_set: 'western_electric' or 'nelson'; rules: subset of its rule names.
        only_onset: report a rule only where it becomes true (not again while it stays true).
    Returns:
        RuleEvents; `row` indexes into z. N4 and N7, N8 report direction 'up' by convention
        (they have no side); N7 signals stratification (reduced variation).
    """
    names = select_rules(rule_set, rules)
    z = np.asarray(z, dtype=float)
    if starts is None:
        starts = np.zeros(len(z), dtype=bool)
        if len(z):
            starts[0] = True
    frames = []
    pos = position_in_group(starts)
    for name in names:
        for hit, direction in _rule_hits(name, z, starts, pos):
            hit = np.nan_to_num(np.asarray(hit, dtype=float)) > 0
            if only_onset:
                prev = grouped_lag(hit.astype(float), starts, 1, fill=0.0, pos=pos) > 0
                hit = hit & ~prev
            rows = np.flatnonzero(hit)
            if len(rows):
                frames.append(pd.DataFrame({"row": rows, "rule": name, "rule_set": rule_set,
                                            "direction": direction, "description": RULES[rule_set][name][0]}))
    events = (pd.concat(frames, ignore_index=True).sort_values(["row", "rule"], kind="stable").reset_index(drop=True)
              if frames else pd.DataFrame(columns=["row", "rule", "rule_set", "direction", "description"]))
    return RuleEvents(events=events, rule_set=rule_set, rules=names)
