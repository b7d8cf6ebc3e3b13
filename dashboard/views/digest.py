"""Digest: a preview of a week's digest as it would be mailed (pipeline.digest.write_digest)."""

import datetime as dt

import pandas as pd
import streamlit as st

from dashboard import frame, library

rng = frame.header("Digest", "What will this week's digest tell administrators and coordinators?")
if rng is None:
    frame.not_computed("Digest", "No checks are stored yet, so there is no week to report.")
    st.stop()
end = pd.Timestamp(rng["last_check_at"]).date()
week_of = st.date_input("Week containing", value=end, key="digest_week")
iso = (week_of or dt.date.today()).isocalendar()
week = f"{iso.year}-W{iso.week:02d}"
st.caption(f"ISO week {week} (Monday to Sunday, UTC)")
requested = st.session_state.setdefault("digest_requested", set())
if week not in requested:
    st.write("Writing the digest reads the whole week's results; on a large fleet it takes a while.")
    if not st.button("Prepare the preview", key="digest_build"):
        st.stop()
    requested.add(week)
try:
    with st.spinner(f"Writing the digest for {week}..."):
        files = library.digest_preview(week)
except Exception as exc:  # noqa: BLE001 - show the reason, never a traceback
    st.warning(f"The digest could not be written for {week}: {exc}")
    st.stop()
if not files:
    frame.not_computed("Digest", "The digest step has not been installed or wrote nothing.")
    st.stop()
cols = st.columns(len(files))
for col, (name, content) in zip(cols, files):
    col.download_button(f"Download {name}", content, file_name=name, key=f"digest_{name}")
html = next((c for n, c in files if n.endswith((".html", ".htm")) and isinstance(c, str)), None)
text = next((c for n, c in files if n.endswith(".md") and isinstance(c, str)), None)
with st.container(border=True):
    if html is not None:
        st.html(html)
    elif text is not None:
        st.markdown(text)
    else:
        st.code(files[0][1] if isinstance(files[0][1], str) else "(binary)", language=None)
