"""Lots: each reference lot's estimated effect with its interval and verdict, its usage and its
acceptance state; a lot leads to the units that used it."""

import streamlit as st

from dashboard import figures, frame, loaders

rng = frame.header("Lots", "Is a reference-standard lot to blame rather than the units?")
frame.summary_note(rng)
usage = loaders.load("dashboard_lot_usage")
if frame.missing(usage):
    frame.not_computed("Lots", "Ingest the lots reference file first.")
    st.stop()

effects = loaders.load("dashboard_lot_effects")
if frame.missing(effects):
    frame.not_computed("Lot effects", "Fit the fleet model (`breathfleet model`).")
    table = usage
else:
    kinds = sorted(effects["standard_kind"].dropna().unique())
    kind = st.radio("Standard", ["all", *kinds], horizontal=True, key="lots_kind")
    shown = effects if kind == "all" else effects[effects["standard_kind"] == kind]
    frame.chart(figures.lot_effects_chart(shown), key="lot_effects")
    st.caption(f"Latest fleet model fitted {shown['fitted_at'].max():%Y-%m-%d %H:%M} UTC.")
    table = usage.merge(effects.drop(columns=["standard_kind", "n_checks", "n_units", "fitted_at"]),
                        on="lot_id", how="left")
acceptance = loaders.load("dashboard_lot_acceptance")
if acceptance is None:
    st.caption("New-lot acceptance has not been computed yet.")
else:
    table = table.merge(acceptance, on="lot_id", how="left")
frame.table(table)

variance = loaders.load("dashboard_variance_components")
if not frame.missing(variance):
    frame.table_alternative(variance, "Variance components of the fleet model")
diagnostics = loaders.load("dashboard_model_diagnostics")
if not frame.missing(diagnostics):
    frame.table_alternative(diagnostics, "Model diagnostics")

st.subheader("Units that used a lot")
lot_id = st.selectbox("Lot", usage["lot_id"].tolist(), key="lots_pick")
users = loaders.load("dashboard_lot_units", lot_id=lot_id, listed=loaders.LOT_UNITS_LISTED)
if frame.missing(users):
    st.write("No stored check used this lot.")
else:
    n_users = int(users["n_users"].iloc[0])
    users = users.drop(columns="n_users")
    listed = "" if n_users == len(users) else f"; the {len(users):,} with the most checks on it are listed"
    st.caption(f"{n_users:,} units used lot {lot_id}{listed}. Open one:")
    left, right = st.columns([3, 1])
    chosen = left.selectbox("Unit", users["instrument_id"].tolist(), key="lots_unit")
    if right.button("Open unit page", key="lots_open_unit"):
        st.switch_page("views/unit.py", query_params={"unit": str(chosen)})
    frame.table(users)
