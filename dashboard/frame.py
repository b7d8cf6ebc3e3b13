"""What every page shows: title, data range, software version and the cautions line."""

from __future__ import annotations

import pandas as pd
import streamlit as st

from dashboard import loaders
from pipeline.errors import DatabaseLockedError, InputError

CAUTIONS = ("Cautions: these results inform maintenance and oversight. They do not certify or "
            "decertify an instrument or invalidate a test; decisions rest with the program's "
            "approved procedures, local regulations and licensed practice.")


def header(title: str, question: str) -> dict | None:
    """Title, the question the page answers, data range, version and cautions.

    Returns the data range (None when no checks are stored yet). Stops the page with a plain
    message when no database is configured or a writer holds it before its first snapshot.
    """
    st.title(title)
    st.caption(question)
    if loaders.database_path() is None:
        st.info("No database is configured. Start the dashboard with `breathfleet dashboard --db FILE`.")
        footer(None)
        st.stop()
    if loaders.data_token() is None:
        st.info(f"The database file {loaders.database_path()} does not exist yet. Ingest data into it first.")
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
    becomes its description, which Vega gives the canvas as its accessible name (aria-label)."""
    title = getattr(ch, "title", None)
    extra = {"description": title} if isinstance(title, str) else {}
    st.altair_chart(ch.properties(usermeta=CANVAS, **extra), width="stretch", key=key)


def table_alternative(df: pd.DataFrame, label: str = "Same data as a table") -> None:
    """A text alternative to a chart: its data as a table in an expander."""
    with st.expander(label):
        st.dataframe(df, hide_index=True, width="stretch")
