"""Impact windows: control checks of the signal's unit from onset to signal, against a direct count."""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd

from pipeline.charts.signals import control_check_times, impact_checks
from pipeline.db import migrate


def _database_of_checks(rng, n: int, start: str, days: int, check_types: list[str]):
    """An in-memory database with n checks of units A, B and C at random times over `days` days."""
    con = duckdb.connect(":memory:")
    migrate(con)
    checks = pd.DataFrame({
        "check_id": np.arange(1, n + 1), "instrument_id": rng.choice(["A", "B", "C"], n),
        "measured_at": pd.Timestamp(start) + pd.to_timedelta(rng.integers(0, days * 86400, n), unit="s"),
        "lot_id": "L", "check_type": rng.choice(check_types, n), "target": 0.08,
        "measured": 0.08, "units": "g/210L", "simulator_temp_c": None, "pressure_kpa": None, "site_id": None,
        "operator_id": None, "outcome": "pass", "file_id": 1, "line": np.arange(n)})
    con.register("c", checks)
    con.execute("INSERT INTO checks SELECT * FROM c")
    return con, checks


def test_impact_checks_equal_a_direct_count():
    rng = np.random.default_rng(3)
    con, checks = _database_of_checks(rng, 400, "2026-01-01", 30, ["control", "daily", "calibration"])
    # signals on check times (inclusive ends), some with an onset before, some without one
    pick = checks.sample(60, random_state=1)
    onset = pick["measured_at"] - pd.to_timedelta(rng.integers(0, 5 * 86400, len(pick)), unit="s")
    sig = pd.DataFrame({"instrument_id": pick["instrument_id"].to_numpy(),
                        "measured_at": pick["measured_at"].to_numpy(),
                        "onset_at": np.where(rng.random(len(pick)) < 0.3, pd.NaT, onset)})
    got = impact_checks(con, sig)
    ctl = checks[checks["check_type"] == "control"]
    start = sig["onset_at"].fillna(sig["measured_at"])
    want = [int(((ctl["instrument_id"] == u) & (ctl["measured_at"] >= a) & (ctl["measured_at"] <= b)).sum())
            for u, a, b in zip(sig["instrument_id"], start, sig["measured_at"])]
    assert got.tolist() == want
    assert max(want) > 1
    # units as a categorical with categories no signal uses (as analyse passes them): the same counts
    units = pd.Categorical(sig["instrument_id"], categories=["0", "A", "B", "Bz", "C", "D"])
    assert impact_checks(con, sig.assign(instrument_id=units)).tolist() == want
    # control-check times read ahead (as analyse reads them while it computes the charts): the same
    # counts, whether they cover every signal, start too late for some onsets, or lack a unit
    start_min = start.min()
    for names, lo in ((["A", "B", "C", "D"], start_min), (["A", "B", "C"], start_min + pd.Timedelta(days=3)),
                      (["A", "C"], start_min)):
        times = control_check_times(con, names, lo)
        assert impact_checks(con, sig.assign(instrument_id=units), times).tolist() == want
    # times that cover every signal are used as they are: no connection needed
    times = control_check_times(con, ["D", "C", "B", "A"], start_min)
    assert impact_checks(None, sig.assign(instrument_id=units), times).tolist() == want


class _CountingConnection:
    """A connection that counts the queries run through it."""

    def __init__(self, con):
        self.con, self.queries = con, 0

    def execute(self, *args, **kwargs):
        self.queries += 1
        return self.con.execute(*args, **kwargs)

    def __getattr__(self, name):
        return getattr(self.con, name)


def test_impact_checks_with_one_start_per_unit():
    """Control-check times read from one start per unit (as analyse reads them: each unit from its
    earliest possible onset) give the direct counts; they are used as they are where every unit's
    start comes at or before its signals' onsets, and read again where one unit's comes later."""
    rng = np.random.default_rng(5)
    con, checks = _database_of_checks(rng, 300, "2026-03-01", 20, ["control", "daily"])
    pick = checks.sample(40, random_state=2)
    onset = pick["measured_at"] - pd.to_timedelta(rng.integers(0, 4 * 86400, len(pick)), unit="s")
    sig = pd.DataFrame({"instrument_id": pick["instrument_id"].to_numpy(), "measured_at": pick["measured_at"].to_numpy(),
                        "onset_at": onset.to_numpy()})
    ctl = checks[checks["check_type"] == "control"]
    want = [int(((ctl["instrument_id"] == u) & (ctl["measured_at"] >= a) & (ctl["measured_at"] <= b)).sum())
            for u, a, b in zip(sig["instrument_id"], sig["onset_at"], sig["measured_at"])]
    assert max(want) > 1
    first_onset = sig.groupby("instrument_id")["onset_at"].min()
    names = ["A", "B", "C"]
    assert len(set(first_onset[names])) == 3  # the starts differ: one time for all would not test this
    counting = _CountingConnection(con)
    times = control_check_times(con, names, first_onset[names].to_numpy())
    assert impact_checks(counting, sig, times).tolist() == want
    assert counting.queries == 0
    late = first_onset[names].to_numpy().copy()
    late[1] += np.timedelta64(1, "s")  # B's times start one second after its earliest onset
    times = control_check_times(con, names, late)
    assert impact_checks(counting, sig, times).tolist() == want
    assert counting.queries == 1
