"""Chart engine speed: analyse_fleet on the 10-million-check fleet against a per-unit pandas loop.

Full run: every chart of every unit except the last week's checks; then an incremental run
after that week is added back as an ingest adds it (check_results refreshed for it first, as
`breathfleet ingest` does; that refresh is timed and printed apart). Three rounds, each with both
runs, medians printed. Targets: full < 30 s, >= 50x the loop, incremental week < 3 s.
Fleet: benchmarks.fleet.benchmark_database() (the demo generator at 5,000 units x 24 months).

The loop baseline (loop_charts) is the straightforward way to do the same work: one unit at a
time, and inside it one chart segment (level, baseline period) at a time, with numpy/pandas used
freely within the segment but nothing vectorised across units or segments. Per segment it does
everything the engine does: Quesenberry Q statistics against the frozen fleet pooled sigma until
the segment has its own baseline (mean and MR-bar/d2 of its first 20 checks), z rounded as the
engine rounds it, the moving range and its limit signals, the four Western Electric rules (up and
down, reported where they start; pandas rolling windows), the two-sided tabular CUSUM with its
N+/N- counters, crossing signals and Page's onset (a Python loop over the checks, the textbook
recursion), the EWMA (scipy lfilter over the segment) with exact limits and crossing signals,
the baseline records (version 1 and 2) and the carried state. Per unit it forms the X-bar/S
replicate groups (pandas groupby) with their limit signals, fits the linearity of each
verification session (pandas groupby sums, t intervals), counts each signal's impact window
(binary search in the unit's control-check times) and the run length each signal is tested on.
After the loop, as fleet-wide steps, p-values from the in-control run-length distributions and
Benjamini-Hochberg over the signals (the same library calls as the engine). Per-segment results
are kept as arrays and joined once at the end (not one DataFrame per segment).

What is timed and compared. Each engine run (full, then incremental) is timed in a process of its
own that opens the database as `breathfleet run` does, so it starts as it does after an ingest, not
from the memory this process is left in by preparing the fleet (that made the same full run about
a third slower). The loop runs on a random sample of units, on the same checks as the
engine's full run, in this process after it, and is scaled up by checks. It runs under the same
malloc settings as analyse_fleet (batch_memory.freed_memory_kept); numpy's huge-page switch does
not apply in this process, as numpy is imported already, but the loop's arrays, one segment each,
stay far below the 4 MB where numpy asks for huge pages. It does not read or
store: it is given the sample's rows, the frozen pooled sigma and the units' control-check times
(read before its clock starts). Its estimate for the fleet is therefore: the engine's own read
and store times (the same SQL would serve the loop) + the loop's work scaled up. The engine's
store time is what its inserts take after its compute part: its points insert overlaps the rest
of its compute, so the loop is credited with that shorter store as well (in its favour). The engine's
full-run figure includes everything, also computing the fleet pooled sigma, which the loop is
given. The benchmark checks that the loop's results equal the engine's on the sample (points,
signals with impact windows and p-values, baselines, X-bar/S groups, linearity) and prints the
differences, so the two are known to do the same work. Printed ratios: end to end (loop estimate
over the engine's full run); work only (loop work over the engine's compute part, which now
shares the two cores with the points insert); and work alone (loop work over the engine's work
timed as the loop's is: in a process of its own, given its inputs in memory, nothing stored; it
also computes the fleet pooled sigma, which the loop is given; its points and signals are counted
against the full run's). The database floor is the same sorted read and the same rows stored, in
a fresh process on a fresh copy, with nothing computed: the part of a full run that the storage
itself takes, and so the highest end-to-end ratio any engine could show here.
"""

from __future__ import annotations

import json
import os
import resource
import shutil
import subprocess
import sys
import time
from dataclasses import asdict
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pandas as pd

OUT = Path(__file__).resolve().parent.parent / "bench-output"
SAMPLE_UNITS = 50
ROUNDS = 3
WE_RULES = ("WE1", "WE2", "WE3", "WE4")


def _we_rules(zs: pd.Series) -> list[tuple[str, str, pd.Series]]:
    """The Western Electric rules on one segment's z (pandas rolling windows): (rule, side, hit)."""
    out = [("WE1", "up", zs > 3), ("WE1", "down", zs < -3)]
    for rule, limit, window, need in (("WE2", 2, 3, 2), ("WE3", 1, 5, 4), ("WE4", 0, 8, 8)):
        out.append((rule, "up", (zs > limit).astype(float).rolling(window).sum() >= need))
        out.append((rule, "down", (zs < -limit).astype(float).rolling(window).sum() >= need))
    return out


def loop_charts(frame: pd.DataFrame, controls: dict, params: dict, replicate_minutes: float,
                verification_minutes: float, fdr_q: float) -> dict[str, pd.DataFrame]:
    """Every chart of every unit in `frame`, one unit and one segment at a time (see module docstring).

    frame: chart input rows (check_id, instrument_id, level, baseline_period, measured_at,
    check_type, relative_error, expected, measured, pooled_sigma) sorted by unit, level, segment,
    time; controls: unit -> sorted control-check times. Returns points, signals, baselines,
    groups and linearity frames.
    """
    from scipy.signal import lfilter
    from scipy.stats import t as t_dist

    from pipeline.charts.constants import c4, shewhart_constants
    from pipeline.charts.individuals import mr_ucl_standardised
    from pipeline.charts.signals import fleet_significance, signal_p_values

    if params["run_rules"]["set"] != "western_electric" or tuple(params["run_rules"]["rules"]) != WE_RULES:
        raise ValueError("the loop baseline implements the Western Electric rule set (the default settings)")
    k, h, headstart = params["cusum"]["k"], params["cusum"]["h"], params["cusum"]["headstart"]
    lam, L = params["ewma"]["lam"], params["ewma"]["L"]
    n_min = int(params["own_baseline_min_checks"])
    d2, mr_limit = shewhart_constants(2).d2, mr_ucl_standardised()
    window = np.timedelta64(int(replicate_minutes * 60e6), "us")
    session_gap = np.timedelta64(int(verification_minutes * 60e6), "us")
    cols = {c: [] for c in ("check_id", "position", "z", "moving_range", "cusum_upper", "cusum_lower", "ewma",
                            "ewma_ucl", "center", "sigma", "own_sigma")}
    signals, baselines, states, groups, lines = [], [], [], [], []
    for unit, u in frame.groupby("instrument_id", sort=False, observed=True):
        # (check_id, measured_at, level, baseline_period, position, chart, rule, direction, size, onset_at)
        unit_signals = []
        unit_z, unit_pos, unit_period = [], [], []
        for (level, period), g in u.groupby(["level", "baseline_period"], sort=False):
            x = g["relative_error"].to_numpy()
            t = g["measured_at"].to_numpy()
            ids = g["check_id"].to_numpy()
            pooled = g["pooled_sigma"].to_numpy()
            n = len(x)
            r = np.arange(1, n + 1)
            # Quesenberry Q: mean of the earlier checks of the segment, pooled sigma inflated by sqrt(r/(r-1)).
            prev_mean = np.zeros(n)
            prev_mean[1:] = np.cumsum(x)[:-1] / r[:-1]
            scale = pooled * np.sqrt(r / np.maximum(r - 1, 1))
            scale[0] = pooled[0]
            q = (x - prev_mean) / scale
            center = sigma = np.nan
            if n >= n_min:
                center = x[:n_min].mean()
                sigma = np.abs(np.diff(x[:n_min])).mean() / d2
            own = (r > n_min) & np.isfinite(sigma) & (sigma > 0)
            z = np.round(np.where(own, (x - center) / (sigma if sigma > 0 else 1.0), q), 9)
            zs = pd.Series(z)
            mr = zs.diff().abs().to_numpy()
            for i in np.flatnonzero(mr > mr_limit):
                unit_signals.append((ids[i], t[i], level, period, i + 1, "moving_range", "limit", "up", mr[i], None))
            for rule, side, hit in _we_rules(zs):
                start = (hit & ~hit.shift(fill_value=False)).to_numpy()
                for i in np.flatnonzero(start):
                    unit_signals.append((ids[i], t[i], level, period, i + 1, "individuals", rule, side, z[i], None))
            # Tabular CUSUM, both sides, with the counts of checks since each side was last zero.
            cu = np.empty(n)
            cl = np.empty(n)
            c_up = c_lo = headstart
            run_up = run_lo = 0
            for i in range(n):
                new_up = max(0.0, c_up + z[i] - k)
                new_lo = max(0.0, c_lo - z[i] - k)
                run_up = run_up + 1 if new_up > 0 else 0
                run_lo = run_lo + 1 if new_lo > 0 else 0
                if new_up > h and not c_up > h:
                    unit_signals.append((ids[i], t[i], level, period, i + 1, "cusum", "h", "up", new_up,
                                         t[i - run_up + 1]))
                if new_lo > h and not c_lo > h:
                    unit_signals.append((ids[i], t[i], level, period, i + 1, "cusum", "h", "down", new_lo,
                                         t[i - run_lo + 1]))
                cu[i], cl[i] = new_up, new_lo
                c_up, c_lo = new_up, new_lo
            # EWMA from 0 with exact limits.
            e = lfilter([lam], [1.0, -(1.0 - lam)], z)
            half = L * np.sqrt(lam / (2 - lam) * (1 - (1 - lam) ** (2 * r)))
            for side, beyond in (("up", e > half), ("down", e < -half)):
                for i in np.flatnonzero(beyond & ~np.r_[False, beyond[:-1]]):
                    unit_signals.append((ids[i], t[i], level, period, i + 1, "ewma", "limit", side, e[i], None))
            baselines.append((unit, level, period, 1, t[0], pooled[0], ids[0]))
            if n >= n_min:
                baselines.append((unit, level, period, 2, t[n_min - 1], sigma, ids[n_min - 1]))
            states.append((unit, level, period, n, x.sum(), cu[-1], cl[-1], e[-1], ids[-1]))
            for c, v in (("check_id", ids), ("position", r), ("z", z), ("moving_range", mr), ("cusum_upper", cu),
                         ("cusum_lower", cl), ("ewma", e), ("ewma_ucl", half),
                         ("center", np.where(own, center, prev_mean)), ("sigma", np.where(own, sigma, scale)),
                         ("own_sigma", own)):
                cols[c].append(v)
            unit_z.append(z)
            unit_pos.append(r)
            unit_period.append(np.full(n, period))
        # X-bar and S of replicate checks (same level and type, successive checks within the window).
        d = pd.DataFrame({"level": u["level"].to_numpy(), "check_type": u["check_type"].to_numpy(),
                          "t": u["measured_at"].to_numpy(), "z": np.concatenate(unit_z),
                          "check_id": u["check_id"].to_numpy(), "position": np.concatenate(unit_pos),
                          "period": np.concatenate(unit_period)})
        d = d.sort_values(["level", "check_type", "t"], kind="stable")
        brk = ((d["level"] != d["level"].shift()) | (d["check_type"] != d["check_type"].shift())
               | (d["t"].diff() > window))
        agg = d.groupby(brk.cumsum().to_numpy()).agg(
            n=("z", "size"), xbar=("z", "mean"), s=("z", "std"), check_id=("check_id", "last"), t=("t", "last"),
            level=("level", "last"), check_type=("check_type", "last"), position=("position", "last"),
            period=("period", "last"))
        agg = agg[agg["n"] >= 2]
        for row in agg.itertuples(index=False):
            c4n = c4(min(int(row.n), 100))
            s_lo, s_hi = max(0.0, c4n - 3 * np.sqrt(1 - c4n ** 2)), c4n + 3 * np.sqrt(1 - c4n ** 2)
            groups.append((unit, row.level, row.check_type, row.check_id, row.n, row.xbar, row.s))
            if abs(row.xbar) > 3 / np.sqrt(row.n):
                unit_signals.append((row.check_id, row.t, row.level, row.period, row.position, "xbar", "limit",
                                     "up" if row.xbar > 0 else "down", row.xbar, None))
            if row.s > s_hi or row.s < s_lo:
                unit_signals.append((row.check_id, row.t, row.level, row.period, row.position, "s", "limit",
                                     "up" if row.s > s_hi else "down", row.s, None))
        # Linearity of each verification session (checks of the unit within the gap of each other).
        v = u[u["check_type"] == "verification"].sort_values("measured_at", kind="stable")
        if len(v):
            sess = (v["measured_at"].diff() > session_gap).cumsum().to_numpy()
            ex, me = v["expected"].to_numpy(), v["measured"].to_numpy()
            a = pd.DataFrame({"g": sess, "x": ex, "y": me, "xx": ex * ex, "xy": ex * me, "yy": me * me,
                              "level": v["level"].to_numpy(), "t": v["measured_at"].to_numpy()}).groupby("g").agg(
                n=("x", "size"), n_levels=("level", "nunique"), started_at=("t", "min"), ended_at=("t", "max"),
                sx=("x", "sum"),
                sy=("y", "sum"), sxx=("xx", "sum"), sxy=("xy", "sum"), syy=("yy", "sum"))
            a = a[(a["n"] >= 3) & (a["n_levels"] >= 2)]
            if len(a):
                nn = a["n"].to_numpy(float)
                sxx = a["sxx"] - a["sx"] ** 2 / nn
                sxy = a["sxy"] - a["sx"] * a["sy"] / nn
                slope = sxy / sxx
                intercept = (a["sy"] - slope * a["sx"]) / nn
                s2 = np.maximum(a["syy"] - a["sy"] ** 2 / nn - slope * sxy, 0) / np.maximum(nn - 2, 1)
                tq = t_dist.ppf(0.975, np.maximum(nn - 2, 1))
                half_b = tq * np.sqrt(s2 / sxx)
                half_a = tq * np.sqrt(s2 * (1 / nn + (a["sx"] / nn) ** 2 / sxx))
                for row in zip(a["started_at"], a["ended_at"], a["n"], a["n_levels"], slope, half_b, intercept,
                               half_a, np.sqrt(s2)):
                    started, ended, nc, nl_, b, hb, a0, ha, sd = row
                    lines.append((unit, started, ended, nc, nl_, b, b - hb, b + hb, a0, a0 - ha, a0 + ha, sd,
                                  abs(b - 1) > hb, abs(a0) > ha))
        # Impact window of each signal, and the run length it is tested on (checks since the
        # previous signal of the same chart, rule and side in the segment, or since the segment began).
        if unit_signals:
            s = pd.DataFrame(unit_signals, columns=["check_id", "measured_at", "level", "baseline_period", "position",
                                                    "chart", "rule", "direction", "size", "onset_at"])
            s = s.sort_values(["measured_at", "level", "chart", "rule"], kind="stable").reset_index(drop=True)
            times = controls.get(unit, np.empty(0, dtype="datetime64[us]"))
            at = s["measured_at"].to_numpy(dtype="datetime64[us]")
            onset = s["onset_at"].fillna(s["measured_at"]).to_numpy(dtype="datetime64[us]")
            s["impact_checks"] = np.searchsorted(times, at, side="right") - np.searchsorted(times, onset, side="left")
            s = s.sort_values(["level", "baseline_period", "chart", "rule", "direction", "position"], kind="stable")
            prev = s.groupby(["level", "baseline_period", "chart", "rule", "direction"], sort=False)["position"].shift()
            s["run_length"] = np.where(prev.isna() | (prev >= s["position"]), s["position"],
                                       s["position"] - prev.fillna(0)).astype(np.int64)
            signals.append(s.assign(instrument_id=unit))
    sig = pd.concat(signals, ignore_index=True) if signals else pd.DataFrame()
    if len(sig):
        sig["p_value"] = signal_p_values(sig.assign(position=sig["run_length"]), k=k, h=h, lam=lam, L=L)
        sig["fleet_significant"] = fleet_significance(sig["p_value"].to_numpy(), fdr_q)
    points = pd.DataFrame({c: np.concatenate(v) for c, v in cols.items()})
    return {"points": points, "signals": sig,
            "baselines": pd.DataFrame(baselines, columns=["instrument_id", "level", "baseline_period", "version",
                                                          "frozen_at", "sigma", "last_check_id"]),
            "state": pd.DataFrame(states, columns=["instrument_id", "level", "baseline_period", "n", "sum_x",
                                                   "cusum_upper", "cusum_lower", "ewma", "last_check_id"]),
            "groups": pd.DataFrame(groups, columns=["instrument_id", "level", "check_type", "check_id", "n", "xbar",
                                                    "s"]),
            "linearity": pd.DataFrame(lines, columns=["instrument_id", "started_at", "ended_at", "n_checks", "n_levels",
                                                      "slope", "slope_low", "slope_high", "intercept", "intercept_low",
                                                      "intercept_high", "residual_sd", "proportional_bias",
                                                      "constant_bias"])}


def _sample(con, run_id: int, through: int) -> tuple[pd.DataFrame, dict, list[str]]:
    """The full run's chart input rows of a random sample of units, and their control-check times."""
    units = [r[0] for r in con.execute(
        f"SELECT instrument_id FROM (SELECT DISTINCT instrument_id FROM chart_state) USING SAMPLE {SAMPLE_UNITS} ROWS "
        "(reservoir, 7) ORDER BY 1").fetchall()]
    con.register("_bench_units", pd.DataFrame({"instrument_id": units}))
    frame = con.execute(
        "SELECT r.check_id, r.instrument_id, r.level, CAST(r.baseline_period * 1000 AS INTEGER) AS baseline_period, "
        "r.measured_at, r.check_type, r.relative_error, r.expected, r.measured, p.sigma AS pooled_sigma "
        "FROM check_results r JOIN _bench_units USING (instrument_id) "
        "JOIN chart_pooled_sigma p ON p.technology = coalesce(r.technology, 'unknown') "
        " AND p.standard_kind = coalesce(r.standard_kind, 'unknown') AND p.level = r.level "
        "WHERE r.check_type IN ('control', 'daily', 'verification') AND coalesce(r.outcome, 'pass') NOT IN "
        "('aborted', 'invalid') AND r.relative_error IS NOT NULL AND isfinite(r.relative_error) AND r.check_id <= $t "
        "ORDER BY r.instrument_id, r.level, baseline_period, r.measured_at, r.check_id", {"t": through}).df()
    ctl = con.execute("SELECT c.instrument_id, c.measured_at FROM checks c JOIN _bench_units USING (instrument_id) "
                      "WHERE c.check_type = 'control' ORDER BY 1, 2").df()
    con.unregister("_bench_units")
    controls = {u: g["measured_at"].to_numpy(dtype="datetime64[us]") for u, g in ctl.groupby("instrument_id")}
    return frame, controls, units


def _compare(con, loop: dict, run_id: int, through: int, units: list[str]) -> str:
    """How far the loop's results are from what the engine stored for the same units in its full run."""
    con.register("_bench_units", pd.DataFrame({"instrument_id": units}))
    try:
        pts = con.execute("SELECT p.* FROM chart_points p JOIN _bench_units USING (instrument_id) "
                          "WHERE p.check_id <= $t", {"t": through}).df()
        sig = con.execute("SELECT s.* FROM chart_signals s JOIN _bench_units USING (instrument_id) WHERE run_id = $r",
                          {"r": run_id}).df()
        n_base = con.execute("SELECT count(*) FROM chart_baselines JOIN _bench_units USING (instrument_id) "
                             "WHERE run_id = $r",
                             {"r": run_id}).fetchone()[0]
        grp = con.execute("SELECT g.* FROM chart_groups g JOIN _bench_units USING (instrument_id) WHERE run_id = $r",
                          {"r": run_id}).df()
        lin = con.execute("SELECT l.* FROM chart_linearity l JOIN _bench_units USING (instrument_id) WHERE run_id = $r",
                          {"r": run_id}).df()
    finally:
        con.unregister("_bench_units")
    m = loop["points"].merge(pts, on="check_id", suffixes=("", "_e"))
    worst = max(float(np.nanmax(np.abs(m[c] - m[f"{c}_e"]))) for c in
                ("z", "moving_range", "cusum_upper", "cusum_lower", "ewma", "ewma_ucl", "center", "sigma"))
    runs_off = int(((m["position"] != m["position_e"]) | (m["own_sigma"] != m["own_sigma_e"])).sum())
    key = ["check_id", "chart", "rule", "direction"]
    ls = loop["signals"].astype({"chart": str, "rule": str, "direction": str})
    ms = ls.merge(sig.astype({"chart": str, "rule": str, "direction": str}), on=key, how="outer", indicator=True,
                  suffixes=("", "_e"))
    both = ms[ms["_merge"] == "both"]
    unmatched = int((ms["_merge"] != "both").sum())
    impact_off = int((both["impact_checks"] != both["impact_checks_e"]).sum())
    onset_off = int((both["onset_at"].fillna(both["measured_at"]) != both["onset_at_e"].fillna(both["measured_at"])).sum())
    p_off = float(np.nanmax(np.abs(both["p_value"] - both["p_value_e"]))) if len(both) else 0.0
    gm = loop["groups"].merge(grp, on="check_id", suffixes=("", "_e"))
    g_off = float(np.max(np.abs(np.r_[gm["xbar"] - gm["xbar_e"], gm["s"] - gm["s_e"]]))) if len(gm) else 0.0
    lm = loop["linearity"].merge(lin, on=["instrument_id", "started_at"], suffixes=("", "_e"))
    l_off = float(np.nanmax(np.abs(np.r_[lm["slope"] - lm["slope_e"], lm["intercept_low"] - lm["intercept_low_e"]]))) \
        if len(lm) else 0.0
    flags_off = int(((lm["proportional_bias"] != lm["proportional_bias_e"])
                     | (lm["constant_bias"] != lm["constant_bias_e"])).sum())
    return (f"{len(m):,} of {len(loop['points']):,} points matched, max |difference| {worst:.1e}, "
            f"{runs_off} with other positions/sigma source; signals {len(both):,} matched, "
            f"{unmatched} unmatched, {impact_off} other impact windows, {onset_off} other CUSUM onsets, "
            f"max |p-value difference| {p_off:.1e}; "
            f"baselines {len(loop['baselines'])} vs {n_base}; X-bar/S groups {len(loop['groups'])} vs {len(grp)} "
            f"(max |difference| {g_off:.1e}); linearity sessions {len(loop['linearity'])} vs {len(lin)} "
            f"(max |difference| {l_off:.1e}, {flags_off} other bias flags)")


def _timed_analyse(path: str) -> None:
    """Open the database as `breathfleet run` does, time analyse_fleet, print its run as JSON."""
    from pipeline.charts.analyse import analyse_fleet
    from pipeline.db import open_database
    from pipeline.settings import Settings

    con = open_database(path)
    before = resource.getrusage(resource.RUSAGE_SELF)
    t0 = time.perf_counter()
    run = analyse_fleet(con, Settings())
    seconds = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_SELF)
    con.close()
    cpu = {"user": after.ru_utime - before.ru_utime, "kernel": after.ru_stime - before.ru_stime,
           "faults": after.ru_minflt - before.ru_minflt}
    print(json.dumps({"seconds": seconds, "cpu": cpu, "run": asdict(run)}, default=str))


# The tables a full run fills, in the order analyse stores them.
STORED = ("chart_point_values", "chart_signal_values", "chart_state", "chart_baselines", "chart_groups",
          "chart_linearity")


def _timed_floor(prepared: str, analysed: str) -> None:
    """The database part of a full run alone: analyse's sorted read of the prepared fleet, then the
    rows a full run stored (taken from `analysed`, loaded after the read and not timed) inserted
    in one transaction, nothing computed. The read's result is kept meanwhile, as analyse keeps its
    input. Prints read and store seconds as JSON."""
    import duckdb

    from pipeline.batch_memory import freed_memory_kept
    from pipeline.charts.analyse import read_chart_input
    from pipeline.db import ANALYSE_MEMORY_LIMIT, memory_limit, open_database, registered, transaction

    con = open_database(prepared)
    capacity = con.execute("SELECT count(*) FROM check_results").fetchall()[0][0]
    with memory_limit(con, ANALYSE_MEMORY_LIMIT), freed_memory_kept():
        t0 = time.perf_counter()
        held = read_chart_input(con, False, 0, set(), capacity=capacity)
        t_read = time.perf_counter() - t0
        src = duckdb.connect(analysed, read_only=True)
        rows = {t: src.sql(f"SELECT * FROM {t}").to_arrow_table() for t in STORED}  # noqa: S608
        src.close()
        t1 = time.perf_counter()
        with transaction(con):
            for table, arrow in rows.items():
                with registered(con, "_bench_rows", arrow):
                    con.execute(f"INSERT INTO {table} SELECT * FROM _bench_rows")  # noqa: S608
        t_store = time.perf_counter() - t1
    con.close()
    del held
    print(json.dumps({"read": t_read, "store": t_store}))


def _timed_compute(prepared: str) -> None:
    """The engine's chart work alone, timed as the loop is: given its inputs in memory, nothing
    stored. Read first, untimed (as the loop is given its rows, the control-check times and the
    verification values): the chart input of a full run, the verification checks and the control-check
    times, with the kernels loaded. Timed: the fleet pooled sigma (which the loop is given), every
    chart (compute_charts), the linearity fits, and the X-bar/S groups, run lengths, p-values,
    fleet significance and impact windows of the signals. Prints seconds as JSON."""
    import duckdb

    from pipeline.batch_memory import collector_paused, freed_memory_kept
    from pipeline.charts import kernels
    from pipeline.charts.analyse import (_signals_groups_baselines, _starts, chart_parameters, compute_charts,
                                         read_chart_input, read_verification_checks)
    from pipeline.charts.baselines import pooled_sigma
    from pipeline.charts.linearity import fit_linearity
    from pipeline.charts.signals import control_check_times, unit_codes
    from pipeline.db import ANALYSE_MEMORY_LIMIT, memory_limit
    from pipeline.settings import Settings

    settings = Settings()
    con = duckdb.connect(prepared, read_only=True)
    con.execute("SET enable_progress_bar = false")
    capacity = con.execute("SELECT count(*) FROM check_results").fetchall()[0][0]
    with memory_limit(con, ANALYSE_MEMORY_LIMIT), freed_memory_kept(), collector_paused():
        new = read_chart_input(con, False, 0, set(), capacity=capacity)
        verification = read_verification_checks(con, new)
        _, units, present = unit_codes(new["instrument_id"])
        times = control_check_times(con, units[present], new["measured_at"].min())
        kernels.load_all()
        params = chart_parameters(settings)
        empty = pd.DataFrame()
        t0 = time.perf_counter()
        starts = _starts(new)
        pooled = pooled_sigma(new, starts)
        out = compute_charts(new, empty, empty, empty, pooled, params, starts=starts)
        lin = fit_linearity(verification, settings.charts.verification_window_minutes)
        _, signals, _ = _signals_groups_baselines(out, lin, times, params, settings, con, 1, 1)
        seconds = time.perf_counter() - t0
    con.close()
    print(json.dumps({"seconds": seconds, "points": len(out["points"]), "signals": len(signals)}))


def _add_week(path: str) -> None:
    """Add the held-back week to the analysed fleet at `path` as an ingest delivers it: new check
    ids above every stored one, check_results brought up to date for them and the file
    checkpointed, as `breathfleet ingest` does before it publishes. Prints the seconds of the
    check_results refresh (ingest's work, printed apart from the incremental analyse; the
    checkpoint is not counted) as JSON.
    Run in a process of its own: DuckDB's memory in this process slowed the loop by a third."""
    from pipeline.db import open_database
    from pipeline.settings import Settings
    from pipeline.standards import sync_standards_settings

    con = open_database(path)
    con.execute("UPDATE _bench_week SET check_id = check_id + (SELECT max(check_id) FROM checks)")
    con.execute("INSERT INTO checks SELECT * FROM _bench_week")
    t0 = time.perf_counter()
    sync_standards_settings(con, Settings())
    seconds = time.perf_counter() - t0  # the refresh alone, as an analyse that finds it to do does it
    con.execute("CHECKPOINT")
    con.close()
    print(json.dumps({"seconds": seconds}))


def _in_new_process(function: str, *args: str) -> dict:
    """One of this module's timed functions run in a process of its own, started as `breathfleet`
    starts (pipeline/batch_memory.py prepares it before numpy loads); its last printed line, as JSON."""
    call = f"{function}({', '.join(repr(a) for a in args)})"
    done = subprocess.run([sys.executable, "-c", "from pipeline.batch_memory import prepare_batch_process; "
                           f"prepare_batch_process(); from benchmarks.bench_20_charts import {function}; {call}"],
                          check=True, stdout=subprocess.PIPE, text=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def _analyse_in_new_process(path: Path) -> tuple[SimpleNamespace, float, dict]:
    """analyse_fleet timed in a process of its own, as `breathfleet run` (or `analyse`) runs it after
    an ingest: numpy imported after the console script's preparation (pipeline/batch_memory.py),
    the database freshly opened, not the memory state this process is left in by preparing the
    fleet. Returns the run (its fields), its seconds, and its CPU seconds (user, kernel) and page
    faults: the host's speed at handling page faults varies, and with it the engine's time."""
    out = _in_new_process("_timed_analyse", str(path))
    return SimpleNamespace(**out["run"]), out["seconds"], out["cpu"]


def main() -> None:
    from pipeline.batch_memory import freed_memory_kept
    from pipeline.charts.analyse import chart_parameters
    from pipeline.db import open_database
    from pipeline.settings import Settings

    from benchmarks.fleet import benchmark_database

    # The engine's compiled kernels are cached on disk by numba: compiled by the first run on a
    # machine, loaded from the cache by every later one. Done here in a separate process, so that
    # the timed runs below load them from the cache as any later `breathfleet analyse` does.
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-c", "from pipeline.charts import kernels; kernels.load_all()"], check=True)
    t_kernels = time.perf_counter() - t0
    src = Path(benchmark_database())
    work = OUT / "charts-work.duckdb"
    shutil.copyfile(src, work)
    con = open_database(work)   # as `breathfleet run` opens it (settings of a writer, migrations)
    for t in ("chart_point_values", "chart_series", "chart_signal_values", "chart_signal_kinds", "chart_baselines", "chart_state", "chart_runs", "chart_pooled_sigma",
              "chart_groups", "chart_linearity"):
        con.execute(f"DELETE FROM {t}")  # noqa: S608
    end = con.execute("SELECT max(measured_at) FROM checks").fetchall()[0][0]
    con.execute("CREATE OR REPLACE TABLE _bench_week AS SELECT * FROM checks WHERE measured_at > $e - INTERVAL 7 DAY",
                {"e": end})
    con.execute("DELETE FROM checks WHERE measured_at > $e - INTERVAL 7 DAY", {"e": end})
    settings = Settings()
    # check_results (expected values) is filled at ingest; bring it in line with the trimmed
    # checks before timing, and checkpoint, as `breathfleet ingest` does before it publishes its
    # snapshot (so `breathfleet run` starts from a checkpointed file).
    from pipeline.standards import sync_standards_settings
    t0 = time.perf_counter()
    sync_standards_settings(con, settings)
    con.execute("CHECKPOINT")
    t_refresh = time.perf_counter() - t0
    con.close()
    prepared = OUT / "charts-prepared.duckdb"
    shutil.copyfile(work, prepared)
    os.sync()  # the benchmark's own copies are written out before a timed run, not during it
    cs = settings.charts
    params = chart_parameters(settings)
    # Rounds: the full run on a fresh copy of the prepared fleet, then the loop on its sample, so
    # that each ratio compares two timings taken minutes apart (the host's speed drifts).
    rounds = []
    for i in range(ROUNDS):
        if i:
            shutil.copyfile(prepared, work)
            os.sync()
        full, t_full, cpu = _analyse_in_new_process(work)
        work_alone = _in_new_process("_timed_compute", str(prepared))
        if (work_alone["points"], work_alone["signals"]) != (full.n_new_checks, full.n_signals):
            raise RuntimeError(f"the engine's work alone gave other results than its full run: {work_alone}")
        con = open_database(work)
        if not i:
            through = con.execute("SELECT checks_through FROM chart_runs WHERE run_id = $r",
                                  {"r": full.run_id}).fetchone()[0]
            frame, controls, units = _sample(con, full.run_id, through)
        with freed_memory_kept():  # as analyse_fleet runs
            t0 = time.perf_counter()
            loop = loop_charts(frame, controls, params, cs.replicate_window_minutes, cs.verification_window_minutes,
                               cs.fleet_fdr_q)
            t_sample = time.perf_counter() - t0
        if not i:
            agreement = _compare(con, loop, full.run_id, through, units)
        con.close()
        if not i:
            # The database floor: the same read and the same rows stored, on a fresh copy of the
            # prepared fleet, without computing anything (what no chart engine on this storage can
            # go below); its rows are the full run's, so it runs before the week is added.
            floor_db = OUT / "charts-floor.duckdb"
            shutil.copyfile(prepared, floor_db)
            os.sync()
            floor = _in_new_process("_timed_floor", str(floor_db), str(work))
            floor_db.unlink()
        refresh_week = _in_new_process("_add_week", str(work))["seconds"]
        os.sync()
        inc, t_inc, _ = _analyse_in_new_process(work)
        tm = full.timings
        loop_work = t_sample * full.n_new_checks / max(len(frame), 1)
        rounds.append({"full": t_full, "read": tm["read"], "compute": tm["compute"], "store": tm["store"],
                       "sample": t_sample, "loop_work": loop_work, "loop": tm["read"] + loop_work + tm["store"],
                       "work_alone": work_alone["seconds"], "cpu": cpu, "inc": t_inc, "inc_timings": inc.timings,
                       "refresh_week": refresh_week})
    prepared.unlink()

    def med(values):
        return float(np.median(values)), min(values), max(values)
    print(f"fleet: {full.n_new_checks + inc.n_new_checks:,} charted checks, {full.n_groups:,} chart groups ({src.name})")
    for i, r in enumerate(rounds, 1):
        print(f"round {i}: full run {r['full']:6.2f} s (read {r['read']:.2f}, compute {r['compute']:.2f}, "
              f"store {r['store']:.2f}; CPU user {r['cpu']['user']:.1f} s, kernel {r['cpu']['kernel']:.1f} s, "
              f"{r['cpu']['faults']:,} page faults); loop sample {r['sample']:.2f} s -> loop {r['loop']:.1f} s; "
              f"{r['loop'] / r['full']:.1f} x end to end, {r['loop_work'] / r['compute']:.1f} x work only; "
              f"engine work alone {r['work_alone']:.2f} s, {r['loop_work'] / r['work_alone']:.1f} x")
    full_s = med([r["full"] for r in rounds])
    e2e = med([r["loop"] / r["full"] for r in rounds])
    work_only = med([r["loop_work"] / r["compute"] for r in rounds])
    alone = med([r["loop_work"] / r["work_alone"] for r in rounds])
    print(f"full run:        {full_s[0]:8.2f} s median of {ROUNDS} ({full_s[1]:.2f}-{full_s[2]:.2f}; "
          f"{full.n_new_checks:,} checks, {full.n_signals:,} signals)   target < 30 s")
    print(f"per-unit loop:   engine read + store + loop work (sample of {len(units)} units, {len(frame):,} checks, "
          "scaled up by checks)")
    print(f"speed-up:        {e2e[0]:8.1f} x end to end, median ({e2e[1]:.1f}-{e2e[2]:.1f}; read and store on both sides)")
    print(f"                 {work_only[0]:8.1f} x work only ({work_only[1]:.1f}-{work_only[2]:.1f}; loop work / the "
          "compute part of analyse, which overlaps its points insert)")
    print(f"                 {alone[0]:8.1f} x work alone ({alone[1]:.1f}-{alone[2]:.1f}; loop work / the engine's work "
          "timed as the loop's: inputs in memory, nothing stored)   target >= 50 x the loop")
    floor_s = floor["read"] + floor["store"]
    loop_s = med([r["loop"] for r in rounds])[0]
    print(f"database floor:  {floor_s:8.2f} s (the same sorted read {floor['read']:.2f} s and the same rows stored "
          f"{floor['store']:.2f} s, nothing computed); on this storage no engine beats {loop_s / floor_s:.1f} x "
          f"end to end against the median loop ({loop_s:.1f} s)")
    print(f"loop vs engine on the sample: {agreement}")
    inc_s = med([r["inc"] for r in rounds])
    ti = sorted(rounds, key=lambda r: r["inc"])[len(rounds) // 2]["inc_timings"]
    print(f"incremental week:{inc_s[0]:8.2f} s median of {ROUNDS} ({inc_s[1]:.2f}-{inc_s[2]:.2f}; {inc.n_new_checks:,} checks; "
          f"median run: read {ti['read']:.2f} s, compute {ti['compute']:.2f} s, store {ti['store']:.2f} s)   target < 3 s")
    refresh = med([r["refresh_week"] for r in rounds])
    print(f"                 before it, ingest's refresh of check_results for the week took {refresh[0]:.2f} s "
          f"({refresh[1]:.2f}-{refresh[2]:.2f}); both together {med([r['inc'] + r['refresh_week'] for r in rounds])[0]:.2f} s")
    print(f"(not timed above: a process compiling or loading the engine's kernels took {t_kernels:.1f} s; "
          f"check_results brought in line with the trimmed checks and checkpointed in {t_refresh:.1f} s, "
          "work that ingest does)")

if __name__ == "__main__":
    main()
