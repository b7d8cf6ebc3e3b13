"""Chart engine speed: analyse_fleet on the 10-million-check fleet against a per-unit pandas loop.

Full run: every chart of every unit except the last week's checks; then an incremental run
after that week is added back. The per-unit loop (plain Python recursions for CUSUM and EWMA,
pandas for moving range and rolling run rules, one chart group at a time) runs on a random
sample of chart groups in the same process and is scaled up by checks. Targets: full < 30 s,
>= 50x the loop, incremental week < 3 s.
Fleet: benchmarks.fleet.benchmark_database() (the demo generator at 5,000 units x 24 months).
"""

from __future__ import annotations

import shutil
import time
from pathlib import Path

import numpy as np
import pandas as pd

OUT = Path(__file__).resolve().parent.parent / "bench-output"


def loop_charts(frame: pd.DataFrame, params: dict, pooled: float) -> int:
    """The straightforward way: one chart group at a time, Python recursions over its checks."""
    k, h = params["cusum"]["k"], params["cusum"]["h"]
    lam, L = params["ewma"]["lam"], params["ewma"]["L"]
    n_min = params["own_baseline_min_checks"]
    signals = 0
    for _, g in frame.groupby(["instrument_id", "level", "baseline_period"], sort=False):
        x = g["relative_error"].to_numpy()
        z = np.empty(len(x))
        for i in range(len(x)):
            if i < n_min:
                z[i] = x[i] / pooled if i == 0 else np.sqrt(i / (i + 1)) * (x[i] - x[:i].mean()) / pooled
            else:
                c, s = x[:n_min].mean(), np.abs(np.diff(x[:n_min])).mean() / 1.128
                z[i] = (x[i] - c) / s
        zs = pd.Series(z)
        mr = zs.diff().abs()
        cu = cl = e = 0.0
        for i, v in enumerate(z):
            cu = max(0.0, cu + v - k)
            cl = max(0.0, cl - v - k)
            e = lam * v + (1 - lam) * e
            half = L * np.sqrt(lam / (2 - lam) * (1 - (1 - lam) ** (2 * (i + 1))))
            signals += (cu > h) + (cl > h) + (abs(e) > half)
        signals += int((zs.abs() > 3).sum() + (mr > 3.686).sum())
        signals += int(((zs > 2).rolling(3).sum() >= 2).sum() + ((zs > 1).rolling(5).sum() >= 4).sum()
                       + ((zs > 0).rolling(8).sum() == 8).sum())
    return signals


def main() -> None:
    import duckdb

    from pipeline.charts.analyse import analyse_fleet, chart_parameters
    from pipeline.db import migrate, query_df
    from pipeline.settings import Settings

    from benchmarks.fleet import benchmark_database

    src = Path(benchmark_database())
    work = OUT / "charts-work.duckdb"
    shutil.copyfile(src, work)
    con = duckdb.connect(str(work))
    migrate(con)
    for t in ("chart_points", "chart_signals", "chart_baselines", "chart_state", "chart_runs", "chart_pooled_sigma",
              "chart_groups", "chart_linearity"):
        con.execute(f"DELETE FROM {t}")  # noqa: S608
    end = con.execute("SELECT max(measured_at) FROM checks").fetchall()[0][0]
    con.execute("CREATE OR REPLACE TABLE _bench_week AS SELECT * FROM checks WHERE measured_at > $e - INTERVAL 7 DAY",
                {"e": end})
    con.execute("DELETE FROM checks WHERE measured_at > $e - INTERVAL 7 DAY", {"e": end})
    settings = Settings()
    # check_results (expected values) is filled at ingest; bring it in line with the trimmed
    # checks before timing, as ingest would have.
    from pipeline.standards import sync_standards_settings
    t0 = time.perf_counter()
    sync_standards_settings(con, settings)
    t_refresh = time.perf_counter() - t0
    t0 = time.perf_counter()
    full = analyse_fleet(con, settings)
    t_full = time.perf_counter() - t0
    # The week arrives as an ingest delivers it: new check ids above every stored one. The
    # incremental time includes bringing check_results up to date for it.
    con.execute("UPDATE _bench_week SET check_id = check_id + (SELECT max(check_id) FROM checks)")
    con.execute("INSERT INTO checks SELECT * FROM _bench_week")
    t0 = time.perf_counter()
    inc = analyse_fleet(con, settings)
    t_inc = time.perf_counter() - t0
    # The loop baseline on a sample of chart groups, scaled up by checks.
    pts = con.execute("SELECT instrument_id, level, baseline_period, relative_error FROM chart_points "
                      "WHERE instrument_id IN (SELECT DISTINCT instrument_id FROM chart_points USING SAMPLE 40 ROWS "
                      "(reservoir, 7)) ORDER BY instrument_id, level, baseline_period, position").df()
    sigma = float(con.execute("SELECT median(sigma) FROM chart_pooled_sigma").fetchall()[0][0])
    params = chart_parameters(settings)
    t0 = time.perf_counter()
    loop_charts(pts, params, sigma)
    t_loop_sample = time.perf_counter() - t0
    total = full.n_new_checks + inc.n_new_checks
    t_loop = t_loop_sample * total / max(len(pts), 1)
    con.close()
    print(f"fleet: {total:,} charted checks, {full.n_groups:,} chart groups ({src.name})")
    print(f"full run:        {t_full:8.2f} s  ({full.n_new_checks:,} checks, {full.n_signals:,} signals)   target < 30 s")
    print(f"per-unit loop:   {t_loop:8.1f} s  (sample {len(pts):,} checks in {t_loop_sample:.2f} s, scaled)")
    print(f"speed-up:        {t_loop / t_full:8.1f} x   target >= 50 x")
    tm = full.timings
    print(f"full run parts:  read check_results {tm['read']:.2f} s, compute {tm['compute']:.2f} s, store {tm['store']:.2f} s;"
          f" compute-only speed-up {t_loop / tm['compute']:.1f} x")
    ti = inc.timings
    print(f"incremental parts: read {ti['read']:.2f} s, compute {ti['compute']:.2f} s, store {ti['store']:.2f} s")
    print(f"incremental week:{t_inc:8.2f} s  ({inc.n_new_checks:,} checks)   target < 3 s")
    print(f"(not timed above: check_results brought in line with the trimmed checks in {t_refresh:.1f} s, "
          "work that ingest does)")


if __name__ == "__main__":
    main()
