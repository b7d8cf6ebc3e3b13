"""Run rules on constructed sequences (Western Electric 1956 handbook; Nelson 1984 JQT 16:237-239)."""

from __future__ import annotations

import numpy as np
import pytest

from pipeline.charts.run_rules import apply_run_rules


def rules_at(z, rule_set, rules=None):
    ev = apply_run_rules(np.array(z, dtype=float), rule_set=rule_set, rules=rules).events
    return [(int(r), n, d) for r, n, d in zip(ev["row"], ev["rule"], ev["direction"])]


def test_western_electric_rules():
    # Western Electric (1956) Statistical Quality Control Handbook, rule 1: one point beyond 3 sigma
    assert rules_at([0, 3.2, 0], "western_electric", ("WE1",)) == [(1, "WE1", "up")]
    # Western Electric (1956), rule 2: two of three successive points beyond 2 sigma on one side
    assert rules_at([0, -2.5, 0.5, -2.1], "western_electric", ("WE2",)) == [(3, "WE2", "down")]
    # Western Electric (1956), rule 3: four of five beyond 1 sigma on one side
    assert rules_at([1.5, 1.2, 0.2, 1.1, 1.3], "western_electric", ("WE3",)) == [(4, "WE3", "up")]
    # Western Electric (1956), rule 4: eight successive points on one side of the center line
    assert rules_at([0.1] * 7, "western_electric", ("WE4",)) == []
    assert rules_at([0.1] * 8, "western_electric", ("WE4",)) == [(7, "WE4", "up")]


def test_nelson_rules():
    # Nelson (1984) test 2: nine points in a row on one side
    assert rules_at([-0.2] * 9, "nelson", ("N2",)) == [(8, "N2", "down")]
    # Nelson (1984) test 3: six points in a row steadily increasing
    assert rules_at([-1, -0.5, 0, 0.3, 0.6, 0.9], "nelson", ("N3",)) == [(5, "N3", "up")]
    # Nelson (1984) test 4: fourteen points in a row alternating up and down
    alt = [0.5 if i % 2 else -0.5 for i in range(14)]
    assert rules_at(alt[:13], "nelson", ("N4",)) == [] and rules_at(alt, "nelson", ("N4",)) == [(13, "N4", "up")]
    # Nelson (1984) test 7: fifteen points in a row within 1 sigma (both sides)
    assert rules_at([0.3, -0.3] * 8, "nelson", ("N7",))[0][0] == 14
    # Nelson (1984) test 8: eight points in a row beyond 1 sigma on either side
    assert rules_at([1.5, -1.5] * 4, "nelson", ("N8",)) == [(7, "N8", "up")]


def test_rules_restart_per_group_and_names_checked():
    starts = np.zeros(10, dtype=bool)
    starts[[0, 5]] = True
    ev = apply_run_rules(np.full(10, 0.5), starts, "western_electric", ("WE4",)).events
    # common practice: a run does not continue across a new baseline segment
    assert ev.empty
    with pytest.raises(ValueError, match="unknown rule"):
        apply_run_rules(np.zeros(3), rule_set="nelson", rules=("WE1",))
