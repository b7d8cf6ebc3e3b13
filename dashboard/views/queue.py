"""Service queue: the ranked units due for service, why, and a way into each one."""

import json

import pandas as pd
import streamlit as st

from dashboard import frame, loaders, warm


def _reasons(value) -> str:
    try:
        items = json.loads(value) if isinstance(value, str) else list(value)
    except (TypeError, ValueError):
        return str(value)
    return " ".join(str(x) for x in items)


FILTERS = {"region": "Region", "technology": "Technology", "site_id": "Site"}


def _chosen() -> dict[str, list[str]]:
    """The filters in force. The site box lists the sites of the chosen regions (a fleet of
    thousands of units has about two thousand sites, too many for one list, and each option is
    work for the browser), so a site choice counts only while a region is chosen."""
    chosen = {name: list(st.session_state.get(f"queue_{name}") or []) for name in FILTERS}
    if not chosen["region"]:
        chosen["site_id"] = []
    return chosen


def _filtered(queue: pd.DataFrame, chosen: dict[str, list[str]]) -> pd.DataFrame:
    for name, values in chosen.items():
        if values:
            queue = queue[queue[name].astype(str).isin(values)]
    return queue


def _options(queue: pd.DataFrame, name: str) -> list[str]:
    return sorted(queue[name].dropna().astype(str).unique())


# A click that opens a unit (the button, or a row of the table) is handled first, before the
# page draws anything: the rerun it causes then switches page at once, instead of first
# parsing the reasons and sending the 5,000-row queue to the browser again.
if st.session_state.get("queue_open_button") and st.session_state.get("queue_open_unit") is not None:
    st.switch_page("views/unit.py", query_params={"unit": str(st.session_state["queue_open_unit"])})
try:
    picked = list(st.session_state["queue_table"]["selection"]["rows"])
except (KeyError, TypeError):
    picked = []
if picked:
    queue = loaders.load("dashboard_queue")
    if queue is not None:
        rows = _filtered(queue, _chosen())
        if picked[0] < min(len(rows), loaders.QUEUE_LISTED_ROWS):
            st.switch_page("views/unit.py", query_params={"unit": str(rows.iloc[picked[0]]["instrument_id"])})

frame.header("Service queue", "Which units to visit first, and why?")
queue = loaders.load("dashboard_queue")
if frame.missing(queue):
    frame.not_computed("Service queue", "Build it with the queue step (`breathfleet queue`).")
    st.stop()

queue = queue.assign(reasons=queue["reasons"].map(_reasons))
cols = st.columns(3)
regions = cols[0].multiselect(FILTERS["region"], _options(queue, "region"), key="queue_region")
cols[1].multiselect(FILTERS["technology"], _options(queue, "technology"), key="queue_technology")
in_regions = _filtered(queue, {"region": regions})
cols[2].multiselect(FILTERS["site_id"], _options(in_regions, "site_id") if regions else [], key="queue_site_id",
                    disabled=not regions, placeholder=None if regions else "Choose a region first")
shown = _filtered(queue, _chosen())

table = shown[["rank", "instrument_id", "region", "site_id", "technology", "p_breach", "rank_low",
               "rank_high", "reasons"]].head(loaders.QUEUE_LISTED_ROWS)

computed = pd.Timestamp(queue["computed_at"].max())
listed = (f"{len(shown):,} of {len(queue):,} units match the filters" if len(shown) > len(table)
          else f"{len(shown):,} of {len(queue):,} units shown")
if len(shown) > len(table):
    listed += f"; the first {len(table):,} in rank order are listed (filter to narrow, or download the CSV for all)"
st.caption(f"Queue computed at {computed:%Y-%m-%d %H:%M} UTC · {listed}. Select a row to open the unit.")
event = st.dataframe(
    table, hide_index=True, width="stretch", on_select="rerun", selection_mode="single-row",
    key="queue_table",
    column_config={
        "p_breach": st.column_config.ProgressColumn("P(breach)", format="%.2f", min_value=0.0, max_value=1.0),
        "rank_low": st.column_config.NumberColumn("rank from"),
        "rank_high": st.column_config.NumberColumn("rank to"),
        "reasons": st.column_config.TextColumn("reasons", width="large"),
    })
rows = event.selection.rows if event is not None else []
if rows:
    st.switch_page("views/unit.py", query_params={"unit": str(table.iloc[rows[0]]["instrument_id"])})

left, right = st.columns([3, 1])
if not shown.empty:
    chosen = left.selectbox("Open a unit (of those listed)", table["instrument_id"].tolist(), key="queue_open_unit")
    # Their pages' queries run in the background while the queue is read: the chosen unit, and
    # the top of the table (the rows in view, the units a coordinator opens first) once the
    # browser has had time to draw the queue (it may share the server's cores).
    warm.prefetch_units([chosen])
    warm.prefetch_units(table["instrument_id"].head(loaders.QUEUE_PREFETCHED).tolist(),
                        delay_s=loaders.QUEUE_PREFETCH_DELAY_S)
    if right.button("Open unit page", key="queue_open_button"):
        st.switch_page("views/unit.py", query_params={"unit": str(chosen)})
st.download_button("Download the queue as CSV", shown.to_csv(index=False).encode("utf-8"),
                   file_name=f"service-queue-{computed:%Y%m%d}.csv", mime="text/csv", key="queue_csv")
