"""Data quality: can the data be trusted? The ingest ledger, quarantine reasons with a sample
of rows, silent units, and checks where the unit's own verdict disagrees with ours."""

import streamlit as st

from dashboard import figures, frame, loaders

rng = frame.header("Data quality", "Can the data itself be trusted?")

st.subheader("Ingest ledger")
ledger = loaders.load("dashboard_ingest_ledger")
if frame.missing(ledger):
    frame.not_computed("Ingest ledger", "No file has been ingested yet.")
else:
    c = st.columns(4)
    c[0].metric("Files", f"{len(ledger):,}")
    c[1].metric("Rows read", f"{int(ledger['rows_read'].sum()):,}")
    c[2].metric("Duplicates", f"{int(ledger['rows_duplicate'].sum()):,}")
    c[3].metric("Quarantined", f"{int(ledger['rows_quarantined'].sum()):,}")
    unbalanced = int((~ledger["balanced"]).sum())
    if unbalanced:
        st.warning(f"{unbalanced} files do not balance (read ≠ stored + duplicate + quarantined).")
    frame.table(ledger)

st.subheader("Quarantine")
reasons = loaders.load("dashboard_quarantine_reasons")
if reasons is None:
    frame.not_computed("Quarantine", "No file has been ingested yet.")
elif reasons.empty:
    st.write("No row has been quarantined.")
else:
    frame.chart(figures.quarantine_chart(reasons), key="quarantine_reasons")
    frame.table_alternative(reasons, "Quarantined rows by reason (table)")
    reason = st.selectbox("Sample rows for reason", reasons["reason"].tolist(), key="dq_reason")
    frame.table(loaders.load("dashboard_quarantine_sample", reason=reason))

st.subheader("Silent units")
days = loaders.settings().queue.silence_days
silent = loaders.load("dashboard_silent_units", days=days)
if silent is None:
    frame.not_computed("Silent units", "Ingest instruments and checks first.")
elif silent.empty:
    st.write(f"Every unit has a check in the last {days} days of data.")
else:
    st.caption(f"{len(silent):,} units without a check in the last {days} days of data.")
    frame.table(silent)

st.subheader("Verdict disagreements")
frame.summary_note(rng)
disagree = loaders.load("dashboard_verdict_disagreements")
if disagree is None:
    frame.not_computed("Verdict disagreements", "Ingest checks first.")
elif disagree.empty:
    st.write("The units' own pass/fail agrees with breathfleet's verdict on every check.")
else:
    st.caption("Checks where the unit's own pass/fail differs from breathfleet's tolerance verdict, by unit.")
    frame.table(disagree)
