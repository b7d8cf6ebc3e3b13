"""Warm the dashboard's caches at server start and again after each publish.

`breathfleet dashboard` (dashboard.serve) calls `warm_caches()` before the server listens, so the
first visitor of each page does not pay for opening the snapshot or for the page's fleet-wide
queries; a thread (`keep_warm`) runs it again when a writer publishes a new snapshot (every
cache is keyed on the snapshot, so the old entries are no longer read) and before the query
cache's time to live runs out. What is warmed is
what every visitor's first view of a page reads with the page's default controls: the header's
snapshot schema version and data range, the fleet summaries, the signals of the last 7 days, the fleet trend, the service
queue, the unit list and the first unit's view (the unit page opened without a unit shows the
first of the list), the funnel at the first level and default window, the lots page (its first
lot's units), the data-quality page (its first quarantine reason's sample). Other units'
queries are not warmed at start: they run when a unit is opened, or earlier when the service
queue prefetches the unit its "Open a unit" box holds and the units at the top of its table
(`prefetch_units`). One Altair spec of
each fleet chart is built too (the first spec a process builds pays for Altair's lazy set-up).

Nothing here is needed for correctness: a step that fails is skipped (the page then runs the
query itself and shows the problem as it would without warming).
"""

from __future__ import annotations

import logging
import sys
import threading
import time
from collections.abc import Callable

import pandas as pd

from dashboard import figures, library, loaders

_LOG = logging.getLogger("breathfleet.dashboard")
THREAD_PREFIX = "dashboard-"


class _BackgroundThreads(logging.Filter):
    """Drop Streamlit's "missing ScriptRunContext" warning for this module's threads: they call
    the cached loaders outside any session on purpose (the caches are global)."""

    def filter(self, record: logging.LogRecord) -> bool:
        return not threading.current_thread().name.startswith(THREAD_PREFIX)


logging.getLogger("streamlit.runtime.scriptrunner_utils.script_run_context").addFilter(_BackgroundThreads())


def _steps() -> list[tuple[str, Callable[[], object]]]:
    def fleet():
        states = loaders.unit_states(signal_days=loaders.FLEET_SIGNAL_DAYS)
        loaders.load("dashboard_signals_recent", days=loaders.FLEET_SIGNAL_DAYS, listed=loaders.FLEET_SIGNALS_LISTED,
                     region=None)
        trend = loaders.load("dashboard_fleet_trend")
        if states is not None and not states.empty:
            figures.vega_lite_spec(figures.state_by_region(loaders.state_counts(states, ["region"])))
        if trend is not None and not trend.empty:
            figures.vega_lite_spec(figures.fleet_trend(trend, loaders.tolerance_pct()))

    def unit():  # the unit page opened without a unit shows the first of the list
        units = loaders.load("dashboard_unit_list")
        if units is not None and not units.empty:
            unit_default_view(units["instrument_id"].tolist()[0])

    def comparison():
        levels = loaders.load("dashboard_levels")
        if levels is None or levels.empty:
            return
        level = levels["level"].tolist()[0]  # a Python float, as the selectbox returns (the cache key)
        args = {"level": level, "days": loaders.FUNNEL_DEFAULT_DAYS, "overdispersed": loaders.FUNNEL_DEFAULT_OVERDISPERSED}
        units = loaders.load("dashboard_funnel_units", max_points=loaders.FUNNEL_POINTS, **args)
        limits = loaders.load("dashboard_funnel_limits", **args)
        if units is not None and limits is not None and not units.empty and not limits.empty:
            figures.vega_lite_spec(figures.funnel_chart(units, limits))

    def lots():
        usage = loaders.load("dashboard_lot_usage")
        effects = loaders.load("dashboard_lot_effects")
        for name in ("dashboard_lot_acceptance", "dashboard_variance_components", "dashboard_model_diagnostics"):
            loaders.load(name)
        if effects is not None and not effects.empty:
            figures.vega_lite_spec(figures.lot_effects_chart(effects))
        if usage is not None and not usage.empty:
            loaders.load("dashboard_lot_units", lot_id=usage["lot_id"].tolist()[0], listed=loaders.LOT_UNITS_LISTED)

    def data_quality():
        loaders.load("dashboard_ingest_ledger")
        reasons = loaders.load("dashboard_quarantine_reasons")
        if reasons is not None and not reasons.empty:
            loaders.load("dashboard_quarantine_sample", reason=reasons["reason"].tolist()[0])
            figures.vega_lite_spec(figures.quarantine_chart(reasons))
        loaders.load("dashboard_silent_units", days=loaders.settings().queue.silence_days)
        loaders.load("dashboard_verdict_disagreements")

    def header():
        loaders.schema_behind()
        return loaders.data_range()

    return [("header", header), ("summary", loaders.summary_state), ("fleet", fleet),
            ("queue", lambda: loaders.load("dashboard_queue")), ("unit", unit),
            ("comparison", comparison), ("lots", lots), ("data quality", data_quality)]


def warm_caches() -> dict[str, float]:
    """Run every page's fleet-wide queries once on the current snapshot; seconds per step.
    Does nothing without a database (BREATHFLEET_DB unset or no file yet)."""
    timings: dict[str, float] = {}
    if loaders.data_token() is None:
        return timings
    for name, step in _steps():
        t = time.perf_counter()
        try:
            step()
        except Exception as exc:  # noqa: BLE001 - warming is optional; the page reports the problem itself
            _LOG.info("dashboard warm-up step %s skipped: %s", name, exc)
        timings[name] = time.perf_counter() - t
    return timings


def unit_default_view(unit_id: str) -> None:
    """Run the queries of the unit page's first view of `unit_id` (first level, default time
    window, individuals / moving range) and its uncertainty budget, with the page's parameters."""
    levels = loaders.load("dashboard_unit_levels", instrument_id=unit_id)
    if levels is None or levels.empty:
        return
    level = levels["level"].tolist()[0]  # the level box's first option, a Python float
    since = loaders.unit_window_since(levels.iloc[0], loaders.UNIT_WINDOWS[loaders.UNIT_DEFAULT_WINDOW])
    loaders.load("dashboard_unit_events", instrument_id=unit_id)
    loaders.load("dashboard_unit_signals", instrument_id=unit_id, since=since)
    loaders.load("dashboard_unit_points", instrument_id=unit_id, level=level, since=since, max_points=loaders.MAX_POINTS)
    loaders.load("dashboard_unit_baselines", instrument_id=unit_id)
    estimates = loaders.load("dashboard_unit_estimates", instrument_id=unit_id)
    if estimates is not None and not estimates.empty:
        loaders.load("dashboard_unit_forecast", instrument_id=unit_id,
                     horizon_days=loaders.settings().queue.calibration_interval_days)
    library.uncertainty_budget(unit_id, level, pd.Timestamp(levels["last_check_at"].max()))


_prefetched: dict[str, loaders.DataToken] = {}
_prefetch_lock = threading.Lock()


def prefetch_units(unit_ids: list[str], delay_s: float = 0.0) -> threading.Thread | None:
    """Fetch the unit page's first view of each unit, in order, in one daemon thread that starts
    after `delay_s` seconds; each unit once per snapshot. The service queue calls it for the unit
    its "Open a unit" box holds and the units at the top of its table (those a coordinator opens
    first), so that the unit page, when opened, finds its queries cached. Returns the thread, or
    None when there was nothing to do."""
    token = loaders.data_token()
    if token is None:
        return None
    with _prefetch_lock:
        todo = [u for u in dict.fromkeys(unit_ids) if u is not None and _prefetched.get(u) != token]
        if len(_prefetched) + len(todo) > 256:
            _prefetched.clear()
        _prefetched.update((u, token) for u in todo)
    if not todo:
        return None

    def run() -> None:
        time.sleep(delay_s)
        for unit_id in todo:
            try:
                unit_default_view(unit_id)
            except Exception as exc:  # noqa: BLE001 - a prefetch is optional; the page reports problems itself
                _LOG.info("dashboard prefetch of unit %s skipped: %s", unit_id, exc)

    thread = threading.Thread(target=run, name=f"{THREAD_PREFIX}prefetch", daemon=True)
    thread.start()
    return thread


def keep_warm(poll_s: float = 5.0, refresh_s: float = loaders.QUERY_TTL_S + 5, stop: threading.Event | None = None) -> threading.Thread:
    """Start a daemon thread that warms again when a new snapshot is published (checked every
    `poll_s` seconds) and every `refresh_s` seconds (just after the query cache's time to live,
    loaders.QUERY_TTL_S, has dropped the entries warmed before)."""
    stop = stop or threading.Event()

    def run() -> None:
        token, warmed_at = loaders.data_token(), time.monotonic()
        while not stop.wait(poll_s):
            try:
                now = loaders.data_token()
            except OSError:
                continue
            if now is not None and (now != token or time.monotonic() - warmed_at >= refresh_s):
                why = "a new snapshot" if now != token else "the cache's time to live"
                t = time.perf_counter()
                warm_caches()
                print(f"breathfleet dashboard: caches warmed again after {why} in {time.perf_counter() - t:.1f} s",
                      file=sys.stderr, flush=True)
                token, warmed_at = now, time.monotonic()

    thread = threading.Thread(target=run, name=f"{THREAD_PREFIX}keep-warm", daemon=True)
    thread.start()
    return thread
