"""Run lengths of two-sided CUSUM and EWMA charts by Monte Carlo simulation, vectorised over charts.

Shared by the ARL, chart design and fleet false-alarm tests as an independent check of the
Markov-chain and integral-equation run lengths.
"""

from __future__ import annotations

import numpy as np

from pipeline.charts.arl import ewma_limit


def simulate_cusum(k, h, n, rng, *, shift=0.0, drift=0.0, headstart=0.0, max_steps=50_000):
    """Run lengths of n two-sided CUSUMs, all charts advanced together (vectorised over charts)."""
    rl = np.zeros(n, dtype=np.int64)
    idx = np.arange(n)
    sp = np.full(n, float(headstart))
    sm = sp.copy()
    for t in range(1, max_steps + 1):
        x = rng.standard_normal(idx.size) + shift + drift * t
        sp = np.maximum(0.0, sp + x - k)
        sm = np.maximum(0.0, sm - x - k)
        signal = (sp > h) | (sm > h)
        rl[idx[signal]] = t
        keep = ~signal
        idx, sp, sm = idx[keep], sp[keep], sm[keep]
        if idx.size == 0:
            break
    return rl


def simulate_ewma(lam, L, n, rng, *, shift=0.0, drift=0.0, max_steps=50_000):
    """Run lengths of n two-sided EWMA charts with fixed limits, vectorised over charts."""
    limit = ewma_limit(lam, L)
    rl = np.zeros(n, dtype=np.int64)
    idx = np.arange(n)
    z = np.zeros(n)
    for t in range(1, max_steps + 1):
        z = lam * (rng.standard_normal(idx.size) + shift + drift * t) + (1.0 - lam) * z
        signal = np.abs(z) > limit
        rl[idx[signal]] = t
        keep = ~signal
        idx, z = idx[keep], z[keep]
        if idx.size == 0:
            break
    return rl
