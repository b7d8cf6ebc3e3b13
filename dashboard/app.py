"""The dashboard frame: one navigation over thin pages in dashboard/views/.

Run with `breathfleet dashboard --db FILE` (which sets BREATHFLEET_DB and starts Streamlit).
"""

from __future__ import annotations

import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:  # `streamlit run dashboard/app.py` puts only dashboard/ on the path
    sys.path.insert(0, str(ROOT))

import streamlit as st  # noqa: E402

st.set_page_config(page_title="breathfleet", layout="wide")

PAGES = [
    st.Page("views/fleet.py", title="Fleet overview", url_path="fleet", default=True),
    st.Page("views/queue.py", title="Service queue", url_path="queue"),
    st.Page("views/unit.py", title="Unit", url_path="unit"),
    st.Page("views/comparison.py", title="Comparison", url_path="comparison"),
    st.Page("views/lots.py", title="Lots", url_path="lots"),
    st.Page("views/data_quality.py", title="Data quality", url_path="data_quality"),
    st.Page("views/digest.py", title="Digest", url_path="digest"),
]

st.navigation(PAGES).run()
