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

from pipeline.charts.grouping import Segments, grouped_lag

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

    events: pd.DataFrame  # columns: row, rule, rule_set, direction, description (names categorical)
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


class _WindowCounter:
    """Counts of True flags in the last `window` rows of each group, reusing two work arrays.

    At fleet scale a fresh array costs more than the arithmetic on it, so every count of a run
    writes into the same buffers (a count is used before the next one is made)."""

    def __init__(self, pos: np.ndarray):
        self.pos = pos
        self.running = np.empty(len(pos), dtype=np.int32)
        self.count = np.empty(len(pos), dtype=np.int32)
        self.short: dict[int, np.ndarray] = {}

    def __call__(self, flags: np.ndarray, window: int) -> np.ndarray:
        """Counts (int32, valid until the next call); -1 where the group has fewer than `window` rows."""
        c, out = self.running, self.count
        np.cumsum(flags, dtype=np.int32, out=c)
        out[:window] = c[:window]
        np.subtract(c[window:], c[:-window], out=out[window:])
        if window not in self.short:
            self.short[window] = self.pos < window - 1
        out[self.short[window]] = -1
        return out


def _rule_hits(name: str, z: np.ndarray, starts: np.ndarray, pos: np.ndarray,
               counter: _WindowCounter | None = None) -> list[tuple[np.ndarray, str]]:
    counter = _WindowCounter(pos) if counter is None else counter

    def _count(flags, starts, w):
        return counter(flags, w)

    if name in ("WE4", "N2"):
        w = 8 if name == "WE4" else 9
        return [(_count(z > 0, starts, w) == w, "up"), (_count(z < 0, starts, w) == w, "down")]
    if name in ("WE1", "N1"):
        return [(z > 3, "up"), (z < -3, "down")]
    if name in ("WE2", "N5"):
        return [(_count(z > 2, starts, 3) >= 2, "up"), (_count(z < -2, starts, 3) >= 2, "down")]
    if name in ("WE3", "N6"):
        return [(_count(z > 1, starts, 5) >= 4, "up"), (_count(z < -1, starts, 5) >= 4, "down")]
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
                    rules: tuple[str, ...] | None = None, *, only_onset: bool = True,
                    seg: Segments | None = None) -> RuleEvents:
    """Evaluate run rules on standardised Shewhart values, restarting at each group.

    Parameters:
        z: standardised individuals or X-bar values (sigma units), sorted by group then time.
        starts: True at each group's first row (None: one group).
        rule_set: 'western_electric' or 'nelson'; rules: subset of its rule names.
        only_onset: report a rule only where it becomes true (not again while it stays true).
        seg: Segments.from_starts(starts), when the caller has it already.
    Returns:
        RuleEvents; `row` indexes into z. N4 and N7, N8 report direction 'up' by convention
        (they have no side); N7 signals stratification (reduced variation).
    """
    names = select_rules(rule_set, rules)
    z = np.asarray(z, dtype=float)
    if seg is None:
        if starts is None:
            starts = np.zeros(len(z), dtype=bool)
            if len(z):
                starts[0] = True
        seg = Segments.from_starts(starts)
    starts, pos = seg.starts, seg.pos
    rows, rule_no, side = [], [], []
    counter = _WindowCounter(pos)
    for j, name in enumerate(names):
        for hit, direction in _rule_hits(name, z, starts, pos, counter):
            hit = np.asarray(hit, dtype=bool)
            if only_onset and len(hit):  # not where the rule was already true at the group's previous row
                prev = np.empty_like(hit)
                prev[0] = False
                prev[1:] = hit[:-1]
                prev[seg.start_idx] = False
                hit = hit & ~prev
            r = np.flatnonzero(hit)
            rows.append(r)
            rule_no.append(np.full(len(r), j, dtype=np.int16))
            side.append(np.full(len(r), direction == "up", dtype=bool))
    row = np.concatenate(rows) if rows else np.empty(0, dtype=np.int64)
    rule_no = np.concatenate(rule_no) if rule_no else np.empty(0, dtype=np.int16)
    up = np.concatenate(side) if side else np.empty(0, dtype=bool)
    # Events by row, then rule name; equal keys keep the order found (lexsort is stable).
    # Names are categorical, their categories in name order (codes sort as the names do).
    rule_cats = sorted(names)
    rank = np.array([rule_cats.index(n) for n in names], dtype=np.int16)
    rule_code = rank[rule_no]
    order = np.lexsort((rule_code, row))
    row, rule_code, up = row[order], rule_code[order], up[order]
    desc_cats = sorted({RULES[rule_set][n][0] for n in names})
    desc_code = np.array([desc_cats.index(RULES[rule_set][n][0]) for n in rule_cats], dtype=np.int16)[rule_code]
    events = pd.DataFrame({
        "row": row.astype(np.int64),
        "rule": pd.Categorical.from_codes(rule_code, categories=rule_cats),
        "rule_set": pd.Categorical.from_codes(np.zeros(len(row), dtype=np.int8), categories=[rule_set]),
        "direction": pd.Categorical.from_codes(up.astype(np.int8), categories=["down", "up"]),
        "description": pd.Categorical.from_codes(desc_code, categories=desc_cats)})
    return RuleEvents(events=events, rule_set=rule_set, rules=names)
