"""Fleet model speed: profiled REML from cell statistics against plain statsmodels MixedLM.

Cases: a simulated fleet of 2,000 units with 700,000 checks (written directly into a DuckDB
file, cached in bench-output/), and the 10-million-check benchmark fleet from
benchmarks/fleet.py when it exists. Each part runs in its own process so peak memory
(ru_maxrss) belongs to that part alone. Targets: < 3 s (700k), < 60 s (10M), < 4 GB.
"""

from __future__ import annotations

import json
import resource
import subprocess
import sys
import time
import warnings
from pathlib import Path

OUT = Path(__file__).resolve().parent.parent / "bench-output"
DB_700K = OUT / "model-700k.duckdb"
DB_10M = OUT / "model-10m-simulated.duckdb"


def _peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _ensure_simulated(path: Path, **kwargs) -> Path:
    import duckdb

    from pipeline.db import migrate
    from pipeline.models.simulate import simulate_fleet

    if not path.exists():
        OUT.mkdir(exist_ok=True)
        tmp = path.with_suffix(".tmp")
        tmp.unlink(missing_ok=True)
        con = duckdb.connect(str(tmp))
        migrate(con)
        simulate_fleet(con, **kwargs)
        con.close()
        tmp.rename(path)
    return path


def part_fit(path: str, window_days: str = "") -> dict:
    import dataclasses

    from pipeline.db import connect
    from pipeline.models.fleet_model import fit_fleet_model
    from pipeline.settings import Settings

    settings = Settings()
    if window_days:  # a window over every check of the fleet instead of the configured one
        settings = dataclasses.replace(settings, model=dataclasses.replace(settings.model, window_days=int(window_days)))
    con = connect(path, read_only=True)
    started = time.perf_counter()
    result = fit_fleet_model(con, settings)
    elapsed = time.perf_counter() - started
    return {"part": "fit", "db": path, "seconds": elapsed, "peak_mb": _peak_mb(), "n_checks": result.n_checks,
            "n_units": result.n_units, "n_lots": result.n_lots, "converged": result.converged,
            "cells": result.parameters.get("n_cells"), "iterations": result.parameters.get("iterations"),
            "timings": result.parameters.get("timings_s")}


def part_statsmodels(path: str) -> dict:
    import statsmodels.formula.api as smf

    from pipeline.db import connect, sql_text
    from pipeline.models.fleet_model import fit_fleet_model  # noqa: F401  (same import cost as the fit)

    con = connect(path, read_only=True)
    end = con.execute("SELECT max(measured_at) FROM checks").fetchone()[0]
    import datetime as dt
    con.execute(sql_text("queries/model_base"), {"window_start": end - dt.timedelta(days=365), "window_end": end})
    frame = con.execute("SELECT instrument_id || '/' || baseline_period AS unit, lot_id, t, d, y FROM model_base").df()
    started = time.perf_counter()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model = smf.mixedlm("y ~ 0 + C(lot_id) + t + d", frame, groups=frame["unit"], re_formula="~t")
        fit = model.fit(reml=True, method=["lbfgs"])
    elapsed = time.perf_counter() - started
    return {"part": "statsmodels", "db": path, "seconds": elapsed, "peak_mb": _peak_mb(), "n_checks": len(frame),
            "converged": bool(fit.converged), "warnings": len(caught),
            "t": float(fit.fe_params["t"]), "d": float(fit.fe_params["d"])}


def _run(part: str, path: Path, *extra: str) -> dict:
    out = subprocess.run([sys.executable, "-m", "benchmarks.bench_30_model", part, str(path), *extra],
                         capture_output=True, text=True, check=True, cwd=Path(__file__).resolve().parent.parent)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    db = _ensure_simulated(DB_700K, n_units=2000, checks_per_unit=350, days=360, seed=2026, bad_lot_pct=3.0)
    ours = _run("fit", db)
    print(f"fleet model, {ours['n_checks']:,} checks, {ours['n_units']} unit-periods, {ours['n_lots']} lots, "
          f"{ours['cells']} cells: {ours['seconds']:.2f} s, peak {ours['peak_mb']:.0f} MB, "
          f"converged {ours['converged']} (target < 3 s, < 4 GB); of which {_split(ours)}", flush=True)
    ref = _run("statsmodels", db)
    print(f"statsmodels MixedLM (lbfgs), same data: {ref['seconds']:.1f} s, peak {ref['peak_mb']:.0f} MB, "
          f"converged {ref['converged']}; ratio {ref['seconds'] / ours['seconds']:.0f}x", flush=True)
    try:
        from benchmarks.fleet import benchmark_database
        big_db, label = benchmark_database(), "benchmark fleet"
    except ImportError:
        # Until benchmarks/fleet.py lands: 5,000 units x 2,000 checks over 24 months, simulated.
        big_db = _ensure_simulated(DB_10M, n_units=5000, checks_per_unit=2000, days=720, seed=2027,
                                   bad_lot_pct=3.0)
        label = "simulated 10M-check fleet (benchmarks/fleet.py not available)"
    big = _run("fit", big_db)
    print(f"{label}: {big['n_checks']:,} checks in the 365-day window, {big['n_units']} unit-periods, "
          f"{big['n_lots']} lots: {big['seconds']:.1f} s, peak {big['peak_mb']:.0f} MB, "
          f"converged {big['converged']} (target < 60 s, < 4 GB); of which {_split(big)}", flush=True)
    whole = _run("fit", big_db, "1000")
    print(f"{label}, window over all its checks: {whole['n_checks']:,} checks, {whole['n_units']} unit-periods, "
          f"{whole['n_lots']} lots: {whole['seconds']:.1f} s, peak {whole['peak_mb']:.0f} MB, "
          f"converged {whole['converged']} (target < 60 s, < 4 GB); of which {_split(whole)}")


def _split(r: dict) -> str:
    t = r.get("timings") or {}
    return (f"check_results -> model_base {t.get('check_results_to_model_base', float('nan')):.2f} s, "
            f"REML {t.get('reml', float('nan')):.2f} s")


if __name__ == "__main__":
    if len(sys.argv) >= 3:
        part = {"fit": part_fit, "statsmodels": part_statsmodels}[sys.argv[1]]
        print(json.dumps(part(*sys.argv[2:])))
    else:
        main()
