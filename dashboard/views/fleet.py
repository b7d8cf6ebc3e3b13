"""Fleet overview: how many units are in and out of control, this week's signals, the state of
every unit by region and site, and the trend of the fleet-wide relative error."""

import streamlit as st

from dashboard import figures, frame, loaders

rng = frame.header("Fleet overview", "What needs attention this week, and where?")
frame.summary_note(rng)
DAYS = loaders.FLEET_SIGNAL_DAYS
states = loaders.unit_states(signal_days=DAYS)
if frame.missing(states):
    frame.not_computed("Unit states", "Ingest instruments and checks (`breathfleet ingest`), then analyse them "
                       "(`breathfleet run`), which writes the fleet summary.")
    st.stop()

counts = states["state"].value_counts()
cols = st.columns(4)
cols[0].metric("Units", f"{len(states):,}")
cols[1].metric("In control", f"{int(counts.get('in control', 0)):,}")
cols[2].metric(f"Signal in the last {DAYS} days", f"{int(counts.get('signal', 0)):,}")
cols[3].metric("Out of tolerance (latest check)", f"{int(counts.get('out of tolerance', 0)):,}")
if counts.get("not charted", 0):
    st.caption(f"{int(counts['not charted']):,} units are not charted yet: control charts have not been computed.")

regions = sorted(states["region"].dropna().unique())
region = st.selectbox("Region", ["All regions", *regions], key="fleet_region")
shown = states if region == "All regions" else states[states["region"] == region]

by_region = loaders.state_counts(shown, ["region"])
frame.chart(figures.state_by_region(by_region), key="state_by_region")
if region != "All regions" and len(shown) <= loaders.MAX_POINTS:
    frame.chart(figures.unit_tiles(shown[["instrument_id", "site_id", "state", "recent_signals",
                                          "last_check_at"]]), key="unit_tiles")
else:
    st.caption("Choose a region to see every unit by site.")
# The table says what the charts above show: states by region for the whole fleet, by site once
# a region is chosen (a fleet of thousands of units has about two thousand sites).
by = ["region"] if region == "All regions" else ["region", "site_id"]
counts = loaders.state_counts(shown, by).pivot_table(index=by, columns="state", values="units",
                                                     fill_value=0).reset_index()
frame.table_alternative(counts, f"Units by {'region' if len(by) == 1 else 'site'} and state (table)")

st.subheader(f"Signals in the last {DAYS} days of data")
one_region = None if region == "All regions" else region
where = "" if one_region is None else f" in {one_region}"
signals = loaders.load("dashboard_signals_recent", days=DAYS, listed=loaders.FLEET_SIGNALS_LISTED, region=one_region)
if signals is None:
    frame.not_computed("Control-chart signals", "Run the chart analysis (`breathfleet analyse`).")
elif signals.empty:
    st.write(f"No control-chart signals{where} in the last {DAYS} days of data.")
else:
    total = int(signals["n_in_window"].iloc[0])
    if total > len(signals):
        st.caption(f"{total:,} signals{where} in the last {DAYS} days; the {len(signals):,} most pressing are listed "
                   "(fleet-significant first, then the newest). The service queue ranks every unit.")
    frame.table(signals.drop(columns="n_in_window"))

st.subheader("Fleet-wide relative error")
trend = loaders.load("dashboard_fleet_trend")
if frame.missing(trend):
    frame.not_computed("Fleet trend", "No checks with an expected value yet.")
else:
    frame.chart(figures.fleet_trend(trend, loaders.tolerance_pct()), key="fleet_trend")
    frame.table_alternative(trend, "Fleet relative error by week (table)")
