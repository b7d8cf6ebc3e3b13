"""Start the dashboard's Streamlit server with its libraries already imported.

`breathfleet dashboard` runs `python -m dashboard.serve run dashboard/app.py ...`: the heavy
imports (pandas, Altair, SciPy through the forecast, DuckDB, the page helpers) happen here, once,
before the server listens, instead of during the first visitor's page. The server and the app
share this process, so the app's imports find the modules loaded.

The objects those imports create (a few hundred thousand: Altair's schema, pandas, SciPy) are
then frozen out of the garbage collector (gc.freeze). Streamlit runs a full collection after
every script run (runner.postScriptGC); over the unfrozen heap that costs 0.1-0.25 s, paid
twice when the queue opens a unit (once when the queue's run stops for the page switch, once
after the unit page). Frozen objects are never collected, which suits modules loaded for the
life of the server; what the pages create later is collected as before.

Streamlit also checks, on the first element any visitor's page writes, whether it runs in a
Python REPL (to print a "use streamlit run" warning): it walks inspect.stack(), which looks up
the source file of every loaded module, 0.15-0.3 s on the first page view of each server. This
server is always `streamlit run`, so the check is marked as done before it listens.
"""

from __future__ import annotations

import gc
import importlib
import sys

PRELOAD = ("numpy", "pandas", "pyarrow", "duckdb", "altair", "scipy.stats",
           "pipeline.forecast", "pipeline.ranking", "pipeline.reports", "pipeline.digest",
           "pipeline.standards.uncertainty", "dashboard.loaders", "dashboard.figures", "dashboard.library",
           "dashboard.frame")


def main() -> int:
    for name in PRELOAD:
        importlib.import_module(name)
    from streamlit.web import cli

    from streamlit import delta_generator

    delta_generator._use_warning_has_been_displayed = True  # see the module docstring
    gc.collect()
    gc.freeze()

    sys.argv = ["streamlit", *sys.argv[1:]]
    return cli.main()


if __name__ == "__main__":
    sys.exit(main())
