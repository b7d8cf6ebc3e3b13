"""Simulate one calendar month of check-standard results for the whole fleet, vectorised.

One numpy pass per month: no Python loop per check or per unit. Rows come out sorted by
UTC time, then unit, then check type, so the written files are deterministic.
"""

from __future__ import annotations

from datetime import date

import numpy as np

from demo_fleet.scenario import (
    DAY, DUBOWSKI_COEFFICIENT, LEVELS, MONTH_S, REFERENCE_PRESSURE_KPA, SIMULATOR_NOMINAL_C, Scenario,
    epoch_s,
)

CHECK_TYPES = np.array(["control", "daily", "verification", "calibration"])
OUTCOMES = np.array(["pass", "fail", "aborted", "invalid"])
CONTROL, DAILY, VERIFICATION, CALIBRATION = range(4)


def truncate3(x: np.ndarray) -> np.ndarray:
    """Truncate (not round) to three decimals, returned as integer thousandths.

    The small epsilon keeps values that are exact multiples of 0.001 in binary noise on their step.
    """
    return np.floor(np.asarray(x) * 1000.0 + 1e-7).astype(np.int64)


def simulate_month(sc: Scenario, month_start: date, month_index: int) -> dict[str, np.ndarray]:
    """All checks of one calendar month (clipped to the scenario's end), as column arrays.

    Returns a dict with instrument index `unit`, `t` (epoch s, UTC), `check_type` (index),
    `level` (index), `lot` (index), `target`, `measured_milli` (truncated thousandths, g/210L),
    `reading` (untruncated g/210L), `temp_c`, `pressure_kpa`, `site`, `operator` (index),
    `outcome` (index), `kind` (0 wet bath / 1 dry gas).
    """
    rng = np.random.default_rng([sc.seed, 9100, month_index])
    n = sc.n_units
    m0 = epoch_s(month_start)
    next_month = date(month_start.year + (month_start.month == 12), month_start.month % 12 + 1, 1)
    m1 = min(epoch_s(next_month), sc.t_end)
    n_days = (m1 - m0) // DAY
    d0 = (m0 - sc.t0) // DAY                                   # scenario day index of day 1
    zone = sc.site_zone[sc.unit_site]

    # daily and control checks: counts per unit-day -----------------------------------------
    days = np.arange(n_days)
    daily_n = (rng.random((n, n_days)) < 0.95).astype(np.int64)
    control_n = rng.poisson(sc.unit_control_rate[:, None], (n, n_days))
    u_rep = np.repeat(np.arange(n), n_days)
    d_rep = np.tile(days, n)
    u_d = np.repeat(u_rep, daily_n.ravel())
    day_d = np.repeat(d_rep, daily_n.ravel())
    s_d = rng.integers(6 * 3600, 9 * 3600, len(u_d))
    u_c = np.repeat(u_rep, control_n.ravel())
    day_c = np.repeat(d_rep, control_n.ravel())
    s_c = rng.integers(3 * 3600, 24 * 3600, len(u_c))      # local 01:00-03:00 never used: no DST ambiguity

    # verification: one day a month, three levels in duplicate a minute apart ----------------
    v_day = rng.integers(0, n_days, n)
    v_sec = rng.integers(10 * 3600, 15 * 3600, n)
    u_v = np.repeat(np.arange(n), 6)
    day_v = np.repeat(v_day, 6)
    s_v = np.repeat(v_sec, 6) + np.tile(np.arange(6) * 60, n)
    lvl_v = np.tile(np.array([0, 0, 1, 1, 2, 2]), n)

    unit = np.concatenate([u_d, u_c, u_v])
    day = np.concatenate([day_d, day_c, day_v])
    sec = np.concatenate([s_d, s_c, s_v])
    ctype = np.concatenate([np.full(len(u_d), DAILY), np.full(len(u_c), CONTROL), np.full(len(u_v), VERIFICATION)])
    level = np.concatenate([np.ones(len(u_d) + len(u_c), dtype=np.int64), lvl_v])
    t = sc.midnight_utc[zone[unit], d0 + day] + sec

    # calibration checks: ten minutes after each calibration in this month
    in_month = (sc.cal_start >= m0) & (sc.cal_start < m1) & (sc.cal_kind != "initial")
    cal_u = sc.cal_unit[in_month]
    cal_t = sc.cal_start[in_month] + 600
    unit = np.concatenate([unit, cal_u])
    t = np.concatenate([t, cal_t])
    day = np.concatenate([day, (cal_t - m0) // DAY])
    ctype = np.concatenate([ctype, np.full(len(cal_u), CALIBRATION)])
    level = np.concatenate([level, np.ones(len(cal_u), dtype=np.int64)])

    # who reports: in service, not silent, not out of service ---------------------------------
    gu, g0, g1 = sc.unit_gap
    keep = (t >= sc.unit_in_service[unit]) & (t < sc.unit_stop[unit]) & (t < sc.t_end) & (t >= sc.t0)
    keep &= ~((unit == gu) & (t >= g0) & (t < g1))
    order = np.lexsort((level, ctype, unit, t))
    order = order[keep[order]]
    unit, t, day, ctype, level = unit[order], t[order], day[order], ctype[order], level[order]
    # one unit never logs two checks in the same second: move a clash on by a second
    while True:
        clash = np.flatnonzero((t[1:] == t[:-1]) & (unit[1:] == unit[:-1])) + 1
        if len(clash) == 0:
            break
        t[clash] += 1
        order = np.lexsort((level, ctype, unit, t))
        unit, t, day, ctype, level = unit[order], t[order], day[order], ctype[order], level[order]
    rows = len(unit)
    site = sc.unit_site[unit]
    kind = sc.unit_kind[unit]

    # lot: a pair per kind, level and quarter; each unit alternates between the pair monthly,
    # so lots and units are crossed (the fleet model needs that to tell them apart)
    q = np.full(rows, month_index // 3)
    variant = (unit * 7 + month_index) % 2
    lot = sc.lot_table[kind, level, q, variant]
    target = np.asarray(LEVELS)[level]

    # the standard's concentration as the instrument sees it ---------------------------------
    temp = SIMULATOR_NOMINAL_C + rng.normal(0.0, 0.05, rows)
    hu, h0, h1 = sc.heater
    hot = (unit == hu) & (t >= h0) & (t < h1)
    temp[hot] = 34.6 + 0.4 * (t[hot] - h0) / max(1, h1 - h0) + rng.normal(0.0, 0.05, int(hot.sum()))
    temp = np.round(temp, 2)
    # solution changed on the 1st and the 16th at 02:30 local: count checks since then per jar
    half = (day >= 15).astype(np.int64)
    g = np.lexsort((np.arange(rows), level, half, unit))
    key = ((unit[g] * 2 + half[g]) * 3 + level[g])
    first = np.r_[True, key[1:] != key[:-1]]
    start_idx = np.maximum.accumulate(np.where(first, np.arange(rows), 0))
    since = np.empty(rows, dtype=np.int64)
    since[g] = np.arange(rows) - start_idx
    wet_factor = np.exp(DUBOWSKI_COEFFICIENT * (temp - SIMULATOR_NOMINAL_C)) * (1.0 - sc.unit_depletion[unit] * since)
    p_true = sc.site_pressure[site, np.minimum((t - sc.t0) // DAY, sc.site_pressure.shape[1] - 1)]
    p_log = np.round(p_true + rng.normal(0.0, 0.05, rows), 1)
    dry_factor = p_true / REFERENCE_PRESSURE_KPA
    seen = sc.lot_true[lot] * np.where(kind == 0, wet_factor, dry_factor)

    # the instrument's bias: baseline offset + slow drift + planted faults ---------------------
    base_key = sc.cal_unit * (1 << 34) + (sc.cal_start - sc.t0 + (1 << 33))
    row_key = unit * (1 << 34) + (t - sc.t0 + (1 << 33))
    k = np.searchsorted(base_key, row_key, side="right") - 1
    base_start = sc.cal_start[k]
    bias = sc.cal_b0[k] + sc.unit_slope[unit] * (t - base_start) / MONTH_S
    for u, onset, fixed, slope in sc.drift.itertuples(index=False):
        sel = (unit == u) & (t >= onset) & ((fixed < 0) | (t < fixed))
        bias[sel] += slope * (t[sel] - np.maximum(onset, base_start[sel])) / MONTH_S
    su, s_at, s_size = sc.step
    bias[(unit == su) & (t >= s_at) & (base_start <= s_at)] += s_size
    reading = seen * (1.0 + bias) * (1.0 + rng.normal(0.0, 1.0, rows) * sc.unit_sd[unit])
    reading = np.maximum(reading, 0.0)
    measured_milli = truncate3(reading)

    # the instrument's own verdict: wet bath against the nominal target (the instrument does not
    # read the simulator's thermometer), dry gas against target x P / 101.325 from its own barometer
    expected = target * np.where(kind == 0, 1.0, p_log / REFERENCE_PRESSURE_KPA)
    ok = np.abs(measured_milli / 1000.0 - expected) <= np.maximum(0.005, 0.05 * expected) + 1e-9
    outcome = np.where(ok, 0, 1)
    u01 = rng.random(rows)
    outcome[u01 < sc.unit_abort_rate[unit]] = 2
    outcome[(u01 >= 0.9985)] = 3
    operator = sc.site_op_start[site] + (rng.random(rows) * sc.site_op_count[site]).astype(np.int64)

    return {
        "unit": unit, "t": t, "check_type": ctype, "level": level, "lot": lot, "target": target,
        "measured_milli": measured_milli, "reading": reading, "temp_c": temp, "pressure_kpa": p_log,
        "site": site, "operator": operator, "outcome": outcome, "kind": kind,
    }
