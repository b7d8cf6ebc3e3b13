"""Benchmarks: speed and memory as ratios against baselines measured in the same run."""
