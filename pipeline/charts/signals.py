"""Chart signals as rows: unit, time, chart, rule, direction, size, onset and impact window."""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.stats import norm

from pipeline.charts.fleet_alarms import benjamini_hochberg, cusum_signal_p_values, ewma_signal_p_values

SIGNAL_COLUMNS = ["instrument_id", "level", "check_id", "measured_at", "chart", "rule", "direction",
                  "size", "onset_at", "p_value"]


def crossings(stat: np.ndarray, limit: np.ndarray | float, prev_stat: np.ndarray) -> np.ndarray:
    """Rows where a statistic goes beyond its limit from inside (one signal per excursion)."""
    return (stat > limit) & ~(prev_stat > limit)


def signal_p_values(sig: pd.DataFrame, *, k: float, h: float, lam: float, L: float) -> np.ndarray:
    """In-control probability of a signal no later than the observed run length (position)."""
    p = np.full(len(sig), np.nan)
    pos = sig["position"].to_numpy(dtype=int)
    chart = sig["chart"].to_numpy()
    m = chart == "cusum"
    if m.any():
        p[m] = cusum_signal_p_values(pos[m], k, h)
    m = chart == "ewma"
    if m.any():
        p[m] = ewma_signal_p_values(pos[m], lam, L)
    m = chart == "individuals"
    if m.any():
        alpha = 2 * norm.sf(3.0)
        p[m] = 1 - (1 - alpha) ** pos[m]
    return p


def fleet_significance(p: np.ndarray, q: float) -> np.ndarray:
    """Benjamini-Hochberg (1995) over the run's signals with a p-value; others stay NULL (NaN)."""
    out = np.full(len(p), np.nan)
    ok = np.isfinite(p)
    if ok.any():
        res = benjamini_hochberg(p[ok].tolist(), q)
        out[ok] = np.asarray(res.rejected, dtype=float)
    return out


def impact_checks(con, sig: pd.DataFrame) -> np.ndarray:
    """Control checks of each signal's unit from its onset (or the signal) to the signal, inclusive."""
    if sig.empty:
        return np.empty(0, dtype=np.int64)
    frame = pd.DataFrame({"i": np.arange(len(sig)), "instrument_id": sig["instrument_id"].to_numpy(),
                          "onset_at": sig["onset_at"].fillna(sig["measured_at"]).to_numpy(),
                          "measured_at": sig["measured_at"].to_numpy()})
    con.register("_bf_signals", frame)
    try:
        got = con.execute(
            "SELECT s.i, count(c.check_id) AS n FROM _bf_signals s LEFT JOIN checks c "
            "ON c.instrument_id = s.instrument_id AND c.check_type = 'control' "
            "AND c.measured_at >= s.onset_at AND c.measured_at <= s.measured_at GROUP BY s.i").df()
    finally:
        con.unregister("_bf_signals")
    return got.set_index("i")["n"].reindex(np.arange(len(sig))).fillna(0).to_numpy(dtype=np.int64)
