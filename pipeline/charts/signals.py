"""Chart signals as rows: unit, time, chart, rule, direction, size, onset and impact window."""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.stats import norm

from pipeline.charts.fleet_alarms import benjamini_hochberg_arrays, cusum_signal_p_values, ewma_signal_p_values
from pipeline.db import registered

SIGNAL_COLUMNS = ["instrument_id", "level", "check_id", "measured_at", "chart", "rule", "direction",
                  "size", "onset_at", "p_value"]


def crossings(stat: np.ndarray, limit: np.ndarray | float, prev_stat: np.ndarray) -> np.ndarray:
    """Rows where a statistic goes beyond its limit from inside (one signal per excursion)."""
    return (stat > limit) & ~(prev_stat > limit)


def signal_p_values(sig: pd.DataFrame, *, k: float, h: float, lam: float, L: float) -> np.ndarray:
    """In-control probability of a signal no later than the observed run length (position)."""
    p = np.full(len(sig), np.nan)
    pos = sig["position"].to_numpy(dtype=int)
    chart = sig["chart"]
    m = (chart == "cusum").to_numpy(dtype=bool)
    if m.any():
        p[m] = cusum_signal_p_values(pos[m], k, h)
    m = (chart == "ewma").to_numpy(dtype=bool)
    if m.any():
        p[m] = ewma_signal_p_values(pos[m], lam, L)
    m = (chart == "individuals").to_numpy(dtype=bool)
    if m.any():
        alpha = 2 * norm.sf(3.0)
        p[m] = 1 - (1 - alpha) ** pos[m]
    return p


def fleet_significance(p: np.ndarray, q: float) -> np.ndarray:
    """Benjamini-Hochberg (1995) over the run's signals with a p-value; others stay NULL (NaN)."""
    out = np.full(len(p), np.nan)
    ok = np.isfinite(p)
    if ok.any():
        out[ok] = benjamini_hochberg_arrays(p[ok], q)[0].astype(float)
    return out


def impact_checks(con, sig: pd.DataFrame) -> np.ndarray:
    """Control checks of each signal's unit from its onset (or the signal) to the signal, inclusive.

    One read of the units' control-check times, then two binary searches per signal on keys
    (unit code, microseconds), so a fleet's million signals cost seconds, not a range join.
    """
    if sig.empty:
        return np.empty(0, dtype=np.int64)
    unit = sig["instrument_id"]
    if isinstance(unit.dtype, pd.CategoricalDtype):  # the units present, by their codes: no strings made
        codes = unit.cat.codes.to_numpy()
        present = np.flatnonzero(np.bincount(codes, minlength=len(unit.cat.categories)))
        names = unit.cat.categories[present].astype(str)
    else:
        codes, names = pd.factorize(unit.astype(str))
        present = np.arange(len(names))
    onset = sig["onset_at"].fillna(sig["measured_at"]).to_numpy(dtype="datetime64[us]")
    at = sig["measured_at"].to_numpy(dtype="datetime64[us]")
    lo = onset.min()
    shift = np.int64(1) << 46  # microseconds after `lo`: 2^46 us is about 2,200 years
    units = pd.DataFrame({"instrument_id": np.asarray(names, dtype=object), "code": present.astype(np.int64)})
    with registered(con, "_bf_signal_units", units):  # the same keys, made and sorted by DuckDB
        keys = con.execute("SELECT u.code * $shift + (epoch_us(c.measured_at) - $lo_us) AS key FROM checks c "
                           "JOIN _bf_signal_units u USING (instrument_id) "
                           "WHERE c.check_type = 'control' AND c.measured_at >= $lo ORDER BY key",
                           {"lo": pd.Timestamp(lo).to_pydatetime(), "shift": int(shift),
                            "lo_us": int(lo.astype(np.int64))}).fetchnumpy()["key"]
    keys = np.asarray(keys, dtype=np.int64)

    def key(code, t):
        return np.asarray(code, dtype=np.int64) * shift + (np.asarray(t, dtype="datetime64[us]") - lo).astype(np.int64)

    # Needles in unit order walk the keys nearly in order (searchsorted is correct in any order, and
    # fast when it goes through the keys in step); a stable sort of small integer codes is a radix sort.
    order = np.argsort(codes, kind="stable")
    codes = codes[order]

    def search(times, side):
        out = np.empty(len(times), dtype=np.int64)
        out[order] = np.searchsorted(keys, key(codes, times[order]), side=side)
        return out
    return search(at, "right") - search(onset, "left")
