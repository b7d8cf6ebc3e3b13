"""Comparison: a funnel plot of units' mean relative error against their number of checks, so a
unit with few checks is judged against the wider limits it deserves.

Source: Spiegelhalter DJ (2005), Funnel plots for comparing institutional performance,
Statistics in Medicine 24(8):1185-1202.
"""

import streamlit as st

from dashboard import figures, frame, loaders
from pipeline.dashboard_summary import FUNNEL_WINDOW_DAYS

rng = frame.header("Comparison", "Which units differ from the fleet by more than their number of checks explains?")
frame.summary_note(rng)
levels = loaders.load("dashboard_levels")
if frame.missing(levels):
    frame.not_computed("Funnel plot", "Ingest checks and analyse them (`breathfleet run`) first.")
    st.stop()

c1, c2, c3 = st.columns([2, 2, 1])
level = c1.selectbox("Level (g/210L)", levels["level"].tolist(), format_func=lambda v: f"{v:.3f}", key="cmp_level")
days = c2.select_slider("Window (days of data)", list(FUNNEL_WINDOW_DAYS), value=loaders.FUNNEL_DEFAULT_DAYS, key="cmp_days")
overdispersed = c3.toggle("Allow for unit-to-unit spread", value=loaders.FUNNEL_DEFAULT_OVERDISPERSED, key="cmp_overdispersed",
                          help="Adds the between-unit variance beyond chance (tau²) to the limits, "
                               "as Spiegelhalter (2005) section 6.2 advises when most units fall outside.")
units = loaders.load("dashboard_funnel_units", level=level, days=days, max_points=loaders.FUNNEL_POINTS,
                     overdispersed=overdispersed)
limits = loaders.load("dashboard_funnel_limits", level=level, days=days, overdispersed=overdispersed)
if frame.missing(units) or frame.missing(limits):
    frame.not_computed("Funnel plot for this level and window", "Too few checks with an expected value.")
    st.stop()

n_units = int(limits["n_units"].iloc[0])
frame.chart(figures.funnel_chart(units, limits), key="funnel")
tau = float(limits["tau_pct"].iloc[0])
note = (f"{n_units:,} units; limits are the fleet mean ± 1.96 and ± 3.09 standard errors "
        "(pooled within-unit standard deviation / √n"
        + (f", plus a unit-to-unit spread τ = {tau:.2f} %" if overdispersed else "") + "), after Spiegelhalter (2005).")
if n_units > len(units):
    note += f" The {len(units):,} most extreme units are drawn; the others lie closer to the mean."
st.caption(note)
outside = units[units["z"].abs() > 1.959964]  # units come most extreme first
at_least = "at least " if n_units > len(units) and len(outside) == len(units) else ""
st.subheader(f"Units outside the 95 % limits ({at_least}{len(outside):,})")
if len(outside) > loaders.OUTSIDE_LISTED:
    st.caption(f"The {loaders.OUTSIDE_LISTED:,} farthest from the fleet mean are listed; the CSV holds all {len(outside):,}.")
    st.download_button("Download the units outside the limits as CSV", outside.to_csv(index=False).encode("utf-8"),
                       file_name=f"outside-limits-{level:.3f}-{days}d.csv", mime="text/csv", key="cmp_outside_csv")
frame.table(outside.head(loaders.OUTSIDE_LISTED))
