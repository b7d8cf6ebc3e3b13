"""Start the dashboard's Streamlit server with its libraries already imported.

`breathfleet dashboard` runs `python -m dashboard.serve run dashboard/app.py ...`: the heavy
imports (pandas, Altair, SciPy through the forecast, DuckDB, the page helpers) happen here, once,
before the server listens, instead of during the first visitor's page. The server and the app
share this process, so the app's imports find the modules loaded.
"""

from __future__ import annotations

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

    sys.argv = ["streamlit", *sys.argv[1:]]
    return cli.main()


if __name__ == "__main__":
    sys.exit(main())
