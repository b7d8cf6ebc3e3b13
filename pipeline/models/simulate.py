"""A simulated fleet with known lot effects, unit biases, drifts and depletion, for tests and benchmarks.

Checks are written into the canonical tables (instruments, lots, service_events, checks) so the
model reads them through check_results like real data. Simulator temperature is 34.0 deg C and
dry-gas pressure 101.325 kPa, so the expected value equals the lot's target and
relative_error = measured / target - 1 exactly.
"""

from __future__ import annotations


import datetime as dt
from dataclasses import dataclass

import duckdb
import numpy as np
import pandas as pd

from pipeline.check_results import refresh_check_results


@dataclass(frozen=True)
class SimulatedFleet:
    """The truth behind a simulated fleet (percent units)."""

    lot_effects: dict[str, float]
    unit_bias: pd.DataFrame        # instrument_id, baseline_period, intercept, drift (per 30 d)
    depletion_per_100: float
    mean_drift: float
    n_checks: int
    residual_sd: dict[str, float]


def simulate_fleet(con: duckdb.DuckDBPyConnection, *, n_units: int = 60, checks_per_unit: int = 120,
                   days: int = 300, lot_days: int = 45, seed: int = 1, lot_sd: float = 0.5,
                   unit_sd: float = 0.8, drift_sd: float = 0.15, mean_drift: float = 0.05,
                   depletion_per_100: float = 0.3, bad_lot_pct: float = 0.0,
                   start: dt.datetime = dt.datetime(2026, 1, 1)) -> SimulatedFleet:
    """Insert a simulated fleet into con's tables and return its truth.

    Every unit gets one calibration at a random time (so two baseline periods); half the units
    are wet bath (solution change every 30 days), half dry gas; a new lot of each kind and level
    starts every `lot_days` days. `bad_lot_pct` is added to the effect of the lot
    'WB-080-02' (wet bath, 0.080, the third lot), which then reads high on every unit using it.
    """
    rng = np.random.default_rng(seed)
    tech = np.where(np.arange(n_units) % 3 == 0, "infrared", "fuel_cell")
    kind = np.where(np.arange(n_units) % 2 == 0, "wet_bath", "dry_gas")
    ids = np.array([f"SIM{i:05d}" for i in range(n_units)])
    con.execute("INSERT INTO instruments (instrument_id, technology, model) SELECT * FROM "
                "(SELECT unnest($a), unnest($b), 'SimModel')", {"a": ids.tolist(), "b": tech.tolist()})
    levels = np.array([0.080, 0.040])
    n_lot_slots = days // lot_days + 1
    lot_rows, lot_effects = [], {}
    for k in ("wet_bath", "dry_gas"):
        for lev in levels:
            for s in range(n_lot_slots):
                lot_id = f"{'WB' if k == 'wet_bath' else 'DG'}-{int(lev * 1000):03d}-{s:02d}"
                eff = float(rng.normal(0, lot_sd))
                if lot_id == "WB-080-02":
                    eff += bad_lot_pct
                lot_effects[lot_id] = eff
                lot_rows.append((lot_id, k, float(lev), "g/210L"))
    lots = pd.DataFrame(lot_rows, columns=["lot_id", "standard_kind", "target", "units"])
    con.register("_sim_lots", lots)
    con.execute("INSERT INTO lots (lot_id, standard_kind, target, units) SELECT * FROM _sim_lots")
    con.unregister("_sim_lots")

    n = n_units * checks_per_unit
    unit = np.repeat(np.arange(n_units), checks_per_unit)
    # Strictly increasing seconds per unit: sorted distinct draws.
    secs = np.concatenate([np.sort(rng.choice(days * 86400, checks_per_unit, replace=False))
                           for _ in range(n_units)]).astype(np.int64)
    first = secs.reshape(n_units, checks_per_unit)[:, 0]
    cal = np.floor(rng.uniform(0.25, 0.75, n_units) * days * 86400)
    period = (secs >= cal[unit]).astype(int)
    origin = np.where(period == 0, first[unit], cal[unit])
    t = (secs - origin) / (86400.0 * 30.0)
    level = np.where(rng.random(n) < 0.75, 0, 1)
    slot = secs // (lot_days * 86400)
    kind_u = kind[unit]
    lot_id = np.char.add(np.char.add(np.where(kind_u == "wet_bath", "WB-", "DG-"),
                                     np.where(level == 0, "080-", "040-")),
                         np.char.zfill(slot.astype(str), 2))
    # Wet-bath solution changes every 30 days, staggered per unit.
    phase = rng.integers(0, 30 * 86400, n_units)
    change_no = np.floor((secs - phase[unit]) / (30 * 86400)).astype(np.int64)
    wet = kind_u == "wet_bath"
    frame = pd.DataFrame({"unit": unit, "change_no": change_no})
    d_checks = frame.groupby(["unit", "change_no"]).cumcount().to_numpy()
    d = np.where(wet, d_checks / 100.0, 0.0)
    b0 = rng.normal(0, unit_sd, (n_units, 2))
    b1 = rng.normal(0, drift_sd, (n_units, 2))
    sd_map = {("fuel_cell", 0): 1.0, ("fuel_cell", 1): 1.4, ("infrared", 0): 0.7, ("infrared", 1): 1.1}
    sd = np.array([sd_map[(a, b)] for a, b in zip(tech[unit], level)])
    eff = np.array([lot_effects[x] for x in lot_id])
    y = (eff + b0[unit, period] + (mean_drift + b1[unit, period]) * t
         + np.where(wet, depletion_per_100 * d, 0.0) + rng.normal(0, 1, n) * sd)
    target = levels[level]
    measured = target * (1.0 + y / 100.0)
    measured_at = pd.Timestamp(start) + pd.to_timedelta(secs, unit="s")
    checks = pd.DataFrame({
        "check_id": np.arange(1, n + 1), "instrument_id": ids[unit], "measured_at": measured_at,
        "lot_id": lot_id, "check_type": "verification", "target": target, "measured": measured,
        "units": "g/210L", "simulator_temp_c": np.where(wet, 34.0, np.nan),
        "pressure_kpa": np.where(wet, np.nan, 101.325), "site_id": None, "operator_id": None,
        "outcome": "pass", "file_id": 0, "line": np.arange(n) + 2})
    con.register("_sim_checks", checks)
    con.execute("INSERT INTO checks SELECT * FROM _sim_checks")
    con.unregister("_sim_checks")
    events = [(ids[i], pd.Timestamp(start) + pd.Timedelta(seconds=float(cal[i])), "calibration")
              for i in range(n_units)]
    for i in np.flatnonzero(kind == "wet_bath"):
        for c in range(-1, days // 30 + 2):
            at = phase[i] + c * 30 * 86400
            events.append((ids[i], pd.Timestamp(start) + pd.Timedelta(seconds=float(at)), "solution_change"))
    ev = pd.DataFrame(events, columns=["instrument_id", "event_at", "event_type"])
    con.register("_sim_events", ev)
    con.execute("INSERT INTO service_events (instrument_id, event_at, event_type) SELECT * FROM _sim_events")
    con.unregister("_sim_events")
    refresh_check_results(con)
    truth = pd.DataFrame({"instrument_id": np.repeat(ids, 2), "baseline_period": np.tile([0, 1], n_units),
                          "intercept": b0.ravel(), "drift": mean_drift + b1.ravel()})
    return SimulatedFleet(lot_effects=lot_effects, unit_bias=truth, depletion_per_100=depletion_per_100,
                          mean_drift=mean_drift, n_checks=n,
                          residual_sd={f"{a} @ {[0.08, 0.04][b]}": v for (a, b), v in sd_map.items()})
