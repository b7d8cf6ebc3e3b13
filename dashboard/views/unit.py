"""Unit: one instrument's control charts with its events and signals, the model's bias and
drift, the forecast to tolerance, the uncertainty budget and its instrument record."""

import datetime as dt

import pandas as pd
import streamlit as st

from dashboard import figures, frame, library, loaders

WINDOWS = loaders.UNIT_WINDOWS
DEFAULT_WINDOW = loaders.UNIT_DEFAULT_WINDOW
CHARTS = ["Individuals / moving range", "CUSUM", "EWMA", "Relative error"]
NO_REGION = "(no region)"
RECORD_PERIODS = {"Whole record": None, "Last 365 days": 365, "Last 90 days": 90}  # days before the last check
CHOSEN_DATES = "Chosen dates"

frame.header("Unit", "Is this unit drifting, since when, and is it the unit or its lot?")
units = loaders.load("dashboard_unit_list")
if frame.missing(units):
    frame.not_computed("Instruments", "Ingest the instruments reference file first.")
    st.stop()

# The unit is picked within a region: one box of every unit of a fleet of thousands is long to
# scroll and each option is work for the browser on every unit opened. Keys carry the unit the
# address names, so that the boxes follow a unit opened from another page.
wanted = st.query_params.get("unit")
regions = units["region"].fillna(NO_REGION)
current = wanted if wanted in set(units["instrument_id"]) else units["instrument_id"].iloc[0]
region_names = sorted(regions.unique())
home = regions[units["instrument_id"] == current].iloc[0]
pick_region, pick_unit = st.columns([1, 2])
region = pick_region.selectbox("Region", region_names, index=region_names.index(home), key=f"unit_region_{wanted}")
ids = units.loc[regions == region, "instrument_id"].tolist()
unit_id = pick_unit.selectbox(f"Unit ({len(ids):,} in the region)", ids,
                              index=ids.index(current) if current in ids else 0, key=f"unit_pick_{wanted}_{region}")
if unit_id != wanted:
    st.query_params["unit"] = unit_id
info = units[units["instrument_id"] == unit_id].iloc[0]
in_service = pd.Timestamp(info["in_service_on"]) if pd.notna(info["in_service_on"]) else None
st.markdown(f"**{unit_id}** · {info['technology']} {info['model'] or ''} · site {info['site_id']} · "
            f"region {info['region']}" + (f" · in service since {in_service:%Y-%m-%d}" if in_service is not None else ""))

levels = loaders.load("dashboard_unit_levels", instrument_id=unit_id)
if frame.missing(levels):
    st.info("This unit has no checks stored.")
    st.stop()
left, right = st.columns([1, 2])
level = left.selectbox("Level (g/210L)", levels["level"].tolist(),
                       format_func=lambda v: f"{v:.3f} ({int(levels.loc[levels['level'] == v, 'n_checks'].iloc[0]):,} checks)",
                       key="unit_level")
# The charts open on the latest months: a unit checked daily for years has thousands of checks
# per level, and every point, signal window and tooltip is work for the browser. The control
# widens the window up to the whole record (its latest MAX_POINTS checks).
window = right.radio("Time shown", list(WINDOWS), index=list(WINDOWS).index(DEFAULT_WINDOW), horizontal=True,
                     key="unit_window")
at_level = levels[levels["level"] == level].iloc[0]
since = loaders.unit_window_since(at_level, WINDOWS[window])
window_args = {"instrument_id": unit_id, "level": level, "since": since, "max_points": loaders.MAX_POINTS}

events = loaders.load("dashboard_unit_events", instrument_id=unit_id)
if events is not None:  # service events, and lot changes at the level shown
    events = events[events["level"].isna() | (events["level"].round(3) == round(level, 3))]
signals = loaders.load("dashboard_unit_signals", instrument_id=unit_id, since=since)
level_signals = None if signals is None else signals[signals["level"].round(3) == round(level, 3)]


def _shown(data: pd.DataFrame, what: str) -> None:
    first = f" from {pd.Timestamp(data['measured_at'].min()):%Y-%m-%d}" if not data.empty else ""
    latest = f" (the latest {loaders.MAX_POINTS:,})" if len(data) == loaders.MAX_POINTS else ""
    st.caption(f"Showing {len(data):,} {what} of the {int(at_level['n_checks']):,} at this level{first}{latest}.")


st.subheader("Charts")
# One chart at a time: the browser draws only what is looked at.
kind = st.radio("Chart", CHARTS, horizontal=True, key="unit_chart")
if kind == "Relative error":
    checks = loaders.load("dashboard_unit_checks", **window_args)
    _shown(checks, "checks")
    if not checks.empty:
        events_in = None if events is None else events[events["event_at"] >= checks["measured_at"].min()]
        frame.chart(figures.relative_error_chart(checks, loaders.tolerance_pct(), events_in, level_signals),
                    key="unit_relative_error")
else:
    points = loaders.load("dashboard_unit_points", **window_args)
    baselines = loaders.load("dashboard_unit_baselines", instrument_id=unit_id)
    if frame.missing(points):
        frame.not_computed("Control charts for this unit and level", "Run the chart analysis (`breathfleet analyse`).")
    else:
        _shown(points, "charted checks")
        events_in = None if events is None else events[events["event_at"] >= points["measured_at"].min()]
        if kind == "CUSUM":
            frame.chart(figures.cusum_chart(points, library.cusum_h(baselines, level), events_in, level_signals),
                        key="unit_cusum")
        elif kind == "EWMA":
            frame.chart(figures.ewma_chart(points, events_in, level_signals), key="unit_ewma")
        else:
            frame.chart(figures.individuals_chart(points, events_in, level_signals), key="unit_individuals")
            frame.chart(figures.moving_range_chart(points, events_in, level_signals), key="unit_mr")
    if baselines is not None and not baselines.empty:
        frame.table_alternative(baselines, "Frozen baselines (center, sigma, how they were set)")

if events is not None and not events.empty:
    frame.table_alternative(events, "Service events and lot changes (marked on the charts' time axis)")

st.subheader("Signals and their impact windows")
if signals is None:
    frame.not_computed("Signals", "Run the chart analysis (`breathfleet analyse`).")
elif signals.empty:
    st.write("No control-chart signals for this unit in the time shown.")
else:
    listed = loaders.UNIT_SIGNALS_LISTED
    more = f"; the {listed} most recent are listed" if len(signals) > listed else ""
    st.caption(f"{len(signals):,} signal{'' if len(signals) == 1 else 's'} of this unit (all levels) "
               f"in the time shown{more}.")
    frame.table(signals.head(listed))
    if len(signals) > listed:
        frame.table_alternative(signals, f"All {len(signals):,} signals in the time shown (table)")

st.subheader("Bias and drift (fleet model)")
estimates = loaders.load("dashboard_unit_estimates", instrument_id=unit_id)
if frame.missing(estimates):
    frame.not_computed("Model estimates", "Fit the fleet model (`breathfleet model`).")
else:
    last = estimates.iloc[-1]
    c = st.columns(3)
    c[0].metric("Bias at last check", f"{last['bias_pct']:+.2f} %",
                help=f"95 % interval {last['bias_ci_low_pct']:+.2f} to {last['bias_ci_high_pct']:+.2f} %")
    c[0].caption(f"95 % interval {last['bias_ci_low_pct']:+.2f} to {last['bias_ci_high_pct']:+.2f} %")
    c[1].metric("Drift per 30 days", f"{last['drift_pct_per_30d']:+.2f} %")
    c[1].caption(f"95 % interval {last['drift_ci_low']:+.2f} to {last['drift_ci_high']:+.2f} %")
    c[2].metric("Checks in the fit", f"{int(last['n_checks']):,}")
    c[2].caption(f"fitted {pd.Timestamp(last['fitted_at']):%Y-%m-%d}; converged: {bool(last['converged'])}")
    frame.table_alternative(estimates, "Estimates per baseline period")
    forecast = loaders.load("dashboard_unit_forecast", instrument_id=unit_id,
                            horizon_days=loaders.settings().queue.calibration_interval_days)
    if not frame.missing(forecast):
        st.markdown(library.forecast_sentence(last, loaders.tolerance_pct(),
                                              loaders.settings().queue.calibration_interval_days))
        frame.chart(figures.forecast_chart(forecast, loaders.tolerance_pct()), key="unit_forecast")

st.subheader("Uncertainty budget")
budget = library.uncertainty_budget(unit_id, level, pd.Timestamp(levels["last_check_at"].max()))
if budget is None:
    frame.not_computed("Uncertainty budget", "It appears once the reference-standards step is installed.")
elif budget["summary"] is None:
    st.info("No uncertainty budget at this level in the current baseline period. " + " ".join(budget["warnings"]))
else:
    s = budget["summary"]
    c = st.columns(3)
    c[0].metric("Expanded uncertainty", f"{s['expanded_uncertainty']:.4f} g/210L",
                help=f"k = {s['coverage_factor']:g}")
    c[0].caption(f"{s['relative_expanded_pct']:.2f} % of the expected value, k = {s['coverage_factor']:g}")
    c[1].metric("Mean bias", f"{s['bias_pct']:+.2f} %")
    c[2].metric("Checks in the budget", f"{int(s['n_checks']):,}")
    c[2].caption(f"baseline period {budget['baseline_period']}")
    frame.table(budget["components"])
    for w in budget["warnings"]:
        st.caption(f"Warning: {w}")

st.subheader("Instrument record")
# A period is chosen by name; date boxes appear only for chosen dates (two date pickers were a
# sixth of the browser's work on every unit opened).
first = pd.Timestamp(levels["first_check_at"].min()).date()
last = pd.Timestamp(levels["last_check_at"].max()).date()
period = st.radio("Period", [*RECORD_PERIODS, CHOSEN_DATES], horizontal=True, key="record_period")
if period == CHOSEN_DATES:
    start = st.date_input("From", value=first, key="record_start")
    end = st.date_input("To", value=last, key="record_end")
else:
    days = RECORD_PERIODS[period]
    start = first if days is None else max(first, last - dt.timedelta(days=days - 1))
    end = last
    st.caption(f"From {start:%Y-%m-%d} to {end:%Y-%m-%d}")
if st.button("Prepare the instrument record", key="record_button"):
    record = library.instrument_record(unit_id, start, end)
    if record is None:
        frame.not_computed("Instrument record", "The reports step has not been installed yet.")
    else:
        name, data, mime = record
        st.download_button("Download the instrument record", data, file_name=name, mime=mime, key="record_download")
