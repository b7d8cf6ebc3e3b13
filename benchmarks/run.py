"""Run every benchmark module (benchmarks/bench_*.py) in name order; each prints its own figures.

Usage: python -m benchmarks.run [name-fragment ...]
"""

from __future__ import annotations

import importlib
import pkgutil
import sys
import time

import benchmarks


def main(argv: list[str]) -> int:
    names = sorted(m.name for m in pkgutil.iter_modules(benchmarks.__path__) if m.name.startswith("bench_"))
    if argv:
        names = [n for n in names if any(a in n for a in argv)]
    for name in names:
        print(f"\n=== {name}", flush=True)
        started = time.perf_counter()
        importlib.import_module(f"benchmarks.{name}").main()
        print(f"({name} took {time.perf_counter() - started:.1f} s)", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
