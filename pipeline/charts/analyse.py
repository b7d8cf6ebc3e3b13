"""Chart the whole fleet in one vectorised pass, incrementally: analyse_fleet(con, settings).

Pipeline per run: read new checks from check_results (sql/queries/charts_input.sql), prepend
the last stored points of their chart groups, standardise (Quesenberry Q against the frozen fleet
pooled sigma until the segment has its own frozen baseline), then individuals + moving range,
run rules, tabular CUSUM and EWMA for all groups at once; carry per-group state; store points,
baselines, signals and the run record.
"""

from __future__ import annotations

import json
import time
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor, wait
from dataclasses import asdict, dataclass
from datetime import UTC, datetime

import duckdb
import numpy as np
import pandas as pd
import pyarrow as pa

from pipeline import __version__ as SOFTWARE_VERSION
from pipeline.batch_memory import collector_paused, freed_memory_kept
from pipeline.charts import changepoint, short_run
from pipeline.charts.baselines import POOLED_METHOD, own_estimates, pooled_sigma
from pipeline.charts.cusum import tabular_cusum
from pipeline.charts.design import design_cusum, design_ewma
from pipeline.charts.ewma import ewma
from pipeline.charts.grouping import Segments, group_starts, key_runs, narrowest_codes
from pipeline.charts.linearity import fit_linearity
from pipeline.charts.xbar_s import xbar_s_groups
from pipeline.charts.individuals import moving_range, mr_ucl_standardised
from pipeline.charts.run_rules import RULES, apply_run_rules, select_rules
from pipeline.charts.dimensions import KEY, SIGNAL_KIND, series_ids, signal_kinds
from pipeline.charts.signals import (ControlCheckTimes, control_check_times, fleet_significance, impact_checks,
                                     signal_p_values, signal_run_lengths, unit_codes)
from pipeline.db import ANALYSE_MEMORY_LIMIT, fetch_arrays, memory_limit, registered, sql_text, transaction
from pipeline.settings import Settings

CHECK_TYPES = ["control", "daily", "verification"]  # the codes of charts_input.sql
# The stored columns of a point besides its series (table chart_point_values).
POINT_VALUES = ["check_id", "measured_at", "position", "relative_error", "z", "moving_range", "cusum_upper",
                "cusum_lower", "ewma", "ewma_ucl", "center", "sigma", "own_sigma"]
TAIL = 20  # stored points prepended per group: >= own baseline size and the longest run rule (15)


@dataclass(frozen=True)
class AnalysisRun:
    """What one analyse run did and how."""

    run_id: int
    mode: str
    n_new_checks: int
    n_groups: int
    n_signals: int
    n_baselines: int
    duration_s: float
    parameters: dict
    data_end: datetime | None
    # seconds: read (settings sync, check_results, state), compute (pooled sigma, every chart, linearity,
    # signal run lengths, p-values and impact windows), store (what the inserts take after compute:
    # the points insert starts when the points are computed and overlaps the rest of compute)
    timings: dict


def chart_parameters(settings: Settings) -> dict:
    """The designs and methods every baseline records (CUSUM and EWMA designed by run length)."""
    cs = settings.charts
    cusum = design_cusum(cs.target_arl0, cs.shift_sigma, headstart=cs.cusum_headstart)
    ew = design_ewma(cs.target_arl0, cs.shift_sigma)
    return {"cusum": cusum.parameters(), "ewma": ew.parameters(),
            "individuals": {"width_sigma": 3.0, "method": "individuals/moving range, sigma = MR-bar/d2"},
            "run_rules": {"set": cs.run_rules, "rules": list(select_rules(cs.run_rules, cs.rules or None))},
            "short_run": short_run.METHOD, "onset": changepoint.METHOD, "pooled_sigma": POOLED_METHOD,
            "own_baseline_min_checks": cs.own_baseline_min_checks, "fleet_fdr_q": cs.fleet_fdr_q}


def _starts(frame: pd.DataFrame) -> np.ndarray:
    inst = frame["instrument_id"]
    s = group_starts(inst.cat.codes.to_numpy() if isinstance(inst.dtype, pd.CategoricalDtype) else inst.to_numpy())
    s |= group_starts(frame["level"].to_numpy()) | group_starts(frame["baseline_period"].to_numpy())
    return s


def pooled_lookup(frame: pd.DataFrame, pooled: pd.DataFrame, rows: np.ndarray | None = None) -> np.ndarray:
    """The frozen pooled sigma of each row's technology, standard kind and level (NaN if none yet),
    for `rows` of the frame (all rows if None). Looked up per run of rows with one key."""
    pool_key = ["technology", "standard_kind", "level"]
    rows = np.arange(len(frame)) if rows is None else np.asarray(rows, dtype=np.int64)
    if frame.empty or not len(rows):
        return np.empty(len(rows))
    run, code, first = key_runs(frame, pool_key)
    keys = frame[pool_key].iloc[first].astype({"technology": str, "standard_kind": str})
    sigma = keys.merge(pooled, how="left", on=pool_key)["sigma"].to_numpy(dtype=float)
    return sigma[code[np.searchsorted(run, rows, side="right") - 1]]


def compute_charts(new: pd.DataFrame, tail: pd.DataFrame, state: pd.DataFrame, own: pd.DataFrame,
                   pooled: pd.DataFrame, params: dict, *, starts: np.ndarray | None = None,
                   on_points: Callable[[pd.DataFrame], None] | None = None) -> dict:
    """Pure chart computation for new checks of many groups (no database access).

    new: new checks (KEY, check_id, measured_at, check_type, relative_error, technology, standard_kind),
      sorted by KEY then time. tail: stored points (KEY, check_id, measured_at, relative_error, position)
      of the same groups. state: chart_state rows; own: stored own baselines (KEY, center, sigma);
      pooled: technology, standard_kind, level, sigma. Returns points (the lower EWMA limit is the upper one
      negated: readers compute it), limits (the constant individuals and moving-range limits of
      every point, recorded with the run), signals, baselines, state frames, check_type and
      onsets_stored (CUSUM signals whose onset is a stored point: check_id, direction, KEY, position).
    Every statistic works on the arrays of all groups back to back (grouping.Segments computed once);
    in a full run (no tail) the new rows are the frame, so nothing is copied to select them.
    starts: _starts(new), when the caller has it (used when there is no tail).
    on_points: called with the points frame as soon as it is complete, before the run rules and
    signals are worked out (analyse starts storing it then); its arrays are not changed after.
    """
    n_min = int(params["own_baseline_min_checks"])
    k, h = params["cusum"]["k"], params["cusum"]["h"]
    headstart = params["cusum"]["headstart"]
    lam, L = params["ewma"]["lam"], params["ewma"]["L"]
    has_old = len(tail) > 0
    if has_old:
        new = new.assign(old=False)
        tail = tail.assign(old=True).merge(new[KEY + ["technology", "standard_kind"]].drop_duplicates(KEY),
                                           how="left", on=KEY)
        frame = pd.concat([tail, new], ignore_index=True)
        # By KEY, stored points before new checks, then time and id (a stable sort on arrays).
        old = frame["old"].to_numpy()
        order = np.lexsort((frame["check_id"].to_numpy(), frame["measured_at"].to_numpy(), ~old,
                            frame["baseline_period"].to_numpy(), frame["level"].to_numpy(),
                            _sort_codes(frame["instrument_id"])))
        frame = frame.take(order).reset_index(drop=True)
        old = old[order]
    else:
        frame = new.reset_index(drop=True)
        old = np.zeros(len(frame), dtype=bool)
    nm = ~old
    new_idx = np.flatnonzero(nm) if has_old else None

    def of_new(a):  # the new rows of a per-row array (all rows in a full run)
        return a[nm] if has_old else a
    # Unit names as categorical codes: string arrays are the slow part at fleet scale.
    inst = frame["instrument_id"]
    if isinstance(inst.dtype, pd.CategoricalDtype):
        inst_codes, inst_names = inst.cat.codes.to_numpy(), inst.cat.categories
    else:
        inst_codes, inst_names = pd.factorize(inst)
        frame["instrument_id"] = pd.Categorical.from_codes(inst_codes, categories=inst_names)

    def unit_of(idx):
        return pd.Categorical.from_codes(inst_codes[idx] if idx is not None else inst_codes, categories=inst_names)
    if has_old or starts is None:
        starts = _starts(frame)
    seg = Segments.from_starts(starts)
    gid, pos0 = seg.gid, seg.pos
    n_groups = seg.n_groups
    st = state.set_index(KEY) if len(state) else None
    # Carried values are looked up once per group, then spread to the group's rows. The arithmetic
    # below is the same everywhere; at fleet scale every temporary array costs more than the
    # arithmetic itself, so a full run (no state, no tail) uses scalars and writes in place.
    group_keys = pd.MultiIndex.from_frame(frame[KEY].iloc[seg.start_idx]) if (st is not None or len(own)) else None

    def carried(col, default):
        if st is None:
            return default
        return st[col].reindex(group_keys).fillna(default).to_numpy(dtype=float)[gid]
    n0, sum0 = carried("n", 0.0), carried("sum_x", 0.0)
    x = frame["relative_error"].to_numpy(dtype=float)
    if has_old:
        n_tail = pd.Series(old.astype(int)).groupby(gid).transform("sum").to_numpy()
        tail_sum = pd.Series(np.where(old, x, 0.0)).groupby(gid).transform("sum").to_numpy()
    else:
        n_tail, tail_sum = 0, 0.0
    r0 = n0 - n_tail  # checks of the segment charted before this frame's first row (whole counts)
    r0 = int(r0) if np.isscalar(r0) else r0.astype(np.int64)
    position = np.add(r0, pos0)  # 1-based check number in the segment
    position += 1
    # Own baseline: stored, or frozen now from the first n_min checks of the segment (per group).
    center_g = np.full(n_groups, np.nan)
    sigma_g = np.full(n_groups, np.nan)
    if len(own):
        o = own.set_index(KEY)
        center_g = o["center"].reindex(group_keys).to_numpy(dtype=float)
        sigma_g = o["sigma"].reindex(group_keys).to_numpy(dtype=float)
    check_no = pos0 if np.isscalar(r0) and r0 == 0 else position - 1
    est = own_estimates(x, starts, check_no, n_min, seg=seg)
    new_own = est[np.isnan(center_g[est["group"].to_numpy()])] if len(est) else est
    if len(new_own):
        fill_c, fill_s = np.full(n_groups, np.nan), np.full(n_groups, np.nan)
        fill_c[new_own["group"].to_numpy()] = new_own["center"].to_numpy()
        fill_s[new_own["group"].to_numpy()] = new_own["sigma"].to_numpy()
        center_g = np.where(np.isnan(center_g), fill_c, center_g)
        sigma_g = np.where(np.isnan(sigma_g), fill_s, sigma_g)
    use_own = position > n_min
    use_own &= (np.isfinite(sigma_g) & (sigma_g > 0))[gid]
    # z = (x - center) / sigma on the unit's own baseline; Quesenberry Q with the frozen pooled
    # sigma elsewhere (sum of x before the first row of this frame carried in).
    center_out = center_g[gid]
    sigma_out = sigma_g[gid]
    z = x - center_out
    with np.errstate(divide="ignore", invalid="ignore"):  # rows without an own sigma are replaced below
        z /= sigma_out
    q_rows = np.flatnonzero(~use_own)
    # Segments that begin in this frame (their version-1 baseline is frozen now); one pooled-sigma
    # lookup serves them and the Q-phase rows.
    first_rows = seg.start_idx[(position[seg.start_idx] == 1) & ~old[seg.start_idx]]
    q_pool, first_pool = np.split(pooled_lookup(frame, pooled, np.r_[q_rows, first_rows]), [len(q_rows)])

    def rows_of(a):
        return a if np.isscalar(a) else a[q_rows]
    q, q_center, q_scale = short_run.quesenberry_q(x, starts, q_pool,
                                                   r0=rows_of(r0), sum0=rows_of(sum0 - tail_sum), seg=seg, rows=q_rows)
    z[q_rows] = q
    center_out[q_rows] = q_center
    sigma_out[q_rows] = q_scale
    del q, q_center, q_scale
    # Coarse (truncated) results tie often: cumulative-sum noise must not put a tie on one side.
    np.round(z, 9, out=z)
    if has_old and "z" in frame:
        z = np.where(old, frame["z"].to_numpy(dtype=float, na_value=np.nan), z)
    mr = moving_range(z, seg=seg)
    # CUSUM and EWMA over new rows only, from the carried state.
    zn = of_new(z)
    seg_n = Segments.from_starts(group_starts(gid[nm])) if has_old else seg
    sn = seg_n.starts
    first_new = seg_n.start_idx
    fk = pd.MultiIndex.from_frame(frame[KEY].iloc[new_idx[first_new] if has_old else first_new]) \
        if st is not None else None

    def init(col, default):
        if st is None:
            return np.full(len(first_new), default, dtype=float)
        return st[col].reindex(fk).fillna(default).to_numpy(dtype=float)
    has_state = init("n", 0.0) > 0
    cu0 = np.where(has_state, init("cusum_upper", 0.0), headstart)
    cl0 = np.where(has_state, init("cusum_lower", 0.0), headstart)
    cus = tabular_cusum(zn, sn, k=k, h=h, init_upper=cu0, init_lower=cl0, seg=seg_n)
    gn = seg_n.gid
    ew = ewma(zn, sn, lam=lam, L=L, init=init("ewma", 0.0), count0=init("n", 0.0), seg=seg_n)
    mr_limit = mr_ucl_standardised()
    mr_new = of_new(mr)
    points = pd.DataFrame({
        "check_id": of_new(frame["check_id"].to_numpy()), "instrument_id": unit_of(new_idx),
        "level": of_new(frame["level"].to_numpy()), "baseline_period": of_new(frame["baseline_period"].to_numpy()),
        "measured_at": of_new(frame["measured_at"].to_numpy()), "position": of_new(position),
        "relative_error": of_new(x), "z": zn, "moving_range": mr_new,
        "cusum_upper": cus.upper, "cusum_lower": cus.lower, "ewma": ew.ewma, "ewma_ucl": ew.ucl,
        "center": of_new(center_out), "sigma": of_new(sigma_out), "own_sigma": of_new(use_own),
        "group": gn},  # the point's row in the returned state (one row per group)
        copy=False)  # no block copy of 9 M rows
    if on_points is not None:
        on_points(points)
    # Run rules on the standardised individuals (tail included for context).
    events = apply_run_rules(z, starts, params["run_rules"]["set"], tuple(params["run_rules"]["rules"]),
                             seg=seg).events
    # Page's N+/N- counters, for the CUSUM onsets and the carried state.
    run_u = changepoint.cusum_run_length(cus.upper, sn, None if st is None else init("cusum_upper_run", 0.0),
                                         seg=seg_n)
    run_l = changepoint.cusum_run_length(cus.lower, sn, None if st is None else init("cusum_lower_run", 0.0),
                                         seg=seg_n)
    # Signals on crossings: beyond the limit now, not beyond it at the group's previous check
    # (for a group's first new row: its carried state against the previous limit).
    def crossed(above, above_before):
        prev = np.empty_like(above)
        prev[1:] = above[:-1]
        prev[first_new] = above_before
        return np.flatnonzero(above & ~prev)
    e0 = init("ewma", 0.0)
    n0g = init("n", 0.0)
    prev_half = np.where(n0g > 0, L * np.sqrt(lam / (2 - lam) * (1 - (1 - lam) ** (2 * np.maximum(n0g, 1)))), np.inf)
    sig_frames = []
    base = {c: points[c].array if c == "instrument_id" else points[c].to_numpy()
            for c in ("instrument_id", "level", "baseline_period", "check_id", "measured_at", "position")}
    measured_new = base["measured_at"]
    # Page's onset: the check after the side was last zero. Where that check was charted by an
    # earlier run, the signal names its stored point (onsets_stored) and analyse reads its time.
    onsets_stored = []
    for stat, c0, side in ((cus.upper, cu0, "up"), (cus.lower, cl0, "down")):
        hit = crossed(stat > h, c0 > h)
        run = (run_u if side == "up" else run_l)[hit]
        onset_row = hit - (run - 1)
        onset_ok = onset_row >= first_new[gn[hit]] if len(hit) else np.empty(0, bool)
        onset_at = np.where(onset_ok, measured_new[np.maximum(onset_row, 0)], np.datetime64("NaT"))
        sig_frames.append(signal_frame(base, hit, "cusum", "h", side, stat[hit], onset_at))
        far = hit[~onset_ok]
        if len(far):
            onsets_stored.append(pd.DataFrame({
                "check_id": base["check_id"][far], "direction": side,
                "instrument_id": np.asarray(base["instrument_id"][far], dtype=object),
                "level": base["level"][far], "baseline_period": points["baseline_period"].to_numpy()[far],
                "position": base["position"][far] - (run[~onset_ok] - 1)}))
    neg_ucl = ew.lcl
    for side, above, above_before in (("up", ew.ewma > ew.ucl, e0 > prev_half),
                                      ("down", ew.ewma < neg_ucl, -e0 > prev_half)):  # -e > ucl, exactly
        hit = crossed(above, above_before)
        sig_frames.append(signal_frame(base, hit, "ewma", "limit", side, ew.ewma[hit]))
    del neg_ucl
    mr_hit = np.flatnonzero(mr_new > mr_limit)
    sig_frames.append(signal_frame(base, mr_hit, "moving_range", "limit", "up", mr_new[mr_hit]))
    if len(events):
        ev_row = events["row"].to_numpy()
        keep = nm[ev_row]
        rows = (np.cumsum(nm) - 1)[ev_row[keep]] if has_old else ev_row
        sig_frames.append(signal_frame(base, rows, "individuals", events["rule"].array[keep] if has_old else
                                       events["rule"].array, events["direction"].array[keep] if has_old else
                                       events["direction"].array, zn[rows]))
    signals = pd.concat(sig_frames, ignore_index=True)
    # Baselines frozen in this run: version 1 at each new segment's first check, version 2 own estimate.
    b1 = pd.DataFrame({"instrument_id": unit_of(first_rows),
                       "level": frame["level"].to_numpy()[first_rows],
                       "baseline_period": frame["baseline_period"].to_numpy()[first_rows], "version": 1,
                       "frozen_at": frame["measured_at"].to_numpy()[first_rows], "reason": "period_start",
                       "sigma_source": "fleet_pooled", "center": 0.0, "sigma": first_pool, "n_checks": 0,
                       "first_check_id": frame["check_id"].to_numpy()[first_rows],
                       "last_check_id": frame["check_id"].to_numpy()[first_rows]})
    if len(new_own):
        r = new_own["row"].to_numpy(dtype=int)
        g_first = seg.start_idx[new_own["group"].to_numpy()]
        b2 = pd.DataFrame({"instrument_id": unit_of(r), "level": frame["level"].to_numpy()[r],
                           "baseline_period": frame["baseline_period"].to_numpy()[r], "version": 2,
                           "frozen_at": frame["measured_at"].to_numpy()[r], "reason": "own_estimate",
                           "sigma_source": "unit", "center": new_own["center"].to_numpy(),
                           "sigma": new_own["sigma"].to_numpy(), "n_checks": n_min,
                           "first_check_id": frame["check_id"].to_numpy()[g_first],
                           "last_check_id": frame["check_id"].to_numpy()[r]})
        baselines = pd.concat([b1, b2], ignore_index=True)
    else:
        baselines = b1
    # New state: last row of each group.
    last = seg_n.last_idx if len(zn) else np.empty(0, int)
    add_sum = np.add.reduceat(of_new(x), seg_n.start_idx) if len(zn) else np.empty(0)
    new_state = pd.DataFrame({
        "instrument_id": points["instrument_id"].array[last], "level": points["level"].to_numpy()[last],
        "baseline_period": points["baseline_period"].to_numpy()[last],
        "n": points["position"].to_numpy()[last], "sum_x": init("sum_x", 0.0) + add_sum,
        "cusum_upper": cus.upper[last], "cusum_lower": cus.lower[last],
        "cusum_upper_run": run_u[last], "cusum_lower_run": run_l[last], "ewma": ew.ewma[last],
        "last_measured_at": points["measured_at"].to_numpy()[last], "last_check_id": points["check_id"].to_numpy()[last]})
    # The individuals and moving-range limits are the same for every point (z units): recorded
    # once with the run (chart_runs) rather than as three columns of millions of equal values.
    return {"points": points, "limits": {"ind_lcl": -3.0, "ind_ucl": 3.0, "mr_ucl": mr_limit},
            "signals": signals, "baselines": baselines, "state": new_state,
            "onsets_stored": pd.concat(onsets_stored, ignore_index=True) if onsets_stored else None,
            "check_type": frame["check_type"].array[new_idx] if has_old else frame["check_type"].array}


# Names a signal row may carry, as categorical codes in name order (codes sort as the names do).
SIGNAL_CHARTS = sorted(["cusum", "ewma", "individuals", "moving_range", "s", "xbar"])
SIGNAL_RULES = sorted({"h", "limit"} | {name for rules in RULES.values() for name in rules})
SIGNAL_DIRECTIONS = ["down", "up"]


def _names(value, n: int, categories: list[str]) -> pd.Categorical:
    if isinstance(value, str):
        return pd.Categorical.from_codes(np.full(n, categories.index(value), dtype=np.int8), categories=categories)
    if isinstance(value, pd.Categorical):
        return value.set_categories(categories)
    return pd.Categorical(np.asarray(value, dtype=object), categories=categories)


def signal_frame(base: dict, rows: np.ndarray, chart: str, rule, direction, size: np.ndarray,
                 onset_at: np.ndarray | None = None) -> pd.DataFrame:
    """Signal rows at `rows` of the per-check arrays in `base` (instrument_id, level, check_id,
    measured_at, position); chart, rule and direction as categoricals with fixed categories."""
    n = len(rows)
    out = {c: v[rows] for c, v in base.items()}
    out["chart"] = _names(chart, n, SIGNAL_CHARTS)
    out["rule"] = _names(rule, n, SIGNAL_RULES)
    out["direction"] = _names(direction, n, SIGNAL_DIRECTIONS)
    out["size"] = np.asarray(size, dtype=float)
    when = out["measured_at"].dtype
    out["onset_at"] = (np.full(n, np.datetime64("NaT"), dtype=when) if onset_at is None
                       else np.asarray(onset_at, dtype=when))
    return pd.DataFrame(out)


def read_chart_input(con: duckdb.DuckDBPyConnection, with_rebaselines: bool, through: int,
                     recharge: set[str], *, capacity: int) -> pd.DataFrame:
    """Checks to chart (sql/queries/charts_input.sql), names as pandas categoricals. capacity: the
    rows of check_results, a bound on the rows read.

    The query returns integer codes into small name tables made here, because converting
    millions of repeated strings is the slow part of reading a whole fleet.
    """
    con.execute(sql_text("queries/charts_name_codes"))
    con.execute("CREATE OR REPLACE TEMP TABLE _bf_recharge AS SELECT unnest($u::VARCHAR[]) AS instrument_id",
                {"u": sorted(recharge)})
    try:
        offset = "\n".join(line for line in sql_text("queries/charts_segment_offset").splitlines()
                           if not line.startswith("--")) if with_rebaselines else "0"
        raw = fetch_arrays(con, sql_text("queries/charts_input").format(segment_offset=offset),
                           {"through": through}, capacity=capacity)
        names = {t: [r[0] for r in con.execute(f"SELECT {c} FROM {t} ORDER BY {o}").fetchall()]
                 for t, c, o in (("_bf_units", "instrument_id", "unit_code"), ("_bf_technologies", "name", "code"),
                                 ("_bf_kinds", "name", "code"))}
    finally:
        for t in ("_bf_units", "_bf_technologies", "_bf_kinds", "_bf_recharge"):
            con.execute(f"DROP TABLE IF EXISTS {t}")
    def cat(codes, categories):
        return pd.Categorical.from_codes(codes, categories=categories)
    return pd.DataFrame({
        "check_id": raw["check_id"], "instrument_id": cat(raw["unit_code"], names["_bf_units"]),
        "level": raw["level"], "measured_at": raw["measured_at"],
        "check_type": cat(raw["check_type_code"], CHECK_TYPES),
        "relative_error": raw["relative_error"],
        "technology": cat(raw["technology_code"], names["_bf_technologies"]),
        "standard_kind": cat(raw["kind_code"], names["_bf_kinds"]),
        "baseline_period": raw["baseline_period"]}, copy=False)


def read_verification_checks(con: duckdb.DuckDBPyConnection, new: pd.DataFrame) -> pd.DataFrame:
    """The verification checks among `new` (chart input rows) with their expected and measured
    values (sql/queries/charts_verification_values.sql): instrument_id, measured_at, level,
    expected, measured, for the linearity fit."""
    ver = new.loc[(new["check_type"] == "verification").to_numpy(), ["check_id", "instrument_id", "measured_at", "level"]]
    with registered(con, "_bf_verification", ver[["check_id"]]):
        values = con.execute(sql_text("queries/charts_verification_values")).fetchnumpy()
    at = np.searchsorted(values["check_id"], ver["check_id"].to_numpy())
    return ver.assign(expected=values["expected"][at], measured=values["measured"][at])


def _group_keys(new: pd.DataFrame, starts: np.ndarray) -> pd.DataFrame:
    """The chart groups (KEY) of checks sorted by KEY, in order (starts: _starts(new))."""
    return new[KEY].iloc[np.flatnonzero(starts)].reset_index(drop=True)


def _sort_codes(col: pd.Series) -> np.ndarray:
    """Integer codes in the order pandas sorts the column (category order, else value order), in
    the narrowest integer type (sorted by radix)."""
    if isinstance(col.dtype, pd.CategoricalDtype):
        return narrowest_codes(col.cat.codes.to_numpy())
    return narrowest_codes(pd.factorize(col, sort=True)[0])


def _load_state(con, keys: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    """The stored state, own baselines and last points (tail) of the chart groups `keys` (KEY, in
    the order of the chart input). The tail's KEY columns are taken from `keys` by row, so its unit
    names keep their categorical codes: merging and sorting a week's tail (115 thousand points on
    the benchmark fleet) by unit name strings took 0.2 s of compute_charts' 0.54 s (line profile)."""
    with registered(con, "_bf_keys", keys.assign(key_row=np.arange(len(keys), dtype=np.int64))):
        state = con.execute("SELECT s.* FROM chart_state s JOIN _bf_keys USING (instrument_id, level, baseline_period)").df()
        own = con.execute("SELECT b.instrument_id, b.level, b.baseline_period, b.center, b.sigma FROM chart_baselines b "
                          "JOIN _bf_keys USING (instrument_id, level, baseline_period) WHERE b.sigma_source = 'unit' "
                          "QUALIFY row_number() OVER (PARTITION BY b.instrument_id, b.level, b.baseline_period "
                          "ORDER BY b.version DESC) = 1").df()
        # The last TAIL positions of each group: positions run 1..n (chart_state.n), so the window
        # only ranks the few rows above n - TAIL (all rows of a group without state).
        tail = con.execute(
            "SELECT k.key_row, p.check_id, p.measured_at, p.relative_error, p.position, p.z "
            "FROM chart_points p JOIN (SELECT k.*, s.n FROM _bf_keys k LEFT JOIN chart_state s "
            "USING (instrument_id, level, baseline_period)) k USING (instrument_id, level, baseline_period) "
            f"WHERE k.n IS NULL OR p.position > k.n - {TAIL} "
            f"QUALIFY row_number() OVER (PARTITION BY k.key_row ORDER BY p.position DESC) <= {TAIL}"
        ).df()
    row = tail.pop("key_row").to_numpy()
    tail = pd.DataFrame({c: keys[c].array.take(row) for c in KEY} | dict(tail.items()), copy=False)
    return state, own, tail


def _arrow(frame: pd.DataFrame, nullable: tuple[str, ...] = ()) -> pa.Table:
    """The frame as an Arrow table (registered by DuckDB without a copy). A float NaN is NULL only
    in the `nullable` columns: pa.Table.from_pandas scans every float column of a fleet for NaN."""
    def column(name):
        col = frame[name]
        if not isinstance(col.dtype, np.dtype) or col.dtype == object:  # categorical, masked, strings
            return pa.array(col)
        return pa.array(col.to_numpy(), from_pandas=name in nullable)
    return pa.table({name: column(name) for name in frame.columns})


def _append(con: duckdb.DuckDBPyConnection, table: str, rows, *, or_ignore: bool = False) -> None:
    """Insert a frame (or Arrow table) into `table` by column name."""
    name = f"_bf_new_{table}"
    with registered(con, name, rows):
        con.execute(f"INSERT {'OR IGNORE ' if or_ignore else ''}INTO {table} BY NAME SELECT * FROM {name}")


def _stored_point_times(reader: duckdb.DuckDBPyConnection, rows: pd.DataFrame) -> pd.DataFrame:
    """`rows` (KEY, position, other columns) with the measured_at of the stored point at that
    position of that chart group; rows without one are left out."""
    with registered(reader, "_bf_positions", rows):
        return reader.execute("SELECT r.*, p.measured_at FROM _bf_positions r JOIN chart_points p "
                              "USING (instrument_id, level, baseline_period, position)").df()


def _read_stored_onsets(reader: duckdb.DuckDBPyConnection, sig: pd.DataFrame, onsets: pd.DataFrame) -> None:
    """Fill in sig.onset_at of the CUSUM signals whose onset is a point stored by an earlier run:
    the time of the point at the onset position of the signal's group (onsets: compute_charts'
    onsets_stored)."""
    found = _stored_point_times(reader, onsets)[["check_id", "direction", "measured_at"]]
    cusum = sig.loc[(sig["chart"] == "cusum").to_numpy(), ["check_id", "direction"]]
    at = cusum.astype({"direction": str}).reset_index().merge(found, on=["check_id", "direction"])
    sig.loc[at["index"].to_numpy(), "onset_at"] = at["measured_at"].to_numpy()


def _load_kernels() -> None:
    from pipeline.charts import kernels
    kernels.load_all()


def _read_alongside(reader: duckdb.DuckDBPyConnection, new: pd.DataFrame, settings: Settings,
                    state: pd.DataFrame) -> tuple[pd.DataFrame, ControlCheckTimes | None]:
    """What a run prepares while it computes the charts (on another thread; reads on a cursor): the
    linearity fits of the verification checks among `new`; and the control-check times of its
    units (for the impact windows), each from the earliest onset a CUSUM signal of this run can
    have on it: the unit's first new check, or the first check of one of its CUSUM runs still going
    on in `state` (chart_state rows); impact_checks reads again only if a signal's onset is earlier."""
    lin = fit_linearity(read_verification_checks(reader, new), settings.charts.verification_window_minutes)
    if new.empty:
        return lin, None
    codes, units, present = unit_codes(new["instrument_id"])
    names = units[present]
    # Per unit: its first new check (new is sorted by KEY, unit first: one run of rows per unit),
    # or the first check of a CUSUM run still going on, if earlier.
    at = new["measured_at"].to_numpy()
    since = np.minimum.reduceat(at.view(np.int64), np.flatnonzero(group_starts(codes))).view(at.dtype)
    if len(state):
        runs = np.maximum(state["cusum_upper_run"].to_numpy(), state["cusum_lower_run"].to_numpy())
        going = runs > 0
        if going.any():
            run_starts = state.loc[going, KEY].assign(position=state["n"].to_numpy()[going] - runs[going] + 1)
            first = _stored_point_times(reader, run_starts).groupby("instrument_id")["measured_at"].min()
            earlier = first.reindex(names.astype(str)).to_numpy(dtype="datetime64[us]")
            since = np.where(earlier < since, earlier, since)  # NaT compares False: the unit's first new check
    return lin, control_check_times(reader, names, since)


def _signals_groups_baselines(out: dict, lin: pd.DataFrame, times: ControlCheckTimes | None, params: dict,
                              settings: Settings, reader: duckdb.DuckDBPyConnection, run_id: int, first_b: int):
    """The rest of a run once the points are computed: X-bar/S groups and their signals, every
    signal's run length, p-value, fleet significance and impact window, and the baselines' ids and
    re-baseline reasons. lin, times: _read_alongside's. reader: a cursor for reads (committed data)
    while the run's own connection stores the points. Returns groups, signals and baselines."""
    pts = out["points"]
    window = settings.charts.replicate_window_minutes
    typed = pd.DataFrame({c: pts[c].array for c in ("check_id", "instrument_id", "level", "measured_at", "z")}
                         | {"check_type": out["check_type"]}, copy=False)
    groups, group_rows = xbar_s_groups(typed, window, with_rows=True)
    extra = []
    if len(groups):
        base = {"instrument_id": groups["instrument_id"].array, "level": groups["level"].to_numpy(),
                "check_id": groups["check_id"].to_numpy(), "measured_at": groups["measured_at"].to_numpy(),
                "position": pts["position"].to_numpy()[group_rows],
                "baseline_period": pts["baseline_period"].to_numpy()[group_rows]}
        for chart, stat, lo, hi in (("xbar", "xbar", "xbar_lcl", "xbar_ucl"), ("s", "s", "s_lcl", "s_ucl")):
            value = groups[stat].to_numpy(dtype=float)
            hit = np.flatnonzero((value > groups[hi].to_numpy()) | (value < groups[lo].to_numpy()))
            if len(hit):
                extra.append(signal_frame(base, hit, chart, "limit",
                                          np.where(value[hit] > groups[hi].to_numpy()[hit], "up", "down"), value[hit]))
    sig = pd.concat([out["signals"], *extra], ignore_index=True) if extra else out["signals"]
    if len(sig):
        cs = settings.charts
        # Signals in time order, then unit, level, chart and rule (names sort by their categorical codes).
        codes = {c: _sort_codes(sig[c]) for c in ("instrument_id", "level", "chart", "rule", "direction")}
        when = sig["measured_at"].to_numpy().astype(np.int64)
        by = np.lexsort((codes["rule"], codes["chart"], codes["level"], codes["instrument_id"], when))
        sig = sig.take(by).reset_index(drop=True)
        sig["position"] = signal_run_lengths(
            [codes[c][by] for c in ("instrument_id", "level")] + [_sort_codes(sig["baseline_period"])]
            + [codes[c][by] for c in ("chart", "rule", "direction")],
            sig["position"].fillna(1).to_numpy(dtype=np.int64))
        sig["p_value"] = signal_p_values(sig, k=params["cusum"]["k"], h=params["cusum"]["h"],
                                         lam=params["ewma"]["lam"], L=params["ewma"]["L"])
        fs = fleet_significance(sig["p_value"].to_numpy(), cs.fleet_fdr_q)
        sig["fleet_significant"] = pd.arrays.BooleanArray(fs > 0, np.isnan(fs))  # NULL: no p-value
        if out["onsets_stored"] is not None:
            _read_stored_onsets(reader, sig, out["onsets_stored"])
        sig["impact_checks"] = impact_checks(reader, sig, times)
    bl = out["baselines"]
    # A baseline's parameters are its run's (chart_runs.parameters), stored once with the run.
    bl = bl.assign(baseline_id=np.arange(first_b, first_b + len(bl)), run_id=run_id, software_version=SOFTWARE_VERSION)
    rb = (bl["version"] == 1) & (bl["baseline_period"] % 1000 != 0)
    if rb.any():
        with registered(reader, "_bf_rb", bl.loc[rb, ["instrument_id", "frozen_at"]].reset_index()):
            why = reader.execute("SELECT b.index, r.reason FROM _bf_rb b ASOF JOIN chart_rebaselines r "
                                 "ON b.instrument_id = r.instrument_id AND b.frozen_at >= r.rebaseline_at").df()
        bl.loc[why["index"].to_numpy(), "reason"] = ("rebaseline: " + why["reason"]).to_numpy()
    return groups, sig, bl


def analyse_fleet(con: duckdb.DuckDBPyConnection, settings: Settings) -> AnalysisRun:
    """Chart every check not yet charted, for the whole fleet at once, and store the results.

    Incremental: state carried per chart group (chart_state) and frozen baselines are reused; only
    checks missing from chart_points are charted. A group that receives a check older than its last
    charted check is charted again from its segment start (its frozen baselines are kept).
    Returns an AnalysisRun with counts, duration and the parameters used. For its duration DuckDB
    may use db.ANALYSE_MEMORY_LIMIT and glibc keeps freed memory for reuse (pipeline/batch_memory.py).
    """
    with (memory_limit(con, ANALYSE_MEMORY_LIMIT), freed_memory_kept(), collector_paused(),
          ThreadPoolExecutor(max_workers=1) as worker):
        return _analyse(con, settings, worker)


def _analyse(con: duckdb.DuckDBPyConnection, settings: Settings, worker: ThreadPoolExecutor) -> AnalysisRun:
    """analyse_fleet's run: read, compute, store (timed in those three parts). One worker thread
    beside the main one: it designs the charts while the main thread reads; it loads the kernels,
    reads and fits linearity while the charts are computed (_read_alongside); then it stores the
    points while the signals are computed. DuckDB, LAPACK and numba's loader work mostly without
    the GIL."""
    from pipeline.standards import sync_standards_settings

    t0 = time.perf_counter()
    started = datetime.now(UTC).replace(tzinfo=None)
    designing = worker.submit(chart_parameters, settings)  # run-length designs: 0.15 s of numerics
    worker.submit(_load_kernels)  # numba and the kernels from its cache: 0.3-0.4 s, done during the read
    sync_standards_settings(con, settings)
    mode = "incremental" if con.execute("SELECT count(*) FROM chart_point_values").fetchall()[0][0] else "full"
    with_rb = bool(con.execute("SELECT count(*) > 0 FROM chart_rebaselines").fetchall()[0][0])
    through, counted, last_run_at = con.execute(
        "SELECT checks_through, checks_counted, started_at FROM chart_runs ORDER BY run_id DESC LIMIT 1").fetchone() \
        or (0, 0, None)
    top, n_top = con.execute("SELECT coalesce(max(check_id), 0), count(*) FROM check_results").fetchone()
    # Ingest gives new checks higher ids; if checks appeared below the mark, read them all.
    if not through or con.execute("SELECT count(*) FROM check_results WHERE check_id <= $t",
                                  {"t": through}).fetchone()[0] != counted:
        through = 0
    # Units whose points a re-baseline removed since the last run are charted again from there.
    recharge = {r[0] for r in con.execute("SELECT DISTINCT instrument_id FROM chart_rebaselines WHERE recorded_at >= $t",
                                          {"t": last_run_at or datetime(1900, 1, 1)}).fetchall()}
    new = read_chart_input(con, with_rb, through, recharge, capacity=n_top)
    starts = _starts(new)
    state, own, tail = _load_state(con, _group_keys(new, starts))
    if len(state):
        late = new.merge(state[KEY + ["last_measured_at"]], on=KEY)
        late = late.loc[late["measured_at"] < late["last_measured_at"], KEY].drop_duplicates()
        if len(late):
            with registered(con, "_bf_late", late), transaction(con):
                for table in ("chart_signal_values", "chart_groups"):  # of the points removed below
                    con.execute(f"DELETE FROM {table} WHERE check_id IN (SELECT p.check_id FROM chart_points p "
                                "JOIN _bf_late USING (instrument_id, level, baseline_period))")
                con.execute("DELETE FROM chart_point_values WHERE series_id IN (SELECT series_id FROM chart_series "
                            "JOIN _bf_late USING (instrument_id, level, baseline_period))")
                con.execute("DELETE FROM chart_state t USING _bf_late l WHERE t.instrument_id = l.instrument_id "
                            "AND t.level = l.level AND t.baseline_period = l.baseline_period")
            recharge |= set(late["instrument_id"].astype(str))
            new = read_chart_input(con, with_rb, through, recharge, capacity=n_top)
            starts = _starts(new)
            state, own, tail = _load_state(con, _group_keys(new, starts))
    pooled = con.execute("SELECT technology, standard_kind, level, sigma FROM chart_pooled_sigma").df()
    t_read = time.perf_counter() - t0
    reader = con.cursor()
    alongside = worker.submit(_read_alongside, reader, new, settings, state)
    try:
        missing = np.isnan(pooled_lookup(new, pooled)) if len(pooled) else np.ones(len(new), dtype=bool)
        if missing.any():
            sub = new[missing] if not missing.all() else new
            fresh = pooled_sigma(sub, starts if sub is new else _starts(sub)).assign(frozen_at=started,
                                                                                     method=POOLED_METHOD)
            con.execute("INSERT INTO chart_pooled_sigma SELECT technology, standard_kind, level, sigma, n_pairs, "
                        "frozen_at, method FROM fresh")
            pooled = con.execute("SELECT technology, standard_kind, level, sigma FROM chart_pooled_sigma").df()
        params = designing.result()
        run_id = int(con.execute("SELECT coalesce(max(run_id), 0) + 1 FROM chart_runs").fetchall()[0][0])
        first_sig = int(con.execute("SELECT coalesce(max(signal_id), 0) + 1 FROM chart_signal_values").fetchall()[0][0])
        first_b = int(con.execute("SELECT coalesce(max(baseline_id), 0) + 1 FROM chart_baselines").fetchall()[0][0])
        data_end = None if new.empty else pd.Timestamp(new["measured_at"].max()).to_pydatetime()
        storing = []
        with transaction(con):
            # The points' series, in the order of the groups of `new` (compute_charts' state order).
            keys = _group_keys(new, starts)
            series = series_ids(con, keys)

            def store_points(pts):  # on the worker, once its reads are done, while the signals are worked out
                def insert():  # the Arrow table (registered without a copy) is made on the worker too
                    values = pts[POINT_VALUES].assign(series_id=series[pts["group"].to_numpy()])
                    _append(con, "chart_point_values", _arrow(values, nullable=("moving_range",)))
                storing.append(worker.submit(insert))
            try:
                out = compute_charts(new, tail, state, own, pooled, params, starts=starts, on_points=store_points)
                pts, st = out["points"], out["state"]
                if len(st) != len(keys) or any((st[c].astype(str).to_numpy() != keys[c].astype(str).to_numpy()).any()
                                               for c in KEY):
                    raise RuntimeError("chart groups out of step with their series numbers")
                lin, times = alongside.result()
                groups, sig, bl = _signals_groups_baselines(out, lin, times, params, settings, reader, run_id,
                                                            first_b)
                # The rows to store, made while the points are still being stored.
                sig_rows = pa.Table.from_pandas(sig.drop(columns=["position", "baseline_period", *SIGNAL_KIND]).assign(
                    signal_id=np.arange(first_sig, first_sig + len(sig)), run_id=run_id, created_at=started),
                    preserve_index=False)
                groups, lin = _arrow(groups.assign(run_id=run_id)), _arrow(lin.assign(run_id=run_id))
            finally:  # the transaction ends (commit or rollback) only once the insert is done with it
                wait(storing)
            t_compute = time.perf_counter() - t0 - t_read
            for stored in storing:  # raises what the insert raised
                stored.result()
            with registered(con, "_bf_state_keys", st):
                con.execute("DELETE FROM chart_state t USING _bf_state_keys s WHERE t.instrument_id = s.instrument_id "
                            "AND t.level = s.level AND t.baseline_period = s.baseline_period")
            _append(con, "chart_state", st)
            if len(bl):
                _append(con, "chart_baselines", bl)
            if len(sig):
                _append(con, "chart_signal_values", sig_rows.append_column("kind", pa.array(signal_kinds(con, sig))))
            if len(groups):
                _append(con, "chart_groups", groups)
            if len(lin):  # a session charted again (late data) keeps its stored fit
                _append(con, "chart_linearity", lin, or_ignore=True)
            duration = time.perf_counter() - t0
            con.execute("INSERT INTO chart_runs (run_id, started_at, duration_s, mode, n_new_checks, n_groups, "
                        "n_signals, n_baselines, data_end, parameters, software_version, checks_through, "
                        "checks_counted, ind_lcl, ind_ucl, mr_ucl) VALUES ($id, $at, $d, $mode, $n, $g, $s, $b, "
                        "$end, $p, $v, $through, $counted, $ind_lcl, $ind_ucl, $mr_ucl)",
                        {"id": run_id, "at": started, "d": duration, "mode": mode, "n": len(pts), "g": len(st),
                         "s": len(sig), "b": len(bl), "end": data_end, "p": json.dumps(params, default=str),
                         "v": SOFTWARE_VERSION, "through": top, "counted": n_top} | out["limits"])
    finally:  # the worker may still read with the cursor when the run fails
        wait([alongside])
        reader.close()
    return AnalysisRun(run_id=run_id, mode=mode, n_new_checks=len(pts), n_groups=len(st), n_signals=len(sig),
                       n_baselines=len(bl), duration_s=duration, parameters=params, data_end=data_end,
                       timings={"read": t_read, "compute": t_compute, "store": duration - t_read - t_compute})
