"""Tests of the demo-fleet generator: determinism, layout, truncation, broken rows, planted faults."""

from __future__ import annotations

import csv
import filecmp
import json
import math
import re
import tomllib
from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from demo_fleet import PROFILES_DIR, generate_demo_fleet
from demo_fleet.checks import truncate3
from demo_fleet.scenario import DUBOWSKI_COEFFICIENT, standard_pressure_kpa
from pipeline.cli import main
from pipeline.errors import QuarantineReason

TO_G210L = {"g/210L": 1.0, "mg/L": 210.0 / 1000.0, "ug/100mL": 210.0 / 100000.0}


@pytest.fixture(scope="module")
def fleet(tmp_path_factory):
    return generate_demo_fleet(tmp_path_factory.mktemp("demo"), instruments=20, months=3, seed=11,
                               end=date(2026, 11, 29))


@pytest.fixture(scope="module")
def truth(fleet):
    return json.loads(fleet.truth.read_text())


def _profile(path: str | None) -> dict | None:
    return None if path is None else tomllib.loads((PROFILES_DIR / Path(path).name).read_text())


def _read_group(out: Path, entry: dict) -> pd.DataFrame:
    """Read one manifest group into canonical column names and g/210L (local times kept naive)."""
    prof = _profile(entry["profile"])
    frames = []
    for f in sorted(out.glob(entry["path"])):
        if prof is None:
            df = pd.read_csv(f, dtype=str, keep_default_na=False)
            df["measured_at"] = pd.to_datetime(df["measured_at"].str[:19])
        else:
            p = prof["profile"]
            df = pd.read_csv(f, sep=p["delimiter"], dtype=str, keep_default_na=False)
            df = df.rename(columns={v: k for k, v in prof["columns"].items()})
            fmt = prof["values"].get("time_format")
            df["measured_at"] = pd.to_datetime(df["measured_at"], format=fmt)
            if "units" in prof["values"]:
                df["units"] = prof["values"]["units"]
            for k, spellings in prof.get("outcome", {}).items():
                df.loc[df["outcome"].isin(spellings), "outcome"] = k
            for k, spellings in prof.get("check_type", {}).items():
                df.loc[df["check_type"].isin(spellings), "check_type"] = k
            for col in ("target", "measured", "simulator_temp_c", "pressure_kpa"):
                df[col] = df[col].str.replace(p["decimal"], ".", regex=False)
        for col in ("target", "measured", "simulator_temp_c", "pressure_kpa"):
            df[col] = pd.to_numeric(df[col].replace("", None))
        factor = df["units"].map(TO_G210L)
        df["target"] *= factor
        df["measured"] *= factor
        frames.append(df)
    return pd.concat(frames, ignore_index=True)


@pytest.fixture(scope="module")
def checks(fleet):
    """All good check rows of the fleet (every layout, without re-export and broken rows), in g/210L."""
    manifest = json.loads(fleet.manifest.read_text())
    groups = [e for e in manifest if e["table"] == "checks" and not e["path"].startswith(("reexport", "broken"))]
    df = pd.concat([_read_group(fleet.out_dir, e) for e in groups], ignore_index=True)
    expected = np.where(df["simulator_temp_c"].notna(),
                        df["target"] * np.exp(DUBOWSKI_COEFFICIENT * (df["simulator_temp_c"] - 34.0)),
                        df["target"] * df["pressure_kpa"] / 101.325)
    df["relative_error"] = df["measured"] / expected - 1.0
    return df


def test_same_arguments_give_byte_identical_files(tmp_path):
    a = generate_demo_fleet(tmp_path / "a", instruments=14, months=2, seed=3)
    b = generate_demo_fleet(tmp_path / "b", instruments=14, months=2, seed=3)
    names = sorted(p.relative_to(a.out_dir) for p in a.out_dir.rglob("*") if p.is_file())
    assert names == sorted(p.relative_to(b.out_dir) for p in b.out_dir.rglob("*") if p.is_file())
    match, mismatch, errors = filecmp.cmpfiles(a.out_dir, b.out_dir, [str(n) for n in names], shallow=False)
    assert mismatch == [] and errors == [] and len(match) == len(names)
    c = generate_demo_fleet(tmp_path / "c", instruments=14, months=2, seed=4)
    assert (c.out_dir / "reference" / "instruments.csv").read_bytes() != \
        (a.out_dir / "reference" / "instruments.csv").read_bytes()


def test_truncation_not_rounding():
    # Results are truncated (not rounded) to three decimals (domain.md, common practice)
    assert list(truncate3(np.array([0.0799999, 0.0809999, 0.080, 0.0814, 0.1499]))) == [79, 80, 80, 81, 149]


def test_files_hold_three_decimal_results(fleet, checks):
    for f in sorted((fleet.out_dir / "checks").glob("*.csv")) + sorted((fleet.out_dir / "local").glob("*.csv")):
        with open(f, newline="") as fh:
            for row in csv.DictReader(fh):
                assert re.fullmatch(r"\d\.\d{3}", row["measured"]), (f, row)
    mgl = _profile("mgl.toml")
    for f in sorted((fleet.out_dir / "mgl").glob("*.csv")):
        values = pd.read_csv(f, sep=";", dtype=str)[mgl["columns"]["measured"]]
        assert values.str.fullmatch(r"\d,\d{3}").all()
    assert set(checks["outcome"]) <= {"pass", "fail", "aborted", "invalid"}
    assert set(checks["check_type"]) == {"control", "daily", "verification", "calibration"}


def test_canonical_timestamps_carry_an_offset(fleet):
    files = sorted((fleet.out_dir / "checks").glob("checks-*.csv"))
    assert files
    for f in files:
        stamps = pd.read_csv(f, dtype=str)["measured_at"]
        assert stamps.str.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d[+-]\d\d:\d\d").all()


def test_layout_matches_manifest(fleet):
    manifest = json.loads(fleet.manifest.read_text())
    assert [e["table"] for e in manifest[:4]] == ["sites", "instruments", "lots", "service_events"]
    matched: list[Path] = []
    for entry in manifest:
        files = sorted(fleet.out_dir.glob(entry["path"]))
        assert files, entry
        matched += files
        prof = _profile(entry["profile"])
        if prof is not None:
            assert (fleet.out_dir / entry["profile"]).is_file()       # the profile travels with the data
            assert prof["profile"]["table"] == entry["table"]
            with open(files[0], encoding=prof["profile"]["encoding"]) as fh:
                header = fh.readline().rstrip("\n").split(prof["profile"]["delimiter"])
            assert set(prof["columns"].values()) <= set(header)
            if "time_zone_column" in prof["values"]:
                assert prof["values"]["time_zone_column"] in header
    data_files = {p for p in fleet.out_dir.rglob("*.csv") if p.name != "broken-rows.expected.csv"}
    assert sorted(data_files) == sorted(set(matched)) and len(matched) == len(set(matched))
    assert {fleet.out_dir / f for f in fleet.files} == data_files


def test_truth_counts_every_data_row(fleet, truth):
    for path, rows in truth["data_rows_per_file"].items():
        with open(fleet.out_dir / path, encoding="utf-8") as fh:
            assert sum(1 for _ in fh) - 1 == rows, path
    regular = sum(r for p, r in truth["data_rows_per_file"].items() if not p.startswith(("reexport", "broken")))
    assert regular - len(truth["planted_local_time_rows"]) + truth["reexport"]["new"] == fleet.checks


def test_profiles_use_only_documented_keys():
    # The profile format of DEVELOPERS.md ("How to add a source profile")
    allowed = {"profile": {"name", "table", "delimiter", "decimal", "encoding", "header"},
               "columns": None, "values": {"units", "time_format", "time_zone", "time_zone_column",
                                           "time_zone_from_site"},
               "outcome": {"pass", "fail", "aborted", "invalid"},
               "check_type": {"control", "daily", "verification", "calibration"}}
    canonical = {"instrument_id", "measured_at", "lot_id", "check_type", "target", "measured", "units",
                 "simulator_temp_c", "pressure_kpa", "site_id", "operator_id", "outcome"}
    profiles = sorted(PROFILES_DIR.glob("*.toml"))
    assert len(profiles) >= 4
    for p in profiles:
        prof = tomllib.loads(p.read_text())
        assert set(prof) <= set(allowed), p
        for section, keys in prof.items():
            assert set(keys) <= (canonical if allowed[section] is None else allowed[section]), (p, section)
        zone_keys = {"time_zone", "time_zone_column", "time_zone_from_site"} & set(prof["values"])
        assert len(zone_keys) == 1, p


def test_broken_rows_cover_every_quarantine_reason(fleet):
    expected = pd.read_csv(fleet.out_dir / "broken" / "broken-rows.expected.csv")
    assert set(expected["reason"]) == {r.value for r in QuarantineReason}
    lines = (fleet.out_dir / "broken" / "broken-rows.csv").read_text().splitlines()
    # physical lines, header = line 1
    assert sorted(expected["line"]) == list(range(2, len(lines) + 1))
    width = len(lines[0].split(","))
    malformed = int(expected.loc[expected["reason"] == "malformed_line", "line"].iloc[0])
    assert len(lines[malformed - 1].split(",")) != width
    assert all(len(lines[ln - 1].split(",")) == width for ln in expected["line"] if ln != malformed)


def test_planted_local_times_fall_in_a_gap_or_overlap(fleet, truth):
    from zoneinfo import ZoneInfo
    from datetime import datetime, timezone
    sites = pd.read_csv(fleet.out_dir / "reference" / "sites.csv").set_index("site_id")
    planted = truth["planted_local_time_rows"]
    # 2026-11-01 is a fall-back day in the US zones inside this window (IANA tz database via zoneinfo)
    assert {p["reason"] for p in planted} == {"ambiguous_local_time"}
    for p in planted:
        line = (fleet.out_dir / p["path"]).read_text().splitlines()[p["line"] - 1].split(",")
        zone = ZoneInfo(sites.loc[line[9], "time_zone"])
        naive = datetime.fromisoformat(line[1])
        offsets = {naive.replace(fold=f, tzinfo=zone).utcoffset() for f in (0, 1)}
        roundtrip = naive.replace(tzinfo=zone).astimezone(timezone.utc).astimezone(zone).replace(tzinfo=None)
        assert len(offsets) == 2 or roundtrip != naive


def test_reexport_overlaps_its_canonical_month(fleet, truth):
    re_path = fleet.out_dir / truth["reexport"]["path"]
    month = fleet.out_dir / "checks" / f"checks-{truth['reexport']['month']}.csv"
    again = set(re_path.read_text().splitlines()[1:])
    original = set(month.read_text().splitlines()[1:])
    assert len(again & original) == truth["reexport"]["duplicates"] > 0
    assert len(again - original) == truth["reexport"]["new"] > 0


def test_drifting_unit_loses_sensitivity(checks, truth):
    drift = [f for f in truth["faults"] if f["kind"] == "drift"]
    assert len(drift) >= 2
    assert all(isinstance(f["active_at_end"], bool) for f in truth["faults"])
    assert drift[-1]["end"] is None and drift[-1]["active_at_end"]
    f = drift[0]
    start = pd.Timestamp(f["start"]).tz_localize(None)
    end = pd.Timestamp(f["end"]).tz_localize(None) if f["end"] else checks["measured_at"].max()
    rows = checks[(checks["instrument_id"] == f["instrument_id"]) & checks["outcome"].isin(["pass", "fail"])
                  & (checks["measured_at"] > start + pd.Timedelta(days=1)) & (checks["measured_at"] < end)]
    days = (rows["measured_at"] - start).dt.total_seconds() / 86400
    slope_per_30d = np.polyfit(days, rows["relative_error"], 1)[0] * 30
    assert slope_per_30d < 0
    assert slope_per_30d == pytest.approx(f["slope_pct_per_30d"] / 100, rel=0.5)


def test_bad_lots_bias_their_readings(checks, truth):
    faulty = [f["instrument_id"] for f in truth["faults"] if f["kind"] in ("drift", "step", "noisy", "heater_fault")]
    usable = checks[checks["outcome"].isin(["pass", "fail"]) & (checks["check_type"] != "verification")
                    & ~checks["instrument_id"].isin(faulty)]
    by_lot = usable.groupby(["lot_id", "instrument_id"])["relative_error"].median().groupby("lot_id").median()
    bad = [b["lot_id"] for b in truth["bad_lots"]]
    assert len(bad) == 2 and {b["standard_kind"] for b in truth["bad_lots"]} == {"wet_bath", "dry_gas"}
    for lot in truth["bad_lots"]:
        prefix = lot["lot_id"][:5]                  # same kind and level
        peers = by_lot[by_lot.index.str.startswith(prefix) & ~by_lot.index.isin(bad)]
        assert len(peers) >= 1
        # against lots of the same kind and level, so unit drift and truncation cancel
        assert (by_lot[lot["lot_id"]] - peers.median()) * 100 == pytest.approx(lot["true_bias_pct"], abs=1.5)


def test_step_noisy_silent_and_abort_units(checks, truth):
    faults = {f["kind"]: f for f in truth["faults"]}
    usable = checks[checks["outcome"].isin(["pass", "fail"])]
    step = usable[usable["instrument_id"] == faults["step"]["instrument_id"]]
    at = pd.Timestamp(faults["step"]["start"]).tz_localize(None)
    jump = step.loc[step["measured_at"] > at + pd.Timedelta(days=1), "relative_error"].mean() - \
        step.loc[step["measured_at"] < at - pd.Timedelta(days=1), "relative_error"].mean()
    assert jump * 100 == pytest.approx(faults["step"]["size_pct"], abs=1.5)
    # repeatability from successive differences (slow drift, lot and depletion changes cancel)
    seq = usable[usable["check_type"] != "verification"].sort_values(["instrument_id", "measured_at"])
    sd = seq.groupby("instrument_id")["relative_error"].apply(lambda s: s.diff().std() / math.sqrt(2))
    assert sd[faults["noisy"]["instrument_id"]] > 2.5 * sd.drop(faults["noisy"]["instrument_id"]).median()
    silent = faults["silent"]
    last = checks.groupby("instrument_id")["measured_at"].max()
    site_units = checks.loc[checks["site_id"] == silent["site_id"], "instrument_id"].unique()
    stop = pd.Timestamp(silent["start"]).tz_localize(None)
    assert last[silent["instrument_id"]] < stop
    assert any(last[u] > stop + pd.Timedelta(days=20) for u in site_units if u != silent["instrument_id"])
    aborted = checks.groupby("instrument_id")["outcome"].apply(lambda s: (s == "aborted").mean())
    assert aborted[faults["elevated_aborts"]["instrument_id"]] > 5 * max(aborted.median(), 0.005)


def test_heater_fault_follows_the_dubowski_relation(checks, truth):
    heater = next(f for f in truth["faults"] if f["kind"] == "heater_fault")
    rows = checks[(checks["instrument_id"] == heater["instrument_id"]) & checks["outcome"].isin(["pass", "fail"])
                  & (checks["check_type"] != "verification")]
    hot = rows[rows["simulator_temp_c"] > 34.4]
    normal = rows[rows["simulator_temp_c"] < 34.2]
    assert len(hot) > 30 and hot["simulator_temp_c"].between(34.45, 35.2).all()
    ratio = (hot["measured"] / hot["target"]).mean() / (normal["measured"] / normal["target"]).mean()
    # Dubowski (1979): headspace ethanol over a simulator solution, K proportional to exp(0.06583 T)
    predicted = math.exp(0.06583 * (hot["simulator_temp_c"].mean() - normal["simulator_temp_c"].mean()))
    assert ratio == pytest.approx(predicted, abs=0.02)
    # Dubowski (1979): about +6.8 % vapour concentration per +1 deg C near 34 C
    assert math.exp(DUBOWSKI_COEFFICIENT) - 1 == pytest.approx(0.068, abs=0.001)


def test_dry_gas_readings_follow_site_pressure(fleet, checks):
    sites = pd.read_csv(fleet.out_dir / "reference" / "sites.csv").set_index("site_id")
    dry = checks[checks["pressure_kpa"].notna() & checks["outcome"].isin(["pass", "fail"])]
    nominal = standard_pressure_kpa(sites.loc[dry["site_id"], "elevation_m"].to_numpy())
    # ICAO standard atmosphere (ISO 2533): weather moves pressure a few kPa around the nominal value
    assert np.abs(dry["pressure_kpa"].to_numpy() - nominal).max() < 6.0
    # Ideal gas: reading / target ~ P / 101.325 (domain.md, dry gas)
    slope = np.polyfit(dry["pressure_kpa"] / 101.325, dry["measured"] / dry["target"], 1)[0]
    assert slope == pytest.approx(1.0, abs=0.1)
    assert (sites["elevation_m"] >= 1600).any() and (sites["elevation_m"] <= 2400).any()


def test_control_daily_verification_mix(checks):
    ver = checks[checks["check_type"] == "verification"]
    assert set(np.round(ver["target"], 3)) == {0.040, 0.080, 0.150}
    per_unit_month = checks.groupby([checks["instrument_id"], checks["measured_at"].dt.to_period("M")]).size()
    assert 50 < per_unit_month.median() < 120
    assert set(checks["operator_id"].str.fullmatch(r"OP-\d{4}")) == {True}
    # no accidental exact duplicates: a unit never logs two checks in the same second
    assert not checks.duplicated(["instrument_id", "measured_at"]).any()


def test_demo_data_command(tmp_path):
    runner = CliRunner()
    result = runner.invoke(main, ["demo-data", "--out", str(tmp_path / "d"), "--instruments", "12", "--months", "1"])
    assert result.exit_code == 0, result.output
    assert "checks of 12 units" in result.output
    assert (tmp_path / "d" / "manifest.json").is_file()
    bad = runner.invoke(main, ["demo-data", "--out", str(tmp_path / "e"), "--instruments", "3"])
    assert bad.exit_code != 0
    assert "--instruments must be at least 12" in bad.output
