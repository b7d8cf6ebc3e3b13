"""Digest: a preview of this week's digest as it would be mailed."""

import datetime as dt

import pandas as pd
import streamlit as st

from dashboard import frame, library

rng = frame.header("Digest", "What will this week's digest tell administrators and coordinators?")
end = pd.Timestamp(rng["last_check_at"]).date() if rng else dt.date.today()
week_of = st.date_input("Week containing", value=end, key="digest_week")
iso = week_of.isocalendar()
week = f"{iso.year}-W{iso.week:02d}"
st.caption(f"ISO week {week}")
try:
    files = library.digest_preview(week)
except Exception as exc:  # noqa: BLE001 - show the reason, never a traceback
    st.warning(f"The digest could not be written for {week}: {exc}")
    st.stop()
if not files:
    frame.not_computed("Digest", "The digest step has not been installed or wrote nothing.")
    st.stop()
for name, content in files:
    if isinstance(content, bytes):
        st.download_button(f"Download {name}", content, file_name=name, key=f"digest_{name}")
    elif name.endswith((".html", ".htm")):
        with st.expander(f"{name} (HTML)", expanded=True):
            st.html(content)
    elif name.endswith(".md"):
        with st.expander(name, expanded=True):
            st.markdown(content)
    else:
        with st.expander(name, expanded=len(files) == 1):
            st.code(content, language=None)
