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
from dataclasses import asdict, dataclass
from datetime import UTC, datetime

import duckdb
import numpy as np
import pandas as pd
import pyarrow as pa

from pipeline import __version__ as SOFTWARE_VERSION
from pipeline.charts import changepoint, short_run
from pipeline.charts.baselines import POOLED_METHOD, own_estimates, pooled_sigma
from pipeline.charts.cusum import tabular_cusum
from pipeline.charts.design import design_cusum, design_ewma
from pipeline.charts.ewma import ewma
from pipeline.charts.grouping import group_starts, position_in_group
from pipeline.charts.linearity import fit_linearity
from pipeline.charts.xbar_s import xbar_s_groups
from pipeline.charts.individuals import moving_range, mr_ucl_standardised
from pipeline.charts.run_rules import apply_run_rules, select_rules
from pipeline.charts.signals import crossings, fleet_significance, impact_checks, signal_p_values
from pipeline.db import sql_text, transaction
from pipeline.settings import Settings

KEY = ["instrument_id", "level", "baseline_period"]
CHECK_TYPES = ["control", "daily", "verification"]  # the codes of charts_input.sql
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
    timings: dict  # seconds: read (check_results + state), compute (all charts), store


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


def pooled_lookup(frame: pd.DataFrame, pooled: pd.DataFrame) -> np.ndarray:
    """The frozen pooled sigma of each row's technology, standard kind and level (NaN if none yet)."""
    pool_key = ["technology", "standard_kind", "level"]
    if frame.empty:
        return np.empty(0)
    parts = [pd.factorize(frame[c], use_na_sentinel=False)[0] for c in pool_key]
    code = (parts[0].astype(np.int64) * (parts[1].max() + 1) + parts[1]) * (parts[2].max() + 1) + parts[2]
    code = pd.factorize(code)[0]
    first = np.unique(code, return_index=True)[1]
    keys = frame[pool_key].iloc[first].astype({"technology": str, "standard_kind": str})
    sigma = keys.merge(pooled, how="left", on=pool_key)["sigma"].to_numpy(dtype=float)
    return sigma[code]


def compute_charts(new: pd.DataFrame, tail: pd.DataFrame, state: pd.DataFrame, own: pd.DataFrame,
                   pooled: pd.DataFrame, params: dict) -> dict[str, pd.DataFrame]:
    """Pure chart computation for new checks of many groups (no database access).

    new: new checks (KEY, check_id, measured_at, check_type, relative_error, technology, standard_kind),
      sorted by KEY then time. tail: stored points (KEY, check_id, measured_at, relative_error, position)
      of the same groups. state: chart_state rows; own: stored own baselines (KEY, center, sigma);
      pooled: technology, standard_kind, level, sigma. Returns points, signals, baselines, state frames.
    """
    n_min = int(params["own_baseline_min_checks"])
    k, h = params["cusum"]["k"], params["cusum"]["h"]
    headstart = params["cusum"]["headstart"]
    lam, L = params["ewma"]["lam"], params["ewma"]["L"]
    new = new.assign(old=False)
    tail = tail.assign(old=True).merge(new[KEY + ["technology", "standard_kind"]].drop_duplicates(KEY),
                                       how="left", on=KEY)
    frame = pd.concat([tail, new], ignore_index=True) if len(tail) else new.reset_index(drop=True)
    if len(tail):
        frame = frame.sort_values(KEY + ["old", "measured_at", "check_id"], ascending=[True, True, True, False, True, True],
                                  kind="stable").reset_index(drop=True)
    # Unit names as categorical codes: string arrays are the slow part at fleet scale.
    inst = frame["instrument_id"]
    if isinstance(inst.dtype, pd.CategoricalDtype):
        inst_codes, inst_names = inst.cat.codes.to_numpy(), inst.cat.categories
    else:
        inst_codes, inst_names = pd.factorize(inst)
    frame["instrument_id"] = pd.Categorical.from_codes(inst_codes, categories=inst_names)

    def unit_of(idx):
        return pd.Categorical.from_codes(inst_codes[idx], categories=inst_names)
    st = state.set_index(KEY) if len(state) else None
    keyidx = pd.MultiIndex.from_frame(frame[KEY]) if (st is not None or len(own)) else None
    def carried(col, default):
        if st is None:
            return np.full(len(frame), default, dtype=float)
        return st[col].reindex(keyidx).fillna(default).to_numpy(dtype=float)
    n0, sum0 = carried("n", 0.0), carried("sum_x", 0.0)
    starts = _starts(frame)
    pos0 = position_in_group(starts)
    old = frame["old"].to_numpy()
    x = frame["relative_error"].to_numpy(dtype=float)
    n_tail = pd.Series(old.astype(int)).groupby(np.cumsum(starts)).transform("sum").to_numpy()
    position = n0 - n_tail + pos0 + 1
    # Quesenberry Q with the frozen pooled sigma (sum of x before the first row of this frame).
    sig_pool = pooled_lookup(frame, pooled)
    tail_sum = pd.Series(np.where(old, x, 0.0)).groupby(np.cumsum(starts)).transform("sum").to_numpy()
    q, q_center, q_scale = short_run.quesenberry_q(x, starts, sig_pool, r0=position - pos0 - 1, sum0=sum0 - tail_sum)
    # Own baseline: stored, or frozen now from the first n_min checks of the segment.
    center = np.full(len(frame), np.nan)
    sigma = np.full(len(frame), np.nan)
    if len(own):
        o = own.set_index(KEY)
        center = o["center"].reindex(keyidx).to_numpy(dtype=float)
        sigma = o["sigma"].reindex(keyidx).to_numpy(dtype=float)
    gid = np.cumsum(starts) - 1
    est = own_estimates(x, starts, (position - 1).astype(int), n_min)
    new_own = est[np.isnan(center[np.flatnonzero(starts)][est["group"].to_numpy()])] if len(est) else est
    if len(new_own):
        def per_row(values):  # group values spread to the group's rows (NaN for other groups)
            out = np.full(int(gid[-1]) + 1, np.nan)
            out[new_own["group"].to_numpy()] = values
            return out[gid]
        fill_c, fill_s = per_row(new_own["center"].to_numpy()), per_row(new_own["sigma"].to_numpy())
        center = np.where(np.isnan(center), fill_c, center)
        sigma = np.where(np.isnan(sigma), fill_s, sigma)
    use_own = (position > n_min) & np.isfinite(sigma) & (sigma > 0)
    z = np.where(use_own, (x - center) / np.where(use_own, sigma, 1.0), q)
    # Coarse (truncated) results tie often: cumulative-sum noise must not put a tie on one side.
    z = np.round(z, 9)
    if "z" in frame:
        z = np.where(old, frame["z"].to_numpy(dtype=float, na_value=np.nan), z)
    center_out = np.where(use_own, center, q_center)
    sigma_out = np.where(use_own, sigma, q_scale)
    source = pd.Categorical.from_codes(use_own.astype(np.int8), categories=["fleet_pooled", "unit"])
    mr = moving_range(z, starts)
    # Run rules on the standardised individuals (tail included for context).
    events = apply_run_rules(z, starts, params["run_rules"]["set"], tuple(params["run_rules"]["rules"])).events
    # CUSUM and EWMA over new rows only, from the carried state.
    nm = ~old
    zn = z[nm]
    sn = _starts(frame.loc[nm])
    first_new = np.flatnonzero(sn)
    fk = pd.MultiIndex.from_frame(frame[KEY].iloc[np.flatnonzero(nm)[first_new]])
    def init(col, default):
        if st is None:
            return np.full(len(first_new), default, dtype=float)
        return st[col].reindex(fk).fillna(default).to_numpy(dtype=float)
    has_state = init("n", 0.0) > 0
    cu0 = np.where(has_state, init("cusum_upper", 0.0), headstart)
    cl0 = np.where(has_state, init("cusum_lower", 0.0), headstart)
    cus = tabular_cusum(zn, sn, k=k, h=h, init_upper=cu0, init_lower=cl0)
    gn = np.cumsum(sn) - 1
    run_u = changepoint.cusum_run_length(cus.upper, sn, init("cusum_upper_run", 0.0)[gn])
    run_l = changepoint.cusum_run_length(cus.lower, sn, init("cusum_lower_run", 0.0)[gn])
    ew = ewma(zn, sn, lam=lam, L=L, init=init("ewma", 0.0), count0=init("n", 0.0))
    mr_limit = mr_ucl_standardised()
    nf = frame.loc[nm].reset_index(drop=True)
    points = pd.DataFrame({
        "check_id": nf["check_id"].to_numpy(), "instrument_id": unit_of(np.flatnonzero(nm)),
        "level": nf["level"].to_numpy(), "baseline_period": nf["baseline_period"].to_numpy(),
        "measured_at": nf["measured_at"].to_numpy(), "position": position[nm].astype(np.int64),
        "relative_error": x[nm], "z": zn, "moving_range": mr[nm],
        "cusum_upper": cus.upper, "cusum_lower": cus.lower, "ewma": ew.ewma, "ewma_lcl": ew.lcl, "ewma_ucl": ew.ucl,
        "center": center_out[nm], "sigma": sigma_out[nm], "sigma_source": source[np.flatnonzero(nm)],
        "ind_lcl": -3.0, "ind_ucl": 3.0, "mr_ucl": mr_limit,
        "cusum_upper_run": run_u, "cusum_lower_run": run_l}, copy=False)  # no block copy of 9 M rows
    # Signals.
    def prev_of(a, a0):
        p = np.empty_like(a)
        p[1:] = a[:-1]
        p[first_new] = a0
        return p
    e0 = init("ewma", 0.0)
    pe = prev_of(ew.ewma, e0)
    n0g = init("n", 0.0)
    prev_half = np.where(n0g > 0, L * np.sqrt(lam / (2 - lam) * (1 - (1 - lam) ** (2 * np.maximum(n0g, 1)))), np.inf)
    prev_ucl = prev_of(ew.ucl, prev_half)
    sig_frames = []
    base = points[["instrument_id", "level", "check_id", "measured_at", "position"]]
    for stat, prev, side in ((cus.upper, prev_of(cus.upper, cu0), "up"), (cus.lower, prev_of(cus.lower, cl0), "down")):
        hit = np.flatnonzero(crossings(stat, h, prev))
        run = (run_u if side == "up" else run_l)[hit]
        onset_row = hit - (run - 1)
        onset_ok = onset_row >= first_new[gn[hit]] if len(hit) else np.empty(0, bool)
        onset_at = np.where(onset_ok, points["measured_at"].to_numpy()[np.maximum(onset_row, 0)],
                            np.datetime64("NaT"))
        sig_frames.append(base.iloc[hit].assign(chart="cusum", rule="h", direction=side, size=stat[hit],
                                                onset_at=onset_at, onset_back=np.where(onset_ok, 0, run - 1)))
    for side, sgn in (("up", 1.0), ("down", -1.0)):
        stat = sgn * ew.ewma
        hit = np.flatnonzero((stat > ew.ucl) & ~(sgn * pe > prev_ucl))
        sig_frames.append(base.iloc[hit].assign(chart="ewma", rule="limit", direction=side, size=ew.ewma[hit],
                                                onset_at=pd.NaT, onset_back=0))
    mr_hit = np.flatnonzero(mr[nm] > mr_limit)
    sig_frames.append(base.iloc[mr_hit].assign(chart="moving_range", rule="limit", direction="up",
                                               size=mr[nm][mr_hit], onset_at=pd.NaT, onset_back=0))
    if len(events):
        new_row = np.cumsum(nm) - 1
        ev = events[nm[events["row"].to_numpy()]]
        rows = new_row[ev["row"].to_numpy()]
        sig_frames.append(base.iloc[rows].assign(chart="individuals", rule=ev["rule"].to_numpy(),
                                                 direction=ev["direction"].to_numpy(), size=zn[rows],
                                                 onset_at=pd.NaT, onset_back=0))
    signals = pd.concat(sig_frames, ignore_index=True)
    # Baselines frozen in this run: version 1 at each new segment's first check, version 2 own estimate.
    first_rows = np.flatnonzero(starts & (position == 1) & ~old)
    b1 = pd.DataFrame({"instrument_id": unit_of(first_rows),
                       "level": frame["level"].to_numpy()[first_rows],
                       "baseline_period": frame["baseline_period"].to_numpy()[first_rows], "version": 1,
                       "frozen_at": frame["measured_at"].to_numpy()[first_rows], "reason": "period_start",
                       "sigma_source": "fleet_pooled", "center": 0.0, "sigma": sig_pool[first_rows], "n_checks": 0,
                       "first_check_id": frame["check_id"].to_numpy()[first_rows],
                       "last_check_id": frame["check_id"].to_numpy()[first_rows]})
    if len(new_own):
        r = new_own["row"].to_numpy(dtype=int)
        g_first = np.flatnonzero(starts)[new_own["group"].to_numpy()]
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
    last = np.flatnonzero(np.r_[sn[1:], True]) if len(zn) else np.empty(0, int)
    add_sum = pd.Series(x[nm]).groupby(gn).sum().to_numpy() if len(zn) else np.empty(0)
    new_state = pd.DataFrame({
        "instrument_id": points["instrument_id"].array[last], "level": points["level"].to_numpy()[last],
        "baseline_period": points["baseline_period"].to_numpy()[last],
        "n": points["position"].to_numpy()[last], "sum_x": init("sum_x", 0.0) + add_sum,
        "cusum_upper": cus.upper[last], "cusum_lower": cus.lower[last],
        "cusum_upper_run": run_u[last], "cusum_lower_run": run_l[last], "ewma": ew.ewma[last],
        "last_measured_at": points["measured_at"].to_numpy()[last], "last_check_id": points["check_id"].to_numpy()[last]})
    return {"points": points, "signals": signals, "baselines": baselines, "state": new_state,
            "check_type": frame["check_type"].array[np.flatnonzero(nm)]}


def read_chart_input(con: duckdb.DuckDBPyConnection, with_rebaselines: bool, through: int,
                     recharge: set[str]) -> pd.DataFrame:
    """Checks to chart (sql/queries/charts_input.sql), names as pandas categoricals.

    The query returns integer codes into small name tables made here, because converting
    millions of repeated strings is the slow part of reading a whole fleet.
    """
    con.execute(sql_text("queries/charts_name_codes"))
    con.execute("CREATE OR REPLACE TEMP TABLE _bf_recharge AS SELECT unnest($u::VARCHAR[]) AS instrument_id",
                {"u": sorted(recharge)})
    try:
        offset = "\n".join(line for line in sql_text("queries/charts_segment_offset").splitlines()
                           if not line.startswith("--")) if with_rebaselines else "0"
        raw = con.execute(sql_text("queries/charts_input").format(segment_offset=offset),
                          {"through": through}).fetchnumpy()
        names = {t: [r[0] for r in con.execute(f"SELECT {c} FROM {t} ORDER BY {o}").fetchall()]
                 for t, c, o in (("_bf_units", "instrument_id", "unit_code"), ("_bf_technologies", "name", "code"),
                                 ("_bf_kinds", "name", "code"))}
    finally:
        for t in ("_bf_units", "_bf_technologies", "_bf_kinds", "_bf_recharge"):
            con.execute(f"DROP TABLE IF EXISTS {t}")
    def cat(codes, categories):
        return pd.Categorical.from_codes(np.asarray(codes, dtype=np.int32), categories=categories)
    return pd.DataFrame({
        "check_id": raw["check_id"], "instrument_id": cat(raw["unit_code"], names["_bf_units"]),
        "level": raw["level"], "measured_at": raw["measured_at"],
        "check_type": cat(raw["check_type_code"], CHECK_TYPES),
        "relative_error": raw["relative_error"], "expected": raw["expected"], "measured": raw["measured"],
        "technology": cat(raw["technology_code"], names["_bf_technologies"]),
        "standard_kind": cat(raw["kind_code"], names["_bf_kinds"]),
        "baseline_period": raw["baseline_period"]}, copy=False)


def _load_state(con, keys: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    con.register("_bf_keys", keys)
    try:
        state = con.execute("SELECT s.* FROM chart_state s JOIN _bf_keys USING (instrument_id, level, baseline_period)").df()
        own = con.execute("SELECT b.instrument_id, b.level, b.baseline_period, b.center, b.sigma FROM chart_baselines b "
                          "JOIN _bf_keys USING (instrument_id, level, baseline_period) WHERE b.sigma_source = 'unit' "
                          "QUALIFY row_number() OVER (PARTITION BY b.instrument_id, b.level, b.baseline_period "
                          "ORDER BY b.version DESC) = 1").df()
        tail = con.execute(
            "SELECT p.instrument_id, p.level, p.baseline_period, p.check_id, p.measured_at, p.relative_error, p.position, p.z "
            "FROM chart_points p JOIN _bf_keys USING (instrument_id, level, baseline_period) "
            f"QUALIFY row_number() OVER (PARTITION BY p.instrument_id, p.level, p.baseline_period ORDER BY p.position DESC) <= {TAIL}"
        ).df()
    finally:
        con.unregister("_bf_keys")
    return state, own, tail


def analyse_fleet(con: duckdb.DuckDBPyConnection, settings: Settings) -> AnalysisRun:
    """Chart every check not yet charted, for the whole fleet at once, and store the results.

    Incremental: state carried per chart group (chart_state) and frozen baselines are reused; only
    checks missing from chart_points are charted. A group that receives a check older than its last
    charted check is charted again from its segment start (its frozen baselines are kept).
    Returns an AnalysisRun with counts, duration and the parameters used.
    """
    from pipeline.standards import sync_standards_settings

    t0 = time.perf_counter()
    started = datetime.now(UTC).replace(tzinfo=None)
    params = chart_parameters(settings)
    sync_standards_settings(con, settings)
    mode = "incremental" if con.execute("SELECT count(*) FROM chart_points").fetchall()[0][0] else "full"
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
    new = read_chart_input(con, with_rb, through, recharge)
    keys = new[KEY].drop_duplicates().reset_index(drop=True)
    state, own, tail = _load_state(con, keys)
    if len(state):
        late = new.merge(state[KEY + ["last_measured_at"]], on=KEY)
        late = late.loc[late["measured_at"] < late["last_measured_at"], KEY].drop_duplicates()
        if len(late):
            con.register("_bf_late", late)
            try:
                with transaction(con):
                    con.execute("DELETE FROM chart_signals WHERE check_id IN (SELECT p.check_id FROM chart_points p "
                                "JOIN _bf_late USING (instrument_id, level, baseline_period))")
                    for table in ("chart_points", "chart_state"):
                        con.execute(f"DELETE FROM {table} t USING _bf_late l WHERE t.instrument_id = l.instrument_id "
                                    "AND t.level = l.level AND t.baseline_period = l.baseline_period")
            finally:
                con.unregister("_bf_late")
            recharge |= set(late["instrument_id"].astype(str))
            new = read_chart_input(con, with_rb, through, recharge)
            keys = new[KEY].drop_duplicates().reset_index(drop=True)
            state, own, tail = _load_state(con, keys)
    pooled = con.execute("SELECT technology, standard_kind, level, sigma FROM chart_pooled_sigma").df()
    missing = np.isnan(pooled_lookup(new, pooled))
    if missing.any():
        sub = new[missing] if not missing.all() else new
        sub = sub.assign(gid=_starts(sub).cumsum())
        fresh = pooled_sigma(sub).assign(frozen_at=started, method=POOLED_METHOD)
        con.execute("INSERT INTO chart_pooled_sigma SELECT technology, standard_kind, level, sigma, n_pairs, "
                    "frozen_at, method FROM fresh")
        pooled = con.execute("SELECT technology, standard_kind, level, sigma FROM chart_pooled_sigma").df()
    t_read = time.perf_counter() - t0
    out = compute_charts(new, tail, state, own, pooled, params)
    window = settings.charts.replicate_window_minutes
    typed = out["points"][["check_id", "instrument_id", "level", "measured_at", "z", "position"]].assign(
        check_type=out["check_type"])
    groups = xbar_s_groups(typed, window)
    extra = []
    if len(groups):
        pos = typed.set_index("check_id")["position"]
        for chart, stat, lo, hi in (("xbar", "xbar", "xbar_lcl", "xbar_ucl"), ("s", "s", "s_lcl", "s_ucl")):
            hit = groups[(groups[stat] > groups[hi]) | (groups[stat] < groups[lo])]
            if len(hit):
                extra.append(hit[["instrument_id", "level", "check_id", "measured_at"]].assign(
                    position=pos.reindex(hit["check_id"]).to_numpy(), chart=chart, rule="limit",
                    direction=np.where(hit[stat] > hit[hi], "up", "down"), size=hit[stat].to_numpy(),
                    onset_at=pd.NaT, onset_back=0))
    sig = pd.concat([out["signals"], *extra], ignore_index=True) if extra else out["signals"]
    t_compute = time.perf_counter() - t0 - t_read
    ver = new[new["check_type"] == "verification"]
    lin = fit_linearity(ver[["instrument_id", "measured_at", "expected", "measured", "level"]],
                        settings.charts.verification_window_minutes)
    run_id = int(con.execute("SELECT coalesce(max(run_id), 0) + 1 FROM chart_runs").fetchall()[0][0])
    if len(sig):
        cs = settings.charts
        sig = sig.sort_values(["measured_at", "instrument_id", "level", "chart", "rule"], kind="stable").reset_index(drop=True)
        # Run length of each signal: checks since the previous signal of the same chart, rule and
        # side in this run (or since the segment began), the in-control run length it is tested on.
        sig["position"] = sig["position"].fillna(1).astype(np.int64)
        position = sig["position"].to_numpy()
        series = [pd.factorize(sig[c], sort=True)[0] for c in ("instrument_id", "level", "chart", "rule", "direction")]
        order = np.lexsort([position] + series[::-1])
        same = np.zeros(len(order), dtype=bool)
        same[1:] = np.logical_and.reduce([c[order][1:] == c[order][:-1] for c in series])
        pos_o = position[order]
        prev = np.where(same, np.r_[0, pos_o[:-1]], 0)
        run = np.empty(len(order), dtype=np.int64)
        run[order] = np.where(~same | (prev >= pos_o), pos_o, pos_o - prev)
        sig["position"] = run
        sig["p_value"] = signal_p_values(sig, k=params["cusum"]["k"], h=params["cusum"]["h"],
                                         lam=params["ewma"]["lam"], L=params["ewma"]["L"])
        fs = fleet_significance(sig["p_value"].to_numpy(), cs.fleet_fdr_q)
        sig["fleet_significant"] = pd.array(np.where(np.isnan(fs), None, fs > 0), dtype="boolean")
        sig["impact_checks"] = impact_checks(con, sig)
    first_sig = int(con.execute("SELECT coalesce(max(signal_id), 0) + 1 FROM chart_signals").fetchall()[0][0])
    first_b = int(con.execute("SELECT coalesce(max(baseline_id), 0) + 1 FROM chart_baselines").fetchall()[0][0])
    bl = out["baselines"]
    bl = bl.assign(baseline_id=np.arange(first_b, first_b + len(bl)), parameters=json.dumps(params, default=str),
                   software_version=SOFTWARE_VERSION)
    rb = (bl["version"] == 1) & (bl["baseline_period"] % 1000 != 0)
    if rb.any():
        con.register("_bf_rb", bl.loc[rb, ["instrument_id", "frozen_at"]].reset_index())
        why = con.execute("SELECT b.index, r.reason FROM _bf_rb b ASOF JOIN chart_rebaselines r "
                          "ON b.instrument_id = r.instrument_id AND b.frozen_at >= r.rebaseline_at").df()
        con.unregister("_bf_rb")
        bl.loc[why["index"].to_numpy(), "reason"] = ("rebaseline: " + why["reason"]).to_numpy()
    data_end = None if new.empty else pd.Timestamp(new["measured_at"].max()).to_pydatetime()
    st = out["state"]
    pts = out["points"]
    with transaction(con):
        con.register("_bf_points", pa.Table.from_pandas(pts, preserve_index=False))  # Arrow: no copy
        con.execute("INSERT INTO chart_points BY NAME SELECT * FROM _bf_points")
        con.unregister("_bf_points")
        con.register("_bf_state", st)
        con.execute("DELETE FROM chart_state t USING _bf_state s WHERE t.instrument_id = s.instrument_id "
                    "AND t.level = s.level AND t.baseline_period = s.baseline_period")
        con.execute("INSERT INTO chart_state BY NAME SELECT * FROM _bf_state")
        con.unregister("_bf_state")
        if len(bl):
            con.register("_bf_bl", bl)
            con.execute("INSERT INTO chart_baselines BY NAME SELECT * FROM _bf_bl")
            con.unregister("_bf_bl")
        if len(sig):
            sig = sig.drop(columns=["position", "onset_back"]).assign(
                signal_id=np.arange(first_sig, first_sig + len(sig)), run_id=run_id, created_at=started)
            con.register("_bf_sig", sig)
            con.execute("INSERT INTO chart_signals BY NAME SELECT * FROM _bf_sig")
            con.unregister("_bf_sig")
        if len(groups):
            con.register("_bf_groups", groups.assign(run_id=run_id))
            con.execute("INSERT OR IGNORE INTO chart_groups BY NAME SELECT * FROM _bf_groups")
            con.unregister("_bf_groups")
        if len(lin):
            con.register("_bf_lin", lin.assign(run_id=run_id))
            con.execute("INSERT OR IGNORE INTO chart_linearity BY NAME SELECT * FROM _bf_lin")
            con.unregister("_bf_lin")
        duration = time.perf_counter() - t0
        con.execute("INSERT INTO chart_runs (run_id, started_at, duration_s, mode, n_new_checks, n_groups, n_signals, "
                    "n_baselines, data_end, parameters, software_version, checks_through, checks_counted) "
                    "VALUES ($id, $at, $d, $mode, $n, $g, $s, $b, $end, $p, $v, $through, $counted)",
                    {"id": run_id, "at": started, "d": duration, "mode": mode, "n": len(pts), "g": len(st),
                     "s": len(sig), "b": len(bl), "end": data_end, "p": json.dumps(params, default=str),
                     "v": SOFTWARE_VERSION, "through": top, "counted": n_top})
    return AnalysisRun(run_id=run_id, mode=mode, n_new_checks=len(pts), n_groups=len(st), n_signals=len(sig),
                       n_baselines=len(bl), duration_s=duration, parameters=params, data_end=data_end,
                       timings={"read": t_read, "compute": t_compute, "store": duration - t_read - t_compute})
