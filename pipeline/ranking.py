"""The service queue: which units to visit first, how sure we are of the order, and why.

Priority is a probability a coordinator can read: the chance that a unit breaches tolerance at its
next scheduled check or visit (`QueueSettings.horizon_days` ahead), i.e. that a check then reads
outside tolerance. It comes from the unit's predictive distribution (pipeline.forecast):

- the model forecast: bias at the reference time + drift x days ahead from the latest converged
  fleet-model fit, after empirical Bayes shrinkage of bias and drift toward the fleet (Efron & Morris
  1975; DerSimonian & Laird 1986 between-unit variance), so a unit with few checks does not top the
  list by noise; variance = their covariance propagated + the unit's own repeatability + between-lot
  variance. The repeatability is the unit's moving-range estimate at the reference level shrunk toward
  the model's residual variance of its technology (normal / scaled inverse chi-square, Gelman et al.,
  Bayesian Data Analysis, 3rd ed., 2.6), so a noisy unit breaches more often. Over days without checks
  the drift is taken as uncertain as the fleet's spread of drifts, so a silent unit's variance grows
  with the square of the time since its last check.
- chart signals (CUSUM/EWMA) mean the unit left the model's linear path. Its forecast becomes a mixture:
  with weight w (`p_signal_fleet` / `p_signal_local`: how often such a signal marks a real change) the
  Montgomery & Runger 11-6 line through its checks since the change (errors less the model's lot effects
  and wet-bath depletion; slope shrunk toward its drift before, with the fleet's spread of drifts as
  prior variance), else the model forecast. When all its signals were raised on checks of lots the
  model finds off in the same direction, the post-change branch is itself a mixture: with weight
  `lot_explained_factor` the shift on those checks is the unit's own (off lot's effect left in), else
  the lot's; the unit gets the `lot_explained` evidence.
- other evidence (out of tolerance on its last day, calibration overdue, silence while its site reports,
  aborted/invalid rate above its Laney p' limit) enters as independent causes with the probabilities in
  settings (noisy-OR): P = 1 - (1 - P_forecast) prod(1 - p_i). An off lot explaining the out-of-tolerance
  checks scales that cause by `lot_explained_factor`.

Rank intervals come from simulating the estimates (5th-95th percentiles of the simulated ranks).
"""

from __future__ import annotations

import json
import math
import re
from dataclasses import dataclass, field
from datetime import datetime

import duckdb
import numpy as np
import pandas as pd

from pipeline import __version__
from pipeline.attribute_chart import D2_TWO, laney_p_chart
from pipeline.db import query_df
from pipeline.forecast import breach_probability, forecast_bias, shrunk_line_forecast
from pipeline.settings import QueueSettings, Settings

Z95 = 1.959963984540054
MR_EFFICIENCY = 0.62  # degrees of freedom of MR-bar / d2 per moving range (Cryer & Ryan 1990; from memory)


@dataclass(frozen=True)
class QueueEntry:
    """One unit's place in the queue."""

    rank: int
    instrument_id: str
    region: str | None
    site_id: str | None
    p_breach: float
    rank_low: int
    rank_high: int
    reasons: tuple[str, ...]
    evidence: dict = field(hash=False, compare=False)


@dataclass(frozen=True)
class ServiceQueue:
    """The ranked queue as of a data time, with how it was made."""

    as_of: datetime
    entries: tuple[QueueEntry, ...]
    tolerance_pct: float
    horizon_days: int
    model_available: bool
    settings_digest: str
    software_version: str
    warnings: tuple[str, ...] = ()

    def frame(self) -> pd.DataFrame:
        """The queue as a DataFrame (reasons joined by spaces)."""
        return pd.DataFrame([{"rank": e.rank, "instrument_id": e.instrument_id, "region": e.region,
                              "site_id": e.site_id, "p_breach": e.p_breach, "rank_low": e.rank_low,
                              "rank_high": e.rank_high, "reasons": " ".join(e.reasons)} for e in self.entries],
                            columns=["rank", "instrument_id", "region", "site_id", "p_breach", "rank_low",
                                     "rank_high", "reasons"])


def table_exists(con: duckdb.DuckDBPyConnection, name: str) -> bool:
    return con.execute("SELECT count(*) FROM information_schema.tables WHERE table_name = $n",
                       {"n": name}).fetchone()[0] > 0


def tolerance_pct(settings: Settings) -> float:
    """The default tolerance rule in percent at the queue's reference level."""
    rules = settings.standards.tolerance_rules
    rule = next((r for r in rules if not r.check_type and not r.level), rules[0])
    return 100.0 * max(rule.relative, rule.absolute / settings.queue.reference_level)


def default_as_of(con: duckdb.DuckDBPyConnection) -> datetime | None:
    """The time of the latest check: the as-of time when none is given (never the wall clock)."""
    value = query_df(con, "queries/queue_as_of")["as_of"].iloc[0]
    return None if pd.isna(value) else pd.Timestamp(value).to_pydatetime()


def shrink(estimates: np.ndarray, se: np.ndarray) -> tuple[np.ndarray, np.ndarray, float, float]:
    """Normal-normal empirical Bayes: posterior means and variances toward the fleet mean.

    Source: Efron & Morris (1975), "Data analysis using Stein's estimator and its generalizations",
    JASA 70:311-319 (shrinkage factor tau2 / (tau2 + se2)); the between-unit variance tau2 by the
    DerSimonian & Laird (1986) moment estimator, Controlled Clinical Trials 7:177-188, which weighs
    each unit by its precision so a few very noisy units do not wash it out.
    Returns (posterior mean, posterior variance, fleet mean, between-unit variance).
    """
    ok = np.isfinite(estimates) & np.isfinite(se) & (se > 0)
    if ok.sum() < 3:
        return estimates, se ** 2, float(np.nanmean(estimates)) if ok.any() else 0.0, float("nan")
    e, s2 = estimates[ok], se[ok] ** 2
    w = 1 / s2
    mean_w = float((w * e).sum() / w.sum())
    q = float((w * (e - mean_w) ** 2).sum())
    denom = float(w.sum() - (w ** 2).sum() / w.sum())
    tau2 = max((q - (len(e) - 1)) / denom if denom > 0 else 0.0, 1e-6)
    wt = 1 / (s2 + tau2)
    mean = float((wt * e).sum() / wt.sum())
    with np.errstate(invalid="ignore"):
        shrink_w = tau2 / (tau2 + se ** 2)
    post = np.where(ok, mean + shrink_w * (estimates - mean), mean)
    post_var = np.where(ok, shrink_w * se ** 2, tau2)
    return post, post_var, mean, tau2


def _days(a, b) -> float:
    if a is None or b is None or pd.isna(a) or pd.isna(b):
        return math.nan
    return (pd.Timestamp(a) - pd.Timestamp(b)).total_seconds() / 86400.0


def build_service_queue(con: duckdb.DuckDBPyConnection, settings: Settings,
                        as_of: datetime | None = None) -> ServiceQueue:
    """Rank every instrument by its probability of breaching tolerance before its next visit.

    Parameters:
        con: a connection (a reader's snapshot is fine; writers sync standards settings first).
        settings: program settings; the queue section weighs the evidence.
        as_of: UTC data time; default the latest check.
    Returns:
        ServiceQueue with entries in rank order.
    Source: see the module docstring (Montgomery & Runger 11-6; Efron & Morris 1975; Laney 2002).
    """
    q: QueueSettings = settings.queue
    warnings: list[str] = []
    if as_of is None:
        as_of = default_as_of(con)
    if as_of is None:
        return ServiceQueue(datetime(1970, 1, 1), (), tolerance_pct(settings), q.horizon_days, False,
                            settings.digest(), __version__, ("no checks in the database",))
    as_of = pd.Timestamp(as_of).to_pydatetime()
    tol = tolerance_pct(settings)
    units = query_df(con, "queries/queue_units", as_of=as_of, rate_days=q.rate_window_days)
    model_ok = table_exists(con, "unit_estimates") and table_exists(con, "model_fits")
    if model_ok:
        est = query_df(con, "queries/queue_estimates", as_of=as_of)
        vc = query_df(con, "queries/queue_variance", as_of=as_of)
        lots = query_df(con, "queries/queue_lots_used", as_of=as_of, window_days=q.lot_window_days)
        recent = query_df(con, "queries/queue_recent_checks", as_of=as_of)
        if est.empty:
            warnings.append("no converged fleet model fit: forecasts use the fleet prior only")
            model_ok = False
    else:
        est = pd.DataFrame(columns=["instrument_id"])
        vc = pd.DataFrame(columns=["component", "variance"])
        lots = pd.DataFrame(columns=["instrument_id", "lot_id", "n_checks", "lot_verdict", "lot_effect_pct"])
        recent = pd.DataFrame(columns=["instrument_id", "verdict", "relative_error", "lot_id", "lot_verdict",
                                       "lot_effect_pct", "level"])
        warnings.append("fleet model tables missing: forecasts unavailable")
    signals = (query_df(con, "queries/queue_signals", as_of=as_of, window_days=q.signal_window_days)
               if table_exists(con, "chart_signals") else pd.DataFrame(columns=["instrument_id"]))
    if not table_exists(con, "chart_signals"):
        warnings.append("chart signals missing: signal evidence unavailable")
    series_ok = table_exists(con, "model_fits") and table_exists(con, "lot_effects")
    series = (query_df(con, "queries/queue_unit_series", as_of=as_of,
                       days_back=max(q.rate_window_days, q.post_change_max_days))
              if series_ok else pd.DataFrame(columns=["instrument_id", "measured_at", "level", "y",
                                                      "lot_effect_pct", "lot_verdict", "mean_lot_effect_pct", "d"]))
    depletion = _fit_depletion(con, as_of) if series_ok else 0.0
    # The unit's own deviation as the fleet model sees it: relative error less its lot's effect and
    # the wet-bath depletion term (the model's unit intercept + drift path + residual).
    series["y_adj"] = (series["y"].astype(float) - series["lot_effect_pct"].astype(float)
                       - depletion * series["d"].astype(float))
    # The same with the effect of lots found 'off' left in (an ordinary lot's effect taken out instead):
    # the readings as they would be if the off lot's shift were the unit's own.
    off = (series["lot_verdict"] == "off").to_numpy(dtype=bool)
    series["y_off_kept"] = series["y_adj"] + np.where(
        off, series["lot_effect_pct"].astype(float) - series["mean_lot_effect_pct"].astype(float), 0.0)

    df = units.merge(est, on="instrument_id", how="left") if not est.empty else units.assign(
        bias_pct=np.nan, bias_ci_low_pct=np.nan, bias_ci_high_pct=np.nan, drift_pct_per_30d=np.nan,
        drift_ci_low=np.nan, drift_ci_high=np.nan, bias_drift_cov=0.0, reference_at=pd.NaT, model_n_checks=0)
    n = len(df)
    if n == 0:
        return ServiceQueue(as_of, (), tol, q.horizon_days, model_ok, settings.digest(), __version__,
                            tuple(warnings + ["no instruments"]))

    # --- predictive distribution, shrunk toward the fleet --------------------------------------
    b = df["bias_pct"].to_numpy(float)
    se_b = ((df["bias_ci_high_pct"] - df["bias_ci_low_pct"]) / (2 * Z95)).to_numpy(float)
    d = df["drift_pct_per_30d"].to_numpy(float)
    se_d = ((df["drift_ci_high"] - df["drift_ci_low"]) / (2 * Z95)).to_numpy(float)
    cov = df["bias_drift_cov"].fillna(0.0).to_numpy(float)
    if q.shrink_to_fleet:
        b_post, vb_post, b_mean, tau2_b = shrink(b, se_b)
        d_post, vd_post, d_mean, tau2_d = shrink(d, se_d)
        wb = np.where(se_b > 0, vb_post / np.where(se_b > 0, se_b ** 2, 1), 1.0)
        wd = np.where(se_d > 0, vd_post / np.where(se_d > 0, se_d ** 2, 1), 1.0)
        cov_post = np.where(np.isfinite(b) & np.isfinite(d), cov * wb * wd, 0.0)
    else:
        b_post, vb_post, d_post, vd_post, cov_post = b, se_b ** 2, d, se_d ** 2, cov
        b_mean = d_mean = tau2_b = tau2_d = math.nan
    # The fleet's drift distribution: the prior of a drift the unit's own data do not pin down
    # (after a detected change, or over days without checks).
    _, _, fleet_drift, fleet_drift_var = shrink(d, se_d)
    fleet_drift_var = fleet_drift_var if math.isfinite(fleet_drift_var) else 0.0
    comp = dict(zip(vc["component"], vc["variance"])) if not vc.empty else {}
    rep = [v for k, v in comp.items() if (str(k).startswith("repeatability") or k == "residual") and pd.notna(v)]
    residual_var = float(np.median(rep)) if rep else 0.0
    lot_v = comp.get("between_lots", comp.get("lot"))
    lot_var = float(lot_v) if lot_v is not None and pd.notna(lot_v) else 0.0
    # Each unit's repeatability at the reference level: its own moving ranges, shrunk toward the
    # model's residual variance of its technology (a noisy unit breaches more often).
    prior_var = np.array([_repeatability_prior(comp, t, q.reference_level, residual_var)
                          for t in df["technology"]])
    own_var, own_df = _own_repeatability(series, df["instrument_id"], q.reference_level,
                                         pd.Timestamp(as_of) - pd.Timedelta(days=q.rate_window_days))
    resid_var = np.where(own_df > 0, (q.repeatability_prior_df * prior_var + own_df * own_var)
                         / (q.repeatability_prior_df + own_df), prior_var)
    extra_var = resid_var + lot_var
    # Days from the reference time to the next visit: horizon after the data time. Over days with no
    # checks the unit's drift is only known as well as the fleet's spread of drifts, so a silent
    # unit's predictive variance grows with the square of the time since its last check.
    ref = pd.to_datetime(df["reference_at"]) if "reference_at" in df else pd.Series(pd.NaT, index=df.index)
    lag = np.array([max(_days(as_of, r), 0.0) if pd.notna(r) else 0.0 for r in ref])
    h = lag + q.horizon_days
    mean_h = b_post + d_post * h / 30
    var_param = (vb_post + (h / 30) ** 2 * vd_post + 2 * (h / 30) * cov_post
                 + (lag / 30) ** 2 * fleet_drift_var)
    sd_h = np.sqrt(np.maximum(var_param + extra_var, 1e-12))
    p_model = np.nan_to_num(breach_probability(mean_h, sd_h, tol), nan=0.0)
    p_forecast = p_model.copy()
    series_by_unit = {k: g for k, g in series.groupby("instrument_id")} if not series.empty else {}
    # post-change forecasts of units with active signals: (mean, variance of the mean, weight)
    post_mean, post_var, post_w = np.zeros(n), np.zeros(n), np.zeros(n)
    post_mean2, post_var2, post_f = np.zeros(n), np.zeros(n), np.zeros(n)   # off lots' effect left in

    # --- other evidence ----------------------------------------------------------------------
    chart = laney_p_chart(df["n_aborted_invalid"].to_numpy(float), df["n_recent"].to_numpy(float))
    lots_by_unit = {k: g for k, g in lots.groupby("instrument_id")} if not lots.empty else {}
    recent_by_unit = {k: g for k, g in recent.groupby("instrument_id")} if not recent.empty else {}
    if not signals.empty and "chart" in signals:
        signals = signals[signals["chart"].isin(q.signal_charts)]
    sig_by_unit = {k: g for k, g in signals.groupby("instrument_id")} if not signals.empty else {}
    lot_effects_all = ({} if lots.empty else
                       {r.lot_id: float(r.lot_effect_pct) for r in lots.itertuples()
                        if r.lot_verdict == "off" and pd.notna(r.lot_effect_pct)})
    if model_ok and table_exists(con, "lot_effects"):
        off = con.execute("SELECT lot_id, effect_pct FROM lot_effects WHERE verdict = 'off' AND fit_id = "
                          "(SELECT fit_id FROM model_fits WHERE converged AND window_end <= $t "
                          "ORDER BY window_end DESC, fit_id DESC LIMIT 1)", {"t": as_of}).fetchall()
        lot_effects_all.update({lot: float(e) for lot, e in off})

    p_other = np.zeros(n)
    p_explained = np.zeros(n)
    reasons_all, evidence_all = [], []
    for i, row in enumerate(df.itertuples(index=False)):
        uid = row.instrument_id
        reasons: list[str] = []
        causes: list[float] = []
        explained: list[float] = []
        ev: dict = {"p_model": round(float(p_model[i]), 6), "residual_sd_pct": round(math.sqrt(resid_var[i]), 3)}
        # lot verdicts that could explain the readings
        off_lots = []
        lg = lots_by_unit.get(uid)
        if lg is not None:
            off_lots = [(r.lot_id, float(r.lot_effect_pct)) for r in lg.itertuples()
                        if r.lot_verdict == "off" and pd.notna(r.lot_effect_pct)]

        def explained_by_lot(direction: float) -> tuple[str, float] | None:
            for lot_id, eff in off_lots:
                if direction == 0 or np.sign(eff) == np.sign(direction):
                    return lot_id, eff
            return None

        # forecast
        if np.isfinite(b[i]):
            fc = forecast_bias(float(b_post[i]), float(d_post[i]), float(vb_post[i]), float(vd_post[i]),
                               float(cov_post[i]), float(extra_var[i]), tol, float(h[i]))
            ev.update(bias_pct=round(float(b[i]), 4), bias_shrunk_pct=round(float(b_post[i]), 4),
                      drift_pct_per_30d=round(float(d[i]), 4), drift_shrunk_pct_per_30d=round(float(d_post[i]), 4),
                      days_to_tolerance=fc.days_to_tolerance, days_to_tolerance_low=fc.days_to_tolerance_low,
                      days_to_tolerance_high=fc.days_to_tolerance_high, forecast_sd_pct=round(float(sd_h[i]), 4))
            if p_model[i] >= 0.01:
                reasons.append(f"Forecast bias {mean_h[i]:+.1f} % (sd {sd_h[i]:.1f} %) at the next visit in "
                               f"{q.horizon_days} days against a tolerance of {tol:.2f} %: "
                               f"{100 * p_model[i]:.0f} % chance of breach.")
            if math.isfinite(fc.days_to_tolerance_low) and fc.days_to_tolerance_low <= 365:
                high = ("never within 10 years" if math.isinf(fc.days_to_tolerance_high)
                        else f"{fc.days_to_tolerance_high:.0f}")
                est_txt = "not on the mean line" if math.isinf(fc.days_to_tolerance) else f"{fc.days_to_tolerance:.0f}"
                reasons.append(f"Drift {d[i]:+.2f} % per 30 days; days to tolerance {est_txt} "
                               f"(95 % prediction interval {fc.days_to_tolerance_low:.0f} to {high}).")
        else:
            ev["bias_pct"] = None
            if model_ok:
                reasons.append("No model estimate for this unit; its forecast is the fleet average.")
        if own_df[i] > 0 and resid_var[i] > q.repeatability_flag_ratio * prior_var[i]:
            reasons.append(f"Repeatability sd {math.sqrt(resid_var[i]):.1f} % at {q.reference_level:.3f} over "
                           f"{q.rate_window_days} days, against {math.sqrt(prior_var[i]):.1f} % for its "
                           f"technology: single checks stray further.")
        # out of tolerance now
        rg = recent_by_unit.get(uid)
        if rg is not None:
            fails = rg[rg["verdict"] == "fail"]
            if len(fails):
                worst = fails.loc[fails["relative_error"].abs().idxmax()]
                lot_ex = explained_by_lot(float(worst["relative_error"]))
                ev.update(out_of_tolerance=int(len(fails)), worst_error_pct=round(100 * float(worst["relative_error"]), 3))
                if lot_ex and worst["lot_id"] == lot_ex[0]:
                    explained.append(q.p_out_of_tolerance)
                    causes.append(q.p_out_of_tolerance * q.lot_explained_factor)
                    reasons.append(f"{len(fails)} check(s) on its last day out of tolerance (worst "
                                   f"{100 * worst['relative_error']:+.1f} %), on lot {lot_ex[0]}, which the fleet "
                                   f"model finds off by {lot_ex[1]:+.1f} %: the lot, not the unit, is the likely cause.")
                else:
                    causes.append(q.p_out_of_tolerance)
                    reasons.append(f"{len(fails)} check(s) on its last day out of tolerance "
                                   f"(worst {100 * worst['relative_error']:+.1f} %).")
        # chart signals: a persistent-shift signal says the unit's level left the path the fleet model
        # fitted. The forecast becomes a mixture: with weight w (how often such a signal marks a real
        # change) the post-change line through the checks since the onset, else the model's forecast.
        sg = sig_by_unit.get(uid)
        if sg is not None and len(sg):
            ev["signals"] = int(len(sg))
            n_fleet = int(sg["fleet_significant"].astype(bool).sum())
            explained_n = 0
            for s in sg.itertuples():
                eff = lot_effects_all.get(s.lot_id)
                if eff is not None and np.sign(eff) == (1.0 if s.direction == "up" else -1.0):
                    explained_n += 1
            w = q.p_signal_fleet if n_fleet else q.p_signal_local
            last = sg.iloc[-1]
            impact = (f", {int(last.impact_checks)} checks in its impact window"
                      if pd.notna(last.impact_checks) else "")
            onset = f" from {pd.Timestamp(last.onset_at):%Y-%m-%d}" if pd.notna(last.onset_at) else ""
            text = (f"{len(sg)} {'/'.join(q.signal_charts).upper()} signal(s) in {q.signal_window_days} days, {n_fleet} significant across the "
                    f"fleet; latest {last.chart} {last.rule} {last.direction} on "
                    f"{pd.Timestamp(last.measured_at):%Y-%m-%d} at level {last.level:.3f}{onset}{impact}")
            ev["signals_fleet_significant"] = n_fleet
            lot_explains = explained_n == len(sg)
            if lot_explains:
                explained.append(w)
            change_from = pd.to_datetime(sg["onset_at"]).fillna(pd.to_datetime(sg["measured_at"])).min()
            # prior of the post-change drift: the unit's drift before (the fleet's mean without a model
            # estimate), as uncertain as drifts differ between units
            prior = (float(d_post[i]) if np.isfinite(d_post[i]) else fleet_drift,
                     fleet_drift_var if q.shrink_to_fleet and fleet_drift_var > 0 else math.inf)
            pc = _post_change(series_by_unit.get(uid), change_from, as_of, q, *prior)
            sentence = text
            if pc is not None:
                fc, start = pc
                p_post = float(breach_probability(fc.estimate, math.sqrt(fc.var_mean + extra_var[i]), tol))
                post_mean[i], post_var[i], post_w[i] = fc.estimate, fc.var_mean, w
                if lot_explains:
                    # Explained by an off lot: with weight lot_explained_factor the shift the chart saw on
                    # that lot's checks is the unit's own after all (the off lot's effect left in).
                    f = q.lot_explained_factor
                    kept = _post_change(series_by_unit.get(uid), change_from, as_of, q, *prior, column="y_off_kept")
                    p_kept = (float(breach_probability(kept[0].estimate, math.sqrt(kept[0].var_mean + extra_var[i]),
                                                       tol)) if kept is not None else p_post)
                    ev["p_post_change_lot_kept"] = round(p_kept, 6)
                    p_post = f * p_kept + (1 - f) * p_post
                    if kept is not None:
                        post_mean2[i], post_var2[i], post_f[i] = kept[0].estimate, kept[0].var_mean, f
                p_forecast[i] = (1 - w) * p_model[i] + w * p_post
                ev.update(p_post_change=round(p_post, 6), signal_weight=round(w, 4),
                          post_change_from=f"{pd.Timestamp(start):%Y-%m-%d}",
                          post_change_level_pct=round(fc.level_now, 4),
                          post_change_drift_pct_per_30d=round(fc.slope, 4), post_change_checks=fc.n)
                sentence += (f"; since {pd.Timestamp(start):%Y-%m-%d} its level (lot-adjusted) is "
                             f"{fc.level_now:+.1f} % and moving {fc.slope:+.2f} % per 30 days, so the next visit "
                             f"has a {100 * p_post:.0f} % chance of breach if the change is real "
                             f"(weight {100 * w:.0f} %)")
            if lot_explains:
                lot_id = sg.iloc[-1].lot_id
                reasons.append(f"{sentence}; all raised on checks with lots the fleet model finds off in the same "
                               f"direction (e.g. {lot_id}, {lot_effects_all[lot_id]:+.1f} %): the lot, not the unit, "
                               f"is the likely cause.")
            else:
                reasons.append(sentence + ".")
        # calibration
        since_cal = _days(as_of, row.last_calibration_at)
        ev["days_since_calibration"] = None if math.isnan(since_cal) else round(since_cal, 1)
        if math.isfinite(since_cal) and since_cal + q.horizon_days > q.calibration_interval_days:
            causes.append(q.p_calibration_overdue)
            reasons.append(f"Last calibration {since_cal:.0f} days ago; the interval is "
                           f"{q.calibration_interval_days} days.")
        # silence
        silent_days = _days(as_of, row.last_check_at)
        site_days = _days(as_of, row.site_last_check_at)
        if (math.isfinite(silent_days) and silent_days >= q.silence_days and math.isfinite(site_days)
                and site_days < q.silence_days):
            ev["silent_days"] = round(silent_days, 1)
            causes.append(q.p_silent)
            reasons.append(f"No checks for {silent_days:.0f} days while other units at site {row.site_id} report.")
        # aborted / invalid
        if chart.above[i]:
            ev.update(aborted_invalid=int(row.n_aborted_invalid), aborted_invalid_checks=int(row.n_recent),
                      laney_ucl=round(chart.ucl[i], 5))
            causes.append(q.p_attribute)
            reasons.append(f"{int(row.n_aborted_invalid)} of {int(row.n_recent)} checks aborted or invalid in "
                           f"{q.rate_window_days} days ({100 * chart.proportions[i]:.1f} %, fleet "
                           f"{100 * chart.p_bar:.1f} %, Laney p' limit {100 * chart.ucl[i]:.1f} %).")
        if off_lots:
            ev["off_lots"] = [lot for lot, _ in off_lots]
        ev["p_forecast"] = round(float(p_forecast[i]), 6)
        p_other[i] = 1 - np.prod([1 - c for c in causes]) if causes else 0.0
        p_explained[i] = 1 - np.prod([1 - c for c in explained]) if explained else 0.0
        ev["lot_explained"] = bool(explained)
        ev["n_checks"] = int(row.n_checks)
        reasons_all.append(reasons)
        evidence_all.append(ev)

    p_total = 1 - (1 - p_forecast) * (1 - p_other)

    # --- ranks and their uncertainty --------------------------------------------------------
    ids = df["instrument_id"].to_numpy(str)
    order = np.lexsort((ids, -p_total))
    rank = np.empty(n, dtype=int)
    rank[order] = np.arange(1, n + 1)
    rng = np.random.default_rng(q.rank_seed)
    S = max(int(q.rank_simulations), 1)
    zb = rng.standard_normal((S, n))
    zd = rng.standard_normal((S, n))
    sb, sd_ = np.sqrt(np.maximum(vb_post, 0)), np.sqrt(np.maximum(vd_post, 0))
    rho = np.clip(np.where(sb * sd_ > 0, cov_post / np.where(sb * sd_ > 0, sb * sd_, 1), 0), -0.99, 0.99)
    bb = np.nan_to_num(b_post) + sb * zb
    dd = np.nan_to_num(d_post) + sd_ * (rho * zb + np.sqrt(1 - rho ** 2) * zd)
    ps = breach_probability(bb + dd * h / 30, np.sqrt(np.maximum(extra_var + (lag / 30) ** 2 * fleet_drift_var,
                                                               1e-12)), tol)
    zp = rng.standard_normal((S, n))
    ps_post = breach_probability(post_mean + np.sqrt(post_var) * zp, np.sqrt(np.maximum(extra_var, 1e-12)), tol)
    ps_kept = breach_probability(post_mean2 + np.sqrt(post_var2) * zp, np.sqrt(np.maximum(extra_var, 1e-12)), tol)
    ps_post = post_f * ps_kept + (1 - post_f) * ps_post
    ps = (1 - post_w) * ps + post_w * ps_post
    ps = 1 - (1 - ps) * (1 - p_other)
    sim_rank = (-ps).argsort(axis=1, kind="stable").argsort(axis=1, kind="stable") + 1
    rank_low = np.percentile(sim_rank, 5, axis=0, method="lower").astype(int)
    rank_high = np.percentile(sim_rank, 95, axis=0, method="higher").astype(int)
    rank_low = np.minimum(rank_low, rank)
    rank_high = np.maximum(rank_high, rank)

    entries = []
    for i in order:
        ev = evidence_all[i]
        ev.update(p_breach=round(float(p_total[i]), 6), p_other=round(float(p_other[i]), 6))
        reasons = reasons_all[i] or ["No evidence of a problem."]
        entries.append(QueueEntry(int(rank[i]), str(ids[i]), _opt(df["region"].iloc[i]), _opt(df["site_id"].iloc[i]),
                                  float(p_total[i]), int(rank_low[i]), int(rank_high[i]), tuple(reasons), ev))
    warnings.extend(chart.warnings)
    return ServiceQueue(as_of, tuple(entries), tol, q.horizon_days, model_ok, settings.digest(), __version__,
                        tuple(warnings))


def _fit_depletion(con: duckdb.DuckDBPyConnection, as_of: datetime) -> float:
    """The wet-bath depletion slope (percent per 100 checks) of the latest converged fit, 0 without one."""
    fit = query_df(con, "queries/queue_fit", as_of=as_of)
    if fit.empty or fit["parameters"].iloc[0] is None:
        return 0.0
    value = json.loads(fit["parameters"].iloc[0]).get("fixed_slope_d_pct_per_100_checks")
    return float(value) if value is not None and math.isfinite(float(value)) else 0.0


def _repeatability_prior(comp: dict, technology, level: float, default: float) -> float:
    """The fleet model's residual variance for a technology at a level (percent^2), else `default`."""
    for name, value in comp.items():
        m = re.fullmatch(r"repeatability (.+) @ ([0-9.]+)", str(name))
        if m and m.group(1) == technology and abs(float(m.group(2)) - level) < 5e-4 and pd.notna(value):
            return float(value)
    return default


def _own_repeatability(series: pd.DataFrame, ids: pd.Series, level: float, since) -> tuple[np.ndarray, np.ndarray]:
    """Each unit's repeatability variance at `level` from moving ranges of its lot-adjusted errors since `since`.

    Returns (variance, degrees of freedom) per id; MR-bar / d2 has about 0.62 (n - 1) degrees of freedom.
    Source: Montgomery, Introduction to Statistical Quality Control, 6.4 (sigma = MR-bar / d2);
    Cryer & Ryan (1990), JQT 22:187-192 (efficiency of MR-bar / d2 against S).
    """
    var = np.zeros(len(ids))
    dof = np.zeros(len(ids))
    if series.empty:
        return var, dof
    s = series[(np.abs(series["level"].astype(float) - level) < 5e-4)
               & (pd.to_datetime(series["measured_at"]) > pd.Timestamp(since))]
    if s.empty:
        return var, dof
    mr = s.groupby("instrument_id")["y_adj"].diff().abs()
    agg = mr.groupby(s["instrument_id"]).agg(["mean", "count"])
    agg = agg[agg["count"] >= 2].reindex(ids.to_numpy())
    ok = agg["count"].notna().to_numpy()
    var[ok] = (agg["mean"].to_numpy(float)[ok] / D2_TWO) ** 2
    dof[ok] = MR_EFFICIENCY * agg["count"].to_numpy(float)[ok]
    return var, dof


def _post_change(series: pd.DataFrame | None, change_from, as_of: datetime, q: QueueSettings,
                 slope_mean: float, slope_var: float, column: str = "y_adj"):
    """The line through a unit's lot-adjusted errors since a detected change, predicted at the next visit.

    Uses the checks from `change_from`, but at least the last `post_change_min_days` and at most
    `post_change_max_days`, or the last `post_change_min_checks` checks when fewer; x in 30-day units.
    Returns (LineForecast, start) or None.
    """
    if series is None or len(series) < 3:
        return None
    t = pd.to_datetime(series["measured_at"])
    start = min(pd.Timestamp(change_from), pd.Timestamp(as_of) - pd.Timedelta(days=q.post_change_min_days))
    start = max(start, pd.Timestamp(as_of) - pd.Timedelta(days=q.post_change_max_days))
    sel = (t >= start).to_numpy()
    if sel.sum() < q.post_change_min_checks:
        sel = np.zeros(len(series), dtype=bool)
        sel[-min(len(series), q.post_change_min_checks):] = True
    ts = t[sel]
    start = ts.min()
    x = ((ts - start).dt.total_seconds() / (86400.0 * 30)).to_numpy()
    x0 = (pd.Timestamp(as_of) - start).total_seconds() / (86400.0 * 30) + q.horizon_days / 30
    try:
        return shrunk_line_forecast(x, series[column].to_numpy(float)[sel], x0, slope_mean, slope_var), start
    except ValueError:
        return None


def _opt(v):
    return None if v is None or pd.isna(v) else str(v)


def _json_default(v):
    if isinstance(v, float) and not math.isfinite(v):
        return None
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (np.floating,)):
        return float(v)
    return str(v)


def evidence_json(ev: dict) -> str:
    clean = {k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in ev.items()}
    return json.dumps(clean, sort_keys=True, default=_json_default)


def store_service_queue(con: duckdb.DuckDBPyConnection, queue: ServiceQueue) -> int:
    """Replace the stored queue computed at the same as-of time; returns rows written."""
    rows = pd.DataFrame({
        "computed_at": [queue.as_of] * len(queue.entries),
        "instrument_id": [e.instrument_id for e in queue.entries],
        "rank": [e.rank for e in queue.entries],
        "p_breach": [e.p_breach for e in queue.entries],
        "rank_low": [e.rank_low for e in queue.entries],
        "rank_high": [e.rank_high for e in queue.entries],
        "reasons": [json.dumps(list(e.reasons)) for e in queue.entries],
        "evidence": [evidence_json({**e.evidence, "settings_digest": queue.settings_digest,
                                    "software_version": queue.software_version}) for e in queue.entries],
    })
    con.execute("BEGIN TRANSACTION")
    try:
        con.execute("DELETE FROM service_queue WHERE computed_at = $t", {"t": queue.as_of})
        con.register("_queue_rows", rows)
        con.execute("INSERT INTO service_queue (computed_at, instrument_id, rank, p_breach, rank_low, rank_high, "
                    "reasons, evidence) SELECT computed_at, instrument_id, rank, p_breach, rank_low, rank_high, "
                    "reasons, evidence FROM _queue_rows")
        con.unregister("_queue_rows")
        con.execute("COMMIT")
    except duckdb.Error:
        con.execute("ROLLBACK")
        raise
    return len(rows)
