"""Cached loaders: every query the dashboard runs, read from the published snapshot.

Concurrency: the dashboard never opens the writers' database file while a snapshot exists.
It opens `<db>.snapshot` read-only through `pipeline.db.connect_reader`. Writers publish a
new snapshot by an atomic rename, so a reader either holds the old file (its inode stays
valid) or opens the new one; it never meets a lock or a half-written file. Every cache here
is keyed on the snapshot's path and modification time (`data_token`), so when a writer
publishes, the next rerun reopens the snapshot (see SnapshotReader) and every cached
query runs again; results of the old snapshot age out of the caches.

Queries are the files sql/queries/dashboard_*.sql. None scans the ten million rows of
check_results per page view: fleet-wide figures come from the summary_* tables the main job
writes (pipeline/dashboard_summary.py), unit pages filter on instrument_id first. Each names the tables it needs on a
`-- requires:` line; when one is missing (its feature has not run yet) the loader returns
None and the page says "not computed yet" instead of failing.
"""

from __future__ import annotations

import os
import re
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import duckdb
import pandas as pd
import streamlit as st

from pipeline import __version__
from pipeline.db import connect_reader, latest_schema_version, snapshot_path, sql_text
from pipeline.settings import Settings, load_settings

DB_ENV = "BREATHFLEET_DB"
SETTINGS_ENV = "BREATHFLEET_SETTINGS"
# Rows the service queue lists: the top of the ranking is what a coordinator acts on, and the
# whole list of a 5,000-unit fleet (about 2 MB with its reasons) took the browser longer to draw
# than the rest of the page. Filters narrow the list; the CSV download holds every row.
QUEUE_LISTED_ROWS = 500
QUEUE_PREFETCHED = 10  # the queue prefetches the unit pages of its first rows (those in view)
QUEUE_PREFETCH_DELAY_S = 1.0  # ... after this pause, once the browser has drawn the queue
# Units the lots page lists for one lot (most checks on the lot first): a widely used lot has
# thousands of users, and a list and a unit box of thousands are work for the browser.
LOT_UNITS_LISTED = 200
# Signals the unit page lists (the newest; all of them in a table opened on request): a unit high
# in the queue has a hundred or more in its time window, and each row is work for the browser.
UNIT_SIGNALS_LISTED = 20
MAX_POINTS = 3000  # the most rows any chart ships to the browser
# The funnel draws the units farthest from the fleet mean: Vega's work grows with the points
# (3,000 shaped points were about half a second of the page's first render), and the units
# inside the limits beyond these add no decision. The table lists the farthest outside units.
FUNNEL_POINTS = 1500
OUTSIDE_LISTED = 100
QUERY_TTL_S = 3600  # a cached query result is dropped after this many seconds
# Defaults of page controls, shared with dashboard.warm (which runs these views' queries at start).
FLEET_SIGNAL_DAYS = 7  # fleet overview: signals of the last days of data
# Signals the fleet overview lists (fleet-significant first, then the newest): a glance, not the
# whole list; a week of a 5,000-unit fleet holds thousands, and a 500-row grid was the heaviest
# part of the page for the browser. The service queue ranks every unit.
FLEET_SIGNALS_LISTED = 100
FUNNEL_DEFAULT_DAYS = 90  # comparison: the funnel's window
FUNNEL_DEFAULT_OVERDISPERSED = True  # comparison: limits allow for unit-to-unit spread
UNIT_WINDOWS = {"90 days": 90, "180 days": 180, "1 year": 365, "All": None}  # unit: "Time shown"
UNIT_DEFAULT_WINDOW = "90 days"
SOFTWARE_VERSION = __version__
_REQUIRES = re.compile(r"^--\s*requires:\s*(.+)$", re.MULTILINE)


@dataclass(frozen=True)
class DataToken:
    """Which file the dashboard reads and its modification time; the key of every cache."""

    path: str
    mtime_ns: int


def database_path() -> Path | None:
    """The database named by BREATHFLEET_DB (set by `breathfleet dashboard --db`)."""
    value = os.environ.get(DB_ENV)
    return Path(value) if value else None


def data_token(path: Path | None = None) -> DataToken | None:
    """The snapshot (or, before the first publish, the main file) and its mtime; None if absent."""
    path = path or database_path()
    if path is None:
        return None
    for candidate in (snapshot_path(path), path):
        try:
            return DataToken(str(path), candidate.stat().st_mtime_ns)
        except FileNotFoundError:
            continue
    return None


class SnapshotReader:
    """One read-only connection to the newest snapshot, shared by all sessions of the server.

    DuckDB keeps one database instance per file path in a process: connecting again to
    `<db>.snapshot` while a connection to the replaced file is still open returns the old
    instance, i.e. old data. So when a newer snapshot appears the reader waits for queries
    in flight on the old connection (each holds it for one query), closes it, then opens
    the new file. Queries never meet a lock, because writers never open the snapshot.
    """

    def __init__(self) -> None:
        self._cond = threading.Condition()
        self._con: duckdb.DuckDBPyConnection | None = None
        self._token: DataToken | None = None
        self._active = 0

    @contextmanager
    def cursor(self, token: DataToken) -> Iterator[duckdb.DuckDBPyConnection]:
        if not snapshot_path(token.path).exists():
            # Before the first publish we read the main file itself: hold it only for this
            # query, so that a writer starting meanwhile is not locked out by the dashboard.
            con = connect_reader(token.path)
            try:
                yield con
            finally:
                con.close()
            return
        with self._cond:
            newer = self._token is None or self._token.path != token.path or token.mtime_ns > self._token.mtime_ns
            if newer and self._con is not None and not self._cond.wait_for(lambda: self._active == 0, timeout=30):
                newer = False  # a long query (e.g. a digest) still reads the old file: switch next time
            if newer:
                if self._con is not None:
                    self._con.close()
                    self._con = None
                self._con = connect_reader(token.path)
                self._token = token
            self._active += 1
            con = self._con
        cur = con.cursor()  # one cursor per query: sessions run in threads
        try:
            yield cur
        finally:
            cur.close()
            with self._cond:
                self._active -= 1
                self._cond.notify_all()


@st.cache_resource(show_spinner=False)
def _reader() -> SnapshotReader:
    return SnapshotReader()


@st.cache_data(max_entries=4, show_spinner=False)
def _tables(token: DataToken) -> frozenset[str]:
    with _reader().cursor(token) as cur:
        rows = cur.execute("SELECT table_name FROM information_schema.tables").fetchall()
    return frozenset(r[0] for r in rows)


def required_tables(name: str) -> tuple[str, ...]:
    """Tables and views a named query needs, from its `-- requires:` header line."""
    match = _REQUIRES.search(sql_text(f"queries/{name}"))
    return tuple(t.strip() for t in match.group(1).split(",")) if match else ()


@st.cache_data(max_entries=512, show_spinner=False, ttl=QUERY_TTL_S)
def _query(token: DataToken, name: str, params: tuple[tuple[str, Any], ...]) -> pd.DataFrame | None:
    if not set(required_tables(name)) <= _tables(token):
        return None
    with _reader().cursor(token) as cur:
        return cur.execute(sql_text(f"queries/{name}"), dict(params) or None).df()


def load(name: str, **params: Any) -> pd.DataFrame | None:
    """Run sql/queries/<name>.sql on the current snapshot, cached until the next publish.

    Returns:
        The rows, or None when a table the query needs does not exist yet (or no database).
    """
    token = data_token()
    if token is None:
        return None
    return _query(token, name, tuple(sorted(params.items())))


def has_tables(*names: str) -> bool:
    """Whether every named table or view exists in the current snapshot."""
    token = data_token()
    return token is not None and set(names) <= _tables(token)


@contextmanager
def reader_connection() -> Iterator[duckdb.DuckDBPyConnection | None]:
    """A cursor on the current snapshot for a library call (budget, digest, record); None without a database."""
    token = data_token()
    if token is None:
        yield None
        return
    with _reader().cursor(token) as cur:
        yield cur


@st.cache_resource(show_spinner=False)
def _settings(path: str | None) -> Settings:
    return load_settings(path)


def settings() -> Settings:
    """Program settings from BREATHFLEET_SETTINGS, or the defaults."""
    return _settings(os.environ.get(SETTINGS_ENV))


def tolerance_pct() -> float:
    """The default rule's relative tolerance in percent (the band drawn on relative-error charts)."""
    rules = settings().standards.tolerance_rules
    default = next((r for r in rules if not r.check_type and not r.level), rules[-1])
    return default.relative * 100


def schema_behind() -> tuple[int, int] | None:
    """(the snapshot's schema version, this version's) when an older breathfleet published the
    snapshot: its tables may lack columns the queries read. None when current or unknown."""
    df = load("dashboard_schema_version")
    if df is None or df.empty or pd.isna(df.loc[0, "version"]):
        return None
    have, want = int(df.loc[0, "version"]), latest_schema_version()
    return (have, want) if have < want else None


def data_range() -> dict[str, Any] | None:
    """First and last check, counts of checks and units; None when no checks table or no rows.
    From the fleet summaries plus newer checks when the summaries exist and no check was removed
    since (dashboard_data_range_summary), else from every check (dashboard_data_range)."""
    df = load("dashboard_data_range_summary")
    if df is None or df.empty or not bool(df["summary_current"].fillna(False).iloc[0]):
        df = load("dashboard_data_range")
    if df is None or df.empty or pd.isna(df.loc[0, "first_check_at"]):
        return None
    return df.iloc[0].to_dict()


def unit_window_since(at_level: pd.Series, days: int | None):
    """Start of a unit page's time window at one level (a row of dashboard_unit_levels): the
    latest `days` days of its checks (all of them for None), as the datetime the queries take."""
    since = pd.Timestamp(at_level["first_check_at"])
    if days is not None:
        since = max(since, pd.Timestamp(at_level["last_check_at"]) - pd.Timedelta(days=days))
    return since.to_pydatetime()


UNIT_STATES = ("in control", "signal", "out of tolerance", "not charted")


def summary_state() -> dict[str, Any] | None:
    """What the fleet summaries were computed from (checks through, data range, when); None
    before the main job has written them (pipeline.dashboard_summary)."""
    df = load("dashboard_summary_state")
    return None if df is None or df.empty else df.iloc[0].to_dict()


def unit_states(signal_days: int = 7) -> pd.DataFrame | None:
    """One row per unit with its state: out of tolerance (latest check at a level failed),
    signal (a control-chart signal in the last `signal_days` days), in control, or not charted
    (no chart results yet). None before the main job has written the fleet summary."""
    if summary_state() is None:
        return None
    tol = load("dashboard_unit_tolerance")
    if tol is None:
        return None
    sig = load("dashboard_unit_signal_counts", days=signal_days)
    charted = sig is not None
    sig = sig if charted else pd.DataFrame(columns=["instrument_id", "recent_signals", "last_signal_at"])
    out = tol.merge(sig, on="instrument_id", how="left")
    out["recent_signals"] = out["recent_signals"].fillna(0).astype(int)
    out["state"] = "in control" if charted else "not charted"
    out.loc[out["recent_signals"] > 0, "state"] = "signal"
    out.loc[out["out_of_tolerance"].fillna(False).astype(bool), "state"] = "out of tolerance"
    return out


def state_counts(states: pd.DataFrame, by: list[str]) -> pd.DataFrame:
    """Counts of units per state, grouped by `by` (e.g. region, or region and site)."""
    counts = states.groupby(by + ["state"], dropna=False).size().rename("units").reset_index()
    return counts
