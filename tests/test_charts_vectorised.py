"""The fleet-wide (segmented, in-place) chart functions against plain per-group reference loops."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.charts.baselines import own_estimates, pooled_sigma
from pipeline.charts.changepoint import cusum_run_length
from pipeline.charts.ewma import ewma
from pipeline.charts.grouping import Segments, group_starts, grouped_cumsum, key_runs
from pipeline.charts.individuals import moving_range
from pipeline.charts.run_rules import RULES, apply_run_rules
from pipeline.charts.short_run import quesenberry_q
from pipeline.charts.xbar_s import replicate_groups, xbar_s_groups


def random_groups(n=3000, groups=60, seed=0):
    rng = np.random.default_rng(seed)
    codes = np.sort(rng.integers(0, groups, n))
    return codes, group_starts(codes), rng


def per_group(codes):
    for g in np.unique(codes):
        yield np.flatnonzero(codes == g)


def test_segments_and_grouped_sums_equal_loops():
    codes, starts, rng = random_groups()
    seg = Segments.from_starts(starts)
    x = rng.standard_normal(len(codes))
    cs = grouped_cumsum(x, starts, seg=seg)
    for rows in per_group(codes):
        # common practice: a cumulative sum restarts at each group
        np.testing.assert_allclose(cs[rows], np.cumsum(x[rows]), atol=1e-12)
        assert list(seg.pos[rows]) == list(range(len(rows))) and len(set(seg.gid[rows])) == 1
    y = x.copy()
    assert np.array_equal(grouped_cumsum(y, starts, seg=seg, overwrite=True), cs)
    assert list(seg.last_idx) == [rows[-1] for rows in per_group(codes)]


def test_key_runs_number_keys_in_order_of_appearance():
    rng = np.random.default_rng(1)
    frame = pd.DataFrame({"a": pd.Categorical(rng.choice(["x", "y", "z"], 500)),
                          "b": rng.choice([0.04, 0.08, np.nan], 500)})
    run, code_run, first = key_runs(frame, ["a", "b"])
    code = np.repeat(code_run, np.diff(np.append(run, len(frame))))
    seen: dict = {}
    for i, key in enumerate(zip(frame["a"].astype(str), frame["b"].fillna(-1.0))):
        seen.setdefault(key, (len(seen), i))
        # common practice: factorizing a key numbers its values by first appearance
        assert code[i] == seen[key][0]
    assert list(first) == [row for _, row in seen.values()]


def test_moving_range_and_run_lengths_equal_loops():
    codes, starts, rng = random_groups(seed=2)
    stat = np.maximum(rng.standard_normal(len(codes)), 0.0)
    carried_by_group = rng.integers(0, 5, codes.max() + 1).astype(float)
    carried = carried_by_group[codes]
    mr = moving_range(stat, starts)
    n_plain = cusum_run_length(stat, starts)
    n_carry = cusum_run_length(stat, starts, carried_by_group[np.unique(codes)])
    for rows in per_group(codes):
        assert np.isnan(mr[rows[0]]) and np.allclose(mr[rows[1:]], np.abs(np.diff(stat[rows])))
        run, zero_seen = 0, False
        for j, i in enumerate(rows):
            run = 0 if stat[i] <= 0 else run + 1
            zero_seen |= stat[i] <= 0
            # Montgomery 9.1.2: N counts the periods since the statistic was last zero
            assert n_plain[i] == run
            assert n_carry[i] == run + (0 if zero_seen else carried[i])


def test_quesenberry_rows_subset_equals_full():
    codes, starts, rng = random_groups(seed=3)
    x = rng.normal(0, 0.01, len(codes))
    sigma = rng.uniform(0.008, 0.012, len(codes))
    full = quesenberry_q(x, starts, sigma)
    rows = np.flatnonzero(rng.random(len(codes)) < 0.3)
    part = quesenberry_q(x, starts, sigma[rows], rows=rows)
    for a, b in zip(full, part):
        np.testing.assert_array_equal(a[rows], b)
    for grp in per_group(codes):
        for j, i in enumerate(grp[:4]):
            mean = x[grp[:j]].mean() if j else 0.0
            scale = sigma[i] * np.sqrt((j + 1) / j) if j else sigma[i]
            # Quesenberry (1991) JQT 23:213-224: Q_r = sqrt((r-1)/r) (x_r - mean of x_1..x_{r-1}) / sigma
            assert abs(full[0][i] - (x[i] - mean) / scale) < 1e-9


def test_ewma_with_carried_counts_equals_loop():
    codes, starts, rng = random_groups(seed=4)
    z = rng.standard_normal(len(codes))
    n_groups = codes.max() + 1
    init, count0 = rng.standard_normal(n_groups) * 0.2, rng.integers(0, 30, n_groups).astype(float)
    present = np.unique(codes)
    res = ewma(z, starts, lam=0.1, L=2.7, init=init[present], count0=count0[present])
    for g, rows in zip(present, per_group(codes)):
        e = init[g]
        for j, i in enumerate(rows):
            e = 0.1 * z[i] + 0.9 * e
            c = count0[g] + j + 1
            # Roberts (1959) recursion; Lucas & Saccucci (1990) exact limits after c points
            assert abs(res.ewma[i] - e) < 1e-12
            assert abs(res.ucl[i] - 2.7 * np.sqrt(0.1 / 1.9 * (1 - 0.9 ** (2 * c)))) < 1e-12


def plain_rules(z, rule_set):
    """Each rule by its definition, one point at a time (no windows shared across rules)."""
    out = []
    for name in RULES[rule_set]:
        for side in ("up", "down"):
            s = 1.0 if side == "up" else -1.0
            hits = []
            for i in range(len(z)):
                def last(w):
                    return s * z[i - w + 1:i + 1] if i >= w - 1 else None
                d = np.diff(z[max(i - 15, 0):i + 1])
                rule = {"WE1": lambda: s * z[i] > 3, "N1": lambda: s * z[i] > 3,
                        "WE2": lambda: last(3) is not None and (last(3) > 2).sum() >= 2,
                        "N5": lambda: last(3) is not None and (last(3) > 2).sum() >= 2,
                        "WE3": lambda: last(5) is not None and (last(5) > 1).sum() >= 4,
                        "N6": lambda: last(5) is not None and (last(5) > 1).sum() >= 4,
                        "WE4": lambda: last(8) is not None and (last(8) > 0).all(),
                        "N2": lambda: last(9) is not None and (last(9) > 0).all(),
                        "N3": lambda: i >= 5 and (s * d[-5:] > 0).all(),
                        "N4": lambda: side == "up" and i >= 13 and (d[-13:][1:] * d[-13:][:-1] < 0).all(),
                        "N7": lambda: side == "up" and i >= 14 and (np.abs(z[i - 14:i + 1]) < 1).all(),
                        "N8": lambda: side == "up" and i >= 7 and (np.abs(z[i - 7:i + 1]) > 1).all()}[name]()
                hits.append(bool(rule))
            out += [(i, name, side) for i in range(len(z)) if hits[i] and not (i and hits[i - 1])]
    return sorted(out, key=lambda e: (e[0], e[1]))


@pytest.mark.parametrize("rule_set", ["western_electric", "nelson"])
def test_run_rules_equal_definitions_on_random_segments(rule_set):
    codes, starts, rng = random_groups(n=1200, groups=15, seed=5)
    z = rng.standard_normal(len(codes)) * 1.3 + np.repeat(rng.normal(0, 1, 15), 80)[:len(codes)]
    ev = apply_run_rules(z, starts, rule_set).events
    got = sorted(zip(ev["row"], ev["rule"].astype(str), ev["direction"].astype(str)), key=lambda e: (e[0], e[1]))
    want = []
    for rows in per_group(codes):
        want += [(rows[i], name, side) for i, name, side in plain_rules(z[rows], rule_set)]
    # Western Electric (1956) rules 1-4 and Nelson (1984) tests 1-8, each restarting per segment
    assert sorted(got) == sorted(want)


def test_xbar_s_without_sort_equals_sorted_path():
    rng = np.random.default_rng(6)
    n = 4000
    t = pd.Timestamp("2025-01-01") + pd.to_timedelta(np.cumsum(rng.integers(1, 9, n)), unit="min")
    frame = pd.DataFrame({"check_id": np.arange(n), "instrument_id": pd.Categorical(rng.choice(["A", "B", "C"], n)),
                          "level": rng.choice([0.04, 0.08], n), "check_type": rng.choice(["control", "daily"], n),
                          "measured_at": t, "z": rng.standard_normal(n)})
    ordered = frame.sort_values(["instrument_id", "level", "measured_at"], kind="stable").reset_index(drop=True)
    fast, rows = xbar_s_groups(ordered, 10, with_rows=True)
    slow = xbar_s_groups(ordered.iloc[::-1].reset_index(drop=True), 10)  # not in order: grouped by sorting
    # common practice: the same replicate groups whichever order the checks arrive in
    pd.testing.assert_frame_equal(fast, slow, check_exact=False, rtol=1e-12)
    assert list(ordered["check_id"].to_numpy()[rows]) == list(fast["check_id"])
    order, g = replicate_groups(ordered, 10)
    assert (np.bincount(g) >= 2).sum() == len(fast)


def test_pooled_sigma_equals_plain_groupby():
    rng = np.random.default_rng(7)
    gid = np.repeat(np.arange(120), 30)
    frame = pd.DataFrame({"technology": rng.choice(["fuel_cell", "infrared"], 120)[gid],
                          "standard_kind": rng.choice(["wet_bath", "dry_gas"], len(gid)), "level": 0.08, "gid": gid,
                          "relative_error": rng.normal(0, 0.01, len(gid))})
    got = pooled_sigma(frame, group_starts(gid)).set_index(["technology", "standard_kind", "level"])
    mr = frame.groupby("gid")["relative_error"].diff().abs()
    ref = frame.assign(mr=mr).dropna().groupby(["technology", "standard_kind", "level"])["mr"].agg(["mean", "size"])
    # Montgomery 6.4: sigma = MR-bar / d2(2), d2(2) = 1.128 (ours computed)
    np.testing.assert_allclose(got["sigma"].loc[ref.index], ref["mean"] / 1.1283791671, rtol=1e-6)
    assert list(got["n_pairs"].loc[ref.index]) == list(ref["size"])


def test_own_estimates_equal_loop_with_carried_positions():
    codes, starts, rng = random_groups(n=4000, groups=90, seed=8)
    x = rng.normal(0, 0.01, len(codes))
    seg = Segments.from_starts(starts)
    # Some groups continue a segment charted earlier: their check numbers start above 0.
    offset = rng.choice([0, 0, 3, 25], codes.max() + 1)[codes]
    pos = seg.pos + offset
    est = own_estimates(x, starts, pos, 20, seg=seg).set_index("group")
    expected = {}
    for g, rows in enumerate(per_group(codes)):
        first = rows[pos[rows] < 20]
        if len(first) == 20 and pos[first[0]] == 0:
            expected[g] = (x[first].mean(), np.abs(np.diff(x[first])).mean() / 1.1283791671, first[-1])
    assert len(expected) > 10 and sorted(est.index) == sorted(expected)
    for g, (center, sigma, row) in expected.items():
        # Montgomery 6.4: phase I centre = mean and sigma = MR-bar / d2(2) of the segment's first 20 checks
        assert abs(est.loc[g, "center"] - center) < 1e-15 and abs(est.loc[g, "sigma"] / sigma - 1) < 1e-9
        assert est.loc[g, "row"] == row


def test_ewma_counts_must_be_whole():
    with pytest.raises(ValueError, match="whole numbers"):
        ewma(np.zeros(3), lam=0.1, L=2.7, count0=1.5)


def test_pooled_lookup_of_some_rows_equals_a_row_by_row_merge():
    from pipeline.charts.analyse import pooled_lookup

    rng = np.random.default_rng(12)
    n = 2000
    frame = pd.DataFrame({"technology": pd.Categorical(rng.choice(["fuel_cell", "infrared"], n)),
                          "standard_kind": pd.Categorical(rng.choice(["wet_bath", "dry_gas"], n)),
                          "level": rng.choice([0.04, 0.08, 0.15], n)}).sort_values(["technology", "level"])
    frame = frame.reset_index(drop=True)
    pooled = pd.DataFrame({"technology": ["fuel_cell", "fuel_cell", "infrared"], "standard_kind": ["wet_bath"] * 3,
                           "level": [0.04, 0.08, 0.08], "sigma": [0.011, 0.012, 0.009]})
    merged = frame.astype(str).astype({"level": float}).merge(pooled, how="left", on=["technology", "standard_kind",
                                                                                       "level"])["sigma"].to_numpy()
    rows = np.sort(rng.choice(n, 300, replace=False))
    # common practice: a lookup of a key in a table; keys without an entry are missing (NaN)
    np.testing.assert_array_equal(pooled_lookup(frame, pooled), merged)
    np.testing.assert_array_equal(pooled_lookup(frame, pooled, rows), merged[rows])


def test_narrowest_codes_keep_values_and_sort_order():
    from pipeline.charts.grouping import narrowest_codes

    rng = np.random.default_rng(5)
    for top, dtype in ((100, np.int8), (30_000, np.int16), (70_000, np.int64)):
        codes = rng.integers(0, top, 10_000)
        narrow = narrowest_codes(codes)
        assert narrow.dtype == dtype and np.array_equal(narrow, codes)
        assert np.array_equal(np.argsort(narrow, kind="stable"), np.argsort(codes, kind="stable"))
    with_missing = np.array([3, -1, 2])  # a categorical's code for a missing value stays as it is
    assert narrowest_codes(with_missing).dtype == with_missing.dtype
