"""Ingest speed: the full ingest of the 5,000 x 24 fleet against a bare DuckDB read_csv of the same files.

Each run happens in a child process, so peak memory is that child's ru_maxrss. Prints rows/s of
both, their ratio (target >= 0.5) and peak memory (target < 2 GB).

The ingest is every file of the manifest through `iter_ingest` (validation, conversion,
quarantine, duplicates, one transaction and ledger row per file). Its rows/s is timed inside the
child from the first file to the last commit, like the bare read's. The work that follows the
files once per command (check_results: expected values and verdicts for every check, which
`breathfleet run` and `breathfleet ingest` bring up to date; then the snapshot for readers) is
timed and printed separately, with the ratio that includes it.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time

from benchmarks.fleet import ROOT, database_path, fleet_dir

_INGEST = """
import json, os, sys
from pipeline.batch_memory import prepare_batch_process
prepare_batch_process()  # before numpy loads, as the breathfleet console script does
os.environ.setdefault("BREATHFLEET_OPERATOR_KEY", "benchmark-key")
from pipeline.demo_job import run_demo_job
from pipeline.settings import Settings
s = run_demo_job(sys.argv[1], sys.argv[2], Settings())
print(json.dumps({"rows": s.rows_read, "stored": s.rows_stored, "seconds": s.seconds}))
"""

_BARE = """
import glob, json, sys, time, duckdb
out, db = sys.argv[1], sys.argv[2]
con = duckdb.connect(db)
rows = 0
t = time.perf_counter()
for i, e in enumerate(json.load(open(out + "/manifest.json"))):
    files = sorted(glob.glob(out + "/" + e["path"]))
    con.execute(f"CREATE TABLE t{i} AS SELECT * FROM read_csv($f, union_by_name=true)", {"f": files})
    rows += con.execute(f"SELECT count(*) FROM t{i}").fetchone()[0]
con.execute("CHECKPOINT")
print(json.dumps({"rows": rows, "seconds": time.perf_counter() - t}))
"""


def _child(code: str, *args: str) -> tuple[dict, float, float]:
    """Run code in a child; return its JSON, wall seconds and peak RSS in MB."""
    started = time.perf_counter()
    with open(os.devnull, "w") as null:
        proc = subprocess.Popen([sys.executable, "-c", code, *args], cwd=ROOT, stdout=subprocess.PIPE,
                                stderr=null, text=True, env={**os.environ})
        out = proc.stdout.read()
        _, status, usage = os.wait4(proc.pid, 0)   # this child's own peak resident set (KB on Linux)
        proc.returncode = os.waitstatus_to_exitcode(status)
    wall = time.perf_counter() - started
    if proc.returncode != 0:
        raise RuntimeError(f"benchmark child failed with exit code {proc.returncode}")
    return json.loads(out.strip().splitlines()[-1]), wall, usage.ru_maxrss / 1024


def main() -> None:
    out = fleet_dir()
    db = database_path()
    work = db.with_name("ingest-bench.duckdb")
    bare = db.with_name("bare-read.duckdb")
    for p in (work, bare):
        for q in (p, p.with_name(p.name + ".wal"), p.with_name(p.name + ".snapshot")):
            q.unlink(missing_ok=True)
    b, _, peak_bare = _child(_BARE, str(out), str(bare))
    r, _, peak_ingest = _child(_INGEST, str(out), str(work))
    bare_s, parts = b["seconds"], r["seconds"]
    ingest_s = parts["ingest"]
    after_s = parts.get("check_results", 0.0) + parts.get("publish", 0.0)
    print(f"files: {out}")
    print(f"bare read_csv : {b['rows']:,} rows in {bare_s:.1f} s = {b['rows'] / bare_s:,.0f} rows/s "
          f"(peak {peak_bare:,.0f} MB)")
    print(f"full ingest   : {r['rows']:,} rows ({r['stored']:,} stored) in {ingest_s:.1f} s = "
          f"{r['rows'] / ingest_s:,.0f} rows/s")
    ratio = (r["rows"] / ingest_s) / (b["rows"] / bare_s)
    print(f"ratio ingest / bare = {ratio:.2f} (target >= 0.5); peak memory of the ingest process "
          f"{peak_ingest:,.0f} MB (target < 2,048 MB)")
    print(f"then, once    : check_results (expected values and verdicts of every check) "
          f"{parts.get('check_results', 0.0):.1f} s, snapshot for readers {parts.get('publish', 0.0):.1f} s; "
          f"ratio including them {(r['rows'] / (ingest_s + after_s)) / (b['rows'] / bare_s):.2f}")
    bare.unlink(missing_ok=True)
    if not db.exists():
        os.replace(work, db)
    else:
        work.unlink(missing_ok=True)
    work.with_name(work.name + ".snapshot").unlink(missing_ok=True)


if __name__ == "__main__":
    main()
