"""Generate the invented demo fleet: reference tables, monthly exports in several layouts,
a file of broken rows, a manifest (ingest order) and the truth (planted faults).

Entry point: `generate_demo_fleet(out_dir, instruments=300, months=18, seed=20261129, end=date(2026, 11, 29))`.
"""

from __future__ import annotations

import json
import shutil
from dataclasses import dataclass
from datetime import date, datetime, timedelta, timezone
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd

from demo_fleet.checks import simulate_month
from demo_fleet.scenario import (
    AGENCY, DAY, KINDS, LEVELS, REGIONS, ZONES, Scenario, build_scenario, month_starts,
)
from demo_fleet.writers import CANONICAL_COLUMNS, LAYOUT_CODES, copy_rows, month_table

PROFILES_DIR = Path(__file__).resolve().parent / "profiles"
DEFAULT_END = date(2026, 11, 29)
DEFAULT_SEED = 20261129
LAYOUT_DIRS = {"canonical": "checks", "mgl": "mgl", "ugdl": "ugdl", "local": "local"}


@dataclass(frozen=True)
class DemoFleet:
    """What `generate_demo_fleet` wrote."""

    out_dir: Path
    manifest: Path
    truth: Path
    instruments: int
    months: int
    seed: int
    start: date
    end: date
    sites: int
    lots: int
    service_events: int
    checks: int                     # good check rows over all layouts (re-export and planted rows excluded)
    files: tuple[Path, ...]         # every data file written, relative to out_dir


def _iso_utc(t: np.ndarray) -> np.ndarray:
    return pd.to_datetime(t, unit="s").strftime("%Y-%m-%dT%H:%M:%S+00:00").to_numpy()


def _service_events(sc: Scenario) -> pd.DataFrame:
    ids = sc.instruments["instrument_id"].to_numpy()
    frames = []
    keep = (sc.cal_start >= sc.unit_in_service[sc.cal_unit]) & (sc.cal_start < sc.t_end)
    kind = np.where(sc.cal_kind == "initial", "calibration", sc.cal_kind)[keep]
    notes = np.where(kind == "sensor_replacement", "fuel cell replaced, recalibrated", "scheduled calibration")
    frames.append(pd.DataFrame({"u": sc.cal_unit[keep], "t": sc.cal_start[keep], "event_type": kind, "notes": notes}))
    # solution changes on the 1st and the 16th at 02:30 local, for wet-bath units
    n_days = sc.midnight_utc.shape[1] - 1
    dom = np.array([(sc.start + timedelta(days=int(d))).day for d in range(n_days)])
    change_days = np.flatnonzero((dom == 1) | (dom == 16))
    wet = np.flatnonzero(sc.unit_kind == 0)
    u = np.repeat(wet, len(change_days))
    d = np.tile(change_days, len(wet))
    t = sc.midnight_utc[sc.site_zone[sc.unit_site[u]], d] + 9000
    ok = (t >= sc.unit_in_service[u]) & (t < sc.unit_stop[u])
    frames.append(pd.DataFrame({"u": u[ok], "t": t[ok], "event_type": "solution_change",
                                "notes": "simulator solution replaced"}))
    gu, g0, g1 = sc.unit_gap
    hu, h0, h1 = sc.heater
    extra = [(gu, g0 - 3600, "out_of_service", "display fault, taken out of service"),
             (gu, g1 - 3600, "return_to_service", "display replaced")]
    if h1 < sc.t_end:
        extra.append((hu, h1 - 1800, "repair", "simulator heater controller replaced"))
    frames.append(pd.DataFrame(extra, columns=["u", "t", "event_type", "notes"]))
    ev = pd.concat(frames, ignore_index=True)
    ev["instrument_id"] = ids[ev["u"].to_numpy()]
    ev = ev.sort_values(["instrument_id", "t", "event_type"], kind="stable")
    ev["event_at"] = _iso_utc(ev["t"].to_numpy())
    return ev[["instrument_id", "event_at", "event_type", "notes"]].drop_duplicates(
        ["instrument_id", "event_at", "event_type"])


def _dst_days(sc: Scenario, zone: str) -> list[tuple[date, str]]:
    """Local dates in the scenario with a daylight-saving change in `zone`: (date, 'spring'|'fall')."""
    mid = sc.midnight_utc[ZONES.index(zone)]
    out = []
    for d in np.flatnonzero(np.diff(mid) != DAY):
        out.append((sc.start + timedelta(days=int(d)), "spring" if mid[d + 1] - mid[d] < DAY else "fall"))
    return out


def _planted_local_rows(sc: Scenario, month: date) -> list[tuple[list[str], str]]:
    """Rows of the `local` layout at wall-clock times inside a DST gap or overlap of their site's zone."""
    sites = np.flatnonzero(sc.site_layout == "local")
    units = np.flatnonzero(np.isin(sc.unit_site, sites) & (sc.unit_in_service < sc.t0))
    if len(units) == 0:
        return []
    u = int(units[0])
    s = int(sc.unit_site[u])
    zone = ZONES[sc.site_zone[s]]
    kind = int(sc.unit_kind[u])
    rows = []
    for day, which in _dst_days(sc, zone):
        if (day.year, day.month) != (month.year, month.month):
            continue
        mi = (day.year - sc.start.year) * 12 + day.month - sc.start.month
        lot = sc.lots["lot_id"].iloc[sc.lot_table[kind, 1, mi // 3, (u * 7 + mi) % 2]]
        times = ("02:12:40", "02:47:05") if which == "spring" else ("01:14:20", "01:41:55")
        reason = "nonexistent_local_time" if which == "spring" else "ambiguous_local_time"
        for i, hhmmss in enumerate(times):
            rows.append(([sc.instruments["instrument_id"].iloc[u], f"{day.isoformat()} {hhmmss}", lot, "control",
                          "0.080", f"0.0{79 + i}", "g/210L", "34.01" if kind == 0 else "",
                          "" if kind == 0 else "99.1", sc.sites["site_id"].iloc[s],
                          sc.operator_codes[sc.site_op_start[s]], "pass"], reason))
    return rows


def _broken_rows(sc: Scenario) -> tuple[list[str], list[tuple[int, str]]]:
    """One bad row per quarantine reason, as raw CSV lines, and (line, reason) pairs."""
    zones_dst = [ZONES.index(z) for z in ZONES if z != "America/Phoenix"]
    u = int(np.flatnonzero(np.isin(sc.site_zone[sc.unit_site], zones_dst) & (sc.unit_in_service < sc.t0))[0])
    s = int(sc.unit_site[u])
    kind = int(sc.unit_kind[u])
    iid = sc.instruments["instrument_id"].iloc[u]
    site = sc.sites["site_id"].iloc[s]
    op = sc.operator_codes[sc.site_op_start[s]]
    lot = sc.lots["lot_id"].iloc[sc.lot_table[kind, 1, sc.lot_table.shape[2] - 1, 0]]    # the last quarter's
    temp, press = ("34.02", "") if kind == 0 else ("", "84.3")
    day = (sc.end - timedelta(days=5)).isoformat()
    in_service = date.fromisoformat(sc.instruments["in_service_on"].iloc[u])

    def row(**over: str) -> str:
        base = {"instrument_id": iid, "local_time": f"{day} 10:17:{len(rows) + 1:02d}", "lot_id": lot,
                "check_type": "daily", "target": "0.080", "measured": "0.081", "units": "g/210L",
                "simulator_temp_c": temp, "pressure_kpa": press, "site_id": site, "operator_id": op,
                "outcome": "pass"}
        base.update(over)
        return ",".join(base.values())

    # DST dates of the site's zone, fixed by the rules in force (US rules since 2007, IANA tz database)
    spring = next(d for d in (date(y, 3, 8) + timedelta(days=(6 - date(y, 3, 8).weekday()) % 7)
                              for y in range(sc.end.year, 2000, -1)) if d <= sc.end)
    fall = next(d for d in (date(y, 11, 1) + timedelta(days=(6 - date(y, 11, 1).weekday()) % 7)
                            for y in range(sc.end.year, 2000, -1)) if d <= sc.end)
    rows: list[str] = []
    expected: list[tuple[int, str]] = []
    cases = [
        ("malformed_line", lambda: row() + ",EXTRA,FIELDS"),
        ("missing_field", lambda: row(lot_id="")),
        ("unparsable_field", lambda: row(measured="0.0B1")),
        ("unknown_unit", lambda: row(units="mg/dL")),
        ("out_of_range", lambda: row(measured="3.900")),
        ("nonexistent_local_time", lambda: row(local_time=f"{spring.isoformat()} 02:30:00")),
        ("ambiguous_local_time", lambda: row(local_time=f"{fall.isoformat()} 01:30:00")),
        ("future_timestamp", lambda: row(local_time="2031-06-01 10:00:00")),
        ("before_in_service", lambda: row(local_time=f"{in_service - timedelta(days=20)} 10:00:00")),
        ("unknown_lot", lambda: row(lot_id="WB080-0000-Z")),
        ("unknown_instrument", lambda: row(instrument_id="ZZ000000")),
        ("unknown_check_type", lambda: row(check_type="warmup")),
        ("unknown_outcome", lambda: row(outcome="maybe")),
    ]
    for reason, make in cases:
        rows.append(make())
        expected.append((len(rows) + 1, reason))
    return rows, expected


def generate_demo_fleet(out_dir: str | Path, instruments: int = 300, months: int = 18, seed: int = DEFAULT_SEED,
                        end: date = DEFAULT_END) -> DemoFleet:
    """Write the invented demo fleet into `out_dir` (created; earlier demo files there are replaced).

    Parameters:
        out_dir: target directory.
        instruments: number of units (at least 12, for the planted faults).
        months: calendar months of checks, the last one ending on `end`.
        seed: the same arguments give byte-identical files.
        end: last day with checks.
    Returns:
        DemoFleet with paths and counts.
    """
    if instruments < 12:
        raise ValueError("instruments must be at least 12 (the planted faults need distinct units)")
    if months < 1:
        raise ValueError("months must be at least 1")
    out = Path(out_dir)
    for sub in ("reference", "checks", "mgl", "ugdl", "local", "reexport", "broken", "demo_fleet"):
        shutil.rmtree(out / sub, ignore_errors=True)
    out.mkdir(parents=True, exist_ok=True)
    sc = build_scenario(instruments, months, seed, end)
    files: list[Path] = []

    ref = out / "reference"
    ref.mkdir()
    sc.sites.to_csv(ref / "sites.csv", index=False)
    sc.instruments.to_csv(ref / "instruments.csv", index=False)
    sc.lots.to_csv(ref / "lots.csv", index=False)
    events = _service_events(sc)
    events.to_csv(ref / "service_events.csv", index=False)
    files += [Path("reference") / f for f in ("sites.csv", "instruments.csv", "lots.csv", "service_events.csv")]

    con = duckdb.connect()
    con.execute("SET threads TO 2")
    con.execute("SET preserve_insertion_order = true")
    starts = month_starts(end, months)
    re_month = max(0, months - 2)
    layouts_present = [lay for lay in ("canonical", "mgl", "ugdl", "local") if (sc.site_layout == lay).any()]
    n_checks = 0
    reexport = {"month": None, "duplicates": 0, "new": 0}
    planted: list[dict] = []
    per_unit_month = []
    file_rows: dict[str, int] = {}
    for i, ms in enumerate(starts):
        m = simulate_month(sc, ms, i)
        if i == re_month:
            rng = np.random.default_rng([seed, 9300, i])
            canon = sc.site_layout[m["site"]] == "canonical"
            m["held_back"] = canon & (rng.random(len(m["t"])) < 0.015)
        table = month_table(sc, m)
        con.register("month", table)
        tag = f"{ms:%Y-%m}"
        for lay in layouts_present:
            code = LAYOUT_CODES[lay]
            name = f"checks-{tag}.csv" if lay == "canonical" else f"{lay}-{tag}.csv"
            path = Path(LAYOUT_DIRS[lay]) / name
            rows = copy_rows(con, lay, f"m.layout = {code} AND NOT m.held_back", out / path)
            n_checks += rows
            file_rows[path.as_posix()] = rows
            files.append(path)
            if lay == "local":
                extra = _planted_local_rows(sc, ms)
                if extra:
                    n_lines = sum(1 for _ in open(out / path, encoding="utf-8"))
                    with open(out / path, "a", encoding="utf-8", newline="") as fh:
                        for k, (cells, reason) in enumerate(extra):
                            fh.write(",".join(cells) + "\n")
                            planted.append({"path": path.as_posix(), "line": n_lines + k + 1, "reason": reason})
        if i == re_month:
            mid = int(np.median(m["t"]))
            path = Path("reexport") / f"checks-{tag}-reexport.csv"
            where = f"m.layout = 0 AND (m.held_back OR epoch(m.local_ts) - m.offset_min * 60 >= {mid})"
            file_rows[path.as_posix()] = copy_rows(con, "canonical", where, out / path)
            canon = sc.site_layout[m["site"]] == "canonical"
            reexport = {"month": tag, "path": path.as_posix(),
                        "duplicates": int((canon & ~m["held_back"] & (m["t"] >= mid)).sum()),
                        "new": int(m["held_back"].sum())}
            n_checks += reexport["new"]
            files.append(path)
        per_unit_month.append(np.bincount(m["unit"], minlength=sc.n_units))
        con.unregister("month")
        del m, table
    con.close()

    broken_lines, expected = _broken_rows(sc)
    (out / "broken").mkdir()
    (out / "broken" / "broken-rows.csv").write_text(
        ",".join(["instrument_id", "local_time", *CANONICAL_COLUMNS[2:]]) + "\n" + "\n".join(broken_lines) + "\n",
        encoding="utf-8")
    (out / "broken" / "broken-rows.expected.csv").write_text(
        "line,reason\n" + "".join(f"{ln},{r}\n" for ln, r in expected), encoding="utf-8")
    files.append(Path("broken") / "broken-rows.csv")

    prof_dir = out / "demo_fleet" / "profiles"
    prof_dir.mkdir(parents=True)
    for p in sorted(PROFILES_DIR.glob("*.toml")):
        shutil.copyfile(p, prof_dir / p.name)

    manifest = [{"path": f"reference/{t}.csv", "profile": None, "table": t}
                for t in ("sites", "instruments", "lots", "service_events")]
    for lay in layouts_present:
        glob = "checks/checks-*.csv" if lay == "canonical" else f"{lay}/{lay}-*.csv"
        manifest.append({"path": glob, "profile": None if lay == "canonical" else f"demo_fleet/profiles/{lay}.toml",
                         "table": "checks"})
    if reexport["month"]:
        manifest.append({"path": "reexport/*.csv", "profile": None, "table": "checks"})
    manifest.append({"path": "broken/broken-rows.csv", "profile": "demo_fleet/profiles/broken.toml", "table": "checks"})
    (out / "manifest.json").write_text(json.dumps(manifest, indent=2) + "\n", encoding="utf-8")

    for p in planted:
        file_rows[p["path"]] += 1
    file_rows["broken/broken-rows.csv"] = len(broken_lines)
    truth = _truth(sc, events, planted, reexport, expected, n_checks, np.vstack(per_unit_month))
    truth["data_rows_per_file"] = file_rows
    (out / "truth.json").write_text(json.dumps(truth, indent=2) + "\n", encoding="utf-8")

    return DemoFleet(out_dir=out, manifest=out / "manifest.json", truth=out / "truth.json",
                     instruments=instruments, months=months, seed=seed, start=sc.start, end=end,
                     sites=len(sc.sites), lots=len(sc.lots), service_events=len(events), checks=n_checks,
                     files=tuple(files))


def _ts(t: int) -> str:
    return datetime.fromtimestamp(int(t), tz=timezone.utc).strftime("%Y-%m-%dT%H:%M:%S+00:00")


def _truth(sc: Scenario, events: pd.DataFrame, planted: list[dict], reexport: dict,
           expected: list[tuple[int, str]], n_checks: int, per_unit_month: np.ndarray) -> dict:
    ids = sc.instruments["instrument_id"].to_numpy()
    lots = sc.lots["lot_id"].to_numpy()
    bad_lots = []
    for idx in np.flatnonzero(np.abs(sc.lot_true / sc.lots["target"].to_numpy() - 1.0) > 0.02):
        bad_lots.append({"lot_id": lots[idx], "standard_kind": sc.lots["standard_kind"].iloc[idx],
                         "true_bias_pct": round(float((sc.lot_true[idx] / sc.lots["target"].iloc[idx] - 1) * 100), 3)})
    faults = []
    for u, onset, fixed, slope in sc.drift.itertuples(index=False):
        faults.append({"instrument_id": ids[u], "kind": "drift", "start": _ts(onset),
                       "end": _ts(fixed) if fixed > 0 else None, "active_at_end": bool(fixed < 0),
                       "slope_pct_per_30d": round(slope * 100, 3),
                       "note": "relative bias falls linearly from onset (or the last calibration) "
                               "until a sensor replacement at end"})
    su, s_at, s_size = sc.step
    faults.append({"instrument_id": ids[su], "kind": "step", "start": _ts(s_at), "end": None, "active_at_end": True,
                   "size_pct": round(s_size * 100, 3)})
    faults.append({"instrument_id": ids[sc.noisy], "kind": "noisy", "start": _ts(sc.t0), "end": None,
                   "active_at_end": True,
                   "sd_pct": round(float(sc.unit_sd[sc.noisy]) * 100, 3)})
    hu, h0, h1 = sc.heater
    faults.append({"instrument_id": ids[hu], "kind": "heater_fault", "start": _ts(h0),
                   "end": _ts(h1) if h1 < sc.t_end else None, "active_at_end": bool(h1 >= sc.t_end),
                   "temperature_c": [34.6, 35.0],
                   "note": "simulator runs hot; readings high by exp(0.06583 (T - 34)); logged temperature is true"})
    silent = int(np.flatnonzero(sc.unit_stop < sc.t_end)[0])
    faults.append({"instrument_id": ids[silent], "kind": "silent", "start": _ts(sc.unit_stop[silent]), "end": None,
                   "active_at_end": True,
                   "site_id": sc.sites["site_id"].iloc[sc.unit_site[silent]]})
    faults.append({"instrument_id": ids[sc.abort_unit], "kind": "elevated_aborts", "start": _ts(sc.t0), "end": None,
                   "active_at_end": True,
                   "abort_rate": float(sc.unit_abort_rate[sc.abort_unit])})
    gu, g0, g1 = sc.unit_gap
    return {
        "agency": AGENCY,
        "seed": sc.seed, "start": sc.start.isoformat(), "end": sc.end.isoformat(),
        "regions": [{"code": r[0], "region": r[1], "time_zones": list(r[2]), "layout": r[5]} for r in REGIONS],
        "faults": faults,
        "bad_lots": bad_lots,
        "legitimate_gap": {"instrument_id": ids[gu], "out_of_service": _ts(g0 - 3600),
                           "return_to_service": _ts(g1 - 3600)},
        "newcomers": [{"instrument_id": ids[u], "in_service_on": sc.instruments["in_service_on"].iloc[u]}
                      for u in np.flatnonzero(sc.unit_in_service >= sc.t0)],
        "planted_local_time_rows": planted,
        "reexport": reexport,
        "broken_rows": [{"line": ln, "reason": r} for ln, r in expected],
        "model": {"healthy_sd_pct": [1.0, 1.5], "truncation": "3 decimals in g/210L, mg/L; 1 decimal in ug/100mL",
                  "wet_bath": "lot x exp(0.06583 (T - 34.0)) x (1 - depletion x checks since solution change)",
                  "dry_gas": "lot x P / 101.325, P from the standard atmosphere plus weather",
                  "levels": list(LEVELS), "standard_kinds": list(KINDS)},
        "counts": {"instruments": int(sc.n_units), "sites": len(sc.sites), "lots": len(sc.lots),
                   "service_events": len(events), "checks": int(n_checks),
                   "checks_per_unit_month_mean": round(float(per_unit_month.mean()), 2)},
    }
