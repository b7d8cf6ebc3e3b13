"""What every page shows: title, data range, software version and the cautions line."""

from __future__ import annotations

import pandas as pd
import streamlit as st

from dashboard import figures, loaders
from pipeline.errors import DatabaseLockedError, InputError

CAUTIONS = ("Cautions: these results inform maintenance and oversight. They do not certify or "
            "decertify an instrument or invalidate a test; decisions rest with the program's "
            "approved procedures, local regulations and licensed practice.")


def header(title: str, question: str) -> dict | None:
    """Title, the question the page answers, data range, version and cautions.

    Returns the data range (None when no checks are stored yet). Stops the page with a plain
    message when no database is configured, a writer holds it before its first snapshot, or an
    older breathfleet published the snapshot.
    """
    st.title(title)
    st.caption(question)
    st.html(TABLE_STYLE)  # once per page: a <style> in each table cost the browser a restyle per table
    if loaders.database_path() is None:
        st.info("No database is configured. Start the dashboard with `breathfleet dashboard --db FILE`.")
        footer(None)
        st.stop()
    if loaders.data_token() is None:
        st.info(f"The database file {loaders.database_path()} does not exist yet. Ingest data into it first.")
        footer(None)
        st.stop()
    behind = loaders.schema_behind()
    if behind is not None:
        st.warning(f"The published data was written by an older breathfleet (database schema {behind[0]}; "
                   f"this version reads schema {behind[1]}). Run `breathfleet run --db {loaders.database_path()}` "
                   "once: it brings the database up to date and publishes it again.")
        footer(None)
        st.stop()
    try:
        rng = loaders.data_range()
    except DatabaseLockedError:
        st.info("A writer is working on the database and has not published a snapshot yet. "
                "This page shows data as soon as it does; reload in a moment.")
        footer(None)
        st.stop()
    except InputError as exc:
        st.error(f"The database cannot be read: {exc}")
        footer(None)
        st.stop()
    footer(rng)
    return rng


def footer(rng: dict | None) -> None:
    if rng is None:
        span = "Data range: no checks stored yet"
    else:
        span = (f"Data range: {pd.Timestamp(rng['first_check_at']):%Y-%m-%d} to "
                f"{pd.Timestamp(rng['last_check_at']):%Y-%m-%d %H:%M} UTC, "
                f"{int(rng['n_checks']):,} checks from {int(rng['n_units']):,} units")
    st.caption(f"{span} · breathfleet {loaders.SOFTWARE_VERSION}")
    st.caption(CAUTIONS)


def summary_note(rng: dict | None) -> dict | None:
    """Say when the fleet summaries (written by the main job) lag the stored checks; returns their state."""
    state = loaders.summary_state()
    if state is not None and rng is not None and int(state["n_checks"]) != int(rng["n_checks"]):
        st.caption(f"Fleet summaries on this page are as of the last analysis (data up to "
                   f"{pd.Timestamp(state['last_check_at']):%Y-%m-%d %H:%M} UTC, {int(state['n_checks']):,} checks); "
                   "checks stored since then enter at the next `breathfleet run`.")
    return state


def not_computed(what: str, how: str) -> None:
    """The message shown where a table has not been computed yet (or holds no rows)."""
    st.info(f"{what}: not computed yet. {how}")


def missing(df: pd.DataFrame | None) -> bool:
    """True when a loader returned no table or no rows."""
    return df is None or df.empty


CANVAS = {"embedOptions": {"renderer": "canvas"}}  # read by vega-embed from the spec's usermeta


def chart(ch, key: str | None = None) -> None:
    """Render an Altair chart at container width, drawn on a canvas: with thousands of marks an
    SVG (vega-embed's default here) costs the browser one DOM node per mark. The chart's title
    becomes its description, which Vega gives the canvas as its accessible name (aria-label).
    The spec is converted without schema validation (figures.vega_lite_spec)."""
    spec = figures.vega_lite_spec(ch)
    spec["usermeta"] = CANVAS
    # No ARIA descriptions per mark: Vega-Lite would otherwise compute a description string for
    # every point (all its fields, formatted), which a canvas never shows; the chart keeps its
    # accessible name (the description below) and its data tables.
    spec["config"] = {**spec.get("config", {}), "aria": False}
    if isinstance(spec.get("title"), str):
        spec["description"] = spec["title"]
    st.vega_lite_chart(spec, width="stretch", key=key)


STATIC_TABLE_ROWS = 200  # up to this many rows a table is static HTML rather than an interactive grid
TABLE_STYLE = ("<style>.bf-table{border-collapse:collapse;font-size:0.85rem;margin-bottom:0.5rem}"
               ".bf-table th,.bf-table td{padding:0.15rem 0.6rem;border-bottom:1px solid rgba(128,128,128,0.25);"
               "text-align:right;white-space:nowrap}.bf-table th{font-weight:600;position:sticky;top:0;"
               "background:var(--background-color,#fff)}.bf-scroll{max-height:26rem;overflow:auto}</style>")


def table(df: pd.DataFrame, static_rows: int = STATIC_TABLE_ROWS) -> None:
    """A table: static HTML when it has at most `static_rows` rows, else the interactive grid.

    Each st.dataframe grid costs the browser a lazily loaded component, a canvas, column
    measuring and scroll handling (about 0.1 s apiece on the unit page, which shows several);
    a static table of a few dozen rows costs a fraction of that, and a screen reader reads it
    as a table. Cell text is escaped by pandas and sanitised again by st.html. The tables' style
    (TABLE_STYLE) is written once per page, by header().
    """
    if len(df) <= static_rows:
        html = df.astype(object).where(df.notna(), "").to_html(index=False, border=0, classes="bf-table")
        # a long or wide table scrolls in its own box, as the grid would, instead of stretching the page
        st.html(f'<div class="bf-scroll">{html}</div>')
    else:
        st.dataframe(df, hide_index=True, width="stretch")


def table_alternative(df: pd.DataFrame, label: str) -> None:
    """A text alternative to a chart: its data as a table in an expander, drawn when opened.

    The expander keeps its state (keyed on its label, which is unique across pages) and reruns
    the page when opened or closed, so a closed one sends no table: the unit page's three cost
    the browser about a quarter of a second on every unit opened, closed. Static up to 500 rows.
    """
    box = st.expander(label, key=f"table_alternative:{label}", on_change="rerun")
    if box.open:
        with box:
            table(df, static_rows=500)
