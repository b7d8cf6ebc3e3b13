"""Deterministic generator of an invented breath-alcohol testing program (the demo fleet).

`generate_demo_fleet(out_dir, instruments, months, seed, end)` writes reference tables, monthly
check exports in several layouts with their source profiles, a file of broken rows, a manifest
(ingest order) and truth.json (the planted faults). See SCENARIO.md.
"""

from demo_fleet.generator import DEFAULT_END, DEFAULT_SEED, PROFILES_DIR, DemoFleet, generate_demo_fleet

__all__ = ["DEFAULT_END", "DEFAULT_SEED", "PROFILES_DIR", "DemoFleet", "generate_demo_fleet"]
