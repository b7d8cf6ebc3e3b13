"""Start the dashboard's Streamlit server with its libraries imported and its caches warm.

`breathfleet dashboard` runs `python -m dashboard.serve run dashboard/app.py ...`. Before the
server listens (so before it reports ready on /_stcore/health):

1. The heavy imports (pandas, Altair, SciPy through the forecast, DuckDB, the page helpers)
   happen here, once, instead of during the first visitor's page. The server and the app share
   this process, so the app's imports find the modules loaded.
2. `dashboard.warm.warm_caches()` opens the published snapshot and runs every page's fleet-wide
   queries with the pages' default controls (not the queries of one unit), filling the same
   Streamlit caches the pages read; on the 10-million-check benchmark fleet this takes about
   1-2 s. A thread (`dashboard.warm.keep_warm`) warms again when a writer publishes a new
   snapshot; caches are keyed on the snapshot, so a publish still invalidates them at once.
   BREATHFLEET_DASHBOARD_WARM=0 skips both.

The objects the imports create (a few hundred thousand: Altair's schema, pandas, SciPy) are
then frozen out of the garbage collector (gc.freeze). Streamlit runs a full collection after
every script run (runner.postScriptGC); over the unfrozen heap that costs 0.1-0.25 s, paid
twice when the queue opens a unit (once when the queue's run stops for the page switch, once
after the unit page). Frozen objects are never collected, which suits modules loaded for the
life of the server; what the pages create later is collected as before.

Streamlit also checks, on the first element any visitor's page writes, whether it runs in a
Python REPL (to print a "use streamlit run" warning): it walks inspect.stack(), which looks up
the source file of every loaded module, 0.15-0.3 s on the first page view of each server. This
server is always `streamlit run`, so the check is marked as done before it listens.

Opening a page by its address (e.g. /unit?unit=X): Streamlit's frontend does not know where the
server's root is, so it first probes `<page>/_stcore/health`, gets a 404 and tries the root
after a back-off, about 0.17 s on every page but the first. The server knows its root, so the
index page it serves says so (`window.__streamlit.BACKEND_BASE_URL`, the frontend's setting
for where the server is; see `_announce_server_root`) and the frontend connects at once.
"""

from __future__ import annotations

import gc
import importlib
import logging
import os
import sys
import time

PRELOAD = ("numpy", "pandas", "pyarrow", "duckdb", "altair", "scipy.stats",
           "pipeline.forecast", "pipeline.ranking", "pipeline.reports", "pipeline.digest",
           "pipeline.standards.uncertainty", "dashboard.loaders", "dashboard.figures", "dashboard.library",
           "dashboard.frame", "dashboard.warm")
WARM_ENV = "BREATHFLEET_DASHBOARD_WARM"


def _announce_server_root() -> bool:
    """Make the index page tell Streamlit's frontend where the server's root is.

    Wraps the static-file handler Streamlit (Starlette server) builds, so that index.html
    (served for every page address) carries a script setting window.__streamlit.BACKEND_BASE_URL
    to the page's origin plus server.baseUrlPath. Returns False, changing nothing, when this
    Streamlit version does not have the handler factory it wraps.
    """
    try:
        from starlette.responses import FileResponse, HTMLResponse

        from streamlit import config
        from streamlit.web.server.starlette import starlette_static_routes as routes
    except ImportError:
        return False
    original = getattr(routes, "create_streamlit_static_handler", None)
    if original is None:
        return False

    def create(directory: str, base_url: str | None):
        handler = original(directory, base_url)
        index = os.path.realpath(os.path.join(directory, "index.html"))
        try:
            with open(index, encoding="utf-8") as f:
                html = f.read()
        except OSError:
            return handler
        prefix = "/" + "/".join(p for p in (config.get_option("server.baseUrlPath") or "").split("/") if p)
        root = prefix.rstrip("/") + "/"
        script = ("<script>window.__streamlit=Object.assign({BACKEND_BASE_URL:window.location.origin+"
                  f"{root!r}}},window.__streamlit||{{}});</script>")
        if "<head>" not in html:
            return handler
        patched = html.replace("<head>", "<head>" + script, 1)
        get_response = handler.get_response

        async def get_response_with_root(path, scope):
            response = await get_response(path, scope)
            if isinstance(response, FileResponse) and os.path.realpath(response.path) == index:
                return HTMLResponse(patched, headers={"Cache-Control": "no-cache"})
            return response

        handler.get_response = get_response_with_root
        return handler

    routes.create_streamlit_static_handler = create
    return True


def _warm() -> None:
    if os.environ.get(WARM_ENV, "1") == "0":
        return
    from dashboard import warm
    t = time.perf_counter()
    steps = warm.warm_caches()
    if steps:
        detail = ", ".join(f"{k} {v:.2f}" for k, v in steps.items())
        print(f"breathfleet dashboard: caches warmed in {time.perf_counter() - t:.1f} s ({detail})",
              file=sys.stderr, flush=True)
        warm.keep_warm()


def main() -> int:
    # The cached loaders are defined and (warming) run here before Streamlit's runtime exists;
    # their caches are the ones the runtime uses later. Streamlit would warn "No runtime found"
    # for each of them.
    importlib.import_module("streamlit.runtime.caching.cache_data_api")  # creates its logger
    cache_log = logging.getLogger("streamlit.runtime.caching.cache_data_api")
    level = cache_log.level
    cache_log.setLevel(logging.ERROR)
    try:
        for name in PRELOAD:
            importlib.import_module(name)
        _announce_server_root()
        _warm()
    finally:
        cache_log.setLevel(level)
    from streamlit.web import cli

    from streamlit import delta_generator

    delta_generator._use_warning_has_been_displayed = True  # see the module docstring
    gc.collect()
    gc.freeze()

    sys.argv = ["streamlit", *sys.argv[1:]]
    return cli.main()


if __name__ == "__main__":
    sys.exit(main())
